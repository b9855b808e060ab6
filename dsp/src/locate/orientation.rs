//! Orientation of the receiver to the sonde axis, with hysteresis.
//!
//! Common practice of the trade (no published source): the signal peaks when
//! coil and sonde axes lie in one plane and nulls when they are perpendicular.
//! With the bearing β of the horizontal field from the handle axis: *in line*
//! (the along coil takes nearly all the horizontal field, the peak orientation)
//! when |β| is small, *crossed* (the null orientation) when |β| is near 90°,
//! *between* otherwise. Entering a state needs a tighter angle than staying in
//! it, so the state does not chatter at a boundary.

use crate::error::{ConfigError, Param};

/// Orientation state.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Orientation {
    /// No usable field.
    Unknown,
    /// Handle in line with the horizontal field (peak orientation).
    InLine,
    /// Handle across the horizontal field (null orientation).
    Crossed,
    /// Neither.
    Between,
}

impl Orientation {
    /// Short name for printing.
    pub fn name(self) -> &'static str {
        match self {
            Orientation::Unknown => "unknown",
            Orientation::InLine => "in-line",
            Orientation::Crossed => "crossed",
            Orientation::Between => "between",
        }
    }
}

/// Hysteresis thresholds, degrees from in line.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Hysteresis {
    /// Enter in line below this |β|.
    pub inline_enter_deg: f32,
    /// Leave in line above this |β|.
    pub inline_leave_deg: f32,
    /// Enter crossed above this |β|.
    pub crossed_enter_deg: f32,
    /// Leave crossed below this |β|.
    pub crossed_leave_deg: f32,
}

impl Default for Hysteresis {
    fn default() -> Self {
        Self { inline_enter_deg: 12.0, inline_leave_deg: 20.0, crossed_enter_deg: 78.0, crossed_leave_deg: 70.0 }
    }
}

impl Hysteresis {
    /// Check 0 < inline_enter ≤ inline_leave < crossed_leave ≤ crossed_enter < 90.
    pub fn validate(&self) -> Result<(), ConfigError> {
        let h = self;
        let ok = h.inline_enter_deg > 0.0
            && h.inline_enter_deg <= h.inline_leave_deg
            && h.inline_leave_deg < h.crossed_leave_deg
            && h.crossed_leave_deg <= h.crossed_enter_deg
            && h.crossed_enter_deg < 90.0;
        if ok {
            Ok(())
        } else {
            Err(ConfigError { param: Param::Hysteresis, value: h.inline_enter_deg, min: 0.0, max: 90.0 })
        }
    }

    /// Next state from the previous one and |bearing| in degrees.
    pub fn next(&self, prev: Orientation, bearing_deg: f32, have_field: bool) -> Orientation {
        if !have_field || !bearing_deg.is_finite() {
            return Orientation::Unknown;
        }
        let b = libm::fabsf(bearing_deg);
        match prev {
            Orientation::InLine if b <= self.inline_leave_deg => Orientation::InLine,
            Orientation::Crossed if b >= self.crossed_leave_deg => Orientation::Crossed,
            _ if b < self.inline_enter_deg => Orientation::InLine,
            _ if b > self.crossed_enter_deg => Orientation::Crossed,
            _ => Orientation::Between,
        }
    }
}
