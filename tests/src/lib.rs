//! Shared helpers for the cross-crate tests: deterministic synthetic signals
//! and the target images.

pub mod reference;
pub mod target;

use rand::rngs::StdRng;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

/// `A·cos(2π·f/fs·n + φ)` for `n` in `0..len`, computed in f64.
pub fn tone(len: usize, fs: f64, f_hz: f64, amp: f64, phase_rad: f64) -> Vec<f32> {
    (0..len).map(|n| (amp * (2.0 * std::f64::consts::PI * f_hz / fs * n as f64 + phase_rad).cos()) as f32).collect()
}

/// Seeded Gaussian noise source.
pub struct Noise {
    rng: StdRng,
    normal: Normal<f64>,
}

impl Noise {
    /// Zero-mean noise of standard deviation `sigma`.
    pub fn new(seed: u64, sigma: f64) -> Self {
        Self { rng: StdRng::seed_from_u64(seed), normal: Normal::new(0.0, sigma.max(1e-300)).unwrap() }
    }

    /// One sample.
    pub fn sample(&mut self) -> f64 {
        self.normal.sample(&mut self.rng)
    }
}

/// Sample mean and (unbiased) variance.
pub fn mean_var(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    let v = x.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / (n - 1.0);
    (m, v)
}

/// Cases per property test: the `PROPTEST_CASES` environment variable when set (CI
/// sets 10 000), else `local`, the number a plain `cargo test` runs.
///
/// `ProptestConfig { cases: n, .. }` and `ProptestConfig::with_cases(n)` override
/// the variable; passing this function's value keeps it in force.
pub fn proptest_cases(local: u32) -> u32 {
    std::env::var("PROPTEST_CASES").ok().and_then(|v| v.trim().parse().ok()).unwrap_or(local)
}
