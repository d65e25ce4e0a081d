//! The compiled MNA system: unknown numbering, the fixed sparsity pattern, in-place assembly
//! and the Newton iteration every analysis uses.
//!
//! Unknowns are numbered nodes first (node `k` of the circuit, ground excluded, is unknown
//! `k - 1`), then each element's internal unknowns in element order. Row `i` is the equation
//! owned by unknown `i`: KCL for a node, the element's own equation for an internal unknown.
//!
//! Newton solves `J Δ = -F` with `F = f(x) + α₀ q(x) + h + g_min v` and `J = ∂f/∂x + α₀ ∂q/∂x
//! + g_min` (α₀ and the history `h` come from the integration formula; both are 0 in DC).
//! An iterate `x` is accepted, with its last correction `Δ` added (and in time the charges
//! carried along it, `q += (∂q/∂x) Δ`), when the Newton correction computed at it is small for
//! every unknown,
//! `|Δ_i| ≤ reltol max(|x_i|, |x_i + Δ_i|) + abstol_i` (`vntol` for voltages, `abstol` for
//! currents), and every equation's residual at it is small,
//! `|F_i| ≤ reltol · scale_i + abstol_i` where `scale_i` is the largest single contribution to
//! that row (amperes for KCL rows, volts for branch rows; for the charge derivative the
//! contributions are `α₀` times the largest single element charge and the history term). Updates are damped so that no
//! voltage moves by more than `max_voltage_step` per iteration.
//!
//! # Update test in time
//! In a transient two things change in the update test, both so that Newton's first update
//! (the predictor's error) passes when the state it leads to is as accurate as the test asks:
//!
//! * A voltage on a row that carries charge has its update measured against the largest
//!   `|x_i|` it has had on the run's accepted steps, `V_i`:
//!   `|Δ_i| ≤ reltol max(|x_i|, |x_i + Δ_i|, V_i) + vntol`, as the truncation-error test
//!   measures that row's charge against its largest value (and the bypass a device's voltages
//!   against theirs). A charged node resting at 0 V after swinging to 1 V gets
//!   `reltol · 1 V`, not `vntol`. A node without charge keeps the plain bound: no
//!   truncation-error test watches it, and a review measured what a range that never shrinks
//!   does there (a charge-less node at a square-law region boundary, after a 1 V excursion
//!   and then working within 7 mV: 1.1e-5 V off its closed form against 3e-10 V with the
//!   plain bound; after 10 V, 0.7 mV; `tests/transient.rs`). Without the range a settled
//!   node's predictor error of a few microvolts forced a second, confirming iteration at
//!   most steps (the confirming update was at the median 3e-10 of the tolerance).
//! * An ideal voltage source's branch current is left out of the update test: it enters every
//!   equation linearly (`f = [i, -i, x_pos - x_neg - V]`, and no other element sees it), so
//!   with `x = (v, i)` and `F = g(v) + B i` the state after an update has the residual
//!   `g(v + Δv) - g(v) - (∂g/∂v) Δv`, which depends on `Δv` alone: the current's own update,
//!   however large (the predictor's error on a supply current at an edge), says nothing about
//!   convergence, and its error after the update follows the voltages'. Its row and the
//!   residual test are unchanged.
//!
//! Measured (default tolerances): Newton iterations per accepted step 2.03 -> 1.18 on the
//! demo 21-stage 2D-FET ring and 1.99 -> 1.04 on the 101-stage square-law ring, their
//! frequencies moved by 1.0e-7 and 2.1e-8 (the defaults' own errors against the reference
//! setting: 5.5e-5 and 1.4e-4). DC analyses keep the plain test.
//!
//! # Pinned unknowns
//! A node held by an ideal voltage source to ground ([`Element::is_ideal_voltage_source`]: a
//! supply) is known in every solve: the source's row reads `x_node = V`. Its column (every
//! device on the supply) and row would make the factorised matrix dense in one row and column,
//! so [`System`] factorises the matrix without each such node and its source's current. Each
//! Newton solve takes the node's update from the source's row, `Δ_node = -F_branch / J_branch,node`,
//! moves its column to the right-hand side, solves the kept unknowns, and then the source's
//! current from the node's own row (KCL at the supply), `Δ_i = (-F_node - Σ J_node,c Δ_c) /
//! J_node,i`. This is Gaussian elimination of the same equations in another order, so every
//! result (operating points, source currents, waveforms) is the same to rounding, and the
//! unknown numbering, `x`, the linearisation and the exported matrix keep the full system.
//! A second source on the same node, or one between two nodes, stays in the matrix.
//!
//! # Device bypass
//! In time-domain solves with [`NewtonParams::bypass`] `= β > 0`, an element that declares
//! itself [`Element::bypassable`] is not evaluated while its local unknowns stay close to the
//! point `x_e` of its last evaluation; its stored stamp stands in, expanded to first order:
//! `f ≈ f(x_e) + (∂f/∂x)(x_e) δ`, `q ≈ q(x_e) + (∂q/∂x)(x_e) δ` with `δ = x - x_e`, and the
//! stored derivatives as the Jacobian. It is evaluated (and its stamp stored) unless
//!
//! * every local voltage moved `|δ_k| ≤ β (reltol · V_e + vntol)` (a local current:
//!   `β (reltol |x_k| + abstol)`),
//! * every predicted KCL change is `|(∂f/∂x δ)_r| ≤ β (reltol · I_e + abstol)` (a branch row:
//!   `β (reltol |f_r| + vntol)`), and
//! * every predicted charge change is `|(∂q/∂x δ)_r| ≤ β · reltol · Q_e`,
//!
//! where `V_e`, `I_e`, `Q_e` are the largest local voltage, terminal current and charge
//! magnitudes of the element's evaluations since the run began (like the truncation-error
//! test's `q_ref`: a settled device's decaying current does not shrink its tolerance).
//!
//! *Accuracy.* The expansion is exact to first order; its error is `½ f''δ²`, which is the
//! predicted change times `δ / (2 V_nl)` with `V_nl = f'/f''` the voltage over which the device
//! bends (about `n kT/q` below threshold, the overdrive above). With `β = 1` both `δ` and the
//! predicted change are within what the Newton test already accepts as converged, so the
//! bypass error is a fraction `δ / (2 V_nl)` of the Newton tolerance at the device's own
//! scale. Measured (default `β = 1`): the demo 21-stage 2D-FET ring's frequency moves by 1e-7
//! (the defaults' own error against the reference setting is 6e-5) and under
//! `TransientParams::reference` by 6e-13.
//!
//! *Charge.* The stored charges are a function of the stored stamp and `x`, so the accepted
//! state carries the expansion's charges, and the final correction carries them along as for
//! evaluated elements (`q += (∂q/∂x) Δ`). The integrator stores and reuses exactly the charges
//! it accepted, so each row's charge still telescopes from step to step: the bypass error
//! `½ q''δ²` is a one-step discrepancy between the stored charge and `q(x)`, bounded by the
//! charge test, and never accumulates (a floating node's charge is conserved exactly).
//!
//! *Determinism.* Decisions depend only on `x`, the stored stamps and the tolerances, taken
//! in element order on one thread; every transient run starts with no stored stamps, so a
//! run's results do not depend on the runs before it. DC analyses never bypass.
//!
//! # Latency
//! With `TransientParams::latency`, Newton in a transient solves the active unknowns only and
//! holds and checks the latent ones (the `latency` module).

use crate::circuit::{node_id, Circuit, ElementId, Names, NodeId};
use crate::element::{Analysis, Element, EvalContext, Stamp, UnknownKind};
use crate::error::{Culprit, EngineError};
use crate::latency::Latency;
use crate::lu::{LuStats, LuStrategy, Singular, SparseLu};
use faer::sparse::SymbolicSparseColMat;
use std::sync::Arc;

pub(crate) const NONE: usize = usize::MAX;
/// Elements with at most this many local unknowns are evaluated into stack buffers.
const SMALL: usize = 4;

pub(crate) const NONE32: u32 = u32::MAX;

/// Where one element's local indices live in the hot-loop layout.
#[derive(Clone, Copy)]
pub(crate) struct Plan {
    pub(crate) map: u32,
    pub(crate) slot: u32,
    pub(crate) local: u8,
    /// How many of the local unknowns are pins (the element's internals follow them).
    pub(crate) pins: u8,
    pub(crate) charge: bool,
    /// Whether the element may be bypassed ([`Element::bypassable`]).
    pub(crate) bypass: bool,
}

impl Plan {
    /// This element's local unknowns in the list `map32` of every element's.
    fn local_in<'a>(&self, map32: &'a [u32]) -> &'a [u32] {
        &map32[self.map as usize..][..self.local as usize]
    }
}

#[inline]
fn gather(map: &[u32], x: &[f64], local: &mut [f64]) {
    for (k, &g) in map.iter().enumerate() {
        local[k] = if g == NONE32 {
            0.0
        } else {
            debug_assert!((g as usize) < x.len());
            // SAFETY: every index in the layout other than NONE32 was checked against the
            // number of unknowns when the system was built.
            unsafe { *x.get_unchecked(g as usize) }
        };
    }
}

/// The assembly outputs one element's stamp is added into.
struct Outputs<'a> {
    jac: &'a mut [f64],
    cmat: &'a mut [f64],
    f: &'a mut [f64],
    q: &'a mut [f64],
    scale: &'a mut [f64],
    qscale: &'a mut [f64],
}

impl Outputs<'_> {
    #[allow(clippy::too_many_arguments)]
    #[inline]
    fn scatter(
        &mut self,
        map: &[u32],
        slots: &[u32],
        charge: bool,
        a0: f64,
        fl: &[f64],
        ql: &[f64],
        dfl: &[f64],
        dql: &[f64],
    ) {
        debug_assert!(slots.len() == dfl.len() && dql.len() == dfl.len());
        for (r, &g) in map.iter().enumerate() {
            if g != NONE32 {
                let g = g as usize;
                debug_assert!(g < self.f.len());
                // SAFETY: layout indices other than NONE32 are < the number of unknowns, which
                // is the length of every per-row buffer (checked at build).
                unsafe {
                    *self.f.get_unchecked_mut(g) += fl[r];
                    let a = fl[r].abs();
                    let sc = self.scale.get_unchecked_mut(g);
                    if a > *sc {
                        *sc = a;
                    }
                    if charge {
                        *self.q.get_unchecked_mut(g) += ql[r];
                        let aq = ql[r].abs();
                        let qs = self.qscale.get_unchecked_mut(g);
                        if aq > *qs {
                            *qs = aq;
                        }
                    }
                }
            }
        }
        let dynamic = charge && a0 != 0.0;
        for (k, &s) in slots.iter().enumerate() {
            if s != NONE32 {
                debug_assert!((s as usize) < self.jac.len() && self.cmat.len() == self.jac.len());
                // SAFETY: slot indices other than NONE32 are < nnz = jac.len() = cmat.len()
                // (checked at build).
                unsafe {
                    if dynamic {
                        *self.jac.get_unchecked_mut(s as usize) += dfl[k] + a0 * dql[k];
                        *self.cmat.get_unchecked_mut(s as usize) += dql[k];
                    } else {
                        *self.jac.get_unchecked_mut(s as usize) += dfl[k];
                    }
                }
            }
        }
    }
}

