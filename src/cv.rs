//! The C-V job: the gate capacitances of the one 2D-channel FET in a file over a list of gate
//! voltages at one drain voltage, source grounded, and the parts of its gate stack.
//!
//! # Terminal capacitances
//! At each bias the engine solves the operating point and linearises the FET there
//! ([`lamina_engine::System::element_linearization`]); its quasi-static terminal capacitance
//! matrix `C_t = ∂Q/∂V` (terminal order drain, gate, source; charges held at the terminals,
//! contact-resistance nodes eliminated) gives
//!
//! ```text
//! C_gg = ∂Q_G/∂V_G,   C_gd = -∂Q_G/∂V_D,   C_gs = -∂Q_G/∂V_S
//! ```
//!
//! exactly the derivatives the transient integrates, overlap included (the card's overlap per
//! width and side, times the width, on each of gate-drain and gate-source). Per area they are
//! divided by `W L`, per width by `W`. The intrinsic `C_gg` per area is
//! `(C_gg - 2 C_ov) / (W L)`.
//!
//! # The stack's parts
//! At the source end of the channel, `u = V_G - V_S'` (`V_S'` behind the source contact
//! resistance), the direct local solve ([`lamina_devices::SheetModel::local_state`]) gives the
//! channel quantum capacitance `C_Qch = q d(n - p)/dξ`, the gate quantum capacitance `C_Qg`
//! (infinite for a metal gate), the sheet densities and the degeneracy `ξ = (E_F - E_c)/q`;
//! the insulator capacitance `C_ins` and the trap capacitance `C_it = q D_it` are constants of
//! the stack. Differentiating the charge balance of [`lamina_devices::sheet_fet`] (Gauss's law
//! across the insulator with the gate's and channel's levels) gives, at one point of the
//! channel,
//!
//! ```text
//! dQ_g/du = 1 / (1/C_ins + 1/C_Qg + 1/(C_Qch + C_it))     (the series combination)
//! ```
//!
//! and at `V_DS = 0` the channel is uniform, so the intrinsic `C_gg` per area equals it: to
//! rounding where the channel sits on a knot of the device's tables, which hold the direct
//! solve's values and slopes there, and within 1e-5 between knots (the slope of their cubic
//! interpolation; measured 8.2e-6 at most in subthreshold). At `V_DS ≠ 0` it is the source
//! end's share only.
//!
//! The band edge at the source end is reported as `(E_c - E_F,S)/q = -(ξ_s + V_S')`, with
//! `E_F,S` the grounded source contact's Fermi level: positive where the conduction band edge
//! lies above it. A Dirac gate's Fermi level is reported from its neutral point, `μ_g / q`.
//!
//! Results are model estimates; check them against measurement before basing a design
//! decision on them.

use crate::iv::{drive, Driven};
use lamina_devices::{SheetFet, SheetFetCard};
use lamina_engine::{OpParams, System};
use lamina_netlist::Design;

/// Every key of the JSON report that needs a definition, with it.
pub const CV_DEFINITIONS: &[(&str, &str)] = &[
    ("c_gg_f", "dQ_G/dV_G of the device at its terminals, overlap included"),
    ("c_gd_f", "-dQ_G/dV_D, overlap included"),
    ("c_gs_f", "-dQ_G/dV_S, overlap included"),
    ("c_overlap_f", "overlap capacitance of one side (gate-drain or gate-source): the card's value per width times W"),
    ("c_gg_intrinsic_f_per_m2", "(C_gg - 2 C_overlap) / (W L)"),
    ("c_series_f_per_m2", "1 / (1/C_ins + 1/C_Qg + 1/(C_Qch + C_it)) at the source end; equals c_gg_intrinsic_f_per_m2 at V_DS = 0"),
    ("c_channel_quantum_f_per_m2", "q d(n - p)/dξ at the source end"),
    ("c_gate_quantum_f_per_m2", "q² d(n_g - p_g)/dμ_g of a Dirac gate at the source end; infinite (null) for a metal gate"),
    ("c_trap_f_per_m2", "q D_it"),
    ("degeneracy_v", "(E_F - E_c)/q of the channel at that end"),
    ("band_edge_source_v", "(E_c - E_F,S)/q at the source end, E_F,S the grounded source contact's Fermi level: -(ξ_s + V_S')"),
    ("gate_level_v", "a Dirac gate's Fermi level above its neutral point, μ_g/q, at the source end"),
    ("q_gate_c", "charge held at the gate terminal, overlap included"),
];

