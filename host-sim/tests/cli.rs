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
    for c in ["demo", "walk", "synth", "replay", "scan", "sweep", "depthcheck", "map", "detect"] {
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
    assert!(s.contains("hand digging") && s.contains("one-call (call-before-you-dig)") && !s.contains("dig-safe"));
    // The strength column says its reference; the detection range comes from the physics,
    // not from where the walk ends (4 m from the point over the sonde).
    assert!(s.contains("dB re 1 nT") && s.contains("dB/nT"), "{s}");
    let range: f64 =
        s.lines().find_map(|l| l.strip_prefix("detection range: ")?.split(" m ").next()?.parse().ok()).expect("detection range line");
    assert!(range > 5.0 && range < 10.0, "{range}");
    // The demo's grid is 50 Hz: no 60 Hz harmonic is quoted.
    assert!(s.contains("50 Hz grid: nearest harmonic 500 Hz") && !s.contains("540 Hz"), "{s}");
    assert!(!s.contains("NaN"), "{s}");
    for f in ["strength.png", "strength.svg", "depth.png", "depth.svg", "map.png"] {
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

/// The readouts of a JSON run and its last line, the summary.
fn readouts_and_summary(s: &str) -> (Vec<serde_json::Value>, serde_json::Value) {
    let mut v = json_lines(s);
    let last = v.pop().expect("a summary line");
    assert!(last.get("summary").is_some(), "last line is the summary: {last}");
    (v, last["summary"].clone())
}

#[test]
fn synth_then_replay_reproduces_walk() {
    let dir = tempfile::tempdir().unwrap();
    let sc = write(dir.path(), "short.toml", SHORT);
    let walk = run(&["walk", sc.to_str().unwrap(), "--json"]);
    assert!(walk.status.success(), "{}", stderr(&walk));
    let (walk, walk_summary) = readouts_and_summary(&stdout(&walk));
    assert!(walk.len() > 100);
    assert!(walk_summary["caution"].as_str().unwrap().contains("hand digging"));
    for (fmt, exact) in [("i24", true), ("i32", true), ("f32", false), ("i16", false)] {
        let wav = dir.path().join(format!("short-{fmt}.wav"));
        let o = run(&["synth", sc.to_str().unwrap(), "-o", wav.to_str().unwrap(), "--format", fmt]);
        assert!(o.status.success(), "{}", stderr(&o));
        let o = run(&["replay", wav.to_str().unwrap(), "--freq", "512", "--json"]);
        assert!(o.status.success(), "{fmt}: {}", stderr(&o));
        let (rep, rep_summary) = readouts_and_summary(&stdout(&o));
        assert_eq!(rep.len(), walk.len(), "{fmt}");
        // A replay has no truth and states its level against full scale, a walk in nT.
        assert!(rep.iter().all(|r| r.get("truth").is_none() && r.get("field_nt").is_none() && r.get("level_dbfs").is_some()));
        assert!(walk.iter().all(|r| r.get("truth").is_some() && r.get("field_db_nt").is_some() && r.get("level_fs").is_none()));
        if exact {
            summaries_agree(&walk_summary, &rep_summary, fmt);
        }
        let mut depths = 0;
        // The two runs scale their inputs differently (tesla against full scale) in f32, so
        // a reading near a null of the horizontal field, made by cancellation, differs by a few
        // ulps of the largest reading rather than of its own size.
        let peak = walk.iter().filter_map(|a| a["field_nt"].as_f64()).fold(0.0, f64::max);
        for (a, b) in walk.iter().zip(&rep) {
            for k in ["t_s", "level_fs", "level_dbfs", "snr_db", "depth_m", "depth_sigma_m", "bearing_deg", "state", "flags"] {
                assert!(b.get(k).is_some(), "{fmt}: replay line lacks {k}");
            }
            assert_eq!(a["t_s"], b["t_s"], "{fmt}");
            // Strength: walk in nT, replay in full-scale units (full scale = 5e-7 T = 500 nT).
            let (sa, sb) = (a["field_nt"].as_f64().unwrap(), b["level_fs"].as_f64().unwrap() * 500.0);
            let tol = if exact { 1e-5 } else { 1e-2 };
            assert!((sa - sb).abs() <= tol * sa.max(1e-2 * peak), "{fmt}: strength {sa} vs {sb}");
            if exact {
                assert_eq!(a["state"], b["state"]);
                assert_eq!(a["depth_m"].is_null(), b["depth_m"].is_null(), "{fmt} at {}", a["t_s"]);
                if let (Some(x), Some(y)) = (a["depth_m"].as_f64(), b["depth_m"].as_f64()) {
                    // The trail's depth comes from a fit that takes a few iterations per readout,
                    // so the two scalings' last bits carry on a little: within 5 % of its σ.
                    let sigma = a["depth_sigma_m"].as_f64().unwrap();
                    assert!((x - y).abs() < 0.05 * sigma, "{fmt} at {}: depth {x} vs {y} (σ {sigma})", a["t_s"]);
                    depths += 1;
                }
            }
        }
        if exact {
            assert!(depths > 10, "{fmt}: the still part reads depths");
        }
    }
}

/// The summary a replay prints from its readouts agrees with the walk's: the strongest
/// readout (its time, and its level once full scale, 5e-7 T = 500 nT, is put back:
/// 20·log10(500) = 53.98 dB), the nulls, each method's medians.
fn summaries_agree(w: &serde_json::Value, r: &serde_json::Value, fmt: &str) {
    let f = |v: &serde_json::Value| v.as_f64().unwrap();
    assert_eq!(w["readouts"], r["readouts"], "{fmt}");
    assert_eq!(w["peak"]["t_s"], r["peak"]["t_s"], "{fmt}");
    let shift = 20.0 * 500f64.log10();
    assert!((f(&w["peak"]["field_db_nt"]) - (f(&r["peak"]["level_dbfs"]) + shift)).abs() < 1e-3, "{fmt}: {w} / {r}");
    assert!((f(&w["peak"]["snr_db"]) - f(&r["peak"]["snr_db"])).abs() < 1e-3, "{fmt}");
    let times = |s: &serde_json::Value| s["nulls"].as_array().unwrap().iter().map(|n| f(&n["t_s"])).collect::<Vec<_>>();
    assert_eq!(times(w), times(r), "{fmt}");
    let (wm, rm) = (w["methods"].as_array().unwrap(), r["methods"].as_array().unwrap());
    assert_eq!(wm.len(), rm.len());
    let mut with_depth = 0;
    for (a, b) in wm.iter().zip(rm) {
        assert_eq!(a["method"], b["method"]);
        assert_eq!(a["count"], b["count"], "{fmt}: {}", a["method"]);
        // The two runs scale their inputs differently in f32 (tesla, full scale): an iterative
        // fit ends a little apart, by far less than its own σ.
        if let (Some(x), Some(y), Some(sd)) = (a["estimate_m"].as_f64(), b["estimate_m"].as_f64(), a["sigma_m"].as_f64()) {
            assert!((x - y).abs() < (1e-4 * x).max(0.1 * sd), "{fmt}: {} {x} vs {y} (σ {sd})", a["method"]);
            with_depth += 1;
        }
        assert!(b.get("truth_m").is_none() && b.get("error_pct").is_none(), "no truth in a replay: {b}");
    }
    assert!(with_depth >= 1, "standing over the sonde, some method reads a depth: {w}");
}

#[test]
fn replay_prints_a_summary_agreeing_with_walk_and_plots() {
    let dir = tempfile::tempdir().unwrap();
    let sc = write(dir.path(), "short.toml", SHORT);
    let wav = dir.path().join("short.wav");
    assert!(run(&["synth", sc.to_str().unwrap(), "-o", wav.to_str().unwrap()]).status.success());
    let out = dir.path().join("replay");
    let o = run(&["replay", wav.to_str().unwrap(), "--freq", "512", "-o", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let s = stdout(&o);
    assert!(s.contains("Summary") && s.contains("strongest readout: t = ") && s.contains("dB re full scale"), "{s}");
    assert!(s.contains("CAUTION") && !s.contains("NaN"), "{s}");
    // No truth: no position or true-depth columns.
    assert!(!s.contains("east") && !s.contains("true"), "{s}");
    for f in ["strength.png", "depth.png", "depth.svg"] {
        assert!(std::fs::metadata(out.join(f)).map(|m| m.len() > 1000).unwrap_or(false), "{f}");
    }
    // The same strongest readout as the walk's report.
    let w = stdout(&run(&["walk", sc.to_str().unwrap(), "-o", dir.path().join("walk").to_str().unwrap()]));
    let peak_t = |s: &str| s.lines().find_map(|l| l.strip_prefix("strongest readout: t = ")?.split(' ').next().map(str::to_string));
    assert_eq!(peak_t(&s), peak_t(&w));
    assert!(peak_t(&s).is_some());
}

#[test]
fn recordings_too_short_for_one_readout_fail_with_one_line() {
    let dir = tempfile::tempdir().unwrap();
    for frames in [0usize, 1] {
        let p = dir.path().join(format!("{frames}.wav"));
        let spec = hound::WavSpec { channels: 4, sample_rate: 16000, bits_per_sample: 16, sample_format: hound::SampleFormat::Int };
        let mut w = hound::WavWriter::create(&p, spec).unwrap();
        for i in 0..4 * frames {
            w.write_sample(i as i16).unwrap();
        }
        w.finalize().unwrap();
        for json in [false, true] {
            let mut args = vec!["replay", p.to_str().unwrap(), "--freq", "512"];
            if json {
                args.push("--json");
            }
            let o = run(&args);
            one_line_error(&o, &format!("{frames}.wav: too short: {frames} frames"));
            assert!(stdout(&o).is_empty(), "nothing on stdout: {}", stdout(&o));
        }
        one_line_error(&run(&["scan", p.to_str().unwrap()]), "too short to scan");
    }
}

/// A 640 Hz sonde whose crystal runs 46.875 ppm slow (639.97 Hz), beside strong 50 Hz mains
/// with slowly falling harmonics (550, 600, 650, 700 Hz all present).
const BEACON_640: &str = r#"
name = "scan test: 639.97 Hz beside mains"
seed = 5
[receiver]
sample_rate_hz = 16000
adc_bits = 24
full_scale_t = 5e-7
[sonde]
freq_hz = 640
ppm = -46.875
moment_am2 = 0.1
depth_m = 1.5
[mains]
grid_hz = 50
field_t = 3e-8
harmonic_decay = 0.8
[noise]
density_t_per_rthz = 2e-12
[[motion]]
kind = "still"
at = [0.3, 0.0]
duration_s = 6
"#;

#[test]
fn scan_finds_the_beacon_beside_mains_and_nothing_in_noise() {
    let dir = tempfile::tempdir().unwrap();
    let sc = write(dir.path(), "beacon.toml", BEACON_640);
    let wav = dir.path().join("beacon.wav");
    assert!(run(&["synth", sc.to_str().unwrap(), "-o", wav.to_str().unwrap()]).status.success());
    let o = run(&["scan", wav.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let tones = json_lines(&stdout(&o));
    let freqs: Vec<f64> = tones.iter().map(|t| t["freq_hz"].as_f64().unwrap()).collect();
    // Strongest first.
    let snrs: Vec<f64> = tones.iter().map(|t| t["snr_db"].as_f64().unwrap()).collect();
    assert!(snrs.windows(2).all(|w| w[0] >= w[1]), "{snrs:?}");
    let beacon = freqs.iter().find(|f| (**f - 639.97).abs() < 0.05).unwrap_or_else(|| panic!("639.97 Hz not found in {freqs:?}"));
    assert!((beacon - 639.97).abs() < 0.05);
    // The mains harmonics are found too, and named as such; none is taken for the beacon.
    assert!(tones
        .iter()
        .any(|t| t["note"].as_str().unwrap().starts_with("mains") && (t["freq_hz"].as_f64().unwrap() - 150.0).abs() < 0.05));
    assert!(tones
        .iter()
        .filter(|t| !t["note"].as_str().unwrap().starts_with("mains"))
        .all(|t| (t["freq_hz"].as_f64().unwrap() - 639.97).abs() < 0.05));
    let text = stdout(&run(&["scan", wav.to_str().unwrap()]));
    assert!(text.contains("639.97") && text.contains("--freq 639.97"), "{text}");

    // White noise alone, 4 channels, 4 s: no tone.
    let noise = dir.path().join("noise.wav");
    {
        use rand::SeedableRng;
        use rand_distr::{Distribution, StandardNormal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let spec = hound::WavSpec { channels: 4, sample_rate: 16000, bits_per_sample: 16, sample_format: hound::SampleFormat::Int };
        let mut w = hound::WavWriter::create(&noise, spec).unwrap();
        for _ in 0..4 * 16000 * 4 {
            let g: f64 = StandardNormal.sample(&mut rng);
            w.write_sample((1000.0 * g) as i16).unwrap();
        }
        w.finalize().unwrap();
    }
    let o = run(&["scan", noise.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(stdout(&o), "", "no tone in noise");
    assert!(stdout(&run(&["scan", noise.to_str().unwrap()])).contains("no tone found at or above 15 dB SNR"));
}

#[test]
fn imperial_units_print_feet_and_inches() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Demo: the sonde 1.5 m down, the lower coil 0.1 m up: 1.6 m = 62.99 in = 5' 3".
    let s = stdout(&run(&["demo", "--units", "imperial", "-o", d.join("demo").to_str().unwrap()]));
    assert!(s.contains("5' 3\""), "{s}");
    assert!(s.contains("    ft      ft"), "position columns in feet: {s}");
    assert!(!s.contains("1.60 m"), "{s}");
    // Walk: 1.1 m = 43.3 in = 3' 7".
    let sc = write(d, "short.toml", SHORT);
    let s = stdout(&run(&["walk", sc.to_str().unwrap(), "--units", "imperial", "-o", d.join("walk").to_str().unwrap()]));
    assert!(s.contains("3' 7\""), "{s}");
    // Replay: each method's median depth, as the JSON summary gives it in metres, in feet and inches.
    let wav = d.join("short.wav");
    assert!(run(&["synth", sc.to_str().unwrap(), "-o", wav.to_str().unwrap()]).status.success());
    let (_, summary) = readouts_and_summary(&stdout(&run(&["replay", wav.to_str().unwrap(), "--freq", "512", "--json"])));
    let text =
        stdout(&run(&["replay", wav.to_str().unwrap(), "--freq", "512", "--units", "imperial", "-o", d.join("r").to_str().unwrap()]));
    let mut seen = 0;
    for m in summary["methods"].as_array().unwrap() {
        if let Some(e) = m["estimate_m"].as_f64() {
            let inches = (e / 0.0254).round() as i64;
            let want = format!("{}' {}\"", inches / 12, inches % 12);
            let line = text.lines().find(|l| l.starts_with(m["method"].as_str().unwrap())).unwrap();
            assert!(line.contains(&want), "{want} in {line}");
            seen += 1;
        }
    }
    assert!(seen >= 1, "{text}");
    // Depth check: its rows are true depths 0.3 m = 11.8 in = 1' 0" and 0.5 m = 19.7 in = 1' 8".
    let s = stdout(&run(&["depthcheck", "--units", "imperial", "-o", d.join("dc").to_str().unwrap()]));
    assert!(s.contains("1' 0\"") && s.contains("1' 8\"") && s.contains("head reference4"), "{s}");
    assert!(s.contains(" %"), "errors carry their unit: {s}");
}

#[test]
fn unknown_names_in_a_scenario_list_the_allowed_ones() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let cases = [
        ("adc_bits = 24", "adc_bits = 24\nhead = \"quad\"", ["unknown variant `quad`", "`reference4`", "`triads6`", "head = \"quad\""]),
        ("[sonde]", "[detector]\nkind = \"fft\"\n[sonde]", ["unknown variant `fft`", "`lockin`", "`block`", "kind = \"fft\""]),
        (
            "[sonde]",
            "[detector]\nkind = \"block\"\nwindow = \"kaiser\"\n[sonde]",
            ["unknown variant `kaiser`", "`rectangular`", "`hann`", "`blackman-harris`"],
        ),
    ];
    for (k, (from, to, want)) in cases.iter().enumerate() {
        let p = write(d, &format!("enum{k}.toml"), &SHORT.replacen(from, to, 1));
        let o = run(&["walk", p.to_str().unwrap(), "-o", d.join("out").to_str().unwrap()]);
        for w in want {
            one_line_error(&o, w);
        }
    }
    // The receiver's own limits, quoted once from its settings.
    let p = write(d, "bw.toml", &SHORT.replace("[sonde]", "[detector]\nbandwidth_hz = 80\n[sonde]"));
    one_line_error(&run(&["walk", p.to_str().unwrap()]), "detector.bandwidth_hz = 80 is not allowed (allowed: 0.05 Hz to 50 Hz)");
    let p = write(d, "h.toml", &SHORT.replace("height_m = 0.1", "height_m = 3"));
    one_line_error(&run(&["walk", p.to_str().unwrap()]), "receiver.height_m = 3 is not allowed (allowed: 0 m to 2 m)");
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
    one_line_error(&run(&["walk", p.to_str().unwrap()]), "receiver.sample_rate_hz = 1000 is not allowed (allowed: 4000 Hz to 250000 Hz)");
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
    // On the limit: refused, saying the limit lies below it; digits as people read them.
    one_line_error(&run(&["replay", good.to_str().unwrap(), "--freq", "7200"]), "to below 7200 Hz (0.45 × the sample rate)");
    one_line_error(&run(&["replay", good.to_str().unwrap(), "--freq", "7.5"]), "allowed: 31.57 Hz (5 × the 6.314 Hz detection bandwidth)");
    // Negative numbers reach the check that names what is allowed.
    one_line_error(&run(&["replay", good.to_str().unwrap(), "--freq", "-5"]), "-5 is not allowed (allowed: above 0)");
    one_line_error(
        &run(&["replay", good.to_str().unwrap(), "--freq", "512", "--coil-height", "-1"]),
        "coil height -1 m is not allowed (allowed: 0 m to 2 m)",
    );
    one_line_error(&run(&["sweep", sc.to_str().unwrap(), "--bandwidths", "1", "--max-lag-m", "nan"]), "--max-lag-m");
    // An output path that cannot be a folder fails before anything is computed or printed.
    let file = write(d, "a-file", "x");
    for cmd in
        [vec!["walk", sc.to_str().unwrap()], vec!["demo"], vec!["depthcheck"], vec!["sweep", sc.to_str().unwrap(), "--bandwidths", "1"]]
    {
        let mut args = cmd.clone();
        args.extend(["-o", file.to_str().unwrap()]);
        let o = run(&args);
        one_line_error(&o, "a-file: cannot create output folder");
        assert!(stdout(&o).is_empty(), "{cmd:?} printed before failing: {}", stdout(&o));
    }
    // Bad command-line values.
    one_line_error(&run(&["replay", good.to_str().unwrap(), "--freq", "abc"]), "invalid value 'abc'");
    one_line_error(&run(&["sweep", sc.to_str().unwrap(), "--bandwidths", "0.001"]), "0.001 Hz is not allowed (allowed: 0.05 to 50 Hz)");
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
