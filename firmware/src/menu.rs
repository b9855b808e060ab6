//! The button menu: what the three buttons do on each screen, and the pages
//! that show it. It decides nothing about locating: it turns presses into
//! [`UiAction`]s that the application carries out (the same changes the
//! command protocol makes) and draws the state it is in.
//!
//! | screen | − | OK | + |
//! |---|---|---|---|
//! | locating | short: sound on/off | short: menu | — |
//! | menu | short: up | short: choose; long: back to locating | short: down |
//! | editing a value | short: smaller (long, held: faster) | short: apply; long: cancel | short: larger (long, held: faster) |
//! | found tones | short: previous | short: use it; long: cancel | short: next |
//! | result, measuring | — | short: close; long: cancel | — |

use crate::buttons::{Button, Press};
use crate::num::{write_f32, write_fixed};
use crate::screen::TextPage;
use core::fmt::Write;
use heapless::String;
use undertone_dsp::detect::settings::{MAX_BANDWIDTH_HZ, MIN_BANDWIDTH_HZ};
use undertone_dsp::format::{length, LengthUnit};
use undertone_dsp::locate::calibration::DISTANCE_RANGE_M;
use undertone_dsp::locate::locator::COIL_HEIGHT_RANGE_M;

/// Menu items, in order.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Item {
    /// Beacon frequency: 512, 640, 8192 Hz or any other.
    Beacon,
    /// Detection bandwidth.
    Band,
    /// Metric or imperial.
    Units,
    /// Height of the lower coil above the ground.
    Height,
    /// Sonde distance for the check and the calibration.
    Distance,
    /// The pre-job check.
    Check,
    /// Measure the calibration.
    Calibrate,
    /// Look for an unknown beacon tone.
    Scan,
    /// Store the settings.
    Save,
    /// Back to the locating screen.
    Back,
}

/// The menu's items in order.
pub const ITEMS: [Item; 10] =
    [Item::Beacon, Item::Band, Item::Units, Item::Height, Item::Distance, Item::Check, Item::Calibrate, Item::Scan, Item::Save, Item::Back];

impl Item {
    /// The label shown.
    pub fn label(self) -> &'static str {
        match self {
            Item::Beacon => "Beacon",
            Item::Band => "Bandwidth",
            Item::Units => "Units",
            Item::Height => "Coil height",
            Item::Distance => "Test distance",
            Item::Check => "Pre-job check",
            Item::Calibrate => "Calibrate",
            Item::Scan => "Find beacon",
            Item::Save => "Save settings",
            Item::Back => "Back",
        }
    }
}

/// Beacon presets, Hz.
pub const BEACON_PRESETS_HZ: [f32; 3] = [512.0, 640.0, 8192.0];
/// Bandwidth choices, Hz (0: the preset's own).
pub const BANDS_HZ: [f32; 7] = [0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0];
const _: () = assert!(BANDS_HZ[1] >= MIN_BANDWIDTH_HZ && BANDS_HZ[6] <= MAX_BANDWIDTH_HZ, "bandwidth choices within the detector's range");

/// A jobs the menu can start.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum JobKind {
    /// The pre-job check.
    Check,
    /// The calibration.
    Calibrate,
    /// The frequency scan.
    Scan,
}

/// A settings change asked for (by a button or a command).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Change {
    /// Beacon, Hz.
    Beacon(f32),
    /// Bandwidth, Hz (None: the preset's).
    Band(Option<f32>),
    /// Units.
    Units(LengthUnit),
    /// Coil height above the ground, m.
    Height(f32),
    /// Check and calibration distance, m.
    Distance(f32),
}

/// What the application should do after a press.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum UiAction {
    /// Nothing.
    None,
    /// Toggle the sound.
    ToggleMute,
    /// Change a setting.
    Set(Change),
    /// Start a job.
    Start(JobKind),
    /// Cancel the job running.
    Cancel,
    /// Save the settings.
    Save,
}

