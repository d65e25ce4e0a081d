//! The optional density dependence of the sheet FET's mobility, `μ(n) = μ_0 / (1 + (n_ref /
//! n)^α)` (a Coulomb-limited term `μ_0 (n / n_ref)^α` combined with `μ_0` by Matthiessen's
//! rule, after the separation of monolayer-MoS2 mobility by Z. Yu et al., "Realization of
//! Room-Temperature Phonon-Limited Carrier Transport in Monolayer MoS2 by Dielectric and
//! Carrier Screening", Adv. Mater. 28, 547 (2016); the power-law scaling is recalled, not
//! checked): the form's limits, the tabulated conductance against the form evaluated
//! directly, the drain current's ratio to the constant-mobility card, and cards without the
//! option keeping their results bit for bit.

use lamina_devices::mobility::DensityDependence;
use lamina_devices::physics::Q;
use lamina_devices::{SheetFet, SheetFetCard, SheetModel};

/// 1/m² per 1/cm².
const PER_CM2: f64 = 1e4;

/// The form as written in the module docs, evaluated directly.
fn form(mu0: f64, d: &DensityDependence, n: f64) -> f64 {
    mu0 / (1.0 + (d.reference_density / n).powf(d.exponent))
}

/// The default card (n-type under a metal gate at flat band, 100 cm²/(V s) for both
/// carriers) with an electron density dependence.
fn card_with(d: Option<DensityDependence>, h: Option<DensityDependence>) -> SheetFetCard {
    let mut card = SheetFetCard {
        saturation_velocity: 3.4e4,
        ..SheetFetCard::default()
    };
    card.mobility.electron.density = d;
    card.mobility.hole.density = h;
    card
}

const ELECTRONS: DensityDependence = DensityDependence {
    reference_density: 3e12 * PER_CM2,
    exponent: 1.3,
};

/// Closed-form limits of the form: `μ_0 (n/n_ref)^α` far below `n_ref`, `μ_0 (1 -
/// (n_ref/n)^α)` far above it (the first neglected terms are of relative size `(n/n_ref)^α`
/// and `(n_ref/n)^α`), exactly `μ_0 / 2` at `n_ref`; and the conductance weight's derivative
/// against a central difference.
#[test]
fn density_form_meets_its_low_and_high_density_limits() {
    let d = ELECTRONS;
    let n_ref = d.reference_density;
    assert_eq!(d.factor(n_ref), 0.5);
    assert_eq!(d.factor(0.0), 0.0);
    for x in [1e-6f64, 1e-4, 1e-3] {
        let low = x.powf(d.exponent);
        let got = d.factor(x * n_ref);
        assert!(
            (got / low - 1.0).abs() <= 2.0 * low,
            "n = {x} n_ref: {got:e} vs {low:e}"
        );
        let high = 1.0 - low;
        let got = d.factor(n_ref / x);
        assert!(
            (got - high).abs() <= 2.0 * low * low,
            "n = n_ref / {x}: {got:e} vs {high:e}"
        );
    }
    for x in [1e-3, 0.1, 1.0, 7.0, 1e3] {
        let n = x * n_ref;
        let (w, dw) = d.conductance_density(n);
        assert_eq!(w, n * d.factor(n));
        let h = 1e-5 * n;
        let fd = (d.conductance_density(n + h).0 - d.conductance_density(n - h).0) / (2.0 * h);
        assert!((dw / fd - 1.0).abs() < 1e-8, "n = {x} n_ref: {dw} vs {fd}");
    }
}

/// The conductance from the local solve equals `q (μ_n(n) n + μ_p p)` from the form at
/// densities from 1e9 to 1e14 /cm², its `dσ/du` matches a central difference (the chain
/// rule through `n(u)`), and the tables interpolate it within 1e-6 relative.
#[test]
fn tabulated_conductance_follows_the_density_form() {
    let card = card_with(Some(ELECTRONS), None);
    let model = SheetModel::build(&card).unwrap();
    let mu0 = card.electron_mobility;
    let mut seen = Vec::new();
    let mut worst_table: f64 = 0.0;
    for k in 0..=70 {
        let u = -0.6 + 0.05 * k as f64;
        let s = model.local_state(u);
        if !(1e9 * PER_CM2..=1e14 * PER_CM2).contains(&s.n) {
            continue;
        }
        seen.push(s.n);
        let direct = Q * (form(mu0, &ELECTRONS, s.n) * s.n + card.hole_mobility * s.p);
        assert!(
            (s.sigma / direct - 1.0).abs() < 1e-14,
            "u = {u}: {:e} vs {direct:e}",
            s.sigma
        );
        let h = 1e-5;
        let fd = (model.local_state(u + h).sigma - model.local_state(u - h).sigma) / (2.0 * h);
        assert!(
            (s.dsigma_du / fd - 1.0).abs() < 1e-6,
            "u = {u}: {:e} vs {fd:e}",
            s.dsigma_du
        );
        // Between knots too.
        let um = u + 0.0123;
        let sm = model.local_state(um);
        let table = model.table_s_sigma(um).1;
        worst_table = worst_table.max((table / sm.sigma - 1.0).abs());
    }
    assert!(
        seen.first().unwrap() < &(1e10 * PER_CM2) && seen.last().unwrap() > &(1e13 * PER_CM2),
        "{seen:?}"
    );
    assert!(worst_table < 1e-6, "{worst_table:e}");
}

