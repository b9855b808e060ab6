//! The settings a person can change on the receiver, and how they become the
//! DSP pipeline's settings.
//!
//! Edited through the command protocol or the buttons, stored in flash,
//! validated by building a `Receiver` before they are taken into use (a setting
//! that fails to build keeps the old one and says why).

use undertone_dsp::detect::input::InputScale;
use undertone_dsp::format::LengthUnit;
use undertone_dsp::locate::calibration::Calibration;
use undertone_dsp::{Beacon, ConfigError, DetectorKind, DetectorSettings, Head, LocatorSettings, Receiver, ReceiverSettings};

/// Everything the firmware stores.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Settings<const N: usize> {
    /// Beacon frequency, Hz.
    pub beacon_hz: f32,
    /// Detection bandwidth, Hz; `None` = the preset's default.
    pub bandwidth_hz: Option<f32>,
    /// Detector kind.
    pub kind: DetectorKind,
    /// Readouts per second.
    pub readout_hz: f32,
    /// Display units (screen, replies and log).
    pub units: LengthUnit,
    /// Coil head.
    pub head: Head<N>,
    /// Calibration.
    pub calibration: Calibration,
    /// Height of the lower coil centre above the ground, m (depth below ground = depth − this).
    pub coil_height_m: f32,
    /// Distance from the lower coil centre to the sonde for the calibration and the pre-job check, m.
    pub check_distance_m: f32,
}

impl Settings<4> {
    /// Factory settings for the 4-coil reference head: 512 Hz, default bandwidth, 20 readouts/s.
    pub fn defaults() -> Self {
        Self::with_head(Head::reference4())
    }
}

impl<const N: usize> Settings<N> {
    /// Factory settings around a head.
    pub fn with_head(head: Head<N>) -> Self {
        Self {
            beacon_hz: 512.0,
            bandwidth_hz: None,
            kind: DetectorKind::DEFAULT,
            readout_hz: 20.0,
            units: LengthUnit::Metres,
            head,
            calibration: Calibration::default(),
            coil_height_m: LocatorSettings::default().coil_height_m,
            check_distance_m: 1.0,
        }
    }

    /// The DSP receiver settings at sample rate `fs` with ADC codes scaled by `scale` (units per code).
    pub fn receiver_settings(&self, fs: f32, full_scale_code: i32, scale: [f32; N]) -> ReceiverSettings<N> {
        let mut det = DetectorSettings::new(fs, Beacon::from_hz(self.beacon_hz)).with_kind(self.kind);
        if let Some(b) = self.bandwidth_hz {
            det.bandwidth_hz = b;
        }
        det.readout_rate_hz = self.readout_hz;
        let input = InputScale { scale, full_scale_code, full_scale: 1.0 };
        let mut s = ReceiverSettings::new(det, input, self.head);
        s.locator.calibration = self.calibration;
        s.locator.coil_height_m = self.coil_height_m;
        s
    }

    /// Check that these settings build a receiver at `fs`.
    pub fn validate(&self, fs: f32) -> Result<(), ConfigError> {
        Receiver::new(self.receiver_settings(fs, 8_388_607, [1.0; N])).map(|_| ())
    }
}
