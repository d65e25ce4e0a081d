//! `lamina fit`'s speed: four keys of the demo n-device card (mobility, contact resistance
//! tied at both ends, gate work function, saturation velocity) fitted to the demo data's
//! 500 mV transfer curves at three lengths (213 points, 174 above the floor). The target is
//! under 2 s on the two-core development machine; measured at the time of writing: 0.72 s
//! median (see DEVELOPERS.md).

use lamina::fit::{fit_table, FitConfig, FitSpec};
use lamina_netlist::table::{parse_table, TableOptions};
use std::path::Path;

fn main() {
    divan::main();
}

#[divan::bench(sample_count = 5, sample_size = 1)]
fn four_keys_213_points(bencher: divan::Bencher) {
    let text = std::fs::read_to_string("netlists/demo/data/n-device-curves.csv").unwrap();
    // The header and the rows at V_DS = 0.5 V.
    let kept: String = text
        .lines()
        .filter(|l| {
            l.split(',')
                .nth(1)
                .is_some_and(|v| v.trim() == "0.5" || v.trim().starts_with("V_DS"))
        })
        .map(|l| format!("{l}\n"))
        .collect();
    let table = parse_table(&kept, &TableOptions::default()).unwrap();
    assert_eq!(table.rows.len(), 213);
    let params = [
        "n2d.electron_mobility=5:200cm^2/(V s):log",
        "n2d.source_resistance=10:5000Ohm um:log",
        "n2d.gate_work_function=4.0:4.8eV",
        "n2d.saturation_velocity=1e6:1e7cm/s:log",
    ]
    .iter()
    .map(|f| FitSpec::parse(f).unwrap())
    .collect::<Vec<_>>();
    let ties = vec![
        lamina::fit::parse_tie("n2d.drain_resistance=n2d.source_resistance", &params).unwrap(),
    ];
    let cfg = FitConfig {
        params,
        ties,
        ..FitConfig::default()
    };
    bencher.bench_local(|| {
        divan::black_box(fit_table(Path::new("netlists/demo/n-device.lam"), &table, &cfg).unwrap())
    });
}
