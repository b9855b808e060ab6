//! The synthesiser's block paths: the same samples whatever the blocks, the
//! mains synthesis (tabulated or not) against the field projection, and the
//! posed mode (an externally driven receiver) against the dipole field.
//!
//! Field values: the dipole field B = μ0/(4π r³)·[3(m·r̂)r̂ − m] (Griffiths,
//! Introduction to Electrodynamics, eq. 5.89) from `physics::dipole`, whose
//! spot values are checked in `tests/sim.rs`. Amplitudes and phases are
//! measured by a direct DFT over whole periods.

use std::f64::consts::TAU;
use undertone_sim::motion::Pose;
use undertone_sim::physics::{dipole, dot};
use undertone_sim::scenario::Scenario;
use undertone_sim::synth::{HeadGeom, Synth};

fn load(name: &str) -> Scenario {
    Scenario::load(&std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("examples").join(name)).unwrap()
}

fn by_frames<const N: usize>(sc: &Scenario, frames: usize) -> Vec<[i32; N]> {
    let mut s = Synth::new(sc, None);
    let mut f = [0i32; N];
    (0..frames)
        .map_while(|_| {
            let more = s.next_codes(&mut f);
            more.then_some(f)
        })
        .collect()
}

fn by_blocks<const N: usize>(sc: &Scenario, frames: usize, sizes: &[usize]) -> Vec<[i32; N]> {
    let mut s = Synth::new(sc, None);
    let mut out = vec![[0i32; N]; frames];
    let (mut at, mut k) = (0, 0);
    while at < frames {
        let len = sizes[k % sizes.len()].min(frames - at);
        let got = s.fill_codes(&mut out[at..at + len]);
        assert_eq!(got, len);
        at += len;
        k += 1;
    }
    out
}

#[test]
fn blocks_of_any_length_give_the_frame_by_frame_samples() {
    // 4-coil demo (48 kHz: 48 samples per control interval) and 6-coil deep lateral (mains table).
    let frames = 30_000;
    let sizes = [1, 7, 48, 1000, 333, 4801, 2];
    let demo = load("demo.toml");
    assert_eq!(by_frames::<4>(&demo, frames), by_blocks::<4>(&demo, frames, &sizes));
    let deep = load("deep-lateral.toml");
    assert_eq!(by_frames::<6>(&deep, frames), by_blocks::<6>(&deep, frames, &sizes));
    // The end of the stream: the last block is short, then nothing.
    let mut s = Synth::new(&demo, None);
    let mut big = vec![[0i32; 4]; 1 << 16];
    let mut total = 0;
    loop {
        let got = s.fill_codes(&mut big);
        if got == 0 {
            break;
        }
        total += got as u64;
    }
    assert_eq!(total, s.total);
    assert_eq!(s.position(), s.total);
}

/// Amplitude and phase of `f_hz` in `x` (sampled at `fs`) by a direct DFT.
fn tone(x: &[f64], f_hz: f64, fs: f64) -> (f64, f64) {
    let (mut re, mut im) = (0.0, 0.0);
    for (k, v) in x.iter().enumerate() {
        let ph = TAU * f_hz * k as f64 / fs;
        re += v * ph.cos();
        im -= v * ph.sin();
    }
    let n = x.len() as f64;
    (2.0 * (re * re + im * im).sqrt() / n, im.atan2(re))
}

fn mains_scenario(fs: f64) -> Scenario {
    let text = format!(
        r#"
name = "mains check"
[receiver]
sample_rate_hz = {fs}
adc_bits = 32
full_scale_t = 1e-6
gain_mismatch = [0.0, 0.02, -0.01, 0.0]
skew_s = 1e-4
[sonde]
freq_hz = 512
moment_am2 = 1e-6
depth_m = 20
[mains]
grid_hz = 50
field_t = 4e-7
harmonic_decay = 0.7
direction = [0.6, 0.0, 0.8]
[[motion]]
kind = "still"
at = [0.0, 0.0]
heading_deg = 30
duration_s = 1
"#
    );
    Scenario::from_toml(&text, "test").unwrap()
}

