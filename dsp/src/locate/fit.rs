//! One-station fix: least-squares fit of the dipole model to every coil reading.
//!
//! Unknowns `θ = (x, y, h, ψ, α, K)`: the sonde's position ahead (x) and to the
//! left (y) of the lower coil centre and its depth h (m), its axis yaw ψ and
//! pitch α (rad), and its strength K (reading units·m³). Model for coil c at
//! `p_c` with axis `n_c`: `a_c(θ) = K·[3(u·r̂)r̂ − u]·n_c/|r|³` with
//! `u = (cos α cos ψ, cos α sin ψ, sin α)`, `r = p_c − (x, y, −h)` (Griffiths
//! eq. 5.89). Levenberg–Marquardt on the noise-weighted residuals
//! `(a_c(θ) − a_c)/σ_c` with the analytic Jacobian ([`model_jacobian`]) and
//! fixed-size normal equations (no allocation), all in f32 (the Cortex-M4F's
//! FPU), from a start built from the gradient depth, the bearing and the
//! vertical ratio (several starts, the best kept).
//!
//! With six coils and six unknowns the fit is exactly determined; a calibrated
//! strength K removes one unknown and leaves one degree of freedom, so the
//! residual `χ²` can flag a field that is not a clean dipole. Uncertainty is
//! the Cramér–Rao bound of the model, `cov = (JᵀWJ)⁻¹` (Kay, *Fundamentals of
//! Statistical Signal Processing* vol. 1, 1993, ch. 3).

use crate::field::ground::whole_space_factors;
use crate::field::head::Head;
use crate::locate::guidance::offset_from_ratio;

/// Number of fitted parameters.
pub const P: usize = 6;
/// Levenberg–Marquardt iterations per start, at most.
pub const MAX_ITERATIONS: usize = 60;

/// A fitted value with its one-sigma (Cramér–Rao from the Jacobian; infinite
/// when the geometry leaves it undetermined).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Estimate {
    /// Value.
    pub value: f32,
    /// One-sigma.
    pub sigma: f32,
}

/// Result of the one-station fix, in the head's frame (x ahead along the
/// handle, y to the left, from the lower coil centre).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Fix {
    /// The sonde ahead of the lower coil centre, m.
    pub ahead_m: Estimate,
    /// The sonde to the left, m.
    pub left_m: Estimate,
    /// The sonde's depth below the lower coil centre, m.
    pub depth_m: Estimate,
    /// Yaw of the sonde axis from the handle, rad, in (−π/2, π/2].
    pub yaw_rad: Estimate,
    /// Pitch of the sonde axis, rad (positive: the end at +yaw up).
    pub pitch_rad: Estimate,
    /// Strength K (reading units·m³), signed.
    pub strength: Estimate,
    /// χ² of the weighted residuals (the lateral prior's row included).
    pub chi2: f32,
    /// Degrees of freedom (readings − unknowns).
    pub dof: i32,
    /// The descent ended at a finite χ² with a positive depth.
    pub converged: bool,
}

impl Fix {
    /// Parameters as the fit orders them: (ahead, left, depth, yaw, pitch, K).
    pub fn params(&self) -> [f32; P] {
        [self.ahead_m.value, self.left_m.value, self.depth_m.value, self.yaw_rad.value, self.pitch_rad.value, self.strength.value]
    }

    fn from_params(th: [F; P], sig: [f32; P], chi2: f32, dof: i32, converged: bool) -> Self {
        let e = |i: usize| Estimate { value: th[i], sigma: sig[i] };
        Fix { ahead_m: e(0), left_m: e(1), depth_m: e(2), yaw_rad: e(3), pitch_rad: e(4), strength: e(5), chi2, dof, converged }
    }
}

/// What the receiver already knows of the lateral offset, as a prior on
/// `y/h` (the sonde's left offset over its depth) with its one-sigma. Directly
/// over a level sonde the readings do not depend on y at first order (on the
/// plane across its axis the field is along the axis, `−K·x̂/ρ³`): a lateral
/// offset and a shallower depth give the same readings, so the fit needs it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LateralPrior {
    /// y/h.
    pub left_over_depth: f32,
    /// One-sigma of y/h.
    pub sigma: f32,
}

/// The float type of the fit's arithmetic.
type F = f32;

