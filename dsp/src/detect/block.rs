//! Block detector: windowed generalised Goertzel over overlapping blocks.
//!
//! Block length from the requested noise bandwidth B: `L = ⌈ENBW_bins·fs/B⌉`
//! (ENBW_bins of the window, Harris 1978 Table 1). A new block starts every
//! `hop = fs/readout_rate` samples, so up to `⌈L/hop⌉` blocks are in flight.
//! For block `b` starting at absolute sample `n0` the phasor is
//! `P = (2/Σw)·e^{−jω·n0}·Σ_m w[m]·x[n0+m]·e^{−jωm}`, referenced to the same
//! absolute-time oscillator as the lock-in, so a steady on-frequency tone gives
//! the same phasor from every block. The window is evaluated per sample from one
//! `cosf` and Chebyshev recursions (no table, no allocation).

use crate::detect::goertzel::{Goertzel, GoertzelState};
use crate::detect::nco::{phase_step, reference_at};
use crate::detect::settings::MAX_OVERLAP;
use crate::detect::window::Window;
use crate::phasor::C32;

/// Built block-detector coefficients.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BlockDetector {
    /// Block length L, samples.
    pub len: u32,
    /// Samples between block starts.
    pub hop: u32,
    /// Window.
    pub window: Window,
    g: Goertzel,
    gp: Goertzel,
    step: u32,
    probe_step: u32,
    norm: f32,
    /// Sample rate, Hz.
    pub sample_rate_hz: f32,
}

#[derive(Clone, Copy, Debug)]
struct Slot<const N: usize> {
    active: bool,
    start: u64,
    pos: u32,
    st: [GoertzelState; N],
    stp: [GoertzelState; N],
}

/// State of the block detector for `N` coils.
#[derive(Clone, Copy, Debug)]
pub struct BlockState<const N: usize> {
    slots: [Slot<N>; MAX_OVERLAP],
    next_start: u64,
}

impl BlockDetector {
    /// Build from block length and hop (already validated).
    pub fn new(sample_rate_hz: f32, cycles: f64, probe_cycles: f64, window: Window, len: u32, hop: u32) -> Self {
        Self {
            len,
            hop,
            window,
            g: Goertzel::from_cycles_per_sample(cycles),
            gp: Goertzel::from_cycles_per_sample(probe_cycles),
            step: phase_step(cycles),
            probe_step: phase_step(probe_cycles),
            norm: 2.0 / window.sum(len),
            sample_rate_hz,
        }
    }

    /// Noise bandwidth, Hz.
    pub fn enbw_hz(&self) -> f32 {
        self.window.enbw_bins() * self.sample_rate_hz / self.len as f32
    }

    /// The instant a block's phasor stands for, in samples from the block's first
    /// sample: the centroid `Σ m·w[m]/Σw` of the window, so an amplitude changing
    /// linearly in time is read at its value there. The periodic cosine-sum windows
    /// are symmetric about `L/2` with `w[0]` unpaired, so the centroid is
    /// `L/2 − w[0]/(2·a0)`: `(L − 1)/2` for the rectangular window, `L/2` for Hann.
    pub fn centre_samples(&self) -> f64 {
        let w0 = self.window.value(0, self.len) as f64;
        self.len as f64 / 2.0 - w0 / (2.0 * self.window.coherent_gain() as f64)
    }

    /// Normalised magnitude response at `offset_hz` from the tone.
    pub fn response(&self, offset_hz: f64) -> f64 {
        self.window.response(offset_hz * self.len as f64 / self.sample_rate_hz as f64, self.len)
    }
}

impl<const N: usize> BlockState<N> {
    /// Empty state; the first block starts at sample 0.
    pub fn new() -> Self {
        let slot = Slot { active: false, start: 0, pos: 0, st: [GoertzelState::default(); N], stp: [GoertzelState::default(); N] };
        Self { slots: [slot; MAX_OVERLAP], next_start: 0 }
    }

    /// Feed frame at absolute index `n`; returns (main, probe, block start) when a block completes.
    pub fn step(&mut self, cfg: &BlockDetector, n: u64, x: &[f32; N]) -> Option<([C32; N], [C32; N], u64)> {
        if n >= self.next_start {
            if let Some(s) = self.slots.iter_mut().find(|s| !s.active) {
                s.active = true;
                s.start = n;
                s.pos = 0;
                s.st = [GoertzelState::default(); N];
                s.stp = [GoertzelState::default(); N];
            }
            self.next_start = n + cfg.hop as u64;
        }
        let mut done = None;
        for s in self.slots.iter_mut().filter(|s| s.active) {
            let w = cfg.window.value(s.pos, cfg.len);
            for c in 0..N {
                let v = w * x[c];
                cfg.g.step(&mut s.st[c], v);
                cfg.gp.step(&mut s.stp[c], v);
            }
            s.pos += 1;
            if s.pos == cfg.len {
                s.active = false;
                let rot = reference_at(cfg.step, s.start);
                let rotp = reference_at(cfg.probe_step, s.start);
                let mut out = [C32::ZERO; N];
                let mut outp = [C32::ZERO; N];
                for c in 0..N {
                    out[c] = (cfg.g.dtft(&s.st[c], cfg.len) * rot).scale(cfg.norm);
                    outp[c] = (cfg.gp.dtft(&s.stp[c], cfg.len) * rotp).scale(cfg.norm);
                }
                done = Some((out, outp, s.start));
            }
        }
        done
    }
}

impl<const N: usize> Default for BlockState<N> {
    fn default() -> Self {
        Self::new()
    }
}
