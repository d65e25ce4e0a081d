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
//! times period. The run stops one step after the crossing that ends the last measured
//! period (so that the cubic rule below places it), averaging exactly `measure` periods when
//! the ring settled within the least `discard`.
//!
//! A run may take its start-up at looser truncation-error tolerances
//! ([`RingParams::startup_loosening`]; Monte Carlo samples do, [`SAMPLE_LOOSENING`]): the
//! engine returns to its nominal tolerances ([`Control::Tighten`]) when `out[0]` falls
//! through mid-level half a period before the measured periods begin, so that the state the
//! looser steps left relaxes before the first measured crossing; the settling check then
//! judges the measured periods as in any run.
//!
//! # Measuring while the run goes
//! Nothing grows with the length of the run. The engine stores no samples
//! ([`Output::Streaming`]); the observer locates the rising crossings of `out[0]` as the steps
//! arrive (the same cubic through the four samples around each crossing as
//! `lamina_measure::crossings`, so the figures equal those of a full recording) and
//! accumulates the supply energy `∫ V_DD i dt` by the trapezoidal rule, read at each crossing.
//! The waveforms handed back for plots are thinned to at most [`RingParams::wave_samples`]
//! samples by the engine's [`Decimator`].
//!
//! # Rings that do not oscillate
//! A circuit that does not oscillate (an even number of inversions, a supply too low to switch
//! the devices, a load that holds every node) is stopped early. A *transition* is a stage
//! output crossing the middle fifth of the supply (from below `0.4 V_DD` to above `0.6 V_DD`
//! or back; the band keeps a node resting at the switching threshold from counting noise as
//! transitions). While a single edge circulates, some stage switches about every stage delay,
//! so the job estimates the stage delay `t_e` from the first transitions (the time to the first
//! one, and the largest gap among the first [`ESTIMATE_TRANSITIONS`]) and stops once no
//! transition has come for [`RingParams::stall_delays`] times `t_e`. When no transition is
//! ever seen, there is no delay to scale by, and the elapsed time `t` stands in for it (a
//! working ring switches its first stage within about a stage delay): the run stops once
//! every stage output has moved by less than [`STILL_FRACTION`]` · V_DD` per `t` (its
//! derivative below `STILL_FRACTION · V_DD / t`) at every step since `t/2`, over at least
//! [`STILL_STEPS`] steps. In whole-period runs the swing (max - min) of `out[0]` must also
//! have settled over the measured periods, within [`SWING_TOLERANCE`]: a ring winding down to
//! its balanced state keeps a regular period for a while. An edge-travel run also checks that
//! the edge reached its far node through every stage in order. `RingParams::time_limit` stays
//! the outer bound. Each of these ends in [`RingError::NoOscillation`] with the stage-output
//! voltages the run ended at and the simulated time ([`RingHalt`]).

use crate::builtin::Ring;
use lamina_engine::{
    Control, Decimator, EngineError, Integrator, OpParams, Output, Probe, Start, System,
    TransientParams, TransientStats,
};
use lamina_measure::Direction;
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
    /// Stop as not oscillating once no stage output has switched for this many stage delays
    /// estimated from the first transitions (default 200; see the module doc).
    pub stall_delays: f64,
    /// Most samples kept of the waveforms [`run_ring_recorded`] returns (default 32768; at
    /// least 2 are kept, the first and the last).
    pub wave_samples: usize,
    /// Device bypass tolerance as a multiple of the Newton update tolerance
    /// (`TransientParams::bypass`, default 1; 0 evaluates every device at every iteration).
    pub bypass: f64,
    /// Newton on the active stages only, the whole ring while most stages move
    /// (`TransientParams::latency` with its fallback; default on; off at the reference
    /// setting, whatever this says).
    pub latency: bool,
    /// Factor (at least 1) on the truncation-error tolerances over the start-up, up to half a
    /// period before the measured periods (the falling mid-level crossing of `out[0]` before
    /// the rising one that begins them); whole periods only; default 1: every step at the
    /// nominal tolerances. See [`SAMPLE_LOOSENING`].
    pub startup_loosening: f64,
}

impl RingParams {
    /// The measurement of each Monte Carlo sample (hundreds to thousands of runs whose spread
    /// is far above a figure's settling error; a sweep keeps the single run's): at least
    /// [`SAMPLE_DISCARD`] start-up period discarded and [`SAMPLE_MEASURE`] periods averaged, the
    /// settling check unchanged (those periods agree within [`SETTLE_TOLERANCE`], else more
    /// are discarded), the start-up at [`SAMPLE_LOOSENING`] times looser truncation-error
    /// tolerances. A settled ring's periods differ by the step placement alone (the demo
    /// ring's spread is 2.3e-6), so averaging two instead of five changes a figure by about
    /// that: measured on the demo ring's 100-sample Monte Carlo (`ring-21-mc.lam`, seed 1), the
    /// frequency's mean and standard deviation agree with the single-run measurement to six
    /// digits, at 0.35 of a single run's time steps (3,241 against 9,230 on the nominal
    /// demo ring).
    pub fn for_monte_carlo() -> Self {
        RingParams {
            discard: SAMPLE_DISCARD,
            measure: SAMPLE_MEASURE,
            startup_loosening: SAMPLE_LOOSENING,
            wave_samples: crate::sweep::CURVE_SAMPLES,
            ..RingParams::default()
        }
    }
}

