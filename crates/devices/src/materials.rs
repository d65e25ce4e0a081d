//! The material library: monolayer channels, insulators and gate electrodes with cited
//! values, read from `data/materials.json` (compiled into the binary). Every value carries its
//! source in the file; any value can be overridden in a device card.

use crate::sheet_fet::leakage::Barrier;
use crate::sheet_fet::{valley_key, ExtraValley, Gate, Layer, SheetFetCard, MAX_EXTRA_VALLEYS};
use serde_json::Value;
use std::sync::OnceLock;

const DATA: &str = include_str!("../data/materials.json");

fn data() -> &'static Value {
    static PARSED: OnceLock<Value> = OnceLock::new();
    // The file is part of the crate and checked by a test, so a parse failure is a build bug.
    PARSED.get_or_init(|| serde_json::from_str(DATA).expect("materials.json is valid JSON"))
}

fn names(section: &str) -> Vec<String> {
    data()[section]
        .as_object()
        .map(|m| m.keys().cloned().collect())
        .unwrap_or_default()
}

fn entry(section: &str, name: &str) -> Result<&'static Value, String> {
    let v = &data()[section][name];
    if v.is_null() {
        let known = names(section);
        let hint = suggestion(name, &known)
            .map(|s| format!("; did you mean `{s}`?"))
            .unwrap_or_default();
        Err(format!(
            "no {} called `{name}` in the material library{hint} (it has: {})",
            &section[..section.len() - 1],
            known.join(", ")
        ))
    } else {
        Ok(v)
    }
}

/// The known name `name` was probably meant to be: the one equal to it ignoring case, else the
/// closest by edit distance ignoring case, if that distance is at most a third of the known
/// name's length (so two-letter symbols such as `Au` are only matched by case). Names longer
/// than 64 characters get no suggestion, which bounds the work.
fn suggestion<'a>(name: &str, known: &'a [String]) -> Option<&'a str> {
    let lower = name.to_lowercase();
    if let Some(k) = known.iter().find(|k| k.to_lowercase() == lower) {
        return Some(k);
    }
    if lower.chars().count() > 64 {
        return None;
    }
    known
        .iter()
        .map(|k| (edit_distance(&lower, &k.to_lowercase()), k))
        .filter(|(d, k)| *d <= k.chars().count() / 3)
        .min_by_key(|(d, _)| *d)
        .map(|(_, k)| k.as_str())
}

/// Levenshtein distance (insertions, deletions and substitutions of one character each), by
/// the textbook dynamic programme over one row (common practice).
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut diagonal = row[0];
        row[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let substitute = diagonal + usize::from(ca != cb);
            diagonal = row[j + 1];
            row[j + 1] = substitute.min(row[j] + 1).min(diagonal + 1);
        }
    }
    row[b.len()]
}

fn number(e: &Value, key: &str, name: &str) -> Result<f64, String> {
    e[key]["value"]
        .as_f64()
        .ok_or_else(|| format!("material `{name}` has no `{key}`"))
}

/// Names of the channel materials.
pub fn channels() -> Vec<String> {
    names("channels")
}

/// Names of the insulators.
pub fn insulators() -> Vec<String> {
    names("insulators")
}

/// Names of the gate electrodes.
pub fn gates() -> Vec<String> {
    names("gates")
}

/// The cited source of one value, e.g. `source("channels", "MoS2", "electron_mass")`.
pub fn source(section: &str, name: &str, key: &str) -> Option<&'static str> {
    data()[section][name][key]["source"].as_str()
}

/// The library's three sections, in the order a listing shows them.
pub const SECTIONS: [&str; 3] = ["channels", "insulators", "gates"];

/// One value of a library entry, as the file holds it.
#[derive(Clone, Debug, PartialEq)]
pub struct LibraryValue {
    /// Its key in the entry (`band_gap`, `electron_mass_armchair`, ...).
    pub key: &'static str,
    /// The number, in the unit [`unit()`] gives for `key`.
    pub value: f64,
    /// The range its source gives, where the library records one (the value is a
    /// representative inside it).
    pub range: Option<(f64, f64)>,
    /// The cited source.
    pub source: &'static str,
}

