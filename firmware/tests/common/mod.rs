//! A host rig for the application: the very `App` the board runs, with a modelled
//! converter, a screen in RAM, settings in RAM flash, a fake clock and fake buttons.

#![allow(dead_code)]

use undertone_firmware::app::{readout_line, App, Event, Hardware, Inputs, REPLY};
use undertone_firmware::battery::BOARD_DIVIDER;
use undertone_firmware::emulated::{ModelConverter, SampleSource};
use undertone_firmware::queue::{FrameConsumer, FrameProducer};
use undertone_firmware::screen::{Frame, Page};
use undertone_firmware::settings::Settings;
use undertone_firmware::storage::{RamFlash, Store};

pub const FSC: i32 = 8_388_607;
pub const CORE_HZ: u32 = 100_000_000;

pub type Rig<S> = App<ModelConverter<S, 4>, Frame, Store<RamFlash<4096>>, 4>;

pub fn hardware(fs: f32) -> Hardware<4> {
    Hardware { fs, full_scale_code: FSC, unity_scale: [1.0 / FSC as f32; 4], ticks_per_ms: CORE_HZ / 1000, divider: BOARD_DIVIDER }
}

/// What a run saw.
#[derive(Default)]
pub struct Seen {
    pub readouts: Vec<undertone_dsp::Readout<4>>,
    pub replies: Vec<String>,
    pub notes: Vec<String>,
    pub screens: Vec<(u64, u32, Page)>,
}

impl Seen {
    pub fn take(&mut self, e: Event<'_, 4>) {
        match e {
            Event::Readout(r) => self.readouts.push(*r),
            Event::Reply(t) => self.replies.push(t.to_string()),
            Event::Note(t) => self.notes.push(t.to_string()),
            Event::Screen { t_ms, frame, page } => self.screens.push((t_ms, frame.checksum(), page.clone())),
        }
    }
}

pub fn app<S: SampleSource<4>>(source: S, fs: f32, flash: RamFlash<4096>, seen: &mut Seen) -> Rig<S> {
    app_at(source, fs, flash, seen, 0)
}

/// The application started with the tick counter at `tick0`.
pub fn app_at<S: SampleSource<4>>(source: S, fs: f32, flash: RamFlash<4096>, seen: &mut Seen, tick0: u32) -> Rig<S> {
    let store = Store::new(flash, 0, 4096).unwrap();
    App::new(hardware(fs), Settings::defaults(), ModelConverter::new(source), Frame::new(), store, tick0, &mut |e| seen.take(e)).unwrap()
}

/// The fake world around the application: the tick counter, what the person does.
pub struct World {
    /// Conversions so far.
    pub frames: u64,
    /// Frames per main-loop pass.
    pub per_pass: u32,
    /// Sample rate, Hz.
    pub fs: f32,
    /// Tick counter offset (to start near a wrap).
    pub tick0: u32,
    /// When set, conversions still happen but no frame reaches the queue (a silent converter).
    pub silent: bool,
    /// Battery voltage, V (None: no reading).
    pub battery_v: Option<f32>,
}

impl World {
    pub fn new(fs: f32) -> Self {
        Self { frames: 0, per_pass: (fs / 1000.0) as u32, fs, tick0: 0, silent: false, battery_v: Some(3.9) }
    }

    pub fn ms(&self) -> u64 {
        self.frames * 1000 / self.fs as u64
    }

    /// Run `ms` milliseconds of passes; `buttons(t_ms)` gives the button levels; `command` is
    /// typed on the first pass.
    #[allow(clippy::too_many_arguments)]
    pub fn run<S: SampleSource<4>>(
        &mut self,
        app: &mut Rig<S>,
        tx: &mut FrameProducer<'_, 4>,
        rx: &mut FrameConsumer<'_, 4>,
        ms: u64,
        buttons: &dyn Fn(u64) -> [bool; 3],
        command: &[u8],
        seen: &mut Seen,
    ) {
        let end = self.ms() + ms;
        let mut first = true;
        while self.ms() < end {
            for _ in 0..self.per_pass {
                let f = app.converter().frame();
                if !self.silent {
                    tx.push(f);
                }
                self.frames += 1;
            }
            let t = self.ms();
            let ticks = self.tick0.wrapping_add((self.frames as u128 * CORE_HZ as u128 / self.fs as u128) as u32);
            let battery_code = self.battery_v.filter(|_| t.is_multiple_of(100)).map(|v| BOARD_DIVIDER.code(v));
            let inputs = Inputs { ticks, buttons: buttons(t), battery_code, command: if first { command } else { &[] } };
            first = false;
            app.step(rx, &inputs, &mut |e| seen.take(e));
        }
    }
}

pub fn none(_: u64) -> [bool; 3] {
    [false; 3]
}

pub fn line_of(r: &undertone_dsp::Readout<4>) -> String {
    let mut s = heapless::String::<REPLY>::new();
    readout_line(r, &mut s);
    s.to_string()
}