/// Least start-up periods discarded in Monte Carlo samples ([`RingParams::for_monte_carlo`]).
pub const SAMPLE_DISCARD: usize = 1;
/// Periods averaged in Monte Carlo samples ([`RingParams::for_monte_carlo`]).
pub const SAMPLE_MEASURE: usize = 2;
/// Factor on the truncation-error tolerances over a Monte Carlo sample's start-up
/// ([`RingParams::startup_loosening`]). Measured on the demo ring's Monte Carlo
/// (`ring-21-mc.lam`, seed 1): on 8 samples against the same samples at the nominal
/// tolerances, 10 takes 0.84 of the steps and moves the frequency by at most 8e-8 and the
/// energy per cycle by at most 8e-6; 30 and 100 save a few percent more of the steps but move
/// the energy by up to 4e-5 and 7e-5 (charge left on the slowly settling nodes at the rails by
/// the looser start relaxes during the measured periods). The default tolerances' own error on
/// that ring, against the reference setting: 5.5e-5 in frequency, 2.0e-5 in energy. Over 100
/// samples, against the measurement before this and the stop one step after the last
/// measured period: each sample within 4.7e-7 in frequency and 2.5e-5 in energy; the
/// frequency's mean, standard deviation and 5 and 95 % quantiles within 2e-8, the energy's
/// within 4e-5.
pub const SAMPLE_LOOSENING: f64 = 10.0;

impl Default for RingParams {
    fn default() -> Self {
        RingParams {
            integrator: Integrator::Trapezoidal,
            reference: false,
            discard: 3,
            measure: 5,
            edge: false,
            time_limit: 1e-3,
            stall_delays: 200.0,
            wave_samples: 1 << 15,
            bypass: 1.0,
            latency: true,
            startup_loosening: 1.0,
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

/// Why a ring run that produced no frequency stopped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum HaltCause {
    /// No stage output switched for [`RingParams::stall_delays`] estimated stage delays.
    Stalled,
    /// No stage output ever switched, and all of them stopped moving.
    Still,
    /// The swing of `out[0]` kept changing over the measured periods.
    SwingUnsettled,
    /// The run reached [`RingParams::time_limit`] without enough periods.
    TimeLimit,
    /// In an edge-travel run, the far node fell before the edge had switched the stages
    /// before it in ring order: no single edge travels the ring.
    NoTravellingEdge,
}

/// Where a ring run that produced no frequency ended.
#[derive(Clone, Debug, PartialEq)]
pub struct RingHalt {
    /// Why it stopped.
    pub cause: HaltCause,
    /// Simulated time reached (s).
    pub simulated: f64,
    /// Accepted time steps.
    pub steps: usize,
    /// Stage-output voltages at the end, in ring order (V).
    pub voltages: Vec<f64>,
    /// Transitions seen (stage outputs crossing the middle fifth of the supply).
    pub transitions: usize,
    /// Stage delay estimated from the first transitions (s), when there were any.
    pub stage_delay_estimate: Option<f64>,
}

/// Why the ring job produced no frequency.
#[derive(Debug)]
pub enum RingError {
    /// The engine failed.
    Engine(EngineError),
    /// The ring did not oscillate (or not long enough): why, and, when a run took place, where
    /// it ended.
    NoOscillation(String, Option<Box<RingHalt>>),
}

impl RingError {
    /// Where the run ended, for a ring that did not oscillate after a run.
    pub fn halt(&self) -> Option<&RingHalt> {
        match self {
            RingError::NoOscillation(_, halt) => halt.as_deref(),
            RingError::Engine(_) => None,
        }
    }
}

impl fmt::Display for RingError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RingError::Engine(e) => write!(f, "{e}"),
            RingError::NoOscillation(why, _) => write!(f, "the ring does not oscillate: {why}"),
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
    Start::Clamped(
        ring.outputs
            .iter()
            .zip(start_levels(ring))
            .map(|(&node, v)| (node, v))
            .collect(),
        OpParams::default(),
    )
}

/// The stage-output voltages of the single-defect start, in ring order.
fn start_levels(ring: &Ring) -> impl Iterator<Item = f64> + '_ {
    (0..ring.outputs.len()).map(|i| if i % 2 == 0 { ring.vdd } else { 0.0 })
}

/// Runs the ring in `system` (compiled from the ring's circuit) and measures its frequency.
pub fn run_ring(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
) -> Result<RingReport, RingError> {
    run(system, ring, params, false, None, &single_edge_start(ring)).map(|(r, _)| r)
}

/// As [`run_ring`], from `start` instead of [`single_edge_start`]: a state with the stage
/// outputs at the same single-defect levels (a run continued from an earlier one's end state,
/// device-internal unknowns such as trap occupancies carried over; see `ring_stress`).
pub fn run_ring_from(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
    start: &Start,
) -> Result<RingReport, RingError> {
    run(system, ring, params, false, None, start).map(|(r, _)| r)
}

/// Recorded waveforms of a ring run: time and the first two stage outputs.
pub type RingWaves = (Vec<f64>, Vec<(usize, Vec<f64>)>);