/// Model readings for parameters θ and their Jacobian ∂a_c/∂θ_k (analytic).
///
/// With `r = p_c − s`, `d = |r|`, `q = u·r`, `m = n·r`, `w = n·u`, the unit-moment
/// reading is `f = 3qm/d⁵ − w/d³`; `∂f/∂r = 3(m·u + q·n)/d⁵ − 15qm·r/d⁷ + 3w·r/d⁵`
/// and `∂f/∂u = 3m·r/d⁵ − n/d³`. Since `s = (x, y, −h)`, `∂r/∂x = −x̂`,
/// `∂r/∂y = −ŷ`, `∂r/∂h = +ẑ`; `u(ψ, α)` gives `∂u/∂ψ = (−cα sψ, cα cψ, 0)` and
/// `∂u/∂α = (−sα cψ, −sα sψ, cα)`. Each reading is `K·g_c·f`.
pub fn model_jacobian<const N: usize>(head: &Head<N>, th: &[F; P]) -> ([F; N], [[F; P]; N]) {
    model_jacobian_in(head, th, F::INFINITY)
}

/// [`model_jacobian`] in conducting ground of skin depth `skin_depth_m` (m; infinite: none).
///
/// The reading splits into its part along `r̂`, `R = 2qm/d⁵`, and the transverse
/// rest, `T = qm/d⁵ − w/d³`; the ground scales them by `|A_r(d)|` and `|A_t(d)|`
/// ([`whole_space_factors`]): `f = A_r·R + A_t·T`, written as the static `f`
/// plus `(A_r − 1)·R + (A_t − 1)·T` so that without ground it is the static
/// model to the bit. `∂R/∂r = 2(m·u + q·n)/d⁵ − 10qm·r/d⁷`,
/// `∂T/∂r = (m·u + q·n)/d⁵ − 5qm·r/d⁷ + 3w·r/d⁵`, and the factors add
/// `(A_r'·R + A_t'·T)·r/d`.
pub fn model_jacobian_in<const N: usize>(head: &Head<N>, th: &[F; P], skin_depth_m: F) -> ([F; N], [[F; P]; N]) {
    let (sy, cy) = crate::trigf::sin_cos(th[3]);
    let (sp, cp) = crate::trigf::sin_cos(th[4]);
    let u = [cp * cy, cp * sy, sp];
    let du_dpsi = [-cp * sy, cp * cy, 0.0];
    let du_dalpha = [-sp * cy, -sp * sy, cp];
    let src = [th[0], th[1], -th[2]];
    let dot = |a: [F; 3], b: [F; 3]| a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
    let mut out = [0.0; N];
    let mut jac = [[0.0; P]; N];
    for (c, coil) in head.coils.iter().enumerate() {
        let r = [coil.pos_m[0] - src[0], coil.pos_m[1] - src[1], coil.pos_m[2] - src[2]];
        let d2 = dot(r, r);
        if !(d2 > 1e-12) {
            continue;
        }
        let d = libm::sqrtf(d2);
        let (d3, d5) = (d2 * d, d2 * d2 * d);
        let d7 = d5 * d2;
        let n = coil.axis;
        let (q, m, w) = (dot(u, r), dot(n, r), dot(n, u));
        let [ar, at, dar, dat] = whole_space_factors(d, skin_depth_m);
        let (ar, at) = (ar - 1.0, at - 1.0);
        let (rad, tr) = (2.0 * q * m / d5, q * m / d5 - w / d3);
        let f = 3.0 * q * m / d5 - w / d3 + ar * rad + at * tr;
        let kg = th[5] * coil.gain;
        out[c] = kg * f;
        let mut df_dr = [0.0; 3];
        let mut df_du = [0.0; 3];
        let g = (dar * rad + dat * tr) / d;
        for i in 0..3 {
            let dq = (m * u[i] + q * n[i]) / d5 - 5.0 * q * m * r[i] / d7;
            df_dr[i] = 3.0 * (m * u[i] + q * n[i]) / d5 - 15.0 * q * m * r[i] / d7
                + 3.0 * w * r[i] / d5
                + ar * 2.0 * dq
                + at * (dq + 3.0 * w * r[i] / d5)
                + g * r[i];
            df_du[i] = 3.0 * m * r[i] / d5 - n[i] / d3 + ar * 2.0 * m * r[i] / d5 + at * (m * r[i] / d5 - n[i] / d3);
        }
        jac[c] = [-kg * df_dr[0], -kg * df_dr[1], kg * df_dr[2], kg * dot(df_du, du_dpsi), kg * dot(df_du, du_dalpha), coil.gain * f];
    }
    (out, jac)
}

/// Model readings for parameters θ.
pub fn model<const N: usize>(head: &Head<N>, th: &[F; P]) -> [F; N] {
    model_jacobian(head, th).0
}

/// Fit readings `a` with noise `sigma`; `known_k` fixes K when calibrated.
pub fn fit<const N: usize>(head: &Head<N>, a: &[f32; N], sigma: &[f32; N], known_k: Option<f32>) -> Fix {
    fit_from(head, a, sigma, known_k, None, None, F::INFINITY)
}

