//! Tone detection on every coil of a multi-coil stream.
//!
//! One [`Detector`] configuration drives one state per coil, so every coil is
//! filtered identically and coil ratios are exact. Both detector kinds report
//! each coil's phasor `A·e^{jφ}` against one shared reference `cos(ω0·n)` (n the
//! absolute sample index), so the relative sign between coils is meaningful.
//!
//! Beside the tone, every coil is detected a second time at a quiet
//! neighbouring frequency (the *noise probe*, away from the tone and from mains
//! harmonics) through the same filter: its mean power gives each phasor's noise
//! σ, from which SNR and every uncertainty downstream are computed.

pub mod block;
pub mod goertzel;
pub mod input;
pub mod lockin;
pub mod mains;
pub mod nco;
pub mod offset;
pub mod scan;
pub mod settings;
pub mod trig;
pub mod window;

use crate::error::{ConfigError, Param};
use crate::flags::Flags;
use crate::phasor::C32;
use block::{BlockDetector, BlockState};
use input::{ChannelStats, InputScale};
use lockin::{LockIn, LockInState};
use mains::MainsReport;
use offset::{OffsetEstimator, OFFSET_FLAG_FRACTION};
use settings::{DetectorKind, DetectorSettings, MAX_BLOCK_LEN, MAX_OVERLAP};
use window::Window;

/// Rejection of the tone in the noise probe, dB.
pub const PROBE_REJECTION_DB: f64 = 70.0;
/// The same as an amplitude ratio, 10^(−[`PROBE_REJECTION_DB`]/20) (a literal: an f64 `pow` at
/// run time would cost the board image 2.5 KiB; a unit test checks the two agree).
const PROBE_REJECTION: f64 = 3.162_277_660_168_379_5e-4;
/// Time constant of the noise-power average, s.
pub const NOISE_AVERAGE_S: f32 = 2.0;

/// Figures of the built detector.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DetectorInfo {
    /// Beacon tone, Hz.
    pub tone_hz: f32,
    /// Noise-probe frequency, Hz.
    pub probe_hz: f32,
    /// Sample rate, Hz.
    pub sample_rate_hz: f32,
    /// Detection bandwidth actually realised (noise bandwidth about the tone), Hz.
    pub bandwidth_hz: f32,
    /// Lock-in: one-sided noise bandwidth of the low-pass alone, Hz (half the
    /// detection bandwidth). Block detector: the same half.
    pub lowpass_enbw_hz: f32,
    /// Time to 99 % of a step, s.
    pub settle_99_s: f32,
    /// Delay from the data's centre (the centroid of the detector's weights: the
    /// window's, or the lock-in's impulse response's) to the readout, s.
    pub group_delay_s: f32,
    /// Time between readouts, s.
    pub readout_interval_s: f32,
    /// Block length (block detector) or boxcar length (lock-in), samples.
    pub block_len: u32,
    /// Blocks in flight (block detector), 1 for the lock-in.
    pub overlap: u32,
}

#[derive(Clone, Copy, Debug)]
enum Core<const N: usize> {
    Block(BlockDetector, BlockState<N>),
    LockIn(LockIn, LockInState<N>),
}

/// One detection: a phasor per coil at one instant.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Detection<const N: usize> {
    /// Index of the latest sample used.
    pub sample_index: u64,
    /// Time the phasor stands for, s from the first sample: the centroid of the
    /// weights given to the data used (the readout's sample time less the group delay).
    pub t_s: f64,
    /// Phasor per coil, input units (amplitude of the tone on that coil).
    pub phasors: [C32; N],
    /// Noise σ per real component of each phasor, same units.
    pub noise_sigma: [f32; N],
    /// Counts over the readout interval.
    pub stats: ChannelStats<N>,
    /// Estimated offset of the tone from the set frequency, Hz.
    pub freq_offset_hz: f32,
    /// One-sigma of that estimate, Hz.
    pub freq_offset_sigma_hz: f32,
    /// Conditions: CLIPPED, NON_FINITE, SETTLING, MAINS, OFF_FREQUENCY.
    pub flags: Flags,
}

