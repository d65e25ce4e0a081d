//! Resolved 2D-FET cards described: where each value came from (library, device card,
//! instance, derivation, default), the insulator capacitance and EOT against hand arithmetic,
//! and the flat-band and threshold estimates against their definitions.

use lamina::describe::{
    describe, eot, figures, flat_band, threshold, Carrier, Described, THRESHOLD_DENSITY_PER_M2,
};
use lamina_devices::physics::{EPS0, Q};
use lamina_devices::{materials, SheetFet, SheetFetCard};
use lamina_netlist::catalog::{Origin, Setter};
use lamina_netlist::{load_source, LoadOptions};

/// A card taking its channel and insulators from the library, two instances of it (one
/// overriding the width) and a `sheet_fet` placed directly with its own values.
const FILE: &str = "\
device n2d : sheet_fet {
    channel = MoS2
    insulator = hBN, insulator_layers = 10
    insulator2 = HfO2, insulator2_thickness = 3 nm
    gate_work_function = 4.37 eV
    width = 1 um, length = 100 nm
}
voltage_source vg (pos = g, neg = ground) { dc = 0.5 V }
voltage_source vd (pos = d, neg = ground) { dc = 0.1 V }
n2d plain (drain = d, gate = g, source = ground)
n2d wide (drain = d, gate = g, source = ground) { width = 2 um }
n2d also_plain (drain = d, gate = g, source = ground)
sheet_fet direct (drain = d, gate = g, source = ground) {
    channel = WSe2, insulator_permittivity = 3.9, insulator_thickness = 285 nm
}
";

fn described() -> Vec<Described> {
    let d = load_source("describe.lam", FILE, &LoadOptions::default())
        .unwrap_or_else(|e| panic!("{e}"));
    let (cards, left_out) = describe(&d).unwrap();
    assert_eq!(left_out, 0);
    cards
}

fn origin<'a>(c: &'a Described, key: &str) -> (&'a Origin, f64) {
    let v = c
        .values
        .iter()
        .find(|v| v.key == key)
        .unwrap_or_else(|| panic!("`{key}` not listed"));
    (&v.origin, v.value)
}

/// `key` of `c` came from `from` and has `value` (to rounding of the unit conversion).
fn check(c: &Described, key: &str, from: &Origin, value: f64) {
    let (o, v) = origin(c, key);
    assert_eq!(o, from, "{key}");
    assert!(
        (v - value).abs() <= 1e-12 * value.abs(),
        "{key}: {v} vs {value}"
    );
}

fn library(entry: &str, key: &str) -> Origin {
    let section = if materials::channels().iter().any(|c| c == entry) {
        "channels"
    } else if materials::insulators().iter().any(|c| c == entry) {
        "insulators"
    } else {
        "gates"
    };
    Origin::Library {
        section,
        entry: entry.into(),
        key: key.into(),
        note: None,
    }
}

fn library_value(section: &str, entry: &str, key: &str) -> f64 {
    materials::values(section, entry)
        .unwrap()
        .iter()
        .find(|v| v.key == key)
        .unwrap()
        .value
}

#[test]
fn each_value_names_the_card_the_library_or_the_instance() {
    let cards = described();
    // Two unchanged instances share one description; the overriding one and the direct
    // placement have their own.
    assert_eq!(cards.len(), 3);
    let (plain, wide, direct) = (&cards[0], &cards[1], &cards[2]);
    assert_eq!(plain.elements, ["plain", "also_plain"]);
    assert_eq!(plain.element_count, 2);
    assert_eq!(plain.device, "n2d");
    assert_eq!(wide.elements, ["wide"]);
    assert_eq!(direct.device, "sheet_fet");

    // Set in the card.
    check(plain, "width", &Origin::Card, 1e-6);
    check(plain, "gate_work_function", &Origin::Card, 4.37);
    check(plain, "insulator2_thickness", &Origin::Card, 3e-9);
    // Taken from the library, with the library's own value.
    for key in [
        "electron_mass",
        "hole_mass",
        "band_gap",
        "electron_affinity",
    ] {
        let (o, v) = origin(plain, key);
        assert_eq!(o, &library("MoS2", key), "{key}");
        assert_eq!(v, library_value("channels", "MoS2", key), "{key}");
    }
    let (o, v) = origin(plain, "insulator2_permittivity");
    assert_eq!((o, v), (&library("HfO2", "permittivity"), 20.0));
    let (o, v) = origin(plain, "insulator_thickness");
    assert!(
        matches!(o, Origin::Derived(how) if how.contains("= 10 times") && how.contains("hBN")),
        "{o:?}"
    );
    assert!((v - 10.0 * library_value("insulators", "hBN", "layer_thickness")).abs() < 1e-20);
    // The model's default where nobody set it.
    check(plain, "temperature", &Origin::Default, 300.0);
    // Overridden on the instance; the rest stays the card's.
    check(wide, "width", &Origin::Instance, 2e-6);
    check(wide, "length", &Origin::Card, 1e-7);
    assert_eq!(origin(wide, "band_gap").0, &library("MoS2", "band_gap"));
    // Placed without a card: its values are the instance's, and a metal gate without a work
    // function sits at the channel's electron affinity.
    check(direct, "insulator_thickness", &Origin::Instance, 285e-9);
    assert_eq!(origin(direct, "band_gap").0, &library("WSe2", "band_gap"));
    let (o, v) = origin(direct, "gate_work_function");
    assert!(matches!(o, Origin::Derived(_)), "{o:?}");
    assert_eq!(v, library_value("channels", "WSe2", "electron_affinity"));
    // The names given, and who gave them.
    assert!(plain
        .names
        .contains(&("channel", "MoS2".to_string(), Setter::Card)));
    assert!(direct
        .names
        .contains(&("channel", "WSe2".to_string(), Setter::Instance)));
}

