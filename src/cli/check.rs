//! `lamina check`: parse and elaborate a circuit file; a summary or located errors.

use crate::design;
use crate::error::JobError;
use crate::out;
use std::path::PathBuf;

/// Flags of `lamina check`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`).
    pub file: PathBuf,
    /// Override a top-level parameter: `--set vdd=0.7V` (repeatable).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Print the summary as one JSON object.
    #[arg(long)]
    pub json: bool,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args { file, set, json } = a;
    let sets = design::parse_sets(&set)?;
    let d = design::load(&file, &sets)?;
    if json {
        out!("{}", design::summary_json(&d));
    } else {
        out!("{}", design::summary_text(&file, &d));
    }
    Ok(())
}