/// Most stage outputs kept for plots: all of a ring this short, an evenly spread set of a
/// longer one.
pub const SHOWN_STAGES: usize = 5;

/// The stages whose outputs a recorded run keeps: every stage of a short ring, else
/// [`SHOWN_STAGES`] spread evenly from the first to the last.
pub fn shown_stages(stages: usize) -> Vec<usize> {
    if stages <= SHOWN_STAGES {
        (0..stages).collect()
    } else {
        (0..SHOWN_STAGES)
            .map(|k| k * (stages - 1) / (SHOWN_STAGES - 1))
            .collect()
    }
}

/// As [`run_ring`], also returning the waveforms of `out[0]` and `out[1]`: the whole run,
/// thinned to at most [`RingParams::wave_samples`] samples (the engine's [`Decimator`] rule).
pub fn run_ring_recorded(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
) -> Result<(RingReport, RingWaves), RingError> {
    run(system, ring, params, true, None, &single_edge_start(ring))
}

/// As [`run_ring_recorded`], keeping the waveforms of the stages `shown` (indices into the
/// ring; those past its end are left out) instead of the default spread.
pub fn run_ring_showing(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
    shown: &[usize],
) -> Result<(RingReport, RingWaves), RingError> {
    run(
        system,
        ring,
        params,
        true,
        Some(shown),
        &single_edge_start(ring),
    )
}

/// Successive periods must agree within this (relative spread) to count as settled.
pub const SETTLE_TOLERANCE: f64 = 1e-4;
/// Periods run beyond the minimum while waiting for the waveform to settle.
const MAX_EXTRA_PERIODS: usize = 20;
/// Transitions whose gaps go into the stage-delay estimate (two rising and two falling edges,
/// so a ring with a slow pull-up is judged by its slow edge).
pub const ESTIMATE_TRANSITIONS: usize = 4;
/// Half-width of the band a transition crosses, as a fraction of V_DD around V_DD / 2.
const BAND: f64 = 0.1;
/// Movement per elapsed time, as a fraction of V_DD, below which a stage output counts as
/// still when no transition was ever seen.
pub const STILL_FRACTION: f64 = 1e-3;
/// Accepted steps the stillness must last (besides lasting since half the elapsed time).
pub const STILL_STEPS: usize = 10;
/// Largest relative spread `(max - min) / max` of the swing of `out[0]` over the measured
/// periods (the peaks are read at the accepted steps, good to well under a percent).
pub const SWING_TOLERANCE: f64 = 1e-2;
/// Stage outputs named in a message before the rest are counted.
const NAMED_VOLTAGES: usize = 8;

/// Method text of the whole-period measurement.
pub const METHOD_PERIOD: &str = "period from rising mid-level crossings of out[0]";
/// Method text of the edge-travel estimate.
pub const METHOD_EDGE: &str =
    "edge travel: stage delay from the time the single edge takes between two nodes";

/// The transient settings of a ring run: defaults or the reference setting, the chosen
/// integrator, a minimum step far below any stage delay, and nothing stored.
fn transient_params(params: &RingParams) -> TransientParams {
    let mut tp = if params.reference {
        TransientParams::reference(params.time_limit)
    } else {
        TransientParams::new(params.time_limit)
    };
    tp.integrator = params.integrator;
    tp.bypass = params.bypass;
    tp.latency = params.latency && !params.reference;
    tp.min_step = Some(params.time_limit * 1e-15);
    tp.output = Output::Streaming;
    tp
}

/// Probes of a ring run: the supply current, then every stage output in ring order.
fn probes(ring: &Ring) -> Vec<Probe> {
    std::iter::once(Probe::Current(ring.supply))
        .chain(ring.outputs.iter().map(|&n| Probe::Voltage(n)))
        .collect()
}

fn run(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
    record: bool,
    shown: Option<&[usize]>,
    start: &Start,
) -> Result<(RingReport, RingWaves), RingError> {
    let stages = ring.outputs.len();
    if stages < 3 || stages % 2 == 0 {
        return Err(RingError::NoOscillation(
            format!(
            "a ring of inverting stages needs an odd number of at least 3 stages, this one has {stages}"
        ),
            None,
        ));
    }
    if !(ring.vdd.is_finite() && ring.vdd > 0.0) {
        return Err(RingError::NoOscillation(
            format!("the ring needs a positive supply, not {} V", ring.vdd),
            None,
        ));
    }
    if !(params.stall_delays.is_finite() && params.stall_delays > 0.0) {
        return Err(RingError::NoOscillation(
            format!(
                "the stall limit must be a positive number of stage delays, not {}",
                params.stall_delays
            ),
            None,
        ));
    }
    if params.edge {
        run_edge(system, ring, params, record, start)
    } else {
        run_periods(system, ring, params, record, shown, start)
    }
}

/// Watches every stage output for transitions and stillness (see the module doc) and keeps
/// the latest values, so a run that stops can say where the ring came to rest.
struct Monitor {
    vdd: f64,
    stall_delays: f64,
    high: Vec<bool>,
    values: Vec<f64>,
    /// Time of each output's first transition (NaN before it).
    first_switch: Vec<f64>,
    t: f64,
    transitions: usize,
    last_transition: f64,
    estimate: f64,
    still_since: Option<f64>,
    still_steps: usize,
    halted: Option<HaltCause>,
}

