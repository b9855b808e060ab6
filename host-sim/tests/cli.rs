//! End-to-end tests of the `undertone` command line.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_undertone"))
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().expect("the binary runs")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).to_string()
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).to_string()
}

fn examples() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("examples")
}

/// A short scenario of our own for quick end-to-end runs (8 s: a short walk along the
/// sonde axis into the point over it, then standing there).
const SHORT: &str = r#"
name = "short test run"
seed = 3
[receiver]
sample_rate_hz = 16000
adc_bits = 24
full_scale_t = 5e-7
height_m = 0.1
[sonde]
freq_hz = 512
moment_am2 = 0.1
depth_m = 1.0
[mains]
grid_hz = 50
field_t = 2e-8
[noise]
density_t_per_rthz = 2e-12
[[motion]]
kind = "walk"
from = [-1.6, 0.0]
to = [0.0, 0.0]
speed_m_s = 0.4
[[motion]]
kind = "still"
at = [0.0, 0.0]
duration_s = 4
"#;

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn one_line_error(o: &Output, want: &str) {
    assert!(!o.status.success(), "should fail: {}", stdout(o));
    let e = stderr(o);
    assert_eq!(e.trim_end().lines().count(), 1, "one line expected: {e}");
    assert!(e.contains(want), "'{want}' not in: {e}");
    assert!(!e.contains("panicked"), "{e}");
}

#[test]
fn help_on_every_command() {
    for c in ["demo", "walk", "synth", "replay", "sweep", "depthcheck", "map", "detect"] {
        let o = run(&[c, "--help"]);
        assert!(o.status.success(), "{c}");
        assert!(stdout(&o).contains("Usage"), "{c}");
    }
}

