//! The receiver end to end on synthetic coil signals, and its invariants.
//!
//! Coil readings come from the dipole field (Griffiths, *Introduction to
//! Electrodynamics*, eq. 5.89; equation number from memory) through
//! `Head::readings`, which the field reference tests check against that formula.

use proptest::prelude::*;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::field::Source;
use undertone_dsp::locate::components::FieldVector;
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, DetectorSettings, Head, Readout, Receiver, ReceiverSettings, C32};
use undertone_tests::Noise;

fn settings() -> ReceiverSettings<4> {
    let mut input = InputScale::<4>::unity(24);
    input.full_scale = 1.0;
    ReceiverSettings::new(DetectorSettings::new(48_000.0, Beacon::Hz512), input, Head::reference4())
}

/// Property-test cases: `PROPTEST_CASES` when set (CI raises it), else `default`.
fn cases(default: u32) -> u32 {
    std::env::var("PROPTEST_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(default)
}

/// Readings of the reference head `x` m past a level sonde along its axis (sonde axis along
/// the handle), `y` m to its side, the sonde `h` m down.
fn readings(h: f32, x: f32, y: f32) -> [f32; 4] {
    Head::reference4().readings(&Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [-x, -y, -h] }, [0.0; 3], 0.0)
}

/// Feed samples of a receiver moving along `path(t)` (x past the sonde, m) for `seconds`:
/// coil c sees `k·a_c(x(t))·cos(2π·512t + 0.4)` plus white noise; returns every readout.
fn run_path(rx: &mut Receiver<4>, h: f32, k: f32, path: impl Fn(f64) -> f32, seconds: f64, noise_sd: f64, seed: u64) -> Vec<Readout<4>> {
    let fs = 48_000.0f64;
    let w = 2.0 * std::f64::consts::PI * 512.0 / fs;
    let mut noise = Noise::new(seed, noise_sd);
    let mut out = Vec::new();
    let mut amp = readings(h, path(0.0), 0.0);
    for n in 0..(seconds * fs) as usize {
        let t = n as f64 / fs;
        // The geometry changes slowly: update it every millisecond.
        if n % 48 == 0 {
            amp = readings(h, path(t), 0.0);
        }
        let c = (w * n as f64 + 0.4).cos();
        let f = [0, 1, 2, 3].map(|i| (k as f64 * amp[i] as f64 * c + noise.sample()) as f32);
        if let Some(r) = rx.push(&f) {
            out.push(r);
        }
    }
    out
}

#[test]
fn walking_into_the_sonde_the_receiver_reads_its_depth() {
    // Walk along the axis from 2h behind the point over the sonde at 0.3 m/s, stop over it and
    // stand 4 s: while walking the direction is "ahead", standing a depth is shown and right.
    for h in [0.8f32, 1.5, 3.0] {
        let mut rx = Receiver::new(settings()).unwrap();
        let k = 0.3 / readings(h, 0.0, 0.0)[0].abs();
        let v = 0.3f32;
        let t_walk = (2.0 * h / v) as f64;
        let path = move |t: f64| if t < t_walk { -2.0 * h + v * t as f32 } else { 0.0 };
        let rs = run_path(&mut rx, h, k, path, t_walk + 4.0, 1e-4, 1);
        for r in &rs {
            let x = path(r.sample_index as f64 / 48_000.0);
            if r.guidance.direction() != 0 && x < -0.15 {
                assert_eq!(r.guidance.direction(), 1, "h={h} x={x}: {:?}", r.guidance);
            }
        }
        let last = rs.last().unwrap();
        let d = last.depth.unwrap_or_else(|| panic!("h={h}: no depth: {:?} {:?}", last.guidance, last.gradient)).depth;
        assert!((d.depth_m - h).abs() < 3.0 * d.sigma_m, "h={h}: {d:?}");
        assert!((last.strength - 0.3).abs() < 1e-3);
    }
}

#[test]
fn gain_requests_and_rescaling_keep_readouts_continuous() {
    let h = 1.0;
    let k = 0.9 / readings(h, 0.0, 0.0)[0].abs();
    let mut rx = Receiver::new(settings()).unwrap();
    let out = *run_path(&mut rx, h, k, |_| 0.0, 1.5, 0.0, 3).last().unwrap();
    let g = out.gain_request.expect("0.9 of full scale asks for less gain");
    assert_eq!((g.channel, g.up), (0, false));
    let before = out.phasors[0].magnitude();
    // The firmware halves channel 0's gain: codes halve, the receiver rescales.
    rx.apply_gain_change(0, 0.5).unwrap();
    let fs = 48_000.0f64;
    let w = 2.0 * std::f64::consts::PI * 512.0 / fs;
    let r = readings(h, 0.0, 0.0);
    let mut last = None;
    for n in 0..(0.5 * fs) as usize {
        let n = n + (1.5 * fs) as usize;
        let c = (w * n as f64 + 0.4).cos() as f32;
        let f = [r[0] * k * 0.5 * c, r[1] * k * c, r[2] * k * c, r[3] * k * c];
        if let Some(o) = rx.push(&f) {
            last = Some(o);
        }
    }
    let after = last.unwrap().phasors[0].magnitude();
    assert!((after / before - 1.0).abs() < 1e-3, "{after} vs {before}");
}

