//! Continuous (lock-in) detector: mix, pre-decimate, n-pole low-pass.
//!
//! For each coil `c`: `z_c[n] = x_c[n]·e^{−jωn}` (one reference oscillator for
//! all coils), averaged over blocks of `M` samples (a boxcar, the pre-decimation),
//! then `n` cascaded first-order low-passes at the intermediate rate
//! `f_i = fs/M`: `y ← y + α(u − y)`, `α = 1 − e^{−1/(f_i·τ)}`. The output
//! `2·y` is the phasor `A·e^{jφ}` of a tone `A·cos(ωn + φ)`.
//!
//! Bandwidths: the low-pass alone has the one-sided noise bandwidth
//! `B_lp = Γ(n−½)/(4√π·Γ(n)·τ)` (B_lp·τ = 1/4, 1/8, 3/32, 5/64 for n = 1…4; for
//! one pole `B_lp = π/2·f(−3 dB) = 1/(4τ)`). Around the tone it passes noise from
//! `f0 − f` and `f0 + f` alike, so the detection bandwidth (the same quantity as a
//! block detector's ENBW in Hz) is `B = 2·B_lp`, and `τ` follows from the
//! requested `B`. Either detector then gives each real component of its phasor
//! the noise variance `2·σw²·B/fs` for white input noise of variance σw².
//! Mixing a real tone also leaves an image at `−2f0`. `M` is chosen (f_i between
//! 200 Hz and 4 kHz, M ≤ 256) as the longest boxcar (least work per sample) that keeps
//! that image below −120 dB at the output (the boxcar's attenuation at `2f0`
//! times the low-pass attenuation where the image aliases after decimation,
//! [`LockIn::image_leak`]) and every 50/60 Hz harmonic that folds in through
//! the decimation below −110 dB ([`LockIn::folded_mains_leak`]); failing that,
//! the one with the smallest image.
//!
//! Real-time budget: per sample one complex rotation shared by all coils and
//! two multiply-adds per coil (plus the same again for the noise probe);
//! the low-pass runs once per `M` samples, the oscillator's exact re-sync once
//! per 256 samples.

use crate::detect::nco::{Nco, RESYNC};
use crate::detect::settings::enbw_tau_product;
use crate::phasor::C32;

/// Highest intermediate rate after the boxcar, Hz.
pub const MAX_INTERMEDIATE_RATE_HZ: f32 = 4_000.0;
/// Lowest intermediate rate after the boxcar, Hz.
pub const MIN_INTERMEDIATE_RATE_HZ: f32 = 200.0;
/// Largest acceptable 2f0 mixing image at the output (−120 dB).
pub const IMAGE_LIMIT: f64 = 1e-6;
/// Largest response to a mains harmonic that folds in through the decimation (−110 dB).
pub const FOLDED_MAINS_LIMIT: f64 = 3.2e-6;
/// Longest boxcar, samples.
pub const MAX_BOXCAR: u32 = 1024;

/// Built lock-in coefficients.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LockIn {
    /// Boxcar (pre-decimation) length, samples.
    pub m: u32,
    /// Intermediate samples per readout.
    pub d: u32,
    /// Number of poles, 1 to 4.
    pub poles: u8,
    /// Low-pass step α.
    pub alpha: f32,
    /// Time constant τ, s.
    pub tau_s: f32,
    /// Intermediate rate f_i = fs/M, Hz.
    pub intermediate_rate_hz: f32,
    /// Sample rate, Hz.
    pub sample_rate_hz: f32,
}

/// Calls `f` with the offset from the tone (Hz) of every 50 Hz and 60 Hz mains
/// harmonic within 2 kHz of it.
fn for_each_harmonic_offset(tone_hz: f32, mut f: impl FnMut(f64)) {
    let tone = tone_hz as f64;
    for grid in [50.0f64, 60.0] {
        let lo = libm::ceil((tone - 2000.0).max(grid) / grid) as i64;
        let hi = libm::floor((tone + 2000.0) / grid) as i64;
        for n in lo..=hi {
            f(n as f64 * grid - tone);
        }
    }
}

