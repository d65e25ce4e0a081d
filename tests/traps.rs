//! Slow traps of the 2D-channel FET (`lamina_devices::sheet_fet::traps`): the device's
//! derivatives, the equilibrium occupancy, first-order relaxation after a gate step, charge
//! conservation in a long transient, and the hysteresis of both-way sweeps against the sweep
//! rate (through `lamina iv`).

mod common;

use lamina_devices::physics::{K_B, Q};
use lamina_devices::sheet_fet::{TrapGroup, TrapKind};
use lamina_devices::{SheetFet, SheetFetCard};
use lamina_engine::elements::{Capacitor, Pulse, VoltageSource, Waveform};
use lamina_engine::{
    Circuit, Element, EvalContext, OpParams, Probe, Stamp, Start, System, TransientParams,
};

/// An acceptor-like group at 0.3 eV below the conduction band edge.
fn group(density: f64, time: f64) -> TrapGroup {
    TrapGroup {
        density,
        level: 0.3,
        kind: TrapKind::Acceptor,
        time,
        decades: 0.0,
        states: 1,
        depth: 0.0,
        decay_length: 0.0,
    }
}

/// The default card (metal gate, 5 nm of ε = 3.4) with `groups`.
fn card(groups: Vec<TrapGroup>) -> SheetFetCard {
    SheetFetCard {
        slow_traps: groups,
        ..SheetFetCard::default()
    }
}

/// Evaluates `fet` at `x`: (f, q, df, dq).
fn eval(fet: &SheetFet, x: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>) {
    let n = x.len();
    let (mut f, mut q, mut df, mut dq) = (
        vec![0.0; n],
        vec![0.0; n],
        vec![0.0; n * n],
        vec![0.0; n * n],
    );
    let mut st = Stamp::new(&mut f, &mut q, &mut df, &mut dq);
    fet.evaluate(x, &EvalContext::dc(), &mut st);
    (f, q, df, dq)
}

/// The Jacobian is the derivative of the returned currents and charges (central differences,
/// common practice), with contacts, two groups, a spread of time constants, a donor group at a
/// depth, at small and large V_DS, and the terminal charges sum to zero.
#[test]
fn jacobian_is_the_derivative_with_slow_traps() {
    let c = SheetFetCard {
        source_resistance: 200e-6,
        drain_resistance: 300e-6,
        slow_traps: vec![
            TrapGroup {
                decades: 4.0,
                states: 3,
                ..group(5e15, 1e-3)
            },
            TrapGroup {
                kind: TrapKind::Donor,
                level: 1.2,
                depth: 2e-9,
                decay_length: 1e-10,
                ..group(2e16, 1e-6)
            },
        ],
        ..SheetFetCard::default()
    };
    let fet = SheetFet::new(&c).unwrap();
    assert_eq!(fet.slow_trap_states(), 4);
    let names: Vec<&str> = fet.internals().iter().map(|i| i.name).collect();
    assert_eq!(
        names,
        [
            "drain_int",
            "source_int",
            "occupancy1",
            "occupancy2",
            "occupancy3",
            "occupancy4"
        ]
    );
    for (vd, vg, vs) in [
        (0.5, 1.0, 0.0),
        (0.002, 0.8, 0.0),
        (1.0, 0.2, 0.1),
        (-0.3, 1.4, 0.0),
    ] {
        let x = [vd, vg, vs, vd * 0.99, vs + 0.001, 0.2, 0.5, 0.9, 0.4];
        let (f, q, df, dq) = eval(&fet, &x);
        let n = x.len();
        let qsum: f64 = q[..5].iter().sum();
        let qmax = q[..5].iter().fold(0.0f64, |m, v| m.max(v.abs()));
        assert!(
            qsum.abs() <= 1e-12 * qmax,
            "terminal charges sum to {qsum:e}"
        );
        for c in 0..n {
            let h = 1e-6;
            let (mut xp, mut xm) = (x, x);
            xp[c] += h;
            xm[c] -= h;
            let (fp, qp, _, _) = eval(&fet, &xp);
            let (fm, qm, _, _) = eval(&fet, &xm);
            for r in 0..n {
                let nf = (fp[r] - fm[r]) / (2.0 * h);
                let nq = (qp[r] - qm[r]) / (2.0 * h);
                let fs = (0..n).fold(0.0f64, |m, k| m.max(df[r * n + k].abs())) + f[r].abs();
                let qs = (0..n).fold(0.0f64, |m, k| m.max(dq[r * n + k].abs())) + 1e-30;
                assert!(
                    (nf - df[r * n + c]).abs() <= 1e-5 * fs + 1e-18,
                    "df[{r}][{c}] at {x:?}: {} vs {nf}",
                    df[r * n + c]
                );
                assert!(
                    (nq - dq[r * n + c]).abs() <= 1e-5 * qs,
                    "dq[{r}][{c}] at {x:?}: {} vs {nq}",
                    dq[r * n + c]
                );
            }
        }
    }
}

