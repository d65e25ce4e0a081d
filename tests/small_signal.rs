//! `analysis small_signal` end to end: closed forms of linear circuits, an ideal amplifier, a
//! FET's f_T against its quasi-static estimate, consistency with a transient, the command line
//! and located errors.

use lamina::design::{run_all, Outcome};
use lamina::ring::RingParams;
use lamina::small_signal::{run_small_signal, SmallSignalReport};
use lamina_measure::{crossings, Direction};
use lamina_netlist::{load_source, ErrorKind, LoadOptions};
use std::f64::consts::PI;
use std::path::PathBuf;

mod common;

/// Loads `text` and runs its one small-signal analysis.
fn small_signal(text: &str) -> SmallSignalReport {
    let design =
        load_source("test.lam", text, &LoadOptions::default()).unwrap_or_else(|f| panic!("{f}"));
    let a = design
        .analyses
        .iter()
        .find(|a| a.kind == "small_signal")
        .expect("a small-signal analysis")
        .analysis
        .clone();
    run_small_signal(design, &a).unwrap()
}

/// The index of the listed frequency closest to `f`.
fn nearest(r: &SmallSignalReport, f: f64) -> usize {
    (0..r.frequencies.len())
        .min_by(|&a, &b| {
            let d = |k: usize| (r.frequencies[k] / f).ln().abs();
            d(a).total_cmp(&d(b))
        })
        .unwrap()
}

