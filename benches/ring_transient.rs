//! Full ring transients at default tolerances through the ring job (single-edge start):
//!
//! * `ring_eight_periods`: 11- and 101-stage square-law rings (k = 100 µA/V², V_T = ±0.3 V,
//!   V_DD = 1 V, 1 fF loads, no intrinsic charge), 2 start-up plus 5 measured periods;
//! * `settled_ring_whole_periods`: the 301-stage square-law ring with the job's default
//!   periods, where each stage sits settled for about 850 time constants per half period, so
//!   settled voltages would reach the subnormal range without the transient's flush;
//! * `demo_ring_21`: the demo 21-stage ring of 2D-channel FETs (`netlists/demo/ring-21.lam`);
//! * `ring_eight_periods_variable_bdf` and `demo_ring_21_variable_bdf`: the 101-stage and demo
//!   rings with the variable-order formula (`Integrator::VariableBdf`) instead of the
//!   trapezoidal rule.
//!
//! Step counts, rejections and Newton iterations of each case (deterministic) and the medians
//! measured before and after the step controller of issue 14 are in DEVELOPERS.md, "Stepping".

use lamina::builtin::{square_ring, SquareStage};
use lamina::ring::{run_ring, RingParams};
use lamina_engine::{Integrator, System};
use std::path::Path;

fn main() {
    divan::main();
}

#[divan::bench(args = [11, 101], sample_count = 5, sample_size = 1)]
fn ring_eight_periods(bencher: divan::Bencher, stages: usize) {
    let params = RingParams {
        discard: 2,
        measure: 5,
        ..RingParams::default()
    };
    bencher.bench_local(|| {
        let (circuit, ring) = square_ring(stages, &SquareStage::default()).unwrap();
        let mut sys = System::new(circuit).unwrap();
        divan::black_box(run_ring(&mut sys, &ring, &params).unwrap());
    });
}

#[divan::bench(sample_count = 3, sample_size = 1)]
fn settled_ring_whole_periods(bencher: divan::Bencher) {
    bencher.bench_local(|| {
        let (circuit, ring) = square_ring(301, &SquareStage::default()).unwrap();
        let mut sys = System::new(circuit).unwrap();
        divan::black_box(run_ring(&mut sys, &ring, &RingParams::default()).unwrap());
    });
}

#[divan::bench(args = [101], sample_count = 5, sample_size = 1)]
fn ring_eight_periods_variable_bdf(bencher: divan::Bencher, stages: usize) {
    let params = RingParams {
        discard: 2,
        measure: 5,
        integrator: Integrator::VariableBdf,
        ..RingParams::default()
    };
    bencher.bench_local(|| {
        let (circuit, ring) = square_ring(stages, &SquareStage::default()).unwrap();
        let mut sys = System::new(circuit).unwrap();
        divan::black_box(run_ring(&mut sys, &ring, &params).unwrap());
    });
}

fn demo_ring(bencher: divan::Bencher, integrator: Integrator) {
    let base = RingParams {
        integrator,
        ..RingParams::default()
    };
    bencher.bench_local(|| {
        let design = lamina::design::load(Path::new("netlists/demo/ring-21.lam"), &[]).unwrap();
        let (mut sys, ring, params) = lamina::design::ring_from(design, &base).unwrap();
        divan::black_box(run_ring(&mut sys, &ring, &params).unwrap());
    });
}

#[divan::bench(sample_count = 5, sample_size = 1)]
fn demo_ring_21(bencher: divan::Bencher) {
    demo_ring(bencher, Integrator::Trapezoidal);
}

#[divan::bench(sample_count = 5, sample_size = 1)]
fn demo_ring_21_variable_bdf(bencher: divan::Bencher) {
    demo_ring(bencher, Integrator::VariableBdf);
}
