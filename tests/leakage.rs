//! Gate leakage through thin insulators (`lamina_devices::sheet_fet::leakage`): the WKB
//! transmission against closed forms, the Fowler-Nordheim limit, the table against direct
//! quadrature, the stamped current's derivatives against central differences, current
//! continuity at an operating point, and the breakdown warning.

use lamina::op::{operating_point, OpReport};
use lamina_devices::physics::{HBAR, K_B, M0, Q};
use lamina_devices::sheet_fet::leakage::{
    Barrier, Carrier, LeakageMode, LeakageTable, TunnelStack,
};
use lamina_devices::{materials, SheetFet, SheetFetCard};
use lamina_engine::{DetailValue, System};
use lamina_netlist::{load_source, LoadOptions};

fn barrier(chi: f64, gap: f64, m: f64) -> Barrier {
    Barrier {
        electron_affinity: chi,
        band_gap: gap,
        electron_mass: m,
        hole_mass: m,
    }
}

/// A rectangular barrier (no field) of height φ above the energy E and width d transmits
/// `exp(-2 d sqrt(2 m (φ - E)) / ħ)` in the WKB approximation (J. G. Simmons, J. Appl. Phys.
/// 34, 1793 (1963), the exponent of his eq. for a rectangular barrier); and the exact
/// transmission of the same barrier, `[1 + φ² sinh²(κd) / (4 E (φ - E))]^-1` (any quantum
/// mechanics textbook, e.g. D. J. Griffiths, Introduction to Quantum Mechanics, problem 2.33),
/// differs from it only by the prefactor `16 E (φ - E) / φ²` once `κd >> 1`.
#[test]
fn rectangular_barrier_transmission_matches_the_closed_forms() {
    let (chi_ch, phi, m) = (4.0, 3.0, 0.42);
    let stack = TunnelStack::new(
        &[(2e-9, 3.9, barrier(chi_ch - phi, 9.0, m))],
        chi_ch,
        1.8,
        300.0,
    );
    for (d, e) in [(2e-9, 0.0), (2e-9, 1.0), (2e-9, 2.5)] {
        let kappa = (2.0 * m * M0 * Q * (phi - e)).sqrt() / HBAR;
        let closed = 2.0 * d * kappa;
        let wkb = stack.exponent(Carrier::Electron, 0.0, e);
        assert!((wkb / closed - 1.0).abs() < 1e-12, "{wkb} vs {closed}");
        if e > 0.0 {
            let exact =
                1.0 / (1.0 + phi * phi * (kappa * d).sinh().powi(2) / (4.0 * e * (phi - e)));
            let prefactor = 16.0 * e * (phi - e) / (phi * phi);
            let ratio = exact / (prefactor * (-wkb).exp());
            // sinh²(κd) = e^{2κd} (1 - e^{-2κd})² / 4 and the 1 beside it: corrections of
            // relative order e^{-2κd}.
            let tolerance = 4.0 * (-wkb).exp() + 4.0 / (prefactor * wkb.exp());
            assert!((ratio - 1.0).abs() < tolerance, "E = {e}: ratio {ratio}");
        }
    }
}

