//! `lamina iv` figures end to end: which branch they are taken on, the thresholds against
//! closed forms, criteria that scale with W/L, the swing held to the thermal limit, currents at
//! stated biases, the output characteristics' own grid, and no negative zero in any report.

mod common;
use common::Scratch;
use lamina::iv::{
    iv_metrics, thermal_swing_mv_per_dec, Device, Geometry, IvConfig, IvPoint, Polarity,
};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

fn lamina(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .unwrap();
    Run {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// The metrics object of `lamina iv FILE ARGS --json`, which must succeed.
fn metrics(file: &Path, args: &[&str]) -> Value {
    let mut all = vec!["iv", file.to_str().unwrap()];
    all.extend_from_slice(args);
    all.push("--json");
    let r = lamina(&all);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    v["metrics"].clone()
}

/// A directory of its own for one test (removed when the test ends).
fn scratch(test: &str) -> Scratch {
    Scratch::new(&format!("iv-{test}"))
}

/// A file of one demo-process device (`n2d` or `p2d`) with instance overrides.
fn demo_device(dir: &Path, name: &str, card: &str, overrides: &str) -> PathBuf {
    let process = Path::new(env!("CARGO_MANIFEST_DIR")).join("netlists/demo/process.lam");
    let text = format!(
        "include \"{}\"\n{card} dut (drain = d, gate = g, source = ground) {{ {overrides} }}\n",
        process.display()
    );
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
}

fn square(dir: &Path, kind: &str, k: &str, vt: &str) -> PathBuf {
    let path = dir.join(format!("{kind}.lam"));
    std::fs::write(
        &path,
        format!(
            "{kind} m1 (drain = d, gate = g, source = ground) {{ k = {k}, threshold = {vt} }}\n"
        ),
    )
    .unwrap();
    path
}

fn f(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} is {}; not_reported: {}", v[key], v["not_reported"]))
}

/// Square-law devices of both polarities against closed forms (A. S. Sedra and K. C. Smith,
/// Microelectronic Circuits, the square-law MOSFET equations): in saturation
/// `|I_D| = k/2 (V_GS - V_T)^2`, so the constant-current threshold is
/// `V_T +- sqrt(2 I / k)`; in the linear region `g_m = k V_DS` is flat, and the tangent's
/// intercept minus `V_DS/2` is `V_T` exactly (D. K. Schroder, Semiconductor Material and
/// Device Characterization, 3rd ed., 2006, ch. 4).
#[test]
fn square_law_thresholds_match_the_closed_forms_for_both_polarities() {
    let dir = scratch("square");
    let k: f64 = 200e-6;
    for (kind, vt, vgs, vds, sign) in [
        ("square_nfet", 0.4, "0:1.5:0.001", "0.02,1.5", 1.0),
        ("square_pfet", -0.4, "-1.5:0:0.001", "-0.02,-1.5", -1.0),
    ] {
        let file = square(&dir, kind, "200 uA/V^2", &format!("{vt} V"));
        let m = metrics(&file, &["--vgs", vgs, "--vds", vds]);
        let want = if sign > 0.0 { "n" } else { "p" };
        assert_eq!(m["polarity"], want, "{m}");
        assert!(m["polarity_basis"].as_str().unwrap().contains("square-law"));
        // 100 nA x W/L with W/L = 1: the square-law card has no geometry, and says so.
        assert_eq!(f(&m, "vth_cc_criterion_a"), 1e-7);
        assert!(m["not_reported"]["width_um"]
            .as_str()
            .unwrap()
            .contains("W/L = 1"));
        let cc = vt + sign * (2.0 * 1e-7 / k).sqrt();
        // Interpolating log I between 1 mV samples of a square law 32 mV above threshold is
        // off by about h^2/8 |d2 ln I/dV2| / |d ln I/dV| = 4e-6 V.
        assert!((f(&m, "vth_cc_v") - cc).abs() < 1e-5, "{kind}: {m}");
        assert!((f(&m, "vth_gm_v") - vt).abs() < 1e-9, "{kind}: {m}");
        assert_eq!(f(&m, "vth_gm_vds_v"), sign * 0.02);
        assert_eq!(m["vth_gm_at_sweep_end"], false);
        assert!(m["ss_min_mv_per_dec"].is_null());
        assert!(m["not_reported"]["ss_min_mv_per_dec"]
            .as_str()
            .unwrap()
            .contains("no subthreshold"));
    }
}

/// I_on and I_off at stated biases on the square-law n device (saturation at V_DS = 1.5 V:
/// `k/2 (V_GS - V_T)^2`, Sedra and Smith), the defaults at the branch's ends, and a bias
/// outside the sweep refused with its reason.
#[test]
fn on_and_off_currents_are_taken_at_the_stated_biases() {
    let dir = scratch("bias");
    let file = square(&dir, "square_nfet", "200 uA/V^2", "0.4 V");
    let grid = ["--vgs", "0:1.5:0.01", "--vds", "0.1,1.5"];
    let m = metrics(&file, &grid);
    // Defaults: on at the sweep's top, off at the branch's smallest current (its start).
    assert_eq!(f(&m, "ion_vgs_v"), 1.5);
    assert!((f(&m, "ion_a") / (100e-6 * 1.1f64.powi(2)) - 1.0).abs() < 1e-9);
    assert_eq!(f(&m, "ioff_vgs_v"), 0.0);
    assert_eq!(f(&m, "ioff_a"), 0.0);
    let m = metrics(
        &file,
        &[&grid[..], &["--on-bias", "1.2", "--off-bias", "600mV"]].concat(),
    );
    assert_eq!(f(&m, "ion_vgs_v"), 1.2);
    assert!((f(&m, "ion_a") / (100e-6 * 0.8f64.powi(2)) - 1.0).abs() < 1e-9);
    assert_eq!(f(&m, "ioff_vgs_v"), 0.6);
    assert!((f(&m, "ioff_a") / (100e-6 * 0.2f64.powi(2)) - 1.0).abs() < 1e-9);
    // No width: no per-width currents, and the reason.
    assert!(m["ion_a_per_um"].is_null());
    assert!(m["not_reported"]["ion_a_per_um"].is_string());
    let m = metrics(&file, &[&grid[..], &["--on-bias", "2"]].concat());
    assert!(m["ion_a"].is_null());
    assert!(m["not_reported"]["ion_a"]
        .as_str()
        .unwrap()
        .contains("outside the swept V_GS"));
    // A current is not a voltage.
    let r = lamina(&[
        "iv",
        file.to_str().unwrap(),
        "--vgs",
        "0:1:0.5",
        "--vds",
        "1",
        "--on-bias",
        "1 A",
    ]);
    assert_eq!(r.code, Some(2), "{}", r.stderr);
}

/// The demo n-device (MoS2) conducts holes at negative V_GS and large V_DS; its figures come
/// from the electron branch, and the constant-current criterion is 100 nA x W/L (common
/// practice). The channel current is proportional to W (no contact resistance in this card),
/// so the threshold is the same for W = 10, 1 and 0.1 um while the criterion scales with W.
#[test]
fn demo_n_device_threshold_is_on_the_electron_branch_and_scales_with_w_over_l() {
    let dir = scratch("demo-n");
    let grid = ["--vgs", "-0.6:1.0:0.02", "--vds", "0.05,1"];
    let mut thresholds = Vec::new();
    for (w, wl) in [(10.0, 100.0), (1.0, 10.0), (0.1, 1.0)] {
        let file = demo_device(
            &dir,
            &format!("w{w}.lam"),
            "n2d",
            &format!("width = {w} um"),
        );
        let m = metrics(&file, &grid);
        assert_eq!(m["polarity"], "n", "{m}");
        assert!(m["polarity_basis"]
            .as_str()
            .unwrap()
            .contains("from the currents"));
        assert!((f(&m, "width_um") - w).abs() < 1e-9 * w);
        assert!((f(&m, "length_um") - 0.1).abs() < 1e-12);
        assert!((f(&m, "w_over_l") / wl - 1.0).abs() < 1e-12);
        assert!((f(&m, "vth_cc_criterion_a") / (1e-7 * wl) - 1.0).abs() < 1e-12);
        let vth = f(&m, "vth_cc_v");
        assert!(vth > 0.2 && vth < 0.6, "W = {w} um: {vth} V");
        // Per width: the same current density for every width.
        assert!((f(&m, "ion_a_per_um") - f(&m, "ion_a") / w).abs() < 1e-12 * f(&m, "ion_a"));
        thresholds.push(vth);
    }
    for t in &thresholds {
        assert!((t - thresholds[0]).abs() < 1e-4, "{thresholds:?}");
    }
    // Taken on the hole branch instead, the 1e-6 A criterion is not reached in this sweep.
    let file = demo_device(&dir, "w1p.lam", "n2d", "width = 1 um");
    let m = metrics(&file, &[&grid[..], &["--polarity", "p"]].concat());
    assert_eq!(m["polarity"], "p");
    assert!(m["vth_cc_v"].is_null());
    assert!(m["not_reported"]["vth_cc_v"]
        .as_str()
        .unwrap()
        .contains("p branch"));
}

/// The demo p-device (WSe2) measured at negative V_DS: the hole branch, a negative threshold.
#[test]
fn demo_p_device_threshold_is_on_the_hole_branch() {
    let dir = scratch("demo-p");
    let file = demo_device(&dir, "p.lam", "p2d", "");
    let m = metrics(&file, &["--vgs", "-1.0:0.6:0.02", "--vds", "-0.05,-1"]);
    assert_eq!(m["polarity"], "p", "{m}");
    let vth = f(&m, "vth_cc_v");
    assert!(vth < -0.2 && vth > -0.6, "{vth}");
    assert!(f(&m, "vth_gm_v") < 0.0);
    assert_eq!(f(&m, "ion_vgs_v"), -1.0);
    assert!(f(&m, "ion_a") > 1e3 * f(&m, "ioff_a"));
}

/// Ends of the sweep within 10x of each other leave the branch undecided: the figures that
/// need it are not reported, and the reason points at `--polarity`.
#[test]
fn an_undecided_branch_reports_no_figures() {
    let file = Path::new(env!("CARGO_MANIFEST_DIR")).join("netlists/demo/n-device.lam");
    // Both ends lie deep in the off region, near 1e-20 A.
    let m = metrics(&file, &["--vgs", "-0.78:-0.66:0.06", "--vds", "0.05"]);
    assert!(m["polarity"].is_null(), "{m}");
    for key in [
        "polarity",
        "vth_cc_v",
        "vth_gm_v",
        "ss_min_mv_per_dec",
        "ion_a",
    ] {
        assert!(
            m["not_reported"][key]
                .as_str()
                .unwrap()
                .contains("--polarity"),
            "{key}: {m}"
        );
    }
}

/// The thermal limit ln(10) kT/q bounds the subthreshold swing from below (S. M. Sze and
/// K. K. Ng, Physics of Semiconductor Devices, 3rd ed., 2007, ch. 6). At 300 K the demo
/// device, with a thin gate stack and no traps, sits within 0.5 % of it. At 77 K the swing is
/// read above the floor and is never below the limit; with the floor pulled down to 1e-30 A the
/// chords reach currents near 1e-26 A, where the model's arithmetic gives less than the limit,
/// and the figure is refused rather than printed.
#[test]
fn swing_is_never_below_the_thermal_limit() {
    let dir = scratch("swing");
    let grid = ["--vgs", "-0.6:1.0:0.02", "--vds", "0.05,1"];
    let file = demo_device(&dir, "t300.lam", "n2d", "");
    let m = metrics(&file, &grid);
    let limit = f(&m, "ss_thermal_limit_mv_per_dec");
    assert!((limit - thermal_swing_mv_per_dec(300.0)).abs() < 1e-12);
    let ss = f(&m, "ss_min_mv_per_dec");
    assert!(ss >= limit && ss < 1.005 * limit, "{ss} vs {limit}");
    // Read above the default floor 1 pA x W/L = 1e-11 A.
    assert_eq!(f(&m, "current_floor_a"), 1e-11);
    assert!(m["ss_min_decade_a"][0].as_f64().unwrap() >= 1e-11);

    let file = demo_device(&dir, "t77.lam", "n2d", "temperature = 77 K");
    let m = metrics(&file, &grid);
    assert_eq!(f(&m, "temperature_k"), 77.0);
    let limit = f(&m, "ss_thermal_limit_mv_per_dec");
    assert!((limit - 15.278).abs() < 1e-3, "{limit}");
    let ss = f(&m, "ss_min_mv_per_dec");
    assert!(ss >= limit, "{ss} vs {limit}");
    let low = m["ss_min_decade_a"][0].as_f64().unwrap();
    assert!(low >= 1e-11, "the swing came from below the floor: {m}");

    let args: Vec<&str> = ["iv", file.to_str().unwrap()]
        .into_iter()
        .chain(grid)
        .chain(["--current-floor", "1e-30", "--json"])
        .collect();
    let r = lamina(&args);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let m = serde_json::from_str::<Value>(&r.stdout).unwrap()["metrics"].clone();
    match m["ss_min_mv_per_dec"].as_f64() {
        Some(ss) => assert!(ss >= limit, "{ss} vs {limit}"),
        None => {
            let why = m["not_reported"]["ss_min_mv_per_dec"].as_str().unwrap();
            assert!(why.contains("below the thermal limit"), "{why}");
            assert!(r.stderr.contains("refused"), "{}", r.stderr);
        }
    }
    // Either way, no swing below the limit is ever printed (near 1e-26 A the model's chords
    // can come out a few tenths of a percent below it, which the rule refuses).
}

/// The rule on synthetic curves: an exponential at 300 K with a swing 10 % above, 1e-6 below
/// and 5 % below ln(10) kT/q is reported as read, raised to the limit (within the solver's
/// relative tolerance of 1e-3 on each current), and refused.
#[test]
fn swing_rule_on_synthetic_curves() {
    let limit = thermal_swing_mv_per_dec(300.0);
    let device = Device {
        name: "synthetic".into(),
        kind: "2D-channel FET",
        carrier: None,
        geometry: Ok(Geometry {
            width_m: 1e-6,
            length_m: 1e-6,
            temperature_k: 300.0,
        }),
    };
    let config = IvConfig {
        polarity: Some(Polarity::N),
        ..IvConfig::default()
    };
    for (factor, expect) in [
        (1.1, Some(1.1 * limit)),
        (1.0 - 1e-6, Some(limit)),
        (0.95, None),
    ] {
        let ss = factor * limit;
        let points: Vec<IvPoint> = (0..=50)
            .map(|k| {
                let vgs = k as f64 * 0.01;
                IvPoint {
                    vgs,
                    vds: 1.0,
                    id: 1e-12 * 10f64.powf(vgs * 1e3 / ss),
                    ig: 0.0,
                }
            })
            .collect();
        let m = iv_metrics(&points, &device, &config);
        match (expect, &m.ss_min) {
            (Some(want), Ok(s)) => {
                assert!((s.mv_per_dec - want).abs() < 1e-9 * want, "{factor}: {s:?}");
                assert_eq!(s.at_limit, factor < 1.0);
            }
            (None, Err(why)) => assert!(why.contains("below the thermal limit"), "{why}"),
            (e, got) => panic!("{factor}: expected {e:?}, got {got:?}"),
        }
    }
}

fn negative_zero_in_text(text: &str) -> Option<&str> {
    text.split(|c: char| c.is_whitespace() || c == ',' || c == '[' || c == ']' || c == ':')
        .find(|t| t.starts_with('-') && t.trim_end_matches(['V', ';']).parse::<f64>() == Ok(0.0))
}

fn has_negative_zero(v: &Value) -> bool {
    match v {
        Value::Number(n) => n.as_f64().is_some_and(|x| x == 0.0 && x.is_sign_negative()),
        Value::Array(a) => a.iter().any(has_negative_zero),
        Value::Object(o) => o.values().any(has_negative_zero),
        _ => false,
    }
}

/// At V_DS = 0 the drain current is 0 with the sign of whatever produced it; no report may show
/// `-0` (`-0.000000e0` in the table, `-0.0` in JSON, `-0e0` in CSV).
#[test]
fn negative_zero_is_never_printed() {
    let dir = scratch("zero");
    let file = Path::new(env!("CARGO_MANIFEST_DIR")).join("netlists/demo/n-device.lam");
    let grid = ["--vgs", "-0.1:0.1:0.05", "--vds", "-0.05:0.05:0.05"];
    let args: Vec<&str> = ["iv", file.to_str().unwrap()]
        .into_iter()
        .chain(grid)
        .collect();
    let r = lamina(&args);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    // The table has rows at V_DS = 0, where the current is exactly zero.
    assert!(r.stdout.contains("0.000000e0"), "{}", r.stdout);
    assert_eq!(negative_zero_in_text(&r.stdout), None, "{}", r.stdout);
    let out = dir.join("out");
    let r = lamina(&[&args[..], &["--json", "--out", out.to_str().unwrap()]].concat());
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    assert!(!has_negative_zero(&v), "{v}");
    assert!(!r.stdout.contains("-0.0,") && !r.stdout.contains("-0.0}"));
    let csv = std::fs::read_to_string(out.join("iv.csv")).unwrap();
    assert_eq!(negative_zero_in_text(&csv), None, "{csv}");
    let summary = std::fs::read_to_string(out.join("summary.json")).unwrap();
    assert!(!has_negative_zero(&serde_json::from_str(&summary).unwrap()));
    assert_eq!(negative_zero_in_text(&r.stderr), None);
}

/// The text table ends with the figures, each with its unit.
#[test]
fn table_shows_the_figures_with_units() {
    let file = Path::new(env!("CARGO_MANIFEST_DIR")).join("netlists/demo/n-device.lam");
    let r = lamina(&[
        "iv",
        file.to_str().unwrap(),
        "--vgs",
        "-0.6:1.0:0.02",
        "--vds",
        "0.05,1",
    ]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let tail: Vec<&str> = r.stdout.lines().skip_while(|l| !l.is_empty()).collect();
    let tail = tail.join("\n");
    for want in [
        "W = 1 um, L = 0.1 um (W/L = 10), T = 300 K",
        "Branch: n (electrons)",
        "V_th, constant current (V)",
        "100 nA x W/L",
        "V_th, max-g_m extrapolation (V)",
        "SS min (mV/dec)",
        "thermal limit 59.53 mV/dec",
        "I_on (A)",
        "A/um",
        "I_off (A)",
    ] {
        assert!(tail.contains(want), "{want} missing from:\n{tail}");
    }
    assert!(!tail.contains("not reported"), "{tail}");
}

/// With two drain voltages the output characteristics come from a run of their own over 41
/// points from 0 V to the largest V_DS; with only V_DS = 0 they cannot, and stderr says so.
#[test]
fn output_characteristics_get_a_dense_drain_grid() {
    let dir = scratch("output");
    let file = Path::new(env!("CARGO_MANIFEST_DIR")).join("netlists/demo/n-device.lam");
    let out = dir.join("two");
    let r = lamina(&[
        "iv",
        file.to_str().unwrap(),
        "--vgs",
        "-0.6:1.0:0.1",
        "--vds",
        "0.05,1",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    assert!(r.stderr.contains("41 V_DS points"), "{}", r.stderr);
    let csv = std::fs::read_to_string(out.join("output.csv")).unwrap();
    let mut vds: Vec<f64> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(1).unwrap().parse().unwrap())
        .collect();
    vds.sort_by(f64::total_cmp);
    vds.dedup();
    assert_eq!(vds.len(), 41);
    assert_eq!((vds[0], vds[40]), (0.0, 1.0));
    assert!(out.join("output.svg").exists());
    let out = dir.join("zero");
    let r = lamina(&[
        "iv",
        file.to_str().unwrap(),
        "--vgs",
        "0:1:0.1",
        "--vds",
        "0",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    assert!(
        r.stderr.contains("output characteristics are not drawn"),
        "{}",
        r.stderr
    );
    assert!(!out.join("output.svg").exists());
}

/// Width, length and temperature come from the instance, else its card, else the card's
/// defaults, with expressions, parameters and `--set` evaluated as the card was; a FET inside
/// a cell is refused those figures, with the reason, rather than given a guessed geometry.
#[test]
fn geometry_is_read_as_the_card_sets_it() {
    let dir = scratch("geometry");
    let file = dir.join("g.lam");
    std::fs::write(
        &file,
        "param w = 2 um\n\
         device n : sheet_fet { channel = MoS2, insulator = hBN, insulator_layers = 10, \
         width = w, length = 2 * 50 nm }\n\
         n dut (drain = d, gate = g, source = ground) { temperature = 350 K }\n",
    )
    .unwrap();
    let grid = ["--vgs", "-0.5:1:0.05", "--vds", "0.05,1"];
    let m = metrics(&file, &[&grid[..], &["--set", "w=4um"]].concat());
    assert!((f(&m, "width_um") - 4.0).abs() < 1e-9, "{m}");
    assert!((f(&m, "length_um") - 0.1).abs() < 1e-12);
    assert_eq!(f(&m, "temperature_k"), 350.0);
    assert!((f(&m, "vth_cc_criterion_a") / 4e-6 - 1.0).abs() < 1e-12);
    assert!((f(&m, "current_floor_a") / 4e-11 - 1.0).abs() < 1e-12);
    assert!((f(&m, "ss_thermal_limit_mv_per_dec") - thermal_swing_mv_per_dec(350.0)).abs() < 1e-9);

    let process = Path::new(env!("CARGO_MANIFEST_DIR")).join("netlists/demo/process.lam");
    let file = dir.join("cell.lam");
    std::fs::write(
        &file,
        format!(
            "include \"{}\"\ncell one(d, g) {{\n    n2d m (drain = d, gate = g, source = ground)\n}}\n\
             one x (d = d, g = g)\n",
            process.display()
        ),
    )
    .unwrap();
    // A FET placed inside a cell: the geometry comes from the card the element was built
    // from (the elaborator keeps it), so the figures that need it are reported too.
    let m = metrics(&file, &grid);
    assert_eq!(f(&m, "width_um"), 1.0, "{m}");
    assert!((f(&m, "length_um") - 0.1).abs() < 1e-12, "{m}");
    for key in ["vth_cc_v", "ss_min_mv_per_dec", "current_floor_a"] {
        assert!(m[key].as_f64().is_some(), "{key}: {m}");
    }
    assert!(f(&m, "ion_a") > 0.0);
    assert_eq!(f(&m, "ion_a_per_um"), f(&m, "ion_a"));
}
