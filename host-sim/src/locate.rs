//! `locate`: the receiver in closed loop with a simulated operator who does only
//! what the receiver tells them, from random starts around a scenario's sonde.
//!
//! # The operator's procedure (what the receiver asks of its user)
//! Each readout (20 per second) the operator reads the receiver's hint and:
//! * **a move of a set distance** (any hint that shows a distance to move:
//!   walk ahead/back near the sonde, step left/right, a leg of a sweep): moves
//!   that distance along the handle or sideways at 0.2 m/s keeping the heading,
//!   stops, and stands 0.8 s reading the screen before doing anything else;
//! * **wait**: stands still (the detector is settling, or there is no tone);
//! * **turn in line**: turns on the spot toward the field (the way the bearing
//!   points, 30°/s) while the receiver asks for it;
//! * **walk along** (the receiver cannot yet tell which side the sonde is):
//!   walks forward along the handle at 0.3 m/s keeping the heading, and turns
//!   back (walking backwards) after 3 m without an answer;
//! * **walk the other way** (the field is getting weaker): reverses the way
//!   it walks (once it has gone 0.5 m since the last reversal);
//! * **walk ahead / walk back** without a distance: walks that way along the
//!   handle at 0.3 m/s, keeping the heading;
//! * **hold still**: stands still and, once a depth has been shown for a second,
//!   marks the spot and reads the depth. That ends the start.
//!
//! A sonde that the scenario pushes along its pipe is held where it starts:
//! the push is paused while the crew locates the head (common practice).
//!
//! A start counts as *located* when the marked spot is within
//! `max(0.15 m, 0.1·depth)` of the point over the sonde and the depth read is
//! within 2σ and 5 % of the truth. A start that has not ended after
//! [`MAX_TIME_S`] counts as not located.
//!
//! Every readout on the way is scored against the truth where the head stands:
//! "over" shown farther than that tolerance from the point, and a way (ahead or
//! behind) or a side (left or right) shown while the sonde lies more than the
//! tolerance the other way.
//!
//! Starts are drawn uniformly over the ground within the detection range
//! ([`crate::range::detection_range_m`]) with a uniform random heading, and
//! kept when the best coil's SNR there is at least 20 dB; every start has its
//! own noise seed. Starts run in parallel; the results do not depend on the
//! number of threads.

use crate::error::{Result, SimError};
use crate::motion::Pose;
use crate::range::{best_coil_snr_db, detection_range_m};
use crate::run::receiver_settings;
use crate::scenario::{MotionSpec, Scenario};
use crate::synth::Synth;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;
use undertone_dsp::locate::calibration::Calibration;
use undertone_dsp::locate::guidance::{over_tolerance_m, Across, Along, Guidance, Hint};
use undertone_dsp::{Head, Readout, Receiver};

/// Longest a start may take, s.
pub const MAX_TIME_S: f64 = 300.0;
/// Walking speed, m/s.
pub const WALK_M_S: f64 = 0.3;
/// Speed of a move of a set distance (a step, a sweep), m/s.
pub const STEP_M_S: f64 = 0.2;
/// The operator stands this long after each move before acting on the screen again, s.
pub const PAUSE_S: f64 = 0.8;
/// The operator counts the receiver as in line within this bearing, degrees.
pub const ALIGNED_DEG: f64 = 5.0;
/// Turning rate, rad/s (30°/s).
pub const TURN_RAD_S: f64 = std::f64::consts::FRAC_PI_6;
/// Time a depth must have been shown before the operator reads it, s.
pub const READ_AFTER_S: f64 = 1.0;
/// Least SNR of the best coil at a start, dB.
pub const START_SNR_DB: f64 = 20.0;

