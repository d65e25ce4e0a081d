//! The calibration job: fit chosen keys of a 2D-FET device card to measured drain currents,
//! and say what the data could and could not determine.
//!
//! # Data
//! A data file ([`lamina_netlist::table`]) is split into devices by `L` and `W` (the card's
//! where the file has no column), in order of first appearance. Each device is simulated at
//! its own bias points: when it has no more distinct `V_DS` than `V_GS` values its points are
//! transfer curves (one gate sweep per `V_DS`), otherwise output curves (one drain sweep per
//! `V_GS`); each sweep runs only the distinct values it needs. Curves for the report are
//! these sweeps, split further by sweep direction. Repeated points stay separate residuals
//! (a repeated sweep weighs twice). Points with `|I_D|` below the floor (default per device
//! [`crate::iv::default_floor`]: 1 pA x W/L, not below 10 pA) are left out of the objective
//! and counted.
//!
//! # Model
//! Each evaluation loads the card file afresh with the fitted keys set by `card.key`
//! overrides (the same route as `--set`; values written in the key's unit, see [`Unit`]),
//! tied keys set to the value of the key they follow, and the device's `length` and `width`
//! from the data; the file's one FET is then swept with its source grounded. Newton runs with
//! relative tolerance 1e-9 and absolute 1e-15 A and 1 nV ([`fit_sweep_params`]) so finite-difference
//! Jacobians see the model, not the solver's stopping rule. Files are read once and kept in
//! memory for the whole fit.
//!
//! # Objective
//! For each point `i` above the floor, with `I_sw = I_switch x W/L` (default
//! `I_switch` = 100 nA, the constant-current threshold criterion, common practice):
//! * subthreshold, `|I_data| < I_sw`: `r_i = w_sub log10(|I_model| / |I_data|)` (decades);
//! * above threshold: `r_i = w_on (I_model - I_data) / |I_data|` (relative).
//!
//! The weights default to `w_sub = ln 10` and `w_on = 1`: then both residuals are relative
//! errors (`ln 10 log10(a/b) = ln(a/b)`, which equals `(a - b)/b` to first order), so with
//! multiplicative measurement noise both kinds have one variance, which the standard errors
//! assume. `--weights sub=1` counts a decade of subthreshold error like a 100 % error in the
//! on-current instead. `½ Σ r_i²` is minimised by [`lamina_measure::lsq::fit`]
//! (bounded Levenberg-Marquardt, log or linear parameters, deterministic starts), whose
//! statistics (standard errors, correlations, singular values, undetermined combinations)
//! are reported with 95 % intervals from Student's t with `m - n` degrees of freedom.
//!
//! # Batches
//! [`batch`] fits the same keys to each device of a wafer or a lot on its own.

use crate::iv::{drive, unsigned_zero, Driven};
use lamina_engine::{NewtonParams, OpParams, Probe, SweepParams, System, Tolerances};
use lamina_measure::lsq::{self, Fit, FitOptions, Param, Residuals};
use lamina_netlist::catalog::{self, Setter};
use lamina_netlist::table::{Direction, Table};
use lamina_netlist::units::Dim;
use lamina_netlist::{load_with, render, Design, DiskReader, FileReader, LoadOptions, ReadError};
use std::cell::RefCell;
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

pub mod batch;

/// The subthreshold/above-threshold switch per square (A): 100 nA x W/L, the
/// constant-current threshold criterion (common practice).
pub const SWITCH_PER_SQUARE: f64 = 1e-7;

/// Solver settings of a fit's model evaluations: relative tolerance 1e-9, absolute 1e-15 A and 1e-9 V
/// (rounding leaves residuals near 1e-18 A, so tighter absolute ones do not converge).
pub fn fit_sweep_params() -> SweepParams {
    SweepParams {
        op: OpParams {
            newton: NewtonParams {
                tol: Tolerances {
                    reltol: 1e-9,
                    vntol: 1e-9,
                    abstol: 1e-15,
                },
                max_iterations: 200,
                ..NewtonParams::default()
            },
            ..OpParams::default()
        },
        ..SweepParams::default()
    }
}

/// The unit a card key's values are shown and written in: the trade's unit of its dimension.
#[derive(Clone, Debug, PartialEq)]
pub struct Unit {
    /// The unit as written (`cm^2/(V s)`; empty for a pure number).
    pub text: String,
    /// Its size in SI units.
    pub si: f64,
}

const UNITS: &[(Dim, &str)] = &[
    (Dim::ENERGY, "eV"),
    (Dim::MOBILITY, "cm^2/(V s)"),
    (Dim::RESISTANCE_WIDTH, "Ohm um"),
    (Dim::PER_AREA, "/cm^2"),
    (Dim::PER_ENERGY_AREA, "/(eV cm^2)"),
    (Dim::VELOCITY, "cm/s"),
    (Dim::LENGTH, "nm"),
    (Dim::CAPACITANCE_PER_WIDTH, "fF/um"),
    (Dim::ENERGY_PER_AREA, "J/m^2"),
];

impl Unit {
    /// The unit for `dim`.
    pub fn of(dim: Dim) -> Unit {
        if dim == Dim::NONE {
            return Unit {
                text: String::new(),
                si: 1.0,
            };
        }
        let text = UNITS
            .iter()
            .find(|u| u.0 == dim)
            .map_or_else(|| dim.unit(), |u| u.1.to_string());
        let si = lamina_netlist::values::parse_values(&format!("1 {text}"), None, 1)
            .ok()
            .and_then(|v| v.first().filter(|v| v.dim == dim).map(|v| v.si))
            .unwrap_or(1.0);
        Unit { text, si }
    }

