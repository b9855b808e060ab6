//! An emulated converter and the emulation run shared by the emulator image
//! and its host twin: the very [`App`] the board runs, fed through the same
//! driver, queue and interrupt work, with a screen in RAM.
//!
//! [`FakeAdc`] stands in for the converter on the SPI side: it answers the same
//! command words, keeps the registers the driver writes, applies the PGA gains
//! and sends frames with the CRC the driver checks, so the board's driver path
//! (driver → queue → application core) runs unchanged. [`Synthetic`] makes the
//! codes: a tone on each coil with the amplitudes a level dipole gives the
//! reference head (Griffiths eq. 5.89 via `undertone-dsp`), plus integer noise.
//! Everything is integer or IEEE-754 single precision with software `libm`, so
//! the host and the Cortex-M4F compute the same numbers.

use crate::ads131::{cmd, get_word, read_into, Ads131, Osr, MAX_FRAME, WORD};
use crate::app::{readout_line, App, Event, Hardware, Inputs, Shared, REPLY};
use crate::battery::BOARD_DIVIDER;
use crate::crc::crc16;
use crate::queue::{split, FrameQueue, PathCounts};
use crate::screen::{Frame, Page};
use crate::settings::Settings;
use crate::storage::{RamFlash, Store};
use core::cell::{Cell, RefCell};
use core::convert::Infallible;
use core::fmt::Write;
use critical_section::Mutex;
use embedded_hal::spi::{Operation, SpiDevice};
use heapless::String;
use undertone_dsp::field::Source;
use undertone_dsp::Head;

/// Source of one conversion per call.
pub trait SampleSource<const N: usize> {
    /// The next conversion, codes at gain ×1.
    fn next(&mut self) -> [i32; N];
}

/// A tone on every coil plus noise, deterministic; optionally a receiver walking
/// along the sonde axis into the point over it ([`Synthetic::walking`]).
pub struct Synthetic<const N: usize> {
    amp: [f32; N],
    phase: u32,
    step: u32,
    lcg: u32,
    noise: i32,
    walk: Option<Walk>,
    n: u32,
}

/// A walk along a level sonde's axis (the 4-coil reference head, handle along the axis).
#[derive(Clone, Copy, Debug)]
struct Walk {
    depth_m: f32,
    start_m: f32,
    speed_m_per_sample: f32,
    peak_code: f32,
    every: u32,
}

impl<const N: usize> Synthetic<N> {
    /// Tone `f_hz` at `fs`, amplitudes in codes, uniform noise of ±`noise` codes (sum of two).
    pub fn new(f_hz: f32, fs: f32, amp: [f32; N], noise: i32) -> Self {
        let step = ((f_hz as f64 / fs as f64) * 4_294_967_296.0) as u32;
        Self { amp, phase: 0x1234_5678, step, lcg: 0x2545_F491, noise, walk: None, n: 0 }
    }

    /// A receiver starting `start_m` (negative: before the point over the sonde) along a level
    /// sonde's axis at `depth_m`, walking at `speed_m_s` to the point over it and standing
    /// there; the strongest coil over the sonde at `peak_code`. The geometry is updated every
    /// millisecond (Griffiths eq. 5.89 through `undertone-dsp`'s field model, f32 throughout).
    pub fn walking(f_hz: f32, fs: f32, depth_m: f32, start_m: f32, speed_m_s: f32, peak_code: f32, noise: i32) -> Self {
        let mut s = Self::new(f_hz, fs, [0.0; N], noise);
        s.walk = Some(Walk {
            depth_m,
            start_m,
            speed_m_per_sample: speed_m_s / fs,
            peak_code,
            every: libm::roundf(fs / 1000.0).max(1.0) as u32,
        });
        s.amp = s.walk_amplitudes(0);
        s
    }