/// At high field and low temperature the tunnelling integral from a metal approaches the
/// Fowler-Nordheim current `q³F²/(8π h φ) (m0/m) exp(-4 sqrt(2m) (qφ)^{3/2} / (3ħqF))`
/// (R. H. Fowler and L. Nordheim, Proc. R. Soc. A 119, 173 (1928); with the tunnelling mass as
/// in M. Lenzlinger and E. H. Snow, J. Appl. Phys. 40, 278 (1969)). The formula keeps the
/// first order of the exponent in the energy below the Fermi level, so it is off by about
/// `1.5 d/φ` (`d = ħqF / (2 sqrt(2 m q φ))` the energy decay length; our estimate of the
/// next term) and the difference shrinks with `d/φ`.
#[test]
fn high_field_limit_is_fowler_nordheim() {
    let (chi_ch, phi_ch, m, t) = (4.0, 3.5, 0.42, 10e-9);
    let stack = TunnelStack::new(
        &[(t, 3.9, barrier(chi_ch - phi_ch, 30.0, m))],
        chi_ch,
        1.8,
        10.0,
    );
    let h = 2.0 * std::f64::consts::PI * HBAR;
    let mut last = f64::INFINITY;
    for field in [2e9, 1.5e9, 1e9, 0.7e9] {
        let v = field * t;
        // Gate negative: electrons leave the gate. Its Fermi level sits φ_B below the barrier
        // at the gate face, which is at φ_ch + V there (energies from the channel's band edge).
        let phi_b = 3.0;
        let mu_g = phi_ch + v - phi_b;
        let (xi, u) = (0.0, -mu_g);
        let j = -stack.current_density(xi, u, -v);
        let fn_j = Q.powi(3) * field * field / (8.0 * std::f64::consts::PI * h * phi_b * Q) / m
            * (-4.0 * (2.0 * m * M0).sqrt() * (Q * phi_b).powf(1.5) / (3.0 * HBAR * Q * field))
                .exp();
        let d = HBAR * Q * field / (2.0 * (2.0 * m * M0 * Q * phi_b).sqrt()) / Q;
        let off = (j / fn_j - 1.0).abs();
        assert!(
            off < 2.0 * d / phi_b,
            "F = {field:e}: J {j:e}, FN {fn_j:e}, off {off}"
        );
        assert!(off < last, "F = {field:e}: {off} not below {last}");
        last = off;
    }
}

/// MoS2 under two layers of hBN (0.67 nm) and a gold gate: library values throughout.
fn thin_card() -> SheetFetCard {
    let mut card = SheetFetCard::default();
    materials::apply_channel(&mut card, "MoS2").unwrap();
    card.insulator = vec![materials::insulator_layer("hBN", Some(2.0), None).unwrap()];
    card.tunnelling = vec![materials::insulator_barrier("hBN").unwrap()];
    card.gate = materials::gate("Au").unwrap();
    card
}

/// The table's largest relative error against the direct quadrature at `points` gate drives
/// across `[-reach, reach]` (V), and where: within two thermal voltages `vt` of `u = 0`, and
/// beyond.
fn worst_against_direct(
    table: &LeakageTable,
    vt: f64,
    reach: f64,
    points: usize,
) -> [(f64, f64); 2] {
    let mut worst = [(0.0f64, 0.0); 2];
    for k in 0..points {
        let u = reach * (2.0 * (k as f64 + 0.37) / points as f64 - 1.0);
        let (j, _) = table.density(u);
        let direct = table.direct(u);
        let rel = (j - direct).abs() / direct.abs().max(1e-25);
        let w = &mut worst[usize::from(u.abs() > 2.0 * vt)];
        if rel > w.0 {
            *w = (rel, u);
        }
    }
    worst
}

/// The table (cubic in the knot index, knots solved on first use) agrees with the direct
/// quadrature between knots, from 4 K to 400 K, over the core and the widening knots beyond
/// it: under a gold gate (a metal gate: knots from the stack's shared grid) and a graphene
/// gate (knots of the card's own). Measured: within two thermal voltages of `u = 0`, where
/// `J` is linear in `u` and smallest, 8.7e-3 / 9.5e-3 at 300 K (gold / graphene), 9.2e-3 /
/// 9.7e-3 at 400 K (0 or below 1e-12 at 4 K and 77 K, where it underflows); elsewhere
/// 5.4e-6 / 1.4e-6 at 4 K, 1.7e-4 / 2.3e-4 at 77 K, 3.0e-4 / 2.1e-4 at 300 K and 1.6e-4 /
/// 2.2e-4 at 400 K.
#[test]
fn table_matches_direct_quadrature() {
    for gate in ["Au", "graphene"] {
        for t in [4.0, 77.0, 300.0, 400.0] {
            let mut card = thin_card();
            card.gate = materials::gate(gate).unwrap();
            card.temperature = t;
            let vt = K_B * t / Q;
            let fet = SheetFet::new(&card).unwrap();
            let table = fet.leakage_table().unwrap();
            let worst = worst_against_direct(table, vt, 4.0, 2000);
            eprintln!(
                "{gate} {t} K: near 0 {:.2e}, beyond {:.2e}",
                worst[0].0, worst[1].0
            );
            assert!(
                worst[0].0 < 2e-2,
                "{gate}, {t} K near u = 0: {:?}",
                worst[0]
            );
            assert!(worst[1].0 < 5e-4, "{gate}, {t} K: {:?}", worst[1]);
        }
    }
    let fet = SheetFet::new(&thin_card()).unwrap();
    let table = fet.leakage_table().unwrap();
    for u in [-40.0, -15.0, 12.0, 150.0] {
        let (j, _) = table.density(u);
        let direct = table.direct(u);
        assert!(
            (j / direct - 1.0).abs() < 5e-3,
            "u = {u}: {j:e} vs {direct:e}"
        );
    }
    // J has the sign of u and vanishes at u = 0.
    assert_eq!(table.density(0.0).0, 0.0);
    assert!(table.density(0.3).0 > 0.0 && table.density(-0.3).0 < 0.0);
}

