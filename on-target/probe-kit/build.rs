//! Puts QEMU mps2-an386's `memory.x` on the link search path, where
//! cortex-m-rt's `link.x` finds it, for every binary that uses the harness.

use std::{env, fs, path::PathBuf};

fn main() {
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    fs::copy("../memory.x", out.join("memory.x")).expect("on-target/memory.x exists");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=../memory.x");
    println!("cargo:rerun-if-changed=build.rs");
}
