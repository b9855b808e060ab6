//! The screen: a 128×64 monochrome OLED of the SSD1306 class, drawn with
//! `embedded-graphics` into any `DrawTarget<Color = BinaryColor>`: the board's
//! frame buffer ([`Frame`], streamed to the controller a page at a time), a
//! frame buffer in a test, or a GIF frame in the simulator.
//!
//! ## The locating screen (our own layout)
//! ```text
//!  y  0 ┌ 512Hz  in line  mute   [▮▮▮ ]78% ┐  status: beacon, orientation, sound, battery
//!  y  9 ├────────────────────────────────────┤
//!  y 11 │   ▲       │ -42.5 dBFS             │  guidance rose (x 0–42) │ strength, dBFS
//!       │ ◀ ○ ▶     │ [██████░░░░░░░]        │  arrows toward the point │ bar: noise floor → full scale
//!  y 43 │   ▼       │ 1.42 +-0.05 m          │  over the sonde; ● over, │ depth below ground ± σ,
//!       │           │                        │  ? unsure                │ or "-- <reason>"
//!  y 55 └ CLIPPED MAINS / walk ahead ────────┘  warnings, else what to do next
//! ```
//! Refreshed [`REFRESH_HZ`] times a second. Lengths are printed in the units
//! chosen (`undertone_dsp::format::length`).

use crate::battery::Level;
use crate::view::{hint_text, orientation_text, withheld_text, DepthLine, View};
use core::convert::Infallible;
use core::fmt::Write;
use embedded_graphics::mono_font::ascii::{FONT_10X20, FONT_5X8, FONT_6X10};
use embedded_graphics::mono_font::MonoTextStyle;
use embedded_graphics::pixelcolor::BinaryColor;
use embedded_graphics::prelude::*;
use embedded_graphics::primitives::Rectangle;
use embedded_graphics::text::{Baseline, Text};
use heapless::String;
use undertone_dsp::format::length;
use undertone_dsp::locate::guidance::{Across, Along};

/// Width, pixels.
pub const WIDTH: usize = 128;
/// Height, pixels.
pub const HEIGHT: usize = 64;
/// Screen refreshes per second.
pub const REFRESH_HZ: u32 = 10;
/// Time between refreshes, ms.
pub const REFRESH_MS: u64 = 1000 / REFRESH_HZ as u64;
/// Bytes per 8-pixel-high page (one byte per column).
pub const PAGE: usize = WIDTH;
/// Pages.
pub const PAGES: usize = HEIGHT / 8;

/// A frame buffer in the SSD1306's own order: 8 pages of 128 columns, one byte
/// per column with the top pixel in bit 0, so a page goes to the controller as it is.
#[derive(Clone, PartialEq, Eq)]
pub struct Frame {
    /// The bytes, page by page.
    pub bytes: [u8; PAGE * PAGES],
}

impl Default for Frame {
    fn default() -> Self {
        Self::new()
    }
}

impl core::fmt::Debug for Frame {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(f, "Frame({:08x})", self.checksum())
    }
}

impl Frame {
    /// A dark frame.
    pub const fn new() -> Self {
        Self { bytes: [0; PAGE * PAGES] }
    }

    /// Is pixel (x, y) lit?
    pub fn pixel(&self, x: usize, y: usize) -> bool {
        x < WIDTH && y < HEIGHT && self.bytes[(y / 8) * WIDTH + x] & (1 << (y % 8)) != 0
    }

    /// Page `p` (rows 8p to 8p+7).
    pub fn page(&self, p: usize) -> &[u8] {
        &self.bytes[p * PAGE..(p + 1) * PAGE]
    }

    /// CRC-32 of the frame (what the emulator check compares).
    pub fn checksum(&self) -> u32 {
        crate::crc::crc32(&self.bytes)
    }

    /// Lit pixels in the rectangle `[x0, x1) × [y0, y1)`.
    pub fn lit(&self, x0: usize, y0: usize, x1: usize, y1: usize) -> usize {
        (y0..y1.min(HEIGHT)).map(|y| (x0..x1.min(WIDTH)).filter(|&x| self.pixel(x, y)).count()).sum()
    }
}

