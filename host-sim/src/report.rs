//! Reports: the readout timeline, the summary against the truth, the cautions.

use crate::motion::segment_duration;
use crate::run::{Row, SimRun};
use crate::scenario::{MotionSpec, Scenario};
use std::io::Write;
use undertone_dsp::locate::depth::null_span_depth;

/// The caution in one line, for JSON and plot captions.
pub const CAUTION_LINE: &str = "A depth is an estimate with an error, not a measurement: confirm by careful hand digging, call your local one-call (call-before-you-dig) service and follow local codes and licensed practice before any excavation.";

/// The cautions every report carries.
pub const CAUTIONS: &str = "\
CAUTION: a depth from this receiver is an estimate with an error, not a measurement. Confirm the
position and depth by careful hand digging, and follow your local one-call / dig-safe rules and
licensed practice before any excavation near live utilities.";

/// Summary of one depth method.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct MethodSummary {
    /// Method name.
    pub method: String,
    /// Readouts with a valid estimate.
    pub count: usize,
    /// Median estimate, m.
    pub estimate_m: Option<f64>,
    /// Median reported σ, m.
    pub sigma_m: Option<f64>,
    /// Median true depth at those readouts, m.
    pub truth_m: Option<f64>,
    /// (estimate − truth)/truth, %.
    pub error_pct: Option<f64>,
}

/// What a run found.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Summary {
    /// Per method.
    pub methods: Vec<MethodSummary>,
    /// Distance from the strongest reading of each walk to the sonde's point on that walk, m.
    pub peak_errors_m: Vec<f64>,
    /// Largest horizontal range with SNR ≥ 20 dB, m.
    pub detection_range_m: Option<f64>,
    /// Readouts.
    pub readouts: usize,
}

fn median(mut v: Vec<f64>) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(|a, b| a.partial_cmp(b).unwrap_or(std::cmp::Ordering::Equal));
    let n = v.len();
    Some(if n % 2 == 1 { v[n / 2] } else { 0.5 * (v[n / 2 - 1] + v[n / 2]) })
}

fn method(name: &str, rows: &[Row], pick: impl Fn(&Row) -> Option<(f64, f64)>) -> MethodSummary {
    let mut est = Vec::new();
    let mut sig = Vec::new();
    let mut tru = Vec::new();
    for r in rows {
        if let (Some((d, s)), Some(t)) = (pick(r), r.truth) {
            est.push(d);
            sig.push(s);
            tru.push(t.depth_m);
        }
    }
    let e = median(est.clone());
    let t = median(tru);
    MethodSummary {
        method: name.to_string(),
        count: est.len(),
        estimate_m: e,
        sigma_m: median(sig),
        truth_m: t,
        error_pct: e.zip(t).map(|(e, t)| 100.0 * (e - t) / t),
    }
}

/// Segment index of each row, from the motion's segment durations.
fn segment_of(sc: &Scenario, t: f64) -> usize {
    let mut t0 = 0.0;
    for (i, m) in sc.motion.iter().enumerate() {
        t0 += segment_duration(m);
        if t < t0 {
            return i;
        }
    }
    sc.motion.len().saturating_sub(1)
}

