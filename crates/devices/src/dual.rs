//! A number with its gradient with respect to three voltages (forward-mode differentiation),
//! so the device's Jacobian is exact and consistent with its currents and charges.

use std::ops::{Add, Div, Mul, Neg, Sub};

/// `v` and `∂v/∂(x0, x1, x2)`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct D3 {
    /// Value.
    pub v: f64,
    /// Partial derivatives.
    pub d: [f64; 3],
}

impl D3 {
    /// A constant.
    #[inline]
    pub fn c(v: f64) -> Self {
        D3 { v, d: [0.0; 3] }
    }

    /// The `k`-th independent variable at value `v`.
    #[inline]
    pub fn var(v: f64, k: usize) -> Self {
        let mut d = [0.0; 3];
        d[k] = 1.0;
        D3 { v, d }
    }

    /// `f(self)` given `f` and `f'` at `self.v`.
    #[inline]
    pub fn chain(self, f: f64, df: f64) -> Self {
        D3 {
            v: f,
            d: [df * self.d[0], df * self.d[1], df * self.d[2]],
        }
    }

    /// Square root.
    #[inline]
    pub fn sqrt(self) -> Self {
        let r = self.v.sqrt();
        self.chain(r, 0.5 / r)
    }

    /// `self^p` for `self > 0`.
    #[inline]
    pub fn powf(self, p: f64) -> Self {
        let r = self.v.powf(p);
        self.chain(r, p * r / self.v)
    }
}

impl Add for D3 {
    type Output = D3;
    #[inline]
    fn add(self, o: D3) -> D3 {
        D3 {
            v: self.v + o.v,
            d: [self.d[0] + o.d[0], self.d[1] + o.d[1], self.d[2] + o.d[2]],
        }
    }
}

impl Sub for D3 {
    type Output = D3;
    #[inline]
    fn sub(self, o: D3) -> D3 {
        D3 {
            v: self.v - o.v,
            d: [self.d[0] - o.d[0], self.d[1] - o.d[1], self.d[2] - o.d[2]],
        }
    }
}

impl Neg for D3 {
    type Output = D3;
    #[inline]
    fn neg(self) -> D3 {
        D3 {
            v: -self.v,
            d: [-self.d[0], -self.d[1], -self.d[2]],
        }
    }
}

impl Mul for D3 {
    type Output = D3;
    #[inline]
    fn mul(self, o: D3) -> D3 {
        D3 {
            v: self.v * o.v,
            d: [
                self.d[0] * o.v + self.v * o.d[0],
                self.d[1] * o.v + self.v * o.d[1],
                self.d[2] * o.v + self.v * o.d[2],
            ],
        }
    }
}

impl Mul<f64> for D3 {
    type Output = D3;
    #[inline]
    fn mul(self, k: f64) -> D3 {
        D3 {
            v: self.v * k,
            d: [self.d[0] * k, self.d[1] * k, self.d[2] * k],
        }
    }
}

impl Div for D3 {
    type Output = D3;
    #[inline]
    fn div(self, o: D3) -> D3 {
        let inv = 1.0 / o.v;
        let r = self.v * inv;
        D3 {
            v: r,
            d: [
                (self.d[0] - r * o.d[0]) * inv,
                (self.d[1] - r * o.d[1]) * inv,
                (self.d[2] - r * o.d[2]) * inv,
            ],
        }
    }
}
