//! `lamina montecarlo`: a file's analyses over random samples of its declared spreads, with
//! statistics, yield against limits and the drawn values that drive each figure; or, with
//! `--corners K`, deterministic runs with the global spreads at `±K` standard deviations (a flag
//! of this command rather than a command of its own, as corners share the file, its spreads,
//! the limits, the threads and the run path with the samples).

use super::montecarlo_merge::Part;
use super::sweep::csv_field;
use super::Common;
use crate::design;
use crate::error::JobError;
use crate::montecarlo::{
    column, corners, draw_keys, drivers, figure_keys, inputs_hash, parse_spec, run_corners,
    run_samples, shard_range, spec_results, stats, yield_of, Corner, SampleRow, Spec, Stats, Yield,
    MAX_RUNS,
};
use crate::out;
use crate::output::{ensure_dir, write_whole, OutputSet};
use crate::plot::{draw, Axis, Figure, Mark, Series};
use crate::sweep::{label, pretty};
use std::path::{Path, PathBuf};

/// Samples whose curves `--out` draws as a family (the first ones, so the figure is the same
/// for any number of samples beyond).
pub const FAMILY_CURVES: usize = 50;

/// Flags of `lamina montecarlo`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`) with its analyses and `variation` statements.
    pub file: PathBuf,
    /// Number of samples.
    #[arg(long, value_name = "N", required_unless_present = "corners")]
    pub runs: Option<usize>,
    /// Instead of samples, deterministic corners: the nominal run and each global spread at
    /// +K and at -K standard deviations, the others at nominal; local spreads stay at nominal.
    #[arg(long, value_name = "K", conflicts_with_all = ["runs", "seed"])]
    pub corners: Option<f64>,
    /// With `--corners`, every combination of +K and -K over the global spreads (at most
    /// 2^12).
    #[arg(long)]
    pub all_combinations: bool,
    /// Seed of the random draws: the same seed gives the same samples, bit for bit, on any
    /// number of threads.
    #[arg(long, value_name = "S", default_value_t = 1)]
    pub seed: u64,
    /// Run only shard K of N of the samples (`[floor((K-1) R / N), floor(K R / N))` of
    /// `--runs R`) and write the partial result (`DIR/part.json` with `--out DIR`, else JSON
    /// on stdout; JSON either way), for `lamina montecarlo-merge` to put together.
    #[arg(long, value_name = "K/N", conflicts_with = "corners")]
    pub shard: Option<String>,
    /// The shard of this task of a Slurm job array submitted as `--array=0-(N-1)`: K =
    /// SLURM_ARRAY_TASK_ID + 1 (the index counts from 0), N = SLURM_ARRAY_TASK_COUNT.
    #[arg(long, conflicts_with_all = ["corners", "shard"])]
    pub shard_from_env: bool,
    /// Threads to run samples on (default: one per core).
    #[arg(long, value_name = "T")]
    pub threads: Option<usize>,
    /// A limit a sample must meet to count towards the yield: `FIGURE>VALUE` or
    /// `FIGURE<VALUE`, with the figure's key and a unit, such as `transfer.snm_v>0.1V`
    /// (repeatable; a sample must meet all).
    #[arg(long = "spec", value_name = "LIMIT")]
    pub spec: Vec<String>,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        runs,
        corners: corner_k,
        all_combinations,
        seed,
        shard,
        shard_from_env,
        threads,
        spec,
        common: Common { set, json, out },
    } = a;
    let runs = runs.unwrap_or(0);
    let shard = crate::cluster::resolve_shard(shard.as_deref(), shard_from_env)?;
    if all_combinations && corner_k.is_none() {
        return Err(JobError::Usage(
            "--all-combinations combines corners: give it with --corners K".into(),
        ));
    }
    if corner_k.is_none() && (runs == 0 || runs > MAX_RUNS) {
        return Err(JobError::Usage(format!(
            "--runs {runs}: give from 1 to {MAX_RUNS} samples"
        )));
    }
    if threads == Some(0) {
        return Err(JobError::Usage(
            "--threads 0: give at least one thread".into(),
        ));
    }
    let mut specs: Vec<Spec> = spec
        .iter()
        .map(|s| parse_spec(s))
        .collect::<Result<_, _>>()?;
    let set_out = OutputSet::begin_opt(out.as_deref())?;
    let sets = design::parse_sets(&set)?;
    // The nominal design, once: its errors are reported once, and its figures name the keys
    // the limits may use.
    let nominal = design::load(&file, &sets)?;
    if nominal.variations.is_empty() {
        return Err(JobError::Invalid(format!(
            "{} declares no spread; add one such as `variation n2d.gate_work_function \
             {{ distribution = normal(sigma = 20 meV), scope = global }}`",
            file.display()
        )));
    }
    // The file's own limits come first, then those of the command line.
    let mut all = crate::montecarlo::specs_of_limits(&nominal.limits);
    all.append(&mut specs);
    let specs = all;
    let results = design::run_all(&file, &sets, &crate::ring::RingParams::default(), None)?;
    let known: Vec<String> = crate::montecarlo::figures_of(&results)
        .into_iter()
        .map(|(k, _)| k)
        .collect();
    for s in &specs {
        if !known.contains(&s.key) {
            return Err(JobError::Usage(format!(
                "--spec {}: the nominal design has no figure `{}`; its figures are: {}",
                s.text,
                s.key,
                known.join(", ")
            )));
        }
    }
    let keep = if set_out.is_some() { FAMILY_CURVES } else { 0 };
    let pool = match threads {
        Some(t) => Some(
            rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .map_err(|e| JobError::Usage(format!("--threads {t}: {e}")))?,
        ),
        None => None,
    };
    let on_pool = |work: &(dyn Fn() -> Vec<SampleRow> + Sync)| match &pool {
        Some(p) => p.install(work),
        None => work(),
    };
    if let Some(k) = corner_k {
        let list = corners(&nominal.variations, k, all_combinations)?;
        let rows = on_pool(&|| run_corners(&file, &sets, &nominal, &list, 0));
        let report = corners_json(&list, &rows, &specs, k, all_combinations);
        if let Some(set) = set_out {
            write_corner_files(set.dir(), &list, &rows, &specs, &report).map_err(JobError::Io)?;
            set.commit()?;
        }
        if json {
            out!("{report}");
        } else {
            print_corners(&list, &rows, &specs, k);
        }
        return Ok(());
    }
    if let Some((k, n)) = shard {
        // A shard keeps the family curves whatever its flags, so a merge can draw them.
        let range = shard_range(k, n, runs);
        let rows = on_pool(&|| {
            run_samples(
                &file,
                &sets,
                &nominal,
                range.clone(),
                seed,
                true,
                FAMILY_CURVES,
            )
        });
        let part = Part {
            lamina_version: env!("CARGO_PKG_VERSION").to_string(),
            inputs_hash: inputs_hash(&nominal, &sets, seed, runs, &spec),
            file: file.display().to_string(),
            seed,
            runs,
            // Every limit, the file's included, so that a merge needs no circuit file.
            specs: specs.iter().map(|s| s.text.clone()).collect(),
            shard: k,
            shards: n,
            rows,
        };
        let text = serde_json::to_string(&part.to_json()).unwrap_or_default();
        let what = format!("samples {}..{} of {runs}", range.start, range.end);
        return super::cluster::emit_part(set_out, &text, (k, n), &what);
    }
    let rows = on_pool(&|| run_samples(&file, &sets, &nominal, 0..runs, seed, true, keep));
    report(&rows, &specs, runs, seed, json, set_out)
}

