//! Gate leakage: carriers tunnelling between the gate and the channel through the layered
//! insulator, direct (trapezoidal barrier) and Fowler-Nordheim (triangular barrier at high
//! field) alike.
//!
//! # Band picture
//! Energies are in eV, measured from the channel's conduction-band edge `E_c` at one point of
//! the channel, whose local state (`u = V_G - V`, degeneracy `ξ`, gate charge `Q_g`) the
//! stack's charge balance gives ([`super::SheetModel::local_state`]). The channel's
//! quasi-Fermi level is at `ξ`, the gate's at `ξ - u`, and the insulator carries
//! `V_ox = Q_g / C_ins`, split between the layers as series capacitors (layer `i` takes
//! `V_ox (t_i/ε_i) / Σ t_j/ε_j`, its field uniform). Layer 1 (`insulator`) touches the
//! channel, the last (`insulator2`) the gate. Band offsets follow the electron-affinity rule
//! (R. L. Anderson, 'Experiments on Ge-GaAs heterojunctions', Solid-State Electron. 5, 341
//! (1962), recalled): layer `i`'s conduction-band edge lies `φ_e,i = χ_ch - χ_i` above the
//! channel's and its valence-band edge `φ_h,i = (χ_i + E_g,i) - (χ_ch + E_g,ch)` below the
//! channel's, so at depth `s` (the share of `V_ox` dropped between the channel and that point)
//!
//! ```text
//! electrons:  U_e(s) = φ_e,i - V_ox s      (energy E above E_c)
//! holes:      U_h(s) = φ_h,i + V_ox s      (energy ε below the channel's valence-band edge)
//! ```
//!
//! With a metal gate, `U_e` at the gate face minus the gate's Fermi level is the gate's
//! barrier `Φ_m - χ_i` of the last layer, as it must be (the charge balance makes it so).
//!
//! # Transmission
//! The WKB transmission is `T(E) = exp(-θ(E))`, `θ = 2 Σ_i ∫ κ_i dx`,
//! `κ_i = sqrt(2 m_i q (U - E)) / ħ` where `U > E`, with each layer's tunnelling mass `m_i`.
//! The barrier is linear in each layer, so each layer's integral is closed:
//! `∫ sqrt(U - E)_+ dx = (2/3) t [(U_a - E)_+^{3/2} - (U_b - E)_+^{3/2}] / (U_a - U_b)`
//! (`U_a`, `U_b` the band edge at the layer's two faces), which is the trapezoidal barrier of
//! direct tunnelling when `U > E` across the layer and the triangular one of Fowler-Nordheim
//! tunnelling when the edge drops below `E` inside it. Above the barrier's highest point
//! `T = 1`.
//!
//! # Current density
//! The Tsu-Esaki form (R. Tsu and L. Esaki, 'Tunneling in a finite superlattice', Appl. Phys.
//! Lett. 22, 562 (1973)) with Fermi-Dirac occupation on both sides:
//!
//! ```text
//! J = J_e + J_h,    J_x = (q m0 kT / (2π² ħ³)) ∫ T_x(E) [F0((a_x - E)/kT) - F0((b_x - E)/kT)] dE
//! electrons: a = ξ, b = ξ - u, E >= 0;      holes: a = η_h + u, b = η_h, ε >= 0, η_h = -(ξ + E_g,ch)
//! ```
//!
//! `F0(x) = ln(1 + e^x)`; `J > 0` is current from the gate into the channel (electrons leaving
//! the channel for the gate, or holes entering it from the gate), so `J = 0` at `u = 0` and
//! has the sign of `u`. The transverse momentum is conserved with the free-electron mass of
//! the gate metal in the prefactor (as in J. G. Simmons, 'Generalized formula for the electric
//! tunnel effect between similar electrodes separated by a thin insulating film', J. Appl.
//! Phys. 34, 1793 (1963)), and the channel is a reservoir of states above its band edge
//! (below it, for holes) with its own Fermi level: its quantised motion normal to the sheet
//! is not resolved, and a Dirac gate is treated like a metal. At high field and low
//! temperature the integral reduces to Fowler-Nordheim's
//! `J = q³ F² / (8π h φ) (m0 / m) exp(-4 sqrt(2 m) (q φ)^{3/2} / (3 ħ q F))` (R. H. Fowler
//! and L. Nordheim, Proc. R. Soc. A 119, 173 (1928); M. Lenzlinger and E. H. Snow, J. Appl.
//! Phys. 40, 278 (1969)): checked in the tests.
//!
//! The energy integral is taken numerically below the barrier's top (scans for where the
//! integrand lies within e^-46 of its largest value; that window cut at each Fermi level, at
//! 4 and 32 kT either side, and at each band edge a layer's face reaches; composite
//! Gauss-Legendre on each piece after a smoothstep substitution, which cancels the square
//! root of `T` at a band edge) and in closed form above it (`∫ F0 dE` is the order-1
//! Fermi-Dirac integral, [`crate::physics::f1`]). Against 16 times the panels: within 2.4e-4
//! at 4 K, 1.6e-4 at 300 K.
//!
//! # Along the channel
//! `J` is a function of `u` alone for a given stack, so it is tabulated once per stack (and
//! temperature) as `y = asinh(J / J_0)` (`J_0` the density at `u = ±V_T`, so `y` is linear
//! through `u = 0` and logarithmic beyond) on knots `V_T/2` apart within ±8 V and spaced 5 %
//! wider per knot beyond, out to ±[`super::U_REACH`]; cubic Hermite in the knot index with
//! fourth-order centred-difference slopes, so `J(u)` is C¹. Each knot is solved when first
//! needed (a run pays only for the gate drives it visits, a few µs each) and kept; a look-up
//! costs 43 ns. Measured against the direct quadrature (`tests/leakage.rs`, MoS2 under two hBN
//! layers, a graphene gate, whose table is the card's own): within 2.3e-4 from 77 K to 400 K,
//! 1.4e-6 at 4 K, except within two thermal voltages of `u = 0`, where `J` is linear in `u`
//! and smallest: 1e-2.
//!
//! Under a metal gate whose work function `W` lies within [`MAX_SHARED_SHIFT`] of the
//! channel's affinity `χ`, cards that differ only in `W` or in their mobilities (a threshold
//! or mobility spread in a Monte Carlo run) share one grid of `J`: the same knots in `u` on
//! columns of `W - χ` a quarter of a thermal voltage apart, each solved once (the grid keeps
//! at most 2^20 values, about 50 MB), and a card's knot is the cubic interpolant of the four
//! columns' `asinh(J / J_0)` about its `W`, with the card's own `J_0` (`W` shifts the stack's
//! electrostatics by exactly `W - χ` in `u`, but also the gate's Fermi level in the supply,
//! so `J` depends on both). On a column the knots are the card's own to 1e-11. Measured
//! against each card's own direct quadrature (`tests/leakage.rs`: MoS2 and WSe2 under two
//! hBN layers, `W - χ` from -1 to 2.6 V, on and between columns, 77 to 400 K): within 4.8e-4
//! beyond two thermal voltages of `u = 0` (the largest at -12 V_T on MoS2 at 0.37 V, on a
//! column as well: the interpolation in `u`, as a card's own table has), 7.3e-3 within them,
//! and the slope at `u = 0` within 1.1e-2 of a central difference; under a gold gate from
//! 4 K to 400 K as above, within 3e-4. Such a table's onsets ([`LeakageTable::window`]) are
//! found on its knots, against a limit lowered by 1 %, instead of by direct solves.
//!
//! # When it is on
//! For a card whose every layer has tunnelling data (a library insulator, or the four card
//! keys), card key `gate_leakage`:
//!
//! * `auto` (the default): the leakage is left out inside a window of gate drives
//!   `below < u < above` about `u = 0` where the whole gate's current `W L |J(u)|` stays
//!   below `gate_leakage_fraction` (default [`super::insight::SIGNIFICANT_LEAKAGE`] = 1e-3)
//!   of the *smallest* channel current scale `(W/L) σ kT/q` anywhere in the window (the
//!   current the device carries with one thermal voltage across it, `σ` at its least, which
//!   is the weakest path by which such a device can hold a node), or below
//!   [`NEGLIGIBLE_CURRENT`], one electron a year. Comparing with the smallest current and
//!   not with the device's own at the same gate drive matters for nodes held by an off
//!   device: a storage node written through a pass device and read by another device's gate
//!   loses its charge to that gate's leakage, which is tiny next to the reading device's
//!   own current but not next to the pass device's (`tests/leakage.rs`, the retention
//!   check). The window is found once per device: with the limit from `σ(0)` a first window,
//!   then with the limit from half the least `σ` in it (a scan of the tables, [`smallest_on`])
//!   the window within it, so what is left out obeys the rule over the final, narrower
//!   window. `J` is monotonic in `u` (non-decreasing in `|u|`, up to quadrature rounding on
//!   its flat stretches), so each onset is found by doubling from 0.25 V and secant steps
//!   on `ln |J|` to 10 mV (a few direct solves per side, or table values for a card on a
//!   shared grid, [`LeakageTable::window`]); within
//!   [`BLEND_VT`] thermal voltages inside each onset the current fades in (a smoothstep
//!   weight, so the current and its slope stay continuous), beyond it the leakage is whole.
//!   Where a channel end's gate drive lies well inside the window the table is not read at
//!   all. Where either onset lies within the fade-in of `u = 0` (the leakage matters almost
//!   everywhere: thin stacks, or a cold channel whose `σ` underflows at its minimum) it is
//!   kept everywhere, as with `on`. What the rule cannot see is a node held by a device of
//!   another card far weaker than any of this one's; for such studies (retention of a
//!   dynamic node) give `gate_leakage = on`.
//! * `on`: at every gate drive (as `auto` with an empty window).
//! * `off`: never (the operating point says `off`).
//!
//! The operating point reports the onsets of an `auto` device and says `left out (below its
//! onsets)` where both channel ends lie inside the window; otherwise the gate current in the
//! solution, its part to the drain and its ratio to the drain current, with `significant`
//! from [`super::insight::SIGNIFICANT_LEAKAGE`] of the drain current or `negligible`. A
//! stack with a layer without data has none, and the operating point says `not modelled`.
//! Device curves (`lamina iv`) measure the gate current, so they take an `auto` card's
//! leakage whole. The demo process (`netlists/demo/process.lam`: 3.3 nm of hBN under 3 nm
//! of HfO2) leaves it out between -1.03 and 1.16 V for its n-channel device and between
//! -0.23 and 1.71 V for its p-channel one (whose holes see a low barrier into hBN with the
//! library's affinity), so in its ring the p-channel devices carry their leakage.
//!
//! The device's gate current takes each end's density over half the gate: `I_GS = (W L / 2)
//! J(u_s)`, `I_GD = (W L / 2) J(u_d)`, each flowing from the gate to its own end. Exact for a
//! uniform channel (`V_DS = 0`, where the split is even by symmetry); otherwise a two-point
//! estimate of `W ∫ J dx` that is never below half of it (`J` is monotonic in `u`, and `u`
//! along the channel), whose split charges each end with the current entering its half of the
//! channel. What leaves the gate enters source and drain, exactly.
//!
//! This is a model estimate: the offsets and masses are library values with wide published
//! ranges, and `T` depends on them exponentially.

