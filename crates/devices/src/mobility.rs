//! How a sheet FET's electron and hole mobilities are obtained: as given, by a power law in
//! temperature, or from the deformation-potential theory of acoustic-phonon scattering, each
//! optionally combined with an impurity- or interface-limited mobility by Matthiessen's rule.
//!
//! # Models (card units: m²/(V s), K, eV, N/m = J/m², electron masses)
//! The lattice-limited mobility `μ_L` of each carrier at the device temperature `T` is one of
//!
//! ```text
//! as given:        μ_L = electron_mobility                                 (no options)
//! power law:       μ_L = μ_ref (T / T_ref)^(-γ)                            (T_ref given)
//! acoustic phonon: μ_L = e ħ³ C_2D / (k_B T m_t m_d E_1²)
//! ```
//!
//! The power law is the usual description of phonon-limited mobility near room temperature
//! (common practice); `μ_ref` is the card's `electron_mobility` (or `hole_mobility`) read as
//! the mobility at `T_ref`, and `γ` its exponent (K. Kaasbjerg, K. S. Thygesen, K. W.
//! Jacobsen, "Phonon-limited mobility in n-type single-layer MoS2 from first principles",
//! Phys. Rev. B 85, 115317 (2012), find γ = 1.69 for MoS2 electrons at room temperature).
//! Without a reference temperature it is the device temperature, so the card's mobility is
//! used as given whatever the exponent.
//!
//! The acoustic-phonon formula is the deformation-potential result for a 2D sheet with
//! elastic (equipartition) scattering by longitudinal acoustic phonons, as used for silicon
//! inversion layers by S. Takagi and co-workers (1994; reference recalled, not checked) and by
//! J. Qiao, X. Kong, Z.-X. Hu, F. Yang, W. Ji, "High-mobility transport
//! anisotropy and linear dichroism in few-layer black phosphorus", Nat. Commun. 5, 4475
//! (2014), their equation (1): `E_1` is the deformation potential of the band edge, `C_2D`
//! the 2D elastic modulus along the transport direction, `m_t` the effective mass along the
//! transport direction and `m_d = √(m_along m_across)` the density-of-states mass (the
//! card's `electron_mass` or `hole_mass`). It falls as `1/T`.
//!
//! An impurity- or interface-limited mobility `μ_I`, when given, is combined by Matthiessen's
//! rule, `1/μ = 1/μ_L + 1/μ_I` (common practice): the scattering rates of independent
//! mechanisms add.
//!
//! # Density dependence (optional)
//! Without further options the mobility is one number per carrier for the whole device. With
//! a reference density `n_ref` (and an exponent `α`, default 1) the carrier's mobility `μ_0`
//! obtained above becomes a function of its own sheet density `n` at each point of the
//! channel:
//!
//! ```text
//! μ(n) = μ_0 / (1 + (n_ref / n)^α),   i.e.   1/μ(n) = 1/μ_0 + 1/μ_C(n),  μ_C(n) = μ_0 (n / n_ref)^α
//! ```
//!
//! a Coulomb (charged-impurity) limited term that rises as a power of the density, because
//! the carriers screen the impurities better the more of them there are, combined with `μ_0`
//! by Matthiessen's rule. Z. Yu, Z.-Y. Ong, Y. Pan, Y. Cui, R. Xin, Y. Shi, B. Wang, Y. Wu,
//! T. Chen, Y.-W. Zhang, G. Zhang, X. Wang, "Realization of Room-Temperature Phonon-Limited
//! Carrier Transport in Monolayer MoS2 by Dielectric and Carrier Screening", Adv. Mater. 28,
//! 547 (2016), separate the mobility of monolayer MoS2 transistors this way into phonon- and
//! Coulomb-impurity-limited parts and study the latter's scaling with carrier density (the
//! paper and its subject found; the power-law form of that scaling, `μ_C ∝ n^α` with `α` of
//! order one, is recalled, not checked). The form is empirical: `n_ref` is the density at
//! which the Coulomb term halves the mobility and `α` how steeply it lifts off; both are
//! fitted to a measured `μ(n)`, not derived from the stack.
//!
//! Limits (closed form): `μ → μ_0 (1 - (n_ref/n)^α)` far above `n_ref`, `μ → μ_0 (n/n_ref)^α`
//! far below it, `μ_0 / 2` at `n = n_ref`. The density dependence enters the tabulated
//! conductance `σ = q (μ_n(n) n + μ_p(p) p)` ([`DensityDependence::conductance_density`]), so
//! the charge-sheet integrals stay integrals of `σ`; the velocity-saturation field
//! `v_sat / max(μ_n, μ_p)` keeps the high-density `μ_0`. The mobility does not depend on the
//! field along the channel other than through the card's Caughey-Thomas factor.
//!
//! [`crate::SheetFet::new`] resolves the options once ([`resolve`]) and builds its tables
//! from the resulting mobilities; [`crate::SheetModel::build`] takes the card's
//! `electron_mobility` and `hole_mobility` as they are, so resolve a card first
//! ([`SheetFetCard::with_resolved_mobility`]) before building a model from it directly.

