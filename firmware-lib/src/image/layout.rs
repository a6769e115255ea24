//! The byte layout of a calibration image, described once.
//!
//! Every field of every part (the header, each section's payload, the trailer) is a [`Field`] constant here:
//! its offset within the part, its size (derived from its [`Kind`]) and its meaning. The parser and the writer
//! read and write through these constants, the table in the [`image`](super) docs is rendered from them by
//! [`write_markdown_table`] (a test keeps the two identical), and [`PARTS`] lets a host tool emit C offsets
//! from the same source.
//!
//! All multi-byte values are little-endian; `f32` values are IEEE 754 binary32 bit patterns.

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
    /// A little-endian IEEE 754 binary32.
    F32,
    /// This many consecutive little-endian binary32 values.
    F32Array(u8),
    /// Printable ASCII (0x20–0x7E), padded with NUL bytes to this size.
    Ascii(u8),
    /// Reserved bytes: written as zero, and an image with any other value is refused.
    Reserved(u8),
}

impl Kind {
    /// The size of a field of this kind, in bytes.
    pub const fn size(self) -> usize {
        match self {
            Kind::U8 => 1,
            Kind::U16 => 2,
            Kind::U32 | Kind::F32 => 4,
            Kind::U64 => 8,
            Kind::F32Array(n) => 4 * n as usize,
            Kind::Bytes(n) | Kind::Ascii(n) | Kind::Reserved(n) => n as usize,
        }
    }

    /// The type as written in the layout table.
    pub const fn type_name(self) -> &'static str {
        match self {
            Kind::Bytes(_) => "bytes",
            Kind::U8 => "u8",
            Kind::U16 => "u16",
            Kind::U32 => "u32",
            Kind::U64 => "u64",
            Kind::F32 => "f32",
            Kind::F32Array(_) => "f32[]",
            Kind::Ascii(_) => "ASCII",
            Kind::Reserved(_) => "zero",
        }
    }
}

/// One field of a part of the image: where it lies within that part and what it means.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Field {
    /// A short snake_case name (used in error messages and generated offsets).
    pub name: &'static str,
    /// Offset from the start of the part, in bytes.
    pub offset: usize,
    /// How the bytes are read; the size follows from it.
    pub kind: Kind,
    /// What the field holds.
    pub doc: &'static str,
}

impl Field {
    const fn first(name: &'static str, kind: Kind, doc: &'static str) -> Field {
        Field { name, offset: 0, kind, doc }
    }

    /// The field that follows this one directly.
    const fn then(self, name: &'static str, kind: Kind, doc: &'static str) -> Field {
        Field { name, offset: self.end(), kind, doc }
    }

    /// Size in bytes.
    pub const fn size(&self) -> usize {
        self.kind.size()
    }

    /// Offset one past the last byte of the field.
    pub const fn end(&self) -> usize {
        self.offset + self.kind.size()
    }
}

/// The fixed header at offset 0 of every image.
pub mod header {
    use super::{Field, Kind};

    /// The four bytes every image starts with.
    pub const MAGIC_VALUE: [u8; 4] = *b"LTCI";
    /// The format version this build writes and reads.
    pub const VERSION_VALUE: u16 = 1;

    /// Magic.
    pub const MAGIC: Field = Field::first("magic", Kind::Bytes(4), "`LTCI` (0x4C 0x54 0x43 0x49)");
    /// Format version.
    pub const VERSION: Field = MAGIC.then("version", Kind::U16, "format version, 1");
    /// Number of sections in the body.
    pub const SECTION_COUNT: Field =
        VERSION.then("section_count", Kind::U16, "number of sections that follow");
    /// Total length of the image.
    pub const TOTAL_LEN: Field =
        SECTION_COUNT.then("total_len", Kind::U32, "bytes in the whole image, header to CRC inclusive");
    /// Sequence counter for the two-slot layout.
    pub const SEQUENCE: Field =
        TOTAL_LEN.then("sequence", Kind::U32, "write counter: of two valid slots the higher one is used");
    /// Calibration time.
    pub const CALIBRATED_AT: Field =
        SEQUENCE.then("calibrated_at", Kind::U64, "when the unit was calibrated, Unix seconds (UTC)");
    /// Unit serial.
    pub const SERIAL: Field = CALIBRATED_AT.then("serial", Kind::Ascii(16), "unit serial, NUL-padded");

