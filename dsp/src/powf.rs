//! `x^y` for positive `x`, `log₁₀ x` and `√(x² + y²)` in `f32`, small enough for the board image.
//!
//! `x^y = e^{y·ln x}` (the definition of the real power, e.g. Abramowitz & Stegun,
//! *Handbook of Mathematical Functions*, 4.2.1 and 4.2.2), from `libm`'s `expf` and `logf`,
//! which the image carries anyway. `libm`'s `powf` also handles negative bases with
//! integer exponents and keeps full precision for huge `y·ln x`; no caller needs either
//! (every base here is a ratio of distances, a frequency ratio or 10), and it cost
//! 1.4 KiB of the board's 128 KiB flash budget.
//!
//! The relative error is that of `expf` plus `|y·ln x|·2⁻²⁴` from rounding the product:
//! below 2e-6 for `|y·ln x| ≤ 20` (unit test against `f64` `powf`). `x = 0` gives `0` for
//! `y > 0`; `x < 0` or NaN gives NaN; `x = +∞` gives `+∞` for `y > 0`.

/// `x^y` for `x ≥ 0` (NaN for negative `x`).
///
/// ```
/// assert!((undertone_dsp::powf::powf(10.0, 2.0) - 100.0).abs() < 1e-3);
/// ```
#[inline]
pub fn powf(x: f32, y: f32) -> f32 {
    libm::expf(y * libm::logf(x))
}

/// `log₁₀ x = ln x · log₁₀ e` (Abramowitz & Stegun 4.1.18), from `libm`'s `logf`, which the
/// image carries anyway (`log10f` cost 260 bytes more). Within 2 ulp of `log10f` for the
/// decibel figures it makes; the one caller that needs an exact power of ten settles its
/// exponent afterwards.
///
/// ```
/// assert!((undertone_dsp::powf::log10f(1000.0) - 3.0).abs() < 1e-6);
/// ```
#[inline]
pub fn log10f(x: f32) -> f32 {
    libm::logf(x) * core::f32::consts::LOG10_E
}

/// `√(x² + y²)`, the squares taken of both over the larger magnitude so that they neither
/// overflow nor underflow; `libm`'s `hypotf`, exact to an ulp, cost 180 bytes of the board's
/// flash against these few. Within 3 ulp (unit test against `f64`); infinite if either is,
/// else NaN if either is.
///
/// ```
/// assert_eq!(undertone_dsp::powf::hypotf(3.0, -4.0), 5.0);
/// ```
#[inline(never)]
pub fn hypotf(x: f32, y: f32) -> f32 {
    let (x, y) = (libm::fabsf(x), libm::fabsf(y));
    let m = if x > y { x } else { y };
    if m == f32::INFINITY || x == f32::INFINITY {
        return f32::INFINITY;
    }
    if m == 0.0 {
        return 0.0;
    }
    let (a, b) = (x / m, y / m);
    m * libm::sqrtf(a * a + b * b)
}

#[cfg(test)]
mod tests {
    use super::{hypotf, log10f, powf};

    #[test]
    fn hypotf_is_the_length_without_overflow_or_underflow() {
        let mut worst = 0.0f64;
        for &(x, y) in &[(3.0f32, 4.0f32), (1e-30, 3e-30), (1e30, -2e30), (0.5, 1e-7), (-7.25, 0.0), (1.0, 1.0), (2.5e-39, 1e-39)] {
            let want = (x as f64).hypot(y as f64);
            let got = hypotf(x, y) as f64;
            worst = worst.max(((got - want) / want).abs());
        }
        assert!(worst < 3.0 * f32::EPSILON as f64, "{worst:e}");
        assert_eq!(hypotf(0.0, -0.0), 0.0);
        assert_eq!(hypotf(f32::INFINITY, f32::NAN), f32::INFINITY);
        assert_eq!(hypotf(f32::NAN, f32::NEG_INFINITY), f32::INFINITY);
        assert!(hypotf(f32::NAN, 1.0).is_nan() && hypotf(1.0, f32::NAN).is_nan());
        assert_eq!(hypotf(f32::MAX, f32::MAX), f32::INFINITY);
    }

    #[test]
    fn log10_within_three_ulp_of_f64() {
        // Reference: `libm`'s `f64` `log10` (a general-purpose reference library).
        for &x in &[1e-30f32, 1e-9, 0.001, 0.5, 2.0, 10.0, 1000.0, 3.7e5, 1e30] {
            let want = libm::log10(x as f64);
            let got = log10f(x) as f64;
            assert!((got - want).abs() <= 3.0 * f32::EPSILON as f64 * want.abs().max(1.0), "{x}: {got} vs {want}");
        }
        assert!(log10f(-1.0).is_nan() && log10f(0.0) == f32::NEG_INFINITY);
    }

    #[test]
    fn within_two_ppm_of_f64_pow() {
        // Reference: `libm`'s `f64` `pow`, rounded to `f32` (a general-purpose reference library).
        let mut worst = 0.0f64;
        for &x in &[1e-3f32, 0.05, 0.5, 0.999, 1.0, 1.3, 2.0, 7.5, 10.0, 123.0, 4096.0] {
            for &y in &[-3.3f32, -2.0, -0.5, 1.0 / 3.0, 0.5, 1.0, 2.0, 3.0, 6.6] {
                let want = libm::pow(x as f64, y as f64);
                if (y as f64 * (x as f64).ln()).abs() > 20.0 {
                    continue;
                }
                let got = powf(x, y) as f64;
                worst = worst.max(((got - want) / want).abs());
            }
        }
        assert!(worst < 2e-6, "worst relative error {worst:e}");
        assert_eq!(powf(0.0, 0.5), 0.0);
        assert!(powf(-2.0, 3.0).is_nan() && powf(f32::NAN, 1.0).is_nan());
        assert_eq!(powf(f32::INFINITY, 0.5), f32::INFINITY);
    }
}
