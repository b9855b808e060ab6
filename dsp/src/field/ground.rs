//! A sonde's field in conducting ground.
//!
//! # Model
//! The sonde and the coils in one uniform conducting medium (a whole space) of
//! skin depth `δ = √(2/(ωμ0σ))` (m; Griffiths, *Introduction to
//! Electrodynamics*, §9.4.1), quasi-static, wavenumber `k = (1 + i)/δ`. The
//! oscillating dipole's field at distance `r` (m) along `r̂` (Jackson,
//! *Classical Electrodynamics*, 3rd ed., eq. 9.36, with k complex) is
//!
//! `B = μ0/(4π r³)·[A_r·2(r̂·m)r̂ − A_t·(m − r̂(r̂·m))]`,
//! `A_r = e^{ikr}(1 − ikr)`, `A_t = e^{ikr}(1 − ikr − k²r²)`,
//!
//! the static dipole field with its part along `r̂` scaled by `A_r` and its
//! transverse part by `A_t`. With `x = r/δ`:
//!
//! `|A_r| = e^{−x}·√((1 + x)² + x²)`, `|A_t| = e^{−x}·√((1 + x)² + (x + 2x²)²)`.
//!
//! Both are `1 + O(x³)`: at first order the ground changes only the phase, not
//! the size, of what the coils read (the transverse part even grows a little,
//! 8 % at `x = 0.47`). The phases of `A_r` and `A_t` differ by `O(x²)` rad; the
//! receiver projects every coil on their common phase, which reads the
//! magnitudes to within `1 − O(Δφ²)`.
//!
//! The air above the ground is not modelled (a whole space, not a half space):
//! the simulator uses the same model, so the closed loop checks the receiver
//! against it, not against a field trial.

/// `[|A_r|, |A_t|, d|A_r|/dr, d|A_t|/dr]` at distance `r_m` (m) for skin depth
/// `delta_m` (m; infinite or not positive: no ground, `[1, 1, 0, 0]`).
pub fn whole_space_factors(r_m: f32, delta_m: f32) -> [f32; 4] {
    let x = r_m / delta_m;
    if !(x > 0.0 && x.is_finite()) {
        return [1.0, 1.0, 0.0, 0.0];
    }
    let e = libm::expf(-x);
    let p = 1.0 + x;
    let t = x + 2.0 * x * x;
    let (nr, nt) = (p * p + x * x, p * p + t * t);
    let (ar, at) = (e * libm::sqrtf(nr), e * libm::sqrtf(nt));
    // d ln|A|/dx = −1 + (p·p' + q·q')/(p² + q²), with p' = 1 and q' = 1 (A_r) or 1 + 4x (A_t).
    let dr = -1.0 + (p + x) / nr;
    let dt = -1.0 + (p + t * (1.0 + 4.0 * x)) / nt;
    [ar, at, ar * dr / delta_m, at * dt / delta_m]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_ground_and_small_distances_read_the_static_field() {
        assert_eq!(whole_space_factors(1.0, f32::INFINITY), [1.0, 1.0, 0.0, 0.0]);
        assert_eq!(whole_space_factors(0.0, 5.0), [1.0, 1.0, 0.0, 0.0]);
        // No first- or second-order change of size: |A_r| = 1 − (2/3)x³ and |A_t| = 1 + (4/3)x³ to
        // third order (the series of e^{u}(1 − u) and e^{u}(1 − u) − 2ix²e^{u}, u = ikr = (i − 1)x),
        // here at x = 0.1, where the fourth order is 1e-4.
        let f = whole_space_factors(0.1, 1.0);
        assert!((f[0] - (1.0 - 2.0 / 3.0 * 1e-3)).abs() < 1e-4, "{f:?}");
        assert!((f[1] - (1.0 + 4.0 / 3.0 * 1e-3)).abs() < 2e-4, "{f:?}");
    }

    #[test]
    fn derivatives_match_finite_differences() {
        for &(r, d) in &[(0.5f32, 2.78f32), (1.3, 2.78), (4.0, 157.0), (3.0, 5.6)] {
            let f = whole_space_factors(r, d);
            let e = 2e-2 * r;
            let (a, b) = (whole_space_factors(r + e, d), whole_space_factors(r - e, d));
            for k in 0..2 {
                let fd = (a[k] - b[k]) / (2.0 * e);
                assert!((fd - f[2 + k]).abs() <= 2e-3 * f[2 + k].abs().max(1e-2), "r {r} δ {d} k {k}: {fd} vs {}", f[2 + k]);
            }
        }
    }
}
