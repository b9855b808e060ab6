//! The field models (`dsp::field`) against published formulas, and against the
//! Biot–Savart law integrated numerically here in f64 (a reference independent of
//! the closed forms the models use).
//!
//! * Dipole: `B = μ0/(4πr³)·[3(m·r̂)r̂ − m]` (Griffiths, *Introduction to
//!   Electrodynamics*, 4th ed., eq. 5.89; equation number from memory).
//! * Biot–Savart law for a line current: `B = μ0I/4π ∮ dl × R̂/R²` (Griffiths
//!   eq. 5.34, number from memory), integrated here by quadrature for a circular loop
//!   and for a long straight wire.
//! * Loop in its plane: exact values from complete elliptic integrals (Simpson, Lane,
//!   Immer & Youngquist, *Simple Analytic Expressions for the Magnetic Field of a
//!   Circular Current Loop*, NASA technical report, 2001), derived values, see
//!   tests/REFERENCES.md.

use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use undertone_dsp::field::dipole::dipole_field;
use undertone_dsp::field::line::line_field;

type V = [f64; 3];

fn sub(a: V, b: V) -> V {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}
fn cross(a: V, b: V) -> V {
    [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]
}
fn norm(a: V) -> f64 {
    (a[0] * a[0] + a[1] * a[1] + a[2] * a[2]).sqrt()
}
fn f32v(a: V) -> [f32; 3] {
    a.map(|v| v as f32)
}
fn f64v(a: [f32; 3]) -> V {
    a.map(|v| v as f64)
}

/// Biot–Savart for a circular loop of radius `a` (m) in the z = 0 plane about the
/// origin, current `i` (A) counter-clockwise seen from +z, by the trapezoid rule over
/// `k` segments (exponentially accurate for this smooth periodic integrand).
fn loop_biot_savart(a: f64, i: f64, p: V, k: usize) -> V {
    let mut b = [0.0; 3];
    let dphi = std::f64::consts::TAU / k as f64;
    for s in 0..k {
        let phi = s as f64 * dphi;
        let (sn, cs) = phi.sin_cos();
        let l = [a * cs, a * sn, 0.0];
        let dl = [-a * sn * dphi, a * cs * dphi, 0.0];
        let r = sub(p, l);
        let d = norm(r);
        let c = cross(dl, r);
        for j in 0..3 {
            b[j] += 1e-7 * i * c[j] / (d * d * d);
        }
    }
    b
}

/// Biot–Savart for an infinite straight wire through `o` along unit `u`, current `i`,
/// integrated over the position t along the wire with t = ρ·tan θ (θ uniform in
/// (−π/2, π/2), `k` midpoints), so the infinite line is covered.
fn wire_biot_savart(i: f64, o: V, u: V, p: V, k: usize) -> V {
    let r0 = sub(p, o);
    let along = r0[0] * u[0] + r0[1] * u[1] + r0[2] * u[2];
    let foot = [o[0] + along * u[0], o[1] + along * u[1], o[2] + along * u[2]];
    let rho = norm(sub(p, foot));
    let mut b = [0.0; 3];
    let dth = std::f64::consts::PI / k as f64;
    for s in 0..k {
        let th = -std::f64::consts::FRAC_PI_2 + (s as f64 + 0.5) * dth;
        let t = rho * th.tan();
        let dt = rho / th.cos().powi(2) * dth;
        let l = [foot[0] + t * u[0], foot[1] + t * u[1], foot[2] + t * u[2]];
        let r = sub(p, l);
        let d = norm(r);
        let c = cross([u[0] * dt, u[1] * dt, u[2] * dt], r);
        for j in 0..3 {
            b[j] += 1e-7 * i * c[j] / (d * d * d);
        }
    }
    b
}

