//! The small-signal job: `analysis small_signal { source, output, from, to, per_decade, device }`.
//!
//! The circuit is solved for its DC operating point, linearised there and driven by a unit
//! small-signal value of `source` at each frequency of a logarithmic list
//! ([`lamina_engine::System::small_signal`]; the equations and signs are in the engine's
//! module documentation). Reported per frequency:
//! * the transfer function `H` from the source to the output node (V/V for a voltage source,
//!   V/A for a current source): magnitude, magnitude in dB (`20 log10 |H|`) and phase in
//!   degrees, unwrapped along the list (steps above 180° between neighbours are taken as turns);
//! * the input admittance the source sees (S): for a voltage source its small-signal current
//!   per volt, signed so that a resistor to ground is positive; for a current source the
//!   reciprocal of its voltage per ampere;
//! * the output admittance at the output node (S): the reciprocal of the voltage a unit current
//!   injected there produces with the source at zero.
//!
//! An admittance is absent where its impedance is zero (a node held by an ideal voltage
//! source) or so small that its reciprocal overflows.
//!
//! Figures of the transfer function ([`Figures`]), each interpolated linearly in dB against
//! `log10 f` between the two listed frequencies around it:
//! * low-frequency gain: `|H(0)|` from a solve with `ω = 0` (the conductances alone) where
//!   that solve succeeds and gives a nonzero gain; otherwise (a capacitor blocks DC, or a node
//!   floats in DC) `|H|` at the lowest frequency of the list, and the report says which;
//! * -3 dB bandwidth: the first frequency where `|H|` falls through that gain over `sqrt 2`.
//!   When `|H|` at the lowest listed frequency is already more than 0.1 dB away from the DC
//!   gain, the list starts above the flat band: the bandwidth is still read against the DC
//!   gain (so it is right when it lies in the list) and the report warns;
//! * peak: the largest `|H|` over the list and its frequency (a resonance shows here even
//!   when the printed table skips it);
//! * unity-gain frequency: the first frequency where `|H|` falls through 1 (a voltage source
//!   only, where `H` is a pure number).
//!
//! Each is absent, with the reason, where the list does not contain it.
//!
//! With `device`, the FET's common-source two-port admittances at the operating point, port 1
//! gate-source and port 2 drain-source (every other pin held at the source's potential): from
//! the device alone ([`lamina_engine::ElementLinearization::terminal_admittance`], contacts
//! and other internal unknowns eliminated exactly), `Y11 = ∂I_G/∂V_G`, `Y12 = ∂I_G/∂V_D`,
//! `Y21 = ∂I_D/∂V_G`, `Y22 = ∂I_D/∂V_D`, currents into the pins. The short-circuit current
//! gain is `h21 = Y21 / Y11`; `f_T` is where `|h21|` falls through 1 (log-log interpolation).
//! Beside it: `f · |h21(f)|` at the lowest frequency (the -20 dB/decade extrapolation) and
//! the quasi-static estimate `g_m / (2π C_gg)` with `g_m = ∂I_D/∂V_G` and
//! `C_gg = ∂Q_G/∂V_G` from [`lamina_engine::ElementLinearization::quasi_static`]. For a
//! quasi-static device without contacts `Y = G + jωC` exactly, so
//! `f_T = g_m / (2π sqrt(C_gg² - C_dg²))` (no gate conductance) and the extrapolation equals
//! `g_m / (2π C_gg)` while `ω C_dg << g_m`.

use lamina_engine::{
    c64, ElementId, OpParams, SmallSignalInfo, SmallSignalParams, SmallSignalSolver, SourceKind,
    System,
};
use lamina_measure::{crossings, Direction};
use lamina_netlist::{Analysis, Design};
use std::f64::consts::PI;

/// A figure of the transfer function, or why the list does not contain it.
pub type Figure = Result<f64, String>;

