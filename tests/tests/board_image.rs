//! The board image builds for `thumbv7em-none-eabihf` and fits its budget
//! (128 KiB of flash, 32 KiB of static RAM), as `cargo board` reports it.
//!
//! Without the board target the test is listed as ignored with the reason
//! (`rustup target add thumbv7em-none-eabihf`, or `cargo board`, which installs
//! it); `UNDERTONE_REQUIRE_QEMU=1` (set by `.ci/run`) makes it mandatory.

use undertone_tests::target::{build_board, image_size, FLASH_BUDGET, RAM_BUDGET};

#[test]
#[cfg_attr(
    undertone_no_target,
    ignore = "board build NOT RUN: the thumbv7em-none-eabihf target is not installed (run `cargo board`, which installs it)"
)]
fn board_image_builds_within_its_budget() {
    // In `target/board/` (the `cargo test` that runs this holds `target/`), where `cargo board`
    // builds too.
    let elf = build_board().unwrap_or_else(|e| panic!("{e}"));
    let size = image_size(&std::fs::read(&elf).unwrap()).unwrap();
    println!("board image: flash {} bytes of {}, static RAM {} bytes of {}", size.flash, FLASH_BUDGET, size.ram, RAM_BUDGET);
    assert!(size.flash <= FLASH_BUDGET, "flash {} bytes over the budget of {}", size.flash, FLASH_BUDGET);
    assert!(size.ram <= RAM_BUDGET, "static RAM {} bytes over the budget of {}", size.ram, RAM_BUDGET);
}
