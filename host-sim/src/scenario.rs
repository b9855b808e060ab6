//! Scenario files: what is buried, what interferes, the receiver, and how it moves.
//!
//! TOML read with serde (`deny_unknown_fields`) into typed values: the head,
//! the detector kind and the window are enums, so an unknown name is refused
//! at parse time with the allowed names. Every value is validated with an
//! error naming the field's path, the value and the allowed range; what the
//! receiver accepts (sample rate, beacon frequency, bandwidth, readout rate,
//! poles, block length, coil height) is checked by the DSP's own settings
//! (`validate()` and the detector's build step), so those limits live in one
//! place. Lengths in
//! metres, angles in degrees (converted to radians at the edge), fields in tesla,
//! moments in A·m², frequencies in Hz.
//!
//! Coordinates: ground frame x east, y north, z up, ground surface at z = 0.
//! Depths are positive numbers below the surface.

use crate::error::{Result, SimError};
pub use crate::motion::MotionSpec;
use serde::{Deserialize, Serialize};
use std::path::Path;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::detect::settings::{MAX_FREQ_FRACTION, MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ};
use undertone_dsp::{Beacon, ConfigError, Detector, DetectorKind, DetectorSettings, Head, LocatorSettings, Param, Window};

/// The built-in demo scenario (a walk along and then across a buried sonde).
pub const DEMO_TOML: &str = include_str!("../examples/demo.toml");

/// A whole scenario.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Name shown in reports.
    pub name: String,
    /// Seed of every random draw (noise, wobble): same seed, same samples.
    #[serde(default = "one")]
    pub seed: u64,
    /// The receiver hardware.
    pub receiver: ReceiverSpec,
    /// Detector settings.
    #[serde(default)]
    pub detector: DetectorSpec,
    /// The sonde.
    pub sonde: SondeSpec,
    /// Other beacons on the air.
    #[serde(default)]
    pub interferer: Vec<SondeSpec>,
    /// A long line current (a traced pipe or a cable carrying a signal).
    #[serde(default)]
    pub line: Option<LineSpec>,
    /// Mains field.
    #[serde(default)]
    pub mains: Option<MainsSpec>,
    /// Sensor noise and offsets.
    #[serde(default)]
    pub noise: NoiseSpec,
    /// Ground conductivity.
    #[serde(default)]
    pub soil: SoilSpec,
    /// How the receiver moves: segments in order.
    pub motion: Vec<MotionSpec>,
    /// A calibration made before the job (none when absent).
    #[serde(default)]
    pub calibration: Option<CalibrationSpec>,
}

/// A calibration before the job, as `undertone_dsp::locate::calibration` asks: the sonde laid
/// level on the ground, the head held still and in line straight above it at a measured
/// distance. The simulator makes the readings (same receiver, noise and mains; no ground), the
/// receiver computes the upper coil's gain correction and the sonde's strength, and the gain
/// tolerance becomes that correction's own σ.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CalibrationSpec {
    /// Distance from the lower coil centre down to the sonde, m.
    pub distance_m: f64,
    /// One-sigma of that distance as the person measures it, m (one draw from the seed).
    #[serde(default = "default_distance_sigma")]
    pub distance_sigma_m: f64,
    /// Seconds of readings averaged (after the detector settles).
    #[serde(default = "default_cal_seconds")]
    pub seconds: f64,
}

fn default_distance_sigma() -> f64 {
    // A tape measure held by hand to the receiver and the sonde: about a centimetre (from memory).
    0.01
}

fn default_cal_seconds() -> f64 {
    3.0
}

fn one() -> u64 {
    1
}

