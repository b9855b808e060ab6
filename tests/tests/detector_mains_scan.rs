//! Mains rejection, frequency scan, frequency offset and settings validation.

use undertone_dsp::detect::input::InputScale;
use undertone_dsp::detect::lockin::LockIn;
use undertone_dsp::detect::scan::{scan, ScanSettings};
use undertone_dsp::{Beacon, Detector, DetectorKind, DetectorSettings, Flags, Param, Window};
use undertone_tests::reference::{lockin_transfer, quadrature_split, window_transfer, QuadratureTones, C64};
use undertone_tests::{tone, Noise};

fn unit<const N: usize>() -> InputScale<N> {
    let mut s = InputScale::unity(24);
    s.full_scale = 1e6;
    s
}

const PRESETS: [Beacon; 4] = [Beacon::Hz512, Beacon::Hz640, Beacon::Hz8192, Beacon::Hz32768];

#[test]
fn usual_presets_and_their_neighbouring_harmonics() {
    // Common practice of the trade (no published source): 512 Hz and 640 Hz are the two
    // usual sonde frequencies. Harmonic n of a grid sits at n·50 Hz or n·60 Hz (the nominal
    // grid frequencies of EN 50160 and of 60 Hz grids).
    let fs = 96_000.0;
    for (b, near50, near60) in [
        (Beacon::Hz512, 500.0, 540.0),
        (Beacon::Hz640, 650.0, 660.0),
        (Beacon::Hz8192, 8200.0, 8220.0),
        (Beacon::Hz32768, 32750.0, 32760.0),
    ] {
        let det = Detector::<1>::new(&DetectorSettings::new(fs, b), unit()).unwrap();
        let m = det.mains();
        assert_eq!(m.nearest(50.0).freq_hz, near50, "{b:?}");
        assert_eq!(m.nearest(60.0).freq_hz, near60, "{b:?}");
    }
}

/// The running detector's gain at the four harmonics of `det.mains()` (8 channels:
/// the cos and sin of each, see `QuadratureTones`), from readouts after `from_s`.
fn measured_gains(s: &DetectorSettings, run_s: f64, from_s: f64) -> [f64; 4] {
    let mut det = Detector::<8>::new(s, unit()).unwrap();
    let freqs = det.mains().harmonics.map(|h| h.freq_hz as f64);
    let fs = s.sample_rate_hz as f64;
    let (mut sum, mut k) = ([0.0f64; 4], 0.0);
    for x in QuadratureTones::new(fs, freqs).take((run_s * fs) as usize) {
        if let Some(d) = det.push(&x.map(|v| v as f32)) {
            if d.t_s >= from_s {
                let p = d.phasors.map(|v| C64::new(v.re as f64, v.im as f64));
                for i in 0..4 {
                    sum[i] += quadrature_split(p[2 * i], p[2 * i + 1]).0;
                }
                k += 1.0;
            }
        }
    }
    assert!(k >= 3.0, "{k} readouts");
    sum.map(|v| v / k)
}

#[test]
fn default_bandwidths_reject_all_four_neighbouring_harmonics_measured() {
    // Common practice of the trade (no published source): a receiver must not read the
    // mains harmonics next to its tone; the defaults aim at 60 dB (`MIN_REJECTION_DB`).
    // For every preset and both default detector kinds, the harmonic below and above the
    // tone on the 50 Hz and the 60 Hz grid (harmonic positions: n·50 Hz and n·60 Hz,
    // EN 50160's nominal grid frequencies) is fed to the running detector; its measured
    // gain must be ≤ −60 dB and agree with
    // * the rejection the detector reports (`Detector::mains`, from its response model),
    // * an independent f64 evaluation of the same filter: the lock-in's boxcar and
    //   first-order sections, or the block's window, summed directly
    //   (`undertone_tests::reference::{lockin_transfer, window_transfer}`).
    // Tolerances: model vs direct sum 1e-4 relative (the model's f32 intermediate rate,
    // see lockin_response.rs); measured vs direct sum 1e-3 relative plus the f32 floor
    // of the running detector, 2e-7 for the lock-in and 1e-6 for the block detector (its
    // recurrence over blocks of up to 54 000 samples).
    let fs = 96_000.0f32;
    for kind in [DetectorKind::DEFAULT, DetectorKind::Block { window: Window::BlackmanHarris4 }] {
        for b in PRESETS {
            let s = DetectorSettings::new(fs, b).with_kind(kind);
            let det = Detector::<1>::new(&s, unit()).unwrap();
            let info = *det.info();
            let f0 = b.freq_hz() as f64;
            let (direct, floor): (Box<dyn Fn(f64) -> f64>, f64) = match kind {
                DetectorKind::LockIn { poles } => {
                    let li = LockIn::new(fs, b.freq_hz(), s.bandwidth_hz, poles, s.readout_rate_hz);
                    assert_eq!(li.m, info.block_len);
                    (Box::new(move |off| lockin_transfer(&li, off)), 2e-7)
                }
                DetectorKind::Block { window } => {
                    let len = info.block_len as usize;
                    (Box::new(move |off| window_transfer(window, len, off * len as f64 / fs as f64)), 1e-6)
                }
            };
            // Lock-in: readouts after five 99 % settling times (the step transient below
            // 1e-9); block: every block after the first is complete.
            let settle = info.settle_99_s as f64;
            let (run_s, from_s) = match kind {
                DetectorKind::LockIn { .. } => (6.0 * settle, 5.0 * settle),
                DetectorKind::Block { .. } => (3.0 * settle, settle),
            };
            let gains = measured_gains(&s, run_s, from_s);
            for (h, got) in det.mains().harmonics.iter().zip(gains) {
                let what = format!("{kind:?} {} Hz: harmonic {} × {} Hz", b.freq_hz(), h.order, h.grid_hz);
                let model = 10f64.powf(-h.rejection_db as f64 / 20.0);
                let want = direct(h.freq_hz as f64 - f0);
                assert!((model - want).abs() <= 1e-4 * want + 1e-12, "{what}: model {model:e} direct {want:e}");
                assert!((got - want).abs() <= 1e-3 * want + floor, "{what}: measured {got:e} direct {want:e}");
                assert!(got <= 1e-3, "{what}: measured rejection only {:.1} dB", -20.0 * got.log10());
            }
        }
    }
}

