//! The rate-aware transfer curve: the input of a file's `analysis transfer` ramps at a stated
//! rate through the analysis's input values in a transient (up, down or both ways) instead of
//! each point being solved at rest, so charge that lags the input (a 2D-channel FET's slow
//! traps) shows as a difference between the legs.
//!
//! The input source gets a piecewise-linear waveform whose vertices are the input values, at
//! the times the ramp reaches them (`|Δv_in| / rate` apart); the rest of the file's circuit is
//! kept as it is. The run starts from the operating point at the first input value (the
//! circuit at rest there) and the integrator steps onto every vertex, so `v_out` is sampled
//! exactly there. Each leg, put in increasing input order, gets the figures the DC curve gets
//! ([`transfer_metrics`] and the butterfly noise margin of the leg against itself); the shift
//! of the switching threshold is `V_M(down) - V_M(up)`. A circuit without lagging charge gives
//! the DC curve on both legs at slow rates; at fast rates its own capacitances lag too.

use crate::iv::{leg_path, legs, sample_at, Direction, Leg};
use lamina_engine::elements::Waveform;
use lamina_engine::{Control, OpParams, Output, Probe, Start, System, TransientParams};
use lamina_measure::snm::{butterfly, NoiseMargin};
use lamina_measure::transfer::{transfer_metrics, TransferMetrics};
use lamina_netlist::{AnalysisDecl, Design};

/// One leg of a ramped transfer sweep.
#[derive(Clone, Debug, PartialEq)]
pub struct LegCurve {
    /// Up (input rising) or down.
    pub leg: Leg,
    /// Input values (V), increasing (the down leg reversed from its sweep order).
    pub vin: Vec<f64>,
    /// Output at each input (V).
    pub vout: Vec<f64>,
    /// Time since the ramp began at each input (s).
    pub time_s: Vec<f64>,
    /// Static figures of the leg, if it crosses `v_out = v_in` and reaches a slope of -1.
    pub metrics: Option<TransferMetrics>,
    /// Maximum-square noise margin of the leg against itself, if it has two lobes.
    pub snm: Option<NoiseMargin>,
}

/// A ramped transfer sweep: how it ran and its legs in sweep order.
#[derive(Clone, Debug, PartialEq)]
pub struct SweptTransfer {
    /// The input source's name.
    pub source: String,
    /// Ramp rate (V/s).
    pub rate_v_per_s: f64,
    /// Which way it ran.
    pub direction: Direction,
    /// The legs, in sweep order.
    pub legs: Vec<LegCurve>,
}

impl SweptTransfer {
    /// The leg `leg`, if it ran.
    pub fn leg(&self, leg: Leg) -> Option<&LegCurve> {
        self.legs.iter().find(|l| l.leg == leg)
    }

    /// `V_M(down) - V_M(up)` (V), where both legs ran and have a switching threshold.
    pub fn vm_shift_v(&self) -> Option<f64> {
        let vm = |leg| self.leg(leg).and_then(|l| l.metrics).map(|m| m.vm);
        Some(vm(Leg::Down)? - vm(Leg::Up)?)
    }

    /// The margins of the hysteretic (bistable) transfer curve, where both legs ran: the
    /// worst case of the two legs, which is what a gate whose input may arrive on either leg
    /// guarantees. Unity-gain margins from the legs' least `V_IL` and `V_OH` and greatest
    /// `V_IH` and `V_OL` (`NM_L = min V_IL - max V_OL`, `NM_H = min V_OH - max V_IH`), and the
    /// maximum-square noise margin of the butterfly of one leg against the other (a
    /// cross-coupled pair with one inverter on each leg).
    pub fn hysteretic(&self) -> Option<Hysteretic> {
        let (up, down) = (self.leg(Leg::Up)?, self.leg(Leg::Down)?);
        let margins = up.metrics.zip(down.metrics).map(|(a, b)| {
            (
                a.vil.min(b.vil) - a.vol.max(b.vol),
                a.voh.min(b.voh) - a.vih.max(b.vih),
            )
        });
        // One pairing is enough: the other is the same butterfly mirrored about v_out = v_in.
        let snm = butterfly(&up.vin, &up.vout, &down.vin, &down.vout).map(|m| m.snm);
        Some(Hysteretic {
            nml: margins.map(|m| m.0),
            nmh: margins.map(|m| m.1),
            snm,
        })
    }
}

