//! Resistance–temperature tables of an element, with the divider's code at each temperature and what the
//! firmware reads back from it; and the summary of a channel over its valid range (codes and resolution).

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::Path;

use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::Divider;

use super::settings::check_range;
use super::{bad, rejected, Input, SensorToolError};
use crate::file_error::FileError;
use crate::output::number::Num;
use crate::output::AtomicFile;

/// Most rows a table may have (a guard against a typo'd step).
pub const MAX_TABLE_ROWS: usize = 100_000;

/// The range and step of a table, °C.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TableSpec {
    /// The first temperature.
    pub from_c: f64,
    /// The last temperature (included when the step lands on it).
    pub to_c: f64,
    /// The step, K (> 0).
    pub step_k: f64,
}

/// What the divider reads at one temperature of a table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CodeColumns {
    /// The exact (fractional, noise-free) code.
    pub exact: f64,
    /// The code rounded, as the converter gives it (saturated at its top code).
    pub code: u32,
    /// What the firmware's f32 conversion makes of that code, or why it refuses it
    /// ([`logtrim::Error::CodeOutOfAdcRange`] where the exact code lies beyond the converter).
    pub firmware_c: Result<f32, logtrim::Error>,
    /// The temperature step of one code there, K.
    pub k_per_code: f64,
}

/// One row of a table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TableRow {
    /// Temperature, °C.
    pub celsius: f64,
    /// The element's resistance, Ω.
    pub ohm: f64,
    /// The divider's reading, if a divider was given.
    pub code: Option<CodeColumns>,
}

/// What a table is made of, and how its firmware column treats the valid range.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TableSource<'a> {
    /// The element alone: resistances only.
    Element(&'a SensorElement),
    /// The element behind a divider, no valid range declared: the firmware's code → Ω → °C chain without
    /// a range check.
    Divided(&'a SensorElement, &'a Divider),
    /// A whole settings file: the firmware's [`TemperatureSensor::celsius`], range check included.
    Sensor(&'a TemperatureSensor),
}

/// The resistance (and with a divider, the code) of an element at evenly spaced temperatures.
///
/// The curve must be defined at every temperature and strictly monotone over the range (falling for an
/// NTC, rising for an RTD).
pub fn table(source: TableSource<'_>, spec: &TableSpec) -> Result<Vec<TableRow>, SensorToolError> {
    let (element, divider) = match source {
        TableSource::Element(e) => (*e, None),
        TableSource::Divided(e, d) => (*e, Some(*d)),
        TableSource::Sensor(s) => (s.element, Some(s.divider)),
    };
    element.validate().map_err(rejected("the element"))?;
    if let Some(d) = divider {
        d.validate().map_err(rejected("the divider"))?;
    }
    let TableSpec { from_c, to_c, step_k } = *spec;
    check_range(&element, (Input::From, Input::To), from_c, to_c)?;
    if !(step_k.is_finite() && step_k > 0.0) {
        return bad(Input::Step, step_k, "not a positive step", "a step in K, > 0");
    }
    let span_steps = (to_c - from_c) / step_k;
    if span_steps + 1.0 > MAX_TABLE_ROWS as f64 {
        return bad(
            Input::Step,
            step_k,
            format!("{from_c} … {to_c} °C would take {:.0} rows", span_steps.floor() + 1.0),
            "a step that gives at most 100,000 rows",
        );
    }
    let n = (span_steps + 1e-9).floor() as usize + 1;
    let mut rows = Vec::with_capacity(n);
    for i in 0..n {
        // By multiplication, not accumulation; snapped to 1e-9 K so that 0.1-steps print as typed.
        let t = ((from_c + step_k * i as f64) * 1e9).round() / 1e9;
        let ohm = element.resistance_f64(t).map_err(|e| SensorToolError::CurveOverRange {
            range: Input::TableRange,
            from_c,
            to_c,
            problem: format!("the element's curve gives no resistance at {t} °C ({e})"),
        })?;
        let code = match divider {
            None => None,
            Some(d) => Some(code_columns(source, &element, &d, t, ohm)?),
        };
        rows.push(TableRow { celsius: t, ohm, code });
    }
    let rises = matches!(element, SensorElement::Rtd(_));
    for w in rows.windows(2) {
        let ok = if rises { w[1].ohm > w[0].ohm } else { w[1].ohm < w[0].ohm };
        if !ok {
            return Err(SensorToolError::CurveOverRange {
                range: Input::TableRange,
                from_c,
                to_c,
                problem: format!(
                    "the resistance goes from {} Ω at {} °C to {} Ω at {} °C, against the element's sense",
                    w[0].ohm, w[0].celsius, w[1].ohm, w[1].celsius
                ),
            });
        }
    }
    Ok(rows)
}

fn code_columns(
    source: TableSource<'_>,
    element: &SensorElement,
    d: &Divider,
    t: f64,
    ohm: f64,
) -> Result<CodeColumns, SensorToolError> {
    let exact = d.code_f64(ohm).map_err(rejected(format!("{t} °C")))?;
    let max = d.max_code().map_err(rejected(format!("{t} °C")))?;
    let rounded = exact.round().max(0.0);
    let code = rounded.min(f64::from(max)) as u32;
    let firmware_c = if rounded > f64::from(max) {
        // The converter saturates at its top code: say so rather than convert the clipped code.
        Err(logtrim::Error::CodeOutOfAdcRange { code: rounded.min(f64::from(u32::MAX)) as u32, max })
    } else {
        match source {
            TableSource::Sensor(s) => s.celsius(code),
            _ => d.resistance(code).and_then(|r| element.celsius(r)),
        }
    };
    // Codes per kelvin by a central difference of the same forward chain (one-sided at a model's edge).
    let h = 1e-3;
    let at = |t: f64| element.resistance_f64(t).and_then(|r| d.code_f64(r)).ok();
    let per_k = match (at(t + h), at(t - h)) {
        (Some(a), Some(b)) => (a - b) / (2.0 * h),
        (Some(a), None) => (a - exact) / h,
        (None, Some(b)) => (exact - b) / h,
        (None, None) => f64::NAN,
    };
    Ok(CodeColumns { exact, code, firmware_c, k_per_code: 1.0 / per_k.abs() })
}

/// Table layout.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TableFormat {
    /// Comma-separated, one header row, full precision.
    Csv,
    /// Aligned columns for reading, with `#` comment lines describing the channel.
    Text,
}

