//! Emits the dyeline unit's fixed-point tables into `OUT_DIR` naming the firmware crate `lt`, as
//! `logtrim emit --format rust --crate-path lt` does.
use std::path::PathBuf;

use logtrim_host::calfile::CalFile;
use logtrim_host::emit::{rust, Provenance};
use logtrim_host::tables::TableOptions;

const COEFFS: &str = "../../examples/dyeline/calibration/COEFFS.json";

fn main() {
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-changed={COEFFS}");
    let out = PathBuf::from(std::env::var_os("OUT_DIR").expect("cargo sets OUT_DIR")).join("unit.rs");
    let file = CalFile::load(COEFFS.as_ref()).unwrap_or_else(|e| panic!("{COEFFS}: {e}"));
    let tables = file.fixed_tables(&TableOptions::default()).unwrap_or_else(|e| panic!("{COEFFS}: {e}"));
    let path = rust::CratePath::parse("lt").expect("`lt` is a Rust path");
    let prov = Provenance { unit: file.unit.clone(), source: Some(COEFFS.to_string()) };
    let text = rust::render_with_crate(&tables, &prov, &path);
    logtrim_host::output::write_atomic(&out, text.as_bytes())
        .unwrap_or_else(|e| panic!("{}: {e}", out.display()));
}
