//! Depth estimators, each with a one-sigma uncertainty and a validity flag.
//!
//! Depth `h` is measured from the lower coil centre down to the source.
//!
//! 1. **Gradient** (two coils `s` apart on one vertical, same axis, receiver over
//!    the peak, in line). Field ∝ 1/r^n (n = 3 dipole, 1 line), so
//!    `R = A_low/A_up = ((h+s)/h)^n` and `h = s/(R^{1/n} − 1)`.
//!    Propagation: `σ_h/h = (h+s)/(n·s)·σ_R/R`, `σ_R/R = √((σ_low/A_low)² + (σ_up/A_up)²)`.
//!    Off the peak the ratio of horizontal components is biased (+11 % at 0.2h
//!    along the axis for h = 1 m, s = 0.5 m), so the estimate is only valid in
//!    line with the vertical component small (|Bz/Bh| below a gate); elsewhere
//!    the receiver reports no depth rather than a wrong one. Over a secondary
//!    peak |Bz/Bh| ≈ 1.8, so a depth is never reported there.
//! 2. **Null span** (level dipole): the nulls of the horizontal field lie at
//!    `x = ±h/√2`, so `h = L/√2 ≈ 0.7·L` for the null-to-null distance L (the
//!    trade's rule). A pitched dipole (axis tilted α) has nulls at the roots of
//!    `2x²cos α + 3hx·sin α − h²cos α = 0`: their product is `−h²/2` and sum
//!    `−(3h/2)·tan α`. With fore distance `a` and aft distance `b` from the point
//!    over the sonde: `h = √(2ab)`, `α = atan(2(b − a)/(3h))`.
//! 3. **Known moment**: after the sonde's strength `K = μ0m/4π` is measured at a
//!    known distance, the peak field `B = K/h³` gives `h = (K/B)^{1/3}`,
//!    `σ_h/h = ⅓·√((σ_B/B)² + (σ_K/K)²)`.

use crate::field::FieldModel;

/// Why a depth estimate is not valid.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Invalid {
    /// The head lacks the coils this method needs.
    NoCoils,
    /// Not in line with the field (not the peak orientation).
    NotInLine,
    /// The vertical component is too large: not over the main peak.
    NotOverPeak,
    /// Signal too weak for a depth.
    LowSnr,
    /// The coil ratio is not physical (upper reading ≥ lower reading, or non-finite).
    BadRatio,
    /// The method needs a calibration that has not been made.
    NotCalibrated,
    /// Input distances not usable.
    BadInput,
    /// The fit did not converge.
    NoFit,
}

impl Invalid {
    /// Short name for printing.
    pub fn name(self) -> &'static str {
        match self {
            Invalid::NoCoils => "no-coils",
            Invalid::NotInLine => "not-in-line",
            Invalid::NotOverPeak => "not-over-peak",
            Invalid::LowSnr => "low-snr",
            Invalid::BadRatio => "bad-ratio",
            Invalid::NotCalibrated => "not-calibrated",
            Invalid::BadInput => "bad-input",
            Invalid::NoFit => "no-fit",
        }
    }
}

/// A depth with its one-sigma uncertainty, or the reason there is none.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DepthEstimate {
    /// Depth below the lower coil centre, m (0 when invalid).
    pub depth_m: f32,
    /// One-sigma uncertainty, m.
    pub sigma_m: f32,
    /// Why not valid, `None` when valid.
    pub invalid: Option<Invalid>,
}

impl DepthEstimate {
    /// An invalid estimate.
    pub const fn none(reason: Invalid) -> Self {
        Self { depth_m: 0.0, sigma_m: 0.0, invalid: Some(reason) }
    }

    /// A valid estimate; non-finite values become invalid.
    pub fn valid(depth_m: f32, sigma_m: f32) -> Self {
        if depth_m.is_finite() && sigma_m.is_finite() && depth_m > 0.0 {
            Self { depth_m, sigma_m, invalid: None }
        } else {
            Self::none(Invalid::BadRatio)
        }
    }