impl OriginDimensions for Frame {
    fn size(&self) -> Size {
        Size::new(WIDTH as u32, HEIGHT as u32)
    }
}

impl DrawTarget for Frame {
    type Color = BinaryColor;
    type Error = Infallible;

    fn draw_iter<I: IntoIterator<Item = Pixel<BinaryColor>>>(&mut self, pixels: I) -> Result<(), Infallible> {
        for Pixel(p, c) in pixels {
            if (0..WIDTH as i32).contains(&p.x) && (0..HEIGHT as i32).contains(&p.y) {
                let i = (p.y as usize / 8) * WIDTH + p.x as usize;
                let bit = 1u8 << (p.y % 8);
                if c.is_on() {
                    self.bytes[i] |= bit;
                } else {
                    self.bytes[i] &= !bit;
                }
            }
        }
        Ok(())
    }

    fn fill_contiguous<I: IntoIterator<Item = BinaryColor>>(&mut self, area: &Rectangle, colors: I) -> Result<(), Infallible> {
        // Row by row without a `Pixel` per point (text glyphs arrive this way).
        let (x0, y0, w) = (area.top_left.x, area.top_left.y, area.size.width as i32);
        let (mut x, mut y) = (x0, y0);
        for c in colors.into_iter().take(area.size.width as usize * area.size.height as usize) {
            if (0..WIDTH as i32).contains(&x) && (0..HEIGHT as i32).contains(&y) {
                let i = (y as usize / 8) * WIDTH + x as usize;
                let bit = 1u8 << (y % 8);
                if c.is_on() {
                    self.bytes[i] |= bit;
                } else {
                    self.bytes[i] &= !bit;
                }
            }
            x += 1;
            if x == x0 + w {
                x = x0;
                y += 1;
            }
        }
        Ok(())
    }

    fn fill_solid(&mut self, area: &Rectangle, color: BinaryColor) -> Result<(), Infallible> {
        // Clipped to the screen, then set or cleared a column byte at a time.
        let x0 = area.top_left.x.clamp(0, WIDTH as i32) as usize;
        let y0 = area.top_left.y.clamp(0, HEIGHT as i32) as usize;
        let x1 = (area.top_left.x + area.size.width as i32).clamp(0, WIDTH as i32) as usize;
        let y1 = (area.top_left.y + area.size.height as i32).clamp(0, HEIGHT as i32) as usize;
        for y in y0..y1 {
            let bit = 1u8 << (y % 8);
            let row = &mut self.bytes[(y / 8) * WIDTH..(y / 8 + 1) * WIDTH];
            for b in &mut row[x0..x1] {
                if color.is_on() {
                    *b |= bit;
                } else {
                    *b &= !bit;
                }
            }
        }
        Ok(())
    }

    fn clear(&mut self, color: BinaryColor) -> Result<(), Infallible> {
        self.bytes.fill(if color.is_on() { 0xFF } else { 0 });
        Ok(())
    }
}

/// A page of text: a title, up to five rows (one of them maybe selected) and a large value.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct TextPage {
    /// Title (top line).
    pub title: String<21>,
    /// Rows.
    pub rows: heapless::Vec<String<21>, 5>,
    /// The selected row, drawn inverted.
    pub selected: Option<usize>,
    /// A large value under the title (an edited setting).
    pub big: Option<String<12>>,
    /// Key help on the bottom line.
    pub keys: String<25>,
}