/// Receiver hardware.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ReceiverSpec {
    /// The coil head.
    #[serde(default)]
    pub head: HeadKind,
    /// ADC sample rate, Hz.
    pub sample_rate_hz: f64,
    /// ADC resolution, bits (12 to 32).
    #[serde(default = "default_bits")]
    pub adc_bits: u32,
    /// Field amplitude that reaches ADC full scale, T.
    pub full_scale_t: f64,
    /// Relative gain error of each coil (e.g. 0.02 = 2 % high); missing coils 0.
    #[serde(default)]
    pub gain_mismatch: Vec<f64>,
    /// Delay between consecutive channels of a multiplexed converter, s.
    #[serde(default)]
    pub skew_s: f64,
    /// Height of the lower coil centre above the ground, m.
    #[serde(default = "default_height")]
    pub height_m: f64,
    /// Ground conductivity the operator sets on the receiver for its depth
    /// correction, S/m (0: no correction). Independent of the true `soil`.
    #[serde(default)]
    pub assume_conductivity_s_per_m: f64,
    /// Upper/lower coil gain tolerance the operator sets on the receiver (one σ, after
    /// calibration; the receiver's default when absent). Independent of `gain_mismatch`.
    #[serde(default)]
    pub gain_tolerance: Option<f64>,
}

/// The built-in coil heads.
#[derive(Clone, Copy, Debug, Default, Deserialize, Serialize, PartialEq, Eq, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum HeadKind {
    /// Four coils: lower along, across and vertical, upper along 0.40 m above.
    #[default]
    Reference4,
    /// Two x/y/z triads 0.40 m apart.
    Triads6,
}

impl HeadKind {
    /// Number of coils.
    pub fn coils(self) -> usize {
        match self {
            HeadKind::Reference4 => 4,
            HeadKind::Triads6 => 6,
        }
    }

    /// The name as written in scenario files and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            HeadKind::Reference4 => "reference4",
            HeadKind::Triads6 => "triads6",
        }
    }
}

/// Which detector turns samples into phasors.
#[derive(Clone, Copy, Debug, Default, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "lowercase")]
pub enum DetectorChoice {
    /// Continuous lock-in with `poles` low-pass poles.
    #[default]
    Lockin,
    /// Windowed Goertzel over overlapping blocks, with `window`.
    Block,
}

/// Taper of the block detector.
#[derive(Clone, Copy, Debug, Default, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum WindowChoice {
    /// No taper.
    Rectangular,
    /// Hann.
    Hann,
    /// 4-term Blackman–Harris.
    #[default]
    BlackmanHarris,
}

impl From<WindowChoice> for Window {
    fn from(w: WindowChoice) -> Self {
        match w {
            WindowChoice::Rectangular => Window::Rectangular,
            WindowChoice::Hann => Window::Hann,
            WindowChoice::BlackmanHarris => Window::BlackmanHarris4,
        }
    }
}
fn default_bits() -> u32 {
    24
}
fn default_height() -> f64 {
    0.1
}

/// Detector settings.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct DetectorSpec {
    /// Frequency the receiver is set to, Hz (default: the sonde's nominal frequency).
    pub freq_hz: Option<f64>,
    /// Detector kind: `lockin` or `block`.
    #[serde(default)]
    pub kind: DetectorChoice,
    /// Lock-in poles.
    #[serde(default = "default_poles")]
    pub poles: u8,
    /// Block window: `rectangular`, `hann` or `blackman-harris`.
    #[serde(default)]
    pub window: WindowChoice,
    /// Detection bandwidth, Hz (default: the preset's).
    pub bandwidth_hz: Option<f64>,
    /// Readouts per second.
    #[serde(default = "default_rate")]
    pub readout_hz: f64,
}

impl Default for DetectorSpec {
    fn default() -> Self {
        Self {
            freq_hz: None,
            kind: DetectorChoice::default(),
            poles: default_poles(),
            window: WindowChoice::default(),
            bandwidth_hz: None,
            readout_hz: default_rate(),
        }
    }
}

fn default_poles() -> u8 {
    4
}
fn default_rate() -> f64 {
    20.0
}

