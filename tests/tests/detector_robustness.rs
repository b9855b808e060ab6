//! No input makes the detector panic or emit a non-finite phasor: NaN,
//! infinities, full-scale codes, zeros and DC are counted and flagged. Every
//! readout of every case is checked against counts made here from the frames of
//! its interval: non-finite samples, clipped samples (at or beyond full scale),
//! samples, and the flags they raise.
//!
//! Cases: the number given below for a plain `cargo test`; `PROPTEST_CASES` overrides
//! it (the `proptest!` macro lays the environment over its config), and CI sets 10 000.

use proptest::prelude::*;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::phasor::Phasor;
use undertone_dsp::{Beacon, Detection, Detector, DetectorKind, DetectorSettings, Flags, C32};
use undertone_tests::ALL_KINDS;

fn any_f32() -> impl Strategy<Value = f32> {
    prop_oneof![
        Just(f32::NAN),
        Just(f32::INFINITY),
        Just(f32::NEG_INFINITY),
        Just(f32::MAX),
        Just(f32::MIN),
        Just(0.0),
        Just(1.0),
        Just(-1.0),
        -2.0f32..2.0,
        any::<f32>(),
    ]
}

fn kinds() -> impl Strategy<Value = DetectorKind> {
    prop::sample::select(ALL_KINDS.to_vec())
}

/// 4 kHz, 50 readouts/s, 40 Hz: the longest block (Blackman–Harris) is 201 samples.
fn settings(kind: DetectorKind, beacon: Beacon) -> DetectorSettings {
    DetectorSettings { sample_rate_hz: 4_000.0, beacon, bandwidth_hz: 40.0, kind, readout_rate_hz: 50.0 }
}

/// Enough repeats of `len` frames for several readouts (400 samples at least).
fn repeats(len: usize, repeat: usize) -> usize {
    repeat.max(400usize.div_ceil(len))
}

