//! `lamina`: the command-line front end. Parses flags into a plan, runs it, and turns the
//! result into an exit code: 0 success, 1 the analysis failed, 2 bad usage (from clap or from
//! a flag value that makes no sense).

use clap::{Parser, Subcommand, ValueEnum};
use lamina::builtin::{square_ring, SquareStage};
use lamina::ring::{run_ring, RingParams, RingReport};
use lamina_engine::{Integrator, System};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "lamina",
    version,
    about = "Circuit simulator for logic built from 2D-channel FETs"
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

#[derive(Subcommand)]
enum Job {
    /// Oscillation frequency of a ring oscillator.
    Ring {
        /// Which built-in circuit to run.
        #[arg(long, value_enum)]
        builtin: Builtin,
        /// Number of stages (odd, at least 3).
        #[arg(long, default_value_t = 11)]
        stages: usize,
        /// Integration formula.
        #[arg(long, value_enum, default_value_t = Method::Trapezoidal)]
        integrator: Method,
        /// Use the tighter reference tolerances.
        #[arg(long)]
        reference: bool,
        /// Print one JSON object instead of a table.
        #[arg(long)]
        json: bool,
        /// Write the DC Newton matrix at the start state to this Matrix Market file.
        #[arg(long, value_name = "FILE")]
        dump_matrix: Option<PathBuf>,
    },
}

enum Failure {
    Usage(String),
    Analysis(String),
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(Failure::Usage(msg)) => {
            eprintln!("error: {msg}");
            ExitCode::from(2)
        }
        Err(Failure::Analysis(msg)) => {
            eprintln!("error: {msg}");
            ExitCode::from(1)
        }
    }
}

/// Writes through a temporary file beside `path`, so the file appears whole or not at all.
fn write_whole(path: &Path, write: impl FnOnce(&Path) -> Result<(), String>) -> Result<(), String> {
    let mut tmp = path.as_os_str().to_owned();
    tmp.push(".partial");
    let tmp = PathBuf::from(tmp);
    if let Err(e) = write(&tmp) {
        let _ = std::fs::remove_file(&tmp);
        return Err(e);
    }
    std::fs::rename(&tmp, path).map_err(|e| format!("cannot write {}: {e}", path.display()))
}

fn run(cli: Cli) -> Result<(), Failure> {
    match cli.job {
        Job::Ring {
            builtin: Builtin::SquareRing,
            stages,
            integrator,
            reference,
            json,
            dump_matrix,
        } => {
            if stages < 3 || stages % 2 == 0 || stages > 1_000_000 {
                return Err(Failure::Usage(format!(
                    "--stages {stages}: a ring needs an odd number of stages from 3 to 1000000; \
                     give an odd count such as 11"
                )));
            }
            let (circuit, ring) = square_ring(stages, &SquareStage::default())
                .map_err(|e| Failure::Analysis(e.to_string()))?;
            let mut system = System::new(circuit).map_err(|e| Failure::Analysis(e.to_string()))?;
            if let Some(path) = dump_matrix {
                let mut x = vec![0.0; system.unknown_count()];
                for (i, &node) in ring.outputs.iter().enumerate() {
                    if let Some(u) = system.node_unknown(node) {
                        x[u] = if i % 2 == 0 { ring.vdd } else { 0.0 };
                    }
                }
                let m = system
                    .dc_matrix(&x, 1e-12)
                    .map_err(|e| Failure::Analysis(e.to_string()))?;
                write_whole(&path, |tmp| {
                    sprs::io::write_matrix_market(tmp, &m)
                        .map_err(|e| format!("cannot write {}: {e}", path.display()))
                })
                .map_err(Failure::Usage)?;
                eprintln!(
                    "wrote the {0}x{0} DC Newton matrix to {1}",
                    m.rows(),
                    path.display()
                );
            }
            let params = RingParams {
                integrator: match integrator {
                    Method::Trapezoidal => Integrator::Trapezoidal,
                    Method::Euler => Integrator::BackwardEuler,
                    Method::Bdf2 => Integrator::Bdf2,
                },
                reference,
                ..RingParams::default()
            };
            let report = run_ring(&mut system, &ring, &params)
                .map_err(|e| Failure::Analysis(e.to_string()))?;
            if json {
                println!("{}", ring_json(&report));
            } else {
                print_ring(&report);
            }
            Ok(())
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
        "method": "period from rising mid-level crossings of out[0]",
        "steps": r.steps,
        "rejected_steps": r.rejected,
        "newton_iterations": r.newton_iterations,
        "simulated_s": r.simulated,
    })
}

fn print_ring(r: &RingReport) {
    println!("ring oscillator, {} stages (model estimate)", r.stages);
    println!("  frequency      {:>14.6} GHz", r.frequency * 1e-9);
    println!("  period         {:>14.6} ps", r.period * 1e12);
    println!(
        "  stage delay    {:>14.6} ps   (1 / (2 N f))",
        r.stage_delay * 1e12
    );
    println!(
        "  periods        {:>14}      ({} discarded as start-up, spread {:.1e})",
        r.periods_used, r.periods_discarded, r.period_spread
    );
    println!(
        "  time steps     {:>14}      ({} rejected, {} Newton iterations, {:.3} ns simulated)",
        r.steps,
        r.rejected,
        r.newton_iterations,
        r.simulated * 1e9
    );
}
