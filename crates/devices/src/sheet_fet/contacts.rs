//! Schottky contacts and short-channel electrostatics of the 2D-channel FET: the card options
//! and their evaluation, built on the physics of [`crate::contact`] and
//! [`crate::short_channel`].
//!
//! # Schottky contacts
//! With [`ContactCard`] a contact is no longer a linear resistor: between the terminal (the
//! metal, Fermi level `-q V_T`) and the channel's end (the internal node, quasi-Fermi level
//! `-q V_C`) flows the net injection of [`crate::contact`] for each carrier and valley,
//!
//! `i(T → C) = W s_e [I(Δ, η_ch) - I(Δ, η_m)] + W s_h [I(Δ_h, η_m,h) - I(Δ_h, η_ch,h)]`,
//!
//! with energies in kT from the channel's band edge at that end: `η_ch = ξ / V_t` the
//! channel's degeneracy there (from the tables' charge balance), `η_m = η_ch + (V_C - V_T) /
//! V_t` the metal's level, and the barrier top `Δ = φ_n / V_t + η_m` (the top sits `φ_n` above
//! the metal's Fermi level: pinned to the metal, not to the channel); for holes the same with
//! `η_ch,h = -(ξ + E_g) / V_t`, `η_m,h = η_ch,h - (V_C - V_T) / V_t` and `Δ_h = φ_p / V_t +
//! η_m,h`. `s` is [`crate::contact::injection_scale`] of the band, and each extra conduction
//! valley injects through the same top, `offset` higher (its own table). The barrier relaxes
//! into the channel over the screening length `λ_c` ([`ContactCard::screening_length`], by
//! default the stack's natural length), which sets the tunnelling through it.
//!
//! The current vanishes in equilibrium (`V_C = V_T`) at every gate voltage, depends on the
//! gate through `ξ`, and is smooth: [`crate::contact::InjectionTable`] is a bicubic Hermite
//! interpolant with continuous value and slopes. The channel's charges are those of the
//! charge sheet between the internal nodes; the overlap capacitance couples the gate to the
//! contact metal (the terminal), and a small edge capacitance [`EDGE_CAPACITANCE`] joins the
//! metal's edge to the channel's end. Without it an end whose channel and contact are both
//! off (an empty end behind a high barrier, where the injection falls as `e^η`) would be a
//! node with neither charge nor conductance, and Newton's steps at it diverge; with the
//! overlap at the end instead (as behind a linear resistance) an off contact would hide the
//! gate-drain overlap from the drain and a ring would run fast. All charges are state
//! functions of the node voltages, so the device stays charge-conserving.
//!
//! A barrier far below the band edge passes every state: the contact is then the ballistic
//! (injection-limited) contact, whose conductance per width is `q s K(η) / (k T)` (`K = √π
//! F_{-1/2}`, the derivative of the injection), not zero. The device then equals the ideal-
//! contact device in series with that conductance; for channels long against the carriers'
//! mean free path it is a small correction (the tests check both statements).
//!
//! # Short channels
//! With a natural length `λ` ([`crate::short_channel`]) the potential between the contacts
//! follows the quasi-2D scale-length equation, and the barrier carriers must cross moves from
//! the long-channel value by `δ(a, b, L/λ)` ([`crate::short_channel::barrier_shift`]), where
//! `a` and `b` are the contacts' band edges relative to the long channel's at each end. The
//! metal pins its band edge `φ_n` above its own Fermi level and the channel's lies `ξ` below
//! its quasi-Fermi level at that end, so (in volts)
//! `a = (V_S - V_S') - ξ(V_G - V_S') - φ_n` and `b = (V_D - V_D') - ξ(V_G - V_D') - φ_n`,
//! primes marking the channel's ends behind the contacts: a drop across a contact moves its
//! band edge with its metal. Both channel ends' gate drives move by `δ` (`u → u + δ`): a shift
//! that grows with `V_DS` (drain-induced barrier lowering), grows as `L` shrinks (threshold
//! roll-off), and falls as the gate raises the long-channel potential (`∂δ/∂V_G < 0`, the loss
//! of gate control behind the swing's degradation). Electrons see the minimum of the potential
//! (`a, b > 0`), holes its maximum (`a, b < 0`); the two branches are
//! `δ = δ(a⁺, b⁺) - δ(a⁻, b⁻)` with `x⁺ = w ln(1 + e^{x/w})`, `x⁻ = (-x)⁺` and `w = V_t / 4`,
//! which keeps the derivatives continuous where an end crosses the long-channel potential (the
//! barrier then moves onto the contact, where the Schottky injection describes it); the
//! rounding changes `δ` by at most `w ln 2 · 2 e^{-L/2λ}`. The same `δ` at both ends keeps the
//! current zero at `V_DS = 0`, and the charges stay state functions of the node voltages, so
//! charge is conserved. Channels longer than [`LONG_CHANNEL`] natural lengths take no shift
//! at all: `2 e^{-L/2λ}` is below 1e-17 there, under the rounding of the long-channel device,
//! which they reproduce bit for bit. In subthreshold a contact's drop can be most of `V_DS`
//! (the drain contact extracts carriers at a finite, ballistic velocity), and the terms above
//! keep that drop in the electrostatics.
//!
//! Both options need a metal gate: the channel's degeneracy at an end is then the tables' own
//! charge balance, `ξ = u - (W - χ) + (ρ + q N_fixed) / C_ins`; a Dirac gate's level would take
//! a solve per evaluation, and such cards are refused with that reason.

