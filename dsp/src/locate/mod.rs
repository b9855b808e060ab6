//! Locating maths: from the coil phasors to what the receiver shows.
//!
//! * [`components`]: phasors → signed field per coil, bearing, quadrature residue.
//! * [`orientation`]: in line (peak) or crossed (null), with hysteresis.
//! * [`trail`]: every station the head has passed lately, fitted together to one sonde.
//! * [`fit`]: the one-station dipole fit and the dipole model's Jacobian.
//! * [`small`]: fixed-size matrix helpers for the fits.
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
pub mod small;
pub mod trail;
