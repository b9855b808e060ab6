//! The multi-coil detector against detection theory: noise level, Rayleigh
//! false-alarm rate, the Cramér–Rao bound for amplitude, amplitude and phase of
//! off-bin tones on every coil.

use undertone_dsp::detect::input::InputScale;
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, Detection, Detector, DetectorKind, DetectorSettings, Window};
use undertone_tests::{mean_var, Noise};

fn run<const N: usize>(det: &mut Detector<N>, len: usize, mut frame: impl FnMut(usize) -> [f32; N]) -> Vec<Detection<N>> {
    let mut out = Vec::new();
    for n in 0..len {
        if let Some(d) = det.push(&frame(n)) {
            out.push(d);
        }
    }
    out
}

fn settings(fs: f32, f0: f32, bw: f32, kind: DetectorKind, rate: f32) -> DetectorSettings {
    DetectorSettings { sample_rate_hz: fs, beacon: Beacon::Custom(f0), bandwidth_hz: bw, kind, readout_rate_hz: rate }
}

fn unit<const N: usize>() -> InputScale<N> {
    let mut s = InputScale::unity(24);
    s.full_scale = 1e6;
    s
}

#[test]
fn tone_amplitude_and_phase_on_every_coil_both_kinds() {
    // A non-bin-centred tone A·cos(ωn + φ) on three coils with signs +, −, + and
    // amplitudes 1, 0.5, 0.25: each phasor must be A_c·e^(jφ) (sign as a π phase).
    let fs = 48_000.0;
    let f0 = 512.37;
    let phi = 0.9f64;
    let amps = [1.0f64, -0.5, 0.25];
    for kind in [
        DetectorKind::Block { window: Window::BlackmanHarris4 },
        DetectorKind::Block { window: Window::Hann },
        DetectorKind::LockIn { poles: 2 },
        DetectorKind::LockIn { poles: 4 },
    ] {
        let s = settings(fs, f0, 4.0, kind, 20.0);
        let mut det = Detector::<3>::new(&s, unit()).unwrap();
        let w = 2.0 * std::f64::consts::PI * f0 as f64 / fs as f64;
        let outs = run(&mut det, 96_000, |n| {
            let c = (w * n as f64 + phi).cos();
            [(amps[0] * c) as f32, (amps[1] * c) as f32, (amps[2] * c) as f32]
        });
        let last = outs.last().unwrap();
        assert!(!last.flags.contains(undertone_dsp::Flags::SETTLING));
        for c in 0..3 {
            let p = last.phasors[c];
            let want_re = amps[c] * phi.cos();
            let want_im = amps[c] * phi.sin();
            let err = ((p.re as f64 - want_re).powi(2) + (p.im as f64 - want_im).powi(2)).sqrt();
            assert!(err < 5e-5 * amps[c].abs(), "{kind:?} coil {c}: {p:?} want ({want_re}, {want_im})");
        }
    }
}

fn noise_component_variance(kind: DetectorKind, bw: f32, rate: f32, seed: u64) -> (f64, f64, f32) {
    let fs = 8_000.0;
    let s = settings(fs, 512.0, bw, kind, rate);
    let mut det = Detector::<1>::new(&s, unit()).unwrap();
    let mut noise = Noise::new(seed, 1.0);
    let outs = run(&mut det, 2_000_000, |_| [noise.sample() as f32]);
    let settle = det.info().settle_99_s as f64;
    let re: Vec<f64> = outs.iter().filter(|d| d.t_s > settle).map(|d| d.phasors[0].re as f64).collect();
    let (_, v) = mean_var(&re);
    let probe_sigma = outs.last().unwrap().noise_sigma[0];
    (v, 2.0 * det.info().bandwidth_hz as f64 / fs as f64, probe_sigma)
}

#[test]
fn noise_variance_is_two_sigma_squared_b_over_fs() {
    // White noise of variance σw² through a detector of noise bandwidth B leaves each real
    // component of the phasor with variance 2σw²·B/fs (REFERENCES §6: per-component
    // variance σw²Σw²/2 of a windowed bin, scaled by (2/Σw)²; the lock-in the same by
    // construction of B). The noise probe must report the same σ.
    for kind in [DetectorKind::Block { window: Window::Hann }, DetectorKind::LockIn { poles: 1 }, DetectorKind::LockIn { poles: 4 }] {
        let (v, want, probe) = noise_component_variance(kind, 20.0, 50.0, 3);
        // Readouts overlap, so the sample variance has fewer degrees of freedom than readouts: 8 %.
        assert!((v / want - 1.0).abs() < 0.08, "{kind:?}: variance {v} want {want}");
        assert!(((probe as f64).powi(2) / want - 1.0).abs() < 0.25, "{kind:?}: probe σ² {} want {want}", probe * probe);
    }
}

