//! The sweep job: a file's declared analyses at every point of a grid of parameter values,
//! points run in parallel (rayon), results in grid order, a failed point reported in its row.

use crate::design::{run_all, Outcome};
use crate::iv::parse_values;
use crate::ring::RingParams;
use indicatif::{ParallelProgressIterator, ProgressBar, ProgressStyle};
use rayon::prelude::*;
use std::path::Path;

/// One swept parameter and its values.
#[derive(Clone, Debug, PartialEq)]
pub struct Axis {
    /// Top-level parameter name.
    pub name: String,
    /// Values, in the parameter's SI units (written as plain numbers).
    pub values: Vec<f64>,
}

/// Parses `name=LIST` or `name=START:STOP:STEP`.
pub fn parse_axis(text: &str) -> Result<Axis, String> {
    let (name, vals) = text.split_once('=').ok_or_else(|| {
        format!(
            "--param {text}: expected name=LIST or name=START:STOP:STEP, such as vdd=0.5:1.2:0.1"
        )
    })?;
    let values = parse_values(&format!("--param {name}"), vals)?;
    if name.trim().is_empty() {
        return Err(format!("--param {text}: the parameter name is missing"));
    }
    Ok(Axis {
        name: name.trim().to_string(),
        values,
    })
}

/// One grid point's results: the swept values, then measured figures or the error.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    /// `(name, value)` of every axis at this point.
    pub point: Vec<(String, f64)>,
    /// `(key, value)` of every figure, in analysis order (keys prefixed by the analysis kind).
    pub figures: Vec<(String, f64)>,
    /// Why the point failed, if it did.
    pub error: Option<String>,
}

fn figures(kind: &str, o: &Outcome) -> Vec<(String, f64)> {
    let mut f = Vec::new();
    let mut put = |k: &str, v: Option<f64>| {
        if let Some(v) = v {
            f.push((format!("{kind}.{k}"), v));
        }
    };
    match o {
        Outcome::OperatingPoint(v) => {
            for (n, x) in v {
                put(&format!("v({n})"), Some(*x));
            }
        }
        Outcome::Transfer { metrics, snm, .. } => {
            put("vm", metrics.map(|m| m.vm));
            put("voh", metrics.map(|m| m.voh));
            put("vol", metrics.map(|m| m.vol));
            put("vil", metrics.map(|m| m.vil));
            put("vih", metrics.map(|m| m.vih));
            put("nmh", metrics.map(|m| m.nmh));
            put("nml", metrics.map(|m| m.nml));
            put("snm", snm.map(|m| m.snm));
            put("gain_max", metrics.map(|m| m.gain_max));
        }
        Outcome::Delay(d) => {
            put("t_phl_s", d.t_phl);
            put("t_plh_s", d.t_plh);
            put("t_p_s", d.t_p);
            put("rise_s", d.rise);
            put("fall_s", d.fall);
        }
        Outcome::Ring(r) => {
            put("frequency_hz", Some(r.frequency));
            put("period_s", Some(r.period));
            put("stage_delay_s", Some(r.stage_delay));
            put("avg_power_w", Some(r.avg_power));
            put("energy_per_cycle_j", Some(r.energy_per_cycle));
        }
    }
    f
}

/// Every combination of the axes' values, first axis slowest.
pub fn grid(axes: &[Axis]) -> Vec<Vec<(String, f64)>> {
    let mut points = vec![Vec::new()];
    for a in axes {
        let mut next = Vec::with_capacity(points.len() * a.values.len());
        for p in &points {
            for &v in &a.values {
                let mut q = p.clone();
                q.push((a.name.clone(), v));
                next.push(q);
            }
        }
        points = next;
    }
    points
}

/// Runs the sweep. `progress` shows a bar on stderr (hidden when stderr is not a terminal).
pub fn run_sweep(
    path: &Path,
    sets: &[(String, String)],
    axes: &[Axis],
    progress: bool,
) -> Vec<Row> {
    let points = grid(axes);
    let bar = if progress {
        ProgressBar::new(points.len() as u64)
    } else {
        ProgressBar::hidden()
    };
    if let Ok(style) =
        ProgressStyle::with_template("{bar:40} {pos}/{len} points, {elapsed} elapsed, {eta} left")
    {
        bar.set_style(style);
    }
    points
        .into_par_iter()
        .progress_with(bar)
        .map(|point| {
            let mut local = sets.to_vec();
            for (n, v) in &point {
                local.push((n.clone(), format!("{v:e}")));
            }
            match run_all(path, &local, &RingParams::default(), None) {
                Ok(results) => {
                    let figures = results.iter().flat_map(|(k, o)| figures(k, o)).collect();
                    Row {
                        point,
                        figures,
                        error: None,
                    }
                }
                Err(e) => Row {
                    point,
                    figures: Vec::new(),
                    error: Some(e.lines().next().unwrap_or("").to_string()),
                },
            }
        })
        .collect()
}
