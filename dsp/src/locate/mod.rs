//! Locating maths: from the coil phasors to what the receiver shows.
//!
//! * [`components`]: phasors → signed field per coil, bearing, quadrature residue.
//! * [`orientation`]: in line (peak) or crossed (null), with hysteresis.
//! * [`track`]: which side the sonde lies, from the change of the field as the receiver moves.
//! * [`fit`]: the one-station dipole fit for heads with two triads.
//! * [`guidance`]: the directions shown, each known or "unsure" with the reason.
//! * [`depth`]: depth estimators, each a depth with σ or the reason it is withheld.
//! * [`calibration`]: coil gain and strength calibration, the pre-job check.
//! * [`locator`]: the [`Locator`](locator::Locator) that owns the locating state and wires the steps.

pub mod calibration;
pub mod components;
pub mod depth;
pub mod fit;
pub mod guidance;
pub mod locator;
pub mod orientation;
pub mod track;
