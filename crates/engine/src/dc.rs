//! Operating point and DC sweeps.
//!
//! The operating point solves `f(x) = 0` (charges ignored) and falls back in order:
//! 1. plain Newton from the initial guess;
//! 2. gmin stepping: a conductance from every node to ground, starting at `gmin_start` and
//!    divided by 10 per converged stage (by √10 and less after a failure), then removed;
//! 3. source stepping: every independent source scaled by λ from 0 to 1, the λ step doubled on
//!    quick convergence and halved on failure;
//! 4. pseudo-transient continuation: a capacitance-like term `c (x - x_prev)/Δτ` on every node
//!    row, integrated in pseudo-time with the step grown by the residual ratio (switched
//!    evolution relaxation), then a clean Newton solve without it.
//!
//! The result says which path succeeded. A DC sweep walks one independent source through a
//! list of values, predicting each point from the previous two (secant), and bisects the step
//! with hidden intermediate points where a point fails.

use crate::circuit::{ElementId, NodeId};
use crate::element::EvalContext;
use crate::error::EngineError;
use crate::system::{Load, NewtonFailure, NewtonParams, System};

/// Most stages of one homotopy (gmin or source stepping) before it gives up.
const MAX_HOMOTOPY_STAGES: usize = 400;

/// Parameters of an operating-point solve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OpParams {
    /// Newton parameters of each solve (default: [`NewtonParams::default`], 100 iterations).
    pub newton: NewtonParams,
    /// Conductance from every node to ground that stays in the final solution (default
    /// 1e-12 S). It also keeps nodes held only by devices that are off from being singular.
    pub gmin: f64,
    /// First conductance of gmin stepping (default 1e-3 S).
    pub gmin_start: f64,
    /// Smallest λ step of source stepping before it gives up (default 1e-6).
    pub source_min_step: f64,
    /// Pseudo-transient steps before it gives up (default 2000).
    pub pseudo_max_steps: usize,
}

impl Default for OpParams {
    fn default() -> Self {
        OpParams {
            newton: NewtonParams::default(),
            gmin: 1e-12,
            gmin_start: 1e-3,
            source_min_step: 1e-6,
            pseudo_max_steps: 2000,
        }
    }
}

/// Which path found the operating point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OpMethod {
    /// Plain Newton from the initial guess.
    Newton,
    /// Newton through decreasing shunt conductances.
    GminStepping,
    /// Newton while ramping every independent source from 0.
    SourceStepping,
    /// Pseudo-transient continuation.
    PseudoTransient,
}

impl OpMethod {
    /// A short description for reports.
    pub fn describe(self) -> &'static str {
        match self {
            OpMethod::Newton => "plain Newton",
            OpMethod::GminStepping => "gmin stepping",
            OpMethod::SourceStepping => "source stepping",
            OpMethod::PseudoTransient => "pseudo-transient continuation",
        }
    }
}

/// How the operating point was found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OpInfo {
    /// The path that succeeded.
    pub method: OpMethod,
    /// Newton iterations over all paths tried.
    pub iterations: usize,
    /// Largest residual-to-tolerance ratio of the final solve.
    pub residual_ratio: f64,
}

/// A solution vector with named access.
#[derive(Clone, Debug, PartialEq)]
pub struct Solution {
    /// All unknowns in the system's order.
    pub x: Vec<f64>,
}

impl Solution {
    /// The voltage of `node` (0 for ground).
    pub fn voltage(&self, system: &System, node: NodeId) -> f64 {
        system.node_unknown(node).map_or(0.0, |i| self.x[i])
    }
}

/// A signal to record during a sweep or a transient.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Probe {
    /// A node voltage.
    Voltage(NodeId),
    /// The branch current of an element that owns one (voltage source, inductor, ...).
    Current(ElementId),
}