/// The multi-coil detector.
///
/// ```
/// use undertone_dsp::detect::input::InputScale;
/// use undertone_dsp::{Beacon, Detector, DetectorSettings, Flags};
/// // Two coils, a 512 Hz beacon sampled at 8 kHz, the default 4-pole lock-in.
/// let settings = DetectorSettings::new(8_000.0, Beacon::Hz512);
/// let mut det = Detector::<2>::new(&settings, InputScale::unity(24)).unwrap();
/// let w = core::f64::consts::TAU * 512.0 / 8_000.0;
/// let mut last = None;
/// for n in 0..16_000 {
///     let x = (w * n as f64).cos() as f32;
///     if let Some(d) = det.push(&[0.5 * x, -0.25 * x]) {
///         last = Some(d);
///     }
/// }
/// let d = last.unwrap();
/// // A·cos(ω0·n) reads as the phasor A: a negative amplitude as a phase of π.
/// assert!((d.phasors[0].re - 0.5).abs() < 1e-3 && d.phasors[0].im.abs() < 1e-3);
/// assert!((d.phasors[1].re + 0.25).abs() < 1e-3);
/// assert!(!d.flags.contains(Flags::SETTLING));
/// ```
#[derive(Clone, Copy, Debug)]
pub struct Detector<const N: usize> {
    settings: DetectorSettings,
    input: InputScale<N>,
    core: Core<N>,
    info: DetectorInfo,
    n: u64,
    stats: ChannelStats<N>,
    noise_pow: [f32; N],
    have_noise: bool,
    offset: OffsetEstimator<N>,
    mains_flag: bool,
    cycles: f64,
    probe_cycles: f64,
}

impl<const N: usize> Detector<N> {
    const CHANNELS_OK: () = assert!(N >= 1 && N <= 8, "a receiver has 1 to 8 coils");

