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
//! | [`emit`] | Rust, C and JSON renderings of a unit's fixed-point tables |
//! | [`output`] | writing output files atomically (temporary file, then rename) |
//! | [`tables`] | the fixed-point tables of a calibration (and of a raw temperature channel), universal tables |
//! | [`verify`] | exhaustive verification of the fixed-point and f32 paths against the f64 reference |
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod calfile;
pub mod emit;
pub mod output;
pub mod tables;
pub mod verify;

pub use logtrim;
