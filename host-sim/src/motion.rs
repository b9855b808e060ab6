//! Receiver motion: where the head is and which way the handle points at time t.
//!
//! Each segment is a path walked at constant speed: a straight walk, a circle
//! (tangent heading), a raster of back-and-forth lines, or standing still.
//! Heading wobble is a deterministic sum of two slow sines whose phases come
//! from the scenario seed.

use crate::scenario::MotionSpec;

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
    segments: Vec<(MotionSpec, f64)>,
    wobble_phase: [f64; 2],
}

impl Motion {
    /// From the scenario's segments and seed.
    pub fn new(specs: &[MotionSpec], seed: u64) -> Self {
        let ph = |k: u64| {
            ((seed.wrapping_mul(0x9E37_79B9_7F4A_7C15).wrapping_add(k.wrapping_mul(0xD1B5_4A32_D192_ED03)) >> 11) as f64)
                / (1u64 << 53) as f64
                * std::f64::consts::TAU
        };
        Self { segments: specs.iter().map(|m| (m.clone(), segment_duration(m))).collect(), wobble_phase: [ph(1), ph(2)] }
    }

    /// Total duration, s.
    pub fn duration_s(&self) -> f64 {
        self.segments.iter().map(|s| s.1).sum()
    }

    /// Pose at time t (s); after the end, the last pose.
    pub fn pose(&self, t: f64) -> Pose {
        let mut t0 = 0.0;
        for (i, (m, d)) in self.segments.iter().enumerate() {
            if t < t0 + d || i + 1 == self.segments.len() {
                return self.in_segment(m, (t - t0).clamp(0.0, *d), t);
            }
            t0 += d;
        }
        Pose { x_m: 0.0, y_m: 0.0, heading_rad: 0.0 }
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