/// How many evaluations of bypassable elements ([`Element::bypassable`]) a [`System`] has
/// done and how many it skipped, over its life.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct DeviceEvaluations {
    /// Evaluations done.
    pub evaluated: u64,
    /// Evaluations replaced by the expansion of a stored stamp.
    pub bypassed: u64,
}

/// When an element's stored stamp may stand in for its evaluation.
#[derive(Clone, Copy)]
struct BypassRule {
    /// Multiple of the update tolerance.
    beta: f64,
    tol: Tolerances,
}

/// The stamps of bypassable elements at their last evaluation, in the hot-loop layout: local
/// unknowns, `f` and `q` at each element's `Plan::map` offset, `∂f/∂x` and `∂q/∂x` at its
/// `Plan::slot` offset. Allocated on the first solve that bypasses.
#[derive(Default)]
struct BypassCache {
    /// Per element: whether a stamp is stored.
    valid: Vec<bool>,
    /// Per element: the largest local voltage, terminal current and charge magnitudes of its
    /// evaluations since the last reset (the scales of its tolerances).
    scale: Vec<[f64; 3]>,
    /// The analysis the stored stamps were made for.
    analysis: Option<Analysis>,
    x: Vec<f64>,
    f: Vec<f64>,
    q: Vec<f64>,
    df: Vec<f64>,
    dq: Vec<f64>,
}

impl BypassCache {
    /// Sized for `layout`; forgets everything when the analysis changes.
    fn prepare(&mut self, layout: &Layout, analysis: Analysis) {
        if self.valid.len() != layout.plan.len() {
            let (locs, slots) = (layout.map32.len(), layout.slots32.len());
            *self = BypassCache {
                valid: vec![false; layout.plan.len()],
                scale: vec![[0.0; 3]; layout.plan.len()],
                analysis: None,
                x: vec![0.0; locs],
                f: vec![0.0; locs],
                q: vec![0.0; locs],
                df: vec![0.0; slots],
                dq: vec![0.0; slots],
            };
        }
        if self.analysis != Some(analysis) {
            self.reset();
            self.analysis = Some(analysis);
        }
    }

    fn reset(&mut self) {
        self.valid.fill(false);
        self.scale.fill([0.0; 3]);
    }

    /// Writes the first-order expansion of element `e`'s stored stamp at its local unknowns
    /// `xs` into the buffers and returns true, when every local unknown and every predicted
    /// change of a current or charge is within `rule`'s tolerance; otherwise leaves `fs` and
    /// `qs` zeroed, `dfs` and `dqs` untouched, and returns false.
    #[allow(clippy::too_many_arguments)]
    fn expand(
        &self,
        rule: &BypassRule,
        kinds: &[UnknownKind],
        e: usize,
        plan: &Plan,
        map: &[u32],
        xs: &[f64],
        fs: &mut [f64],
        qs: &mut [f64],
        dfs: &mut [f64],
        dqs: &mut [f64],
    ) -> bool {
        if !self.valid[e] {
            return false;
        }
        let nl = xs.len();
        let (lo, so) = (plan.map as usize, plan.slot as usize);
        let xr = &self.x[lo..lo + nl];
        let (beta, tol) = (rule.beta, &rule.tol);
        let [vref, iref, qref] = self.scale[e];
        for k in 0..nl {
            let g = map[k];
            if g == NONE32 {
                continue;
            }
            let (a, b) = (xs[k], xr[k]);
            let bound = match kinds[g as usize] {
                UnknownKind::Voltage => tol.reltol * vref.max(a.abs()) + tol.vntol,
                UnknownKind::Current => tol.reltol * a.abs().max(b.abs()) + tol.abstol,
            };
            if (a - b).abs() > beta * bound {
                return false;
            }
        }
        let (fr, qr) = (&self.f[lo..lo + nl], &self.q[lo..lo + nl]);
        let (dfr, dqr) = (&self.df[so..so + nl * nl], &self.dq[so..so + nl * nl]);
        let q_bound = beta * tol.reltol * qref;
        for r in 0..nl {
            let row = r * nl..(r + 1) * nl;
            let mut df_d = 0.0;
            for ((&j, &a), &b) in dfr[row.clone()].iter().zip(xs).zip(xr) {
                df_d += j * (a - b);
            }
            fs[r] = fr[r] + df_d;
            let mut dq_d = 0.0;
            if plan.charge {
                for ((&j, &a), &b) in dqr[row].iter().zip(xs).zip(xr) {
                    dq_d += j * (a - b);
                }
                qs[r] = qr[r] + dq_d;
            }
            let g = map[r];
            if g == NONE32 {
                continue;
            }
            // KCL rows against the element's largest terminal current, branch rows (volts)
            // against their own value.
            let f_bound = match kinds[g as usize] {
                UnknownKind::Voltage => tol.reltol * iref + tol.abstol,
                UnknownKind::Current => tol.reltol * fr[r].abs().max(fs[r].abs()) + tol.vntol,
            };
            if df_d.abs() > beta * f_bound || dq_d.abs() > q_bound {
                fs.fill(0.0);
                qs.fill(0.0);
                return false;
            }
        }
        dfs.copy_from_slice(dfr);
        if plan.charge {
            dqs.copy_from_slice(dqr);
        }
        true
    }

    /// Stores element `e`'s fresh stamp and widens its scales.
    #[allow(clippy::too_many_arguments)]
    fn store(
        &mut self,
        kinds: &[UnknownKind],
        e: usize,
        plan: &Plan,
        map: &[u32],
        xs: &[f64],
        fs: &[f64],
        qs: &[f64],
        dfs: &[f64],
        dqs: &[f64],
    ) {
        let nl = xs.len();
        let (lo, so) = (plan.map as usize, plan.slot as usize);
        self.x[lo..lo + nl].copy_from_slice(xs);
        self.f[lo..lo + nl].copy_from_slice(fs);
        self.q[lo..lo + nl].copy_from_slice(qs);
        self.df[so..so + nl * nl].copy_from_slice(dfs);
        self.dq[so..so + nl * nl].copy_from_slice(dqs);
        self.valid[e] = true;
        let [mut vref, mut iref, mut qref] = self.scale[e];
        for k in 0..nl {
            let g = map[k];
            if g != NONE32 && kinds[g as usize] == UnknownKind::Voltage {
                vref = vref.max(xs[k].abs());
                iref = iref.max(fs[k].abs());
            }
            qref = qref.max(qs[k].abs());
        }
        self.scale[e] = [vref, iref, qref];
    }
}

/// A node held by an ideal grounded voltage source, and that source's branch current.
struct Pinned {
    node: usize,
    branch: usize,
    /// The source, and the node's local index in it (its branch current is local 2).
    element: usize,
    node_local: usize,
    /// Slots of `(branch, node)` and `(node, branch)`.
    slot_bn: usize,
    slot_nb: usize,
    /// The node row's other entries: `(column, slot)`.
    row: Vec<(u32, u32)>,
}

/// The Newton matrix without the pinned nodes and their sources' currents, and how to map
/// between it and the full system.
struct Reduction {
    pinned: Vec<Pinned>,
    /// Kept unknown `k` is full unknown `full[k]`.
    full: Vec<usize>,
    /// Per entry of the kept pattern, its full slot.
    gather: Vec<u32>,
    /// Entries of pinned nodes' columns in kept rows: `(kept row, full slot, pinned index)`.
    coupling: Vec<(u32, u32, u32)>,
    values: Vec<f64>,
    rhs: Vec<f64>,
    /// Per pinned node: its update, and its row's right-hand side.
    d_node: Vec<f64>,
    r_node: Vec<f64>,
}

impl Reduction {
    /// Finds the grounded ideal voltage sources of a compiled layout and builds the pattern
    /// without their nodes and currents; `None` when there is nothing to take out (or
    /// nothing would be left).
    #[allow(clippy::too_many_arguments)]
    fn build(
        elements: &[Arc<dyn Element>],
        pin_start: &[usize],
        pins: &[NodeId],
        (plan, map32): (&[Plan], &[u32]),
        kinds: &[UnknownKind],
        col_ptr: &[usize],
        row_idx: &[usize],
        (row_slot_ptr, row_slots): (&[usize], &[u32]),
    ) -> Option<(Reduction, SymbolicSparseColMat<usize>)> {
        let n = kinds.len();
        let slot_of = |r: usize, c: usize| -> Option<usize> {
            let rows = &row_idx[col_ptr[c]..col_ptr[c + 1]];
            rows.binary_search(&r).ok().map(|k| col_ptr[c] + k)
        };
        let mut taken = vec![false; n];
        let mut pinned = Vec::new();
        for (e, element) in elements.iter().enumerate() {
            let local = plan[e].local_in(map32);
            let pins = &pins[pin_start[e]..pin_start[e + 1]];
            if !element.is_ideal_voltage_source()
                || element.has_charge()
                || local.len() != 3
                || pins.len() != 2
                || pins[0].is_ground() == pins[1].is_ground()
            {
                continue;
            }
            let node = if local[0] == NONE32 {
                local[1]
            } else {
                local[0]
            } as usize;
            let branch = local[2] as usize;
            if taken[node] || kinds[branch] != UnknownKind::Current {
                continue;
            }
            let (Some(slot_bn), Some(slot_nb)) = (slot_of(branch, node), slot_of(node, branch))
            else {
                continue;
            };
            taken[node] = true;
            taken[branch] = true;
            // The pattern is symmetric (every element pairs its unknowns both ways), so the
            // row's columns are the column's rows, both in ascending order, and the row's
            // slots run in column order: zipped, no search (a supply's row has an entry for
            // every device on it; a walk along the columns cost every node per source).
            let row = row_idx[col_ptr[node]..col_ptr[node + 1]]
                .iter()
                .map(|&c| c as u32)
                .zip(
                    row_slots[row_slot_ptr[node]..row_slot_ptr[node + 1]]
                        .iter()
                        .copied(),
                )
                .filter(|&(c, _)| c as usize != branch)
                .collect();
            pinned.push(Pinned {
                node,
                branch,
                element: e,
                node_local: usize::from(local[0] == NONE32),
                slot_bn,
                slot_nb,
                row,
            });
        }
        let full: Vec<usize> = (0..n).filter(|&i| !taken[i]).collect();
        if pinned.is_empty() || full.is_empty() {
            return None;
        }
        let mut kept = vec![NONE; n];
        for (k, &i) in full.iter().enumerate() {
            kept[i] = k;
        }
        // The pinned entry of each node column, by index (a search per matrix entry would cost
        // pinned sources times their fan-out).
        let mut pin_index = vec![NONE; n];
        for (k, p) in pinned.iter().enumerate() {
            pin_index[p.node] = k;
        }
        let pin_of = |c: usize| Some(pin_index[c]).filter(|&k| k != NONE);
        // Sized for the whole pattern (a bound; the untouched rest costs no memory): no
        // regrowth copies on a large circuit.
        let nnz = row_idx.len();
        let mut red_ptr = Vec::with_capacity(n + 1);
        red_ptr.push(0usize);
        let mut red_rows = Vec::with_capacity(nnz);
        let mut gather = Vec::with_capacity(nnz);
        let mut coupling = Vec::with_capacity(pinned.iter().map(|p| p.row.len()).sum());
        for c in 0..n {
            for s in col_ptr[c]..col_ptr[c + 1] {
                let r = kept[row_idx[s]];
                if r == NONE {
                    continue;
                }
                // Every index is below NONE32 (checked by the compile).
                if kept[c] != NONE {
                    red_rows.push(r);
                    gather.push(s as u32);
                } else if let Some(p) = pin_of(c) {
                    coupling.push((r as u32, s as u32, p as u32));
                }
            }
            if kept[c] != NONE {
                red_ptr.push(red_rows.len());
            }
        }
        let m = full.len();
        let pattern = SymbolicSparseColMat::new_checked(m, m, red_ptr, None, red_rows);
        let count = pinned.len();
        Some((
            Reduction {
                pinned,
                full,
                values: vec![0.0; gather.len()],
                gather,
                coupling,
                rhs: vec![0.0; m],
                d_node: vec![0.0; count],
                r_node: vec![0.0; count],
            },
            pattern,
        ))
    }
}

