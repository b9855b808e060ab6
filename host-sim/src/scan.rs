//! `scan`: the tones in a recording, strongest first, so an unknown beacon
//! can be found (and a preset confirmed) before a replay.
//!
//! Each channel goes through the receiver's own frequency scan
//! ([`undertone_dsp::detect::scan::scan`]: a Hann-windowed Goertzel sweep,
//! then a Blackman–Harris refinement over the whole stretch scanned). The
//! scan ranks its candidates against the mean power of its coarse sweep,
//! which strong mains harmonics inflate; so each tone found is given an SNR
//! of its own here, against the noise beside it: the power of the same
//! Blackman–Harris windowed DTFT at the tone over the mean noise power,
//! taken as the median power at 20 frequencies 3 to 12 window resolutions
//! (`4/T`, T the stretch scanned) either side of it divided by ln 2 (the
//! median of an exponentially distributed power is ln 2 times its mean), so
//! a neighbouring harmonic or two do not raise the floor. A tone is reported
//! when that SNR reaches the receiver's own "signal present" threshold
//! ([`undertone_dsp::LocatorSettings`]' `signal_snr_db`). Tones within `4/T`
//! of each other on several channels are one tone, reported once with the
//! channel that hears it best.
//!
//! Each tone is named when it sits on a mains harmonic (of 50 or 60 Hz, within
//! the resolution) or near one of the usual beacon presets.

use crate::error::{Result, SimError};
use crate::wav::read;
use serde::Serialize;
use std::io::Write;
use std::path::Path;
use undertone_dsp::detect::scan::{scan as dsp_scan, windowed_power, ScanSettings};
use undertone_dsp::{Beacon, LocatorSettings, Window};

/// One tone found.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FoundTone {
    /// Frequency, Hz.
    pub freq_hz: f64,
    /// Power over the noise beside it, dB.
    pub snr_db: f64,
    /// Amplitude, dB re the converter's full scale.
    pub level_dbfs: f64,
    /// Channel (0-based) that hears it best.
    pub channel: usize,
    /// What it likely is (a mains harmonic, near a beacon preset), or empty.
    pub note: String,
}

/// What to scan.
#[derive(Clone, Copy, Debug)]
pub struct ScanOptions {
    /// Start of the stretch scanned, s from the start of the recording.
    pub start_s: f64,
    /// Length of the stretch scanned, s (to the end of the recording at most).
    pub seconds: f64,
}

/// Frequencies either side of a tone at which the noise is measured, in window resolutions (4/T).
const NOISE_OFFSETS: std::ops::RangeInclusive<i32> = 3..=12;

/// The SNR of a tone at `f` in `x`: its windowed power over the noise beside it.
fn snr_db(x: &[f32], fs: f32, f: f32, res_hz: f32) -> f64 {
    let w = Window::BlackmanHarris4;
    let p = windowed_power(x, fs, f, w) as f64;
    let mut noise: Vec<f64> = NOISE_OFFSETS
        .flat_map(|k| [-k, k])
        .map(|k| f + k as f32 * res_hz)
        .filter(|&g| g > 0.0 && g < fs / 2.0)
        .map(|g| windowed_power(x, fs, g, w) as f64)
        .collect();
    let floor = crate::stats::median(&mut noise).unwrap_or(0.0) / std::f64::consts::LN_2;
    10.0 * (p / floor.max(f64::MIN_POSITIVE)).log10()
}

/// What a tone at `f` likely is.
fn note(f: f64, res_hz: f64) -> String {
    for grid in [50.0, 60.0] {
        let n = (f / grid).round();
        if n >= 1.0 && (f - n * grid).abs() <= res_hz.max(0.2) {
            return format!("mains: {n:.0} × {grid:.0} Hz");
        }
    }
    for b in [Beacon::Hz512, Beacon::Hz640, Beacon::Hz8192, Beacon::Hz32768] {
        let p = b.freq_hz() as f64;
        if (f - p).abs() <= 0.01 * p {
            return format!("near the {p:.0} Hz beacon preset ({:+.2} Hz)", f - p);
        }
    }
    String::new()
}

