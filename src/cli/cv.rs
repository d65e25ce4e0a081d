//! `lamina cv`: gate capacitances of a file's one 2D-channel FET over gate voltages at one
//! drain voltage, and the parts of its gate stack (see [`crate::cv`] for the definitions).

use super::iv::num;
use super::{Common, CAUTION};
use crate::cv::{run_cv, CvDevice, CvPoint, CvReport, CV_DEFINITIONS};
use crate::design;
use crate::error::JobError;
use crate::iv::show;
use crate::output::{csv, ensure_dir, write_whole, OutputSet};
use crate::plot::{draw, Axis, Figure, Series, Style};
use crate::{note, out};
use lamina_netlist::units::Dim;
use serde_json::{json, Map, Value};
use std::path::{Path, PathBuf};

/// Flags of `lamina cv`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`) with one 2D-channel FET whose source is at ground.
    pub file: PathBuf,
    /// Gate voltages: a list `0,0.5,1` or a range `START:STOP:STEP`, in volts unless a unit is
    /// written (`-500:1000:20mV`).
    #[arg(long, allow_hyphen_values = true)]
    pub vgs: String,
    /// The drain voltage, in volts unless a unit is written. Default 0 V.
    #[arg(long, allow_hyphen_values = true, value_name = "VDS")]
    pub vds: Option<String>,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// The gate's quantum capacitance and level are not numbers for a metal gate; this says why.
const METAL_GATE: &str =
    "metal gate: its quantum capacitance is infinite (no voltage drops inside it) and its Fermi level does not move with its charge";

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        vgs,
        vds,
        common: Common { set, json, out },
    } = a;
    let set_out = OutputSet::begin_opt(out.as_deref())?;
    let vg = crate::iv::parse_values("--vgs", &vgs).map_err(JobError::Usage)?;
    crate::iv::check_grid(&vg, &[0.0]).map_err(JobError::Usage)?;
    let vd = match vds.as_deref() {
        Some(t) => crate::iv::parse_one("--vds", t, "V", Dim::VOLTAGE).map_err(JobError::Usage)?,
        None => 0.0,
    };
    let sets = design::parse_sets(&set)?;
    let d = design::load(&file, &sets)?;
    crate::cv::check_device(&d)
        .map_err(|why| JobError::Invalid(format!("error: {}: {why}", file.display())))?;
    let report = run_cv(d, &vg, vd).map_err(JobError::Analysis)?;
    if let [first, ..] = report.outside_tables.as_slice() {
        note!(
            "warning: at {} gate voltage(s) from V_GS = {} V a channel end lies beyond the device tables' valid range, where the charges continue linearly (see the device model's documentation)",
            report.outside_tables.len(),
            show(*first)
        );
    }
    if let Some(set) = set_out {
        write_cv(set.dir(), &report).map_err(JobError::Io)?;
        set.commit()?;
    }
    if json {
        let mut v = summary_json(&report);
        v["points"] = Value::Array(
            report
                .points
                .iter()
                .map(|p| point_json(p, &report.device))
                .collect(),
        );
        out!("{v}");
    } else {
        for line in table(&report) {
            out!("{line}");
        }
    }
    Ok(())
}

/// The device, the stack's constants, the definitions and what is not reported, as JSON.
fn summary_json(r: &CvReport) -> Value {
    let d = &r.device;
    let mut not_reported = Map::new();
    if d.metal_gate {
        for key in ["c_gate_quantum_f_per_m2", "gate_level_v"] {
            not_reported.insert(key.into(), json!(METAL_GATE));
        }
    }
    let defs: Map<String, Value> = CV_DEFINITIONS
        .iter()
        .map(|(k, v)| (k.to_string(), json!(v)))
        .collect();
    json!({
        "device": d.name,
        "device_kind": "2D-channel FET",
        "gate": if d.metal_gate { "metal" } else { "Dirac" },
        "width_m": num(d.width_m),
        "length_m": num(d.length_m),
        "temperature_k": num(d.temperature_k),
        "vds_v": num(r.points.first().map_or(0.0, |p| p.vds_v)),
        "c_insulator_f_per_m2": num(d.insulator_f_per_m2),
        "c_trap_f_per_m2": num(d.trap_f_per_m2),
        "c_overlap_f_per_m": num(d.overlap_f_per_m),
        "c_overlap_f": num(d.overlap_f()),
        "outside_tables_vgs_v": r.outside_tables,
        "definitions": defs,
        "not_reported": not_reported,
        "caution": CAUTION,
    })
}

