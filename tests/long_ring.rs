//! Slow (about 15 s in release builds; run by its own CI step with `--ignored`): whole periods
//! of a 10001-stage ring with latency keep costing what their few moving stages cost.

use lamina::builtin::{square_ring, SquareStage};
use lamina::ring::single_edge_start;
use lamina_engine::{Output, Probe, System, TransientParams};

/// 6.8 µs from the single-edge start is about eight and a half periods of the 10001-stage
/// square-law ring (its frequency is 1.27 MHz): the run `lamina ring` takes for whole
/// periods. Each stage is held for about a period between the edge's passes and misses
/// charge all that time; with the allowance of missed charge spent once for the whole run,
/// stages ran out of it from about 6.3 µs on and then stayed active (45 past 6.3 µs, 535 at
/// the end, and still growing: the run's average rose past 20 active unknowns a step, and
/// its time from 16 s to 80 s). A stage solved again gives back the missed charge its
/// own relaxation absorbs (`lamina_engine` latency module doc, "Accuracy"), so every stage
/// can be held again.
#[test]
#[ignore = "slow: about 15 s; run by .ci/run's long-ring step"]
fn a_long_ring_stays_latent_over_whole_periods() {
    let (circuit, ring) = square_ring(10001, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let mut p = TransientParams::new(6.8e-6);
    p.output = Output::Streaming;
    p.latency = true;
    p.latency_fallback = true;
    let probe = Probe::Voltage(ring.outputs[0]);
    let r = sys
        .transient(&p, &single_edge_start(&ring), &[probe], None)
        .unwrap();
    let s = &r.stats;
    let active = s.active_unknown_steps as f64 / s.accepted as f64;
    assert!(
        active < 16.0,
        "{active:.1} active unknowns a step on average over {} steps",
        s.accepted
    );
}