#[test]
fn dipole_spot_values_griffiths_5_89() {
    // m = (1,0,0) A·m² at the origin, eq. 5.89 by hand (μ0/4π = 1e-7 T·m/A):
    // r = (0,0,1): m·r̂ = 0, B = −m·1e-7 = (−1e-7, 0, 0) T;
    // r = (1/√2,0,1): r = √1.5, m·r̂ = 1/√3, 3(m·r̂)r̂ − m = (0, 0, √2), B_z = 1e-7·√2/1.5^1.5 = 7.69800e-8 T;
    // r = (0.5,0,1): r = √1.25, B = 1e-7·(3·0.2·(0.5, 0, 1) − (1,0,0))/1.25^1.5 = (−2.86217e-8, 0, 8.58650e-8) T.
    // magpylib's dipole gives the same. f32 evaluation: 1e-6 relative.
    let m = [1.0, 0.0, 0.0];
    let close = |a: f32, b: f64| ((a as f64) - b).abs() <= 1e-6 * b.abs();
    let b = dipole_field(m, [0.0; 3], [0.0, 0.0, 1.0]);
    assert!(close(b[0], -1.000e-7) && b[1] == 0.0 && b[2].abs() < 1e-15, "{b:?}");
    let b = dipole_field(m, [0.0; 3], [std::f32::consts::FRAC_1_SQRT_2, 0.0, 1.0]);
    assert!(b[0].abs() < 1e-13 && close(b[2], 1e-7 * 2f64.sqrt() / 1.5f64.powf(1.5)), "{b:?}");
    assert!((b[2] as f64 - 7.69800e-8).abs() < 1e-13);
    let b = dipole_field(m, [0.0; 3], [0.5, 0.0, 1.0]);
    assert!((b[0] as f64 + 2.86217e-8).abs() < 1e-13 && (b[2] as f64 - 8.58650e-8).abs() < 1e-13, "{b:?}");
}

#[test]
fn dipole_against_eq_5_89_in_f64_at_random_points() {
    // Eq. 5.89 written out in f64 at random points and moments: f32 within 1e-5 of the
    // field's scale μ0|m|/(4πr³) (f32 rounding of r³ and the products: ~1e-7).
    let mut rng = StdRng::seed_from_u64(12345);
    for _ in 0..200 {
        let m: V = std::array::from_fn(|_| rng.random_range(-1.0..1.0));
        let r: V = [rng.random_range(-3.0..3.0), rng.random_range(-3.0..3.0), rng.random_range(-6.5..-0.5)];
        let d = norm(r);
        let mr = (m[0] * r[0] + m[1] * r[1] + m[2] * r[2]) / d;
        let want: V = std::array::from_fn(|i| 1e-7 / d.powi(3) * (3.0 * mr * r[i] / d - m[i]));
        let got = f64v(dipole_field(f32v(m), [0.0; 3], f32v(r)));
        let scale = 1e-7 / d.powi(3) * norm(m);
        assert!(norm(sub(got, want)) < 1e-5 * scale, "{got:?} {want:?}");
    }
}

#[test]
fn loop_quadrature_reproduces_the_published_exact_field() {
    // The loop integral above against the exact in-plane values (elliptic integrals,
    // Simpson et al. 2001; I = 1 A, a = 1 m): 1e-8 relative with 4096 segments.
    for (rho, exact) in [(2.0f64, -5.417318486e-8f64), (5.0, -2.631284391e-9), (10.0, -3.177307523e-10), (20.0, -3.938064314e-11)] {
        let b = loop_biot_savart(1.0, 1.0, [rho, 0.0, 0.0], 4096);
        assert!((b[2] / exact - 1.0).abs() < 1e-8, "ρ/a = {rho}: {} vs {exact}", b[2]);
        assert!(b[0].abs() < 1e-9 * exact.abs() && b[1].abs() < 1e-9 * exact.abs());
    }
    // On the axis: B_z = μ0Ia²/(2(a² + z²)^{3/2}) (Griffiths Ex. 5.6, number from memory).
    for z in [0.5f64, 2.0, 10.0] {
        let b = loop_biot_savart(1.0, 1.0, [0.0, 0.0, z], 4096);
        let exact = 4e-7 * std::f64::consts::PI / (2.0 * (1.0 + z * z).powf(1.5));
        assert!((b[2] / exact - 1.0).abs() < 1e-10, "z = {z}: {} vs {exact}", b[2]);
    }
}

