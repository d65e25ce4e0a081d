//! `lamina`: the command-line front end. Parses flags into a plan, runs it, and turns the
//! result into an exit code: 0 success, 1 the analysis failed, 2 bad usage (from clap or from
//! a flag value that makes no sense), 3 the circuit file has errors.

use clap::{Parser, Subcommand, ValueEnum};
use lamina::builtin::{square_ring, Ring, SquareStage};
use lamina::design::{self, Outcome};
use lamina::error::JobError as Failure;
use lamina::output::{csv, ensure_dir, write_whole as write_file};
use lamina::ring::{run_ring_recorded, RingParams, RingReport, RingWaves};
use lamina::{note, note_raw};
use lamina_engine::{Integrator, System};
use lamina_measure::transfer::DEFINITIONS;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Prints a line to stdout. A closed pipe (`lamina ... | head`) ends the program quietly; any
/// other failure to write (a full disk, `> /dev/full`) is an output error, exit 4.
macro_rules! out {
    ($($arg:tt)*) => {{
        use std::io::Write;
        if let Err(e) = writeln!(std::io::stdout().lock(), $($arg)*) {
            if e.kind() == std::io::ErrorKind::BrokenPipe {
                std::process::exit(0);
            }
            note!("error: cannot write to standard output: {e}");
            std::process::exit(4);
        }
    }};
}

#[derive(Parser)]
#[command(
    name = "lamina",
    version,
    about = "Circuit simulator for logic built from 2D-channel FETs",
    after_help = "Exit codes: 0 success; 1 an analysis failed; 2 bad usage (flags, --set and \
                  --param values); 3 the circuit file has errors; 4 an input or output file \
                  could not be read or written.\n\
                  Values carry units as in circuit files: --set vdd=0.8V, --param len=50nm,100nm."
)]
struct Cli {
    #[command(subcommand)]
    job: Job,
}

#[derive(Clone, Copy, ValueEnum)]
enum Builtin {
    /// A ring of square-law inverters (k = 100 uA/V^2, V_T = +/-0.3 V, V_DD = 1 V, 1 fF loads).
    SquareRing,
}

#[derive(Clone, Copy, ValueEnum)]
enum Method {
    /// Trapezoidal rule (second order).
    Trapezoidal,
    /// Backward Euler (first order).
    Euler,
    /// Variable-step BDF2 (second order).
    Bdf2,
}

/// Flags every file job shares.
#[derive(clap::Args)]
struct Common {
    /// Override a top-level parameter: `--set name=value`, such as `--set vdd=0.7V` (repeatable).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    set: Vec<String>,
    /// Print one JSON object on stdout instead of a table.
    #[arg(long)]
    json: bool,
    /// Write the data (CSV), the summary (JSON) and plots (SVG, PNG) into this directory.
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
}

