//! Latency: Newton restricted to the active part of the circuit in transients.
//!
//! In a long ring only the few stages around the travelling edge move; the others sit at a
//! rail. With [`crate::TransientParams::latency`] on, each transient step solves Newton for the
//! *active* unknowns only and holds the *latent* ones at their last accepted values:
//!
//! * **Holding.** After an accepted step, an unknown becomes latent when it was *quiet* on
//!   each of the last [`QUIET_STEPS`] accepted steps: on a row with charge, its charge moved
//!   by at most η `qtol_i` (η = [`QUIET_FRACTION`]; `qtol_i = lte_reltol max(|q_i|, q_ref) +
//!   chgtol`, the row's truncation-error tolerance), so that held it would miss about that
//!   much a step; on a row without charge, its unknown moved by at most
//!   `η (reltol max(|x_n|, |x_{n+1}|) + abstol_i)` (`abstol_i` is `vntol` for a voltage,
//!   `abstol` for a current). It must also pass the hold tests below with at least half of
//!   its allowance of missed charge free. An element's internal unknown (a branch current, an
//!   internal node) is latent only together with all of its element's local unknowns. The
//!   step after, the predictor leaves a latent unknown at its value.
//! * **Frozen elements.** An element whose local unknowns are all latent, and which is not an
//!   independent source (the only elements whose evaluation depends on time), sees exactly the
//!   inputs of its evaluation at the moment it froze, so that evaluation's currents and charges
//!   stand for it unchanged, exactly. Each row keeps the sum of its frozen elements'
//!   contributions (recomputed in element order whenever one of them freezes or thaws); each
//!   Newton iteration assembles the other (*live*) elements on top of those sums.
//! * **The active system.** Newton factorises and solves `J_AA Δ_A = -F_A`: the columns of the
//!   active unknowns and the equations they own. A node pinned by an ideal grounded source
//!   (see [`crate::System`], "Pinned unknowns") trades equations with the source's current: the
//!   current is solved from the node's KCL row, the node held by the source's row. In a ring
//!   the active set changes at nearly every step (the edge moves), so `J_AA` of up to
//!   [`DENSE_MAX`] unknowns is factorised dense with partial pivoting in buffers sized once
//!   ([`DenseLu`]: no ordering, no symbolic analysis, no allocation); a larger one gets a
//!   sparse LU whose symbolic analysis is redone when the active set changes. Either way a
//!   singular `J_AA` is reported, and Newton then solves the whole system.
//! * **Checking latent rows.** At every Newton iteration each latent unknown's equation is
//!   evaluated at the held value (its frozen sum, the live elements touching it, the charge
//!   history). The charge its residual `F_i` moves over the step is `|F_i| w` (`w = h/2` for
//!   the trapezoidal rule, whose residual carries the currents of both ends of the step; `h`
//!   for the backward-difference formulas). On a row with charge the unknown wakes, and the
//!   iteration is assembled again with it active, when its *missed charge* `m_i` plus this
//!   step's share would exceed μ `qtol_i` (μ = [`MISSED_FRACTION`], `qtol_i` taken when it
//!   was held), or when its residual leaves [`HOLD_FRACTION`] of Newton's own residual test
//!   on its full scale, the largest current or `α₀`-scaled charge term (a held row is part of
//!   that test and is not refined by later iterations; this part is for Newton's
//!   convergence, the accuracy is the missed charge's). On a row without charge it wakes when
//!   its residual leaves [`HOLD_FRACTION`] of `reltol scale_i + abstol_i` with `scale_i` its
//!   largest current alone.
//! * **Missed charge.** `m_i` gains each accepted step's share while the row is held, and
//!   decays with the row's own relaxation time `τ_i = C_ii / G_ii` (the diagonals of the
//!   capacitance matrix and of `G = J - α₀ C`, taken from the step that held it; infinite
//!   unless both are positive): `dm_i/dt = |F_i| - m_i / τ_i`. It is kept across holds and
//!   wakes. A held row's stored trapezoidal rate is set to the rate its currents ask for, so
//!   that its next residual is the charge the step misses rather than alternating between
//!   twice that and nothing.
//! * **Working rows.** Only the rows a live element touches, and the active unknowns' rows,
//!   are assembled, checked, predicted, integrated and stored each step. The other latent
//!   rows are *interior*: every element on them is frozen, so their current `f_i` is
//!   constant. A row with charge becomes interior while its missed charge is within its
//!   bound, one without only when `f_i` passes its residual test; its history is then set to
//!   its present (held) value and the trapezoidal rule's stored rate to zero, so its equation
//!   stays exactly as it was. Its missed charge follows `dm/dt = |f_i| - m / τ_i` in closed
//!   form, so it wakes at the time that reaches its bound (never when `|f_i| τ_i`, the level
//!   it tends to, is within the bound: a settled stage whose residual current only holds it
//!   where it is); a neighbour that wakes makes it a working row again. A row touched by more
//!   than [`WIDE`] elements (a supply) keeps its frozen sums in a tree of fixed shape, so
//!   each refresh costs in proportion to the active part, not to the circuit.
//! * **Refreshes.** A refresh (after an accepted step that holds an unknown, or a wake)
//!   examines only the rows whose working status can have changed: those of the elements that
//!   froze or thawed and of the unknowns that changed, with their trades (each row counts its
//!   live elements). The active list is merged from the changed unknowns (every unknown not
//!   held is active) and the active system is rebuilt only when it changed (in test builds
//!   the engine's unit tests check the result against these definitions after every
//!   refresh, on their small circuits; a reviewer ran the same check by hand on square-law
//!   rings of 101 and 1001 stages and 2D-FET rings of 51 to 151 stages, dense and sparse
//!   paths). The lists live in buffers kept by the partition, and Newton and the transient
//!   borrow them: after the buffers have grown, refreshes and steps allocate nothing (a
//!   sparse active system aside, and an element of more than four local unknowns, whose
//!   evaluation when it freezes uses heap buffers).
//!
//! *Accuracy.* A step with latent unknowns is accepted only when every working equation,
//! latent or active, passes the residual test Newton applies to the full system. What a
//! held row adds is the charge it misses. Over a hold, the row's own equations asked for a
//! charge change of `-Σ F_i w` that it did not get. That is the error the truncation-error
//! test bounds on every other row: the charge a step's formula gets wrong, held within
//! `qtol_i`. Linearised on the row's own diagonal, the charge the held row lacks against
//! the full solve, `D_i`, obeys `dD_i/dt = F_i - D_i / τ_i`: the full solve would relax
//! toward the same state with the row's time constant. So `|D_i| ≤ m_i ≤ μ qtol_i`: at any
//! time, the held row is off by less than a fraction of one step's allowed truncation
//! error. A floating node (`τ_i` infinite, or far longer than the run) never gets its missed
//! charge back, and its bound then holds for the whole run; a stage held at a rail through
//! an on transistor (`τ_i` of picoseconds) sits within `|F_i| τ_i` of where its equation
//! would put it, and stays held while that is within the bound. A node coupled by charge to
//! a moving input (a gate whose input edge arrives, through the overlap and intrinsic gate
//! charges) sees its charge change by the coupled charge. Its residual carries that change,
//! so the coupled charge is counted as missed and the node wakes as its input's edge
//! arrives, before it has missed μ `qtol_i`. The bound is first order (the residual taken at
//! the held state, the relaxation on the row's own diagonal), and each hold that ends in the
//! interior rows loses up to half a step of the row's current with its dropped stored rate;
//! a row is held only with half its allowance free, so a floating node is held a few times a
//! run, not at every step (without that, `crates/engine/tests/latency_leak.rs`'s node was
//! held 2,700 times and drifted 2.5e-4 V). The truncation-error test runs on every working
//! charge row; an interior row's charge is constant, so its estimate would be zero.
//!
//! *Charge.* An active row's charge is computed and carried as before. A latent row whose
//! elements are all frozen keeps its charge bit for bit; one touched by a live element stores
//! the assembled charge (frozen sum plus live contributions), which is what the integrator
//! stores and reuses, so charge telescopes on every row. A floating node without current
//! stays latent with its charge exact.
//!
//! *Determinism.* Holding, waking and the frozen sums depend only on the run's own accepted
//! states and residuals, taken in unknown and element order on one thread.

