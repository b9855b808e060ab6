//! The multi-coil detector against detection theory: noise level, Rayleigh
//! false-alarm rate, the Cramér–Rao bound for amplitude, amplitude and phase of
//! off-bin tones on every coil.
//!
//! Tolerances are a number of standard errors of the statistic tested:
//! * a variance estimated from n Gaussian samples has a relative standard error
//!   √(2/n) (the sample variance is σ²χ²_{n−1}/(n−1), and var χ²_k = 2k); for
//!   correlated readouts n becomes n/Σ_k ρ_k², with ρ_k the correlation of readouts
//!   k apart summed over all k (Bartlett, J. Roy. Stat. Soc. Suppl. 8, 1946, from
//!   memory), ρ_k computed here from the detector's own weights for white noise;
//! * a count of rare events from n trials of probability p is binomial, sd √(np(1−p)).

use undertone_dsp::detect::input::InputScale;
use undertone_dsp::detect::lockin::LockIn;
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, Detection, Detector, DetectorKind, DetectorSettings, Window};
use undertone_tests::reference::window_f64;
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
    // amplitudes 1, 0.5, 0.25: each phasor must be A_c·e^(jφ) (sign as a π phase), the
    // detector's definition of a phasor against the shared reference cos(ω0·n). The
    // 2f0 image is below 1e-6 (lockin_response.rs); f32 rounding leaves ~1e-5 (the
    // low-pass sections' dead band, the recurrence's error): allowed 5e-5 of A_c.
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

/// Correlation coefficients ρ_k, k = 0, 1, …, of the real part of the phasors of
/// readouts k apart for white noise in, from the detector's weights: the lock-in's
/// impulse response at the intermediate rate (boxcar sums of white noise are white),
/// sampled every d intermediate samples; a block's window overlapping itself every
/// hop samples (the shared absolute-time reference makes the phasors' covariance
/// real: Σ w[m]·w[m + D]).
fn readout_correlation(s: &DetectorSettings, det: &Detector<1>) -> Vec<f64> {
    let info = det.info();
    let (h, step): (Vec<f64>, usize) = match s.kind {
        DetectorKind::LockIn { poles } => {
            let li = LockIn::new(s.sample_rate_hz, s.beacon.freq_hz(), s.bandwidth_hz, poles, s.readout_rate_hz);
            let a = li.alpha as f64;
            let mut st = [0.0f64; 4];
            let len = (60.0 * li.tau_s as f64 * li.intermediate_rate_hz as f64) as usize + 64;
            let h = (0..len)
                .map(|k| {
                    let mut u = if k == 0 { 1.0 } else { 0.0 };
                    for p in st.iter_mut().take(poles as usize) {
                        *p += a * (u - *p);
                        u = *p;
                    }
                    u
                })
                .collect();
            (h, li.d as usize)
        }
        DetectorKind::Block { window } => {
            let hop = (s.sample_rate_hz / s.readout_rate_hz).round() as usize;
            (window_f64(window, info.block_len as usize), hop)
        }
    };
    let r0: f64 = h.iter().map(|v| v * v).sum();
    (0..)
        .map(|k| k * step)
        .take_while(|&lag| lag < h.len())
        .map(|lag| h.iter().zip(&h[lag..]).map(|(a, b)| a * b).sum::<f64>() / r0)
        .collect()
}

/// Σ over all k (negative too) of ρ_k²: n/this is the effective number of readouts
/// for a variance.
fn sum_rho2(rho: &[f64]) -> f64 {
    rho[0] * rho[0] + 2.0 * rho[1..].iter().map(|r| r * r).sum::<f64>()
}