/// Summarise a simulated run against its truth.
pub fn summarise(sc: &Scenario, run: &SimRun) -> Summary {
    let settle = run.info.settle_99_s as f64;
    let rows: Vec<Row> = run.rows.iter().filter(|r| r.t_s > settle).cloned().collect();
    let mut methods = vec![
        method("gradient", &rows, |r| r.gradient.depth_m.zip(r.gradient.sigma_m)),
        method("one-station fit", &rows, |r| r.fit.depth_m.zip(r.fit.sigma_m)),
        method("known moment", &rows, |r| r.known_moment.depth_m.zip(r.known_moment.sigma_m)),
    ];
    let mut peak_errors_m = Vec::new();
    for (i, m) in sc.motion.iter().enumerate() {
        if let MotionSpec::Walk { from, to, heading_deg, .. } = m {
            let seg: Vec<&Row> = rows.iter().filter(|r| segment_of(sc, r.t_s) == i).collect();
            let Some(best) = seg.iter().max_by(|a, b| a.strength.partial_cmp(&b.strength).unwrap_or(std::cmp::Ordering::Equal)) else {
                continue;
            };
            let Some(t) = best.truth else { continue };
            // The sonde's point on this walk: projection of its position on the walk line.
            let (dx, dy) = (to[0] - from[0], to[1] - from[1]);
            let l = (dx * dx + dy * dy).sqrt();
            let (ux, uy) = (dx / l, dy / l);
            let sonde = [
                t.x_m + t.ahead_m * t.heading_deg.to_radians().cos() - t.left_m * t.heading_deg.to_radians().sin(),
                t.y_m + t.ahead_m * t.heading_deg.to_radians().sin() + t.left_m * t.heading_deg.to_radians().cos(),
            ];
            let s_sonde = (sonde[0] - from[0]) * ux + (sonde[1] - from[1]) * uy;
            let s_peak = (t.x_m - from[0]) * ux + (t.y_m - from[1]) * uy;
            peak_errors_m.push(s_peak - s_sonde);
            // Null span along a walk in line with the sonde axis: the handle points the way
            // of the walk and the receiver reads in line for most of it.
            let walk_dir = uy.atan2(ux);
            let handle = heading_deg.map(|h| h.to_radians()).unwrap_or(walk_dir);
            let diff = (walk_dir - handle).rem_euclid(std::f64::consts::PI);
            let handle_along_walk = diff.min(std::f64::consts::PI - diff) < 20f64.to_radians();
            let along_axis = handle_along_walk && seg.iter().filter(|r| r.state == "in-line").count() * 2 > seg.len();
            if along_axis {
                if let Some(fix) = null_span(&seg, s_peak, from, ux, uy) {
                    methods.push(fix);
                }
            }
        }
    }
    let detection_range_m = rows
        .iter()
        .filter(|r| r.snr_db >= 20.0)
        .filter_map(|r| r.truth.map(|t| t.range_m))
        .fold(None, |m: Option<f64>, v| Some(m.map_or(v, |m| m.max(v))));
    Summary { methods, peak_errors_m, detection_range_m, readouts: run.rows.len() }
}

fn null_span(seg: &[&Row], s_peak: f64, from: &[f64; 2], ux: f64, uy: f64) -> Option<MethodSummary> {
    let pos = |r: &Row| r.truth.map(|t| (t.x_m - from[0]) * ux + (t.y_m - from[1]) * uy).unwrap_or(0.0);
    let peak = seg.iter().map(|r| r.strength).fold(0.0, f64::max);
    // The first minimum of strength on each side of the peak (the null), below a fifth of the peak.
    let side = |fore: bool| -> Option<f64> {
        let mut cands: Vec<(f64, f64)> =
            seg.iter().map(|r| (pos(r) - s_peak, r.strength)).filter(|(d, _)| if fore { *d > 0.0 } else { *d < 0.0 }).collect();
        cands.sort_by(|a, b| a.0.abs().partial_cmp(&b.0.abs()).unwrap_or(std::cmp::Ordering::Equal));
        // Walking out from the peak: the lowest reading before the strength climbs
        // back above 15 % of the peak (the secondary lobe reaches 20 %), once it
        // has fallen below 10 % — so a noise dip on the slope is not taken for the null.
        let mut best: Option<(f64, f64)> = None;
        let mut fell = false;
        for (d, s) in cands {
            if fell && s > 0.15 * peak {
                break;
            }
            fell |= s < 0.1 * peak;
            if best.map(|b| s < b.1).unwrap_or(true) {
                best = Some((d, s));
            }
        }
        best.filter(|b| fell && b.1 < 0.1 * peak).map(|b| b.0.abs())
    };
    let (fore, aft) = (side(true)?, side(false)?);
    let spacing = seg.windows(2).map(|w| (pos(w[1]) - pos(w[0])).abs()).sum::<f64>() / seg.len().max(2) as f64;
    let fix = null_span_depth(fore as f32, aft as f32, (spacing / 12f64.sqrt()).max(0.005) as f32);
    let truth = seg.iter().filter_map(|r| r.truth.map(|t| t.depth_m)).fold(0.0, f64::max);
    let d = fix.depth;
    Some(MethodSummary {
        method: format!("null span ({fore:.2} m fore, {aft:.2} m aft)"),
        count: 1,
        estimate_m: d.ok().map(|d| d.depth_m as f64),
        sigma_m: d.ok().map(|d| d.sigma_m as f64),
        truth_m: Some(truth),
        error_pct: d.ok().map(|d| 100.0 * (d.depth_m as f64 - truth) / truth),
    })
}

/// Print one JSON object per readout.
pub fn json_lines(out: &mut dyn Write, rows: &[Row]) -> crate::error::Result<()> {
    for r in rows {
        let line = serde_json::to_string(r).map_err(|e| crate::error::SimError::Arg { name: "json".into(), msg: e.to_string() })?;
        writeln!(out, "{line}").map_err(|e| crate::error::SimError::io(std::path::Path::new("<stdout>"), "write", e))?;
    }
    Ok(())
}

