//! Writing an image into a caller's buffer, without allocation. Everything is checked before the first
//! byte is written, with the same value checks the parser applies, so the writer never produces an image
//! the parser refuses and never leaves a half-written buffer behind an error.

use super::fixed::{check_for_write, fault_code};
use super::layout::{self, fixed as lf, header, model_f32, ranges, section, sensor as ls};
use super::parse::{check_values, FRAMING};
use super::{sensor, Section, WriteError};
use crate::calibration::Calibration;
use crate::fixed::FixedCalibration;
use crate::record::frame::{self, len_u32, Writer};
use crate::sensor::TemperatureSensor;

/// What the header says about the unit, besides its calibration.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ImageInfo<'s> {
    /// The unit serial: at most 16 printable ASCII characters (0x20–0x7E); may be empty.
    pub serial: &'s str,
    /// When the unit was calibrated, Unix seconds (UTC).
    pub calibrated_at: u64,
    /// The write counter: of two valid slots, the one with the higher counter is used
    /// (see [`slots`](super::slots)).
    pub sequence: u32,
}

/// Everything an image carries besides its header: the calibration (the two required sections), the
/// temperature channel's description, the fixed-point tables and extra optional sections.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Contents<'c> {
    /// The f32 calibration (sections *ranges* and *model_f32*).
    pub calibration: &'c Calibration,
    /// The raw temperature channel's description (section *sensor*), for a unit that reads one.
    pub sensor: Option<&'c TemperatureSensor>,
    /// The fixed-point tables (section *fixed*), for cores without an FPU.
    pub fixed: Option<&'c FixedCalibration<'c>>,
    /// Further optional sections (bit 15 set, not a type the writer produces itself, payloads a multiple
    /// of 4 bytes).
    pub extra: &'c [Section<'c>],
}

impl<'c> Contents<'c> {
    /// An image of the calibration alone.
    pub fn of(calibration: &'c Calibration) -> Self {
        Contents { calibration, sensor: None, fixed: None, extra: &[] }
    }
}

