//! Cost measurements shared by the emulator image (instructions under QEMU)
//! and the host (criterion): each function runs one workload over the same
//! synthetic frames and reports the clock units it spent.

use crate::emulated::{emu_amplitudes, SampleSource, Synthetic};
use undertone_dsp::detect::goertzel::{Goertzel, GoertzelState};
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::field::Source;
use undertone_dsp::locate::fit::fit;
use undertone_dsp::{Beacon, Detector, DetectorSettings, Head, Receiver, ReceiverSettings};

/// Frames per workload chunk.
pub const CHUNK: usize = 256;

/// Sample rate of the measurements, Hz (the reference board's 32 kSPS).
pub const FS: f32 = 32_000.0;

fn frames(n: usize, src: &mut Synthetic<4>, buf: &mut [[i32; 4]; CHUNK]) -> usize {
    let k = n.min(CHUNK);
    for f in buf.iter_mut().take(k) {
        *f = src.next();
    }
    k
}

fn source() -> Synthetic<4> {
    Synthetic::new(512.0, FS, emu_amplitudes(), 3000)
}

/// The floor: a plain single-bin Goertzel recurrence on one channel of f32 samples.
pub fn goertzel_floor(n: usize, clock: &mut dyn FnMut() -> u64) -> u64 {
    let g = Goertzel::from_cycles_per_sample(512.0 / FS as f64);
    let mut src = source();
    let mut buf = [[0i32; 4]; CHUNK];
    let mut xs = [0f32; CHUNK];
    let mut st = GoertzelState::default();
    let mut spent = 0;
    let mut left = n;
    while left > 0 {
        let k = frames(left, &mut src, &mut buf);
        for i in 0..k {
            xs[i] = buf[i][0] as f32;
        }
        let t0 = clock();
        for &x in &xs[..k] {
            g.step(&mut st, x);
        }
        spent += clock().wrapping_sub(t0);
        left -= k;
    }
    core::hint::black_box(st);
    spent
}

/// Time `push` over `n` synthetic frames fed in chunks; returns (clock units, readouts).
fn timed_chunks(n: usize, clock: &mut dyn FnMut() -> u64, mut push: impl FnMut(&[[i32; 4]], &mut u32)) -> (u64, u32) {
    let mut src = source();
    let mut buf = [[0i32; 4]; CHUNK];
    let (mut spent, mut outs) = (0, 0);
    let mut left = n;
    while left > 0 {
        let k = frames(left, &mut src, &mut buf);
        let t0 = clock();
        push(&buf[..k], &mut outs);
        spent += clock().wrapping_sub(t0);
        left -= k;
    }
    (spent, outs)
}

/// The detector as configured by default (4-pole lock-in), 4 channels.
pub fn detector(n: usize, clock: &mut dyn FnMut() -> u64) -> (u64, u32) {
    let s = DetectorSettings::new(FS, Beacon::Hz512);
    let Ok(mut det) = Detector::<4>::new(&s, InputScale::unity(24)) else { return (0, 0) };
    timed_chunks(n, clock, |f, outs| det.push_codes_block(f, |_| *outs += 1))
}

/// The whole receiver (detector and locating maths) on the 4-coil head.
pub fn receiver(n: usize, clock: &mut dyn FnMut() -> u64) -> (u64, u32) {
    let s = ReceiverSettings::new(DetectorSettings::new(FS, Beacon::Hz512), InputScale::unity(24), Head::reference4());
    let Ok(mut rx) = Receiver::<4>::new(s) else { return (0, 0) };
    timed_chunks(n, clock, |f, outs| rx.push_codes_block(f, |_| *outs += 1))
}

/// The 6-coil one-station fit, `reps` times on one reading 0.4 m off the sonde.
pub fn six_coil_fit(reps: u32, clock: &mut dyn FnMut() -> u64) -> u64 {
    let head = Head::triads6();
    let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [0.4, -0.2, -1.5] };
    let r = head.readings(&src, [0.0; 3], 0.0);
    let mut a = [0f32; 6];
    for c in 0..6 {
        a[c] = r[c] * 1e9;
    }
    let sig = [1e-3f32; 6];
    let t0 = clock();
    for _ in 0..reps {
        core::hint::black_box(fit(&head, core::hint::black_box(&a), &sig, None));
    }
    clock().wrapping_sub(t0)
}

