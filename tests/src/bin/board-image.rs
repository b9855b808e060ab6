//! `cargo board`: build the board image (installing the board target into the
//! pinned toolchain first when it is missing) and report its flash and static
//! RAM against the budget (128 KiB of flash, 32 KiB of RAM); exits non-zero when over.

use std::process::ExitCode;
use undertone_tests::target::{build_board, image_size, FLASH_BUDGET, RAM_BUDGET};

fn main() -> ExitCode {
    let path = match build_board() {
        Ok(p) => p,
        Err(e) => {
            eprintln!("board-image: {e}");
            return ExitCode::FAILURE;
        }
    };
    let size = match std::fs::read(&path).map_err(|e| e.to_string()).and_then(|b| image_size(&b)) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("board-image: {}: {e}", path.display());
            return ExitCode::FAILURE;
        }
    };
    println!("board image: {}", path.display());
    println!("  flash      {:>7} bytes ({:.1} KiB of {} KiB)", size.flash, size.flash as f64 / 1024.0, FLASH_BUDGET / 1024);
    println!("  static RAM {:>7} bytes ({:.1} KiB of {} KiB)", size.ram, size.ram as f64 / 1024.0, RAM_BUDGET / 1024);
    if size.flash > FLASH_BUDGET || size.ram > RAM_BUDGET {
        eprintln!("board-image: over budget");
        return ExitCode::FAILURE;
    }
    ExitCode::SUCCESS
}