use crate::physics::{HBAR, K_B, M0, Q};
use crate::sheet_fet::{above_zero, in_range, SheetFetCard, MAX_TEMPERATURE_K, MIN_TEMPERATURE_K};
use std::fmt;

/// Where a carrier's lattice-limited mobility comes from.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum LatticeModel {
    /// The card's `electron_mobility` / `hole_mobility`, scaled by the power law in
    /// temperature when a reference temperature is given.
    #[default]
    PowerLaw,
    /// The deformation-potential formula for acoustic-phonon scattering.
    AcousticPhonon,
}

/// Mobility options of one carrier.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct CarrierOptions {
    /// Power-law exponent γ of `μ ∝ T^(-γ)` (used with a reference temperature).
    pub exponent: f64,
    /// Deformation potential `E_1` of the band edge (eV), for the acoustic-phonon model.
    pub deformation_potential: Option<f64>,
    /// Effective mass along the transport direction (electron masses); `None` for an
    /// isotropic band, whose transport mass is the density-of-states mass.
    pub transport_mass: Option<f64>,
    /// Impurity- or interface-limited mobility (m²/(V s)), combined by Matthiessen's rule.
    pub impurity_mobility: Option<f64>,
    /// Optional dependence of the mobility on the carrier's own sheet density.
    pub density: Option<DensityDependence>,
}

/// The density dependence `μ(n) = μ_0 / (1 + (n_ref / n)^α)` of one carrier's mobility (see
/// the module docs for the form and its source).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DensityDependence {
    /// `n_ref` (1/m²): the density at which the mobility is half of `μ_0`.
    pub reference_density: f64,
    /// `α`.
    pub exponent: f64,
}

impl DensityDependence {
    /// `μ(n) / μ_0 = s / (1 + s)` with `s = (n / n_ref)^α` (0 at `n = 0`).
    pub fn factor(&self, n: f64) -> f64 {
        let s = (n / self.reference_density).powf(self.exponent);
        s / (1.0 + s)
    }

    /// `n μ(n) / μ_0` and its derivative in `n`, `f (1 + α / (1 + s))` with `f` the
    /// [`factor`](Self::factor): what the conductance uses in place of `n` and `1`. Finite
    /// for every finite `n >= 0`.
    pub fn conductance_density(&self, n: f64) -> (f64, f64) {
        let s = (n / self.reference_density).powf(self.exponent);
        let f = s / (1.0 + s);
        (n * f, f * (1.0 + self.exponent / (1.0 + s)))
    }
}

