//! Says at build time whether the target checks can run here, so that
//! `cargo test` lists them as ignored, with the reason, in its summary instead
//! of passing them silently: the emulator check needs `qemu-system-arm` and the
//! `thumbv7em-none-eabihf` target, the board build needs the target.
//! `UNDERTONE_REQUIRE_QEMU=1` (set by `.ci/run`) makes both mandatory: they run
//! and fail rather than being skipped.
use std::env;
use std::path::{Path, PathBuf};
use std::process::Command;

fn on_path(name: &str) -> Option<PathBuf> {
    env::split_paths(&env::var_os("PATH")?).map(|d| d.join(name)).find(|p| p.is_file())
}

fn main() {
    println!("cargo::rustc-check-cfg=cfg(undertone_no_qemu)");
    println!("cargo::rustc-check-cfg=cfg(undertone_no_target)");
    println!("cargo:rerun-if-env-changed=UNDERTONE_REQUIRE_QEMU");
    println!("cargo:rerun-if-env-changed=PATH");
    println!("cargo:rerun-if-changed=build.rs");
    let required = env::var("UNDERTONE_REQUIRE_QEMU").as_deref() == Ok("1");
    // A path that does not exist makes cargo run this again next time, so installing the
    // missing piece is noticed.
    match on_path("qemu-system-arm") {
        Some(p) => println!("cargo:rerun-if-changed={}", p.display()),
        None => {
            println!("cargo:rerun-if-changed=/usr/bin/qemu-system-arm");
            if !required {
                println!("cargo:rustc-cfg=undertone_no_qemu");
            }
        }
    }
    let rustc = env::var("RUSTC").unwrap_or_else(|_| "rustc".into());
    let sysroot =
        Command::new(rustc).args(["--print", "sysroot"]).output().ok().map(|o| String::from_utf8_lossy(&o.stdout).trim().to_string());
    let lib = sysroot.map(|s| Path::new(&s).join("lib/rustlib/thumbv7em-none-eabihf/lib"));
    match lib {
        Some(l) if l.is_dir() => println!("cargo:rerun-if-changed={}", l.display()),
        other => {
            if let Some(l) = other {
                println!("cargo:rerun-if-changed={}", l.display());
            }
            if !required {
                println!("cargo:rustc-cfg=undertone_no_target");
            }
        }
    }
}