/// The report of a run's rows (in sample order): statistics, yield and drivers computed once
/// from all rows, then the `--out` files and the table or JSON. The run on one machine and
/// `lamina montecarlo-merge` both end here, so a merge gives the same output.
pub(crate) fn report(
    rows: &[SampleRow],
    specs: &[Spec],
    runs: usize,
    seed: u64,
    json: bool,
    set_out: Option<OutputSet>,
) -> Result<(), JobError> {
    let report = Report::new(rows, specs);
    if let Some(set) = set_out {
        write_files(set.dir(), rows, &report, specs, seed).map_err(JobError::Io)?;
        set.commit()?;
    }
    if json {
        out!("{}", report_json(rows, &report, specs, runs, seed));
    } else {
        print_report(&report, specs, runs, seed);
    }
    Ok(())
}

/// What the samples say: statistics of every figure and drawn value, the yield, the drivers.
struct Report {
    figures: Vec<(String, Stats)>,
    draws: Vec<(String, Stats)>,
    failed: usize,
    yield_: Option<Yield>,
    drivers: Vec<(String, Vec<(String, f64)>)>,
}

impl Report {
    fn new(rows: &[SampleRow], specs: &[Spec]) -> Report {
        let of = |keys: Vec<String>| -> Vec<(String, Stats)> {
            keys.into_iter()
                .filter_map(|k| stats(&column(rows, &k)).map(|s| (k, s)))
                .collect()
        };
        Report {
            figures: of(figure_keys(rows)),
            draws: of(draw_keys(rows)),
            failed: rows.iter().filter(|r| r.error.is_some()).count(),
            yield_: (!specs.is_empty()).then(|| yield_of(rows, specs)),
            drivers: drivers(rows),
        }
    }
}

