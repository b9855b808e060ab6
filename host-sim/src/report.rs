//! Reports: the readout timeline, the summary, the cautions.
//!
//! The summary has two parts. What the readouts alone show (the same for a
//! simulated walk and for the replay of its recording): the strongest
//! readout, the nulls beside it, and each depth method's median estimate and
//! median σ after the detector has settled. And, in a simulation, what the
//! truth adds: each method against the true depth, where the strongest
//! reading of each walk fell from the point over the sonde, the null-span
//! depth of each walk along the sonde's axis (the distance between the nulls,
//! measured on the ground as a person with a tape would), and the detection
//! range from the field model and the scenario's noise ([`crate::range`]).
//!
//! Strength is stated against one reference per context: the horizontal field
//! at the lower coils in dB re 1 nT when the scale is known (a simulation),
//! dB re the converter's full scale when only codes are known (a replay).
//! SNR is the lower triad's (the lower x, y and z coils together).
//!
//! A null is taken where the horizontal field, walking out from the peak,
//! falls below a tenth of the peak and the field there stands near vertical
//! (|Bz/Bh| ≥ 2): the nulls of a dipole's horizontal field beside the peak
//! along its axis (Griffiths eq. 5.89), not the fall-off of walking away across it.

use crate::error::{Result, SimError};
use crate::motion::{Motion, MotionSpec};
use crate::run::{Reference, Row, SimRun};
use crate::scenario::Scenario;
use crate::stats::median;
use crate::units::Units;
use serde::Serialize;
use std::io::Write;
use std::path::Path;
use undertone_dsp::locate::depth::null_span_depth;

/// The caution in one line, for JSON and plot captions.
pub const CAUTION_LINE: &str = "A depth is an estimate with an error: confirm by careful hand digging, and call your local one-call (call-before-you-dig) service and follow local codes and licensed practice before digging near live utilities.";

/// The cautions every text report ends with.
pub const CAUTIONS: &str = "\
CAUTION: a depth from this receiver is an estimate with an error, not a measurement. Confirm the
position and depth by careful hand digging, and call your local one-call (call-before-you-dig)
service and follow local codes and licensed practice before digging near live utilities.";

/// A null is below this fraction of the peak's horizontal field.
pub const NULL_FRACTION: f64 = 0.1;
/// Walking out from the peak, the search for a null stops once the field climbs back above this fraction.
pub const NULL_CLIMB_FRACTION: f64 = 0.15;
/// At a null the field stands near vertical: |Bz/Bh| at least this.
pub const NULL_VERTICAL_RATIO: f64 = 2.0;

/// Summary of one depth method.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MethodSummary {
    /// Method name.
    pub method: String,
    /// Readouts with a valid estimate.
    pub count: usize,
    /// Median estimate below the lower coil, m.
    pub estimate_m: Option<f64>,
    /// Median reported σ, m.
    pub sigma_m: Option<f64>,
    /// Median true depth at those readouts, m (simulation only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub truth_m: Option<f64>,
    /// (estimate − truth)/truth, % (simulation only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error_pct: Option<f64>,
}

/// A readout picked out by the summary (the peak, a null).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Mark {
    /// Time of the readout's data centre, s.
    pub t_s: f64,
    /// Horizontal field at the lower coils, dB re 1 nT (simulation).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub field_db_nt: Option<f64>,
    /// Horizontal level at the lower coils, dB re full scale (replay).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub level_dbfs: Option<f64>,
    /// SNR of the lower triad, dB.
    pub snr_db: f64,
}

impl Mark {
    fn of(r: &Row) -> Self {
        Mark { t_s: r.t_s, field_db_nt: r.field_db_nt, level_dbfs: r.level_dbfs, snr_db: r.snr_db }
    }

    /// The level in its reference's dB.
    pub fn db(&self) -> f64 {
        self.field_db_nt.or(self.level_dbfs).unwrap_or(f64::NAN)
    }
}