    /// `x` (SI) in this unit.
    pub fn value(&self, x: f64) -> f64 {
        x / self.si
    }

    /// `x` (SI) as the language writes it, every digit kept (for the model's evaluations,
    /// so finite differences see every step).
    pub fn write_exact(&self, x: f64) -> String {
        if self.text.is_empty() {
            format!("{:e}", unsigned_zero(x))
        } else {
            format!("{:e} {}", unsigned_zero(self.value(x)), self.text)
        }
    }

    /// `x` (SI) as the language writes it, to nine significant digits: `52.1234567 cm^2/(V s)`.
    pub fn write(&self, x: f64) -> String {
        if self.text.is_empty() {
            crate::iv::show(x)
        } else {
            format!("{} {}", crate::iv::show(self.value(x)), self.text)
        }
    }
}

/// A numeric key of a 2D-FET card, `card.key`.
#[derive(Clone, Debug, PartialEq)]
pub struct Key {
    /// The card (`n2d`).
    pub card: String,
    /// The key (`electron_mobility`).
    pub key: String,
    /// Its dimension.
    pub dim: Dim,
}

impl Key {
    /// Reads `card.key`; the key must be a numeric key of a 2D-FET card other than the
    /// geometry, which comes from the data.
    pub fn parse(name: &str) -> Result<Key, String> {
        let Some((card, key)) = name.split_once('.') else {
            return Err(format!(
                "`{name}`: name a key of a device card as card.key, such as n2d.electron_mobility"
            ));
        };
        let specs = catalog::kind("sheet_fet").map_or(&[][..], |k| k.params);
        let numeric = || specs.iter().filter(|p| !p.text && !p.waveform);
        let Some(spec) = numeric().find(|p| p.name == key) else {
            let hint = lamina_netlist::diag::did_you_mean(key, numeric().map(|p| p.name))
                .unwrap_or_else(|| "give a numeric key of a 2D-FET card".into());
            return Err(format!(
                "`{name}`: `{key}` is no numeric key of a 2D-FET card; {hint}"
            ));
        };
        if key == "length" || key == "width" {
            return Err(format!(
                "`{name}`: the channel's {key} is each device's own, from the data's `{}` column or the card",
                if key == "length" { "L" } else { "W" }
            ));
        }
        if card.is_empty() {
            return Err(format!("`{name}`: name the card before the dot"));
        }
        Ok(Key {
            card: card.to_string(),
            key: key.to_string(),
            dim: spec.dim,
        })
    }

    /// `card.key`.
    pub fn name(&self) -> String {
        format!("{}.{}", self.card, self.key)
    }

    fn one_value(&self, text: &str) -> Result<f64, String> {
        let v = lamina_netlist::values::parse_values(text, None, 1)?;
        match v.as_slice() {
            [one] => self.check_dim(one),
            _ => Err("give one value".into()),
        }
    }

    fn check_dim(&self, v: &lamina_netlist::values::CliValue) -> Result<f64, String> {
        if v.dim == self.dim || (v.si == 0.0 && v.dim == Dim::NONE) {
            Ok(v.si)
        } else {
            Err(format!(
                "`{}` is {}, but {} is {}, such as {}",
                v.text,
                v.dim.describe(),
                self.name(),
                self.dim.describe(),
                self.dim.example()
            ))
        }
    }
}

/// One fitted key: `card.key=LO:HI[:log]`.
#[derive(Clone, Debug, PartialEq)]
pub struct FitSpec {
    /// The key.
    pub key: Key,
    /// Lower bound (SI).
    pub lo: f64,
    /// Upper bound (SI).
    pub hi: f64,
    /// Fitted on a log scale.
    pub log: bool,
    /// Start (SI), when `--start` gives one; else the card's value clamped into the box.
    pub start: Option<f64>,
}

impl FitSpec {
    /// Reads `card.key=LO:HI` or `card.key=LO:HI:log`; a unit written on `HI` only applies to
    /// both bounds (`5:200cm^2/(V s)`).
    pub fn parse(text: &str) -> Result<FitSpec, String> {
        let Some((name, range)) = text.split_once('=') else {
            return Err(format!(
                "`{text}`: expected card.key=LO:HI[:log], such as n2d.electron_mobility=5:200cm^2/(V s):log"
            ));
        };
        let key = Key::parse(name.trim())?;
        let mut parts: Vec<&str> = range.split(':').map(str::trim).collect();
        let log = parts.last() == Some(&"log");
        if log {
            parts.pop();
        }
        let [lo, hi] = parts.as_slice() else {
            return Err(format!(
                "`{text}`: give the bounds as LO:HI, optionally :log, such as {}=1:100{}:log",
                key.name(),
                Unit::of(key.dim).text
            ));
        };
        let values = lamina_netlist::values::parse_values(&format!("{lo},{hi}"), None, 2)
            .map_err(|e| format!("`{text}`: {e}"))?;
        let [lo, hi] = values.as_slice() else {
            return Err(format!("`{text}`: give two bounds"));
        };
        let lo = key.check_dim(lo).map_err(|e| format!("`{text}`: {e}"))?;
        let hi = key.check_dim(hi).map_err(|e| format!("`{text}`: {e}"))?;
        if lo >= hi {
            return Err(format!(
                "`{text}`: the lower bound must lie below the upper"
            ));
        }
        if log && lo <= 0.0 {
            return Err(format!(
                "`{text}`: a log scale needs a positive lower bound"
            ));
        }
        Ok(FitSpec {
            key,
            lo,
            hi,
            log,
            start: None,
        })
    }
}