/// Every numeric value of the entry `name` in `section` (one of [`SECTIONS`]), in key order,
/// or the message naming the known entries.
pub fn values(section: &str, name: &str) -> Result<Vec<LibraryValue>, String> {
    let e = entry(section, name)?;
    Ok(e.as_object()
        .into_iter()
        .flatten()
        .filter_map(|(key, v)| {
            let range = match v["range"].as_array().map(Vec::as_slice) {
                Some([lo, hi]) => lo.as_f64().zip(hi.as_f64()),
                _ => None,
            };
            Some(LibraryValue {
                key: key.as_str(),
                value: v["value"].as_f64()?,
                range,
                source: v["source"].as_str()?,
            })
        })
        .collect())
}

/// The kind of the library gate `name`: `metal` or `dirac`.
pub fn gate_kind(name: &str) -> Option<&'static str> {
    data()["gates"][name]["kind"].as_str()
}

/// The unit of a library key (see the file's `about`): `eV` for energies, `m0` for masses in
/// free-electron masses, `1` for pure numbers (degeneracies, exponents, relative
/// permittivities), SI otherwise. `None` for a key the library does not use.
pub fn unit(key: &str) -> Option<&'static str> {
    const UNITS: &[(&str, &str)] = &[
        ("varshni_alpha", "eV/K"),
        ("varshni_beta", "K"),
        ("mobility_exponent", "1"),
        ("mass", "m0"),
        ("degeneracy", "1"),
        ("gap", "eV"),
        ("electron_affinity", "eV"),
        ("ionisation_energy", "eV"),
        ("offset", "eV"),
        ("deformation_potential", "eV"),
        ("work_function", "eV"),
        ("elastic_modulus", "J/m²"),
        ("permittivity", "1"),
        ("layer_thickness", "m"),
        ("breakdown_field", "V/m"),
        ("fermi_velocity", "m/s"),
    ];
    UNITS
        .iter()
        .find(|(stem, _)| key.contains(stem))
        .map(|(_, unit)| *unit)
}

/// Sets the channel fields of `card` from the library's `name`, an isotropic channel (an
/// anisotropic one needs a transport direction: [`apply_channel_along`]).
pub fn apply_channel(card: &mut SheetFetCard, name: &str) -> Result<(), String> {
    apply_channel_along(card, name, None)
}

/// The transport directions of the library channel `name` (`armchair`, `zigzag`), empty for
/// an isotropic channel. An anisotropic entry gives its masses per direction, as
/// `electron_mass_<direction>`, and may give the deformation potentials and the elastic
/// modulus per direction in the same way.
pub fn transport_directions(name: &str) -> Result<Vec<String>, String> {
    Ok(directions(entry("channels", name)?))
}

fn directions(e: &Value) -> Vec<String> {
    e.as_object()
        .map(|m| {
            m.keys()
                .filter_map(|k| k.strip_prefix("electron_mass_"))
                .map(str::to_string)
                .collect()
        })
        .unwrap_or_default()
}

/// The effective masses of an anisotropic library channel along and across `direction`:
/// `[electron along, electron across, hole along, hole across]` (electron masses).
pub fn anisotropic_masses(name: &str, direction: &str) -> Result<[f64; 4], String> {
    masses_of(entry("channels", name)?, name, direction)
}

fn masses_of(e: &Value, name: &str, direction: &str) -> Result<[f64; 4], String> {
    let across = across(e, name, direction)?;
    Ok([
        number(e, &format!("electron_mass_{direction}"), name)?,
        number(e, &format!("electron_mass_{across}"), name)?,
        number(e, &format!("hole_mass_{direction}"), name)?,
        number(e, &format!("hole_mass_{across}"), name)?,
    ])
}