#[test]
fn mains_harmonics_carry_the_field_projection_with_or_without_the_table() {
    // 48 000 Hz: the 50 Hz waveform repeats every 960 samples and is tabulated;
    // 48 001 Hz: it does not (within 32 periods) and every harmonic runs as its own tone.
    for fs in [48_000.0, 48_001.0] {
        let sc = mains_scenario(fs);
        let mut s = Synth::new(&sc, None);
        let n = s.total as usize;
        assert_eq!(n, fs as usize, "one second");
        let mut v = vec![[0i32; 4]; n];
        s.fill_codes(&mut v);
        let head = HeadGeom::named(&undertone_sim::scenario::HeadKind::Reference4);
        let (sh, ch) = 30f64.to_radians().sin_cos();
        let dir = [0.6, 0.0, 0.8];
        let gains = [1.0, 1.02, 0.99, 1.0];
        let codes_per_t = i32::MAX as f64 / 1e-6;
        // Harmonics 1-5 are always synthesised, and 10 (500 Hz) as it lies within 200 Hz of the tone.
        for h in [1, 2, 5, 10] {
            let f = 50.0 * h as f64;
            let b = 4e-7 * 0.7f64.powi(h - 1);
            let mut phase0 = None;
            for c in 0..4 {
                let a = head.axis[c];
                let ax = [ch * a[0] - sh * a[1], sh * a[0] + ch * a[1], a[2]];
                let want = (b * dot(dir, ax) * gains[c] * codes_per_t).abs();
                let x: Vec<f64> = v.iter().map(|fr| fr[c] as f64).collect();
                let (amp, ph) = tone(&x, f, fs);
                assert!((amp / want - 1.0).abs() < 1e-6, "fs {fs}, harmonic {h}, coil {c}: {amp} codes, expected {want}");
                // Skew: coil c is sampled c·skew later, so its phase leads by 2πf·c·skew
                // (sign of the projection folded in).
                let ph = if dot(dir, ax) < 0.0 { ph + std::f64::consts::PI } else { ph };
                match phase0 {
                    None => phase0 = Some(ph),
                    Some(p0) => {
                        let d = (ph - p0 - TAU * f * c as f64 * 1e-4 + std::f64::consts::PI).rem_euclid(TAU) - std::f64::consts::PI;
                        assert!(d.abs() < 1e-6, "fs {fs}, harmonic {h}, coil {c}: skew phase off by {d} rad");
                    }
                }
            }
        }
        // Harmonic 6 (300 Hz) is neither among the first five nor near the tone: absent.
        let x: Vec<f64> = v.iter().map(|fr| fr[0] as f64).collect();
        assert!(tone(&x, 300.0, fs).0 < 1.0, "no 300 Hz component");
    }
}

/// A still sonde (or one pushed along its axis) and no noise, for the posed mode.
fn posed_scenario(push: f64) -> Scenario {
    let text = format!(
        r#"
name = "posed check"
[receiver]
sample_rate_hz = 8000
adc_bits = 32
full_scale_t = 1e-6
height_m = 0.2
[sonde]
freq_hz = 500
moment_am2 = 0.5
depth_m = 1.5
x_m = 0.3
yaw_deg = 20
push_speed_m_s = {push}
[[motion]]
kind = "walk"
from = [-2.0, 0.0]
to = [2.0, 0.0]
speed_m_s = 0.5
heading_deg = 0
"#
    );
    Scenario::from_toml(&text, "test").unwrap()
}

/// Amplitude (codes) of the sonde's tone on coil `c` for the receiver at `pose` at time t (Griffiths eq. 5.89).
fn expected(s: &Synth, c: usize, pose: Pose, t: f64) -> f64 {
    let head = HeadGeom::named(&undertone_sim::scenario::HeadKind::Reference4);
    let (sh, ch) = pose.heading_rad.sin_cos();
    let rot = |v: [f64; 3]| [ch * v[0] - sh * v[1], sh * v[0] + ch * v[1], v[2]];
    let p0 = rot(head.pos[c]);
    let p = [pose.x_m + p0[0], pose.y_m + p0[1], 0.2 + p0[2]];
    let sonde = s.truth_at(pose, t).sonde_m;
    let yaw = 20f64.to_radians();
    let m = [0.5 * yaw.cos(), 0.5 * yaw.sin(), 0.0];
    dot(dipole(m, sonde, p), rot(head.axis[c])).abs() * i32::MAX as f64 / 1e-6
}

