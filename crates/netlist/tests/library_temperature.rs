//! A library channel's gap follows the device temperature where the library cites a fit
//! (MoS2: the Varshni form, Y. P. Varshni, Physica 34, 149 (1967), with the library's cited
//! coefficients), and stays the library's 300 K value otherwise or when the card gives it.

use lamina_netlist::catalog::{kind, sheet_card, Values};

/// The card of `text` (one `sheet_fet` instance's values) through the catalog.
fn card(params: &[(&str, f64)], texts: &[(&str, &str)]) -> lamina_devices::SheetFetCard {
    let k = kind("sheet_fet").unwrap();
    let mut numbers = Vec::new();
    let mut given = Vec::new();
    let mut names = Vec::new();
    for spec in k.params {
        match params.iter().find(|(n, _)| *n == spec.name) {
            Some((_, v)) => {
                numbers.push(*v);
                given.push(true);
            }
            None => {
                numbers.push(f64::NAN);
                given.push(false);
            }
        }
        names.push(
            texts
                .iter()
                .find(|(n, _)| *n == spec.name)
                .map(|(_, t)| t.to_string()),
        );
    }
    sheet_card(&Values {
        numbers,
        given,
        texts: names,
        waveform: None,
    })
    .unwrap()
}

#[test]
fn a_cited_gap_follows_temperature_about_midgap() {
    let texts = [("channel", "MoS2"), ("insulator", "hBN")];
    let layers = ("insulator_layers", 10.0);
    let warm = card(&[layers, ("temperature", 300.0)], &texts);
    let cold = card(&[layers, ("temperature", 77.0)], &texts);
    let library = lamina_devices::materials::band_gap_at("MoS2", 300.0).unwrap();
    assert_eq!(warm.band_gap, library, "300 K is the library's own value");
    let expected = lamina_devices::materials::band_gap_at("MoS2", 77.0).unwrap();
    assert_eq!(cold.band_gap, expected);
    assert!(cold.band_gap > warm.band_gap, "a gap opens on cooling");
    // The edges move apart evenly: midgap stays put.
    let mid = |c: &lamina_devices::SheetFetCard| c.electron_affinity + 0.5 * c.band_gap;
    assert!((mid(&cold) - mid(&warm)).abs() < 1e-12);
    // A gap the card gives is used as given.
    let q = 1.602_176_634e-19;
    let given = card(
        &[layers, ("temperature", 77.0), ("band_gap", 2.0 * q)],
        &texts,
    );
    assert!((given.band_gap - 2.0).abs() < 1e-12);
}
