//! f64 reference implementations of the detectors' definitions, written from the
//! textbook structure and independent of the `dsp` crate's f32 code: what the
//! running detectors are measured against.
//!
//! * [`LockInF64`]: the lock-in's structure (Meade, *Lock-in Amplifiers: Principles
//!   and Applications*, 1983, from memory): mix with the reference `e^{−jωn}`,
//!   average blocks of M samples (the boxcar), then `n` first-order low-pass
//!   sections `y ← y + α(u − y)` at the intermediate rate, read every d-th output;
//!   the noise probe shifts the boxcar outputs by `e^{−j2π·Δ·k}` (Δ in cycles per
//!   intermediate sample) and low-passes them alike.
//! * [`block_dft_f64`]: the windowed DFT `P = (2/Σw)·Σ w[m]·x[n0+m]·e^{−jω(n0+m)}`
//!   summed directly (the DFT's definition), with the periodic cosine-sum windows of
//!   Harris, Proc. IEEE 66(1), 1978.
//! * [`lockin_transfer`] and [`window_transfer`]: the same two filters' frequency
//!   responses summed directly in f64 (a geometric series written out term by term
//!   for the boxcar and the window, the first-order section's transfer function
//!   `α/(1 − (1−α)e^{−jθ})` for the low-pass).

use num_complex::Complex;
use undertone_dsp::detect::lockin::LockIn;
use undertone_dsp::Window;

/// A complex number in f64.
pub type C64 = Complex<f64>;

/// f64 lock-in over `channels` inputs with its noise probe.
pub struct LockInF64 {
    w: f64,
    m: u32,
    d: u32,
    poles: usize,
    alpha: f64,
    probe_cycles: f64,
    n: u64,
    count: u32,
    dec: u32,
    produced: u64,
    acc: Vec<C64>,
    lp: Vec<[C64; 4]>,
    lp_probe: Vec<[C64; 4]>,
}

/// One readout of the f64 lock-in: sample index of the last input, main and probe outputs.
#[derive(Clone, Debug)]
pub struct ReadoutF64 {
    /// Index of the latest sample used.
    pub sample_index: u64,
    /// Main channel per input (the phasor 2·y).
    pub main: Vec<C64>,
    /// Noise-probe channel per input.
    pub probe: Vec<C64>,
}

impl LockInF64 {
    /// The chain with the coefficients `li` holds (M, d, poles, α), tone at `cycles`
    /// per sample, probe `probe_cycles` per intermediate sample from the tone.
    pub fn new(li: &LockIn, cycles: f64, probe_cycles: f64, channels: usize) -> Self {
        Self {
            w: std::f64::consts::TAU * cycles,
            m: li.m,
            d: li.d,
            poles: li.poles as usize,
            alpha: li.alpha as f64,
            probe_cycles,
            n: 0,
            count: 0,
            dec: 0,
            produced: 0,
            acc: vec![C64::new(0.0, 0.0); channels],
            lp: vec![[C64::new(0.0, 0.0); 4]; channels],
            lp_probe: vec![[C64::new(0.0, 0.0); 4]; channels],
        }
    }

    /// Feed one frame; a readout when one is due.
    pub fn push(&mut self, x: &[f64]) -> Option<ReadoutF64> {
        let osc = C64::from_polar(1.0, -self.w * self.n as f64);
        for (a, &v) in self.acc.iter_mut().zip(x) {
            *a += osc * v;
        }
        self.n += 1;
        self.count += 1;
        if self.count < self.m {
            return None;
        }
        self.count = 0;
        let shift = C64::from_polar(1.0, -std::f64::consts::TAU * self.probe_cycles * self.produced as f64);
        self.produced += 1;
        let (a, np) = (self.alpha, self.poles);
        for c in 0..self.acc.len() {
            let u = self.acc[c] * (2.0 / self.m as f64);
            self.acc[c] = C64::new(0.0, 0.0);
            for (st, mut v) in [(&mut self.lp[c], u), (&mut self.lp_probe[c], u * shift)] {
                for p in st.iter_mut().take(np) {
                    *p += (v - *p) * a;
                    v = *p;
                }
            }
        }
        self.dec += 1;
        if self.dec < self.d {
            return None;
        }
        self.dec = 0;
        Some(ReadoutF64 {
            sample_index: self.n - 1,
            main: self.lp.iter().map(|s| s[np - 1]).collect(),
            probe: self.lp_probe.iter().map(|s| s[np - 1]).collect(),
        })
    }
}

/// Periodic cosine-sum window `w[m] = Σ (−1)^k a_k cos(2πkm/L)` in f64 (Harris 1978).
pub fn window_f64(window: Window, len: usize) -> Vec<f64> {
    let a = window.coefficients().map(|v| v as f64);
    (0..len)
        .map(|m| {
            let t = std::f64::consts::TAU * m as f64 / len as f64;
            a[0] - a[1] * t.cos() + a[2] * (2.0 * t).cos() - a[3] * (3.0 * t).cos()
        })
        .collect()
}