/// Lock-in state for `N` coils: main channel and noise probe.
///
/// The noise probe runs at the intermediate rate: the boxcar outputs are
/// shifted by `e^{−j2πΔk/f_i}` (Δ = probe − tone) and low-passed by the same
/// filter. Boxcar sums of white noise over disjoint blocks are white again, so
/// the probe sees the same noise density as the tone's channel, at no cost per
/// input sample.
#[derive(Clone, Copy, Debug)]
pub struct LockInState<const N: usize> {
    /// Boxcar sums of raw codes (scaled when the boxcar ends).
    acc: [C32; N],
    /// Boxcar sums already in input units (f32 input, or codes before a scale change).
    acc_done: [C32; N],
    lp: [[C32; 4]; N],
    lp_p: [[C32; 4]; N],
    count: u32,
    dec: u32,
    /// Intermediate samples produced since reset.
    pub produced: u64,
    osc: Nco,
    probe: Nco,
    next_sync: u64,
}

impl LockIn {
    /// Coefficients for the tone, detection bandwidth `bandwidth_hz` (= 2·B_lp), `poles`, readout rate.
    pub fn new(sample_rate_hz: f32, tone_hz: f32, bandwidth_hz: f32, poles: u8, readout_rate_hz: f32) -> Self {
        let poles = poles.clamp(1, 4);
        let tau = 2.0 * enbw_tau_product(poles) / bandwidth_hz;
        // Choose the boxcar length M (intermediate rate f_i = fs/M between
        // MIN_ and MAX_INTERMEDIATE_RATE_HZ) that minimises the 2f0 mixing image
        // at the output: boxcar attenuation at 2f0 times the low-pass attenuation
        // at the frequency the image aliases to after decimation.
        let m_lo = libm::ceilf(sample_rate_hz / MAX_INTERMEDIATE_RATE_HZ).max(1.0) as u32;
        let m_hi = (libm::floorf(sample_rate_hz / MIN_INTERMEDIATE_RATE_HZ) as u32).clamp(m_lo, MAX_BOXCAR);
        // The longest boxcar (least work per sample) whose image stays below
        // IMAGE_LIMIT and which lets no folded mains harmonic through above
        // FOLDED_MAINS_LIMIT; failing that, the one with the smallest image.
        let mut best = (f64::INFINITY, m_lo);
        let mut longest_ok = None;
        for m in m_lo..=m_hi {
            let trial = Self::with_m(sample_rate_hz, tau, poles, readout_rate_hz, m);
            let leak = trial.image_leak(tone_hz);
            if leak < best.0 * 0.999 {
                best = (leak, m);
            }
            if leak <= IMAGE_LIMIT && trial.folded_mains_leak(tone_hz) <= FOLDED_MAINS_LIMIT {
                longest_ok = Some(m);
            }
        }
        let best = (best.0, longest_ok.unwrap_or(best.1));
        Self::with_m(sample_rate_hz, tau, poles, readout_rate_hz, best.1)
    }

    fn with_m(sample_rate_hz: f32, tau: f32, poles: u8, readout_rate_hz: f32, m: u32) -> Self {
        let fi = sample_rate_hz / m as f32;
        let d = libm::roundf(fi / readout_rate_hz).max(1.0) as u32;
        let alpha = 1.0 - libm::exp(-1.0 / (fi as f64 * tau as f64)) as f32;
        Self { m, d, poles, alpha, tau_s: tau, intermediate_rate_hz: fi, sample_rate_hz }
    }

    /// Equivalent noise bandwidth of the digital low-pass cascade alone
    /// (one-sided, Hz), `f_i/2 · Σh²/(Σh)²`, summed from the impulse response.
    pub fn lowpass_enbw_hz(&self) -> f32 {
        let mut st = [0.0f64; 4];
        let a = self.alpha as f64;
        let (mut s1, mut s2) = (0.0f64, 0.0f64);
        let limit = (60.0 * self.tau_s as f64 * self.intermediate_rate_hz as f64) as u64 + 64;
        for k in 0..limit.min(5_000_000) {
            let mut u = if k == 0 { 1.0 } else { 0.0 };
            for p in st.iter_mut().take(self.poles as usize) {
                *p += a * (u - *p);
                u = *p;
            }
            s1 += u;
            s2 += u * u;
        }
        (self.intermediate_rate_hz as f64 / 2.0 * s2 / (s1 * s1)) as f32
    }