    /// Validate the settings and build the detector.
    pub fn new(settings: &DetectorSettings, input: InputScale<N>) -> Result<Self, ConfigError> {
        #[allow(clippy::let_unit_value)]
        let _ = Self::CHANNELS_OK;
        settings.validate()?;
        input.validate()?;
        let fs = settings.sample_rate_hz;
        let f0 = settings.beacon.freq_hz();
        let bw = settings.bandwidth_hz;
        // The tone as the 32-bit phase increment represents it, so every part of the
        // detector works at exactly the same frequency.
        let cycles = nco::step_cycles(nco::phase_step(f0 as f64 / fs as f64));
        let quantise = |hz: f32| nco::step_cycles(nco::phase_step(hz as f64 / fs as f64));
        let fmax = settings::MAX_FREQ_FRACTION * fs;
        let (core, info) = match settings.kind {
            DetectorKind::Block { window } => {
                let len_f = libm::ceil(window.enbw_bins() as f64 * fs as f64 / bw as f64);
                if len_f > MAX_BLOCK_LEN as f64 {
                    let min_bw = window.enbw_bins() * fs / MAX_BLOCK_LEN as f32;
                    return Err(ConfigError { param: Param::Bandwidth, value: bw, min: min_bw, max: settings::MAX_BANDWIDTH_HZ });
                }
                let len = len_f as u32;
                let hop = libm::roundf(fs / settings.readout_rate_hz).max(1.0) as u32;
                let max_len = hop.saturating_mul(MAX_OVERLAP as u32);
                if len > max_len {
                    return Err(ConfigError { param: Param::BlockLength, value: len as f32, min: 1.0, max: max_len as f32 });
                }
                let lobe_bins = match window {
                    Window::Rectangular => 40.0,
                    Window::Hann => 10.0,
                    Window::BlackmanHarris4 => 5.0,
                };
                let bin_hz = fs / len as f32;
                let probe = mains::quiet_neighbour_hz(f0, lobe_bins * bin_hz, fmax);
                let det = BlockDetector::new(fs, cycles, quantise(probe), window, len, hop);
                let info = DetectorInfo {
                    tone_hz: f0,
                    probe_hz: probe,
                    sample_rate_hz: fs,
                    bandwidth_hz: det.enbw_hz(),
                    lowpass_enbw_hz: det.enbw_hz() / 2.0,
                    settle_99_s: len as f32 / fs,
                    group_delay_s: ((len as f64 - 1.0 - det.centre_samples()) / fs as f64) as f32,
                    readout_interval_s: hop.min(len.max(hop)) as f32 / fs,
                    block_len: len,
                    overlap: len.div_ceil(hop),
                };
                (Core::Block(det, BlockState::new()), info)
            }
            DetectorKind::LockIn { poles } => {
                let li = LockIn::new(fs, f0, bw, poles, settings.readout_rate_hz);
                let thr = PROBE_REJECTION;
                let mut off = 2.0 * bw;
                while li.response(off as f64) > thr && off < 0.25 * f0 {
                    off *= 1.1;
                }
                // The probe runs at the intermediate rate, so it sits within ±f_i/2 of the
                // tone, where mains harmonics from far away fold in after decimation.
                let reach = (0.45 * li.intermediate_rate_hz).min(0.25 * f0);
                let probe = f0 + li.quietest_probe_offset_hz(f0, off.min(reach), reach, (fmax - f0).max(0.0));
                let info = DetectorInfo {
                    tone_hz: f0,
                    probe_hz: probe,
                    sample_rate_hz: fs,
                    bandwidth_hz: 2.0 * li.lowpass_enbw_hz(),
                    lowpass_enbw_hz: li.lowpass_enbw_hz(),
                    settle_99_s: li.settling_s(0.99),
                    group_delay_s: li.group_delay_s(),
                    readout_interval_s: li.readout_interval_s(),
                    block_len: li.m,
                    overlap: 1,
                };
                let probe_cycles = (probe - f0) as f64 / li.intermediate_rate_hz as f64;
                (Core::LockIn(li, LockInState::new(cycles, probe_cycles)), info)
            }
        };
        let probe_cycles = match &core {
            Core::Block(..) => quantise(info.probe_hz),
            Core::LockIn(li, _) => (info.probe_hz - f0) as f64 / li.intermediate_rate_hz as f64,
        };
        let mut det = Self {
            settings: *settings,
            input,
            core,
            info,
            n: 0,
            stats: ChannelStats::new(),
            noise_pow: [0.0; N],
            have_noise: false,
            offset: OffsetEstimator::new(info.readout_interval_s, 0.1),
            mains_flag: false,
            cycles,
            probe_cycles,
        };
        det.mains_flag = det.mains().flagged();
        Ok(det)
    }

    /// The settings this detector was built from.
    pub fn settings(&self) -> &DetectorSettings {
        &self.settings
    }

    /// Figures of the built detector.
    pub fn info(&self) -> &DetectorInfo {
        &self.info
    }

    /// Input scaling in force.
    pub fn input(&self) -> &InputScale<N> {
        &self.input
    }

    /// Change one channel's scale (after an ADC gain step), keeping the filter state:
    /// samples taken at the new gain and scaled by the new factor continue the same field.
    pub fn set_scale(&mut self, channel: usize, scale: f32) -> Result<(), ConfigError> {
        if channel >= N {
            return Err(ConfigError { param: Param::Channels, value: channel as f32, min: 0.0, max: (N - 1) as f32 });
        }
        if !scale.is_finite() || scale == 0.0 {
            return Err(ConfigError { param: Param::ChannelScale, value: scale, min: f32::MIN_POSITIVE, max: f32::MAX });
        }
        // Codes mixed so far keep the scale they were taken with.
        if let Core::LockIn(_, st) = &mut self.core {
            st.fold_scale(&self.input.scale);
        }
        self.input.scale[channel] = scale;
        Ok(())
    }

