//! The bounded recording modes of a transient run: `Output::Decimated` keeps at most its bound
//! however long the run, on the documented grid (every stride-th accepted step, stride a power
//! of two, plus the last step), and `Output::Streaming` keeps nothing while the observer still
//! sees every step.

use lamina_engine::elements::{Capacitor, Inductor};
use lamina_engine::{
    Circuit, Control, Decimator, EngineError, Output, Probe, Start, Stepping, System,
    TransientParams, TransientResult,
};

/// An LC tank (1 nF, 1 µH, period about 199 ns) started at 1 V, run with a fixed step of
/// `stop / steps`, recorded with `output`.
fn tank(output: Output, steps: usize) -> Result<TransientResult, EngineError> {
    let mut c = Circuit::new();
    let top = c.node("top");
    c.add("c", Capacitor::new(1e-9), &[top, Circuit::GROUND])
        .unwrap();
    c.add("l", Inductor::new(1e-6), &[top, Circuit::GROUND])
        .unwrap();
    let mut sys = System::new(c).unwrap();
    let stop = 1e-5;
    let mut p = TransientParams::new(stop);
    p.stepping = Stepping::Fixed(stop / steps as f64);
    p.output = output;
    let top = sys.find_node("top").unwrap();
    sys.transient(
        &p,
        &Start::Given(vec![(top, 1.0)]),
        &[Probe::Voltage(top)],
        None,
    )
}

/// Checks a decimated recording against the full one: at most `max` samples, t = 0 first, the
/// run's last step last, and every other sample the full recording's sample at a multiple of
/// one power-of-two stride.
fn check_against_full(max: usize, full: &TransientResult, dec: &TransientResult) {
    let n = dec.time.len();
    assert!(n <= max, "{n} samples kept, bound {max}");
    assert_eq!(dec.signals[0].len(), n);
    assert_eq!(dec.time[0], 0.0);
    assert_eq!(dec.time[n - 1], *full.time.last().unwrap());
    assert_eq!(dec.signals[0][n - 1], *full.signals[0].last().unwrap());
    let index = |t: f64| full.time.iter().position(|&x| x == t).unwrap();
    let stride = if n > 2 { index(dec.time[1]) } else { 1 };
    assert!(stride.is_power_of_two(), "stride {stride}");
    for k in 0..n - 1 {
        let i = index(dec.time[k]);
        assert_eq!(i, k * stride, "sample {k}");
        assert_eq!(dec.signals[0][k], full.signals[0][i]);
    }
    // The grid is as dense as the bound allows: halving it once more would have fitted.
    if full.time.len() > max {
        assert!(n >= max / 2, "{n} samples kept of {}", full.time.len());
    }
}

#[test]
fn a_long_decimated_run_keeps_no_more_than_its_bound() {
    let steps = 100_000;
    let full = tank(Output::EveryStep, steps).unwrap();
    assert_eq!(full.stats.accepted, steps);
    for max in [2, 3, 7, 1000, 4096] {
        let dec = tank(Output::Decimated(max), steps).unwrap();
        assert_eq!(
            dec.stats, full.stats,
            "the recording does not change the run"
        );
        check_against_full(max, &full, &dec);
    }
}

#[test]
fn a_decimated_run_that_fits_its_bound_keeps_every_step() {
    let full = tank(Output::EveryStep, 500).unwrap();
    let dec = tank(Output::Decimated(501), 500).unwrap();
    assert_eq!(dec.time, full.time);
    assert_eq!(dec.signals, full.signals);
}

#[test]
fn a_streaming_run_stores_nothing_and_shows_every_step() {
    let mut c = Circuit::new();
    let top = c.node("top");
    c.add("c", Capacitor::new(1e-9), &[top, Circuit::GROUND])
        .unwrap();
    c.add("l", Inductor::new(1e-6), &[top, Circuit::GROUND])
        .unwrap();
    let mut sys = System::new(c).unwrap();
    let mut p = TransientParams::new(1e-5);
    p.output = Output::Streaming;
    let (mut seen, mut last_t, mut peak) = (0usize, 0.0, 0.0f64);
    let mut observer = |t: f64, v: &[f64], _: lamina_engine::Moved<'_>| {
        assert!(t > last_t);
        seen += 1;
        last_t = t;
        peak = peak.max(v[0].abs());
        Control::Continue
    };
    let res = sys
        .transient(
            &p,
            &Start::Given(vec![(top, 1.0)]),
            &[Probe::Voltage(top)],
            Some(&mut observer),
        )
        .unwrap();
    assert!(res.time.is_empty());
    assert_eq!(res.signals, vec![Vec::<f64>::new()]);
    assert_eq!(seen, res.stats.accepted);
    assert!(seen > 1000, "{seen} steps");
    assert_eq!(last_t, res.stats.end_time);
    // The tank keeps its 1 V amplitude (trapezoidal rule), so the observer saw real values.
    assert!((peak - 1.0).abs() < 1e-2, "peak {peak}");
}

#[test]
fn a_decimated_bound_below_two_is_refused() {
    for max in [0, 1] {
        match tank(Output::Decimated(max), 10) {
            Err(EngineError::Invalid(msg)) => assert!(msg.contains("at least 2"), "{msg}"),
            other => panic!("expected a refusal, got {other:?}"),
        }
    }
}

/// The decimator on its own: at most `max` samples for every count pushed, the first and the
/// last sample kept, the rest on one power-of-two grid; short signal lists pad with NaN.
#[test]
fn the_decimator_keeps_its_bound_for_any_count() {
    for max in [0, 1, 2, 3, 5, 64] {
        for count in [1u64, 2, 3, 4, 5, 63, 64, 65, 129, 1000, 4097] {
            let mut d = Decimator::new(max, 2);
            for k in 0..count {
                d.push(k as f64, &[k as f64, -(k as f64)]);
            }
            assert_eq!(d.pushed(), count);
            let stride = d.stride();
            let (t, v) = d.finish();
            let bound = max.max(2);
            assert!(t.len() <= bound, "max {max} count {count}: {}", t.len());
            assert_eq!(t[0], 0.0);
            assert_eq!(*t.last().unwrap(), (count - 1) as f64);
            for (k, &tk) in t.iter().enumerate().take(t.len() - 1) {
                assert_eq!(tk, (k as u64 * stride) as f64, "max {max} count {count}");
                assert_eq!(v[0][k], tk);
                assert_eq!(v[1][k], -tk);
            }
        }
    }
    let mut d = Decimator::new(4, 2);
    d.push(0.0, &[1.0]);
    let (_, v) = d.finish();
    assert_eq!(v[0], vec![1.0]);
    assert!(v[1][0].is_nan());
}