/// Devices whose cards differ in the metal gate's work function alone take their knots from
/// one shared grid, interpolated across its columns in the work function (the leakage
/// module's docs): the table of a work function between columns, or on one, agrees with the
/// card's own direct quadrature as a table of the card alone does (the bound of
/// `table_matches_direct_quadrature`), for an electron (MoS2) and a hole (WSe2) channel, with
/// the work function near the channel's affinity and far from it (a platinum gate on WSe2,
/// 2.6 V above: each card keeps its own `J_0`, so `y` stays linear through `u = 0` however
/// much larger its leakage is than at `W = χ`); and the slope at `u = 0` agrees with a
/// central difference of the direct quadrature.
#[test]
fn shared_grid_tables_match_direct_quadrature() {
    let cases = [
        ("MoS2", 0.37),
        ("WSe2", 1.04),
        ("MoS2", 2.0),
        ("MoS2", -1.0),
        ("WSe2", 2.58),
    ];
    for (channel, offset) in cases {
        for t in [77.0, 300.0, 400.0] {
            let vt = K_B * t / Q;
            let mut worst = [0.0f64; 3];
            // Column spacing is a quarter of a thermal voltage: off-column fractions and a
            // shift on a column.
            for frac in [0.0, 0.37, 0.5, 0.81] {
                let mut card = thin_card();
                materials::apply_channel(&mut card, channel).unwrap();
                card.temperature = t;
                let column = 0.25 * vt;
                let w = card.electron_affinity + ((offset / column).floor() + frac) * column;
                card.gate = lamina_devices::Gate::Metal { work_function: w };
                let fet = SheetFet::new(&card).unwrap();
                let table = fet.leakage_table().unwrap();
                let [near, beyond] = worst_against_direct(table, vt, 3.0, 400);
                worst[0] = worst[0].max(near.0);
                worst[1] = worst[1].max(beyond.0);
                let dh = 1e-3 * vt;
                let slope = (table.direct(dh) - table.direct(-dh)) / (2.0 * dh);
                let (_, dj) = table.density(0.0);
                worst[2] = worst[2].max((dj / slope - 1.0).abs());
            }
            eprintln!(
                "{channel} W - chi = {offset} V, {t} K: near 0 {:.2e}, beyond {:.2e}, slope at 0 {:.2e}",
                worst[0], worst[1], worst[2]
            );
            let at = format!("{channel}, W - chi = {offset} V, {t} K");
            assert!(worst[0] < 2e-2, "{at}, near u = 0: {}", worst[0]);
            assert!(worst[1] < 5e-4, "{at}: {}", worst[1]);
            assert!(worst[2] < 2e-2, "{at}, slope at u = 0: {}", worst[2]);
        }
    }
}

/// The stamped gate currents' slopes are the derivatives of the currents: central
/// differences, step 1e-5 V, across on and off states.
#[test]
fn gate_current_slopes_match_central_differences() {
    let fet = SheetFet::new(&thin_card()).unwrap();
    let dh = 1e-5;
    for u in [-3.0, -1.2, -0.4, -0.03, 0.02, 0.5, 1.0, 2.5, 9.0] {
        let [(i, g), _] = fet.gate_leakage(u, 0.0);
        let [(ip, _), _] = fet.gate_leakage(u + dh, 0.0);
        let [(im, _), _] = fet.gate_leakage(u - dh, 0.0);
        let fd = (ip - im) / (2.0 * dh);
        assert!(
            (g - fd).abs() <= 1e-4 * g.abs() + 1e-30,
            "u = {u}: slope {g:e}, difference {fd:e} (I = {i:e})"
        );
    }
}

