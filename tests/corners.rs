//! Deterministic corners of declared global spreads (`lamina montecarlo --corners K`) against
//! closed forms.
//!
//! * A divider `v = V R_l / (R_u + R_l)` (Ohm's and Kirchhoff's laws; common practice) with a
//!   normal spread on the upper resistor and a log-normal one on the lower: each corner's
//!   output is the closed form at `R_u = R_0 ± K sigma`, or at `R_l = R_0 exp(± K sigma)`.
//! * The number of corners: `2 N + 1` one at a time, `2^N + 1` with every combination, and a
//!   refusal beyond `2^12` combinations.
//! * Local spreads stay at nominal; uniform and truncated normal corners follow the rule of the
//!   module documentation of `lamina::montecarlo`.
//! * The command lists the corners that fail a limit, in JSON that parses, and writes its files.

use lamina::montecarlo::{corner_value, corners, run_corners, Applied, SampleRow};
use lamina_netlist::Distribution;
mod common;
use common::Scratch;
use std::path::Path;

const DIVIDER: &str = "\
device ru : resistor { resistance = 1 kOhm }
device rl : resistor { resistance = 1 kOhm }
device c : capacitor { capacitance = 1 pF }
voltage_source supply (pos = top, neg = ground) { dc = 1 V }
ru upper (a = top, b = mid)
rl lower (a = mid, b = ground)
c hold (a = mid, b = ground)
variation ru.resistance { distribution = normal(sigma = 20 Ohm), scope = global }
variation rl.resistance { distribution = log_normal(sigma = 0.1), scope = global }
variation rl.resistance { distribution = normal(sigma = 50 Ohm), scope = local }
variation c.capacitance { distribution = uniform(half_width = 0.1 pF), scope = global }
analysis operating_point
";

/// A directory of its own for one test (removed when the test ends).
fn scratch(name: &str) -> Scratch {
    Scratch::new(&format!("corners-{name}"))
}

/// Writes `text` and runs its corners at `k`.
fn run(dir: &Path, text: &str, k: f64, all: bool) -> (Vec<String>, Vec<SampleRow>) {
    let file = dir.join("c.lam");
    std::fs::write(&file, text).expect("temporary file");
    let nominal = lamina::design::load(&file, &[]).expect("the file loads");
    let list = corners(&nominal.variations, k, all).expect("corners");
    let rows = run_corners(&file, &[], &nominal, &list, 0);
    (list.into_iter().map(|c| c.label).collect(), rows)
}

fn value(r: &SampleRow, key: &str) -> f64 {
    r.figures
        .iter()
        .chain(&r.draws)
        .find(|(k, _)| k == key)
        .map_or(f64::NAN, |(_, v)| *v)
}

/// The solver's relative accuracy on a linear circuit: the conductance it puts from each
/// node to ground (1e-12 S) moves a 500 Ohm node by 5e-10 relative; 1e-8 is well above that
/// and far below the 3 % a corner moves the output.
const REL: f64 = 1e-8;

