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

use super::SheetFet;
use lamina_engine::{Detail, DetailValue};

/// The mobile charge, relative to the threshold charge, below which a device counts as off.
const OFF_FRACTION: f64 = 1e-4;

impl SheetFet {
    /// Densities at both channel ends and the operating region at local unknowns `x`
    /// (terminals drain, gate, source, then the internal contact nodes).
    pub(crate) fn insight(&self, x: &[f64]) -> Vec<Detail> {
        let (Some((vd, vs)), Some(&vg)) = (self.channel_voltages(x), x.get(1)) else {
            return Vec::new();
        };
        let model = &self.model;
        let at_s = model.local_state(vg - vs);
        let at_d = model.local_state(vg - vd);
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
        let ch = self.intrinsic(vd, vg, vs);
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
        vec![
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
        ]
    }
}
