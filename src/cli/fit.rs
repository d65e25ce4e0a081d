//! `lamina fit`: chosen keys of a device card fitted to measured curves, with standard
//! errors, correlations and what the data cannot determine (see [`crate::fit`] for the data
//! grouping, the model evaluations and the objective).

use crate::cli::extract::{positive, read_table};
use crate::cli::CAUTION;
use crate::error::JobError;
use crate::fit::{self, FitConfig, FitSpec, Kind, Outcome, Unit};
use crate::out;
use crate::output::{csv, ensure_dir, write_whole, OutputSet};
use crate::plot::{draw, Axis, Figure, Series, Style};
use lamina_netlist::units::{engineering, Dim};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

pub mod batch;

/// Flags of `lamina fit`.
#[derive(clap::Args, Debug)]
#[command(
    after_help = "Objective: for each point above the floor, w_sub log10(|I_model|/|I_data|) \
    where |I_data| is below the switch current (100 nA x W/L unless --switch-current), else \
    w_on (I_model - I_data)/|I_data|; half the sum of squares is minimised by a bounded \
    Levenberg-Marquardt method. Points below the floor (1 pA x W/L, at least 10 pA, unless \
    --floor) are left out and counted. Each device (L, W per row) is simulated at its own bias \
    points with the card file's one FET, the fitted keys set as by --set card.key=VALUE.\n\
    The default weights, sub = ln 10 = 2.303 and on = 1, make both residuals relative errors, so \
    multiplicative measurement noise has one scale, as the standard errors assume; \
    --weights sub=1 weighs a decade like 100 %. The fitted values are model estimates.\n\
    Example: lamina fit curves.csv --card device.lam \
    --fit \"n2d.electron_mobility=5:200cm^2/(V s):log\" --fit \"n2d.source_resistance=10:5000Ohm um:log\" \
    --tie n2d.drain_resistance=n2d.source_resistance\n\
    A batch (one fit per device, statistics across the devices): lamina fit wafer.csv --card \
    device.lam --fit ... where wafer.csv has a `device` column, or lamina fit dies/ ... for a \
    directory of one file per device; --shard K/N splits it for lamina merge."
)]
pub struct Args {
    /// Measured curves: CSV with units in the headers, such as `V_GS (V), V_DS (V), I_D (A)`;
    /// optional `direction`, `L (nm)` and `W (um)` columns (one fit spans several devices).
    /// Several files, a directory (its `.csv` files in name order) or a `device` column make
    /// a batch: one fit per file, or per name in the `device` column.
    #[arg(required = true, value_name = "DATA")]
    pub data: Vec<PathBuf>,
    /// Circuit file with one 2D-channel FET (source at ground) made from the card to fit.
    #[arg(long, value_name = "FILE")]
    pub card: PathBuf,
    /// What is fitted and how.
    #[command(flatten)]
    pub flags: FitFlags,
    /// Print one JSON object on stdout instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Write fitted.lam, fit.csv, summary.json and figures into this directory (a batch:
    /// batch.csv, batch.json and figures across the devices, and each device's files in
    /// devices/NAME/).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// A batch only: fit only shard K of N of its devices (`[floor((K-1) D / N), floor(K D /
    /// N))` of D devices, in device order) and write the partial result (`DIR/part.json` with
    /// `--out DIR`, else JSON on stdout), for `lamina merge` to put together.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
    /// The shard of this task of a Slurm job array submitted as `--array=0-(N-1)`: K =
    /// SLURM_ARRAY_TASK_ID + 1 (the index counts from 0), N = SLURM_ARRAY_TASK_COUNT.
    #[arg(long, conflicts_with = "shard")]
    pub shard_from_env: bool,
}