#[test]
fn narrow_band_flagged_when_bandwidth_too_wide() {
    let mut s = DetectorSettings::new(48_000.0, Beacon::Hz640);
    s.bandwidth_hz = 30.0;
    let mut det = Detector::<1>::new(&s, unit()).unwrap();
    assert!(det.mains().flagged());
    let mut flagged = false;
    for _ in 0..48_000 {
        if let Some(d) = det.push(&[0.0]) {
            flagged |= d.flags.contains(Flags::MAINS);
        }
    }
    assert!(flagged);
}

#[test]
fn scan_finds_beacon_and_mains_harmonic_within_their_cramer_rao_bounds() {
    // A 512.4 Hz beacon (A = 0.2), a 500 Hz mains harmonic (A = 0.1) and white noise
    // (σ = 0.05), 3 s at 16 kHz, N = 48 000 samples. Bounds for a tone in white noise,
    // η = A²/(2σ²) (Rife & Boorstyn, IEEE Trans. Inf. Theory IT-20(5), 1974; Kay,
    // Fundamentals of Statistical Signal Processing vol. I, 1993, Example 3.14, number
    // from memory):
    //   var(f̂) ≥ 12/((2π)²·η·N(N² − 1)) (cycles/sample)²: sd 3.0e-4 Hz and 6.0e-4 Hz here;
    //   var(Â) ≥ 2σ²/N, and a window w raises it by its ENBW, N·Σw²/(Σw)² (2.0044 for the
    //   4-term Blackman–Harris the fine search uses; Harris 1978, Table 1): sd 4.6e-4.
    // Allowed: amplitude 4 sd; frequency 10 sd of the bound (4 sd, with room for the
    // tapered window's loss of efficiency, which the bound does not include).
    let fs = 16_000.0;
    let len = 3 * fs as usize;
    let a = tone(len, fs as f64, 512.4, 0.2, 0.3);
    let b = tone(len, fs as f64, 500.0, 0.1, 1.0);
    let sigma = 0.05;
    let mut noise = Noise::new(5, sigma);
    let x: Vec<f32> = a.iter().zip(&b).map(|(p, q)| p + q + noise.sample() as f32).collect();
    let tones = scan(&x, &ScanSettings::new(fs)).unwrap();
    assert!(tones.len() >= 2, "{tones:?}");
    let n = len as f64;
    let sd_f = |amp: f64| {
        let eta = amp * amp / (2.0 * sigma * sigma);
        (12.0 / ((2.0 * std::f64::consts::PI).powi(2) * eta * n * (n * n - 1.0))).sqrt() * fs as f64
    };
    let sd_a = (2.0 * sigma * sigma / n * 2.0044).sqrt();
    for (t, f, amp) in [(tones[0], 512.4, 0.2), (tones[1], 500.0, 0.1)] {
        assert!((t.freq_hz as f64 - f).abs() < 10.0 * sd_f(amp), "{f} Hz: found {} (sd {:e})", t.freq_hz, sd_f(amp));
        assert!((t.amplitude as f64 - amp).abs() < 4.0 * sd_a, "{f} Hz: amplitude {} (sd {sd_a:e})", t.amplitude);
    }
    // A custom high tone without noise: exact but for f32 resolution (an ulp of 6123.45
    // in f32 is 4.9e-4 Hz): 10 ulps.
    let x = tone(len, fs as f64, 6_123.45, 0.5, 0.0);
    let tones = scan(&x, &ScanSettings::new(fs)).unwrap();
    assert!((tones[0].freq_hz - 6_123.45).abs() < 5e-3, "{tones:?}");
    assert!((tones[0].amplitude - 0.5).abs() < 1e-4, "{tones:?}");
}

