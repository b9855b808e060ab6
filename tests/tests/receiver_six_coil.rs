//! The receiver with the 6-coil head, calibration, pre-job check, formatting,
//! interleaved input and arbitrary gains.

use proptest::prelude::*;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::field::vec3::from_yaw_pitch;
use undertone_dsp::field::Source;
use undertone_dsp::format::{length, LengthUnit};
use undertone_dsp::locate::calibration::{calibrate, pre_job_check, CalInput, Calibration};
use undertone_dsp::locate::depth::{gradient_depth, CoilPair, Offsets, RatioOf};
use undertone_dsp::{Beacon, DetectorSettings, FieldModel, Flags, Head, Param, Receiver, ReceiverSettings};

fn detection<const N: usize>(r: &[f32; N], sigma: f32) -> undertone_dsp::Detection<N> {
    undertone_dsp::Detection {
        sample_index: 0,
        t_s: 0.0,
        phasors: r.map(|v| undertone_dsp::phasor::unit(0.7).scale(v)),
        noise_sigma: [sigma; N],
        stats: Default::default(),
        freq_offset_hz: 0.0,
        freq_offset_sigma_hz: 0.0,
        flags: Default::default(),
    }
}

fn six() -> ReceiverSettings<6> {
    ReceiverSettings::new(DetectorSettings::new(48_000.0, Beacon::Hz512), InputScale::unity(24), Head::triads6())
}

#[test]
fn six_coil_fix_off_the_peak() {
    // From one position 0.5 m behind and 0.3 m right of the sonde, the fix reports offsets and depth
    // (dipole field, Griffiths eq. 5.89, through `Head::readings`).
    let head = Head::triads6();
    let src = Source::Dipole { moment_am2: from_yaw_pitch(0.2, 0.0), pos_m: [0.5, -0.3, -1.6] };
    let r = head.readings(&src, [0.0; 3], 0.0).map(|v| v * 1e9);
    let mut rx = Receiver::new(six()).unwrap();
    let out = rx.locate(&detection(&r, 1e-3));
    let fix = out.fix.expect("fit ran");
    assert!(fix.converged);
    assert!((fix.ahead_m.value - 0.5).abs() < 0.01 && (fix.left_m.value + 0.3).abs() < 0.01, "{fix:?}");
    assert!((fix.depth_m.value - 1.6).abs() < 0.01 && fix.depth_m.sigma > 0.0, "{fix:?}");
    // Off the point over the sonde no depth is shown, whatever the method, and one readout
    // is no trail: the receiver says why and gives no direction yet.
    assert_eq!(out.fit_depth, Err(undertone_dsp::locate::depth::Withheld::NotOver));
    assert!(out.gradient.is_err() && out.depth.is_none(), "off the peak: depth withheld");
    assert_eq!(out.guidance.direction(), 0, "{:?}", out.guidance);
    assert_eq!(out.guidance.why, Some(undertone_dsp::locate::depth::Withheld::NeedsMotion), "{:?}", out.guidance);
}

#[test]
fn distorted_field_is_flagged_when_calibrated() {
    // With the strength calibrated the fit has one degree of freedom; a second, nearby source
    // (metal re-radiating, say) leaves a residual that flags the field as distorted.
    let head = Head::triads6();
    let k = 1e-7f32 * 1e9; // reading units·m³ for m = 1 A·m², readings scaled by 1e9
    let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.2, 0.1, -1.2] };
    let clean = head.readings(&src, [0.0; 3], 0.0).map(|v| v * 1e9);
    let mut s = six();
    s.locator.calibration = Calibration { upper_gain: 1.0, strength: k, strength_sigma: 0.0 };
    s.locator.fit_every = 1; // fit on every readout: the field changes between the two readouts below
    let mut rx = Receiver::new(s).unwrap();
    let out = rx.locate(&detection(&clean, 1e-3));
    assert!(!out.flags.contains(Flags::DISTORTED), "{:?}", out.fix);
    let other = Source::Dipole { moment_am2: [0.0, 0.3, 0.0], pos_m: [-0.6, 0.0, -0.5] };
    let extra = head.readings(&other, [0.0; 3], 0.0).map(|v| v * 1e9);
    let mixed: [f32; 6] = std::array::from_fn(|i| clean[i] + extra[i]);
    let out = rx.locate(&detection(&mixed, 1e-3));
    assert!(out.flags.contains(Flags::DISTORTED), "{:?}", out.fix);
}

