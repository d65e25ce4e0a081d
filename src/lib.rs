//! The `lamina` command's library half: built-in example circuits and the jobs the CLI runs
//! on them. The binary (`src/main.rs`) only turns flags into a plan and a result into an exit
//! code; everything it runs lives here so tests and benches use the same code.
//!
//! * [`builtin`]: circuits built in code (a square-law inverter and rings of it).
//! * [`ring`]: the ring-oscillator job: start-up with a single circulating edge, a transient
//!   that stops once enough periods have been seen, and the frequency measurement.
//! * [`ring_stress`]: the ring's frequency drift after a bias stress (slow traps) and its
//!   recovery.
//! * [`iv`]: device curves of the one FET in a file.
//! * [`cv`]: gate capacitances and the gate stack's parts of the one 2D-channel FET in a file.
//! * [`sweep`]: a file's analyses over a grid of parameter values, in parallel.
//! * [`montecarlo`]: a file's analyses over random samples of its declared spreads, with
//!   statistics, yield and the spreads that drive each figure.
//! * [`cluster`]: a study split over a batch scheduler's job array: the shard of an array
//!   task, the check that shards are complete, and the job-array script with its requests.
//! * [`plot`] and [`output`]: pictures (SVG and PNG) and data files, each written whole.
//! * [`design`]: jobs on circuit files: load with `--set` overrides, the check summary, and the
//!   analyses a file declares.
//! * [`op`]: the operating point with source powers and each FET's currents, small-signal
//!   figures and region.
//! * [`describe`]: resolved 2D-FET cards with the origin of every value, and figures derived
//!   from the stack (EOT, flat-band and threshold voltages), for `check --verbose`.
//! * [`extract`]: standard figures of measured transfer curves from a CSV data file.
//! * [`fit`]: a device card's keys fitted to measured curves, with what the data determine.
//! * [`delay`]: the delay job: propagation delays, polarity, rise and fall times of a path.
//! * [`small_signal`]: transfer function, admittances and a FET's two-port parameters and
//!   f_T at the operating point over frequency.
//!
//! Results are model estimates; check them against measurement and your process's rules
//! before basing a design decision on them.

#![deny(missing_docs)]

pub mod builtin;
pub mod cli;
pub mod cluster;
pub mod cv;
pub mod delay;
pub mod describe;
pub mod design;
pub mod error;
pub mod extract;
pub mod fit;
pub mod iv;
pub mod montecarlo;
pub mod op;
pub mod output;
pub mod plot;
pub mod ring;
pub mod ring_stress;
pub mod small_signal;
pub mod sweep;
pub mod transient;
pub mod vtc_sweep;
