//! `cargo target-bench`: build the emulator image, run it under QEMU
//! `mps2-an386` with `-icount shift=0` and print the cost table rows
//! (instructions = SysTick ticks × 40 at that setting). Also prints the
//! receiver's state size. Used by CI as a smoke check that the measurement runs.

use std::process::ExitCode;
use undertone_tests::target::{build_emu, have_qemu, run_qemu, EmuProfile};

fn main() -> ExitCode {
    if !have_qemu() {
        eprintln!("target-bench: qemu-system-arm not found (apt-get install -y qemu-system-arm)");
        return ExitCode::FAILURE;
    }
    let out = match build_emu(EmuProfile::Release).and_then(|img| run_qemu(&img)) {
        Ok(o) => o,
        Err(e) => {
            eprintln!("target-bench: {e}");
            return ExitCode::FAILURE;
        }
    };
    let field = |l: &str, k: &str| l.split_whitespace().find_map(|w| w.strip_prefix(k)).and_then(|v| v.parse::<f64>().ok());
    println!("| workload (Cortex-M4F, QEMU mps2-an386, -icount shift=0) | instructions |");
    println!("|---|---|");
    let mut rows = 0;
    for l in out.lines().filter(|l| l.starts_with("B ")) {
        let name = l.split_whitespace().nth(1).unwrap_or("?");
        let ticks = field(l, "ticks=").unwrap_or(f64::NAN);
        if let Some(n) = field(l, "channel_samples=") {
            println!("| {name} | {:.2} per channel-sample |", ticks * 40.0 / n);
            rows += 1;
        } else if let Some(n) = field(l, "fits=") {
            println!("| {name} | {:.0} per fit |", ticks * 40.0 / n);
            rows += 1;
        } else if let Some(n) = field(l, "draws=") {
            println!("| {name} | {:.0} per refresh |", ticks * 40.0 / n);
            rows += 1;
        }
    }
    if let Some(e) = out.lines().find(|l| l.starts_with("E ")) {
        if let (Some(f), Some(t)) = (field(e, "frames="), field(e, "app_ticks=")) {
            println!(
                "| whole application step in the emulated firmware (16 kSPS, 1 ms passes) | {:.2} per channel-sample |",
                t * 40.0 / (f * 4.0)
            );
            rows += 1;
        }
    }
    println!();
    println!(
        "receiver state: Receiver<4> {} bytes, Receiver<6> {} bytes (size_of on this host; the same layout on the target)",
        std::mem::size_of::<undertone_dsp::Receiver<4>>(),
        std::mem::size_of::<undertone_dsp::Receiver<6>>()
    );
    if rows < 5 {
        eprintln!("target-bench: the image printed too few measurements");
        return ExitCode::FAILURE;
    }
    ExitCode::SUCCESS
}