/// A sonde (or an interfering beacon).
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct SondeSpec {
    /// Nominal tone, Hz.
    pub freq_hz: f64,
    /// Crystal offset, parts per million.
    #[serde(default)]
    pub ppm: f64,
    /// Magnetic moment amplitude, A·m².
    pub moment_am2: f64,
    /// Depth below ground, m.
    pub depth_m: f64,
    /// Position east, m.
    #[serde(default)]
    pub x_m: f64,
    /// Position north, m.
    #[serde(default)]
    pub y_m: f64,
    /// Axis direction, degrees from east towards north.
    #[serde(default)]
    pub yaw_deg: f64,
    /// Axis pitch, degrees up from level.
    #[serde(default)]
    pub pitch_deg: f64,
    /// Speed along its axis while pushed, m/s (0: still).
    #[serde(default)]
    pub push_speed_m_s: f64,
}

/// A long straight line current.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct LineSpec {
    /// Tone, Hz.
    pub freq_hz: f64,
    /// Current amplitude, A.
    pub current_a: f64,
    /// Depth below ground, m.
    pub depth_m: f64,
    /// A point of the line (east), m.
    #[serde(default)]
    pub x_m: f64,
    /// A point of the line (north), m.
    #[serde(default)]
    pub y_m: f64,
    /// Direction, degrees from east towards north.
    #[serde(default)]
    pub yaw_deg: f64,
}

/// Mains field.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct MainsSpec {
    /// Grid frequency, 50 or 60 Hz.
    pub grid_hz: f64,
    /// Fundamental amplitude, T.
    pub field_t: f64,
    /// Amplitude ratio of consecutive harmonics (0 to 1).
    #[serde(default = "default_decay")]
    pub harmonic_decay: f64,
    /// Field direction (x, y, z); normalised.
    #[serde(default = "default_dir")]
    pub direction: [f64; 3],
}

fn default_decay() -> f64 {
    0.7
}
fn default_dir() -> [f64; 3] {
    [0.0, 1.0, 0.3]
}

/// Sensor noise and DC offsets.
#[derive(Clone, Debug, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct NoiseSpec {
    /// White noise density at each coil, T/√Hz.
    #[serde(default)]
    pub density_t_per_rthz: f64,
    /// White noise density in ADC counts/√Hz (added to the above).
    #[serde(default)]
    pub density_counts_per_rthz: f64,
    /// DC offset per channel, fraction of full scale.
    #[serde(default)]
    pub dc_offset: Vec<f64>,
}

/// Ground.
#[derive(Clone, Debug, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct SoilSpec {
    /// Conductivity, S/m (0 = none).
    #[serde(default)]
    pub conductivity_s_per_m: f64,
}

/// A limit of the DSP's (f32) as the f64 a person wrote: 0.2, not 0.20000000298023224.
fn short(v: f32) -> f64 {
    v.to_string().parse().unwrap_or(v as f64)
}

fn check(path: &str, field: &str, v: f64, lo: f64, hi: f64) -> Result<()> {
    if v.is_finite() && v >= lo && v <= hi {
        Ok(())
    } else {
        Err(SimError::value(path, field, v, format!("{lo} to {hi}")))
    }
}

/// A tone the simulator can synthesise: above 0 and below the DSP's limit of
/// [`MAX_FREQ_FRACTION`] of the sample rate.
fn check_tone(path: &str, field: &str, f: f64, fs: f64) -> Result<()> {
    let hi = MAX_FREQ_FRACTION as f64 * fs;
    if f.is_finite() && f > 0.0 && f < hi {
        Ok(())
    } else {
        Err(SimError::value(
            path,
            field,
            f,
            format!("above 0 Hz and below {} Hz ({MAX_FREQ_FRACTION} of the sample rate)", crate::units::num(hi)),
        ))
    }
}

impl Scenario {
    /// Parse and validate TOML text; `path` names the source in errors.
    pub fn from_toml(text: &str, path: &str) -> Result<Self> {
        let s: Scenario = toml::from_str(text)
            .map_err(|e| SimError::Parse { path: path.to_string(), msg: e.message().to_string() + &span_note(text, e.span()) })?;
        s.validate(path)?;
        Ok(s)
    }

