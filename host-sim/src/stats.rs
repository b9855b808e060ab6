//! 95 % confidence intervals for Monte Carlo figures, and how many trials an
//! interval needs to clear a limit.
//!
//! * Mean of n values: `x̄ ± t_{0.975, n−1}·s/√n` (Student's t; s the sample
//!   standard deviation, Bessel-corrected).
//! * Standard deviation: `[s·√((n−1)/χ²_{0.975, n−1}), s·√((n−1)/χ²_{0.025, n−1})]`
//!   (the chi-square interval; assumes normally distributed values).
//! * A rate of k in n: the Wilson score interval (Wilson, J. Am. Stat. Assoc.
//!   22:209, 1927) `(p̂ + z²/2n ± z·√(p̂(1−p̂)/n + z²/4n²)) / (1 + z²/n)`, z =
//!   1.95996, which keeps its coverage near 0 and 1 where the normal
//!   approximation fails.
//!
//! Quantiles come from `statrs` (its Student's t, chi-square and normal
//! inverse distribution functions). Means and variances accumulate with
//! Welford's update, so a figure over any number of trials takes constant memory.

use statrs::distribution::{ChiSquared, ContinuousCDF, Normal, StudentsT};

/// Confidence level of every interval here.
pub const LEVEL: f64 = 0.95;

/// Largest number of trials [`trials_to_clear_mean`] and [`trials_to_clear_rate`] report.
pub const MAX_TRIALS: usize = 1_000_000;

/// A closed interval.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Interval {
    /// Lower end.
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
}

impl Interval {
    /// True when the whole interval lies within `[a, b]`.
    pub fn within(&self, a: f64, b: f64) -> bool {
        self.lo >= a && self.hi <= b
    }

    /// True when the interval and `[a, b]` do not meet.
    pub fn outside(&self, a: f64, b: f64) -> bool {
        self.hi < a || self.lo > b
    }
}

/// Running mean and variance (Welford's update).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Welford {
    n: usize,
    mean: f64,
    m2: f64,
}

impl Welford {
    /// Add a value.
    pub fn push(&mut self, x: f64) {
        self.n += 1;
        let d = x - self.mean;
        self.mean += d / self.n as f64;
        self.m2 += d * (x - self.mean);
    }

    /// Values so far.
    pub fn count(&self) -> usize {
        self.n
    }

    /// Mean (None without values).
    pub fn mean(&self) -> Option<f64> {
        (self.n > 0).then_some(self.mean)
    }

    /// Sample standard deviation (None below two values).
    pub fn sd(&self) -> Option<f64> {
        (self.n > 1).then(|| (self.m2 / (self.n - 1) as f64).sqrt())
    }

    /// Mean with its 95 % interval (Student's t; None below two values).
    pub fn mean_ci(&self) -> Option<(f64, Interval)> {
        let s = self.sd()?;
        let h = t_quantile(self.n - 1) * s / (self.n as f64).sqrt();
        Some((self.mean, Interval { lo: self.mean - h, hi: self.mean + h }))
    }

    /// Standard deviation with its 95 % interval (chi-square; None below two values).
    pub fn sd_ci(&self) -> Option<(f64, Interval)> {
        let s = self.sd()?;
        let k = (self.n - 1) as f64;
        let chi = ChiSquared::new(k).ok()?;
        let (a, b) = ((1.0 - LEVEL) / 2.0, (1.0 + LEVEL) / 2.0);
        Some((s, Interval { lo: s * (k / chi.inverse_cdf(b)).sqrt(), hi: s * (k / chi.inverse_cdf(a)).sqrt() }))
    }
}