impl TextPage {
    /// A result page: `text` (a reply, `ok …` or `err …`) broken into rows at spaces.
    pub fn wrapped(title: &str, text: &str) -> Self {
        let mut t = TextPage::default();
        let _ = t.title.push_str(title);
        let mut row: String<21> = String::new();
        // Words by a plain byte scan (`str::split` brought 360 bytes of searcher code into
        // the board image for this one use).
        let mut rest = text;
        while !rest.is_empty() {
            let k = rest.bytes().position(|b| b == b' ').unwrap_or(rest.len());
            let w = rest.get(..k).unwrap_or(rest);
            rest = rest.get(k + 1..).unwrap_or("");
            let w = w.get(..21).unwrap_or(w);
            if row.len() + w.len() + 1 > 21 && !row.is_empty() && t.rows.push(core::mem::take(&mut row)).is_err() {
                break;
            }
            if !row.is_empty() {
                let _ = row.push(' ');
            }
            let _ = row.push_str(w);
        }
        if !row.is_empty() {
            let _ = t.rows.push(row);
        }
        let _ = t.keys.push_str("OK: close");
        t
    }
}

/// What the screen shows.
// One value inside the application, kept by value (no allocator).
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Debug, PartialEq)]
pub enum Page {
    /// The start-up caution.
    Caution,
    /// The locating screen.
    Locate(View),
    /// Waiting for the first readout.
    Starting,
    /// A menu, an edited value, a result or a job in progress.
    Text(TextPage),
}

const ON: BinaryColor = BinaryColor::On;

fn text<D: DrawTarget<Color = BinaryColor>>(
    d: &mut D,
    s: &str,
    x: i32,
    y: i32,
    font: &'static embedded_graphics::mono_font::MonoFont<'static>,
) -> Result<(), D::Error> {
    Text::with_baseline(s, Point::new(x, y), MonoTextStyle::new(font, ON), Baseline::Top).draw(d).map(|_| ())
}

fn fill<D: DrawTarget<Color = BinaryColor>>(d: &mut D, x: i32, y: i32, w: u32, h: u32, c: BinaryColor) -> Result<(), D::Error> {
    d.fill_solid(&Rectangle::new(Point::new(x, y), Size::new(w, h)), c)
}

/// A one-pixel outline of the rectangle at (x, y), w × h.
fn frame_box<D: DrawTarget<Color = BinaryColor>>(d: &mut D, x: i32, y: i32, w: u32, h: u32) -> Result<(), D::Error> {
    fill(d, x, y, w, 1, ON)?;
    fill(d, x, y + h as i32 - 1, w, 1, ON)?;
    fill(d, x, y, 1, h, ON)?;
    fill(d, x + w as i32 - 1, y, 1, h, ON)
}

/// A horizontal rule across the screen at row `y`.
fn rule<D: DrawTarget<Color = BinaryColor>>(d: &mut D, y: i32) -> Result<(), D::Error> {
    fill(d, 0, y, WIDTH as u32, 1, ON)
}

/// A filled arrow head: apex at `tip`, `len` pixels long toward `dir` (0 up, 1 down, 2 left,
/// 3 right), base `2·half + 1` wide. Drawn as rows of rectangles (the primitives' general
/// triangle and line rasterisers cost more flash than these shapes need).
fn arrow<D: DrawTarget<Color = BinaryColor>>(d: &mut D, tip: (i32, i32), len: i32, half: i32, dir: u8) -> Result<(), D::Error> {
    for k in 0..len {
        let w = (k * half + len / 2) / len;
        let (x, y, ww, hh) = match dir {
            0 => (tip.0 - w, tip.1 + k, 2 * w + 1, 1),
            1 => (tip.0 - w, tip.1 - k, 2 * w + 1, 1),
            2 => (tip.0 + k, tip.1 - w, 1, 2 * w + 1),
            _ => (tip.0 - k, tip.1 - w, 1, 2 * w + 1),
        };
        fill(d, x, y, ww as u32, hh as u32, ON)?;
    }
    Ok(())
}

/// A disc of radius `r` centred on (cx, cy), in `c`.
fn disc<D: DrawTarget<Color = BinaryColor>>(d: &mut D, cx: i32, cy: i32, r: i32, c: BinaryColor) -> Result<(), D::Error> {
    for dy in -r..=r {
        let w = libm::sqrtf(((r * r - dy * dy) as f32).max(0.0) + 0.25) as i32;
        fill(d, cx - w, cy + dy, (2 * w + 1) as u32, 1, c)?;
    }
    Ok(())
}