/// Convergence tolerances shared by every analysis.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tolerances {
    /// Relative tolerance on updates and residuals (default 1e-3).
    pub reltol: f64,
    /// Absolute tolerance on voltages in volts (default 1e-6 V).
    pub vntol: f64,
    /// Absolute tolerance on currents in amperes (default 1e-12 A).
    pub abstol: f64,
}

impl Default for Tolerances {
    fn default() -> Self {
        Tolerances {
            reltol: 1e-3,
            vntol: 1e-6,
            abstol: 1e-12,
        }
    }
}

/// Parameters of one Newton solve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NewtonParams {
    /// Convergence tolerances.
    pub tol: Tolerances,
    /// Iteration limit (assemblies).
    pub max_iterations: usize,
    /// Largest change of any voltage unknown in one iteration, in volts (default 0.5 V).
    pub max_voltage_step: f64,
    /// A measured quadratic-convergence constant `m` (default none): an update `Δ` is also
    /// accepted when the error it leaves, estimated as `m ‖Δ‖²` in units of the update
    /// tolerances, is within them, even if the residual before it was not (the transient sets
    /// it from `NewtonInfo::quadratic` of earlier steps).
    pub quadratic: Option<f64>,
    /// Device bypass tolerance as a multiple of the update tolerance `tol` (see the module
    /// doc); 0 evaluates every element at every iteration (the default, and what DC analyses
    /// use). Applies to time-domain solves only.
    pub bypass: f64,
}

impl Default for NewtonParams {
    fn default() -> Self {
        NewtonParams {
            tol: Tolerances::default(),
            max_iterations: 100,
            max_voltage_step: 0.5,
            quadratic: None,
            bypass: 0.0,
        }
    }
}

/// What a converged Newton solve reports.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NewtonInfo {
    /// Assemblies done, the accepting one included.
    pub iterations: usize,
    /// Largest residual-to-tolerance ratio before the last update (<= 1 unless the update was
    /// accepted through `NewtonParams::quadratic`).
    pub residual_ratio: f64,
    /// `‖Δ_k‖ / ‖Δ_{k-1}‖²` of the last two updates in units of their tolerances, when there
    /// were two: the constant of quadratic convergence.
    pub quadratic: Option<f64>,
}

/// How a Newton solve failed.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum NewtonFailure {
    Singular {
        unknown: usize,
    },
    /// An element returned a current or charge that is not a finite number on this row.
    NotANumber {
        unknown: usize,
    },
    NoConvergence {
        worst: Vec<(usize, f64, f64)>,
    },
    /// A latent row joined the working rows of the latency partition: the transient must
    /// give it its charge history and solve again (not a failure of the step).
    Woke {
        iterations: usize,
    },
}

/// The extra terms one solve adds to the plain assembled system.
pub(crate) struct Load<'a> {
    pub ctx: EvalContext,
    /// Leading coefficient of the integration formula (0 in DC).
    pub a0: f64,
    /// History term per row, added to the residual (transient only).
    pub hist: Option<&'a [f64]>,
    /// Conductance from every node to ground.
    pub gmin: f64,
    /// Rows replaced by `x_i = value`.
    pub clamps: &'a [(usize, f64)],
    /// Pseudo-transient term: conductance per node row towards a previous iterate.
    pub pseudo: Option<(f64, &'a [f64])>,
}

impl<'a> Load<'a> {
    pub(crate) fn dc(ctx: EvalContext, gmin: f64) -> Self {
        Load {
            ctx,
            a0: 0.0,
            hist: None,
            gmin,
            clamps: &[],
            pseudo: None,
        }
    }
}

pub(crate) struct Layout {
    diag_slot: Vec<u32>,
    /// Slots of each row (for replacing a row by a clamp).
    row_slot_ptr: Vec<usize>,
    row_slots: Vec<u32>,
    /// Per unknown `u`: the elements that have it as a local unknown, with its local index,
    /// in element order (`adj_e` and `adj_k` from `adj_ptr[u]` to `adj_ptr[u + 1]`).
    pub(crate) adj_ptr: Vec<usize>,
    adj_e: Vec<u32>,
    adj_k: Vec<u8>,
    /// Per element: where its local unknowns and slots start; every element's local
    /// unknowns (`NONE32`: ground), and its slots local row by local column.
    pub(crate) plan: Vec<Plan>,
    pub(crate) map32: Vec<u32>,
    pub(crate) slots32: Vec<u32>,
}

impl Layout {
    /// Element `e`'s local unknowns, pins first, then its internals (`NONE32`: ground).
    pub(crate) fn local(&self, e: usize) -> &[u32] {
        self.plan[e].local_in(&self.map32)
    }

    /// The elements that have unknown `u` as a local unknown, in element order, and its
    /// local index in each.
    pub(crate) fn elements_of(&self, u: usize) -> (&[u32], &[u8]) {
        let range = self.adj_ptr[u]..self.adj_ptr[u + 1];
        (&self.adj_e[range.clone()], &self.adj_k[range])
    }
}

/// Per unknown, the elements that have it as a local unknown with the local index, in element
/// order, as compressed lists: `(ptr, elements, local indices)`.
fn element_adjacency(map32: &[u32], plan: &[Plan], n: usize) -> (Vec<usize>, Vec<u32>, Vec<u8>) {
    let mut ptr = vec![0usize; n + 1];
    for &g in map32 {
        if g != NONE32 {
            ptr[g as usize + 1] += 1;
        }
    }
    for r in 0..n {
        ptr[r + 1] += ptr[r];
    }
    let (mut adj_e, mut adj_k) = (vec![0u32; ptr[n]], vec![0u8; ptr[n]]);
    let mut fill = ptr.clone();
    for (e, p) in plan.iter().enumerate() {
        let local = p.local_in(map32);
        for (k, &g) in local.iter().enumerate() {
            if g != NONE32 {
                let at = fill[g as usize];
                (adj_e[at], adj_k[at]) = (e as u32, k as u8);
                fill[g as usize] += 1;
            }
        }
    }
    (ptr, adj_e, adj_k)
}

/// Buffers for evaluating one element of more than `SMALL` local unknowns alone (its local
/// unknowns and its local `∂f/∂x` and `∂q/∂x`), kept by the caller so that a hot loop of such
/// evaluations allocates nothing once they are grown.
#[derive(Default)]
pub(crate) struct LocalScratch {
    x: Vec<f64>,
    df: Vec<f64>,
    dq: Vec<f64>,
    /// The charges of an element without charge, which [`Stores`] does not keep.
    q: Vec<f64>,
}

impl LocalScratch {
    /// Buffers for elements of up to `local` local unknowns.
    pub(crate) fn new(local: usize) -> Self {
        LocalScratch {
            x: vec![0.0; local],
            df: vec![0.0; local * local],
            dq: vec![0.0; local * local],
            q: vec![0.0; local],
        }
    }
}

/// Stored local currents and charges of elements (the latency partition's frozen values):
/// element `e`'s currents at its `Plan::map` offset in `f`, and, for an element with charge,
/// its charges at `q_at[e]` in `q` (elements without charge keep none: a square-law ring's
/// devices, say).
pub(crate) struct Stores<'a> {
    pub(crate) f: &'a mut [f64],
    pub(crate) q: &'a mut [f64],
    pub(crate) q_at: &'a [u32],
}

/// Zeroes `buf`'s first `len` entries, growing it to `len` if it is shorter.
fn scratch_for(buf: &mut Vec<f64>, len: usize) {
    if buf.len() < len {
        buf.resize(len, 0.0);
    }
    buf[..len].fill(0.0);
}

/// A circuit compiled for analysis: fixed pattern, buffers and the LU solver.
///
/// Build it once with [`System::new`] and run any number of analyses on it.
pub struct System {
    pub(crate) elements: Vec<Arc<dyn Element>>,
    element_names: Names,
    /// Element `e`'s pins are `pins[pin_start[e]..pin_start[e + 1]]`.
    pins: Vec<NodeId>,
    pin_start: Vec<usize>,
    pub(crate) node_names: Names,
    pub(crate) n: usize,
    pub(crate) n_nodes: usize,
    pub(crate) kinds: Vec<UnknownKind>,
    /// Per unknown: the element owning it (`NONE32` for a node voltage); see [`Self::owner`].
    unknown_owner: Vec<u32>,
    pub(crate) layout: Layout,
    pub(crate) pattern: SymbolicSparseColMat<usize>,
    pub(crate) charge_rows: Vec<usize>,
    pub(crate) breakpoint_elements: Vec<usize>,
    // Assembly outputs.
    pub(crate) jac: Vec<f64>,
    /// `∂q/∂x` in pattern order (filled only when `a0 != 0`), to carry the charges along the
    /// final Newton correction.
    pub(crate) cmat: Vec<f64>,
    /// Scratch for `C Δ`.
    cdelta: Vec<f64>,
    pub(crate) f: Vec<f64>,
    pub(crate) q: Vec<f64>,
    pub(crate) scale: Vec<f64>,
    /// Largest single element charge on each row (the total may cancel).
    qscale: Vec<f64>,
    pub(crate) rhs: Vec<f64>,
    // Element-local buffers.
    xl: Vec<f64>,
    fl: Vec<f64>,
    ql: Vec<f64>,
    dfl: Vec<f64>,
    dql: Vec<f64>,
    /// Factorises the Newton matrix without the pinned unknowns when there are any.
    pub(crate) lu: SparseLu,
    reduction: Option<Reduction>,
    any_bypassable: bool,
    bypass: BypassCache,
    evaluations: DeviceEvaluations,
    /// The active/latent partition of the running transient, when it uses one.
    pub(crate) latency: Option<Latency>,
    /// Per unknown: it enters every equation linearly (an ideal voltage source's branch
    /// current), so the time-domain update test leaves it out (module doc, "Update test in
    /// time").
    linear_unknown: Vec<bool>,
    /// Per unknown: a voltage on a row that carries charge, whose update the time-domain test
    /// measures against its range (module doc, "Update test in time").
    ranged: Vec<bool>,
    /// Per unknown: the largest `|x_i|` of the running transient's accepted steps (empty
    /// outside one; read for `ranged` unknowns only).
    voltage_range: Vec<f64>,
}