/// The flags that define a fit, the same for every device of a batch (a batch's parts record
/// them, and a merge takes only parts with the same).
#[derive(clap::Args, Clone, Debug, PartialEq)]
pub struct FitFlags {
    /// A key to fit with its bounds: `card.key=LO:HI`, `:log` to fit its logarithm, such as
    /// `n2d.electron_mobility=5:200cm^2/(V s):log` or `n2d.gate_work_function=4.0:4.8eV`.
    #[arg(long = "fit", value_name = "KEY=LO:HI[:log]", required = true)]
    pub fit: Vec<String>,
    /// Start of a fitted key (default: the card's value, clamped into the bounds).
    #[arg(long, value_name = "KEY=VALUE")]
    pub start: Vec<String>,
    /// Sets a key to the value of a fitted key, such as
    /// `n2d.drain_resistance=n2d.source_resistance`.
    #[arg(long, value_name = "KEY=FITTED_KEY")]
    pub tie: Vec<String>,
    /// Weights of the log-current and relative-current residuals (default `sub=2.303,on=1`).
    #[arg(long, value_name = "sub=W,on=W")]
    pub weights: Option<String>,
    /// Switch between log-current and relative residuals per square (x W/L); default 100nA.
    #[arg(long, value_name = "CURRENT")]
    pub switch_current: Option<String>,
    /// Noise floor: points with |I_D| below it are left out (default 1 pA x W/L, at least
    /// 10 pA).
    #[arg(long, value_name = "CURRENT")]
    pub floor: Option<String>,
    /// Solver starts: the given start, then points spread over the bounds (default 1).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub starts: usize,
}

fn usage(e: String) -> JobError {
    JobError::Usage(e)
}

fn weights(text: &str) -> Result<(f64, f64), String> {
    let d = FitConfig::default();
    let (mut sub, mut on) = (d.w_sub, d.w_on);
    for part in text.split(',') {
        let bad = || format!("--weights {text}: expected sub=W,on=W with W a non-negative number");
        let (k, v) = part.split_once('=').ok_or_else(bad)?;
        let v: f64 = v.trim().parse().map_err(|_| bad())?;
        if !(v >= 0.0 && v.is_finite()) {
            return Err(bad());
        }
        match k.trim() {
            "sub" => sub = v,
            "on" => on = v,
            _ => return Err(bad()),
        }
    }
    if sub == 0.0 && on == 0.0 {
        return Err(format!("--weights {text}: one weight must be positive"));
    }
    Ok((sub, on))
}

/// Turns the flags into a fit configuration (exit 2 on any fault).
pub fn plan(a: &FitFlags) -> Result<FitConfig, JobError> {
    let mut params = a
        .fit
        .iter()
        .map(|t| FitSpec::parse(t).map_err(|e| format!("--fit {e}")))
        .collect::<Result<Vec<_>, _>>()
        .map_err(usage)?;
    for (k, p) in params.iter().enumerate() {
        if params[..k].iter().any(|q| q.key == p.key) {
            return Err(usage(format!(
                "--fit {} is given twice; give each key once",
                p.key.name()
            )));
        }
        if p.key.card != params[0].key.card {
            return Err(usage(format!(
                "--fit {} and {}: fit the keys of one card at a time",
                params[0].key.name(),
                p.key.name()
            )));
        }
    }
    for s in &a.start {
        fit::apply_start(s, &mut params).map_err(|e| usage(format!("--start {e}")))?;
    }
    let mut ties = Vec::new();
    for t in &a.tie {
        let tie = fit::parse_tie(t, &params).map_err(|e| usage(format!("--tie {e}")))?;
        if ties.iter().any(|(k, _): &(fit::Key, usize)| *k == tie.0) {
            return Err(usage(format!("--tie {t}: {} is tied twice", tie.0.name())));
        }
        ties.push(tie);
    }
    let (w_sub, w_on) = a
        .weights
        .as_deref()
        .map_or(
            Ok((FitConfig::default().w_sub, FitConfig::default().w_on)),
            weights,
        )
        .map_err(usage)?;
    if a.starts == 0 || a.starts > 1000 {
        return Err(usage("--starts: give 1 to 1000 starts".into()));
    }
    Ok(FitConfig {
        params,
        ties,
        w_sub,
        w_on,
        switch_per_square_a: positive("--switch-current", &a.switch_current, "A", Dim::CURRENT)?
            .unwrap_or(fit::SWITCH_PER_SQUARE),
        floor_a: positive("--floor", &a.floor, "A", Dim::CURRENT)?,
        starts: a.starts,
    })
}