/// As [`fit`], starting from a previous fix when given (a receiver moving a few
/// centimetres between readouts is close to it): one descent from there, and
/// the full set of starts only if that lands poorly (χ² above 4 per reading).
/// `prior` adds the lateral offset known from earlier readouts as one more row;
/// `skin_depth_m` is the ground's (infinite: none; [`model_jacobian_in`]).
pub fn fit_from<const N: usize>(
    head: &Head<N>,
    a: &[f32; N],
    sigma: &[f32; N],
    known_k: Option<f32>,
    start: Option<[f32; P]>,
    prior: Option<LateralPrior>,
    skin_depth_m: f32,
) -> Fix {
    let nfree = if known_k.is_some() { P - 1 } else { P };
    let prior = prior.filter(|p| p.left_over_depth.is_finite() && p.sigma.is_finite() && p.sigma > 0.0);
    let dof = N as i32 + prior.is_some() as i32 - nfree as i32;
    let fail = Fix::from_params([0.0; P], [f32::INFINITY; P], f32::INFINITY, dof, false);
    if N < nfree || a.iter().chain(sigma.iter()).any(|v| !v.is_finite()) || sigma.iter().any(|s| *s <= 0.0) {
        return fail;
    }
    let pb = Problem { head, a, sigma, nfree, prior, skin_depth_m };
    // Start: gradient depth from the along-coil pair, bearing, ratio.
    let r = head.roles;
    let get = |i: Option<u8>| i.map(|k| a[k as usize] as F).unwrap_or(0.0);
    let lo = [get(r.lower[0]), get(r.lower[1]), get(r.lower[2])];
    let up = [get(r.upper[0]), get(r.upper[1]), get(r.upper[2])];
    let nlo = libm::sqrtf(lo[0] * lo[0] + lo[1] * lo[1] + lo[2] * lo[2]);
    let nup = libm::sqrtf(up[0] * up[0] + up[1] * up[1] + up[2] * up[2]);
    let s = head.spacing_m().unwrap_or(0.4) as F;
    let ratio = if nup > 0.0 { nlo / nup } else { 2.0 };
    let h0 = (s / (libm::cbrtf(ratio) - 1.0)).clamp(0.2, 8.0);
    let hor = libm::sqrtf(lo[0] * lo[0] + lo[1] * lo[1]);
    let yaw0 = libm::atan2f(lo[1], lo[0]);
    let rho = if hor > 0.0 { lo[2] / hor } else { 0.0 };
    let ahead = offset_from_ratio(rho as f32, h0 as f32) as F;
    let k0 = -hor * h0 * h0 * h0;
    let mut best: Option<([F; P], F)> = None;
    if let Some(p) = start.filter(|p| p.iter().all(|v| v.is_finite()) && p[2] > 0.0) {
        let mut th = [0.0 as F; P];
        for i in 0..P {
            th[i] = p[i] as F;
        }
        if let Some(k) = known_k {
            th[5] = if th[5] < 0.0 { -(k as F).abs() } else { (k as F).abs() };
        }
        let chi = lm(&pb, &mut th);
        if chi.is_finite() && chi <= 4.0 * N as F {
            best = Some((th, chi));
        }
    }
    let (sy0, cy0) = crate::trigf::sin_cos(yaw0);
    let starts: &[(F, F)] = if best.is_some() { &[] } else { &[(1.0, 0.0), (0.0, 0.0), (-1.0, 0.0), (1.0, 1.0), (0.5, 0.0), (-0.5, 0.0)] };
    for &(kx, flip) in starts {
        // Offsets along the bearing: the ratio's estimate, none, its mirror, half the depth either way.
        let dx = if kx.abs() == 1.0 { kx * ahead } else { kx * h0 };
        let dyaw = flip * core::f32::consts::PI;
        let mut th = [dx * cy0, dx * sy0, h0, yaw0 + dyaw, 0.0, if dyaw == 0.0 { k0 } else { -k0 }];
        if let Some(k) = known_k {
            th[5] = if th[5] < 0.0 { -(k as F).abs() } else { (k as F).abs() };
        }
        let chi = lm(&pb, &mut th);
        if chi.is_finite() && best.map(|b| chi < b.1).unwrap_or(true) {
            best = Some((th, chi));
        }
    }
    let Some((mut th, chi2)) = best else { return fail };
    // Canonical form: yaw in (−π/2, π/2], flipping the axis and K together.
    let two_pi = 2.0 * core::f32::consts::PI;
    th[3] = th[3] - two_pi * libm::roundf(th[3] / two_pi);
    if th[3] > core::f32::consts::FRAC_PI_2 || th[3] <= -core::f32::consts::FRAC_PI_2 {
        th[3] -= core::f32::consts::PI * th[3].signum();
        th[4] = -th[4];
        th[5] = -th[5];
    }
    let (jtj, _) = normal(&pb, &th);
    let mut sig = [f32::INFINITY; P];
    if let Some(inv) = invert(&jtj, nfree) {
        for i in 0..nfree {
            let v = inv[i][i];
            sig[i] = if v.is_finite() && v >= 0.0 { libm::sqrtf(v) } else { f32::INFINITY };
        }
    }
    if nfree < P {
        sig[P - 1] = 0.0;
    }
    let ok = chi2.is_finite() && th[2] > 0.0;
    Fix::from_params(th, sig, chi2, dof, ok)
}

