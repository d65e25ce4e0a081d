//! Monte Carlo sampling of declared spreads against closed forms and its own guarantees.
//!
//! * A divider of two resistors with independent normal spreads: mean and standard deviation
//!   of the output against first-order error propagation (J. R. Taylor, An Introduction to
//!   Error Analysis, 2nd ed. (1997), ch. 3), within sampling error.
//! * An RC delay with a log-normal resistor: the delay is `R C ln 2`, so its quantiles are the
//!   log-normal's, `R_0 C ln 2 exp(sigma Φ⁻¹(p))`; the count of samples below each exact
//!   quantile must be a plausible binomial count.
//! * The counter-keyed normal and uniform draws pass Kolmogorov-Smirnov tests against statrs'
//!   distribution functions.
//! * Area scaling of a local spread (Pelgrom, Duinmaijer and Welbers, IEEE JSSC 24, 1433
//!   (1989)): the spread halves when W L quadruples.
//! * Rows are bit-identical on one and on two threads.
//! * Yield intervals against a published table, and located errors in declarations.

use lamina::montecarlo::{
    column, run_samples, standard_normal, stats, transform, uniform, wilson, Applied, SampleRow,
    Z95,
};
use lamina_netlist::{load_source, Distribution, LoadOptions};
use statrs::distribution::{ContinuousCDF, Normal};
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Writes `text` to a file of its own and runs `samples` on `threads` threads.
fn sample(
    name: &str,
    text: &str,
    samples: std::ops::Range<usize>,
    seed: u64,
    threads: usize,
) -> Vec<SampleRow> {
    static N: AtomicUsize = AtomicUsize::new(0);
    let n = N.fetch_add(1, Ordering::Relaxed);
    let dir = std::env::temp_dir().join(format!("lamina-mc-{}-{n}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temporary directory");
    let file: PathBuf = dir.join(format!("{name}.lam"));
    std::fs::write(&file, text).expect("temporary file");
    let nominal = lamina::design::load(&file, &[]).expect("the file loads");
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("a thread pool");
    let rows = pool.install(|| run_samples(&file, &[], &nominal, samples, seed, false, 0));
    std::fs::remove_dir_all(&dir).expect("clean up");
    rows
}

/// The values of `key` over the rows that have it.
fn values(rows: &[SampleRow], key: &str) -> Vec<f64> {
    column(rows, key).into_iter().flatten().collect()
}

const DIVIDER: &str = "\
device r : resistor { resistance = 1 kOhm }
voltage_source supply (pos = top, neg = ground) { dc = 1 V }
r upper (a = top, b = mid)
r lower (a = mid, b = ground)
variation r.resistance { distribution = normal(sigma = 20 Ohm), scope = local }
analysis operating_point
";

/// `v = V R_2 / (R_1 + R_2)` with `R_1 = R_2 = R`: `∂v/∂R_2 = -∂v/∂R_1 = V / (4 R)`, so to
/// first order `σ_v = sqrt(2) V σ_R / (4 R)` = 7.07 mV and the mean is `V / 2` (the second-order
/// bias is of relative size (σ_R/R)^2 = 4e-4, under a tenth of the mean's sampling error).
/// At 400 samples the mean's standard error is σ_v / 20 and the standard deviation's relative
/// standard error about 1 / sqrt(2 (N - 1)) = 3.5 %; both are checked at 4 standard errors
/// (two-sided confidence 99.99 %).
#[test]
fn divider_with_normal_resistors_matches_linear_error_propagation() {
    check_divider(DIVIDER, "r");
}

/// The same divider with its resistors placed by kind and the spread declared on the kind:
/// the same closed form, and the draws are named by the kind.
#[test]
fn a_spread_of_an_element_kind_reaches_its_instances() {
    let text = "\
voltage_source supply (pos = top, neg = ground) { dc = 1 V }
resistor upper (a = top, b = mid) { resistance = 1 kOhm }
resistor lower (a = mid, b = ground) { resistance = 1 kOhm }
variation resistor.resistance { distribution = normal(sigma = 20 Ohm), scope = local }
analysis operating_point
";
    check_divider(text, "resistor");
}

fn check_divider(text: &str, target: &str) {
    let rows = sample("divider", text, 0..400, 11, 2);
    assert!(rows.iter().all(|r| r.error.is_none()));
    let s = stats(&column(&rows, "operating_point.mid_v")).expect("figures");
    let sigma = 2f64.sqrt() * 1.0 * 20.0 / (4.0 * 1000.0);
    assert!(
        (s.mean - 0.5).abs() < 4.0 * sigma / 20.0,
        "mean {} against 0.5 V",
        s.mean
    );
    let rel = 1.0 / (2.0 * 399.0f64).sqrt();
    assert!(
        (s.std_dev / sigma - 1.0).abs() < 4.0 * rel,
        "standard deviation {} against {sigma}",
        s.std_dev
    );
    // Each resistor's own draw is listed and drives the output with opposite signs.
    let up = values(
        &rows,
        &format!("{target}.resistance.local_shift[upper]_ohm"),
    );
    let down = values(
        &rows,
        &format!("{target}.resistance.local_shift[lower]_ohm"),
    );
    assert_eq!((up.len(), down.len()), (400, 400));
    let mid = values(&rows, "operating_point.mid_v");
    let rho_up = lamina::montecarlo::spearman(&up, &mid).expect("varies");
    let rho_down = lamina::montecarlo::spearman(&down, &mid).expect("varies");
    assert!(rho_up < -0.5 && rho_down > 0.5, "{rho_up} {rho_down}");
}

/// A cell parameter varies per instance, and the cell's later defaults follow it: in `same`
/// the lower resistor defaults to the upper one, so the divider stays at exactly half the
/// supply whatever the draw; in `fixed` the instance sets the lower one, so the output is
/// `1 / (1 + f)` V with `f` the drawn factor of the upper resistance (closed form of the
/// divider, common practice). A global spread of the same parameter gives one draw shared by
/// both instances.
#[test]
fn a_spread_of_a_cell_parameter_reaches_later_defaults() {
    let cell = "\
cell half(top, out) {
    param upper = 1 kOhm
    param lower = upper
    resistor ru (a = top, b = out) { resistance = upper }
    resistor rl (a = out, b = ground) { resistance = lower }
}
voltage_source supply (pos = vdd, neg = ground) { dc = 1 V }
half same (top = vdd, out = a)
half fixed (top = vdd, out = b) { lower = 1 kOhm }
analysis operating_point
";
    let local = format!(
        "{cell}variation half.upper {{ distribution = log_normal(sigma = 0.3), scope = local }}\n"
    );
    let rows = sample("cell", &local, 0..50, 5, 2);
    assert!(rows.iter().all(|r| r.error.is_none()));
    let a = values(&rows, "operating_point.a_v");
    let b = values(&rows, "operating_point.b_v");
    let f_same = values(&rows, "half.upper.local_factor[same]");
    let f_fixed = values(&rows, "half.upper.local_factor[fixed]");
    assert_eq!(
        (a.len(), b.len(), f_same.len(), f_fixed.len()),
        (50, 50, 50, 50)
    );
    // 1e-8 V: within the operating point's Newton tolerance, far below the draws' effect
    // (a 30 % factor moves `b` by tens of millivolts).
    for i in 0..50 {
        assert!((a[i] - 0.5).abs() < 1e-8, "sample {i}: {}", a[i]);
        let want = 1.0 / (1.0 + f_fixed[i]);
        assert!(
            (b[i] - want).abs() < 1e-8,
            "sample {i}: {} against {want}",
            b[i]
        );
    }
    // Each instance has its own draw.
    assert!(f_same.iter().zip(&f_fixed).all(|(x, y)| x != y));
    let global = format!(
        "{cell}variation half.upper {{ distribution = log_normal(sigma = 0.3), scope = global }}\n"
    );
    let rows = sample("cell-global", &global, 0..20, 5, 1);
    let f = values(&rows, "half.upper.global_factor");
    let b = values(&rows, "operating_point.b_v");
    assert_eq!((f.len(), b.len()), (20, 20));
    for (f, b) in f.iter().zip(&b) {
        assert!((b - 1.0 / (1.0 + f)).abs() < 1e-8);
    }
    assert!(
        f.iter().any(|x| (x - f[0]).abs() > 1e-3),
        "draws vary by sample"
    );
}