impl System {
    /// Each probe's unknown (`None` for a node at ground), or why a probe does not belong to
    /// this system.
    pub(crate) fn probe_unknowns(
        &self,
        probes: &[Probe],
    ) -> Result<Vec<Option<usize>>, EngineError> {
        probes
            .iter()
            .map(|p| match *p {
                Probe::Voltage(node) => {
                    if node.0 as usize > self.n_nodes {
                        return Err(EngineError::Invalid(
                            "probe names a node of another circuit".into(),
                        ));
                    }
                    Ok(self.node_unknown(node))
                }
                Probe::Current(e) => self.branch_unknown(e).map(Some).ok_or_else(|| {
                    EngineError::Invalid(format!(
                        "element `{}` has no branch current to record",
                        self.element_name(e.0)
                    ))
                }),
            })
            .collect()
    }

    /// The signal names of `probes`, as a sweep or a transient records them: a node's label,
    /// or the unknown of an element's branch current; an error for a probe that does not
    /// belong to this system.
    pub fn probe_names(&self, probes: &[Probe]) -> Result<Vec<String>, EngineError> {
        let idx = self.probe_unknowns(probes)?;
        Ok(self.names_of(probes, &idx))
    }

    /// The names of `probes`, whose unknowns `probe_unknowns` gave as `idx`.
    fn names_of(&self, probes: &[Probe], idx: &[Option<usize>]) -> Vec<String> {
        probes
            .iter()
            .zip(idx)
            .map(|(p, u)| match p {
                Probe::Voltage(node) => crate::system::node_label(self.node_name(*node)),
                // Always an unknown: `probe_unknowns` refuses a current without a branch.
                Probe::Current(_) => u.map_or_else(String::new, |u| self.unknown_name(u)),
            })
            .collect()
    }

    /// Finds the DC operating point, starting from all zeros.
    pub fn operating_point(
        &mut self,
        params: &OpParams,
    ) -> Result<(Solution, OpInfo), EngineError> {
        let mut x = vec![0.0; self.n];
        let info = self.operating_point_from(&mut x, params, &[])?;
        Ok((Solution { x }, info))
    }

    /// Finds the DC operating point from the guess in `x`, with some unknowns clamped.
    pub(crate) fn operating_point_from(
        &mut self,
        x: &mut [f64],
        params: &OpParams,
        clamps: &[(usize, f64)],
    ) -> Result<OpInfo, EngineError> {
        let ctx = EvalContext::dc();
        let mut total = 0;
        let mut tried = Vec::new();
        let guess = x.to_vec();

        // 1. Plain Newton.
        let load = Load {
            clamps,
            ..Load::dc(ctx, params.gmin)
        };
        tried.push("plain Newton".to_string());
        match self.newton(x, &load, &params.newton) {
            Ok(info) => {
                return Ok(OpInfo {
                    method: OpMethod::Newton,
                    iterations: info.iterations,
                    residual_ratio: info.residual_ratio,
                })
            }
            Err(_) => total += params.newton.max_iterations,
        }

        // 2. gmin stepping.
        x.copy_from_slice(&guess);
        tried.push(format!("gmin stepping from {:.0e} S", params.gmin_start));
        if let Some(iters) = self.gmin_stepping(x, params, clamps) {
            total += iters;
            let load = Load {
                clamps,
                ..Load::dc(ctx, params.gmin)
            };
            if let Ok(info) = self.newton(x, &load, &params.newton) {
                return Ok(OpInfo {
                    method: OpMethod::GminStepping,
                    iterations: total + info.iterations,
                    residual_ratio: info.residual_ratio,
                });
            }
        }

        // 3. Source stepping.
        x.fill(0.0);
        tried.push("source stepping".to_string());
        if let Some(iters) = self.source_stepping(x, params, clamps) {
            total += iters;
            let load = Load {
                clamps,
                ..Load::dc(ctx, params.gmin)
            };
            if let Ok(info) = self.newton(x, &load, &params.newton) {
                return Ok(OpInfo {
                    method: OpMethod::SourceStepping,
                    iterations: total + info.iterations,
                    residual_ratio: info.residual_ratio,
                });
            }
        }

        // 4. Pseudo-transient continuation.
        x.copy_from_slice(&guess);
        tried.push("pseudo-transient continuation".to_string());
        let pseudo = self.pseudo_transient(x, params, clamps);
        let load = Load {
            clamps,
            ..Load::dc(ctx, params.gmin)
        };
        if let Some(iters) = pseudo {
            total += iters;
            if let Ok(info) = self.newton(x, &load, &params.newton) {
                return Ok(OpInfo {
                    method: OpMethod::PseudoTransient,
                    iterations: total + info.iterations,
                    residual_ratio: info.residual_ratio,
                });
            }
        }
        let failure = match self.newton(x, &load, &params.newton) {
            Err(f) => f,
            Ok(_) => NewtonFailure::NoConvergence { worst: Vec::new() },
        };
        Err(self.failure_error("operating point".to_string(), failure, tried))
    }

