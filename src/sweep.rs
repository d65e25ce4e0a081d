//! The sweep job: a file's declared analyses at every point of a grid of parameter values,
//! points run in parallel (rayon), results in grid order, a failed point reported in its row.

use crate::design::{run_all, Outcome};
use crate::error::JobError;
use crate::ring::RingParams;
use indicatif::{ParallelProgressIterator, ProgressBar, ProgressStyle};
use lamina_netlist::units::Dim;
use lamina_netlist::values::parse_values;
use rayon::prelude::*;
use std::path::Path;

/// Most points of a sweep grid (the product of the axes' lengths).
pub const MAX_SWEEP_POINTS: usize = 100_000;

/// One swept parameter and its values.
#[derive(Clone, Debug, PartialEq)]
pub struct Axis {
    /// Top-level parameter name.
    pub name: String,
    /// Values in SI units.
    pub values: Vec<f64>,
    /// The same values in the language's syntax, with their unit (`12e-1 V`), as overrides.
    pub texts: Vec<String>,
    /// Their dimension.
    pub dim: Dim,
}

/// Parses `name=LIST` or `name=START:STOP:STEP`, values with units as in circuit files
/// (`vdd=0.6:1.2:0.2V`, `len=50nm,100nm`).
pub fn parse_axis(text: &str) -> Result<Axis, JobError> {
    let usage = |why: String| JobError::Usage(format!("--param {text}: {why}"));
    let (name, vals) = text.split_once('=').ok_or_else(|| {
        usage("expected name=LIST or name=START:STOP:STEP, such as vdd=0.5:1.2:0.1V".into())
    })?;
    let name = name.trim();
    if name.is_empty() {
        return Err(usage("the parameter name is missing".into()));
    }
    let values = parse_values(vals, None, MAX_SWEEP_POINTS).map_err(usage)?;
    Ok(Axis {
        name: name.to_string(),
        dim: values.first().map_or(Dim::NONE, |v| v.dim),
        texts: values.iter().map(|v| v.text.clone()).collect(),
        values: values.iter().map(|v| v.si).collect(),
    })
}

/// Checks a sweep's axes against each other and the `--set` flags: each name once, and a grid
/// within [`MAX_SWEEP_POINTS`] (checked before anything is allocated).
pub fn check_axes(axes: &[Axis], sets: &[(String, String)]) -> Result<(), JobError> {
    for (i, a) in axes.iter().enumerate() {
        if axes[..i].iter().any(|b| b.name == a.name) {
            return Err(JobError::Usage(format!(
                "--param {} is given twice; list all its values in one flag",
                a.name
            )));
        }
        if sets.iter().any(|(n, _)| *n == a.name) {
            return Err(JobError::Usage(format!(
                "`{}` is both set (--set) and swept (--param); give it in one of them",
                a.name
            )));
        }
    }
    let total = axes
        .iter()
        .try_fold(1usize, |acc, a| acc.checked_mul(a.values.len()));
    match total {
        Some(n) if n <= MAX_SWEEP_POINTS => Ok(()),
        _ => Err(JobError::Usage(format!(
            "the grid has {} points, more than the limit of {MAX_SWEEP_POINTS}; use fewer values",
            axes.iter()
                .map(|a| a.values.len().to_string())
                .collect::<Vec<_>>()
                .join(" x ")
        ))),
    }
}

/// One grid point's results: the swept values, then measured figures or the error.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    /// `(name, value)` of every axis at this point.
    pub point: Vec<(String, f64)>,
    /// `(key, value)` of every figure, in analysis order. Keys are the analysis kind, a `.`,
    /// and the quantity with its unit: `transfer.vm_v`, `ring.frequency_hz`,
    /// `operating_point.out[3]_v`; a pure number has no unit (`transfer.gain_max`).
    pub figures: Vec<(String, f64)>,
    /// Curves of this point kept for the families `--out` draws (empty unless asked for):
    /// transfer curves, the first stage's ring waveform, each recorded transient node.
    pub curves: Vec<Curve>,
    /// Why the point failed, if it did.
    pub error: Option<String>,
}

/// Most curve samples a sweep keeps for its families of curves (about 160 MB); past it,
/// curves are kept for an evenly spread subset of the points.
pub const MAX_CURVE_SAMPLES: usize = 10_000_000;

/// Most samples of one kept curve: longer ones are thinned evenly (first and last kept).
pub const CURVE_SAMPLES: usize = 2000;