#[test]
fn scan_of_silence_and_short_records() {
    let fs = 8_000.0;
    let zeros = vec![0.0f32; 8_000];
    assert!(scan(&zeros, &ScanSettings::new(fs)).unwrap().is_empty());
    let short = vec![0.0f32; 100];
    let e = scan(&short, &ScanSettings::new(fs)).unwrap_err();
    assert_eq!(e.param, Param::RecordLength);
}

#[test]
fn frequency_offset_is_estimated_and_flagged() {
    let fs = 48_000.0;
    // Flagged when |offset| > bandwidth/4 (here 0.5 Hz); a small offset is measured but not flagged.
    for (kind, off, flagged) in [
        (DetectorKind::DEFAULT, 0.6f32, true),
        (DetectorKind::DEFAULT, 0.1, false),
        (DetectorKind::Block { window: Window::Hann }, -0.8, true),
    ] {
        let mut s = DetectorSettings::new(fs, Beacon::Hz512).with_kind(kind);
        s.bandwidth_hz = 2.0;
        let mut det = Detector::<2>::new(&s, unit()).unwrap();
        let w = 2.0 * std::f64::consts::PI * (512.0 + off as f64) / fs as f64;
        let mut last = None;
        for n in 0..(fs as usize * 6) {
            let v = (w * n as f64).cos() as f32;
            if let Some(d) = det.push(&[v, -0.5 * v]) {
                last = Some(d);
            }
        }
        let d = last.unwrap();
        // A steady tone Δf off turns the phasor by 2π·Δf·T between readouts T apart (the
        // phasor's definition against cos(ω0·n)); without noise the estimate is exact but
        // for f32 angles (~1e-6 rad, 3e-6 Hz at T = 0.05 s; measured 3e-6 to 6e-6 Hz): 1e-4 Hz.
        assert!((d.freq_offset_hz - off).abs() < 1e-4, "{kind:?}: {}", d.freq_offset_hz);
        assert_eq!(d.flags.contains(Flags::OFF_FREQUENCY), flagged, "{kind:?} {off}");
    }
}

#[test]
fn settings_are_validated_with_named_parameters() {
    let good = DetectorSettings::new(48_000.0, Beacon::Hz512);
    let bad = |f: &dyn Fn(&mut DetectorSettings)| {
        let mut s = good;
        f(&mut s);
        Detector::<4>::new(&s, unit()).unwrap_err()
    };
    let e = bad(&|s| s.beacon = Beacon::Custom(21_600.0));
    assert_eq!(e.param, Param::BeaconFrequency);
    assert_eq!(e.max, 21_600.0);
    assert!(e.to_string().contains("beacon frequency 21600 Hz"), "{e}");
    assert_eq!(bad(&|s| s.beacon = Beacon::Custom(2.0)).param, Param::BeaconFrequency);
    assert_eq!(bad(&|s| s.beacon = Beacon::Custom(f32::NAN)).param, Param::BeaconFrequency);
    assert_eq!(bad(&|s| s.sample_rate_hz = 1_000.0).param, Param::SampleRate);
    assert_eq!(bad(&|s| s.sample_rate_hz = 300_000.0).param, Param::SampleRate);
    assert_eq!(bad(&|s| s.bandwidth_hz = 0.0).param, Param::Bandwidth);
    assert_eq!(bad(&|s| s.bandwidth_hz = 500.0).param, Param::Bandwidth);
    assert_eq!(bad(&|s| s.readout_rate_hz = 2.0).param, Param::ReadoutRate);
    assert_eq!(bad(&|s| s.kind = DetectorKind::LockIn { poles: 5 }).param, Param::Poles);
    let e = bad(&|s| {
        s.kind = DetectorKind::Block { window: Window::BlackmanHarris4 };
        s.bandwidth_hz = 0.1;
    });
    assert_eq!(e.param, Param::BlockLength);
    let mut scale = unit::<4>();
    scale.scale[2] = f32::INFINITY;
    assert_eq!(Detector::<4>::new(&good, scale).unwrap_err().param, Param::ChannelScale);
}
