//! `lamina extract` on synthetic data with known answers: the Y-function and transfer-length
//! method on an analytic square-law device with series resistance, the three thresholds, the
//! field-effect mobility, the swing of an exponential, and the CLI with located errors.

mod common;
use common::ScratchFile;
use lamina::extract::{extract, read_card, Card, ExtractConfig, Extraction};
use lamina_netlist::table::{parse_table, TableOptions};
use std::path::Path;
use std::process::Command;

const DEMO_CARD: &str = "netlists/demo/n-device.lam";

fn card() -> Card {
    let d = lamina::design::load(Path::new(DEMO_CARD), &[]).unwrap();
    read_card(&d).unwrap()
}

fn run(csv: &str, card: Option<&Card>, cfg: &ExtractConfig) -> Extraction {
    let t = parse_table(csv, &TableOptions::default()).unwrap();
    extract(&t, card, cfg)
}

fn lamina(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .unwrap()
}

/// A scratch file with `text` in a directory of its own (removed when it is dropped).
fn temp(name: &str, text: &str) -> ScratchFile {
    ScratchFile::new("extract", name, text)
}

/// Linear-region square law with series resistance (G. Ghibaudo, Electron. Lett. 24, 543,
/// 1988): `I_D = β V_DS X / (1 + θ X)`, `X = V_GS - V_T`, `β = μ C W/L`, `θ = β R_sd`.
fn square_law_rows(mu: f64, c: f64, w: f64, l: f64, vt: f64, r_sd: f64, vds: f64) -> String {
    let beta = mu * c * w / l;
    let theta = beta * r_sd;
    (0..=1200)
        .map(|k| {
            let v = k as f64 * 1e-3;
            let x = (v - vt).max(0.0);
            let i = beta * vds * x / (1.0 + theta * x);
            format!("{v}, {vds}, {i:e}, {}, {}\n", l * 1e9, w * 1e6)
        })
        .collect()
}

#[test]
fn y_function_and_transfer_length_method_match_closed_forms() {
    let card = card();
    let c = card.c_ins_f_per_m2;
    let (mu, w, vt, r_sd, vds) = (0.004, 10e-6, 0.3, 2000.0, 1e-3);
    let mut csv = String::from("V_GS (V), V_DS (V), I_D (A), L (nm), W (um)\n");
    for l in [1e-6, 2e-6, 4e-6] {
        csv += &square_law_rows(mu, c, w, l, vt, r_sd, vds);
    }
    let cfg = ExtractConfig {
        overdrive_v: Some(0.5),
        ..ExtractConfig::default()
    };
    let x = run(&csv, Some(&card), &cfg);
    assert_eq!(x.devices.len(), 3);
    for (d, l) in [1e-6, 2e-6, 4e-6].iter().enumerate() {
        let y = x.figures[d][0].y.as_ref().unwrap();
        // Y = sqrt(β V_DS) (V_GS - V_T) exactly; the derivative windows' rounding is O(h²).
        assert!((y.vth_v - vt).abs() < 1e-4, "{}", y.vth_v);
        assert!((y.mu0_m2_per_vs.as_ref().unwrap() / mu - 1.0).abs() < 1e-3);
        // θ = β R_sd, so R_sd = θ / β (Ghibaudo 1988).
        assert!(
            (y.r_sd_ohm / r_sd - 1.0).abs() < 1e-2,
            "L = {l}: {}",
            y.r_sd_ohm
        );
    }
    // R_total W = V_DS W / I_D = L / (μ C X) + R_sd W: intercept 2 R_c W = R_sd W, slope
    // 1 / (μ C X) at X = 0.5 V (common practice for the transfer-length method). The
    // extrapolated threshold carries V_DS/2 = 0.5 mV of the square-law triode correction,
    // which moves X by 1e-3 relative.
    let t = x.tlm.as_ref().unwrap();
    assert!(
        (2.0 * t.rc_w_ohm_m.0 / (r_sd * w) - 1.0).abs() < 2e-2,
        "{t:?}"
    );
    assert!((t.r_sheet_ohm.0 * mu * c * 0.5 - 1.0).abs() < 3e-3, "{t:?}");
    assert!(t.rc_w_ohm_m.1.unwrap() < 0.05 * t.rc_w_ohm_m.0);
}

