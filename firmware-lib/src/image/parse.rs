//! The one checked constructor behind [`Image::parse`]: bytes in, a fully validated [`Image`] or a specific
//! [`ImageError`] out. The order of the checks is documented in the [module docs](super#order-of-the-checks).

use super::layout::{self, fixed as lf, header, model_f32, ranges, section, trailer, Field};
use super::{crc32, fixed, Image, ImageError, ValueError};
use crate::calibration::{
    AdcScaling, BiasTerm, Calibration, Model, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL,
    MAX_SERIES,
};

/// A length as u32 for error reports (lengths here never exceed u32; larger ones saturate).
pub(super) fn len_u32(n: usize) -> u32 {
    u32::try_from(n).unwrap_or(u32::MAX)
}

/// The bytes of `f` within `part` as an array, or `None` if the part is too short or `N` is not the
/// field's size.
pub(super) fn array<const N: usize>(part: &[u8], f: &Field) -> Option<[u8; N]> {
    part.get(f.offset..f.end())?.try_into().ok()
}

/// Whether the bytes must be exactly one image or may continue after it.
#[derive(Clone, Copy, PartialEq, Eq)]
pub(super) enum Extent {
    /// [`Image::parse`]: trailing bytes are a [`ImageError::LengthMismatch`].
    Exact,
    /// [`Image::parse_prefix`]: the image starts the bytes; what follows is not looked at.
    Prefix,
}

pub(super) fn parse(bytes: &[u8], extent: Extent) -> Result<(Image<'_>, &[u8]), ImageError> {
    let available = len_u32(bytes.len());
    let short = |needed: usize| ImageError::Truncated { needed: len_u32(needed), available };

    // 1. Magic.
    let magic: [u8; 4] = array(bytes, &header::MAGIC).ok_or(short(header::LEN))?;
    if magic != header::MAGIC_VALUE {
        return Err(ImageError::BadMagic { found: magic });
    }
    // 2. Header, version.
    let head = bytes.get(..header::LEN).ok_or(short(header::LEN))?;
    let field_u16 = |f| array(head, f).map(u16::from_le_bytes).ok_or(short(header::LEN));
    let field_u32 = |f| array(head, f).map(u32::from_le_bytes).ok_or(short(header::LEN));
    let version = field_u16(&header::VERSION)?;
    if version != header::VERSION_VALUE {
        return Err(ImageError::UnsupportedVersion { found: version });
    }
    // 3. Declared length.
    let declared = field_u32(&header::TOTAL_LEN)?;
    let total = usize::try_from(declared).unwrap_or(usize::MAX);
    if !(layout::MIN_LEN..=layout::MAX_LEN).contains(&total) || !total.is_multiple_of(section::ALIGN) {
        return Err(ImageError::BadLength { declared });
    }
    let (image, rest) = bytes.split_at_checked(total).ok_or(short(total))?;
    if extent == Extent::Exact && !rest.is_empty() {
        return Err(ImageError::LengthMismatch { declared, actual: available });
    }
    // 4. CRC.
    let (covered, tail) = image.split_at_checked(total - trailer::LEN).ok_or(short(total))?;
    let stored = array(tail, &trailer::CRC).map(u32::from_le_bytes).ok_or(short(total))?;
    let computed = crc32(covered);
    if stored != computed {
        return Err(ImageError::CrcMismatch { stored, computed });
    }
    // 5. Structure.
    let body = covered.get(header::LEN..).ok_or(short(total))?;
    let found = walk(body)?;
    let declared_count = field_u16(&header::SECTION_COUNT)?;
    if u32::from(declared_count) != found.count {
        return Err(ImageError::SectionCount { declared: declared_count, found: found.count });
    }
    let ranges_part = found.ranges.ok_or(ImageError::MissingSection { kind: ranges::KIND })?;
    let model_part = found.model.ok_or(ImageError::MissingSection { kind: model_f32::KIND })?;
    // 6. Values.
    let serial =
        decode_serial(head.get(header::SERIAL.offset..header::SERIAL.end()).ok_or(short(header::LEN))?)?;
    let calibration = decode(&ranges_part, &model_part)?;
    check_values(&calibration)?;
    let fixed = found.fixed.as_ref().map(|p| fixed::decode(p, &calibration)).transpose()?;

    let sequence = field_u32(&header::SEQUENCE)?;
    let calibrated_at =
        array(head, &header::CALIBRATED_AT).map(u64::from_le_bytes).ok_or(short(header::LEN))?;
    Ok((
        Image { bytes: image, version, sequence, calibrated_at, serial, crc: stored, calibration, fixed },
        rest,
    ))
}

