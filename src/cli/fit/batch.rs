//! `lamina fit` over a batch of devices ([`crate::fit::batch`]): the batch report (a row per
//! device with its fitted values, standard errors and fit quality, and statistics of each key
//! across the devices), its files and figures, and the part a shard of the batch writes for
//! `lamina merge`.
//!
//! # The part format
//! One JSON object (`part.json` in a shard's `--out` directory, or a shard's stdout):
//! `format` ([`FORMAT`]), `kind` (`fit`), `lamina_version`, `inputs_hash`
//! ([`crate::fit::batch::inputs_hash`]), `card_file` and `data` (as given, for people; not
//! checked), `settings` (the flags that define the fit, [`super::FitFlags`]), `labels` (every
//! device of the batch), `shard` (K), `shards` (N), `range` (`[first, end)` of the devices),
//! `card_length_m` and `card_width_m` (the card's geometry, for rows without `L` or `W`),
//! `card_source` (`name` and `text` of the file that defines the card, for the fitted cards)
//! and `rows`, one per device of the shard in device order: `index`, `device`, `source`,
//! `rows` (the device's data as read: `[line, V_GS, V_DS, I_D, direction, L, W]`), `error`
//! (or null) and `result` (or null): `start`, `model` (the model current at each point),
//! `device_evaluations` and `fit` (every field of the solver's result). Numbers are text that
//! reads back to the same bits, as in the Monte Carlo parts ([`crate::cli::montecarlo_merge`]).
//! A merge regroups each device's rows and derives intervals, residual statistics and
//! findings from these, exactly as the fit on one machine does, so the merged report and files
//! are those of the whole batch on one machine, byte for byte.

use super::{failure, num as short, plan, to_error, to_json, write_files, FitFlags};
use crate::cli::montecarlo_merge::{num, number_of, same_version, Fields};
use crate::cli::CAUTION;
use crate::error::JobError;
use crate::fit::batch::{self as lib, DeviceFit, Member};
use crate::fit::{self, CardSource, FitConfig, Kind, Outcome, Unit};
use crate::out;
use crate::output::{ensure_dir, write_whole, OutputSet};
use crate::plot::{draw, Axis, Figure, Mark, Series, Style};
use lamina_measure::lsq::{Fit, Weak};
use lamina_netlist::table::{Direction, Row, Table};
use lamina_netlist::Design;
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

/// The version of the fit part format; a merge takes only parts of this one.
pub const FORMAT: u64 = 1;

/// The most data files a batch reads.
pub const MAX_FILES: usize = 100_000;

/// What every device of a batch shares, and what its report names.
#[derive(Clone, Debug)]
pub(crate) struct Batch {
    /// The fit's flags and what they mean.
    pub flags: FitFlags,
    pub cfg: FitConfig,
    /// The card file and the data files, as given.
    pub card_file: String,
    pub data: Vec<String>,
    /// Every device's name, in device order.
    pub labels: Vec<String>,
    /// The card's channel length and width (m).
    pub card_lw: (f64, f64),
    /// The file that defines the card.
    pub source: CardSource,
}

/// The data files of `paths`: a file as it is, a directory as its `.csv` files in name order.
pub(crate) fn data_files(paths: &[PathBuf]) -> Result<Vec<PathBuf>, JobError> {
    let mut out = Vec::new();
    for p in paths {
        if !p.is_dir() {
            out.push(p.clone());
            continue;
        }
        let io = |e: std::io::Error| JobError::Io(format!("cannot read {}: {e}", p.display()));
        let mut found: Vec<PathBuf> = std::fs::read_dir(p)
            .map_err(io)?
            .map(|e| e.map(|e| e.path()).map_err(io))
            .collect::<Result<Vec<_>, _>>()?
            .into_iter()
            .filter(|f| f.is_file() && f.extension().is_some_and(|x| x == "csv"))
            .collect();
        if found.is_empty() {
            return Err(JobError::Usage(format!(
                "{} holds no .csv file: give data files, or a directory of them",
                p.display()
            )));
        }
        found.sort();
        out.append(&mut found);
    }
    if out.len() > MAX_FILES {
        return Err(JobError::Usage(format!(
            "{} data files, more than the {MAX_FILES} a batch reads: split the batch",
            out.len()
        )));
    }
    Ok(out)
}

/// The flags of a fit as one list, in a fixed order (for the inputs hash).
fn settings_list(f: &FitFlags) -> Vec<String> {
    let mut v = Vec::new();
    for (flag, list) in [("--fit", &f.fit), ("--start", &f.start), ("--tie", &f.tie)] {
        for x in list {
            v.push(flag.to_string());
            v.push(x.clone());
        }
    }
    for (flag, x) in [
        ("--weights", &f.weights),
        ("--switch-current", &f.switch_current),
        ("--floor", &f.floor),
    ] {
        if let Some(x) = x {
            v.push(flag.to_string());
            v.push(x.clone());
        }
    }
    v.push("--starts".into());
    v.push(f.starts.to_string());
    v
}

fn settings_json(f: &FitFlags) -> Value {
    json!({
        "fit": f.fit, "start": f.start, "tie": f.tie, "weights": f.weights,
        "switch_current": f.switch_current, "floor": f.floor, "starts": f.starts,
    })
}

