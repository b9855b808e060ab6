//! Link scripts for the board image: cortex-m-rt's link.x with this crate's
//! memory.x, and defmt's, passed to this crate's binary only (so the emulator
//! image, which has its own memory map, is not affected).
use std::{env, fs, path::PathBuf};

fn main() {
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-changed=build.rs");
    let target = env::var("TARGET").unwrap_or_default();
    if target.starts_with("thumb") && env::var_os("CARGO_FEATURE_BOARD").is_some() {
        let out = PathBuf::from(env::var("OUT_DIR").expect("cargo sets OUT_DIR"));
        fs::write(out.join("memory.x"), include_bytes!("memory.x")).expect("OUT_DIR is writable");
        println!("cargo:rustc-link-arg-bins=-L{}", out.display());
        println!("cargo:rustc-link-arg-bins=-Tlink.x");
        println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
    }
}
