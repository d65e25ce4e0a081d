//! The report of `analysis transient` (printed by `lamina run`): supplies' power and energy,
//! nodes' crossings, and with `--out` the record as CSV with a plot per group (voltages,
//! currents, powers).

use crate::out;
use crate::output::{ensure_dir, write_whole as write_file};
use crate::plot::engineering;
use crate::transient::TransientReport;
use std::path::Path;

/// The summary as JSON (the record itself goes to files).
pub(crate) fn transient_json(kind: &str, r: &TransientReport) -> serde_json::Value {
    let supplies: Vec<serde_json::Value> = r
        .supplies
        .iter()
        .map(|s| {
            serde_json::json!({
                "source": s.name,
                "avg_power_w": s.avg_power,
                "peak_power_w": s.peak_power,
                "energy_j": s.energy,
            })
        })
        .collect();
    let nodes: Vec<serde_json::Value> = r
        .crossings
        .iter()
        .map(|c| {
            serde_json::json!({
                "node": c.node,
                "level_v": c.level,
                "rising_s": c.rising,
                "falling_s": c.falling,
            })
        })
        .collect();
    serde_json::json!({
        "analysis": kind,
        "window_s": [r.window.0, r.window.1],
        "samples": r.time.len(),
        "steps": r.steps,
        "thinned": r.thinned,
        "supplies": supplies,
        "crossings": nodes,
        "definitions": {
            "avg_power_w": "energy delivered over the window divided by its length; delivered power is -(v+ - v-) i with i the branch current into the positive pin, integrated over every accepted step",
            "crossings": "times the node crosses the level halfway between its lowest and highest recorded value in the window",
        },
    })
}

/// The summary as a table.
pub(crate) fn print_transient(r: &TransientReport) {
    out!(
        "transient, {} to {} ({} samples of {} steps{}) (model estimate)",
        engineering(r.window.0, "s"),
        engineering(r.window.1, "s"),
        r.time.len(),
        r.steps,
        if r.thinned { ", thinned" } else { "" }
    );
    if !r.supplies.is_empty() {
        out!(
            "  {:<20} {:>14} {:>14} {:>14}",
            "supply",
            "mean power",
            "peak power",
            "energy"
        );
        for s in &r.supplies {
            out!(
                "  {:<20} {:>14} {:>14} {:>14}",
                s.name,
                engineering(s.avg_power, "W"),
                engineering(s.peak_power, "W"),
                engineering(s.energy, "J")
            );
        }
    }
    if !r.crossings.is_empty() {
        out!(
            "  {:<20} {:>12} {:>8} {:>8} {:>14}",
            "node",
            "level",
            "rising",
            "falling",
            "first"
        );
        for c in &r.crossings {
            let first = c
                .rising
                .iter()
                .chain(&c.falling)
                .copied()
                .fold(f64::INFINITY, f64::min);
            out!(
                "  {:<20} {:>12} {:>8} {:>8} {:>14}",
                c.node,
                engineering(c.level, "V"),
                c.rising.len(),
                c.falling.len(),
                if first.is_finite() {
                    engineering(first, "s")
                } else {
                    "-".into()
                }
            );
        }
    }
}

/// The record as `transient.csv` (time, then each signal as `name_unit`) and one plot per
/// group of signals with one unit.
pub(crate) fn write_transient(dir: &Path, r: &TransientReport) -> Result<(), String> {
    ensure_dir(dir)?;
    let mut text = String::from("time_s");
    for s in &r.signals {
        text.push_str(&format!(",{}_{}", s.name, s.unit.to_lowercase()));
    }
    text.push('\n');
    for (k, t) in r.time.iter().enumerate() {
        text.push_str(&format!("{t:e}"));
        for s in &r.signals {
            text.push_str(&format!(",{:e}", s.values[k]));
        }
        text.push('\n');
    }
    write_file(&dir.join("transient.csv"), text.as_bytes())?;
    for (unit, stem, what) in [
        ("V", "voltages", "voltage (V)"),
        ("A", "currents", "current (A)"),
        ("W", "power", "delivered power (W)"),
    ] {
        let series: Vec<(String, Vec<(f64, f64)>)> = r
            .signals
            .iter()
            .filter(|s| s.unit == unit)
            .map(|s| {
                (
                    s.name.clone(),
                    r.time
                        .iter()
                        .map(|t| t * 1e9)
                        .zip(s.values.iter().copied())
                        .collect(),
                )
            })
            .collect();
        if !series.is_empty() {
            crate::plot::curves(
                &dir.join(stem),
                &format!("transient: {}", stem),
                "time (ns)",
                what,
                &series,
            )?;
        }
    }
    Ok(())
}
