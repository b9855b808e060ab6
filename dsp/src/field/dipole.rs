//! Field of a magnetic point dipole (the sonde).
//!
//! `B(r) = μ0/(4π·r³)·[3(m·r̂)r̂ − m]` (Griffiths, *Introduction to
//! Electrodynamics*, eq. 5.89), with `r` from the dipole to the field point (m),
//! `m` the moment (A·m²), `B` in tesla, `μ0/4π = 1e-7 T·m/A`.
//!
//! For a level dipole `m·x̂` at depth `h` and a receiver moving along its axis
//! at `(x, 0, h)` above it, with `K = μ0·m/4π`:
//! `Bx = K(2x² − h²)/(x² + h²)^{5/2}`, `Bz = 3Kxh/(x² + h²)^{5/2}`: the main
//! peak `|Bx| = K/h³` over the sonde, nulls of `Bx` at `x = ±h/√2` and
//! secondary peaks of opposite sign at `x = ±h·√1.5`, 20.2 % of the main one.
//! A sonde a few centimetres long is a point dipole to better than 0.1 % at
//! locating distances (loop error ≈ 1.5·(a/r)² on axis).

use crate::field::vec3::{dot, norm, scale, sub, V3};

/// μ0/4π, T·m/A.
pub const MU0_OVER_4PI: f32 = 1e-7;

/// Field (T) at `point_m` of a dipole of moment `moment_am2` (A·m²) at `source_m`.
///
/// ```
/// use undertone_dsp::field::dipole::dipole_field;
/// // m = 1 A·m² along x, 1 m below: B = −μ0·m/(4πr³) = −1e-7 T along x (the main peak).
/// let b = dipole_field([1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [0.0; 3]);
/// assert!((b[0] + 1e-7).abs() < 1e-13 && b[1] == 0.0 && b[2].abs() < 1e-13);
/// // Ahead by h/√2 the along component vanishes (the null) and the field is vertical.
/// let b = dipole_field([1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [core::f32::consts::FRAC_1_SQRT_2, 0.0, 0.0]);
/// assert!(b[0].abs() < 1e-13 && (b[2] - 7.698e-8).abs() < 1e-11);
/// ```
pub fn dipole_field(moment_am2: V3, source_m: V3, point_m: V3) -> V3 {
    let r = sub(point_m, source_m);
    let d = norm(r);
    if !(d > 1e-6) || !d.is_finite() {
        return [0.0; 3];
    }
    let rh = scale(r, 1.0 / d);
    let k = MU0_OVER_4PI / (d * d * d);
    let mr = dot(moment_am2, rh);
    [k * (3.0 * mr * rh[0] - moment_am2[0]), k * (3.0 * mr * rh[1] - moment_am2[1]), k * (3.0 * mr * rh[2] - moment_am2[2])]
}

/// Field of a level unit dipole along x at the origin, `K = 1`: at `(x, y, z)`,
/// `B = (2x² − y² − z², 3xy, 3xz)/r⁵` (eq. 5.89 written out). Depth-free
/// shapes: put the receiver at `(u, η, 1)` for offsets in depths.
pub fn level_unit_field(x: f32, y: f32, z: f32) -> V3 {
    let r2 = x * x + y * y + z * z;
    let r5 = r2 * r2 * libm::sqrtf(r2);
    if !(r5 > 0.0) || !r5.is_finite() {
        return [0.0; 3];
    }
    [(2.0 * x * x - y * y - z * z) / r5, 3.0 * x * y / r5, 3.0 * x * z / r5]
}
