//! The 2D-channel FET: one evaluation (current, charges and all their derivatives) over a
//! spread of bias points, and building a card's tables.

use lamina_devices::{Layer, SheetFet, SheetFetCard};
use lamina_engine::{Element, EvalContext, Stamp};

fn main() {
    divan::main();
}

fn card() -> SheetFetCard {
    SheetFetCard {
        insulator: vec![Layer {
            permittivity: 3.4,
            thickness: 5e-9,
            breakdown_field: None,
        }],
        saturation_velocity: 3.4e4,
        ..SheetFetCard::default()
    }
}

/// Median over bias points spread across off, subthreshold, linear and saturation, both
/// polarities of V_DS (|V_DS| >= 9.5 mV: the tabulated-integral branch).
#[divan::bench(sample_count = 200, sample_size = 64)]
fn evaluate(bencher: divan::Bencher) {
    bench_points(bencher, |k| {
        let vg = -0.5 + 1.5 * ((k * 37) % 64) as f64 / 63.0;
        let vd = -0.2 + 1.2 * ((k * 11) % 64) as f64 / 63.0;
        [vd, vg, 0.0]
    });
}

/// The small-V_DS branch (the series about the mid-channel potential) alone: |V_DS| below
/// 1 mV (a settled stage's conducting device), gate swept across off, subthreshold and strong
/// inversion.
#[divan::bench(sample_count = 200, sample_size = 64)]
fn evaluate_small_vds(bencher: divan::Bencher) {
    bench_points(bencher, |k| {
        let vg = -0.5 + 1.5 * ((k * 37) % 64) as f64 / 63.0;
        let vd = 1e-3 * (((k * 11) % 64) as f64 / 63.0 - 0.5);
        [vd, vg, 0.0]
    });
}

/// |V_DS| from 1 mV to 10 mV: across the switch between the two forms (0.2 kT/q, 5.2 mV at
/// 300 K); the range the quadrature form once covered.
#[divan::bench(sample_count = 200, sample_size = 64)]
fn evaluate_few_millivolts(bencher: divan::Bencher) {
    bench_points(bencher, |k| {
        let vg = -0.5 + 1.5 * ((k * 37) % 64) as f64 / 63.0;
        let vd = 1e-3 + 9e-3 * ((k * 11) % 64) as f64 / 63.0;
        [vd, vg, 0.0]
    });
}

/// Gate voltages beyond the tables' reach (1000 V): the linear continuation of σ and ρ.
#[divan::bench(sample_count = 200, sample_size = 64)]
fn evaluate_beyond_tables(bencher: divan::Bencher) {
    bench_points(bencher, |k| {
        let vg = 1200.0 + 300.0 * ((k * 37) % 64) as f64 / 63.0;
        let vd = -0.2 + 1.2 * ((k * 11) % 64) as f64 / 63.0;
        [vd, vg, 0.0]
    });
}

fn bench_points(bencher: divan::Bencher, at: impl Fn(usize) -> [f64; 3]) {
    let fet = SheetFet::new(&card()).unwrap();
    let points: Vec<[f64; 3]> = (0..64).map(at).collect();
    let (mut f, mut q, mut df, mut dq) = ([0.0; 3], [0.0; 3], [0.0; 9], [0.0; 9]);
    let ctx = EvalContext::dc();
    let mut k = 0;
    bencher.bench_local(|| {
        let x = &points[k % points.len()];
        k += 1;
        fet.evaluate(
            divan::black_box(x),
            &ctx,
            &mut Stamp::new(&mut f, &mut q, &mut df, &mut dq),
        );
        divan::black_box(f[0])
    });
}

/// Building the tables of a new stack (the shared cache is bypassed by changing the
/// temperature every time).
#[divan::bench(sample_count = 20)]
fn build_tables(bencher: divan::Bencher) {
    let mut t = 300.0;
    bencher.bench_local(|| {
        t += 1e-6;
        let c = SheetFetCard {
            temperature: t,
            ..card()
        };
        divan::black_box(lamina_devices::SheetModel::build(&c).unwrap())
    });
}

/// The same for a graphene-like Dirac gate (an inner solve for the gate's Fermi level).
#[divan::bench(sample_count = 20)]
fn build_tables_dirac_gate(bencher: divan::Bencher) {
    let mut t = 300.0;
    bencher.bench_local(|| {
        t += 1e-6;
        let c = SheetFetCard {
            temperature: t,
            gate: lamina_devices::Gate::Dirac {
                fermi_velocity: 1e6,
                half_gap: 0.015,
                gap_shift: 0.0,
                degeneracy: 4.0,
                neutral_work_function: 4.0,
                residual_density: 0.0,
            },
            ..card()
        };
        divan::black_box(lamina_devices::SheetModel::build(&c).unwrap())
    });
}

/// A device whose mobilities no other device has, while another device of the stack keeps its
/// solution alive (a Monte Carlo sample's mobility spread): the tables are formed from the
/// shared solution in one pass over the knots, without a local solve.
#[divan::bench(sample_count = 50)]
fn new_device_own_mobilities(bencher: divan::Bencher) {
    let keep = SheetFet::new(&card()).unwrap();
    let mut factor = 1.0;
    bencher.bench_local(|| {
        factor *= 1.0 + 1e-9;
        let c = SheetFetCard {
            electron_mobility: card().electron_mobility * factor,
            hole_mobility: card().hole_mobility / factor,
            ..card()
        };
        divan::black_box(SheetFet::new(&c).unwrap())
    });
    divan::black_box(keep);
}
