//! `lamina iv`: drain current of a file's one FET over gate and drain voltages, and the
//! figures of its branch (see [`crate::iv`] for how each is taken).

use super::Common;
use crate::design;
use crate::error::JobError;
use crate::iv::{
    dense_vds, hysteresis, iv_metrics, leg_crossing, read_device, run_swept, show, unsigned_zero,
    Device, Direction, Hysteresis, IvConfig, IvMetrics, IvPoint, Leg, Polarity, Stress, SweptPoint,
    METRIC_DEFINITIONS,
};
use crate::output::{csv, ensure_dir, write_whole as write_file, OutputSet};
use crate::plot::{draw, Axis, Figure, Mark};
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

/// Direction of a rate-aware sweep (`iv` and `vtc`).
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum DirectionFlag {
    /// From the lowest swept voltage (V_GS, input) to the highest.
    Up,
    /// From the highest swept voltage to the lowest.
    Down,
    /// Up, then down again: the difference between the legs is reported.
    Both,
}

impl DirectionFlag {
    /// The flag, or both ways when it is not given.
    pub(crate) fn or_both(flag: Option<DirectionFlag>) -> Direction {
        match flag.unwrap_or(DirectionFlag::Both) {
            DirectionFlag::Up => Direction::Up,
            DirectionFlag::Down => Direction::Down,
            DirectionFlag::Both => Direction::Both,
        }
    }
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
    /// Ramp the gate at this rate, a voltage per time (`10 V/s`, `2 kV/s`), in a transient
    /// starting at rest at the first V_GS, instead of taking each point at rest (DC): charge
    /// that lags the gate (a 2D-channel FET's slow traps) then shows.
    #[arg(long, value_name = "RATE")]
    pub sweep_rate: Option<String>,
    /// Direction of the ramped sweep (default both: up, then down, with the hysteresis width).
    #[arg(long, value_enum, requires = "sweep_rate")]
    pub direction: Option<DirectionFlag>,
    /// |I_D| at which the hysteresis width of a both-way sweep is read, in amperes unless a
    /// unit is written. Default 100 nA x W/L (the threshold criterion).
    #[arg(long, value_name = "CURRENT", requires = "sweep_rate")]
    pub hysteresis_current: Option<String>,
    /// Bias stress before a ramped sweep: from rest at the first V_GS, ramp to this V_GS, hold
    /// it for `--stress-time` and ramp back, then sweep; the drift of V_GS at the reading current
    /// against the same sweep without stress is reported.
    #[arg(long, value_name = "VGS", allow_hyphen_values = true, requires_all = ["sweep_rate", "stress_time"])]
    pub stress: Option<String>,
    /// How long the stress is held, in seconds unless a unit is written (`100 s`, `10 ms`).
    #[arg(long, value_name = "TIME", requires = "stress")]
    pub stress_time: Option<String>,
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
        sweep_rate,
        direction,
        hysteresis_current,
        stress,
        stress_time,
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
    let positive = super::extract::positive;
    let current_floor_a = positive("--current-floor", &current_floor, "A", Dim::CURRENT)?;
    let rate = positive("--sweep-rate", &sweep_rate, "V/s", VOLTS_PER_SECOND)?;
    let hysteresis_a = positive(
        "--hysteresis-current",
        &hysteresis_current,
        "A",
        Dim::CURRENT,
    )?;
    let stress = match bias("--stress", &stress)? {
        Some(vgs_v) => Some(Stress {
            vgs_v,
            time_s: positive("--stress-time", &stress_time, "s", Dim::TIME)?.unwrap_or(0.0),
        }),
        None => None,
    };
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
    if let Some(rate) = rate {
        let direction = DirectionFlag::or_both(direction);
        let run = SweepPlan {
            direction,
            rate_v_per_s: rate,
            stress,
            current_a: hysteresis_a,
        };
        let swept = Swept::run(&d, &vg, &vd, &run, &device, &config)?;
        if let Some(set) = set_out {
            swept.write(set.dir()).map_err(JobError::Io)?;
            set.commit()?;
        }
        swept.print(json);
        return Ok(());
    }
    let points = crate::iv::run_iv(d, &vg, &vd).map_err(JobError::Analysis)?;
    let mut m = iv_metrics(&points, &device, &config);
    if let Ok(on) = &m.ion {
        m.gds = design::load(&file, &sets)
            .map_err(|e| e.message().to_string())
            .and_then(|d| crate::iv::output_conductance(d, on.vgs_v, m.vds_v));
    }
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
    l.push(row(
        "DIBL (mV/V)",
        m.dibl.clone().map(|d| {
            (
                format!("{:.1}", d.mv_per_v),
                format!(
                    "V_GS at |I_D| = {:.3e} A: {} V at V_DS = {} V, {} V at {} V",
                    d.criterion_a,
                    fixed(d.vth_v.0, 4),
                    show(d.vds_v.0),
                    fixed(d.vth_v.1, 4),
                    show(d.vds_v.1)
                ),
            )
        }),
    ));
    l.push(row(
        "g_ds (S)",
        m.gds.clone().map(|g| {
            (
                sci(g.siemens, 3),
                format!(
                    "dI_D/dV_DS at V_GS = {} V, V_DS = {} V",
                    show(g.vgs_v),
                    show(g.vds_v)
                ),
            )
        }),
    ));
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
    put(
        &mut o,
        "dibl_mv_per_v",
        m.dibl.clone().map(|d| num(d.mv_per_v)),
    );
    put(
        &mut o,
        "dibl_vds_low_v",
        m.dibl.clone().map(|d| num(d.vds_v.0)),
    );
    put(
        &mut o,
        "dibl_vth_low_v",
        m.dibl.clone().map(|d| num(d.vth_v.0)),
    );
    put(
        &mut o,
        "dibl_criterion_a",
        m.dibl.clone().map(|d| num(d.criterion_a)),
    );
    put(&mut o, "gds_siemens", m.gds.clone().map(|g| num(g.siemens)));
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

/// A voltage per time (V/s).
pub(crate) const VOLTS_PER_SECOND: Dim = Dim([0, -1, 1, 0, 0]);

/// How a rate-aware sweep runs.
struct SweepPlan {
    direction: Direction,
    rate_v_per_s: f64,
    stress: Option<Stress>,
    /// The current the hysteresis and the drift are read at (A); default the threshold
    /// criterion.
    current_a: Option<f64>,
}

/// The drift of each leg's V_GS at the reading current after a stress, per V_DS: (after the
/// stress, from rest at the first V_GS).
type DriftRows = Vec<(f64, Leg, Result<(f64, f64), String>)>;

/// The reading current (A) and the drifts, or why they are not reported.
type Drifts = Result<(f64, DriftRows), String>;

/// A rate-aware sweep and its figures.
struct Swept {
    points: Vec<SweptPoint>,
    direction: Direction,
    rate_v_per_s: f64,
    stress: Option<(Stress, Drifts)>,
    /// The figures of the first leg, as a DC sweep's.
    metrics: IvMetrics,
    /// The current the hysteresis is read at (A), and the widths per `V_DS` (both ways only).
    hysteresis: Option<Result<(f64, Widths), String>>,
}

/// The hysteresis width at each `V_DS`, or why it is not reported there.
type Widths = Vec<(f64, Result<Hysteresis, String>)>;

impl Swept {
    fn run(
        d: &lamina_netlist::Design,
        vg: &[f64],
        vd: &[f64],
        plan: &SweepPlan,
        device: &Device,
        config: &IvConfig,
    ) -> Result<Swept, JobError> {
        let &SweepPlan {
            direction,
            rate_v_per_s,
            stress,
            current_a,
        } = plan;
        let sweep = |stress| {
            run_swept(d, vg, vd, direction, rate_v_per_s, stress).map_err(JobError::Analysis)
        };
        let points = sweep(stress)?;
        let first = points[0].leg;
        let leg: Vec<IvPoint> = points
            .iter()
            .filter(|s| s.leg == first)
            .map(|s| s.point)
            .collect();
        let metrics = iv_metrics(&leg, device, config);
        let reading = || -> Result<(Polarity, f64), String> {
            let polarity = metrics.branch.as_ref().map_err(Clone::clone)?.polarity;
            let current = match current_a {
                Some(c) => c,
                None => crate::iv::threshold_current(device)?,
            };
            Ok((polarity, current))
        };
        let hysteresis = (direction == Direction::Both).then(|| {
            let (polarity, current) = reading()?;
            Ok((current, hysteresis(&points, polarity, current)))
        });
        let stress = match stress {
            None => None,
            Some(st) => {
                let rest = sweep(None)?;
                let drifts = reading().map(|(polarity, current)| {
                    let mut rows = DriftRows::new();
                    for &v in vd {
                        for leg in [Leg::Up, Leg::Down] {
                            if !points.iter().any(|s| s.leg == leg) {
                                continue;
                            }
                            let at = |pts: &[SweptPoint]| {
                                leg_crossing(pts, leg, v, polarity, current).ok_or(format!(
                                    "|I_D| does not reach {current:.3e} A on the {} leg",
                                    leg.name()
                                ))
                            };
                            rows.push((v, leg, at(&points).and_then(|a| Ok((a, at(&rest)?)))));
                        }
                    }
                    (current, rows)
                });
                Some((st, drifts))
            }
        };
        Ok(Swept {
            points,
            direction,
            rate_v_per_s,
            stress,
            metrics,
            hysteresis,
        })
    }

