//! The sheet FET's mobility and anisotropy settings in circuit files: how `sheet_card`
//! resolves them (density-of-states mass from the masses along and across the channel,
//! library black phosphorus in each direction, the mobility model), the settings that
//! contradict each other (each refused naming the one to change), and their units.

use lamina_devices::mobility::LatticeModel;
use lamina_devices::physics::Q;
use lamina_devices::SheetFetCard;
use lamina_netlist::catalog::{kind, sheet_card, BuildError, Values};
use lamina_netlist::{load_source, LoadOptions};

/// Values for a `sheet_fet` card: numbers in SI units (energies in joules), and names.
fn values(numbers: &[(&str, f64)], texts: &[(&str, &str)]) -> Values {
    let specs = kind("sheet_fet").unwrap().params;
    let names = numbers.iter().map(|(n, _)| *n);
    for n in names.chain(texts.iter().map(|(n, _)| *n)) {
        assert!(specs.iter().any(|s| s.name == n), "no parameter `{n}`");
    }
    let number = |name: &str| numbers.iter().find(|(n, _)| *n == name).map(|(_, v)| *v);
    Values {
        numbers: specs
            .iter()
            .map(|s| number(s.name).unwrap_or(f64::NAN))
            .collect(),
        given: specs.iter().map(|s| number(s.name).is_some()).collect(),
        texts: specs
            .iter()
            .map(|s| {
                texts
                    .iter()
                    .find(|(n, _)| *n == s.name)
                    .map(|(_, t)| t.to_string())
            })
            .collect(),
        waveform: None,
    }
}

const HBN: [(&str, &str); 1] = [("insulator", "hBN")];
const LAYERS: (&str, f64) = ("insulator_layers", 10.0);

fn card(numbers: &[(&str, f64)], texts: &[(&str, &str)]) -> Result<SheetFetCard, BuildError> {
    let mut n = numbers.to_vec();
    n.push(LAYERS);
    let mut t = texts.to_vec();
    t.extend(HBN);
    sheet_card(&values(&n, &t))
}

fn refused_at(numbers: &[(&str, f64)], texts: &[(&str, &str)], param: &str) {
    match card(numbers, texts) {
        Ok(c) => panic!("accepted, expected an error at `{param}`: {c:?}"),
        Err(e) => assert_eq!(e.param.as_deref(), Some(param), "{e:?}"),
    }
}

/// Library black phosphorus (J. Qiao et al., Nat. Commun. 5, 4475 (2014), Table 2 masses) in
/// each direction: the density-of-states masses are the geometric means, the transport masses
/// the ones along the channel; one mass along may be overridden, keeping the library's across.
#[test]
fn anisotropic_channel_sets_dos_and_transport_masses() {
    for (dir, e_along, h_along) in [("armchair", 0.17, 0.15), ("zigzag", 1.12, 6.35)] {
        let c = card(&[], &[("channel", "BP"), ("transport_direction", dir)]).unwrap();
        assert_eq!(c.electron_mass, (0.17f64 * 1.12).sqrt());
        assert_eq!(c.hole_mass, (0.15f64 * 6.35).sqrt());
        assert_eq!(c.mobility.electron.transport_mass, Some(e_along));
        assert_eq!(c.mobility.hole.transport_mass, Some(h_along));
        assert_eq!(c.mobility.model, LatticeModel::PowerLaw);
    }
    let c = card(
        &[("electron_mass_along", 0.2)],
        &[("channel", "BP"), ("transport_direction", "armchair")],
    )
    .unwrap();
    assert_eq!(c.electron_mass, (0.2f64 * 1.12).sqrt());
    assert_eq!(c.mobility.electron.transport_mass, Some(0.2));
    // An anisotropic band described in place, on an isotropic default channel.
    let c = card(
        &[("electron_mass_along", 0.3), ("electron_mass_across", 0.6)],
        &[],
    )
    .unwrap();
    assert_eq!(c.electron_mass, (0.3f64 * 0.6).sqrt());
    assert_eq!(c.mobility.electron.transport_mass, Some(0.3));
    assert_eq!(c.mobility.hole.transport_mass, None);
}

