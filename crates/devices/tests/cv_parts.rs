//! The parts of the gate stack a C-V report shows: the series combination against the local
//! charge derivative, a gapless Dirac gate's quantum capacitance and level against the closed
//! form, the parabolic channel's degenerate limit, and the small accessors the report reads.

use lamina_devices::physics::{HBAR, M0, Q};
use lamina_devices::{Gate, Layer, SheetFet, SheetFetCard, SheetModel};
use lamina_engine::Element;

/// A gapless graphene-like gate (v_F = 1e6 m/s, g = 4) on 3 nm of ε = 3.9.
fn graphene_gate(card: SheetFetCard) -> SheetFetCard {
    SheetFetCard {
        gate: Gate::Dirac {
            fermi_velocity: 1e6,
            half_gap: 0.0,
            gap_shift: 0.0,
            degeneracy: 4.0,
            neutral_work_function: 4.2,
            residual_density: 0.0,
        },
        insulator: vec![Layer {
            permittivity: 3.9,
            thickness: 3e-9,
            breakdown_field: None,
        }],
        ..card
    }
}

fn with_traps() -> SheetFetCard {
    SheetFetCard {
        // 1e12 /(eV cm²).
        trap_density: 1e16,
        ..SheetFetCard::default()
    }
}

/// Differentiating the charge balance of the module doc (`u = ξ + offset [- μ_g/q] + Q_g/C_ins`,
/// `Q_g = -(ρ + const)`, `dρ/dξ = -(C_Qch + C_it)`, `dμ_g/dξ = q dρ/dξ / C_Qg`) gives
/// `du/dξ = 1 + (C_Qch + C_it) (1/C_ins + 1/C_Qg)`, so
/// `-dρ/du = 1 / (1/C_ins + 1/C_Qg + 1/(C_Qch + C_it))`: the series combination. Checked to
/// rounding for metal and Dirac gates, with and without traps, from accumulation of holes to
/// strong inversion.
#[test]
fn series_combination_is_the_local_gate_capacitance() {
    let cards = [
        SheetFetCard::default(),
        with_traps(),
        graphene_gate(SheetFetCard::default()),
        graphene_gate(with_traps()),
    ];
    for card in cards {
        let m = SheetModel::build(&card).unwrap();
        assert_eq!(m.trap_capacitance(), Q * card.trap_density);
        let (c_ins, c_it) = (m.insulator_capacitance(), m.trap_capacitance());
        let mut u = -3.0;
        while u <= 3.0 {
            let s = m.local_state(u);
            let series = 1.0
                / (1.0 / c_ins
                    + 1.0 / s.gate_quantum_capacitance
                    + 1.0 / (s.channel_quantum_capacitance + c_it));
            let rel = (-s.drho_du / series - 1.0).abs();
            assert!(rel < 1e-12, "u = {u} V: {} vs {series:e}", -s.drho_du);
            u += 0.0371;
        }
    }
}

/// A gapless Dirac gate's quantum capacitance at the level the model reports against
/// `C_Q = (2 q² kT / (π (ħ v_F)²)) ln[2 (1 + cosh(q V_ch / kT))]` with `q V_ch = μ_g` of
/// T. Fang, A. Konar, H. Xing and D. Jena, "Carrier statistics and quantum capacitance of
/// graphene sheets and ribbons", Appl. Phys. Lett. 91, 092109 (2007) (the paper's title and
/// authors checked; the form recalled from memory, and equal to `q² ∫ D(E) (-∂f/∂E) dE` with
/// `D = 2|E| / (π (ħ v)²)`, since `∫ |E| (-∂f/∂E) dE = kT ln[2 (1 + cosh(μ/kT))]`). The level
/// itself is checked against Gauss's law, `μ_g/q = ξ + (Φ_0 - χ)/q + Q_g/C_ins - u`.
#[test]
fn dirac_gate_level_and_capacitance_follow_the_closed_form() {
    for t in [77.0, 300.0, 400.0] {
        let card = SheetFetCard {
            temperature: t,
            ..graphene_gate(SheetFetCard::default())
        };
        let m = SheetModel::build(&card).unwrap();
        let kt = lamina_devices::physics::K_B * t;
        let offset = 4.2 - card.electron_affinity;
        let mut u = -2.5;
        while u <= 2.5 {
            let s = m.local_state(u);
            let level = s.gate_level.expect("a Dirac gate reports its level");
            let gauss = s.xi + offset + s.gate_charge / m.insulator_capacitance() - u;
            assert!(
                (level - gauss).abs() < 1e-12 * (1.0 + u.abs()),
                "{t} K, u = {u}: {level} vs {gauss}"
            );
            // ln[2 (1 + cosh x)] = |x| + 2 ln(1 + e^-|x|), free of overflow.
            let x = (Q * level / kt).abs();
            let fang = 2.0 * Q * Q * kt / (std::f64::consts::PI * (HBAR * 1e6).powi(2))
                * (x + 2.0 * (-x).exp().ln_1p());
            let rel = (s.gate_quantum_capacitance / fang - 1.0).abs();
            assert!(rel < 1e-9, "{t} K, u = {u}: {rel:e}");
            u += 0.0419;
        }
    }
    let metal = SheetModel::build(&SheetFetCard::default()).unwrap();
    assert_eq!(metal.local_state(0.5).gate_level, None);
    assert_eq!(
        metal.local_state(0.5).gate_quantum_capacitance,
        f64::INFINITY
    );
}