    fn direction_name(&self) -> &'static str {
        match self.direction {
            Direction::Up => "up",
            Direction::Down => "down",
            Direction::Both => "both",
        }
    }

    /// The sweep's own lines: how it ran and the hysteresis.
    fn text(&self) -> Vec<String> {
        let mut l = vec![format!(
            "Ramped sweep: {} at {} V/s, from rest at the first V_GS; the figures above are the {} leg's",
            self.direction_name(),
            show(self.rate_v_per_s),
            self.points[0].leg.name()
        )];
        if let Some((st, drifts)) = &self.stress {
            l.push(format!(
                "Bias stress: V_GS = {} V held {} s, then the sweep; drift of V_GS at the reading current against the same sweep without stress:",
                show(st.vgs_v),
                show(st.time_s)
            ));
            match drifts {
                Err(why) => l.push(format!("  not reported: {why}")),
                Ok((current, rows)) => {
                    for (vds, leg, r) in rows {
                        l.push(match r {
                            Ok((a, b)) => format!(
                                "  V_DS = {} V, {} leg, |I_D| = {current:.3e} A: {} V after stress, {} V without, drift {} V",
                                show(*vds),
                                leg.name(),
                                fixed(*a, 4),
                                fixed(*b, 4),
                                fixed(a - b, 4)
                            ),
                            Err(why) => format!(
                                "  V_DS = {} V, {} leg: not reported: {why}",
                                show(*vds),
                                leg.name()
                            ),
                        });
                    }
                }
            }
        }
        match &self.hysteresis {
            None => {}
            Some(Err(why)) => l.push(format!("Hysteresis: not reported: {why}")),
            Some(Ok((current, rows))) => {
                l.push(format!(
                    "Hysteresis at |I_D| = {current:.3e} A (V_GS down leg minus up leg):"
                ));
                for (vds, r) in rows {
                    l.push(match r {
                        Ok(h) => format!(
                            "  V_DS = {} V: up {} V, down {} V, width {} V",
                            show(*vds),
                            fixed(h.vgs_up_v, 4),
                            fixed(h.vgs_down_v, 4),
                            fixed(h.width_v, 4)
                        ),
                        Err(why) => format!("  V_DS = {} V: not reported: {why}", show(*vds)),
                    });
                }
            }
        }
        l
    }

