//! Step control for the transient: the predictor, the truncation-error estimate and the step
//! controller.
//!
//! # Predictor and error estimate (Milne's device)
//! Newton starts each step from the polynomial through the last accepted points, extrapolated
//! to the new time: as many points as the formula's order plus one (linear for backward Euler,
//! quadratic for the trapezoidal rule and BDF2, `k + 1` points for the variable-order formula
//! at order `k`), fewer just after a restart. The variable-order formula's estimates are in the
//! `bdf` module (the same device, from divided differences, at three orders). The same
//! polynomial, applied to the charges, predicts `q^P`; the corrector's answer `q^C` differs from
//! it by (with `p` the order, `t_j` the points used, `C` the formula's error constant in
//! `q^C - q(t_{n+1}) ≈ C h^{p+1} q^{(p+1)}`)
//!
//! `q^C - q^P ≈ (C h^{p+1} + Π_j (t_{n+1} - t_j) / (p+1)!) q^{(p+1)}`,
//!
//! so the local truncation error `|C h^{p+1} q^{(p+1)}|` is the fraction
//! `C h^{p+1} / (C h^{p+1} + Π / (p+1)!)` of the predictor-corrector difference. This is
//! Milne's device (W. E. Milne, Numerical Solution of Differential Equations, 1953; in the
//! variable-step form of E. Hairer, S. P. Nørsett, G. Wanner, Solving Ordinary Differential
//! Equations I, 2nd ed., 1993, sect. III.5; recalled from memory). `q^C - q^P` is exactly
//! `Π (t_{n+1} - t_j)` times the divided difference of the charges over the new point and the
//! old ones, so the estimate is that of Brayton, Gustavson and Hachtel (Proc. IEEE 60, 1972)
//! with the new point included; it is the error of this step, not of a window that lags it.
//! The constants (derived by Taylor expansion about `t_{n+1}`): backward Euler `h²/2 q''`,
//! trapezoidal `h³/12 q'''`, variable-step BDF2 `h² (h + h_{n-1})² / (6 (2h + h_{n-1})) q'''`
//! (`2/9 h³ q'''` at equal steps).
//!
//! # Controller
//! With `r_n` the worst ratio of estimate to tolerance over the charge rows and `k = p + 1`
//! the exponent of the estimate, an accepted step is followed by the proportional-integral
//! rule
//!
//! `h_{n+1} = h_n · (θ / r_n)^{k_I / k} · (r_{n-1} / r_n)^{k_P / k}`
//!
//! (K. Gustafsson, Control theoretic techniques for stepsize selection in explicit Runge-Kutta
//! methods, ACM TOMS 17, 1991, and ... in implicit Runge-Kutta methods, ACM TOMS 20, 1994;
//! recalled from memory). On the model `r = φ h^k` the logarithm of the step obeys
//! `z² - (1 - k_I - k_P) z - k_P = 0`; with `k_I = 0.6`, `k_P = 0.3` its roots are 0.6 and
//! -0.5, so the step sequence settles without the oscillation of the elementary rule
//! (`k_I = 1`, `k_P = 0`), whose near misses repeat at the same phase of every edge. The
//! set point `θ = 0.45` is the ratio the controller settles at. The first accepted step after
//! a restart uses the elementary rule `h (θ / r)^{1/k}`. A rejected step is retried at
//! `h · min(0.9 r^{-1/k}, 0.9)` (at least `0.1 h`), never at its own length, and the
//! controller's memory restarts after a rejection, a Newton failure or a breakpoint. An
//! accepted step grows at most 2x and shrinks at most 4x. The gains, set point and bounds
//! were chosen by measurement on the square-law and 2D-FET rings at the default tolerances
//! (DEVELOPERS.md, "Stepping").
//!
//! # Newton acceptance
//! Newton starts at the predictor, so its first update `Δ_1` is about the predictor's error.
//! After an update from an exact Jacobian the error left is about `m ‖Δ‖²` (quadratic
//! convergence), with `‖·‖` the largest ratio of update to Newton update tolerance. `m` is
//! measured whenever a step takes two iterations (`‖Δ_2‖ / ‖Δ_1‖²`) and raised by 10 % for
//! each step solved in one, so it is measured again within a few dozen steps. The transient
//! accepts an update that is within the Newton update tolerances when either the residual
//! before it passed (the ordinary test) or `m ‖Δ‖² ≤ κ`, `κ = min(1, lte_reltol / reltol)`:
//! the measured constant stands in for the residual test only, never for the update test, so
//! every accepted state is within the Newton tolerances on every equation, including those
//! with no charge for the truncation-error test to watch. The charges stored are those of the accepted
//! unknowns, carried to first order along the last update as before.