    /// True when valid.
    pub fn is_valid(&self) -> bool {
        self.invalid.is_none()
    }
}

/// Gradient depth from lower and upper readings (same axis), their noise σ and spacing.
pub fn gradient_depth(model: FieldModel, a_low: f32, a_up: f32, sigma_low: f32, sigma_up: f32, spacing_m: f32) -> DepthEstimate {
    if !(spacing_m > 0.0) {
        return DepthEstimate::none(Invalid::NoCoils);
    }
    if !(a_low > 0.0 && a_up > 0.0) || !a_low.is_finite() || !a_up.is_finite() {
        return DepthEstimate::none(Invalid::BadRatio);
    }
    let r = a_low / a_up;
    let n = model.exponent();
    let root = libm::powf(r, 1.0 / n);
    if !(root > 1.0 + 1e-6) {
        return DepthEstimate::none(Invalid::BadRatio);
    }
    let h = spacing_m / (root - 1.0);
    let rel_r = libm::sqrtf((sigma_low / a_low) * (sigma_low / a_low) + (sigma_up / a_up) * (sigma_up / a_up));
    let sigma = h * (h + spacing_m) / (n * spacing_m) * rel_r;
    DepthEstimate::valid(h, sigma)
}

/// Depth and pitch from the fore and aft null distances.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NullSpanFix {
    /// Depth and its uncertainty.
    pub depth: DepthEstimate,
    /// Pitch of the sonde axis, rad (positive: nose down towards the fore null).
    pub pitch_rad: f32,
    /// One-sigma uncertainty of the pitch, rad.
    pub pitch_sigma_rad: f32,
}

/// Depth (and pitch) from the distances `fore_m`, `aft_m` from the point over the
/// sonde (the peak) to the fore and aft nulls, each with one-sigma error `sigma_m`.
pub fn null_span_depth(fore_m: f32, aft_m: f32, sigma_m: f32) -> NullSpanFix {
    let bad = NullSpanFix { depth: DepthEstimate::none(Invalid::BadInput), pitch_rad: 0.0, pitch_sigma_rad: 0.0 };
    if !(fore_m > 0.0 && aft_m > 0.0 && sigma_m >= 0.0) || !fore_m.is_finite() || !aft_m.is_finite() || !sigma_m.is_finite() {
        return bad;
    }
    let (a, b) = (fore_m, aft_m);
    let h = libm::sqrtf(2.0 * a * b);
    // h = √(2ab): ∂h/∂a = b/h, ∂h/∂b = a/h.
    let sh = sigma_m * libm::sqrtf(a * a + b * b) / h;
    let t = 2.0 * (b - a) / (3.0 * h);
    let alpha = libm::atanf(t);
    // σ of t from a, b and h (first order), then of atan.
    let dt_da = -2.0 / (3.0 * h) - t / h * (b / h);
    let dt_db = 2.0 / (3.0 * h) - t / h * (a / h);
    let st = sigma_m * libm::sqrtf(dt_da * dt_da + dt_db * dt_db);
    let sa = st / (1.0 + t * t);
    NullSpanFix { depth: DepthEstimate::valid(h, sh), pitch_rad: alpha, pitch_sigma_rad: sa }
}

/// Depth from the peak field `b` (σ `sigma_b`) and a calibrated strength `k` (σ `sigma_k`):
/// `K = μ0m/4π` (T·m³) for a dipole, `μ0I/2π` (T·m) for a line.
pub fn known_moment_depth(model: FieldModel, b: f32, sigma_b: f32, k: f32, sigma_k: f32) -> DepthEstimate {
    if !(k > 0.0) || !k.is_finite() {
        return DepthEstimate::none(Invalid::NotCalibrated);
    }
    if !(b > 0.0) || !b.is_finite() {
        return DepthEstimate::none(Invalid::LowSnr);
    }
    let n = model.exponent();
    let h = libm::powf(k / b, 1.0 / n);
    let rel = libm::sqrtf((sigma_b / b) * (sigma_b / b) + (sigma_k / k) * (sigma_k / k)) / n;
    DepthEstimate::valid(h, h * rel)
}