    fn walk_amplitudes(&self, n: u32) -> [f32; N] {
        let Some(w) = self.walk else { return self.amp };
        let x = (w.start_m + w.speed_m_per_sample * n as f32).min(0.0);
        let r = reference_readings(w.depth_m, x);
        let over = reference_readings(w.depth_m, 0.0);
        let peak = over.iter().fold(0.0f32, |m, v| m.max(libm::fabsf(*v)));
        let mut a = [0.0; N];
        for c in 0..N.min(4) {
            a[c] = r[c] / peak * w.peak_code;
        }
        a
    }

    fn rand(&mut self) -> i32 {
        // Numerical Recipes' 32-bit LCG (Press et al., 2nd ed., §7.1).
        self.lcg = self.lcg.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        let r = (self.lcg >> 8) as i32 % (self.noise.max(1) + 1);
        r * 2 - self.noise
    }
}

/// Readings of the reference head `x` m past a level unit sonde `depth_m` below (axis along the handle).
fn reference_readings(depth_m: f32, x: f32) -> [f32; 4] {
    let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [-x, 0.0, -depth_m] };
    Head::reference4().readings(&src, [0.0; 3], 0.0)
}

impl<const N: usize> SampleSource<N> for Synthetic<N> {
    fn next(&mut self) -> [i32; N] {
        if let Some(w) = self.walk {
            if self.n.is_multiple_of(w.every) {
                self.amp = self.walk_amplitudes(self.n);
            }
        }
        self.n = self.n.wrapping_add(1);
        let s = undertone_dsp::trigf::sinf(self.phase as f32 * (core::f32::consts::TAU / 4_294_967_296.0));
        self.phase = self.phase.wrapping_add(self.step);
        let mut out = [0i32; N];
        for c in 0..N {
            let n = (self.rand() + self.rand()) / 2;
            out[c] = libm::roundf(self.amp[c] * s) as i32 + n;
        }
        out
    }
}

/// The converter's side of the bus.
pub struct FakeAdc<'a, S, const N: usize> {
    source: S,
    ready: &'a Cell<bool>,
    current: [i32; N],
    regs: [u16; 64],
    pending: u16,
    /// Every k-th frame gets one bit flipped after its CRC (0: never).
    pub corrupt_every: u32,
    /// Frames served.
    pub frames: u32,
}

/// The data-ready line the fake converter drives.
pub struct FakeDrdy<'a>(pub &'a Cell<bool>);

impl embedded_hal::digital::ErrorType for FakeDrdy<'_> {
    type Error = Infallible;
}

impl embedded_hal::digital::InputPin for FakeDrdy<'_> {
    fn is_high(&mut self) -> Result<bool, Infallible> {
        Ok(!self.0.get())
    }
    fn is_low(&mut self) -> Result<bool, Infallible> {
        Ok(self.0.get())
    }
}

/// A delay that returns at once (the emulation has no real time).
pub struct NoWait;

impl embedded_hal::delay::DelayNs for NoWait {
    fn delay_ns(&mut self, _ns: u32) {}
}

impl<'a, S: SampleSource<N>, const N: usize> FakeAdc<'a, S, N> {
    /// A converter fed by `source`, driving `ready` (true = data ready).
    pub fn new(source: S, ready: &'a Cell<bool>) -> Self {
        Self { source, ready, current: [0; N], regs: [0; 64], pending: 0, corrupt_every: 0, frames: 0 }
    }

    /// A conversion completes: new data, data-ready asserted.
    pub fn convert(&mut self) {
        self.current = self.source.next();
        self.ready.set(true);
    }

