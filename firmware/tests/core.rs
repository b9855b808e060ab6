//! The application core, queue, supervisor and tone on the host.

use std::cell::Cell;
use undertone_dsp::Flags;
use undertone_firmware::ads131::read_into;
use undertone_firmware::ads131::{Ads131, Osr};
use undertone_firmware::emulated::{FakeAdc, FakeDrdy, NoWait, Synthetic};
use undertone_firmware::queue::{split, FrameQueue, PathCounts};
use undertone_firmware::supervisor::{Action, PathState, Supervisor, MAX_BAD_FRAMES, RETRY_MS, STALL_MS};
use undertone_firmware::tone::{tone_for, Tone, F_HI_HZ, F_LO_HZ};

#[test]
fn queue_counts_overruns_and_bad_frames() {
    let mut q: FrameQueue<4, 4> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    // A heapless SPSC queue of capacity 4 holds 3 items.
    assert!(tx.push([1; 4]) && tx.push([2; 4]) && tx.push([3; 4]));
    assert!(!tx.push([4; 4]));
    assert!(!tx.push([5; 4]));
    tx.bad_frame();
    assert_eq!(rx.counts().take_overruns(), 2);
    assert_eq!(rx.counts().take_overruns(), 0);
    assert_eq!(rx.counts().take_bad_frames(), 1);
    assert_eq!(rx.pop(), Some([1; 4]));
    assert_eq!(rx.len(), 2);
}

#[test]
fn interrupt_and_main_loop_on_two_threads() {
    // The producer on one thread, the consumer on another, no lock: every frame arrives once,
    // in order, or is counted as an overrun.
    use std::sync::atomic::{AtomicBool, Ordering};
    let mut q: FrameQueue<4, 16> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, mut rx) = split(&mut q, &counts);
    let n = 200_000i32;
    let done = AtomicBool::new(false);
    let mut got = Vec::new();
    std::thread::scope(|s| {
        s.spawn(|| {
            for i in 0..n {
                tx.push([i; 4]);
            }
            done.store(true, Ordering::Release);
        });
        loop {
            let finished = done.load(Ordering::Acquire);
            match rx.pop() {
                Some(f) => {
                    assert!(f.iter().all(|&v| v == f[0]), "a frame arrives whole");
                    got.push(f[0]);
                }
                None if finished => break,
                None => {}
            }
        }
    });
    assert!(got.windows(2).all(|w| w[0] < w[1]), "in order, each once");
    assert_eq!(got.len() as u32 + counts.take_overruns(), n as u32);
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
    s.bad_frames(MAX_BAD_FRAMES);
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
    let mut q: FrameQueue<4, 8> = FrameQueue::new();
    let counts = PathCounts::new();
    let (mut tx, rx) = split(&mut q, &counts);
    for ms in 0..(MAX_BAD_FRAMES as u64 + 1) {
        adc.with_spi(|f| f.convert());
        read_into(&mut adc, &mut tx);
        sup.bad_frames(rx.counts().take_bad_frames());
        if sup.poll(ms) == Action::Reinit {
            action = Action::Reinit;
        }
    }
    assert!(rx.is_empty());
    assert_eq!(action, Action::Reinit);
    assert_eq!(adc.stats.crc_errors, MAX_BAD_FRAMES + 1);
    assert_eq!(adc.stats.frames, 0);
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
