//! Cards at and beyond the edges of the parameter space: every numeric field of a card, alone
//! and together, set to extreme, invalid or random values must give an error or a model whose
//! tables respect the size cap, never a panic.

use lamina_devices::materials;
use lamina_devices::sheet_fet::{MAX_TABLE_POINTS, MIN_TEMPERATURE_K, TEMPERATURE_RANGE_K};
use lamina_devices::warnings::{plausibility, Implausible};
use lamina_devices::{ExtraValley, Gate, Layer, SheetFet, SheetFetCard, SheetModel};
use proptest::prelude::*;
use proptest::test_runner::{Config, RngSeed};

/// A graphene-like gate, so that the Dirac gate's fields have something to vary.
fn dirac_gate() -> Gate {
    Gate::Dirac {
        fermi_velocity: 1e6,
        half_gap: 0.015,
        gap_shift: 0.0,
        degeneracy: 4.0,
        neutral_work_function: 4.0,
        residual_density: 0.0,
    }
}

/// Number of numeric fields `set_field` can reach.
const FIELDS: usize = 36;

/// Field `k` (1 to 6) of the card's Dirac gate, making the gate a Dirac gate first.
fn dirac_field(card: &mut SheetFetCard, k: usize) -> &mut f64 {
    if !matches!(card.gate, Gate::Dirac { .. }) {
        card.gate = dirac_gate();
    }
    match &mut card.gate {
        Gate::Dirac {
            fermi_velocity,
            half_gap,
            gap_shift,
            degeneracy,
            neutral_work_function,
            residual_density,
        } => match k {
            1 => fermi_velocity,
            2 => half_gap,
            3 => gap_shift,
            4 => degeneracy,
            5 => neutral_work_function,
            _ => residual_density,
        },
        Gate::Metal { work_function } => work_function,
    }
}

/// The card's first extra valley, made first if there is none.
fn valley(card: &mut SheetFetCard) -> &mut ExtraValley {
    if card.extra_valleys.is_empty() {
        card.extra_valleys.push(ExtraValley {
            offset: 0.1,
            mass: 0.5,
            degeneracy: 6.0,
        });
    }
    &mut card.extra_valleys[0]
}

/// The card's second insulator layer, made first if there is none.
fn second_layer(card: &mut SheetFetCard) -> &mut Layer {
    if card.insulator.len() < 2 {
        card.insulator.push(Layer {
            permittivity: 25.0,
            thickness: 2e-9,
            breakdown_field: None,
        });
    }
    &mut card.insulator[1]
}

/// Sets numeric field `k` of `card` to `v` and returns a fragment its validation error must
/// name. Field 0 makes the gate a metal; the fields of a Dirac gate, a first extra valley or a
/// second layer make that part first.
fn set_field(card: &mut SheetFetCard, k: usize, v: f64) -> &'static str {
    let (field, name): (&mut f64, &'static str) = match k {
        0 => {
            card.gate = Gate::Metal { work_function: v };
            return "work_function";
        }
        1 => (dirac_field(card, 1), "fermi_velocity"),
        2 => (dirac_field(card, 2), "half_gap"),
        3 => (dirac_field(card, 3), "gap_shift"),
        4 => (dirac_field(card, 4), "degeneracy"),
        5 => (dirac_field(card, 5), "work_function"),
        6 => (dirac_field(card, 6), "residual_density"),
        7 => (&mut card.insulator[0].permittivity, "permittivity"),
        8 => (&mut card.insulator[0].thickness, "thickness"),
        9 => {
            card.insulator[0].breakdown_field = Some(v);
            return "breakdown";
        }
        10 => (&mut card.electron_mass, "electron_mass"),
        11 => (&mut card.hole_mass, "hole_mass"),
        12 => (&mut card.electron_degeneracy, "electron_degeneracy"),
        13 => (&mut card.hole_degeneracy, "hole_degeneracy"),
        14 => (&mut card.band_gap, "band_gap"),
        15 => (&mut card.electron_affinity, "electron_affinity"),
        16 => (&mut card.donor_density, "donor_density"),
        17 => (&mut card.acceptor_density, "acceptor_density"),
        18 => (&mut valley(card).offset, "valley_offset"),
        19 => (&mut valley(card).mass, "valley_mass"),
        20 => (&mut valley(card).degeneracy, "valley_degeneracy"),
        21 => (&mut card.trap_density, "trap_density"),
        22 => (&mut card.trap_neutral_level, "trap_neutral_level"),
        23 => (&mut card.fixed_charge_density, "fixed_charge_density"),
        24 => (&mut card.temperature, "temperature"),
        25 => (&mut card.width, "width"),
        26 => (&mut card.length, "length"),
        27 => (&mut card.electron_mobility, "electron_mobility"),
        28 => (&mut card.hole_mobility, "hole_mobility"),
        29 => (&mut card.saturation_velocity, "saturation_velocity"),
        30 => (&mut card.saturation_exponent, "saturation_exponent"),
        31 => (&mut card.source_resistance, "source_resistance"),
        32 => (&mut card.drain_resistance, "drain_resistance"),
        33 => (&mut card.overlap_capacitance, "overlap_capacitance"),
        34 => (&mut second_layer(card).permittivity, "permittivity"),
        _ => (&mut second_layer(card).thickness, "thickness"),
    };
    *field = v;
    name
}

