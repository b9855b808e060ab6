//! Mains rejection, frequency scan, frequency offset and settings validation.

use undertone_dsp::detect::input::InputScale;
use undertone_dsp::detect::scan::{scan, ScanSettings};
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, Detector, DetectorKind, DetectorSettings, Flags, Param, Window};
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
    // usual sonde frequencies. Harmonic positions: REFERENCES §9 (50/60 Hz grids).
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

#[test]
fn default_bandwidths_reject_neighbouring_harmonics_by_60_db() {
    // Common practice: a 512 Hz receiver must not read the 500 Hz and 540 Hz mains harmonics.
    // Each preset's default settings, both detector kinds, reject all four neighbours ≥ 60 dB.
    for kind in [DetectorKind::DEFAULT, DetectorKind::Block { window: Window::BlackmanHarris4 }] {
        for b in PRESETS {
            let s = DetectorSettings::new(96_000.0, b).with_kind(kind);
            let det = Detector::<1>::new(&s, unit()).unwrap();
            let m = det.mains();
            assert!(!m.flagged(), "{kind:?} {b:?}: worst {} dB ({:?})", m.worst_rejection_db(), m);
        }
    }
}

#[test]
fn measured_rejection_of_500_hz_matches_the_reported_figure() {
    // Feed a 500 Hz tone into a 512 Hz detector and measure the output against the input:
    // the measured rejection must be ≥ 60 dB and agree with the report within 3 dB.
    let fs = 48_000.0;
    for kind in [DetectorKind::DEFAULT, DetectorKind::Block { window: Window::BlackmanHarris4 }] {
        let s = DetectorSettings::new(fs, Beacon::Hz512).with_kind(kind);
        let mut det = Detector::<1>::new(&s, unit()).unwrap();
        let reported = det.mains().nearest(50.0).rejection_db;
        let x = tone(fs as usize * 8, fs as f64, 500.0, 1.0, 0.1);
        let mut worst = 0.0f32;
        for (n, v) in x.iter().enumerate() {
            if let Some(d) = det.push(&[*v]) {
                if n as f32 > 3.0 * fs {
                    worst = worst.max(d.phasors[0].magnitude());
                }
            }
        }
        let measured = -20.0 * worst.log10();
        assert!(measured >= 60.0, "{kind:?}: measured {measured} dB");
        // The report uses the steady-state response; the measured worst case includes ripple.
        assert!(measured > reported - 3.0, "{kind:?}: measured {measured} dB, reported {reported} dB");
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
fn scan_finds_beacon_and_mains_harmonic_to_0_1_hz() {
    // A 512.4 Hz beacon, a 500 Hz mains harmonic at half its amplitude, and noise.
    let fs = 16_000.0;
    let len = 3 * fs as usize;
    let a = tone(len, fs as f64, 512.4, 0.2, 0.3);
    let b = tone(len, fs as f64, 500.0, 0.1, 1.0);
    let mut noise = Noise::new(5, 0.05);
    let x: Vec<f32> = a.iter().zip(&b).map(|(p, q)| p + q + noise.sample() as f32).collect();
    let tones = scan(&x, &ScanSettings::new(fs)).unwrap();
    assert!(tones.len() >= 2, "{tones:?}");
    assert!((tones[0].freq_hz - 512.4).abs() < 0.1, "{tones:?}");
    assert!((tones[0].amplitude - 0.2).abs() < 0.01, "{tones:?}");
    assert!((tones[1].freq_hz - 500.0).abs() < 0.1, "{tones:?}");
    // A custom high tone.
    let x = tone(len, fs as f64, 6_123.45, 0.5, 0.0);
    let tones = scan(&x, &ScanSettings::new(fs)).unwrap();
    assert!((tones[0].freq_hz - 6_123.45).abs() < 0.1, "{tones:?}");
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
        assert!((d.freq_offset_hz - off).abs() < 0.01, "{kind:?}: {}", d.freq_offset_hz);
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
