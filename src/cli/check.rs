//! `lamina check`: parse and elaborate a circuit file; a summary or located errors. With
//! `--verbose`, every distinct 2D-FET card as resolved: each value with its unit and where it
//! came from, and the figures derived from its stack ([`crate::describe`]).
//!
//! The description lives here rather than in a job of its own because it answers the same
//! question as `check` (what did this file elaborate to?) from the same load, runs no
//! analysis, and is wanted exactly when a card is being written.

use super::materials::{num, section_singular};
use crate::describe::{self, json_key, Described, Figures};
use crate::design;
use crate::error::JobError;
use crate::out;
use lamina_devices::materials;
use lamina_devices::mobility::{CarrierMobility, LatticeSource};
use lamina_netlist::catalog::{Origin, Setter};
use serde_json::{json, Map, Value};
use std::path::PathBuf;

/// Flags of `lamina check`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`).
    pub file: PathBuf,
    /// Override a top-level parameter: `--set vdd=0.7V` (repeatable).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Print the summary as one JSON object.
    #[arg(long)]
    pub json: bool,
    /// Also describe every distinct 2D-FET card as resolved: each value with its unit and
    /// origin (library, card, instance, derived, default), the insulator capacitance, EOT,
    /// flat-band and threshold voltages, the mobility used (model estimates).
    #[arg(long, short)]
    pub verbose: bool,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        set,
        json,
        verbose,
    } = a;
    let sets = design::parse_sets(&set)?;
    let d = design::load(&file, &sets)?;
    let described = if verbose {
        Some(describe::describe(&d).map_err(JobError::Invalid)?)
    } else {
        None
    };
    if json {
        let mut v = design::summary_json(&d);
        if let (Some((cards, left_out)), Some(m)) = (&described, v.as_object_mut()) {
            m.insert("cards".into(), cards.iter().map(card_json).collect());
            m.insert("cards_not_shown".into(), json!(left_out));
            m.insert("definitions".into(), definitions());
            m.insert("caution".into(), json!(super::CAUTION));
        }
        out!("{v}");
    } else {
        out!("{}", design::summary_text(&file, &d));
        if let Some((cards, left_out)) = &described {
            for c in cards {
                print_card(c);
            }
            if *left_out > 0 {
                out!(
                    "\n{left_out} more 2D-FET elements use cards beyond the first {} distinct ones (not shown)",
                    describe::MAX_CARDS
                );
            }
            if !cards.is_empty() {
                out!("\nDerived figures are model estimates:");
                for (_, text) in DEFINITIONS {
                    out!("  {text}");
                }
                out!("Sources of library values: `lamina materials NAME`.");
            }
        }
    }
    Ok(())
}

/// The definition of each derived figure, keyed as in the JSON.
const DEFINITIONS: &[(&str, &str)] = &[
    (
        "insulator_capacitance_f_per_m2",
        "C_ins: series layers, 1 / sum(t_i / (eps_i eps0))",
    ),
    (
        "eot_m",
        "EOT: 3.9 eps0 / C_ins, the SiO2 thickness of the same capacitance (eps_SiO2 = 3.9, common practice)",
    ),
    (
        "flat_band_v",
        "V_FB: (Phi_G - chi)/q - q (N_D - N_A + N_fix) / C_ins, the gate voltage at which the conduction band edge would meet the Fermi level with mobile and trapped charge left out (Phi_G: metal work function, or a Dirac gate's neutral work function)",
    ),
    (
        "threshold_n_v",
        "V_T,n: gate voltage at V_DS = 0 (source at 0 V) where the electron density reaches 1e11 /cm^2, from the exact local solve",
    ),
    (
        "threshold_p_v",
        "V_T,p: gate voltage at V_DS = 0 where the hole density falls to 1e11 /cm^2 (it exceeds it below)",
    ),
    (
        "valid_u_range_v",
        "valid u range: V_G - V over which the device's tables hold the direct solve",
    ),
];