/// Print the readout timeline (every `every_s` seconds) as an aligned table.
pub fn timeline(out: &mut dyn Write, rows: &[Row], every_s: f64) -> std::io::Result<()> {
    writeln!(
        out,
        "{:>6} {:>6} {:>6} {:>8} {:>6} {:>7} {:>8} {:>15} {:>14} {:>7}  flags",
        "t s", "x m", "y m", "str dB", "SNR", "bear°", "state", "walk", "depth m ±σ", "true m"
    )?;
    let mut next = f64::NEG_INFINITY;
    for r in rows {
        if r.t_s < next {
            continue;
        }
        next = r.t_s + every_s;
        let (x, y, td) = r.truth.map(|t| (t.x_m, t.y_m, t.depth_m)).unwrap_or((f64::NAN, f64::NAN, f64::NAN));
        let walk = match (r.along, r.across) {
            ("over", "centred") => "OVER".to_string(),
            (a, "unsure") => a.to_string(),
            (a, c) => format!("{a}/{c}"),
        };
        let depth = match (r.depth_m, r.depth_sigma_m) {
            (Some(d), Some(s)) => format!("{d:.2}±{s:.2}"),
            _ => "--".into(),
        };
        writeln!(
            out,
            "{:>6.2} {:>6.2} {:>6.2} {:>8.1} {:>6.1} {:>7.1} {:>8} {:>15} {:>14} {:>7.2}  {}",
            r.t_s,
            x,
            y,
            r.strength_db,
            r.snr_db,
            r.bearing_deg,
            r.state,
            walk,
            depth,
            td,
            r.flags.join(",")
        )?;
    }
    Ok(())
}

/// Print the summary.
pub fn print_summary(out: &mut dyn Write, s: &Summary) -> std::io::Result<()> {
    writeln!(out, "\nSummary ({} readouts)", s.readouts)?;
    writeln!(out, "{:<36} {:>6} {:>10} {:>8} {:>8} {:>8}", "depth method", "valid", "estimate", "sigma", "truth", "error")?;
    for m in &s.methods {
        let f = |v: Option<f64>, p: usize| v.map(|v| format!("{v:.p$}")).unwrap_or_else(|| "--".into());
        writeln!(
            out,
            "{:<36} {:>6} {:>10} {:>8} {:>8} {:>8}",
            m.method,
            m.count,
            f(m.estimate_m, 3),
            f(m.sigma_m, 3),
            f(m.truth_m, 3),
            m.error_pct.map(|e| format!("{e:+.1}%")).unwrap_or_else(|| "--".into())
        )?;
    }
    for (i, e) in s.peak_errors_m.iter().enumerate() {
        writeln!(out, "walk {}: strongest reading {:+.3} m from the point over the sonde", i + 1, e)?;
    }
    match s.detection_range_m {
        Some(r) => writeln!(out, "detection range (SNR >= 20 dB): {r:.2} m horizontally")?,
        None => writeln!(out, "detection range: not detected")?,
    }
    Ok(())
}

/// Print what the receiver showed against the truth.
pub fn print_score(out: &mut dyn Write, s: &crate::score::Score) -> std::io::Result<()> {
    let pct = |a: usize, b: usize| if b == 0 { "--".to_string() } else { format!("{:.1} %", 100.0 * a as f64 / b as f64) };
    writeln!(out, "\nAgainst the truth (handle within {:.0} deg of the sonde axis):", crate::score::SCORED_AXIS_ANGLE_DEG)?;
    writeln!(
        out,
        "  beyond the nulls: {} readouts, direction right {} / wrong {} / withheld {} ({} of those shown right, {} withheld)",
        s.beyond,
        s.beyond_right,
        s.beyond_wrong,
        s.beyond_withheld,
        pct(s.beyond_right, s.beyond_right + s.beyond_wrong),
        pct(s.beyond_withheld, s.beyond)
    )?;
    writeln!(out, "  inside the nulls (off the over point): right {} / wrong {}", s.inside_right, s.inside_wrong)?;
    writeln!(
        out,
        "  'over' shown {} times, {} farther than the over tolerance, worst {:.3} m",
        s.over_shown, s.over_too_far, s.over_worst_m
    )?;
    writeln!(out, "  lateral side shown {} times, {} wrong", s.side_shown, s.side_wrong)?;
    writeln!(
        out,
        "  depths shown {}: within 2 sigma {}, beyond 15 % {}, worst {:.1} %, zero sigma {}",
        s.depth_shown,
        pct(s.depth_within_2sigma, s.depth_shown),
        s.depth_beyond_15pct,
        s.depth_worst_pct,
        s.depth_zero_sigma
    )
}
