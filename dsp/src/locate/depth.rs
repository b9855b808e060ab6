//! Depth estimators, each giving a depth with its one-sigma uncertainty or the
//! reason it is withheld ([`DepthEstimate`] = `Result<Depth, Withheld>`).
//!
//! Depth `h` is measured from the lower coil centre down to the source; the
//! [`Locator`](crate::locate::locator::Locator) adds the coil height to report it
//! below the ground.
//!
//! 1. **Gradient** (two coils `s` apart on one vertical, same axis). For a level
//!    dipole on the plane through it across its axis (the receiver over the
//!    peak along the axis) the field is along the axis with magnitude
//!    `K/ρ³`, `ρ² = y² + z²` (Griffiths eq. 5.89), so the lower/upper ratio is
//!    `R = ((η² + (1+g)²)/(η² + 1))^{3/2}` with `g = s/h` and `η = y/h` the
//!    lateral offset in depths. Directly over the sonde (η = 0) this is the
//!    textbook `R = ((h+s)/h)³`, `h = s/(R^{1/3} − 1)`; off it laterally the
//!    ratio alone cannot tell a lateral offset from a shallower depth (walking a
//!    line 1 m to the side of a 1.5 m sonde reads 2.09 m), which is why the
//!    receiver needs the lateral offset (η with σ) before it shows a depth.
//!    With an along offset `u = x/h` as well, the ratio is evaluated from the
//!    full dipole field ([`model_ratio`]) and solved for `g` by bisection.
//!    Uncertainty: first-order propagation of the coil noise and of the gain
//!    tolerance (`σ_R/R`), plus the spread of `h` over the offsets' own ±1σ.
//! 2. **Null span** (level dipole): the nulls of the horizontal field lie at
//!    `x = ±h/√2`, so `h = L/√2 ≈ 0.7·L` for the null-to-null distance L (the
//!    trade's rule, common practice). A pitched dipole (axis tilted α) has nulls
//!    at the roots of `2x²cos α + 3hx·sin α − h²cos α = 0` and its main peak
//!    moves off the point over it; from the fore and aft distances measured from
//!    the peak (what a person walking the axis can mark) the ratio fixes α and
//!    the span fixes h.
//! 3. **Known moment**: after the sonde's strength `K = μ0m/4π` is measured at a
//!    known distance, the field over the sonde `B = K/ρ³` gives the depth, with
//!    `σ_h/h = ⅓·√((σ_B/B)² + (σ_K/K)²)` and the lateral offset folded in as for
//!    the gradient.

use crate::field::FieldModel;

/// A depth below the lower coil centre with its one-sigma uncertainty (always > 0).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Depth {
    /// Depth below the lower coil centre, m.
    pub depth_m: f32,
    /// One-sigma uncertainty, m (never zero).
    pub sigma_m: f32,
}

/// Why a depth (or a direction) is withheld.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Withheld {
    /// No beacon tone on the coils (wrong frequency, noise only, no input).
    NoSignal,
    /// The tone is there but too weak for a depth.
    LowSnr,
    /// The detector is still settling (start-up or a restart).
    Settling,
    /// A channel reached full scale: the coil ratios are distorted.
    Clipped,
    /// The head lacks the coils this method needs.
    NoCoils,
    /// Not in line with the sonde axis (turn the receiver).
    NotInLine,
    /// Not over the sonde along its axis.
    NotOver,
    /// The lateral offset from the sonde is not known well enough (sweep across).
    LateralUnknown,
    /// Beyond the nulls, over a secondary peak, or on the wrong side of a null.
    SecondaryPeak,
    /// The coil ratio is not physical (upper reading ≥ lower reading, or non-finite).
    BadRatio,
    /// The method needs a strength calibration that has not been made.
    NotCalibrated,
    /// Input values not usable.
    BadInput,
    /// The one-station fit did not converge.
    NoFit,
    /// The fit's geometry leaves the depth undetermined (ill-conditioned).
    IllConditioned,
    /// The field is not a clean dipole (fit residual, quadrature).
    Distorted,
    /// The estimate's uncertainty is too large to be of use.
    Uncertain,
    /// The receiver cannot yet tell which side the sonde is: walk along the handle.
    NeedsMotion,
    /// Another placement of the sonde explains the readings as well.
    Ambiguous,
    /// The head is moving; "over" waits until it is still.
    Moving,
}

impl Withheld {
    /// Short name for printing and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Withheld::NoSignal => "no-signal",
            Withheld::LowSnr => "low-snr",
            Withheld::Settling => "settling",
            Withheld::Clipped => "clipped",
            Withheld::NoCoils => "no-coils",
            Withheld::NotInLine => "not-in-line",
            Withheld::NotOver => "not-over",
            Withheld::LateralUnknown => "lateral-unknown",
            Withheld::SecondaryPeak => "secondary-peak",
            Withheld::BadRatio => "bad-ratio",
            Withheld::NotCalibrated => "not-calibrated",
            Withheld::BadInput => "bad-input",
            Withheld::NoFit => "no-fit",
            Withheld::IllConditioned => "ill-conditioned",
            Withheld::Distorted => "distorted",
            Withheld::Uncertain => "uncertain",
            Withheld::NeedsMotion => "needs-motion",
            Withheld::Ambiguous => "ambiguous",
            Withheld::Moving => "moving",
        }
    }
}

