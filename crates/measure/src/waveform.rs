//! Timing and power from sampled waveforms.
//!
//! * Transition times between reference levels of a swing and propagation delays between
//!   mid-level crossings of an input and an output, as IEEE Std 181-2011 (transitions, pulses
//!   and related waveforms) defines reference-level instants.
//! * Average power `P = (1/T) ∫ v i dt` over a window by the trapezoidal rule, and energy per
//!   cycle `P / f`.
//!
//! # Transitions between settled levels
//! [`transitions`] splits a waveform into plateaus and the transitions between them, and
//! measures each transition against the levels the waveform itself settled at on either side
//! (not against the extremes of the whole record, which overshoot and unfinished swings would
//! move):
//!
//! 1. Detection: with `lo`, `hi` the extremes of the record, a transition is registered when the
//!    waveform goes from at or below `lo + 0.25 (hi - lo)` to at or above `lo + 0.75 (hi - lo)`
//!    (or back); its *crossing* is the last crossing of the middle `(lo + hi) / 2` before that.
//!    The hysteresis keeps ripple and small glitches from counting as transitions.
//! 2. Plateaus: the stretches between successive crossings (the first from the start of the
//!    record, the last to its end). A plateau's level is where the waveform (linear between
//!    samples) spends most time: the band of width `2 b`, `b = settle_band (hi - lo)`, that
//!    holds the most time (a time-weighted histogram's mode, the state-level idea of
//!    IEEE Std 181-2011), then the time-weighted median of the waveform inside that band. A
//!    short overshoot or a slow ramp into the plateau does not move it.
//! 3. Settled: a waveform that holds a level spends nearly as much time within `± b / 4` of it
//!    as within `± b`; one still moving through it does not (a straight line spends a quarter
//!    as long, a rounded turning point half as long). A plateau is settled when the ratio of the
//!    two times is at least [`TransitionParams::settle_ratio`] (default 0.7). A transition is
//!    measured only when the plateaus on both sides are settled; an output that never settles
//!    between input edges has no 50 % or 10-90 % point to speak of.
//! 4. Figures of a settled transition from level `a` (before) to `b` (after): its *departure*,
//!    the last instant before the 50 % crossing at which the waveform was still within the band
//!    around `a`; its 50 % crossing of `(a + b) / 2`; and its transition time from the last
//!    crossing of `a + f₁ (b - a)` before the 50 % point to the first crossing of
//!    `a + f₂ (b - a)` after it, with `(f₁, f₂) = (low, high)` for a rise and
//!    `(1 - high, 1 - low)` for a fall (so `low`, `high` are fractions of the low-to-high swing
//!    either way).
//!
//! # Which input transition caused an output transition
//! [`path_delays`] pairs each output transition with its cause by causality, whatever the
//! path's polarity, the input's slope or its period: the latest input transition (at its 50 %
//! crossing) not already paired that comes at or before the output's departure; when the
//! output departs before any such input crossing (a fast gate driven by a slow input moves
//! before the input reaches its midpoint), the first unpaired input crossing after the
//! departure, and the delay is negative. The polarity is read off the start of the record
//! (an input that starts low and an output that starts high make an inverting path) and every
//! pair must agree with it; a pair that does not means the pairing cannot be trusted (for
//! example a delay longer than the input's pulse), and the measurement is refused.

use crate::period::{crossings, Direction};
use std::fmt;

/// 10-90 % rise times of every rising transition of `v` between `low` and `high`.
pub fn rise_times(t: &[f64], v: &[f64], low: f64, high: f64) -> Vec<f64> {
    transition_times(t, v, low, high, Direction::Rising)
}

/// 90-10 % fall times of every falling transition of `v` between `low` and `high`.
pub fn fall_times(t: &[f64], v: &[f64], low: f64, high: f64) -> Vec<f64> {
    transition_times(t, v, low, high, Direction::Falling)
}

fn transition_times(t: &[f64], v: &[f64], low: f64, high: f64, dir: Direction) -> Vec<f64> {
    let (l10, l90) = (low + 0.1 * (high - low), low + 0.9 * (high - low));
    let (first, second) = match dir {
        Direction::Rising => (l10, l90),
        Direction::Falling => (l90, l10),
    };
    let a = crossings(t, v, first, dir);
    let b = crossings(t, v, second, dir);
    // Pair each start with the first end after it, before the next start.
    let mut out = Vec::new();
    for (k, &ta) in a.iter().enumerate() {
        let next_start = a.get(k + 1).copied().unwrap_or(f64::INFINITY);
        if let Some(&tb) = b.iter().find(|&&tb| tb > ta && tb < next_start) {
            out.push(tb - ta);
        }
    }
    out
}