fn report(text: &str) -> OpReport {
    let d = load_source("t.lam", text, &LoadOptions::default()).unwrap_or_else(|e| panic!("{e}"));
    let mut sys = System::new(d.circuit).unwrap();
    operating_point(&mut sys).unwrap()
}

fn number(r: &OpReport, name: &str) -> f64 {
    r.devices[0]
        .details
        .iter()
        .find_map(|(k, v)| match v {
            DetailValue::Number(x, _) if *k == name => Some(*x),
            _ => None,
        })
        .unwrap_or_else(|| panic!("no {name}"))
}

const THIN: &str = "device thin : sheet_fet {
    channel = MoS2, gate = Au, insulator = hBN, insulator_layers = LAYERS,
    width = 1 um, length = 1 um, source_resistance = 200 Ohm um
}
voltage_source vg (pos = g, neg = ground) { dc = VG }
voltage_source vd (pos = d, neg = ground) { dc = 0.5 V }
thin m (drain = d, gate = g, source = ground)
";

/// Current continuity (Kirchhoff's current law): what leaves the gate enters source and drain,
/// and the gate current in the solution is the one the device reports; at 1.5 V on two hBN
/// layers the leakage is significant (0.23 times the drain current), under thirty (10 nm) it
/// is negligible, and at 4 V the field
/// across them, beyond the library's breakdown field, draws a warning naming the device, the
/// layer, the field and the limit.
#[test]
fn gate_current_is_continuous_and_reported() {
    for (vg, layers, significant) in [
        ("1.5 V", "2", true),
        // Off, the leakage is the drain current many times over.
        ("-0.5 V", "2", true),
        ("1.5 V", "30", false),
        ("4 V", "2", true),
    ] {
        let r = report(&THIN.replace("VG", vg).replace("LAYERS", layers));
        let d = &r.devices[0];
        let i: Vec<f64> = d.terminals.iter().map(|t| t.2).collect();
        let total = i.iter().sum::<f64>();
        assert!(
            total.abs() <= 1e-12 * i.iter().map(|x| x.abs()).sum::<f64>(),
            "{i:?}"
        );
        let gate = number(&r, "gate leakage current");
        assert!(
            (i[1] - gate).abs() <= 1e-6 * gate.abs() + 1e-15,
            "{} vs {gate:e}",
            i[1]
        );
        let ratio = number(&r, "gate leakage ratio");
        assert_eq!(ratio >= 1e-3, significant, "{vg}: ratio {ratio:e}");
        let warnings = lamina_devices::warnings::breakdown(&d.name, &d.details);
        if vg != "4 V" {
            assert!(warnings.is_empty(), "{vg}: {warnings:?}");
        } else {
            assert_eq!(warnings.len(), 1, "{warnings:?}");
            assert!(warnings[0].contains("`m`") && warnings[0].contains("`insulator`"));
            assert!(warnings[0].contains("12 MV/cm"), "{}", warnings[0]);
        }
    }
}

/// The `iv` job's gate-current column is the gate current of the operating point at the same
/// bias.
#[test]
fn iv_reports_the_gate_current() {
    let text = THIN.replace("VG", "0 V").replace("LAYERS", "2");
    let d = load_source("t.lam", &text, &LoadOptions::default()).unwrap();
    let points = lamina::iv::run_iv(d, &[1.5, -0.5], &[0.5]).unwrap();
    for p in &points {
        let r = report(
            &THIN
                .replace("VG", &format!("{} V", p.vgs))
                .replace("LAYERS", "2"),
        );
        let gate = r.devices[0].terminals[1].2;
        assert!(
            (p.ig - gate).abs() <= 1e-6 * gate.abs(),
            "V_GS = {}: {:e} vs {gate:e}",
            p.vgs,
            p.ig
        );
    }
}

