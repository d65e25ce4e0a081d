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
//! * The smallest swing over chords whose currents stay above a floor ([`min_swing_above`]),
//!   with the decade it came from and the error that relative current errors can put on it
//!   ([`Swing::rounding`]), so a caller can hold it against the thermal limit
//!   `ln(10) kT/q` (Sze and Ng 2007, ch. 6), and the swing of every such chord against its
//!   current ([`swing_table`]).
//! * Threshold by the second-derivative method: the `V_GS` of the largest `dg_m/dV_GS`
//!   ([`threshold_second_derivative`]; Schroder 2006, ch. 4), with both derivatives smoothed
//!   by least-squares lines over `2 half + 1` samples ([`smoothed_slopes`]).
//! * Straight-line fits with standard errors ([`fit_line`]), and the Y-function method
//!   ([`y_function`]; G. Ghibaudo, "New method for the extraction of MOSFET parameters",
//!   Electron. Lett. 24, 543, 1988): in the linear region
//!   `I_D = β V_DS (V_GS - V_T) / (1 + θ (V_GS - V_T))` with `β = μ_0 C W/L`, so
//!   `g_m = β V_DS / (1 + θ (V_GS - V_T))²` and `Y = I_D / sqrt(g_m) = sqrt(β V_DS) (V_GS - V_T)`
//!   is a straight line whatever `θ`: its slope gives `β`, its intercept `V_T`, and `θ` follows
//!   from `β V_DS (V_GS - V_T) / I_D - 1 = θ (V_GS - V_T)`.

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

/// The point of largest transconductance of a curve and its tangent.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MaxGm {
    /// Index of the sample (an interior one: `1..len - 1`).
    pub index: usize,
    /// `V_GS` of the sample (V).
    pub vgs: f64,
    /// `dI_D/dV_GS` there, central difference (S).
    pub gm: f64,
    /// `V_GS` intercept of the tangent there (V).
    pub intercept: f64,
}

/// The largest `|g_m|` of the curve, with its tangent's `V_GS` intercept. A flat maximum (all
/// within a relative 1e-9, as in the linear region of a square law) is taken at its first
/// sample, so rounding does not choose the point.
pub fn max_gm(vgs: &[f64], id: &[f64]) -> Option<MaxGm> {
    let g = slopes(vgs, id);
    let top = g.iter().map(|p| p.1.abs()).fold(0.0f64, f64::max);
    if !(top > 0.0 && top.is_finite()) {
        return None;
    }
    let k = g.iter().position(|p| p.1.abs() >= top * (1.0 - 1e-9))?;
    let (v, gm) = g[k];
    Some(MaxGm {
        index: k + 1,
        vgs: v,
        gm,
        intercept: v - id[k + 1] / gm,
    })
}

/// As [`max_gm`] with `g_m` by [`smoothed_slopes`] over `2 half + 1` samples (for measured,
/// noisy curves); the tangent passes through the least-squares line's value at the sample.
pub fn max_gm_smoothed(vgs: &[f64], id: &[f64], half: usize) -> Option<MaxGm> {
    let g = smoothed_slopes(vgs, id, half);
    let &(index, gm) = g.iter().max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))?;
    if !(gm != 0.0 && gm.is_finite()) {
        return None;
    }
    let h = half.max(1);
    let fit = fit_line(&vgs[index - h..=index + h], &id[index - h..=index + h])?;
    let at = fit.intercept + fit.slope * vgs[index];
    Some(MaxGm {
        index,
        vgs: vgs[index],
        gm,
        intercept: vgs[index] - at / gm,
    })
}

