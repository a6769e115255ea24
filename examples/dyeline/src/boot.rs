//! At boot: the unit's calibration image from EEPROM, checked once.
//!
//! [`load`] hands the bytes to [`logtrim::image::Image::parse`], which checks magic, version, length,
//! CRC-32 and every value before anything is believed, and gives back the unit's f32
//! [`Calibration`](logtrim::Calibration). A build that also carries the compiled-in fixed-point tables
//! ([`crate::unit`]) checks that the image is the one those tables were built from ([`matches_tables`]): same
//! serial, same calibration time. A unit recalibrated after its firmware was built, or a board that received
//! another unit's EEPROM contents, is caught here instead of reading wrong values.

use logtrim::image::{Image, ImageError};

/// The image does not belong to the tables compiled into this build.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum Mismatch {
    /// The image is of another unit.
    Serial,
    /// The image is of the same unit, but from another calibration.
    CalibratedAt {
        /// The image's calibration time (Unix seconds).
        image: u64,
        /// The tables' calibration time (Unix seconds).
        tables: u64,
    },
}

impl core::fmt::Display for Mismatch {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Mismatch::Serial => {
                write!(f, "the image is of another unit than the tables (built for {})", crate::unit::SERIAL)
            }
            Mismatch::CalibratedAt { image, tables } => write!(
                f,
                "the image is from another calibration (calibrated at {image} s) than the tables ({tables} s)"
            ),
        }
    }
}

impl core::error::Error for Mismatch {}

/// Checks the EEPROM's bytes as exactly one calibration image.
pub fn load(eeprom: &[u8]) -> Result<Image<'_>, ImageError> {
    Image::parse(eeprom)
}

/// Checks that a (valid) image is the one the compiled-in tables were built from.
pub fn matches_tables(image: &Image<'_>) -> Result<(), Mismatch> {
    if image.serial() != crate::unit::SERIAL {
        return Err(Mismatch::Serial);
    }
    if image.calibrated_at() != crate::unit::CALIBRATED_AT {
        return Err(Mismatch::CalibratedAt {
            image: image.calibrated_at(),
            tables: crate::unit::CALIBRATED_AT,
        });
    }
    Ok(())
}
