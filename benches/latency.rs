//! Latency: transients over the same window with device bypass on (the default tolerance) and
//! off. The demo 21-stage 2D-FET ring (4 ns, about three periods, from the single-edge start),
//! where device evaluation dominates; the 101-stage square-law ring (16 ns, two periods), whose
//! square-law devices do not opt into bypass (their evaluation is cheaper than the expansion)
//! and so show what the pinned supply alone saves. Then the single-edge window of long
//! square-law rings (1 ns from the single-edge start, about 25 stage delays) with latency off
//! and on (`TransientParams::latency`): off, every step costs in proportion to the ring;
//! on, Newton assembles, factorises and solves the few moving stages only. And the demo
//! process at 101 stages (10 ns) off and on, where latency mostly takes its whole-system
//! fallback.

use lamina::builtin::{square_ring, SquareStage};
use lamina::design::{load, ring_from};
use lamina::ring::{single_edge_start, RingParams};
use lamina_engine::{Output, Probe, System, TransientParams};
use std::path::Path;

fn main() {
    divan::main();
}

fn window(sys: &mut System, start: &lamina_engine::Start, probe: Probe, stop: f64, bypass: f64) {
    let mut p = TransientParams::new(stop);
    p.output = Output::Streaming;
    p.bypass = bypass;
    divan::black_box(sys.transient(&p, start, &[probe], None).unwrap());
}

#[divan::bench(args = [0.0, 1.0], sample_count = 5, sample_size = 1)]
fn demo_ring_21_four_ns(bencher: divan::Bencher, bypass: f64) {
    let design = load(Path::new("netlists/demo/ring-21.lam"), &[]).unwrap();
    let (mut sys, ring, _) = ring_from(design, &RingParams::default()).unwrap();
    let start = single_edge_start(&ring);
    let probe = Probe::Voltage(ring.outputs[0]);
    bencher.bench_local(|| window(&mut sys, &start, probe, 4e-9, bypass));
}

/// The demo process at 101 stages, 10 ns from the single-edge start, latency off and on:
/// with latency its active share hovers about the whole-system fallback's thresholds, so this
/// times the fallback's switching and watching against the plain solve.
#[divan::bench(consts = [false, true], sample_count = 3, sample_size = 1)]
fn demo_ring_101_ten_ns<const LATENT: bool>(bencher: divan::Bencher) {
    let sets = [("stages".to_string(), "101".to_string())];
    let design = load(Path::new("netlists/demo/ring-21.lam"), &sets).unwrap();
    let (mut sys, ring, _) = ring_from(design, &RingParams::default()).unwrap();
    let start = single_edge_start(&ring);
    let probe = Probe::Voltage(ring.outputs[0]);
    let mut p = TransientParams::new(10e-9);
    p.output = Output::Streaming;
    p.latency = LATENT;
    bencher.bench_local(|| divan::black_box(sys.transient(&p, &start, &[probe], None).unwrap()));
}

#[divan::bench(args = [0.0, 1.0], sample_count = 5, sample_size = 1)]
fn square_ring_101_sixteen_ns(bencher: divan::Bencher, bypass: f64) {
    let (circuit, ring) = square_ring(101, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let start = single_edge_start(&ring);
    let probe = Probe::Voltage(ring.outputs[0]);
    bencher.bench_local(|| window(&mut sys, &start, probe, 16e-9, bypass));
}

#[divan::bench(consts = [false, true], args = [1001, 3001, 10001, 30001], sample_count = 3, sample_size = 1)]
fn square_ring_single_edge_one_ns<const LATENT: bool>(bencher: divan::Bencher, stages: usize) {
    single_edge(bencher, stages, 1e-9, LATENT);
}

/// With the one-nanosecond window, the cost of two more nanoseconds of edge travel (the
/// start-up, where everything is active for a few steps, cancels).
#[divan::bench(args = [1001, 30001], sample_count = 3, sample_size = 1)]
fn square_ring_single_edge_three_ns_latent(bencher: divan::Bencher, stages: usize) {
    single_edge(bencher, stages, 3e-9, true);
}

fn single_edge(bencher: divan::Bencher, stages: usize, stop: f64, latency: bool) {
    let (circuit, ring) = square_ring(stages, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let start = single_edge_start(&ring);
    let probe = Probe::Voltage(ring.outputs[0]);
    let mut p = TransientParams::new(stop);
    p.output = Output::Streaming;
    p.latency = latency;
    bencher.bench_local(|| divan::black_box(sys.transient(&p, &start, &[probe], None).unwrap()));
}
