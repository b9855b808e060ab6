//! Field models (point dipole, long line current) and coil-head geometry.

pub mod dipole;
pub mod ground;
pub mod head;
pub mod line;
pub mod vec3;

use vec3::V3;

/// Which source model the depth estimators assume.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FieldModel {
    /// A sonde: magnetic point dipole, field ∝ 1/r³.
    Dipole,
    /// A long line current, field ∝ 1/r.
    Line,
}

impl FieldModel {
    /// Power of distance in the field law (3 for a dipole, 1 for a line).
    pub fn exponent(self) -> f32 {
        match self {
            FieldModel::Dipole => 3.0,
            FieldModel::Line => 1.0,
        }
    }
}

/// A source of field: a dipole or a line, in receiver coordinates.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Source {
    /// Dipole with moment (A·m²) at a position (m).
    Dipole {
        /// Moment vector, A·m².
        moment_am2: V3,
        /// Position, m.
        pos_m: V3,
    },
    /// Line current through a point with a direction.
    Line {
        /// Current, A.
        current_a: f32,
        /// A point on the line, m.
        origin_m: V3,
        /// Direction of the line.
        dir: V3,
    },
}

impl Source {
    /// Field (T) at a point (m).
    pub fn field_at(&self, point_m: V3) -> V3 {
        match *self {
            Source::Dipole { moment_am2, pos_m } => dipole::dipole_field(moment_am2, pos_m, point_m),
            Source::Line { current_a, origin_m, dir } => line::line_field(current_a, origin_m, dir, point_m),
        }
    }
}