/// Windowed DFT phasors of every block of `len` samples starting at multiples of
/// `hop`, at `cycles` per sample, for `channels` interleaved inputs: (index of the
/// block's last sample, one phasor per channel).
pub fn block_dft_f64(window: Window, len: usize, hop: usize, cycles: f64, frames: &[Vec<f64>]) -> Vec<(u64, Vec<C64>)> {
    let w = window_f64(window, len);
    let sum_w: f64 = w.iter().sum();
    let channels = frames.first().map_or(0, |f| f.len());
    let mut out = Vec::new();
    let mut n0 = 0;
    while n0 + len <= frames.len() {
        let mut p = vec![C64::new(0.0, 0.0); channels];
        for (m, wm) in w.iter().enumerate() {
            let n = n0 + m;
            let osc = C64::from_polar(*wm, -std::f64::consts::TAU * cycles * n as f64);
            for (pc, &x) in p.iter_mut().zip(&frames[n]) {
                *pc += osc * x;
            }
        }
        out.push(((n0 + len - 1) as u64, p.into_iter().map(|v| v * (2.0 / sum_w)).collect()));
        n0 += hop;
    }
    out
}

/// |H| of the lock-in (boxcar, then the low-pass at the intermediate rate) at
/// `offset_hz` from the tone, summed directly: `|(1/M)·Σ_{m<M} e^{−j2πfm/fs}|`
/// times `|α/(1 − (1−α)e^{−j2πfM/fs})|^n`.
pub fn lockin_transfer(li: &LockIn, offset_hz: f64) -> f64 {
    let x = std::f64::consts::TAU * offset_hz / li.sample_rate_hz as f64;
    let boxcar: C64 = (0..li.m).map(|m| C64::from_polar(1.0, -x * m as f64)).sum::<C64>() / li.m as f64;
    let a = li.alpha as f64;
    let z = C64::from_polar(1.0, -x * li.m as f64);
    let section = C64::new(a, 0.0) / (C64::new(1.0, 0.0) - z * (1.0 - a));
    boxcar.norm() * section.norm().powi(li.poles as i32)
}

/// |W(δ)|/W(0) of a periodic window of `len` samples at `delta_bins` bins, summed directly.
pub fn window_transfer(window: Window, len: usize, delta_bins: f64) -> f64 {
    let w = window_f64(window, len);
    let x = std::f64::consts::TAU * delta_bins / len as f64;
    let s: C64 = w.iter().enumerate().map(|(m, v)| C64::from_polar(*v, -x * m as f64)).sum();
    s.norm() / w.iter().sum::<f64>()
}

/// Four tones of amplitude 1 as eight channels: channel `2i` carries
/// `cos(2π·f_i·n/fs)` and channel `2i + 1` carries `sin(2π·f_i·n/fs)`, in f64.
///
/// A linear detector's phasors `P_cos` and `P_sin` of such a pair give its response to
/// `e^{+j2πfn/fs}` alone, `(P_cos + j·P_sin)/2`, and to `e^{−j2πfn/fs}` alone,
/// `(P_cos − j·P_sin)/2` (see [`quadrature_split`]): so a real detector's response at
/// `f` is measured free of its mixing image, and the image separately.
pub struct QuadratureTones {
    fs: f64,
    freqs: [f64; 4],
    osc: [C64; 4],
    step: [C64; 4],
    n: u64,
}

impl QuadratureTones {
    /// Tones at `freqs` (Hz), sampled at `fs` (Hz), from n = 0.
    pub fn new(fs: f64, freqs: [f64; 4]) -> Self {
        let step = freqs.map(|f| C64::from_polar(1.0, std::f64::consts::TAU * f / fs));
        Self { fs, freqs, osc: [C64::new(1.0, 0.0); 4], step, n: 0 }
    }
}

impl Iterator for QuadratureTones {
    type Item = [f64; 8];

    fn next(&mut self) -> Option<[f64; 8]> {
        if self.n.is_multiple_of(1024) {
            // The exact phase now and then, so the recursive oscillators do not drift.
            for i in 0..4 {
                self.osc[i] = C64::from_polar(1.0, std::f64::consts::TAU * (self.freqs[i] * self.n as f64 / self.fs).fract());
            }
        }
        let frame = std::array::from_fn(|c| if c % 2 == 0 { self.osc[c / 2].re } else { self.osc[c / 2].im });
        for i in 0..4 {
            self.osc[i] *= self.step[i];
        }
        self.n += 1;
        Some(frame)
    }
}

/// `(|P_cos + j·P_sin|/2, |P_cos − j·P_sin|/2)`: a linear detector's gain at `+f` and
/// at `−f` from its phasors for the `cos` and `sin` of a tone at `f` (amplitude 1).
pub fn quadrature_split(p_cos: C64, p_sin: C64) -> (f64, f64) {
    let j = C64::new(0.0, 1.0);
    (((p_cos + j * p_sin) / 2.0).norm(), ((p_cos - j * p_sin) / 2.0).norm())
}