fn settings_of(v: &Value) -> Result<FitFlags, String> {
    let list = |k: &str| -> Result<Vec<String>, String> {
        v.get(k)
            .and_then(Value::as_array)
            .ok_or_else(|| format!("`settings.{k}` is not a list"))?
            .iter()
            .map(|x| {
                x.as_str()
                    .map(str::to_string)
                    .ok_or_else(|| format!("`settings.{k}` holds a value that is not text"))
            })
            .collect()
    };
    let opt = |k: &str| -> Result<Option<String>, String> {
        match v.get(k) {
            Some(Value::String(s)) => Ok(Some(s.clone())),
            Some(Value::Null) => Ok(None),
            _ => Err(format!("`settings.{k}` is neither text nor null")),
        }
    };
    Ok(FitFlags {
        fit: list("fit")?,
        start: list("start")?,
        tie: list("tie")?,
        weights: opt("weights")?,
        switch_current: opt("switch_current")?,
        floor: opt("floor")?,
        starts: v
            .get("starts")
            .and_then(Value::as_u64)
            .and_then(|n| usize::try_from(n).ok())
            .ok_or("`settings.starts` is not a whole number")?,
    })
}

/// The batch of `a` over the data `tables` (each file as given with its table), checked and
/// ready to run: what the devices share, the devices, what the card gives them and the
/// inputs hash.
pub(crate) fn prepare(
    a: &super::Args,
    cfg: FitConfig,
    design: &Design,
    tables: &[(String, Table)],
) -> Result<(Batch, Vec<Member>, fit::CardFacts, String), JobError> {
    let members = lib::members(tables).map_err(JobError::Usage)?;
    let facts = lib::prepare(&a.card, &members, &cfg).map_err(failure)?;
    let source = fit::card_source(&a.card, &cfg.params[0].key.card).map_err(JobError::Io)?;
    let hash = lib::inputs_hash(design, &members, &settings_list(&a.flags));
    let batch = Batch {
        flags: a.flags.clone(),
        cfg,
        card_file: a.card.display().to_string(),
        data: tables.iter().map(|t| t.0.clone()).collect(),
        labels: members.iter().map(|m| m.label.clone()).collect(),
        card_lw: facts.length_width_m,
        source,
    };
    Ok((batch, members, facts, hash))
}

/// The card file, devices, configuration and card facts of the batch of `a`, for a trial run
/// of its first device (`lamina cluster-script`); a single fit is refused (nothing to split).
pub(crate) fn trial_setup(
    a: &super::Args,
) -> Result<(PathBuf, Vec<Member>, FitConfig, fit::CardFacts), JobError> {
    let i = super::inputs(a)?;
    if !i.batch {
        return Err(JobError::Usage(
            "cluster-script: this fit is one fit of one data file, which cannot be split: give \
             several data files, a directory of them or a `device` column for a batch"
                .into(),
        ));
    }
    let (batch, members, facts, _) = prepare(a, i.cfg, &i.design, &i.tables)?;
    Ok((a.card.clone(), members, batch.cfg, facts))
}

/// Runs a batch: the whole of it, or shard `(K, N)` of its devices as a part.
pub(crate) fn run(
    a: &super::Args,
    cfg: FitConfig,
    design: &Design,
    tables: &[(String, Table)],
    shard: Option<(usize, usize)>,
    set: Option<OutputSet>,
) -> Result<(), JobError> {
    let (batch, members, facts, hash) = prepare(a, cfg, design, tables)?;
    let total = members.len();
    let Some((k, n)) = shard else {
        let fits = lib::run_batch(&a.card, &members, 0..total, &batch.cfg, &facts, true);
        return report(&batch, &fits, a.json, set);
    };
    let range = crate::montecarlo::shard_range(k, n, total);
    let fits = lib::run_batch(&a.card, &members, range.clone(), &batch.cfg, &facts, true);
    let part = Part {
        lamina_version: env!("CARGO_PKG_VERSION").to_string(),
        inputs_hash: hash,
        batch,
        shard: k,
        shards: n,
        fits,
    };
    let text = serde_json::to_string(&part.to_json()).unwrap_or_default();
    let what = format!("devices {}..{} of {total}", range.start, range.end);
    crate::cli::cluster::emit_part(set, &text, (k, n), &what)
}

/// Fit quality of one device: unweighted RMS of the log-current residuals (decades) and of the
/// relative ones, points used and points below the floor.
struct Quality {
    rms_log_dec: Option<f64>,
    rms_relative: Option<f64>,
    used: usize,
    below_floor: usize,
}

fn quality(o: &Outcome) -> Quality {
    let unit = FitConfig {
        w_sub: 1.0,
        w_on: 1.0,
        ..FitConfig::default()
    };
    let (mut sub, mut on) = ((0usize, 0.0), (0usize, 0.0));
    let mut below_floor = 0;
    for (p, &m) in o.data.points.iter().zip(&o.model) {
        match (p.kind, fit::residual(p.kind, m, p.id, &unit)) {
            (Kind::Sub, Some(r)) => sub = (sub.0 + 1, sub.1 + r * r),
            (Kind::On, Some(r)) => on = (on.0 + 1, on.1 + r * r),
            _ => below_floor += 1,
        }
    }
    let rms = |(n, ss): (usize, f64)| (n > 0).then(|| (ss / n as f64).sqrt());
    Quality {
        rms_log_dec: rms(sub),
        rms_relative: rms(on),
        used: sub.0 + on.0,
        below_floor,
    }
}

