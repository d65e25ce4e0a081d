//! `lamina vtc`: a file's transfer curve, switching threshold and noise margins.

use super::{outcome_json, print_single};
use crate::design::Outcome;
use crate::error::JobError;
use crate::output::{csv, ensure_dir, write_whole as write_file};
use std::path::Path;

/// Flags of `lamina vtc`.
pub type Args = super::FileArgs;

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let super::FileRun { results, json, out } = super::run_file(a, Some("transfer"))?;
    let (kind, outcome) = &results[0];
    if let Some(set) = out {
        write_vtc(set.dir(), kind, outcome).map_err(JobError::Io)?;
        set.commit()?;
    }
    print_single(kind, outcome, json);
    Ok(())
}

pub(crate) fn write_vtc(dir: &Path, kind: &str, o: &Outcome) -> Result<(), String> {
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
        j["caution"] = serde_json::json!(super::CAUTION);
        write_file(&dir.join("summary.json"), format!("{j}\n").as_bytes())?;
        let marks: Vec<(&str, f64)> = match metrics {
            Some(m) => vec![("V_IL", m.vil), ("V_M", m.vm), ("V_IH", m.vih)],
            None => Vec::new(),
        };
        crate::plot::transfer(&dir.join("transfer"), vin, vout, &marks)?;
        crate::plot::butterfly(
            &dir.join("butterfly"),
            vin,
            vout,
            snm.map(|s| s.snm),
            &snm.map(|s| s.squares.to_vec()).unwrap_or_default(),
        )?;
    }
    Ok(())
}
