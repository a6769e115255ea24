//! Why an image was refused ([`ImageError`]), why a calibration cannot be stored ([`ImageValueError`]) and
//! why an image could not be written ([`WriteError`]).

use core::fmt;

use crate::error::Error;
use crate::record::{BufferTooSmall, FormatError};

/// A value that the image format cannot carry or that no reader may use. Checked identically when an image
/// is written and when it is parsed, so whatever the writer accepts the parser accepts too.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ImageValueError {
    /// A stored f32 is NaN or infinite (every stored coefficient is checked, used or not).
    NonFinite {
        /// The layout field (see [`layout`](super::layout)).
        field: &'static str,
        /// The element within an array field (0 for a scalar).
        index: u8,
    },
    /// A term count is larger than the capacity of its table.
    TableSize {
        /// The layout field holding the count.
        field: &'static str,
        /// The count found.
        found: u8,
        /// The largest count allowed.
        capacity: u8,
    },
    /// The decoded calibration fails [`Calibration::validate`](crate::Calibration::validate).
    Calibration(Error),
    /// A table of the fixed section does not have the size its dimensions give (for instance an `offset`
    /// table that is not `t_knots + 2` long, or a `ln_bias` table without the bias bend).
    FixedTableSize {
        /// The table (see [`layout::fixed::TABLES`](super::layout::fixed::TABLES)).
        table: &'static str,
        /// The number of entries found.
        found: u32,
        /// The number its dimensions call for.
        expected: u32,
    },
    /// A field of the fixed section disagrees with the same quantity in the *ranges* section (tables of
    /// another unit or converter).
    FixedMismatch {
        /// The field of the fixed section.
        field: &'static str,
    },
    /// The fixed section was built from another calibration than the image's f32 sections (tables of
    /// another unit spliced in, with the CRC recomputed): its `model_fingerprint` is not the fingerprint of
    /// this image's *ranges* and *model_f32* payloads.
    FixedOtherCalibration {
        /// The fingerprint the fixed section carries.
        stored: u32,
        /// The fingerprint of this image's f32 sections.
        found: u32,
    },
    /// The fixed-point tables fail
    /// [`FixedCalibration::validate`](crate::fixed::FixedCalibration::validate).
    Fixed(Error),
    /// The temperature sensor's description (section `0x8004`) fails
    /// [`TemperatureSensor::validate`](crate::sensor::TemperatureSensor::validate).
    Sensor(Error),
}

/// Why bytes were refused as a calibration image. Every defect has its own variant; the checks run in the
/// order the variants are listed (see [the image docs](super#order-of-the-checks)).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ImageError {
    /// The framing every record shares (magic, version, length, CRC), or a byte rule of a field (a reserved
    /// byte not zero, a flag neither 0 nor 1, an unknown fault code): see [`FormatError`].
    Format(FormatError),
    /// A section header or payload runs past the end of the body.
    SectionOverrun {
        /// Offset of the section header in the image.
        offset: u32,
    },
    /// A section's payload length is not a multiple of 4.
    SectionAlignment {
        /// The section type.
        kind: u16,
        /// The payload length.
        len: u16,
    },
    /// A section of a known type has the wrong payload length for its layout.
    SectionLength {
        /// The section type.
        kind: u16,
        /// The payload length found.
        found: u16,
        /// The payload length of the layout.
        expected: u16,
    },
    /// A critical section type (bit 15 clear) that this build does not know.
    UnknownSection {
        /// The section type.
        kind: u16,
    },
    /// A section type appears more than once.
    DuplicateSection {
        /// The section type.
        kind: u16,
    },
    /// The header's section count differs from the sections in the body.
    SectionCount {
        /// The count in the header.
        declared: u16,
        /// The sections found.
        found: u32,
    },
    /// A required section is absent.
    MissingSection {
        /// The section type.
        kind: u16,
    },
    /// The serial is not printable ASCII followed by NUL padding.
    BadSerial,
    /// A value is out of range (see [`ImageValueError`]).
    Value(ImageValueError),
    /// The fixed section's tables do not fit the caller's
    /// [`FixedStorage`](super::FixedStorage) (the image itself may be fine).
    FixedCapacity {
        /// The table (see [`layout::fixed::TABLES`](super::layout::fixed::TABLES)).
        table: &'static str,
        /// The entries it has.
        needed: u32,
        /// The entries the storage holds.
        capacity: u32,
    },
}

