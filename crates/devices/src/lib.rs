//! Device models for Lamina, each behind the engine's [`lamina_engine::Element`] trait.
//!
//! * [`SheetFet`]: the 2D-channel FET ([`sheet_fet`]): a gate stack ([`SheetFetCard`]) with a
//!   metal or Dirac-semimetal gate, layered insulator and a monolayer channel; exact Fermi-Dirac
//!   electrostatics ([`physics`]), charge-sheet drift-diffusion current, Ward-Dutton charges,
//!   velocity saturation, contact resistance and overlap capacitance. Cards are checked in two
//!   steps: [`SheetFetCard::validate`] refuses values the arithmetic cannot carry, and
//!   [`warnings::plausibility`] flags valid values the physics does not cover.
//! * [`mobility`]: how a sheet FET's mobilities are obtained (as given, a power law in
//!   temperature, or acoustic-phonon limited from deformation potentials, each optionally
//!   combined with an impurity-limited mobility by Matthiessen's rule), and the report of
//!   what a device uses ([`SheetFet::mobility_report`]).
//! * [`SquareLawFet`]: the long-channel square-law field-effect transistor, n or p type, with
//!   optional channel-length modulation and Ward-Dutton intrinsic charges. It is a check
//!   element with closed-form answers, not a model of any real device.
//!
//! ```
//! use lamina_devices::{SquareLawFet, Polarity};
//! use lamina_engine::{Element, EvalContext, Stamp};
//! let fet = SquareLawFet::new(Polarity::N, 100e-6, 0.3);
//! let (mut f, mut q, mut df, mut dq) = ([0.0; 3], [0.0; 3], [0.0; 9], [0.0; 9]);
//! // drain 1 V, gate 0.8 V, source 0 V: saturated, I = k (V_GS - V_T)^2 / 2
//! fet.evaluate(&[1.0, 0.8, 0.0], &EvalContext::dc(), &mut Stamp::new(&mut f, &mut q, &mut df, &mut dq));
//! assert!((f[0] - 100e-6 * 0.25 / 2.0).abs() < 1e-15);
//! ```
//!
//! What this crate does not do: numerics of the circuit (the engine does that) or parsing.

#![deny(missing_docs)]

pub mod contact;
pub mod dual;
pub mod materials;
pub mod mobility;
pub mod physics;
pub mod sheet_fet;
pub mod short_channel;
mod square_law;
pub mod warnings;

pub use sheet_fet::{ContactCard, ExtraValley, Gate, Layer, SheetFet, SheetFetCard, SheetModel};
pub use square_law::{Polarity, SquareLawFet};
