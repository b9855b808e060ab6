//! Shared helpers for the cross-crate tests: deterministic synthetic signals,
//! f64 reference implementations ([`reference`](mod@reference)), a person who follows the
//! receiver's moves ([`operator`]) and the target images.

pub mod operator;
pub mod reference;
pub mod target;

use rand::rngs::StdRng;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use undertone_dsp::{DetectorKind, Window};

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

/// Every detector kind the settings allow: the lock-in with 1 to 4 poles and the block
/// detector with each window.
pub const ALL_KINDS: [DetectorKind; 7] = [
    DetectorKind::LockIn { poles: 1 },
    DetectorKind::LockIn { poles: 2 },
    DetectorKind::LockIn { poles: 3 },
    DetectorKind::LockIn { poles: 4 },
    DetectorKind::Block { window: Window::Rectangular },
    DetectorKind::Block { window: Window::Hann },
    DetectorKind::Block { window: Window::BlackmanHarris4 },
];