    /// Normalised magnitude response `|H|` at `offset_hz` from the tone.
    pub fn response(&self, offset_hz: f64) -> f64 {
        match &self.core {
            Core::Block(b, _) => b.response(offset_hz),
            Core::LockIn(l, _) => l.response(offset_hz),
        }
    }

    /// Neighbouring mains harmonics and their rejection.
    ///
    /// ```
    /// use undertone_dsp::detect::input::InputScale;
    /// use undertone_dsp::{Beacon, Detector, DetectorSettings};
    /// let det = Detector::<1>::new(&DetectorSettings::new(48_000.0, Beacon::Hz512), InputScale::unity(24)).unwrap();
    /// let near = det.mains().nearest(50.0);
    /// assert_eq!((near.order, near.freq_hz), (10, 500.0));
    /// assert!(near.rejection_db > 60.0 && !det.mains().flagged());
    /// ```
    pub fn mains(&self) -> MainsReport {
        MainsReport::new(self.info.tone_hz, |d| self.response(d))
    }

    /// Samples consumed so far.
    pub fn samples(&self) -> u64 {
        self.n
    }

    /// Feed one frame of raw ADC codes.
    #[inline]
    pub fn push_codes(&mut self, codes: &[i32; N]) -> Option<Detection<N>> {
        let mut out = None;
        self.push_codes_block(core::slice::from_ref(codes), |d| out = Some(d));
        out
    }

    /// Feed many frames of raw ADC codes; `on` receives every detection they complete.
    ///
    /// The fast path: for the lock-in, codes are mixed in a tight loop and scaled
    /// once per boxcar; full-scale codes are found from a running OR of
    /// magnitudes, with an exact recount only for blocks that reach half scale.
    /// Any chunking gives the same detections as feeding the frames one by one.
    ///
    /// ```
    /// use undertone_dsp::detect::input::InputScale;
    /// use undertone_dsp::{Beacon, Detector, DetectorSettings, Flags};
    /// let settings = DetectorSettings::new(8_000.0, Beacon::Hz640);
    /// let mut det = Detector::<1>::new(&settings, InputScale::unity(24)).unwrap();
    /// // One second of a 24-bit converter at full scale: every readout says CLIPPED.
    /// let w = core::f64::consts::TAU * 640.0 / 8_000.0;
    /// let frames: Vec<[i32; 1]> = (0..8_000).map(|n| [((w * n as f64).cos() * 9e6).clamp(-8_388_608.0, 8_388_607.0) as i32]).collect();
    /// let mut readouts = 0;
    /// det.push_codes_block(&frames, |d| {
    ///     assert!(d.flags.contains(Flags::CLIPPED));
    ///     readouts += 1;
    /// });
    /// assert_eq!(readouts, 20); // 20 readouts a second
    /// ```
    pub fn push_codes_block(&mut self, frames: &[[i32; N]], mut on: impl FnMut(Detection<N>)) {
        let mut i = 0;
        while i < frames.len() {
            let n = self.n;
            let fs = self.info.sample_rate_hz as f64;
            let done = match &mut self.core {
                Core::LockIn(cfg, st) => {
                    let mut or = [0u32; N];
                    let took = st.mix_codes(cfg, n, &frames[i..], &mut or);
                    self.input.code_stats(&frames[i..i + took], &or, &mut self.stats);
                    self.n += took as u64;
                    i += took;
                    if st.boxcar_full(cfg) {
                        st.end_boxcar(cfg, &self.input.scale).map(|(p, pp)| {
                            let last = self.n - 1;
                            (last, last as f64 / fs - self.info.group_delay_s as f64, p, pp)
                        })
                    } else {
                        None
                    }
                }
                Core::Block(cfg, st) => {
                    let x = self.input.codes(&frames[i], &mut self.stats);
                    self.n += 1;
                    i += 1;
                    st.step(cfg, n, &x).map(|(p, pp, start)| (n, (start as f64 + cfg.centre_samples()) / fs, p, pp))
                }
            };
            if let Some((last, t_s, p, pp)) = done {
                on(self.finish(last, t_s, p, pp));
            }
        }
    }