/// Why an image could not be written. Every check runs before the first byte is written, so after any of
/// these the buffer is as it was.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum WriteError {
    /// The buffer is shorter than the image.
    BufferTooSmall(BufferTooSmall),
    /// The serial is longer than 16 bytes or holds something other than printable ASCII (0x20–0x7E).
    BadSerial,
    /// An extra section cannot be stored: its type is one the writer produces itself, or its payload is not
    /// a multiple of 4 bytes or longer than a section can hold.
    BadSection {
        /// The section type.
        kind: u16,
    },
    /// The image would be longer than [`MAX_LEN`](super::layout::MAX_LEN).
    TooLong {
        /// The length it would have.
        len: u32,
    },
    /// A section's payload would be longer than a section can hold (65 532 bytes), or one of its tables
    /// longer than its count field can say.
    SectionTooLong {
        /// The section type.
        kind: u16,
        /// The payload length it would have (saturated at `u32::MAX`).
        len: u32,
    },
    /// The calibration cannot be stored (see [`ImageValueError`]).
    Value(ImageValueError),
}

crate::record::wrap_errors!(ImageError { Value(ImageValueError), Format(FormatError) });
crate::record::wrap_errors!(WriteError { Value(ImageValueError), BufferTooSmall(BufferTooSmall) });

impl fmt::Display for ImageValueError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ImageValueError::NonFinite { field, index } => write!(f, "{field}[{index}] is NaN or infinite"),
            ImageValueError::TableSize { field, found, capacity } => {
                write!(f, "{field} is {found}, more than the capacity {capacity}")
            }
            ImageValueError::Calibration(e) => write!(f, "calibration does not validate: {e}"),
            ImageValueError::FixedTableSize { table, found, expected } => {
                write!(f, "fixed table {table} has {found} entries, its dimensions call for {expected}")
            }
            ImageValueError::FixedMismatch { field } => {
                write!(f, "fixed section's {field} disagrees with the ranges section")
            }
            ImageValueError::FixedOtherCalibration { stored, found } => write!(
                f,
                "fixed section was built from calibration {stored:#010x}, not from this image's ({found:#010x})"
            ),
            ImageValueError::Fixed(e) => write!(f, "fixed-point tables do not validate: {e}"),
            ImageValueError::Sensor(e) => write!(f, "temperature sensor's description does not validate: {e}"),
        }
    }
}

impl fmt::Display for ImageError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ImageError::Format(e) => e.describe(f, "image", "calibration image"),
            ImageError::SectionOverrun { offset } => {
                write!(f, "section at offset {offset} runs past the end of the body")
            }
            ImageError::SectionAlignment { kind, len } => {
                write!(f, "section {kind:#06x} has length {len}, not a multiple of 4")
            }
            ImageError::SectionLength { kind, found, expected } => {
                write!(f, "section {kind:#06x} has length {found}, its layout has {expected}")
            }
            ImageError::UnknownSection { kind } => write!(f, "unknown critical section {kind:#06x}"),
            ImageError::DuplicateSection { kind } => write!(f, "section {kind:#06x} appears twice"),
            ImageError::SectionCount { declared, found } => {
                write!(f, "header declares {declared} sections, the body holds {found}")
            }
            ImageError::MissingSection { kind } => write!(f, "required section {kind:#06x} is missing"),
            ImageError::BadSerial => f.write_str("serial is not printable ASCII with NUL padding"),
            ImageError::Value(e) => write!(f, "{e}"),
            ImageError::FixedCapacity { table, needed, capacity } => write!(
                f,
                "fixed table {table} has {needed} entries, the storage holds {capacity}: a larger FixedStorage is needed"
            ),
        }
    }
}

impl fmt::Display for WriteError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WriteError::BufferTooSmall(e) => write!(f, "{e}"),
            WriteError::BadSerial => f.write_str("serial must be at most 16 printable ASCII characters"),
            WriteError::BadSection { kind } => write!(f, "extra section {kind:#06x} cannot be stored"),
            WriteError::TooLong { len } => write!(f, "image of {len} bytes exceeds the format's maximum"),
            WriteError::SectionTooLong { kind, len } => {
                write!(f, "section {kind:#06x} of {len} bytes exceeds what a section holds")
            }
            WriteError::Value(e) => write!(f, "{e}"),
        }
    }
}

impl core::error::Error for ImageValueError {}
impl core::error::Error for ImageError {}
impl core::error::Error for WriteError {}
