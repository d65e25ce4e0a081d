//! The device-curve job: drain current of the one FET in a file over a grid of gate and drain
//! voltages, source grounded.

use lamina_engine::elements::VoltageSource;
use lamina_engine::{Circuit, ElementId, NodeId, OpParams, Probe, SweepParams, System};
use lamina_netlist::Design;

/// Most bias points of one `iv` grid (gate values times drain values).
pub const MAX_IV_POINTS: usize = 1_000_000;

/// Parses a voltage flag: `LIST` (`0,0.1,0.5`) or `START:STOP:STEP` (`0:1:0.05`, stop
/// included), in volts unless a unit is written (`-600:1000:20 mV`).
pub fn parse_values(flag: &str, text: &str) -> Result<Vec<f64>, String> {
    let values = lamina_netlist::values::parse_values(text, Some("V"), MAX_IV_POINTS)
        .map_err(|why| format!("{flag} {text}: {why}"))?;
    if let Some(v) = values
        .iter()
        .find(|v| v.dim != lamina_netlist::units::Dim::VOLTAGE)
    {
        return Err(format!(
            "{flag} {text}: `{}` is {}, not a voltage",
            v.text,
            v.dim.describe()
        ));
    }
    Ok(values.iter().map(|v| v.si).collect())
}

/// Checks the size of a grid before it is run.
pub fn check_grid(vgs: &[f64], vds: &[f64]) -> Result<(), String> {
    match vgs.len().checked_mul(vds.len()) {
        Some(n) if n <= MAX_IV_POINTS => Ok(()),
        _ => Err(format!(
            "the grid has {} x {} bias points, more than the limit of {MAX_IV_POINTS}; use larger steps",
            vgs.len(),
            vds.len()
        )),
    }
}

/// One bias point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct IvPoint {
    /// Gate-source voltage (V).
    pub vgs: f64,
    /// Drain-source voltage (V).
    pub vds: f64,
    /// Current into the drain (A).
    pub id: f64,
}

fn fets(c: &Circuit) -> Vec<ElementId> {
    c.elements()
        .filter(|&e| {
            let t = c.element_terminals(e);
            t.len() == 3 && t[0] == "drain" && t[1] == "gate" && t[2] == "source"
        })
        .collect()
}

fn driving_source(c: &Circuit, node: NodeId) -> Option<ElementId> {
    c.elements().find(|&e| {
        c.element_kind(e) == "voltage source" && c.element_pins(e) == [node, Circuit::GROUND]
    })
}

/// Runs the grid: for each gate voltage, a DC sweep of the drain voltage.
pub fn run_iv(design: Design, vgs: &[f64], vds: &[f64]) -> Result<Vec<IvPoint>, String> {
    let mut c = design.circuit;
    let found = fets(&c);
    let fet = match found.as_slice() {
        [one] => *one,
        [] => {
            return Err("the file has no FET (an element with drain, gate and source pins)".into())
        }
        many => {
            return Err(format!(
                "the file has {} FETs; `lamina iv` takes a file with one",
                many.len()
            ))
        }
    };
    let pins = c.element_pins(fet).to_vec();
    let (drain, gate, source) = (pins[0], pins[1], pins[2]);
    if !source.is_ground() {
        return Err(format!(
            "the FET `{}` must have its source at ground, not at `{}`",
            c.element_name(fet),
            c.node_name(source)
        ));
    }
    if drain.is_ground() || gate.is_ground() {
        return Err("the FET's drain and gate must not be at ground".into());
    }
    let mut source_for = |node: NodeId, name: &str| -> Result<ElementId, String> {
        match driving_source(&c, node) {
            Some(e) => Ok(e),
            None => c
                .add(name, VoltageSource::dc(0.0), &[node, Circuit::GROUND])
                .map_err(|e| e.to_string()),
        }
    };
    let vg_src = source_for(gate, "iv.gate")?;
    let vd_src = source_for(drain, "iv.drain")?;
    let mut sys = System::new(c).map_err(|e| e.to_string())?;
    let mut out = Vec::with_capacity(vgs.len() * vds.len());
    let probe = [Probe::Current(vd_src)];
    let params = SweepParams {
        op: OpParams::default(),
        ..SweepParams::default()
    };
    let gmin = params.op.gmin;
    for &vg in vgs {
        sys.set_source_value(vg_src, vg)
            .map_err(|e| e.to_string())?;
        let res = sys
            .dc_sweep(vd_src, vds, &probe, &params)
            .map_err(|e| e.to_string())?;
        for (k, &vd) in vds.iter().enumerate() {
            // The drain source's branch current flows from its positive pin through it, so the
            // current it pushes into the drain node is the negative of that; the node's gmin
            // draws gmin * V_D of it, which is not drain current.
            out.push(IvPoint {
                vgs: vg,
                vds: vd,
                id: -res.signals[0][k] - gmin * vd,
            });
        }
    }
    Ok(out)
}

/// Device figures from the transfer characteristic at the largest |V_DS| of the grid.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct IvMetrics {
    /// The V_DS the figures were taken at (V).
    pub vds: f64,
    /// Smallest subthreshold swing (mV/decade).
    pub ss_min_mv_per_dec: Option<f64>,
    /// Threshold by constant current: V_GS where |I_D| reaches [`THRESHOLD_CURRENT`] (V).
    pub vth_v: Option<f64>,
    /// Largest |I_D| over the V_GS sweep (A).
    pub ion_a: Option<f64>,
    /// Smallest |I_D| over the V_GS sweep (A).
    pub ioff_a: Option<f64>,
}

/// The constant current of the threshold definition (A), common practice for devices of about
/// unit width-to-length ratio.
pub const THRESHOLD_CURRENT: f64 = 1e-7;

/// What each metric means, for reports.
pub const METRIC_DEFINITIONS: &[(&str, &str)] = &[
    (
        "ss_min_mv_per_dec",
        "smallest dV_GS / dlog10|I_D| at the largest |V_DS| of the grid",
    ),
    (
        "vth_v",
        "constant-current threshold: V_GS where |I_D| first reaches 1e-7 A",
    ),
    (
        "ion_a",
        "largest |I_D| over the V_GS sweep at the largest |V_DS|",
    ),
    (
        "ioff_a",
        "smallest |I_D| over the V_GS sweep at the largest |V_DS|",
    ),
];

/// Figures of a grid from [`run_iv`]; empty where the sweep has fewer than three gate voltages.
pub fn iv_metrics(points: &[IvPoint]) -> IvMetrics {
    let vds = points
        .iter()
        .map(|p| p.vds)
        .fold(0.0f64, |m, v| if v.abs() > m.abs() { v } else { m });
    let mut curve: Vec<(f64, f64)> = points
        .iter()
        .filter(|p| p.vds == vds)
        .map(|p| (p.vgs, p.id))
        .collect();
    curve.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (vg, id): (Vec<f64>, Vec<f64>) = curve.into_iter().unzip();
    let mags: Vec<f64> = id.iter().map(|i| i.abs()).collect();
    let none = IvMetrics {
        vds,
        ss_min_mv_per_dec: None,
        vth_v: None,
        ion_a: None,
        ioff_a: None,
    };
    if vg.len() < 3 {
        return none;
    }
    IvMetrics {
        vds,
        ss_min_mv_per_dec: lamina_measure::device::min_swing(&vg, &id).map(|(s, _)| s),
        vth_v: lamina_measure::device::threshold_constant_current(&vg, &id, THRESHOLD_CURRENT),
        ion_a: mags.iter().copied().reduce(f64::max),
        ioff_a: mags.iter().copied().reduce(f64::min),
    }
}
