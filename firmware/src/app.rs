//! The application: one loop body for the board, the emulator image and the
//! host tests.
//!
//! [`App::step`] is called on every pass of the main loop with the raw tick
//! counter, the button levels, a battery reading and any command bytes. It
//! drains the frame queue into the `Receiver`, carries out the receiver's gain
//! requests on the converter (and tells the receiver), supervises the
//! converter on a monotonic clock (re-initialising it with the gains the
//! receiver's scales assume, and telling the receiver of any gain the
//! converter did not take back), answers commands and buttons, runs the jobs
//! (check, calibration, scan), reads the battery, and refreshes the screen
//! [`REFRESH_HZ`](crate::screen::REFRESH_HZ) times a second, one page per
//! pass. The shell (`bin/board.rs`, the emulator image) only connects pins,
//! peripherals and interrupts to it.
//!
//! Every settings change, by command or button, is validated by building a new
//! receiver first: a refused change leaves the old settings in force and says
//! why.

use crate::ads131::{AdcError, Ads131, Osr};
use crate::battery::{Battery, Divider};
use crate::buttons::Buttons;
use crate::clock::Uptime;
use crate::jobs::{Job, Outcome};
use crate::menu::{Change, JobKind, Mode, Ui, UiAction, Values};
use crate::num::{write_config_error, write_f32, write_fixed, write_fixed_signed};
use crate::protocol::{parse, Command, LineBuffer, LineEvent};
use crate::queue::FrameConsumer;
use crate::screen::{draw, Frame, Page, TextPage, PAGES, REFRESH_MS};
use crate::settings::Settings;
use crate::storage::{LoadOutcome, Store, StoreError};
use crate::supervisor::{Action, PathState, Supervisor};
use crate::tone::{tone_for, Tone};
use crate::view::{View, ViewContext};
use core::fmt::Write;
use embedded_storage::nor_flash::NorFlash;
use heapless::String;
use undertone_dsp::field::head::{GAIN_RANGE, POSITION_RANGE_M};
use undertone_dsp::field::vec3::{norm, unit};
use undertone_dsp::format::{length, LengthUnit};
use undertone_dsp::locate::calibration::{Calibration, DISTANCE_RANGE_M, UPPER_GAIN_RANGE};
use undertone_dsp::locate::locator::COIL_HEIGHT_RANGE_M;
use undertone_dsp::{ConfigError, DetectorKind, Param, Readout, Receiver, Window};

/// Longest reply line.
pub const REPLY: usize = 200;
/// Frames taken from the queue per receiver call.
pub const BURST: usize = 32;
/// Most frames drained in one pass (then the rest of the pass runs, and the next drains on).
pub const MAX_DRAIN: usize = 512;

/// The converter, as the application drives it.
pub trait Converter<const N: usize> {
    /// Reset and configure with these PGA gain codes (0–7 = ×1 … ×128).
    fn restart(&mut self, gains: [u8; N]) -> Result<(), AdcError>;
    /// Change one channel's gain code.
    fn set_gain(&mut self, channel: usize, code: u8) -> Result<(), AdcError>;
    /// The gain codes in force, as far as the driver knows (after a reset that
    /// failed part-way, the converter's reset value ×1).
    fn gains(&mut self) -> [u8; N];
}

impl<SPI, DRDY, D, const N: usize> Converter<N> for Ads131<SPI, DRDY, D, N>
where
    SPI: embedded_hal::spi::SpiDevice,
    DRDY: embedded_hal::digital::InputPin,
    D: embedded_hal::delay::DelayNs,
{
    fn restart(&mut self, gains: [u8; N]) -> Result<(), AdcError> {
        let osr = self.osr().unwrap_or(Osr::R128);
        self.init(osr, gains)
    }
    fn set_gain(&mut self, channel: usize, code: u8) -> Result<(), AdcError> {
        Ads131::set_gain(self, channel, code)
    }
    fn gains(&mut self) -> [u8; N] {
        Ads131::gains(self)
    }
}