    /// Length of the header.
    pub const LEN: usize = SERIAL.end();
    /// The header's fields in order.
    pub const FIELDS: &[Field] = &[MAGIC, VERSION, SECTION_COUNT, TOTAL_LEN, SEQUENCE, CALIBRATED_AT, SERIAL];
}

/// The header in front of every section's payload.
pub mod section {
    use super::{Field, Kind};

    /// Section type.
    pub const KIND: Field =
        Field::first("kind", Kind::U16, "section type; bit 15 set: readers that do not know it skip it");
    /// Payload length.
    pub const LEN: Field = KIND.then("len", Kind::U16, "payload bytes that follow, a multiple of 4");

    /// Length of a section header.
    pub const HEADER_LEN: usize = LEN.end();
    /// Payload lengths are multiples of this, so every section and the CRC start 4-byte aligned.
    pub const ALIGN: usize = 4;
    /// Bit 15 of a section type: a reader that does not know the type may skip the section. A section type
    /// without it is critical: a reader that does not know it refuses the image.
    pub const OPTIONAL_BIT: u16 = 0x8000;
    /// The fields in order.
    pub const FIELDS: &[Field] = &[KIND, LEN];
}

/// Section `0x0001`: the calibrated ranges (ADC codes, temperature, x). Required.
pub mod ranges {
    use super::{Field, Kind};

    /// Section type.
    pub const KIND: u16 = 0x0001;

    /// ADC bits.
    pub const ADC_BITS: Field = Field::first("adc_bits", Kind::U8, "ADC resolution, 1..=24 bits");
    /// Padding.
    pub const RESERVED: Field = ADC_BITS.then("reserved", Kind::Reserved(3), "zero");
    /// Rail margin.
    pub const RAIL_MARGIN: Field =
        RESERVED.then("rail_margin", Kind::U32, "codes this close to a rail read as saturated");
    /// Lowest calibrated temperature.
    pub const T_MIN: Field = RAIL_MARGIN.then("t_min_c", Kind::F32, "lowest calibrated temperature, °C");
    /// Highest calibrated temperature.
    pub const T_MAX: Field = T_MIN.then("t_max_c", Kind::F32, "highest calibrated temperature, °C");
    /// Allowed extrapolation.
    pub const T_EXTRAPOLATION: Field =
        T_MAX.then("t_extrapolation_k", Kind::F32, "allowed excursion beyond either end, K");
    /// Lowest calibrated x.
    pub const X_MIN: Field =
        T_EXTRAPOLATION.then("x_min", Kind::F32, "lowest calibrated x = ln(I_sig/I_ref)");
    /// Highest calibrated x.
    pub const X_MAX: Field = X_MIN.then("x_max", Kind::F32, "highest calibrated x");
    /// Sensitivity floor.
    pub const X_MIN_SENSITIVITY: Field =
        X_MAX.then("x_min_sensitivity", Kind::F32, "smallest sensitivity dw/dx still reported");

    /// Payload length.
    pub const LEN: usize = X_MIN_SENSITIVITY.end();
    /// The fields in order.
    pub const FIELDS: &[Field] =
        &[ADC_BITS, RESERVED, RAIL_MARGIN, T_MIN, T_MAX, T_EXTRAPOLATION, X_MIN, X_MAX, X_MIN_SENSITIVITY];
}

/// Section `0x0002`: the f32 model (every coefficient of [`Model`](crate::calibration::Model) and the level
/// shift). Required.
pub mod model_f32 {
    use super::{Field, Kind};
    use crate::calibration::{MAX_RESIDUAL, MAX_SERIES};

    /// Section type.
    pub const KIND: u16 = 0x0002;