#[test]
fn noise_only_magnitude_is_rayleigh() {
    // Noise only: |P| is Rayleigh, P_fa(T) = exp(−T²/2σ²) (Rice, Bell Syst. Tech. J. 1944–45;
    // Kay, Fundamentals of Statistical Signal Processing vol. II, 1998 — section from memory).
    // Independent readouts: rectangular window, block length = hop (no overlap).
    let fs = 4_000.0;
    let s = settings(fs, 512.0, 50.0, DetectorKind::Block { window: Window::Rectangular }, 50.0);
    let mut det = Detector::<1>::new(&s, unit()).unwrap();
    assert_eq!(det.info().block_len, 80);
    let mut noise = Noise::new(42, 1.0);
    let outs = run(&mut det, 80 * 40_000, |_| [noise.sample() as f32]);
    let n = outs.len() as f64;
    let sigma = (2.0 * 50.0 / fs as f64).sqrt(); // per-component σ from 2σw²B/fs
                                                 // T/σ for P_fa = 1e-2 and 1e-3 (REFERENCES §6).
    for (t_over_sigma, pfa) in [(3.034854, 1e-2), (3.716922, 1e-3)] {
        let k = outs.iter().filter(|d| d.phasors[0].magnitude() as f64 > t_over_sigma * sigma).count() as f64;
        let expect = n * pfa;
        let sd = (n * pfa * (1.0 - pfa)).sqrt();
        assert!((k - expect).abs() < 4.0 * sd, "P_fa {pfa}: {k} exceedances of {n}, expected {expect} ± {sd}");
    }
    // Mean of a Rayleigh magnitude: 1.253314σ (REFERENCES §6).
    let mean = outs.iter().map(|d| d.phasors[0].magnitude() as f64).sum::<f64>() / n;
    assert!((mean / sigma / 1.253314 - 1.0).abs() < 0.01, "mean {}", mean / sigma);
}

#[test]
fn amplitude_variance_reaches_cramer_rao_bound() {
    // x[n] = A·cos(2πf0n + φ) + w[n], known f0: var(Â) ≥ 2σ²/N (Rife & Boorstyn, IEEE Trans.
    // Inf. Theory IT-20(5), 1974; Kay vol. I, 1993, Example 3.14 — number from memory).
    // A rectangular block of N samples is the efficient estimator: within 10 %.
    let fs = 4_000.0;
    let s = settings(fs, 500.0, 50.0, DetectorKind::Block { window: Window::Rectangular }, 50.0);
    let mut det = Detector::<1>::new(&s, unit()).unwrap();
    let len = det.info().block_len as usize;
    let a = 1.0f64;
    let sigma = 0.5f64;
    let mut noise = Noise::new(9, sigma);
    let w = 2.0 * std::f64::consts::PI * 500.0 / fs as f64;
    let outs = run(&mut det, len * 4000, |n| [((a * (w * n as f64 + 0.4).cos()) + noise.sample()) as f32]);
    let amps: Vec<f64> = outs.iter().map(|d| d.phasors[0].magnitude() as f64).collect();
    let (m, v) = mean_var(&amps);
    let crb = 2.0 * sigma * sigma / len as f64;
    assert!((v / crb - 1.0).abs() < 0.1, "var {v} CRB {crb} ratio {}", v / crb);
    assert!((m - a).abs() < 0.01, "mean amplitude {m}");
}

#[test]
fn noise_probe_is_not_fooled_by_strong_mains() {
    // Mains 80 dB above the noise in the detection bandwidth at 50 Hz, harmonics falling by 0.75 each
    // (as in the deep-lateral example; the 10th, next to 512 Hz, still 43 dB up), up to 3 kHz: the
    // noise σ the probe reports stays the white noise's 2σw²B/fs (within 30 %), because the probe
    // sits where the harmonics, folded by the decimation, leak least.
    let fs = 48_000.0f32;
    for bw in [1.0f32, 2.4] {
        let mut s = DetectorSettings::new(fs, Beacon::Hz512);
        s.bandwidth_hz = bw;
        let mut det = Detector::<1>::new(&s, unit()).unwrap();
        let b = det.info().bandwidth_hz as f64;
        let sigma_w = 1.0;
        let sigma_c = (2.0 * sigma_w * sigma_w * b / fs as f64).sqrt();
        let amp = 1.0e4 * sigma_c;
        let mut noise = Noise::new(8, sigma_w);
        let mut last = None;
        for n in 0..(fs as usize * 12) {
            let t = n as f64 / fs as f64;
            let mut v = noise.sample();
            for h in 1..=60 {
                v += amp * 0.75f64.powi(h - 1) * (2.0 * std::f64::consts::PI * 50.0 * h as f64 * t + 0.7 * h as f64).cos();
            }
            if let Some(d) = det.push(&[v as f32]) {
                last = Some(d);
            }
        }
        let got = last.unwrap().noise_sigma[0] as f64;
        assert!((got / sigma_c - 1.0).abs() < 0.3, "bw {bw}: probe σ {got} want {sigma_c} (probe at {} Hz)", det.info().probe_hz);
    }
}
