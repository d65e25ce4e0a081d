//! `lamina run`: every analysis a circuit file declares.

use super::{outcome_json, print_outcome};
use crate::design::Outcome;
use crate::error::JobError;
use crate::out;
use crate::output::{ensure_dir, write_whole as write_file};
use std::path::Path;

/// Flags of `lamina run`.
pub type Args = super::FileArgs;

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let super::FileRun { results, json, out } = super::run_file(a, None)?;
    if let Some(set) = out {
        write_run(set.dir(), &results).map_err(JobError::Io)?;
        set.commit()?;
    }
    if json {
        let items: Vec<serde_json::Value> =
            results.iter().map(|(k, o)| outcome_json(k, o)).collect();
        out!(
            "{}",
            serde_json::json!({ "analyses": items, "caution": super::CAUTION })
        );
    } else {
        for (_, o) in &results {
            print_outcome(o);
        }
    }
    Ok(())
}

/// Every analysis's summary in one JSON file, and each transfer curve's files in a folder of
/// its own (`transfer-1`, ...).
pub(crate) fn write_run(dir: &Path, results: &[(String, Outcome)]) -> Result<(), String> {
    ensure_dir(dir)?;
    let mut items = Vec::new();
    for (k, (kind, o)) in results.iter().enumerate() {
        let mut j = outcome_json(kind, o);
        if let Some(m) = j.as_object_mut() {
            m.remove("vin");
            m.remove("vout");
            m.remove("points");
            if let Some(d) = m.get_mut("device").and_then(|d| d.as_object_mut()) {
                d.remove("points");
            }
        }
        items.push(j);
        match o {
            Outcome::Transfer { .. } => {
                super::vtc::write_vtc(&dir.join(format!("{kind}-{}", k + 1)), kind, o)?
            }
            Outcome::Transient(r) => {
                super::transient::write_transient(&dir.join(format!("{kind}-{}", k + 1)), r)?
            }
            Outcome::Delay(d) => {
                super::delay::write_delay(&dir.join(format!("{kind}-{}", k + 1)), d)?
            }
            Outcome::OperatingPoint(op) => {
                let sub = dir.join(format!("{kind}-{}", k + 1));
                ensure_dir(&sub)?;
                for (name, body) in crate::op::csv(op) {
                    write_file(&sub.join(name), body.as_bytes())?;
                }
            }
            Outcome::SmallSignal(r) => {
                super::small_signal::write_small_signal(&dir.join(format!("{kind}-{}", k + 1)), r)?
            }
            _ => {}
        }
    }
    write_file(
        &dir.join("summary.json"),
        format!(
            "{}\n",
            serde_json::json!({ "analyses": items, "caution": super::CAUTION })
        )
        .as_bytes(),
    )
}
