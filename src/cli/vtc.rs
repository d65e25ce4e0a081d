//! `lamina vtc`: a file's transfer curve, switching threshold and noise margins; with
//! `--sweep-rate`, the input ramped through the curve one or both ways (see
//! [`crate::vtc_sweep`]).

use super::iv::DirectionFlag;
use super::{outcome_json, print_single, Common, FileArgs};
use crate::design::Outcome;
use crate::error::JobError;
use crate::iv::{Direction, Leg};
use crate::output::{csv, ensure_dir, write_whole as write_file, OutputSet};
use crate::plot::{draw, engineering, Axis, Figure, Series, Style};
use crate::vtc_sweep::{LegCurve, SweptTransfer};
use crate::{note, out};
use serde_json::{json, Value};
use std::path::Path;

/// Flags of `lamina vtc`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// The file, `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub file: FileArgs,
    /// Ramp the input at this rate, a voltage per time (`10 V/s`, `2 kV/s`), through the
    /// transfer analysis's input values in a transient starting at rest at the first one,
    /// instead of taking each point at rest (DC): charge that lags the input (slow traps)
    /// then shows as a difference between the legs.
    #[arg(long, value_name = "RATE")]
    pub sweep_rate: Option<String>,
    /// Direction of the ramped sweep (default both: up, then down, with the shift of V_M).
    #[arg(long, value_enum, requires = "sweep_rate")]
    pub direction: Option<DirectionFlag>,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        sweep_rate,
        direction,
    } = a;
    let rate = super::extract::positive(
        "--sweep-rate",
        &sweep_rate,
        "V/s",
        super::iv::VOLTS_PER_SECOND,
    )?;
    if let Some(rate) = rate {
        let direction = DirectionFlag::or_both(direction);
        let FileArgs {
            file,
            common: Common { set, json, out },
        } = file;
        let set_out = OutputSet::begin_opt(out.as_deref())?;
        let sets = crate::design::parse_sets(&set)?;
        let swept = crate::vtc_sweep::run_file(&file, &sets, direction, rate)?;
        for l in swept.legs.iter().filter(|l| l.metrics.is_none()) {
            note!(
                "warning: the {} leg never crosses v_out = v_in or never reaches a slope of -1",
                l.leg.name()
            );
        }
        if let Some(set) = set_out {
            write_swept(set.dir(), &swept).map_err(JobError::Io)?;
            set.commit()?;
        }
        if json {
            out!("{}", swept_json(&swept));
        } else {
            for line in swept_text(&swept) {
                out!("{line}");
            }
        }
        return Ok(());
    }
    let super::FileRun { results, json, out } = super::run_file(file, Some("transfer"))?;
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

fn direction_name(d: Direction) -> &'static str {
    match d {
        Direction::Up => "up",
        Direction::Down => "down",
        Direction::Both => "both",
    }
}

/// One leg's figures as JSON (SI units in the key names); `null` where not reported.
fn leg_json(l: &LegCurve, with_points: bool) -> Value {
    let m = l.metrics;
    let mut j = json!({
        "leg": l.leg.name(),
        "vm_v": m.map(|m| m.vm),
        "voh_v": m.map(|m| m.voh),
        "vol_v": m.map(|m| m.vol),
        "vil_v": m.map(|m| m.vil),
        "vih_v": m.map(|m| m.vih),
        "nmh_v": m.map(|m| m.nmh),
        "nml_v": m.map(|m| m.nml),
        "snm_v": l.snm.map(|s| s.snm),
        "gain_max": m.map(|m| m.gain_max),
    });
    if with_points {
        j["vin_v"] = json!(l.vin);
        j["vout_v"] = json!(l.vout);
        j["time_s"] = json!(l.time_s);
    }
    j
}

