//! What the two field records share: the header ([`RecordInfo`]), the checked framing (magic, version,
//! length, CRC) in front of each record's own value checks, the writer of that framing into a caller's
//! buffer, and the errors of both ([`RecordError`], [`ValueError`], [`WriteError`]).
//!
//! # Order of the checks
//!
//! Parsing stops at the first check that fails, in this order:
//!
//! 1. **Magic** (4 bytes): erased flash (all `0xff`), blank EEPROM (all `0x00`) and foreign data are
//!    [`RecordError::BadMagic`]; the magic of the *other* field record or of a calibration image is
//!    [`RecordError::OtherRecord`], so a blank handed to the trim loader says so.
//! 2. **Version** known to this build ([`RecordError::UnsupportedVersion`]).
//! 3. **Declared length** equal to the version's fixed length ([`RecordError::BadLength`]), present in full
//!    ([`RecordError::Truncated`]) and, for `parse`, equal to the bytes given
//!    ([`RecordError::LengthMismatch`]; `parse_prefix` allows bytes after the record).
//! 4. **CRC-32** over everything before it ([`RecordError::CrcMismatch`]). A corrupted record is reported
//!    as that, whatever its damaged bytes look like.
//! 5. **Values**: reserved bytes zero, flags and kinds known, then the record's own checks — the same
//!    checks its constructor applies ([`ValueError`]), so whatever the writer accepts the parser accepts.

use core::fmt;

use super::layout::{self, header, trailer, Field};
use crate::image::crc32;

/// What the header of a field record says besides its type: when and by which write it was made, and on
/// which factory calibration.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
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

/// Which record a magic belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RecordType {
    /// A blank record (`LTBK`).
    Blank,
    /// A trim record (`LTTM`).
    Trim,
    /// A factory calibration image (`LTCI`, [`crate::image`]).
    CalibrationImage,
}

impl RecordType {
    fn of_magic(m: [u8; 4]) -> Option<RecordType> {
        if m == layout::blank::MAGIC_VALUE {
            Some(RecordType::Blank)
        } else if m == layout::trim::MAGIC_VALUE {
            Some(RecordType::Trim)
        } else if m == crate::image::layout::header::MAGIC_VALUE {
            Some(RecordType::CalibrationImage)
        } else {
            None
        }
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

/// A value a field record cannot carry. Checked identically by the records' constructors and by the
/// parser, so a writer can never produce a record that the parser refuses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ValueError {
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

impl fmt::Display for ValueError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ValueError::NonFinite { field } => write!(f, "{field} is NaN or infinite"),
            ValueError::Inconsistent { field } => write!(
                f,
                "{field} and its f32 counterpart differ by more than 2^-10: not one value in two formats"
            ),
            ValueError::OutOfRange { field } => write!(f, "{field} lies outside the range it may hold"),
            ValueError::NoSamples => f.write_str("a blank needs at least one reading"),
            ValueError::ClearedNotIdentity { field } => {
                write!(f, "a cleared trim must be the identity, but {field} is not")
            }
            ValueError::OnePointStandards => f.write_str("a one-point trim names two different standards"),
        }
    }
}

/// Why bytes were refused as a field record (see [the order of the checks](self#order-of-the-checks)).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RecordError {
    /// Fewer bytes than the header, or than the length the header declares.
    Truncated {
        /// Bytes needed.
        needed: u32,
        /// Bytes available.
        available: u32,
    },
    /// The first four bytes are no known magic: erased or foreign memory.
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
    },
    /// The declared length is not the length of this record's version.
    BadLength {
        /// The length declared.
        declared: u16,
        /// The length of the layout.
        expected: u16,
    },
    /// The bytes hold more than the record (`parse` wants exactly one record).
    LengthMismatch {
        /// The length declared.
        declared: u32,
        /// The bytes given.
        actual: u32,
    },
    /// The stored CRC is not the CRC of the record: corrupted, or not written completely.
    CrcMismatch {
        /// The CRC in the trailer.
        stored: u32,
        /// The CRC computed over the record.
        computed: u32,
    },
    /// A reserved byte is not zero.
    ReservedNotZero {
        /// Offset of the byte in the record.
        offset: u32,
    },
    /// A kind byte holds a value this version does not define.
    BadKind {
        /// The value found.
        found: u8,
    },
    /// A value the record cannot carry.
    Value(ValueError),
}