    /// Time for the step response to reach `fraction` (e.g. 0.99), s, including the boxcar.
    pub fn settling_s(&self, fraction: f32) -> f32 {
        let mut st = [0.0f32; 4];
        let limit = (200.0 * self.tau_s * self.intermediate_rate_hz) as u32 + 64;
        for k in 0..limit.min(5_000_000) {
            let mut u = 1.0;
            for p in st.iter_mut().take(self.poles as usize) {
                *p += self.alpha * (u - *p);
                u = *p;
            }
            if u >= fraction {
                return (k + 1) as f32 / self.intermediate_rate_hz;
            }
        }
        f32::INFINITY
    }

    /// Group delay at DC, s: boxcar `M/2` samples plus `n·a/(1−a)` intermediate samples.
    pub fn group_delay_s(&self) -> f32 {
        let a = 1.0 - self.alpha;
        let box_s = (self.m as f32 - 1.0) / 2.0 / self.sample_rate_hz;
        box_s + self.poles as f32 * a / (1.0 - a) / self.intermediate_rate_hz
    }

    /// Relative size of the `2f0` mixing image at the output (1 = as large as the tone).
    pub fn image_leak(&self, tone_hz: f32) -> f64 {
        let f2 = 2.0 * tone_hz as f64;
        let fi = self.intermediate_rate_hz as f64;
        let alias = f2 - fi * libm::round(f2 / fi);
        self.boxcar_response(f2) * self.lowpass_response(alias)
    }

    /// The largest response to a 50 Hz or 60 Hz harmonic within 2 kHz of the tone
    /// that lies beyond ±f_i/2 (so reaches the low-pass only folded by the
    /// decimation); the neighbours inside ±f_i/2 are the bandwidth's business.
    pub fn folded_mains_leak(&self, tone_hz: f32) -> f64 {
        let half = self.intermediate_rate_hz as f64 / 2.0;
        let mut worst = 0.0f64;
        for_each_harmonic_offset(tone_hz, |off| {
            if libm::fabs(off) > half {
                worst = worst.max(self.response(off));
            }
        });
        worst
    }

    /// |H| of the low-pass cascade at `f_hz` (at the intermediate rate).
    pub fn lowpass_response(&self, f_hz: f64) -> f64 {
        let w = 2.0 * core::f64::consts::PI * f_hz / self.intermediate_rate_hz as f64;
        let al = self.alpha as f64;
        let a = 1.0 - al;
        // 1 − 2a·cos w + a² written as α² + 4a·sin²(w/2) (α = 1 − a): no cancellation at
        // small w. The root in f32 (relative 6e-8; an f64 `sqrt` would add 0.5 KiB to the
        // board image).
        let sh = super::trig::sin(w / 2.0);
        let den = libm::sqrtf((al * al + 4.0 * a * sh * sh) as f32) as f64;
        // `poles` is 1 to 4: repeated products (exact to rounding, and no f64 `pow` in the
        // board image).
        let h = al / den;
        (0..self.poles).fold(1.0, |acc, _| acc * h)
    }

    /// Response of the noise probe (offset `delta_hz` from the tone, run at the
    /// intermediate rate) to a component `offset_hz` from the tone: the boxcar
    /// at `offset_hz`, then the low-pass at `offset_hz − delta_hz`, periodic in
    /// f_i because it runs after decimation.
    pub fn probe_response(&self, offset_hz: f64, delta_hz: f64) -> f64 {
        self.boxcar_response(offset_hz) * self.lowpass_response(offset_hz - delta_hz)
    }

