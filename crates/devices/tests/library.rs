//! The material library against its own statements: the gaps, band edges, spin-split
//! conduction bands, film permittivities and temperature fits of the channels and insulators
//! (values and their sources are in `data/materials.json`).

use lamina_devices::materials::{
    apply_channel, apply_channel_along, band_gap_at, channels, insulator_layer, insulators,
    optical_gap, permittivity_range, source, transport_directions, LIBRARY_TEMPERATURE_K,
};
use lamina_devices::sheet_fet::{valley_key, MAX_EXTRA_VALLEYS};
use lamina_devices::{ExtraValley, SheetFetCard};

/// kT/q at 300 K (V), from the CODATA 2018 k_B and q (common practice).
const KT_300: f64 = 1.380649e-23 * 300.0 / 1.602176634e-19;

/// The dichalcogenide channels (the statements below are about them; black phosphorus has
/// its own entry and tests).
fn dichalcogenides() -> Vec<String> {
    channels().into_iter().filter(|c| c != "BP").collect()
}

fn card(channel: &str) -> SheetFetCard {
    let mut card = SheetFetCard::default();
    apply_channel(&mut card, channel).unwrap();
    card
}

/// Each channel's quasi-particle gap, the one the model uses, is at least its optical gap (the
/// difference is the exciton binding energy), and both are in the visible-to-near-infrared
/// range of these monolayers.
#[test]
fn transport_gap_is_at_least_the_optical_gap() {
    for c in dichalcogenides() {
        let gap = card(&c).band_gap;
        let optical = optical_gap(&c).unwrap_or_else(|| panic!("{c} has no optical gap"));
        assert!(
            gap >= optical,
            "{c}: band gap {gap} below optical gap {optical}"
        );
        assert!((1.0..3.5).contains(&optical), "{c}: optical gap {optical}");
        assert!(source("channels", &c, "optical_gap").is_some());
    }
    // The exciton binding energies implied are a few tenths of an eV, as published for
    // supported monolayers (0.35 eV for MoS2 in the same table).
    let binding = card("MoS2").band_gap - optical_gap("MoS2").unwrap();
    assert!((binding - 0.349).abs() < 1e-9, "{binding}");
}

/// The band edges are one consistent set: the ionisation energy the library states is the
/// electron affinity plus the band gap.
#[test]
fn band_edges_are_consistent_with_the_gap() {
    for c in dichalcogenides() {
        let src = source("channels", &c, "ionisation_energy")
            .unwrap_or_else(|| panic!("{c} has no ionisation energy"));
        assert!(src.contains("electron_affinity + band_gap"), "{c}: {src}");
        let ie = ionisation(&c);
        let sum = card(&c).electron_affinity + card(&c).band_gap;
        assert!((ie - sum).abs() < 1e-9, "{c}: {ie} vs {sum}");
    }
}

/// A value the model does not use, read from the same text the crate compiles in.
fn ionisation(channel: &str) -> f64 {
    let v: serde_json::Value =
        serde_json::from_str(include_str!("../data/materials.json")).unwrap();
    v["channels"][channel]["ionisation_energy"]["value"]
        .as_f64()
        .unwrap()
}

/// Every channel carries both spin-split conduction bands at K: the lower as the channel's
/// own band (spin and valley degeneracy 2) and the upper as the first extra valley, a few kT up at
/// most. In the W compounds the lower band is the spin-forbidden, heavier one, tens of meV
/// below the other.
#[test]
fn both_spin_split_conduction_bands_are_present() {
    for c in dichalcogenides() {
        let k = card(&c);
        let ExtraValley {
            offset,
            mass,
            degeneracy,
        } = *k
            .extra_valleys
            .first()
            .unwrap_or_else(|| panic!("{c} has no extra valley"));
        assert_eq!(k.electron_degeneracy, 2.0, "{c}");
        assert_eq!(degeneracy, 2.0, "{c}");
        assert!(
            offset > 0.0 && offset < 2.0 * KT_300,
            "{c}: offset {offset} eV"
        );
        assert!(mass > 0.1 && mass < 1.0, "{c}: valley mass {mass}");
        let note = source("channels", &c, "valley_offset").unwrap();
        assert!(note.contains("spin-split"), "{c}: {note}");
        assert!(
            note.contains("Q (Lambda)"),
            "{c}: the note must say where Q lies: {note}"
        );
    }
    for c in ["WS2", "WSe2"] {
        let k = card(c);
        let v = k.extra_valleys[0];
        assert!(v.offset >= 0.02, "{c}: {} eV", v.offset);
        assert!(
            k.electron_mass > v.mass,
            "{c}: the lower (dark) band should be the heavier"
        );
    }
}

