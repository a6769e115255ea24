//! # logtrim-host
//!
//! The host side of logtrim: reading chamber data, fitting calibrations, simulating front ends, generating
//! tables and verifying the firmware math. The `logtrim` binary is a thin layer over this library, so a
//! `build.rs` can call the same functions as the CLI. The correction math itself is firmware-lib's
//! ([`logtrim`]), run here exactly as on the MCU.
//!
//! | module | owns |
//! |---|---|
//! | [`apply`] | writing corrected readings as CSV (the input's columns, every unit, extrapolation, error) |
//! | [`blank`] | blank records from readings of a blank (`logtrim blank`) |
//! | [`batch`] | chamber data into one job per unit; fitting one unit, or a production-line batch in parallel |
//! | [`budget`] | the error budget of a design before any unit is built (contributions, RSS, worst case) |
//! | [`calfile`] | the versioned JSON calibration file (`COEFFS.json`) |
//! | [`fit`] | fitting a calibration to chamber data, model-size selection, the fit report |
//! | [`output`] | writing output files atomically (temporary file, then rename) |
//! | [`frontend`] | the f64 reference model of one front end (physics, noise, the oracle) and the presets |
//! | [`simulate`] | seeded chamber and validation runs of simulated units, and their files |
//! | [`demo`] | the end-to-end demonstration: simulate, fit, correct a held-out run, compare methods |
//! | [`correct`] | correcting readings row by row with the firmware's f32 and fixed paths and field layers |
//! | [`data`] | reading calibration and readings CSV files into typed rows, with precise errors |
//! | [`file_error`] | the one error of a file that cannot be read, written or parsed as JSON |
//! | [`image_file`] | calibration images in files: built from a calibration file, raw binary or Intel HEX |
//! | [`records`] | trim and blank record files: read, checked, installed over a calibration as field layers |
//! | [`report`] | the fit report in Markdown, with its charts, to file with the unit's record |
//! | [`progress`] | progress of a long job (batch, verification), reported to the caller's receiver |
//! | [`plot`] | SVG charts from plain data (line panels, heat maps) and the charts of a calibrated unit |
//! | [`sensor_tool`] | temperature channels from data sheets: thermistor coefficients from points, R–T tables, settings files |
//! | [`emit`] | Rust, C and JSON renderings of a unit's fixed-point tables |
//! | [`tables`] | the fixed-point tables of a calibration (and of a raw temperature channel), universal tables |
//! | [`trim`] | field trims from readings of reference standards (`logtrim trim`) |
//! | [`verify`] | exhaustive verification of the fixed-point and f32 paths against the f64 reference |
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod apply;
pub mod batch;
pub mod blank;
pub mod budget;
pub mod calfile;
pub mod correct;
pub mod data;
pub mod demo;
pub mod emit;
pub mod error_scale;
pub mod file_error;
pub mod fit;
pub mod frontend;
pub mod image_file;
pub mod output;
#[cfg(feature = "plot")]
pub mod plot;
pub mod progress;
pub mod records;
pub mod report;
pub mod sensor_tool;
pub mod simulate;
pub mod tables;
pub mod trim;
pub mod verify;

pub use logtrim;
