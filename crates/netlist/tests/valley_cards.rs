//! The sheet FET's extra conduction valleys in circuit files: how `sheet_card` combines the
//! library channel's valleys with a card's `valley_` and `valley2_` keys (energies arrive in
//! joules and are stored in eV).

use lamina_devices::physics::Q;
use lamina_devices::{ExtraValley, SheetFetCard};
use lamina_netlist::catalog::{kind, sheet_card, BuildError, Values};

/// Values for a `sheet_fet` card on 10 layers of hBN: numbers in SI units, and names.
fn card(numbers: &[(&str, f64)], channel: Option<&str>) -> Result<SheetFetCard, BuildError> {
    let specs = kind("sheet_fet").unwrap().params;
    let mut numbers = numbers.to_vec();
    numbers.push(("insulator_layers", 10.0));
    for (n, _) in &numbers {
        assert!(specs.iter().any(|s| s.name == *n), "no parameter `{n}`");
    }
    let number = |name: &str| numbers.iter().find(|(n, _)| *n == name).map(|(_, v)| *v);
    let text = |name: &str| match name {
        "insulator" => Some("hBN".to_string()),
        "channel" => channel.map(str::to_string),
        _ => None,
    };
    sheet_card(&Values {
        numbers: specs
            .iter()
            .map(|s| number(s.name).unwrap_or(f64::NAN))
            .collect(),
        given: specs.iter().map(|s| number(s.name).is_some()).collect(),
        texts: specs.iter().map(|s| text(s.name)).collect(),
        waveform: None,
    })
}

const SECOND: [(&str, f64); 3] = [
    ("valley2_offset", 0.02 * Q),
    ("valley2_mass", 0.6),
    ("valley2_degeneracy", 6.0),
];

/// `valley2_` keys add a second extra valley after the library's first (WSe2's upper
/// spin-split band), which stays as the library gives it.
#[test]
fn valley2_keys_follow_the_library_valley() {
    let library = card(&[], Some("WSe2")).unwrap();
    let both = card(&SECOND, Some("WSe2")).unwrap();
    assert_eq!(both.extra_valleys.len(), library.extra_valleys.len() + 1);
    assert_eq!(both.extra_valleys[..1], library.extra_valleys[..]);
    let v = both.extra_valleys[1];
    assert!((v.offset - 0.02).abs() < 1e-15, "{} eV", v.offset);
    assert_eq!((v.mass, v.degeneracy), (0.6, 6.0));
}

/// A card's `valley_` keys replace the library's first extra valley and its `valley2_` keys
/// come second; without a channel both come from the card, in key order.
#[test]
fn valley_keys_replace_the_first_and_keep_their_order() {
    let first = [
        ("valley_offset", 0.05 * Q),
        ("valley_mass", 0.4),
        ("valley_degeneracy", 2.0),
    ];
    let mut keys = first.to_vec();
    keys.extend(SECOND);
    for channel in [Some("WSe2"), None] {
        let k = card(&keys, channel).unwrap();
        let got: Vec<(f64, f64, f64)> = k
            .extra_valleys
            .iter()
            .map(|v: &ExtraValley| ((v.offset * 1e3).round(), v.mass, v.degeneracy))
            .collect();
        assert_eq!(got, [(50.0, 0.4, 2.0), (20.0, 0.6, 6.0)], "{channel:?}");
    }
}

/// A second extra valley needs a first and all three of its own keys; each refusal names the
/// key to look at.
#[test]
fn incomplete_valley2_settings_are_refused_where_they_are() {
    let e = card(&SECOND, None).unwrap_err();
    assert_eq!(e.param.as_deref(), Some("valley2_offset"), "{e:?}");
    let e = card(&SECOND[..2], Some("WSe2")).unwrap_err();
    assert_eq!(e.param.as_deref(), Some("valley2_offset"), "{e:?}");
    assert!(e.message.contains("valley2_degeneracy"), "{e:?}");
    let e = card(&SECOND[1..], Some("WSe2")).unwrap_err();
    assert_eq!(e.param.as_deref(), Some("valley2_mass"), "{e:?}");
}