/// One walk of a simulation against the truth.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct WalkSummary {
    /// Index of the motion segment (0-based).
    pub segment: usize,
    /// Where along the walk the strongest readout's data was taken, m from its start.
    pub peak_along_m: f64,
    /// Where along the walk the point over the sonde is, m from its start.
    pub sonde_along_m: f64,
    /// `peak_along_m − sonde_along_m`, m.
    pub peak_error_m: f64,
    /// The nulls found before and after the peak, m from the walk's start.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub nulls_along_m: Vec<f64>,
    /// Distances from the peak to the null ahead and the null behind, m (when both were found).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub null_distances_m: Option<[f64; 2]>,
    /// Depth from the span between those nulls (a walk along the sonde's axis only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub null_span: Option<MethodSummary>,
}

/// What a run found.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Summary {
    /// Readouts in the run.
    pub readouts: usize,
    /// Readouts before this time are left out (the detector's 99 % settling), s.
    pub settle_s: f64,
    /// The strongest readout.
    pub peak: Option<Mark>,
    /// The nulls beside the strongest readout, before and after it (see the module docs).
    pub nulls: Vec<Mark>,
    /// Each depth method's medians over the readouts that gave one.
    pub methods: Vec<MethodSummary>,
    /// Each walk of a simulation against the truth.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub walks: Vec<WalkSummary>,
    /// Horizontal distance from the point over the sonde within which the best coil
    /// reads at least 20 dB SNR in every direction, from the field model, m (simulation).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub detection_range_m: Option<f64>,
    /// On this run: the horizontal distance within which every readout read at least 20 dB SNR,
    /// and the farthest the receiver went from the point over the sonde, m (simulation).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub run_range_m: Option<[f64; 2]>,
    /// The caution.
    pub caution: &'static str,
}

fn method(name: &str, rows: &[&Row], pick: impl Fn(&Row) -> Option<(f64, f64)>) -> MethodSummary {
    let (mut est, mut sig, mut tru) = (Vec::new(), Vec::new(), Vec::new());
    for r in rows {
        if let Some((d, s)) = pick(r) {
            est.push(d);
            sig.push(s);
            if let Some(t) = r.truth {
                tru.push(t.depth_m);
            }
        }
    }
    let e = median(&mut est);
    let t = if tru.len() == est.len() { median(&mut tru) } else { None };
    MethodSummary {
        method: name.to_string(),
        count: est.len(),
        estimate_m: e,
        sigma_m: median(&mut sig),
        truth_m: t,
        error_pct: e.zip(t).map(|(e, t)| 100.0 * (e - t) / t),
    }
}

/// Walking out from `rows[peak]` forwards (`fore`) or backwards in time: the
/// index of the lowest readout before the field climbs back above
/// [`NULL_CLIMB_FRACTION`] of the peak, if it is a null (see the module docs).
fn null_beside(rows: &[&Row], peak: usize, fore: bool) -> Option<usize> {
    let p = rows.get(peak)?.strength;
    let order: Box<dyn Iterator<Item = usize>> = if fore { Box::new(peak + 1..rows.len()) } else { Box::new((0..peak).rev()) };
    let mut best: Option<usize> = None;
    let mut fell = false;
    for i in order {
        let s = rows[i].strength;
        if fell && s > NULL_CLIMB_FRACTION * p {
            break;
        }
        fell |= s < NULL_FRACTION * p;
        if best.map(|b| s < rows[b].strength).unwrap_or(true) {
            best = Some(i);
        }
    }
    best.filter(|&b| fell && rows[b].strength < NULL_FRACTION * p && rows[b].vertical_ratio.abs() >= NULL_VERTICAL_RATIO)
}

fn strongest(rows: &[&Row]) -> Option<usize> {
    (0..rows.len()).max_by(|&a, &b| rows[a].strength.total_cmp(&rows[b].strength))
}

