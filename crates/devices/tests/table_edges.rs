//! The tables far from the midgap point: a thick back gate swept to ±100 V against direct
//! solves (the model's own local solve, and an independent one written here from the 2D
//! Fermi-Dirac statistics), the continuation beyond the valid range, and the size bounds.

use lamina_devices::physics::{K_B, Q};
use lamina_devices::sheet_fet::{MAX_EXTENSION_POINTS, MAX_TABLE_POINTS, U_REACH};
use lamina_devices::{Layer, SheetFet, SheetFetCard, SheetModel};
use quadrature::double_exponential::integrate;

/// The default (MoS2-like) card on 285 nm of SiO2 (ε = 3.9), the common back-gated test
/// structure (common practice).
fn back_gated() -> SheetFetCard {
    SheetFetCard {
        insulator: vec![Layer {
            permittivity: 3.9,
            thickness: 285e-9,
            breakdown_field: None,
        }],
        ..SheetFetCard::default()
    }
}

/// `∫_a^b f` by the double-exponential rule of the `quadrature` crate, to `rel` of `scale`.
fn quad(f: impl Fn(f64) -> f64, a: f64, b: f64, rel: f64, scale: f64) -> f64 {
    integrate(f, a, b, rel * scale.abs().max(1e-300)).integral
}

/// Current and Ward-Dutton charges of the channel between `u_d` and `u_s`, integrated
/// directly from a local `(σ, ρ)` function: `I = (W/L) ∫ σ du`,
/// `Q_ch = W L ∫ ρ σ du / ∫ σ du`, `Q_D = W L ∫ (S_s - S(u)) ρ σ du / (∫ σ du)²`
/// (Ward and Dutton, IEEE JSSC 13, 703, 1978, in the charge-sheet form).
fn direct(card: &SheetFetCard, local: &dyn Fn(f64) -> (f64, f64), us: f64, ud: f64) -> [f64; 3] {
    let sig = |u: f64| local(u).0;
    let ds = quad(sig, ud, us, 1e-12, sig(us) * (us - ud));
    let rs = |u: f64| {
        let (s, r) = local(u);
        r * s
    };
    let da = quad(rs, ud, us, 1e-12, rs(us) * (us - ud));
    // S_s - S(u) by its own quadrature at every outer node.
    let inner = |u: f64| quad(sig, u, us, 1e-12, sig(us) * (us - u).max(1e-9));
    let qd = quad(
        |u| inner(u) * rs(u),
        ud,
        us,
        1e-10,
        da * ds / sig(us).max(1e-300),
    );
    let wl = card.width * card.length;
    [
        card.width / card.length * ds,
        wl * da / ds,
        wl * qd / (ds * ds),
    ]
}

/// Tables against the model's direct local solve at back-gate voltages from -100 V to 100 V
/// with 1 V on the drain: current, channel and drain charges, and the current's derivatives
/// `dI/dV_G = (W/L) (σ_s - σ_d)` and `dI/dV_D = (W/L) σ_d`, all within 1e-6 relative.
#[test]
fn thick_back_gate_matches_the_direct_solve_to_100_volts() {
    let card = back_gated();
    let fet = SheetFet::new(&card).unwrap();
    let m = fet.model();
    let (lo, hi) = m.valid_u_range();
    assert!(lo <= -U_REACH && hi >= U_REACH, "valid range {lo} to {hi}");
    let local = |u: f64| {
        let s = m.local_state(u);
        (s.sigma, s.rho)
    };
    let k = card.width / card.length;
    for vg in [
        -5.0, 3.0, -100.0, -60.0, -30.0, -10.0, 10.0, 30.0, 60.0, 100.0,
    ] {
        for vd in [1.0, -1.0] {
            let ch = fet.intrinsic(vd, vg, 0.0);
            let [i, qch, qd] = direct(&card, &local, vg, vg - vd);
            let rel = |a: f64, b: f64| (a / b - 1.0).abs();
            assert!(
                rel(ch.current.v, i) < 1e-6,
                "{vg} V: I {} vs {i}",
                ch.current.v
            );
            assert!(
                rel(-ch.q_gate.v, qch) < 1e-6,
                "{vg} V: Q_ch {} vs {qch}",
                -ch.q_gate.v
            );
            assert!(
                rel(ch.q_drain.v, qd) < 1e-6,
                "{vg} V: Q_D {} vs {qd}",
                ch.q_drain.v
            );
            let (ss, sd) = (m.local_state(vg).sigma, m.local_state(vg - vd).sigma);
            assert!(
                rel(ch.current.d[1], k * (ss - sd)) < 1e-6,
                "{vg} V: dI/dV_G {} vs {}",
                ch.current.d[1],
                k * (ss - sd)
            );
            assert!(
                rel(ch.current.d[0], k * sd) < 1e-6,
                "{vg} V: dI/dV_D {} vs {}",
                ch.current.d[0],
                k * sd
            );
        }
    }
}

