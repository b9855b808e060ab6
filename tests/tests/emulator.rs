//! The firmware's application core on the Cortex-M4F, under QEMU's
//! `mps2-an386` machine with `-icount shift=0`, against the same run on the
//! host: every readout must agree to 1e-5 relative. Prints the cost in
//! instructions per channel-sample (SysTick counts one tick per 40
//! instructions under that setting).
//!
//! Needs `qemu-system-arm` and the `thumbv7em-none-eabihf` target. Without
//! QEMU the test says plainly that it did not run, unless
//! `UNDERTONE_REQUIRE_QEMU=1` (set by `.ci/run`) makes it mandatory.

use undertone_tests::target::{build_emu, have_qemu, run_qemu};

fn host_run() -> Vec<String> {
    let mut lines = Vec::new();
    let rep = undertone_firmware::emulated::run(undertone_firmware::emulated::EMU_FRAMES, &mut || 0, &mut |l| lines.push(l.to_string()));
    lines.push(format!("E frames={} readouts={} gain_steps={} rejected={}", rep.frames, rep.readouts, rep.gain_steps, rep.rejected));
    lines
}

fn close(a: &str, b: &str) -> bool {
    match (a.parse::<f64>(), b.parse::<f64>()) {
        (Ok(x), Ok(y)) if x.is_nan() && y.is_nan() => true,
        (Ok(x), Ok(y)) => (x - y).abs() <= 1e-5 * x.abs().max(y.abs()).max(1e-30),
        _ => a == b,
    }
}

fn field(line: &str, key: &str) -> u64 {
    line.split_whitespace().find_map(|w| w.strip_prefix(key)).and_then(|v| v.parse().ok()).unwrap_or(0)
}

#[test]
fn emulator_and_host_agree() {
    if !have_qemu() {
        if std::env::var("UNDERTONE_REQUIRE_QEMU").as_deref() == Ok("1") {
            panic!("UNDERTONE_REQUIRE_QEMU=1 but qemu-system-arm is not installed (apt-get install -y qemu-system-arm)");
        }
        println!(
            "emulator check NOT RUN: qemu-system-arm not found (install it, or set UNDERTONE_REQUIRE_QEMU=1 to make this check mandatory)"
        );
        return;
    }
    let image = build_emu().unwrap_or_else(|e| panic!("{e}"));
    let output = run_qemu(&image).unwrap_or_else(|e| panic!("{e}"));
    // "B" lines are the image's cost table (no host twin); the rest is compared.
    let bench: Vec<&str> = output.lines().filter(|l| l.starts_with("B ")).collect();
    let target: Vec<&str> = output.lines().filter(|l| !l.starts_with("B ")).collect();
    let host = host_run();
    let last = *target.last().expect("the image printed something");
    assert!(last.starts_with("E "), "the image did not finish: {last}");
    let readouts = target.iter().filter(|l| l.starts_with("R ")).count();
    assert!(readouts > 50, "{readouts} readouts");
    assert_eq!(target.len(), host.len(), "line counts differ");
    let mut compared = 0;
    let mut worst = 0.0f64;
    for (t, h) in target.iter().zip(&host) {
        if t.starts_with("E ") {
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
    // Over the sonde the target reads the emulated depth (1.2 m below the lower coil).
    let depth: f64 =
        target.iter().rev().find(|l| l.starts_with("R ")).and_then(|l| l.split_whitespace().nth(7)).and_then(|v| v.parse().ok()).unwrap();
    assert!((depth - 1.2).abs() < 0.05, "depth {depth}");
    let frames = field(last, "frames=");
    let rx_ticks = field(last, "receiver_ticks=");
    let drv_ticks = field(last, "driver_ticks=");
    let per = |ticks: u64| ticks as f64 * 40.0 / (frames as f64 * 4.0);
    println!("emulator check: {compared} lines agree with the host run (largest relative difference {worst:.2e})");
    println!("cost on the Cortex-M4F (QEMU mps2-an386, -icount shift=0, 40 instructions per SysTick tick):");
    println!("  receiver (application core): {:.1} instructions per channel-sample", per(rx_ticks));
    println!("  driver reading frames from the emulated converter: {:.1} instructions per channel-sample", per(drv_ticks));
    for b in bench {
        println!("  {b}");
    }
}
