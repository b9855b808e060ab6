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
//!    `2x²cos α + 3hx·sin α − h²cos α = 0` and its main peak moves off the point
//!    over it; from the fore and aft distances measured from the peak (what a
//!    person walking the axis can mark) the ratio fixes α and the span fixes h.
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
    if !(a_low > 0.0 && a_up > 0.0 && a_low.is_finite() && a_up.is_finite()) {
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
    /// Pitch of the sonde axis, rad (positive: the fore null is the nearer one).
    pub pitch_rad: f32,
    /// One-sigma uncertainty of the pitch, rad.
    pub pitch_sigma_rad: f32,
}

/// For a dipole pitched by α at unit depth, walking along its axis: the peak of
/// the horizontal field and the two nulls, as (fore, aft) distances from the peak.
///
/// `Bx(x) ∝ (2x²cos α + 3x sin α − cos α)/(x² + 1)^{5/2}`; the nulls are the roots
/// of the numerator, the main peak the root of `6c·x³ + 12s·x² − 9c·x − 3s = 0`
/// (the derivative) near `x = −tan α/3` (c = cos α, s = sin α).
pub fn pitched_null_distances(alpha_rad: f32) -> (f32, f32) {
    let (s, c) = (libm::sinf(alpha_rad), libm::cosf(alpha_rad));
    let disc = libm::sqrtf(9.0 * s * s + 8.0 * c * c);
    let fore_null = (-3.0 * s + disc) / (4.0 * c);
    let aft_null = (-3.0 * s - disc) / (4.0 * c);
    let mut x = -s / (3.0 * c);
    for _ in 0..20 {
        let f = 6.0 * c * x * x * x + 12.0 * s * x * x - 9.0 * c * x - 3.0 * s;
        let df = 18.0 * c * x * x + 24.0 * s * x - 9.0 * c;
        if libm::fabsf(df) < 1e-12 {
            break;
        }
        x -= f / df;
    }
    (fore_null - x, x - aft_null)
}

/// Depth (and pitch) from the distances `fore_m` and `aft_m` walked along the
/// sonde axis from the peak to the fore and aft nulls, each with one-sigma error
/// `sigma_m`. Level: `h = (a + b)/√2`. Pitched: the ratio `a/b` fixes α (by
/// bisection on [`pitched_null_distances`]), then `h = (a + b)/(f(α) + g(α))`.
/// Uncertainties by first-order propagation (numerical derivatives).
pub fn null_span_depth(fore_m: f32, aft_m: f32, sigma_m: f32) -> NullSpanFix {
    let bad = NullSpanFix { depth: DepthEstimate::none(Invalid::BadInput), pitch_rad: 0.0, pitch_sigma_rad: 0.0 };
    if !(fore_m > 0.0 && aft_m > 0.0 && sigma_m >= 0.0 && fore_m.is_finite() && aft_m.is_finite() && sigma_m.is_finite()) {
        return bad;
    }
    let Some((h, a)) = solve_null_span(fore_m, aft_m) else { return bad };
    let d = 1e-3 * (fore_m + aft_m);
    let (hf, af) = solve_null_span(fore_m + d, aft_m).unwrap_or((h, a));
    let (hb, ab) = solve_null_span(fore_m, aft_m + d).unwrap_or((h, a));
    let sh = sigma_m * libm::hypotf((hf - h) / d, (hb - h) / d);
    let sa = sigma_m * libm::hypotf((af - a) / d, (ab - a) / d);
    NullSpanFix { depth: DepthEstimate::valid(h, sh), pitch_rad: a, pitch_sigma_rad: sa }
}

fn solve_null_span(fore: f32, aft: f32) -> Option<(f32, f32)> {
    let target = libm::logf(fore / aft);
    let g = |al: f32| {
        let (f, b) = pitched_null_distances(al);
        libm::logf(f / b) - target
    };
    // log(fore/aft) falls as α rises (positive pitch brings the fore null in).
    let (mut lo, mut hi) = (-1.2f32, 1.2f32);
    let (glo, ghi) = (g(lo), g(hi));
    if !(glo >= 0.0 && ghi <= 0.0) {
        return None;
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if g(mid) > 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let al = 0.5 * (lo + hi);
    let (f, b) = pitched_null_distances(al);
    Some(((fore + aft) / (f + b), al))
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