    /// The probe offset (Hz, either side of the tone, `min_hz` to `reach_hz` away,
    /// at most `max_above_hz` above it) that lets the least of any 50 Hz or 60 Hz
    /// harmonic within 2 kHz through, every harmonic weighted alike (their
    /// strengths are not known).
    pub fn quietest_probe_offset_hz(&self, tone_hz: f32, min_hz: f32, reach_hz: f32, max_above_hz: f32) -> f32 {
        let leak = |delta: f64| {
            let mut worst = 0.0f64;
            for_each_harmonic_offset(tone_hz, |off| worst = worst.max(self.probe_response(off, delta)));
            worst
        };
        let step = ((reach_hz - min_hz) / 32.0).max(0.25);
        let mut best = (f64::INFINITY, min_hz);
        let mut d = min_hz;
        while d <= reach_hz + 1e-3 {
            for cand in [d, -d] {
                if cand > max_above_hz || tone_hz + cand <= 0.0 {
                    continue;
                }
                let l = leak(cand as f64);
                if l < best.0 * 0.999 {
                    best = (l, cand);
                }
            }
            d += step;
        }
        best.1
    }

    /// Normalised magnitude response at `offset_hz` from the tone (boxcar × low-pass).
    pub fn response(&self, offset_hz: f64) -> f64 {
        self.boxcar_response(offset_hz) * self.lowpass_response(offset_hz)
    }

    /// |H| of the M-sample boxcar at `offset_hz` (at the input rate):
    /// `|sin(πfM/fs) / (M·sin(πf/fs))|`, 1 where the denominator vanishes.
    pub fn boxcar_response(&self, offset_hz: f64) -> f64 {
        let m = self.m as f64;
        let x = core::f64::consts::PI * offset_hz / self.sample_rate_hz as f64;
        let sx = super::trig::sin(x);
        if libm::fabs(sx) < 1e-15 {
            1.0
        } else {
            libm::fabs(super::trig::sin(m * x) / (m * sx))
        }
    }

    /// Readout interval, s.
    pub fn readout_interval_s(&self) -> f32 {
        (self.m * self.d) as f32 / self.sample_rate_hz
    }
}

impl<const N: usize> LockInState<N> {
    /// Fresh state: tone at `cycles` per sample, probe offset at `probe_cycles`
    /// per intermediate sample.
    pub fn new(cycles: f64, probe_cycles: f64) -> Self {
        Self {
            acc: [C32::ZERO; N],
            acc_done: [C32::ZERO; N],
            lp: [[C32::ZERO; 4]; N],
            lp_p: [[C32::ZERO; 4]; N],
            count: 0,
            dec: 0,
            produced: 0,
            osc: Nco::new(cycles),
            probe: Nco::new(probe_cycles),
            next_sync: 0,
        }
    }

    /// Frames still needed to finish the current boxcar, and the frames that may
    /// be taken before the oscillator's next exact re-sync.
    #[inline(always)]
    fn room(&mut self, cfg: &LockIn, n: u64) -> usize {
        if n >= self.next_sync {
            self.osc.sync(n);
            self.next_sync = (n / RESYNC as u64 + 1) * RESYNC as u64;
        }
        ((cfg.m - self.count) as u64).min(self.next_sync - n) as usize
    }

    /// Mix raw codes into the boxcar (unscaled; the scale is applied when the
    /// boxcar ends). Takes at most what `room` allows; returns frames taken.
    /// `or` collects the OR of the codes' one's-complement magnitudes
    /// (`k ^ (k >> 31)`), a cheap bound on the largest |code| (see `InputScale::code_stats`).
    ///
    /// Real-time budget: per channel-sample one load, one conversion, two
    /// multiply-adds and two logic operations; per frame one complex rotation.
    /// The sums stay in the FPU's 32 registers (a 64-bit fixed-point version
    /// needs 16 core registers for four coils and spills; it measured slower).
    #[inline(always)]
    pub fn mix_codes(&mut self, cfg: &LockIn, n: u64, frames: &[[i32; N]], or: &mut [u32; N]) -> usize {
        let take = self.room(cfg, n).min(frames.len());
        // Real and imaginary sums as separate arrays: the same operations in the
        // same order, laid out so a vector unit (where there is one) takes all
        // coils of a frame at once.
        let mut re = [0f32; N];
        let mut im = [0f32; N];
        for c in 0..N {
            re[c] = self.acc[c].re;
            im[c] = self.acc[c].im;
        }
        let mut bits = *or;
        let mut o = self.osc.value;
        let r = self.osc.rotor();
        for f in &frames[..take] {
            for c in 0..N {
                let k = f[c];
                bits[c] |= (k ^ (k >> 31)) as u32;
                let x = k as f32;
                re[c] += x * o.re;
                im[c] += x * o.im;
            }
            o *= r;
        }
        *or = bits;
        for c in 0..N {
            self.acc[c] = C32::new(re[c], im[c]);
        }
        self.osc.value = o;
        self.count += take as u32;
        take
    }

