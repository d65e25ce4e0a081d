//! Device figures from a transfer characteristic `I_D(V_GS)` at fixed `V_DS`.
//!
//! * Subthreshold swing `SS = dV_GS / d log10(I_D)` (mV/decade): its minimum over the curve and
//!   its value at a given current (S. M. Sze and K. K. Ng, Physics of Semiconductor Devices,
//!   3rd ed., 2007).
//! * Threshold voltage by the constant-current definition (the `V_GS` where `I_D` reaches a
//!   given current) and by maximum-transconductance extrapolation (the `V_GS` intercept of the
//!   tangent at the point of largest `g_m`); the result says which (D. K. Schroder,
//!   Semiconductor Material and Device Characterization, 3rd ed., 2006, ch. 4).
//! * Currents interpolated at given biases (for I_on and I_off) and transconductance.

/// How a threshold voltage was obtained.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ThresholdMethod {
    /// `V_GS` where the current reaches a given value.
    ConstantCurrent,
    /// Intercept of the tangent at the largest transconductance.
    MaxTransconductance,
}

/// Central-difference slope of `y(x)` at every interior sample.
fn slopes(x: &[f64], y: &[f64]) -> Vec<(f64, f64)> {
    (1..x.len().min(y.len()).saturating_sub(1))
        .map(|k| (x[k], (y[k + 1] - y[k - 1]) / (x[k + 1] - x[k - 1])))
        .collect()
}

/// `|I|` in log10, so n- and p-type curves are handled alike; `None` where the current is 0.
fn log_current(i: &[f64]) -> Vec<f64> {
    i.iter()
        .map(|v| {
            if *v != 0.0 {
                v.abs().log10()
            } else {
                f64::NEG_INFINITY
            }
        })
        .collect()
}

/// Smallest subthreshold swing over the curve (mV/decade), with the `V_GS` where it occurs.
pub fn min_swing(vgs: &[f64], id: &[f64]) -> Option<(f64, f64)> {
    let l = log_current(id);
    slopes(vgs, &l)
        .into_iter()
        .filter(|(_, s)| s.is_finite() && s.abs() > 0.0)
        .map(|(v, s)| (1e3 / s.abs(), v))
        .min_by(|a, b| a.0.total_cmp(&b.0))
}

/// Subthreshold swing (mV/decade) where `|I_D|` crosses `current`.
pub fn swing_at(vgs: &[f64], id: &[f64], current: f64) -> Option<f64> {
    let l = log_current(id);
    let target = current.abs().log10();
    let s = slopes(vgs, &l);
    s.windows(2).find_map(|w| {
        let k = vgs.iter().position(|&v| v == w[0].0)?;
        let (a, b) = (l[k], l[k + 1]);
        ((a - target) * (b - target) <= 0.0 && a.is_finite())
            .then(|| 1e3 / (0.5 * (w[0].1 + w[1].1)).abs())
    })
}

/// `V_GS` where `|I_D|` first reaches `current` (interpolated in log current).
pub fn threshold_constant_current(vgs: &[f64], id: &[f64], current: f64) -> Option<f64> {
    let l = log_current(id);
    let target = current.abs().log10();
    (0..l.len().saturating_sub(1)).find_map(|k| {
        let (a, b) = (l[k], l[k + 1]);
        (a.is_finite() && b.is_finite() && (a - target) * (b - target) <= 0.0 && a != b)
            .then(|| vgs[k] + (target - a) * (vgs[k + 1] - vgs[k]) / (b - a))
    })
}

/// `V_GS` intercept of the tangent at the largest `|g_m|` (linear-region extrapolation).
pub fn threshold_max_gm(vgs: &[f64], id: &[f64]) -> Option<f64> {
    let g = slopes(vgs, id);
    let (k, &(v, gm)) = g
        .iter()
        .enumerate()
        .max_by(|a, b| a.1 .1.abs().total_cmp(&b.1 .1.abs()))?;
    if gm == 0.0 {
        return None;
    }
    Some(v - id[k + 1] / gm)
}

/// `I_D` at `v` by linear interpolation (for I_on, I_off at given biases).
pub fn current_at(vgs: &[f64], id: &[f64], v: f64) -> Option<f64> {
    let n = vgs.len().min(id.len());
    if n < 2 || v < vgs[0] || v > vgs[n - 1] {
        return None;
    }
    let k = vgs.partition_point(|&x| x <= v).clamp(1, n - 1);
    let (a, b) = (vgs[k - 1], vgs[k]);
    Some(if b > a {
        id[k - 1] + (id[k] - id[k - 1]) * (v - a) / (b - a)
    } else {
        id[k]
    })
}

/// Transconductance `dI_D/dV_GS` (or output conductance, given `I_D(V_DS)`) at `v`.
pub fn slope_at(x: &[f64], y: &[f64], v: f64) -> Option<f64> {
    let s = slopes(x, y);
    let k = s.partition_point(|p| p.0 <= v);
    match (k.checked_sub(1).and_then(|i| s.get(i)), s.get(k)) {
        (Some(a), Some(b)) if b.0 > a.0 => Some(a.1 + (b.1 - a.1) * (v - a.0) / (b.0 - a.0)),
        (Some(a), _) => Some(a.1),
        (None, Some(b)) => Some(b.1),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A synthetic curve: exponential below 0.2 V with exactly 60 mV/decade, square law above.
    fn curve() -> (Vec<f64>, Vec<f64>) {
        let v: Vec<f64> = (0..=400).map(|i| -0.4 + i as f64 * 0.0025).collect();
        let i: Vec<f64> = v
            .iter()
            .map(|&x| {
                if x < 0.2 {
                    1e-6 * 10f64.powf((x - 0.2) / 0.060)
                } else {
                    1e-6 + 1e-4 * (x - 0.2).powi(2)
                }
            })
            .collect();
        (v, i)
    }

    #[test]
    fn swing_and_thresholds_of_a_synthetic_curve() {
        let (v, i) = curve();
        let (ss, at) = min_swing(&v, &i).unwrap();
        assert!((ss - 60.0).abs() < 1e-6, "{ss}");
        assert!(at < 0.2);
        assert!((swing_at(&v, &i, 1e-9).unwrap() - 60.0).abs() < 1e-6);
        // 1e-9 A is reached 3 decades below 1e-6 A: 0.2 - 0.18 V.
        assert!((threshold_constant_current(&v, &i, 1e-9).unwrap() - 0.02).abs() < 1e-9);
        assert!((current_at(&v, &i, 0.5).unwrap() - (1e-6 + 1e-4 * 0.09)).abs() < 1e-9);
        // The largest g_m of the square-law part is at the top of the sweep: tangent intercept
        // of 1e-6 + 1e-4 (x - 0.2)^2 at x = 0.6 is 0.6 - I/g_m.
        let vt = threshold_max_gm(&v, &i).unwrap();
        let (x, il, g) = (
            0.5975,
            1e-6 + 1e-4 * (0.5975f64 - 0.2).powi(2),
            2e-4 * (0.5975 - 0.2),
        );
        assert!((vt - (x - il / g)).abs() < 1e-6, "{vt}");
        assert!((slope_at(&v, &i, 0.4).unwrap() - 2e-4 * 0.2).abs() < 1e-9);
    }
}
