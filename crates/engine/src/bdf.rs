//! Variable-order, variable-step backward differentiation formulas (orders 1 to 5) on the
//! charges: the coefficients, the error estimates at orders `k - 1`, `k` and `k + 1`, and the
//! choice of the order.
//!
//! # Formula (variable-coefficient form)
//! With `τ_0 = t_{n+1}` the new time and `τ_j = t_{n+1-j}` the last `k` accepted ones, order
//! `k` takes the charge rate at `t_{n+1}` as the derivative there of the polynomial through the
//! `k + 1` charges:
//!
//! `q'(t_{n+1}) ≈ Σ_{j=0..k} α_j q(τ_j)`, `α_j = ℓ_j'(τ_0)`,
//!
//! with `ℓ_j` the Lagrange basis polynomials on `τ_0 .. τ_k`:
//! `α_0 = Σ_{j=1..k} 1 / (τ_0 - τ_j)` and, for `j ≥ 1`,
//! `α_j = Π_{m≠0,j} (τ_0 - τ_m) / Π_{m≠j} (τ_j - τ_m)`. At equal steps these are the classical
//! coefficients (order 2: `(3/2, -2, 1/2) / h`; order 3: `(11/6, -3, 3/2, -1/3) / h`). The
//! coefficients are recomputed from the actual step history at every step, so a step change
//! needs no interpolation of the history (the variable-coefficient form of R. K. Brayton,
//! F. G. Gustavson, G. D. Hachtel, A new efficient algorithm for solving differential-algebraic
//! systems using implicit backward differentiation formulas, Proc. IEEE 60, 98, 1972; E. Hairer,
//! G. Wanner, Solving Ordinary Differential Equations II, 2nd ed., 1996, sect. III.5 and V.1,
//! recalled from memory). The coefficients sum to zero (a constant has no rate), so a row
//! with no current keeps its charge to rounding whatever the order: a floating node conserves
//! charge. Orders 1 and 2 are L-stable; orders 3 to 5 are stable outside a sector about the
//! imaginary axis (half-angles about 86°, 73° and 52°, Hairer & Wanner II, sect. V.2), which
//! covers the real, damped eigenvalues of logic circuits; the truncation-error test guards the
//! rest.
//!
//! # Error estimates
//! Write `P_j = Π_{i=1..j} (τ_0 - τ_i)` and `D_j` for the divided difference of the charges
//! over `τ_0 .. τ_j` (the new point included). The exact solution satisfies the order-`j`
//! formula up to the residual `P_j q^{(j+1)} / (j+1)!`, so the order-`j` local error is
//!
//! `LTE_j ≈ P_j / α_0^{(j)} · q^{(j+1)} / (j+1)! ≈ P_j / α_0^{(j)} · D_{j+1}`
//!
//! (at equal steps `h^{j+1} q^{(j+1)} / ((j+1) H_j)` with `H_j = 1 + 1/2 + .. + 1/j`: `h²/2 q''`
//! for backward Euler, `2/9 h³ q'''` for order 2). The new point is the corrector's answer,
//! which carries the order-`k` error `e_k` itself; it enters `D_j` with weight `1 / P_j`, so
//! the differences are corrected by it, `D_j^* = D_j - e_k / P_j`. For `j = k` this makes
//! `e_k = P_{k+1} D_{k+1} / (1 + α_0^{(k)} (τ_0 - τ_{k+1}))`, Milne's device of the `stepping`
//! module with the predictor through `k + 1` old points (the fraction is `1/3` for backward
//! Euler and `2/11` for order 2 at equal steps); the estimates at `k ± 1` then use `D_k^*` and
//! `D_{k+2}^*`. Without that correction the order-`k+1` estimate would carry about a seventh of
//! `e_k` and would rarely let the order rise.
//!
//! # Order selection
//! After an accepted step at order `k` that followed at least `k + 1` steps at that order (so
//! the differences span steps of the same formula), each candidate order `j ∈ {k-1, k, k+1}`
//! with an estimate (`k + 1` needs `k + 2` old points) would allow the step factor
//! `η_j = (θ / r_j)^{1/(j+1)}`, `r_j` the worst ratio of estimate to tolerance over the charge
//! rows and `θ` the step controller's set point. The order moves down when `η_{k-1} ≥ η_k` and
//! up when `η_{k+1} ≥ RAISE_MARGIN · η_k`; the next step is then `h η_j` (the controller's
//! memory restarts, as its ratios belonged to the other order). Otherwise the
//! proportional-integral controller chooses the step at order `k`. A rejected step lowers the
//! order when order `k - 1` would have allowed the longer retry. This is the rule of the
//! multistep codes that choose the order by the step it allows (Hairer & Wanner II, sect.
//! III.7 of the first volume's method of order selection, recalled from memory); the margin
//! and the wait were chosen by measurement (DEVELOPERS.md, "Stepping"). Every breakpoint and
//! t = 0 restart at order 1.

