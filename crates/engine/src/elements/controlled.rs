//! Voltage-controlled voltage and current sources.

use crate::element::{Element, EvalContext, Internal, Stamp, UnknownKind};

const FOUR_PINS: &[&str] = &["out_pos", "out_neg", "ctrl_pos", "ctrl_neg"];
const BRANCH_CURRENT: &[Internal] = &[Internal {
    name: "i",
    kind: UnknownKind::Current,
}];

/// Voltage-controlled voltage source: `v_out_pos - v_out_neg = gain (v_ctrl_pos - v_ctrl_neg)`.
/// Its branch current `i` flows from `out_pos` through the source to `out_neg`.
#[derive(Clone, Debug)]
pub struct Vcvs {
    gain: f64,
}

impl Vcvs {
    /// A source with voltage gain `gain` (V/V).
    pub fn new(gain: f64) -> Self {
        Vcvs { gain }
    }
}

impl Element for Vcvs {
    fn kind(&self) -> &'static str {
        "voltage-controlled voltage source"
    }
    fn terminals(&self) -> &'static [&'static str] {
        FOUR_PINS
    }
    fn internals(&self) -> &'static [Internal] {
        BRANCH_CURRENT
    }
    fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
        let i = x[4];
        out.add_f(0, i);
        out.add_f(1, -i);
        out.add_df(0, 4, 1.0);
        out.add_df(1, 4, -1.0);
        out.add_f(4, x[0] - x[1] - self.gain * (x[2] - x[3]));
        out.add_df(4, 0, 1.0);
        out.add_df(4, 1, -1.0);
        out.add_df(4, 2, -self.gain);
        out.add_df(4, 3, self.gain);
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}

/// Voltage-controlled current source: a current `gm (v_ctrl_pos - v_ctrl_neg)` flows from
/// `out_pos` through the source to `out_neg`.
#[derive(Clone, Debug)]
pub struct Vccs {
    transconductance: f64,
}

impl Vccs {
    /// A source with transconductance `gm` (A/V).
    pub fn new(gm: f64) -> Self {
        Vccs {
            transconductance: gm,
        }
    }
}

impl Element for Vccs {
    fn kind(&self) -> &'static str {
        "voltage-controlled current source"
    }
    fn terminals(&self) -> &'static [&'static str] {
        FOUR_PINS
    }
    fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
        let gm = self.transconductance;
        let i = gm * (x[2] - x[3]);
        out.add_f(0, i);
        out.add_f(1, -i);
        out.add_df(0, 2, gm);
        out.add_df(0, 3, -gm);
        out.add_df(1, 2, -gm);
        out.add_df(1, 3, gm);
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}
