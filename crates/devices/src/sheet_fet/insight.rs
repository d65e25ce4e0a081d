//! What a sheet FET reports about itself at an operating point (`Element::details`): carrier
//! densities at both ends of the channel and a one-word region.
//!
//! The region uses the threshold charge `Q_th = C_ins V_T` (mobile charge per area equal to the
//! insulator capacitance times the thermal voltage: the boundary between weak and strong
//! inversion in the charge-sheet picture, where drift and diffusion currents are equal; common
//! practice, e.g. Y. Tsividis and C. McAndrew, *Operation and Modeling of the MOS Transistor*,
//! 3rd ed., 2011, ch. 4). With `Q_s` the larger of the two ends' mobile charge of the more
//! numerous carrier and `Q_d` that at the other end:
//!
//! * `off`: `Q_s < 1e-4 Q_th` (four decades below threshold);
//! * `subthreshold`: `Q_s < Q_th`;
//! * `saturation`: `Q_s >= Q_th` and either the far end is pinched off (`Q_d < Q_th`) or the
//!   output conductance has fallen below a tenth of the transconductance (velocity saturation);
//! * `linear`: otherwise.
//!
//! Gate leakage ([`super::leakage`]): the gate current (A, into the gate), the part of it that
//! leaves through the drain, and its ratio to the drain current's magnitude, with a word: `significant` where the gate current is at least
//! [`SIGNIFICANT_LEAKAGE`] of the drain current, `negligible` below, `not modelled` for a card
//! without tunnelling data (a layer given by permittivity and thickness instead of a library
//! insulator), `off` where the card turns it off, and `left out (below its onsets)` where an
//! `auto` card leaves it out at both channel ends ([`super::leakage`], "When it is on"), with
//! the onsets. Otherwise the word only says whether the leakage in the solution matters next
//! to the drain current.
//!
//! Insulator fields: each layer carries `E_i = |Q_g| / (ε_i ε0)` (Gauss's law; the larger gate
//! charge of the two channel ends), reported beside the layer's breakdown field where the
//! card has one ([`crate::warnings::breakdown`] turns them into warnings).

use super::SheetFet;
use crate::physics::EPS0;
use lamina_engine::{Detail, DetailValue};

/// The mobile charge, relative to the threshold charge, below which a device counts as off.
const OFF_FRACTION: f64 = 1e-4;

/// The gate current, as a fraction of the drain current, from which the gate leakage counts as
/// significant: 1e-3, the Newton solve's relative current tolerance, so a smaller leakage
/// could not be told apart from the drain current's own rounding (common practice for the
/// tolerance).
pub const SIGNIFICANT_LEAKAGE: f64 = 1e-3;

/// Detail names of each layer's field and breakdown field, layer by layer (the card keys'
/// names for the first two; further layers exist only through the API and share the third).
pub const FIELD_DETAILS: [(&str, &str); 3] = [
    ("insulator field", "insulator breakdown field"),
    ("insulator2 field", "insulator2 breakdown field"),
    ("further layer field", "further layer breakdown field"),
];

