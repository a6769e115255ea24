//! Records: everything logtrim keeps in EEPROM or flash, framed, checked and written one way. A record is a
//! factory calibration image ([`crate::image`]) or a field record, a trim or a blank ([`crate::field`]).
//! Each format keeps its own layout and its own value checks; what they share lives here, once:
//!
//! | module | owns |
//! |---|---|
//! | [`layout`] | the byte-layout vocabulary ([`Field`], [`Kind`]) and the CRC trailer |
//! | `frame` | the framing checks, the checked reader of fields and the writer into a caller's buffer (crate-internal) |
//! | [`error`](mod@error) | [`RecordType`] (which record a magic names), [`FormatError`] (the framing and byte-rule errors), [`BufferTooSmall`] |
//! | [`slots`] | the A/B slot rule (the newest usable record) and the write policy ([`slots::next_write`]) |
//!
//! # The frame
//!
//! ```text
//! magic (4 bytes) | version u16 | … the format's header, its length among it … | payload | CRC-32 u32
//! ```
//!
//! Every record starts with a magic that names it ([`RecordType::magic`]) and its format version, and ends
//! with the CRC-32 of every byte before it: the IEEE 802.3 reflected CRC-32 (polynomial 0x04C11DB7,
//! reflected in and out, init and xor-out 0xFFFFFFFF), catalogue name CRC-32/ISO-HDLC, computed with the
//! `crc` crate ([`crc32`]). Its header says how long it is; every record is a multiple of 4 bytes.
//!
//! # Order of the framing checks
//!
//! A parser stops at the first check that fails, in this order:
//!
//! 1. **Magic** (4 bytes): erased flash (all `0xff`), blank EEPROM (all `0x00`) and foreign data are
//!    rejected at once, at the cost of one comparison, before any length is believed
//!    ([`FormatError::BadMagic`]); the magic of another of logtrim's records is
//!    [`FormatError::OtherRecord`], so a blank handed to the trim loader says so.
//! 2. **Version** known to this build ([`FormatError::UnsupportedVersion`]): the rest of the header is only
//!    interpreted under a version this build knows.
//! 3. **Declared length** possible for the format ([`FormatError::BadLength`]), present in full
//!    ([`FormatError::Truncated`]) and, for `parse`, equal to the number of bytes given
//!    ([`FormatError::LengthMismatch`]; `parse_prefix` allows bytes after the record, erased flash say).
//!    This bounds the work of the next step, so a corrupted length cannot make the reader hash megabytes.
//! 4. **CRC** over the declared length ([`FormatError::CrcMismatch`]). It comes before the format's own
//!    checks: once it matches, they only ever see bytes exactly as the writer wrote them (barring a 2⁻³²
//!    coincidence), so a corrupted record is reported as what it is, a CRC mismatch, and not as whatever
//!    defect the corruption happens to look like.
//!
//! Then each format reads its header and payload through one checked reader, with the byte rules every
//! format shares (reserved and padding bytes zero, flags 0 or 1, enumerations known), and applies its own
//! checks: an image's sections and values ([`crate::image`]), a field record's values ([`crate::field`]).
//! Every step is bounded by the declared length, allocates nothing and returns a specific error.
//!
//! Writers check everything before the first byte is written, with the same checks the parser applies, so
//! they never produce a record their parser refuses and never leave a half-written buffer behind an error.

pub mod error;
pub(crate) mod frame;
pub mod layout;
pub mod slots;

#[cfg(test)]
mod docs_tests;
#[cfg(test)]
mod tests;

pub use error::{BufferTooSmall, FormatError, RecordType};

/// `impl From<Source> for Target` for each `Variant(Source)` listed: the conversions `?` makes from the
/// errors of a record's parts to the error of the whole, one line each.
macro_rules! wrap_errors {
    ($target:ident { $($variant:ident($source:ty)),+ $(,)? }) => {
        $(
            impl From<$source> for $target {
                fn from(e: $source) -> Self {
                    $target::$variant(e)
                }
            }
        )+
    };
}
pub(crate) use wrap_errors;

use layout::{Field, Kind};

/// The record CRC: CRC-32/ISO-HDLC (IEEE 802.3, reflected, polynomial 0x04C11DB7) from the `crc` crate.
pub const CRC32: crc::Crc<u32> = crc::Crc::<u32>::new(&crc::CRC_32_ISO_HDLC);

/// The CRC-32/ISO-HDLC of `bytes`.
///
/// ```
/// // The catalogue's check value: CRC-32/ISO-HDLC of the ASCII digits "123456789" is 0xCBF43926
/// // (the same CRC as IEEE 802.3 and zlib's crc32).
/// assert_eq!(logtrim::record::crc32(b"123456789"), 0xCBF4_3926);
/// assert_eq!(logtrim::record::crc32(b""), 0);
/// ```
pub fn crc32(bytes: &[u8]) -> u32 {
    CRC32.checksum(bytes)
}

/// Where every record keeps its magic (each format's layout documents its own value).
pub(crate) const MAGIC: Field = Field::first("magic", Kind::Bytes(4), "");
/// Where every record keeps its format version, right after the magic.
pub(crate) const VERSION: Field = MAGIC.then("version", Kind::U16, "");

/// A format's magic field, with its meaning for that format's table.
pub(crate) const fn magic_field(doc: &'static str) -> Field {
    Field { doc, ..MAGIC }
}

/// A format's version field, with its meaning for that format's table.
pub(crate) const fn version_field(doc: &'static str) -> Field {
    Field { doc, ..VERSION }
}