/// The report of a batch's fits (in device order): the `--out` files, then the table or JSON,
/// and an error when a device's fit failed. A batch on one machine and `lamina merge` both end
/// here, so a merge gives the same output.
pub(crate) fn report(
    b: &Batch,
    fits: &[DeviceFit],
    json: bool,
    set_out: Option<OutputSet>,
) -> Result<(), JobError> {
    let summary = batch_json(b, fits);
    if let Some(set) = set_out {
        write_batch(set.dir(), b, fits, &summary).map_err(JobError::Io)?;
        set.commit()?;
    }
    if json {
        out!("{summary}");
    } else {
        for line in text_report(b, fits) {
            out!("{line}");
        }
    }
    let failed: Vec<&DeviceFit> = fits.iter().filter(|f| f.result.is_err()).collect();
    match failed.first() {
        None => Ok(()),
        Some(f) => Err(JobError::Analysis(format!(
            "{} of {} device fits failed (their rows say why); the first, {}: {}",
            failed.len(),
            fits.len(),
            f.member.label,
            f.result.as_ref().err().map_or("", String::as_str)
        ))),
    }
}

/// A key's name with its unit: `electron_mobility (cm^2/(V s))`.
fn key_heading(p: &fit::FitSpec) -> String {
    let u = Unit::of(p.key.dim);
    if u.text.is_empty() {
        p.key.key.clone()
    } else {
        format!("{} ({})", p.key.key, u.text)
    }
}

/// A table's lines, indented by two spaces, its columns two spaces apart: column `k` of `n`
/// aligned to the left where `left(k, n)`, else to the right.
fn aligned(
    header: &[String],
    cells: &[Vec<String>],
    left: impl Fn(usize, usize) -> bool,
) -> Vec<String> {
    let widths = crate::cli::column_widths(header, cells);
    std::iter::once(header)
        .chain(cells.iter().map(Vec::as_slice))
        .map(|c| {
            let text: Vec<String> = c
                .iter()
                .zip(&widths)
                .enumerate()
                .map(|(k, (s, w))| {
                    if left(k, c.len()) {
                        format!("{s:<w$}")
                    } else {
                        format!("{s:>w$}")
                    }
                })
                .collect();
            format!("  {}", text.join("  ")).trim_end().to_string()
        })
        .collect()
}

/// The batch report as lines of text.
fn text_report(b: &Batch, fits: &[DeviceFit]) -> Vec<String> {
    let params = &b.cfg.params;
    let mut l = vec![
        format!(
            "batch fit of {} key(s) of card `{}`, one fit per device: {} device(s) from {} data \
             file(s)",
            params.len(),
            params[0].key.card,
            fits.len(),
            b.data.len()
        ),
        String::new(),
    ];
    let mut header: Vec<String> = ["#", "device", "points"].map(String::from).to_vec();
    header.extend(params.iter().map(key_heading));
    header.extend(["RMS log (dec)", "RMS rel. (%)", "findings"].map(String::from));
    let cells: Vec<Vec<String>> = fits
        .iter()
        .enumerate()
        .map(|(i, f)| {
            let mut c = vec![
                (i + 1).to_string(),
                f.member.label.clone(),
                f.member.table.rows.len().to_string(),
            ];
            match &f.result {
                Ok(o) => {
                    for (k, p) in params.iter().enumerate() {
                        let u = Unit::of(p.key.dim);
                        let v = u.value(o.fit.values[k]);
                        let se = o.fit.std_errors[k].map(|s| u.value(s));
                        c.push(match (se, o.fit.at_bound[k]) {
                            (_, true) => format!("{} (at a bound)", short(v)),
                            (Some(se), false) => {
                                format!("{} +- {}", to_error(v, Some(se)), to_error(se, Some(se)))
                            }
                            (None, false) => short(v),
                        });
                    }
                    let q = quality(o);
                    c.push(q.rms_log_dec.map_or("-".into(), |r| format!("{r:.4}")));
                    c.push(
                        q.rms_relative
                            .map_or("-".into(), |r| format!("{:.3}", 100.0 * r)),
                    );
                    c.push(o.findings.len().to_string());
                }
                Err(_) => {
                    c.extend(params.iter().map(|_| "-".to_string()));
                    c.extend(["-", "-", "failed"].map(String::from));
                }
            }
            c
        })
        .collect();
    l.extend(aligned(&header, &cells, |k, _| k == 1));
    l.push(String::new());
    let fitted = fits.iter().filter(|f| f.result.is_ok()).count();
    l.push(format!(
        "statistics across the {fitted} fitted device(s) (5 % and 95 %: quantiles):"
    ));
    let head: Vec<String> = [
        "key",
        "devices",
        "mean",
        "std. dev.",
        "min",
        "5 %",
        "median",
        "95 %",
        "max",
        "unit",
    ]
    .map(String::from)
    .to_vec();
    let rows: Vec<Vec<String>> = params
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let u = Unit::of(p.key.dim);
            let mut c = vec![p.key.name()];
            match lib::across(fits, k) {
                Some(s) => {
                    c.push(s.count.to_string());
                    c.extend(
                        [s.mean, s.std_dev, s.min, s.q05, s.q50, s.q95, s.max]
                            .map(|x| short(u.value(x))),
                    );
                }
                None => c.extend((0..8).map(|_| "-".to_string())),
            }
            c.push(u.text.clone());
            c
        })
        .collect();
    l.extend(aligned(&head, &rows, |k, n| k == 0 || k + 1 == n));
    let notes: Vec<String> = fits
        .iter()
        .flat_map(|f| match &f.result {
            Ok(o) => o
                .findings
                .iter()
                .map(|s| format!("  {}: {s}", f.member.label))
                .collect::<Vec<_>>(),
            Err(e) => vec![format!("  {}: the fit failed: {e}", f.member.label)],
        })
        .collect();
    if !notes.is_empty() {
        l.push(String::new());
        l.push("what the data of each device do not determine, and failed fits:".into());
        l.extend(notes);
    }
    l.push(String::new());
    l.push(format!("note: {CAUTION}"));
    l
}

