//! The ring-oscillator job.
//!
//! A ring of identical stages has a metastable balanced state (every node at the switching
//! threshold), and a random kick often launches several edges. The job therefore starts from a
//! single defect: `v_i = V_DD` for even `i` and 0 for odd `i`, which for odd `N` leaves nodes
//! `N-1` and `0` both high, so exactly one edge circulates from t = 0. The transient stops by
//! itself once, after at least `discard` start-up periods of `out[0]`, `measure` successive
//! periods agree within [`SETTLE_TOLERANCE`] (settling detected; at most 20 periods more are
//! run, and the report's spread says how well they agreed); the frequency is
//! the mean over the measured periods of interpolated rising mid-level crossings
//! (`measure::period`), and the stage delay is `1 / (2 N f)`. Average supply power is the
//! mean of `V_DD i_supply` over those same whole periods, and the energy per cycle is power
//! times period.

use crate::builtin::Ring;
use lamina_engine::{
    Control, EngineError, Integrator, OpParams, Probe, Start, System, TransientParams,
};
use lamina_measure::period;
use std::fmt;

/// How to run a ring.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RingParams {
    /// Integration formula.
    pub integrator: Integrator,
    /// Use the engine's tighter reference tolerances instead of the defaults.
    pub reference: bool,
    /// Least number of periods discarded as start-up (default 3); more are discarded until
    /// `measure` successive periods agree within [`SETTLE_TOLERANCE`].
    pub discard: usize,
    /// Periods averaged (default 5).
    pub measure: usize,
    /// Give up if no result by this time (s).
    pub time_limit: f64,
    /// Measure by edge travel instead of whole periods (for very long rings).
    pub edge: bool,
}

impl Default for RingParams {
    fn default() -> Self {
        RingParams {
            integrator: Integrator::Trapezoidal,
            reference: false,
            discard: 3,
            measure: 5,
            edge: false,
            time_limit: 1e-3,
        }
    }
}

/// What the ring job measured.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RingReport {
    /// How the frequency was measured.
    pub method: &'static str,
    /// Number of stages.
    pub stages: usize,
    /// Average power drawn from the supply over the measured periods (W).
    pub avg_power: f64,
    /// Energy drawn from the supply per period (J).
    pub energy_per_cycle: f64,
    /// Oscillation frequency (Hz).
    pub frequency: f64,
    /// Period (s).
    pub period: f64,
    /// Stage delay `1 / (2 N f)` (s).
    pub stage_delay: f64,
    /// Periods discarded as start-up.
    pub periods_discarded: usize,
    /// Periods averaged.
    pub periods_used: usize,
    /// `(max - min) / mean` of the averaged periods.
    pub period_spread: f64,
    /// Accepted time steps.
    pub steps: usize,
    /// Rejected time steps (truncation error and Newton failures).
    pub rejected: usize,
    /// Newton iterations.
    pub newton_iterations: usize,
    /// Simulated time (s).
    pub simulated: f64,
}

/// Why the ring job produced no frequency.
#[derive(Debug)]
pub enum RingError {
    /// The engine failed.
    Engine(EngineError),
    /// The ring did not oscillate (or not long enough) before the time limit.
    NoOscillation(String),
}

impl fmt::Display for RingError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RingError::Engine(e) => write!(f, "{e}"),
            RingError::NoOscillation(why) => write!(f, "the ring does not oscillate: {why}"),
        }
    }
}

impl std::error::Error for RingError {}

impl From<EngineError> for RingError {
    fn from(e: EngineError) -> Self {
        RingError::Engine(e)
    }
}

/// The single-defect start state of a ring with supply `vdd`.
///
/// The stage outputs are held at those values in a DC solve (so the supply and any internal
/// nodes start consistent, with every device charge in place) and released at t = 0.
pub fn single_edge_start(ring: &Ring) -> Start {
    let vdd = ring.vdd;
    Start::Clamped(
        ring.outputs
            .iter()
            .enumerate()
            .map(|(i, &node)| (node, if i % 2 == 0 { vdd } else { 0.0 }))
            .collect(),
        OpParams::default(),
    )
}

/// Runs the ring in `system` (compiled from the ring's circuit) and measures its frequency.
pub fn run_ring(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
) -> Result<RingReport, RingError> {
    run_ring_recorded(system, ring, params).map(|(r, _)| r)
}

/// Recorded waveforms of a ring run: time and the first two stage outputs.
pub type RingWaves = (Vec<f64>, Vec<f64>, Vec<f64>);

