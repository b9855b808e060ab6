//! Quadrature reference oscillator shared by every coil.
//!
//! Produces `e^{−jωn}` for the absolute sample index `n`. The phase at the
//! start of each pre-decimation block is computed exactly (f64 turns, reduced
//! modulo one cycle) and the block is then stepped by an f32 complex rotation
//! `e^{−jω}`, so rounding cannot accumulate beyond one block (tens to hundreds
//! of samples: < 1e-5 rad).

use crate::complex::C32;

/// Oscillator at `cycles` per sample.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Nco {
    cycles: f64,
    rotor: C32,
    /// Current value `e^{−jωn}`.
    pub value: C32,
}

impl Nco {
    /// New oscillator at `cycles` per sample (f/fs), at n = 0.
    pub fn new(cycles: f64) -> Self {
        let w = 2.0 * core::f64::consts::PI * cycles;
        Self { cycles, rotor: C32::new(libm::cos(w) as f32, -libm::sin(w) as f32), value: C32::new(1.0, 0.0) }
    }

    /// Frequency in cycles per sample.
    pub fn cycles(&self) -> f64 {
        self.cycles
    }

    /// Advance one sample.
    #[inline(always)]
    pub fn step(&mut self) {
        self.value = self.value * self.rotor;
    }

    /// Set the value exactly for absolute sample index `n`.
    pub fn sync(&mut self, n: u64) {
        self.value = reference_at(self.cycles, n);
    }
}

/// `e^{−j2π·cycles·n}` computed from the phase reduced modulo one turn.
pub fn reference_at(cycles: f64, n: u64) -> C32 {
    // Split n so the product keeps full precision for very long runs.
    let hi = (n >> 24) as f64 * 16_777_216.0;
    let lo = (n & 0xFF_FFFF) as f64;
    let mut turns = frac(cycles * hi) + frac(cycles * lo);
    turns = frac(turns);
    let ph = -2.0 * core::f64::consts::PI * turns;
    C32::new(libm::cos(ph) as f32, libm::sin(ph) as f32)
}

fn frac(x: f64) -> f64 {
    x - libm::floor(x)
}
