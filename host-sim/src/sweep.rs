//! `sweep`: Monte Carlo over noise seeds for each detection bandwidth, with
//! 95 % confidence intervals and a recommendation only when they decide it.
//!
//! For each bandwidth and trial (a noise seed; trial t uses the same seed at
//! every bandwidth, so the bandwidths meet the same noise) the scenario is run
//! and scored:
//! * depth: the median valid gradient (or fit) depth of the trial against the
//!   truth; over trials, the bias (mean error) and the scatter (their standard
//!   deviation), and the fraction of trials with a depth at all;
//! * settling: the detector's 99 % step time (the same for every trial);
//! * peak lag: on the first walk, where the receiver *is* when its strongest
//!   readout is shown (latest sample, not the data's centre), minus the point
//!   over the sonde, along the walking direction (positive = past it);
//! * false peaks: the fraction of trials with a local maximum of strength (over
//!   ±5 readouts) above 30 % of the main peak beyond the nulls (|x| > h/√2 from
//!   the point over the sonde): the secondary lobes of a level dipole stay at
//!   20 %, so such a peak is made by noise or interference.
//!
//! Each figure carries its 95 % interval ([`crate::stats`]): Student's t for
//! the means, chi-square for the scatter, Wilson's for the rates.
//!
//! A bandwidth *meets* the criteria when every interval lies inside its limit:
//! |lag| within the stated limit, false peaks in at most 10 % of trials, a
//! depth in at least half of them and the depth bias within ±3 %. It *fails*
//! when an interval lies wholly outside its limit, and is *unsure* otherwise.
//! The recommendation is the narrowest bandwidth that meets them, given only
//! when every narrower one fails; when the narrowest one that does not fail is
//! unsure, the sweep says so and how many trials would decide it (the
//! intervals shrinking as 1/√n around the figures as measured).
//!
//! Trials run in parallel (rayon) in batches; each trial is reduced to a few
//! numbers as its readouts stream past and the batch's results are folded in
//! trial order, so memory does not grow with the number of trials and the
//! output is the same for a given seed whatever the number of threads.

use crate::error::{Result, SimError};
use crate::motion::{Motion, MotionSpec};
use crate::progress::PROGRESS_AFTER;
use crate::run::{simulate_each, Row};
use crate::scenario::Scenario;
use crate::stats::{trials_to_clear_mean, trials_to_clear_rate, wilson, Interval, Welford};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;
use serde::Serialize;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;
use undertone_dsp::detect::settings::{MAX_BANDWIDTH_HZ, MIN_BANDWIDTH_HZ};

/// Largest false-peak rate a recommended bandwidth may show.
pub const MAX_FALSE_PEAK_RATE: f64 = 0.1;
/// Largest |depth bias| a recommended bandwidth may show, %.
pub const MAX_DEPTH_BIAS_PCT: f64 = 3.0;
/// Smallest fraction of trials with a depth for a recommended bandwidth.
pub const MIN_DEPTH_RATE: f64 = 0.5;
/// Below this many trials per bandwidth the command warns that the intervals are wide.
pub const FEW_TRIALS: usize = 20;
/// Trials per bandwidth when none are given: enough for the intervals to
/// decide the example scenarios' sweeps (see BENCHMARKS.md for the timing).
pub const DEFAULT_TRIALS: usize = 100;
/// Most trials per bandwidth.
pub const MAX_TRIALS: usize = 10_000;

/// A figure with its 95 % interval.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct Figure {
    /// The estimate.
    pub value: f64,
    /// Its 95 % confidence interval (None with too few trials).
    pub ci: Option<Interval>,
}

/// How a bandwidth stands against one criterion.
#[derive(Clone, Copy, Debug, Serialize, PartialEq, Eq)]
pub enum Standing {
    /// The interval lies inside the limit.
    Meets,
    /// The interval lies wholly outside the limit.
    Fails,
    /// The interval straddles the limit; about this many trials would decide
    /// (None: more than [`crate::stats::MAX_TRIALS`], or the figure sits on the limit).
    Unsure(Option<usize>),
}

/// The criteria, in the order they are reported.
pub const CRITERIA: [&str; 4] = ["peak lag", "false peaks", "depth found", "depth bias"];