/// The batch report as JSON (`--json` and `batch.json`).
fn batch_json(b: &Batch, fits: &[DeviceFit]) -> Value {
    let params = &b.cfg.params;
    let devices: Vec<Value> = fits
        .iter()
        .enumerate()
        .map(|(i, f)| {
            let mut d = json!({
                "index": i + 1,
                "device": f.member.label,
                "source": f.member.source,
                "points": f.member.table.rows.len(),
                "error": f.result.as_ref().err(),
            });
            if let (Ok(o), Some(m)) = (&f.result, d.as_object_mut()) {
                let q = quality(o);
                let keys: Vec<Value> = params
                    .iter()
                    .enumerate()
                    .map(|(k, p)| {
                        json!({
                            "key": p.key.name(),
                            "value_si": o.fit.values[k],
                            "std_error_si": o.fit.std_errors[k],
                            "interval_95_si": o.intervals[k].map(|(a, b)| vec![a, b]),
                            "at_bound": o.fit.at_bound[k],
                            "value_text": Unit::of(p.key.dim).write(o.fit.values[k]),
                        })
                    })
                    .collect();
                for (k, v) in [
                    ("parameters", json!(keys)),
                    ("used", json!(q.used)),
                    ("below_floor", json!(q.below_floor)),
                    ("rss", json!(o.fit.rss)),
                    ("rms_log_residual_dec", json!(q.rms_log_dec)),
                    ("rms_relative_residual", json!(q.rms_relative)),
                    ("findings", json!(o.findings)),
                    ("termination", json!(o.fit.termination)),
                    ("device_evaluations", json!(o.device_evaluations)),
                    ("residual_evaluations", json!(o.fit.evaluations)),
                ] {
                    m.insert(k.into(), v);
                }
            }
            d
        })
        .collect();
    let statistics: Vec<Value> = params
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let s = lib::across(fits, k);
            let s = s.as_ref();
            json!({
                "key": p.key.name(),
                "dimension": p.key.dim.describe(),
                "devices": s.map_or(0, |s| s.count),
                "failures": s.map_or(fits.len(), |s| s.failures),
                "mean_si": s.map(|s| s.mean),
                "std_dev_si": s.map(|s| s.std_dev),
                "min_si": s.map(|s| s.min),
                "q05_si": s.map(|s| s.q05),
                "median_si": s.map(|s| s.q50),
                "q95_si": s.map(|s| s.q95),
                "max_si": s.map(|s| s.max),
            })
        })
        .collect();
    json!({
        "caution": CAUTION,
        "card_file": b.card_file,
        "data": b.data,
        "settings": settings_json(&b.flags),
        "devices": devices,
        "statistics": statistics,
        "failed": fits.iter().filter(|f| f.result.is_err()).count(),
    })
}

