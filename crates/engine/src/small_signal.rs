//! Small-signal (AC) analysis: the circuit linearised at a DC solution and solved for sinusoidal
//! excitations over a list of frequencies.
//!
//! # Equations
//! The system `F(x, t) = f(x) + dq(x)/dt = 0` linearised at a DC solution `x₀` with phasors
//! `x = x₀ + Re(X e^{jωt})` gives
//!
//! ```text
//! (G + jω C) X = B,   G = ∂f/∂x (S),   C = ∂q/∂x (F),   ω = 2π f
//! ```
//!
//! with `G` and `C` from [`System::linearize`] (no gmin) and `B = -∂F/∂u` for a unit value `u`
//! of one independent source. `B` is found by evaluating the source at `u = 1` and `u = 0`
//! through its own [`crate::Element::set_constant_value`], so it is exactly how the source
//! stamps:
//! * a voltage source (`v_pos - v_neg = u` on its branch row) gives `B = e_branch`: the
//!   response is per volt, and the branch current (flowing from `pos` through the source to
//!   `neg`) per volt is the source's small-signal current;
//! * a current source (`u` amperes out of `pos` into the circuit) gives `B = e_pos - e_neg`:
//!   the response is per ampere.
//!
//! Every other independent source keeps its DC value, so its small-signal value is zero: a
//! voltage source is a short, a current source an open circuit.
//!
//! Reported per frequency ([`SmallSignalResult`]):
//! * the transfer function `H = X_out` (V/V for a voltage source, V/A = Ω for a current
//!   source);
//! * the source's response `X_in`: for a voltage source the input admittance
//!   `Y_in = -I_branch` (S), signed so that a resistor `R` to ground reads `+1/R`; for a current
//!   source the input impedance `Z_in = X_pos - X_neg` (Ω);
//! * the output impedance `Z_out = X'_out` where `(G + jωC) X' = e_out`: a unit current
//!   injected into the output node with the source at zero, solved with the same
//!   factorisation.
//!
//! # Method
//! The complex system is solved in its real block form
//!
//! ```text
//! [ G   -ωC ] [X_r]   [B_r]
//! [ ωC   G  ] [X_i] = [B_i]
//! ```
//!
//! through the engine's own [`SparseLu`]. It costs twice the unknowns of a complex LU, but it
//! reuses what the DC and transient paths already trust: one symbolic analysis and one fixed
//! pivot pattern for every frequency (each frequency only rewrites the matrix values in place,
//! refactors and solves; nothing is allocated on this path), pivot checks that fall back to
//! fresh pivoting when a frequency needs it (counted in [`SmallSignalInfo::lu`]), and a
//! singular pivot reported with the unknown it belongs to (faer's complex numeric LU does not
//! report numerical singularity). The off-diagonal blocks hold only the nonzeros of `C` at
//! this solution, so a resistive part of the circuit costs no extra fill.

use crate::circuit::{ElementId, NodeId};
use crate::element::EvalContext;
use crate::element::Stamp;
use crate::error::EngineError;
use crate::lu::{LuStats, LuStrategy, SparseLu};
use crate::system::{System, NONE32};
use faer::c64;
use faer::sparse::SymbolicSparseColMat;

/// Settings of a small-signal analysis.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SmallSignalParams {
    /// How the block matrix is factorised (default: fixed pivots with faer as the fallback).
    pub strategy: LuStrategy,
}

impl Default for SmallSignalParams {
    /// Fixed-pivot refactorisation across frequencies.
    fn default() -> Self {
        SmallSignalParams {
            strategy: LuStrategy::FixedPivot,
        }
    }
}

/// What the source's own response means.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SourceKind {
    /// A source with a branch current (a voltage source): the response is per volt and
    /// [`SmallSignalResult::input`] is an admittance (S).
    Voltage,
    /// A source without one (a current source): the response is per ampere and
    /// [`SmallSignalResult::input`] is an impedance (Ω).
    Current,
}