/// A layer's tunnelling keys replace the library insulator's values (a lighter electron
/// tunnels more easily), and a layer given by permittivity and thickness leaks only with all
/// four keys; without them the report says the leakage is not modelled.
#[test]
fn card_keys_set_the_tunnelling_data() {
    let card = |layer: &str| {
        format!(
            "device c : sheet_fet {{ channel = MoS2, gate = Au, {layer}, width = 1 um, length = 1 um }}
voltage_source vg (pos = g, neg = ground) {{ dc = 1.5 V }}
voltage_source vd (pos = d, neg = ground) {{ dc = 0.1 V }}
c m (drain = d, gate = g, source = ground)
"
        )
    };
    let gate = |layer: &str| report(&card(layer)).devices[0].terminals[1].2;
    let library = gate("insulator = SiO2, insulator_thickness = 1.5 nm");
    let lighter = gate(
        "insulator = SiO2, insulator_thickness = 1.5 nm, insulator_electron_tunnelling_mass = 0.3",
    );
    assert!(
        library > 0.0 && lighter > 2.0 * library,
        "{library:e}, {lighter:e}"
    );
    let by_keys = gate(
        "insulator_permittivity = 3.9, insulator_thickness = 1.5 nm, \
         insulator_electron_affinity = 0.95 eV, insulator_band_gap = 9 eV, \
         insulator_electron_tunnelling_mass = 0.42, insulator_hole_tunnelling_mass = 0.32",
    );
    assert!(
        (by_keys / library - 1.0).abs() < 1e-9,
        "{by_keys:e} vs {library:e}"
    );
    let r = report(&card(
        "insulator_permittivity = 3.9, insulator_thickness = 1.5 nm",
    ));
    assert_eq!(r.devices[0].terminals[1].2, 0.0);
    assert!(r.devices[0]
        .details
        .contains(&("gate leakage", DetailValue::Word("not modelled"))));
}

/// MoS2 under thirty layers of hBN (10 nm) and a metal gate near the channel's affinity: a
/// device whose leakage is far below its channel current at small gate drives.
fn moderate_card(mode: LeakageMode) -> SheetFetCard {
    let mut card = thin_card();
    card.insulator = vec![materials::insulator_layer("hBN", Some(30.0), None).unwrap()];
    card.gate = lamina_devices::Gate::Metal {
        work_function: card.electron_affinity + 0.3,
    };
    card.gate_leakage = mode;
    card
}

/// `gate_leakage = auto` leaves the leakage out only where the whole gate's current stays
/// below the stated fraction of the smallest channel current scale `(W/L) σ kT/q` inside the
/// window, or below one electron a year (the rule in the leakage module's docs; checked here
/// against the direct quadrature and a fine scan of the tabulated σ, not the device's own
/// search): inside the onsets the stamped current is zero and what is left out obeys the
/// rule, just beyond them the current reaches the rule's bound (to 10 mV), further out it is
/// the `on` device's, and across the fade-in the slopes are the derivatives.
#[test]
fn auto_mode_leaves_out_only_what_is_below_the_fraction() {
    let auto = SheetFet::new(&moderate_card(LeakageMode::Auto)).unwrap();
    let on = SheetFet::new(&moderate_card(LeakageMode::On)).unwrap();
    let card = moderate_card(LeakageMode::Auto);
    let w = auto.leakage_window().expect("a window");
    assert!(on.leakage_window().is_none());
    assert!(w.below < -0.3 && w.above > 0.5, "{w:?}");
    let table = auto.leakage_table().unwrap();
    let vt = K_B * card.temperature / Q;
    let (wd, l) = (card.width, card.length);
    let sigma = |u: f64| auto.model().table_s_sigma(u).1;
    let least = (0..=4000)
        .map(|k| sigma(w.below + (w.above - w.below) * k as f64 / 4000.0))
        .fold(f64::INFINITY, f64::min);
    let floor = Q / 3.156e7;
    let bound = (card.leakage_fraction * wd / l * least * vt).max(floor);
    let gate = |u: f64| wd * l * table.direct(u).abs();
    for (onset, out) in [(w.above, 1.0), (w.below, -1.0)] {
        assert!(
            gate(onset) < bound,
            "at {onset}: {:e} vs {bound:e}",
            gate(onset)
        );
        // Just beyond, it is no longer below the bound the search used, which is at least
        // one electron a year (its σ was the least over a wider window).
        assert!(
            gate(onset + out * 0.0101) >= floor,
            "just beyond {onset}: {:e} vs {floor:e}",
            gate(onset + out * 0.0101)
        );
        // Beyond the onset the device carries the whole leakage.
        let u = onset + out * 0.2;
        assert_eq!(auto.gate_leakage(u, u), on.gate_leakage(u, u));
    }
    // Inside, nothing is stamped, and what is left out is below the bound.
    for k in 1..40 {
        let u = w.below + (w.above - w.below) * k as f64 / 40.0;
        assert!(gate(u) < bound, "{u}: {:e}", gate(u));
        if w.excludes(u) {
            assert_eq!(auto.gate_leakage(u, u), [(0.0, 0.0); 2]);
        }
    }
    // Continuous with continuous slopes through the fade-in (central differences).
    let dh = 1e-6;
    for onset in [w.above, w.below] {
        for k in 0..=12 {
            let u = onset - onset.signum() * (k as f64 / 10.0) * 2.0 * vt;
            let [(i, g), _] = auto.gate_leakage(u, 0.0);
            let [(ip, _), _] = auto.gate_leakage(u + dh, 0.0);
            let [(im, _), _] = auto.gate_leakage(u - dh, 0.0);
            let fd = (ip - im) / (2.0 * dh);
            // Against the slope scale of the whole current over the fade-in (where the
            // weight's slope starts from zero, the difference carries its curvature).
            let [(whole, dwhole), _] = on.gate_leakage(u, 0.0);
            let scale = dwhole.abs() + whole.abs() / (2.0 * vt);
            assert!(
                (g - fd).abs() <= 1e-4 * scale + 1e-30,
                "u = {u}: slope {g:e}, difference {fd:e} (I = {i:e})"
            );
        }
    }
}

