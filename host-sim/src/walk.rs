//! `demo` and `walk`: run a scenario, print the timeline, the summary and the
//! cautions, and plot strength and depth along each part of the run (against
//! the distance walked, or the time where the receiver stands still) and a
//! map of where the receiver put the sonde against where it is.

use crate::error::{Result, SimError};
use crate::motion::Motion;
use crate::output::folder;
use crate::plots::{figure, Figure, Panel, Series, VLine};
use crate::report::{legend, mains_line, print_summary, summarise, timeline, Summary, CAUTIONS, CAUTION_LINE};
use crate::run::{simulate_shown, Reference, Row, SimRun};
use crate::scenario::Scenario;
use crate::units::Units;
use plotters::style::RGBColor;
use std::io::Write;
use std::path::{Path, PathBuf};

/// How a walk or replay is run and shown.
#[derive(Clone, Copy, Debug)]
pub struct ShowOptions {
    /// Print one JSON object per readout and a summary object instead of the report.
    pub json: bool,
    /// Noise seed (default: the scenario's).
    pub seed: Option<u64>,
    /// Lengths in metres or feet and inches.
    pub units: Units,
}

fn stdout_err(e: std::io::Error) -> SimError {
    SimError::io(Path::new("<stdout>"), "write", e)
}

/// Run, print and plot; returns the plot files.
pub fn walk(sc: &Scenario, out_dir: &Path, opt: ShowOptions, out: &mut dyn Write) -> Result<Vec<PathBuf>> {
    if !opt.json {
        folder(out_dir)?;
    }
    let run = simulate_shown(sc, opt.seed, None, true)?;
    let summary = summarise(sc, &run)?;
    if opt.json {
        crate::report::json_lines(out, &run.rows, &summary)?;
        return Ok(Vec::new());
    }
    let io = stdout_err;
    let info = run.info;
    writeln!(out, "Undertone simulation: {}", sc.name).map_err(io)?;
    writeln!(
        out,
        "{} head ({} coils), beacon {:.1} Hz, fs {:.0} Hz, bandwidth {:.2} Hz, 99 % settling {:.2} s, {:.1} readouts/s, {:.1} s of signal",
        sc.receiver.head.name(),
        sc.coils(),
        info.tone_hz,
        info.sample_rate_hz,
        info.bandwidth_hz,
        info.settle_99_s,
        1.0 / info.readout_interval_s,
        run.samples as f64 / info.sample_rate_hz as f64
    )
    .map_err(io)?;
    writeln!(out, "{}", mains_line(&run.mains, sc.mains.as_ref().map(|m| m.grid_hz))).map_err(io)?;
    writeln!(out).map_err(io)?;
    legend(out, Reference::Tesla).map_err(io)?;
    timeline(out, &run.rows, 0.5, opt.units).map_err(io)?;
    print_summary(out, &summary, opt.units).map_err(io)?;
    let axis = crate::physics::axis(sc.sonde.yaw_deg.to_radians(), sc.sonde.pitch_deg.to_radians());
    crate::report::print_score(out, &crate::score::score(&run.rows, axis)).map_err(io)?;
    let mut paths = plots(out_dir, &sc.name, &run, &summary, &sections(sc, &run, &summary, opt.units), opt.units)?;
    paths.extend(walk_map(sc, out_dir, &run, &summary)?);
    writeln!(out, "\nplots:").map_err(io)?;
    for p in &paths {
        writeln!(out, "  {}", p.display()).map_err(io)?;
    }
    writeln!(out, "\n{CAUTIONS}").map_err(io)?;
    Ok(paths)
}

/// One part of a run drawn as its own panel.
pub struct Section {
    /// Panel title.
    pub title: String,
    /// X label with unit.
    pub x_label: String,
    /// The panel's x of each row (None: not in this part).
    pub x: Vec<Option<f64>>,
    /// Marks: the point over the sonde, the strongest reading, the nulls.
    pub vlines: Vec<VLine>,
    /// The null-span depth of this part, at its x: (x, depth, σ), m.
    pub null_span: Option<(f64, f64, f64)>,
}

const TRUTH: RGBColor = RGBColor(0, 0, 0);
const OVER: RGBColor = RGBColor(0, 140, 60);
const PEAK: RGBColor = RGBColor(230, 120, 0);
const NULL: RGBColor = RGBColor(120, 120, 120);

