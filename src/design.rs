//! Jobs on circuit files: loading with overrides, the check summary, and the analyses a file
//! declares (`operating_point`, `transfer`, `ring`).

use crate::builtin::Ring;
use crate::error::JobError;
use crate::ring::{RingParams, RingReport};
use lamina_engine::{Circuit, OpParams, Probe, SweepParams, System};
use lamina_measure::snm::{butterfly, NoiseMargin};
use lamina_measure::transfer::{transfer_metrics, TransferMetrics};
use lamina_netlist::{
    load_file, render, render_warnings, Analysis, AnalysisDecl, Design, Diagnostic, ErrorKind,
    LoadOptions,
};
use std::path::Path;
use std::sync::Mutex;

pub use crate::delay::DelayReport;

/// Parses `--set name=value` flags (the value in the language's syntax, checked against the
/// parameter's dimension when the file is loaded). A name given twice is refused.
pub fn parse_sets(sets: &[String]) -> Result<Vec<(String, String)>, JobError> {
    let mut out: Vec<(String, String)> = Vec::new();
    for s in sets {
        let (n, v) = match s.split_once('=') {
            Some((n, v)) if !n.trim().is_empty() && !v.trim().is_empty() => {
                (n.trim().to_string(), v.trim().to_string())
            }
            _ => {
                return Err(JobError::Usage(format!(
                    "--set {s}: expected name=value, such as --set vdd=0.7V"
                )))
            }
        };
        if out.iter().any(|(m, _)| *m == n) {
            return Err(JobError::Usage(format!(
                "--set {n} is given twice; give each parameter once"
            )));
        }
        out.push((n, v));
    }
    Ok(out)
}

/// Loads and elaborates `path`; on failure returns the rendered diagnostics, classified: a
/// file that cannot be read (exit 4), faults only in `--set` values (exit 2), or faults in
/// the circuit file (exit 3). Warnings go to stderr, each place once per process.
pub fn load(path: &Path, sets: &[(String, String)]) -> Result<Design, JobError> {
    let options = LoadOptions {
        overrides: sets.to_vec(),
        ..LoadOptions::default()
    };
    load_options(path, &options)
}

/// [`load`] with every load option (a Monte Carlo sample's perturbation, say).
pub fn load_options(path: &Path, options: &LoadOptions) -> Result<Design, JobError> {
    let design = load_file(path, options).map_err(|f| {
        let n = f.diagnostics.len();
        let only_values = f
            .diagnostics
            .iter()
            .all(|d| f.sources.name(d.span.file).starts_with("--set/--param "));
        let text = format!(
            "{}{} error{} in {}",
            render(&f.sources, &f.diagnostics),
            n,
            if n == 1 { "" } else { "s" },
            if only_values {
                format!("--set/--param values for {}", path.display())
            } else {
                path.display().to_string()
            }
        );
        if f.diagnostics.iter().any(|d| d.kind == ErrorKind::Io) {
            JobError::Io(text)
        } else if only_values {
            JobError::Usage(text)
        } else {
            JobError::Invalid(text)
        }
    })?;
    print_warnings_once(&design);
    Ok(design)
}

/// Prints the design's warnings that this process has not printed yet (a sweep or a run of
/// several analyses loads the same file many times).
fn print_warnings_once(design: &Design) {
    static PRINTED: Mutex<Vec<(String, usize, String)>> = Mutex::new(Vec::new());
    let mut printed = PRINTED.lock().unwrap_or_else(|p| p.into_inner());
    let fresh: Vec<Diagnostic> = design
        .warnings
        .iter()
        .filter(|w| {
            let key = (
                design.sources.name(w.span.file).to_string(),
                w.span.start,
                w.message.clone(),
            );
            if printed.contains(&key) {
                false
            } else {
                printed.push(key);
                true
            }
        })
        .cloned()
        .collect();
    if !fresh.is_empty() {
        crate::note_raw!("{}", render_warnings(&design.sources, &fresh));
    }
}