/// With the option the drain current stays positive and strictly rising in `V_GS`, lies
/// below the constant-mobility card's, and at `V_DS` = 1 mV, where the channel is nearly
/// uniform and electrons dominate, their ratio is `μ(n) / μ_0` at the channel's middle
/// within 1e-4 (the spread of `n` along the channel and the velocity-saturation factor,
/// both tiny at 1 mV, make up the rest).
#[test]
fn drain_current_scales_by_the_density_factor() {
    let plain = SheetFet::new(&card_with(None, None)).unwrap();
    let dep = SheetFet::new(&card_with(Some(ELECTRONS), None)).unwrap();
    let report = dep.mobility_report().to_string();
    assert!(
        report.contains("scaled by 1/(1 + (3e12 cm⁻² / n)^1.3)"),
        "{report}"
    );
    let vd = 1e-3;
    let mut last = 0.0;
    let mut worst: f64 = 0.0;
    for k in 0..=40 {
        let vg = -0.4 + 0.04 * k as f64;
        let i0 = plain.intrinsic(vd, vg, 0.0).current.v;
        let i1 = dep.intrinsic(vd, vg, 0.0).current.v;
        assert!(
            i1 > last && i1 < i0,
            "{vg} V: {i1:e} after {last:e}, plain {i0:e}"
        );
        last = i1;
        let s = dep.model().local_state(vg - 0.5 * vd);
        if s.n > 1e6 * s.p && s.n > 1e11 * PER_CM2 {
            let expect = form(1.0, &ELECTRONS, s.n);
            worst = worst.max((i1 / i0 / expect - 1.0).abs());
        }
    }
    assert!(worst > 0.0 && worst < 1e-4, "{worst:e}");
    // Saturation: still positive and rising.
    let mut last = 0.0;
    for k in 0..=20 {
        let vg = 0.2 + 0.06 * k as f64;
        let i1 = dep.intrinsic(1.0, vg, 0.0).current.v;
        assert!(i1 > last, "{vg} V: {i1:e} after {last:e}");
        last = i1;
    }
}

/// A hole density dependence acts on the p-type branch and leaves the electron branch alone
/// (to the holes' share of the conductance there).
#[test]
fn hole_density_dependence_acts_on_holes() {
    let holes = DensityDependence {
        reference_density: 1e12 * PER_CM2,
        exponent: 1.0,
    };
    let plain = SheetFet::new(&card_with(None, None)).unwrap();
    let dep = SheetFet::new(&card_with(None, Some(holes))).unwrap();
    let vd = -1e-3;
    let vg = -2.6;
    let s = dep.model().local_state(vg - 0.5 * vd);
    assert!(s.p > 1e6 * s.n && s.p > 1e11 * PER_CM2, "{s:?}");
    let r = dep.intrinsic(vd, vg, 0.0).current.v / plain.intrinsic(vd, vg, 0.0).current.v;
    let expect = form(1.0, &holes, s.p);
    assert!((r / expect - 1.0).abs() < 1e-4, "{r} vs {expect}");
    let (a, b) = (
        dep.intrinsic(0.05, 1.0, 0.0).current.v,
        plain.intrinsic(0.05, 1.0, 0.0).current.v,
    );
    assert!((a / b - 1.0).abs() < 1e-12, "{a:e} vs {b:e}");
}

/// The stack cache tells cards apart by their density settings: two devices that differ
/// only in the reference density (or only in the exponent) get different tables, and equal
/// cards share one.
#[test]
fn stack_cache_keys_include_the_density_settings() {
    let a = SheetModel::shared(&card_with(Some(ELECTRONS), None)).unwrap();
    let same = SheetModel::shared(&card_with(Some(ELECTRONS), None)).unwrap();
    assert!(std::sync::Arc::ptr_eq(&a, &same));
    let other_ref = DensityDependence {
        reference_density: 2.0 * ELECTRONS.reference_density,
        ..ELECTRONS
    };
    let other_exp = DensityDependence {
        exponent: 1.0,
        ..ELECTRONS
    };
    let u = 1.2;
    let base = a.table_s_sigma(u).1;
    for d in [other_ref, other_exp] {
        let b = SheetModel::shared(&card_with(Some(d), None)).unwrap();
        assert!(!std::sync::Arc::ptr_eq(&a, &b));
        let sb = b.table_s_sigma(u).1;
        let expect = Q * form(1e-2, &d, b.local_state(u).n) * b.local_state(u).n;
        assert!(
            sb != base && (sb / expect - 1.0).abs() < 1e-6,
            "{sb:e} vs {expect:e}"
        );
    }
    let none = SheetModel::shared(&card_with(None, None)).unwrap();
    assert!(!std::sync::Arc::ptr_eq(&a, &none));
}