/// The same device against a solve written here from the physics alone: the electron sheet
/// density of a parabolic 2D band in Fermi-Dirac statistics, `n = D kT ln(1 + e^(ξ/kT))`
/// with `D = g m* m0 / (2π ħ²)` (M. Lundstrom and J. Guo, Nanoscale Transistors, Springer
/// 2006, ch. 2; S. Datta, Quantum Transport: Atom to Transistor, CUP 2005), the hole density
/// likewise below the valence band, and Gauss's law across the oxide
/// `u = ξ + (Φ_m - χ) + q (n - p) / C_ox` solved by bisection; the charge-sheet current
/// `I = (W/L) ∫ q μ (n + p) du` (Pao and Sah 1966; Brews 1978) by quadrature.
#[test]
fn thick_back_gate_current_matches_an_independent_fermi_dirac_solve() {
    let card = back_gated();
    let fet = SheetFet::new(&card).unwrap();
    let kt = K_B * card.temperature;
    let hbar = 6.626_070_15e-34 / (2.0 * std::f64::consts::PI);
    let m0 = 9.109_383_701_5e-31;
    let dos = |m: f64, g: f64| g * m * m0 / (2.0 * std::f64::consts::PI * hbar * hbar);
    let (de, dh) = (
        dos(card.electron_mass, card.electron_degeneracy),
        dos(card.hole_mass, card.hole_degeneracy),
    );
    let ln1pexp = |x: f64| {
        if x > 0.0 {
            x + (-x).exp().ln_1p()
        } else {
            x.exp().ln_1p()
        }
    };
    let dens = |xi: f64| {
        (
            de * kt * ln1pexp(Q * xi / kt),
            dh * kt * ln1pexp(-(Q * xi + Q * card.band_gap) / kt),
        )
    };
    let c = 3.9 * 8.854_187_812_8e-12 / 285e-9;
    let offset = 4.0 - card.electron_affinity;
    let sigma = |u: f64| {
        let f = |xi: f64| {
            let (n, p) = dens(xi);
            xi + offset + Q * (n - p) / c - u
        };
        let (mut a, mut b) = (-50.0, 50.0);
        for _ in 0..200 {
            let mid = 0.5 * (a + b);
            if f(mid) > 0.0 {
                b = mid;
            } else {
                a = mid;
            }
        }
        let (n, p) = dens(0.5 * (a + b));
        Q * (card.electron_mobility * n + card.hole_mobility * p)
    };
    for vg in [10.0, 60.0, 100.0, -60.0, -100.0] {
        let vd = 0.5;
        let i = card.width / card.length * quad(sigma, vg - vd, vg, 1e-12, sigma(vg) * vd);
        let model = fet.intrinsic(vd, vg, 0.0).current.v;
        assert!((model / i - 1.0).abs() < 1e-6, "{vg} V: {model} vs {i} A");
    }
}

/// Beyond the valid range the tables continue with value and first derivative continuous at
/// the end (σ and ρ linearly, S as their integral), and stay finite far out.
#[test]
fn continuation_beyond_the_valid_range_is_c1_and_finite() {
    for card in [SheetFetCard::default(), back_gated()] {
        let m = SheetModel::build(&card).unwrap();
        let (lo, hi) = m.valid_u_range();
        for (edge, dir) in [(lo, -1.0), (hi, 1.0)] {
            let eps = 1e-6 * edge.abs();
            let (s_in, g_in) = m.table_s_sigma(edge - dir * eps);
            let (s_out, g_out) = m.table_s_sigma(edge + dir * eps);
            let (_, g) = m.table_s_sigma(edge);
            // Continuous first derivatives: the central difference of S across the edge is
            // σ there to O(eps²), and σ's one-sided slopes agree.
            let ds = (s_out - s_in) * dir;
            assert!(
                (ds / (2.0 * eps * g) - 1.0).abs() < 1e-9,
                "S step {ds} vs {}",
                2.0 * eps * g
            );
            let (slope_in, slope_out) = ((g - g_in) / eps, (g_out - g) / eps);
            assert!(
                (slope_out / slope_in - 1.0).abs() < 1e-4,
                "dσ/du {slope_in} to {slope_out}"
            );
        }
        let fet = SheetFet::new(&card).unwrap();
        for vg in [-1e4, 1e4] {
            let ch = fet.intrinsic(1.0, vg, 0.0);
            for x in [ch.current, ch.q_gate, ch.q_drain, ch.q_source] {
                assert!(x.v.is_finite() && x.d.iter().all(|d| d.is_finite()));
            }
        }
    }
}

/// Size bounds: the core keeps its grid and the extensions stay within their cap, for a warm
/// card and a card at the temperature floor; both reach ±U_REACH.
#[test]
fn extensions_are_bounded_and_reach_the_promised_range() {
    for t in [1.0, 30.0, 300.0, 500.0] {
        for card in [SheetFetCard::default(), back_gated()] {
            let card = SheetFetCard {
                temperature: t,
                ..card
            };
            let m = SheetModel::build(&card).unwrap();
            assert!(m.table_points() <= MAX_TABLE_POINTS);
            assert!(m.extension_points() <= 2 * (MAX_EXTENSION_POINTS - 1));
            let (lo, hi) = m.valid_u_range();
            assert!(
                lo <= -U_REACH && hi >= U_REACH,
                "{t} K: valid range {lo} to {hi} ({} extension points)",
                m.extension_points()
            );
        }
    }
}