/// A depth with σ, or the reason there is none.
pub type DepthEstimate = Result<Depth, Withheld>;

/// A valid depth; a non-finite or non-positive value (or σ) becomes [`Withheld::BadRatio`].
/// `σ` is floored at a millimetre so that no depth is ever shown as exact.
pub fn depth(depth_m: f32, sigma_m: f32) -> DepthEstimate {
    if depth_m.is_finite() && sigma_m.is_finite() && depth_m > 0.0 && sigma_m >= 0.0 {
        Ok(Depth { depth_m, sigma_m: sigma_m.max(MIN_SIGMA_M) })
    } else {
        Err(Withheld::BadRatio)
    }
}

/// Smallest σ a depth is shown with, m.
pub const MIN_SIGMA_M: f32 = 1e-3;

/// Which coil readings a ratio is formed from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RatioOf {
    /// The along-axis (x) components.
    Along,
    /// The magnitudes of the whole field (two full triads).
    Total,
}

use crate::field::dipole::level_unit_field as level_field;

/// The lower/upper ratio a level dipole gives coils `s` apart when the lower coil
/// sits `u·h` ahead of it along its axis, `η·h` to the side and `h` above.
/// `g = s/h`. Depth-free: every length is in units of h.
pub fn model_ratio(model: FieldModel, of: RatioOf, u: f32, eta: f32, g: f32) -> f32 {
    match model {
        FieldModel::Line => {
            // 1/ρ with ρ the distance to the line (the line along x): R = √(η²+(1+g)²)/√(η²+1).
            libm::sqrtf((eta * eta + (1.0 + g) * (1.0 + g)) / (eta * eta + 1.0))
        }
        FieldModel::Dipole => {
            let lo = level_field(u, eta, 1.0);
            let up = level_field(u, eta, 1.0 + g);
            match of {
                RatioOf::Along => lo[0] / up[0],
                RatioOf::Total => {
                    let n = |b: [f32; 3]| libm::sqrtf(b[0] * b[0] + b[1] * b[1] + b[2] * b[2]);
                    n(lo) / n(up)
                }
            }
        }
    }
}

/// Solve `model_ratio(u, η, g) = r` for `g = s/h` (bisection on g ∈ (0, 20]; the
/// ratio rises with g near the point over the source). `None` when no root.
pub fn solve_g(model: FieldModel, of: RatioOf, u: f32, eta: f32, r: f32) -> Option<f32> {
    if !(r > 1.0) || !r.is_finite() || !u.is_finite() || !eta.is_finite() {
        return None;
    }
    let f = |g: f32| model_ratio(model, of, u, eta, g) - r;
    let (mut lo, mut hi) = (1e-4f32, 20.0f32);
    let (flo, fhi) = (f(lo), f(hi));
    if !(flo < 0.0 && fhi > 0.0) {
        return None;
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if f(mid) < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

/// Where the receiver is relative to the point over the sonde, in depths, with σ:
/// `u` along the axis (ahead of the sonde), `η` across it.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Offsets {
    /// Along-axis offset over depth.
    pub u: f32,
    /// Its one-sigma.
    pub sigma_u: f32,
    /// Lateral offset over depth.
    pub eta: f32,
    /// Its one-sigma.
    pub sigma_eta: f32,
}

impl Offsets {
    /// Exactly over the source (for checks and calibration).
    pub const OVER: Offsets = Offsets { u: 0.0, sigma_u: 0.0, eta: 0.0, sigma_eta: 0.0 };
}

/// Two coil readings on one vertical (along components, or field magnitudes), their noise σ and spacing.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CoilPair {
    /// Lower reading.
    pub low: f32,
    /// Upper reading.
    pub up: f32,
    /// Noise σ of the lower reading.
    pub sigma_low: f32,
    /// Noise σ of the upper reading.
    pub sigma_up: f32,
    /// Height of the upper coil above the lower, m.
    pub spacing_m: f32,
}

