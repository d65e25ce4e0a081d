//! `lamina extract`: standard figures of measured transfer curves from a CSV data file (see
//! [`crate::extract`] for each method and [`lamina_netlist::table`] for the file format).

use crate::error::JobError;
use crate::extract::{
    extract, read_card, CurveFigures, ExtractConfig, Extraction, Fig, DEFINITIONS,
};
use crate::iv::show;
use crate::out;
use crate::output::{csv, ensure_dir, write_whole, OutputSet};
use crate::plot::{draw, Axis, Figure, Mark, Series, Style};
use lamina_netlist::table::{parse_table, Table, TableOptions};
use lamina_netlist::units::Dim;
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

/// Largest data file read (bytes).
pub const MAX_DATA_BYTES: u64 = 256 << 20;

/// Flags of `lamina extract`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Measured curves: CSV with units in the headers, such as `V_GS (V), V_DS (V), I_D (A)`;
    /// optional `direction`, `L (nm)` and `W (um)` columns.
    pub data: PathBuf,
    /// Device card file (`.lam` with one 2D-channel FET): W and L where the data has no
    /// columns for them, and the gate stack for the mobility.
    #[arg(long, value_name = "FILE")]
    pub card: Option<PathBuf>,
    /// Noise floor: points with |I_D| below it are flagged and kept out of log-based figures
    /// (amperes unless a unit is written, such as 10pA).
    #[arg(long, value_name = "CURRENT")]
    pub floor: Option<String>,
    /// Constant-current threshold criterion per square (I_D = I_crit x W/L); default 100nA.
    #[arg(long, value_name = "CURRENT")]
    pub i_crit: Option<String>,
    /// Overdrive V_GS - V_T of the transfer-length method; default the largest every device
    /// reaches.
    #[arg(long, value_name = "VOLTAGE")]
    pub overdrive: Option<String>,
    /// Print one JSON object on stdout instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Write the figures (CSV, JSON) and plots (SVG, PNG) into this directory.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// A positive value of `dim` from a flag, in `unit` unless one is written (exit 2 otherwise).
pub(crate) fn positive(
    flag: &str,
    text: &Option<String>,
    unit: &str,
    dim: Dim,
) -> Result<Option<f64>, JobError> {
    text.as_deref()
        .map(|t| {
            let v = crate::iv::parse_one(flag, t, unit, dim)?;
            if v > 0.0 && v.is_finite() {
                Ok(v)
            } else {
                Err(format!("{flag} {t}: give a positive value"))
            }
        })
        .transpose()
        .map_err(JobError::Usage)
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let set = OutputSet::begin_opt(a.out.as_deref())?;
    let cfg = ExtractConfig {
        floor_a: positive("--floor", &a.floor, "A", Dim::CURRENT)?,
        i_crit_a: positive("--i-crit", &a.i_crit, "A", Dim::CURRENT)?.unwrap_or(1e-7),
        overdrive_v: positive("--overdrive", &a.overdrive, "V", Dim::VOLTAGE)?,
        ..ExtractConfig::default()
    };
    let card =
        match &a.card {
            Some(path) => {
                let d = crate::design::load(path, &[])?;
                Some(read_card(&d).map_err(|why| {
                    JobError::Invalid(format!("error: {}: {why}", path.display()))
                })?)
            }
            None => None,
        };
    let table = read_table(&a.data, card.as_ref().map(|c| c.width_m))?;
    let x = extract(&table, card.as_ref(), &cfg);
    let summary = to_json(&x, &cfg, &a.data);
    if let Some(set) = set {
        write_files(set.dir(), &x, &summary).map_err(JobError::Io)?;
        set.commit()?;
    }
    if a.json {
        out!("{summary}");
    } else {
        for line in text_report(&x, &cfg) {
            out!("{line}");
        }
    }
    Ok(())
}

