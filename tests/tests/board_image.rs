//! The board image builds for `thumbv7em-none-eabihf` and fits its budget
//! (160 KiB of flash, goal 128 KiB; 32 KiB of static RAM), as `cargo board` reports it.
//!
//! Without the board target the test is listed as ignored with the reason
//! (`rustup target add thumbv7em-none-eabihf`, or `cargo board`, which installs
//! it); `UNDERTONE_REQUIRE_QEMU=1` (set by `.ci/run`) makes it mandatory.

use undertone_tests::target::{build_board_in, image_size, workspace, FLASH_BUDGET, RAM_BUDGET};

#[test]
#[cfg_attr(
    undertone_no_target,
    ignore = "board build NOT RUN: the thumbv7em-none-eabihf target is not installed (run `cargo board`, which installs it)"
)]
fn board_image_builds_within_its_budget() {
    // Its own target folder: the `cargo test` that runs this holds the workspace's.
    let elf = build_board_in(Some(&workspace().join("target").join("board-check"))).unwrap_or_else(|e| panic!("{e}"));
    let size = image_size(&std::fs::read(&elf).unwrap()).unwrap();
    println!("board image: flash {} bytes of {}, static RAM {} bytes of {}", size.flash, FLASH_BUDGET, size.ram, RAM_BUDGET);
    assert!(size.flash <= FLASH_BUDGET, "flash {} bytes over the budget of {}", size.flash, FLASH_BUDGET);
    assert!(size.ram <= RAM_BUDGET, "static RAM {} bytes over the budget of {}", size.ram, RAM_BUDGET);
}