fn temp_dir(tag: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("lamina-ss-{tag}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

const RC: &str = r#"
voltage_source drive (pos = in, neg = ground) { dc = 0.2 V }
resistor r (a = in, b = out) { resistance = 1 kOhm }
capacitor c (a = out, b = ground) { capacitance = 1 pF }
"#;

/// First-order low-pass `H = 1 / (1 + j f / f_c)`, `f_c = 1 / (2 pi R C)`: -3 dB and -45
/// degrees at the corner (P. Horowitz, W. Hill, The Art of Electronics, 3rd ed., 2015, ch. 1,
/// recalled; common practice).
#[test]
fn rc_low_pass_corner_and_phase() {
    let fc = 1.0 / (2.0 * PI * 1e3 * 1e-12);
    // From fc / 100 in 40 steps per decade: fc itself is listed (k = 80).
    let text = format!(
        "{RC}analysis small_signal {{ source = drive, output = out, from = {} Hz, to = 100 GHz, per_decade = 40 }}",
        fc / 100.0
    );
    let r = small_signal(&text);
    let k = nearest(&r, fc);
    assert!((r.frequencies[k] / fc - 1.0).abs() < 1e-12);
    assert!((r.phase_deg[k] + 45.0).abs() < 1e-9, "{}", r.phase_deg[k]);
    assert!((r.magnitude_db[k] + 10.0 * 2f64.log10()).abs() < 1e-9);
    // The bandwidth is measured from the DC gain |H(0)| = 1: exactly the corner (the listed
    // corner frequency is interpolated onto itself).
    let f3 = r.figures.bandwidth_3db.clone().unwrap();
    assert!((f3 / fc - 1.0).abs() < 1e-9, "{f3:e} vs {fc:e}");
    assert!(r.figures.from_dc);
    assert_eq!(r.figures.low_frequency_gain, 1.0);
    assert!(r.figures.flat_band_warning.is_none());
    // A list that starts above the flat band (at 0.7 f_c) still finds the corner against the
    // DC gain, and warns.
    let late = small_signal(&format!(
        "{RC}analysis small_signal {{ source = drive, output = out, from = {} Hz, to = 100 GHz, per_decade = 40 }}",
        0.7 * fc
    ));
    assert!(late.figures.flat_band_warning.is_some());
    let f3 = late.figures.bandwidth_3db.clone().unwrap();
    assert!((f3 / fc - 1.0).abs() < 2e-3, "{f3:e} vs {fc:e}");
    // A passive divider never gains: no unity-gain frequency, with the reason.
    assert!(r.figures.unity_gain.is_err());
    // Input admittance jwC / (1 + jwRC) at the corner: (1 + j) / (2 R); output admittance
    // 1/R + jwC.
    let yin = r.input_admittance[k].unwrap();
    assert!((yin.re - 0.5e-3).abs() < 1e-12 && (yin.im - 0.5e-3).abs() < 1e-12);
    let yout = r.output_admittance[k].unwrap();
    assert!((yout.re - 1e-3).abs() < 1e-12 && (yout.im - 1e-3).abs() < 1e-12);
}

/// Series RLC driven by a voltage, output across R: a band-pass with `|H| = 1` and zero phase
/// at `f_0 = 1 / (2 pi sqrt(L C))`, quality factor `Q = sqrt(L / C) / R` and half-power
/// bandwidth `f_0 / Q` (Horowitz & Hill, 3rd ed., 2015, ch. 1, recalled; common practice).
#[test]
fn series_rlc_resonance_and_quality_factor() {
    let (r, l, c): (f64, f64, f64) = (10.0, 1e-9, 1e-12);
    let f0 = 1.0 / (2.0 * PI * (l * c).sqrt());
    let q = (l / c).sqrt() / r;
    let text = format!(
        r#"
voltage_source drive (pos = in, neg = ground) {{ dc = 0 V }}
inductor l (a = in, b = mid) {{ inductance = 1 nH }}
capacitor c (a = mid, b = out) {{ capacitance = 1 pF }}
resistor r (a = out, b = ground) {{ resistance = 10 Ohm }}
analysis small_signal {{ source = drive, output = out, from = {} Hz, to = {} Hz, per_decade = 400 }}
"#,
        f0 / 10.0,
        f0 * 10.0
    );
    let rep = small_signal(&text);
    let k = nearest(&rep, f0);
    assert!((rep.frequencies[k] / f0 - 1.0).abs() < 1e-9);
    assert!((rep.transfer[k].norm() - 1.0).abs() < 1e-9);
    assert!(rep.phase_deg[k].abs() < 1e-6, "{}", rep.phase_deg[k]);
    // The input admittance is 1/R at resonance.
    let yin = rep.input_admittance[k].unwrap();
    assert!((yin.re - 0.1).abs() < 1e-9 && yin.im.abs() < 1e-9);
    // Half-power points on either side, interpolated on log frequency.
    let logf: Vec<f64> = rep.frequencies.iter().map(|f| f.log10()).collect();
    let level = -10.0 * 2f64.log10();
    let lo = crossings(
        &logf[..=k],
        &rep.magnitude_db[..=k],
        level,
        Direction::Rising,
    );
    let hi = crossings(
        &logf[k..],
        &rep.magnitude_db[k..],
        level,
        Direction::Falling,
    );
    let (flo, fhi) = (10f64.powf(lo[0]), 10f64.powf(hi[0]));
    let q_measured = f0 / (fhi - flo);
    assert!((q_measured / q - 1.0).abs() < 1e-4, "{q_measured} vs {q}");
    // Every point against the closed form |H| = 1 / sqrt(1 + Q^2 (f/f0 - f0/f)^2).
    for (f, h) in rep.frequencies.iter().zip(&rep.transfer) {
        let x = q * (f / f0 - f0 / f);
        assert!((h.norm() - 1.0 / (1.0 + x * x).sqrt()).abs() < 1e-9);
    }
}

/// A voltage-controlled current source into a resistor is an ideal inverting amplifier:
/// `H = -g R` at every frequency, output admittance `1/R` (circuit theory, common practice).
#[test]
fn ideal_transconductance_amplifier_is_flat() {
    let r = small_signal(
        r#"
voltage_source drive (pos = in, neg = ground) { dc = 0.1 V }
resistor rin (a = in, b = ground) { resistance = 50 Ohm }
vccs amp (out_pos = out, out_neg = ground, ctrl_pos = in, ctrl_neg = ground) { transconductance = 2 mS }
resistor load (a = out, b = ground) { resistance = 5 kOhm }
analysis small_signal { source = drive, output = out, from = 1 Hz, to = 1 THz, per_decade = 5 }
"#,
    );
    for (k, h) in r.transfer.iter().enumerate() {
        assert!((h.re + 10.0).abs() < 1e-12 && h.im.abs() < 1e-12, "{h:?}");
        assert!((r.phase_deg[k].abs() - 180.0).abs() < 1e-9);
        let yout = r.output_admittance[k].unwrap();
        assert!((yout.re - 2e-4).abs() < 1e-15 && yout.im.abs() < 1e-15);
        // The source sees only rin.
        let yin = r.input_admittance[k].unwrap();
        assert!((yin.re - 0.02).abs() < 1e-15 && yin.im.abs() < 1e-15);
    }
    assert!((r.figures.low_frequency_gain - 10.0).abs() < 1e-12);
    assert!(r.figures.bandwidth_3db.is_err());
    assert!(r.figures.unity_gain.is_err());
}

/// A 2D FET without overlap capacitance and without contact resistance, at V_GS = 0.6 V and
/// V_DS = 0.7 V. Its Ward-Dutton charges are quasi-static, so `Y = G + jwC` exactly:
/// `h21 = (g_m + jw C_dg) / (jw C_gg)`. At low frequency `f |h21| = g_m / (2 pi C_gg)` to
/// rounding (the -20 dB/decade extrapolation equals the quasi-static estimate), and the
/// crossing `|h21| = 1` is at `g_m / (2 pi sqrt(C_gg^2 - C_dg^2))` (common practice:
/// short-circuit current gain of a quasi-static two-port).
#[test]
fn fet_f_t_matches_the_quasi_static_estimate() {
    let r = small_signal(
        r#"
device n2d : sheet_fet {
    channel = MoS2
    insulator = hBN, insulator_layers = 10
    insulator2 = HfO2, insulator2_thickness = 3 nm
    gate_work_function = 4.37 eV
    electron_mobility = 40 cm^2/(V s), hole_mobility = 5 cm^2/(V s)
    saturation_velocity = 3.4e6 cm/s
    width = 1 um, length = 100 nm
}
voltage_source vg (pos = gate, neg = ground) { dc = 0.6 V }
voltage_source vd (pos = drain, neg = ground) { dc = 0.7 V }
n2d dut (drain = drain, gate = gate, source = ground)
analysis small_signal { source = vg, output = gate, from = 1 kHz, to = 10 THz, per_decade = 100, device = dut }
"#,
    );
    let d = r.device.as_ref().unwrap();
    let qs = d.f_t_quasi_static.clone().unwrap();
    assert!(d.g_m > 0.0 && d.c_gg > 0.0);
    assert!(
        (d.f_t_extrapolated / qs - 1.0).abs() < 1e-9,
        "{:e} vs {qs:e}",
        d.f_t_extrapolated
    );
    // Y11 = jw C_gg and Re Y21 = g_m at every frequency (no internal nodes).
    let w0 = 2.0 * PI * r.frequencies[0];
    assert!((d.y[0][0].im / w0 / d.c_gg - 1.0).abs() < 1e-9);
    assert!(d.y[0][0].re.abs() < 1e-12 * d.g_m);
    assert!((d.y[0][2].re / d.g_m - 1.0).abs() < 1e-9);
    let c_dg = d.y[0][2].im / w0;
    let exact = d.g_m / (2.0 * PI * (d.c_gg * d.c_gg - c_dg * c_dg).sqrt());
    let ft = d.f_t.clone().unwrap();
    assert!((ft / exact - 1.0).abs() < 1e-6, "{ft:e} vs {exact:e}");
    // The crossing lies above the estimate by 1 / sqrt(1 - (C_dg / C_gg)^2), never below.
    assert!(ft > qs, "{ft:e} vs {qs:e}");
}

/// The same RC seen both ways: the time constant of the transient's step response (the output
/// crosses half-way at `tau ln 2` after the step, first-order response, common practice)
/// equals `1 / (2 pi f_3dB)` from the small-signal analysis, within the transient's accuracy.
#[test]
fn transient_time_constant_matches_the_small_signal_corner() {
    let text = r#"
voltage_source drive (pos = in, neg = ground) {
    wave = pulse(low = 0 V, high = 10 mV, delay = 1 ns, rise = 1 ps, fall = 1 ps, width = 100 ns)
}
resistor r (a = in, b = out) { resistance = 2 kOhm }
capacitor c (a = out, b = ground) { capacitance = 0.7 pF }
analysis transient { stop = 30 ns, record = [out] }
analysis small_signal { source = drive, output = out, from = 1 kHz, to = 10 GHz, per_decade = 100 }
"#;
    let dir = temp_dir("tau");
    let file = dir.join("rc.lam");
    std::fs::write(&file, text).unwrap();
    let results = run_all(&file, &[], &RingParams::default(), None).unwrap();
    let (mut tau_tr, mut tau_ss) = (None, None);
    for (_, o) in &results {
        match o {
            Outcome::Transient(t) => {
                let c = t.crossings.iter().find(|c| c.node == "out").unwrap();
                tau_tr = Some((c.rising[0] - 1e-9 - 0.5e-12) / 2f64.ln());
            }
            Outcome::SmallSignal(s) => {
                tau_ss = Some(1.0 / (2.0 * PI * s.figures.bandwidth_3db.clone().unwrap()));
            }
            _ => {}
        }
    }
    let (tr, ss) = (tau_tr.unwrap(), tau_ss.unwrap());
    assert!((ss / 1.4e-9 - 1.0).abs() < 1e-5, "{ss:e}");
    assert!(
        (tr / ss - 1.0).abs() < 1e-3,
        "transient {tr:e} vs small-signal {ss:e}"
    );
    let _ = std::fs::remove_dir_all(dir);
}

/// `lamina run FILE --json --out DIR` on the demo: every frequency in the JSON, figures and
/// the device's f_T beside its quasi-static estimate, files written whole.
#[test]
fn the_demo_runs_from_the_command_line() {
    let dir = temp_dir("cli");
    let out_dir = dir.join("result");
    let out = common::lamina_ok(&[
        "run",
        "netlists/demo/amplifier-small-signal.lam",
        "--json",
        "--out",
        out_dir.to_str().unwrap(),
    ]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let a = v["analyses"]
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["analysis"] == "small_signal")
        .unwrap();
    // 1 kHz to 1 THz at 10 per decade.
    let points = a["points"].as_array().unwrap();
    assert_eq!(points.len(), 91);
    assert_eq!(points[0]["frequency_hz"].as_f64(), Some(1e3));
    assert_eq!(a["transfer_unit"], "V/V");
    // A common-source stage (textbook small-signal model, e.g. A. S. Sedra and K. C. Smith,
    // Microelectronic Circuits, 7th ed., 2015, ch. 7): gain -g_m (R || r_o) at DC, the phase
    // 180 degrees, and one output pole 1 / (2 pi R C_out) with C_out the 2 fF load plus the
    // device's C_dd, from the operating point's own g_m, g_ds and C_dd.
    let op = v["analyses"]
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["analysis"] == "operating_point")
        .unwrap();
    let ss = &op["devices"][0]["small_signal"];
    let (gm, gds, cdd) = (
        ss["gm_siemens"].as_f64().unwrap(),
        ss["gds_siemens"].as_f64().unwrap(),
        ss["cdd_f"].as_f64().unwrap(),
    );
    let r = 100e3;
    let gain = gm * r / (1.0 + gds * r);
    assert_eq!(a["low_frequency_gain_from_dc"], true);
    let g0 = a["low_frequency_gain"].as_f64().unwrap();
    assert!((g0 / gain - 1.0).abs() < 1e-9, "{g0} vs {gain}");
    assert!((points[0]["phase_deg"].as_f64().unwrap().abs() - 180.0).abs() < 0.01);
    let f3 = a["bandwidth_3db_hz"].as_f64().unwrap();
    let pole = (1.0 + gds * r) / (2.0 * PI * r * (2e-15 + cdd));
    // The feed-forward zero of C_gd at g_m / (2 pi C_gd), a hundred times higher, moves the
    // corner by about 1e-4.
    assert!((f3 / pole - 1.0).abs() < 1e-3, "{f3:e} vs {pole:e}");
    let fu = a["unity_gain_hz"].as_f64().unwrap();
    assert!(f3 < fu);
    let d = &a["device"];
    let ft = d["f_t_hz"].as_f64().unwrap();
    let qs = d["f_t_quasi_static_hz"].as_f64().unwrap();
    assert!(ft > 0.0 && qs > 0.0);
    assert_eq!(d["points"].as_array().unwrap().len(), 91);
    let folder = out_dir.join("small_signal-2");
    for f in [
        "small_signal.csv",
        "device.csv",
        "bode.svg",
        "bode.png",
        "h21.svg",
        "h21.png",
    ] {
        assert!(folder.join(f).is_file(), "{f}");
    }
    let csv = std::fs::read_to_string(folder.join("small_signal.csv")).unwrap();
    assert_eq!(csv.lines().count(), 92);
    assert!(csv.starts_with("frequency_hz,"));
    // The summary keeps the figures, not the points.
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out_dir.join("summary.json")).unwrap())
            .unwrap();
    assert!(summary["analyses"][1].get("points").is_none());
    assert!(summary["analyses"][1]["bandwidth_3db_hz"].is_number());
    let _ = std::fs::remove_dir_all(dir);
}

