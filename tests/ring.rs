//! Square-law ring oscillators (k = 100 µA/V², V_T = ±0.3 V, V_DD = 1 V, 1 fF loads).
//!
//! A ring of N identical stages oscillates at f = 1 / (2 N t_p) with t_p the stage delay
//! (common practice; e.g. J. M. Rabaey, A. Chandrakasan, B. Nikolić, Digital Integrated
//! Circuits, 2nd ed., 2003, ch. 5), so N·f is the same for every N once a single edge
//! circulates.

mod common;

use lamina::builtin::{square_ring, Ring, SquareStage};
use lamina::ring::{run_ring, run_ring_recorded, HaltCause, RingHalt, RingParams, RingReport};
use lamina_engine::elements::Resistor;
use lamina_engine::{Circuit, Integrator, System};

fn ring(stages: usize, params: &RingParams) -> RingReport {
    let (circuit, ring) = square_ring(stages, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    run_ring(&mut sys, &ring, params).unwrap()
}

#[test]
fn n_times_frequency_is_constant_across_ring_lengths() {
    // The defaults' error per stage delay does not depend on N, so they are enough here.
    let params = RingParams::default();
    let nf: Vec<f64> = [5, 11, 51]
        .iter()
        .map(|&n| n as f64 * ring(n, &params).frequency)
        .collect();
    for v in &nf {
        assert!((v / nf[1] - 1.0).abs() < 1e-3, "N f = {nf:?}");
    }
    // The measured periods are settled.
    let r = ring(11, &params);
    assert!(r.period_spread < 1e-4, "spread {}", r.period_spread);
    assert!((r.stage_delay * 2.0 * 11.0 * r.frequency - 1.0).abs() < 1e-12);
}

#[test]
fn integrators_agree_on_the_ring_frequency() {
    let tr = ring(
        11,
        &RingParams {
            reference: true,
            ..RingParams::default()
        },
    );
    let bdf2 = ring(
        11,
        &RingParams {
            reference: true,
            integrator: Integrator::Bdf2,
            ..RingParams::default()
        },
    );
    assert!(
        (bdf2.frequency / tr.frequency - 1.0).abs() < 2e-5,
        "TR {} BDF2 {}",
        tr.frequency,
        bdf2.frequency
    );
    // Backward Euler is first order and damps: at its default tolerances it still lands within
    // a percent.
    let be = ring(
        11,
        &RingParams {
            integrator: Integrator::BackwardEuler,
            ..RingParams::default()
        },
    );
    assert!(
        (be.frequency / tr.frequency - 1.0).abs() < 1e-2,
        "TR {} BE {}",
        tr.frequency,
        be.frequency
    );
}

/// The defaults are meant to land within 2e-4 of the converged frequency; the reference
/// setting is within 1e-6 of it (measured 3e-7 against a run 30x tighter still).
#[test]
fn default_tolerances_land_close_to_the_reference() {
    let reference = ring(
        11,
        &RingParams {
            reference: true,
            ..RingParams::default()
        },
    );
    let quick = ring(11, &RingParams::default());
    assert!((quick.frequency / reference.frequency - 1.0).abs() < 2e-4);
}

#[test]
fn an_even_ring_is_reported_as_not_oscillating() {
    let (circuit, ring) = square_ring(4, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let err = run_ring(&mut sys, &ring, &RingParams::default()).unwrap_err();
    assert!(err.to_string().contains("odd number"), "{err}");
    assert!(err.halt().is_none(), "refused before any run");
}

/// Energy per cycle against the switched capacitance: every stage output is charged once per
/// period through its pull-up, drawing C V_DD² from the supply (dynamic power P = C V² f,
/// common practice; e.g. Rabaey, Chandrakasan, Nikolić 2003, ch. 5). Short-circuit current
/// while both devices conduct adds a little on top (measured 0.4 % here).
#[test]
fn energy_per_cycle_matches_the_switched_capacitance() {
    let r = ring(11, &RingParams::default());
    let switched = 11.0 * 1e-15 * 1.0 * 1.0;
    let ratio = r.energy_per_cycle / switched;
    assert!(
        ratio > 1.0 && ratio < 1.02,
        "E = {:e} J, ratio {ratio}",
        r.energy_per_cycle
    );
    assert!((r.avg_power - r.energy_per_cycle * r.frequency).abs() < 1e-12 * r.avg_power);
}

/// The frequency agrees with 1 / (2 N t_p) from separately measured stage delays (common
/// practice): propagation delays between consecutive stages of the running ring, averaged over
/// rising and falling edges.
#[test]
fn frequency_agrees_with_measured_stage_delays() {
    use lamina::ring::single_edge_start;
    use lamina_engine::{Probe, TransientParams};
    use lamina_measure::waveform::propagation_delays;
    use lamina_measure::Direction;
    let (circuit, ring_nodes) = square_ring(11, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let report = run_ring(&mut sys, &ring_nodes, &RingParams::default()).unwrap();
    let (circuit, ring_nodes) = square_ring(11, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let probes = [
        Probe::Voltage(ring_nodes.outputs[4]),
        Probe::Voltage(ring_nodes.outputs[5]),
    ];
    let res = sys
        .transient(
            &TransientParams::new(8.0 / report.frequency),
            &single_edge_start(&ring_nodes),
            &probes,
            None,
        )
        .unwrap();
    // Skip start-up: keep the last four periods.
    let keep = res.time.partition_point(|&t| t < 4.0 / report.frequency);
    let (t, a, b) = (
        &res.time[keep..],
        &res.signals[0][keep..],
        &res.signals[1][keep..],
    );
    let hl = propagation_delays(t, a, b, 0.5, Direction::Rising, Direction::Falling);
    let lh = propagation_delays(t, a, b, 0.5, Direction::Falling, Direction::Rising);
    let tp =
        0.5 * (hl.iter().sum::<f64>() / hl.len() as f64 + lh.iter().sum::<f64>() / lh.len() as f64);
    let f = 1.0 / (2.0 * 11.0 * tp);
    assert!(
        (f / report.frequency - 1.0).abs() < 2e-3,
        "{f:e} vs {:e}",
        report.frequency
    );
}

/// The edge-travel estimate (the time a settled single edge takes between two same-parity
/// nodes gives the stage delay; common practice for long rings) agrees with whole periods.
#[test]
fn edge_travel_estimate_agrees_with_whole_periods() {
    let period = ring(101, &RingParams::default());
    let edge = ring(
        101,
        &RingParams {
            edge: true,
            ..RingParams::default()
        },
    );
    assert!(
        (edge.frequency / period.frequency - 1.0).abs() < 1e-3,
        "{} vs {}",
        edge.frequency,
        period.frequency
    );
    assert_eq!(edge.method, lamina::ring::METHOD_EDGE);
    assert!(
        edge.simulated < 0.6 * period.simulated,
        "no full period is needed"
    );
}

/// Runs a ring that must not oscillate, with whole periods or edge travel, and returns where it
/// stopped; the message must say so and name the settled stage outputs.
fn halt(circuit: Circuit, ring: &Ring, edge: bool) -> (RingHalt, String) {
    let mut sys = System::new(circuit).unwrap();
    let params = RingParams {
        edge,
        ..RingParams::default()
    };
    let err = run_ring(&mut sys, ring, &params).unwrap_err();
    let msg = err.to_string();
    assert!(msg.contains("does not oscillate"), "{msg}");
    let h = err
        .halt()
        .unwrap_or_else(|| panic!("no halt data: {msg}"))
        .clone();
    assert_eq!(h.voltages.len(), ring.outputs.len());
    let first = sys.node_name(ring.outputs[0]);
    assert!(
        msg.contains(&format!("{first} = {:.4} V", h.voltages[0])),
        "{msg}"
    );
    assert!(
        msg.contains(&format!("{:.3e} s after {} steps", h.simulated, h.steps)),
        "{msg}"
    );
    if ring.outputs.len() > 8 {
        assert!(
            msg.contains(&format!("and {} more", ring.outputs.len() - 8)),
            "{msg}"
        );
    }
    assert!(h.simulated < 0.2 * params.time_limit, "{msg}");
    (h, msg)
}

/// With V_DD = 0.2 V below both thresholds (0.3 V) no square-law device conducts: nothing
/// moves from the start state, no transition is ever seen, and the stillness rule stops the
/// run within a few steps, with every output where it started.
#[test]
fn a_ring_below_threshold_stops_as_still() {
    for (stages, edge) in [(11, false), (101, true)] {
        let stage = SquareStage {
            vdd: 0.2,
            ..SquareStage::default()
        };
        let (circuit, ring) = square_ring(stages, &stage).unwrap();
        let (h, msg) = halt(circuit, &ring, edge);
        assert_eq!(h.cause, HaltCause::Still, "{msg}");
        assert_eq!((h.transitions, h.stage_delay_estimate), (0, None));
        assert!(h.steps <= 50, "{msg}");
        for (i, v) in h.voltages.iter().enumerate() {
            let start = if i % 2 == 0 { 0.2 } else { 0.0 };
            assert!((v - start).abs() < 1e-6, "out[{i}] = {v}");
        }
    }
}

/// Six inverters with only five outputs named: the loop has an even number of inversions, so
/// the alternating start is a stable state of the latch and nothing ever switches.
#[test]
fn a_loop_of_even_inversions_stops_as_still() {
    let (circuit, six) = square_ring(6, &SquareStage::default()).unwrap();
    let ring = Ring {
        outputs: six.outputs[1..].to_vec(),
        ..six
    };
    let (h, msg) = halt(circuit, &ring, false);
    assert_eq!(h.cause, HaltCause::Still, "{msg}");
    assert!(h.steps <= 50, "{msg}");
    for (i, v) in h.voltages.iter().enumerate() {
        let start = if i % 2 == 0 { 1.0 } else { 0.0 };
        assert!((v - start).abs() < 1e-6, "listed output {i} = {v}");
    }
}

/// 10 kΩ from every output to ground holds each node below 0.25 V even with its pull-up fully
/// on (k/2 (V_DD - V_T)² = 24.5 µA, at most 0.245 V across 10 kΩ): the high nodes fall through
/// the band at once and the ring stalls. Whole periods stop within a few hundred stage delays
/// estimated from those first transitions (the steps may grow past the deadline by at most
/// about the time run so far, hence the factor 3). Edge travel stops as soon as its far node
/// falls without the edge having switched the stages before it.
#[test]
fn a_ring_held_low_by_its_loads_stops_early() {
    for (stages, edge) in [(11, false), (101, true)] {
        let (mut circuit, ring) = square_ring(stages, &SquareStage::default()).unwrap();
        for (i, &n) in ring.outputs.iter().enumerate() {
            circuit
                .add(
                    &format!("held[{i}]"),
                    Resistor::new(1e4),
                    &[n, Circuit::GROUND],
                )
                .unwrap();
        }
        let (h, msg) = halt(circuit, &ring, edge);
        assert!(h.transitions > 0, "{msg}");
        let te = h.stage_delay_estimate.unwrap();
        let stall = RingParams::default().stall_delays;
        if edge {
            assert_eq!(h.cause, HaltCause::NoTravellingEdge, "{msg}");
            assert!(h.simulated < stall * te, "{msg}");
            assert!(
                msg.contains("but not after an edge travelling from out[20]"),
                "{msg}"
            );
        } else {
            assert_eq!(h.cause, HaltCause::Stalled, "{msg}");
            assert!(h.simulated > stall * te, "{msg}");
            assert!(h.simulated < 3.0 * (stall + 2.0) * te, "{msg}");
            // All outputs settle at the same low level.
            for v in &h.voltages {
                assert!((v - h.voltages[0]).abs() < 1e-3 && *v < 0.25, "{msg}");
            }
        }
    }
}

/// A ring of N single-pole stages (gain A, time constant τ = RC) oscillates only when
/// A cos(π/N) > 1, and then near that threshold at ω = tan(π/N) / τ (common practice; e.g.
/// B. Razavi, Design of Analog CMOS Integrated Circuits, 2001, ring oscillators in the
/// oscillators chapter). Square-law stages biased at V_DD / 2 by a resistor R from every output
/// to a 0.5 V source have A = (k_n + k_p)(V_DD / 2 - V_T) R = 40 µS · R and τ = R · 1 fF. Below
/// the threshold the ring winds down to its balanced state and must be refused (by the stall
/// rule, or by the swing check while its period is still regular); just above it, it oscillates
/// at the small-signal frequency.
#[test]
fn a_ring_below_the_oscillation_gain_is_refused() {
    use lamina_engine::elements::VoltageSource;
    let n = 11.0;
    let threshold = 1.0 / (std::f64::consts::PI / n).cos() / 40e-6;
    let run = |r: f64| {
        let (mut circuit, ring) = square_ring(11, &SquareStage::default()).unwrap();
        let mid = circuit.node("mid");
        circuit
            .add("bias", VoltageSource::dc(0.5), &[mid, Circuit::GROUND])
            .unwrap();
        for (i, &node) in ring.outputs.iter().enumerate() {
            circuit
                .add(&format!("bias[{i}]"), Resistor::new(r), &[node, mid])
                .unwrap();
        }
        let mut sys = System::new(circuit).unwrap();
        run_ring(&mut sys, &ring, &RingParams::default())
    };
    for factor in [0.9, 0.97, 0.99] {
        let err = run(factor * threshold).unwrap_err();
        let cause = err.halt().map(|h| h.cause);
        assert!(
            matches!(
                cause,
                Some(HaltCause::Stalled) | Some(HaltCause::SwingUnsettled)
            ),
            "gain {factor} of the threshold: {err}"
        );
    }
    let r = 1.01 * threshold;
    let report = run(r).unwrap();
    let linear = (std::f64::consts::PI / n).tan() / (2.0 * std::f64::consts::PI * r * 1e-15);
    assert!(
        (report.frequency / linear - 1.0).abs() < 1e-2,
        "{:e} vs {linear:e}",
        report.frequency
    );
}

/// The waveforms handed back for plots are thinned to `wave_samples`, and the measured
/// figures do not depend on it (they are measured as the steps arrive).
#[test]
fn ring_waveforms_keep_their_bound_and_the_figures_do_not_move() {
    let run = |wave_samples: usize| {
        let (circuit, ring) = square_ring(11, &SquareStage::default()).unwrap();
        let mut sys = System::new(circuit).unwrap();
        let params = RingParams {
            wave_samples,
            ..RingParams::default()
        };
        run_ring_recorded(&mut sys, &ring, &params).unwrap()
    };
    let (whole, (t, w)) = run(1 << 20);
    // An 11-stage ring shows five stages spread from the first to the last.
    assert_eq!(
        w.iter().map(|s| s.0).collect::<Vec<_>>(),
        vec![0, 2, 5, 7, 10]
    );
    let (a, b) = (&w[0].1, &w[1].1);
    assert_eq!(t.len(), whole.steps + 1, "every step fits");
    let (thin, (tt, tw)) = run(100);
    let (ta, tb) = (&tw[0].1, &tw[1].1);
    assert_eq!(thin, whole);
    assert!(tt.len() <= 100 && tt.len() >= 50, "{} samples", tt.len());
    assert_eq!((ta.len(), tb.len()), (tt.len(), tt.len()));
    assert_eq!((tt[0], ta[0], tb[0]), (0.0, 1.0, 1.0));
    assert_eq!(*tt.last().unwrap(), thin.simulated);
    for (k, &tk) in tt.iter().enumerate() {
        let i = t.partition_point(|&x| x < tk);
        assert_eq!((t[i], a[i], b[i]), (tk, ta[k], tb[k]), "sample {k}");
    }
}

/// A Monte Carlo sample's measurement (2 periods after at least 1 discarded) gives the
/// single run's figures (5 after 3) to within the settled periods' own spread: the demo
/// 2D-FET ring and an 11-stage square-law ring, within 2e-5 in frequency and energy per
/// cycle.
#[test]
fn monte_carlo_measurement_agrees_with_the_single_run() {
    let design =
        lamina::design::load(std::path::Path::new("netlists/demo/ring-21.lam"), &[]).unwrap();
    let (mut sys, demo, _) = lamina::design::ring_from(design, &RingParams::default()).unwrap();
    let (mut square_sys, square) = {
        let (c, r) = square_ring(11, &SquareStage::default()).unwrap();
        (System::new(c).unwrap(), r)
    };
    for (sys, ring) in [(&mut sys, &demo), (&mut square_sys, &square)] {
        let full = run_ring(sys, ring, &RingParams::default()).unwrap();
        let quick = run_ring(sys, ring, &RingParams::for_monte_carlo()).unwrap();
        assert!(quick.periods_used < full.periods_used);
        assert!(
            quick.steps < full.steps,
            "{} vs {}",
            quick.steps,
            full.steps
        );
        for (a, b) in [
            (quick.frequency, full.frequency),
            (quick.energy_per_cycle, full.energy_per_cycle),
        ] {
            assert!((a / b - 1.0).abs() < 2e-5, "{a} vs {b}");
        }
    }
}

/// `integrator = variable_bdf` in a file's ring analysis selects the variable-order BDF (the
/// same as `lamina ring --integrator variable-bdf`), whose frequency agrees with the
/// trapezoidal rule's within the default tolerances' error (2e-4); a misspelt name is refused
/// at its place with the nearest name.
#[test]
fn a_ring_file_can_choose_the_variable_order_integrator() {
    let text = std::fs::read_to_string("netlists/reference/square-ring-11.lam").unwrap();
    let with = |name: &str| {
        text.replace(
            "supply = vdd }",
            &format!("supply = vdd, integrator = {name} }}"),
        )
    };
    let options = lamina_netlist::LoadOptions::default();
    let design = lamina_netlist::load_source("r.lam", &with("variable_bdf"), &options).unwrap();
    let (mut sys, ring, params) =
        lamina::design::ring_from(design, &RingParams::default()).unwrap();
    assert_eq!(params.integrator, Integrator::VariableBdf);
    let bdf = run_ring(&mut sys, &ring, &params).unwrap();
    let trap = run_ring(&mut sys, &ring, &RingParams::default()).unwrap();
    assert!(
        (bdf.frequency / trap.frequency - 1.0).abs() < 2e-4,
        "{} vs {}",
        bdf.frequency,
        trap.frequency
    );
    let e = lamina_netlist::load_source("r.lam", &with("variable_bfd"), &options)
        .err()
        .unwrap()
        .to_string();
    assert!(e.contains("r.lam:16:") && e.contains("variable_bdf"), "{e}");
}

/// `lamina ring` runs with latency (and its whole-system fallback) unless `--latency off` or
/// `--reference` says otherwise: the default run takes `--latency on`'s Newton iterations, not
/// `--latency off`'s, and its frequency agrees with the plain solve within 1e-9 (measured
/// 6e-11 on 101 stages); `--latency on` with `--reference` is refused.
#[test]
fn the_ring_command_holds_settled_stages_by_default() {
    let run = |extra: &[&str]| -> serde_json::Value {
        let mut args = vec![
            "ring",
            "--builtin",
            "square-ring",
            "--stages",
            "51",
            "--json",
        ];
        args.extend_from_slice(extra);
        serde_json::from_slice(&common::lamina_ok(&args).stdout).unwrap()
    };
    let (default, on, off) = (
        run(&[]),
        run(&["--latency", "on"]),
        run(&["--latency", "off"]),
    );
    assert_eq!(default, on);
    assert_ne!(default["newton_iterations"], off["newton_iterations"]);
    let f = |v: &serde_json::Value| v["frequency_hz"].as_f64().unwrap();
    assert!(
        (f(&default) / f(&off) - 1.0).abs() < 1e-9,
        "{default} vs {off}"
    );
    let refused = common::lamina(&[
        "ring",
        "--builtin",
        "square-ring",
        "--latency",
        "on",
        "--reference",
    ]);
    assert!(!refused.status.success());
    let message = String::from_utf8_lossy(&refused.stderr);
    assert!(
        message.contains("--latency on and --reference"),
        "{message}"
    );
}
