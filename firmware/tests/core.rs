//! The application core, queue, supervisor and tone on the host.

use std::cell::Cell;
use undertone_dsp::Flags;
use undertone_firmware::ads131::{Ads131, Osr};
use undertone_firmware::app::App;
use undertone_firmware::emulated::{FakeAdc, FakeDrdy, NoWait, Synthetic};
use undertone_firmware::queue::FrameQueue;
use undertone_firmware::settings::Settings;
use undertone_firmware::supervisor::{Action, PathState, Supervisor, MAX_BAD_FRAMES, RETRY_MS, STALL_MS};
use undertone_firmware::tone::{tone_for, Tone, F_HI_HZ, F_LO_HZ};

#[test]
fn queue_counts_overruns() {
    let q: FrameQueue<4, 4> = FrameQueue::new();
    // A heapless SPSC queue of capacity 4 holds 3 items.
    assert!(q.push([1; 4]) && q.push([2; 4]) && q.push([3; 4]));
    assert!(!q.push([4; 4]));
    assert!(!q.push([5; 4]));
    assert_eq!(q.take_overruns(), 2);
    assert_eq!(q.take_overruns(), 0);
    assert_eq!(q.pop(), Some([1; 4]));
    assert_eq!(q.len(), 2);
}

#[test]
fn supervisor_reinitialises_a_silent_converter() {
    let mut s = Supervisor::new(0);
    assert_eq!(s.poll(50), Action::None);
    s.good_frame(60);
    assert_eq!(s.poll(60 + STALL_MS), Action::None);
    assert_eq!(s.poll(61 + STALL_MS), Action::Reinit);
    assert_eq!(s.state, PathState::Fault { retries: 1 });
    assert_eq!(s.poll(62 + STALL_MS), Action::None);
    assert_eq!(s.poll(61 + STALL_MS + RETRY_MS), Action::Reinit);
    assert_eq!(s.state, PathState::Fault { retries: 2 });
    s.good_frame(1000);
    assert_eq!(s.state, PathState::Running);
    for _ in 0..MAX_BAD_FRAMES {
        s.bad_frame();
    }
    assert_eq!(s.poll(1001), Action::Reinit);
}

#[test]
fn converter_fault_through_the_driver_path() {
    // Frames with broken CRCs every time: rejected and counted, the supervisor acts.
    let ready = Cell::new(false);
    let mut fake = FakeAdc::new(Synthetic::<4>::new(512.0, 16_000.0, [1e5; 4], 10), &ready);
    let mut adc: Ads131<_, _, _, 4> = Ads131::new(&mut fake, FakeDrdy(&ready), NoWait);
    adc.init(Osr::R256, [0; 4]).unwrap();
    adc.with_spi(|f| f.corrupt_every = 1);
    let mut sup = Supervisor::new(0);
    let mut action = Action::None;
    for ms in 0..(MAX_BAD_FRAMES + 1) {
        adc.with_spi(|f| f.convert());
        match adc.read() {
            Ok(_) => sup.good_frame(ms),
            Err(_) => sup.bad_frame(),
        }
        if sup.poll(ms) == Action::Reinit {
            action = Action::Reinit;
        }
    }
    assert_eq!(action, Action::Reinit);
    assert_eq!(adc.stats.crc_errors, MAX_BAD_FRAMES + 1);
    assert_eq!(adc.stats.frames, 0);
}

#[test]
fn app_reads_depth_over_the_sonde_through_the_driver() {
    // The emulated converter: the reference head walked along a level sonde's axis into the
    // point over it (1.2 m above the sonde), then standing there.
    let ready = Cell::new(false);
    let fs = 16_000.0;
    let mut fake = FakeAdc::new(Synthetic::<4>::walking(512.0, fs, 1.2, -1.5, 0.5, 2_097_152.0, 500), &ready);
    let mut adc: Ads131<_, _, _, 4> = Ads131::new(&mut fake, FakeDrdy(&ready), NoWait);
    adc.init(Osr::R256, [0; 4]).unwrap();
    let (mut app, err) = App::new(Settings::defaults(), Settings::defaults(), fs, 8_388_607, [1.0 / 8_388_607.0; 4]).unwrap();
    assert!(err.is_none());
    let mut last = None;
    for _ in 0..(6.0 * fs) as usize {
        adc.with_spi(|f| f.convert());
        let f = adc.read().unwrap();
        if let Some(r) = app.process(&f) {
            last = Some(r);
        }
    }
    let r = last.unwrap();
    let d = r.gradient.unwrap_or_else(|w| panic!("no gradient depth ({}): {r:?}", w.name()));
    // Gradient depth of a dipole (Griffiths eq. 5.89): 1.2 m, within 3σ.
    assert!((d.depth_m - 1.2).abs() < 3.0 * d.sigma_m, "{d:?}");
}

#[test]
fn tone_rises_with_strength_and_warns_on_clipping() {
    let head = undertone_dsp::Head::reference4();
    let s = undertone_dsp::ReceiverSettings::new(
        undertone_dsp::DetectorSettings::new(16_000.0, undertone_dsp::Beacon::Hz512),
        undertone_dsp::detect::input::InputScale::unity(24),
        head,
    );
    let mut rx = undertone_dsp::Receiver::new(s).unwrap();
    let mk = |snr: f32| undertone_dsp::Detection::<4> {
        sample_index: 0,
        t_s: 0.0,
        phasors: [undertone_dsp::C32::new(1.0, 0.0), undertone_dsp::C32::ZERO, undertone_dsp::C32::ZERO, undertone_dsp::C32::new(0.5, 0.0)],
        noise_sigma: [10f32.powf(-snr / 20.0); 4],
        stats: Default::default(),
        freq_offset_hz: 0.0,
        freq_offset_sigma_hz: 0.0,
        flags: Default::default(),
    };
    let weak = tone_for(&rx.locate(&mk(10.0)));
    let strong = tone_for(&rx.locate(&mk(40.0)));
    match (weak, strong) {
        (Tone::Pitch(a), Tone::Pitch(b)) => assert!(F_LO_HZ < a && a < b && b <= F_HI_HZ, "{a} {b}"),
        other => panic!("{other:?}"),
    }
    assert_eq!(tone_for(&rx.locate(&mk(0.0))), Tone::Off);
    let mut clip = mk(40.0);
    clip.flags = Flags::CLIPPED;
    let t = tone_for(&rx.locate(&clip));
    assert_eq!(t, Tone::Warning);
    assert!(t.pitch_at(10) > 0.0 && t.pitch_at(70) == 0.0);
}