/// Figures of the transfer function (see the module documentation for the definitions).
#[derive(Clone, Debug, PartialEq)]
pub struct Figures {
    /// `|H(0)|`, or `|H|` at the lowest frequency where the DC solve gives none (V/V or V/A).
    pub low_frequency_gain: f64,
    /// Whether `low_frequency_gain` is the DC gain `|H(0)|`.
    pub from_dc: bool,
    /// A warning when the list starts above the flat band (`|H(f_low)|` more than 0.1 dB
    /// from the DC gain).
    pub flat_band_warning: Option<String>,
    /// Largest `|H|` over the list and its frequency (Hz).
    pub peak: (f64, f64),
    /// The same in dB.
    pub low_frequency_gain_db: f64,
    /// -3 dB bandwidth (Hz).
    pub bandwidth_3db: Figure,
    /// Unity-gain frequency (Hz).
    pub unity_gain: Figure,
}

/// Common-source two-port parameters of one FET.
#[derive(Clone, Debug, PartialEq)]
pub struct DeviceReport {
    /// The element.
    pub name: String,
    /// `[Y11, Y12, Y21, Y22]` per frequency (S).
    pub y: Vec<[c64; 4]>,
    /// `h21 = Y21 / Y11` per frequency.
    pub h21: Vec<c64>,
    /// Where `|h21|` falls through 1 (Hz).
    pub f_t: Figure,
    /// `f · |h21(f)|` at the lowest frequency (Hz).
    pub f_t_extrapolated: f64,
    /// `g_m = ∂I_D/∂V_G` at the operating point (S).
    pub g_m: f64,
    /// `C_gg = ∂Q_G/∂V_G` at the operating point (F).
    pub c_gg: f64,
    /// `g_m / (2π C_gg)` (Hz), absent when `C_gg` is not positive.
    pub f_t_quasi_static: Figure,
}

/// What a small-signal analysis produced.
#[derive(Clone, Debug, PartialEq)]
pub struct SmallSignalReport {
    /// The driving source.
    pub source: String,
    /// Its kind: the unit of the transfer function.
    pub source_kind: SourceKind,
    /// The output node.
    pub output: String,
    /// Frequencies (Hz).
    pub frequencies: Vec<f64>,
    /// Transfer function per frequency.
    pub transfer: Vec<c64>,
    /// `20 log10 |H|`.
    pub magnitude_db: Vec<f64>,
    /// Phase of `H` (degrees), unwrapped.
    pub phase_deg: Vec<f64>,
    /// Input admittance (S); `None` where the source sees a short.
    pub input_admittance: Vec<Option<c64>>,
    /// Output admittance (S); `None` where the output is held by an ideal source.
    pub output_admittance: Vec<Option<c64>>,
    /// Figures of the transfer function.
    pub figures: Figures,
    /// The FET's two-port parameters, if asked for.
    pub device: Option<DeviceReport>,
    /// What the solver did.
    pub info: SmallSignalInfo,
}

impl SmallSignalReport {
    /// The unit of the transfer function: `V/V` or `V/A`.
    pub fn transfer_unit(&self) -> &'static str {
        match self.source_kind {
            SourceKind::Voltage => "V/V",
            SourceKind::Current => "V/A",
        }
    }
}

/// `per_decade` frequencies per decade from `from`, `from · 10^(k / per_decade)`, up to `to`,
/// which closes the list (a last step shorter than the others is kept unless it is under a
/// thousandth of one).
pub fn frequency_list(from: f64, to: f64, per_decade: usize) -> Vec<f64> {
    let steps = (to.log10() - from.log10()) * per_decade as f64;
    let whole = (steps - 1e-3).ceil().max(1.0) as usize;
    // The first is `from` exactly; the others through logarithms, which cannot overflow.
    let mut f: Vec<f64> = std::iter::once(from)
        .chain((1..whole).map(|k| 10f64.powf(from.log10() + k as f64 / per_decade as f64)))
        .collect();
    f.push(to);
    f
}

