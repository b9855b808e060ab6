//! Frequency offset of the received tone from the set frequency.
//!
//! Phasors are referenced to `cos(ω0·n)`, so a tone at `f0 + Δf` rotates by
//! `2π·Δf·T` between readouts `T` seconds apart. With `P_c[k]` the phasor of
//! coil `c` at readout `k`, `z[k] = Σ_c P_c[k]·conj(P_c[k−1])` has that angle on
//! every coil whatever its sign, weighted by power. `z` is smoothed
//! (`z̄ ← z̄ + β(z − z̄)`, on unit phasors) and `Δf = arg(z̄)/(2πT)`, unambiguous
//! within ±1/(2T).
//!
//! Its uncertainty: the mean resultant length `R = |z̄|` of the smoothed unit
//! phasors gives the spread of the per-readout angle, `σ_θ = √(−2 ln R)` (the
//! wrapped normal distribution; Mardia & Jupp, *Directional Statistics*, 2000,
//! §3.5.7, from memory), and the average of about `(2 − β)/β` of them has
//! `σ_θ·√(β/(2 − β))`, so `σ_Δf = σ_θ·√(β/(2 − β))/(2πT)`.

use crate::phasor::{Phasor, C32};

/// Fraction of the detection bandwidth an offset may take before it is flagged.
pub const OFFSET_FLAG_FRACTION: f32 = 0.25;

/// Running estimate of the tone's frequency offset.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OffsetEstimator<const N: usize> {
    prev: [C32; N],
    have_prev: bool,
    z: C32,
    beta: f32,
    interval_s: f32,
}

impl<const N: usize> OffsetEstimator<N> {
    /// Readouts `interval_s` apart, smoothing over about `1/beta` readouts.
    pub fn new(interval_s: f32, beta: f32) -> Self {
        Self { prev: [C32::ZERO; N], have_prev: false, z: C32::ZERO, beta, interval_s }
    }

    /// Feed a readout's phasors; returns the current offset estimate in Hz.
    pub fn update(&mut self, p: &[C32; N]) -> f32 {
        if self.have_prev {
            let mut z = C32::ZERO;
            for c in 0..N {
                z += p[c] * self.prev[c].conj();
            }
            // Normalise so a strong reading does not swamp the average's time constant.
            // A product below the normal f32 range carries no usable phase, and 1/m
            // would overflow: skipped.
            let m = z.magnitude();
            if m >= f32::MIN_POSITIVE && m.is_finite() {
                let u = z.scale(1.0 / m);
                self.z += (u - self.z).scale(self.beta);
            }
        }
        if p.iter().all(|v| v.is_finite()) {
            self.prev = *p;
            self.have_prev = true;
        }
        self.offset_hz()
    }

    /// One-sigma of the current estimate, Hz (infinite before two readouts).
    pub fn offset_sigma_hz(&self) -> f32 {
        let r = self.z.magnitude();
        if !(r > 0.0) {
            return f32::INFINITY;
        }
        let spread = libm::sqrtf((-2.0 * libm::logf(r.min(1.0))).max(0.0));
        spread * libm::sqrtf(self.beta / (2.0 - self.beta)) / (2.0 * core::f32::consts::PI * self.interval_s)
    }

    /// Current estimate, Hz (0 before two readouts).
    pub fn offset_hz(&self) -> f32 {
        if self.z.norm_sqr() == 0.0 {
            return 0.0;
        }
        self.z.angle_rad() / (2.0 * core::f32::consts::PI * self.interval_s)
    }
}
