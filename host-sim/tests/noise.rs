//! The simulator's noise source against the normal distribution, and the
//! noise and quantisation it puts into the codes.
//!
//! Reference values: the standard normal distribution function Φ from the
//! `statrs` crate (tail probabilities 2(1 − Φ(x)) agree with Abramowitz &
//! Stegun, Handbook of Mathematical Functions, 1964, Table 26.1). Tolerances
//! are five standard errors of each estimate, so a fixed seed passes unless
//! the distribution is wrong.

use statrs::distribution::{ContinuousCDF, Normal};
use undertone_sim::noise::Gaussian;
use undertone_sim::scenario::Scenario;
use undertone_sim::synth::Synth;

const N: usize = 4_000_000;

fn draws(seed: u64) -> Vec<f64> {
    let mut g = Gaussian::from_seed(seed);
    let mut v = vec![0.0; N];
    g.fill_scaled(&mut v, 1.0);
    v
}

#[test]
fn moments_match_the_standard_normal() {
    let v = draws(11);
    let n = N as f64;
    let m1 = v.iter().sum::<f64>() / n;
    let m2 = v.iter().map(|x| x * x).sum::<f64>() / n;
    let m3 = v.iter().map(|x| x * x * x).sum::<f64>() / n;
    let m4 = v.iter().map(|x| x.powi(4)).sum::<f64>() / n;
    // Moments of N(0, 1): 0, 1, 0, 3; the variances of their estimates are
    // (E x^2k − (E x^k)^2)/n: 1/n, 2/n, 15/n and 96/n (moments 1, 3, 15, 105).
    assert!(m1.abs() < 5.0 * (1.0 / n).sqrt(), "mean {m1}");
    assert!((m2 - 1.0).abs() < 5.0 * (2.0 / n).sqrt(), "variance {m2}");
    assert!(m3.abs() < 5.0 * (15.0 / n).sqrt(), "third moment {m3}");
    assert!((m4 - 3.0).abs() < 5.0 * (96.0 / n).sqrt(), "fourth moment {m4}");
}

#[test]
fn tails_match_the_standard_normal() {
    let v = draws(12);
    let phi = Normal::new(0.0, 1.0).unwrap();
    // 3.654152885361009 is the ziggurat's base-strip edge R, beyond which the
    // tail is drawn by a separate (exact) algorithm: both sides of it are checked.
    for x in [0.5, 1.0, 2.0, 3.0, 3.5, 3.654152885361009, 4.0, 4.5] {
        let p = 2.0 * (1.0 - phi.cdf(x));
        let seen = v.iter().filter(|g| g.abs() > x).count() as f64 / N as f64;
        let se = (p * (1.0 - p) / N as f64).sqrt();
        assert!((seen - p).abs() < 5.0 * se + 1.0 / N as f64, "P(|Z| > {x}): {seen:.3e}, normal {p:.3e}");
    }
    // Symmetry: the upper tail alone.
    let p = 1.0 - phi.cdf(3.0);
    let seen = v.iter().filter(|&&g| g > 3.0).count() as f64 / N as f64;
    assert!((seen - p).abs() < 5.0 * (p / N as f64).sqrt(), "P(Z > 3): {seen:.3e}, normal {p:.3e}");
}

#[test]
fn kolmogorov_smirnov_distance_is_small() {
    let mut v = draws(13);
    v.truncate(1_000_000);
    v.sort_by(f64::total_cmp);
    let phi = Normal::new(0.0, 1.0).unwrap();
    let n = v.len() as f64;
    let d = v
        .iter()
        .enumerate()
        .map(|(i, &x)| {
            let f = phi.cdf(x);
            (f - i as f64 / n).abs().max(((i + 1) as f64 / n - f).abs())
        })
        .fold(0.0, f64::max);
    // √n·D beyond 1.95 has probability 0.001 (Kolmogorov's limiting distribution;
    // Massey, J. Am. Stat. Assoc. 46:68, 1951, Table 1).
    assert!(d * n.sqrt() < 1.95, "√n·D = {}", d * n.sqrt());
}

