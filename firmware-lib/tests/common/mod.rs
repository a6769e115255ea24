//! Hand-made calibrations shared by the integration tests (invented values): the file the crate's unit
//! tests declare as `test_units::calibrations`, included here.
#![allow(dead_code)]

use logtrim::calibration::{BiasTerm, Calibration, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL};

#[path = "../../src/test_units/calibrations.rs"]
mod calibrations;
pub use calibrations::*;