fn definitions() -> Value {
    DEFINITIONS
        .iter()
        .map(|(k, d)| (k.to_string(), json!(d)))
        .collect::<Map<_, _>>()
        .into()
}

fn setter(s: Setter) -> &'static str {
    match s {
        Setter::Card => "card",
        Setter::Instance => "instance",
        Setter::CommandLine => "command line",
        Setter::Unset => "default",
    }
}

/// The origin in a few words for the table.
fn origin_text(o: &Origin) -> String {
    match o {
        Origin::Instance => "instance".into(),
        Origin::Card => "card".into(),
        Origin::CommandLine => "--set on the command line".into(),
        Origin::Library {
            section,
            entry,
            key,
            note,
        } => {
            let mut t = format!("library {} {entry}, {key}", section_singular(section));
            if let Some(n) = note {
                t.push_str(&format!("; {n}"));
            }
            t
        }
        Origin::Derived(how) => format!("derived: {how}"),
        Origin::Default => "model default".into(),
    }
}

fn origin_json(o: &Origin) -> Value {
    match o {
        Origin::Instance => json!({ "from": "instance" }),
        Origin::Card => json!({ "from": "card" }),
        Origin::CommandLine => json!({ "from": "command_line" }),
        Origin::Library {
            section,
            entry,
            key,
            note,
        } => json!({
            "from": "library",
            "section": section,
            "entry": entry,
            "key": key,
            "note": note,
            "source": materials::source(section, entry, key),
        }),
        Origin::Derived(how) => json!({ "from": "derived", "how": how }),
        Origin::Default => json!({ "from": "default" }),
    }
}

fn print_card(c: &Described) {
    let more = c.element_count - c.elements.len();
    out!(
        "\n2D-FET card `{}` used by {}{} ({} element{})",
        c.device,
        c.elements.join(", "),
        if more > 0 {
            format!(" and {more} more")
        } else {
            String::new()
        },
        c.element_count,
        if c.element_count == 1 { "" } else { "s" }
    );
    for (key, name, s) in &c.names {
        out!("  {key:<36} {name:>16} {:<10} {}", "", setter(*s));
    }
    for v in &c.values {
        // Zero means "none" for these keys (no velocity saturation, no contact resistance),
        // not a zero velocity or a short.
        let none = v.value == 0.0
            && matches!(
                v.key.as_str(),
                "saturation_velocity" | "source_resistance" | "drain_resistance"
            );
        out!(
            "  {:<36} {:>16} {:<10} {}",
            v.key,
            if none {
                "none".to_string()
            } else {
                num(v.value)
            },
            if none { "" } else { v.unit },
            origin_text(&v.origin)
        );
    }
    let f = &c.figures;
    out!("  derived (model estimates)");
    let line = |what: &str, value: String, unit: &str| {
        out!("    {what:<34} {value:>16} {unit}");
    };
    line(
        "insulator capacitance C_ins",
        num(f.insulator_capacitance_f_per_m2),
        "F/m²",
    );
    line("EOT (eps_SiO2 = 3.9)", num(f.eot_m), "m");
    line("flat-band voltage V_FB", num(f.flat_band_v), "V");
    let vt = |v: Option<f64>| v.map_or("not reached".to_string(), num);
    line("threshold V_T,n (1e11 /cm² e⁻)", vt(f.threshold_n_v), "V");
    line("threshold V_T,p (1e11 /cm² h⁺)", vt(f.threshold_p_v), "V");
    line("thermal voltage kT/q", num(f.thermal_voltage_v), "V");
    let (lo, hi) = f.valid_u_range_v;
    line(
        "valid u = V_G - V",
        format!("{} .. {}", num(lo), num(hi)),
        "V",
    );
    for (carrier, m) in [
        ("electron", &f.mobility.electron),
        ("hole", &f.mobility.hole),
    ] {
        line(
            &format!("{carrier} mobility used"),
            num(m.mobility),
            "m²/(V s)",
        );
        out!("      {}", mobility_how(m));
    }
}

