//! # undertone-firmware
//!
//! The board program for a Cortex-M4F Undertone receiver, as a thin shell
//! around `undertone-dsp`'s `Receiver`: everything it decides, the PC has
//! already tested.
//!
//! * [`ads131`]: the converter driver (embedded-hal 1.0 `SpiDevice`, data-ready pin, delay).
//! * [`queue`]: data-ready interrupt → bounded SPSC queue → main loop, overruns counted.
//! * [`app`]: the application core (receiver, settings commands, gain steps).
//! * [`protocol`]: the line protocol of the settings channel.
//! * [`settings`], [`storage`]: settings and calibration, kept in the last flash sector.
//! * [`tone`]: the audible tone; [`supervisor`]: converter faults and re-initialisation.
//! * [`emulated`]: an emulated converter and the run the emulator image and its host twin share.
//!
//! Hardware-only code lives in `src/bin/board.rs` behind `target_os = "none"`,
//! so the rest builds and is tested on the PC.

#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod ads131;
pub mod app;
pub mod bench;
pub mod crc;
pub mod emulated;
pub mod num;
pub mod protocol;
pub mod queue;
pub mod settings;
pub mod storage;
pub mod supervisor;
pub mod tone;
