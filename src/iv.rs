//! The device-curve job: drain current of the one FET in a file over a grid of gate and drain
//! voltages, source grounded, and the figures of the device's branch.
//!
//! # Which branch
//! A 2D-channel FET can conduct electrons at positive and holes at negative gate voltage. The
//! figures are taken on one branch, decided by the first rule that applies, and the report
//! says which:
//! 1. `--polarity n|p` ([`IvConfig::polarity`]);
//! 2. the device kind, where it fixes the carrier (square-law n-FET and p-FET);
//! 3. the currents at the smallest nonzero `|V_DS|` of the grid: the end of the gate sweep
//!    whose `|I_D|` is at least [`POLARITY_RATIO`] times that of the other end decides: the
//!    most positive `V_GS` the n (electron) branch, the most negative the p (hole) branch. A
//!    small `V_DS` because there the gate controls the whole channel; at a large one the drain
//!    end of an n device already conducts holes (the demo n-device carries 7.5e-7 A at
//!    `V_GS = -0.6 V`, `V_DS = 1 V`, and 1.2e-20 A at 50 mV). Ends closer than that leave the
//!    branch undecided, and the figures that need it are not reported.
//!
//! On the transfer curve at the largest `|V_DS|`, the branch runs from the smallest `|I_D|` of
//! the sweep outward: towards positive `V_GS` for n, towards negative for p.
//!
//! # Figures
//! Each is defined in [`METRIC_DEFINITIONS`]; a figure that cannot be taken is reported as not
//! reported, with the reason, never as a number. Criteria scale with the device's `W/L`, read
//! from its card ([`read_device`]): threshold current 100 nA x W/L, swing floor
//! 1 pA x W/L (not below [`MIN_FLOOR_A`]). The swing is held against the thermal limit
//! `ln(10) kT/q` at the card's temperature (S. M. Sze and K. K. Ng, Physics of Semiconductor
//! Devices, 3rd ed., 2007, ch. 6): below it by no more than the solver's rounding it is
//! reported as the limit, below it by more it is refused.
//!
//! # Rate-aware sweeps
//! [`run_swept`] ramps the gate at a stated rate through the grid in a transient (up, down or
//! both ways) instead of solving each point at rest, so charge that lags the gate (slow traps)
//! shows; [`hysteresis`] reads the width of a both-way sweep at a stated current.

use lamina_devices::physics::{K_B, Q};
use lamina_devices::sheet_fet::leakage::LeakageMode;
use lamina_devices::{SheetFet, SheetFetCard};
use lamina_engine::elements::{VoltageSource, Waveform};
use lamina_engine::{
    Circuit, Control, ElementId, NodeId, OpParams, Output, Probe, Start, SweepParams, System,
    TransientParams,
};
use lamina_measure::device as measure;
use lamina_netlist::units::Dim;
use lamina_netlist::Design;

/// Most bias points of one `iv` grid (gate values times drain values).
pub const MAX_IV_POINTS: usize = 1_000_000;

/// Parses a voltage flag: `LIST` (`0,0.1,0.5`) or `START:STOP:STEP` (`0:1:0.05`, stop
/// included), in volts unless a unit is written (`-600:1000:20 mV`).
pub fn parse_values(flag: &str, text: &str) -> Result<Vec<f64>, String> {
    parse_quantity(flag, text, "V", Dim::VOLTAGE, MAX_IV_POINTS)
}

/// Parses a flag that takes one value of dimension `dim`, in `unit` unless one is written.
pub fn parse_one(flag: &str, text: &str, unit: &str, dim: Dim) -> Result<f64, String> {
    match parse_quantity(flag, text, unit, dim, 2)?.as_slice() {
        [one] => Ok(*one),
        _ => Err(format!(
            "{flag} {text}: give one value, not a list or a range"
        )),
    }
}

fn parse_quantity(
    flag: &str,
    text: &str,
    unit: &str,
    dim: Dim,
    max: usize,
) -> Result<Vec<f64>, String> {
    let values = lamina_netlist::values::parse_values(text, Some(unit), max)
        .map_err(|why| format!("{flag} {text}: {why}"))?;
    if let Some(v) = values.iter().find(|v| v.dim != dim) {
        return Err(format!(
            "{flag} {text}: `{}` is {}, not {}",
            v.text,
            v.dim.describe(),
            dim.describe()
        ));
    }
    Ok(values.iter().map(|v| v.si).collect())
}

/// Checks the size of a grid before it is run.
pub fn check_grid(vgs: &[f64], vds: &[f64]) -> Result<(), String> {
    match vgs.len().checked_mul(vds.len()) {
        Some(n) if n <= MAX_IV_POINTS => Ok(()),
        _ => Err(format!(
            "the grid has {} x {} bias points, more than the limit of {MAX_IV_POINTS}; use larger steps",
            vgs.len(),
            vds.len()
        )),
    }
}

/// One bias point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct IvPoint {
    /// Gate-source voltage (V).
    pub vgs: f64,
    /// Drain-source voltage (V).
    pub vds: f64,
    /// Current into the drain (A).
    pub id: f64,
    /// Current into the gate (A): the gate leakage of a 2D FET whose card has tunnelling data
    /// (`lamina_devices::sheet_fet::leakage`), zero otherwise.
    pub ig: f64,
}

/// `x` with a negative zero made positive, so no report shows `-0`.
pub fn unsigned_zero(x: f64) -> f64 {
    x + 0.0
}

/// The circuit's one FET (an element with drain, gate and source pins).
pub fn find_fet(c: &Circuit) -> Result<ElementId, String> {
    let found: Vec<ElementId> = c
        .elements()
        .filter(|&e| {
            let t = c.element_terminals(e);
            t.len() == 3 && t[0] == "drain" && t[1] == "gate" && t[2] == "source"
        })
        .collect();
    match found.as_slice() {
        [one] => Ok(*one),
        [] => Err("the file has no FET (an element with drain, gate and source pins)".into()),
        many => Err(format!(
            "the file has {} FETs; `lamina iv` and `lamina cv` take a file with one",
            many.len()
        )),
    }
}

fn driving_source(c: &Circuit, node: NodeId) -> Option<ElementId> {
    c.elements().find(|&e| {
        c.element_kind(e) == "voltage source" && c.element_pins(e) == [node, Circuit::GROUND]
    })
}

/// Whether the file has what `iv` needs: exactly one FET, its source at ground, its drain and
/// gate not at ground. A file without it has an error of its own, not a failed analysis.
pub fn check_device(design: &Design) -> Result<(), String> {
    let c = &design.circuit;
    check_pins(c, find_fet(c)?)
}