use super::{in_range, Gate, SheetFet, SheetFetCard, SheetModel, GL_T, GL_W, MAX_SHARED_SHIFT};
use crate::physics::{f0, f1, HBAR, K_B, M0, Q};
use std::collections::HashMap;
use std::sync::{Arc, Mutex, OnceLock, Weak};

/// One insulator layer's bands and tunnelling masses.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Barrier {
    /// Electron affinity (eV): the conduction-band edge below the vacuum level.
    pub electron_affinity: f64,
    /// Band gap (eV).
    pub band_gap: f64,
    /// Electron tunnelling mass (electron masses).
    pub electron_mass: f64,
    /// Hole tunnelling mass (electron masses).
    pub hole_mass: f64,
}

/// One layer as a tunnelling carrier sees it.
#[derive(Clone, Copy, Debug)]
struct Slab {
    /// Thickness (m).
    thickness: f64,
    /// Share of `V_ox` dropped between the channel and this layer's channel face, and across it.
    before: f64,
    share: f64,
    /// Band edges at the channel face with `V_ox = 0` (eV): conduction (electrons) and
    /// valence (holes, counted downward from the channel's valence-band edge).
    phi_e: f64,
    phi_h: f64,
    /// `2 sqrt(2 m q) / ħ` (1/(m sqrt(eV))) for electrons and holes.
    k_e: f64,
    k_h: f64,
}

/// A carrier: electrons (conduction band) or holes (valence band).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Carrier {
    /// Electrons through the insulator's conduction band.
    Electron,
    /// Holes through the insulator's valence band.
    Hole,
}

/// The gate stack as tunnelling carriers see it, for a channel of given affinity and gap.
#[derive(Clone, Debug)]
pub struct TunnelStack {
    slabs: Vec<Slab>,
    /// `kT` (eV).
    kt: f64,
    /// The channel's band gap (eV).
    gap: f64,
}

