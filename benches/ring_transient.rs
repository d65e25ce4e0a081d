//! Full transients of 11- and 101-stage square-law rings (k = 100 µA/V², V_T = ±0.3 V,
//! V_DD = 1 V, 1 fF loads, no intrinsic charge) over 8 periods at default tolerances, through
//! the ring job (single-edge start, stop after 2 start-up plus 5 measured periods).

use lamina::builtin::{square_ring, SquareStage};
use lamina::ring::{run_ring, RingParams};
use lamina_engine::System;

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
