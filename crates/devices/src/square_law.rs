//! The long-channel square-law FET, a check element with closed-form answers.
//!
//! Terminals `drain`, `gate`, `source`. For an n device with `V_DS >= 0` and overdrive
//! `ov = V_GS - V_T`:
//!
//! ```text
//! f(ov, v) = 0                 for ov <= 0
//!          = ov v - v^2 / 2     for 0 <= v < ov   (linear region)
//!          = ov^2 / 2           for v >= ov       (saturation)
//! I_D = k f(V_GS - V_T, V_DS) (1 + λ |V_DS|)
//! ```
//!
//! For `V_DS < 0` drain and source exchange roles, so the device is symmetric. A p device is
//! the mirror image: `I_D(p)(V) = -I_D(n)(-V)` with `V_T(p) < 0` for enhancement, i.e. it
//! conducts for `V_SG > |V_T|`. The square law is the long-channel result of, e.g.,
//! S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed. (2007), ch. 6.
//!
//! # Intrinsic charges (optional)
//! With gate capacitance `C_g = W L C_ox`, the channel charge of the square-law device with
//! channel potential running from the source end (`u = ov`) to the drain end
//! (`u_d = max(ov - V_DS, 0)`) is, with `s = ov` and `d = u_d`,
//!
//! ```text
//! Q_I = -(2/3) C_g (s^2 + s d + d^2) / (s + d)
//! Q_D = -(2/15) C_g (2 s^3 + 4 s^2 d + 6 s d^2 + 3 d^3) / (s + d)^2     (Ward-Dutton share)
//! Q_S = Q_I - Q_D,   Q_G = -Q_I
//! ```
//!
//! from integrating the local charge `-C_ox (ov - V(y))` along the channel weighted by
//! `y / L` (D. E. Ward and R. W. Dutton, IEEE J. Solid-State Circuits SC-13(5), 1978). In
//! saturation `Q_D / Q_I = 0.4`; at `V_DS = 0` drain and source each hold half. The terminal
//! charges sum to zero exactly, so the model conserves charge. There is no body terminal and
//! no charge below threshold.

use lamina_engine::{Element, EvalContext, Stamp};

/// Carrier type of a FET.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Polarity {
    /// Electron channel: conducts for `V_GS > V_T`.
    N,
    /// Hole channel: conducts for `V_GS < V_T` (`V_T < 0` for enhancement).
    P,
}

/// The square-law FET.
#[derive(Clone, Debug, PartialEq)]
pub struct SquareLawFet {
    polarity: Polarity,
    /// Transconductance parameter `k = μ C_ox W / L` in A/V².
    k: f64,
    /// Threshold seen by the mirrored n-type evaluation (>= 0 for enhancement devices).
    vt_n: f64,
    /// Channel-length modulation in 1/V.
    lambda: f64,
    /// Total gate capacitance `W L C_ox` in farads, 0 for no intrinsic charge.
    gate_capacitance: f64,
}

const PINS: &[&str] = &["drain", "gate", "source"];

/// Current from the high to the low terminal and its partial derivatives with respect to
/// the high terminal, gate and low terminal voltages.
#[derive(Clone, Copy, Default)]
struct Channel {
    i: f64,
    d_hi: f64,
    d_g: f64,
    d_lo: f64,
}

/// Charges (gate, high end, low end) and their derivatives (rows) with respect to
/// (high, gate, low) voltages (columns).
#[derive(Clone, Copy, Default)]
struct Charges {
    q: [f64; 3],
    dq: [[f64; 3]; 3],
}

impl SquareLawFet {
    /// A device with transconductance parameter `k` (A/V²) and threshold `threshold` (V;
    /// negative for an enhancement p device). No channel-length modulation, no charges.
    pub fn new(polarity: Polarity, k: f64, threshold: f64) -> Self {
        let vt_n = match polarity {
            Polarity::N => threshold,
            Polarity::P => -threshold,
        };
        SquareLawFet {
            polarity,
            k,
            vt_n,
            lambda: 0.0,
            gate_capacitance: 0.0,
        }
    }

    /// Sets the channel-length modulation `λ` (1/V).
    pub fn with_length_modulation(mut self, lambda: f64) -> Self {
        self.lambda = lambda;
        self
    }

    /// Adds Ward-Dutton intrinsic charges for a total gate capacitance `W L C_ox` (F).
    pub fn with_gate_capacitance(mut self, farads: f64) -> Self {
        self.gate_capacitance = farads;
        self
    }

    fn channel(&self, v_hi: f64, v_g: f64, v_lo: f64) -> Channel {
        let ov = v_g - v_lo - self.vt_n;
        let v = v_hi - v_lo;
        if ov <= 0.0 {
            return Channel::default();
        }
        let (f, f_ov, f_v) = if v < ov {
            (ov * v - 0.5 * v * v, v, ov - v)
        } else {
            (0.5 * ov * ov, ov, 0.0)
        };
        let m = 1.0 + self.lambda * v;
        let k = self.k;
        let d_g = k * f_ov * m;
        let d_v = k * (f_v * m + f * self.lambda);
        Channel {
            i: k * f * m,
            d_hi: d_v,
            d_g,
            d_lo: -d_g - d_v,
        }
    }

