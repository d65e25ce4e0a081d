//! A number with its derivatives with respect to the channel's two end potentials
//! `u_s = V_G - V_S` and `u_d = V_G - V_D`.
//!
//! The intrinsic channel depends on its three terminal voltages only through these two, so its
//! evaluation carries two partial derivatives instead of three and maps them to the terminals
//! once at the end ([`Ends::terminals`]): `∂/∂V_D = -∂/∂u_d`, `∂/∂V_G = ∂/∂u_s + ∂/∂u_d`,
//! `∂/∂V_S = -∂/∂u_s`. Forward-mode, like [`crate::dual::D3`], so the Jacobian is exactly the
//! derivative of what is returned.

use crate::dual::D3;
use std::ops::{Add, Div, Mul, Sub};

/// `v` with `[∂v/∂u_s, ∂v/∂u_d]`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Ends {
    pub v: f64,
    pub d: [f64; 2],
}

impl Ends {
    /// A constant.
    #[inline]
    pub fn c(v: f64) -> Self {
        Ends { v, d: [0.0; 2] }
    }

    /// `u_s` (`end` 0) or `u_d` (`end` 1) at value `v`.
    #[inline]
    pub fn end(v: f64, end: usize) -> Self {
        let mut d = [0.0; 2];
        d[end] = 1.0;
        Ends { v, d }
    }

    /// `f(self)` given `f` and `f'` at `self.v`.
    #[inline]
    pub fn chain(self, f: f64, df: f64) -> Self {
        Ends {
            v: f,
            d: self.d.map(|x| df * x),
        }
    }

    /// The same number with its derivatives with respect to `(V_D, V_G, V_S)`.
    #[inline]
    pub fn terminals(self) -> D3 {
        let [s, d] = self.d;
        D3 {
            v: self.v,
            d: [-d, s + d, -s],
        }
    }
}

impl Add for Ends {
    type Output = Ends;
    #[inline]
    fn add(self, o: Ends) -> Ends {
        Ends {
            v: self.v + o.v,
            d: [self.d[0] + o.d[0], self.d[1] + o.d[1]],
        }
    }
}

impl Sub for Ends {
    type Output = Ends;
    #[inline]
    fn sub(self, o: Ends) -> Ends {
        Ends {
            v: self.v - o.v,
            d: [self.d[0] - o.d[0], self.d[1] - o.d[1]],
        }
    }
}

impl Mul for Ends {
    type Output = Ends;
    #[inline]
    fn mul(self, o: Ends) -> Ends {
        Ends {
            v: self.v * o.v,
            d: [
                self.d[0] * o.v + self.v * o.d[0],
                self.d[1] * o.v + self.v * o.d[1],
            ],
        }
    }
}

impl Mul<f64> for Ends {
    type Output = Ends;
    #[inline]
    fn mul(self, k: f64) -> Ends {
        self.chain(self.v * k, k)
    }
}

impl Div for Ends {
    type Output = Ends;
    #[inline]
    fn div(self, o: Ends) -> Ends {
        let inv = 1.0 / o.v;
        let r = self.v * inv;
        Ends {
            v: r,
            d: [
                (self.d[0] - r * o.d[0]) * inv,
                (self.d[1] - r * o.d[1]) * inv,
            ],
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The terminal derivatives of `f(u_s, u_d) = u_s² u_d` at `V_D = 0.3`, `V_G = 1`,
    /// `V_S = 0.1` against the same function in three-voltage form.
    #[test]
    fn terminal_derivatives_match_three_voltage_form() {
        let (vd, vg, vs) = (0.3, 1.0, 0.1);
        let us = Ends::end(vg - vs, 0);
        let ud = Ends::end(vg - vd, 1);
        let two = (us * us * ud).terminals();
        let (d, g, s) = (D3::var(vd, 0), D3::var(vg, 1), D3::var(vs, 2));
        let (us3, ud3) = (g - s, g - d);
        let three = us3 * us3 * ud3;
        assert!((two.v - three.v).abs() < 1e-15);
        for k in 0..3 {
            assert!((two.d[k] - three.d[k]).abs() < 1e-15, "{k}");
        }
    }
}