    fn gmin_stepping(
        &mut self,
        x: &mut [f64],
        params: &OpParams,
        clamps: &[(usize, f64)],
    ) -> Option<usize> {
        let ctx = EvalContext::dc();
        let mut g = params.gmin_start;
        let mut factor: f64 = 10.0;
        let mut good = x.to_vec();
        let mut iters = 0;
        let mut first = true;
        // Bounded: a homotopy that keeps alternating between success and failure gives up.
        for _ in 0..MAX_HOMOTOPY_STAGES {
            let load = Load {
                clamps,
                ..Load::dc(ctx, g.max(params.gmin))
            };
            match self.newton(x, &load, &params.newton) {
                Ok(info) => {
                    iters += info.iterations;
                    first = false;
                    good.copy_from_slice(x);
                    if g <= params.gmin {
                        return Some(iters);
                    }
                    g /= factor;
                    factor = (factor * 2.0).min(10.0);
                }
                Err(_) => {
                    iters += params.newton.max_iterations;
                    if first {
                        // Even the largest conductance did not converge: start higher.
                        g *= 100.0;
                        if g > 1e3 {
                            return None;
                        }
                        continue;
                    }
                    x.copy_from_slice(&good);
                    g *= factor;
                    factor = factor.sqrt();
                    if factor < 1.05 {
                        return None;
                    }
                    g /= factor;
                }
            }
        }
        None
    }

    fn source_stepping(
        &mut self,
        x: &mut [f64],
        params: &OpParams,
        clamps: &[(usize, f64)],
    ) -> Option<usize> {
        let mut lambda = 0.0;
        let mut step = 0.1;
        let mut good = x.to_vec();
        let mut iters = 0;
        // λ = 0 first: all sources off.
        let scaled: Vec<(usize, f64)> = clamps.to_vec();
        let mut target = 0.0;
        // Bounded: a homotopy that keeps alternating between success and failure gives up.
        for _ in 0..MAX_HOMOTOPY_STAGES {
            let ctx = EvalContext {
                source_scale: target,
                ..EvalContext::dc()
            };
            let load = Load {
                clamps: &scaled,
                ..Load::dc(ctx, params.gmin)
            };
            match self.newton(x, &load, &params.newton) {
                Ok(info) => {
                    iters += info.iterations;
                    lambda = target;
                    good.copy_from_slice(x);
                    if lambda >= 1.0 {
                        return Some(iters);
                    }
                    if info.iterations <= 4 {
                        step *= 2.0;
                    }
                }
                Err(_) => {
                    iters += params.newton.max_iterations;
                    x.copy_from_slice(&good);
                    step *= 0.5;
                    if step < params.source_min_step {
                        return None;
                    }
                }
            }
            target = (lambda + step).min(1.0);
        }
        None
    }

