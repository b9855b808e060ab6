//! The settings protocol: one text command per line, one reply per line.
//!
//! Lines arrive on the RTT down channel (any byte stream). [`LineBuffer`]
//! collects bytes into lines of at most [`MAX_LINE`] characters without
//! allocating; [`parse`] turns a line into a [`Command`] or an error that says
//! what was wrong. Command words (our own):
//!
//! | line | effect |
//! |---|---|
//! | `freq 512` / `freq 640` / `freq 8192` / `freq 32768` / `freq <Hz>` | beacon frequency |
//! | `band <Hz>` / `band auto` | detection bandwidth (auto: the preset's default) |
//! | `detector lockin <1-4>` / `detector block rect\|hann\|bh4` | detector kind |
//! | `rate <Hz>` | readouts per second |
//! | `units metric` / `units imperial` | display units (screen, replies, log) |
//! | `height <m>` | height of the lower coil centre above the ground |
//! | `distance <m>` | sonde distance for the calibration and the pre-job check |
//! | `coil <i> pos <x> <y> <z>` / `coil <i> axis <x> <y> <z>` / `coil <i> gain <g>` | head geometry |
//! | `cal upper <factor>` / `cal strength <K> [<sigma>]` / `cal clear` / `cal run` | calibration (`run`: measure it now) |
//! | `check` | the pre-job check (sonde at the set distance below the head) |
//! | `scan` | look for beacon tones on the lower along coil |
//! | `save` / `show` / `defaults` / `help` | store, print, restore factory settings, list commands |
//!
//! Replies: `ok …` or `err …`. An out-of-range value is refused and the old
//! setting stays in force.

use heapless::String;

/// Longest accepted line, characters.
pub const MAX_LINE: usize = 96;

/// A parsed command.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Command {
    /// Beacon frequency, Hz.
    Freq(f32),
    /// Bandwidth, Hz (None: automatic).
    Band(Option<f32>),
    /// Lock-in with n poles.
    LockIn(u8),
    /// Block detector with window 0 rect, 1 Hann, 2 Blackman–Harris.
    Block(u8),
    /// Readout rate, Hz.
    Rate(f32),
    /// Imperial units (true) or metric.
    Imperial(bool),
    /// Coil position.
    CoilPos(u8, [f32; 3]),
    /// Coil axis.
    CoilAxis(u8, [f32; 3]),
    /// Coil gain.
    CoilGain(u8, f32),
    /// Upper-coil gain correction.
    CalUpper(f32),
    /// Calibrated strength K and its σ.
    CalStrength(f32, f32),
    /// Forget the calibration.
    CalClear,
    /// Measure the calibration now.
    CalRun,
    /// Coil height above the ground, m.
    Height(f32),
    /// Calibration and check distance, m.
    Distance(f32),
    /// Run the pre-job check.
    Check,
    /// Scan for beacon tones.
    Scan,
    /// Store settings.
    Save,
    /// Print settings.
    Show,
    /// Factory settings.
    Defaults,
    /// List commands.
    Help,
}

/// Why a line was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ParseError<'a> {
    /// Nothing on the line.
    Empty,
    /// The first word is not a command.
    Unknown(&'a str),
    /// A word is missing.
    Missing(&'static str),
    /// A word is not a number.
    NotANumber(&'a str),
    /// A word is not one of the allowed ones.
    BadWord {
        /// What was given.
        given: &'a str,
        /// What is allowed.
        allowed: &'static str,
    },
    /// More words than the command takes.
    Extra(&'a str),
}

impl core::fmt::Display for ParseError<'_> {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            ParseError::Empty => write!(f, "empty line"),
            ParseError::Unknown(w) => write!(f, "unknown command '{w}' (try 'help')"),
            ParseError::Missing(what) => write!(f, "missing {what}"),
            ParseError::NotANumber(w) => write!(f, "'{w}' is not a number"),
            ParseError::BadWord { given, allowed } => write!(f, "'{given}' is not one of {allowed}"),
            ParseError::Extra(w) => write!(f, "unexpected '{w}'"),
        }
    }
}

fn num<'a>(w: Option<&'a str>, what: &'static str) -> Result<f32, ParseError<'a>> {
    let w = w.ok_or(ParseError::Missing(what))?;
    match crate::num::parse_f32(w) {
        Some(v) if v.is_finite() => Ok(v),
        _ => Err(ParseError::NotANumber(w)),
    }
}

fn index<'a>(w: Option<&'a str>) -> Result<u8, ParseError<'a>> {
    let w = w.ok_or(ParseError::Missing("coil number"))?;
    w.parse::<u8>().map_err(|_| ParseError::NotANumber(w))
}