#[derive(Subcommand)]
enum Job {
    /// Oscillation frequency of a ring oscillator: a circuit file with an `analysis ring`, or a
    /// built-in example.
    Ring {
        /// Circuit file (`.lam`) declaring `analysis ring { nodes = ..., stages = ..., supply = ... }`.
        #[arg(required_unless_present = "builtin", conflicts_with = "builtin")]
        file: Option<PathBuf>,
        /// Run a built-in circuit instead of a file.
        #[arg(long, value_enum)]
        builtin: Option<Builtin>,
        /// Number of stages of the built-in ring (odd, at least 3; default 11). A file's ring
        /// sets its own in `analysis ring`.
        #[arg(long)]
        stages: Option<usize>,
        /// Override a top-level parameter of the file, or of the built-in ring (kn, kp, vtn,
        /// vtp, vdd, load, lambda): `--set vdd=0.7V` (repeatable).
        #[arg(long = "set", value_name = "NAME=VALUE")]
        set: Vec<String>,
        /// Integration formula.
        #[arg(long, value_enum, default_value_t = Method::Trapezoidal)]
        integrator: Method,
        /// Use the tighter reference tolerances.
        #[arg(long)]
        reference: bool,
        /// Estimate by edge travel (the time the single edge takes between two nodes) instead of
        /// whole periods: for long rings, where a period is costly.
        #[arg(long)]
        edge: bool,
        /// Print one JSON object instead of a table.
        #[arg(long)]
        json: bool,
        /// Write the DC Newton matrix at the start state to this Matrix Market file.
        #[arg(long, value_name = "FILE")]
        dump_matrix: Option<PathBuf>,
        /// Write waveforms (CSV), the summary (JSON) and plots (SVG, PNG) into this directory.
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
    },
    /// Parse and elaborate a circuit file; print a summary, or the errors with their places.
    Check {
        /// Circuit file (`.lam`).
        file: PathBuf,
        /// Override a top-level parameter: `--set vdd=0.7V` (repeatable).
        #[arg(long = "set", value_name = "NAME=VALUE")]
        set: Vec<String>,
        /// Print the summary as one JSON object.
        #[arg(long)]
        json: bool,
    },
    /// Drain current of the one FET in a file over gate and drain voltages, source grounded.
    Iv {
        /// Circuit file (`.lam`) with one FET whose source is at ground.
        file: PathBuf,
        /// Gate voltages: a list `0,0.5,1` or a range `START:STOP:STEP` (V).
        #[arg(long, allow_hyphen_values = true)]
        vgs: String,
        /// Drain voltages: a list or a range (V).
        #[arg(long, allow_hyphen_values = true)]
        vds: String,
        #[command(flatten)]
        common: Common,
    },
    /// Transfer curve, switching threshold and noise margins from a file's `analysis transfer`.
    Vtc {
        /// Circuit file (`.lam`) declaring `analysis transfer { ... }`.
        file: PathBuf,
        #[command(flatten)]
        common: Common,
    },
    /// Gate delay from a file's `analysis delay { from = ..., to = ..., stop = ... }`.
    Delay {
        /// Circuit file (`.lam`) declaring `analysis delay { ... }` and driving its input.
        file: PathBuf,
        #[command(flatten)]
        common: Common,
    },
    /// A file's analyses over a grid of parameter values, points in parallel.
    Sweep {
        /// Circuit file (`.lam`) with its analyses.
        file: PathBuf,
        /// A swept top-level parameter: `name=LIST` or `name=START:STOP:STEP` (repeatable; the
        /// grid is every combination, first parameter slowest).
        #[arg(long = "param", value_name = "NAME=VALUES", required = true)]
        param: Vec<String>,
        #[command(flatten)]
        common: Common,
    },
    /// Run every analysis a circuit file declares.
    Run {
        /// Circuit file (`.lam`).
        file: PathBuf,
        #[command(flatten)]
        common: Common,
    },
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            match &e {
                // Rendered diagnostics carry their own `error:` lines.
                Failure::Invalid(msg) => note_raw!("{}", msg.trim_end_matches('\n')),
                Failure::Usage(msg) | Failure::Io(msg) if msg.contains("\n") => {
                    note_raw!("{}", msg.trim_end_matches('\n'))
                }
                other => note_raw!("error: {}", other.message()),
            }
            note!();
            ExitCode::from(e.exit_code())
        }
    }
}

