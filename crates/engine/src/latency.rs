//! Latency: Newton restricted to the active part of the circuit in transients.
//!
//! In a long ring only the few stages around the travelling edge move; the others sit at a
//! rail. With [`crate::TransientParams::latency`] on, each transient step solves Newton for the
//! *active* unknowns only and holds the *latent* ones at their last accepted values:
//!
//! * **Holding.** After an accepted step, an unknown becomes latent when it moved by at most
//!   `η (reltol max(|x_n|, |x_{n+1}|) + abstol_i)` (η = [`QUIET_FRACTION`], `abstol_i` is
//!   `vntol` for a voltage, `abstol` for a current) on each of the last [`QUIET_STEPS`] accepted
//!   steps. An element's internal unknown (a branch current, an internal node) is latent only
//!   together with all of its element's local unknowns. The step after, the predictor leaves a
//!   latent unknown at its value.
//! * **At rest from the start.** An unknown whose rate at t = 0 (the transient's
//!   consistent-rate solve) would move it by less than that bound over the first step counts
//!   as quiet since before it, and is held before the first step when its row passes the
//!   hold test there, its budget from an assembly at the start with every row active
//!   ([`System::latency_hold_at_rest`]): a long ring from a single-edge start solves only
//!   the stages the start set moving from its first step, not the whole ring for the first
//!   [`QUIET_STEPS`] steps.
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
//!   history). The unknown wakes, and the iteration is assembled again with it active, when its
//!   residual leaves a fraction [`HOLD_FRACTION`] of the test every active row must pass,
//!   `|F_i| ≤ reltol scale_i + abstol_i`, with `scale_i` the row's largest current alone (a
//!   held value is not refined by later iterations, so it must sit well inside the test; and
//!   the charge terms' scale, `α₀` times the largest charge, grows as the step shrinks), or
//!   when the charge its row has missed, `Σ |F_i| / α₀` over the accepted steps of every
//!   hold of the run (the charge change Newton would have applied), would exceed its
//!   *budget*, taken when it was held.
//! * **Budget.** The row's own truncation-error tolerance `lte_reltol max(|q_i|, q_ref) +
//!   chgtol`, and no more than its column passes on. A row that missed charge `M` is off by
//!   `e = M / C_ii` once it wakes (an algebraic row by `F_i / G_ii` while held), and drives
//!   `G_ki e` into every other row `k` at every step, which the active solve takes as given.
//!   No decay is assumed (a loop of gain can hold the error up however fast the row's own
//!   conductance would relax it): it lasts to the end of the run, so `∫ e dt <= M / D` with
//!   `D = |C_ii| / (t_stop - t)` (`|G_ii|` for an algebraic row, whose error is gone when it
//!   wakes), and the budget is at most `qtol_k D / |G_ki|` for each charge row `k` of the
//!   column. An algebraic row of the column passes the error on to its own column's charge
//!   rows, through its diagonal, up to two such rows deep; a third, or a held algebraic row
//!   on the way (whose column the last assembly left partial, and which may wake while the
//!   error lasts), leaves a budget of zero. Taken when the row is held, from the assembly in
//!   which it was active, and lowered at each accepted step while it is held from the
//!   entries that step's assembly made whole (couplings grow as neighbours switch). A row
//!   without charge so gets a finite budget when it feeds a charge row (DEVELOPERS.md,
//!   Latency, "Budget through the column", for the circuits that needed each part).
//! * **Giving back.** A row that wakes gets back, in every stored point of its charge
//!   history, the part of the signed charge its current moved over the hold that its own
//!   relaxation would not have undone ([`give_back`]): all of it without conductance, about
//!   the equilibrium offset `C F / G` for a row that relaxes within the hold. The missed
//!   charge still counts against the run's allowance.
//!
//! * **Working rows.** Only the rows a live element touches, and the active unknowns' rows,
//!   are assembled, checked, predicted, integrated and stored each step. The other latent
//!   rows are *interior*: every element on them is frozen, so their current `f_i` is
//!   constant (a node row's `f_i` counts the transient's `gmin x_i`, which Newton's residual
//!   adds and the frozen sums do not hold). A row becomes interior only when `f_i` passes
//!   the residual test; its history is
//!   then set to its present (held) value and the trapezoidal rule's stored rate, which that
//!   test bounds, to zero, so its equation stays exactly as it was. Its missed charge grows
//!   as `|f_i| (t - t_leave)`, so it wakes at the time that reaches its bound (a current of
//!   exactly zero, a settled stage ahead of the edge, never wakes by itself); a neighbour
//!   that wakes makes it a working row again. A row touched by more than [`WIDE`] elements
//!   (a supply) keeps its frozen sums in a tree of fixed shape, so each refresh costs in
//!   proportion to the active part, not to the circuit.
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
//! * **Fallback.** With [`crate::TransientParams::latency_fallback`], while more than
//!   [`FULL_ABOVE`] of the unknowns are active after an accepted step's holds, every held row
//!   wakes and the steps take latency off's path (the whole system's assembly, refactor and
//!   solve; `on` false, nothing held, every row working): the dense LU of a large active set
//!   and the bookkeeping cost more than that. Holding resumes when fewer than [`HOLD_BELOW`]
//!   of the unknowns would stay active if every row ready to be held were held; the rows'
//!   quiet steps are counted throughout, and Newton checks the residuals against the hold
//!   tests (it wakes nothing, nothing being held) only from the step after enough rows have
//!   been quiet long enough. A run starts in the fallback. After a hold shorter than
//!   [`SHORT_HOLD`] accepted steps the fallback waits, for longer after each such hold,
//!   before it may hold again: on a ring whose active share hovers between the two
//!   thresholds the switches themselves would cost more than holding saves. Entering the
//!   fallback, an interior row's missed charge is brought to the last accepted time as when
//!   a neighbour wakes it; the missed charge is kept through the fallback, so each row's
//!   allowance stays one step's truncation tolerance for the whole run.
//!
//! *Accuracy.* A step with latent unknowns is accepted only when every equation, latent or
//! active, passes the residual test Newton applies to the full system: the accepted state is a
//! solution of the full step equations to the ordinary Newton tolerances. Beyond one step, the
//! charge a latent row fails to move accumulates; it is bounded by one step's truncation-error
//! tolerance of that row, and what its held value passes on to each neighbouring charge row
//! by that row's tolerance (the budget), so the latent part never drifts by more than the
//! integrator already allows for one step, times one plus a row's number of held neighbours.
//! First order: each row's error is taken alone, the held rows' errors on one another
//! through held rows are not followed, nor an error a charge row received and carries on in
//! a slow loop: a node that integrates the difference of such rows with a large gain over
//! the whole run can end far from the full solve while every row stays within a few
//! allowances (DEVELOPERS.md, Latency, "Budget through the column"). The truncation-error
//! test runs on every working charge row; an interior row's charge is constant, so its
//! estimate would be zero. A fallback step is a full solve, nothing held: it adds no missed
//! charge.
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
use crate::system::{Layout, LocalScratch, Stores, System, Tolerances, NONE, NONE32};
use faer::sparse::SymbolicSparseColMat;
use std::cmp::Reverse;
use std::collections::BinaryHeap;

