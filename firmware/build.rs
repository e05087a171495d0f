//! Link set-up for the firmware's bare-metal binaries.
//!
//! Only for bare-metal targets: puts `memory.x` where the linker finds it and passes
//! cortex-m-rt's `link.x` to the binaries. The linker script goes through
//! `cargo:rustc-link-arg-bins`, not through `.cargo/config.toml` rustflags: any `RUSTFLAGS` in
//! the environment silently replaces config rustflags and the link then yields an empty ELF.
//! Host builds (the library and its tests) get nothing from here.

use std::{env, fs, path::PathBuf};

fn main() {
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-changed=build.rs");
    if env::var("CARGO_CFG_TARGET_OS").as_deref() != Ok("none") {
        return;
    }
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    fs::copy("memory.x", out.join("memory.x")).expect("copy memory.x into OUT_DIR");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
}