/// A ring: a disc of radius `r` with the disc of radius `r − 1` cleared.
fn ring<D: DrawTarget<Color = BinaryColor>>(d: &mut D, cx: i32, cy: i32, r: i32) -> Result<(), D::Error> {
    disc(d, cx, cy, r, ON)?;
    disc(d, cx, cy, r - 1, BinaryColor::Off)
}

/// Draw `page` (the whole screen) into `d`.
pub fn draw<D: DrawTarget<Color = BinaryColor>>(page: &Page, d: &mut D) -> Result<(), D::Error> {
    d.clear(BinaryColor::Off)?;
    match page {
        Page::Caution => draw_caution(d),
        Page::Starting => {
            text(d, "Undertone", 37, 16, &FONT_6X10)?;
            text(d, "starting...", 34, 32, &FONT_6X10)
        }
        Page::Locate(v) => draw_locate(v, d),
        Page::Text(t) => draw_text(t, d),
    }
}

fn draw_caution<D: DrawTarget<Color = BinaryColor>>(d: &mut D) -> Result<(), D::Error> {
    text(d, "Undertone", 37, 0, &FONT_6X10)?;
    rule(d, 11)?;
    for (i, l) in
        ["A depth is an estimate", "with an error. Confirm", "by careful hand digging;", "call before you dig and", "follow local rules."]
            .iter()
            .enumerate()
    {
        text(d, l, 2, 14 + 10 * i as i32, &FONT_5X8)?;
    }
    Ok(())
}

fn draw_text<D: DrawTarget<Color = BinaryColor>>(t: &TextPage, d: &mut D) -> Result<(), D::Error> {
    fill(d, 0, 0, 128, 10, ON)?;
    Text::with_baseline(&t.title, Point::new(2, 0), MonoTextStyle::new(&FONT_6X10, BinaryColor::Off), Baseline::Top).draw(d)?;
    let mut y = 12;
    if let Some(b) = &t.big {
        text(d, b, 4, 14, &FONT_10X20)?;
        y = 36;
    }
    for (i, r) in t.rows.iter().enumerate() {
        if t.selected == Some(i) {
            fill(d, 0, y - 1, 128, 10, ON)?;
            Text::with_baseline(r, Point::new(2, y), MonoTextStyle::new(&FONT_6X10, BinaryColor::Off), Baseline::Top).draw(d)?;
        } else {
            text(d, r, 2, y, &FONT_6X10)?;
        }
        y += 10;
        if y > 46 {
            break;
        }
    }
    text(d, &t.keys, 0, 56, &FONT_5X8)
}

fn draw_locate<D: DrawTarget<Color = BinaryColor>>(v: &View, d: &mut D) -> Result<(), D::Error> {
    let mut s: String<32> = String::new();
    // Status line.
    let _ = write!(s, "{}Hz", libm::roundf(v.beacon_hz) as u32);
    text(d, &s, 0, 0, &FONT_5X8)?;
    text(d, orientation_text(v.orientation), 34, 0, &FONT_5X8)?;
    if v.muted {
        text(d, "mute", 72, 0, &FONT_5X8)?;
    }
    draw_battery(v, d)?;
    rule(d, 9)?;
    draw_rose(v, d)?;
    // Strength.
    s.clear();
    match v.strength_dbfs {
        Some(db) => {
            let _ = crate::num::write_fixed(&mut s, db, 1);
        }
        None => {
            let _ = s.push_str("--");
        }
    }
    text(d, &s, 48, 11, &FONT_10X20)?;
    text(d, "dBFS", 50 + 10 * s.len() as i32, 22, &FONT_5X8)?;
    frame_box(d, 48, 32, 80, 8)?;
    let w = libm::roundf(v.bar.clamp(0.0, 1.0) * 76.0) as u32;
    if w > 0 {
        fill(d, 50, 34, w, 4, ON)?;
    }
    // Depth below the ground ± σ, or why not.
    s.clear();
    match v.depth {
        DepthLine::Shown { below_ground_m, sigma_m } => {
            // "1.42 +-0.05 m" (one unit for both in metres), "4' 8\" +-0' 2\"".
            let (a, b) = (length(below_ground_m, v.units), length(sigma_m, v.units));
            let a = a.as_str().strip_suffix(" m").filter(|_| b.ends_with(" m")).unwrap_or(a.as_str());
            let _ = write!(s, "{a} +-{}", b.as_str());
            text(d, &s, 48, 43, &FONT_6X10)?;
        }
        DepthLine::Withheld(w) => {
            let _ = write!(s, "-- {}", withheld_text(w));
            text(d, &s, 48, 44, &FONT_5X8)?;
        }
    }
    // Warnings, else what to do next.
    s.clear();
    if v.warnings.is_empty() {
        let _ = s.push_str(hint_text(v.hint));
        text(d, &s, 0, 56, &FONT_5X8)
    } else {
        for w in v.warnings.iter() {
            if s.len() + w.text().len() + 1 > 25 {
                break;
            }
            if !s.is_empty() {
                let _ = s.push(' ');
            }
            let _ = s.push_str(w.text());
        }
        fill(d, 0, 55, 128, 9, ON)?;
        Text::with_baseline(&s, Point::new(1, 56), MonoTextStyle::new(&FONT_5X8, BinaryColor::Off), Baseline::Top).draw(d).map(|_| ())
    }
}