/// What a fit's flags name, read and checked.
pub(crate) struct Inputs {
    /// The fit's configuration.
    pub cfg: FitConfig,
    /// The card file's design.
    pub design: lamina_netlist::Design,
    /// Each data file as given (a directory's files in name order) with its table.
    pub tables: Vec<(String, lamina_netlist::table::Table)>,
    /// Whether they make a batch: several files, a directory or a `device` column.
    pub batch: bool,
}

/// Reads and checks what the flags name.
pub(crate) fn inputs(a: &Args) -> Result<Inputs, JobError> {
    let cfg = plan(&a.flags)?;
    let design = crate::design::load(&a.card, &[])?;
    // The card's width turns a per-width current into a current where the data has no `W`.
    let width = crate::iv::find_fet(&design.circuit)
        .ok()
        .and_then(|fet| design.sheet_card(fet))
        .map(|c| c.width);
    let files = batch::data_files(&a.data)?;
    let tables = files
        .iter()
        .map(|f| read_table(f, width).map(|t| (f.display().to_string(), t)))
        .collect::<Result<Vec<_>, _>>()?;
    let one = a.data.len() == 1 && !a.data[0].is_dir() && tables[0].1.devices.is_empty();
    Ok(Inputs {
        cfg,
        design,
        tables,
        batch: !one,
    })
}

/// Runs the job: one fit, or a batch ([`batch`]).
pub fn run(a: Args) -> Result<(), JobError> {
    let shard = crate::cluster::resolve_shard(a.shard.as_deref(), a.shard_from_env)?;
    let set = OutputSet::begin_opt(a.out.as_deref())?;
    let Inputs {
        cfg,
        design,
        tables,
        batch,
    } = inputs(&a)?;
    if batch {
        return batch::run(&a, cfg, &design, &tables, shard, set);
    }
    if shard.is_some() {
        return Err(JobError::Usage(
            "--shard splits a batch of fits over machines, but this is one fit: give several \
             data files, a directory of them, or a `device` column"
                .into(),
        ));
    }
    let o = fit::fit_table(&a.card, &tables[0].1, &cfg).map_err(failure)?;
    let summary = to_json(&o, &cfg, &a.data[0], &a.card, Some(o.wall_s));
    if let Some(set) = set {
        let source = fit::card_source(&a.card, &o.params[0].key.card).map_err(JobError::Io)?;
        write_files(set.dir(), &o, &summary, &source).map_err(JobError::Io)?;
        set.commit()?;
    }
    if a.json {
        out!("{summary}");
    } else {
        for line in text_report(&o, &cfg) {
            out!("{line}");
        }
    }
    Ok(())
}

/// A failed fit as the job's error: a card file that does not suit the keys is bad usage.
fn failure(f: fit::FitFailure) -> JobError {
    match f {
        fit::FitFailure::Setup(e) => JobError::Usage(e),
        fit::FitFailure::Fit(e) => JobError::Analysis(format!("the fit failed: {e}")),
    }
}

/// Five significant digits in the shortest form.
fn num(x: f64) -> String {
    let r: f64 = format!("{x:.4e}").parse().unwrap_or(x);
    format!("{}", crate::iv::unsigned_zero(r))
}

/// `x` to two significant digits of its standard error `se` (five digits without one).
fn to_error(x: f64, se: Option<f64>) -> String {
    let Some(se) = se.filter(|s| *s > 0.0 && s.is_finite()) else {
        return num(x);
    };
    let digits = (x.abs().max(se).log10().floor() - se.log10().floor() + 1.0).clamp(0.0, 15.0);
    let r: f64 = format!("{x:.*e}", digits as usize).parse().unwrap_or(x);
    format!("{}", crate::iv::unsigned_zero(r))
}

fn device_label(o: &Outcome, d: usize) -> String {
    let dev = &o.data.devices[d];
    format!(
        "device {} (L = {}, W = {})",
        d + 1,
        engineering(dev.length_m, "m"),
        engineering(dev.width_m, "m")
    )
}

