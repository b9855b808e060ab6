//! `replay`: run the receiver on a recording, print the timeline and the
//! summary of what it read (the same summary a simulated walk prints from its
//! readouts), and plot strength and depth against time.
//!
//! A recording carries converter codes only: strength is in dB re the
//! converter's full scale, and there is no truth to compare with.

use crate::error::{Result, SimError};
use crate::headfile::HeadFile;
use crate::output::folder;
use crate::plots::VLine;
use crate::report::{legend, mains_line, print_summary, summarise_rows, timeline, CAUTIONS};
use crate::run::{replay_codes, replay_floats, Reference, SimRun};
use crate::walk::{plots, Section, ShowOptions};
use crate::wav::{read, Samples};
use std::io::Write;
use std::path::{Path, PathBuf};
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
    /// Height of the lower coil centre above the ground, m (default: the locator's).
    pub coil_height_m: Option<f64>,
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

/// Replay a WAV file into readout rows (with the detector's figures).
/// A recording too short to give one readout is an error.
pub fn replay(path: &Path, opt: &ReplayOptions) -> Result<SimRun> {
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
    let run = dispatch!(coils, run_n(&rec, head_file.as_ref(), opt, path))?;
    if run.rows.is_empty() {
        let secs = run.samples as f64 / rec.sample_rate_hz;
        return Err(SimError::Wav {
            path: path.to_path_buf(),
            msg: format!(
                "too short: {} frames ({secs:.3} s) give no readout; the receiver needs at least {:.3} s ({} frames) at {} Hz",
                run.samples,
                run.info.readout_interval_s,
                (run.info.readout_interval_s as f64 * rec.sample_rate_hz).ceil(),
                rec.sample_rate_hz
            ),
        });
    }
    Ok(run)
}

fn run_n<const N: usize>(
    rec: &crate::wav::Recording,
    head: Option<&(HeadFile, String)>,
    opt: &ReplayOptions,
    path: &Path,
) -> Result<SimRun> {
    let head: Head<N> = match head {
        Some((h, p)) => h.to_head::<N>(p)?,
        None => default_head::<N>()?,
    };
    let fs = rec.sample_rate_hz as f32;
    let mut det = DetectorSettings::new(fs, Beacon::from_hz(opt.freq_hz as f32));
    if let Some(b) = opt.bandwidth_hz {
        det.bandwidth_hz = b as f32;
    }
    let ctx = format!("{} at {} Hz", path.display(), crate::units::num(opt.freq_hz));
    let frames = rec.frames();
    let mut bar = crate::progress::Progress::new(frames as u64, "frames");
    let mut n = 0u64;
    let mut tick = move || {
        n += 1;
        if n.is_multiple_of(65_536) {
            bar.set(n);
        }
    };
    let settings = |input: InputScale<N>| {
        let mut s = ReceiverSettings::new(det, input, head);
        if let Some(h) = opt.coil_height_m {
            s.locator.coil_height_m = h as f32;
        }
        s
    };
    match &rec.data {
        Samples::Codes(v, fsc) => {
            let mut input = InputScale::<N>::unity(24);
            input.full_scale_code = *fsc;
            input.scale = [1.0 / *fsc as f32; N];
            let frames = v.chunks_exact(N).map(|c| {
                tick();
                let mut f = [0i32; N];
                f.copy_from_slice(c);
                f
            });
            replay_codes(settings(input), frames).map_err(|e| relabel(e, &ctx))
        }
        Samples::Floats(v) => {
            let frames = v.chunks_exact(N).map(|c| {
                tick();
                let mut f = [0f32; N];
                f.copy_from_slice(c);
                f
            });
            replay_floats(settings(InputScale::<N>::unity(24)), frames).map_err(|e| relabel(e, &ctx))
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

/// `replay`: the readouts as JSON lines and a summary object, or the report and the plots.
pub fn command(file: &Path, opt: &ReplayOptions, out_dir: &Path, show: ShowOptions, out: &mut dyn Write) -> Result<Vec<PathBuf>> {
    if !show.json {
        folder(out_dir)?;
    }
    let run = replay(file, opt)?;
    let summary = summarise_rows(&run);
    if show.json {
        crate::report::json_lines(out, &run.rows, &summary)?;
        return Ok(Vec::new());
    }
    let io = |e: std::io::Error| SimError::io(Path::new("<stdout>"), "write", e);
    let info = run.info;
    writeln!(out, "Undertone replay: {}", file.display()).map_err(io)?;
    writeln!(
        out,
        "beacon {:.2} Hz, fs {:.0} Hz, bandwidth {:.2} Hz, 99 % settling {:.2} s, {:.1} readouts/s, {:.1} s of recording",
        info.tone_hz,
        info.sample_rate_hz,
        info.bandwidth_hz,
        info.settle_99_s,
        1.0 / info.readout_interval_s,
        run.samples as f64 / info.sample_rate_hz as f64
    )
    .map_err(io)?;
    writeln!(out, "{}", mains_line(&run.mains, None)).map_err(io)?;
    writeln!(out).map_err(io)?;
    legend(out, Reference::FullScale).map_err(io)?;
    timeline(out, &run.rows, 0.5, show.units).map_err(io)?;
    print_summary(out, &summary, show.units).map_err(io)?;
    let mut vlines = Vec::new();
    if let Some(p) = &summary.peak {
        vlines.push(VLine { name: "strongest reading".into(), x: p.t_s, color: plotters::style::RGBColor(230, 120, 0), dashed: true });
    }
    for n in &summary.nulls {
        vlines.push(VLine { name: "nulls found".into(), x: n.t_s, color: plotters::style::RGBColor(120, 120, 120), dashed: true });
    }
    let section = Section {
        title: "the whole recording".into(),
        x_label: "time (s)".into(),
        x: run.rows.iter().map(|r| (r.t_s > summary.settle_s).then_some(r.t_s)).collect(),
        vlines,
        null_span: None,
    };
    let name = file.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_default();
    let paths = plots(out_dir, &name, &run, &summary, &[section], show.units)?;
    writeln!(out, "\nplots:").map_err(io)?;
    for p in &paths {
        writeln!(out, "  {}", p.display()).map_err(io)?;
    }
    writeln!(out, "\n{CAUTIONS}").map_err(io)?;
    Ok(paths)
}
