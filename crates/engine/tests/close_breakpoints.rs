//! Breakpoints of two sources that fall a rounding error apart: a periodic pulse whose corner
//! computes to 3.9999999999999996e-5 s beside a straight-line source with a corner at 4e-5 s.

use lamina_engine::elements::{Capacitor, Pulse, Resistor, VoltageSource, Waveform};
use lamina_engine::{Circuit, NodeId, Output, Probe, Start, System, TransientParams};

/// A source of `wave` driving 1 kOhm into `cap` to ground (names suffixed by `tag`): the
/// source's node and the capacitor's.
fn source_into_rc(c: &mut Circuit, tag: &str, wave: Waveform, cap: f64) -> (NodeId, NodeId) {
    let g = Circuit::GROUND;
    let (a, y) = (c.node(&format!("in{tag}")), c.node(&format!("out{tag}")));
    c.add(&format!("v{tag}"), VoltageSource::new(wave), &[a, g])
        .unwrap();
    c.add(&format!("r{tag}"), Resistor::new(1e3), &[a, y])
        .unwrap();
    c.add(&format!("c{tag}"), Capacitor::new(cap), &[y, g])
        .unwrap();
    (a, y)
}

/// A pulse through 1 kOhm into 1 pF, and a ramp from 2 V to 0 at 4e-5 s through 1 kOhm into
/// 1 fF; the ramp's node follows its source within the RC's lag.
fn run(corner: f64) -> Result<(Vec<f64>, Vec<f64>), lamina_engine::EngineError> {
    let period = 1e-6;
    let pulse = Waveform::pulse(Pulse {
        low: 0.0,
        high: 1.0,
        delay: 0.0,
        rise: 0.1 * period,
        fall: 0.2 * period,
        width: 0.3 * period,
        period: Some(period),
    })
    .unwrap();
    let mut c = Circuit::new();
    source_into_rc(&mut c, "1", pulse, 1e-12);
    let ramp = Waveform::piecewise_linear(vec![(0.0, 2.0), (corner, 0.0)]).unwrap();
    let (b, z) = source_into_rc(&mut c, "2", ramp, 1e-15);
    let mut sys = System::new(c).unwrap();
    let mut p = TransientParams::new(6e-5);
    p.output = Output::Interval(1e-5);
    let r = sys.transient(
        &p,
        &Start::Given(vec![(b, 2.0), (z, 2.0)]),
        &[Probe::Voltage(z)],
        None,
    )?;
    Ok((r.time, r.signals[0].clone()))
}

/// Two breakpoints a rounding step apart are one: the run goes through (it stopped with a
/// step of 6.8e-21 s before), and the ramp's node is at 2 (1 - t / 4e-5) V within the
/// RC lag (1 ps against 40 us: 5e-8 of the slope's swing) before the corner and 0 after it
/// (the ramp is a straight line, so its exact response has a constant lag: common practice).
#[test]
fn breakpoints_a_rounding_error_apart_are_one() {
    let (t, v) = run(4e-5).expect("the run goes through");
    for (&t, &v) in t.iter().zip(&v) {
        let exact = if t < 4e-5 {
            2.0 * (1.0 - t / 4e-5)
        } else {
            0.0
        };
        assert!((v - exact).abs() < 1e-6, "t = {t:e}: {v} vs {exact}");
    }
}

/// Corners further apart than rounding are never merged: a pulse shorter than the smallest
/// step (0.7 ps at 0.5 s of a 1 s run, whose smallest step is 1 ps) is either followed or
/// refused with the step error, never skipped (the merge once passed over it, and the
/// capacitor behind it never saw it).
#[test]
fn a_pulse_shorter_than_the_smallest_step_is_not_skipped() {
    let pulse = Waveform::pulse(Pulse {
        low: 0.0,
        high: 1.0,
        delay: 0.5,
        rise: 0.2e-12,
        fall: 0.2e-12,
        width: 0.3e-12,
        period: None,
    })
    .unwrap();
    let mut c = Circuit::new();
    let (_, y) = source_into_rc(&mut c, "", pulse, 1e-15);
    let mut sys = System::new(c).unwrap();
    let p = TransientParams::new(1.0);
    match sys.transient(&p, &Start::Given(vec![]), &[Probe::Voltage(y)], None) {
        Err(e) => assert!(e.to_string().contains("step"), "{e}"),
        Ok(r) => {
            let peak = r.signals[0].iter().fold(0.0f64, |m, &v| m.max(v));
            assert!(peak > 0.1, "the pulse was skipped: peak {peak} V");
        }
    }
}
