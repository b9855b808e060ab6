//! One-station fix: least-squares fit of the dipole model to every coil reading.
//!
//! Unknowns `θ = (x, y, h, ψ, α, K)`: the sonde's position ahead (x) and to the
//! left (y) of the lower coil centre and its depth h (m), its axis yaw ψ and
//! pitch α (rad), and its strength K (reading units·m³). Model for coil c at
//! `p_c` with axis `n_c`: `a_c(θ) = K·[3(u·r̂)r̂ − u]·n_c/|r|³` with
//! `u = (cos α cos ψ, cos α sin ψ, sin α)`, `r = p_c − (x, y, −h)` (Griffiths
//! eq. 5.89). Levenberg–Marquardt on the noise-weighted residuals
//! `(a_c(θ) − a_c)/σ_c` with a central-difference Jacobian and fixed-size
//! normal equations (no allocation), from a start built from the gradient
//! depth, the bearing and the vertical ratio (several starts, the best kept).
//!
//! With six coils and six unknowns the fit is exactly determined; a calibrated
//! strength K removes one unknown and leaves one degree of freedom, so the
//! residual `χ²` can flag a field that is not a clean dipole. Uncertainty is
//! the Cramér–Rao bound of the model, `cov = (JᵀWJ)⁻¹` (Kay, *Fundamentals of
//! Statistical Signal Processing* vol. 1, 1993, ch. 3).

use crate::field::head::Head;
use crate::locate::guidance::offset_from_ratio;

/// Number of fitted parameters.
pub const P: usize = 6;
/// Levenberg–Marquardt iterations per start, at most.
pub const MAX_ITERATIONS: usize = 60;

/// Result of the one-station fix.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Fix {
    /// (x ahead m, y left m, depth m, yaw rad, pitch rad, K).
    pub params: [f32; P],
    /// One-sigma of each parameter (Cramér–Rao from the Jacobian).
    pub sigma: [f32; P],
    /// χ² of the weighted residuals.
    pub chi2: f32,
    /// Degrees of freedom (coils − unknowns).
    pub dof: i32,
    /// Converged.
    pub converged: bool,
}

/// Model readings for parameters θ (evaluated in f64: the fit differentiates it numerically).
pub fn model<const N: usize>(head: &Head<N>, th: &[f64; P]) -> [f64; N] {
    let (sy, cy) = (libm::sin(th[3]), libm::cos(th[3]));
    let (sp, cp) = (libm::sin(th[4]), libm::cos(th[4]));
    let u = [cp * cy, cp * sy, sp];
    let src = [th[0], th[1], -th[2]];
    let mut out = [0.0; N];
    for (c, coil) in head.coils.iter().enumerate() {
        let r = [coil.pos_m[0] as f64 - src[0], coil.pos_m[1] as f64 - src[1], coil.pos_m[2] as f64 - src[2]];
        let d2 = r[0] * r[0] + r[1] * r[1] + r[2] * r[2];
        let d = libm::sqrt(d2);
        if !(d > 1e-9) {
            continue;
        }
        let ur = (u[0] * r[0] + u[1] * r[1] + u[2] * r[2]) / d;
        let n = coil.axis;
        let mut b_n = 0.0;
        for k in 0..3 {
            b_n += (3.0 * ur * r[k] / d - u[k]) * n[k] as f64;
        }
        out[c] = th[5] * b_n / (d2 * d) * coil.gain as f64;
    }
    out
}

/// Fit readings `a` with noise `sigma`; `known_k` fixes K when calibrated.
pub fn fit<const N: usize>(head: &Head<N>, a: &[f32; N], sigma: &[f32; N], known_k: Option<f32>) -> Fix {
    fit_from(head, a, sigma, known_k, None)
}