/// Margins of a hysteretic transfer curve ([`SweptTransfer::hysteretic`]), each absent where
/// a leg lacks the points it needs.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Hysteretic {
    /// Worst-case unity-gain low noise margin (V).
    pub nml: Option<f64>,
    /// Worst-case unity-gain high noise margin (V).
    pub nmh: Option<f64>,
    /// Maximum-square noise margin of one leg against the other (V).
    pub snm: Option<f64>,
}

/// Runs the transfer analysis `a` of `design` with its input ramped at `rate_v_per_s` in
/// `direction`.
pub fn run_swept_transfer(
    design: Design,
    a: &AnalysisDecl,
    direction: Direction,
    rate_v_per_s: f64,
) -> Result<SweptTransfer, String> {
    if !(rate_v_per_s > 0.0 && rate_v_per_s.is_finite()) {
        return Err("the sweep rate must be a positive, finite voltage per time".into());
    }
    let (src, out_node, vin) = crate::design::transfer_setup(&design, a)?;
    let c = &design.circuit;
    let source = c.element_name(src).to_string();
    if c.element_kind(src) != "voltage source" {
        return Err(format!(
            "analysis `transfer`: a ramped sweep drives the input `{source}` with a voltage \
             ramp, but it is a {}; make it a `voltage_source`",
            c.element_kind(src)
        ));
    }
    let legs = legs(&vin, direction);
    if legs[0].1.len() < 2 {
        return Err("a ramped transfer sweep needs at least two distinct input values".into());
    }
    let path = leg_path(&legs);
    let mut times = Vec::with_capacity(path.len());
    let mut t = 0.0;
    for (k, &(_, v)) in path.iter().enumerate() {
        if k > 0 {
            t += (v - path[k - 1].1).abs() / rate_v_per_s;
        }
        times.push(t);
    }
    let vertices: Vec<(f64, f64)> = times
        .iter()
        .zip(&path)
        .map(|(&t, &(_, v))| (t, v))
        .collect();
    let ramp = Waveform::piecewise_linear(vertices).map_err(|e| e.to_string())?;
    let mut sys = System::new(design.circuit).map_err(|e| e.to_string())?;
    sys.set_waveform(src, &ramp).map_err(|e| e.to_string())?;
    let mut p = TransientParams::new(t);
    p.output = Output::Streaming;
    let mut samples: Vec<(f64, f64)> = Vec::new();
    let mut record = |t: f64, v: &[f64], _: lamina_engine::Moved<'_>| {
        samples.push((t, v[0]));
        Control::Continue
    };
    sys.transient(
        &p,
        &Start::OperatingPoint(OpParams::default()),
        &[Probe::Voltage(out_node)],
        Some(&mut record),
    )
    .map_err(|e| e.to_string())?;
    let mut out = Vec::with_capacity(legs.len());
    for (leg, _) in &legs {
        // Each leg's samples in sweep order; the turning point belongs to both legs.
        let mut rows: Vec<(f64, f64, f64)> = Vec::new();
        for (k, (&t, &(l, v))) in times.iter().zip(&path).enumerate() {
            let turning = l != *leg && path.get(k + 1).is_some_and(|n| n.0 == *leg);
            if l == *leg || turning {
                rows.push((v, sample_at(&samples, t), t));
            }
        }
        rows.sort_by(|a, b| a.0.total_cmp(&b.0));
        let vin: Vec<f64> = rows.iter().map(|r| r.0).collect();
        let vout: Vec<f64> = rows.iter().map(|r| r.1).collect();
        out.push(LegCurve {
            leg: *leg,
            metrics: transfer_metrics(&vin, &vout),
            snm: butterfly(&vin, &vout, &vin, &vout),
            time_s: rows.iter().map(|r| r.2).collect(),
            vin,
            vout,
        });
    }
    Ok(SweptTransfer {
        source,
        rate_v_per_s,
        direction,
        legs: out,
    })
}

/// Loads `path` with `sets` and runs its first `analysis transfer` ramped
/// ([`run_swept_transfer`]).
pub fn run_file(
    path: &std::path::Path,
    sets: &[(String, String)],
    direction: Direction,
    rate_v_per_s: f64,
) -> Result<SweptTransfer, crate::error::JobError> {
    use crate::error::JobError;
    let design = crate::design::load(path, sets)?;
    let a = design
        .analyses
        .iter()
        .find(|a| a.kind == "transfer")
        .cloned()
        .ok_or_else(|| {
            JobError::Invalid(format!(
                "{} declares no `analysis transfer`; add one",
                path.display()
            ))
        })?;
    run_swept_transfer(design, &a, direction, rate_v_per_s).map_err(JobError::Analysis)
}