/// The fit's inputs, bundled.
struct Problem<'a, const N: usize> {
    head: &'a Head<N>,
    a: &'a [f32; N],
    sigma: &'a [f32; N],
    nfree: usize,
    prior: Option<LateralPrior>,
    skin_depth_m: F,
}

/// Weighted residuals of the readings and of the prior row, and χ².
fn residuals<const N: usize>(pb: &Problem<'_, N>, th: &[F; P]) -> ([F; N], F, F) {
    let m = model_jacobian_in(pb.head, th, pb.skin_depth_m).0;
    let mut r = [0.0; N];
    let mut chi = 0.0;
    for c in 0..N {
        r[c] = (m[c] - pb.a[c]) / pb.sigma[c];
        chi += r[c] * r[c];
    }
    let rp = match pb.prior {
        Some(p) if th[2] > 0.0 => (th[1] / th[2] - p.left_over_depth) / p.sigma,
        _ => 0.0,
    };
    (r, rp, chi + rp * rp)
}

fn normal<const N: usize>(pb: &Problem<'_, N>, th: &[F; P]) -> ([[F; P]; P], [F; P]) {
    let (_, mut j) = model_jacobian_in(pb.head, th, pb.skin_depth_m);
    let (r, rp, _) = residuals(pb, th);
    let nfree = pb.nfree;
    let mut jtj = [[0.0; P]; P];
    let mut jtr = [0.0; P];
    for c in 0..N {
        for k in 0..P {
            j[c][k] /= pb.sigma[c];
        }
        for p in 0..nfree {
            jtr[p] += j[c][p] * r[c];
            for q in 0..nfree {
                jtj[p][q] += j[c][p] * j[c][q];
            }
        }
    }
    if let Some(pr) = pb.prior {
        // Row ∂(y/h)/∂θ / σ: (0, 1/h, −y/h², 0, 0, 0)/σ.
        let h = th[2].max(1e-3);
        let mut jp = [0.0; P];
        jp[1] = 1.0 / (h * pr.sigma);
        jp[2] = -th[1] / (h * h * pr.sigma);
        for p in 0..nfree {
            jtr[p] += jp[p] * rp;
            for q in 0..nfree {
                jtj[p][q] += jp[p] * jp[q];
            }
        }
    }
    (jtj, jtr)
}

fn lm<const N: usize>(pb: &Problem<'_, N>, th: &mut [F; P]) -> F {
    let nfree = pb.nfree;
    let mut lambda = 1e-3;
    let (_, _, mut chi) = residuals(pb, th);
    for _ in 0..MAX_ITERATIONS {
        let (jtj, jtr) = normal(pb, th);
        let mut m = jtj;
        for i in 0..nfree {
            m[i][i] += lambda * jtj[i][i].max(1e-30);
        }
        let mut rhs = [0.0; P];
        for i in 0..nfree {
            rhs[i] = -jtr[i];
        }
        let Some(delta) = solve(&m, &rhs, nfree) else { return F::INFINITY };
        let mut trial = *th;
        for i in 0..nfree {
            trial[i] += delta[i];
        }
        if !(trial[2] > 0.01) {
            trial[2] = th[2] * 0.5;
        }
        let (_, _, c2) = residuals(pb, &trial);
        if c2.is_finite() && c2 < chi {
            let rel = (chi - c2) / chi.max(1e-30);
            *th = trial;
            chi = c2;
            lambda = (lambda * 0.3).max(1e-12);
            if rel < 1e-7 || chi < 1e-20 {
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

fn solve(m: &[[F; P]; P], b: &[F; P], n: usize) -> Option<[F; P]> {
    let mut a = *m;
    let mut x = *b;
    for col in 0..n {
        let piv =
            (col..n).max_by(|&i, &j| libm::fabsf(a[i][col]).partial_cmp(&libm::fabsf(a[j][col])).unwrap_or(core::cmp::Ordering::Equal))?;
        if !(libm::fabsf(a[piv][col]) > 1e-30) {
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

fn invert(m: &[[F; P]; P], n: usize) -> Option<[[F; P]; P]> {
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
