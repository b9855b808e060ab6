//! The calibration a scenario asks for before the job (`[calibration]`), made as a person
//! would make it and computed by the receiver's own `locate::calibration`.
//!
//! Set-up (the receiver's calibration model): the sonde level on the ground, the head still
//! and in line with it straight above, its lower coil centre at the stated distance `d`. The
//! simulator synthesises that with the scenario's receiver, noise and mains (no ground between:
//! the path is air), the receiver reads it, and the signed lower and upper along readings are
//! averaged over the last `seconds`. Their σ is a readout's σ over `√(T·B)` (T the seconds, B
//! the detector's noise bandwidth: about that many independent readouts). The distance the
//! person enters is `d` plus one draw of `distance_sigma_m` from the scenario's seed. The gain
//! tolerance left is [`upper_gain_sigma`]: the readings' noise and the distance's σ.

use crate::error::{Result, SimError};
use crate::motion::Pose;
use crate::run::receiver_settings;
use crate::scenario::{MotionSpec, Scenario};
use crate::synth::Synth;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use undertone_dsp::locate::calibration::{calibrate, upper_gain_sigma, CalInput, Calibration};
use undertone_dsp::{FieldModel, Flags, Head, Receiver, ReceiverSettings};

/// Seconds let go by for the detector to settle before the readings are averaged.
const SETTLE_S: f64 = 1.5;

/// The calibration and the gain tolerance it leaves (relative σ), or `None` when the
/// scenario asks for none.
pub fn job_calibration<const N: usize>(sc: &Scenario, head: Head<N>) -> Result<Option<(Calibration, f32)>> {
    let Some(c) = &sc.calibration else { return Ok(None) };
    let mut cal = sc.clone();
    cal.calibration = None;
    cal.sonde.x_m = 0.0;
    cal.sonde.y_m = 0.0;
    cal.sonde.yaw_deg = 0.0;
    cal.sonde.pitch_deg = 0.0;
    cal.sonde.push_speed_m_s = 0.0;
    cal.sonde.depth_m = 0.0;
    cal.receiver.height_m = c.distance_m;
    cal.soil.conductivity_s_per_m = 0.0;
    cal.interferer.clear();
    cal.line = None;
    let pose = Pose { x_m: 0.0, y_m: 0.0, heading_rad: 0.0 };
    cal.motion = vec![MotionSpec::Still { at: [0.0, 0.0], heading_deg: 0.0, duration_s: SETTLE_S + c.seconds }];
    let context = || format!("scenario '{}', its calibration", sc.name);
    let mut rx = Receiver::new(receiver_settings(&cal, head, None)).map_err(|err| SimError::Config { context: context(), err })?;
    let mut synth = Synth::new(&cal, Some(sc.seed.wrapping_add(0xCA1)));
    let bandwidth_hz = rx.detector_info().bandwidth_hz as f64;
    let (lo, up) = (head.roles.lower[0], head.roles.upper[0]);
    let (Some(lo), Some(up), Some(spacing_m)) = (lo, up, head.spacing_m()) else {
        return Err(SimError::Parse { path: context(), msg: "the head has no lower and upper along coils to calibrate".into() });
    };
    let (lo, up, z) = (lo as usize, up as usize, head.roles.lower[2].map(|k| k as usize));
    let total = ((SETTLE_S + c.seconds) * synth.fs).round() as usize;
    let mut block = [[0i32; N]; 1024];
    let (mut n, mut sums) = (0.0f64, [0.0f64; 5]);
    let mut done = 0;
    while done < total {
        let len = block.len().min(total - done);
        synth.fill_codes_posed(pose, pose, &mut block[..len]);
        rx.push_codes_block(&block[..len], |r| {
            if r.t_s >= SETTLE_S && !r.flags.contains(Flags::SETTLING) {
                let f = &r.field;
                n += 1.0;
                sums[0] += f.signed[lo] as f64;
                sums[1] += f.signed[up] as f64;
                sums[2] += f.sigma[lo] as f64;
                sums[3] += f.sigma[up] as f64;
                sums[4] += z.map(|k| f.signed[k] as f64).unwrap_or(0.0);
            }
        });
        done += len;
    }
    if n < 1.0 {
        return Err(SimError::Parse { path: context(), msg: "no settled readout in the calibration's seconds".into() });
    }
    let m = sums.map(|s| s / n);
    let independent = (c.seconds * bandwidth_hz).max(1.0).sqrt();
    let mut rng = ChaCha8Rng::seed_from_u64(sc.seed ^ 0xCA1B_4A7E);
    let tape: f64 = StandardNormal.sample(&mut rng);
    let input = CalInput {
        distance_m: (c.distance_m + c.distance_sigma_m * tape) as f32,
        spacing_m,
        a_low: m[0] as f32,
        a_up: m[1] as f32,
        sigma_low: (m[2] / independent) as f32,
        sigma_up: (m[3] / independent) as f32,
        vertical_ratio: (m[4] / m[0]) as f32,
    };
    let result = calibrate(FieldModel::Dipole, &input).map_err(|err| SimError::Config { context: context(), err })?;
    Ok(Some((result, upper_gain_sigma(FieldModel::Dipole, &input, c.distance_sigma_m as f32))))
}

/// What the calibration found, for reports and JSON.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Found {
    /// Distance of the set-up, m.
    pub distance_m: f64,
    /// Multiplier found for the upper along coil.
    pub upper_gain: f32,
    /// Gain tolerance it leaves (one σ, relative).
    pub gain_tolerance: f32,
}

/// [`job_calibration`] with the scenario's own head.
pub fn for_scenario(sc: &Scenario) -> Result<Option<(Calibration, f32)>> {
    match sc.coils() {
        6 => job_calibration(sc, Head::triads6()),
        _ => job_calibration(sc, Head::reference4()),
    }
}

/// The scenario's calibration as reported, if it asks for one.
pub fn found(sc: &Scenario) -> Result<Option<Found>> {
    Ok(for_scenario(sc)?.zip(sc.calibration.as_ref()).map(|((c, s), spec)| Found {
        distance_m: spec.distance_m,
        upper_gain: c.upper_gain,
        gain_tolerance: s,
    }))
}

/// Put a calibration made (if any) into receiver settings: the correction and the tolerance it leaves.
pub fn set<const N: usize>(settings: &mut ReceiverSettings<N>, made: Option<(Calibration, f32)>) {
    if let Some((cal, sigma)) = made {
        settings.locator.calibration = cal;
        settings.locator.gain_tolerance = sigma;
    }
}

/// Make the scenario's calibration (if any) and put it into receiver settings.
pub fn apply<const N: usize>(sc: &Scenario, settings: &mut ReceiverSettings<N>) -> Result<()> {
    set(settings, job_calibration(sc, settings.head)?);
    Ok(())
}
