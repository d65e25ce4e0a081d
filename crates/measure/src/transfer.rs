//! Points of a transfer curve `v_out(v_in)`: switching threshold and unity-gain points.
//!
//! * `V_M`: the input where `v_out = v_in` (switching threshold).
//! * `V_IL`, `V_IH`: the lowest and highest inputs where the slope `dv_out/dv_in = -1`
//!   (unity-gain definition of the input logic levels, as in S.-M. Kang and Y. Leblebici,
//!   *CMOS Digital Integrated Circuits*, 3rd ed., 2003, ch. 5).
//!
//! The slope is taken by central differences on the samples (which need not be evenly
//! spaced) and its crossings of -1 are interpolated linearly.

/// Switching threshold and unity-gain points of an inverting transfer curve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TransferPoints {
    /// Switching threshold `V_M` (input where output equals input).
    pub vm: f64,
    /// Lower unity-gain input `V_IL`.
    pub vil: f64,
    /// Upper unity-gain input `V_IH`.
    pub vih: f64,
    /// Most negative slope seen (the peak gain, as a negative number).
    pub gain_min: f64,
}

/// Finds `V_M`, `V_IL` and `V_IH` of an inverting curve sampled at increasing `vin`.
/// Returns `None` if the curve never crosses `v_out = v_in` or its slope never reaches -1.
pub fn transfer_points(vin: &[f64], vout: &[f64]) -> Option<TransferPoints> {
    let n = vin.len().min(vout.len());
    if n < 3 {
        return None;
    }
    let mut vm = None;
    for k in 0..n - 1 {
        let (a, b) = (vout[k] - vin[k], vout[k + 1] - vin[k + 1]);
        if a >= 0.0 && b < 0.0 {
            vm = Some(vin[k] + a * (vin[k + 1] - vin[k]) / (a - b));
            break;
        }
    }
    let slope: Vec<(f64, f64)> = (1..n - 1)
        .map(|k| {
            (
                vin[k],
                (vout[k + 1] - vout[k - 1]) / (vin[k + 1] - vin[k - 1]),
            )
        })
        .collect();
    let gain_min = slope.iter().map(|s| s.1).fold(f64::INFINITY, f64::min);
    let cross = |w: &[(f64, f64)]| w[0].0 + (-1.0 - w[0].1) * (w[1].0 - w[0].0) / (w[1].1 - w[0].1);
    let vil = slope
        .windows(2)
        .find(|w| w[0].1 > -1.0 && w[1].1 <= -1.0)
        .map(cross)?;
    let vih = slope
        .windows(2)
        .rev()
        .find(|w| w[0].1 <= -1.0 && w[1].1 > -1.0)
        .map(cross)?;
    Some(TransferPoints {
        vm: vm?,
        vil,
        vih,
        gain_min,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A synthetic curve with known points: v_out = 0.5 - 2 tanh(2 (v_in - 0.5)) / 4 ... chosen so
    /// that the slope -tanh' is -1 where sech^2(2u) = 1, i.e. only at u = 0 (peak gain exactly -1).
    /// Instead use v_out = 0.5 - atan(a u)/π·... keep it simple: a cubic with known roots.
    #[test]
    fn cubic_curve_points() {
        // v_out = 0.5 - 3 u + 8 u^3 on u = v_in - 0.5 in [-0.25, 0.25]... slope -3 + 24 u^2 = -1
        // at u = ±1/sqrt(12).
        let vin: Vec<f64> = (0..=2000).map(|i| 0.2 + 0.6 * i as f64 / 2000.0).collect();
        let vout: Vec<f64> = vin
            .iter()
            .map(|&x| {
                let u: f64 = x - 0.5;
                0.5 - 3.0 * u + 8.0 * u.powi(3)
            })
            .collect();
        let p = transfer_points(&vin, &vout).unwrap();
        let u = 1.0 / 12f64.sqrt();
        assert!((p.vm - 0.5).abs() < 1e-9);
        assert!((p.vil - (0.5 - u)).abs() < 1e-6, "{p:?}");
        assert!((p.vih - (0.5 + u)).abs() < 1e-6);
        assert!((p.gain_min + 3.0).abs() < 1e-3);
    }
}

/// Every static figure of an inverting transfer curve, each with a named definition.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TransferMetrics {
    /// Switching threshold V_M: the input where `v_out = v_in`.
    pub vm: f64,
    /// Output high level V_OH: the output at the lowest input of the sweep.
    pub voh: f64,
    /// Output low level V_OL: the output at the highest input of the sweep.
    pub vol: f64,
    /// V_IL: the lowest input where the slope is -1.
    pub vil: f64,
    /// V_IH: the highest input where the slope is -1.
    pub vih: f64,
    /// High noise margin by the unity-gain definition, `NM_H = V_OH - V_IH`.
    pub nmh: f64,
    /// Low noise margin by the unity-gain definition, `NM_L = V_IL - V_OL`.
    pub nml: f64,
    /// Peak gain `max |dv_out/dv_in|`.
    pub gain_max: f64,
}

/// The definitions behind [`TransferMetrics`], for reports.
pub const DEFINITIONS: &[(&str, &str)] = &[
    ("vm", "input where v_out = v_in"),
    ("voh", "output at the lowest input of the sweep"),
    ("vol", "output at the highest input of the sweep"),
    ("vil", "lowest input where dv_out/dv_in = -1"),
    ("vih", "highest input where dv_out/dv_in = -1"),
    ("nmh", "unity-gain noise margin V_OH - V_IH"),
    ("nml", "unity-gain noise margin V_IL - V_OL"),
    ("snm", "side of the largest square in the smaller lobe of the butterfly (Seevinck, List, Lohstroh 1987)"),
    ("gain_max", "largest |dv_out/dv_in| by central differences on the sweep's own points: where the devices have almost no output conductance it is limited by the step and grows as the step shrinks, so read it as a lower bound of a very large gain"),
];

/// The metrics of an inverting curve sampled at increasing `vin`, or `None` if it has no
/// switching threshold or unity-gain points.
pub fn transfer_metrics(vin: &[f64], vout: &[f64]) -> Option<TransferMetrics> {
    let p = transfer_points(vin, vout)?;
    let n = vin.len().min(vout.len());
    let (voh, vol) = (vout[0], vout[n - 1]);
    Some(TransferMetrics {
        vm: p.vm,
        voh,
        vol,
        vil: p.vil,
        vih: p.vih,
        nmh: voh - p.vih,
        nml: p.vil - vol,
        gain_max: -p.gain_min,
    })
}