/// Propagation delays from each 50 % crossing of `input` in `input_dir` to the next 50 %
/// crossing of `output` in `output_dir` (before the input's next such crossing).
pub fn propagation_delays(
    t: &[f64],
    input: &[f64],
    output: &[f64],
    level: f64,
    input_dir: Direction,
    output_dir: Direction,
) -> Vec<f64> {
    let a = crossings(t, input, level, input_dir);
    let b = crossings(t, output, level, output_dir);
    let mut out = Vec::new();
    for (k, &ta) in a.iter().enumerate() {
        let next = a.get(k + 1).copied().unwrap_or(f64::INFINITY);
        if let Some(&tb) = b.iter().find(|&&tb| tb >= ta && tb < next) {
            out.push(tb - ta);
        }
    }
    out
}

/// How [`transitions`] finds and measures transitions (see the module doc).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TransitionParams {
    /// Lower reference level of the transition time, a fraction of the swing (default 0.1).
    pub low: f64,
    /// Upper reference level, a fraction of the swing (default 0.9).
    pub high: f64,
    /// Half-width `b` of the band around a settled level, a fraction of the record's whole
    /// swing (default 0.01). It also places the departure of a transition.
    pub settle_band: f64,
    /// Least ratio of the time within `± b / 4` of a plateau's level to the time within `± b`
    /// for the plateau to count as settled (default 0.7).
    pub settle_ratio: f64,
}

impl Default for TransitionParams {
    fn default() -> Self {
        TransitionParams {
            low: 0.1,
            high: 0.9,
            settle_band: 0.01,
            settle_ratio: 0.7,
        }
    }
}

impl TransitionParams {
    /// Checks `0 < low < high < 1`, `0 < settle_band < 0.25` and `0.25 < settle_ratio < 1`.
    pub fn check(&self) -> Result<(), WaveformError> {
        if !(self.low > 0.0 && self.low < self.high && self.high < 1.0) {
            return Err(WaveformError::Levels {
                low: self.low,
                high: self.high,
            });
        }
        if !(self.settle_band > 0.0 && self.settle_band < 0.25) {
            return Err(WaveformError::Band(self.settle_band));
        }
        if !(self.settle_ratio > 0.25 && self.settle_ratio < 1.0) {
            return Err(WaveformError::Ratio(self.settle_ratio));
        }
        Ok(())
    }
}

/// Settings of [`path_delays`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PathParams {
    /// How transitions are found and measured on both waveforms.
    pub transitions: TransitionParams,
    /// Smallest output swing that counts as switching, as a fraction of the input's swing
    /// (default 0.01): a smaller swing is taken for a node that does not switch, so that
    /// numerical ripple is never measured as transitions.
    pub min_output_swing: f64,
    /// Smallest input swing that counts as switching, in the waveforms' unit (default 1e-3:
    /// 1 mV for voltages).
    pub min_input_swing: f64,
}

impl Default for PathParams {
    fn default() -> Self {
        PathParams {
            transitions: TransitionParams::default(),
            min_output_swing: 0.01,
            min_input_swing: 1e-3,
        }
    }
}

/// Why transitions or delays could not be measured.
#[derive(Clone, Debug, PartialEq)]
pub enum WaveformError {
    /// The reference levels are not `0 < low < high < 1`.
    Levels {
        /// Lower level asked.
        low: f64,
        /// Upper level asked.
        high: f64,
    },
    /// The settling band is not in `(0, 0.25)`.
    Band(f64),
    /// The settling ratio is not in `(0.25, 1)`.
    Ratio(f64),
    /// The samples are unusable: lengths differ, times do not increase, or a value is not
    /// finite.
    Samples(String),
    /// The input makes no transition.
    InputStill,
    /// The output makes no transition: its whole swing, and the input's.
    OutputStill {
        /// Output swing (max - min) over the record.
        swing: f64,
        /// Input swing over the record.
        input_swing: f64,
    },
    /// An output transition has no input transition left to have caused it.
    Uncaused {
        /// The output transition's mid crossing.
        at: f64,
    },
    /// A pair disagrees with the polarity the record starts with.
    Polarity {
        /// The output transition's mid crossing.
        at: f64,
        /// Its direction.
        output: Direction,
        /// The direction of the input transition it was paired with.
        input: Direction,
        /// The polarity the start of the record shows.
        start: Polarity,
    },
}

impl fmt::Display for WaveformError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let dir = |d: &Direction| match d {
            Direction::Rising => "rises",
            Direction::Falling => "falls",
        };
        match self {
            WaveformError::Levels { low, high } => write!(
                f,
                "reference levels {low} and {high} are not fractions with 0 < low < high < 1"
            ),
            WaveformError::Band(b) => write!(f, "settling band {b} is not in (0, 0.25)"),
            WaveformError::Ratio(r) => write!(f, "settling ratio {r} is not in (0.25, 1)"),
            WaveformError::Samples(why) => f.write_str(why),
            WaveformError::InputStill => f.write_str("the input never switches"),
            WaveformError::OutputStill { swing, input_swing } => write!(
                f,
                "the output never switches: it moves by {swing:e} while the input swings by {input_swing:e}"
            ),
            WaveformError::Uncaused { at } => write!(
                f,
                "the output switches at t = {at:e} s with no input transition left to cause it; \
                 it does not follow the input"
            ),
            WaveformError::Polarity {
                at,
                output,
                input,
                start,
            } => write!(
                f,
                "the output {} at t = {at:e} s and the nearest cause is an input that {}, but the \
                 record starts {}; the delay may exceed the input's pulse width or the gap between \
                 pulses (lengthen them), or the path is not unate",
                dir(output),
                dir(input),
                start.as_str()
            ),
        }
    }
}