/// The FET's source at ground, its drain and gate not.
fn check_pins(c: &Circuit, fet: ElementId) -> Result<(), String> {
    let pins = c.element_pins(fet);
    if !pins[2].is_ground() {
        return Err(format!(
            "the FET `{}` must have its source at ground, not at `{}`",
            c.element_name(fet),
            c.node_name(pins[2])
        ));
    }
    if pins[0].is_ground() || pins[1].is_ground() {
        return Err("the FET's drain and gate must not be at ground".into());
    }
    Ok(())
}

/// The file's one FET and the voltage sources on its gate and drain.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Driven {
    /// The FET.
    pub fet: ElementId,
    /// The source driving its gate from ground.
    pub gate: ElementId,
    /// The source driving its drain from ground.
    pub drain: ElementId,
}

/// Finds the circuit's one FET (its source at ground, drain and gate not) and the voltage
/// sources driving its gate and drain from ground: the file's own where it has one, else one
/// added as `JOB.gate` or `JOB.drain` at 0 V.
pub(crate) fn drive(c: &mut Circuit, job: &str) -> Result<Driven, String> {
    let fet = find_fet(c)?;
    check_pins(c, fet)?;
    let (drain, gate) = (c.element_pins(fet)[0], c.element_pins(fet)[1]);
    let mut source_for = |node: NodeId, name: &str| -> Result<ElementId, String> {
        match driving_source(c, node) {
            Some(e) => Ok(e),
            None => c
                .add(name, VoltageSource::dc(0.0), &[node, Circuit::GROUND])
                .map_err(|e| e.to_string()),
        }
    };
    let gate = source_for(gate, &format!("{job}.gate"))?;
    let drain = source_for(drain, &format!("{job}.drain"))?;
    Ok(Driven { fet, gate, drain })
}

/// Runs the grid: for each gate voltage, a DC sweep of the drain voltage.
pub fn run_iv(design: Design, vgs: &[f64], vds: &[f64]) -> Result<Vec<IvPoint>, String> {
    run_iv_with(design, vgs, vds, &sweep_params())
}

/// [`run_iv`] with the given solver parameters (a fit's tighter Newton tolerances, say).
pub fn run_iv_with(
    design: Design,
    vgs: &[f64],
    vds: &[f64],
    params: &SweepParams,
) -> Result<Vec<IvPoint>, String> {
    let mut c = whole_leakage(design)?;
    let Driven {
        gate: vg_src,
        drain: vd_src,
        ..
    } = drive(&mut c, "iv")?;
    let mut sys = System::new(c).map_err(|e| e.to_string())?;
    let mut out = Vec::with_capacity(vgs.len() * vds.len());
    let probe = [Probe::Current(vd_src), Probe::Current(vg_src)];
    let gmin = params.op.gmin;
    for &vg in vgs {
        sys.set_source_value(vg_src, vg)
            .map_err(|e| e.to_string())?;
        let res = sys
            .dc_sweep(vd_src, vds, &probe, params)
            .map_err(|e| e.to_string())?;
        for (k, &vd) in vds.iter().enumerate() {
            // The drain source's branch current flows from its positive pin through it, so the
            // current it pushes into the drain node is the negative of that; the node's gmin
            // draws gmin * V_D of it, which is not drain current. At V_D = 0 that is
            // -0.0 - 0.0 = -0.0, hence the normalisation.
            out.push(IvPoint {
                vgs: unsigned_zero(vg),
                vds: unsigned_zero(vd),
                id: unsigned_zero(-res.signals[0][k] - gmin * vd),
                ig: unsigned_zero(-res.signals[1][k] - gmin * vg),
            });
        }
    }
    Ok(out)
}

/// The design's circuit with its FET's gate leakage taken whole: a device curve measures the
/// gate current itself, so an `auto` card's leakage (left out where it is small next to the
/// channel, `lamina_devices::sheet_fet::leakage`) is in it at every gate drive, as with
/// `gate_leakage = on`.
fn whole_leakage(design: Design) -> Result<Circuit, String> {
    let fet = find_fet(&design.circuit)?;
    let whole = design.sheet_card(fet).and_then(leakage_whole);
    let mut c = design.circuit;
    if let Some(card) = whole {
        c.replace(fet, Box::new(SheetFet::new(&card)?))
            .map_err(|e| e.to_string())?;
    }
    Ok(c)
}

/// `card` with its gate leakage on at every gate drive, where it is `auto` and has any.
fn leakage_whole(card: &SheetFetCard) -> Option<SheetFetCard> {
    (card.gate_leakage == LeakageMode::Auto && !card.tunnelling.is_empty()).then(|| {
        let mut card = card.clone();
        card.gate_leakage = LeakageMode::On;
        card
    })
}

fn sweep_params() -> SweepParams {
    SweepParams {
        op: OpParams::default(),
        ..SweepParams::default()
    }
}

/// Carrier type of a branch.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Polarity {
    /// Electrons: the branch at positive gate voltage.
    N,
    /// Holes: the branch at negative gate voltage.
    P,
}

impl Polarity {
    /// `n` or `p`.
    pub fn name(self) -> &'static str {
        match self {
            Polarity::N => "n",
            Polarity::P => "p",
        }
    }

    /// `electron` or `hole`.
    pub fn carrier(self) -> &'static str {
        match self {
            Polarity::N => "electron",
            Polarity::P => "hole",
        }
    }
}

/// Width, length and temperature of a 2D-channel FET, as its card and instance set them.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Geometry {
    /// Channel width (m).
    pub width_m: f64,
    /// Channel length (m).
    pub length_m: f64,
    /// Temperature (K).
    pub temperature_k: f64,
}

/// What `lamina iv` knows of the file's FET.
#[derive(Clone, Debug, PartialEq)]
pub struct Device {
    /// Instance name.
    pub name: String,
    /// Element kind (`2D-channel FET`, `square-law n-FET`, ...).
    pub kind: &'static str,
    /// The carrier, where the kind fixes it.
    pub carrier: Option<Polarity>,
    /// Width, length and temperature, or why they are not known.
    pub geometry: Result<Geometry, String>,
}

const SHEET_KIND: &str = "2D-channel FET";
const SQUARE_N_KIND: &str = "square-law n-FET";
const SQUARE_P_KIND: &str = "square-law p-FET";
const SQUARE_GEOMETRY: &str =
    "a square-law card has no width, length or temperature; the current criteria take W/L = 1";

