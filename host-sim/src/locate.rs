//! `locate`: the receiver in closed loop with a simulated operator who does only
//! what the receiver tells them, from random starts around a scenario's sonde.
//!
//! # The operator's procedure (what the receiver asks of its user)
//! Each readout (20 per second) the operator reads the receiver's hint and:
//! * after every move of a set distance, stands still 0.8 s and reads the screen again;
//! * **wait**: stands still (the detector is settling, or there is no tone);
//! * **turn in line**: turns on the spot toward the field (the way the bearing
//!   points, 30°/s) until the bearing reads within 5° of the handle;
//! * **walk along** (the receiver cannot yet tell which side the sonde is):
//!   walks forward along the handle at 0.3 m/s keeping the heading, and turns
//!   back (walking backwards) after 3 m without an answer;
//! * **walk the other way** (the field is getting weaker): reverses the way
//!   it walks (once it has gone 0.5 m since the last reversal);
//! * **walk ahead / walk back**: walks that way along the handle at 0.3 m/s,
//!   keeping the heading; when the distance shown is under 0.6 m, walks just
//!   that distance (at 0.2 m/s) and stops;
//! * **sweep along** (the receiver needs to see the field change along):
//!   walks the distance shown (0.3 m if none) forward, twice that back and
//!   forward again to the start along the handle at 0.2 m/s, keeping the heading;
//! * **sweep across** (over along the axis, the side unknown): the same
//!   sideways (left first), keeping the heading;
//! * **step left / step right**: steps sideways the distance shown (0.2 m if
//!   none) at 0.2 m/s, keeping the heading;
//! * **hold still**: stands still and, once a depth has been shown for a second,
//!   marks the spot and reads the depth. That ends the start.
//!
//! A start counts as *located* when the marked spot is within
//! `max(0.15 m, 0.1·depth)` of the point over the sonde and the depth read is
//! within 2σ and 5 % of the truth. A start that has not ended after
//! [`MAX_TIME_S`] counts as not located.
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
use undertone_dsp::locate::guidance::{over_tolerance_m, Hint};
use undertone_dsp::{Head, Readout, Receiver};

/// Longest a start may take, s.
pub const MAX_TIME_S: f64 = 120.0;
/// Walking speed, m/s.
pub const WALK_M_S: f64 = 0.3;
/// Speed of a move of a set distance (a step, a sweep), m/s.
pub const STEP_M_S: f64 = 0.2;
/// A distance shown shorter than this is walked as one move, then the operator stops, m.
pub const NEAR_M: f64 = 0.6;
/// The operator stands this long after each move before acting on the screen again, s.
pub const PAUSE_S: f64 = 0.8;
/// The operator counts the receiver as in line within this bearing, degrees.
pub const ALIGNED_DEG: f64 = 5.0;
/// Turning rate, rad/s (30°/s).
pub const TURN_RAD_S: f64 = 0.5236;
/// Half-length of a sweep along the handle, m.
pub const SWEEP_M: f64 = 0.3;
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
    /// The operator's path, one point per 0.5 s (east, north), m.
    #[serde(skip)]
    pub path: Vec<(f64, f64)>,
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
    /// The usual caution.
    pub caution: &'static str,
}

