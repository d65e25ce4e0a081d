//! The delay job: a file's `analysis delay { from = NODE, to = NODE, stop = TIME }`.
//!
//! A transient from the operating point (the file drives `from` with a pulse source) records
//! both nodes; `lamina_measure::waveform::path_delays` then finds each node's transitions
//! between the levels it settled at, pairs every output transition with the input transition
//! that caused it, and reads the path's polarity off the waveforms. The report gives
//!
//! * t_pHL (the output falls) and t_pLH (the output rises): each output transition's 50 %
//!   crossing minus its cause's 50 % crossing, both between their own settled levels, averaged
//!   over the transitions of that kind; negative when the output moves before the input
//!   reaches its midpoint (a fast gate driven by a slow input);
//! * t_p, their mean;
//! * the output's rise and fall times between the reference levels [`DelayParams::levels`]
//!   (default 10 % and 90 %) of each transition's own swing, from its settled level before to
//!   its settled level after;
//! * the polarity (inverting or non-inverting), how many transitions of each kind were
//!   measured, and warnings: fewer than two transitions of a kind, transitions skipped because
//!   the output had not settled, transitions without both reference crossings, a thinned
//!   record.
//!
//! A path whose pairs disagree with the polarity the run starts with (a delay longer than the
//! input's pulse, a path that is not unate), an output that never switches and an output that
//! switches without an input transition are refused with an error, not measured.
//!
//! # Steps
//! The run's largest step is `stop / 20000` ([`DelayParams::steps`]), the same for every delay
//! analysis of a file with the same `stop`, so that delays along a path add up to rounding
//! (`a -> c` is `a -> b` plus `b -> c` on the same transient). The truncation-error control
//! keeps each step's charge error small, but in a transition's slow tail (an RC's 90 % point,
//! where the slope is a fifth of the middle's) the step grows to the largest allowed, and a
//! small voltage error becomes a larger time error. On an RC with tau = 1 ns and 5 ns ramps
//! (10-90 % time 4.49 ns), steps of 100 ps (the earlier `stop / 2000`, 1/45 of the transition)
//! made the 10-90 % time 1.4e-3 long; steps of 10 ps (1/450), 1.4e-5; the error goes as the
//! step squared. When the largest step exceeds [`DelayParams::resolution`] (1/50) of the
//! shortest output transition, about where the error reaches 1e-3 (a `stop` far longer than
//! the edges), the report warns.
//!
//! # Memory
//! The step bound above puts at least `steps` (20,000) steps in a run; edges, pulse corners and the truncation-error control add
//! more, and nothing in the step control caps the count (a pulse period far below `stop` means
//! many corners). The run is therefore recorded with the engine's bounded
//! `Output::Decimated(DelayParams::max_samples)` (default 2²⁰ samples, 24 MiB for the two nodes
//! and the time). A run of fewer accepted steps is kept whole, sample for sample the same as
//! recording every step, so the figures are unchanged; the files tried take 20,000 to 25,000
//! steps. Only a longer run is thinned by the engine's halving rule; thinning does cost
//! accuracy (halving the record moved a t_pLH by 1.6e-4 of itself, quartering it by 1e-3), so
//! the report then carries a warning.

use crate::design::{self, Outcome};
use crate::error::JobError;
use lamina_engine::{OpParams, Output, Probe, Start, System, TransientParams};
use lamina_measure::waveform::{
    path_delays, Edge, PathParams, Polarity, TransitionParams, WaveformError,
};
use lamina_measure::Direction;
use lamina_netlist::{Analysis, AnalysisDecl, Design};
use std::path::Path;

/// Settings of the delay job.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DelayParams {
    /// Lower and upper reference levels of the output's rise and fall times, as fractions of
    /// each transition's swing between its settled levels (default `(0.1, 0.9)`; the CLI's
    /// `--levels 20,80` gives `(0.2, 0.8)`). Must satisfy `0 < low < high < 1`.
    pub levels: (f64, f64),
    /// Most samples the transient keeps (default 2²⁰; at least 4). See the module doc.
    pub max_samples: usize,
    /// Steps the run takes at least: the largest step is `stop / steps` (default 20,000). See
    /// the module doc.
    pub steps: usize,
    /// Largest step, as a fraction of the output's shortest transition time, beyond which the
    /// report warns that transition times may be off by 1e-3 or more (default 1/50).
    pub resolution: f64,
}

impl Default for DelayParams {
    fn default() -> Self {
        DelayParams {
            levels: (0.1, 0.9),
            max_samples: 1 << 20,
            steps: 20_000,
            resolution: 0.02,
        }
    }
}

