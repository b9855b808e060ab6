//! The path the board runs: 24-bit codes through `Detector::push_codes_block`
//! (the lock-in's `mix_codes` and the input stage's `code_stats`), in any
//! chunking, checked against
//! * the f32 path (`Detector::push`) fed the same values: a second route through
//!   the same detector design, agreeing to 1e-5 of each channel's input amplitude;
//! * an f64 evaluation of the detector's definition on the same codes: for the block
//!   detector the windowed DFT `P = (2/Σw)·Σ w[m]·x[n0+m]·e^{−jω(n0+m)}` summed
//!   directly (the DFT's definition; window coefficients from Harris, Proc. IEEE
//!   66(1), 1978), for the lock-in the mixer, boxcar and first-order low-pass
//!   cascade written out in f64 (the lock-in's textbook structure: reference
//!   mixing, then low-pass filtering);
//! * exact counts of full-scale codes, made here: a code clips when it is at or
//!   beyond ±full scale.
//!
//! Cases: the number given below for a plain `cargo test`; `PROPTEST_CASES` overrides
//! it (the `proptest!` macro lays the environment over its config), and CI sets 10 000.

use proptest::prelude::*;
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::detect::lockin::LockIn;
use undertone_dsp::detect::nco::{phase_step, step_cycles};
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, Detection, Detector, DetectorKind, DetectorSettings, Flags, Window};
use undertone_tests::reference::{block_dft_f64, LockInF64, C64};
use undertone_tests::ALL_KINDS;

const FS: f32 = 8_000.0;
const FSC: i32 = 8_388_607; // 24-bit converter: 2^23 − 1

fn settings(kind: DetectorKind, bandwidth_hz: f32) -> DetectorSettings {
    DetectorSettings { sample_rate_hz: FS, beacon: Beacon::Hz640, bandwidth_hz, kind, readout_rate_hz: 50.0 }
}

fn kinds() -> impl Strategy<Value = DetectorKind> {
    prop::sample::select(ALL_KINDS.to_vec())
}

/// How a stretch of frames reaches the detector.
#[derive(Clone, Copy, Debug)]
enum Feed {
    /// One `push_codes_block` call.
    Block,
    /// `push_codes`, one frame at a time.
    Frames,
    /// A gain step on one channel (scale × factor), then one `push_codes_block` call.
    GainThenBlock(usize, f32),
}

fn plan() -> impl Strategy<Value = Vec<(usize, Feed)>> {
    let feed = prop_oneof![
        3 => Just(Feed::Block),
        2 => Just(Feed::Frames),
        1 => (0usize..4, 0.25f32..4.0).prop_map(|(c, k)| Feed::GainThenBlock(c, k)),
    ];
    prop::collection::vec((1usize..700, feed), 1..24)
}

/// Codes of four coils: a tone near the beacon with per-coil amplitudes (up to 0.9 of
/// full scale, some tiny, some channels silent), noise, and now and then a spike: a
/// full-scale code or ±2^j (where a one's-complement peak bound is off by one if it is
/// off at all). `wild` adds codes beyond full scale (−fsc − 1 and the i32 extremes,
/// which a converter never sends).
fn codes(seed: u64, len: usize, wild: bool) -> Vec<[i32; 4]> {
    let mut rng = StdRng::seed_from_u64(seed);
    let amp: [f64; 4] = std::array::from_fn(|_| match rng.random_range(0..10) {
        0..=1 => 0.0,
        2..=4 => rng.random_range(0.0..1e-4) * FSC as f64,
        _ => rng.random_range(0.0..0.9) * FSC as f64,
    });
    let f = 640.0 + rng.random_range(-20.0..20.0);
    let sigma: [f64; 4] = std::array::from_fn(|c| if amp[c] == 0.0 { 0.0 } else { rng.random_range(0.0..2e-3) * amp[c] });
    let spikes = rng.random_range(0.0..0.01);
    let w = std::f64::consts::TAU * f / FS as f64;
    (0..len)
        .map(|n| {
            std::array::from_fn(|c| {
                if rng.random_bool(spikes) {
                    let choice = [FSC, -FSC, FSC - 1, -FSC + 1, -FSC - 1, i32::MAX, i32::MIN];
                    return match rng.random_range(0..3) {
                        0 => 1 << rng.random_range(0..23),
                        1 => -(1 << rng.random_range(0..24)),
                        _ => choice[rng.random_range(0..if wild { 7 } else { 4 })],
                    };
                }
                let g: f64 = rng.random_range(-1.0..1.0) + rng.random_range(-1.0..1.0) + rng.random_range(-1.0..1.0);
                let v = amp[c] * (w * n as f64 + c as f64).cos() + sigma[c] * g;
                v.round().clamp(-FSC as f64, FSC as f64) as i32
            })
        })
        .collect()
}