/// How the fit runs.
#[derive(Clone, Debug, PartialEq)]
pub struct FitConfig {
    /// Fitted keys (all of one card).
    pub params: Vec<FitSpec>,
    /// `(tied key, index of the fitted key it follows)`.
    pub ties: Vec<(Key, usize)>,
    /// Weight of the log-current residuals.
    pub w_sub: f64,
    /// Weight of the relative-current residuals.
    pub w_on: f64,
    /// The switch between them per square (A); default [`SWITCH_PER_SQUARE`].
    pub switch_per_square_a: f64,
    /// Noise floor (A); default per device [`crate::iv::default_floor`].
    pub floor_a: Option<f64>,
    /// Starts of the solver.
    pub starts: usize,
}

impl Default for FitConfig {
    fn default() -> Self {
        FitConfig {
            params: Vec::new(),
            ties: Vec::new(),
            w_sub: std::f64::consts::LN_10,
            w_on: 1.0,
            switch_per_square_a: SWITCH_PER_SQUARE,
            floor_a: None,
            starts: 1,
        }
    }
}

/// Reads `--tie KEY=FITTED` against the fitted keys.
pub fn parse_tie(text: &str, params: &[FitSpec]) -> Result<(Key, usize), String> {
    let Some((a, b)) = text.split_once('=') else {
        return Err(format!(
            "`{text}`: expected KEY=FITTED_KEY, such as n2d.drain_resistance=n2d.source_resistance"
        ));
    };
    let (a, b) = (Key::parse(a.trim())?, Key::parse(b.trim())?);
    let Some(k) = params.iter().position(|p| p.key == b) else {
        return Err(format!(
            "`{text}`: {} is not fitted; give it with --fit",
            b.name()
        ));
    };
    if a.dim != b.dim {
        return Err(format!(
            "`{text}`: {} is {} but {} is {}",
            a.name(),
            a.dim.describe(),
            b.name(),
            b.dim.describe()
        ));
    }
    if params.iter().any(|p| p.key == a) {
        return Err(format!("`{text}`: {} is fitted itself", a.name()));
    }
    Ok((a, k))
}

/// Applies `--start KEY=VALUE` to the fitted key it names.
pub fn apply_start(text: &str, params: &mut [FitSpec]) -> Result<(), String> {
    let Some((name, value)) = text.split_once('=') else {
        return Err(format!("`{text}`: expected card.key=VALUE"));
    };
    let key = Key::parse(name.trim())?;
    let Some(p) = params.iter_mut().find(|p| p.key == key) else {
        return Err(format!(
            "`{text}`: {} is not fitted; give it with --fit",
            key.name()
        ));
    };
    let v = key
        .one_value(value.trim())
        .map_err(|e| format!("`{text}`: {e}"))?;
    if !(v >= p.lo && v <= p.hi) {
        return Err(format!("`{text}`: the start lies outside the bounds"));
    }
    p.start = Some(v);
    Ok(())
}

/// Which residual a point gives.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// Log current (subthreshold).
    Sub,
    /// Relative current (above threshold).
    On,
    /// Below the floor: left out.
    Floor,
}

/// One measured point.
#[derive(Clone, Debug, PartialEq)]
pub struct Point {
    /// Line in the data file.
    pub line: usize,
    /// Device index.
    pub device: usize,
    /// Curve index.
    pub curve: usize,
    /// Gate-source voltage (V).
    pub vgs: f64,
    /// Drain-source voltage (V).
    pub vds: f64,
    /// Measured drain current (A).
    pub id: f64,
    /// Its residual kind.
    pub kind: Kind,
    sweep: usize,
    pos: usize,
}

/// One sweep of the simulation: a fixed gate or drain voltage, the other swept.
#[derive(Clone, Debug, PartialEq)]
struct Sweep {
    gate_fixed: bool,
    fixed: f64,
    values: Vec<f64>,
}

/// One device of the data.
#[derive(Clone, Debug, PartialEq)]
pub struct Device {
    /// Channel length (m).
    pub length_m: f64,
    /// Channel width (m).
    pub width_m: f64,
    /// The switch current (A).
    pub switch_a: f64,
    /// The floor (A).
    pub floor_a: f64,
    /// Transfer curves (gate swept) or output curves (drain swept).
    pub transfer: bool,
    sweeps: Vec<Sweep>,
}

/// One curve of the report.
#[derive(Clone, Debug, PartialEq)]
pub struct Curve {
    /// Device index.
    pub device: usize,
    /// The fixed bias: `V_DS` of a transfer curve, `V_GS` of an output curve (V).
    pub fixed_v: f64,
    /// Sweep direction, where the file gives it.
    pub direction: Option<Direction>,
    /// Its points (indices into [`Dataset::points`]).
    pub points: Vec<usize>,
}

/// Measured points grouped for simulation and report.
#[derive(Clone, Debug, PartialEq)]
pub struct Dataset {
    /// Devices.
    pub devices: Vec<Device>,
    /// Curves.
    pub curves: Vec<Curve>,
    /// Points, in file order.
    pub points: Vec<Point>,
}

fn distinct(mut v: Vec<f64>) -> Vec<f64> {
    v.sort_by(f64::total_cmp);
    v.dedup();
    v
}