use super::{Gate, Intrinsic, SheetFet, SheetFetCard, SheetModel};
use crate::contact::{injection_scale, InjectionTable};
use crate::physics::{f0, logistic, EPS0, HBAR, K_B, M0, Q};
use crate::short_channel::barrier_shift;
use lamina_engine::{Detail, DetailValue};
use std::sync::{Arc, Mutex, Weak};

/// The capacitance per width between a Schottky contact's metal edge and the channel's end
/// (F/m): `ε0`, the order of the fringe between coplanar electrodes per width (common
/// practice). Besides being there physically, it keeps the end's node from floating in a
/// transient where both the channel and the contact are off (module docs).
pub const EDGE_CAPACITANCE: f64 = EPS0;

/// The lowest temperature (K) at which Schottky contacts are accepted: 77 K, the
/// liquid-nitrogen point, where the demo's contact device was checked to solve (at 40 K its
/// operating points no longer converge).
pub const MIN_CONTACT_TEMPERATURE_K: f64 = 77.0;

/// Channels longer than this many natural lengths take no short-channel shift (module docs).
pub const LONG_CHANNEL: f64 = 80.0;

/// The Schottky contacts of a card: both contacts alike.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ContactCard {
    /// Electron barrier `φ_n`: the conduction-band edge at the interface above the metal's
    /// Fermi level (eV); negative for a contact whose metal level lies in the band.
    pub electron_barrier: f64,
    /// Hole barrier `φ_p`: the metal's Fermi level above the valence-band edge at the interface
    /// (eV).
    pub hole_barrier: f64,
    /// The length over which the barrier relaxes into the channel (m); 0 takes the card's
    /// natural length.
    pub screening_length: f64,
}

/// The evaluation-ready contacts of one device (shared by devices of a card).
#[derive(Debug)]
pub(crate) struct Contacts {
    /// `φ_n / V_t`, `φ_p / V_t`, `E_g / V_t`.
    phi_n: f64,
    phi_p: f64,
    gap: f64,
    inv_vt: f64,
    /// Each band's table, scale (A/m: [`injection_scale`]) and offset above its band edge (kT).
    electron_bands: Vec<Band>,
    hole_band: Band,
}

#[derive(Debug)]
struct Band {
    table: Arc<InjectionTable>,
    scale: f64,
    offset: f64,
}

/// A contact's current from terminal to channel end and its derivatives with respect to the
/// terminal, the internal node and the gate.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct ContactCurrent {
    pub i: f64,
    pub d_terminal: f64,
    pub d_internal: f64,
    pub d_gate: f64,
}

/// The injection table for a reduced length, shared by every device that needs it (its build
/// takes most of a second).
fn table(length: f64) -> Arc<InjectionTable> {
    static TABLES: Mutex<Vec<(u64, Weak<InjectionTable>)>> = Mutex::new(Vec::new());
    let key = length.to_bits();
    if let Some(t) = super::find(&TABLES, &key) {
        return t;
    }
    let t = Arc::new(InjectionTable::new(length));
    super::lock(&TABLES).push((key, Arc::downgrade(&t)));
    t
}