/// In DC the occupancy is the Fermi-Dirac value at the trap level, `1/(1 + exp((E_t - E_F)/kT))`
/// (Shockley and Read, Phys. Rev. 87, 835 (1952)), with the channel's Fermi level from the
/// direct solve of the stack at the gate drive the trapped charge shifts; and a card without
/// slow traps keeps its DC current to the last bit.
#[test]
fn dc_occupancy_is_the_fermi_dirac_value() {
    let density = 1e16;
    let plain = card(vec![]);
    let vt = K_B * 300.0 / Q;
    // From fast traps to ones of hours, whose rows are tiny beside the channel's.
    for (tau, vg) in [1e-3, 1e4]
        .into_iter()
        .flat_map(|t| [-0.8, -0.5, -0.35, -0.2, 0.0, 0.5].map(|v| (t, v)))
    {
        let trapped = card(vec![group(density, tau)]);
        let c_ins = trapped.insulator_capacitance();
        let solve = |card: &SheetFetCard| {
            let mut c = Circuit::new();
            let (g, d) = (c.node("g"), c.node("d"));
            c.add("vg", VoltageSource::dc(vg), &[g, Circuit::GROUND])
                .unwrap();
            c.add("vd", VoltageSource::dc(0.0), &[d, Circuit::GROUND])
                .unwrap();
            c.add("m", SheetFet::new(card).unwrap(), &[d, g, Circuit::GROUND])
                .unwrap();
            let mut sys = System::new(c).unwrap();
            let mut p = OpParams::default();
            p.newton.tol.reltol = 1e-10;
            p.newton.tol.vntol = 1e-12;
            let (sol, _) = sys.operating_point(&p).unwrap();
            let names: Vec<String> = (0..sys.unknown_count())
                .map(|i| sys.unknown_name(i).to_string())
                .collect();
            (sol.x, names)
        };
        let (x, names) = solve(&trapped);
        let k = names.iter().position(|n| n == "m.occupancy1").unwrap();
        let f = x[k];
        // The shift of the gate drive by the trapped charge at the interface.
        let delta = -Q * density * f / c_ins;
        let fet = SheetFet::new(&trapped).unwrap();
        let xi = fet.model().local_state(vg + delta).xi;
        let fd = 1.0 / (1.0 + (-(xi + 0.3) / vt).exp());
        assert!(
            (f - fd).abs() < 1e-6,
            "V_G = {vg}: occupancy {f} vs Fermi-Dirac {fd}"
        );
        let eq = fet.slow_trap_equilibrium(0.0, vg, 0.0)[0];
        assert!(
            (f - eq).abs() < 1e-6,
            "V_G = {vg}: {f} vs the device's own {eq}"
        );
        let (x0, _) = solve(&plain);
        assert!(x0.len() + 1 == x.len());
    }
    // The option off: the same card's evaluation is bit for bit the plain card's.
    let off = SheetFet::new(&card(vec![])).unwrap();
    let base = SheetFet::new(&SheetFetCard::default()).unwrap();
    for x in [[0.5, 1.0, 0.0], [0.001, 0.7, 0.0], [1.0, -0.5, 0.2]] {
        assert_eq!(eval(&off, &x), eval(&base, &x));
    }
}

