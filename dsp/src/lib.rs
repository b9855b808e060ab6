//! # undertone-dsp
//!
//! The receiver's brain for finding buried pipe beacons (sondes), with no
//! hardware in it: `no_std`, no allocation, no `unsafe`, and no panics on any
//! input (NaN, infinities, full-scale codes, zeros, DC are counted, flagged and
//! carried past).
//!
//! ## The model
//! A sonde is a small magnetic dipole radiating one tone `f0` (512 Hz and
//! 640 Hz are the usual ones; 8192 Hz and 32768 Hz also exist). Each pickup coil
//! sees `v_c[n] = A_c·cos(2πf0·n/fs + φ) + noise`, where the amplitude `A_c` is
//! the projection of the dipole field on the coil axis (signed: all coils share
//! one phase `φ` up to a sign for a clean dipole field).
//!
//! * [`detect`] turns interleaved multi-coil frames into one phasor `A_c·e^{jφ_c}`
//!   per coil against one shared reference, by a windowed generalised Goertzel
//!   over overlapping blocks or a continuous lock-in, with per-coil noise σ,
//!   mains awareness, a frequency scan and a frequency-offset estimate.
//!
//! Units are SI inside (Hz, s, m, T) and carried in names (`_hz`, `_s`, `_m`).

#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![warn(missing_docs)]
#![allow(clippy::needless_range_loop)]

pub mod complex;
pub mod detect;
pub mod error;
pub mod flags;

pub use complex::C32;
pub use detect::settings::{Beacon, DetectorKind, DetectorSettings};
pub use detect::window::Window;
pub use detect::{Detection, Detector, DetectorInfo};
pub use error::{ConfigError, Param};
pub use flags::Flags;
