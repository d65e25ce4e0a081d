//! The metal-contact injection of `lamina_devices::contact`: building the table for one
//! reduced barrier length (once per card and temperature) and one evaluation from it.

use lamina_devices::contact::InjectionTable;

fn main() {
    divan::main();
}

#[divan::bench(sample_count = 3, sample_size = 1)]
fn build_table() -> InjectionTable {
    InjectionTable::new(divan::black_box(1.2))
}

#[divan::bench]
fn evaluate(bencher: divan::Bencher) {
    let table = InjectionTable::new(1.2);
    let points: Vec<(f64, f64)> = (0..64)
        .map(|i| (0.37 * i as f64, -20.0 + 0.9 * i as f64))
        .collect();
    bencher.bench_local(|| {
        let mut sum = 0.0;
        for &(d, e) in &points {
            sum += table.eval(divan::black_box(d), divan::black_box(e))[0];
        }
        sum / points.len() as f64
    });
}
