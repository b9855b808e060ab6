//! The receiver pipeline the firmware and the simulator both drive.
//!
//! ADC frames → [`Detector`] (a phasor and noise σ per coil) → signed field
//! ([`FieldVector`]) → bearing and orientation state → guidance → depth
//! estimates with uncertainty and validity → flags and a gain request.
//!
//! Real-time budget: the per-sample work is the detector's (see `detect`);
//! everything here runs once per readout (tens of times per second).

use crate::detect::input::InputScale;
use crate::detect::settings::DetectorSettings;
use crate::detect::{Detection, Detector, DetectorInfo};
use crate::error::ConfigError;
use crate::field::head::Head;
use crate::field::FieldModel;
use crate::flags::Flags;
use crate::locate::calibration::Calibration;
use crate::locate::components::FieldVector;
use crate::locate::depth::{gradient_depth, known_moment_depth, DepthEstimate, Invalid};
use crate::locate::fit::{fit_from, Fix};
use crate::locate::guidance::{guidance, Guidance};
use crate::locate::orientation::{Hysteresis, Orientation};
use crate::phasor::C32;

/// Everything the receiver is configured with.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ReceiverSettings<const N: usize> {
    /// Detector settings.
    pub detector: DetectorSettings,
    /// ADC input scaling.
    pub input: InputScale<N>,
    /// Coil head.
    pub head: Head<N>,
    /// Source model for depth.
    pub model: FieldModel,
    /// Stored calibration.
    pub calibration: Calibration,
    /// Orientation hysteresis.
    pub hysteresis: Hysteresis,
    /// Minimum amplitude SNR (A/σ) for a depth; 10 = 20 dB.
    pub min_snr: f32,
    /// Largest |Bz/Bh| at which the receiver counts as over the peak.
    pub peak_ratio_gate: f32,
    /// Quadrature residue above which the field is flagged.
    pub quadrature_limit: f32,
    /// Peak input fraction of full scale above which a gain step down is requested.
    pub gain_down_fraction: f32,
    /// Peak input fraction below which a gain step up is requested.
    pub gain_up_fraction: f32,
    /// Strength must be within this fraction of its recent maximum for a depth (0.03 = 3 %).
    pub peak_hold_fraction: f32,
    /// How far back the recent maximum reaches, s.
    pub peak_hold_s: f32,
    /// Largest relative change of strength over the last half second for a depth.
    pub steady_fraction: f32,
    /// Largest |bearing| over the last half second for a depth, degrees.
    pub steady_bearing_deg: f32,
    /// Skin depth of the ground assumed for the gradient depth, m (infinite: no
    /// correction). First order, the field falls by an extra `e^{−d/δ}`, so the
    /// coil ratio gains `e^{s/δ}`, which is divided out.
    pub skin_depth_m: f32,
    /// Run the one-station dipole fit when the head has two full triads.
    pub fit: bool,
    /// Run the fit on every n-th readout; the readouts in between repeat the last
    /// fix. Warm-started, a fit costs about 0.24 M instructions on a Cortex-M4F
    /// (3.4 M from cold), so every readout at 20/s takes about 5 % of a 100 MHz core.
    pub fit_every: u8,
    /// χ² per degree of freedom above which the field is flagged as distorted.
    pub distortion_chi2: f32,
}

impl<const N: usize> ReceiverSettings<N> {
    /// Defaults around a detector, input scale and head.
    pub fn new(detector: DetectorSettings, input: InputScale<N>, head: Head<N>) -> Self {
        Self {
            detector,
            input,
            head,
            model: FieldModel::Dipole,
            calibration: Calibration::default(),
            hysteresis: Hysteresis::default(),
            min_snr: 10.0,
            peak_ratio_gate: 0.15,
            quadrature_limit: 0.25,
            gain_down_fraction: 0.7,
            gain_up_fraction: 0.01,
            peak_hold_fraction: 0.03,
            peak_hold_s: 3.0,
            steady_fraction: 0.02,
            steady_bearing_deg: 6.0,
            skin_depth_m: f32::INFINITY,
            fit: true,
            fit_every: 1,
            distortion_chi2: 9.0,
        }
    }
}

/// A request to change one channel's analogue gain.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GainRequest {
    /// Channel.
    pub channel: u8,
    /// True: raise the gain; false: lower it.
    pub up: bool,
}

