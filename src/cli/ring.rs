//! `lamina ring`: oscillation frequency, stage delay, power and energy of a ring oscillator
//! from a file's `analysis ring` or a built-in ring.

use crate::builtin::{square_ring, Ring, SquareStage};
use crate::design;
use crate::error::JobError;
use crate::output::{csv, ensure_dir, write_whole as write_file, OutputSet};
use crate::ring::{run_ring_recorded, RingParams, RingReport, RingWaves};
use crate::{note, out};
use clap::ValueEnum;
use lamina_engine::{Integrator, System};
use std::path::{Path, PathBuf};

/// A circuit built in code.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum Builtin {
    /// A ring of square-law inverters (k = 100 uA/V^2, V_T = +/-0.3 V, V_DD = 1 V, 1 fF loads).
    SquareRing,
}

/// An option turned on or off.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Switch {
    /// On.
    On,
    /// Off.
    Off,
}

/// Integration formula.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum Method {
    /// Trapezoidal rule (second order).
    Trapezoidal,
    /// Backward Euler (first order).
    Euler,
    /// Variable-step BDF2 (second order).
    Bdf2,
    /// Variable-order BDF (orders 1 to 5, chosen from error estimates).
    VariableBdf,
}

/// Flags of `lamina ring`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`) declaring `analysis ring { nodes = ..., stages = ..., supply = ... }`.
    #[arg(required_unless_present = "builtin", conflicts_with = "builtin")]
    pub file: Option<PathBuf>,
    /// Run a built-in circuit instead of a file.
    #[arg(long, value_enum)]
    pub builtin: Option<Builtin>,
    /// Number of stages of the built-in ring (odd, at least 3; default 11). A file's ring
    /// sets its own in `analysis ring`.
    #[arg(long)]
    pub stages: Option<usize>,
    /// Override a top-level parameter of the file, or of the built-in ring (kn, kp, vtn,
    /// vtp, vdd, load, lambda): `--set vdd=0.7V` (repeatable).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Integration formula.
    #[arg(long, value_enum, default_value_t = Method::Trapezoidal)]
    pub integrator: Method,
    /// Use the tighter reference tolerances.
    #[arg(long)]
    pub reference: bool,
    /// Device bypass: a device whose terminal voltages and predicted currents and charges
    /// moved by less than this multiple of the Newton tolerances since its last evaluation
    /// reuses that evaluation, expanded to first order (default 1; 0 evaluates every device
    /// at every Newton iteration). Only the 2D-channel FET is ever bypassed.
    #[arg(long, value_name = "FACTOR", default_value_t = 1.0)]
    pub bypass_factor: f64,
    /// Latency: solve Newton for the moving stages only, holding the settled ones at their
    /// values and checking their equations at every iteration, and solve the whole ring
    /// while most stages move. On by default, off with --reference (which solves every stage
    /// at every step). Pays where settled stages sit still (long square-law rings, the
    /// single-edge estimate); 2D-FET rings, whose settled outputs keep creeping toward the
    /// rail, are mostly solved whole.
    #[arg(long, value_enum)]
    pub latency: Option<Switch>,
    /// Estimate by edge travel (the time the single edge takes between two nodes) instead of
    /// whole periods: for long rings, where a period is costly.
    #[arg(long)]
    pub edge: bool,
    /// Print one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Write the DC Newton matrix at the start state to this Matrix Market file.
    #[arg(long, value_name = "FILE")]
    pub dump_matrix: Option<PathBuf>,
    /// Write waveforms (CSV), the summary (JSON) and plots (SVG, PNG) into this directory.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Stages whose waveforms `--out` keeps, such as `0,1,2` (default: five spread over the
    /// ring, or all of a ring of five or fewer).
    #[arg(long, value_name = "LIST", value_delimiter = ',')]
    pub show: Vec<usize>,
    /// Bias stress: the ring stalled with its stage outputs held alternately at this supply
    /// and at 0 V (the supply at it) for `--stress-time`, then released at its nominal supply
    /// with the traps as the stress left them; reports the frequency drift against the fresh
    /// ring (in volts unless a unit is written). Whole periods only: one pass of `--edge` sees
    /// one of each stage's two transitions, which a stress shifts differently.
    #[arg(long, value_name = "V", allow_hyphen_values = true, requires = "stress_time",
          conflicts_with_all = ["show", "dump_matrix", "edge"])]
    pub stress_supply: Option<String>,
    /// How long the stress is held, in seconds unless a unit is written (`1 s`, `10 ms`).
    #[arg(
        long,
        value_name = "TIME",
        allow_hyphen_values = true,
        requires = "stress_supply"
    )]
    pub stress_time: Option<String>,
    /// Recovery times after the stress (the ring held unpowered) at which it is measured again,
    /// such as `1 ms,1 s,100 s` (repeatable).
    #[arg(
        long,
        value_name = "TIME",
        value_delimiter = ',',
        allow_hyphen_values = true,
        requires = "stress_supply"
    )]
    pub recovery_time: Vec<String>,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    if !a.show.is_empty() && a.out.is_none() {
        return Err(JobError::Usage(
            "--show chooses the waveforms --out writes; add --out DIR".into(),
        ));
    }
    if a.latency == Some(Switch::On) && a.reference {
        return Err(JobError::Usage(
            "--latency on and --reference do not go together: the reference run solves every \
             stage at every step; drop one"
                .into(),
        ));
    }
    if !(a.bypass_factor.is_finite() && a.bypass_factor >= 0.0) {
        return Err(JobError::Usage(format!(
            "--bypass-factor {}: give a finite factor of 0 or more (0 turns the bypass off, 1 is \
             the default)",
            a.bypass_factor
        )));
    }
    let stress = super::ring_stress::plan(&a)?;
    let set_out = OutputSet::begin_opt(a.out.as_deref())?;
    let params = RingParams {
        integrator: method(a.integrator),
        reference: a.reference,
        edge: a.edge,
        bypass: a.bypass_factor,
        latency: a.latency.map_or(!a.reference, |s| s == Switch::On),
        ..RingParams::default()
    };
    // A second copy of the ring's circuit for a stress, with its shortest trap time constant.
    let mut held = None;
    let (mut system, ring, params) = match (&a.file, a.builtin) {
        (Some(_), _) if a.stages.is_some() => {
            return Err(JobError::Usage(format!(
                "--stages {} applies to the built-in ring only; a file's ring has `stages` in \
                 its `analysis ring`",
                a.stages.unwrap_or(0)
            )))
        }
        (Some(file), _) => {
            let sets = design::parse_sets(&a.set)?;
            let d = design::load(file, &sets)?;
            if stress.is_some() {
                let copy = design::load(file, &sets)?;
                held = Some((crate::ring_stress::shortest_trap_time(&copy), copy.circuit));
            }
            design::ring_from(d, &params)?
        }
        (None, Some(Builtin::SquareRing)) => {
            let stages = a.stages.unwrap_or(11);
            if stages < 3 || stages % 2 == 0 || stages > 1_000_000 {
                return Err(JobError::Usage(format!(
                    "--stages {stages}: a ring needs an odd number of stages from 3 to 1000000; \
                     give an odd count such as 11"
                )));
            }
            let mut stage = SquareStage::default();
            crate::builtin::apply_sets(&mut stage, &design::parse_sets(&a.set)?)?;
            let build =
                || square_ring(stages, &stage).map_err(|e| JobError::Analysis(e.to_string()));
            let (circuit, ring) = build()?;
            if stress.is_some() {
                held = Some((None, build()?.0));
            }
            let system = System::new(circuit).map_err(|e| JobError::Analysis(e.to_string()))?;
            (system, ring, params)
        }
        (None, None) => {
            return Err(JobError::Usage(
                "give a circuit file or --builtin square-ring".into(),
            ))
        }
    };
    if let (Some(plan), Some((tau, circuit))) = (stress, held) {
        let run = super::ring_stress::StressRun {
            held: circuit,
            plan,
            shortest_trap_time_s: tau,
        };
        return run.finish(&mut system, &ring, &params, a.json, set_out);
    }
    let done = finish_ring(
        &mut system,
        &ring,
        &params,
        a.json,
        a.dump_matrix,
        set_out,
        &a.show,
    );
    // The process ends with this job: a long ring's hundred thousand allocations are left to
    // the operating system rather than freed one by one (3 ms at 30001 stages).
    std::mem::forget(system);
    done
}

