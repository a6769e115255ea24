//! The fixed path alone: `FixedCalibration::correct` and a unit, on a calibration loaded from an image
//! (its code size without the loading, and its own panic check).
#![no_std]
#![no_main]

use logtrim_panic_check::*;

entry!(fixed_path::with_calibration(|cal| fixed_path::correct_only(&cal)));
