//! `lamina sweep`: a file's analyses over a grid of parameter values.

use super::Common;
use crate::design;
use crate::error::JobError;
use crate::out;
use crate::output::{ensure_dir, write_whole as write_file, OutputSet};
use std::path::{Path, PathBuf};

/// Flags of `lamina sweep`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`) with its analyses.
    pub file: PathBuf,
    /// A swept top-level parameter: `name=LIST` or `name=START:STOP:STEP`, values with units as
    /// in circuit files (`vdd=0.6:1.2:0.2V`; repeatable; the grid is every combination, first
    /// parameter slowest).
    #[arg(long = "param", value_name = "NAME=VALUES", required = true)]
    pub param: Vec<String>,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        param,
        common: Common { set, json, out },
    } = a;
    let set_out = OutputSet::begin_opt(out.as_deref())?;
    let sets = design::parse_sets(&set)?;
    let axes: Vec<crate::sweep::Axis> = param
        .iter()
        .map(|p| crate::sweep::parse_axis(p))
        .collect::<Result<_, _>>()?;
    crate::sweep::check_axes(&axes, &sets)?;
    // Check the file once, at the grid's first point, so that a broken file or a value
    // of the wrong dimension is reported once and not per point.
    let mut first = sets.clone();
    first.extend(axes.iter().map(|a| (a.name.clone(), a.texts[0].clone())));
    design::load(&file, &first)?;
    let rows = crate::sweep::run_sweep(&file, &sets, &axes, true);
    if let Some(set) = set_out {
        write_sweep(set.dir(), &axes, &rows).map_err(JobError::Io)?;
        set.commit()?;
    }
    let keys: Vec<String> = rows
        .iter()
        .find(|r| r.error.is_none())
        .map(|r| r.figures.iter().map(|(k, _)| k.clone()).collect())
        .unwrap_or_default();
    if json {
        let items: Vec<serde_json::Value> = rows
            .iter()
            .map(|r| {
                let mut m = serde_json::Map::new();
                for (n, v) in &r.point {
                    m.insert(n.clone(), serde_json::json!(v));
                }
                for (k, v) in &r.figures {
                    m.insert(k.clone(), serde_json::json!(v));
                }
                if let Some(e) = &r.error {
                    m.insert("error".into(), serde_json::json!(e));
                }
                serde_json::Value::Object(m)
            })
            .collect();
        out!("{}", serde_json::json!({ "rows": items }));
    } else {
        let mut header: Vec<String> = axes.iter().map(|a| a.name.clone()).collect();
        header.extend(keys.iter().cloned());
        out!(
            "{}",
            header
                .iter()
                .map(|h| format!("{h:>22}"))
                .collect::<String>()
        );
        for r in &rows {
            let mut line: String = r.point.iter().map(|(_, v)| format!("{v:>22.6e}")).collect();
            match &r.error {
                Some(e) => line.push_str(&format!("   failed: {e}")),
                None => {
                    for k in &keys {
                        match r.figures.iter().find(|(n, _)| n == k) {
                            Some((_, v)) => line.push_str(&format!("{v:>22.6e}")),
                            None => line.push_str(&format!("{:>22}", "-")),
                        }
                    }
                }
            }
            out!("{line}");
        }
    }
    let failed: Vec<&crate::sweep::Row> = rows.iter().filter(|r| r.error.is_some()).collect();
    match failed.first() {
        None => Ok(()),
        Some(r) => Err(JobError::Analysis(format!(
            "{} of {} points failed (their rows say why); the first: {}",
            failed.len(),
            rows.len(),
            r.error.as_deref().unwrap_or("")
        ))),
    }
}

/// Sweep rows as CSV and JSON, and each figure plotted against the first parameter (one curve
/// per combination of the others).
pub(crate) fn write_sweep(
    dir: &Path,
    axes: &[crate::sweep::Axis],
    rows: &[crate::sweep::Row],
) -> Result<(), String> {
    ensure_dir(dir)?;
    let keys: Vec<String> = rows
        .iter()
        .find(|r| r.error.is_none())
        .map(|r| r.figures.iter().map(|(k, _)| k.clone()).collect())
        .unwrap_or_default();
    let mut text = axes
        .iter()
        .map(|a| a.name.clone())
        .chain(keys.iter().cloned())
        .chain(["error".to_string()])
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for r in rows {
        let mut cells: Vec<String> = r.point.iter().map(|(_, v)| format!("{v:e}")).collect();
        for k in &keys {
            cells.push(
                r.figures
                    .iter()
                    .find(|(n, _)| n == k)
                    .map_or(String::new(), |(_, v)| format!("{v:e}")),
            );
        }
        cells.push(r.error.clone().unwrap_or_default().replace(',', ";"));
        text.push_str(&cells.join(","));
        text.push('\n');
    }
    write_file(&dir.join("sweep.csv"), text.as_bytes())?;
    let Some(first) = axes.first() else {
        return Ok(());
    };
    for k in &keys {
        let mut series: Vec<(String, Vec<(f64, f64)>)> = Vec::new();
        for r in rows.iter().filter(|r| r.error.is_none()) {
            let label: String = r.point[1..]
                .iter()
                .map(|(n, v)| format!("{n} = {v}"))
                .collect::<Vec<_>>()
                .join(", ");
            let label = if label.is_empty() { k.clone() } else { label };
            if let Some((_, v)) = r.figures.iter().find(|(n, _)| n == k) {
                match series.iter_mut().find(|(l, _)| *l == label) {
                    Some((_, pts)) => pts.push((r.point[0].1, *v)),
                    None => series.push((label, vec![(r.point[0].1, *v)])),
                }
            }
        }
        let stem: String = k
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '_' {
                    c
                } else {
                    '_'
                }
            })
            .collect();
        crate::plot::curves(
            &dir.join(stem),
            &format!("{k} against {} (model estimate)", first.name),
            &first.name,
            k,
            &series,
        )?;
    }
    Ok(())
}
