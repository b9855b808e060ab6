//! Simulator throughput: synthesis of a 60 s walk of 4 channels at 48 kHz
//! (11.5 M channel-samples) plus the receiver on it, as a multiple of real
//! time, on one core. Run: `cargo bench -p undertone-sim --bench simulate`.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use undertone_sim::run::simulate;
use undertone_sim::scenario::Scenario;

const WALK: &str = r#"
name = "60 s throughput walk"
seed = 9
[receiver]
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

fn bench(c: &mut Criterion) {
    let sc = Scenario::from_toml(WALK, "bench").unwrap();
    assert!((sc.duration_s() - 60.0).abs() < 1e-9);
    let mut g = c.benchmark_group("simulate");
    g.sample_size(10);
    g.throughput(Throughput::Elements(60 * 48_000 * 4));
    g.bench_function("60 s walk, 4 channels at 48 kHz: synthesis + receiver", |b| b.iter(|| simulate(&sc, None, None).unwrap().rows.len()));
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