/// As [`fit`], starting from a previous fix when given (a receiver moving a few
/// centimetres between readouts is close to it): one descent from there, and
/// the full set of starts only if that lands poorly (χ² above 4 per reading).
pub fn fit_from<const N: usize>(head: &Head<N>, a: &[f32; N], sigma: &[f32; N], known_k: Option<f32>, start: Option<[f32; P]>) -> Fix {
    let nfree = if known_k.is_some() { P - 1 } else { P };
    let fail = Fix { params: [0.0; P], sigma: [0.0; P], chi2: f32::INFINITY, dof: N as i32 - nfree as i32, converged: false };
    if N < nfree || a.iter().chain(sigma.iter()).any(|v| !v.is_finite()) || sigma.iter().any(|s| *s <= 0.0) {
        return fail;
    }
    // Start: gradient depth from the along-coil pair, bearing, ratio.
    let r = head.roles;
    let get = |i: Option<u8>| i.map(|k| a[k as usize] as f64).unwrap_or(0.0);
    let lo = [get(r.lower[0]), get(r.lower[1]), get(r.lower[2])];
    let up = [get(r.upper[0]), get(r.upper[1]), get(r.upper[2])];
    let nlo = libm::sqrt(lo[0] * lo[0] + lo[1] * lo[1] + lo[2] * lo[2]);
    let nup = libm::sqrt(up[0] * up[0] + up[1] * up[1] + up[2] * up[2]);
    let s = head.spacing_m().unwrap_or(0.4) as f64;
    let ratio = if nup > 0.0 { nlo / nup } else { 2.0 };
    let h0 = (s / (libm::cbrt(ratio) - 1.0)).clamp(0.2, 8.0);
    let hor = libm::sqrt(lo[0] * lo[0] + lo[1] * lo[1]);
    let yaw0 = libm::atan2(lo[1], lo[0]);
    let rho = if hor > 0.0 { lo[2] / hor } else { 0.0 };
    let ahead = offset_from_ratio(rho as f32, h0 as f32) as f64;
    let k0 = -hor * h0 * h0 * h0;
    let mut best: Option<([f64; P], f64)> = None;
    if let Some(p) = start.filter(|p| p.iter().all(|v| v.is_finite()) && p[2] > 0.0) {
        let mut th = [0.0f64; P];
        for i in 0..P {
            th[i] = p[i] as f64;
        }
        if let Some(k) = known_k {
            th[5] = if th[5] < 0.0 { -(k as f64).abs() } else { (k as f64).abs() };
        }
        let chi = lm(head, a, sigma, &mut th, nfree);
        if chi.is_finite() && chi <= 4.0 * N as f64 {
            best = Some((th, chi));
        }
    }
    let starts: &[(f64, f64)] = if best.is_some() { &[] } else { &[(1.0, 0.0), (0.0, 0.0), (-1.0, 0.0), (1.0, 1.0), (0.5, 0.0), (-0.5, 0.0)] };
    for &(kx, flip) in starts {
        // Offsets along the bearing: the ratio's estimate, none, its mirror, half the depth either way.
        let dx = if kx.abs() == 1.0 { kx * ahead } else { kx * h0 };
        let dyaw = flip * core::f64::consts::PI;
        let mut th = [dx * libm::cos(yaw0), dx * libm::sin(yaw0), h0, yaw0 + dyaw, 0.0, if dyaw == 0.0 { k0 } else { -k0 }];
        if let Some(k) = known_k {
            th[5] = if th[5] < 0.0 { -(k as f64).abs() } else { (k as f64).abs() };
        }
        let chi = lm(head, a, sigma, &mut th, nfree);
        if chi.is_finite() && best.map(|b| chi < b.1).unwrap_or(true) {
            best = Some((th, chi));
        }
    }
    let Some((mut th, chi2)) = best else { return fail };
    // Canonical form: yaw in (−π/2, π/2], flipping the axis and K together.
    let two_pi = 2.0 * core::f64::consts::PI;
    th[3] = th[3] - two_pi * libm::round(th[3] / two_pi);
    if th[3] > core::f64::consts::FRAC_PI_2 || th[3] <= -core::f64::consts::FRAC_PI_2 {
        th[3] -= core::f64::consts::PI * th[3].signum();
        th[4] = -th[4];
        th[5] = -th[5];
    }
    let (jtj, _) = normal(head, a, sigma, &th, nfree);
    let mut sig = [0.0f32; P];
    if let Some(inv) = invert(&jtj, nfree) {
        for i in 0..nfree {
            sig[i] = libm::sqrt(inv[i][i].max(0.0)) as f32;
        }
    }
    let mut params = [0.0f32; P];
    for i in 0..P {
        params[i] = th[i] as f32;
    }
    let ok = chi2.is_finite() && th[2] > 0.0;
    Fix { params, sigma: sig, chi2: chi2 as f32, dof: N as i32 - nfree as i32, converged: ok }
}