fn run(cli: Cli) -> Result<(), Failure> {
    match cli.job {
        Job::Check { file, set, json } => {
            let sets = design::parse_sets(&set)?;
            let d = design::load(&file, &sets)?;
            if json {
                out!("{}", design::summary_json(&d));
            } else {
                out!("{}", design::summary_text(&file, &d));
            }
            Ok(())
        }
        Job::Iv {
            file,
            vgs,
            vds,
            common: Common { set, json, out },
        } => {
            let vg = lamina::iv::parse_values("--vgs", &vgs).map_err(Failure::Usage)?;
            let vd = lamina::iv::parse_values("--vds", &vds).map_err(Failure::Usage)?;
            lamina::iv::check_grid(&vg, &vd).map_err(Failure::Usage)?;
            let sets = design::parse_sets(&set)?;
            let d = design::load(&file, &sets)?;
            let points = lamina::iv::run_iv(d, &vg, &vd).map_err(Failure::Analysis)?;
            if let Some(dir) = &out {
                write_iv(dir, &points).map_err(Failure::Io)?;
            }
            if json {
                let pts: Vec<serde_json::Value> = points
                    .iter()
                    .map(|p| serde_json::json!({ "vgs": p.vgs, "vds": p.vds, "id": p.id }))
                    .collect();
                let m = lamina::iv::iv_metrics(&points);
                let defs: serde_json::Map<String, serde_json::Value> =
                    lamina::iv::METRIC_DEFINITIONS
                        .iter()
                        .map(|(k, d)| (k.to_string(), serde_json::json!(d)))
                        .collect();
                out!(
                    "{}",
                    serde_json::json!({
                        "points": pts,
                        "metrics": {
                            "vds_v": m.vds,
                            "ss_min_mv_per_dec": m.ss_min_mv_per_dec,
                            "vth_v": m.vth_v,
                            "ion_a": m.ion_a,
                            "ioff_a": m.ioff_a,
                            "definitions": defs,
                        }
                    })
                );
            } else {
                out!(
                    "{:>10} {:>10} {:>16}   (model estimate)",
                    "V_GS (V)",
                    "V_DS (V)",
                    "I_D (A)"
                );
                for p in &points {
                    out!("{:>10.4} {:>10.4} {:>16.6e}", p.vgs, p.vds, p.id);
                }
            }
            Ok(())
        }
        Job::Vtc {
            file,
            common: Common { set, json, out },
        } => {
            let sets = design::parse_sets(&set)?;
            let results = design::run_all(&file, &sets, &RingParams::default(), Some("transfer"))?;
            let (kind, outcome) = &results[0];
            if let Some(dir) = &out {
                write_vtc(dir, kind, outcome).map_err(Failure::Io)?;
            }
            print_single(kind, outcome, json);
            Ok(())
        }
        Job::Sweep {
            file,
            param,
            common: Common { set, json, out },
        } => {
            let sets = design::parse_sets(&set)?;
            let axes: Vec<lamina::sweep::Axis> = param
                .iter()
                .map(|p| lamina::sweep::parse_axis(p))
                .collect::<Result<_, _>>()?;
            lamina::sweep::check_axes(&axes, &sets)?;
            // Check the file once, at the grid's first point, so that a broken file or a value
            // of the wrong dimension is reported once and not per point.
            let mut first = sets.clone();
            first.extend(axes.iter().map(|a| (a.name.clone(), a.texts[0].clone())));
            design::load(&file, &first)?;
            let rows = lamina::sweep::run_sweep(&file, &sets, &axes, true);
            if let Some(dir) = &out {
                write_sweep(dir, &axes, &rows).map_err(Failure::Io)?;
            }
            let keys: Vec<String> = rows
                .iter()
                .find(|r| r.error.is_none())
                .map(|r| r.figures.iter().map(|(k, _)| k.clone()).collect())
                .unwrap_or_default();
            if json {
                let items: Vec<serde_json::Value> = rows
                    .iter()
                    .map(|r| {
                        let mut m = serde_json::Map::new();
                        for (n, v) in &r.point {
                            m.insert(n.clone(), serde_json::json!(v));
                        }
                        for (k, v) in &r.figures {
                            m.insert(k.clone(), serde_json::json!(v));
                        }
                        if let Some(e) = &r.error {
                            m.insert("error".into(), serde_json::json!(e));
                        }
                        serde_json::Value::Object(m)
                    })
                    .collect();
                out!("{}", serde_json::json!({ "rows": items }));
            } else {
                let mut header: Vec<String> = axes.iter().map(|a| a.name.clone()).collect();
                header.extend(keys.iter().cloned());
                out!(
                    "{}",
                    header
                        .iter()
                        .map(|h| format!("{h:>22}"))
                        .collect::<String>()
                );
                for r in &rows {
                    let mut line: String =
                        r.point.iter().map(|(_, v)| format!("{v:>22.6e}")).collect();
                    match &r.error {
                        Some(e) => line.push_str(&format!("   failed: {e}")),
                        None => {
                            for k in &keys {
                                match r.figures.iter().find(|(n, _)| n == k) {
                                    Some((_, v)) => line.push_str(&format!("{v:>22.6e}")),
                                    None => line.push_str(&format!("{:>22}", "-")),
                                }
                            }
                        }
                    }
                    out!("{line}");
                }
            }
            let failed: Vec<&lamina::sweep::Row> =
                rows.iter().filter(|r| r.error.is_some()).collect();
            match failed.first() {
                None => Ok(()),
                Some(r) => Err(Failure::Analysis(format!(
                    "{} of {} points failed (their rows say why); the first: {}",
                    failed.len(),
                    rows.len(),
                    r.error.as_deref().unwrap_or("")
                ))),
            }
        }
        Job::Delay {
            file,
            common: Common { set, json, out },
        } => {
            let sets = design::parse_sets(&set)?;
            let results = design::run_all(&file, &sets, &RingParams::default(), Some("delay"))?;
            if let Some(dir) = &out {
                write_run(dir, &results).map_err(Failure::Io)?;
            }
            let (kind, outcome) = &results[0];
            print_single(kind, outcome, json);
            Ok(())
        }
        Job::Run {
            file,
            common: Common { set, json, out },
        } => {
            let sets = design::parse_sets(&set)?;
            let results = design::run_all(&file, &sets, &RingParams::default(), None)?;
            if let Some(dir) = &out {
                write_run(dir, &results).map_err(Failure::Io)?;
            }
            if json {
                let items: Vec<serde_json::Value> =
                    results.iter().map(|(k, o)| outcome_json(k, o)).collect();
                out!("{}", serde_json::json!({ "analyses": items }));
            } else {
                for (_, o) in &results {
                    print_outcome(o);
                }
            }
            Ok(())
        }
        Job::Ring {
            file: Some(_),
            stages: Some(n),
            ..
        } => Err(Failure::Usage(format!(
            "--stages {n} applies to the built-in ring only; a file's ring has `stages` in its \
             `analysis ring`"
        ))),
        Job::Ring {
            file: Some(file),
            set,
            integrator,
            reference,
            edge,
            json,
            dump_matrix,
            out,
            ..
        } => {
            let sets = design::parse_sets(&set)?;
            let d = design::load(&file, &sets)?;
            let base = RingParams {
                integrator: method(integrator),
                reference,
                edge,
                ..RingParams::default()
            };
            let (mut system, ring, params) = design::ring_from(d, &base)?;
            finish_ring(&mut system, &ring, &params, json, dump_matrix, out)
        }
        Job::Ring {
            file: None,
            builtin,
            stages,
            set,
            integrator,
            reference,
            edge,
            json,
            dump_matrix,
            out,
            ..
        } => {
            let Some(Builtin::SquareRing) = builtin else {
                return Err(Failure::Usage(
                    "give a circuit file or --builtin square-ring".into(),
                ));
            };
            let stages = stages.unwrap_or(11);
            if stages < 3 || stages % 2 == 0 || stages > 1_000_000 {
                return Err(Failure::Usage(format!(
                    "--stages {stages}: a ring needs an odd number of stages from 3 to 1000000; \
                     give an odd count such as 11"
                )));
            }
            let mut stage = SquareStage::default();
            lamina::builtin::apply_sets(&mut stage, &design::parse_sets(&set)?)?;
            let (circuit, ring) =
                square_ring(stages, &stage).map_err(|e| Failure::Analysis(e.to_string()))?;
            let mut system = System::new(circuit).map_err(|e| Failure::Analysis(e.to_string()))?;
            let params = RingParams {
                integrator: method(integrator),
                reference,
                edge,
                ..RingParams::default()
            };
            finish_ring(&mut system, &ring, &params, json, dump_matrix, out)
        }
    }
}