/// `V_GS` intercept of the tangent at the largest `|g_m|` (linear-region extrapolation); see
/// [`max_gm`].
pub fn threshold_max_gm(vgs: &[f64], id: &[f64]) -> Option<f64> {
    max_gm(vgs, id).map(|m| m.intercept)
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

/// `I_D` at `v` interpolated linearly in `log10 |I_D|` between two samples of one sign (exact
/// for an exponential subthreshold curve), linearly in `I_D` otherwise; `vgs` increasing.
pub fn current_at_log(vgs: &[f64], id: &[f64], v: f64) -> Option<f64> {
    let n = vgs.len().min(id.len());
    if n < 2 || v < vgs[0] || v > vgs[n - 1] {
        return None;
    }
    if let Some(k) = vgs[..n].iter().position(|&x| x == v) {
        return Some(id[k]);
    }
    let k = vgs[..n].partition_point(|&x| x <= v).clamp(1, n - 1);
    let (a, b, ia, ib) = (vgs[k - 1], vgs[k], id[k - 1], id[k]);
    if ia * ib > 0.0 {
        let t = (v - a) / (b - a);
        let l = ia.abs().log10() + t * (ib.abs().log10() - ia.abs().log10());
        Some(ia.signum() * 10f64.powf(l))
    } else {
        current_at(vgs, id, v)
    }
}

/// A subthreshold swing taken from one chord of a sampled curve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Swing {
    /// The swing (mV/decade).
    pub mv_per_dec: f64,
    /// `V_GS` of the chord's middle sample (V).
    pub vgs: f64,
    /// `|I_D|` at the middle sample (A); the decade the swing came from contains it.
    pub current: f64,
    /// Decades of current the chord spans (> 0).
    pub decades: f64,
}

impl Swing {
    /// Relative error of this swing if each end current may be off by the fraction `rel`:
    /// `2 log10(1 + rel) / decades`. Read off a chord, a swing is never smaller than the
    /// curve's true smallest slope (mean-value theorem), so anything below a physical bound
    /// by more than this is not rounding.
    pub fn rounding(&self, rel: f64) -> f64 {
        2.0 * (1.0 + rel).log10() / self.decades
    }
}

/// Smallest swing over the chords `(k - 1, k + 1)` of a curve ordered from its off end towards
/// its on end (`vgs` increasing for an n branch, decreasing for a p branch), taking only
/// chords along which `|I_D|` rises and whose three samples all have `|I_D| >= floor`.
pub fn min_swing_above(vgs: &[f64], id: &[f64], floor: f64) -> Option<Swing> {
    swing_table(vgs, id, floor)
        .into_iter()
        .min_by(|a, b| a.mv_per_dec.total_cmp(&b.mv_per_dec))
}

/// The swing of every chord `(k - 1, k + 1)` that [`min_swing_above`] would consider, in curve
/// order: the swing against the current (each at its middle sample).
pub fn swing_table(vgs: &[f64], id: &[f64], floor: f64) -> Vec<Swing> {
    let n = vgs.len().min(id.len());
    let l = log_current(&id[..n]);
    let lf = floor.abs().log10();
    (1..n.saturating_sub(1))
        .filter(|&k| (k - 1..=k + 1).all(|j| l[j].is_finite() && l[j] >= lf))
        .filter_map(|k| {
            let decades = l[k + 1] - l[k - 1];
            let dv = (vgs[k + 1] - vgs[k - 1]).abs();
            (decades > 0.0 && dv > 0.0).then(|| Swing {
                mv_per_dec: 1e3 * dv / decades,
                vgs: vgs[k],
                current: id[k].abs(),
                decades,
            })
        })
        .collect()
}

/// Slope of the least-squares line through samples `k - half ..= k + half` of `y(x)`, for every
/// `k` with a full window, as `(k, slope)`. `half = 1` on evenly spaced samples is the central
/// difference; a wider window smooths noise at the cost of resolution.
pub fn smoothed_slopes(x: &[f64], y: &[f64], half: usize) -> Vec<(usize, f64)> {
    let n = x.len().min(y.len());
    let half = half.max(1);
    (half..n.saturating_sub(half))
        .filter_map(|k| {
            let fit = fit_line(&x[k - half..=k + half], &y[k - half..=k + half])?;
            Some((k, fit.slope))
        })
        .collect()
}

/// The threshold by the second-derivative method.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SecondDerivative {
    /// `V_GS` of the largest `dg_m/dV_GS` (V), refined by the vertex of the parabola through
    /// the largest sample and its neighbours.
    pub vth: f64,
    /// The largest `dg_m/dV_GS` (S/V).
    pub peak: f64,
}