fn stats_json(s: &Stats) -> serde_json::Value {
    serde_json::json!({
        "count": s.count, "failures": s.failures, "mean": s.mean, "std_dev": s.std_dev,
        "q05": s.q05, "median": s.q50, "q95": s.q95, "min": s.min, "max": s.max,
    })
}

fn rows_json(rows: &[SampleRow]) -> serde_json::Value {
    let items: Vec<serde_json::Value> = rows
        .iter()
        .map(|r| {
            let mut m = serde_json::Map::new();
            m.insert("sample".into(), serde_json::json!(r.sample));
            for (k, v) in r.draws.iter().chain(&r.figures) {
                m.insert(k.clone(), serde_json::json!(v));
            }
            if let Some(e) = &r.error {
                m.insert("error".into(), serde_json::json!(e));
            }
            serde_json::Value::Object(m)
        })
        .collect();
    serde_json::Value::Array(items)
}

fn report_json(
    rows: &[SampleRow],
    r: &Report,
    specs: &[Spec],
    runs: usize,
    seed: u64,
) -> serde_json::Value {
    let map = |list: &[(String, Stats)]| -> serde_json::Map<String, serde_json::Value> {
        list.iter()
            .map(|(k, s)| (k.clone(), stats_json(s)))
            .collect()
    };
    let drivers: serde_json::Map<String, serde_json::Value> = r
        .drivers
        .iter()
        .map(|(f, list)| {
            let l: Vec<serde_json::Value> = list
                .iter()
                .map(|(d, rho)| serde_json::json!({ "drawn": d, "spearman_rho": rho }))
                .collect();
            (f.clone(), serde_json::Value::Array(l))
        })
        .collect();
    serde_json::json!({
        "runs": runs,
        "seed": seed,
        "failed_samples": r.failed,
        "figures": map(&r.figures),
        "drawn": map(&r.draws),
        "yield": r.yield_.as_ref().map(|y| serde_json::json!({
            "specs": specs.iter().map(|s| s.text.clone()).collect::<Vec<_>>(),
            "pass": y.pass, "total": y.total, "fraction": y.fraction,
            "wilson_95_low": y.low, "wilson_95_high": y.high,
        })),
        "drivers_by_spearman_rank_correlation": drivers,
        "samples": rows_json(rows),
        "caution": super::CAUTION,
    })
}

fn print_report(r: &Report, specs: &[Spec], runs: usize, seed: u64) {
    out!("{runs} samples, seed {seed}, {} failed", r.failed);
    out!("");
    let header = [
        "quantity", "mean", "std dev", "5 %", "median", "95 %", "min", "max", "failures",
    ];
    let mut cells: Vec<Vec<String>> = Vec::new();
    for (k, s) in r.figures.iter().chain(&r.draws) {
        cells.push(vec![
            label(k),
            number(s.mean),
            number(s.std_dev),
            number(s.q05),
            number(s.q50),
            number(s.q95),
            number(s.min),
            number(s.max),
            s.failures.to_string(),
        ]);
    }
    print_table(&header.map(String::from), &cells);
    if let Some(y) = &r.yield_ {
        let names: Vec<&str> = specs.iter().map(|s| s.text.as_str()).collect();
        out!("");
        out!(
            "yield {:.2} % ({} of {}) meeting {}; 95 % Wilson interval {:.2} % to {:.2} %",
            100.0 * y.fraction,
            y.pass,
            y.total,
            names.join(" and "),
            100.0 * y.low,
            100.0 * y.high
        );
    }
    out!("");
    out!("drivers (Spearman rank correlation of drawn values with each figure):");
    for (f, list) in &r.drivers {
        let top: Vec<String> = list
            .iter()
            .take(3)
            .map(|(d, rho)| format!("{d} {rho:+.2}"))
            .collect();
        if !top.is_empty() {
            out!("  {}: {}", label(f), top.join(", "));
        }
    }
    out!("");
    out!("({})", super::CAUTION);
}

