//! Slow traps: charge traps at or near the channel-insulator interface that fill and empty over
//! microseconds to hours, the usual cause of hysteresis between forward and backward sweeps of
//! a 2D-channel FET. The card's `trap_density` traps (the module docs of [`super`]) are in
//! equilibrium at every instant; these are not.
//!
//! # States and kinetics
//! A card holds up to [`MAX_TRAP_GROUPS`] groups ([`TrapGroup`]). A group has a total density
//! `N` (1/m²) at one level `E_t`, given as `L = (E_c - E_t)/q` below the channel's conduction
//! band edge, and is acceptor-like (neutral empty, `-q` filled) or donor-like (`+q` empty,
//! neutral filled). Its density is split equally over `M` states whose time constants are
//! spread log-uniformly over `D` decades about `τ_0` (the mid-points of `M` equal bins of
//! `log τ`): the usual description of border traps, whose capture and emission times are
//! spread over many decades (T. Grasser, Microelectron. Reliab. 52, 39 (2012)). Each state `j`
//! has an occupancy `f_j` by electrons that obeys a first-order rate equation
//!
//! ```text
//! df_j/dt = c_j (1 - f_j) - e_j f_j = (f_FD - f_j) / τ_j,   c_j = f_FD / τ_j,  e_j = (1 - f_FD) / τ_j
//! f_FD = ½ [F(ξ_s) + F(ξ_d)],   F(ξ) = 1 / (1 + exp(-(ξ + L) / V_T))
//! ```
//!
//! so capture and emission are tied by detailed balance, `c/e = exp((E_F - E_t)/kT)`
//! (W. Shockley and W. T. Read, Phys. Rev. 87, 835 (1952)), with their sum held at `1/τ_j`:
//! the trap's time scale is set by how it is reached (tunnelling, lattice relaxation), not by
//! the channel's density. `ξ = (E_F - E_c)/q` is the channel's degeneracy; the traps exchange
//! carriers with the whole channel, lumped as the mean of the Fermi-Dirac occupancies at its
//! two ends (exact at `V_DS = 0`, a two-point average along the channel otherwise). At rest
//! (DC) `f_j = f_FD` exactly.
//!
//! # Depth
//! A group sits at depth `d` into the insulator from the channel (0 at the interface). With
//! the layers in card order from the channel (`insulator` first, then `insulator2`), the charge
//! `Q_t` of a sheet at that depth induces `φ Q_t` on the channel side, `φ` the fraction of
//! `1/C_ins = Σ t_i / (ε_i ε0)` between the sheet and the gate (Gauss's law across the series
//! layers). With a decay length `λ` the time constants grow as `τ_0 exp(d/λ)`: elastic
//! tunnelling from the channel, `λ = 1/(2κ)` with `κ` the decay constant of the wave function in
//! the insulator (F. P. Heiman and G. Warfield, IEEE Trans. Electron Devices 12, 167 (1965);
//! recalled, not checked). Without `λ`, `τ_0` is taken as given at every depth.
//!
//! # Charge balance
//! The trapped charge per area `Q_t = Σ_j q N_j (δ_j - f_j)` (`δ_j` 1 for donors, 0 for
//! acceptors) enters the channel's Gauss's law as a sheet charge at the interface scaled by
//! `φ`, so the channel is the card's channel at the gate drive shifted by
//! `Δ = Σ_j φ_j Q_{t,j} / C_ins` (metal gate: `u = ξ + (Φ_m - χ)/q - (ρ + Q_const + φ Q_t)/C_ins`).
//! The tables are used as they are, at `V_G + Δ`; a Dirac gate, whose level moves with its
//! charge, would need tables of its own, so slow traps need a metal gate.
//! The carriers a state captures come through the contacts: the variable part of the trapped
//! charge, `-Σ_j q N_j W L f_j`, is held half at the drain and half at the source, and its
//! image at the gate, so the terminal charges still sum to zero (the constant charge of empty
//! donors, like the fixed charge, carries no current and is left out of them).
//!
//! # Unknowns
//! Each state is one internal unknown of the device, its occupancy (`occupancy1`,
//! `occupancy2`, ... after the contacts' internal nodes). Its row holds the state's charge
//! magnitude `q N_j W L f_j` (C) as its charge and `q N_j W L (f_j - f_FD)/τ_j` (A) as its
//! static part, so the engine's charge-truncation test watches the occupancy in coulombs, like
//! any terminal charge, and in DC the row is the equilibrium `f_j = f_FD`. The Jacobian is the
//! derivative of what is returned: the channel's dependence on `f_j` is its gate derivative
//! times `∂Δ/∂f_j`, and `ξ` at an end follows from the tabulated `ρ`,
//! `ξ = u' - (Φ_m - χ)/q + (ρ(u') + Q_const)/C_ins`, `dξ/du' = 1 + ρ'(u')/C_ins`.