/// Deep in inversion a parabolic band's quantum capacitance tends to `q² g m* / (2π ħ²)`, the
/// density of states times q² (J. H. Davies, The Physics of Low-Dimensional Semiconductors,
/// 1998, ch. 1: the 2D density of states is constant); the approach is `1 / (1 + e^(-ξ/V_T))`
/// (the derivative of `ln(1 + e^(ξ/V_T))`), so the shortfall is below `e^(-ξ/V_T)`, plus the
/// holes' share, far smaller still. The channel's own capacitance (about 7 F/m² here) holds
/// `ξ` down, so the stack has 1 nm of ε = 25 and `u` goes to 80 V.
#[test]
fn channel_quantum_capacitance_reaches_the_degenerate_limit() {
    let card = SheetFetCard {
        insulator: vec![Layer {
            permittivity: 25.0,
            thickness: 1e-9,
            breakdown_field: None,
        }],
        ..SheetFetCard::default()
    };
    let m = SheetModel::build(&card).unwrap();
    let limit = Q * Q * card.electron_degeneracy * card.electron_mass * M0
        / (2.0 * std::f64::consts::PI * HBAR * HBAR);
    let vt = m.thermal_voltage();
    let mut seen = 0;
    for u in [5.0, 10.0, 20.0, 40.0, 80.0] {
        let s = m.local_state(u);
        if s.xi > 30.0 * vt {
            seen += 1;
            let rel = (s.channel_quantum_capacitance / limit - 1.0).abs();
            let bound = (-s.xi / vt).exp() + 1e-13;
            assert!(
                rel < bound,
                "u = {u} V, ξ = {} V: {rel:e} > {bound:e}",
                s.xi
            );
        }
    }
    assert!(seen >= 2, "only {seen} points reached ξ > 30 V_T");
    // Below the band edge the capacitance is far from the limit: the check can fail.
    assert!(m.local_state(-1.0).channel_quantum_capacitance < 1e-3 * limit);
}

/// The channel's end voltages come from the internal nodes where the card has contact
/// resistances and from the terminals otherwise; the overlap is per side, times the width.
#[test]
fn channel_voltages_and_overlap_read_the_layout() {
    let x = [1.0, 2.0, 3.0, 4.0, 5.0];
    let cases = [
        (0.0, 0.0, (1.0, 3.0)),
        (1e-4, 0.0, (4.0, 3.0)),
        (0.0, 1e-4, (1.0, 4.0)),
        (1e-4, 1e-4, (4.0, 5.0)),
    ];
    for (rd, rs, want) in cases {
        let card = SheetFetCard {
            drain_resistance: rd,
            source_resistance: rs,
            overlap_capacitance: 1e-10,
            width: 2e-6,
            ..SheetFetCard::default()
        };
        let fet = SheetFet::new(&card).unwrap();
        let n = fet.terminals().len() + fet.internals().len();
        assert_eq!(fet.channel_voltages(&x[..n]), Some(want), "{rd} {rs}");
        assert_eq!(fet.channel_voltages(&x[..2]), None);
        assert!((fet.overlap_capacitance() - 2e-16).abs() < 1e-30);
    }
}
