//! What the receiver showed against the simulator's truth: the checks behind
//! the locating promise (directions right or withheld, "over" only when over,
//! depths within their σ).
//!
//! Geometry: the sonde's axis `m̂` (unit, from the scenario's yaw and pitch,
//! projected on the ground), the receiver at `x̃ = (p − s)·m̂` along it and `ỹ`
//! across it, `h` the depth below the lower coil. The nulls of the along
//! field of a level dipole lie at `2x̃² = ỹ² + h²` (Griffiths eq. 5.89); beyond
//! them is `|x̃| > √((ỹ² + h²)/2)`. A direction is *right* when its sign matches
//! the sonde's true position ahead of the handle when the readout was shown.

use crate::run::Row;
use serde::Serialize;

/// Largest angle between the handle and the sonde axis at which along-axis
/// guidance is scored, degrees (the receiver asks to turn beyond 40°).
pub const SCORED_AXIS_ANGLE_DEG: f64 = 30.0;

/// The scores of one run.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct Score {
    /// Readouts beyond the nulls with the handle within 30° of the axis.
    pub beyond: usize,
    /// Of those, a direction shown and right.
    pub beyond_right: usize,
    /// Of those, a direction shown and wrong.
    pub beyond_wrong: usize,
    /// Of those, no direction shown (unsure).
    pub beyond_withheld: usize,
    /// Readouts inside the nulls, handle within 30° of the axis, not over.
    pub inside: usize,
    /// Of those, right.
    pub inside_right: usize,
    /// Of those, wrong.
    pub inside_wrong: usize,
    /// Readouts showing "over".
    pub over_shown: usize,
    /// Of those, farther than the over tolerance from the point over the sonde.
    pub over_too_far: usize,
    /// Largest distance of an "over" from the point over the sonde, m.
    pub over_worst_m: f64,
    /// Readouts showing a lateral side (left/right).
    pub side_shown: usize,
    /// Of those, wrong.
    pub side_wrong: usize,
    /// Readouts showing a depth.
    pub depth_shown: usize,
    /// Of those, within 2σ of the truth.
    pub depth_within_2sigma: usize,
    /// Of those, more than 15 % off.
    pub depth_beyond_15pct: usize,
    /// Largest depth error, %.
    pub depth_worst_pct: f64,
    /// Depths shown with σ = 0.
    pub depth_zero_sigma: usize,
}

impl Score {
    /// Add another run's scores.
    pub fn add(&mut self, o: &Score) {
        self.beyond += o.beyond;
        self.beyond_right += o.beyond_right;
        self.beyond_wrong += o.beyond_wrong;
        self.beyond_withheld += o.beyond_withheld;
        self.inside += o.inside;
        self.inside_right += o.inside_right;
        self.inside_wrong += o.inside_wrong;
        self.over_shown += o.over_shown;
        self.over_too_far += o.over_too_far;
        self.over_worst_m = self.over_worst_m.max(o.over_worst_m);
        self.side_shown += o.side_shown;
        self.side_wrong += o.side_wrong;
        self.depth_shown += o.depth_shown;
        self.depth_within_2sigma += o.depth_within_2sigma;
        self.depth_beyond_15pct += o.depth_beyond_15pct;
        self.depth_worst_pct = self.depth_worst_pct.max(o.depth_worst_pct);
        self.depth_zero_sigma += o.depth_zero_sigma;
    }

    /// Share of shown directions beyond the nulls that are right (1 when none shown).
    pub fn beyond_right_share(&self) -> f64 {
        let shown = self.beyond_right + self.beyond_wrong;
        if shown == 0 {
            1.0
        } else {
            self.beyond_right as f64 / shown as f64
        }
    }

    /// Share of readouts beyond the nulls with the direction withheld.
    pub fn beyond_withheld_share(&self) -> f64 {
        if self.beyond == 0 {
            0.0
        } else {
            self.beyond_withheld as f64 / self.beyond as f64
        }
    }

    /// Share of shown depths within 2σ of the truth (1 when none shown).
    pub fn depth_within_2sigma_share(&self) -> f64 {
        if self.depth_shown == 0 {
            1.0
        } else {
            self.depth_within_2sigma as f64 / self.depth_shown as f64
        }
    }
}

/// The over tolerance for a depth: `max(0.15 m, 0.1·depth)`.
pub fn over_tolerance_m(depth_m: f64) -> f64 {
    undertone_dsp::locate::guidance::over_tolerance_m(depth_m as f32) as f64
}

/// Score readouts of a simulated run against their truth; `axis` is the sonde's
/// axis (east, north, up).
pub fn score(rows: &[Row], axis: [f64; 3]) -> Score {
    let mut s = Score::default();
    let hor = (axis[0] * axis[0] + axis[1] * axis[1]).sqrt().max(1e-9);
    let m = [axis[0] / hor, axis[1] / hor];
    for r in rows {
        let Some(t) = r.truth else { continue };
        let h = t.depth_m;
        let (dx, dy) = (t.x_m - t.sonde_m[0], t.y_m - t.sonde_m[1]);
        let xa = dx * m[0] + dy * m[1];
        let ya = -dx * m[1] + dy * m[0];
        let heading = t.heading_deg.to_radians();
        let cos_axis = (heading.cos() * m[0] + heading.sin() * m[1]).abs();
        let in_line = cos_axis >= SCORED_AXIS_ANGLE_DEG.to_radians().cos();
        let tol = over_tolerance_m(h);
        let ahead = t.ahead_shown_m;
        // "Over" is a claim about the readout's data (a group delay before it is shown; the
        // receiver claims it only when still along the axis): checked at the data time.
        let dist = (t.ahead_m * t.ahead_m + t.left_m * t.left_m).sqrt();
        if r.over {
            s.over_shown += 1;
            s.over_worst_m = s.over_worst_m.max(dist);
            if dist > tol {
                s.over_too_far += 1;
            }
        }
        if r.side != 0 {
            s.side_shown += 1;
            let truth_side = t.left_shown_m.signum() as i8;
            if t.left_shown_m.abs() > 0.5 * tol && truth_side != r.side {
                s.side_wrong += 1;
            }
        }
        if in_line {
            let beyond = 2.0 * xa * xa > ya * ya + h * h;
            let dir = r.direction;
            let right = dir != 0 && (ahead > 0.0) == (dir > 0);
            if beyond {
                s.beyond += 1;
                if dir == 0 {
                    s.beyond_withheld += 1;
                } else if right {
                    s.beyond_right += 1;
                } else {
                    s.beyond_wrong += 1;
                }
            } else if ahead.abs() > tol && dir != 0 {
                s.inside += 1;
                if right {
                    s.inside_right += 1;
                } else {
                    s.inside_wrong += 1;
                }
            }
        }
        if let (Some(d), Some(sd)) = (r.depth_m, r.depth_sigma_m) {
            s.depth_shown += 1;
            let err = d - h;
            if sd <= 0.0 {
                s.depth_zero_sigma += 1;
            }
            if err.abs() <= 2.0 * sd {
                s.depth_within_2sigma += 1;
            }
            let pct = 100.0 * err.abs() / h;
            s.depth_worst_pct = s.depth_worst_pct.max(pct);
            if pct > 15.0 {
                s.depth_beyond_15pct += 1;
            }
        }
    }
    s
}