impl From<ValueError> for RecordError {
    fn from(e: ValueError) -> Self {
        RecordError::Value(e)
    }
}

impl fmt::Display for RecordError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RecordError::Truncated { needed, available } => {
                write!(f, "truncated: {available} bytes where {needed} are needed")
            }
            RecordError::BadMagic { found } => {
                write!(f, "not a field record (first bytes {:02x?}: erased or foreign data)", found)
            }
            RecordError::OtherRecord { expected, found } => write!(f, "a {found}, not a {expected}"),
            RecordError::UnsupportedVersion { found } => {
                write!(f, "format version {found} is not one this build reads (1)")
            }
            RecordError::BadLength { declared, expected } => {
                write!(f, "declared length {declared} is not this record's length {expected}")
            }
            RecordError::LengthMismatch { declared, actual } => {
                write!(f, "{actual} bytes given for a record of {declared}")
            }
            RecordError::CrcMismatch { stored, computed } => {
                write!(f, "CRC mismatch (stored {stored:#010x}, computed {computed:#010x}): corrupted or incomplete")
            }
            RecordError::ReservedNotZero { offset } => {
                write!(f, "reserved byte at offset {offset} is not zero")
            }
            RecordError::BadKind { found } => write!(f, "trim kind {found} is not 0, 1 or 2"),
            RecordError::Value(e) => write!(f, "bad value: {e}"),
        }
    }
}

impl core::error::Error for ValueError {}
impl core::error::Error for RecordError {}

/// Why a record could not be written. The buffer is untouched after an error.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum WriteError {
    /// The buffer is shorter than the record.
    BufferTooSmall {
        /// Bytes the record needs.
        needed: u32,
        /// Bytes the buffer has.
        available: u32,
    },
}

impl fmt::Display for WriteError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WriteError::BufferTooSmall { needed, available } => {
                write!(f, "buffer of {available} bytes for a record of {needed}")
            }
        }
    }
}

impl core::error::Error for WriteError {}

fn len_u32(n: usize) -> u32 {
    u32::try_from(n).unwrap_or(u32::MAX)
}

/// The bytes of `f` as an array.
pub(super) fn array<const N: usize>(bytes: &[u8], f: &Field) -> Option<[u8; N]> {
    bytes.get(f.offset..f.end())?.try_into().ok()
}

/// What a record type's layout is.
pub(super) struct Spec {
    pub ty: RecordType,
    pub magic: [u8; 4],
    pub version: u16,
    pub len: usize,
}

/// Whether the bytes must be exactly one record.
#[derive(Clone, Copy, PartialEq, Eq)]
pub(super) enum Extent {
    Exact,
    Prefix,
}

/// A record whose framing passed: its bytes (header to CRC) and its header.
pub(super) struct Framed<'a> {
    pub bytes: &'a [u8],
    pub info: RecordInfo,
    pub rest: &'a [u8],
}

/// Steps 1–4 of the checks.
pub(super) fn frame<'a>(bytes: &'a [u8], spec: &Spec, extent: Extent) -> Result<Framed<'a>, RecordError> {
    let available = len_u32(bytes.len());
    let short = |needed: usize| RecordError::Truncated { needed: len_u32(needed), available };
    let magic: [u8; 4] = array(bytes, &header::MAGIC).ok_or(short(header::END))?;
    if magic != spec.magic {
        return Err(match RecordType::of_magic(magic) {
            Some(found) => RecordError::OtherRecord { expected: spec.ty, found },
            None => RecordError::BadMagic { found: magic },
        });
    }
    let version = array(bytes, &header::VERSION).map(u16::from_le_bytes).ok_or(short(header::END))?;
    if version != spec.version {
        return Err(RecordError::UnsupportedVersion { found: version });
    }
    let declared = array(bytes, &header::LEN).map(u16::from_le_bytes).ok_or(short(header::END))?;
    if usize::from(declared) != spec.len {
        return Err(RecordError::BadLength {
            declared,
            expected: u16::try_from(spec.len).unwrap_or(u16::MAX),
        });
    }
    let (record, rest) = bytes.split_at_checked(spec.len).ok_or(short(spec.len))?;
    if extent == Extent::Exact && !rest.is_empty() {
        return Err(RecordError::LengthMismatch { declared: u32::from(declared), actual: available });
    }
    let crc_at = spec.len - trailer::LEN;
    let (covered, tail) = record.split_at_checked(crc_at).ok_or(short(spec.len))?;
    let stored = array(tail, &trailer::CRC).map(u32::from_le_bytes).ok_or(short(spec.len))?;
    let computed = crc32(covered);
    if stored != computed {
        return Err(RecordError::CrcMismatch { stored, computed });
    }
    let info = RecordInfo {
        sequence: array(record, &header::SEQUENCE).map(u32::from_le_bytes).ok_or(short(spec.len))?,
        written_at: array(record, &header::WRITTEN_AT).map(u64::from_le_bytes).ok_or(short(spec.len))?,
        factory: array(record, &header::FACTORY).map(u32::from_le_bytes).ok_or(short(spec.len))?,
    };
    Ok(Framed { bytes: record, info, rest })
}