use crate::element::{Analysis, EvalContext, UnknownKind};
use crate::lu::{DenseLu, LuStrategy, Singular, SparseLu};
use crate::system::{System, Tolerances, NONE};
use faer::sparse::SymbolicSparseColMat;
use std::cmp::Reverse;
use std::collections::BinaryHeap;

/// Consecutive quiet accepted steps before an unknown becomes latent.
pub(crate) const QUIET_STEPS: u32 = 3;
/// Fraction of the Newton residual tolerance a latent row's residual must stay within (the
/// full scale on a row with charge, the largest current on a row without).
pub(crate) const HOLD_FRACTION: f64 = 0.01;
/// Fraction of a charge row's truncation-error tolerance (taken when it is held) that its
/// missed charge may reach before it wakes. At 1.0 the demo process's rings of 21, 51 and
/// 101 stages ran as fast and landed 1.6e-7, 6.4e-9 and 3.5e-9 from the full solve, against
/// 1.9e-7, 2.3e-9 and 4.9e-10 at 0.3 (measured before the half-free rule of holding); 0.3
/// keeps a margin for the first-order bound.
pub(crate) const MISSED_FRACTION: f64 = 0.3;
/// Fraction of the row's truncation-error tolerance (a row with charge) or of the Newton
/// update tolerance (without) within which a step counts as quiet. 0.1 and 0.3 held about
/// as many rows on the 2D-FET rings but woke them far more often (101 stages 3.4 and 8.7 s
/// against 1.7 s, measured before the missed charge decayed with the relaxation time).
pub(crate) const QUIET_FRACTION: f64 = 0.01;
/// Active systems of up to this many unknowns are factorised dense (see [`DenseLu`]); larger
/// ones by the sparse solver, whose symbolic analysis is redone when the active set changes.
/// 48 and 128 gave the same times on the square-law rings; on a 101-stage 2D-FET ring, whose
/// active sets are larger, 128 took 5.7 s against 6.9-8.7 s at 48 (DEVELOPERS.md, Latency).
pub(crate) const DENSE_MAX: usize = 128;