    fn serve(&mut self, buf: &mut [u8]) {
        let command = get_word(buf, 0);
        let data = if buf.len() >= 2 * WORD { get_word(buf, 1) } else { 0 };
        let mut out = [0u8; MAX_FRAME];
        let put = |out: &mut [u8; MAX_FRAME], i: usize, v: u32| {
            out[i * WORD] = (v >> 16) as u8;
            out[i * WORD + 1] = (v >> 8) as u8;
            out[i * WORD + 2] = v as u8;
        };
        put(&mut out, 0, (self.pending as u32) << 8);
        let gains = [self.regs[4], self.regs[5]];
        for c in 0..N {
            let g = (gains[c / 4] >> ((c % 4) * 4)) & 7;
            let v = (self.current[c] as i64) << g;
            let v = v.clamp(-(1 << 23), (1 << 23) - 1) as i32;
            put(&mut out, c + 1, (v as u32) & 0xFF_FFFF);
        }
        let crc = crc16(&out[..(N + 1) * WORD]);
        put(&mut out, N + 1, (crc as u32) << 8);
        self.frames += 1;
        if self.corrupt_every > 0 && self.frames.is_multiple_of(self.corrupt_every) {
            out[WORD + 1] ^= 0x10;
        }
        let n = buf.len().min((N + 2) * WORD);
        buf[..n].copy_from_slice(&out[..n]);
        self.ready.set(false);
        // The answer to this frame's command comes with the next frame.
        self.pending = match command & 0xE000 {
            _ if command == cmd::RESET => {
                self.regs = [0; 64];
                self.regs[2] = 0x0510;
                0xFF20 | N as u16
            }
            0xA000 => self.regs[((command >> 7) & 0x3F) as usize],
            0x6000 => {
                let addr = ((command >> 7) & 0x3F) as usize;
                self.regs[addr] = data;
                0x4000 | ((addr as u16) << 7)
            }
            _ => 0x0500 | ((1 << N.min(8)) - 1) as u16,
        };
    }
}

impl<S, const N: usize> embedded_hal::spi::ErrorType for FakeAdc<'_, S, N> {
    type Error = Infallible;
}

impl<S: SampleSource<N>, const N: usize> SpiDevice<u8> for FakeAdc<'_, S, N> {
    fn transaction(&mut self, ops: &mut [Operation<'_, u8>]) -> Result<(), Infallible> {
        for op in ops {
            if let Operation::TransferInPlace(buf) = op {
                self.serve(buf);
            }
        }
        Ok(())
    }
}

/// What an emulation run measured.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct EmuReport {
    /// Frames converted.
    pub frames: u32,
    /// Readouts produced.
    pub readouts: u32,
    /// Screen refreshes.
    pub screens: u32,
    /// Clock units spent in the application's step (everything the main loop does).
    pub app_clock: u64,
    /// Clock units spent in the interrupt work (driver reading frames into the queue).
    pub isr_clock: u64,
    /// Gain steps carried out.
    pub gain_steps: u32,
    /// Frames rejected by the driver.
    pub rejected: u32,
}

/// Conversions the emulator image runs: 6 s at 16 kSPS (a 3 s walk into the point over
/// the sonde, then standing there).
pub const EMU_FRAMES: u32 = 96_000;
/// Where the emulated walk starts, m along the axis before the point over the sonde.
pub const EMU_START_M: f32 = -1.5;
/// Walking speed of the emulated receiver, m/s.
pub const EMU_SPEED_M_S: f32 = 0.5;
/// Sample rate of the emulation, Hz.
pub const EMU_OSR: Osr = Osr::R256;
/// Depth of the sonde below the lower coil in the emulation, m.
pub const EMU_DEPTH_M: f32 = 1.2;
/// Conversions completed between two passes of the main loop (1 ms at 16 kSPS).
pub const EMU_FRAMES_PER_PASS: u32 = 16;
/// The emulated board's core clock, Hz: the tick counter the application reads.
pub const EMU_CORE_HZ: u32 = 100_000_000;
/// Battery voltage of the emulated board, V.
pub const EMU_BATTERY_V: f32 = 3.9;

/// Coil amplitudes (codes) of a level 512 Hz sonde `EMU_DEPTH_M` below the reference head,
/// strongest coil at a quarter of full scale.
pub fn emu_amplitudes() -> [f32; 4] {
    let head = Head::reference4();
    let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.0, 0.0, -EMU_DEPTH_M] };
    let r = head.readings(&src, [0.0; 3], 0.0);
    let peak = r.iter().fold(0.0f32, |m, v| m.max(libm::fabsf(*v)));
    let mut a = [0.0; 4];
    for c in 0..4 {
        a[c] = r[c] / peak * 2_097_152.0;
    }
    a
}