#[test]
fn one_at_a_time_corners_give_the_closed_form_divider_outputs() {
    let dir = scratch("divider");
    let k = 3.0;
    let (labels, rows) = run(&dir, DIVIDER, k, false);
    // Three global spreads: 2 N + 1 corners, nominal first.
    assert_eq!(
        labels,
        [
            "nominal",
            "ru.resistance+3sigma",
            "ru.resistance-3sigma",
            "rl.resistance+3sigma",
            "rl.resistance-3sigma",
            "c.capacitance+3sigma",
            "c.capacitance-3sigma",
        ]
    );
    assert!(
        rows.iter().all(|r| r.error.is_none()),
        "{:?}",
        rows[0].error
    );
    let divider = |ru: f64, rl: f64| rl / (ru + rl);
    let expected = [
        divider(1000.0, 1000.0),
        divider(1000.0 + k * 20.0, 1000.0),
        divider(1000.0 - k * 20.0, 1000.0),
        divider(1000.0, 1000.0 * (k * 0.1f64).exp()),
        divider(1000.0, 1000.0 * (-k * 0.1f64).exp()),
        divider(1000.0, 1000.0),
        divider(1000.0, 1000.0),
    ];
    for ((label, row), want) in labels.iter().zip(&rows).zip(expected) {
        let got = value(row, "operating_point.mid_v");
        assert!(
            (got / want - 1.0).abs() < REL,
            "{label}: {got} V against {want} V"
        );
    }
    // The recorded values are exactly the rule's: K sigma, exp(K sigma), and a uniform
    // half-width of 0.1 pF at 3 / sqrt(3) = 1.73 of it, clamped to the half-width.
    assert_eq!(value(&rows[1], "ru.resistance.global_shift_ohm"), 60.0);
    assert_eq!(value(&rows[2], "ru.resistance.global_shift_ohm"), -60.0);
    assert_eq!(value(&rows[3], "rl.resistance.global_factor"), 0.3f64.exp());
    assert_eq!(
        value(&rows[4], "rl.resistance.global_factor"),
        (-0.3f64).exp()
    );
    assert_eq!(value(&rows[5], "c.capacitance.global_shift_f"), 0.1e-12);
    assert_eq!(value(&rows[6], "c.capacitance.global_shift_f"), -0.1e-12);
    // Only the moved key leaves nominal; the local spread is never drawn.
    assert_eq!(value(&rows[1], "rl.resistance.global_factor"), 1.0);
    for r in &rows {
        assert_eq!(r.draws.len(), 3, "{:?}", r.draws);
        assert!(r.draws.iter().all(|(k, _)| !k.contains("local")));
    }
}

#[test]
fn all_combinations_give_two_to_the_n_corners_plus_nominal() {
    let dir = scratch("all");
    let (labels, rows) = run(&dir, DIVIDER, 2.0, true);
    assert_eq!(labels.len(), (1 << 3) + 1);
    assert_eq!(labels[0], "nominal");
    assert_eq!(
        labels[1],
        "ru.resistance+2sigma,rl.resistance+2sigma,c.capacitance+2sigma"
    );
    assert_eq!(
        labels[8],
        "ru.resistance-2sigma,rl.resistance-2sigma,c.capacitance-2sigma"
    );
    // Every sign pattern once.
    let mut sorted = labels.clone();
    sorted.sort();
    sorted.dedup();
    assert_eq!(sorted.len(), 9);
    let got = value(&rows[8], "operating_point.mid_v");
    let rl = 1000.0 * (-0.2f64).exp();
    let want = rl / (960.0 + rl);
    assert!((got / want - 1.0).abs() < REL, "{got} against {want}");
}

#[test]
fn more_than_two_to_the_twelve_combinations_are_refused() {
    let mut text = String::from("voltage_source supply (pos = top, neg = ground) { dc = 1 V }\n");
    for i in 0..13 {
        text.push_str(&format!(
            "device r{i} : resistor {{ resistance = 1 kOhm }}\nr{i} x{i} (a = top, b = ground)\n\
             variation r{i}.resistance {{ distribution = normal(sigma = 1 Ohm), scope = global }}\n"
        ));
    }
    text.push_str("analysis operating_point\n");
    let nominal = lamina_netlist::load_source("many.lam", &text, &Default::default())
        .expect("the file loads");
    let Err(e) = corners(&nominal.variations, 1.0, true) else {
        unreachable!("2^13 combinations accepted");
    };
    assert!(matches!(e, lamina::error::JobError::Usage(_)));
    assert!(e.message().contains("2^13"), "{}", e.message());
    // One at a time they are 27 runs.
    assert_eq!(
        corners(&nominal.variations, 1.0, false)
            .map(|c| c.len())
            .ok(),
        Some(27)
    );
    // Twelve are allowed.
    let twelve = text.replace(
        "variation r12.resistance { distribution = normal(sigma = 1 Ohm), scope = global }\n",
        "",
    );
    let nominal = lamina_netlist::load_source("twelve.lam", &twelve, &Default::default())
        .expect("the file loads");
    assert_eq!(
        corners(&nominal.variations, 1.0, true)
            .map(|c| c.len())
            .ok(),
        Some(4097)
    );
    // A non-positive K is refused.
    assert!(corners(&nominal.variations, 0.0, false).is_err());
    // A file with local spreads only has no corners (exit 3, like a file without spreads).
    let local = DIVIDER
        .lines()
        .filter(|l| !l.contains("scope = global"))
        .collect::<Vec<_>>()
        .join("\n");
    let nominal = lamina_netlist::load_source("local.lam", &local, &Default::default())
        .expect("the file loads");
    assert!(matches!(
        corners(&nominal.variations, 3.0, false),
        Err(lamina::error::JobError::Invalid(_))
    ));
}

