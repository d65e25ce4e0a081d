//! Time functions for independent sources, with their breakpoints.
//!
//! * `Constant(v)`: `w(t) = v`.
//! * `Pulse`: `low` until `delay`, a linear rise to `high` over `rise`, `high` for `width`, a
//!   linear fall over `fall`, `low` again; repeated every `period` when one is given.
//! * `PiecewiseLinear`: straight lines between `(t, v)` vertices, held flat before the first and
//!   after the last.
//! * `Sine`: `offset` until `delay`, then `offset + amplitude sin(2π f (t - delay) + phase)`
//!   with phase in radians.
//!
//! Breakpoints are the times where `w` has a corner (pulse corners, PWL vertices, a sine's
//! start); the integrator lands on each one and restarts its history there.

use std::f64::consts::PI;
use std::fmt;

/// A source's value as a function of time.
#[derive(Clone, Debug, PartialEq)]
pub enum Waveform {
    /// A constant value.
    Constant(f64),
    /// A trapezoidal pulse, single or periodic.
    Pulse(Pulse),
    /// Straight lines between vertices `(time, value)` with strictly increasing times.
    PiecewiseLinear(Vec<(f64, f64)>),
    /// A sinusoid.
    Sine(Sine),
}

/// Parameters of [`Waveform::Pulse`] (seconds and source units).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Pulse {
    /// Value outside the pulse.
    pub low: f64,
    /// Value on the pulse's flat top.
    pub high: f64,
    /// Time of the first rising edge's start.
    pub delay: f64,
    /// Rise time (> 0).
    pub rise: f64,
    /// Fall time (> 0).
    pub fall: f64,
    /// Time spent at `high` between rise and fall (>= 0).
    pub width: f64,
    /// Repetition period (>= rise + width + fall), or `None` for a single pulse.
    pub period: Option<f64>,
}

/// Parameters of [`Waveform::Sine`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sine {
    /// Value before `delay` and the sinusoid's mean.
    pub offset: f64,
    /// Peak deviation from `offset`.
    pub amplitude: f64,
    /// Frequency in hertz (> 0).
    pub frequency: f64,
    /// Start time of the oscillation.
    pub delay: f64,
    /// Phase at `delay`, in radians.
    pub phase: f64,
}

/// Why a waveform's parameters were refused.
#[derive(Clone, Debug, PartialEq)]
pub struct WaveformError(pub String);

impl fmt::Display for WaveformError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for WaveformError {}

fn need(ok: bool, what: &str) -> Result<(), WaveformError> {
    if ok {
        Ok(())
    } else {
        Err(WaveformError(what.to_string()))
    }
}

impl Waveform {
    /// A checked pulse: finite values, positive rise and fall, non-negative width and delay,
    /// and a period long enough to hold one pulse.
    pub fn pulse(p: Pulse) -> Result<Self, WaveformError> {
        let all = [p.low, p.high, p.delay, p.rise, p.fall, p.width];
        need(
            all.iter().all(|v| v.is_finite()),
            "pulse parameters must be finite",
        )?;
        need(
            p.rise > 0.0 && p.fall > 0.0,
            "pulse rise and fall times must be positive",
        )?;
        need(
            p.width >= 0.0 && p.delay >= 0.0,
            "pulse width and delay must not be negative",
        )?;
        if let Some(period) = p.period {
            need(
                period.is_finite() && period >= p.rise + p.width + p.fall,
                "pulse period must be at least rise + width + fall",
            )?;
        }
        Ok(Waveform::Pulse(p))
    }

    /// A checked piecewise-linear waveform: at least one vertex, finite values, strictly
    /// increasing times.
    pub fn piecewise_linear(points: Vec<(f64, f64)>) -> Result<Self, WaveformError> {
        need(
            !points.is_empty(),
            "a piecewise-linear waveform needs at least one vertex",
        )?;
        need(
            points.iter().all(|(t, v)| t.is_finite() && v.is_finite()),
            "piecewise-linear vertices must be finite",
        )?;
        need(
            points.windows(2).all(|w| w[1].0 > w[0].0),
            "piecewise-linear times must increase strictly",
        )?;
        Ok(Waveform::PiecewiseLinear(points))
    }

    /// A checked sinusoid: finite values and a positive frequency.
    pub fn sine(s: Sine) -> Result<Self, WaveformError> {
        let all = [s.offset, s.amplitude, s.frequency, s.delay, s.phase];
        need(
            all.iter().all(|v| v.is_finite()),
            "sine parameters must be finite",
        )?;
        need(s.frequency > 0.0, "sine frequency must be positive")?;
        Ok(Waveform::Sine(s))
    }