/// One curve of one point, for a family of curves.
#[derive(Clone, Debug, PartialEq)]
pub struct Curve {
    /// The family it belongs to: `transfer`, `ring`, `transient out`.
    pub family: String,
    /// Horizontal axis description, `quantity (unit)`.
    pub x_desc: &'static str,
    /// Vertical axis description.
    pub y_desc: &'static str,
    /// The points.
    pub points: Vec<(f64, f64)>,
}

/// At most [`CURVE_SAMPLES`] points of `x`, `y`, evenly thinned, the last one kept.
fn thinned(x: &[f64], y: &[f64]) -> Vec<(f64, f64)> {
    let n = x.len().min(y.len());
    let stride = n.div_ceil(CURVE_SAMPLES).max(1);
    let mut pts: Vec<(f64, f64)> = (0..n).step_by(stride).map(|k| (x[k], y[k])).collect();
    if n > 0 && (n - 1) % stride != 0 {
        pts.push((x[n - 1], y[n - 1]));
    }
    pts
}

/// The curves `o` contributes to the families.
pub(crate) fn curves_of(o: &Outcome) -> Vec<Curve> {
    match o {
        Outcome::Transfer { vin, vout, .. } => vec![Curve {
            family: "transfer curves".into(),
            x_desc: "input (V)",
            y_desc: "output (V)",
            points: thinned(vin, vout),
        }],
        Outcome::Ring(_, (t, stages)) => stages
            .first()
            .map(|(_, v)| Curve {
                family: "ring waveforms".into(),
                x_desc: "time (s)",
                y_desc: "first stage output (V)",
                points: thinned(t, v),
            })
            .into_iter()
            .collect(),
        Outcome::Transient(r) => r
            .signals
            .iter()
            .filter(|s| s.unit == "V")
            .map(|s| Curve {
                family: format!("transient {}", s.name),
                x_desc: "time (s)",
                y_desc: "voltage (V)",
                points: thinned(&r.time, &s.values),
            })
            .collect(),
        _ => Vec::new(),
    }
}

/// The columns of a set of rows: every key any row has, in order of first appearance, so a
/// failed or partial first point loses nothing.
pub fn columns(rows: &[Row]) -> Vec<String> {
    let mut keys: Vec<String> = Vec::new();
    let mut seen = std::collections::HashSet::new();
    for r in rows {
        for (k, _) in &r.figures {
            if seen.insert(k.as_str()) {
                keys.push(k.clone());
            }
        }
    }
    keys
}

/// A key's quantity and unit for a table header: `transfer.vm_v` -> `transfer.vm (V)`,
/// `operating_point.out[3]_v` -> `node out[3] (V)`.
pub fn label(key: &str) -> String {
    let (kind, rest) = key.split_once('.').unwrap_or(("", key));
    let (name, unit) = match lamina_netlist::units::figure_suffix(rest) {
        Some((suffix, dim)) => (
            rest[..rest.len() - suffix.len()].to_string(),
            format!(" ({})", dim.unit().split(',').next().unwrap_or("")),
        ),
        None => (rest.to_string(), String::new()),
    };
    if kind == "operating_point" && rest.ends_with("_v") {
        format!("node {name}{unit}")
    } else if kind == "operating_point" || kind.is_empty() {
        format!("{name}{unit}")
    } else {
        format!("{kind}.{name}{unit}")
    }
}

/// A key in words for figures: `transfer.vm_v` -> `transfer V_M (V)`, `ring.frequency_hz`
/// -> `ring frequency (Hz)`, `operating_point.out[3]_v` -> `node out[3] (V)`.
pub fn pretty(key: &str) -> String {
    const NAMES: &[(&str, &str)] = &[
        ("vm", "V_M"),
        ("voh", "V_OH"),
        ("vol", "V_OL"),
        ("vil", "V_IL"),
        ("vih", "V_IH"),
        ("nmh", "NM_H"),
        ("nml", "NM_L"),
        ("snm", "static noise margin"),
        ("gain_max", "peak gain"),
        ("stage_delay", "stage delay"),
        ("avg_power", "mean supply power"),
        ("energy_per_cycle", "energy per cycle"),
        ("t_phl", "t_pHL"),
        ("t_plh", "t_pLH"),
        ("rise", "rise time"),
        ("fall", "fall time"),
    ];
    let l = label(key);
    let Some((kind, rest)) = l.split_once('.') else {
        return l;
    };
    let (name, unit) = match rest.split_once(" (") {
        Some((n, u)) => (n, format!(" ({u}")),
        None => (rest, String::new()),
    };
    let name = NAMES
        .iter()
        .find(|(k, _)| *k == name)
        .map_or(name.replace('_', " "), |(_, v)| v.to_string());
    format!("{} {name}{unit}", kind.replace('_', " "))
}

