//! Plausibility warnings for a sheet-FET card: values that [`SheetFetCard::validate`] accepts
//! (its ranges only keep the arithmetic finite) but that lie far outside what the model's
//! physics or any reported device covers.
//!
//! Each warning names the card-language parameter, its value in the unit the trade prints it
//! in (`K`, `/cm^2`, `cm^2/(V s)`, `MV/cm`, ...), the plausible range in that unit and why.
//! With a maximum gate voltage the field across each insulator layer is estimated by
//! series-capacitor division, `E_i = D / (ε_i ε0)` with `D = |V_G| / Σ t_j / (ε_j ε0)`: the whole
//! gate voltage across the stack, leaving out the channel's own potential drop and the
//! flat-band offset (an estimate, not a bound), and compared with the layer's breakdown field
//! where the layer has one.
//!
//! ```
//! use lamina_devices::warnings::plausibility;
//! use lamina_devices::SheetFetCard;
//! let hot = SheetFetCard { temperature: 1000.0, ..SheetFetCard::default() };
//! let flags = plausibility(&hot, None);
//! assert_eq!(flags[0].parameter, "temperature");
//! ```
//!
//! What this does not do: refuse a card (that is validation's job), or flag a value that is
//! invalid (NaN compares as neither high nor low and is left to validation).

use crate::sheet_fet::{Gate, SheetFetCard, TEMPERATURE_RANGE_K};
use std::fmt;

/// One value outside its plausible range.
#[derive(Clone, Debug, PartialEq)]
pub struct Implausible {
    /// Card-language name, e.g. `temperature`, `donor_density`, `insulator_thickness`; an
    /// insulator layer's field is reported under the layer's name (`insulator`,
    /// `insulator2`).
    pub parameter: &'static str,
    /// The value, in `unit`.
    pub value: f64,
    /// The unit the value and range are printed in.
    pub unit: &'static str,
    /// Lower end of the plausible range, in `unit`.
    pub low: f64,
    /// Upper end of the plausible range, in `unit`.
    pub high: f64,
    /// Why the range is what it is, with its source.
    pub why: String,
}

impl fmt::Display for Implausible {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "`{}` = {} {} lies outside {} to {} {}: {}",
            self.parameter,
            short(self.value),
            self.unit,
            short(self.low),
            short(self.high),
            self.unit,
            self.why
        )
    }
}

/// Four significant digits, in plain notation between 1e-3 and 1e5 and in exponent
/// notation elsewhere.
fn short(x: f64) -> String {
    if x == 0.0 || (1e-3..1e5).contains(&x.abs()) {
        let s = format!("{x:.4}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{x:.3e}")
    }
}

/// Atoms per cm² of a MoS2 monolayer: three atoms per hexagonal cell of √3/2 a² with the
/// lattice constant a = 3.16 Å (recalled, not checked), 8.65 Å². A sheet density of dopants,
/// fixed charge or traps above this puts more than one elementary charge on every atom.
const MONOLAYER_ATOMS_PER_CM2: f64 = 3.5e14;
/// Carbon atoms per cm² of graphene: two per cell of √3/2 a², a = 2.46 Å (recalled, not
/// checked), 5.24 Å².
const GRAPHENE_ATOMS_PER_CM2: f64 = 3.8e15;

const MONOLAYER_WHY: &str = "more than one elementary charge per atom of a TMD monolayer \
    (MoS2: 3 atoms per 8.65 Å² cell, 3.5e14 /cm², from its 3.16 Å lattice constant, recalled, \
    not checked)";

/// The layer's card-language name: the first two layers are `insulator` and `insulator2`;
/// further layers exist only through the API.
fn layer_name(k: usize) -> &'static str {
    match k {
        0 => "insulator",
        1 => "insulator2",
        _ => "insulator_layer",
    }
}

fn layer_thickness_name(k: usize) -> &'static str {
    match k {
        0 => "insulator_thickness",
        1 => "insulator2_thickness",
        _ => "insulator_layer_thickness",
    }
}

/// Collects the out-of-range values.
struct Report(Vec<Implausible>);