const MODES: &str = "device c : sheet_fet {
    channel = MoS2, gate = Au, INSULATOR, width = 1 um, length = 1 um MODE
}
voltage_source vg (pos = g, neg = ground) { dc = 1.5 V }
voltage_source vd (pos = d, neg = ground) { dc = 0.1 V }
c m (drain = d, gate = g, source = ground)
";

/// `gate_leakage = off` removes the current (the report says `off`); an unknown mode, a
/// fraction without `auto`, a fraction outside (0, 1] and either key on a stack without
/// tunnelling data are refused at the key, with what to write instead.
#[test]
fn leakage_modes_from_the_card() {
    let text =
        |insulator: &str, mode: &str| MODES.replace("INSULATOR", insulator).replace("MODE", mode);
    let r = report(&text(
        "insulator = hBN, insulator_layers = 2",
        ", gate_leakage = off",
    ));
    assert_eq!(r.devices[0].terminals[1].2, 0.0);
    assert!(r.devices[0]
        .details
        .contains(&("gate leakage", DetailValue::Word("off"))));
    let on = report(&text(
        "insulator = hBN, insulator_layers = 2",
        ", gate_leakage = on",
    ));
    assert!(on.devices[0].terminals[1].2 > 0.0);
    for (insulator, mode, key, says) in [
        (
            "insulator = hBN, insulator_layers = 10",
            ", gate_leakage = sometimes",
            "gate_leakage",
            "no gate-leakage mode called `sometimes`",
        ),
        (
            "insulator = hBN, insulator_layers = 10",
            ", gate_leakage = on, gate_leakage_fraction = 0.01",
            "gate_leakage_fraction",
            "only applies with `gate_leakage = auto`",
        ),
        (
            "insulator = hBN, insulator_layers = 10",
            ", gate_leakage_fraction = 2",
            "gate_leakage_fraction",
            "outside (0, 1]",
        ),
        (
            "insulator_permittivity = 3.9, insulator_thickness = 3 nm",
            ", gate_leakage = on",
            "gate_leakage",
            "has no gate leakage",
        ),
    ] {
        let e = load_source("t.lam", &text(insulator, mode), &LoadOptions::default())
            .err()
            .unwrap_or_else(|| panic!("{mode} accepted"))
            .to_string();
        assert!(e.contains(says), "{e}");
        let line = text(insulator, mode)
            .lines()
            .position(|l| l.contains(key))
            .unwrap()
            + 1;
        assert!(e.contains(&format!("t.lam:{line}:")), "{e}");
    }
}