/// A group on the gate side of the insulator (depth = its thickness) does not act back on the
/// channel, so after a gate step its occupancy relaxes as the closed form of first-order
/// kinetics, `f(t) = f_eq + (f_0 - f_eq) exp(-t/τ)` (a linear first-order equation; any
/// calculus text), and the gate current after the edge is `q N W L (f_eq - f_0) exp(-t/τ)/τ`.
#[test]
fn occupancy_relaxes_exponentially_after_a_gate_step() {
    let tau = 1e-3;
    let density = 1e16;
    let c = card(vec![TrapGroup {
        depth: 5e-9,
        ..group(density, tau)
    }]);
    let (v0, v1, edge) = (-0.6, 0.0, 1e-9);
    let fet = SheetFet::new(&c).unwrap();
    let f0 = fet.slow_trap_equilibrium(0.0, v0, 0.0)[0];
    let f1 = fet.slow_trap_equilibrium(0.0, v1, 0.0)[0];
    assert!(
        f1 - f0 > 0.5,
        "the step must move the occupancy: {f0} to {f1}"
    );
    let mut circuit = Circuit::new();
    let (g, d) = (circuit.node("g"), circuit.node("d"));
    let step = Waveform::pulse(Pulse {
        low: v0,
        high: v1,
        delay: 0.0,
        rise: edge,
        fall: edge,
        width: 1.0,
        period: None,
    })
    .unwrap();
    let vg = circuit
        .add("vg", VoltageSource::new(step), &[g, Circuit::GROUND])
        .unwrap();
    circuit
        .add("vd", VoltageSource::dc(0.0), &[d, Circuit::GROUND])
        .unwrap();
    circuit.add("m", fet, &[d, g, Circuit::GROUND]).unwrap();
    let mut sys = System::new(circuit).unwrap();
    let mut p = TransientParams::new(5.0 * tau);
    p.lte_reltol = 1e-7;
    p.tol.reltol = 1e-7;
    let res = sys
        .transient(
            &p,
            &Start::OperatingPoint(OpParams::default()),
            &[Probe::Current(vg)],
            None,
        )
        .unwrap();
    let amplitude = Q * density * 1e-12 * (f1 - f0) / tau;
    let mut checked = 0;
    for (k, &t) in res.time.iter().enumerate() {
        if t < 10.0 * edge + 1e-6 {
            continue;
        }
        // The source's branch current runs from its positive pin through it: the gate takes
        // its negative.
        let ig = -res.signals[0][k];
        let expected = amplitude * (-(t - edge) / tau).exp();
        assert!(
            (ig - expected).abs() <= 2e-4 * amplitude,
            "t = {t:e}: gate current {ig:e}, closed form {expected:e}"
        );
        checked += 1;
    }
    assert!(checked >= 20, "only {checked} samples");
}

