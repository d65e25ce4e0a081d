//! `lamina iv`: drain current of a file's one FET over gate and drain voltages, and the
//! figures of its branch (see [`crate::iv`] for how each is taken).

use super::Common;
use crate::design;
use crate::error::JobError;
use crate::iv::{
    dense_vds, iv_metrics, read_device, show, unsigned_zero, Device, IvConfig, IvMetrics, IvPoint,
    Polarity, METRIC_DEFINITIONS,
};
use crate::output::{csv, ensure_dir, write_whole as write_file, OutputSet};
use crate::{note, out};
use lamina_netlist::units::Dim;
use serde_json::{json, Map, Value};
use std::path::{Path, PathBuf};

/// Which branch to take the figures on.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum PolarityFlag {
    /// Electrons: the branch at positive gate voltage.
    N,
    /// Holes: the branch at negative gate voltage.
    P,
}

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
    /// The branch for the figures: n (electrons) or p (holes). Default: the device kind where
    /// it fixes the carrier, else the end of the gate sweep carrying at least 10x the current
    /// of the other at the smallest nonzero |V_DS|.
    #[arg(long, value_enum)]
    pub polarity: Option<PolarityFlag>,
    /// Smallest |I_D| the subthreshold swing is read from, in amperes unless a unit is written
    /// (`10pA`). Default 1 pA x W/L, not below 1e-11 A.
    #[arg(long, value_name = "CURRENT")]
    pub current_floor: Option<String>,
    /// V_GS of I_on. Default: the end of the gate sweep on the branch's side.
    #[arg(long, value_name = "VGS", allow_hyphen_values = true)]
    pub on_bias: Option<String>,
    /// V_GS of I_off. Default: the V_GS of the branch's smallest |I_D|.
    #[arg(long, value_name = "VGS", allow_hyphen_values = true)]
    pub off_bias: Option<String>,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// Gate voltages of the output characteristics.
const OUTPUT_CURVES: usize = 6;
/// Below this many drain voltages the output characteristics get a grid of their own.
const MIN_OUTPUT_POINTS: usize = 10;
/// Points of that grid.
const DENSE_OUTPUT_POINTS: usize = 41;

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        vgs,
        vds,
        polarity,
        current_floor,
        on_bias,
        off_bias,
        common: Common { set, json, out },
    } = a;
    let set_out = OutputSet::begin_opt(out.as_deref())?;
    let vg = crate::iv::parse_values("--vgs", &vgs).map_err(JobError::Usage)?;
    let vd = crate::iv::parse_values("--vds", &vds).map_err(JobError::Usage)?;
    crate::iv::check_grid(&vg, &vd).map_err(JobError::Usage)?;
    let bias = |flag: &str, t: &Option<String>| {
        t.as_deref()
            .map(|t| crate::iv::parse_one(flag, t, "V", Dim::VOLTAGE))
            .transpose()
            .map_err(JobError::Usage)
    };
    let current_floor_a = current_floor
        .as_deref()
        .map(|t| {
            let f = crate::iv::parse_one("--current-floor", t, "A", Dim::CURRENT)?;
            if f > 0.0 && f.is_finite() {
                Ok(f)
            } else {
                Err(format!("--current-floor {t}: give a positive current"))
            }
        })
        .transpose()
        .map_err(JobError::Usage)?;
    let config = IvConfig {
        polarity: polarity.map(|p| match p {
            PolarityFlag::N => Polarity::N,
            PolarityFlag::P => Polarity::P,
        }),
        current_floor_a,
        on_bias_v: bias("--on-bias", &on_bias)?,
        off_bias_v: bias("--off-bias", &off_bias)?,
    };
    let sets = design::parse_sets(&set)?;
    let d = design::load(&file, &sets)?;
    crate::iv::check_device(&d)
        .map_err(|why| JobError::Invalid(format!("error: {}: {why}", file.display())))?;
    let device = read_device(&d).map_err(JobError::Analysis)?;
    let points = crate::iv::run_iv(d, &vg, &vd).map_err(JobError::Analysis)?;
    let m = iv_metrics(&points, &device, &config);
    if let Err(why) = &m.ss_min {
        if why.starts_with("refused") {
            note!("warning: minimum swing {why}");
        }
    }
    if let Some(set) = set_out {
        write_iv(set.dir(), &points, &m, || design::load(&file, &sets)).map_err(JobError::Io)?;
        set.commit()?;
    }
    if json {
        let pts: Vec<Value> = points
            .iter()
            .map(|p| json!({ "vgs": p.vgs, "vds": p.vds, "id": p.id, "ig_a": p.ig }))
            .collect();
        out!("{}", json!({ "points": pts, "metrics": metrics_json(&m) }));
    } else {
        out!(
            "{:>10} {:>10} {:>16} {:>16}   (model estimate)",
            "V_GS (V)",
            "V_DS (V)",
            "I_D (A)",
            "I_G (A)"
        );
        for p in &points {
            out!(
                "{:>10} {:>10} {:>16} {:>16}",
                fixed(p.vgs, 4),
                fixed(p.vds, 4),
                sci(p.id, 6),
                sci(p.ig, 6)
            );
        }
        for line in metrics_text(&m) {
            out!("{line}");
        }
    }
    Ok(())
}