/// A known section's payload and where it lies in the image.
pub(super) struct Part<'a> {
    pub(super) kind: u16,
    /// The payload length of the layout (for a section of variable length, its smallest).
    expected: usize,
    /// Offset of the payload in the image.
    pub(super) base: usize,
    pub(super) bytes: &'a [u8],
}

struct Found<'a> {
    count: u32,
    ranges: Option<Part<'a>>,
    model: Option<Part<'a>>,
    fixed: Option<Part<'a>>,
}

/// Walks the body's sections: bounds, alignment, known lengths, duplicates, unknown critical types.
fn walk(body: &[u8]) -> Result<Found<'_>, ImageError> {
    let mut found = Found { count: 0, ranges: None, model: None, fixed: None };
    let mut rest = body;
    let mut offset = header::LEN;
    while !rest.is_empty() {
        let overrun = ImageError::SectionOverrun { offset: len_u32(offset) };
        let (head, after) = rest.split_at_checked(section::HEADER_LEN).ok_or(overrun)?;
        let kind = array(head, &section::KIND).map(u16::from_le_bytes).ok_or(overrun)?;
        let len = array(head, &section::LEN).map(u16::from_le_bytes).ok_or(overrun)?;
        if !usize::from(len).is_multiple_of(section::ALIGN) {
            return Err(ImageError::SectionAlignment { kind, len });
        }
        let (payload, after) = after.split_at_checked(usize::from(len)).ok_or(overrun)?;
        let base = offset + section::HEADER_LEN;
        // Known sections: where they go, their length, and whether the length is fixed by the layout (the
        // fixed section's length follows from its own table sizes, checked when it is decoded).
        let slot = match kind {
            ranges::KIND => Some((&mut found.ranges, ranges::LEN, true)),
            model_f32::KIND => Some((&mut found.model, model_f32::LEN, true)),
            lf::KIND => Some((&mut found.fixed, lf::HEAD_LEN, false)),
            k if k & section::OPTIONAL_BIT != 0 => None,
            k => return Err(ImageError::UnknownSection { kind: k }),
        };
        if let Some((slot, expected, exact)) = slot {
            if slot.is_some() {
                return Err(ImageError::DuplicateSection { kind });
            }
            if exact && usize::from(len) != expected {
                return Err(ImageError::SectionLength { kind, found: len, expected: len_u16(expected) });
            }
            *slot = Some(Part { kind, expected, base, bytes: payload });
        }
        found.count = found.count.saturating_add(1);
        offset = base + usize::from(len);
        rest = after;
    }
    Ok(found)
}

fn len_u16(n: usize) -> u16 {
    u16::try_from(n).unwrap_or(u16::MAX)
}

/// Printable ASCII (0x20–0x7E) up to the first NUL, only NULs after it.
fn decode_serial(raw: &[u8]) -> Result<&str, ImageError> {
    let n = raw.iter().position(|&b| b == 0).unwrap_or(raw.len());
    let (text, pad) = raw.split_at_checked(n).ok_or(ImageError::BadSerial)?;
    if raw.len() != header::SERIAL.size()
        || !text.iter().all(|b| (0x20..=0x7e).contains(b))
        || pad.iter().any(|&b| b != 0)
    {
        return Err(ImageError::BadSerial);
    }
    core::str::from_utf8(text).map_err(|_| ImageError::BadSerial)
}

