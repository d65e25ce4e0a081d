//! Independent voltage and current sources driven by a [`Waveform`].

use super::waveform::Waveform;
use crate::element::{Element, EvalContext, Internal, Stamp, UnknownKind};

const SOURCE_PINS: &[&str] = &["pos", "neg"];
const BRANCH_CURRENT: &[Internal] = &[Internal {
    name: "i",
    kind: UnknownKind::Current,
}];

/// Independent voltage source: `v_pos - v_neg = w(t)`. Its branch current `i` flows from `pos`
/// through the source to `neg`, so a supply delivering power has a negative `i`.
#[derive(Clone, Debug)]
pub struct VoltageSource {
    waveform: Waveform,
}

impl VoltageSource {
    /// A source following `waveform`.
    pub fn new(waveform: Waveform) -> Self {
        VoltageSource { waveform }
    }

    /// A constant source of `volts`.
    pub fn dc(volts: f64) -> Self {
        VoltageSource {
            waveform: Waveform::Constant(volts),
        }
    }
}

impl Element for VoltageSource {
    fn kind(&self) -> &'static str {
        "voltage source"
    }
    fn terminals(&self) -> &'static [&'static str] {
        SOURCE_PINS
    }
    fn internals(&self) -> &'static [Internal] {
        BRANCH_CURRENT
    }
    fn evaluate(&self, x: &[f64], ctx: &EvalContext, out: &mut Stamp<'_>) {
        let i = x[2];
        out.add_f(0, i);
        out.add_f(1, -i);
        out.add_df(0, 2, 1.0);
        out.add_df(1, 2, -1.0);
        let v = ctx.source_scale * self.waveform.value(ctx.time);
        out.add_f(2, x[0] - x[1] - v);
        out.add_df(2, 0, 1.0);
        out.add_df(2, 1, -1.0);
    }
    fn next_breakpoint(&self, after: f64) -> Option<f64> {
        self.waveform.next_breakpoint(after)
    }
    fn is_ideal_voltage_source(&self) -> bool {
        true
    }
    fn is_independent_source(&self) -> bool {
        true
    }
    fn set_constant_value(&mut self, value: f64) -> bool {
        self.waveform = Waveform::Constant(value);
        true
    }
    fn set_waveform(&mut self, waveform: &Waveform) -> bool {
        self.waveform = waveform.clone();
        true
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}

/// Independent current source: drives `w(t)` amperes out of its `pos` terminal into the
/// circuit (and takes it back at `neg`), like a battery's positive terminal.
#[derive(Clone, Debug)]
pub struct CurrentSource {
    waveform: Waveform,
}

impl CurrentSource {
    /// A source following `waveform`.
    pub fn new(waveform: Waveform) -> Self {
        CurrentSource { waveform }
    }
}

impl Element for CurrentSource {
    fn kind(&self) -> &'static str {
        "current source"
    }
    fn terminals(&self) -> &'static [&'static str] {
        SOURCE_PINS
    }
    fn evaluate(&self, _x: &[f64], ctx: &EvalContext, out: &mut Stamp<'_>) {
        let i = ctx.source_scale * self.waveform.value(ctx.time);
        out.add_f(0, -i);
        out.add_f(1, i);
    }
    fn next_breakpoint(&self, after: f64) -> Option<f64> {
        self.waveform.next_breakpoint(after)
    }
    fn is_independent_source(&self) -> bool {
        true
    }
    fn set_constant_value(&mut self, value: f64) -> bool {
        self.waveform = Waveform::Constant(value);
        true
    }
    fn set_waveform(&mut self, waveform: &Waveform) -> bool {
        self.waveform = waveform.clone();
        true
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}