/// What the job knows of the file's FET.
#[derive(Clone, Debug, PartialEq)]
pub struct CvDevice {
    /// Instance name.
    pub name: String,
    /// Channel width (m).
    pub width_m: f64,
    /// Channel length (m).
    pub length_m: f64,
    /// Temperature (K).
    pub temperature_k: f64,
    /// Overlap capacitance per width and side (F/m).
    pub overlap_f_per_m: f64,
    /// Insulator capacitance per area (F/m²).
    pub insulator_f_per_m2: f64,
    /// Trap capacitance per area, `q D_it` (F/m²).
    pub trap_f_per_m2: f64,
    /// Whether the gate is a metal (infinite quantum capacitance, fixed level).
    pub metal_gate: bool,
}

impl CvDevice {
    /// Overlap capacitance of one side (F).
    pub fn overlap_f(&self) -> f64 {
        self.overlap_f_per_m * self.width_m
    }

    /// Gate area `W L` (m²).
    pub fn area_m2(&self) -> f64 {
        self.width_m * self.length_m
    }
}

/// One end of the channel.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChannelEnd {
    /// `u = V_G - V` there (V).
    pub u_v: f64,
    /// Degeneracy `(E_F - E_c)/q` (V).
    pub degeneracy_v: f64,
    /// Electron sheet density (1/m²).
    pub n_per_m2: f64,
    /// Hole sheet density (1/m²).
    pub p_per_m2: f64,
}

/// One gate voltage.
#[derive(Clone, Debug, PartialEq)]
pub struct CvPoint {
    /// Gate-source voltage (V).
    pub vgs_v: f64,
    /// Drain-source voltage (V).
    pub vds_v: f64,
    /// `C_gg` (F), overlap included.
    pub c_gg_f: f64,
    /// `C_gd` (F), overlap included.
    pub c_gd_f: f64,
    /// `C_gs` (F), overlap included.
    pub c_gs_f: f64,
    /// Charge at the gate terminal (C).
    pub q_gate_c: f64,
    /// Channel quantum capacitance at the source end (F/m²).
    pub channel_quantum_f_per_m2: f64,
    /// Gate quantum capacitance at the source end (F/m²); infinite for a metal gate.
    pub gate_quantum_f_per_m2: f64,
    /// A Dirac gate's Fermi level above its neutral point at the source end (V).
    pub gate_level_v: Option<f64>,
    /// The source end of the channel.
    pub source: ChannelEnd,
    /// The drain end of the channel.
    pub drain: ChannelEnd,
    /// `(E_c - E_F,S)/q` at the source end (V).
    pub band_edge_source_v: f64,
}

impl CvPoint {
    /// The series combination of the stack's parts at the source end (F/m²).
    pub fn series_f_per_m2(&self, d: &CvDevice) -> f64 {
        1.0 / (1.0 / d.insulator_f_per_m2
            + 1.0 / self.gate_quantum_f_per_m2
            + 1.0 / (self.channel_quantum_f_per_m2 + d.trap_f_per_m2))
    }

    /// The intrinsic `C_gg` per area, `(C_gg - 2 C_ov) / (W L)` (F/m²).
    pub fn intrinsic_gg_f_per_m2(&self, d: &CvDevice) -> f64 {
        (self.c_gg_f - 2.0 * d.overlap_f()) / d.area_m2()
    }
}

/// The job's result.
#[derive(Clone, Debug, PartialEq)]
pub struct CvReport {
    /// The device.
    pub device: CvDevice,
    /// One point per gate voltage, in the order given.
    pub points: Vec<CvPoint>,
    /// Gate voltages at which a channel end lies outside the device tables' valid range.
    pub outside_tables: Vec<f64>,
}

const SHEET_KIND: &str = "2D-channel FET";