impl Device {
    /// Whether the device is a square-law check device (no geometry, no subthreshold current).
    pub fn is_square_law(&self) -> bool {
        self.carrier.is_some()
    }

    /// `W/L` for the current criteria: 1 for a square-law device (whose geometry note says so).
    fn criteria_w_over_l(&self) -> Result<f64, String> {
        match (&self.geometry, self.is_square_law()) {
            (Ok(g), _) => Ok(g.width_m / g.length_m),
            (Err(_), true) => Ok(1.0),
            (Err(why), false) => Err(why.clone()),
        }
    }
}

/// Reads the file's FET: its name and kind, and for a 2D-channel FET the width, length and
/// temperature of the card it was built from (as the elaborator resolved it: card, instance
/// and `--set` values, defaults where none is given).
pub fn read_device(design: &Design) -> Result<Device, String> {
    let c = &design.circuit;
    let fet = find_fet(c)?;
    let name = c.element_name(fet).to_string();
    let kind = c.element_kind(fet);
    let (carrier, geometry) = match kind {
        SQUARE_N_KIND => (Some(Polarity::N), Err(SQUARE_GEOMETRY.to_string())),
        SQUARE_P_KIND => (Some(Polarity::P), Err(SQUARE_GEOMETRY.to_string())),
        SHEET_KIND => (
            None,
            design
                .sheet_card(fet)
                .map(|card| Geometry {
                    width_m: card.width,
                    length_m: card.length,
                    temperature_k: card.temperature,
                })
                .ok_or_else(|| format!("the card of `{name}` could not be read")),
        ),
        other => (
            None,
            Err(format!(
                "`lamina iv` does not know the width, length or temperature of a {other}"
            )),
        ),
    };
    Ok(Device {
        name,
        kind,
        carrier,
        geometry,
    })
}

/// How the figures are taken: each `None` is the documented default.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct IvConfig {
    /// The branch, overriding the device kind and the currents.
    pub polarity: Option<Polarity>,
    /// Smallest `|I_D|` the swing is read from (A); default [`default_floor`].
    pub current_floor_a: Option<f64>,
    /// `V_GS` of I_on (V); default the end of the sweep on the branch's side.
    pub on_bias_v: Option<f64>,
    /// `V_GS` of I_off (V); default the `V_GS` of the branch's smallest `|I_D|`.
    pub off_bias_v: Option<f64>,
}

/// The threshold criterion per square: `I_D = 100 nA x W/L` (common practice).
pub const THRESHOLD_CURRENT_PER_SQUARE: f64 = 1e-7;

/// The swing floor per square: `|I_D| >= 1 pA x W/L`, five decades below the threshold
/// criterion, so the swing is read in the subthreshold region whatever the width.
pub const FLOOR_PER_SQUARE: f64 = 1e-12;

/// The default floor never goes below 1e-11 A, ten times the solver's absolute current
/// tolerance (1e-12 A): a Newton solve accepts a current once its update is below
/// 1e-12 A + 1e-3 |I_D|, so a current near 1e-12 A carries no guaranteed digit.
pub const MIN_FLOOR_A: f64 = 1e-11;

/// How many times the current at one end of the gate sweep must exceed that at the other to
/// decide the branch from the currents.
pub const POLARITY_RATIO: f64 = 10.0;

/// The threshold criterion's current for `device` (A): [`THRESHOLD_CURRENT_PER_SQUARE`] x W/L.
pub fn threshold_current(device: &Device) -> Result<f64, String> {
    Ok(THRESHOLD_CURRENT_PER_SQUARE * device.criteria_w_over_l()?)
}

/// The default swing floor for a device of the given `W/L` (A).
pub fn default_floor(w_over_l: f64) -> f64 {
    (FLOOR_PER_SQUARE * w_over_l).max(MIN_FLOOR_A)
}

/// The thermal limit of the subthreshold swing, `ln(10) kT/q`, in mV/decade.
pub fn thermal_swing_mv_per_dec(temperature_k: f64) -> f64 {
    1e3 * 10f64.ln() * K_B * temperature_k / Q
}

/// The branch the figures are taken on, and how it was decided.
#[derive(Clone, Debug, PartialEq)]
pub struct Branch {
    /// Its carrier.
    pub polarity: Polarity,
    /// How it was decided, in a sentence.
    pub basis: String,
}

/// The constant-current threshold.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CcThreshold {
    /// Threshold (V).
    pub vth_v: f64,
    /// The criterion current (A).
    pub criterion_a: f64,
}

/// The maximum-transconductance extrapolated threshold.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GmThreshold {
    /// Threshold (V): tangent intercept minus `V_DS / 2`.
    pub vth_v: f64,
    /// The `V_DS` of the curve used (V).
    pub vds_v: f64,
    /// The `V_GS` of the largest `|g_m|` (V).
    pub vgs_v: f64,
    /// Whether that is the last interior sample of the branch, so `g_m` may still rise beyond
    /// the sweep and the value depends on how far it goes.
    pub at_sweep_end: bool,
}

/// The smallest swing above the floor.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SwingFigure {
    /// Swing (mV/decade); the thermal limit where the chord came out below it within rounding.
    pub mv_per_dec: f64,
    /// `V_GS` of the chord's middle sample (V).
    pub vgs_v: f64,
    /// The decade of `|I_D|` at that sample (A): `[10^n, 10^(n+1))`.
    pub decade_a: (f64, f64),
    /// Whether the chord came out below the thermal limit within rounding and was raised to it.
    pub at_limit: bool,
}

/// A current at a stated bias.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BiasCurrent {
    /// `V_GS` (V).
    pub vgs_v: f64,
    /// `|I_D|` (A).
    pub a: f64,
    /// `|I_D|` per width (A/um), where the width is known.
    pub a_per_um: Option<f64>,
}

/// Drain-induced barrier lowering: the constant-current threshold at two drain biases.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Dibl {
    /// `-(V_th,high - V_th,low) / (V_DS,high - V_DS,low)` (mV/V).
    pub mv_per_v: f64,
    /// The smaller and larger `V_DS` (V).
    pub vds_v: (f64, f64),
    /// The thresholds there (V).
    pub vth_v: (f64, f64),
    /// The constant current of both thresholds (A).
    pub criterion_a: f64,
}

/// The output conductance `∂I_D/∂V_DS` at the on bias and the figures' `V_DS`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OutputConductance {
    /// `g_ds` (S).
    pub siemens: f64,
    /// `V_GS` (V) where it was taken.
    pub vgs_v: f64,
    /// `V_DS` (V) where it was taken.
    pub vds_v: f64,
}