impl SheetFetCard {
    /// Checks the contact and short-channel options (ranges, and what they need).
    pub(crate) fn validate_contacts(&self) -> Result<(), String> {
        if self.natural_length != 0.0 {
            super::in_range("natural_length", self.natural_length, 1e-12, 1e-3, "m")?;
        }
        let needs_metal = |what: &str| -> Result<(), String> {
            match self.gate {
                Gate::Metal { .. } => Ok(()),
                Gate::Dirac { .. } => Err(format!(
                    "{what} need a metal gate for now: with a Dirac gate the channel's level at \
                     each end would take a solve per evaluation; use a metal gate or leave \
                     {what} out"
                )),
            }
        };
        if let Some(c) = &self.contacts {
            needs_metal("Schottky contacts")?;
            if self.temperature < MIN_CONTACT_TEMPERATURE_K {
                return Err(format!(
                    "Schottky contacts are checked down to {MIN_CONTACT_TEMPERATURE_K} K, and \
                     this card is at {} K: below that the contact current spans more decades \
                     than the solve resolves (at 40 K the demo device's operating points no \
                     longer converge); leave the contact keys out (ideal contacts, or the \
                     linear `source_resistance` / `drain_resistance`) for a colder device",
                    self.temperature
                ));
            }
            for (n, v) in [
                ("contact_electron_barrier", c.electron_barrier),
                ("contact_hole_barrier", c.hole_barrier),
            ] {
                super::in_range(n, v, -5.0, 20.0, "eV")?;
            }
            if c.screening_length != 0.0 {
                super::in_range(
                    "contact_screening_length",
                    c.screening_length,
                    1e-12,
                    1e-6,
                    "m",
                )?;
            } else if self.natural_length == 0.0 {
                return Err(
                    "Schottky contacts need the length over which their barrier relaxes \
                     into the channel: give `contact_screening_length`, or the stack's natural \
                     length (`natural_length`, or `channel_thickness` with `channel_permittivity`)"
                        .into(),
                );
            }
            if self.source_resistance > 0.0 || self.drain_resistance > 0.0 {
                return Err(
                    "Schottky contacts and linear contact resistances cannot be combined \
                     yet (both would need the same internal node): leave `source_resistance` and \
                     `drain_resistance` out, or the contact barrier"
                        .into(),
                );
            }
        }
        if !self.slow_traps.is_empty() && (self.contacts.is_some() || self.natural_length > 0.0) {
            return Err(
                "slow traps cannot be combined with Schottky contacts or short-channel \
                 electrostatics yet (the contacts and the barrier would have to see the \
                 trapped charge's shift of the channel): leave one of them out"
                    .into(),
            );
        }
        if self.natural_length > 0.0 {
            needs_metal("short-channel electrostatics")?;
            if self.contacts.is_none() {
                return Err(
                    "short-channel electrostatics need the contacts' band alignment, which \
                     sets how far the contacts pull the channel's potential: give the contact \
                     metal (`contact_metal` or `contact_work_function`) or the barriers \
                     (`contact_electron_barrier`)"
                        .into(),
                );
            }
        }
        Ok(())
    }
}

impl Contacts {
    /// The contacts of a card with [`SheetFetCard::contacts`] set.
    pub(crate) fn new(card: &SheetFetCard, c: &ContactCard) -> Contacts {
        let kt = K_B * card.temperature;
        let vt = kt / Q;
        let screening = if c.screening_length > 0.0 {
            c.screening_length
        } else {
            card.natural_length
        };
        let band = |mass: f64, degeneracy: f64, offset_ev: f64| {
            let m = mass * M0;
            Band {
                table: table(screening * (2.0 * m * kt).sqrt() / HBAR),
                scale: injection_scale(m, degeneracy, kt),
                offset: offset_ev / vt,
            }
        };
        let mut electron_bands = vec![band(card.electron_mass, card.electron_degeneracy, 0.0)];
        for v in &card.extra_valleys {
            electron_bands.push(band(v.mass, v.degeneracy, v.offset));
        }
        Contacts {
            phi_n: c.electron_barrier / vt,
            phi_p: c.hole_barrier / vt,
            gap: card.band_gap / vt,
            inv_vt: 1.0 / vt,
            electron_bands,
            hole_band: band(card.hole_mass, card.hole_degeneracy, 0.0),
        }
    }

