//! `sweep`: Monte Carlo over noise seeds for each detection bandwidth.
//!
//! For each bandwidth and trial (a fresh noise seed) the scenario is run and
//! scored:
//! * depth bias and scatter: the median valid gradient (or fit) depth of each
//!   trial against the truth; bias is the mean error over trials, scatter their
//!   standard deviation;
//! * settling: the detector's 99 % step time;
//! * peak lag: on the first walk, where the receiver *is* when its strongest
//!   readout is shown (latest sample, not the data's centre), minus the point over
//!   the sonde, along the walking direction (positive = past it);
//! * false peaks: the fraction of trials with a local maximum of strength (over
//!   ±5 readouts) above 30 % of the main peak beyond the nulls (|x| > h/√2 from
//!   the point over the sonde): the secondary lobes of a level dipole stay at
//!   20 %, so such a peak is made by noise or interference.
//!
//! The recommendation is the narrowest bandwidth whose mean |lag| stays within
//! the stated limit, with no more than 10 % of trials showing a false peak, a
//! depth in at least half of the trials and the depth bias within ±3 %. Trials run in parallel on all cores (rayon).

use crate::error::{Result, SimError};
use crate::motion::segment_duration;
use crate::run::{simulate, Row};
use crate::scenario::{MotionSpec, Scenario};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use serde::Serialize;

/// Results for one bandwidth.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SweepRow {
    /// Detection bandwidth, Hz.
    pub bandwidth_hz: f64,
    /// Trials run.
    pub trials: usize,
    /// Trials with a valid depth.
    pub with_depth: usize,
    /// Mean depth error, %.
    pub depth_bias_pct: Option<f64>,
    /// Standard deviation of the depth error, %.
    pub depth_scatter_pct: Option<f64>,
    /// 99 % settling time, s.
    pub settle_s: f64,
    /// Mean peak lag, m.
    pub lag_m: Option<f64>,
    /// Fraction of trials with a false peak.
    pub false_peak_rate: f64,
}

struct Trial {
    depth_err: Option<f64>,
    lag: Option<f64>,
    false_peak: bool,
    settle: f64,
}

fn trial(sc: &Scenario, bw: f64, seed: u64) -> Result<Trial> {
    let run = simulate(sc, Some(seed), Some(bw as f32))?;
    let settle = run.info.settle_99_s as f64;
    let rows: Vec<&Row> = run.rows.iter().filter(|r| r.t_s > settle).collect();
    let mut est: Vec<(f64, f64)> =
        rows.iter().filter_map(|r| r.gradient.depth_m.or(r.fit.depth_m).zip(r.truth.map(|t| t.depth_m))).collect();
    est.sort_by(|a, b| a.0.partial_cmp(&b.0).unwrap_or(std::cmp::Ordering::Equal));
    let depth_err = (!est.is_empty()).then(|| {
        let (e, t) = est[est.len() / 2];
        100.0 * (e - t) / t
    });
    // First walk.
    let mut t0 = 0.0;
    let mut lag = None;
    let mut false_peak = false;
    for m in &sc.motion {
        let d = segment_duration(m);
        if let MotionSpec::Walk { from, to, .. } = m {
            let seg: Vec<&&Row> = rows.iter().filter(|r| r.t_latest_s >= t0 && r.t_latest_s < t0 + d).collect();
            if let Some(best) = seg.iter().max_by(|a, b| a.strength.partial_cmp(&b.strength).unwrap_or(std::cmp::Ordering::Equal)) {
                let (dx, dy) = (to[0] - from[0], to[1] - from[1]);
                let l = (dx * dx + dy * dy).sqrt();
                let (ux, uy) = (dx / l, dy / l);
                let synth = crate::synth::Synth::new(sc, Some(seed));
                let now = synth.truth(best.t_latest_s);
                let s_now = (now.pose.x_m - from[0]) * ux + (now.pose.y_m - from[1]) * uy;
                let s_sonde = (now.sonde_m[0] - from[0]) * ux + (now.sonde_m[1] - from[1]) * uy;
                lag = Some(s_now - s_sonde);
                let depth = now.depth_m;
                let peak = best.strength;
                let pos = |r: &Row| r.truth.map(|t| (t.x_m - from[0]) * ux + (t.y_m - from[1]) * uy - s_sonde).unwrap_or(0.0);
                for w in seg.windows(11) {
                    let mid = w[5].strength;
                    let is_max = w.iter().enumerate().all(|(k, r)| k == 5 || r.strength < mid);
                    if is_max && mid > 0.3 * peak && pos(w[5]).abs() > depth / std::f64::consts::SQRT_2 {
                        false_peak = true;
                    }
                }
            }
            break;
        }
        t0 += d;
    }
    Ok(Trial { depth_err, lag, false_peak, settle })
}