impl std::error::Error for WaveformError {}

/// Whether a path's output moves against its input or with it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Polarity {
    /// The output falls when the input rises.
    Inverting,
    /// The output follows the input.
    NonInverting,
}

impl Polarity {
    /// `"inverting"` or `"non-inverting"`.
    pub fn as_str(self) -> &'static str {
        match self {
            Polarity::Inverting => "inverting",
            Polarity::NonInverting => "non-inverting",
        }
    }
}

/// One transition of a waveform between two plateaus.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Transition {
    /// Which way it goes.
    pub direction: Direction,
    /// Crossing of the middle of the record's whole range, where the plateaus on either side
    /// are split (always found).
    pub crossing: f64,
    /// Figures against the settled levels; `None` when a plateau on either side did not settle.
    pub settled: Option<Settled>,
}

/// Figures of a transition between settled levels.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Settled {
    /// Level before (time-weighted median of the plateau before).
    pub before: f64,
    /// Level after.
    pub after: f64,
    /// Last instant before `mid` at which the waveform was within the band around `before`.
    pub departure: f64,
    /// Crossing of `(before + after) / 2`.
    pub mid: f64,
    /// Time between the reference levels (`low` to `high` of the swing for a rise, `high` to
    /// `low` for a fall); `None` when the waveform does not cross both within its plateaus.
    pub duration: Option<f64>,
}

impl Transition {
    /// The instant that stands for the transition as a cause: its 50 % crossing between
    /// settled levels, else its detection crossing.
    pub fn at(&self) -> f64 {
        self.settled.map_or(self.crossing, |s| s.mid)
    }

    /// The instant the transition began: its departure, else its detection crossing.
    pub fn start(&self) -> f64 {
        self.settled.map_or(self.crossing, |s| s.departure)
    }
}

/// Every transition of `v(t)`, in time order, measured as the module doc describes.
pub fn transitions(
    t: &[f64],
    v: &[f64],
    p: &TransitionParams,
) -> Result<Vec<Transition>, WaveformError> {
    p.check()?;
    check_samples(t, v)?;
    let (lo, hi) = extremes(v);
    let swing = hi - lo;
    // Values are finite (checked above), so plain comparisons suffice.
    if swing <= 0.0 {
        return Ok(Vec::new());
    }
    let found = detect(t, v, lo, swing);
    // Plateau bounds: the start, every crossing, the end.
    let mut bounds = Vec::with_capacity(found.len() + 2);
    bounds.push(t[0]);
    bounds.extend(found.iter().map(|&(_, c)| c));
    bounds.push(t[t.len() - 1]);
    let band = p.settle_band * swing;
    let plateaus: Vec<Option<f64>> = bounds
        .windows(2)
        .map(|w| {
            let (a, b) = (w[0], w[1]);
            if b <= a {
                return None;
            }
            let level = plateau_level(t, v, a, b, band)?;
            let wide = time_within(t, v, a, b, level - band, level + band);
            let narrow = time_within(t, v, a, b, level - 0.25 * band, level + 0.25 * band);
            (wide > 0.0 && narrow >= p.settle_ratio * wide).then_some(level)
        })
        .collect();
    Ok(found
        .iter()
        .enumerate()
        .map(|(i, &(direction, crossing))| {
            let settled = match (plateaus[i], plateaus[i + 1]) {
                (Some(before), Some(after)) => measure(
                    t,
                    v,
                    direction,
                    before,
                    after,
                    band,
                    crossing,
                    (bounds[i], bounds[i + 2]),
                    p,
                ),
                _ => None,
            };
            Transition {
                direction,
                crossing,
                settled,
            }
        })
        .collect())
}

/// Delays of a path measured from an input and an output waveform on the same time base.
#[derive(Clone, Debug, PartialEq)]
pub struct PathDelays {
    /// Whether the output moves against the input.
    pub polarity: Polarity,
    /// Every output transition measured (both it and its cause settled), in time order.
    pub edges: Vec<Edge>,
    /// Output transitions found but not measured because it or the input transition that
    /// caused it did not run between settled levels.
    pub unsettled: usize,
}

/// One output transition and the input transition that caused it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Edge {
    /// The output's direction (falling: a t_pHL; rising: a t_pLH).
    pub direction: Direction,
    /// The input's 50 % crossing.
    pub input_mid: f64,
    /// The output's 50 % crossing.
    pub output_mid: f64,
    /// `output_mid - input_mid`; negative when the output moved first.
    pub delay: f64,
    /// The output's transition time between the reference levels, when found.
    pub duration: Option<f64>,
}