#[test]
fn three_thresholds_and_the_mobility_on_a_known_curve() {
    // I_D = β V_DS (V_GS - V_T - V_DS/2) above V_T + V_DS/2 (square-law triode; Schroder
    // 2006, ch. 4): the tangent extrapolates to V_T + V_DS/2, reported minus V_DS/2 = V_T;
    // g_m steps at V_T + V_DS/2, where dg_m/dV_GS peaks.
    let card = card();
    let (mu, w, l, vt, vds) = (0.003, 1e-6, 1e-7, 0.35, 0.05);
    let beta = mu * card.c_ins_f_per_m2 * w / l;
    let mut csv = String::from("V_GS (V), V_DS (V), I_D (A)\n");
    // Written in reverse order: the reader sorts by V_GS.
    for k in (0..=200).rev() {
        let v = k as f64 * 5e-3;
        let i = beta * vds * (v - vt - vds / 2.0).max(0.0);
        csv += &format!("{v}, {vds}, {i:e}\n");
    }
    let x = run(&csv, Some(&card), &ExtractConfig::default());
    let f = &x.figures[0][0];
    assert!((f.vth_gm.as_ref().unwrap().vth_v - vt).abs() < 1e-9);
    assert!((f.vth_sd.as_ref().unwrap() - (vt + vds / 2.0)).abs() < 1e-9);
    // Constant current: β V_DS (V - V_T - V_DS/2) = 100 nA x W/L, linear above the kink.
    let crit = 1e-7 * w / l;
    let want = vt + vds / 2.0 + crit / (beta * vds);
    let cc = f.vth_cc.as_ref().unwrap();
    assert!((cc.criterion_a / crit - 1.0).abs() < 1e-12);
    // Interpolated in log current between samples 5 mV apart: within a step.
    assert!((cc.vth_v - want).abs() < 5e-3, "{} {want}", cc.vth_v);
    // g_m = β V_DS, so L g_m / (W C V_DS) = μ.
    let m = f.mu_fe.as_ref().unwrap();
    assert!((m.insulator_m2_per_vs / mu - 1.0).abs() < 1e-9);
    assert!(m.corrected_m2_per_vs > m.insulator_m2_per_vs);
    assert!(m.c_series_f_per_m2 < m.c_ins_f_per_m2);
}

#[test]
fn swing_of_an_exponential_is_its_slope_and_the_floor_is_counted() {
    // I_D = I_0 10^(V_GS / S) with S = ln(10) kT/q n, n = 1.3 at 300 K (Sze and Ng, Physics of
    // Semiconductor Devices, 3rd ed., 2007, ch. 6).
    let kt_q = 1.380649e-23 * 300.0 / 1.602176634e-19;
    let s = 10f64.ln() * kt_q * 1.3;
    let mut csv = String::from("V_GS (V), V_DS (V), I_D (pA)\n");
    for k in 0..=60 {
        let v = k as f64 * 0.01;
        csv += &format!("{v}, 0.5, {:e}\n", 1e-2 * 10f64.powf(v / s));
    }
    let cfg = ExtractConfig {
        floor_a: Some(1e-13),
        ..ExtractConfig::default()
    };
    let x = run(&csv, None, &cfg);
    let c = &x.devices[0].curves[0];
    // 1e-14 A at 0 V rises a decade per S: below 1e-13 A up to V = S.
    let below = (0..=60).filter(|k| (*k as f64) * 0.01 < s).count();
    assert_eq!(c.below_floor, below);
    let f = &x.figures[0][0];
    assert!((f.ss_min.as_ref().unwrap().mv_per_dec - 1e3 * s).abs() < 1e-6);
    assert!(f
        .ss_table
        .iter()
        .all(|w| (w.mv_per_dec - 1e3 * s).abs() < 1e-6));
    assert!(f.ss_table.iter().all(|w| w.current >= 1e-13));
    // No W and L: the constant-current threshold is not reported, with the reason.
    assert!(f.vth_cc.as_ref().unwrap_err().contains("W and L"));

    // The same curve with n = 0.95 is steeper than the thermal limit (ln(10) kT/q, Sze and
    // Ng 2007): noise, not physics, so the minimum is refused with the reason; n = 0.99 lies
    // within the 2 % allowed for noise and is reported as measured.
    for (n, refused) in [(0.95, true), (0.99, false)] {
        let s = 10f64.ln() * kt_q * n;
        let mut csv = String::from("V_GS (V), V_DS (V), I_D (pA)\n");
        for k in 0..=60 {
            let v = k as f64 * 0.01;
            csv += &format!("{v}, 0.5, {:e}\n", 1e-2 * 10f64.powf(v / s));
        }
        let x = run(&csv, None, &cfg);
        let ss = &x.figures[0][0].ss_min;
        assert_eq!(ss.is_err(), refused, "n = {n}: {ss:?}");
        if refused {
            assert!(ss.as_ref().unwrap_err().contains("thermal limit"));
        }
    }
}