/// A card with a library gap moved to another temperature says so; an anisotropic channel's
/// density-of-states mass is derived from the library's two masses.
#[test]
fn adjusted_and_derived_library_values_say_how() {
    let text = "\
device hot : sheet_fet { channel = MoS2, insulator = hBN, insulator_layers = 10, temperature = 350 K }
device bp : sheet_fet { channel = BP, transport_direction = armchair, insulator = hBN, insulator_layers = 10 }
voltage_source vg (pos = g, neg = ground) { dc = 0.5 V }
hot a (drain = g, gate = g, source = ground)
bp b (drain = g, gate = g, source = ground)
hot c (drain = g, gate = g, source = ground) { mobility_reference_temperature = 300 K }
";
    let d = load_source("t.lam", text, &LoadOptions::default()).unwrap_or_else(|e| panic!("{e}"));
    let (cards, _) = describe(&d).unwrap();
    let (o, gap) = origin(&cards[0], "band_gap");
    assert!(
        matches!(o, Origin::Library { note: Some(n), .. } if n.contains("Varshni")),
        "{o:?}"
    );
    assert_eq!(Some(gap), materials::band_gap_at("MoS2", 350.0));
    let (o, m) = origin(&cards[1], "electron_mass");
    assert!(matches!(o, Origin::Derived(_)), "{o:?}");
    let [along, across, _, _] = materials::anisotropic_masses("BP", "armchair").unwrap();
    assert!((m - (along * across).sqrt()).abs() < 1e-15);
    let (o, t) = origin(&cards[1], "electron_mass_along");
    assert_eq!(o, &library("BP", "electron_mass_armchair"));
    assert_eq!(t, along);
    // Mobility inputs are listed only where the mobility model uses them: the library's
    // exponent once a reference temperature makes the power law act, the phonon inputs
    // only under the phonon model.
    let listed = |c: &Described, key: &str| c.values.iter().any(|v| v.key == key);
    assert!(!listed(&cards[0], "electron_mobility_exponent"));
    assert!(listed(&cards[0], "electron_mobility"));
    assert!(!listed(&cards[1], "elastic_modulus"));
    assert_eq!(
        origin(&cards[2], "electron_mobility_exponent"),
        (&library("MoS2", "electron_mobility_exponent"), 1.69)
    );
    assert_eq!(
        origin(&cards[2], "mobility_reference_temperature"),
        (&Origin::Instance, 300.0)
    );
}

fn sio2_card(thickness: f64, work_function: f64) -> SheetFetCard {
    SheetFetCard {
        insulator: vec![lamina_devices::Layer {
            permittivity: 3.9,
            thickness,
            breakdown_field: None,
        }],
        gate: lamina_devices::Gate::Metal { work_function },
        ..SheetFetCard::default()
    }
}

/// 285 nm of SiO2: C = 3.9 eps0 / 285 nm = 1.2116e-4 F/m² (common practice), and its EOT is
/// its own thickness. 10 hBN layers (3.33 nm at 3.4) on 3 nm of HfO2 (20): EOT by hand
/// 3.33 nm x 3.9/3.4 + 3 nm x 3.9/20 = 3.81971 + 0.585 = 4.40471 nm.
#[test]
fn insulator_capacitance_and_eot_match_hand_arithmetic() {
    let card = sio2_card(285e-9, 4.0);
    let c = card.insulator_capacitance();
    assert!((c - 1.2116e-4).abs() < 1e-8, "{c}");
    assert!((c - 3.9 * EPS0 / 285e-9).abs() <= 1e-15 * c);
    assert!((eot(&card) - 285e-9).abs() < 1e-21);
    let cards = described();
    let f = &cards[0].figures;
    let hand = 3.33e-9 * 3.9 / 3.4 + 3e-9 * 3.9 / 20.0;
    assert!((f.eot_m - hand).abs() < 1e-21, "{} vs {hand}", f.eot_m);
    assert!((f.eot_m - 4.40471e-9).abs() < 1e-14);
    let c_hand = 1.0 / (3.33e-9 / (3.4 * EPS0) + 3e-9 / (20.0 * EPS0));
    assert!((f.insulator_capacitance_f_per_m2 - c_hand).abs() < 1e-12 * c_hand);
}

