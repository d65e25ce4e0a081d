//! Circuits built in code: the square-law reference inverter and rings of it.
//!
//! The reference values (k = 100 µA/V² for both devices, V_T = ±0.3 V, V_DD = 1 V, 1 fF from
//! each stage output to ground) are the engine's check circuit; they describe no real process.

use lamina_devices::{Polarity, SquareLawFet};
use lamina_engine::elements::Capacitor;
use lamina_engine::elements::VoltageSource;
use lamina_engine::{Circuit, CircuitError, Element, ElementId, NodeId};
use std::sync::Arc;

/// Parameters of a square-law inverter stage.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SquareStage {
    /// n device transconductance parameter (A/V²).
    pub kn: f64,
    /// p device transconductance parameter (A/V²).
    pub kp: f64,
    /// n threshold (V).
    pub vtn: f64,
    /// p threshold (V, negative).
    pub vtp: f64,
    /// Supply voltage (V).
    pub vdd: f64,
    /// Capacitance from each stage output to ground (F).
    pub load: f64,
    /// Channel-length modulation of both devices (1/V).
    pub lambda: f64,
    /// Gate capacitance `W L C_ox` of each device for Ward-Dutton charges (F), 0 for none.
    pub gate_capacitance: f64,
}

impl Default for SquareStage {
    fn default() -> Self {
        SquareStage {
            kn: 100e-6,
            kp: 100e-6,
            vtn: 0.3,
            vtp: -0.3,
            vdd: 1.0,
            load: 1e-15,
            lambda: 0.0,
            gate_capacitance: 0.0,
        }
    }
}

/// The models of one stage's devices and load, shared by every stage built from them (one
/// copy of the parameters however long the ring).
struct StageModels {
    pull_down: Arc<dyn Element>,
    pull_up: Arc<dyn Element>,
    load: Option<Arc<dyn Element>>,
}

impl StageModels {
    fn new(s: &SquareStage) -> Self {
        let n = SquareLawFet::new(Polarity::N, s.kn, s.vtn)
            .with_length_modulation(s.lambda)
            .with_gate_capacitance(s.gate_capacitance);
        let p = SquareLawFet::new(Polarity::P, s.kp, s.vtp)
            .with_length_modulation(s.lambda)
            .with_gate_capacitance(s.gate_capacitance);
        StageModels {
            pull_down: Arc::new(n),
            pull_up: Arc::new(p),
            load: (s.load != 0.0).then(|| Arc::new(Capacitor::new(s.load)) as Arc<dyn Element>),
        }
    }
}

fn add_inverter(
    c: &mut Circuit,
    m: &StageModels,
    name: &str,
    input: NodeId,
    output: NodeId,
    vdd: NodeId,
    buf: &mut String,
) -> Result<(), CircuitError> {
    // `buf` takes the three element names in turn: a 30001-stage ring builds 90,000 names.
    c.add_shared(
        joined(buf, name, "pull_down"),
        m.pull_down.clone(),
        &[output, input, Circuit::GROUND],
    )?;
    c.add_shared(
        joined(buf, name, "pull_up"),
        m.pull_up.clone(),
        &[output, input, vdd],
    )?;
    if let Some(load) = &m.load {
        c.add_shared(
            joined(buf, name, "load"),
            load.clone(),
            &[output, Circuit::GROUND],
        )?;
    }
    Ok(())
}

/// `name.part`, written into `buf`.
fn joined<'a>(buf: &'a mut String, name: &str, part: &str) -> &'a str {
    buf.clear();
    buf.push_str(name);
    buf.push('.');
    buf.push_str(part);
    buf
}

/// `prefix[i]`, written into `buf` (digits by hand: the formatting machinery cost a tenth of
/// building a 30001-stage ring).
fn indexed<'a>(buf: &'a mut String, prefix: &str, i: usize) -> &'a str {
    buf.clear();
    buf.push_str(prefix);
    buf.push('[');
    let mut digits = [0u8; 20];
    let mut k = digits.len();
    let mut v = i;
    loop {
        k -= 1;
        digits[k] = b'0' + (v % 10) as u8;
        v /= 10;
        if v == 0 {
            break;
        }
    }
    buf.extend(digits[k..].iter().map(|&d| d as char));
    buf.push(']');
    buf
}

/// The handles a job needs on a ring of inverters.
#[derive(Clone, Debug)]
pub struct Ring {
    /// Stage outputs in ring order (stage `i` drives `outputs[i]` from `outputs[i - 1]`).
    pub outputs: Vec<NodeId>,
    /// The supply source.
    pub supply: ElementId,
    /// Supply voltage.
    pub vdd: f64,
}