/// A converter shared with an interrupt handler through a critical-section mutex.
pub struct Shared<'a, T>(pub &'a critical_section::Mutex<core::cell::RefCell<Option<T>>>);

impl<T: Converter<N>, const N: usize> Converter<N> for Shared<'_, T> {
    fn restart(&mut self, gains: [u8; N]) -> Result<(), AdcError> {
        critical_section::with(|cs| self.0.borrow_ref_mut(cs).as_mut().map(|c| c.restart(gains)).unwrap_or(Err(AdcError::Pin)))
    }
    fn set_gain(&mut self, channel: usize, code: u8) -> Result<(), AdcError> {
        critical_section::with(|cs| self.0.borrow_ref_mut(cs).as_mut().map(|c| c.set_gain(channel, code)).unwrap_or(Err(AdcError::Pin)))
    }
    fn gains(&mut self) -> [u8; N] {
        critical_section::with(|cs| self.0.borrow_ref_mut(cs).as_mut().map(|c| c.gains()).unwrap_or([0; N]))
    }
}

/// The screen's controller did not take a page (a bus error, or no such page).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct PanelError;

/// The screen's controller: takes one 128-byte page at a time.
pub trait Panel {
    /// Send page `page` (rows 8·page to 8·page + 7).
    fn send_page(&mut self, page: usize, bytes: &[u8]) -> Result<(), PanelError>;
}

/// No screen fitted.
impl Panel for () {
    fn send_page(&mut self, _page: usize, _bytes: &[u8]) -> Result<(), PanelError> {
        Ok(())
    }
}

/// A screen in RAM (the emulator's and the tests').
impl Panel for Frame {
    fn send_page(&mut self, page: usize, bytes: &[u8]) -> Result<(), PanelError> {
        let dst = self.bytes.get_mut(page * 128..page * 128 + bytes.len()).ok_or(PanelError)?;
        dst.copy_from_slice(bytes);
        Ok(())
    }
}

/// Where settings are kept.
pub trait SettingsStore<const N: usize> {
    /// The newest stored settings, or `defaults`, with what happened.
    fn load(&mut self, defaults: Settings<N>) -> (Settings<N>, LoadOutcome);
    /// Store `s`; the slot written.
    fn save(&mut self, s: &Settings<N>) -> Result<u32, StoreError>;
}

impl<F: NorFlash, const N: usize> SettingsStore<N> for Store<F> {
    fn load(&mut self, defaults: Settings<N>) -> (Settings<N>, LoadOutcome) {
        Store::load(self, defaults)
    }
    fn save(&mut self, s: &Settings<N>) -> Result<u32, StoreError> {
        Store::save(self, s)
    }
}

/// What the shell hands the application on each pass.
#[derive(Clone, Copy, Debug)]
pub struct Inputs<'a> {
    /// The raw free-running tick counter (wraps at 2³²).
    pub ticks: u32,
    /// Button levels, − OK + (true: pressed).
    pub buttons: [bool; 3],
    /// A battery ADC reading, when one was taken.
    pub battery_code: Option<u16>,
    /// Bytes arrived on the command channel.
    pub command: &'a [u8],
}

/// What the shell should do with the speaker and the status LED.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Outputs {
    /// Speaker pitch, Hz (0: silent).
    pub pitch_hz: f32,
    /// The converter is in its fault state (blink the LED).
    pub fault: bool,
}