/// `q m0 (kT) / (2π² ħ³)` per eV of energy integral and per volt of `kT`: with `kT` and the
/// integral in eV, `J = PREFACTOR kT ∫ ... dE` in A/m².
const PREFACTOR: f64 =
    Q * M0 * Q * Q / (2.0 * std::f64::consts::PI * std::f64::consts::PI) / (HBAR * HBAR * HBAR);

/// Four-point Gauss-Legendre panels over the window where the energy integrand lives.
const PANELS: usize = 16;

/// How far (in natural logarithms) below its largest value the integrand is left out.
const DEPTH: f64 = 46.0;

impl TunnelStack {
    /// The stack of `layers` (thickness m, relative permittivity, bands) on a channel of
    /// electron affinity `chi` and gap `gap` (eV) at `temperature` (K).
    pub fn new(
        layers: &[(f64, f64, Barrier)],
        chi: f64,
        gap: f64,
        temperature: f64,
    ) -> TunnelStack {
        let total: f64 = layers.iter().map(|(t, eps, _)| t / eps).sum();
        let k = |m: f64| 2.0 * (2.0 * m * M0 * Q).sqrt() / HBAR;
        let mut before = 0.0;
        let slabs = layers
            .iter()
            .map(|&(t, eps, b)| {
                let share = t / eps / total;
                let s = Slab {
                    thickness: t,
                    before,
                    share,
                    phi_e: chi - b.electron_affinity,
                    phi_h: (b.electron_affinity + b.band_gap) - (chi + gap),
                    k_e: k(b.electron_mass),
                    k_h: k(b.hole_mass),
                };
                before += share;
                s
            })
            .collect();
        TunnelStack {
            slabs,
            kt: K_B * temperature / Q,
            gap,
        }
    }

    /// The band edge (eV) at the channel face and gate face of layer `s` at `v_ox` (V).
    fn edges(carrier: Carrier, s: &Slab, v_ox: f64) -> (f64, f64) {
        let (phi, sign) = match carrier {
            Carrier::Electron => (s.phi_e, -1.0),
            Carrier::Hole => (s.phi_h, 1.0),
        };
        (
            phi + sign * v_ox * s.before,
            phi + sign * v_ox * (s.before + s.share),
        )
    }

    /// The WKB exponent `θ = 2 Σ ∫ κ dx` of `carrier` at energy `e` (eV; above the channel's
    /// conduction-band edge for electrons, below its valence-band edge for holes) with
    /// `v_ox` (V) across the stack.
    pub fn exponent(&self, carrier: Carrier, v_ox: f64, e: f64) -> f64 {
        self.slabs
            .iter()
            .map(|s| {
                let (ua, ub) = Self::edges(carrier, s, v_ox);
                let k = match carrier {
                    Carrier::Electron => s.k_e,
                    Carrier::Hole => s.k_h,
                };
                k * s.thickness * mean_root(ua - e, ub - e)
            })
            .sum()
    }

    /// The highest band edge (eV) anywhere in the stack for `carrier` at `v_ox`.
    fn top(&self, carrier: Carrier, v_ox: f64) -> f64 {
        self.slabs
            .iter()
            .map(|s| {
                let (a, b) = Self::edges(carrier, s, v_ox);
                a.max(b)
            })
            .fold(f64::NEG_INFINITY, f64::max)
    }

    /// `∫_0^∞ T(E) [F0((a - E)/kT) - F0((b - E)/kT)] dE` (eV) for `carrier` at `v_ox`.
    pub fn supply_integral(&self, carrier: Carrier, v_ox: f64, a: f64, b: f64) -> f64 {
        self.integral_on(carrier, v_ox, a, b, PANELS)
    }

    /// [`Self::supply_integral`] with `panels` Gauss-Legendre panels over the window.
    fn integral_on(&self, carrier: Carrier, v_ox: f64, a: f64, b: f64, panels: usize) -> f64 {
        if a == b {
            return 0.0;
        }
        let (hi, lo, sign) = if a > b { (a, b, 1.0) } else { (b, a, -1.0) };
        let kt = self.kt;
        let supply = |e: f64| f0((hi - e) / kt) - f0((lo - e) / kt);
        let top = self.top(carrier, v_ox).max(0.0);
        // Above the barrier T = 1: ∫_top^∞ F0((μ - E)/kT) dE = kT F1((μ - top)/kT).
        let over = kt * (f1((hi - top) / kt) - f1((lo - top) / kt));
        // The supply falls as e^{-(E - hi)/kT} above the upper Fermi level; below it (and at
        // the band edge when both levels lie below the edge) the integrand lives.
        let end = top.min(hi.max(0.0) + DEPTH * kt);
        let under = if end > 0.0 {
            let ln_g = |e: f64| -self.exponent(carrier, v_ox, e) + supply(e).max(1e-300).ln();
            let (from, to) = window(&ln_g, 0.0, end);
            // The supply turns over within a few kT of each Fermi level, which may be far
            // narrower than the window: break the window there, with pieces growing away
            // from each level; each piece gets its share of the panels by width, and two at
            // least.
            let mut cuts = vec![from, to];
            for level in [lo, hi] {
                for m in [0.0, 4.0, 32.0] {
                    cuts.extend([level - m * kt, level + m * kt]);
                }
            }
            // And where the energy crosses a band edge at a layer's face (T's exponent turns
            // from trapezoid to triangle there, with a square-root change of slope).
            for slab in &self.slabs {
                let (a, b) = Self::edges(carrier, slab, v_ox);
                cuts.extend([a, b]);
            }
            cuts.retain(|&c| c >= from && c <= to);
            cuts.sort_by(f64::total_cmp);
            cuts.dedup();
            let mut sum = 0.0;
            for piece in cuts.windows(2) {
                let share = (piece[1] - piece[0]) / (to - from);
                let per_piece = ((panels as f64 * share).ceil() as usize).max(2);
                // E = e₀ + Δ (3σ² - 2σ³): the substitution's vanishing slope at both ends
                // cancels the square-root behaviour of T at a band edge there.
                let (e0, width) = (piece[0], piece[1] - piece[0]);
                let w = 1.0 / per_piece as f64;
                for p in 0..per_piece {
                    for (t, g) in GL_T.iter().zip(GL_W) {
                        let sg = w * (p as f64 + t);
                        let e = e0 + width * sg * sg * (3.0 - 2.0 * sg);
                        let jac = 6.0 * width * sg * (1.0 - sg);
                        sum += w * g * jac * (-self.exponent(carrier, v_ox, e)).exp() * supply(e);
                    }
                }
            }
            sum
        } else {
            0.0
        };
        sign * (over + under)
    }

