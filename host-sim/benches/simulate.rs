//! Simulator throughput on one core: a 60 s walk at 48 kHz with 50 Hz mains
//! (harmonics included) and noise, for the 4-coil and the 6-coil head, as
//! * synthesis alone (building the synthesiser and making every code),
//! * synthesis in the posed mode, as a closed loop drives it: blocks of
//!   2.5 ms (120 samples, off the 1 ms grid every other block), each with a
//!   new end pose (the walk's, the heading nudged),
//! * the receiver alone (the same codes, made beforehand, through its block path),
//! * both, as the commands run them (`run::simulate`, readout rows with the truth),
//!
//! then a table of each as a multiple of real time and the ratio of synthesis
//! to receiver time, from the same measurements. A last group times the normal
//! draws of the noise source against the ChaCha8 bits the simulator used before.
//! Times are the benchmark thread's CPU time (`cpu-time`, the kernel's
//! per-thread clock), so other work on a shared machine does not count; on an
//! idle machine they equal the wall-clock time.
//! Run: `cargo bench -p undertone-sim --bench simulate`.

use cpu_time::ThreadTime;
use criterion::{BenchmarkId, Criterion, Throughput};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::collections::BTreeMap;
use std::hint::black_box;
use std::sync::Mutex;
use std::time::Duration;
use undertone_dsp::{Head, Receiver};
use undertone_sim::noise::Gaussian;
use undertone_sim::run::{receiver_settings, simulate};
use undertone_sim::scenario::Scenario;
use undertone_sim::synth::Synth;

const WALK: &str = r#"
name = "60 s throughput walk"
seed = 9
[receiver]
head = "HEAD"
sample_rate_hz = 48000
adc_bits = 24
full_scale_t = 5e-7
[sonde]
freq_hz = 512
moment_am2 = 0.1
depth_m = 1.5
[mains]
grid_hz = 50
field_t = 3e-8
[noise]
density_t_per_rthz = 2e-12
[[motion]]
kind = "walk"
from = [-12.0, 0.0]
to = [12.0, 0.0]
speed_m_s = 0.4
"#;

const SECONDS: f64 = 60.0;
const SAMPLES: usize = 10;

