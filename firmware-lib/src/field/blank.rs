//! Blank referencing: the reading of a blank (a cuvette of solvent, the open beam, the zero gas) kept in a
//! record of its own, and readings reported relative to it, `x_rel = x − x_blank`, in the f32 path
//! ([`Blank::relative`]) and in the integer path ([`Blank::relative_fixed`]).
//!
//! The blank's x is stored as the **factory** calibration read it, before any field trim. Relative values
//! with a trim in place are formed by [`Layers`](super::Layers): `trim(x) − trim(x_blank) = g·(x − x_blank)`,
//! so a later trim does not invalidate a blank (its offset cancels, its gain applies to both).
//!
//! The record holds x twice, once for each path, because each path should be zero at its own reading of
//! the blank: the f32 path's x as an f32 and the fixed path's as Q24. When the host makes the record both
//! are measured (each by its own path); when an instrument takes a blank through one path, the other is
//! that value converted ([`Blank::from_reading`], [`Blank::from_fixed`], integer conversions only). The two
//! must agree within 2^-10 Np (≈ 0.004 dB), which any two readings of one blank do by far.

use super::header::{self, Codec, RecordError, RecordInfo, RecordValueError};
use super::layout::{self, blank as bl};
use crate::calibration::Reading;
use crate::error::Error;
use crate::fixed::{FixedReading, X_FRAC};
use crate::qformat::{f32_from_q, q_from_f32};
use crate::record::frame::{Extent, Framing, Reader, Writer};
use crate::record::{BufferTooSmall, RecordType};

/// How far the f32 and Q24 forms of one x may differ, Q24 units (2^-10 Np).
pub(super) const AGREEMENT_Q24: i64 = 1 << 14;
/// The largest |x| a record holds, Np (the fixed path's calibrated x range is bounded to ±100 Np).
pub(super) const MAX_ABS_X_NP: i64 = 100;

/// Every field of a blank record, unchecked: what [`Blank::new`] checks.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BlankParts {
    /// Write counter, time and factory binding.
    pub info: RecordInfo,
    /// x at the blank as the f32 path reads it (factory, before any trim), Np.
    pub x: f32,
    /// x at the blank as the fixed path reads it, Q24 Np.
    pub x_q24: i32,
    /// The temperature when the blank was taken, m°C.
    pub temp_mc: i32,
    /// How many readings were averaged into the blank (≥ 1).
    pub samples: u32,
}

/// A checked blank: every value is one the record can carry. Its accessors cannot fail.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Blank {
    parts: BlankParts,
}

/// The value checks of an x stored as f32 and Q24 (shared with the trim's offset), in integer arithmetic.
#[deny(clippy::float_arithmetic)]
pub(super) fn check_x(
    x: f32,
    q: i32,
    f32_field: &'static str,
    q_field: &'static str,
) -> Result<(), RecordValueError> {
    let from_f32 = q_from_f32(x, X_FRAC).ok_or(RecordValueError::NonFinite { field: f32_field })?;
    let bound = (MAX_ABS_X_NP << X_FRAC).unsigned_abs();
    if from_f32.unsigned_abs() > bound {
        return Err(RecordValueError::OutOfRange { field: f32_field });
    }
    if i64::from(q).unsigned_abs() > bound {
        return Err(RecordValueError::OutOfRange { field: q_field });
    }
    if from_f32.abs_diff(i64::from(q)) > AGREEMENT_Q24.unsigned_abs() {
        return Err(RecordValueError::Inconsistent { field: q_field });
    }
    Ok(())
}

impl Blank {
    /// The one checked constructor: x finite and within ±100 Np in both forms, the two forms within 2^-10
    /// Np of each other, at least one sample. Integer arithmetic only.
    #[deny(clippy::float_arithmetic)]
    pub fn new(parts: BlankParts) -> Result<Blank, RecordValueError> {
        check_x(parts.x, parts.x_q24, bl::X_F32.name, bl::X_Q24.name)?;
        if parts.samples == 0 {
            return Err(RecordValueError::NoSamples);
        }
        Ok(Blank { parts })
    }