/// Detections of a walk along the axis from −2h to the point over the sonde then standing,
/// as the detector would hand them (phasor = reading·e^{jφ}, noise σ 1e-4 of the peak).
fn walk_detections(h: f32, phase: f32, k: f32) -> Vec<undertone_dsp::Detection<4>> {
    let peak = readings(h, 0.0, 0.0)[0].abs();
    let mut out = Vec::new();
    let n_walk = (2.0 * h / 0.02) as usize;
    for i in 0..n_walk + 60 {
        let x = if i < n_walk { -2.0 * h + 0.02 * i as f32 } else { 0.0 };
        let r = readings(h, x, 0.0);
        out.push(undertone_dsp::Detection::<4> {
            sample_index: i as u64,
            t_s: i as f64 * 0.05,
            phasors: r.map(|v| undertone_dsp::phasor::unit(phase).scale(k * v / peak)),
            noise_sigma: [k * 1e-4; 4],
            stats: Default::default(),
            freq_offset_hz: 0.0,
            freq_offset_sigma_hz: 0.0,
            flags: Default::default(),
        });
    }
    out
}

fn phasor() -> impl Strategy<Value = C32> {
    let v = prop_oneof![Just(f32::NAN), Just(f32::INFINITY), Just(0.0f32), Just(1e30f32), Just(-1e-30f32), -10.0f32..10.0];
    (v.clone(), v).prop_map(|(a, b)| C32::new(a, b))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(cases(64)))]

    #[test]
    fn locate_never_emits_non_finite(
        bad in prop::collection::vec((0usize..200, prop::array::uniform4(phasor()), prop::array::uniform4(prop_oneof![Just(0.0f32), Just(f32::NAN), Just(f32::INFINITY), 0.0f32..1.0])), 0..6),
        h in 0.5f32..3.0,
    ) {
        // A clean walk into the sonde with a few readouts replaced by garbage: every output
        // stays finite, and the walk still ends with a depth.
        let mut rx = Receiver::new(settings()).unwrap();
        let mut dets = walk_detections(h, 0.3, 1.0);
        for (i, p, s) in &bad {
            let i = i % dets.len().saturating_sub(40).max(1);
            dets[i].phasors = *p;
            dets[i].noise_sigma = *s;
        }
        let mut last = None;
        for d in &dets {
            let r = rx.locate(d);
            prop_assert!(r.strength.is_finite() && r.strength_db.is_finite() && r.bearing_deg.is_finite() && r.snr_db.is_finite());
            prop_assert!(r.guidance.vertical_ratio.is_finite());
            for d in [r.gradient, r.known_moment].into_iter().flatten() {
                prop_assert!(d.depth_m.is_finite() && d.sigma_m.is_finite() && d.sigma_m > 0.0);
            }
            for d in [r.guidance.ahead, r.guidance.left].into_iter().flatten() {
                prop_assert!(d.value_m.is_finite() && d.sigma_m.is_finite());
            }
            last = Some(r);
        }
        let last = last.unwrap();
        prop_assert!(last.depth.is_some(), "no depth at the end: {:?}", last.guidance);
    }

    #[test]
    fn results_invariant_to_amplitude_and_global_sign(h in 0.4f32..4.0, phase in -3.0f32..3.0, k in 1e-3f32..1e3, flip in any::<bool>()) {
        // The same walk read at another strength, phase and sign gives the same answers.
        let sgn = if flip { -k } else { k };
        let mut a = Receiver::new(settings()).unwrap();
        let mut b = Receiver::new(settings()).unwrap();
        let (da, db) = (walk_detections(h, 0.3, 1.0), walk_detections(h, phase, sgn));
        // The same decisions, except where a threshold lies within f32 rounding of a readout
        // (a decision may then come a few readouts earlier or later): at most 5 % of the walk.
        let (mut depths, mut differ) = (0, 0);
        for (x, y) in da.iter().zip(&db) {
            let mut y = *y;
            y.noise_sigma = [k * 1e-4; 4];
            let (ra, rb) = (a.locate(x), b.locate(&y));
            if (ra.guidance.along, ra.guidance.across, ra.state, ra.gradient.is_ok()) != (rb.guidance.along, rb.guidance.across, rb.state, rb.gradient.is_ok()) {
                differ += 1;
            }
            if let (Ok(p), Ok(q)) = (ra.gradient, rb.gradient) {
                depths += 1;
                prop_assert!((p.depth_m - q.depth_m).abs() < 1e-3 * p.depth_m);
            }
        }
        prop_assert!(differ * 20 <= da.len(), "{differ} of {} readouts decided differently", da.len());
        prop_assert!(depths > 0, "the walk never reached a depth");
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