/// Run `starts` starts of `sc` from `seed`.
pub fn run(sc: &Scenario, starts: usize, seed: u64, on_done: &(dyn Fn() + Sync)) -> Result<Vec<StartResult>> {
    let range = detection_range_m(sc)?;
    let jobs: Vec<usize> = (0..starts).collect();
    let out: Vec<Result<StartResult>> = jobs
        .par_iter()
        .map(|&i| {
            let r = match sc.coils() {
                6 => one::<6>(sc, Head::triads6(), i, seed, range, None),
                _ => one::<4>(sc, Head::reference4(), i, seed, range, None),
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
        median_time_s: crate::stats::median(&mut times),
        detection_range_m: detection_range_m(sc)?,
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

/// Development statistics (UNDERTONE_DIAG set).
#[derive(Default)]
pub struct Diag {
    /// Readouts seen.
    pub readouts: usize,
    /// Without a trail fit.
    pub no_fit: usize,
    /// With an inconsistent one.
    pub inconsistent: usize,
    /// χ²/dof of consistent fits.
    pub chi2_ok: Vec<f64>,
    /// χ²/dof of inconsistent fits.
    pub chi2_bad: Vec<f64>,
    /// Normalised errors of ahead.
    pub ahead: Vec<f64>,
    /// … of left.
    pub left: Vec<f64>,
    /// Along direction wrong.
    pub wrong_along: usize,
    /// Across direction wrong.
    pub wrong_across: usize,
    /// Hints shown.
    pub hints: std::collections::BTreeMap<&'static str, usize>,
}

/// Development statistics.
pub static DIAG: std::sync::LazyLock<std::sync::Mutex<Diag>> = std::sync::LazyLock::new(|| std::sync::Mutex::new(Diag::default()));

/// Print the development statistics.
pub fn print_diag() {
    let d = DIAG.lock().unwrap();
    let frac = |v: &[f64], k: f64| v.iter().filter(|z| z.abs() <= k).count() as f64 / v.len().max(1) as f64;
    eprintln!(
        "diag: readouts {} no-fit {:.1}% | ahead n {} within 1σ {:.2} 2σ {:.2} 3σ {:.3} | left n {} within 1σ {:.2} 2σ {:.2} 3σ {:.3} | wrong along {} across {}",
        d.readouts,
        100.0 * d.no_fit as f64 / d.readouts.max(1) as f64,
        d.ahead.len(),
        frac(&d.ahead, 1.0),
        frac(&d.ahead, 2.0),
        frac(&d.ahead, 3.0),
        d.left.len(),
        frac(&d.left, 1.0),
        frac(&d.left, 2.0),
        frac(&d.left, 3.0),
        d.wrong_along,
        d.wrong_across
    );
    eprintln!("diag hints: {:?}", d.hints);
    let mut a = d.chi2_ok.clone();
    let mut b = d.chi2_bad.clone();
    eprintln!(
        "diag inconsistent {:.1}% chi2/dof ok median {:?} bad median {:?}",
        100.0 * d.inconsistent as f64 / d.readouts.max(1) as f64,
        crate::stats::median(&mut a),
        crate::stats::median(&mut b)
    );
}

/// What the operator is doing.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Act {
    /// Standing; seconds stood.
    Still { stood: f64 },
    /// Turning on the spot toward the field.
    Turn,
    /// Walking along the handle: +1 forward, −1 back; distance walked this way;
    /// distance still to go when walking a distance shown (then stopping).
    Walk { dir: f64, walked: f64, to_go: Option<f64> },
    /// A sweep along: distance still to go this leg, leg direction, legs left
    /// (three legs: one way, twice as far back, and back to the start), half-length.
    Sweep { left: f64, dir: f64, legs: u8, half: f64 },
    /// Sideways steps: +1 left; distance still to go this leg, legs left, half-length.
    Side { dir: f64, left: f64, legs: u8, half: f64 },
}

impl Act {
    const STILL: Act = Act::Still { stood: 0.0 };
}

fn one<const N: usize>(
    sc: &Scenario,
    head: Head<N>,
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
    scn.motion = vec![MotionSpec::Still { at: [start.x_m, start.y_m], heading_deg: start.heading_rad.to_degrees(), duration_s: 1.0 }];
    let mut synth = Synth::new(&scn, Some(seed.wrapping_add(1000 + index as u64)));
    let settings = receiver_settings(sc, head, None);
    let mut rx = Receiver::new(settings).map_err(|err| SimError::Config { context: format!("scenario '{}'", sc.name), err })?;
    let fs = synth.fs;
    let dt = rx.detector_info().readout_interval_s as f64;
    let frames = (dt * fs).round().max(1.0) as usize;
    let mut block = vec![[0i32; N]; frames];
    let mut pose = start;
    let mut t = 0.0f64;
    let mut act = Act::STILL;
    let mut last: Option<Readout<N>> = None;
    let mut depth_since: Option<f64> = None;
    let mut path = vec![(pose.x_m, pose.y_m)];
    let mut next_path_t = 0.5;
    let result = |synth: &Synth, pose: &Pose, t: f64, depth: Option<(f64, f64)>, path: Vec<(f64, f64)>, failure: Option<String>| {
        let truth = synth.truth_at(*pose, t);
        let miss = truth.range_m;
        let tol = over_tolerance_m(truth.depth_m as f32) as f64;
        let err = depth.map(|(d, _)| 100.0 * (d - truth.depth_m) / truth.depth_m);
        let depth_ok =
            depth.map(|(d, s)| (d - truth.depth_m).abs() <= 2.0 * s && (d - truth.depth_m).abs() <= 0.05 * truth.depth_m).unwrap_or(false);
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
            path,
        }
    };
    while t < MAX_TIME_S {
        // The operator acts on the latest readout, then the next interval is synthesised.
        if let Some(r) = last {
            if let Some(d) = r.depth.filter(|_| r.guidance.hint == Hint::HoldStill) {
                let since = *depth_since.get_or_insert(t);
                if t - since >= READ_AFTER_S {
                    return Ok(result(&synth, &pose, t, Some((d.depth.depth_m as f64, d.depth.sigma_m as f64)), path, None));
                }
            } else {
                depth_since = None;
            }
            act = decide(act, &r);
            if let (Some(w), Some(p)) = (trace.as_mut(), r.place) {
                if !p.consistent && std::env::var_os("UNDERTONE_STATIONS").is_some() {
                    let tr = rx.locator().trail();
                    for i in 0..tr.stations() {
                        if let Some(st) = tr.station(i) {
                            let _ = writeln!(
                                w,
                                "    st {i:2} t {:6.2}-{:6.2} n {:3} {:?} res {:?} prior {:?} place {:?}",
                                st.t0_s,
                                st.t1_s,
                                st.readouts,
                                st.motion,
                                st.residual.map(|v| (v * 10.0).round() / 10.0),
                                st.prior.map(|v| (v * 10.0).round() / 10.0),
                                st.place.map(|v| (v * 100.0).round() / 100.0)
                            );
                        }
                    }
                }
            }
            if std::env::var_os("UNDERTONE_DIAG").is_some() {
                let tr = synth.truth_at(pose, t);
                let g = &r.guidance;
                let mut d = DIAG.lock().unwrap();
                d.readouts += 1;
                match r.place {
                    None => d.no_fit += 1,
                    Some(p) if !p.consistent => {
                        d.inconsistent += 1;
                        d.chi2_bad.push(p.chi2 as f64 / p.dof.max(1) as f64);
                    }
                    Some(p) => d.chi2_ok.push(p.chi2 as f64 / p.dof.max(1) as f64),
                }
                if let Some(a) = g.ahead {
                    let z = (a.value_m as f64 - tr.ahead_m) / a.sigma_m.max(1e-6) as f64;
                    d.ahead.push(z);
                }
                if let Some(l) = g.left {
                    let z = (l.value_m as f64 - tr.left_m) / l.sigma_m.max(1e-6) as f64;
                    d.left.push(z);
                }
                let wrong_a = (g.along == undertone_dsp::locate::guidance::Along::Ahead && tr.ahead_m < 0.0)
                    || (g.along == undertone_dsp::locate::guidance::Along::Behind && tr.ahead_m > 0.0);
                let wrong_l = (g.across == undertone_dsp::locate::guidance::Across::Left && tr.left_m < 0.0)
                    || (g.across == undertone_dsp::locate::guidance::Across::Right && tr.left_m > 0.0);
                d.wrong_along += wrong_a as usize;
                d.wrong_across += wrong_l as usize;
                *d.hints.entry(g.hint.name()).or_insert(0) += 1;
            }
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
        let next = step(pose, &mut act, last.as_ref(), dt);
        synth.fill_codes_posed(pose, next, &mut block);
        rx.push_codes_block(&block, |r| last = Some(r));
        pose = next;
        t += frames as f64 / fs;
        if t >= next_path_t {
            path.push((pose.x_m, pose.y_m));
            next_path_t += 0.5;
        }
    }
    Ok(result(&synth, &pose, t, None, path, Some(format!("no depth read within {MAX_TIME_S:.0} s"))))
}

/// The operator's next act from the hint shown.
fn decide<const N: usize>(act: Act, r: &Readout<N>) -> Act {
    let g = &r.guidance;
    let aligned = (r.bearing_deg as f64).abs() <= ALIGNED_DEG;
    // Moves of a set distance are finished first; a turn goes on until in line.
    match act {
        Act::Walk { to_go: Some(_), .. } | Act::Sweep { .. } | Act::Side { .. } if g.hint != Hint::Wait => return act,
        Act::Turn if !aligned && g.hint == Hint::TurnInLine => return act,
        // After each move the operator stands a moment and reads the screen.
        Act::Still { stood } if stood < PAUSE_S && g.hint != Hint::Wait => return act,
        _ => {}
    }
    let still = match act {
        Act::Still { .. } => act,
        _ => Act::STILL,
    };
    let shown = |d: Option<undertone_dsp::locate::guidance::Distance>| d.map(|d| (d.value_m as f64).abs());
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
            match shown(g.ahead) {
                Some(d) if d < NEAR_M => Act::Walk { dir, walked: 0.0, to_go: Some(d) },
                _ => Act::Walk { dir, walked: keep_walked(act, dir), to_go: None },
            }
        }
        Hint::WalkOtherWay => match act {
            Act::Walk { dir, walked, .. } if walked > 0.5 => Act::Walk { dir: -dir, walked: 0.0, to_go: None },
            Act::Walk { .. } => act,
            _ => Act::Walk { dir: -1.0, walked: 0.0, to_go: None },
        },
        Hint::WalkAlong => match act {
            // Keep walking the way chosen; after 3 m without an answer, turn back.
            Act::Walk { dir, walked, to_go: None } if walked < 3.0 => act.with(dir, walked),
            Act::Walk { dir, .. } => Act::Walk { dir: -dir, walked: 0.0, to_go: None },
            _ => Act::Walk { dir: 1.0, walked: 0.0, to_go: None },
        },
        Hint::SweepAlong => {
            let half = sweep(g.sweep_m);
            Act::Sweep { left: half, dir: 1.0, legs: 3, half }
        }
        Hint::SweepAcross => {
            let half = sweep(g.sweep_m);
            Act::Side { dir: 1.0, left: half, legs: 3, half }
        }
        Hint::StepLeft | Hint::StepRight => {
            let dist = shown(g.left).unwrap_or(0.2).clamp(0.05, 3.0);
            Act::Side { dir: if g.hint == Hint::StepLeft { 1.0 } else { -1.0 }, left: dist, legs: 1, half: dist }
        }
    }
}

impl Act {
    fn with(self, dir: f64, walked: f64) -> Act {
        Act::Walk { dir, walked, to_go: None }
    }
}

/// The sweep's half-length: as shown, else the default.
fn sweep(shown_m: f32) -> f64 {
    if shown_m > 0.0 {
        (shown_m as f64).clamp(0.1, 2.0)
    } else {
        SWEEP_M
    }
}

fn keep_walked(act: Act, dir: f64) -> f64 {
    match act {
        Act::Walk { dir: d, walked, .. } if d == dir => walked,
        _ => 0.0,
    }
}

/// The pose after `dt` of the act (and the act's own progress).
fn step<const N: usize>(pose: Pose, act: &mut Act, r: Option<&Readout<N>>, dt: f64) -> Pose {
    let (s, c) = pose.heading_rad.sin_cos();
    let along = |p: Pose, d: f64| Pose { x_m: p.x_m + c * d, y_m: p.y_m + s * d, ..p };
    let side = |p: Pose, d: f64| Pose { x_m: p.x_m - s * d, y_m: p.y_m + c * d, ..p };
    let leg = |legs: u8, half: f64| if legs == 3 { 2.0 * half } else { half };
    match act {
        Act::Still { stood } => {
            *stood += dt;
            pose
        }
        Act::Turn => {
            let bearing = r.map(|r| r.bearing_deg as f64).unwrap_or(0.0).to_radians();
            let turn = bearing.signum() * (TURN_RAD_S * dt).min(bearing.abs());
            Pose { heading_rad: pose.heading_rad + turn, ..pose }
        }
        Act::Walk { dir, walked, to_go } => {
            let (d, done) = match to_go {
                Some(g) => {
                    let d = (STEP_M_S * dt).min(*g);
                    *g -= d;
                    (d, *g <= 1e-9)
                }
                None => (WALK_M_S * dt, false),
            };
            *walked += d;
            let p = along(pose, *dir * d);
            if done {
                *act = Act::STILL;
            }
            p
        }
        Act::Sweep { left, dir, legs, half } => {
            let d = (STEP_M_S * dt).min(*left);
            *left -= d;
            let p = along(pose, *dir * d);
            if *left <= 1e-9 {
                *act =
                    if *legs > 1 { Act::Sweep { left: leg(*legs, *half), dir: -*dir, legs: *legs - 1, half: *half } } else { Act::STILL };
            }
            p
        }
        Act::Side { dir, left, legs, half } => {
            let d = (STEP_M_S * dt).min(*left);
            *left -= d;
            let p = side(pose, *dir * d);
            if *left <= 1e-9 {
                *act = if *legs > 1 { Act::Side { left: leg(*legs, *half), dir: -*dir, legs: *legs - 1, half: *half } } else { Act::STILL };
            }
            p
        }
    }
}

/// Print the readouts of one start as the operator saw them.
pub fn trace(sc: &Scenario, start: usize, seed: u64, out: &mut dyn std::io::Write) -> Result<StartResult> {
    let range = detection_range_m(sc)?;
    match sc.coils() {
        6 => one::<6>(sc, Head::triads6(), start, seed, range, Some(out)),
        _ => one::<4>(sc, Head::reference4(), start, seed, range, Some(out)),
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
    if std::env::var_os("UNDERTONE_DIAG").is_some() {
        print_diag();
    }
    let summary = summarise(sc, &results)?;
    if json {
        for r in &results {
            writeln!(out, "{}", serde_json::to_string(r).map_err(|e| SimError::Arg { name: "json".into(), msg: e.to_string() })?)
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
        writeln!(
            out,
            "located {} of {} ({:.1} %); median time {}",
            summary.located,
            summary.starts,
            100.0 * summary.located as f64 / summary.starts.max(1) as f64,
            summary.median_time_s.map(|t| format!("{t:.1} s")).unwrap_or_else(|| "--".into())
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
    // The tracks over the field map: located in white, not located in red (at most 40 of each).
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
            plotters::style::RGBColor(255, 60, 60),
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
