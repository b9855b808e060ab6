//! Locating maths: signed field, orientation, guidance, depth, calibration.

pub mod calibration;
pub mod components;
pub mod depth;
pub mod fit;
pub mod guidance;
pub mod orientation;