/// Sweep rows as CSV and JSON, and each figure plotted against the first parameter (one curve
/// per combination of the others).
fn write_sweep(
    dir: &Path,
    axes: &[lamina::sweep::Axis],
    rows: &[lamina::sweep::Row],
) -> Result<(), String> {
    ensure_dir(dir)?;
    let keys: Vec<String> = rows
        .iter()
        .find(|r| r.error.is_none())
        .map(|r| r.figures.iter().map(|(k, _)| k.clone()).collect())
        .unwrap_or_default();
    let mut text = axes
        .iter()
        .map(|a| a.name.clone())
        .chain(keys.iter().cloned())
        .chain(["error".to_string()])
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for r in rows {
        let mut cells: Vec<String> = r.point.iter().map(|(_, v)| format!("{v:e}")).collect();
        for k in &keys {
            cells.push(
                r.figures
                    .iter()
                    .find(|(n, _)| n == k)
                    .map_or(String::new(), |(_, v)| format!("{v:e}")),
            );
        }
        cells.push(r.error.clone().unwrap_or_default().replace(',', ";"));
        text.push_str(&cells.join(","));
        text.push('\n');
    }
    write_file(&dir.join("sweep.csv"), text.as_bytes())?;
    let Some(first) = axes.first() else {
        return Ok(());
    };
    for k in &keys {
        let mut series: Vec<(String, Vec<(f64, f64)>)> = Vec::new();
        for r in rows.iter().filter(|r| r.error.is_none()) {
            let label: String = r.point[1..]
                .iter()
                .map(|(n, v)| format!("{n} = {v}"))
                .collect::<Vec<_>>()
                .join(", ");
            let label = if label.is_empty() { k.clone() } else { label };
            if let Some((_, v)) = r.figures.iter().find(|(n, _)| n == k) {
                match series.iter_mut().find(|(l, _)| *l == label) {
                    Some((_, pts)) => pts.push((r.point[0].1, *v)),
                    None => series.push((label, vec![(r.point[0].1, *v)])),
                }
            }
        }
        let stem: String = k
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '_' {
                    c
                } else {
                    '_'
                }
            })
            .collect();
        lamina::plot::curves(
            &dir.join(stem),
            &format!("{k} against {} (model estimate)", first.name),
            &first.name,
            k,
            &series,
        )?;
    }
    note!(
        "wrote sweep.csv and {} plots to {}",
        keys.len(),
        dir.display()
    );
    Ok(())
}

