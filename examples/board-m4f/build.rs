//! Puts `memory.x` where the linker finds it and links with cortex-m-rt's and defmt's scripts (here rather
//! than in `.cargo/config.toml`, so that a build from any folder links the same).
use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(std::env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    std::fs::copy("memory.x", out.join("memory.x")).expect("memory.x beside Cargo.toml");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rustc-link-arg-bins=--nmagic");
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
}