/// Groups the table (see the module doc); `card_lw` is the card's `(L, W)` for rows without.
pub fn group(table: &Table, card_lw: (f64, f64), cfg: &FitConfig) -> Dataset {
    let mut devices: Vec<Device> = Vec::new();
    let mut rows_of: Vec<Vec<usize>> = Vec::new();
    for (k, r) in table.rows.iter().enumerate() {
        let (l, w) = (
            r.length_m.unwrap_or(card_lw.0),
            r.width_m.unwrap_or(card_lw.1),
        );
        let d = match devices
            .iter()
            .position(|d| d.length_m == l && d.width_m == w)
        {
            Some(d) => d,
            None => {
                devices.push(Device {
                    length_m: l,
                    width_m: w,
                    switch_a: cfg.switch_per_square_a * w / l,
                    floor_a: cfg
                        .floor_a
                        .unwrap_or_else(|| crate::iv::default_floor(w / l)),
                    transfer: true,
                    sweeps: Vec::new(),
                });
                rows_of.push(Vec::new());
                devices.len() - 1
            }
        };
        rows_of[d].push(k);
    }
    let mut points = Vec::with_capacity(table.rows.len());
    let mut curves: Vec<Curve> = Vec::new();
    for (d, rows) in rows_of.iter().enumerate() {
        let rs = || rows.iter().map(|&k| &table.rows[k]);
        let n_vds = distinct(rs().map(|r| r.vds).collect()).len();
        let n_vgs = distinct(rs().map(|r| r.vgs).collect()).len();
        let transfer = n_vds <= n_vgs;
        let dev = &mut devices[d];
        dev.transfer = transfer;
        let split = |r: &lamina_netlist::table::Row| {
            if transfer {
                (r.vds, r.vgs)
            } else {
                (r.vgs, r.vds)
            }
        };
        let fixed = distinct(rs().map(|r| split(r).0).collect());
        dev.sweeps = fixed
            .iter()
            .map(|&f| Sweep {
                gate_fixed: !transfer,
                fixed: f,
                values: distinct(
                    rs().filter(|r| split(r).0 == f)
                        .map(|r| split(r).1)
                        .collect(),
                ),
            })
            .collect();
        for r in rs() {
            let (f, v) = split(r);
            let sweep = fixed.iter().position(|&x| x == f).unwrap_or(0);
            let pos = dev.sweeps[sweep]
                .values
                .iter()
                .position(|&x| x == v)
                .unwrap_or(0);
            let curve = match curves
                .iter()
                .position(|c| c.device == d && c.fixed_v == f && c.direction == r.direction)
            {
                Some(c) => c,
                None => {
                    curves.push(Curve {
                        device: d,
                        fixed_v: unsigned_zero(f),
                        direction: r.direction,
                        points: Vec::new(),
                    });
                    curves.len() - 1
                }
            };
            curves[curve].points.push(points.len());
            let kind = if r.id.abs() < dev.floor_a || r.id == 0.0 {
                Kind::Floor
            } else if r.id.abs() < dev.switch_a {
                Kind::Sub
            } else {
                Kind::On
            };
            points.push(Point {
                line: r.line,
                device: d,
                curve,
                vgs: r.vgs,
                vds: r.vds,
                id: r.id,
                kind,
                sweep,
                pos,
            });
        }
    }
    // Points back in file order, with the curves' indices following them.
    let mut order: Vec<usize> = (0..points.len()).collect();
    order.sort_by_key(|&k| points[k].line);
    let mut new_index = vec![0; points.len()];
    for (new, &old) in order.iter().enumerate() {
        new_index[old] = new;
    }
    for c in &mut curves {
        for p in &mut c.points {
            *p = new_index[*p];
        }
        c.points.sort_unstable();
    }
    let points = order.into_iter().map(|k| points[k].clone()).collect();
    Dataset {
        devices,
        curves,
        points,
    }
}

/// A reader that keeps every file it read, so a fit reads each file once.
#[derive(Default)]
struct Cached {
    files: RefCell<HashMap<PathBuf, Result<String, String>>>,
}

impl FileReader for Cached {
    fn read(&self, path: &Path, max_bytes: usize) -> Result<String, ReadError> {
        if let Some(kept) = self.files.borrow().get(path) {
            return kept.clone().map_err(ReadError::Other);
        }
        let read = DiskReader.read(path, max_bytes);
        if let Ok(text) = &read {
            self.files
                .borrow_mut()
                .insert(path.to_path_buf(), Ok(text.clone()));
        }
        read
    }
}

/// The device model seen by the fit: the card file, the keys it sets, the devices to run.
pub struct Model {
    path: PathBuf,
    reader: Cached,
    keys: Vec<Key>,
    ties: Vec<(Key, usize)>,
    card: String,
    sweep: SweepParams,
    /// Device evaluations (one per device per parameter set).
    pub evaluations: usize,
}

impl Model {
    /// A model of the card file at `path` with `keys` fitted and `ties` following them.
    pub fn new(path: &Path, keys: Vec<Key>, ties: Vec<(Key, usize)>) -> Model {
        let card = keys.first().map_or_else(String::new, |k| k.card.clone());
        Model {
            path: path.to_path_buf(),
            reader: Cached::default(),
            keys,
            ties,
            card,
            sweep: fit_sweep_params(),
            evaluations: 0,
        }
    }