/// What one start came to.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct StartResult {
    /// Start number.
    pub start: usize,
    /// Start position (east, north), m, and heading, degrees.
    pub from: [f64; 3],
    /// Located (within the tolerance, depth within 2σ and 5 %).
    pub located: bool,
    /// Time until the operator marked the spot (or gave up), s.
    pub time_s: f64,
    /// Where the operator stopped, m.
    pub stop: [f64; 2],
    /// Distance from the stop to the point over the sonde, m.
    pub miss_m: f64,
    /// The over tolerance for this sonde, m.
    pub tolerance_m: f64,
    /// Depth read (below the lower coil), m.
    pub depth_m: Option<f64>,
    /// Its σ, m.
    pub depth_sigma_m: Option<f64>,
    /// True depth below the lower coil at the stop, m.
    pub true_depth_m: f64,
    /// Depth error, %.
    pub depth_error_pct: Option<f64>,
    /// Why the start failed (None when located).
    pub failure: Option<String>,
    /// What was shown on the way, against the truth.
    #[serde(flatten)]
    pub shown: Shown,
    /// The operator's path, one point per 0.5 s (east, north), m.
    #[serde(skip)]
    pub path: Vec<(f64, f64)>,
}

/// `v` to a millimetre (or a millisecond): what JSON readers need, without float noise.
fn mm(v: f64) -> f64 {
    (v * 1000.0).round() / 1000.0
}

impl StartResult {
    /// The same, its numbers rounded to 1e-3 for printing.
    pub fn rounded(&self) -> Self {
        let o = |v: Option<f64>| v.map(mm);
        Self {
            from: self.from.map(mm),
            time_s: mm(self.time_s),
            stop: self.stop.map(mm),
            miss_m: mm(self.miss_m),
            tolerance_m: mm(self.tolerance_m),
            depth_m: o(self.depth_m),
            depth_sigma_m: o(self.depth_sigma_m),
            true_depth_m: mm(self.true_depth_m),
            depth_error_pct: o(self.depth_error_pct),
            ..self.clone()
        }
    }
}

/// The summary of a run.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct LocateSummary {
    /// Starts run.
    pub starts: usize,
    /// Starts located.
    pub located: usize,
    /// Median time of the located starts, s.
    pub median_time_s: Option<f64>,
    /// The detection range starts were drawn within, m.
    pub detection_range_m: f64,
    /// What was shown on the way, every start.
    #[serde(flatten)]
    pub shown: Shown,
    /// The calibration made before the job, if the scenario asks for one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub calibration: Option<crate::calibrate::Found>,
    /// The usual caution.
    pub caution: &'static str,
}

/// Run `starts` starts of `sc` from `seed`.
pub fn run(sc: &Scenario, starts: usize, seed: u64, on_done: &(dyn Fn() + Sync)) -> Result<Vec<StartResult>> {
    let range = detection_range_m(sc)?;
    // One calibration for the job, shared by every start.
    let cal = crate::calibrate::for_scenario(sc)?;
    let jobs: Vec<usize> = (0..starts).collect();
    let out: Vec<Result<StartResult>> = jobs
        .par_iter()
        .map(|&i| {
            let r = match sc.coils() {
                6 => one::<6>(sc, Head::triads6(), cal, i, seed, range, None),
                _ => one::<4>(sc, Head::reference4(), cal, i, seed, range, None),
            };
            on_done();
            r
        })
        .collect();
    out.into_iter().collect()
}

/// The summary of results.
pub fn summarise(sc: &Scenario, results: &[StartResult]) -> Result<LocateSummary> {
    let mut times: Vec<f64> = results.iter().filter(|r| r.located).map(|r| r.time_s).collect();
    Ok(LocateSummary {
        starts: results.len(),
        located: results.iter().filter(|r| r.located).count(),
        median_time_s: crate::stats::median(&mut times).map(mm),
        detection_range_m: mm(detection_range_m(sc)?),
        shown: results.iter().fold(Shown::default(), |a, r| a.plus(&r.shown)),
        calibration: crate::calibrate::found(sc)?,
        caution: crate::report::CAUTION_LINE,
    })
}

