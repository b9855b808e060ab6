//! Undertone firmware: a thin shell around `undertone-dsp`.
#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