/// How a carrier's mobility was obtained, in words.
fn mobility_how(m: &CarrierMobility) -> String {
    let mut t = match m.source {
        LatticeSource::Given => "the card's value at the device temperature".to_string(),
        LatticeSource::PowerLaw {
            reference_mobility,
            reference_temperature,
            exponent,
        } => format!(
            "power law: {} m²/(V s) at {} K times (T / {} K)^-{}",
            num(reference_mobility),
            num(reference_temperature),
            num(reference_temperature),
            num(exponent)
        ),
        LatticeSource::AcousticPhonon {
            deformation_potential,
            elastic_modulus,
            transport_mass,
            dos_mass,
        } => format!(
            "acoustic phonons: e hbar^3 C_2D / (k_B T m_t m_d E_1^2) with E_1 = {} eV, C_2D = {} J/m², m_t = {} m0, m_d = {} m0",
            num(deformation_potential),
            num(elastic_modulus),
            num(transport_mass),
            num(dos_mass)
        ),
    };
    if let Some(i) = m.impurity {
        t.push_str(&format!(
            "; lattice part {} m²/(V s) combined with impurity-limited {} m²/(V s) by Matthiessen's rule",
            num(m.lattice),
            num(i)
        ));
    }
    if let Some(d) = m.density {
        t.push_str(&format!(
            "; scaled along the channel by 1 / (1 + ({} /m² / n)^{})",
            num(d.reference_density),
            num(d.exponent)
        ));
    }
    t
}

fn mobility_json(m: &CarrierMobility) -> Value {
    let source = match m.source {
        LatticeSource::Given => json!({ "model": "given" }),
        LatticeSource::PowerLaw {
            reference_mobility,
            reference_temperature,
            exponent,
        } => json!({
            "model": "power_law",
            "reference_mobility_m2_per_v_s": reference_mobility,
            "reference_temperature_k": reference_temperature,
            "exponent": exponent,
        }),
        LatticeSource::AcousticPhonon {
            deformation_potential,
            elastic_modulus,
            transport_mass,
            dos_mass,
        } => json!({
            "model": "acoustic_phonon",
            "deformation_potential_ev": deformation_potential,
            "elastic_modulus_j_per_m2": elastic_modulus,
            "transport_mass_m0": transport_mass,
            "dos_mass_m0": dos_mass,
        }),
    };
    json!({
        "mobility_m2_per_v_s": m.mobility,
        "lattice_m2_per_v_s": m.lattice,
        "lattice_source": source,
        "impurity_m2_per_v_s": m.impurity,
        "density_dependence": m.density.map(|d| json!({
            "reference_density_per_m2": d.reference_density,
            "exponent": d.exponent,
        })),
        "how": mobility_how(m),
    })
}

fn figures_json(f: &Figures) -> Value {
    json!({
        "insulator_capacitance_f_per_m2": f.insulator_capacitance_f_per_m2,
        "eot_m": f.eot_m,
        "flat_band_v": f.flat_band_v,
        "threshold_n_v": f.threshold_n_v,
        "threshold_p_v": f.threshold_p_v,
        "threshold_density_per_m2": describe::THRESHOLD_DENSITY_PER_M2,
        "thermal_voltage_v": f.thermal_voltage_v,
        "valid_u_range_v": [f.valid_u_range_v.0, f.valid_u_range_v.1],
        "electron_mobility": mobility_json(&f.mobility.electron),
        "hole_mobility": mobility_json(&f.mobility.hole),
    })
}

fn card_json(c: &Described) -> Value {
    let names: Map<String, Value> = c
        .names
        .iter()
        .map(|(k, n, s)| (k.to_string(), json!({ "name": n, "from": setter(*s) })))
        .collect();
    let values: Map<String, Value> = c
        .values
        .iter()
        .map(|v| {
            let mut o = origin_json(&v.origin);
            o["value"] = json!(v.value);
            (json_key(&v.key, v.unit), o)
        })
        .collect();
    json!({
        "device": c.device,
        "elements": c.elements,
        "element_count": c.element_count,
        "names": names,
        "values": values,
        "derived": figures_json(&c.figures),
    })
}