/// Setting errors are located at their value, with the kind the bad corpus uses.
#[test]
fn setting_errors_are_located() {
    let cases: &[(&str, ErrorKind, (usize, usize))] = &[
        // Unknown output node.
        (
            "analysis small_signal { source = drive, output = uot, from = 1 kHz, to = 1 GHz, per_decade = 10 }",
            ErrorKind::Unknown,
            (5, 50),
        ),
        // Unknown device.
        (
            "analysis small_signal { source = drive, output = out, from = 1 kHz, to = 1 GHz, per_decade = 10, device = m1 }",
            ErrorKind::Unknown,
            (5, 107),
        ),
        // A frequency without its unit.
        (
            "analysis small_signal { source = drive, output = out, from = 1000, to = 1 GHz, per_decade = 10 }",
            ErrorKind::MissingUnit,
            (5, 62),
        ),
        // from above to.
        (
            "analysis small_signal { source = drive, output = out, from = 1 GHz, to = 1 kHz, per_decade = 10 }",
            ErrorKind::BadValue,
            (5, 74),
        ),
        // A fractional point count.
        (
            "analysis small_signal { source = drive, output = out, from = 1 kHz, to = 1 GHz, per_decade = 2.5 }",
            ErrorKind::BadValue,
            (5, 94),
        ),
    ];
    for (line, kind, (l, c)) in cases {
        let text = format!("{RC}{line}\n");
        let f = match load_source("t.lam", &text, &LoadOptions::default()) {
            Ok(_) => panic!("{line} should be refused"),
            Err(f) => f,
        };
        let found: Vec<(ErrorKind, usize, usize)> = f
            .diagnostics
            .iter()
            .map(|d| {
                let (a, b) = f.sources.line_column(d.span.file, d.span.start);
                (d.kind, a, b)
            })
            .collect();
        assert!(found.contains(&(*kind, *l, *c)), "{line}: {found:?}\n{f}");
    }
}

/// A node with no small-signal path (held only by gmin at the operating point) is a failed
/// analysis (exit 1) whose message names the node.
#[test]
fn a_singular_small_signal_matrix_is_exit_1_naming_the_node() {
    let dir = temp_dir("singular");
    let file = dir.join("float.lam");
    std::fs::write(
        &file,
        format!(
            "{RC}current_source bias (pos = float, neg = ground) {{ dc = 0 A }}\n\
             analysis small_signal {{ source = drive, output = out, from = 1 kHz, to = 1 GHz, per_decade = 3 }}\n"
        ),
    )
    .unwrap();
    let out = common::lamina(&["run", file.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("node float"), "{err}");
    let _ = std::fs::remove_dir_all(dir);
}