/// As [`run_ring`], also returning the waveforms of `out[0]` and `out[1]`.
pub fn run_ring_recorded(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
) -> Result<(RingReport, RingWaves), RingError> {
    let stages = ring.outputs.len();
    if stages < 3 || stages % 2 == 0 {
        return Err(RingError::NoOscillation(format!(
            "a ring of inverting stages needs an odd number of at least 3 stages, this one has {stages}"
        )));
    }
    if params.edge {
        return run_edge(system, ring, params);
    }
    let tp = transient_params(params);
    let level = 0.5 * ring.vdd;
    // Settling: after at least `discard` periods, stop once `measure` successive periods agree
    // within SETTLE_TOLERANCE (or after MAX_EXTRA_PERIODS more, reporting the spread).
    let needed = params.discard + params.measure + 1;
    let cap = needed + MAX_EXTRA_PERIODS;
    let mut seen = 0usize;
    let mut last = f64::NAN;
    let mut last_t = 0.0;
    let mut ups: Vec<f64> = Vec::new();
    // Progress on stderr (hidden when stderr is not a terminal): periods seen and time reached.
    let bar = indicatif::ProgressBar::new(needed as u64 + 1);
    if let Ok(style) =
        indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} periods  {msg}")
    {
        bar.set_style(style);
    }
    let mut steps = 0u64;
    let mut observer = |t: f64, v: &[f64]| {
        if last < level && v[0] >= level {
            seen += 1;
            bar.set_position(seen as u64);
            ups.push(last_t + (level - last) / (v[0] - last) * (t - last_t));
        }
        last = v[0];
        last_t = t;
        steps += 1;
        if steps % 2000 == 0 {
            bar.set_message(format!("t = {:.3} ns, {steps} steps", t * 1e9));
        }
        let settled = seen > needed && {
            let p: Vec<f64> = ups
                .windows(2)
                .rev()
                .take(params.measure)
                .map(|w| w[1] - w[0])
                .collect();
            let (lo, hi) = p
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                    (a.min(x), b.max(x))
                });
            (hi - lo) / (p.iter().sum::<f64>() / p.len() as f64) <= SETTLE_TOLERANCE
        };
        if settled || seen > cap {
            Control::Stop
        } else {
            Control::Continue
        }
    };
    let probes = [
        Probe::Voltage(ring.outputs[0]),
        Probe::Current(ring.supply),
        Probe::Voltage(ring.outputs[1]),
    ];
    let start = single_edge_start(ring);
    let res = system.transient(&tp, &start, &probes, Some(&mut observer));
    bar.finish_and_clear();
    let res = res?;
    // Discard up to where the waveform settled (the interpolated crossings of the run decide).
    let total = lamina_measure::crossings(
        &res.time,
        &res.signals[0],
        level,
        lamina_measure::Direction::Rising,
    )
    .len();
    let discard = lamina_measure::settled_discard(
        &res.time,
        &res.signals[0],
        level,
        params.discard,
        params.measure,
        SETTLE_TOLERANCE,
    )
    .unwrap_or_else(|| total.saturating_sub(params.measure + 1).max(params.discard));
    let est = period(&res.time, &res.signals[0], level, discard).map_err(|e| {
        RingError::NoOscillation(format!("{e} by t = {:.3e} s", res.stats.end_time))
    })?;
    if est.periods_used < params.measure {
        return Err(RingError::NoOscillation(format!(
            "only {} whole periods after start-up by t = {:.3e} s",
            est.periods_used, res.stats.end_time
        )));
    }
    // Supply power over the measured periods: the supply's branch current flows from its
    // positive pin through it, so the current it delivers is the negative of that.
    let crossings_up = lamina_measure::crossings(
        &res.time,
        &res.signals[0],
        level,
        lamina_measure::Direction::Rising,
    );
    let t0 = crossings_up[est.periods_discarded];
    let t1 = crossings_up[est.periods_discarded + est.periods_used];
    let power: Vec<f64> = res.signals[1].iter().map(|i| -i * ring.vdd).collect();
    let avg_power =
        lamina_measure::waveform::mean_over(&res.time, &power, t0, t1).unwrap_or(f64::NAN);
    let report = RingReport {
        method: METHOD_PERIOD,
        stages,
        avg_power,
        energy_per_cycle: avg_power * est.period,
        frequency: est.frequency,
        period: est.period,
        stage_delay: 1.0 / (2.0 * stages as f64 * est.frequency),
        periods_discarded: est.periods_discarded,
        periods_used: est.periods_used,
        period_spread: est.spread,
        steps: res.stats.accepted,
        rejected: res.stats.rejected_lte + res.stats.rejected_newton,
        newton_iterations: res.stats.newton_iterations,
        simulated: res.stats.end_time,
    };
    let mut signals = res.signals;
    let second = signals.pop().unwrap_or_default();
    let _supply = signals.pop();
    let first = signals.pop().unwrap_or_default();
    Ok((report, (res.time, first, second)))
}