fn curve_label(o: &Outcome, c: usize) -> String {
    let cv = &o.data.curves[c];
    let transfer = o.data.devices[cv.device].transfer;
    format!(
        "{} = {}{}",
        if transfer { "V_DS" } else { "V_GS" },
        engineering(cv.fixed_v, "V"),
        cv.direction
            .map_or(String::new(), |d| format!(" {}", d.name()))
    )
}

/// The report as lines of text.
pub fn text_report(o: &Outcome, cfg: &FitConfig) -> Vec<String> {
    let f = &o.fit;
    let count = |k: Kind| o.data.points.iter().filter(|p| p.kind == k).count();
    let mut l = vec![
        format!(
            "fit of {} key(s) of card `{}` to {} points of {} device(s), {} curve(s)",
            o.params.len(),
            o.params[0].key.card,
            o.data.points.len(),
            o.data.devices.len(),
            o.data.curves.len()
        ),
        format!(
            "  residuals: {} log-current (w_sub = {:.4}), {} relative (w_on = {:.4}); {} points below the floor left out",
            count(Kind::Sub),
            cfg.w_sub,
            count(Kind::On),
            cfg.w_on,
            count(Kind::Floor)
        ),
        String::new(),
        format!(
            "  {:<32} {:>12} {:>12} {:>27} {:>12}  unit",
            "key", "value", "std. error", "95 % interval", "start"
        ),
    ];
    for (k, p) in o.params.iter().enumerate() {
        let u = Unit::of(p.key.dim);
        let se = f.std_errors[k].map_or("-".into(), |s| num(u.value(s)));
        let se_u = f.std_errors[k].map(|s| u.value(s));
        let iv = o.intervals[k].map_or(
            if f.at_bound[k] {
                "at a bound".to_string()
            } else {
                "-".to_string()
            },
            |(a, b)| {
                format!(
                    "[{}, {}]",
                    to_error(u.value(a), se_u),
                    to_error(u.value(b), se_u)
                )
            },
        );
        l.push(format!(
            "  {:<32} {:>12} {:>12} {:>27} {:>12}  {}{}",
            p.key.name(),
            to_error(u.value(f.values[k]), se_u),
            se,
            iv,
            num(u.value(o.start[k])),
            u.text,
            if p.log { " (log scale)" } else { "" }
        ));
    }
    for (k, to) in &o.ties {
        l.push(format!(
            "  {:<32} tied to {}",
            k.name(),
            o.params[*to].key.name()
        ));
    }
    if !f.correlation.is_empty() && o.params.len() > 1 {
        l.push(String::new());
        l.push("correlation matrix:".into());
        let n = o.params.len();
        for r in 0..n {
            let row: Vec<String> = (0..n)
                .map(|c| format!("{:+.3}", f.correlation[r * n + c]))
                .collect();
            l.push(format!("  {:<32} {}", o.params[r].key.key, row.join(" ")));
        }
    }
    l.push(format!(
        "singular values of the column-scaled Jacobian: {}",
        f.singular_values
            .iter()
            .map(|s| format!("{s:.3e}"))
            .collect::<Vec<_>>()
            .join(", ")
    ));
    l.push(String::new());
    l.push("what the data determine:".into());
    if o.findings.is_empty() {
        l.push("  every fitted key is determined by these data".into());
    }
    for s in &o.findings {
        l.push(format!("  - {s}"));
    }
    l.push(String::new());
    l.push("residuals per curve (RMS; log current in decades, relative current in %):".into());
    for (c, s) in o.stats.iter().enumerate() {
        let cv = &o.data.curves[c];
        l.push(format!(
            "  {}, {}: {} log, RMS {}; {} relative, RMS {}; {} below the floor",
            device_label(o, cv.device),
            curve_label(o, c),
            s.sub,
            s.rms_sub.map_or("-".into(), |r| format!("{r:.4} dec")),
            s.on,
            s.rms_on
                .map_or("-".into(), |r| format!("{:.3} %", 100.0 * r)),
            s.below_floor
        ));
    }
    l.push(String::new());
    l.push(format!(
        "{} device evaluations ({} residual evaluations, best of {} start(s): start {}) in {:.2} s; solver: {}",
        o.device_evaluations,
        f.evaluations,
        cfg.starts,
        f.best_start,
        o.wall_s,
        f.termination
    ));
    l.push(format!(
        "use the fitted card in any file: --set {}",
        fit::set_flags(o)
            .iter()
            .map(|s| format!("\"{s}\""))
            .collect::<Vec<_>>()
            .join(" --set ")
    ));
    l.push(format!("note: {CAUTION}"));
    l
}