/// A firmware refusal's short name for a table cell.
fn refusal(e: &logtrim::Error) -> String {
    match e {
        logtrim::Error::Sensor(logtrim::error::SensorFault::Open) => "open".into(),
        logtrim::Error::Sensor(logtrim::error::SensorFault::Short) => "short".into(),
        logtrim::Error::Sensor(logtrim::error::SensorFault::OutOfModelRange) => "out_of_range".into(),
        e => e.name().into(),
    }
}

/// Writes a table. `header` lines (the channel's description) go into the text layout as `#` comments.
pub fn write_table<W: std::io::Write>(
    rows: &[TableRow],
    format: TableFormat,
    header: &[String],
    mut out: W,
) -> std::io::Result<()> {
    let with_code = rows.first().is_some_and(|r| r.code.is_some());
    let mut s = String::new();
    match format {
        TableFormat::Csv => {
            s.push_str("temp_c,resistance_ohm");
            if with_code {
                s.push_str(",code_exact,code,firmware_c,firmware_error_k,k_per_code,refused");
            }
            s.push('\n');
            for r in rows {
                let _ = write!(s, "{},{}", r.celsius, r.ohm);
                if let Some(c) = &r.code {
                    let _ = write!(s, ",{},{}", c.exact, c.code);
                    match c.firmware_c {
                        Ok(t) => {
                            let _ = write!(s, ",{},{},{},", t, f64::from(t) - r.celsius, c.k_per_code);
                        }
                        Err(e) => {
                            let _ = write!(s, ",,,{},{}", c.k_per_code, refusal(&e));
                        }
                    }
                }
                s.push('\n');
            }
        }
        TableFormat::Text => {
            for h in header {
                let _ = writeln!(s, "# {h}");
            }
            let _ = write!(s, "{:>10} {:>16}", "T [°C]", "R [Ω]");
            if with_code {
                let _ = write!(
                    s,
                    " {:>11} {:>8} {:>12} {:>10} {:>10}",
                    "code exact", "code", "firmware °C", "error K", "K/code"
                );
            }
            s.push('\n');
            for r in rows {
                let _ = write!(s, "{:>10} {:>16}", r.celsius, sig(r.ohm, 7));
                if let Some(c) = &r.code {
                    let _ = write!(s, " {:>11.3} {:>8}", c.exact, c.code);
                    match c.firmware_c {
                        Ok(t) => {
                            let _ = write!(
                                s,
                                " {:>12.4} {:>10.4} {:>10.4}",
                                Num::from(t),
                                Num(f64::from(t) - r.celsius),
                                c.k_per_code
                            );
                        }
                        Err(e) => {
                            let _ = write!(s, " {:>12} {:>10} {:>10.4}", refusal(&e), "", c.k_per_code);
                        }
                    }
                }
                s.push('\n');
            }
        }
    }
    out.write_all(s.as_bytes())?;
    out.flush()
}