    /// Read a scenario file.
    pub fn load(path: &Path) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|e| SimError::io(path, "read scenario", e))?;
        Self::from_toml(&text, &path.display().to_string())
    }

    /// The built-in demo.
    pub fn demo() -> Self {
        Self::from_toml(DEMO_TOML, "built-in demo").expect("the built-in demo scenario is valid")
    }

    /// Number of coils of the head.
    pub fn coils(&self) -> usize {
        self.receiver.head.coils()
    }

    /// Total duration of the motion, s.
    pub fn duration_s(&self) -> f64 {
        crate::motion::total_duration_s(&self.motion)
    }

    /// The detector settings the scenario asks for (checked by [`Scenario::validate`]).
    pub fn detector_settings(&self) -> DetectorSettings {
        let d = &self.detector;
        let f = d.freq_hz.unwrap_or(self.sonde.freq_hz) as f32;
        let kind = match d.kind {
            DetectorChoice::Block => DetectorKind::Block { window: d.window.into() },
            DetectorChoice::Lockin => DetectorKind::LockIn { poles: d.poles },
        };
        let mut s = DetectorSettings::new(self.receiver.sample_rate_hz as f32, Beacon::from_hz(f)).with_kind(kind);
        if let Some(b) = d.bandwidth_hz {
            s.bandwidth_hz = b as f32;
        }
        s.readout_rate_hz = d.readout_hz as f32;
        s
    }

    /// The scenario's field for a setting the receiver refused.
    fn field_of(&self, param: Param) -> &'static str {
        match param {
            Param::SampleRate => "receiver.sample_rate_hz",
            Param::BeaconFrequency if self.detector.freq_hz.is_some() => "detector.freq_hz",
            Param::BeaconFrequency => "sonde.freq_hz",
            Param::Bandwidth if self.detector.bandwidth_hz.is_some() => "detector.bandwidth_hz",
            Param::Bandwidth => "detector.bandwidth_hz (the default for this beacon and detector)",
            Param::BlockLength => "detector.bandwidth_hz (the block it needs)",
            Param::ReadoutRate => "detector.readout_hz",
            Param::Poles => "detector.poles",
            Param::CoilHeight => "receiver.height_m",
            _ => "receiver",
        }
    }

    /// What the receiver itself accepts: the detector settings (their
    /// `validate()` and the detector's build step) and the coil height (the
    /// locator settings' `validate()`).
    fn validate_receiver(&self, p: &str) -> Result<()> {
        let det = self.detector_settings();
        let loc = LocatorSettings { coil_height_m: self.receiver.height_m as f32, ..Default::default() };
        let checked = det
            .validate()
            .and_then(|_| Detector::<1>::new(&det, InputScale::unity(self.receiver.adc_bits)).map(|_| ()))
            .and_then(|_| loc.validate())
            .and_then(|_| match self.receiver.head {
                HeadKind::Reference4 => Head::reference4().validate(),
                HeadKind::Triads6 => Head::triads6().validate(),
            });
        checked.map_err(|e: ConfigError| {
            SimError::value(p, self.field_of(e.param), crate::units::num(e.value as f64), crate::error::allowed(&e))
        })
    }

    /// Check every value.
    pub fn validate(&self, p: &str) -> Result<()> {
        if let Some(c) = &self.calibration {
            let (lo, hi) = undertone_dsp::locate::calibration::DISTANCE_RANGE_M;
            check(p, "calibration.distance_m", c.distance_m, short(lo), short(hi))?;
            check(p, "calibration.distance_sigma_m", c.distance_sigma_m, 0.0, 0.1)?;
            check(p, "calibration.seconds", c.seconds, 0.5, 60.0)?;
        }
        let r = &self.receiver;
        // The sample rate first (the DSP's limits): the frequency limits below depend on it.
        ConfigError::check(Param::SampleRate, r.sample_rate_hz as f32, MIN_SAMPLE_RATE_HZ, MAX_SAMPLE_RATE_HZ)
            .map_err(|e| SimError::value(p, "receiver.sample_rate_hz", crate::units::num(r.sample_rate_hz), crate::error::allowed(&e)))?;
        check(p, "receiver.adc_bits", r.adc_bits as f64, 12.0, 32.0)?;
        check(p, "receiver.full_scale_t", r.full_scale_t, 1e-12, 1e-2)?;
        if r.gain_mismatch.len() > self.coils() {
            return Err(SimError::value(
                p,
                "receiver.gain_mismatch",
                format!("{} values", r.gain_mismatch.len()),
                format!("at most {} (one per coil)", self.coils()),
            ));
        }
        for (i, g) in r.gain_mismatch.iter().enumerate() {
            check(p, &format!("receiver.gain_mismatch[{i}]"), *g, -0.5, 0.5)?;
        }
        check(p, "receiver.skew_s", r.skew_s, 0.0, 1e-3)?;
        check(p, "receiver.assume_conductivity_s_per_m", r.assume_conductivity_s_per_m, 0.0, 10.0)?;
        if let Some(g) = r.gain_tolerance {
            let (lo, hi) = undertone_dsp::locate::locator::GAIN_TOLERANCE_RANGE;
            check(p, "receiver.gain_tolerance", g, short(lo), short(hi))?;
        }
        let fs = r.sample_rate_hz;
        let sonde = |name: &str, s: &SondeSpec| -> Result<()> {
            check_tone(p, &format!("{name}.freq_hz"), s.freq_hz, fs)?;
            check(p, &format!("{name}.ppm"), s.ppm, -1000.0, 1000.0)?;
            check(p, &format!("{name}.moment_am2"), s.moment_am2, 1e-6, 100.0)?;
            check(p, &format!("{name}.depth_m"), s.depth_m, 0.05, 20.0)?;
            check(p, &format!("{name}.x_m"), s.x_m, -1000.0, 1000.0)?;
            check(p, &format!("{name}.y_m"), s.y_m, -1000.0, 1000.0)?;
            check(p, &format!("{name}.yaw_deg"), s.yaw_deg, -360.0, 360.0)?;
            check(p, &format!("{name}.pitch_deg"), s.pitch_deg, -80.0, 80.0)?;
            check(p, &format!("{name}.push_speed_m_s"), s.push_speed_m_s, 0.0, 2.0)
        };
        sonde("sonde", &self.sonde)?;
        for (i, s) in self.interferer.iter().enumerate() {
            sonde(&format!("interferer[{i}]"), s)?;
        }
        // The receiver's own limits (sample rate, beacon, bandwidth, readout rate, poles,
        // block length, coil height), from the DSP's settings.
        self.validate_receiver(p)?;
        if let Some(l) = &self.line {
            check_tone(p, "line.freq_hz", l.freq_hz, fs)?;
            check(p, "line.current_a", l.current_a, 1e-6, 100.0)?;
            check(p, "line.depth_m", l.depth_m, 0.05, 20.0)?;
            check(p, "line.yaw_deg", l.yaw_deg, -360.0, 360.0)?;
        }
        if let Some(m) = &self.mains {
            if m.grid_hz != 50.0 && m.grid_hz != 60.0 {
                return Err(SimError::value(p, "mains.grid_hz", m.grid_hz, "50 or 60"));
            }
            check(p, "mains.field_t", m.field_t, 0.0, 1e-3)?;
            check(p, "mains.harmonic_decay", m.harmonic_decay, 0.0, 1.0)?;
            let n = m.direction.iter().map(|v| v * v).sum::<f64>().sqrt();
            check(p, "mains.direction (length)", n, 1e-6, 1e6)?;
        }
        check(p, "noise.density_t_per_rthz", self.noise.density_t_per_rthz, 0.0, 1e-6)?;
        check(p, "noise.density_counts_per_rthz", self.noise.density_counts_per_rthz, 0.0, 1e9)?;
        if self.noise.dc_offset.len() > self.coils() {
            return Err(SimError::value(
                p,
                "noise.dc_offset",
                format!("{} values", self.noise.dc_offset.len()),
                format!("at most {}", self.coils()),
            ));
        }
        for (i, v) in self.noise.dc_offset.iter().enumerate() {
            check(p, &format!("noise.dc_offset[{i}]"), *v, -1.0, 1.0)?;
        }
        check(p, "soil.conductivity_s_per_m", self.soil.conductivity_s_per_m, 0.0, 10.0)?;
        if self.motion.is_empty() {
            return Err(SimError::value(p, "motion", "none", "at least one [[motion]] segment"));
        }
        for (i, m) in self.motion.iter().enumerate() {
            m.validate(p, i)?;
        }
        let dur = self.duration_s();
        check(p, "motion (total duration, s)", dur, 0.5, MAX_DURATION_S)?;
        Ok(())
    }
}