/// A spread that reaches nothing is said once per target, at its first declaration: an element
/// kind whose instances are all made through a card, and a cell never placed.
#[test]
fn a_spread_that_reaches_nothing_is_warned_about() {
    let text = "\
device r : resistor { resistance = 1 kOhm }
cell unused(x) {
    param load = 1 fF
    capacitor k (a = x, b = ground) { capacitance = load }
}
voltage_source supply (pos = top, neg = ground) { dc = 1 V }
r upper (a = top, b = ground)
variation resistor.resistance { distribution = normal(sigma = 20 Ohm), scope = local }
variation resistor.resistance { distribution = normal(sigma = 20 Ohm), scope = global }
variation unused.load { distribution = normal(sigma = 0.1 fF), scope = local }
variation r.resistance { distribution = normal(sigma = 20 Ohm), scope = local }
";
    let design = load_source("w.lam", text, &LoadOptions::default()).expect("loads");
    let messages: Vec<&str> = design.warnings.iter().map(|d| d.message.as_str()).collect();
    assert_eq!(messages.len(), 2, "{messages:?}");
    assert!(messages[0].contains("`resistor`") && messages[1].contains("`unused`"));
}

/// The delay of an RC driven by a 1 ps edge is `R C ln 2` to well under 0.1 % (the step
/// response `1 - e^(-t/RC)`; see tests/delay.rs), and with `R` log-normal its quantiles are the
/// log-normal's. For each p in {5, 50, 95} %, the number of samples at or below the exact
/// quantile is Binomial(N, p) whatever the distribution (the order-statistic argument behind
/// distribution-free quantile intervals, e.g. W. J. Conover, Practical Nonparametric
/// Statistics, 3rd ed. (1999), sec. 3.2); it must lie within 3.9 binomial standard deviations
/// (99.99 % two-sided, normal approximation) of N p.
#[test]
fn rc_delay_with_log_normal_resistor_has_log_normal_quantiles() {
    let text = "\
device r : resistor { resistance = 1 kOhm }
voltage_source drive (pos = in, neg = ground) {
    wave = pulse(low = 0 V, high = 1 V, delay = 1 ns, rise = 1 ps, fall = 1 ps, width = 30 ns, period = 60 ns)
}
r load (a = in, b = out)
capacitor c (a = out, b = ground) { capacitance = 1 pF }
variation r.resistance { distribution = log_normal(sigma = 0.25), scope = global }
analysis delay { from = in, to = out, stop = 25 ns }
";
    let n = 200;
    let rows = sample("rc", text, 0..n, 5, 2);
    assert!(
        rows.iter().all(|r| r.error.is_none()),
        "{:?}",
        rows[0].error
    );
    let delays = values(&rows, "delay.t_plh_s");
    assert_eq!(delays.len(), n);
    let normal = Normal::standard();
    for p in [0.05, 0.5, 0.95] {
        let exact = 1e3 * 1e-12 * 2f64.ln() * (0.25 * normal.inverse_cdf(p)).exp();
        let below = delays.iter().filter(|d| **d <= exact).count() as f64;
        let (mean, sd) = (n as f64 * p, (n as f64 * p * (1.0 - p)).sqrt());
        assert!(
            (below - mean).abs() <= 3.9 * sd,
            "p = {p}: {below} samples below {exact:e} s, expected {mean} ± {sd}"
        );
    }
    // The recorded factor is the resistor's: delay / (R_0 C ln 2).
    let factors = values(&rows, "r.resistance.global_factor");
    for (f, d) in factors.iter().zip(&delays) {
        assert!((d / (f * 1e-9 * 2f64.ln()) - 1.0).abs() < 2e-3, "{f} {d}");
    }
}