impl Monitor {
    fn new(ring: &Ring, params: &RingParams) -> Self {
        let values: Vec<f64> = start_levels(ring).collect();
        Monitor {
            vdd: ring.vdd,
            stall_delays: params.stall_delays,
            high: values.iter().map(|&v| v > 0.5 * ring.vdd).collect(),
            first_switch: vec![f64::NAN; values.len()],
            values,
            t: 0.0,
            transitions: 0,
            last_transition: 0.0,
            estimate: 0.0,
            still_since: None,
            still_steps: 0,
            halted: None,
        }
    }

    /// Takes the stage outputs at an accepted time; true when the run should stop. `moved`:
    /// the probes the step may have changed ([`lamina_engine::Moved`]; output `i` is probe
    /// `i + 1`, after the supply current), every other output the same as at the last step;
    /// looking at those alone gives the same result bit for bit (a switch's bookkeeping does
    /// not depend on the order switches are seen in one step), at a cost that follows the
    /// moving stages, not the ring.
    fn step(&mut self, t: f64, outputs: &[f64], moved: lamina_engine::Moved<'_>) -> bool {
        let (lo, hi) = ((0.5 - BAND) * self.vdd, (0.5 + BAND) * self.vdd);
        let dt = t - self.t;
        let fastest = match moved {
            Some(probes) => {
                let mut fastest = 0.0f64;
                for i in probes.iter().filter_map(|&k| k.checked_sub(1)) {
                    let v = outputs[i];
                    fastest = fastest.max((v - self.values[i]).abs());
                    self.values[i] = v;
                    if self.crossed(i, v, lo, hi) {
                        self.switched(i, t);
                    }
                }
                fastest
            }
            None => self.scan(t, outputs, lo, hi),
        };
        self.t = t;
        if self.transitions > 0 {
            if t - self.last_transition > self.stall_delays * self.estimate {
                self.halted = Some(HaltCause::Stalled);
            }
        } else if dt > 0.0 && fastest / dt * t < STILL_FRACTION * self.vdd {
            let since = *self.still_since.get_or_insert(t);
            self.still_steps += 1;
            if t >= 2.0 * since && self.still_steps >= STILL_STEPS {
                self.halted = Some(HaltCause::Still);
            }
        } else {
            self.still_since = None;
            self.still_steps = 0;
        }
        self.halted.is_some()
    }

    /// Whether output `i`, now at `v`, has crossed out of its state's side of the band.
    fn crossed(&self, i: usize, v: f64, lo: f64, hi: f64) -> bool {
        if self.high[i] {
            v < lo
        } else {
            v > hi
        }
    }

    /// Output `i` switched at `t`.
    fn switched(&mut self, i: usize, t: f64) {
        self.high[i] = !self.high[i];
        if self.first_switch[i].is_nan() {
            self.first_switch[i] = t;
        }
        if self.transitions == 0 {
            self.estimate = t;
        } else if self.transitions < ESTIMATE_TRANSITIONS {
            self.estimate = self.estimate.max(t - self.last_transition);
        }
        self.transitions += 1;
        self.last_transition = t;
    }

    /// Every output: the largest move since the last step (a pass the compiler vectorises,
    /// in independent lanes whose largest is the same number whatever the order), then the
    /// switches, looked for only when one happened.
    fn scan(&mut self, t: f64, outputs: &[f64], lo: f64, hi: f64) -> f64 {
        const LANES: usize = 8;
        let mut lanes = [0.0f64; LANES];
        let mut any = false;
        let mut chunks = outputs.chunks_exact(LANES).zip(
            self.values
                .chunks_exact_mut(LANES)
                .zip(self.high.chunks_exact(LANES)),
        );
        for (v, (old, high)) in &mut chunks {
            for k in 0..LANES {
                lanes[k] = lanes[k].max((v[k] - old[k]).abs());
                old[k] = v[k];
                any |= if high[k] { v[k] < lo } else { v[k] > hi };
            }
        }
        let tail = outputs.len() - outputs.len() % LANES;
        let rest = outputs[tail..]
            .iter()
            .zip(&mut self.values[tail..])
            .zip(&self.high[tail..]);
        for ((&v, old), &high) in rest {
            lanes[0] = lanes[0].max((v - *old).abs());
            *old = v;
            any |= if high { v < lo } else { v > hi };
        }
        if any {
            for (i, &v) in outputs.iter().enumerate() {
                if self.crossed(i, v, lo, hi) {
                    self.switched(i, t);
                }
            }
        }
        lanes.iter().fold(0.0f64, |m, &l| m.max(l))
    }