/// The summary `lamina check` prints.
pub fn summary_text(path: &Path, d: &Design) -> String {
    let s = &d.summary;
    let mut out = format!(
        "{}: ok\n  nodes      {}\n  elements   {}",
        path.display(),
        s.nodes,
        s.elements.values().sum::<usize>()
    );
    for (k, n) in &s.elements {
        out.push_str(&format!("\n    {k:<16} {n}"));
    }
    out.push_str(&format!(
        "\n  cells      {}",
        if s.cells.is_empty() {
            "-".into()
        } else {
            s.cells.join(", ")
        }
    ));
    out.push_str(&format!(
        "\n  devices    {}",
        if s.devices.is_empty() {
            "-".into()
        } else {
            s.devices.join(", ")
        }
    ));
    out.push_str(&format!(
        "\n  analyses   {}",
        if s.analyses.is_empty() {
            "-".into()
        } else {
            s.analyses.join(", ")
        }
    ));
    out
}

/// The same summary as JSON.
pub fn summary_json(d: &Design) -> serde_json::Value {
    let s = &d.summary;
    serde_json::json!({
        "nodes": s.nodes,
        "elements": s.elements,
        "cells": s.cells,
        "devices": s.devices,
        "analyses": s.analyses,
    })
}

/// The ring a file's `analysis ring { nodes = NAME, stages = N, supply = NODE }` describes
/// (checked when the file was loaded), with the system compiled from the file's circuit.
pub fn ring_from(
    design: Design,
    base: &RingParams,
) -> Result<(System, Ring, RingParams), JobError> {
    let Some(Analysis::Ring {
        nodes,
        stages,
        supply,
        supply_source,
        integrator,
    }) = design
        .analyses
        .iter()
        .map(|a| &a.analysis)
        .find(|a| matches!(a, Analysis::Ring { .. }))
        .cloned()
    else {
        return Err(JobError::Invalid(
            "the file declares no `analysis ring { nodes = ..., stages = ..., supply = ... }`; add one"
                .into(),
        ));
    };
    let mut params = *base;
    if let Some(i) = integrator {
        params.integrator = i;
    }
    let circuit: Circuit = design.circuit;
    // The names were checked against this circuit when the file was loaded.
    let node = |name: &str| {
        circuit.find_node(name).ok_or_else(|| {
            JobError::Invalid(format!("analysis `ring`: the circuit has no node `{name}`"))
        })
    };
    let outputs = (0..stages)
        .map(|i| node(&format!("{nodes}[{i}]")))
        .collect::<Result<Vec<_>, _>>()?;
    let supply_node = node(&supply)?;
    let supply_element = circuit.find_element(&supply_source).ok_or_else(|| {
        JobError::Invalid(format!("analysis `ring`: no element `{supply_source}`"))
    })?;
    let analysis = |e: lamina_engine::EngineError| JobError::Analysis(e.to_string());
    let mut system = System::new(circuit).map_err(analysis)?;
    let (sol, _) = system
        .operating_point(&OpParams::default())
        .map_err(analysis)?;
    let vdd = sol.voltage(&system, supply_node);
    if vdd.is_nan() || vdd <= 0.0 {
        return Err(JobError::Analysis(format!(
            "analysis `ring`: the supply node `{supply}` sits at {vdd} V at the operating point; \
             a ring needs a positive supply"
        )));
    }
    Ok((
        system,
        Ring {
            outputs,
            supply: supply_element,
            vdd,
        },
        params,
    ))
}

/// What one declared analysis produced.
pub enum Outcome {
    /// Node voltages of the operating point.
    OperatingPoint(crate::op::OpReport),
    /// A transfer curve and its points.
    Transfer {
        /// Input values.
        vin: Vec<f64>,
        /// Output values.
        vout: Vec<f64>,
        /// Static figures, if the curve has a switching threshold and unity-gain points.
        metrics: Option<TransferMetrics>,
        /// Maximum-square noise margin of the curve against itself, if it has two lobes.
        snm: Option<NoiseMargin>,
    },
    /// A ring measurement.
    Ring(RingReport, crate::ring::RingWaves),
    /// Gate delay between two nodes of a driven circuit.
    Delay(DelayReport),
    /// A general transient's record and figures.
    Transient(crate::transient::TransientReport),
    /// A small-signal analysis at the operating point.
    SmallSignal(Box<crate::small_signal::SmallSignalReport>),
}

/// Runs every analysis `design` declares, in order (or only those of kind `only`).
pub fn run_all(
    path: &Path,
    sets: &[(String, String)],
    base: &RingParams,
    only: Option<&str>,
) -> Result<Vec<(String, Outcome)>, JobError> {
    let options = LoadOptions {
        overrides: sets.to_vec(),
        ..LoadOptions::default()
    };
    run_all_options(path, &options, base, only)
}