/// What the readouts alone show (no truth, no motion): the same for a walk and its replay.
pub fn summarise_rows(run: &SimRun) -> Summary {
    let settle_s = run.info.settle_99_s as f64;
    let rows: Vec<&Row> = run.rows.iter().filter(|r| r.t_s > settle_s).collect();
    let peak = strongest(&rows);
    let nulls = peak
        .map(|p| [null_beside(&rows, p, false), null_beside(&rows, p, true)].into_iter().flatten().map(|i| Mark::of(rows[i])).collect())
        .unwrap_or_default();
    let methods = vec![
        method("shown on the screen", &rows, |r| r.depth_m.zip(r.depth_sigma_m)),
        method("gradient", &rows, |r| r.gradient.depth_m.zip(r.gradient.sigma_m)),
        method("one-station fit", &rows, |r| r.fit.depth_m.zip(r.fit.sigma_m)),
        method("known moment", &rows, |r| r.known_moment.depth_m.zip(r.known_moment.sigma_m)),
        method("trail fit", &rows, |r| r.trail.map(|t| (t.depth_m, t.depth_sigma_m))),
    ];
    Summary {
        readouts: run.rows.len(),
        settle_s,
        peak: peak.map(|p| Mark::of(rows[p])),
        nulls,
        methods,
        walks: Vec::new(),
        detection_range_m: None,
        run_range_m: None,
        caution: CAUTION_LINE,
    }
}

/// Summarise a simulated run: what the readouts show, and against the truth.
pub fn summarise(sc: &Scenario, run: &SimRun) -> Result<Summary> {
    let mut s = summarise_rows(run);
    let motion = Motion::new(&sc.motion, sc.seed);
    let rows: Vec<&Row> = run.rows.iter().filter(|r| r.t_s > s.settle_s).collect();
    for (i, segment) in motion.segments().iter().enumerate() {
        let MotionSpec::Walk { from, to, heading_deg, .. } = &segment.spec else { continue };
        let seg: Vec<&Row> = rows.iter().copied().filter(|r| motion.segment_at(r.t_s) == i).collect();
        // A null counts only where the readout's data lie within this walk: they reach about
        // half the detector's settling time either side of the readout's centre, and a readout
        // straddling the turn into the next part mixes the two (an instant about-turn of the
        // handle dips the horizontal reading through zero).
        let margin = 0.5 * s.settle_s;
        let inside = |k: &usize| {
            let t = seg[*k].t_s;
            t >= segment.start_s + margin && t <= segment.start_s + segment.duration_s - margin
        };
        let Some(best) = strongest(&seg) else { continue };
        let Some(t) = seg[best].truth else { continue };
        let (dx, dy) = (to[0] - from[0], to[1] - from[1]);
        let l = (dx * dx + dy * dy).sqrt();
        let (ux, uy) = (dx / l, dy / l);
        let along = |x: f64, y: f64| (x - from[0]) * ux + (y - from[1]) * uy;
        let sonde_along_m = along(t.sonde_m[0], t.sonde_m[1]);
        let peak_along_m = along(t.x_m, t.y_m);
        // Nulls along a walk in line with the sonde's axis: the handle points the way of the
        // walk and the receiver reads in line for most of it.
        let walk_dir = uy.atan2(ux);
        let handle = heading_deg.map(|h| h.to_radians()).unwrap_or(walk_dir);
        let diff = (walk_dir - handle).rem_euclid(std::f64::consts::PI);
        let handle_along_walk = diff.min(std::f64::consts::PI - diff) < 20f64.to_radians();
        let along_axis = handle_along_walk && seg.iter().filter(|r| r.state == "in-line").count() * 2 > seg.len();
        let pos = |k: usize| seg[k].truth.map(|t| along(t.x_m, t.y_m));
        let (before, after) =
            (null_beside(&seg, best, false).filter(inside).and_then(pos), null_beside(&seg, best, true).filter(inside).and_then(pos));
        let nulls: Vec<f64> = before.into_iter().chain(after).collect();
        let null_span = before.zip(after).filter(|_| along_axis).map(|(a, b)| {
            let (aft, fore) = ((peak_along_m - a).abs(), (b - peak_along_m).abs());
            // The readouts' spacing along the walk sets how well a null is placed (uniform: spacing/√12).
            let spacing = (1..seg.len()).filter_map(|k| Some((pos(k)? - pos(k - 1)?).abs())).sum::<f64>() / seg.len().max(2) as f64;
            let fix = null_span_depth(fore as f32, aft as f32, (spacing / 12f64.sqrt()).max(0.005) as f32);
            let truth = seg.iter().filter_map(|r| r.truth.map(|t| t.depth_m)).fold(0.0, f64::max);
            let d = fix.depth.ok();
            MethodSummary {
                method: format!("null span, part {}", i + 1),
                count: 1,
                estimate_m: d.map(|d| d.depth_m as f64),
                sigma_m: d.map(|d| d.sigma_m as f64),
                truth_m: Some(truth),
                error_pct: d.map(|d| 100.0 * (d.depth_m as f64 - truth) / truth),
            }
        });
        s.walks.push(WalkSummary {
            segment: i,
            peak_along_m,
            sonde_along_m,
            peak_error_m: peak_along_m - sonde_along_m,
            nulls_along_m: nulls,
            null_distances_m: before.zip(after).map(|(a, b)| [(b - peak_along_m).abs(), (peak_along_m - a).abs()]),
            null_span,
        });
    }
    s.detection_range_m = Some(crate::range::detection_range_m(sc)?);
    let ranges = rows.iter().filter_map(|r| r.truth.map(|t| (t.range_m, r.snr_db)));
    let farthest = ranges.clone().map(|r| r.0).fold(None, |m: Option<f64>, v| Some(m.map_or(v, |m| m.max(v))));
    let weak =
        ranges.filter(|r| r.1 < crate::range::RANGE_SNR_DB).map(|r| r.0).fold(None, |m: Option<f64>, v| Some(m.map_or(v, |m| m.min(v))));
    s.run_range_m = farthest.map(|f| [weak.unwrap_or(f), f]);
    Ok(s)
}