    fn raw_sum(&self, c: usize, scale: f32) -> C32 {
        self.acc[c].scale(scale)
    }

    /// Mix one frame already in input units.
    pub fn mix_scaled(&mut self, cfg: &LockIn, n: u64, x: &[f32; N]) {
        let _ = self.room(cfg, n);
        let o = self.osc.value;
        for c in 0..N {
            self.acc_done[c].re += x[c] * o.re;
            self.acc_done[c].im += x[c] * o.im;
        }
        self.osc.step();
        self.count += 1;
    }

    /// Fold the raw boxcar sums into input units with the scales in force (before a scale changes).
    pub fn fold_scale(&mut self, scale: &[f32; N]) {
        for c in 0..N {
            self.acc_done[c] += self.raw_sum(c, scale[c]);
            self.acc[c] = C32::ZERO;
        }
    }

    /// True when the boxcar is full.
    #[inline(always)]
    pub fn boxcar_full(&self, cfg: &LockIn) -> bool {
        self.count >= cfg.m
    }

    #[inline(always)]
    fn filter_all<const P: usize>(&mut self, us: &[C32; N], shift: C32, a: f32) {
        #[inline(always)]
        fn cascade<const P: usize>(st: &mut [C32; 4], mut u: C32, a: f32) {
            let mut s = *st;
            for p in 0..P {
                s[p].re += a * (u.re - s[p].re);
                s[p].im += a * (u.im - s[p].im);
                u = s[p];
            }
            *st = s;
        }
        for c in 0..N {
            cascade::<P>(&mut self.lp[c], us[c], a);
            cascade::<P>(&mut self.lp_p[c], us[c] * shift, a);
        }
    }

    /// End the boxcar: scale, low-pass, probe. Returns (main, probe) phasors at readout instants.
    pub fn end_boxcar(&mut self, cfg: &LockIn, scale: &[f32; N]) -> Option<([C32; N], [C32; N])> {
        self.count = 0;
        let k = 2.0 / cfg.m as f32;
        let np = cfg.poles as usize;
        if self.produced.is_multiple_of(RESYNC as u64) {
            self.probe.sync(self.produced);
        }
        let shift = self.probe.value;
        self.probe.step();
        let mut us = [C32::ZERO; N];
        for c in 0..N {
            us[c] = (self.acc_done[c] + self.raw_sum(c, scale[c])).scale(k);
            self.acc[c] = C32::ZERO;
            self.acc_done[c] = C32::ZERO;
        }
        // The pole count as a constant, so each cascade runs in registers.
        match np {
            1 => self.filter_all::<1>(&us, shift, cfg.alpha),
            2 => self.filter_all::<2>(&us, shift, cfg.alpha),
            3 => self.filter_all::<3>(&us, shift, cfg.alpha),
            _ => self.filter_all::<4>(&us, shift, cfg.alpha),
        }
        self.produced += 1;
        self.dec += 1;
        if self.dec < cfg.d {
            return None;
        }
        self.dec = 0;
        let mut out = [C32::ZERO; N];
        let mut outp = [C32::ZERO; N];
        for c in 0..N {
            out[c] = self.lp[c][np - 1];
            outp[c] = self.lp_p[c][np - 1];
        }
        Some((out, outp))
    }
}