/// The latent/active partition of one transient run, and the solver of the active system.
pub(crate) struct Latency {
    /// Whether the stepping loop's Newton solves use it.
    pub(crate) on: bool,
    /// Per unknown: held at its last accepted value.
    pub(crate) held: Vec<bool>,
    quiet: Vec<u32>,
    /// Per unknown: the bound on the charge its row lacks from having been held (see the
    /// module doc), at time `missed_t`; its row's relaxation time, taken when it was last
    /// held; its row's signed residual at this attempt's last check; the bound on `missed`.
    missed: Vec<f64>,
    missed_t: Vec<f64>,
    tau: Vec<f64>,
    pending_f: Vec<f64>,
    qtol: Vec<f64>,
    /// The charge a residual moves per unit of current over the step being solved and its
    /// end (see [`System::latency_step`]), and the last accepted time.
    weight: f64,
    t_new: f64,
    t_acc: f64,
    /// `α₀` of the step being solved (set at each check).
    a0: f64,
    /// Per unknown: the row holding its equation (pinned nodes and their sources' currents
    /// trade rows); per row: the position in `active` of the unknown it belongs to.
    eq_row: Vec<usize>,
    pos: Vec<usize>,
    /// Per element: frozen, never frozen (sources), the number of pins (internals follow).
    frozen: Vec<bool>,
    source: Vec<bool>,
    pins: Vec<usize>,
    /// Stored currents and charges of frozen elements at their `Plan::map` offsets.
    st_f: Vec<f64>,
    st_q: Vec<f64>,
    /// Per row: the elements that have it as a local unknown, with the local index.
    adj_ptr: Vec<usize>,
    adj: Vec<(u32, u8)>,
    /// Per row: the sums of the frozen elements' contributions.
    pub(crate) fz_f: Vec<f64>,
    pub(crate) fz_q: Vec<f64>,
    pub(crate) fz_scale: Vec<f64>,
    pub(crate) fz_qscale: Vec<f64>,
    /// Elements evaluated at each iteration, in element order.
    pub(crate) live: Vec<u32>,
    /// Per row: how many live elements have it as a local unknown.
    live_count: Vec<u32>,
    /// The active unknowns, and the active system: per entry of `J_AA` (column by column),
    /// its slot in the system's matrix and its place in the dense matrix (dense path only).
    active: Vec<usize>,
    gather: Vec<usize>,
    dense_at: Vec<u32>,
    values: Vec<f64>,
    rhs: Vec<f64>,
    solver: ActiveSolver,
    dense: DenseLu,
    strategy: LuStrategy,
    /// Buffers kept between refreshes, so that a refresh allocates nothing once they have
    /// grown: the next (or last) active list and working rows, the rows a refresh examines,
    /// rows and elements touched by a refresh, one column of `J_AA`.
    next_active: Vec<usize>,
    next_work: Vec<usize>,
    candidates: Vec<usize>,
    dirty_rows: Vec<usize>,
    flipped: Vec<u32>,
    column: Vec<(usize, usize)>,
    /// Per working row: its largest current contribution at the last assembly; per working
    /// unknown: whether its row passed the hold test at the last check.
    fscale: Vec<f64>,
    holdable: Vec<bool>,
    /// Unknowns whose state changed since the last refresh.
    changed: Vec<usize>,
    /// The working rows (sorted): every row a live element touches, the active unknowns'
    /// rows, closed under the pinned row trade. Only these are assembled, checked and
    /// integrated; the others (*interior* latent rows) change nothing while they stay so.
    pub(crate) work: Vec<usize>,
    in_work: Vec<bool>,
    /// Per row: its index among the transient's charge rows, or NONE; the working rows'.
    charge_k: Vec<usize>,
    pub(crate) work_k: Vec<usize>,
    /// Rows that became interior since the transient last took them.
    left: Vec<usize>,
    /// Per interior row's unknown: its current when it left the working rows.
    leave_f: Vec<f64>,
    /// Per unknown of an interior row: when its missed charge reaches its bound (infinite
    /// otherwise); and those times as a min-heap of `(time bits, unknown)` (non-negative times
    /// order like their bits), whose entries count only while they match `deadline`.
    deadline: Vec<f64>,
    deadlines: BinaryHeap<Reverse<(u64, usize)>>,
    tol: Tolerances,
    /// Per row touched by more than [`WIDE`] elements (a supply): its frozen sums as a tree.
    trees: Vec<Option<SumTree>>,
    /// Counters: latent unknown-steps and active unknown-steps over accepted steps.
    pub(crate) latent_steps: u64,
    pub(crate) active_steps: u64,
}

impl Latency {
    /// Marks `u` active again, its quiet count restarted (its missed charge stays, and
    /// decays).
    fn release(&mut self, u: usize) {
        self.held[u] = false;
        self.quiet[u] = 0;
        self.changed.push(u);
    }

    /// `u`'s missed-charge bound decayed to time `t` with its row's relaxation time.
    fn missed_at(&self, u: usize, t: f64) -> f64 {
        let m = self.missed[u];
        if m == 0.0 {
            return 0.0;
        }
        m * (-(t - self.missed_t[u]).max(0.0) / self.tau[u]).exp()
    }

    /// Brings `u`'s missed-charge bound to time `t`, adding `charge` missed over the step
    /// that ends there.
    fn add_missed(&mut self, u: usize, t: f64, charge: f64) {
        self.missed[u] = self.missed_at(u, t) + charge;
        self.missed_t[u] = t;
    }

    /// Brings an interior row's missed-charge bound to the last accepted time: its constant
    /// current `leave_f` feeds it while it decays (`dm/dt = |f| - m / τ`).
    fn settle_interior(&mut self, u: usize) {
        let s = (self.t_acc - self.missed_t[u]).max(0.0);
        let (f, tau) = (self.leave_f[u].abs(), self.tau[u]);
        let fed = if tau.is_finite() {
            f * tau * -(-s / tau).exp_m1()
        } else {
            f * s
        };
        let decayed = self.missed_at(u, self.t_acc);
        self.missed[u] = decayed + fed;
        self.missed_t[u] = self.t_acc;
    }

    /// When an interior row's missed-charge bound, `missed` now at `t_acc` and fed by its
    /// current `f`, reaches its bound (infinite if never).
    fn interior_deadline(&self, u: usize, f: f64) -> f64 {
        let (f, tau) = (f.abs(), self.tau[u]);
        let room = self.qtol[u] - self.missed[u];
        if f == 0.0 || !room.is_finite() {
            return f64::INFINITY;
        }
        let room = room.max(0.0);
        if !tau.is_finite() {
            return self.t_acc + room / f;
        }
        // m(s) = A - (A - m₀) e^(-s/τ) with A = |f| τ, the level it tends to.
        let a = f * tau;
        if a <= self.qtol[u] {
            return f64::INFINITY;
        }
        self.t_acc + tau * (room / (a - self.qtol[u])).ln_1p()
    }

    /// The active unknowns, in order.
    pub(crate) fn active(&self) -> &[usize] {
        &self.active
    }

    /// Whether any unknown is held.
    pub(crate) fn any_held(&self) -> bool {
        self.held.iter().any(|&h| h)
    }
}