/// The fixed extremes: tiny, huge, negative, zero, not-a-number, infinities and subnormals.
const EXTREMES: [f64; 9] = [
    1e-300,
    1e300,
    -1.0,
    0.0,
    f64::NAN,
    f64::INFINITY,
    f64::NEG_INFINITY,
    5e-324,
    1e-310,
];

fn value() -> impl Strategy<Value = f64> {
    prop_oneof![
        proptest::sample::select(EXTREMES.to_vec()),
        (-30.0f64..30.0).prop_map(|e| 10f64.powf(e)),
    ]
}

/// What every card must satisfy: an error with a message, or a model within the size cap
/// whose device builds and evaluates without panicking; and plausibility warnings for any
/// gate voltage, without panicking.
fn outcome_is_bounded(card: &SheetFetCard) -> Result<(), String> {
    for v in [
        None,
        Some(1.0),
        Some(-1e300),
        Some(f64::NAN),
        Some(f64::INFINITY),
    ] {
        if plausibility(card, v).iter().any(|w| w.why.is_empty()) {
            return Err("a warning without a reason".into());
        }
    }
    match SheetModel::build(card) {
        Err(e) if e.is_empty() => Err("an empty error message".into()),
        Err(_) => Ok(()),
        Ok(m) => {
            let points = m.table_points();
            if !(2..=MAX_TABLE_POINTS).contains(&points) {
                return Err(format!("{points} table points"));
            }
            let (lo, hi) = m.table_range();
            if !(lo.is_finite() && hi.is_finite() && hi > lo) {
                return Err(format!("table range {lo} to {hi}"));
            }
            let fet = SheetFet::new(card).map_err(|e| format!("device after model: {e}"))?;
            // Any value, NaN included, is acceptable here; the evaluation must return.
            let _ = fet.intrinsic(0.5, 0.3, 0.0);
            let _ = fet.intrinsic(0.001, -0.2, 0.0);
            Ok(())
        }
    }
}

fn config(cases: u32) -> Config {
    Config {
        cases,
        failure_persistence: None,
        rng_seed: RngSeed::Fixed(0x1a3e_2d0f),
        ..Config::default()
    }
}

/// Every field, one at a time, at every fixed extreme, on a metal-gated and a Dirac-gated
/// card: an error naming that field, or a bounded model.
#[test]
fn each_field_at_each_extreme_gives_a_named_error_or_a_bounded_model() {
    for base in [
        SheetFetCard::default(),
        SheetFetCard {
            gate: dirac_gate(),
            ..SheetFetCard::default()
        },
    ] {
        for k in 0..FIELDS {
            for v in EXTREMES {
                let mut card = base.clone();
                let name = set_field(&mut card, k, v);
                if let Err(e) = card.validate() {
                    assert!(
                        e.contains(name),
                        "field {k} = {v}: `{e}` should name {name}"
                    );
                }
                if let Err(e) = outcome_is_bounded(&card) {
                    panic!("field {k} = {v}: {e}");
                }
            }
        }
    }
}

proptest! {
    #![proptest_config(config(256))]

    /// One field at a time, extreme or log-uniform over 1e-30 to 1e30.
    #[test]
    fn one_field_never_panics(k in 0..FIELDS, v in value(), dirac in any::<bool>()) {
        let mut card = SheetFetCard::default();
        if dirac {
            card.gate = dirac_gate();
        }
        let name = set_field(&mut card, k, v);
        if let Err(e) = card.validate() {
            prop_assert!(e.contains(name), "`{}` should name {}", e, name);
        }
        prop_assert_eq!(outcome_is_bounded(&card), Ok(()));
    }

    /// Several fields at once.
    #[test]
    fn several_fields_never_panic(
        changes in proptest::collection::vec((0..FIELDS, value()), 2..10),
        dirac in any::<bool>(),
    ) {
        let mut card = SheetFetCard::default();
        if dirac {
            card.gate = dirac_gate();
        }
        for (k, v) in changes {
            set_field(&mut card, k, v);
        }
        prop_assert_eq!(outcome_is_bounded(&card), Ok(()));
    }
}