/// The one-sample Kolmogorov-Smirnov statistic of `x` against the distribution function `cdf`.
fn ks(mut x: Vec<f64>, cdf: impl Fn(f64) -> f64) -> f64 {
    x.sort_by(f64::total_cmp);
    let n = x.len() as f64;
    x.iter()
        .enumerate()
        .map(|(i, v)| {
            let f = cdf(*v);
            (f - i as f64 / n).max((i + 1) as f64 / n - f)
        })
        .fold(0.0, f64::max)
}

/// Critical value at the 1 % level for large n: 1.628 / sqrt(n), the asymptotic Kolmogorov
/// distribution (F. J. Massey, "The Kolmogorov-Smirnov test for goodness of fit",
/// J. Am. Stat. Assoc. 46, 68 (1951), table 1). Draws over samples, over devices and over
/// parameters, each sequence from its own part of the key.
#[test]
fn normal_and_uniform_draws_pass_kolmogorov_smirnov() {
    let n = 5000;
    let crit = 1.628 / (n as f64).sqrt();
    let normal = Normal::standard();
    // Which part of the key (sample, device, parameter) runs over k; the others are fixed.
    type Key = fn(u64) -> (u64, u64, u64);
    let sequences: [Key; 3] = [|k| (k, u64::MAX, 0), |k| (3, k, 1), |k| (9, 4, k)];
    for (s, key) in sequences.iter().enumerate() {
        let z: Vec<f64> = (0..n)
            .map(|k| {
                let (a, b, c) = key(k);
                standard_normal(42, a, b, c)
            })
            .collect();
        let d = ks(z, |x| normal.cdf(x));
        assert!(d < crit, "normal, sequence {s}: D = {d}, critical {crit}");
        let u: Vec<f64> = (0..n)
            .map(|k| {
                let (a, b, c) = key(k);
                uniform(7, a, b, c)
            })
            .collect();
        let d = ks(u, |x| x.clamp(0.0, 1.0));
        assert!(d < crit, "uniform, sequence {s}: D = {d}, critical {crit}");
        // A declared uniform spread of half-width 2 through the normal it is drawn from.
        let w: Vec<f64> = (0..n)
            .map(|k| {
                let (a, b, c) = key(k);
                match transform(
                    Distribution::Uniform { half_width: 2.0 },
                    standard_normal(5, a, b, c),
                    1.0,
                ) {
                    Applied::Shift(v) | Applied::Factor(v) => v,
                }
            })
            .collect();
        let d = ks(w, |x| ((x + 2.0) / 4.0).clamp(0.0, 1.0));
        assert!(d < crit, "declared uniform, sequence {s}: D = {d}");
    }
}

