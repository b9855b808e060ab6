//! Sine and cosine in `f32` for the run-time code, small enough for the board image.
//!
//! `libm`'s `sinf`/`cosf` reduce arguments of any size (Payne–Hanek, `rem_pio2f`): 3.4 KiB
//! of the board's 128 KiB flash budget with their kernels. The run-time angles here are a few
//! turns at most (headings, yaws, pitches, a window's phase, a phasor's angle), so this module
//! is written out, after Cephes' `sinf`/`cosf` (Moshier, *Methods and Programs for
//! Mathematical Functions*, 1989, §6.2):
//!
//! 1. `x = k·π/2 + r`, `k = round(x·2/π)`, `|r| ≤ π/4`, with π/2 in three parts (Cody & Waite,
//!    "Software Manual for the Elementary Functions", 1980, ch. 8): `P1 = 1.5703125` has 8
//!    significant bits, so `k·P1` is exact in `f32` for `|k| < 2¹⁶`; `P2` and `P3` are the
//!    next parts (Cephes' `DP1..DP3`, doubled). Used for `|x| ≤ 8192` (Cephes' own limit);
//!    beyond, the reduction is made in `f64` by [`crate::detect::trig`], which the image
//!    carries for the detector's set-up, up to [`REDUCTION_MAX`]. Past that an `f32` is no
//!    angle (neighbouring values are 64 rad apart): NaN, as for infinities.
//! 2. `sin r` and `cos r` from their Taylor series to the `r⁹` and `r¹⁰` terms; the first
//!    omitted terms at `|r| = π/4` are below 3e-9, under half an `f32` ulp of the result.
//! 3. The quadrant `k mod 4` picks `±sin r` or `±cos r`.
//!
//! Within 1e-7 of `f64` `sin`/`cos` of the same argument for `|x| ≤ 10⁴` (unit test; 8.2e-8
//! measured, about one `f32` ulp of 1).

/// π/2 in three parts: `P1 + P2 + P3` (Cephes `sinf.c`, `DP1..DP3` × 2).
const P1: f32 = 1.570_312_5;
const P2: f32 = 4.837_513e-4;
const P3: f32 = 7.549_79e-8;

/// Largest `|x|` reduced in `f32`.
const F32_REDUCTION_MAX: f32 = 8192.0;
/// Largest `|x|` reduced at all, rad (below 2²⁹·π/2, where [`crate::detect::trig`] is exact).
pub const REDUCTION_MAX: f32 = 8.0e8;

/// `sin r` for `|r| ≤ π/4`: `r·(1 − r²/6·(1 − r²/20·(1 − r²/42·(1 − r²/72))))`.
#[inline]
fn sin_kernel(r: f32) -> f32 {
    let z = r * r;
    r * (1.0 - z * (1.0 / 6.0) * (1.0 - z * (1.0 / 20.0) * (1.0 - z * (1.0 / 42.0) * (1.0 - z * (1.0 / 72.0)))))
}

/// `cos r` for `|r| ≤ π/4`: `1 − r²/2·(1 − r²/12·(1 − r²/30·(1 − r²/56·(1 − r²/90))))`.
#[inline]
fn cos_kernel(r: f32) -> f32 {
    let z = r * r;
    1.0 - z * 0.5 * (1.0 - z * (1.0 / 12.0) * (1.0 - z * (1.0 / 30.0) * (1.0 - z * (1.0 / 56.0) * (1.0 - z * (1.0 / 90.0)))))
}

/// `(sin x, cos x)`.
///
/// ```
/// let (s, c) = undertone_dsp::trigf::sin_cos(core::f32::consts::FRAC_PI_6);
/// assert!((s - 0.5).abs() < 1e-7 && (c - 0.75f32.sqrt()).abs() < 1e-7);
/// ```
#[inline(never)]
pub fn sin_cos(x: f32) -> (f32, f32) {
    if !(libm::fabsf(x) <= REDUCTION_MAX) {
        return (f32::NAN, f32::NAN);
    }
    if libm::fabsf(x) > F32_REDUCTION_MAX {
        let (s, c) = crate::detect::trig::sin_cos(x as f64);
        return (s as f32, c as f32);
    }
    let k = libm::roundf(x * core::f32::consts::FRAC_2_PI);
    let r = ((x - k * P1) - k * P2) - k * P3;
    let (s, c) = (sin_kernel(r), cos_kernel(r));
    // k mod 4, for negative k too (|k| ≤ 5216).
    match (k as i32) & 3 {
        0 => (s, c),
        1 => (c, -s),
        2 => (-s, -c),
        _ => (-c, s),
    }
}

/// `sin x`.
#[inline]
pub fn sinf(x: f32) -> f32 {
    sin_cos(x).0
}

/// `cos x`.
#[inline]
pub fn cosf(x: f32) -> f32 {
    sin_cos(x).1
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against `f64` `sin` and `cos` of the same `f32` argument (std's, correctly rounded to
    /// within 1 ulp of `f64`), from −10⁴ to 10⁴ rad, at the quadrant edges and at the switch
    /// to the `f64` reduction.
    #[test]
    fn agrees_with_f64_sine_and_cosine() {
        let mut worst = 0.0f64;
        let mut check = |x: f32| {
            let (s, c) = sin_cos(x);
            let xd = x as f64;
            worst = worst.max((s as f64 - xd.sin()).abs()).max((c as f64 - xd.cos()).abs());
        };
        let mut x = -1.0e4f32;
        while x <= 1.0e4 {
            check(x);
            x += 0.061_803_4;
        }
        for k in -16..=16 {
            let q = k as f32 * core::f32::consts::FRAC_PI_4;
            for x in [q, q.next_up(), q.next_down()] {
                check(x);
            }
        }
        for x in [0.0, 1e-30, 2.5e-8, 1e-5, 0.1, 1.0, 8191.9, 8192.0, 8192.001, -8192.001, 1e6, -3e7, 7.9e8] {
            check(x);
        }
        assert!(worst < 1e-7, "{worst:e}");
        assert_eq!(sin_cos(0.0), (0.0, 1.0));
        assert!(sin_cos(f32::NAN).0.is_nan() && sin_cos(f32::INFINITY).1.is_nan() && sin_cos(f32::NEG_INFINITY).0.is_nan());
        for x in [8.1e8f32, -1e30, f32::MAX] {
            assert!(sin_cos(x).0.is_nan() && sin_cos(x).1.is_nan(), "{x}");
        }
    }
}
