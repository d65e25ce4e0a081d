//! `lamina montecarlo`'s speed on the demo 21-stage ring with the demo process's spreads
//! (`netlists/demo/ring-21-mc.lam`): 20 samples on one thread and on two, so the figure per
//! sample and the speed-up on the two-core development machine can be read off the medians
//! (1000 samples cost 50 times the 20-sample figure). Measured figures are in the note of the
//! issue that changed them and in DEVELOPERS.md.

use std::path::Path;

fn main() {
    divan::main();
}

#[divan::bench(args = [1, 2], sample_count = 3, sample_size = 1)]
fn ring_21_twenty_samples(bencher: divan::Bencher, threads: usize) {
    let path = Path::new("netlists/demo/ring-21-mc.lam");
    let nominal = lamina::design::load(path, &[]).unwrap();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    bencher.bench_local(|| {
        let rows = pool
            .install(|| lamina::montecarlo::run_samples(path, &[], &nominal, 0..20, 1, false, 0));
        assert!(rows.iter().all(|r| r.error.is_none()));
        divan::black_box(rows);
    });
}
