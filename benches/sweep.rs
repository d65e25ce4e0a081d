//! The sweep job's parallel speed-up: the same 4-point grid of demo 21-stage ring runs on a pool of
//! one thread and on a pool of two (the target machine has two cores).

use lamina::sweep::{parse_axis, run_sweep};
use std::path::Path;

fn main() {
    divan::main();
}

#[divan::bench(args = [1, 2], sample_count = 3, sample_size = 1)]
fn ring_sweep_threads(bencher: divan::Bencher, threads: usize) {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    let axes = [parse_axis("vdd=0.8,0.9,1.0,1.1V").unwrap()];
    bencher.bench_local(|| {
        pool.install(|| {
            divan::black_box(run_sweep(
                Path::new("netlists/demo/ring-21.lam"),
                &[],
                &axes,
                0..4,
                false,
                false,
            ))
        })
    });
}