/// Device figures of a grid: each a value or the reason it is not reported.
#[derive(Clone, Debug, PartialEq)]
pub struct IvMetrics {
    /// The device.
    pub device: Device,
    /// The `V_DS` the figures are taken at: the largest `|V_DS|` of the grid (V).
    pub vds_v: f64,
    /// The branch.
    pub branch: Result<Branch, String>,
    /// Constant-current threshold.
    pub vth_cc: Result<CcThreshold, String>,
    /// Maximum-g_m extrapolated threshold.
    pub vth_gm: Result<GmThreshold, String>,
    /// Smallest swing above the floor.
    pub ss_min: Result<SwingFigure, String>,
    /// `ln(10) kT/q` at the device's temperature (mV/decade).
    pub ss_thermal_limit_mv_per_dec: Option<f64>,
    /// The floor the swing is read above (A).
    pub current_floor_a: Result<f64, String>,
    /// I_on.
    pub ion: Result<BiasCurrent, String>,
    /// I_off.
    pub ioff: Result<BiasCurrent, String>,
    /// Drain-induced barrier lowering between the smallest nonzero and the largest `V_DS` of
    /// the figures' sign.
    pub dibl: Result<Dibl, String>,
    /// Output conductance at the on bias ([`output_conductance`]; the grid alone cannot give
    /// it, so [`iv_metrics`] leaves the reason and the `iv` job fills it in).
    pub gds: Result<OutputConductance, String>,
}

/// What each figure means, keyed as in the JSON report.
pub const METRIC_DEFINITIONS: &[(&str, &str)] = &[
    (
        "vds_v",
        "the V_DS the figures are taken at: the largest |V_DS| of the grid",
    ),
    (
        "polarity",
        "the branch: n (electrons, positive V_GS) or p (holes, negative V_GS); from --polarity, else the device kind, else the end of the gate sweep with at least 10x the |I_D| of the other at the smallest nonzero |V_DS|",
    ),
    ("polarity_basis", "how the branch was decided, in a sentence"),
    ("device", "the FET's instance name"),
    ("device_kind", "the FET's element kind"),
    (
        "not_reported",
        "for each figure given as null, why it is not reported",
    ),
    ("width_um", "channel width from the device card"),
    ("length_um", "channel length from the device card"),
    ("w_over_l", "width over length"),
    ("temperature_k", "device temperature from the device card"),
    (
        "vth_cc_v",
        "constant-current threshold: V_GS where |I_D| first reaches vth_cc_criterion_a going out along the branch from its smallest |I_D|, at vds_v, interpolated in log |I_D|",
    ),
    (
        "vth_cc_criterion_a",
        "the constant current: 100 nA x W/L (common practice)",
    ),
    (
        "vth_gm_v",
        "linear extrapolation at maximum transconductance: V_GS intercept of the tangent to I_D(V_GS) at the largest |g_m| on the branch, at vth_gm_vds_v, minus vth_gm_vds_v / 2 (D. K. Schroder, Semiconductor Material and Device Characterization, 3rd ed., 2006, ch. 4); meaningful where vth_gm_vds_v is small against the overdrive",
    ),
    (
        "vth_gm_vds_v",
        "the V_DS of the extrapolation: the smallest nonzero |V_DS| of the grid",
    ),
    ("vth_gm_vgs_v", "the V_GS of the largest |g_m|"),
    (
        "vth_gm_at_sweep_end",
        "true where the largest |g_m| is at the end of the sweep: g_m may still rise beyond it, and vth_gm_v depends on how far the sweep goes",
    ),
    (
        "ss_min_mv_per_dec",
        "smallest subthreshold swing dV_GS / dlog10|I_D| over chords of three neighbouring samples on the branch at vds_v, all with |I_D| >= current_floor_a; raised to ss_thermal_limit_mv_per_dec where below it within the solver's rounding, refused where below it by more",
    ),
    (
        "ss_min_vgs_v",
        "the V_GS of the middle sample of that chord",
    ),
    (
        "ss_min_decade_a",
        "the decade of |I_D| at that sample: [10^n, 10^(n+1)) A",
    ),
    (
        "ss_thermal_limit_mv_per_dec",
        "ln(10) kT/q at temperature_k (Sze and Ng 2007)",
    ),
    (
        "current_floor_a",
        "smallest |I_D| the swing is read from: --current-floor, default 1 pA x W/L but not below 1e-11 A (ten times the solver's absolute current tolerance)",
    ),
    (
        "ion_a",
        "|I_D| at V_GS = ion_vgs_v and V_DS = vds_v, interpolated in log |I_D|",
    ),
    ("ion_a_per_um", "ion_a per micrometre of width"),
    (
        "ion_vgs_v",
        "--on-bias, default the end of the gate sweep on the branch's side",
    ),
    (
        "ioff_a",
        "|I_D| at V_GS = ioff_vgs_v and V_DS = vds_v, interpolated in log |I_D|",
    ),
    ("ioff_a_per_um", "ioff_a per micrometre of width"),
    (
        "ioff_vgs_v",
        "--off-bias, default the V_GS of the branch's smallest |I_D| at vds_v",
    ),
    (
        "dibl_mv_per_v",
        "drain-induced barrier lowering: -(V_th,high - V_th,low) / (V_DS,high - V_DS,low), V_th the V_GS where |I_D| reaches dibl_criterion_a, at the smallest nonzero V_DS of vds_v's sign (dibl_vds_low_v) and at vds_v (common practice); the criterion is the current at ss_min_vgs_v on the vds_v curve, in subthreshold, so the shift measures the barrier, not the current's own V_DS dependence above threshold (a long channel still shows the few mV/V of its subthreshold current's factor 1 - exp(-V_DS/V_T) where dibl_vds_low_v is a few kT/q)",
    ),
    (
        "dibl_criterion_a",
        "the constant current of the DIBL thresholds",
    ),
    ("dibl_vds_low_v", "the smaller V_DS of the DIBL figure"),
    ("dibl_vth_low_v", "the constant-current threshold at dibl_vds_low_v"),
    (
        "gds_siemens",
        "output conductance dI_D/dV_DS at V_GS = ion_vgs_v and V_DS = vds_v: central difference over +-1 % of vds_v from two extra operating points solved to a relative tolerance of 1e-9",
    ),
];

/// Whether `a` is a larger drain bias than `b`: larger in magnitude, and positive of two of one
/// magnitude (so `--vds -1,1` takes its figures at +1 V).
fn wider(a: f64, b: f64) -> bool {
    a.abs() > b.abs() || (a.abs() == b.abs() && a > b)
}

