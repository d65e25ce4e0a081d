//! Metrics from curves and waveforms: pure functions on sampled data, no simulation.
//!
//! * [`crossings`]: interpolated times where a signal crosses a level in one direction.
//! * [`period`]: period and frequency from rising crossings after start-up is discarded,
//!   with the spread of the periods used.
//! * [`transfer`]: switching threshold, output levels, unity-gain points, noise margins and peak
//!   gain of a transfer curve.
//! * [`snm`]: maximum-square static noise margin of two curves (Seevinck's rotation).
//! * [`waveform`]: transitions between settled levels (`transitions`), each output transition
//!   paired with the input transition that caused it and the path's polarity (`path_delays`),
//!   transition times, propagation delays, average power over a window.
//! * [`lsq`]: bounded least squares with standard errors, correlations and the parameter
//!   combinations the data cannot determine (for calibration).
//! * [`device`]: subthreshold swing (also above a current floor, with its rounding), threshold
//!   voltage (constant current, maximum g_m), currents and slopes at given biases.
//!
//! ```
//! use lamina_measure::{crossings, Direction};
//! let t = [0.0, 1.0, 2.0, 3.0];
//! let v = [0.0, 1.0, 0.0, 1.0];
//! let up = crossings(&t, &v, 0.5, Direction::Rising);
//! assert_eq!(up, vec![0.5, 2.5]);
//! ```

#![deny(missing_docs)]

pub mod device;
pub mod lsq;
mod period;
pub mod snm;
pub mod transfer;
pub mod waveform;

pub use period::{crossings, period, settled_discard, Direction, PeriodError, PeriodEstimate};
