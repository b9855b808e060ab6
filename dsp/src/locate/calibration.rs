//! Calibration and the check before a job.
//!
//! * **Coil gain calibration**: with the sonde level at a known distance `d`
//!   directly below the head and the head in line, the gradient ratio should be
//!   `R_true = ((d + s)/d)^n`. The measured `R_m` gives the upper coil's gain
//!   correction `c = R_m/R_true` (its readings are multiplied by `c`), after which
//!   the gradient depth at `d` comes out right.
//! * **Strength calibration**: the same set-up gives `K = A_low·d^n` for the
//!   known-moment depth (`A_low` the peak reading), with `σ_K/K = σ_A/A`.
//! * **Pre-job check**: with the sonde at a stated distance on the surface, the
//!   tone must be present (SNR), its frequency offset is reported, and its
//!   strength is compared with the calibration (a weak battery shows as a
//!   smaller moment).

use crate::error::{ConfigError, Param};
use crate::field::FieldModel;

/// Minimum amplitude SNR (A/σ) accepted for calibration, 30 dB.
pub const MIN_CAL_SNR: f32 = 31.6;
/// Largest |Bz/Bh| accepted for calibration (directly below).
pub const MAX_CAL_RATIO: f32 = 0.1;
/// Known distances accepted for calibration and the pre-job check, m.
pub const DISTANCE_RANGE_M: (f32, f32) = (0.2, 5.0);
/// Upper-coil gain corrections accepted: beyond ±30 % means a wiring or geometry fault, not a gain spread.
pub const UPPER_GAIN_RANGE: (f32, f32) = (0.7, 1.3);

/// Stored calibration data.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Calibration {
    /// Multiplier for the upper along-coil reading.
    pub upper_gain: f32,
    /// Strength K (T·m³ for a dipole, T·m for a line) in reading units; 0 = not calibrated.
    pub strength: f32,
    /// One-sigma of the strength.
    pub strength_sigma: f32,
}

impl Default for Calibration {
    fn default() -> Self {
        Self { upper_gain: 1.0, strength: 0.0, strength_sigma: 0.0 }
    }
}

/// The readings a calibration is computed from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CalInput {
    /// Known distance from the lower coil centre to the source, m.
    pub distance_m: f32,
    /// Coil spacing, m.
    pub spacing_m: f32,
    /// Lower and upper along readings (signed, lower ≥ 0).
    pub a_low: f32,
    /// Upper along reading.
    pub a_up: f32,
    /// Noise σ of the lower reading.
    pub sigma_low: f32,
    /// Noise σ of the upper reading.
    pub sigma_up: f32,
    /// Bz/Bh at the lower coils.
    pub vertical_ratio: f32,
}

/// Compute a calibration, or say why not (the error names the input at fault).
pub fn calibrate(model: FieldModel, x: &CalInput) -> Result<Calibration, ConfigError> {
    ConfigError::check(Param::Distance, x.distance_m, DISTANCE_RANGE_M.0, DISTANCE_RANGE_M.1)?;
    ConfigError::check(Param::HeadGeometry, x.spacing_m, 0.05, 2.0)?;
    let snr = (x.a_low / x.sigma_low).min(x.a_up / x.sigma_up);
    if !(snr >= MIN_CAL_SNR) {
        return Err(ConfigError { param: Param::Calibration, value: snr, min: MIN_CAL_SNR, max: f32::INFINITY });
    }
    if !(libm::fabsf(x.vertical_ratio) <= MAX_CAL_RATIO) {
        return Err(ConfigError { param: Param::Calibration, value: x.vertical_ratio, min: -MAX_CAL_RATIO, max: MAX_CAL_RATIO });
    }
    let n = model.exponent();
    let r_true = crate::powf::powf((x.distance_m + x.spacing_m) / x.distance_m, n);
    let r_m = x.a_low / x.a_up;
    let c = r_m / r_true;
    if !(c > UPPER_GAIN_RANGE.0 && c < UPPER_GAIN_RANGE.1) {
        return Err(ConfigError { param: Param::Calibration, value: c, min: UPPER_GAIN_RANGE.0, max: UPPER_GAIN_RANGE.1 });
    }
    let k = x.a_low * crate::powf::powf(x.distance_m, n);
    Ok(Calibration { upper_gain: c, strength: k, strength_sigma: k * x.sigma_low / x.a_low })
}

/// Relative one-sigma of the upper-gain correction of [`calibrate`]: the two readings' noise and
/// the known distance's own uncertainty `distance_sigma_m` (m), through
/// `∂ln R_true/∂d = −n·s/(d(d + s))`. This is the gain tolerance left after the calibration.
pub fn upper_gain_sigma(model: FieldModel, x: &CalInput, distance_sigma_m: f32) -> f32 {
    let (d, s) = (x.distance_m, x.spacing_m);
    let dist = model.exponent() * s / (d * (d + s)) * distance_sigma_m;
    let (lo, up) = (x.sigma_low / x.a_low, x.sigma_up / x.a_up);
    libm::sqrtf(lo * lo + up * up + dist * dist)
}

/// Result of the pre-job check.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PreJobCheck {
    /// Tone present with at least 20 dB SNR.
    pub tone_present: bool,
    /// Amplitude SNR, dB.
    pub snr_db: f32,
    /// Frequency offset from the set frequency, Hz.
    pub freq_offset_hz: f32,
    /// Strength now divided by the calibrated strength (1 = as calibrated; NaN if not calibrated).
    pub strength_ratio: f32,
}

/// Pre-job check from a peak reading `a_low` (σ) at `distance_m` and the calibration.
pub fn pre_job_check(model: FieldModel, a_low: f32, sigma: f32, distance_m: f32, freq_offset_hz: f32, cal: &Calibration) -> PreJobCheck {
    let snr = if sigma > 0.0 { a_low / sigma } else { f32::INFINITY };
    let snr_db = 20.0 * crate::powf::log10f(snr.max(1e-9));
    let k_now = a_low * crate::powf::powf(distance_m, model.exponent());
    let strength_ratio = if cal.strength > 0.0 { k_now / cal.strength } else { f32::NAN };
    PreJobCheck { tone_present: snr_db >= 20.0, snr_db, freq_offset_hz, strength_ratio }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gain_sigma_follows_the_distance_as_the_correction_does() {
        // The correction c = R_m/R_true moves with the distance used: a change δd of the known
        // distance changes c by (∂c/∂d)·δd, which the σ's distance term must equal.
        let x = CalInput { distance_m: 2.0, spacing_m: 0.4, a_low: 1.0, a_up: 0.6, sigma_low: 0.0, sigma_up: 0.0, vertical_ratio: 0.0 };
        let c = |d: f32| calibrate(FieldModel::Dipole, &CalInput { distance_m: d, ..x }).unwrap().upper_gain;
        let e = 0.01;
        let slope = (c(2.0 + e) - c(2.0 - e)) / (2.0 * e) / c(2.0);
        let noisy = CalInput { sigma_low: 1e-3, sigma_up: 1e-3, ..x };
        let s = upper_gain_sigma(FieldModel::Dipole, &x, 0.01);
        assert!((s - slope.abs() * 0.01).abs() < 1e-3 * s, "{s} against {}", slope.abs() * 0.01);
        // 3·0.4/(2·2.4) = 0.25 per metre: 0.25 % for 1 cm.
        assert!((s - 0.0025).abs() < 1e-5, "{s}");
        let s2 = upper_gain_sigma(FieldModel::Dipole, &noisy, 0.0);
        assert!((s2 - crate::powf::hypotf(1e-3, 1e-3 / 0.6)).abs() < 1e-7, "{s2}");
    }
}