impl System {
    /// Starts the latency bookkeeping of a transient: every unknown active, nothing frozen.
    pub(crate) fn latency_begin(&mut self, tol: Tolerances) {
        let strategy = self.lu.strategy();
        let mut charge_k = vec![NONE; self.n];
        for (k, &r) in self.charge_rows.iter().enumerate() {
            charge_k[r] = k;
        }
        let n = self.n;
        let ne = self.elements.len();
        let mut eq_row: Vec<usize> = (0..n).collect();
        for (node, branch) in self.pinned_pairs() {
            eq_row[node] = branch;
            eq_row[branch] = node;
        }
        let mut count = vec![0usize; n + 1];
        for &g in &self.layout.loc_map {
            if g != NONE {
                count[g + 1] += 1;
            }
        }
        for r in 0..n {
            count[r + 1] += count[r];
        }
        let mut adj = vec![(0u32, 0u8); count[n]];
        let mut fill = count.clone();
        for e in 0..ne {
            let local =
                &self.layout.loc_map[self.layout.loc_start[e]..self.layout.loc_start[e + 1]];
            for (k, &g) in local.iter().enumerate() {
                if g != NONE {
                    adj[fill[g]] = (e as u32, k as u8);
                    fill[g] += 1;
                }
            }
        }
        let locs = self.layout.map32.len();
        let trees = (0..n)
            .map(|r| {
                let d = count[r + 1] - count[r];
                (d > WIDE).then(|| SumTree::new(d))
            })
            .collect();
        // Nothing is frozen yet: every element touching a row is live.
        let live_count = (0..n).map(|r| (count[r + 1] - count[r]) as u32).collect();
        self.latency = Some(Latency {
            on: true,
            held: vec![false; n],
            quiet: vec![0; n],
            missed: vec![0.0; n],
            missed_t: vec![0.0; n],
            tau: vec![f64::INFINITY; n],
            pending_f: vec![0.0; n],
            qtol: vec![f64::INFINITY; n],
            weight: 0.0,
            t_new: 0.0,
            t_acc: 0.0,
            a0: 0.0,
            eq_row,
            pos: vec![NONE; n],
            frozen: vec![false; ne],
            source: self
                .elements
                .iter()
                .map(|e| e.is_independent_source())
                .collect(),
            pins: (0..ne).map(|e| self.pin_count(e)).collect(),
            st_f: vec![0.0; locs],
            st_q: vec![0.0; locs],
            adj_ptr: count,
            adj,
            fz_f: vec![0.0; n],
            fz_q: vec![0.0; n],
            fz_scale: vec![0.0; n],
            fz_qscale: vec![0.0; n],
            live: Vec::new(),
            live_count,
            active: Vec::new(),
            gather: Vec::new(),
            dense_at: Vec::new(),
            values: Vec::new(),
            rhs: Vec::new(),
            solver: ActiveSolver::None,
            dense: DenseLu::new(DENSE_MAX),
            strategy,
            next_active: Vec::new(),
            next_work: Vec::new(),
            candidates: Vec::new(),
            dirty_rows: Vec::new(),
            flipped: Vec::new(),
            column: Vec::new(),
            fscale: vec![0.0; n],
            holdable: vec![false; n],
            changed: (0..n).collect(),
            work: Vec::new(),
            in_work: vec![false; n],
            charge_k,
            work_k: Vec::new(),
            left: Vec::new(),
            leave_f: vec![0.0; n],
            deadline: vec![f64::INFINITY; n],
            deadlines: BinaryHeap::new(),
            tol,
            trees,
            latent_steps: 0,
            active_steps: 0,
        });
        self.latency_refresh(&vec![0.0; n], 0.0);
    }

    /// Ends the latency bookkeeping; later solves use the full system.
    pub(crate) fn latency_end(&mut self) -> Option<(u64, u64)> {
        self.latency
            .take()
            .map(|l| (l.latent_steps, l.active_steps))
    }

    /// Whether the Newton solves of the running transient restrict themselves to the active
    /// unknowns.
    pub(crate) fn latency_on(&self) -> bool {
        self.latency.as_ref().is_some_and(|l| l.on)
    }

    /// Sets the latent unknowns of the predicted state to their held values.
    pub(crate) fn latency_hold(&self, x: &[f64], x_new: &mut [f64]) {
        if let Some(l) = &self.latency {
            // Interior rows' unknowns are held and never predicted.
            for &u in &l.work {
                if l.held[u] {
                    x_new[u] = x[u];
                }
            }
        }
    }

    /// Checks every latent unknown's equation after an assembly and residual (`rhs = -F`):
    /// wakes those that fail (see the module doc) and returns whether any woke.
    pub(crate) fn latency_check(&mut self, a0: f64, tol: &Tolerances) -> bool {
        let Some(l) = self.latency.as_mut() else {
            return false;
        };
        l.a0 = a0;
        let mut woke = false;
        for w in 0..l.work.len() {
            let u = l.work[w];
            let r = l.eq_row[u];
            let abs = match self.kinds[r] {
                UnknownKind::Voltage => tol.abstol,
                UnknownKind::Current => tol.vntol,
            };
            let res = self.rhs[r].abs();
            // The charge the residual moves over this step (for a held row, the charge it
            // misses); an active row keeps it for the hold test at acceptance.
            l.pending_f[u] = -self.rhs[r];
            let share = res * l.weight;
            // Whether the row could be held now, as far as its residual tells (an unknown is
            // held only then, so that it is not woken at once). A charge row needs only to sit
            // inside Newton's own test, its full scale with the charge terms (a held row is
            // part of that test, and is not refined); its accuracy is the missed-charge
            // bound's. A row without charge keeps the test on its largest current alone.
            let fits = if l.charge_k[r] != NONE {
                res <= HOLD_FRACTION * (tol.reltol * self.scale[r] + abs)
            } else {
                res <= HOLD_FRACTION * (tol.reltol * l.fscale[r] + abs)
            };
            l.holdable[u] = fits;
            if !l.held[u] {
                continue;
            }
            // NaN fails both tests and wakes the row, whose residual then reports it.
            if !(fits && l.missed_at(u, l.t_new) + share <= l.qtol[u]) {
                wake(l, u, &self.layout.loc_map, &self.layout.loc_start);
                woke = true;
            }
        }
        woke
    }

    /// Sets the charge a residual moves per unit of current over the step about to be solved:
    /// `h / 2` for the trapezoidal rule (its residual carries the currents at both ends,
    /// each for half the step), `h` for the backward-difference formulas.
    pub(crate) fn latency_step(&mut self, weight: f64, t_new: f64) {
        if let Some(l) = self.latency.as_mut() {
            l.weight = weight;
            l.t_new = t_new;
        }
    }

    /// After an accepted step, sets the stored charge rates of the held working rows (indexed
    /// like the system's charge rows) to the rates their currents ask for: the rate the formula
    /// computed from a held charge carries the row's residual, which a trapezoidal step
    /// would otherwise take back at the next step (its residual would alternate between
    /// twice the current and nothing).
    pub(crate) fn latency_settle_rates(&self, qdot: &mut [f64]) {
        if let Some(l) = &self.latency {
            for &u in &l.work {
                let k = l.charge_k[l.eq_row[u]];
                if l.held[u] && k != NONE {
                    qdot[k] -= l.pending_f[u];
                }
            }
        }
    }