impl Report {
    fn check(
        &mut self,
        parameter: &'static str,
        value: f64,
        unit: &'static str,
        (low, high): (f64, f64),
        why: impl Into<String>,
    ) {
        if value < low || value > high {
            self.0.push(Implausible {
                parameter,
                value,
                unit,
                low,
                high,
                why: why.into(),
            });
        }
    }
}

/// The card's values that are valid but implausible, in a fixed order (temperature, charge
/// densities, masses, mobilities, velocity, geometry, insulator thicknesses, insulator fields).
/// `max_gate_voltage` (V, either sign) adds the field check of every insulator layer with a
/// known breakdown field; a non-finite voltage is ignored.
pub fn plausibility(card: &SheetFetCard, max_gate_voltage: Option<f64>) -> Vec<Implausible> {
    let mut r = Report(Vec::new());
    r.check(
        "temperature",
        card.temperature,
        "K",
        TEMPERATURE_RANGE_K,
        "the material library holds room-temperature values (a gap follows temperature only \
         where the library cites a fit, a mobility only with an exponent or the phonon model) \
         and dopants are taken as fully ionised; the model is meant for the -55 °C to 125 °C of \
         military-grade circuits (common practice)",
    );
    if let Some(v) = max_gate_voltage {
        // The tables reach U_REACH from midgap; past it the channel charge continues linearly
        // (exact only for a degenerate channel under a metal gate). Half of it leaves room for
        // the flat-band offset.
        r.check(
            "voltage",
            v.abs(),
            "V",
            (0.0, 0.5 * crate::sheet_fet::U_REACH),
            "beyond about ±1000 V between gate and channel the model's tables end and the \
             channel charge is continued linearly, exact only for a fully degenerate channel",
        );
    }
    let sites = MONOLAYER_ATOMS_PER_CM2;
    for (name, v) in [
        ("donor_density", card.donor_density),
        ("acceptor_density", card.acceptor_density),
    ] {
        r.check(name, v * 1e-4, "/cm^2", (0.0, sites), MONOLAYER_WHY);
    }
    r.check(
        "fixed_charge_density",
        card.fixed_charge_density * 1e-4,
        "/cm^2",
        (-sites, sites),
        MONOLAYER_WHY,
    );
    // Traps spread at constant density over the gap.
    r.check(
        "trap_density",
        card.trap_density * 1e-4,
        "/(eV cm^2)",
        (0.0, sites / card.band_gap),
        format!(
            "traps spread over the {} eV gap would outnumber the atoms of a TMD monolayer \
             (3.5e14 /cm² for MoS2, from its 3.16 Å lattice constant, recalled, not checked)",
            card.band_gap
        ),
    );
    if let Gate::Dirac {
        residual_density, ..
    } = card.gate
    {
        r.check(
            "gate_residual_density",
            residual_density * 1e-4,
            "/cm^2",
            (-GRAPHENE_ATOMS_PER_CM2, GRAPHENE_ATOMS_PER_CM2),
            "more than one carrier per carbon atom of graphene (3.8e15 /cm² from its 2.46 Å \
             lattice constant, recalled, not checked)",
        );
    }
    let mass_why = "band masses of 2D semiconductors lie between about 0.1 and a few electron \
        masses (S. Haastrup et al., 'The Computational 2D Materials Database', 2D Mater. 5, \
        042002 (2018), recalled, not checked); the range allows a factor of ten beyond";
    let mut masses = vec![
        ("electron_mass", card.electron_mass),
        ("hole_mass", card.hole_mass),
    ];
    // The card keys of the extra valleys' masses, in order (validate bounds the count).
    const VALLEY_MASSES: [&str; crate::sheet_fet::MAX_EXTRA_VALLEYS] = [
        "valley_mass",
        "valley2_mass",
        "valley3_mass",
        "valley4_mass",
    ];
    for (name, v) in VALLEY_MASSES.iter().zip(&card.extra_valleys) {
        masses.push((name, v.mass));
    }
    for (name, v) in masses {
        r.check(name, v, "m0", (0.01, 10.0), mass_why);
    }
    for (name, v) in [
        ("electron_mobility", card.electron_mobility),
        ("hole_mobility", card.hole_mobility),
    ] {
        r.check(
            name,
            v * 1e4,
            "cm^2/(V s)",
            (1e-3, 1e6),
            "reported 2D-channel mobilities run from well below 1 cm²/(V s) in disordered \
             films to about 2e5 in suspended graphene (K. I. Bolotin et al., 'Ultrahigh \
             electron mobility in suspended graphene', Solid State Commun. 146, 351 (2008), \
             recalled, not checked)",
        );
    }
    if card.saturation_velocity != 0.0 {
        r.check(
            "saturation_velocity",
            card.saturation_velocity * 100.0,
            "cm/s",
            (1e5, 1e8),
            "saturation velocities of 2D channels are reported around 1e6 to 1e7 cm/s (common \
             practice); no carrier band is faster than graphene's Fermi velocity of 1e8 cm/s \
             (K. S. Novoselov et al., Nature 438, 197 (2005), as in the material library)",
        );
    }
    for (name, v) in [("length", card.length), ("width", card.width)] {
        r.check(
            name,
            v * 1e6,
            "um",
            (1e-3, 1e4),
            "from the 1 nm gate of S. B. Desai et al., 'MoS2 transistors with 1-nanometer gate \
             lengths', Science 354, 99 (2016) (recalled, not checked) to a centimetre-sized \
             test structure (common practice)",
        );
    }
    for (k, l) in card.insulator.iter().enumerate() {
        r.check(
            layer_thickness_name(k),
            l.thickness * 1e9,
            "nm",
            (0.3, 1e5),
            format!(
                "layer {} of {}: thinner than one hBN layer (0.333 nm, R. S. Pease, Acta \
                 Cryst. 5, 356 (1952), as in the material library) is less than an atomic \
                 layer, and beyond 100 µm the insulator is a substrate (common practice)",
                k + 1,
                card.insulator.len()
            ),
        );
    }
    if let Some(v) = max_gate_voltage.filter(|v| v.is_finite()) {
        // Σ t_j / ε_j (m); the displacement over ε0 is |V| / Σ, so E_i = |V| / (ε_i Σ).
        let sum: f64 = card
            .insulator
            .iter()
            .map(|l| l.thickness / l.permittivity)
            .sum();
        for (k, l) in card.insulator.iter().enumerate() {
            let Some(breakdown) = l.breakdown_field else {
                continue;
            };
            let field = v.abs() / (l.permittivity * sum);
            r.check(
                layer_name(k),
                field * 1e-8,
                "MV/cm",
                (0.0, breakdown * 1e-8),
                format!(
                    "{} V on the gate puts this field across layer {} of {} (ε = {}, {} nm; \
                     series-capacitor division, leaving out the channel's own potential drop), \
                     above the layer's breakdown field",
                    short(v),
                    k + 1,
                    card.insulator.len(),
                    short(l.permittivity),
                    short(l.thickness * 1e9)
                ),
            );
        }
    }
    r.0
}