/// The other of an anisotropic channel's two directions.
fn across(e: &Value, name: &str, direction: &str) -> Result<String, String> {
    let dirs = directions(e);
    if dirs.is_empty() {
        return Err(format!(
            "channel `{name}` is isotropic: `transport_direction` means nothing for it"
        ));
    }
    if !dirs.iter().any(|d| d == direction) {
        return Err(format!(
            "no `transport_direction` `{direction}` for channel `{name}` (it has: {})",
            dirs.join(", ")
        ));
    }
    match dirs.iter().filter(|d| *d != direction).collect::<Vec<_>>()[..] {
        [other] => Ok(other.clone()),
        _ => Err(format!(
            "channel `{name}` must list exactly two transport directions in the library, found {}",
            dirs.len()
        )),
    }
}

/// A value that may be given per direction (`key_<direction>`) or for all (`key`).
fn optional(e: &Value, key: &str, direction: Option<&str>) -> Option<f64> {
    direction
        .and_then(|d| e[format!("{key}_{d}")]["value"].as_f64())
        .or_else(|| e[key]["value"].as_f64())
}

/// Sets the channel fields of `card` from the library's `name`; `direction` is the transport
/// direction of an anisotropic channel (and must be `None` for an isotropic one). The
/// density-of-states masses (`electron_mass`, `hole_mass`) of an anisotropic channel are the
/// geometric means of the masses along and across the direction, and the masses along it
/// are the transport masses of the mobility ([`crate::mobility`]). Mobility inputs the entry
/// has (exponents, deformation potentials, elastic modulus) are set too; they act only when
/// the card's mobility options call for them.
pub fn apply_channel_along(
    card: &mut SheetFetCard,
    name: &str,
    direction: Option<&str>,
) -> Result<(), String> {
    apply_entry(card, entry("channels", name)?, name, direction)
}

/// [`apply_channel_along`] for the library entry `e` called `name`.
fn apply_entry(
    card: &mut SheetFetCard,
    e: &Value,
    name: &str,
    direction: Option<&str>,
) -> Result<(), String> {
    match direction {
        None if !directions(e).is_empty() => {
            return Err(format!(
                "channel `{name}` is anisotropic: give `transport_direction` ({})",
                directions(e).join(" or ")
            ))
        }
        None => {
            card.electron_mass = number(e, "electron_mass", name)?;
            card.hole_mass = number(e, "hole_mass", name)?;
            card.mobility.electron.transport_mass = None;
            card.mobility.hole.transport_mass = None;
        }
        Some(d) => {
            let [ea, ec, ha, hc] = masses_of(e, name, d)?;
            card.electron_mass = (ea * ec).sqrt();
            card.hole_mass = (ha * hc).sqrt();
            card.mobility.electron.transport_mass = Some(ea);
            card.mobility.hole.transport_mass = Some(ha);
        }
    }
    card.electron_degeneracy = number(e, "electron_degeneracy", name)?;
    card.hole_degeneracy = number(e, "hole_degeneracy", name)?;
    card.band_gap = number(e, "band_gap", name)?;
    card.electron_affinity = number(e, "electron_affinity", name)?;
    // Extra conduction valleys (the other spin-split band, the Q valleys) where the library
    // has them, in key order (`valley_`, `valley2_`, ...); each with all three keys or none,
    // and a later one only after an earlier one.
    card.extra_valleys.clear();
    for i in 0..MAX_EXTRA_VALLEYS {
        let key = |what: &str| valley_key(i, what);
        if e[key("offset").as_str()].is_null() {
            break;
        }
        card.extra_valleys.push(ExtraValley {
            offset: number(e, &key("offset"), name)?,
            mass: number(e, &key("mass"), name)?,
            degeneracy: number(e, &key("degeneracy"), name)?,
        });
    }
    let m = &mut card.mobility;
    if let Some(g) = optional(e, "electron_mobility_exponent", direction) {
        m.electron.exponent = g;
    }
    if let Some(g) = optional(e, "hole_mobility_exponent", direction) {
        m.hole.exponent = g;
    }
    m.electron.deformation_potential = optional(e, "electron_deformation_potential", direction)
        .or(m.electron.deformation_potential);
    m.hole.deformation_potential =
        optional(e, "hole_deformation_potential", direction).or(m.hole.deformation_potential);
    m.elastic_modulus = optional(e, "elastic_modulus", direction).or(m.elastic_modulus);
    Ok(())
}

