//! The one checked constructor behind [`Image::parse`]: bytes in, a fully validated [`Image`] or a specific
//! [`ImageError`] out. The order of the checks is documented in the [module docs](super#order-of-the-checks);
//! the framing is [`crate::record`]'s.

use core::ops::Deref;

use super::layout::{self, fixed as lf, header, model_f32, ranges, section, sensor as ls};
use super::{fixed, sensor, Image, ImageError, ImageValueError};
use crate::calibration::{
    AdcScaling, BiasTerm, Calibration, Model, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL,
    MAX_SERIES,
};
use crate::record::frame::{array, len_u32, Extent, Framing, Reader};
use crate::record::layout::Field;
use crate::record::RecordType;

/// How an image is framed: `LTCI`, version 3, its total length a u32 at offset 8, from a header and a CRC
/// up to [`layout::MAX_LEN`].
pub(super) const FRAMING: Framing = Framing {
    record: RecordType::CalibrationImage,
    version: header::VERSION_VALUE,
    header_len: header::LEN,
    len: header::TOTAL_LEN,
    min_len: layout::MIN_LEN,
    max_len: layout::MAX_LEN,
};

pub(super) fn parse(bytes: &[u8], extent: Extent) -> Result<(Image<'_>, &[u8]), ImageError> {
    // 1. The framing: magic, version, declared length, CRC.
    let framed = FRAMING.check(bytes, extent)?;
    let image = framed.bytes;
    let total = image.len();
    // The framing has shown the header and the CRC to be there: a short read here is a second guard.
    let head = Reader::new(
        image,
        0,
        ImageError::Format(crate::record::FormatError::Truncated {
            needed: len_u32(total),
            available: len_u32(total),
        }),
    );
    // 2. Structure.
    let body = head.range(header::LEN..total.saturating_sub(layout::trailer::LEN))?;
    let found = walk(body)?;
    let declared_count = head.u16(&header::SECTION_COUNT)?;
    if u32::from(declared_count) != found.count {
        return Err(ImageError::SectionCount { declared: declared_count, found: found.count });
    }
    let ranges_part = found.ranges.ok_or(ImageError::MissingSection { kind: ranges::KIND })?;
    let model_part = found.model.ok_or(ImageError::MissingSection { kind: model_f32::KIND })?;
    // 3. Values.
    let serial = decode_serial(head.raw(&header::SERIAL)?)?;
    let calibration = decode(&ranges_part, &model_part)?;
    check_values(&calibration)?;
    let model_fingerprint = crate::field::fingerprint_of_payloads(ranges_part.bytes(), model_part.bytes());
    let sensor = found.sensor.as_ref().map(sensor::decode).transpose()?;
    let fixed =
        found.fixed.as_ref().map(|p| fixed::decode(p, &calibration, model_fingerprint)).transpose()?;
    let image = Image {
        bytes: image,
        version: FRAMING.version,
        sequence: head.u32(&header::SEQUENCE)?,
        calibrated_at: head.u64(&header::CALIBRATED_AT)?,
        serial,
        crc: framed.crc,
        calibration,
        sensor,
        fixed,
    };
    Ok((image, framed.rest))
}

/// A known section's payload and where it lies in the image, read through the checked reader (a field
/// beyond the payload is the section's [`ImageError::SectionLength`]).
pub(super) struct Part<'a> {
    pub(super) kind: u16,
    read: Reader<'a, ImageError>,
}

impl<'a> Part<'a> {
    /// A section of type `kind` whose layout has `expected` bytes (for a section of variable length, its
    /// fewest), with its payload at offset `base` of the image.
    fn new(kind: u16, expected: usize, base: usize, payload: &'a [u8]) -> Self {
        let short =
            ImageError::SectionLength { kind, found: len_u16(payload.len()), expected: len_u16(expected) };
        Part { kind, read: Reader::new(payload, base, short) }
    }
}

impl<'a> Deref for Part<'a> {
    type Target = Reader<'a, ImageError>;

    fn deref(&self) -> &Reader<'a, ImageError> {
        &self.read
    }
}

struct Found<'a> {
    count: u32,
    ranges: Option<Part<'a>>,
    model: Option<Part<'a>>,
    sensor: Option<Part<'a>>,
    fixed: Option<Part<'a>>,
}

/// Walks the body's sections: bounds, alignment, known lengths, duplicates, unknown critical types.
fn walk(body: &[u8]) -> Result<Found<'_>, ImageError> {
    let mut found = Found { count: 0, ranges: None, model: None, sensor: None, fixed: None };
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
        let base = offset.saturating_add(section::HEADER_LEN);
        // Known sections: where they go, their length, and whether the length is fixed by the layout (the
        // fixed section's length follows from its own table sizes, checked when it is decoded).
        let slot = match kind {
            ranges::KIND => Some((&mut found.ranges, ranges::LEN, true)),
            model_f32::KIND => Some((&mut found.model, model_f32::LEN, true)),
            ls::KIND => Some((&mut found.sensor, ls::LEN, true)),
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
            *slot = Some(Part::new(kind, expected, base, payload));
        }
        found.count = found.count.saturating_add(1);
        offset = base.saturating_add(usize::from(len));
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
pub(super) fn check_values(c: &Calibration) -> Result<(), ImageValueError> {
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
            return Err(ImageValueError::TableSize { field: f.name, found, capacity });
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
            return Err(ImageValueError::NonFinite { field: f.name, index: 0 });
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
            return Err(ImageValueError::NonFinite {
                field: f.name,
                index: u8::try_from(i).unwrap_or(u8::MAX),
            });
        }
    }
    c.validate().map_err(ImageValueError::Calibration)
}