#[test]
fn noise_variance_is_two_sigma_squared_b_over_fs() {
    // White noise of variance σw² through a detector of noise bandwidth B leaves each real
    // component of the phasor with variance 2σw²·B/fs: a windowed bin has per-component
    // variance σw²·Σw²/2 (Harris 1978, §on equivalent noise bandwidth), scaled by (2/Σw)²
    // and with ENBW = L·Σw²/(Σw)² this is 2σw²·ENBW/L; the lock-in's boxcar and low-pass
    // give 2σw²/M · 2B_lp/f_i = 2σw²·B/fs alike. The noise probe must report the same σ.
    // Tolerance: 4 standard errors of the pooled (real and imaginary) variance estimate.
    let fs = 8_000.0;
    for kind in [DetectorKind::Block { window: Window::Hann }, DetectorKind::LockIn { poles: 1 }, DetectorKind::LockIn { poles: 4 }] {
        let s = settings(fs, 512.0, 20.0, kind, 50.0);
        let mut det = Detector::<1>::new(&s, unit()).unwrap();
        let mut noise = Noise::new(3, 1.0);
        let outs = run(&mut det, 2_000_000, |_| [noise.sample() as f32]);
        let want = 2.0 * det.info().bandwidth_hz as f64 / fs as f64;
        let settle = det.info().settle_99_s as f64;
        let used: Vec<&Detection<1>> = outs.iter().filter(|d| d.t_s > settle).collect();
        let (_, v_re) = mean_var(&used.iter().map(|d| d.phasors[0].re as f64).collect::<Vec<_>>());
        let (_, v_im) = mean_var(&used.iter().map(|d| d.phasors[0].im as f64).collect::<Vec<_>>());
        let v = 0.5 * (v_re + v_im);
        let n = used.len() as f64;
        let rho = readout_correlation(&s, &det);
        let se = (sum_rho2(&rho) / n).sqrt(); // √(2Σρ²/n) per component, pooled over two
        assert!((v / want - 1.0).abs() < 4.0 * se, "{kind:?}: variance {v} want {want} (se {se:.4})");
        // The probe's σ², averaged over readouts after its 2 s average has warmed up (five
        // time constants): the same number of effective samples.
        let probe: Vec<f64> = used.iter().filter(|d| d.t_s > settle + 10.0).map(|d| (d.noise_sigma[0] as f64).powi(2)).collect();
        let p = probe.iter().sum::<f64>() / probe.len() as f64;
        let se_p = (sum_rho2(&rho) / probe.len() as f64).sqrt();
        assert!((p / want - 1.0).abs() < 4.0 * se_p, "{kind:?}: probe σ² {p} want {want} (se {se_p:.4})");
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
                                                 // T/σ = √(−2 ln P_fa): 3.034854 for P_fa = 1e-2, 3.716922 for 1e-3 (from P_fa = exp(−T²/2σ²)).
                                                 // Exceedances of n independent readouts: binomial, allowed 4 sd.
    for (t_over_sigma, pfa) in [(3.034854, 1e-2), (3.716922, 1e-3)] {
        let k = outs.iter().filter(|d| d.phasors[0].magnitude() as f64 > t_over_sigma * sigma).count() as f64;
        let expect = n * pfa;
        let sd = (n * pfa * (1.0 - pfa)).sqrt();
        assert!((k - expect).abs() < 4.0 * sd, "P_fa {pfa}: {k} exceedances of {n}, expected {expect} ± {sd}");
    }
    // Mean of a Rayleigh magnitude: σ√(π/2) = 1.253314σ, variance (2 − π/2)σ² (Papoulis,
    // Probability, Random Variables and Stochastic Processes, the Rayleigh density; from
    // memory): the mean of n readouts has a relative standard error √((4 − π)/π)/√n =
    // 0.5227/√n; allowed 4 of them.
    let mean = outs.iter().map(|d| d.phasors[0].magnitude() as f64).sum::<f64>() / n;
    let se = ((4.0 - std::f64::consts::PI) / std::f64::consts::PI).sqrt() / n.sqrt();
    assert!((mean / sigma / 1.253314 - 1.0).abs() < 4.0 * se, "mean {} (se {se:e})", mean / sigma);
}

#[test]
fn amplitude_variance_reaches_cramer_rao_bound() {
    // x[n] = A·cos(2πf0n + φ) + w[n], known f0: var(Â) ≥ 2σ²/N (Rife & Boorstyn, IEEE Trans.
    // Inf. Theory IT-20(5), 1974; Kay vol. I, 1993, Example 3.14 — number from memory).
    // A rectangular block of N samples on a bin-centred tone is efficient at high SNR
    // (the in-phase component of the bin is the maximum-likelihood amplitude). Tolerance:
    // 4 standard errors of a variance estimated from n blocks, √(2/n) (4000 disjoint
    // blocks: 9 %). The mean magnitude of a Rician variable at high SNR is A + σc²/(2A)
    // (Rice, Bell Syst. Tech. J. 24, 1945, from memory), σc² = the CRB here; its standard
    // error √(σc²/n): allowed 4.
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
    let n = amps.len() as f64;
    assert!((v / crb - 1.0).abs() < 4.0 * (2.0 / n).sqrt(), "var {v} CRB {crb} ratio {}", v / crb);
    let mean_want = a + crb / (2.0 * a);
    assert!((m - mean_want).abs() < 4.0 * (crb / n).sqrt(), "mean amplitude {m}, want {mean_want}");
}

#[test]
fn noise_probe_is_not_fooled_by_strong_mains() {
    // Mains 80 dB above the noise in the detection bandwidth at 50 Hz, harmonics falling by 0.75 each
    // (the 10th, next to 512 Hz, still 63 dB up), up to 3 kHz: the mean noise σ² the probe reports
    // stays the white noise's 2σw²B/fs, because the probe sits where the harmonics, folded by the
    // decimation, leak least. Tolerance: 4 standard errors of the mean of σ² over the readouts after
    // the 2 s noise average has warmed up (as in `noise_variance_is_two_sigma_squared_b_over_fs`), 300 s.
    // (At 5 Hz, a bandwidth the detector flags MAINS, harmonics 25 Hz either side of any probe
    // position are only ~56 dB down and the probe reads them: σ² 1.6 times too high, measured.)
    let fs = 48_000.0f32;
    // The mains waveform repeats every 1/50 s = 960 samples.
    let period = (fs / 50.0) as usize;
    for bw in [1.0f32, 2.4] {
        let mut s = DetectorSettings::new(fs, Beacon::Hz512);
        s.bandwidth_hz = bw;
        let mut det = Detector::<1>::new(&s, unit()).unwrap();
        let b = det.info().bandwidth_hz as f64;
        let sigma_w = 1.0;
        let want = 2.0 * sigma_w * sigma_w * b / fs as f64;
        let amp = 1.0e4 * want.sqrt();
        let mains: Vec<f64> = (0..period)
            .map(|n| {
                let t = n as f64 / fs as f64;
                (1..=60).map(|h| amp * 0.75f64.powi(h - 1) * (std::f64::consts::TAU * 50.0 * h as f64 * t + 0.7 * h as f64).cos()).sum()
            })
            .collect();
        let mut noise = Noise::new(8, sigma_w);
        let warm = det.info().settle_99_s as f64 + 10.0;
        let (mut sum, mut n) = (0.0f64, 0.0f64);
        for k in 0..(fs as usize * 300) {
            if let Some(d) = det.push(&[(mains[k % period] + noise.sample()) as f32]) {
                if d.t_s > warm {
                    sum += (d.noise_sigma[0] as f64).powi(2);
                    n += 1.0;
                }
            }
        }
        let got = sum / n;
        let se = (sum_rho2(&readout_correlation(&s, &det)) / n).sqrt();
        assert!(
            (got / want - 1.0).abs() < 4.0 * se,
            "bw {bw}: probe σ² {got:e} want {want:e} (se {se:.3}, probe at {} Hz)",
            det.info().probe_hz
        );
    }
}