use crate::stepping::MIN_CHANGE;

/// Highest order used.
pub(crate) const MAX_ORDER: usize = 5;
/// Accepted points the history keeps: the highest order's estimate needs one more than its
/// formula.
pub(crate) const HISTORY: usize = MAX_ORDER + 1;

/// How much longer a step order `k + 1` must allow before the order rises.
const RAISE_MARGIN: f64 = 1.1;
/// The step controller's set point for this formula (a quarter of the fixed-order formulas'
/// 0.45): its estimates of high derivatives jump when a further stage of a ring starts to
/// switch, and the headroom keeps those steps from being rejected.
pub(crate) const TARGET: f64 = 0.11;
/// Largest growth of the step when the order changes (the new order's ratios are not yet
/// smoothed by the controller).
const CHANGE_GROWTH: f64 = 1.2;

/// `α_0 .. α_k` of the order-`k` formula at `t_new` over the accepted times `t` (newest first,
/// at least `k` of them): the rate is `α_0 q_{n+1} + Σ_{j≥1} α_j q(t[j-1])`.
pub(crate) fn coefficients(t_new: f64, t: &[f64], k: usize) -> [f64; MAX_ORDER + 1] {
    let mut alpha = [0.0; MAX_ORDER + 1];
    let tau = |j: usize| if j == 0 { t_new } else { t[j - 1] };
    for j in 1..=k {
        alpha[0] += 1.0 / (t_new - tau(j));
        let mut num = 1.0;
        let mut den = 1.0;
        for m in 0..=k {
            if m != j {
                den *= tau(j) - tau(m);
                if m != 0 {
                    num *= t_new - tau(m);
                }
            }
        }
        alpha[j] = num / den;
    }
    alpha
}

/// The worst ratios of estimated local error to tolerance over the charge rows at orders
/// `k - 1`, `k` and `k + 1`, for a step taken at order `k` (`None` where the history is too
/// short, or for order 0).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(crate) struct Ratios {
    pub(crate) lower: Option<f64>,
    pub(crate) same: f64,
    pub(crate) higher: Option<f64>,
}

/// The divided differences of one charge row over the accepted points, in Newton's form:
/// entry `j` is `q[t_n, .., t_{n-j}]`. Kept per row, they make a step's differences cost `O(k)`
/// per row instead of `O(k²)`: the new point's are `D_0 = q_{n+1}`,
/// `D_j = (D_{j-1} - φ_{j-1}) / (t_{n+1} - t_{n+1-j})`, and they are the next step's `φ`.
pub(crate) type Differences = [f64; HISTORY];

/// The new point's divided differences `D_0 ..= D_m` from the old ones `phi` (newest point
/// first) and the reciprocals `inv[j] = 1 / (t_{n+1} - t_{n+1-j})`.
#[inline]
fn extend(q_new: f64, phi: &Differences, inv: &[f64], m: usize, d: &mut [f64; HISTORY + 1]) {
    d[0] = q_new;
    for j in 1..=m {
        d[j] = (d[j - 1] - phi[j - 1]) * inv[j];
    }
}

/// What an accepted point at `t_new` needs to update every row's differences, with `valid`
/// old points at `t` (newest first).
pub(crate) struct Accept {
    m: usize,
    inv: [f64; HISTORY + 1],
}

impl Accept {
    pub(crate) fn new(t_new: f64, t: &[f64], valid: usize) -> Self {
        let m = valid.min(HISTORY - 1);
        let mut inv = [0.0; HISTORY + 1];
        for j in 1..=m {
            inv[j] = 1.0 / (t_new - t[j - 1]);
        }
        Accept { m, inv }
    }

    /// Updates one row's differences for its accepted charge `q_new`.
    #[inline]
    pub(crate) fn row(&self, q_new: f64, phi: &mut Differences) {
        let mut d = [0.0; HISTORY + 1];
        extend(q_new, phi, &self.inv, self.m, &mut d);
        phi.copy_from_slice(&d[..HISTORY]);
    }
}

/// Per-step constants of the estimates (module doc): for `j` up to the old points used,
/// `P_j`, `α_0^{(j)}` and `1 / (τ_0 - τ_j)`.
pub(crate) struct Estimator {
    k: usize,
    m: usize,
    inv: [f64; HISTORY + 1],
    /// `e_k = milne · D_{k+1}`.
    milne: f64,
    /// `LTE_j = |scale_j (D_{j+1} - e_k weight_j)|` with `scale_j = P_j / α_0^{(j)}` and
    /// `weight_j = 1 / P_{j+1}`.
    scale: [f64; HISTORY + 1],
    weight: [f64; HISTORY + 1],
}