    /// Gate-to-channel current density (A/m²) with the channel's degeneracy `xi`, the gate
    /// drive `u` and `v_ox` across the insulator (V), electrons and holes.
    pub fn current_density(&self, xi: f64, u: f64, v_ox: f64) -> f64 {
        let eta_h = -(xi + self.gap);
        let je = self.supply_integral(Carrier::Electron, v_ox, xi, xi - u);
        let jh = self.supply_integral(Carrier::Hole, v_ox, eta_h + u, eta_h);
        PREFACTOR * self.kt * (je + jh)
    }
}

/// Checks the card's tunnelling data: none, or one entry per insulator layer within the
/// guards (eV and electron masses): affinity [-20, 20], gap (0, 20], masses [1e-3, 1e2].
pub(crate) fn validate(card: &SheetFetCard) -> Result<(), String> {
    // Checked with or without tunnelling data: a fraction outside (0, 1] is a typo.
    if !(card.leakage_fraction > 0.0 && card.leakage_fraction <= 1.0) {
        return Err(format!(
            "gate_leakage_fraction {} is outside (0, 1]: it is the part of the device's \
             smallest channel current below which the leakage is left out (default {})",
            card.leakage_fraction,
            super::insight::SIGNIFICANT_LEAKAGE
        ));
    }
    if card.tunnelling.is_empty() {
        return Ok(());
    }
    if card.tunnelling.len() != card.insulator.len() {
        return Err(format!(
            "tunnelling data for {} insulator layers, but the stack has {}",
            card.tunnelling.len(),
            card.insulator.len()
        ));
    }
    for b in &card.tunnelling {
        in_range(
            "insulator electron_affinity",
            b.electron_affinity,
            -20.0,
            20.0,
            "eV",
        )?;
        super::above_zero("insulator band_gap", b.band_gap, 20.0, "eV")?;
        in_range(
            "insulator tunnelling electron mass",
            b.electron_mass,
            1e-3,
            1e2,
            "electron masses",
        )?;
        in_range(
            "insulator tunnelling hole mass",
            b.hole_mass,
            1e-3,
            1e2,
            "electron masses",
        )?;
    }
    Ok(())
}

impl SheetFet {
    /// The gate's tunnelling currents (A, from the gate into the channel) to the drain and the
    /// source ends of the channel and their slopes in `u` (S), at gate drives `u_d = V_G - V_D'`
    /// and `u_s = V_G - V_S'` (V); zeros for a card without tunnelling data.
    pub fn gate_leakage(&self, u_d: f64, u_s: f64) -> [(f64, f64); 2] {
        let Some((table, half_area)) = &self.leakage else {
            return [(0.0, 0.0); 2];
        };
        [u_d, u_s].map(|u| match &self.leakage_window {
            Some(w) if w.excludes(u) => (0.0, 0.0),
            Some(w) => {
                let (j, dj) = table.density(u);
                let (g, dg) = w.weight(u);
                (j * g * half_area, (dj * g + j * dg) * half_area)
            }
            None => {
                let (j, dj) = table.density(u);
                (j * half_area, dj * half_area)
            }
        })
    }

    /// Where the device leaves its gate leakage out (an `auto` card), if anywhere.
    pub fn leakage_window(&self) -> Option<Window> {
        self.leakage_window
    }

    /// The device's gate-leakage table, where its card has tunnelling data.
    pub fn leakage_table(&self) -> Option<&LeakageTable> {
        self.leakage.as_ref().map(|(t, _)| t.as_ref())
    }
}

/// `(2/3) [a_+^{3/2} - b_+^{3/2}] / (a - b)`: the mean of `sqrt(x)_+` over a linear run from
/// `a` to `b`, without cancellation where both are positive and close.
fn mean_root(a: f64, b: f64) -> f64 {
    let (ra, rb) = (a.max(0.0).sqrt(), b.max(0.0).sqrt());
    if a > 0.0 && b > 0.0 {
        (2.0 / 3.0) * (a + ra * rb + b) / (ra + rb)
    } else if a <= 0.0 && b <= 0.0 {
        0.0
    } else {
        (2.0 / 3.0) * (a.max(0.0) * ra - b.max(0.0) * rb) / (a - b)
    }
}

