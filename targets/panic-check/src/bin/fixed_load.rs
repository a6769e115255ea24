//! Loading a fixed-point calibration from an image, without correcting: the baseline that
//! `scripts/target-sizes.sh` subtracts from `fixed_path` to give the correction's own size.
#![no_std]
#![no_main]

use logtrim_panic_check::*;

entry!(fixed_path::with_calibration(|cal| keep(cal)));
