//! Field of a long straight line current (a pipe or cable carrying a signal).
//!
//! Biot–Savart for an infinite straight wire: `|B| = μ0·I/(2π·ρ)`, directed
//! along `d̂ × ρ̂` (right-hand rule), `ρ` the perpendicular distance (m), `I` in A.
//! The field falls as 1/ρ, so two coils `s` apart on one vertical over the line
//! see `R = (h + s)/h` and `h = s/(R − 1)`.

use crate::field::vec3::{cross, dot, norm, scale, sub, unit, V3};

/// μ0/2π, T·m/A.
pub const MU0_OVER_2PI: f32 = 2e-7;

/// Field (T) at `point_m` of current `current_a` along the line through `origin_m` with direction `dir`.
///
/// ```
/// use undertone_dsp::field::line::line_field;
/// // 1 A along +x, 2 m below: |B| = μ0·I/(2πρ) = 1e-7 T, along x̂ × ẑ = −ŷ above the line.
/// let b = line_field(1.0, [0.0, 0.0, -2.0], [1.0, 0.0, 0.0], [0.0; 3]);
/// assert!((b[1] + 1e-7).abs() < 1e-13 && b[0] == 0.0 && b[2].abs() < 1e-13);
/// ```
pub fn line_field(current_a: f32, origin_m: V3, dir: V3, point_m: V3) -> V3 {
    let d = unit(dir);
    let r = sub(point_m, origin_m);
    let along = scale(d, dot(r, d));
    let rho = sub(r, along);
    let dist = norm(rho);
    if !(dist > 1e-6) || !dist.is_finite() {
        return [0.0; 3];
    }
    let phi = cross(d, scale(rho, 1.0 / dist));
    scale(phi, MU0_OVER_2PI * current_a / dist)
}