/// The part of `[lo, hi]` where `ln_g` lies within [`DEPTH`] of its largest value, found by
/// scans of 17 points that narrow the interval while it shrinks (at most six).
fn window(ln_g: &impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> (f64, f64) {
    const N: usize = 16;
    for _ in 0..6 {
        let h = (hi - lo) / N as f64;
        let v: Vec<f64> = (0..=N).map(|k| ln_g(lo + h * k as f64)).collect();
        let max = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let keep: Vec<usize> = (0..=N).filter(|&k| v[k] >= max - DEPTH).collect();
        let (first, last) = match (keep.first(), keep.last()) {
            (Some(&f), Some(&l)) => (f.saturating_sub(1), (l + 1).min(N)),
            _ => return (lo, hi),
        };
        if last - first >= N / 2 {
            break;
        }
        (lo, hi) = (lo + h * first as f64, lo + h * last as f64);
    }
    (lo, hi)
}

/// Growth of the knot spacing per knot beyond the core.
const GROWTH: f64 = 0.05;
/// Half-width (V) of the core of uniformly spaced knots about `u = 0`.
const CORE: f64 = 8.0;
/// The most knots of the core (a floor on the spacing at cryogenic temperatures).
const MAX_CORE_KNOTS: usize = 65_536;

/// `J(u)` of one stack, tabulated lazily (see the module docs).
#[derive(Debug)]
pub struct LeakageTable {
    model: Arc<SheetModel>,
    stack: TunnelStack,
    /// Uniform spacing (V) and count of core knots on each side of `u = 0`.
    h: f64,
    core: f64,
    /// Index of the last knot on each side, and `J_0` (A/m²).
    last: f64,
    j0: f64,
    c_ins: f64,
    knots: Vec<OnceLock<f64>>,
    /// Where the knots come from when the card shares a [`LeakageGrid`]: the grid, the first
    /// of its four columns about the card's work function and their interpolation weights.
    grid: Option<(Arc<LeakageGrid>, i64, [f64; 4])>,
}

impl LeakageTable {
    /// The table for `card`'s stack, shared with every card of the same stack; `None` where
    /// the card gives no tunnelling data.
    pub(crate) fn shared(
        card: &SheetFetCard,
        model: &Arc<SheetModel>,
    ) -> Option<Arc<LeakageTable>> {
        static TABLES: Mutex<Vec<(SheetFetCard, Weak<LeakageTable>)>> = Mutex::new(Vec::new());
        if card.tunnelling.is_empty() {
            return None;
        }
        let key = card.stack_key();
        if let Some(t) = super::find(&TABLES, &key) {
            return Some(t);
        }
        let t = Arc::new(LeakageTable::new(card, model.clone()));
        super::lock(&TABLES).push((key, Arc::downgrade(&t)));
        Some(t)
    }

    fn new(card: &SheetFetCard, model: Arc<SheetModel>) -> LeakageTable {
        let stack = tunnel_stack(card);
        let (h, core, last) = knot_layout(stack.kt);
        let grid = match card.gate {
            Gate::Metal { work_function }
                if (work_function - card.electron_affinity).abs() <= MAX_SHARED_SHIFT =>
            {
                let grid = LeakageGrid::shared(card);
                let (first, weights) = grid.columns(work_function - card.electron_affinity);
                Some((grid, first, weights))
            }
            _ => None,
        };
        let mut table = LeakageTable {
            c_ins: card.insulator_capacitance(),
            model,
            stack,
            h,
            core,
            last,
            j0: 1.0,
            knots: (0..(2 * last as usize + 1))
                .map(|_| OnceLock::new())
                .collect(),
            grid,
        };
        let vt = table.stack.kt;
        table.j0 = match &table.grid {
            Some((grid, first, weights)) => grid.j0(*first, weights),
            None => table
                .direct(vt)
                .abs()
                .max(table.direct(-vt).abs())
                .max(1e-30),
        };
        table
    }

    /// `J(u)` (A/m²) by direct solve and quadrature, not the table.
    pub fn direct(&self, u: f64) -> f64 {
        let st = self.model.local_state(u);
        let v_ox = st.gate_charge / self.c_ins;
        self.stack.current_density(st.xi, u, v_ox)
    }

    /// The insulator voltage `V_ox = Q_g / C_ins` (V) at `u` (a direct solve).
    pub fn insulator_voltage(&self, u: f64) -> f64 {
        self.model.local_state(u).gate_charge / self.c_ins
    }

    /// The knot coordinate `s(u)` and `ds/du`.
    fn coordinate(&self, u: f64) -> (f64, f64) {
        let edge = self.core * self.h;
        if u.abs() <= edge {
            (u / self.h, 1.0 / self.h)
        } else {
            let z = 1.0 + GROWTH * (u.abs() - edge) / self.h;
            (
                u.signum() * (self.core + z.ln() / GROWTH),
                1.0 / (self.h * z),
            )
        }
    }

    /// `y` at knot `s` (an integer in `[-last, last]`), solved on first use: directly, or
    /// interpolated across the shared grid's columns.
    fn knot(&self, s: i64) -> f64 {
        let k = (s + self.last as i64) as usize;
        *self.knots[k].get_or_init(|| {
            let u = position(self.h, self.core, s as f64);
            match &self.grid {
                Some((grid, first, weights)) => {
                    grid.interpolate(u, s, *first, weights, |j| (j / self.j0).asinh())
                }
                None => (self.direct(u) / self.j0).asinh(),
            }
        })
    }

    /// `J(u)` (A/m²) and `dJ/du` (A/(m² V)) from the table.
    pub fn density(&self, u: f64) -> (f64, f64) {
        if !u.is_finite() {
            return (f64::NAN, f64::NAN);
        }
        let (s, ds) = self.coordinate(u);
        let n = self.last as i64;
        // The interval [k, k + 1]; beyond the last knots y continues linearly in s.
        let k = (s.floor() as i64).clamp(-n, n - 1);
        let y = |j: i64| self.knot(j.clamp(-n, n));
        // Fourth-order centred differences where the knots allow (slope errors of order h⁴,
        // so the cubic's own h⁴ term dominates), second-order next to the ends.
        let slope = |j: i64| {
            if j <= -n {
                y(-n + 1) - y(-n)
            } else if j >= n {
                y(n) - y(n - 1)
            } else if j <= -n + 1 || j >= n - 1 {
                0.5 * (y(j + 1) - y(j - 1))
            } else {
                (8.0 * (y(j + 1) - y(j - 1)) - (y(j + 2) - y(j - 2))) / 12.0
            }
        };
        let (y0, y1, m0, m1) = (y(k), y(k + 1), slope(k), slope(k + 1));
        let t = s - k as f64;
        let (v, dv) = if t < 0.0 {
            (y0 + m0 * t, m0)
        } else if t > 1.0 {
            (y1 + m1 * (t - 1.0), m1)
        } else {
            hermite_unit(t, y0, m0, y1, m1)
        };
        let j = self.j0 * v.sinh();
        (j, self.j0 * v.cosh() * dv * ds)
    }
}

/// The tunnelling picture of `card`'s stack.
fn tunnel_stack(card: &SheetFetCard) -> TunnelStack {
    let layers: Vec<_> = card
        .insulator
        .iter()
        .zip(&card.tunnelling)
        .map(|(l, b)| (l.thickness, l.permittivity, *b))
        .collect();
    TunnelStack::new(
        &layers,
        card.electron_affinity,
        card.band_gap,
        card.temperature,
    )
}

/// The knots' core spacing `h` (V), the core's knot count per side and the last knot's index
/// at thermal energy `kt` (eV).
fn knot_layout(kt: f64) -> (f64, f64, f64) {
    let h = (0.5 * kt).max(CORE / MAX_CORE_KNOTS as f64);
    let core = (CORE / h).round();
    let outer = ((1.0 + GROWTH * (super::U_REACH - core * h) / h).ln() / GROWTH).ceil();
    (h, core, core + outer)
}

/// `u` at knot coordinate `s` (the inverse of [`LeakageTable::coordinate`]).
fn position(h: f64, core: f64, s: f64) -> f64 {
    if s.abs() <= core {
        s * h
    } else {
        let z = (GROWTH * (s.abs() - core)).exp();
        s.signum() * (core * h + h * (z - 1.0) / GROWTH)
    }
}

/// Spacing of a [`LeakageGrid`]'s columns in the gate work function, in thermal voltages.
const COLUMN_VT: f64 = 0.25;

/// The most values a [`LeakageGrid`] keeps (about 50 MB); beyond it, knots are still solved
/// and each card keeps its own, but the grid stores no more (a work-function sweep at
/// cryogenic temperatures, whose knots are dense, cannot grow it without bound).
const MAX_GRID_VALUES: usize = 1 << 20;

/// `J(u)` of one stack under metal gates of every work function `W` within
/// [`MAX_SHARED_SHIFT`] of the channel's affinity `χ`, on the tables' knots in `u` and on
/// columns `W - χ = j Δ` ([`COLUMN_VT`] thermal voltages apart), each solved on first use and
/// kept while a device uses the grid (at most [`MAX_GRID_VALUES`]). The work function shifts
/// the stack's electrostatics by exactly `W - χ` in `u` (the charge balance,
/// [`SheetModel::shared`]) but also sets the gate's Fermi level in the supply, so `J` is a
/// function of `u` and `W` both, smooth in each on the thermal voltage's scale. A card's
/// table takes its knots `asinh(J / J_0)`, with its own `J_0`, as the cubic (four-point
/// Lagrange) interpolant of the columns' `asinh(J / J_0)` about its own `W`: devices that
/// differ in their work function alone (a threshold spread in a Monte Carlo run) then share
/// the solves, and each device costs a few look-ups per knot instead of a quadrature.
/// Measured against the direct quadrature: see the module docs.
#[derive(Debug)]
pub(crate) struct LeakageGrid {
    /// The stack with `W = χ`, whose state at `u - jΔ` is the card's at `u`.
    stack: super::Stack,
    tunnel: TunnelStack,
    c_ins: f64,
    spacing: f64,
    /// `J` (A/m²) by (knot, column); the knots `i64::MIN` and `i64::MAX` hold `J(∓V_T)`.
    values: Mutex<HashMap<(i64, i64), f64>>,
}

impl LeakageGrid {
    /// The grid of `card`'s stack with its work function set aside, shared while any table
    /// uses it.
    fn shared(card: &SheetFetCard) -> Arc<LeakageGrid> {
        static GRIDS: Mutex<Vec<(SheetFetCard, Weak<LeakageGrid>)>> = Mutex::new(Vec::new());
        // The mobilities do not enter `J` (only the state's `ξ` and `Q_g`): cards that
        // differ in them share the grid too.
        let base = SheetFetCard {
            gate: Gate::Metal {
                work_function: card.electron_affinity,
            },
            electron_mobility: 1.0,
            hole_mobility: 1.0,
            mobility: Default::default(),
            ..card.stack_key()
        };
        if let Some(g) = super::find(&GRIDS, &base) {
            return g;
        }
        let tunnel = tunnel_stack(&base);
        let grid = Arc::new(LeakageGrid {
            stack: super::Stack::new(&base),
            c_ins: base.insulator_capacitance(),
            spacing: COLUMN_VT * tunnel.kt,
            tunnel,
            values: Mutex::new(HashMap::new()),
        });
        super::lock(&GRIDS).push((base, Arc::downgrade(&grid)));
        grid
    }

    /// `J(u)` (A/m²) in column `column`, by direct solve and quadrature.
    fn direct(&self, u: f64, column: i64) -> f64 {
        let (mut xi, mut mu) = (0.0, 0.0);
        let shift = column as f64 * self.spacing;
        let st = self.stack.at_u(u - shift, &mut xi, &mut mu, &mut 0).0;
        self.tunnel
            .current_density(st.xi, u, st.gate_charge / self.c_ins)
    }

    /// `Σ_m weights[m] f(J_m)` over the columns `first..first + 4`, `J_m` at knot `key` (at
    /// `u`); columns of weight zero are not solved. The columns' values are looked up under
    /// one lock, those not yet solved solved outside it and kept (a thread that solved the
    /// same knot meanwhile found the same value: the solve is a pure function of the knot).
    fn interpolate(
        &self,
        u: f64,
        key: i64,
        first: i64,
        weights: &[f64; 4],
        f: impl Fn(f64) -> f64,
    ) -> f64 {
        let (mut j, mut missing) = ([0.0; 4], [false; 4]);
        {
            let values = super::lock(&self.values);
            for m in (0..4).filter(|&m| weights[m] != 0.0) {
                match values.get(&(key, first + m as i64)) {
                    Some(&v) => j[m] = v,
                    None => missing[m] = true,
                }
            }
        }
        for m in (0..4).filter(|&m| missing[m]) {
            j[m] = self.direct(u, first + m as i64);
        }
        if missing.contains(&true) {
            let mut values = super::lock(&self.values);
            for m in (0..4).filter(|&m| missing[m]) {
                if values.len() < MAX_GRID_VALUES {
                    values.entry((key, first + m as i64)).or_insert(j[m]);
                }
            }
        }
        (0..4)
            .filter(|&m| weights[m] != 0.0)
            .map(|m| weights[m] * f(j[m]))
            .sum()
    }

    /// The `J_0` of a card whose columns are `first` with `weights`: the larger `|J|` at
    /// `u = ±V_T`, interpolated in `ln |J|` across the columns (a scale for `asinh`, which
    /// needs its magnitude only).
    fn j0(&self, first: i64, weights: &[f64; 4]) -> f64 {
        let vt = self.tunnel.kt;
        let at = |u: f64, key: i64| {
            self.interpolate(u, key, first, weights, |j| j.abs().max(1e-300).ln())
                .exp()
        };
        at(vt, i64::MAX).max(at(-vt, i64::MIN)).max(1e-30)
    }

    /// The first of the four columns about `W - χ = shift` (V) and their four-point Lagrange
    /// weights; a shift on a column gets that column alone.
    fn columns(&self, shift: f64) -> (i64, [f64; 4]) {
        let x = shift / self.spacing;
        let j = x.floor();
        let t = x - j;
        let weights = if t == 0.0 {
            [0.0, 1.0, 0.0, 0.0]
        } else {
            [
                -t * (t - 1.0) * (t - 2.0) / 6.0,
                (t + 1.0) * (t - 1.0) * (t - 2.0) / 2.0,
                -(t + 1.0) * t * (t - 2.0) / 2.0,
                (t + 1.0) * t * (t - 1.0) / 6.0,
            ]
        };
        (j as i64 - 1, weights)
    }
}

/// How a card's gate leakage enters the solution (card key `gate_leakage`).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum LeakageMode {
    /// Only at gate drives where it is not negligible (the module docs, "When it is on").
    #[default]
    Auto,
    /// At every gate drive.
    On,
    /// Never.
    Off,
}