/// A start position and heading: uniform over the disc of radius `range` round the
/// point over the sonde, kept when the best coil's SNR there is at least 20 dB.
fn start_pose(sc: &Scenario, rng: &mut ChaCha8Rng, range: f64) -> Result<Pose> {
    let (cx, cy) = (sc.sonde.x_m, sc.sonde.y_m);
    for _ in 0..10_000 {
        let r = range * rng.random::<f64>().sqrt();
        let a = std::f64::consts::TAU * rng.random::<f64>();
        let heading = std::f64::consts::TAU * rng.random::<f64>() - std::f64::consts::PI;
        let pose = Pose { x_m: cx + r * a.cos(), y_m: cy + r * a.sin(), heading_rad: heading };
        if best_coil_snr_db(sc, pose)? >= START_SNR_DB {
            return Ok(pose);
        }
    }
    Err(SimError::Arg {
        name: "locate".into(),
        msg: format!("scenario '{}': no start within the detection range reaches {START_SNR_DB} dB", sc.name),
    })
}

/// What the operator is doing.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Act {
    /// Standing; seconds stood.
    Still { stood: f64 },
    /// Turning on the spot toward the field.
    Turn,
    /// Walking along the handle: +1 forward, −1 back; distance walked this way.
    Walk { dir: f64, walked: f64 },
    /// A move of a set distance: along the handle (else sideways), +1 ahead or
    /// left, distance still to go.
    Move { along: bool, dir: f64, to_go: f64 },
}

impl Act {
    const STILL: Act = Act::Still { stood: 0.0 };
}