/// `batch.csv`, `batch.json`, the figures across the devices, and each fitted device's files
/// in `devices/NAME/`.
fn write_batch(dir: &Path, b: &Batch, fits: &[DeviceFit], summary: &Value) -> Result<(), String> {
    ensure_dir(dir)?;
    write_whole(&dir.join("batch.json"), format!("{summary}\n").as_bytes())?;
    let params = &b.cfg.params;
    let mut header: Vec<String> = ["index", "device", "source", "points", "used", "below_floor"]
        .map(String::from)
        .to_vec();
    for p in params {
        let k = p.key.name();
        for s in ["si", "std_error_si", "lo95_si", "hi95_si", "at_bound"] {
            header.push(format!("{k}_{s}"));
        }
    }
    header.extend(
        [
            "rss",
            "rms_log_residual_dec",
            "rms_relative_residual",
            "findings",
            "error",
        ]
        .map(String::from),
    );
    let field = crate::cli::sweep::csv_field;
    let e = |x: Option<f64>| x.map_or(String::new(), |v| format!("{v:e}"));
    let mut text = header
        .iter()
        .map(|h| field(h))
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for (i, f) in fits.iter().enumerate() {
        let mut c = vec![
            (i + 1).to_string(),
            field(&f.member.label),
            field(&f.member.source),
            f.member.table.rows.len().to_string(),
        ];
        match &f.result {
            Ok(o) => {
                let q = quality(o);
                c.push(q.used.to_string());
                c.push(q.below_floor.to_string());
                for k in 0..params.len() {
                    c.push(e(Some(o.fit.values[k])));
                    c.push(e(o.fit.std_errors[k]));
                    c.push(e(o.intervals[k].map(|i| i.0)));
                    c.push(e(o.intervals[k].map(|i| i.1)));
                    c.push(o.fit.at_bound[k].to_string());
                }
                c.push(e(Some(o.fit.rss)));
                c.push(e(q.rms_log_dec));
                c.push(e(q.rms_relative));
                c.push(field(&o.findings.join("; ")));
                c.push(String::new());
            }
            Err(err) => {
                c.extend((0..2 + 5 * params.len() + 4).map(|_| String::new()));
                c.push(field(err));
            }
        }
        text.push_str(&c.join(","));
        text.push('\n');
    }
    write_whole(&dir.join("batch.csv"), text.as_bytes())?;
    draw_across(dir, b, fits)?;
    let mut stems = crate::cli::sweep::Stems::default();
    for f in fits {
        let stem = stems.unique(&f.member.label);
        let Ok(o) = &f.result else { continue };
        let sub = dir.join("devices").join(stem);
        let summary = to_json(
            o,
            &b.cfg,
            Path::new(&f.member.source),
            Path::new(&b.card_file),
            None,
        );
        write_files(&sub, o, &summary, &b.source)?;
    }
    Ok(())
}

/// Per key, its fitted value on every device with the 95 % interval and the mean and
/// standard deviation across them (`batch-KEY`); with two keys or more, the second against
/// the first (`batch-scatter`), each device labelled when there are few.
fn draw_across(dir: &Path, b: &Batch, fits: &[DeviceFit]) -> Result<(), String> {
    let params = &b.cfg.params;
    let ok: Vec<(usize, &DeviceFit, &Outcome)> = fits
        .iter()
        .enumerate()
        .filter_map(|(i, f)| f.result.as_ref().ok().map(|o| (i + 1, f, o)))
        .collect();
    let mut stems = crate::cli::sweep::Stems::default();
    for (k, p) in params.iter().enumerate() {
        let u = Unit::of(p.key.dim);
        let mut fig = Figure::new(
            &format!("{} of each device: fit with 95 % interval", p.key.name()),
            Axis::new("device (batch order)", ""),
            Axis::new(&p.key.key, &u.text),
        );
        let mut dots = Series::line(
            "fitted value",
            ok.iter()
                .map(|(i, _, o)| (*i as f64, u.value(o.fit.values[k])))
                .collect(),
        );
        dots.style = Style::Points;
        dots.markers = true;
        dots.colour = Some(0);
        let mut first = true;
        for (i, _, o) in &ok {
            if let Some((lo, hi)) = o.intervals[k] {
                let x = *i as f64;
                let mut bar = Series::line(
                    if first { "95 % interval" } else { "" },
                    vec![(x, u.value(lo)), (x, u.value(hi))],
                );
                bar.markers = false;
                bar.colour = Some(0);
                fig.series.push(bar);
                first = false;
            }
        }
        fig.series.push(dots);
        if let Some(s) = lib::across(fits, k) {
            let ends = (0.5, fits.len() as f64 + 0.5);
            let flat = |y: f64| vec![(ends.0, u.value(y)), (ends.1, u.value(y))];
            let mut mean = Series::line("mean", flat(s.mean));
            mean.markers = false;
            mean.colour = Some(1);
            fig.series.push(mean);
            for (n, y) in [s.mean - s.std_dev, s.mean + s.std_dev]
                .into_iter()
                .enumerate()
            {
                let mut band = Series::line(if n == 0 { "mean +- std. dev." } else { "" }, flat(y));
                band.style = Style::Dashed;
                band.markers = false;
                band.colour = Some(1);
                fig.series.push(band);
            }
        }
        let stem = stems.unique(&p.key.name());
        draw(&dir.join(format!("batch-{stem}")), &fig)?;
    }
    if let [a, c, ..] = params.as_slice() {
        let (ua, uc) = (Unit::of(a.key.dim), Unit::of(c.key.dim));
        let mut fig = Figure::new(
            &format!("{} against {} across the devices", c.key.key, a.key.key),
            Axis::new(&a.key.key, &ua.text),
            Axis::new(&c.key.key, &uc.text),
        );
        let pts: Vec<(f64, f64)> = ok
            .iter()
            .map(|(_, _, o)| (ua.value(o.fit.values[0]), uc.value(o.fit.values[1])))
            .collect();
        let labelled = ok.len() <= 20;
        if labelled {
            // Few devices: each a point labelled with its name (the dots below set the axes'
            // ranges and sit under the labelled points, in the marks' colour).
            fig.marks = ok
                .iter()
                .zip(&pts)
                .map(|((_, f, _), &xy)| Mark::Point(xy, f.member.label.clone()))
                .collect();
        }
        let mut dots = Series::line(if labelled { "" } else { "fitted devices" }, pts);
        dots.style = Style::Points;
        dots.markers = true;
        dots.colour = labelled.then_some(2);
        fig.series.push(dots);
        draw(&dir.join("batch-scatter"), &fig)?;
    }
    Ok(())
}

