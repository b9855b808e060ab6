//! Typed configuration errors.
//!
//! Builders validate settings in physical units and return a [`ConfigError`]
//! that names the parameter, the value given and the range allowed. Per-sample
//! code never returns errors: it saturates, flags and carries on.

use core::fmt;

/// Which setting was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Param {
    /// ADC sample rate, Hz.
    SampleRate,
    /// Beacon (sonde) tone frequency, Hz.
    BeaconFrequency,
    /// Detection (equivalent noise) bandwidth, Hz.
    Bandwidth,
    /// Block length of the block detector, samples.
    BlockLength,
    /// Readout rate, Hz.
    ReadoutRate,
    /// Number of low-pass poles of the lock-in.
    Poles,
    /// Per-channel input scale (units per code or per input unit).
    ChannelScale,
    /// Full-scale input level.
    FullScale,
    /// Frequency-scan range, Hz.
    ScanRange,
    /// Length of a recording handed to an analysis routine, samples.
    RecordLength,
    /// Number of channels (coils).
    Channels,
    /// A coil-head geometry value (position, axis or gain).
    HeadGeometry,
    /// A calibration input (distance, SNR, geometry).
    Calibration,
    /// A distance given by the user, metres.
    Distance,
    /// Orientation hysteresis thresholds.
    Hysteresis,
    /// A sonde moment or line current.
    SourceStrength,
    /// Relative gain uncertainty between coils.
    GainTolerance,
    /// Height of the lower coil above the ground, m.
    CoilHeight,
    /// A signal threshold (SNR, dB).
    SignalThreshold,
    /// The relative gain of coil `i`.
    CoilGain(u8),
    /// The position of coil `i`, m.
    CoilPosition(u8),
    /// The axis of coil `i` (a unit vector).
    CoilAxis(u8),
}

impl Param {
    /// Human name of the parameter.
    pub const fn name(self) -> &'static str {
        match self {
            Param::SampleRate => "sample rate",
            Param::BeaconFrequency => "beacon frequency",
            Param::Bandwidth => "detection bandwidth",
            Param::BlockLength => "block length",
            Param::ReadoutRate => "readout rate",
            Param::Poles => "low-pass poles",
            Param::ChannelScale => "channel scale",
            Param::FullScale => "full scale",
            Param::ScanRange => "scan range",
            Param::RecordLength => "record length",
            Param::Channels => "channel count",
            Param::HeadGeometry => "coil head geometry",
            Param::Calibration => "calibration input",
            Param::Distance => "distance",
            Param::Hysteresis => "orientation hysteresis",
            Param::SourceStrength => "source strength",
            Param::GainTolerance => "gain tolerance",
            Param::CoilHeight => "coil height",
            Param::SignalThreshold => "signal threshold",
            Param::CoilGain(_) => "gain",
            Param::CoilPosition(_) => "position",
            Param::CoilAxis(_) => "axis length",
        }
    }

    /// The coil a per-coil parameter refers to.
    pub const fn coil(self) -> Option<u8> {
        match self {
            Param::CoilGain(i) | Param::CoilPosition(i) | Param::CoilAxis(i) => Some(i),
            _ => None,
        }
    }

    /// Unit of the parameter as printed.
    pub const fn unit(self) -> &'static str {
        match self {
            Param::SampleRate | Param::BeaconFrequency | Param::Bandwidth | Param::ReadoutRate | Param::ScanRange => "Hz",
            Param::BlockLength | Param::RecordLength => "samples",
            Param::Distance | Param::HeadGeometry | Param::CoilHeight | Param::CoilPosition(_) => "m",
            Param::SignalThreshold => "dB",
            _ => "",
        }
    }
}

/// A setting outside its allowed range. `value` is what was given; `min` and
/// `max` bound what is allowed (inclusive), in the unit of [`Param::unit`].
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ConfigError {
    /// The parameter refused.
    pub param: Param,
    /// The value given (NaN stays NaN).
    pub value: f32,
    /// Smallest allowed value.
    pub min: f32,
    /// Largest allowed value.
    pub max: f32,
}

impl ConfigError {
    /// Check `value` against `[min, max]`; NaN and infinities are refused.
    pub fn check(param: Param, value: f32, min: f32, max: f32) -> Result<f32, ConfigError> {
        if value.is_finite() && value >= min && value <= max {
            Ok(value)
        } else {
            Err(ConfigError { param, value, min, max })
        }
    }
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let u = self.param.unit();
        let sp = if u.is_empty() { "" } else { " " };
        if let Some(i) = self.param.coil() {
            write!(f, "coil {i} ")?;
        }
        write!(
            f,
            "{} {}{}{} is not allowed: allowed {}{}{} to {}{}{}",
            self.param.name(),
            self.value,
            sp,
            u,
            self.min,
            sp,
            u,
            self.max,
            sp,
            u
        )
    }
}

impl core::error::Error for ConfigError {}
