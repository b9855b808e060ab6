//! Recordings: the multi-channel ADC stream as WAV (hound), in and out.
//!
//! Written as 16-, 24- or 32-bit integer or 32-bit float. Integer files carry
//! the converter's codes rescaled to the file's bit depth; float files carry
//! codes divided by the converter's full scale (so ±1.0 is full scale).

use crate::error::{Result, SimError};
use crate::synth::Synth;
use std::path::Path;

/// Sample formats a WAV may carry here.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum WavFormat {
    /// 16-bit integer.
    I16,
    /// 24-bit integer.
    I24,
    /// 32-bit integer.
    I32,
    /// 32-bit float (±1.0 full scale).
    F32,
}

/// Write the synthetic stream to `path` (atomically).
pub fn write(path: &Path, synth: &mut Synth, fmt: WavFormat) -> Result<u64> {
    let spec = hound::WavSpec {
        channels: synth.coils as u16,
        sample_rate: synth.fs.round() as u32,
        bits_per_sample: match fmt {
            WavFormat::I16 => 16,
            WavFormat::I24 => 24,
            WavFormat::I32 | WavFormat::F32 => 32,
        },
        sample_format: if fmt == WavFormat::F32 { hound::SampleFormat::Float } else { hound::SampleFormat::Int },
    };
    let tmp = crate::output::temp_beside(path)?;
    let werr = |e: hound::Error| SimError::Wav { path: path.to_path_buf(), msg: format!("cannot write: {e}") };
    let file = tmp.reopen().map_err(|e| SimError::io(path, "write", e))?;
    let mut w = hound::WavWriter::new(std::io::BufWriter::new(file), spec).map_err(werr)?;
    let src_bits = (synth.fsc + 1.0).log2().round() as i32 + 1;
    let dst_bits = spec.bits_per_sample as i32;
    let mut frame = vec![0i32; synth.coils];
    let mut n = 0u64;
    let result = (|| -> Result<()> {
        while synth.next_codes(&mut frame) {
            for &c in &frame {
                match fmt {
                    WavFormat::F32 => w.write_sample((c as f64 / synth.fsc) as f32).map_err(werr)?,
                    _ => {
                        let shift = dst_bits - src_bits;
                        let v = if shift >= 0 { (c as i64) << shift } else { (c as i64) >> (-shift) };
                        let max = (1i64 << (dst_bits - 1)) - 1;
                        w.write_sample(v.clamp(-max - 1, max) as i32).map_err(werr)?
                    }
                }
            }
            n += 1;
        }
        w.flush().map_err(werr)?;
        Ok(())
    })();
    // On an error the temporary file is dropped (and deleted), the target left as it was.
    result.and_then(|_| w.finalize().map_err(werr))?;
    crate::output::persist(tmp, path)?;
    Ok(n)
}

/// A recording read into memory.
pub struct Recording {
    /// Channels.
    pub channels: usize,
    /// Sample rate, Hz.
    pub sample_rate_hz: f64,
    /// Integer codes (integer files) with their full-scale code, or floats.
    pub data: Samples,
}

impl Recording {
    /// Whole frames (one sample per channel) in the recording.
    pub fn frames(&self) -> usize {
        let n = match &self.data {
            Samples::Codes(v, _) => v.len(),
            Samples::Floats(v) => v.len(),
        };
        n / self.channels.max(1)
    }

    /// One channel as f32 in full-scale units (±1), frames `from..to`.
    pub fn channel(&self, c: usize, from: usize, to: usize) -> Vec<f32> {
        let nc = self.channels.max(1);
        let to = to.min(self.frames());
        let from = from.min(to);
        match &self.data {
            Samples::Codes(v, fsc) => (from..to).map(|k| v.get(k * nc + c).map_or(0.0, |&x| x as f32 / *fsc as f32)).collect(),
            Samples::Floats(v) => (from..to).map(|k| v.get(k * nc + c).copied().unwrap_or(0.0)).collect(),
        }
    }
}

/// Sample data.
pub enum Samples {
    /// Integer codes, interleaved, and the largest positive code.
    Codes(Vec<i32>, i32),
    /// Floats, interleaved (±1 full scale).
    Floats(Vec<f32>),
}

/// Length of a WAV recording, s (from its header).
pub fn duration_s(path: &Path) -> Result<f64> {
    let r =
        hound::WavReader::open(path).map_err(|e| SimError::Wav { path: path.to_path_buf(), msg: format!("not a usable WAV file: {e}") })?;
    Ok(r.duration() as f64 / r.spec().sample_rate.max(1) as f64)
}

/// Read a WAV (1 to 8 channels; 16/24/32-bit integer or 32-bit float).
pub fn read(path: &Path) -> Result<Recording> {
    let bad = |msg: String| SimError::Wav { path: path.to_path_buf(), msg };
    let mut r = hound::WavReader::open(path).map_err(|e| match e {
        hound::Error::IoError(io) => SimError::io(path, "read recording", io),
        e => bad(format!("not a usable WAV file: {e}")),
    })?;
    let spec = r.spec();
    if spec.channels == 0 || spec.channels > 8 {
        return Err(bad(format!("{} channels; allowed 1 to 8", spec.channels)));
    }
    let data = match (spec.sample_format, spec.bits_per_sample) {
        (hound::SampleFormat::Int, b @ (16 | 24 | 32)) => {
            let v: std::result::Result<Vec<i32>, _> = r.samples::<i32>().collect();
            let fsc = if b == 32 { i32::MAX } else { (1i32 << (b - 1)) - 1 };
            Samples::Codes(v.map_err(|e| bad(format!("corrupt sample data: {e}")))?, fsc)
        }
        (hound::SampleFormat::Float, 32) => {
            let v: std::result::Result<Vec<f32>, _> = r.samples::<f32>().collect();
            Samples::Floats(v.map_err(|e| bad(format!("corrupt sample data: {e}")))?)
        }
        (f, b) => {
            return Err(bad(format!(
                "unsupported sample format {b}-bit {}; allowed 16/24/32-bit integer or 32-bit float",
                if f == hound::SampleFormat::Float { "float" } else { "integer" }
            )))
        }
    };
    Ok(Recording { channels: spec.channels as usize, sample_rate_hz: spec.sample_rate as f64, data })
}
