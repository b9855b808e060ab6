//! The application loop on the host: the very `App` the board and the emulator
//! image run, driven through converter restarts with gain steps in force, ten
//! hours of a wrapping tick counter, the buttons and menu, the jobs, and the
//! command channel.

mod common;

use common::{app, app_at, none, Seen, World, FSC};
use undertone_dsp::format::LengthUnit;
use undertone_firmware::app::Converter;
use undertone_firmware::emulated::{emu_amplitudes, Synthetic};
use undertone_firmware::menu::Mode;
use undertone_firmware::queue::{split, FrameQueue, PathCounts};
use undertone_firmware::screen::Page;
use undertone_firmware::storage::{LoadOutcome, RamFlash, Store};
use undertone_firmware::supervisor::PathState;

/// Median strength of the readouts in `[from_s, to_s)` of readout time.
fn strength(seen: &Seen, from_s: f64, to_s: f64) -> f32 {
    let mut v: Vec<f32> = seen.readouts.iter().filter(|r| r.t_s >= from_s && r.t_s < to_s).map(|r| r.strength).collect();
    assert!(!v.is_empty(), "no readouts in {from_s}..{to_s}");
    v.sort_by(f32::total_cmp);
    v[v.len() / 2]
}

fn restart_keeps_readouts_right(loses_gains: bool) {
    let fs = 16_000.0;
    let mut seen = Seen::default();
    // A weak field (the lower along coil 20 000 codes over the sonde, 0.24 % of full scale):
    // the receiver asks for more gain on every coil.
    let peak_code = 20_000.0;
    let src = Synthetic::<4>::walking(512.0, fs, 1.2, -1.5, 0.5, peak_code, 40);
    let mut a = app(src, fs, RamFlash::new(), &mut seen);
    a.converter().restart_loses_gains = loses_gains;
    let mut q: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    let mut w = World::new(fs);
    // Walk in (3 s), stand over the sonde.
    w.run(&mut a, &mut tx, &mut rx, 4_000, &none, b"", &mut seen);
    let gains = a.gains();
    assert!(gains.iter().all(|&g| g >= 2), "gain steps in force: {gains:?}");
    assert_eq!(a.converter().gains(), gains);
    // Over the sonde the strength is the lower along coil's amplitude in full-scale units
    // (the synthetic tone's own amplitude): the reference for "right".
    let want = peak_code / FSC as f32;
    let before = strength(&seen, 3.6, 3.95);
    assert!((before / want - 1.0).abs() < 0.01, "{before} vs {want}");
    // The converter falls silent for 200 ms: the supervisor restarts it.
    w.silent = true;
    w.run(&mut a, &mut tx, &mut rx, 200, &none, b"", &mut seen);
    assert!(matches!(a.path_state(), PathState::Fault { .. }));
    assert_eq!(a.converter().restarts, 1);
    w.silent = false;
    w.run(&mut a, &mut tx, &mut rx, 2_500, &none, b"", &mut seen);
    assert_eq!(a.path_state(), PathState::Running);
    // Whatever gains the converter came back with, the receiver's scales match them.
    assert_eq!(a.converter().gains(), a.gains());
    // The same field after the restart (a gain step mistaken would read 2× or more off).
    let after = strength(&seen, 5.5, 6.8);
    assert!((after / want - 1.0).abs() < 0.01, "strength {after} after the restart, {want} wanted");
    // A depth shown after the restart is right (gradient depth of a dipole, Griffiths
    // eq. 5.89: 1.2 m within 3σ); a withheld one says why.
    for r in seen.readouts.iter().filter(|r| r.t_s > 4.5) {
        if let Some(d) = r.depth {
            assert!((d.depth.depth_m - 1.2).abs() < 3.0 * d.depth.sigma_m.max(0.01), "{d:?}");
        }
    }
    assert!(seen.notes.iter().any(|n| n.starts_with("converter fault")), "{:?}", seen.notes);
}

#[test]
fn converter_restart_restores_gains_and_readouts_stay_right() {
    restart_keeps_readouts_right(false);
}

#[test]
fn converter_restart_that_loses_gains_is_told_to_the_receiver() {
    restart_keeps_readouts_right(true);
}