/// Run the sweep.
pub fn sweep(sc: &Scenario, bandwidths: &[f64], trials: usize, progress: bool) -> Result<Vec<SweepRow>> {
    for b in bandwidths {
        if !(b.is_finite() && *b >= 0.05 && *b <= 50.0) {
            return Err(SimError::Arg { name: "--bandwidths".into(), msg: format!("{b} Hz is not allowed (allowed 0.05 to 50 Hz)") });
        }
    }
    let jobs: Vec<(usize, u64)> = (0..bandwidths.len()).flat_map(|i| (0..trials).map(move |t| (i, 1000 + t as u64))).collect();
    let pb = if progress { ProgressBar::new(jobs.len() as u64) } else { ProgressBar::hidden() };
    pb.set_style(
        ProgressStyle::with_template("{bar:40} {pos}/{len} runs {elapsed_precise}").unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let results: Vec<(usize, Result<Trial>)> = jobs
        .par_iter()
        .map(|&(i, seed)| {
            let r = trial(sc, bandwidths[i], seed);
            pb.inc(1);
            (i, r)
        })
        .collect();
    pb.finish_and_clear();
    let mut out = Vec::new();
    for (i, &bw) in bandwidths.iter().enumerate() {
        let mut ts = Vec::new();
        for (j, r) in results.iter() {
            if *j == i {
                match r {
                    Ok(t) => ts.push(t),
                    Err(e) => return Err(SimError::Arg { name: format!("bandwidth {bw} Hz"), msg: e.to_string() }),
                }
            }
        }
        let errs: Vec<f64> = ts.iter().filter_map(|t| t.depth_err).collect();
        let lags: Vec<f64> = ts.iter().filter_map(|t| t.lag).collect();
        let mean = |v: &[f64]| (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64);
        let sd = |v: &[f64]| {
            (v.len() > 1).then(|| {
                let m = v.iter().sum::<f64>() / v.len() as f64;
                (v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (v.len() - 1) as f64).sqrt()
            })
        };
        out.push(SweepRow {
            bandwidth_hz: bw,
            trials: ts.len(),
            with_depth: errs.len(),
            depth_bias_pct: mean(&errs),
            depth_scatter_pct: sd(&errs),
            settle_s: ts.first().map(|t| t.settle).unwrap_or(f64::NAN),
            lag_m: mean(&lags),
            false_peak_rate: ts.iter().filter(|t| t.false_peak).count() as f64 / ts.len().max(1) as f64,
        });
    }
    Ok(out)
}

/// Largest false-peak rate a recommended bandwidth may show.
pub const MAX_FALSE_PEAK_RATE: f64 = 0.1;
/// Largest |depth bias| a recommended bandwidth may show, %.
pub const MAX_DEPTH_BIAS_PCT: f64 = 3.0;

/// The narrowest bandwidth whose |lag| stays within `max_lag_m`, with few false
/// peaks and a small depth bias.
pub fn recommend(rows: &[SweepRow], max_lag_m: f64) -> Option<f64> {
    rows.iter()
        .filter(|r| r.lag_m.map(|l| l.abs() <= max_lag_m).unwrap_or(false))
        .filter(|r| r.false_peak_rate <= MAX_FALSE_PEAK_RATE)
        .filter(|r| r.with_depth * 2 >= r.trials && r.depth_bias_pct.map(|b| b.abs() <= MAX_DEPTH_BIAS_PCT).unwrap_or(false))
        .map(|r| r.bandwidth_hz)
        .fold(None, |m: Option<f64>, b| Some(m.map_or(b, |m| m.min(b))))
}