    fn json(&self) -> Value {
        let mut sweep = json!({
            "sweep_rate_v_per_s": num(self.rate_v_per_s),
            "direction": self.direction_name(),
            "figures_leg": self.points[0].leg.name(),
        });
        match &self.hysteresis {
            None => {}
            Some(Err(why)) => {
                sweep["hysteresis"] = Value::Null;
                sweep["not_reported"] = json!({ "hysteresis": why });
            }
            Some(Ok((current, rows))) => {
                sweep["hysteresis_current_a"] = num(*current);
                sweep["hysteresis"] = rows
                    .iter()
                    .map(|(vds, r)| match r {
                        Ok(h) => json!({
                            "vds_v": num(*vds),
                            "vgs_up_v": num(h.vgs_up_v),
                            "vgs_down_v": num(h.vgs_down_v),
                            "width_v": num(h.width_v),
                        }),
                        Err(why) => {
                            json!({ "vds_v": num(*vds), "width_v": null, "not_reported": why })
                        }
                    })
                    .collect();
            }
        }
        if let Some((st, drifts)) = &self.stress {
            let mut o = json!({ "vgs_v": num(st.vgs_v), "time_s": num(st.time_s) });
            match drifts {
                Err(why) => o["not_reported"] = json!(why),
                Ok((current, rows)) => {
                    o["reading_current_a"] = num(*current);
                    o["drift"] = rows
                        .iter()
                        .map(|(vds, leg, r)| match r {
                            Ok((a, b)) => json!({
                                "vds_v": num(*vds),
                                "leg": leg.name(),
                                "vgs_after_stress_v": num(*a),
                                "vgs_without_stress_v": num(*b),
                                "drift_v": num(a - b),
                            }),
                            Err(why) => json!({
                                "vds_v": num(*vds),
                                "leg": leg.name(),
                                "drift_v": null,
                                "not_reported": why,
                            }),
                        })
                        .collect();
                }
            }
            sweep["stress"] = o;
        }
        sweep["definitions"] = json!({
            "stress": "a bias stress before the sweep: from rest at the first V_GS the gate ramps at the sweep rate to vgs_v, holds it for time_s and ramps back; drift_v is the V_GS where the leg's |I_D| reaches reading_current_a after the stress minus the same without it",
            "sweep_rate_v_per_s": "the gate ramps at this rate through the V_GS grid in a transient that starts at rest (the operating point) at the first V_GS",
            "hysteresis_current_a": "the |I_D| the hysteresis is read at: --hysteresis-current, default 100 nA x W/L",
            "width_v": "V_GS where the down leg's |I_D| reaches hysteresis_current_a minus where the up leg's does, each going out along the branch from its smallest current and interpolated in log |I_D|",
            "id": "the current the drain source supplies: channel current plus the displacement current of the drain's charge at the sweep rate",
        });
        sweep
    }

