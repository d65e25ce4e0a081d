//! `lamina fit` on synthetic data made by the model itself (the `iv` job's code path with
//! known card values set through overrides), with seeded multiplicative noise and an
//! instrument floor: recovered values inside their reported 95 % intervals, mobility and
//! contact resistance unseparable from one length at one gate voltage and separated by three
//! lengths (the transfer-length argument), located errors, the written card, JSON, and the
//! README's walk from the demo data to a ring frequency.

use lamina::fit::{self, FitConfig, FitSpec, Kind, Outcome};
use lamina_netlist::table::{parse_table, TableOptions};
use lamina_netlist::{load_file, LoadOptions};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

const CARD: &str = "netlists/demo/n-device.lam";

fn lamina(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .unwrap()
}

fn temp_dir(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("lamina-fit-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// A small seeded generator (SplitMix64, Steele, Lea and Flood, OOPSLA 2014) with normal
/// deviates by Box-Muller.
struct Rng(u64);

impl Rng {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

/// The instrument floor of the synthetic data (A): a current below it reads as noise there.
const INSTRUMENT_FLOOR: f64 = 5e-12;

/// Curves of the demo card with `truth` set, at each length, with multiplicative log-normal
/// noise of `sigma` and the instrument floor; CSV with `L` per row.
fn synth(
    truth: &[(&str, &str)],
    lengths_nm: &[f64],
    vgs: &[f64],
    vds: &[f64],
    sigma: f64,
    seed: u64,
) -> String {
    let mut rng = Rng(seed);
    let mut csv = String::from("V_GS (V), V_DS (V), I_D (A), L (nm)\n");
    for &l in lengths_nm {
        let mut overrides: Vec<(String, String)> = truth
            .iter()
            .map(|(k, v)| (k.to_string(), v.to_string()))
            .collect();
        overrides.push(("n2d.length".into(), format!("{l} nm")));
        let design = load_file(
            Path::new(CARD),
            &LoadOptions {
                overrides,
                ..LoadOptions::default()
            },
        )
        .unwrap_or_else(|_| panic!("the demo card loads"));
        let pts = lamina::iv::run_iv_with(design, vgs, vds, &fit::fit_sweep_params()).unwrap();
        for p in pts {
            let mut i = p.id * (sigma * rng.normal()).exp();
            if i.abs() < INSTRUMENT_FLOOR {
                i = INSTRUMENT_FLOOR * (1.0 + 0.3 * rng.normal());
            }
            csv += &format!("{}, {}, {i:e}, {l}\n", p.vgs, p.vds);
        }
    }
    csv
}

fn range(a: f64, b: f64, step: f64) -> Vec<f64> {
    let n = ((b - a) / step).round() as usize;
    (0..=n).map(|k| a + step * k as f64).collect()
}

/// Runs the library's fit as the CLI does.
fn fit_csv(csv: &str, fits: &[&str], ties: &[&str], cfg: FitConfig) -> Outcome {
    let params: Vec<FitSpec> = fits.iter().map(|f| FitSpec::parse(f).unwrap()).collect();
    let ties = ties
        .iter()
        .map(|t| fit::parse_tie(t, &params).unwrap())
        .collect();
    let cfg = FitConfig {
        params,
        ties,
        ..cfg
    };
    let table = parse_table(csv, &TableOptions::default()).unwrap();
    fit::fit_table(Path::new(CARD), &table, &cfg).unwrap()
}

/// Weights for multiplicative noise: `w_sub = ln 10` puts a log10 residual on the scale of a
/// relative one, so every residual has the same variance, as the covariance estimate assumes.
fn balanced() -> FitConfig {
    FitConfig {
        w_sub: std::f64::consts::LN_10,
        floor_a: Some(2e-11),
        ..FitConfig::default()
    }
}

/// Over ten seeds, each recovered value lies within its reported 95 % interval in at least
/// nine (a calibrated interval misses about one in twenty; nine of ten or better happens
/// with probability 0.91 per parameter, binomial). Measured at the time of writing: 10 of 10
/// for the mobility, 10 of 10 for the work function.
#[test]
fn recovered_values_lie_within_their_95_percent_intervals_over_ten_seeds() {
    let truth = [
        ("n2d.electron_mobility", "40 cm^2/(V s)"),
        ("n2d.gate_work_function", "4.37 eV"),
    ];
    let want = [40e-4, 4.37 * 1.602_176_634e-19];
    let mut inside = [0usize; 2];
    for seed in 0..10 {
        let csv = synth(
            &truth,
            &[100.0],
            &range(-0.2, 1.2, 0.1),
            &[0.05, 0.5],
            0.02,
            1000 + seed,
        );
        let o = fit_csv(
            &csv,
            &[
                "n2d.electron_mobility=5:200cm^2/(V s):log",
                "n2d.gate_work_function=4.1:4.6eV",
            ],
            &[],
            balanced(),
        );
        assert!(o.data.points.iter().any(|p| p.kind == Kind::Floor));
        for k in 0..2 {
            let (lo, hi) = o.intervals[k].expect("an interval");
            if lo <= want[k] && want[k] <= hi {
                inside[k] += 1;
            }
        }
    }
    assert!(inside.iter().all(|&n| n >= 9), "inside {inside:?} of 10");
}

/// Output curves at one gate voltage in the linear region measure one total resistance, so
/// channel and contacts cannot be told apart at one length; three lengths separate them
/// (R_total W = R_sheet L + 2 R_c W: the transfer-length method, D. K. Schroder,
/// Semiconductor Material and Device Characterization, 3rd ed., 2006, ch. 3). At several gate
/// voltages the channel's gate dependence alone would separate them (the Y-function
/// argument), which is why this case holds the gate fixed. Measured at the time of writing:
/// one length, correlation 0.99983 and a combination with relative singular value 9.3e-3
/// named; three lengths, correlation 0.877, 39.95 +- 0.16 cm^2/(V s) and 297 +- 13 Ohm um
/// against 40 and 300.
#[test]
fn mobility_and_contact_resistance_need_several_lengths() {
    let truth = [
        ("n2d.electron_mobility", "40 cm^2/(V s)"),
        ("n2d.source_resistance", "300 Ohm um"),
        ("n2d.drain_resistance", "300 Ohm um"),
    ];
    let fits = [
        "n2d.electron_mobility=5:200cm^2/(V s):log",
        "n2d.source_resistance=10:5000Ohm um:log",
    ];
    let ties = ["n2d.drain_resistance=n2d.source_resistance"];
    let vds = range(0.01, 0.1, 0.01);
    let cfg = || FitConfig {
        w_sub: std::f64::consts::LN_10,
        ..FitConfig::default()
    };
    let one = fit_csv(
        &synth(&truth, &[100.0], &[1.2], &vds, 0.01, 7),
        &fits,
        &ties,
        cfg(),
    );
    assert!(!one.data.devices[0].transfer, "output curves");
    let rho_one = one.fit.correlation.get(1).copied().unwrap_or(1.0);
    assert!(rho_one.abs() >= 0.95, "{rho_one}");
    assert!(
        one.findings
            .iter()
            .any(|f| f.contains("cannot be told apart")),
        "{:?}, correlation {rho_one}",
        one.findings
    );
    let three = fit_csv(
        &synth(&truth, &[100.0, 200.0, 400.0], &[1.2], &vds, 0.01, 7),
        &fits,
        &ties,
        cfg(),
    );
    assert!(three.findings.is_empty(), "{:?}", three.findings);
    let rho = three.fit.correlation[1];
    assert!(rho.abs() < 0.95, "{rho}");
    for (k, want) in [40e-4, 300e-6].into_iter().enumerate() {
        let v = three.fit.values[k];
        assert!((v / want - 1.0).abs() < 0.05, "{k}: {v} vs {want}");
    }
}

const DEMO_FIT: [&str; 9] = [
    "--fit",
    "n2d.electron_mobility=5:200cm^2/(V s):log",
    "--fit",
    "n2d.source_resistance=10:5000Ohm um:log",
    "--tie",
    "n2d.drain_resistance=n2d.source_resistance",
    "--fit",
    "n2d.gate_work_function=4.0:4.8eV",
    "--json",
];

/// The README's walk: the demo data, `lamina fit` with `--out`, the fitted card included by a
/// device file reproducing the fitted currents, and a ring frequency with the fitted values,
/// both through `--set` and through a ring file that includes the fitted card.
#[test]
fn demo_data_to_fitted_card_to_ring_frequency() {
    let dir = temp_dir("demo");
    let out = dir.join("fit");
    let mut args = vec![
        "fit",
        "netlists/demo/data/n-device-curves.csv",
        "--card",
        CARD,
        "--out",
        out.to_str().unwrap(),
    ];
    args.extend(DEMO_FIT);
    let r = lamina(&args);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let json: Value = serde_json::from_slice(&r.stdout).unwrap();
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(json["parameters"], summary["parameters"]);
    // The demo data were made with 40 cm^2/(V s), 300 Ohm um and 4.37 eV (make-demo-data.py).
    let p = &json["parameters"];
    assert!((p[0]["value_si"].as_f64().unwrap() / 40e-4 - 1.0).abs() < 0.02);
    assert!((p[1]["value_si"].as_f64().unwrap() / 300e-6 - 1.0).abs() < 0.05);
    for f in [
        "fit.csv",
        "fitted.lam",
        "device-1-transfer-log.svg",
        "device-3-transfer-linear.png",
    ] {
        assert!(out.join(f).is_file(), "{f}");
    }

    // The fitted card, included by a one-device file, gives the model currents of fit.csv.
    let device = dir.join("device.lam");
    std::fs::write(
        &device,
        format!(
            "include \"{}\"\nvoltage_source g (pos = gate, neg = ground) {{ dc = 0 V }}\n\
             voltage_source d (pos = drain, neg = ground) {{ dc = 0 V }}\n\
             n2d dut (drain = drain, gate = gate, source = ground)\n",
            out.join("fitted.lam").display()
        ),
    )
    .unwrap();
    let csv = std::fs::read_to_string(out.join("fit.csv")).unwrap();
    let row: Vec<f64> = csv
        .lines()
        .nth(200)
        .unwrap()
        .split(',')
        .map(|x| x.parse().unwrap())
        .collect();
    let (l, vgs, vds, model) = (row[3], row[5], row[6], row[8]);
    let design = load_file(
        &device,
        &LoadOptions {
            overrides: vec![("n2d.length".into(), format!("{l:e} m"))],
            ..LoadOptions::default()
        },
    )
    .unwrap_or_else(|_| panic!("fitted.lam loads"));
    let i =
        lamina::iv::run_iv_with(design, &[vgs], &[vds], &fit::fit_sweep_params()).unwrap()[0].id;
    assert!((i / model - 1.0).abs() < 1e-6, "{i} vs {model}");

    // A ring frequency with the fitted values, by --set and by including the fitted card.
    let mut ring = vec!["ring", "netlists/demo/ring-21.lam", "--json"];
    let sets: Vec<String> = json["set_flags"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.as_str().unwrap().to_string())
        .collect();
    for s in &sets {
        ring.push("--set");
        ring.push(s);
    }
    let by_set = lamina(&ring);
    assert!(
        by_set.status.success(),
        "{}",
        String::from_utf8_lossy(&by_set.stderr)
    );
    let f_set = serde_json::from_slice::<Value>(&by_set.stdout).unwrap()["frequency_hz"]
        .as_f64()
        .unwrap();
    let ring_file = dir.join("ring-fitted.lam");
    let ring_text = std::fs::read_to_string("netlists/demo/ring-21.lam")
        .unwrap()
        .replace(
            "include \"process.lam\"",
            &format!("include \"{}\"", out.join("fitted.lam").display()),
        );
    std::fs::write(&ring_file, ring_text).unwrap();
    let by_include = lamina(&["ring", ring_file.to_str().unwrap(), "--json"]);
    assert!(
        by_include.status.success(),
        "{}",
        String::from_utf8_lossy(&by_include.stderr)
    );
    let f_inc = serde_json::from_slice::<Value>(&by_include.stdout).unwrap()["frequency_hz"]
        .as_f64()
        .unwrap();
    assert!(
        f_set > 1e8 && (f_set / f_inc - 1.0).abs() < 1e-6,
        "{f_set} vs {f_inc}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

fn exit_and_stderr(args: &[&str]) -> (i32, String) {
    let r = lamina(args);
    (
        r.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&r.stderr).into_owned(),
    )
}

#[test]
fn malformed_data_and_bad_flags_give_located_errors_and_exit_codes() {
    let dir = temp_dir("errors");
    let bad = dir.join("bad.csv");
    std::fs::write(
        &bad,
        "V_GS (V), V_DS (V), I_D (A)\n0.1, 0.05, 1e-9\n0.2, oops, 2e-9\n",
    )
    .unwrap();
    let mu = "n2d.electron_mobility=5:200cm^2/(V s):log";
    let (code, err) = exit_and_stderr(&["fit", bad.to_str().unwrap(), "--card", CARD, "--fit", mu]);
    assert_eq!(code, 3, "{err}");
    assert!(err.contains("bad.csv:3:6"), "{err}");

    let good = "netlists/demo/data/n-device-curves.csv";
    for (fit, place) in [
        ("n2d.electron_mobility=5:200V", "a voltage"),
        (
            "n2d.electron_mobilty=5:200cm^2/(V s)",
            "did you mean `electron_mobility`",
        ),
        ("n2d.electron_mobility=200:5cm^2/(V s)", "lower bound"),
        ("n2d.gate_work_function=-1:4eV:log", "positive lower bound"),
        (
            "p2d.electron_mobility=5:200cm^2/(V s)",
            "made from the card `n2d`",
        ),
        ("n2d.length=50:100nm", "each device's own"),
    ] {
        let (code, err) = exit_and_stderr(&["fit", good, "--card", CARD, "--fit", fit]);
        assert_eq!(code, 2, "{fit}: {err}");
        assert!(err.contains(place), "{fit}: {err}");
    }
    for extra in [
        ["--start", "n2d.electron_mobility=500cm^2/(V s)"],
        ["--tie", "n2d.drain_resistance=n2d.source_resistance"],
        ["--weights", "sub=-1"],
        ["--floor", "3 V"],
    ] {
        let (code, err) =
            exit_and_stderr(&["fit", good, "--card", CARD, "--fit", mu, extra[0], extra[1]]);
        assert_eq!(code, 2, "{extra:?}: {err}");
    }
    // The instance of the lengths card sets its own length and contact resistances.
    let (code, err) = exit_and_stderr(&[
        "fit",
        good,
        "--card",
        "netlists/demo/data/n-device-lengths.lam",
        "--fit",
        "n2d.source_resistance=10:5000Ohm um:log",
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("sets `source_resistance` itself"), "{err}");
    let (code, _) = exit_and_stderr(&["fit", "no-such.csv", "--card", CARD, "--fit", mu]);
    assert_eq!(code, 4);
    let _ = std::fs::remove_dir_all(&dir);
}
