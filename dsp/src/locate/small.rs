//! Fixed-size matrix helpers for the locating fits: 3×3 blocks and small
//! symmetric positive-definite systems, in f32 on the stack.
//!
//! Written out rather than taken from a linear-algebra crate: the sizes are
//! fixed and tiny (3 and 4), the board runs exactly this arithmetic (so the
//! host and the Cortex-M4F give the same bits), and nothing here allocates or
//! panics. The SPD inverse is the Cholesky factorisation `A = LLᵀ` (Golub &
//! Van Loan, *Matrix Computations*, 4th ed., alg. 4.2.1); the 3×3 inverse is
//! the adjugate over the determinant.

/// A 3×3 matrix, rows first.
pub type M3 = [[f32; 3]; 3];

/// `a·b` for 3×3 matrices.
pub fn mul3(a: &M3, b: &M3) -> M3 {
    let mut o = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            o[i][j] = a[i][0] * b[0][j] + a[i][1] * b[1][j] + a[i][2] * b[2][j];
        }
    }
    o
}

/// `aᵀ` for a 3×3 matrix.
pub fn transpose3(a: &M3) -> M3 {
    [[a[0][0], a[1][0], a[2][0]], [a[0][1], a[1][1], a[2][1]], [a[0][2], a[1][2], a[2][2]]]
}

/// Inverse of a 3×3 matrix by its adjugate; `None` when the determinant is not
/// positive and finite or is below `1e-7` of the product of the diagonal (a
/// symmetric positive-definite matrix that is numerically singular in f32).
pub fn inv3_spd(a: &M3) -> Option<M3> {
    let c00 = a[1][1] * a[2][2] - a[1][2] * a[2][1];
    let c01 = a[1][2] * a[2][0] - a[1][0] * a[2][2];
    let c02 = a[1][0] * a[2][1] - a[1][1] * a[2][0];
    let det = a[0][0] * c00 + a[0][1] * c01 + a[0][2] * c02;
    let diag = a[0][0] * a[1][1] * a[2][2];
    if !(det > 1e-7 * diag && det.is_finite() && diag > 0.0) {
        return None;
    }
    let inv = 1.0 / det;
    let o = [
        [c00 * inv, (a[0][2] * a[2][1] - a[0][1] * a[2][2]) * inv, (a[0][1] * a[1][2] - a[0][2] * a[1][1]) * inv],
        [c01 * inv, (a[0][0] * a[2][2] - a[0][2] * a[2][0]) * inv, (a[0][2] * a[1][0] - a[0][0] * a[1][2]) * inv],
        [c02 * inv, (a[0][1] * a[2][0] - a[0][0] * a[2][1]) * inv, (a[0][0] * a[1][1] - a[0][1] * a[1][0]) * inv],
    ];
    o.iter().flatten().all(|v| v.is_finite()).then_some(o)
}

/// Inverse of a K×K symmetric positive-definite matrix by Cholesky; `None` when a
/// pivot is not positive (the matrix is singular or indefinite in f32).
pub fn inv_spd<const K: usize>(a: &[[f32; K]; K]) -> Option<[[f32; K]; K]> {
    let mut l = [[0.0f32; K]; K];
    for j in 0..K {
        let mut d = a[j][j];
        for k in 0..j {
            d -= l[j][k] * l[j][k];
        }
        if !(d > 1e-12 * libm::fabsf(a[j][j]).max(1e-30) && d.is_finite()) {
            return None;
        }
        let ljj = libm::sqrtf(d);
        l[j][j] = ljj;
        for i in j + 1..K {
            let mut s = a[i][j];
            for k in 0..j {
                s -= l[i][k] * l[j][k];
            }
            l[i][j] = s / ljj;
        }
    }
    // Invert L (lower triangular), then A⁻¹ = L⁻ᵀL⁻¹.
    let mut li = [[0.0f32; K]; K];
    for j in 0..K {
        li[j][j] = 1.0 / l[j][j];
        for i in j + 1..K {
            let mut s = 0.0;
            for k in j..i {
                s -= l[i][k] * li[k][j];
            }
            li[i][j] = s / l[i][i];
        }
    }
    let mut o = [[0.0f32; K]; K];
    for i in 0..K {
        for j in 0..=i {
            let mut s = 0.0;
            for k in i..K {
                s += li[k][i] * li[k][j];
            }
            o[i][j] = s;
            o[j][i] = s;
        }
    }
    o.iter().flatten().all(|v| v.is_finite()).then_some(o)
}

/// Wrap an angle into (−π, π].
pub fn wrap_pi(a: f32) -> f32 {
    if !a.is_finite() {
        return 0.0;
    }
    // The nearest whole turn taken off (`roundf`, not `fmodf`: the angles here are a few
    // turns at most, and `fmodf`'s exact remainder cost 300 bytes of the board's flash).
    let tau = core::f32::consts::TAU;
    let x = a - tau * libm::roundf(a / tau);
    if x <= -core::f32::consts::PI {
        x + tau
    } else if x > core::f32::consts::PI {
        x - tau
    } else {
        x
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inverses_give_identity() {
        let a: M3 = [[4.0, 1.0, 0.5], [1.0, 3.0, 0.2], [0.5, 0.2, 2.0]];
        let i = mul3(&a, &inv3_spd(&a).unwrap());
        let b = inv_spd(&a).unwrap();
        let j = mul3(&a, &b);
        for r in 0..3 {
            for c in 0..3 {
                let e = if r == c { 1.0 } else { 0.0 };
                assert!((i[r][c] - e).abs() < 1e-6 && (j[r][c] - e).abs() < 1e-6);
            }
        }
        assert!(inv3_spd(&[[1.0, 1.0, 0.0], [1.0, 1.0, 0.0], [0.0, 0.0, 1.0]]).is_none());
        assert!(inv_spd(&[[1.0, 2.0], [2.0, 1.0]]).is_none());
        assert!(inv_spd(&[[f32::NAN, 0.0], [0.0, 1.0]]).is_none());
    }

    #[test]
    fn wrap_stays_in_range() {
        for a in [-10.0f32, -3.2, -3.1, 0.0, 3.1, 3.2, 10.0, 100.0] {
            let w = wrap_pi(a);
            assert!(w > -core::f32::consts::PI - 1e-6 && w <= core::f32::consts::PI + 1e-6, "{a} -> {w}");
            assert!((w.sin() - a.sin()).abs() < 1e-3 && (w.cos() - a.cos()).abs() < 1e-3);
        }
    }
}
