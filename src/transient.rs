//! The general transient job: `analysis transient { stop, record, currents, interval, window }`.
//!
//! A transient from the operating point records the chosen node voltages and branch currents
//! and, for every voltage source, its current and the power it delivers, `p = -(v+ - v-) i`
//! (the branch current flows from the positive pin into the source, so a source that supplies
//! power carries a negative branch current).
//!
//! Memory is bounded however long the run: with a fixed `interval` the samples are at most
//! [`MAX_TRANSIENT_SAMPLES`] (checked when the file is loaded); otherwise the accepted steps are
//! thinned by the engine's decimation to at most that many (every step while they fit; then
//! every second, fourth, ... step, so a long run keeps an even spread).
//!
//! Derived figures over the window (the whole run unless `window` is given): each supply's
//! average and peak delivered power and the energy it delivered, integrated by the trapezoidal
//! rule over every accepted step as the run goes (not over the thinned record), and each
//! recorded node's mid-level crossings (the level halfway between the node's lowest and highest
//! recorded value in the window), found on the record.

use lamina_engine::{Circuit, OpParams, Output, Probe, Start, System, TransientParams};
use lamina_measure::{crossings, Direction};
use lamina_netlist::{Analysis, Design, MAX_TRANSIENT_SAMPLES};

/// One recorded signal.
#[derive(Clone, Debug, PartialEq)]
pub struct Signal {
    /// What it is: `out[3]` (a node), `supply` (an element's current or power).
    pub name: String,
    /// Its unit: `V`, `A` or `W`.
    pub unit: &'static str,
    /// One value per sample time.
    pub values: Vec<f64>,
}

/// A supply's figures over the window.
#[derive(Clone, Debug, PartialEq)]
pub struct SupplyFigures {
    /// The voltage source.
    pub name: String,
    /// Mean delivered power (W).
    pub avg_power: f64,
    /// Largest delivered power (W).
    pub peak_power: f64,
    /// Delivered energy (J).
    pub energy: f64,
}

/// A recorded node's mid-level crossings in the window.
#[derive(Clone, Debug, PartialEq)]
pub struct NodeCrossings {
    /// The node.
    pub node: String,
    /// The level (V): halfway between the lowest and highest value in the window.
    pub level: f64,
    /// Rising crossing times (s).
    pub rising: Vec<f64>,
    /// Falling crossing times (s).
    pub falling: Vec<f64>,
}

/// What a transient produced.
#[derive(Clone, Debug, PartialEq)]
pub struct TransientReport {
    /// Sample times (s).
    pub time: Vec<f64>,
    /// Node voltages (V), then requested branch currents (A), then each supply's current (A)
    /// and delivered power (W).
    pub signals: Vec<Signal>,
    /// Figures of every voltage source over the window.
    pub supplies: Vec<SupplyFigures>,
    /// Crossings of every recorded node over the window.
    pub crossings: Vec<NodeCrossings>,
    /// The window of the derived figures (s).
    pub window: (f64, f64),
    /// Accepted steps.
    pub steps: usize,
    /// Whether the record was thinned (accepted steps beyond the sample limit).
    pub thinned: bool,
}