/// Every analysis's summary in one JSON file, and each transfer curve's files in a folder of
/// its own (`transfer-1`, ...).
fn write_run(dir: &Path, results: &[(String, Outcome)]) -> Result<(), String> {
    ensure_dir(dir)?;
    let mut items = Vec::new();
    for (k, (kind, o)) in results.iter().enumerate() {
        let mut j = outcome_json(kind, o);
        if let Some(m) = j.as_object_mut() {
            m.remove("vin");
            m.remove("vout");
        }
        items.push(j);
        if matches!(o, Outcome::Transfer { .. }) {
            write_vtc(&dir.join(format!("{kind}-{}", k + 1)), kind, o)?;
        }
    }
    write_file(
        &dir.join("summary.json"),
        format!("{}\n", serde_json::json!({ "analyses": items })).as_bytes(),
    )
}

/// The ring job's common end: optional matrix dump, the run, files, and the report.
fn finish_ring(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
    json: bool,
    dump_matrix: Option<PathBuf>,
    out: Option<PathBuf>,
) -> Result<(), Failure> {
    if let Some(path) = dump_matrix {
        dump(system, ring, &path)?;
    }
    let (report, waves) =
        run_ring_recorded(system, ring, params).map_err(|e| Failure::Analysis(e.to_string()))?;
    if let Some(dir) = &out {
        write_ring(dir, &report, &waves).map_err(Failure::Io)?;
    }
    if json {
        out!("{}", ring_json(&report));
    } else {
        print_ring(&report);
    }
    Ok(())
}