#[test]
fn dipole_model_error_against_an_exact_loop() {
    // A loop of radius a carrying I is a dipole m = I·πa² far away. The dipole model's
    // relative error against the loop (integrated above) follows the published table:
    // in the plane −0.275104, −0.0448489, −0.0112406, −0.00281191 at ρ/a = 2, 5, 10, 20
    // (derived from Simpson et al. 2001; leading term −(9/8)(a/ρ)²), and on the axis
    // (1 + a²/z²)^{3/2} − 1 (from Griffiths Ex. 5.6; leading term +1.5(a/z)²).
    // f32 dipole evaluation: 1e-6 relative, so 2e-6 on the error.
    let m = std::f32::consts::PI;
    for (rho, want) in [(2.0f64, -0.275104f64), (5.0, -0.0448489), (10.0, -0.0112406), (20.0, -0.00281191)] {
        let exact = loop_biot_savart(1.0, 1.0, [rho, 0.0, 0.0], 4096)[2];
        let err = dipole_field([0.0, 0.0, m], [0.0; 3], [rho as f32, 0.0, 0.0])[2] as f64 / exact - 1.0;
        assert!((err - want).abs() < 2e-6, "ρ/a = {rho}: {err} vs {want}");
    }
    for z in [2.0f64, 10.0, 20.0] {
        let exact = loop_biot_savart(1.0, 1.0, [0.0, 0.0, z], 4096)[2];
        let err = dipole_field([0.0, 0.0, m], [0.0; 3], [0.0, 0.0, z as f32])[2] as f64 / exact - 1.0;
        let want = (1.0 + 1.0 / (z * z)).powf(1.5) - 1.0;
        assert!((err - want).abs() < 2e-6, "z/a = {z}: {err} vs {want}");
    }
    // The claim in the dipole model's documentation: a source of a few centimetres (a loop
    // of radius 1.5 cm) is a point dipole to better than 0.1 % at locating distances (0.6 m
    // and beyond), in every direction. Worst case on the axis: 1.5·(0.015/0.6)² = 9.4e-4.
    let a = 0.015f64;
    let mut rng = StdRng::seed_from_u64(3);
    let mut worst = 0.0f64;
    for k in 0..64 {
        // Directions from the axis (k = 0) to the plane (k = 1) and at random.
        let (th, ph): (f64, f64) = match k {
            0 => (0.0, 0.0),
            1 => (std::f64::consts::FRAC_PI_2, 0.0),
            _ => (rng.random_range(0.0..std::f64::consts::PI), rng.random_range(0.0..std::f64::consts::TAU)),
        };
        let p = [0.6 * th.sin() * ph.cos(), 0.6 * th.sin() * ph.sin(), 0.6 * th.cos()];
        let exact = loop_biot_savart(a, 1.0, p, 4096);
        let dip = f64v(dipole_field([0.0, 0.0, (std::f64::consts::PI * a * a) as f32], [0.0; 3], f32v(p)));
        worst = worst.max(norm(sub(dip, exact)) / norm(exact));
    }
    assert!(worst < 1e-3, "a point dipole is off by {worst:e} at 0.6 m from a 1.5 cm loop");
    assert!((worst / (1.5 * (a / 0.6).powi(2)) - 1.0).abs() < 0.02, "worst {worst:e}, on the axis 1.5(a/r)²");
}

