//! The vocabulary every byte layout is written in: a [`Field`] is a name, an offset within its part, a
//! [`Kind`] (which gives its size) and a meaning. The calibration image's layout
//! ([`image::layout`](crate::image::layout)) and the field records' ([`field::layout`](crate::field::layout))
//! are lists of these constants; the parsers and writers go through them, and each format's table in the
//! docs is rendered from them ([`Field::write_row`]).
//!
//! All multi-byte values are little-endian; `f32` values are IEEE 754 binary32 bit patterns, stored
//! bit-exact.

use core::fmt;

/// How a field's bytes are interpreted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Kind {
    /// Fixed bytes (the magic).
    Bytes(u8),
    /// An unsigned byte.
    U8,
    /// A little-endian u16.
    U16,
    /// A little-endian u32.
    U32,
    /// A little-endian u64.
    U64,
    /// A little-endian two's-complement i32.
    I32,
    /// A little-endian IEEE 754 binary32.
    F32,
    /// This many consecutive little-endian binary32 values.
    F32Array(u8),
    /// Printable ASCII (0x20–0x7E), padded with NUL bytes to this size.
    Ascii(u8),
    /// Reserved bytes: written as zero, and a record with any other value is refused.
    Reserved(u8),
}

impl Kind {
    /// The size of a field of this kind, in bytes.
    pub const fn size(self) -> usize {
        match self {
            Kind::U8 => 1,
            Kind::U16 => 2,
            Kind::U32 | Kind::I32 | Kind::F32 => 4,
            Kind::U64 => 8,
            Kind::F32Array(n) => 4 * n as usize,
            Kind::Bytes(n) | Kind::Ascii(n) | Kind::Reserved(n) => n as usize,
        }
    }

    /// The type with its count where it has one (`bytes[4]`, `f32[6]`, `ASCII[16]`), as the layout tables
    /// write it.
    pub fn display(self) -> impl fmt::Display {
        struct D(Kind);
        impl fmt::Display for D {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                match self.0 {
                    Kind::Bytes(n) => write!(f, "bytes[{n}]"),
                    Kind::F32Array(n) => write!(f, "f32[{n}]"),
                    Kind::Ascii(n) => write!(f, "ASCII[{n}]"),
                    k => f.write_str(k.type_name()),
                }
            }
        }
        D(self)
    }

    /// The type without its count.
    pub const fn type_name(self) -> &'static str {
        match self {
            Kind::Bytes(_) => "bytes",
            Kind::U8 => "u8",
            Kind::U16 => "u16",
            Kind::U32 => "u32",
            Kind::U64 => "u64",
            Kind::I32 => "i32",
            Kind::F32 => "f32",
            Kind::F32Array(_) => "f32[]",
            Kind::Ascii(_) => "ASCII",
            Kind::Reserved(_) => "zero",
        }
    }
}

/// One field of a part of a record: where it lies within that part and what it means.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Field {
    /// A short snake_case name (used in error messages and in the layout tables).
    pub name: &'static str,
    /// Offset from the start of the part, in bytes.
    pub offset: usize,
    /// How the bytes are read; the size follows from it.
    pub kind: Kind,
    /// What the field holds.
    pub doc: &'static str,
}

impl Field {
    /// The field at offset 0 of its part.
    pub(crate) const fn first(name: &'static str, kind: Kind, doc: &'static str) -> Field {
        Field::at(0, name, kind, doc)
    }

    /// A field at `offset` of its part.
    pub(crate) const fn at(offset: usize, name: &'static str, kind: Kind, doc: &'static str) -> Field {
        Field { name, offset, kind, doc }
    }

    /// The field that follows this one directly.
    pub(crate) const fn then(self, name: &'static str, kind: Kind, doc: &'static str) -> Field {
        Field::at(self.end(), name, kind, doc)
    }

    /// Size in bytes.
    pub const fn size(&self) -> usize {
        self.kind.size()
    }

    /// Offset one past the last byte of the field.
    pub const fn end(&self) -> usize {
        self.offset.saturating_add(self.kind.size())
    }

    /// Writes the field as a row of a layout table, `| part | offset | size | name | type | meaning |`,
    /// at `offset` (its own offset, or where a trailer lands in a record of a given length).
    pub fn write_row(&self, w: &mut dyn fmt::Write, part: &dyn fmt::Display, offset: usize) -> fmt::Result {
        writeln!(
            w,
            "| {part} | {offset} | {} | `{}` | `{}` | {} |",
            self.size(),
            self.name,
            self.kind.display(),
            self.doc
        )
    }
}

/// The trailer of every record: the CRC-32/ISO-HDLC of every byte before it ([`crc32`](super::crc32)).
/// Its offset here is 0: it starts where the record's length puts it, 4 bytes before the end.
pub const CRC: Field =
    Field::first("crc32", Kind::U32, "CRC-32/ISO-HDLC (IEEE 802.3) of every byte before it, from offset 0");

/// Length of the trailer.
pub const TRAILER_LEN: usize = CRC.end();

/// Every record, and every part of a record that is followed by another, is a whole number of these bytes
/// (flash word writes, aligned reads on the MCU).
pub const ALIGN: usize = 4;
