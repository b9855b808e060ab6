//! Receiver motion: where the head is and which way the handle points at time t.
//!
//! Each segment is a path walked at constant speed: a straight walk, a circle
//! (tangent heading), a raster of back-and-forth lines, or standing still.
//! Heading wobble is a deterministic sum of two slow sines whose phases come
//! from the scenario seed. Segment timing (start and duration of each
//! segment) is computed here once, in [`Motion`]; reports ask it which
//! segment a time falls in and how far along its path the head was.

use serde::{Deserialize, Serialize};

/// One segment of receiver motion.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields, tag = "kind", rename_all = "lowercase")]
pub enum MotionSpec {
    /// Straight walk.
    Walk {
        /// Start east, m.
        from: [f64; 2],
        /// End, m.
        to: [f64; 2],
        /// Speed, m/s.
        speed_m_s: f64,
        /// Handle heading, degrees from east (default: the walking direction).
        heading_deg: Option<f64>,
        /// Heading wobble amplitude, degrees.
        #[serde(default)]
        wobble_deg: f64,
    },
    /// A circle around a point, closing in from a distance.
    Circle {
        /// Centre, m.
        centre: [f64; 2],
        /// Radius, m.
        radius_m: f64,
        /// Speed, m/s.
        speed_m_s: f64,
        /// Turns.
        #[serde(default = "one_f")]
        turns: f64,
    },
    /// Back-and-forth lines over a rectangle.
    Raster {
        /// Lower-left corner, m.
        from: [f64; 2],
        /// Upper-right corner, m.
        to: [f64; 2],
        /// Line spacing, m.
        spacing_m: f64,
        /// Speed, m/s.
        speed_m_s: f64,
    },
    /// Standing still.
    Still {
        /// Position, m.
        at: [f64; 2],
        /// Handle heading, degrees from east.
        #[serde(default)]
        heading_deg: f64,
        /// Duration, s.
        duration_s: f64,
    },
}

fn one_f() -> f64 {
    1.0
}

/// Position (east, north) in m and handle heading (rad from east towards north).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Pose {
    /// East, m.
    pub x_m: f64,
    /// North, m.
    pub y_m: f64,
    /// Handle heading, rad.
    pub heading_rad: f64,
}

/// Duration of one segment, s.
pub fn segment_duration(m: &MotionSpec) -> f64 {
    match m {
        MotionSpec::Walk { from, to, speed_m_s, .. } => dist(*from, *to) / speed_m_s,
        MotionSpec::Circle { radius_m, speed_m_s, turns, .. } => 2.0 * std::f64::consts::PI * radius_m * turns / speed_m_s,
        MotionSpec::Raster { from, to, spacing_m, speed_m_s } => {
            raster_points(*from, *to, *spacing_m).windows(2).map(|w| dist(w[0], w[1])).sum::<f64>() / speed_m_s
        }
        MotionSpec::Still { duration_s, .. } => *duration_s,
    }
}

fn dist(a: [f64; 2], b: [f64; 2]) -> f64 {
    ((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2)).sqrt()
}

fn raster_points(from: [f64; 2], to: [f64; 2], spacing: f64) -> Vec<[f64; 2]> {
    let lines = ((to[1] - from[1]) / spacing).floor() as usize + 1;
    let mut pts = Vec::new();
    for k in 0..lines.min(10_000) {
        let y = from[1] + k as f64 * spacing;
        if k % 2 == 0 {
            pts.push([from[0], y]);
            pts.push([to[0], y]);
        } else {
            pts.push([to[0], y]);
            pts.push([from[0], y]);
        }
    }
    pts
}

fn along_polyline(pts: &[[f64; 2]], s: f64) -> ([f64; 2], f64) {
    let mut left = s;
    for w in pts.windows(2) {
        let l = dist(w[0], w[1]);
        let hd = (w[1][1] - w[0][1]).atan2(w[1][0] - w[0][0]);
        if left <= l || l == 0.0 {
            let f = if l > 0.0 { left / l } else { 0.0 };
            return ([w[0][0] + f * (w[1][0] - w[0][0]), w[0][1] + f * (w[1][1] - w[0][1])], hd);
        }
        left -= l;
    }
    let n = pts.len();
    let hd = if n >= 2 { (pts[n - 1][1] - pts[n - 2][1]).atan2(pts[n - 1][0] - pts[n - 2][0]) } else { 0.0 };
    (pts[n - 1], hd)
}

/// The whole motion of a scenario.
#[derive(Clone, Debug)]
pub struct Motion {
    segments: Vec<Segment>,
    wobble_phase: [f64; 2],
}

/// One segment with its timing.
#[derive(Clone, Debug, PartialEq)]
pub struct Segment {
    /// What the segment is.
    pub spec: MotionSpec,
    /// When it starts, s from the start of the run.
    pub start_s: f64,
    /// How long it lasts, s.
    pub duration_s: f64,
}

