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

/// Build the board image (profile `board`); its path.
pub fn build_board() -> Result<PathBuf, String> {
    let ws = workspace();
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
        ])
        .output()
        .map_err(|e| format!("cannot run cargo: {e}"))?;
    if !out.status.success() {
        return Err(format!("building the board image failed:\n{}", String::from_utf8_lossy(&out.stderr)));
    }
    Ok(ws.join("target/thumbv7em-none-eabihf/board/undertone-board"))
}

/// Build the emulator image in its own target folder (no lock shared with a running cargo).
pub fn build_emu() -> Result<PathBuf, String> {
    let ws = workspace();
    let dir = ws.join("target").join("emu-image");
    let out = Command::new(cargo())
        .current_dir(&ws)
        .args(["build", "-p", "undertone-emu", "--target", "thumbv7em-none-eabihf", "--release", "--target-dir"])
        .arg(&dir)
        .output()
        .map_err(|e| format!("cannot run cargo: {e}"))?;
    if !out.status.success() {
        return Err(format!("building the emulator image failed:\n{}", String::from_utf8_lossy(&out.stderr)));
    }
    Ok(dir.join("thumbv7em-none-eabihf/release/undertone-emu"))
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