/// Reads the fields of a framed record's payload.
pub(super) struct Reader<'a> {
    pub bytes: &'a [u8],
}

impl Reader<'_> {
    fn get<const N: usize>(&self, f: &Field) -> Result<[u8; N], RecordError> {
        array(self.bytes, f)
            .ok_or(RecordError::Truncated { needed: len_u32(f.end()), available: len_u32(self.bytes.len()) })
    }
    pub fn u8(&self, f: &Field) -> Result<u8, RecordError> {
        self.get::<1>(f).map(|[b]| b)
    }
    pub fn u32(&self, f: &Field) -> Result<u32, RecordError> {
        self.get(f).map(u32::from_le_bytes)
    }
    pub fn i32(&self, f: &Field) -> Result<i32, RecordError> {
        self.get(f).map(i32::from_le_bytes)
    }
    pub fn f32(&self, f: &Field) -> Result<f32, RecordError> {
        self.get(f).map(f32::from_le_bytes)
    }
    pub fn reserved(&self, f: &Field) -> Result<(), RecordError> {
        let raw = self.bytes.get(f.offset..f.end()).unwrap_or(&[]);
        match raw.iter().position(|&b| b != 0) {
            Some(i) => Err(RecordError::ReservedNotZero { offset: len_u32(f.offset + i) }),
            None => Ok(()),
        }
    }
}

/// Writes fields into a record's buffer (exactly the record's length, checked by the caller).
pub(super) struct Writer<'b> {
    pub out: &'b mut [u8],
}

impl Writer<'_> {
    pub fn put(&mut self, f: &Field, bytes: &[u8]) {
        if let Some(dst) = self.out.get_mut(f.offset..f.end()) {
            for (d, s) in dst.iter_mut().zip(bytes) {
                *d = *s;
            }
        }
    }
}

/// Writes a record of `spec`: the header, the payload through `body`, the CRC. Checks the buffer first,
/// so an error leaves it untouched.
pub(super) fn write_record(
    buf: &mut [u8],
    spec: &Spec,
    info: &RecordInfo,
    body: impl FnOnce(&mut Writer<'_>),
) -> Result<usize, WriteError> {
    let available = len_u32(buf.len());
    let out =
        buf.get_mut(..spec.len).ok_or(WriteError::BufferTooSmall { needed: len_u32(spec.len), available })?;
    out.fill(0);
    let mut w = Writer { out };
    w.put(&header::MAGIC, &spec.magic);
    w.put(&header::VERSION, &spec.version.to_le_bytes());
    w.put(&header::LEN, &u16::try_from(spec.len).unwrap_or(u16::MAX).to_le_bytes());
    w.put(&header::SEQUENCE, &info.sequence.to_le_bytes());
    w.put(&header::WRITTEN_AT, &info.written_at.to_le_bytes());
    w.put(&header::FACTORY, &info.factory.to_le_bytes());
    body(&mut w);
    let crc_at = spec.len - trailer::LEN;
    let crc = crc32(w.out.get(..crc_at).unwrap_or(&[]));
    w.put(&Field { offset: crc_at, ..trailer::CRC }, &crc.to_le_bytes());
    Ok(spec.len)
}
