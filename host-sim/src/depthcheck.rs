//! `depthcheck`: every depth method over a grid of true depth, offset from the
//! point over the sonde, sonde pitch and coil gain mismatch, noise-free and
//! noisy, so a builder knows each method's limits before a field trial.
//!
//! The coil readings come from this crate's f64 physics (Griffiths eq. 5.89),
//! not from the DSP crate's field code; each grid point is read by the
//! receiver's own `locate` (standing still, so the peak gate sees a steady
//! strength). Null-span depths use the nulls of the horizontal field along the
//! walk, found by bisection on the same physics, with the null positions
//! rounded as a person marking the ground would (noisy case: 2 cm σ).

use crate::error::Result;
use crate::physics::{axis, dipole, dot};
use crate::scenario::HeadKind;
use crate::synth::HeadGeom;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;
use serde::Serialize;
use undertone_dsp::locate::calibration::Calibration;
use undertone_dsp::locate::depth::null_span_depth;
use undertone_dsp::Head;

/// True depths of the grid, m.
pub const DEPTHS_M: [f64; 10] = [0.3, 0.5, 0.75, 1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0];
/// Pitches, degrees.
pub const PITCHES_DEG: [f64; 4] = [0.0, 10.0, 20.0, 30.0];
/// Upper-coil gain mismatch.
pub const MISMATCH: [f64; 3] = [0.0, 0.025, 0.05];
/// Offsets (ahead, left) as fractions of the depth.
pub const OFFSETS: [(f64, f64); 3] = [(0.0, 0.0), (0.05, 0.0), (0.0, 0.1)];
/// Methods.
pub const METHODS: [&str; 4] = ["gradient", "null span", "known moment", "6-coil fit"];
/// SNR of the noisy case accepted, dB.
pub const SNR_RANGE_DB: (f64, f64) = (10.0, 120.0);
/// Error limit marked in the report, %.
pub const LIMIT_PCT: f64 = 5.0;

/// One grid point and method.
#[derive(Clone, Debug, Serialize)]
pub struct Case {
    /// Method.
    pub method: &'static str,
    /// True depth, m.
    pub depth_m: f64,
    /// Offset ahead / h.
    pub ahead: f64,
    /// Offset left / h.
    pub left: f64,
    /// Pitch, degrees.
    pub pitch_deg: f64,
    /// Upper-coil gain mismatch.
    pub mismatch: f64,
    /// Noisy case.
    pub noisy: bool,
    /// Error, % (None: withheld by the receiver).
    pub error_pct: Option<f64>,
}

fn readings(geom: &HeadGeom, h: f64, ahead: f64, left: f64, pitch: f64, mismatch: f64) -> Vec<f64> {
    // Sonde axis along x (the handle), pitched; the receiver at the origin.
    let m = axis(0.0, pitch.to_radians());
    let src = [ahead, left, -h];
    geom.pos
        .iter()
        .zip(&geom.axis)
        .enumerate()
        .map(|(i, (p, a))| {
            // Readings in nT for a 1 A·m² sonde.
            let g = if p[2] > 0.0 && i > 0 { 1.0 + mismatch } else { 1.0 };
            dot(dipole(m, src, *p), *a) * 1e9 * g
        })
        .collect()
}

