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

use crate::circuit::{Circuit, ElementId, NodeId};
use crate::element::{Element, EvalContext, Stamp, UnknownKind};
use crate::error::{Culprit, EngineError};
use crate::lu::{LuStats, LuStrategy, SparseLu};
use faer::sparse::SymbolicSparseColMat;

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
    pub(crate) charge: bool,
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
}

impl Default for NewtonParams {
    fn default() -> Self {
        NewtonParams {
            tol: Tolerances::default(),
            max_iterations: 100,
            max_voltage_step: 0.5,
            quadratic: None,
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
    Singular { unknown: usize },
    NoConvergence { worst: Vec<(usize, f64, f64)> },
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
    /// Per element: start of its local-to-global map in `loc_map`.
    pub(crate) loc_start: Vec<usize>,
    pub(crate) loc_map: Vec<usize>,
    diag_slot: Vec<usize>,
    /// Slots of each row (for replacing a row by a clamp).
    row_slot_ptr: Vec<usize>,
    row_slots: Vec<usize>,
    /// Hot-loop copies: per-element plans and 32-bit index lists.
    pub(crate) plan: Vec<Plan>,
    pub(crate) map32: Vec<u32>,
    pub(crate) slots32: Vec<u32>,
}

/// A circuit compiled for analysis: fixed pattern, buffers and the LU solver.
///
/// Build it once with [`System::new`] and run any number of analyses on it.
pub struct System {
    pub(crate) elements: Vec<Box<dyn Element>>,
    element_names: Vec<String>,
    element_pins: Vec<Vec<NodeId>>,
    pub(crate) node_names: Vec<String>,
    pub(crate) n: usize,
    pub(crate) n_nodes: usize,
    pub(crate) kinds: Vec<UnknownKind>,
    unknown_names: Vec<String>,
    unknown_owner: Vec<Option<usize>>,
    pub(crate) layout: Layout,
    pub(crate) pattern: SymbolicSparseColMat<usize>,
    pub(crate) charge_rows: Vec<usize>,
    pub(crate) breakpoint_elements: Vec<usize>,
    // Assembly outputs.
    pub(crate) jac: Vec<f64>,
    /// `∂q/∂x` in pattern order (filled only when `a0 != 0`), to carry the charges along the
    /// final Newton correction.
    cmat: Vec<f64>,
    /// Scratch for `C Δ`.
    cdelta: Vec<f64>,
    pub(crate) f: Vec<f64>,
    pub(crate) q: Vec<f64>,
    scale: Vec<f64>,
    /// Largest single element charge on each row (the total may cancel).
    qscale: Vec<f64>,
    pub(crate) rhs: Vec<f64>,
    // Element-local buffers.
    xl: Vec<f64>,
    fl: Vec<f64>,
    ql: Vec<f64>,
    dfl: Vec<f64>,
    dql: Vec<f64>,
    pub(crate) lu: SparseLu,
}

impl System {
    /// Compiles `circuit` with the default LU strategy.
    pub fn new(circuit: Circuit) -> Result<Self, EngineError> {
        Self::with_strategy(circuit, LuStrategy::default())
    }

    /// Compiles `circuit`, choosing how the Newton matrix is factorised.
    pub fn with_strategy(circuit: Circuit, strategy: LuStrategy) -> Result<Self, EngineError> {
        let n_nodes = circuit.node_count() - 1;
        let mut kinds = vec![UnknownKind::Voltage; n_nodes];
        let node_names: Vec<String> = (0..circuit.node_count())
            .map(|k| circuit.node_name(NodeId(k)).to_string())
            .collect();
        let mut unknown_names: Vec<String> = node_names[1..]
            .iter()
            .map(|name| node_label(name))
            .collect();
        let mut unknown_owner = vec![None; n_nodes];
        let mut loc_start = Vec::new();
        let mut loc_map = Vec::new();
        let mut slot_start = Vec::new();
        let mut has_charge = Vec::new();
        let mut elements = Vec::new();
        let mut element_names = Vec::new();
        let mut element_pins = Vec::new();
        let mut breakpoint_elements = Vec::new();
        let mut max_local = 0;
        let mut pairs: Vec<(usize, usize)> = (0..n_nodes).map(|i| (i, i)).collect();
        let mut slot_count = 0;
        for (e, entry) in circuit.entries.into_iter().enumerate() {
            loc_start.push(loc_map.len());
            for p in &entry.pins {
                loc_map.push(if p.is_ground() { NONE } else { p.0 - 1 });
            }
            for internal in entry.element.internals() {
                let idx = kinds.len();
                kinds.push(internal.kind);
                unknown_names.push(format!("{}.{}", entry.name, internal.name));
                unknown_owner.push(Some(e));
                loc_map.push(idx);
            }
            let local = &loc_map[loc_start[e]..];
            let nl = local.len();
            max_local = max_local.max(nl);
            for &r in local {
                for &c in local {
                    if r != NONE && c != NONE {
                        pairs.push((r, c));
                    }
                }
            }
            slot_start.push(slot_count);
            slot_count += nl * nl;
            has_charge.push(entry.element.has_charge());
            if entry.element.next_breakpoint(f64::NEG_INFINITY).is_some() {
                breakpoint_elements.push(e);
            }
            elements.push(entry.element);
            element_names.push(entry.name);
            element_pins.push(entry.pins);
        }
        loc_start.push(loc_map.len());
        slot_start.push(slot_count);
        let n = kinds.len();
        // Branch rows of voltage-defined elements have a zero diagonal; keep it in the pattern
        // so that clamps and pseudo-transient terms can use it.
        pairs.extend((n_nodes..n).map(|i| (i, i)));
        if n == 0 {
            return Err(EngineError::Invalid("the circuit has no unknowns".into()));
        }

        // Compressed columns with sorted, unique rows.
        pairs.sort_unstable_by_key(|&(r, c)| (c, r));
        pairs.dedup();
        let mut col_ptr = vec![0usize; n + 1];
        let mut row_idx = Vec::with_capacity(pairs.len());
        for &(r, c) in &pairs {
            col_ptr[c + 1] += 1;
            row_idx.push(r);
        }
        for c in 0..n {
            col_ptr[c + 1] += col_ptr[c];
        }
        let slot_of = |r: usize, c: usize| -> usize {
            let rows = &row_idx[col_ptr[c]..col_ptr[c + 1]];
            col_ptr[c] + rows.binary_search(&r).expect("entry is in the pattern")
        };
        let mut slots = Vec::with_capacity(slot_count);
        for e in 0..elements.len() {
            let local = &loc_map[loc_start[e]..loc_start[e + 1]];
            for &r in local {
                for &c in local {
                    slots.push(if r != NONE && c != NONE {
                        slot_of(r, c)
                    } else {
                        NONE
                    });
                }
            }
        }
        let diag_slot: Vec<usize> = (0..n).map(|i| slot_of(i, i)).collect();
        let mut per_row: Vec<Vec<usize>> = vec![Vec::new(); n];
        for c in 0..n {
            for s in col_ptr[c]..col_ptr[c + 1] {
                per_row[row_idx[s]].push(s);
            }
        }
        let mut row_slot_ptr = vec![0];
        let mut row_slots = Vec::new();
        for r in per_row {
            row_slots.extend(r);
            row_slot_ptr.push(row_slots.len());
        }
        let nnz = row_idx.len();
        if n >= NONE32 as usize || nnz >= NONE32 as usize || slots.len() >= NONE32 as usize {
            return Err(EngineError::Invalid(format!(
                "the circuit is too large: {n} unknowns and {nnz} matrix entries"
            )));
        }
        let narrow = |v: &usize| if *v == NONE { NONE32 } else { *v as u32 };
        let map32: Vec<u32> = loc_map.iter().map(narrow).collect();
        let slots32: Vec<u32> = slots.iter().map(narrow).collect();
        let plan: Vec<Plan> = (0..elements.len())
            .map(|e| Plan {
                map: loc_start[e] as u32,
                slot: slot_start[e] as u32,
                local: (loc_start[e + 1] - loc_start[e]) as u8,
                charge: has_charge[e],
            })
            .collect();
        if loc_start.windows(2).any(|w| w[1] - w[0] > u8::MAX as usize) {
            return Err(EngineError::Invalid(
                "an element has more than 255 local unknowns".into(),
            ));
        }
        let pattern = SymbolicSparseColMat::new_checked(n, n, col_ptr, None, row_idx);
        let lu = SparseLu::new(pattern.clone(), strategy).map_err(EngineError::Invalid)?;
        let mut is_charge_row = vec![false; n];
        for e in 0..elements.len() {
            if has_charge[e] {
                for &g in &loc_map[loc_start[e]..loc_start[e + 1]] {
                    if g != NONE {
                        is_charge_row[g] = true;
                    }
                }
            }
        }
        let charge_rows = (0..n).filter(|&i| is_charge_row[i]).collect();
        Ok(System {
            elements,
            element_names,
            element_pins,
            node_names,
            n,
            n_nodes,
            kinds,
            unknown_names,
            unknown_owner,
            layout: Layout {
                loc_start,
                loc_map,
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
    pub fn unknown_name(&self, i: usize) -> &str {
        &self.unknown_names[i]
    }

    /// What the LU solver has done so far.
    pub fn lu_stats(&self) -> LuStats {
        self.lu.stats()
    }

    /// The unknown holding the voltage of `node` (`None` for ground).
    pub fn node_unknown(&self, node: NodeId) -> Option<usize> {
        (!node.is_ground()).then(|| node.0 - 1)
    }

    /// The unknown of the first branch current an element owns, if any.
    pub fn branch_unknown(&self, element: ElementId) -> Option<usize> {
        let e = element.0;
        let local = &self.layout.loc_map[self.layout.loc_start[e]..self.layout.loc_start[e + 1]];
        let pins = self.element_pins.get(e)?.len();
        let internals = self.elements[e].internals();
        internals
            .iter()
            .position(|i| i.kind == UnknownKind::Current)
            .map(|k| local[pins + k])
    }

    /// The name of a node.
    pub fn node_name(&self, node: NodeId) -> &str {
        &self.node_names[node.0]
    }

    /// The element called `name`, if any.
    pub fn find_element(&self, name: &str) -> Option<ElementId> {
        self.element_names
            .iter()
            .position(|n| n == name)
            .map(ElementId)
    }

    /// The node called `name`, if any.
    pub fn find_node(&self, name: &str) -> Option<NodeId> {
        self.node_names.iter().position(|n| n == name).map(NodeId)
    }

    pub(crate) fn element_name(&self, e: usize) -> &str {
        &self.element_names[e]
    }

    /// Evaluates every element at `x` and accumulates `f`, `q`, the row scales and the
    /// matrix values `∂f/∂x + a0 ∂q/∂x`. Allocates nothing.
    pub(crate) fn assemble(&mut self, x: &[f64], ctx: &EvalContext, a0: f64) {
        let System {
            elements,
            layout,
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
            ..
        } = self;
        jac.fill(0.0);
        if a0 != 0.0 {
            cmat.fill(0.0);
        }
        f.fill(0.0);
        q.fill(0.0);
        scale.fill(0.0);
        qscale.fill(0.0);
        let mut out = Outputs {
            jac,
            cmat,
            f,
            q,
            scale,
            qscale,
        };
        for (element, plan) in elements.iter().zip(&layout.plan) {
            let nl = plan.local as usize;
            let map = &layout.map32[plan.map as usize..][..nl];
            let slots = &layout.slots32[plan.slot as usize..][..nl * nl];
            let charge = plan.charge;
            if nl <= SMALL {
                // Small elements use stack buffers: zeroing them is a few vector stores
                // instead of four library calls per element.
                let mut xs = [0.0; SMALL];
                let mut fs = [0.0; SMALL];
                let mut qs = [0.0; SMALL];
                let mut dfs = [0.0; SMALL * SMALL];
                let mut dqs = [0.0; SMALL * SMALL];
                gather(map, x, &mut xs[..nl]);
                let (fs, qs, dfs, dqs) = (
                    &mut fs[..nl],
                    &mut qs[..nl],
                    &mut dfs[..nl * nl],
                    &mut dqs[..nl * nl],
                );
                element.evaluate(&xs[..nl], ctx, &mut Stamp::new(fs, qs, dfs, dqs));
                out.scatter(map, slots, charge, a0, fs, qs, dfs, dqs);
            } else {
                gather(map, x, &mut xl[..nl]);
                let (fs, qs, dfs, dqs) = (
                    &mut fl[..nl],
                    &mut ql[..nl],
                    &mut dfl[..nl * nl],
                    &mut dql[..nl * nl],
                );
                fs.fill(0.0);
                qs.fill(0.0);
                dfs.fill(0.0);
                dqs.fill(0.0);
                element.evaluate(&xl[..nl], ctx, &mut Stamp::new(fs, qs, dfs, dqs));
                out.scatter(map, slots, charge, a0, fs, qs, dfs, dqs);
            }
        }
    }

    /// Builds `rhs = -F` for `load` from the last assembly and returns the largest
    /// residual-to-tolerance ratio and its row.
    fn residual(&mut self, x: &[f64], load: &Load<'_>, tol: &Tolerances) -> (f64, usize) {
        let n_nodes = self.n_nodes;
        for i in 0..self.n {
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
                    self.jac[self.layout.diag_slot[i]] += load.gmin;
                }
                if let Some((g, prev)) = load.pseudo {
                    fi += g * (x[i] - prev[i]);
                    self.jac[self.layout.diag_slot[i]] += g;
                }
            }
            self.rhs[i] = -fi;
        }
        for &(i, v) in load.clamps {
            for &s in
                &self.layout.row_slots[self.layout.row_slot_ptr[i]..self.layout.row_slot_ptr[i + 1]]
            {
                self.jac[s] = 0.0;
            }
            self.jac[self.layout.diag_slot[i]] = 1.0;
            self.rhs[i] = -(x[i] - v);
            self.scale[i] = v.abs();
        }
        let mut worst = (0.0f64, 0usize);
        for i in 0..self.n {
            let abs = self.row_abstol(i, tol);
            let ratio = self.rhs[i].abs() / (tol.reltol * self.scale[i] + abs);
            if ratio.is_nan() || ratio > worst.0 {
                worst = (ratio, i);
            }
        }
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
        for it in 1..=params.max_iterations {
            self.assemble(x, &load.ctx, load.a0);
            let (ratio, _) = self.residual(x, load, &tol);
            self.lu
                .factor(&self.jac)
                .map_err(|s| NewtonFailure::Singular { unknown: s.unknown })?;
            let mut delta = std::mem::take(&mut self.rhs);
            let solved = self.lu.solve(&mut delta);
            let bad = delta.iter().position(|d| !d.is_finite());
            if let Err(s) = solved {
                self.rhs = delta;
                return Err(NewtonFailure::Singular { unknown: s.unknown });
            }
            if let Some(unknown) = bad {
                self.rhs = delta;
                return Err(NewtonFailure::Singular { unknown });
            }
            let mut vmax = 0.0f64;
            for i in 0..self.n {
                if self.kinds[i] == UnknownKind::Voltage {
                    vmax = vmax.max(delta[i].abs());
                }
            }
            let lambda = if vmax > params.max_voltage_step {
                params.max_voltage_step / vmax
            } else {
                1.0
            };
            let mut norm = 0.0f64;
            if lambda == 1.0 {
                for i in 0..self.n {
                    let bound = tol.reltol * x[i].abs().max((x[i] + delta[i]).abs())
                        + self.unknown_abstol(i, &tol);
                    norm = norm.max(delta[i].abs() / bound);
                }
            }
            let quadratic = (it > 1)
                .then(|| norm / (prev_norm * prev_norm))
                .filter(|m| m.is_finite());
            let delta_ok = lambda == 1.0
                && ((ratio <= 1.0 && norm <= 1.0)
                    || params.quadratic.is_some_and(|m| m * norm * norm <= 1.0));
            prev_norm = if lambda == 1.0 { norm } else { f64::NAN };
            if delta_ok {
                // Accepted: the residual here passed and the correction from here is within
                // tolerance. The solution also takes that last correction, and the charges the
                // integrator will store are carried along it to first order, q += (∂q/∂x) Δ,
                // so unknowns and charges agree to O(Δ²) without another evaluation.
                for i in 0..self.n {
                    x[i] += delta[i];
                }
                if load.a0 != 0.0 {
                    self.carry_charges(&delta);
                }
                self.rhs = delta;
                return Ok(NewtonInfo {
                    iterations: it,
                    residual_ratio: ratio,
                    quadratic,
                });
            }
            for i in 0..self.n {
                x[i] += lambda * delta[i];
            }
            self.rhs = delta;
        }
        Err(NewtonFailure::NoConvergence {
            worst: self.worst_rows(x, load, &tol),
        })
    }

    /// `q += C Δ` with `C = ∂q/∂x` from the last assembly.
    fn carry_charges(&mut self, delta: &[f64]) {
        self.cdelta.fill(0.0);
        let col_ptr = self.pattern.col_ptr();
        let row_idx = self.pattern.row_idx();
        for c in 0..self.n {
            let d = delta[c];
            if d != 0.0 {
                let range = col_ptr[c]..col_ptr[c + 1];
                for (&r, &cv) in row_idx[range.clone()].iter().zip(&self.cmat[range]) {
                    self.cdelta[r] += cv * d;
                }
            }
        }
        for (q, cd) in self.q.iter_mut().zip(&self.cdelta) {
            *q += cd;
        }
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
        if let Some(owner) = self.unknown_owner.get(unknown).copied().flatten() {
            elements.push(format!(
                "{} ({})",
                self.element_names[owner],
                self.elements[owner].kind()
            ));
        } else {
            for (e, pins) in self.element_pins.iter().enumerate() {
                if pins.iter().any(|p| !p.is_ground() && p.0 - 1 == unknown) {
                    elements.push(format!(
                        "{} ({})",
                        self.element_names[e],
                        self.elements[e].kind()
                    ));
                    if elements.len() == 4 {
                        break;
                    }
                }
            }
        }
        Culprit {
            unknown: self.unknown_names[unknown].clone(),
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
            NewtonFailure::NoConvergence { worst } => EngineError::NoConvergence {
                context,
                worst: worst
                    .into_iter()
                    .map(|(i, v, t)| self.culprit(i, v, t))
                    .collect(),
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
        if let Err(e) = self.lu.factor(&self.jac) {
            return Err(fail(self, e.unknown));
        }
        delta.copy_from_slice(&self.rhs);
        if let Err(e) = self.lu.solve(delta) {
            return Err(fail(self, e.unknown));
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

/// How results and diagnostics name a node voltage: `node out`.
pub(crate) fn node_label(name: &str) -> String {
    format!("node {name}")
}