/// [`run_all`] with every load option.
pub fn run_all_options(
    path: &Path,
    options: &LoadOptions,
    base: &RingParams,
    only: Option<&str>,
) -> Result<Vec<(String, Outcome)>, JobError> {
    let design = load_options(path, options)?;
    if design.analyses.is_empty() {
        return Err(JobError::Invalid(format!(
            "{} declares no analysis; add one such as `analysis operating_point`",
            path.display()
        )));
    }
    let kinds: Vec<AnalysisDecl> = design
        .analyses
        .iter()
        .filter(|a| only.is_none_or(|k| a.kind == k))
        .cloned()
        .collect();
    if kinds.is_empty() {
        return Err(JobError::Invalid(format!(
            "{} declares no `analysis {}`; add one",
            path.display(),
            only.unwrap_or("")
        )));
    }
    let mut out = Vec::new();
    // Each analysis gets a fresh elaboration, so sweeps and runs cannot affect each other; the
    // first takes the one just loaded (building a file's devices twice doubled a Monte Carlo
    // sample's set-up).
    let mut fresh = Some(design);
    for a in &kinds {
        let design = match fresh.take() {
            Some(d) => d,
            None => load_options(path, options)?,
        };
        let outcome = match a.analysis {
            Analysis::Ring { .. } => {
                let (mut sys, ring, params) = ring_from(design, base)?;
                let (report, waves) = crate::ring::run_ring_recorded(&mut sys, &ring, &params)
                    .map_err(|e| JobError::Analysis(e.to_string()))?;
                Outcome::Ring(report, waves)
            }
            _ => run_static(design, a).map_err(JobError::Analysis)?,
        };
        out.push((a.kind.clone(), outcome));
    }
    Ok(out)
}

/// A transfer analysis's input source, output node and input values (from..to at its step).
pub(crate) fn transfer_setup(
    design: &Design,
    a: &AnalysisDecl,
) -> Result<(lamina_engine::ElementId, lamina_engine::NodeId, Vec<f64>), String> {
    let Analysis::Transfer {
        source,
        output,
        from,
        to,
        steps,
    } = &a.analysis
    else {
        return Err("analysis `transfer` has no transfer settings".into());
    };
    let src = design
        .circuit
        .find_element(source)
        .ok_or_else(|| format!("analysis `transfer`: no element `{source}`"))?;
    let out_node = design
        .circuit
        .find_node(output)
        .ok_or_else(|| format!("analysis `transfer`: no node `{output}`"))?;
    let vin: Vec<f64> = (0..=*steps)
        .map(|i| from + (to - from) * i as f64 / *steps as f64)
        .collect();
    Ok((src, out_node, vin))
}

/// Runs one operating-point, transfer or delay analysis.
fn run_static(design: Design, a: &AnalysisDecl) -> Result<Outcome, String> {
    Ok(match a.kind.as_str() {
        "operating_point" => {
            let mut sys = System::new(design.circuit).map_err(|e| e.to_string())?;
            Outcome::OperatingPoint(crate::op::operating_point(&mut sys)?)
        }
        "transfer" => {
            let (src, out_node, vin) = transfer_setup(&design, a)?;
            let mut sys = System::new(design.circuit).map_err(|e| e.to_string())?;
            let res = sys
                .dc_sweep(
                    src,
                    &vin,
                    &[Probe::Voltage(out_node)],
                    &SweepParams::default(),
                )
                .map_err(|e| e.to_string())?;
            let vout = res.signals[0].clone();
            let metrics = transfer_metrics(&vin, &vout);
            let snm = butterfly(&vin, &vout, &vin, &vout);
            Outcome::Transfer {
                metrics,
                snm,
                vin,
                vout,
            }
        }
        "delay" => Outcome::Delay(crate::delay::delay(
            design,
            a,
            &crate::delay::DelayParams::default(),
        )?),
        "transient" => Outcome::Transient(crate::transient::run_transient(design, &a.analysis)?),
        "small_signal" => Outcome::SmallSignal(Box::new(crate::small_signal::run_small_signal(
            design,
            &a.analysis,
        )?)),
        other => {
            return Err(format!(
                "analysis `{other}` is declared but cannot be run here"
            ))
        }
    })
}
