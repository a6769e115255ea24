//! # logtrim-host
//!
//! The host side of logtrim: reading chamber data, fitting calibrations, simulating front ends, generating
//! tables and verifying the firmware math. The `logtrim` binary is a thin layer over this library, so a
//! `build.rs` can call the same functions as the CLI. The correction math itself is firmware-lib's
//! ([`logtrim`]), run here exactly as on the MCU.
//!
//! | module | owns |
//! |---|---|
//! | [`calfile`] | the versioned JSON calibration file (`COEFFS.json`) |
//! | [`output`] | writing output files atomically (temporary file, then rename) |
//! | [`image_file`] | calibration images in files: built from a calibration file, raw binary or Intel HEX |
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod calfile;
pub mod image_file;
pub mod output;

pub use logtrim;
