//! The one interface every element and device model implements.
//!
//! An element sees a short local vector of unknowns: first the voltages of its terminals (in the
//! order of [`Element::terminals`], ground reads 0 V), then its own internal unknowns (in the
//! order of [`Element::internals`]). It has one local equation per local unknown and returns, for
//! each equation `r`,
//!
//! * `f[r]`: the static part. For a terminal row this is the current flowing from the node into
//!   the element at that terminal (amperes). For an internal row it is whatever the element's
//!   own equation says (a voltage-source constraint in volts, for example).
//! * `q[r]`: the dynamic part, a charge for terminal rows (coulombs) or a flux for branch rows.
//!   The engine integrates `dq/dt`; it never sees a capacitance on its own, so nonlinear charge
//!   models conserve charge.
//! * `df[r][c] = ∂f[r]/∂x[c]` and `dq[r][c] = ∂q[r]/∂x[c]`, stored row-major.
//!
//! The full system is `F(x, t) = Σ_elements (f + dq/dt) = 0`, one row per unknown.

/// What an unknown measures; decides its tolerances and how it is named.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum UnknownKind {
    /// A node voltage in volts.
    Voltage,
    /// A branch current in amperes.
    Current,
}

/// An internal unknown an element owns (an internal node or a branch current).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Internal {
    /// Short name, shown as `element.name` in results and diagnostics.
    pub name: &'static str,
    /// Whether it is a voltage or a current.
    pub kind: UnknownKind,
}

/// Which analysis is asking, for elements that behave differently in DC.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Analysis {
    /// Operating point or DC sweep: charges are ignored.
    Dc,
    /// Time-domain analysis.
    Transient,
}

/// Everything an element may need besides its local unknowns.
#[derive(Clone, Copy, Debug)]
pub struct EvalContext {
    /// Simulation time in seconds (0 in DC).
    pub time: f64,
    /// Factor applied to every independent source (1 except during source stepping).
    pub source_scale: f64,
    /// The analysis asking.
    pub analysis: Analysis,
}

impl EvalContext {
    /// A DC context at full source strength.
    pub fn dc() -> Self {
        EvalContext {
            time: 0.0,
            source_scale: 1.0,
            analysis: Analysis::Dc,
        }
    }
}

/// Where an element writes its evaluation. The engine zeroes every entry before each call.
pub struct Stamp<'a> {
    n: usize,
    f: &'a mut [f64],
    q: &'a mut [f64],
    df: &'a mut [f64],
    dq: &'a mut [f64],
}

impl<'a> Stamp<'a> {
    /// Wraps caller-owned buffers of length `n`, `n`, `n*n`, `n*n`.
    pub fn new(f: &'a mut [f64], q: &'a mut [f64], df: &'a mut [f64], dq: &'a mut [f64]) -> Self {
        let n = f.len();
        debug_assert!(q.len() == n && df.len() == n * n && dq.len() == n * n);
        Stamp { n, f, q, df, dq }
    }

    /// Number of local unknowns.
    #[inline]
    pub fn len(&self) -> usize {
        self.n
    }

    /// Whether the element has no local unknowns.
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.n == 0
    }

    /// Adds to the static part of local row `r`.
    #[inline]
    pub fn add_f(&mut self, r: usize, v: f64) {
        self.f[r] += v;
    }

    /// Adds to the charge (or flux) of local row `r`.
    #[inline]
    pub fn add_q(&mut self, r: usize, v: f64) {
        self.q[r] += v;
    }

    /// Adds to `∂f[r]/∂x[c]`.
    #[inline]
    pub fn add_df(&mut self, r: usize, c: usize, v: f64) {
        self.df[r * self.n + c] += v;
    }

    /// Adds to `∂q[r]/∂x[c]`.
    #[inline]
    pub fn add_dq(&mut self, r: usize, c: usize, v: f64) {
        self.dq[r * self.n + c] += v;
    }

    /// Stamps a two-terminal current `i(v)` flowing from local row `a` to local row `b`, with
    /// `v = x[a] - x[b]` and slope `g = di/dv`.
    #[inline]
    pub fn branch_current(&mut self, a: usize, b: usize, i: f64, g: f64) {
        self.add_f(a, i);
        self.add_f(b, -i);
        self.add_df(a, a, g);
        self.add_df(a, b, -g);
        self.add_df(b, a, -g);
        self.add_df(b, b, g);
    }

    /// Stamps a two-terminal charge `q(v)` held at local row `a` (and `-q` at `b`), with
    /// `v = x[a] - x[b]` and slope `c = dq/dv`.
    #[inline]
    pub fn branch_charge(&mut self, a: usize, b: usize, q: f64, c: f64) {
        self.add_q(a, q);
        self.add_q(b, -q);
        self.add_dq(a, a, c);
        self.add_dq(a, b, -c);
        self.add_dq(b, a, -c);
        self.add_dq(b, b, c);
    }
}