    const SERIES: u8 = MAX_SERIES as u8;
    const SURFACE: u8 = (MAX_RESIDUAL * MAX_RESIDUAL) as u8;

    /// Level shift.
    pub const LEVEL_SHIFT: Field =
        Field::first("level_shift_code", Kind::F32, "code at which the log stage's output is zero");
    /// Temperature centre.
    pub const T_CENTER: Field = LEVEL_SHIFT.then("t_center_c", Kind::F32, "T_c, centre of τ, °C");
    /// Temperature half span.
    pub const T_HALF_SPAN: Field = T_CENTER.then("t_half_span_k", Kind::F32, "T_h, half span of τ, K");
    /// Slope reference temperature.
    pub const T_REF: Field = T_HALF_SPAN.then("t_ref_k", Kind::F32, "T_ref of the slope series, K");
    /// Gain pole.
    pub const POLE: Field = T_REF.then("pole", Kind::F32, "q, the gain pole");
    /// Terms of the offset series.
    pub const OFFSET_LEN: Field = POLE.then("offset_len", Kind::U8, "terms of P_c in use, ≤ 6");
    /// Terms of the slope series.
    pub const SLOPE_LEN: Field = OFFSET_LEN.then("slope_len", Kind::U8, "terms of P_s in use, ≤ 6");
    /// Terms of the bulk series.
    pub const BULK_LEN: Field = SLOPE_LEN.then("bulk_len", Kind::U8, "terms of P_h in use, ≤ 6");
    /// Bias term switch.
    pub const BIAS_ENABLED: Field = BULK_LEN.then("bias_enabled", Kind::U8, "bias term: 0 off, 1 on");
    /// Residual terms in ξ.
    pub const RESIDUAL_NX: Field = BIAS_ENABLED.then("residual_nx", Kind::U8, "residual terms in ξ, ≤ 4");
    /// Residual terms in τ.
    pub const RESIDUAL_NT: Field = RESIDUAL_NX.then("residual_nt", Kind::U8, "residual terms in τ, ≤ 4");
    /// Padding.
    pub const RESERVED: Field = RESIDUAL_NT.then("reserved", Kind::Reserved(2), "zero");
    /// Offset coefficients.
    pub const OFFSET: Field =
        RESERVED.then("offset_coeffs", Kind::F32Array(SERIES), "P_c coefficients, all 6 stored");
    /// Slope coefficients.
    pub const SLOPE: Field = OFFSET.then("slope_coeffs", Kind::F32Array(SERIES), "P_s coefficients");
    /// Bulk coefficients.
    pub const BULK: Field = SLOPE.then("bulk_coeffs", Kind::F32Array(SERIES), "P_h coefficients");
    /// ln β at τ = 0.
    pub const LN_BETA0: Field = BULK.then("ln_beta0", Kind::F32, "b_0 of the bias term");
    /// Slope of ln β.
    pub const LN_BETA1: Field = LN_BETA0.then("ln_beta1", Kind::F32, "b_1 of the bias term");
    /// The reference input's bias term.
    pub const BIAS_REFERENCE: Field =
        LN_BETA1.then("bias_reference", Kind::F32, "ρ: reference input's bias term, codes");
    /// Residual x centre.
    pub const RESIDUAL_X_CENTER: Field = BIAS_REFERENCE.then("residual_x_center", Kind::F32, "x_c of ξ");
    /// Residual x half span.
    pub const RESIDUAL_X_HALF_SPAN: Field =
        RESIDUAL_X_CENTER.then("residual_x_half_span", Kind::F32, "x_h of ξ");
    /// Residual coefficients.
    pub const RESIDUAL: Field = RESIDUAL_X_HALF_SPAN.then(
        "residual_coeffs",
        Kind::F32Array(SURFACE),
        "r_ij at index 4·i + j, all 16 stored",
    );