/// Faulty density settings are refused with the setting named.
#[test]
fn faulty_density_settings_name_the_setting() {
    let bad = |d: DensityDependence, hole: bool| {
        let c = if hole {
            card_with(None, Some(d))
        } else {
            card_with(Some(d), None)
        };
        c.validate().unwrap_err()
    };
    let e = bad(
        DensityDependence {
            reference_density: 0.0,
            exponent: 1.0,
        },
        false,
    );
    assert!(e.contains("`electron_mobility_density_reference`"), "{e}");
    let e = bad(
        DensityDependence {
            reference_density: 1e16,
            exponent: f64::NAN,
        },
        true,
    );
    assert!(e.contains("`hole_mobility_density_exponent`"), "{e}");
    let e = bad(
        DensityDependence {
            reference_density: 1e16,
            exponent: 5.0,
        },
        false,
    );
    assert!(e.contains("`electron_mobility_density_exponent`"), "{e}");
}

/// Currents, drain charges, transconductances and table values of the default card (with
/// 3.4e4 m/s saturation velocity) recorded as bit patterns from the code before the density
/// option existed (commit 79dd444): a card without the option reproduces them (the current
/// bit for bit).
#[test]
fn cards_without_the_density_option_keep_their_results_bit_for_bit() {
    let card = card_with(None, None);
    let fet = SheetFet::new(&card).unwrap();
    for ((vd, vg), bits) in RECORDED_INTRINSIC {
        let r = fet.intrinsic(vd, vg, 0.0);
        assert_eq!(r.current.v.to_bits(), bits[0], "{vd} V, {vg} V");
        // Q_D and g_m to 1e-9: the drain-charge table's quintic and the velocity-saturation
        // factor's rewriting (issue 14) moved them by rounding, far less than this.
        for (got, bits) in [r.q_drain.v, r.current.d[1]].iter().zip(&bits[1..]) {
            let want = f64::from_bits(*bits);
            assert!(
                (got / want - 1.0).abs() < 1e-9,
                "{vd} V, {vg} V: {got:e} vs {want:e}"
            );
        }
    }
    let ((vd, vg), bits) = RECORDED_SMALL_VDS;
    let r = fet.intrinsic(vd, vg, 0.0);
    for (got, bits) in [r.current.v, r.q_drain.v, r.current.d[1]].iter().zip(bits) {
        let want = f64::from_bits(bits);
        assert!((got / want - 1.0).abs() < 1e-9, "{got:e} vs {want:e}");
    }
    let model = SheetModel::build(&card).unwrap();
    for (u, bits) in RECORDED_TABLES {
        let (s, g) = model.table_s_sigma(u);
        assert_eq!([s.to_bits(), g.to_bits()], bits, "u = {u} V");
    }
}

/// `(V_DS, V_GS)` and the bits of `I_D`, `Q_D` and `dI_D/dV_G` (see above).
// The small-V_DS point (0.005 V, 0.6 V) recorded then is checked apart: the switch to that
// form later moved from a fixed 10 mV to 0.4 kT/q, which leaves this point where it was; it
// must agree with the record to 1e-9 (it does bit for bit today).
const RECORDED_SMALL_VDS: ((f64, f64), [u64; 3]) = (
    (0.005, 0.6),
    [0x3e899aa0f3f1fc25, 0xbce1293985311970, 0x3e9352fabd878de2],
);

const RECORDED_INTRINSIC: [((f64, f64), [u64; 3]); 4] = [
    (
        (0.5, 0.8),
        [0x3ef281e5e44c9b2f, 0xbcdd82d5b232007e, 0x3efdd21938e0a8c3],
    ),
    (
        (1.0, 0.2),
        [0x3ec4a69cf495f1f6, 0xbcbc0dc3afaee72f, 0x3ef071345830da65],
    ),
    (
        (-0.3, 1.2),
        [0xbef9c2404017422a, 0xbcf335df1bbff343, 0xbef274902e5c57e0],
    ),
    (
        (-0.4, -2.4),
        [0xbee5d23cf756cbca, 0x3cd5b08c506f1db1, 0x3ef77813eae7964f],
    ),
];

/// `u` and the bits of the tabulated `S(u)` and `σ(u)` (see above).
const RECORDED_TABLES: [(f64, [u64; 2]); 4] = [
    (-2.5, [0xbef187f5f9cabd99, 0x3f06a30fab4df7b1]),
    (0.3, [0x3ed2133359a4a7d3, 0x3ef6434aebb943db]),
    (0.71, [0x3ef2a6e1f86a8050, 0x3f0768fbf7fcd2f5]),
    (1.4, [0x3f10611bbce1dea2, 0x3f164844d13c7aa0]),
];