#[test]
fn ten_hours_of_a_wrapping_tick_counter() {
    // 4 kSPS, 10 ms main-loop passes, the 100 MHz tick counter starting just before a wrap:
    // it wraps every 42.9 s, 839 times in ten hours.
    let fs = 4_000.0;
    let mut seen = Seen::default();
    let tick0 = 0xFFF0_0000;
    let mut a = app_at(Synthetic::<4>::new(512.0, fs, emu_amplitudes(), 200), fs, RamFlash::new(), &mut seen, tick0);
    let mut q: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    let mut w = World::new(fs);
    w.per_pass = 40;
    w.tick0 = tick0;
    let hours = 10;
    // 10 readouts/s, the lowest allowed: the clock is under test, and on the host the
    // locator's fit per readout is most of this test's time.
    w.run(&mut a, &mut tx, &mut rx, 10, &none, b"rate 10\n", &mut seen);
    assert_eq!(seen.replies.last().map(String::as_str), Some("ok rate"), "{:?}", seen.replies);
    let mut count = 0u64;
    for _ in 0..hours * 60 {
        let before = seen.readouts.len();
        w.run(&mut a, &mut tx, &mut rx, 60_000, &none, b"", &mut seen);
        count += (seen.readouts.len() - before) as u64;
        // Keep the memory small: the readouts are checked as they come.
        let settled: Vec<_> = seen.readouts.iter().filter(|r| r.t_s > 3.0).collect();
        for r in &settled {
            assert!(!r.flags.contains(undertone_dsp::Flags::OVERRUN), "{r:?}");
        }
        let n = seen.readouts.len();
        seen.readouts.drain(..n.saturating_sub(1));
        seen.screens.clear();
    }
    // The clock ran exactly ten hours (and the 10 ms of the command), and never mistook a wrap
    // for a stall.
    assert_eq!(a.now_ms(), hours * 3_600_000 + 10);
    assert_eq!(a.converter().restarts, 0);
    assert!(!seen.notes.iter().any(|n| n.contains("fault")), "{:?}", seen.notes);
    // And the readouts kept coming: the last one within a readout interval (400 samples) of the end.
    let last = seen.readouts.last().unwrap();
    assert!(hours * 3600 * 4000 + 40 - last.sample_index <= 400, "{}", last.sample_index);
    // Ten a second, all the ten hours.
    assert!(count.abs_diff(hours * 36_000) <= 1, "{count} readouts");
}

/// Button levels from a list of (button 0 − / 1 OK / 2 +, from ms, to ms).
fn presses(list: &'static [(usize, u64, u64)]) -> impl Fn(u64) -> [bool; 3] {
    move |t| {
        let mut b = [false; 3];
        for &(i, from, to) in list {
            if (from..to).contains(&t) {
                b[i] = true;
            }
        }
        b
    }
}

#[test]
fn units_and_coil_height_from_the_buttons() {
    let fs = 16_000.0;
    let mut seen = Seen::default();
    // Walking in from 4 m before the point over the sonde (over it at 8 s), then standing.
    let mut a = app(Synthetic::<4>::walking(512.0, fs, 1.2, -4.0, 0.5, 2_097_152.0, 500), fs, RamFlash::new(), &mut seen);
    let mut q: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    let mut w = World::new(fs);
    w.run(&mut a, &mut tx, &mut rx, 2_500, &none, b"", &mut seen);
    assert_eq!(a.mode(), &Mode::Locate, "the caution gives way after 2 s");
    let script = presses(&[
        (1, 2600, 2700), // OK: menu, on "Beacon"
        (2, 2800, 2900), // +: "Bandwidth"
        (2, 3000, 3100), // +: "Units"
        (1, 3200, 3300), // OK: edit units
        (2, 3400, 3500), // +: imperial
        (1, 3600, 3700), // OK: apply
        (2, 3800, 3900), // +: "Coil height"
        (1, 4000, 4100), // OK: edit 0.10 m
        (2, 4200, 5300), // + held: long press +0.10 m at 5020, a repeat +0.10 m at 5170
        (0, 5400, 5500), // −: −0.01 m
        (1, 5600, 5700), // OK: apply
        (1, 5800, 6900), // OK held: back to locating
    ]);
    w.run(&mut a, &mut tx, &mut rx, 5_000, &script, b"", &mut seen);
    w.run(&mut a, &mut tx, &mut rx, 3_000, &none, b"", &mut seen);
    let s = a.settings();
    assert_eq!(s.units, LengthUnit::FeetInches);
    assert!((s.coil_height_m - 0.29).abs() < 1e-6, "{}", s.coil_height_m);
    assert_eq!(a.receiver().settings().locator.coil_height_m, s.coil_height_m);
    assert_eq!(a.mode(), &Mode::Locate);
    // The screen shows the depth below the ground in feet and inches.
    let (_, _, page) = seen.screens.last().unwrap();
    let Page::Locate(v) = page else { panic!("{page:?} {:?}", a.mode()) };
    assert_eq!(v.units, LengthUnit::FeetInches);
    match v.depth {
        undertone_firmware::view::DepthLine::Shown { below_ground_m, .. } => {
            // 1.2 m below the lower coil, which is 0.29 m above the ground.
            assert!((below_ground_m - (1.2 - 0.29)).abs() < 0.1, "{below_ground_m}");
        }
        other => panic!("no depth over the sonde: {other:?}"),
    }
}