/// Per-frequency results of [`System::small_signal`].
#[derive(Clone, Debug, PartialEq)]
pub struct SmallSignalResult {
    /// The frequencies (Hz).
    pub frequencies: Vec<f64>,
    /// What the source is, and so the unit of `transfer` and `input`.
    pub source: SourceKind,
    /// Output voltage per unit source value (V/V or Ω).
    pub transfer: Vec<c64>,
    /// Input admittance (S, voltage source) or input impedance (Ω, current source).
    pub input: Vec<c64>,
    /// Output impedance (Ω): the output voltage per ampere injected there, source at zero.
    pub output_impedance: Vec<c64>,
}

/// What a small-signal analysis did.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SmallSignalInfo {
    /// Unknowns of the real block system (twice the circuit's).
    pub unknowns: usize,
    /// Stored entries of the block matrix.
    pub nnz: usize,
    /// What the sparse LU did over all frequencies.
    pub lu: LuStats,
}

/// The block system prepared once: its pattern, where each entry's value comes from, and every
/// buffer a frequency needs.
pub struct SmallSignalSolver {
    n: usize,
    g: Vec<f64>,
    c: Vec<f64>,
    /// Per block slot: the system slot it reads, and whether it is `G` (0), `ωC` (1) or `-ωC`
    /// (2).
    from_slot: Vec<usize>,
    part: Vec<u8>,
    values: Vec<f64>,
    rhs: Vec<f64>,
    lu: SparseLu,
}

impl SmallSignalSolver {
    /// Linearises `sys` at `x` and builds the block pattern and its symbolic analysis.
    pub fn new(sys: &System, x: &[f64], params: &SmallSignalParams) -> Result<Self, EngineError> {
        let lin = sys.linearize(x)?;
        let n = sys.n;
        let col_ptr = sys.pattern.col_ptr();
        let row_idx = sys.pattern.row_idx();
        let g = lin.g.data().to_vec();
        let c = lin.c.data().to_vec();
        let mut bptr = vec![0usize];
        let mut brow = Vec::new();
        let mut from_slot = Vec::new();
        let mut part = Vec::new();
        for half in 0..2 {
            for j in 0..n {
                for s in col_ptr[j]..col_ptr[j + 1] {
                    // Left column half: G on top, ωC below; right half: -ωC on top, G below.
                    let (top, tpart) = if half == 0 {
                        (true, 0)
                    } else {
                        (c[s] != 0.0, 2)
                    };
                    if top {
                        brow.push(row_idx[s]);
                        from_slot.push(s);
                        part.push(tpart);
                    }
                }
                for s in col_ptr[j]..col_ptr[j + 1] {
                    let (bottom, bpart) = if half == 0 {
                        (c[s] != 0.0, 1)
                    } else {
                        (true, 0)
                    };
                    if bottom {
                        brow.push(n + row_idx[s]);
                        from_slot.push(s);
                        part.push(bpart);
                    }
                }
                bptr.push(brow.len());
            }
        }
        let pattern = SymbolicSparseColMat::new_checked(2 * n, 2 * n, bptr, None, brow);
        let lu = SparseLu::new(pattern, params.strategy).map_err(EngineError::Invalid)?;
        Ok(SmallSignalSolver {
            n,
            g,
            c,
            values: vec![0.0; from_slot.len()],
            from_slot,
            part,
            rhs: vec![0.0; 2 * n],
            lu,
        })
    }

    /// Unknowns of the circuit (half the block system's).
    pub fn unknowns(&self) -> usize {
        self.n
    }

    /// Writes `G + jωC` into the block matrix and factorises it. Allocates nothing on the
    /// fixed-pivot path.
    pub fn factor(&mut self, sys: &System, omega: f64) -> Result<(), EngineError> {
        for (k, v) in self.values.iter_mut().enumerate() {
            let s = self.from_slot[k];
            *v = match self.part[k] {
                0 => self.g[s],
                1 => omega * self.c[s],
                _ => -omega * self.c[s],
            };
        }
        self.lu
            .factor(&self.values)
            .map_err(|e| singular(sys, omega, e.unknown % self.n))
    }