fn one<const N: usize>(
    sc: &Scenario,
    head: Head<N>,
    cal: Option<(Calibration, f32)>,
    index: usize,
    seed: u64,
    range: f64,
    trace: Option<&mut dyn std::io::Write>,
) -> Result<StartResult> {
    let mut trace = trace;
    let mut rng = ChaCha8Rng::seed_from_u64(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15).wrapping_add(index as u64));
    let start = start_pose(sc, &mut rng, range)?;
    // The synthesis takes the scenario's sources, noise and receiver; the motion is ours.
    let mut scn = sc.clone();
    // The push is paused while the crew locates the head (common practice): the sonde stays put.
    scn.sonde.push_speed_m_s = 0.0;
    scn.motion = vec![MotionSpec::Still { at: [start.x_m, start.y_m], heading_deg: start.heading_rad.to_degrees(), duration_s: 1.0 }];
    let mut synth = Synth::new(&scn, Some(seed.wrapping_add(1000 + index as u64)));
    let mut settings = receiver_settings(sc, head, None);
    crate::calibrate::set(&mut settings, cal);
    let mut rx = Receiver::new(settings).map_err(|err| SimError::Config { context: format!("scenario '{}'", sc.name), err })?;
    let fs = synth.fs;
    let dt = rx.detector_info().readout_interval_s as f64;
    let frames = (dt * fs).round().max(1.0) as usize;
    let mut block = vec![[0i32; N]; frames];
    let mut pose = start;
    let mut t = 0.0f64;
    let mut act = Act::STILL;
    let mut done = 0u16;
    let mut last: Option<Readout<N>> = None;
    let mut depth_since: Option<f64> = None;
    let mut path = vec![(pose.x_m, pose.y_m)];
    let mut next_path_t = 0.5;
    let mut seen = Shown::default();
    let result =
        |seen: Shown, synth: &Synth, pose: &Pose, t: f64, depth: Option<(f64, f64)>, path: Vec<(f64, f64)>, failure: Option<String>| {
            let truth = synth.truth_at(*pose, t);
            let miss = truth.range_m;
            let tol = over_tolerance_m(truth.depth_m as f32) as f64;
            let err = depth.map(|(d, _)| 100.0 * (d - truth.depth_m) / truth.depth_m);
            let depth_ok = depth
                .map(|(d, s)| (d - truth.depth_m).abs() <= 2.0 * s && (d - truth.depth_m).abs() <= 0.05 * truth.depth_m)
                .unwrap_or(false);
            let located = failure.is_none() && miss <= tol && depth_ok;
            let failure = failure.or_else(|| {
                (!located).then(|| {
                    if miss > tol {
                        format!("stopped {miss:.2} m from the point over the sonde")
                    } else {
                        format!("depth off by {:.1} %", err.unwrap_or(f64::NAN))
                    }
                })
            });
            StartResult {
                start: index,
                from: [start.x_m, start.y_m, start.heading_rad.to_degrees()],
                located,
                time_s: t,
                stop: [pose.x_m, pose.y_m],
                miss_m: miss,
                tolerance_m: tol,
                depth_m: depth.map(|d| d.0),
                depth_sigma_m: depth.map(|d| d.1),
                true_depth_m: truth.depth_m,
                depth_error_pct: err,
                failure,
                shown: seen,
                path,
            }
        };
    while t < MAX_TIME_S {
        // The operator acts on the latest readout, then the next interval is synthesised.
        if let Some(r) = last {
            seen.count(&r.guidance, &synth.truth_at(pose, t));
            if let Some(d) = r.depth.filter(|_| r.guidance.hint == Hint::HoldStill) {
                let since = *depth_since.get_or_insert(t);
                if t - since >= READ_AFTER_S {
                    return Ok(result(seen, &synth, &pose, t, Some((d.depth.depth_m as f64, d.depth.sigma_m as f64)), path, None));
                }
            } else {
                depth_since = None;
            }
            act = decide(act, &r.guidance, r.bearing_deg, &mut done);
            if let Some(w) = trace.as_mut() {
                let tr = synth.truth_at(pose, t);
                let g = &r.guidance;
                let f = |d: Option<undertone_dsp::locate::guidance::Distance>| {
                    d.map(|d| format!("{:+.2}±{:.2}", d.value_m, d.sigma_m)).unwrap_or_else(|| "--".into())
                };
                let _ = writeln!(
                    w,
                    "{t:6.2} {:6.2} {:6.2} {:5.0} snr{:5.1} bear{:6.1} {:8} {:7} {:7} {:12} ahead {:>11} left {:>11} depth {:>6} | {} | true ahead {:+.2} left {:+.2} depth {:.2} | {act:?}",
                    pose.x_m,
                    pose.y_m,
                    pose.heading_rad.to_degrees(),
                    r.snr_db,
                    r.bearing_deg,
                    r.state.name(),
                    g.along.name(),
                    g.across.name(),
                    g.hint.name(),
                    f(g.ahead),
                    f(g.left),
                    r.depth.map(|d| format!("{:.2}", d.depth.depth_m)).unwrap_or_else(|| "--".into()),
                    r.place
                        .map(|p| format!(
                            "fit h {:.2}±{:.2} pitch {:+.0} st {:2} chi2/dof {:.1} alt {:.1}",
                            p.depth_m.value,
                            p.depth_m.sigma,
                            p.pitch_rad.value.to_degrees(),
                            p.stations,
                            p.chi2 / p.dof.max(1) as f32,
                            p.runner_up_chi2
                        ))
                        .unwrap_or_else(|| "no fit".into()),
                    tr.ahead_m,
                    tr.left_m,
                    tr.depth_m
                );
            }
        }
        let next = step(pose, &mut act, last.as_ref().map(|r| r.bearing_deg), dt);
        synth.fill_codes_posed(pose, next, &mut block);
        rx.push_codes_block(&block, |r| last = Some(r));
        pose = next;
        t += frames as f64 / fs;
        if t >= next_path_t {
            path.push((pose.x_m, pose.y_m));
            next_path_t += 0.5;
        }
    }
    Ok(result(seen, &synth, &pose, t, None, path, Some(format!("no depth read within {MAX_TIME_S:.0} s"))))
}