use super::{in_range, show, Gate, Intrinsic, SheetFetCard, SheetModel};
use super::{BOTH, DRAIN_ONLY, SOURCE_ONLY};
use crate::physics::{logistic, Q};
use lamina_engine::{Internal, Stamp, UnknownKind};

/// The most trap groups a card may hold (`trap1_` to `trap3_` keys).
pub const MAX_TRAP_GROUPS: usize = 3;
/// The most occupancy states of all groups together (each is one unknown of the device).
pub const MAX_TRAP_STATES: usize = 16;

/// The card key of trap group `index` (from 0): `trap1_density`, `trap2_level`, ...
pub fn trap_key(index: usize, what: &str) -> String {
    format!("trap{}_{what}", index + 1)
}

/// How a trap's charge depends on its occupancy by electrons.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TrapKind {
    /// Neutral when empty, `-q` when holding an electron.
    Acceptor,
    /// `+q` when empty, neutral when holding an electron.
    Donor,
}

/// One group of slow traps ([`SheetFetCard::slow_traps`]), in the units each field names.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TrapGroup {
    /// Total density (1/m²).
    pub density: f64,
    /// Level below the channel's conduction band edge (eV).
    pub level: f64,
    /// Acceptor- or donor-like.
    pub kind: TrapKind,
    /// Relaxation time `τ_0` (s): the centre of the spread, at the interface when a decay
    /// length is given.
    pub time: f64,
    /// Decades the time constants spread over, log-uniformly about `τ_0` (0: one time).
    pub decades: f64,
    /// Occupancy states the group is split into (each one unknown of the device).
    pub states: usize,
    /// Depth into the insulator from the channel (m); 0 at the interface.
    pub depth: f64,
    /// Tunnelling decay length `λ` (m): time constants grow as `exp(depth/λ)`; 0 for none.
    pub decay_length: f64,
}

impl TrapGroup {
    /// The time constants of the group's states (s), shortest first.
    pub fn time_constants(&self) -> Vec<f64> {
        let m = self.states.max(1);
        let depth_factor = if self.decay_length > 0.0 {
            (self.depth / self.decay_length).exp()
        } else {
            1.0
        };
        (0..m)
            .map(|k| {
                let x = self.decades * ((k as f64 + 0.5) / m as f64 - 0.5);
                self.time * depth_factor * 10f64.powf(x)
            })
            .collect()
    }
}

/// The shortest and longest time constants a state may have (s): a femtosecond, a few
/// lattice periods, and about thirty years, beyond any measured drift (numeric guards).
pub const TIME_CONSTANT_RANGE_S: (f64, f64) = (1e-15, 1e9);

/// Checks the card's slow traps (called from [`SheetFetCard::validate`]).
///
/// | field | accepted |
/// |---|---|
/// | groups | at most [`MAX_TRAP_GROUPS`], states together at most [`MAX_TRAP_STATES`] |
/// | density | (0, 1e20] 1/m² |
/// | level | [-20, 20] eV |
/// | time constants after spread and depth | [`TIME_CONSTANT_RANGE_S`] |
/// | decades | [0, 24] |
/// | depth | [0, total insulator thickness] |
/// | decay length | 0 (none), or [1e-12, 1e-3] m |
/// | gate | a metal |
pub(super) fn validate(card: &SheetFetCard) -> Result<(), String> {
    let groups = &card.slow_traps;
    if groups.is_empty() {
        return Ok(());
    }
    if groups.len() > MAX_TRAP_GROUPS {
        return Err(format!(
            "a card holds at most {MAX_TRAP_GROUPS} slow-trap groups, found {}",
            groups.len()
        ));
    }
    let total: usize = groups.iter().map(|g| g.states).sum();
    if total > MAX_TRAP_STATES || groups.iter().any(|g| g.states == 0) {
        return Err(format!(
            "slow-trap states must number 1 or more per group and at most {MAX_TRAP_STATES} in all, found {}",
            groups
                .iter()
                .map(|g| g.states.to_string())
                .collect::<Vec<_>>()
                .join(" + ")
        ));
    }
    if !matches!(card.gate, Gate::Metal { .. }) {
        return Err(format!(
            "`{}`: slow traps need a metal gate; a Dirac gate's level moves with the trapped \
             charge, which the stack's tables do not hold",
            trap_key(0, "density")
        ));
    }
    let thickness: f64 = card.insulator.iter().map(|l| l.thickness).sum();
    for (i, g) in groups.iter().enumerate() {
        let key = |what: &str| trap_key(i, what);
        if !(g.density > 0.0 && g.density <= 1e20) {
            return Err(format!(
                "`{}` must lie in (0, 1e20] 1/m², found {}",
                key("density"),
                show(g.density)
            ));
        }
        in_range(&key("level"), g.level, -20.0, 20.0, "eV")?;
        in_range(&key("decades"), g.decades, 0.0, 24.0, "")?;
        in_range(&key("depth"), g.depth, 0.0, thickness, "m")?;
        if g.decay_length != 0.0 {
            in_range(&key("decay_length"), g.decay_length, 1e-12, 1e-3, "m")?;
        }
        let (lo, hi) = TIME_CONSTANT_RANGE_S;
        in_range(&key("time"), g.time, lo, hi, "s")?;
        let times = g.time_constants();
        let (first, last) = (times[0], times[times.len() - 1]);
        if !(first >= lo && last <= hi) {
            return Err(format!(
                "the time constants of `{}` run from {} to {} s (spread over `{}` and grown by \
                 `{}` over `{}`), outside [{}, {}] s",
                key("time"),
                show(first),
                show(last),
                key("decades"),
                key("depth"),
                key("decay_length"),
                show(lo),
                show(hi)
            ));
        }
    }
    Ok(())
}

