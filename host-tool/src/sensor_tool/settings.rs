//! A temperature channel's settings — firmware-lib's [`TemperatureSensor`]: element, divider and valid
//! range — built and checked, written to and read from its settings file (JSON), and described in words.

use std::path::Path;

use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::{Divider, Placement};

use super::{bad, rejected, Input, SensorToolError, ABSOLUTE_ZERO_C};
use crate::file_error::{parse_json, read_text, to_json_line, FileError};

/// f32 at or below `v`.
fn f32_down(v: f64) -> f32 {
    let f = v as f32;
    if f64::from(f) > v {
        f.next_down()
    } else {
        f
    }
}

/// f32 at or above `v`.
fn f32_up(v: f64) -> f32 {
    let f = v as f32;
    if f64::from(f) < v {
        f.next_up()
    } else {
        f
    }
}

/// Checks a temperature range for an element: finite, `lo < hi`, above absolute zero, and for an RTD
/// within the IEC 60751 curve's −200…850 °C. `ends` names the two ends, e.g. `(Input::Min, Input::Max)`.
pub(super) fn check_range(
    element: &SensorElement,
    (lo_end, hi_end): (Input, Input),
    lo: f64,
    hi: f64,
) -> Result<(), SensorToolError> {
    if !lo.is_finite() || lo <= ABSOLUTE_ZERO_C {
        return bad(lo_end, lo, "not a temperature above absolute zero", "a temperature in °C above −273.15");
    }
    if !hi.is_finite() || hi <= lo {
        return bad(
            hi_end,
            hi,
            format!("not above the low end {lo}"),
            "the upper end of the range, above the lower",
        );
    }
    if let SensorElement::Rtd(_) = element {
        if lo < logtrim::rtd::MIN_C {
            return bad(lo_end, lo, "below the IEC 60751 curve's range", "−200 °C or above for an RTD");
        }
        if hi > logtrim::rtd::MAX_C {
            return bad(hi_end, hi, "above the IEC 60751 curve's range", "850 °C or below for an RTD");
        }
    }
    Ok(())
}

/// A temperature channel's settings from its element, divider and valid range (`min_c` … `max_c`, °C):
/// checked value by value, then by firmware-lib's [`TemperatureSensor::validate`], then for a fault at
/// either end of the range (an end whose code the firmware would take as an open or shorted sensor, or
/// that lies beyond the converter).
pub fn build_sensor(
    element: SensorElement,
    divider: Divider,
    min_c: f64,
    max_c: f64,
) -> Result<TemperatureSensor, SensorToolError> {
    check_range(&element, (Input::Min, Input::Max), min_c, max_c)?;
    let sensor = TemperatureSensor { element, divider, min_c: f32_down(min_c), max_c: f32_up(max_c) };
    if let Err(error) = sensor.validate() {
        return Err(match (element, error) {
            (
                SensorElement::NtcSteinhartHart(_),
                logtrim::Error::InvalidCalibration(logtrim::error::CalibrationDefect::TemperatureRange),
            ) => SensorToolError::CurveOverRange {
                range: Input::Range,
                from_c: min_c,
                to_c: max_c,
                problem: "the Steinhart–Hart curve is not monotone over this range (it turns back)".into(),
            },
            (_, error) => rejected("the settings")(error),
        });
    }
    for (end, t) in [(Input::Min, min_c), (Input::Max, max_c)] {
        let exact = sensor.code_f64(t).map_err(|error| SensorToolError::Value {
            input: end,
            value: t.to_string(),
            problem: format!("the channel gives no code there ({error})"),
            expected: "a temperature the element's curve and the divider cover",
        })?;
        let code = exact.round().max(0.0);
        let fault = match u32::try_from(code as u64) {
            Ok(c) => sensor.divider.resistance_f64(c).err().map(|e| fault_name(&e)),
            Err(_) => Some("beyond the converter".to_string()),
        };
        if let Some(fault) = fault {
            return Err(SensorToolError::FaultAtRangeEnd { end, celsius: t, code: code as u64, fault });
        }
    }
    Ok(sensor)
}

fn fault_name(e: &logtrim::Error) -> String {
    match e {
        logtrim::Error::Sensor(logtrim::error::SensorFault::Open) => "an open sensor".into(),
        logtrim::Error::Sensor(logtrim::error::SensorFault::Short) => "a shorted sensor".into(),
        logtrim::Error::CodeOutOfAdcRange { max, .. } => format!("beyond the converter (max code {max})"),
        e => e.to_string(),
    }
}

/// The settings file's text: the sensor as pretty JSON, with a trailing newline.
pub fn settings_json(sensor: &TemperatureSensor) -> String {
    to_json_line(sensor)
}

/// Writes a settings file atomically.
pub fn write_settings(path: &Path, sensor: &TemperatureSensor) -> Result<(), SensorToolError> {
    crate::output::write_atomic(path, settings_json(sensor).as_bytes())
        .map_err(|source| FileError::io(path, source).into())
}

/// Parses a settings file's text and validates it; `path` only names the source in errors.
pub fn settings_from_json(text: &str, path: &str) -> Result<TemperatureSensor, SensorToolError> {
    let s: TemperatureSensor = parse_json(text, path)?;
    s.validate().map_err(|error| SensorToolError::Rejected { what: path.to_string(), error })?;
    Ok(s)
}

/// Reads and validates a settings file.
pub fn load_settings(path: &Path) -> Result<TemperatureSensor, SensorToolError> {
    settings_from_json(&read_text(path)?, &path.display().to_string())
}

/// One line of text describing an element.
pub fn describe_element(e: &SensorElement) -> String {
    match e {
        SensorElement::NtcBeta(b) => {
            format!("NTC, Beta model: R = {} Ω at {} °C, β = {} K", b.r0_ohm, b.t0_c, b.beta_k)
        }
        SensorElement::NtcSteinhartHart(s) => {
            format!("NTC, Steinhart–Hart: A = {:e}, B = {:e}, C = {:e}", s.a, s.b, s.c)
        }
        SensorElement::Rtd(r) => format!("platinum RTD on the IEC 60751 curve, R0 = {} Ω", r.r0_ohm),
    }
}

/// One line of text describing a divider.
pub fn describe_divider(d: &Divider) -> String {
    let place = match d.placement {
        Placement::LowSide => "low side (sensor to ground; the code rises with R)",
        Placement::HighSide => "high side (sensor to the supply; the code falls as R rises)",
    };
    format!(
        "{place}, series {} Ω, {}-bit ADC, supply = code {}, fault bands: open {} codes, short {} codes",
        d.series_ohm, d.bits, d.full_scale_code, d.open_margin, d.short_margin
    )
}