#[test]
fn a_flat_battery_refuses_to_save_and_keeps_the_stored_settings() {
    let fs = 16_000.0;
    let mut seen = Seen::default();
    let mut a = app(Synthetic::<4>::new(512.0, fs, emu_amplitudes(), 200), fs, RamFlash::new(), &mut seen);
    let mut q: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    let mut w = World::new(fs);
    w.run(&mut a, &mut tx, &mut rx, 500, &none, b"units imperial\nsave\n", &mut seen);
    assert!(seen.replies.iter().any(|r| r.starts_with("ok save")), "{:?}", seen.replies);
    w.battery_v = Some(3.1);
    w.run(&mut a, &mut tx, &mut rx, 8_000, &none, b"units metric\n", &mut seen);
    // Menu: OK, − twice (wraps to "Back", then "Save settings"), OK.
    let script = presses(&[(1, 8600, 8700), (0, 8800, 8900), (0, 9000, 9100), (1, 9200, 9300)]);
    w.run(&mut a, &mut tx, &mut rx, 1_000, &script, b"", &mut seen);
    assert!(seen.replies.last().unwrap().starts_with("err save refused: the battery is flat"), "{:?}", seen.replies);
    let Some((_, _, Page::Text(t))) = seen.screens.last() else { panic!() };
    assert_eq!(t.title.as_str(), "Save settings");
    // The locating screen warns.
    let warned = seen
        .screens
        .iter()
        .any(|(_, _, p)| matches!(p, Page::Locate(v) if v.warnings.contains(&undertone_firmware::view::Warning::BatteryFlat)));
    assert!(warned);
    // What is stored is the imperial record of before.
    let flash = std::mem::replace(a.store(), Store::new(RamFlash::new(), 0, 4096).unwrap()).release();
    let (s, o) = Store::new(flash, 0, 4096).unwrap().load(undertone_firmware::settings::Settings::defaults());
    assert!(matches!(o, LoadOutcome::Loaded { .. }));
    assert_eq!(s.units, LengthUnit::FeetInches);
}