/// The partial result of one shard of a batch.
#[derive(Clone, Debug)]
pub(crate) struct Part {
    pub lamina_version: String,
    pub inputs_hash: String,
    pub batch: Batch,
    pub shard: usize,
    pub shards: usize,
    /// The shard's devices' fits, in device order.
    pub fits: Vec<DeviceFit>,
}

fn nums(v: &[f64]) -> Value {
    Value::Array(v.iter().map(|x| num(*x)).collect())
}

fn opt_num(x: Option<f64>) -> Value {
    x.map_or(Value::Null, num)
}

fn fit_json(f: &Fit) -> Value {
    json!({
        "values": nums(&f.values),
        "std_errors": f.std_errors.iter().map(|s| opt_num(*s)).collect::<Vec<_>>(),
        "at_bound": f.at_bound,
        "correlation": nums(&f.correlation),
        "singular_values": nums(&f.singular_values),
        "weak": f.weak.iter().map(|w| json!({
            "parameters": w.parameters.iter().map(|(k, x)| json!([k, num(*x)])).collect::<Vec<_>>(),
            "relative_singular_value": num(w.relative_singular_value),
            "std_error": num(w.std_error),
        })).collect::<Vec<_>>(),
        "correlated": f.correlated.iter().map(|(a, b, r)| json!([a, b, num(*r)])).collect::<Vec<_>>(),
        "residuals": nums(&f.residuals),
        "rss": num(f.rss),
        "evaluations": f.evaluations,
        "best_start": f.best_start,
        "termination": f.termination,
    })
}

fn row_json(r: &Row) -> Value {
    json!([
        r.line,
        num(r.vgs),
        num(r.vds),
        num(r.id),
        r.direction.map(Direction::name),
        opt_num(r.length_m),
        opt_num(r.width_m),
    ])
}

impl Part {
    /// The part as JSON (see the module documentation).
    pub fn to_json(&self) -> Value {
        let b = &self.batch;
        let range = crate::montecarlo::shard_range(self.shard, self.shards, b.labels.len());
        let rows: Vec<Value> = self
            .fits
            .iter()
            .zip(range.clone())
            .map(|(f, index)| {
                let result = f.result.as_ref().ok().map(|o| {
                    json!({
                        "start": nums(&o.start),
                        "model": nums(&o.model),
                        "device_evaluations": o.device_evaluations,
                        "fit": fit_json(&o.fit),
                    })
                });
                json!({
                    "index": index,
                    "device": f.member.label,
                    "source": f.member.source,
                    "rows": f.member.table.rows.iter().map(row_json).collect::<Vec<_>>(),
                    "error": f.result.as_ref().err(),
                    "result": result,
                })
            })
            .collect();
        json!({
            "format": FORMAT,
            "kind": "fit",
            "lamina_version": self.lamina_version,
            "inputs_hash": self.inputs_hash,
            "card_file": b.card_file,
            "data": b.data,
            "settings": settings_json(&b.flags),
            "labels": b.labels,
            "shard": self.shard,
            "shards": self.shards,
            "range": [range.start, range.end],
            "card_length_m": num(b.card_lw.0),
            "card_width_m": num(b.card_lw.1),
            "card_source": {"name": b.source.name.display().to_string(), "text": b.source.text},
            "rows": rows,
        })
    }

    /// Reads a part, checking its shape and that its rows are exactly its shard's devices.
    /// `Err` is why it is not a part, or (as a usage fault) settings this Lamina refuses.
    pub fn from_json(v: &Value) -> Result<Part, String> {
        let f = Fields(v);
        let field = |k: &str| f.get(k);
        let text = Fields::text_of;
        let count = Fields::count_of;
        if v.get("kind").and_then(Value::as_str) != Some("fit") {
            return Err("its `kind` is not `fit`".into());
        }
        let flags = settings_of(field("settings")?)?;
        let cfg = plan(&flags).map_err(|e| format!("its settings: {}", e.message()))?;
        let source = field("card_source")?;
        let batch = Batch {
            cfg: cfg.clone(),
            flags,
            card_file: f.text("card_file")?,
            data: f.texts("data")?,
            labels: f.texts("labels")?,
            card_lw: (
                number_of(field("card_length_m")?)?,
                number_of(field("card_width_m")?)?,
            ),
            source: CardSource {
                name: PathBuf::from(text(
                    source.get("name").unwrap_or(&Value::Null),
                    "card_source.name",
                )?),
                text: text(
                    source.get("text").unwrap_or(&Value::Null),
                    "card_source.text",
                )?,
            },
        };
        let (shard, shards) = (f.count("shard")?, f.count("shards")?);
        crate::cluster::check_shard(shard, shards)?;
        let want = crate::montecarlo::shard_range(shard, shards, batch.labels.len());
        let list = field("rows")?.as_array().ok_or("`rows` is not a list")?;
        let indices: Vec<usize> = list
            .iter()
            .map(|r| count(r.get("index").unwrap_or(&Value::Null), "index"))
            .collect::<Result<_, _>>()?;
        if indices != want.clone().collect::<Vec<_>>() {
            return Err(format!(
                "shard {shard}/{shards} of {} devices must hold devices {}..{} in order, but \
                 holds {} rows",
                batch.labels.len(),
                want.start,
                want.end,
                indices.len()
            ));
        }
        let fits = list
            .iter()
            .zip(want)
            .map(|(r, index)| device_of(r, index, &batch))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(Part {
            lamina_version: f.text("lamina_version")?,
            inputs_hash: f.text("inputs_hash")?,
            batch,
            shard,
            shards,
            fits,
        })
    }
}