/// A swept parameter's column key: its name and its unit (`vdd_v`, `rc_ohm_m`, `stages`).
pub fn axis_key(a: &Axis) -> String {
    let unit = a.dim.unit();
    let unit = unit.split(',').next().unwrap_or("");
    if a.dim == Dim::NONE || unit.is_empty() {
        return a.name.clone();
    }
    let slug: String = unit
        .to_lowercase()
        .replace("1/", "per_")
        .replace('/', "_per_")
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
        .collect();
    let slug = slug.trim_matches('_').replace("__", "_");
    format!("{}_{slug}", a.name)
}

/// A swept parameter's table header: `vdd (V)`.
pub fn axis_label(a: &Axis) -> String {
    if a.dim == Dim::NONE {
        a.name.clone()
    } else {
        format!(
            "{} ({})",
            a.name,
            a.dim.unit().split(',').next().unwrap_or("")
        )
    }
}

/// The figures of one analysis's outcome, keyed as in [`Row::figures`].
pub(crate) fn figures(kind: &str, o: &Outcome) -> Vec<(String, f64)> {
    let mut f = Vec::new();
    let mut put = |k: &str, v: Option<f64>| {
        if let Some(v) = v {
            f.push((format!("{kind}.{k}"), v));
        }
    };
    match o {
        Outcome::OperatingPoint(op) => {
            for (n, x) in &op.nodes {
                put(&format!("{n}_v"), Some(*x));
            }
            for s in &op.sources {
                put(&format!("{}.current_a", s.name), Some(s.current));
                put(&format!("{}.power_w", s.name), Some(s.power));
            }
            for d in &op.devices {
                put(
                    &format!("{}.i_drain_a", d.name),
                    d.terminals.first().map(|t| t.2),
                );
                if let Some(ss) = &d.small_signal {
                    put(&format!("{}.gm_siemens", d.name), Some(ss.gm));
                    put(&format!("{}.gds_siemens", d.name), Some(ss.gds));
                    put(&format!("{}.cgg_f", d.name), Some(ss.cgg));
                    put(&format!("{}.ft_hz", d.name), ss.f_t());
                }
            }
        }
        Outcome::Transfer { metrics, snm, .. } => {
            put("vm_v", metrics.map(|m| m.vm));
            put("voh_v", metrics.map(|m| m.voh));
            put("vol_v", metrics.map(|m| m.vol));
            put("vil_v", metrics.map(|m| m.vil));
            put("vih_v", metrics.map(|m| m.vih));
            put("nmh_v", metrics.map(|m| m.nmh));
            put("nml_v", metrics.map(|m| m.nml));
            put("snm_v", snm.map(|m| m.snm));
            put("gain_max", metrics.map(|m| m.gain_max));
        }
        Outcome::Delay(d) => {
            put("t_phl_s", d.t_phl);
            put("t_plh_s", d.t_plh);
            put("t_p_s", d.t_p);
            put("rise_s", d.rise);
            put("fall_s", d.fall);
        }
        Outcome::Transient(tr) => {
            for s in &tr.supplies {
                put(&format!("{}_avg_power_w", s.name), Some(s.avg_power));
                put(&format!("{}_peak_power_w", s.name), Some(s.peak_power));
                put(&format!("{}_energy_j", s.name), Some(s.energy));
            }
            for c in &tr.crossings {
                put(
                    &format!("{}_rising_crossings", c.node),
                    Some(c.rising.len() as f64),
                );
            }
        }
        Outcome::SmallSignal(r) => {
            put("low_frequency_gain", Some(r.figures.low_frequency_gain));
            put("bandwidth_3db_hz", r.figures.bandwidth_3db.clone().ok());
            put("unity_gain_hz", r.figures.unity_gain.clone().ok());
            put("f_t_hz", r.device.as_ref().and_then(|d| d.f_t.clone().ok()));
        }
        Outcome::Ring(r, _) => {
            put("frequency_hz", Some(r.frequency));
            put("period_s", Some(r.period));
            put("stage_delay_s", Some(r.stage_delay));
            put("avg_power_w", Some(r.avg_power));
            put("energy_per_cycle_j", Some(r.energy_per_cycle));
        }
    }
    f
}