/// Two 2D FETs of one card, the second with four times the gate area: with
/// `sigma = sigma_ref sqrt(A_ref / (W L))` its mobility spread is half the first's. The ratio
/// of two sample standard deviations of 300 samples each has a relative standard error of
/// about 1 / sqrt(299) = 5.8 %; checked within 4 of them.
#[test]
fn local_spread_halves_when_the_area_quadruples() {
    let text = "\
device n : sheet_fet {
    channel = MoS2, insulator = hBN, insulator_layers = 10
    electron_mobility = 40 cm^2/(V s), width = 1 um, length = 1 um
}
n small (drain = ground, gate = ground, source = ground)
n large (drain = ground, gate = ground, source = ground) { width = 2 um, length = 2 um }
variation n.electron_mobility {
    distribution = normal(sigma = 2 cm^2/(V s)), scope = local, reference_area = 1 um^2
}
analysis operating_point
";
    let rows = sample("area", text, 0..300, 3, 2);
    let small = stats(&column(
        &rows,
        "n.electron_mobility.local_shift[small]_m_2_per_v_s",
    ));
    let large = stats(&column(
        &rows,
        "n.electron_mobility.local_shift[large]_m_2_per_v_s",
    ));
    let (Some(small), Some(large)) = (small, large) else {
        let keys: Vec<&String> = rows[0].draws.iter().map(|d| &d.0).collect();
        unreachable!("no mobility columns among {keys:?}");
    };
    let ratio = small.std_dev / large.std_dev;
    assert!((ratio / 2.0 - 1.0).abs() < 4.0 * 0.058, "ratio {ratio}");
    assert!(
        (small.std_dev / 2e-4 - 1.0).abs() < 4.0 * 0.041,
        "{}",
        small.std_dev
    );
}