/// A table with its columns aligned: the first to the left, the others to the right.
fn print_table(header: &[String], cells: &[Vec<String>]) {
    let widths = super::column_widths(header, cells);
    let line = |c: &[String]| {
        c.iter()
            .zip(&widths)
            .enumerate()
            .map(|(j, (s, w))| {
                if j == 0 {
                    format!("{s:<w$}")
                } else {
                    format!("{s:>w$}")
                }
            })
            .collect::<Vec<_>>()
            .join("  ")
    };
    out!("{}", line(header));
    for c in cells {
        out!("{}", line(c));
    }
}

/// A figure key as part of a file name: letters, digits and `_`, anything else `_`.
fn number(v: f64) -> String {
    let v = if v == 0.0 { 0.0 } else { v };
    format!("{v:.5e}")
}

/// `samples.csv`, `samples.json`, `summary.json`, and per figure a histogram with the limits
/// marked, the empirical distribution function, and a scatter against its main driver; the
/// families of curves (transfer curves, waveforms) of the first [`FAMILY_CURVES`] samples.
fn write_files(
    dir: &Path,
    rows: &[SampleRow],
    r: &Report,
    specs: &[Spec],
    seed: u64,
) -> Result<(), String> {
    ensure_dir(dir)?;
    let draws = draw_keys(rows);
    let figures = figure_keys(rows);
    let mut text = std::iter::once("sample".to_string())
        .chain(draws.iter().cloned())
        .chain(figures.iter().cloned())
        .chain(["error".to_string()])
        .map(|h| csv_field(&h))
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    let cols: Vec<Vec<Option<f64>>> = draws
        .iter()
        .chain(&figures)
        .map(|k| column(rows, k))
        .collect();
    for (i, row) in rows.iter().enumerate() {
        let mut cells = vec![row.sample.to_string()];
        cells.extend(
            cols.iter()
                .map(|c| c[i].map_or(String::new(), |v| format!("{v:e}"))),
        );
        cells.push(csv_field(row.error.as_deref().unwrap_or("")));
        text.push_str(&cells.join(","));
        text.push('\n');
    }
    write_whole(&dir.join("samples.csv"), text.as_bytes())?;
    let json = |v: serde_json::Value| serde_json::to_string_pretty(&v).unwrap_or_default();
    write_whole(&dir.join("samples.json"), json(rows_json(rows)).as_bytes())?;
    let mut summary = report_json(rows, r, specs, rows.len(), seed);
    if let Some(m) = summary.as_object_mut() {
        m.remove("samples");
    }
    write_whole(&dir.join("summary.json"), json(summary).as_bytes())?;
    let mut stems = super::sweep::Stems::default();
    for (k, s) in &r.figures {
        let values: Vec<f64> = column(rows, k)
            .into_iter()
            .flatten()
            .filter(|v| v.is_finite())
            .collect();
        let stem = stems.unique(k);
        let what = pretty(k);
        let x = Axis::described(&what);
        let limits: Vec<&Spec> = specs.iter().filter(|p| p.key == *k).collect();
        let marks: Vec<Mark> = limits
            .iter()
            .map(|p| Mark::Vertical(p.limit, format!("limit {}", p.text)))
            .collect();
        // A limit outside the samples' range is reached by a baseline, so its mark is drawn
        // where it is and not at the edge of the plot.
        let (below, above): (Vec<f64>, Vec<f64>) = (
            limits
                .iter()
                .map(|p| p.limit)
                .filter(|l| *l < s.min)
                .collect(),
            limits
                .iter()
                .map(|p| p.limit)
                .filter(|l| *l > s.max)
                .collect(),
        );
        let reach = |pts: Vec<(f64, f64)>, low: f64, high: f64| -> Vec<(f64, f64)> {
            let first = below.iter().copied().reduce(f64::min).map(|l| (l, low));
            let last = above.iter().copied().reduce(f64::max).map(|l| (l, high));
            first.into_iter().chain(pts).chain(last).collect()
        };
        let mut hist = Figure::new(
            &format!(
                "{} over {} samples",
                what.split(" (").next().unwrap_or(&what),
                s.count
            ),
            x.clone(),
            Axis::new("samples per bin", ""),
        );
        let mut outline = Series::line("", reach(histogram(&values, s), 0.0, 0.0));
        outline.markers = false;
        hist.series.push(outline);
        hist.marks = marks.clone();
        draw(&dir.join(format!("histogram_{stem}")), &hist)?;
        let mut cdf = Figure::new(
            &format!(
                "empirical distribution of {}",
                what.split(" (").next().unwrap_or(&what)
            ),
            x,
            Axis::new("fraction of samples at or below", ""),
        );
        let mut sorted = values.clone();
        sorted.sort_by(f64::total_cmp);
        let n = sorted.len() as f64;
        let mut pts = Vec::with_capacity(2 * sorted.len());
        for (i, v) in sorted.iter().enumerate() {
            pts.push((*v, i as f64 / n));
            pts.push((*v, (i + 1) as f64 / n));
        }
        let mut steps = Series::line("", reach(pts, 0.0, 1.0));
        steps.markers = false;
        cdf.series.push(steps);
        cdf.marks = marks.clone();
        draw(&dir.join(format!("cdf_{stem}")), &cdf)?;
        // The figure against the drawn value that ranks most strongly with it.
        let top = r
            .drivers
            .iter()
            .find(|(f, _)| f == k)
            .and_then(|(_, list)| list.first());
        if let Some((d, rho)) = top {
            // Energies drawn for band and work-function keys read in eV (zeptojoules are
            // below the plots' prefixes).
            let (scale, x_axis) = match label(d).rsplit_once(" (J)") {
                Some((q, _)) => (1.0 / lamina_devices::physics::Q, Axis::new(q, "eV")),
                None => (1.0, Axis::described(&label(d))),
            };
            let pts: Vec<(f64, f64)> = column(rows, d)
                .into_iter()
                .zip(column(rows, k))
                .filter_map(|(a, b)| Some((a? * scale, b?)))
                .filter(|(a, b)| a.is_finite() && b.is_finite())
                .collect();
            let mut scatter = Figure::new(
                &format!(
                    "{} against its main driver (Spearman rho {rho:+.2})",
                    what.split(" (").next().unwrap_or(&what)
                ),
                x_axis,
                Axis::described(&what),
            );
            let mut dots = Series::line("", pts);
            dots.style = crate::plot::Style::Points;
            scatter.series.push(dots);
            draw(&dir.join(format!("driver_{stem}")), &scatter)?;
        }
    }
    // Families of curves, one figure and one CSV each, a curve per kept sample.
    let mut families: Vec<(&crate::sweep::Curve, Vec<Member>)> = Vec::new();
    for row in rows {
        for c in &row.curves {
            match families.iter_mut().find(|f| f.0.family == c.family) {
                Some(f) => f.1.push((row.sample, &c.points)),
                None => families.push((c, vec![(row.sample, &c.points)])),
            }
        }
    }
    for (first, members) in &families {
        let stem: String = first
            .family
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
            .collect();
        let mut csv = String::from("sample,x,y\n");
        let mut fig = Figure::new(
            &format!("{} of {} samples", first.family, members.len()),
            Axis::described(first.x_desc),
            Axis::described(first.y_desc),
        );
        for (sample, pts) in members {
            for (x, y) in pts.iter() {
                csv.push_str(&format!("{sample},{x:e},{y:e}\n"));
            }
            let mut line = Series::line("", pts.to_vec());
            line.markers = false;
            fig.series.push(line);
        }
        write_whole(&dir.join(format!("family_{stem}.csv")), csv.as_bytes())?;
        draw(&dir.join(format!("family_{stem}")), &fig)?;
    }
    Ok(())
}

