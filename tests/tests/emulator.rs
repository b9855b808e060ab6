//! The firmware's whole application (`App`: driver, queue, receiver, gain
//! steps, supervisor, commands, buttons, battery and the screen in a RAM frame
//! buffer) on the Cortex-M4F, under QEMU's `mps2-an386` machine with
//! `-icount shift=0`, built with the board's own profile, against the same run
//! on the host: every readout must agree to 1e-5 relative, every reply and
//! note exactly, and every screen refresh's frame-buffer checksum exactly.
//! Prints the application's cost in instructions per second and as a share of
//! a 100 MHz Cortex-M4 (SysTick counts one tick per 40 instructions under that
//! setting).
//!
//! Without `qemu-system-arm` or the board target the test is listed as ignored
//! with the reason; `UNDERTONE_REQUIRE_QEMU=1` (set by `.ci/run`) makes it
//! mandatory.

use undertone_firmware::emulated::{EMU_FRAMES, EMU_OSR};
use undertone_tests::target::{build_emu, have_qemu, run_qemu, EmuProfile};

fn host_run() -> Vec<String> {
    let mut lines = Vec::new();
    let rep = undertone_firmware::emulated::run(EMU_FRAMES, &mut || 0, &mut |l| lines.push(l.to_string()));
    lines.push(format!(
        "E frames={} readouts={} screens={} gain_steps={} rejected={}",
        rep.frames, rep.readouts, rep.screens, rep.gain_steps, rep.rejected
    ));
    lines
}

fn close(a: &str, b: &str) -> bool {
    match (a.parse::<f64>(), b.parse::<f64>()) {
        (Ok(x), Ok(y)) if x.is_nan() && y.is_nan() => true,
        (Ok(x), Ok(y)) => (x - y).abs() <= 1e-5 * x.abs().max(y.abs()).max(1e-30),
        _ => a == b,
    }
}

fn field(line: &str, key: &str) -> f64 {
    line.split_whitespace().find_map(|w| w.strip_prefix(key)).and_then(|v| v.parse().ok()).unwrap_or(f64::NAN)
}