/// Every row, figures, drawn values and errors alike, bit for bit on one and two threads and
/// when only part of the samples is run, with global, local and correlated spreads.
#[test]
fn rows_are_identical_on_one_and_two_threads() {
    let text = "\
device r : resistor { resistance = 1 kOhm }
voltage_source supply (pos = top, neg = ground) { dc = 1 V }
r upper (a = top, b = mid)
r lower (a = mid, b = ground)
r tail (a = mid, b = ground)
variation r.resistance { distribution = normal(sigma = 20 Ohm), scope = local }
variation r.resistance { distribution = log_normal(sigma = 0.05), scope = global }
device c : capacitor { capacitance = 1 pF }
c hold (a = mid, b = ground)
variation c.capacitance { distribution = uniform(half_width = 0.1 pF), scope = local }
variation r.resistance { distribution = truncated_normal(sigma = 10 Ohm, bound = 15 Ohm), scope = global }
";
    // Two declarations of one key and scope are refused, so the last line makes this fail to
    // load; the shared file below is the valid part.
    assert!(load_source("dup.lam", text, &LoadOptions::default()).is_err());
    let text = text.replace(
        "variation r.resistance { distribution = truncated_normal(sigma = 10 Ohm, bound = 15 Ohm), scope = global }\n",
        "correlation r { keys = [resistance, resistance], coefficient = 0.5 }\n",
    );
    assert!(load_source("self.lam", &text, &LoadOptions::default()).is_err());
    let text = text.replace(
        "correlation r { keys = [resistance, resistance], coefficient = 0.5 }\n",
        "analysis operating_point\n",
    );
    let one = sample("threads1", &text, 0..64, 99, 1);
    let two = sample("threads2", &text, 0..64, 99, 2);
    assert_eq!(format!("{one:?}"), format!("{two:?}"));
    assert!(one.iter().all(|r| r.draws.len() == 1 + 3 + 1));
    // Any sub-range of samples gives exactly those rows of the whole run.
    let part = sample("part", &text, 40..64, 99, 2);
    assert_eq!(format!("{part:?}"), format!("{:?}", &one[40..]));
    // Another seed gives other draws.
    let other = sample("seed", &text, 0..4, 100, 2);
    assert_ne!(one[0].draws, other[0].draws);
}

/// Wilson score intervals of R. G. Newcombe, "Two-sided confidence intervals for the single
/// proportion: comparison of seven methods", Statistics in Medicine 17, 857 (1998), table II
/// (values recalled from memory, to the 4 decimals printed there).
#[test]
fn wilson_intervals_match_the_published_table() {
    for (k, n, lo, hi) in [
        (81, 263, 0.2553, 0.3662),
        (15, 148, 0.0624, 0.1605),
        (0, 20, 0.0, 0.1611),
        (1, 29, 0.0061, 0.1718),
    ] {
        let (l, h) = wilson(k, n, Z95);
        assert!(
            (l - lo).abs() < 6e-5 && (h - hi).abs() < 6e-5,
            "{k}/{n}: {l:.4} to {h:.4}, table {lo} to {hi}"
        );
    }
}