/// Consecutive quiet accepted steps before an unknown becomes latent.
pub(crate) const QUIET_STEPS: u32 = 3;
/// Fraction of the Newton residual tolerance a latent row's residual must stay within.
pub(crate) const HOLD_FRACTION: f64 = 0.01;
/// Fraction of the Newton update tolerance within which a step counts as quiet.
pub(crate) const QUIET_FRACTION: f64 = 0.01;
/// Active systems of up to this many unknowns are factorised dense (see [`DenseLu`]); larger
/// ones by the sparse solver, whose symbolic analysis is redone when the active set changes.
/// 48 and 128 gave the same times on the square-law rings; on a 101-stage 2D-FET ring, whose
/// active sets are larger, 128 took 5.7 s against 6.9-8.7 s at 48 (DEVELOPERS.md, Latency).
pub(crate) const DENSE_MAX: usize = 128;

/// Columns a held row's budget follows its error through: its own and those of up to two
/// algebraic rows in a row; a third leaves a budget of zero (see [`System::pass_on_budget`]).
const PASS_DEPTH: usize = 3;
/// Column entries that search may read before it gives up (and the row is not held).
const PASS_ENTRIES: usize = 1 << 16;

/// A refresh that changes more than one unknown in this many examines every element once
/// instead of each changed unknown's elements (see [`System::refreeze`]): an element has
/// about three local unknowns, so past a quarter of the unknowns the whole list is the
/// smaller walk, and it runs in memory order.
const BULK_REFREEZE: usize = 4;

/// Active share (active unknowns over all unknowns, after an accepted step's holds) above
/// which latency falls back to the whole system, nothing held. On the demo 2D-FET ring of 21
/// stages most unknowns stay active, and the dense LU of that active set plus the
/// bookkeeping cost more than the whole banded system's refactor (DEVELOPERS.md, Latency;
/// not swept).
pub(crate) const FULL_ABOVE: f64 = 0.5;
/// Share of the unknowns that would stay active if every row ready to be held were held,
/// below which the fallback holds again. Below [`FULL_ABOVE`], so that a share near either
/// does not switch at every step.
pub(crate) const HOLD_BELOW: f64 = 0.3;
/// A hold that falls back within this many accepted steps was too short to pay for its
/// switches (each wakes or holds every row at once); the fallback then waits before holding
/// again, [`BACKOFF_FIRST`] accepted steps after the first such hold and twice as long after
/// each next one, up to [`BACKOFF_MAX`]; a longer hold starts the wait afresh. Without the
/// wait the 101-stage demo 2D-FET ring switched 7,192 times in 42,946 steps and ran 1.3-1.7x
/// slower than the plain solve (DEVELOPERS.md, Latency).
pub(crate) const SHORT_HOLD: u64 = 32;
/// See [`SHORT_HOLD`].
pub(crate) const BACKOFF_FIRST: u64 = 32;
/// See [`SHORT_HOLD`].
pub(crate) const BACKOFF_MAX: u64 = 4096;

/// The most an unknown of `kind` may move from `a` to `b` in a quiet step:
/// `η (reltol max(|a|, |b|) + abstol)`, η = [`QUIET_FRACTION`] (see the module doc, "Holding").
pub(crate) fn quiet_bound(a: f64, b: f64, kind: UnknownKind, tol: &Tolerances) -> f64 {
    let abs = match kind {
        UnknownKind::Voltage => tol.vntol,
        UnknownKind::Current => tol.abstol,
    };
    QUIET_FRACTION * (tol.reltol * a.abs().max(b.abs()) + abs)
}

/// The residual a held row must stay within, `kind` being that of the row's own unknown (a
/// voltage's row is a KCL row, a current; a branch current's row is a voltage) and `scale`
/// its largest current contribution: [`HOLD_FRACTION`] of Newton's residual test.
fn hold_test(scale: f64, kind: UnknownKind, tol: &Tolerances) -> f64 {
    let abs = match kind {
        UnknownKind::Voltage => tol.abstol,
        UnknownKind::Current => tol.vntol,
    };
    HOLD_FRACTION * (tol.reltol * scale + abs)
}

/// The latent/active partition of one transient run, and the solver of the active system.
pub(crate) struct Latency {
    /// Whether the stepping loop's Newton solves use it (false: the whole-system fallback,
    /// nothing held, every row working).
    pub(crate) on: bool,
    /// Whether it may fall back to the whole system ([`crate::TransientParams::latency_fallback`]).
    fallback: bool,
    /// Switches between holding and the fallback.
    switches: u64,
    /// Accepted steps since the last switch, and how many the fallback waits before it may
    /// hold again (see [`SHORT_HOLD`]).
    since_switch: u64,
    backoff: u64,
    /// In the fallback: whether Newton checks every row's residual (which rows could be
    /// held), from the step after enough rows have been quiet long enough.
    watch: bool,
    /// Per unknown: held at its last accepted value.
    pub(crate) held: Vec<bool>,
    quiet: Vec<u32>,
    /// Per unknown: charge its equation missed over accepted steps while held, this attempt's
    /// share, and the bound.
    missed: Vec<f64>,
    pending: Vec<f64>,
    qtol: Vec<f64>,
    /// Per unknown: the signed charge its row is owed over this hold (its residual over the
    /// accepted steps as charge: its current times the step, less what its charge moved at
    /// the held value), this attempt's current, when the hold began and its row's conductance
    /// and capacitance then (see [`give_back`]).
    owed: Vec<f64>,
    pending_owed: Vec<f64>,
    /// The last accepted time, and per held unknown its row's charge then.
    last_t: f64,
    last_q: Vec<f64>,
    hold_t: Vec<f64>,
    hold_gc: Vec<(f64, f64)>,
    /// Charge given back to rows that woke, `(index among the charge rows, charge)`, until the
    /// transient adds it to their histories.
    given: Vec<(usize, f64)>,
    /// The run's stop time: an error that does not decay lasts at most until then.
    stop_time: f64,
    /// The transient's conductance from every node to ground, part of each node row's current
    /// (Newton's residual adds it; the assembled and frozen currents do not hold it).
    gmin: f64,
    /// Per unknown: the row holding its equation (pinned nodes and their sources' currents
    /// trade rows); per row: the position in `active` of the unknown it belongs to.
    eq_row: Vec<usize>,
    pos: Vec<usize>,
    /// Per element: frozen, never frozen (sources).
    frozen: Vec<bool>,
    source: Vec<bool>,
    /// Stored currents and charges of frozen elements: the currents at their `Plan::map`
    /// offsets, the charges of elements with charge at `q_at` (see [`Stores`]).
    st_f: Vec<f64>,
    st_q: Vec<f64>,
    q_at: Vec<u32>,
    /// `st_f` and `st_q` hold every element's evaluation at the start state and time: set by
    /// the holds at the start from their assembly for the refresh they run at once (freezing
    /// an element there evaluates nothing), and cleared by them after it.
    st_all: bool,
    /// Buffers of a freeze's evaluation of a large element (sized at the start).
    scratch: LocalScratch,
    /// Per local unknown of an element (at its `Plan::map` offset): its entry's position in
    /// its row's list.
    adj_at: Vec<u32>,
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
    /// All false between uses: marks of unknowns (rows) and of elements for [`sort_unique`].
    marks: Vec<bool>,
    element_marks: Vec<bool>,
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
    /// Per interior row's unknown: when it left the working rows and its current then.
    leave_t: Vec<f64>,
    leave_f: Vec<f64>,
    /// Per unknown of an interior row: when its missed charge reaches its bound (infinite
    /// otherwise); and those times as a min-heap of `(time bits, unknown)` (non-negative times
    /// order like their bits), whose entries count only while they match `deadline`.
    deadline: Vec<f64>,
    deadlines: BinaryHeap<Reverse<(u64, usize)>>,
    tol: Tolerances,
    /// Per row touched by more than [`WIDE`] elements (a supply): its frozen sums as a tree,
    /// `trees[tree_of[r]]` (`NONE32` for every other row).
    trees: Vec<SumTree>,
    tree_of: Vec<u32>,
    /// Counters: latent unknown-steps and active unknown-steps over accepted steps.
    pub(crate) latent_steps: u64,
    pub(crate) active_steps: u64,
}