/// The optical (A-exciton) gap of the library channel `name` (eV), kept for reference: the
/// model uses the quasi-particle gap `band_gap`, larger by the exciton binding energy.
pub fn optical_gap(name: &str) -> Option<f64> {
    data()["channels"][name]["optical_gap"]["value"].as_f64()
}

/// The range `(low, high)` its source gives for the permittivity of the library insulator
/// `name`, where the library records one (the value is a representative inside it).
pub fn permittivity_range(name: &str) -> Option<(f64, f64)> {
    let r = data()["insulators"][name]["permittivity"]["range"].as_array()?;
    match r.as_slice() {
        [low, high] => Some((low.as_f64()?, high.as_f64()?)),
        _ => None,
    }
}

/// The temperature (K) at which the library's channel gaps are taken: they are room-temperature
/// measurements, and 300 K is the usual reference (common practice).
pub const LIBRARY_TEMPERATURE_K: f64 = 300.0;

/// The quasi-particle gap (eV) of the library channel `channel` at `temperature_k`, from the
/// Varshni fit `E(T) = E(0) - alpha T^2 / (T + beta)` (Y. P. Varshni, 'Temperature dependence of
/// the energy gap in semiconductors', Physica 34, 149 (1967), recalled) whose `varshni_alpha`
/// (eV/K) and `varshni_beta` (K) the library cites for that channel. The fit's shift
/// `E(T) - E(300 K)` is applied to the library's `band_gap`, taken as the 300 K value; the
/// fits are to optical (exciton) lines, and using their shift for the quasi-particle gap
/// assumes a temperature-independent exciton binding energy. `None` for a channel without a
/// fit, an unknown channel, or a temperature that is negative or not finite.
pub fn band_gap_at(channel: &str, temperature_k: f64) -> Option<f64> {
    if !(temperature_k.is_finite() && temperature_k >= 0.0) {
        return None;
    }
    let e = &data()["channels"][channel];
    let gap = e["band_gap"]["value"].as_f64()?;
    let alpha = e["varshni_alpha"]["value"].as_f64()?;
    let beta = e["varshni_beta"]["value"].as_f64()?;
    let shift = |t: f64| alpha * t * t / (t + beta);
    Some(gap - shift(temperature_k) + shift(LIBRARY_TEMPERATURE_K))
}

/// `layers` layers of the library insulator `name` (a layer count needs a layer thickness in
/// the library; otherwise give `thickness` in metres).
pub fn insulator_layer(
    name: &str,
    layers: Option<f64>,
    thickness: Option<f64>,
) -> Result<Layer, String> {
    let e = entry("insulators", name)?;
    let permittivity = number(e, "permittivity", name)?;
    let thickness = match (layers, thickness) {
        (_, Some(t)) => t,
        (Some(k), None) => k * number(e, "layer_thickness", name).map_err(|_| {
            format!("insulator `{name}` has no layer thickness in the library: give its thickness instead of a layer count")
        })?,
        (None, None) => return Err(format!("insulator `{name}` needs a thickness or a number of layers")),
    };
    Ok(Layer {
        permittivity,
        thickness,
        breakdown_field: number(e, "breakdown_field", name).ok(),
    })
}

/// The bands and tunnelling masses of the library insulator `name`, for the gate leakage
/// ([`crate::sheet_fet::leakage`]).
pub fn insulator_barrier(name: &str) -> Result<Barrier, String> {
    let e = entry("insulators", name)?;
    Ok(Barrier {
        electron_affinity: number(e, "electron_affinity", name)?,
        band_gap: number(e, "band_gap", name)?,
        electron_mass: number(e, "tunnelling_electron_mass", name)?,
        hole_mass: number(e, "tunnelling_hole_mass", name)?,
    })
}