/// The plan laid over `len` frames: (frames, how they are fed), the plan repeated until
/// the frames run out, its gain steps on the first pass only.
fn stretches(len: usize, plan: &[(usize, Feed)]) -> Vec<(std::ops::Range<usize>, Feed)> {
    let mut out = Vec::new();
    let mut i = 0;
    for (step, &(n, feed)) in plan.iter().cycle().enumerate() {
        if i >= len {
            break;
        }
        let feed = match feed {
            Feed::GainThenBlock(..) if step >= plan.len() => Feed::Block,
            f => f,
        };
        out.push((i..(i + n).min(len), feed));
        i += n;
    }
    out
}

/// Run `frames` through the code path following `plan`.
fn run_codes(det: &mut Detector<4>, frames: &[[i32; 4]], plan: &[(usize, Feed)]) -> Vec<Detection<4>> {
    let mut out = Vec::new();
    for (range, feed) in stretches(frames.len(), plan) {
        let chunk = &frames[range];
        match feed {
            Feed::Block => det.push_codes_block(chunk, |d| out.push(d)),
            Feed::Frames => out.extend(chunk.iter().filter_map(|f| det.push_codes(f))),
            Feed::GainThenBlock(c, k) => {
                let s = det.input().scale[c] * k;
                det.set_scale(c, s).unwrap();
                det.push_codes_block(chunk, |d| out.push(d));
            }
        }
    }
    out
}

/// The same frames as f32 samples through `Detector::push`, with the same gain steps.
fn run_floats(det: &mut Detector<4>, frames: &[[i32; 4]], plan: &[(usize, Feed)]) -> Vec<Detection<4>> {
    let mut out = Vec::new();
    for (range, feed) in stretches(frames.len(), plan) {
        if let Feed::GainThenBlock(c, k) = feed {
            let s = det.input().scale[c] * k;
            det.set_scale(c, s).unwrap();
        }
        out.extend(frames[range].iter().filter_map(|f| det.push(&f.map(|k| k as f32))));
    }
    out
}