/// The node voltage at the end of `tests/corpus/good/retention.lam` with the card's
/// `gate_leakage` set to `mode`.
fn retained(mode: &str) -> f64 {
    let text = std::fs::read_to_string("tests/corpus/good/retention.lam")
        .unwrap()
        .replace("gate_leakage = auto", &format!("gate_leakage = {mode}"));
    let dir = std::env::temp_dir().join(format!("lamina-retention-{}-{mode}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("r.lam");
    std::fs::write(&file, text).unwrap();
    let out = dir.join("out");
    let status = std::process::Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args([
            "run",
            file.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(
        status.status.success(),
        "{}",
        String::from_utf8_lossy(&status.stderr)
    );
    let csv = std::fs::read_to_string(out.join("transient-1/transient.csv")).unwrap();
    let last = csv.lines().last().unwrap();
    let v = last.split(',').nth(1).unwrap().parse().unwrap();
    std::fs::remove_dir_all(&dir).ok();
    v
}

/// A storage node held only by an off pass device loses its charge through the read
/// device's gate: 100 ms after the write the leakage has taken 6 mV. `auto` must keep that
/// leakage (the pass device's off current, far below the read device's own current at zero
/// gate drive, bounds what may be left out), so it ends where `on` does; `off` keeps the
/// charge, so the check can fail.
#[test]
fn auto_mode_keeps_the_leakage_that_drains_a_held_node() {
    let (auto, on, off) = (retained("auto"), retained("on"), retained("off"));
    assert!((auto - on).abs() < 1e-6, "auto {auto} V, on {on} V");
    assert!(off - on > 3e-3, "off {off} V, on {on} V");
}

/// `lamina iv` measures the gate current, so an `auto` card's leakage is whole there: at
/// gate voltages inside and beyond the gate drives where `auto` leaves it out of circuits
/// (V_DS = 0, so both channel ends see it), the curve's gate current is bit for bit that of
/// the same card with `gate_leakage = on`, and beyond the onsets it is the leakage (nonzero,
/// with the sign of V_GS). Inside, this stack's leakage is below the curve's resolution.
#[test]
fn iv_takes_the_leakage_whole() {
    let text = |mode: &str| {
        format!(
            "device c : sheet_fet {{ channel = MoS2, gate_work_function = 4.37 eV,
    insulator = hBN, insulator_layers = 10, insulator2 = HfO2, insulator2_thickness = 3 nm,
    width = 1 um, length = 100 nm, gate_leakage = {mode} }}
voltage_source vg (pos = g, neg = ground) {{ dc = 0 V }}
voltage_source vd (pos = d, neg = ground) {{ dc = 0 V }}
c m (drain = d, gate = g, source = ground)
"
        )
    };
    let load = |mode: &str| load_source("t.lam", &text(mode), &LoadOptions::default()).unwrap();
    let auto = load("auto");
    let fet = auto.circuit.find_element("m").unwrap();
    let device = SheetFet::new(auto.sheet_card(fet).unwrap()).unwrap();
    let w = device.leakage_window().expect("a window");
    let ig = |d, vg: f64| lamina::iv::run_iv(d, &[vg], &[0.0]).unwrap()[0].ig;
    for vg in [0.8 * w.above, 0.8 * w.below, 3.0 * w.above, 3.0 * w.below] {
        let (a, o) = (ig(load("auto"), vg), ig(load("on"), vg));
        assert_eq!(a.to_bits(), o.to_bits(), "{vg} V: auto {a:e}, on {o:e}");
        if !w.excludes(vg) {
            assert!(a != 0.0 && a.signum() == vg.signum(), "{vg} V: {a:e}");
        }
    }
}

/// `lamina check --verbose` lists the fraction an `auto` card leaves its leakage out below,
/// with where it came from.
#[test]
fn check_lists_the_leakage_fraction() {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(["check", "netlists/demo/n-device.lam", "--verbose"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    let line = text
        .lines()
        .find(|l| l.contains("gate_leakage_fraction"))
        .unwrap_or_else(|| panic!("{text}"));
    assert!(line.contains("0.001") && line.contains("default"), "{line}");
}