/// The depth each method gives from readings `r` when the receiver judges itself
/// over the sonde: the offsets it then assumes are zero with the over tolerance's
/// share of uncertainty (0.05 of the depth, one sigma), the coils' gain tolerance
/// is the locator's default. Noisy case: complex Gaussian noise of σ per component
/// on every coil, averaged over the readouts a person standing still collects (24).
fn locate<const N: usize>(
    head: Head<N>,
    r: &[f64],
    snr_db: Option<f64>,
    cal: Calibration,
    rng: &mut ChaCha8Rng,
) -> (Option<f64>, Option<f64>, Option<f64>) {
    use undertone_dsp::locate::depth::{gradient_depth, known_moment_depth, CoilPair, Offsets, RatioOf};
    use undertone_dsp::locate::fit::{fit_from, LateralPrior};
    let settings = undertone_dsp::LocatorSettings::default();
    let peak = r.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let sigma = snr_db.map(|s| peak / 10f64.powf(s / 20.0)).unwrap_or(peak * 1e-6);
    // Standing still, 24 readouts averaged: the noise on the mean falls by √24.
    let mut a = [0f32; N];
    for c in 0..N {
        let n: f64 = if snr_db.is_some() { StandardNormal.sample(rng) } else { 0.0 };
        a[c] = (r[c] + sigma * n / 24f64.sqrt()) as f32;
    }
    let sig = (sigma / 24f64.sqrt()) as f32;
    let at = Offsets { u: 0.0, sigma_u: 0.05, eta: 0.0, sigma_eta: 0.05 };
    let roles = head.roles;
    let get = |i: Option<u8>| i.map(|k| a[k as usize]).unwrap_or(0.0);
    let lo = [get(roles.lower[0]), get(roles.lower[1]), get(roles.lower[2])];
    let up = [get(roles.upper[0]), get(roles.upper[1]), get(roles.upper[2])];
    let norm = |v: [f32; 3]| (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    let triads = roles.upper.iter().all(|x| x.is_some());
    let (of, a_lo, a_up) = if triads { (RatioOf::Total, norm(lo), norm(up)) } else { (RatioOf::Along, lo[0].abs(), up[0].abs()) };
    let sp = head.spacing_m().unwrap_or(0.4);
    let v = |e: undertone_dsp::locate::depth::DepthEstimate| e.ok().map(|d| d.depth_m as f64);
    let grad = gradient_depth(
        settings.model,
        of,
        CoilPair { low: a_lo, up: a_up, sigma_low: sig, sigma_up: sig, spacing_m: sp },
        settings.gain_tolerance,
        at,
    );
    let known = known_moment_depth(settings.model, norm(lo), sig, cal.strength, cal.strength_sigma, at);
    let fit = if N >= 6 {
        let f =
            fit_from(&head, &a, &[sig.max(1e-30); N], None, None, Some(LateralPrior { left_over_depth: 0.0, sigma: 0.05 }), f32::INFINITY);
        f.converged.then_some(f.depth_m.value as f64)
    } else {
        None
    };
    (v(grad), v(known), fit)
}

/// Null positions along x of a pitched dipole at depth h (receiver at height 0): bisection on Bx.
fn nulls(h: f64, pitch: f64) -> Option<(f64, f64)> {
    let m = axis(0.0, pitch.to_radians());
    let bx = |x: f64| dipole(m, [0.0, 0.0, -h], [x, 0.0, 0.0])[0];
    let root = |mut a: f64, mut b: f64| -> Option<f64> {
        let (mut fa, fb) = (bx(a), bx(b));
        if fa * fb > 0.0 {
            return None;
        }
        for _ in 0..100 {
            let c = 0.5 * (a + b);
            let fc = bx(c);
            if fa * fc <= 0.0 {
                b = c;
            } else {
                a = c;
                fa = fc;
            }
        }
        Some(0.5 * (a + b))
    };
    // The main peak is where |Bx| is largest near x = 0.
    let mut xp = 0.0;
    let mut best = 0.0;
    for k in -200..=200 {
        let x = k as f64 * h / 200.0;
        if bx(x).abs() > best {
            best = bx(x).abs();
            xp = x;
        }
    }
    // Distances from the peak, as walked.
    let fore = root(xp, xp + 1.2 * h)?;
    let aft = root(xp - 1.2 * h, xp)?;
    Some((fore - xp, xp - aft))
}

/// Run the grid. `snr_db` is the SNR of the strongest coil in the noisy case.
pub fn run(head: HeadKind, snr_db: f64) -> Result<Vec<Case>> {
    if !(snr_db.is_finite() && (SNR_RANGE_DB.0..=SNR_RANGE_DB.1).contains(&snr_db)) {
        let (lo, hi) = SNR_RANGE_DB;
        return Err(crate::error::SimError::Arg {
            name: "--snr-db".into(),
            msg: format!("{snr_db} dB is not allowed (allowed: {lo} to {hi} dB)"),
        });
    }
    let g4 = HeadGeom::from_head(&Head::reference4());
    let g6 = HeadGeom::from_head(&Head::triads6());
    let mut points = Vec::new();
    for &h in &DEPTHS_M {
        for &(a, l) in &OFFSETS {
            for &p in &PITCHES_DEG {
                for &mm in &MISMATCH {
                    for noisy in [false, true] {
                        points.push((h, a, l, p, mm, noisy));
                    }
                }
            }
        }
    }
    let cases: Vec<Vec<Case>> = points
        .par_iter()
        .enumerate()
        .map(|(i, &(h, a, l, p, mm, noisy))| {
            let mut rng = ChaCha8Rng::seed_from_u64(i as u64);
            let snr = noisy.then_some(snr_db);
            // Strength calibration: level sonde, directly below (K = μ0m/4π = 100 nT·m³ for 1 A·m²).
            let cal = Calibration { upper_gain: 1.0, strength: 100.0, strength_sigma: 0.0 };
            let (grad, known, fit) = match head {
                HeadKind::Reference4 => {
                    let (g, k, _) = locate(Head::reference4(), &readings(&g4, h, a * h, l * h, p, mm), snr, cal, &mut rng);
                    (g, k, None)
                }
                HeadKind::Triads6 => {
                    let r6 = readings(&g6, h, a * h, l * h, p, mm);
                    let (g, k, _) = locate(Head::triads6(), &r6, snr, cal, &mut rng);
                    let (_, _, f) = locate(Head::triads6(), &r6, snr, Calibration::default(), &mut rng);
                    (g, k, f)
                }
            };
            let ns = nulls(h, p).map(|(f, b)| {
                let (ef, eb) = if noisy {
                    let a: f64 = StandardNormal.sample(&mut rng);
                    let b: f64 = StandardNormal.sample(&mut rng);
                    (0.02 * a, 0.02 * b)
                } else {
                    (0.0, 0.0)
                };
                let fix = null_span_depth((f + ef).max(1e-3) as f32, (b + eb).max(1e-3) as f32, 0.02);
                fix.depth.ok().map(|d| d.depth_m as f64)
            });
            let mk = |method, est: Option<f64>| Case {
                method,
                depth_m: h,
                ahead: a,
                left: l,
                pitch_deg: p,
                mismatch: mm,
                noisy,
                error_pct: est.map(|e| 100.0 * (e - h) / h),
            };
            let mut v = vec![mk("gradient", grad), mk("known moment", known)];
            if head == HeadKind::Triads6 {
                v.push(mk("6-coil fit", fit));
            }
            // The null span is walked along the axis: one case per depth/pitch/noise (no offset or mismatch).
            if a == 0.0 && l == 0.0 && mm == 0.0 {
                v.push(mk("null span", ns.flatten()));
            }
            v
        })
        .collect();
    Ok(cases.into_iter().flatten().collect())
}

/// One method at one depth: worst |error| noise-free, RMS error noisy (%), withheld and total grid points.
pub type MethodCell = (Option<f64>, Option<f64>, usize, usize);

/// Worst |error| (noise-free) and RMS error (noisy) per method and depth.
pub fn table(cases: &[Case]) -> Vec<(f64, Vec<MethodCell>)> {
    DEPTHS_M
        .iter()
        .map(|&h| {
            let per = METHODS
                .iter()
                .map(|&m| {
                    let sel = |noisy: bool| cases.iter().filter(move |c| c.method == m && c.depth_m == h && c.noisy == noisy);
                    let worst = sel(false)
                        .filter_map(|c| c.error_pct)
                        .map(f64::abs)
                        .fold(None, |a: Option<f64>, b| Some(a.map_or(b, |a| a.max(b))));
                    let noisy: Vec<f64> = sel(true).filter_map(|c| c.error_pct).collect();
                    let rms = (!noisy.is_empty()).then(|| (noisy.iter().map(|e| e * e).sum::<f64>() / noisy.len() as f64).sqrt());
                    let total = sel(false).count();
                    let withheld = sel(false).filter(|c| c.error_pct.is_none()).count();
                    (worst, rms, withheld, total)
                })
                .collect();
            (h, per)
        })
        .collect()
}