/// Whether the file has what `cv` needs: the checks of [`crate::iv::check_device`], and the
/// FET a 2D-channel FET with its card (other kinds carry no stack to report).
pub fn check_device(design: &Design) -> Result<(), String> {
    crate::iv::check_device(design)?;
    card_of(design).map(|_| ())
}

fn card_of(design: &Design) -> Result<(String, &SheetFetCard), String> {
    let c = &design.circuit;
    let fet = crate::iv::find_fet(c)?;
    let name = c.element_name(fet).to_string();
    let kind = c.element_kind(fet);
    if kind != SHEET_KIND {
        return Err(format!(
            "`lamina cv` needs a 2D-channel FET (a `sheet_fet` card); `{name}` is a {kind}, which has no gate stack"
        ));
    }
    let card = design
        .sheet_card(fet)
        .ok_or_else(|| format!("the card of `{name}` could not be read"))?;
    Ok((name, card))
}

/// Runs the job: for each gate voltage the operating point at `vds`, the FET's terminal
/// capacitances there, and the stack's parts at both channel ends.
pub fn run_cv(design: Design, vgs: &[f64], vds: f64) -> Result<CvReport, String> {
    let (name, card) = card_of(&design)?;
    let device_model = SheetFet::new(card)?;
    let model = device_model.model();
    let device = CvDevice {
        name,
        width_m: card.width,
        length_m: card.length,
        temperature_k: card.temperature,
        overlap_f_per_m: card.overlap_capacitance,
        insulator_f_per_m2: model.insulator_capacitance(),
        trap_f_per_m2: model.trap_capacitance(),
        metal_gate: matches!(card.gate, lamina_devices::Gate::Metal { .. }),
    };
    let mut c = design.circuit;
    let Driven { fet, gate, drain } = drive(&mut c, "cv")?;
    let mut sys = System::new(c).map_err(|e| e.to_string())?;
    sys.set_source_value(drain, vds)
        .map_err(|e| e.to_string())?;
    let (u_lo, u_hi) = model.valid_u_range();
    let mut points = Vec::with_capacity(vgs.len());
    let mut outside_tables = Vec::new();
    for &vg in vgs {
        sys.set_source_value(gate, vg).map_err(|e| e.to_string())?;
        let at = |e: String| format!("at V_GS = {} V: {e}", crate::iv::show(vg));
        let (sol, _) = sys
            .operating_point(&OpParams::default())
            .map_err(|e| at(e.to_string()))?;
        let lin = sys
            .element_linearization(&sol.x, fet)
            .map_err(|e| at(e.to_string()))?;
        let (_, cap) = lin
            .quasi_static()
            .ok_or_else(|| at("the contact resistances' block is singular".into()))?;
        let (vd_int, vs_int) = device_model
            .channel_voltages(&lin.x)
            .ok_or_else(|| at("the FET's unknowns are incomplete".into()))?;
        let v_gate = lin.x[1];
        let s = model.local_state(v_gate - vs_int);
        let d = model.local_state(v_gate - vd_int);
        if [s.u, d.u].iter().any(|&u| u < u_lo || u > u_hi) {
            outside_tables.push(vg);
        }
        let end = |st: &lamina_devices::sheet_fet::LocalState| ChannelEnd {
            u_v: st.u,
            degeneracy_v: st.xi,
            n_per_m2: st.n,
            p_per_m2: st.p,
        };
        // Row-major 3 x 3, terminals drain, gate, source: row 1 is the gate's charge.
        points.push(CvPoint {
            vgs_v: crate::iv::unsigned_zero(vg),
            vds_v: crate::iv::unsigned_zero(vds),
            c_gg_f: cap[4],
            c_gd_f: crate::iv::unsigned_zero(-cap[3]),
            c_gs_f: crate::iv::unsigned_zero(-cap[5]),
            q_gate_c: lin.terminal_charges()[1],
            channel_quantum_f_per_m2: s.channel_quantum_capacitance,
            gate_quantum_f_per_m2: s.gate_quantum_capacitance,
            gate_level_v: s.gate_level,
            source: end(&s),
            drain: end(&d),
            band_edge_source_v: crate::iv::unsigned_zero(-(s.xi + vs_int)),
        });
    }
    Ok(CvReport {
        device,
        points,
        outside_tables,
    })
}