    /// A blank from an f32-path reading of the blank (a factory reading, before any trim); the Q24 form is
    /// that x rounded to Q24.
    pub fn from_reading(
        info: RecordInfo,
        reading: &Reading,
        temp_mc: i32,
        samples: u32,
    ) -> Result<Blank, RecordValueError> {
        let q = q_from_f32(reading.x, X_FRAC).ok_or(RecordValueError::NonFinite { field: bl::X_F32.name })?;
        let x_q24 = i32::try_from(q).map_err(|_| RecordValueError::OutOfRange { field: bl::X_Q24.name })?;
        Blank::new(BlankParts { info, x: reading.x, x_q24, temp_mc, samples })
    }

    /// x at the blank for the f32 path, Np.
    pub fn x(&self) -> f32 {
        self.parts.x
    }

    /// The temperature when the blank was taken, m°C.
    pub fn temp_mc(&self) -> i32 {
        self.parts.temp_mc
    }

    /// How many readings were averaged into the blank.
    pub fn samples(&self) -> u32 {
        self.parts.samples
    }

    /// A factory reading relative to the blank: `x − x_blank` (no trim; see [`Layers`](super::Layers) for
    /// both). The reading of the blank itself gives exactly 0.
    pub fn relative(&self, reading: &Reading) -> Reading {
        Reading { x: reading.x - self.parts.x, ..*reading }
    }
}

header::record_methods!(Blank, BlankParts, "blank", layout::BLANK_LEN);

#[deny(clippy::float_arithmetic)]
impl Blank {
    /// A blank from a fixed-path reading of the blank (factory, before any trim); the f32 form is the
    /// nearest f32 to that Q24 value, converted without floating-point arithmetic.
    pub fn from_fixed(
        info: RecordInfo,
        reading: &FixedReading,
        temp_mc: i32,
        samples: u32,
    ) -> Result<Blank, RecordValueError> {
        let x = f32_from_q(i64::from(reading.x), X_FRAC);
        Blank::new(BlankParts { info, x, x_q24: reading.x, temp_mc, samples })
    }

    /// x at the blank for the fixed path, Q24 Np.
    pub fn x_q24(&self) -> i32 {
        self.parts.x_q24
    }

    /// The difference `x − x_blank` in Q24, unbounded (i64).
    pub(super) fn difference_q24(&self, reading: &FixedReading) -> i64 {
        i64::from(reading.x) - i64::from(self.parts.x_q24)
    }

    /// A fixed-path factory reading relative to the blank, in integer arithmetic: `x − x_blank` in Q24.
    /// [`Error::AboveRange`]/[`Error::BelowRange`] where the difference leaves the i32 range (±128 Np),
    /// never a wrapped or clamped value.
    pub fn relative_fixed(&self, reading: &FixedReading) -> Result<FixedReading, Error> {
        Ok(FixedReading { x: q24_of(self.difference_q24(reading))?, ..*reading })
    }
}

/// An i64 Q24 value as the i32 of a [`FixedReading`], or the range error on its side.
#[deny(clippy::float_arithmetic)]
pub(super) fn q24_of(v: i64) -> Result<i32, Error> {
    i32::try_from(v).map_err(|_| if v > 0 { Error::AboveRange } else { Error::BelowRange })
}

impl Codec for Blank {
    const FRAMING: Framing = header::framing(RecordType::Blank, bl::VERSION_VALUE, layout::BLANK_LEN);

    fn decode(r: &Reader<'_, RecordError>, info: RecordInfo) -> Result<Blank, RecordError> {
        let parts = BlankParts {
            info,
            x: r.f32(&bl::X_F32)?,
            x_q24: r.i32(&bl::X_Q24)?,
            temp_mc: r.i32(&bl::TEMP_MC)?,
            samples: r.u32(&bl::SAMPLES)?,
        };
        Ok(Blank::new(parts)?)
    }

    fn encode(&self, w: &mut Writer<'_>) -> Result<(), BufferTooSmall> {
        let p = &self.parts;
        w.f32(&bl::X_F32, p.x)?;
        w.i32(&bl::X_Q24, p.x_q24)?;
        w.i32(&bl::TEMP_MC, p.temp_mc)?;
        w.u32(&bl::SAMPLES, p.samples)
    }

    fn header(&self) -> RecordInfo {
        self.parts.info
    }
}

const _: () = assert!(bl::X_F32.offset == layout::header::END);