    /// The no-oscillation error for `cause`, with `detail` and where the run ended.
    fn error(
        &self,
        system: &System,
        ring: &Ring,
        cause: HaltCause,
        detail: &str,
        stats: &TransientStats,
    ) -> RingError {
        let estimate = (self.transitions > 0).then_some(self.estimate);
        let why = match cause {
            HaltCause::Stalled => format!(
                "no stage output switched (crossed 40-60 % of V_DD) for {} estimated stage delays \
                 of {:.3e} s after the last transition at t = {:.3e} s",
                self.stall_delays, self.estimate, self.last_transition
            ),
            HaltCause::Still => format!(
                "no stage output ever switched and all stopped moving (less than {STILL_FRACTION} \
                 V_DD per elapsed time since t = {:.3e} s)",
                self.still_since.unwrap_or(0.0)
            ),
            HaltCause::SwingUnsettled | HaltCause::TimeLimit | HaltCause::NoTravellingEdge => {
                detail.to_string()
            }
        };
        let mut list = String::new();
        for (k, (&node, v)) in ring.outputs.iter().zip(&self.values).enumerate() {
            if k == NAMED_VOLTAGES {
                list.push_str(&format!(" and {} more", ring.outputs.len() - k));
                break;
            }
            if k > 0 {
                list.push_str(", ");
            }
            list.push_str(&format!("{} = {v:.4} V", system.node_name(node)));
        }
        RingError::NoOscillation(
            format!(
                "{why}; stopped at t = {:.3e} s after {} steps with the stage outputs at {list}",
                stats.end_time, stats.accepted
            ),
            Some(Box::new(RingHalt {
                cause,
                simulated: stats.end_time,
                steps: stats.accepted,
                voltages: self.values.clone(),
                transitions: self.transitions,
                stage_delay_estimate: estimate,
            })),
        )
    }
}

/// The last four samples of a signal (with the supply power and energy there), oldest first:
/// enough to place a crossing between the middle two by the cubic rule of
/// `lamina_measure::crossings`, read one sample after the crossing is seen.
struct Window {
    t: [f64; 4],
    v: [f64; 4],
    p: [f64; 4],
    e: [f64; 4],
    len: usize,
}

impl Window {
    fn new() -> Self {
        Window {
            t: [0.0; 4],
            v: [0.0; 4],
            p: [0.0; 4],
            e: [0.0; 4],
            len: 0,
        }
    }

    fn push(&mut self, t: f64, v: f64, p: f64) {
        let e = match self.len {
            0 => 0.0,
            n => self.e[n - 1] + 0.5 * (self.p[n - 1] + p) * (t - self.t[n - 1]),
        };
        if self.len == 4 {
            self.t.rotate_left(1);
            self.v.rotate_left(1);
            self.p.rotate_left(1);
            self.e.rotate_left(1);
            self.len = 3;
        }
        let k = self.len;
        (self.t[k], self.v[k], self.p[k], self.e[k]) = (t, v, p, e);
        self.len += 1;
    }

    /// Whether the newest two samples cross `level` in `direction`.
    fn crossed(&self, level: f64, direction: Direction) -> bool {
        let s = match direction {
            Direction::Rising => 1.0,
            Direction::Falling => -1.0,
        };
        self.len >= 2 && {
            let (a, b) = (self.v[self.len - 2], self.v[self.len - 1]);
            s * (a - level) < 0.0 && s * (b - level) >= 0.0
        }
    }

    /// Time of the crossing of `level` between samples `i` and `i + 1`, and the supply energy
    /// there (linear power between the samples, as `mean_over` integrates).
    fn locate(&self, i: usize, level: f64, direction: Direction) -> (f64, f64) {
        let (ta, tb, va, vb) = (self.t[i], self.t[i + 1], self.v[i], self.v[i + 1]);
        let linear = ta + (level - va) * (tb - ta) / (vb - va);
        let x = if i >= 1 && i + 2 < self.len {
            // One allocation per crossing, not per step.
            lamina_measure::crossings(&self.t[..self.len], &self.v[..self.len], level, direction)
                .into_iter()
                .find(|&c| c >= ta && c <= tb)
                .unwrap_or(linear)
        } else {
            linear
        };
        let p_x = if tb > ta {
            self.p[i] + (self.p[i + 1] - self.p[i]) * (x - ta) / (tb - ta)
        } else {
            self.p[i + 1]
        };
        (x, self.e[i] + 0.5 * (self.p[i] + p_x) * (x - ta))
    }
}

/// Rising mid-level crossings of `out[0]` with the supply energy at each, the swing of
/// `out[0]` in each period, and the settling decision.
struct Periods {
    level: f64,
    window: Window,
    pending: bool,
    /// Located crossings: time and supply energy.
    ups: Vec<(f64, f64)>,
    /// Linearly interpolated crossings, for the stop decision.
    ups_linear: Vec<f64>,
    /// Swing (max - min) of `out[0]` between successive crossings.
    swings: Vec<f64>,
    lo: f64,
    hi: f64,
}

impl Periods {
    fn new(level: f64) -> Self {
        Periods {
            level,
            window: Window::new(),
            pending: false,
            ups: Vec::new(),
            ups_linear: Vec::new(),
            swings: Vec::new(),
            lo: f64::INFINITY,
            hi: f64::NEG_INFINITY,
        }
    }

    fn push(&mut self, t: f64, v: f64, p: f64) {
        self.window.push(t, v, p);
        let n = self.window.len;
        if self.pending {
            self.ups
                .push(self.window.locate(n - 3, self.level, Direction::Rising));
            self.pending = false;
        }
        if self.window.crossed(self.level, Direction::Rising) {
            self.pending = true;
            let w = &self.window;
            let (ta, va) = (w.t[n - 2], w.v[n - 2]);
            self.ups_linear
                .push(ta + (self.level - va) / (v - va) * (t - ta));
            if self.ups_linear.len() > 1 {
                self.swings.push(self.hi - self.lo);
            }
            (self.lo, self.hi) = (v, v);
        }
        self.lo = self.lo.min(v);
        self.hi = self.hi.max(v);
    }