    /// The overrides of one evaluation: fitted and tied keys at `values`, and the device's
    /// geometry where given.
    pub fn overrides(&self, values: &[f64], geometry: Option<(f64, f64)>) -> Vec<(String, String)> {
        let mut o: Vec<(String, String)> = self
            .keys
            .iter()
            .zip(values)
            .map(|(k, &v)| (k.name(), Unit::of(k.dim).write_exact(v)))
            .collect();
        for (k, to) in &self.ties {
            o.push((k.name(), Unit::of(k.dim).write_exact(values[*to])));
        }
        if let Some((l, w)) = geometry {
            o.push((format!("{}.length", self.card), format!("{l:e} m")));
            o.push((format!("{}.width", self.card), format!("{w:e} m")));
        }
        o
    }

    /// Loads the card file with `overrides`.
    pub fn load(&self, overrides: Vec<(String, String)>) -> Result<Design, String> {
        let options = LoadOptions {
            overrides,
            ..LoadOptions::default()
        };
        load_with(&self.path, &options, &self.reader)
            .map_err(|f| render(&f.sources, &f.diagnostics))
    }

    /// Drain currents of every device's sweeps at `values`.
    fn run(&mut self, data: &Dataset, values: &[f64]) -> Result<Vec<Vec<Vec<f64>>>, String> {
        data.devices
            .iter()
            .map(|dev| {
                self.evaluations += 1;
                let design =
                    self.load(self.overrides(values, Some((dev.length_m, dev.width_m))))?;
                run_sweeps(design, &dev.sweeps, &self.sweep)
            })
            .collect()
    }

    /// The model current at every point of `data`, in its order.
    pub fn currents(&mut self, data: &Dataset, values: &[f64]) -> Result<Vec<f64>, String> {
        let runs = self.run(data, values)?;
        Ok(data
            .points
            .iter()
            .map(|p| runs[p.device][p.sweep][p.pos])
            .collect())
    }
}

/// Runs the sweeps of one device: for each, the fixed source set and the other swept.
fn run_sweeps(
    design: Design,
    sweeps: &[Sweep],
    params: &SweepParams,
) -> Result<Vec<Vec<f64>>, String> {
    let mut c = design.circuit;
    let Driven { gate, drain, .. } = drive(&mut c, "fit")?;
    let mut sys = System::new(c).map_err(|e| e.to_string())?;
    let probe = [Probe::Current(drain)];
    let gmin = params.op.gmin;
    sweeps
        .iter()
        .map(|s| {
            let (fixed, swept) = if s.gate_fixed {
                (gate, drain)
            } else {
                (drain, gate)
            };
            sys.set_source_value(fixed, s.fixed)
                .map_err(|e| e.to_string())?;
            let res = sys
                .dc_sweep(swept, &s.values, &probe, params)
                .map_err(|e| e.to_string())?;
            // As in `iv::run_iv_with`: the drain source's branch current, sign turned, less
            // the gmin current at the drain node.
            Ok(res.signals[0]
                .iter()
                .zip(&s.values)
                .map(|(i, &v)| {
                    let vd = if s.gate_fixed { v } else { s.fixed };
                    unsigned_zero(-i - gmin * vd)
                })
                .collect())
        })
        .collect()
}

/// The residual of one point (see the module doc).
pub fn residual(kind: Kind, model: f64, data: f64, cfg: &FitConfig) -> Option<f64> {
    match kind {
        Kind::Sub => Some(cfg.w_sub * (model.abs().max(f64::MIN_POSITIVE) / data.abs()).log10()),
        Kind::On => Some(cfg.w_on * (model - data) / data.abs()),
        Kind::Floor => None,
    }
}

struct Objective<'a> {
    model: &'a mut Model,
    data: &'a Dataset,
    cfg: &'a FitConfig,
    used: usize,
}

impl Residuals for Objective<'_> {
    fn len(&self) -> usize {
        self.used
    }
    fn eval(&mut self, p: &[f64], out: &mut [f64]) -> Result<(), String> {
        let cur = self.model.currents(self.data, p)?;
        let mut k = 0;
        for (pt, &im) in self.data.points.iter().zip(&cur) {
            if let Some(r) = residual(pt.kind, im, pt.id, self.cfg) {
                out[k] = r;
                k += 1;
            }
        }
        Ok(())
    }
}

/// Residual statistics of one curve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CurveStats {
    /// Log-current residuals.
    pub sub: usize,
    /// Their RMS (decades, weight included).
    pub rms_sub: Option<f64>,
    /// Relative-current residuals.
    pub on: usize,
    /// Their RMS (relative, weight included).
    pub rms_on: Option<f64>,
    /// Points below the floor.
    pub below_floor: usize,
}

/// What a fit found.
#[derive(Clone, Debug)]
pub struct Outcome {
    /// The fitted keys.
    pub params: Vec<FitSpec>,
    /// The starts used (SI).
    pub start: Vec<f64>,
    /// Tied keys.
    pub ties: Vec<(Key, usize)>,
    /// The solver's result (values in SI).
    pub fit: Fit,
    /// 95 % intervals (SI), where a standard error exists.
    pub intervals: Vec<Option<(f64, f64)>>,
    /// The data as grouped.
    pub data: Dataset,
    /// Model current at each point at the optimum (A).
    pub model: Vec<f64>,
    /// Per curve.
    pub stats: Vec<CurveStats>,
    /// What the data cannot determine, in words.
    pub findings: Vec<String>,
    /// Device evaluations (loads and sweeps of one device).
    pub device_evaluations: usize,
    /// Wall time (s).
    pub wall_s: f64,
}

