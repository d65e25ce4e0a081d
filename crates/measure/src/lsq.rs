//! Bounded nonlinear least squares with the statistics a calibration needs: standard errors,
//! correlations and the parameter combinations the data cannot determine.
//!
//! # Problem
//! Minimise `½ Σ r_i(p)²` over parameters `p_k` in `[lo_k, hi_k]`. Each parameter is fitted
//! in its natural variable `y_k`: `ln p_k` for a log-scaled parameter (mobilities, densities,
//! resistances: relative changes matter), `p_k` otherwise (work functions, voltages). The
//! bounds are imposed by the smooth map `y = a + (b - a) / (1 + e^(-z))` of an unbounded `z`,
//! so the solver never leaves the box.
//!
//! # Solver
//! The Levenberg-Marquardt trust-region method of the `levenberg-marquardt` crate (a port of
//! the MINPACK `lmder` algorithm: J. J. Moré, "The Levenberg-Marquardt algorithm:
//! implementation and theory", Lecture Notes in Mathematics 630, 105, 1978). It was chosen over
//! `argmin` because it is a single well-tested method with the scaled trust region and
//! convergence tests we want, on `nalgebra`, which the workspace already builds; `argmin`'s
//! dense backends would pull a second linear-algebra stack. The Jacobian is by central
//! differences in `z` (step `1e-4`, two residual evaluations per parameter). Several starts,
//! when asked, are spread deterministically over the box (a Halton sequence in `z`): the same
//! input gives the same fit.
//!
//! # Statistics at the optimum
//! With `J` the Jacobian in `y` (central differences, step `1e-4` of the box in `y`), `m`
//! residuals and `n` parameters, `s² = Σ r² / (m - n)` and the covariance of `y` is
//! `s² (JᵀJ)⁻¹` (the usual linearised estimate: e.g. W. H. Press et al., *Numerical Recipes*,
//! 3rd ed., 2007, §15.5). A log-scaled parameter's standard error is `p σ_y`. Parameters at a
//! bound (within 1e-6 of the box in `y`) get none: the linearisation does not hold there.
//!
//! Identifiability: the columns of `J` are scaled to unit length and decomposed by singular
//! values. A right singular vector whose singular value is below `1e-3` of the largest, or
//! along which the standard error of `y` exceeds [`UNDETERMINED`] (a factor `e` for
//! log-scaled parameters; in the parameter's own unit otherwise) is a combination the data cannot determine; the parameters with a weight of at least 0.3 in it
//! are named. Pairs of parameters with `|correlation| >= 0.95` are listed as well.

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::{DMatrix, DVector, Dyn, Owned};
use std::cell::RefCell;

/// Standard error along a singular direction above which the direction counts as undetermined
/// (in `y` units: 1 is a factor `e` for a log-scaled parameter).
pub const UNDETERMINED: f64 = 1.0;

/// One fitted parameter.
#[derive(Clone, Debug, PartialEq)]
pub struct Param {
    /// Name, as reported.
    pub name: String,
    /// Lower bound (> 0 when `log`).
    pub lo: f64,
    /// Upper bound (> `lo`).
    pub hi: f64,
    /// Fit `ln p` instead of `p`.
    pub log: bool,
    /// Starting value (inside the bounds).
    pub start: f64,
}

/// Fit settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FitOptions {
    /// Number of starts: the given start, then points spread over the box (default 1).
    pub starts: usize,
    /// Most residual evaluations per start (default 2000).
    pub max_evaluations: usize,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            starts: 1,
            max_evaluations: 2000,
        }
    }
}

/// A combination of parameters the data cannot pin down.
#[derive(Clone, Debug, PartialEq)]
pub struct Weak {
    /// Parameter indices and their weights in the direction (unit length).
    pub parameters: Vec<(usize, f64)>,
    /// Singular value relative to the largest.
    pub relative_singular_value: f64,
    /// Standard error along the direction in the scaled variables.
    pub std_error: f64,
}