    /// The current per width from the metal (at `v_term`) into the channel's end (at
    /// `v_int`), where the channel's degeneracy is `xi` (V) with `dξ/du` `dxi` (`u = V_G -
    /// V_C`), times `width`.
    pub(crate) fn current(
        &self,
        v_term: f64,
        v_int: f64,
        xi: f64,
        dxi: f64,
        width: f64,
    ) -> ContactCurrent {
        let inv_vt = self.inv_vt;
        let bias = (v_int - v_term) * inv_vt;
        // Electrons: η_ch = ξ/V_t, η_m = η_ch + bias, Δ = φ_n + η_m. `i` in units of A/m, and
        // its slopes with respect to η_ch (through ξ) and to the bias.
        let eta_ch = xi * inv_vt;
        let (mut i, mut d_eta, mut d_bias) = (0.0, 0.0, 0.0);
        for b in &self.electron_bands {
            let (ec, em) = (eta_ch - b.offset, eta_ch + bias - b.offset);
            let delta = self.phi_n + eta_ch + bias;
            let [ic, ic_d, ic_e] = b.table.eval(delta - b.offset, ec);
            let [im, im_d, im_e] = b.table.eval(delta - b.offset, em);
            // i = s (I_c - I_m); dΔ = dη_ch + dbias; dη_m = dη_ch + dbias.
            i += b.scale * (ic - im);
            d_eta += b.scale * (ic_d + ic_e - im_d - im_e);
            d_bias += b.scale * (ic_d - im_d - im_e);
        }
        // Holes: η_ch,h = -(ξ/V_t + E_g), η_m,h = η_ch,h - bias, Δ_h = φ_p + η_m,h;
        // i = s (I_m - I_c), and dη_ch,h/dη_ch = -1.
        let b = &self.hole_band;
        let hc = -(eta_ch + self.gap);
        let hm = hc - bias;
        let delta = self.phi_p + hm;
        let [ic, ic_d, ic_e] = b.table.eval(delta, hc);
        let [im, im_d, im_e] = b.table.eval(delta, hm);
        i += b.scale * (im - ic);
        // d/dη_ch,h of (I_m - I_c) with dΔ = dη_m = dη_ch,h (bias fixed):
        let dh = im_d + im_e - ic_d - ic_e;
        // d/dbias: dΔ = dη_m = -dbias.
        let db = -(im_d + im_e) + ic_d;
        d_eta -= b.scale * dh;
        d_bias += b.scale * db;
        // η_ch depends on u = V_G - V_C through ξ; the bias is (V_C - V_T) / V_t.
        let d_u = d_eta * dxi * inv_vt;
        ContactCurrent {
            i: width * i,
            d_terminal: -width * d_bias * inv_vt,
            d_internal: width * (d_bias * inv_vt - d_u),
            d_gate: width * d_u,
        }
    }

    /// The electron barrier `φ_n` (V).
    pub(crate) fn electron_barrier(&self) -> f64 {
        self.phi_n / self.inv_vt
    }

    /// The hole barrier `φ_p` (V).
    pub(crate) fn hole_barrier(&self) -> f64 {
        self.phi_p / self.inv_vt
    }
}

impl SheetFet {
    /// The current from the terminal at `v_term` into the channel end at `v_int` through a
    /// Schottky contact, with the gate at `v_gate` and the short-channel shift `delta` (V,
    /// held fixed: `∂/∂δ` is `d_gate`). The channel's level at the end is the one the channel
    /// itself uses there, at `u = V_G - V_C + δ`, so contact and channel agree on the
    /// carriers at the end.
    pub(crate) fn contact_current(
        &self,
        c: &Contacts,
        v_term: f64,
        v_int: f64,
        v_gate: f64,
        delta: f64,
    ) -> ContactCurrent {
        // Both options are refused for a Dirac gate (validate), so the level exists.
        let (xi, dxi) = self
            .model
            .degeneracy(v_gate - v_int + delta)
            .unwrap_or((0.0, 0.0));
        c.current(v_term, v_int, xi, dxi, self.width)
    }

    /// The short-channel shift `δ` (V) at local unknowns `x` (terminals drain, gate, source,
    /// then the channel's drain and source ends) with its derivatives with respect to all
    /// five; `None` for a long channel. The contacts' band edges relative to the long
    /// channel's at each end: `a = (V_S - V_S') - ξ(V_G - V_S') - φ_n`, `b = (V_D - V_D') -
    /// ξ(V_G - V_D') - φ_n` (the metal pins its band edge `φ_n` above its own Fermi level; the
    /// channel's is `ξ` below its quasi-Fermi level at that end).
    pub(crate) fn short_channel_shift(&self, x: &[f64]) -> Option<(f64, [f64; 5])> {
        let short = self.short.as_ref()?;
        let (td, g, ts, cd, cs) = (x[0], x[1], x[2], *x.get(3)?, *x.get(4)?);
        let (xs, dxs) = self.model.degeneracy(g - cs)?;
        let (xd, dxd) = self.model.degeneracy(g - cd)?;
        let a = (ts - cs) - xs - short.phi_n;
        let b = (td - cd) - xd - short.phi_n;
        let (v, da, db) = short.shift(a, b);
        // ∂a: source terminal 1, source end -1 + ξ'_s, gate -ξ'_s; likewise b at the drain.
        Some((
            v,
            [
                db,
                -da * dxs - db * dxd,
                da,
                db * (dxd - 1.0),
                da * (dxs - 1.0),
            ],
        ))
    }

    /// The channel's current and charges at local unknowns `x` (terminals, then internal
    /// nodes), the short-channel shift included at its value; with the shift's derivatives
    /// (zero for a long channel).
    pub fn channel_at(&self, x: &[f64]) -> Option<(Intrinsic, [f64; 5])> {
        let (vd, vs) = self.channel_voltages(x)?;
        let (delta, dd) = self.short_channel_shift(x).unwrap_or((0.0, [0.0; 5]));
        Some((self.intrinsic_shifted(vd, *x.get(1)?, vs, delta), dd))
    }

