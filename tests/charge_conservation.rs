//! Charge conservation of a floating node between a nonlinear and a linear capacitor.
//!
//! Node `a` is driven by an asymmetric periodic pulse; `x` floats between C1, with the
//! nonlinear charge q = C0 (u + u³/3), and C2 = 1 pF to ground. The charge on `x`,
//! -q1(v_a - v_x) + C2 v_x, starts at 0 and KCL keeps it there, so v_x = 0 whenever v_a = 0
//! (q1 is odd and increasing). A charge-oriented integrator conserves it for any step; a
//! capacitance-based one drifts (P. Yang, B. D. Epler, P. K. Chatterjee, "An investigation of
//! the charge conservation problem for MOSFET circuit simulation", IEEE JSSC 18(1), 1983).

use lamina_engine::elements::{Capacitor, NonlinearCapacitor, Pulse, VoltageSource, Waveform};
use lamina_engine::lu::LuStrategy;
use lamina_engine::{Circuit, Integrator, Probe, Start, Stepping, System, TransientParams};
use std::sync::Arc;

const PERIOD: f64 = 1e-6;

fn floating_loop(strategy: LuStrategy) -> System {
    let mut c = Circuit::new();
    let a = c.node("a");
    let x = c.node("x");
    let drive = Waveform::pulse(Pulse {
        low: 0.0,
        high: 1.0,
        delay: 0.0,
        rise: 0.1 * PERIOD,
        fall: 0.4 * PERIOD,
        width: 0.2 * PERIOD,
        period: Some(PERIOD),
    })
    .unwrap();
    c.add("drive", VoltageSource::new(drive), &[a, Circuit::GROUND])
        .unwrap();
    let c0 = 1e-12;
    let law = Arc::new(move |u: f64| (c0 * (u + u * u * u / 3.0), c0 * (1.0 + u * u)));
    c.add("c1", NonlinearCapacitor::new(law), &[a, x]).unwrap();
    c.add("c2", Capacitor::new(1e-12), &[x, Circuit::GROUND])
        .unwrap();
    System::with_strategy(c, strategy).unwrap()
}

#[test]
fn floating_node_returns_to_zero_after_100_periods() {
    for strategy in [LuStrategy::FixedPivot, LuStrategy::FaerOnly] {
        for integrator in [
            Integrator::Trapezoidal,
            Integrator::BackwardEuler,
            Integrator::VariableBdf,
        ] {
            // Latency on holds the settled node between edges (see the engine's `latency`),
            // without its whole-system fallback, which would solve this small circuit whole.
            for (stepping, latency) in [
                (Stepping::Adaptive, false),
                (Stepping::Fixed(PERIOD / 100.0), false),
                (Stepping::Adaptive, true),
            ] {
                let mut sys = floating_loop(strategy);
                let (a, x) = (sys.find_node("a").unwrap(), sys.find_node("x").unwrap());
                let mut p = TransientParams::new(100.0 * PERIOD);
                p.integrator = integrator;
                p.stepping = stepping;
                p.latency = latency;
                p.latency_fallback = false;
                // Tight Newton tolerances: what is left is the accepted iterates' residual
                // (each step's charge balance holds to the Newton tolerance), not an
                // integration error, which would grow with every step and every period.
                p.tol.reltol = 1e-9;
                p.tol.abstol = 1e-18;
                p.tol.vntol = 1e-12;
                let res = sys
                    .transient(
                        &p,
                        &Start::Given(vec![]),
                        &[Probe::Voltage(a), Probe::Voltage(x)],
                        None,
                    )
                    .unwrap();
                let mut checked = 0;
                let mut swing: f64 = 0.0;
                for k in 0..res.time.len() {
                    swing = swing.max(res.signals[1][k].abs());
                    if res.signals[0][k] == 0.0 && res.time[k] > 0.0 {
                        checked += 1;
                        assert!(
                            res.signals[1][k].abs() < 1e-12,
                            "{strategy:?} {integrator:?} {stepping:?} {latency}: v(x) = {:e} at t = {:e}",
                            res.signals[1][k],
                            res.time[k]
                        );
                    }
                }
                assert!(checked >= 100, "only {checked} samples with v(a) = 0");
                if latency {
                    let held = res.stats.latent_unknown_steps;
                    assert!(held > 0, "{integrator:?}: nothing was held");
                }
                assert!(swing > 0.3, "x must actually move: swing {swing}");
            }
        }
    }
}