/// The whole ramped sweep as JSON.
fn swept_json_with(s: &SweptTransfer, with_points: bool) -> Value {
    json!({
        "analysis": "transfer",
        "sweep": {
            "source": s.source,
            "rate_v_per_s": s.rate_v_per_s,
            "direction": direction_name(s.direction),
            "legs": s.legs.iter().map(|l| leg_json(l, with_points)).collect::<Vec<_>>(),
            "vm_shift_v": s.vm_shift_v(),
            "hysteretic": s.hysteretic().map(|h| json!({
                "nml_v": h.nml, "nmh_v": h.nmh, "snm_v": h.snm,
            })),
            "definitions": {
                "hysteretic": "margins of the two legs together (both ways only): nml_v = least V_IL - greatest V_OL, nmh_v = least V_OH - greatest V_IH over the legs, snm_v = maximum-square noise margin of one leg against the other",
                "rate_v_per_s": "the input ramps at this rate through the transfer analysis's input values in a transient that starts at rest (the operating point) at the first one",
                "vm_shift_v": "V_M of the down leg minus V_M of the up leg",
                "legs": "each leg in increasing input order; figures as for the DC curve (unity-gain noise margins, maximum-square SNM of the leg against itself)",
            },
        },
        "caution": super::CAUTION,
    })
}

fn swept_json(s: &SweptTransfer) -> Value {
    swept_json_with(s, true)
}

/// The table of a ramped sweep.
fn swept_text(s: &SweptTransfer) -> Vec<String> {
    let f = |x: Option<f64>| {
        x.map_or("-".to_string(), |x| {
            format!("{:.4}", crate::iv::unsigned_zero(x))
        })
    };
    let mut l = vec![
        format!(
            "ramped transfer curve: input `{}` at {}/s, {} (model estimate)",
            s.source,
            engineering(s.rate_v_per_s, "V"),
            direction_name(s.direction)
        ),
        format!(
            "  {:<5} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9}",
            "leg", "V_M/V", "V_IL/V", "V_IH/V", "NM_L/V", "NM_H/V", "SNM/V"
        ),
    ];
    for c in &s.legs {
        let m = c.metrics;
        l.push(format!(
            "  {:<5} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9}",
            c.leg.name(),
            f(m.map(|m| m.vm)),
            f(m.map(|m| m.vil)),
            f(m.map(|m| m.vih)),
            f(m.map(|m| m.nml)),
            f(m.map(|m| m.nmh)),
            f(c.snm.map(|s| s.snm)),
        ));
    }
    if s.direction == Direction::Both {
        l.push(match s.vm_shift_v() {
            Some(d) => format!("  V_M shift (down - up) {} V", f(Some(d))),
            None => "  V_M shift not reported: a leg has no switching threshold".into(),
        });
        if let Some(h) = s.hysteretic() {
            l.push(format!(
                "  hysteretic curve (worst of both legs): NM_L {} V, NM_H {} V, SNM {} V (one leg against the other)",
                f(h.nml),
                f(h.nmh),
                f(h.snm)
            ));
        }
    }
    l
}

/// `transfer-up.csv` and `transfer-down.csv` (the legs run), `summary.json` and the
/// `transfer-legs` figure: output against input, one series per leg with markers.
fn write_swept(dir: &Path, s: &SweptTransfer) -> Result<(), String> {
    ensure_dir(dir)?;
    for c in &s.legs {
        let rows = (0..c.vin.len()).map(|k| vec![c.time_s[k], c.vin[k], c.vout[k]]);
        write_file(
            &dir.join(format!("transfer-{}.csv", c.leg.name())),
            csv(&["time_s", "vin_v", "vout_v"], rows).as_bytes(),
        )?;
    }
    write_file(
        &dir.join("summary.json"),
        format!("{}\n", swept_json_with(s, false)).as_bytes(),
    )?;
    let rate = engineering(s.rate_v_per_s, "V");
    let title = match s.vm_shift_v() {
        Some(d) => format!(
            "V_M shift {} at {rate}/s (model estimate)",
            engineering(d, "V")
        ),
        None => format!("ramped transfer curve at {rate}/s (model estimate)"),
    };
    let mut f = Figure::new(&title, Axis::new("input", "V"), Axis::new("output", "V"));
    for c in &s.legs {
        let name = match c.metrics {
            Some(m) => format!("{}, V_M = {}", c.leg.name(), engineering(m.vm, "V")),
            None => c.leg.name().to_string(),
        };
        let pts = c.vin.iter().copied().zip(c.vout.iter().copied()).collect();
        f.series.push(Series {
            markers: true,
            style: if c.leg == Leg::Up {
                Style::Line
            } else {
                Style::Dashed
            },
            ..Series::line(&name, pts)
        });
    }
    draw(&dir.join("transfer-legs"), &f)
}