/// `v` to `digits` significant digits, without an exponent for everyday magnitudes.
fn sig(v: f64, digits: i32) -> String {
    if v == 0.0 || !v.is_finite() {
        return v.to_string();
    }
    let decimals = (digits - 1 - v.abs().log10().floor() as i32).max(0) as usize;
    format!("{v:.decimals$}")
}

/// Writes a table to a file atomically (nothing appears under `path` if writing fails).
pub fn write_table_file(
    path: &Path,
    rows: &[TableRow],
    format: TableFormat,
    header: &[String],
) -> Result<(), SensorToolError> {
    let io = |source| SensorToolError::from(FileError::io(path, source));
    let mut f = AtomicFile::create(path).map_err(io)?;
    write_table(rows, format, header, &mut f).map_err(io)?;
    f.flush().map_err(io)?;
    f.commit().map_err(io)
}

/// What a channel reads over its valid range: codes and resolution at the ends and the coarsest step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RangeSummary {
    /// At `min_c`: (°C, code, K per code).
    pub at_min: (f64, u32, f64),
    /// At `max_c`.
    pub at_max: (f64, u32, f64),
    /// The coarsest resolution over the range: (°C, K per code).
    pub coarsest: (f64, f64),
    /// The largest error of the firmware's f32 conversion at the rounded code, over 200 steps, K
    /// (quantisation and arithmetic together).
    pub worst_error_k: f64,
}

/// The summary of a channel over its valid range (201 evenly spaced temperatures).
pub fn summarise(sensor: &TemperatureSensor) -> Result<RangeSummary, SensorToolError> {
    let (lo, hi) = (f64::from(sensor.min_c), f64::from(sensor.max_c));
    let rows =
        table(TableSource::Sensor(sensor), &TableSpec { from_c: lo, to_c: hi, step_k: (hi - lo) / 200.0 })?;
    let cols = |r: &TableRow| r.code.map(|c| (r.celsius, c.code, c.k_per_code));
    let first = rows.first().and_then(cols);
    let last = rows.last().and_then(cols);
    let (Some(at_min), Some(at_max)) = (first, last) else {
        return Err(SensorToolError::Rejected {
            what: "the settings".into(),
            error: logtrim::Error::InvalidCalibration(logtrim::error::CalibrationDefect::TemperatureRange),
        });
    };
    let mut coarsest = (lo, 0.0f64);
    let mut worst = 0.0f64;
    for r in &rows {
        if let Some(c) = r.code {
            if c.k_per_code > coarsest.1 {
                coarsest = (r.celsius, c.k_per_code);
            }
            if let Ok(t) = c.firmware_c {
                worst = worst.max((f64::from(t) - r.celsius).abs());
            }
        }
    }
    Ok(RangeSummary { at_min, at_max, coarsest, worst_error_k: worst })
}