impl Latency {
    /// Marks `u` active again, its quiet count restarted.
    fn release(&mut self, u: usize) {
        self.held[u] = false;
        self.quiet[u] = 0;
        self.changed.push(u);
    }

    /// Marks every held unknown active again (an interior row's missed charge is brought to
    /// the refresh's time when it rejoins the working rows, see [`System::latency_refresh`]).
    fn release_all(&mut self) {
        for u in 0..self.held.len() {
            if self.held[u] {
                self.release(u);
            }
        }
    }

    /// Enters the whole-system fallback: every held unknown wakes, so that after the caller's
    /// refresh the steps solve the whole system as latency off does.
    fn suspend(&mut self) {
        self.release_all();
        self.backoff = if self.since_switch < SHORT_HOLD {
            (2 * self.backoff).clamp(BACKOFF_FIRST, BACKOFF_MAX)
        } else {
            0
        };
        self.on = false;
        self.watch = false;
        self.switches += 1;
        self.since_switch = 0;
    }

    /// The bound `D` on a held row's diagonal that its budget divides by, from the diagonal's
    /// conductance and capacitance at time `t` (see [`System::hold_budget`]): `|C| / (t_stop
    /// - t)`, an error lasting to the end of the run; `|G|` for an algebraic row.
    fn error_bound(&self, (g, c): (f64, f64), t: f64) -> f64 {
        if c != 0.0 {
            c.abs() / (self.stop_time - t).max(f64::MIN_POSITIVE)
        } else {
            g.abs()
        }
    }

    /// Row `r`'s truncation-error tolerance from `charge_tol`, which takes its index among
    /// the charge rows (infinite for a row without charge).
    fn charge_tol_of(&self, r: usize, charge_tol: &dyn Fn(usize) -> f64) -> f64 {
        match self.charge_k[r] {
            NONE => f64::INFINITY,
            k => charge_tol(k),
        }
    }

    /// The active unknowns, in order.
    pub(crate) fn active(&self) -> &[usize] {
        &self.active
    }

    /// Keeps the working rows' current scales from `scale` (the last assembly's, before the
    /// residual adds the charge terms to them).
    fn keep_scale(&mut self, scale: &[f64]) {
        for &r in &self.work {
            self.fscale[r] = scale[r];
        }
    }

    /// Whether any unknown is held.
    pub(crate) fn any_held(&self) -> bool {
        self.held.iter().any(|&h| h)
    }

    /// The current the transient's `gmin` adds to row `r` at `x` (node rows, the first
    /// `n_nodes`, only): part of the row's current in Newton's residual, though not in the
    /// assembled or frozen sums. Without it a node whose only leak is `gmin` would pass for
    /// one without current and be held for good.
    fn gmin_current(&self, n_nodes: usize, r: usize, x: &[f64]) -> f64 {
        if r < n_nodes {
            self.gmin * x[r]
        } else {
            0.0
        }
    }
}

impl System {
    /// Starts the latency bookkeeping of a transient: every unknown active, nothing frozen.
    /// With `fallback`, it starts in the whole-system fallback (everything is active at
    /// first) and holds once enough rows are ready.
    pub(crate) fn latency_begin(
        &mut self,
        tol: Tolerances,
        fallback: bool,
        stop_time: f64,
        gmin: f64,
        at_rest: &[usize],
    ) {
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
        let count = &self.layout.adj_ptr;
        let locs = self.layout.map32.len();
        // Per element, in one pass: a source; frozen (nothing is held yet, so only an element
        // with every pin on ground, no unknown to hold, as the rule "not a source, every
        // local unknown held" has it); live; where its charges are kept (elements with charge
        // only, packed in element order).
        let mut source = Vec::with_capacity(ne);
        let mut frozen = Vec::with_capacity(ne);
        let mut live = Vec::with_capacity(ne);
        let mut q_at = Vec::with_capacity(ne);
        let mut charge_locs = 0usize;
        for (e, element) in self.elements.iter().enumerate() {
            let is_source = element.is_independent_source();
            let plan = &self.layout.plan[e];
            let all_ground = self.layout.local(e).iter().all(|&g| g == NONE32);
            source.push(is_source);
            frozen.push(!is_source && all_ground);
            if is_source || !all_ground {
                live.push(e as u32);
            }
            q_at.push(if plan.charge {
                charge_locs += plan.local as usize;
                (charge_locs - plan.local as usize) as u32
            } else {
                NONE32
            });
        }
        let mut adj_at = vec![0u32; locs];
        for r in 0..n {
            let (elements, at) = self.layout.elements_of(r);
            for (i, (&e, &k)) in elements.iter().zip(at).enumerate() {
                adj_at[self.layout.plan[e as usize].map as usize + k as usize] = i as u32;
            }
        }
        let mut trees = Vec::new();
        let mut tree_of = vec![NONE32; n];
        for r in 0..n {
            let d = count[r + 1] - count[r];
            if d > WIDE {
                tree_of[r] = trees.len() as u32;
                trees.push(SumTree::new(d));
            }
        }
        // Nothing is frozen yet: every element touching a row is live.
        let live_count = (0..n).map(|r| (count[r + 1] - count[r]) as u32).collect();
        self.latency = Some(Latency {
            on: !fallback,
            fallback,
            switches: 0,
            since_switch: 0,
            backoff: 0,
            watch: false,
            held: vec![false; n],
            quiet: vec![0; n],
            missed: vec![0.0; n],
            pending: vec![0.0; n],
            stop_time,
            gmin,
            owed: vec![0.0; n],
            pending_owed: vec![0.0; n],
            last_t: 0.0,
            last_q: vec![0.0; n],
            hold_t: vec![0.0; n],
            hold_gc: vec![(0.0, 0.0); n],
            given: Vec::new(),
            qtol: vec![f64::INFINITY; n],
            eq_row,
            pos: vec![NONE; n],
            frozen,
            source,
            st_f: vec![0.0; locs],
            st_q: vec![0.0; charge_locs],
            q_at,
            st_all: false,
            scratch: LocalScratch::new(self.max_local()),
            adj_at,
            fz_f: vec![0.0; n],
            fz_q: vec![0.0; n],
            fz_scale: vec![0.0; n],
            fz_qscale: vec![0.0; n],
            live,
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
            marks: vec![false; n],
            element_marks: vec![false; ne],
            column: Vec::new(),
            fscale: vec![0.0; n],
            holdable: vec![false; n],
            changed: Vec::new(),
            work: (0..n).collect(),
            in_work: vec![true; n],
            charge_k,
            work_k: (0..self.charge_rows.len()).collect(),
            left: Vec::new(),
            leave_t: vec![0.0; n],
            leave_f: vec![0.0; n],
            deadline: vec![f64::INFINITY; n],
            deadlines: BinaryHeap::new(),
            tol,
            trees,
            tree_of,
            latent_steps: 0,
            active_steps: 0,
        });
        let Some(mut l) = self.latency.take() else {
            return;
        };
        for &u in at_rest {
            l.quiet[u] = QUIET_STEPS;
        }
        // Watched from the first step when few would stay active counting those at rest
        // (see `maybe_resume`).
        l.watch = fallback && ((n - at_rest.len()) as f64) < HOLD_BELOW * n as f64;
        // Everything active and working, every element live (built as such: a refresh from
        // nothing would examine every row and element to reach the same).
        l.active = (0..n).collect();
        self.build_active(&mut l);
        #[cfg(test)]
        self.check_partition(&l);
        self.latency = Some(l);
    }