    fn charges(&self, v_hi: f64, v_g: f64, v_lo: f64) -> Charges {
        let cg = self.gate_capacitance;
        let s = v_g - v_lo - self.vt_n;
        if cg == 0.0 || s <= 0.0 {
            return Charges::default();
        }
        let lin = v_g - v_hi - self.vt_n > 0.0;
        let d = if lin { v_g - v_hi - self.vt_n } else { 0.0 };
        let b = s + d;
        let a = s * s + s * d + d * d;
        let qi = -(2.0 / 3.0) * cg * a / b;
        let qi_s = -(2.0 / 3.0) * cg * (s * s + 2.0 * s * d) / (b * b);
        let qi_d = -(2.0 / 3.0) * cg * (d * d + 2.0 * s * d) / (b * b);
        let num = 2.0 * s.powi(3) + 4.0 * s * s * d + 6.0 * s * d * d + 3.0 * d.powi(3);
        let num_s = 6.0 * s * s + 8.0 * s * d + 6.0 * d * d;
        let num_d = 4.0 * s * s + 12.0 * s * d + 9.0 * d * d;
        let c = -(2.0 / 15.0) * cg;
        let qh = c * num / (b * b);
        let qh_s = c * (num_s * b - 2.0 * num) / b.powi(3);
        let qh_d = c * (num_d * b - 2.0 * num) / b.powi(3);
        // ds/d(v_hi, v_g, v_lo) = (0, 1, -1); dd/d(...) = (-1, 1, 0) in the linear region.
        let ds = [0.0, 1.0, -1.0];
        let dd = if lin { [-1.0, 1.0, 0.0] } else { [0.0; 3] };
        let mut out = Charges {
            q: [-qi, qh, qi - qh],
            dq: [[0.0; 3]; 3],
        };
        for col in 0..3 {
            let dqi = qi_s * ds[col] + qi_d * dd[col];
            let dqh = qh_s * ds[col] + qh_d * dd[col];
            out.dq[0][col] = -dqi;
            out.dq[1][col] = dqh;
            out.dq[2][col] = dqi - dqh;
        }
        out
    }
}

