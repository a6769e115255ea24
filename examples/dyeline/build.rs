//! Build script: turns the unit's calibration file (`calibration/COEFFS.json`) into the fixed-point tables
//! of the firmware's integer path, in `OUT_DIR`, with logtrim-host's library:
//!
//! * `unit_tables.rs`: the tables as Rust `const` items, rendered by the Rust emitter
//!   (`logtrim_host::emit::render(.., Format::Rust, ..)`, what `logtrim emit --format rust` writes), from
//!   `CalFile::fixed_tables(&TableOptions::default())`, the tables `logtrim apply --path fixed` corrects with;
//! * `unit_info.rs`: the unit's serial and calibration time, so that the firmware can check at boot that the
//!   image in its EEPROM is the one these tables were built from.
//!
//! A calibration file that cannot be read, or that does not describe this product (a digital temperature
//! sensor beside the pair, a named unit), stops the build with a message naming the file and the defect.

use std::path::{Path, PathBuf};

use logtrim_host::calfile::CalFile;
use logtrim_host::emit::{self, Format, Provenance};
use logtrim_host::tables::TableOptions;

/// The unit's calibration file, relative to the package root.
const COEFFS: &str = "calibration/COEFFS.json";

fn main() {
    if let Err(message) = run() {
        eprintln!("error: {message}");
        std::process::exit(1);
    }
}

fn env_path(name: &str) -> Result<PathBuf, String> {
    std::env::var_os(name).map(PathBuf::from).ok_or_else(|| format!("cargo did not set {name}"))
}

fn write(path: &Path, text: &str) -> Result<(), String> {
    logtrim_host::output::write_atomic(path, text.as_bytes()).map_err(|e| format!("{}: {e}", path.display()))
}

fn run() -> Result<(), String> {
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-changed={COEFFS}");
    let coeffs = env_path("CARGO_MANIFEST_DIR")?.join(COEFFS);
    let out = env_path("OUT_DIR")?;

    let file = CalFile::load(&coeffs).map_err(|e| e.to_string())?;
    if file.temperature_sensor.is_some() {
        return Err(format!(
            "{COEFFS}: the calibration reads its temperature from a raw thermistor or RTD channel; this firmware \
             reads a digital sensor in °C (temp_c), so it needs a calibration fitted from temp_c data"
        ));
    }
    let serial = match file.unit.as_deref() {
        Some(s) if !s.is_empty() => s.to_string(),
        _ => {
            return Err(format!(
                "{COEFFS}: the calibration names no unit; fit it from a chamber file named after the serial"
            ))
        }
    };
    let tables = file.fixed_tables(&TableOptions::default()).map_err(|e| format!("{COEFFS}: {e}"))?;
    let prov = Provenance { unit: Some(serial.clone()), source: Some(COEFFS.to_string()) };
    write(&out.join("unit_tables.rs"), &emit::render(&tables, Format::Rust, &prov))?;

    let info = format!(
        "// {banner}
// unit: {serial}
// from: {COEFFS}

/// The unit these tables were built for (the calibration file's `unit`).
pub const SERIAL: &str = {serial:?};
/// When the unit was calibrated, seconds since 1970-01-01 UTC (the calibration file's `created_unix_s`).
pub const CALIBRATED_AT: u64 = {created};
/// Flash taken by the unit's tables and header, bytes (the universal tables not included).
pub const TABLE_BYTES: usize = {bytes};
",
        banner = emit::banner(),
        created = file.created_unix_s,
        bytes = tables.bytes(),
    );
    write(&out.join("unit_info.rs"), &info)
}
