//! Generalised Goertzel recurrence for one frequency, any (non-integer) bin.
//!
//! Goertzel (Am. Math. Monthly 65(1), 1958): `s[n] = x[n] + 2cos(ω)·s[n−1] − s[n−2]`,
//! and after `L` samples `y = e^{jω}·s[L−1] − s[L−2] = Σ x[n]·e^{jω(L−n)}`.
//! Sysel & Rajmic (EURASIP J. Adv. Signal Process. 2012:56) show the same
//! recurrence evaluates the DTFT at any ω, not only at bin centres, once the
//! result is rotated: `X(ω) = Σ x[n]·e^{−jωn} = e^{−jωL}·y` (at integer bins
//! `e^{−jωL} = 1` and the classic form remains).
//!
//! The recurrence is run in Reinsch's form, which avoids the cancellation of
//! `2cos ω ≈ 2` at the low ω a beacon tone has (ω = 2π·512/48000 = 0.067 rad):
//!
//! * cos ω ≥ 0: `λ = −4sin²(ω/2)`, `d[n] = x[n] + λ·s[n−1] + d[n−1]`, `s[n] = s[n−1] + d[n]`,
//!   `y = s·(λ/2 + j·sin ω) + d`
//! * cos ω < 0: `μ = 4cos²(ω/2)`, `d[n] = x[n] + μ·s[n−1] − d[n−1]`, `s[n] = d[n] − s[n−1]`,
//!   `y = s·(μ/2 + j·sin ω) − d`
//!
//! where `s`, `d` are the final values. Reinsch's forms are the accurate ones
//! near ω = 0 and ω = π; for π/4 < ω < 3π/4 the plain recurrence is the more
//! accurate and is used there (`y = s[L−1]·e^{jω} − s[L−2]`).
//! Cost: one multiply and two or three adds per sample.
//! Measured f32 accuracy for a tone's own bin against an f64 reference (rustfft, or
//! the direct sum; `tests/tests/goertzel_reference.rs`): relative error about 1e-6 at
//! L = 256, 1e-5 at L = 16 384 and 5e-4 at L = 2^20 (the longest block) for a low ω,
//! and up to ten times more where the plain form runs (4.7e-3 at ω = π/2, L = 2^20):
//! rounding accumulates roughly as 2^−24·L.
//!
//! ```
//! use undertone_dsp::detect::goertzel::Goertzel;
//! // x = [1, 2, 3, 4]: the DFT's bin 1 is −2 + 2j.
//! let x = Goertzel::from_cycles_per_sample(0.25).dtft_of(&[1.0, 2.0, 3.0, 4.0]);
//! assert!((x.re + 2.0).abs() < 1e-5 && (x.im - 2.0).abs() < 1e-5);
//! ```

use crate::phasor::C32;

/// Precomputed coefficients of the recurrence for one ω.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Goertzel {
    /// λ (low form), μ (high form) or 2cos ω (plain form).
    k: f32,
    /// Which form of the recurrence is used.
    form: Form,
    /// cos ω.
    cos_w: f32,
    /// sin ω.
    sin_w: f32,
    /// ω in rad/sample.
    omega_rad: f64,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
enum Form {
    Low,
    Plain,
    High,
}

/// Running state of the recurrence for one channel.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GoertzelState {
    s: f32,
    d: f32,
}

impl Goertzel {
    /// Coefficients for a frequency in cycles per sample (`f/fs`, any real value in (0, 0.5)).
    pub fn from_cycles_per_sample(cycles: f64) -> Self {
        let omega = 2.0 * core::f64::consts::PI * cycles;
        let (sin_w, c) = super::trig::sin_cos(omega);
        let (form, k) = if c > core::f64::consts::FRAC_1_SQRT_2 {
            let s = super::trig::sin(omega / 2.0);
            (Form::Low, -4.0 * s * s)
        } else if c < -core::f64::consts::FRAC_1_SQRT_2 {
            let h = super::trig::cos(omega / 2.0);
            (Form::High, 4.0 * h * h)
        } else {
            (Form::Plain, 2.0 * c)
        };
        Self { k: k as f32, form, cos_w: c as f32, sin_w: sin_w as f32, omega_rad: omega }
    }

    /// ω in rad/sample.
    pub fn omega_rad(&self) -> f64 {
        self.omega_rad
    }

    /// Feed one sample.
    #[inline(always)]
    pub fn step(&self, st: &mut GoertzelState, x: f32) {
        match self.form {
            Form::Low => {
                st.d += x + self.k * st.s;
                st.s += st.d;
            }
            Form::High => {
                st.d = x + self.k * st.s - st.d;
                st.s = st.d - st.s;
            }
            Form::Plain => {
                // s holds s[n−1], d holds s[n−2].
                let s0 = x + self.k * st.s - st.d;
                st.d = st.s;
                st.s = s0;
            }
        }
    }

    /// `y = e^{jω}s[L−1] − s[L−2] = Σ x[n]·e^{jω(L−n)}` from the final state (not yet rotated).
    pub fn raw(&self, st: &GoertzelState) -> C32 {
        match self.form {
            Form::Low => C32::new(st.s * self.k * 0.5 + st.d, st.s * self.sin_w),
            Form::High => C32::new(st.s * self.k * 0.5 - st.d, st.s * self.sin_w),
            Form::Plain => C32::new(st.s * self.cos_w - st.d, st.s * self.sin_w),
        }
    }

    /// The DTFT `Σ x[n]·e^{−jωn}` of the `len` samples fed since the state was reset.
    pub fn dtft(&self, st: &GoertzelState, len: u32) -> C32 {
        // The phase reduced to [0, 2π) with `floor` rather than f64 `%` (whose `fmod` would
        // cost the board image 3 KiB); any turn of 2π gives the same rotation.
        use core::f64::consts::TAU;
        let ph = self.omega_rad * len as f64;
        let rot = crate::phasor::unit(-(ph - TAU * libm::floor(ph / TAU)) as f32);
        self.raw(st) * rot
    }

    /// One-shot DTFT of a slice (unwindowed).
    pub fn dtft_of(&self, x: &[f32]) -> C32 {
        let mut st = GoertzelState::default();
        for &v in x {
            self.step(&mut st, v);
        }
        self.dtft(&st, x.len() as u32)
    }
}