/// Reads and parses a data file; faults in it are located errors (exit 3). `width_m` turns a
/// per-width current into a current where the file has no `W` column.
pub(crate) fn read_table(path: &Path, width_m: Option<f64>) -> Result<Table, JobError> {
    let text = read_data(path)?;
    parse_table(&text, &TableOptions { width_m }).map_err(|errors| {
        JobError::Invalid(
            errors
                .iter()
                .map(|e| {
                    format!(
                        "error: {}:{}:{}: {}\n  help: {}\n",
                        path.display(),
                        e.line,
                        e.column,
                        e.message,
                        e.help
                    )
                })
                .collect(),
        )
    })
}

fn read_data(path: &Path) -> Result<String, JobError> {
    let io = |e: std::io::Error| JobError::Io(format!("cannot read {}: {e}", path.display()));
    let meta = std::fs::metadata(path).map_err(io)?;
    if !meta.is_file() {
        return Err(JobError::Io(format!(
            "{} is not a regular file",
            path.display()
        )));
    }
    if meta.len() > MAX_DATA_BYTES {
        return Err(JobError::Io(format!(
            "{} has {} bytes, more than the limit of {MAX_DATA_BYTES}",
            path.display(),
            meta.len()
        )));
    }
    std::fs::read_to_string(path).map_err(io)
}

fn fig<T>(r: &Fig<T>, f: impl FnOnce(&T) -> Value) -> Value {
    match r {
        Ok(v) => f(v),
        Err(why) => json!({ "not_reported": why }),
    }
}

fn device_label(x: &Extraction, d: usize) -> String {
    let dev = &x.devices[d];
    let um = |v: Option<f64>| v.map_or("?".to_string(), |v| show(v * 1e6));
    format!(
        "device {} (L = {} um, W = {} um)",
        d + 1,
        um(dev.length_m),
        um(dev.width_m)
    )
}

fn curve_json(c: &crate::extract::Curve, f: &CurveFigures) -> Value {
    json!({
        "vds_v": c.vds_v,
        "direction": c.direction.map(|d| d.name()),
        "first_line": c.first_line,
        "points": c.vgs.len(),
        "repeats_averaged": c.repeats,
        "below_floor": c.below_floor,
        "polarity": f.polarity.name(),
        "vth_constant_current": fig(&f.vth_cc, |t| json!({"vth_v": t.vth_v, "criterion_a": t.criterion_a})),
        "vth_linear_extrapolation": fig(&f.vth_gm, |g| json!({"vth_v": g.vth_v, "gm_max_siemens": g.gm_s, "vgs_at_gm_max_v": g.vgs_v})),
        "vth_second_derivative": fig(&f.vth_sd, |v| json!({"vth_v": v})),
        "ss_min": fig(&f.ss_min, |s| json!({"mv_per_dec": s.mv_per_dec, "vgs_v": s.vgs, "id_a": s.current})),
        "ss_vs_id": f.ss_table.iter().map(|s| json!({"id_a": s.current, "mv_per_dec": s.mv_per_dec})).collect::<Vec<_>>(),
        "mu_fe": fig(&f.mu_fe, |m| json!({
            "insulator_m2_per_vs": m.insulator_m2_per_vs,
            "quantum_corrected_m2_per_vs": m.corrected_m2_per_vs,
            "c_ins_f_per_m2": m.c_ins_f_per_m2,
            "c_series_f_per_m2": m.c_series_f_per_m2,
            "c_q_plus_c_it_f_per_m2": m.c_q_it_f_per_m2,
            "u_v": m.u_v,
        })),
        "y_function": fig(&f.y, |y| json!({
            "vth_v": y.vth_v,
            "beta_a_per_v2": y.beta_a_per_v2,
            "theta_per_v": y.theta_per_v,
            "mu0_m2_per_vs": fig(&y.mu0_m2_per_vs, |m| json!(m)),
            "r_sd_ohm": y.r_sd_ohm,
            "r_sd_w_ohm_m": y.r_sd_w_ohm_m,
            "fit_points": y.y.fit.points,
            "r_squared": y.y.fit.r_squared,
        })),
    })
}