    /// The value at time `t`.
    pub fn value(&self, t: f64) -> f64 {
        match self {
            Waveform::Constant(v) => *v,
            Waveform::Pulse(p) => {
                if t <= p.delay {
                    return p.low;
                }
                let mut u = t - p.delay;
                if let Some(period) = p.period {
                    u %= period;
                }
                if u < p.rise {
                    p.low + (p.high - p.low) * u / p.rise
                } else if u <= p.rise + p.width {
                    p.high
                } else if u < p.rise + p.width + p.fall {
                    p.high + (p.low - p.high) * (u - p.rise - p.width) / p.fall
                } else {
                    p.low
                }
            }
            Waveform::PiecewiseLinear(points) => {
                let first = points[0];
                if t <= first.0 {
                    return first.1;
                }
                // The first vertex strictly after t; the segment before it holds t.
                let k = points.partition_point(|&(ti, _)| ti <= t);
                if k == points.len() {
                    return points[k - 1].1;
                }
                let (t0, v0) = points[k - 1];
                let (t1, v1) = points[k];
                v0 + (v1 - v0) * (t - t0) / (t1 - t0)
            }
            Waveform::Sine(s) => {
                if t <= s.delay {
                    s.offset + s.amplitude * s.phase.sin()
                } else {
                    s.offset
                        + s.amplitude * (2.0 * PI * s.frequency * (t - s.delay) + s.phase).sin()
                }
            }
        }
    }

    /// The first corner strictly after `after`, if any.
    pub fn next_breakpoint(&self, after: f64) -> Option<f64> {
        match self {
            Waveform::Constant(_) => None,
            Waveform::Pulse(p) => {
                let corners = [0.0, p.rise, p.rise + p.width, p.rise + p.width + p.fall];
                let first_start = p.delay;
                match p.period {
                    None => corners.iter().map(|c| first_start + c).find(|&t| t > after),
                    Some(period) => {
                        let k = ((after - first_start) / period).floor().max(0.0);
                        // Look in this period and the next; one of them has a corner after `after`.
                        for j in 0..3 {
                            let start = first_start + (k + j as f64) * period;
                            if let Some(t) = corners.iter().map(|c| start + c).find(|&t| t > after)
                            {
                                return Some(t);
                            }
                        }
                        None
                    }
                }
            }
            Waveform::PiecewiseLinear(points) => {
                let k = points.partition_point(|&(ti, _)| ti <= after);
                points.get(k).map(|p| p.0)
            }
            Waveform::Sine(s) => (s.delay > after).then_some(s.delay),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pulse_values_and_corners() {
        let w = Waveform::pulse(Pulse {
            low: 0.0,
            high: 1.0,
            delay: 1.0,
            rise: 1.0,
            fall: 2.0,
            width: 3.0,
            period: Some(10.0),
        })
        .unwrap();
        assert_eq!(w.value(0.5), 0.0);
        assert_eq!(w.value(1.5), 0.5);
        assert_eq!(w.value(4.0), 1.0);
        assert_eq!(w.value(6.0), 0.5);
        assert_eq!(w.value(11.5), 0.5);
        assert_eq!(w.next_breakpoint(0.0), Some(1.0));
        assert_eq!(w.next_breakpoint(1.0), Some(2.0));
        assert_eq!(w.next_breakpoint(5.5), Some(7.0));
        assert_eq!(w.next_breakpoint(7.0), Some(11.0));
    }

    #[test]
    fn pwl_interpolates_and_holds() {
        let w = Waveform::piecewise_linear(vec![(1.0, 0.0), (2.0, 2.0), (4.0, 0.0)]).unwrap();
        assert_eq!(w.value(0.0), 0.0);
        assert_eq!(w.value(1.5), 1.0);
        assert_eq!(w.value(3.0), 1.0);
        assert_eq!(w.value(9.0), 0.0);
        assert_eq!(w.next_breakpoint(1.0), Some(2.0));
        assert_eq!(w.next_breakpoint(4.0), None);
        assert!(Waveform::piecewise_linear(vec![(1.0, 0.0), (1.0, 1.0)]).is_err());
    }

    #[test]
    fn sine_starts_at_delay() {
        let w = Waveform::sine(Sine {
            offset: 1.0,
            amplitude: 2.0,
            frequency: 0.25,
            delay: 1.0,
            phase: 0.0,
        })
        .unwrap();
        assert_eq!(w.value(0.0), 1.0);
        assert!((w.value(2.0) - 3.0).abs() < 1e-12);
        assert_eq!(w.next_breakpoint(0.0), Some(1.0));
        assert_eq!(w.next_breakpoint(1.0), None);
    }
}
