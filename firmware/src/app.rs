//! The application core: the same on the board, in the emulator and in host tests.
//!
//! Frames drained from the queue go into `undertone-dsp`'s `Receiver`; command
//! lines change the settings (validated by building a new receiver first: a
//! refused setting leaves the old one in force); gain steps carried out on the
//! converter are passed on so readouts stay continuous.

use crate::num::{write_config_error, write_f32};
use crate::protocol::{parse, Command};
use crate::settings::Settings;
use core::fmt::Write;
use heapless::String;
use undertone_dsp::format::{length, LengthUnit};
use undertone_dsp::locate::calibration::Calibration;
use undertone_dsp::{ConfigError, DetectorKind, Param, Readout, Receiver, Window};

/// Longest reply line.
pub const REPLY: usize = 200;

/// What a command asks of the shell beyond its reply.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Effect {
    /// Nothing more.
    None,
    /// Store the settings in flash.
    Save,
}

/// The application.
pub struct App<const N: usize> {
    settings: Settings<N>,
    factory: Settings<N>,
    receiver: Receiver<N>,
    fs: f32,
    full_scale_code: i32,
    scale: [f32; N],
}

impl<const N: usize> App<N> {
    /// Start with `settings` (or `factory` if they do not build, with the reason).
    pub fn new(
        settings: Settings<N>,
        factory: Settings<N>,
        fs: f32,
        full_scale_code: i32,
        scale: [f32; N],
    ) -> Result<(Self, Option<ConfigError>), ConfigError> {
        match Receiver::new(settings.receiver_settings(fs, full_scale_code, scale)) {
            Ok(receiver) => Ok((Self { settings, factory, receiver, fs, full_scale_code, scale }, None)),
            Err(e) => {
                let receiver = Receiver::new(factory.receiver_settings(fs, full_scale_code, scale))?;
                Ok((Self { settings: factory, factory, receiver, fs, full_scale_code, scale }, Some(e)))
            }
        }
    }

    /// Settings in force.
    pub fn settings(&self) -> &Settings<N> {
        &self.settings
    }

    /// The receiver.
    pub fn receiver(&self) -> &Receiver<N> {
        &self.receiver
    }

    /// One frame of codes.
    #[inline]
    pub fn process(&mut self, frame: &[i32; N]) -> Option<Readout<N>> {
        self.receiver.push_codes(frame)
    }

    /// Many frames of codes (the fast path); `on` receives every readout.
    pub fn process_block(&mut self, frames: &[[i32; N]], on: impl FnMut(Readout<N>)) {
        self.receiver.push_codes_block(frames, on);
    }

    /// Frames dropped before they reached us.
    pub fn note_overruns(&mut self, n: u32) {
        if n > 0 {
            self.receiver.note_overrun(n);
        }
    }

    /// Channel `ch`'s analogue gain was multiplied by `ratio`.
    pub fn gain_changed(&mut self, ch: usize, ratio: f32) {
        if ch < N && self.receiver.apply_gain_change(ch, ratio).is_ok() {
            self.scale[ch] /= ratio;
        }
    }

    fn rebuild(&mut self, s: Settings<N>) -> Result<(), ConfigError> {
        let r = Receiver::new(s.receiver_settings(self.fs, self.full_scale_code, self.scale))?;
        self.receiver = r;
        self.settings = s;
        Ok(())
    }