#[test]
fn gain_calibration_corrects_upper_coil_mismatch() {
    // Upper coil 3 % hot: uncorrected gradient depth is wrong; after calibration at 1.0 m
    // the depth at 2.0 m comes out right (h = s/(R^(1/3) − 1), derived from the dipole field, Griffiths, Introduction to Electrodynamics, eq. 5.89).
    let head = Head::reference4();
    let read = |h: f32| {
        head.readings(&Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.0, 0.0, -h] }, [0.0; 3], 0.0).map(|v| v.abs() * 1e9)
    };
    let r1 = read(1.0);
    let up1 = r1[3] * 1.03;
    let cal = calibrate(
        FieldModel::Dipole,
        &CalInput { distance_m: 1.0, spacing_m: 0.4, a_low: r1[0], a_up: up1, sigma_low: 1e-3, sigma_up: 1e-3, vertical_ratio: 0.0 },
    )
    .unwrap();
    assert!((cal.upper_gain - 1.0 / 1.03).abs() < 1e-4, "{cal:?}");
    let r2 = read(2.0);
    let est = |up: f32| {
        gradient_depth(
            FieldModel::Dipole,
            RatioOf::Along,
            CoilPair { low: r2[0], up, sigma_low: 0.0, sigma_up: 0.0, spacing_m: 0.4 },
            0.0,
            Offsets::OVER,
        )
        .unwrap()
    };
    let raw = est(r2[3] * 1.03);
    let fixed = est(r2[3] * 1.03 * cal.upper_gain);
    assert!((raw.depth_m - 2.0).abs() > 0.1, "{raw:?}");
    assert!((fixed.depth_m - 2.0).abs() < 1e-3, "{fixed:?}");
    // Strength K = A·d³ at the known distance.
    assert!((cal.strength / (r1[0] * 1.0) - 1.0).abs() < 1e-6);
    // Poor SNR, off the peak, or an absurd correction are refused with the reason.
    let base = CalInput { distance_m: 1.0, spacing_m: 0.4, a_low: r1[0], a_up: up1, sigma_low: 1e-3, sigma_up: 1e-3, vertical_ratio: 0.0 };
    assert_eq!(calibrate(FieldModel::Dipole, &CalInput { sigma_up: up1, ..base }).unwrap_err().param, Param::Calibration);
    assert_eq!(calibrate(FieldModel::Dipole, &CalInput { vertical_ratio: 0.5, ..base }).unwrap_err().param, Param::Calibration);
    assert_eq!(calibrate(FieldModel::Dipole, &CalInput { a_up: up1 * 2.0, ..base }).unwrap_err().param, Param::Calibration);
    assert_eq!(calibrate(FieldModel::Dipole, &CalInput { distance_m: 9.0, ..base }).unwrap_err().param, Param::Distance);
}

#[test]
fn pre_job_check_sees_a_weak_battery() {
    let cal = Calibration { upper_gain: 1.0, strength: 8.0, strength_sigma: 0.0 };
    // At 2 m a full-strength sonde reads 8/2³ = 1.0; a weak one 0.6.
    let ok = pre_job_check(FieldModel::Dipole, 1.0, 0.001, 2.0, 0.05, &cal);
    assert!(ok.tone_present && (ok.strength_ratio - 1.0).abs() < 1e-6 && (ok.snr_db - 60.0).abs() < 1e-3);
    let weak = pre_job_check(FieldModel::Dipole, 0.6, 0.001, 2.0, 0.0, &cal);
    assert!((weak.strength_ratio - 0.6).abs() < 1e-6);
    let none = pre_job_check(FieldModel::Dipole, 0.001, 0.001, 2.0, 0.0, &cal);
    assert!(!none.tone_present);
}

