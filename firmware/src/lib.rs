//! # undertone-firmware
//!
//! The board program for a Cortex-M4F Undertone receiver, as a thin shell
//! around `undertone-dsp`'s `Receiver`: everything it decides, the PC has
//! already tested. One [`app::App`] owns the main loop's work; the board
//! binary and the emulator image only connect hardware to it.
//!
//! * [`app`]: the application (queue → receiver → gains, supervisor, commands, buttons, battery, screen).
//! * [`ads131`]: the converter driver (embedded-hal 1.0 `SpiDevice`, data-ready pin, delay).
//! * [`queue`]: data-ready interrupt → split SPSC queue → main loop, lost frames counted atomically.
//! * [`clock`]: a 64-bit millisecond clock from a wrapping tick counter; [`supervisor`]: converter faults.
//! * [`view`], [`screen`]: what the screen shows of a readout, and the drawing (any `DrawTarget`).
//! * [`buttons`], [`menu`]: three debounced buttons and the menu they drive; [`jobs`]: check, calibration, scan.
//! * [`battery`]: battery voltage, charge estimate and warnings.
//! * [`protocol`], [`num`]: the command line protocol and its numbers.
//! * [`settings`], [`storage`], [`crc`]: settings and calibration, kept in the last flash sector.
//! * [`tone`]: the audible tone.
//! * [`emulated`]: an emulated converter and the run the emulator image and its host twin share.
//!
//! Hardware-only code lives in `src/bin/board.rs` behind the `board` feature,
//! so the rest builds and is tested on the PC.

#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod ads131;
pub mod app;
pub mod battery;
pub mod bench;
pub mod buttons;
pub mod clock;
pub mod crc;
pub mod emulated;
pub mod jobs;
pub mod menu;
pub mod num;
pub mod protocol;
pub mod queue;
pub mod screen;
pub mod settings;
pub mod storage;
pub mod supervisor;
pub mod tone;
pub mod view;