    /// Keeps the working rows' current scales of the last assembly (before the residual adds
    /// the charge terms to them).
    pub(crate) fn latency_keep_scale(&mut self) {
        if let Some(l) = self.latency.as_mut() {
            for &r in &l.work {
                l.fscale[r] = self.scale[r];
            }
        }
    }

    /// Wakes every unknown (after the active system failed to factorise).
    pub(crate) fn latency_wake_all(&mut self) {
        if let Some(l) = self.latency.as_mut() {
            for u in 0..self.n {
                if l.held[u] {
                    l.release(u);
                }
            }
        }
    }

    /// After an accepted step from `x_old` to `x_new` at `t`: commits the latent rows' missed
    /// charge, counts quiet steps and holds the unknowns that became latent. `charge(r)` is
    /// row `r`'s truncation-error tolerance and the charge it moved over the step (infinite
    /// and zero for a row without charge).
    pub(crate) fn latency_accepted(
        &mut self,
        x_old: &[f64],
        x_new: &[f64],
        t: f64,
        tol: &Tolerances,
        charge: &dyn Fn(usize) -> (f64, f64),
    ) {
        // Taken out while the step's matrix is read.
        let Some(mut l) = self.latency.take() else {
            return;
        };
        l.latent_steps += (self.n - l.work.len()) as u64;
        l.t_acc = t;
        for w in 0..l.work.len() {
            let u = l.work[w];
            if l.held[u] {
                let q = (l.pending_f[u] * l.weight).abs();
                l.add_missed(u, t, q);
                l.latent_steps += 1;
                continue;
            }
            l.active_steps += 1;
            // A charge row is quiet when its charge moved by a small fraction of its
            // truncation tolerance (held, it would miss about that much a step); a row
            // without charge when its unknown moved by a small fraction of Newton's update
            // tolerance.
            let (qtol, moved) = charge(l.eq_row[u]);
            let quiet = if qtol.is_finite() {
                moved <= QUIET_FRACTION * qtol
            } else {
                let (a, b) = (x_old[u], x_new[u]);
                let abs = match self.kinds[u] {
                    UnknownKind::Voltage => tol.vntol,
                    UnknownKind::Current => tol.abstol,
                };
                (b - a).abs() <= QUIET_FRACTION * (tol.reltol * a.abs().max(b.abs()) + abs)
            };
            l.quiet[u] = if quiet {
                l.quiet[u].saturating_add(1)
            } else {
                0
            };
        }
        let loc_map = &self.layout.loc_map;
        let loc_start = &self.layout.loc_start;
        for w in 0..l.work.len() {
            let u = l.work[w];
            if l.held[u] || l.quiet[u] < QUIET_STEPS || !l.holdable[u] {
                continue;
            }
            // An internal unknown goes latent only with every local unknown of its element.
            let internal_ok = match self.unknown_owner[u] {
                None => true,
                Some(e) => loc_map[loc_start[e]..loc_start[e + 1]]
                    .iter()
                    .all(|&g| g == NONE || l.held[g] || l.quiet[g] >= QUIET_STEPS),
            };
            // A row is held only with at least half its allowance of missed charge free, so
            // that a row whose missed charge does not relax (a floating node) is held a few
            // times in a run, not again at every step.
            let r = l.eq_row[u];
            let qtol = MISSED_FRACTION * charge(r).0;
            let share = (l.pending_f[u] * l.weight).abs();
            if internal_ok && l.missed_at(u, t) + share <= 0.5 * qtol {
                l.held[u] = true;
                l.qtol[u] = qtol;
                l.add_missed(u, t, 0.0);
                // The row's relaxation time `C_ii / G_ii` from the step's matrix (every
                // element on an active row is live, so its diagonal is complete); none
                // (infinite) unless both are positive and their ratio does not underflow.
                let (j, c) = self.diagonal(r);
                let g = j - l.a0 * c;
                let tau = c / g;
                l.tau[u] = if c > 0.0 && g > 0.0 && tau > 0.0 {
                    tau
                } else {
                    f64::INFINITY
                };
                l.changed.push(u);
            }
        }
        let changed = !l.changed.is_empty();
        self.latency = Some(l);
        if changed {
            self.latency_refresh(x_new, t);
        }
    }

    /// Runs `f` with the active unknowns and the working rows of the partition lent out of it
    /// (both `None` unless `latent`): the Newton loop's passes over them borrow the lists
    /// instead of copying them. `f` must not use the partition itself.
    pub(crate) fn with_latency_lists<R>(
        &mut self,
        latent: bool,
        f: impl FnOnce(&mut Self, Option<&[usize]>, Option<&[usize]>) -> R,
    ) -> R {
        let lent = self
            .latency
            .as_mut()
            .filter(|_| latent)
            .map(|l| (std::mem::take(&mut l.active), std::mem::take(&mut l.work)));
        let out = match &lent {
            Some((active, work)) => f(self, Some(active), Some(work)),
            None => f(self, None, None),
        };
        if let (Some((active, work)), Some(l)) = (lent, self.latency.as_mut()) {
            l.active = active;
            l.work = work;
        }
        out
    }

    /// The working rows and their indices among the charge rows, when latency is on.
    pub(crate) fn latency_work(&self) -> Option<(&[usize], &[usize])> {
        self.latency
            .as_ref()
            .filter(|l| l.on)
            .map(|l| (l.work.as_slice(), l.work_k.as_slice()))
    }

    /// Puts the rows that became interior since the last call into `rows` (emptied first).
    pub(crate) fn latency_take_left(&mut self, rows: &mut Vec<usize>) {
        rows.clear();
        if let Some(l) = self.latency.as_mut() {
            // Swapped, so both lists keep their room.
            std::mem::swap(&mut l.left, rows);
        }
    }