impl Element for SquareLawFet {
    fn kind(&self) -> &'static str {
        match self.polarity {
            Polarity::N => "square-law n-FET",
            Polarity::P => "square-law p-FET",
        }
    }

    fn terminals(&self) -> &'static [&'static str] {
        PINS
    }

    fn has_charge(&self) -> bool {
        self.gate_capacitance != 0.0
    }

    fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
        // Mirror a p device onto the n evaluation: V -> -V, currents and charges negate,
        // derivatives keep their sign.
        let sign = match self.polarity {
            Polarity::N => 1.0,
            Polarity::P => -1.0,
        };
        let (vd, vg, vs) = (sign * x[0], sign * x[1], sign * x[2]);
        // Local rows: 0 drain, 1 gate, 2 source. Order the channel ends by potential.
        let (hi, lo) = if vd >= vs { (0usize, 2usize) } else { (2, 0) };
        let (v_hi, v_lo) = if hi == 0 { (vd, vs) } else { (vs, vd) };
        let ch = self.channel(v_hi, vg, v_lo);
        out.add_f(hi, sign * ch.i);
        out.add_f(lo, -sign * ch.i);
        let cols = [hi, 1, lo];
        let di = [ch.d_hi, ch.d_g, ch.d_lo];
        for (c, d) in cols.iter().zip(di) {
            out.add_df(hi, *c, d);
            out.add_df(lo, *c, -d);
        }
        if self.gate_capacitance != 0.0 {
            let qc = self.charges(v_hi, vg, v_lo);
            let rows = [1usize, hi, lo];
            for (r, row) in rows.iter().enumerate() {
                out.add_q(*row, sign * qc.q[r]);
                for (c, col) in cols.iter().enumerate() {
                    out.add_dq(*row, *col, qc.dq[r][c]);
                }
            }
        }
    }

    /// The region of the square law: `off` for `V_GS - V_T <= 0` (mirrored for a p device,
    /// source being the lower end), `linear` for `V_DS < V_GS - V_T`, else `saturation`.
    fn details(&self, x: &[f64]) -> Vec<lamina_engine::Detail> {
        let sign = match self.polarity {
            Polarity::N => 1.0,
            Polarity::P => -1.0,
        };
        let (vd, vg, vs) = (sign * x[0], sign * x[1], sign * x[2]);
        let (v_hi, v_lo) = if vd >= vs { (vd, vs) } else { (vs, vd) };
        let ov = vg - v_lo - self.vt_n;
        let region = if ov <= 0.0 {
            "off"
        } else if v_hi - v_lo < ov {
            "linear"
        } else {
            "saturation"
        };
        vec![
            lamina_engine::Detail {
                name: "region",
                value: lamina_engine::DetailValue::Word(region),
            },
            lamina_engine::Detail {
                name: "overdrive",
                value: lamina_engine::DetailValue::Number(ov, "V"),
            },
        ]
    }

    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn eval(fet: &SquareLawFet, v: [f64; 3]) -> ([f64; 3], [f64; 3], [f64; 9], [f64; 9]) {
        let (mut f, mut q, mut df, mut dq) = ([0.0; 3], [0.0; 3], [0.0; 9], [0.0; 9]);
        fet.evaluate(
            &v,
            &EvalContext::dc(),
            &mut Stamp::new(&mut f, &mut q, &mut df, &mut dq),
        );
        (f, q, df, dq)
    }

    /// Closed-form square law (Sze & Ng 2007, ch. 6) in all three regions, both polarities.
    #[test]
    fn currents_follow_the_square_law() {
        let n = SquareLawFet::new(Polarity::N, 2e-4, 0.3);
        assert_eq!(eval(&n, [1.0, 0.2, 0.0]).0[0], 0.0);
        let lin = eval(&n, [0.2, 0.8, 0.0]).0[0];
        assert!((lin - 2e-4 * (0.5 * 0.2 - 0.02)).abs() < 1e-18);
        let sat = eval(&n, [1.0, 0.8, 0.0]).0[0];
        assert!((sat - 2e-4 * 0.125).abs() < 1e-18);
        // Reversed: drain below source exchanges the roles.
        let rev = eval(&n, [0.0, 0.8, 1.0]).0;
        assert!((rev[0] + 2e-4 * 0.125).abs() < 1e-18 && (rev[2] - 2e-4 * 0.125).abs() < 1e-18);
        let p = SquareLawFet::new(Polarity::P, 2e-4, -0.3);
        // Source at 1 V, gate at 0.2 V (V_SG = 0.8), drain at 0: saturated, current out of drain.
        let ip = eval(&p, [0.0, 0.2, 1.0]).0[0];
        assert!((ip + 2e-4 * 0.125).abs() < 1e-18);
    }

    /// Jacobians against central differences in every region, with charges.
    #[test]
    fn derivatives_match_finite_differences() {
        for pol in [Polarity::N, Polarity::P] {
            let vt = if pol == Polarity::N { 0.3 } else { -0.3 };
            let fet = SquareLawFet::new(pol, 1e-4, vt)
                .with_length_modulation(0.1)
                .with_gate_capacitance(1e-15);
            let s = if pol == Polarity::N { 1.0 } else { -1.0 };
            for v in [
                [0.2, 0.8, 0.0],
                [1.0, 0.8, 0.1],
                [0.0, 0.9, 0.3],
                [0.3, 1.0, 0.9],
            ] {
                let v = v.map(|a| s * a);
                let (_, _, df, dq) = eval(&fet, v);
                for c in 0..3 {
                    let h = 1e-7;
                    let (mut up, mut dn) = (v, v);
                    up[c] += h;
                    dn[c] -= h;
                    let (fu, qu, _, _) = eval(&fet, up);
                    let (fd, qd, _, _) = eval(&fet, dn);
                    for r in 0..3 {
                        let gf = (fu[r] - fd[r]) / (2.0 * h);
                        let gq = (qu[r] - qd[r]) / (2.0 * h);
                        assert!(
                            (gf - df[r * 3 + c]).abs() < 1e-9 * 1e-4 + 1e-6 * gf.abs(),
                            "{pol:?} {v:?} df {r}{c}"
                        );
                        assert!(
                            (gq - dq[r * 3 + c]).abs() < 1e-24 + 1e-6 * gq.abs(),
                            "{pol:?} {v:?} dq {r}{c}"
                        );
                    }
                }
            }
        }
    }

    /// Ward-Dutton partition (Ward & Dutton 1978): drain share 0.4 in saturation, 0.5 at
    /// V_DS = 0, charges summing to zero.
    #[test]
    fn charge_partition_limits() {
        let fet = SquareLawFet::new(Polarity::N, 1e-4, 0.3).with_gate_capacitance(1e-15);
        let (_, q, _, _) = eval(&fet, [1.0, 0.8, 0.0]);
        let qi = q[0] + q[2];
        assert!((q[1] - 1e-15 * (2.0 / 3.0) * 0.5).abs() < 1e-30);
        assert!((q[0] / qi - 0.4).abs() < 1e-12);
        let (_, q, _, _) = eval(&fet, [0.0, 0.8, 0.0]);
        assert!((q[0] - q[2]).abs() < 1e-30 && (q[0] + 0.5e-15 * 0.5).abs() < 1e-28);
        let (_, q, _, _) = eval(&fet, [0.37, 0.9, 0.05]);
        assert!((q[0] + q[1] + q[2]).abs() < 1e-30);
    }
}
