//! Which record a magic names ([`RecordType`]), why bytes break a record's format ([`FormatError`]: the
//! framing and the byte rules of fields, defined once for every record), and why a buffer cannot take a
//! record ([`BufferTooSmall`]).

use core::fmt;

/// The records logtrim stores, each named by the four bytes it starts with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RecordType {
    /// A blank record (`LTBK`, [`crate::field::Blank`]).
    Blank,
    /// A trim record (`LTTM`, [`crate::field::Trim`]).
    Trim,
    /// A factory calibration image (`LTCI`, [`crate::image`]).
    CalibrationImage,
}

impl RecordType {
    /// Every record type.
    pub const ALL: [RecordType; 3] = [RecordType::Blank, RecordType::Trim, RecordType::CalibrationImage];

    /// The four bytes a record of this type starts with.
    pub const fn magic(self) -> [u8; 4] {
        match self {
            RecordType::Blank => *b"LTBK",
            RecordType::Trim => *b"LTTM",
            RecordType::CalibrationImage => *b"LTCI",
        }
    }

    /// The record type whose magic this is, if any.
    pub fn of_magic(magic: [u8; 4]) -> Option<RecordType> {
        RecordType::ALL.into_iter().find(|t| t.magic() == magic)
    }
}

impl fmt::Display for RecordType {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            RecordType::Blank => "blank record",
            RecordType::Trim => "trim record",
            RecordType::CalibrationImage => "factory calibration image",
        })
    }
}

/// Why bytes break a record's format: its framing (magic, version, length, CRC, checked in the order the
/// variants are listed; see [the order of the checks](super#order-of-the-framing-checks)) or the byte rules
/// of its fields (reserved bytes, flags, enumerations). The same for every record; each record's own error
/// type ([`ImageError`](crate::image::ImageError), [`RecordError`](crate::field::RecordError)) carries it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FormatError {
    /// Fewer bytes than it takes to read the header's length, or than the length it declares.
    Truncated {
        /// Bytes needed.
        needed: u32,
        /// Bytes available.
        available: u32,
    },
    /// The first four bytes are no record's magic: erased flash (all `0xff`), blank EEPROM (all `0x00`) or
    /// foreign data.
    BadMagic {
        /// The bytes found.
        found: [u8; 4],
    },
    /// The magic of another record: a blank where a trim was expected, a calibration image, ….
    OtherRecord {
        /// What the caller asked for.
        expected: RecordType,
        /// What the bytes are.
        found: RecordType,
    },
    /// A format version this build does not read.
    UnsupportedVersion {
        /// The version found.
        found: u16,
        /// The version this build reads.
        supported: u16,
    },
    /// The declared length is impossible for the format: outside `min..=max` or not a multiple of 4.
    BadLength {
        /// The length declared.
        declared: u32,
        /// The shortest record of the format (`min == max` for a format of one length).
        min: u32,
        /// The longest record of the format.
        max: u32,
    },
    /// The bytes hold more than the declared record (`parse` wants exactly one record; `parse_prefix`
    /// allows bytes after it).
    LengthMismatch {
        /// The length declared.
        declared: u32,
        /// The length of the bytes given.
        actual: u32,
    },
    /// The stored CRC is not the CRC of the record: it was corrupted or not written completely.
    CrcMismatch {
        /// The CRC stored in the trailer.
        stored: u32,
        /// The CRC computed over the record.
        computed: u32,
    },
    /// A reserved or padding byte is not zero.
    ReservedNotZero {
        /// Offset of the byte in the record.
        offset: u32,
    },
    /// A flag byte holds something other than 0 or 1.
    BadFlag {
        /// The layout field.
        field: &'static str,
        /// The value found.
        found: u8,
    },
    /// A byte that encodes one of a few choices (a trim's kind, a sensor fault) holds none of them.
    BadEnum {
        /// The layout field.
        field: &'static str,
        /// The value found.
        found: u8,
    },
}

impl FormatError {
    /// Writes the error for a record called `name` (`calibration image`), or `short` (`image`) where the
    /// sentence wants a short noun.
    pub(crate) fn describe(&self, f: &mut fmt::Formatter<'_>, short: &str, name: &str) -> fmt::Result {
        match *self {
            FormatError::Truncated { needed, available } => {
                write!(f, "{short} truncated: {available} bytes, {needed} needed")
            }
            FormatError::BadMagic { found: [a, b, c, d] } => write!(
                f,
                "not a {name}: starts with {a:02x} {b:02x} {c:02x} {d:02x} (erased or foreign data)"
            ),
            FormatError::OtherRecord { expected, found } => write!(f, "a {found}, not a {expected}"),
            FormatError::UnsupportedVersion { found, supported } => {
                write!(f, "{short} format version {found} is not supported (this build reads {supported})")
            }
            FormatError::BadLength { declared, min, max } if min == max => {
                write!(f, "declared {short} length {declared} is not the format's {min}")
            }
            FormatError::BadLength { declared, min, max } => write!(
                f,
                "declared {short} length {declared} is impossible (a multiple of 4 from {min} to {max})"
            ),
            FormatError::LengthMismatch { declared, actual } => {
                write!(f, "{short} declares {declared} bytes but {actual} were given")
            }
            FormatError::CrcMismatch { stored, computed } => {
                write!(f, "CRC mismatch: stored {stored:#010x}, computed {computed:#010x}")
            }
            FormatError::ReservedNotZero { offset } => {
                write!(f, "reserved byte at offset {offset} is not zero")
            }
            FormatError::BadFlag { field, found } => write!(f, "{field} is {found}, not 0 or 1"),
            FormatError::BadEnum { field, found } => write!(f, "{field} is {found}, not a known value"),
        }
    }
}

impl fmt::Display for FormatError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.describe(f, "record", "logtrim record")
    }
}

impl core::error::Error for FormatError {}

/// The buffer is shorter than the record. Every check runs before the first byte is written, so after
/// this (or any other write error) the buffer is as it was.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BufferTooSmall {
    /// Bytes the record needs.
    pub needed: u32,
    /// Bytes the buffer has.
    pub available: u32,
}

impl fmt::Display for BufferTooSmall {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "buffer of {} bytes too small: the record needs {}", self.available, self.needed)
    }
}

impl core::error::Error for BufferTooSmall {}