impl Part<'_> {
    /// A payload too short for its layout (the walk has already refused those of a fixed length: for them
    /// this is a second guard).
    pub(super) fn short(&self) -> ImageError {
        ImageError::SectionLength {
            kind: self.kind,
            found: len_u16(self.bytes.len()),
            expected: len_u16(self.expected),
        }
    }

    /// The field's bytes.
    fn get<const N: usize>(&self, f: &Field) -> Result<[u8; N], ImageError> {
        array(self.bytes, f).ok_or(self.short())
    }

    pub(super) fn u8(&self, f: &Field) -> Result<u8, ImageError> {
        self.get::<1>(f).map(|[b]| b)
    }

    pub(super) fn u16(&self, f: &Field) -> Result<u16, ImageError> {
        self.get(f).map(u16::from_le_bytes)
    }

    pub(super) fn u32(&self, f: &Field) -> Result<u32, ImageError> {
        self.get(f).map(u32::from_le_bytes)
    }

    pub(super) fn i32(&self, f: &Field) -> Result<i32, ImageError> {
        self.get(f).map(i32::from_le_bytes)
    }

    fn f32(&self, f: &Field) -> Result<f32, ImageError> {
        self.get(f).map(f32::from_le_bytes)
    }

    fn f32s<const N: usize>(&self, f: &Field) -> Result<[f32; N], ImageError> {
        let raw = self.bytes.get(f.offset..f.end()).ok_or(self.short())?;
        let (words, rest) = raw.as_chunks::<4>();
        if words.len() != N || !rest.is_empty() {
            return Err(self.short());
        }
        let mut out = [0.0f32; N];
        for (v, w) in out.iter_mut().zip(words) {
            *v = f32::from_le_bytes(*w);
        }
        Ok(out)
    }

    /// The field's bytes are all zero ([`ImageError::ReservedNotZero`] at the first that is not).
    pub(super) fn reserved(&self, f: &Field) -> Result<(), ImageError> {
        let raw = self.bytes.get(f.offset..f.end()).ok_or(self.short())?;
        match raw.iter().position(|&b| b != 0) {
            Some(i) => Err(ImageError::ReservedNotZero { offset: len_u32(self.base + f.offset + i) }),
            None => Ok(()),
        }
    }

    pub(super) fn flag(&self, f: &Field) -> Result<bool, ImageError> {
        match self.u8(f)? {
            0 => Ok(false),
            1 => Ok(true),
            found => Err(ImageError::BadFlag { field: f.name, found }),
        }
    }
}

/// Decodes the two required sections into a calibration (structure of the payloads: reserved bytes, flags).
fn decode(r: &Part<'_>, m: &Part<'_>) -> Result<Calibration, ImageError> {
    use model_f32 as mf;
    r.reserved(&ranges::RESERVED)?;
    m.reserved(&mf::RESERVED)?;
    let adc = AdcScaling {
        bits: r.u8(&ranges::ADC_BITS)?,
        rail_margin: r.u32(&ranges::RAIL_MARGIN)?,
        level_shift_code: m.f32(&mf::LEVEL_SHIFT)?,
    };
    let temperature = TemperatureRange {
        min_c: r.f32(&ranges::T_MIN)?,
        max_c: r.f32(&ranges::T_MAX)?,
        extrapolation_k: r.f32(&ranges::T_EXTRAPOLATION)?,
    };
    let x_range = XRange {
        min: r.f32(&ranges::X_MIN)?,
        max: r.f32(&ranges::X_MAX)?,
        min_sensitivity: r.f32(&ranges::X_MIN_SENSITIVITY)?,
    };
    let series = |len: &Field, coeffs: &Field| -> Result<Series, ImageError> {
        Ok(Series { len: m.u8(len)?, coeffs: m.f32s::<MAX_SERIES>(coeffs)? })
    };
    let model = Model {
        t_center_c: m.f32(&mf::T_CENTER)?,
        t_half_span_k: m.f32(&mf::T_HALF_SPAN)?,
        t_ref_k: m.f32(&mf::T_REF)?,
        pole: m.f32(&mf::POLE)?,
        offset: series(&mf::OFFSET_LEN, &mf::OFFSET)?,
        slope: series(&mf::SLOPE_LEN, &mf::SLOPE)?,
        bulk: series(&mf::BULK_LEN, &mf::BULK)?,
        bias: BiasTerm {
            enabled: m.flag(&mf::BIAS_ENABLED)?,
            ln_beta0: m.f32(&mf::LN_BETA0)?,
            ln_beta1: m.f32(&mf::LN_BETA1)?,
            reference: m.f32(&mf::BIAS_REFERENCE)?,
        },
        residual: Residual {
            nx: m.u8(&mf::RESIDUAL_NX)?,
            nt: m.u8(&mf::RESIDUAL_NT)?,
            x_center: m.f32(&mf::RESIDUAL_X_CENTER)?,
            x_half_span: m.f32(&mf::RESIDUAL_X_HALF_SPAN)?,
            coeffs: m.f32s::<{ MAX_RESIDUAL * MAX_RESIDUAL }>(&mf::RESIDUAL)?,
        },
    };
    Ok(Calibration { adc, temperature, x_range, model })
}