/// How the card's mobilities are obtained (the default: as given).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct MobilityOptions {
    /// The lattice-limited model of both carriers.
    pub model: LatticeModel,
    /// Temperature (K) at which `electron_mobility` and `hole_mobility` hold under the power
    /// law; `None`: the device temperature.
    pub reference_temperature: Option<f64>,
    /// 2D elastic modulus along the transport direction (N/m = J/m²), for the acoustic-phonon
    /// model.
    pub elastic_modulus: Option<f64>,
    /// Electron options.
    pub electron: CarrierOptions,
    /// Hole options.
    pub hole: CarrierOptions,
}

/// How one carrier's lattice-limited mobility was obtained.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum LatticeSource {
    /// The card's value, at the device temperature.
    Given,
    /// `μ_ref (T / T_ref)^(-γ)`.
    PowerLaw {
        /// `μ_ref` (m²/(V s)).
        reference_mobility: f64,
        /// `T_ref` (K).
        reference_temperature: f64,
        /// γ.
        exponent: f64,
    },
    /// `e ħ³ C_2D / (k_B T m_t m_d E_1²)`.
    AcousticPhonon {
        /// `E_1` (eV).
        deformation_potential: f64,
        /// `C_2D` (N/m).
        elastic_modulus: f64,
        /// `m_t` (electron masses).
        transport_mass: f64,
        /// `m_d` (electron masses).
        dos_mass: f64,
    },
}

/// The mobility one carrier uses, and how it was obtained.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CarrierMobility {
    /// The mobility used (m²/(V s)).
    pub mobility: f64,
    /// The lattice-limited part at the device temperature (m²/(V s)).
    pub lattice: f64,
    /// Where the lattice part comes from.
    pub source: LatticeSource,
    /// The impurity-limited part combined by Matthiessen's rule, if any (m²/(V s)).
    pub impurity: Option<f64>,
    /// The density dependence that scales `mobility` along the channel, if any.
    pub density: Option<DensityDependence>,
}

/// The electron and hole mobilities a device uses, and how they were obtained.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MobilityReport {
    /// Device temperature (K).
    pub temperature: f64,
    /// Electrons.
    pub electron: CarrierMobility,
    /// Holes.
    pub hole: CarrierMobility,
}

/// The acoustic-phonon-limited 2D mobility (m²/(V s)) `e ħ³ C_2D / (k_B T m_t m_d E_1²)`
/// (Qiao et al. 2014, equation (1)), with `C_2D` in N/m, `T` in K, the masses in electron
/// masses and `E_1` in eV.
pub fn acoustic_phonon_mobility(
    deformation_potential: f64,
    elastic_modulus: f64,
    transport_mass: f64,
    dos_mass: f64,
    temperature: f64,
) -> f64 {
    let e1 = deformation_potential * Q;
    Q * HBAR.powi(3) * elastic_modulus
        / (K_B * temperature * transport_mass * dos_mass * M0 * M0 * e1 * e1)
}

/// Matthiessen's rule: `1 / (1/a + 1/b)`.
pub fn matthiessen(a: f64, b: f64) -> f64 {
    1.0 / (1.0 / a + 1.0 / b)
}

/// The power law `μ_ref (T / T_ref)^(-γ)`.
pub fn power_law(reference_mobility: f64, temperature: f64, reference: f64, exponent: f64) -> f64 {
    reference_mobility * (temperature / reference).powf(-exponent)
}

/// Names of one carrier's card settings, for messages.
struct Names {
    carrier: &'static str,
    mobility: &'static str,
    exponent: &'static str,
    deformation: &'static str,
    transport_mass: &'static str,
    impurity: &'static str,
    density_reference: &'static str,
    density_exponent: &'static str,
}

const ELECTRON: Names = Names {
    carrier: "electron",
    mobility: "electron_mobility",
    exponent: "electron_mobility_exponent",
    deformation: "electron_deformation_potential",
    transport_mass: "electron_mass_along",
    impurity: "electron_impurity_mobility",
    density_reference: "electron_mobility_density_reference",
    density_exponent: "electron_mobility_density_exponent",
};