/// One section per motion segment: distance along a path, or time standing still.
fn sections(sc: &Scenario, run: &SimRun, s: &Summary, units: Units) -> Vec<Section> {
    let motion = Motion::new(&sc.motion, sc.seed);
    let len = |m: f64| crate::units::num(units.value(m));
    motion
        .segments()
        .iter()
        .enumerate()
        .map(|(i, seg)| {
            let x = run
                .rows
                .iter()
                .map(|r| {
                    (r.t_s > s.settle_s && motion.segment_at(r.t_s) == i).then(|| {
                        if seg.moves() {
                            units.value(seg.progress(r.t_s))
                        } else {
                            r.t_s - seg.start_s
                        }
                    })
                })
                .collect();
            let mut vlines = Vec::new();
            let mut null_span = None;
            if let Some(w) = s.walks.iter().find(|w| w.segment == i) {
                vlines.push(VLine {
                    name: "point over the sonde (truth)".into(),
                    x: units.value(w.sonde_along_m),
                    color: OVER,
                    dashed: false,
                });
                vlines.push(VLine { name: "strongest reading".into(), x: units.value(w.peak_along_m), color: PEAK, dashed: true });
                for n in &w.nulls_along_m {
                    vlines.push(VLine { name: "nulls found".into(), x: units.value(*n), color: NULL, dashed: true });
                }
                null_span =
                    w.null_span.as_ref().and_then(|m| m.estimate_m.zip(m.sigma_m)).map(|(d, sd)| (units.value(w.peak_along_m), d, sd));
            }
            let (title, x_label) = if seg.moves() {
                (
                    format!("part {}: {} ({:.1} s)", i + 1, seg.describe(&|m| len(m)), seg.duration_s),
                    format!("distance along this part ({})", units.unit()),
                )
            } else {
                (format!("part {}: {} ({})", i + 1, seg.describe(&|m| len(m)), units.unit()), "time standing (s)".to_string())
            };
            Section { title, x_label, x, vlines, null_span }
        })
        .collect()
}

/// A depth method's estimate and σ from a row.
type Pick = dyn Fn(&Row) -> Option<(f64, f64)>;

/// Strength and depth figures of a run, one panel per section.
pub fn plots(out_dir: &Path, name: &str, run: &SimRun, s: &Summary, sections: &[Section], units: Units) -> Result<Vec<PathBuf>> {
    let reference = run.rows.first().map(Reference::of).unwrap_or(Reference::FullScale);
    let (level_name, level_axis) = match reference {
        Reference::Tesla => ("horizontal field at the lower coils", "field (dB re 1 nT)"),
        Reference::FullScale => ("horizontal level at the lower coils", "level (dB re full scale)"),
    };
    let pick = |sec: &Section, f: &dyn Fn(&Row) -> Option<f64>| -> Vec<(f64, f64)> {
        run.rows.iter().zip(&sec.x).filter_map(|(r, x)| Some((x.as_ref().copied()?, f(r)?))).collect()
    };
    let pick_sd = |sec: &Section, f: &dyn Fn(&Row) -> Option<(f64, f64)>| -> Vec<(f64, f64, f64)> {
        run.rows
            .iter()
            .zip(&sec.x)
            .filter_map(|(r, x)| {
                let (d, sd) = f(r)?;
                Some((x.as_ref().copied()?, units.value(d), units.value(sd)))
            })
            .collect()
    };
    let shown: Vec<&Section> = sections.iter().filter(|sec| sec.x.iter().any(Option::is_some)).take(8).collect();
    // One scale for every panel, so the parts compare at a glance and a steady reading looks steady.
    let spread = |f: &dyn Fn(&Row) -> f64| {
        let (lo, hi) = run
            .rows
            .iter()
            .filter(|r| r.t_s > s.settle_s)
            .map(f)
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |a, v| (a.0.min(v), a.1.max(v)));
        lo.is_finite().then_some((lo - 0.05 * (hi - lo) - 0.5, hi + 0.05 * (hi - lo) + 0.5))
    };
    let (level_range, snr_range) = (spread(&|r| reference.db(r.strength_db)), spread(&|r| r.snr_db));
    let strength = Figure {
        title: format!("{name}: strength"),
        panels: shown
            .iter()
            .map(|sec| {
                let mut snr =
                    Series::line("SNR of the lower triad (right axis, dB)", pick(sec, &|r| Some(r.snr_db)), RGBColor(255, 127, 14));
                snr.secondary = true;
                let field = Series::line(
                    format!("{level_name} (left axis)"),
                    pick(sec, &|r| Some(reference.db(r.strength_db))),
                    RGBColor(31, 119, 180),
                );
                Panel {
                    y2_label: Some("SNR (dB)".into()),
                    y_range: level_range,
                    y2_range: snr_range,
                    vlines: sec.vlines.clone(),
                    ..Panel::new(sec.title.clone(), sec.x_label.clone(), level_axis, vec![field, snr])
                }
            })
            .collect(),
        caption: Some(CAUTION_LINE.into()),
    };
    let mut files = figure(&out_dir.join("strength"), &strength)?;
    // The depth axis: up to twice the deepest truth, or twice the median estimate without truth.
    let truth_max = run.rows.iter().filter_map(|r| r.truth.map(|t| t.depth_m)).fold(0.0, f64::max);
    let top = if truth_max > 0.0 { 2.0 * truth_max } else { s.methods.iter().filter_map(|m| m.estimate_m).fold(0.0, f64::max) * 2.0 };
    let y_range = (top > 0.0).then_some((0.0, units.value(top + 0.1)));
    let colours = [RGBColor(214, 39, 40), RGBColor(44, 160, 44), RGBColor(148, 103, 189), RGBColor(23, 190, 207)];
    let depth = Figure {
        title: format!("{name}: depth below the lower coil, each method ± σ"),
        panels: shown
            .iter()
            .map(|sec| {
                let mut series = Vec::new();
                let truth = pick(sec, &|r| r.truth.map(|t| units.value(t.depth_m)));
                if !truth.is_empty() {
                    series.push(Series::line("true depth", truth, TRUTH));
                }
                let methods: [(&str, &Pick); 4] = [
                    ("gradient", &|r| r.gradient.depth_m.zip(r.gradient.sigma_m)),
                    ("one-station fit", &|r| r.fit.depth_m.zip(r.fit.sigma_m)),
                    ("known moment", &|r| r.known_moment.depth_m.zip(r.known_moment.sigma_m)),
                    ("trail fit", &|r| r.trail.map(|t| (t.depth_m, t.depth_sigma_m))),
                ];
                for ((m, f), c) in methods.iter().zip(colours) {
                    let pts = pick_sd(sec, *f);
                    if !pts.is_empty() {
                        series.push(Series::bars(*m, pts, c));
                    }
                }
                if let Some((x, d, sd)) = sec.null_span {
                    series.push(Series::bars(
                        "null span (from the nulls' spacing)",
                        vec![(x, units.value(d), units.value(sd))],
                        RGBColor(0, 0, 0),
                    ));
                }
                Panel {
                    y_range,
                    vlines: sec.vlines.clone(),
                    ..Panel::new(sec.title.clone(), sec.x_label.clone(), format!("depth ({})", units.unit()), series)
                }
            })
            .collect(),
        caption: Some(CAUTION_LINE.into()),
    };
    files.extend(figure(&out_dir.join("depth"), &depth)?);
    Ok(files)
}

