//! Field models against published formulas and values (REFERENCES §1–2).

// Published values are written as the table gives them (e.g. 0.707107, 1.414214), not as constants.
#![allow(clippy::approx_constant)]

use undertone_dsp::field::dipole::dipole_field;
use undertone_dsp::field::line::line_field;

fn close(a: f32, b: f64, rel: f64) -> bool {
    ((a as f64) - b).abs() <= rel * b.abs().max(1e-30)
}

#[test]
fn dipole_spot_values_griffiths_5_89() {
    // m = (1,0,0) A·m² at the origin; B = μ0/(4πr³)[3(m·r̂)r̂ − m] (Griffiths, Introduction to
    // Electrodynamics, eq. 5.89; equation number from memory). Values: REFERENCES §1, agree with magpylib.
    let m = [1.0, 0.0, 0.0];
    let b = dipole_field(m, [0.0; 3], [0.0, 0.0, 1.0]);
    assert!(close(b[0], -1.000e-7, 1e-6) && b[1] == 0.0 && b[2].abs() < 1e-15, "{b:?}");
    let s = std::f32::consts::FRAC_1_SQRT_2;
    let b = dipole_field(m, [0.0; 3], [s, 0.0, 1.0]);
    assert!(b[0].abs() < 1e-13 && close(b[2], 7.69800e-8, 1e-5), "{b:?}");
    let b = dipole_field(m, [0.0; 3], [0.5, 0.0, 1.0]);
    assert!(close(b[0], -2.86217e-8, 1e-5) && close(b[2], 8.58650e-8, 1e-5), "{b:?}");
}

#[test]
fn dipole_against_independent_formula() {
    // Griffiths eq. 5.89 written out independently in f64 at random points and moments.
    let mut seed = 12345u64;
    let mut rnd = || {
        seed = seed.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        ((seed >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
    };
    for _ in 0..200 {
        let m = [rnd(), rnd(), rnd()];
        let r = [rnd() * 3.0, rnd() * 3.0, rnd() * 3.0 - 3.5];
        let d = (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]).sqrt();
        let mr = (m[0] * r[0] + m[1] * r[1] + m[2] * r[2]) / d;
        let want: Vec<f64> = (0..3).map(|i| 1e-7 / d.powi(3) * (3.0 * mr * r[i] / d - m[i])).collect();
        let got = dipole_field([m[0] as f32, m[1] as f32, m[2] as f32], [0.0; 3], [r[0] as f32, r[1] as f32, r[2] as f32]);
        let scale = 1e-7 / d.powi(3) * (m[0] * m[0] + m[1] * m[1] + m[2] * m[2]).sqrt();
        for i in 0..3 {
            assert!(((got[i] as f64) - want[i]).abs() < 1e-5 * scale, "{got:?} {want:?}");
        }
    }
}

#[test]
fn loop_exact_field_against_dipole_table() {
    // Exact field of a circular loop in its plane (complete elliptic integrals; Simpson, Lane,
    // Immer & Youngquist, NASA technical report 2001; table values REFERENCES §2, where the
    // elliptic formula, numerical Biot–Savart and magpylib agree to 9 digits). I = 1 A, a = 1 m,
    // moment m = I·πa². The dipole model must reproduce the tabulated dipole/exact − 1.
    let m = std::f32::consts::PI;
    for (rho, exact, want_err) in [
        (2.0f32, -5.417318486e-8f64, -0.275104f64),
        (5.0, -2.631284391e-9, -0.0448489),
        (10.0, -3.177307523e-10, -0.0112406),
        (20.0, -3.938064314e-11, -0.00281191),
    ] {
        let b = dipole_field([0.0, 0.0, m], [0.0; 3], [rho, 0.0, 0.0]);
        let err = b[2] as f64 / exact - 1.0;
        assert!((err - want_err).abs() < 2e-5, "ρ/a = {rho}: {err} vs {want_err}");
    }
    // On the axis: dipole/exact − 1 = (1 + a²/z²)^{3/2} − 1 (Griffiths Ex. 5.6 for the exact
    // field, example number from memory): 10 radii → +0.0150374 (≈ 1.5 %).
    for (z, want) in [(2.0f32, 0.397543f64), (10.0, 0.0150374), (20.0, 0.00375234)] {
        let b = dipole_field([0.0, 0.0, m], [0.0; 3], [0.0, 0.0, z]) as [f32; 3];
        let exact = 4e-7 * std::f64::consts::PI / (2.0 * (1.0 + (z as f64).powi(2)).powf(1.5));
        let err = b[2] as f64 / exact - 1.0;
        assert!((err - want).abs() < 1e-5, "z/a = {z}: {err}");
    }
    // So a sonde of loop radius 1.5 cm is a point dipole to < 0.1 % beyond 0.6 m (error ≈ 1.5(a/r)²).
    let a = 0.015f64;
    assert!(1.5 * (a / 0.6).powi(2) < 1e-3);
}

#[test]
fn level_dipole_features_from_eq_5_89() {
    // Derived from eq. 5.89 for a level dipole at depth h (REFERENCES §1 table): nulls of Bx at
    // ±h/√2, secondary peaks at ±√1.5·h of opposite sign at 0.2023858 of the main peak, field at
    // the null vertical 0.769800·K/h³.
    for h in [0.5f32, 1.0, 2.0, 4.0] {
        let m = [1.0, 0.0, 0.0];
        let src = [0.0, 0.0, -h];
        let bx = |x: f32| dipole_field(m, src, [x, 0.0, 0.0])[0];
        let main = bx(0.0);
        let k = 1e-7f32;
        assert!(close(main, -(k / h.powi(3)) as f64, 1e-5));
        let xn = h / 2f32.sqrt();
        assert!(bx(xn).abs() < 1e-5 * main.abs(), "null at h/√2: {}", bx(xn));
        let bz_null = dipole_field(m, src, [xn, 0.0, 0.0])[2];
        assert!(close(bz_null, 0.769800 * (k / h.powi(3)) as f64, 1e-5));
        let xs = h * 1.5f32.sqrt();
        let sec = bx(xs);
        assert!(close(-sec / main, 0.2023858, 1e-5), "secondary {}", sec / main);
        // It is a maximum of |Bx| along the axis.
        assert!(bx(xs * 1.01).abs() < sec.abs() && bx(xs * 0.99).abs() < sec.abs());
        // Depth ≈ 0.7 × null span (common practice; exactly 1/√2 = 0.707107).
        assert!(((h / (2.0 * xn)) - 0.707107).abs() < 1e-5);
    }
}

#[test]
fn line_current_biot_savart() {
    // Long straight wire: |B| = μ0I/(2πρ) (Biot–Savart; Griffiths eq. 5.38, number from memory).
    let b = line_field(2.0, [0.0, 0.0, -1.5], [1.0, 0.0, 0.0], [3.0, 0.0, 0.0]);
    let mag = (b[0] * b[0] + b[1] * b[1] + b[2] * b[2]).sqrt();
    assert!(close(mag, 2e-7 * 2.0 / 1.5, 1e-6), "{b:?}");
    // Directly above a line along +x, the field is horizontal along ±y.
    assert!(b[0].abs() < 1e-15 && b[2].abs() < 1e-15);
}