/// Scan every channel of the recording at `path`.
pub fn scan(path: &Path, opt: ScanOptions) -> Result<Vec<FoundTone>> {
    let rec = read(path)?;
    let fs = rec.sample_rate_hz;
    let from = (opt.start_s * fs).round().max(0.0) as usize;
    let to = from.saturating_add((opt.seconds * fs).round() as usize).min(rec.frames());
    let settings = ScanSettings::new(fs as f32);
    let min_snr_db = LocatorSettings::default().signal_snr_db as f64;
    let mut found: Vec<FoundTone> = Vec::new();
    let mut progress = crate::progress::Progress::new(rec.channels as u64, "channels");
    for c in 0..rec.channels {
        let x = rec.channel(c, from, to);
        let tones = dsp_scan(&x, &settings).map_err(|e| match e.param {
            undertone_dsp::Param::RecordLength => SimError::Wav {
                path: path.to_path_buf(),
                msg: format!(
                    "too short to scan: {} frames ({:.3} s) from {} s; at least {} frames ({:.3} s) needed",
                    x.len(),
                    x.len() as f64 / fs,
                    crate::units::num(opt.start_s),
                    e.min,
                    e.min as f64 / fs
                ),
            },
            _ => SimError::Config { context: path.display().to_string(), err: e },
        })?;
        let res_hz = 4.0 * fs as f32 / x.len().max(1) as f32;
        for t in tones.iter() {
            let snr = snr_db(&x, fs as f32, t.freq_hz, res_hz);
            if !(snr >= min_snr_db) {
                continue;
            }
            let tone = FoundTone {
                freq_hz: t.freq_hz as f64,
                snr_db: snr,
                level_dbfs: 20.0 * (t.amplitude as f64).max(1e-15).log10(),
                channel: c,
                note: note(t.freq_hz as f64, res_hz as f64),
            };
            match found.iter_mut().find(|f| (f.freq_hz - tone.freq_hz).abs() < res_hz as f64) {
                Some(f) if f.snr_db < tone.snr_db => *f = tone,
                Some(_) => {}
                None => found.push(tone),
            }
        }
        progress.set(c as u64 + 1);
    }
    found.sort_by(|a, b| b.snr_db.total_cmp(&a.snr_db));
    Ok(found)
}

/// `scan`: the tones as a table (or one JSON object per tone).
pub fn command(path: &Path, opt: ScanOptions, json: bool, out: &mut dyn Write) -> Result<()> {
    let tones = scan(path, opt)?;
    let io = |e: std::io::Error| SimError::io(Path::new("<stdout>"), "write", e);
    if json {
        for t in &tones {
            let line = serde_json::to_string(t).map_err(|e| SimError::Arg { name: "json".into(), msg: e.to_string() })?;
            writeln!(out, "{line}").map_err(io)?;
        }
        return Ok(());
    }
    let min_snr_db = LocatorSettings::default().signal_snr_db;
    writeln!(
        out,
        "Tones in {} ({} s from {} s, every channel; strongest first)",
        path.display(),
        crate::units::num(opt.seconds),
        crate::units::num(opt.start_s)
    )
    .map_err(io)?;
    writeln!(out, "SNR: the tone's power over the noise beside it; level: its amplitude re the converter's full scale").map_err(io)?;
    if tones.is_empty() {
        writeln!(out, "no tone found at or above {min_snr_db} dB SNR").map_err(io)?;
    } else {
        writeln!(out, "{:>12} {:>8} {:>10} {:>8}  likely", "freq Hz", "SNR dB", "level dBFS", "channel").map_err(io)?;
        for t in &tones {
            writeln!(out, "{:>12.3} {:>8.1} {:>10.1} {:>8}  {}", t.freq_hz, t.snr_db, t.level_dbfs, t.channel, t.note).map_err(io)?;
        }
        match tones.iter().find(|t| !t.note.starts_with("mains")) {
            Some(t) => writeln!(
                out,
                "The strongest tone off the mains harmonics is at {:.2} Hz: undertone replay {} --freq {:.2}",
                t.freq_hz,
                path.display(),
                t.freq_hz
            )
            .map_err(io)?,
            None => writeln!(out, "Every tone found sits on a mains harmonic: no beacon heard.").map_err(io)?,
        }
    }
    Ok(())
}
