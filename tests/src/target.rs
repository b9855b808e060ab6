//! Building and measuring the target images: the board image's size from its
//! ELF section headers, the emulator image under QEMU.

use std::path::{Path, PathBuf};
use std::process::Command;

/// The workspace root.
pub fn workspace() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).parent().expect("tests/ sits in the workspace").to_path_buf()
}

fn cargo() -> String {
    std::env::var("CARGO").unwrap_or_else(|_| "cargo".into())
}

/// The board's target triple.
pub const TARGET: &str = "thumbv7em-none-eabihf";

/// True when the active toolchain (the one `rust-toolchain.toml` pins) has the board target's
/// standard library installed.
pub fn have_target() -> bool {
    let rustc = std::env::var("RUSTC").unwrap_or_else(|_| "rustc".into());
    Command::new(rustc)
        .current_dir(workspace())
        .args(["--print", "sysroot"])
        .output()
        .ok()
        .filter(|o| o.status.success())
        .map(|o| Path::new(String::from_utf8_lossy(&o.stdout).trim()).join("lib/rustlib").join(TARGET).join("lib").is_dir())
        .unwrap_or(false)
}

/// Install the board target into the pinned toolchain with rustup when it is missing (a
/// toolchain installed without it builds the host crates but not the board:
/// "can't find crate for `core`").
pub fn ensure_target() -> Result<(), String> {
    if have_target() {
        return Ok(());
    }
    eprintln!("the {TARGET} target is not installed for the pinned toolchain: installing it with rustup");
    let ok =
        Command::new("rustup").current_dir(workspace()).args(["target", "add", TARGET]).status().map(|s| s.success()).map_err(|e| {
            format!("the {TARGET} target is missing and rustup cannot be run ({e}): install it with `rustup target add {TARGET}`")
        })?;
    if ok && have_target() {
        Ok(())
    } else {
        Err(format!("the {TARGET} target is missing and `rustup target add {TARGET}` failed"))
    }
}

/// The target folder of the board and emulator images, `target/board/`: a folder of its own,
/// so the board-image and emulator tests can build while `cargo test` holds `target/`; the
/// images share their dependencies there, and the test finds what `cargo board` built already
/// (CI builds it once).
pub fn board_dir() -> PathBuf {
    workspace().join("target").join("board")
}

/// Build the board image (profile `board`) into [`board_dir`]; its path.
pub fn build_board() -> Result<PathBuf, String> {
    ensure_target()?;
    let ws = workspace();
    let dir = board_dir();
    let out = Command::new(cargo())
        .current_dir(&ws)
        .args([
            "build",
            "-p",
            "undertone-firmware",
            "--features",
            "board",
            "--bin",
            "undertone-board",
            "--target",
            "thumbv7em-none-eabihf",
            "--profile",
            "board",
            "--target-dir",
        ])
        .arg(&dir)
        .output()
        .map_err(|e| format!("cannot run cargo: {e}"))?;
    if !out.status.success() {
        return Err(format!("building the board image failed:\n{}", String::from_utf8_lossy(&out.stderr)));
    }
    Ok(dir.join("thumbv7em-none-eabihf/board/undertone-board"))
}

/// The board's flash budget, bytes: 128 KiB, so an STM32G431-class part still takes the image
/// (the board's own STM32F411CE has 512 KiB). BENCHMARKS.md keeps the figure.
pub const FLASH_BUDGET: u64 = 128 * 1024;
/// Static RAM budget, bytes.
pub const RAM_BUDGET: u64 = 32 * 1024;

/// How the emulator image is compiled.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum EmuProfile {
    /// The board's profile (`board`: smallest code): what the board runs, for the whole
    /// application's cost.
    Board,
    /// `release` (fastest code): the DSP kernels' cost table of `cargo target-bench`.
    Release,
}

/// Build the emulator image in [`board_dir`].
pub fn build_emu(profile: EmuProfile) -> Result<PathBuf, String> {
    ensure_target()?;
    let ws = workspace();
    let dir = board_dir();
    let name = match profile {
        EmuProfile::Board => "board",
        EmuProfile::Release => "release",
    };
    let out = Command::new(cargo())
        .current_dir(&ws)
        .args(["build", "-p", "undertone-emu", "--target", TARGET, "--profile", name, "--target-dir"])
        .arg(&dir)
        .output()
        .map_err(|e| format!("cannot run cargo: {e}"))?;
    if !out.status.success() {
        return Err(format!("building the emulator image failed:\n{}", String::from_utf8_lossy(&out.stderr)));
    }
    Ok(dir.join(TARGET).join(name).join("undertone-emu"))
}

/// True when `qemu-system-arm` runs.
pub fn have_qemu() -> bool {
    Command::new("qemu-system-arm").arg("--version").output().map(|o| o.status.success()).unwrap_or(false)
}

/// Run an image under QEMU `mps2-an386` with `-icount shift=0`; its semihosting output.
pub fn run_qemu(image: &Path) -> Result<String, String> {
    let out = Command::new("timeout")
        .args([
            "300",
            "qemu-system-arm",
            "-machine",
            "mps2-an386",
            "-cpu",
            "cortex-m4",
            "-nographic",
            "-monitor",
            "none",
            "-serial",
            "none",
        ])
        .args(["-semihosting-config", "enable=on,target=native", "-icount", "shift=0", "-kernel"])
        .arg(image)
        .output()
        .map_err(|e| format!("cannot run qemu-system-arm: {e}"))?;
    if !out.status.success() {
        return Err(format!(
            "QEMU run failed ({}):\n{}\n{}",
            out.status,
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        ));
    }
    Ok(String::from_utf8_lossy(&out.stdout).to_string())
}

/// Flash and static RAM of a 32-bit little-endian ARM ELF, from its section headers.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ImageSize {
    /// Bytes stored in flash: allocated sections with contents (vector table, code, read-only data, initialised data).
    pub flash: u64,
    /// Bytes of RAM reserved statically: writable allocated sections (.data, .bss, .uninit).
    pub ram: u64,
}

/// Read section sizes (ELF32: e_shoff at 0x20, e_shentsize 0x2E, e_shnum 0x30; section header
/// sh_type at +4, sh_flags at +8, sh_size at +20; SHF_WRITE 1, SHF_ALLOC 2, SHT_NOBITS 8).
pub fn image_size(elf: &[u8]) -> Result<ImageSize, String> {
    if elf.len() < 52 || &elf[..4] != b"\x7fELF" || elf[4] != 1 || elf[5] != 1 {
        return Err("not a 32-bit little-endian ELF".into());
    }
    let u16_at = |o: usize| u16::from_le_bytes([elf[o], elf[o + 1]]) as usize;
    let u32_at = |o: usize| u32::from_le_bytes([elf[o], elf[o + 1], elf[o + 2], elf[o + 3]]) as u64;
    let shoff = u32_at(0x20) as usize;
    let shentsize = u16_at(0x2E);
    let shnum = u16_at(0x30);
    let mut size = ImageSize { flash: 0, ram: 0 };
    for i in 0..shnum {
        let h = shoff + i * shentsize;
        if h + 40 > elf.len() {
            return Err("section header out of the file".into());
        }
        let ty = u32_at(h + 4);
        let flags = u32_at(h + 8);
        let sz = u32_at(h + 20);
        if flags & 2 == 0 {
            continue;
        }
        if ty != 8 {
            size.flash += sz;
        }
        if flags & 1 != 0 {
            size.ram += sz;
        }
    }
    Ok(size)
}