/// Each fault in a declaration is refused at its place (line, column) with its kind.
#[test]
fn declaration_errors_are_located() {
    let base = "\
device n : sheet_fet { channel = MoS2, insulator = hBN, insulator_layers = 10, gate_work_function = 4.4 eV, electron_mobility = 40 cm^2/(V s), width = 1 um }
device r : resistor { resistance = 1 kOhm }
";
    let cases: &[(&str, lamina_netlist::ErrorKind, usize, usize)] = &[
        (
            "variation m.electron_mobility { distribution = normal(sigma = 1 cm^2/(V s)), scope = local }",
            lamina_netlist::ErrorKind::Unknown,
            3,
            11,
        ),
        (
            "variation n.electron_mobilty { distribution = normal(sigma = 1 cm^2/(V s)), scope = local }",
            lamina_netlist::ErrorKind::Unknown,
            3,
            13,
        ),
        (
            "variation n.gate_work_function { distribution = normal(sigma = 20 mV), scope = global }",
            lamina_netlist::ErrorKind::UnitMismatch,
            3,
            64,
        ),
        (
            "variation n.gate_work_function { distribution = normal(sigma = -20 meV), scope = global }",
            lamina_netlist::ErrorKind::BadValue,
            3,
            64,
        ),
        (
            "variation r.resistance { distribution = normal(sigma = 1 Ohm), scope = local, reference_area = 1 um^2 }",
            lamina_netlist::ErrorKind::BadValue,
            3,
            79,
        ),
        (
            "variation n.gate_work_function { distribution = normal(sigma = 20 meV), scope = local }\n\
             variation n.electron_mobility { distribution = log_normal(sigma = 0.1), scope = local }\n\
             variation n.width { distribution = normal(sigma = 1 nm), scope = local }\n\
             correlation n { keys = [gate_work_function, electron_mobility], coefficient = 0.9 }\n\
             correlation n { keys = [gate_work_function, width], coefficient = 0.9 }\n\
             correlation n { keys = [electron_mobility, width], coefficient = -0.9 }",
            lamina_netlist::ErrorKind::BadValue,
            8,
            1,
        ),
        (
            "variation n.electron_mobility { distribution = log_normal(sigma = 0.1), scope = local }\n\
             correlation n { keys = [electron_mobility, band_gap], coefficient = 0.5 }",
            lamina_netlist::ErrorKind::Unknown,
            4,
            44,
        ),
        (
            "variation n.band_gap { distribution = normal(sigma = 10 meV), scope = global }",
            lamina_netlist::ErrorKind::BadValue,
            3,
            13,
        ),
        // A cell parameter that does not exist, and one of the wrong dimension.
        (
            "cell c(x) {\n    param load = 1 fF\n    capacitor k (a = x, b = ground) { capacitance = load }\n}\n\
             variation c.lod { distribution = normal(sigma = 0.1 fF), scope = local }",
            lamina_netlist::ErrorKind::Unknown,
            7,
            13,
        ),
        (
            "cell c(x) {\n    param load = 1 fF\n    capacitor k (a = x, b = ground) { capacitance = load }\n}\n\
             variation c.load { distribution = normal(sigma = 0.1 V), scope = local }",
            lamina_netlist::ErrorKind::UnitMismatch,
            7,
            50,
        ),
        // An optional key of a kind with no default has no centre on instances that omit it.
        (
            "variation sheet_fet.band_gap { distribution = normal(sigma = 10 meV), scope = global }",
            lamina_netlist::ErrorKind::BadValue,
            3,
            21,
        ),
        // A cell may not take the name of a device card: instances would silently pick one.
        (
            "cell r(x) {\n    capacitor k (a = x, b = ground) { capacitance = 1 fF }\n}",
            lamina_netlist::ErrorKind::Duplicate,
            3,
            6,
        ),
    ];
    for (extra, kind, line, col) in cases {
        let text = format!("{base}{extra}\n");
        let Err(f) = load_source("bad.lam", &text, &LoadOptions::default()) else {
            unreachable!("accepted: {extra}");
        };
        let d = &f.diagnostics[0];
        let (l, c) = f.sources.line_column(d.span.file, d.span.start);
        assert_eq!(
            (d.kind, l, c),
            (*kind, *line, *col),
            "{extra}: {}",
            d.message
        );
    }
}