#[test]
fn posed_blocks_on_the_control_grid_reproduce_the_scenario_walk() {
    // The walk is a straight line at constant speed with a fixed heading, so poses
    // interpolated linearly between block ends are the walk's own poses.
    let sc = posed_scenario(0.0);
    let mut walk = Synth::new(&sc, None);
    let mut posed = Synth::new(&sc, None);
    let n = walk.total as usize;
    let mut a = vec![[0i32; 4]; n];
    walk.fill_codes(&mut a);
    let mut b = vec![[0i32; 4]; n];
    let block = 80; // 10 ms, ten control intervals
    for (k, chunk) in b.chunks_mut(block).enumerate() {
        let t0 = (k * block) as f64 / 8000.0;
        let t1 = t0 + chunk.len() as f64 / 8000.0;
        posed.fill_codes_posed(walk.scenario_pose(t0), walk.scenario_pose(t1), chunk);
    }
    let worst = a.iter().zip(&b).flat_map(|(x, y)| x.iter().zip(y).map(|(p, q)| (*p as i64 - *q as i64).abs())).max().unwrap();
    let peak = a.iter().flat_map(|f| f.iter().map(|c| (*c as i64).abs())).max().unwrap();
    // The same field at the same knots; the poses differ only by rounding.
    assert!(worst as f64 <= 1e-9 * peak as f64 + 1.0, "largest difference {worst} codes of {peak}");
    for t in [0.0, 3.3, 7.9] {
        assert_eq!(walk.truth(t), walk.truth_at(walk.scenario_pose(t), t));
    }
}

#[test]
fn posed_blocks_of_any_length_follow_the_given_pose() {
    // The receiver held at poses the scenario never visits, in blocks of 1 to 7 ms
    // (not aligned with the 1 ms control grid), then moved: each stop's amplitude is
    // the field projection at that pose.
    let sc = posed_scenario(0.0);
    let mut s = Synth::new(&sc, None);
    let stops = [
        Pose { x_m: 0.9, y_m: -0.7, heading_rad: 1.1 },
        Pose { x_m: -0.4, y_m: 0.5, heading_rad: -2.6 },
        Pose { x_m: 0.3, y_m: 0.0, heading_rad: 3.1 },
    ];
    let mut t = 0.0;
    for (i, &pose) in stops.iter().enumerate() {
        // Move there over 0.1 s, then hold for 0.25 s (125 cycles of 500 Hz) in ragged blocks.
        let from = if i == 0 { pose } else { stops[i - 1] };
        let mut mv = vec![[0i32; 4]; 800];
        s.fill_codes_posed(from, pose, &mut mv);
        let mut held = Vec::new();
        let mut k = 0;
        while held.len() < 2000 {
            let len = [8, 21, 56, 13, 40, 17][k % 6].min(2000 - held.len());
            let mut blk = vec![[0i32; 4]; len];
            s.fill_codes_posed(pose, pose, &mut blk);
            held.extend(blk);
            k += 1;
        }
        t += 0.1;
        for c in 0..4 {
            let want = expected(&s, c, pose, t);
            let x: Vec<f64> = held.iter().map(|f| f[c] as f64).collect();
            let (amp, _) = tone(&x, 500.0, 8000.0);
            assert!((amp - want).abs() < 1e-6 * want + 2.0, "stop {i}, coil {c}: {amp} codes, expected {want}");
        }
        t += 0.25;
    }
    assert_eq!(s.position(), 3 * 2800);
}

#[test]
fn a_pushed_sonde_keeps_moving_in_the_posed_mode() {
    // Receiver held still at the origin; the sonde moves 0.5 m/s along its axis.
    // Past the scenario's 8 s the stream goes on, and the tone's amplitude over each
    // 0.1 s window is the mean of the field projection over the window.
    let sc = posed_scenario(0.5);
    let mut s = Synth::new(&sc, None);
    let pose = Pose { x_m: 0.0, y_m: 0.0, heading_rad: 0.4 };
    let fs = 8000.0;
    let mut buf = vec![[0i32; 4]; 800];
    for w in 0..100 {
        s.fill_codes_posed(pose, pose, &mut buf);
        if w % 33 != 0 {
            continue;
        }
        let t0 = w as f64 * 0.1;
        for c in [0, 2] {
            let want = (0..800).map(|k| expected(&s, c, pose, t0 + k as f64 / fs)).sum::<f64>() / 800.0;
            let x: Vec<f64> = buf.iter().map(|f| f[c] as f64).collect();
            let (amp, _) = tone(&x, 500.0, fs);
            assert!((amp / want - 1.0).abs() < 1e-3, "t {t0} s, coil {c}: {amp} codes, expected {want}");
        }
    }
    let (a, b) = (s.truth_at(pose, 0.0).sonde_m, s.truth_at(pose, 10.0).sonde_m);
    let moved = ((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2)).sqrt();
    assert!((moved - 5.0).abs() < 1e-12, "moved {moved} m in 10 s");
    assert_eq!(s.position(), 80_000);
    assert!(s.position() > s.total, "not limited by the scenario's duration");
}