#[test]
#[cfg_attr(undertone_no_qemu, ignore = "emulator check NOT RUN: qemu-system-arm not found (apt-get install -y qemu-system-arm)")]
#[cfg_attr(
    undertone_no_target,
    ignore = "emulator check NOT RUN: the thumbv7em-none-eabihf target is not installed (run `cargo board`, which installs it)"
)]
fn emulator_and_host_agree() {
    assert!(have_qemu(), "qemu-system-arm does not run (apt-get install -y qemu-system-arm)");
    let image = build_emu(EmuProfile::Board).unwrap_or_else(|e| panic!("{e}"));
    let output = run_qemu(&image).unwrap_or_else(|e| panic!("{e}"));
    // "B" lines are the image's cost table (no host twin); the rest is compared.
    let bench: Vec<&str> = output.lines().filter(|l| l.starts_with("B ")).collect();
    let target: Vec<&str> = output.lines().filter(|l| !l.starts_with("B ")).collect();
    let host = host_run();
    let last = *target.last().expect("the image printed something");
    assert!(last.starts_with("E "), "the image did not finish: {last}");
    assert!(!target.iter().any(|l| l.starts_with("E ") && *l != last), "the image reported an error");
    let readouts = target.iter().filter(|l| l.starts_with("R ")).count();
    assert!(readouts > 50, "{readouts} readouts");
    assert_eq!(target.len(), host.len(), "line counts differ");
    let (mut compared, mut screens) = (0, 0);
    let mut worst = 0.0f64;
    for (t, h) in target.iter().zip(&host) {
        if t.starts_with("E ") {
            continue;
        }
        if !t.starts_with("R ") {
            // Screens (frame-buffer checksums), replies and notes: exactly the same.
            assert_eq!(t, h);
            screens += t.starts_with("S ") as usize;
            compared += 1;
            continue;
        }
        let (tw, hw): (Vec<&str>, Vec<&str>) = (t.split_whitespace().collect(), h.split_whitespace().collect());
        assert_eq!(tw.len(), hw.len(), "\n target: {t}\n host:   {h}");
        for (a, b) in tw.iter().zip(&hw) {
            assert!(close(a, b), "\n target: {t}\n host:   {h}");
            if let (Ok(x), Ok(y)) = (a.parse::<f64>(), b.parse::<f64>()) {
                if x.is_finite() && y.is_finite() && x != 0.0 {
                    worst = worst.max((x - y).abs() / x.abs());
                }
            }
        }
        compared += 1;
    }
    // The screens compared include the walk in, the point over the sonde, the depth shown and the menu.
    let find = |what: &str| target.iter().find(|l| l.starts_with("S ") && l.contains(what)).copied();
    let walking = find("locate ahead").expect("a refresh while walking toward the sonde");
    let over = find("locate over centred").expect("a refresh over the sonde");
    let depth = find(" depth").expect("a refresh showing the depth");
    let menu = find("text Menu").expect("a refresh of the menu");
    // Over the sonde the target reads the emulated depth (1.2 m below the lower coil).
    let depth_m: f64 =
        target.iter().rev().find(|l| l.starts_with("R ")).and_then(|l| l.split_whitespace().nth(7)).and_then(|v| v.parse().ok()).unwrap();
    assert!((depth_m - 1.2).abs() < 0.05, "depth {depth_m}");
    // The whole application: every pass of the main loop (queue, receiver, gains, supervisor,
    // commands, buttons, battery, screen), in emulated seconds of conversions.
    let fs = EMU_OSR.rate_hz() as f64;
    let seconds = field(last, "frames=") / fs;
    let per_s = field(last, "app_ticks=") * 40.0 / seconds;
    let bench_field =
        |name: &str, key: &str| bench.iter().find(|l| l.split_whitespace().nth(1) == Some(name)).map(|l| field(l, key)).unwrap_or(f64::NAN);
    let rx_per_cs = bench_field("receiver", "ticks=") * 40.0 / bench_field("receiver", "channel_samples=");
    let screen_per = bench_field("screen-draw", "ticks=") * 40.0 / bench_field("screen-draw", "draws=");
    let fit_per = bench_field("six-coil-fit-warm", "ticks=") * 40.0 / bench_field("six-coil-fit-warm", "fits=");
    // What it prints is also kept in `target/emulator-report.txt`.
    let mut report = String::new();
    macro_rules! say {
        ($($t:tt)*) => {{
            let l = format!($($t)*);
            println!("{l}");
            report.push_str(&l);
            report.push('\n');
        }};
    }
    say!("emulator check: {compared} lines agree with the host run (largest relative difference {worst:.2e})");
    say!("  {screens} screen refreshes with equal frame-buffer checksums, among them:");
    for l in [walking, over, depth, menu] {
        say!("    {l}");
    }
    say!("cost on the Cortex-M4F (QEMU mps2-an386, -icount shift=0, 40 instructions per SysTick tick, board profile):");
    say!(
        "  whole application at {:.0} kSPS, 4 coils, 20 readouts/s, 10 refreshes/s: {:.2} M instructions/s = {:.1} % of a 100 MHz Cortex-M4",
        fs / 1000.0,
        per_s / 1e6,
        per_s / 1e6
    );
    say!("  of which the receiver (detector and locator): {rx_per_cs:.1} instructions per channel-sample");
    say!("  of which the screen: {:.0} instructions per refresh ({:.2} % at 10 refreshes/s)", screen_per, screen_per * 10.0 / 1e6);
    say!(
        "  the 32 kSPS board: {:.2} M instructions/s = {:.1} % (receiver at 128 000 channel-samples/s added)",
        (per_s + rx_per_cs * 4.0 * (32_000.0 - fs)) / 1e6,
        (per_s + rx_per_cs * 4.0 * (32_000.0 - fs)) / 1e6
    );
    say!(
        "  a 6-coil head adds the one-station fit: {:.0} instructions per readout ({:.1} % at 20 readouts/s)",
        fit_per,
        fit_per * 20.0 / 1e6
    );
    for b in bench {
        say!("  {b}");
    }
    // Kept for `.ci/run`, which shows it after the test run (a passing test's output is hidden).
    let _ = std::fs::write(undertone_tests::target::workspace().join("target").join("emulator-report.txt"), &report);
}