/// The acoustic-phonon model with the library's inputs builds a device; the power-law and
/// Matthiessen settings reach the card in their units (eV, J/m², K, m²/(V s)).
#[test]
fn mobility_settings_reach_the_card() {
    let texts = [
        ("channel", "BP"),
        ("transport_direction", "zigzag"),
        ("mobility_model", "acoustic_phonon"),
    ];
    let c = card(&[("hole_impurity_mobility", 500e-4)], &texts).unwrap();
    assert_eq!(c.mobility.model, LatticeModel::AcousticPhonon);
    assert_eq!(c.mobility.elastic_modulus, Some(101.60));
    assert_eq!(c.mobility.hole.deformation_potential, Some(0.15));
    assert_eq!(c.mobility.hole.impurity_mobility, Some(500e-4));
    let mut n = vec![("hole_impurity_mobility", 500e-4), LAYERS];
    n.push(("width", 1e-6));
    let mut t = texts.to_vec();
    t.extend(HBN);
    (kind("sheet_fet").unwrap().build)(&values(&n, &t)).unwrap();
    // Card inputs override the library's: a deformation potential in joules becomes eV.
    let c = card(
        &[
            ("electron_deformation_potential", 5.0 * Q),
            ("elastic_modulus", 120.0),
        ],
        &[("mobility_model", "acoustic_phonon"), ("channel", "MoS2")],
    );
    // MoS2 has no hole deformation potential in the library: the model needs one.
    let e = c.unwrap_err();
    assert!(e.message.contains("hole_deformation_potential"), "{e:?}");
    let c = card(
        &[
            ("electron_deformation_potential", 5.0 * Q),
            ("hole_deformation_potential", 4.0 * Q),
            ("elastic_modulus", 120.0),
        ],
        &[("mobility_model", "acoustic_phonon"), ("channel", "MoS2")],
    )
    .unwrap();
    assert!((c.mobility.electron.deformation_potential.unwrap() - 5.0).abs() < 1e-14);
    assert_eq!(c.mobility.elastic_modulus, Some(120.0));
    let c = card(
        &[
            ("mobility_reference_temperature", 300.0),
            ("electron_mobility_exponent", 1.69),
            ("temperature", 350.0),
        ],
        &[],
    )
    .unwrap();
    assert_eq!(c.mobility.reference_temperature, Some(300.0));
    assert_eq!(c.mobility.electron.exponent, 1.69);
    assert_eq!(c.mobility.hole.exponent, 0.0);
}

/// Settings that contradict each other, or that another makes meaningless, are refused at
/// the setting to change.
#[test]
fn contradicting_mobility_settings_are_refused_where_they_are() {
    let bp = [("channel", "BP"), ("transport_direction", "armchair")];
    refused_at(
        &[("electron_mass", 0.4), ("electron_mass_along", 0.2)],
        &[],
        "electron_mass_along",
    );
    refused_at(&[("hole_mass_across", 0.2)], &[], "hole_mass_across");
    refused_at(&[("electron_mass", 0.4)], &bp, "electron_mass");
    refused_at(&[], &[("channel", "BP")], "transport_direction");
    refused_at(
        &[],
        &[("channel", "BP"), ("transport_direction", "diagonal")],
        "transport_direction",
    );
    refused_at(
        &[],
        &[("channel", "MoS2"), ("transport_direction", "armchair")],
        "transport_direction",
    );
    refused_at(
        &[],
        &[("transport_direction", "armchair")],
        "transport_direction",
    );
    refused_at(&[], &[("mobility_model", "phonons")], "mobility_model");
    let phonon = [
        ("channel", "BP"),
        ("transport_direction", "armchair"),
        ("mobility_model", "acoustic_phonon"),
    ];
    refused_at(&[("electron_mobility", 0.01)], &phonon, "electron_mobility");
    refused_at(
        &[("mobility_reference_temperature", 300.0)],
        &phonon,
        "mobility_reference_temperature",
    );
    refused_at(&[("elastic_modulus", 100.0)], &bp, "elastic_modulus");
    refused_at(
        &[("hole_deformation_potential", Q)],
        &[],
        "hole_deformation_potential",
    );
    refused_at(
        &[("electron_mobility_exponent", 1.69)],
        &[],
        "electron_mobility_exponent",
    );
    refused_at(
        &[
            ("mobility_reference_temperature", 300.0),
            ("hole_mobility_exponent", 1e9),
        ],
        &[],
        "hole_mobility_exponent",
    );
    refused_at(
        &[("electron_impurity_mobility", -1.0)],
        &[],
        "electron_impurity_mobility",
    );
}

