//! Errors of the simulator and the command line: one clear line each, naming
//! the field or file at fault and what is allowed.

use std::fmt;
use std::path::{Path, PathBuf};

/// Everything that can go wrong in the simulator.
#[derive(Debug)]
pub enum SimError {
    /// A file could not be read or written.
    Io {
        /// The file.
        path: PathBuf,
        /// What was being done ("read scenario", "write", …).
        what: &'static str,
        /// The operating system's error.
        err: std::io::Error,
    },
    /// A scenario or head file is not valid TOML or has unknown keys.
    Parse {
        /// The file (or "built-in demo").
        path: String,
        /// The parser's message, with the line.
        msg: String,
    },
    /// A value is outside its allowed range.
    Value {
        /// The file.
        path: String,
        /// The field's path in the file, e.g. `receiver.sample_rate_hz`.
        field: String,
        /// The value given.
        value: String,
        /// What is allowed.
        allowed: String,
    },
    /// A WAV file the replay cannot use.
    Wav {
        /// The recording.
        path: PathBuf,
        /// What is wrong with it.
        msg: String,
    },
    /// Settings the receiver refuses.
    Config {
        /// Where the settings came from.
        context: String,
        /// The setting refused and its allowed range.
        err: undertone_dsp::ConfigError,
    },
    /// Bad command-line value.
    Arg {
        /// The option, e.g. `--trials`.
        name: String,
        /// What is wrong and what is allowed.
        msg: String,
    },
}

impl SimError {
    /// A value out of range.
    pub fn value(path: &str, field: &str, value: impl fmt::Display, allowed: impl fmt::Display) -> Self {
        SimError::Value { path: path.to_string(), field: field.to_string(), value: value.to_string(), allowed: allowed.to_string() }
    }

    /// An I/O error on a file.
    pub fn io(path: &Path, what: &'static str, err: std::io::Error) -> Self {
        SimError::Io { path: path.to_path_buf(), what, err }
    }
}

impl fmt::Display for SimError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SimError::Io { path, what, err } => write!(f, "{}: cannot {}: {}", path.display(), what, err),
            SimError::Parse { path, msg } => write!(f, "{}: {}", path, msg.replace('\n', " ").trim()),
            SimError::Value { path, field, value, allowed } => write!(f, "{path}: {field} = {value} is not allowed (allowed: {allowed})"),
            SimError::Wav { path, msg } => write!(f, "{}: {}", path.display(), msg),
            SimError::Config { context, err } => write!(f, "{context}: {}", refused(err)),
            SimError::Arg { name, msg } => write!(f, "{name}: {msg}"),
        }
    }
}

impl std::error::Error for SimError {}

/// What a setting the receiver refused allows, with its unit, the numbers
/// written as people read them (the DSP's own message prints every digit of
/// an `f32`). The beacon frequency must lie below its upper limit, not on it.
pub fn allowed(e: &undertone_dsp::ConfigError) -> String {
    use crate::units::num;
    use undertone_dsp::detect::settings::{MAX_FREQ_FRACTION, MIN_FREQ_BANDWIDTHS};
    use undertone_dsp::Param;
    let u = e.param.unit();
    let sp = if u.is_empty() { "" } else { " " };
    let (lo, hi) = (e.min as f64, e.max as f64);
    match e.param {
        Param::BeaconFrequency => format!(
            "{} Hz ({MIN_FREQ_BANDWIDTHS} × the {} Hz detection bandwidth) to below {} Hz ({MAX_FREQ_FRACTION} × the sample rate)",
            num(lo),
            num(lo / MIN_FREQ_BANDWIDTHS as f64),
            num(hi)
        ),
        Param::ChannelScale => "a finite value other than 0".into(),
        _ if hi >= f32::MAX as f64 => format!("{}{sp}{u} or more", num(lo)),
        _ => format!("{}{sp}{u} to {}{sp}{u}", num(lo), num(hi)),
    }
}

/// One line for a setting the receiver refused: what, the value, what is allowed.
pub fn refused(e: &undertone_dsp::ConfigError) -> String {
    let u = e.param.unit();
    let sp = if u.is_empty() { "" } else { " " };
    let coil = e.param.coil().map(|i| format!("coil {i} ")).unwrap_or_default();
    format!("{coil}{} {}{sp}{u} is not allowed (allowed: {})", e.param.name(), crate::units::num(e.value as f64), allowed(e))
}

/// Result with [`SimError`].
pub type Result<T> = std::result::Result<T, SimError>;
