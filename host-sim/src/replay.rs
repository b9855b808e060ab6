//! `replay`: run the receiver on a recording.

use crate::error::{Result, SimError};
use crate::headfile::HeadFile;
use crate::report::{timeline, CAUTIONS};
use crate::run::{replay_codes, replay_floats, Row};
use crate::wav::{read, Samples};
use std::io::Write;
use std::path::Path;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::{Beacon, DetectorSettings, Head, ReceiverSettings};

/// Options of a replay.
pub struct ReplayOptions<'a> {
    /// Beacon frequency, Hz.
    pub freq_hz: f64,
    /// Head file (default: the 4-coil reference head).
    pub head: Option<&'a Path>,
    /// Detection bandwidth override, Hz.
    pub bandwidth_hz: Option<f64>,
}

macro_rules! dispatch {
    ($n:expr, $f:ident ( $($a:expr),* )) => {
        match $n {
            1 => $f::<1>($($a),*),
            2 => $f::<2>($($a),*),
            3 => $f::<3>($($a),*),
            4 => $f::<4>($($a),*),
            5 => $f::<5>($($a),*),
            6 => $f::<6>($($a),*),
            7 => $f::<7>($($a),*),
            _ => $f::<8>($($a),*),
        }
    };
}

/// Replay a WAV file into readout rows.
pub fn replay(path: &Path, opt: &ReplayOptions) -> Result<Vec<Row>> {
    let rec = read(path)?;
    let head_file = match opt.head {
        Some(h) => Some((HeadFile::load(h)?, h.display().to_string())),
        None => None,
    };
    let coils = head_file.as_ref().map(|h| h.0.coil.len()).unwrap_or(4);
    if rec.channels != coils {
        let what = if opt.head.is_some() { "the head file" } else { "the 4-coil reference head (give --head for another)" };
        return Err(SimError::Wav {
            path: path.to_path_buf(),
            msg: format!("has {} channels but {} has {} coils", rec.channels, what, coils),
        });
    }
    dispatch!(coils, run_n(&rec, head_file.as_ref(), opt, path))
}

fn run_n<const N: usize>(
    rec: &crate::wav::Recording,
    head: Option<&(HeadFile, String)>,
    opt: &ReplayOptions,
    path: &Path,
) -> Result<Vec<Row>> {
    let head: Head<N> = match head {
        Some((h, p)) => h.to_head::<N>(p)?,
        None => default_head::<N>()?,
    };
    let fs = rec.sample_rate_hz as f32;
    let mut det = DetectorSettings::new(fs, Beacon::from_hz(opt.freq_hz as f32));
    if let Some(b) = opt.bandwidth_hz {
        det.bandwidth_hz = b as f32;
    }
    let ctx = format!("{} at {} Hz", path.display(), opt.freq_hz);
    match &rec.data {
        Samples::Codes(v, fsc) => {
            let mut input = InputScale::<N>::unity(24);
            input.full_scale_code = *fsc;
            input.scale = [1.0 / *fsc as f32; N];
            let s = ReceiverSettings::new(det, input, head);
            let frames = v.chunks_exact(N).map(|c| {
                let mut f = [0i32; N];
                f.copy_from_slice(c);
                f
            });
            replay_codes(s, frames).map_err(|e| relabel(e, &ctx))
        }
        Samples::Floats(v) => {
            let input = InputScale::<N>::unity(24);
            let s = ReceiverSettings::new(det, input, head);
            let frames = v.chunks_exact(N).map(|c| {
                let mut f = [0f32; N];
                f.copy_from_slice(c);
                f
            });
            replay_floats(s, frames).map_err(|e| relabel(e, &ctx))
        }
    }
}

fn relabel(e: SimError, ctx: &str) -> SimError {
    match e {
        SimError::Config { err, .. } => SimError::Config { context: ctx.to_string(), err },
        e => e,
    }
}

fn default_head<const N: usize>() -> Result<Head<N>> {
    let r = Head::reference4();
    if N != 4 {
        return Err(SimError::Arg { name: "--head".into(), msg: format!("a {N}-channel recording needs a head file") });
    }
    let mut coils = [r.coils[0]; N];
    coils.copy_from_slice(&r.coils[..N]);
    Ok(Head { coils, roles: r.roles })
}

/// Print rows as JSON lines or as a table with the cautions.
pub fn print(out: &mut dyn Write, rows: &[Row], json: bool) -> Result<()> {
    let io = |e: std::io::Error| SimError::io(Path::new("<stdout>"), "write", e);
    if json {
        return crate::report::json_lines(out, rows);
    }
    timeline(out, rows, 0.5).map_err(io)?;
    writeln!(out, "\n{CAUTIONS}").map_err(io)?;
    Ok(())
}