/// Check one readout against the frames of its interval: `non_finite[c]` and
/// `clipped[c]` are the counts expected per channel. An accumulator overflow (a sum
/// beyond the f32 range) is counted once more on channel 0 and zeroes the phasors.
fn check_readout<const N: usize>(
    det: &Detector<N>,
    d: &Detection<N>,
    samples: usize,
    non_finite: &[u32; N],
    clipped: &[u32; N],
) -> Result<(), TestCaseError> {
    for c in 0..N {
        prop_assert!(d.phasors[c].is_finite(), "{:?}", d.phasors);
        prop_assert!(d.noise_sigma[c].is_finite() && d.noise_sigma[c] >= 0.0);
        prop_assert_eq!(d.stats.clipped[c], clipped[c], "clipped on channel {}", c);
    }
    prop_assert!(d.freq_offset_hz.is_finite());
    prop_assert_eq!(d.stats.samples as usize, samples);
    prop_assert_eq!(&d.stats.non_finite[1..], &non_finite[1..]);
    let overflow = d.stats.non_finite[0] == non_finite[0] + 1;
    prop_assert!(overflow || d.stats.non_finite[0] == non_finite[0], "non-finite {:?} expected {:?}", d.stats.non_finite, non_finite);
    if overflow {
        prop_assert!(d.phasors.iter().all(|p| *p == C32::ZERO));
    }
    prop_assert_eq!(d.flags.contains(Flags::NON_FINITE), overflow || non_finite.iter().any(|&k| k > 0));
    prop_assert_eq!(d.flags.contains(Flags::CLIPPED), clipped.iter().any(|&k| k > 0));
    let elapsed = ((d.sample_index + 1) as f64 / det.info().sample_rate_hz as f64) as f32;
    prop_assert_eq!(d.flags.contains(Flags::SETTLING), elapsed < det.info().settle_99_s);
    prop_assert_eq!(d.flags.contains(Flags::MAINS), det.mains().flagged());
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// f32 frames: a sample counts as non-finite when NaN or infinite, as clipped when
    /// finite and at or beyond full scale (1.0 here); the input stage saturates at full
    /// scale, so no sum can overflow.
    #[test]
    fn float_frames_are_counted_and_flagged_in_every_readout(
        kind in kinds(),
        frames in prop::collection::vec(prop::array::uniform4(any_f32()), 1..64),
        repeat in 1usize..40,
    ) {
        let mut det = Detector::<4>::new(&settings(kind, Beacon::Hz512), InputScale::unity(24)).unwrap();
        let (mut nf, mut cl, mut samples, mut readouts) = ([0u32; 4], [0u32; 4], 0usize, 0);
        for _ in 0..repeats(frames.len(), repeat) {
            for f in &frames {
                for c in 0..4 {
                    nf[c] += !f[c].is_finite() as u32;
                    cl[c] += (f[c].is_finite() && f[c].abs() >= 1.0) as u32;
                }
                samples += 1;
                if let Some(d) = det.push(f) {
                    check_readout(&det, &d, samples, &nf, &cl)?;
                    prop_assert_eq!(d.stats.non_finite, nf, "f32 input cannot overflow");
                    (nf, cl, samples) = ([0; 4], [0; 4], 0);
                    readouts += 1;
                }
            }
        }
        prop_assert!(readouts >= 1);
    }

    /// Raw codes through the board's path (`push_codes_block`), any i32 and any scale:
    /// clipped at or beyond ±(2^23 − 1); a scaled code beyond the f32 range is
    /// non-finite (counted per sample by the block detector; the lock-in scales whole
    /// boxcar sums, and an overflow there is counted once and zeroes the readout).
    #[test]
    fn code_frames_are_counted_and_flagged_in_every_readout(
        kind in kinds(),
        codes in prop::collection::vec(prop::array::uniform2(prop_oneof![Just(i32::MAX), Just(i32::MIN), Just(8_388_607), Just(-8_388_607), Just(-8_388_608), Just(8_388_606), Just(0), any::<i32>()]), 1..32),
        scale in prop_oneof![Just(1.0f32), Just(1e-30f32), Just(1e30f32), Just(f32::MAX)],
        chunk in 1usize..300,
        repeat in 1usize..40,
    ) {
        let mut input = InputScale::unity(24);
        input.scale = [scale; 2];
        let mut det = Detector::<2>::new(&settings(kind, Beacon::Hz640), input).unwrap();
        let stream: Vec<[i32; 2]> = codes.iter().cycle().take(codes.len() * repeats(codes.len(), repeat)).copied().collect();
        let mut outs = Vec::new();
        for part in stream.chunks(chunk) {
            det.push_codes_block(part, |d| outs.push(d));
        }
        prop_assert!(!outs.is_empty());
        let mut from = 0usize;
        for d in &outs {
            let span = &stream[from..=d.sample_index as usize];
            let clipped: [u32; 2] = std::array::from_fn(|c| span.iter().filter(|f| f[c] >= 8_388_607 || f[c] <= -8_388_607).count() as u32);
            let non_finite: [u32; 2] = std::array::from_fn(|c| match kind {
                DetectorKind::Block { .. } => span.iter().filter(|f| !(f[c] as f32 * scale).is_finite()).count() as u32,
                DetectorKind::LockIn { .. } => 0,
            });
            check_readout(&det, d, span.len(), &non_finite, &clipped)?;
            from = d.sample_index as usize + 1;
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
    // DC is 512 Hz from the tone: the response model puts the lock-in's gain there below
    // 1e-6 (checked against measurement in lockin_response.rs).
    assert!(det.response(-512.0) < 1e-6);
    assert!(d.phasors[0].magnitude() < 12_000.0 * 1e-6, "{:?}", d.phasors);
    assert_eq!(d.phasors[1].magnitude(), 0.0);
    assert!(!d.flags.contains(Flags::CLIPPED));
    assert_eq!(d.stats.clipped, [0, 0]);
}