/// Several fields at once, each within its accepted range (log-uniform inside it), so that
/// the combinations reach the build's own checks rather than stopping at validation.
#[test]
fn valid_combinations_build_or_explain() {
    let mut runner = proptest::test_runner::TestRunner::new(config(128));
    let ranges: Vec<(usize, f64, f64)> = vec![
        (7, 1.0, 1e5),
        (8, 1e-12, 1e-2),
        (10, 1e-4, 1e4),
        (11, 1e-4, 1e4),
        (12, 1e-3, 1e3),
        (13, 1e-3, 1e3),
        (14, 1e-6, 20.0),
        (16, 1e-6, 1e21),
        (17, 1e-6, 1e21),
        (21, 1e-6, 1e22),
        (24, MIN_TEMPERATURE_K, 1e4),
        (27, 1e-12, 1e3),
        (28, 1e-12, 1e3),
        (1, 1e3, 3e8),
        (19, 1e-4, 1e4),
    ];
    let strategy = proptest::collection::vec((0..ranges.len(), 0.0f64..1.0, any::<bool>()), 1..8);
    runner
        .run(&strategy, |picks| {
            let mut card = SheetFetCard::default();
            for (i, t, dirac) in picks {
                let (k, lo, hi) = ranges[i];
                if dirac {
                    card.gate = dirac_gate();
                }
                set_field(&mut card, k, lo * (hi / lo).powf(t));
            }
            prop_assert_eq!(card.validate(), Ok(()));
            prop_assert_eq!(outcome_is_bounded(&card), Ok(()));
            Ok(())
        })
        .unwrap();
}

/// 0.1 K and 1e-20 K are below the floor: an error that says so, before any table is built.
/// At the floor itself the tables are capped.
#[test]
fn cold_cards_are_refused_below_the_floor_and_capped_at_it() {
    for t in [0.1, 1e-20, 5e-324] {
        let card = SheetFetCard {
            temperature: t,
            ..SheetFetCard::default()
        };
        let Err(e) = SheetFet::new(&card) else {
            panic!("{t} K built a device");
        };
        assert!(e.contains("below the model's floor"), "{t} K: {e}");
    }
    let floor = SheetFetCard {
        temperature: MIN_TEMPERATURE_K,
        ..SheetFetCard::default()
    };
    assert_eq!(
        SheetModel::build(&floor).unwrap().table_points(),
        MAX_TABLE_POINTS
    );
}

/// The grid follows V_T / 10 over 16 V while that fits in the cap, and is capped below.
#[test]
fn table_points_follow_the_thermal_voltage_up_to_the_cap() {
    let points = |t: f64| {
        SheetModel::build(&SheetFetCard {
            temperature: t,
            ..SheetFetCard::default()
        })
        .unwrap()
        .table_points()
    };
    // 300 K: V_T = 25.852 mV, spacing 2.5852 mV, ceil(16 V / spacing) + 1 points.
    let vt: f64 = 1.380_649e-23 * 300.0 / 1.602_176_634e-19;
    assert_eq!(points(300.0), (16.0 / (vt / 10.0)).ceil() as usize + 1);
    assert!(points(30.0) < MAX_TABLE_POINTS);
    assert_eq!(points(20.0), MAX_TABLE_POINTS);
    assert_eq!(points(4.0), MAX_TABLE_POINTS);
}

/// The accuracy the module docs state for the capped tables: worst relative error of the
/// tabulated σ against the direct solve, where the channel conducts, on a 0.137 mV sweep.
#[test]
fn capped_tables_keep_their_documented_accuracy() {
    for (t, bound) in [(30.0, 5e-7), (20.0, 2e-6), (4.0, 1e-3)] {
        let m = SheetModel::build(&SheetFetCard {
            temperature: t,
            ..SheetFetCard::default()
        })
        .unwrap();
        let mut worst: f64 = 0.0;
        let mut u = -1.5;
        while u <= 2.0 {
            let direct = m.local_state(u).sigma;
            if direct > 1e-14 {
                worst = worst.max((m.table_s_sigma(u).1 / direct - 1.0).abs());
            }
            u += 1.37e-4;
        }
        assert!(worst < bound, "{t} K: σ error {worst:e}");
    }
}