impl DelayParams {
    /// Checks the levels and the sample cap, with a message naming the fault.
    pub fn check(&self) -> Result<(), String> {
        self.path().transitions.check().map_err(|e| e.to_string())?;
        if self.max_samples < 4 {
            return Err(format!(
                "the delay record keeps at least 4 samples, not {}",
                self.max_samples
            ));
        }
        if self.steps < 2 {
            return Err(format!(
                "the delay run takes at least 2 steps, not {}",
                self.steps
            ));
        }
        if !(self.resolution > 0.0 && self.resolution <= 1.0) {
            return Err(format!(
                "the step resolution must be a fraction in (0, 1], not {}",
                self.resolution
            ));
        }
        Ok(())
    }

    fn path(&self) -> PathParams {
        PathParams {
            transitions: TransitionParams {
                low: self.levels.0,
                high: self.levels.1,
                ..TransitionParams::default()
            },
            ..PathParams::default()
        }
    }
}

/// What the delay analysis measured (seconds).
#[derive(Clone, Debug, PartialEq)]
pub struct DelayReport {
    /// Output falling: mean delay from the causing input transition's 50 % crossing to the
    /// output's (negative when the output moves first).
    pub t_phl: Option<f64>,
    /// Output rising: the same.
    pub t_plh: Option<f64>,
    /// Mean of the two.
    pub t_p: Option<f64>,
    /// Output rise time between [`DelayParams::levels`] of each rising transition's swing.
    pub rise: Option<f64>,
    /// Output fall time, the same on falling transitions.
    pub fall: Option<f64>,
    /// Whether the output moves against the input, read off the waveforms.
    pub polarity: Polarity,
    /// Falling output transitions measured.
    pub falling: usize,
    /// Rising output transitions measured.
    pub rising: usize,
    /// Output transitions seen but not measured (not between settled levels).
    pub unsettled: usize,
    /// The reference levels used for the rise and fall times.
    pub levels: (f64, f64),
    /// What the figures rest on that a reader should know (fewer than two transitions of a
    /// kind, skipped transitions, a thinned record).
    pub warnings: Vec<String>,
    /// The recorded input and output, for `--out`: names and `(time, input, output)`.
    pub waves: DelayWaves,
    /// Each measured transition: output direction, input and output 50 % crossing times (s)
    /// and the delay.
    pub edges: Vec<lamina_measure::waveform::Edge>,
}

/// The input and output a delay run recorded.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct DelayWaves {
    /// Input node.
    pub from: String,
    /// Output node.
    pub to: String,
    /// Sample times (s).
    pub time: Vec<f64>,
    /// Input voltage (V).
    pub input: Vec<f64>,
    /// Output voltage (V).
    pub output: Vec<f64>,
}

