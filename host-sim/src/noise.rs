//! The simulator's white Gaussian noise source.
//!
//! One standard normal draw per channel-sample, in the order the samples are
//! made (frame by frame, coil by coil), so a stream cut into blocks of any
//! length draws the very same numbers.
//!
//! * Uniform bits: xoshiro256++ (Blackman & Vigna, "Scrambled linear
//!   pseudorandom number generators", ACM Trans. Math. Softw. 47(4), 2021),
//!   seeded through SplitMix64, from the `rand` crate.
//! * Normal variates: the ZIGNOR ziggurat of `rand_distr::StandardNormal`
//!   (Doornik, "An improved ziggurat method to generate normal random
//!   samples", 2005): 256 layers, the tail beyond R = 3.6542 drawn exactly.
//!
//! Measured by `cargo bench -p undertone-sim --bench simulate` (BENCHMARKS.md):
//! 2.2 ns a draw against 3.8 ns with ChaCha8 bits and the same ziggurat; the
//! draw is the largest single cost of synthesis, which is why the faster bit
//! source won.
//! Its moments and tails are checked against the normal distribution in
//! `host-sim/tests/noise.rs`.

use rand::rngs::Xoshiro256PlusPlus;
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};

/// A seeded stream of independent N(0, 1) draws.
#[derive(Clone, Debug)]
pub struct Gaussian {
    rng: Xoshiro256PlusPlus,
}

impl Gaussian {
    /// The stream for `seed` (same seed, same draws, on every platform).
    pub fn from_seed(seed: u64) -> Self {
        Self { rng: Xoshiro256PlusPlus::seed_from_u64(seed) }
    }

    /// The next draw.
    ///
    /// ```
    /// let mut g = undertone_sim::noise::Gaussian::from_seed(1);
    /// assert!(g.draw().is_finite());
    /// ```
    #[inline]
    pub fn draw(&mut self) -> f64 {
        StandardNormal.sample(&mut self.rng)
    }

    /// Fill `out` with the next draws times `sigma`, in order (the same numbers
    /// as that many calls of [`Gaussian::draw`]).
    ///
    /// ```
    /// use undertone_sim::noise::Gaussian;
    /// let (mut a, mut b) = (Gaussian::from_seed(4), Gaussian::from_seed(4));
    /// let mut v = [0.0; 3];
    /// a.fill_scaled(&mut v, 2.0);
    /// assert_eq!(v, [2.0 * b.draw(), 2.0 * b.draw(), 2.0 * b.draw()]);
    /// ```
    pub fn fill_scaled(&mut self, out: &mut [f64], sigma: f64) {
        // A local copy of the generator's state stays in registers through the loop.
        let mut rng = self.rng.clone();
        for g in out.iter_mut() {
            let x: f64 = StandardNormal.sample(&mut rng);
            *g = sigma * x;
        }
        self.rng = rng;
    }
}