impl SheetFet {
    /// Densities at both channel ends and the operating region at local unknowns `x`
    /// (terminals drain, gate, source, then the internal contact nodes; the gate entry is the
    /// channel's gate drive, moved by slow traps where the card has them), and the gate
    /// leakage as the solution carries it, at the terminal gate voltage `leak_gate`. The
    /// short-channel shift is included as the solution has it.
    pub(crate) fn insight(&self, x: &[f64], leak_gate: f64) -> Vec<Detail> {
        let (Some((vd, vs)), Some(&vg)) = (self.channel_voltages(x), x.get(1)) else {
            return Vec::new();
        };
        let model = &self.model;
        let delta = self.short_channel_shift(x).map_or(0.0, |s| s.0);
        let at_s = model.local_state(vg - vs + delta);
        let at_d = model.local_state(vg - vd + delta);
        let q = crate::physics::Q;
        let q_th = model.insulator_capacitance() * model.thermal_voltage();
        let electrons = at_s.n + at_d.n >= at_s.p + at_d.p;
        let carrier = |st: &super::LocalState| q * if electrons { st.n } else { st.p };
        let (qs, qd) = {
            let (a, b) = (carrier(&at_s), carrier(&at_d));
            if a >= b {
                (a, b)
            } else {
                (b, a)
            }
        };
        let ch = self.intrinsic_shifted(vd, vg, vs, delta);
        let gm = ch.current.d[1].abs();
        let gds = ch.current.d[0].abs();
        let region = if qs < OFF_FRACTION * q_th {
            "off"
        } else if qs < q_th {
            "subthreshold"
        } else if qd < q_th || gds < 0.1 * gm {
            "saturation"
        } else {
            "linear"
        };
        let num = |name, v| Detail {
            name,
            value: DetailValue::Number(v, "1/m^2"),
        };
        let mut leak = self.leakage_details(vd, leak_gate, vs, ch.current.v);
        let gate_charge = at_s.gate_charge.abs().max(at_d.gate_charge.abs());
        for (k, l) in self.layers.iter().enumerate() {
            let (field, breakdown) = FIELD_DETAILS[k.min(2)];
            leak.push(Detail {
                name: field,
                value: DetailValue::Number(gate_charge / (l.permittivity * EPS0), "V/m"),
            });
            if let Some(b) = l.breakdown_field {
                leak.push(Detail {
                    name: breakdown,
                    value: DetailValue::Number(b, "V/m"),
                });
            }
        }
        let mut all = vec![
            Detail {
                name: "region",
                value: DetailValue::Word(region),
            },
            Detail {
                name: "carrier",
                value: DetailValue::Word(if electrons { "electrons" } else { "holes" }),
            },
            num("electron density at source", at_s.n),
            num("electron density at drain", at_d.n),
            num("hole density at source", at_s.p),
            num("hole density at drain", at_d.p),
            Detail {
                name: "threshold charge density",
                value: DetailValue::Number(q_th / q, "1/m^2"),
            },
        ];
        all.append(&mut leak);
        all
    }

    /// The gate current, its ratio to `|I_D|` and whether it matters.
    fn leakage_details(&self, vd: f64, vg: f64, vs: f64, drain: f64) -> Vec<Detail> {
        if self.leakage.is_none() {
            return vec![Detail {
                name: "gate leakage",
                value: DetailValue::Word(if self.leakage_turned_off {
                    "off"
                } else {
                    "not modelled"
                }),
            }];
        }
        let [(to_drain, _), (to_source, _)] = self.gate_leakage(vg - vd, vg - vs);
        let gate = to_drain + to_source;
        let ratio = gate.abs() / drain.abs();
        let window = self.leakage_window();
        let left_out = window.is_some_and(|w| w.excludes(vg - vd) && w.excludes(vg - vs));
        let word = match (left_out, ratio >= SIGNIFICANT_LEAKAGE) {
            (true, _) => "left out (below its onsets)",
            (false, true) => "significant",
            (false, false) => "negligible",
        };
        let mut all = vec![Detail {
            name: "gate leakage",
            value: DetailValue::Word(word),
        }];
        // What the solution carries, unless the leakage is left out here.
        if !left_out {
            all.extend(
                [
                    ("gate leakage current", gate, "A"),
                    ("gate leakage to drain", to_drain, "A"),
                    ("gate leakage ratio", ratio, "1"),
                ]
                .map(|(name, x, unit)| Detail {
                    name,
                    value: DetailValue::Number(x, unit),
                }),
            );
        }
        if let Some(w) = window {
            all.extend(
                [
                    ("gate leakage onset below", w.below),
                    ("gate leakage onset above", w.above),
                ]
                .map(|(name, x)| Detail {
                    name,
                    value: DetailValue::Number(x, "V"),
                }),
            );
        }
        all
    }
}