/// Button levels (− OK +) the emulated person presses at `t_ms`: after the walk, open the
/// menu, step down once, come back (so the menu is drawn and compared too).
pub fn emu_buttons(t_ms: u64) -> [bool; 3] {
    let ok = (4_600..4_700).contains(&t_ms) || (5_000..6_000).contains(&t_ms);
    let plus = (4_800..4_900).contains(&t_ms);
    [false, ok, plus]
}

/// Commands typed at start-up, through the same parser the RTT channel feeds.
pub const EMU_COMMANDS: &[u8] = b"rate 20\nfreq 99999\ncal strength 1e-40\ncoil 3 pos 0 0 -0.4\nheight 0.1\nsave\nshow\n";

/// One line describing a screen refresh: `S <t_ms> <checksum> <what>`, where `what` is
/// `locate <along> <across> <depth|-->`, `caution`, `starting` or `text <title>`.
pub fn screen_line(t_ms: u64, checksum: u32, page: &Page, out: &mut String<REPLY>) {
    out.clear();
    let _ = write!(out, "S {t_ms} {checksum:08x} ");
    let _ = match page {
        Page::Caution => write!(out, "caution"),
        Page::Starting => write!(out, "starting"),
        Page::Locate(v) => write!(
            out,
            "locate {} {} {}",
            v.along.name(),
            v.across.name(),
            match v.depth {
                crate::view::DepthLine::Shown { .. } => "depth",
                crate::view::DepthLine::Withheld(w) => w.name(),
            }
        ),
        Page::Text(t) => write!(out, "text {}", t.title.as_str()),
    };
}

/// Run the emulation for `frames` conversions. `clock` reads a free-running
/// counter (instructions on the target, anything on the host); `out` receives
/// each line to print.
pub fn run(frames: u32, clock: &mut dyn FnMut() -> u64, out: &mut dyn FnMut(&str)) -> EmuReport {
    let mut rep = EmuReport::default();
    let mut line: String<REPLY> = String::new();
    let fs = EMU_OSR.rate_hz();
    let ready = Cell::new(false);
    let mut fake = FakeAdc::new(Synthetic::<4>::walking(512.0, fs, EMU_DEPTH_M, EMU_START_M, EMU_SPEED_M_S, 2_097_152.0, 3000), &ready);
    fake.corrupt_every = 997;
    let mut adc: Ads131<_, _, _, 4> = Ads131::new(&mut fake, FakeDrdy(&ready), NoWait);
    if adc.init(EMU_OSR, [0; 4]).is_err() {
        out("E converter did not initialise");
        return rep;
    }
    let adc = Mutex::new(RefCell::new(Some(adc)));
    let mut queue: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut queue, &counts);
    let store = match Store::new(RamFlash::<4096>::new(), 0, 4096) {
        Ok(s) => s,
        Err(_) => return rep,
    };
    let fsc = 8_388_607;
    let hw =
        Hardware { fs, full_scale_code: fsc, unity_scale: [1.0 / fsc as f32; 4], ticks_per_ms: EMU_CORE_HZ / 1000, divider: BOARD_DIVIDER };
    let ticks_per_frame = (EMU_CORE_HZ as f32 / fs) as u32;
    let mut print = |e: Event<'_, 4>, rep: &mut EmuReport, line: &mut String<REPLY>| {
        match e {
            Event::Readout(r) => {
                rep.readouts += 1;
                readout_line(r, line);
            }
            Event::Reply(t) => {
                line.clear();
                let _ = write!(line, "C {t}");
            }
            Event::Note(t) => {
                line.clear();
                let _ = write!(line, "I {t}");
            }
            Event::Screen { t_ms, frame, page } => {
                rep.screens += 1;
                screen_line(t_ms, frame.checksum(), page, line);
            }
        }
        out(line);
    };
    let mut app = match App::new(hw, Settings::defaults(), Shared(&adc), Frame::new(), store, 0, &mut |e| print(e, &mut rep, &mut line)) {
        Ok(a) => a,
        Err(_) => {
            out("E factory settings do not build");
            return rep;
        }
    };
    let mut done = 0;
    let mut passes = 0u64;
    let battery = BOARD_DIVIDER.code(EMU_BATTERY_V);
    while done < frames {
        // Conversions complete; on the board the data-ready interrupt runs after each.
        for _ in 0..EMU_FRAMES_PER_PASS.min(frames - done) {
            let t0 = clock();
            critical_section::with(|cs| {
                if let Some(a) = adc.borrow_ref_mut(cs).as_mut() {
                    a.with_spi(|s| s.convert());
                    if a.data_ready().unwrap_or(false) {
                        read_into(a, &mut tx);
                    }
                }
            });
            rep.isr_clock += clock().wrapping_sub(t0);
            done += 1;
        }
        let ticks = (done as u64 * ticks_per_frame as u64) as u32;
        let t_ms = done as u64 * 1000 / fs as u64;
        let inputs = Inputs {
            ticks,
            buttons: emu_buttons(t_ms),
            battery_code: passes.is_multiple_of(100).then_some(battery),
            command: if passes == 0 { EMU_COMMANDS } else { &[] },
        };
        let before = app.gains();
        let t0 = clock();
        app.step(&mut rx, &inputs, &mut |e| print(e, &mut rep, &mut line));
        rep.app_clock += clock().wrapping_sub(t0);
        rep.gain_steps += before.iter().zip(app.gains().iter()).filter(|(a, b)| a != b).count() as u32;
        passes += 1;
    }
    rep.frames = done;
    rep.rejected = critical_section::with(|cs| adc.borrow_ref(cs).as_ref().map(|a| a.stats.crc_errors).unwrap_or(0));
    // The screen as the panel holds it must be the frame last drawn.
    if app.panel() != app.frame() {
        out("E the panel does not hold the last frame drawn");
    }
    rep
}