/// The command: exit codes (2 for a bad limit or a figure the file does not measure, 3 for a
/// file without spreads), `--json` with statistics, yield and drivers, and `--out` with its
/// files.
#[test]
fn the_command_reports_yield_and_writes_its_files() {
    let dir = std::env::temp_dir().join(format!("lamina-mc-cli-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temporary directory");
    let file = dir.join("divider.lam");
    std::fs::write(&file, DIVIDER).expect("temporary file");
    let plain = dir.join("plain.lam");
    std::fs::write(
        &plain,
        DIVIDER.replace(
            "variation r.resistance { distribution = normal(sigma = 20 Ohm), scope = local }\n",
            "",
        ),
    )
    .expect("temporary file");
    let run = |args: &[&str]| {
        std::process::Command::new(env!("CARGO_BIN_EXE_lamina"))
            .arg("montecarlo")
            .args(args)
            .output()
            .expect("the binary runs")
    };
    let f = file.to_str().expect("a UTF-8 path");
    let code = |args: &[&str]| run(args).status.code();
    assert_eq!(
        code(&[f, "--runs", "4", "--spec", "operating_point.mid_v>1ns"]),
        Some(2)
    );
    assert_eq!(
        code(&[f, "--runs", "4", "--spec", "transfer.snm_v>0.1V"]),
        Some(2)
    );
    assert_eq!(code(&[f, "--runs", "0"]), Some(2));
    let p = plain.to_str().expect("a UTF-8 path");
    assert_eq!(code(&[p, "--runs", "4"]), Some(3));
    let out_dir = dir.join("out");
    let o = out_dir.to_str().expect("a UTF-8 path");
    let args = [
        f,
        "--runs",
        "50",
        "--seed",
        "4",
        "--spec",
        "operating_point.mid_v>0.49V",
        "--json",
        "--out",
        o,
    ];
    let out = run(&args);
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    let y = &v["yield"];
    let (pass, total) = (y["pass"].as_u64(), y["total"].as_u64());
    assert_eq!(total, Some(50));
    let mids: Vec<f64> = v["samples"]
        .as_array()
        .expect("rows")
        .iter()
        .filter_map(|r| r["operating_point.mid_v"].as_f64())
        .collect();
    assert_eq!(
        pass,
        Some(mids.iter().filter(|m| **m > 0.49).count() as u64)
    );
    let (lo, hi) = wilson(pass.unwrap_or(0) as usize, 50, Z95);
    assert_eq!(
        (y["wilson_95_low"].as_f64(), y["wilson_95_high"].as_f64()),
        (Some(lo), Some(hi))
    );
    assert!(v["figures"]["operating_point.mid_v"]["std_dev"].as_f64() > Some(0.0));
    let drivers = &v["drivers_by_spearman_rank_correlation"]["operating_point.mid_v"];
    assert_eq!(drivers.as_array().map(Vec::len), Some(2));
    for name in [
        "samples.csv",
        "samples.json",
        "summary.json",
        "histogram_operating_point_mid_v.svg",
        "cdf_operating_point_mid_v.png",
        "driver_operating_point_mid_v.svg",
    ] {
        assert!(out_dir.join(name).is_file(), "{name} missing");
    }
    let csv = std::fs::read_to_string(out_dir.join("samples.csv")).expect("CSV");
    assert_eq!(csv.lines().count(), 51);
    // Local draws are listed by device name.
    assert!(csv.starts_with("sample,r.resistance.local_shift[lower]_ohm,"));
    std::fs::remove_dir_all(&dir).expect("clean up");
}

/// A normal spread can draw a resistance below zero: that sample fails with the device and
/// the value named, and the others run. With sigma = R the chance per resistor is
/// Φ(-1) = 15.9 %, so 40 samples of two resistors without a single failure would have
/// probability 0.707^40 < 1e-6.
#[test]
fn a_draw_outside_the_keys_range_fails_only_its_sample() {
    let text = DIVIDER.replace("sigma = 20 Ohm", "sigma = 1 kOhm");
    let rows = sample("negative", &text, 0..40, 2, 2);
    let failed: Vec<&SampleRow> = rows.iter().filter(|r| r.error.is_some()).collect();
    assert!(!failed.is_empty() && failed.len() < 40);
    for r in &failed {
        let e = r.error.as_deref().unwrap_or("");
        assert!(
            e.contains("it must be positive") && e.contains("`resistance`"),
            "{e}"
        );
        assert!(r.draws.iter().any(|(_, v)| *v < -1000.0), "{:?}", r.draws);
    }
    for r in rows.iter().filter(|r| r.error.is_none()) {
        assert!(r.draws.iter().all(|(_, v)| *v > -1000.0));
    }
}

/// The Pearson correlation of paired values.
fn pearson(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len() as f64;
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
    let syy: f64 = y.iter().map(|b| (b - my).powi(2)).sum();
    sxy / (sxx * syy).sqrt()
}

/// Declared correlations reach the draws: between two normal keys the sample correlation of
/// 400 draws has a standard error of about (1 - rho^2) / sqrt(N) = 0.032 for rho = -0.6
/// (R. A. Fisher's large-sample result; common practice), checked within 4 of them, for the
/// global draws and for each device's local ones; the two devices' local draws are
/// independent of each other.
#[test]
fn declared_correlations_appear_in_the_draws() {
    let text = "\
device n : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }
voltage_source supply (pos = top, neg = ground) { dc = 1 V }
resistor load (a = top, b = out) { resistance = 10 kOhm }
n a (drain = out, gate = top, source = ground)
n b (drain = out, gate = top, source = ground)
variation n.k { distribution = normal(sigma = 10 uA/V^2), scope = global }
variation n.threshold { distribution = normal(sigma = 20 mV), scope = global }
variation n.k { distribution = normal(sigma = 5 uA/V^2), scope = local }
variation n.threshold { distribution = normal(sigma = 10 mV), scope = local }
correlation n { keys = [k, threshold], coefficient = -0.6, scope = global }
correlation n { keys = [threshold, k], coefficient = -0.6, scope = local }
analysis operating_point
";
    let rows = sample("correlated", text, 0..400, 8, 2);
    assert!(
        rows.iter().all(|r| r.error.is_none()),
        "{:?}",
        rows[0].error
    );
    let pairs = [
        ("n.k.global_shift_a_per_v_2", "n.threshold.global_shift_v"),
        (
            "n.k.local_shift[a]_a_per_v_2",
            "n.threshold.local_shift[a]_v",
        ),
        (
            "n.k.local_shift[b]_a_per_v_2",
            "n.threshold.local_shift[b]_v",
        ),
    ];
    let keys: Vec<&String> = rows[0].draws.iter().map(|d| &d.0).collect();
    for (x, y) in pairs {
        let (vx, vy) = (values(&rows, x), values(&rows, y));
        assert_eq!((vx.len(), vy.len()), (400, 400), "{x} {y} among {keys:?}");
        let r = pearson(&vx, &vy);
        assert!((r + 0.6).abs() < 4.0 * 0.032, "{x} ~ {y}: {r}");
    }
    let r = pearson(
        &values(&rows, "n.threshold.local_shift[a]_v"),
        &values(&rows, "n.threshold.local_shift[b]_v"),
    );
    assert!(r.abs() < 4.0 / 20.0, "devices a and b: {r}");
}

/// `limit` statements in the file count like `--spec` limits: the same yield, and a run split
/// into shards and merged reports them identically (the parts carry them).
#[test]
fn file_limits_count_like_command_line_limits_and_survive_a_merge() {
    let dir = std::env::temp_dir().join(format!("lamina-mc-limits-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let demo = std::fs::canonicalize("netlists/demo/inverter-mc.lam").unwrap();
    let file = dir.join("limited.lam");
    std::fs::write(
        &file,
        format!(
            "include \"{}\"\nlimit transfer.snm_v {{ above = 0.25 V }}\n",
            demo.display()
        ),
    )
    .unwrap();
    let run = |args: &[&str]| {
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_lamina"))
            .args(args)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice::<serde_json::Value>(&out.stdout).unwrap()
    };
    let f = file.to_str().unwrap();
    let base = [
        "montecarlo",
        "--runs",
        "30",
        "--seed",
        "4",
        "--set",
        "vdd=0.6V",
        "--json",
    ];
    let mut with_file = base.to_vec();
    with_file.insert(1, f);
    let mut with_flag = base.to_vec();
    let d = demo.to_str().unwrap();
    with_flag.insert(1, d);
    with_flag.extend(["--spec", "transfer.snm_v>0.25V"]);
    let (a, b) = (run(&with_file), run(&with_flag));
    assert_eq!(a["yield"]["pass"], b["yield"]["pass"]);
    assert!(
        a["yield"]["pass"].as_u64().unwrap() < 30,
        "the limit must bite: {}",
        a["yield"]
    );
    // Two shards merged give the single run's report.
    let mut parts = Vec::new();
    for k in ["1/2", "2/2"] {
        let part = dir.join(format!("part-{}", &k[..1]));
        let mut args = with_file.clone();
        args.pop();
        args.extend(["--shard", k, "--out", part.to_str().unwrap()]);
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_lamina"))
            .args(&args)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        parts.push(part);
    }
    let merged = run(&[
        "montecarlo-merge",
        parts[0].to_str().unwrap(),
        parts[1].to_str().unwrap(),
        "--json",
    ]);
    assert_eq!(merged, a);
    let _ = std::fs::remove_dir_all(dir);
}
