//! One DC Newton iteration (assembly, fixed-pivot refactorisation, solve) of an N-stage
//! square-law ring at its single-edge start state. Time per iteration should grow linearly
//! with N; divide by N for the per-stage figure. The supply node and its source's current are
//! pinned out of the factorised matrix (see the engine's `system` module doc).

use lamina::builtin::{square_ring, SquareStage};
use lamina_engine::System;

fn main() {
    divan::main();
}

#[divan::bench(args = [100, 1_000, 10_000, 100_000], sample_count = 20)]
fn ring_newton_iteration(bencher: divan::Bencher, stages: usize) {
    let (circuit, ring) = square_ring(stages, &SquareStage::default()).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let mut x = vec![0.0; sys.unknown_count()];
    for (i, &node) in ring.outputs.iter().enumerate() {
        x[sys.node_unknown(node).unwrap()] = if i % 2 == 0 { 0.9 } else { 0.1 };
    }
    x[sys.node_unknown(sys.find_node("vdd").unwrap()).unwrap()] = 1.0;
    let mut delta = vec![0.0; x.len()];
    // The first call runs faer's pivoting factorisation; the bench times the refactor path.
    sys.dc_newton_update(&x, 1e-12, &mut delta).unwrap();
    bencher.bench_local(|| {
        sys.dc_newton_update(divan::black_box(&x), 1e-12, &mut delta)
            .unwrap();
    });
}