/// The lock-in's two parts timed apart: (mixing, boxcar ends) over `n` frames.
pub fn lockin_parts(n: usize, clock: &mut dyn FnMut() -> u64) -> (u64, u64) {
    use undertone_dsp::detect::lockin::{LockIn, LockInState};
    let cfg = LockIn::new(FS, 512.0, 1.78, 4, 20.0);
    let mut st = LockInState::<4>::new(512.0 / FS as f64, 0.3);
    let mut src = source();
    let mut buf = [[0i32; 4]; CHUNK];
    let (mut mix, mut ends) = (0u64, 0u64);
    let mut left = n;
    let mut at = 0u64;
    while left > 0 {
        let k = frames(left, &mut src, &mut buf);
        let mut i = 0;
        while i < k {
            let mut or = [0u32; 4];
            let t0 = clock();
            let took = st.mix_codes(&cfg, at, &buf[i..k], &mut or);
            let t1 = clock();
            mix += t1.wrapping_sub(t0);
            i += took;
            at += took as u64;
            if st.boxcar_full(&cfg) {
                let t2 = clock();
                core::hint::black_box(st.end_boxcar(&cfg, &[1.0; 4]));
                ends += clock().wrapping_sub(t2);
            }
        }
        left -= k;
    }
    (mix, ends)
}

/// The fit as a moving receiver runs it: warm-started from the previous fix,
/// the head 2 cm further on each time. Returns clock units for `reps` fits.
pub fn six_coil_fit_warm(reps: u32, clock: &mut dyn FnMut() -> u64) -> u64 {
    use undertone_dsp::locate::fit::fit_from;
    let head = Head::triads6();
    let sig = [1e-3f32; 6];
    let reading = |x: f32| {
        let src = Source::Dipole { moment_am2: [1.0, 0.0, 0.0], pos_m: [x, -0.2, -1.5] };
        let r = head.readings(&src, [0.0; 3], 0.0);
        let mut a = [0f32; 6];
        for c in 0..6 {
            a[c] = r[c] * 1e9;
        }
        a
    };
    let mut last = Some(fit(&head, &reading(0.4), &sig, None).params());
    let mut spent = 0;
    for i in 0..reps {
        let a = reading(0.4 - 0.02 * (i + 1) as f32);
        let t0 = clock();
        let f = fit_from(&head, &a, &sig, None, last, None, f32::INFINITY);
        spent += clock().wrapping_sub(t0);
        last = f.converged.then_some(f.params());
    }
    spent
}

/// Drawing the locating screen `reps` times (a walking readout, a depth readout), frame buffer
/// and checksum included: the screen's share of a refresh, without the transfer to the panel.
pub fn screen(reps: u32, clock: &mut dyn FnMut() -> u64) -> u64 {
    use crate::screen::{draw, Frame, Page};
    use crate::view::{DepthLine, View};
    use undertone_dsp::format::LengthUnit;
    use undertone_dsp::locate::depth::Withheld;
    use undertone_dsp::locate::guidance::{Across, Along, Hint};
    use undertone_dsp::locate::orientation::Orientation;
    let mut v = View {
        t_s: 1.0,
        strength_dbfs: Some(-42.5),
        bar: 0.6,
        orientation: Orientation::InLine,
        along: Along::Ahead,
        across: Across::Centred,
        hint: Hint::WalkAhead,
        depth: DepthLine::Withheld(Withheld::NotOver),
        beacon_hz: 512.0,
        units: LengthUnit::Metres,
        battery: None,
        warnings: heapless::Vec::new(),
        muted: false,
    };
    let mut frame = Frame::new();
    let mut sum = 0u32;
    let t0 = clock();
    for i in 0..reps {
        if i % 2 == 1 {
            v.along = Along::Over;
            v.depth = DepthLine::Shown { below_ground_m: 1.1, sigma_m: 0.04 };
        }
        let _ = draw(&Page::Locate(v.clone()), &mut frame);
        sum = sum.wrapping_add(frame.checksum());
    }
    let spent = clock().wrapping_sub(t0);
    core::hint::black_box(sum);
    spent
}