    fn print(&self, as_json: bool) {
        if as_json {
            let pts: Vec<Value> = self
                .points
                .iter()
                .map(|s| {
                    json!({
                        "sweep": s.leg.name(),
                        "time_s": s.time_s,
                        "vgs": s.point.vgs,
                        "vds": s.point.vds,
                        "id": s.point.id,
                        "ig_a": s.point.ig,
                    })
                })
                .collect();
            out!(
                "{}",
                json!({ "points": pts, "metrics": metrics_json(&self.metrics), "sweep": self.json() })
            );
            return;
        }
        out!(
            "{:>10} {:>10} {:>6} {:>13} {:>16} {:>16}   (model estimate)",
            "V_GS (V)",
            "V_DS (V)",
            "sweep",
            "time (s)",
            "I_D (A)",
            "I_G (A)"
        );
        for s in &self.points {
            out!(
                "{:>10} {:>10} {:>6} {:>13} {:>16} {:>16}",
                fixed(s.point.vgs, 4),
                fixed(s.point.vds, 4),
                s.leg.name(),
                sci(s.time_s, 5),
                sci(s.point.id, 6),
                sci(s.point.ig, 6)
            );
        }
        for line in metrics_text(&self.metrics).into_iter().chain(self.text()) {
            out!("{line}");
        }
    }

    /// `iv-up.csv` and `iv-down.csv` (the legs run), `summary.json` and the `hysteresis`
    /// figure: |I_D| against V_GS, one series per leg and V_DS, the width's ends marked.
    fn write(&self, dir: &Path) -> Result<(), String> {
        ensure_dir(dir)?;
        for leg in [Leg::Up, Leg::Down] {
            let mine: Vec<&SweptPoint> = self.points.iter().filter(|s| s.leg == leg).collect();
            if mine.is_empty() {
                continue;
            }
            let rows = mine
                .iter()
                .map(|s| vec![s.time_s, s.point.vgs, s.point.vds, s.point.id, s.point.ig]);
            write_file(
                &dir.join(format!("iv-{}.csv", leg.name())),
                csv(&["time_s", "vgs_v", "vds_v", "id_a", "ig_a"], rows).as_bytes(),
            )?;
        }
        let mut j = json!({ "metrics": metrics_json(&self.metrics), "sweep": self.json() });
        j["caution"] = json!(super::CAUTION);
        write_file(&dir.join("summary.json"), format!("{j}\n").as_bytes())?;
        let title = match &self.hysteresis {
            Some(Ok((_, rows))) => match rows.iter().find_map(|(_, r)| r.as_ref().ok()) {
                Some(h) => format!(
                    "hysteresis {} at {}/s (model estimate)",
                    crate::plot::engineering(h.width_v, "V"),
                    crate::plot::engineering(self.rate_v_per_s, "V")
                ),
                None => "ramped sweep (model estimate)".to_string(),
            },
            _ => format!(
                "ramped sweep at {}/s (model estimate)",
                crate::plot::engineering(self.rate_v_per_s, "V")
            ),
        };
        let mut f = Figure::new(&title, Axis::new("V_GS", "V"), Axis::log("|I_D|", "A"));
        let mut vds: Vec<f64> = self.points.iter().map(|s| s.point.vds).collect();
        vds.sort_by(f64::total_cmp);
        vds.dedup();
        for &v in &vds {
            for leg in [Leg::Up, Leg::Down] {
                let pts: Vec<(f64, f64)> = self
                    .points
                    .iter()
                    .filter(|s| s.leg == leg && s.point.vds == v)
                    .map(|s| (s.point.vgs, s.point.id.abs()))
                    .collect();
                if !pts.is_empty() {
                    f.series.push(crate::plot::Series::line(
                        &format!(
                            "{}, V_DS = {}",
                            leg.name(),
                            crate::plot::engineering(v, "V")
                        ),
                        pts,
                    ));
                }
            }
        }
        if let Some(Ok((current, rows))) = &self.hysteresis {
            for h in rows.iter().filter_map(|(_, r)| r.as_ref().ok()) {
                let at = crate::plot::engineering(h.vds_v, "V");
                for (leg, v) in [("up", h.vgs_up_v), ("down", h.vgs_down_v)] {
                    f.marks
                        .push(Mark::Point((v, *current), format!("{leg} {at}")));
                }
            }
        }
        draw(&dir.join("hysteresis"), &f)
    }
}