fn residuals<const N: usize>(head: &Head<N>, a: &[f32; N], sigma: &[f32; N], th: &[f64; P]) -> ([f64; N], f64) {
    let m = model(head, th);
    let mut r = [0.0; N];
    let mut chi = 0.0;
    for c in 0..N {
        r[c] = (m[c] - a[c] as f64) / sigma[c] as f64;
        chi += r[c] * r[c];
    }
    (r, chi)
}

fn jacobian<const N: usize>(head: &Head<N>, sigma: &[f32; N], th: &[f64; P], nfree: usize) -> [[f64; P]; N] {
    let mut j = [[0.0; P]; N];
    for k in 0..nfree {
        let step = 1e-6 * libm::fabs(th[k]).max(if k == 5 { 1e-30 } else { 1e-1 });
        let mut tp = *th;
        let mut tm = *th;
        tp[k] += step;
        tm[k] -= step;
        let (mp, mm) = (model(head, &tp), model(head, &tm));
        for c in 0..N {
            j[c][k] = (mp[c] - mm[c]) / (2.0 * step) / sigma[c] as f64;
        }
    }
    j
}

fn normal<const N: usize>(head: &Head<N>, a: &[f32; N], sigma: &[f32; N], th: &[f64; P], nfree: usize) -> ([[f64; P]; P], [f64; P]) {
    let j = jacobian(head, sigma, th, nfree);
    let (r, _) = residuals(head, a, sigma, th);
    let mut jtj = [[0.0; P]; P];
    let mut jtr = [0.0; P];
    for c in 0..N {
        for p in 0..nfree {
            jtr[p] += j[c][p] * r[c];
            for q in 0..nfree {
                jtj[p][q] += j[c][p] * j[c][q];
            }
        }
    }
    (jtj, jtr)
}

fn lm<const N: usize>(head: &Head<N>, a: &[f32; N], sigma: &[f32; N], th: &mut [f64; P], nfree: usize) -> f64 {
    let mut lambda = 1e-3;
    let (_, mut chi) = residuals(head, a, sigma, th);
    for _ in 0..MAX_ITERATIONS {
        let (jtj, jtr) = normal(head, a, sigma, th, nfree);
        let mut m = jtj;
        for i in 0..nfree {
            m[i][i] += lambda * jtj[i][i].max(1e-30);
        }
        let mut rhs = [0.0; P];
        for i in 0..nfree {
            rhs[i] = -jtr[i];
        }
        let Some(delta) = solve(&m, &rhs, nfree) else { return f64::INFINITY };
        let mut trial = *th;
        for i in 0..nfree {
            trial[i] += delta[i];
        }
        if !(trial[2] > 0.01) {
            trial[2] = th[2] * 0.5;
        }
        let (_, c2) = residuals(head, a, sigma, &trial);
        if c2.is_finite() && c2 < chi {
            let rel = (chi - c2) / chi.max(1e-300);
            *th = trial;
            chi = c2;
            lambda = (lambda * 0.3).max(1e-12);
            if rel < 1e-14 || chi < 1e-20 {
                break;
            }
        } else {
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
        }
    }
    chi
}

fn solve(m: &[[f64; P]; P], b: &[f64; P], n: usize) -> Option<[f64; P]> {
    let mut a = *m;
    let mut x = *b;
    for col in 0..n {
        let piv = (col..n).max_by(|&i, &j| libm::fabs(a[i][col]).partial_cmp(&libm::fabs(a[j][col])).unwrap_or(core::cmp::Ordering::Equal))?;
        if !(libm::fabs(a[piv][col]) > 1e-300) {
            return None;
        }
        a.swap(col, piv);
        x.swap(col, piv);
        for row in col + 1..n {
            let f = a[row][col] / a[col][col];
            for k in col..n {
                a[row][k] -= f * a[col][k];
            }
            x[row] -= f * x[col];
        }
    }
    for col in (0..n).rev() {
        let mut s = x[col];
        for k in col + 1..n {
            s -= a[col][k] * x[k];
        }
        x[col] = s / a[col][col];
        if !x[col].is_finite() {
            return None;
        }
    }
    Some(x)
}

fn invert(m: &[[f64; P]; P], n: usize) -> Option<[[f64; P]; P]> {
    let mut out = [[0.0; P]; P];
    for c in 0..n {
        let mut e = [0.0; P];
        e[c] = 1.0;
        let col = solve(m, &e, n)?;
        for r in 0..n {
            out[r][c] = col[r];
        }
    }
    Some(out)
}
