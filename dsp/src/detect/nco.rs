//! Quadrature reference oscillator shared by every coil.
//!
//! Produces `e^{−jωn}` for the absolute sample index `n`. The frequency is held
//! as a 32-bit phase increment (`step = round(f/fs·2³²)`, a resolution of
//! `fs/2³²`, 4 µHz at 16 kHz), so the exact phase of any sample is the integer
//! `(n mod 2³²)·step mod 2³²`. The oscillator is set to that exact phase every
//! [`RESYNC`] samples (one `sinf`/`cosf` pair) and stepped in between by an f32
//! complex rotation `e^{−jω}`, whose rounding (about 6e-8 per step in
//! magnitude and angle) cannot build up beyond about 1.5e-5 in that span. Integer and single-precision only, so the
//! Cortex-M4F and the PC compute the same values.

use crate::phasor::C32;

/// Samples between exact re-synchronisations of the oscillator.
pub const RESYNC: u32 = 256;

/// Oscillator at a fixed frequency.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Nco {
    step: u32,
    rotor: C32,
    /// Current value `e^{−jωn}`.
    pub value: C32,
}

/// The 32-bit phase increment for `cycles` per sample (wrapped into [0, 1)).
pub fn phase_step(cycles: f64) -> u32 {
    let c = cycles - libm::floor(cycles);
    (libm::round(c * 4_294_967_296.0) as u64 & 0xFFFF_FFFF) as u32
}

/// The frequency a phase increment really has, cycles per sample.
pub fn step_cycles(step: u32) -> f64 {
    step as f64 / 4_294_967_296.0
}

impl Nco {
    /// New oscillator at `cycles` per sample (f/fs), at n = 0.
    pub fn new(cycles: f64) -> Self {
        let step = phase_step(cycles);
        Self { step, rotor: reference_at(step, 1), value: C32::new(1.0, 0.0) }
    }

    /// Phase increment.
    pub fn step_value(&self) -> u32 {
        self.step
    }

    /// The per-sample rotation `e^{−jω}`.
    #[inline(always)]
    pub fn rotor(&self) -> C32 {
        self.rotor
    }

    /// Advance one sample.
    #[inline(always)]
    pub fn step(&mut self) {
        self.value *= self.rotor;
    }

    /// Set the value exactly for absolute sample index `n`.
    pub fn sync(&mut self, n: u64) {
        self.value = reference_at(self.step, n);
    }
}

/// `e^{−j2π·phase/2³²}` with `phase = (n mod 2³²)·step mod 2³²`.
pub fn reference_at(step: u32, n: u64) -> C32 {
    let phase = (n as u32).wrapping_mul(step);
    // Map to (−π, π] so the f32 argument keeps full relative precision.
    let turns = phase as i32 as f32 * (1.0 / 4_294_967_296.0);
    let ph = -core::f32::consts::TAU * turns;
    let (s, c) = crate::trigf::sin_cos(ph);
    C32::new(c, s)
}
