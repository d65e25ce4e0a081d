//! `lamina delay`: gate delay from a file's `analysis delay`.

use super::{print_single, Common};
use crate::design;
use crate::error::JobError;
use crate::ring::RingParams;

/// Flags of `lamina delay`.
pub type Args = super::FileArgs;

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        common: Common { set, json, out },
    } = a;
    let sets = design::parse_sets(&set)?;
    let results = design::run_all(&file, &sets, &RingParams::default(), Some("delay"))?;
    if let Some(dir) = &out {
        super::run::write_run(dir, &results).map_err(JobError::Io)?;
    }
    let (kind, outcome) = &results[0];
    print_single(kind, outcome, json);
    Ok(())
}