/// The operating-point check of each insulator layer's field against its breakdown field:
/// one message per layer of `device` whose field (from its `Element::details`, names in
/// [`crate::sheet_fet::insight::FIELD_DETAILS`]) exceeds the layer's breakdown field, naming
/// the device, the layer, the field and the limit in MV/cm. The fields come from the solved
/// gate charge (Gauss's law), so unlike [`plausibility`]'s estimate they include the
/// channel's own potential drop and the flat-band offset.
pub fn breakdown(device: &str, details: &[(&str, lamina_engine::DetailValue)]) -> Vec<String> {
    use lamina_engine::DetailValue::Number;
    let value = |name: &str| {
        details.iter().find_map(|(k, v)| match v {
            Number(x, _) if *k == name => Some(*x),
            _ => None,
        })
    };
    crate::sheet_fet::insight::FIELD_DETAILS
        .iter()
        .filter_map(|(field, limit)| {
            let (f, b) = (value(field)?, value(limit)?);
            let layer = field.trim_end_matches(" field");
            (f > b).then(|| {
                format!(
                    "device `{device}`: the field across `{layer}` is {} MV/cm, above its \
                     breakdown field of {} MV/cm (material library); the gate stack would \
                     break down here",
                    short(f * 1e-8),
                    short(b * 1e-8)
                )
            })
        })
        .collect()
}