/// The length of an image holding the required sections and `extra`, or why it cannot be written.
pub fn encoded_len(extra: &[Section<'_>]) -> Result<usize, WriteError> {
    extra_len(layout::F32_IMAGE_LEN, extra)
}

/// The length of an image holding the required sections, the fixed section of `fixed` (if given) and
/// `extra`, or why it cannot be written. `calibration` is the one the image will carry (the fixed section
/// must describe its converter).
pub fn encoded_len_with_fixed(
    calibration: &Calibration,
    fixed: Option<&FixedCalibration<'_>>,
    extra: &[Section<'_>],
) -> Result<usize, WriteError> {
    encoded_len_of(&Contents { calibration, sensor: None, fixed, extra })
}

/// The length of an image of `contents`, or why it cannot be written.
pub fn encoded_len_of(contents: &Contents<'_>) -> Result<usize, WriteError> {
    let mut base = layout::F32_IMAGE_LEN;
    if contents.sensor.is_some() {
        base += layout::SENSOR_SECTION_LEN;
    }
    if let Some(f) = contents.fixed {
        base = (base + section::HEADER_LEN).saturating_add(check_for_write(f, contents.calibration)?.0);
    }
    extra_len(base, contents.extra)
}

fn extra_len(base: usize, extra: &[Section<'_>]) -> Result<usize, WriteError> {
    let mut len = base;
    for s in extra {
        let bad = WriteError::BadSection { kind: s.kind };
        if s.kind & section::OPTIONAL_BIT == 0
            || s.kind == lf::KIND
            || s.kind == ls::KIND
            || !s.payload.len().is_multiple_of(section::ALIGN)
            || s.payload.len() > usize::from(u16::MAX)
        {
            return Err(bad);
        }
        len = len.saturating_add(section::HEADER_LEN + s.payload.len());
    }
    if len > layout::MAX_LEN {
        return Err(WriteError::TooLong { len: len_u32(len) });
    }
    Ok(len)
}

/// Writes an image of `calibration` (the two required sections) at the start of `buf` and returns its
/// length, [`layout::F32_IMAGE_LEN`] bytes.
pub fn write(buf: &mut [u8], info: &ImageInfo<'_>, calibration: &Calibration) -> Result<usize, WriteError> {
    write_with_fixed(buf, info, calibration, None, &[])
}

/// Writes an image with the required sections followed by `extra` sections, which must be optional
/// types (bit 15 set) other than the fixed section's, with payloads of a multiple of 4 bytes. Returns the
/// image's length.
pub fn write_with_sections(
    buf: &mut [u8],
    info: &ImageInfo<'_>,
    calibration: &Calibration,
    extra: &[Section<'_>],
) -> Result<usize, WriteError> {
    write_with_fixed(buf, info, calibration, None, extra)
}

/// Writes an image with the required sections, the fixed section of `fixed` if given (checked as a
/// reader checks it: table sizes, the converter against `calibration`, [`FixedCalibration::validate`]),
/// then `extra` sections (as for [`write_with_sections`]). Returns the image's length.
pub fn write_with_fixed(
    buf: &mut [u8],
    info: &ImageInfo<'_>,
    calibration: &Calibration,
    fixed: Option<&FixedCalibration<'_>>,
    extra: &[Section<'_>],
) -> Result<usize, WriteError> {
    write_contents(buf, info, &Contents { calibration, sensor: None, fixed, extra })
}

/// Writes an image of `contents`: the required sections, the sensor section if a sensor is given (checked
/// with [`TemperatureSensor::validate`]), the fixed section if tables are given (checked as for
/// [`write_with_fixed`]), then the extra sections. Returns the image's length.
pub fn write_contents(
    buf: &mut [u8],
    info: &ImageInfo<'_>,
    contents: &Contents<'_>,
) -> Result<usize, WriteError> {
    let serial = encode_serial(info.serial)?;
    check_values(contents.calibration)?;
    if let Some(s) = contents.sensor {
        sensor::check(s)?;
    }
    let len = encoded_len_of(contents)?;
    let sections = 2
        + usize::from(contents.sensor.is_some())
        + usize::from(contents.fixed.is_some())
        + contents.extra.len();
    let count = u16::try_from(sections).map_err(|_| WriteError::TooLong { len: len_u32(len) })?;
    let head = Head { serial, count, len, info };
    frame::write(buf, len, |w| fill(w, &head, contents))
}

struct Head<'i> {
    serial: [u8; 16],
    count: u16,
    len: usize,
    info: &'i ImageInfo<'i>,
}

/// Writes the whole image but its CRC (which [`frame::write`] adds) into a buffer of the length computed
/// from the same layout.
fn fill(w: &mut Writer<'_>, h: &Head<'_>, contents: &Contents<'_>) -> Result<(), WriteError> {
    let calibration = contents.calibration;
    FRAMING.put_head(w, h.len)?;
    w.u16(&header::SECTION_COUNT, h.count)?;
    w.u32(&header::SEQUENCE, h.info.sequence)?;
    w.u64(&header::CALIBRATED_AT, h.info.calibrated_at)?;
    w.put(&header::SERIAL, &h.serial)?;
    let mut at = header::LEN;
    at = put_section(w, at, ranges::KIND, ranges::LEN, |p| put_ranges(p, calibration))?;
    at = put_section(w, at, model_f32::KIND, model_f32::LEN, |p| put_model(p, calibration))?;
    if let Some(s) = contents.sensor {
        at = put_section(w, at, ls::KIND, ls::LEN, |p| sensor::put(p, s))?;
    }
    if let Some(f) = contents.fixed {
        let (len, _) = check_for_write(f, calibration)?;
        let model = crate::field::fingerprint(calibration)?;
        at = put_section(w, at, lf::KIND, len, |p| put_fixed(p, f, model))?;
    }
    for s in contents.extra {
        at = put_section(w, at, s.kind, s.payload.len(), |p| Ok(p.put_at(0, s.payload)?))?;
    }
    // The CRC follows the last section.
    let end = at.saturating_add(layout::trailer::LEN);
    if end != h.len {
        return Err(WriteError::TooLong { len: len_u32(end) });
    }
    Ok(())
}

/// The serial as its 16 stored bytes, NUL-padded.
fn encode_serial(serial: &str) -> Result<[u8; 16], WriteError> {
    let mut out = [0u8; 16];
    if serial.len() > out.len() || !serial.bytes().all(|b| (0x20..=0x7e).contains(&b)) {
        return Err(WriteError::BadSerial);
    }
    for (d, s) in out.iter_mut().zip(serial.bytes()) {
        *d = s;
    }
    Ok(out)
}

/// Writes a section header at `at`, then its payload through `body` (with the writer's base at the
/// payload); returns the offset after it.
fn put_section(
    w: &mut Writer<'_>,
    at: usize,
    kind: u16,
    len: usize,
    body: impl FnOnce(&mut Writer<'_>) -> Result<(), WriteError>,
) -> Result<usize, WriteError> {
    let len16 = u16::try_from(len).map_err(|_| WriteError::BadSection { kind })?;
    w.set_base(at);
    w.u16(&section::KIND, kind)?;
    w.u16(&section::LEN, len16)?;
    w.set_base(at.saturating_add(section::HEADER_LEN));
    body(w)?;
    Ok(w.base().saturating_add(len))
}

fn put_ranges(w: &mut Writer<'_>, c: &Calibration) -> Result<(), WriteError> {
    w.u8(&ranges::ADC_BITS, c.adc.bits)?;
    w.put(&ranges::RESERVED, &[0; 3])?;
    w.u32(&ranges::RAIL_MARGIN, c.adc.rail_margin)?;
    w.f32(&ranges::T_MIN, c.temperature.min_c)?;
    w.f32(&ranges::T_MAX, c.temperature.max_c)?;
    w.f32(&ranges::T_EXTRAPOLATION, c.temperature.extrapolation_k)?;
    w.f32(&ranges::X_MIN, c.x_range.min)?;
    w.f32(&ranges::X_MAX, c.x_range.max)?;
    Ok(w.f32(&ranges::X_MIN_SENSITIVITY, c.x_range.min_sensitivity)?)
}

fn put_model(w: &mut Writer<'_>, c: &Calibration) -> Result<(), WriteError> {
    use model_f32 as mf;
    let m = &c.model;
    w.f32(&mf::LEVEL_SHIFT, c.adc.level_shift_code)?;
    w.f32(&mf::T_CENTER, m.t_center_c)?;
    w.f32(&mf::T_HALF_SPAN, m.t_half_span_k)?;
    w.f32(&mf::T_REF, m.t_ref_k)?;
    w.f32(&mf::POLE, m.pole)?;
    w.u8(&mf::OFFSET_LEN, m.offset.len)?;
    w.u8(&mf::SLOPE_LEN, m.slope.len)?;
    w.u8(&mf::BULK_LEN, m.bulk.len)?;
    w.u8(&mf::BIAS_ENABLED, u8::from(m.bias.enabled))?;
    w.u8(&mf::RESIDUAL_NX, m.residual.nx)?;
    w.u8(&mf::RESIDUAL_NT, m.residual.nt)?;
    w.put(&mf::RESERVED, &[0; 2])?;
    w.f32s(&mf::OFFSET, &m.offset.coeffs)?;
    w.f32s(&mf::SLOPE, &m.slope.coeffs)?;
    w.f32s(&mf::BULK, &m.bulk.coeffs)?;
    w.f32(&mf::LN_BETA0, m.bias.ln_beta0)?;
    w.f32(&mf::LN_BETA1, m.bias.ln_beta1)?;
    w.f32(&mf::BIAS_REFERENCE, m.bias.reference)?;
    w.f32(&mf::RESIDUAL_X_CENTER, m.residual.x_center)?;
    w.f32(&mf::RESIDUAL_X_HALF_SPAN, m.residual.x_half_span)?;
    Ok(w.f32s(&mf::RESIDUAL, &m.residual.coeffs)?)
}

/// Writes the fixed section's payload (sizes already checked by [`check_for_write`]): the fields, then the
/// tables back to back in the layout's order, then zero padding (the buffer is written in full, so the
/// padding is written explicitly).
fn put_fixed(w: &mut Writer<'_>, f: &FixedCalibration<'_>, model_fingerprint: u32) -> Result<(), WriteError> {
    let h = &f.header;
    let count =
        |n: usize| u16::try_from(n).map_err(|_| WriteError::SectionTooLong { kind: lf::KIND, len: u32::MAX });
    w.u8(&lf::LAYOUT, h.layout)?;
    w.u8(&lf::BIAS_BEND, u8::from(h.bias_bend))?;
    w.u8(&lf::SENSITIVITY_LIMIT, u8::from(h.sensitivity_limit))?;
    w.u8(&lf::HAS_SENSOR, u8::from(f.sensor.is_some()))?;
    w.u8(&lf::OFFSET_FRAC, h.offset_frac)?;
    w.u8(&lf::INV_SLOPE_FRAC, h.inv_slope_frac)?;
    w.u8(&lf::RESIDUAL_FRAC, h.residual_frac)?;
    w.u8(&lf::RESERVED, 0)?;
    w.u16(&lf::T_KNOTS, h.t_knots)?;
    w.u16(&lf::XA_KNOTS, h.xa_knots)?;
    w.u32(&lf::ADC_MAX_CODE, h.adc_max_code)?;
    w.u32(&lf::RAIL_MARGIN, h.rail_margin)?;
    w.i32(&lf::TEMP_MIN, h.temp_min)?;
    w.i32(&lf::TEMP_MAX, h.temp_max)?;
    w.i32(&lf::TEMP_LO, h.temp_lo)?;
    w.i32(&lf::TEMP_HI, h.temp_hi)?;
    w.i32(&lf::T_ORIGIN, h.t_origin)?;
    w.put(&lf::T_STEP_LOG2, &[h.t_step_log2])?;
    w.put(&lf::XA_STEP_LOG2, &[h.xa_step_log2])?;
    w.put(&lf::RESERVED3, &[0; 2])?;
    w.i32(&lf::XA_ORIGIN, h.xa_origin)?;
    w.i32(&lf::X_MIN, h.x_min)?;
    w.i32(&lf::X_MAX, h.x_max)?;
    let knots: &[i32] = f.sensor.as_ref().map_or(&[], |s| s.knots);
    w.u16(&lf::OFFSET_LEN, count(f.offset.len())?)?;
    w.u16(&lf::INV_SLOPE_LEN, count(f.inv_slope.len())?)?;
    w.u16(&lf::LN_BIAS_LEN, count(f.ln_bias.len())?)?;
    w.u16(&lf::U_MIN_LEN, count(f.u_min.len())?)?;
    w.u16(&lf::RESIDUAL_LEN, count(f.residual.len())?)?;
    w.u16(&lf::SENSOR_KNOTS_LEN, count(knots.len())?)?;
    match &f.sensor {
        Some(s) => {
            w.u32(&lf::SENSOR_CODE_LO, s.code_lo)?;
            w.u32(&lf::SENSOR_CODE_HI, s.code_hi)?;
            w.u32(&lf::SENSOR_FAR_BELOW, s.far_below_code)?;
            w.u32(&lf::SENSOR_FAR_ABOVE, s.far_above_code)?;
            w.u8(&lf::SENSOR_STEP_LOG2, s.step_log2)?;
            w.u8(&lf::FAULT_BELOW, fault_code(s.fault_below))?;
            w.u8(&lf::FAULT_FAR_BELOW, fault_code(s.fault_far_below))?;
            w.u8(&lf::FAULT_ABOVE, fault_code(s.fault_above))?;
            w.u8(&lf::FAULT_FAR_ABOVE, fault_code(s.fault_far_above))?;
        }
        None => {
            for fld in [lf::SENSOR_CODE_LO, lf::SENSOR_CODE_HI, lf::SENSOR_FAR_BELOW, lf::SENSOR_FAR_ABOVE] {
                w.u32(&fld, 0)?;
            }
            for fld in [
                lf::SENSOR_STEP_LOG2,
                lf::FAULT_BELOW,
                lf::FAULT_FAR_BELOW,
                lf::FAULT_ABOVE,
                lf::FAULT_FAR_ABOVE,
            ] {
                w.put(&fld, &[0])?;
            }
        }
    }
    w.put(&lf::RESERVED2, &[0; 3])?;
    w.u32(&lf::MODEL_FINGERPRINT, model_fingerprint)?;
    let mut at = lf::HEAD_LEN;
    for table in [f.offset, f.inv_slope, f.ln_bias, f.u_min, knots] {
        for v in table {
            w.put_at(at, &v.to_le_bytes())?;
            at = at.saturating_add(4);
        }
    }
    for v in f.residual {
        w.put_at(at, &v.to_le_bytes())?;
        at = at.saturating_add(2);
    }
    while !at.is_multiple_of(section::ALIGN) {
        w.put_at(at, &[0])?;
        at = at.saturating_add(1);
    }
    Ok(())
}