/// The gate drives (V) between which an `auto` device leaves its leakage out: `below < 0 <
/// above`. Within [`BLEND_VT`] thermal voltages inside each onset the current fades in
/// smoothly (C¹), and beyond the onsets it is whole.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Window {
    /// The onset on the negative side (V).
    pub below: f64,
    /// The onset on the positive side (V).
    pub above: f64,
    pub(crate) blend: f64,
}

/// Width of the fade-in inside each onset, in thermal voltages.
pub const BLEND_VT: f64 = 2.0;

/// The share by which a window searched on a shared grid's table lowers its limit: twice the
/// table's largest error against the direct quadrature within two thermal voltages of
/// `u = 0`, and twenty times beyond (the module docs), so the direct current at an onset
/// stays below the limit (an onset inside the fade-in of `u = 0` keeps the leakage
/// everywhere anyway). Checked by a reviewer over 4 to 500 K: the direct current at a
/// searched onset reached 0.990 of the limit at most.
const GRID_MARGIN: f64 = 1e-2;

/// How finely (V) the onsets are located; below [`BLEND_VT`] thermal voltages at 300 K.
const ONSET_RESOLUTION: f64 = 0.01;

impl Window {
    /// The weight of the leakage at `u` and its slope: 0 well inside, 1 outside.
    #[inline]
    pub fn weight(&self, u: f64) -> (f64, f64) {
        let depth = if u >= 0.0 {
            self.above - u
        } else {
            u - self.below
        };
        if depth <= 0.0 {
            return (1.0, 0.0);
        }
        if depth >= self.blend {
            return (0.0, 0.0);
        }
        // Smoothstep in the distance to the onset: 1 at the onset, 0 a blend inside it.
        let t = 1.0 - depth / self.blend;
        let w = t * t * (3.0 - 2.0 * t);
        let dw_dt = 6.0 * t * (1.0 - t);
        // dt/du = +1/blend on the positive side (depth falls as u grows), -1/blend below.
        let sign = if u >= 0.0 { 1.0 } else { -1.0 };
        (w, dw_dt * sign / self.blend)
    }