impl System {
    /// Compiles `circuit` with the default LU strategy.
    pub fn new(circuit: Circuit) -> Result<Self, EngineError> {
        Self::with_strategy(circuit, LuStrategy::default())
    }

    /// Compiles `circuit`, choosing how the Newton matrix is factorised.
    pub fn with_strategy(circuit: Circuit, strategy: LuStrategy) -> Result<Self, EngineError> {
        let n_nodes = circuit.node_count() - 1;
        let Circuit {
            node_names,
            elements,
            element_names,
            pins,
            pin_start,
        } = circuit;
        let ne = elements.len();
        // Sized once (a supply's one internal unknown would double lists of every node), and
        // checked before anything is built: every index is kept in 32 bits.
        let (mut internals, mut slot_count) = (0usize, 0usize);
        for (e, element) in elements.iter().enumerate() {
            let own = element.internals().len();
            let nl = pin_start[e + 1] - pin_start[e] + own;
            if nl > u8::MAX as usize {
                return Err(EngineError::Invalid(
                    "an element has more than 255 local unknowns".into(),
                ));
            }
            internals += own;
            slot_count = slot_count.saturating_add(nl * nl);
        }
        let n_all = n_nodes + internals;
        let locals = pins.len() + internals;
        if n_all == 0 {
            return Err(EngineError::Invalid("the circuit has no unknowns".into()));
        }
        let too_large = |what: &str| {
            EngineError::Invalid(format!(
                "the circuit is too large: {n_all} unknowns, {ne} elements, {locals} element \
                 terminals and {what}"
            ))
        };
        if n_all >= NONE32 as usize
            || ne >= NONE32 as usize
            || locals >= NONE32 as usize
            || slot_count >= NONE32 as usize
        {
            return Err(too_large(&format!("{slot_count} element matrix entries")));
        }
        let mut kinds = Vec::with_capacity(n_all);
        kinds.resize(n_nodes, UnknownKind::Voltage);
        let mut unknown_owner = Vec::with_capacity(n_all);
        unknown_owner.resize(n_nodes, NONE32);
        let mut linear_unknown = Vec::with_capacity(n_all);
        linear_unknown.resize(n_nodes, false);
        // Per element, where its local unknowns and slots start (`Plan`), and every element's
        // local-to-global map in one list.
        let mut plan = Vec::with_capacity(ne);
        let mut map32: Vec<u32> = Vec::with_capacity(locals);
        let mut breakpoint_elements = Vec::new();
        let mut max_local = 0;
        let mut slot_at = 0usize;
        for (e, element) in elements.iter().enumerate() {
            let map_at = map32.len();
            for p in &pins[pin_start[e]..pin_start[e + 1]] {
                map32.push(if p.is_ground() { NONE32 } else { p.0 - 1 });
            }
            for internal in element.internals() {
                let idx = kinds.len();
                linear_unknown.push(element.is_ideal_voltage_source());
                kinds.push(internal.kind);
                unknown_owner.push(e as u32);
                map32.push(idx as u32);
            }
            let nl = map32.len() - map_at;
            max_local = max_local.max(nl);
            plan.push(Plan {
                map: map_at as u32,
                slot: slot_at as u32,
                local: nl as u8,
                pins: (pin_start[e + 1] - pin_start[e]) as u8,
                charge: element.has_charge(),
                bypass: element.bypassable(),
            });
            slot_at += nl * nl;
            if element.next_breakpoint(f64::NEG_INFINITY).is_some() {
                breakpoint_elements.push(e);
            }
        }
        let n = kinds.len();
        let local_of = |e: usize| plan[e].local_in(&map32);

        // Per unknown, the elements that have it as a local unknown, with the local index, in
        // element order.
        let (adj_ptr, adj_e, adj_k) = element_adjacency(&map32, &plan, n);
        // Compressed columns with sorted, unique rows: every element's local pairs and the
        // diagonal (branch rows of voltage-defined elements have a zero diagonal; it stays in
        // the pattern so that clamps and pseudo-transient terms can use it). Row `r` is added
        // to every column its elements touch, rows in increasing order, so each column comes
        // out sorted, and a repeat is the column's last row (no sort: a supply's column
        // holds tens of thousands of rows).
        let each_column = |r: usize, f: &mut dyn FnMut(usize)| {
            f(r);
            for &e in &adj_e[adj_ptr[r]..adj_ptr[r + 1]] {
                for &c in local_of(e as usize) {
                    if c != NONE32 {
                        f(c as usize);
                    }
                }
            }
        };
        let mut last = vec![NONE; n];
        let mut col_ptr = vec![0usize; n + 1];
        for r in 0..n {
            each_column(r, &mut |c| {
                if last[c] != r {
                    last[c] = r;
                    col_ptr[c + 1] += 1;
                }
            });
        }
        for c in 0..n {
            col_ptr[c + 1] += col_ptr[c];
        }
        let nnz = col_ptr[n];
        if nnz >= NONE32 as usize {
            return Err(too_large(&format!("{nnz} matrix entries")));
        }
        let mut row_idx = vec![0usize; nnz];
        let mut fill = col_ptr.clone();
        last.fill(NONE);
        for r in 0..n {
            each_column(r, &mut |c| {
                if last[c] != r {
                    last[c] = r;
                    row_idx[fill[c]] = r;
                    fill[c] += 1;
                }
            });
        }
        drop(fill);
        // Each element's slots, local row by local column: column `c`'s rows are marked with
        // their slots, then read by every element on `c`.
        let mut slots32 = vec![NONE32; slot_count];
        let mut diag_slot = vec![0u32; n];
        let mut at = last;
        for c in 0..n {
            for s in col_ptr[c]..col_ptr[c + 1] {
                at[row_idx[s]] = s;
            }
            diag_slot[c] = at[c] as u32;
            let range = adj_ptr[c]..adj_ptr[c + 1];
            for (&e, &k) in adj_e[range.clone()].iter().zip(&adj_k[range]) {
                let (local, slot) = (local_of(e as usize), plan[e as usize].slot as usize);
                let nl = local.len();
                for (j, &r) in local.iter().enumerate() {
                    if r != NONE32 {
                        slots32[slot + j * nl + k as usize] = at[r as usize] as u32;
                    }
                }
            }
        }
        // Each row's slots, in column order (the slots run column by column).
        let mut row_slot_ptr = vec![0usize; n + 1];
        for &r in &row_idx {
            row_slot_ptr[r + 1] += 1;
        }
        for r in 0..n {
            row_slot_ptr[r + 1] += row_slot_ptr[r];
        }
        let mut row_slots = vec![0u32; row_idx.len()];
        let mut next = row_slot_ptr.clone();
        for (s, &r) in row_idx.iter().enumerate() {
            row_slots[next[r]] = s as u32;
            next[r] += 1;
        }
        let reduced = Reduction::build(
            &elements,
            &pin_start,
            &pins,
            (&plan, &map32),
            &kinds,
            &col_ptr,
            &row_idx,
            (&row_slot_ptr, &row_slots),
        );
        let pattern = SymbolicSparseColMat::new_checked(n, n, col_ptr, None, row_idx);
        let (reduction, solved_pattern) = match reduced {
            Some((r, p)) => (Some(r), p),
            None => (None, pattern.clone()),
        };
        let lu = SparseLu::new(solved_pattern, strategy).map_err(EngineError::Invalid)?;
        let mut is_charge_row = vec![false; n];
        for p in plan.iter().filter(|p| p.charge) {
            for &g in p.local_in(&map32) {
                if g != NONE32 {
                    is_charge_row[g as usize] = true;
                }
            }
        }
        let charge_rows = (0..n).filter(|&i| is_charge_row[i]).collect();
        let ranged = (0..n)
            .map(|i| is_charge_row[i] && kinds[i] == UnknownKind::Voltage)
            .collect();
        let any_bypassable = plan.iter().any(|p| p.bypass);
        Ok(System {
            elements,
            element_names,
            pins,
            pin_start,
            node_names,
            n,
            n_nodes,
            kinds,
            unknown_owner,
            layout: Layout {
                adj_ptr,
                adj_e,
                adj_k,
                diag_slot,
                row_slot_ptr,
                row_slots,
                plan,
                map32,
                slots32,
            },
            pattern,
            charge_rows,
            breakpoint_elements,
            jac: vec![0.0; nnz],
            cmat: vec![0.0; nnz],
            cdelta: vec![0.0; n],
            f: vec![0.0; n],
            q: vec![0.0; n],
            scale: vec![0.0; n],
            qscale: vec![0.0; n],
            rhs: vec![0.0; n],
            xl: vec![0.0; max_local],
            fl: vec![0.0; max_local],
            ql: vec![0.0; max_local],
            dfl: vec![0.0; max_local * max_local],
            dql: vec![0.0; max_local * max_local],
            lu,
            reduction,
            any_bypassable,
            bypass: BypassCache::default(),
            evaluations: DeviceEvaluations::default(),
            latency: None,
            linear_unknown,
            ranged,
            voltage_range: Vec::new(),
        })
    }

    /// Number of unknowns (node voltages and branch currents).
    pub fn unknown_count(&self) -> usize {
        self.n
    }

    /// Number of stored entries of the Newton matrix.
    pub fn matrix_nnz(&self) -> usize {
        self.jac.len()
    }

    /// The name of unknown `i`: `node out` for a node voltage, `element.internal` (such as
    /// `supply.i`) for an element's own unknown.
    pub fn unknown_name(&self, i: usize) -> String {
        match self.owner(i) {
            None => node_label(self.node_names.get(i + 1)),
            Some(e) => {
                // The element's internals follow its pins, numbered in order.
                let first = self.layout.local(e)[self.pin_count(e)] as usize;
                let k = i - first;
                format!(
                    "{}.{}",
                    self.element_names.get(e),
                    self.elements[e].internals()[k].name
                )
            }
        }
    }

    /// How many evaluations of bypassable elements this system has done and skipped.
    pub fn device_evaluations(&self) -> DeviceEvaluations {
        self.evaluations
    }

    /// Forgets every stored stamp, so that a run does not depend on the runs before it.
    pub(crate) fn reset_bypass(&mut self) {
        self.bypass.reset();
    }

    /// Starts a transient's voltage ranges at `|x|` (module doc, "Update test in time").
    pub(crate) fn begin_voltage_range(&mut self, x: &[f64]) {
        self.voltage_range.clear();
        self.voltage_range.extend(x.iter().map(|v| v.abs()));
    }

    /// Widens the voltage ranges by an accepted step's unknowns `x` (those in `subset` when
    /// given).
    pub(crate) fn widen_voltage_range(&mut self, x: &[f64], subset: Option<&[usize]>) {
        let range = &mut self.voltage_range;
        each(subset, self.n, |i| range[i] = range[i].max(x[i].abs()));
    }