/// For each output transition, the index of the input transition that caused it (see the
/// module doc), or `None` when every input transition is already paired.
pub fn causes(input: &[Transition], output: &[Transition]) -> Vec<Option<usize>> {
    let mut next = 0;
    output
        .iter()
        .map(|o| {
            let start = o.start();
            let before = input[next.min(input.len())..].partition_point(|i| i.at() <= start);
            let cause = if before > 0 {
                Some(next + before - 1)
            } else {
                (next < input.len()).then_some(next)
            };
            if let Some(j) = cause {
                next = j + 1;
            }
            cause
        })
        .collect()
}

/// Propagation delays and transition times of the path from `input` to `output`: transitions
/// of both, each output transition paired with its cause, the polarity checked on every pair.
pub fn path_delays(
    t: &[f64],
    input: &[f64],
    output: &[f64],
    p: &PathParams,
) -> Result<PathDelays, WaveformError> {
    check_samples(t, output)?;
    let ins = transitions(t, input, &p.transitions)?;
    let (ilo, ihi) = extremes(input);
    if ins.is_empty() || ihi - ilo < p.min_input_swing {
        return Err(WaveformError::InputStill);
    }
    let (olo, ohi) = extremes(output);
    let still = WaveformError::OutputStill {
        swing: ohi - olo,
        input_swing: ihi - ilo,
    };
    if ohi - olo < p.min_output_swing * (ihi - ilo) {
        return Err(still);
    }
    let outs = transitions(t, output, &p.transitions)?;
    if outs.is_empty() {
        return Err(still);
    }
    let start = if ins[0].direction == outs[0].direction {
        Polarity::NonInverting
    } else {
        Polarity::Inverting
    };
    let mut edges = Vec::new();
    let mut unsettled = 0;
    for (o, cause) in outs.iter().zip(causes(&ins, &outs)) {
        let Some(j) = cause else {
            return Err(WaveformError::Uncaused { at: o.at() });
        };
        let i = &ins[j];
        let polarity = if i.direction == o.direction {
            Polarity::NonInverting
        } else {
            Polarity::Inverting
        };
        if polarity != start {
            return Err(WaveformError::Polarity {
                at: o.at(),
                output: o.direction,
                input: i.direction,
                start,
            });
        }
        match (i.settled, o.settled) {
            (Some(si), Some(so)) => edges.push(Edge {
                direction: o.direction,
                input_mid: si.mid,
                output_mid: so.mid,
                delay: so.mid - si.mid,
                duration: so.duration,
            }),
            _ => unsettled += 1,
        }
    }
    Ok(PathDelays {
        polarity: start,
        edges,
        unsettled,
    })
}

fn check_samples(t: &[f64], v: &[f64]) -> Result<(), WaveformError> {
    if t.len() != v.len() {
        return Err(WaveformError::Samples(format!(
            "{} times but {} values",
            t.len(),
            v.len()
        )));
    }
    if t.len() < 2 {
        return Err(WaveformError::Samples(format!(
            "{} samples; at least 2 are needed",
            t.len()
        )));
    }
    if let Some(k) = (0..t.len()).find(|&k| !t[k].is_finite() || !v[k].is_finite()) {
        return Err(WaveformError::Samples(format!(
            "sample {k} is not finite (t = {}, v = {})",
            t[k], v[k]
        )));
    }
    if let Some(k) = (1..t.len()).find(|&k| t[k] <= t[k - 1]) {
        return Err(WaveformError::Samples(format!(
            "times do not increase at sample {k} (t = {:e} after {:e})",
            t[k],
            t[k - 1]
        )));
    }
    Ok(())
}

fn extremes(v: &[f64]) -> (f64, f64) {
    v.iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        })
}

/// Transitions found with hysteresis: direction and crossing of the record's middle.
fn detect(t: &[f64], v: &[f64], lo: f64, swing: f64) -> Vec<(Direction, f64)> {
    let (low, mid, high) = (lo + 0.25 * swing, lo + 0.5 * swing, lo + 0.75 * swing);
    let mut is_high = v[0] > mid;
    let mut out = Vec::new();
    for k in 1..v.len() {
        let dir = match (is_high, v[k]) {
            (false, x) if x >= high => Direction::Rising,
            (true, x) if x <= low => Direction::Falling,
            _ => continue,
        };
        // The last crossing of the middle before sample k, in this direction.
        let below = |x: f64| match dir {
            Direction::Rising => x < mid,
            Direction::Falling => x > mid,
        };
        let j = (0..k).rev().find(|&j| below(v[j]) || j == 0).unwrap_or(0);
        out.push((dir, segment_crossing(t, v, j, mid)));
        is_high = dir == Direction::Rising;
    }
    out
}