/// The values the menu shows and edits.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Values {
    /// Beacon, Hz.
    pub beacon_hz: f32,
    /// Bandwidth, Hz (None: the preset's).
    pub band_hz: Option<f32>,
    /// Bandwidth in force, Hz.
    pub band_in_force_hz: f32,
    /// Units.
    pub units: LengthUnit,
    /// Coil height, m.
    pub height_m: f32,
    /// Test distance, m.
    pub distance_m: f32,
}

/// Where the menu is.
// One value inside the application; a result page is its largest state, kept by value (no allocator).
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Debug, PartialEq)]
pub enum Mode {
    /// The start-up caution, until this time (or a press).
    Caution {
        /// Shown until, ms.
        until_ms: u64,
    },
    /// The locating screen.
    Locate,
    /// The menu list.
    Menu {
        /// Selected item.
        sel: usize,
    },
    /// Editing an item's value.
    Edit {
        /// The item.
        item: Item,
        /// Its value so far (Hz, m, index or 0/1).
        value: f32,
    },
    /// A job running.
    Busy {
        /// Which.
        kind: JobKind,
    },
    /// Tones found by the scan, to pick from.
    Pick {
        /// Frequencies, Hz, and their level above the scan's mean, dB.
        tones: heapless::Vec<(f32, f32), 4>,
        /// Selected.
        sel: usize,
    },
    /// A result, until closed.
    Message(TextPage),
}

/// The menu state.
#[derive(Clone, Debug, PartialEq)]
pub struct Ui {
    /// Where it is.
    pub mode: Mode,
}

/// How long the start-up caution stays, ms.
pub const CAUTION_MS: u64 = 2000;

fn step_in(list: &[f32], v: f32, dir: i32) -> f32 {
    let i = list.iter().position(|&x| x == v).map(|i| i as i32).unwrap_or(0);
    list[(i + dir).clamp(0, list.len() as i32 - 1) as usize]
}

fn dir_of(b: Button) -> i32 {
    match b {
        Button::Minus => -1,
        Button::Plus => 1,
        Button::Ok => 0,
    }
}

impl Ui {
    /// Start with the caution.
    pub fn new(now_ms: u64) -> Self {
        Self { mode: Mode::Caution { until_ms: now_ms + CAUTION_MS } }
    }

    /// Time passes (the caution times out).
    pub fn tick(&mut self, now_ms: u64) {
        if let Mode::Caution { until_ms } = self.mode {
            if now_ms >= until_ms {
                self.mode = Mode::Locate;
            }
        }
    }

    /// A job finished: show its result.
    pub fn show_result(&mut self, page: TextPage) {
        self.mode = Mode::Message(page);
    }

    /// The scan finished: pick from these tones.
    pub fn pick(&mut self, tones: heapless::Vec<(f32, f32), 4>) {
        self.mode = Mode::Pick { tones, sel: 0 };
    }