/// Results for one bandwidth.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SweepRow {
    /// Detection bandwidth, Hz.
    pub bandwidth_hz: f64,
    /// Trials run.
    pub trials: usize,
    /// Trials with a valid depth.
    pub with_depth: usize,
    /// Fraction of trials with a valid depth.
    pub depth_rate: Figure,
    /// Mean depth error, %.
    pub depth_bias_pct: Option<Figure>,
    /// Standard deviation of the depth error, %.
    pub depth_scatter_pct: Option<Figure>,
    /// 99 % settling time, s.
    pub settle_s: f64,
    /// Mean peak lag, m.
    pub lag_m: Option<Figure>,
    /// Fraction of trials with a false peak.
    pub false_peak_rate: Figure,
    /// Standing against each of [`CRITERIA`].
    pub standing: [Standing; 4],
}

impl SweepRow {
    /// Fails if any criterion fails, meets if all meet, else unsure.
    pub fn verdict(&self) -> Standing {
        if self.standing.contains(&Standing::Fails) {
            Standing::Fails
        } else if self.standing.iter().all(|s| *s == Standing::Meets) {
            Standing::Meets
        } else {
            let mut need = self.standing.iter().filter_map(|s| if let Standing::Unsure(n) = s { Some(*n) } else { None });
            Standing::Unsure(need.try_fold(0, |a, n| n.map(|n| a.max(n))))
        }
    }
}

/// One trial reduced to what the figures need.
#[derive(Clone, Copy, Debug)]
struct Trial {
    depth_err_pct: Option<f64>,
    lag_m: Option<f64>,
    false_peak: bool,
    settle_s: f64,
}

/// A readout reduced to what a trial's score needs.
#[derive(Clone, Copy, Debug)]
struct Point {
    t_s: f64,
    t_latest_s: f64,
    strength: f64,
    depth: Option<(f64, f64)>,
    at: Option<(f64, f64)>,
    /// Receiver and sonde (east, north) when the readout is shown.
    shown: Option<([f64; 2], [f64; 2], f64)>,
}