    /// Ends the latency bookkeeping; later solves use the full system. Returns the latent
    /// and active unknown-steps and the fallback's switches.
    pub(crate) fn latency_end(&mut self) -> Option<(u64, u64, u64)> {
        self.latency
            .take()
            .map(|l| (l.latent_steps, l.active_steps, l.switches))
    }

    /// Whether the Newton solves of the running transient restrict themselves to the active
    /// unknowns.
    pub(crate) fn latency_on(&self) -> bool {
        self.latency.as_ref().is_some_and(|l| l.on)
    }

    /// Whether Newton's residuals are checked against the hold tests: while holding, and in
    /// the fallback once enough rows have been quiet long enough.
    pub(crate) fn latency_watching(&self) -> bool {
        self.latency.as_ref().is_some_and(|l| l.on || l.watch)
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
    pub(crate) fn latency_check(&mut self, x: &[f64], a0: f64, tol: &Tolerances) -> bool {
        let Some(l) = self.latency.as_mut() else {
            return false;
        };
        let mut woke = false;
        for w in 0..l.work.len() {
            let u = l.work[w];
            let r = l.eq_row[u];
            let res = self.rhs[r].abs();
            let test = hold_test(l.fscale[r], self.kinds[r], tol);
            // Whether the row could be held now (an unknown is held only then, so that it is
            // not woken at once).
            l.holdable[u] = res <= test;
            if !l.held[u] {
                continue;
            }
            let share = res / a0;
            l.pending[u] = share;
            // The row's current alone: its charge terms at a held value are the formula's
            // history (the trapezoidal rule's stored rate alternates in sign while held).
            l.pending_owed[u] = -(self.f[r] + l.gmin_current(self.n_nodes, r, x));
            // NaN fails both tests and wakes the row, whose residual then reports it. The scale
            // is the row's largest current alone: the charge terms' scale, `α₀` times the
            // largest charge, grows without bound as the step shrinks and would let a held node
            // that still carries current pass.
            if !(res <= test && l.missed[u] + share <= l.qtol[u]) {
                wake(l, u, &self.layout);
                woke = true;
            }
        }
        woke
    }

    /// Keeps the working rows' current scales of the last assembly (before the residual adds
    /// the charge terms to them).
    pub(crate) fn latency_keep_scale(&mut self) {
        if let Some(l) = self.latency.as_mut() {
            l.keep_scale(&self.scale);
        }
    }

    /// Wakes every unknown (after the active system failed to factorise).
    pub(crate) fn latency_wake_all(&mut self) {
        if let Some(l) = self.latency.as_mut() {
            l.release_all();
        }
    }

    /// After an accepted step from `x_old` to `x_new` at `t`: commits the latent rows' missed
    /// charge, counts quiet steps, holds the unknowns that became latent and switches to or
    /// from the whole-system fallback. `charge_tol(k)` is the `k`-th charge row's
    /// truncation-error tolerance.
    pub(crate) fn latency_accepted(
        &mut self,
        x_old: &[f64],
        x_new: &[f64],
        t: f64,
        a0: f64,
        tol: &Tolerances,
        charge_tol: &dyn Fn(usize) -> f64,
    ) {
        // Taken out while the hold tests read the system.
        let Some(mut l) = self.latency.take() else {
            return;
        };
        l.latent_steps += (self.n - l.work.len()) as u64;
        l.since_switch += 1;
        for &u in &l.work {
            if l.held[u] {
                l.missed[u] += l.pending[u];
                // What the row's equation asked for over the step less what its charge
                // moved at the held value (a coupling capacitor to a moving neighbour moves
                // it): the step's residual as charge.
                let q = self.q[l.eq_row[u]];
                l.owed[u] += l.pending_owed[u] * (t - l.last_t) - (q - l.last_q[u]);
                l.last_q[u] = q;
                l.pending_owed[u] = 0.0;
                // The couplings may have grown since the row was held (a neighbour's
                // transconductance as it switches): the budget only shrinks.
                if l.pending[u] != 0.0 {
                    // `D` as at the hold: smaller than now, when less of the run is left.
                    let d = l.error_bound(l.hold_gc[u], l.hold_t[u]);
                    let now = self.pass_on_budget(&l, u, d, a0, charge_tol);
                    l.qtol[u] = l.qtol[u].min(now);
                }
                l.pending[u] = 0.0;
                l.latent_steps += 1;
                continue;
            }
            l.active_steps += 1;
            let (a, b) = (x_old[u], x_new[u]);
            l.quiet[u] = if (b - a).abs() <= quiet_bound(a, b, self.kinds[u], tol) {
                l.quiet[u].saturating_add(1)
            } else {
                0
            };
        }
        self.hold_ready(&mut l, t, a0, charge_tol);
        l.last_t = t;
        let changed = !l.changed.is_empty();
        self.latency = Some(l);
        if changed {
            self.latency_refresh(x_new, t);
        }
    }

    /// Holds, before the first step, the unknowns at rest at the start (counted quiet by
    /// [`Self::latency_begin`]) whose rows pass the hold test at `x` (at t = 0 from an
    /// equilibrium start: the charge terms of a row at rest vanish to first order, so its
    /// current is its residual; a trapezoidal first step's stored rate may double it, which
    /// Newton's check of held rows then catches), with budgets from an assembly at `x` with
    /// every row active. The first step then solves only what the start set moving, instead
    /// of the whole system until the rest have been quiet for [`QUIET_STEPS`] steps. Nothing
    /// else changes: every held row is checked at every Newton iteration as always, and
    /// wakes when it fails. `a0` is the first step's `α₀` (any nonzero value assembles
    /// `jac = G + α₀ C` and `cmat = C`, from which the budgets take `G` and `C` as after a
    /// step).
    pub(crate) fn latency_hold_at_rest(
        &mut self,
        x: &[f64],
        a0: f64,
        tol: &Tolerances,
        charge_tol: &dyn Fn(usize) -> f64,
    ) {
        let ctx = EvalContext {
            time: 0.0,
            source_scale: 1.0,
            analysis: Analysis::Transient,
        };
        let Some(mut l) = self.latency.take() else {
            return;
        };
        // Every element's evaluation is kept: the refresh below, if any row is held, runs at
        // the same state and time and freezes from it instead of evaluating each again.
        let keep = Stores {
            f: &mut l.st_f,
            q: &mut l.st_q,
            q_at: &l.q_at,
        };
        self.assemble_keeping(x, &ctx, a0, keep);
        l.st_all = true;
        l.keep_scale(&self.scale);
        for w in 0..l.work.len() {
            let u = l.work[w];
            let r = l.eq_row[u];
            let f = self.f[r] + l.gmin_current(self.n_nodes, r, x);
            l.holdable[u] = f.abs() <= hold_test(l.fscale[r], self.kinds[r], tol);
        }
        self.hold_ready(&mut l, 0.0, a0, charge_tol);
        let changed = !l.changed.is_empty();
        self.latency = Some(l);
        if changed {
            self.latency_refresh(x, 0.0);
        }
        // The kept evaluations are of this state and time only: later freezes evaluate
        // (also when nothing was held here and no refresh ran).
        if let Some(l) = self.latency.as_mut() {
            l.st_all = false;
        }
    }

    /// The holds after an accepted step at `t` (or at the start): resumes holding from the
    /// fallback when few would stay active, takes the budgets of the rows ready to be held,
    /// holds them, and falls back when too many stay active. Reads the last assembly (`jac`
    /// at `a0`).
    fn hold_ready(&self, l: &mut Latency, t: f64, a0: f64, charge_tol: &dyn Fn(usize) -> f64) {
        if !l.on {
            self.maybe_resume(l, t, a0, charge_tol);
        }
        // Budgets first, then the holds: every budget reads the assembly in which all of
        // this step's newly held rows were still active (their columns whole).
        let first = l.changed.len();
        for w in 0..l.work.len() {
            let u = l.work[w];
            if !(l.on && self.ready_to_hold(l, u, t, a0, charge_tol)) {
                continue;
            }
            (l.qtol[u], l.hold_gc[u]) = self.hold_budget(l, u, t, a0, charge_tol);
            l.changed.push(u);
        }
        let newly_held = l.changed.len() - first;
        for c in first..l.changed.len() {
            let u = l.changed[c];
            l.held[u] = true;
            l.owed[u] = 0.0;
            l.pending_owed[u] = 0.0;
            l.hold_t[u] = t;
            l.last_q[u] = self.q[l.eq_row[u]];
            // `missed` is kept from earlier holds of this run: the charge a held row
            // misses is not given back when it wakes, so the bound of one step's
            // truncation tolerance is for the whole run, not for each hold (a leaking
            // node would otherwise lose a tolerance's worth per hold, without bound).
            l.pending[u] = 0.0;
        }
        // Too many active unknowns: the whole system is cheaper than the active one. (The
        // active list is refreshed below: it does not yet count this step's holds.)
        let active = l.active.len() - newly_held;
        if l.on && l.fallback && active as f64 > FULL_ABOVE * self.n as f64 {
            l.suspend();
        }
    }

    /// In the fallback, after an accepted step and once its wait is over (see
    /// [`SHORT_HOLD`]): watches the residuals from the next step once few unknowns would stay
    /// active counting the quiet ones, and resumes holding (`on`) once, on a watched step,
    /// few would stay active counting those ready to be held (nothing is held in the
    /// fallback, so every row is working and `work` lists every unknown).
    fn maybe_resume(&self, l: &mut Latency, t: f64, a0: f64, charge_tol: &dyn Fn(usize) -> f64) {
        if l.since_switch < l.backoff {
            return;
        }
        let few = |ready: usize| ((self.n - ready) as f64) < HOLD_BELOW * self.n as f64;
        let settled = l
            .work
            .iter()
            .filter(|&&u| l.quiet[u] >= QUIET_STEPS)
            .count();
        let watched = l.watch;
        l.watch = few(settled);
        if watched && l.watch {
            let ready = l
                .work
                .iter()
                .filter(|&&u| self.ready_to_hold(l, u, t, a0, charge_tol))
                .count();
            if few(ready) {
                l.on = true;
                l.switches += 1;
                l.since_switch = 0;
            }
        }
    }

    /// Whether the active unknown `u` may be held after an accepted step: quiet on its last
    /// [`QUIET_STEPS`] steps, its row inside the hold test at the last check, an internal
    /// unknown only with all of its element's local unknowns, and its row's missed charge of
    /// the run still below its budget ([`Self::hold_budget`]; a row that has missed its
    /// run's allowance stays active).
    fn ready_to_hold(
        &self,
        l: &Latency,
        u: usize,
        t: f64,
        a0: f64,
        charge_tol: &dyn Fn(usize) -> f64,
    ) -> bool {
        if l.held[u] || l.quiet[u] < QUIET_STEPS || !l.holdable[u] {
            return false;
        }
        let internal_ok =
            match self.owner(u) {
                None => true,
                Some(e) => self.layout.local(e).iter().all(|&g| {
                    g == NONE32 || l.held[g as usize] || l.quiet[g as usize] >= QUIET_STEPS
                }),
            };
        // A row that has missed nothing may be held on a zero budget (a floating node whose
        // equation holds exactly at its held value).
        internal_ok
            && (l.missed[u] == 0.0 || l.missed[u] < self.hold_budget(l, u, t, a0, charge_tol).0)
    }

    /// The charge `u`'s equation may miss over the run while held, and its diagonal's
    /// conductance and capacitance (see the module doc, "Budget"): its own row's
    /// truncation tolerance, and no more than lets each other charge row of its column, or
    /// beyond an algebraic row of it, receive its own tolerance ([`Self::pass_on_budget`]).
    /// The diagonal bounds how long the held error `e` lasts once the row wakes: a row that
    /// misses charge `M` is off by `e = M / C_uu`, taken to last to the end of the run (a
    /// loop of gain can hold it up however strongly `G_uu` would relax it), so `∫ e dt <= M
    /// (t_stop - t) / |C_uu|`; an algebraic row's error `F / G_uu` is gone when it wakes.
    /// Reads the Jacobian of the last assembly (`jac` at `a0`, `cmat`), in which `u` was
    /// active, so every element on its column was live and the column is whole.
    fn hold_budget(
        &self,
        l: &Latency,
        u: usize,
        t: f64,
        a0: f64,
        charge_tol: &dyn Fn(usize) -> f64,
    ) -> (f64, (f64, f64)) {
        let r = l.eq_row[u];
        let own = l.charge_tol_of(r, charge_tol);
        let parts = self.diagonal_parts(r, u, a0);
        let d = l.error_bound(parts, t);
        (own.min(self.pass_on_budget(l, u, d, a0, charge_tol)), parts)
    }

    /// The conductance and capacitance of row `r`'s entry in column `u` in the last assembly
    /// (`jac` at `a0`, `cmat`); zero where the pattern has none.
    fn diagonal_parts(&self, r: usize, u: usize, a0: f64) -> (f64, f64) {
        let (col_ptr, row_idx) = (self.pattern.col_ptr(), self.pattern.row_idx());
        match row_idx[col_ptr[u]..col_ptr[u + 1]].binary_search(&r) {
            Ok(k) => {
                let s = col_ptr[u] + k;
                (self.jac[s] - a0 * self.cmat[s], self.cmat[s])
            }
            Err(_) => (0.0, 0.0),
        }
    }

    /// The most charge held `u` may miss before its error, `diag` the bound on its diagonal
    /// (see [`Self::hold_budget`]), passes some other charge row `k` of its column its
    /// tolerance: a held value off by `e` drives `G_ku e` into row `k` at every step, which
    /// the active solve takes as given, so at most `qtol_k diag / |G_ku|`. An algebraic row
    /// `k` (no charge) of the column passes the error on, `G_ku e / |J_kv|` on its unknown `v`,
    /// to the charge rows of `v`'s column, and so on to [`PASS_DEPTH`] algebraic rows; a
    /// search that would visit more than [`PASS_ENTRIES`] entries gives zero (hold nothing
    /// rather than bound nothing). Only entries whose values the last assembly made whole are
    /// read: those of a column whose unknown is active, and of an active unknown's row.
    /// A capacitance `C_ku` moves row `k`'s charge by `C_ku / C_uu` times the charge `u`
    /// missed, once: within `k`'s tolerance for passive capacitors.
    fn pass_on_budget(
        &self,
        l: &Latency,
        u: usize,
        diag: f64,
        a0: f64,
        charge_tol: &dyn Fn(usize) -> f64,
    ) -> f64 {
        let mut budget = f64::INFINITY;
        let mut visits = 0usize;
        if !self.pass_on(l, u, diag, 0, a0, charge_tol, &mut budget, &mut visits) {
            return 0.0;
        }
        budget
    }

    /// One column of [`Self::pass_on_budget`]'s search: the column of unknown `c`, whose
    /// error is `1 / scale` per unit of the held row's missed charge. Returns false when the
    /// search grew past [`PASS_ENTRIES`].
    #[allow(
        clippy::too_many_arguments,
        reason = "a recursion's state, kept out of the partition"
    )]
    fn pass_on(
        &self,
        l: &Latency,
        c: usize,
        scale: f64,
        depth: usize,
        a0: f64,
        charge_tol: &dyn Fn(usize) -> f64,
        budget: &mut f64,
        visits: &mut usize,
    ) -> bool {
        let (col_ptr, row_idx) = (self.pattern.col_ptr(), self.pattern.row_idx());
        let entries = col_ptr[c]..col_ptr[c + 1];
        *visits += entries.len();
        if *visits > PASS_ENTRIES {
            return false;
        }
        let own_row = l.eq_row[c];
        for s in entries {
            let k = row_idx[s];
            let v = l.eq_row[k];
            // Whole when the column's unknown or the row's is active (all its elements live).
            if k == own_row || (l.held[c] && l.held[v]) {
                continue;
            }
            let g = (self.jac[s] - a0 * self.cmat[s]).abs();
            if g == 0.0 {
                continue;
            }
            if l.charge_k[k] != NONE {
                *budget = budget.min(l.charge_tol_of(k, charge_tol) * scale / g);
                continue;
            }
            // An algebraic row: its unknown takes the error on, through its diagonal. Beyond
            // the search's depth, or held (its column is not whole: its frozen elements are
            // not assembled; yet it may wake while the error lasts), nothing is bounded, so
            // nothing may be missed.
            if depth + 1 >= PASS_DEPTH || l.held[v] {
                *budget = 0.0;
                return true;
            }
            let j_kv = match row_idx[col_ptr[v]..col_ptr[v + 1]].binary_search(&k) {
                Ok(i) => self.jac[col_ptr[v] + i].abs(),
                Err(_) => 0.0,
            };
            if !self.pass_on(
                l,
                v,
                scale * j_kv / g,
                depth + 1,
                a0,
                charge_tol,
                budget,
                visits,
            ) {
                return false;
            }
        }
        true
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
                wake(l, u, &self.layout);
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
        sort_unique(&mut l.changed, &mut l.marks);
        self.refreeze(&mut l, x, &ctx);
        self.resum(&mut l);
        relive(&mut l);
        if reactivate(&mut l) {
            self.build_active(&mut l);
        }
        let entered = self.build_work(&mut l, x, t);
        let given = give_back(&mut l, t);
        l.changed.clear();
        #[cfg(test)]
        self.check_partition(&l);
        self.latency = Some(l);
        entered || given
    }

    /// Puts the charge given back to rows that woke since the last call into `given`
    /// (emptied first), as `(index among the charge rows, charge)`.
    pub(crate) fn latency_take_given(&mut self, given: &mut Vec<(usize, f64)>) {
        given.clear();
        if let Some(l) = self.latency.as_mut() {
            std::mem::swap(&mut l.given, given);
        }
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
        for e in 0..l.frozen.len() {
            let want = !l.source[e]
                && self
                    .layout
                    .local(e)
                    .iter()
                    .all(|&g| g == NONE32 || l.held[g as usize]);
            assert_eq!(l.frozen[e], want, "element {e} frozen");
        }
        let mut count = vec![0u32; self.n];
        for &e in &live {
            let e = e as usize;
            for &g in self.layout.local(e).iter().filter(|&&g| g != NONE32) {
                count[g as usize] += 1;
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
    /// touch (`l.flipped`, `l.dirty_rows`) and marks the wide rows' trees.
    ///
    /// An element is frozen exactly when it is not a source and all its local unknowns are
    /// held, and every unknown whose hold changed is listed, so only the changed unknowns'
    /// elements can flip. When many changed (the start's holds take most of a circuit at
    /// once), every element is examined once, in order, instead of once per changed unknown
    /// it has: the same elements flip.
    fn refreeze(&self, l: &mut Latency, x: &[f64], ctx: &EvalContext) {
        l.dirty_rows.clear();
        l.flipped.clear();
        if l.changed.len().saturating_mul(BULK_REFREEZE) > self.n {
            for e in 0..l.frozen.len() {
                self.flip(l, e, x, ctx);
            }
        } else {
            for c in 0..l.changed.len() {
                for &e in self.layout.elements_of(l.changed[c]).0 {
                    self.flip(l, e as usize, x, ctx);
                }
            }
        }
    }

    /// Freezes or thaws element `e` if its local unknowns' holds ask for it (see
    /// [`Self::refreeze`]).
    fn flip(&self, l: &mut Latency, e: usize, x: &[f64], ctx: &EvalContext) {
        let local = self.layout.local(e);
        let want = !l.source[e] && local.iter().all(|&g| g == NONE32 || l.held[g as usize]);
        if want == l.frozen[e] {
            return;
        }
        l.frozen[e] = want;
        l.flipped.push(e as u32);
        for &g in local.iter().filter(|&&g| g != NONE32) {
            if want {
                l.live_count[g as usize] -= 1;
            } else {
                l.live_count[g as usize] += 1;
            }
        }
        if want && !l.st_all {
            let stores = Stores {
                f: &mut l.st_f,
                q: &mut l.st_q,
                q_at: &l.q_at,
            };
            self.evaluate_into(e, x, ctx, stores, &mut l.scratch);
        }
        let map = self.layout.plan[e].map as usize;
        for (k, &g) in local.iter().enumerate() {
            if let Some(t) = tree_of(&l.tree_of, g) {
                l.trees[t].mark(l.adj_at[map + k] as usize);
            }
        }
        for &g in local.iter().filter(|&&g| g != NONE32) {
            push_unique(&mut l.dirty_rows, &mut l.marks, g as usize);
        }
    }

    /// Recomputes the frozen sums of the rows a flip touched, in element order.
    fn resum(&self, l: &mut Latency) {
        sort_marked(&mut l.dirty_rows, &mut l.marks);
        for &r in &l.dirty_rows {
            if let Some(t) = tree_of(&l.tree_of, r as u32) {
                let (layout, (elements, at)) = (&self.layout, self.layout.elements_of(r));
                let (frozen, st_f, st_q, q_at) = (&l.frozen, &l.st_f, &l.st_q, &l.q_at);
                let leaf = |p: usize| {
                    let (Some(&e), Some(&k)) = (elements.get(p), at.get(p)) else {
                        return [0.0; 4];
                    };
                    let (e, k) = (e as usize, k as usize);
                    if !frozen[e] {
                        return [0.0; 4];
                    }
                    let plan = &layout.plan[e];
                    let f = st_f[plan.map as usize + k];
                    let q = if plan.charge {
                        st_q[q_at[e] as usize + k]
                    } else {
                        0.0
                    };
                    [f, q, f.abs(), q.abs()]
                };
                [l.fz_f[r], l.fz_q[r], l.fz_scale[r], l.fz_qscale[r]] = l.trees[t].total(leaf);
                continue;
            }
            let (mut f, mut q, mut sf, mut sq) = (0.0, 0.0, 0.0f64, 0.0f64);
            let (elements, at) = self.layout.elements_of(r);
            for (&e, &k) in elements.iter().zip(at) {
                let e = e as usize;
                if !l.frozen[e] {
                    continue;
                }
                let plan = &self.layout.plan[e];
                let at = plan.map as usize + k as usize;
                f += l.st_f[at];
                sf = sf.max(l.st_f[at].abs());
                if plan.charge {
                    let at = l.q_at[e] as usize + k as usize;
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
    fn build_work(&self, l: &mut Latency, x: &[f64], t: f64) -> bool {
        l.candidates.clear();
        for &e in &l.flipped {
            let e = e as usize;
            for &g in self.layout.local(e).iter().filter(|&&g| g != NONE32) {
                push_unique(&mut l.candidates, &mut l.marks, g as usize);
            }
        }
        for &u in &l.changed {
            push_unique(&mut l.candidates, &mut l.marks, u);
        }
        for i in 0..l.candidates.len() {
            let r = l.eq_row[l.candidates[i]];
            push_unique(&mut l.candidates, &mut l.marks, r);
        }
        if l.candidates.is_empty() {
            return false;
        }
        sort_marked(&mut l.candidates, &mut l.marks);
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
                // The charge it missed while interior.
                l.missed[u] += l.leave_f[u].abs() * (t - l.leave_t[u]);
                // Owed up to the last accepted time only: a refresh at an attempt's time is
                // followed by that step, which moves the row by its current itself.
                l.owed[u] -= l.leave_f[u] * (l.last_t - l.leave_t[u]).max(0.0);
                l.deadline[u] = f64::INFINITY;
            } else if !want && l.in_work[r] {
                let f = l.fz_f[r] + l.gmin_current(self.n_nodes, r, x);
                // Interior only within the same fraction of the tolerance a held row must
                // keep.
                if !(l.held[u] && f.abs() <= hold_test(l.fz_scale[r], self.kinds[r], &tol)) {
                    continue;
                }
                l.in_work[r] = false;
                moved = true;
                l.left.push(r);
                l.leave_t[u] = t;
                l.leave_f[u] = f;
                let room = l.qtol[u] - l.missed[u];
                if f != 0.0 && room.is_finite() {
                    let when = t + room.max(0.0) / f.abs();
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
        l.gather.clear();
        l.dense_at.clear();
        l.values.clear();
        l.rhs.clear();
        // Everything active: the system's own solver (analysed once, pinned unknowns taken
        // out) solves the same equations, and no `J_AA` is gathered.
        if m == self.n {
            l.solver = ActiveSolver::None;
            return;
        }
        let dense = m <= l.dense.capacity();
        let col_ptr = self.pattern.col_ptr();
        let row_idx = self.pattern.row_idx();
        // The sparse pattern is handed to the solver, which keeps it: built only for it.
        let mut ptr = Vec::new();
        let mut rows = Vec::new();
        if !dense {
            ptr.push(0usize);
        }
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
        l.values.resize(l.gather.len(), 0.0);
        l.rhs.resize(m, 0.0);
        l.solver = if m == 0 {
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

/// Adds `i` to `list` unless its mark says it is there already, and marks it: a list built so
/// holds each index once however often it is offered (the first holds of a run offer every
/// row several times), and [`sort_marked`] then orders it.
fn push_unique<T: Copy + Index>(list: &mut Vec<T>, marks: &mut [bool], i: T) {
    let mark = &mut marks[i.index()];
    if !*mark {
        *mark = true;
        list.push(i);
    }
}

/// Sorts a list built by [`push_unique`] and clears its marks (all false after).
fn sort_marked<T: Copy + Ord + Index>(list: &mut Vec<T>, marks: &mut [bool]) {
    if list.len() < marks.len() / 16 {
        list.sort_unstable();
        for &i in list.iter() {
            marks[i.index()] = false;
        }
        return;
    }
    list.clear();
    for (i, mark) in marks.iter_mut().enumerate() {
        if std::mem::take(mark) {
            list.push(T::from_index(i));
        }
    }
}

/// Sorts `list`, indices below `marks.len()`, and drops repeats. A list long against the
/// range it draws from (the first holds of a run freeze most of the circuit at once) is marked
/// and read back in index order, linear in the range instead of a sort's `m log m`; either
/// way the result is the same. `marks` is all false before and after.
fn sort_unique<T: Copy + Ord + Index>(list: &mut Vec<T>, marks: &mut [bool]) {
    if list.len() < marks.len() / 16 {
        list.sort_unstable();
        list.dedup();
        return;
    }
    for &i in list.iter() {
        marks[i.index()] = true;
    }
    list.clear();
    for (i, mark) in marks.iter_mut().enumerate() {
        if std::mem::take(mark) {
            list.push(T::from_index(i));
        }
    }
}

/// An unknown's or an element's index, as the partition's lists store it.
trait Index {
    fn index(self) -> usize;
    fn from_index(i: usize) -> Self;
}

impl Index for usize {
    fn index(self) -> usize {
        self
    }
    fn from_index(i: usize) -> Self {
        i
    }
}

impl Index for u32 {
    fn index(self) -> usize {
        self as usize
    }
    // Element indices fit: the system refuses circuits whose indices would not.
    fn from_index(i: usize) -> Self {
        i as u32
    }
}

/// The live elements in element order after the flips of a refresh (`l.flipped`): edited in
/// place when few flipped (the cost of a refresh then follows the active part, not the
/// circuit).
fn relive(l: &mut Latency) {
    sort_unique(&mut l.flipped, &mut l.element_marks);
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
///
/// Leaves are not stored: they are the frozen elements' stored currents and charges, read
/// when the sums are brought up to date. A leaf is marked when its element freezes or thaws,
/// and the sums are brought up to date when the total is read: along each marked leaf's path,
/// or, when that would visit more nodes than the tree has (the first holds of a run freeze
/// most of a supply's devices at once), by rebuilding every inner node. Either way each inner
/// node ends as the sum of its two children, so the total is the same bit for bit.
struct SumTree {
    /// Leaves, a power of two (at least 2): leaf `p` is node `size + p`.
    size: usize,
    /// Per inner node (1 to `size - 1`): sum of `f`, sum of `q`, largest `|f|`, largest `|q|`.
    node: Vec<[f64; 4]>,
    /// Leaves marked since the sums were last brought up to date.
    changed: Vec<u32>,
}

impl SumTree {
    fn new(leaves: usize) -> Self {
        let size = leaves.next_power_of_two().max(2);
        SumTree {
            size,
            node: vec![[0.0; 4]; size],
            changed: Vec::new(),
        }
    }

    fn mark(&mut self, pos: usize) {
        self.changed.push(pos as u32);
    }

    /// Inner node `i` from its children (`leaf(p)`: leaf `p`'s value).
    fn join(&mut self, i: usize, leaf: &impl Fn(usize) -> [f64; 4]) {
        let child = |c: usize| {
            if c >= self.size {
                leaf(c - self.size)
            } else {
                self.node[c]
            }
        };
        let (a, b) = (child(2 * i), child(2 * i + 1));
        self.node[i] = [a[0] + b[0], a[1] + b[1], a[2].max(b[2]), a[3].max(b[3])];
    }

    /// The sums over every leaf, `leaf(p)` giving leaf `p`'s value (zero past the row's
    /// elements and for live ones).
    fn total(&mut self, leaf: impl Fn(usize) -> [f64; 4]) -> [f64; 4] {
        let depth = self.size.trailing_zeros() as usize;
        if self.changed.len() * depth > self.size {
            for i in (1..self.size).rev() {
                self.join(i, &leaf);
            }
        } else {
            for c in 0..self.changed.len() {
                let mut i = self.size + self.changed[c] as usize;
                while i > 1 {
                    i /= 2;
                    self.join(i, &leaf);
                }
            }
        }
        self.changed.clear();
        self.node[1]
    }
}

/// For every unknown that woke in this refresh (at `t`), the part of the signed charge its
/// row was owed over the hold that its own relaxation would not have undone: `S (1 -
/// e^{-x}) / x` with `x = G T / C` (its row's conductance and capacitance when it was held,
/// `T` the hold's length). All of `S` for a row without conductance (which the full solve
/// would have moved by exactly that, given its neighbours); about the equilibrium offset
/// `C F / G` for one that relaxes within the hold; never more than `S`. Returns whether any
/// was given. The missed charge is not forgiven: the run's allowance stays used.
fn give_back(l: &mut Latency, t: f64) -> bool {
    let before = l.given.len();
    for c in 0..l.changed.len() {
        let u = l.changed[c];
        if l.held[u] {
            continue;
        }
        let owed = std::mem::take(&mut l.owed[u]);
        let k = l.charge_k[l.eq_row[u]];
        let (g, cap) = l.hold_gc[u];
        if owed == 0.0 || k == NONE || cap == 0.0 {
            continue;
        }
        let x = g / cap * (t - l.hold_t[u]);
        let share = if x > 1e-9 { -(-x).exp_m1() / x } else { 1.0 };
        l.given.push((k, owed * share));
    }
    l.given.len() > before
}

/// The tree of row `r` in [`Latency::trees`], if it has one (`r` may be `NONE32`: ground).
fn tree_of(tree_of: &[u32], r: u32) -> Option<usize> {
    (r != NONE32)
        .then(|| tree_of[r as usize])
        .filter(|&t| t != NONE32)
        .map(|t| t as usize)
}

/// Marks `u` active, with the internal unknowns of every element it belongs to (an internal
/// unknown is latent only with all of its element's unknowns).
fn wake(l: &mut Latency, u: usize, layout: &Layout) {
    l.release(u);
    for &e in layout.elements_of(u).0 {
        let e = e as usize;
        let pins = layout.plan[e].pins as usize;
        for &g in &layout.local(e)[pins..] {
            if g != NONE32 && l.held[g as usize] {
                l.release(g as usize);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::{push_unique, sort_marked, sort_unique, WIDE};
    use crate::elements::{Capacitor, CurrentSource, Resistor, VoltageSource, Waveform};
    use crate::{Circuit, OpParams, Output, Probe, Start, System, Tolerances, TransientParams};

    /// The evaluations kept by the holds at the start serve their own refresh only: when no
    /// row passes the hold test there (a node at rest on a large capacitor whose current does
    /// not vanish), no refresh runs, and the flag must still be cleared, or later freezes
    /// would store the start's currents for elements that have moved since.
    #[test]
    fn the_start_s_kept_evaluations_serve_no_later_freeze() {
        let mut c = Circuit::new();
        let a = c.node("a");
        c.add("big", Capacitor::new(1.0), &[a, Circuit::GROUND])
            .unwrap();
        c.add(
            "feed",
            CurrentSource::new(Waveform::Constant(1e-6)),
            &[Circuit::GROUND, a],
        )
        .unwrap();
        let mut s = System::new(c).unwrap();
        let tol = Tolerances::default();
        s.latency_begin(tol, false, 1e-9, 0.0, &[0]);
        s.latency_hold_at_rest(&[0.0], 1e12, &tol, &|_| 1e-20);
        let l = s.latency.as_ref().unwrap();
        assert!(!l.held[0], "the node's current fails the hold test");
        assert!(!l.st_all);
    }

    /// A step travels down an RC line whose nodes also leak to a supply (a row of more than
    /// `WIDE` elements, summed in a tree), beside an element with every pin on ground: the
    /// partition check, run after every refresh in these tests, sees the start's bulk refresh
    /// and the later ones through the changed unknowns, and the latent run follows the whole
    /// system's.
    #[test]
    fn the_partition_stays_whole_through_bulk_and_single_refreshes() {
        let build = || {
            let mut c = Circuit::new();
            let supply = c.node("supply");
            c.add("vs", VoltageSource::dc(1.0), &[supply, Circuit::GROUND])
                .unwrap();
            let drive = c.node("drive");
            // A step at 1 ns.
            let step = Waveform::PiecewiseLinear(vec![(0.0, 0.0), (1e-9, 0.0), (1.1e-9, 1.0)]);
            c.add("vin", VoltageSource::new(step), &[drive, Circuit::GROUND])
                .unwrap();
            let mut prev = drive;
            for i in 0..2 * WIDE {
                let n = c.node(&format!("n{i}"));
                c.add(&format!("r{i}"), Resistor::new(1e3), &[prev, n])
                    .unwrap();
                c.add(
                    &format!("c{i}"),
                    Capacitor::new(1e-13),
                    &[n, Circuit::GROUND],
                )
                .unwrap();
                c.add(&format!("leak{i}"), Resistor::new(1e7), &[supply, n])
                    .unwrap();
                prev = n;
            }
            c.add(
                "grounded",
                Resistor::new(1e3),
                &[Circuit::GROUND, Circuit::GROUND],
            )
            .unwrap();
            (System::new(c).unwrap(), prev)
        };
        let run = |latency: bool| {
            let (mut s, far) = build();
            let near = s.find_node("n3").unwrap();
            let mut p = TransientParams::new(8e-9);
            p.output = Output::Interval(1e-10);
            p.latency = latency;
            p.latency_fallback = false;
            let start = Start::OperatingPoint(OpParams::default());
            let probes = [Probe::Voltage(near), Probe::Voltage(far)];
            s.transient(&p, &start, &probes, None).unwrap()
        };
        let (on, off) = (run(true), run(false));
        assert!(on.stats.latent_unknown_steps > 0, "{:?}", on.stats);
        for (a, b) in on.signals.iter().zip(&off.signals) {
            let worst = a
                .iter()
                .zip(b)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0, f64::max);
            assert!(worst < 2e-3, "largest difference {worst} V");
        }
    }

    #[test]
    fn sort_unique_and_sort_marked_give_the_sorted_distinct_indices_by_either_path() {
        let mut marks = vec![false; 1000];
        // Short against the range: sorted; long: marked and read back.
        for list in [
            vec![7usize, 3, 7, 999, 0, 3],
            (0..900).rev().chain(0..300).collect(),
        ] {
            let mut expected = list.clone();
            expected.sort_unstable();
            expected.dedup();
            let mut got = list.clone();
            sort_unique(&mut got, &mut marks);
            assert_eq!(got, expected);
            assert!(marks.iter().all(|&m| !m));
            // Built without repeats, then ordered.
            let mut built = Vec::new();
            for &i in &list {
                push_unique(&mut built, &mut marks, i);
            }
            assert_eq!(built.len(), expected.len());
            sort_marked(&mut built, &mut marks);
            assert_eq!(built, expected);
            assert!(marks.iter().all(|&m| !m));
        }
        let mut elements: Vec<u32> = vec![5, 1, 5, 2];
        sort_unique(&mut elements, &mut [false; 8]);
        assert_eq!(elements, [1, 2, 5]);
    }
}