#[test]
fn demo_prints_report_cautions_and_plots() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    let o = run(&["demo", "--output", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let s = stdout(&o);
    assert!(s.contains("Summary") && s.contains("gradient") && s.contains("CAUTION"), "{s}");
    assert!(s.contains("hand digging") && s.contains("one-call"));
    for f in ["strength.png", "strength.svg", "depth.png", "depth.svg"] {
        let p = out.join(f);
        assert!(std::fs::metadata(&p).map(|m| m.len() > 1000).unwrap_or(false), "{}", p.display());
        assert!(s.contains(&p.display().to_string()), "path printed: {f}");
    }
}

#[test]
fn every_example_walks() {
    let dir = tempfile::tempdir().unwrap();
    for e in ["demo.toml", "garden-drain.toml", "deep-lateral.toml", "camera-head-clay.toml"] {
        let o = run(&["walk", examples().join(e).to_str().unwrap(), "-o", dir.path().join(e).to_str().unwrap()]);
        assert!(o.status.success(), "{e}: {}", stderr(&o));
        assert!(stdout(&o).contains("Summary"), "{e}");
        let m = run(&["map", examples().join(e).to_str().unwrap(), "-o", dir.path().join(format!("map-{e}")).to_str().unwrap()]);
        assert!(m.status.success(), "{e}: {}", stderr(&m));
        assert!(dir.path().join(format!("map-{e}")).join("map-horizontal.png").exists());
    }
}

fn json_lines(s: &str) -> Vec<serde_json::Value> {
    s.lines().map(|l| serde_json::from_str(l).unwrap()).collect()
}

#[test]
fn synth_then_replay_reproduces_walk() {
    let dir = tempfile::tempdir().unwrap();
    let sc = write(dir.path(), "short.toml", SHORT);
    let walk = run(&["walk", sc.to_str().unwrap(), "--json"]);
    assert!(walk.status.success(), "{}", stderr(&walk));
    let walk = json_lines(&stdout(&walk));
    assert!(walk.len() > 100);
    for (fmt, exact) in [("i24", true), ("i32", true), ("f32", false), ("i16", false)] {
        let wav = dir.path().join(format!("short-{fmt}.wav"));
        let o = run(&["synth", sc.to_str().unwrap(), "-o", wav.to_str().unwrap(), "--format", fmt]);
        assert!(o.status.success(), "{}", stderr(&o));
        let o = run(&["replay", wav.to_str().unwrap(), "--freq", "512", "--json"]);
        assert!(o.status.success(), "{fmt}: {}", stderr(&o));
        let rep = json_lines(&stdout(&o));
        assert_eq!(rep.len(), walk.len(), "{fmt}");
        let mut depths = 0;
        // The two runs scale their inputs differently (tesla against full scale) in f32, so
        // a reading near a null of the horizontal field, made by cancellation, differs by a few
        // ulps of the largest reading rather than of its own size.
        let peak = walk.iter().filter_map(|a| a["strength"].as_f64()).fold(0.0, f64::max);
        for (a, b) in walk.iter().zip(&rep) {
            for k in ["t_s", "strength", "strength_db", "depth_m", "depth_sigma_m", "bearing_deg", "state", "flags"] {
                assert!(b.get(k).is_some(), "{fmt}: replay line lacks {k}");
            }
            assert_eq!(a["t_s"], b["t_s"], "{fmt}");
            // Strength: walk in tesla, replay in full-scale units (full scale = 5e-7 T).
            let (sa, sb) = (a["strength"].as_f64().unwrap(), b["strength"].as_f64().unwrap() * 5e-7);
            let tol = if exact { 1e-5 } else { 1e-2 };
            assert!((sa - sb).abs() <= tol * sa.max(1e-2 * peak), "{fmt}: strength {sa} vs {sb}");
            if exact {
                assert_eq!(a["state"], b["state"]);
                assert_eq!(a["depth_m"].is_null(), b["depth_m"].is_null(), "{fmt} at {}", a["t_s"]);
                if let (Some(x), Some(y)) = (a["depth_m"].as_f64(), b["depth_m"].as_f64()) {
                    assert!((x - y).abs() < 1e-4 * x);
                    depths += 1;
                }
            }
        }
        if exact {
            assert!(depths > 10, "{fmt}: the still part reads depths");
        }
    }
}

#[test]
fn sweep_and_depthcheck_write_their_files() {
    let dir = tempfile::tempdir().unwrap();
    let sc = write(dir.path(), "short.toml", SHORT);
    let out = dir.path().join("sweep");
    let o = run(&["sweep", sc.to_str().unwrap(), "--bandwidths", "1,4", "--trials", "2", "-o", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stdout(&o).contains("recommended") || stdout(&o).contains("no bandwidth"));
    let csv = std::fs::read_to_string(out.join("sweep.csv")).unwrap();
    assert_eq!(csv.lines().count(), 3, "{csv}");
    assert!(out.join("sweep-lag.png").exists() && out.join("sweep-depth.svg").exists());
    let out = dir.path().join("dc");
    let o = run(&["depthcheck", "-o", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(out.join("depthcheck.csv").exists() && out.join("depthcheck-gradient.png").exists());
}

#[test]
fn bad_inputs_fail_with_one_clear_line() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Missing file.
    one_line_error(&run(&["walk", d.join("nope.toml").to_str().unwrap()]), "nope.toml: cannot read scenario");
    // Malformed TOML.
    let p = write(d, "bad.toml", "name = \"x\"\n[receiver\nsample_rate_hz = 48000\n");
    one_line_error(&run(&["walk", p.to_str().unwrap()]), "bad.toml");
    // Unknown key.
    let p = write(d, "unknown.toml", &SHORT.replace("adc_bits = 24", "adc_bits = 24\nadc_bitz = 3"));
    one_line_error(&run(&["walk", p.to_str().unwrap()]), "unknown field `adc_bitz`");
    // Value out of range, naming the field's path and the allowed range.
    let p = write(d, "range.toml", &SHORT.replace("sample_rate_hz = 16000", "sample_rate_hz = 1000"));
    one_line_error(&run(&["walk", p.to_str().unwrap()]), "receiver.sample_rate_hz = 1000 is not allowed (allowed: 4000 to 250000)");
    let p = write(d, "depth.toml", &SHORT.replace("depth_m = 1.0", "depth_m = -2"));
    one_line_error(&run(&["walk", p.to_str().unwrap()]), "sonde.depth_m = -2 is not allowed");
    // A WAV whose channel count differs from the head.
    let wav3 = d.join("three.wav");
    {
        let spec = hound::WavSpec { channels: 3, sample_rate: 8000, bits_per_sample: 16, sample_format: hound::SampleFormat::Int };
        let mut w = hound::WavWriter::create(&wav3, spec).unwrap();
        for i in 0..3000 {
            w.write_sample((i % 100) as i16).unwrap();
        }
        w.finalize().unwrap();
    }
    one_line_error(&run(&["replay", wav3.to_str().unwrap(), "--freq", "512"]), "has 3 channels but the 4-coil reference head");
    // An unsupported sample format (8-bit).
    let wav8 = d.join("eight.wav");
    {
        let spec = hound::WavSpec { channels: 4, sample_rate: 8000, bits_per_sample: 8, sample_format: hound::SampleFormat::Int };
        let mut w = hound::WavWriter::create(&wav8, spec).unwrap();
        for i in 0..4000 {
            w.write_sample((i % 100) as i8).unwrap();
        }
        w.finalize().unwrap();
    }
    one_line_error(&run(&["replay", wav8.to_str().unwrap(), "--freq", "512"]), "unsupported sample format 8-bit integer");
    // Not a WAV at all.
    let junk = write(d, "junk.wav", "this is not audio");
    one_line_error(&run(&["replay", junk.to_str().unwrap(), "--freq", "512"]), "junk.wav: not a usable WAV file");
    // A frequency at or above half the sample rate (the limit is 0.45 fs).
    let sc = write(d, "short.toml", SHORT);
    let good = d.join("good.wav");
    assert!(run(&["synth", sc.to_str().unwrap(), "-o", good.to_str().unwrap()]).status.success());
    one_line_error(&run(&["replay", good.to_str().unwrap(), "--freq", "8000"]), "beacon frequency 8000 Hz is not allowed");
    // Bad command-line values.
    one_line_error(&run(&["replay", good.to_str().unwrap(), "--freq", "abc"]), "invalid value 'abc'");
    one_line_error(&run(&["sweep", sc.to_str().unwrap(), "--bandwidths", "0.001"]), "--bandwidths: 0.001 Hz is not allowed");
    // No half-written output: a failing synth leaves the good file as it was.
    let before = std::fs::read(&good).unwrap();
    let bad = write(d, "badsynth.toml", &SHORT.replace("moment_am2 = 0.1", "moment_am2 = 1e9"));
    one_line_error(&run(&["synth", bad.to_str().unwrap(), "-o", good.to_str().unwrap()]), "sonde.moment_am2");
    assert_eq!(std::fs::read(&good).unwrap(), before);
    // Writing into a folder that does not exist fails cleanly and leaves nothing.
    let o = run(&["synth", sc.to_str().unwrap(), "-o", d.join("no/such/dir/x.wav").to_str().unwrap()]);
    one_line_error(&o, "x.wav");
    assert!(!d.join("no").exists());
    // No stray temporary files.
    let stray: Vec<_> =
        std::fs::read_dir(d).unwrap().filter_map(|e| e.ok()).filter(|e| e.file_name().to_string_lossy().starts_with(".tmp-")).collect();
    assert!(stray.is_empty(), "{stray:?}");
}