/// The summary object (`--json` and `summary.json`).
pub fn to_json(x: &Extraction, cfg: &ExtractConfig, data: &Path) -> Value {
    let devices: Vec<Value> = x
        .devices
        .iter()
        .zip(&x.figures)
        .map(|(dev, figs)| {
            json!({
                "length_m": dev.length_m,
                "width_m": dev.width_m,
                "curves": dev.curves.iter().zip(figs).map(|(c, f)| curve_json(c, f)).collect::<Vec<_>>(),
            })
        })
        .collect();
    let definitions: serde_json::Map<String, Value> = DEFINITIONS
        .iter()
        .map(|(k, v)| (k.to_string(), json!(v)))
        .collect();
    json!({
        "data": data.display().to_string(),
        "points": x.points,
        "floor_a": cfg.floor_a,
        "below_floor": x.devices.iter().flat_map(|d| &d.curves).map(|c| c.below_floor).sum::<usize>(),
        "i_crit_a": cfg.i_crit_a,
        "derivative_half_window": cfg.half_window,
        "definitions": definitions,
        "devices": devices,
        "tlm": fig(&x.tlm, |t| json!({
            "overdrive_v": t.overdrive_v,
            "points": t.points.iter().map(|p| json!({"length_m": p.0, "r_total_w_ohm_m": p.1, "vds_v": p.2})).collect::<Vec<_>>(),
            "rc_w_ohm_m": t.rc_w_ohm_m.0,
            "rc_w_se_ohm_m": t.rc_w_ohm_m.1,
            "r_sheet_ohm": t.r_sheet_ohm.0,
            "r_sheet_se_ohm": t.r_sheet_ohm.1,
            "transfer_length_m": t.transfer_length_m,
            "r_squared": t.fit.r_squared,
        })),
    })
}

fn row<T>(label: &str, r: &Fig<T>, f: impl FnOnce(&T) -> (String, String)) -> String {
    match r {
        Ok(v) => {
            let (value, how) = f(v);
            format!("    {label:<30} {value:>14}  {how}")
        }
        Err(why) => format!("    {label:<30} {:>14}  {why}", "not reported"),
    }
}

fn se(x: Option<f64>, scale: f64) -> String {
    x.map_or("no error estimate with two points".into(), |s| {
        format!("+- {:.3e}", s * scale)
    })
}