    /// Feed one frame of f32 samples.
    #[inline]
    pub fn push(&mut self, frame: &[f32; N]) -> Option<Detection<N>> {
        let x = self.input.floats(frame, &mut self.stats);
        let n = self.n;
        self.n += 1;
        let fs = self.info.sample_rate_hz as f64;
        let (p, pp, t_s) = match &mut self.core {
            Core::Block(cfg, st) => {
                let (p, pp, start) = st.step(cfg, n, &x)?;
                (p, pp, (start as f64 + cfg.centre_samples()) / fs)
            }
            Core::LockIn(cfg, st) => {
                st.mix_scaled(cfg, n, &x);
                if !st.boxcar_full(cfg) {
                    return None;
                }
                let (p, pp) = st.end_boxcar(cfg, &self.input.scale)?;
                (p, pp, n as f64 / fs - self.info.group_delay_s as f64)
            }
        };
        Some(self.finish(n, t_s, p, pp))
    }

    fn finish(&mut self, n: u64, t_s: f64, mut p: [C32; N], mut pp: [C32; N]) -> Detection<N> {
        // Inputs near the f32 range can overflow the accumulators. Such a readout
        // is zeroed and flagged, and the filter state restarted so it recovers.
        let overflow = !(p.iter().all(|v| v.is_finite()) && pp.iter().all(|v| v.is_finite()));
        if overflow {
            p = [C32::ZERO; N];
            pp = [C32::ZERO; N];
            self.stats.non_finite[0] = self.stats.non_finite[0].saturating_add(1);
            match &mut self.core {
                Core::Block(_, st) => *st = BlockState::new(),
                Core::LockIn(_, st) => *st = LockInState::new(self.cycles, self.probe_cycles),
            }
        }
        let beta = (self.info.readout_interval_s / NOISE_AVERAGE_S).clamp(0.0, 1.0);
        let mut sigma = [0.0; N];
        for c in 0..N {
            let pw = pp[c].norm_sqr();
            if pw.is_finite() && !overflow {
                if self.have_noise {
                    self.noise_pow[c] += beta * (pw - self.noise_pow[c]);
                } else {
                    self.noise_pow[c] = pw;
                }
            }
            sigma[c] = libm::sqrtf(self.noise_pow[c] * 0.5);
        }
        self.have_noise = true;
        let off = self.offset.update(&p);
        let stats = core::mem::take(&mut self.stats);
        let mut flags = Flags::NONE;
        flags.set(Flags::CLIPPED, stats.any_clipped());
        flags.set(Flags::NON_FINITE, stats.any_non_finite());
        let elapsed = ((n + 1) as f64 / self.info.sample_rate_hz as f64) as f32;
        flags.set(Flags::SETTLING, elapsed < self.info.settle_99_s);
        flags.set(Flags::MAINS, self.mains_flag);
        // Off frequency: the offset is both large against the bandwidth and significant against its own σ.
        let off_sigma = self.offset.offset_sigma_hz();
        flags.set(
            Flags::OFF_FREQUENCY,
            libm::fabsf(off) > OFFSET_FLAG_FRACTION * self.info.bandwidth_hz && libm::fabsf(off) > 3.0 * off_sigma,
        );
        Detection {
            sample_index: n,
            t_s,
            phasors: p,
            noise_sigma: sigma,
            stats,
            freq_offset_hz: off,
            freq_offset_sigma_hz: off_sigma,
            flags,
        }
    }
}

#[cfg(test)]
mod probe_rejection_tests {
    #[test]
    fn ratio_is_the_decibels() {
        let want = libm::pow(10.0, -super::PROBE_REJECTION_DB / 20.0);
        assert!((super::PROBE_REJECTION / want - 1.0).abs() < 1e-15);
    }
}