    /// Solves `(G + jωC) X = b` (real `b`, `n` long) with the last factorisation; `x` receives
    /// `X` (`n` long).
    pub fn solve(
        &mut self,
        sys: &System,
        omega: f64,
        b: &[f64],
        x: &mut [c64],
    ) -> Result<(), EngineError> {
        let n = self.n;
        if b.len() != n || x.len() != n {
            return Err(EngineError::Invalid(format!("expected {n} unknowns")));
        }
        self.rhs[..n].copy_from_slice(b);
        self.rhs[n..].fill(0.0);
        self.lu
            .solve(&mut self.rhs)
            .map_err(|e| singular(sys, omega, e.unknown % n))?;
        for (i, xi) in x.iter_mut().enumerate() {
            *xi = c64::new(self.rhs[i], self.rhs[n + i]);
        }
        Ok(())
    }

    /// What the LU has done so far.
    pub fn lu_stats(&self) -> LuStats {
        self.lu.stats()
    }

    /// Stored entries of the block matrix.
    pub fn nnz(&self) -> usize {
        self.values.len()
    }
}

fn singular(sys: &System, omega: f64, unknown: usize) -> EngineError {
    EngineError::Singular {
        context: format!(
            "small-signal analysis at {:.6e} Hz",
            omega / (2.0 * std::f64::consts::PI)
        ),
        culprit: sys.culprit(unknown, f64::NAN, 0.0),
    }
}

impl System {
    /// The excitation `B = -∂F/∂u` of a unit value `u` of the independent source `source` at
    /// the solution `x`, and whether the source is voltage-defined (it owns a branch current).
    pub fn source_excitation(
        &self,
        x: &[f64],
        source: ElementId,
    ) -> Result<(Vec<f64>, SourceKind), EngineError> {
        let e = source.index();
        let name = || self.element_name(e).to_string();
        let el = self
            .elements
            .get(e)
            .ok_or_else(|| EngineError::Invalid("the element belongs to another circuit".into()))?;
        if !el.is_independent_source() {
            return Err(EngineError::Invalid(format!(
                "`{}` is a {}, not an independent source",
                name(),
                el.kind()
            )));
        }
        let lin = self.element_linearization(x, source)?;
        let nl = lin.len();
        let f_at = |u: f64| -> Result<Vec<f64>, EngineError> {
            let mut copy = el.boxed_clone();
            if !copy.set_constant_value(u) {
                return Err(EngineError::Invalid(format!(
                    "`{}` ({}) cannot be given a value",
                    name(),
                    el.kind()
                )));
            }
            let (mut f, mut q, mut df, mut dq) = (
                vec![0.0; nl],
                vec![0.0; nl],
                vec![0.0; nl * nl],
                vec![0.0; nl * nl],
            );
            copy.evaluate(
                &lin.x,
                &EvalContext::dc(),
                &mut Stamp::new(&mut f, &mut q, &mut df, &mut dq),
            );
            Ok(f)
        };
        let (f1, f0) = (f_at(1.0)?, f_at(0.0)?);
        let map = self.layout.local(e);
        let mut b = vec![0.0; self.n];
        for (k, &g) in map.iter().enumerate() {
            if g != NONE32 {
                b[g as usize] -= f1[k] - f0[k];
            }
        }
        let kind = if self.branch_unknown(source).is_some() {
            SourceKind::Voltage
        } else {
            SourceKind::Current
        };
        Ok((b, kind))
    }