/// Phases (degrees) with jumps above 180° between neighbours removed.
pub fn unwrapped_phase(h: &[c64]) -> Vec<f64> {
    let mut out: Vec<f64> = Vec::with_capacity(h.len());
    for z in h {
        let p = z.im.atan2(z.re).to_degrees();
        // A step of exactly 180° (a lossless resonance) is ambiguous: it is kept as it is.
        let p = match out.last() {
            Some(&prev) if (p - prev).abs() > 180.0 => p - 360.0 * ((p - prev) / 360.0).round(),
            _ => p,
        };
        out.push(p);
    }
    out
}

/// The first frequency where `db` falls through `level`, interpolated linearly in dB against
/// `log10 f`.
pub fn falling_through(f: &[f64], db: &[f64], level: f64) -> Option<f64> {
    let logf: Vec<f64> = f.iter().map(|v| v.log10()).collect();
    crossings(&logf, db, level, Direction::Falling)
        .first()
        .map(|x| 10f64.powf(*x))
}

fn db(z: c64) -> f64 {
    20.0 * z.norm().log10()
}

fn reciprocal(z: c64) -> Option<c64> {
    let y = c64::new(1.0, 0.0) / z;
    (y.re.is_finite() && y.im.is_finite()).then_some(y)
}

/// The figures of `h` over `f`, with the DC transfer `dc` where the circuit has one.
pub fn transfer_figures(f: &[f64], h: &[c64], kind: SourceKind, dc: Option<c64>) -> Figures {
    let mags: Vec<f64> = h.iter().map(|z| db(*z)).collect();
    let first = h.first().map_or(0.0, |z| z.norm());
    let dc = dc.map(|z| z.norm()).filter(|g| *g > 0.0 && g.is_finite());
    let (g0, from_dc) = match dc {
        Some(g) => (g, true),
        None => (first, false),
    };
    let g0_db = 20.0 * g0.log10();
    let flat_band_warning = match dc {
        Some(g) if first > 0.0 && (20.0 * (first / g).log10()).abs() > 0.1 => Some(format!(
            "|H| at {} is {:.2} dB from the DC gain: the list starts above the flat band; start \
             it lower for the whole response",
            crate::plot::engineering(f[0], "Hz"),
            20.0 * (first / g).log10()
        )),
        _ => None,
    };
    let peak = mags
        .iter()
        .zip(f)
        .fold((f64::NEG_INFINITY, f64::NAN), |acc, (&m, &fr)| {
            if m > acc.0 {
                (m, fr)
            } else {
                acc
            }
        });
    let peak = (10f64.powf(peak.0 / 20.0), peak.1);
    let top = f.last().copied().unwrap_or(0.0);
    let bandwidth_3db = if !(g0 > 0.0 && g0.is_finite()) {
        Err("the transfer function is zero at DC and at the lowest frequency".into())
    } else {
        let level = g0_db - 10.0 * 2f64.log10();
        let start = mags.iter().position(|&m| m > level);
        match start {
            None => Err(format!(
                "|H| is already more than 3 dB below the DC gain at {}",
                crate::plot::engineering(f[0], "Hz")
            )),
            Some(k) => falling_through(&f[k..], &mags[k..], level).ok_or_else(|| {
                format!(
                    "the magnitude stays above its low-frequency value - 3 dB up to {}",
                    crate::plot::engineering(top, "Hz")
                )
            }),
        }
    };
    let unity_gain = match kind {
        SourceKind::Current => Err(
            "the transfer function is an impedance (V/A); unity gain applies to a voltage source"
                .into(),
        ),
        SourceKind::Voltage if g0 <= 1.0 => Err("the low-frequency gain is at most 1".into()),
        SourceKind::Voltage => falling_through(f, &mags, 0.0).ok_or_else(|| {
            format!(
                "the gain stays above 1 up to {}",
                crate::plot::engineering(top, "Hz")
            )
        }),
    };
    Figures {
        low_frequency_gain: g0,
        from_dc,
        flat_band_warning,
        peak,
        low_frequency_gain_db: g0_db,
        bandwidth_3db,
        unity_gain,
    }
}