/// No correlation between neighbouring draws (lags 1–8), nor between their squares (a
/// sign-free dependence), as the synthesis needs for white noise. For independent draws each
/// sample correlation has standard error 1/√n (Box & Jenkins, Time Series Analysis, §2.1.6);
/// the limit is five of them.
#[test]
fn neighbouring_draws_are_uncorrelated() {
    let v = draws(23);
    let n = N as f64;
    for lag in 1..=8 {
        let r = v.iter().zip(&v[lag..]).map(|(a, b)| a * b).sum::<f64>() / n;
        assert!(r.abs() < 5.0 / n.sqrt(), "lag {lag}: {r}");
        // x² has mean 1 and variance 2: its lagged covariance over 2 is a correlation too.
        let r2 = v.iter().zip(&v[lag..]).map(|(a, b)| (a * a - 1.0) * (b * b - 1.0)).sum::<f64>() / n / 2.0;
        assert!(r2.abs() < 5.0 / n.sqrt(), "squares, lag {lag}: {r2}");
    }
}

/// A scenario with noise only: a weak sonde far below (its field under 1e-18 T
/// at the coils), no mains; the converter's own noise optional.
fn quiet(density_counts: f64, bits: u32) -> Scenario {
    let text = format!(
        r#"
name = "noise only"
seed = 5
[receiver]
sample_rate_hz = 20000
adc_bits = {bits}
full_scale_t = 1e-7
[sonde]
freq_hz = 512
moment_am2 = 1e-6
depth_m = 20
[noise]
density_t_per_rthz = 1e-12
density_counts_per_rthz = {density_counts}
[[motion]]
kind = "still"
at = [0.0, 0.0]
duration_s = 10
"#
    );
    Scenario::from_toml(&text, "test").unwrap()
}

fn code_variance(sc: &Scenario) -> (f64, f64) {
    let mut s = Synth::new(sc, None);
    let mut v = vec![[0i32; 4]; s.total as usize];
    let n = s.fill_codes(&mut v);
    let x: Vec<f64> = v[..n].iter().map(|f| f[1] as f64).collect();
    let m = x.iter().sum::<f64>() / n as f64;
    (x.iter().map(|c| (c - m) * (c - m)).sum::<f64>() / (n - 1) as f64, n as f64)
}

#[test]
fn code_noise_has_the_set_density_plus_quantisation() {
    // White noise of density e over fs/2 has σ² = e²·fs/2; rounding adds 1/12 code²
    // (Widrow & Kollár, Quantization Noise, 2008, ch. 4, for σ well above one code).
    // Field noise: 1e-12 T/√Hz·√10 kHz = 1e-10 T = 8.388607 codes (FS 2^23 − 1 at 1e-7 T).
    let fs_codes = 8_388_607.0 / 1e-7;
    let sigma_t = 1e-12 * (10_000f64).sqrt() * fs_codes;
    for (counts, want) in [(0.0, sigma_t * sigma_t), (0.1, sigma_t * sigma_t + 0.01 * 10_000.0)] {
        let (var, n) = code_variance(&quiet(counts, 24));
        let want = want + 1.0 / 12.0;
        // Standard error of a sample variance of normal values: σ²·√(2/(n − 1)).
        assert!((var - want).abs() < 5.0 * want * (2.0 / (n - 1.0)).sqrt(), "variance {var} codes², expected {want}");
    }
    // A 12-bit converter at the same full scale: σ = 1e-10/1e-7·2047 = 2.047 codes, where the
    // rounding's 1/12 code² is six standard errors of the variance over 200 000 samples.
    let sigma = 1e-3 * 2047.0;
    let (var, n) = code_variance(&quiet(0.0, 12));
    let want = sigma * sigma + 1.0 / 12.0;
    assert!((var - want).abs() < 5.0 * want * (2.0 / (n - 1.0)).sqrt(), "12-bit variance {var} codes², expected {want}");
    assert!((var - sigma * sigma).abs() > 1.0 / 24.0, "the rounding adds its 1/12 code²: {var}");
}