    /// Ends the voltage ranges: later solves (DC, small-signal) use the plain update test.
    pub(crate) fn end_voltage_range(&mut self) {
        self.voltage_range.clear();
    }

    /// What the LU solver has done so far.
    pub fn lu_stats(&self) -> LuStats {
        self.lu.stats()
    }

    /// The unknown holding the voltage of `node` (`None` for ground).
    pub fn node_unknown(&self, node: NodeId) -> Option<usize> {
        (!node.is_ground()).then(|| node.0 as usize - 1)
    }

    /// The unknown of the first branch current an element owns, if any.
    pub fn branch_unknown(&self, element: ElementId) -> Option<usize> {
        let e = element.0;
        if e >= self.elements.len() {
            return None;
        }
        let local = self.layout.local(e);
        let pins = self.pin_count(e);
        let internals = self.elements[e].internals();
        internals
            .iter()
            .position(|i| i.kind == UnknownKind::Current)
            .map(|k| local[pins + k] as usize)
    }

    /// The name of a node.
    pub fn node_name(&self, node: NodeId) -> &str {
        self.node_names.get(node.0 as usize)
    }

    /// The element called `name`, if any.
    pub fn find_element(&self, name: &str) -> Option<ElementId> {
        self.element_names.find(name).map(ElementId)
    }

    /// The node called `name`, if any.
    pub fn find_node(&self, name: &str) -> Option<NodeId> {
        self.node_names.find(name).map(node_id)
    }

    pub(crate) fn element_name(&self, e: usize) -> &str {
        self.element_names.get(e)
    }

    /// Evaluates every element at `x` and accumulates `f`, `q`, the row scales and the
    /// matrix values `∂f/∂x + a0 ∂q/∂x`. Allocates nothing.
    pub(crate) fn assemble(&mut self, x: &[f64], ctx: &EvalContext, a0: f64) {
        self.assemble_with(x, ctx, a0, None, false, None);
    }

    /// [`System::assemble`], also writing every element's local currents and charges into
    /// `keep`: what [`System::evaluate_into`] would store for each element at the same `x`
    /// and `ctx`, bit for bit (the same evaluation).
    pub(crate) fn assemble_keeping(
        &mut self,
        x: &[f64],
        ctx: &EvalContext,
        a0: f64,
        keep: Stores<'_>,
    ) {
        self.assemble_with(x, ctx, a0, None, false, Some(keep));
    }

    /// [`System::assemble`], bypassing elements under `rule` when given. With `live` (a
    /// running transient's latency partition, see the `latency` module) the rows start from
    /// their frozen elements' sums and only the live elements are evaluated; the matrix then
    /// holds valid values in the live elements' slots only. With `keep`, see
    /// [`System::assemble_keeping`].
    fn assemble_with(
        &mut self,
        x: &[f64],
        ctx: &EvalContext,
        a0: f64,
        rule: Option<BypassRule>,
        live: bool,
        mut keep: Option<Stores<'_>>,
    ) {
        if rule.is_some() {
            self.bypass.prepare(&self.layout, ctx.analysis);
        }
        let latency = self.latency.as_ref().filter(|_| live);
        let System {
            elements,
            layout,
            kinds,
            jac,
            cmat,
            f,
            q,
            scale,
            qscale,
            xl,
            fl,
            ql,
            dfl,
            dql,
            bypass,
            evaluations,
            ..
        } = self;
        if let Some(l) = latency {
            // Every live element's slots are cleared before any is scattered (elements share
            // slots).
            for &e in &l.live {
                let plan = &layout.plan[e as usize];
                let nl = plan.local as usize;
                for &s in &layout.slots32[plan.slot as usize..][..nl * nl] {
                    if s != NONE32 {
                        jac[s as usize] = 0.0;
                        cmat[s as usize] = 0.0;
                    }
                }
            }
            for &r in &l.work {
                f[r] = l.fz_f[r];
                q[r] = l.fz_q[r];
                scale[r] = l.fz_scale[r];
                qscale[r] = l.fz_qscale[r];
            }
        } else {
            jac.fill(0.0);
            if a0 != 0.0 {
                cmat.fill(0.0);
            }
            f.fill(0.0);
            q.fill(0.0);
            scale.fill(0.0);
            qscale.fill(0.0);
        }
        let mut out = Outputs {
            jac,
            cmat,
            f,
            q,
            scale,
            qscale,
        };
        let count = latency.map_or(elements.len(), |l| l.live.len());
        for k in 0..count {
            let e = latency.map_or(k, |l| l.live[k] as usize);
            let (element, plan) = (&elements[e], &layout.plan[e]);
            let nl = plan.local as usize;
            let map = &layout.map32[plan.map as usize..][..nl];
            let slots = &layout.slots32[plan.slot as usize..][..nl * nl];
            let charge = plan.charge;
            // Small elements use stack buffers: zeroing them is a few vector stores instead of
            // four library calls per element.
            let (mut xs, mut fs, mut qs) = ([0.0; SMALL], [0.0; SMALL], [0.0; SMALL]);
            let (mut dfs, mut dqs) = ([0.0; SMALL * SMALL], [0.0; SMALL * SMALL]);
            let (xb, fb, qb, dfb, dqb) = if nl <= SMALL {
                (
                    &mut xs[..nl],
                    &mut fs[..nl],
                    &mut qs[..nl],
                    &mut dfs[..nl * nl],
                    &mut dqs[..nl * nl],
                )
            } else {
                let bufs = (
                    &mut xl[..nl],
                    &mut fl[..nl],
                    &mut ql[..nl],
                    &mut dfl[..nl * nl],
                    &mut dql[..nl * nl],
                );
                bufs.1.fill(0.0);
                bufs.2.fill(0.0);
                bufs.3.fill(0.0);
                bufs.4.fill(0.0);
                bufs
            };
            gather(map, x, xb);
            match rule.as_ref().filter(|_| plan.bypass) {
                None => element.evaluate(xb, ctx, &mut Stamp::new(fb, qb, dfb, dqb)),
                Some(rule) => {
                    if bypass.expand(rule, kinds, e, plan, map, xb, fb, qb, dfb, dqb) {
                        evaluations.bypassed += 1;
                    } else {
                        element.evaluate(xb, ctx, &mut Stamp::new(fb, qb, dfb, dqb));
                        bypass.store(kinds, e, plan, map, xb, fb, qb, dfb, dqb);
                        evaluations.evaluated += 1;
                    }
                }
            }
            if plan.bypass && rule.is_none() {
                evaluations.evaluated += 1;
            }
            if let Some(k) = keep.as_mut() {
                let at = plan.map as usize;
                k.f[at..at + nl].copy_from_slice(fb);
                if charge {
                    let at = k.q_at[e] as usize;
                    k.q[at..at + nl].copy_from_slice(qb);
                }
            }
            out.scatter(map, slots, charge, a0, fb, qb, dfb, dqb);
        }
    }

    /// Evaluates element `e` alone at `x` and writes its local currents and charges into
    /// `stores` (`scratch` for an element of more than `SMALL` local unknowns, and for the
    /// charges of an element without charge, which are not kept).
    pub(crate) fn evaluate_into(
        &self,
        e: usize,
        x: &[f64],
        ctx: &EvalContext,
        stores: Stores<'_>,
        scratch: &mut LocalScratch,
    ) {
        let plan = &self.layout.plan[e];
        let (lo, nl) = (plan.map as usize, plan.local as usize);
        let fs = &mut stores.f[lo..lo + nl];
        if plan.charge {
            let at = stores.q_at[e] as usize;
            self.evaluate_local(e, x, ctx, fs, &mut stores.q[at..at + nl], scratch, |_| {});
        } else {
            let mut spare = std::mem::take(&mut scratch.q);
            scratch_for(&mut spare, nl);
            self.evaluate_local(e, x, ctx, fs, &mut spare[..nl], scratch, |_| {});
            scratch.q = spare;
        }
    }

    /// Evaluates element `e` alone at `x` into its local currents `fs` and charges `qs`, and
    /// hands its local `∂f/∂x` (row by row) to `with_df`. An element of more than `SMALL`
    /// local unknowns works in `scratch` (grown to it if need be).
    #[allow(clippy::too_many_arguments)]
    fn evaluate_local(
        &self,
        e: usize,
        x: &[f64],
        ctx: &EvalContext,
        fs: &mut [f64],
        qs: &mut [f64],
        scratch: &mut LocalScratch,
        with_df: impl FnOnce(&[f64]),
    ) {
        let plan = &self.layout.plan[e];
        let nl = plan.local as usize;
        let lo = plan.map as usize;
        fs.fill(0.0);
        qs.fill(0.0);
        let map = &self.layout.map32[lo..lo + nl];
        // Small elements on the stack: the latency partition freezes elements at every
        // refresh, and hot loops allocate nothing.
        if nl <= SMALL {
            let (mut xs, mut df, mut dq) =
                ([0.0; SMALL], [0.0; SMALL * SMALL], [0.0; SMALL * SMALL]);
            gather(map, x, &mut xs[..nl]);
            let stamp = &mut Stamp::new(fs, qs, &mut df[..nl * nl], &mut dq[..nl * nl]);
            self.elements[e].evaluate(&xs[..nl], ctx, stamp);
            with_df(&df[..nl * nl]);
        } else {
            let LocalScratch { x: xs, df, dq, .. } = scratch;
            scratch_for(xs, nl);
            scratch_for(df, nl * nl);
            scratch_for(dq, nl * nl);
            let (xs, df, dq) = (&mut xs[..nl], &mut df[..nl * nl], &mut dq[..nl * nl]);
            gather(map, x, xs);
            self.elements[e].evaluate(xs, ctx, &mut Stamp::new(fs, qs, df, dq));
            with_df(df);
        }
    }

    /// The most local unknowns of any element.
    pub(crate) fn max_local(&self) -> usize {
        self.xl.len()
    }

    /// The nodes held by ideal grounded sources and those sources' currents (see "Pinned
    /// unknowns" in the module doc).
    pub(crate) fn pinned_pairs(&self) -> Vec<(usize, usize)> {
        self.reduction.as_ref().map_or(Vec::new(), |r| {
            r.pinned.iter().map(|p| (p.node, p.branch)).collect()
        })
    }

    /// Sets each pinned node of `x` to the value its source's row asks for at `ctx` (one
    /// exact Newton update of that linear row). A guess whose other nodes already sit at the
    /// rails (a clamped start) then needs no damped Newton steps to walk the supply up from
    /// zero.
    pub(crate) fn pin_to_sources(&self, x: &mut [f64], ctx: &EvalContext) {
        let Some(reduction) = self.reduction.as_ref() else {
            return;
        };
        // Three local unknowns each: on the stack, the scratch stays empty.
        let scratch = &mut LocalScratch::default();
        for p in &reduction.pinned {
            // A pinned source has two pins and its current: local rows 0 to 2, the branch 2.
            let (mut f, mut q, mut slope) = ([0.0; 3], [0.0; 3], 0.0);
            self.evaluate_local(p.element, x, ctx, &mut f, &mut q, scratch, |df| {
                slope = df[2 * 3 + p.node_local]
            });
            let step = -f[2] / slope;
            if slope != 0.0 && step.is_finite() {
                x[p.node] += step;
            }
        }
    }

