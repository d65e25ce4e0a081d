//! The general transient analysis end to end: the energy a source delivers to charge a
//! capacitor through a resistor, and the node's mid-level crossing, against closed forms.

mod common;

/// Charging C through R from 0 to V with a step: the source delivers C V^2, half stored and
/// half dissipated in R whatever R is (any circuits text, e.g. A. S. Sedra, K. C. Smith,
/// Microelectronic Circuits, 7th ed., 2015, recalled, not checked); the node crosses V/2 at
/// t = tau ln 2 after the step (first-order step response, common practice).
#[test]
fn a_charging_capacitor_takes_c_v_squared_from_its_source() {
    let text = r#"
voltage_source drive (pos = in, neg = ground) {
    wave = pulse(low = 0 V, high = 1 V, delay = 1 ns, rise = 1 ps, fall = 1 ps, width = 100 ns)
}
resistor r (a = in, b = out) { resistance = 1 kOhm }
capacitor c (a = out, b = ground) { capacitance = 1 pF }
analysis transient { stop = 21 ns, record = [in, out], currents = [drive] }
"#;
    let dir = std::env::temp_dir().join(format!("lamina-transient-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("rc.lam");
    std::fs::write(&file, text).unwrap();
    let result = dir.join("result");
    let out = common::lamina_ok(&[
        "run",
        file.to_str().unwrap(),
        "--json",
        "--out",
        result.to_str().unwrap(),
    ]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let a = &v["analyses"][0];
    let s = &a["supplies"][0];
    assert_eq!(s["source"], "drive");
    let (c, vdd, tau) = (1e-12, 1.0, 1e-9);
    // After 20 tau the capacitor is charged to within e^-20 of V.
    let energy = s["energy_j"].as_f64().unwrap();
    assert!((energy / (c * vdd * vdd) - 1.0).abs() < 2e-3, "{energy:e}");
    let avg = s["avg_power_w"].as_f64().unwrap();
    assert!((avg * 21e-9 / energy - 1.0).abs() < 1e-9);
    // The peak power is V^2 / R, just after the step.
    let peak = s["peak_power_w"].as_f64().unwrap();
    assert!((peak / (vdd * vdd / 1e3) - 1.0).abs() < 0.02, "{peak:e}");
    let out_node = a["crossings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["node"] == "out")
        .unwrap();
    let rise = out_node["rising_s"][0].as_f64().unwrap();
    let expected = 1e-9 + 0.5e-12 + tau * 2f64.ln();
    assert!(
        (rise / expected - 1.0).abs() < 5e-3,
        "{rise:e} vs {expected:e}"
    );
    // The record and its plots, one per group.
    let files = dir.join("result").join("transient-1");
    for f in ["transient.csv", "voltages.svg", "currents.svg", "power.svg"] {
        assert!(files.join(f).exists(), "{f}");
    }
    let csv = std::fs::read_to_string(files.join("transient.csv")).unwrap();
    assert!(
        csv.starts_with("time_s,in_v,out_v,drive_a,drive_w"),
        "{}",
        &csv[..80]
    );
    std::fs::remove_dir_all(&dir).unwrap();
}

/// A coarse fixed output interval thins the record, not the crossings: they are found on the
/// accepted steps (the input's 50 % crossing at the middle of its 10 ps rise after 1 ns).
#[test]
fn crossings_do_not_depend_on_the_output_interval() {
    let dir = std::env::temp_dir().join(format!("lamina-interval-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for interval in ["1 ns", "20 ns"] {
        let file = dir.join("rc.lam");
        std::fs::write(
            &file,
            format!(
                "voltage_source drive (pos = in, neg = ground) {{\n\
                 wave = pulse(high = 1 V, delay = 1 ns, rise = 10 ps, fall = 10 ps, width = 100 ns)\n}}\n\
                 resistor r (a = in, b = out) {{ resistance = 1 kOhm }}\n\
                 capacitor c (a = out, b = ground) {{ capacitance = 1 pF }}\n\
                 analysis transient {{ stop = 12 ns, record = [in, out], interval = {interval} }}\n"
            ),
        )
        .unwrap();
        let out = common::lamina_ok(&["run", file.to_str().unwrap(), "--json"]);
        let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        let input = &v["analyses"][0]["crossings"][0];
        assert_eq!(input["node"], "in");
        let t = input["rising_s"][0].as_f64().unwrap();
        assert!((t / 1.005e-9 - 1.0).abs() < 1e-3, "{interval}: {t:e}");
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

/// Runs the transient of the circuit `text` and returns its table's columns `names`, one row
/// per accepted step.
fn transient_columns(text: &str, names: &[&str]) -> Vec<Vec<f64>> {
    let dir = common::Scratch::new("transient-columns");
    let file = dir.join("circuit.lam");
    std::fs::write(&file, text).unwrap();
    let result = dir.join("result");
    common::lamina_ok(&[
        "run",
        file.to_str().unwrap(),
        "--out",
        result.to_str().unwrap(),
    ]);
    let csv = std::fs::read_to_string(result.join("transient-1").join("transient.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let cols: Vec<usize> = names
        .iter()
        .map(|name| header.iter().position(|h| h == name).unwrap())
        .collect();
    lines
        .map(|line| {
            let f: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
            cols.iter().map(|&c| f[c]).collect()
        })
        .collect()
}

/// A node with no charge on it (a diode-connected square-law FET fed through a resistor from a
/// sine of offset and amplitude `amplitude`) against the algebraic closed form at every
/// accepted step: with `I = (k/2)(V - V_T)²` and `(v_in - a) / R = I`,
/// `a = V_T + (sqrt(1 + 2 k R (v_in - V_T)) - 1) / (k R)` above threshold and `a = v_in`
/// below (common practice). Returns the worst error in volts and the largest `|a|`.
fn algebraic_node_error(amplitude: f64, threshold: f64) -> (f64, f64) {
    let text = format!(
        "device nd : square_nfet {{ k = 100 mA/V^2, threshold = {threshold} V }}\n\
         voltage_source vin (pos = in, neg = ground) {{ wave = sine(offset = {amplitude} V, amplitude = {amplitude} V, frequency = 1 GHz) }}\n\
         resistor r1 (a = in, b = a) {{ resistance = 10 kOhm }}\n\
         nd m (drain = a, gate = a, source = ground)\n\
         resistor r2 (a = in, b = b) {{ resistance = 1 kOhm }}\n\
         capacitor c (a = b, b = ground) {{ capacitance = 100 fF }}\n\
         analysis transient {{ stop = 5 ns, record = [in, a, b] }}\n"
    );
    let (kr, vt) = (100e-3 * 1e4, threshold);
    let (mut worst, mut range) = (0.0f64, 0.0f64);
    let mut rows = 0;
    for f in transient_columns(&text, &["in_v", "a_v"]) {
        let (vin, a) = (f[0], f[1]);
        let exact = if vin > vt {
            vt + ((1.0 + 2.0 * kr * (vin - vt)).sqrt() - 1.0) / kr
        } else {
            vin
        };
        worst = worst.max((a - exact).abs());
        range = range.max(exact.abs());
        rows += 1;
    }
    assert!(rows > 100, "{rows} rows");
    (worst, range)
}

/// The truncation-error test watches charges only, so a node without charge checks that
/// Newton never accepts an update beyond its own tolerances (it once did, from a measured
/// quadratic-convergence constant, 39 mV wide here). Newton's tolerances here: reltol 1e-3
/// of the node's range, about 0.36 V, plus vntol 1e-6 V.
#[test]
fn a_node_without_charge_follows_its_algebraic_solution() {
    let (worst, range) = algebraic_node_error(1.0, 0.3);
    assert!(worst < 1e-4, "worst {worst:e} V of a {range} V range");
}

/// The same node scaled to a 10 mV range keeps its accuracy relative to that range (measured
/// 8.7e-9 V; a Newton update bound taken against 1 V instead of the node's values gives
/// 2.9e-5 V here).
#[test]
fn a_small_signal_node_without_charge_keeps_its_own_relative_accuracy() {
    let (worst, range) = algebraic_node_error(0.01, 0.005);
    assert!(
        (0.009..0.011).contains(&range) && worst < 1e-3 * range,
        "worst {worst:e} V of a {range} V range"
    );
}

/// A node without charge that first follows a 1 V excursion and then works within a few
/// millivolts across a square-law FET's linear/saturation boundary (drain = the node, gate
/// held at 55 mV, threshold 5 mV, fed through 3 kOhm from a 0-100 mV, 50 GHz sine) against
/// the square-law equation `(v_in - a) / R = I(v_g, a)` solved by bisection (common
/// practice). No truncation-error test watches a node without charge, so Newton's update
/// bound there must stay relative to its present value, not to the largest it has had: with
/// that range as its bound (a review's measurement) it was 1.1e-5 V off, 1.6e-3 of its
/// working range; with the plain bound 3e-10 V.
#[test]
fn a_node_without_charge_is_not_loosened_by_an_earlier_large_swing() {
    let text = "device nd : square_nfet { k = 100 mA/V^2, threshold = 5 mV }\n\
        voltage_source big (pos = m, neg = ground) { wave = pulse(high = 1 V, delay = 0.2 ns, rise = 0.2 ns, fall = 0.2 ns, width = 1 ns) }\n\
        voltage_source vin (pos = in, neg = m) { wave = sine(offset = 50 mV, amplitude = 50 mV, frequency = 50 GHz) }\n\
        voltage_source gs (pos = g, neg = ground) { wave = pwl(0 s, 0 V, 1.6 ns, 0 V, 1.7 ns, 55 mV) }\n\
        resistor r1 (a = in, b = a) { resistance = 3 kOhm }\n\
        nd m1 (drain = a, gate = g, source = ground)\n\
        voltage_source slow (pos = s, neg = ground) { wave = sine(amplitude = 1 V, frequency = 0.1 GHz) }\n\
        resistor r2 (a = s, b = b) { resistance = 1 kOhm }\n\
        capacitor c (a = b, b = ground) { capacitance = 1 pF }\n\
        analysis transient { stop = 12 ns, record = [in, a, g] }\n";
    let (k, r, vt) = (100e-3, 3e3, 5e-3);
    // The square law with its drain at `a` and source at ground, `a >= 0`.
    let current = |vg: f64, a: f64| {
        let vov = vg - vt;
        if vov <= 0.0 || a <= 0.0 {
            0.0
        } else if a >= vov {
            0.5 * k * vov * vov
        } else {
            k * (vov * a - 0.5 * a * a)
        }
    };
    let (mut worst, mut range, mut rows) = (0.0f64, 0.0f64, 0);
    for f in transient_columns(text, &["time_s", "in_v", "a_v", "g_v"]) {
        let (vin, a, vg) = (f[1], f[2], f[3]);
        if f[0] < 2e-9 {
            continue;
        }
        let (mut lo, mut hi) = (0.0, vin.max(0.0));
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if (vin - mid) / r > current(vg, mid) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let exact = 0.5 * (lo + hi);
        worst = worst.max((a - exact).abs());
        range = range.max(exact.abs());
        rows += 1;
    }
    assert!(rows > 50, "{rows} rows");
    assert!(
        worst < 1e-3 * range,
        "worst {worst:e} V of a {range:e} V working range"
    );
}

/// A source that starts moving at t = 0 (a 1 ps ramp to 1 V) into a capacitor on its node and
/// an RC, in runs far longer than the edge: the charge rates at t = 0 are taken with the
/// source already moving, so the first step's error test accepts a step on the edge's scale.
/// With the rates taken at t = 0 exactly (0 on the source's node) the 100 ns and 1 us runs
/// failed at t = 0 with the step below its minimum (a review's measurement). The input
/// crosses mid-level at 0.5 ps (its ramp, common practice).
#[test]
fn a_source_moving_from_t_zero_starts_a_long_run() {
    for stop in ["100 ns", "1 us"] {
        let text = format!(
            "voltage_source drive (pos = in, neg = ground) {{ wave = pwl(0 s, 0 V, 1 ps, 1 V) }}\n\
             capacitor cin (a = in, b = ground) {{ capacitance = 1 pF }}\n\
             resistor r (a = in, b = out) {{ resistance = 1 kOhm }}\n\
             capacitor c (a = out, b = ground) {{ capacitance = 1 pF }}\n\
             analysis transient {{ stop = {stop}, record = [in, out] }}\n"
        );
        let rows = transient_columns(&text, &["time_s", "in_v"]);
        let k = rows.iter().position(|r| r[1] >= 0.5).unwrap();
        let (a, b) = (&rows[k - 1], &rows[k]);
        let t = a[0] + (0.5 - a[1]) / (b[1] - a[1]) * (b[0] - a[0]);
        assert!(
            (t / 0.5e-12 - 1.0).abs() < 1e-2,
            "{stop}: crossing at {t:e} s"
        );
    }
}
