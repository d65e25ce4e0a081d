//! Resistor, capacitor, inductor and a two-terminal capacitor defined by its charge function.

use crate::element::{Element, EvalContext, Internal, Stamp, UnknownKind};
use std::sync::Arc;

const TWO_PINS: &[&str] = &["a", "b"];

/// Linear resistor between `a` and `b`: `i = (v_a - v_b) / R`.
#[derive(Clone, Debug)]
pub struct Resistor {
    conductance: f64,
}

impl Resistor {
    /// A resistor of `ohms`. Panics are avoided by the caller checking `ohms > 0` and finite;
    /// [`crate::Circuit::add`] rejects elements whose parameters are not finite.
    pub fn new(ohms: f64) -> Self {
        Resistor {
            conductance: 1.0 / ohms,
        }
    }
}

impl Element for Resistor {
    fn kind(&self) -> &'static str {
        "resistor"
    }
    fn terminals(&self) -> &'static [&'static str] {
        TWO_PINS
    }
    fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
        let g = self.conductance;
        out.branch_current(0, 1, g * (x[0] - x[1]), g);
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}

/// Linear capacitor between `a` and `b`: `q_a = C (v_a - v_b)`, `q_b = -q_a`.
#[derive(Clone, Debug)]
pub struct Capacitor {
    farads: f64,
}

impl Capacitor {
    /// A capacitor of `farads`.
    pub fn new(farads: f64) -> Self {
        Capacitor { farads }
    }
}

impl Element for Capacitor {
    fn kind(&self) -> &'static str {
        "capacitor"
    }
    fn terminals(&self) -> &'static [&'static str] {
        TWO_PINS
    }
    fn has_charge(&self) -> bool {
        true
    }
    fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
        let c = self.farads;
        out.branch_charge(0, 1, c * (x[0] - x[1]), c);
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}

/// Linear inductor between `a` and `b` with branch current `i` (from `a` through the inductor
/// to `b`): flux `φ = L i`, branch equation `dφ/dt - (v_a - v_b) = 0`.
#[derive(Clone, Debug)]
pub struct Inductor {
    henries: f64,
}

impl Inductor {
    /// An inductor of `henries`.
    pub fn new(henries: f64) -> Self {
        Inductor { henries }
    }
}

const BRANCH_CURRENT: &[Internal] = &[Internal {
    name: "i",
    kind: UnknownKind::Current,
}];

impl Element for Inductor {
    fn kind(&self) -> &'static str {
        "inductor"
    }
    fn terminals(&self) -> &'static [&'static str] {
        TWO_PINS
    }
    fn internals(&self) -> &'static [Internal] {
        BRANCH_CURRENT
    }
    fn has_charge(&self) -> bool {
        true
    }
    fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
        let i = x[2];
        out.add_f(0, i);
        out.add_f(1, -i);
        out.add_df(0, 2, 1.0);
        out.add_df(1, 2, -1.0);
        out.add_f(2, -(x[0] - x[1]));
        out.add_df(2, 0, -1.0);
        out.add_df(2, 1, 1.0);
        out.add_q(2, self.henries * i);
        out.add_dq(2, 2, self.henries);
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}

/// A charge law `v -> (q(v), dq/dv)` for [`NonlinearCapacitor`].
pub type ChargeFn = Arc<dyn Fn(f64) -> (f64, f64) + Send + Sync>;

/// Two-terminal capacitor whose charge is any smooth function of its voltage:
/// `q_a = Q(v_a - v_b)`, `q_b = -q_a`. Used to check that the engine conserves charge.
#[derive(Clone)]
pub struct NonlinearCapacitor {
    law: ChargeFn,
}

impl NonlinearCapacitor {
    /// A capacitor with charge law `law(v) = (q, dq/dv)`.
    pub fn new(law: ChargeFn) -> Self {
        NonlinearCapacitor { law }
    }
}

impl std::fmt::Debug for NonlinearCapacitor {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("NonlinearCapacitor")
    }
}

impl Element for NonlinearCapacitor {
    fn kind(&self) -> &'static str {
        "nonlinear capacitor"
    }
    fn terminals(&self) -> &'static [&'static str] {
        TWO_PINS
    }
    fn has_charge(&self) -> bool {
        true
    }
    fn evaluate(&self, x: &[f64], _ctx: &EvalContext, out: &mut Stamp<'_>) {
        let (q, c) = (self.law)(x[0] - x[1]);
        out.branch_charge(0, 1, q, c);
    }
    fn boxed_clone(&self) -> Box<dyn Element> {
        Box::new(self.clone())
    }
}