/// The noise seed of trial `t` from the sweep's seed (SplitMix64 finaliser).
pub fn trial_seed(seed: u64, t: usize) -> u64 {
    let mut z = seed.wrapping_add((t as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn trial(sc: &Scenario, motion: &Motion, bw: f64, seed: u64) -> Result<Trial> {
    let mut pts = Vec::new();
    let run = simulate_each(sc, Some(seed), Some(bw as f32), &mut |r: Row| {
        pts.push(Point {
            t_s: r.t_s,
            t_latest_s: r.t_latest_s,
            strength: r.strength,
            depth: r.gradient.depth_m.or(r.fit.depth_m).zip(r.truth.map(|t| t.depth_m)),
            at: r.truth.map(|t| (t.x_m, t.y_m)),
            shown: r.truth.map(|t| (t.at_shown_m, [t.sonde_shown_m[0], t.sonde_shown_m[1]], t.depth_m)),
        })
    })?;
    let settle_s = run.info.settle_99_s as f64;
    pts.retain(|p| p.t_s > settle_s);
    let mut est: Vec<(f64, f64)> = pts.iter().filter_map(|p| p.depth).collect();
    est.sort_by(|a, b| a.0.total_cmp(&b.0));
    let depth_err_pct = (!est.is_empty()).then(|| {
        let (e, t) = est[est.len() / 2];
        100.0 * (e - t) / t
    });
    // First walk: the readouts shown while the receiver walked it.
    let mut lag_m = None;
    let mut false_peak = false;
    for seg in motion.segments() {
        if let MotionSpec::Walk { from, to, .. } = &seg.spec {
            let (t0, d) = (seg.start_s, seg.duration_s);
            let seg: Vec<&Point> = pts.iter().filter(|p| p.t_latest_s >= t0 && p.t_latest_s < t0 + d).collect();
            if let Some(best) = seg.iter().max_by(|a, b| a.strength.total_cmp(&b.strength)) {
                let (dx, dy) = (to[0] - from[0], to[1] - from[1]);
                let l = (dx * dx + dy * dy).sqrt();
                let (ux, uy) = (dx / l, dy / l);
                let Some((now, sonde, depth)) = best.shown else { break };
                let s_now = (now[0] - from[0]) * ux + (now[1] - from[1]) * uy;
                let s_sonde = (sonde[0] - from[0]) * ux + (sonde[1] - from[1]) * uy;
                lag_m = Some(s_now - s_sonde);
                let peak = best.strength;
                let pos = |p: &Point| p.at.map(|(x, y)| (x - from[0]) * ux + (y - from[1]) * uy - s_sonde).unwrap_or(0.0);
                for w in seg.windows(11) {
                    let mid = w[5].strength;
                    let is_max = w.iter().enumerate().all(|(k, p)| k == 5 || p.strength < mid);
                    if is_max && mid > 0.3 * peak && pos(w[5]).abs() > depth / std::f64::consts::SQRT_2 {
                        false_peak = true;
                    }
                }
            }
            break;
        }
    }
    Ok(Trial { depth_err_pct, lag_m, false_peak, settle_s })
}

/// The figures of one bandwidth, folded trial by trial.
#[derive(Clone, Copy, Debug, Default)]
struct Tally {
    trials: usize,
    depth: Welford,
    lag: Welford,
    false_peaks: usize,
    settle_s: Option<f64>,
}

impl Tally {
    fn add(&mut self, t: &Trial) {
        self.trials += 1;
        if let Some(e) = t.depth_err_pct {
            self.depth.push(e);
        }
        if let Some(l) = t.lag_m {
            self.lag.push(l);
        }
        self.false_peaks += t.false_peak as usize;
        self.settle_s.get_or_insert(t.settle_s);
    }

    fn row(&self, bandwidth_hz: f64, max_lag_m: f64) -> SweepRow {
        let n = self.trials;
        let mean = |w: &Welford| w.mean().map(|m| Figure { value: m, ci: w.mean_ci().map(|c| c.1) });
        let rate = |k: usize| {
            let (p, ci) = wilson(k, n).unwrap_or((f64::NAN, Interval { lo: 0.0, hi: 1.0 }));
            Figure { value: p, ci: Some(ci) }
        };
        let depth_rate = rate(self.depth.count());
        let false_peak_rate = rate(self.false_peaks);
        let (lag_m, bias) = (mean(&self.lag), mean(&self.depth));
        // A symmetric limit |x| ≤ a on a mean.
        let within = |f: Option<Figure>, w: &Welford, a: f64| match (f, f.and_then(|f| f.ci), w.sd()) {
            (Some(f), Some(ci), Some(sd)) => {
                if ci.within(-a, a) {
                    Standing::Meets
                } else if ci.outside(-a, a) {
                    Standing::Fails
                } else {
                    Standing::Unsure(trials_to_clear_mean(f.value, sd, a.copysign(f.value), w.count()).map(|k| k * n / w.count()))
                }
            }
            _ => Standing::Unsure(None),
        };
        // A rate at most (upper) or at least (lower) the limit.
        let rate_standing = |f: Figure, limit: f64, upper: bool| {
            let ci = f.ci.unwrap_or(Interval { lo: 0.0, hi: 1.0 });
            let (good, bad) = if upper { (ci.hi <= limit, ci.lo > limit) } else { (ci.lo >= limit, ci.hi < limit) };
            if good {
                Standing::Meets
            } else if bad {
                Standing::Fails
            } else {
                Standing::Unsure(trials_to_clear_rate(f.value, limit, n))
            }
        };
        let lag_standing = if self.lag.count() == 0 { Standing::Fails } else { within(lag_m, &self.lag, max_lag_m) };
        let found = rate_standing(depth_rate, MIN_DEPTH_RATE, false);
        let bias_standing = if found == Standing::Fails { Standing::Fails } else { within(bias, &self.depth, MAX_DEPTH_BIAS_PCT) };
        SweepRow {
            bandwidth_hz,
            trials: n,
            with_depth: self.depth.count(),
            depth_rate,
            depth_bias_pct: bias,
            depth_scatter_pct: self.depth.sd_ci().map(|(s, ci)| Figure { value: s, ci: Some(ci) }),
            settle_s: self.settle_s.unwrap_or(f64::NAN),
            lag_m,
            false_peak_rate,
            standing: [lag_standing, rate_standing(false_peak_rate, MAX_FALSE_PEAK_RATE, true), found, bias_standing],
        }
    }
}

/// What the sweep is asked.
#[derive(Clone, Debug)]
pub struct SweepSpec<'a> {
    /// Bandwidths to try, Hz.
    pub bandwidths: &'a [f64],
    /// Trials (noise seeds) per bandwidth.
    pub trials: usize,
    /// Seed the trials' noise seeds come from.
    pub seed: u64,
    /// Largest acceptable |peak lag|, m.
    pub max_lag_m: f64,
    /// Draw a progress bar on stderr once the sweep has run [`PROGRESS_AFTER`].
    pub progress: bool,
}

/// Run the sweep.
pub fn sweep(sc: &Scenario, spec: &SweepSpec) -> Result<Vec<SweepRow>> {
    let (lo, hi) = (MIN_BANDWIDTH_HZ as f64, MAX_BANDWIDTH_HZ as f64);
    for b in spec.bandwidths {
        if !(b.is_finite() && (lo..=hi).contains(b)) {
            let (b, lo, hi) = (crate::units::num(*b), crate::units::num(lo), crate::units::num(hi));
            return Err(SimError::Arg { name: "--bandwidths".into(), msg: format!("{b} Hz is not allowed (allowed: {lo} to {hi} Hz)") });
        }
    }
    if !(1..=MAX_TRIALS).contains(&spec.trials) {
        return Err(SimError::Arg { name: "--trials".into(), msg: format!("{} is not allowed (allowed: 1 to {MAX_TRIALS})", spec.trials) });
    }
    if !(spec.max_lag_m.is_finite() && spec.max_lag_m > 0.0) {
        return Err(SimError::Arg { name: "--max-lag-m".into(), msg: format!("{} is not allowed (allowed: above 0)", spec.max_lag_m) });
    }
    let motion = Motion::new(&sc.motion, sc.seed);
    let jobs: Vec<(usize, u64)> =
        (0..spec.bandwidths.len()).flat_map(|i| (0..spec.trials).map(move |t| (i, trial_seed(spec.seed, t)))).collect();
    let pb = ProgressBar::with_draw_target(Some(jobs.len() as u64), ProgressDrawTarget::hidden());
    pb.set_style(
        ProgressStyle::with_template("{bar:40} {pos}/{len} runs {elapsed_precise} (about {eta} left)")
            .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let (start, shown) = (Instant::now(), AtomicBool::new(false));
    let mut tallies = vec![Tally::default(); spec.bandwidths.len()];
    // Batches of a few trials per thread: parallel within, folded in order.
    let batch = 8 * rayon::current_num_threads().max(1);
    for chunk in jobs.chunks(batch) {
        let done: Vec<Result<Trial>> = chunk
            .par_iter()
            .map(|&(i, seed)| {
                let r = trial(sc, &motion, spec.bandwidths[i], seed);
                if spec.progress && start.elapsed() >= PROGRESS_AFTER && !shown.swap(true, Ordering::Relaxed) {
                    pb.set_draw_target(ProgressDrawTarget::stderr());
                }
                pb.inc(1);
                r
            })
            .collect();
        for (&(i, _), r) in chunk.iter().zip(done) {
            let t = r.map_err(|e| SimError::Arg { name: format!("bandwidth {} Hz", spec.bandwidths[i]), msg: e.to_string() })?;
            tallies[i].add(&t);
        }
    }
    pb.finish_and_clear();
    Ok(tallies.iter().zip(spec.bandwidths).map(|(t, &bw)| t.row(bw, spec.max_lag_m)).collect())
}

/// What the intervals say about the choice of bandwidth.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Recommendation {
    /// This bandwidth meets every criterion and every narrower one fails.
    Bandwidth(f64),
    /// Every bandwidth fails a criterion.
    None,
    /// The narrowest bandwidth that does not fail (this one) is unsure;
    /// about this many trials per bandwidth would decide (None: too many to say).
    Undecided(f64, Option<usize>),
}

/// The narrowest bandwidth that meets every criterion, when the intervals separate it from the narrower ones.
pub fn recommend(rows: &[SweepRow]) -> Recommendation {
    let mut sorted: Vec<&SweepRow> = rows.iter().collect();
    sorted.sort_by(|a, b| a.bandwidth_hz.total_cmp(&b.bandwidth_hz));
    match sorted.iter().find(|r| r.verdict() != Standing::Fails) {
        None => Recommendation::None,
        Some(r) => match r.verdict() {
            Standing::Unsure(n) => Recommendation::Undecided(r.bandwidth_hz, n),
            _ => Recommendation::Bandwidth(r.bandwidth_hz),
        },
    }
}