    /// The device's Schottky contacts, if any.
    pub(crate) fn schottky(&self) -> Option<&Contacts> {
        self.contacts.as_deref()
    }

    /// Operating-point details of the contacts and the short channel at local unknowns `x`
    /// (terminals, then internal nodes): the barriers, each contact's differential
    /// resistance times width and its voltage drop; the natural length, the barrier shift
    /// `δ` and the gate's control factor `1 + ∂δ/∂u` (1 for a long channel).
    pub(crate) fn contact_details(&self, x: &[f64]) -> Vec<Detail> {
        let mut out = Vec::new();
        let num = |name, v, unit| Detail {
            name,
            value: DetailValue::Number(v, unit),
        };
        let (Some((vd, vs)), Some(&vg)) = (self.channel_voltages(x), x.get(1)) else {
            return out;
        };
        let shift = self.short_channel_shift(x);
        if let (Some(c), Some(&td), Some(&ts)) = (self.schottky(), x.first(), x.get(2)) {
            let delta = shift.map_or(0.0, |s| s.0);
            out.push(num("contact electron barrier", c.electron_barrier(), "V"));
            out.push(num("contact hole barrier", c.hole_barrier(), "V"));
            for (r_name, drop_name, t, i) in [
                ("source contact resistance", "source contact drop", ts, vs),
                ("drain contact resistance", "drain contact drop", td, vd),
            ] {
                let k = self.contact_current(c, t, i, vg, delta);
                // dI/dV across the contact, per width: R W = W / (dI/dV_T).
                let g = k.d_terminal;
                let rw = if g > 0.0 {
                    self.width / g
                } else {
                    f64::INFINITY
                };
                out.push(num(r_name, rw, "Ohm m"));
                out.push(num(drop_name, t - i, "V"));
            }
        }
        if let Some(sc) = &self.short {
            out.push(num("natural length", self.length() / sc.lengths, "m"));
            if let Some((d, dd)) = shift {
                out.push(num("short channel barrier shift", d, "V"));
                out.push(num("gate control factor", 1.0 + dd[1], ""));
            }
        }
        out
    }
}

impl SheetModel {
    /// The channel's degeneracy `ξ = (E_F - E_c) / q` (V) at `u = V_G - V` (V) from the tables'
    /// charge balance, and `dξ/du`; `None` for a Dirac gate (see the module docs).
    pub(crate) fn degeneracy(&self, u: f64) -> Option<(f64, f64)> {
        if self.stack.dirac.is_some() {
            return None;
        }
        let (rho, drho) = self.tables.rho(u - self.shift);
        let inv_c = 1.0 / self.stack.c_ins;
        Some((
            u - self.stack.offset + (rho + self.stack.q_const) * inv_c,
            1.0 + drho * inv_c,
        ))
    }
}

/// The short-channel shift of one device: `L/λ` and `φ_n` (V).
#[derive(Clone, Copy, Debug)]
pub(crate) struct ShortChannel {
    pub lengths: f64,
    pub phi_n: f64,
    pub smoothing: f64,
}

impl ShortChannel {
    /// The options of a card, or `None` for a long channel (no natural length, or one more
    /// than [`LONG_CHANNEL`] natural lengths long).
    pub(crate) fn of(card: &SheetFetCard) -> Option<ShortChannel> {
        let c = card.contacts.as_ref()?;
        if card.natural_length <= 0.0 {
            return None;
        }
        let lengths = card.length / card.natural_length;
        (lengths < LONG_CHANNEL).then(|| ShortChannel {
            lengths,
            phi_n: c.electron_barrier,
            smoothing: 0.25 * K_B * card.temperature / Q,
        })
    }