/// Whether `a` is a smaller drain bias than `b`, positive of two of one magnitude.
fn narrower(a: f64, b: f64) -> bool {
    a.abs() < b.abs() || (a.abs() == b.abs() && a > b)
}

/// One transfer curve `(V_GS, I_D)` at `vds`, sorted by `V_GS`.
fn transfer(points: &[IvPoint], vds: f64) -> (Vec<f64>, Vec<f64>) {
    let mut curve: Vec<(f64, f64)> = points
        .iter()
        .filter(|p| p.vds == vds)
        .map(|p| (p.vgs, p.id))
        .collect();
    curve.sort_by(|a, b| a.0.total_cmp(&b.0));
    curve.dedup_by(|a, b| a.0 == b.0);
    curve.into_iter().unzip()
}

/// The branch of a curve sorted by `V_GS`, ordered from its smallest `|I_D|` outward.
fn branch_of(vg: &[f64], id: &[f64], p: Polarity) -> (Vec<f64>, Vec<f64>) {
    let k = (0..id.len())
        .min_by(|&a, &b| id[a].abs().total_cmp(&id[b].abs()))
        .unwrap_or(0);
    match p {
        Polarity::N => (vg[k..].to_vec(), id[k..].to_vec()),
        Polarity::P => (
            vg[..=k.min(vg.len().saturating_sub(1))]
                .iter()
                .rev()
                .copied()
                .collect(),
            id[..=k.min(id.len().saturating_sub(1))]
                .iter()
                .rev()
                .copied()
                .collect(),
        ),
    }
}

fn decide_branch(device: &Device, config: &IvConfig, points: &[IvPoint]) -> Result<Branch, String> {
    if let Some(p) = config.polarity {
        return Ok(Branch {
            polarity: p,
            basis: "set by --polarity".into(),
        });
    }
    if let Some(p) = device.carrier {
        return Ok(Branch {
            polarity: p,
            basis: format!("the device is a {}", device.kind),
        });
    }
    let vds = points
        .iter()
        .map(|p| p.vds)
        .filter(|v| *v != 0.0)
        .reduce(|m, v| if narrower(v, m) { v } else { m })
        .ok_or("no current flows at V_DS = 0 only; give --polarity n or p")?;
    let (vg, id) = transfer(points, vds);
    let (lo, hi) = match (vg.first(), vg.last()) {
        (Some(&lo), Some(&hi)) if hi > lo => (lo, hi),
        _ => return Err("one gate voltage shows no branch; give --polarity n or p".into()),
    };
    let (i_lo, i_hi) = (id[0].abs(), id[id.len() - 1].abs());
    let seen = format!(
        "at V_DS = {} V, |I_D| = {:.3e} A at V_GS = {} V and {:.3e} A at V_GS = {} V",
        show(vds),
        i_hi,
        show(hi),
        i_lo,
        show(lo)
    );
    if i_hi >= POLARITY_RATIO * i_lo && i_hi > 0.0 {
        Ok(Branch {
            polarity: Polarity::N,
            basis: format!("from the currents: {seen}"),
        })
    } else if i_lo >= POLARITY_RATIO * i_hi && i_lo > 0.0 {
        Ok(Branch {
            polarity: Polarity::P,
            basis: format!("from the currents: {seen}"),
        })
    } else {
        Err(format!(
            "the branch is undecided: {seen}, within a factor of {POLARITY_RATIO}; give --polarity n or p"
        ))
    }
}

/// A number for a sentence: nine significant digits in the shortest form (so 1e-7 m shows as
/// 0.1 um, not 0.09999999999999999), no negative zero.
pub fn show(x: f64) -> String {
    let rounded: f64 = format!("{x:.8e}").parse().unwrap_or(x);
    format!("{}", unsigned_zero(rounded))
}