/// The library gate electrode `name`.
pub fn gate(name: &str) -> Result<Gate, String> {
    let e = entry("gates", name)?;
    match e["kind"].as_str() {
        Some("metal") => Ok(Gate::Metal {
            work_function: number(e, "work_function", name)?,
        }),
        Some("dirac") => Ok(Gate::Dirac {
            fermi_velocity: number(e, "fermi_velocity", name)?,
            half_gap: number(e, "half_gap", name)?,
            gap_shift: 0.0,
            degeneracy: number(e, "degeneracy", name)?,
            neutral_work_function: number(e, "neutral_work_function", name)?,
            residual_density: 0.0,
        }),
        _ => Err(format!("gate `{name}` has no kind in the library")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every value in the library names its source, and every entry builds.
    #[test]
    fn every_value_has_a_source_and_every_entry_loads() {
        for section in ["channels", "insulators", "gates"] {
            for (name, e) in data()[section].as_object().unwrap() {
                for (key, v) in e.as_object().unwrap() {
                    if key == "kind" {
                        continue;
                    }
                    assert!(
                        v["value"].is_number(),
                        "{section}/{name}/{key} has no number"
                    );
                    assert!(
                        v["source"].as_str().is_some_and(|s| s.len() > 10),
                        "{section}/{name}/{key} has no source"
                    );
                    // A stated range is two numbers around the value.
                    if !v["range"].is_null() {
                        let r = v["range"].as_array().expect("a range is an array");
                        let x = v["value"].as_f64().unwrap();
                        assert!(
                            r.len() == 2 && r[0].as_f64() <= Some(x) && Some(x) <= r[1].as_f64(),
                            "{section}/{name}/{key}: {x} outside its range {r:?}"
                        );
                    }
                }
            }
        }
        for c in channels() {
            let dirs = transport_directions(&c).unwrap();
            if dirs.is_empty() {
                let mut card = SheetFetCard::default();
                apply_channel(&mut card, &c).unwrap();
                card.validate().unwrap();
            }
            for d in &dirs {
                let mut card = SheetFetCard::default();
                apply_channel_along(&mut card, &c, Some(d)).unwrap();
                card.validate().unwrap();
            }
            // The transport gap is used; the ionisation energy is kept for reference, and the
            // optical gap for every dichalcogenide.
            let mut keys = vec!["band_gap", "electron_affinity", "ionisation_energy"];
            if c != "BP" {
                keys.push("optical_gap");
            }
            for key in keys {
                assert!(
                    number(entry("channels", &c).unwrap(), key, &c).is_ok(),
                    "{c}/{key}"
                );
            }
        }
        for g in gates() {
            gate(&g).unwrap();
        }
        assert!(
            (insulator_layer("hBN", Some(10.0), None).unwrap().thickness - 3.33e-9).abs() < 1e-15
        );
        assert!(insulator_layer("HfO2", Some(3.0), None).is_err());
        for name in insulators() {
            let b = insulator_barrier(&name).unwrap();
            assert!(b.band_gap > 4.0 && b.electron_mass > 0.0, "{name}: {b:?}");
            let field = insulator_layer(&name, None, Some(1e-9))
                .unwrap()
                .breakdown_field;
            assert!(
                field.is_some_and(|f| f > 1e8 && f < 1e10),
                "{name}: breakdown field {field:?}"
            );
        }
        assert!(apply_channel(&mut SheetFetCard::default(), "MoS3")
            .unwrap_err()
            .contains("MoS2"));
    }

    /// Every value of every entry is listed with a unit, its number and its source, and the
    /// listing agrees with the accessors the card builder uses.
    #[test]
    fn every_value_is_listed_with_a_unit() {
        for section in SECTIONS {
            for name in names(section) {
                let listed = values(section, &name).unwrap();
                let keys = data()[section][&name].as_object().unwrap();
                // Every key but a gate's `kind` is a number with a source.
                assert_eq!(listed.len(), keys.len() - usize::from(section == "gates"));
                for v in &listed {
                    assert!(unit(v.key).is_some(), "{section}/{name}/{}", v.key);
                    assert_eq!(Some(v.source), source(section, &name, v.key));
                }
            }
        }
        let eps = values("insulators", "HfO2").unwrap();
        let eps = eps.iter().find(|v| v.key == "permittivity").unwrap();
        assert_eq!(eps.range, permittivity_range("HfO2"));
        assert_eq!(unit("electron_mass_armchair"), Some("m0"));
        assert_eq!(unit("valley2_offset"), Some("eV"));
        assert_eq!(gate_kind("graphene"), Some("dirac"));
        assert_eq!(gate_kind("Au"), Some("metal"));
        assert!(values("gates", "Aum").unwrap_err().contains("Au"));
    }

    /// Optional mobility keys of an entry reach the card: isotropic exponents, and values per
    /// direction taking precedence over values for all directions (entries made up here).
    #[test]
    fn mobility_keys_of_an_entry_reach_the_card() {
        let v = |x: f64| serde_json::json!({ "value": x, "source": "made up for this test" });
        let iso = serde_json::json!({
            "electron_mass": v(0.4), "hole_mass": v(0.5),
            "electron_degeneracy": v(4.0), "hole_degeneracy": v(2.0),
            "band_gap": v(1.8), "electron_affinity": v(4.2),
            "electron_mobility_exponent": v(1.69), "hole_mobility_exponent": v(2.1),
            "elastic_modulus": v(120.0), "electron_deformation_potential": v(3.0),
        });
        let mut card = SheetFetCard::default();
        apply_entry(&mut card, &iso, "iso", None).unwrap();
        assert_eq!(card.mobility.electron.exponent, 1.69);
        assert_eq!(card.mobility.hole.exponent, 2.1);
        assert_eq!(card.mobility.elastic_modulus, Some(120.0));
        assert_eq!(card.mobility.electron.deformation_potential, Some(3.0));
        assert_eq!(card.mobility.hole.deformation_potential, None);
        assert_eq!(card.electron_mass, 0.4);
        let aniso = serde_json::json!({
            "electron_mass_a": v(0.2), "electron_mass_b": v(0.8),
            "hole_mass_a": v(0.1), "hole_mass_b": v(0.9),
            "electron_degeneracy": v(2.0), "hole_degeneracy": v(2.0),
            "band_gap": v(1.5), "electron_affinity": v(4.0),
            "elastic_modulus": v(50.0), "elastic_modulus_b": v(90.0),
        });
        let mut card = SheetFetCard::default();
        apply_entry(&mut card, &aniso, "aniso", Some("b")).unwrap();
        assert_eq!(card.mobility.elastic_modulus, Some(90.0));
        assert_eq!(card.electron_mass, (0.8f64 * 0.2).sqrt());
        assert_eq!(card.mobility.electron.transport_mass, Some(0.8));
        apply_entry(&mut card, &aniso, "aniso", Some("a")).unwrap();
        assert_eq!(card.mobility.elastic_modulus, Some(50.0));
        assert_eq!(card.mobility.hole.transport_mass, Some(0.1));
    }

    /// Edit distances checked by hand: one substitution, one insertion, one deletion, the
    /// classic kitten/sitting (3), and the empty string (the other string's length).
    #[test]
    fn edit_distance_counts_single_character_edits() {
        for (a, b, d) in [
            ("mos3", "mos2", 1),
            ("grafene", "graphene", 2),
            ("hbnn", "hbn", 1),
            ("kitten", "sitting", 3),
            ("", "wse2", 4),
            ("wse2", "", 4),
            ("al2o3", "al2o3", 0),
        ] {
            assert_eq!(edit_distance(a, b), d, "{a} / {b}");
        }
    }
}