    /// Wakes the interior rows whose missed charge reaches its bound by `t_new` (the state
    /// is `x`); returns whether any woke.
    pub(crate) fn latency_due(&mut self, x: &[f64], t_new: f64) -> bool {
        let Some(l) = self.latency.as_mut() else {
            return false;
        };
        let mut any = false;
        while let Some(&Reverse((bits, u))) = l.deadlines.peek() {
            let when = f64::from_bits(bits);
            if when > t_new {
                break;
            }
            l.deadlines.pop();
            if l.deadline[u] == when && l.held[u] && !l.in_work[l.eq_row[u]] {
                l.deadline[u] = f64::INFINITY;
                l.settle_interior(u);
                wake(l, u, &self.layout.loc_map, &self.layout.loc_start);
                any = true;
            }
        }
        if any {
            self.latency_refresh(x, t_new);
        }
        any
    }

    /// Brings the frozen elements, the frozen sums, the live elements and the active system up
    /// to date with the held set, evaluating newly frozen elements at `x` (time `t`).
    /// Returns whether a row joined the working rows. Allocates nothing once the partition's
    /// buffers have grown (a newly built sparse active system aside).
    pub(crate) fn latency_refresh(&mut self, x: &[f64], t: f64) -> bool {
        let Some(mut l) = self.latency.take() else {
            return false;
        };
        let ctx = EvalContext {
            time: t,
            source_scale: 1.0,
            analysis: Analysis::Transient,
        };
        l.changed.sort_unstable();
        l.changed.dedup();
        self.refreeze(&mut l, x, &ctx);
        self.resum(&mut l);
        relive(&mut l);
        if reactivate(&mut l) {
            self.build_active(&mut l);
        }
        let entered = self.build_work(&mut l);
        l.changed.clear();
        #[cfg(test)]
        self.check_partition(&l);
        self.latency = Some(l);
        entered
    }

    /// The incremental refresh against the definitions, recomputed from scratch (the engine's
    /// own tests run it after every refresh): live elements and their counts per row, every
    /// unknown not held active, every wanted row working, the working rows sorted.
    #[cfg(test)]
    fn check_partition(&self, l: &Latency) {
        let live: Vec<u32> = (0..l.frozen.len() as u32)
            .filter(|&e| !l.frozen[e as usize])
            .collect();
        assert_eq!(l.live, live, "live elements");
        let mut count = vec![0u32; self.n];
        for &e in &live {
            let e = e as usize;
            let local =
                &self.layout.loc_map[self.layout.loc_start[e]..self.layout.loc_start[e + 1]];
            for &g in local.iter().filter(|&&g| g != NONE) {
                count[g] += 1;
            }
        }
        assert_eq!(l.live_count, count, "live elements per row");
        let active: Vec<usize> = (0..self.n).filter(|&u| !l.held[u]).collect();
        assert_eq!(l.active, active, "active unknowns");
        assert!(
            l.work.windows(2).all(|w| w[0] < w[1]),
            "working rows sorted"
        );
        for r in 0..self.n {
            assert_eq!(
                l.in_work[r],
                l.work.binary_search(&r).is_ok(),
                "row {r} flag"
            );
            let basic = |r: usize| count[r] > 0 || !l.held[r];
            if basic(r) || basic(l.eq_row[r]) {
                assert!(l.in_work[r], "wanted row {r} not working");
            }
        }
    }

    /// Freezes and thaws the elements of the changed unknowns (`l.changed`, sorted), storing a
    /// newly frozen element's evaluation at `x`; lists the flipped elements and the rows they
    /// touch (`l.flipped`, `l.dirty_rows`) and updates the wide rows' trees.
    fn refreeze(&self, l: &mut Latency, x: &[f64], ctx: &EvalContext) {
        l.dirty_rows.clear();
        l.flipped.clear();
        for c in 0..l.changed.len() {
            let u = l.changed[c];
            for a in l.adj_ptr[u]..l.adj_ptr[u + 1] {
                let e = l.adj[a].0 as usize;
                let (lo, hi) = (self.layout.loc_start[e], self.layout.loc_start[e + 1]);
                let local = &self.layout.loc_map[lo..hi];
                let want = !l.source[e] && local.iter().all(|&g| g == NONE || l.held[g]);
                if want == l.frozen[e] {
                    continue;
                }
                l.frozen[e] = want;
                l.flipped.push(e as u32);
                for &g in local.iter().filter(|&&g| g != NONE) {
                    if want {
                        l.live_count[g] -= 1;
                    } else {
                        l.live_count[g] += 1;
                    }
                }
                if want {
                    self.evaluate_into(e, x, ctx, &mut l.st_f, &mut l.st_q);
                }
                let plan = &self.layout.plan[e];
                for (k, &g) in local.iter().enumerate() {
                    if g == NONE {
                        continue;
                    }
                    if let Some(tree) = l.trees[g].as_mut() {
                        let at = plan.map as usize + k;
                        let leaf = if want {
                            let q = if plan.charge { l.st_q[at] } else { 0.0 };
                            [l.st_f[at], q, l.st_f[at].abs(), q.abs()]
                        } else {
                            [0.0; 4]
                        };
                        let adj = &l.adj[l.adj_ptr[g]..l.adj_ptr[g + 1]];
                        // Entries are sorted by element, then local index.
                        let pos = adj.partition_point(|&(a, j)| (a as usize, j as usize) < (e, k));
                        tree.set(pos, leaf);
                    }
                }
                l.dirty_rows
                    .extend(local.iter().copied().filter(|&g| g != NONE));
            }
        }
    }

    /// Recomputes the frozen sums of the rows a flip touched, in element order.
    fn resum(&self, l: &mut Latency) {
        l.dirty_rows.sort_unstable();
        l.dirty_rows.dedup();
        for &r in &l.dirty_rows {
            if let Some(tree) = &l.trees[r] {
                [l.fz_f[r], l.fz_q[r], l.fz_scale[r], l.fz_qscale[r]] = tree.total();
                continue;
            }
            let (mut f, mut q, mut sf, mut sq) = (0.0, 0.0, 0.0f64, 0.0f64);
            for &(e, k) in &l.adj[l.adj_ptr[r]..l.adj_ptr[r + 1]] {
                let e = e as usize;
                if !l.frozen[e] {
                    continue;
                }
                let at = self.layout.plan[e].map as usize + k as usize;
                f += l.st_f[at];
                sf = sf.max(l.st_f[at].abs());
                if self.layout.plan[e].charge {
                    q += l.st_q[at];
                    sq = sq.max(l.st_q[at].abs());
                }
            }
            l.fz_f[r] = f;
            l.fz_q[r] = q;
            l.fz_scale[r] = sf;
            l.fz_qscale[r] = sq;
        }
    }