fn nums_of(x: Option<&Value>, what: &str) -> Result<Vec<f64>, String> {
    x.and_then(Value::as_array)
        .ok_or_else(|| format!("`{what}` is not a list"))?
        .iter()
        .map(number_of)
        .collect()
}

fn opt_of(x: &Value) -> Result<Option<f64>, String> {
    match x {
        Value::Null => Ok(None),
        x => number_of(x).map(Some),
    }
}

fn whole(x: Option<&Value>, what: &str) -> Result<usize, String> {
    x.and_then(Value::as_u64)
        .and_then(|n| usize::try_from(n).ok())
        .ok_or_else(|| format!("`{what}` is not a whole number"))
}

fn fit_of(v: &Value) -> Result<Fit, String> {
    let list = |k: &str| {
        v.get(k)
            .and_then(Value::as_array)
            .ok_or_else(|| format!("`fit.{k}` is not a list"))
    };
    let weak = list("weak")?
        .iter()
        .map(|w| {
            let parameters = w
                .get("parameters")
                .and_then(Value::as_array)
                .ok_or("`parameters` of a weak combination is not a list")?
                .iter()
                .map(|p| match p.as_array().map(Vec::as_slice) {
                    Some([k, x]) => Ok((whole(Some(k), "parameter")?, number_of(x)?)),
                    _ => Err(format!("`{p}` is not a [parameter, weight] pair")),
                })
                .collect::<Result<Vec<_>, String>>()?;
            Ok(Weak {
                parameters,
                relative_singular_value: number_of(
                    w.get("relative_singular_value").unwrap_or(&Value::Null),
                )?,
                std_error: number_of(w.get("std_error").unwrap_or(&Value::Null))?,
            })
        })
        .collect::<Result<Vec<_>, String>>()?;
    let correlated = list("correlated")?
        .iter()
        .map(|c| match c.as_array().map(Vec::as_slice) {
            Some([a, b, r]) => Ok((
                whole(Some(a), "correlated")?,
                whole(Some(b), "correlated")?,
                number_of(r)?,
            )),
            _ => Err(format!("`{c}` is not an [a, b, correlation] triple")),
        })
        .collect::<Result<Vec<_>, String>>()?;
    Ok(Fit {
        values: nums_of(v.get("values"), "fit.values")?,
        std_errors: list("std_errors")?
            .iter()
            .map(opt_of)
            .collect::<Result<_, _>>()?,
        at_bound: list("at_bound")?
            .iter()
            .map(|b| {
                b.as_bool()
                    .ok_or("`fit.at_bound` holds a value that is not true or false")
            })
            .collect::<Result<_, _>>()?,
        correlation: nums_of(v.get("correlation"), "fit.correlation")?,
        singular_values: nums_of(v.get("singular_values"), "fit.singular_values")?,
        weak,
        correlated,
        residuals: nums_of(v.get("residuals"), "fit.residuals")?,
        rss: number_of(v.get("rss").unwrap_or(&Value::Null))?,
        evaluations: whole(v.get("evaluations"), "fit.evaluations")?,
        best_start: whole(v.get("best_start"), "fit.best_start")?,
        termination: v
            .get("termination")
            .and_then(Value::as_str)
            .ok_or("`fit.termination` is not text")?
            .to_string(),
    })
}

fn row_of(x: &Value) -> Result<Row, String> {
    let Some([line, vgs, vds, id, direction, l, w]) = x.as_array().map(Vec::as_slice) else {
        return Err(format!("`{x}` is not a data row of seven values"));
    };
    Ok(Row {
        line: whole(Some(line), "line")?,
        vgs: number_of(vgs)?,
        vds: number_of(vds)?,
        id: number_of(id)?,
        direction: match direction.as_str() {
            None => None,
            Some("up") => Some(Direction::Up),
            Some("down") => Some(Direction::Down),
            Some(d) => return Err(format!("`{d}` is not a sweep direction")),
        },
        length_m: opt_of(l)?,
        width_m: opt_of(w)?,
        device: None,
    })
}

