//! The receiver pipeline the firmware and the simulator both drive:
//! [`Detector`] (a phasor and noise σ per coil) → [`Locator`] (field vector,
//! signal, orientation, guidance, depths) → [`Readout`], plus gain requests.
//!
//! Real-time budget: the per-sample work is the detector's (see `detect`);
//! everything here runs once per readout (tens of times per second).
//!
//! ```
//! use undertone_dsp::detect::input::InputScale;
//! use undertone_dsp::{Beacon, DetectorSettings, Head, Receiver, ReceiverSettings};
//! // A 4-coil reference head on a 24-bit converter at 48 kSPS, set for a 512 Hz sonde.
//! let settings = ReceiverSettings::new(DetectorSettings::new(48_000.0, Beacon::Hz512), InputScale::unity(24), Head::reference4());
//! let mut rx = Receiver::new(settings).unwrap();
//! // Silence: readouts come, and say there is no signal.
//! let mut last = None;
//! for _ in 0..48_000 {
//!     if let Some(r) = rx.push_codes(&[0; 4]) {
//!         last = Some(r);
//!     }
//! }
//! let r = last.unwrap();
//! assert_eq!(r.signal, undertone_dsp::locate::locator::Signal::Absent);
//! assert!(r.depth.is_none() && r.guidance.direction() == 0);
//! ```

use crate::detect::input::InputScale;
use crate::detect::settings::DetectorSettings;
use crate::detect::{Detection, Detector, DetectorInfo};
use crate::error::ConfigError;
use crate::field::head::Head;
use crate::flags::Flags;
use crate::locate::calibration::Calibration;
use crate::locate::components::FieldVector;
use crate::locate::depth::DepthEstimate;
use crate::locate::fit::Fix;
use crate::locate::guidance::Guidance;
use crate::locate::locator::{Located, Locator, LocatorSettings, ShownDepth, Signal, Timing};
use crate::locate::orientation::Orientation;
use crate::locate::trail::Place;
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
    /// Locating settings.
    pub locator: LocatorSettings,
    /// Peak input fraction of full scale above which a gain step down is requested.
    pub gain_down_fraction: f32,
    /// Peak input fraction below which a gain step up is requested.
    pub gain_up_fraction: f32,
}

impl<const N: usize> ReceiverSettings<N> {
    /// Defaults around a detector, input scale and head.
    pub fn new(detector: DetectorSettings, input: InputScale<N>, head: Head<N>) -> Self {
        Self { detector, input, head, locator: LocatorSettings::default(), gain_down_fraction: 0.7, gain_up_fraction: 0.01 }
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
    /// The same in dB (20·log10 of the reading units).
    pub strength_db: f32,
    /// SNR of the lower coils' field magnitude over its noise σ, dB.
    pub snr_db: f32,
    /// Bearing of the horizontal field from the handle, degrees in [−90, 90].
    pub bearing_deg: f32,
    /// Tone present?
    pub signal: Signal,
    /// Orientation state.
    pub state: Orientation,
    /// Which way to walk.
    pub guidance: Guidance,
    /// Gradient depth.
    pub gradient: DepthEstimate,
    /// Known-moment depth.
    pub known_moment: DepthEstimate,
    /// One-station fit depth (6-coil heads).
    pub fit_depth: DepthEstimate,
    /// The depth to show (the trail's when valid, else the valid estimate with the smallest σ), with its depth below ground.
    pub depth: Option<ShownDepth>,
    /// The one-station fix, when the head has two full triads and the fit ran.
    pub fix: Option<Fix>,
    /// Where the trail of stations puts the sonde (None until a fit exists).
    pub place: Option<Place>,
    /// Tone offset from the set frequency, Hz.
    pub freq_offset_hz: f32,
    /// One-sigma of that offset, Hz.
    pub freq_offset_sigma_hz: f32,
    /// Conditions.
    pub flags: Flags,
    /// Gain change wanted, if any.
    pub gain_request: Option<GainRequest>,
}

/// The receiver.
#[derive(Clone, Debug)]
pub struct Receiver<const N: usize> {
    settings: ReceiverSettings<N>,
    detector: Detector<N>,
    locator: Locator<N>,
    overruns: u32,
}

impl<const N: usize> Receiver<N> {
    /// Validate and build.
    pub fn new(settings: ReceiverSettings<N>) -> Result<Self, ConfigError> {
        let locator = Locator::new(settings.locator, settings.head)?;
        let detector = Detector::new(&settings.detector, settings.input)?;
        Ok(Self { settings, detector, locator, overruns: 0 })
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

    /// The locator.
    pub fn locator(&self) -> &Locator<N> {
        &self.locator
    }

    /// Replace the calibration.
    pub fn set_calibration(&mut self, cal: Calibration) {
        self.settings.locator.calibration = cal;
        self.locator.set_calibration(cal);
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

    /// Turn one detection into a readout: the locator, then the receiver's own flags and gain request.
    pub fn locate(&mut self, d: &Detection<N>) -> Readout<N> {
        let info = *self.detector.info();
        let timing = Timing { t_s: d.t_s, noise_corr_s: 1.0 / info.bandwidth_hz.max(1e-3), group_delay_s: info.group_delay_s };
        let l: Located<N> = self.locator.locate(&d.phasors, &d.noise_sigma, d.flags, timing);
        let mut flags = d.flags.union(l.flags);
        // An offset estimate means nothing without a tone.
        if l.signal != Signal::Good {
            flags.set(Flags::OFF_FREQUENCY, false);
        }
        flags.set(Flags::OVERRUN, self.overruns > 0);
        self.overruns = 0;
        let strength = l.field.horizontal;
        Readout {
            t_s: d.t_s,
            sample_index: d.sample_index,
            phasors: d.phasors,
            field: l.field,
            strength,
            strength_db: 20.0 * crate::powf::log10f(strength.max(1e-30)),
            snr_db: l.snr_db,
            bearing_deg: l.field.bearing_rad.to_degrees(),
            signal: l.signal,
            state: l.state,
            guidance: l.guidance,
            gradient: l.gradient,
            known_moment: l.known_moment,
            fit_depth: l.fit_depth,
            depth: l.depth,
            fix: l.fix,
            place: l.place,
            freq_offset_hz: d.freq_offset_hz,
            freq_offset_sigma_hz: d.freq_offset_sigma_hz,
            flags,
            gain_request: self.gain_request(d),
        }
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