/// What the receiver showed on the way, against the truth: readouts that showed "over", a
/// way (ahead or behind) and a side (left or right), and of those the ones that were wrong.
#[derive(Clone, Copy, Debug, Default, Serialize, PartialEq)]
pub struct Shown {
    /// Readouts that showed "over".
    pub over_shown: usize,
    /// Of those, farther than the tolerance from the point over the sonde.
    pub over_too_far: usize,
    /// Readouts that showed the sonde ahead or behind.
    pub way_shown: usize,
    /// Of those, the wrong way by more than the over tolerance.
    pub way_wrong: usize,
    /// Readouts that showed the sonde to the left or right.
    pub side_shown: usize,
    /// Of those, the wrong side by more than the over tolerance.
    pub side_wrong: usize,
}

impl Shown {
    /// The counts of two runs together.
    fn plus(&self, o: &Shown) -> Shown {
        Shown {
            over_shown: self.over_shown + o.over_shown,
            over_too_far: self.over_too_far + o.over_too_far,
            way_shown: self.way_shown + o.way_shown,
            way_wrong: self.way_wrong + o.way_wrong,
            side_shown: self.side_shown + o.side_shown,
            side_wrong: self.side_wrong + o.side_wrong,
        }
    }

    /// Count one readout's answers; `tr` is the truth where the head stands. "Over" is claimed
    /// for a head standing still: the pose now is where it stood. A way or side is wrong when
    /// the sonde is more than the over tolerance the other way.
    fn count(&mut self, g: &Guidance, tr: &crate::synth::Truth) {
        let tol = over_tolerance_m(tr.depth_m as f32) as f64;
        if g.over() {
            self.over_shown += 1;
            self.over_too_far += usize::from(tr.range_m > tol);
        }
        // How far the sonde lies the way shown (ahead or left positive), if a way is shown.
        let way = match g.along {
            Along::Ahead => Some(tr.ahead_m),
            Along::Behind => Some(-tr.ahead_m),
            _ => None,
        };
        let side = match g.across {
            Across::Left => Some(tr.left_m),
            Across::Right => Some(-tr.left_m),
            _ => None,
        };
        if let Some(d) = way {
            self.way_shown += 1;
            self.way_wrong += usize::from(d < -tol);
        }
        if let Some(d) = side {
            self.side_shown += 1;
            self.side_wrong += usize::from(d < -tol);
        }
    }
}

/// The operator's next act from the hint shown; `done` is the last move made.
fn decide(act: Act, g: &Guidance, bearing_deg: f32, done: &mut u16) -> Act {
    let aligned = (bearing_deg as f64).abs() <= ALIGNED_DEG;
    let new_move = g.move_m.is_some() && g.move_id != *done;
    match act {
        // A move of a set distance is finished first; a turn goes on while asked for.
        Act::Move { .. } => return act,
        Act::Turn if !aligned && g.hint == Hint::TurnInLine => return act,
        // After each move the operator stands a moment and reads the screen (a new
        // move shown is made at once).
        Act::Still { stood } if stood < PAUSE_S && g.hint != Hint::Wait && !new_move => return act,
        _ => {}
    }
    let still = match act {
        Act::Still { .. } => act,
        _ => Act::STILL,
    };
    if let Some(m) = g.move_m {
        if g.move_id == *done {
            return still;
        }
        *done = g.move_id;
        let along = matches!(g.hint, Hint::WalkAhead | Hint::WalkBack | Hint::SweepAlong | Hint::WalkAlong | Hint::WalkOtherWay);
        return Act::Move { along, dir: (m as f64).signum(), to_go: (m as f64).abs().min(5.0) };
    }
    match g.hint {
        Hint::Wait | Hint::HoldStill => still,
        Hint::TurnInLine => {
            if aligned {
                still
            } else {
                Act::Turn
            }
        }
        Hint::WalkAhead | Hint::WalkBack => {
            let dir = if g.hint == Hint::WalkAhead { 1.0 } else { -1.0 };
            Act::Walk { dir, walked: keep_walked(act, dir) }
        }
        Hint::WalkOtherWay => match act {
            Act::Walk { dir, walked } if walked > 0.5 => Act::Walk { dir: -dir, walked: 0.0 },
            Act::Walk { .. } => act,
            _ => Act::Walk { dir: -1.0, walked: 0.0 },
        },
        // Keep walking the way chosen; after 3 m without an answer, turn back.
        Hint::WalkAlong | Hint::SweepAlong | Hint::SweepAcross | Hint::StepLeft | Hint::StepRight => match act {
            Act::Walk { walked, .. } if walked < 3.0 => act,
            Act::Walk { dir, .. } => Act::Walk { dir: -dir, walked: 0.0 },
            _ => Act::Walk { dir: 1.0, walked: 0.0 },
        },
    }
}

