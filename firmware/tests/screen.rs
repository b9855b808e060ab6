//! The screen on the host: views drawn into the frame buffer and checked pixel
//! by pixel — the text where the layout puts it (compared with the same font
//! drawn alone), the guidance rose, the bar, the warnings — and the view model
//! built from real readouts of the emulated walk.

mod common;

use common::{app, none, Seen, World};
use embedded_graphics::mono_font::ascii::{FONT_10X20, FONT_5X8, FONT_6X10};
use embedded_graphics::mono_font::{MonoFont, MonoTextStyle};
use embedded_graphics::pixelcolor::BinaryColor;
use embedded_graphics::prelude::*;
use embedded_graphics::text::{Baseline, Text};
use undertone_dsp::format::LengthUnit;
use undertone_dsp::locate::depth::Withheld;
use undertone_dsp::locate::guidance::{Across, Along, Hint};
use undertone_dsp::locate::orientation::Orientation;
use undertone_firmware::battery::{BatteryView, Level};
use undertone_firmware::emulated::Synthetic;
use undertone_firmware::queue::{split, FrameQueue, PathCounts};
use undertone_firmware::screen::{draw, Frame, Page, TextPage};
use undertone_firmware::storage::RamFlash;
use undertone_firmware::view::{DepthLine, View, Warning};

fn view() -> View {
    View {
        t_s: 2.0,
        strength_dbfs: Some(-42.46),
        bar: 0.5,
        orientation: Orientation::InLine,
        along: Along::Ahead,
        across: Across::Centred,
        hint: Hint::WalkAhead,
        depth: DepthLine::Withheld(Withheld::NotOver),
        beacon_hz: 512.0,
        units: LengthUnit::Metres,
        battery: Some(BatteryView { volts: 3.9, percent: 77.6, level: Level::Ok }),
        warnings: heapless::Vec::new(),
        muted: false,
    }
}

fn drawn(v: &View) -> Frame {
    let mut f = Frame::new();
    draw(&Page::Locate(v.clone()), &mut f).unwrap();
    f
}

/// `s` in `font` at (x, y) is exactly what the frame shows in that text's box.
fn shows(f: &Frame, s: &str, x: i32, y: i32, font: &MonoFont<'_>, inverted: bool) -> bool {
    let mut alone = Frame::new();
    if inverted {
        alone.clear(BinaryColor::On).unwrap();
    }
    let colour = if inverted { BinaryColor::Off } else { BinaryColor::On };
    Text::with_baseline(s, Point::new(x, y), MonoTextStyle::new(font, colour), Baseline::Top).draw(&mut alone).unwrap();
    let (w, h) = (font.character_size.width as i32 * s.len() as i32, font.character_size.height as i32);
    (y..y + h).all(|py| (x..x + w).all(|px| f.pixel(px as usize, py as usize) == alone.pixel(px as usize, py as usize)))
}

#[test]
fn strength_bar_status_and_hint_where_the_layout_puts_them() {
    let f = drawn(&view());
    assert!(shows(&f, "-42.5", 48, 11, &FONT_10X20, false));
    assert!(shows(&f, "dBFS", 100, 22, &FONT_5X8, false));
    assert!(shows(&f, "512Hz", 0, 0, &FONT_5X8, false));
    assert!(shows(&f, "in line", 34, 0, &FONT_5X8, false));
    assert!(shows(&f, "78%", 113, 0, &FONT_5X8, false));
    assert!(shows(&f, "-- not over", 48, 44, &FONT_5X8, false));
    assert!(shows(&f, "walk ahead", 0, 56, &FONT_5X8, false));
    // The bar: half of its 76-pixel interior, 4 rows high.
    assert_eq!(f.lit(50, 34, 126, 38), 38 * 4);
    assert_eq!(f.lit(88, 34, 126, 38), 0);
    // The battery gauge: 78 % of 10 columns, 5 rows.
    assert_eq!(f.lit(99, 2, 109, 7), 8 * 5);
}