/// In a circuit file: the units each setting takes (an elastic modulus in J/m², a
/// deformation potential in eV), and a modulus in the wrong unit refused.
#[test]
fn circuit_file_settings_take_their_units() {
    let good = "device p2d : sheet_fet {\n    channel = BP, transport_direction = armchair\n    \
        mobility_model = acoustic_phonon\n    electron_deformation_potential = 2.72 eV\n    \
        elastic_modulus = 28.94 J/m^2\n    hole_impurity_mobility = 300 cm^2/(V s)\n    \
        insulator = hBN, insulator_layers = 10\n}\n\
        voltage_source vg (pos = g, neg = ground) { dc = -0.8 V }\n\
        voltage_source vd (pos = d, neg = ground) { dc = -0.5 V }\n\
        p2d m1 (drain = d, gate = g, source = ground)\n";
    load_source("bp.lam", good, &LoadOptions::default()).unwrap();
    let bad = good.replace("28.94 J/m^2", "28.94 eV");
    assert!(load_source("bp.lam", &bad, &LoadOptions::default()).is_err());
    let bad = good.replace("2.72 eV", "2.72");
    assert!(load_source("bp.lam", &bad, &LoadOptions::default()).is_err());
}

/// The density dependence of the mobility (Z. Yu et al., Adv. Mater. 28, 547 (2016); see
/// `lamina_devices::mobility`): a reference density sets it with exponent 1 unless one is
/// given, per carrier; an exponent alone, or out of range, is refused naming it; a reference
/// density in /cm² arrives in /m²; and a card without the keys has no density dependence.
#[test]
fn density_dependence_settings_reach_the_card() {
    let c = card(&[("electron_mobility_density_reference", 3e16)], &[]).unwrap();
    let d = c.mobility.electron.density.unwrap();
    assert_eq!((d.reference_density, d.exponent), (3e16, 1.0));
    assert_eq!(c.mobility.hole.density, None);
    let c = card(
        &[
            ("hole_mobility_density_reference", 1e16),
            ("hole_mobility_density_exponent", 1.5),
        ],
        &[],
    )
    .unwrap();
    let d = c.mobility.hole.density.unwrap();
    assert_eq!((d.reference_density, d.exponent), (1e16, 1.5));
    assert_eq!(c.mobility.electron.density, None);
    c.validate().unwrap();
    let plain = card(&[], &[]).unwrap();
    assert_eq!(plain.mobility.electron.density, None);
    assert_eq!(plain.mobility.hole.density, None);
    refused_at(
        &[("electron_mobility_density_exponent", 1.3)],
        &[],
        "electron_mobility_density_exponent",
    );
    refused_at(
        &[("hole_mobility_density_exponent", 1.3)],
        &[],
        "hole_mobility_density_exponent",
    );
    // Out of range: the device model's check, located at the setting.
    for (name, x) in [
        ("electron_mobility_density_reference", -1.0),
        ("hole_mobility_density_reference", 1e30),
    ] {
        refused_at(&[(name, x)], &[], name);
    }
    refused_at(
        &[
            ("electron_mobility_density_reference", 3e16),
            ("electron_mobility_density_exponent", 0.0),
        ],
        &[],
        "electron_mobility_density_exponent",
    );
    let text = "device n2d : sheet_fet {\n    channel = MoS2, insulator = hBN, \
        insulator_layers = 10\n    electron_mobility_density_reference = 3e12 /cm^2\n}\n\
        voltage_source vg (pos = g, neg = ground) { dc = 0.8 V }\n\
        voltage_source vd (pos = d, neg = ground) { dc = 0.5 V }\n\
        n2d m1 (drain = d, gate = g, source = ground)\n";
    load_source("n.lam", text, &LoadOptions::default()).unwrap();
    let bad = text.replace("3e12 /cm^2", "3e12 V");
    assert!(load_source("n.lam", &bad, &LoadOptions::default()).is_err());
    let bad = text.replace(
        "3e12 /cm^2",
        "3e12 /cm^2, electron_mobility_density_exponent = 9",
    );
    assert!(load_source("n.lam", &bad, &LoadOptions::default()).is_err());
}