/// One point's numbers under their JSON keys (SI units in the names), in column order.
fn point_columns(p: &CvPoint, d: &CvDevice) -> Vec<(&'static str, Option<f64>)> {
    let (a, w) = (d.area_m2(), d.width_m);
    let dirac = |x: f64| (!d.metal_gate).then_some(x);
    vec![
        ("vgs_v", Some(p.vgs_v)),
        ("vds_v", Some(p.vds_v)),
        ("c_gg_f", Some(p.c_gg_f)),
        ("c_gd_f", Some(p.c_gd_f)),
        ("c_gs_f", Some(p.c_gs_f)),
        ("c_gg_f_per_m2", Some(p.c_gg_f / a)),
        ("c_gd_f_per_m2", Some(p.c_gd_f / a)),
        ("c_gs_f_per_m2", Some(p.c_gs_f / a)),
        ("c_gg_f_per_m", Some(p.c_gg_f / w)),
        ("c_gd_f_per_m", Some(p.c_gd_f / w)),
        ("c_gs_f_per_m", Some(p.c_gs_f / w)),
        ("c_gg_intrinsic_f_per_m2", Some(p.intrinsic_gg_f_per_m2(d))),
        ("c_series_f_per_m2", Some(p.series_f_per_m2(d))),
        ("c_insulator_f_per_m2", Some(d.insulator_f_per_m2)),
        ("c_gate_quantum_f_per_m2", dirac(p.gate_quantum_f_per_m2)),
        (
            "c_channel_quantum_f_per_m2",
            Some(p.channel_quantum_f_per_m2),
        ),
        ("c_trap_f_per_m2", Some(d.trap_f_per_m2)),
        ("n_source_per_m2", Some(p.source.n_per_m2)),
        ("p_source_per_m2", Some(p.source.p_per_m2)),
        ("n_drain_per_m2", Some(p.drain.n_per_m2)),
        ("p_drain_per_m2", Some(p.drain.p_per_m2)),
        ("degeneracy_source_v", Some(p.source.degeneracy_v)),
        ("degeneracy_drain_v", Some(p.drain.degeneracy_v)),
        ("band_edge_source_v", Some(p.band_edge_source_v)),
        ("gate_level_v", p.gate_level_v),
        ("q_gate_c", Some(p.q_gate_c)),
    ]
}

fn point_json(p: &CvPoint, d: &CvDevice) -> Value {
    Value::Object(
        point_columns(p, d)
            .into_iter()
            .map(|(k, v)| (k.to_string(), v.map_or(Value::Null, num)))
            .collect(),
    )
}

/// F/m² to µF/cm².
const UF_PER_CM2: f64 = 100.0;
/// F/m to fF/µm.
const FF_PER_UM: f64 = 1e9;
/// 1/m² to 1/cm².
const PER_CM2: f64 = 1e-4;

fn sci(x: f64) -> String {
    super::iv::sci(x, 4)
}

fn fixed(x: f64) -> String {
    super::iv::fixed(x, 4)
}