    /// Small-signal analysis at the DC solution `x`: for each frequency (Hz, positive and
    /// finite) the transfer function from `source` to `output`, the source's input admittance
    /// or impedance, and the output impedance (see the module documentation for the
    /// definitions and signs).
    pub fn small_signal(
        &self,
        x: &[f64],
        source: ElementId,
        output: NodeId,
        frequencies: &[f64],
        params: &SmallSignalParams,
    ) -> Result<(SmallSignalResult, SmallSignalInfo), EngineError> {
        if let Some(bad) = frequencies.iter().find(|f| !(f.is_finite() && **f > 0.0)) {
            return Err(EngineError::Invalid(format!(
                "small-signal frequencies must be positive and finite, found {bad}"
            )));
        }
        let out = self.node_unknown(output).ok_or_else(|| {
            EngineError::Invalid("the small-signal output is ground, whose voltage is zero".into())
        })?;
        let (b, kind) = self.source_excitation(x, source)?;
        let e = source.index();
        // The first two local unknowns are the source's `pos` and `neg` pins.
        let local = self.layout.local(e);
        let pin = |k: usize| {
            local
                .get(k)
                .copied()
                .filter(|&g| g != NONE32)
                .map(|g| g as usize)
        };
        let pins = [pin(0), pin(1)];
        let branch = self.branch_unknown(source);
        let mut inject = vec![0.0; self.n];
        inject[out] = 1.0;
        let mut solver = SmallSignalSolver::new(self, x, params)?;
        let mut xs = vec![c64::new(0.0, 0.0); self.n];
        let mut zs = vec![c64::new(0.0, 0.0); self.n];
        let nf = frequencies.len();
        let mut res = SmallSignalResult {
            frequencies: frequencies.to_vec(),
            source: kind,
            transfer: Vec::with_capacity(nf),
            input: Vec::with_capacity(nf),
            output_impedance: Vec::with_capacity(nf),
        };
        let at = |v: &[c64], i: Option<usize>| i.map_or(c64::new(0.0, 0.0), |i| v[i]);
        for &f in frequencies {
            let omega = 2.0 * std::f64::consts::PI * f;
            solver.factor(self, omega)?;
            solver.solve(self, omega, &b, &mut xs)?;
            solver.solve(self, omega, &inject, &mut zs)?;
            res.transfer.push(xs[out]);
            res.input.push(match (kind, branch) {
                (SourceKind::Voltage, Some(i)) => -xs[i],
                _ => at(&xs, pins[0]) - at(&xs, pins[1]),
            });
            res.output_impedance.push(zs[out]);
        }
        let info = SmallSignalInfo {
            unknowns: 2 * self.n,
            nnz: solver.nnz(),
            lu: solver.lu_stats(),
        };
        Ok((res, info))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::elements::{Capacitor, CurrentSource, Inductor, Resistor, VoltageSource, Waveform};
    use crate::{Circuit, OpParams};
    use std::f64::consts::PI;

    fn solved(c: Circuit, strategy: LuStrategy) -> (System, Vec<f64>) {
        let mut sys = System::with_strategy(c, strategy).unwrap();
        let (sol, _) = sys.operating_point(&OpParams::default()).unwrap();
        (sys, sol.x)
    }

    fn rc(r: f64, cap: f64) -> Circuit {
        let mut c = Circuit::new();
        let (i, o) = (c.node("in"), c.node("out"));
        c.add("drive", VoltageSource::dc(0.3), &[i, Circuit::GROUND])
            .unwrap();
        c.add("r", Resistor::new(r), &[i, o]).unwrap();
        c.add("c", Capacitor::new(cap), &[o, Circuit::GROUND])
            .unwrap();
        c
    }

    /// RC low-pass: `H = 1 / (1 + jωRC)`, `Y_in = jωC / (1 + jωRC)`, `Z_out = R / (1 + jωRC)`
    /// (circuit theory, common practice), through both LU paths.
    #[test]
    fn rc_low_pass_matches_its_closed_form() {
        let (r, cap) = (1e3, 1e-9);
        let freqs: Vec<f64> = (0..41).map(|k| 10f64.powf(2.0 + 0.2 * k as f64)).collect();
        for strategy in [LuStrategy::FixedPivot, LuStrategy::FaerOnly] {
            let (sys, x) = solved(rc(r, cap), strategy);
            let params = SmallSignalParams { strategy };
            let src = sys.find_element("drive").unwrap();
            let out = sys.find_node("out").unwrap();
            let (res, info) = sys.small_signal(&x, src, out, &freqs, &params).unwrap();
            assert_eq!(res.source, SourceKind::Voltage);
            assert_eq!(info.unknowns, 2 * sys.unknown_count());
            for (k, &f) in freqs.iter().enumerate() {
                let jwrc = c64::new(1.0, 2.0 * PI * f * r * cap);
                let h = c64::new(1.0, 0.0) / jwrc;
                let yin = c64::new(0.0, 2.0 * PI * f * cap) / jwrc;
                let zout = c64::new(r, 0.0) / jwrc;
                assert!((res.transfer[k] - h).norm() < 1e-12 * h.norm().max(1e-3));
                assert!((res.input[k] - yin).norm() < 1e-12 * yin.norm());
                assert!((res.output_impedance[k] - zout).norm() < 1e-12 * zout.norm());
            }
            if strategy == LuStrategy::FixedPivot {
                // One pivot search, then the same pattern for every other frequency.
                assert!(info.lu.faer_factorizations <= 1 + info.lu.fallbacks);
            }
        }
    }

    /// A current source into a parallel RLC: `Z = 1 / (1/R + jωC + 1/(jωL))`, and the input
    /// impedance equals the transfer impedance when the output is the driven node.
    #[test]
    fn current_source_sees_the_parallel_rlc_impedance() {
        let (r, l, cap) = (50.0, 1e-6, 1e-9);
        let mut c = Circuit::new();
        let a = c.node("a");
        let inner = c.node("inner");
        c.add(
            "i1",
            CurrentSource::new(Waveform::Constant(0.0)),
            &[a, Circuit::GROUND],
        )
        .unwrap();
        c.add("r", Resistor::new(r), &[a, Circuit::GROUND]).unwrap();
        c.add("c", Capacitor::new(cap), &[a, Circuit::GROUND])
            .unwrap();
        // A tiny series resistance keeps the inductor's DC node defined.
        c.add("l", Inductor::new(l), &[a, inner]).unwrap();
        c.add("rs", Resistor::new(1e-9), &[inner, Circuit::GROUND])
            .unwrap();
        let (sys, x) = solved(c, LuStrategy::FixedPivot);
        let freqs = [1e5, 1e6, 5.0329e6, 1e7, 1e8];
        let src = sys.find_element("i1").unwrap();
        let node = sys.find_node("a").unwrap();
        let (res, _) = sys
            .small_signal(&x, src, node, &freqs, &SmallSignalParams::default())
            .unwrap();
        assert_eq!(res.source, SourceKind::Current);
        for (k, &f) in freqs.iter().enumerate() {
            let w = 2.0 * PI * f;
            let y = c64::new(1.0 / r, w * cap) + c64::new(1.0, 0.0) / c64::new(1e-9, w * l);
            let z = c64::new(1.0, 0.0) / y;
            assert!((res.transfer[k] - z).norm() < 1e-9 * z.norm(), "{f}");
            assert!((res.input[k] - z).norm() < 1e-9 * z.norm());
            assert!((res.output_impedance[k] - z).norm() < 1e-9 * z.norm());
        }
    }

    /// A node held only by a current source has no path anywhere: the error names it.
    #[test]
    fn a_singular_matrix_names_the_unknown() {
        let mut c = Circuit::new();
        let (a, b) = (c.node("a"), c.node("float"));
        c.add("v", VoltageSource::dc(1.0), &[a, Circuit::GROUND])
            .unwrap();
        c.add("r", Resistor::new(1e3), &[a, Circuit::GROUND])
            .unwrap();
        c.add(
            "i",
            CurrentSource::new(Waveform::Constant(0.0)),
            &[b, Circuit::GROUND],
        )
        .unwrap();
        // The DC operating point holds `float` with gmin; the small-signal matrix has none.
        let (sys, x) = solved(c, LuStrategy::FixedPivot);
        let err = sys
            .small_signal(
                &x,
                sys.find_element("v").unwrap(),
                sys.find_node("a").unwrap(),
                &[1e3],
                &SmallSignalParams::default(),
            )
            .unwrap_err();
        match err {
            EngineError::Singular { culprit, context } => {
                assert_eq!(culprit.unknown, "node float");
                assert!(context.contains("small-signal"));
            }
            other => panic!("unexpected {other}"),
        }
    }

    #[test]
    fn a_resistor_is_not_a_source_and_ground_is_not_an_output() {
        let (sys, x) = solved(rc(1e3, 1e-9), LuStrategy::FixedPivot);
        let p = SmallSignalParams::default();
        let out = sys.find_node("out").unwrap();
        let r = sys.find_element("r").unwrap();
        assert!(matches!(
            sys.small_signal(&x, r, out, &[1.0], &p),
            Err(EngineError::Invalid(_))
        ));
        let v = sys.find_element("drive").unwrap();
        assert!(sys
            .small_signal(&x, v, Circuit::GROUND, &[1.0], &p)
            .is_err());
        assert!(sys.small_signal(&x, v, out, &[0.0], &p).is_err());
    }
}
