//! The audible tone: people locate by ear.
//!
//! Pitch rises with strength: `f = f_lo·(f_hi/f_lo)^x`, `x = (L − L_floor)/range`
//! clamped to 0…1, with `L` the strength in dB and `L_floor` a floor that
//! follows the noise (SNR 6 dB maps to the lowest pitch). On clipping the tone
//! is muted and replaced by a warning pattern (two short beeps at a fixed pitch,
//! 4 per second), so a saturated front end is never mistaken for a strong peak.
//!
//! The pitch is computed with `micromath`'s approximations (`exp`): the tone is
//! off the bit-exact path the emulator check compares, and a pitch within a
//! fraction of a percent of the law is all an ear can use. The test below bounds
//! the approximation against `libm`.

use micromath::F32Ext;
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
    Tone::Pitch(pitch_hz(x.min(1.0)))
}

/// `f_lo·(f_hi/f_lo)^x` for x in 0…1, by `micromath`'s exponential.
pub fn pitch_hz(x: f32) -> f32 {
    // ln(1760/220) = ln 8 = 3·ln 2.
    F_LO_HZ * F32Ext::exp(x * 3.0 * core::f32::consts::LN_2)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn approximate_pitch_law_within_half_a_percent() {
        assert_eq!(F_HI_HZ / F_LO_HZ, 8.0);
        for i in 0..=100 {
            let x = i as f32 / 100.0;
            let exact = F_LO_HZ * libm::powf(F_HI_HZ / F_LO_HZ, x);
            assert!((pitch_hz(x) / exact - 1.0).abs() < 5e-3, "{x}: {} vs {exact}", pitch_hz(x));
        }
    }
}
