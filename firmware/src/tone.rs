//! The audible tone: people locate by ear.
//!
//! Pitch rises with strength: `f = f_lo·(f_hi/f_lo)^x`, `x = (L − L_floor)/range`
//! clamped to 0…1, with `L` the strength in dB and `L_floor` a floor that
//! follows the noise (SNR 6 dB maps to the lowest pitch). On clipping the tone
//! is muted and replaced by a warning pattern (two short beeps at a fixed pitch,
//! 4 per second), so a saturated front end is never mistaken for a strong peak.

use undertone_dsp::{Flags, Readout};

/// Lowest pitch, Hz.
pub const F_LO_HZ: f32 = 220.0;
/// Highest pitch, Hz.
pub const F_HI_HZ: f32 = 1760.0;
/// dB of SNR spread over the pitch range.
pub const RANGE_DB: f32 = 50.0;
/// Warning pitch, Hz.
pub const WARN_HZ: f32 = 2500.0;

/// What the speaker should do.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Tone {
    /// Silent.
    Off,
    /// A steady tone.
    Pitch(f32),
    /// The clipping warning pattern.
    Warning,
}

impl Tone {
    /// Pitch at time `t_ms` (0 = silent): the warning is on for 60 ms, off 40 ms, on 60 ms, off 90 ms.
    pub fn pitch_at(self, t_ms: u32) -> f32 {
        match self {
            Tone::Off => 0.0,
            Tone::Pitch(f) => f,
            Tone::Warning => {
                let p = t_ms % 250;
                if p < 60 || (100..160).contains(&p) {
                    WARN_HZ
                } else {
                    0.0
                }
            }
        }
    }
}

/// The tone for a readout.
pub fn tone_for<const N: usize>(r: &Readout<N>) -> Tone {
    if r.flags.contains(Flags::CLIPPED) {
        return Tone::Warning;
    }
    let x = (r.snr_db - 6.0) / RANGE_DB;
    if !(x > 0.0) {
        return Tone::Off;
    }
    let x = x.min(1.0);
    Tone::Pitch(F_LO_HZ * libm::powf(F_HI_HZ / F_LO_HZ, x))
}
