//! Properties of the input stage and the Goertzel recurrence, on random inputs.
//!
//! The board converts codes through two routes: the per-frame route
//! (`InputScale::codes`, one frame at a time) and the block route the lock-in's
//! fast path takes (`InputScale::code_stats`, given the OR of the codes'
//! one's-complement magnitudes that `LockInState::mix_codes` gathers). Both must
//! count the same clipped codes; the block route's peak is allowed to be a bound,
//! within a factor of two above the true peak, and exact once a block reaches half
//! scale. The reference is a plain count written here: a code clips when it is at
//! or beyond ±full scale.
//!
//! Cases: the number given below for a plain `cargo test`; `PROPTEST_CASES` overrides
//! it (the `proptest!` macro lays the environment over its config), and CI sets 10 000.

use proptest::prelude::*;
use undertone_dsp::detect::goertzel::Goertzel;
use undertone_dsp::detect::input::{ChannelStats, InputScale};
use undertone_dsp::phasor::Phasor;

/// The OR of one's-complement magnitudes, as the lock-in's mixing loop gathers it.
fn or_of(frames: &[[i32; 3]]) -> [u32; 3] {
    let mut or = [0u32; 3];
    for f in frames {
        for c in 0..3 {
            or[c] |= (f[c] ^ (f[c] >> 31)) as u32;
        }
    }
    or
}

/// Codes biased towards the places where off-by-one errors live: 0, ±1, ±(fsc − 1),
/// ±fsc, −fsc − 1, ±half scale, powers of two, the i32 extremes, and anything.
fn code(fsc: i32) -> impl Strategy<Value = i32> {
    let half = fsc / 2 + 1;
    prop_oneof![
        Just(0),
        Just(1),
        Just(-1),
        Just(fsc),
        Just(-fsc),
        Just(fsc - 1),
        Just(-fsc + 1),
        Just(fsc.saturating_neg().saturating_sub(1)),
        Just(half),
        Just(-half),
        (0u32..31).prop_map(|b| 1i32 << b),
        (0u32..32).prop_map(|b| (1i64 << b).wrapping_neg() as i32),
        Just(i32::MAX),
        Just(i32::MIN),
        -fsc..=fsc,
        any::<i32>(),
    ]
}

/// A converter's full-scale code: 2^(b−1) − 1 for b bits, or any positive value
/// (a power of two included: `InputScale::validate` accepts every code ≥ 1).
fn full_scale() -> impl Strategy<Value = i32> {
    prop_oneof![(8u32..=32).prop_map(|b| InputScale::<3>::unity(b).full_scale_code), (0u32..31).prop_map(|b| 1i32 << b), 1i32..=i32::MAX,]
}

fn frames_and_scale() -> impl Strategy<Value = (i32, Vec<[i32; 3]>)> {
    full_scale().prop_flat_map(|fsc| (Just(fsc), prop::collection::vec(prop::array::uniform3(code(fsc)), 1..48)))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(512))]

    /// `code_stats` counts exactly the clipped codes `codes` counts, frame by frame,
    /// and its peak bounds the true peak from above, within a factor of two (and one
    /// code), exactly once the block reaches half scale.
    #[test]
    fn block_statistics_match_frame_by_frame((fsc, frames) in frames_and_scale()) {
        let mut scale = InputScale::<3>::unity(24);
        scale.full_scale_code = fsc;
        prop_assume!(scale.validate().is_ok());
        let mut per_frame = ChannelStats::<3>::new();
        for f in &frames {
            let _ = scale.codes(f, &mut per_frame);
        }
        let mut block = ChannelStats::<3>::new();
        scale.code_stats(&frames, &or_of(&frames), &mut block);
        prop_assert_eq!(block.samples, frames.len() as u32);
        prop_assert_eq!(per_frame.samples, frames.len() as u32);
        for c in 0..3 {
            // The definition: at or beyond ±full scale.
            let want = frames.iter().filter(|f| f[c] >= fsc || f[c] <= -fsc).count() as u32;
            prop_assert_eq!(per_frame.clipped[c], want, "per frame, channel {}, fsc {}", c, fsc);
            prop_assert_eq!(block.clipped[c], want, "block, channel {}, fsc {}", c, fsc);
            let peak = frames.iter().map(|f| f[c].unsigned_abs()).max().unwrap_or(0) as f64;
            let got = block.peak_fraction[c] as f64 * fsc as f64;
            // f32 rounding of the fraction: 2^-24 relative, twice (the product and 1/fsc).
            let tol = 3.0 * f32::EPSILON as f64 * peak.max(1.0);
            prop_assert!(got >= peak - tol, "peak bound {} below the true peak {} (fsc {})", got, peak, fsc);
            // At most twice the true peak; a block of zeros may read one code (the OR
            // cannot tell 0 from −1).
            prop_assert!(got <= (2.0 * peak).max(1.0) + tol, "peak bound {} above twice the true peak {} (fsc {})", got, peak, fsc);
            // Exact whenever something clipped, and, for a converter of b bits
            // (fsc = 2^(b−1) − 1), from just above half scale (2^(b−2) + 1) on.
            let standard = (fsc as u32).wrapping_add(1).is_power_of_two();
            if peak >= fsc as f64 || (standard && 2.0 * peak > fsc as f64 + 1.0) {
                prop_assert!((got - peak).abs() <= tol, "peak {} not exact ({}) (fsc {})", got, peak, fsc);
            }
            // The per-frame route reports the true peak.
            prop_assert!((per_frame.peak_fraction[c] as f64 * fsc as f64 - peak).abs() <= tol);
        }
    }

    /// Goertzel is linear (Goertzel 1958: a linear recurrence followed by a linear
    /// combination): G(a·x + b·y) = a·G(x) + b·G(y), to f32 rounding. Tolerance: the
    /// recurrence's error, measured below 1e-5 of Σ|x| for these lengths (dsp docs), on
    /// the larger side.
    #[test]
    fn goertzel_is_linear(
        cycles in 0.001f64..0.499,
        x in prop::collection::vec(-1.0f32..1.0, 16..512),
        a in -4.0f32..4.0,
        b in -4.0f32..4.0,
    ) {
        let y: Vec<f32> = x.iter().enumerate().map(|(n, v)| (n as f32 * 0.37).sin() - 0.5 * v).collect();
        let z: Vec<f32> = x.iter().zip(&y).map(|(p, q)| a * p + b * q).collect();
        let g = Goertzel::from_cycles_per_sample(cycles);
        let (gx, gy, gz) = (g.dtft_of(&x), g.dtft_of(&y), g.dtft_of(&z));
        let want = gx.scale(a) + gy.scale(b);
        let size: f32 = z.iter().map(|v| v.abs()).sum::<f32>() + a.abs() * x.len() as f32 + b.abs() * 1.5 * y.len() as f32;
        prop_assert!((gz - want).magnitude() <= 1e-5 * size, "{:?} vs {:?}", gz, want);
    }
}