#[test]
fn the_rose_points_the_way_and_says_over_or_unsure() {
    let mut v = view();
    let ahead = drawn(&v);
    // An arrow head above the centre, none below; across centred: two bars beside the centre.
    let (top, bottom) = ((17, 11, 26, 24), (17, 39, 26, 52));
    let lit = |f: &Frame, r: (usize, usize, usize, usize)| f.lit(r.0, r.1, r.2, r.3);
    assert!(lit(&ahead, top) > 60);
    assert_eq!(lit(&ahead, bottom), 0);
    assert!(ahead.pixel(14, 31) && ahead.pixel(27, 31) && !ahead.pixel(14, 39));
    assert!(!ahead.pixel(21, 31), "the centre ring is hollow");
    v.along = Along::Behind;
    v.across = Across::Left;
    let behind = drawn(&v);
    assert_eq!(lit(&behind, top), 0);
    assert!(lit(&behind, bottom) > 60);
    assert!(behind.lit(1, 24, 11, 39) > 60, "arrow to the left");
    assert_eq!(behind.lit(31, 24, 41, 39), 0);
    v.along = Along::Over;
    v.across = Across::Centred;
    v.depth = DepthLine::Shown { below_ground_m: 1.42, sigma_m: 0.05 };
    let over = drawn(&v);
    // A filled disc of radius 9 inside a ring of radius 13, closed all round.
    assert!(over.pixel(21, 31) && over.pixel(21, 23) && over.pixel(29, 31) && !over.pixel(31, 31));
    assert!(over.pixel(34, 31) && over.pixel(8, 31) && over.pixel(21, 18) && over.pixel(21, 44));
    for k in 0..72 {
        let a = k as f32 * std::f32::consts::TAU / 72.0;
        let (x, y) = (21.0 + 12.7 * a.cos(), 31.0 + 12.7 * a.sin());
        let near = (-1..=1).any(|dx| (-1..=1).any(|dy| over.pixel((x.round() as i32 + dx) as usize, (y.round() as i32 + dy) as usize)));
        assert!(near, "ring gap at {k}");
    }
    assert!(shows(&over, "1.42 +-0.05 m", 48, 43, &FONT_6X10, false));
    v.along = Along::Unsure;
    v.across = Across::Unsure;
    let unsure = drawn(&v);
    assert!(shows(&unsure, "?", 16, 21, &FONT_10X20, false));
    assert_ne!(ahead.checksum(), over.checksum());
    assert_eq!(
        over.checksum(),
        drawn(&{
            let mut w = view();
            w.along = Along::Over;
            w.across = Across::Centred;
            w.depth = DepthLine::Shown { below_ground_m: 1.42, sigma_m: 0.05 };
            w
        })
        .checksum()
    );
}

#[test]
fn imperial_depth_warnings_and_no_signal() {
    let mut v = view();
    v.units = LengthUnit::FeetInches;
    v.depth = DepthLine::Shown { below_ground_m: 1.42, sigma_m: 0.05 };
    v.warnings.push(Warning::Clipped).unwrap();
    v.warnings.push(Warning::Mains).unwrap();
    v.strength_dbfs = None;
    v.battery = Some(BatteryView { volts: 3.4, percent: 4.0, level: Level::Low });
    let f = drawn(&v);
    // 1.42 m = 55.9 in: 4' 8"; 0.05 m = 2.0 in.
    assert!(shows(&f, "4' 8\" +-0' 2\"", 48, 43, &FONT_6X10, false));
    // Warnings replace the hint, in an inverted band.
    assert!(shows(&f, "CLIPPED MAINS", 1, 56, &FONT_5X8, true));
    assert!(shows(&f, "--", 48, 11, &FONT_10X20, false));
    assert!(shows(&f, "LOW", 113, 0, &FONT_5X8, false));
}

#[test]
fn caution_and_text_pages() {
    let mut f = Frame::new();
    draw(&Page::Caution, &mut f).unwrap();
    assert!(shows(&f, "A depth is an estimate", 2, 14, &FONT_5X8, false));
    assert!(shows(&f, "by careful hand digging;", 2, 34, &FONT_5X8, false));
    let t = TextPage::wrapped("Save settings", "err save refused: the battery is flat (charge it; the stored settings are kept)");
    assert_eq!(t.rows[0].as_str(), "err save refused: the");
    draw(&Page::Text(t), &mut f).unwrap();
    assert!(shows(&f, "Save settings", 2, 0, &FONT_6X10, true));
    assert!(shows(&f, "err save refused: the", 2, 12, &FONT_6X10, false));
}

#[test]
fn the_view_of_the_emulated_walk_says_what_the_readouts_say() {
    // The reference head walked in along a level sonde 1.2 m down, then standing over it.
    let fs = 16_000.0;
    let mut seen = Seen::default();
    let mut a = app(Synthetic::<4>::walking(512.0, fs, 1.2, -1.5, 0.5, 2_097_152.0, 3000), fs, RamFlash::new(), &mut seen);
    let mut q: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    World::new(fs).run(&mut a, &mut tx, &mut rx, 6_000, &none, b"", &mut seen);
    // Ten refreshes a second: the first pass, then every 100 ms.
    assert_eq!(seen.screens.len(), 61);
    assert!(seen.screens.iter().enumerate().skip(1).all(|(i, s)| s.0 == 100 * i as u64));
    let mut kinds = [false; 3];
    for (t_ms, _, page) in &seen.screens {
        let Page::Locate(v) = page else { continue };
        // The newest readout shown by then.
        let r = seen.readouts.iter().rev().find(|r| (r.sample_index as f64 / fs as f64) * 1000.0 <= *t_ms as f64).unwrap();
        assert_eq!((v.along, v.across), (r.guidance.along, r.guidance.across));
        match (v.depth, r.depth) {
            (DepthLine::Shown { below_ground_m, sigma_m }, Some(d)) => {
                assert_eq!((below_ground_m, sigma_m), (d.below_ground_m, d.depth.sigma_m));
                kinds[2] = true;
            }
            (DepthLine::Withheld(w), None) => assert_eq!(Err(w), r.gradient.map(|_| ())),
            other => panic!("{other:?}"),
        }
        kinds[0] |= v.along == Along::Ahead;
        kinds[1] |= v.over();
    }
    assert_eq!(kinds, [true; 3], "walking, over and a depth were all shown");
}
