//! Input stage: raw ADC codes or floats to scaled samples, with fault counting.
//!
//! `x_c = code_c · scale_c` (i32 codes from 16- or 24-bit converters) or
//! `x_c = v_c · scale_c` (f32). A code at or beyond ±full scale counts as
//! clipped (the sample is still used: the converter saturated, the waveform is
//! distorted); a NaN or infinite sample counts as non-finite and is replaced by
//! zero so it never reaches a phasor.

use crate::error::{ConfigError, Param};

/// Per-channel input scaling and the converter's full scale.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct InputScale<const N: usize> {
    /// Multiplier per channel: field or volt units per code (or per f32 input unit).
    pub scale: [f32; N],
    /// Largest positive code of the converter (2^(bits−1) − 1).
    pub full_scale_code: i32,
    /// Full scale of f32 input, in input units before `scale` (1.0 for a sound card).
    pub full_scale: f32,
}

impl<const N: usize> InputScale<N> {
    /// Unit scale, for a converter of `bits` bits (8 to 32); f32 input full scale 1.0.
    pub fn unity(bits: u32) -> Self {
        let b = bits.clamp(8, 32);
        let fsc = if b >= 32 { i32::MAX } else { (1i64 << (b - 1)) as i32 - 1 };
        Self { scale: [1.0; N], full_scale_code: fsc, full_scale: 1.0 }
    }

    /// Check scales are finite and non-zero and full scales positive.
    pub fn validate(&self) -> Result<(), ConfigError> {
        for &s in self.scale.iter() {
            if !s.is_finite() || s == 0.0 {
                return Err(ConfigError { param: Param::ChannelScale, value: s, min: f32::MIN_POSITIVE, max: f32::MAX });
            }
        }
        ConfigError::check(Param::FullScale, self.full_scale, f32::MIN_POSITIVE, f32::MAX)?;
        ConfigError::check(Param::FullScale, self.full_scale_code as f32, 1.0, i32::MAX as f32)?;
        Ok(())
    }
}

/// Per-channel counts over one readout interval.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChannelStats<const N: usize> {
    /// Samples at or beyond full scale.
    pub clipped: [u32; N],
    /// NaN or infinite samples (replaced by zero).
    pub non_finite: [u32; N],
    /// Largest |sample| as a fraction of full scale (0 … ≥1).
    pub peak_fraction: [f32; N],
    /// Samples counted.
    pub samples: u32,
}

impl<const N: usize> ChannelStats<N> {
    /// All zero.
    pub const fn new() -> Self {
        Self { clipped: [0; N], non_finite: [0; N], peak_fraction: [0.0; N], samples: 0 }
    }

    /// Any clipping on any channel.
    pub fn any_clipped(&self) -> bool {
        self.clipped.iter().any(|&c| c > 0)
    }

    /// Any non-finite sample on any channel.
    pub fn any_non_finite(&self) -> bool {
        self.non_finite.iter().any(|&c| c > 0)
    }
}

impl<const N: usize> Default for ChannelStats<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> InputScale<N> {
    /// Convert codes, updating `stats`.
    #[inline]
    pub fn codes(&self, codes: &[i32; N], stats: &mut ChannelStats<N>) -> [f32; N] {
        let mut out = [0.0; N];
        let fsc = self.full_scale_code;
        let inv = 1.0 / fsc as f32;
        for c in 0..N {
            let k = codes[c];
            if k >= fsc || k <= -fsc {
                stats.clipped[c] += 1;
            }
            let frac = libm::fabsf(k as f32) * inv;
            if frac > stats.peak_fraction[c] {
                stats.peak_fraction[c] = frac;
            }
            let y = k as f32 * self.scale[c];
            if y.is_finite() {
                out[c] = y;
            } else {
                stats.non_finite[c] += 1;
            }
        }
        stats.samples += 1;
        out
    }

    /// Statistics of a block of codes already mixed, from the OR of their
    /// one's-complement magnitudes `or` (`k ^ (k >> 31)`: `k` for `k ≥ 0`,
    /// `|k| − 1` below). With b the highest set bit of the OR, every code obeys
    /// `|k| ≤ 2^(b+1)`, and some code has `|k| ≥ 2^b`. Blocks that may reach full
    /// scale are recounted exactly (clipping counts and the true peak); for the
    /// rest the peak is the bound `2^(b+1)`, at most twice the true peak (one code
    /// for a block of zeros, which the OR cannot tell from −1), and nothing can be
    /// clipped. (For a 24-bit converter the recount starts at 2^22, half of full scale.)
    ///
    /// ```
    /// use undertone_dsp::detect::input::{ChannelStats, InputScale};
    /// let scale = InputScale::<1>::unity(24); // full scale ±8 388 607
    /// let frames = [[8_388_607], [-3], [12]];
    /// let or = frames.iter().fold([0u32], |o, f| [o[0] | (f[0] ^ (f[0] >> 31)) as u32]);
    /// let mut stats = ChannelStats::new();
    /// scale.code_stats(&frames, &or, &mut stats);
    /// assert_eq!((stats.clipped[0], stats.samples), (1, 3));
    /// assert_eq!(stats.peak_fraction[0], 1.0);
    /// ```
    pub fn code_stats(&self, frames: &[[i32; N]], or: &[u32; N], stats: &mut ChannelStats<N>) {
        let fsc = self.full_scale_code;
        // A code clips when its magnitude term reaches fsc − 1 (k ≤ −fsc) or fsc (k ≥ fsc), so
        // an OR below the highest power of two not above fsc − 1 proves nothing clipped
        // (fsc = 1: always recount).
        let lim = (fsc as u32).saturating_sub(1);
        let top = if lim == 0 { 0 } else { 1u32 << (31 - lim.leading_zeros()) };
        let inv = 1.0 / fsc as f32;
        for c in 0..N {
            let peak = if or[c] >= top {
                let mut m = 0u32;
                for f in frames {
                    let k = f[c];
                    if k >= fsc || k <= -fsc {
                        stats.clipped[c] += 1;
                    }
                    m = m.max(k.unsigned_abs());
                }
                m
            } else {
                // or < top ≤ 2^30, so the shift stays below 31.
                1u32 << (32 - or[c].leading_zeros())
            };
            let frac = peak as f32 * inv;
            if frac > stats.peak_fraction[c] {
                stats.peak_fraction[c] = frac;
            }
        }
        stats.samples += frames.len() as u32;
    }

    /// Convert floats, updating `stats`.
    #[inline]
    pub fn floats(&self, v: &[f32; N], stats: &mut ChannelStats<N>) -> [f32; N] {
        let mut out = [0.0; N];
        let inv = 1.0 / self.full_scale;
        for c in 0..N {
            let x = v[c];
            if !x.is_finite() {
                stats.non_finite[c] += 1;
                continue;
            }
            let frac = libm::fabsf(x) * inv;
            if frac >= 1.0 {
                stats.clipped[c] += 1;
            }
            if frac > stats.peak_fraction[c] {
                stats.peak_fraction[c] = frac;
            }
            // Saturate at full scale, as the converter would.
            let x = x.clamp(-self.full_scale, self.full_scale);
            let y = x * self.scale[c];
            out[c] = if y.is_finite() { y } else { 0.0 };
        }
        stats.samples += 1;
        out
    }
}
