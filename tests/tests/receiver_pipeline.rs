//! The receiver end to end on synthetic coil signals, and its invariants.
//!
//! Coil readings come from the dipole field (Griffiths, *Introduction to
//! Electrodynamics*, eq. 5.89; equation number from memory) through
//! `Head::readings`, which the field reference tests check against that formula.

use proptest::prelude::*;
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
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
    // A person starts 2h behind the point over the sonde on its axis and does what the
    // receiver asks (tests/src/operator.rs), the coils sampled at 48 kSPS: every direction
    // shown is right, and the receiver ends with a depth within 3σ of the truth read over
    // the sonde (max(0.15 m, 0.1·h) of it).
    for h in [0.8f32, 1.5, 3.0] {
        let mut rx = Receiver::new(settings()).unwrap();
        let k = 0.3 / readings(h, 0.0, 0.0)[0].abs();
        let fs = 48_000.0f64;
        let w = 2.0 * std::f64::consts::PI * 512.0 / fs;
        let mut noise = Noise::new(1, 1e-4);
        let mut op = undertone_tests::operator::Operator::new(-2.0 * h, 0.0);
        let (mut x, mut y) = (-2.0 * h, 0.0f32);
        let mut amp = readings(h, x, y);
        let (mut last, mut depths, mut t_prev) = (None, 0, 0.0f64);
        let tol = (0.1 * h).max(0.15);
        for n in 0..(200.0 * fs) as usize {
            let c = (w * n as f64 + 0.4).cos();
            let f = [0, 1, 2, 3].map(|i| (k as f64 * amp[i] as f64 * c + noise.sample()) as f32);
            let Some(r) = rx.push(&f) else { continue };
            let d = r.guidance.direction();
            if d != 0 {
                assert_eq!(d, if x < 0.0 { 1 } else { -1 }, "h={h} x={x} y={y}: {:?}", r.guidance);
            }
            if let Some(dp) = r.depth {
                assert!(x.hypot(y) <= tol, "h={h}: depth at ({x}, {y})");
                assert!((dp.depth.depth_m - h).abs() < 3.0 * dp.depth.sigma_m, "h={h}: {dp:?}");
                depths += 1;
            }
            last = Some(r);
            if depths >= 20 {
                break;
            }
            let t = n as f64 / fs;
            (x, y) = op.step(&r.guidance, (t - t_prev) as f32);
            t_prev = t;
            amp = readings(h, x, y);
        }
        let last = last.unwrap();
        assert!(depths >= 20, "h={h}: {depths} depths; last {:?}", last.guidance);
        assert!((last.strength / (k * readings(h, x, y)[0].abs()) - 1.0).abs() < 1e-2, "h={h}: strength {}", last.strength);
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

/// The detection of the reference head at (x, y) from a level sonde h m down, as the
/// detector would hand it (phasor = reading·e^{jφ}·k/peak, noise σ 1e-4·k).
fn det(h: f32, x: f32, y: f32, t_s: f64, phase: f32, k: f32) -> undertone_dsp::Detection<4> {
    let peak = readings(h, 0.0, 0.0)[0].abs();
    undertone_dsp::Detection::<4> {
        sample_index: (t_s * 20.0).round() as u64,
        t_s,
        phasors: readings(h, x, y).map(|v| undertone_dsp::phasor::unit(phase).scale(k * v / peak)),
        noise_sigma: [k.abs() * 1e-4; 4],
        stats: Default::default(),
        freq_offset_hz: 0.0,
        freq_offset_sigma_hz: 0.0,
        flags: Default::default(),
    }
}

/// Phasors and noise σ put in place of a readout's.
type Garbage = ([C32; 4], [f32; 4]);

/// Random garbage in place of a readout: NaN, infinities, zeros, huge and tiny values.
fn garbage(rng: &mut StdRng) -> Garbage {
    let v = |rng: &mut StdRng| match rng.random_range(0..6) {
        0 => f32::NAN,
        1 => f32::INFINITY,
        2 => 0.0,
        3 => 1e30,
        4 => -1e-30,
        _ => rng.random_range(-10.0f32..10.0),
    };
    let p = std::array::from_fn(|_| C32::new(v(rng), v(rng)));
    let s = std::array::from_fn(|_| match rng.random_range(0..3) {
        0 => 0.0,
        1 => f32::NAN,
        _ => rng.random_range(0.0f32..1.0),
    });
    (p, s)
}

/// Closed loops per randomized check. Each is a person locating a sonde (hundreds of
/// readouts); the receiver locates a share of them short of all (BENCHMARKS.md), so these
/// checks count successes over a seeded set instead of requiring every case.
const LOOPS: usize = 40;

/// A person starting 2h behind the sonde on its axis doing as asked, 20 readouts/s, until
/// five depths have been shown or 240 s have passed.
fn locate_from_behind(
    rx: &mut Receiver<4>,
    h: f32,
    detect: impl FnMut(f32, f32, f64) -> undertone_dsp::Detection<4>,
) -> Vec<undertone_tests::operator::Shown<4>> {
    undertone_tests::operator::follow(rx, (-2.0 * h, 0.0), 0.05, 240.0, detect, |v| {
        v.iter().filter(|s| s.readout.depth.is_some()).count() >= 5
    })
}

#[test]
fn locate_never_emits_non_finite() {
    // A person locating the sonde (starting 2h behind it on its axis, doing as asked) with
    // up to five readouts replaced by garbage: every output of every readout stays finite,
    // and the receiver still ends with a depth over the sonde in nearly every case.
    let mut rng = StdRng::seed_from_u64(11);
    let mut located = 0;
    for _ in 0..LOOPS {
        let h = rng.random_range(0.5f32..3.0);
        let bad: Vec<(usize, Garbage)> = (0..rng.random_range(0..6)).map(|_| (rng.random_range(0..400), garbage(&mut rng))).collect();
        let mut rx = Receiver::new(settings()).unwrap();
        let mut n = 0usize;
        let shown = locate_from_behind(&mut rx, h, |x, y, t| {
            let mut d = det(h, x, y, t, 0.3, 1.0);
            if let Some((_, (p, s))) = bad.iter().find(|b| b.0 == n) {
                d.phasors = *p;
                d.noise_sigma = *s;
            }
            n += 1;
            d
        });
        for s in &shown {
            let r = &s.readout;
            assert!(r.strength.is_finite() && r.strength_db.is_finite() && r.bearing_deg.is_finite() && r.snr_db.is_finite(), "{r:?}");
            assert!(r.guidance.vertical_ratio.is_finite());
            for d in [r.gradient, r.known_moment].into_iter().flatten() {
                assert!(d.depth_m.is_finite() && d.sigma_m.is_finite() && d.sigma_m > 0.0, "{d:?}");
            }
            for d in [r.guidance.ahead, r.guidance.left].into_iter().flatten() {
                assert!(d.value_m.is_finite() && d.sigma_m.is_finite(), "{d:?}");
            }
        }
        located += usize::from(shown.last().unwrap().readout.depth.is_some());
    }
    println!("located {located} of {LOOPS}");
    // Measured: 40 of 40 (seed 11); bound 36, for the closed-loop rate of BENCHMARKS.md.
    assert!(located >= 36, "{located} of {LOOPS} located");
}

#[test]
fn results_invariant_to_amplitude_and_global_sign() {
    // The same person locating the same sonde with the signal at another strength (×1e-3 to
    // ×1e3), phase and sign: the receiver locates it alike, to the same depth.
    let mut rng = StdRng::seed_from_u64(12);
    let mut alike = 0;
    for _ in 0..LOOPS {
        let h = rng.random_range(0.4f32..3.0);
        let phase = rng.random_range(-3.0f32..3.0);
        let k = 10f32.powf(rng.random_range(-3.0f32..3.0)) * if rng.random_range(0..2) == 0 { -1.0 } else { 1.0 };
        let run = |phase: f32, k: f32| {
            let mut rx = Receiver::new(settings()).unwrap();
            let shown = locate_from_behind(&mut rx, h, |x, y, t| det(h, x, y, t, phase, k));
            let last = *shown.last().unwrap();
            (shown.len(), last)
        };
        let ((na, a), (nb, b)) = (run(0.3, 1.0), run(phase, k));
        // Rounding decides a threshold a readout earlier or later now and then; the loops
        // then part ways but end alike: both with a depth, the same within their σ, at
        // nearly the same time.
        if let (Some(p), Some(q)) = (a.readout.depth, b.readout.depth) {
            assert!((p.depth.depth_m - q.depth.depth_m).abs() < p.depth.sigma_m + q.depth.sigma_m, "h={h}: {p:?} vs {q:?}");
            assert!((a.x - b.x).hypot(a.y - b.y) <= 2.0 * (0.1 * h).max(0.15), "h={h}: ({}, {}) vs ({}, {})", a.x, a.y, b.x, b.y);
            alike += usize::from(na.abs_diff(nb) * 4 <= na.max(nb));
        }
    }
    println!("alike {alike} of {LOOPS}");
    // Measured: 40 of 40 (seed 12); bound 36.
    assert!(alike >= 36, "{alike} of {LOOPS} alike");
}

fn any_value() -> impl Strategy<Value = f32> {
    prop_oneof![
        Just(f32::NAN),
        Just(f32::INFINITY),
        Just(f32::NEG_INFINITY),
        Just(0.0f32),
        Just(1e30f32),
        Just(-1e-30f32),
        Just(f32::MIN_POSITIVE / 4.0),
        -10.0f32..10.0
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(cases(64)))]

    #[test]
    fn locate_outputs_stay_finite_on_any_input(
        steps in prop::collection::vec((any::<bool>(), -3.0f32..3.0, -2.0f32..2.0, prop::array::uniform8(any_value()), prop::array::uniform4(any_value())), 1..8),
        h in 0.3f32..4.0,
    ) {
        // Readouts of a head anywhere near the sonde, clean or garbage (NaN, infinities,
        // zeros, huge, subnormal): whatever comes in, every number that goes out is finite
        // or absent, and every σ shown is positive.
        let mut rx = Receiver::new(settings()).unwrap();
        for (i, (clean, x, y, p, s)) in steps.iter().enumerate() {
            let mut d = det(h, *x, *y, i as f64 * 0.05, 0.3, 1.0);
            if !clean {
                d.phasors = std::array::from_fn(|c| C32::new(p[2 * c], p[2 * c + 1]));
                d.noise_sigma = *s;
            }
            let r = rx.locate(&d);
            prop_assert!(r.strength.is_finite() && r.strength_db.is_finite() && r.bearing_deg.is_finite() && r.snr_db.is_finite(), "{r:?}");
            prop_assert!(r.guidance.vertical_ratio.is_finite());
            for d in [r.gradient, r.known_moment].into_iter().flatten() {
                prop_assert!(d.depth_m.is_finite() && d.sigma_m.is_finite() && d.sigma_m > 0.0, "{d:?}");
            }
            if let Some(d) = r.depth {
                prop_assert!(d.depth.depth_m.is_finite() && d.depth.sigma_m > 0.0 && d.below_ground_m.is_finite(), "{d:?}");
            }
            for d in [r.guidance.ahead, r.guidance.left].into_iter().flatten() {
                prop_assert!(d.value_m.is_finite() && d.sigma_m.is_finite(), "{d:?}");
            }
        }
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