/// Gradient depth from a coil pair, the relative gain tolerance between the two
/// coils and the offsets from the point over the source.
pub fn gradient_depth(model: FieldModel, of: RatioOf, pair: CoilPair, gain_tolerance: f32, at: Offsets) -> DepthEstimate {
    let CoilPair { low: a_low, up: a_up, sigma_low, sigma_up, spacing_m } = pair;
    if !(spacing_m > 0.0) {
        return Err(Withheld::NoCoils);
    }
    if !(a_low > 0.0 && a_up > 0.0 && a_low.is_finite() && a_up.is_finite()) {
        return Err(Withheld::BadRatio);
    }
    let r = a_low / a_up;
    let h_of = |u: f32, eta: f32, r: f32| solve_g(model, of, u, eta, r).map(|g| spacing_m / g);
    let Some(h) = h_of(at.u, at.eta, r) else { return Err(Withheld::BadRatio) };
    // Noise and gain tolerance on the ratio: σ_R/R = √((σ_lo/A_lo)² + (σ_up/A_up)² + tol²).
    let rel =
        libm::sqrtf((sigma_low / a_low) * (sigma_low / a_low) + (sigma_up / a_up) * (sigma_up / a_up) + gain_tolerance * gain_tolerance);
    // dh/dR by a small central step, times σ_R.
    let dr = 1e-3 * r;
    let dh_dr = match (h_of(at.u, at.eta, r + dr), h_of(at.u, at.eta, r - dr)) {
        (Some(a), Some(b)) => (a - b) / (2.0 * dr),
        (Some(a), None) => (a - h) / dr,
        _ => 0.0,
    };
    let sigma_ratio = libm::fabsf(dh_dr) * r * rel;
    // The offsets' own uncertainty: the spread of h over ±1σ of each.
    let spread = |d: Option<f32>| d.map(|x| libm::fabsf(x - h)).unwrap_or(h);
    let su =
        if at.sigma_u > 0.0 { spread(h_of(at.u + at.sigma_u, at.eta, r)).max(spread(h_of(at.u - at.sigma_u, at.eta, r))) } else { 0.0 };
    let se = if at.sigma_eta > 0.0 {
        spread(h_of(at.u, libm::fabsf(at.eta) + at.sigma_eta, r)).max(spread(h_of(at.u, (libm::fabsf(at.eta) - at.sigma_eta).max(0.0), r)))
    } else {
        0.0
    };
    let sigma = libm::sqrtf(sigma_ratio * sigma_ratio + su * su + se * se);
    depth(h, sigma)
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
    let (s, c) = crate::trigf::sin_cos(alpha_rad);
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
    let bad = NullSpanFix { depth: Err(Withheld::BadInput), pitch_rad: 0.0, pitch_sigma_rad: 0.0 };
    if !(fore_m > 0.0 && aft_m > 0.0 && sigma_m >= 0.0 && fore_m.is_finite() && aft_m.is_finite() && sigma_m.is_finite()) {
        return bad;
    }
    let Some((h, a)) = solve_null_span(fore_m, aft_m) else { return bad };
    let d = 1e-3 * (fore_m + aft_m);
    let (hf, af) = solve_null_span(fore_m + d, aft_m).unwrap_or((h, a));
    let (hb, ab) = solve_null_span(fore_m, aft_m + d).unwrap_or((h, a));
    let sh = sigma_m * crate::powf::hypotf((hf - h) / d, (hb - h) / d);
    let sa = sigma_m * crate::powf::hypotf((af - a) / d, (ab - a) / d);
    NullSpanFix { depth: depth(h, sh), pitch_rad: a, pitch_sigma_rad: sa }
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

/// Depth from the field `b` (σ `sigma_b`, the magnitude at the lower coils) near
/// the point over the source and a calibrated strength `k` (σ `sigma_k`):
/// `K = μ0m/4π` (T·m³) for a dipole, `μ0I/2π` (T·m) for a line. With the
/// receiver at offsets (u, η) (in depths) from the point over a level dipole,
/// `b = K·f(u, η)/h³`, `f = |B|` of the unit dipole at `(u, η, 1)` (1 over it);
/// for a line `b = K/(h·√(1+η²))`. So `h = (K·f/b)^{1/n}`, and
/// `σ_h/h = (1/n)·√((σ_B/B)² + (σ_K/K)²)` with the offsets' ±1σ spread added.
pub fn known_moment_depth(model: FieldModel, b: f32, sigma_b: f32, k: f32, sigma_k: f32, at: Offsets) -> DepthEstimate {
    if !(k > 0.0) || !k.is_finite() {
        return Err(Withheld::NotCalibrated);
    }
    if !(b > 0.0) || !b.is_finite() {
        return Err(Withheld::LowSnr);
    }
    let n = model.exponent();
    let shape = |u: f32, eta: f32| match model {
        FieldModel::Line => 1.0 / libm::sqrtf(1.0 + eta * eta),
        FieldModel::Dipole => {
            let f = level_field(u, eta, 1.0);
            libm::sqrtf(f[0] * f[0] + f[1] * f[1] + f[2] * f[2])
        }
    };
    let h_of = |u: f32, eta: f32| crate::powf::powf(k * shape(u, eta) / b, 1.0 / n);
    let h = h_of(at.u, at.eta);
    let rel = libm::sqrtf((sigma_b / b) * (sigma_b / b) + (sigma_k / k) * (sigma_k / k)) / n;
    let su = libm::fabsf(h_of(libm::fabsf(at.u) + at.sigma_u, at.eta) - h);
    let se = libm::fabsf(h_of(at.u, libm::fabsf(at.eta) + at.sigma_eta) - h);
    depth(h, libm::sqrtf((h * rel) * (h * rel) + su * su + se * se))
}