    /// A button press.
    pub fn press(&mut self, p: Press, v: &Values) -> UiAction {
        let (button, long) = match p {
            Press::Short(b) => (b, false),
            Press::Long(b) | Press::Repeat(b) => (b, true),
        };
        let first = !matches!(p, Press::Repeat(_));
        match &mut self.mode {
            Mode::Caution { .. } => {
                self.mode = Mode::Locate;
                UiAction::None
            }
            Mode::Locate => match (button, long) {
                (Button::Ok, false) => {
                    self.mode = Mode::Menu { sel: 0 };
                    UiAction::None
                }
                (Button::Minus, false) => UiAction::ToggleMute,
                _ => UiAction::None,
            },
            Mode::Menu { sel } => match (button, long) {
                (Button::Ok, true) if first => {
                    self.mode = Mode::Locate;
                    UiAction::None
                }
                (Button::Ok, false) => {
                    let item = ITEMS[*sel];
                    let value = match item {
                        Item::Beacon => v.beacon_hz,
                        Item::Band => v.band_hz.unwrap_or(0.0),
                        Item::Units => (v.units == LengthUnit::FeetInches) as u8 as f32,
                        Item::Height => v.height_m,
                        Item::Distance => v.distance_m,
                        Item::Check | Item::Calibrate | Item::Scan => {
                            let kind = match item {
                                Item::Check => JobKind::Check,
                                Item::Calibrate => JobKind::Calibrate,
                                _ => JobKind::Scan,
                            };
                            self.mode = Mode::Busy { kind };
                            return UiAction::Start(kind);
                        }
                        Item::Save => return UiAction::Save,
                        Item::Back => {
                            self.mode = Mode::Locate;
                            return UiAction::None;
                        }
                    };
                    self.mode = Mode::Edit { item, value };
                    UiAction::None
                }
                (b, false) => {
                    *sel = (*sel as i32 + dir_of(b)).rem_euclid(ITEMS.len() as i32) as usize;
                    UiAction::None
                }
                _ => UiAction::None,
            },
            Mode::Edit { item, value } => {
                let item = *item;
                match (button, long) {
                    (Button::Ok, true) if first => {
                        self.mode = Mode::Menu { sel: ITEMS.iter().position(|&i| i == item).unwrap_or(0) };
                        UiAction::None
                    }
                    (Button::Ok, false) => {
                        let change = match item {
                            Item::Beacon => Change::Beacon(*value),
                            Item::Band => Change::Band((*value > 0.0).then_some(*value)),
                            Item::Units => Change::Units(if *value > 0.5 { LengthUnit::FeetInches } else { LengthUnit::Metres }),
                            Item::Height => Change::Height(*value),
                            _ => Change::Distance(*value),
                        };
                        self.mode = Mode::Menu { sel: ITEMS.iter().position(|&i| i == item).unwrap_or(0) };
                        UiAction::Set(change)
                    }
                    (b, _) => {
                        let d = dir_of(b);
                        *value = match item {
                            Item::Beacon if !long && BEACON_PRESETS_HZ.contains(value) => step_in(&BEACON_PRESETS_HZ, *value, d),
                            Item::Beacon => libm::roundf(*value + d as f32 * if long { 10.0 } else { 1.0 }).max(1.0),
                            Item::Band => step_in(&BANDS_HZ, *value, d),
                            Item::Units => 1.0 - *value,
                            Item::Height => {
                                let s = if long { 0.1 } else { 0.01 };
                                (libm::roundf((*value + d as f32 * s) * 100.0) / 100.0).clamp(COIL_HEIGHT_RANGE_M.0, COIL_HEIGHT_RANGE_M.1)
                            }
                            _ => {
                                let s = if long { 0.5 } else { 0.05 };
                                (libm::roundf((*value + d as f32 * s) * 100.0) / 100.0).clamp(DISTANCE_RANGE_M.0, DISTANCE_RANGE_M.1)
                            }
                        };
                        UiAction::None
                    }
                }
            }
            Mode::Busy { .. } => match (button, long) {
                (Button::Ok, true) if first => {
                    self.mode = Mode::Menu { sel: 0 };
                    UiAction::Cancel
                }
                _ => UiAction::None,
            },
            Mode::Pick { tones, sel } => match (button, long) {
                (Button::Ok, true) if first => {
                    self.mode = Mode::Menu { sel: 0 };
                    UiAction::None
                }
                (Button::Ok, false) => {
                    let f = tones.get(*sel).map(|t| t.0);
                    self.mode = Mode::Menu { sel: 0 };
                    f.map(|f| UiAction::Set(Change::Beacon(f))).unwrap_or(UiAction::None)
                }
                (b, false) => {
                    if !tones.is_empty() {
                        *sel = (*sel as i32 + dir_of(b)).clamp(0, tones.len() as i32 - 1) as usize;
                    }
                    UiAction::None
                }
                _ => UiAction::None,
            },
            Mode::Message(_) => {
                if button == Button::Ok && first {
                    self.mode = Mode::Menu { sel: 0 };
                }
                UiAction::None
            }
        }
    }