/// Figures of a grid from [`run_iv`] for `device`, taken as `config` says.
pub fn iv_metrics(points: &[IvPoint], device: &Device, config: &IvConfig) -> IvMetrics {
    let vds_v =
        unsigned_zero(
            points
                .iter()
                .map(|p| p.vds)
                .fold(0.0f64, |m, v| if wider(v, m) { v } else { m }),
        );
    let (vg, id) = transfer(points, vds_v);
    let branch = decide_branch(device, config, points);
    let wl = device.criteria_w_over_l();
    let width_um = device.geometry.as_ref().ok().map(|g| g.width_m * 1e6);
    let temperature = device.geometry.as_ref().ok().map(|g| g.temperature_k);
    let few = vg.len() < 3;
    let need = |b: &Result<Branch, String>| -> Result<Polarity, String> {
        if few {
            return Err("the sweep has fewer than three gate voltages".into());
        }
        b.as_ref().map(|b| b.polarity).map_err(|e| e.clone())
    };

    let vth_cc = need(&branch).and_then(|p| {
        let wl = wl.clone()?;
        let criterion_a = THRESHOLD_CURRENT_PER_SQUARE * wl;
        let (bv, bi) = branch_of(&vg, &id, p);
        measure::threshold_constant_current(&bv, &bi, criterion_a)
            .map(|v| CcThreshold {
                vth_v: unsigned_zero(v),
                criterion_a,
            })
            .ok_or(format!(
                "|I_D| does not reach {criterion_a:.3e} A on the {} branch of the sweep",
                p.name()
            ))
    });

    let vth_gm = need(&branch).and_then(|p| {
        let small = points
            .iter()
            .map(|q| q.vds)
            .filter(|v| *v != 0.0)
            .reduce(|m, v| if narrower(v, m) { v } else { m })
            .ok_or("every V_DS is 0")?;
        let (sv, si) = transfer(points, small);
        let (bv, bi) = branch_of(&sv, &si, p);
        match measure::max_gm(&bv, &bi) {
            Some(g) => Ok(GmThreshold {
                vth_v: unsigned_zero(g.intercept - small / 2.0),
                vds_v: small,
                vgs_v: g.vgs,
                at_sweep_end: g.index + 2 == bv.len(),
            }),
            None => Err(format!(
                "the {} branch at V_DS = {} V has no transconductance to extrapolate",
                p.name(),
                show(small)
            )),
        }
    });

    let current_floor_a = match config.current_floor_a {
        Some(f) => Ok(f),
        None => wl.clone().map(default_floor),
    };
    let ss_thermal_limit_mv_per_dec = temperature.map(thermal_swing_mv_per_dec);
    let ss_min = need(&branch).and_then(|p| {
        if device.is_square_law() {
            return Err("the square-law model has no subthreshold current (zero below threshold), so no swing".into());
        }
        let limit = ss_thermal_limit_mv_per_dec
            .ok_or_else(|| device.geometry.clone().err().unwrap_or_default())?;
        let floor = current_floor_a.clone()?;
        let (bv, bi) = branch_of(&vg, &id, p);
        let s = measure::min_swing_above(&bv, &bi, floor).ok_or(format!(
            "fewer than three neighbouring samples of the {} branch carry at least {floor:.3e} A",
            p.name()
        ))?;
        let rel = sweep_params().op.newton.tol.reltol;
        let allowed = s.rounding(rel);
        let n = s.current.log10().floor();
        let decade_a = (10f64.powf(n), 10f64.powf(n + 1.0));
        if s.mv_per_dec >= limit {
            Ok(SwingFigure {
                mv_per_dec: s.mv_per_dec,
                vgs_v: unsigned_zero(s.vgs),
                decade_a,
                at_limit: false,
            })
        } else if s.mv_per_dec >= limit * (1.0 - allowed) {
            Ok(SwingFigure {
                mv_per_dec: limit,
                vgs_v: unsigned_zero(s.vgs),
                decade_a,
                at_limit: true,
            })
        } else {
            Err(format!(
                "refused: the smallest swing read, {:.2} mV/dec at V_GS = {} V from currents \
                 near {:.1e} A, is {:.2} % below the thermal limit {limit:.2} mV/dec, more than \
                 the {:.2} % the solver's relative tolerance allows; the currents there are \
                 below the solver's accuracy: raise --current-floor",
                s.mv_per_dec,
                show(s.vgs),
                s.current,
                100.0 * (1.0 - s.mv_per_dec / limit),
                100.0 * allowed
            ))
        }
    });

    let at_bias = |flag: &str, bias: Option<f64>, default: Result<f64, String>| {
        if few {
            return Err("the sweep has fewer than three gate voltages".to_string());
        }
        let v = match bias {
            Some(v) => v,
            None => default?,
        };
        let a = measure::current_at_log(&vg, &id, v)
            .ok_or(format!(
                "{flag} {} V lies outside the swept V_GS, {} to {} V",
                show(v),
                show(vg[0]),
                show(vg[vg.len() - 1])
            ))?
            .abs();
        Ok(BiasCurrent {
            vgs_v: unsigned_zero(v),
            a: unsigned_zero(a),
            a_per_um: width_um.map(|w| unsigned_zero(a / w)),
        })
    };
    let on_default = need(&branch).map(|p| match p {
        Polarity::N => vg[vg.len() - 1],
        Polarity::P => vg[0],
    });
    let off_default = need(&branch).map(|p| branch_of(&vg, &id, p).0[0]);
    let ion = at_bias("--on-bias", config.on_bias_v, on_default);
    let ioff = at_bias("--off-bias", config.off_bias_v, off_default);
    let dibl = ss_min.clone().and_then(|ss| {
        let p = need(&branch)?;
        // The criterion: the current where the swing is steepest at vds_v, in subthreshold,
        // so the shift measures the barrier rather than the current's own V_DS dependence
        // above threshold.
        let criterion_a = measure::current_at_log(&vg, &id, ss.vgs_v)
            .ok_or("the steepest swing's V_GS lies outside the sweep")?
            .abs();
        let (hv, hi) = branch_of(&vg, &id, p);
        let vth_high = measure::threshold_constant_current(&hv, &hi, criterion_a)
            .ok_or("the steepest swing's current is not reached on the branch")?;
        let low = points
            .iter()
            .map(|q| q.vds)
            .filter(|v| *v != 0.0 && v.signum() == vds_v.signum())
            .reduce(|m, v| if narrower(v, m) { v } else { m })
            .filter(|v| *v != vds_v)
            .ok_or("the sweep has one drain bias of the figures' sign; DIBL needs two")?;
        let (lv, li) = transfer(points, low);
        let (bv, bi) = branch_of(&lv, &li, p);
        let vth_low = measure::threshold_constant_current(&bv, &bi, criterion_a).ok_or(format!(
            "|I_D| does not reach {criterion_a:.3e} A at V_DS = {} V",
            show(low)
        ))?;
        Ok(Dibl {
            mv_per_v: unsigned_zero(-1e3 * (vth_high - vth_low) / (vds_v - low)),
            vds_v: (low, vds_v),
            vth_v: (unsigned_zero(vth_low), unsigned_zero(vth_high)),
            criterion_a,
        })
    });
    IvMetrics {
        device: device.clone(),
        vds_v,
        branch,
        vth_cc,
        vth_gm,
        ss_min,
        ss_thermal_limit_mv_per_dec,
        current_floor_a,
        ion,
        ioff,
        dibl,
        gds: Err("taken by the iv job from two extra operating points".into()),
    }
}

/// The output conductance of the design's device at `V_GS = vgs` and `V_DS = vds`: a central
/// difference over ±1 % of `vds` from two operating points solved to a relative tolerance of
/// 1e-9 (a fit's settings), so that the solver's tolerance stays far below the current's change
/// over the step even in saturation.
pub fn output_conductance(design: Design, vgs: f64, vds: f64) -> Result<OutputConductance, String> {
    if vds == 0.0 {
        return Err("the figures' V_DS is 0".into());
    }
    let h = 0.01 * vds;
    let p = run_iv_with(
        design,
        &[vgs],
        &[vds - h, vds + h],
        &crate::fit::fit_sweep_params(),
    )?;
    Ok(OutputConductance {
        siemens: unsigned_zero((p[1].id - p[0].id) / (2.0 * h)),
        vgs_v: unsigned_zero(vgs),
        vds_v: unsigned_zero(vds),
    })
}

/// A dense drain grid for output characteristics: `n` points from `min(0, lowest)` to
/// `max(0, highest)` of the user's `V_DS`; `None` where that span is empty.
pub fn dense_vds(vds: &[f64], n: usize) -> Option<Vec<f64>> {
    let lo = vds.iter().copied().fold(0.0f64, f64::min);
    let hi = vds.iter().copied().fold(0.0f64, f64::max);
    (hi > lo && n >= 2).then(|| {
        (0..n)
            .map(|k| unsigned_zero(lo + (hi - lo) * k as f64 / (n - 1) as f64))
            .collect()
    })
}

/// Which way a rate-aware gate sweep runs ([`run_swept`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Direction {
    /// From the lowest `V_GS` to the highest.
    Up,
    /// From the highest to the lowest.
    Down,
    /// Up, then down again.
    Both,
}

