//! Level crossings and oscillation periods.
//!
//! Crossing instants follow the mid-reference-level idea of IEEE Std 181-2011 (transitions,
//! pulses and related waveforms): the time a waveform passes a reference level, located
//! between samples by interpolation. Here a cubic through the four samples around the
//! crossing is solved by bisection (linear interpolation where fewer samples exist), so the
//! error is well below the sampling step.

use std::fmt;

/// Which crossings to report.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Direction {
    /// From below the level to at or above it.
    Rising,
    /// From above the level to at or below it.
    Falling,
}

/// Times at which `v(t)` crosses `level` in `direction`. `t` must increase.
pub fn crossings(t: &[f64], v: &[f64], level: f64, direction: Direction) -> Vec<f64> {
    let n = t.len().min(v.len());
    let mut out = Vec::new();
    let s = match direction {
        Direction::Rising => 1.0,
        Direction::Falling => -1.0,
    };
    for k in 0..n.saturating_sub(1) {
        let (a, b) = (s * (v[k] - level), s * (v[k + 1] - level));
        if a < 0.0 && b >= 0.0 {
            out.push(locate(t, v, k, level));
        }
    }
    out
}

fn locate(t: &[f64], v: &[f64], k: usize, level: f64) -> f64 {
    let linear = t[k] + (level - v[k]) * (t[k + 1] - t[k]) / (v[k + 1] - v[k]);
    if k == 0 || k + 2 >= t.len().min(v.len()) {
        return linear;
    }
    let ts = [t[k - 1], t[k], t[k + 1], t[k + 2]];
    let vs = [v[k - 1], v[k], v[k + 1], v[k + 2]];
    let cubic = |x: f64| -> f64 {
        let mut sum = 0.0;
        for i in 0..4 {
            let mut w = vs[i];
            for j in 0..4 {
                if i != j {
                    w *= (x - ts[j]) / (ts[i] - ts[j]);
                }
            }
            sum += w;
        }
        sum - level
    };
    let (mut lo, mut hi) = (t[k], t[k + 1]);
    let (flo, fhi) = (cubic(lo), cubic(hi));
    if !((flo < 0.0 && fhi >= 0.0) || (flo > 0.0 && fhi <= 0.0)) {
        return linear;
    }
    let rising = flo < 0.0;
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if (cubic(mid) < 0.0) == rising {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// An oscillation's period from successive crossings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PeriodEstimate {
    /// Mean period of the periods used, in seconds.
    pub period: f64,
    /// `1 / period`, in hertz.
    pub frequency: f64,
    /// Whole periods used.
    pub periods_used: usize,
    /// Periods discarded as start-up.
    pub periods_discarded: usize,
    /// `(max - min) / mean` of the individual periods used.
    pub spread: f64,
}

/// Why a period could not be measured.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PeriodError(pub String);

impl fmt::Display for PeriodError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for PeriodError {}

/// Period of `v(t)` from its rising crossings of `level`, discarding the first `discard`
/// periods and averaging the rest: `T = (c_last - c_first) / k` over the `k` periods kept.
pub fn period(
    t: &[f64],
    v: &[f64],
    level: f64,
    discard: usize,
) -> Result<PeriodEstimate, PeriodError> {
    let c = crossings(t, v, level, Direction::Rising);
    if c.len() < discard + 2 {
        return Err(PeriodError(format!(
            "found {} rising crossings of {level} but need at least {} ({} discarded plus one whole period)",
            c.len(),
            discard + 2,
            discard
        )));
    }
    let kept = &c[discard..];
    let k = kept.len() - 1;
    let mean = (kept[k] - kept[0]) / k as f64;
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for w in kept.windows(2) {
        let p = w[1] - w[0];
        lo = lo.min(p);
        hi = hi.max(p);
    }
    Ok(PeriodEstimate {
        period: mean,
        frequency: 1.0 / mean,
        periods_used: k,
        periods_discarded: discard,
        spread: (hi - lo) / mean,
    })
}

/// The first start-up count `d >= min_discard` after which `measure` successive periods agree
/// within `tol` (`(max - min) / mean`), from the rising crossings of `level`. `None` while the
/// waveform has not settled (or has too few periods).
pub fn settled_discard(
    t: &[f64],
    v: &[f64],
    level: f64,
    min_discard: usize,
    measure: usize,
    tol: f64,
) -> Option<usize> {
    let c = crossings(t, v, level, Direction::Rising);
    let periods: Vec<f64> = c.windows(2).map(|w| w[1] - w[0]).collect();
    let m = measure.max(1);
    (min_discard..=periods.len().checked_sub(m)?).find(|&d| {
        let w = &periods[d..d + m];
        let (lo, hi) = w
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &p| {
                (a.min(p), b.max(p))
            });
        let mean = w.iter().sum::<f64>() / m as f64;
        (hi - lo) / mean <= tol
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A sampled sine of known frequency: crossings and period to well below the sampling step.
    #[test]
    fn period_of_a_coarsely_sampled_sine() {
        let f0 = 3.0e9;
        let dt = 1.0 / f0 / 17.3;
        let t: Vec<f64> = (0..400).map(|i| i as f64 * dt).collect();
        let v: Vec<f64> = t
            .iter()
            .map(|&t| 0.5 + 0.5 * (2.0 * std::f64::consts::PI * f0 * t + 0.3).sin())
            .collect();
        let est = period(&t, &v, 0.5, 2).unwrap();
        assert!((est.frequency / f0 - 1.0).abs() < 1e-5, "{est:?}");
        assert!(est.spread < 1e-4);
        assert_eq!(est.periods_discarded, 2);
        let down = crossings(&t, &v, 0.5, Direction::Falling);
        assert!(!down.is_empty());
    }

    /// A chirp that settles: periods shrink to a constant; settling is found where they agree.
    #[test]
    fn settling_is_detected_where_periods_agree() {
        // Periods 2.0, 1.5, 1.25, 1.125, then 1.0 for ever (a square wave with those edges).
        let mut edges = vec![0.0];
        for p in [2.0, 1.5, 1.25, 1.125, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0] {
            let last = *edges.last().unwrap();
            edges.push(last + p);
        }
        let t: Vec<f64> = (0..120_000).map(|i| i as f64 * 1e-4).collect();
        let v: Vec<f64> = t
            .iter()
            .map(|&x| {
                let k = edges.partition_point(|&e| e <= x).max(1) - 1;
                let next = edges.get(k + 1).copied().unwrap_or(f64::INFINITY);
                if x - edges[k] < 0.5 * (next - edges[k]).min(1.0) {
                    1.0
                } else {
                    0.0
                }
            })
            .collect();
        // The wave starts high, so the first rising crossing is at t = 2: the periods seen are
        // 1.5, 1.25, 1.125, 1.0, ... and the first three that agree start at index 3.
        assert_eq!(settled_discard(&t, &v, 0.5, 0, 3, 1e-3), Some(3));
        assert_eq!(settled_discard(&t, &v, 0.5, 5, 3, 1e-3), Some(5));
        assert_eq!(settled_discard(&t, &v, 0.5, 0, 30, 1e-3), None);
    }

    #[test]
    fn too_few_crossings_is_an_error() {
        let t = [0.0, 1.0, 2.0];
        let v = [0.0, 1.0, 0.0];
        assert!(period(&t, &v, 0.5, 0).is_err());
    }
}