/// Per (head, workload): the time per iteration of each measured sample, s (head 0: the noise group).
static TIMES: Mutex<BTreeMap<(usize, &'static str), Vec<f64>>> = Mutex::new(BTreeMap::new());

fn record(coils: usize, what: &'static str, iters: u64, d: Duration) -> Duration {
    let mut t = TIMES.lock().unwrap_or_else(|e| e.into_inner());
    let v = t.entry((coils, what)).or_default();
    v.push(d.as_secs_f64() / iters.max(1) as f64);
    d
}

fn synthesise(sc: &Scenario) -> u64 {
    let mut s = Synth::new(sc, None);
    let mut buf = vec![0i32; 1024 * s.coils];
    let mut acc = 0u64;
    loop {
        let got = s.fill_interleaved(&mut buf);
        if got == 0 {
            return acc;
        }
        acc = acc.wrapping_add(buf[0] as u64);
    }
}

fn synthesise_posed<const N: usize>(sc: &Scenario) -> u64 {
    let mut s = Synth::new(sc, None);
    let mut buf = [[0i32; N]; 120];
    let mut acc = 0u64;
    let mut from = s.scenario_pose(0.0);
    for k in 0..s.total as usize / buf.len() {
        let mut to = s.scenario_pose(((k + 1) * buf.len()) as f64 / s.fs);
        to.heading_rad += 0.01 * (k % 7) as f64;
        s.fill_codes_posed(from, to, &mut buf);
        from = to;
        acc = acc.wrapping_add(buf[0][1] as u64);
    }
    acc
}

fn codes<const N: usize>(sc: &Scenario) -> Vec<[i32; N]> {
    let mut s = Synth::new(sc, None);
    let mut v = vec![[0i32; N]; s.total as usize];
    let got = s.fill_codes(&mut v);
    v.truncate(got);
    v
}

fn receive<const N: usize>(sc: &Scenario, head: Head<N>, codes: &[[i32; N]]) -> usize {
    let mut rx = Receiver::new(receiver_settings(sc, head, None)).unwrap();
    let mut n = 0;
    for c in codes.chunks(1024) {
        rx.push_codes_block(c, |r| {
            black_box(&r);
            n += 1;
        });
    }
    n
}

fn bench_head<const N: usize>(c: &mut Criterion, head_name: &str, head: Head<N>) {
    let sc = Scenario::from_toml(&WALK.replace("HEAD", head_name), "bench").unwrap();
    assert!((sc.duration_s() - SECONDS).abs() < 1e-9 && sc.coils() == N);
    let data = codes::<N>(&sc);
    let mut g = c.benchmark_group("simulate");
    g.sample_size(SAMPLES);
    g.warm_up_time(Duration::from_secs(1));
    g.throughput(Throughput::Elements((SECONDS * 48_000.0) as u64 * N as u64));
    let label = |what: &str| BenchmarkId::new(format!("60 s walk, {N} coils at 48 kHz"), what);
    g.bench_function(label("synthesis"), |b| {
        b.iter_custom(|iters| {
            let t = ThreadTime::now();
            for _ in 0..iters {
                black_box(synthesise(black_box(&sc)));
            }
            record(N, "synthesis", iters, t.elapsed())
        })
    });
    g.bench_function(label("synthesis, posed blocks"), |b| {
        b.iter_custom(|iters| {
            let t = ThreadTime::now();
            for _ in 0..iters {
                black_box(synthesise_posed::<N>(black_box(&sc)));
            }
            record(N, "posed", iters, t.elapsed())
        })
    });
    g.bench_function(label("receiver"), |b| {
        b.iter_custom(|iters| {
            let t = ThreadTime::now();
            for _ in 0..iters {
                black_box(receive::<N>(&sc, head, black_box(&data)));
            }
            record(N, "receiver", iters, t.elapsed())
        })
    });
    g.bench_function(label("synthesis + receiver"), |b| {
        b.iter_custom(|iters| {
            let t = ThreadTime::now();
            for _ in 0..iters {
                black_box(simulate(black_box(&sc), None, None).unwrap().rows.len());
            }
            record(N, "both", iters, t.elapsed())
        })
    });
    g.finish();
}

/// Median time per iteration over the last `SAMPLES` measurements (criterion's samples; warm-up calls come first).
fn median(v: &[f64]) -> f64 {
    let mut v = v[v.len().saturating_sub(SAMPLES)..].to_vec();
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn summary() {
    let t = TIMES.lock().unwrap_or_else(|e| e.into_inner());
    println!("\nSimulator throughput, one core (thread CPU time), {SECONDS} s of signal (median of criterion's samples):");
    println!(
        "{:>7} | {:>20} | {:>20} | {:>20} | {:>20} | {:>18}",
        "head", "synthesis", "posed synthesis", "receiver", "both", "synthesis/receiver"
    );
    for coils in [4, 6] {
        let get = |w: &'static str| t.get(&(coils, w)).filter(|v| !v.is_empty()).map(|v| median(v));
        let cell = |v: Option<f64>| v.map(|s| format!("{:7.1} ms {:6.0}×", s * 1e3, SECONDS / s)).unwrap_or_else(|| "--".into());
        let (s, p, r, b) = (get("synthesis"), get("posed"), get("receiver"), get("both"));
        let ratio = s.zip(r).map(|(s, r)| format!("{:.2}", s / r)).unwrap_or_else(|| "--".into());
        println!("{:>7} | {:>20} | {:>20} | {:>20} | {:>20} | {:>18}", format!("{coils}-coil"), cell(s), cell(p), cell(r), cell(b), ratio);
    }
}

/// Normal draws per iteration of the noise-source group.
const DRAWS: usize = 1 << 20;

fn bench_noise(c: &mut Criterion) {
    let mut g = c.benchmark_group("normal draws");
    g.sample_size(20);
    g.warm_up_time(Duration::from_secs(1));
    g.throughput(Throughput::Elements(DRAWS as u64));
    let mut buf = vec![0.0f64; DRAWS];
    g.bench_function("xoshiro256++ bits, rand_distr ziggurat (the simulator's)", |b| {
        let mut n = Gaussian::from_seed(1);
        b.iter_custom(|iters| {
            let t = ThreadTime::now();
            for _ in 0..iters {
                n.fill_scaled(&mut buf, 1.0);
                black_box(&buf);
            }
            record(0, "xoshiro", iters, t.elapsed())
        })
    });
    g.bench_function("ChaCha8 bits, rand_distr ziggurat", |b| {
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        b.iter_custom(|iters| {
            let t = ThreadTime::now();
            for _ in 0..iters {
                for x in buf.iter_mut() {
                    *x = StandardNormal.sample(&mut rng);
                }
                black_box(&buf);
            }
            record(0, "chacha", iters, t.elapsed())
        })
    });
    g.finish();
    let t = TIMES.lock().unwrap_or_else(|e| e.into_inner());
    for (w, name) in [("xoshiro", "xoshiro256++"), ("chacha", "ChaCha8")] {
        if let Some(v) = t.get(&(0, w)).filter(|v| !v.is_empty()) {
            println!("normal draw, {name} bits: {:.2} ns", median(v) / DRAWS as f64 * 1e9);
        }
    }
}

fn main() {
    let mut c = Criterion::default().configure_from_args();
    bench_head::<4>(&mut c, "reference4", Head::reference4());
    bench_head::<6>(&mut c, "triads6", Head::triads6());
    summary();
    bench_noise(&mut c);
    c.final_summary();
}