/// The transfer at `ω = 0` (the conductances alone), or `None` where that system is singular.
fn dc_transfer(
    sys: &System,
    x: &[f64],
    source: ElementId,
    output: lamina_engine::NodeId,
) -> Option<c64> {
    let (b, _) = sys.source_excitation(x, source).ok()?;
    let out = sys.node_unknown(output)?;
    let mut solver = SmallSignalSolver::new(sys, x, &SmallSignalParams::default()).ok()?;
    let mut xs = vec![c64::new(0.0, 0.0); sys.unknown_count()];
    solver.factor(sys, 0.0).ok()?;
    solver.solve(sys, 0.0, &b, &mut xs).ok()?;
    let h = xs[out];
    (h.re.is_finite() && h.im.is_finite()).then_some(h)
}

/// Common-source parameters of the FET `element` at the solution `x` over `f`.
fn device_report(
    sys: &System,
    x: &[f64],
    name: &str,
    element: ElementId,
    terminals: &[&str],
    f: &[f64],
) -> Result<DeviceReport, String> {
    let lin = sys
        .element_linearization(x, element)
        .map_err(|e| e.to_string())?;
    let pin = |p: &str| {
        terminals
            .iter()
            .position(|t| *t == p)
            .ok_or_else(|| format!("`{name}` has no {p} pin"))
    };
    let (d, g) = (pin("drain")?, pin("gate")?);
    let nt = lin.terminals;
    let singular =
        || format!("`{name}`: its internal equations are singular at the operating point");
    let mut y = Vec::with_capacity(f.len());
    let mut h21 = Vec::with_capacity(f.len());
    for &fk in f {
        let m = lin
            .terminal_admittance(2.0 * PI * fk)
            .ok_or_else(singular)?;
        let at = |r: usize, c: usize| m[r * nt + c];
        let yk = [at(g, g), at(g, d), at(d, g), at(d, d)];
        h21.push(yk[2] / yk[0]);
        y.push(yk);
    }
    let (gt, ct) = lin.quasi_static().ok_or_else(singular)?;
    let (g_m, c_gg) = (gt[d * nt + g], ct[g * nt + g]);
    let h_db: Vec<f64> = h21.iter().map(|z| db(*z)).collect();
    let top = f.last().copied().unwrap_or(0.0);
    let f_t = match h_db.first() {
        Some(&h0) if h0 > 0.0 => falling_through(f, &h_db, 0.0).ok_or_else(|| {
            format!(
                "|h21| stays above 1 up to {}",
                crate::plot::engineering(top, "Hz")
            )
        }),
        _ => Err("|h21| is at most 1 at the lowest frequency".into()),
    };
    let f_t_quasi_static = if c_gg > 0.0 {
        Ok(g_m.abs() / (2.0 * PI * c_gg))
    } else {
        Err(format!("C_gg is {c_gg:e} F at the operating point"))
    };
    Ok(DeviceReport {
        name: name.to_string(),
        f_t_extrapolated: f.first().copied().unwrap_or(0.0) * h21.first().map_or(0.0, |z| z.norm()),
        y,
        h21,
        f_t,
        g_m,
        c_gg,
        f_t_quasi_static,
    })
}