    /// The working rows after a refresh (see [`Latency::work`]): a row is wanted when a live
    /// element touches it or its unknown is active, or either holds for the row it trades
    /// with. A row about to become interior must pass the residual test on its frozen
    /// current, or it stays. Only the rows whose answer can have changed are examined: those
    /// of the flipped elements (their live counts and frozen sums changed) and of the changed
    /// unknowns, with their trades; a row kept before is kept again unless it is one of them.
    /// Returns whether a row joined.
    fn build_work(&self, l: &mut Latency) -> bool {
        l.candidates.clear();
        for &e in &l.flipped {
            let e = e as usize;
            let local =
                &self.layout.loc_map[self.layout.loc_start[e]..self.layout.loc_start[e + 1]];
            l.candidates
                .extend(local.iter().copied().filter(|&g| g != NONE));
        }
        l.candidates.extend_from_slice(&l.changed);
        for i in 0..l.candidates.len() {
            l.candidates.push(l.eq_row[l.candidates[i]]);
        }
        if l.candidates.is_empty() {
            return false;
        }
        l.candidates.sort_unstable();
        l.candidates.dedup();
        let tol = l.tol;
        let basic = |l: &Latency, r: usize| l.live_count[r] > 0 || !l.held[r];
        let mut entered = false;
        let mut moved = false;
        for c in 0..l.candidates.len() {
            let r = l.candidates[c];
            let u = l.eq_row[r];
            let want = basic(l, r) || basic(l, u);
            if want && !l.in_work[r] {
                l.in_work[r] = true;
                entered = true;
                moved = true;
                // The charge it missed while interior, to the last accepted step (the step
                // being solved checks its row).
                l.settle_interior(u);
                l.deadline[u] = f64::INFINITY;
            } else if !want && l.in_work[r] {
                let f = l.fz_f[r];
                let abs = match self.kinds[r] {
                    UnknownKind::Voltage => tol.abstol,
                    UnknownKind::Current => tol.vntol,
                };
                // A charge row may become interior while it has room left in its allowance of
                // missed charge: its deadline wakes it when the room is used. A row without
                // charge only within the same fraction of the current test a held row keeps.
                let fits = if l.charge_k[r] != NONE {
                    l.missed_at(u, l.t_acc) < l.qtol[u]
                } else {
                    f.abs() <= HOLD_FRACTION * (tol.reltol * l.fz_scale[r] + abs)
                };
                if !(l.held[u] && fits) {
                    continue;
                }
                l.in_work[r] = false;
                moved = true;
                l.left.push(r);
                l.leave_f[u] = f;
                l.add_missed(u, l.t_acc, 0.0);
                let when = l.interior_deadline(u, f);
                if when.is_finite() {
                    l.deadline[u] = when;
                    l.deadlines.push(Reverse((when.to_bits(), u)));
                }
            }
        }
        // Entries of rows that came back since are dropped once they outnumber the rows.
        if l.deadlines.len() > 2 * self.n {
            let deadline = &l.deadline;
            l.deadlines
                .retain(|&Reverse((bits, u))| deadline[u] == f64::from_bits(bits));
        }
        if moved {
            // The old working rows still in, merged with the candidates that joined (both
            // sorted).
            let mut next = std::mem::take(&mut l.next_work);
            next.clear();
            let mut joined = l
                .candidates
                .iter()
                .copied()
                .filter(|&r| l.in_work[r])
                .peekable();
            for &r in &l.work {
                while let Some(j) = joined.next_if(|&j| j < r) {
                    next.push(j);
                }
                if joined.peek() == Some(&r) {
                    joined.next();
                }
                if l.in_work[r] {
                    next.push(r);
                }
            }
            next.extend(joined);
            l.next_work = std::mem::replace(&mut l.work, next);
            l.work_k.clear();
            let charge_k = &l.charge_k;
            l.work_k
                .extend(l.work.iter().map(|&r| charge_k[r]).filter(|&k| k != NONE));
        }
        entered
    }

    /// The active unknowns, the pattern of `J_AA` and its solver: dense up to [`DENSE_MAX`]
    /// unknowns, sparse (a fresh symbolic analysis) beyond.
    fn build_active(&self, l: &mut Latency) {
        for &u in &l.next_active {
            l.pos[l.eq_row[u]] = NONE;
        }
        for (k, &u) in l.active.iter().enumerate() {
            l.pos[l.eq_row[u]] = k;
        }
        let m = l.active.len();
        let dense = m <= l.dense.capacity();
        let col_ptr = self.pattern.col_ptr();
        let row_idx = self.pattern.row_idx();
        // The sparse pattern is handed to the solver, which keeps it: built only for it.
        let mut ptr = Vec::new();
        let mut rows = Vec::new();
        if !dense {
            ptr.push(0usize);
        }
        l.gather.clear();
        l.dense_at.clear();
        for (j, &c) in l.active.iter().enumerate() {
            l.column.clear();
            let range = col_ptr[c]..col_ptr[c + 1];
            for (s, &r) in range.clone().zip(&row_idx[range]) {
                let k = l.pos[r];
                if k != NONE {
                    l.column.push((k, s));
                }
            }
            // The sparse pattern lists rows in order; the dense matrix takes them as they come.
            if !dense {
                l.column.sort_unstable();
            }
            for &(k, s) in &l.column {
                l.gather.push(s);
                if dense {
                    l.dense_at.push((j * m + k) as u32);
                } else {
                    rows.push(k);
                }
            }
            if !dense {
                ptr.push(rows.len());
            }
        }
        l.values.clear();
        l.values.resize(l.gather.len(), 0.0);
        l.rhs.clear();
        l.rhs.resize(m, 0.0);
        // Everything active: the system's own solver (analysed once, pinned unknowns taken
        // out) solves the same equations.
        l.solver = if m == 0 || m == self.n {
            ActiveSolver::None
        } else if dense {
            ActiveSolver::Dense
        } else {
            let pattern = SymbolicSparseColMat::new_checked(m, m, ptr, None, rows);
            SparseLu::new(pattern, l.strategy)
                .map_or(ActiveSolver::None, |lu| ActiveSolver::Sparse(Box::new(lu)))
        };
    }