/// What [`inspect`] reads from the card file.
#[derive(Clone, Debug, PartialEq)]
pub struct CardFacts {
    /// The FET's channel length and width (m), as resolved.
    pub length_width_m: (f64, f64),
    /// Each key's value as the file resolves it (SI), where the card has one.
    pub values: Vec<Option<f64>>,
}

/// Checks the card file against the fit: one 2D-channel FET made from the fitted keys' card,
/// whose instance sets none of the fitted or tied keys (nor `length`/`width` where the data
/// gives them), and what it reads of the card ([`CardFacts`]).
pub fn inspect(model: &Model, keys: &[Key], data_has_geometry: bool) -> Result<CardFacts, String> {
    let design = model.load(Vec::new())?;
    let fet = crate::iv::find_fet(&design.circuit)?;
    let name = design.circuit.element_name(fet).to_string();
    let (Some(card), Some(origins)) = (design.sheet_card(fet), design.sheet_card_origins(fet))
    else {
        return Err(format!(
            "`{name}` is not a 2D-channel FET: a fit needs a card"
        ));
    };
    let mut check = vec!["length", "width"];
    check.truncate(if data_has_geometry { 2 } else { 0 });
    for k in keys {
        if k.card != origins.device() {
            return Err(format!(
                "{}: the file's FET `{name}` is made from the card `{}`, not `{}`",
                k.name(),
                origins.device(),
                k.card
            ));
        }
    }
    for key in keys.iter().map(|k| k.key.as_str()).chain(check) {
        if origins.setter(key) == Setter::Instance {
            return Err(format!(
                "the instance `{name}` sets `{key}` itself, so a card value cannot reach it: \
                 move it to the card `{}` (or leave it out) to fit with this file",
                origins.device()
            ));
        }
    }
    let resolved = catalog::resolved_values(card, origins);
    let values = keys
        .iter()
        .map(|k| {
            resolved.iter().find(|v| v.key == k.key).map(|v| {
                if v.unit == "eV" {
                    v.value * lamina_devices::physics::Q
                } else {
                    v.value
                }
            })
        })
        .collect();
    Ok(CardFacts {
        length_width_m: (card.length, card.width),
        values,
    })
}

/// The two-sided 95 % quantile of Student's t with `dof` degrees of freedom (Cornish-Fisher
/// expansion about the normal quantile 1.959964; Abramowitz and Stegun 26.7.5, better than
/// 1e-3 from 3 degrees of freedom on).
pub fn t95(dof: usize) -> f64 {
    let z: f64 = 1.959_963_985;
    let n = dof.max(1) as f64;
    let g1 = (z.powi(3) + z) / 4.0;
    let g2 = (5.0 * z.powi(5) + 16.0 * z.powi(3) + 3.0 * z) / 96.0;
    let g3 = (3.0 * z.powi(7) + 19.0 * z.powi(5) + 17.0 * z.powi(3) - 15.0 * z) / 384.0;
    let g4 = (79.0 * z.powi(9) + 776.0 * z.powi(7) + 1482.0 * z.powi(5)
        - 1920.0 * z.powi(3)
        - 945.0 * z)
        / 92160.0;
    z + g1 / n + g2 / n.powi(2) + g3 / n.powi(3) + g4 / n.powi(4)
}

/// Runs the fit of `cfg` to `data` with the card file of `model`.
pub fn run_fit(
    model: &mut Model,
    data: Dataset,
    cfg: &FitConfig,
    start: Vec<f64>,
) -> Result<Outcome, String> {
    let t0 = Instant::now();
    let params: Vec<Param> = cfg
        .params
        .iter()
        .zip(&start)
        .map(|(p, &s)| Param {
            name: p.key.name(),
            lo: p.lo,
            hi: p.hi,
            log: p.log,
            start: s,
        })
        .collect();
    let used = data.points.iter().filter(|p| p.kind != Kind::Floor).count();
    let first = model.evaluations;
    let fit = {
        let mut obj = Objective {
            model,
            data: &data,
            cfg,
            used,
        };
        lsq::fit(
            &mut obj,
            &params,
            &FitOptions {
                starts: cfg.starts,
                ..FitOptions::default()
            },
        )?
    };
    let cur = model.currents(&data, &fit.values)?;
    let device_evaluations = model.evaluations - first;
    Ok(Outcome::assemble(
        cfg,
        data,
        start,
        fit,
        cur,
        device_evaluations,
        t0.elapsed().as_secs_f64(),
    ))
}

