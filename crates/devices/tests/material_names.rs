//! Unknown material names: still errors (names are case-sensitive), but with a suggestion of
//! the name that was probably meant, and the list of known names.

use lamina_devices::materials::{apply_channel, gate, insulator_layer};
use lamina_devices::SheetFetCard;

fn channel_error(name: &str) -> String {
    match apply_channel(&mut SheetFetCard::default(), name) {
        Ok(()) => panic!("`{name}` was accepted as a channel"),
        Err(e) => e,
    }
}

fn insulator_error(name: &str) -> String {
    match insulator_layer(name, Some(10.0), None) {
        Ok(l) => panic!("`{name}` was accepted as an insulator: {l:?}"),
        Err(e) => e,
    }
}

fn gate_error(name: &str) -> String {
    match gate(name) {
        Ok(g) => panic!("`{name}` was accepted as a gate: {g:?}"),
        Err(e) => e,
    }
}

/// Wrong case: the exact name ignoring case is suggested, and the known names are listed.
#[test]
fn wrong_case_suggests_the_library_spelling() {
    let e = channel_error("mos2");
    assert!(e.contains("did you mean `MoS2`?"), "{e}");
    assert!(e.contains("MoS2, MoSe2, WS2, WSe2"), "{e}");
    let e = insulator_error("hbn");
    assert!(e.contains("did you mean `hBN`?"), "{e}");
    assert!(e.contains("SiO2"), "{e}");
    let e = gate_error("Graphene");
    assert!(e.contains("did you mean `graphene`?"), "{e}");
    let e = gate_error("au");
    assert!(e.contains("did you mean `Au`?"), "{e}");
}

/// A small misspelling suggests the nearest name; a different two-letter symbol does not.
#[test]
fn misspellings_suggest_the_nearest_name() {
    let e = channel_error("MoS3");
    assert!(e.contains("did you mean `MoS2`?"), "{e}");
    let e = gate_error("grafene");
    assert!(e.contains("did you mean `graphene`?"), "{e}");
    let e = gate_error("Cu");
    assert!(!e.contains("did you mean"), "{e}");
    assert!(e.contains("Au") && e.contains("graphene"), "{e}");
}

/// Nothing close, or an absurdly long name: an error with the list and no suggestion.
#[test]
fn unrelated_or_huge_names_get_no_suggestion() {
    for name in ["".to_string(), "unobtainium".into(), "x".repeat(100_000)] {
        let e = insulator_error(&name);
        assert!(!e.contains("did you mean"), "{}", &e[..200.min(e.len())]);
        assert!(
            e.contains("Al2O3, HfO2, SiO2, hBN"),
            "{}",
            &e[e.len() - 80..]
        );
    }
}