/// The report as lines of text.
pub fn text_report(x: &Extraction, cfg: &ExtractConfig) -> Vec<String> {
    let mut l = vec![format!(
        "{} points, {} device(s){}",
        x.points,
        x.devices.len(),
        cfg.floor_a
            .map_or(String::new(), |f| format!(", noise floor {f:.3e} A"))
    )];
    for (d, (dev, figs)) in x.devices.iter().zip(&x.figures).enumerate() {
        l.push(String::new());
        l.push(device_label(x, d));
        for (c, f) in dev.curves.iter().zip(figs) {
            l.push(format!(
                "  V_DS = {} V{} ({} branch, {} points from line {}, {} repeats averaged, {} below the floor)",
                show(c.vds_v),
                c.direction.map_or(String::new(), |d| format!(", sweep {}", d.name())),
                f.polarity.name(),
                c.vgs.len(),
                c.first_line,
                c.repeats,
                c.below_floor
            ));
            l.push(row("V_th, constant current (V)", &f.vth_cc, |t| {
                (
                    format!("{:.4}", t.vth_v),
                    format!("at |I_D| = {:.3e} A", t.criterion_a),
                )
            }));
            l.push(row("V_th, linear extrapolation (V)", &f.vth_gm, |g| {
                (
                    format!("{:.4}", g.vth_v),
                    format!(
                        "tangent at g_m = {:.3e} S, V_GS = {} V, minus V_DS/2",
                        g.gm_s,
                        show(g.vgs_v)
                    ),
                )
            }));
            l.push(row("V_th, second derivative (V)", &f.vth_sd, |v| {
                (
                    format!("{v:.4}"),
                    format!("max dg_m/dV_GS, +-{} samples smoothing", cfg.half_window),
                )
            }));
            l.push(row("SS minimum (mV/dec)", &f.ss_min, |s| {
                (
                    format!("{:.2}", s.mv_per_dec),
                    format!("at V_GS = {} V, |I_D| = {:.3e} A", show(s.vgs), s.current),
                )
            }));
            if f.linear {
                l.push(row("mu_FE, C_ins (cm^2/V/s)", &f.mu_fe, |m| {
                    (
                        format!("{:.4}", m.insulator_m2_per_vs * 1e4),
                        format!("C_ins = {:.4e} F/m^2", m.c_ins_f_per_m2),
                    )
                }));
                l.push(row("mu_FE, C_Q corrected (cm^2/V/s)", &f.mu_fe, |m| {
                    (
                        format!("{:.4}", m.corrected_m2_per_vs * 1e4),
                        format!(
                            "C_ins in series with C_Q + C_it = {:.4e} F/m^2 at u = {} V",
                            m.c_q_it_f_per_m2,
                            show(m.u_v)
                        ),
                    )
                }));
                l.push(row("V_th, Y-function (V)", &f.y, |y| {
                    (
                        format!("{:.4}", y.vth_v),
                        format!("{} points, r^2 = {:.6}", y.y.fit.points, y.y.fit.r_squared),
                    )
                }));
                if let Ok(y) = &f.y {
                    l.push(row("mu_0, Y-function (cm^2/V/s)", &y.mu0_m2_per_vs, |m| {
                        (
                            format!("{:.4}", m * 1e4),
                            format!(
                                "beta = {:.4e} A/V^2, theta = {:.4} 1/V",
                                y.beta_a_per_v2, y.theta_per_v
                            ),
                        )
                    }));
                    l.push(row("R_sd = theta/beta (Ohm)", &Ok::<_, String>(y.r_sd_ohm), |r| {
                        (
                            format!("{r:.4e}"),
                            y.r_sd_w_ohm_m.map_or("all of theta as R_sd (theta_0 = 0)".into(), |rw| {
                                format!("R_sd W = {:.4e} Ohm m; all of theta as R_sd (theta_0 = 0)", rw)
                            }),
                        )
                    }));
                }
            }
        }
    }
    l.push(String::new());
    l.push("Transfer-length method:".into());
    l.push(row("R_c W = intercept / 2 (Ohm um)", &x.tlm, |t| {
        (
            format!("{:.4e}", t.rc_w_ohm_m.0 * 1e6),
            se(t.rc_w_ohm_m.1, 1e6),
        )
    }));
    l.push(row("sheet resistance (Ohm/sq)", &x.tlm, |t| {
        (format!("{:.4e}", t.r_sheet_ohm.0), se(t.r_sheet_ohm.1, 1.0))
    }));
    l.push(row("overdrive V_GS - V_T (V)", &x.tlm, |t| {
        (
            format!("{:.4}", t.overdrive_v),
            format!(
                "{} devices, transfer length {:.3e} m",
                t.points.len(),
                t.transfer_length_m
            ),
        )
    }));
    l
}