fn write_ring(dir: &Path, r: &RingReport, w: &RingWaves) -> Result<(), String> {
    ensure_dir(dir)?;
    let (t, a, b) = w;
    let rows = t.iter().zip(a).zip(b).map(|((t, a), b)| vec![*t, *a, *b]);
    write_file(
        &dir.join("waveforms.csv"),
        csv(&["time_s", "out[0]_v", "out[1]_v"], rows).as_bytes(),
    )?;
    write_file(
        &dir.join("summary.json"),
        format!("{}\n", ring_json(r)).as_bytes(),
    )?;
    lamina::plot::waveforms(&dir.join("waveforms"), t, &[("out[0]", a), ("out[1]", b)])?;
    note!(
        "wrote waveforms.csv, summary.json and waveforms.svg/png to {}",
        dir.display()
    );
    Ok(())
}

fn write_vtc(dir: &Path, kind: &str, o: &Outcome) -> Result<(), String> {
    ensure_dir(dir)?;
    if let Outcome::Transfer {
        vin,
        vout,
        metrics,
        snm,
    } = o
    {
        let rows = vin.iter().zip(vout).map(|(a, b)| vec![*a, *b]);
        write_file(
            &dir.join("transfer.csv"),
            csv(&["vin_v", "vout_v"], rows).as_bytes(),
        )?;
        let mut j = outcome_json(kind, o);
        if let Some(m) = j.as_object_mut() {
            m.remove("vin");
            m.remove("vout");
        }
        write_file(&dir.join("summary.json"), format!("{j}\n").as_bytes())?;
        let marks: Vec<(&str, f64)> = match metrics {
            Some(m) => vec![("V_IL", m.vil), ("V_M", m.vm), ("V_IH", m.vih)],
            None => Vec::new(),
        };
        lamina::plot::transfer(&dir.join("transfer"), vin, vout, &marks)?;
        lamina::plot::butterfly(
            &dir.join("butterfly"),
            vin,
            vout,
            snm.map(|s| s.snm),
            &snm.map(|s| s.squares.to_vec()).unwrap_or_default(),
        )?;
        note!(
            "wrote transfer.csv, summary.json, transfer.svg/png and butterfly.svg/png to {}",
            dir.display()
        );
    }
    Ok(())
}

fn write_iv(dir: &Path, points: &[lamina::iv::IvPoint]) -> Result<(), String> {
    ensure_dir(dir)?;
    let rows = points.iter().map(|p| vec![p.vgs, p.vds, p.id]);
    write_file(
        &dir.join("iv.csv"),
        csv(&["vgs_v", "vds_v", "id_a"], rows).as_bytes(),
    )?;
    let m = lamina::iv::iv_metrics(points);
    let summary = serde_json::json!({
        "vds_v": m.vds, "ss_min_mv_per_dec": m.ss_min_mv_per_dec, "vth_v": m.vth_v, "ion_a": m.ion_a, "ioff_a": m.ioff_a,
    });
    write_file(&dir.join("summary.json"), format!("{summary}\n").as_bytes())?;
    let mut vds: Vec<f64> = points.iter().map(|p| p.vds).collect();
    vds.sort_by(f64::total_cmp);
    vds.dedup();
    let curves: Vec<(f64, Vec<(f64, f64)>)> = vds
        .iter()
        .map(|&v| {
            (
                v,
                points
                    .iter()
                    .filter(|p| p.vds == v)
                    .map(|p| (p.vgs, p.id))
                    .collect(),
            )
        })
        .collect();
    lamina::plot::transfer_log(&dir.join("transfer-log"), &curves, m.ss_min_mv_per_dec)?;
    let mut vgs: Vec<f64> = points.iter().map(|p| p.vgs).collect();
    vgs.sort_by(f64::total_cmp);
    vgs.dedup();
    if vds.len() > 1 {
        // Output characteristics for up to six gate voltages spread over the sweep.
        let pick: Vec<f64> = (0..vgs.len().min(6))
            .map(|k| vgs[k * (vgs.len() - 1) / (vgs.len().min(6) - 1).max(1)])
            .collect();
        let series: Vec<(String, Vec<(f64, f64)>)> = pick
            .iter()
            .map(|&g| {
                (
                    format!("V_GS = {g:.2} V"),
                    points
                        .iter()
                        .filter(|p| p.vgs == g)
                        .map(|p| (p.vds, p.id))
                        .collect(),
                )
            })
            .collect();
        lamina::plot::curves(
            &dir.join("output"),
            "Output characteristics (model estimate)",
            "V_DS (V)",
            "I_D (A)",
            &series,
        )?;
    }
    note!(
        "wrote iv.csv, summary.json and transfer-log.svg/png to {}",
        dir.display()
    );
    Ok(())
}