/// Total charge is conserved in a long transient with slow traps: drain, source and gate float
/// on capacitors (the gate through one from a pulsed source), so the island's charge
/// `C_a v_a + C_b v_b + C_c (v_g - v_p)` may change only if the device's terminal charges stop
/// summing to zero, for instance if the trapped charge were not supplied through them. The
/// traps (at the interface, time constants over four decades about the pulse period) fill and
/// empty every period; 200 periods, tight Newton tolerances (what is left is the accepted
/// iterates' residual).
#[test]
fn island_charge_is_conserved_with_slow_traps() {
    let period = 1e-6;
    let c = card(vec![TrapGroup {
        decades: 4.0,
        states: 4,
        ..group(1e16, period)
    }]);
    let mut circuit = Circuit::new();
    let (p_node, g, a, b) = (
        circuit.node("p"),
        circuit.node("g"),
        circuit.node("a"),
        circuit.node("b"),
    );
    let drive = Waveform::pulse(Pulse {
        low: 0.0,
        high: 2.0,
        delay: 0.0,
        rise: 0.1 * period,
        fall: 0.3 * period,
        width: 0.2 * period,
        period: Some(period),
    })
    .unwrap();
    circuit
        .add("vp", VoltageSource::new(drive), &[p_node, Circuit::GROUND])
        .unwrap();
    let (cc, ca, cb) = (20e-15, 5e-15, 8e-15);
    circuit.add("cc", Capacitor::new(cc), &[p_node, g]).unwrap();
    circuit
        .add("ca", Capacitor::new(ca), &[a, Circuit::GROUND])
        .unwrap();
    circuit
        .add("cb", Capacitor::new(cb), &[b, Circuit::GROUND])
        .unwrap();
    circuit
        .add("m", SheetFet::new(&c).unwrap(), &[a, g, b])
        .unwrap();
    let mut sys = System::new(circuit).unwrap();
    let mut p = TransientParams::new(200.0 * period);
    p.tol.reltol = 1e-9;
    p.tol.abstol = 1e-18;
    p.tol.vntol = 1e-12;
    let probes = [p_node, g, a, b].map(Probe::Voltage);
    let start = Start::Given(vec![(a, 0.3), (b, 0.0)]);
    let res = sys.transient(&p, &start, &probes, None).unwrap();
    let charge = |k: usize| {
        cc * (res.signals[1][k] - res.signals[0][k])
            + ca * res.signals[2][k]
            + cb * res.signals[3][k]
    };
    let q0 = charge(0);
    let scale = cc * 2.0;
    let mut swing: f64 = 0.0;
    for k in 0..res.time.len() {
        swing = swing.max((res.signals[1][k] - res.signals[1][0]).abs());
        assert!(
            (charge(k) - q0).abs() <= 1e-9 * scale,
            "t = {:e}: island charge moved by {:e} C",
            res.time[k],
            charge(k) - q0
        );
    }
    assert!(swing > 0.3, "the gate must move: swing {swing} V");
}

/// `lamina iv --json` on the one-level device (τ = 1 ms) over V_GS from -0.5 to 1 V at 0.1 V
/// drain bias, with `extra` flags.
fn iv_json(extra: &[&str]) -> serde_json::Value {
    let mut args = vec![
        "iv",
        "tests/corpus/good/slow-traps.lam",
        "--vgs",
        "-0.5:1:0.05",
        "--vds",
        "0.1",
        "--json",
    ];
    args.extend_from_slice(extra);
    serde_json::from_slice(&common::lamina_ok(&args).stdout).unwrap()
}

/// The hysteresis width of a both-way sweep at `rate`.
fn width_at(rate: &str) -> f64 {
    let j = iv_json(&["--sweep-rate", rate]);
    j["sweep"]["hysteresis"][0]["width_v"]
        .as_f64()
        .unwrap_or_else(|| panic!("no width at {rate}: {}", j["sweep"]))
}

/// The width vanishes for sweeps much slower than the traps (they follow in equilibrium) and
/// much faster (they stay as they were at rest), and peaks where the sweep takes about a time
/// constant (the usual picture of trap-induced hysteresis; e.g. Y. Y. Illarionov et al., 2D
/// Mater. 3, 035004 (2016), recalled, not checked). The 1.5 V sweep takes 150 s, 1.5 ms and
/// 1.5 µs at these rates.
#[test]
fn hysteresis_vanishes_for_slow_and_fast_sweeps_and_peaks_between() {
    let slow = width_at("10 mV/s");
    let middle = width_at("1 kV/s");
    let fast = width_at("1 MV/s");
    assert!(middle > 0.05, "width {middle} V at 1 kV/s");
    assert!(slow.abs() < 0.01 * middle, "width {slow} V at 10 mV/s");
    assert!(fast.abs() < 0.05 * middle, "width {fast} V at 1 MV/s");
    // Traps that fill on the way up hold the threshold higher on the way down (n branch).
    assert!(middle > 0.0);
}