    /// Places a crossing seen at the last sample (linearly: nothing follows it).
    fn finish(&mut self) {
        if self.pending {
            let n = self.window.len;
            self.ups
                .push(self.window.locate(n - 2, self.level, Direction::Rising));
            self.pending = false;
        }
    }

    /// Whether the last `measure` periods (of the linear crossings) agree within
    /// [`SETTLE_TOLERANCE`] and their swings within [`SWING_TOLERANCE`], allocation-free.
    fn settled(&self, measure: usize) -> bool {
        let m = measure.max(1);
        let c = &self.ups_linear;
        if c.len() < m + 1 {
            return false;
        }
        let (mut lo, mut hi, mut sum) = (f64::INFINITY, f64::NEG_INFINITY, 0.0);
        for w in c[c.len() - m - 1..].windows(2) {
            let p = w[1] - w[0];
            lo = lo.min(p);
            hi = hi.max(p);
            sum += p;
        }
        let swings = &self.swings[self.swings.len().saturating_sub(m)..];
        (hi - lo) / (sum / m as f64) <= SETTLE_TOLERANCE && swing_steady(swings)
    }
}

/// Whether `swings` agree within [`SWING_TOLERANCE`] of the largest.
fn swing_steady(swings: &[f64]) -> bool {
    let (lo, hi) = swings
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    swings.is_empty() || hi - lo <= SWING_TOLERANCE * hi
}

/// The whole-period measurement.
fn run_periods(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
    record: bool,
    shown: Option<&[usize]>,
    start: &Start,
) -> Result<(RingReport, RingWaves), RingError> {
    let stages = ring.outputs.len();
    let mut tp = transient_params(params);
    tp.startup_loosening = params.startup_loosening;
    let level = 0.5 * ring.vdd;
    // Settling: after at least `discard` periods, stop once `measure` successive periods agree
    // within SETTLE_TOLERANCE (or after MAX_EXTRA_PERIODS more, reporting the spread).
    let needed = params.discard + params.measure + 1;
    let cap = needed + MAX_EXTRA_PERIODS;
    let mut periods = Periods::new(level);
    let mut monitor = Monitor::new(ring, params);
    let shown: Vec<usize> = match shown {
        Some(s) => s.iter().copied().filter(|&i| i < stages).collect(),
        None => shown_stages(stages),
    };
    let mut waves = Decimator::new(if record { params.wave_samples } else { 2 }, shown.len());
    let mut sample: Vec<f64> = shown
        .iter()
        .map(|i| if i % 2 == 0 { ring.vdd } else { 0.0 })
        .collect();
    waves.push(0.0, &sample);
    // The supply energy counts from the first step (power taken as 0 at t = 0); only its
    // differences between crossings are used.
    periods.push(0.0, ring.vdd, 0.0);
    // Progress on stderr (hidden when stderr is not a terminal): periods seen and time reached.
    let bar = indicatif::ProgressBar::new(needed as u64 + 1);
    if let Ok(style) =
        indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} periods  {msg}")
    {
        bar.set_style(style);
    }
    let mut steps = 0u64;
    let res = {
        let mut observer = |t: f64, v: &[f64], moved: lamina_engine::Moved<'_>| {
            let outputs = &v[1..];
            let seen = periods.ups_linear.len();
            periods.push(t, outputs[0], -v[0] * ring.vdd);
            if periods.ups_linear.len() > seen {
                bar.set_position(periods.ups_linear.len() as u64);
            }
            if record {
                for (slot, &i) in sample.iter_mut().zip(&shown) {
                    *slot = outputs[i];
                }
                waves.push(t, &sample);
            }
            steps += 1;
            if steps % 2000 == 0 {
                bar.set_message(format!("t = {:.3} ns, {steps} steps", t * 1e9));
            }
            // Stop once `needed` crossings are located, none pending (the newest one a step
            // after it is seen, so that the cubic rule places it), and the last `measure`
            // periods agree.
            let seen = periods.ups_linear.len();
            let located = periods.ups.len();
            let stalled = monitor.step(t, outputs, moved);
            let placed = located >= needed && located == seen;
            if stalled || (placed && periods.settled(params.measure)) || seen > cap {
                Control::Stop
            } else if seen > params.discard || (seen == params.discard && outputs[0] < level) {
                // Half a period before the measured periods begin (out[0] falling through
                // mid-level), so that the start-up's looser state relaxes before them.
                Control::Tighten
            } else {
                Control::Continue
            }
        };
        let probes = probes(ring);
        system.transient(&tp, start, &probes, Some(&mut observer))
    };
    bar.finish_and_clear();
    let res = res?;
    periods.finish();
    let stats = res.stats;
    if let Some(cause) = monitor.halted {
        return Err(monitor.error(system, ring, cause, "", &stats));
    }
    let fail = |why: String| monitor.error(system, ring, HaltCause::TimeLimit, &why, &stats);
    // Discard up to where the waveform settled: the first start-up count at or above
    // `discard` after which `measure` located periods agree.
    let c: Vec<f64> = periods.ups.iter().map(|u| u.0).collect();
    let m = params.measure.max(1);
    let lengths: Vec<f64> = c.windows(2).map(|w| w[1] - w[0]).collect();
    let discard = lengths
        .len()
        .checked_sub(m)
        .and_then(|last| {
            (params.discard..=last).find(|&d| {
                let w = &lengths[d..d + m];
                let (lo, hi) = w
                    .iter()
                    .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &p| {
                        (a.min(p), b.max(p))
                    });
                (hi - lo) / (w.iter().sum::<f64>() / m as f64) <= SETTLE_TOLERANCE
                    && periods.swings.get(d..d + m).is_none_or(swing_steady)
            })
        })
        .unwrap_or_else(|| {
            c.len()
                .saturating_sub(params.measure + 1)
                .max(params.discard)
        });
    if c.len() < discard + 2 {
        return Err(fail(format!(
            "found {} rising crossings of {level} V on out[0] but need at least {} ({discard} \
             discarded plus one whole period) by the time limit",
            c.len(),
            discard + 2
        )));
    }
    let used = c.len() - 1 - discard;
    if used < params.measure {
        return Err(fail(format!(
            "only {used} whole period(s) after start-up by the time limit, {} needed",
            params.measure
        )));
    }
    let kept = &lengths[discard..];
    let period = (c[c.len() - 1] - c[discard]) / used as f64;
    let (lo, hi) = kept
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &p| {
            (a.min(p), b.max(p))
        });
    // The swing over the measured periods must have settled too: a ring winding down to its
    // balanced state keeps a regular period for a while.
    if let Some(swings) = periods.swings.get(discard..c.len() - 1) {
        if !swing_steady(swings) {
            let (first, last) = (swings[0], swings[swings.len() - 1]);
            return Err(monitor.error(
                system,
                ring,
                HaltCause::SwingUnsettled,
                &format!(
                    "the swing of out[0] does not settle: {first:.4} V in the first and \
                     {last:.4} V in the last of the {used} measured periods (they must agree \
                     within {} %)",
                    SWING_TOLERANCE * 100.0
                ),
                &stats,
            ));
        }
    }
    // Supply power over the measured periods: the supply's branch current flows from its
    // positive pin through it, so the power it delivers is -V_DD i (accumulated as energy).
    let (t0, e0) = periods.ups[discard];
    let (t1, e1) = periods.ups[c.len() - 1];
    let avg_power = (e1 - e0) / (t1 - t0);
    let frequency = 1.0 / period;
    let report = RingReport {
        method: METHOD_PERIOD,
        stages,
        avg_power,
        energy_per_cycle: avg_power * period,
        frequency,
        period,
        stage_delay: 1.0 / (2.0 * stages as f64 * frequency),
        periods_discarded: discard,
        periods_used: used,
        period_spread: (hi - lo) / period,
        steps: stats.accepted,
        rejected: stats.rejected_lte + stats.rejected_newton,
        newton_iterations: stats.newton_iterations,
        simulated: stats.end_time,
    };
    Ok((report, split_waves(waves, &shown)))
}