/// One readout of the receiver.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Readout<const N: usize> {
    /// Time of the centre of the data used, s from the first sample.
    pub t_s: f64,
    /// Index of the latest sample used.
    pub sample_index: u64,
    /// Phasor per coil.
    pub phasors: [C32; N],
    /// Signed field at the head.
    pub field: FieldVector<N>,
    /// Horizontal field at the lower coils (linear, reading units).
    pub strength: f32,
    /// The same in dB (20·log10).
    pub strength_db: f32,
    /// Amplitude SNR of the strongest lower reading, dB.
    pub snr_db: f32,
    /// Bearing of the horizontal field from the handle, degrees in [−90, 90].
    pub bearing_deg: f32,
    /// Orientation state.
    pub state: Orientation,
    /// Which way to walk along the axis.
    pub guidance: Guidance,
    /// Gradient depth.
    pub gradient: DepthEstimate,
    /// Known-moment depth.
    pub known_moment: DepthEstimate,
    /// One-station fit depth (6-coil heads).
    pub fit_depth: DepthEstimate,
    /// The one-station fix, when the head has two full triads and the fit ran.
    pub fix: Option<Fix>,
    /// Tone offset from the set frequency, Hz.
    pub freq_offset_hz: f32,
    /// Conditions.
    pub flags: Flags,
    /// Gain change wanted, if any.
    pub gain_request: Option<GainRequest>,
}

impl<const N: usize> Readout<N> {
    /// The best valid depth: gradient, else known moment.
    pub fn depth(&self) -> Option<DepthEstimate> {
        [self.gradient, self.fit_depth, self.known_moment].into_iter().find(|d| d.is_valid())
    }
}

/// The receiver.
#[derive(Clone, Debug)]
pub struct Receiver<const N: usize> {
    settings: ReceiverSettings<N>,
    detector: Detector<N>,
    state: Orientation,
    last_depth: Option<f32>,
    overruns: u32,
    history: heapless::Deque<(f32, f32), HISTORY>,
    last_fix: Option<[f32; 6]>,
    held_fix: Option<Fix>,
    readouts: u32,
}

/// Readouts of strength history kept for the peak gate.
pub const HISTORY: usize = 128;

impl<const N: usize> Receiver<N> {
    /// Validate and build.
    pub fn new(settings: ReceiverSettings<N>) -> Result<Self, ConfigError> {
        settings.head.validate()?;
        settings.hysteresis.validate()?;
        let detector = Detector::new(&settings.detector, settings.input)?;
        Ok(Self {
            settings,
            detector,
            state: Orientation::Unknown,
            last_depth: None,
            overruns: 0,
            history: heapless::Deque::new(),
            last_fix: None,
            held_fix: None,
            readouts: 0,
        })
    }

    /// Settings in force.
    pub fn settings(&self) -> &ReceiverSettings<N> {
        &self.settings
    }

    /// Detector figures.
    pub fn detector_info(&self) -> &DetectorInfo {
        self.detector.info()
    }

    /// The detector (for mains reports and responses).
    pub fn detector(&self) -> &Detector<N> {
        &self.detector
    }

    /// Replace the calibration.
    pub fn set_calibration(&mut self, cal: Calibration) {
        self.settings.calibration = cal;
    }

    /// Record `n` frames lost before they reached the receiver; flagged on the next readout.
    pub fn note_overrun(&mut self, n: u32) {
        self.overruns = self.overruns.saturating_add(n);
    }

    /// The analogue gain of `channel` was multiplied by `ratio` (from the next frame on):
    /// rescale so readouts continue without a step.
    pub fn apply_gain_change(&mut self, channel: usize, ratio: f32) -> Result<(), ConfigError> {
        let old = self.detector.input().scale.get(channel).copied().unwrap_or(1.0);
        self.detector.set_scale(channel, old / ratio)?;
        self.settings.input.scale[channel] = old / ratio;
        Ok(())
    }

    /// Feed a frame of ADC codes.
    pub fn push_codes(&mut self, codes: &[i32; N]) -> Option<Readout<N>> {
        let d = self.detector.push_codes(codes)?;
        Some(self.locate(&d))
    }

    /// Feed many frames of codes (the fast path); `on` receives every readout.
    pub fn push_codes_block(&mut self, frames: &[[i32; N]], mut on: impl FnMut(Readout<N>)) {
        // Readouts are at least 40 samples apart (100 readouts/s at 4 kHz), so a
        // chunk of 128 frames completes at most 4.
        let mut dets: heapless::Vec<Detection<N>, 4> = heapless::Vec::new();
        let mut start = 0;
        while start < frames.len() {
            let end = frames.len().min(start + 128);
            self.detector.push_codes_block(&frames[start..end], |d| {
                let _ = dets.push(d);
            });
            for d in dets.iter() {
                on(self.locate(d));
            }
            dets.clear();
            start = end;
        }
    }

    /// Feed a frame of f32 samples.
    pub fn push(&mut self, frame: &[f32; N]) -> Option<Readout<N>> {
        let d = self.detector.push(frame)?;
        Some(self.locate(&d))
    }