/// Ground position of a point `ahead` and `left` of the handle at the truth's pose.
fn ground(t: &crate::run::TruthRow, ahead: f64, left: f64) -> (f64, f64) {
    let (s, c) = t.heading_deg.to_radians().sin_cos();
    (t.x_m + c * ahead - s * left, t.y_m + s * ahead + c * left)
}

/// The field map with the receiver's path, where the receiver put the sonde
/// (the strongest reading and the nulls of each walk, its last estimate of the
/// point over the sonde) and where the sonde is.
fn walk_map(sc: &Scenario, out_dir: &Path, run: &SimRun, s: &Summary) -> Result<Vec<PathBuf>> {
    let motion = Motion::new(&sc.motion, sc.seed);
    let dur = motion.duration_s();
    let path: Vec<(f64, f64)> = (0..=400).map(|k| motion.pose(dur * k as f64 / 400.0)).map(|p| (p.x_m, p.y_m)).collect();
    let tracks = vec![("receiver path".to_string(), path, RGBColor(255, 255, 255))];
    let at = |segment: usize, along: f64| -> Option<(f64, f64)> {
        match &motion.segments().get(segment)?.spec {
            crate::motion::MotionSpec::Walk { from, to, .. } => {
                let (dx, dy) = (to[0] - from[0], to[1] - from[1]);
                let l = (dx * dx + dy * dy).sqrt();
                Some((from[0] + along * dx / l, from[1] + along * dy / l))
            }
            _ => None,
        }
    };
    let mut marks: Vec<crate::plots::Marks> = vec![
        ("strongest reading of each walk".to_string(), s.walks.iter().filter_map(|w| at(w.segment, w.peak_along_m)).collect(), PEAK),
        (
            "nulls found".to_string(),
            s.walks.iter().flat_map(|w| w.nulls_along_m.iter().filter_map(|n| at(w.segment, *n))).collect(),
            RGBColor(200, 200, 200),
        ),
    ];
    let last_guess = run.rows.iter().rev().find_map(|r| Some(ground(&r.truth?, r.ahead_m?, r.left_m?)));
    marks.push(("receiver's last estimate of the point over the sonde".into(), last_guess.into_iter().collect(), RGBColor(255, 0, 255)));
    let last_fit = run.rows.iter().rev().find_map(|r| {
        let f = r.fit_offset_m?;
        Some(ground(&r.truth?, f[0], f[1]))
    });
    if last_fit.is_some() {
        marks.push(("one-station fit (last)".into(), last_fit.into_iter().collect(), RGBColor(0, 200, 255)));
    }
    marks.retain(|m| !m.1.is_empty());
    crate::map::field_map_marked(sc, out_dir, "map", "where the receiver put the sonde", false, &tracks, &marks, dur)
}