/// V_FB = (Phi_m - chi)/q - q N_fix / C_ins, with the charge term by hand: 1e12 /cm² of fixed
/// positive charge under 285 nm of SiO2 shifts it by 1.602e-19 C x 1e16 /m² / 1.2116e-4
/// F/m² = -13.22 V.
#[test]
fn flat_band_follows_its_definition() {
    let mut card = sio2_card(285e-9, 4.3);
    card.electron_affinity = 4.0;
    assert!((flat_band(&card) - 0.3).abs() < 1e-12);
    card.fixed_charge_density = 1e16;
    let shift = flat_band(&card) - 0.3;
    assert!((shift + Q * 1e16 / card.insulator_capacitance()).abs() < 1e-12);
    assert!((shift + 13.22).abs() < 0.01, "{shift}");
    // Donors count like fixed positive charge, acceptors against it.
    card.fixed_charge_density = 0.0;
    card.donor_density = 2e15;
    card.acceptor_density = 2e15;
    assert!((flat_band(&card) - 0.3).abs() < 1e-12);
    // A Dirac gate uses its neutral work function: graphene over MoS2 in the demo file.
    let text = FILE.replace("gate_work_function = 4.37 eV", "gate = graphene");
    let d = load_source("g.lam", &text, &LoadOptions::default()).unwrap_or_else(|e| panic!("{e}"));
    let (cards, _) = describe(&d).unwrap();
    let expected = library_value("gates", "graphene", "neutral_work_function")
        - library_value("channels", "MoS2", "electron_affinity");
    assert!((cards[0].figures.flat_band_v - expected).abs() < 1e-12);
    assert_eq!(
        origin(&cards[0], "gate_work_function").0,
        &library("graphene", "neutral_work_function")
    );
}

/// The threshold density is met at the reported voltage by an independent local solve, and
/// crossed within a millivolt either side.
#[test]
fn thresholds_meet_their_density_criterion() {
    let cards = described();
    let f = &cards[0].figures;
    let d = load_source("describe.lam", FILE, &LoadOptions::default()).unwrap();
    let id = d.circuit.find_element("plain").unwrap();
    let fet = SheetFet::new(d.sheet_card(id).unwrap()).unwrap();
    let m = fet.model();
    let vn = f.threshold_n_v.unwrap();
    let vp = f.threshold_p_v.unwrap();
    let n = m.local_state(vn).n;
    assert!((n / THRESHOLD_DENSITY_PER_M2 - 1.0).abs() < 1e-6, "n = {n}");
    assert!(m.local_state(vn - 1e-3).n < THRESHOLD_DENSITY_PER_M2);
    assert!(m.local_state(vn + 1e-3).n > THRESHOLD_DENSITY_PER_M2);
    let p = m.local_state(vp).p;
    assert!((p / THRESHOLD_DENSITY_PER_M2 - 1.0).abs() < 1e-6, "p = {p}");
    assert!(m.local_state(vp - 1e-3).p > THRESHOLD_DENSITY_PER_M2);
    assert!(m.local_state(vp + 1e-3).p < THRESHOLD_DENSITY_PER_M2);
    // Between the branches lies about the gap (the few-kT offsets of the criterion and the
    // small charge at 1e11 /cm² aside).
    let gap = library_value("channels", "MoS2", "band_gap");
    assert!(((vn - vp) - gap).abs() < 0.5, "{vn} {vp}");
    // A density no stack reaches within the valid range has no threshold.
    assert_eq!(threshold(m, Carrier::Electron, 1e30), None);
    assert_eq!(f.thermal_voltage_v, m.thermal_voltage());
    assert_eq!(f.valid_u_range_v, m.valid_u_range());
    assert_eq!(&f.mobility, fet.mobility_report());
}

/// A metal gate's work function raised by dV eV moves the flat-band voltage and both
/// thresholds by dV volts (the model's Gauss law depends on V_G - Phi_m/q only).
#[test]
fn thresholds_follow_the_gate_work_function_exactly() {
    let dv = 0.15;
    let a = figures(&sio2_card(10e-9, 4.3)).unwrap();
    let b = figures(&sio2_card(10e-9, 4.3 + dv)).unwrap();
    assert!((b.flat_band_v - a.flat_band_v - dv).abs() < 1e-12);
    let moved = |x: Option<f64>, y: Option<f64>| y.unwrap() - x.unwrap();
    assert!((moved(a.threshold_n_v, b.threshold_n_v) - dv).abs() < 1e-8);
    assert!((moved(a.threshold_p_v, b.threshold_p_v) - dv).abs() < 1e-8);
}