/// Something for the log.
#[derive(Debug)]
pub enum Event<'a, const N: usize> {
    /// A readout.
    Readout(&'a Readout<N>),
    /// A reply to a command or a job's result (`ok …` / `err …`).
    Reply(&'a str),
    /// A change of state worth logging.
    Note(&'a str),
    /// The screen was redrawn.
    Screen {
        /// When, ms since start.
        t_ms: u64,
        /// The frame buffer (its [`Frame::checksum`] is what the emulator check compares).
        frame: &'a Frame,
        /// What it shows.
        page: &'a Page,
    },
}

/// Fixed facts of the hardware the application runs on.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Hardware<const N: usize> {
    /// Sample rate, Hz.
    pub fs: f32,
    /// Full-scale code of the converter.
    pub full_scale_code: i32,
    /// Reading units per code at gain ×1, per channel.
    pub unity_scale: [f32; N],
    /// Counter ticks per millisecond of the `ticks` input.
    pub ticks_per_ms: u32,
    /// The battery divider.
    pub divider: Divider,
}

/// The application.
pub struct App<C, P, S, const N: usize> {
    hw: Hardware<N>,
    settings: Settings<N>,
    factory: Settings<N>,
    receiver: Receiver<N>,
    gains: [u8; N],
    conv: C,
    panel: P,
    store: S,
    clock: Uptime,
    sup: Supervisor,
    buttons: Buttons,
    ui: Ui,
    battery: Battery,
    frame: Frame,
    page: Page,
    next_refresh_ms: u64,
    pages_left: usize,
    view: Option<View>,
    tone: Tone,
    muted: bool,
    lines: LineBuffer,
    reply: String<REPLY>,
    job: Option<Job>,
    job_by_command: bool,
    burst: [[i32; N]; BURST],
}

fn code_ratio(from: u8, to: u8) -> f32 {
    libm::exp2f(to as f32 - from as f32)
}

impl<C: Converter<N>, P: Panel, S: SettingsStore<N>, const N: usize> App<C, P, S, N> {
    /// Load the settings from `store` (or `factory`), build the receiver, start the converter
    /// (`conv` already initialised by the shell, at gain ×1 on every channel). Notes about what
    /// was loaded go to `out`. Fails only when the factory settings do not build.
    pub fn new(
        hw: Hardware<N>,
        factory: Settings<N>,
        conv: C,
        panel: P,
        mut store: S,
        ticks: u32,
        out: &mut dyn FnMut(Event<'_, N>),
    ) -> Result<Self, ConfigError> {
        let (stored, outcome) = store.load(factory);
        out(Event::Note(match outcome {
            LoadOutcome::Loaded { .. } => "settings loaded",
            LoadOutcome::Empty => "no stored settings: factory settings",
            LoadOutcome::Corrupt => "stored settings corrupt: factory settings",
            LoadOutcome::OtherVersion { .. } => "stored settings are of another layout version: factory settings",
            LoadOutcome::Invalid => "stored settings invalid: factory settings",
        }));
        let mut note: String<REPLY> = String::new();
        let build = |s: &Settings<N>| Receiver::new(s.receiver_settings(hw.fs, hw.full_scale_code, hw.unity_scale));
        let (settings, receiver) = match build(&stored) {
            Ok(r) => (stored, r),
            Err(e) => {
                note.clear();
                let _ = note.push_str("stored settings refused (");
                let _ = write_config_error(&mut note, &e);
                let _ = note.push_str("): factory settings");
                out(Event::Note(&note));
                (factory, build(&factory)?)
            }
        };
        let clock = Uptime::new(hw.ticks_per_ms, ticks);
        Ok(Self {
            hw,
            settings,
            factory,
            receiver,
            gains: [0; N],
            conv,
            panel,
            store,
            clock,
            sup: Supervisor::new(0),
            buttons: Buttons::new(),
            ui: Ui::new(0),
            battery: Battery::new(hw.divider),
            frame: Frame::new(),
            page: Page::Caution,
            next_refresh_ms: 0,
            pages_left: 0,
            view: None,
            tone: Tone::Off,
            muted: false,
            lines: LineBuffer::new(),
            reply: String::new(),
            job: None,
            job_by_command: false,
            burst: [[0; N]; BURST],
        })
    }

    /// Settings in force.
    pub fn settings(&self) -> &Settings<N> {
        &self.settings
    }

    /// The receiver.
    pub fn receiver(&self) -> &Receiver<N> {
        &self.receiver
    }

    /// The converter.
    pub fn converter(&mut self) -> &mut C {
        &mut self.conv
    }

    /// The screen's controller.
    pub fn panel(&self) -> &P {
        &self.panel
    }

    /// The settings store.
    pub fn store(&mut self) -> &mut S {
        &mut self.store
    }

    /// The frame buffer as last drawn.
    pub fn frame(&self) -> &Frame {
        &self.frame
    }

    /// Gain codes the receiver's scales assume.
    pub fn gains(&self) -> [u8; N] {
        self.gains
    }

    /// Milliseconds since start.
    pub fn now_ms(&self) -> u64 {
        self.clock.ms()
    }

    /// The state of the sample path.
    pub fn path_state(&self) -> PathState {
        self.sup.state
    }

    /// The menu's state.
    pub fn mode(&self) -> &Mode {
        &self.ui.mode
    }

    /// One pass of the main loop.
    pub fn step(&mut self, frames: &mut FrameConsumer<'_, N>, inp: &Inputs<'_>, out: &mut dyn FnMut(Event<'_, N>)) -> Outputs {
        let now = self.clock.update(inp.ticks);
        // 1. Frames → receiver.
        let mut drained = 0;
        while drained < MAX_DRAIN {
            let burst = &mut self.burst;
            let mut k = 0;
            while k < BURST {
                match frames.pop() {
                    Some(f) => {
                        burst[k] = f;
                        k += 1;
                    }
                    None => break,
                }
            }
            if k == 0 {
                break;
            }
            drained += k;
            if let Some(job) = self.job.as_mut().filter(|j| j.wants_samples()) {
                let lo = self.settings.head.roles.lower[0].unwrap_or(0) as usize;
                let scale = self.receiver.detector().input().scale[lo];
                for f in &self.burst[..k] {
                    job.sample(f[lo] as f32 * scale);
                }
            }
            let mut readouts: heapless::Vec<Readout<N>, 4> = heapless::Vec::new();
            self.receiver.push_codes_block(&self.burst[..k], |r| {
                let _ = readouts.push(r);
            });
            for r in readouts.iter() {
                self.on_readout(r, out);
            }
        }
        let counts = frames.counts();
        self.receiver.note_overrun(counts.take_overruns());
        self.sup.bad_frames(counts.take_bad_frames());
        if drained > 0 {
            self.sup.good_frame(now);
        }
        // 2. The converter's health.
        if self.sup.poll(now) == Action::Reinit {
            self.restart_converter(out);
        }
        // 3. Commands.
        for &b in inp.command {
            match self.lines.push(b) {
                LineEvent::Line(l) => {
                    self.command(&l, out);
                }
                LineEvent::TooLong => out(Event::Reply("err line too long (at most 96 characters)")),
                LineEvent::NotText => out(Event::Reply("err line is not text")),
                LineEvent::None => {}
            }
        }
        // 4. Buttons.
        self.ui.tick(now);
        for p in self.buttons.update(now, inp.buttons) {
            let values = self.values();
            let action = self.ui.press(p, &values);
            self.on_action(action, false, out);
        }
        // 5. Battery.
        if let Some(code) = inp.battery_code {
            self.battery.update(now, code);
        }
        // 6. Jobs.
        self.advance_job(out);
        // 7. Screen: redraw on time, then one page per pass.
        if now >= self.next_refresh_ms {
            self.next_refresh_ms =
                if now - self.next_refresh_ms > REFRESH_MS { now + REFRESH_MS } else { self.next_refresh_ms + REFRESH_MS };
            self.page = self.current_page();
            let _ = draw(&self.page, &mut self.frame);
            self.pages_left = PAGES;
            out(Event::Screen { t_ms: now, frame: &self.frame, page: &self.page });
        }
        if self.pages_left > 0 {
            let p = PAGES - self.pages_left;
            let _ = self.panel.send_page(p, self.frame.page(p));
            self.pages_left -= 1;
        }
        let fault = matches!(self.sup.state, PathState::Fault { .. });
        let pitch_hz = if self.muted || fault { 0.0 } else { self.tone.pitch_at((now % 1_000_000) as u32) };
        Outputs { pitch_hz, fault }
    }

    fn on_readout(&mut self, r: &Readout<N>, out: &mut dyn FnMut(Event<'_, N>)) {
        out(Event::Readout(r));
        self.tone = tone_for(r);
        if let Some(g) = r.gain_request {
            let ch = g.channel as usize;
            if ch < N {
                let old = self.gains[ch];
                let new = if g.up { old.saturating_add(1).min(7) } else { old.saturating_sub(1) };
                if new != old && self.conv.set_gain(ch, new).is_ok() && self.receiver.apply_gain_change(ch, code_ratio(old, new)).is_ok() {
                    self.gains[ch] = new;
                }
            }
        }
        if let Some(job) = self.job.as_mut() {
            job.readout(r, &self.settings.head, self.settings.calibration.upper_gain);
        }
        let ctx = ViewContext {
            units: self.settings.units,
            beacon_hz: self.settings.beacon_hz,
            full_scale_db: 0.0,
            battery: self.battery.view(),
            fault: matches!(self.sup.state, PathState::Fault { .. }),
            muted: self.muted,
        };
        self.view = Some(View::from_readout(r, &ctx));
    }

    /// Re-initialise the converter with the gains the receiver's scales assume; any channel
    /// whose gain it did not take back is passed to the receiver as a gain change.
    fn restart_converter(&mut self, out: &mut dyn FnMut(Event<'_, N>)) {
        let ok = self.conv.restart(self.gains).is_ok();
        let now = self.conv.gains();
        for ch in 0..N {
            if now[ch] != self.gains[ch] && self.receiver.apply_gain_change(ch, code_ratio(self.gains[ch], now[ch])).is_ok() {
                self.gains[ch] = now[ch];
            }
        }
        out(Event::Note(if ok {
            "converter fault: re-initialised, gains restored"
        } else {
            "converter fault: re-initialisation failed, will retry"
        }));
    }

    fn values(&self) -> Values {
        Values {
            beacon_hz: self.settings.beacon_hz,
            band_hz: self.settings.bandwidth_hz,
            band_in_force_hz: self.receiver.detector_info().bandwidth_hz,
            units: self.settings.units,
            height_m: self.settings.coil_height_m,
            distance_m: self.settings.check_distance_m,
        }
    }

    fn current_page(&self) -> Page {
        match &self.ui.mode {
            Mode::Caution { .. } => Page::Caution,
            Mode::Locate => match &self.view {
                Some(v) => {
                    let mut v = v.clone();
                    // Battery, sound and fault as they are now, not as at the readout.
                    v.battery = self.battery.view();
                    v.muted = self.muted;
                    Page::Locate(v)
                }
                None => Page::Starting,
            },
            _ => {
                let progress = self.job.as_ref().map(|j| j.progress(self.hw.fs)).unwrap_or(0.0);
                self.ui.page(&self.values(), progress).map(Page::Text).unwrap_or(Page::Starting)
            }
        }
    }

    fn on_action(&mut self, a: UiAction, by_command: bool, out: &mut dyn FnMut(Event<'_, N>)) {
        match a {
            UiAction::None => {}
            UiAction::ToggleMute => self.muted = !self.muted,
            UiAction::Set(c) => {
                let r = self.change(c);
                self.reply.clear();
                match r {
                    Ok(()) => {
                        let _ = self.reply.push_str("ok set from the buttons");
                    }
                    Err(e) => {
                        let _ = self.reply.push_str("err ");
                        let _ = write_config_error(&mut self.reply, &e);
                        let _ = self.reply.push_str("; unchanged");
                        self.ui.show_result(TextPage::wrapped("Not changed", &self.reply));
                    }
                }
                out(Event::Reply(&self.reply));
            }
            UiAction::Start(kind) => {
                self.job = Some(Job::new(kind));
                self.job_by_command = by_command;
                if by_command {
                    self.ui.mode = Mode::Busy { kind };
                }
            }
            UiAction::Cancel => {
                self.job = None;
                out(Event::Reply("ok job cancelled"));
            }
            UiAction::Save => {
                self.save(out);
                self.ui.show_result(TextPage::wrapped("Save settings", &self.reply));
            }
        }
    }

    fn save(&mut self, out: &mut dyn FnMut(Event<'_, N>)) {
        self.reply.clear();
        if !self.battery.can_save() {
            let _ = self.reply.push_str("err save refused: the battery is flat (charge it; the stored settings are kept)");
        } else {
            match self.store.save(&self.settings) {
                Ok(slot) => {
                    let _ = write!(self.reply, "ok save (slot {slot})");
                }
                Err(e) => {
                    let _ = self.reply.push_str(match e {
                        StoreError::Flash => "err save failed: the flash reported an error",
                        StoreError::Verify => "err save failed: the record did not read back the same",
                        StoreError::TooSmall => "err save failed: the settings region is too small",
                        StoreError::Encode => "err save failed: the settings do not fit a record",
                    });
                }
            }
        }
        out(Event::Reply(&self.reply));
    }

    fn advance_job(&mut self, out: &mut dyn FnMut(Event<'_, N>)) {
        let Some(job) = self.job.as_mut() else { return };
        let s = &self.settings;
        let model = self.receiver.settings().locator.model;
        let Some(outcome) = job.advance(self.hw.fs, &s.head, model, s.check_distance_m, &s.calibration) else { return };
        self.job = None;
        self.reply.clear();
        let r = &mut self.reply;
        let title = match &outcome {
            Outcome::Check(c) => {
                let _ = r.push_str(if c.tone_present { "ok check: tone present, SNR " } else { "ok check: tone ABSENT, SNR " });
                let _ = write_fixed(r, c.snr_db, 1);
                let _ = r.push_str(" dB, offset ");
                let _ = write_fixed_signed(r, c.freq_offset_hz, 2);
                let _ = r.push_str(" Hz, strength x");
                let _ = write_fixed(r, c.strength_ratio, 3);
                let _ = r.push_str(" of cal");
                "Pre-job check"
            }
            Outcome::Calibration(Ok(cal)) => {
                let mut s = self.settings;
                s.calibration = *cal;
                let _ = r.push_str("ok cal: upper x");
                let _ = write_f32(r, cal.upper_gain);
                let _ = r.push_str(", strength ");
                let _ = write_f32(r, cal.strength);
                let _ = r.push_str(" +-");
                let _ = write_f32(r, cal.strength_sigma);
                let _ = r.push_str(", in use: save to keep");
                if let Err(e) = self.rebuild(s) {
                    self.reply.clear();
                    let _ = self.reply.push_str("err cal refused: ");
                    let _ = write_config_error(&mut self.reply, &e);
                }
                "Calibrate"
            }
            Outcome::Calibration(Err(e)) => {
                let _ = r.push_str("err cal: ");
                let _ = write_config_error(r, e);
                "Calibrate"
            }
            Outcome::Tones(tones) => {
                let _ = r.push_str("ok scan:");
                for (f, db) in tones.iter() {
                    let _ = r.push(' ');
                    let _ = write_fixed(r, *f, 2);
                    let _ = r.push_str(" Hz (");
                    let _ = write_fixed(r, *db, 0);
                    let _ = r.push_str(" dB)");
                }
                if tones.is_empty() {
                    let _ = r.push_str(" no tone found");
                }
                "Find beacon"
            }
        };
        out(Event::Reply(&self.reply));
        if self.job_by_command {
            self.ui.mode = Mode::Locate;
        } else if let Outcome::Tones(tones) = outcome {
            self.ui.pick(tones.iter().copied().collect());
        } else {
            self.ui.show_result(TextPage::wrapped(title, &self.reply));
        }
    }

    fn scale(&self) -> [f32; N] {
        let mut s = self.hw.unity_scale;
        for c in 0..N {
            s[c] /= code_ratio(0, self.gains[c]);
        }
        s
    }

    /// Take `s` into use. The receiver is rebuilt (and its locating state started afresh) only
    /// when its own settings change: units and the test distance are the application's, and a
    /// new calibration is handed to the running receiver.
    fn rebuild(&mut self, s: Settings<N>) -> Result<(), ConfigError> {
        let new = s.receiver_settings(self.hw.fs, self.hw.full_scale_code, self.scale());
        let mut old = *self.receiver.settings();
        old.locator.calibration = new.locator.calibration;
        if old == new {
            if s.calibration != self.settings.calibration {
                self.receiver.set_calibration(s.calibration);
            }
        } else {
            self.receiver = Receiver::new(new)?;
            self.view = None;
        }
        self.settings = s;
        Ok(())
    }

    /// Carry out a settings change (from a command or the buttons).
    pub fn change(&mut self, c: Change) -> Result<(), ConfigError> {
        let mut s = self.settings;
        match c {
            Change::Beacon(f) => s.beacon_hz = f,
            Change::Band(b) => s.bandwidth_hz = b,
            Change::Units(u) => s.units = u,
            Change::Height(h) => {
                s.coil_height_m = ConfigError::check(Param::CoilHeight, h, COIL_HEIGHT_RANGE_M.0, COIL_HEIGHT_RANGE_M.1)?;
            }
            Change::Distance(d) => {
                s.check_distance_m = ConfigError::check(Param::Distance, d, DISTANCE_RANGE_M.0, DISTANCE_RANGE_M.1)?;
            }
        }
        self.rebuild(s)
    }

    /// Handle one command line; the reply goes to `out`.
    pub fn command(&mut self, line: &str, out: &mut dyn FnMut(Event<'_, N>)) {
        self.reply.clear();
        let cmd = match parse(line) {
            Ok(c) => c,
            Err(e) => {
                let _ = write!(self.reply, "err {e}");
                out(Event::Reply(&self.reply));
                return;
            }
        };
        let coil = |i: u8| -> Result<usize, ConfigError> {
            if (i as usize) < N {
                Ok(i as usize)
            } else {
                Err(ConfigError { param: Param::Channels, value: i as f32, min: 0.0, max: (N - 1) as f32 })
            }
        };
        let mut s = self.settings;
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
                Command::Height(h) => {
                    s.coil_height_m = ConfigError::check(Param::CoilHeight, h, COIL_HEIGHT_RANGE_M.0, COIL_HEIGHT_RANGE_M.1)?;
                    "height"
                }
                Command::Distance(d) => {
                    s.check_distance_m = ConfigError::check(Param::Distance, d, DISTANCE_RANGE_M.0, DISTANCE_RANGE_M.1)?;
                    "distance"
                }
                Command::CoilPos(i, p) => {
                    let i = coil(i)?;
                    for v in p {
                        ConfigError::check(Param::CoilPosition(i as u8), v, POSITION_RANGE_M.0, POSITION_RANGE_M.1)?;
                    }
                    s.head.coils[i].pos_m = p;
                    "coil"
                }
                Command::CoilAxis(i, a) => {
                    let i = coil(i)?;
                    // Any non-zero direction is taken and normalised; the head's own check follows.
                    let n = norm(a);
                    if !(n > 0.0 && n.is_finite()) {
                        return Err(ConfigError { param: Param::CoilAxis(i as u8), value: n, min: f32::MIN_POSITIVE, max: f32::MAX });
                    }
                    s.head.coils[i].axis = unit(a);
                    "coil"
                }
                Command::CoilGain(i, g) => {
                    let i = coil(i)?;
                    s.head.coils[i].gain = ConfigError::check(Param::CoilGain(i as u8), g, GAIN_RANGE.0, GAIN_RANGE.1)?;
                    "coil"
                }
                Command::CalUpper(c) => {
                    s.calibration.upper_gain = ConfigError::check(Param::Calibration, c, UPPER_GAIN_RANGE.0, UPPER_GAIN_RANGE.1)?;
                    "cal"
                }
                Command::CalStrength(k, sg) => {
                    // A strength is a positive normal number; its σ lies between 0 and itself.
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
                Command::Save | Command::Show | Command::Help | Command::Check | Command::CalRun | Command::Scan => "",
            })
        })();
        match (cmd, change) {
            (_, Err(e)) => {
                let _ = self.reply.push_str("err ");
                let _ = write_config_error(&mut self.reply, &e);
                let _ = self.reply.push_str("; unchanged");
                out(Event::Reply(&self.reply));
            }
            (Command::Save, _) => self.save(out),
            (Command::Show, _) => {
                self.show();
                out(Event::Reply(&self.reply));
            }
            (Command::Help, _) => {
                out(Event::Reply("ok commands: freq band detector rate units height distance coil cal check scan save show defaults help"))
            }
            (Command::Check | Command::CalRun | Command::Scan, _) => {
                let kind = match cmd {
                    Command::Check => JobKind::Check,
                    Command::CalRun => JobKind::Calibrate,
                    _ => JobKind::Scan,
                };
                self.on_action(UiAction::Start(kind), true, out);
                out(Event::Reply("ok started: the result follows"));
            }
            (_, Ok(what)) => match self.rebuild(s) {
                Ok(()) => {
                    let _ = write!(self.reply, "ok {what}");
                    out(Event::Reply(&self.reply));
                }
                Err(e) => {
                    let _ = self.reply.push_str("err ");
                    let _ = write_config_error(&mut self.reply, &e);
                    let _ = self.reply.push_str("; unchanged");
                    out(Event::Reply(&self.reply));
                }
            },
        }
    }

    fn show(&mut self) {
        let s = self.settings;
        let i = *self.receiver.detector_info();
        let (kind, k) = match s.kind {
            DetectorKind::LockIn { poles } => ("lockin", poles),
            DetectorKind::Block { window } => ("block", window as u8),
        };
        let r = &mut self.reply;
        let f = |out: &mut String<REPLY>, label: &str, v: f32, unit: &str| {
            let _ = out.push_str(label);
            let _ = write_f32(out, v);
            let _ = out.push_str(unit);
        };
        f(r, "ok freq ", s.beacon_hz, " Hz");
        f(r, ", band ", i.bandwidth_hz, " Hz");
        let _ = write!(r, ", detector {kind} {k}");
        f(r, ", rate ", s.readout_hz, " Hz");
        f(r, ", settle ", i.settle_99_s, " s");
        let _ = write!(r, ", spacing {}", length(s.head.spacing_m().unwrap_or(f32::NAN), s.units).as_str());
        let _ = write!(r, ", height {}", length(s.coil_height_m, s.units).as_str());
        let _ = write!(r, ", distance {}", length(s.check_distance_m, s.units).as_str());
        f(r, ", cal upper ", s.calibration.upper_gain, "");
        f(r, " strength ", s.calibration.strength, "");
        if let Some(b) = self.battery.view() {
            let _ = r.push_str(", battery ");
            let _ = write_fixed(r, b.volts, 2);
            let _ = r.push_str(" V ");
            let _ = write_fixed(r, b.percent, 0);
            let _ = r.push('%');
        }
    }
}

/// One machine-readable line per readout (the emulator and its host twin), SI units:
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