/// Runs the file's transient `a` (checked when it was loaded) on `design`.
pub fn run_transient(design: Design, a: &Analysis) -> Result<TransientReport, String> {
    let Analysis::Transient {
        stop,
        nodes,
        currents,
        interval,
        window,
    } = a
    else {
        return Err("not a transient analysis".into());
    };
    let c: &Circuit = &design.circuit;
    let node = |n: &str| {
        c.find_node(n)
            .ok_or_else(|| format!("analysis `transient`: no node `{n}`"))
    };
    let element = |n: &str| {
        c.find_element(n)
            .ok_or_else(|| format!("analysis `transient`: no element `{n}`"))
    };
    let mut probes = Vec::new();
    let mut signals = Vec::new();
    for n in nodes {
        probes.push(Probe::Voltage(node(n)?));
        signals.push((n.clone(), "V"));
    }
    for e in currents {
        let id = element(e)?;
        // A voltage source's current is recorded with its power below.
        if c.element_kind(id) != "voltage source" {
            probes.push(Probe::Current(id));
            signals.push((e.clone(), "A"));
        }
    }
    // Every voltage source: its current and the voltages of its pins, for the power.
    let supplies: Vec<_> = c
        .elements()
        .filter(|&e| c.element_kind(e) == "voltage source")
        .collect();
    let first_supply_probe = probes.len();
    for &e in &supplies {
        let pins = c.element_pins(e);
        probes.push(Probe::Current(e));
        probes.push(Probe::Voltage(pins[0]));
        probes.push(Probe::Voltage(pins[1]));
    }
    let supply_names: Vec<String> = supplies
        .iter()
        .map(|&e| c.element_name(e).to_string())
        .collect();
    let mut tp = TransientParams::new(*stop);
    tp.output = match interval {
        Some(dt) => Output::Interval(*dt),
        None => Output::Decimated(MAX_TRANSIENT_SAMPLES),
    };
    // Energy and peak power of each supply over the window, from every accepted step.
    let (w0, w1) = *window;
    let mut energy = vec![0.0; supplies.len()];
    let mut peak = vec![f64::NEG_INFINITY; supplies.len()];
    // Buffers reused at every step: the observer allocates nothing.
    let mut power = vec![0.0; supplies.len()];
    let mut last_power = vec![0.0; supplies.len()];
    let mut last_t: Option<f64> = None;
    let mut steps = 0usize;
    // The recorded nodes at every accepted step (thinned past the limit), for their crossings:
    // a fixed output interval may be too coarse for them.
    let node_count = nodes.len();
    let mut stepped = lamina_engine::Decimator::new(MAX_TRANSIENT_SAMPLES, node_count);
    let mut observer = |t: f64, v: &[f64], _: lamina_engine::Moved<'_>| {
        steps += 1;
        if node_count > 0 {
            stepped.push(t, &v[..node_count]);
        }
        for (k, p) in power.iter_mut().enumerate() {
            let b = first_supply_probe + 3 * k;
            *p = -(v[b + 1] - v[b + 2]) * v[b];
        }
        if let Some(t0) = last_t {
            // The part of [t0, t] inside the window, power linear in between.
            let (a, b) = (t0.max(w0), t.min(w1));
            if b > a && t > t0 {
                for k in 0..power.len() {
                    let p0 = last_power[k];
                    let at = |x: f64| p0 + (power[k] - p0) * (x - t0) / (t - t0);
                    energy[k] += 0.5 * (at(a) + at(b)) * (b - a);
                }
            }
        }
        if (w0..=w1).contains(&t) {
            for k in 0..power.len() {
                peak[k] = peak[k].max(power[k]);
            }
        }
        last_power.copy_from_slice(&power);
        last_t = Some(t);
        lamina_engine::Control::Continue
    };
    let mut sys = System::new(design.circuit).map_err(|e| e.to_string())?;
    let res = sys
        .transient(
            &tp,
            &Start::OperatingPoint(OpParams::default()),
            &probes,
            Some(&mut observer),
        )
        .map_err(|e| e.to_string())?;
    let mut out: Vec<Signal> = signals
        .iter()
        .zip(&res.signals)
        .map(|((name, unit), values)| Signal {
            name: name.clone(),
            unit,
            values: values.clone(),
        })
        .collect();
    for (k, name) in supply_names.iter().enumerate() {
        let b = first_supply_probe + 3 * k;
        let i = &res.signals[b];
        let p: Vec<f64> = i
            .iter()
            .zip(&res.signals[b + 1])
            .zip(&res.signals[b + 2])
            .map(|((i, vp), vn)| -(vp - vn) * i)
            .collect();
        out.push(Signal {
            name: name.clone(),
            unit: "A",
            values: i.clone(),
        });
        out.push(Signal {
            name: name.clone(),
            unit: "W",
            values: p,
        });
    }
    let span = w1 - w0;
    let supplies = supply_names
        .into_iter()
        .enumerate()
        .map(|(k, name)| SupplyFigures {
            name,
            avg_power: energy[k] / span,
            peak_power: peak[k],
            energy: energy[k],
        })
        .collect();
    let time = res.time;
    // Crossings from the accepted steps, not from the (possibly coarse) output samples.
    let (step_time, step_values) = stepped.finish();
    let crossings_of = |name: &str, v: &[f64]| {
        let time = &step_time;
        let inside: Vec<f64> = time
            .iter()
            .zip(v)
            .filter(|(t, _)| (w0..=w1).contains(*t))
            .map(|(_, x)| *x)
            .collect();
        let lo = inside.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = inside.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let level = 0.5 * (lo + hi);
        let keep = |ts: Vec<f64>| -> Vec<f64> {
            ts.into_iter().filter(|t| (w0..=w1).contains(t)).collect()
        };
        let moved = hi > lo;
        NodeCrossings {
            node: name.to_string(),
            level,
            rising: if moved {
                keep(crossings(time, v, level, Direction::Rising))
            } else {
                Vec::new()
            },
            falling: if moved {
                keep(crossings(time, v, level, Direction::Falling))
            } else {
                Vec::new()
            },
        }
    };
    let crossings = nodes
        .iter()
        .zip(&step_values)
        .map(|(name, v)| crossings_of(name, v))
        .collect();
    Ok(TransientReport {
        thinned: interval.is_none() && res.stats.accepted + 1 > MAX_TRANSIENT_SAMPLES,
        time,
        signals: out,
        supplies,
        crossings,
        window: *window,
        steps: res.stats.accepted,
    })
}