/// Where the segment from sample `j` to `j + 1` reaches `level`: the cubic through the samples
/// around it (as [`crossings`] finds it), else linear, clamped to the segment.
fn segment_crossing(t: &[f64], v: &[f64], j: usize, level: f64) -> f64 {
    let (a, b) = (j.saturating_sub(1), (j + 3).min(t.len()));
    let dir = if v[j + 1] >= v[j] {
        Direction::Rising
    } else {
        Direction::Falling
    };
    if let Some(&c) = crossings(&t[a..b], &v[a..b], level, dir)
        .iter()
        .find(|&&c| c >= t[j] && c <= t[j + 1])
    {
        return c;
    }
    let dv = v[j + 1] - v[j];
    if dv == 0.0 {
        return t[j];
    }
    (t[j] + (level - v[j]) * (t[j + 1] - t[j]) / dv).clamp(t[j], t[j + 1])
}

/// The linear pieces of `v(t)` inside `[a, b]`, ends interpolated, in time order.
fn pieces<'a>(
    t: &'a [f64],
    v: &'a [f64],
    a: f64,
    b: f64,
) -> impl DoubleEndedIterator<Item = [f64; 4]> + 'a {
    let first = t.partition_point(|&x| x <= a).saturating_sub(1);
    let last = t.partition_point(|&x| x < b).min(t.len() - 1);
    (first..last).filter_map(move |k| {
        let (t0, t1) = (t[k].max(a), t[k + 1].min(b));
        if t1 <= t0 {
            return None;
        }
        let at = |x: f64| v[k] + (v[k + 1] - v[k]) * (x - t[k]) / (t[k + 1] - t[k]);
        Some([t0, at(t0), t1, at(t1)])
    })
}

/// The part `[s1, s2]` of the unit parameter interval where the line from `v0` to `v1` lies
/// within `[lo, hi]`, or `None`.
fn inside(v0: f64, v1: f64, lo: f64, hi: f64) -> Option<(f64, f64)> {
    if v1 == v0 {
        return (v0 >= lo && v0 <= hi).then_some((0.0, 1.0));
    }
    let (sa, sb) = ((lo - v0) / (v1 - v0), (hi - v0) / (v1 - v0));
    let (s1, s2) = (sa.min(sb).max(0.0), sa.max(sb).min(1.0));
    (s2 >= s1).then_some((s1, s2))
}

/// Time `v(t)` (linear between samples) spends within `[lo, hi]` over `[a, b]`.
fn time_within(t: &[f64], v: &[f64], a: f64, b: f64, lo: f64, hi: f64) -> f64 {
    pieces(t, v, a, b)
        .filter_map(|[t0, v0, t1, v1]| inside(v0, v1, lo, hi).map(|(s1, s2)| (s2 - s1) * (t1 - t0)))
        .sum()
}

/// The level of the plateau `[a, b]` (see the module doc): the `2 band` wide band holding the
/// most time, from a histogram of bins `band / 4` wide, then the time-weighted median inside it.
fn plateau_level(t: &[f64], v: &[f64], a: f64, b: f64, band: f64) -> Option<f64> {
    let (lo, hi) = pieces(t, v, a, b).fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), p| {
        (l.min(p[1]).min(p[3]), h.max(p[1]).max(p[3]))
    });
    if lo > hi {
        return None;
    }
    // At most 4096 bins: a plateau far wider than the band gets coarser bins.
    let width = (0.25 * band).max((hi - lo) / 4096.0);
    let bins = (((hi - lo) / width).floor() as usize + 1).min(4097);
    let bin = |x: f64| (((x - lo) / width).floor().max(0.0) as usize).min(bins - 1);
    let mut time = vec![0.0; bins];
    for [t0, v0, t1, v1] in pieces(t, v, a, b) {
        let (x0, x1) = (v0.min(v1), v0.max(v1));
        let (k0, k1) = (bin(x0), bin(x1));
        if k0 == k1 {
            time[k0] += t1 - t0;
            continue;
        }
        // Time spreads evenly over the values a linear piece passes through.
        for (k, slot) in time.iter_mut().enumerate().take(k1 + 1).skip(k0) {
            let (e0, e1) = (lo + k as f64 * width, lo + (k + 1) as f64 * width);
            let overlap = (x1.min(e1) - x0.max(e0)).max(0.0);
            *slot += (t1 - t0) * overlap / (x1 - x0);
        }
    }
    let span = ((2.0 * band / width).round() as usize).clamp(1, bins);
    let mut sum: f64 = time[..span].iter().sum();
    let (mut best, mut best_sum) = (0, sum);
    for k in span..bins {
        sum += time[k] - time[k - span];
        if sum > best_sum {
            (best, best_sum) = (k + 1 - span, sum);
        }
    }
    let (w0, w1) = (lo + best as f64 * width, lo + (best + span) as f64 * width);
    // The median of the time inside the band, by bisection on the level.
    let half = 0.5 * time_within(t, v, a, b, w0, w1);
    let (mut l, mut h) = (w0, w1);
    for _ in 0..100 {
        let m = 0.5 * (l + h);
        if m <= l || m >= h {
            break;
        }
        if time_within(t, v, a, b, w0, m) < half {
            l = m;
        } else {
            h = m;
        }
    }
    Some(0.5 * (l + h))
}