/// Parse one line.
pub fn parse(line: &str) -> Result<Command, ParseError<'_>> {
    let mut w = line.split_ascii_whitespace();
    let head = w.next().ok_or(ParseError::Empty)?;
    let cmd = match head {
        "freq" => Command::Freq(num(w.next(), "frequency in Hz")?),
        "band" => match w.next() {
            Some("auto") => Command::Band(None),
            other => Command::Band(Some(num(other, "bandwidth in Hz or 'auto'")?)),
        },
        "detector" => match w.next() {
            Some("lockin") => {
                let p = w.next().ok_or(ParseError::Missing("number of poles"))?;
                Command::LockIn(p.parse::<u8>().map_err(|_| ParseError::NotANumber(p))?)
            }
            Some("block") => match w.next() {
                Some("rect") => Command::Block(0),
                Some("hann") => Command::Block(1),
                Some("bh4") => Command::Block(2),
                Some(o) => return Err(ParseError::BadWord { given: o, allowed: "rect, hann, bh4" }),
                None => return Err(ParseError::Missing("window (rect, hann, bh4)")),
            },
            Some(o) => return Err(ParseError::BadWord { given: o, allowed: "lockin, block" }),
            None => return Err(ParseError::Missing("detector kind (lockin, block)")),
        },
        "rate" => Command::Rate(num(w.next(), "readout rate in Hz")?),
        "units" => match w.next() {
            Some("metric") => Command::Imperial(false),
            Some("imperial") => Command::Imperial(true),
            Some(o) => return Err(ParseError::BadWord { given: o, allowed: "metric, imperial" }),
            None => return Err(ParseError::Missing("units (metric, imperial)")),
        },
        "coil" => {
            let i = index(w.next())?;
            match w.next() {
                Some("pos") => Command::CoilPos(i, [num(w.next(), "x in m")?, num(w.next(), "y in m")?, num(w.next(), "z in m")?]),
                Some("axis") => Command::CoilAxis(i, [num(w.next(), "axis x")?, num(w.next(), "axis y")?, num(w.next(), "axis z")?]),
                Some("gain") => Command::CoilGain(i, num(w.next(), "gain")?),
                Some(o) => return Err(ParseError::BadWord { given: o, allowed: "pos, axis, gain" }),
                None => return Err(ParseError::Missing("pos, axis or gain")),
            }
        }
        "cal" => match w.next() {
            Some("upper") => Command::CalUpper(num(w.next(), "upper-coil factor")?),
            Some("strength") => {
                let k = num(w.next(), "strength K")?;
                let s = match w.next() {
                    Some(x) => crate::num::parse_f32(x).filter(|v| v.is_finite()).ok_or(ParseError::NotANumber(x))?,
                    None => 0.0,
                };
                Command::CalStrength(k, s)
            }
            Some("clear") => Command::CalClear,
            Some("run") => Command::CalRun,
            Some(o) => return Err(ParseError::BadWord { given: o, allowed: "upper, strength, clear, run" }),
            None => return Err(ParseError::Missing("upper, strength, clear or run")),
        },
        "height" => Command::Height(num(w.next(), "height in m")?),
        "distance" => Command::Distance(num(w.next(), "distance in m")?),
        "check" => Command::Check,
        "scan" => Command::Scan,
        "save" => Command::Save,
        "show" => Command::Show,
        "defaults" => Command::Defaults,
        "help" => Command::Help,
        other => return Err(ParseError::Unknown(other)),
    };
    match w.next() {
        Some(extra) => Err(ParseError::Extra(extra)),
        None => Ok(cmd),
    }
}

/// What a byte completed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum LineEvent {
    /// Nothing yet.
    None,
    /// A complete line.
    Line(String<MAX_LINE>),
    /// A line longer than [`MAX_LINE`] was dropped.
    TooLong,
    /// A line that is not valid text was dropped.
    NotText,
}

/// Collects bytes into lines without allocating.
#[derive(Clone, Debug, Default)]
pub struct LineBuffer {
    buf: heapless::Vec<u8, MAX_LINE>,
    overflow: bool,
}

impl LineBuffer {
    /// Empty.
    pub fn new() -> Self {
        Self::default()
    }

    /// Feed one byte.
    pub fn push(&mut self, b: u8) -> LineEvent {
        if b == b'\n' || b == b'\r' {
            let over = core::mem::replace(&mut self.overflow, false);
            let bytes = core::mem::take(&mut self.buf);
            if over {
                return LineEvent::TooLong;
            }
            if bytes.is_empty() {
                return LineEvent::None;
            }
            return match core::str::from_utf8(&bytes) {
                Ok(s) => {
                    let mut out = String::new();
                    let _ = out.push_str(s);
                    LineEvent::Line(out)
                }
                Err(_) => LineEvent::NotText,
            };
        }
        if self.buf.push(b).is_err() {
            self.overflow = true;
        }
        LineEvent::None
    }
}
