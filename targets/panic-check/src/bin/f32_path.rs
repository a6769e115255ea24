//! The f32 path alone: `Calibration::correct` and a unit (its code size, and its own panic check).
#![no_std]
#![no_main]

use logtrim_panic_check::*;

entry!(f32_path::correct_only());