    /// `δ` (V) and its derivatives with respect to `a` and `b`, the contacts' band edges
    /// relative to the long channel's (module docs).
    pub(crate) fn shift(&self, a: f64, b: f64) -> (f64, f64, f64) {
        let w = self.smoothing;
        // x⁺ = w F0(x/w) and its slope, the logistic.
        let plus = |x: f64| (w * f0(x / w), logistic(x / w));
        let (ap, sap) = plus(a);
        let (bp, sbp) = plus(b);
        let (am, sam) = plus(-a);
        let (bm, sbm) = plus(-b);
        let (de, de_a, de_b) = barrier_shift(ap, bp, self.lengths);
        let (dh, dh_a, dh_b) = barrier_shift(am, bm, self.lengths);
        let d_a = de_a * sap + dh_a * sam;
        let d_b = de_b * sbp + dh_b * sbm;
        (de - dh, d_a, d_b)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::contact::{richardson_2d, sqrt_pi_fermi_minus_half};
    use lamina_engine::{Element, EvalContext, Stamp};

    /// A default card with Schottky contacts of barrier `phi` (eV), relaxing over `screening`.
    fn card(phi: f64, screening: f64) -> SheetFetCard {
        let d = SheetFetCard::default();
        SheetFetCard {
            contacts: Some(ContactCard {
                electron_barrier: phi,
                hole_barrier: d.band_gap - phi,
                screening_length: screening,
            }),
            ..d
        }
    }

    /// No current flows through a contact in equilibrium, at any gate voltage.
    #[test]
    fn contact_current_vanishes_in_equilibrium() {
        let fet = SheetFet::new(&card(0.3, 2e-9)).unwrap();
        let c = fet.schottky().unwrap();
        for vg in [-2.0, -0.5, 0.0, 0.4, 1.0, 3.0] {
            for v in [-0.3, 0.0, 0.7] {
                let k = fet.contact_current(c, v, v, vg, 0.0);
                assert!(k.i.abs() < 1e-25, "{vg} {v}: {}", k.i);
            }
        }
    }

    /// Over the top alone and from nondegenerate reservoirs the contact is the 2D thermionic
    /// law `J = A₂ T^{3/2} e^{-φ/kT} (e^{q V/kT} - 1)`, `V` the metal above the channel end,
    /// whatever the gate (A. Anwar, B. Nabet, J. Culp and F. Castro, J. Appl. Phys. 85, 2663
    /// (1999); recalled from memory). A screening length of 1 m (beyond what a card accepts)
    /// leaves no tunnelling, even under the barrier's cusp top.
    #[test]
    fn thick_barrier_is_the_2d_thermionic_law() {
        let phi = 0.4;
        let d = SheetFetCard::default();
        let fet = SheetFet::new(&card(phi, 2e-9)).unwrap();
        let thick = Contacts::new(&d, &card(phi, 1.0).contacts.unwrap());
        let vt = fet.model.stack.vt;
        let m = d.electron_mass * M0;
        let a2 = richardson_2d(m, d.electron_degeneracy);
        // The top must stay above the channel's own band edge (`φ > -ξ + V`): below it, the
        // channel's edge is the barrier.
        for (vg, v) in [(-0.3, 0.05), (0.0, -0.08), (-0.2, 0.12)] {
            let k = fet.contact_current(&thick, v, 0.0, vg, 0.0);
            let closed =
                d.width * a2 * d.temperature.powf(1.5) * (-phi / vt).exp() * ((v / vt).exp() - 1.0);
            // Holes see a barrier of 1.4 eV: nothing.
            assert!(
                ((k.i - closed) / closed).abs() < 1e-5,
                "{vg} {v}: {:e} vs {closed:e}",
                k.i
            );
        }
    }

    /// A barrier far below the band edge passes every state: the contact's conductance at
    /// zero bias is the ballistic one, `q s √π F_{-1/2}(η) / kT` per width (the Landauer
    /// conductance of a 2D reservoir; M. Lundstrom, *Fundamentals of Carrier Transport*, 2nd
    /// ed., Cambridge 2000, ch. 3; recalled from memory).
    #[test]
    fn transparent_contact_is_ballistic() {
        let d = SheetFetCard::default();
        let fet = SheetFet::new(&card(-1.0, 2e-9)).unwrap();
        let c = fet.schottky().unwrap();
        let vt = fet.model.stack.vt;
        let kt = K_B * d.temperature;
        let s = injection_scale(d.electron_mass * M0, d.electron_degeneracy, kt);
        for vg in [0.5, 1.0, 2.0] {
            let (xi, _) = fet.model.degeneracy(vg).unwrap();
            // Current from the metal into the channel per volt of the metal above it.
            let g = fet.contact_current(c, 0.0, 0.0, vg, 0.0).d_terminal;
            let ballistic = d.width * s * sqrt_pi_fermi_minus_half(xi / vt) / vt;
            assert!(
                ((g - ballistic) / ballistic).abs() < 1e-5,
                "{vg}: {g:e} vs {ballistic:e}"
            );
        }
    }

    /// The contact current's derivatives against central differences, from off to on, with
    /// tunnelling, in both directions.
    #[test]
    fn contact_derivatives_match_differences() {
        let fet = SheetFet::new(&card(0.25, 1.5e-9)).unwrap();
        let c = fet.schottky().unwrap();
        for (t, i, g) in [
            (0.1, 0.0, 0.5),
            (-0.2, 0.0, 1.2),
            (0.6, 0.55, 2.0),
            (0.0, 0.3, -1.0),
            (0.05, 0.02, 0.1),
        ] {
            let k = fet.contact_current(c, t, i, g, 0.0);
            let h = 1e-6;
            let f = |t: f64, i: f64, g: f64| fet.contact_current(c, t, i, g, 0.0).i;
            let num = [
                (f(t + h, i, g) - f(t - h, i, g)) / (2.0 * h),
                (f(t, i + h, g) - f(t, i - h, g)) / (2.0 * h),
                (f(t, i, g + h) - f(t, i, g - h)) / (2.0 * h),
            ];
            let ana = [k.d_terminal, k.d_internal, k.d_gate];
            let scale = ana.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            for j in 0..3 {
                assert!(
                    (ana[j] - num[j]).abs() <= 1e-5 * scale,
                    "({t}, {i}, {g}) {j}: {:e} vs {:e}",
                    ana[j],
                    num[j]
                );
            }
        }
    }

    /// The electron barrier of the short-channel tests (eV), a nearly ohmic contact: the
    /// channel's barrier lies inside it only while its band edge is above the contacts'
    /// (`a > 0`). With the default card's flat band at 0 V, `V_G = -0.4 V` is deep
    /// subthreshold for electrons and far from the hole branch at drain biases up to 0.6 V.
    const PHI: f64 = 0.05;

    /// A card with a natural length: `L` natural lengths long.
    fn short(lengths: f64) -> SheetFetCard {
        let c = card(PHI, 0.0);
        SheetFetCard {
            natural_length: c.length / lengths,
            ..c
        }
    }

    /// Channels beyond [`LONG_CHANNEL`] natural lengths are the long-channel device bit for
    /// bit, and the shift shrinks monotonically toward them.
    #[test]
    fn long_channel_limit_is_exact() {
        let long = SheetFet::new(&card(PHI, 2e-9)).unwrap();
        let far = SheetFet::new(&short(LONG_CHANNEL * 1.01)).unwrap();
        for (vd, vg, vs) in [(0.05, -0.3, 0.0), (0.8, 0.6, 0.0), (0.3, 1.2, 0.1)] {
            let x = [vd, vg, vs, vd, vs];
            let (a, b) = (
                long.channel_at(&x).unwrap().0,
                far.channel_at(&x).unwrap().0,
            );
            for (x, y) in [
                (a.current, b.current),
                (a.q_gate, b.q_gate),
                (a.q_drain, b.q_drain),
                (a.q_source, b.q_source),
            ] {
                assert_eq!((x.v, x.d), (y.v, y.d), "{vd} {vg} {vs}");
            }
        }
        let mut last = f64::INFINITY;
        for lengths in [3.0, 5.0, 8.0, 12.0, 20.0, 40.0, 79.0] {
            let i = SheetFet::new(&short(lengths))
                .unwrap()
                .channel_at(&[0.5, -0.4, 0.0, 0.5, 0.0])
                .unwrap()
                .0
                .current
                .v;
            assert!(i < last, "{lengths}: {i:e} not below {last:e}");
            last = i;
        }
        let i_long = long.intrinsic(0.5, -0.4, 0.0).current.v;
        assert!(last >= i_long && (last - i_long) / i_long < 1e-12);
    }

    /// Subthreshold drain-induced barrier lowering and swing against the long-channel
    /// asymptote of the scale-length solution: the barrier moves by `2 sqrt(a b) e^{-L/2λ}`,
    /// so between drain biases `V_1` and `V_2` the threshold moves by
    /// `2 (sqrt(a (a + V_2)) - sqrt(a (a + V_1))) e^{-L/2λ}`, and at `V_DS → 0` the swing is
    /// `ln 10 kT/q / (1 - 2 e^{-L/2λ})` (R.-H. Yan, A. Ourmazd and K. F. Lee, IEEE Trans.
    /// Electron Devices 39, 1704 (1992); K. K. Young, IEEE Trans. Electron Devices 36, 399
    /// (1989); recalled from memory). With `L = 14 λ` the asymptote's neglected terms are
    /// `e^{-L/λ}` relative, below 1e-6.
    #[test]
    fn dibl_and_swing_follow_the_scale_length_asymptote() {
        let lengths = 14.0;
        let fet = SheetFet::new(&short(lengths)).unwrap();
        let vt = fet.model.stack.vt;
        let e = (-0.5 * lengths).exp();
        let vg = -0.4;
        // The contacts' band edge relative to the long channel's at the source end.
        let (xi, _) = fet.model.degeneracy(vg).unwrap();
        let a = -(PHI + xi);
        assert!(a > 0.3, "deep subthreshold: a = {a}");
        // The channel alone, its ends at the terminals' voltages (no contact drop).
        let at = |f: &SheetFet, vd: f64, vg: f64| f.channel_at(&[vd, vg, 0.0, vd, 0.0]).unwrap();
        let current = |vd: f64| at(&fet, vd, vg).0.current.v;
        let (v1, v2) = (0.1, 0.6);
        // In subthreshold I ∝ e^{δ/V_t} (1 - e^{-V_DS/V_t}), up to the mobile charge's own
        // small feedback (checked by the long-channel device's ratio).
        let long = SheetFet::new(&card(PHI, 2e-9)).unwrap();
        let ratio =
            |f: &SheetFet| f.intrinsic(v2, vg, 0.0).current.v / f.intrinsic(v1, vg, 0.0).current.v;
        let shift = vt * (current(v2) / current(v1) / ratio(&long)).ln();
        let closed = 2.0 * ((a * (a + v2)).sqrt() - (a * (a + v1)).sqrt()) * e;
        assert!(
            ((shift - closed) / closed).abs() < 1e-3,
            "DIBL {shift:e} vs {closed:e}"
        );
        // Swing at small V_DS: d ln I / dV_G against the long channel's.
        let v = 1e-3;
        // d ln I / dV_G with δ's own dependence on the gate (∂I/∂δ = ∂I/∂V_G at fixed δ).
        let slope = |f: &SheetFet| {
            let (ch, dd) = at(f, v, vg);
            ch.current.d[1] * (1.0 + dd[1]) / ch.current.v
        };
        let factor = slope(&long) / slope(&fet);
        let closed = 1.0 / (1.0 - e * (2.0 * a + v) / (a * (a + v)).sqrt());
        assert!(
            ((factor - closed) / closed).abs() < 1e-3,
            "swing factor {factor} vs {closed}"
        );
    }

    /// Ends that lie far below a volt from the long-channel potential (the other branch deep
    /// off at 77 K puts them near 1e-130 V) give a finite shift and finite slopes: the
    /// extremum's formula is evaluated on the ends scaled to the larger one.
    #[test]
    fn tiny_ends_give_finite_shifts() {
        for (a, b) in [(1e-130, 2e-130), (3e-200, 1e-200), (1e-300, 1e-300)] {
            let (d, da, db) = crate::short_channel::barrier_shift(a, b, 30.0);
            assert!(d.is_finite() && da.is_finite() && db.is_finite(), "{a} {b}");
            assert!(d >= 0.0 && d <= a.max(b), "{a} {b}: {d}");
        }
        let mut c = short(6.0);
        c.temperature = 77.0;
        let fet = SheetFet::new(&c).unwrap();
        for vg in [-1.5, -0.6, 0.0, 0.8] {
            let (ch, dd) = fet.channel_at(&[0.05, vg, 0.0, 0.05, 0.0]).unwrap();
            assert!(
                ch.current.v.is_finite() && dd.iter().all(|x| x.is_finite()),
                "{vg}"
            );
        }
    }

    /// The whole element's Jacobian (contacts and short channel) against central
    /// differences of its residual, across the crossing where the channel's ends pass the
    /// contacts' band edge (where the smoothing acts).
    #[test]
    fn element_jacobian_matches_differences() {
        let fet = SheetFet::new(&short(6.0)).unwrap();
        let n = 5;
        let eval = |x: &[f64]| {
            let (mut f, mut q) = (vec![0.0; n], vec![0.0; n]);
            let (mut df, mut dq) = (vec![0.0; n * n], vec![0.0; n * n]);
            let mut st = Stamp::new(&mut f, &mut q, &mut df, &mut dq);
            fet.evaluate(x, &EvalContext::dc(), &mut st);
            (f, q, df, dq)
        };
        for vg in [-0.4, -0.2, -0.1, 0.0, 0.1, 0.3, 0.8] {
            let x = [0.4, vg, 0.0, 0.37, 0.01];
            let (_, _, df, dq) = eval(&x);
            let h = 1e-7;
            for j in 0..n {
                let (mut xp, mut xm) = (x, x);
                xp[j] += h;
                xm[j] -= h;
                let (fp, qp, _, _) = eval(&xp);
                let (fm, qm, _, _) = eval(&xm);
                for r in 0..n {
                    for (name, a, p, m, jac) in [
                        ("f", df[r * n + j], fp[r], fm[r], &df),
                        ("q", dq[r * n + j], qp[r], qm[r], &dq),
                    ] {
                        let num = (p - m) / (2.0 * h);
                        // Relative to the row's largest entry.
                        let scale = jac[r * n..(r + 1) * n]
                            .iter()
                            .fold(1e-30f64, |s, v| s.max(v.abs()));
                        assert!(
                            (a - num).abs() <= 1e-5 * scale,
                            "vg {vg} {name} row {r} col {j}: {a:e} vs {num:e}"
                        );
                    }
                }
            }
        }
    }
}