/// The summary object (`--json` and `summary.json`) of the fit of the data at `data` with
/// the card file at `card`; `wall_s`, the fit's time, where it is reported (a batch leaves
/// it out, so its files do not depend on the machine).
pub fn to_json(
    o: &Outcome,
    cfg: &FitConfig,
    data: &Path,
    card: &Path,
    wall_s: Option<f64>,
) -> Value {
    let f = &o.fit;
    let params: Vec<Value> = o
        .params
        .iter()
        .enumerate()
        .map(|(k, p)| {
            json!({
                "key": p.key.name(),
                "dimension": p.key.dim.describe(),
                "value_si": f.values[k],
                "std_error_si": f.std_errors[k],
                "interval_95_si": o.intervals[k].map(|(a, b)| vec![a, b]),
                "start_si": o.start[k],
                "lower_si": p.lo,
                "upper_si": p.hi,
                "log_scale": p.log,
                "at_bound": f.at_bound[k],
                "value_text": Unit::of(p.key.dim).write(f.values[k]),
            })
        })
        .collect();
    let curves: Vec<Value> = o
        .data
        .curves
        .iter()
        .zip(&o.stats)
        .map(|(c, s)| {
            let dev = &o.data.devices[c.device];
            json!({
                "device": c.device + 1,
                "length_m": dev.length_m,
                "width_m": dev.width_m,
                "sweep": if dev.transfer { "transfer" } else { "output" },
                "fixed_v": c.fixed_v,
                "direction": c.direction.map(|d| d.name()),
                "points": c.points.len(),
                "log_residuals": s.sub,
                "rms_log_residual_dec": s.rms_sub,
                "relative_residuals": s.on,
                "rms_relative_residual": s.rms_on,
                "below_floor": s.below_floor,
            })
        })
        .collect();
    let mut v = json!({
        "data": data.display().to_string(),
        "card_file": card.display().to_string(),
        "caution": CAUTION,
        "objective": "w_sub log10(|I_model|/|I_data|) where |I_data| < switch current x W/L, else w_on (I_model - I_data)/|I_data|; points below the floor left out",
        "weights": {"sub": cfg.w_sub, "on": cfg.w_on},
        "switch_current_per_square_a": cfg.switch_per_square_a,
        "floor_a": cfg.floor_a,
        "parameters": params,
        "ties": o.ties.iter().map(|(k, to)| json!({"key": k.name(), "follows": o.params[*to].key.name()})).collect::<Vec<_>>(),
        "correlation": f.correlation,
        "singular_values": f.singular_values,
        "weak_combinations": f.weak.iter().map(|w| json!({
            "parameters": w.parameters.iter().map(|(k, wt)| json!({"key": o.params[*k].key.name(), "weight": wt})).collect::<Vec<_>>(),
            "relative_singular_value": w.relative_singular_value,
            "std_error_scaled": w.std_error,
        })).collect::<Vec<_>>(),
        "correlated_pairs": f.correlated.iter().map(|(a, b, r)| json!({"a": o.params[*a].key.name(), "b": o.params[*b].key.name(), "correlation": r})).collect::<Vec<_>>(),
        "findings": o.findings,
        "points": o.data.points.len(),
        "residuals": f.residuals.len(),
        "below_floor": o.data.points.iter().filter(|p| p.kind == Kind::Floor).count(),
        "rss": f.rss,
        "curves": curves,
        "device_evaluations": o.device_evaluations,
        "residual_evaluations": f.evaluations,
        "starts": cfg.starts,
        "best_start": f.best_start,
        "termination": f.termination,
        "set_flags": fit::set_flags(o),
    });
    if let (Some(w), Some(m)) = (wall_s, v.as_object_mut()) {
        m.insert("wall_s".into(), json!(w));
    }
    v
}