fn write_files(dir: &Path, x: &Extraction, summary: &Value) -> Result<(), String> {
    ensure_dir(dir)?;
    write_whole(&dir.join("summary.json"), format!("{summary}\n").as_bytes())?;
    let mut pts = Vec::new();
    let mut ss = Vec::new();
    for (d, dev) in x.devices.iter().enumerate() {
        for (c, f) in dev.curves.iter().zip(&x.figures[d]) {
            for (v, i) in c.vgs.iter().zip(&c.id) {
                pts.push(vec![
                    (d + 1) as f64,
                    dev.length_m.unwrap_or(f64::NAN),
                    dev.width_m.unwrap_or(f64::NAN),
                    *v,
                    c.vds_v,
                    *i,
                ]);
            }
            for s in &f.ss_table {
                ss.push(vec![(d + 1) as f64, c.vds_v, s.current, s.mv_per_dec]);
            }
        }
    }
    write_whole(
        &dir.join("curves.csv"),
        csv(
            &["device", "length_m", "width_m", "vgs_v", "vds_v", "id_a"],
            pts.into_iter(),
        )
        .as_bytes(),
    )?;
    write_whole(
        &dir.join("ss.csv"),
        csv(
            &["device", "vds_v", "id_a", "ss_mv_per_dec"],
            ss.into_iter(),
        )
        .as_bytes(),
    )?;
    for (d, dev) in x.devices.iter().enumerate() {
        let figs = &x.figures[d];
        let title = device_label(x, d);
        let mut log = Figure::new(&title, Axis::new("V_GS", "V"), Axis::log("|I_D|", "A"));
        let mut lin = Figure::new(&title, Axis::new("V_GS", "V"), Axis::new("|I_D|", "A"));
        let mut ssf = Figure::new(&title, Axis::log("|I_D|", "A"), Axis::new("SS", "mV/dec"));
        for (c, f) in dev.curves.iter().zip(figs) {
            let name = format!(
                "V_DS = {}{}",
                lamina_netlist::units::engineering(c.vds_v, "V"),
                c.direction
                    .map_or(String::new(), |d| format!(" {}", d.name()))
            );
            let pts: Vec<(f64, f64)> = c
                .vgs
                .iter()
                .zip(&c.id)
                .map(|(v, i)| (*v, i.abs()))
                .collect();
            log.series.push(Series::line(&name, pts.clone()));
            lin.series.push(Series::line(&name, pts));
            ssf.series.push(Series::line(
                &name,
                f.ss_table
                    .iter()
                    .map(|s| (s.current, s.mv_per_dec))
                    .collect(),
            ));
            if f.linear {
                for fg in [&mut log, &mut lin] {
                    if let Ok(t) = &f.vth_cc {
                        fg.marks
                            .push(Mark::Vertical(t.vth_v, "V_th const. current".into()));
                    }
                    if let Ok(g) = &f.vth_gm {
                        fg.marks
                            .push(Mark::Vertical(g.vth_v, "V_th lin. extrapolation".into()));
                    }
                    if let Ok(v) = &f.vth_sd {
                        fg.marks
                            .push(Mark::Vertical(*v, "V_th 2nd derivative".into()));
                    }
                }
                if let Ok(y) = &f.y {
                    let mut yf = Figure::new(
                        &format!("{title}: Y-function, V_DS = {} V", show(c.vds_v)),
                        Axis::new("V_GS", "V"),
                        Axis::new("Y = I_D / sqrt(g_m)", "sqrt(A V)"),
                    );
                    yf.series.push(Series {
                        style: Style::Points,
                        markers: true,
                        ..Series::line("data", y.y.points.clone())
                    });
                    let (a, b) = (y.y.fit.intercept, y.y.fit.slope);
                    let x1 = y.y.points.last().map_or(0.0, |p| p.0);
                    yf.series
                        .push(Series::line("fit", vec![(y.y.vth, 0.0), (x1, a + b * x1)]));
                    draw(&dir.join(format!("device-{}-y-function", d + 1)), &yf)?;
                }
            }
        }
        let stem = |s: &str| dir.join(format!("device-{}-{s}", d + 1));
        draw(&stem("transfer-log"), &log)?;
        draw(&stem("transfer-linear"), &lin)?;
        if ssf.series.iter().any(|s| !s.points.is_empty()) {
            draw(&stem("ss-vs-id"), &ssf)?;
        }
    }
    if let Ok(t) = &x.tlm {
        let mut f = Figure::new(
            &format!(
                "transfer-length method at V_GS - V_T = {} V",
                show(t.overdrive_v)
            ),
            Axis::new("L", "m"),
            Axis::new("R_total W", "Ω m"),
        );
        f.series.push(Series {
            style: Style::Points,
            markers: true,
            ..Series::line("devices", t.points.iter().map(|p| (p.0, p.1)).collect())
        });
        let lmax = t.points.iter().map(|p| p.0).fold(0.0, f64::max);
        f.series.push(Series::line(
            "fit: intercept 2 R_c W",
            vec![
                (0.0, t.fit.intercept),
                (lmax, t.fit.intercept + t.fit.slope * lmax),
            ],
        ));
        draw(&dir.join("tlm"), &f)?;
        write_whole(
            &dir.join("tlm.csv"),
            csv(
                &["length_m", "r_total_w_ohm_m", "vds_v"],
                t.points.iter().map(|p| vec![p.0, p.1, p.2]),
            )
            .as_bytes(),
        )?;
    }
    Ok(())
}