/// One occupancy state, ready for evaluation.
#[derive(Clone, Copy, Debug)]
struct State {
    /// Level below the conduction band edge (V).
    level: f64,
    /// `q N_j W L` (C): the magnitude of the state's charge when full.
    charge: f64,
    /// `∂Δ/∂f_j = -φ q N_j / C_ins` (V).
    shift: f64,
    /// `1/τ_j` (1/s).
    rate: f64,
    /// 1 for a donor-like state (charged when empty), 0 for an acceptor-like one.
    donor: f64,
}

/// A device's slow traps: empty for a card without them, which then costs nothing.
#[derive(Clone, Debug, Default)]
pub(super) struct Traps {
    states: Vec<State>,
    /// The gate-drive shift with every state empty (V): the donors' charge.
    shift0: f64,
    /// Local index of the first occupancy unknown.
    first: usize,
    /// `W L` (m²).
    area: f64,
}

/// Occupancy unknowns by name, for [`Traps::internals`].
const NAMES: [&str; MAX_TRAP_STATES] = [
    "occupancy1",
    "occupancy2",
    "occupancy3",
    "occupancy4",
    "occupancy5",
    "occupancy6",
    "occupancy7",
    "occupancy8",
    "occupancy9",
    "occupancy10",
    "occupancy11",
    "occupancy12",
    "occupancy13",
    "occupancy14",
    "occupancy15",
    "occupancy16",
];

const LONGEST: usize = 2 + MAX_TRAP_STATES;

/// The contacts' internal nodes (`head`) followed by every occupancy unknown.
const fn layout(head: &[Internal]) -> [Internal; LONGEST] {
    let mut out = [Internal {
        name: "",
        kind: UnknownKind::Voltage,
    }; LONGEST];
    let mut i = 0;
    while i < head.len() {
        out[i] = head[i];
        i += 1;
    }
    let mut k = 0;
    while k < MAX_TRAP_STATES {
        out[i + k] = Internal {
            name: NAMES[k],
            kind: UnknownKind::Voltage,
        };
        k += 1;
    }
    out
}

static WITH_NONE: [Internal; LONGEST] = layout(&[]);
static WITH_DRAIN: [Internal; LONGEST] = layout(DRAIN_ONLY);
static WITH_SOURCE: [Internal; LONGEST] = layout(SOURCE_ONLY);
static WITH_BOTH: [Internal; LONGEST] = layout(BOTH);

impl Traps {
    /// The states of `card`'s groups for a device of area `W L` whose first occupancy unknown
    /// is local unknown `first`.
    pub(super) fn new(card: &SheetFetCard, model: &SheetModel, area: f64, first: usize) -> Self {
        let c_ins = model.stack.c_ins;
        let inv_c = 1.0 / c_ins;
        let mut states = Vec::new();
        let mut shift0 = 0.0;
        for g in &card.slow_traps {
            let phi = gate_side_fraction(card, g.depth);
            let times = g.time_constants();
            let per_state = g.density / times.len() as f64;
            for tau in times {
                states.push(State {
                    level: g.level,
                    charge: Q * per_state * area,
                    shift: -phi * Q * per_state * inv_c,
                    rate: 1.0 / tau,
                    donor: f64::from(u8::from(g.kind == TrapKind::Donor)),
                });
                if g.kind == TrapKind::Donor {
                    shift0 += phi * Q * per_state * inv_c;
                }
            }
        }
        Traps {
            states,
            shift0,
            first,
            area,
        }
    }