/// Longest run a scenario may ask for, s.
pub const MAX_DURATION_S: f64 = 3600.0;

impl MotionSpec {
    /// Check segment `i` of the scenario file `p`.
    pub fn validate(&self, p: &str, i: usize) -> Result<()> {
        let f = |k: &str| format!("motion[{i}].{k}");
        match self {
            MotionSpec::Walk { from, to, speed_m_s, heading_deg, wobble_deg } => {
                check(p, &f("speed_m_s"), *speed_m_s, 0.01, 5.0)?;
                for v in from.iter().chain(to.iter()) {
                    check(p, &f("from/to"), *v, -1000.0, 1000.0)?;
                }
                if from == to {
                    return Err(SimError::value(p, &f("to"), format!("{to:?}"), "a point different from 'from'"));
                }
                if let Some(h) = heading_deg {
                    check(p, &f("heading_deg"), *h, -360.0, 360.0)?;
                }
                check(p, &f("wobble_deg"), *wobble_deg, 0.0, 45.0)
            }
            MotionSpec::Circle { centre, radius_m, speed_m_s, turns } => {
                check(p, &f("radius_m"), *radius_m, 0.1, 100.0)?;
                check(p, &f("speed_m_s"), *speed_m_s, 0.01, 5.0)?;
                check(p, &f("turns"), *turns, 0.05, 10.0)?;
                for v in centre {
                    check(p, &f("centre"), *v, -1000.0, 1000.0)?;
                }
                Ok(())
            }
            MotionSpec::Raster { from, to, spacing_m, speed_m_s } => {
                check(p, &f("spacing_m"), *spacing_m, 0.05, 10.0)?;
                check(p, &f("speed_m_s"), *speed_m_s, 0.01, 5.0)?;
                for v in from.iter().chain(to.iter()) {
                    check(p, &f("from/to"), *v, -1000.0, 1000.0)?;
                }
                if from[0] >= to[0] || from[1] >= to[1] {
                    return Err(SimError::value(p, &f("to"), format!("{to:?}"), "east and north of 'from'"));
                }
                Ok(())
            }
            MotionSpec::Still { at, heading_deg, duration_s } => {
                check(p, &f("duration_s"), *duration_s, 0.1, MAX_DURATION_S)?;
                check(p, &f("heading_deg"), *heading_deg, -360.0, 360.0)?;
                for v in at {
                    check(p, &f("at"), *v, -1000.0, 1000.0)?;
                }
                Ok(())
            }
        }
    }
}

/// Where a parse error sits: the line number and the line itself (which names the key).
fn span_note(text: &str, span: Option<std::ops::Range<usize>>) -> String {
    match span {
        Some(r) => {
            let at = r.start.min(text.len());
            let line = text.get(..at).unwrap_or_default().matches('\n').count() + 1;
            let src = text.lines().nth(line - 1).map(str::trim).unwrap_or_default();
            if src.is_empty() || src.len() > 80 {
                format!(" (line {line})")
            } else {
                format!(" (line {line}: {src})")
            }
        }
        None => String::new(),
    }
}