fn mean(v: &[f64]) -> Option<f64> {
    (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
}

/// The job's words for a measurement that failed.
fn explain(e: WaveformError, from: &str, to: &str, stop: f64) -> String {
    match e {
        WaveformError::InputStill => format!(
            "analysis `delay`: node `{from}` never switches before t = {stop:e} s; drive it with a \
             pulse source whose edges fall before `stop`"
        ),
        WaveformError::OutputStill { swing, input_swing } => format!(
            "analysis `delay`: node `{to}` never switches before t = {stop:e} s (it moves by \
             {swing:.3e} V while `{from}` swings by {input_swing:.3e} V); check that the path \
             from `{from}` conducts and that `stop` leaves time for it"
        ),
        other => format!("analysis `delay` from `{from}` to `{to}`: {other}"),
    }
}

/// Runs `analysis delay { from, to, stop }` of `design` (see the module doc).
pub fn delay(
    design: Design,
    a: &AnalysisDecl,
    params: &DelayParams,
) -> Result<DelayReport, String> {
    params.check()?;
    let Analysis::Delay { from, to, stop } = &a.analysis else {
        return Err("analysis `delay` has no delay settings".into());
    };
    let (from, to, stop) = (from.as_str(), to.as_str(), *stop);
    let c = &design.circuit;
    let nf = c
        .find_node(from)
        .ok_or_else(|| format!("analysis `delay`: no node `{from}`"))?;
    let nt = c
        .find_node(to)
        .ok_or_else(|| format!("analysis `delay`: no node `{to}`"))?;
    let mut sys = System::new(design.circuit).map_err(|e| e.to_string())?;
    let max_step = stop / params.steps as f64;
    let mut tp = TransientParams::new(stop);
    tp.max_step = Some(max_step);
    tp.output = Output::Decimated(params.max_samples);
    let res = sys
        .transient(
            &tp,
            &Start::OperatingPoint(OpParams::default()),
            &[Probe::Voltage(nf), Probe::Voltage(nt)],
            None,
        )
        .map_err(|e| e.to_string())?;
    let path = path_delays(&res.time, &res.signals[0], &res.signals[1], &params.path())
        .map_err(|e| explain(e, from, to, stop))?;
    let mut warnings = Vec::new();
    let shortest = path
        .edges
        .iter()
        .filter_map(|e| e.duration)
        .fold(f64::INFINITY, f64::min);
    if max_step > params.resolution * shortest {
        warnings.push(format!(
            "the largest step (stop / {} = {max_step:.3e} s) is more than 1/{:.0} of the \
             shortest transition of `{to}` ({shortest:.3e} s), so its transition times may be \
             off by 1e-3 or more; shorten `stop`",
            params.steps,
            1.0 / params.resolution
        ));
    }
    let t = &res.time;
    let found = path.edges.len() + path.unsettled;
    if path.edges.is_empty() {
        return Err(format!(
            "analysis `delay`: none of the {found} transitions of `{to}` ran between settled \
             levels (the node had not settled before or after each, or `{from}` had not); \
             lengthen the input's pulse width and period, or `stop`"
        ));
    }
    let of = |dir: Direction| -> Vec<_> {
        path.edges
            .iter()
            .filter(|e| e.direction == dir)
            .copied()
            .collect()
    };
    let (falls, rises) = (of(Direction::Falling), of(Direction::Rising));
    let delays =
        |e: &[lamina_measure::waveform::Edge]| mean(&e.iter().map(|e| e.delay).collect::<Vec<_>>());
    let durations = |e: &[Edge]| -> Vec<f64> { e.iter().filter_map(|e| e.duration).collect() };
    let (thl, tlh) = (delays(&falls), delays(&rises));
    let (rise_times, fall_times) = (durations(&rises), durations(&falls));
    let (lo, hi) = (100.0 * params.levels.0, 100.0 * params.levels.1);
    for (n, kind, figures) in [
        (rises.len(), "rising", "t_pLH and the rise time"),
        (falls.len(), "falling", "t_pHL and the fall time"),
    ] {
        if n < 2 {
            warnings.push(format!(
                "{n} {kind} transition{} of `{to}` measured: {figures} rest on {}; lengthen `stop` \
                 or shorten the input's period so that at least two are seen",
                if n == 1 { "" } else { "s" },
                if n == 0 { "none (not reported)" } else { "a single one" },
            ));
        }
    }
    if path.unsettled > 0 {
        warnings.push(format!(
            "{} of {found} transitions of `{to}` not measured: the node (or `{from}` before it) \
             had not settled at its level before or after; lengthen the input's pulse width and \
             period, or `stop`",
            path.unsettled
        ));
    }
    let missing = rises.len() - rise_times.len() + falls.len() - fall_times.len();
    if missing > 0 {
        warnings.push(format!(
            "{missing} transitions of `{to}` have no {lo}-{hi} % time: the node does not cross \
             both levels between its settled levels"
        ));
    }
    let steps = res.stats.accepted + 1;
    if t.len() < steps {
        warnings.push(format!(
            "the run took {steps} steps and its record was thinned to {} samples; crossings are \
             interpolated between fewer samples",
            t.len()
        ));
    }
    Ok(DelayReport {
        t_phl: thl,
        t_plh: tlh,
        t_p: thl.zip(tlh).map(|(a, b)| 0.5 * (a + b)),
        rise: mean(&rise_times),
        fall: mean(&fall_times),
        polarity: path.polarity,
        falling: falls.len(),
        rising: rises.len(),
        unsettled: path.unsettled,
        levels: params.levels,
        warnings,
        edges: path.edges.clone(),
        waves: DelayWaves {
            from: from.to_string(),
            to: to.to_string(),
            time: res.time.clone(),
            input: res.signals[0].clone(),
            output: res.signals[1].clone(),
        },
    })
}

/// Runs every `analysis delay` of the file at `path` with `params` (each on a fresh
/// elaboration), as `lamina delay` does.
pub fn run_file(
    path: &Path,
    sets: &[(String, String)],
    params: &DelayParams,
) -> Result<Vec<(String, Outcome)>, JobError> {
    params.check().map_err(JobError::Usage)?;
    let mut design = Some(design::load(path, sets)?);
    let decls: Vec<AnalysisDecl> = design
        .iter()
        .flat_map(|d| d.analyses.iter())
        .filter(|a| a.kind == "delay")
        .cloned()
        .collect();
    if decls.is_empty() {
        return Err(JobError::Invalid(format!(
            "{} declares no `analysis delay`; add one such as \
             `analysis delay {{ from = in, to = out, stop = 4 ns }}`",
            path.display()
        )));
    }
    let mut out = Vec::with_capacity(decls.len());
    for a in &decls {
        let d = match design.take() {
            Some(d) => d,
            None => design::load(path, sets)?,
        };
        let report = delay(d, a, params).map_err(JobError::Analysis)?;
        out.push((a.kind.clone(), Outcome::Delay(report)));
    }
    Ok(out)
}