/// Crossings of `level` in `dir` inside `[a, b]`.
fn crossings_within(t: &[f64], v: &[f64], level: f64, dir: Direction, a: f64, b: f64) -> Vec<f64> {
    let first = t.partition_point(|&x| x < a).saturating_sub(2);
    let last = (t.partition_point(|&x| x <= b) + 2).min(t.len());
    crossings(&t[first..last], &v[first..last], level, dir)
        .into_iter()
        .filter(|&c| c >= a && c <= b)
        .collect()
}

/// Departure, 50 % crossing and transition time of a transition between settled levels,
/// detected at `crossing` and searched within `(from, to)`: the start of the plateau before
/// and the end of the one after.
#[allow(clippy::too_many_arguments)]
fn measure(
    t: &[f64],
    v: &[f64],
    dir: Direction,
    before: f64,
    after: f64,
    band: f64,
    crossing: f64,
    (from, to): (f64, f64),
    p: &TransitionParams,
) -> Option<Settled> {
    let rising = dir == Direction::Rising;
    if (after > before) != rising {
        return None;
    }
    let half = 0.5 * (before + after);
    // The 50 % crossing nearest the detection crossing (ringing or a glitch elsewhere in the
    // plateaus does not count), and the last instant before it inside the band.
    let mid = crossings_within(t, v, half, dir, from, to)
        .into_iter()
        .min_by(|a, b| (a - crossing).abs().total_cmp(&(b - crossing).abs()))?;
    let departure = pieces(t, v, from, mid).rev().find_map(|[t0, v0, t1, v1]| {
        inside(v0, v1, before - band, before + band).map(|(_, s2)| t0 + s2 * (t1 - t0))
    })?;
    let (f1, f2) = if rising {
        (p.low, p.high)
    } else {
        (1.0 - p.high, 1.0 - p.low)
    };
    let (l1, l2) = (
        before + f1 * (after - before),
        before + f2 * (after - before),
    );
    let t1 = crossings_within(t, v, l1, dir, from, mid).last().copied();
    // The end level is searched after the 50 % point, within the plateau after.
    let t2 = crossings_within(t, v, l2, dir, mid, to).first().copied();
    Some(Settled {
        before,
        after,
        departure,
        mid,
        duration: t1.zip(t2).map(|(a, b)| b - a),
    })
}

