//! The engine's built-in elements: passives, independent and controlled sources.
//!
//! Sign conventions follow [`crate::element`]: a terminal row's `f` is the current flowing from
//! the node into the element there, a terminal row's `q` is the charge the element holds there.

mod controlled;
mod passive;
mod sources;
mod waveform;

pub use controlled::{Vccs, Vcvs};
pub use passive::{Capacitor, ChargeFn, Inductor, NonlinearCapacitor, Resistor};
pub use sources::{CurrentSource, VoltageSource};
pub use waveform::{Pulse, Sine, Waveform, WaveformError};
