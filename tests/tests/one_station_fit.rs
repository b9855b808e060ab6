//! The 6-coil one-station fix: noise-free recovery and errors against the
//! Cramér–Rao bound of the model (Kay, Fundamentals of Statistical Signal
//! Processing vol. 1, 1993, ch. 3: cov ≥ (JᵀWJ)⁻¹).

use undertone_dsp::field::vec3::from_yaw_pitch;
use undertone_dsp::field::Source;
use undertone_dsp::locate::fit::fit;
use undertone_dsp::Head;
use undertone_tests::Noise;

const K: f32 = 1e-7; // μ0m/4π for m = 1 A·m², readings in tesla

fn readings(x: f32, y: f32, h: f32, yaw: f32, pitch: f32) -> [f32; 6] {
    let m = from_yaw_pitch(yaw, pitch);
    let src = Source::Dipole { moment_am2: m, pos_m: [x, y, -h] };
    Head::triads6().readings(&src, [0.0; 3], 0.0)
}

#[test]
fn noise_free_recovers_offsets_depth_yaw_pitch() {
    let head = Head::triads6();
    let cases = [
        (0.0f32, 0.0f32, 1.0f32, 0.0f32, 0.0f32),
        (0.3, -0.2, 1.5, 0.4, 0.1),
        (-0.5, 0.4, 2.5, -0.8, -0.2),
        (0.8, 0.1, 0.8, 1.2, 0.3),
        (0.2, 0.6, 4.0, -0.3, 0.05),
    ];
    for (x, y, h, yaw, pitch) in cases {
        let a = readings(x, y, h, yaw, pitch);
        let sigma = [K * 1e-6; 6];
        let f = fit(&head, &a, &sigma, None);
        assert!(f.converged, "{f:?}");
        let p = f.params;
        let tol = 1e-4 * h.max(1.0);
        assert!((p[0] - x).abs() < tol && (p[1] - y).abs() < tol && (p[2] - h).abs() < tol, "case {:?}: {p:?}", (x, y, h));
        assert!((p[3] - yaw).abs() < 1e-4 && (p[4] - pitch).abs() < 1e-4, "case {:?}: {p:?}", (x, y, h, yaw, pitch));
        // K = μ0m/4π in reading units (tesla here): 1e-7 for m = 1 A·m².
        assert!((p[5].abs() / K - 1.0).abs() < 1e-3, "K {p:?}");
    }
}

#[test]
fn noisy_errors_within_1_5_times_cramer_rao() {
    let head = Head::triads6();
    let (x, y, h, yaw, pitch) = (0.25f32, -0.15f32, 1.5f32, 0.3f32, 0.05f32);
    let clean = readings(x, y, h, yaw, pitch);
    let sd = clean.iter().fold(0.0f32, |m, v| m.max(v.abs())) / 300.0; // ~50 dB on the strongest coil
    let sigma = [sd; 6];
    let bound = fit(&head, &clean, &sigma, None).sigma;
    let mut noise = Noise::new(99, sd as f64);
    let truth = [x, y, h, yaw, pitch];
    let mut sq = [0.0f64; 5];
    let trials = 400;
    for _ in 0..trials {
        let a = clean.map(|v| v + noise.sample() as f32);
        let f = fit(&head, &a, &sigma, None);
        assert!(f.converged);
        for i in 0..5 {
            sq[i] += ((f.params[i] - truth[i]) as f64).powi(2);
        }
    }
    for i in 0..5 {
        let rms = (sq[i] / trials as f64).sqrt();
        println!("fit parameter {i}: rms error {rms:.3e}, Cramér–Rao bound {:.3e}, ratio {:.3}", bound[i], rms / bound[i] as f64);
        assert!(rms <= 1.5 * bound[i] as f64, "param {i}: rms {rms} bound {}", bound[i]);
        assert!(rms >= 0.5 * bound[i] as f64, "param {i}: rms {rms} bound {} (bound not credible)", bound[i]);
    }
}