#[test]
fn corner_values_follow_the_documented_rule() {
    let v = |d, k| match corner_value(d, k) {
        Applied::Shift(x) | Applied::Factor(x) => x,
    };
    assert_eq!(v(Distribution::Normal { sigma: 2.0 }, -1.5), -3.0);
    assert_eq!(v(Distribution::LogNormal { sigma: 0.2 }, 2.0), 0.4f64.exp());
    let u = Distribution::Uniform {
        half_width: 3f64.sqrt(),
    };
    assert!((v(u, 1.0) - 1.0).abs() < 1e-15);
    assert_eq!(v(u, 3.0), 3f64.sqrt());
    let t = Distribution::TruncatedNormal {
        sigma: 1.0,
        bound: 2.5,
    };
    assert_eq!(v(t, 2.0), 2.0);
    assert_eq!(v(t, -3.0), -2.5);
}

#[test]
fn the_command_lists_the_corners_that_fail_a_limit() {
    let dir = scratch("cli");
    let file = dir.join("divider.lam");
    std::fs::write(&file, DIVIDER).expect("temporary file");
    let f = file.to_str().expect("a UTF-8 path");
    let out_dir = dir.join("out");
    let o = out_dir.to_str().expect("a UTF-8 path");
    let cmd = |args: &[&str]| {
        std::process::Command::new(env!("CARGO_BIN_EXE_lamina"))
            .arg("montecarlo")
            .args(args)
            .output()
            .expect("the binary runs")
    };
    // At 3 sigma the output falls to 0.4855 V with the upper resistor high and to 0.4256 V
    // with the lower one low; a limit at 0.46 V fails only the second.
    let out = cmd(&[
        f,
        "--corners",
        "3",
        "--spec",
        "operating_point.mid_v>0.46V",
        "--json",
        "--out",
        o,
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    assert_eq!(
        v["failing_corners"],
        serde_json::json!(["rl.resistance-3sigma"])
    );
    let rows = v["corners"].as_array().expect("corners");
    assert_eq!(rows.len(), 7);
    assert_eq!(rows[4]["meets"]["operating_point.mid_v>0.46V"], false);
    assert_eq!(rows[1]["meets_all"], true);
    assert_eq!(v["local_spreads"], "nominal");
    for name in [
        "corners.csv",
        "corners.json",
        "corners_operating_point_mid_v.svg",
        "corners_operating_point_mid_v.png",
    ] {
        assert!(out_dir.join(name).is_file(), "{name} missing");
    }
    let csv = std::fs::read_to_string(out_dir.join("corners.csv")).expect("CSV");
    assert_eq!(csv.lines().count(), 8);
    assert!(csv
        .lines()
        .nth(5)
        .is_some_and(|l| l.contains("rl.resistance-3sigma") && l.contains(",false,")));
    // The text report names the failing limit; bad requests are usage errors (exit 2).
    let text = cmd(&[f, "--corners", "3", "--spec", "operating_point.mid_v>0.46V"]);
    let shown = String::from_utf8_lossy(&text.stdout);
    assert!(shown.contains("no: operating_point.mid_v>0.46V"), "{shown}");
    assert_eq!(
        cmd(&[f, "--corners", "3", "--runs", "4"]).status.code(),
        Some(2)
    );
    assert_eq!(cmd(&[f, "--corners=0"]).status.code(), Some(2));
    assert_eq!(
        cmd(&[f, "--all-combinations", "--runs", "4"]).status.code(),
        Some(2)
    );
}