    /// Handle one command line; the reply goes to `out`.
    pub fn command(&mut self, line: &str, out: &mut String<REPLY>) -> Effect {
        out.clear();
        let cmd = match parse(line) {
            Ok(c) => c,
            Err(e) => {
                let _ = write!(out, "err {e}");
                return Effect::None;
            }
        };
        let mut s = self.settings;
        let coil = |i: u8| -> Result<usize, ConfigError> {
            if (i as usize) < N {
                Ok(i as usize)
            } else {
                Err(ConfigError { param: Param::Channels, value: i as f32, min: 0.0, max: (N - 1) as f32 })
            }
        };
        let change: Result<&str, ConfigError> = (|| {
            Ok(match cmd {
                Command::Freq(f) => {
                    s.beacon_hz = f;
                    "freq"
                }
                Command::Band(b) => {
                    s.bandwidth_hz = b;
                    "band"
                }
                Command::LockIn(p) => {
                    s.kind = DetectorKind::LockIn { poles: p };
                    "detector"
                }
                Command::Block(w) => {
                    s.kind =
                        DetectorKind::Block { window: [Window::Rectangular, Window::Hann, Window::BlackmanHarris4][w.min(2) as usize] };
                    "detector"
                }
                Command::Rate(r) => {
                    s.readout_hz = r;
                    "rate"
                }
                Command::Imperial(i) => {
                    s.units = if i { LengthUnit::FeetInches } else { LengthUnit::Metres };
                    "units"
                }
                Command::CoilPos(i, p) => {
                    s.head.coils[coil(i)?].pos_m = p;
                    "coil"
                }
                Command::CoilAxis(i, a) => {
                    let n = libm::sqrtf(a[0] * a[0] + a[1] * a[1] + a[2] * a[2]);
                    if !(n > 1e-6) {
                        return Err(ConfigError { param: Param::HeadGeometry, value: n, min: 1e-6, max: f32::MAX });
                    }
                    s.head.coils[coil(i)?].axis = [a[0] / n, a[1] / n, a[2] / n];
                    "coil"
                }
                Command::CoilGain(i, g) => {
                    s.head.coils[coil(i)?].gain = g;
                    "coil"
                }
                Command::CalUpper(c) => {
                    ConfigError::check(Param::Calibration, c, 0.7, 1.3)?;
                    s.calibration.upper_gain = c;
                    "cal"
                }
                Command::CalStrength(k, sg) => {
                    ConfigError::check(Param::SourceStrength, k, f32::MIN_POSITIVE, f32::MAX)?;
                    ConfigError::check(Param::SourceStrength, sg, 0.0, k)?;
                    s.calibration.strength = k;
                    s.calibration.strength_sigma = sg;
                    "cal"
                }
                Command::CalClear => {
                    s.calibration = Calibration::default();
                    "cal"
                }
                Command::Defaults => {
                    s = self.factory;
                    "defaults"
                }
                Command::Save | Command::Show | Command::Help => "",
            })
        })();
        match (cmd, change) {
            (_, Err(e)) => {
                let _ = out.push_str("err ");
                let _ = write_config_error(out, &e);
                let _ = out.push_str("; unchanged");
                Effect::None
            }
            (Command::Save, _) => {
                let _ = write!(out, "ok save");
                Effect::Save
            }
            (Command::Show, _) => {
                self.show(out);
                Effect::None
            }
            (Command::Help, _) => {
                let _ = write!(out, "ok commands: freq band detector rate units coil cal save show defaults help");
                Effect::None
            }
            (_, Ok(what)) => match self.rebuild(s) {
                Ok(()) => {
                    let _ = write!(out, "ok {what}");
                    Effect::None
                }
                Err(e) => {
                    let _ = out.push_str("err ");
                    let _ = write_config_error(out, &e);
                    let _ = out.push_str("; unchanged");
                    Effect::None
                }
            },
        }
    }

    fn show(&self, out: &mut String<REPLY>) {
        let s = &self.settings;
        let i = self.receiver.detector_info();
        let (kind, k) = match s.kind {
            DetectorKind::LockIn { poles } => ("lockin", poles),
            DetectorKind::Block { window } => ("block", window as u8),
        };
        let sp = self.settings.head.spacing_m().unwrap_or(0.0);
        fn f(out: &mut String<REPLY>, label: &str, v: f32, unit: &str) {
            let _ = out.push_str(label);
            let _ = write_f32(out, v);
            let _ = out.push_str(unit);
        }
        f(out, "ok freq ", s.beacon_hz, " Hz");
        f(out, ", band ", i.bandwidth_hz, " Hz");
        let _ = write!(out, ", detector {kind} {k}");
        f(out, ", rate ", s.readout_hz, " Hz");
        f(out, ", settle ", i.settle_99_s, " s");
        let _ = write!(out, ", spacing {}", length(sp, s.units).as_str());
        f(out, ", cal upper ", s.calibration.upper_gain, "");
        f(out, " strength ", s.calibration.strength, "");
    }
}

/// One machine-readable line per readout (used by the emulator and its host twin):
/// `R <sample> <t_s> <strength> <strength_db> <bearing_deg> <vertical_ratio> <depth_m|nan> <sigma_m|nan> <state> <flags>`.
pub fn readout_line<const N: usize>(r: &Readout<N>, out: &mut String<REPLY>) {
    out.clear();
    let (d, sd) = match r.depth {
        Some(e) => (e.depth.depth_m, e.depth.sigma_m),
        None => (f32::NAN, f32::NAN),
    };
    let _ = write!(
        out,
        "R {} {:.7e} {:.7e} {:.7e} {:.7e} {:.7e} {:.7e} {:.7e} {} {:x}",
        r.sample_index,
        r.t_s,
        r.strength,
        r.strength_db,
        r.bearing_deg,
        r.guidance.vertical_ratio,
        d,
        sd,
        r.state.name(),
        r.flags.0
    );
}
