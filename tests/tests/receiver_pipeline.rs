//! The receiver end to end on synthetic coil signals, and its invariants.

use proptest::prelude::*;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::field::Source;
use undertone_dsp::locate::components::FieldVector;
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, DetectorSettings, Head, Receiver, ReceiverSettings, C32};
use undertone_tests::Noise;

fn settings() -> ReceiverSettings<4> {
    let mut input = InputScale::<4>::unity(24);
    input.full_scale = 1.0;
    ReceiverSettings::new(DetectorSettings::new(48_000.0, Beacon::Hz512), input, Head::reference4())
}

/// Coil readings (T) scaled so the strongest is `peak` of full scale.
fn run_station(rx: &mut Receiver<4>, readings: [f32; 4], seconds: f32, noise_sd: f64, seed: u64) -> undertone_dsp::Readout<4> {
    let fs = 48_000.0f64;
    let w = 2.0 * std::f64::consts::PI * 512.0 / fs;
    let mut noise = Noise::new(seed, noise_sd);
    let mut last = None;
    for n in 0..(seconds as f64 * fs) as usize {
        let c = (w * n as f64 + 0.4).cos();
        let f = [0, 1, 2, 3].map(|i| (readings[i] as f64 * c + noise.sample()) as f32);
        if let Some(r) = rx.push(&f) {
            last = Some(r);
        }
    }
    last.unwrap()
}

#[test]
fn over_the_sonde_the_receiver_reads_its_depth() {
    let head = Head::reference4();
    for h in [0.8f32, 1.5, 3.0] {
        let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.0, 0.0, -h] };
        let r = head.readings(&src, [0.0; 3], 0.0);
        let k = 0.3 / r[0].abs();
        let rd = [r[0] * k, r[1] * k, r[2] * k, r[3] * k];
        let mut rx = Receiver::new(settings()).unwrap();
        let out = run_station(&mut rx, rd, 3.0, 1e-4, 1);
        let d = out.gradient;
        assert!(d.is_valid(), "h={h}: {out:?}");
        assert!((d.depth_m - h).abs() < 3.0 * d.sigma_m.max(1e-3 * h), "h={h}: {d:?}");
        assert!((out.strength - 0.3).abs() < 1e-3);
    }
}

#[test]
fn guidance_points_to_the_sonde_along_its_axis() {
    let head = Head::reference4();
    let h = 1.5f32;
    // Sonde 0.4 m ahead (+x) of the receiver, then 0.4 m behind.
    for (x_sonde, want) in [(0.4f32, 1i8), (-0.4, -1)] {
        let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [x_sonde, 0.0, -h] };
        let r = head.readings(&src, [0.0; 3], 0.0);
        let k = 0.3 / r[0].abs();
        let mut rx = Receiver::new(settings()).unwrap();
        let out = run_station(&mut rx, r.map(|v| v * k), 2.0, 1e-5, 2);
        assert_eq!(out.guidance.direction, want, "{:?}", out.guidance);
        assert!(out.gradient.invalid.is_some(), "off the peak: no gradient depth");
    }
}

#[test]
fn gain_requests_and_rescaling_keep_readouts_continuous() {
    let head = Head::reference4();
    let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.0, 0.0, -1.0] };
    let r = head.readings(&src, [0.0; 3], 0.0);
    let k = 0.9 / r[0].abs();
    let mut rx = Receiver::new(settings()).unwrap();
    let out = run_station(&mut rx, r.map(|v| v * k), 1.5, 0.0, 3);
    let g = out.gain_request.expect("0.9 of full scale asks for less gain");
    assert_eq!((g.channel, g.up), (0, false));
    let before = out.phasors[0].magnitude();
    // The firmware halves channel 0's gain: codes halve, the receiver rescales.
    rx.apply_gain_change(0, 0.5).unwrap();
    let rd = [r[0] * k * 0.5, r[1] * k, r[2] * k, r[3] * k];
    let out = run_station(&mut rx, rd, 0.5, 0.0, 4);
    assert!((out.phasors[0].magnitude() / before - 1.0).abs() < 1e-3, "{} vs {before}", out.phasors[0].magnitude());
}

