//! The metal-contact injection of `lamina_devices::contact`: building the table for one
//! reduced barrier length (once per card and temperature) and one evaluation from it.

use lamina_devices::contact::InjectionTable;

fn main() {
    divan::main();
}

/// A fresh table and the rows a device with barriers up to 25 kT meets (rows are built
/// when first needed).
#[divan::bench(sample_count = 3, sample_size = 1)]
fn build_rows_to_25_kt() -> f64 {
    let table = InjectionTable::new(divan::black_box(1.2));
    (0..=125).map(|i| table.eval(0.2 * i as f64, -3.0)[0]).sum()
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