fn draw_battery<D: DrawTarget<Color = BinaryColor>>(v: &View, d: &mut D) -> Result<(), D::Error> {
    frame_box(d, 98, 1, 12, 7)?;
    fill(d, 110, 3, 1, 3, ON)?;
    let mut s: String<8> = String::new();
    match v.battery {
        Some(b) => {
            let w = libm::roundf(b.percent.clamp(0.0, 100.0) / 100.0 * 10.0) as u32;
            if w > 0 {
                fill(d, 99, 2, w, 5, ON)?;
            }
            if b.level == Level::Ok {
                let _ = write!(s, "{}%", libm::roundf(b.percent.clamp(0.0, 99.0)) as u32);
            } else {
                let _ = s.push_str("LOW");
            }
        }
        None => {
            let _ = s.push_str("--");
        }
    }
    text(d, &s, 113, 0, &FONT_5X8)
}

/// The guidance rose: arrows toward the point over the sonde, a filled disc when over it,
/// a question mark when the locator is unsure.
fn draw_rose<D: DrawTarget<Color = BinaryColor>>(v: &View, d: &mut D) -> Result<(), D::Error> {
    let (cx, cy) = (21, 31);
    if v.over() {
        ring(d, cx, cy, 13)?;
        return disc(d, cx, cy, 9, ON);
    }
    if v.along == Along::Unsure && v.across == Across::Unsure {
        return text(d, "?", cx - 5, cy - 10, &FONT_10X20);
    }
    ring(d, cx, cy, 3)?;
    match v.along {
        Along::Ahead => arrow(d, (cx, 11), 13, 9, 0)?,
        Along::Behind => arrow(d, (cx, 51), 13, 9, 1)?,
        Along::Over => {
            fill(d, cx - 7, cy - 7, 15, 2, ON)?;
            fill(d, cx - 7, cy + 6, 15, 2, ON)?;
        }
        Along::Unsure => {
            text(d, "?", cx - 2, 13, &FONT_6X10)?;
            text(d, "?", cx - 2, 40, &FONT_6X10)?;
        }
    }
    match v.across {
        Across::Left => arrow(d, (1, cy), 13, 9, 2)?,
        Across::Right => arrow(d, (41, cy), 13, 9, 3)?,
        Across::Centred => {
            fill(d, cx - 7, cy - 7, 2, 15, ON)?;
            fill(d, cx + 6, cy - 7, 2, 15, ON)?;
        }
        Across::Unsure => {
            text(d, "?", 3, cy - 5, &FONT_6X10)?;
            text(d, "?", 34, cy - 5, &FONT_6X10)?;
        }
    }
    Ok(())
}
