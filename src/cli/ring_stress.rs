//! `lamina ring --stress-supply V --stress-time T [--recovery-time T2,...]`: the ring's
//! frequency drift after a bias stress and its recovery (`crate::ring_stress`), as a table,
//! JSON, and with `--out` a CSV and a figure.

use super::ring::{ring_json, Args};
use crate::builtin::Ring;
use crate::error::JobError;
use crate::output::{csv, ensure_dir, write_whole as write_file, OutputSet};
use crate::plot::{draw, Axis, Figure, Series, Style};
use crate::ring::RingParams;
use crate::ring_stress::{run_stress, StressPlan, StressReport, SETTLE};
use crate::{note, out};
use lamina_engine::{Circuit, System};
use lamina_netlist::units::Dim;
use serde_json::{json, Value};
use std::path::Path;

/// The stress plan the flags ask for, if any (times and the supply checked here, usage errors).
pub(crate) fn plan(a: &Args) -> Result<Option<StressPlan>, JobError> {
    let Some(supply) = &a.stress_supply else {
        return Ok(None);
    };
    // One value that must be positive, read with its unit; an error names the flag.
    let positive = |flag: &str, text: &str, unit: &str, dim: Dim| {
        super::extract::positive(flag, &Some(text.to_string()), unit, dim)
            .map(|v| v.unwrap_or(f64::NAN))
    };
    let time_s = a.stress_time.as_deref().unwrap_or_default();
    let plan = StressPlan {
        supply_v: positive("--stress-supply", supply, "V", Dim::VOLTAGE)?,
        time_s: positive("--stress-time", time_s, "s", Dim::TIME)?,
        recovery_s: a
            .recovery_time
            .iter()
            .map(|t| positive("--recovery-time", t, "s", Dim::TIME))
            .collect::<Result<_, _>>()?,
    };
    plan.check().map_err(JobError::Usage)?;
    Ok(Some(plan))
}

/// A stress run ready to go: the held copy of the ring's circuit, the plan and the shortest
/// trap time constant of the ring's devices.
pub(crate) struct StressRun {
    /// A second copy of the ring's circuit (the held ring is built from it).
    pub held: Circuit,
    /// What to stress and when to measure.
    pub plan: StressPlan,
    /// Shortest trap time constant (s), `None` without slow traps.
    pub shortest_trap_time_s: Option<f64>,
}

impl StressRun {
    /// Runs the plan and reports it.
    pub fn finish(
        self,
        system: &mut System,
        ring: &Ring,
        params: &RingParams,
        json: bool,
        out: Option<OutputSet>,
    ) -> Result<(), JobError> {
        if self.shortest_trap_time_s.is_none() {
            note!(
                "warning: the ring's devices have no slow traps (`trap1_*` keys), so nothing \
                 remembers the stress and the drift is zero; running the stress anyway"
            );
        }
        let report = run_stress(
            system,
            self.held,
            ring,
            params,
            &self.plan,
            self.shortest_trap_time_s,
        )
        .map_err(|e| JobError::Analysis(e.to_string()))?;
        if let Some(set) = out {
            write_stress(set.dir(), &report).map_err(JobError::Io)?;
            set.commit()?;
        }
        if json {
            out!("{}", stress_json(&report));
        } else {
            print_stress(&report);
        }
        Ok(())
    }
}

/// One measured row after the stress: what it is, the time from the end of the stress to the
/// release of the ring (s), and the frequency (Hz).
fn rows(r: &StressReport) -> Vec<(String, f64, f64)> {
    std::iter::once(("after stress".to_string(), SETTLE, r.stressed.frequency))
        .chain(r.recovered.iter().map(|k| {
            (
                format!("recovered {}", crate::plot::engineering(k.recovery_s, "s")),
                k.recovery_s + SETTLE,
                k.ring.frequency,
            )
        }))
        .collect()
}