    fn pseudo_transient(
        &mut self,
        x: &mut [f64],
        params: &OpParams,
        clamps: &[(usize, f64)],
    ) -> Option<usize> {
        let ctx = EvalContext::dc();
        let mut prev = x.to_vec();
        // Pseudo-capacitance 1e-12 F per node with a first pseudo step of 1 ps: g = 1 S.
        let mut g = 1.0;
        let mut iters = 0;
        let mut last_norm = f64::INFINITY;
        let mut newton = params.newton;
        newton.max_iterations = newton.max_iterations.min(30);
        for _ in 0..params.pseudo_max_steps {
            let load = Load {
                clamps,
                pseudo: Some((g, &prev)),
                ..Load::dc(ctx, params.gmin)
            };
            match self.newton(x, &load, &newton) {
                Ok(info) => {
                    iters += info.iterations;
                    // Residual of the true problem at the new point, for the step rule.
                    let plain = Load {
                        clamps,
                        ..Load::dc(ctx, params.gmin)
                    };
                    self.assemble(x, &plain.ctx, 0.0);
                    let norm = self.f.iter().map(|v| v * v).sum::<f64>().sqrt();
                    if norm < 1e-9 {
                        return Some(iters);
                    }
                    let ratio = if last_norm.is_finite() {
                        (last_norm / norm).clamp(0.5, 10.0)
                    } else {
                        2.0
                    };
                    last_norm = norm;
                    g /= ratio;
                    prev.copy_from_slice(x);
                    if g < 1e-15 {
                        return Some(iters);
                    }
                }
                Err(_) => {
                    iters += newton.max_iterations;
                    x.copy_from_slice(&prev);
                    g *= 4.0;
                    if g > 1e9 {
                        return None;
                    }
                }
            }
        }
        None
    }

    /// Sets the independent source `source` to the constant `value` (for the following
    /// analyses).
    pub fn set_source_value(&mut self, source: ElementId, value: f64) -> Result<(), EngineError> {
        let e = source.0;
        if e >= self.elements.len()
            || !self.elements[e].is_independent_source()
            || !value.is_finite()
        {
            return Err(EngineError::Invalid(
                "only an independent source can be set, to a finite value".into(),
            ));
        }
        self.element_mut(e).set_constant_value(value);
        Ok(())
    }

    /// Gives the independent source `source` the waveform `waveform` (for the following
    /// analyses; a transient steps onto its breakpoints).
    pub fn set_waveform(
        &mut self,
        source: ElementId,
        waveform: &crate::elements::Waveform,
    ) -> Result<(), EngineError> {
        let e = source.0;
        // A shared model is copied only for an element that takes a waveform (a source).
        if e >= self.elements.len()
            || !self.elements[e].is_independent_source()
            || !self.element_mut(e).set_waveform(waveform)
        {
            return Err(EngineError::Invalid(
                "only an independent source can be given a waveform".into(),
            ));
        }
        // The transient asks only the elements listed here for their corners.
        let has_corners = self.elements[e]
            .next_breakpoint(f64::NEG_INFINITY)
            .is_some();
        self.breakpoint_elements.retain(|&k| k != e);
        if has_corners {
            self.breakpoint_elements.push(e);
            self.breakpoint_elements.sort_unstable();
        }
        Ok(())
    }

    /// Sweeps the constant value of the independent source `source` through `values`,
    /// recording `probes` at each point. The source is restored afterwards.
    pub fn dc_sweep(
        &mut self,
        source: ElementId,
        values: &[f64],
        probes: &[Probe],
        params: &SweepParams,
    ) -> Result<SweepResult, EngineError> {
        let e = source.0;
        if e >= self.elements.len() || !self.elements[e].is_independent_source() {
            return Err(EngineError::Invalid(
                "a DC sweep needs an independent source".into(),
            ));
        }
        if values.iter().any(|v| !v.is_finite()) {
            return Err(EngineError::Invalid("sweep values must be finite".into()));
        }
        let idx = self.probe_unknowns(probes)?;
        let names = self.names_of(probes, &idx);
        let original = self.elements[e].boxed_clone();
        let result = self.sweep_inner(e, values, &idx, params);
        self.elements[e] = original.into();
        let (signals, info) = result?;
        Ok(SweepResult {
            values: values.to_vec(),
            names,
            signals,
            op: info.0,
            iterations: info.1,
        })
    }