fn phasor() -> impl Strategy<Value = C32> {
    let v = prop_oneof![Just(f32::NAN), Just(f32::INFINITY), Just(0.0f32), Just(1e30f32), Just(-1e-30f32), -10.0f32..10.0];
    (v.clone(), v).prop_map(|(a, b)| C32::new(a, b))
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, .. ProptestConfig::default() })]

    #[test]
    fn locate_never_emits_non_finite(p in prop::array::uniform4(phasor()), s in prop::array::uniform4(prop_oneof![Just(0.0f32), Just(f32::NAN), 0.0f32..1.0])) {
        let mut rx = Receiver::new(settings()).unwrap();
        for _ in 0..3 {
            let d = undertone_dsp::Detection::<4> { sample_index: 0, t_s: 0.0, phasors: p, noise_sigma: s, stats: Default::default(), freq_offset_hz: 0.0, flags: Default::default() };
            let r = rx.locate(&d);
            prop_assert!(r.strength.is_finite() && r.strength_db.is_finite() && r.bearing_deg.is_finite());
            prop_assert!(r.guidance.vertical_ratio.is_finite());
            for e in [r.gradient, r.known_moment] {
                prop_assert!(e.depth_m.is_finite() && e.sigma_m.is_finite());
            }
        }
    }

    #[test]
    fn results_invariant_to_amplitude_and_global_sign(
        yaw in -1.5f32..1.5, h in 0.3f32..6.0, x in -2.0f32..2.0, phase in -3.0f32..3.0, k in 1e-3f32..1e3, flip in any::<bool>()
    ) {
        let head = Head::reference4();
        let src = Source::Dipole { moment_am2: [yaw.cos(), yaw.sin(), 0.0], pos_m: [x, 0.0, -h] };
        let r = head.readings(&src, [0.0; 3], 0.0);
        let base: [C32; 4] = r.map(|v| undertone_dsp::phasor::unit(phase).scale(v * 1e7));
        let sgn = if flip { -k } else { k };
        let other: [C32; 4] = base.map(|p| p.scale(sgn));
        let sig = [1e-3f32; 4];
        let f1 = FieldVector::from_phasors(&head, &base, &sig);
        let f2 = FieldVector::from_phasors(&head, &other, &sig.map(|s| s * k));
        prop_assert!((f1.bearing_rad - f2.bearing_rad).abs() < 1e-4 || (f1.horizontal < 1e-6));
        prop_assert!((f1.vertical_ratio() - f2.vertical_ratio()).abs() < 1e-3 * (1.0 + f1.vertical_ratio().abs()));
        let mut a = Receiver::new(settings()).unwrap();
        let mut b = Receiver::new(settings()).unwrap();
        let d = |p: [C32; 4], s: [f32; 4]| undertone_dsp::Detection::<4> { sample_index: 0, t_s: 0.0, phasors: p, noise_sigma: s, stats: Default::default(), freq_offset_hz: 0.0, flags: Default::default() };
        let (ra, rb) = (a.locate(&d(base, sig)), b.locate(&d(other, sig.map(|s| s * k))));
        prop_assert_eq!(ra.gradient.invalid, rb.gradient.invalid);
        if ra.gradient.is_valid() {
            prop_assert!((ra.gradient.depth_m - rb.gradient.depth_m).abs() < 1e-3 * ra.gradient.depth_m);
        }
        prop_assert_eq!(ra.state, rb.state);
    }

    #[test]
    fn bearing_follows_a_rotation_of_the_head(heading in -1.4f32..1.4, h in 0.5f32..4.0) {
        // Turning the receiver by ψ over a sonde along x turns the bearing by −ψ.
        let head = Head::reference4();
        let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.0, 0.0, -h] };
        let r = head.readings(&src, [0.0; 3], heading);
        let p = r.map(|v| C32::new(v * 1e7, 0.0));
        let f = FieldVector::from_phasors(&head, &p, &[1e-6; 4]);
        prop_assert!((f.bearing_rad + heading).abs() < 1e-3, "{} vs {}", f.bearing_rad, -heading);
    }
}
