//! How far from a scenario's sonde the receiver hears it: the SNR of the best
//! coil at a point, and the detection range.
//!
//! Model: each coil's tone amplitude is the projection of the dipole field
//! (Griffiths eq. 5.89; in conducting ground the whole-space field of
//! [`crate::physics::dipole_in_ground`], its magnitude) on its axis; the noise on each real component of a detected phasor is
//! `σ = √(S·B)`, S the one-sided noise power density at the coil (T²/Hz: the
//! field noise, the converter's own noise and the quantisation `q²/12` spread
//! over `fs/2`) and B the detector's noise bandwidth (the lock-in's
//! component variance is `2·σw²·B/fs` for white samples of variance σw²,
//! see `undertone_dsp::detect::lockin`). SNR = amplitude/σ.
//!
//! The detection range is the horizontal distance from the point over the
//! sonde within which the best coil, with the handle turned the best way,
//! reaches 20 dB in every direction (the smallest such distance over 72
//! directions). Mains and interferers are left out: they sit outside the
//! detector's band.

use crate::error::{Result, SimError};
use crate::motion::Pose;
use crate::physics::{axis, dipole_in_ground, dot, skin_depth_m};
use crate::run::receiver_settings;
use crate::scenario::Scenario;
use crate::synth::HeadGeom;
use undertone_dsp::{Head, Receiver};

/// SNR at which the detection range is drawn, dB.
pub const RANGE_SNR_DB: f64 = 20.0;

/// Noise σ (T) on each real component of a detected phasor, and the detection bandwidth (Hz).
pub fn phasor_noise_t(sc: &Scenario) -> Result<(f64, f64)> {
    let bw = match sc.coils() {
        6 => Receiver::new(receiver_settings(sc, Head::triads6(), None)).map(|r| r.detector_info().bandwidth_hz),
        _ => Receiver::new(receiver_settings(sc, Head::reference4(), None)).map(|r| r.detector_info().bandwidth_hz),
    }
    .map_err(|err| SimError::Config { context: format!("scenario '{}'", sc.name), err })? as f64;
    let r = &sc.receiver;
    let fsc = if r.adc_bits >= 32 { i32::MAX as f64 } else { ((1u64 << (r.adc_bits - 1)) - 1) as f64 };
    let q = r.full_scale_t / fsc;
    let counts = sc.noise.density_counts_per_rthz * q;
    let s = sc.noise.density_t_per_rthz.powi(2) + counts * counts + q * q / 12.0 / (r.sample_rate_hz / 2.0);
    Ok(((s * bw).sqrt(), bw))
}

/// The field (T) of the sonde at the lower coil of a receiver at `(x, y)`, at time 0: the
/// phasor's real and imaginary parts (the ground shifts the phase a little).
fn field_at(sc: &Scenario, x: f64, y: f64) -> ([f64; 3], [f64; 3]) {
    let s = &sc.sonde;
    let ax = axis(s.yaw_deg.to_radians(), s.pitch_deg.to_radians());
    let m = [ax[0] * s.moment_am2, ax[1] * s.moment_am2, ax[2] * s.moment_am2];
    let src = [s.x_m, s.y_m, -s.depth_m];
    let p = [x, y, sc.receiver.height_m];
    let delta = skin_depth_m(s.freq_hz, sc.soil.conductivity_s_per_m);
    dipole_in_ground(m, src, p, delta)
}

/// SNR (dB) of the best coil of the scenario's head at `pose`.
pub fn best_coil_snr_db(sc: &Scenario, pose: Pose) -> Result<f64> {
    let (sigma, _) = phasor_noise_t(sc)?;
    let head = HeadGeom::named(&sc.receiver.head);
    let (s, c) = pose.heading_rad.sin_cos();
    let mut best = 0.0f64;
    for (pos, a) in head.pos.iter().zip(&head.axis) {
        let p = [pose.x_m + c * pos[0] - s * pos[1], pose.y_m + s * pos[0] + c * pos[1]];
        let mut b = field_at(sc, p[0], p[1]);
        // The upper coils sit higher: scale by the height difference through the field itself.
        if pos[2] != 0.0 {
            let mut sc2 = sc.clone();
            sc2.receiver.height_m += pos[2];
            b = field_at(&sc2, p[0], p[1]);
        }
        let ax = [c * a[0] - s * a[1], s * a[0] + c * a[1], a[2]];
        best = best.max(dot(b.0, ax).hypot(dot(b.1, ax)));
    }
    Ok(20.0 * (best / sigma).max(1e-12).log10())
}

/// The detection range of the scenario (see the module docs), m.
pub fn detection_range_m(sc: &Scenario) -> Result<f64> {
    let (sigma, _) = phasor_noise_t(sc)?;
    let limit = sigma * 10f64.powf(RANGE_SNR_DB / 20.0);
    let heard = |x: f64, y: f64| {
        let (b, i) = field_at(sc, x, y);
        // The handle turned the best way: the horizontal coils take the horizontal field, the vertical one Bz.
        (b[0] * b[0] + b[1] * b[1] + i[0] * i[0] + i[1] * i[1]).sqrt().max(b[2].hypot(i[2])) >= limit
    };
    let (cx, cy) = (sc.sonde.x_m, sc.sonde.y_m);
    let mut range = f64::INFINITY;
    for k in 0..72 {
        let a = k as f64 * std::f64::consts::TAU / 72.0;
        let (ux, uy) = (a.cos(), a.sin());
        // The farthest distance (1 cm steps, up to 100 m) where the sonde is still heard.
        let mut r = 0.0;
        let mut last = 0.0;
        while r <= 100.0 {
            if heard(cx + r * ux, cy + r * uy) {
                last = r;
            }
            r += 0.01;
        }
        range = range.min(last);
    }
    Ok(range)
}
