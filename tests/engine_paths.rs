//! Engine paths not covered by the physics checks: operating-point fallbacks, controlled
//! sources, breakpoints of a pulse, and the transient's minimum-step diagnostic.

use lamina_engine::elements::{
    Capacitor, CurrentSource, Pulse, Resistor, Vccs, Vcvs, VoltageSource, Waveform,
};
use lamina_engine::{
    Circuit, EngineError, NewtonParams, OpMethod, OpParams, Output, Probe, Start, System,
    TransientParams,
};

/// A 10 V divider needs about 20 damped iterations (0.5 V per iteration) from zero. With a
/// limit of 5, plain Newton and gmin stepping fail and source stepping (λ steps of 0.1) wins.
#[test]
fn source_stepping_rescues_a_starved_newton() {
    let mut c = Circuit::new();
    let top = c.node("top");
    let mid = c.node("mid");
    c.add("supply", VoltageSource::dc(10.0), &[top, Circuit::GROUND])
        .unwrap();
    c.add("upper", Resistor::new(1e3), &[top, mid]).unwrap();
    c.add("lower", Resistor::new(1e3), &[mid, Circuit::GROUND])
        .unwrap();
    let mut sys = System::new(c).unwrap();
    let params = OpParams {
        newton: NewtonParams {
            max_iterations: 5,
            ..NewtonParams::default()
        },
        ..OpParams::default()
    };
    let (sol, info) = sys.operating_point(&params).unwrap();
    assert_eq!(info.method, OpMethod::SourceStepping);
    let mid = sys.find_node("mid").unwrap();
    // Ohm's law with the 1e-12 S gmin on each node: 5 V to within 1e-8 V.
    assert!((sol.voltage(&sys, mid) - 5.0).abs() < 1e-8);
}

/// Controlled sources by hand analysis (common practice): a VCVS of gain 3 copies 3 x 0.5 V
/// onto its output; a VCCS of 2 mS driving 1 kΩ from a 0.5 V control gives -1 V (its current
/// flows from out_pos through the source, i.e. out of the load's top node).
#[test]
fn controlled_sources() {
    let mut c = Circuit::new();
    let ctrl = c.node("ctrl");
    let amp = c.node("amp");
    let gm_out = c.node("gm_out");
    c.add(
        "bias",
        CurrentSource::new(Waveform::Constant(0.5e-3)),
        &[ctrl, Circuit::GROUND],
    )
    .unwrap();
    c.add("r_ctrl", Resistor::new(1e3), &[ctrl, Circuit::GROUND])
        .unwrap();
    c.add(
        "e",
        Vcvs::new(3.0),
        &[amp, Circuit::GROUND, ctrl, Circuit::GROUND],
    )
    .unwrap();
    c.add("r_amp", Resistor::new(1e3), &[amp, Circuit::GROUND])
        .unwrap();
    c.add(
        "g",
        Vccs::new(2e-3),
        &[gm_out, Circuit::GROUND, ctrl, Circuit::GROUND],
    )
    .unwrap();
    c.add("r_gm", Resistor::new(1e3), &[gm_out, Circuit::GROUND])
        .unwrap();
    let mut sys = System::new(c).unwrap();
    let (sol, _) = sys.operating_point(&OpParams::default()).unwrap();
    let v = |name: &str| sol.voltage(&sys, sys.find_node(name).unwrap());
    // The 1e-12 S gmin on each node shifts these by parts in 1e9.
    assert!((v("ctrl") - 0.5).abs() < 1e-8);
    assert!((v("amp") - 1.5).abs() < 1e-8);
    assert!((v("gm_out") + 1.0).abs() < 1e-8);
}

/// A pulse into an RC: the run lands on every corner of the pulse (breakpoints), and the
/// output interval samples are on the grid.
#[test]
fn pulse_corners_are_breakpoints() {
    let mut c = Circuit::new();
    let a = c.node("a");
    let out = c.node("out");
    let w = Waveform::pulse(Pulse {
        low: 0.0,
        high: 1.0,
        delay: 1e-9,
        rise: 1e-10,
        fall: 1e-10,
        width: 2e-9,
        period: Some(5e-9),
    })
    .unwrap();
    c.add("drive", VoltageSource::new(w), &[a, Circuit::GROUND])
        .unwrap();
    c.add("r", Resistor::new(1e3), &[a, out]).unwrap();
    c.add("c", Capacitor::new(1e-13), &[out, Circuit::GROUND])
        .unwrap();
    let mut sys = System::new(c).unwrap();
    let out = sys.find_node("out").unwrap();
    let a = sys.find_node("a").unwrap();
    let mut p = TransientParams::new(10e-9);
    let res = sys
        .transient(
            &p,
            &Start::OperatingPoint(OpParams::default()),
            &[Probe::Voltage(a)],
            None,
        )
        .unwrap();
    // Corners at 1, 1.1, 3.1, 3.2, 6, 6.1, 8.1, 8.2 ns.
    assert_eq!(res.stats.breakpoints, 8);
    for corner in [1e-9, 1.1e-9, 3.1e-9, 3.2e-9, 6e-9, 6.1e-9, 8.1e-9, 8.2e-9] {
        assert!(
            res.time.iter().any(|&t| (t - corner).abs() < 1e-21),
            "no step at {corner:e}"
        );
    }
    p.output = Output::Interval(1e-9);
    let res = sys
        .transient(
            &p,
            &Start::OperatingPoint(OpParams::default()),
            &[Probe::Voltage(out)],
            None,
        )
        .unwrap();
    assert_eq!(res.time.len(), 11);
    assert!((res.time[10] - 10e-9).abs() < 1e-21);
}

/// A step too small to make progress is reported with the time and the worst equations.
#[test]
fn minimum_step_failure_names_the_worst_unknowns() {
    let mut c = Circuit::new();
    let a = c.node("a");
    c.add(
        "drive",
        CurrentSource::new(Waveform::Constant(1e-3)),
        &[a, Circuit::GROUND],
    )
    .unwrap();
    c.add("c", Capacitor::new(1e-12), &[a, Circuit::GROUND])
        .unwrap();
    let mut sys = System::new(c).unwrap();
    let mut p = TransientParams::new(1e-6);
    // One Newton iteration can never pass the update test, so every step fails.
    p.max_newton_iterations = 1;
    match sys.transient(&p, &Start::Given(vec![]), &[], None) {
        Err(EngineError::StepTooSmall { time, tried, .. }) => {
            assert_eq!(time, 0.0);
            assert!(!tried.is_empty());
        }
        other => panic!("expected a minimum-step failure, got {other:?}"),
    }
}
