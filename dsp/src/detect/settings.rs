//! Detector settings in physical units, validated by a build step.
//!
//! Settings → build → active: people edit [`DetectorSettings`] in Hz and
//! seconds; [`DetectorSettings::validate`] checks them and the detector
//! constructors turn them into ready-to-run coefficients. A setting that fails
//! to build returns a [`ConfigError`] naming the parameter and its allowed range.

use crate::detect::window::Window;
use crate::error::{ConfigError, Param};

/// Lowest sample rate accepted, Hz.
pub const MIN_SAMPLE_RATE_HZ: f32 = 4_000.0;
/// Highest sample rate accepted, Hz.
pub const MAX_SAMPLE_RATE_HZ: f32 = 250_000.0;
/// The beacon tone must lie below this fraction of the sample rate.
pub const MAX_FREQ_FRACTION: f32 = 0.45;
/// The beacon tone must lie at least this many bandwidths above DC.
pub const MIN_FREQ_BANDWIDTHS: f32 = 5.0;
/// Narrowest detection bandwidth (ENBW), Hz.
pub const MIN_BANDWIDTH_HZ: f32 = 0.05;
/// Widest detection bandwidth (ENBW), Hz.
pub const MAX_BANDWIDTH_HZ: f32 = 50.0;
/// Readout rate range, Hz.
pub const MIN_READOUT_RATE_HZ: f32 = 10.0;
/// Readout rate range, Hz.
pub const MAX_READOUT_RATE_HZ: f32 = 100.0;
/// Most blocks the block detector keeps in flight at once (overlap factor).
pub const MAX_OVERLAP: usize = 16;
/// Longest block the f32 Goertzel recurrence is trusted with, samples.
pub const MAX_BLOCK_LEN: u32 = 1 << 20;

/// The beacon tone: one of the usual presets or any custom frequency.
///
/// 512 Hz and 640 Hz are the two usual sonde frequencies (common practice of the
/// trade, no published source); 8192 Hz and 32768 Hz also exist.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Beacon {
    /// 512 Hz.
    Hz512,
    /// 640 Hz.
    Hz640,
    /// 8192 Hz.
    Hz8192,
    /// 32768 Hz.
    Hz32768,
    /// Any other frequency, Hz.
    Custom(f32),
}

impl Beacon {
    /// The tone frequency in Hz.
    ///
    /// ```
    /// use undertone_dsp::Beacon;
    /// assert_eq!(Beacon::Hz640.freq_hz(), 640.0);
    /// assert_eq!(Beacon::from_hz(8192.0), Beacon::Hz8192);
    /// ```
    pub fn freq_hz(self) -> f32 {
        match self {
            Beacon::Hz512 => 512.0,
            Beacon::Hz640 => 640.0,
            Beacon::Hz8192 => 8192.0,
            Beacon::Hz32768 => 32768.0,
            Beacon::Custom(f) => f,
        }
    }

    /// The preset matching a frequency exactly, else `Custom`.
    pub fn from_hz(f: f32) -> Self {
        match f {
            512.0 => Beacon::Hz512,
            640.0 => Beacon::Hz640,
            8192.0 => Beacon::Hz8192,
            32768.0 => Beacon::Hz32768,
            x => Beacon::Custom(x),
        }
    }
}

/// Which detector turns samples into phasors.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DetectorKind {
    /// Windowed generalised Goertzel over overlapping blocks.
    Block {
        /// Taper applied to each block.
        window: Window,
    },
    /// Continuous lock-in: mix, block-average, n-pole low-pass.
    LockIn {
        /// Number of cascaded first-order poles, 1 to 4.
        poles: u8,
    },
}

impl DetectorKind {
    /// The receiver's default: a 4-pole lock-in (cheapest per sample, smooth output).
    pub const DEFAULT: DetectorKind = DetectorKind::LockIn { poles: 4 };
}

/// Everything the detector needs, in physical units.
///
/// ```
/// use undertone_dsp::{Beacon, DetectorKind, DetectorSettings, Param, Window};
/// let s = DetectorSettings::new(48_000.0, Beacon::Hz640);
/// assert!(s.validate().is_ok());
/// assert_eq!(s.kind, DetectorKind::LockIn { poles: 4 });
/// let block = s.with_kind(DetectorKind::Block { window: Window::Hann });
/// assert!(block.bandwidth_hz > 0.0 && block.validate().is_ok());
/// // A setting out of range names itself and its range.
/// let mut bad = s;
/// bad.sample_rate_hz = 1_000.0;
/// let e = bad.validate().unwrap_err();
/// assert_eq!((e.param, e.min, e.max), (Param::SampleRate, 4_000.0, 250_000.0));
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DetectorSettings {
    /// ADC sample rate, Hz (4 kHz to 250 kHz).
    pub sample_rate_hz: f32,
    /// Beacon tone.
    pub beacon: Beacon,
    /// Detection bandwidth, Hz: the equivalent noise bandwidth about the tone
    /// (a block detector's ENBW in Hz; twice a lock-in low-pass's one-sided ENBW).
    pub bandwidth_hz: f32,
    /// Detector kind.
    pub kind: DetectorKind,
    /// How often a readout is produced, Hz (10 to 100).
    pub readout_rate_hz: f32,
}

