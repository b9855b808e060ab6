//! Coil-head geometry: where each pickup coil sits, which way it points, its gain.
//!
//! Receiver coordinates: origin at the lower coil centre, x forward along the
//! handle, y to the left, z up (m). A coil of unit axis `a` and gain `g` reads
//! the amplitude `g·(B·a)` of the field at its position. Depth is reported from
//! the lower coil centre.
//!
//! Built-in heads:
//! * [`Head::reference4`]: 0 lower along x, 1 lower across y, 2 lower vertical z,
//!   3 upper along x, 0.40 m above coil 0.
//! * [`Head::triads6`]: two full x/y/z triads 0.40 m apart (0–2 lower, 3–5 upper).

use crate::error::{ConfigError, Param};
use crate::field::vec3::{dot, norm, V3};
use crate::field::Source;

/// Spacing of the built-in heads' upper coils above the lower ones, m.
pub const REFERENCE_SPACING_M: f32 = 0.40;
/// Relative coil gains accepted (1 = nominal; the input scale carries the absolute one).
pub const GAIN_RANGE: (f32, f32) = (0.1, 10.0);
/// Coil position coordinates accepted, m.
pub const POSITION_RANGE_M: (f32, f32) = (-2.0, 2.0);
/// Smallest height of the upper along coil above the lower one, m.
pub const MIN_SPACING_M: f32 = 0.05;

/// One pickup coil.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Coil {
    /// Centre relative to the lower coil centre, m.
    pub pos_m: V3,
    /// Unit axis.
    pub axis: V3,
    /// Relative gain (1 = nominal); readings are `gain·(B·axis)`.
    pub gain: f32,
}

/// Which coil plays which part in the locating maths (indices into the head).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Roles {
    /// Lower coils along x, y, z.
    pub lower: [Option<u8>; 3],
    /// Upper coils along x, y, z.
    pub upper: [Option<u8>; 3],
}

/// A head of `N` coils.
///
/// ```
/// use undertone_dsp::field::Source;
/// use undertone_dsp::Head;
/// let head = Head::reference4();
/// assert!(head.validate().is_ok());
/// assert_eq!(head.spacing_m(), Some(0.40));
/// // A level sonde (1 A·m² along x) 1 m below the lower coils: the along coils read
/// // −μ0m/(4πh³), at h = 1 m and h = 1.4 m; the across and vertical coils read nothing.
/// let sonde = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.0, 0.0, -1.0] };
/// let r = head.readings(&sonde, [0.0; 3], 0.0);
/// assert!((r[0] + 1e-7).abs() < 1e-13 && (r[3] + 1e-7 / 1.4f32.powi(3)).abs() < 1e-13);
/// assert!(r[1].abs() < 1e-15 && r[2].abs() < 1e-15);
/// // Turned a quarter turn, the across coil takes the along coil's reading.
/// let r = head.readings(&sonde, [0.0; 3], core::f32::consts::FRAC_PI_2);
/// assert!((r[1] - 1e-7).abs() < 1e-12 && r[0].abs() < 1e-12);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Head<const N: usize> {
    /// The coils.
    pub coils: [Coil; N],
    /// Roles of the coils.
    pub roles: Roles,
}

const X: V3 = [1.0, 0.0, 0.0];
const Y: V3 = [0.0, 1.0, 0.0];
const Z: V3 = [0.0, 0.0, 1.0];

fn coil(pos_m: V3, axis: V3) -> Coil {
    Coil { pos_m, axis, gain: 1.0 }
}

impl Head<4> {
    /// The 4-coil reference head (upper along coil 0.40 m above the lower).
    pub fn reference4() -> Self {
        let s = REFERENCE_SPACING_M;
        Head {
            coils: [coil([0.0; 3], X), coil([0.0; 3], Y), coil([0.0; 3], Z), coil([0.0, 0.0, s], X)],
            roles: Roles { lower: [Some(0), Some(1), Some(2)], upper: [Some(3), None, None] },
        }
    }
}

impl Head<6> {
    /// Two x/y/z triads 0.40 m apart.
    pub fn triads6() -> Self {
        let s = REFERENCE_SPACING_M;
        let u = [0.0, 0.0, s];
        Head {
            coils: [coil([0.0; 3], X), coil([0.0; 3], Y), coil([0.0; 3], Z), coil(u, X), coil(u, Y), coil(u, Z)],
            roles: Roles { lower: [Some(0), Some(1), Some(2)], upper: [Some(3), Some(4), Some(5)] },
        }
    }
}

impl<const N: usize> Head<N> {
    /// Check axes are unit vectors, positions within [`POSITION_RANGE_M`], relative
    /// gains within [`GAIN_RANGE`], roles in range, and the upper along coil at
    /// least [`MIN_SPACING_M`] above the lower one. The error names the coil.
    pub fn validate(&self) -> Result<(), ConfigError> {
        for (i, c) in self.coils.iter().enumerate() {
            let i = i as u8;
            let n = norm(c.axis);
            if !(libm::fabsf(n - 1.0) < 1e-3) {
                return Err(ConfigError { param: Param::CoilAxis(i), value: n, min: 0.999, max: 1.001 });
            }
            for p in c.pos_m {
                ConfigError::check(Param::CoilPosition(i), p, POSITION_RANGE_M.0, POSITION_RANGE_M.1)?;
            }
            ConfigError::check(Param::CoilGain(i), c.gain, GAIN_RANGE.0, GAIN_RANGE.1)?;
        }
        for r in self.roles.lower.iter().chain(self.roles.upper.iter()).flatten() {
            ConfigError::check(Param::HeadGeometry, *r as f32, 0.0, (N - 1) as f32)?;
        }
        if self.roles.lower[0].is_none() {
            return Err(ConfigError { param: Param::HeadGeometry, value: f32::NAN, min: 0.0, max: (N - 1) as f32 });
        }
        if let (Some(s), Some(up)) = (self.spacing_m(), self.roles.upper[0]) {
            ConfigError::check(Param::CoilPosition(up), s, MIN_SPACING_M, POSITION_RANGE_M.1)?;
        }
        Ok(())
    }

    /// Vertical spacing between the lower and upper along (x) coils, m, if both exist.
    pub fn spacing_m(&self) -> Option<f32> {
        let lo = self.roles.lower[0]? as usize;
        let up = self.roles.upper[0]? as usize;
        Some(self.coils[up].pos_m[2] - self.coils[lo].pos_m[2])
    }

    /// Noise-free coil readings for a source, receiver at `origin_m` turned by `heading_rad` about z.
    pub fn readings(&self, source: &Source, origin_m: V3, heading_rad: f32) -> [f32; N] {
        let (s, c) = crate::trigf::sin_cos(heading_rad);
        let rot = |v: V3| [c * v[0] - s * v[1], s * v[0] + c * v[1], v[2]];
        let mut out = [0.0; N];
        for (i, coil) in self.coils.iter().enumerate() {
            let p = rot(coil.pos_m);
            let pos = [origin_m[0] + p[0], origin_m[1] + p[1], origin_m[2] + p[2]];
            out[i] = coil.gain * dot(source.field_at(pos), rot(coil.axis));
        }
        out
    }
}