/// The corner report: per corner its label, drawn values, figures, each limit met or not and
/// its error; the corners that fail a limit.
fn corners_json(
    list: &[Corner],
    rows: &[SampleRow],
    specs: &[Spec],
    k: f64,
    all_combinations: bool,
) -> serde_json::Value {
    let items: Vec<serde_json::Value> = list
        .iter()
        .zip(rows)
        .map(|(c, r)| {
            let mut m = serde_json::Map::new();
            m.insert("corner".into(), serde_json::json!(r.sample));
            m.insert("label".into(), serde_json::json!(c.label));
            for (k, v) in r.draws.iter().chain(&r.figures) {
                m.insert(k.clone(), serde_json::json!(v));
            }
            let met = spec_results(r, specs);
            let limits: serde_json::Map<String, serde_json::Value> = specs
                .iter()
                .zip(&met)
                .map(|(s, ok)| (s.text.clone(), serde_json::json!(ok)))
                .collect();
            m.insert("meets".into(), serde_json::Value::Object(limits));
            m.insert(
                "meets_all".into(),
                serde_json::json!(r.error.is_none() && met.iter().all(|b| *b)),
            );
            if let Some(e) = &r.error {
                m.insert("error".into(), serde_json::json!(e));
            }
            serde_json::Value::Object(m)
        })
        .collect();
    let failing: Vec<&str> = list
        .iter()
        .zip(rows)
        .filter(|(_, r)| r.error.is_some() || !spec_results(r, specs).iter().all(|b| *b))
        .map(|(c, _)| c.label.as_str())
        .collect();
    serde_json::json!({
        "corners_sigma": k,
        "all_combinations": all_combinations,
        "local_spreads": "nominal",
        "correlations": "ignored: each key moves along its own axis",
        "specs": specs.iter().map(|s| s.text.clone()).collect::<Vec<_>>(),
        "failing_corners": failing,
        "corners": items,
        "caution": super::CAUTION,
    })
}

