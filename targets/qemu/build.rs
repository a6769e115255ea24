//! Puts `memory.x` where the linker finds it, links with cortex-m-rt's script, and checks that the vector
//! file to include is named.
use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(std::env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    std::fs::copy("memory.x", out.join("memory.x")).expect("memory.x beside Cargo.toml");
    println!("cargo:rustc-link-search={}", out.display());
    // Here rather than in .cargo/config.toml, which cargo reads only when run from this folder.
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-env-changed=LOGTRIM_VECTORS");
    match std::env::var("LOGTRIM_VECTORS") {
        Ok(path) => println!("cargo:rerun-if-changed={path}"),
        Err(_) => {
            eprintln!(
                "error: set LOGTRIM_VECTORS to the vector file made on the host \
                 (`cargo run -p logtrim-vectors --features generate --bin make-vectors -- FILE`); \
                 scripts/qemu-tests.sh does both"
            );
            std::process::exit(1);
        }
    }
}