fn method(m: Method) -> Integrator {
    match m {
        Method::Trapezoidal => Integrator::Trapezoidal,
        Method::Euler => Integrator::BackwardEuler,
        Method::Bdf2 => Integrator::Bdf2,
    }
}

/// Writes the DC Newton matrix at the ring's single-edge start state (Matrix Market).
fn dump(system: &mut System, ring: &Ring, path: &Path) -> Result<(), Failure> {
    let mut x = vec![0.0; system.unknown_count()];
    for (i, &node) in ring.outputs.iter().enumerate() {
        if let Some(u) = system.node_unknown(node) {
            x[u] = if i % 2 == 0 { ring.vdd } else { 0.0 };
        }
    }
    let m = system
        .dc_matrix(&x, 1e-12)
        .map_err(|e| Failure::Analysis(e.to_string()))?;
    let mut bytes = Vec::new();
    sprs::io::write_matrix_market_to_bufwrite(&mut bytes, &m)
        .map_err(|e| Failure::Analysis(format!("cannot encode the matrix: {e}")))?;
    write_file(path, &bytes).map_err(Failure::Io)?;
    note!(
        "wrote the {0}x{0} DC Newton matrix to {1}",
        m.rows(),
        path.display()
    );
    Ok(())
}

/// One analysis's result: its JSON object (without the `analysis` key) or its table.
fn print_single(kind: &str, outcome: &Outcome, json: bool) {
    if json {
        let mut v = outcome_json(kind, outcome);
        if let Some(m) = v.as_object_mut() {
            m.remove("analysis");
        }
        out!("{v}");
    } else {
        print_outcome(outcome);
    }
}

fn outcome_json(kind: &str, o: &Outcome) -> serde_json::Value {
    match o {
        Outcome::OperatingPoint(v) => {
            let map: serde_json::Map<String, serde_json::Value> = v
                .iter()
                .map(|(n, x)| (n.clone(), serde_json::json!(x)))
                .collect();
            serde_json::json!({ "analysis": kind, "node_voltages_v": map })
        }
        Outcome::Transfer {
            vin,
            vout,
            metrics,
            snm,
        } => {
            let defs: serde_json::Map<String, serde_json::Value> = DEFINITIONS
                .iter()
                .map(|(k, d)| (k.to_string(), serde_json::json!(d)))
                .collect();
            serde_json::json!({
                "analysis": kind,
                "vm": metrics.map(|m| m.vm),
                "voh": metrics.map(|m| m.voh),
                "vol": metrics.map(|m| m.vol),
                "vil": metrics.map(|m| m.vil),
                "vih": metrics.map(|m| m.vih),
                "nmh": metrics.map(|m| m.nmh),
                "nml": metrics.map(|m| m.nml),
                "snm": snm.map(|m| m.snm),
                "gain_max": metrics.map(|m| m.gain_max),
                "definitions": defs,
                "vin": vin,
                "vout": vout,
            })
        }
        Outcome::Delay(d) => serde_json::json!({
            "analysis": kind,
            "t_phl_s": d.t_phl,
            "t_plh_s": d.t_plh,
            "t_p_s": d.t_p,
            "rise_s": d.rise,
            "fall_s": d.fall,
            "transitions": d.transitions,
        }),
        Outcome::Ring(r) => {
            let mut v = ring_json(r);
            v["analysis"] = serde_json::json!(kind);
            v
        }
    }
}