fn print_corners(list: &[Corner], rows: &[SampleRow], specs: &[Spec], k: f64) {
    let failed = rows.iter().filter(|r| r.error.is_some()).count();
    out!(
        "{} corners at {k} standard deviations (local spreads at nominal, correlations \
         ignored), {failed} failed",
        list.len()
    );
    out!("");
    let figures = figure_keys(rows);
    let mut header: Vec<String> = std::iter::once("corner".to_string())
        .chain(figures.iter().map(|f| label(f)))
        .collect();
    if !specs.is_empty() {
        header.push("meets limits".into());
    }
    let cells: Vec<Vec<String>> = list
        .iter()
        .zip(rows)
        .map(|(c, r)| {
            let mut line = vec![c.label.clone()];
            line.extend(column_values(r, &figures));
            if !specs.is_empty() {
                let fails: Vec<&str> = specs
                    .iter()
                    .zip(spec_results(r, specs))
                    .filter(|(_, ok)| !ok)
                    .map(|(s, _)| s.text.as_str())
                    .collect();
                line.push(match (&r.error, fails.is_empty()) {
                    (Some(_), _) => "failed to run".into(),
                    (None, true) => "yes".into(),
                    (None, false) => format!("no: {}", fails.join(", ")),
                });
            }
            line
        })
        .collect();
    print_table(&header, &cells);
    for (c, r) in list.iter().zip(rows) {
        if let Some(e) = &r.error {
            out!("{}: {e}", c.label);
        }
    }
    out!("");
    out!("({})", super::CAUTION);
}

/// A row's value of each key, formatted (empty where it has none).
fn column_values(r: &SampleRow, keys: &[String]) -> Vec<String> {
    keys.iter()
        .map(|k| {
            r.figures
                .iter()
                .find(|(f, _)| f == k)
                .map_or(String::new(), |(_, v)| number(*v))
        })
        .collect()
}