    /// Element `e` for changing: a model shared with other elements is copied first, so the
    /// change is this element's alone.
    pub(crate) fn element_mut(&mut self, e: usize) -> &mut dyn Element {
        let element = &mut self.elements[e];
        if Arc::get_mut(element).is_none() {
            *element = Arc::from(element.boxed_clone());
        }
        Arc::get_mut(element).expect("a fresh copy has no other owner")
    }

    /// The element owning unknown `u` (an internal unknown), or `None` for a node voltage.
    pub(crate) fn owner(&self, u: usize) -> Option<usize> {
        Some(self.unknown_owner[u])
            .filter(|&e| e != NONE32)
            .map(|e| e as usize)
    }

    /// The number of pins of element `e` (its internal unknowns follow them).
    pub(crate) fn pin_count(&self, e: usize) -> usize {
        self.pin_start[e + 1] - self.pin_start[e]
    }

    /// Builds `rhs = -F` for `load` from the last assembly and returns the largest
    /// residual-to-tolerance ratio and its row.
    fn residual(&mut self, x: &[f64], load: &Load<'_>, tol: &Tolerances) -> (f64, usize) {
        self.residual_of(x, load, tol, None)
    }

    /// [`System::residual`] on the rows `subset` only, when given (the latency partition's
    /// working rows).
    fn residual_of(
        &mut self,
        x: &[f64],
        load: &Load<'_>,
        tol: &Tolerances,
        subset: Option<&[usize]>,
    ) -> (f64, usize) {
        let n_nodes = self.n_nodes;
        each(subset, self.n, |i| {
            let mut fi = self.f[i];
            if load.a0 != 0.0 || load.hist.is_some() {
                // Both terms of the charge derivative count as contributions: their
                // difference is small at convergence, their size sets the rounding floor.
                let aq = load.a0 * self.q[i];
                let hi = load.hist.map_or(0.0, |h| h[i]);
                fi += aq + hi;
                let a = (load.a0 * self.qscale[i]).max(hi.abs());
                if a > self.scale[i] {
                    self.scale[i] = a;
                }
            }
            if i < n_nodes {
                if load.gmin != 0.0 {
                    fi += load.gmin * x[i];
                    self.jac[self.layout.diag_slot[i] as usize] += load.gmin;
                }
                if let Some((g, prev)) = load.pseudo {
                    fi += g * (x[i] - prev[i]);
                    self.jac[self.layout.diag_slot[i] as usize] += g;
                }
            }
            self.rhs[i] = -fi;
        });
        for &(i, v) in load.clamps {
            for &s in
                &self.layout.row_slots[self.layout.row_slot_ptr[i]..self.layout.row_slot_ptr[i + 1]]
            {
                self.jac[s as usize] = 0.0;
            }
            self.jac[self.layout.diag_slot[i] as usize] = 1.0;
            self.rhs[i] = -(x[i] - v);
            self.scale[i] = v.abs();
        }
        let mut worst = (0.0f64, 0usize);
        each(subset, self.n, |i| {
            let abs = self.row_abstol(i, tol);
            let ratio = self.rhs[i].abs() / (tol.reltol * self.scale[i] + abs);
            if ratio.is_nan() || ratio > worst.0 {
                worst = (ratio, i);
            }
        });
        worst
    }

    fn row_abstol(&self, i: usize, tol: &Tolerances) -> f64 {
        match self.kinds[i] {
            UnknownKind::Voltage => tol.abstol,
            UnknownKind::Current => tol.vntol,
        }
    }

    fn unknown_abstol(&self, i: usize, tol: &Tolerances) -> f64 {
        match self.kinds[i] {
            UnknownKind::Voltage => tol.vntol,
            UnknownKind::Current => tol.abstol,
        }
    }

    /// Newton iteration from `x` (overwritten with the solution). On success the assembly
    /// buffers hold `f`, `q` at the accepted point.
    #[allow(
        clippy::needless_range_loop,
        reason = "x, delta and kinds are indexed together"
    )]
    pub(crate) fn newton(
        &mut self,
        x: &mut [f64],
        load: &Load<'_>,
        params: &NewtonParams,
    ) -> Result<NewtonInfo, NewtonFailure> {
        let tol = params.tol;
        let mut prev_norm = f64::NAN;
        // A circuit without bypassable elements never allocates the stored stamps.
        let rule = (self.any_bypassable
            && params.bypass > 0.0
            && load.ctx.analysis == Analysis::Transient)
            .then_some(BypassRule {
                beta: params.bypass,
                tol,
            });
        // A running transient's latency partition (see the `latency` module): only the
        // active unknowns are solved, the latent ones checked.
        // In its whole-system fallback the partition may still watch every row's residual
        // (it holds nothing, so nothing wakes), from which it decides when to hold again.
        let latent = self.latency_on() && load.a0 != 0.0 && load.hist.is_some();
        let watch = self.latency_watching() && load.a0 != 0.0 && load.hist.is_some();
        for it in 1..=params.max_iterations {
            let (ratio, worst_row) = loop {
                self.assemble_with(x, &load.ctx, load.a0, rule, latent, None);
                if watch {
                    self.latency_keep_scale();
                }
                let worst = self
                    .with_latency_lists(latent, |s, _, rows| s.residual_of(x, load, &tol, rows));
                if !(watch && self.latency_check(x, load.a0, &tol)) {
                    break worst;
                }
                // Woken unknowns: their elements are live again and must be assembled. A row
                // that joins the working rows needs its charge history from the transient.
                if self.latency_refresh(x, load.ctx.time) {
                    return Err(NewtonFailure::Woke { iterations: it });
                }
            };
            // A device that returns NaN or infinity is named as such, not as a singular matrix
            // (the residual reports a non-finite row as its worst: no extra pass).
            if !ratio.is_finite() {
                return Err(NewtonFailure::NotANumber { unknown: worst_row });
            }
            let mut delta = std::mem::take(&mut self.rhs);
            let solved = if latent {
                let solved = self.solve_active(&mut delta);
                if solved.is_err() && self.latency.as_ref().is_some_and(|l| l.any_held()) {
                    // The active part alone is singular: solve the whole system from here.
                    self.rhs = delta;
                    self.latency_wake_all();
                    if self.latency_refresh(x, load.ctx.time) {
                        return Err(NewtonFailure::Woke { iterations: it });
                    }
                    continue;
                }
                solved
            } else {
                self.solve_update(&mut delta)
            };
            // Latent unknowns have no update: the loops over unknowns visit the active ones.
            let active = self
                .latency
                .as_ref()
                .filter(|_| latent)
                .map(Latency::active);
            let bad = match active {
                Some(list) => list.iter().copied().find(|&i| !delta[i].is_finite()),
                None => delta.iter().position(|d| !d.is_finite()),
            };
            if let Err(s) = solved {
                self.rhs = delta;
                return Err(NewtonFailure::Singular { unknown: s.unknown });
            }
            if let Some(unknown) = bad {
                self.rhs = delta;
                return Err(NewtonFailure::Singular { unknown });
            }
            let n = self.n;
            let mut vmax = 0.0f64;
            each(active, n, |i| {
                if self.kinds[i] == UnknownKind::Voltage {
                    vmax = vmax.max(delta[i].abs());
                }
            });
            let lambda = if vmax > params.max_voltage_step {
                params.max_voltage_step / vmax
            } else {
                1.0
            };
            let mut norm = 0.0f64;
            // In time: voltages against their range so far, linear unknowns left out.
            let in_time = load.a0 != 0.0 && self.voltage_range.len() == n;
            if lambda == 1.0 {
                each(active, n, |i| {
                    let mut size = x[i].abs().max((x[i] + delta[i]).abs());
                    if in_time {
                        if self.linear_unknown[i] {
                            return;
                        }
                        if self.ranged[i] {
                            size = size.max(self.voltage_range[i]);
                        }
                    }
                    let bound = tol.reltol * size + self.unknown_abstol(i, &tol);
                    norm = norm.max(delta[i].abs() / bound);
                });
            }
            let quadratic = (it > 1)
                .then(|| norm / (prev_norm * prev_norm))
                .filter(|m| m.is_finite());
            // The update must be within the Newton tolerances; a measured quadratic-convergence
            // constant may only stand in for the residual test (an update beyond tolerance is
            // never accepted: on an equation without charge no truncation-error test would
            // catch it).
            let delta_ok = lambda == 1.0
                && norm <= 1.0
                && (ratio <= 1.0 || params.quadratic.is_some_and(|m| m * norm * norm <= 1.0));
            prev_norm = if lambda == 1.0 { norm } else { f64::NAN };
            if delta_ok {
                // Accepted: the residual here passed and the correction from here is within
                // tolerance. The solution also takes that last correction, and the charges the
                // integrator will store are carried along it to first order, q += (∂q/∂x) Δ,
                // so unknowns and charges agree to O(Δ²) without another evaluation.
                each(active, n, |i| x[i] += delta[i]);
                if load.a0 != 0.0 {
                    self.with_latency_lists(latent, |s, active, rows| {
                        s.carry_charges(&delta, active, rows)
                    });
                }
                self.rhs = delta;
                return Ok(NewtonInfo {
                    iterations: it,
                    residual_ratio: ratio,
                    quadratic,
                });
            }
            each(active, n, |i| x[i] += lambda * delta[i]);
            self.rhs = delta;
        }
        Err(NewtonFailure::NoConvergence {
            worst: self.worst_rows(x, load, &tol),
        })
    }

    /// `q += C Δ` with `C = ∂q/∂x` from the last assembly (`Δ` nonzero only in the columns
    /// `active` when given, whose entries lie in the rows `rows`).
    fn carry_charges(&mut self, delta: &[f64], active: Option<&[usize]>, rows: Option<&[usize]>) {
        let n = self.n;
        let cdelta = &mut self.cdelta;
        each(rows, n, |r| cdelta[r] = 0.0);
        let col_ptr = self.pattern.col_ptr();
        let row_idx = self.pattern.row_idx();
        let (cmat, cdelta) = (&self.cmat, &mut self.cdelta);
        each(active, self.n, |c| {
            let d = delta[c];
            if d != 0.0 {
                let range = col_ptr[c]..col_ptr[c + 1];
                for (&r, &cv) in row_idx[range.clone()].iter().zip(&cmat[range]) {
                    cdelta[r] += cv * d;
                }
            }
        });
        let (q, cdelta) = (&mut self.q, &self.cdelta);
        each(rows, n, |r| q[r] += cdelta[r]);
    }

    /// The three rows with the largest residual-to-tolerance ratio at `x`.
    fn worst_rows(
        &mut self,
        x: &[f64],
        load: &Load<'_>,
        tol: &Tolerances,
    ) -> Vec<(usize, f64, f64)> {
        self.assemble(x, &load.ctx, load.a0);
        self.residual(x, load, tol);
        let mut rows: Vec<(usize, f64, f64)> = (0..self.n)
            .map(|i| {
                (
                    i,
                    self.rhs[i].abs(),
                    tol.reltol * self.scale[i] + self.row_abstol(i, tol),
                )
            })
            .collect();
        rows.sort_by(|a, b| (b.1 / b.2).total_cmp(&(a.1 / a.2)));
        rows.truncate(3);
        rows
    }

    /// Names an unknown together with the elements attached to it.
    pub(crate) fn culprit(&self, unknown: usize, value: f64, tolerance: f64) -> Culprit {
        let mut elements = Vec::new();
        if let Some(owner) = (unknown < self.n).then(|| self.owner(unknown)).flatten() {
            elements.push(format!(
                "{} ({})",
                self.element_names.get(owner),
                self.elements[owner].kind()
            ));
        } else {
            for e in 0..self.elements.len() {
                let pins = &self.pins[self.pin_start[e]..self.pin_start[e + 1]];
                if pins
                    .iter()
                    .any(|p| !p.is_ground() && p.0 as usize - 1 == unknown)
                {
                    elements.push(format!(
                        "{} ({})",
                        self.element_names.get(e),
                        self.elements[e].kind()
                    ));
                    if elements.len() == 4 {
                        break;
                    }
                }
            }
        }
        Culprit {
            unknown: self.unknown_name(unknown),
            value,
            tolerance,
            elements,
        }
    }

    pub(crate) fn failure_error(
        &self,
        context: String,
        failure: NewtonFailure,
        tried: Vec<String>,
    ) -> EngineError {
        match failure {
            NewtonFailure::Singular { unknown } => EngineError::Singular {
                context,
                culprit: self.culprit(unknown, f64::NAN, 0.0),
            },
            NewtonFailure::NotANumber { unknown } => EngineError::NotANumber {
                context,
                culprit: self.culprit(unknown, f64::NAN, 0.0),
            },
            NewtonFailure::NoConvergence { worst } => EngineError::NoConvergence {
                context,
                worst: worst
                    .into_iter()
                    .map(|(i, v, t)| self.culprit(i, v, t))
                    .collect(),
                tried,
            },
            // Only transients with latency wake, and they solve again.
            NewtonFailure::Woke { .. } => EngineError::NoConvergence {
                context,
                worst: Vec::new(),
                tried,
            },
        }
    }

    /// One DC Newton iteration at `x` (with `gmin` on every node): assembles the system in
    /// place, refactorises the matrix and solves for the update, written to `delta`. Exposed for
    /// benches and inspection; analyses call the damped iteration internally.
    pub fn dc_newton_update(
        &mut self,
        x: &[f64],
        gmin: f64,
        delta: &mut [f64],
    ) -> Result<(), EngineError> {
        if x.len() != self.n || delta.len() != self.n {
            return Err(EngineError::Invalid(format!(
                "expected {} unknowns",
                self.n
            )));
        }
        let load = Load::dc(EvalContext::dc(), gmin);
        self.assemble(x, &load.ctx, 0.0);
        self.residual(x, &load, &Tolerances::default());
        let fail = |s: &Self, unknown: usize| EngineError::Singular {
            context: "DC Newton iteration".into(),
            culprit: s.culprit(unknown, f64::NAN, 0.0),
        };
        delta.copy_from_slice(&self.rhs);
        self.solve_update(delta).map_err(|e| fail(self, e.unknown))
    }

    /// Factorises the last assembled matrix and solves `J Δ = v` in place (`v` holds the
    /// right-hand side on entry, `Δ` on return). With pinned nodes (see the module doc) their
    /// updates come from their sources' rows, the kept unknowns from the reduced matrix, and
    /// the sources' currents from the pinned nodes' rows.
    pub(crate) fn solve_update(&mut self, v: &mut [f64]) -> Result<(), Singular> {
        let System {
            jac, lu, reduction, ..
        } = self;
        let Some(red) = reduction.as_mut() else {
            lu.factor(jac)?;
            return lu.solve(v);
        };
        for (k, p) in red.pinned.iter().enumerate() {
            let j = jac[p.slot_bn];
            if j == 0.0 {
                return Err(Singular { unknown: p.node });
            }
            red.d_node[k] = v[p.branch] / j;
            red.r_node[k] = v[p.node];
        }
        for (value, &s) in red.values.iter_mut().zip(&red.gather) {
            *value = jac[s as usize];
        }
        for (r, &i) in red.rhs.iter_mut().zip(&red.full) {
            *r = v[i];
        }
        for &(r, s, p) in &red.coupling {
            red.rhs[r as usize] -= jac[s as usize] * red.d_node[p as usize];
        }
        let full = &red.full;
        let back = |e: Singular| Singular {
            unknown: full[e.unknown.min(full.len() - 1)],
        };
        lu.factor(&red.values).map_err(back)?;
        lu.solve(&mut red.rhs).map_err(back)?;
        for (&r, &i) in red.rhs.iter().zip(full) {
            v[i] = r;
        }
        for (k, p) in red.pinned.iter().enumerate() {
            v[p.node] = red.d_node[k];
        }
        for (k, p) in red.pinned.iter().enumerate() {
            let mut rest = red.r_node[k];
            for &(c, s) in &p.row {
                rest -= jac[s as usize] * v[c as usize];
            }
            let j = jac[p.slot_nb];
            if j == 0.0 {
                return Err(Singular { unknown: p.branch });
            }
            v[p.branch] = rest / j;
        }
        Ok(())
    }

    /// The Newton matrix at `x` in DC (with `gmin` on every node) as a sparse matrix, for
    /// inspection or export in Matrix Market form.
    pub fn dc_matrix(&mut self, x: &[f64], gmin: f64) -> Result<sprs::CsMat<f64>, EngineError> {
        if x.len() != self.n {
            return Err(EngineError::Invalid(format!(
                "expected {} unknowns, got {}",
                self.n,
                x.len()
            )));
        }
        let load = Load::dc(EvalContext::dc(), gmin);
        self.assemble(x, &load.ctx, 0.0);
        self.residual(x, &load, &Tolerances::default());
        let col_ptr = self.pattern.col_ptr().to_vec();
        let row_idx = self.pattern.row_idx().to_vec();
        Ok(sprs::CsMat::new_csc(
            (self.n, self.n),
            col_ptr,
            row_idx,
            self.jac.clone(),
        ))
    }
}

