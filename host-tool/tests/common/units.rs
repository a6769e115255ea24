//! Hand-made calibrations of invented front ends, for the fixed-path tests, benches and figures: the ones
//! every crate's tests share (their one home is firmware-lib's `src/test_units/calibrations.rs`), and the
//! list of the named ones.
#![allow(dead_code)]

use logtrim::calibration::{BiasTerm, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL};
use logtrim::Calibration;

#[path = "../../../firmware-lib/src/test_units/calibrations.rs"]
mod calibrations;
pub use calibrations::*;

/// Every hand-made unit with a name.
pub fn all() -> Vec<(&'static str, Calibration)> {
    vec![
        ("hard_uncompensated", hard_uncompensated()),
        ("hard_compensated", hard_compensated()),
        ("mild_compensated", mild_compensated()),
        ("ideal", ideal()),
    ]
}