/// Runs the file's small-signal analysis `a` (checked when it was loaded) on `design`.
pub fn run_small_signal(design: Design, a: &Analysis) -> Result<SmallSignalReport, String> {
    let Analysis::SmallSignal {
        source,
        output,
        from,
        to,
        per_decade,
        device,
    } = a
    else {
        return Err("not a small-signal analysis".into());
    };
    let c = &design.circuit;
    let missing = |what: &str, n: &str| format!("analysis `small_signal`: no {what} `{n}`");
    let src = c
        .find_element(source)
        .ok_or_else(|| missing("element", source))?;
    let out = c.find_node(output).ok_or_else(|| missing("node", output))?;
    let dev = match device {
        Some(n) => {
            let e = c.find_element(n).ok_or_else(|| missing("element", n))?;
            Some((n, e, c.element_terminals(e)))
        }
        None => None,
    };
    let f = frequency_list(*from, *to, *per_decade);
    let mut sys = System::new(design.circuit).map_err(|e| e.to_string())?;
    let (sol, _) = sys
        .operating_point(&OpParams::default())
        .map_err(|e| e.to_string())?;
    let (res, info) = sys
        .small_signal(&sol.x, src, out, &f, &SmallSignalParams::default())
        .map_err(|e| e.to_string())?;
    let input_admittance = res
        .input
        .iter()
        .map(|&z| match res.source {
            SourceKind::Voltage => Some(z),
            SourceKind::Current => reciprocal(z),
        })
        .collect();
    let dc = dc_transfer(&sys, &sol.x, src, out);
    let device = match dev {
        Some((n, e, t)) => Some(device_report(&sys, &sol.x, n, e, t, &f)?),
        None => None,
    };
    Ok(SmallSignalReport {
        source: source.clone(),
        source_kind: res.source,
        output: output.clone(),
        magnitude_db: res.transfer.iter().map(|z| db(*z)).collect(),
        phase_deg: unwrapped_phase(&res.transfer),
        input_admittance,
        output_admittance: res
            .output_impedance
            .iter()
            .map(|&z| reciprocal(z))
            .collect(),
        figures: transfer_figures(&f, &res.transfer, res.source, dc),
        device,
        info,
        transfer: res.transfer,
        frequencies: f,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_list_runs_by_decades_and_closes_at_to() {
        let f = frequency_list(1e3, 1e6, 2);
        assert_eq!(f.len(), 7);
        assert!((f[1] / 1e3 - 10f64.sqrt()).abs() < 1e-12);
        assert_eq!(*f.last().unwrap(), 1e6);
        // A range that is not a whole number of steps keeps its last, shorter step.
        let f = frequency_list(1.0, 50.0, 1);
        assert_eq!(f, vec![1.0, 10.0, 50.0]);
    }

    #[test]
    fn the_list_spans_the_whole_range_of_doubles() {
        let f = frequency_list(1e-300, 1e300, 1);
        assert_eq!(f.len(), 601);
        assert!(f.iter().all(|v| v.is_finite() && *v > 0.0));
    }

    #[test]
    fn phase_is_unwrapped_across_the_branch_cut() {
        let h: Vec<c64> = [170.0f64, 179.0, 181.0, 270.0, 359.0, 361.0]
            .iter()
            .map(|d| c64::new(d.to_radians().cos(), d.to_radians().sin()))
            .collect();
        let p = unwrapped_phase(&h);
        for (got, want) in p.iter().zip([170.0, 179.0, 181.0, 270.0, 359.0, 361.0]) {
            assert!((got - want).abs() < 1e-9, "{got} vs {want}");
        }
        // A jump of exactly 180° stays where it is.
        let h = [c64::new(0.0, 1.0), c64::new(0.0, -1.0)];
        assert_eq!(unwrapped_phase(&h), vec![90.0, -90.0]);
    }

    /// A single pole `1 / (1 + j f / f_c)` sampled 20 per decade: the -3 dB point lands on
    /// `f_c` to the interpolation error of a smooth curve.
    #[test]
    fn a_single_pole_has_its_corner_as_bandwidth() {
        let fc = 3.3e6;
        let f = frequency_list(1e3, 1e10, 20);
        let h: Vec<c64> = f
            .iter()
            .map(|v| c64::new(10.0, 0.0) / c64::new(1.0, v / fc))
            .collect();
        let fig = transfer_figures(&f, &h, SourceKind::Voltage, None);
        assert!((fig.bandwidth_3db.unwrap() / fc - 1.0).abs() < 2e-3);
        // |H| = 1 at f = fc sqrt(99).
        assert!((fig.unity_gain.unwrap() / (fc * 99f64.sqrt()) - 1.0).abs() < 2e-3);
        assert!((fig.low_frequency_gain_db - 20.0).abs() < 1e-6);
        let flat = vec![c64::new(0.5, 0.0); f.len()];
        let fig = transfer_figures(&f, &flat, SourceKind::Voltage, None);
        assert!(fig.bandwidth_3db.is_err() && fig.unity_gain.is_err());
    }
}
