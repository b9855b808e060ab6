//! Host throughput in channel-samples per second: the Goertzel block
//! detector, the lock-in and the whole receiver on the 4-coil head, each in the
//! same run as two baselines: (a) a direct single-bin DFT that evaluates sin
//! and cos for every sample, (b) the bin taken from a rustfft transform of each
//! block. Run: `cargo bench -p undertone-tests --bench throughput`.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use rustfft::{num_complex::Complex, FftPlanner};
use std::hint::black_box;
use undertone_dsp::detect::input::InputScale;
use undertone_dsp::{Beacon, Detector, DetectorKind, DetectorSettings, Head, Receiver, ReceiverSettings, Window};

const FS: f32 = 48_000.0;
const FRAMES: usize = 48_000; // one second of 4 channels

fn codes() -> Vec<[i32; 4]> {
    let amp = [2.0e6f64, 3.0e5, 1.0e5, 7.0e5];
    (0..FRAMES)
        .map(|n| {
            let s = (2.0 * std::f64::consts::PI * 512.0 * n as f64 / FS as f64).sin();
            let mut f = [0i32; 4];
            for c in 0..4 {
                f[c] = (amp[c] * s) as i32 + ((n * 7919 + c * 104729) % 2001) as i32 - 1000;
            }
            f
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let frames = codes();
    let mut g = c.benchmark_group("channel-samples");
    g.throughput(Throughput::Elements((FRAMES * 4) as u64));
    g.sample_size(20);

    g.bench_function("receiver (lock-in, 4-coil head, locating maths)", |b| {
        let s = ReceiverSettings::new(DetectorSettings::new(FS, Beacon::Hz512), InputScale::unity(24), Head::reference4());
        let mut rx = Receiver::<4>::new(s).unwrap();
        b.iter(|| {
            let mut n = 0;
            rx.push_codes_block(black_box(&frames), |_| n += 1);
            n
        })
    });
    g.bench_function("lock-in detector (4-pole, default bandwidth)", |b| {
        let mut det = Detector::<4>::new(&DetectorSettings::new(FS, Beacon::Hz512), InputScale::unity(24)).unwrap();
        b.iter(|| {
            let mut n = 0;
            det.push_codes_block(black_box(&frames), |_| n += 1);
            n
        })
    });
    g.bench_function("Goertzel block detector (Blackman-Harris, 20 readouts/s)", |b| {
        let s = DetectorSettings::new(FS, Beacon::Hz512).with_kind(DetectorKind::Block { window: Window::BlackmanHarris4 });
        let mut det = Detector::<4>::new(&s, InputScale::unity(24)).unwrap();
        b.iter(|| {
            let mut n = 0;
            det.push_codes_block(black_box(&frames), |_| n += 1);
            n
        })
    });
    g.bench_function("baseline (a): direct single-bin DFT per channel, sin and cos per sample", |b| {
        let w = 2.0 * std::f32::consts::PI * 512.0 / FS;
        b.iter(|| {
            let mut acc = [(0f32, 0f32); 4];
            for ch in 0..4 {
                for (n, f) in black_box(&frames).iter().enumerate() {
                    let ph = w * n as f32;
                    acc[ch].0 += f[ch] as f32 * ph.cos();
                    acc[ch].1 -= f[ch] as f32 * ph.sin();
                }
            }
            acc
        })
    });
    g.bench_function("baseline (b): rustfft bin of each 2400-sample block", |b| {
        let len = 2_400; // 20 blocks per second, as the readouts
        let fft = FftPlanner::<f32>::new().plan_fft_forward(len);
        let k = (512.0 * len as f32 / FS).round() as usize;
        let mut buf = vec![Complex::new(0f32, 0f32); len];
        b.iter(|| {
            let mut out = 0f32;
            for block in black_box(&frames).chunks_exact(len) {
                for ch in 0..4 {
                    for (d, f) in buf.iter_mut().zip(block) {
                        *d = Complex::new(f[ch] as f32, 0.0);
                    }
                    fft.process(&mut buf);
                    out += buf[k].norm();
                }
            }
            out
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