/// A 1e300 effective mass or insulator thickness is refused by name, not a panic on a NaN.
#[test]
fn huge_mass_or_thickness_is_an_error() {
    let cases: [(&str, SheetFetCard); 4] = [
        (
            "electron_mass",
            SheetFetCard {
                electron_mass: 1e300,
                ..SheetFetCard::default()
            },
        ),
        (
            "hole_mass",
            SheetFetCard {
                hole_mass: 1e300,
                ..SheetFetCard::default()
            },
        ),
        (
            "valley_mass",
            SheetFetCard {
                extra_valleys: vec![ExtraValley {
                    offset: 0.1,
                    mass: 1e300,
                    degeneracy: 6.0,
                }],
                ..SheetFetCard::default()
            },
        ),
        (
            "thickness",
            SheetFetCard {
                insulator: vec![Layer {
                    permittivity: 3.9,
                    thickness: 1e300,
                    breakdown_field: None,
                }],
                ..SheetFetCard::default()
            },
        ),
    ];
    for (name, card) in cases {
        let Err(e) = SheetFet::new(&card) else {
            panic!("{name} = 1e300 built a device");
        };
        assert!(e.contains(name) && e.contains("must lie in"), "{e}");
    }
}

/// A stack whose midgap point lies a hundred billion volts away (1e21 /m² donors under 1 cm
/// of vacuum-like insulator) is valid field by field but cannot be tabulated.
#[test]
fn far_flat_band_is_an_error() {
    let card = SheetFetCard {
        donor_density: 1e21,
        insulator: vec![Layer {
            permittivity: 1.0,
            thickness: 1e-2,
            breakdown_field: None,
        }],
        ..SheetFetCard::default()
    };
    card.validate().unwrap();
    match SheetModel::build(&card) {
        Ok(m) => panic!("built {} points", m.table_points()),
        Err(e) => assert!(e.contains("midgap") && e.contains("1e6 V"), "{e}"),
    }
}

/// A Dirac gate with the largest accepted Fermi velocity holds at most about 3e15 /m² within
/// ±20 eV of its neutral point (n ≈ g μ² / (4π (ħ v)²)); 1e17 /m² of donors in the channel
/// need an equal and opposite gate charge.
#[test]
fn dirac_gate_that_cannot_hold_the_charge_is_an_error() {
    let card = SheetFetCard {
        gate: Gate::Dirac {
            fermi_velocity: 3e8,
            half_gap: 0.0,
            gap_shift: 0.0,
            degeneracy: 4.0,
            neutral_work_function: 4.0,
            residual_density: 0.0,
        },
        donor_density: 1e17,
        ..SheetFetCard::default()
    };
    card.validate().unwrap();
    match SheetModel::build(&card) {
        Ok(m) => panic!("built {} points", m.table_points()),
        Err(e) => assert!(e.contains("Dirac gate"), "{e}"),
    }
}

/// The library's MoS2 on ten layers of hBN under a metal gate.
fn mos2_on_hbn() -> SheetFetCard {
    let mut card = SheetFetCard {
        insulator: vec![materials::insulator_layer("hBN", Some(10.0), None).unwrap()],
        ..SheetFetCard::default()
    };
    materials::apply_channel(&mut card, "MoS2").unwrap();
    card
}

fn only(flags: &[Implausible]) -> &Implausible {
    assert_eq!(flags.len(), 1, "{flags:#?}");
    &flags[0]
}

