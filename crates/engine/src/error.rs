//! The engine's error type: every failure names the unknowns, elements, time and residual
//! behind it, and says what was tried.

use crate::circuit::CircuitError;
use std::fmt;

/// One unknown that stands out in a failure, with the elements attached to it.
#[derive(Clone, Debug, PartialEq)]
pub struct Culprit {
    /// The unknown's name: `node out` or `element.internal`.
    pub unknown: String,
    /// Its equation's residual (A for node rows, V for branch rows) or its last Newton update.
    pub value: f64,
    /// The tolerance `value` was compared with.
    pub tolerance: f64,
    /// Names of the elements connected to this unknown (a few at most).
    pub elements: Vec<String>,
}

impl fmt::Display for Culprit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} (residual {:.3e}, tolerance {:.3e}",
            self.unknown, self.value, self.tolerance
        )?;
        if !self.elements.is_empty() {
            write!(f, ", attached to {}", self.elements.join(", "))?;
        }
        f.write_str(")")
    }
}

/// Why an analysis failed.
#[derive(Clone, Debug, PartialEq)]
pub enum EngineError {
    /// The circuit could not be built.
    Circuit(CircuitError),
    /// A request that does not fit the circuit (an unknown probe, a bad parameter).
    Invalid(String),
    /// The Newton matrix is singular at an unknown (a floating node, a loop of voltage
    /// sources, a node held only by devices that are off).
    Singular {
        /// Which analysis and, in time, when.
        context: String,
        /// The unknown whose column broke the elimination, with its elements.
        culprit: Culprit,
    },
    /// An element returned a current or charge that is not a finite number (a device model
    /// outside the range where its arithmetic holds).
    NotANumber {
        /// Which analysis and, in time, when.
        context: String,
        /// The unknown whose equation received it, with its elements.
        culprit: Culprit,
    },
    /// Newton iteration did not converge.
    NoConvergence {
        /// Which analysis and, in time, when.
        context: String,
        /// The worst equations, worst first.
        worst: Vec<Culprit>,
        /// What was tried, in order.
        tried: Vec<String>,
    },
    /// The transient step fell below its minimum.
    StepTooSmall {
        /// Time reached.
        time: f64,
        /// The step that was refused.
        step: f64,
        /// The worst equations of the last attempt, worst first.
        worst: Vec<Culprit>,
        /// What was tried.
        tried: Vec<String>,
    },
}

impl From<CircuitError> for EngineError {
    fn from(e: CircuitError) -> Self {
        EngineError::Circuit(e)
    }
}

fn list(f: &mut fmt::Formatter<'_>, worst: &[Culprit]) -> fmt::Result {
    for c in worst {
        write!(f, "\n  worst: {c}")?;
    }
    Ok(())
}

impl fmt::Display for EngineError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            EngineError::Circuit(e) => write!(f, "{e}"),
            EngineError::Invalid(msg) => f.write_str(msg),
            EngineError::Singular { context, culprit } => write!(
                f,
                "{context}: the circuit matrix is singular at {}; give this node a path to ground \
                 or check for loops of voltage sources",
                culprit
            ),
            EngineError::NotANumber { context, culprit } => write!(
                f,
                "{context}: an element returned a value that is not a number in the equation of \
                 {}; the device model has left the range where its arithmetic holds at this \
                 bias: check its parameters and the bias, and report it if they are plausible",
                culprit
            ),
            EngineError::NoConvergence {
                context,
                worst,
                tried,
            } => {
                write!(
                    f,
                    "{context}: no convergence after trying {}",
                    tried.join(", then ")
                )?;
                list(f, worst)
            }
            EngineError::StepTooSmall {
                time,
                step,
                worst,
                tried,
            } => {
                write!(
                    f,
                    "transient at t = {time:.6e} s: time step {step:.3e} s is below the minimum \
                     after trying {}",
                    tried.join(", then ")
                )?;
                list(f, worst)
            }
        }
    }
}

impl std::error::Error for EngineError {}
