//! Link script for the emulator image: cortex-m-rt's link.x with this crate's
//! memory.x, passed to this crate's binary only.
use std::{env, fs, path::PathBuf};

fn main() {
    let target = env::var("TARGET").unwrap_or_default();
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-changed=build.rs");
    if target.starts_with("thumb") {
        let out = PathBuf::from(env::var("OUT_DIR").expect("cargo sets OUT_DIR"));
        fs::write(out.join("memory.x"), include_bytes!("memory.x")).expect("OUT_DIR is writable");
        println!("cargo:rustc-link-arg-bins=-L{}", out.display());
        println!("cargo:rustc-link-arg-bins=-Tlink.x");
    }
}