    /// Payload length.
    pub const LEN: usize = RESIDUAL.end();
    /// The fields in order.
    pub const FIELDS: &[Field] = &[
        LEVEL_SHIFT,
        T_CENTER,
        T_HALF_SPAN,
        T_REF,
        POLE,
        OFFSET_LEN,
        SLOPE_LEN,
        BULK_LEN,
        BIAS_ENABLED,
        RESIDUAL_NX,
        RESIDUAL_NT,
        RESERVED,
        OFFSET,
        SLOPE,
        BULK,
        LN_BETA0,
        LN_BETA1,
        BIAS_REFERENCE,
        RESIDUAL_X_CENTER,
        RESIDUAL_X_HALF_SPAN,
        RESIDUAL,
    ];
}

/// The CRC at the end of every image.
pub mod trailer {
    use super::{Field, Kind};

    /// The CRC.
    pub const CRC: Field = Field::first(
        "crc32",
        Kind::U32,
        "CRC-32/ISO-HDLC (IEEE 802.3) of every byte before it, from offset 0",
    );
    /// Length of the trailer.
    pub const LEN: usize = CRC.end();
    /// The fields in order.
    pub const FIELDS: &[Field] = &[CRC];
}

/// The smallest image that can exist: a header and a CRC (it is refused for lacking the required sections).
pub const MIN_LEN: usize = header::LEN + trailer::LEN;
/// The largest image this build accepts or writes (a generous flash page budget).
pub const MAX_LEN: usize = 65536;
/// Total length of an image that holds the two required sections and nothing else.
pub const F32_IMAGE_LEN: usize =
    header::LEN + section::HEADER_LEN + ranges::LEN + section::HEADER_LEN + model_f32::LEN + trailer::LEN;

// The layout keeps every section and the CRC 4-byte aligned (flash word writes, aligned reads on the MCU).
const _: () = assert!(header::LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(section::HEADER_LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(ranges::LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(model_f32::LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(MAX_LEN.is_multiple_of(section::ALIGN));

/// One part of the layout, for tables and generated offsets.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Part {
    /// What the part is.
    pub name: &'static str,
    /// Its section type, for sections.
    pub kind: Option<u16>,
    /// Its fields in order.
    pub fields: &'static [Field],
}

/// Every part of the layout in the order it appears in an image.
pub const PARTS: &[Part] = &[
    Part { name: "header", kind: None, fields: header::FIELDS },
    Part { name: "section header", kind: None, fields: section::FIELDS },
    Part { name: "ranges", kind: Some(ranges::KIND), fields: ranges::FIELDS },
    Part { name: "model_f32", kind: Some(model_f32::KIND), fields: model_f32::FIELDS },
    Part { name: "trailer", kind: None, fields: trailer::FIELDS },
];

/// Renders the layout as the Markdown table shown in the [`image`](super) docs.
pub fn write_markdown_table(w: &mut dyn fmt::Write) -> fmt::Result {
    w.write_str("| part | offset | size | field | type | meaning |\n|---|---:|---:|---|---|---|\n")?;
    for part in PARTS {
        for f in part.fields {
            let name = match part.kind {
                Some(k) => PartName::Section(part.name, k),
                None => PartName::Plain(part.name),
            };
            writeln!(
                w,
                "| {name} | {} | {} | `{}` | `{}` | {} |",
                f.offset,
                f.size(),
                f.name,
                TypeOf(f),
                f.doc
            )?;
        }
    }
    Ok(())
}

enum PartName {
    Plain(&'static str),
    Section(&'static str, u16),
}

impl fmt::Display for PartName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PartName::Plain(n) => f.write_str(n),
            PartName::Section(n, k) => write!(f, "{n} (`{k:#06x}`)"),
        }
    }
}

struct TypeOf<'a>(&'a Field);

impl fmt::Display for TypeOf<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0.kind {
            Kind::F32Array(n) => write!(f, "f32[{n}]"),
            Kind::Ascii(n) => write!(f, "ASCII[{n}]"),
            Kind::Bytes(n) => write!(f, "bytes[{n}]"),
            k => f.write_str(k.type_name()),
        }
    }
}