fn print_outcome(o: &Outcome) {
    match o {
        Outcome::OperatingPoint(v) => {
            out!("operating point (model estimate)");
            for (n, x) in v {
                out!("  {n:<24} {x:>14.6} V");
            }
        }
        Outcome::Transfer {
            vin, metrics, snm, ..
        } => {
            out!("transfer curve, {} points (model estimate)", vin.len());
            match metrics {
                Some(m) => {
                    out!("  V_M      {:>9.4} V   input where v_out = v_in", m.vm);
                    out!("  V_OH     {:>9.4} V   output at the lowest input", m.voh);
                    out!("  V_OL     {:>9.4} V   output at the highest input", m.vol);
                    out!("  V_IL     {:>9.4} V   lowest input with slope -1", m.vil);
                    out!("  V_IH     {:>9.4} V   highest input with slope -1", m.vih);
                    out!("  NM_H     {:>9.4} V   V_OH - V_IH (unity gain)", m.nmh);
                    out!("  NM_L     {:>9.4} V   V_IL - V_OL (unity gain)", m.nml);
                    match snm {
                        Some(s) => out!("  SNM      {:>9.4} V   largest square in the butterfly (Seevinck 1987)", s.snm),
                        None => out!("  SNM          -       the curve and its mirror enclose no lobes"),
                    }
                    out!("  gain     {:>9.2}     peak |dv_out/dv_in|", m.gain_max);
                }
                None => {
                    out!("  the curve never crosses v_out = v_in or never reaches a slope of -1")
                }
            }
        }
        Outcome::Ring(r) => print_ring(r),
        Outcome::Delay(d) => {
            let ps = |v: Option<f64>| v.map_or("-".to_string(), |x| format!("{:.3} ps", x * 1e12));
            out!(
                "gate delay over {} transitions (model estimate)",
                d.transitions
            );
            out!(
                "  t_pHL   {:>12}   output falls after the input rises (50 % to 50 %)",
                ps(d.t_phl)
            );
            out!(
                "  t_pLH   {:>12}   output rises after the input falls",
                ps(d.t_plh)
            );
            out!("  t_p     {:>12}   mean of the two", ps(d.t_p));
            out!("  rise    {:>12}   output 10-90 %", ps(d.rise));
            out!("  fall    {:>12}   output 90-10 %", ps(d.fall));
        }
    }
}

fn ring_json(r: &RingReport) -> serde_json::Value {
    serde_json::json!({
        "stages": r.stages,
        "frequency_hz": r.frequency,
        "period_s": r.period,
        "stage_delay_s": r.stage_delay,
        "periods_discarded": r.periods_discarded,
        "periods_used": r.periods_used,
        "period_spread": r.period_spread,
        "avg_power_w": r.avg_power,
        "energy_per_cycle_j": r.energy_per_cycle,
        "method": r.method,
        "steps": r.steps,
        "rejected_steps": r.rejected,
        "newton_iterations": r.newton_iterations,
        "simulated_s": r.simulated,
    })
}

fn print_ring(r: &RingReport) {
    out!("ring oscillator, {} stages (model estimate)", r.stages);
    out!("  frequency      {:>14.6} GHz", r.frequency * 1e-9);
    out!("  period         {:>14.6} ps", r.period * 1e12);
    out!(
        "  stage delay    {:>14.6} ps   (1 / (2 N f))",
        r.stage_delay * 1e12
    );
    if r.avg_power.is_finite() {
        out!(
            "  supply power   {:>14.6} uW   (mean over the measured periods)",
            r.avg_power * 1e6
        );
        out!("  energy/cycle   {:>14.6} fJ", r.energy_per_cycle * 1e15);
    }
    out!("  method         {}", r.method);
    out!(
        "  periods        {:>14}      ({} discarded as start-up, spread {:.1e})",
        r.periods_used,
        r.periods_discarded,
        r.period_spread
    );
    out!(
        "  time steps     {:>14}      ({} rejected, {} Newton iterations, {:.3} ns simulated)",
        r.steps,
        r.rejected,
        r.newton_iterations,
        r.simulated * 1e9
    );
}
