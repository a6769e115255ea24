//! Field layers on top of the factory calibration: blank referencing, trims against reference standards,
//! and several channels sharing one temperature. None of them ever modifies the factory calibration or its
//! image: each lives in a small record of its own, and each acts on the factory correction's output.
//!
//! | module | owns |
//! |---|---|
//! | [`blank`] | [`Blank`]: the reading of a blank and readings relative to it, `x − x_blank` |
//! | [`trim`] | [`Trim`]: one- and two-point trims `x' = g·x + o`, their computation from standards, [`TrimLimits`] |
//! | [`layers`] | [`Layers`]: a channel's trim and blank, applied in that order to factory readings; `Layered`, a measurement cycle's corrector with them (feature `hal`) |
//! | [`channels`] | [`Bank`] of [`LogChannel`]s, either correction path: several channels, one temperature conversion and stage per cycle |
//! | [`header`] | the records' shared header on the common framing ([`crate::record`]), and their errors |
//! | [`slots`] | two-slot (A/B) storage of a record: [`slots::select`] and [`slots::next_write`], the rule of [`crate::record::slots`] |
//! | [`layout`] | the records' byte layout, described once |
//!
//! Their fixed-point conversions (f32 ↔ Q, °C → m°C) are the crate's, in [`crate::qformat`].
//!
//! # The layers
//!
//! ```text
//! (code, T) ─► factory calibration ─► x ─► trim: g·x + o ─► blank: g·(x − x_blank) ─► value(unit)
//!              (image, untouched)          (trim record)     (blank record)
//! ```
//!
//! * The factory reading x comes from [`Calibration::correct`](crate::Calibration::correct) or
//!   [`FixedCalibration::correct`](crate::fixed::FixedCalibration::correct) as before; a channel with no
//!   trim (or a cleared one) and no blank reports exactly that reading.
//! * Both records store factory-domain values: a trim is computed from factory readings of the standards
//!   (it replaces the last trim, it is not stacked on it), and the blank is the factory reading of the
//!   blank, so a new trim does not invalidate a blank (`trim(x) − trim(x_blank) = g·(x − x_blank)`).
//! * The output of every layer is again a [`Reading`](crate::Reading) or a
//!   [`FixedReading`](crate::fixed::FixedReading), so `value(Unit::Absorbance)` of a blank-relative
//!   reading is the absorbance against the blank, in either path.
//! * Each record carries the fingerprint of the factory calibration it was made on ([`fingerprint`]):
//!   [`Layers::new`] refuses a record made on another calibration (after a recalibration, on another
//!   unit) with [`FieldError::OtherCalibration`].
//!
//! # Records (version 1)
//!
//! A blank record is [`layout::BLANK_LEN`] = 44 bytes, a trim record [`layout::TRIM_LEN`] = 60 bytes:
//! a 24-byte header shared by both, the payload, a CRC-32/ISO-HDLC of everything before it (the framing
//! of every record, [`crate::record`], as for the factory image). Little-endian; f32 values stored
//! bit-exact.
//!
#![doc = include_str!("LAYOUT.md")]
//!
//! Every quantity is stored twice, as an f32 for the f32 path and in fixed point for the integer path,
//! so that each path evaluates exactly its own numbers; the two must agree within 2^-10 of their unit
//! (a check at parse time, in integer arithmetic). The checks and their order are in [`header`].
//!
//! # Example
//!
//! ```
//! use logtrim::field::{self, Blank, Layers, RecordInfo, Standard, Trim, TrimLimits};
//! use logtrim::{Calibration, Unit};
//!
//! let cal = Calibration::nominal(16, 32768.0, 2000.0, 25.0);
//! let info = RecordInfo { sequence: 1, written_at: 1_767_225_600, factory: field::fingerprint(&cal)? };
//!
//! // Two standards of known x read 1 % high and 0.01 Np up: a two-point trim takes both back.
//! let read = |x: f32| 1.01 * x + 0.01;
//! let (a, b) = (Standard { measured: read(-2.0), known: -2.0 }, Standard { measured: read(1.0), known: 1.0 });
//! let trim = Trim::two_point(info, a, b, 25_000, &TrimLimits::DEFAULT)?;
//! let mut bytes = [0u8; field::layout::TRIM_LEN];
//! trim.write(&mut bytes)?;
//! assert_eq!(Trim::parse(&bytes)?, trim);
//!
//! // A blank at the factory reading of code 32768 (x = 0), then the absorbance of a sample against it.
//! let blank = Blank::from_reading(info, &cal.correct(32768, 25.0)?, 25_000, 16)?;
//! let layers = Layers::new(Some(trim), Some(blank), &TrimLimits::DEFAULT, Some(info.factory))?;
//! assert_eq!(layers.apply(&cal.correct(32768, 25.0)?).value(Unit::Absorbance), 0.0);
//! let sample = layers.apply(&cal.correct(32768 - 4000, 25.0)?); // 2 Np below the blank, as read
//! assert!((sample.value(Unit::Absorbance) - 2.0 / 1.01 / core::f32::consts::LN_10).abs() < 1e-4);
//! # Ok::<(), Box<dyn core::error::Error>>(())
//! ```