fn stdout_err(e: std::io::Error) -> SimError {
    SimError::io(Path::new("<stdout>"), "write", e)
}

fn to_json<T: Serialize>(v: &T) -> Result<String> {
    serde_json::to_string(v).map_err(|e| SimError::Arg { name: "json".into(), msg: e.to_string() })
}

/// Print one JSON object per readout, then one object `{"summary": …}` (with the caution).
pub fn json_lines(out: &mut dyn Write, rows: &[Row], summary: &Summary) -> Result<()> {
    for r in rows {
        writeln!(out, "{}", to_json(r)?).map_err(stdout_err)?;
    }
    #[derive(Serialize)]
    struct Last<'a> {
        summary: &'a Summary,
    }
    writeln!(out, "{}", to_json(&Last { summary })?).map_err(stdout_err)
}

/// The lines that say what the strength and SNR columns are.
pub fn legend(out: &mut dyn Write, reference: Reference) -> std::io::Result<()> {
    let what = match reference {
        Reference::Tesla => "field: horizontal field at the lower coils, dB re 1 nT",
        Reference::FullScale => "level: horizontal tone amplitude at the lower coils, dB re the converter's full scale",
    };
    writeln!(out, "{what}; SNR: the lower triad (x, y and z coils together) over its noise, dB;")?;
    writeln!(out, "bearing: the horizontal field's direction from the handle; walk: which way the receiver says the sonde is")
}

