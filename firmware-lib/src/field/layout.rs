//! The byte layout of the two field records, the blank and the trim, described once.
//!
//! Both records share a 24-byte header (magic, version, length, write counter, time, the fingerprint of
//! the factory calibration they were made on) and end in a CRC-32. Every field is a
//! [`Field`] constant here; the parser and the writer go through these
//! constants, and the table in the [`field`](super) docs is rendered from them by [`write_markdown_table`]
//! (tests hold the constants, the rendered table and the offsets the docs state to each other).
//!
//! All multi-byte values are little-endian; `f32` values are IEEE 754 binary32 bit patterns, `i32` two's
//! complement.

use core::fmt;

use crate::record::layout::{Field, Kind};

/// The header every field record starts with.
pub mod header {
    use super::{Field, Kind};
    use crate::record::{magic_field, version_field};

    /// Magic.
    pub const MAGIC: Field = magic_field("`LTBK` (blank) or `LTTM` (trim): which record this is");
    /// Format version.
    pub const VERSION: Field = version_field("format version, 1");
    /// Total length.
    pub const LEN: Field =
        VERSION.then("len", Kind::U16, "bytes in the whole record, header to CRC inclusive");
    /// Write counter.
    pub const SEQUENCE: Field = LEN.then(
        "sequence",
        Kind::U32,
        "write counter: of two valid copies the higher one is used; it moves on at every write, clears included",
    );
    /// Time of the record.
    pub const WRITTEN_AT: Field =
        SEQUENCE.then("written_at", Kind::U64, "when the record was made, Unix seconds (UTC); 0 = no clock");
    /// Fingerprint of the factory calibration.
    pub const FACTORY: Field = WRITTEN_AT.then(
        "factory",
        Kind::U32,
        "fingerprint of the factory calibration the record was made on (see `fingerprint`); 0 = not bound",
    );
    /// Length of the header.
    pub const END: usize = FACTORY.end();
    /// The fields in order.
    pub const FIELDS: &[Field] = &[MAGIC, VERSION, LEN, SEQUENCE, WRITTEN_AT, FACTORY];
}

/// The blank record's payload, after the header.
pub mod blank {
    use super::{header, Field, Kind};

    /// The magic of a blank record.
    pub const MAGIC_VALUE: [u8; 4] = crate::record::RecordType::Blank.magic();
    /// The version this build writes and reads.
    pub const VERSION_VALUE: u16 = 1;

    /// Blank x for the f32 path.
    pub const X_F32: Field = Field::at(
        header::END,
        "x_f32",
        Kind::F32,
        "x at the blank as the f32 path reads it (factory, before any trim), Np",
    );
    /// Blank x for the fixed path.
    pub const X_Q24: Field =
        X_F32.then("x_q24", Kind::I32, "x at the blank as the fixed path reads it, Q24 Np");
    /// Temperature at the blank.
    pub const TEMP_MC: Field = X_Q24.then("temp_mc", Kind::I32, "temperature when the blank was taken, m°C");
    /// Readings averaged.
    pub const SAMPLES: Field = TEMP_MC.then("samples", Kind::U32, "readings averaged into the blank, ≥ 1");
    /// End of the payload.
    pub const END: usize = SAMPLES.end();
    /// The payload's fields in order.
    pub const FIELDS: &[Field] = &[X_F32, X_Q24, TEMP_MC, SAMPLES];
}

/// The trim record's payload, after the header.
pub mod trim {
    use super::{header, Field, Kind};

    /// The magic of a trim record.
    pub const MAGIC_VALUE: [u8; 4] = crate::record::RecordType::Trim.magic();
    /// The version this build writes and reads.
    pub const VERSION_VALUE: u16 = 1;

    /// What kind of trim.
    pub const KIND: Field =
        Field::at(header::END, "kind", Kind::U8, "0 cleared (factory state), 1 one-point, 2 two-point");
    /// Padding.
    pub const RESERVED: Field = KIND.then("reserved", Kind::Reserved(3), "zero");
    /// Offset, f32 path.
    pub const OFFSET_F32: Field = RESERVED.then("offset_f32", Kind::F32, "o of x' = g·x + o, f32 path, Np");
    /// Gain, f32 path.
    pub const GAIN_F32: Field = OFFSET_F32.then("gain_f32", Kind::F32, "g of x' = g·x + o, f32 path");
    /// Offset, fixed path.
    pub const OFFSET_Q24: Field = GAIN_F32.then("offset_q24", Kind::I32, "o, fixed path, Q24 Np");
    /// Gain, fixed path.
    pub const GAIN_Q30: Field = OFFSET_Q24.then("gain_q30", Kind::I32, "g, fixed path, Q30 (2^30 = 1)");
    /// First standard.
    pub const STANDARD_1: Field =
        GAIN_Q30.then("standard_1_x", Kind::F32, "known x of the first standard, Np (0 when cleared)");
    /// Second standard.
    pub const STANDARD_2: Field = STANDARD_1.then(
        "standard_2_x",
        Kind::F32,
        "known x of the second standard, Np (the first's for a one-point trim; 0 when cleared)",
    );
    /// Temperature at the trim.
    pub const TEMP_MC: Field =
        STANDARD_2.then("temp_mc", Kind::I32, "temperature when the standards were read, m°C");
    /// End of the payload.
    pub const END: usize = TEMP_MC.end();
    /// The payload's fields in order.
    pub const FIELDS: &[Field] =
        &[KIND, RESERVED, OFFSET_F32, GAIN_F32, OFFSET_Q24, GAIN_Q30, STANDARD_1, STANDARD_2, TEMP_MC];
}

/// The CRC that ends every field record.
pub mod trailer {
    use super::Field;

    /// The CRC ([`crate::record::layout::CRC`]), placed at the offset the record's length gives (so its
    /// `offset` here is 0).
    pub const CRC: Field = crate::record::layout::CRC;
    /// Length of the trailer.
    pub const LEN: usize = crate::record::layout::TRAILER_LEN;
}

/// Total length of a blank record, version 1.
pub const BLANK_LEN: usize = blank::END + trailer::LEN;
/// Total length of a trim record, version 1.
pub const TRIM_LEN: usize = trim::END + trailer::LEN;

// Records are whole 4-byte words (flash word writes) and every 4-byte field is aligned.
const _: () = assert!(header::END.is_multiple_of(4));
const _: () = assert!(BLANK_LEN.is_multiple_of(4));
const _: () = assert!(TRIM_LEN.is_multiple_of(4));
const _: () = assert!(trim::OFFSET_F32.offset.is_multiple_of(4));

/// Renders the two layouts as the Markdown table shown in the [`field`](super) docs.
pub fn write_markdown_table(w: &mut dyn fmt::Write) -> fmt::Result {
    w.write_str("| record | offset | size | field | type | meaning |\n|---|---:|---:|---|---|---|\n")?;
    for f in header::FIELDS {
        f.write_row(w, &"both", f.offset)?;
    }
    for f in blank::FIELDS {
        f.write_row(w, &"blank", f.offset)?;
    }
    trailer::CRC.write_row(w, &"blank", blank::END)?;
    for f in trim::FIELDS {
        f.write_row(w, &"trim", f.offset)?;
    }
    trailer::CRC.write_row(w, &"trim", trim::END)
}
