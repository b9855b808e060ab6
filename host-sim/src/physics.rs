//! Physics of the synthetic signal, in f64 and independent of the DSP crate's
//! own (f32) field code, so the simulator checks the receiver rather than
//! repeating it.
//!
//! * Dipole: `B = μ0/(4π r³)·[3(m·r̂)r̂ − m]` (Griffiths eq. 5.89), m in A·m².
//! * Line current: `B = μ0 I/(2π ρ)·(d̂ × ρ̂)` (Biot–Savart for a long wire).
//! * Uniform field (mains): a fixed vector in the ground frame.
//! * Conductive ground, for a dipole: the sonde and the coils in one uniform
//!   conducting medium (a whole space), quasi-static, wavenumber
//!   `k = (1 + i)/δ`, `δ = √(2/(ωμ0σ))` the skin depth (Griffiths §9.4.1). The
//!   oscillating dipole's field (Jackson, *Classical Electrodynamics*, 3rd ed.,
//!   eq. 9.36, with k complex; time factor `e^{−iωt}`) is the phasor
//!   `B = μ0/(4π d³)·e^{ikd}·[(3r̂(r̂·m) − m)(1 − ikd) + (kd)²(m − r̂(r̂·m))]`,
//!   [`dipole_in_ground`]. For d ≪ δ it differs from the static field only at
//!   second order in d/δ, and then mostly in phase: a first-order loss
//!   `e^{−d/δ}` on each path (this simulator's model until now) is not what
//!   the field does. The air above the ground is not modelled (a whole space,
//!   not a half space). Line sources keep the first-order loss `e^{−ρ/δ}` (they
//!   are interference here, not what is located).

/// μ0/4π, T·m/A.
pub const MU0_4PI: f64 = 1e-7;
/// μ0, T·m/A.
pub const MU0: f64 = 4e-7 * std::f64::consts::PI;

/// A 3-vector in f64.
pub type V = [f64; 3];

/// a·b
pub fn dot(a: V, b: V) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Dipole field at `p` of moment `m` at `s`.
pub fn dipole(m: V, s: V, p: V) -> V {
    let r = [p[0] - s[0], p[1] - s[1], p[2] - s[2]];
    let d2 = dot(r, r);
    let d = d2.sqrt();
    if d < 1e-9 {
        return [0.0; 3];
    }
    let mr = dot(m, r) / d;
    let k = MU0_4PI / (d2 * d);
    [k * (3.0 * mr * r[0] / d - m[0]), k * (3.0 * mr * r[1] / d - m[1]), k * (3.0 * mr * r[2] / d - m[2])]
}

/// Dipole field at `p` of moment `m` at `s` in a conducting whole space of skin
/// depth `delta_m` (infinite: the static field): the phasor's real and imaginary
/// parts (module docs; Jackson eq. 9.36 with `k = (1 + i)/δ`).
pub fn dipole_in_ground(m: V, s: V, p: V, delta_m: f64) -> (V, V) {
    if !(delta_m.is_finite() && delta_m > 0.0) {
        return (dipole(m, s, p), [0.0; 3]);
    }
    let r = [p[0] - s[0], p[1] - s[1], p[2] - s[2]];
    let d = dot(r, r).sqrt();
    if d < 1e-9 {
        return ([0.0; 3], [0.0; 3]);
    }
    let n = [r[0] / d, r[1] / d, r[2] / d];
    let x = d / delta_m;
    // 2(r̂·m)r̂ and the transverse part m − r̂(r̂·m): B_static = μ0/(4πd³)·(2 radial − transverse).
    let k = MU0_4PI / (d * d * d);
    let nm = dot(n, m);
    // e^{ikd} = e^{−x}(cos x + i sin x); 1 − ikd = (1 + x) − ix; 1 − ikd − (kd)² = (1 + x) − i(x + 2x²).
    let (sx, cx) = x.sin_cos();
    let e = (-x).exp();
    let mul = |a: f64, b: f64| (e * (cx * a - sx * b), e * (sx * a + cx * b));
    let ar = mul(1.0 + x, -x);
    let at = mul(1.0 + x, -(x + 2.0 * x * x));
    let mut re = [0.0; 3];
    let mut im = [0.0; 3];
    for i in 0..3 {
        let rad = 2.0 * nm * n[i] * k;
        let tr = (m[i] - nm * n[i]) * k;
        re[i] = ar.0 * rad - at.0 * tr;
        im[i] = ar.1 * rad - at.1 * tr;
    }
    (re, im)
}

/// Line-current field at `p`, line through `o` along unit `u`, current `i`.
pub fn line(i: f64, o: V, u: V, p: V) -> V {
    let r = [p[0] - o[0], p[1] - o[1], p[2] - o[2]];
    let a = dot(r, u);
    let rho = [r[0] - a * u[0], r[1] - a * u[1], r[2] - a * u[2]];
    let d = dot(rho, rho).sqrt();
    if d < 1e-9 {
        return [0.0; 3];
    }
    let k = MU0 * i / (2.0 * std::f64::consts::PI * d * d);
    // u × ρ
    [k * (u[1] * rho[2] - u[2] * rho[1]), k * (u[2] * rho[0] - u[0] * rho[2]), k * (u[0] * rho[1] - u[1] * rho[0])]
}

/// Unit vector from yaw (from east towards north) and pitch (up), radians.
pub fn axis(yaw: f64, pitch: f64) -> V {
    [pitch.cos() * yaw.cos(), pitch.cos() * yaw.sin(), pitch.sin()]
}

/// Skin depth δ = √(2/(ωμ0σ)), m (infinite for σ = 0).
pub fn skin_depth_m(freq_hz: f64, sigma_s_per_m: f64) -> f64 {
    if sigma_s_per_m <= 0.0 {
        return f64::INFINITY;
    }
    (2.0 / (2.0 * std::f64::consts::PI * freq_hz * MU0 * sigma_s_per_m)).sqrt()
}