fn keep_walked(act: Act, dir: f64) -> f64 {
    match act {
        Act::Walk { dir: d, walked } if d == dir => walked,
        _ => 0.0,
    }
}

/// The pose after `dt` of the act (and the act's own progress).
fn step(pose: Pose, act: &mut Act, bearing_deg: Option<f32>, dt: f64) -> Pose {
    let (s, c) = pose.heading_rad.sin_cos();
    let along = |p: Pose, d: f64| Pose { x_m: p.x_m + c * d, y_m: p.y_m + s * d, ..p };
    let side = |p: Pose, d: f64| Pose { x_m: p.x_m - s * d, y_m: p.y_m + c * d, ..p };
    match act {
        Act::Still { stood } => {
            *stood += dt;
            pose
        }
        Act::Turn => {
            let bearing = bearing_deg.map(|b| b as f64).unwrap_or(0.0).to_radians();
            let turn = bearing.signum() * (TURN_RAD_S * dt).min(bearing.abs());
            Pose { heading_rad: pose.heading_rad + turn, ..pose }
        }
        Act::Walk { dir, walked } => {
            let d = WALK_M_S * dt;
            *walked += d;
            along(pose, *dir * d)
        }
        Act::Move { along: a, dir, to_go } => {
            let d = (STEP_M_S * dt).min(*to_go);
            *to_go -= d;
            let p = if *a { along(pose, *dir * d) } else { side(pose, *dir * d) };
            if *to_go <= 1e-9 {
                *act = Act::STILL;
            }
            p
        }
    }
}

/// Print the readouts of one start as the operator saw them.
pub fn trace(sc: &Scenario, start: usize, seed: u64, out: &mut dyn std::io::Write) -> Result<StartResult> {
    let range = detection_range_m(sc)?;
    let cal = crate::calibrate::for_scenario(sc)?;
    match sc.coils() {
        6 => one::<6>(sc, Head::triads6(), cal, start, seed, range, Some(out)),
        _ => one::<4>(sc, Head::reference4(), cal, start, seed, range, Some(out)),
    }
}