/// A direction or hysteresis current without a sweep rate, a stress without its time, a time
/// that is not positive and a rate that is not a positive voltage per time are usage errors
/// (exit 2).
#[test]
fn sweep_flags_are_checked() {
    let base = [
        "iv",
        "tests/corpus/good/slow-traps.lam",
        "--vgs",
        "0:1:0.1",
        "--vds",
        "0.1",
    ];
    for extra in [
        &["--direction", "both"][..],
        &["--hysteresis-current", "1uA"][..],
        &["--sweep-rate", "1 V"][..],
        &["--sweep-rate", "-1 V/s"][..],
        &["--sweep-rate", "1 V/s", "--stress", "1"][..],
        &[
            "--sweep-rate",
            "1 V/s",
            "--stress",
            "1",
            "--stress-time",
            "0 s",
        ][..],
    ] {
        let args: Vec<&str> = base.iter().chain(extra).copied().collect();
        let out = common::lamina(&args);
        assert_eq!(out.status.code(), Some(2), "{extra:?}: {:?}", out);
    }
}

/// The up leg's V_GS at 100 nA after a gate stress of 1.5 V held for `time`, and without it,
/// swept at 1 MV/s (1.5 µs, far shorter than τ = 1 ms, so the traps stay as the stress left
/// them).
fn drift_after(time: &str) -> f64 {
    let j = iv_json(&[
        "--sweep-rate",
        "1 MV/s",
        "--direction",
        "up",
        "--stress",
        "1.5",
        "--stress-time",
        time,
    ]);
    j["sweep"]["stress"]["drift"][0]["drift_v"]
        .as_f64()
        .unwrap_or_else(|| panic!("no drift after {time}: {}", j["sweep"]))
}

/// A gate stress fills the traps as first-order kinetics say: the threshold drift after a
/// stress of one time constant is `1 - 1/e` of the drift after ten (the traps, filled from
/// empty towards an occupancy of 1 deep in accumulation, shift the curve by their charge over
/// `C_ins`; the closed form of first-order kinetics).
#[test]
fn stress_drift_follows_first_order_filling() {
    let one = drift_after("1 ms");
    let ten = drift_after("10 ms");
    assert!(ten > 0.1, "drift {ten} V after 10 ms");
    let ratio = one / ten;
    let expected = 1.0 - (-1.0f64).exp();
    assert!(
        (ratio - expected).abs() < 0.01,
        "drift ratio {ratio}, first-order filling {expected}"
    );
}

/// A group at a depth acts on the channel by the fraction of the insulator's `1/C` between it
/// and the gate (Gauss's law across series layers; any electrostatics text): in a two-layer
/// stack, traps at the layers' boundary are, in DC, the same as traps at the interface with
/// that fraction of their density.
#[test]
fn depth_scales_the_charge_by_the_gate_side_fraction() {
    use lamina_devices::Layer;
    let layer = |permittivity, thickness| Layer {
        permittivity,
        thickness,
        breakdown_field: None,
    };
    let stack = vec![layer(3.4, 5e-9), layer(20.0, 3e-9)];
    let phi = (3e-9 / 20.0) / (5e-9 / 3.4 + 3e-9 / 20.0);
    let with = |g: TrapGroup| SheetFetCard {
        insulator: stack.clone(),
        slow_traps: vec![g],
        ..SheetFetCard::default()
    };
    let deep = SheetFet::new(&with(TrapGroup {
        depth: 5e-9,
        ..group(2e16, 1e-3)
    }))
    .unwrap();
    let shallow = SheetFet::new(&with(group(2e16 * phi, 1e-3))).unwrap();
    for vg in [-0.5, -0.3, -0.1, 0.2] {
        let current = |fet: &SheetFet| {
            let f = fet.slow_trap_equilibrium(0.05, vg, 0.0)[0];
            eval(fet, &[0.05, vg, 0.0, f]).0[0]
        };
        let (a, b) = (current(&deep), current(&shallow));
        assert!(
            (a - b).abs() <= 1e-9 * a.abs().max(b.abs()),
            "V_G = {vg}: {a:e} at the boundary, {b:e} at the interface"
        );
    }
}