/// One leg of a rate-aware sweep.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Leg {
    /// `V_GS` rising.
    Up,
    /// `V_GS` falling.
    Down,
}

impl Leg {
    /// `up` or `down`.
    pub fn name(self) -> &'static str {
        match self {
            Leg::Up => "up",
            Leg::Down => "down",
        }
    }
}

/// One sample of a rate-aware sweep.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SweptPoint {
    /// The leg it belongs to (the turning point belongs to both and is listed with each).
    pub leg: Leg,
    /// Time since the sweep began (s).
    pub time_s: f64,
    /// The bias and the drain current the drain source supplies (channel and displacement
    /// current of the drain's charge).
    pub point: IvPoint,
}

/// The gate voltages of each leg, in sweep order, from the grid's distinct values.
pub(crate) fn legs(vgs: &[f64], direction: Direction) -> Vec<(Leg, Vec<f64>)> {
    let mut up = vgs.to_vec();
    up.sort_by(f64::total_cmp);
    up.dedup();
    let down: Vec<f64> = up.iter().rev().copied().collect();
    match direction {
        Direction::Up => vec![(Leg::Up, up)],
        Direction::Down => vec![(Leg::Down, down)],
        Direction::Both => vec![(Leg::Up, up), (Leg::Down, down)],
    }
}

/// The path through the legs, each leg's values in order, the turning point once.
pub(crate) fn leg_path(legs: &[(Leg, Vec<f64>)]) -> Vec<(Leg, f64)> {
    let mut path: Vec<(Leg, f64)> = Vec::new();
    for (leg, values) in legs {
        let skip = usize::from(!path.is_empty());
        path.extend(values.iter().skip(skip).map(|&v| (*leg, v)));
    }
    path
}

/// Rebuilds the file's device circuit for a ramped gate: the FET from its resolved card, a
/// piecewise-linear gate source through `vertices` and a constant drain source at `vd`.
/// Returns the system, the drain source and the gate source.
fn ramped_circuit(
    design: &Design,
    vertices: Vec<(f64, f64)>,
    vd: f64,
) -> Result<(System, ElementId, ElementId), String> {
    let c = &design.circuit;
    let fet = find_fet(c)?;
    check_pins(c, fet)?;
    let pins = c.element_pins(fet);
    let (drain, gate) = (pins[0], pins[1]);
    if let Some(e) = c.elements().find(|&e| {
        let p = c.element_pins(e);
        e != fet
            && !(c.element_kind(e) == "voltage source"
                && p[1].is_ground()
                && (p[0] == drain || p[0] == gate))
    }) {
        return Err(format!(
            "a rate-aware sweep drives the FET alone: the file may hold only the FET and the \
             voltage sources on its gate and drain, not `{}` (a {})",
            c.element_name(e),
            c.element_kind(e)
        ));
    }
    let card = design.sheet_card(fet).ok_or_else(|| {
        format!(
            "a rate-aware sweep needs a 2D-channel FET (`sheet_fet`); a {} holds no charge that \
             lags the gate",
            c.element_kind(fet)
        )
    })?;
    // The gate current is measured, so the leakage is whole (see `whole_leakage`).
    let device = SheetFet::new(&leakage_whole(card).unwrap_or_else(|| card.clone()))?;
    let mut n = Circuit::new();
    let (d, g) = (n.node("drain"), n.node("gate"));
    let ramp = Waveform::piecewise_linear(vertices).map_err(|e| e.to_string())?;
    let err = |e: lamina_engine::CircuitError| e.to_string();
    let vg_src = n
        .add(
            "sweep.gate",
            VoltageSource::new(ramp),
            &[g, Circuit::GROUND],
        )
        .map_err(err)?;
    let vd_src = n
        .add("sweep.drain", VoltageSource::dc(vd), &[d, Circuit::GROUND])
        .map_err(err)?;
    n.add(c.element_name(fet), device, &[d, g, Circuit::GROUND])
        .map_err(err)?;
    Ok((System::new(n).map_err(|e| e.to_string())?, vd_src, vg_src))
}