/// The `locate` command: run, print (a table or JSON lines), draw the tracks.
pub fn command(sc: &Scenario, starts: usize, seed: u64, json: bool, out_dir: &std::path::Path, out: &mut dyn std::io::Write) -> Result<()> {
    use indicatif::{ProgressBar, ProgressStyle};
    use std::io::IsTerminal;
    let io = |e: std::io::Error| SimError::io(std::path::Path::new("<stdout>"), "write", e);
    crate::output::folder(out_dir)?;
    let pb = if std::io::stderr().is_terminal() { ProgressBar::new(starts as u64) } else { ProgressBar::hidden() };
    pb.set_style(
        ProgressStyle::with_template("{bar:40} {pos}/{len} starts {elapsed_precise}").unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let results = run(sc, starts, seed, &|| pb.inc(1))?;
    pb.finish_and_clear();
    let summary = summarise(sc, &results)?;
    if json {
        for r in &results {
            writeln!(
                out,
                "{}",
                serde_json::to_string(&r.rounded()).map_err(|e| SimError::Arg { name: "json".into(), msg: e.to_string() })?
            )
            .map_err(io)?;
        }
        writeln!(out, "{}", serde_json::to_string(&summary).map_err(|e| SimError::Arg { name: "json".into(), msg: e.to_string() })?)
            .map_err(io)?;
    } else {
        writeln!(
            out,
            "Closed-loop locating: {} ({} starts within {:.2} m of the point over the sonde, seed {seed})",
            sc.name, summary.starts, summary.detection_range_m
        )
        .map_err(io)?;
        if let Some(c) = summary.calibration {
            writeln!(
                out,
                "calibrated before the job with the sonde {:.2} m below the head: upper coil gain x{:.4}, gain tolerance left {:.2} %",
                c.distance_m,
                c.upper_gain,
                100.0 * c.gain_tolerance
            )
            .map_err(io)?;
        }
        writeln!(
            out,
            "located {} of {} ({:.1} %); median time {}",
            summary.located,
            summary.starts,
            100.0 * summary.located as f64 / summary.starts.max(1) as f64,
            summary.median_time_s.map(|t| format!("{t:.1} s")).unwrap_or_else(|| "--".into())
        )
        .map_err(io)?;
        writeln!(
            out,
            "'over' shown on {} readouts on the way, {} of them farther than the over tolerance",
            summary.shown.over_shown, summary.shown.over_too_far
        )
        .map_err(io)?;
        writeln!(
            out,
            "ahead/behind shown on {} readouts, {} the wrong way by more than the over tolerance; left/right on {}, {} the wrong side",
            summary.shown.way_shown, summary.shown.way_wrong, summary.shown.side_shown, summary.shown.side_wrong
        )
        .map_err(io)?;
        let fails: Vec<&StartResult> = results.iter().filter(|r| !r.located).collect();
        if !fails.is_empty() {
            writeln!(out, "not located:").map_err(io)?;
            writeln!(out, "{:>6} {:>22} {:>8} {:>8} {:>9} {:>7}  why", "start", "from (m, m, deg)", "time s", "miss m", "depth m", "err %")
                .map_err(io)?;
            for r in fails {
                writeln!(
                    out,
                    "{:>6} {:>22} {:>8.1} {:>8.2} {:>9} {:>7}  {}",
                    r.start,
                    format!("{:.2}, {:.2}, {:.0}", r.from[0], r.from[1], r.from[2]),
                    r.time_s,
                    r.miss_m,
                    r.depth_m.map(|d| format!("{d:.2}")).unwrap_or_else(|| "--".into()),
                    r.depth_error_pct.map(|e| format!("{e:+.1}")).unwrap_or_else(|| "--".into()),
                    r.failure.as_deref().unwrap_or("")
                )
                .map_err(io)?;
            }
        }
    }
    // The tracks over the field map: located in white, not located in magenta (at most 40 of
    // each; red is the sonde's own mark, and a failed track in red hid it).
    let mut tracks: Vec<crate::plots::Track> = Vec::new();
    for r in results.iter().filter(|r| r.located).take(40) {
        tracks.push((
            if tracks.is_empty() { "located".into() } else { String::new() },
            r.path.clone(),
            plotters::style::RGBColor(255, 255, 255),
        ));
    }
    let mut first_fail = true;
    for r in results.iter().filter(|r| !r.located).take(40) {
        tracks.push((
            if first_fail { "not located".into() } else { String::new() },
            r.path.clone(),
            plotters::style::RGBColor(255, 0, 220),
        ));
        first_fail = false;
    }
    let files = crate::map::field_map(sc, out_dir, "locate-tracks", "operator tracks over the horizontal field", false, &tracks, 0.0)?;
    if !json {
        writeln!(out, "files:").map_err(io)?;
        for f in files {
            writeln!(out, "  {}", f.display()).map_err(io)?;
        }
        writeln!(out, "\n{}", crate::report::CAUTIONS).map_err(io)?;
    }
    Ok(())
}
