//! From coil phasors to a signed field vector.
//!
//! A clean dipole (or line) field reaches every coil in phase or in anti-phase.
//! The common phase `θ = ½·arg(Σ_c P_c²)` is the direction that carries the
//! most energy (the principal axis of the phasors in the complex plane, a sign
//! flip of any coil leaves it unchanged). Each coil's signed amplitude is
//! `a_c = Re(P_c·e^{−jθ})/g_c`; what is left, `q_c = Im(P_c·e^{−jθ})/g_c`, is the
//! quadrature residue, reported as `Q = √(Σq²/Σ(a² + q²))` (0 for a clean field;
//! interference, eddy currents or metal raise it).
//!
//! The overall sign of a reading is arbitrary (the sonde's phase is unknown).
//! It is fixed by making the lower along-coil reading non-negative (or, when
//! that is zero, the across reading), so the horizontal field direction `û`
//! faces forward and `bearing ∈ [−90°, 90°]` (the axis's 180° ambiguity).

use crate::field::head::Head;
use crate::field::vec3::V3;
use crate::phasor::{Phasor, C32};

/// The field seen by the head at one readout, in field units after coil gains.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FieldVector<const N: usize> {
    /// Signed amplitude per coil (gain-corrected), sign fixed as described above.
    pub signed: [f32; N],
    /// Noise σ of each signed amplitude (gain-corrected).
    pub sigma: [f32; N],
    /// Quadrature residue Q, 0…1.
    pub quadrature: f32,
    /// Field at the lower coils (x, y, z); missing coils read 0.
    pub lower: V3,
    /// Field at the upper coils (x, y, z); missing coils read 0.
    pub upper: V3,
    /// Horizontal field at the lower coils, √(x² + y²).
    pub horizontal: f32,
    /// Total field at the lower coils.
    pub total: f32,
    /// Bearing of the horizontal field from the handle's forward axis, rad, in [−π/2, π/2].
    pub bearing_rad: f32,
}

impl<const N: usize> FieldVector<N> {
    /// Project phasors (with per-component noise σ) onto their common phase.
    pub fn from_phasors(head: &Head<N>, p: &[C32; N], noise_sigma: &[f32; N]) -> Self {
        let mut s2 = C32::ZERO;
        for v in p.iter() {
            if v.is_finite() {
                s2 += *v * *v;
            }
        }
        let theta = if s2.norm_sqr() > 0.0 && s2.is_finite() { 0.5 * s2.angle_rad() } else { 0.0 };
        let rot = crate::phasor::unit(-theta);
        let mut signed = [0.0; N];
        let mut sigma = [0.0; N];
        let (mut qq, mut tot) = (0.0f32, 0.0f32);
        for c in 0..N {
            let g = head.coils[c].gain;
            let z = if p[c].is_finite() { p[c] * rot } else { C32::ZERO };
            signed[c] = z.re / g;
            sigma[c] = libm::fabsf(noise_sigma[c] / g);
            let q = z.im / g;
            qq += q * q;
            tot += signed[c] * signed[c] + q * q;
        }
        let pick = |idx: Option<u8>, v: &[f32; N]| idx.map(|i| v[i as usize]).unwrap_or(0.0);
        let r = head.roles;
        let mut lower = [pick(r.lower[0], &signed), pick(r.lower[1], &signed), pick(r.lower[2], &signed)];
        let mut upper = [pick(r.upper[0], &signed), pick(r.upper[1], &signed), pick(r.upper[2], &signed)];
        let flip = lower[0] < 0.0 || (lower[0] == 0.0 && lower[1] < 0.0);
        if flip {
            for v in signed.iter_mut() {
                *v = -*v;
            }
            for k in 0..3 {
                lower[k] = -lower[k];
                upper[k] = -upper[k];
            }
        }
        let horizontal = crate::powf::hypotf(lower[0], lower[1]);
        let total = crate::powf::hypotf(horizontal, lower[2]);
        let bearing_rad = if horizontal > 0.0 { libm::atan2f(lower[1], lower[0]) } else { 0.0 };
        let quadrature = if tot > 0.0 && tot.is_finite() { libm::sqrtf(qq / tot) } else { 0.0 };
        Self { signed, sigma, quadrature, lower, upper, horizontal, total, bearing_rad }
    }

    /// Signed vertical over horizontal field at the lower coils, `ρ = Bz/|Bh|` (0 when no field).
    pub fn vertical_ratio(&self) -> f32 {
        if self.horizontal > 0.0 {
            let r = self.lower[2] / self.horizontal;
            if r.is_finite() {
                r
            } else {
                0.0
            }
        } else {
            0.0
        }
    }

    /// Noise σ of a role's reading.
    pub fn sigma_of(&self, idx: Option<u8>) -> f32 {
        idx.map(|i| self.sigma[i as usize]).unwrap_or(f32::INFINITY)
    }
}