/// Two-sided 95 % quantile of Student's t with `dof` degrees of freedom.
///
/// ```
/// // Student's t table: t(0.975, 9) = 2.262.
/// assert!((undertone_sim::stats::t_quantile(9) - 2.2622).abs() < 1e-4);
/// ```
pub fn t_quantile(dof: usize) -> f64 {
    match StudentsT::new(0.0, 1.0, dof.max(1) as f64) {
        Ok(t) => t.inverse_cdf((1.0 + LEVEL) / 2.0),
        Err(_) => f64::INFINITY,
    }
}

/// Two-sided 95 % quantile of the standard normal distribution (1.95996).
pub fn z_quantile() -> f64 {
    Normal::new(0.0, 1.0).map(|n| n.inverse_cdf((1.0 + LEVEL) / 2.0)).unwrap_or(1.959_963_984_540_054)
}

/// The rate k/n with its 95 % Wilson score interval (None for n = 0).
///
/// ```
/// // No event in 20 trials: the interval reaches z²/(n + z²) = 16.1 %.
/// let (p, ci) = undertone_sim::stats::wilson(0, 20).unwrap();
/// assert_eq!(p, 0.0);
/// assert!((ci.hi - 0.1611).abs() < 1e-4);
/// ```
pub fn wilson(k: usize, n: usize) -> Option<(f64, Interval)> {
    if n == 0 {
        return None;
    }
    let p = k as f64 / n as f64;
    Some((p, wilson_interval(p, n)))
}

fn wilson_interval(p: f64, n: usize) -> Interval {
    let (nf, z) = (n as f64, z_quantile());
    let z2 = z * z;
    let centre = (p + z2 / (2.0 * nf)) / (1.0 + z2 / nf);
    let half = z * (p * (1.0 - p) / nf + z2 / (4.0 * nf * nf)).sqrt() / (1.0 + z2 / nf);
    // lo ≤ p ≤ hi holds exactly; the clamps keep rounding from crossing p at 0 and 1.
    Interval { lo: (centre - half).clamp(0.0, p), hi: (centre + half).clamp(p, 1.0) }
}

/// Smallest n (from `from` up to [`MAX_TRIALS`]) for which `clears(n)` holds,
/// `clears` being monotone in n; None if even `MAX_TRIALS` does not.
fn smallest(from: usize, clears: impl Fn(usize) -> bool) -> Option<usize> {
    let mut hi = from.max(2);
    while !clears(hi) {
        if hi >= MAX_TRIALS {
            return None;
        }
        hi = (hi * 2).min(MAX_TRIALS);
    }
    let mut lo = from.max(2).min(hi);
    if clears(lo) {
        return Some(lo);
    }
    while hi - lo > 1 {
        let mid = (lo + hi) / 2;
        if clears(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}

/// Trials after which the 95 % interval of a mean, with the mean and the
/// standard deviation staying as they are, no longer contains `limit`
/// (None when the mean sits on the limit or more than [`MAX_TRIALS`] are needed).
pub fn trials_to_clear_mean(mean: f64, sd: f64, limit: f64, from: usize) -> Option<usize> {
    let margin = (mean - limit).abs();
    if !(margin > 0.0) || !sd.is_finite() {
        return None;
    }
    smallest(from, |n| t_quantile(n - 1) * sd / (n as f64).sqrt() < margin)
}

/// Trials after which the 95 % Wilson interval of a rate, with the observed
/// rate `p` staying as it is, no longer contains `limit` (None when p sits on
/// the limit or more than [`MAX_TRIALS`] are needed).
pub fn trials_to_clear_rate(p: f64, limit: f64, from: usize) -> Option<usize> {
    if p == limit {
        return None;
    }
    let clears = |n: usize| {
        let ci = wilson_interval(p, n);
        if p < limit {
            ci.hi <= limit
        } else {
            ci.lo > limit
        }
    };
    smallest(from, clears)
}

/// The median of `v` (sorted in place; NaNs last); `None` when empty.
pub fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    let n = v.len();
    Some(if n % 2 == 1 { v[n / 2] } else { 0.5 * (v[n / 2 - 1] + v[n / 2]) })
}
