//! Jobs run from the menu or the command channel over a stretch of readouts:
//! the pre-job check and the calibration (`undertone_dsp::locate::calibration`),
//! and the frequency scan (`undertone_dsp::detect::scan`). The maths is the
//! DSP crate's; a job only gathers its inputs.
//!
//! * Check and calibration average [`MEASURE_READOUTS`] readouts (2 s at 20 per
//!   second) with the sonde at the test distance below the head, in line. The
//!   noise σ used is a single readout's (consecutive readouts of the lock-in are
//!   correlated, so the average is not credited with √n).
//! * The scan records [`SCAN_LEN`] samples of the lower along coil, then scans
//!   100 Hz to 0.44·fs in bands of [`SCAN_BAND_HZ`], one band per main-loop pass
//!   (about 3 M instructions each at 32 kSPS), so no pass holds the loop long.

use crate::menu::JobKind;
use undertone_dsp::detect::scan::{scan, ScanSettings};
use undertone_dsp::field::vec3::norm;
use undertone_dsp::locate::calibration::{calibrate, pre_job_check, CalInput, Calibration, PreJobCheck};
use undertone_dsp::locate::locator::Signal;
use undertone_dsp::{ConfigError, Head, Param, Readout};

/// Readouts averaged by the check and the calibration.
pub const MEASURE_READOUTS: u32 = 40;
/// Samples the scan records.
pub const SCAN_LEN: usize = 2048;
/// Width of the band scanned per main-loop pass, Hz.
pub const SCAN_BAND_HZ: f32 = 1000.0;
/// Tones the scan reports at most.
pub const SCAN_TONES: usize = 4;

/// Sums over the readouts of a check or calibration.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Sums {
    n: u32,
    absent: u32,
    magnitude: f32,
    magnitude_sigma: f32,
    low: f32,
    up: f32,
    sigma_low: f32,
    sigma_up: f32,
    ratio: f32,
    offset_hz: f32,
}

/// A job in progress.
// One job at a time lives inside the application (in static memory on the board); the scan's
// buffer is the job, and there is no allocator to box it.
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Debug, PartialEq)]
pub enum Job {
    /// Averaging readouts for a check or a calibration.
    Measure {
        /// Which.
        kind: JobKind,
        /// The sums so far.
        sums: Sums,
    },
    /// Recording samples, then scanning band by band.
    Scan {
        /// Samples recorded (reading units).
        buf: [f32; SCAN_LEN],
        /// How many.
        len: usize,
        /// Next band's lower edge, Hz (None: still recording).
        next_hz: Option<f32>,
        /// Tones found so far (Hz, dB above the mean).
        found: heapless::Vec<(f32, f32), SCAN_TONES>,
    },
}

/// How a job ended.
#[derive(Clone, Debug, PartialEq)]
pub enum Outcome {
    /// The pre-job check.
    Check(PreJobCheck),
    /// A calibration (to be taken into the settings), or why not.
    Calibration(Result<Calibration, ConfigError>),
    /// The tones found, strongest first.
    Tones(heapless::Vec<(f32, f32), SCAN_TONES>),
}

impl Job {
    /// Start a job.
    pub fn new(kind: JobKind) -> Self {
        match kind {
            JobKind::Scan => Job::Scan { buf: [0.0; SCAN_LEN], len: 0, next_hz: None, found: heapless::Vec::new() },
            k => Job::Measure { kind: k, sums: Sums::default() },
        }
    }

    /// How far along, 0–1.
    pub fn progress(&self, fs: f32) -> f32 {
        match self {
            Job::Measure { sums, .. } => sums.n as f32 / MEASURE_READOUTS as f32,
            Job::Scan { len, next_hz: None, .. } => 0.5 * *len as f32 / SCAN_LEN as f32,
            Job::Scan { next_hz: Some(f), .. } => 0.5 + 0.5 * (f / (0.44 * fs)).min(1.0),
        }
    }

    /// The scan is recording: one sample of the lower along coil, reading units.
    pub fn wants_samples(&self) -> bool {
        matches!(self, Job::Scan { next_hz: None, .. })
    }

    /// A sample for the scan.
    pub fn sample(&mut self, x: f32) {
        if let Job::Scan { buf, len, next_hz, .. } = self {
            if *len < SCAN_LEN {
                buf[*len] = x;
                *len += 1;
            }
            if *len == SCAN_LEN && next_hz.is_none() {
                *next_hz = Some(100.0);
            }
        }
    }