/// The value checks shared by the parser and the writer: term counts within capacity, every stored f32
/// finite (used or not), then [`Calibration::validate`].
pub(super) fn check_values(c: &Calibration) -> Result<(), ValueError> {
    use model_f32 as mf;
    let m = &c.model;
    let r = &m.residual;
    let counts = [
        (&mf::OFFSET_LEN, m.offset.len, MAX_SERIES),
        (&mf::SLOPE_LEN, m.slope.len, MAX_SERIES),
        (&mf::BULK_LEN, m.bulk.len, MAX_SERIES),
        (&mf::RESIDUAL_NX, r.nx, MAX_RESIDUAL),
        (&mf::RESIDUAL_NT, r.nt, MAX_RESIDUAL),
    ];
    for (f, found, capacity) in counts {
        if usize::from(found) > capacity {
            let capacity = u8::try_from(capacity).unwrap_or(u8::MAX);
            return Err(ValueError::TableSize { field: f.name, found, capacity });
        }
    }
    let scalars = [
        (&ranges::T_MIN, c.temperature.min_c),
        (&ranges::T_MAX, c.temperature.max_c),
        (&ranges::T_EXTRAPOLATION, c.temperature.extrapolation_k),
        (&ranges::X_MIN, c.x_range.min),
        (&ranges::X_MAX, c.x_range.max),
        (&ranges::X_MIN_SENSITIVITY, c.x_range.min_sensitivity),
        (&mf::LEVEL_SHIFT, c.adc.level_shift_code),
        (&mf::T_CENTER, m.t_center_c),
        (&mf::T_HALF_SPAN, m.t_half_span_k),
        (&mf::T_REF, m.t_ref_k),
        (&mf::POLE, m.pole),
        (&mf::LN_BETA0, m.bias.ln_beta0),
        (&mf::LN_BETA1, m.bias.ln_beta1),
        (&mf::BIAS_REFERENCE, m.bias.reference),
        (&mf::RESIDUAL_X_CENTER, r.x_center),
        (&mf::RESIDUAL_X_HALF_SPAN, r.x_half_span),
    ];
    for (f, v) in scalars {
        if !v.is_finite() {
            return Err(ValueError::NonFinite { field: f.name, index: 0 });
        }
    }
    let arrays: [(&Field, &[f32]); 4] = [
        (&mf::OFFSET, &m.offset.coeffs),
        (&mf::SLOPE, &m.slope.coeffs),
        (&mf::BULK, &m.bulk.coeffs),
        (&mf::RESIDUAL, &r.coeffs),
    ];
    for (f, vs) in arrays {
        if let Some(i) = vs.iter().position(|v| !v.is_finite()) {
            return Err(ValueError::NonFinite { field: f.name, index: u8::try_from(i).unwrap_or(u8::MAX) });
        }
    }
    c.validate().map_err(ValueError::Calibration)
}