/// Print the readout timeline (every `every_s` seconds) as an aligned table. Position and
/// true-depth columns appear only when the rows carry the truth.
pub fn timeline(out: &mut dyn Write, rows: &[Row], every_s: f64, units: Units) -> std::io::Result<()> {
    let truth = rows.iter().any(|r| r.truth.is_some());
    let reference = rows.first().map(Reference::of).unwrap_or(Reference::FullScale);
    let (level, level_unit) = match reference {
        Reference::Tesla => ("field", "dB/nT"),
        Reference::FullScale => ("level", "dBFS"),
    };
    let u = units.unit();
    let head = |out: &mut dyn Write, cols: [&str; 11]| -> std::io::Result<()> {
        write!(out, "{:>6} ", cols[0])?;
        if truth {
            write!(out, "{:>7} {:>7} ", cols[1], cols[2])?;
        }
        write!(out, "{:>7} {:>5} {:>7} {:>8} {:>15} {:>17}", cols[3], cols[4], cols[5], cols[6], cols[7], cols[8])?;
        if truth {
            write!(out, " {:>8}", cols[9])?;
        }
        writeln!(out, "  {}", cols[10])
    };
    head(out, ["time", "east", "north", level, "SNR", "bearing", "state", "walk", "depth ± σ", "true", "flags"])?;
    head(out, ["s", u, u, level_unit, "dB", "deg", "", "", "", "depth", ""])?;
    let mut next = f64::NEG_INFINITY;
    for r in rows {
        if r.t_s < next {
            continue;
        }
        next = r.t_s + every_s;
        let walk = match (r.along, r.across) {
            ("over", "centred") => "OVER".to_string(),
            (a, "unsure") => a.to_string(),
            (a, c) => format!("{a}/{c}"),
        };
        let depth = match (r.depth_m, r.depth_sigma_m) {
            (Some(d), Some(s)) => units.depth_sigma(d, s),
            _ => "--".into(),
        };
        write!(out, "{:>6.2} ", r.t_s)?;
        if let Some(t) = r.truth {
            write!(out, "{:>7.2} {:>7.2} ", units.value(t.x_m), units.value(t.y_m))?;
        } else if truth {
            write!(out, "{:>7} {:>7} ", "--", "--")?;
        }
        write!(
            out,
            "{:>7.1} {:>5.1} {:>7.1} {:>8} {:>15} {:>17}",
            reference.db(r.strength_db),
            r.snr_db,
            r.bearing_deg,
            r.state,
            walk,
            depth
        )?;
        if truth {
            write!(out, " {:>8}", r.truth.map(|t| units.depth(t.depth_m)).unwrap_or_else(|| "--".into()))?;
        }
        writeln!(out, "  {}", r.flags.join(","))?;
    }
    Ok(())
}

