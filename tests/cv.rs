//! `lamina cv` end to end: the intrinsic gate capacitance against the series combination of
//! the stack's parts, the terminal capacitances against finite differences of the engine's
//! gate charge, a graphene gate against its closed form, the report's keys and files, and the
//! errors with their exit codes.

use lamina::cv::{run_cv, CvReport};
use lamina_devices::{Gate, SheetFet};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

/// Runs the binary: exit code, stdout, stderr.
fn lamina(args: &[&str]) -> (Option<i32>, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .unwrap();
    let text = |b: &[u8]| String::from_utf8_lossy(b).into_owned();
    (out.status.code(), text(&out.stdout), text(&out.stderr))
}

fn scratch(test: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("lamina-cv-{test}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("netlists/demo")
        .join(name)
}

/// A file of one device of `process` (a file of `netlists/demo`) with instance overrides.
fn device_file(dir: &Path, process: &str, overrides: &str) -> PathBuf {
    let text = format!(
        "include \"{}\"\n\
         voltage_source vg (pos = g, neg = ground) {{ dc = 0 V }}\n\
         voltage_source vd (pos = d, neg = ground) {{ dc = 0 V }}\n\
         n2d dut (drain = d, gate = g, source = ground) {{ {overrides} }}\n",
        demo(process).display()
    );
    let path = dir.join(format!("{}.lam", process.trim_end_matches(".lam")));
    std::fs::write(&path, text).unwrap();
    path
}

fn load(path: &Path) -> lamina_netlist::Design {
    lamina::design::load(path, &[]).unwrap()
}

fn cv(path: &Path, vgs: &[f64], vds: f64) -> CvReport {
    run_cv(load(path), vgs, vds).unwrap()
}

/// Gate voltages on the knots of the device's tables between `lo` and `hi` (V), every
/// `stride`-th knot: at V_DS = 0 and a grounded source the channel sits at `u = V_G`, and at a
/// knot the tables hold the direct solve's charge and slope.
fn knots(path: &Path, lo: f64, hi: f64, stride: usize) -> Vec<f64> {
    let d = load(path);
    let fet = lamina::iv::find_fet(&d.circuit).unwrap();
    let dev = SheetFet::new(d.sheet_card(fet).unwrap()).unwrap();
    let m = dev.model();
    let (u0, u1) = m.table_range();
    let h = (u1 - u0) / (m.table_points() - 1) as f64;
    (0..m.table_points())
        .map(|k| u0 + k as f64 * h)
        .filter(|&u| u >= lo && u <= hi)
        .step_by(stride)
        .collect()
}

/// Check (a). At V_DS = 0 the channel is uniform, and the charge balance of the device model
/// (`lamina_devices::sheet_fet` module doc: Gauss's law `u = ξ + offset [- μ_g/q] + Q_g/C_ins`
/// with `dρ/dξ = -(C_Qch + C_it)`) differentiates to the series combination
/// `1 / (1/C_ins + 1/C_Qg + 1/(C_Qch + C_it))` of the parts. The engine's C_gg, less the two
/// overlaps and divided by W L, equals it to rounding where the channel sits on a knot of the
/// device's tables (the subtraction of the overlap costs a few rounding units of
/// `2 C_ov / (W L)`), for a metal and a graphene gate, with and without traps. Between knots
/// it carries the tables' interpolation: ρ is a cubic Hermite polynomial through exact slopes
/// `V_T / 10` apart, whose slope is off by up to about `(1/10)³ / 96 ≈ 1e-5` of an
/// exponential's (subthreshold); measured at most 8.2e-6 over -1 V to 1.5 V in 0.7 mV steps
/// for both demo gates, so the bound there is 1e-5.
#[test]
fn intrinsic_gate_capacitance_is_the_series_combination() {
    let dir = scratch("series");
    for (process, overrides) in [
        ("process.lam", ""),
        ("process.lam", "trap_density = 2e12 /(eV cm^2)"),
        ("process-graphene.lam", ""),
        ("process-graphene.lam", "trap_density = 5e11 /(eV cm^2)"),
    ] {
        let path = device_file(&dir, process, overrides);
        let vgs = knots(&path, -0.6, 1.2, 29);
        assert!(vgs.len() > 20, "{}", vgs.len());
        let r = cv(&path, &vgs, 0.0);
        let d = &r.device;
        if !overrides.is_empty() {
            assert!(d.trap_f_per_m2 > 0.0);
        }
        let rounding = 8.0 * f64::EPSILON * 2.0 * d.overlap_f() / d.area_m2();
        for p in &r.points {
            let (intr, series) = (p.intrinsic_gg_f_per_m2(d), p.series_f_per_m2(d));
            assert!(
                (intr - series).abs() <= 1e-10 * series + rounding,
                "{process} {overrides} V_GS = {}: {intr:e} vs {series:e}",
                p.vgs_v
            );
        }
        let between: Vec<f64> = (0..=36).map(|k| -0.6 + 0.05 * k as f64).collect();
        for p in &cv(&path, &between, 0.0).points {
            let (intr, series) = (p.intrinsic_gg_f_per_m2(d), p.series_f_per_m2(d));
            assert!(
                (intr - series).abs() <= 1e-5 * series + rounding,
                "{process} {overrides} V_GS = {}: {intr:e} vs {series:e}",
                p.vgs_v
            );
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// Check (d). C_gg and C_gd against central differences of the gate charge the engine holds
/// at the terminal, `(Q_G(V + h) - Q_G(V - h)) / 2h` with h = 0.1 mV (truncation
/// `h² Q'''/(6 Q')`, at most about 3e-6 in subthreshold where `Q ∝ e^(V/V_T)`), at V_DS = 0
/// and 0.4 V, through subthreshold and inversion, with contact resistances (whose internal
/// nodes the linearisation eliminates) and without.
#[test]
fn terminal_capacitances_are_gate_charge_derivatives() {
    let dir = scratch("fd");
    let h = 1e-4;
    for overrides in [
        "",
        "source_resistance = 300 ohm um, drain_resistance = 300 ohm um",
    ] {
        let path = device_file(&dir, "process.lam", overrides);
        for vds in [0.0, 0.4] {
            for vg in [-0.2, 0.1, 0.3, 0.6, 1.0] {
                let r = cv(&path, &[vg - h, vg, vg + h], vds);
                let fd = (r.points[2].q_gate_c - r.points[0].q_gate_c) / (2.0 * h);
                let c = r.points[1].c_gg_f;
                assert!(
                    (c / fd - 1.0).abs() < 1e-5,
                    "{overrides} V_DS = {vds}, V_GS = {vg}: C_gg {c:e} vs {fd:e}"
                );
                let rd = (
                    cv(&path, &[vg], vds - h).points[0].q_gate_c,
                    cv(&path, &[vg], vds + h).points[0].q_gate_c,
                );
                let fd = -(rd.1 - rd.0) / (2.0 * h);
                let c = r.points[1].c_gd_f;
                assert!(
                    (c / fd - 1.0).abs() < 1e-5,
                    "{overrides} V_DS = {vds}, V_GS = {vg}: C_gd {c:e} vs {fd:e}"
                );
            }
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// Check (b) through the job: the graphene gate of the demo (gapless, v_F = 1e6 m/s, g = 4
/// in the library) has the quantum capacitance
/// `C_Q = (2 q² kT / (π (ħ v_F)²)) ln[2 (1 + cosh(q V_ch / kT))]` at the level the report
/// gives (T. Fang, A. Konar, H. Xing and D. Jena, "Carrier statistics and quantum capacitance
/// of graphene sheets and ribbons", Appl. Phys. Lett. 91, 092109, 2007; the form recalled
/// from memory and derived in `crates/devices/tests/cv_parts.rs`).
#[test]
fn graphene_gate_follows_the_closed_form() {
    use lamina_devices::physics::{HBAR, K_B, Q};
    let dir = scratch("fang");
    let path = device_file(&dir, "process-graphene.lam", "");
    let d = load(&path);
    let fet = lamina::iv::find_fet(&d.circuit).unwrap();
    let card = d.sheet_card(fet).unwrap().clone();
    let Gate::Dirac {
        fermi_velocity,
        half_gap,
        degeneracy,
        ..
    } = card.gate
    else {
        panic!("the demo's graphene gate is a Dirac gate")
    };
    assert_eq!((half_gap, degeneracy), (0.0, 4.0));
    let kt = K_B * card.temperature;
    let vgs: Vec<f64> = (0..=30).map(|k| -1.0 + 0.1 * k as f64).collect();
    let r = cv(&path, &vgs, 0.0);
    let mut moved = false;
    for p in &r.points {
        let level = p.gate_level_v.unwrap();
        moved |= level.abs() > 0.1;
        let x = (Q * level / kt).abs();
        let fang = 2.0 * Q * Q * kt / (std::f64::consts::PI * (HBAR * fermi_velocity).powi(2))
            * (x + 2.0 * (-x).exp().ln_1p());
        assert!(
            (p.gate_quantum_f_per_m2 / fang - 1.0).abs() < 1e-9,
            "V_GS = {}: {:e} vs {fang:e}",
            p.vgs_v,
            p.gate_quantum_f_per_m2
        );
    }
    assert!(moved, "the gate's level never left its neutral point");
    let _ = std::fs::remove_dir_all(&dir);
}

fn json_of(args: &[&str]) -> Value {
    let (code, stdout, stderr) = lamina(args);
    assert_eq!(code, Some(0), "{stderr}");
    serde_json::from_str(&stdout).unwrap()
}

fn f(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} is {}", v[key]))
}

/// Check (e): the demo device's report over -0.5 V to 1 V, every point with its keys, the
/// metal gate's quantum capacitance and level null with the reason, C_gd = C_gs at V_DS = 0
/// (source and drain enter symmetrically), the overlap a floor under each, C_gg rising from
/// twice the overlap in depletion towards the insulator's in inversion.
#[test]
fn demo_device_report() {
    let v = json_of(&[
        "cv",
        demo("n-device.lam").to_str().unwrap(),
        "--vgs",
        "-0.5:1:0.1V",
        "--json",
    ]);
    let pts = v["points"].as_array().unwrap();
    assert_eq!(pts.len(), 16);
    assert_eq!(v["gate"], "metal");
    assert_eq!(f(&v, "vds_v"), 0.0);
    assert!(v["not_reported"]["c_gate_quantum_f_per_m2"]
        .as_str()
        .unwrap()
        .contains("infinite"));
    let (w, l) = (f(&v, "width_m"), f(&v, "length_m"));
    let c_ov = f(&v, "c_overlap_f");
    assert!((c_ov - 0.1e-15 / 1e-6 * w).abs() < 1e-30);
    let c_ins = f(&v, "c_insulator_f_per_m2");
    for p in pts {
        assert!(p["c_gate_quantum_f_per_m2"].is_null() && p["gate_level_v"].is_null());
        let (gg, gd, gs) = (f(p, "c_gg_f"), f(p, "c_gd_f"), f(p, "c_gs_f"));
        assert!((gd - gs).abs() <= 1e-12 * gg, "{p}");
        assert!(gd >= c_ov * (1.0 - 1e-12) && gg < 2.0 * c_ov + c_ins * w * l);
        assert!((f(p, "c_gg_f_per_m2") - gg / (w * l)).abs() <= 1e-15 * gg / (w * l));
        assert!((f(p, "c_gg_f_per_m") - gg / w).abs() <= 1e-15 * gg / w);
        for key in ["n_source_per_m2", "p_source_per_m2", "n_drain_per_m2"] {
            assert!(f(p, key) >= 0.0);
        }
    }
    let first = &pts[0];
    let last = &pts[15];
    assert!((f(first, "c_gg_f") / (2.0 * c_ov) - 1.0).abs() < 1e-6);
    assert!(f(last, "c_gg_intrinsic_f_per_m2") > 0.9 * f(last, "c_series_f_per_m2"));
    assert!(f(last, "c_gg_intrinsic_f_per_m2") > 0.5 * c_ins);
    assert!(f(last, "n_source_per_m2") > 1e15 && f(last, "degeneracy_source_v") > -0.1);
    // At V_DS = 0 both ends are alike; the band edge is -ξ with no contact resistance.
    assert_eq!(f(last, "n_source_per_m2"), f(last, "n_drain_per_m2"));
    assert_eq!(
        f(last, "band_edge_source_v"),
        -f(last, "degeneracy_source_v")
    );
}

/// A graphene gate's report: its level and quantum capacitance are numbers; at V_DS = 0.5 V
/// the drain end holds fewer electrons than the source end; `--out` writes the data, the
/// summary and the three figures, and the CSV has every point.
#[test]
fn graphene_gate_report_and_files() {
    let dir = scratch("files");
    let path = device_file(&dir, "process-graphene.lam", "");
    let out = dir.join("out");
    let v = json_of(&[
        "cv",
        path.to_str().unwrap(),
        "--vgs",
        "0:1:0.25",
        "--vds",
        "500mV",
        "--json",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(v["gate"], "Dirac");
    assert!(v["not_reported"].as_object().unwrap().is_empty());
    let pts = v["points"].as_array().unwrap();
    for p in pts {
        assert!(f(p, "c_gate_quantum_f_per_m2") > 0.0 && p["gate_level_v"].is_number());
        assert_eq!(f(p, "vds_v"), 0.5);
    }
    let on = &pts[4];
    assert!(f(on, "n_drain_per_m2") < f(on, "n_source_per_m2"));
    for name in [
        "cv.csv",
        "summary.json",
        "cv-parts.svg",
        "cv-parts.png",
        "cv-terminal.svg",
        "densities.svg",
        "densities.png",
    ] {
        assert!(out.join(name).is_file(), "{name}");
    }
    let csv = std::fs::read_to_string(out.join("cv.csv")).unwrap();
    let mut lines = csv.lines();
    let header = lines.next().unwrap();
    assert!(header.starts_with("vgs_v,vds_v,c_gg_f,") && header.contains("gate_level_v"));
    assert_eq!(lines.count(), 5);
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert!(
        summary["caution"].is_string() && summary["definitions"]["c_series_f_per_m2"].is_string()
    );
    let _ = std::fs::remove_dir_all(&dir);
}

/// The table names its columns and units and, for a metal gate, says why C_Qg is absent; a
/// metal gate's CSV leaves out the gate's columns.
#[test]
fn table_and_metal_gate_csv() {
    let dir = scratch("table");
    let out = dir.join("out");
    let (code, stdout, stderr) = lamina(&[
        "cv",
        demo("n-device.lam").to_str().unwrap(),
        "--vgs",
        "0,0.5",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(stdout.contains("uF/cm^2") && stdout.contains("metal gate"));
    assert_eq!(stdout.lines().filter(|l| l.starts_with("   0.")).count(), 2);
    let csv = std::fs::read_to_string(out.join("cv.csv")).unwrap();
    assert!(!csv.contains("gate_level_v") && !csv.contains("inf"));
    let _ = std::fs::remove_dir_all(&dir);
}

/// Errors: a file without the one FET (none, two) and a square-law FET are file errors
/// (exit 3) saying what is missing; a value of the wrong dimension or a bad unit in a flag,
/// and a `--set` value without its unit, are usage errors (exit 2) naming the value; a file
/// that cannot be read is exit 4.
#[test]
fn errors_and_exit_codes() {
    let dir = scratch("errors");
    let none = dir.join("none.lam");
    std::fs::write(
        &none,
        "resistor r1 (a = x, b = ground) { resistance = 1 kOhm }\nvoltage_source v (pos = x, neg = ground) { dc = 1 V }\n",
    )
    .unwrap();
    let square = dir.join("square.lam");
    std::fs::write(
        &square,
        "device nfet : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }\n\
         nfet m1 (drain = d, gate = g, source = ground)\n",
    )
    .unwrap();
    let with_param = dir.join("param.lam");
    std::fs::write(
        &with_param,
        format!(
            "include \"{}\"\nparam ov = 0.1 fF/um\nn2d dut (drain = d, gate = g, source = ground) {{ overlap_capacitance = ov }}\n",
            demo("process.lam").display()
        ),
    )
    .unwrap();
    let (n, inv) = (demo("n-device.lam"), demo("inverter.lam"));
    let (n, inv) = (n.to_str().unwrap(), inv.to_str().unwrap());
    let cases: Vec<(Vec<&str>, i32, &str)> = vec![
        (
            vec!["cv", none.to_str().unwrap(), "--vgs", "0"],
            3,
            "no FET",
        ),
        (vec!["cv", inv, "--vgs", "0"], 3, "2 FETs"),
        (
            vec!["cv", square.to_str().unwrap(), "--vgs", "0"],
            3,
            "needs a 2D-channel FET",
        ),
        (vec!["cv", n, "--vgs", "0", "--vds", "5mA"], 2, "`5 mA`"),
        (vec!["cv", n, "--vgs", "0,1x"], 2, "`x`"),
        (
            vec!["cv", "no-such-file.lam", "--vgs", "0"],
            4,
            "no-such-file.lam",
        ),
        (vec!["cv", n, "--vgs", "0", "--vds", "0,1"], 2, "one value"),
        (
            vec![
                "cv",
                with_param.to_str().unwrap(),
                "--vgs",
                "0",
                "--set",
                "ov=0.2",
            ],
            2,
            "0.2",
        ),
    ];
    for (args, code, says) in cases {
        let (got, stdout, stderr) = lamina(&args);
        assert_eq!(got, Some(code), "{args:?}: {stderr}");
        assert!(stderr.contains(says), "{args:?}: {stderr}");
        assert!(stdout.is_empty(), "{args:?}: {stdout}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}
