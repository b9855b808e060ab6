//! Undertone host simulator: synthetic coil signals from the physics, run
//! through the same `undertone-dsp` pipeline the firmware runs.

pub mod detector_demo;