    /// The page to draw, for the modes that are not the locating screen.
    pub fn page(&self, v: &Values, progress: f32) -> Option<TextPage> {
        let mut t = TextPage::default();
        match &self.mode {
            Mode::Caution { .. } | Mode::Locate => return None,
            Mode::Menu { sel } => {
                let _ = t.title.push_str("Menu");
                // Five rows, the selection kept in view.
                let first = sel.saturating_sub(2).min(ITEMS.len() - 5);
                for (i, item) in ITEMS.iter().enumerate().skip(first).take(5) {
                    let mut r: String<21> = String::new();
                    let _ = r.push_str(item.label());
                    value_text(*item, v, &mut r);
                    let _ = t.rows.push(r);
                    if i == *sel {
                        t.selected = Some(i - first);
                    }
                }
                let _ = t.keys.push_str("- up  OK choose  + down");
            }
            Mode::Edit { item, value } => {
                let _ = t.title.push_str(item.label());
                let mut b: String<12> = String::new();
                let mut r: String<21> = String::new();
                match item {
                    Item::Beacon => {
                        let _ = write_f32(&mut b, *value);
                        let _ = b.push_str(" Hz");
                        let _ = r.push_str(if BEACON_PRESETS_HZ.contains(value) { "preset" } else { "custom (hold: 10 Hz)" });
                    }
                    Item::Band => {
                        if *value > 0.0 {
                            let _ = write_f32(&mut b, *value);
                            let _ = b.push_str(" Hz");
                        } else {
                            let _ = b.push_str("auto");
                        }
                        let _ = r.push_str("narrower: slower, deeper");
                    }
                    Item::Units => {
                        let _ = b.push_str(if *value > 0.5 { "ft in" } else { "metres" });
                    }
                    Item::Height | Item::Distance => {
                        let _ = b.push_str(length(*value, v.units).as_str());
                        let _ = r.push_str(if *item == Item::Height { "lower coil to ground" } else { "lower coil to sonde" });
                    }
                    _ => {}
                }
                t.big = Some(b);
                if !r.is_empty() {
                    let _ = t.rows.push(r);
                }
                let _ = t.keys.push_str("-/+ change  OK set");
            }
            Mode::Busy { kind } => {
                let _ = t.title.push_str(match kind {
                    JobKind::Check => "Pre-job check",
                    JobKind::Calibrate => "Calibrate",
                    JobKind::Scan => "Find beacon",
                });
                let mut r: String<21> = String::new();
                let _ = write!(r, "measuring {:>3}%", libm::roundf(progress.clamp(0.0, 1.0) * 100.0) as u32);
                let _ = t.rows.push(r);
                let mut r: String<21> = String::new();
                let _ = r.push_str(match kind {
                    JobKind::Scan => "hold near the beacon",
                    _ => "sonde below, in line",
                });
                let _ = t.rows.push(r);
                let _ = t.keys.push_str("hold OK: cancel");
            }
            Mode::Pick { tones, sel } => {
                let _ = t.title.push_str("Tones found");
                for (f, db) in tones.iter() {
                    let mut r: String<21> = String::new();
                    let _ = write_fixed(&mut r, *f, 1);
                    let _ = r.push_str(" Hz ");
                    let _ = write_fixed(&mut r, *db, 0);
                    let _ = r.push_str(" dB");
                    let _ = t.rows.push(r);
                }
                if tones.is_empty() {
                    let _ = t.rows.push(String::try_from("none").unwrap_or_default());
                } else {
                    t.selected = Some(*sel);
                }
                let _ = t.keys.push_str("-/+ pick  OK use");
            }
            Mode::Message(p) => return Some(p.clone()),
        }
        Some(t)
    }
}

fn value_text(item: Item, v: &Values, r: &mut String<21>) {
    let mut s: String<12> = String::new();
    match item {
        Item::Beacon => {
            let _ = write!(s, "{}", libm::roundf(v.beacon_hz) as u32);
        }
        Item::Band => {
            let _ = write_f32(&mut s, v.band_in_force_hz);
        }
        Item::Units => {
            let _ = s.push_str(if v.units == LengthUnit::FeetInches { "ft" } else { "m" });
        }
        Item::Height => {
            let _ = s.push_str(length(v.height_m, v.units).as_str());
        }
        Item::Distance => {
            let _ = s.push_str(length(v.distance_m, v.units).as_str());
        }
        _ => return,
    }
    // Right-align in 21 columns.
    while r.len() + s.len() < 21 {
        let _ = r.push(' ');
    }
    let _ = r.push_str(&s);
}