impl DetectorSettings {
    /// Settings with the default detector and bandwidth for `beacon`, 20 readouts/s.
    pub fn new(sample_rate_hz: f32, beacon: Beacon) -> Self {
        let kind = DetectorKind::DEFAULT;
        Self { sample_rate_hz, beacon, bandwidth_hz: default_bandwidth_hz(beacon, kind), kind, readout_rate_hz: 20.0 }
    }

    /// Same settings with another detector kind and that kind's default bandwidth.
    pub fn with_kind(mut self, kind: DetectorKind) -> Self {
        self.kind = kind;
        self.bandwidth_hz = default_bandwidth_hz(self.beacon, kind);
        self
    }

    /// Check every field; the first one out of range is returned.
    pub fn validate(&self) -> Result<(), ConfigError> {
        let fs = ConfigError::check(Param::SampleRate, self.sample_rate_hz, MIN_SAMPLE_RATE_HZ, MAX_SAMPLE_RATE_HZ)?;
        let bw = ConfigError::check(Param::Bandwidth, self.bandwidth_hz, MIN_BANDWIDTH_HZ, MAX_BANDWIDTH_HZ)?;
        let fmax = MAX_FREQ_FRACTION * fs;
        let fmin = MIN_FREQ_BANDWIDTHS * bw;
        let f = self.beacon.freq_hz();
        ConfigError::check(Param::BeaconFrequency, f, fmin, fmax)?;
        if f >= fmax {
            return Err(ConfigError { param: Param::BeaconFrequency, value: f, min: fmin, max: fmax });
        }
        ConfigError::check(Param::ReadoutRate, self.readout_rate_hz, MIN_READOUT_RATE_HZ, MAX_READOUT_RATE_HZ)?;
        if let DetectorKind::LockIn { poles } = self.kind {
            ConfigError::check(Param::Poles, poles as f32, 1.0, 4.0)?;
        }
        Ok(())
    }
}

/// Default detection bandwidth (ENBW, Hz) for a beacon and detector kind.
///
/// Chosen so the detector rejects the nearest 50 Hz and 60 Hz mains harmonics
/// by at least 60 dB (512 Hz sits 12 Hz from 500 Hz; 640 Hz 10 Hz from 650 Hz;
/// 8192 Hz and 32768 Hz 8 Hz from 8200 Hz and 32760 Hz), checked in `tests/`.
pub fn default_bandwidth_hz(beacon: Beacon, kind: DetectorKind) -> f32 {
    // Offset to the nearest harmonic on either grid, at nominal grid frequency.
    let f = beacon.freq_hz();
    let near = nearest_harmonic_offset_hz(f, 50.0).min(nearest_harmonic_offset_hz(f, 60.0));
    let near = if near.is_finite() && near > 0.5 { near } else { 10.0 };
    match kind {
        // n-pole lock-in: per-pole corner fp = 1/(2πτ) set so (1 + (Δ/fp)²)^(n/2)
        // reaches 66 dB (6 dB margin over 60 dB); bandwidth B = 2·B_lp = 2·(B_lp·τ)/τ.
        DetectorKind::LockIn { poles } => {
            let p = poles.clamp(1, 4) as f32;
            // Per-pole corner that gives 66 dB at Δ: (1+(Δ/fp)^2)^(p/2) = 10^(66/20).
            let x = crate::powf::powf(10.0, 66.0 / (10.0 * p)) - 1.0;
            let fp = near / libm::sqrtf(x);
            let tau = 1.0 / (2.0 * core::f32::consts::PI * fp);
            (2.0 * enbw_tau_product(poles) / tau).clamp(MIN_BANDWIDTH_HZ, MAX_BANDWIDTH_HZ)
        }
        // Windowed block: rejection beyond the main lobe is set by the sidelobes;
        // place the harmonic at least `lobe` bins away.
        DetectorKind::Block { window } => {
            let lobe_bins = match window {
                Window::Rectangular => 320.0, // sidelobes fall as 1/(πδ): −60 dB needs δ ≈ 320 bins
                Window::Hann => 8.0,
                Window::BlackmanHarris4 => 4.5,
            };
            let bin_hz = near / lobe_bins;
            (window.enbw_bins() * bin_hz).clamp(MIN_BANDWIDTH_HZ, MAX_BANDWIDTH_HZ)
        }
    }
}

/// ENBW·τ of n cascaded identical first-order poles: Γ(n−½)/(4√π·Γ(n)).
pub fn enbw_tau_product(poles: u8) -> f32 {
    match poles {
        0 | 1 => 0.25,
        2 => 0.125,
        3 => 3.0 / 32.0,
        _ => 5.0 / 64.0,
    }
}

/// Distance from `f` to the nearest harmonic of `grid_hz`, Hz.
pub fn nearest_harmonic_offset_hz(f: f32, grid_hz: f32) -> f32 {
    let n = libm::roundf(f / grid_hz).max(1.0);
    libm::fabsf(f - n * grid_hz)
}
