//! `lamina vtc --sweep-rate`: the input of a transfer analysis ramped both ways through its
//! values in a transient. A circuit without slow charge gives the DC curve on both legs; slow
//! traps open the legs apart at a rate near their time constants and the gap closes at a much
//! slower one.

mod common;

use lamina::iv::{Direction, Leg};
use lamina::vtc_sweep::{run_file, SweptTransfer};
use serde_json::Value;
use std::path::Path;

/// The ramped sweep of a demo file at `rate_v_per_s`, both ways.
fn swept(file: &str, rate_v_per_s: f64) -> SweptTransfer {
    run_file(Path::new(file), &[], Direction::Both, rate_v_per_s)
        .unwrap_or_else(|e| panic!("{file} at {rate_v_per_s} V/s: {}", e.message()))
}

/// V_M of one leg.
fn vm(s: &SweptTransfer, leg: Leg) -> f64 {
    s.leg(leg)
        .and_then(|l| l.metrics)
        .unwrap_or_else(|| panic!("no V_M on the {} leg", leg.name()))
        .vm
}

/// Without slow traps, a ramp of 1 V/s (1 s per leg, against picosecond device time constants)
/// is quasi-static: both legs' V_M equal the DC curve's within 1 mV (the displacement currents
/// of the device charges at 1 V/s are some 1e-15 A against microamperes near V_M).
#[test]
fn trap_free_inverter_gives_the_dc_threshold_on_both_legs() {
    let file = "netlists/demo/inverter.lam";
    let dc = lamina::design::run_all(
        Path::new(file),
        &[],
        &lamina::ring::RingParams::default(),
        Some("transfer"),
    )
    .unwrap_or_else(|e| panic!("{}", e.message()));
    let dc_vm = match &dc[0].1 {
        lamina::design::Outcome::Transfer {
            metrics: Some(m), ..
        } => m.vm,
        _ => panic!("the DC curve has no V_M"),
    };
    let s = swept(file, 1.0);
    for leg in [Leg::Up, Leg::Down] {
        let v = vm(&s, leg);
        assert!(
            (v - dc_vm).abs() < 1e-3,
            "{} leg V_M {v} V, DC {dc_vm} V",
            leg.name()
        );
    }
    assert!(s.vm_shift_v().unwrap().abs() < 1e-3);
}

/// With slow traps (time constants over six decades about 10 ms) the legs' V_M differ at
/// 1 V/s (a leg takes 1 s, so many traps lag) and the difference falls to under a tenth of
/// that at 10 mV/s (100 s per leg, most traps follow): the usual picture of trap-induced
/// hysteresis (e.g. Y. Y. Illarionov et al., 2D Mater. 3, 035004 (2016), recalled, not
/// checked).
#[test]
fn slow_traps_open_the_legs_and_a_slower_ramp_closes_them() {
    let file = "netlists/demo/inverter-traps.lam";
    let middle = swept(file, 1.0).vm_shift_v().expect("a shift at 1 V/s");
    let slow = swept(file, 0.01).vm_shift_v().expect("a shift at 10 mV/s");
    assert!(middle.abs() > 5e-3, "V_M shift {middle} V at 1 V/s");
    assert!(
        slow.abs() < 0.1 * middle.abs(),
        "V_M shift {slow} V at 10 mV/s against {middle} V at 1 V/s"
    );
}

/// The command reports each leg with SI key names, and `--out` writes both legs' data, the
/// summary and the figure.
#[test]
fn command_reports_legs_in_json_and_writes_the_figure() {
    let dir = std::env::temp_dir().join(format!("lamina-vtc-hyst-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let out = common::lamina_ok(&[
        "vtc",
        "netlists/demo/inverter.lam",
        "--sweep-rate",
        "10 V/s",
        "--json",
        "--out",
        dir.to_str().unwrap(),
    ]);
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    let legs = j["sweep"]["legs"].as_array().unwrap();
    assert_eq!(legs.len(), 2);
    assert_eq!(legs[0]["leg"], "up");
    assert_eq!(legs[1]["leg"], "down");
    for l in legs {
        for key in ["vm_v", "nml_v", "nmh_v", "snm_v"] {
            assert!(l[key].as_f64().is_some(), "{key} in {l}");
        }
    }
    assert!(j["sweep"]["vm_shift_v"].as_f64().is_some());
    assert_eq!(j["sweep"]["rate_v_per_s"].as_f64(), Some(10.0));
    let names: Vec<String> = common::files(&dir).into_iter().map(|f| f.0).collect();
    for want in [
        "transfer-up.csv",
        "transfer-down.csv",
        "summary.json",
        "transfer-legs.svg",
    ] {
        assert!(names.iter().any(|n| n == want), "{want} in {names:?}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// A direction without a rate and a rate that is not a positive voltage per time are usage
/// errors (exit 2).
#[test]
fn sweep_flags_are_checked() {
    for extra in [
        &["--direction", "up"][..],
        &["--sweep-rate", "1 V"][..],
        &["--sweep-rate", "-1 V/s"][..],
    ] {
        let mut args = vec!["vtc", "netlists/demo/inverter.lam"];
        args.extend_from_slice(extra);
        let out = common::lamina(&args);
        assert_eq!(out.status.code(), Some(2), "{extra:?}");
    }
}

/// The hysteretic (bistable) curve's margins are the worst case of the two legs: without
/// traps they are each leg's own (the legs coincide within 1 mV); with traps at 1 V/s the
/// unity-gain margins are the least `V_IL`/`V_OH` against the greatest `V_OL`/`V_IH` of the
/// legs, and one leg against the other leaves a smaller square than either leg against
/// itself (the legs are shifted apart, so the butterfly's smaller lobe shrinks; the
/// maximum-square definition of E. Seevinck, F. J. List and J. Lohstroh, IEEE JSSC 22, 748
/// (1987), recalled), by less than the V_M shift.
#[test]
fn hysteretic_margins_are_the_worst_of_both_legs() {
    let own = |s: &SweptTransfer, leg: Leg| s.leg(leg).and_then(|l| l.snm).unwrap().snm;
    let plain = swept("netlists/demo/inverter.lam", 1.0);
    let h = plain.hysteretic().unwrap();
    assert!(
        (h.snm.unwrap() - own(&plain, Leg::Up)).abs() < 1e-3,
        "{h:?}"
    );
    let traps = swept("netlists/demo/inverter-traps.lam", 1.0);
    let h = traps.hysteretic().unwrap();
    let (up, down) = (
        traps.leg(Leg::Up).unwrap().metrics.unwrap(),
        traps.leg(Leg::Down).unwrap().metrics.unwrap(),
    );
    assert_eq!(h.nml, Some(up.vil.min(down.vil) - up.vol.max(down.vol)));
    assert_eq!(h.nmh, Some(up.voh.min(down.voh) - up.vih.max(down.vih)));
    let cross = h.snm.unwrap();
    let least = own(&traps, Leg::Up).min(own(&traps, Leg::Down));
    let shift = traps.vm_shift_v().unwrap().abs();
    assert!(cross < least, "cross {cross} V, legs {least} V");
    assert!(
        least - cross < shift,
        "cross {cross} V, legs {least} V, shift {shift} V"
    );
}
