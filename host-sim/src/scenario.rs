//! Scenario files: what is buried, what interferes, the receiver, and how it moves.
//!
//! TOML read with serde (`deny_unknown_fields`). Every value is validated with
//! an error naming the field's path, the value and the allowed range. Lengths in
//! metres, angles in degrees (converted to radians at the edge), fields in tesla,
//! moments in A·m², frequencies in Hz.
//!
//! Coordinates: ground frame x east, y north, z up, ground surface at z = 0.
//! Depths are positive numbers below the surface.

use crate::error::{Result, SimError};
use serde::{Deserialize, Serialize};
use std::path::Path;

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
}

fn one() -> u64 {
    1
}

/// Receiver hardware.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ReceiverSpec {
    /// "reference4" or "triads6".
    #[serde(default = "default_head")]
    pub head: String,
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
}

fn default_head() -> String {
    "reference4".into()
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
    /// "lockin" or "block".
    #[serde(default = "default_kind")]
    pub kind: String,
    /// Lock-in poles.
    #[serde(default = "default_poles")]
    pub poles: u8,
    /// Block window: "rectangular", "hann", "blackman-harris".
    #[serde(default = "default_window")]
    pub window: String,
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
            kind: default_kind(),
            poles: default_poles(),
            window: default_window(),
            bandwidth_hz: None,
            readout_hz: default_rate(),
        }
    }
}

fn default_kind() -> String {
    "lockin".into()
}
fn default_poles() -> u8 {
    4
}
fn default_window() -> String {
    "blackman-harris".into()
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

/// One segment of receiver motion.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields, tag = "kind", rename_all = "lowercase")]
pub enum MotionSpec {
    /// Straight walk.
    Walk {
        /// Start east, m.
        from: [f64; 2],
        /// End, m.
        to: [f64; 2],
        /// Speed, m/s.
        speed_m_s: f64,
        /// Handle heading, degrees from east (default: the walking direction).
        heading_deg: Option<f64>,
        /// Heading wobble amplitude, degrees.
        #[serde(default)]
        wobble_deg: f64,
    },
    /// A circle around a point, closing in from a distance.
    Circle {
        /// Centre, m.
        centre: [f64; 2],
        /// Radius, m.
        radius_m: f64,
        /// Speed, m/s.
        speed_m_s: f64,
        /// Turns.
        #[serde(default = "one_f")]
        turns: f64,
    },
    /// Back-and-forth lines over a rectangle.
    Raster {
        /// Lower-left corner, m.
        from: [f64; 2],
        /// Upper-right corner, m.
        to: [f64; 2],
        /// Line spacing, m.
        spacing_m: f64,
        /// Speed, m/s.
        speed_m_s: f64,
    },
    /// Standing still.
    Still {
        /// Position, m.
        at: [f64; 2],
        /// Handle heading, degrees from east.
        #[serde(default)]
        heading_deg: f64,
        /// Duration, s.
        duration_s: f64,
    },
}

fn one_f() -> f64 {
    1.0
}

fn check(path: &str, field: &str, v: f64, lo: f64, hi: f64) -> Result<()> {
    if v.is_finite() && v >= lo && v <= hi {
        Ok(())
    } else {
        Err(SimError::value(path, field, v, format!("{lo} to {hi}")))
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
        if self.receiver.head == "triads6" {
            6
        } else {
            4
        }
    }

    /// Total duration of the motion, s.
    pub fn duration_s(&self) -> f64 {
        self.motion.iter().map(crate::motion::segment_duration).sum()
    }

    /// Check every value.
    pub fn validate(&self, p: &str) -> Result<()> {
        let r = &self.receiver;
        if r.head != "reference4" && r.head != "triads6" {
            return Err(SimError::value(p, "receiver.head", format!("\"{}\"", r.head), "\"reference4\" or \"triads6\""));
        }
        check(p, "receiver.sample_rate_hz", r.sample_rate_hz, 4_000.0, 250_000.0)?;
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
        check(p, "receiver.height_m", r.height_m, 0.0, 2.0)?;
        check(p, "receiver.assume_conductivity_s_per_m", r.assume_conductivity_s_per_m, 0.0, 10.0)?;
        let d = &self.detector;
        let fs = r.sample_rate_hz;
        if let Some(f) = d.freq_hz {
            check(p, "detector.freq_hz", f, 10.0, 0.45 * fs)?;
        }
        if d.kind != "lockin" && d.kind != "block" {
            return Err(SimError::value(p, "detector.kind", format!("\"{}\"", d.kind), "\"lockin\" or \"block\""));
        }
        check(p, "detector.poles", d.poles as f64, 1.0, 4.0)?;
        if !["rectangular", "hann", "blackman-harris"].contains(&d.window.as_str()) {
            return Err(SimError::value(
                p,
                "detector.window",
                format!("\"{}\"", d.window),
                "\"rectangular\", \"hann\" or \"blackman-harris\"",
            ));
        }
        if let Some(b) = d.bandwidth_hz {
            check(p, "detector.bandwidth_hz", b, 0.05, 50.0)?;
        }
        check(p, "detector.readout_hz", d.readout_hz, 10.0, 100.0)?;
        let sonde = |name: &str, s: &SondeSpec| -> Result<()> {
            check(p, &format!("{name}.freq_hz"), s.freq_hz, 10.0, 0.45 * fs)?;
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
        if let Some(l) = &self.line {
            check(p, "line.freq_hz", l.freq_hz, 10.0, 0.45 * fs)?;
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
            let f = |k: &str| format!("motion[{i}].{k}");
            match m {
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
                    check(p, &f("wobble_deg"), *wobble_deg, 0.0, 45.0)?;
                }
                MotionSpec::Circle { centre, radius_m, speed_m_s, turns } => {
                    check(p, &f("radius_m"), *radius_m, 0.1, 100.0)?;
                    check(p, &f("speed_m_s"), *speed_m_s, 0.01, 5.0)?;
                    check(p, &f("turns"), *turns, 0.05, 10.0)?;
                    for v in centre {
                        check(p, &f("centre"), *v, -1000.0, 1000.0)?;
                    }
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
                }
                MotionSpec::Still { at, heading_deg, duration_s } => {
                    check(p, &f("duration_s"), *duration_s, 0.1, 3600.0)?;
                    check(p, &f("heading_deg"), *heading_deg, -360.0, 360.0)?;
                    for v in at {
                        check(p, &f("at"), *v, -1000.0, 1000.0)?;
                    }
                }
            }
        }
        let dur = self.duration_s();
        check(p, "motion (total duration, s)", dur, 0.5, 3600.0)?;
        Ok(())
    }
}

fn span_note(text: &str, span: Option<std::ops::Range<usize>>) -> String {
    match span {
        Some(r) => {
            let line = text[..r.start.min(text.len())].matches('\n').count() + 1;
            format!(" (line {line})")
        }
        None => String::new(),
    }
}
