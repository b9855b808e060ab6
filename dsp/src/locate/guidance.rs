//! Which way to walk.
//!
//! Along the sonde axis (receiver in line), for a level dipole at depth h and
//! the receiver a distance x along the axis from the point over it, the ratio
//! of vertical to horizontal field is `ρ = Bz/Bh = 3xh/(2x² − h²)` (from
//! Griffiths eq. 5.89). With the horizontal field direction taken facing
//! forward (see `components`), inside the null span `ρ > 0` means the sonde is
//! ahead and `ρ < 0` behind, and once the depth is known the offset follows:
//! `d_ahead = h·(√(9 + 8ρ²) − 3)/(4ρ)` (the root with |x| < h/√2).
//! Across the axis the strength peaks over the sonde.

/// Guidance along the sonde axis.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Guidance {
    /// Bz/Bh at the lower coils.
    pub vertical_ratio: f32,
    /// +1 sonde ahead, −1 behind, 0 over it or unknown.
    pub direction: i8,
    /// Distance ahead (negative: behind) to the point over the sonde, m, when a depth is known.
    pub ahead_m: Option<f32>,
}

/// Ratio inside which the receiver counts as over the sonde.
pub const OVER_RATIO: f32 = 0.05;

/// Guidance from the ratio and, if known, the depth.
pub fn guidance(vertical_ratio: f32, depth_m: Option<f32>) -> Guidance {
    let r = if vertical_ratio.is_finite() { vertical_ratio } else { 0.0 };
    let direction = if r > OVER_RATIO {
        1
    } else if r < -OVER_RATIO {
        -1
    } else {
        0
    };
    let ahead_m = depth_m.filter(|h| h.is_finite() && *h > 0.0).map(|h| offset_from_ratio(r, h));
    Guidance { vertical_ratio: r, direction, ahead_m }
}

/// Distance ahead of the receiver to the point over the sonde, from ρ and depth h.
pub fn offset_from_ratio(ratio: f32, depth_m: f32) -> f32 {
    if libm::fabsf(ratio) < 1e-6 {
        return 0.0;
    }
    depth_m * (libm::sqrtf(9.0 + 8.0 * ratio * ratio) - 3.0) / (4.0 * ratio)
}