/// Input scaling with random per-channel scales; f32 full scale equal to the code
/// full scale, so `push` of `code as f32` sees exactly what `push_codes` sees.
fn input(seed: u64) -> InputScale<4> {
    let mut rng = StdRng::seed_from_u64(seed ^ 0x5eed);
    let mut s = InputScale::unity(24);
    s.scale = std::array::from_fn(|_| (10f64.powf(rng.random_range(-9.0..0.0))) as f32);
    s.full_scale = FSC as f32;
    s
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// `push_codes_block` and `push_codes` in any chunking and interleaving, with gain
    /// steps between chunks, give the readouts `push` gives on the same values: the same
    /// instants, flags and counts, and phasors and noise σ within 1e-5 of each channel's
    /// input amplitude (f32 rounding of a sum of M products is ~M·2^−24 of the sum of
    /// their magnitudes, and the boxcar divides by M: ~1e-7 of the amplitude).
    #[test]
    fn code_path_in_any_chunking_matches_the_float_path(
        kind in kinds(),
        bandwidth_hz in 15.0f32..40.0,
        seed in any::<u64>(),
        len in 1200usize..5000,
        plan in plan(),
    ) {
        let proto = Detector::<4>::new(&settings(kind, bandwidth_hz), input(seed)).unwrap();
        let frames = codes(seed, len, false);
        let (mut a, mut b) = (proto, proto);
        let got = run_codes(&mut a, &frames, &plan);
        let want = run_floats(&mut b, &frames, &plan);
        prop_assert!(!got.is_empty());
        prop_assert_eq!(got.len(), want.len());
        // Largest input amplitude per channel (in input units) under either scale in force.
        let peak: [f64; 4] = std::array::from_fn(|c| frames.iter().map(|f| f[c].unsigned_abs()).max().unwrap_or(0) as f64);
        let biggest: [f64; 4] = std::array::from_fn(|c| {
            let k = plan.iter().filter_map(|p| match p.1 { Feed::GainThenBlock(ch, k) if ch == c => Some(k as f64), _ => None }).fold(1.0f64, |m, k| m.max(m * k));
            peak[c].max(1.0) * proto.input().scale[c] as f64 * k
        });
        for (g, w) in got.iter().zip(&want) {
            prop_assert_eq!(g.sample_index, w.sample_index);
            prop_assert_eq!(g.t_s, w.t_s);
            prop_assert_eq!(g.stats.clipped, w.stats.clipped);
            prop_assert_eq!(g.stats.samples, w.stats.samples);
            prop_assert_eq!(g.flags.0 & !Flags::OFF_FREQUENCY.0, w.flags.0 & !Flags::OFF_FREQUENCY.0);
            for c in 0..4 {
                let d = (g.phasors[c] - w.phasors[c]).magnitude() as f64;
                prop_assert!(d <= 1e-5 * biggest[c], "coil {}: {:?} vs {:?} (amplitude {})", c, g.phasors[c], w.phasors[c], biggest[c]);
                let s = (g.noise_sigma[c] - w.noise_sigma[c]).abs() as f64;
                prop_assert!(s <= 1e-5 * biggest[c], "coil {}: σ {} vs {}", c, g.noise_sigma[c], w.noise_sigma[c]);
            }
        }
    }

    /// Every readout's counts on the code path, in any chunking, equal exact counts over
    /// the frames of its interval: clipped codes (at or beyond ±full scale, codes a
    /// converter never sends included), samples, the CLIPPED flag; and the peak it
    /// reports bounds the interval's true peak from above within a factor of two.
    #[test]
    fn code_path_counts_full_scale_codes_exactly(
        kind in kinds(),
        seed in any::<u64>(),
        len in 1200usize..5000,
        plan in plan(),
    ) {
        let mut det = Detector::<4>::new(&settings(kind, 25.0), input(seed)).unwrap();
        let frames = codes(seed, len, true);
        let outs = run_codes(&mut det, &frames, &plan);
        prop_assert!(!outs.is_empty());
        let mut from = 0usize;
        for d in &outs {
            let span = &frames[from..=d.sample_index as usize];
            prop_assert_eq!(d.stats.samples as usize, span.len());
            let mut any = false;
            for c in 0..4 {
                let clipped = span.iter().filter(|f| f[c] >= FSC || f[c] <= -FSC).count() as u32;
                prop_assert_eq!(d.stats.clipped[c], clipped, "coil {} frames {}..={}", c, from, d.sample_index);
                any |= clipped > 0;
                let peak = span.iter().map(|f| f[c].unsigned_abs()).max().unwrap_or(0) as f64;
                let got = d.stats.peak_fraction[c] as f64 * FSC as f64;
                let tol = 4.0 * f32::EPSILON as f64 * peak.max(1.0);
                prop_assert!(got >= peak - tol && got <= (2.0 * peak).max(1.0) + tol, "coil {}: peak {} true {}", c, got, peak);
            }
            prop_assert_eq!(d.flags.contains(Flags::CLIPPED), any);
            prop_assert_eq!(d.stats.non_finite, [0; 4]);
            from = d.sample_index as usize + 1;
        }
    }
}

/// Worst |P − P_ref| over readouts, relative to each coil's input amplitude.
fn worst_error(got: &[Detection<4>], want: &[(u64, Vec<C64>)], amp: &[f64; 4]) -> f64 {
    assert!(got.len() >= 10, "{} readouts", got.len());
    let mut worst = 0.0f64;
    for (g, (n, w)) in got.iter().zip(want) {
        assert_eq!(g.sample_index, *n);
        for c in 0..4 {
            let d = (C64::new(g.phasors[c].re as f64, g.phasors[c].im as f64) - w[c]).norm();
            worst = worst.max(d / amp[c]);
        }
    }
    worst
}