/// The result of a fit.
#[derive(Clone, Debug, PartialEq)]
pub struct Fit {
    /// Fitted values.
    pub values: Vec<f64>,
    /// Standard errors (same unit as the values), `None` at a bound or when `JᵀJ` is singular.
    pub std_errors: Vec<Option<f64>>,
    /// Whether each parameter ended at a bound.
    pub at_bound: Vec<bool>,
    /// Correlation matrix of the fitted variables (row-major, `n × n`); empty when `JᵀJ` is
    /// singular.
    pub correlation: Vec<f64>,
    /// Singular values of the column-scaled Jacobian, largest first.
    pub singular_values: Vec<f64>,
    /// Combinations the data cannot determine.
    pub weak: Vec<Weak>,
    /// Pairs with `|correlation| >= 0.95`.
    pub correlated: Vec<(usize, usize, f64)>,
    /// Residuals at the optimum.
    pub residuals: Vec<f64>,
    /// `Σ r²`.
    pub rss: f64,
    /// Residual-vector evaluations over every start.
    pub evaluations: usize,
    /// Which start won (0 is the given start).
    pub best_start: usize,
    /// How the winning start's solver stopped.
    pub termination: String,
}

/// A residual function: fills `out` (length fixed for the fit) at parameters `p` (in their
/// own units), or says why it cannot.
pub trait Residuals {
    /// Number of residuals.
    fn len(&self) -> usize;
    /// Whether there are no residuals.
    fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// Evaluates the residuals at `p`.
    fn eval(&mut self, p: &[f64], out: &mut [f64]) -> Result<(), String>;
}

fn y_bounds(p: &Param) -> (f64, f64) {
    if p.log {
        (p.lo.ln(), p.hi.ln())
    } else {
        (p.lo, p.hi)
    }
}

fn to_value(p: &Param, y: f64) -> f64 {
    if p.log {
        y.exp().clamp(p.lo, p.hi)
    } else {
        y.clamp(p.lo, p.hi)
    }
}

fn z_to_y(p: &Param, z: f64) -> f64 {
    let (a, b) = y_bounds(p);
    a + (b - a) / (1.0 + (-z).exp())
}

fn y_to_z(p: &Param, y: f64) -> f64 {
    let (a, b) = y_bounds(p);
    let t = ((y - a) / (b - a)).clamp(1e-9, 1.0 - 1e-9);
    (t / (1.0 - t)).ln()
}

/// Checks the parameters: finite bounds, `lo < hi`, positive for log scale, start inside.
pub fn check_params(params: &[Param]) -> Result<(), String> {
    if params.is_empty() {
        return Err("nothing to fit: name at least one parameter".into());
    }
    for p in params {
        if !(p.lo.is_finite() && p.hi.is_finite() && p.lo < p.hi) {
            return Err(format!(
                "{}: the bounds must be finite with the lower below the upper",
                p.name
            ));
        }
        if p.log && p.lo <= 0.0 {
            return Err(format!(
                "{}: a log-scaled parameter needs a positive lower bound",
                p.name
            ));
        }
        if !(p.start >= p.lo && p.start <= p.hi) {
            return Err(format!(
                "{}: the start value {} lies outside [{}, {}]",
                p.name, p.start, p.lo, p.hi
            ));
        }
    }
    Ok(())
}

struct State<'a, R: Residuals> {
    model: &'a mut R,
    evaluations: usize,
    failure: Option<String>,
    buf: Vec<f64>,
    pvals: Vec<f64>,
}

struct Problem<'a, 'b, R: Residuals> {
    params: &'b [Param],
    z: DVector<f64>,
    max_evaluations: usize,
    state: RefCell<State<'a, R>>,
}