/// Calls `f` for each index of `subset`, or for `0..n` without one.
#[inline]
pub(crate) fn each(subset: Option<&[usize]>, n: usize, mut f: impl FnMut(usize)) {
    match subset {
        Some(list) => list.iter().for_each(|&i| f(i)),
        None => (0..n).for_each(f),
    }
}

/// How results and diagnostics name a node voltage: `node out`.
pub(crate) fn node_label(name: &str) -> String {
    format!("node {name}")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::elements::{Capacitor, Pulse, Resistor, VoltageSource, Waveform};
    use crate::{Output, Probe, Start, TransientParams};

    /// A two-terminal device with a bending current `i = I₀ tanh(v / V₀)` and charge
    /// `q = C₀ (v + v³ / 3)`, bypassable on request.
    #[derive(Clone, Debug)]
    struct Bend {
        bypass: bool,
        i0: f64,
    }

    const I0: f64 = 1e-4;
    const V0: f64 = 0.2;
    const C0: f64 = 1e-12;

    impl Element for Bend {
        fn kind(&self) -> &'static str {
            "bend"
        }
        fn terminals(&self) -> &'static [&'static str] {
            &["a", "b"]
        }
        fn has_charge(&self) -> bool {
            true
        }
        fn bypassable(&self) -> bool {
            self.bypass
        }
        fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
            let v = x[0] - x[1];
            let t = (v / V0).tanh();
            out.branch_current(0, 1, self.i0 * t, self.i0 * (1.0 - t * t) / V0);
            out.branch_charge(0, 1, C0 * (v + v * v * v / 3.0), C0 * (1.0 + v * v));
        }
        fn boxed_clone(&self) -> Box<dyn Element> {
            Box::new(self.clone())
        }
    }

    /// A device whose current is not a number past 0.3 V.
    #[derive(Clone, Debug)]
    struct Broken;

    impl Element for Broken {
        fn kind(&self) -> &'static str {
            "broken"
        }
        fn terminals(&self) -> &'static [&'static str] {
            &["a", "b"]
        }
        fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
            let v = x[0] - x[1];
            let i = if v > 0.3 { f64::NAN } else { 1e-3 * v };
            out.branch_current(0, 1, i, 1e-3);
        }
        fn boxed_clone(&self) -> Box<dyn Element> {
            Box::new(self.clone())
        }
    }

    /// A device returning NaN is named as such, with its node and elements, not reported as a
    /// singular matrix.
    #[test]
    fn a_device_returning_nan_is_named() {
        let mut c = Circuit::new();
        let a = c.node("a");
        let b = c.node("b");
        c.add("v", VoltageSource::dc(1.0), &[a, Circuit::GROUND])
            .unwrap();
        c.add("r", Resistor::new(1e3), &[a, b]).unwrap();
        c.add("bad", Broken, &[b, Circuit::GROUND]).unwrap();
        let mut sys = System::new(c).unwrap();
        let err = sys
            .operating_point(&crate::dc::OpParams::default())
            .unwrap_err();
        let text = err.to_string();
        assert!(
            matches!(err, EngineError::NotANumber { .. }) && text.contains("bad"),
            "{text}"
        );
    }

    pub(super) const PERIOD: f64 = 1e-6;

    /// A pulse drives `a`; `x` hangs between a bending device (to `a`) and 1 pF to ground,
    /// with (`leak`) or without a resistor to ground. With neither the device's current nor
    /// the resistor `x` floats: its charge `-q_bend(v_a - v_x) + C v_x` starts at 0 and stays
    /// there, so `v_x = 0` whenever `v_a = 0` (q is odd and increasing).
    pub(super) fn circuit(bypass: bool, leak: bool) -> System {
        let mut c = Circuit::new();
        let a = c.node("a");
        let x = c.node("x");
        let drive = Waveform::pulse(Pulse {
            low: 0.0,
            high: 1.0,
            delay: 0.0,
            rise: 0.1 * PERIOD,
            fall: 0.2 * PERIOD,
            width: 0.3 * PERIOD,
            period: Some(PERIOD),
        })
        .unwrap();
        c.add("drive", VoltageSource::new(drive), &[a, Circuit::GROUND])
            .unwrap();
        let i0 = if leak { I0 } else { 0.0 };
        c.add("bend", Bend { bypass, i0 }, &[a, x]).unwrap();
        c.add("c", Capacitor::new(1e-12), &[x, Circuit::GROUND])
            .unwrap();
        if leak {
            c.add("r", Resistor::new(1e4), &[x, Circuit::GROUND])
                .unwrap();
        }
        System::new(c).unwrap()
    }

    fn run(sys: &mut System, p: &TransientParams) -> (Vec<f64>, Vec<f64>) {
        let x = sys.find_node("x").unwrap();
        let res = sys
            .transient(p, &Start::Given(vec![]), &[Probe::Voltage(x)], None)
            .unwrap();
        (res.time, res.signals[0].clone())
    }

    #[test]
    fn bypass_keeps_a_floating_node_s_charge() {
        let mut sys = circuit(true, false);
        let mut p = TransientParams::new(20.0 * PERIOD);
        // Tight Newton tolerances as in tests/charge_conservation.rs: what is left is the
        // accepted iterates' residual, which does not grow with the number of steps.
        p.tol.reltol = 1e-9;
        p.tol.abstol = 1e-18;
        p.tol.vntol = 1e-12;
        let (time, vx) = run(&mut sys, &p);
        let evals = sys.device_evaluations();
        // About a fifth of the evaluations are bypassed (more before Newton's update test in
        // time left the source's current out: second iterations were mostly bypassed).
        assert!(evals.bypassed > evals.evaluated / 6, "{evals:?}");
        // Every sample where the drive is back at 0 V (from 0.6 to 1.0 of each period).
        let mut checked = 0;
        for (t, v) in time.iter().zip(&vx) {
            let phase = (t / PERIOD).fract();
            if *t > PERIOD && (0.65..0.95).contains(&phase) {
                assert!(v.abs() < 1e-12, "v_x = {v} V at {t} s");
                checked += 1;
            }
        }
        assert!(checked > 20);
    }

    #[test]
    fn bypass_is_deterministic_and_independent_of_earlier_runs() {
        let p = TransientParams::new(5.0 * PERIOD);
        let mut first = circuit(true, true);
        let a = run(&mut first, &p);
        let counts = first.device_evaluations();
        assert!(counts.bypassed > 0);
        let b = run(&mut first, &p);
        let mut fresh = circuit(true, true);
        let c = run(&mut fresh, &p);
        assert_eq!(a, b);
        assert_eq!(a, c);
        let again = first.device_evaluations();
        assert_eq!(again.evaluated, 2 * counts.evaluated);
        assert_eq!(again.bypassed, 2 * counts.bypassed);
    }

    #[test]
    fn bypass_off_evaluates_every_time_and_changes_nothing() {
        let mut p = TransientParams::new(5.0 * PERIOD);
        p.bypass = 0.0;
        let mut on = circuit(true, true);
        let off = run(&mut on, &p);
        assert_eq!(on.device_evaluations().bypassed, 0);
        let mut plain = circuit(false, true);
        assert_eq!(off, run(&mut plain, &p));
    }

    /// The same system factorising the full matrix, pinned unknowns included.
    fn unreduced(mut sys: System) -> System {
        sys.reduction = None;
        sys.lu = SparseLu::new(sys.pattern.clone(), LuStrategy::default()).unwrap();
        sys
    }

    /// Two grounded supplies (one with its `pos` at ground), a source between a pinned node
    /// and a free one, bending devices and a pulse: operating points, source currents and
    /// waveforms with the pinned unknowns taken out agree with the full solve to rounding.
    fn supplied(bypass: bool) -> System {
        let mut c = Circuit::new();
        let (vdd, vss, a, b, m) = (
            c.node("vdd"),
            c.node("vss"),
            c.node("a"),
            c.node("b"),
            c.node("m"),
        );
        c.add("sdd", VoltageSource::dc(1.0), &[vdd, Circuit::GROUND])
            .unwrap();
        c.add("sss", VoltageSource::dc(0.5), &[Circuit::GROUND, vss])
            .unwrap();
        let drive = Waveform::pulse(Pulse {
            low: 0.0,
            high: 0.4,
            delay: 0.1 * PERIOD,
            rise: 0.1 * PERIOD,
            fall: 0.1 * PERIOD,
            width: 0.2 * PERIOD,
            period: None,
        })
        .unwrap();
        c.add("offset", VoltageSource::new(drive), &[a, vdd])
            .unwrap();
        c.add("up", Bend { bypass, i0: I0 }, &[a, m]).unwrap();
        c.add(
            "down",
            Bend {
                bypass,
                i0: 2.0 * I0,
            },
            &[m, vss],
        )
        .unwrap();
        c.add("r", Resistor::new(2e3), &[m, b]).unwrap();
        c.add("cb", Capacitor::new(1e-12), &[b, Circuit::GROUND])
            .unwrap();
        System::new(c).unwrap()
    }

    /// Unknown names are made on demand from the circuit's names; an element of another
    /// circuit has no branch unknown here (it used to index out of bounds).
    #[test]
    fn unknown_names_and_a_foreign_element() {
        let mut small = Circuit::new();
        let a = small.node("a");
        small
            .add("s", VoltageSource::dc(1.0), &[a, Circuit::GROUND])
            .unwrap();
        let mut big = Circuit::new();
        let b = big.node("b");
        big.add("r0", Resistor::new(1.0), &[b, Circuit::GROUND])
            .unwrap();
        let far = big
            .add("r1", Resistor::new(1.0), &[b, Circuit::GROUND])
            .unwrap();
        let sys = System::new(small).unwrap();
        assert_eq!(sys.branch_unknown(far), None);
        assert_eq!(sys.unknown_name(0), "node a");
        assert_eq!(sys.unknown_name(1), "s.i");
        assert_eq!(sys.find_element("s").map(|e| e.index()), Some(0));
        assert_eq!(sys.find_node("a"), Some(a));
        assert_eq!(sys.find_node("b"), None);
    }

    #[test]
    fn pinned_unknowns_leave_every_result_unchanged() {
        let mut reduced = supplied(true);
        assert_eq!(reduced.reduction.as_ref().map(|r| r.pinned.len()), Some(2));
        let mut full = unreduced(supplied(true));
        let (op_r, _) = reduced
            .operating_point(&crate::OpParams::default())
            .unwrap();
        let (op_f, _) = full.operating_point(&crate::OpParams::default()).unwrap();
        for i in 0..reduced.unknown_count() {
            let (r, f) = (op_r.x[i], op_f.x[i]);
            assert!(
                (r - f).abs() <= 1e-12 * f.abs().max(1e-3),
                "{}: {r} vs {f}",
                reduced.unknown_name(i)
            );
        }
        // The supply current is what the devices draw: -(I(vdd -> m) + I(a -> m)) here.
        let sdd = reduced
            .branch_unknown(reduced.find_element("sdd").unwrap())
            .unwrap();
        assert!(op_r.x[sdd] < 0.0);
        let probes: Vec<Probe> = ["sdd", "sss", "offset"]
            .iter()
            .map(|n| Probe::Current(reduced.find_element(n).unwrap()))
            .chain(
                ["m", "b"]
                    .iter()
                    .map(|n| Probe::Voltage(reduced.find_node(n).unwrap())),
            )
            .collect();
        let p = TransientParams::new(PERIOD);
        let start = Start::OperatingPoint(crate::OpParams::default());
        let wr = reduced.transient(&p, &start, &probes, None).unwrap();
        let wf = full.transient(&p, &start, &probes, None).unwrap();
        assert_eq!(wr.time.len(), wf.time.len());
        for (sr, sf) in wr.signals.iter().zip(&wf.signals) {
            let scale = sf.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            for (r, f) in sr.iter().zip(sf) {
                assert!((r - f).abs() <= 1e-9 * scale, "{r} vs {f}");
            }
        }
    }

    /// The default bypass moves the waveform by far less than the Newton tolerance
    /// (reltol 1e-3 of 1 V): the expansion's error is second order in the skipped change
    /// (4e-7 V measured; the bound is 1 % of the tolerance).
    #[test]
    fn default_bypass_stays_within_a_fraction_of_the_newton_tolerance() {
        let mut p = TransientParams::new(5.0 * PERIOD);
        p.output = Output::Interval(PERIOD / 200.0);
        let mut sys = circuit(true, true);
        let (t_on, on) = run(&mut sys, &p);
        assert!(sys.device_evaluations().bypassed > 0);
        p.bypass = 0.0;
        let (t_off, off) = run(&mut circuit(true, true), &p);
        assert_eq!(t_on, t_off);
        let worst = on
            .iter()
            .zip(&off)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        assert!(worst < 1e-5, "largest difference {worst} V");
    }
}