/// Mean of `p(t)` over `[t0, t1]` by the trapezoidal rule on the samples (linear between
/// samples, the window's ends interpolated).
pub fn mean_over(t: &[f64], p: &[f64], t0: f64, t1: f64) -> Option<f64> {
    if t1.is_nan() || t0.is_nan() || t1 <= t0 || t.len() < 2 {
        return None;
    }
    let at = |x: f64| -> f64 {
        let k = t.partition_point(|&ti| ti <= x).clamp(1, t.len() - 1);
        let (ta, tb) = (t[k - 1], t[k]);
        if tb > ta {
            p[k - 1] + (p[k] - p[k - 1]) * (x - ta) / (tb - ta)
        } else {
            p[k]
        }
    };
    if t0 < t[0] || t1 > t[t.len() - 1] {
        return None;
    }
    let mut sum = 0.0;
    let mut prev_t = t0;
    let mut prev_p = at(t0);
    for (k, &tk) in t.iter().enumerate() {
        if tk <= t0 {
            continue;
        }
        if tk >= t1 {
            break;
        }
        sum += 0.5 * (prev_p + p[k]) * (tk - prev_t);
        prev_t = tk;
        prev_p = p[k];
    }
    sum += 0.5 * (prev_p + at(t1)) * (t1 - prev_t);
    Some(sum / (t1 - t0))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A trapezoidal pulse train with known edges: rise 10-90 % of a 100 ps linear ramp is 80 ps,
    /// fall of a 50 ps ramp is 40 ps; a copy delayed by 30 ps has 30 ps propagation delay.
    #[test]
    fn transitions_and_delays_of_a_known_pulse_train() {
        let dt = 1e-12;
        let t: Vec<f64> = (0..4000).map(|i| i as f64 * dt).collect();
        let pulse = |t: f64| {
            let u = t % 1e-9;
            if u < 100e-12 {
                u / 100e-12
            } else if u < 500e-12 {
                1.0
            } else if u < 550e-12 {
                1.0 - (u - 500e-12) / 50e-12
            } else {
                0.0
            }
        };
        let v: Vec<f64> = t.iter().map(|&x| pulse(x)).collect();
        let w: Vec<f64> = t
            .iter()
            .map(|&x| 1.0 - pulse((x - 30e-12).max(0.0)))
            .collect();
        for r in rise_times(&t, &v, 0.0, 1.0) {
            assert!((r - 80e-12).abs() < 1e-14, "{r:e}");
        }
        for f in fall_times(&t, &v, 0.0, 1.0) {
            assert!((f - 40e-12).abs() < 1e-14, "{f:e}");
        }
        let d = propagation_delays(&t, &v, &w, 0.5, Direction::Rising, Direction::Falling);
        assert!(d.len() >= 3);
        for x in d {
            assert!((x - 30e-12).abs() < 1e-14, "{x:e}");
        }
    }

    /// The mean of sin² over whole periods is 1/2; of a linear ramp over a window, its midpoint.
    #[test]
    fn window_means() {
        let t: Vec<f64> = (0..=10000).map(|i| i as f64 * 1e-4).collect();
        let p: Vec<f64> = t
            .iter()
            .map(|&x| (2.0 * std::f64::consts::PI * 3.0 * x).sin().powi(2))
            .collect();
        let m = mean_over(&t, &p, 0.1, 0.1 + 2.0 / 3.0).unwrap();
        assert!((m - 0.5).abs() < 1e-6, "{m}");
        let ramp: Vec<f64> = t.clone();
        assert!((mean_over(&t, &ramp, 0.2, 0.6).unwrap() - 0.4).abs() < 1e-12);
        assert!(mean_over(&t, &ramp, 0.6, 0.2).is_none());
    }

    /// A trapezoidal pulse: `low` until `delay`, a linear rise over `rise`, `high` for `width`,
    /// a linear fall over `fall`, repeated every `period`.
    fn trapezoid(t: f64, delay: f64, rise: f64, width: f64, fall: f64, period: f64) -> f64 {
        if t <= delay {
            return 0.0;
        }
        let u = (t - delay) % period;
        if u < rise {
            u / rise
        } else if u <= rise + width {
            1.0
        } else if u < rise + width + fall {
            1.0 - (u - rise - width) / fall
        } else {
            0.0
        }
    }

    fn grid(n: usize, dt: f64) -> Vec<f64> {
        (0..n).map(|i| i as f64 * dt).collect()
    }

    /// Slow linear ramps with short flat parts (ramps of 400 ps and 300 ps, flats of 100 ps and
    /// 200 ps, sampled every 1 ps): the plateau levels are the flat values, not pulled towards
    /// the ramps; the 50 % points are the ramps' midpoints and the 10-90 % times are 0.8 of
    /// the ramps, as the geometry of a straight line gives. A 30 % overshoot for 20 ps at the
    /// top of each rise moves none of it.
    #[test]
    fn slow_ramps_and_overshoot_do_not_move_the_settled_levels() {
        let t = grid(4000, 1e-12);
        let v: Vec<f64> = t
            .iter()
            .map(|&x| {
                let base = trapezoid(x, 50e-12, 400e-12, 100e-12, 300e-12, 1000e-12);
                let u = (x - 50e-12).rem_euclid(1000e-12);
                if x > 50e-12 && (400e-12..420e-12).contains(&u) {
                    base + 0.3
                } else {
                    base
                }
            })
            .collect();
        let tr = transitions(&t, &v, &TransitionParams::default()).unwrap();
        assert_eq!(tr.len(), 8, "{tr:?}");
        for (k, x) in tr.iter().enumerate() {
            let s = x
                .settled
                .unwrap_or_else(|| panic!("transition {k} unsettled: {x:?}"));
            let cycle = 50e-12 + (k / 2) as f64 * 1000e-12;
            let (mid, duration) = if k % 2 == 0 {
                (cycle + 200e-12, 0.8 * 400e-12)
            } else {
                (cycle + 650e-12, 0.8 * 300e-12)
            };
            let (before, after) = if k % 2 == 0 { (0.0, 1.0) } else { (1.0, 0.0) };
            assert!(
                (s.before - before).abs() < 1e-9 && (s.after - after).abs() < 1e-9,
                "{s:?}"
            );
            assert!((s.mid - mid).abs() < 1e-16, "{k}: {:e} vs {mid:e}", s.mid);
            let d = s.duration.unwrap();
            assert!((d - duration).abs() < 1e-16, "{k}: {d:e} vs {duration:e}");
        }
        // Reference levels 20 % and 80 %: 0.6 of each ramp.
        let p = TransitionParams {
            low: 0.2,
            high: 0.8,
            ..TransitionParams::default()
        };
        let tr = transitions(&t, &v, &p).unwrap();
        let d = tr[1].settled.unwrap().duration.unwrap();
        assert!((d - 0.6 * 300e-12).abs() < 1e-16, "{d:e}");
    }

    /// Input: a 1 ns-period pulse with 100 ps ramps. Outputs built from it with known delays:
    /// a non-inverting copy 250 ps late (longer than the gap between the input's edges of
    /// opposite kind would allow a "next crossing" rule to see), an inverting copy 40 ps late,
    /// and an inverting copy 30 ps early (it moves before the input reaches its midpoint). Each
    /// pairs with the input edge that caused it, with the polarity read off the waveforms.
    #[test]
    fn each_output_edge_pairs_with_its_cause() {
        let t = grid(6000, 1e-12);
        let input: Vec<f64> = t
            .iter()
            .map(|&x| trapezoid(x, 100e-12, 100e-12, 200e-12, 100e-12, 1000e-12))
            .collect();
        let shifted = |shift: f64, invert: bool| -> Vec<f64> {
            t.iter()
                .map(|&x| {
                    let w = trapezoid(x - shift, 100e-12, 100e-12, 200e-12, 100e-12, 1000e-12);
                    if invert {
                        1.0 - w
                    } else {
                        w
                    }
                })
                .collect()
        };
        for (shift, invert, polarity) in [
            (250e-12, false, Polarity::NonInverting),
            (40e-12, true, Polarity::Inverting),
            (-30e-12, true, Polarity::Inverting),
        ] {
            let out = shifted(shift, invert);
            let d = path_delays(&t, &input, &out, &PathParams::default()).unwrap();
            assert_eq!(d.polarity, polarity, "shift {shift:e}");
            assert!(d.edges.len() >= 10, "{d:?}");
            for e in &d.edges {
                assert!((e.delay - shift).abs() < 1e-16, "{shift:e}: {e:?}");
                assert!((e.duration.unwrap() - 80e-12).abs() < 1e-16, "{e:?}");
            }
        }
    }

    /// A non-inverting copy delayed by more than the input's whole pulse (450 ps against 300 ps
    /// between the input's rising and falling midpoints): the latest input edge before each
    /// output edge is of the wrong kind, which contradicts the polarity the record starts with;
    /// the measurement is refused rather than reported as an inverting path of 150 ps.
    #[test]
    fn a_delay_longer_than_the_pulse_is_refused() {
        let t = grid(6000, 1e-12);
        let w = |x: f64| trapezoid(x, 100e-12, 20e-12, 280e-12, 20e-12, 1000e-12);
        let input: Vec<f64> = t.iter().map(|&x| w(x)).collect();
        let out: Vec<f64> = t.iter().map(|&x| w(x - 450e-12)).collect();
        let e = path_delays(&t, &input, &out, &PathParams::default()).unwrap_err();
        assert!(
            matches!(
                e,
                WaveformError::Polarity {
                    start: Polarity::NonInverting,
                    ..
                }
            ),
            "{e:?}"
        );
    }

    /// An RC low-pass with tau = 1 ns driven by a square wave of 2 ns half-period never
    /// settles: v(t) = 1 - (1 - v0) e^(-t/tau) and back, turning at 0.12 and 0.88 without ever
    /// holding a level. No transition of it is measured; the input's all are.
    #[test]
    fn an_output_that_never_settles_is_not_measured() {
        let (tau, dt) = (1e-9, 1e-12);
        let t = grid(20000, dt);
        let input: Vec<f64> = t
            .iter()
            .map(|&x| trapezoid(x, 0.5e-9, 1e-12, 2e-9 - 1e-12, 1e-12, 4e-9))
            .collect();
        let mut out = vec![0.0; t.len()];
        for k in 1..t.len() {
            // Exact update for a piecewise-constant input over each step.
            out[k] = input[k] + (out[k - 1] - input[k]) * (-dt / tau).exp();
        }
        let d = path_delays(&t, &input, &out, &PathParams::default()).unwrap();
        assert!(d.edges.is_empty(), "{d:?}");
        assert!(d.unsettled >= 8, "{d:?}");
        let ins = transitions(&t, &input, &TransitionParams::default()).unwrap();
        assert!(ins.iter().all(|x| x.settled.is_some()), "{ins:?}");
    }

    /// A node that only ripples (1 µV on a 1 V input swing) is not a switching output, nor a
    /// switching input (below the 1 mV default floor).
    #[test]
    fn ripple_is_not_switching_and_bad_settings_are_refused() {
        let t = grid(3000, 1e-12);
        let input: Vec<f64> = t
            .iter()
            .map(|&x| trapezoid(x, 100e-12, 50e-12, 400e-12, 50e-12, 1000e-12))
            .collect();
        let ripple: Vec<f64> = t.iter().map(|&x| 1.0 + 1e-6 * (x * 1e11).sin()).collect();
        assert!(matches!(
            path_delays(&t, &input, &ripple, &PathParams::default()),
            Err(WaveformError::OutputStill { .. })
        ));
        assert_eq!(
            path_delays(&t, &ripple, &input, &PathParams::default()),
            Err(WaveformError::InputStill)
        );
        let bad = TransitionParams {
            low: 0.9,
            high: 0.1,
            ..TransitionParams::default()
        };
        assert!(matches!(
            transitions(&t, &input, &bad),
            Err(WaveformError::Levels { .. })
        ));
        assert!(matches!(
            transitions(&t[..10], &input, &TransitionParams::default()),
            Err(WaveformError::Samples(_))
        ));
    }
}