#[test]
fn repeated_sweeps_are_averaged_and_directions_kept_apart() {
    let csv = "V_GS (V), V_DS (V), I_D (A), direction\n\
               0, 0.1, 1e-9, up\n0.1, 0.1, 2e-9, up\n0, 0.1, 3e-9, up\n\
               0, 0.1, 5e-9, down\n";
    let x = run(csv, None, &ExtractConfig::default());
    let c = &x.devices[0].curves;
    assert_eq!(c.len(), 2);
    assert_eq!(
        (c[0].vgs.clone(), c[0].id.clone()),
        (vec![0.0, 0.1], vec![2e-9, 2e-9])
    );
    assert_eq!(c[0].repeats, 1);
    assert_eq!(c[1].id, vec![5e-9]);
}

#[test]
fn per_width_file_with_two_devices_through_the_cli() {
    let mut csv = String::from(
        "# two devices, current per width\nL (um), W (um), V_GS (V), V_DS (V), I_D (uA/um)\n",
    );
    for (l, w) in [(1.0, 2.0), (2.0, 5.0)] {
        for k in 0..=40 {
            let v = k as f64 * 0.025;
            // 1 uA/um per volt of overdrive above 0.3 V at L = 1 um, scaling as 1/L.
            csv += &format!("{l}, {w}, {v}, 0.05, {}\n", (v - 0.3f64).max(0.0) / l);
        }
    }
    let p = temp("two.csv", &csv);
    let out = lamina(&["extract", p.to_str().unwrap(), "--json"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let devs = v["devices"].as_array().unwrap();
    assert_eq!(devs.len(), 2);
    assert_eq!(devs[1]["width_m"].as_f64().unwrap(), 5e-6);
    let gm = devs[1]["curves"][0]["vth_linear_extrapolation"]["gm_max_siemens"]
        .as_f64()
        .unwrap();
    // 0.5 uA/um per volt times 5 um.
    assert!((gm - 2.5e-6).abs() < 1e-15, "{gm}");
    // No card: the mobility says what it needs.
    assert!(devs[0]["curves"][0]["mu_fe"]["not_reported"]
        .as_str()
        .unwrap()
        .contains("--card"));
    // Two lengths: the transfer-length method runs, without standard errors.
    assert!(v["tlm"]["rc_w_se_ohm_m"].is_null());
    assert!(v["tlm"]["r_sheet_ohm"].as_f64().unwrap() > 0.0);
}

#[test]
fn malformed_files_exit_3_with_their_line_and_column() {
    let cases = [
        ("V_GS (V), V_DS (V), I_D\n0, 1, 1\n", ":1:21:", "I_D (A)"),
        (
            "V_GS (V), V_DS (V), I_D (A)\n0, 1\n",
            ":2:5:",
            "one value per column",
        ),
        (
            "# x\nV_GS (V), V_DS (V), I_D (A)\n0, 1, 2 mA\n",
            ":3:7:",
            "not a number",
        ),
        (
            "V_GS (V), V_DS (V), I_D (A), Vb (V)\n",
            ":1:30:",
            "unknown column",
        ),
        (
            "V_GS (V), V_DS (V), I_D (A), I_D (A)\n",
            ":1:30:",
            "named twice",
        ),
        ("V_DS (V), I_D (A)\n", ":1:18:", "no `V_GS`"),
        (
            "V_GS (V), V_DS (V), I_D (A/um)\n1,1,1\n",
            ":1:21:",
            "per width",
        ),
        ("V_GS (nm), V_DS (V), I_D (A)\n1,1,1\n", ":1:1:", "a length"),
    ];
    for (k, (text, at, says)) in cases.iter().enumerate() {
        let p = temp(&format!("bad{k}.csv"), text);
        let out = lamina(&["extract", p.to_str().unwrap()]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(3), "{text}: {err}");
        assert!(err.contains(&format!("bad{k}.csv{at}")), "{text}: {err}");
        assert!(err.contains(says), "{text}: {err}");
    }
}

#[test]
fn cli_exit_codes_and_output_files() {
    let demo = "netlists/demo/data/n-device-curves.csv";
    let out = lamina(&["extract", demo, "--floor", "10 fA", "--card", DEMO_CARD]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("Transfer-length method") && text.contains("mu_FE"),
        "{text}"
    );
    // Bad flag values: usage, exit 2.
    assert_eq!(
        lamina(&["extract", demo, "--floor", "1 V"]).status.code(),
        Some(2)
    );
    assert_eq!(
        lamina(&["extract", demo, "--i-crit", "-1nA"]).status.code(),
        Some(2)
    );
    // A missing data file: exit 4.
    assert_eq!(lamina(&["extract", "no/such.csv"]).status.code(), Some(4));
    // A card that is not a 2D-channel FET: exit 3.
    let sq = temp(
        "sq.lam",
        "device nfet : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }\n\
         voltage_source g (pos = gate, neg = ground) { dc = 0 V }\n\
         voltage_source d (pos = drain, neg = ground) { dc = 0 V }\n\
         nfet m (drain = drain, gate = gate, source = ground)\n",
    );
    let out = lamina(&["extract", demo, "--card", sq.to_str().unwrap()]);
    assert_eq!(
        out.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // --out: the whole set.
    let dir = std::env::temp_dir().join(format!("lamina-extract-out-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let out = lamina(&[
        "extract",
        demo,
        "--card",
        DEMO_CARD,
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for f in [
        "summary.json",
        "curves.csv",
        "ss.csv",
        "tlm.csv",
        "tlm.svg",
        "device-1-transfer-log.png",
        "device-1-transfer-linear.svg",
        "device-1-ss-vs-id.svg",
        "device-1-y-function.svg",
    ] {
        assert!(dir.join(f).is_file(), "{f}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// The transfer-length method on the demo data (made with 300 Ohm um at each contact by
/// `netlists/demo/data/make-demo-data.py`) finds the contacts within two standard errors: its
/// equal overdrive uses the Y-function's threshold, which the series resistance does not move
/// (Ghibaudo 1988); the linear extrapolation's threshold gave 387 Ohm um here.
#[test]
fn transfer_length_method_on_the_demo_data_finds_its_contacts() {
    let out = lamina(&[
        "extract",
        "netlists/demo/data/n-device-curves.csv",
        "--card",
        "netlists/demo/n-device.lam",
        "--floor",
        "2pA",
        "--json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let rc = j["tlm"]["rc_w_ohm_m"].as_f64().unwrap();
    let se = j["tlm"]["rc_w_se_ohm_m"].as_f64().unwrap();
    assert!((rc - 300e-6).abs() < 2.0 * se, "{rc:e} +- {se:e}");
}