/// The transient settings of a ring run: defaults or the reference setting, the chosen
/// integrator, and a minimum step far below any stage delay.
fn transient_params(params: &RingParams) -> TransientParams {
    let mut tp = if params.reference {
        TransientParams::reference(params.time_limit)
    } else {
        TransientParams::new(params.time_limit)
    };
    tp.integrator = params.integrator;
    tp.min_step = Some(params.time_limit * 1e-15);
    tp
}

/// Successive periods must agree within this (relative spread) to count as settled.
pub const SETTLE_TOLERANCE: f64 = 1e-4;
/// Periods run beyond the minimum while waiting for the waveform to settle.
const MAX_EXTRA_PERIODS: usize = 20;

/// Method text of the whole-period measurement.
pub const METHOD_PERIOD: &str = "period from rising mid-level crossings of out[0]";
/// Method text of the edge-travel estimate.
pub const METHOD_EDGE: &str =
    "edge travel: stage delay from the time the single edge takes between two nodes";

/// The edge-travel estimate (for long rings of identical stages): after the single edge has
/// formed over the first stages, it travels at constant speed, so the time between its
/// mid-level crossings of two nodes A < B of the same parity gives the mean stage delay
/// `t_p = (t_B - t_A) / (B - A)` and `f = 1 / (2 N t_p)`. No full period is simulated; supply
/// power is not measured (NaN).
fn run_edge(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
) -> Result<(RingReport, RingWaves), RingError> {
    let stages = ring.outputs.len();
    // Let the edge form over about 20 stages, then time it over as many as the ring allows.
    let a = if stages > 60 { 20 } else { 2 * (stages / 6) };
    // Up to 200 stages of travel: enough to average the edge's speed, and the cost of the
    // run does not grow with the ring beyond that.
    let b = a + 2 * ((stages - 1 - a) / 2).min(100);
    if b <= a + 1 {
        return Err(RingError::NoOscillation(format!(
            "{stages} stages are too few for the edge-travel estimate; use whole periods"
        )));
    }
    let tp = transient_params(params);
    let level = 0.5 * ring.vdd;
    let mut last = f64::NAN;
    let bar = indicatif::ProgressBar::new(b as u64);
    let mut steps = 0u64;
    let mut observer = |t: f64, v: &[f64]| {
        steps += 1;
        if steps % 2000 == 0 {
            bar.set_message(format!("t = {:.3} ns, {steps} steps", t * 1e9));
        }
        // Node B (even, starting high) falls when the edge reaches it.
        let done = last > level && v[1] <= level;
        last = v[1];
        if done {
            Control::Stop
        } else {
            Control::Continue
        }
    };
    let probes = [
        Probe::Voltage(ring.outputs[a]),
        Probe::Voltage(ring.outputs[b]),
    ];
    let res = system.transient(&tp, &single_edge_start(ring), &probes, Some(&mut observer));
    bar.finish_and_clear();
    let res = res?;
    let first = |v: &[f64]| {
        lamina_measure::crossings(&res.time, v, level, lamina_measure::Direction::Falling)
            .first()
            .copied()
    };
    let (ta, tb) = match (first(&res.signals[0]), first(&res.signals[1])) {
        (Some(ta), Some(tb)) if tb > ta => (ta, tb),
        _ => {
            return Err(RingError::NoOscillation(format!(
                "no edge reached out[{b}] after out[{a}] by t = {:.3e} s",
                res.stats.end_time
            )))
        }
    };
    let stage_delay = (tb - ta) / (b - a) as f64;
    let frequency = 1.0 / (2.0 * stages as f64 * stage_delay);
    let report = RingReport {
        method: METHOD_EDGE,
        stages,
        avg_power: f64::NAN,
        energy_per_cycle: f64::NAN,
        frequency,
        period: 1.0 / frequency,
        stage_delay,
        periods_discarded: 0,
        periods_used: 0,
        period_spread: f64::NAN,
        steps: res.stats.accepted,
        rejected: res.stats.rejected_lte + res.stats.rejected_newton,
        newton_iterations: res.stats.newton_iterations,
        simulated: res.stats.end_time,
    };
    let mut signals = res.signals;
    let second = signals.pop().unwrap_or_default();
    let first = signals.pop().unwrap_or_default();
    Ok((report, (res.time, first, second)))
}
