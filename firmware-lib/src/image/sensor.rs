//! The temperature-sensor section (`0x8004`): a unit's [`TemperatureSensor`] in an image, for the f32 path
//! and the fixed path alike, how it is encoded and how it is checked when it is read back.
//!
//! The element's three coefficients share three f32 fields whose meaning depends on the element
//! ([`layout::sensor`](super::layout::sensor)); an RTD uses only the first, and its other two are stored as
//! zero bits. Every f32 is checked finite, then the whole description with [`TemperatureSensor::validate`]
//! (the same check the host applies when it loads a calibration file), by the writer before it writes and by
//! the parser after the CRC.

use super::layout::sensor as ls;
use super::parse::Part;
use super::{ImageError, ImageValueError, WriteError};
use crate::divider::{Divider, Placement};
use crate::record::frame::Writer;
use crate::rtd::Rtd;
use crate::sensor::{SensorElement, TemperatureSensor};
use crate::thermistor::{Beta, SteinhartHart};

/// The stored code of an element model.
fn element_code(e: &SensorElement) -> u8 {
    match e {
        SensorElement::NtcBeta(_) => 0,
        SensorElement::NtcSteinhartHart(_) => 1,
        SensorElement::Rtd(_) => 2,
    }
}

/// The stored code of a placement.
fn placement_code(p: Placement) -> u8 {
    match p {
        Placement::LowSide => 0,
        Placement::HighSide => 1,
    }
}

fn placement_of(code: u8) -> Option<Placement> {
    match code {
        0 => Some(Placement::LowSide),
        1 => Some(Placement::HighSide),
        _ => None,
    }
}

/// The three coefficient fields of an element, in the layout's order.
fn coefficients(e: &SensorElement) -> [f32; 3] {
    match e {
        SensorElement::NtcBeta(b) => [b.r0_ohm, b.t0_c, b.beta_k],
        SensorElement::NtcSteinhartHart(sh) => [sh.a, sh.b, sh.c],
        SensorElement::Rtd(r) => [r.r0_ohm, 0.0, 0.0],
    }
}

/// The value checks shared by the writer and the parser: every stored f32 finite, then
/// [`TemperatureSensor::validate`].
pub(super) fn check(s: &TemperatureSensor) -> Result<(), ImageValueError> {
    let fields = [ls::COEFF_A, ls::COEFF_B, ls::COEFF_C, ls::SERIES_OHM, ls::MIN_C, ls::MAX_C];
    let [a, b, c] = coefficients(&s.element);
    let values = [a, b, c, s.divider.series_ohm, s.min_c, s.max_c];
    if let Some((f, _)) = fields.iter().zip(values).find(|(_, v)| !v.is_finite()) {
        return Err(ImageValueError::NonFinite { field: f.name, index: 0 });
    }
    s.validate().map_err(ImageValueError::Sensor)
}

/// Decodes and checks a sensor section's payload.
pub(super) fn decode(p: &Part<'_>) -> Result<TemperatureSensor, ImageError> {
    p.reserved(&ls::RESERVED)?;
    let code = p.u8(&ls::ELEMENT)?;
    let (a, b, c) = (p.f32(&ls::COEFF_A)?, p.f32(&ls::COEFF_B)?, p.f32(&ls::COEFF_C)?);
    let element = match code {
        0 => SensorElement::NtcBeta(Beta { r0_ohm: a, t0_c: b, beta_k: c }),
        1 => SensorElement::NtcSteinhartHart(SteinhartHart { a, b, c }),
        2 => {
            // An RTD uses one coefficient; the other two fields are stored as zero bits.
            p.reserved(&ls::COEFF_B)?;
            p.reserved(&ls::COEFF_C)?;
            SensorElement::Rtd(Rtd { r0_ohm: a })
        }
        found => {
            return Err(crate::record::FormatError::BadEnum { field: ls::ELEMENT.name, found }.into());
        }
    };
    let sensor = TemperatureSensor {
        element,
        divider: Divider {
            placement: p.choice(&ls::PLACEMENT, placement_of)?,
            series_ohm: p.f32(&ls::SERIES_OHM)?,
            bits: p.u8(&ls::BITS)?,
            full_scale_code: p.u32(&ls::FULL_SCALE_CODE)?,
            open_margin: p.u32(&ls::OPEN_MARGIN)?,
            short_margin: p.u32(&ls::SHORT_MARGIN)?,
        },
        min_c: p.f32(&ls::MIN_C)?,
        max_c: p.f32(&ls::MAX_C)?,
    };
    check(&sensor)?;
    Ok(sensor)
}

/// Writes a sensor section's payload (already checked with [`check`]).
pub(super) fn put(w: &mut Writer<'_>, s: &TemperatureSensor) -> Result<(), WriteError> {
    let [a, b, c] = coefficients(&s.element);
    w.u8(&ls::ELEMENT, element_code(&s.element))?;
    w.u8(&ls::PLACEMENT, placement_code(s.divider.placement))?;
    w.u8(&ls::BITS, s.divider.bits)?;
    w.put(&ls::RESERVED, &[0])?;
    w.f32(&ls::COEFF_A, a)?;
    w.f32(&ls::COEFF_B, b)?;
    w.f32(&ls::COEFF_C, c)?;
    w.f32(&ls::SERIES_OHM, s.divider.series_ohm)?;
    w.u32(&ls::FULL_SCALE_CODE, s.divider.full_scale_code)?;
    w.u32(&ls::OPEN_MARGIN, s.divider.open_margin)?;
    w.u32(&ls::SHORT_MARGIN, s.divider.short_margin)?;
    w.f32(&ls::MIN_C, s.min_c)?;
    Ok(w.f32(&ls::MAX_C, s.max_c)?)
}
