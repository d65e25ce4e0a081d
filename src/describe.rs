//! Resolved 2D-FET cards described: every value of each distinct card in a design with where
//! it came from (the material library, the device card, the instance, a derivation or the
//! model's default; [`lamina_netlist::catalog::resolved_values`]), and figures derived from
//! the gate stack. All derived figures are model estimates.
//!
//! # Derived figures and their definitions
//! * Insulator capacitance per area `C_ins = 1 / Σ t_i / (ε_i ε0)` (series layers).
//! * Equivalent oxide thickness `EOT = ε_SiO2 ε0 / C_ins = Σ t_i ε_SiO2 / ε_i`, with
//!   `ε_SiO2 = 3.9` (common practice).
//! * Flat-band voltage: the gate voltage (source and drain at 0 V) at which the conduction
//!   band edge of the channel would sit at its Fermi level if the mobile and trapped charges
//!   were left out, `V_FB = (Φ_G - χ)/q - q (N_D - N_A + N_fix) / C_ins`. `Φ_G` is the metal's
//!   work function, or a Dirac gate's neutral work function (the shift of the gate's own Fermi
//!   level needed to carry the image of the fixed charge is left out too). It is the offset of
//!   the model's Gauss law `u = ξ + (Φ_G - χ)/q + Q_G / C_ins` with only fixed charges.
//! * Threshold voltages: the gate voltage at `V_DS = 0` (source at 0 V, so `u = V_G`) at
//!   which the channel's electron density (n branch) rises to, or its hole density (p branch)
//!   falls to, [`THRESHOLD_DENSITY_PER_M2`] = 1e11 /cm²; found by bisection on the exact local
//!   solve ([`SheetModel::local_state`]) within the tables' valid range, to
//!   [`THRESHOLD_TOLERANCE_V`]. Densities rise monotonically with `u` (`du/dξ >= 1`), so each
//!   branch has at most one such voltage; `None` where the valid range does not reach it.
//! * The mobility each carrier uses and how it was obtained ([`SheetFet::mobility_report`]),
//!   the thermal voltage `kT/q` and the valid range of `u = V_G - V` of the device's tables.

use lamina_devices::mobility::MobilityReport;
use lamina_devices::physics::{EPS0, Q};
use lamina_devices::{Gate, SheetFet, SheetFetCard, SheetModel};
use lamina_netlist::catalog::{resolved_values, CardValue, Setter};
use lamina_netlist::Design;

/// Relative permittivity of SiO2 for the equivalent oxide thickness (common practice).
pub const EPS_SIO2: f64 = 3.9;

/// The sheet density (1/m²) that defines the threshold voltages: 1e11 /cm².
pub const THRESHOLD_DENSITY_PER_M2: f64 = 1e15;

/// The bisection of a threshold voltage stops when its bracket is this narrow (V).
pub const THRESHOLD_TOLERANCE_V: f64 = 1e-9;

/// The most distinct resolved cards one description lists.
pub const MAX_CARDS: usize = 50;

/// Figures derived from a resolved card (model estimates; see the module docs for each
/// definition).
#[derive(Clone, Debug, PartialEq)]
pub struct Figures {
    /// `C_ins` (F/m²).
    pub insulator_capacitance_f_per_m2: f64,
    /// EOT (m).
    pub eot_m: f64,
    /// `V_FB` (V).
    pub flat_band_v: f64,
    /// n-branch threshold (V), if the valid range reaches it.
    pub threshold_n_v: Option<f64>,
    /// p-branch threshold (V), if the valid range reaches it.
    pub threshold_p_v: Option<f64>,
    /// `kT/q` (V).
    pub thermal_voltage_v: f64,
    /// The valid range of `u = V_G - V` (V).
    pub valid_u_range_v: (f64, f64),
    /// The mobilities the device uses and how they were obtained.
    pub mobility: MobilityReport,
}