/// `summary.json`, `fitted.lam` (the card's file `source` with the fitted keys set),
/// `fit.csv` and the figures of data against fit of one fit, into `dir`.
fn write_files(
    dir: &Path,
    o: &Outcome,
    summary: &Value,
    source: &fit::CardSource,
) -> Result<(), String> {
    ensure_dir(dir)?;
    write_whole(&dir.join("summary.json"), format!("{summary}\n").as_bytes())?;
    let text = fit::fitted_card(source, o)?;
    let header = format!(
        "# Fitted by `lamina fit` from {} (keys: {}); model estimates.\n",
        source.name.display(),
        fit::set_flags(o).join(", ")
    );
    write_whole(
        &dir.join("fitted.lam"),
        format!("{header}{text}").as_bytes(),
    )?;
    let rows = o.data.points.iter().zip(&o.model).map(|(p, &m)| {
        let dev = &o.data.devices[p.device];
        let r = fit::residual(
            p.kind,
            m,
            p.id,
            &FitConfig {
                w_sub: 1.0,
                w_on: 1.0,
                ..FitConfig::default()
            },
        );
        vec![
            p.line as f64,
            (p.device + 1) as f64,
            (p.curve + 1) as f64,
            dev.length_m,
            dev.width_m,
            p.vgs,
            p.vds,
            p.id,
            m,
            match p.kind {
                Kind::Sub => 1.0,
                Kind::On => 2.0,
                Kind::Floor => 0.0,
            },
            r.unwrap_or(f64::NAN),
        ]
    });
    write_whole(
        &dir.join("fit.csv"),
        csv(
            &[
                "line",
                "device",
                "curve",
                "length_m",
                "width_m",
                "vgs_v",
                "vds_v",
                "id_data_a",
                "id_model_a",
                "residual_kind",
                "residual_unweighted",
            ],
            rows,
        )
        .as_bytes(),
    )?;
    for (d, dev) in o.data.devices.iter().enumerate() {
        let title = format!("{}: data (markers), fit (lines)", device_label(o, d));
        let (x, stem) = if dev.transfer {
            (Axis::new("V_GS", "V"), "transfer")
        } else {
            (Axis::new("V_DS", "V"), "output")
        };
        let mut log = Figure::new(&title, x.clone(), Axis::log("|I_D|", "A"));
        let mut lin = Figure::new(&title, x, Axis::new("|I_D|", "A"));
        for (n, (c, cv)) in o
            .data
            .curves
            .iter()
            .enumerate()
            .filter(|(_, c)| c.device == d)
            .enumerate()
        {
            let sweep_x = |k: usize| {
                let p = &o.data.points[k];
                if dev.transfer {
                    p.vgs
                } else {
                    p.vds
                }
            };
            let data: Vec<(f64, f64)> = cv
                .points
                .iter()
                .map(|&k| (sweep_x(k), o.data.points[k].id.abs()))
                .collect();
            let mut model: Vec<(f64, f64)> = cv
                .points
                .iter()
                .map(|&k| (sweep_x(k), o.model[k].abs()))
                .collect();
            model.sort_by(|a, b| a.0.total_cmp(&b.0));
            model.dedup_by(|a, b| a.0 == b.0);
            let name = curve_label(o, c);
            for fig in [&mut log, &mut lin] {
                fig.series.push(Series {
                    style: Style::Points,
                    markers: true,
                    colour: Some(n),
                    ..Series::line(&name, data.clone())
                });
                fig.series.push(Series {
                    markers: false,
                    colour: Some(n),
                    ..Series::line("", model.clone())
                });
            }
        }
        draw(&dir.join(format!("device-{}-{stem}-log", d + 1)), &log)?;
        draw(&dir.join(format!("device-{}-{stem}-linear", d + 1)), &lin)?;
    }
    Ok(())
}