#[cfg(test)]
mod latency_tests {
    //! The latency partition (`crate::latency`) against the full solve.
    use super::tests::{circuit, PERIOD};
    use super::System;
    use crate::{Output, Probe, Start, TransientParams, TransientResult};

    fn run_latent(sys: &mut System, p: &TransientParams) -> TransientResult {
        let x = sys.find_node("x").unwrap();
        let drive = sys.find_element("drive").unwrap();
        let probes = [Probe::Voltage(x), Probe::Current(drive)];
        sys.transient(p, &Start::Given(vec![]), &probes, None)
            .unwrap()
    }

    /// The floating node `x` of the bypass test keeps its charge exactly with latency on:
    /// between pulses the whole circuit goes latent, and each pulse edge must wake the driven
    /// node (its source's equation fails at the held value) and then `x`.
    #[test]
    fn latency_keeps_a_floating_node_s_charge_and_wakes_at_each_edge() {
        let mut sys = circuit(false, false);
        let mut p = TransientParams::new(20.0 * PERIOD);
        p.tol.reltol = 1e-9;
        p.tol.abstol = 1e-18;
        p.tol.vntol = 1e-12;
        p.latency = true;
        // Holding on a three-unknown circuit: no whole-system fallback.
        p.latency_fallback = false;
        let res = run_latent(&mut sys, &p);
        assert!(
            res.stats.latent_unknown_steps > res.stats.active_unknown_steps / 10,
            "{:?}",
            res.stats
        );
        let mut checked = 0;
        let mut high = 0;
        for (t, v) in res.time.iter().zip(&res.signals[0]) {
            let phase = (t / PERIOD).fract();
            if *t > PERIOD && (0.65..0.95).contains(&phase) {
                assert!(v.abs() < 1e-12, "v_x = {v} V at {t} s");
                checked += 1;
            }
            // While the drive is high (0.15 to 0.3 of each period) x follows it: the edge
            // reached the latent node.
            if (0.15..0.3).contains(&phase) && *v > 0.1 {
                high += 1;
            }
        }
        assert!(checked > 20 && high > 20, "{checked} {high}");
    }

    /// With latency on, the waveforms of the leaky circuit stay within the Newton tolerance
    /// (reltol 1e-3 of 1 V) of the full solve at the same step control, and the run is
    /// deterministic and independent of earlier runs of the same system.
    #[test]
    fn latency_agrees_with_the_full_solve_and_is_deterministic() {
        let mut p = TransientParams::new(5.0 * PERIOD);
        p.output = Output::Interval(PERIOD / 200.0);
        p.latency = true;
        // Holding on a three-unknown circuit: no whole-system fallback.
        p.latency_fallback = false;
        let mut sys = circuit(true, true);
        let on = run_latent(&mut sys, &p);
        assert!(on.stats.latent_unknown_steps > 0, "{:?}", on.stats);
        let again = run_latent(&mut sys, &p);
        let fresh = run_latent(&mut circuit(true, true), &p);
        assert_eq!(on.signals, again.signals);
        assert_eq!(on.signals, fresh.signals);
        assert_eq!(on.stats, fresh.stats);
        p.latency = false;
        let off = run_latent(&mut circuit(true, true), &p);
        assert_eq!(off.stats.latent_unknown_steps, 0);
        let worst = on.signals[0]
            .iter()
            .zip(&off.signals[0])
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        assert!(worst < 1e-3, "largest difference {worst} V");
    }
}