/// One distinct resolved card of a design and the elements that use it.
#[derive(Clone, Debug)]
pub struct Described {
    /// The device card the elements were placed from (`sheet_fet` for a direct placement).
    pub device: String,
    /// The elements' names, in circuit order (the first [`MAX_ELEMENT_NAMES`]).
    pub elements: Vec<String>,
    /// How many elements use this card.
    pub element_count: usize,
    /// The names given (materials, `mobility_model`, ...) and who gave them.
    pub names: Vec<(&'static str, String, Setter)>,
    /// Every value with its unit and origin.
    pub values: Vec<CardValue>,
    /// The derived figures.
    pub figures: Figures,
}

/// The most element names listed per card.
pub const MAX_ELEMENT_NAMES: usize = 8;

/// The distinct resolved 2D-FET cards of `design` (by card, origins and device), at most
/// [`MAX_CARDS`], in the order their first element was placed; and how many elements use a
/// card beyond those. An error names the element whose card does not build a device.
pub fn describe(design: &Design) -> Result<(Vec<Described>, usize), String> {
    let c = &design.circuit;
    let mut groups: Vec<(
        &SheetFetCard,
        &lamina_netlist::catalog::CardOrigins,
        Described,
    )> = Vec::new();
    let mut left_out = 0;
    for e in c.elements() {
        let (Some(card), Some(origins)) = (design.sheet_card(e), design.sheet_card_origins(e))
        else {
            continue;
        };
        let name = c.element_name(e);
        // Shared cards are the same allocation; compare by address first, then by value.
        let same = |g: &(
            &SheetFetCard,
            &lamina_netlist::catalog::CardOrigins,
            Described,
        )| {
            (std::ptr::eq(g.0, card) || g.0 == card)
                && (std::ptr::eq(g.1, origins) || g.1 == origins)
        };
        if let Some(g) = groups.iter_mut().find(|g| same(g)) {
            g.2.element_count += 1;
            if g.2.elements.len() < MAX_ELEMENT_NAMES {
                g.2.elements.push(name.to_string());
            }
            continue;
        }
        if groups.len() == MAX_CARDS {
            left_out += 1;
            continue;
        }
        let figures = figures(card).map_err(|m| format!("the card of `{name}`: {m}"))?;
        groups.push((
            card,
            origins,
            Described {
                device: origins.device().to_string(),
                elements: vec![name.to_string()],
                element_count: 1,
                names: origins
                    .names()
                    .into_iter()
                    .map(|(k, v, s)| (k, v.to_string(), s))
                    .collect(),
                values: resolved_values(card, origins),
                figures,
            },
        ));
    }
    Ok((groups.into_iter().map(|g| g.2).collect(), left_out))
}

/// The derived figures of `card` (building its device, whose tables are shared).
pub fn figures(card: &SheetFetCard) -> Result<Figures, String> {
    let fet = SheetFet::new(card)?;
    let model = fet.model();
    Ok(Figures {
        insulator_capacitance_f_per_m2: card.insulator_capacitance(),
        eot_m: eot(card),
        flat_band_v: flat_band(card),
        threshold_n_v: threshold(model, Carrier::Electron, THRESHOLD_DENSITY_PER_M2),
        threshold_p_v: threshold(model, Carrier::Hole, THRESHOLD_DENSITY_PER_M2),
        thermal_voltage_v: model.thermal_voltage(),
        valid_u_range_v: model.valid_u_range(),
        mobility: *fet.mobility_report(),
    })
}

/// Equivalent oxide thickness (m): `ε_SiO2 ε0 / C_ins`.
pub fn eot(card: &SheetFetCard) -> f64 {
    EPS_SIO2 * EPS0 / card.insulator_capacitance()
}

/// Flat-band voltage (V): `(Φ_G - χ)/q - q (N_D - N_A + N_fix) / C_ins` (module docs).
pub fn flat_band(card: &SheetFetCard) -> f64 {
    let work_function = match card.gate {
        Gate::Metal { work_function } => work_function,
        Gate::Dirac {
            neutral_work_function,
            ..
        } => neutral_work_function,
    };
    let fixed = card.donor_density - card.acceptor_density + card.fixed_charge_density;
    work_function - card.electron_affinity - Q * fixed / card.insulator_capacitance()
}

/// A carrier of the channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Carrier {
    /// Electrons (n branch).
    Electron,
    /// Holes (p branch).
    Hole,
}

/// The `u = V_G - V` (V) at which the density of `carrier` equals `density` (1/m²), by
/// bisection on [`SheetModel::local_state`] within [`SheetModel::valid_u_range`]; `None` where
/// the density at the ends of the range does not bracket it.
pub fn threshold(model: &SheetModel, carrier: Carrier, density: f64) -> Option<f64> {
    // Electrons rise with u and holes fall: `above` is false below the threshold and true
    // above it for both branches.
    let above = |u: f64| {
        let s = model.local_state(u);
        match carrier {
            Carrier::Electron => s.n >= density,
            Carrier::Hole => s.p < density,
        }
    };
    let (mut lo, mut hi) = model.valid_u_range();
    if above(lo) || !above(hi) {
        return None;
    }
    // 2000 V down to 1e-9 V takes 41 halvings; the cap only guards the loop.
    for _ in 0..200 {
        if hi - lo <= THRESHOLD_TOLERANCE_V {
            break;
        }
        let mid = 0.5 * (lo + hi);
        if above(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

/// A JSON key for `key` in `unit`: the key with the unit appended in lower case, `/` as
/// `_per_`, powers as digits (`band_gap_ev`, `electron_mobility_m2_per_v_s`); pure numbers
/// (`1`) keep the bare key.
pub fn json_key(key: &str, unit: &str) -> String {
    if unit == "1" {
        return key.to_string();
    }
    let mut suffix = String::new();
    for ch in unit.chars() {
        match ch {
            '/' => suffix.push_str("_per_"),
            ' ' => suffix.push('_'),
            '²' => suffix.push('2'),
            'Ω' => suffix.push_str("ohm"),
            '(' | ')' => {}
            c => suffix.extend(c.to_lowercase()),
        }
    }
    let suffix = suffix.trim_start_matches('1').replace("__", "_");
    format!("{key}_{}", suffix.trim_matches('_'))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Unit suffixes of every unit the library and the card listing use.
    #[test]
    fn json_keys_carry_their_units() {
        for (unit, key) in [
            ("eV", "x_ev"),
            ("m0", "x_m0"),
            ("1", "x"),
            ("1/m²", "x_per_m2"),
            ("1/(eV m²)", "x_per_ev_m2"),
            ("m²/(V s)", "x_m2_per_v_s"),
            ("Ω m", "x_ohm_m"),
            ("F/m", "x_f_per_m"),
            ("J/m²", "x_j_per_m2"),
            ("eV/K", "x_ev_per_k"),
            ("V/m", "x_v_per_m"),
            ("m/s", "x_m_per_s"),
            ("K", "x_k"),
            ("m", "x_m"),
        ] {
            assert_eq!(json_key("x", unit), key, "{unit}");
        }
    }
}
