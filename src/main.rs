//! `lamina`: the command-line front end. Parses flags and dispatches to the job of each command
//! (`lamina::cli`), then turns the job's result into the exit code: 0 success, 1 an analysis
//! failed, 2 bad usage, 3 the circuit file has errors, 4 a file could not be read or written.

use clap::{Parser, Subcommand};
use lamina::cli;
use lamina::error::JobError;
use lamina::{note, note_raw};
use std::process::ExitCode;

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

#[derive(Subcommand)]
enum Job {
    /// Oscillation frequency of a ring oscillator: a circuit file with an `analysis ring`, or a
    /// built-in example.
    Ring(cli::ring::Args),
    /// Parse and elaborate a circuit file; print a summary, or the errors with their places.
    Check(cli::check::Args),
    /// Drain current of the one FET in a file over gate and drain voltages, source grounded.
    Iv(cli::iv::Args),
    /// Gate capacitances and the gate stack's parts of the one 2D-channel FET in a file.
    Cv(cli::cv::Args),
    /// Transfer curve, switching threshold and noise margins from a file's `analysis transfer`.
    Vtc(cli::vtc::Args),
    /// Gate delay from a file's `analysis delay { from = ..., to = ..., stop = ... }`.
    Delay(cli::delay::Args),
    /// A file's analyses over a grid of parameter values, points in parallel.
    Sweep(cli::sweep::Args),
    /// A file's analyses over random samples of its declared spreads: statistics, yield
    /// against limits, and the spreads that drive each figure.
    Montecarlo(cli::montecarlo::Args),
    /// Put the shards of `montecarlo --shard K/N` together into the report of the whole run.
    MontecarloMerge(cli::montecarlo_merge::Args),
    /// Put the shards of `sweep --shard`, `montecarlo --shard` or `fit --shard` together into
    /// the output of the whole run, byte for byte.
    Merge(cli::montecarlo_merge::Args),
    /// Write (and optionally submit) a Slurm job-array script that runs a sweep, a Monte Carlo
    /// study or a batch fit as shards.
    ClusterScript(cli::cluster::ScriptArgs),
    /// Run every analysis a circuit file declares.
    Run(cli::run::Args),
    /// The material library: channels, insulators and gates with values, units and sources.
    Materials(cli::materials::Args),
    /// Standard figures of measured transfer curves (CSV): thresholds, swing, mobility,
    /// Y-function, transfer-length method.
    Extract(cli::extract::Args),
    /// Fit keys of a device card to measured curves (CSV): values, errors, correlations and
    /// what the data cannot determine; one fit per device for a batch of devices.
    Fit(cli::fit::Args),
}

fn main() -> ExitCode {
    lamina::output::on_interrupt();
    let result = match Cli::parse().job {
        Job::Ring(a) => cli::ring::run(a),
        Job::Check(a) => cli::check::run(a),
        Job::Iv(a) => cli::iv::run(a),
        Job::Cv(a) => cli::cv::run(a),
        Job::Vtc(a) => cli::vtc::run(a),
        Job::Delay(a) => cli::delay::run(a),
        Job::Sweep(a) => cli::sweep::run(a),
        Job::Montecarlo(a) => cli::montecarlo::run(a),
        Job::MontecarloMerge(a) => cli::montecarlo_merge::run(a),
        Job::Merge(a) => cli::cluster::run_merge(a),
        Job::ClusterScript(a) => cli::cluster::run_script(a),
        Job::Run(a) => cli::run::run(a),
        Job::Materials(a) => cli::materials::run(a),
        Job::Extract(a) => cli::extract::run(a),
        Job::Fit(a) => cli::fit::run(a),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            report(&e);
            ExitCode::from(e.exit_code())
        }
    }
}

/// Prints a failure on stderr: rendered diagnostics as they are, other messages after `error:`.
fn report(e: &JobError) {
    match e {
        JobError::Invalid(msg) => note_raw!("{}", msg.trim_end_matches('\n')),
        JobError::Usage(msg) | JobError::Io(msg) if msg.contains('\n') => {
            note_raw!("{}", msg.trim_end_matches('\n'))
        }
        other => note_raw!("error: {}", other.message()),
    }
    note!();
}
