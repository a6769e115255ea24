//! What the two field records share: the header ([`RecordInfo`]) on the framing every record has
//! ([`crate::record`]), how a record is parsed and written through it, and the errors of both
//! ([`RecordError`], [`RecordValueError`]).
//!
//! # Order of the checks
//!
//! Parsing stops at the first check that fails, in this order:
//!
//! 1. **The framing** ([`RecordError::Format`], see
//!    [the order of the framing checks](crate::record#order-of-the-framing-checks)): the magic (erased
//!    flash, blank EEPROM and foreign data are [`FormatError::BadMagic`]; the magic of the *other* field
//!    record or of a calibration image is [`FormatError::OtherRecord`], so a blank handed to the trim
//!    loader says so), the version, the declared length (the version's fixed length, present in full and,
//!    for `parse`, equal to the bytes given; `parse_prefix` allows bytes after the record), then the CRC-32
//!    over everything before it. A corrupted record is reported as that, whatever its damaged bytes look
//!    like.
//! 2. **Values**: reserved bytes zero, kinds known ([`RecordError::Format`] again), then the record's own
//!    checks — the same checks its constructor applies ([`RecordValueError`]), so whatever the writer
//!    accepts the parser accepts.

use core::fmt;

use super::layout::header;
use crate::record::frame::{self, len_u32, Extent, Framing, Reader, Writer};
use crate::record::{BufferTooSmall, FormatError, RecordType};

/// What the header of a field record says besides its type: when and by which write it was made, and on
/// which factory calibration.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RecordInfo {
    /// The write counter: every new record (a clear included) takes the last one's plus one, so of two
    /// valid copies in two slots the higher one is the current one.
    pub sequence: u32,
    /// When the record was made, Unix seconds (UTC); 0 when the instrument has no clock.
    pub written_at: u64,
    /// The fingerprint ([`fingerprint`](super::fingerprint)) of the factory calibration the record was
    /// made on; 0 = not bound to one.
    pub factory: u32,
}

/// A value a field record cannot carry. Checked identically by the records' constructors and by the
/// parser, so a writer can never produce a record that the parser refuses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RecordValueError {
    /// An f32 field is NaN or infinite.
    NonFinite {
        /// The layout field.
        field: &'static str,
    },
    /// A quantity's f32 and fixed-point fields differ by more than 2^-10 of their unit: they are not two
    /// paths' readings of one value.
    Inconsistent {
        /// The layout field of the fixed-point value.
        field: &'static str,
    },
    /// A value lies outside what the field may hold (a gain not in (0, 2), an x beyond ±100 Np).
    OutOfRange {
        /// The layout field.
        field: &'static str,
    },
    /// A blank averaged from zero readings.
    NoSamples,
    /// A cleared trim whose values are not exactly the identity (offset 0, gain 1, no standards).
    ClearedNotIdentity {
        /// The first layout field that differs.
        field: &'static str,
    },
    /// A one-point trim whose two standards differ.
    OnePointStandards,
}

impl fmt::Display for RecordValueError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RecordValueError::NonFinite { field } => write!(f, "{field} is NaN or infinite"),
            RecordValueError::Inconsistent { field } => write!(
                f,
                "{field} and its f32 counterpart differ by more than 2^-10: not one value in two formats"
            ),
            RecordValueError::OutOfRange { field } => write!(f, "{field} lies outside the range it may hold"),
            RecordValueError::NoSamples => f.write_str("a blank needs at least one reading"),
            RecordValueError::ClearedNotIdentity { field } => {
                write!(f, "a cleared trim must be the identity, but {field} is not")
            }
            RecordValueError::OnePointStandards => {
                f.write_str("a one-point trim names two different standards")
            }
        }
    }
}

/// Why bytes were refused as a field record (see [the order of the checks](self#order-of-the-checks)).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RecordError {
    /// The framing every record shares (magic, version, length, CRC), or a byte rule of a field (a reserved
    /// byte not zero, an unknown trim kind): see [`FormatError`].
    Format(FormatError),
    /// A value the record cannot carry.
    Value(RecordValueError),
}

crate::record::wrap_errors!(RecordError { Value(RecordValueError), Format(FormatError) });

impl fmt::Display for RecordError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RecordError::Format(e) => e.describe(f, "record", "field record"),
            RecordError::Value(e) => write!(f, "bad value: {e}"),
        }
    }
}

impl core::error::Error for RecordValueError {}
impl core::error::Error for RecordError {}

