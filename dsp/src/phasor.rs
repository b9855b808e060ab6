//! Phasors: single-precision complex numbers from `num-complex`.
//!
//! A tone `A·cos(ω·n + φ)` measured against the shared reference `cos(ω·n)`
//! (n the absolute sample index) is reported as the phasor `A·e^{jφ}`, a
//! [`C32`] (`num_complex::Complex32`, `re + j·im`).
//!
//! Magnitude, angle and unit phasors go through the `libm` crate here rather
//! than through `num-complex`'s `Float` methods: with `num-complex`'s `std`
//! feature switched on by another crate of a build (the tests use `rustfft`),
//! those would call the platform's maths library on the host and `libm` on the
//! board, and the emulator check needs host and board to compute the same bits.

pub use num_complex::Complex32 as C32;

/// Magnitude and angle of a phasor, computed with `libm` (the same bits on every target).
pub trait Phasor {
    /// `|z|`. `assert_eq!(undertone_dsp::phasor::Phasor::magnitude(undertone_dsp::C32::new(3.0, 4.0)), 5.0);`
    fn magnitude(self) -> f32;
    /// Angle in radians, (−π, π].
    fn angle_rad(self) -> f32;
}

impl Phasor for C32 {
    #[inline]
    fn magnitude(self) -> f32 {
        crate::powf::hypotf(self.re, self.im)
    }

    #[inline]
    fn angle_rad(self) -> f32 {
        libm::atan2f(self.im, self.re)
    }
}

/// Unit phasor `e^{jθ}` for θ in radians.
#[inline]
pub fn unit(theta_rad: f32) -> C32 {
    let (s, c) = crate::trigf::sin_cos(theta_rad);
    C32::new(c, s)
}
