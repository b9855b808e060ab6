//! A minimal single-precision complex number.
//!
//! Phasors in this crate are `C32 { re, im }` with `re + j·im`. A tone
//! `A·cos(ω·n + φ)` measured against the shared reference `cos(ω·n)` (n the
//! absolute sample index) is reported as the phasor `A·e^{jφ}`.

use core::ops::{Add, AddAssign, Mul, Neg, Sub};

/// Complex number in `f32`.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct C32 {
    /// Real (in-phase) part.
    pub re: f32,
    /// Imaginary (quadrature) part.
    pub im: f32,
}

impl C32 {
    /// Zero.
    pub const ZERO: C32 = C32 { re: 0.0, im: 0.0 };

    /// From real and imaginary parts. `C32::new(1.0, 2.0).im == 2.0`
    pub const fn new(re: f32, im: f32) -> Self {
        Self { re, im }
    }

    /// Unit phasor `e^{jθ}` for θ in radians.
    pub fn from_angle(theta_rad: f32) -> Self {
        Self { re: libm::cosf(theta_rad), im: libm::sinf(theta_rad) }
    }

    /// Complex conjugate.
    pub fn conj(self) -> Self {
        Self { re: self.re, im: -self.im }
    }

    /// |z|².
    pub fn norm_sqr(self) -> f32 {
        self.re * self.re + self.im * self.im
    }

    /// |z|.
    pub fn abs(self) -> f32 {
        libm::hypotf(self.re, self.im)
    }

    /// Argument in radians, (−π, π].
    pub fn arg(self) -> f32 {
        libm::atan2f(self.im, self.re)
    }

    /// Multiply by a real number.
    pub fn scale(self, k: f32) -> Self {
        Self { re: self.re * k, im: self.im * k }
    }

    /// True when both parts are finite.
    pub fn is_finite(self) -> bool {
        self.re.is_finite() && self.im.is_finite()
    }
}

impl Add for C32 {
    type Output = C32;
    fn add(self, o: C32) -> C32 {
        C32::new(self.re + o.re, self.im + o.im)
    }
}

impl AddAssign for C32 {
    fn add_assign(&mut self, o: C32) {
        self.re += o.re;
        self.im += o.im;
    }
}

impl Sub for C32 {
    type Output = C32;
    fn sub(self, o: C32) -> C32 {
        C32::new(self.re - o.re, self.im - o.im)
    }
}

impl Mul for C32 {
    type Output = C32;
    fn mul(self, o: C32) -> C32 {
        C32::new(self.re * o.re - self.im * o.im, self.re * o.im + self.im * o.re)
    }
}

impl Neg for C32 {
    type Output = C32;
    fn neg(self) -> C32 {
        C32::new(-self.re, -self.im)
    }
}
