//! Frequency scan: find the strongest tones in a recording.
//!
//! Used to find an unknown beacon and to confirm that a preset matches the
//! beacon in hand before it goes into the pipe. Two stages, no allocation:
//!
//! 1. Coarse: Hann-windowed generalised Goertzel over the first `L_c` samples at
//!    a step of half a bin (`fs/(2L_c)`), `L_c = fs/coarse_resolution`; local
//!    maxima at least [`MIN_PEAK_RATIO`] above the mean power are kept (the
//!    strongest [`MAX_TONES`]`·2`).
//! 2. Fine: for each candidate, golden-section search of the 4-term
//!    Blackman–Harris windowed DTFT magnitude over the whole record within ±1
//!    coarse step. The peak of a windowed DTFT of a single tone sits at the tone
//!    frequency; the search stops below 1e-4 Hz. Amplitude = 2|X|/Σw.
//!
//! Cost: `(f_hi − f_lo)/(fs/2L_c)·L_c` coarse multiply-adds plus
//! `~30·MAX_TONES·2·len` fine ones; the scan is a pre-job step, not per sample.

use crate::detect::goertzel::{Goertzel, GoertzelState};
use crate::detect::settings::{MAX_FREQ_FRACTION, MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ};
use crate::detect::window::Window;
use crate::error::{ConfigError, Param};
use heapless::Vec;

/// Most tones reported.
pub const MAX_TONES: usize = 8;
/// A coarse peak must exceed the mean coarse power by this factor (10 dB).
pub const MIN_PEAK_RATIO: f32 = 10.0;

/// One tone found by the scan.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Tone {
    /// Frequency, Hz.
    pub freq_hz: f32,
    /// Amplitude, input units.
    pub amplitude: f32,
    /// Power above the coarse mean power, dB.
    pub snr_db: f32,
}

/// What to scan.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ScanSettings {
    /// Sample rate, Hz.
    pub sample_rate_hz: f32,
    /// Lowest frequency, Hz.
    pub f_lo_hz: f32,
    /// Highest frequency, Hz (at most [`MAX_FREQ_FRACTION`]·fs).
    pub f_hi_hz: f32,
    /// Coarse resolution (bin width), Hz: 2 to 50.
    pub coarse_resolution_hz: f32,
}

impl ScanSettings {
    /// Scan 100 Hz to 0.4·fs at 4 Hz coarse resolution.
    pub fn new(sample_rate_hz: f32) -> Self {
        Self { sample_rate_hz, f_lo_hz: 100.0, f_hi_hz: 0.4 * sample_rate_hz, coarse_resolution_hz: 4.0 }
    }
}