impl Outcome {
    /// The outcome of a solver's result `fit` on `data` with the model currents `model` at
    /// its optimum: the 95 % intervals, the residual statistics per curve and the findings
    /// derived here, so a fit run here and one read back from a shard's part report alike.
    pub fn assemble(
        cfg: &FitConfig,
        data: Dataset,
        start: Vec<f64>,
        fit: Fit,
        model: Vec<f64>,
        device_evaluations: usize,
        wall_s: f64,
    ) -> Outcome {
        let used = data.points.iter().filter(|p| p.kind != Kind::Floor).count();
        let t = t95(used.saturating_sub(cfg.params.len()));
        let intervals = fit
            .std_errors
            .iter()
            .zip(&fit.values)
            .zip(&cfg.params)
            .map(|((se, &v), p)| {
                se.map(|se| {
                    if p.log {
                        let f = (t * se / v).exp();
                        (v / f, v * f)
                    } else {
                        (v - t * se, v + t * se)
                    }
                })
            })
            .collect();
        let stats = data
            .curves
            .iter()
            .map(|c| {
                let mut s = CurveStats {
                    sub: 0,
                    rms_sub: None,
                    on: 0,
                    rms_on: None,
                    below_floor: 0,
                };
                let (mut ss, mut so) = (0.0, 0.0);
                for &k in &c.points {
                    let p = &data.points[k];
                    match (p.kind, residual(p.kind, model[k], p.id, cfg)) {
                        (Kind::Sub, Some(r)) => {
                            s.sub += 1;
                            ss += r * r;
                        }
                        (Kind::On, Some(r)) => {
                            s.on += 1;
                            so += r * r;
                        }
                        _ => s.below_floor += 1,
                    }
                }
                s.rms_sub = (s.sub > 0).then(|| (ss / s.sub as f64).sqrt());
                s.rms_on = (s.on > 0).then(|| (so / s.on as f64).sqrt());
                s
            })
            .collect();
        let findings = findings(&fit, &cfg.params);
        Outcome {
            params: cfg.params.clone(),
            start,
            ties: cfg.ties.clone(),
            fit,
            intervals,
            data,
            model,
            stats,
            findings,
            device_evaluations,
            wall_s,
        }
    }
}

/// Why [`fit_table`] gave no fit.
#[derive(Clone, Debug, PartialEq)]
pub enum FitFailure {
    /// The card file does not suit the keys (another card, keys its instance sets): a usage
    /// fault.
    Setup(String),
    /// The model or the solver failed.
    Fit(String),
}

/// The whole fit of `cfg` to `table` with the card file at `card`: the file inspected
/// ([`prepare`]), the data grouped, the starts chosen and the solver run.
pub fn fit_table(card: &Path, table: &Table, cfg: &FitConfig) -> Result<Outcome, FitFailure> {
    let facts = prepare(card, cfg, has_geometry(table))?;
    fit_prepared(card, table, cfg, &facts).map_err(FitFailure::Fit)
}

/// Whether any row of `table` gives the channel's length or width.
pub fn has_geometry(table: &Table) -> bool {
    table
        .rows
        .iter()
        .any(|r| r.length_m.is_some() || r.width_m.is_some())
}

/// Checks the card file at `card` against the fitted and tied keys of `cfg` ([`inspect`];
/// `geometry`: whether the data give lengths or widths) and reads what the fits need of it.
pub fn prepare(card: &Path, cfg: &FitConfig, geometry: bool) -> Result<CardFacts, FitFailure> {
    let keys: Vec<Key> = cfg.params.iter().map(|p| p.key.clone()).collect();
    let all: Vec<Key> = keys
        .iter()
        .cloned()
        .chain(cfg.ties.iter().map(|t| t.0.clone()))
        .collect();
    let model = Model::new(card, keys.clone(), cfg.ties.clone());
    let facts = inspect(&model, &keys, geometry).map_err(FitFailure::Setup)?;
    inspect(&model, &all, false).map_err(FitFailure::Setup)?;
    Ok(facts)
}

/// The fit of `cfg` to `table` with the card file at `card`, already checked by [`prepare`],
/// which read `facts`.
pub fn fit_prepared(
    card: &Path,
    table: &Table,
    cfg: &FitConfig,
    facts: &CardFacts,
) -> Result<Outcome, String> {
    let keys: Vec<Key> = cfg.params.iter().map(|p| p.key.clone()).collect();
    let mut model = Model::new(card, keys, cfg.ties.clone());
    let data = group(table, facts.length_width_m, cfg);
    let start = starts(&cfg.params, &facts.values);
    run_fit(&mut model, data, cfg, start)
}

/// The statements of what the data cannot determine (see [`lamina_measure::lsq`]): weak
/// combinations, strongly correlated pairs and parameters at a bound.
pub fn findings(fit: &Fit, params: &[FitSpec]) -> Vec<String> {
    let name = |k: usize| params[k].key.key.clone();
    let list = |ks: &[usize]| -> String {
        let names: Vec<String> = ks.iter().map(|&k| name(k)).collect();
        match names.as_slice() {
            [] => String::new(),
            [one] => one.clone(),
            [init @ .., last] => format!("{} and {last}", init.join(", ")),
        }
    };
    let mut out = Vec::new();
    let mut named: Vec<(usize, usize)> = Vec::new();
    for w in &fit.weak {
        let ks: Vec<usize> = w.parameters.iter().map(|p| p.0).collect();
        if ks.len() == 1 {
            out.push(format!(
                "{} is not determined by these data (relative singular value {:.1e})",
                list(&ks),
                w.relative_singular_value
            ));
        } else {
            out.push(format!(
                "{} cannot be told apart with these data: only a combination is determined \
                 (relative singular value {:.1e}, standard error {:.2} along it)",
                list(&ks),
                w.relative_singular_value,
                w.std_error
            ));
            for a in &ks {
                for b in &ks {
                    named.push((*a, *b));
                }
            }
        }
    }
    for &(a, b, rho) in &fit.correlated {
        if !named.contains(&(a, b)) {
            out.push(format!(
                "{} and {} are strongly correlated (correlation {rho:+.3}): the data fix a \
                 combination better than either",
                name(a),
                name(b)
            ));
        }
    }
    for (k, at) in fit.at_bound.iter().enumerate() {
        if *at {
            out.push(format!(
                "{} ended at a bound: widen its range or fix it; its error is not estimated",
                name(k)
            ));
        }
    }
    out
}