impl<R: Residuals> Problem<'_, '_, R> {
    /// Residuals at `z`, or `None` once the model failed or the budget is spent (the solver
    /// then stops; the failure is reported by [`fit`]).
    fn residuals_at(&self, z: &DVector<f64>) -> Option<DVector<f64>> {
        let mut st = self.state.borrow_mut();
        let st = &mut *st;
        if st.failure.is_some() || st.evaluations >= self.max_evaluations {
            return None;
        }
        st.evaluations += 1;
        for (k, p) in self.params.iter().enumerate() {
            st.pvals[k] = to_value(p, z_to_y(p, z[k]));
        }
        match st.model.eval(&st.pvals, &mut st.buf) {
            Ok(()) if st.buf.iter().all(|r| r.is_finite()) => {
                Some(DVector::from_column_slice(&st.buf))
            }
            Ok(()) => {
                st.failure = Some(format!(
                    "the model returned a non-finite residual at {}",
                    show_params(self.params, &st.pvals)
                ));
                None
            }
            Err(e) => {
                st.failure = Some(e);
                None
            }
        }
    }
}

fn show_params(params: &[Param], values: &[f64]) -> String {
    params
        .iter()
        .zip(values)
        .map(|(p, v)| format!("{} = {v:e}", p.name))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Step of the central differences in `z` during the solve.
const Z_STEP: f64 = 1e-4;

impl<R: Residuals> LeastSquaresProblem<f64, Dyn, Dyn> for Problem<'_, '_, R> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, z: &DVector<f64>) {
        self.z.copy_from(z);
    }

    fn params(&self) -> DVector<f64> {
        self.z.clone()
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        self.residuals_at(&self.z)
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        let n = self.z.len();
        let mut jac = None::<DMatrix<f64>>;
        let mut z = self.z.clone();
        for k in 0..n {
            z[k] = self.z[k] + Z_STEP;
            let up = self.residuals_at(&z)?;
            z[k] = self.z[k] - Z_STEP;
            let down = self.residuals_at(&z)?;
            z[k] = self.z[k];
            let j = jac.get_or_insert_with(|| DMatrix::zeros(up.len(), n));
            j.set_column(k, &((up - down) / (2.0 * Z_STEP)));
        }
        jac
    }
}

/// The `k`-th point of the Halton sequence in `dims` dimensions (bases 2, 3, 5, 7, ...), in
/// the open unit cube.
fn halton(k: usize, dims: usize) -> Vec<f64> {
    const PRIMES: [usize; 16] = [2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47, 53];
    (0..dims)
        .map(|d| {
            let b = PRIMES[d % PRIMES.len()];
            let (mut f, mut r, mut i) = (1.0, 0.0, k + 1);
            while i > 0 {
                f /= b as f64;
                r += f * (i % b) as f64;
                i /= b;
            }
            r
        })
        .collect()
}

/// Fits `params` to `model`. Fails only when the model cannot be evaluated at the start (or
/// at every start); a solver that stops early still returns its best point with the reason.
pub fn fit<R: Residuals>(
    model: &mut R,
    params: &[Param],
    opts: &FitOptions,
) -> Result<Fit, String> {
    check_params(params)?;
    let n = params.len();
    let m = model.len();
    if m < n {
        return Err(format!(
            "{m} data points cannot determine {n} parameters: give more data or fit fewer"
        ));
    }
    let mut state = State {
        model,
        evaluations: 0,
        failure: None,
        buf: vec![0.0; m],
        pvals: vec![0.0; n],
    };
    let mut best: Option<(f64, DVector<f64>, usize, String)> = None;
    let mut first_failure = None;
    for start in 0..opts.starts.max(1) {
        let z0: Vec<f64> = if start == 0 {
            params.iter().map(|p| y_to_z(p, p.start_y())).collect()
        } else {
            let u = halton(start - 1, n);
            params
                .iter()
                .zip(u)
                .map(|(p, t)| {
                    let (a, b) = y_bounds(p);
                    y_to_z(p, a + (b - a) * t)
                })
                .collect()
        };
        let problem = Problem {
            params,
            z: DVector::from_vec(z0),
            max_evaluations: state.evaluations + opts.max_evaluations,
            state: RefCell::new(state),
        };
        let (done, report) = LevenbergMarquardt::new().minimize(problem);
        let z = done.z.clone();
        state = done.state.into_inner();
        if let Some(why) = state.failure.take() {
            first_failure.get_or_insert(why);
        }
        let objective = 2.0 * report.objective_function;
        if objective.is_finite() && best.as_ref().is_none_or(|b| objective < b.0) {
            best = Some((objective, z, start, format!("{:?}", report.termination)));
        }
    }
    let Some((_, z, best_start, termination)) = best else {
        return Err(first_failure.unwrap_or_else(|| "the model could not be evaluated".into()));
    };
    let y: Vec<f64> = params
        .iter()
        .zip(z.iter())
        .map(|(p, &z)| z_to_y(p, z))
        .collect();
    statistics(state, params, &y, best_start, termination)
}