pub mod blank;
pub mod channels;
pub mod header;
pub mod layers;
pub mod layout;
pub mod slots;
pub mod trim;

#[cfg(test)]
mod tests;

use core::fmt;

pub use blank::{Blank, BlankParts};
pub use channels::{Bank, BankError, Cycle, LogChannel};
pub use header::{RecordError, RecordInfo, RecordValueError};
#[cfg(feature = "hal")]
#[cfg_attr(docsrs, doc(cfg(feature = "hal")))]
pub use layers::Layered;
pub use layers::{Layers, ThroughLayers};
pub use trim::{FixedStandard, Standard, Trim, TrimKind, TrimLimits, TrimParts};

use crate::calibration::Calibration;
use crate::error::Error;
use crate::image::{layout as image_layout, Image, ImageInfo};
use crate::qformat::f32_from_q;
use crate::record::{RecordType, CRC32};

/// Why a trim could not be computed or installed, or a layer not applied.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FieldError {
    /// The factory correction refused a reading.
    Correction(Error),
    /// The trim's offset is past the limit: a sign of a fault, not applied.
    OffsetPastLimit {
        /// The offset, Q24 Np.
        offset_q24: i64,
        /// The largest |offset| allowed, Q24 Np.
        limit_q24: i32,
    },
    /// The trim's gain is past the limit: a sign of a fault, not applied.
    GainPastLimit {
        /// The gain, Q30.
        gain_q30: i64,
        /// The largest |gain − 1| allowed, Q30.
        limit_q30: i32,
    },
    /// The two standards read too close together for a gain.
    StandardsTooClose {
        /// Their separation as read, Q24 Np.
        separation_q24: i64,
        /// The smallest separation allowed, Q24 Np.
        min_q24: i32,
    },
    /// A standard's reading or known value is NaN or infinite.
    NonFinite,
    /// Limits that are negative, not finite or too large.
    BadLimits,
    /// A record made on another factory calibration than the one in use.
    OtherCalibration {
        /// Which record.
        record: RecordType,
        /// The fingerprint the record was made on.
        bound_to: u32,
        /// The fingerprint of the calibration in use.
        in_use: u32,
    },
    /// A value a record cannot carry.
    Value(RecordValueError),
}

crate::record::wrap_errors!(FieldError { Value(RecordValueError), Correction(Error) });