/// The text report: the device and the stack's constants, then one row per gate voltage.
fn table(r: &CvReport) -> Vec<String> {
    let d = &r.device;
    let vds = r.points.first().map_or(0.0, |p| p.vds_v);
    let mut l = vec![
        format!(
            "C-V of `{}` (2D-channel FET): W = {} um, L = {} um, T = {} K, V_DS = {} V, source grounded (model estimate)",
            d.name,
            show(d.width_m * 1e6),
            show(d.length_m * 1e6),
            show(d.temperature_k),
            show(vds)
        ),
        format!(
            "C_ins = {} uF/cm^2, C_it = q D_it = {} uF/cm^2, overlap {} fF/um per side = {} F (in C_gg, C_gd and C_gs)",
            sci(d.insulator_f_per_m2 * UF_PER_CM2),
            sci(d.trap_f_per_m2 * UF_PER_CM2),
            sci(d.overlap_f_per_m * FF_PER_UM),
            sci(d.overlap_f())
        ),
    ];
    if d.metal_gate {
        l.push(format!(
            "C_Qg and the gate level: not reported: {METAL_GATE}"
        ));
    }
    l.push("Per area in uF/cm^2, per width in fF/um, densities in 1/cm^2; the parts at the source end.".into());
    let mut head = format!(
        "{:>9} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>9}",
        "V_GS (V)",
        "C_gg",
        "C_gg/W",
        "C_gd",
        "C_gs",
        "C_gg,int",
        "series",
        "C_Qch",
        "C_Qg",
        "n_s",
        "p_s",
        "xi_s (V)"
    );
    if !d.metal_gate {
        head.push_str(&format!(" {:>10}", "mu_g (V)"));
    }
    l.push(head);
    for p in &r.points {
        let a = d.area_m2();
        let mut row = format!(
            "{:>9} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11} {:>9}",
            fixed(p.vgs_v),
            sci(p.c_gg_f / a * UF_PER_CM2),
            sci(p.c_gg_f / d.width_m * FF_PER_UM),
            sci(p.c_gd_f / a * UF_PER_CM2),
            sci(p.c_gs_f / a * UF_PER_CM2),
            sci(p.intrinsic_gg_f_per_m2(d) * UF_PER_CM2),
            sci(p.series_f_per_m2(d) * UF_PER_CM2),
            sci(p.channel_quantum_f_per_m2 * UF_PER_CM2),
            if d.metal_gate {
                "-".to_string()
            } else {
                sci(p.gate_quantum_f_per_m2 * UF_PER_CM2)
            },
            sci(p.source.n_per_m2 * PER_CM2),
            sci(p.source.p_per_m2 * PER_CM2),
            fixed(p.source.degeneracy_v)
        );
        if let Some(g) = p.gate_level_v {
            row.push_str(&format!(" {:>10}", fixed(g)));
        }
        l.push(row);
    }
    l
}

/// Writes `cv.csv` (every number of every point; a metal gate's columns left out),
/// `summary.json`, and the figures `cv-parts` (C_gg per area and the stack's parts),
/// `cv-terminal` (C_gg, C_gd, C_gs per width) and `densities`.
fn write_cv(dir: &Path, r: &CvReport) -> Result<(), String> {
    ensure_dir(dir)?;
    let d = &r.device;
    let header: Vec<&str> = r
        .points
        .first()
        .map(|p| point_columns(p, d))
        .unwrap_or_default()
        .into_iter()
        .filter(|(_, v)| v.is_some())
        .map(|(k, _)| k)
        .collect();
    let rows = r.points.iter().map(|p| {
        point_columns(p, d)
            .into_iter()
            .filter_map(|(_, v)| v)
            .collect::<Vec<f64>>()
    });
    write_whole(&dir.join("cv.csv"), csv(&header, rows).as_bytes())?;
    write_whole(
        &dir.join("summary.json"),
        format!("{}\n", summary_json(r)).as_bytes(),
    )?;
    draw(&dir.join("cv-parts"), &parts_figure(r))?;
    draw(&dir.join("cv-terminal"), &terminal_figure(r))?;
    draw(&dir.join("densities"), &density_figure(r))
}

fn series_of(r: &CvReport, f: impl Fn(&CvPoint) -> f64) -> Vec<(f64, f64)> {
    r.points.iter().map(|p| (p.vgs_v, f(p))).collect()
}

