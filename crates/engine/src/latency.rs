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
//! * **Frozen elements.** An element whose local unknowns are all latent, and which is not an
//!   independent source (the only elements whose evaluation depends on time), sees exactly the
//!   inputs of its evaluation at the moment it froze, so that evaluation's currents and charges
//!   stand for it unchanged, exactly. Each row keeps the sum of its frozen elements'
//!   contributions (recomputed in element order whenever one of them freezes or thaws); each
//!   Newton iteration assembles the other (*live*) elements on top of those sums.
//! * **The active system.** Newton factorises and solves `J_AA Δ_A = -F_A`: the columns of the
//!   active unknowns and the equations they own. A node pinned by an ideal grounded source
//!   (see [`crate::System`], "Pinned unknowns") trades equations with the source's current: the
//!   current is solved from the node's KCL row, the node held by the source's row. The symbolic
//!   analysis of `J_AA` is redone only when the active set changes.
//! * **Checking latent rows.** At every Newton iteration each latent unknown's equation is
//!   evaluated at the held value (its frozen sum, the live elements touching it, the charge
//!   history). The unknown wakes, and the iteration is assembled again with it active, when its
//!   residual fails the test every active row must pass, `|F_i| ≤ reltol scale_i + abstol_i`,
//!   or when the charge its row has missed since it was held, `Σ |F_i| / α₀` over the accepted
//!   steps (the charge change Newton would have applied), would exceed that row's truncation
//!   error tolerance `lte_reltol max(|q_i|, q_ref) + chgtol` taken when it was held.
//!
//! *Accuracy.* A step with latent unknowns is accepted only when every equation, latent or
//! active, passes the residual test Newton applies to the full system: the accepted state is a
//! solution of the full step equations to the ordinary Newton tolerances. Beyond one step, the
//! charge a latent row fails to move accumulates; it is bounded by one step's truncation-error
//! tolerance of that row, so the latent part never drifts by more than the integrator already
//! allows for one step. The truncation-error test still runs on every charge row.
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
use crate::lu::{LuStrategy, Singular, SparseLu};
use crate::system::{System, Tolerances, NONE, NONE32};
use faer::sparse::SymbolicSparseColMat;

/// Consecutive quiet accepted steps before an unknown becomes latent.
pub(crate) const QUIET_STEPS: u32 = 3;
/// Fraction of the Newton update tolerance within which a step counts as quiet.
pub(crate) const QUIET_FRACTION: f64 = 0.01;

/// The latent/active partition of one transient run, and the solver of the active system.
pub(crate) struct Latency {
    /// Whether the stepping loop's Newton solves use it.
    pub(crate) on: bool,
    /// Per unknown: held at its last accepted value.
    pub(crate) held: Vec<bool>,
    quiet: Vec<u32>,
    /// Per unknown: charge its equation missed over accepted steps while held, this attempt's
    /// share, and the bound.
    missed: Vec<f64>,
    pending: Vec<f64>,
    qtol: Vec<f64>,
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
    /// Elements evaluated at each iteration, and their matrix slots.
    pub(crate) live: Vec<u32>,
    pub(crate) live_slots: Vec<u32>,
    /// The active unknowns, and the active system.
    active: Vec<usize>,
    gather: Vec<usize>,
    values: Vec<f64>,
    rhs: Vec<f64>,
    lu: Option<SparseLu>,
    strategy: LuStrategy,
    /// Unknowns whose state changed since the last refresh.
    changed: Vec<usize>,
    /// Counters: latent unknown-steps and active unknown-steps over accepted steps.
    pub(crate) latent_steps: u64,
    pub(crate) active_steps: u64,
}

impl Latency {
    /// Whether any unknown is held.
    pub(crate) fn any_held(&self) -> bool {
        self.held.iter().any(|&h| h)
    }
}