/// The ring job's common end: optional matrix dump, the run, files, and the report.
pub(crate) fn finish_ring(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
    json: bool,
    dump_matrix: Option<PathBuf>,
    out: Option<OutputSet>,
    show: &[usize],
) -> Result<(), JobError> {
    if let Some(&i) = show.iter().find(|&&i| i >= ring.outputs.len()) {
        return Err(JobError::Usage(format!(
            "--show {i}: the ring has stages 0 to {}",
            ring.outputs.len() - 1
        )));
    }
    if let Some(path) = dump_matrix {
        dump(system, ring, &path)?;
    }
    let (report, waves) = if show.is_empty() {
        run_ring_recorded(system, ring, params)
    } else {
        crate::ring::run_ring_showing(system, ring, params, show)
    }
    .map_err(|e| JobError::Analysis(e.to_string()))?;
    if let Some(set) = out {
        write_ring(set.dir(), &report, &waves).map_err(JobError::Io)?;
        set.commit()?;
    }
    if json {
        out!("{}", ring_json(&report));
    } else {
        print_ring(&report);
    }
    Ok(())
}

pub(crate) fn write_ring(dir: &Path, r: &RingReport, w: &RingWaves) -> Result<(), String> {
    ensure_dir(dir)?;
    let (t, stages) = w;
    let header: Vec<String> = std::iter::once("time_s".to_string())
        .chain(stages.iter().map(|(i, _)| format!("stage{i}_v")))
        .collect();
    let header: Vec<&str> = header.iter().map(String::as_str).collect();
    let rows = t.iter().enumerate().map(|(k, tk)| {
        std::iter::once(*tk)
            .chain(stages.iter().map(|(_, v)| v[k]))
            .collect::<Vec<f64>>()
    });
    write_file(&dir.join("waveforms.csv"), csv(&header, rows).as_bytes())?;
    let mut summary = ring_json(r);
    summary["caution"] = serde_json::json!(super::CAUTION);
    write_file(&dir.join("summary.json"), format!("{summary}\n").as_bytes())?;
    let names: Vec<String> = stages.iter().map(|(i, _)| format!("stage {i}")).collect();
    let series: Vec<(&str, &[f64])> = names
        .iter()
        .zip(stages)
        .map(|(n, (_, v))| (n.as_str(), v.as_slice()))
        .collect();
    crate::plot::waveforms(&dir.join("waveforms"), t, &series)?;
    Ok(())
}