#[test]
fn code_path_matches_an_f64_evaluation_of_the_same_codes() {
    // Codes of a 24-bit converter with a tone 0.3 Hz off the beacon, noise and
    // occasional full-scale codes, fed in uneven chunks. Measured worst error against
    // the f64 evaluation: 1.2e-6 to 2.3e-6 of the coil's amplitude for both kinds (f32
    // sums of M = 8 … 1600 products, and the Goertzel recurrence, whose f32 accuracy is
    // documented as better than 1e-5 relative). Bound: 1e-5 of the coil's amplitude.
    let frames = codes(2024, 24_000, false);
    let scale = input(2024).scale;
    let amp: [f64; 4] = std::array::from_fn(|c| frames.iter().map(|f| f[c].unsigned_abs()).max().unwrap() as f64 * scale[c] as f64);
    let values: Vec<Vec<f64>> = frames.iter().map(|f| (0..4).map(|c| f[c] as f64 * scale[c] as f64).collect()).collect();
    let cycles = step_cycles(phase_step(640.0 / FS as f64));
    let plan = [(1usize, Feed::Frames), (333, Feed::Block), (1000, Feed::Block), (77, Feed::Frames), (4096, Feed::Block)];
    for kind in [
        DetectorKind::LockIn { poles: 1 },
        DetectorKind::LockIn { poles: 4 },
        DetectorKind::Block { window: Window::BlackmanHarris4 },
        DetectorKind::Block { window: Window::Rectangular },
    ] {
        let s = settings(kind, 10.0);
        let mut det = Detector::<4>::new(&s, input(2024)).unwrap();
        let got = run_codes(&mut det, &frames, &plan);
        let info = *det.info();
        let want: Vec<(u64, Vec<C64>)> = match kind {
            DetectorKind::LockIn { poles } => {
                let li = LockIn::new(FS, 640.0, 10.0, poles, 50.0);
                assert_eq!(li.m, info.block_len);
                let mut r = LockInF64::new(&li, cycles, 0.0, 4);
                values.iter().filter_map(|x| r.push(x)).map(|o| (o.sample_index, o.main)).collect()
            }
            DetectorKind::Block { window } => block_dft_f64(window, info.block_len as usize, (FS / 50.0) as usize, cycles, &values),
        };
        assert_eq!(got.len(), want.len(), "{kind:?}");
        let worst = worst_error(&got, &want, &amp);
        assert!(worst < 1e-5, "{kind:?}: worst error {worst:e} of the amplitude");
    }
}

#[test]
fn full_scale_codes_are_counted_for_every_converter_width() {
    // Every code at or beyond ±full scale, and none inside, for 12-, 16-, 24- and 32-bit
    // converters (full scale 2^(b−1) − 1), whichever path the codes take.
    for bits in [12u32, 16, 24, 32] {
        let scale = InputScale::<2>::unity(bits);
        let fsc = scale.full_scale_code;
        let edge =
            [fsc, -fsc, fsc - 1, -fsc + 1, fsc.saturating_add(1), fsc.saturating_neg().saturating_sub(1), 0, -1, 1, i32::MAX, i32::MIN];
        // Frames pairing every edge code with every other, 121 frames, repeated to fill readouts.
        let frames: Vec<[i32; 2]> = edge.iter().flat_map(|&a| edge.iter().map(move |&b| [a, b])).collect();
        let clips = |k: i32| k >= fsc || k <= -fsc;
        for kind in [DetectorKind::LockIn { poles: 2 }, DetectorKind::Block { window: Window::Hann }] {
            let s = DetectorSettings { sample_rate_hz: 4_000.0, beacon: Beacon::Hz640, bandwidth_hz: 40.0, kind, readout_rate_hz: 50.0 };
            let mut det = Detector::<2>::new(&s, scale).unwrap();
            let stream: Vec<[i32; 2]> = frames.iter().cycle().take(121 * 40).copied().collect();
            let mut outs = Vec::new();
            for chunk in stream.chunks(97) {
                det.push_codes_block(chunk, |d| outs.push(d));
            }
            assert!(outs.len() > 10);
            let mut from = 0usize;
            for d in &outs {
                let span = &stream[from..=d.sample_index as usize];
                for c in 0..2 {
                    let want = span.iter().filter(|f| clips(f[c])).count() as u32;
                    assert_eq!(d.stats.clipped[c], want, "{bits} bits {kind:?} coil {c}");
                }
                from = d.sample_index as usize + 1;
            }
        }
    }
}