impl Segment {
    /// True for a segment in which the head moves (anything but standing still).
    pub fn moves(&self) -> bool {
        !matches!(self.spec, MotionSpec::Still { .. })
    }

    /// Distance walked along the segment's path at time `t_s` (clamped to the segment), m;
    /// standing still, the time into the segment, s.
    pub fn progress(&self, t_s: f64) -> f64 {
        let tl = (t_s - self.start_s).clamp(0.0, self.duration_s);
        match &self.spec {
            MotionSpec::Walk { speed_m_s, .. } | MotionSpec::Circle { speed_m_s, .. } | MotionSpec::Raster { speed_m_s, .. } => {
                tl * speed_m_s
            }
            MotionSpec::Still { .. } => tl,
        }
    }

    /// One line naming the segment for plots and reports, e.g. `walk (-4, 0) m to (4, 0) m`.
    pub fn describe(&self, len: &dyn Fn(f64) -> String) -> String {
        let p = |a: &[f64; 2]| format!("({}, {})", len(a[0]), len(a[1]));
        match &self.spec {
            MotionSpec::Walk { from, to, .. } => format!("walk {} to {}", p(from), p(to)),
            MotionSpec::Circle { centre, radius_m, .. } => format!("circle of radius {} about {}", len(*radius_m), p(centre)),
            MotionSpec::Raster { from, to, .. } => format!("raster {} to {}", p(from), p(to)),
            MotionSpec::Still { at, .. } => format!("standing at {}", p(at)),
        }
    }
}

/// Total duration of `specs` walked in order, s.
pub fn total_duration_s(specs: &[MotionSpec]) -> f64 {
    specs.iter().map(segment_duration).sum()
}

impl Motion {
    /// From the scenario's segments and seed.
    pub fn new(specs: &[MotionSpec], seed: u64) -> Self {
        let ph = |k: u64| {
            ((seed.wrapping_mul(0x9E37_79B9_7F4A_7C15).wrapping_add(k.wrapping_mul(0xD1B5_4A32_D192_ED03)) >> 11) as f64)
                / (1u64 << 53) as f64
                * std::f64::consts::TAU
        };
        let mut start_s = 0.0;
        let segments = specs
            .iter()
            .map(|m| {
                let duration_s = segment_duration(m);
                let s = Segment { spec: m.clone(), start_s, duration_s };
                start_s += duration_s;
                s
            })
            .collect();
        Self { segments, wobble_phase: [ph(1), ph(2)] }
    }

    /// Total duration, s.
    pub fn duration_s(&self) -> f64 {
        self.segments.iter().map(|s| s.duration_s).sum()
    }

    /// The segments with their timing, in order.
    pub fn segments(&self) -> &[Segment] {
        &self.segments
    }

    /// Index of the segment time `t_s` falls in (before the start: the first; after the end: the last).
    pub fn segment_at(&self, t_s: f64) -> usize {
        self.segments.iter().position(|s| t_s < s.start_s + s.duration_s).unwrap_or(self.segments.len().saturating_sub(1))
    }

    /// Pose at time t (s); after the end, the last pose.
    pub fn pose(&self, t: f64) -> Pose {
        match self.segments.get(self.segment_at(t)) {
            Some(s) => self.in_segment(&s.spec, (t - s.start_s).clamp(0.0, s.duration_s), t),
            None => Pose { x_m: 0.0, y_m: 0.0, heading_rad: 0.0 },
        }
    }

    fn in_segment(&self, m: &MotionSpec, tl: f64, t: f64) -> Pose {
        match m {
            MotionSpec::Walk { from, to, speed_m_s, heading_deg, wobble_deg } => {
                let (p, hd) = along_polyline(&[*from, *to], tl * speed_m_s);
                let base = heading_deg.map(|h| h.to_radians()).unwrap_or(hd);
                let w = wobble_deg.to_radians()
                    * (0.7 * (std::f64::consts::TAU * 0.31 * t + self.wobble_phase[0]).sin()
                        + 0.3 * (std::f64::consts::TAU * 0.83 * t + self.wobble_phase[1]).sin());
                Pose { x_m: p[0], y_m: p[1], heading_rad: base + w }
            }
            MotionSpec::Circle { centre, radius_m, speed_m_s, .. } => {
                let a = tl * speed_m_s / radius_m;
                Pose {
                    x_m: centre[0] + radius_m * a.cos(),
                    y_m: centre[1] + radius_m * a.sin(),
                    heading_rad: a + std::f64::consts::FRAC_PI_2,
                }
            }
            MotionSpec::Raster { from, to, spacing_m, speed_m_s } => {
                let pts = raster_points(*from, *to, *spacing_m);
                let (p, hd) = along_polyline(&pts, tl * speed_m_s);
                Pose { x_m: p[0], y_m: p[1], heading_rad: hd }
            }
            MotionSpec::Still { at, heading_deg, .. } => Pose { x_m: at[0], y_m: at[1], heading_rad: heading_deg.to_radians() },
        }
    }
}
