//! The settings protocol: every line gets an answer, bad values leave the old
//! setting in force, and no input makes the parser panic or overflow.

use proptest::prelude::*;
mod common;

use common::{Rig, Seen};
use undertone_firmware::app::REPLY;
use undertone_firmware::emulated::{emu_amplitudes, Synthetic};
use undertone_firmware::protocol::{parse, Command, LineBuffer, LineEvent, ParseError, MAX_LINE};
use undertone_firmware::storage::RamFlash;

fn app() -> Rig<Synthetic<4>> {
    common::app(Synthetic::new(512.0, 16_000.0, emu_amplitudes(), 100), 16_000.0, RamFlash::new(), &mut Seen::default())
}

/// The reply to a line (and whether it saved: the store's log grows).
fn say(a: &mut Rig<Synthetic<4>>, line: &str) -> (String, bool) {
    let mut seen = Seen::default();
    a.command(line, &mut |e| seen.take(e));
    let r = seen.replies.pop().unwrap_or_default();
    let saved = r.starts_with("ok save");
    (r, saved)
}

#[test]
fn commands_parse() {
    assert_eq!(parse("freq 640"), Ok(Command::Freq(640.0)));
    assert_eq!(parse("  band   auto "), Ok(Command::Band(None)));
    assert_eq!(parse("detector lockin 3"), Ok(Command::LockIn(3)));
    assert_eq!(parse("detector block bh4"), Ok(Command::Block(2)));
    assert_eq!(parse("coil 3 pos 0 0 0.4"), Ok(Command::CoilPos(3, [0.0, 0.0, 0.4])));
    assert_eq!(parse("cal strength 2.5e-8 1e-10"), Ok(Command::CalStrength(2.5e-8, 1e-10)));
    assert_eq!(parse("units imperial"), Ok(Command::Imperial(true)));
    assert_eq!(parse("height 0.25"), Ok(Command::Height(0.25)));
    assert_eq!(parse("distance 1.5"), Ok(Command::Distance(1.5)));
    assert_eq!(parse("cal run"), Ok(Command::CalRun));
    assert_eq!(parse("check"), Ok(Command::Check));
    assert_eq!(parse("scan"), Ok(Command::Scan));
    assert_eq!(parse("frob"), Err(ParseError::Unknown("frob")));
    assert_eq!(parse("freq abc"), Err(ParseError::NotANumber("abc")));
    assert_eq!(parse("freq"), Err(ParseError::Missing("frequency in Hz")));
    assert_eq!(parse("freq 512 now"), Err(ParseError::Extra("now")));
    assert_eq!(parse("freq NaN"), Err(ParseError::NotANumber("NaN")));
    assert_eq!(parse("units cubits"), Err(ParseError::BadWord { given: "cubits", allowed: "metric, imperial" }));
}

#[test]
fn refused_values_leave_old_settings_in_force() {
    let mut a = app();
    assert_eq!(say(&mut a, "freq 640").0, "ok freq");
    assert_eq!(a.settings().beacon_hz, 640.0);
    // 0.45 × 16 kHz = 7.2 kHz is the highest tone this sample rate allows.
    let (r, _) = say(&mut a, "freq 8192");
    assert!(r.starts_with("err beacon frequency 8192 Hz is not allowed"), "{r}");
    assert!(r.ends_with("unchanged"), "{r}");
    assert_eq!(a.settings().beacon_hz, 640.0);
    let (r, _) = say(&mut a, "band 500");
    assert!(r.starts_with("err detection bandwidth 500 Hz"), "{r}");
    let (r, _) = say(&mut a, "detector lockin 9");
    assert!(r.starts_with("err low-pass poles 9"), "{r}");
    let (r, _) = say(&mut a, "coil 7 gain 2");
    assert!(r.starts_with("err channel count 7"), "{r}");
    let (r, _) = say(&mut a, "coil 1 axis 0 0 0");
    assert!(r.starts_with("err coil 1 axis length 0"), "{r}");
    let (r, _) = say(&mut a, "cal upper 3");
    assert!(r.starts_with("err calibration input 3"), "{r}");
    assert_eq!(say(&mut a, "cal upper 1.02").0, "ok cal");
    assert_eq!(a.settings().calibration.upper_gain, 1.02);
    assert_eq!(say(&mut a, "save"), ("ok save (slot 0)".to_string(), true));
    assert!(say(&mut a, "show").0.starts_with("ok freq 640 Hz"));
    assert_eq!(say(&mut a, "defaults").0, "ok defaults");
    assert_eq!(a.settings().beacon_hz, 512.0);
    assert!(say(&mut a, "").0.starts_with("err empty line"));
}

#[test]
fn line_buffer_limits() {
    let mut lb = LineBuffer::new();
    for b in b"freq 640" {
        assert_eq!(lb.push(*b), LineEvent::None);
    }
    match lb.push(b'\n') {
        LineEvent::Line(l) => assert_eq!(l.as_str(), "freq 640"),
        e => panic!("{e:?}"),
    }
    for _ in 0..MAX_LINE + 10 {
        lb.push(b'x');
    }
    assert_eq!(lb.push(b'\r'), LineEvent::TooLong);
    lb.push(0xFF);
    assert_eq!(lb.push(b'\n'), LineEvent::NotText);
    assert_eq!(lb.push(b'\n'), LineEvent::None);
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, .. ProptestConfig::default() })]

    #[test]
    fn any_bytes_never_panic_and_every_line_is_answered(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        let mut a = app();
        let mut lb = LineBuffer::new();
        for b in bytes {
            if let LineEvent::Line(l) = lb.push(b) {
                let (r, _) = say(&mut a, &l);
                prop_assert!(r.starts_with("ok") || r.starts_with("err"), "{r}");
            }
        }
        // Whatever was said, the settings in force still build.
        prop_assert!(a.settings().validate(16_000.0).is_ok());
    }

    #[test]
    fn command_shaped_lines_never_panic(
        w in prop::sample::select(vec!["freq", "band", "detector", "rate", "units", "height", "distance", "coil", "cal", "check", "scan", "save", "show", "defaults", "help", "zap"]),
        args in prop::collection::vec(prop_oneof![
            Just("lockin".to_string()), Just("block".to_string()), Just("pos".to_string()), Just("axis".to_string()),
            Just("gain".to_string()), Just("upper".to_string()), Just("strength".to_string()), Just("auto".to_string()), Just("run".to_string()),
            Just("inf".to_string()), Just("-0".to_string()), Just("1e39".to_string()), Just("255".to_string()),
            any::<f32>().prop_map(|v| v.to_string()), any::<u8>().prop_map(|v| v.to_string()),
        ], 0..6),
    ) {
        let mut a = app();
        let line = format!("{w} {}", args.join(" "));
        let (r, _) = say(&mut a, &line);
        prop_assert!(r.starts_with("ok") || r.starts_with("err"), "{line}: {r}");
        prop_assert!(r.len() <= REPLY);
        prop_assert!(a.settings().validate(16_000.0).is_ok(), "{line}");
    }
}