/// The library's extra valleys come as complete, sourced triples of keys (`valley_` then
/// `valley2_`, ...), a card built from an entry holds exactly those, and an entry without a
/// second extra valley says why the Q (Lambda) valleys are absent.
#[test]
fn extra_valleys_are_complete_sourced_and_explained() {
    for c in channels() {
        let mut k = SheetFetCard::default();
        let direction = transport_directions(&c).unwrap().first().cloned();
        apply_channel_along(&mut k, &c, direction.as_deref()).unwrap();
        let mut complete = 0;
        for i in 0..MAX_EXTRA_VALLEYS {
            let notes: Vec<_> = ["offset", "mass", "degeneracy"]
                .iter()
                .map(|w| source("channels", &c, &valley_key(i, w)))
                .collect();
            let given = notes.iter().filter(|n| n.is_some()).count();
            assert!(
                given == 0 || given == 3,
                "{c}: valley {} has {given} of 3 keys",
                i + 1
            );
            if given == 3 {
                assert_eq!(complete, i, "{c}: valley {} follows a gap", i + 1);
                assert!(notes.iter().all(|n| n.is_some_and(|n| n.len() > 20)), "{c}");
                complete += 1;
            }
        }
        assert_eq!(k.extra_valleys.len(), complete, "{c}");
        if c != "BP" && complete < 2 {
            let note = source("channels", &c, "valley_offset").unwrap();
            assert!(
                note.contains("Q (Lambda)") && note.contains("valley2_"),
                "{c}: {note}"
            );
        }
    }
}

/// Building a channel over a card that had extra valleys replaces them all with the
/// library's.
#[test]
fn applying_a_channel_replaces_the_extra_valleys() {
    let other = ExtraValley {
        offset: 0.5,
        mass: 9.0,
        degeneracy: 7.0,
    };
    let mut k = SheetFetCard {
        extra_valleys: vec![other; 3],
        ..SheetFetCard::default()
    };
    apply_channel(&mut k, "WSe2").unwrap();
    assert_eq!(k.extra_valleys.len(), 1);
    let v = k.extra_valleys[0];
    assert_eq!((v.offset, v.mass, v.degeneracy), (0.037, 0.28, 2.0));
}

/// The deposited-film permittivities lie inside the ranges their sources give, the high-k
/// films have such a range, and the layers built from the library carry the value.
#[test]
fn film_permittivities_lie_in_their_ranges() {
    for name in ["HfO2", "Al2O3"] {
        assert!(permittivity_range(name).is_some(), "{name} has no range");
    }
    let mut seen = 0;
    for name in insulators() {
        if let Some((low, high)) = permittivity_range(&name) {
            let eps = insulator_layer(&name, None, Some(1e-9))
                .unwrap()
                .permittivity;
            assert!(
                low < high && (low..=high).contains(&eps),
                "{name}: {eps} vs {low}-{high}"
            );
            seen += 1;
        }
    }
    assert!(seen >= 2);
    assert_eq!(permittivity_range("SiO2"), None);
    assert_eq!(permittivity_range("unobtainium"), None);
}

/// The Varshni fit reproduces its source's end points: the gap at the library temperature is
/// the library's gap, and between 0 K and 300 K it falls by alpha 300² / (300 + beta), here
/// 5.9e-4 × 90000 / 730 = 0.07273973 eV (worked by hand) for MoS2.
#[test]
fn varshni_fit_reproduces_its_end_points() {
    let gap = card("MoS2").band_gap;
    assert_eq!(band_gap_at("MoS2", LIBRARY_TEMPERATURE_K), Some(gap));
    let at_zero = band_gap_at("MoS2", 0.0).unwrap();
    assert!((at_zero - gap - 0.072_739_73).abs() < 1e-8, "{at_zero}");
    // Monotone: the gap shrinks as the lattice warms.
    let mut last = at_zero;
    for t in [50.0, 100.0, 200.0, 300.0, 400.0] {
        let g = band_gap_at("MoS2", t).unwrap();
        assert!(g < last, "{t} K: {g}");
        last = g;
    }
    // No fit, no number; nor for a temperature that is not one.
    assert_eq!(band_gap_at("WS2", 300.0), None);
    assert_eq!(band_gap_at("MoS3", 300.0), None);
    assert_eq!(band_gap_at("MoS2", -1.0), None);
    assert_eq!(band_gap_at("MoS2", f64::NAN), None);
}