/// `x` with `prec` decimals, never `-0.000`.
pub(crate) fn fixed(x: f64, prec: usize) -> String {
    let s = format!("{:.*}", prec, unsigned_zero(x));
    match s.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => s,
    }
}

/// `x` in scientific notation with `prec` decimals, never `-0.000e0`.
pub(crate) fn sci(x: f64, prec: usize) -> String {
    format!("{:.*e}", prec, unsigned_zero(x))
}

fn device_line(d: &Device) -> String {
    match &d.geometry {
        Ok(g) => format!(
            "Device `{}` ({}): W = {} um, L = {} um (W/L = {}), T = {} K",
            d.name,
            d.kind,
            show(g.width_m * 1e6),
            show(g.length_m * 1e6),
            show(g.width_m / g.length_m),
            show(g.temperature_k)
        ),
        Err(why) => format!("Device `{}` ({}): {why}", d.name, d.kind),
    }
}

/// The figures as lines for the table, after the data.
pub fn metrics_text(m: &IvMetrics) -> Vec<String> {
    let mut l = vec![String::new(), device_line(&m.device)];
    l.push(match &m.branch {
        Ok(b) => format!(
            "Branch: {} ({}s), {}",
            b.polarity.name(),
            b.polarity.carrier(),
            b.basis
        ),
        Err(why) => format!("Branch: not decided: {why}"),
    });
    l.push(format!("Figures at V_DS = {} V:", show(m.vds_v)));
    let row = |label: &str, r: Result<(String, String), String>| match r {
        Ok((value, how)) => format!("  {label:<34} {value:>12}  {how}"),
        Err(why) => format!("  {label:<34} {:>12}  {why}", "not reported"),
    };
    l.push(row(
        "V_th, constant current (V)",
        m.vth_cc.clone().map(|t| {
            (
                fixed(t.vth_v, 4),
                format!("|I_D| = {:.3e} A = 100 nA x W/L", t.criterion_a),
            )
        }),
    ));
    l.push(row(
        "V_th, max-g_m extrapolation (V)",
        m.vth_gm.clone().map(|t| {
            (
                fixed(t.vth_v, 4),
                format!(
                    "tangent at V_GS = {} V, V_DS = {} V, minus V_DS/2{}",
                    show(t.vgs_v),
                    show(t.vds_v),
                    if t.at_sweep_end {
                        " (largest g_m at the sweep's end: depends on how far V_GS goes)"
                    } else {
                        ""
                    }
                ),
            )
        }),
    ));
    l.push(row(
        "SS min (mV/dec)",
        m.ss_min.clone().map(|s| {
            (
                format!("{:.2}", s.mv_per_dec),
                format!(
                    "at V_GS = {} V, |I_D| in {:.0e} to {:.0e} A, floor {:.3e} A; thermal limit {:.2} mV/dec{}",
                    show(s.vgs_v),
                    s.decade_a.0,
                    s.decade_a.1,
                    m.current_floor_a.clone().unwrap_or(f64::NAN),
                    m.ss_thermal_limit_mv_per_dec.unwrap_or(f64::NAN),
                    if s.at_limit {
                        " (read below it within rounding: the limit is shown)"
                    } else {
                        ""
                    }
                ),
            )
        }),
    ));
    for (label, r) in [("I_on (A)", &m.ion), ("I_off (A)", &m.ioff)] {
        l.push(row(
            label,
            r.clone().map(|c| {
                (
                    sci(c.a, 3),
                    match c.a_per_um {
                        Some(w) => format!("at V_GS = {} V; {} A/um", show(c.vgs_v), sci(w, 3)),
                        None => format!("at V_GS = {} V", show(c.vgs_v)),
                    },
                )
            }),
        ));
    }
    l
}