fn stress_json(r: &StressReport) -> Value {
    let f0 = r.fresh.frequency;
    let drift = |f: f64| 100.0 * (f / f0 - 1.0);
    let mut points = vec![json!({
        "state": "after stress",
        "recovery_s": 0.0,
        "since_stress_s": SETTLE,
        "frequency_hz": r.stressed.frequency,
        "drift_percent": drift(r.stressed.frequency),
        "ring": ring_json(&r.stressed),
    })];
    points.extend(r.recovered.iter().map(|k| {
        json!({
            "state": "recovered",
            "recovery_s": k.recovery_s,
            "since_stress_s": k.recovery_s + SETTLE,
            "frequency_hz": k.ring.frequency,
            "drift_percent": drift(k.ring.frequency),
            "ring": ring_json(&k.ring),
        })
    }));
    json!({
        "stages": r.fresh.stages,
        "supply_v": r.supply_v,
        "stress_supply_v": r.plan.supply_v,
        "stress_time_s": r.plan.time_s,
        "shortest_trap_time_s": r.shortest_trap_time_s,
        "fresh_frequency_hz": f0,
        "fresh": ring_json(&r.fresh),
        "measurements": points,
        "hold_steps": r.hold_steps,
        "method": "fresh: traps at rest at 0 V; stress: stage outputs held alternately at the \
                   stress supply and 0 V for the stress time; recovery: everything at 0 V; each \
                   measurement releases the ring at its nominal supply from the single-defect \
                   start with every unknown carried over (traps frozen over the nanoseconds \
                   measured); since_stress_s counts from the end of the stress to the release",
    })
}

fn print_stress(r: &StressReport) {
    let f0 = r.fresh.frequency;
    out!(
        "ring oscillator, {} stages, after a bias stress (model estimate)",
        r.fresh.stages
    );
    out!(
        "  stress         supply {} held {}, stage outputs alternately at it and 0 V; \
         recovery unpowered",
        crate::plot::engineering(r.plan.supply_v, "V"),
        crate::plot::engineering(r.plan.time_s, "s")
    );
    match r.shortest_trap_time_s {
        Some(tau) => out!(
            "  slow traps     shortest time constant {}, traps frozen while measured ({})",
            crate::plot::engineering(tau, "s"),
            crate::plot::engineering(SETTLE + r.stressed.simulated, "s")
        ),
        None => out!("  slow traps     none: nothing remembers the stress"),
    }
    out!(
        "  {:<24} {:>14} {:>16} {:>12}",
        "state",
        "since stress",
        "frequency (GHz)",
        "drift (%)"
    );
    out!(
        "  {:<24} {:>14} {:>16.6} {:>12}",
        "fresh",
        "-",
        f0 * 1e-9,
        "-"
    );
    for (name, since, f) in rows(r) {
        out!(
            "  {:<24} {:>14} {:>16.6} {:>12.4}",
            name,
            crate::plot::engineering(since, "s"),
            f * 1e-9,
            100.0 * (f / f0 - 1.0)
        );
    }
    out!(
        "  {} accepted steps in the holds; since stress: from the end of the stress to the \
         release of the ring",
        r.hold_steps
    );
}

fn write_stress(dir: &Path, r: &StressReport) -> Result<(), String> {
    ensure_dir(dir)?;
    let f0 = r.fresh.frequency;
    let table = rows(r);
    let recovery = std::iter::once(0.0).chain(r.recovered.iter().map(|k| k.recovery_s));
    let data = table
        .iter()
        .zip(recovery)
        .map(|((_, since, f), rec)| vec![rec, *since, *f, f0, 100.0 * (f / f0 - 1.0)]);
    write_file(
        &dir.join("stress.csv"),
        csv(
            &[
                "recovery_s",
                "since_stress_s",
                "frequency_hz",
                "fresh_frequency_hz",
                "drift_percent",
            ],
            data,
        )
        .as_bytes(),
    )?;
    let mut summary = stress_json(r);
    summary["caution"] = json!(super::CAUTION);
    write_file(&dir.join("summary.json"), format!("{summary}\n").as_bytes())?;
    let points: Vec<(f64, f64)> = table.iter().map(|(_, t, f)| (*t, *f)).collect();
    let (lo, hi) = points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.0), b.max(p.0))
        });
    let mut fig = Figure::new(
        &format!(
            "Ring frequency after {} V held {} (model estimate)",
            r.plan.supply_v,
            crate::plot::engineering(r.plan.time_s, "s")
        ),
        Axis::log("time since the end of stress", "s"),
        Axis::new("frequency", "Hz"),
    );
    fig.series.push(Series {
        markers: true,
        ..Series::line("after stress and recovery", points)
    });
    fig.series.push(Series {
        style: Style::Dashed,
        markers: false,
        ..Series::line("fresh", vec![(lo / 2.0, f0), (hi * 2.0, f0)])
    });
    draw(&dir.join("stress-drift"), &fig)
}