    #[allow(clippy::type_complexity)]
    fn sweep_inner(
        &mut self,
        e: usize,
        values: &[f64],
        idx: &[Option<usize>],
        params: &SweepParams,
    ) -> Result<(Vec<Vec<f64>>, (Option<OpInfo>, usize)), EngineError> {
        let mut signals = vec![Vec::with_capacity(values.len()); idx.len()];
        let mut x = vec![0.0; self.n];
        let mut prev: Option<(f64, Vec<f64>)> = None;
        let mut current: Option<f64> = None;
        let mut op = None;
        let mut iterations = 0;
        let mut trial = vec![0.0; self.n];
        for &target in values {
            match current {
                None => {
                    self.element_mut(e).set_constant_value(target);
                    let info = self.operating_point_from(&mut x, &params.op, &[])?;
                    iterations += info.iterations;
                    op = Some(info);
                }
                Some(s0) => {
                    // Walk from s0 to target, bisecting where a point fails.
                    let mut s = s0;
                    let mut step = target - s0;
                    let mut halvings = 0;
                    while s != target {
                        let next = if (target - s).abs() <= step.abs() {
                            target
                        } else {
                            s + step
                        };
                        self.element_mut(e).set_constant_value(next);
                        trial.copy_from_slice(&x);
                        if let Some((sp, xp)) = &prev {
                            if s != *sp {
                                let r = (next - s) / (s - sp);
                                for i in 0..self.n {
                                    trial[i] += (x[i] - xp[i]) * r;
                                }
                            }
                        }
                        let load = Load::dc(EvalContext::dc(), params.op.gmin);
                        let mut ok = self.newton(&mut trial, &load, &params.op.newton);
                        if ok.is_err() {
                            trial.copy_from_slice(&x);
                            ok = self.newton(&mut trial, &load, &params.op.newton);
                        }
                        match ok {
                            Ok(info) => {
                                iterations += info.iterations;
                                prev = Some((s, x.clone()));
                                x.copy_from_slice(&trial);
                                s = next;
                            }
                            Err(failure) => {
                                halvings += 1;
                                step *= 0.5;
                                if halvings > params.max_halvings {
                                    return Err(self.failure_error(
                                        format!("DC sweep at {next:.6e}"),
                                        failure,
                                        vec![
                                            "Newton from the secant prediction".into(),
                                            "Newton from the previous point".into(),
                                            format!(
                                                "{} halvings of the sweep step",
                                                params.max_halvings
                                            ),
                                        ],
                                    ));
                                }
                            }
                        }
                    }
                }
            }
            current = Some(target);
            for (k, u) in idx.iter().enumerate() {
                signals[k].push(u.map_or(0.0, |i| x[i]));
            }
        }
        Ok((signals, (op, iterations)))
    }
}

/// Parameters of a DC sweep.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SweepParams {
    /// Parameters of the first point's operating point and of each point's Newton solve.
    pub op: OpParams,
    /// How many times a failing sweep step may be halved (default 12).
    pub max_halvings: usize,
}

impl Default for SweepParams {
    fn default() -> Self {
        SweepParams {
            op: OpParams::default(),
            max_halvings: 12,
        }
    }
}

/// Recorded signals of a DC sweep.
#[derive(Clone, Debug, PartialEq)]
pub struct SweepResult {
    /// The swept source values.
    pub values: Vec<f64>,
    /// Signal names, in probe order.
    pub names: Vec<String>,
    /// One vector per probe, one entry per sweep value.
    pub signals: Vec<Vec<f64>>,
    /// How the first point's operating point was found.
    pub op: Option<OpInfo>,
    /// Newton iterations over the whole sweep.
    pub iterations: usize,
}
