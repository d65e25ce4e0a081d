//! The operating point with insight: node voltages; each independent source's voltage, current
//! and delivered power; and for every three-terminal FET (`drain`, `gate`, `source`) its
//! terminal currents, small-signal conductances and capacitances seen at its pins, and what
//! the device reports about itself (carrier densities, region).
//!
//! Conventions: a terminal current flows from the node into the device; a source's current is
//! the current into its first terminal, so a supply that delivers power carries a negative
//! current; delivered power is `-Σ V_t I_t` over the source's terminals. For a FET, with
//! `G_t` and `C_t` its terminal conductance and capacitance matrices (contact resistances'
//! internal nodes eliminated, [`lamina_engine::ElementLinearization::quasi_static`]):
//! `g_m = ∂I_D/∂V_G`, `g_ds = ∂I_D/∂V_D`, `C_gg = ∂Q_G/∂V_G`, `C_gd = -∂Q_G/∂V_D`,
//! `C_gs = -∂Q_G/∂V_S`, `C_dd = ∂Q_D/∂V_D`, `C_dg = -∂Q_D/∂V_G`, overlap included. The
//! quasi-static transit frequency `f_T = g_m / (2π C_gg)`.
//!
//! Every figure is a model estimate.

use lamina_engine::{DetailValue, OpInfo, OpParams, System};

/// One independent source at the operating point.
#[derive(Clone, Debug, PartialEq)]
pub struct SourceRow {
    /// Element name.
    pub name: String,
    /// Element kind.
    pub kind: &'static str,
    /// Voltage from the first terminal to the second (V).
    pub voltage: f64,
    /// Current into the first terminal from its node (A).
    pub current: f64,
    /// Power the source delivers to the circuit (W).
    pub power: f64,
}