/// Print the summary.
pub fn print_summary(out: &mut dyn Write, s: &Summary, units: Units) -> std::io::Result<()> {
    writeln!(out, "\nSummary ({} readouts; the first {:.2} s, while the detector settles, left out)", s.readouts, s.settle_s)?;
    let level = |m: &Mark| match (m.field_db_nt, m.level_dbfs) {
        (Some(f), _) => format!("{f:.1} dB re 1 nT"),
        (None, Some(l)) => format!("{l:.1} dB re full scale"),
        _ => "--".into(),
    };
    match &s.peak {
        Some(p) => writeln!(out, "strongest readout: t = {:.2} s, {} (SNR {:.1} dB)", p.t_s, level(p), p.snr_db)?,
        None => writeln!(out, "strongest readout: none after settling")?,
    }
    let nulls: Vec<String> = s.nulls.iter().map(|n| format!("t = {:.2} s ({})", n.t_s, level(n))).collect();
    match nulls.len() {
        0 => writeln!(out, "nulls beside it: none found (walk along the sonde's axis, through the peak, to find them)")?,
        _ => writeln!(out, "nulls beside it: {}", nulls.join(", "))?,
    }
    let truth = s.methods.iter().any(|m| m.truth_m.is_some()) || s.walks.iter().any(|w| w.null_span.is_some());
    let w = 13;
    write!(out, "{:<50} {:>6} {:>w$} {:>w$}", "depth method (median over its readouts)", "valid", "estimate", "sigma")?;
    if truth {
        write!(out, " {:>w$} {:>8}", "truth", "error")?;
    }
    writeln!(out)?;
    let spans: Vec<MethodSummary> = s
        .walks
        .iter()
        .filter_map(|w| {
            let mut m = w.null_span.clone()?;
            if let Some([f, a]) = w.null_distances_m {
                m.method = format!("{} ({} fore, {} aft)", m.method, units.dist(f), units.dist(a));
            }
            Some(m)
        })
        .collect();
    for m in s.methods.iter().chain(spans.iter()) {
        let d = |v: Option<f64>| v.map(|v| units.depth(v)).unwrap_or_else(|| "--".into());
        let sig = m.sigma_m.map(|v| units.sigma(v)).unwrap_or_else(|| "--".into());
        write!(out, "{:<50} {:>6} {:>w$} {:>w$}", m.method, m.count, d(m.estimate_m), sig)?;
        if truth {
            write!(out, " {:>w$} {:>8}", d(m.truth_m), m.error_pct.map(|e| format!("{e:+.1} %")).unwrap_or_else(|| "--".into()))?;
        }
        writeln!(out)?;
    }
    for (k, w) in s.walks.iter().enumerate() {
        let e = w.peak_error_m;
        let side = if e.abs() < 0.005 {
            "on the point over the sonde".to_string()
        } else {
            format!("{} {} it", units.dist(e.abs()), if e > 0.0 { "past" } else { "before" })
        };
        writeln!(out, "walk {} (part {} of the run): strongest reading {side}", k + 1, w.segment + 1)?;
    }
    if let Some(r) = s.detection_range_m {
        writeln!(
            out,
            "detection range: {} from the point over the sonde (the best coil reads at least {} dB SNR all round, by the field model and the scenario's sensor noise; mains and other tones left out)",
            units.dist(r),
            crate::range::RANGE_SNR_DB
        )?;
    }
    if let Some([within, farthest]) = s.run_range_m {
        if within < farthest {
            writeln!(
                out,
                "on this run every readout within {} of it read at least {} dB SNR (the receiver went out to {}; mains and interference count here)",
                units.dist(within),
                crate::range::RANGE_SNR_DB,
                units.dist(farthest)
            )?;
        } else {
            writeln!(
                out,
                "on this run every readout read at least {} dB SNR, out to {} from it (as far as the receiver went)",
                crate::range::RANGE_SNR_DB,
                units.dist(farthest)
            )?;
        }
    }
    Ok(())
}

/// The mains line of a report: the nearest harmonic of the scenario's grid (both grids when it is unknown).
pub fn mains_line(mains: &undertone_dsp::detect::mains::MainsReport, grid_hz: Option<f64>) -> String {
    let grids: Vec<f32> = match grid_hz {
        Some(g) => vec![g as f32],
        None => vec![50.0, 60.0],
    };
    let parts: Vec<String> = grids
        .iter()
        .map(|&g| {
            let h = mains.nearest(g);
            format!(
                "{g:.0} Hz grid: nearest harmonic {:.0} Hz ({:+.1} Hz from the beacon), rejected {:.1} dB",
                h.freq_hz, h.offset_hz, h.rejection_db
            )
        })
        .collect();
    format!("mains: {}", parts.join("; "))
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
    let worst = if s.over_shown > 0 { format!(", worst {:.3} m", s.over_worst_m) } else { String::new() };
    writeln!(out, "  'over' shown {} times, {} farther than the over tolerance{worst}", s.over_shown, s.over_too_far)?;
    writeln!(out, "  lateral side shown {} times, {} wrong", s.side_shown, s.side_wrong)?;
    let worst = if s.depth_shown > 0 { format!(", worst {:.1} %", s.depth_worst_pct) } else { String::new() };
    writeln!(
        out,
        "  depths shown {}: within 2 sigma {}, beyond 15 % {}{worst}, zero sigma {}",
        s.depth_shown,
        pct(s.depth_within_2sigma, s.depth_shown),
        s.depth_beyond_15pct,
        s.depth_zero_sigma
    )
}