    /// The window, or `None` where either onset lies within the fade-in of `u = 0` (the
    /// leakage matters at almost any gate drive: it is kept everywhere, so the fade-in never
    /// meets `u = 0`, where the two sides' weights would differ).
    pub(crate) fn narrowest_kept(self) -> Option<Window> {
        (self.above > self.blend && -self.below > self.blend).then_some(self)
    }

    /// Whether `u` lies where the leakage is wholly left out.
    #[inline]
    pub fn excludes(&self, u: f64) -> bool {
        u > self.below + self.blend && u < self.above - self.blend
    }
}

/// A gate current (A) below which `auto` always leaves the leakage out: one electron's charge
/// a year (`q / 3.156e7 s`, 5.1e-27 A). Over any run shorter than a year it moves less charge
/// through the whole gate than one electron, however weakly the node it reaches is held.
pub const NEGLIGIBLE_CURRENT: f64 = Q / 3.156e7;

/// The most points of the scan for the smallest channel conductance in a window.
const SCAN_POINTS: usize = 2048;
/// The scan's spacing, in thermal voltages, where [`SCAN_POINTS`] allow it.
const SCAN_VT: f64 = 0.125;

/// Half the smallest of `sigma` over `[lo, hi]` (and at 0), scanned at evenly spaced points an
/// eighth of the thermal voltage `vt` apart (at most [`SCAN_POINTS`]) with both ends: σ is a
/// sum of the carriers' conductances, each growing at most as `n^(1 + α)` with a
/// density-dependent mobility (α at most 4, [`crate::mobility`]), so at most e⁵-fold per
/// thermal voltage, and between points `Δu` apart the scan misses at most a factor
/// `e^{5 Δu / V_T}` (1.87), which the halving covers; a window many volts wide at cryogenic
/// temperatures, where the points' cap widens the spacing, can miss more, and its σ
/// underflows there anyway (the window then closes).
pub(crate) fn smallest_on(lo: f64, hi: f64, vt: f64, sigma: impl Fn(f64) -> f64) -> f64 {
    let (lo, hi) = (lo.max(-super::U_REACH), hi.min(super::U_REACH));
    let wanted = ((hi - lo) / (SCAN_VT * vt)).ceil();
    let points = if wanted.is_finite() {
        (wanted as usize + 1).clamp(2, SCAN_POINTS)
    } else {
        SCAN_POINTS
    };
    let step = (hi - lo) / (points - 1) as f64;
    (0..points)
        .map(|k| sigma(lo + step * k as f64))
        .fold(sigma(0.0), f64::min)
        * 0.5
}

impl LeakageTable {
    /// The window of gate drives where `|J|` stays below `limit` (A/m²): on each side of
    /// `u = 0` the largest `|u|` (to [`ONSET_RESOLUTION`]) below which it does. `J` is
    /// monotonic in `u` (the module docs), so a bracket from the solves `probes` holds from
    /// earlier searches on this table, else by doubling from 0.25 V, then secant steps on
    /// `ln |J|` (nearly linear in `u`), each probed one resolution further, find it in a few
    /// probes per side, all kept in `probes`: direct solves, or for a table on a shared grid
    /// the table's values against a limit lowered by [`GRID_MARGIN`]. A solve that fails
    /// counts as above the limit. [`super::U_REACH`] where `J` never reaches `limit`.
    pub fn window(&self, limit: f64, probes: &mut Probes) -> Window {
        // A table on a shared grid is searched on its knots (solved once for every device
        // of the grid), against a limit lowered by [`GRID_MARGIN`], which covers the
        // table's error; a table of its own by direct solves.
        let ln_limit = match self.grid {
            Some(_) => limit.ln() + (-GRID_MARGIN).ln_1p(),
            None => limit.ln(),
        };
        let onset = |sign: f64, seen: &mut Vec<(f64, f64)>| {
            // ln(|J| / limit) at |u| = x, kept: below zero where the leakage may be left out.
            let g = |x: f64, seen: &mut Vec<(f64, f64)>| {
                let j = match self.grid {
                    Some(_) => self.density(sign * x).0,
                    None => self.direct(sign * x),
                };
                let y = j.abs().ln();
                seen.push((x, y));
                y - ln_limit
            };
            let below = |y: f64| y < 0.0;
            // The bracket from earlier solves: the last one below before the first one not.
            seen.sort_by(|a, b| a.0.total_cmp(&b.0));
            let (mut lo, mut glo) = (0.0, f64::NEG_INFINITY);
            let mut first_above = None;
            for &(x, y) in seen.iter() {
                if below(y - ln_limit) {
                    (lo, glo) = (x, y - ln_limit);
                } else {
                    first_above = Some((x, y - ln_limit));
                    break;
                }
            }
            let (mut hi, mut ghi) = match first_above {
                Some(found) => found,
                None => {
                    let mut x = if lo > 0.0 { 2.0 * lo } else { 0.25 };
                    loop {
                        if lo >= super::U_REACH {
                            return super::U_REACH;
                        }
                        x = x.min(super::U_REACH);
                        let gx = g(x, seen);
                        if !below(gx) {
                            break (x, gx);
                        }
                        (lo, glo) = (x, gx);
                        x *= 2.0;
                    }
                }
            };
            // Which end the last step moved (the Illinois rule halves the other end's value
            // when the same end moves twice, so the bracket closes from both sides).
            let mut last_moved = 0i8;
            while hi - lo > ONSET_RESOLUTION {
                let x = if glo.is_finite() && ghi.is_finite() && ghi > glo {
                    (lo + (hi - lo) * -glo / (ghi - glo))
                        .clamp(lo + 0.25 * ONSET_RESOLUTION, hi - 0.25 * ONSET_RESOLUTION)
                } else {
                    0.5 * (lo + hi)
                };
                let gx = g(x, seen);
                // Probe one resolution toward the other end: a good estimate closes the
                // bracket there.
                let y = if below(gx) {
                    (lo, glo) = (x, gx);
                    if last_moved == -1 {
                        ghi *= 0.5;
                    }
                    last_moved = -1;
                    x + ONSET_RESOLUTION
                } else {
                    (hi, ghi) = (x, gx);
                    if last_moved == 1 {
                        glo *= 0.5;
                    }
                    last_moved = 1;
                    x - ONSET_RESOLUTION
                };
                if y > lo && y < hi {
                    let gy = g(y, seen);
                    if below(gy) {
                        (lo, glo) = (y, gy);
                    } else {
                        (hi, ghi) = (y, gy);
                    }
                }
            }
            lo
        };
        let [negative, positive] = &mut probes.sides;
        Window {
            below: -onset(-1.0, negative),
            above: onset(1.0, positive),
            blend: BLEND_VT * self.stack.kt,
        }
    }
}