    /// Feed an interleaved buffer of codes (`c0 c1 … c(N−1) c0 …`), calling `on` for
    /// every readout. Returns how many trailing samples did not fill a frame (left for the caller).
    pub fn push_interleaved_codes(&mut self, buf: &[i32], mut on: impl FnMut(Readout<N>)) -> usize {
        let mut chunks = buf.chunks_exact(N);
        for ch in &mut chunks {
            let mut f = [0i32; N];
            f.copy_from_slice(ch);
            if let Some(r) = self.push_codes(&f) {
                on(r);
            }
        }
        chunks.remainder().len()
    }

    /// Feed an interleaved buffer of f32 samples; as [`Receiver::push_interleaved_codes`].
    pub fn push_interleaved(&mut self, buf: &[f32], mut on: impl FnMut(Readout<N>)) -> usize {
        let mut chunks = buf.chunks_exact(N);
        for ch in &mut chunks {
            let mut f = [0f32; N];
            f.copy_from_slice(ch);
            if let Some(r) = self.push(&f) {
                on(r);
            }
        }
        chunks.remainder().len()
    }

    /// Turn one detection into a readout.
    pub fn locate(&mut self, d: &Detection<N>) -> Readout<N> {
        let s = self.settings;
        let s = &s;
        let head = &s.head;
        let mut field = FieldVector::from_phasors(head, &d.phasors, &d.noise_sigma);
        // Calibrated upper along-coil gain.
        if let Some(u) = head.roles.upper[0] {
            let cu = s.calibration.upper_gain;
            field.signed[u as usize] *= cu;
            field.sigma[u as usize] *= cu;
            field.upper[0] *= cu;
        }
        let lo = head.roles.lower;
        let sig_lo = field.sigma_of(lo[0]).max(1e-30);
        let snr = field.horizontal / sig_lo;
        let snr_db = 20.0 * libm::log10f(snr.max(1e-6));
        let have_field = snr >= 3.0;
        self.state = s.hysteresis.next(self.state, field.bearing_rad.to_degrees(), have_field);
        let ratio = field.vertical_ratio();
        let at_peak = self.at_strength_peak(field.horizontal, field.bearing_rad.to_degrees());
        let over_peak = libm::fabsf(ratio) <= s.peak_ratio_gate && at_peak;
        let gate = |est: DepthEstimate| -> DepthEstimate {
            if !have_field || snr < s.min_snr {
                DepthEstimate::none(Invalid::LowSnr)
            } else if self.state != Orientation::InLine {
                DepthEstimate::none(Invalid::NotInLine)
            } else if !over_peak {
                DepthEstimate::none(Invalid::NotOverPeak)
            } else {
                est
            }
        };
        let gradient = match (head.spacing_m(), head.roles.upper[0]) {
            (Some(sp), Some(_)) => {
                // With full triads the total-field ratio is less biased off the peak.
                let triads = lo.iter().all(|r| r.is_some()) && head.roles.upper.iter().all(|r| r.is_some());
                let (a_lo, a_up, s_lo, s_up) = if triads {
                    let up = libm::hypotf(libm::hypotf(field.upper[0], field.upper[1]), field.upper[2]);
                    (field.total, up, sig_lo, field.sigma_of(head.roles.upper[0]))
                } else {
                    (field.lower[0], field.upper[0], sig_lo, field.sigma_of(head.roles.upper[0]))
                };
                let soil = if s.skin_depth_m.is_finite() && s.skin_depth_m > 0.0 { libm::expf(sp / s.skin_depth_m) } else { 1.0 };
                gate(gradient_depth(s.model, a_lo, a_up * soil, s_lo, s_up * soil, sp))
            }
            _ => DepthEstimate::none(Invalid::NoCoils),
        };
        let known = gate(known_moment_depth(s.model, field.horizontal, sig_lo, s.calibration.strength, s.calibration.strength_sigma));
        let triads = lo.iter().chain(head.roles.upper.iter()).all(|r| r.is_some());
        // The fit needs six coils for its six unknowns; for smaller heads the branch
        // is decided at compile time and its code left out.
        self.readouts = self.readouts.wrapping_add(1);
        let due = self.readouts % (s.fit_every.max(1) as u32) == 1 % (s.fit_every.max(1) as u32) || self.held_fix.is_none();
        let fix = if N >= 6 && s.fit && triads && s.model == FieldModel::Dipole && snr >= s.min_snr {
            if due {
                let k = if s.calibration.strength > 0.0 { Some(s.calibration.strength) } else { None };
                let mut sig = field.sigma;
                for v in sig.iter_mut() {
                    *v = v.max(1e-30);
                }
                let f = fit_from(head, &field.signed, &sig, k, self.last_fix);
                self.last_fix = f.converged.then_some(f.params);
                self.held_fix = Some(f);
            }
            self.held_fix
        } else {
            self.held_fix = None;
            None
        };
        let fit_depth = match fix {
            None => DepthEstimate::none(if triads { Invalid::LowSnr } else { Invalid::NoCoils }),
            Some(f) if !f.converged => DepthEstimate::none(Invalid::NoFit),
            Some(f) if f.sigma[2] > 0.5 * f.params[2] => DepthEstimate::none(Invalid::LowSnr),
            Some(f) => DepthEstimate::valid(f.params[2], f.sigma[2]),
        };
        let distorted = fix.map(|f| f.dof > 0 && f.chi2 / f.dof as f32 > s.distortion_chi2).unwrap_or(false);
        if let Some(dep) = [gradient, fit_depth, known].iter().find(|e| e.is_valid()) {
            self.last_depth = Some(dep.depth_m);
        }
        let guide = guidance(ratio, self.last_depth);
        let mut flags = d.flags;
        flags.set(Flags::LOW_SNR, snr < s.min_snr);
        flags.set(Flags::QUADRATURE, have_field && field.quadrature > s.quadrature_limit);
        flags.set(Flags::OVERRUN, self.overruns > 0);
        flags.set(Flags::DISTORTED, distorted);
        self.overruns = 0;
        let gain_request = self.gain_request(d);
        flags.set(Flags::WEAK, gain_request.map(|g| g.up).unwrap_or(false));
        let strength = field.horizontal;
        Readout {
            t_s: d.t_s,
            sample_index: d.sample_index,
            phasors: d.phasors,
            field,
            strength,
            strength_db: 20.0 * libm::log10f(strength.max(1e-30)),
            snr_db,
            bearing_deg: field.bearing_rad.to_degrees(),
            state: self.state,
            guidance: guide,
            gradient,
            known_moment: known,
            fit_depth,
            fix,
            freq_offset_hz: d.freq_offset_hz,
            flags,
            gain_request,
        }
    }

