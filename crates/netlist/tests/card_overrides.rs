//! `card.key=value` overrides from the command line: they replace or add a key of a device card
//! before the card is checked, and are refused at their own text when the card, the key or the
//! dimension is wrong.

use lamina_netlist::{load_source, ErrorKind, LoadOptions};

const FILE: &str = "param vg = 1 V\ndevice n2d : sheet_fet {\n    channel = MoS2, insulator = hBN, insulator_layers = 10\n    gate_work_function = 4.3 eV, width = 1 um, length = 100 nm\n    electron_mobility = 40 cm^2/(V s)\n}\nvoltage_source vg (pos = g, neg = ground) { dc = vg }\nn2d a (drain = g, gate = g, source = ground)\nn2d b (drain = g, gate = g, source = ground) { electron_mobility = 10 cm^2/(V s) }\n";

fn with(sets: &[(&str, &str)]) -> Result<lamina_netlist::Design, Vec<ErrorKind>> {
    let options = LoadOptions {
        overrides: sets
            .iter()
            .map(|(n, v)| (n.to_string(), v.to_string()))
            .collect(),
        ..LoadOptions::default()
    };
    load_source("t.lam", FILE, &options).map_err(|f| f.diagnostics.iter().map(|d| d.kind).collect())
}

fn errors(sets: &[(&str, &str)]) -> Vec<ErrorKind> {
    match with(sets) {
        Ok(_) => panic!("{sets:?} should be refused"),
        Err(e) => e,
    }
}

fn mobility(d: &lamina_netlist::Design, element: &str) -> f64 {
    d.sheet_card(d.circuit.find_element(element).unwrap())
        .unwrap()
        .electron_mobility
}

#[test]
fn replaces_and_adds_card_keys_and_instances_still_win() {
    let d = with(&[
        ("n2d.electron_mobility", "55 cm^2/(V s)"),
        ("n2d.source_resistance", "300 Ohm um"),
    ])
    .unwrap();
    assert!((mobility(&d, "a") - 55e-4).abs() < 1e-12);
    // The instance's own value is not the card's, and the design warns at it.
    assert!((mobility(&d, "b") - 10e-4).abs() < 1e-12);
    let shadowed: Vec<_> = d
        .warnings
        .iter()
        .filter(|w| w.kind == ErrorKind::Duplicate && w.message.contains("does not reach"))
        .collect();
    assert_eq!(shadowed.len(), 1, "{:?}", d.warnings);
    assert!(shadowed[0].message.contains("`b`"));
    // check --verbose's origins name the command line.
    let o = d
        .sheet_card_origins(d.circuit.find_element("a").unwrap())
        .unwrap();
    assert_eq!(
        o.setter("electron_mobility"),
        lamina_netlist::catalog::Setter::CommandLine
    );
    assert_eq!(o.setter("length"), lamina_netlist::catalog::Setter::Card);
    let card = d.sheet_card(d.circuit.find_element("a").unwrap()).unwrap();
    assert!((card.source_resistance - 300e-6).abs() < 1e-15);
    assert!((card.length - 100e-9).abs() < 1e-20);
    // A top-level parameter set beside a card key still applies (a regression: card keys once
    // swallowed every other override).
    let both = with(&[("n2d.electron_mobility", "55 cm^2/(V s)"), ("vg", "0.25 V")]).unwrap();
    assert_eq!(
        both.parameters.iter().find(|p| p.0 == "vg").map(|p| p.1),
        Some(0.25)
    );
    let e = errors(&[("n2d.electron_mobility", "55 cm^2/(V s)"), ("vg", "0.25")]);
    assert_eq!(e, vec![ErrorKind::MissingUnit]);
    let plain = with(&[]).unwrap();
    assert!((mobility(&plain, "a") - 40e-4).abs() < 1e-12);
}

#[test]
fn refuses_unknown_cards_keys_and_wrong_dimensions() {
    let unknown = vec![ErrorKind::Unknown];
    assert_eq!(
        errors(&[("n2e.electron_mobility", "55 cm^2/(V s)")]),
        unknown
    );
    assert_eq!(
        errors(&[("n2d.electron_mobilty", "55 cm^2/(V s)")]),
        unknown
    );
    let e = errors(&[("n2d.electron_mobility", "55")]);
    assert_eq!(e, vec![ErrorKind::MissingUnit]);
    let e = errors(&[("n2d.electron_mobility", "55 nm")]);
    assert_eq!(e, vec![ErrorKind::UnitMismatch]);
}