const HOLE: Names = Names {
    carrier: "hole",
    mobility: "hole_mobility",
    exponent: "hole_mobility_exponent",
    deformation: "hole_deformation_potential",
    transport_mass: "hole_mass_along",
    impurity: "hole_impurity_mobility",
    density_reference: "hole_mobility_density_reference",
    density_exponent: "hole_mobility_density_exponent",
};

/// Checks one carrier's options and resolves its mobility.
fn carrier(
    card: &SheetFetCard,
    names: &Names,
    given: f64,
    dos_mass: f64,
    o: &CarrierOptions,
) -> Result<CarrierMobility, String> {
    let m = &card.mobility;
    let t = card.temperature;
    in_range(names.exponent, o.exponent, -10.0, 10.0, "")?;
    if let Some(e1) = o.deformation_potential {
        above_zero(names.deformation, e1, 1e3, "eV")?;
    }
    if let Some(mt) = o.transport_mass {
        in_range(names.transport_mass, mt, 1e-4, 1e4, "electron masses")?;
    }
    if let Some(mi) = o.impurity_mobility {
        in_range(names.impurity, mi, 1e-12, 1e3, "m²/(V s)")?;
    }
    if let Some(d) = o.density {
        in_range(
            names.density_reference,
            d.reference_density,
            1e4,
            1e20,
            "1/m²",
        )?;
        in_range(names.density_exponent, d.exponent, 0.1, 4.0, "")?;
    }
    let (lattice, source) = match m.model {
        LatticeModel::PowerLaw => match m.reference_temperature {
            Some(t_ref) if o.exponent != 0.0 => (
                power_law(given, t, t_ref, o.exponent),
                LatticeSource::PowerLaw {
                    reference_mobility: given,
                    reference_temperature: t_ref,
                    exponent: o.exponent,
                },
            ),
            _ => (given, LatticeSource::Given),
        },
        LatticeModel::AcousticPhonon => {
            let e1 = o.deformation_potential.ok_or_else(|| {
                format!(
                    "the acoustic-phonon mobility needs the {} deformation potential \
                     `{}`",
                    names.carrier, names.deformation
                )
            })?;
            let c2d = m.elastic_modulus.ok_or(
                "the acoustic-phonon mobility needs the 2D elastic modulus `elastic_modulus`",
            )?;
            let mt = o.transport_mass.unwrap_or(dos_mass);
            (
                acoustic_phonon_mobility(e1, c2d, mt, dos_mass, t),
                LatticeSource::AcousticPhonon {
                    deformation_potential: e1,
                    elastic_modulus: c2d,
                    transport_mass: mt,
                    dos_mass,
                },
            )
        }
    };
    let mobility = match o.impurity_mobility {
        Some(mi) => matthiessen(lattice, mi),
        None => lattice,
    };
    if !(1e-12..=1e3).contains(&mobility) {
        return Err(format!(
            "the {} mobility the options give, {mobility:e} m²/(V s), lies outside [1e-12, \
             1e3] m²/(V s): check `{}` and its mobility options",
            names.carrier, names.mobility
        ));
    }
    Ok(CarrierMobility {
        mobility,
        lattice,
        source,
        impurity: o.impurity_mobility,
        density: o.density,
    })
}

