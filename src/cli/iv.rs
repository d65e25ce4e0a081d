//! `lamina iv`: drain current of a file's one FET over gate and drain voltages.

use super::Common;
use crate::design;
use crate::error::JobError;
use crate::output::{csv, ensure_dir, write_whole as write_file};
use crate::{note, out};
use std::path::{Path, PathBuf};

/// Flags of `lamina iv`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`) with one FET whose source is at ground.
    pub file: PathBuf,
    /// Gate voltages: a list `0,0.5,1` or a range `START:STOP:STEP`, in volts unless a unit is
    /// written (`-600:1000:20mV`).
    #[arg(long, allow_hyphen_values = true)]
    pub vgs: String,
    /// Drain voltages: a list or a range, in volts unless a unit is written.
    #[arg(long, allow_hyphen_values = true)]
    pub vds: String,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        vgs,
        vds,
        common: Common { set, json, out },
    } = a;
    let vg = crate::iv::parse_values("--vgs", &vgs).map_err(JobError::Usage)?;
    let vd = crate::iv::parse_values("--vds", &vds).map_err(JobError::Usage)?;
    crate::iv::check_grid(&vg, &vd).map_err(JobError::Usage)?;
    let sets = design::parse_sets(&set)?;
    let d = design::load(&file, &sets)?;
    let points = crate::iv::run_iv(d, &vg, &vd).map_err(JobError::Analysis)?;
    if let Some(dir) = &out {
        write_iv(dir, &points).map_err(JobError::Io)?;
    }
    if json {
        let pts: Vec<serde_json::Value> = points
            .iter()
            .map(|p| serde_json::json!({ "vgs": p.vgs, "vds": p.vds, "id": p.id }))
            .collect();
        let m = crate::iv::iv_metrics(&points);
        let defs: serde_json::Map<String, serde_json::Value> = crate::iv::METRIC_DEFINITIONS
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

pub(crate) fn write_iv(dir: &Path, points: &[crate::iv::IvPoint]) -> Result<(), String> {
    ensure_dir(dir)?;
    let rows = points.iter().map(|p| vec![p.vgs, p.vds, p.id]);
    write_file(
        &dir.join("iv.csv"),
        csv(&["vgs_v", "vds_v", "id_a"], rows).as_bytes(),
    )?;
    let m = crate::iv::iv_metrics(points);
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
    crate::plot::transfer_log(&dir.join("transfer-log"), &curves, m.ss_min_mv_per_dec)?;
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
        crate::plot::curves(
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