pub(crate) fn method(m: Method) -> Integrator {
    match m {
        Method::Trapezoidal => Integrator::Trapezoidal,
        Method::Euler => Integrator::BackwardEuler,
        Method::Bdf2 => Integrator::Bdf2,
        Method::VariableBdf => Integrator::VariableBdf,
    }
}

/// Writes the DC Newton matrix at the ring's single-edge start state (Matrix Market).
pub(crate) fn dump(system: &mut System, ring: &Ring, path: &Path) -> Result<(), JobError> {
    let mut x = vec![0.0; system.unknown_count()];
    for (i, &node) in ring.outputs.iter().enumerate() {
        if let Some(u) = system.node_unknown(node) {
            x[u] = if i % 2 == 0 { ring.vdd } else { 0.0 };
        }
    }
    let m = system
        .dc_matrix(&x, 1e-12)
        .map_err(|e| JobError::Analysis(e.to_string()))?;
    let mut bytes = Vec::new();
    sprs::io::write_matrix_market_to_bufwrite(&mut bytes, &m)
        .map_err(|e| JobError::Analysis(format!("cannot encode the matrix: {e}")))?;
    write_file(path, &bytes).map_err(JobError::Io)?;
    note!(
        "wrote the {0}x{0} DC Newton matrix to {1}",
        m.rows(),
        path.display()
    );
    Ok(())
}

pub(crate) fn ring_json(r: &RingReport) -> serde_json::Value {
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

pub(crate) fn print_ring(r: &RingReport) {
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