/// A root of `f` in [lo, hi] by bisection (f changes sign there).
fn bisect(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let flo = f(lo);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if (f(mid) > 0.0) == (flo > 0.0) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// The maximum of `f` on [lo, hi] by golden-section search.
fn argmax(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let g = 0.5 * (5f64.sqrt() - 1.0);
    for _ in 0..200 {
        let (c, d) = (hi - g * (hi - lo), lo + g * (hi - lo));
        if f(c) > f(d) {
            hi = d;
        } else {
            lo = c;
        }
    }
    0.5 * (lo + hi)
}

#[test]
fn level_dipole_features_found_on_the_modelled_field() {
    // A level dipole m·x̂ at depth h, the receiver moving along its axis at (x, 0, 0).
    // From eq. 5.89: B_x = K(2x² − h²)/(x² + h²)^{5/2}, B_z = 3Kxh/(x² + h²)^{5/2}, so the
    // main peak is −K/h³, the nulls of B_x sit at x = ±h/√2 (so depth = null span/√2 =
    // 0.707107 × span, the trade's "0.7 × span" rule), the field there is vertical,
    // 0.769800·K/h³, and the secondary peaks of opposite sign sit at x = ±√1.5·h with
    // 0.2023858 of the main peak (derived, see tests/REFERENCES.md). Here the nulls and
    // peaks are *found* on the model's field, by bisection and golden-section search
    // (the model is f32: nulls and ratios to 1e-5 relative; a maximum's position only to
    // about √(2^−24) = 2.4e-4 of h, as the field is flat there: 1e-3).
    for h in [0.5f64, 1.0, 2.0, 4.0] {
        let src = [0.0, 0.0, -h as f32];
        let b = |x: f64| dipole_field([1.0, 0.0, 0.0], src, [x as f32, 0.0, 0.0]);
        let k = 1e-7 / h.powi(3);
        let main = b(0.0)[0] as f64;
        assert!((main / -k - 1.0).abs() < 1e-6, "main peak {main}");
        let bx = |x: f64| b(x)[0] as f64;
        let ahead = bisect(bx, 0.1 * h, 1.0 * h);
        let behind = bisect(bx, -h, -0.1 * h);
        assert!((ahead / (h / 2f64.sqrt()) - 1.0).abs() < 1e-5, "null ahead at {ahead}");
        assert!((behind / (-h / 2f64.sqrt()) - 1.0).abs() < 1e-5, "null behind at {behind}");
        // The trade's rule with the factor as printed (0.707107 = 1/√2 to 6 digits).
        #[allow(clippy::approx_constant)]
        let depth_from_span = (ahead - behind) * 0.707107;
        assert!((depth_from_span / h - 1.0).abs() < 1e-5, "depth from null span {depth_from_span} vs {h}");
        let at_null = b(ahead);
        assert!(((at_null[2] as f64) / (0.769800 * k) - 1.0).abs() < 1e-5, "field at the null {at_null:?}");
        let xs = argmax(bx, 0.9 * h, 2.0 * h);
        assert!((xs / (1.5f64.sqrt() * h) - 1.0).abs() < 1e-3, "secondary peak at {xs}");
        assert!((bx(xs) / -main - 0.2023858).abs() < 1e-5, "secondary peak {}", bx(xs) / main);
    }
}

#[test]
fn line_current_against_biot_savart_quadrature() {
    // Infinite straight wire: the model's closed form μ0I/(2πρ)·(d̂ × ρ̂) against the
    // Biot–Savart integral along the wire, at random lines and points: f32 within 1e-5.
    let mut rng = StdRng::seed_from_u64(99);
    for _ in 0..100 {
        let mut u: V = std::array::from_fn(|_| rng.random_range(-1.0..1.0));
        let n = norm(u);
        u = u.map(|v| v / n);
        let o: V = std::array::from_fn(|_| rng.random_range(-2.0..2.0));
        let p: V = std::array::from_fn(|_| rng.random_range(-2.0..2.0));
        let i = rng.random_range(-5.0..5.0);
        let want = wire_biot_savart(i, o, u, p, 20_000);
        let got = f64v(line_field(i as f32, f32v(o), f32v(u), f32v(p)));
        assert!(norm(sub(got, want)) < 1e-5 * norm(want), "{got:?} vs {want:?}");
    }
    // The sign (right-hand rule): a current along +x 1.5 m below the receiver makes a field
    // along −y above it (x̂ × ẑ = −ŷ), of 2e-7·I/ρ; reversing the current reverses it.
    let b = line_field(2.0, [0.0, 0.0, -1.5], [1.0, 0.0, 0.0], [3.0, 0.0, 0.0]);
    assert!(b[0].abs() < 1e-15 && b[2].abs() < 1e-15, "{b:?}");
    assert!(((b[1] as f64) / (-2e-7 * 2.0 / 1.5) - 1.0).abs() < 1e-6, "{b:?}");
    let r = line_field(-2.0, [0.0, 0.0, -1.5], [1.0, 0.0, 0.0], [3.0, 0.0, 0.0]);
    assert_eq!(r[1], -b[1]);
    // Level with the wire, to its left (+y), the field points up: d̂ × ρ̂ = x̂ × ŷ = +ẑ.
    let s = line_field(2.0, [0.0, 0.0, -1.5], [1.0, 0.0, 0.0], [0.0, 1.0, -1.5]);
    assert!(s[2] > 0.0 && s[0].abs() < 1e-15 && s[1].abs() < 1e-15, "{s:?}");
}