/// Direct solves `(|u|, ln |J|)` on each side of `u = 0`, kept from one window search on a
/// table to the next ([`LeakageTable::window`]).
#[derive(Debug, Default)]
pub struct Probes {
    sides: [Vec<(f64, f64)>; 2],
}

/// The cubic Hermite interpolant on `[0, 1]` and its derivative.
fn hermite_unit(t: f64, y0: f64, m0: f64, y1: f64, m1: f64) -> (f64, f64) {
    let (t2, t3) = (t * t, t * t * t);
    let v = (2.0 * t3 - 3.0 * t2 + 1.0) * y0
        + (t3 - 2.0 * t2 + t) * m0
        + (-2.0 * t3 + 3.0 * t2) * y1
        + (t3 - t2) * m1;
    let d = (6.0 * t2 - 6.0 * t) * (y0 - y1)
        + (3.0 * t2 - 4.0 * t + 1.0) * m0
        + (3.0 * t2 - 2.0 * t) * m1;
    (v, d)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::contact::wkb_exponent;

    fn layer(chi: f64, gap: f64, m: f64) -> Barrier {
        Barrier {
            electron_affinity: chi,
            band_gap: gap,
            electron_mass: m,
            hole_mass: m,
        }
    }

    /// The energy quadrature has converged: 16 panels against 256 over the same pieces, for
    /// both carriers, in direct and Fowler-Nordheim tunnelling, at 4 K, 77 K and 300 K, with
    /// the Fermi levels below, at and above the band edges.
    #[test]
    fn energy_quadrature_converges() {
        for t in [4.0, 77.0, 300.0] {
            let stack = TunnelStack::new(
                &[
                    (0.67e-9, 3.4, layer(0.12, 5.95, 0.5)),
                    (2e-9, 20.0, layer(2.65, 5.8, 0.2)),
                ],
                3.965,
                2.24,
                t,
            );
            let mut worst: f64 = 0.0;
            for carrier in [Carrier::Electron, Carrier::Hole] {
                for v_ox in [-12.0, -3.0, -0.5, 0.0, 0.4, 2.0, 9.0] {
                    for (a, b) in [
                        (-1.0, -1.5),
                        (0.05, -0.4),
                        (0.3, 2.0),
                        (-0.2, 4.0),
                        (1.0, 0.999),
                    ] {
                        let coarse = stack.integral_on(carrier, v_ox, a, b, PANELS);
                        let fine = stack.integral_on(carrier, v_ox, a, b, 256);
                        let rel = (coarse - fine).abs() / fine.abs().max(1e-300);
                        worst = worst.max(rel);
                    }
                }
            }
            // Measured: 2.4e-4 at 4 K, 2.2e-5 at 77 K, 1.6e-4 at 300 K.
            assert!(worst < 1e-3, "{t} K: {worst:e}");
        }
    }

    /// The per-layer closed form against numeric WKB quadrature (contact.rs's, with its own
    /// turning-point search) for each layer of a two-layer stack, in the direct (trapezoidal)
    /// and Fowler-Nordheim (triangular) regimes, for electrons and holes.
    #[test]
    fn closed_form_exponent_matches_quadrature() {
        let stack = TunnelStack::new(
            &[
                (1.5e-9, 3.4, layer(1.0, 6.0, 0.5)),
                (2e-9, 20.0, layer(2.5, 5.8, 0.2)),
            ],
            4.0,
            1.8,
            300.0,
        );
        for carrier in [Carrier::Electron, Carrier::Hole] {
            for v_ox in [-8.0, -1.0, 0.0, 0.7, 3.0, 9.0] {
                for e in [0.0, 0.5, 1.2, 2.9] {
                    let mut numeric = 0.0;
                    for s in &stack.slabs {
                        let (a, b) = TunnelStack::edges(carrier, s, v_ox);
                        let k = match carrier {
                            Carrier::Electron => s.k_e,
                            Carrier::Hole => s.k_h,
                        };
                        // wkb_exponent integrates 2 ∫ sqrt(profile - eps) dx; with the
                        // profile k² (U - E) the root is k sqrt(U - E), twice this layer's
                        // share of θ (x in units of the thickness).
                        let profile =
                            |x: f64| k * k * s.thickness * s.thickness * (a + (b - a) * x - e);
                        numeric += 0.5 * wkb_exponent(profile, 0.0, 1.0, 64);
                    }
                    let closed = stack.exponent(carrier, v_ox, e);
                    assert!(
                        (numeric - closed).abs() <= 1e-6 * closed.max(1.0),
                        "{carrier:?} V_ox = {v_ox}, E = {e}: {numeric} vs {closed}"
                    );
                }
            }
        }
    }
}