    /// A readout for a check or calibration.
    pub fn readout<const N: usize>(&mut self, r: &Readout<N>, head: &Head<N>, upper_gain: f32) {
        let Job::Measure { sums: s, .. } = self else { return };
        let lo = head.roles.lower[0].map(|i| i as usize).unwrap_or(0);
        let up = head.roles.upper[0].map(|i| i as usize);
        let m = norm(r.field.lower);
        s.n += 1;
        s.absent += (r.signal == Signal::Absent) as u32;
        s.magnitude += m;
        s.magnitude_sigma += m / undertone_dsp::powf::powf(10.0, r.snr_db / 20.0);
        // Signed along readings on the lower coil's sign; the upper without its present correction.
        let sign = if r.field.signed[lo] < 0.0 { -1.0 } else { 1.0 };
        s.low += sign * r.field.signed[lo];
        s.sigma_low += r.field.sigma[lo];
        if let Some(u) = up {
            s.up += sign * r.field.signed[u] / upper_gain;
            s.sigma_up += r.field.sigma[u] / upper_gain;
        }
        s.ratio += r.guidance.vertical_ratio;
        s.offset_hz += r.freq_offset_hz;
    }

    /// Work for one main-loop pass; the outcome when the job is done.
    pub fn advance<const N: usize>(
        &mut self,
        fs: f32,
        head: &Head<N>,
        model: undertone_dsp::FieldModel,
        distance_m: f32,
        cal: &Calibration,
    ) -> Option<Outcome> {
        match self {
            Job::Measure { kind, sums: s } if s.n >= MEASURE_READOUTS => {
                let n = s.n as f32;
                if *kind == JobKind::Check {
                    let mut c = pre_job_check(model, s.magnitude / n, s.magnitude_sigma / n, distance_m, s.offset_hz / n, cal);
                    // A readout with no tone at all fails the check whatever the average says.
                    c.tone_present &= s.absent == 0;
                    return Some(Outcome::Check(c));
                }
                let input = CalInput {
                    distance_m,
                    spacing_m: head.spacing_m().unwrap_or(f32::NAN),
                    a_low: s.low / n,
                    a_up: s.up / n,
                    sigma_low: s.sigma_low / n,
                    sigma_up: s.sigma_up / n,
                    vertical_ratio: s.ratio / n,
                };
                let r = if head.spacing_m().is_none() {
                    Err(ConfigError { param: Param::HeadGeometry, value: f32::NAN, min: 0.0, max: 0.0 })
                } else {
                    calibrate(model, &input)
                };
                Some(Outcome::Calibration(r))
            }
            Job::Measure { .. } => None,
            Job::Scan { next_hz: None, .. } => None,
            Job::Scan { buf, next_hz: Some(lo), found, .. } => {
                let top = 0.44 * fs;
                let mut s = ScanSettings::new(fs);
                s.coarse_resolution_hz = libm::ceilf(fs / SCAN_LEN as f32).max(2.0);
                // Bands overlap by two coarse steps so a tone on an edge is still a local maximum.
                let step = s.coarse_resolution_hz;
                s.f_lo_hz = (*lo - step).max(1.0);
                s.f_hi_hz = (*lo + SCAN_BAND_HZ + step).min(top);
                if s.f_hi_hz - s.f_lo_hz > 2.0 * step {
                    if let Ok(tones) = scan(&buf[..], &s) {
                        for t in tones.iter().filter(|t| t.freq_hz >= *lo && t.freq_hz < *lo + SCAN_BAND_HZ) {
                            insert(found, (t.freq_hz, t.snr_db));
                        }
                    }
                }
                *lo += SCAN_BAND_HZ;
                (*lo >= top).then(|| Outcome::Tones(found.clone()))
            }
        }
    }
}

/// Keep the strongest tones, strongest first.
fn insert(found: &mut heapless::Vec<(f32, f32), SCAN_TONES>, t: (f32, f32)) {
    let at = found.iter().position(|f| t.1 > f.1).unwrap_or(found.len());
    if at < SCAN_TONES {
        if found.is_full() {
            found.pop();
        }
        let _ = found.insert(at, t);
    }
}