/// A number for JSON, never `-0.0`.
pub(crate) fn num(x: f64) -> Value {
    json!(unsigned_zero(x))
}

/// The figures as a JSON object: every numeric key names its unit; a figure not reported is
/// `null`, with its reason under `not_reported`.
pub fn metrics_json(m: &IvMetrics) -> Value {
    let mut o = Map::new();
    let mut why = Map::new();
    let mut put = |o: &mut Map<String, Value>, key: &str, r: Result<Value, String>| match r {
        Ok(v) => {
            o.insert(key.into(), v);
        }
        Err(e) => {
            o.insert(key.into(), Value::Null);
            why.insert(key.into(), json!(e));
        }
    };
    o.insert("vds_v".into(), num(m.vds_v));
    o.insert("device".into(), json!(m.device.name));
    o.insert("device_kind".into(), json!(m.device.kind));
    put(
        &mut o,
        "polarity",
        m.branch.clone().map(|b| json!(b.polarity.name())),
    );
    if let Ok(b) = &m.branch {
        o.insert("polarity_basis".into(), json!(b.basis));
    }
    let g = m.device.geometry.clone();
    put(&mut o, "width_um", g.clone().map(|g| num(g.width_m * 1e6)));
    put(
        &mut o,
        "length_um",
        g.clone().map(|g| num(g.length_m * 1e6)),
    );
    put(
        &mut o,
        "w_over_l",
        g.clone().map(|g| num(g.width_m / g.length_m)),
    );
    put(&mut o, "temperature_k", g.map(|g| num(g.temperature_k)));
    put(&mut o, "vth_cc_v", m.vth_cc.clone().map(|t| num(t.vth_v)));
    put(
        &mut o,
        "vth_cc_criterion_a",
        m.vth_cc.clone().map(|t| num(t.criterion_a)),
    );
    put(&mut o, "vth_gm_v", m.vth_gm.clone().map(|t| num(t.vth_v)));
    put(
        &mut o,
        "vth_gm_vds_v",
        m.vth_gm.clone().map(|t| num(t.vds_v)),
    );
    put(
        &mut o,
        "vth_gm_vgs_v",
        m.vth_gm.clone().map(|t| num(t.vgs_v)),
    );
    put(
        &mut o,
        "vth_gm_at_sweep_end",
        m.vth_gm.clone().map(|t| json!(t.at_sweep_end)),
    );
    put(
        &mut o,
        "ss_min_mv_per_dec",
        m.ss_min.clone().map(|s| num(s.mv_per_dec)),
    );
    put(
        &mut o,
        "ss_min_vgs_v",
        m.ss_min.clone().map(|s| num(s.vgs_v)),
    );
    put(
        &mut o,
        "ss_min_decade_a",
        m.ss_min
            .clone()
            .map(|s| json!([unsigned_zero(s.decade_a.0), unsigned_zero(s.decade_a.1)])),
    );
    put(
        &mut o,
        "ss_thermal_limit_mv_per_dec",
        m.ss_thermal_limit_mv_per_dec
            .map(num)
            .ok_or_else(|| "the device has no temperature".to_string()),
    );
    put(
        &mut o,
        "current_floor_a",
        m.current_floor_a.clone().map(num),
    );
    for (key, r) in [("ion", &m.ion), ("ioff", &m.ioff)] {
        put(&mut o, &format!("{key}_a"), r.clone().map(|c| num(c.a)));
        put(
            &mut o,
            &format!("{key}_a_per_um"),
            r.clone().and_then(|c| {
                c.a_per_um
                    .map(num)
                    .ok_or_else(|| "the device's width is not known".to_string())
            }),
        );
        put(
            &mut o,
            &format!("{key}_vgs_v"),
            r.clone().map(|c| num(c.vgs_v)),
        );
    }
    let defs: Map<String, Value> = METRIC_DEFINITIONS
        .iter()
        .map(|(k, d)| (k.to_string(), json!(d)))
        .collect();
    o.insert("definitions".into(), Value::Object(defs));
    o.insert("not_reported".into(), Value::Object(why));
    Value::Object(o)
}