/// A progress bar on stderr over `len` items named `what` (`points`), drawn when `show` and
/// stderr is a terminal.
pub fn progress_bar(len: usize, what: &str, show: bool) -> ProgressBar {
    let bar = if show {
        ProgressBar::new(len as u64)
    } else {
        ProgressBar::hidden()
    };
    let template = format!("{{bar:40}} {{pos}}/{{len}} {what}, {{elapsed}} elapsed, {{eta}} left");
    if let Ok(style) = ProgressStyle::with_template(&template) {
        bar.set_style(style);
    }
    bar
}

/// Every combination of the axes' values (index into each axis), first axis slowest.
pub fn grid(axes: &[Axis]) -> Vec<Vec<usize>> {
    let mut points = vec![Vec::new()];
    for a in axes {
        let mut next = Vec::with_capacity(points.len() * a.values.len());
        for p in &points {
            for k in 0..a.values.len() {
                let mut q: Vec<usize> = p.clone();
                q.push(k);
                next.push(q);
            }
        }
        points = next;
    }
    points
}

/// Runs the points `range` of the sweep's grid (`0..` the grid's size for the whole sweep; any
/// sub-range gives exactly those rows of the whole sweep, which is what a shard needs).
/// `progress` shows a bar on stderr (hidden when stderr is not a terminal); `keep_curves`
/// keeps each point's transfer curves (within [`MAX_CURVE_SAMPLES`]).
pub fn run_sweep(
    path: &Path,
    sets: &[(String, String)],
    axes: &[Axis],
    range: std::ops::Range<usize>,
    progress: bool,
    keep_curves: bool,
) -> Vec<Row> {
    let points = grid(axes);
    let total = points.len();
    let first = range.start.min(total);
    let points: Vec<Vec<usize>> = points
        .into_iter()
        .skip(first)
        .take(range.end.min(total).saturating_sub(first))
        .collect();
    // Curves of every point while they fit; an evenly spread subset otherwise (decided per
    // point from its index, so the result does not depend on the thread count).
    let budget_per_point = MAX_CURVE_SAMPLES / total.max(1);
    let bar = progress_bar(points.len(), "points", progress);
    points
        .into_par_iter()
        .enumerate()
        .progress_with(bar)
        .map(|(n, index)| {
            // The index in the whole grid, so a shard keeps the curves the whole sweep keeps.
            let n = n + first;
            let mut local = sets.to_vec();
            let mut point = Vec::with_capacity(axes.len());
            for (a, &k) in axes.iter().zip(&index) {
                local.push((a.name.clone(), a.texts[k].clone()));
                point.push((a.name.clone(), a.values[k]));
            }
            let ring = RingParams {
                wave_samples: CURVE_SAMPLES,
                ..RingParams::default()
            };
            match run_all(path, &local, &ring, None) {
                Ok(results) => {
                    let figures = results.iter().flat_map(|(k, o)| figures(k, o)).collect();
                    let mut curves = Vec::new();
                    if keep_curves {
                        for (_, o) in &results {
                            let c = curves_of(o);
                            let size: usize = c.iter().map(|c| 2 * c.points.len()).sum();
                            let stride = size.div_ceil(budget_per_point.max(1));
                            if stride <= 1 || n % stride == 0 {
                                curves.extend(c);
                            }
                        }
                    }
                    Row {
                        point,
                        figures,
                        curves,
                        error: None,
                    }
                }
                Err(e) => Row {
                    point,
                    figures: Vec::new(),
                    curves: Vec::new(),
                    error: Some(first_line(e.message())),
                },
            }
        })
        .collect()
}

/// The first line of a message that says something (rendered diagnostics start with it).
pub(crate) fn first_line(text: &str) -> String {
    text.lines()
        .map(str::trim)
        .find(|l| !l.is_empty())
        .unwrap_or("failed")
        .to_string()
}

/// The hash of what a sweep's rows depend on, as 16 hex digits: the text of every file the
/// design read (in load order; paths left out), the `--set` values and the `--param` flags as
/// given. See [`crate::montecarlo::stable_hash`].
pub fn inputs_hash(
    design: &lamina_netlist::Design,
    sets: &[(String, String)],
    params: &[String],
) -> String {
    let sources = &design.sources;
    let texts = (0..sources.len()).map(|i| sources.text(i).as_bytes());
    let sets = sets.iter().flat_map(|(k, v)| [k.as_bytes(), v.as_bytes()]);
    let params = params.iter().map(|p| p.as_bytes());
    format!(
        "{:016x}",
        crate::montecarlo::stable_hash(
            texts
                .chain([b"sets".as_slice()])
                .chain(sets)
                .chain([b"params".as_slice()])
                .chain(params)
        )
    )
}
