//! The command-line jobs: one module per command, each owning its flags (`Args`), its plan and
//! run, and its report (table, JSON, files, figures). `src/main.rs` only parses and dispatches.
//!
//! Shared here: the flags every file job takes ([`Common`]) and the report of each analysis
//! kind, which `run`, `vtc`, `delay` and `ring` print the same way.

pub mod check;
pub mod cluster;
pub mod cv;
pub mod delay;
pub mod extract;
pub mod fit;
pub mod iv;
pub mod materials;
pub mod montecarlo;
pub mod montecarlo_merge;
pub mod ring;
pub mod ring_stress;
pub mod run;
pub mod small_signal;
pub mod sweep;
pub mod transient;
pub mod vtc;

use crate::design::Outcome;

/// The caution every JSON summary carries (figures do not repeat it in their titles).
pub const CAUTION: &str = "model estimates: check them against measurement and the rules of your process before basing a design decision on them";
use crate::out;
use lamina_measure::transfer::DEFINITIONS;
use ring::{print_ring, ring_json};
use std::path::PathBuf;

/// The flags of a job that runs one circuit file's analyses (`run`, `vtc`, `delay`).
#[derive(clap::Args, Debug)]
pub struct FileArgs {
    /// Circuit file (`.lam`) declaring the analyses to run (`vtc`: an `analysis transfer`;
    /// `delay`: an `analysis delay`, with its input driven by a pulse source).
    pub file: PathBuf,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// What a file job ran: the results, whether JSON was asked for, and the output set (prepared
/// before anything ran).
pub(crate) struct FileRun {
    pub results: Vec<(String, Outcome)>,
    pub json: bool,
    pub out: Option<crate::output::OutputSet>,
}

/// Prepares `--out`, then runs the analyses of the file (only those of kind `only`).
pub(crate) fn run_file(a: FileArgs, only: Option<&str>) -> Result<FileRun, crate::error::JobError> {
    let FileArgs {
        file,
        common: Common { set, json, out },
    } = a;
    let out = crate::output::OutputSet::begin_opt(out.as_deref())?;
    let sets = crate::design::parse_sets(&set)?;
    let results = crate::design::run_all(&file, &sets, &crate::ring::RingParams::default(), only)?;
    Ok(FileRun { results, json, out })
}

/// Flags every file job shares.
#[derive(clap::Args, Debug)]
pub struct Common {
    /// Override a top-level parameter: `--set name=value`, such as `--set vdd=0.7V` (repeatable).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Print one JSON object on stdout instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Write the data (CSV), the summary (JSON) and plots (SVG, PNG) into this directory.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// One analysis's result: its JSON object (without the `analysis` key) or its table.
pub(crate) fn print_single(kind: &str, outcome: &Outcome, json: bool) {
    if json {
        let mut v = outcome_json(kind, outcome);
        if let Some(m) = v.as_object_mut() {
            m.remove("analysis");
            m.insert("caution".into(), serde_json::json!(CAUTION));
        }
        out!("{v}");
    } else {
        print_outcome(outcome);
    }
}

pub(crate) fn outcome_json(kind: &str, o: &Outcome) -> serde_json::Value {
    match o {
        Outcome::OperatingPoint(op) => {
            let mut j = crate::op::json(op);
            j["analysis"] = serde_json::json!(kind);
            j
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
            "polarity": d.polarity.as_str(),
            "t_phl_s": d.t_phl,
            "t_plh_s": d.t_plh,
            "t_p_s": d.t_p,
            "rise_s": d.rise,
            "fall_s": d.fall,
            "levels": [d.levels.0, d.levels.1],
            "falling": d.falling,
            "rising": d.rising,
            "transitions": d.falling + d.rising,
            "unsettled": d.unsettled,
            "warnings": d.warnings,
        }),
        Outcome::Ring(r, _) => {
            let mut v = ring_json(r);
            v["analysis"] = serde_json::json!(kind);
            v
        }
        Outcome::Transient(r) => transient::transient_json(kind, r),
        Outcome::SmallSignal(r) => small_signal::small_signal_json(kind, r),
    }
}

pub(crate) fn print_outcome(o: &Outcome) {
    match o {
        Outcome::OperatingPoint(op) => out!("{}", crate::op::text(op).trim_end()),
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
                    out!("  gain     {:>9.2}     peak |dv_out/dv_in| on the sweep's points (step-limited where the devices have almost no output conductance)", m.gain_max);
                }
                None => {
                    out!("  the curve never crosses v_out = v_in or never reaches a slope of -1")
                }
            }
        }
        Outcome::Ring(r, _) => print_ring(r),
        Outcome::Transient(r) => transient::print_transient(r),
        Outcome::SmallSignal(r) => small_signal::print_small_signal(r),
        Outcome::Delay(d) => {
            let ps = |v: Option<f64>| v.map_or("-".to_string(), |x| format!("{:.3} ps", x * 1e12));
            let (lo, hi) = (100.0 * d.levels.0, 100.0 * d.levels.1);
            out!(
                "gate delay, {} path, over {} falling and {} rising output transitions (model estimate)",
                d.polarity.as_str(),
                d.falling,
                d.rising
            );
            out!(
                "  t_pHL   {:>12}   output falls ({} of them; 50 % to 50 %, from the input edge that caused it)",
                ps(d.t_phl),
                d.falling
            );
            out!(
                "  t_pLH   {:>12}   output rises ({} of them)",
                ps(d.t_plh),
                d.rising
            );
            out!("  t_p     {:>12}   mean of the two", ps(d.t_p));
            out!(
                "  rise    {:>12}   output {lo}-{hi} % of its own settled levels",
                ps(d.rise)
            );
            out!("  fall    {:>12}   output {hi}-{lo} %", ps(d.fall));
            for w in &d.warnings {
                crate::note!("warning: {w}");
            }
        }
    }
}

/// The width of each column of a text table: the longest of its header and cells.
pub(crate) fn column_widths(header: &[String], cells: &[Vec<String>]) -> Vec<usize> {
    (0..header.len())
        .map(|j| {
            cells
                .iter()
                .map(|c| c[j].len())
                .chain([header[j].len()])
                .max()
                .unwrap_or(0)
        })
        .collect()
}