impl System {
    /// Starts the latency bookkeeping of a transient: every unknown active, nothing frozen.
    pub(crate) fn latency_begin(&mut self) {
        let strategy = self.lu.strategy();
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
        self.latency = Some(Latency {
            on: true,
            held: vec![false; n],
            quiet: vec![0; n],
            missed: vec![0.0; n],
            pending: vec![0.0; n],
            qtol: vec![f64::INFINITY; n],
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
            live_slots: Vec::new(),
            active: Vec::new(),
            gather: Vec::new(),
            values: Vec::new(),
            rhs: Vec::new(),
            lu: None,
            strategy,
            changed: (0..n).collect(),
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

    /// The active unknowns, in order.
    pub(crate) fn latency_active(&self) -> Vec<usize> {
        self.latency
            .as_ref()
            .map_or_else(Vec::new, |l| l.active.clone())
    }

    /// Sets the latent unknowns of the predicted state to their held values.
    pub(crate) fn latency_hold(&self, x: &[f64], x_new: &mut [f64]) {
        if let Some(l) = &self.latency {
            for ((xn, &xo), &h) in x_new.iter_mut().zip(x).zip(&l.held) {
                if h {
                    *xn = xo;
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
        let mut woke = false;
        for u in 0..self.n {
            if !l.held[u] {
                continue;
            }
            let r = l.eq_row[u];
            let abs = match self.kinds[r] {
                UnknownKind::Voltage => tol.abstol,
                UnknownKind::Current => tol.vntol,
            };
            let res = self.rhs[r].abs();
            let share = res / a0;
            l.pending[u] = share;
            // NaN fails both tests and wakes the row, whose residual then reports it.
            if !(res <= tol.reltol * self.scale[r] + abs && l.missed[u] + share <= l.qtol[u]) {
                wake(l, u, &self.layout.loc_map, &self.layout.loc_start);
                woke = true;
            }
        }
        woke
    }

    /// Wakes every unknown (after the active system failed to factorise).
    pub(crate) fn latency_wake_all(&mut self) {
        if let Some(l) = self.latency.as_mut() {
            for u in 0..self.n {
                if l.held[u] {
                    l.held[u] = false;
                    l.quiet[u] = 0;
                    l.changed.push(u);
                }
            }
        }
    }

    /// After an accepted step from `x_old` to `x_new` at `t`: commits the latent rows' missed
    /// charge, counts quiet steps and holds the unknowns that became latent. `charge_tol(r)`
    /// is row `r`'s truncation-error tolerance (infinite for a row without charge).
    pub(crate) fn latency_accepted(
        &mut self,
        x_old: &[f64],
        x_new: &[f64],
        t: f64,
        tol: &Tolerances,
        charge_tol: &dyn Fn(usize) -> f64,
    ) {
        let Some(l) = self.latency.as_mut() else {
            return;
        };
        let n = self.n;
        for u in 0..n {
            if l.held[u] {
                l.missed[u] += l.pending[u];
                l.pending[u] = 0.0;
                l.latent_steps += 1;
                continue;
            }
            l.active_steps += 1;
            let (a, b) = (x_old[u], x_new[u]);
            let abs = match self.kinds[u] {
                UnknownKind::Voltage => tol.vntol,
                UnknownKind::Current => tol.abstol,
            };
            let bound = QUIET_FRACTION * (tol.reltol * a.abs().max(b.abs()) + abs);
            l.quiet[u] = if (b - a).abs() <= bound {
                l.quiet[u].saturating_add(1)
            } else {
                0
            };
        }
        let loc_map = &self.layout.loc_map;
        let loc_start = &self.layout.loc_start;
        for u in 0..n {
            if l.held[u] || l.quiet[u] < QUIET_STEPS {
                continue;
            }
            // An internal unknown goes latent only with every local unknown of its element.
            let internal_ok = match self.unknown_owner[u] {
                None => true,
                Some(e) => loc_map[loc_start[e]..loc_start[e + 1]]
                    .iter()
                    .all(|&g| g == NONE || l.held[g] || l.quiet[g] >= QUIET_STEPS),
            };
            if internal_ok {
                l.held[u] = true;
                l.missed[u] = 0.0;
                l.pending[u] = 0.0;
                l.qtol[u] = charge_tol(l.eq_row[u]);
                l.changed.push(u);
            }
        }
        if !l.changed.is_empty() {
            self.latency_refresh(x_new, t);
        }
    }

    /// Brings the frozen elements, the frozen sums, the live elements and the active system up
    /// to date with the held set, evaluating newly frozen elements at `x` (time `t`).
    pub(crate) fn latency_refresh(&mut self, x: &[f64], t: f64) {
        let Some(mut l) = self.latency.take() else {
            return;
        };
        let ctx = EvalContext {
            time: t,
            source_scale: 1.0,
            analysis: Analysis::Transient,
        };
        let mut dirty_rows = Vec::new();
        let mut changed = std::mem::take(&mut l.changed);
        changed.sort_unstable();
        changed.dedup();
        for &u in &changed {
            for a in l.adj_ptr[u]..l.adj_ptr[u + 1] {
                let e = l.adj[a].0 as usize;
                let (lo, hi) = (self.layout.loc_start[e], self.layout.loc_start[e + 1]);
                let local = &self.layout.loc_map[lo..hi];
                let want = !l.source[e] && local.iter().all(|&g| g == NONE || l.held[g]);
                if want == l.frozen[e] {
                    continue;
                }
                l.frozen[e] = want;
                if want {
                    self.evaluate_into(e, x, &ctx, &mut l.st_f, &mut l.st_q);
                }
                dirty_rows.extend(local.iter().copied().filter(|&g| g != NONE));
            }
        }
        dirty_rows.sort_unstable();
        dirty_rows.dedup();
        for &r in &dirty_rows {
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
        l.live.clear();
        l.live_slots.clear();
        for (e, plan) in self.layout.plan.iter().enumerate() {
            if !l.frozen[e] {
                l.live.push(e as u32);
                let nl = plan.local as usize;
                let slots = &self.layout.slots32[plan.slot as usize..][..nl * nl];
                l.live_slots
                    .extend(slots.iter().copied().filter(|&s| s != NONE32));
            }
        }
        self.build_active(&mut l);
        self.latency = Some(l);
    }

    /// The active unknowns, the pattern of `J_AA` and its LU.
    fn build_active(&self, l: &mut Latency) {
        l.active = (0..self.n).filter(|&u| !l.held[u]).collect();
        l.pos.fill(NONE);
        for (k, &u) in l.active.iter().enumerate() {
            l.pos[l.eq_row[u]] = k;
        }
        let col_ptr = self.pattern.col_ptr();
        let row_idx = self.pattern.row_idx();
        let mut ptr = vec![0usize];
        let mut rows = Vec::new();
        l.gather.clear();
        let mut column: Vec<(usize, usize)> = Vec::new();
        for &c in &l.active {
            column.clear();
            for s in col_ptr[c]..col_ptr[c + 1] {
                let k = l.pos[row_idx[s]];
                if k != NONE {
                    column.push((k, s));
                }
            }
            column.sort_unstable();
            for &(k, s) in &column {
                rows.push(k);
                l.gather.push(s);
            }
            ptr.push(rows.len());
        }
        let m = l.active.len();
        l.values = vec![0.0; l.gather.len()];
        l.rhs = vec![0.0; m];
        l.lu = if m == 0 {
            None
        } else {
            let pattern = SymbolicSparseColMat::new_checked(m, m, ptr, None, rows);
            SparseLu::new(pattern, l.strategy).ok()
        };
    }

    /// Factorises `J_AA` from the last assembly and solves it for the active unknowns' update;
    /// latent unknowns get none. `v` holds `-F` by row on entry and `Δ` by unknown on return.
    pub(crate) fn solve_active(&mut self, v: &mut [f64]) -> Result<(), Singular> {
        let Some(l) = self.latency.as_mut() else {
            return Err(Singular { unknown: 0 });
        };
        for (value, &s) in l.values.iter_mut().zip(&l.gather) {
            *value = self.jac[s];
        }
        for (r, &u) in l.rhs.iter_mut().zip(&l.active) {
            *r = v[l.eq_row[u]];
        }
        v.fill(0.0);
        let Some(lu) = l.lu.as_mut() else {
            return if l.active.is_empty() {
                Ok(())
            } else {
                Err(Singular {
                    unknown: l.active[0],
                })
            };
        };
        let active = &l.active;
        let back = |e: Singular| Singular {
            unknown: active[e.unknown.min(active.len() - 1)],
        };
        lu.factor(&l.values).map_err(back)?;
        lu.solve(&mut l.rhs).map_err(back)?;
        for (&r, &u) in l.rhs.iter().zip(active) {
            v[u] = r;
        }
        Ok(())
    }
}

/// Marks `u` active, with the internal unknowns of every element it belongs to (an internal
/// unknown is latent only with all of its element's unknowns).
fn wake(l: &mut Latency, u: usize, loc_map: &[usize], loc_start: &[usize]) {
    l.held[u] = false;
    l.quiet[u] = 0;
    l.changed.push(u);
    for a in l.adj_ptr[u]..l.adj_ptr[u + 1] {
        let e = l.adj[a].0 as usize;
        let local = &loc_map[loc_start[e]..loc_start[e + 1]];
        for &g in &local[l.pins[e]..] {
            if g != NONE && l.held[g] {
                l.held[g] = false;
                l.quiet[g] = 0;
                l.changed.push(g);
            }
        }
    }
}