use crate::bdf::HISTORY;
use crate::system::NewtonInfo;

/// Growth of the quadratic-convergence constant per step solved in one iteration.
const QUADRATIC_DRIFT: f64 = 1.1;
/// Smallest quadratic-convergence constant trusted (a linear circuit measures 0).
const QUADRATIC_FLOOR: f64 = 1e-6;

/// The error ratio the controller aims at (the integral term's set point).
const TARGET: f64 = 0.45;
/// Integral and proportional gains times `k`.
const KI: f64 = 0.6;
const KP: f64 = 0.3;
/// Largest growth and shrink per accepted step.
const MAX_GROWTH: f64 = 2.0;
pub(crate) const MIN_CHANGE: f64 = 0.25;
/// Safety factor and bounds of the retry after a rejection.
const REJECT_SAFETY: f64 = 0.9;
const REJECT_MIN: f64 = 0.1;
const REJECT_MAX: f64 = 0.9;

/// The proportional-integral step controller (see the module doc).
#[derive(Clone, Copy, Debug)]
pub(crate) struct Controller {
    /// The error ratio of the previous accepted step, when it counts.
    prev: Option<f64>,
    /// The set point θ.
    target: f64,
}

impl Default for Controller {
    fn default() -> Self {
        Controller::with_target(TARGET)
    }
}

impl Controller {
    /// A controller aiming at the error ratio `target` (the variable-order formula uses its
    /// own, `bdf::TARGET`).
    pub(crate) fn with_target(target: f64) -> Self {
        Controller { prev: None, target }
    }

    /// The step after an accepted step of length `step` with error ratio `ratio` and
    /// estimate exponent `k`.
    pub(crate) fn accepted(&mut self, step: f64, ratio: f64, k: f64) -> f64 {
        let r = ratio.max(1e-10);
        let factor = match self.prev {
            Some(prev) => (self.target / r).powf(KI / k) * (prev / r).powf(KP / k),
            None => (self.target / r).powf(1.0 / k),
        };
        self.prev = Some(r);
        step * factor.clamp(MIN_CHANGE, MAX_GROWTH)
    }

    /// The retry after a rejected step.
    pub(crate) fn rejected(&mut self, step: f64, ratio: f64, k: f64) -> f64 {
        self.prev = None;
        step * (REJECT_SAFETY * ratio.powf(-1.0 / k)).clamp(REJECT_MIN, REJECT_MAX)
    }

    /// Forgets the previous ratio (after a breakpoint or a Newton failure).
    pub(crate) fn reset(&mut self) {
        self.prev = None;
    }
}

/// The quadratic-convergence constant the next step's Newton solve may use, from this step's
/// solve: the measurement when it took two iterations or more; otherwise the previous
/// constant raised by [`QUADRATIC_DRIFT`], so that a measurement is taken again within a few
/// dozen steps.
pub(crate) fn next_quadratic(prev: Option<f64>, info: &NewtonInfo) -> Option<f64> {
    match info.quadratic {
        Some(m) => Some(m.max(QUADRATIC_FLOOR)),
        None => prev.map(|m| m * QUADRATIC_DRIFT),
    }
}

/// Weights `w_j` of the polynomial through the points `t[j]` (newest first, `m` of them, 1 to
/// [`HISTORY`]), evaluated at `t_new`: the prediction is `Σ w_j y_j` (Lagrange's form).
pub(crate) fn extrapolation_weights(t_new: f64, t: &[f64], m: usize) -> [f64; HISTORY] {
    let mut w = [0.0; HISTORY];
    for (j, wj) in w.iter_mut().enumerate().take(m.max(1)) {
        let mut v = 1.0;
        for (i, ti) in t.iter().enumerate().take(m) {
            if i != j {
                v *= (t_new - ti) / (t[j] - ti);
            }
        }
        *wj = v;
    }
    w
}

/// `out = Σ_{j < m} w_j points_j`: the prediction from the newest `m` points.
pub(crate) fn predict_into(w: &[f64], points: &[Vec<f64>], m: usize, out: &mut [f64]) {
    out.fill(0.0);
    for (wj, pj) in w.iter().zip(points).take(m) {
        for (o, v) in out.iter_mut().zip(pj) {
            *o += wj * v;
        }
    }
}

/// [`predict_into`] on the entries `subset` only, when given (the others keep their values);
/// each entry is summed in the same order, so the values agree bit for bit.
pub(crate) fn predict_subset(
    w: &[f64],
    points: &[Vec<f64>],
    m: usize,
    subset: Option<&[usize]>,
    out: &mut [f64],
) {
    let Some(list) = subset else {
        return predict_into(w, points, m, out);
    };
    for &i in list {
        let mut v = 0.0;
        for (wj, pj) in w.iter().zip(points).take(m) {
            v += wj * pj[i];
        }
        out[i] = v;
    }
}