/// `V_GS` of the largest `dg_m/dV_GS` of a curve with `vgs` increasing, both derivatives taken
/// by [`smoothed_slopes`] over `2 half + 1` samples.
pub fn threshold_second_derivative(
    vgs: &[f64],
    id: &[f64],
    half: usize,
) -> Option<SecondDerivative> {
    let g = smoothed_slopes(vgs, id, half);
    let gv: Vec<f64> = g.iter().map(|p| vgs[p.0]).collect();
    let gm: Vec<f64> = g.iter().map(|p| p.1).collect();
    let d = smoothed_slopes(&gv, &gm, half);
    let (j, &(k, peak)) = d
        .iter()
        .enumerate()
        .max_by(|a, b| a.1 .1.total_cmp(&b.1 .1))?;
    if !(peak > 0.0 && peak.is_finite()) {
        return None;
    }
    let x = gv[k];
    let vth = match (j.checked_sub(1).and_then(|i| d.get(i)), d.get(j + 1)) {
        (Some(&(ka, a)), Some(&(kb, b))) if kb == k + 1 && ka + 1 == k => {
            // Vertex of the parabola through three samples, with the spacing of the window.
            let (xa, xb) = (gv[ka], gv[kb]);
            let curv = (b - peak) / (xb - x) - (peak - a) / (x - xa);
            if curv < 0.0 {
                let num = (x - xa).powi(2) * (peak - b) - (x - xb).powi(2) * (peak - a);
                let den = (x - xa) * (peak - b) - (x - xb) * (peak - a);
                if den != 0.0 {
                    x - 0.5 * num / den
                } else {
                    x
                }
            } else {
                x
            }
        }
        _ => x,
    };
    Some(SecondDerivative { vth, peak })
}

/// A least-squares straight line `y = intercept + slope x`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LineFit {
    /// Slope.
    pub slope: f64,
    /// Intercept at `x = 0`.
    pub intercept: f64,
    /// Standard error of the slope (`None` with two points: no residual to estimate it from).
    pub slope_se: Option<f64>,
    /// Standard error of the intercept.
    pub intercept_se: Option<f64>,
    /// Coefficient of determination.
    pub r_squared: f64,
    /// Number of points.
    pub points: usize,
}

impl LineFit {
    /// Where the line crosses `y = 0`.
    pub fn x_intercept(&self) -> f64 {
        -self.intercept / self.slope
    }
}

/// Ordinary least squares through `(x, y)`; standard errors from the residual variance with
/// `n - 2` degrees of freedom (any statistics text, e.g. N. R. Draper and H. Smith, Applied
/// Regression Analysis, 3rd ed., 1998, ch. 1). `None` with fewer than two points or all `x`
/// equal.
pub fn fit_line(x: &[f64], y: &[f64]) -> Option<LineFit> {
    let n = x.len().min(y.len());
    if n < 2 {
        return None;
    }
    let nf = n as f64;
    let (mx, my) = (
        x[..n].iter().sum::<f64>() / nf,
        y[..n].iter().sum::<f64>() / nf,
    );
    let sxx: f64 = x[..n].iter().map(|v| (v - mx).powi(2)).sum();
    let sxy: f64 = x[..n]
        .iter()
        .zip(&y[..n])
        .map(|(a, b)| (a - mx) * (b - my))
        .sum();
    let syy: f64 = y[..n].iter().map(|v| (v - my).powi(2)).sum();
    if sxx.is_nan() || sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let ssr: f64 = x[..n]
        .iter()
        .zip(&y[..n])
        .map(|(a, b)| (b - intercept - slope * a).powi(2))
        .sum();
    let (slope_se, intercept_se) = if n > 2 {
        let s2 = ssr / (nf - 2.0);
        (
            Some((s2 / sxx).sqrt()),
            Some((s2 * (1.0 / nf + mx * mx / sxx)).sqrt()),
        )
    } else {
        (None, None)
    };
    Some(LineFit {
        slope,
        intercept,
        slope_se,
        intercept_se,
        r_squared: if syy > 0.0 { 1.0 - ssr / syy } else { 1.0 },
        points: n,
    })
}

/// The Y-function extraction of one linear-region transfer curve (see the module doc).
#[derive(Clone, Debug, PartialEq)]
pub struct YFunction {
    /// The line `Y(V_GS)` (Y in sqrt(A V)).
    pub fit: LineFit,
    /// Threshold: the line's `V_GS` intercept (V).
    pub vth: f64,
    /// `β V_DS = slope²` (A/V).
    pub beta_vds: f64,
    /// Mobility attenuation `θ` (1/V), by least squares through the origin of
    /// `β V_DS (V_GS - V_T) / I_D - 1` against `V_GS - V_T`.
    pub theta: f64,
    /// The samples of the fit, `(V_GS, Y)`.
    pub points: Vec<(f64, f64)>,
}