/// A rate-aware transfer sweep: for each `V_DS`, the gate ramps at `rate_v_per_s` through the
/// distinct `V_GS` values in `direction` (a transient with a piecewise-linear gate source whose
/// vertices are the grid, so the integrator steps onto each), starting from the operating point
/// at the first `V_GS` (the device at rest there). Charge that lags the gate (a 2D-channel FET's
/// slow traps) then shows as a difference between the legs; a device without it gives the DC
/// curve on both, apart from the displacement current of the drain's charge, which the drain
/// current includes as a measurement's would (`C dV_GS/dt`, small at slow rates). With a
/// `stress` the gate first ramps from there to the stress voltage, holds it and ramps back
/// before the sweep; the samples' times count from the start of the run.
pub fn run_swept(
    design: &Design,
    vgs: &[f64],
    vds: &[f64],
    direction: Direction,
    rate_v_per_s: f64,
    stress: Option<Stress>,
) -> Result<Vec<SweptPoint>, String> {
    if !(rate_v_per_s > 0.0 && rate_v_per_s.is_finite()) {
        return Err("the sweep rate must be a positive, finite voltage per time".into());
    }
    if let Some(st) = stress {
        if !(st.time_s > 0.0 && st.time_s.is_finite() && st.vgs_v.is_finite()) {
            return Err("a bias stress needs a finite gate voltage and a positive time".into());
        }
    }
    let legs = legs(vgs, direction);
    if legs[0].1.len() < 2 {
        return Err("a rate-aware sweep needs at least two distinct gate voltages".into());
    }
    let path = leg_path(&legs);
    // A stress first: from rest at the sweep's start, ramped to the stress, held, and ramped
    // back.
    let mut preamble = Vec::new();
    let mut t = 0.0;
    if let Some(st) = stress {
        let ramp = (path[0].1 - st.vgs_v).abs() / rate_v_per_s;
        // A stress at the sweep's first V_GS needs no ramp (and a repeated vertex time would
        // not be a waveform).
        if ramp > 0.0 {
            preamble.push((0.0, path[0].1));
        }
        preamble.push((ramp, st.vgs_v));
        preamble.push((ramp + st.time_s, st.vgs_v));
        t = 2.0 * ramp + st.time_s;
    }
    let mut times = Vec::with_capacity(path.len());
    for (k, &(_, v)) in path.iter().enumerate() {
        if k > 0 {
            t += (v - path[k - 1].1).abs() / rate_v_per_s;
        }
        times.push(t);
    }
    let stop = t;
    let mut out = Vec::with_capacity(vds.len() * (path.len() + 1));
    for &vd in vds {
        let mut vertices = preamble.clone();
        for (k, (&t, &(leg, v))) in times.iter().zip(&path).enumerate() {
            // A stress at the sweep's first V_GS runs straight into it.
            if vertices.last().is_none_or(|&(tl, _)| t > tl) {
                vertices.push((t, v));
            }
            // Just after the turn, a vertex on the down ramp (a breakpoint the integrator
            // lands on) where the down leg's first sample is read.
            if let (Leg::Up, Some(&(Leg::Down, next))) = (leg, path.get(k + 1)) {
                let after = TURN_FRACTION * (times[k + 1] - t);
                vertices.push((t + after, v + TURN_FRACTION * (next - v)));
            }
        }
        let (mut sys, vd_src, vg_src) = ramped_circuit(design, vertices, vd)?;
        // The integrator steps onto every vertex (a breakpoint), so the samples are exact.
        let mut p = TransientParams::new(stop);
        p.output = Output::Streaming;
        let mut samples: Vec<(f64, f64)> = Vec::new();
        let mut gate: Vec<(f64, f64)> = Vec::new();
        let mut record = |t: f64, v: &[f64], _: lamina_engine::Moved<'_>| {
            samples.push((t, -v[0]));
            gate.push((t, -v[1]));
            Control::Continue
        };
        sys.transient(
            &p,
            &Start::OperatingPoint(OpParams::default()),
            &[Probe::Current(vd_src), Probe::Current(vg_src)],
            Some(&mut record),
        )
        .map_err(|e| e.to_string())?;
        let mut leg_before = None;
        for (k, (&t, &(leg, vg))) in times.iter().zip(&path).enumerate() {
            let id = sample_at(&samples, t);
            let point = IvPoint {
                vgs: unsigned_zero(vg),
                vds: unsigned_zero(vd),
                id: unsigned_zero(id),
                // Displacement current of the ramped gate included, as a measurement's.
                ig: unsigned_zero(sample_at(&gate, t)),
            };
            // The turning point ends the up leg and starts the down leg. The down leg's
            // sample there is read at the vertex a small fraction of the step after the turn,
            // so each leg carries its own ramp's displacement current.
            if leg_before == Some(Leg::Up) && leg == Leg::Down {
                let tp = times[k - 1];
                if let Some(pp) = out.last().map(|s: &SweptPoint| s.point) {
                    let after = tp + TURN_FRACTION * (t - tp);
                    out.push(SweptPoint {
                        leg: Leg::Down,
                        time_s: tp,
                        point: IvPoint {
                            id: unsigned_zero(sample_at(&samples, after)),
                            ig: unsigned_zero(sample_at(&gate, after)),
                            ..pp
                        },
                    });
                }
            }
            leg_before = Some(leg);
            out.push(SweptPoint {
                leg,
                time_s: t,
                point,
            });
        }
    }
    Ok(out)
}

/// A bias-stress step before a rate-aware sweep: the device at rest at the sweep's first
/// `V_GS`, ramped at the sweep rate to `vgs_v`, held there for `time_s` and ramped back.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Stress {
    /// Stress gate voltage (V).
    pub vgs_v: f64,
    /// How long it is held (s).
    pub time_s: f64,
}

/// Where, as a fraction of the down leg's first step, the down leg's sample at the turn is
/// read: close enough that `I_D` has not moved (a change of `1e-6` of one step), far enough
/// that the integrator resolves the ramp's displacement current there.
const TURN_FRACTION: f64 = 1e-6;

/// The recorded value at time `t`: the sample there (the integrator steps onto every vertex),
/// else the straight line between its neighbours.
pub(crate) fn sample_at(samples: &[(f64, f64)], t: f64) -> f64 {
    let k = samples.partition_point(|s| s.0 < t);
    match (samples.get(k.wrapping_sub(1)), samples.get(k)) {
        (_, Some(&(tb, b))) if tb == t => b,
        (Some(&(ta, a)), Some(&(tb, b))) => a + (b - a) * (t - ta) / (tb - ta),
        (Some(&(_, a)), None) => a,
        (None, Some(&(_, b))) => b,
        (None, None) => f64::NAN,
    }
}

/// The width of the hysteresis at one `V_DS`: the `V_GS` at which each leg's `|I_D|` first
/// reaches the stated current going out along the branch, and their difference.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Hysteresis {
    /// `V_DS` (V).
    pub vds_v: f64,
    /// `V_GS` of the current on the up leg (V).
    pub vgs_up_v: f64,
    /// `V_GS` of the current on the down leg (V).
    pub vgs_down_v: f64,
    /// `vgs_down_v - vgs_up_v` (V): positive where the down leg needs more gate voltage for the
    /// same current (a threshold raised by charge trapped on the way up, for an n branch).
    pub width_v: f64,
}

/// The `V_GS` (V) at which one leg's curve at `vds` reaches `|I_D| = current_a`, going out
/// along the `polarity` branch from its smallest current.
pub fn leg_crossing(
    points: &[SweptPoint],
    leg: Leg,
    vds: f64,
    polarity: Polarity,
    current_a: f64,
) -> Option<f64> {
    let mine: Vec<IvPoint> = points
        .iter()
        .filter(|s| s.leg == leg)
        .map(|s| s.point)
        .collect();
    let (vg, id) = transfer(&mine, vds);
    let (bv, bi) = branch_of(&vg, &id, polarity);
    measure::threshold_constant_current(&bv, &bi, current_a)
}

/// The hysteresis width at each `V_DS` of a both-way sweep, or why it cannot be read there.
pub fn hysteresis(
    points: &[SweptPoint],
    polarity: Polarity,
    current_a: f64,
) -> Vec<(f64, Result<Hysteresis, String>)> {
    let mut vds: Vec<f64> = points.iter().map(|s| s.point.vds).collect();
    vds.sort_by(f64::total_cmp);
    vds.dedup();
    vds.into_iter()
        .map(|v| {
            let at = |leg: Leg| {
                leg_crossing(points, leg, v, polarity, current_a).ok_or(format!(
                    "|I_D| does not reach {current_a:.3e} A on the {} leg's {} branch",
                    leg.name(),
                    polarity.name()
                ))
            };
            let r = at(Leg::Up).and_then(|up| {
                let down = at(Leg::Down)?;
                Ok(Hysteresis {
                    vds_v: v,
                    vgs_up_v: unsigned_zero(up),
                    vgs_down_v: unsigned_zero(down),
                    width_v: unsigned_zero(down - up),
                })
            });
            (v, r)
        })
        .collect()
}