    /// Peak gate: the strength is steady and at its recent maximum. Along the
    /// sonde axis the vertical ratio finds the peak; across it the field is
    /// horizontal everywhere (no vertical component to go by), so the receiver
    /// withholds depth until the strength stops rising and sits within
    /// `peak_hold_fraction` of the largest value of the last `peak_hold_s`
    /// (across a level dipole |B| ∝ (1 + y²/h²)^{−3/2}: 3 % below the top is
    /// y ≈ 0.14h, where the gradient depth reads about 2 % deep). Walking a line
    /// parallel to the axis but off it, the strength also tops out with no
    /// vertical component, but the bearing swings through zero as the head
    /// passes (By ∝ 3xy/r⁵); so the bearing must also have stayed within
    /// `steady_bearing_deg` for the last half second. Standing still off the
    /// axis cannot be told from standing over it with a 4-coil head: the
    /// operator finds the peak across the axis first (or uses the 6-coil fit).
    fn at_strength_peak(&mut self, strength: f32, bearing_deg: f32) -> bool {
        let s = &self.settings;
        let dt = self.detector.info().readout_interval_s.max(1e-3);
        let keep = ((s.peak_hold_s / dt) as usize).clamp(2, HISTORY);
        let lag = ((0.5 / dt) as usize).clamp(1, keep - 1);
        let v = if strength.is_finite() { strength } else { 0.0 };
        let b = if bearing_deg.is_finite() { libm::fabsf(bearing_deg) } else { 90.0 };
        while self.history.len() >= keep {
            self.history.pop_front();
        }
        let _ = self.history.push_back((v, b));
        let max = self.history.iter().fold(0.0f32, |m, &x| m.max(x.0));
        let n = self.history.len();
        let before = if n > lag { self.history.iter().nth(n - 1 - lag).map(|x| x.0) } else { None };
        let steady = match before {
            Some(b) if b > 0.0 => libm::fabsf(v / b - 1.0) <= s.steady_fraction,
            _ => false,
        };
        let bearing_steady = self.history.iter().skip(n.saturating_sub(lag + 1)).all(|x| x.1 <= s.steady_bearing_deg);
        steady && bearing_steady && v >= (1.0 - s.peak_hold_fraction) * max
    }

    fn gain_request(&self, d: &Detection<N>) -> Option<GainRequest> {
        let s = &self.settings;
        let mut best: Option<(f32, GainRequest)> = None;
        for c in 0..N {
            let pf = d.stats.peak_fraction[c];
            let (urgency, up) = if pf >= s.gain_down_fraction || d.stats.clipped[c] > 0 {
                (pf + 1.0, false)
            } else if pf < s.gain_up_fraction && d.stats.samples > 0 && d.stats.non_finite[c] == 0 {
                (1.0 - pf / s.gain_up_fraction, true)
            } else {
                continue;
            };
            if best.map(|b| urgency > b.0).unwrap_or(true) {
                best = Some((urgency, GainRequest { channel: c as u8, up }));
            }
        }
        best.map(|b| b.1)
    }
}
