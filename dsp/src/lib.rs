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
//! * [`field`] models the sources (point dipole, Griffiths eq. 5.89; long line
//!   current, Biot–Savart) and the coil head (positions, axes, gains).
//! * [`locate`] turns phasors into a signed field vector, bearing, orientation
//!   (in line / crossed), guidance along the axis, depth estimates (gradient,
//!   null span, known moment) with one-sigma uncertainty, and calibration.
//! * [`receiver`] is the pipeline the firmware and the simulator both drive.
//!
//! Units are SI inside (Hz, s, m, T) and carried in names (`_hz`, `_s`, `_m`).

#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod detect;
pub mod error;
pub mod field;
pub mod flags;
pub mod format;
pub mod locate;
pub mod phasor;
pub mod powf;
pub mod receiver;
pub mod trigf;

pub use detect::settings::{Beacon, DetectorKind, DetectorSettings};
pub use detect::window::Window;
pub use detect::{Detection, Detector, DetectorInfo};
pub use error::{ConfigError, Param};
pub use field::head::Head;
pub use field::FieldModel;
pub use flags::Flags;
pub use locate::locator::{Locator, LocatorSettings, Signal};
pub use phasor::C32;
pub use receiver::{Readout, Receiver, ReceiverSettings};