impl Estimator {
    /// For a step from the accepted times `t` (newest first, `valid` of them) to `t_new` at
    /// order `k`; needs `valid >= k + 1`.
    pub(crate) fn new(t_new: f64, t: &[f64], valid: usize, k: usize) -> Self {
        let wanted = if k < MAX_ORDER { k + 2 } else { k + 1 };
        let m = valid.min(wanted).min(HISTORY);
        let mut prod = [1.0; HISTORY + 1];
        let mut alpha0 = [0.0; HISTORY + 1];
        let mut inv = [0.0; HISTORY + 1];
        for j in 1..=m {
            inv[j] = 1.0 / (t_new - t[j - 1]);
            prod[j] = prod[j - 1] * (t_new - t[j - 1]);
            alpha0[j] = alpha0[j - 1] + inv[j];
        }
        let mut scale = [0.0; HISTORY + 1];
        let mut weight = [0.0; HISTORY + 1];
        for j in 1..m {
            scale[j] = prod[j] / alpha0[j];
            weight[j] = 1.0 / prod[j + 1];
        }
        Estimator {
            k,
            m,
            inv,
            milne: prod[k + 1] / (1.0 + alpha0[k] * (t_new - t[k])),
            scale,
            weight,
        }
    }

    /// The signed order-`k` error and the magnitudes of the order `k - 1` and `k + 1` estimates
    /// (0 where there is none) of one row whose new charge is `q_new` and whose differences
    /// over the old points are `phi`.
    #[inline]
    pub(crate) fn row(&self, q_new: f64, phi: &Differences) -> (f64, f64, f64) {
        let (k, m) = (self.k, self.m);
        let mut d = [0.0; HISTORY + 1];
        extend(q_new, phi, &self.inv, m, &mut d);
        let e = d[k + 1] * self.milne;
        let lte = |j: usize| (self.scale[j] * (d[j + 1] - e * self.weight[j])).abs();
        let lower = if self.has_lower() { lte(k - 1) } else { 0.0 };
        let higher = if self.has_higher() { lte(k + 1) } else { 0.0 };
        (e, lower, higher)
    }

    /// Whether the estimate at `k - 1` exists.
    pub(crate) fn has_lower(&self) -> bool {
        self.k >= 2
    }

    /// Whether the estimate at `k + 1` exists.
    pub(crate) fn has_higher(&self) -> bool {
        self.m >= self.k + 2
    }
}

/// The order state of a variable-order run (module doc, "Order selection").
#[derive(Clone, Copy, Debug)]
pub(crate) struct OrderControl {
    order: usize,
    /// Accepted steps since the order last changed.
    steady: usize,
}

impl Default for OrderControl {
    fn default() -> Self {
        OrderControl {
            order: 1,
            steady: 0,
        }
    }
}

/// The step factor an error ratio `r` allows at order `j` towards the set point `target`.
fn factor(target: f64, r: f64, j: usize) -> f64 {
    (target / r.max(1e-10)).powf(1.0 / (j + 1) as f64)
}

impl OrderControl {
    /// The order the next step asks for.
    pub(crate) fn order(&self) -> usize {
        self.order
    }

    /// Back to order 1 (t = 0, a breakpoint).
    pub(crate) fn reset(&mut self) {
        *self = OrderControl::default();
    }

    /// After an accepted step at order `k` with ratios `r`: the step factor of the new order
    /// when the order changes (at most [`CHANGE_GROWTH`]; the caller restarts the step
    /// controller), `None` to keep it.
    pub(crate) fn accepted(&mut self, k: usize, r: &Ratios) -> Option<f64> {
        self.steady += 1;
        if k != self.order || self.steady < k + 1 {
            return None;
        }
        let same = factor(TARGET, r.same, k);
        let down = r.lower.map(|v| factor(TARGET, v, k - 1));
        let up = r.higher.map(|v| factor(TARGET, v, k + 1));
        let (order, f) = if let Some(f) = down.filter(|&f| f >= same) {
            (k - 1, f)
        } else if let Some(f) = up.filter(|&f| f >= RAISE_MARGIN * same && k < MAX_ORDER) {
            (k + 1, f)
        } else {
            return None;
        };
        self.change(order);
        Some(f.clamp(MIN_CHANGE, CHANGE_GROWTH))
    }

    /// After a rejected step at order `k`: lowers the order when order `k - 1` allows the
    /// longer retry.
    pub(crate) fn rejected(&mut self, k: usize, r: &Ratios) {
        if let Some(lower) = r.lower {
            if k >= 2 && k == self.order && factor(1.0, lower, k - 1) > factor(1.0, r.same, k) {
                self.change(k - 1);
            }
        }
    }

    fn change(&mut self, order: usize) {
        self.order = order;
        self.steady = 0;
    }
}