/// A quantity an element reports about its state at an operating point (for insight; the
/// analyses never read it).
#[derive(Clone, Debug, PartialEq)]
pub struct Detail {
    /// Short name, such as `"electron density at source"`.
    pub name: &'static str,
    /// Its value.
    pub value: DetailValue,
}

/// The value of a [`Detail`].
#[derive(Clone, Debug, PartialEq)]
pub enum DetailValue {
    /// A number in SI units, with the unit's symbol (`"1/m^2"`, `"V"`).
    Number(f64, &'static str),
    /// A one-word classification, such as an operating region.
    Word(&'static str),
}

/// A circuit element or device model in charge-oriented form.
///
/// Implementations must be pure functions of the local unknowns and the context: the engine may
/// evaluate an element several times at the same point, in any order.
pub trait Element: Send + Sync + std::fmt::Debug {
    /// Short kind name used in summaries and diagnostics, such as `"resistor"`.
    fn kind(&self) -> &'static str;

    /// Names of the terminals, in the order the circuit connects them.
    fn terminals(&self) -> &'static [&'static str];

    /// Internal unknowns this element owns (none by default).
    fn internals(&self) -> &'static [Internal] {
        &[]
    }

    /// Whether [`Element::evaluate`] may write charges; elements without charges skip the
    /// dynamic part of assembly.
    fn has_charge(&self) -> bool {
        false
    }

    /// Whether the engine may skip this element's evaluation while its local unknowns stay
    /// within a tolerance of the point it was last evaluated at, using the first-order
    /// expansion of that evaluation instead (device bypass; see the `system` module doc for
    /// the rule and its accuracy). Only an element whose evaluation depends on its local
    /// unknowns alone (not on the time or the source scale) may return true, and only one
    /// whose evaluation costs more than that expansion: a nonlinear device model. Default
    /// false.
    fn bypassable(&self) -> bool {
        false
    }

    /// Evaluates currents, charges and their derivatives at the local unknowns `x`.
    fn evaluate(&self, x: &[f64], ctx: &EvalContext, out: &mut Stamp<'_>);

    /// The first time strictly after `after` at which this element's behaviour has a corner
    /// (a source waveform's vertex), so the integrator can step onto it.
    fn next_breakpoint(&self, _after: f64) -> Option<f64> {
        None
    }

    /// Whether this is an ideal voltage source in the standard form: terminals `pos`, `neg`,
    /// one internal branch current `i`, no charge, and `f = [i, -i, x_pos - x_neg - V]` with
    /// `V` independent of the unknowns. The engine then takes a grounded source's node and
    /// current out of the matrix it factorises (see the `system` module doc). Default false.
    fn is_ideal_voltage_source(&self) -> bool {
        false
    }

    /// Whether this is an independent source (scaled during source stepping, sweepable).
    fn is_independent_source(&self) -> bool {
        false
    }

    /// For independent sources: replace the source's value by the constant `value`
    /// (used by DC sweeps). Returns false for elements that have no such value.
    fn set_constant_value(&mut self, _value: f64) -> bool {
        false
    }

    /// For independent sources: replace the source's waveform by `waveform` (a ramped sweep
    /// through an existing circuit). Returns false for elements that have no waveform.
    fn set_waveform(&mut self, _waveform: &crate::elements::Waveform) -> bool {
        false
    }

    /// Extra quantities at the local unknowns `x` for operating-point reports: carrier
    /// densities, an operating region, ... (none by default). Currents, conductances and
    /// capacitances are not listed here: the engine derives them from [`Element::evaluate`].
    fn details(&self, _x: &[f64]) -> Vec<Detail> {
        Vec::new()
    }

    /// A copy of this element behind a new box (so a sweep can restore a source).
    fn boxed_clone(&self) -> Box<dyn Element>;
}