#[test]
fn lengths_format_in_metres_and_feet() {
    // 1 ft = 0.3048 m exactly (international foot, 1959).
    assert_eq!(length(1.524, LengthUnit::FeetInches).as_str(), "5' 0\"");
    assert_eq!(length(0.9144 + 0.0254 * 7.0, LengthUnit::FeetInches).as_str(), "3' 7\"");
    assert_eq!(length(1.2345, LengthUnit::Metres).as_str(), "1.23 m");
    assert_eq!(length(f32::NAN, LengthUnit::Metres).as_str(), "--");
}

#[test]
fn interleaved_buffers_give_the_same_readouts_as_frames() {
    let s = ReceiverSettings::new(DetectorSettings::new(8_000.0, Beacon::Hz512), InputScale::unity(16), Head::reference4());
    let mut a = Receiver::new(s).unwrap();
    let mut b = Receiver::new(s).unwrap();
    let buf: Vec<i32> = (0..8_000 * 4 + 3).map(|i| ((i as f64 * 0.37).sin() * 9000.0) as i32).collect();
    let mut ra = Vec::new();
    let left = a.push_interleaved_codes(&buf, |r| ra.push(r));
    assert_eq!(left, 3);
    let mut rb = Vec::new();
    for f in buf.chunks_exact(4) {
        if let Some(r) = b.push_codes(&[f[0], f[1], f[2], f[3]]) {
            rb.push(r);
        }
    }
    assert_eq!(ra.len(), rb.len());
    assert!(!ra.is_empty());
    assert_eq!(ra.last().unwrap().phasors, rb.last().unwrap().phasors);
}

#[test]
fn coil_gains_outside_the_sane_range_are_refused_naming_the_coil() {
    for (coil, g) in [(3usize, 1e-20f32), (1, 1e-45), (5, 1e9), (0, -1.0), (2, f32::NAN)] {
        let mut s = six();
        s.head.coils[coil].gain = g;
        let e = Receiver::new(s).unwrap_err();
        assert_eq!(e.param, Param::CoilGain(coil as u8), "{e}");
        assert!(e.to_string().starts_with(&format!("coil {coil} gain")), "{e}");
    }
    // The upper coil below the lower one is refused too.
    let mut s = six();
    s.head.coils[3].pos_m = [0.0, 0.0, -0.4];
    assert_eq!(Receiver::new(s).unwrap_err().param, Param::CoilPosition(3));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(cases(24)))]

    #[test]
    fn receiver_survives_any_frames_and_gains(
        gains in prop::array::uniform6(0.1f32..10.0),
        frames in prop::collection::vec(prop::array::uniform6(prop_oneof![Just(f32::NAN), Just(f32::INFINITY), Just(0.0f32), Just(1e38f32), -1.0f32..1.0]), 1..40),
    ) {
        let mut s = six();
        for (c, g) in gains.iter().enumerate() {
            s.head.coils[c].gain = *g;
        }
        s.detector = DetectorSettings { sample_rate_hz: 4_000.0, beacon: Beacon::Hz640, bandwidth_hz: 40.0, kind: undertone_dsp::DetectorKind::DEFAULT, readout_rate_hz: 50.0 };
        let mut rx = Receiver::new(s).unwrap();
        for _ in 0..60 {
            for f in &frames {
                if let Some(r) = rx.push(f) {
                    prop_assert!(r.strength.is_finite() && r.strength_db.is_finite() && r.snr_db.is_finite());
                    prop_assert!(r.bearing_deg.is_finite() && r.guidance.vertical_ratio.is_finite());
                    for d in [r.gradient, r.fit_depth, r.known_moment].into_iter().flatten() {
                        prop_assert!(d.depth_m.is_finite() && d.sigma_m.is_finite() && d.sigma_m > 0.0);
                    }
                    for d in [r.guidance.ahead, r.guidance.left].into_iter().flatten() {
                        prop_assert!(d.value_m.is_finite() && d.sigma_m.is_finite());
                    }
                    prop_assert!(r.field.signed.iter().chain(r.field.sigma.iter()).all(|v| v.is_finite()));
                }
            }
        }
    }
}

/// Property-test cases: `PROPTEST_CASES` when set (CI raises it), else `default`.
fn cases(default: u32) -> u32 {
    std::env::var("PROPTEST_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(default)
}
