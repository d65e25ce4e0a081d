//! `System::set_waveform`: a source of a compiled system takes a new waveform, which the
//! operating point and the transient then follow; elements without a waveform refuse it.

use lamina_engine::elements::{Resistor, VoltageSource, Waveform};
use lamina_engine::{
    Circuit, ElementId, NodeId, OpParams, Output, Probe, Start, System, TransientParams,
};

/// A divider of two equal resistors driven by a constant source.
fn divider() -> (System, ElementId, ElementId, NodeId) {
    let mut c = Circuit::new();
    let (a, m) = (c.node("a"), c.node("m"));
    let src = c
        .add("src", VoltageSource::dc(1.0), &[a, Circuit::GROUND])
        .unwrap();
    let r = c.add("r1", Resistor::new(1e3), &[a, m]).unwrap();
    c.add("r2", Resistor::new(1e3), &[m, Circuit::GROUND])
        .unwrap();
    (System::new(c).unwrap(), src, r, m)
}

/// The divider's midpoint is half the source at every vertex of a new ramp (exact arithmetic
/// of a resistive divider; the integrator steps onto each breakpoint).
#[test]
fn transient_follows_the_new_waveform_at_its_vertices() {
    let (mut sys, src, _, m) = divider();
    let vertices = vec![(0.0, 0.2), (1e-3, 1.4), (2e-3, -0.6)];
    let w = Waveform::piecewise_linear(vertices.clone()).unwrap();
    sys.set_waveform(src, &w).unwrap();
    let mut p = TransientParams::new(2e-3);
    p.output = Output::EveryStep;
    let res = sys
        .transient(
            &p,
            &Start::OperatingPoint(OpParams::default()),
            &[Probe::Voltage(m)],
            None,
        )
        .unwrap();
    for (t, v) in vertices {
        let k = res
            .time
            .iter()
            .position(|&x| (x - t).abs() <= 1e-12)
            .unwrap_or_else(|| panic!("no sample at the vertex {t} s"));
        let got = res.signals[0][k];
        assert!((got - v / 2.0).abs() < 1e-9, "{got} V at {t} s");
    }
}

/// A resistor has no waveform: refused, and the system is unchanged.
#[test]
fn an_element_without_a_waveform_refuses_one() {
    let (mut sys, _, r, _) = divider();
    assert!(sys.set_waveform(r, &Waveform::Constant(1.0)).is_err());
}
