//! No input makes the detector panic or emit a non-finite phasor: NaN,
//! infinities, full-scale codes, zeros and DC are counted and flagged.

use proptest::prelude::*;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, Detector, DetectorKind, DetectorSettings, Flags, Window};

fn any_f32() -> impl Strategy<Value = f32> {
    prop_oneof![
        Just(f32::NAN),
        Just(f32::INFINITY),
        Just(f32::NEG_INFINITY),
        Just(f32::MAX),
        Just(f32::MIN),
        Just(0.0),
        Just(1.0),
        -2.0f32..2.0,
        any::<f32>(),
    ]
}

fn kinds() -> impl Strategy<Value = DetectorKind> {
    prop_oneof![
        (1u8..=4).prop_map(|poles| DetectorKind::LockIn { poles }),
        Just(DetectorKind::Block { window: Window::Rectangular }),
        Just(DetectorKind::Block { window: Window::Hann }),
        Just(DetectorKind::Block { window: Window::BlackmanHarris4 }),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, .. ProptestConfig::default() })]

    #[test]
    fn float_frames_never_panic_or_leak_non_finite(
        kind in kinds(),
        frames in prop::collection::vec(prop::array::uniform4(any_f32()), 1..64),
        repeat in 1usize..200,
    ) {
        let s = DetectorSettings { sample_rate_hz: 4_000.0, beacon: Beacon::Hz512, bandwidth_hz: 40.0, kind, readout_rate_hz: 50.0 };
        let mut det = Detector::<4>::new(&s, InputScale::unity(24)).unwrap();
        let bad = frames.iter().flatten().any(|v| !v.is_finite());
        let mut saw_flag = false;
        for _ in 0..repeat {
            for f in &frames {
                if let Some(d) = det.push(f) {
                    for c in 0..4 {
                        prop_assert!(d.phasors[c].is_finite(), "{:?}", d.phasors);
                        prop_assert!(d.noise_sigma[c].is_finite());
                    }
                    prop_assert!(d.freq_offset_hz.is_finite());
                    saw_flag |= d.flags.contains(Flags::NON_FINITE);
                }
            }
        }
        if bad && det.samples() >= 4_000 {
            prop_assert!(saw_flag);
        }
    }

    #[test]
    fn code_frames_at_full_scale_are_flagged(
        kind in kinds(),
        codes in prop::collection::vec(prop::array::uniform2(prop_oneof![Just(i32::MAX), Just(i32::MIN), Just(8_388_607), Just(-8_388_608), Just(0), any::<i32>()]), 1..32),
    ) {
        let s = DetectorSettings { sample_rate_hz: 4_000.0, beacon: Beacon::Hz640, bandwidth_hz: 40.0, kind, readout_rate_hz: 50.0 };
        let mut det = Detector::<2>::new(&s, InputScale::unity(24)).unwrap();
        let clips = codes.iter().flatten().any(|&k| !(-8_388_607..8_388_607).contains(&k));
        let mut saw = false;
        for _ in 0..300 {
            for f in &codes {
                if let Some(d) = det.push_codes(f) {
                    prop_assert!(d.phasors.iter().all(|p| p.is_finite()));
                    saw |= d.flags.contains(Flags::CLIPPED);
                }
            }
        }
        if clips && det.samples() >= 4_000 {
            prop_assert!(saw);
        }
    }
}

#[test]
fn dc_and_zeros_give_no_tone() {
    let s = DetectorSettings::new(48_000.0, Beacon::Hz512);
    let mut det = Detector::<2>::new(&s, InputScale::unity(16)).unwrap();
    let mut last = None;
    for _ in 0..96_000 {
        if let Some(d) = det.push_codes(&[12_000, 0]) {
            last = Some(d);
        }
    }
    let d = last.unwrap();
    // DC 12000 codes at 512 Hz: the lock-in's response at −512 Hz is below 1e-6.
    assert!(d.phasors[0].magnitude() < 12_000.0 * 1e-6, "{:?}", d.phasors);
    assert_eq!(d.phasors[1].magnitude(), 0.0);
    assert!(!d.flags.contains(Flags::CLIPPED));
}