/// An `stages`-stage ring of the inverter `stage`, with nodes `out[0]`, `out[1]`, ...
pub fn square_ring(stages: usize, stage: &SquareStage) -> Result<(Circuit, Ring), CircuitError> {
    let mut c = Circuit::new();
    c.reserve(
        stages.saturating_add(1),
        stages.saturating_mul(3).saturating_add(1),
    );
    let vdd = c.node("vdd");
    let supply = c.add(
        "supply",
        VoltageSource::dc(stage.vdd),
        &[vdd, Circuit::GROUND],
    )?;
    let mut buf = String::new();
    let outputs: Vec<NodeId> = (0..stages)
        .map(|i| c.node(indexed(&mut buf, "out", i)))
        .collect();
    let mut part = String::new();
    let models = StageModels::new(stage);
    for i in 0..stages {
        let input = outputs[(i + stages - 1) % stages];
        add_inverter(
            &mut c,
            &models,
            indexed(&mut buf, "stage", i),
            input,
            outputs[i],
            vdd,
            &mut part,
        )?;
    }
    Ok((
        c,
        Ring {
            outputs,
            supply,
            vdd: stage.vdd,
        },
    ))
}

/// A square-law inverter driven by a sweepable source `input`, output at node `out`.
pub struct Inverter {
    /// The circuit.
    pub circuit: Circuit,
    /// The input source (sweep it with a DC sweep).
    pub input: ElementId,
    /// The output node.
    pub output: NodeId,
}

/// One inverter with its supply and an input source at 0 V.
pub fn square_inverter(stage: &SquareStage) -> Result<Inverter, CircuitError> {
    let mut c = Circuit::new();
    let vdd = c.node("vdd");
    let inp = c.node("in");
    let out = c.node("out");
    c.add(
        "supply",
        VoltageSource::dc(stage.vdd),
        &[vdd, Circuit::GROUND],
    )?;
    let input = c.add("drive", VoltageSource::dc(0.0), &[inp, Circuit::GROUND])?;
    let models = StageModels::new(stage);
    add_inverter(
        &mut c,
        &models,
        "inverter",
        inp,
        out,
        vdd,
        &mut String::new(),
    )?;
    Ok(Inverter {
        circuit: c,
        input,
        output: out,
    })
}

/// Applies `--set name=value` flags to a built-in square-law stage. Its parameters are `kn`,
/// `kp` (A/V^2), `vtn`, `vtp`, `vdd` (V), `load` (F) and `lambda` (1/V); values need their
/// unit, as in circuit files (`--set vdd=0.8V`).
pub fn apply_sets(
    stage: &mut SquareStage,
    sets: &[(String, String)],
) -> Result<(), crate::error::JobError> {
    use crate::error::JobError;
    use lamina_netlist::units::Dim;
    for (name, text) in sets {
        let (slot, dim): (&mut f64, Dim) = match name.as_str() {
            "kn" => (&mut stage.kn, Dim::TRANSCONDUCTANCE_PARAMETER),
            "kp" => (&mut stage.kp, Dim::TRANSCONDUCTANCE_PARAMETER),
            "vtn" => (&mut stage.vtn, Dim::VOLTAGE),
            "vtp" => (&mut stage.vtp, Dim::VOLTAGE),
            "vdd" => (&mut stage.vdd, Dim::VOLTAGE),
            "load" => (&mut stage.load, Dim::CAPACITANCE),
            "lambda" => (&mut stage.lambda, Dim::PER_VOLT),
            other => {
                return Err(JobError::Usage(format!(
                    "--set {other}: the built-in ring has no parameter `{other}`; its parameters \
                     are kn, kp, vtn, vtp, vdd, load and lambda"
                )))
            }
        };
        let v = lamina_netlist::values::parse_values(text, None, 1)
            .map_err(|why| JobError::Usage(format!("--set {name}={text}: {why}")))?;
        match v.as_slice() {
            [one] if one.dim == dim => *slot = one.si,
            [one] => {
                return Err(JobError::Usage(format!(
                    "--set {name}={text}: `{name}` is {}, but this is {}; write it with a unit, \
                     such as {name}={}",
                    dim.describe(),
                    one.dim.describe(),
                    dim.example().replace(' ', "")
                )))
            }
            _ => {
                return Err(JobError::Usage(format!(
                    "--set {name}={text}: give one value"
                )))
            }
        }
    }
    if !(stage.vdd > 0.0 && stage.load > 0.0 && stage.kn > 0.0 && stage.kp > 0.0) {
        return Err(JobError::Usage(
            "the built-in ring needs positive vdd, load, kn and kp".into(),
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::indexed;

    #[test]
    fn indexed_names_read_as_written_by_the_formatter() {
        let mut buf = String::new();
        for i in [0, 7, 10, 99, 100, 30_000, usize::MAX] {
            assert_eq!(indexed(&mut buf, "out", i), format!("out[{i}]"));
        }
    }
}