/// `corners.csv` (a row per corner: position, label, drawn values, figures, each limit met,
/// error), `corners.json`, and per figure a dot chart of its value at each corner, the corners
/// that fail a limit apart and the limits drawn across.
fn write_corner_files(
    dir: &Path,
    list: &[Corner],
    rows: &[SampleRow],
    specs: &[Spec],
    report: &serde_json::Value,
) -> Result<(), String> {
    ensure_dir(dir)?;
    let draws = draw_keys(rows);
    let figures = figure_keys(rows);
    let mut text = ["corner", "label"]
        .into_iter()
        .map(String::from)
        .chain(draws.iter().chain(&figures).cloned())
        .chain(specs.iter().map(|s| format!("meets {}", s.text)))
        .chain(["error".to_string()])
        .map(|h| csv_field(&h))
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for (c, r) in list.iter().zip(rows) {
        let mut cells = vec![r.sample.to_string(), csv_field(&c.label)];
        for k in draws.iter().chain(&figures) {
            let v = r.draws.iter().chain(&r.figures).find(|(d, _)| d == k);
            cells.push(v.map_or(String::new(), |(_, v)| format!("{v:e}")));
        }
        cells.extend(spec_results(r, specs).iter().map(|b| b.to_string()));
        cells.push(csv_field(r.error.as_deref().unwrap_or("")));
        text.push_str(&cells.join(","));
        text.push('\n');
    }
    write_whole(&dir.join("corners.csv"), text.as_bytes())?;
    let json = serde_json::to_string_pretty(report).unwrap_or_default();
    write_whole(&dir.join("corners.json"), json.as_bytes())?;
    let mut stems = super::sweep::Stems::default();
    for k in &figures {
        let what = pretty(k);
        let mut fig = Figure::new(
            &format!(
                "{} at each corner (numbered as in corners.csv)",
                what.split(" (").next().unwrap_or(&what)
            ),
            Axis::new("corner", ""),
            Axis::described(&what),
        );
        let (mut pass, mut fail) = (Vec::new(), Vec::new());
        for r in rows {
            if let Some((_, v)) = r.figures.iter().find(|(f, _)| f == k) {
                let ok = spec_results(r, specs).iter().all(|b| *b);
                if ok { &mut pass } else { &mut fail }.push((r.sample as f64, *v));
            }
        }
        let passing = if specs.is_empty() {
            ""
        } else {
            "meets the limits"
        };
        for (name, pts) in [(passing, pass), ("fails a limit", fail)] {
            if !pts.is_empty() {
                let mut dots = Series::line(name, pts);
                dots.style = crate::plot::Style::Points;
                fig.series.push(dots);
            }
        }
        let last = rows.len().saturating_sub(1) as f64;
        for s in specs.iter().filter(|s| s.key == *k) {
            let mut line = Series::line(
                &format!("limit {}", s.text),
                vec![(0.0, s.limit), (last, s.limit)],
            );
            line.markers = false;
            fig.series.push(line);
        }
        let stem = stems.unique(k);
        draw(&dir.join(format!("corners_{stem}")), &fig)?;
    }
    Ok(())
}

/// One sample's curve of a family: its index and points.
type Member<'a> = (usize, &'a [(f64, f64)]);

/// A histogram as a step outline: about `sqrt(n)` bins (5 to 50) between the extremes.
fn histogram(values: &[f64], s: &Stats) -> Vec<(f64, f64)> {
    let bins = ((values.len() as f64).sqrt().ceil() as usize).clamp(5, 50);
    let (lo, hi) = if s.max > s.min {
        (s.min, s.max)
    } else {
        (
            s.min - 0.5 * s.min.abs().max(1e-30),
            s.max + 0.5 * s.max.abs().max(1e-30),
        )
    };
    let w = (hi - lo) / bins as f64;
    let mut counts = vec![0usize; bins];
    for v in values {
        let k = (((v - lo) / w) as usize).min(bins - 1);
        counts[k] += 1;
    }
    let mut pts = vec![(lo, 0.0)];
    for (k, c) in counts.iter().enumerate() {
        let (a, b) = (lo + k as f64 * w, lo + (k + 1) as f64 * w);
        pts.push((a, *c as f64));
        pts.push((b, *c as f64));
    }
    pts.push((hi, 0.0));
    pts
}