    /// The element's internal unknowns: the contacts' (`base`), then one occupancy per state.
    pub(super) fn internals(&self, base: &'static [Internal]) -> &'static [Internal] {
        if self.states.is_empty() {
            return base;
        }
        let table = match base {
            [] => &WITH_NONE,
            [one] if one.name == DRAIN_ONLY[0].name => &WITH_DRAIN,
            [_] => &WITH_SOURCE,
            _ => &WITH_BOTH,
        };
        &table[..base.len() + self.states.len()]
    }

    /// The gate-drive shift `Δ` (V) the trapped charge makes at the local unknowns `x`.
    #[inline]
    pub(super) fn shift(&self, x: &[f64]) -> f64 {
        let mut s = self.shift0;
        for (j, st) in self.states.iter().enumerate() {
            s += st.shift * x[self.first + j];
        }
        s
    }

    /// The device's operating-point details (`insight`) at the gate drive the trapped charge
    /// shifts, and the trapped charge: the net charge of the slow traps in units of q per area
    /// (negative for electrons held).
    pub(super) fn details(
        &self,
        x: &[f64],
        insight: impl Fn(&[f64]) -> Vec<lamina_engine::Detail>,
    ) -> Vec<lamina_engine::Detail> {
        if self.states.is_empty() || x.len() < self.first + self.states.len() {
            return insight(x);
        }
        let mut shifted = x.to_vec();
        shifted[1] += self.shift(x);
        let mut out = insight(&shifted);
        let net: f64 = self
            .states
            .iter()
            .enumerate()
            .map(|(j, st)| st.charge * (st.donor - x[self.first + j]))
            .sum::<f64>()
            / (Q * self.area);
        out.push(lamina_engine::Detail {
            name: "slow-trap charge density",
            value: lamina_engine::DetailValue::Number(net, "1/m^2"),
        });
        out
    }

    /// Stamps what the slow traps add to an evaluation whose channel `ch` was taken at the
    /// shifted gate voltage `vg` (`x[1] + Δ`): the channel's dependence on each occupancy,
    /// the trapped charge at the terminals and the occupancy rows. `cols` are the local
    /// indices of the channel's drain, gate and source.
    pub(super) fn stamp(
        &self,
        model: &SheetModel,
        x: &[f64],
        vg: f64,
        ch: &Intrinsic,
        cols: [usize; 3],
        out: &mut Stamp<'_>,
    ) {
        if self.states.is_empty() {
            return;
        }
        let [d, g, s] = cols;
        // The channel through Δ: ∂/∂f_j = ∂/∂V_G ∂Δ/∂f_j.
        for (j, st) in self.states.iter().enumerate() {
            let c = self.first + j;
            let di = ch.current.d[1] * st.shift;
            out.add_df(d, c, di);
            out.add_df(s, c, -di);
            for (row, q) in [(g, ch.q_gate), (d, ch.q_drain), (s, ch.q_source)] {
                out.add_dq(row, c, q.d[1] * st.shift);
            }
            // The variable trapped charge -q N W L f_j: half at each contact, its image at
            // the gate.
            let q = -st.charge * x[c];
            out.add_q(g, -q);
            out.add_dq(g, c, st.charge);
            for row in [d, s] {
                out.add_q(row, 0.5 * q);
                out.add_dq(row, c, -0.5 * st.charge);
            }
        }
        // The channel's degeneracy at both ends, with its slope in u' = V_G + Δ - V.
        let ends = [vg - x[s], vg - x[d]].map(|u| degeneracy(model, u));
        let vt = model.stack.vt;
        for (j, st) in self.states.iter().enumerate() {
            let r = self.first + j;
            // f_FD and its slopes in u_s' and u_d'.
            let mut feq = 0.0;
            let mut slope = [0.0; 2];
            for (k, &(xi, dxi)) in ends.iter().enumerate() {
                let f = logistic((xi + st.level) / vt);
                feq += 0.5 * f;
                slope[k] = 0.5 * f * (1.0 - f) / vt * dxi;
            }
            let k = st.charge * st.rate;
            let occ = x[r];
            out.add_f(r, k * (occ - feq));
            out.add_df(r, r, k);
            // u_s' = V_G + Δ - V_S and u_d' = V_G + Δ - V_D.
            let dvg = slope[0] + slope[1];
            out.add_df(r, g, -k * dvg);
            out.add_df(r, s, k * slope[0]);
            out.add_df(r, d, k * slope[1]);
            for (i, other) in self.states.iter().enumerate() {
                out.add_df(r, self.first + i, -k * dvg * other.shift);
            }
            out.add_q(r, st.charge * occ);
            out.add_dq(r, r, st.charge);
        }
    }

    /// Each state's occupancy in equilibrium with a channel at `(V_D, V_G, V_S)` at rest:
    /// `f_FD` at the self-consistent shift (a fixed point of a contraction, since `Δ` falls
    /// as the occupancies rise; at most 200 bisection steps on `Δ`). For starting values and
    /// checks; the engine's DC solve reaches the same point.
    fn equilibrium(&self, model: &SheetModel, vd: f64, vg: f64, vs: f64) -> Vec<f64> {
        let occupancies = |delta: f64| -> Vec<f64> {
            let ends = [vg + delta - vs, vg + delta - vd].map(|u| degeneracy(model, u).0);
            let vt = model.stack.vt;
            self.states
                .iter()
                .map(|st| {
                    ends.iter()
                        .map(|xi| 0.5 * logistic((xi + st.level) / vt))
                        .sum()
                })
                .collect()
        };
        // g(Δ) = Δ - shift(f(Δ)) rises strictly with Δ: bracket it by the empty and full shifts.
        let full: f64 = self.states.iter().map(|s| s.shift).sum::<f64>() + self.shift0;
        let (mut lo, mut hi) = (full.min(self.shift0), full.max(self.shift0));
        let mismatch = |delta: f64| {
            let f = occupancies(delta);
            delta
                - self.shift0
                - self
                    .states
                    .iter()
                    .zip(&f)
                    .map(|(s, f)| s.shift * f)
                    .sum::<f64>()
        };
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if mid == lo || mid == hi {
                break;
            }
            if mismatch(mid) > 0.0 {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        occupancies(0.5 * (lo + hi))
    }
}

impl super::SheetFet {
    /// The number of slow-trap occupancy states (the device's last internal unknowns).
    pub fn slow_trap_states(&self) -> usize {
        self.traps.states.len()
    }

    /// Each slow-trap state's occupancy in equilibrium with the channel at rest at internal
    /// drain, gate and source voltages (V); empty without slow traps.
    pub fn slow_trap_equilibrium(&self, vd: f64, vg: f64, vs: f64) -> Vec<f64> {
        self.traps.equilibrium(&self.model, vd, vg, vs)
    }

    /// The time constant of each slow-trap state (s), in unknown order.
    pub fn slow_trap_time_constants(&self) -> Vec<f64> {
        self.traps.states.iter().map(|s| 1.0 / s.rate).collect()
    }
}

/// The fraction `φ` of the insulator's `1/C` between a sheet at `depth` from the channel and
/// the gate, the layers in card order from the channel.
fn gate_side_fraction(card: &SheetFetCard, depth: f64) -> f64 {
    let total: f64 = card
        .insulator
        .iter()
        .map(|l| l.thickness / l.permittivity)
        .sum();
    let mut left = depth;
    let mut channel_side = 0.0;
    for l in &card.insulator {
        let part = left.min(l.thickness).max(0.0);
        channel_side += part / l.permittivity;
        left -= part;
    }
    ((total - channel_side) / total).clamp(0.0, 1.0)
}

/// The channel's degeneracy `ξ = (E_F - E_c)/q` (V) at the card's `u` and `dξ/du`, from the
/// tabulated charge (a metal gate: `u = ξ + (Φ_m - χ)/q - (ρ + Q_const)/C_ins`).
#[inline]
fn degeneracy(model: &SheetModel, u: f64) -> (f64, f64) {
    let st = &model.stack;
    let (rho, drho) = model.tables.rho(u - model.shift);
    let inv_c = 1.0 / st.c_ins;
    (
        u - st.offset + (rho + st.q_const) * inv_c,
        1.0 + drho * inv_c,
    )
}

/// The channel's degeneracy `ξ = (E_F - E_c)/q` (V) at `u = V_G - V` from the tables, as the
/// slow traps see it; public for checks against the direct solve
/// ([`SheetModel::local_state`]).
pub fn channel_degeneracy(model: &SheetModel, u: f64) -> f64 {
    degeneracy(model, u).0
}