/// What a card with slow traps may not hold is refused with the key named.
#[test]
fn slow_trap_cards_out_of_range_are_refused() {
    // The device's Debug form holds its tables: only the message is shown.
    let why = |c: &SheetFetCard| match SheetFet::new(c) {
        Ok(_) => panic!("accepted: {:?}", c.slow_traps),
        Err(why) => why,
    };
    let refused = |g: TrapGroup, key: &str| {
        let why = why(&card(vec![g]));
        assert!(why.contains(key), "{why}");
    };
    refused(
        TrapGroup {
            depth: 6e-9,
            ..group(1e16, 1e-3)
        },
        "`trap1_depth`",
    );
    refused(
        TrapGroup {
            decades: 24.0,
            states: 8,
            ..group(1e16, 1.0)
        },
        "`trap1_time`",
    );
    refused(
        TrapGroup {
            states: 17,
            ..group(1e16, 1e-3)
        },
        "at most 16",
    );
    refused(group(0.0, 1e-3), "`trap1_density`");
    let dirac = SheetFetCard {
        gate: lamina_devices::Gate::Dirac {
            fermi_velocity: 1e6,
            half_gap: 0.0,
            gap_shift: 0.0,
            degeneracy: 4.0,
            neutral_work_function: 4.0,
            residual_density: 0.0,
        },
        ..card(vec![group(1e16, 1e-3)])
    };
    let why = why(&dirac);
    assert!(why.contains("metal gate"), "{why}");
}

/// At the turning point of a fast both-way sweep the down leg starts with its own ramp's
/// displacement current: the drain current jumps there by the same amount the two legs
/// differ at the next gate voltage (at 1 MV/s the traps barely move, so the legs differ by
/// the drain's displacement current `C dV_GS/dt`, of opposite sign on the two ramps).
#[test]
fn turning_point_samples_carry_their_own_legs_displacement_current() {
    let j = iv_json(&["--sweep-rate", "1 MV/s"]);
    let points = j["points"].as_array().unwrap();
    let at = |leg: &str, vgs: f64| {
        points
            .iter()
            .find(|p| p["sweep"] == leg && (p["vgs"].as_f64().unwrap() - vgs).abs() < 1e-9)
            .and_then(|p| p["id"].as_f64())
            .unwrap_or_else(|| panic!("no {leg} point at {vgs} V"))
    };
    // The gate current of the ramped sweep (the gate's displacement current, leakage being
    // negligible here) has the sign of each leg's ramp.
    let gate_at = |leg: &str, k: usize| {
        points
            .iter()
            .filter(|p| p["sweep"] == leg)
            .nth(k)
            .and_then(|p| p["ig_a"].as_f64())
            .unwrap_or_else(|| panic!("no {leg} gate current"))
    };
    assert!(gate_at("up", 5) > 0.0 && gate_at("down", 5) < 0.0);
    let jump = at("up", 1.0) - at("down", 1.0);
    let gap = at("up", 0.95) - at("down", 0.95);
    assert!(jump < 0.0 && gap < 0.0, "jump {jump:e}, gap {gap:e}");
    assert!((jump / gap - 1.0).abs() < 0.1, "jump {jump:e}, gap {gap:e}");
    // At 1 V/s the displacement current is 1e-9 of the drain current, and the down leg's
    // first sample, read just after the turn, is the up leg's last within 1e-5 of it (a
    // straight line through the next two samples carried the curve's bend: 3e-5).
    let j = iv_json(&["--sweep-rate", "1 V/s"]);
    let points = j["points"].as_array().unwrap();
    let id = |leg: &str, first: bool| {
        let mut legs = points.iter().filter(|p| p["sweep"] == leg);
        let p = if first { legs.next() } else { legs.next_back() };
        p.and_then(|p| p["id"].as_f64()).unwrap()
    };
    let (up, down) = (id("up", false), id("down", true));
    assert!(
        (up - down).abs() < 1e-5 * up.abs(),
        "up {up:e}, down {down:e}"
    );
}