/// Checks the card's mobility options and returns the mobilities they give at the card's
/// temperature. With no options set, the mobilities are the card's, untouched.
///
/// Accepted (beyond the card's own checks): reference temperature in [1, 1e4] K, exponents in
/// [-10, 10], deformation potentials in (0, 1e3] eV, the elastic modulus in (0, 1e5] N/m,
/// transport masses in [1e-4, 1e4] electron masses, impurity mobilities and the resulting
/// mobilities in [1e-12, 1e3] m²/(V s), density-dependence reference densities in [1e4, 1e20]
/// 1/m² (1e0 to 1e16 /cm²) and their exponents in [0.1, 4]. The acoustic-phonon model needs
/// both deformation potentials and the elastic modulus.
pub fn resolve(card: &SheetFetCard) -> Result<MobilityReport, String> {
    let m = &card.mobility;
    if let Some(t_ref) = m.reference_temperature {
        in_range(
            "mobility_reference_temperature",
            t_ref,
            MIN_TEMPERATURE_K,
            MAX_TEMPERATURE_K,
            "K",
        )?;
    }
    if let Some(c) = m.elastic_modulus {
        above_zero("elastic_modulus", c, 1e5, "N/m")?;
    }
    Ok(MobilityReport {
        temperature: card.temperature,
        electron: carrier(
            card,
            &ELECTRON,
            card.electron_mobility,
            card.electron_mass,
            &m.electron,
        )?,
        hole: carrier(card, &HOLE, card.hole_mobility, card.hole_mass, &m.hole)?,
    })
}

impl SheetFetCard {
    /// The card with its mobility options resolved: `electron_mobility` and `hole_mobility`
    /// set to the mobilities used at its temperature and the options cleared except the
    /// density dependences (which the tables apply), so that [`crate::SheetModel::build`]
    /// sees the same mobilities as [`crate::SheetFet::new`].
    pub fn with_resolved_mobility(&self) -> Result<SheetFetCard, String> {
        let r = resolve(self)?;
        let keep = |o: &CarrierOptions| CarrierOptions {
            density: o.density,
            ..CarrierOptions::default()
        };
        Ok(SheetFetCard {
            electron_mobility: r.electron.mobility,
            hole_mobility: r.hole.mobility,
            mobility: MobilityOptions {
                electron: keep(&self.mobility.electron),
                hole: keep(&self.mobility.hole),
                ..MobilityOptions::default()
            },
            ..self.clone()
        })
    }
}

impl fmt::Display for CarrierMobility {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let cm2 = |m: f64| format!("{:.4} cm²/(V s)", m * 1e4);
        write!(f, "{}", cm2(self.mobility))?;
        let lattice = match self.source {
            LatticeSource::Given => "as given".to_string(),
            LatticeSource::PowerLaw {
                reference_mobility,
                reference_temperature,
                exponent,
            } => format!(
                "power law from {} at {reference_temperature} K with exponent {exponent}",
                cm2(reference_mobility)
            ),
            LatticeSource::AcousticPhonon {
                deformation_potential,
                elastic_modulus,
                transport_mass,
                dos_mass,
            } => format!(
                "acoustic-phonon limited: E1 = {deformation_potential} eV, C2D = \
                 {elastic_modulus} N/m, m_t = {transport_mass}, m_d = {dos_mass:.4}"
            ),
        };
        match self.impurity {
            Some(mi) => write!(
                f,
                " (lattice {}, {lattice}; impurity {}; Matthiessen's rule)",
                cm2(self.lattice),
                cm2(mi)
            ),
            None => write!(f, " ({lattice})"),
        }?;
        match self.density {
            Some(d) => write!(
                f,
                " at high density, scaled by 1/(1 + ({:e} cm⁻² / n)^{})",
                d.reference_density * 1e-4,
                d.exponent
            ),
            None => Ok(()),
        }
    }
}

impl fmt::Display for MobilityReport {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "at {} K: electrons {}; holes {}",
            self.temperature, self.electron, self.hole
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The power law at its reference temperature returns the reference mobility exactly.
    #[test]
    fn power_law_at_reference_is_the_reference() {
        assert_eq!(power_law(0.04, 300.0, 300.0, 1.69), 0.04);
        // Doubling the temperature divides by 2^γ.
        let r = power_law(0.04, 600.0, 300.0, 1.69) / 0.04;
        assert!((r - 2f64.powf(-1.69)).abs() < 1e-15, "{r}");
    }
}