/// The fraction of the predictor-corrector difference that is the local truncation error, for
/// a step `h` whose predictor used the points `t[..m]` (newest first) and a corrector whose
/// error is `coef · q^{(m)}` (see the module doc).
pub(crate) fn milne_fraction(t_new: f64, t: &[f64], m: usize, coef: f64) -> f64 {
    let mut prod = 1.0;
    let mut fact = 1.0;
    for (j, tj) in t.iter().take(m).enumerate() {
        prod *= t_new - tj;
        fact *= (j + 1) as f64;
    }
    coef / (coef + prod / fact)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extrapolation_is_exact_for_polynomials_of_its_degree() {
        let t = [3.0, 1.5, 1.0];
        let f = |x: f64| 2.0 - 0.5 * x + 0.25 * x * x;
        let w = extrapolation_weights(4.0, &t, 3);
        let p: f64 = (0..3).map(|j| w[j] * f(t[j])).sum();
        assert!((p - f(4.0)).abs() < 1e-12);
        let g = |x: f64| 1.0 + 3.0 * x;
        let w = extrapolation_weights(4.0, &t, 2);
        let p: f64 = (0..2).map(|j| w[j] * g(t[j])).sum();
        assert!((p - g(4.0)).abs() < 1e-12);
        assert_eq!(extrapolation_weights(4.0, &t, 1)[..3], [1.0, 0.0, 0.0]);
    }

    /// Equal steps: the trapezoidal rule's estimate is 1/13 of the difference from the
    /// quadratic predictor, backward Euler's 1/3 of that from the linear one (Taylor
    /// expansion; the Milne constants of the module doc).
    #[test]
    fn milne_fractions_at_equal_steps() {
        let h = 0.1;
        let t = [1.0, 0.9, 0.8];
        let tr = milne_fraction(1.1, &t, 3, h * h * h / 12.0);
        assert!((tr - 1.0 / 13.0).abs() < 1e-12, "{tr}");
        let be = milne_fraction(1.1, &t, 2, h * h / 2.0);
        assert!((be - 1.0 / 3.0).abs() < 1e-12, "{be}");
    }

    /// The estimate recovers the true local error of the trapezoidal rule exactly on a cubic
    /// charge, whose third derivative is constant.
    #[test]
    fn milne_estimate_recovers_the_trapezoidal_error_on_a_cubic() {
        // q(t) = t³: q''' = 6. One trapezoidal step from exact history with exact rates:
        // q_{n+1} = q_n + h/2 (q'_n + q'_{n+1}) has error h³/12 · 6 = h³/2 exactly.
        let (h, h1, h2) = (0.2, 0.1, 0.15);
        let t0 = 1.0;
        let t = [t0, t0 - h1, t0 - h1 - h2];
        let tn = t0 + h;
        let q = |x: f64| x * x * x;
        let dq = |x: f64| 3.0 * x * x;
        let qc = q(t0) + 0.5 * h * (dq(t0) + dq(tn));
        let w = extrapolation_weights(tn, &t, 3);
        let qp: f64 = (0..3).map(|j| w[j] * q(t[j])).sum();
        let est = milne_fraction(tn, &t, 3, h * h * h / 12.0) * (qc - qp).abs();
        let truth = (qc - q(tn)).abs();
        assert!((est / truth - 1.0).abs() < 1e-9, "{est} {truth}");
    }

    #[test]
    fn the_controller_damps_and_bounds_the_step() {
        let mut c = Controller::default();
        // First accepted step: elementary rule.
        let h1 = c.accepted(1.0, 0.5, 3.0);
        assert!((h1 - (TARGET / 0.5f64).powf(1.0 / 3.0)).abs() < 1e-12);
        // At the set point with an unchanged ratio, the step stays.
        assert!((c.accepted(1.0, 0.5, 3.0) - (TARGET / 0.5f64).powf(KI / 3.0)).abs() < 1e-12);
        assert!((c.accepted(1.0, TARGET, 3.0) - (0.5 / TARGET).powf(KP / 3.0)).abs() < 1e-12);
        assert!((c.accepted(1.0, TARGET, 3.0) - 1.0).abs() < 1e-12);
        // Growth is bounded.
        assert_eq!(c.accepted(1.0, 1e-9, 3.0), MAX_GROWTH);
        // A rejection never retries at the same length.
        assert!(c.rejected(1.0, 1.01, 3.0) <= REJECT_MAX);
        assert!(c.rejected(1.0, 1e9, 3.0) >= REJECT_MIN);
    }
}