/// Scan `x` (one channel) and return the strongest tones, strongest first.
pub fn scan(x: &[f32], s: &ScanSettings) -> Result<Vec<Tone, MAX_TONES>, ConfigError> {
    let fs = ConfigError::check(Param::SampleRate, s.sample_rate_hz, MIN_SAMPLE_RATE_HZ, MAX_SAMPLE_RATE_HZ)?;
    let res = ConfigError::check(Param::ScanRange, s.coarse_resolution_hz, 2.0, 50.0)?;
    let hi = ConfigError::check(Param::ScanRange, s.f_hi_hz, 1.0, MAX_FREQ_FRACTION * fs)?;
    let lo = ConfigError::check(Param::ScanRange, s.f_lo_hz, 1.0, hi - 2.0 * res)?;
    let lc = libm::ceilf(fs / res) as usize;
    if x.len() < lc || x.len() > u32::MAX as usize {
        return Err(ConfigError { param: Param::RecordLength, value: x.len() as f32, min: lc as f32, max: u32::MAX as f32 });
    }
    let coarse = &x[..lc];
    let step = fs / (2.0 * lc as f32);
    let nsteps = libm::ceilf((hi - lo) / step) as usize + 1;
    // Candidates: (power, freq).
    let mut cands: Vec<(f32, f32), { 2 * MAX_TONES }> = Vec::new();
    let mut sum = 0.0f64;
    let mut prev2 = 0.0f32;
    let mut prev1 = 0.0f32;
    for i in 0..=nsteps {
        let f = lo + i as f32 * step;
        let p = if i < nsteps { windowed_power(coarse, fs, f, Window::Hann) } else { 0.0 };
        if i < nsteps {
            sum += p as f64;
        }
        if i >= 2 && prev1 > prev2 && prev1 >= p {
            insert_top(&mut cands, prev1, f - step);
        }
        prev2 = prev1;
        prev1 = p;
    }
    let mean = (sum / nsteps.max(1) as f64) as f32;
    let mut tones: Vec<Tone, MAX_TONES> = Vec::new();
    let mut found: Vec<Tone, { 2 * MAX_TONES }> = Vec::new();
    for &(p, f) in cands.iter() {
        if !(p > MIN_PEAK_RATIO * mean) {
            continue;
        }
        let (ff, amp) = refine(x, fs, f - step, f + step);
        // Two coarse peaks may refine onto the same tone.
        if found.iter().any(|t| libm::fabsf(t.freq_hz - ff) < step) {
            continue;
        }
        let snr = 10.0 * crate::powf::log10f(p / mean.max(f32::MIN_POSITIVE));
        // Kept strongest first by insertion (at most 2·MAX_TONES entries; core's sort would
        // cost the board image 2.6 KiB). A NaN amplitude goes last.
        let at = found.iter().position(|t| t.amplitude < amp).unwrap_or(found.len());
        let _ = found.insert(at, Tone { freq_hz: ff, amplitude: amp, snr_db: snr });
    }
    for t in found.iter().take(MAX_TONES) {
        let _ = tones.push(*t);
    }
    Ok(tones)
}

fn insert_top<const K: usize>(v: &mut Vec<(f32, f32), K>, p: f32, f: f32) {
    if !p.is_finite() {
        return;
    }
    if v.len() < K {
        let _ = v.push((p, f));
        return;
    }
    let (imin, &(pmin, _)) = match v.iter().enumerate().min_by(|a, b| a.1 .0.partial_cmp(&b.1 .0).unwrap_or(core::cmp::Ordering::Equal)) {
        Some(m) => m,
        None => return,
    };
    if p > pmin {
        v[imin] = (p, f);
    }
}

/// `|Σ w[n]x[n]e^{−j2πfn/fs}|²` (windowed DTFT power) at `f_hz`.
pub fn windowed_power(x: &[f32], fs: f32, f_hz: f32, window: Window) -> f32 {
    let g = Goertzel::from_cycles_per_sample(f_hz as f64 / fs as f64);
    let len = x.len() as u32;
    let mut st = GoertzelState::default();
    for (n, &v) in x.iter().enumerate() {
        let v = if v.is_finite() { v } else { 0.0 };
        g.step(&mut st, window.value(n as u32, len) * v);
    }
    g.raw(&st).norm_sqr()
}

/// Golden-section search of the Blackman–Harris windowed magnitude on [a, b].
fn refine(x: &[f32], fs: f32, mut a: f32, mut b: f32) -> (f32, f32) {
    let w = Window::BlackmanHarris4;
    let gr = 0.618_034f32;
    let mut c = b - gr * (b - a);
    let mut d = a + gr * (b - a);
    let mut pc = windowed_power(x, fs, c, w);
    let mut pd = windowed_power(x, fs, d, w);
    let mut it = 0;
    while b - a > 1e-4 && it < 60 {
        if pc > pd {
            b = d;
            d = c;
            pd = pc;
            c = b - gr * (b - a);
            pc = windowed_power(x, fs, c, w);
        } else {
            a = c;
            c = d;
            pc = pd;
            d = a + gr * (b - a);
            pd = windowed_power(x, fs, d, w);
        }
        it += 1;
    }
    let f = 0.5 * (a + b);
    let p = windowed_power(x, fs, f, w);
    (f, 2.0 * libm::sqrtf(p) / w.sum(x.len() as u32))
}