/// A converter modelled without its bus, for host tests of the application: it
/// makes frames from a [`SampleSource`] with its PGA gains applied (clamped to 24
/// bits), and its restarts can be made to fail or to come back at gain ×1.
pub struct ModelConverter<S, const N: usize> {
    source: S,
    gains: [u8; N],
    /// Restarts so far.
    pub restarts: u32,
    /// Gain changes so far.
    pub gain_changes: u32,
    /// Restarts reset the converter but do not take the gains back (as a part that
    /// answered the reset and then failed the gain write).
    pub restart_loses_gains: bool,
}

impl<S: SampleSource<N>, const N: usize> ModelConverter<S, N> {
    /// A converter fed by `source`, at gain ×1.
    pub fn new(source: S) -> Self {
        Self { source, gains: [0; N], restarts: 0, gain_changes: 0, restart_loses_gains: false }
    }

    /// The next conversion, as the converter sends it (gains applied).
    pub fn frame(&mut self) -> [i32; N] {
        let x = self.source.next();
        let mut out = [0i32; N];
        for c in 0..N {
            out[c] = ((x[c] as i64) << self.gains[c]).clamp(-(1 << 23), (1 << 23) - 1) as i32;
        }
        out
    }
}

impl<S, const N: usize> crate::app::Converter<N> for ModelConverter<S, N> {
    fn restart(&mut self, gains: [u8; N]) -> Result<(), crate::ads131::AdcError> {
        self.restarts += 1;
        if self.restart_loses_gains {
            self.gains = [0; N];
            return Err(crate::ads131::AdcError::Timeout);
        }
        self.gains = gains;
        Ok(())
    }
    fn set_gain(&mut self, channel: usize, code: u8) -> Result<(), crate::ads131::AdcError> {
        if channel >= N || code > 7 {
            return Err(crate::ads131::AdcError::BadGain { channel: channel as u8, code });
        }
        self.gains[channel] = code;
        self.gain_changes += 1;
        Ok(())
    }
    fn gains(&mut self) -> [u8; N] {
        self.gains
    }
}