/// How a field record is framed: its magic, version 1, its length a u16 at offset 6, one length per type.
pub(super) const fn framing(record: RecordType, version: u16, len: usize) -> Framing {
    Framing { record, version, header_len: header::END, len: header::LEN, min_len: len, max_len: len }
}

/// The methods every field record has, the same for each: parsing (exactly one record, or one at the start of
/// bytes), writing, its bytes, its parts and its header's information. `record_methods!(Record, Parts,
/// "name", LEN)` for a record type `Record` with the fields `Parts` and `LEN` bytes.
macro_rules! record_methods {
    ($record:ident, $parts:ident, $name:literal, $len:path) => {
        impl $record {
            #[doc = concat!("Parses exactly one ", $name, " record (see [the order of the checks](super::header#order-of-the-checks)).")]
            pub fn parse(bytes: &[u8]) -> Result<$record, RecordError> {
                header::parse(bytes, Extent::Exact).map(|(record, _)| record)
            }

            #[doc = concat!("Parses a ", $name, " record at the start of `bytes` and returns the bytes after it, unchecked.")]
            pub fn parse_prefix(bytes: &[u8]) -> Result<($record, &[u8]), RecordError> {
                header::parse(bytes, Extent::Prefix)
            }

            #[doc = concat!("Writes the record at the start of `buf` ([`", stringify!($len), "`] bytes) and returns its length.")]
            pub fn write(&self, buf: &mut [u8]) -> Result<usize, BufferTooSmall> {
                header::write(self, buf)
            }

            /// The record as bytes.
            pub fn to_bytes(&self) -> [u8; $len] {
                let mut out = [0u8; $len];
                // The buffer has exactly the record's length: writing cannot fail.
                let _ = self.write(&mut out);
                out
            }

            /// Every field.
            pub fn parts(&self) -> $parts {
                self.parts
            }

            /// Write counter, time and factory binding.
            pub fn info(&self) -> RecordInfo {
                self.parts.info
            }
        }
    };
}
pub(crate) use record_methods;

/// A field record as the shared framing reads and writes it: its framing, and its payload.
pub(crate) trait Codec: Sized + Copy {
    /// How it is framed.
    const FRAMING: Framing;
    /// Reads the payload of a framed record (its header already read into `info`), with the record's own
    /// value checks.
    fn decode(r: &Reader<'_, RecordError>, info: RecordInfo) -> Result<Self, RecordError>;
    /// Writes the payload (the header and the CRC are written around it).
    fn encode(&self, w: &mut Writer<'_>) -> Result<(), BufferTooSmall>;
    /// The header's contents.
    fn header(&self) -> RecordInfo;
}

/// Parses a field record at the start of `bytes` (see [the order of the checks](self#order-of-the-checks)).
pub(super) fn parse<T: Codec>(bytes: &[u8], extent: Extent) -> Result<(T, &[u8]), RecordError> {
    let framed = T::FRAMING.check(bytes, extent)?;
    let len = framed.bytes.len();
    // The framing has shown every byte of the record to be there: a short read is a second guard.
    let short = FormatError::Truncated { needed: len_u32(T::FRAMING.max_len), available: len_u32(len) };
    let r = Reader::new(framed.bytes, 0, RecordError::Format(short));
    let info = RecordInfo {
        sequence: r.u32(&header::SEQUENCE)?,
        written_at: r.u64(&header::WRITTEN_AT)?,
        factory: r.u32(&header::FACTORY)?,
    };
    Ok((T::decode(&r, info)?, framed.rest))
}

/// Writes a field record at the start of `buf` and returns its length; the buffer is untouched if it is
/// too small.
pub(super) fn write<T: Codec>(record: &T, buf: &mut [u8]) -> Result<usize, BufferTooSmall> {
    let len = T::FRAMING.max_len;
    frame::write(buf, len, |w| {
        let info = record.header();
        T::FRAMING.put_head(w, len)?;
        w.u32(&header::SEQUENCE, info.sequence)?;
        w.u64(&header::WRITTEN_AT, info.written_at)?;
        w.u32(&header::FACTORY, info.factory)?;
        record.encode(w)
    })
}

impl<'a, T: Codec> crate::record::slots::SlotRecord<'a> for T {
    const TYPE: RecordType = T::FRAMING.record;
    type Error = RecordError;

    fn parse_prefix(bytes: &'a [u8]) -> Result<(T, &'a [u8]), RecordError> {
        parse(bytes, Extent::Prefix)
    }

    fn sequence(&self) -> u32 {
        self.header().sequence
    }

    fn time(&self) -> u64 {
        self.header().written_at
    }

    fn factory(&self) -> u32 {
        self.header().factory
    }
}