/// 1000 K, 1e16 /cm² of donors and 10 V across 1 nm of SiO2 (100 MV/cm, ten times its
/// breakdown field) are each flagged, in the units the trade prints them in.
#[test]
fn plausibility_flags_heat_dense_donors_and_a_field_beyond_breakdown() {
    let hot = SheetFetCard {
        temperature: 1000.0,
        ..mos2_on_hbn()
    };
    let w = only(&plausibility(&hot, Some(1.0))).clone();
    assert_eq!(
        (w.parameter, w.value, w.unit, (w.low, w.high)),
        ("temperature", 1000.0, "K", TEMPERATURE_RANGE_K)
    );
    assert!(w.to_string().contains("`temperature` = 1000"), "{w}");

    let doped = SheetFetCard {
        donor_density: 1e20,
        ..mos2_on_hbn()
    };
    let w = only(&plausibility(&doped, None)).clone();
    assert_eq!((w.parameter, w.unit), ("donor_density", "/cm^2"));
    assert!((w.value / 1e16 - 1.0).abs() < 1e-12 && w.high < 1e16);

    let thin = SheetFetCard {
        insulator: vec![materials::insulator_layer("SiO2", None, Some(1e-9)).unwrap()],
        ..mos2_on_hbn()
    };
    assert!(plausibility(&thin, None).is_empty());
    let w = only(&plausibility(&thin, Some(10.0))).clone();
    assert_eq!((w.parameter, w.unit), ("insulator", "MV/cm"));
    // E = V / t for a single layer: 10 V / 1 nm = 1e10 V/m = 100 MV/cm.
    assert!((w.value / 100.0 - 1.0).abs() < 1e-12, "{w}");
    assert!((w.high / 10.0 - 1.0).abs() < 1e-12, "{w}");

    // A back gate swept to 600 V on a micrometre of oxide: below breakdown, but past where the
    // tables end (U_REACH from midgap, with room for the flat-band offset).
    let thick = SheetFetCard {
        insulator: vec![materials::insulator_layer("SiO2", None, Some(1e-6)).unwrap()],
        ..mos2_on_hbn()
    };
    assert!(plausibility(&thick, Some(100.0)).is_empty());
    let w = only(&plausibility(&thick, Some(600.0))).clone();
    assert_eq!((w.parameter, w.unit, w.value), ("voltage", "V", 600.0));
}

/// The library's MoS2 on ten layers of hBN at 300 K with 1 V on the gate (3 MV/cm, a quarter
/// of hBN's breakdown field) raises nothing.
#[test]
fn plausibility_is_silent_for_mos2_on_hbn_at_room_temperature() {
    for v in [None, Some(1.0), Some(-1.0)] {
        assert_eq!(plausibility(&mos2_on_hbn(), v), Vec::new());
    }
}

/// Across a two-layer stack the displacement is continuous (ε1 E1 = ε2 E2) and the fields add
/// up to the gate voltage (E1 t1 + E2 t2 = V): Gauss's law for series capacitors (common
/// practice).
#[test]
fn insulator_fields_divide_as_series_capacitors() {
    let card = SheetFetCard {
        insulator: vec![
            materials::insulator_layer("SiO2", None, Some(1e-9)).unwrap(),
            materials::insulator_layer("HfO2", None, Some(1e-8)).unwrap(),
        ],
        ..mos2_on_hbn()
    };
    let flags = plausibility(&card, Some(-10.0));
    assert_eq!(flags.len(), 2, "{flags:#?}");
    assert_eq!(
        (flags[0].parameter, flags[1].parameter),
        ("insulator", "insulator2")
    );
    // Back to V/m.
    let (e1, e2) = (flags[0].value * 1e8, flags[1].value * 1e8);
    let (eps1, eps2) = (
        card.insulator[0].permittivity,
        card.insulator[1].permittivity,
    );
    assert!((eps1 * e1 / (eps2 * e2) - 1.0).abs() < 1e-12);
    assert!(((e1 * 1e-9 + e2 * 1e-8) / 10.0 - 1.0).abs() < 1e-12);
}

/// Cold and off, the channel conductance underflows to zero everywhere; the charges fall back
/// to the uniform channel's (q_d = q_ch / 2) instead of 0/0. Checked at 4 K and 1.8 eV, where
/// exp(-E_g / 2kT) is far below the smallest double.
#[test]
fn cold_off_devices_have_finite_charges() {
    for saturation_velocity in [0.0, 3.4e4] {
        let fet = SheetFet::new(&SheetFetCard {
            temperature: 4.0,
            saturation_velocity,
            ..SheetFetCard::default()
        })
        .unwrap();
        for (vd, vg) in [(0.5, 0.0), (1e-9, 0.0), (0.5, -0.3), (0.0, 0.0)] {
            let i = fet.intrinsic(vd, vg, 0.0);
            assert!(
                i.current.v.is_finite() && i.current.d.iter().all(|d| d.is_finite()),
                "current at vd {vd}, vg {vg}: {i:?}"
            );
            for q in [i.q_gate, i.q_drain, i.q_source] {
                assert!(
                    q.v.is_finite() && q.d.iter().all(|d| d.is_finite()),
                    "vd {vd}, vg {vg}: {i:?}"
                );
            }
            let total = i.q_gate.v + i.q_drain.v + i.q_source.v;
            assert!(total.abs() <= 1e-9 * i.q_gate.v.abs().max(1e-30), "{i:?}");
        }
    }
}