fn split_waves(waves: Decimator, shown: &[usize]) -> RingWaves {
    let (time, signals) = waves.finish();
    (time, shown.iter().copied().zip(signals).collect())
}

/// The edge-travel estimate (for long rings of identical stages): after the single edge has
/// formed over the first stages, it travels at constant speed, so the time between its
/// mid-level crossings of two nodes A < B of the same parity gives the mean stage delay
/// `t_p = (t_B - t_A) / (B - A)` and `f = 1 / (2 N t_p)`. No full period is simulated; supply
/// power is not measured (NaN).
fn run_edge(
    system: &mut System,
    ring: &Ring,
    params: &RingParams,
    record: bool,
    start: &Start,
) -> Result<(RingReport, RingWaves), RingError> {
    let stages = ring.outputs.len();
    // Let the edge form over about 20 stages, then time it over as many as the ring allows.
    let a = if stages > 60 { 20 } else { 2 * (stages / 6) };
    // Up to 200 stages of travel: enough to average the edge's speed, and the cost of the
    // run does not grow with the ring beyond that.
    let b = a + 2 * ((stages - 1 - a) / 2).min(100);
    if b <= a + 1 {
        return Err(RingError::NoOscillation(
            format!("{stages} stages are too few for the edge-travel estimate; use whole periods"),
            None,
        ));
    }
    let tp = transient_params(params);
    let level = 0.5 * ring.vdd;
    let mut monitor = Monitor::new(ring, params);
    let shown = [a, b];
    let mut waves = Decimator::new(if record { params.wave_samples } else { 2 }, 2);
    // Nodes A and B are even: they start high and fall when the edge reaches them.
    let mut window_a = Window::new();
    window_a.push(0.0, ring.vdd, 0.0);
    let mut pending_a = false;
    let mut ta: Option<f64> = None;
    let mut tb: Option<f64> = None;
    let mut last_b = ring.vdd;
    let mut last_t = 0.0;
    waves.push(0.0, &[ring.vdd, ring.vdd]);
    let bar = indicatif::ProgressBar::new(b as u64);
    let mut steps = 0u64;
    let res = {
        let mut observer = |t: f64, v: &[f64], moved: lamina_engine::Moved<'_>| {
            let outputs = &v[1..];
            steps += 1;
            if steps % 2000 == 0 {
                bar.set_message(format!("t = {:.3} ns, {steps} steps", t * 1e9));
            }
            if record {
                waves.push(t, &[outputs[a], outputs[b]]);
            }
            if ta.is_none() {
                window_a.push(t, outputs[a], 0.0);
                let n = window_a.len;
                if pending_a {
                    ta = Some(window_a.locate(n - 3, level, Direction::Falling).0);
                    pending_a = false;
                } else if window_a.crossed(level, Direction::Falling) {
                    pending_a = true;
                }
            }
            let vb = outputs[b];
            if last_b > level && vb <= level {
                tb = Some(last_t + (level - last_b) / (vb - last_b) * (t - last_t));
            }
            last_b = vb;
            last_t = t;
            let stalled = monitor.step(t, outputs, moved);
            if stalled || tb.is_some() {
                Control::Stop
            } else {
                Control::Continue
            }
        };
        let probes = probes(ring);
        system.transient(&tp, start, &probes, Some(&mut observer))
    };
    bar.finish_and_clear();
    let res = res?;
    let stats = res.stats;
    if ta.is_none() && pending_a {
        let n = window_a.len;
        ta = Some(window_a.locate(n - 2, level, Direction::Falling).0);
    }
    if let Some(cause) = monitor.halted.filter(|_| tb.is_none()) {
        return Err(monitor.error(system, ring, cause, "", &stats));
    }
    // The edge must have reached B through every stage from A, each switching after the one
    // before it; a node that falls for another reason (a load pulling every node down) says
    // nothing about the stage delay.
    if let Some(t_b) = tb {
        let first = &monitor.first_switch;
        let broken = (a..b).find(|&i| {
            let next = if i + 1 == b { t_b } else { first[i + 1] };
            // NaN (not switched) fails too.
            first[i].partial_cmp(&next) != Some(std::cmp::Ordering::Less)
        });
        if let Some(i) = broken {
            let name = |k: usize| system.node_name(ring.outputs[k]);
            let when = |k: usize, t: f64| {
                if t.is_nan() {
                    format!("{} had not switched", name(k))
                } else {
                    format!("{} switched at t = {t:.3e} s", name(k))
                }
            };
            let next = if i + 1 == b { t_b } else { first[i + 1] };
            return Err(monitor.error(
                system,
                ring,
                HaltCause::NoTravellingEdge,
                &format!(
                    "{} fell at t = {t_b:.3e} s, but not after an edge travelling from {} ({}, {})",
                    name(b),
                    name(a),
                    when(i, first[i]),
                    when(i + 1, next),
                ),
                &stats,
            ));
        }
    }
    let (ta, tb) = match (ta, tb) {
        (Some(ta), Some(tb)) if tb > ta => (ta, tb),
        _ => {
            return Err(monitor.error(
                system,
                ring,
                HaltCause::TimeLimit,
                &format!("no edge reached out[{b}] after out[{a}] by the time limit"),
                &stats,
            ))
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
        steps: stats.accepted,
        rejected: stats.rejected_lte + stats.rejected_newton,
        newton_iterations: stats.newton_iterations,
        simulated: stats.end_time,
    };
    Ok((report, split_waves(waves, &shown)))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A monitor told which outputs moved reaches the same state, bit for bit, as one that
    /// scans every output: a synthetic edge travelling down an 11-stage ring (each step moves
    /// two neighbouring outputs, one across the band), and a step where nothing moved.
    #[test]
    fn the_monitor_looks_at_the_moved_outputs_only_with_the_same_result() {
        let (_, ring) =
            crate::builtin::square_ring(11, &crate::builtin::SquareStage::default()).unwrap();
        let params = RingParams::default();
        let (mut all, mut listed) = (Monitor::new(&ring, &params), Monitor::new(&ring, &params));
        let mut outputs: Vec<f64> = start_levels(&ring).collect();
        let mut t = 0.0;
        for step in 0..40 {
            t += 1e-12 * (1.0 + (step % 3) as f64);
            let i = (step / 2) % 11;
            let j = (i + 1) % 11;
            let moved = if step % 5 == 4 {
                Vec::new()
            } else {
                outputs[i] = if step % 2 == 0 {
                    0.45
                } else {
                    1.0 - outputs[i].round()
                };
                outputs[j] += 0.01;
                vec![i + 1, j + 1]
            };
            let a = all.step(t, &outputs, None);
            let b = listed.step(t, &outputs, Some(&moved));
            assert_eq!(a, b, "step {step}");
        }
        assert!(all.transitions > 5, "{} transitions", all.transitions);
        assert_eq!(all.transitions, listed.transitions);
        assert_eq!(all.estimate.to_bits(), listed.estimate.to_bits());
        assert_eq!(
            all.last_transition.to_bits(),
            listed.last_transition.to_bits()
        );
        assert_eq!(all.high, listed.high);
        assert_eq!(all.values, listed.values);
        let bits = |m: &Monitor| {
            m.first_switch
                .iter()
                .map(|v| v.to_bits())
                .collect::<Vec<_>>()
        };
        assert_eq!(bits(&all), bits(&listed));
        assert_eq!(all.still_steps, listed.still_steps);
    }
}