/// Writes `iv.csv`, `summary.json` (the figures), the log transfer plot and the output
/// characteristics; `reload` gives the design again for the output characteristics' own run
/// when the grid has too few drain voltages to draw them.
pub(crate) fn write_iv(
    dir: &Path,
    points: &[IvPoint],
    m: &IvMetrics,
    reload: impl FnOnce() -> Result<lamina_netlist::Design, JobError>,
) -> Result<(), String> {
    ensure_dir(dir)?;
    let rows = points.iter().map(|p| vec![p.vgs, p.vds, p.id, p.ig]);
    write_file(
        &dir.join("iv.csv"),
        csv(&["vgs_v", "vds_v", "id_a", "ig_a"], rows).as_bytes(),
    )?;
    write_file(
        &dir.join("summary.json"),
        format!("{}\n", {
            let mut j = metrics_json(m);
            j["caution"] = serde_json::json!(super::CAUTION);
            j
        })
        .as_bytes(),
    )?;
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
    let swing = m.ss_min.as_ref().ok().map(|s| s.mv_per_dec);
    let width = m.device.geometry.as_ref().ok().map(|g| g.width_m);
    crate::plot::transfer_log(&dir.join("transfer-log"), &curves, swing, width)?;
    match output_curves(points, m, &vds, reload) {
        Ok((series, own)) => {
            // Per width (A/µm) when the width is known.
            let (y_desc, series) = match width {
                Some(w) if w > 0.0 => (
                    "I_D / W (A/µm)",
                    series
                        .into_iter()
                        .map(|(n, c)| (n, c.into_iter().map(|(x, y)| (x, y / (w * 1e6))).collect()))
                        .collect(),
                ),
                _ => ("I_D (A)", series),
            };
            crate::plot::curves(
                &dir.join("output"),
                "output characteristics",
                "V_DS (V)",
                y_desc,
                &series,
            )?;
            if let Some(own) = own {
                let rows = own.iter().map(|p| vec![p.vgs, p.vds, p.id, p.ig]);
                write_file(
                    &dir.join("output.csv"),
                    csv(&["vgs_v", "vds_v", "id_a", "ig_a"], rows).as_bytes(),
                )?;
                note!(
                    "output.csv holds the output characteristics' own run ({DENSE_OUTPUT_POINTS} V_DS points)"
                );
            }
        }
        Err(why) => note!("the output characteristics are not drawn: {why}"),
    }
    Ok(())
}

type Series = Vec<(String, Vec<(f64, f64)>)>;

/// The output characteristics: up to six gate voltages spread over the branch above its
/// threshold (the whole sweep where the branch is undecided), from the grid when it has enough drain voltages, else from a
/// run of their own over a dense drain grid (returned too, for its CSV).
fn output_curves(
    points: &[IvPoint],
    m: &IvMetrics,
    vds: &[f64],
    reload: impl FnOnce() -> Result<lamina_netlist::Design, JobError>,
) -> Result<(Series, Option<Vec<IvPoint>>), String> {
    let mut vgs: Vec<f64> = points.iter().map(|p| p.vgs).collect();
    vgs.sort_by(f64::total_cmp);
    vgs.dedup();
    // On the branch from its threshold (or its smallest current) outward, where the curves
    // differ; below threshold they all lie on the axis.
    let from = m
        .vth_cc
        .as_ref()
        .map(|t| t.vth_v)
        .or(m.ioff.as_ref().map(|c| c.vgs_v));
    if let (Ok(b), Ok(from)) = (&m.branch, from) {
        vgs.retain(|&v| match b.polarity {
            Polarity::N => v >= from,
            Polarity::P => v <= from,
        });
    }
    if vgs.is_empty() {
        return Err("no gate voltage on the branch".into());
    }
    let n = vgs.len().min(OUTPUT_CURVES);
    let pick: Vec<f64> = (0..n)
        .map(|k| vgs[k * (vgs.len() - 1) / (n - 1).max(1)])
        .collect();
    let (data, own) = if vds.len() >= MIN_OUTPUT_POINTS {
        (points.to_vec(), None)
    } else {
        let grid = dense_vds(vds, DENSE_OUTPUT_POINTS)
            .ok_or("the V_DS grid spans no voltage (only 0 V)")?;
        let d = reload().map_err(|e| e.message().to_string())?;
        let run = crate::iv::run_iv(d, &pick, &grid)?;
        (run.clone(), Some(run))
    };
    let series = pick
        .iter()
        .map(|&g| {
            (
                format!("V_GS = {} V", show(g)),
                data.iter()
                    .filter(|p| p.vgs == g)
                    .map(|p| (p.vds, p.id))
                    .collect(),
            )
        })
        .collect();
    Ok((series, own))
}