impl fmt::Display for FieldError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let np = |q: i64| f32_from_q(q, crate::fixed::X_FRAC);
        let gain = |q: i64| f32_from_q(q, trim::GAIN_FRAC);
        match *self {
            FieldError::Correction(e) => write!(f, "factory correction: {e}"),
            FieldError::OffsetPastLimit { offset_q24, limit_q24 } => write!(
                f,
                "trim offset {:+.6} Np is past the limit of ±{:.6} Np: a fault, not a drift to trim",
                np(offset_q24),
                np(i64::from(limit_q24))
            ),
            FieldError::GainPastLimit { gain_q30, limit_q30 } => write!(
                f,
                "trim gain {:.6} is past the limit of 1 ± {:.6}: a fault, not a drift to trim",
                gain(gain_q30),
                gain(i64::from(limit_q30))
            ),
            FieldError::StandardsTooClose { separation_q24, min_q24 } => write!(
                f,
                "the standards read {:.6} Np apart, less than the {:.6} Np a gain needs",
                np(separation_q24),
                np(i64::from(min_q24))
            ),
            FieldError::NonFinite => f.write_str("a standard's value is NaN or infinite"),
            FieldError::BadLimits => f.write_str("trim limits must be finite, ≥ 0, and below 100 Np (gain error below 1)"),
            FieldError::OtherCalibration { record, bound_to, in_use } => write!(
                f,
                "the {record} was made on factory calibration {bound_to:#010x}, not on the one in use ({in_use:#010x})"
            ),
            FieldError::Value(e) => write!(f, "{e}"),
        }
    }
}

impl core::error::Error for FieldError {}

/// The fingerprint of a factory calibration: the CRC-32/ISO-HDLC of its image's *ranges* payload followed
/// by its *model_f32* payload (see [`crate::image`]): every bit of the calibration and nothing else — not
/// the serial, the time or the sequence counter, so re-imaging the same calibration keeps it.
pub fn fingerprint(calibration: &Calibration) -> Result<u32, crate::image::WriteError> {
    use image_layout::{header, model_f32, ranges, section};
    let mut buf = [0u8; image_layout::F32_IMAGE_LEN];
    let info = ImageInfo { serial: "", calibrated_at: 0, sequence: 0 };
    crate::image::write(&mut buf, &info, calibration)?;
    // `image::write` puts the ranges section first, then the model (as its docs say).
    let r0 = header::LEN + section::HEADER_LEN;
    let m0 = r0 + ranges::LEN + section::HEADER_LEN;
    let mut d = CRC32.digest();
    d.update(buf.get(r0..r0 + ranges::LEN).unwrap_or(&[]));
    d.update(buf.get(m0..m0 + model_f32::LEN).unwrap_or(&[]));
    Ok(d.finalize())
}

/// The fingerprint of the calibration in a checked image (equal to [`fingerprint`] of
/// [`Image::calibration`]).
pub fn fingerprint_of_image(image: &Image<'_>) -> u32 {
    fingerprint_of_payloads(
        image.section(image_layout::ranges::KIND).unwrap_or(&[]),
        image.section(image_layout::model_f32::KIND).unwrap_or(&[]),
    )
}

/// The fingerprint of a *ranges* payload and a *model_f32* payload.
pub(crate) fn fingerprint_of_payloads(ranges: &[u8], model: &[u8]) -> u32 {
    let mut d = CRC32.digest();
    d.update(ranges);
    d.update(model);
    d.finalize()
}

// Every public type of the module can be logged with defmt (a build with the feature fails otherwise).
#[cfg(feature = "defmt")]
const _: () = {
    const fn is_format<T: defmt::Format>() {}
    is_format::<Blank>();
    is_format::<BlankParts>();
    is_format::<Trim>();
    is_format::<TrimParts>();
    is_format::<TrimKind>();
    is_format::<TrimLimits>();
    is_format::<Standard>();
    is_format::<FixedStandard>();
    is_format::<Layers>();
    is_format::<RecordInfo>();
    is_format::<RecordError>();
    is_format::<RecordValueError>();
    is_format::<FieldError>();
    is_format::<Bank<Calibration, 2>>();
    is_format::<LogChannel<Calibration>>();
    is_format::<Cycle<Calibration, 2>>();
    is_format::<Bank<crate::fixed::FixedCalibration<'static>, 2>>();
    is_format::<LogChannel<crate::fixed::FixedCalibration<'static>>>();
    is_format::<Cycle<crate::fixed::FixedCalibration<'static>, 2>>();
    is_format::<BankError>();
    #[cfg(feature = "hal")]
    is_format::<Layered<Calibration>>();
};