/// C_gg per area with the stack's parts, on a log axis (the quantum capacitances span
/// decades). Non-positive values (no traps) are left out by the log axis, so a zero trap
/// capacitance is not drawn; a metal gate's infinite C_Qg gets a legend entry saying so.
fn parts_figure(r: &CvReport) -> Figure {
    let d = &r.device;
    let vds = r.points.first().map_or(0.0, |p| p.vds_v);
    // Far below threshold the channel's quantum capacitance falls through tens of decades; the
    // figure keeps the four decades below C_ins that decide the series combination (the table
    // and the CSV keep every value).
    let floor = 1e-4 * d.insulator_f_per_m2;
    let clip = |pts: Vec<(f64, f64)>| -> Vec<(f64, f64)> {
        pts.into_iter().filter(|p| p.1 >= floor).collect()
    };
    let mut f = Figure::new(
        &format!(
            "C-V at V_DS = {} V, parts at the source end (down to 1e-4 C_ins)",
            show(vds)
        ),
        Axis::new("V_GS", "V"),
        Axis::log("capacitance per area", "F/m²"),
    );
    f.series.push(Series::line(
        "C_gg (overlap included)",
        series_of(r, |p| p.c_gg_f / d.area_m2()),
    ));
    f.series.push(Series::line(
        "C_gg intrinsic",
        clip(series_of(r, |p| p.intrinsic_gg_f_per_m2(d))),
    ));
    f.series.push(Series {
        style: Style::Dashed,
        markers: false,
        ..Series::line("C_ins", series_of(r, |_| d.insulator_f_per_m2))
    });
    f.series.push(Series::line(
        "C_Qch",
        clip(series_of(r, |p| p.channel_quantum_f_per_m2)),
    ));
    if d.metal_gate {
        f.series.push(Series {
            style: Style::Points,
            ..Series::line("C_Qg: infinite (metal gate), not drawn", Vec::new())
        });
    } else {
        f.series.push(Series::line(
            "C_Qg",
            series_of(r, |p| p.gate_quantum_f_per_m2),
        ));
    }
    if d.trap_f_per_m2 > 0.0 {
        f.series.push(Series {
            style: Style::Dashed,
            markers: false,
            ..Series::line("C_it", series_of(r, |_| d.trap_f_per_m2))
        });
    }
    f
}

/// The terminal capacitances per width, overlap included, on a linear axis.
fn terminal_figure(r: &CvReport) -> Figure {
    let w = r.device.width_m;
    let mut f = Figure::new(
        "terminal capacitances (overlap included)",
        Axis::new("V_GS", "V"),
        Axis::new("capacitance per width", "F/m"),
    );
    f.series
        .push(Series::line("C_gg", series_of(r, |p| p.c_gg_f / w)));
    f.series
        .push(Series::line("C_gd", series_of(r, |p| p.c_gd_f / w)));
    f.series
        .push(Series::line("C_gs", series_of(r, |p| p.c_gs_f / w)));
    f.series.push(Series {
        style: Style::Dashed,
        markers: false,
        ..Series::line(
            "overlap, one side",
            series_of(r, |_| r.device.overlap_f_per_m),
        )
    });
    f
}

/// Electron and hole sheet densities at the source end (and the drain end when V_DS ≠ 0) on
/// a log axis.
fn density_figure(r: &CvReport) -> Figure {
    let mut f = Figure::new(
        "sheet densities",
        Axis::new("V_GS", "V"),
        // Plain exponents: an SI prefix on a reciprocal unit (`k1/m²`) would mislead.
        Axis::log("sheet density (1/m²)", ""),
    );
    let drain = r.points.iter().any(|p| p.vds_v != 0.0);
    for (end, at) in [("source", false), ("drain", true)] {
        if at && !drain {
            continue;
        }
        let pick = move |p: &CvPoint| if at { p.drain } else { p.source };
        f.series.push(Series::line(
            &format!("n, {end} end"),
            series_of(r, |p| pick(p).n_per_m2),
        ));
        f.series.push(Series::line(
            &format!("p, {end} end"),
            series_of(r, |p| pick(p).p_per_m2),
        ));
    }
    f
}
