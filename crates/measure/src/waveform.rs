//! Timing and power from sampled waveforms.
//!
//! * Transition times between the 10 % and 90 % reference levels of a swing and propagation
//!   delays between 50 % crossings of an input and an output, as IEEE Std 181-2011 (transitions,
//!   pulses and related waveforms) defines reference-level instants.
//! * Average power `P = (1/T) ∫ v i dt` over a window by the trapezoidal rule, and energy per
//!   cycle `P / f`.

use crate::period::{crossings, Direction};

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
}