    /// Factorises `J_AA` from the last assembly and solves it for the active unknowns' update;
    /// latent unknowns get none. `v` holds `-F` by row on entry; on return it holds `Δ` for
    /// the active unknowns and zero for the other unknowns of working rows (the entries of
    /// interior rows are left as they were: nothing reads them).
    pub(crate) fn solve_active(&mut self, v: &mut [f64]) -> Result<(), Singular> {
        if self
            .latency
            .as_ref()
            .is_some_and(|l| l.active.len() == self.n)
        {
            return self.solve_update(v);
        }
        let Some(l) = self.latency.as_mut() else {
            return Err(Singular { unknown: 0 });
        };
        for (r, &u) in l.rhs.iter_mut().zip(&l.active) {
            *r = v[l.eq_row[u]];
        }
        // Working rows are closed under the row trade, so they cover every row read above.
        for &r in &l.work {
            v[r] = 0.0;
        }
        let active = &l.active;
        let back = |e: Singular| Singular {
            unknown: active[e.unknown.min(active.len() - 1)],
        };
        match &mut l.solver {
            ActiveSolver::None if active.is_empty() => return Ok(()),
            ActiveSolver::None => return Err(Singular { unknown: active[0] }),
            ActiveSolver::Dense => {
                let a = l.dense.matrix_mut(active.len());
                for (&at, &s) in l.dense_at.iter().zip(&l.gather) {
                    a[at as usize] = self.jac[s];
                }
                l.dense.factor().map_err(back)?;
                l.dense.solve(&mut l.rhs);
            }
            ActiveSolver::Sparse(lu) => {
                for (value, &s) in l.values.iter_mut().zip(&l.gather) {
                    *value = self.jac[s];
                }
                lu.factor(&l.values).map_err(back)?;
                lu.solve(&mut l.rhs).map_err(back)?;
            }
        }
        for (&r, &u) in l.rhs.iter().zip(active) {
            v[u] = r;
        }
        Ok(())
    }
}

/// The live elements in element order after the flips of a refresh (`l.flipped`): edited in
/// place when few flipped (the cost of a refresh then follows the active part, not the
/// circuit).
fn relive(l: &mut Latency) {
    l.flipped.sort_unstable();
    l.flipped.dedup();
    if l.live.is_empty() || l.flipped.len().saturating_mul(l.live.len()) > l.frozen.len() {
        l.live.clear();
        let frozen = &l.frozen;
        l.live
            .extend((0..frozen.len() as u32).filter(|&e| !frozen[e as usize]));
    } else {
        for &e in &l.flipped {
            match (l.live.binary_search(&e), l.frozen[e as usize]) {
                (Ok(k), true) => {
                    l.live.remove(k);
                }
                (Err(k), false) => l.live.insert(k, e),
                _ => {}
            }
        }
    }
}

/// The active unknowns after the changes of a refresh (`l.changed`, sorted): every unknown
/// not held is active (one stops being held only by [`Latency::release`], which lists it as
/// changed), so the old list is merged with the changed unknowns. The old list goes to
/// `l.next_active`. Returns whether the list changed.
fn reactivate(l: &mut Latency) -> bool {
    let mut next = std::mem::take(&mut l.next_active);
    next.clear();
    let mut changed = l.changed.iter().copied().peekable();
    for &u in &l.active {
        while let Some(c) = changed.next_if(|&c| c < u) {
            if !l.held[c] {
                next.push(c);
            }
        }
        if changed.peek() == Some(&u) {
            changed.next();
        }
        if !l.held[u] {
            next.push(u);
        }
    }
    next.extend(changed.filter(|&c| !l.held[c]));
    if next == l.active {
        l.next_active = next;
        return false;
    }
    l.next_active = std::mem::replace(&mut l.active, next);
    true
}

/// How the active system is solved.
enum ActiveSolver {
    /// Nothing active; everything active (the system's own solver); or the sparse symbolic
    /// analysis failed (reported as singular, so the caller falls back to the whole system).
    None,
    /// [`DenseLu`] in the partition's buffers.
    Dense,
    /// A sparse LU analysed for this active set.
    Sparse(Box<SparseLu>),
}

/// Rows touched by more elements than this keep their frozen sums in a [`SumTree`], so that a
/// refresh costs `log d` for them instead of `d`.
const WIDE: usize = 64;

/// Sums (and largest magnitudes) of the frozen contributions to one wide row, over its
/// elements in element order: a binary tree whose shape depends only on the row's degree, so
/// the sums depend only on which elements are frozen, not on the order they froze in.
struct SumTree {
    size: usize,
    /// Per node: sum of `f`, sum of `q`, largest `|f|`, largest `|q|`.
    node: Vec<[f64; 4]>,
}

impl SumTree {
    fn new(leaves: usize) -> Self {
        let size = leaves.next_power_of_two();
        SumTree {
            size,
            node: vec![[0.0; 4]; 2 * size],
        }
    }

    fn set(&mut self, pos: usize, leaf: [f64; 4]) {
        let mut i = self.size + pos;
        self.node[i] = leaf;
        while i > 1 {
            i /= 2;
            let (a, b) = (self.node[2 * i], self.node[2 * i + 1]);
            self.node[i] = [a[0] + b[0], a[1] + b[1], a[2].max(b[2]), a[3].max(b[3])];
        }
    }

    fn total(&self) -> [f64; 4] {
        self.node[1]
    }
}

/// Marks `u` active, with the internal unknowns of every element it belongs to (an internal
/// unknown is latent only with all of its element's unknowns).
fn wake(l: &mut Latency, u: usize, loc_map: &[usize], loc_start: &[usize]) {
    l.release(u);
    for a in l.adj_ptr[u]..l.adj_ptr[u + 1] {
        let e = l.adj[a].0 as usize;
        let local = &loc_map[loc_start[e]..loc_start[e + 1]];
        for &g in &local[l.pins[e]..] {
            if g != NONE && l.held[g] {
                l.release(g);
            }
        }
    }
}