/// One device's row of a part read back: its fit reassembled as the fit on one machine
/// assembles it ([`Outcome::assemble`]).
fn device_of(r: &Value, index: usize, b: &Batch) -> Result<DeviceFit, String> {
    let at = |e: String| format!("device {index}: {e}");
    let label = r
        .get("device")
        .and_then(Value::as_str)
        .ok_or_else(|| at("`device` is not text".into()))?;
    if b.labels.get(index).map(String::as_str) != Some(label) {
        return Err(at(format!(
            "`{label}` is not the device the part's labels list there"
        )));
    }
    let rows = r
        .get("rows")
        .and_then(Value::as_array)
        .ok_or_else(|| at("`rows` is not a list".into()))?
        .iter()
        .map(row_of)
        .collect::<Result<Vec<_>, _>>()
        .map_err(at)?;
    let table = Table {
        rows,
        per_width: false,
        headers: Vec::new(),
        devices: Vec::new(),
    };
    let member = Member {
        label: label.to_string(),
        source: r
            .get("source")
            .and_then(Value::as_str)
            .ok_or_else(|| at("`source` is not text".into()))?
            .to_string(),
        table,
    };
    let result = match (r.get("error"), r.get("result")) {
        (Some(Value::String(e)), Some(Value::Null)) => Err(e.clone()),
        (Some(Value::Null), Some(res)) if res.is_object() => {
            let fit = fit_of(res.get("fit").unwrap_or(&Value::Null)).map_err(at)?;
            let start = nums_of(res.get("start"), "start").map_err(at)?;
            let model = nums_of(res.get("model"), "model").map_err(at)?;
            let evaluations =
                whole(res.get("device_evaluations"), "device_evaluations").map_err(at)?;
            let data = fit::group(&member.table, b.card_lw, &b.cfg);
            let n = b.cfg.params.len();
            let used = data.points.iter().filter(|p| p.kind != Kind::Floor).count();
            if model.len() != data.points.len()
                || start.len() != n
                || fit.values.len() != n
                || fit.std_errors.len() != n
                || fit.at_bound.len() != n
                || fit.residuals.len() != used
                || fit
                    .weak
                    .iter()
                    .flat_map(|w| &w.parameters)
                    .any(|p| p.0 >= n)
                || fit.correlated.iter().any(|c| c.0 >= n || c.1 >= n)
                || !(fit.correlation.is_empty() || fit.correlation.len() == n * n)
            {
                return Err(at(
                    "its result does not match its rows and the fitted keys".into()
                ));
            }
            Ok(Outcome::assemble(
                &b.cfg,
                data,
                start,
                fit,
                model,
                evaluations,
                0.0,
            ))
        }
        _ => {
            return Err(at(
                "holds neither an `error` nor a `result` (exactly one of them is null)".into(),
            ))
        }
    };
    Ok(DeviceFit { member, result })
}

/// Puts fit parts (`read`: each part's name and JSON) back together and reports as the whole
/// batch does: the parts must be of one Lamina version, one set of inputs (card files, data,
/// settings) and one split, each shard once.
pub(crate) fn merge(
    read: Vec<(String, Value)>,
    json: bool,
    set_out: Option<OutputSet>,
) -> Result<(), JobError> {
    let mut parts = Vec::with_capacity(read.len());
    for (name, v) in &read {
        let format = v.get("format").and_then(Value::as_u64);
        if format != Some(FORMAT) {
            return Err(JobError::Invalid(format!(
                "error: {name}: fit part format {}, but this Lamina reads format {FORMAT}; run \
                 the shard again with this version",
                format.map_or("missing".to_string(), |f| f.to_string())
            )));
        }
        let part = Part::from_json(v).map_err(|why| {
            JobError::Io(format!(
                "{name}: not a part file of `lamina fit --shard`: {why}"
            ))
        })?;
        same_version(name, &part.lamina_version)?;
        parts.push(part);
    }
    let names: Vec<String> = read.into_iter().map(|(n, _)| n).collect();
    let Some(first) = parts.first() else {
        return Err(JobError::Usage("give at least one part".into()));
    };
    for (p, name) in parts.iter().zip(&names).skip(1) {
        let differs = |what: &str, a: &str, b: &str| {
            JobError::Invalid(format!(
                "error: {name} has {what} {b}, but {} has {what} {a}: the parts are not of one \
                 batch",
                names[0]
            ))
        };
        let (fa, fb) = (&first.batch.flags, &p.batch.flags);
        let (la, lb) = (settings_list(fa), settings_list(fb));
        if la != lb {
            return Err(differs("the settings", &la.join(" "), &lb.join(" ")));
        }
        if p.batch.labels != first.batch.labels {
            let show = |l: &[String]| format!("{} devices ({})", l.len(), l.join(", "));
            return Err(differs(
                "the devices",
                &show(&first.batch.labels),
                &show(&p.batch.labels),
            ));
        }
        if p.inputs_hash != first.inputs_hash {
            return Err(differs(
                "inputs hash (card files and data)",
                &first.inputs_hash,
                &p.inputs_hash,
            ));
        }
    }
    let labels = first.batch.labels.clone();
    let shards: Vec<(usize, usize)> = parts.iter().map(|p| (p.shard, p.shards)).collect();
    let order = crate::cluster::shard_order(&shards, &names, |k, n| {
        let r = crate::montecarlo::shard_range(k, n, labels.len());
        let named = labels[r.clone()].join(", ");
        format!("devices {}..{}: {named}", r.start, r.end)
    })?;
    let batch = first.batch.clone();
    let mut parts: Vec<Option<Part>> = parts.into_iter().map(Some).collect();
    let fits: Vec<DeviceFit> = order
        .into_iter()
        .filter_map(|i| parts[i].take())
        .flat_map(|p| p.fits)
        .collect();
    report(&batch, &fits, json, set_out)
}