/// One FET at the operating point.
#[derive(Clone, Debug, PartialEq)]
pub struct DeviceRow {
    /// Element name.
    pub name: String,
    /// Element kind.
    pub kind: &'static str,
    /// Terminal names with their voltage (V) and the current into the device (A).
    pub terminals: Vec<(&'static str, f64, f64)>,
    /// Small-signal figures at the pins, when the device's internal nodes can be eliminated.
    pub small_signal: Option<SmallSignal>,
    /// What the device reports about itself.
    pub details: Vec<(&'static str, DetailValue)>,
}

/// A FET's small-signal conductances (S) and capacitances (F) at its pins.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SmallSignal {
    /// `∂I_D/∂V_G`.
    pub gm: f64,
    /// `∂I_D/∂V_D`.
    pub gds: f64,
    /// `∂Q_G/∂V_G`.
    pub cgg: f64,
    /// `-∂Q_G/∂V_D`.
    pub cgd: f64,
    /// `-∂Q_G/∂V_S`.
    pub cgs: f64,
    /// `∂Q_D/∂V_D`.
    pub cdd: f64,
    /// `-∂Q_D/∂V_G`.
    pub cdg: f64,
}

impl SmallSignal {
    /// Quasi-static transit frequency `g_m / (2π C_gg)` (Hz); `None` without gate capacitance.
    pub fn f_t(&self) -> Option<f64> {
        (self.cgg > 0.0).then(|| self.gm.abs() / (2.0 * std::f64::consts::PI * self.cgg))
    }
}

/// The whole report.
#[derive(Clone, Debug, PartialEq)]
pub struct OpReport {
    /// Node names and voltages (V), ground excluded, in creation order.
    pub nodes: Vec<(String, f64)>,
    /// Independent sources, in file order.
    pub sources: Vec<SourceRow>,
    /// FETs, in file order.
    pub devices: Vec<DeviceRow>,
    /// How the solve went.
    pub method: &'static str,
    /// Newton iterations over every path tried.
    pub iterations: usize,
}

const FET_PINS: [&str; 3] = ["drain", "gate", "source"];

/// Solves the operating point of `sys` and gathers the report.
pub fn operating_point(sys: &mut System) -> Result<OpReport, String> {
    let (sol, info): (_, OpInfo) = sys
        .operating_point(&OpParams::default())
        .map_err(|e| e.to_string())?;
    report(sys, &sol.x, info)
}

fn report(sys: &System, x: &[f64], info: OpInfo) -> Result<OpReport, String> {
    let nodes = sys
        .node_voltages(x)
        .map(|(n, v)| (n.to_string(), v))
        .collect();
    let mut sources = Vec::new();
    let mut devices = Vec::new();
    for e in sys.elements() {
        let terms = sys.element_terminals(e);
        let lin = sys
            .element_linearization(x, e)
            .map_err(|err| err.to_string())?;
        let name = sys.element_label(e).to_string();
        let kind = sys.element_kind(e);
        if sys.is_independent_source(e) && terms.len() == 2 {
            let (v, i) = (&lin.x, lin.terminal_currents());
            sources.push(SourceRow {
                name,
                kind,
                voltage: v[0] - v[1],
                current: i[0],
                power: -(v[0] * i[0] + v[1] * i[1]),
            });
        } else if terms == FET_PINS {
            let small_signal = lin.quasi_static().map(|(g, c)| SmallSignal {
                gm: g[1],
                gds: g[0],
                cgg: c[4],
                cgd: -c[3],
                cgs: -c[5],
                cdd: c[0],
                cdg: -c[1],
            });
            let details = sys
                .element_details(e, &lin)
                .into_iter()
                .map(|d| (d.name, d.value))
                .collect();
            devices.push(DeviceRow {
                name,
                kind,
                terminals: (0..3)
                    .map(|k| (terms[k], lin.x[k], lin.terminal_currents()[k]))
                    .collect(),
                small_signal,
                details,
            });
        }
    }
    Ok(OpReport {
        nodes,
        sources,
        devices,
        method: info.method.describe(),
        iterations: info.iterations,
    })
}

/// The report as JSON (SI units in the keys).
pub fn json(r: &OpReport) -> serde_json::Value {
    use serde_json::{json, Map, Value};
    let nodes: Map<String, Value> = r.nodes.iter().map(|(n, v)| (n.clone(), json!(v))).collect();
    let sources: Vec<Value> = r
        .sources
        .iter()
        .map(|s| {
            json!({ "name": s.name, "kind": s.kind, "voltage_v": s.voltage,
                    "current_a": s.current, "power_delivered_w": s.power })
        })
        .collect();
    let devices: Vec<Value> = r
        .devices
        .iter()
        .map(|d| {
            let terminals: Map<String, Value> = d
                .terminals
                .iter()
                .map(|(t, v, i)| (t.to_string(), json!({ "voltage_v": v, "current_a": i })))
                .collect();
            let details: Map<String, Value> = d
                .details
                .iter()
                .map(|(k, v)| match v {
                    DetailValue::Number(x, unit) => (detail_key(k, unit), json!(x)),
                    DetailValue::Word(w) => (detail_key(k, ""), json!(w)),
                })
                .collect();
            let ss = d.small_signal.map(|s| {
                json!({ "gm_siemens": s.gm, "gds_siemens": s.gds, "cgg_f": s.cgg, "cgd_f": s.cgd,
                        "cgs_f": s.cgs, "cdd_f": s.cdd, "cdg_f": s.cdg, "ft_quasi_static_hz": s.f_t() })
            });
            let warnings = lamina_devices::warnings::breakdown(&d.name, &d.details);
            json!({ "name": d.name, "kind": d.kind, "terminals": terminals,
                    "small_signal": ss, "details": details, "warnings": warnings })
        })
        .collect();
    json!({
        "node_voltages_v": nodes,
        "sources": sources,
        "devices": devices,
        "method": r.method,
        "newton_iterations": r.iterations,
        "definitions": {
            "current": "terminal currents flow from the node into the element; a source's current is the current into its first terminal",
            "power_delivered_w": "power the source delivers to the circuit, -sum of V_t I_t over its terminals",
            "small_signal": "derivatives at the pins with contact nodes eliminated: gm_siemens = dI_D/dV_G, gds_siemens = dI_D/dV_D, cgg = dQ_G/dV_G, cgd = -dQ_G/dV_D, cgs = -dQ_G/dV_S, cdd = dQ_D/dV_D, cdg = -dQ_D/dV_G; ft_quasi_static_hz = gm / (2 pi cgg)",
            "region": REGION_DEFINITION,
        },
    })
}

/// How the report defines a FET's region (the device models' own definitions).
pub const REGION_DEFINITION: &str = "2D-channel FET: threshold charge Q_th = C_ins kT/q; off below 1e-4 Q_th of mobile charge at the better-conducting end, subthreshold below Q_th, saturation when the other end is below Q_th or g_ds < g_m / 10, else linear. Square-law FET: off for V_GS - V_T <= 0, linear for V_DS < V_GS - V_T, else saturation";

/// `electron density at source` in `1/m^2` -> `electron_density_at_source_per_m2`.
fn detail_key(name: &str, unit: &str) -> String {
    let base = name.replace(' ', "_");
    match unit {
        "" | "1" => base,
        "1/m^2" => format!("{base}_per_m2"),
        "V" => format!("{base}_v"),
        "Ohm m" => format!("{base}_ohm_m"),
        "A" => format!("{base}_a"),
        "V/m" => format!("{base}_v_per_m"),
        other => format!("{base}_{}", other.replace(['/', '^'], "")),
    }
}

/// The report as text: three tables.
pub fn text(r: &OpReport) -> String {
    use crate::plot::engineering as eng;
    use std::fmt::Write;
    let mut s = String::new();
    let _ = writeln!(s, "operating point (model estimate)");
    let _ = writeln!(s, "  node voltages");
    for (n, v) in &r.nodes {
        let _ = writeln!(s, "    {n:<24} {v:>14.6} V");
    }
    if !r.sources.is_empty() {
        let _ = writeln!(
            s,
            "  sources (current into the first terminal; power delivered)"
        );
        for src in &r.sources {
            let _ = writeln!(
                s,
                "    {:<16} {:>12} {:>13} {:>13}",
                src.name,
                eng(src.voltage, "V"),
                eng(src.current, "A"),
                eng(src.power, "W")
            );
        }
    }
    for d in &r.devices {
        let _ = writeln!(s, "  {} ({})", d.name, d.kind);
        for (t, v, i) in &d.terminals {
            let _ = writeln!(s, "    {t:<8} {:>12} {:>13}", eng(*v, "V"), eng(*i, "A"));
        }
        if let Some(ss) = &d.small_signal {
            let _ = writeln!(
                s,
                "    g_m {}   g_ds {}   f_T {}",
                eng(ss.gm, "S"),
                eng(ss.gds, "S"),
                ss.f_t()
                    .map_or("- (no gate capacitance)".to_string(), |f| eng(f, "Hz"))
            );
            let _ = writeln!(
                s,
                "    C_gg {}   C_gd {}   C_gs {}   C_dd {}   C_dg {}",
                eng(ss.cgg, "F"),
                eng(ss.cgd, "F"),
                eng(ss.cgs, "F"),
                eng(ss.cdd, "F"),
                eng(ss.cdg, "F")
            );
        }
        for (k, v) in &d.details {
            let shown = match v {
                DetailValue::Number(x, "1/m^2") => format!("{x:.4e} /m^2 ({:.4e} /cm^2)", x * 1e-4),
                DetailValue::Number(x, "1") => format!("{x:.4e}"),
                DetailValue::Number(x, unit) => eng(*x, unit),
                DetailValue::Word(w) => w.to_string(),
            };
            let _ = writeln!(s, "    {k:<28} {shown}");
        }
        for w in lamina_devices::warnings::breakdown(&d.name, &d.details) {
            let _ = writeln!(s, "    warning: {w}");
        }
    }
    if !r.devices.is_empty() {
        let _ = writeln!(s, "  region: {REGION_DEFINITION}");
    }
    s
}

/// The report as CSV files: `nodes.csv`, `sources.csv`, `devices.csv` (one row per FET).
pub fn csv(r: &OpReport) -> Vec<(&'static str, String)> {
    use std::fmt::Write;
    let mut nodes = String::from("node,voltage_v\n");
    for (n, v) in &r.nodes {
        let _ = writeln!(nodes, "{n},{v:e}");
    }
    let mut sources = String::from("source,kind,voltage_v,current_a,power_delivered_w\n");
    for s in &r.sources {
        let _ = writeln!(
            sources,
            "{},{},{:e},{:e},{:e}",
            s.name, s.kind, s.voltage, s.current, s.power
        );
    }
    let mut detail_names: Vec<(&'static str, &'static str)> = Vec::new();
    for d in &r.devices {
        for (k, v) in &d.details {
            let unit = match v {
                DetailValue::Number(_, unit) => *unit,
                DetailValue::Word(_) => "",
            };
            if !detail_names.iter().any(|(n, _)| n == k) {
                detail_names.push((k, unit));
            }
        }
    }
    let mut devices = String::from(
        "device,kind,v_drain_v,v_gate_v,v_source_v,i_drain_a,i_gate_a,i_source_a,\
         gm_siemens,gds_siemens,cgg_f,cgd_f,cgs_f,cdd_f,cdg_f,ft_quasi_static_hz",
    );
    for (k, unit) in &detail_names {
        let _ = write!(devices, ",{}", detail_key(k, unit));
    }
    devices.push('\n');
    for d in &r.devices {
        let mut row = format!("{},{}", d.name, d.kind);
        for (_, v, _) in &d.terminals {
            let _ = write!(row, ",{v:e}");
        }
        for (_, _, i) in &d.terminals {
            let _ = write!(row, ",{i:e}");
        }
        match &d.small_signal {
            Some(s) => {
                for v in [s.gm, s.gds, s.cgg, s.cgd, s.cgs, s.cdd, s.cdg] {
                    let _ = write!(row, ",{v:e}");
                }
                let _ = write!(
                    row,
                    ",{}",
                    s.f_t().map_or(String::new(), |f| format!("{f:e}"))
                );
            }
            None => row.push_str(",,,,,,,,"),
        }
        for (k, _) in &detail_names {
            let cell = d
                .details
                .iter()
                .find(|(n, _)| n == k)
                .map(|(_, v)| match v {
                    DetailValue::Number(x, _) => format!("{x:e}"),
                    DetailValue::Word(w) => w.to_string(),
                });
            let _ = write!(row, ",{}", cell.unwrap_or_default());
        }
        let _ = writeln!(devices, "{row}");
    }
    vec![
        ("nodes.csv", nodes),
        ("sources.csv", sources),
        ("devices.csv", devices),
    ]
}