/// Strong inversion for the Y-function: from where `g_m` first reaches this fraction of its
/// maximum (the maximum itself where `g_m` falls after it, as mobility attenuation makes it).
pub const Y_STRONG_INVERSION_GM: f64 = 0.9;

/// The Y-function method on a curve with `vgs` increasing and `id` positive above threshold:
/// `g_m` by [`smoothed_slopes`] over `2 half + 1` samples, the line fitted over strong
/// inversion, taken as the samples from `half` past where `g_m` first reaches
/// [`Y_STRONG_INVERSION_GM`] of its maximum to the end (at least three).
pub fn y_function(vgs: &[f64], id: &[f64], half: usize) -> Option<YFunction> {
    let g = smoothed_slopes(vgs, id, half);
    let max = g.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
    let top = g.iter().find(|p| p.1 >= Y_STRONG_INVERSION_GM * max)?.0;
    let used: Vec<(usize, f64)> = g
        .iter()
        .copied()
        .filter(|&(k, gm)| k >= top + half.max(1) && gm > 0.0 && id[k] > 0.0)
        .collect();
    if used.len() < 3 {
        return None;
    }
    let pts: Vec<(f64, f64)> = used
        .iter()
        .map(|&(k, gm)| (vgs[k], id[k] / gm.sqrt()))
        .collect();
    let xs: Vec<f64> = pts.iter().map(|p| p.0).collect();
    let ys: Vec<f64> = pts.iter().map(|p| p.1).collect();
    let fit = fit_line(&xs, &ys)?;
    if fit.slope.is_nan() || fit.slope <= 0.0 {
        return None;
    }
    let vth = fit.x_intercept();
    let beta_vds = fit.slope * fit.slope;
    let (mut num, mut den) = (0.0, 0.0);
    for &(k, _) in &used {
        let x = vgs[k] - vth;
        num += x * (beta_vds * x / id[k] - 1.0);
        den += x * x;
    }
    Some(YFunction {
        fit,
        vth,
        beta_vds,
        theta: if den > 0.0 { num / den } else { 0.0 },
        points: pts,
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
        // A flat g_m (a straight line) is taken at its first interior sample.
        let line: Vec<f64> = v.iter().map(|x| 1e-4 * (x - 0.1)).collect();
        let m = max_gm(&v, &line).unwrap();
        assert_eq!(m.index, 1);
        assert!((m.intercept - 0.1).abs() < 1e-12);
        let m = max_gm_smoothed(&v, &line, 3).unwrap();
        assert!((m.intercept - 0.1).abs() < 1e-12 && (m.gm - 1e-4).abs() < 1e-15);
    }

    #[test]
    fn swing_above_a_floor_comes_from_the_decades_above_it() {
        // 80 mV/decade below 1e-9 A and exactly 60 mV/decade from there to 1e-6 A.
        let v: Vec<f64> = (0..=60).map(|i| i as f64 * 0.01).collect();
        let i: Vec<f64> = v
            .iter()
            .map(|&x| {
                if x < 0.3 {
                    1e-9 * 10f64.powf((x - 0.3) / 0.080)
                } else {
                    1e-9 * 10f64.powf((x - 0.3) / 0.060)
                }
            })
            .collect();
        let s = min_swing_above(&v, &i, 1e-12).unwrap();
        assert!((s.mv_per_dec - 60.0).abs() < 1e-9, "{s:?}");
        assert!(s.current >= 1e-9 && s.vgs >= 0.3);
        assert!((s.decades - 0.02 / 0.060).abs() < 1e-9);
        // Above a floor of 5e-5 A only the top two samples (6.8e-5 and 1e-4 A) remain, and
        // two samples are no chord.
        assert_eq!(min_swing_above(&v, &i, 5e-5), None);
        assert!(min_swing_above(&v, &i, 4e-5).is_some());
        // A p branch ordered from its off end: V_GS falling, current rising.
        let vr: Vec<f64> = v.iter().rev().map(|x| -x).collect();
        let ir: Vec<f64> = i.iter().rev().map(|x| -x).collect();
        let p = min_swing_above(&vr, &ir, 1e-12);
        assert_eq!(p, None, "read from the on end, the current falls: no chord");
        let vp: Vec<f64> = v.iter().map(|x| -x).collect();
        let ip: Vec<f64> = i.iter().map(|x| -x).collect();
        let p = min_swing_above(&vp, &ip, 1e-12).unwrap();
        assert!((p.mv_per_dec - 60.0).abs() < 1e-9);
        // Two 1e-3 relative errors over a third of a decade move the swing by 0.26 %.
        assert!((s.rounding(1e-3) - 2.0 * 1.001f64.log10() * 3.0).abs() < 1e-12);
    }

    /// Linear-region square law with mobility attenuation, zero below `vt`.
    fn attenuated(vt: f64, beta_vds: f64, theta: f64) -> (Vec<f64>, Vec<f64>) {
        let v: Vec<f64> = (0..=1000).map(|i| i as f64 * 1e-3).collect();
        let i = v
            .iter()
            .map(|&x| {
                let o = (x - vt).max(0.0);
                beta_vds * o / (1.0 + theta * o)
            })
            .collect();
        (v, i)
    }

    #[test]
    fn y_function_recovers_beta_threshold_and_theta() {
        // Ghibaudo, Electron. Lett. 24, 543 (1988): Y = sqrt(β V_DS) (V_GS - V_T) exactly.
        let (v, i) = attenuated(0.3, 2e-5, 0.4);
        let y = y_function(&v, &i, 2).unwrap();
        assert!((y.vth - 0.3).abs() < 1e-5, "{y:?}");
        assert!((y.beta_vds / 2e-5 - 1.0).abs() < 1e-4, "{}", y.beta_vds);
        assert!((y.theta - 0.4).abs() < 1e-3, "{}", y.theta);
        assert!(y.fit.r_squared > 1.0 - 1e-9);
    }

    #[test]
    fn second_derivative_peaks_at_the_threshold_of_a_ramp() {
        // I_D = β V_DS (V_GS - V_T) above V_T, 0 below: dg_m/dV_GS is a step's derivative at
        // V_T, which a symmetric smoothing keeps centred (Schroder 2006, ch. 4).
        let (v, i) = attenuated(0.437, 1e-5, 0.0);
        for half in [1, 2, 4] {
            let t = threshold_second_derivative(&v, &i, half).unwrap();
            assert!((t.vth - 0.437).abs() < 1e-9, "{half}: {t:?}");
        }
        // Between samples: within half a step.
        let (v, i) = attenuated(0.4375, 1e-5, 0.0);
        let t = threshold_second_derivative(&v, &i, 2).unwrap();
        assert!((t.vth - 0.4375).abs() < 5e-4, "{t:?}");
    }

    #[test]
    fn line_fit_standard_errors() {
        // About y = 1 + 2x with alternating residuals, against the textbook formulas (Draper
        // and Smith 1998, ch. 1).
        let x = [0.0, 1.0, 2.0, 3.0];
        let y = [1.1, 2.9, 5.1, 6.9];
        let f = fit_line(&x, &y).unwrap();
        let sxx = 5.0;
        let slope = (-1.5 * 1.1 - 0.5 * 2.9 + 0.5 * 5.1 + 1.5 * 6.9) / sxx;
        assert!((f.slope - slope).abs() < 1e-12);
        let ssr: f64 = x
            .iter()
            .zip(&y)
            .map(|(a, b)| (b - f.intercept - f.slope * a).powi(2))
            .sum();
        let s2 = ssr / 2.0;
        assert!((f.slope_se.unwrap() - (s2 / sxx).sqrt()).abs() < 1e-12);
        assert!((f.intercept_se.unwrap() - (s2 * (0.25 + 2.25 / sxx)).sqrt()).abs() < 1e-12);
        assert_eq!(fit_line(&x[..2], &y[..2]).unwrap().slope_se, None);
        assert_eq!(fit_line(&[1.0, 1.0], &[1.0, 2.0]), None);
    }

    #[test]
    fn log_interpolation_is_exact_on_an_exponential() {
        let v = [0.0, 0.1, 0.2];
        let i = [1e-12, 1e-10, -1e-9];
        assert!((current_at_log(&v, &i, 0.05).unwrap() / 1e-11 - 1.0).abs() < 1e-12);
        assert_eq!(current_at_log(&v, &i, 0.1), Some(1e-10));
        // Across a sign change it falls back to a straight line.
        assert!((current_at_log(&v, &i, 0.15).unwrap() - (1e-10 - 1e-9) / 2.0).abs() < 1e-22);
        assert_eq!(current_at_log(&v, &i, 0.25), None);
    }
}
