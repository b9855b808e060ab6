//! Sine and cosine in `f64` for the detector's set-up, small enough for the board image.
//!
//! The set-up (the Goertzel coefficients; the response models that place the noise probe
//! and rate the mains harmonics) needs `f64` sines: a Goertzel coefficient off by a few
//! `f32` ulps moves a 2²⁰-sample block's answer by 1e-3. `libm`'s `f64` `sin`/`cos` carry
//! a reduction for arguments up to 1e308 (2.8 KiB of the board image's 128 KiB budget,
//! beside the `f32` one the run-time code needs); the arguments here stay below 2²⁹ rad,
//! so this module is written out (the `libm` crate has no smaller `f64` entry point):
//!
//! 1. `x = k·π/2 + r`, `k = round(x/(π/2))`, `|r| ≤ π/4`, with π/2 in three parts (Cody &
//!    Waite, "Software Manual for the Elementary Functions", 1980, ch. 8): `P1` is π/2
//!    rounded to 24 bits, so `k·P1` is exact for `|k| < 2²⁹`; `P2 = π/2 (f64) − P1`
//!    exactly; `P3 = 6.123233995736766e-17` is what the `f64` constant π/2 lacks (it is
//!    `cos` of that constant; a unit test checks it against `libm`).
//! 2. `sin r` and `cos r` from their Taylor series to the `r¹⁷` and `r¹⁸` terms, whose
//!    first omitted terms at `|r| = π/4` are below 1e-19.
//! 3. The quadrant `k mod 4` picks `±sin r` or `±cos r`.
//!
//! Within 2e-16 of `libm`'s values for `|x| ≤ 10⁴` (unit test). NaN and infinities give NaN.

use core::f64::consts::FRAC_PI_2;

/// π/2 rounded to 24 bits.
const P1: f64 = FRAC_PI_2 as f32 as f64;
/// The rest of the `f64` π/2 (exact: both are `f64`, and close).
const P2: f64 = FRAC_PI_2 - P1;
/// π/2 − `FRAC_PI_2`.
const P3: f64 = 6.123_233_995_736_766e-17;

/// `sin r` for `|r| ≤ π/4`: `r·(1 − r²/(2·3)·(1 − r²/(4·5)·(1 − …)))` to the `r¹⁷` term.
fn sin_kernel(r: f64) -> f64 {
    let z = r * r;
    let mut q = 1.0;
    for n in (1..=8u32).rev() {
        q = 1.0 - z * q / ((2 * n) as f64 * (2 * n + 1) as f64);
    }
    r * q
}

/// `cos r` for `|r| ≤ π/4`: `1 − r²/(1·2)·(1 − r²/(3·4)·(1 − …))` to the `r¹⁸` term.
fn cos_kernel(r: f64) -> f64 {
    let z = r * r;
    let mut q = 1.0;
    for n in (1..=9u32).rev() {
        q = 1.0 - z * q / ((2 * n - 1) as f64 * (2 * n) as f64);
    }
    q
}

/// `(sin x, cos x)`.
pub fn sin_cos(x: f64) -> (f64, f64) {
    if !x.is_finite() {
        return (f64::NAN, f64::NAN);
    }
    let k = libm::round(x / FRAC_PI_2);
    let r = ((x - k * P1) - k * P2) - k * P3;
    let (s, c) = (sin_kernel(r), cos_kernel(r));
    // k mod 4, for negative k too.
    match (k - 4.0 * libm::floor(k / 4.0)) as u8 {
        0 => (s, c),
        1 => (c, -s),
        2 => (-s, -c),
        _ => (-c, s),
    }
}

/// `sin x`.
pub fn sin(x: f64) -> f64 {
    sin_cos(x).0
}

/// `cos x`.
pub fn cos(x: f64) -> f64 {
    sin_cos(x).1
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against `libm`'s `f64` `sin` and `cos` (a port of FreeBSD's msun, within 1 ulp) from
    /// −10⁴ to 10⁴ rad and at the quadrant edges.
    #[test]
    fn agrees_with_f64_libm() {
        assert_eq!(libm::cos(FRAC_PI_2), P3, "the part of π/2 the f64 constant lacks");
        let mut worst = 0.0f64;
        let mut check = |x: f64| {
            let (s, c) = sin_cos(x);
            worst = worst.max((s - libm::sin(x)).abs()).max((c - libm::cos(x)).abs());
        };
        let mut x = -1.0e4f64;
        while x <= 1.0e4 {
            check(x);
            x += 0.618_033_988_749_9e-1;
        }
        for k in -8..=8 {
            let q = k as f64 * core::f64::consts::FRAC_PI_4;
            for x in [q, q + 1e-9, q - 1e-9] {
                check(x);
            }
        }
        for x in [0.0, 1e-300, 2.5e-8, 1e-5, 0.1, 1.0] {
            check(x);
        }
        assert!(worst < 2e-16, "{worst}");
        assert!(sin_cos(f64::NAN).0.is_nan() && sin_cos(f64::INFINITY).1.is_nan());
    }
}
