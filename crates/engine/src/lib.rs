//! Lamina's numerical core: modified nodal analysis (MNA) with Newton iteration, DC operating
//! point and sweeps, and transient integration of charges.
//!
//! # Overview
//! * [`Circuit`] is built through the Rust API: named nodes ([`Circuit::GROUND`] is the
//!   reference), named elements with their pins. The engine reads no text and no files.
//! * Every element implements [`Element`] in charge-oriented form: given its terminal voltages
//!   (and internal unknowns) it returns terminal currents, terminal charges and both
//!   derivatives. Built-in elements live in [`elements`]; device models in other crates
//!   implement the same trait.
//! * [`System::new`] compiles a circuit once: unknown numbering, a sparsity pattern fixed for
//!   the whole run, buffers, and the sparse LU's symbolic analysis ([`lu`]).
//! * Analyses on a [`System`]: [`System::operating_point`] (with gmin stepping, source
//!   stepping and pseudo-transient fallbacks), [`System::dc_sweep`] and
//!   [`System::transient`] (backward Euler, trapezoidal, BDF2 or variable-order BDF 1-5, with
//!   adaptive steps).
//! * Linearised at a solution: [`System::linearize`] (`G`, `C`),
//!   [`System::element_linearization`] (one element seen from its pins) and
//!   [`System::small_signal`] (`(G + jωC) X = B` over a list of frequencies).
//!
//! Sign conventions: a terminal's current is the current flowing from the node into the
//! element; a terminal's charge is the charge the element holds at that terminal. Units are SI
//! throughout (V, A, C, s).
//!
//! # Example
//! ```
//! use lamina_engine::{Circuit, System, OpParams, elements::{Resistor, VoltageSource}};
//! let mut c = Circuit::new();
//! let top = c.node("top");
//! let mid = c.node("mid");
//! c.add("supply", VoltageSource::dc(1.0), &[top, Circuit::GROUND]).unwrap();
//! c.add("upper", Resistor::new(1e3), &[top, mid]).unwrap();
//! c.add("lower", Resistor::new(3e3), &[mid, Circuit::GROUND]).unwrap();
//! let mut sys = System::new(c).unwrap();
//! let (sol, info) = sys.operating_point(&OpParams::default()).unwrap();
//! let mid = sys.find_node("mid").unwrap();
//! assert!((sol.voltage(&sys, mid) - 0.75).abs() < 1e-9);
//! assert_eq!(info.method, lamina_engine::OpMethod::Newton);
//! ```
//!
//! What this crate deliberately does not do: parse circuit text, read or write files, or know
//! any particular device physics.

#![deny(missing_docs)]

mod bdf;
mod circuit;
mod dc;
pub mod element;
pub mod elements;
mod error;
mod latency;
mod linear;
pub mod lu;
mod small_signal;
mod stepping;
mod system;
mod transient;

pub use circuit::{Circuit, CircuitError, ElementId, NodeId};
pub use dc::{OpInfo, OpMethod, OpParams, Probe, Solution, SweepParams, SweepResult};
pub use element::{
    Analysis, Detail, DetailValue, Element, EvalContext, Internal, Stamp, UnknownKind,
};
pub use error::{Culprit, EngineError};
pub use faer::c64;
pub use linear::{ElementLinearization, Linearization};
pub use small_signal::{
    SmallSignalInfo, SmallSignalParams, SmallSignalResult, SmallSignalSolver, SourceKind,
};
pub use system::{DeviceEvaluations, NewtonInfo, NewtonParams, System, Tolerances};
pub use transient::{
    Control, Decimator, Integrator, Moved, Observer, Output, Start, Stepping, TransientParams,
    TransientResult, TransientStats,
};