#[test]
fn calibration_then_pre_job_check_over_a_sonde_at_the_test_distance() {
    let fs = 16_000.0;
    let mut seen = Seen::default();
    // The sonde 1.0 m below the lower coil (the test distance), the head in line over it.
    let src = Synthetic::<4>::walking(512.0, fs, 1.0, 0.0, 0.0, 2_097_152.0, 300);
    let mut a = app(src, fs, RamFlash::new(), &mut seen);
    let mut q: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    let mut w = World::new(fs);
    w.run(&mut a, &mut tx, &mut rx, 3_000, &none, b"check\n", &mut seen);
    let r = seen.replies.iter().find(|r| r.starts_with("ok check:")).expect("a check result");
    assert!(r.contains("tone present") && r.contains("strength xnan"), "{r}");
    w.run(&mut a, &mut tx, &mut rx, 3_000, &none, b"cal run\n", &mut seen);
    let r = seen.replies.iter().find(|r| r.starts_with("ok cal:")).expect("a calibration");
    let cal = a.settings().calibration;
    // Equal coils: the upper coil needs no correction (ratio ((d + s)/d)³ of a dipole, Griffiths
    // eq. 5.89), and the strength is the lower reading times d³.
    assert!((cal.upper_gain - 1.0).abs() < 0.01, "{r}");
    assert!(cal.strength > 0.0 && cal.strength_sigma < 0.01 * cal.strength, "{cal:?}");
    w.run(&mut a, &mut tx, &mut rx, 3_000, &none, b"check\n", &mut seen);
    let r = seen.replies.iter().rev().find(|r| r.starts_with("ok check:")).unwrap();
    let ratio: f32 = r.split("strength x").nth(1).and_then(|t| t.split(' ').next()).and_then(|t| t.parse().ok()).unwrap();
    assert!((ratio - 1.0).abs() < 0.01, "{r}");
}

#[test]
fn scan_finds_an_unknown_tone() {
    let fs = 16_000.0;
    let mut seen = Seen::default();
    let mut a = app(Synthetic::<4>::new(1234.5, fs, [200_000.0; 4], 500), fs, RamFlash::new(), &mut seen);
    let mut q: FrameQueue<4, 64> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    let mut w = World::new(fs);
    w.run(&mut a, &mut tx, &mut rx, 1_000, &none, b"scan\n", &mut seen);
    let r = seen.replies.iter().find(|r| r.starts_with("ok scan:")).expect("a scan result");
    let f: f32 = r.split_whitespace().nth(2).and_then(|t| t.parse().ok()).unwrap();
    // The synthesised tone (a phase accumulator at 1234.5 Hz ± 4e-6 Hz).
    assert!((f - 1234.5).abs() < 0.5, "{r}");
}

#[test]
fn limits_come_from_the_dsp_and_numbers_print_right() {
    let fs = 16_000.0;
    let mut seen = Seen::default();
    let mut a = app(Synthetic::<4>::new(512.0, fs, emu_amplitudes(), 200), fs, RamFlash::new(), &mut seen);
    let say = |a: &mut common::Rig<Synthetic<4>>, l: &str| {
        let mut s = Seen::default();
        a.command(l, &mut |e| s.take(e));
        s.replies.pop().unwrap()
    };
    assert_eq!(
        say(&mut a, "cal strength 1e-40"),
        "err source strength 1e-40 is not allowed: allowed 1.1754944e-38 to 3.4028235e38; unchanged"
    );
    assert_eq!(say(&mut a, "coil 3 pos 0 0 -0.4"), "err coil 3 position -0.4 m is not allowed: allowed 0.05 m to 2 m; unchanged");
    assert_eq!(say(&mut a, "coil 1 gain 20"), "err coil 1 gain 20 is not allowed: allowed 0.1 to 10; unchanged");
    assert_eq!(say(&mut a, "height 3"), "err coil height 3 m is not allowed: allowed 0 m to 2 m; unchanged");
    assert_eq!(say(&mut a, "distance 0.1"), "err distance 0.1 m is not allowed: allowed 0.2 m to 5 m; unchanged");
    assert_eq!(say(&mut a, "cal upper 1.5"), "err calibration input 1.5 is not allowed: allowed 0.7 to 1.3; unchanged");
    assert_eq!(
        say(&mut a, "coil 1 axis 0 0 0"),
        "err coil 1 axis length 0 is not allowed: allowed 1.1754944e-38 to 3.4028235e38; unchanged"
    );
    assert_eq!(say(&mut a, "coil 1 axis 0 3 0"), "ok coil");
    assert_eq!(a.settings().head.coils[1].axis, [0.0, 1.0, 0.0]);
    assert!(say(&mut a, "show").contains("spacing 0.40 m"));
    assert_eq!(say(&mut a, "units imperial"), "ok units");
    assert_eq!(say(&mut a, "height 0.3048"), "ok height");
    assert!(say(&mut a, "show").contains("spacing 1' 4\", height 1' 0\""));
    let _ = seen;
}
