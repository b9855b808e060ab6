//! Parsers of command-line values: each refuses a bad value with one line
//! saying what is allowed. Limits the receiver owns are quoted from `dsp`.

use undertone_dsp::detect::settings::{MAX_BANDWIDTH_HZ, MIN_BANDWIDTH_HZ};
use undertone_sim::units::num;

/// A finite number.
pub fn finite(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        _ => Err("a finite number is required".into()),
    }
}

/// A finite number above 0.
pub fn above_zero(s: &str) -> Result<f64, String> {
    finite(s).and_then(|v| if v > 0.0 { Ok(v) } else { Err(format!("{} is not allowed (allowed: above 0)", num(v))) })
}

/// A finite number, 0 or more.
pub fn not_negative(s: &str) -> Result<f64, String> {
    finite(s).and_then(|v| if v >= 0.0 { Ok(v) } else { Err(format!("{} is not allowed (allowed: 0 or more)", num(v))) })
}

/// A detection bandwidth within the receiver's limits, Hz.
pub fn bandwidth(s: &str) -> Result<f64, String> {
    let (lo, hi) = (MIN_BANDWIDTH_HZ as f64, MAX_BANDWIDTH_HZ as f64);
    finite(s).and_then(|v| {
        if (lo..=hi).contains(&v) {
            Ok(v)
        } else {
            Err(format!("{} Hz is not allowed (allowed: {} to {} Hz)", num(v), num(lo), num(hi)))
        }
    })
}

/// Trials per bandwidth of a sweep.
pub fn trials(s: &str) -> Result<usize, String> {
    let max = undertone_sim::sweep::MAX_TRIALS;
    match s.trim().parse::<usize>() {
        Ok(v) if (1..=max).contains(&v) => Ok(v),
        _ => Err(format!("allowed: a whole number from 1 to {max}")),
    }
}

/// The noisy case's SNR of a depth check, dB.
pub fn depthcheck_snr(s: &str) -> Result<f64, String> {
    let (lo, hi) = undertone_sim::depthcheck::SNR_RANGE_DB;
    finite(s).and_then(|v| {
        if (lo..=hi).contains(&v) {
            Ok(v)
        } else {
            Err(format!("{} dB is not allowed (allowed: {} to {} dB)", num(v), num(lo), num(hi)))
        }
    })
}
