//! # logtrim-host
//!
//! The host side of logtrim: reading chamber data, fitting calibrations, simulating front ends, generating
//! tables and verifying the firmware math. The `logtrim` binary is a thin layer over this library, so a
//! `build.rs` can call the same functions as the CLI. The correction math itself is firmware-lib's
//! ([`logtrim`]), run here exactly as on the MCU.
//!
//! The library speaks no command line and prints nothing: its errors name files, lines, values and what was
//! expected; long jobs report [`progress`] to a receiver the caller gives.
//!
//! | module | owns |
//! |---|---|
//! | **data in** | |
//! | [`data`] | reading calibration and readings CSV files into typed rows, with precise errors |
//! | [`calfile`] | the versioned JSON calibration file (`COEFFS.json`), made from a fit in one place |
//! | [`records`] | trim and blank record files: read, checked, installed over a calibration as field layers |
//! | [`file_error`] | the one error of a file that cannot be read, written or parsed as JSON |
//! | **design and simulation** | |
//! | [`frontend`] | the one description of a design: the f64 reference model of a front end, the oracle, presets |
//! | [`simulate`] | seeded chamber and validation runs of simulated units, and their files |
//! | [`budget`] | the error budget of a design before any unit is built (contributions, RSS, worst case) |
//! | [`demo`] | the end-to-end demonstration: simulate, fit, correct a held-out run, compare methods |
//! | **calibration** | |
//! | [`fit`] | fitting a calibration to chamber data, model-size selection, the fit's summary |
//! | [`batch`] | chamber data into one job per unit; fitting one unit, or a production-line batch in parallel, with its summary |
//! | [`acceptance`] | a product's acceptance limits and every unit's verdict (PASS/FAIL with reasons) |
//! | [`population`] | population models from a characterisation lot: modes of the unit-to-unit spread, the production plan, the prior a unit is fitted against |
//! | [`sensor_tool`] | temperature channels from data sheets: thermistor coefficients, R–T tables, settings files |
//! | **the firmware's paths, run on the host** | |
//! | [`correct`] | correcting readings row by row with the firmware's f32 and fixed paths and field layers |
//! | [`apply`] | writing corrected readings as CSV (the input's columns, every unit, extrapolation, error) |
//! | [`trim`] | field trims from readings of reference standards |
//! | [`blank`] | blank records from readings of a blank |
//! | [`verify`] | exhaustive verification of the fixed-point and f32 paths against the f64 reference |
//! | **outputs** | |
//! | [`tables`] | the fixed-point tables of a calibration (and of a raw temperature channel), universal tables |
//! | [`emit`] | Rust, C and JSON renderings of a unit's fixed-point tables |
//! | [`image_file`] | calibration images in files: built from a calibration file, raw binary or Intel HEX |
//! | [`report`] | the fit report in Markdown; with its charts (feature `plot`), to file with the unit's record |
//! | `plot` | SVG charts from plain data and the charts of a calibrated unit (feature `plot`) |
//! | [`error_scale`] | an error in x in nepers, millinepers, dB and % of ratio: the host's one conversion |
//! | [`output`] | writing output files atomically (temporary file, then rename) |
//! | [`progress`] | progress of a long job (batch, verification), reported to the caller's receiver |
//!
//! # Features
//!
//! * `plot`: SVG charts (`plotters`) — the `plot` module and `report::FitReport::write_to`. The `logtrim`
//!   command turns it on; a `build.rs` that only makes tables leaves it off and compiles no chart or
//!   command-line crate.
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod acceptance;
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
pub mod population;
pub mod progress;
pub mod records;
pub mod report;
pub mod sensor_tool;
pub mod simulate;
pub mod tables;
pub mod trim;
pub mod verify;

pub use logtrim;