/// Starting values: `--start`, else the card's value, else the catalogue default, else the
/// middle of the box (geometric on a log scale); kept at least 1 % of the box (in the fitted
/// variable) from either bound, where the solver's bounded variable can still move.
pub fn starts(params: &[FitSpec], card_values: &[Option<f64>]) -> Vec<f64> {
    params
        .iter()
        .zip(card_values)
        .map(|(p, card)| {
            let middle = if p.log {
                (p.lo * p.hi).sqrt()
            } else {
                0.5 * (p.lo + p.hi)
            };
            let default = catalog::kind("sheet_fet")
                .and_then(|k| k.params.iter().find(|s| s.name == p.key.key))
                .and_then(|s| s.default);
            let x = p.start.or(*card).or(default).unwrap_or(middle);
            if p.log {
                let (a, b) = (p.lo.ln(), p.hi.ln());
                let m = 0.01 * (b - a);
                x.max(p.lo).ln().clamp(a + m, b - m).exp()
            } else {
                let m = 0.01 * (p.hi - p.lo);
                x.clamp(p.lo + m, p.hi - m)
            }
        })
        .collect()
}

/// The file of a design that defines a card: its name as the design loaded it and its text.
#[derive(Clone, Debug, PartialEq)]
pub struct CardSource {
    /// The file's name.
    pub name: PathBuf,
    /// Its text.
    pub text: String,
}

/// The file of the design at `design_path` that defines the card `card`.
pub fn card_source(design_path: &Path, card: &str) -> Result<CardSource, String> {
    let design = lamina_netlist::load_file(design_path, &LoadOptions::default())
        .map_err(|f| render(&f.sources, &f.diagnostics))?;
    let s = &design.sources;
    let file = (0..s.len())
        .find(|&f| lamina_netlist::rewrite::defines_card(s.text(f), card))
        .ok_or_else(|| {
            format!(
                "no file of {} defines the card `{card}`",
                design_path.display()
            )
        })?;
    Ok(CardSource {
        name: PathBuf::from(s.name(file)),
        text: s.text(file).to_string(),
    })
}

/// The fitted card: the text of `source` (the file that defines the card, [`card_source`])
/// with the fitted and tied keys set.
pub fn fitted_card(source: &CardSource, o: &Outcome) -> Result<String, String> {
    let card = &o.params[0].key.card;
    let mut values: Vec<(String, String)> = o
        .params
        .iter()
        .zip(&o.fit.values)
        .map(|(p, &v)| (p.key.key.clone(), Unit::of(p.key.dim).write(v)))
        .collect();
    for (k, to) in &o.ties {
        values.push((k.key.clone(), Unit::of(k.dim).write(o.fit.values[*to])));
    }
    lamina_netlist::rewrite::set_card_keys(&source.text, card, &values)
}

/// The `--set` flags that put the fitted values into any file using the card.
pub fn set_flags(o: &Outcome) -> Vec<String> {
    let mut v: Vec<String> = o
        .params
        .iter()
        .zip(&o.fit.values)
        .map(|(p, &x)| format!("{}={}", p.key.name(), Unit::of(p.key.dim).write(x)))
        .collect();
    for (k, to) in &o.ties {
        v.push(format!(
            "{}={}",
            k.name(),
            Unit::of(k.dim).write(o.fit.values[*to])
        ));
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every numeric key's unit parses back to its dimension.
    #[test]
    fn units_round_trip() {
        for p in catalog::kind("sheet_fet").unwrap().params {
            if p.text || p.waveform {
                continue;
            }
            let u = Unit::of(p.dim);
            let x = 1.2345e-3 * u.si;
            let back = lamina_netlist::values::parse_values(&u.write(x), None, 1).unwrap();
            assert_eq!(back[0].dim, p.dim, "{}", p.name);
            assert!((back[0].si - x).abs() <= 1e-12 * x.abs(), "{}", p.name);
        }
    }

    /// The 95 % t quantiles of a standard table (Abramowitz and Stegun, table 26.10).
    #[test]
    fn t_quantiles() {
        for (dof, want) in [(5, 2.571), (10, 2.228), (30, 2.042), (120, 1.980)] {
            assert!((t95(dof) - want).abs() < 2e-3, "{dof}: {}", t95(dof));
        }
    }

    #[test]
    fn fit_flags_parse_with_units_and_refuse_what_they_must() {
        let f = FitSpec::parse("n2d.electron_mobility=5:200cm^2/(V s):log").unwrap();
        assert!(f.log && (f.lo - 5e-4).abs() < 1e-18 && (f.hi - 2e-2).abs() < 1e-16);
        let g = FitSpec::parse("n2d.source_resistance=0:5kOhm um").unwrap();
        assert!(!g.log && g.lo == 0.0 && (g.hi - 5e-3).abs() < 1e-15);
        for bad in [
            "n2d.electron_mobility=5:200V",
            "n2d.electron_mobilty=5:200cm^2/(V s)",
            "n2d.length=1:2nm",
            "electron_mobility=5:200cm^2/(V s)",
            "n2d.electron_mobility=200:5cm^2/(V s)",
            "n2d.gate_work_function=0:4eV:log",
            "n2d.gate_work_function=4eV",
        ] {
            assert!(FitSpec::parse(bad).is_err(), "{bad}");
        }
        assert!(FitSpec::parse("n2d.electron_mobilty=5:200cm^2/(V s)")
            .unwrap_err()
            .contains("electron_mobility"));
    }
}