impl Param {
    fn start_y(&self) -> f64 {
        if self.log {
            self.start.ln()
        } else {
            self.start
        }
    }
}

/// Residuals at `y` through the model.
fn eval_y<R: Residuals>(
    st: &mut State<'_, R>,
    params: &[Param],
    y: &[f64],
) -> Result<Vec<f64>, String> {
    st.evaluations += 1;
    for (k, p) in params.iter().enumerate() {
        st.pvals[k] = to_value(p, y[k]);
    }
    st.model.eval(&st.pvals, &mut st.buf)?;
    Ok(st.buf.clone())
}

fn statistics<R: Residuals>(
    mut st: State<'_, R>,
    params: &[Param],
    y: &[f64],
    best_start: usize,
    termination: String,
) -> Result<Fit, String> {
    let n = params.len();
    let r0 = eval_y(&mut st, params, y)?;
    let m = r0.len();
    let rss: f64 = r0.iter().map(|r| r * r).sum();
    let at_bound: Vec<bool> = params
        .iter()
        .zip(y)
        .map(|(p, &yk)| {
            let (a, b) = y_bounds(p);
            let tol = 1e-6 * (b - a);
            yk - a <= tol || b - yk <= tol
        })
        .collect();
    // Jacobian in y by central differences, kept inside the box.
    let mut jac = DMatrix::<f64>::zeros(m, n);
    for k in 0..n {
        let (a, b) = y_bounds(&params[k]);
        let h = 1e-4 * (b - a);
        let (lo, hi) = ((y[k] - h).max(a), (y[k] + h).min(b));
        let mut yy = y.to_vec();
        yy[k] = hi;
        let up = eval_y(&mut st, params, &yy)?;
        yy[k] = lo;
        let down = eval_y(&mut st, params, &yy)?;
        for i in 0..m {
            jac[(i, k)] = (up[i] - down[i]) / (hi - lo);
        }
    }
    let dof = (m - n).max(1) as f64;
    let s2 = rss / dof;
    let jtj = jac.transpose() * &jac;
    let cov = jtj
        .clone()
        .try_inverse()
        .filter(|c| c.iter().all(|v| v.is_finite()));
    let values: Vec<f64> = params
        .iter()
        .zip(y)
        .map(|(p, &yk)| to_value(p, yk))
        .collect();
    let mut std_errors = vec![None; n];
    let mut correlation = Vec::new();
    let mut correlated = Vec::new();
    if let Some(cov) = &cov {
        for k in 0..n {
            let var = s2 * cov[(k, k)];
            if !at_bound[k] && var.is_finite() && var >= 0.0 {
                let sy = var.sqrt();
                std_errors[k] = Some(if params[k].log { values[k] * sy } else { sy });
            }
        }
        correlation = (0..n * n)
            .map(|i| {
                let (r, c) = (i / n, i % n);
                cov[(r, c)] / (cov[(r, r)] * cov[(c, c)]).sqrt()
            })
            .collect();
        for r in 0..n {
            for c in r + 1..n {
                let rho = correlation[r * n + c];
                if rho.abs() >= 0.95 {
                    correlated.push((r, c, rho));
                }
            }
        }
    }
    // Identifiability on the column-scaled Jacobian.
    let norms: Vec<f64> = (0..n).map(|k| jac.column(k).norm()).collect();
    let mut weak = Vec::new();
    let mut singular_values = Vec::new();
    let scaled = DMatrix::from_fn(m, n, |i, k| {
        if norms[k] > 0.0 {
            jac[(i, k)] / norms[k]
        } else {
            0.0
        }
    });
    let svd = scaled.svd(false, true);
    if let Some(vt) = &svd.v_t {
        let mut order: Vec<usize> = (0..svd.singular_values.len()).collect();
        order.sort_by(|&a, &b| svd.singular_values[b].total_cmp(&svd.singular_values[a]));
        let top = svd.singular_values[order[0]];
        for &j in &order {
            let sv = svd.singular_values[j];
            singular_values.push(sv);
            let rel = if top > 0.0 { sv / top } else { 0.0 };
            // Standard error along the direction, back in y units: the direction v in scaled
            // variables is y_k = v_k / norm_k.
            let v: Vec<f64> = (0..n).map(|k| vt[(j, k)]).collect();
            let along = if sv > 0.0 {
                s2.sqrt() / sv
            } else {
                f64::INFINITY
            };
            let in_y = v
                .iter()
                .zip(&norms)
                .map(|(vk, nk)| {
                    if *nk > 0.0 {
                        (vk / nk).powi(2)
                    } else {
                        f64::INFINITY
                    }
                })
                .sum::<f64>()
                .sqrt()
                * along;
            if rel < 1e-3 || in_y > UNDETERMINED || !in_y.is_finite() {
                let mut parts: Vec<(usize, f64)> = v
                    .iter()
                    .enumerate()
                    .filter(|(_, w)| w.abs() >= 0.3)
                    .map(|(k, w)| (k, *w))
                    .collect();
                parts.sort_by(|a, b| b.1.abs().total_cmp(&a.1.abs()));
                weak.push(Weak {
                    parameters: parts,
                    relative_singular_value: rel,
                    std_error: in_y,
                });
            }
        }
    }
    Ok(Fit {
        values,
        std_errors,
        at_bound,
        correlation,
        singular_values,
        weak,
        correlated,
        residuals: r0,
        rss,
        evaluations: st.evaluations,
        best_start,
        termination,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `y = a exp(-t / tau) + c` sampled with a fixed pseudo-noise.
    struct Decay {
        t: Vec<f64>,
        y: Vec<f64>,
    }

    impl Residuals for Decay {
        fn len(&self) -> usize {
            self.t.len()
        }
        fn eval(&mut self, p: &[f64], out: &mut [f64]) -> Result<(), String> {
            for (i, (&t, &y)) in self.t.iter().zip(&self.y).enumerate() {
                out[i] = p[0] * (-t / p[1]).exp() + p[2] - y;
            }
            Ok(())
        }
    }

    fn decay(noise: f64) -> Decay {
        let t: Vec<f64> = (0..60).map(|i| i as f64 * 0.1).collect();
        // A deterministic zero-mean sequence standing in for noise.
        let y = t
            .iter()
            .enumerate()
            .map(|(i, &t)| {
                2.0 * (-t / 1.5).exp() + 0.3 + noise * ((i * 7919 % 97) as f64 / 48.0 - 1.0)
            })
            .collect();
        Decay { t, y }
    }

    fn params() -> Vec<Param> {
        vec![
            Param {
                name: "a".into(),
                lo: 0.1,
                hi: 10.0,
                log: true,
                start: 1.0,
            },
            Param {
                name: "tau".into(),
                lo: 0.1,
                hi: 10.0,
                log: true,
                start: 0.5,
            },
            Param {
                name: "c".into(),
                lo: -1.0,
                hi: 1.0,
                log: false,
                start: 0.0,
            },
        ]
    }

    #[test]
    fn recovers_an_exponential_exactly_without_noise() {
        let f = fit(&mut decay(0.0), &params(), &FitOptions::default()).unwrap();
        for (got, want) in f.values.iter().zip([2.0, 1.5, 0.3]) {
            assert!((got - want).abs() < 1e-7, "{got} vs {want}");
        }
        assert!(f.rss < 1e-20, "{}", f.rss);
        assert!(f.weak.is_empty());
    }

    /// With noise the truth lies within a few standard errors and the errors scale with the
    /// noise (linearised covariance, Press et al. 2007, §15.5).
    #[test]
    fn standard_errors_cover_the_truth() {
        let f = fit(&mut decay(0.01), &params(), &FitOptions::default()).unwrap();
        for ((got, se), want) in f.values.iter().zip(&f.std_errors).zip([2.0, 1.5, 0.3]) {
            let se = se.unwrap();
            assert!(
                se > 0.0 && (got - want).abs() < 4.0 * se,
                "{got} ± {se} vs {want}"
            );
        }
        let g = fit(&mut decay(0.02), &params(), &FitOptions::default()).unwrap();
        let ratio = g.std_errors[1].unwrap() / f.std_errors[1].unwrap();
        assert!((ratio - 2.0).abs() < 0.2, "{ratio}");
    }

    /// `y = a b t`: only the product is determined; the report names both parameters.
    struct Product(Vec<f64>);
    impl Residuals for Product {
        fn len(&self) -> usize {
            self.0.len()
        }
        fn eval(&mut self, p: &[f64], out: &mut [f64]) -> Result<(), String> {
            for (i, &t) in self.0.iter().enumerate() {
                out[i] = p[0] * p[1] * t - 6.0 * t;
            }
            Ok(())
        }
    }

    #[test]
    fn names_a_combination_the_data_cannot_split() {
        let ps = vec![
            Param {
                name: "a".into(),
                lo: 0.1,
                hi: 100.0,
                log: true,
                start: 1.0,
            },
            Param {
                name: "b".into(),
                lo: 0.1,
                hi: 100.0,
                log: true,
                start: 1.0,
            },
        ];
        let f = fit(
            &mut Product((1..20).map(f64::from).collect()),
            &ps,
            &FitOptions::default(),
        )
        .unwrap();
        assert!((f.values[0] * f.values[1] - 6.0).abs() < 1e-6);
        assert_eq!(f.weak.len(), 1);
        let names: Vec<usize> = f.weak[0].parameters.iter().map(|p| p.0).collect();
        assert!(names.contains(&0) && names.contains(&1));
    }

    #[test]
    fn several_starts_are_deterministic_and_find_the_best() {
        let a = fit(
            &mut decay(0.01),
            &params(),
            &FitOptions {
                starts: 4,
                ..Default::default()
            },
        )
        .unwrap();
        let b = fit(
            &mut decay(0.01),
            &params(),
            &FitOptions {
                starts: 4,
                ..Default::default()
            },
        )
        .unwrap();
        assert_eq!(a, b);
        let one = fit(&mut decay(0.01), &params(), &FitOptions::default()).unwrap();
        assert!(a.rss <= one.rss * (1.0 + 1e-9));
    }

    #[test]
    fn refuses_bad_bounds_and_too_few_points() {
        let mut p = params();
        p[0].lo = -1.0;
        assert!(fit(&mut decay(0.0), &p, &FitOptions::default())
            .unwrap_err()
            .contains("positive"));
        let mut short = decay(0.0);
        short.t.truncate(2);
        short.y.truncate(2);
        assert!(fit(&mut short, &params(), &FitOptions::default())
            .unwrap_err()
            .contains("cannot determine"));
    }
}
