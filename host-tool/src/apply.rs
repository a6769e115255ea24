//! Running firmware-lib's correction over a readings file and writing the results as CSV.
//!
//! The output keeps every input column in order and adds, per row: one column per output unit
//! (`ln_ratio`, `decades`, `db_power`, `db_amplitude`, `absorbance`, `transmittance_pct`, `linear_ratio`),
//! `temperature_extrapolated` (`1` where the temperature lay outside the calibrated range within the
//! allowed extrapolation, else `0`) and `error`. A row the firmware refuses has empty values and the error
//! variant's name (`below_range`, `saturated`, …) in `error`; the run goes on.
//!
//! With field layers ([`correct_rows_layered`], [`correct_rows_fixed_layered`], from record files by
//! [`layers_from_files`]) the values are those of the factory reading after the trim, and relative to
//! the blank when there is one (`absorbance` is then the absorbance against the blank).

use std::collections::BTreeMap;
use std::io::{self, Write};

use logtrim::field::Layers;
use logtrim::math::{Backend, Libm};
use logtrim::{Calibration, Error, Reading, Unit};
use rayon::prelude::*;

use crate::data::Readings;

/// Which arithmetic corrects the readings.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Arithmetic {
    /// firmware-lib's f32 path with the libm backend (the default on parts with an FPU).
    #[default]
    F32,
    /// firmware-lib's f32 path with the micromath backend (fast, coarse).
    F32Micromath,
}

/// A corrected row: the value in every unit of [`Unit::ALL`] (as the path computed it, widened to f64 for
/// writing) and whether the temperature was extrapolated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RowValue {
    /// x = ln(I_sig/I_ref).
    pub x: f64,
    /// The value in each unit of [`Unit::ALL`], in that order.
    pub units: [f64; 7],
    /// The temperature lay outside the calibrated range, within the allowed extrapolation.
    pub temperature_extrapolated: bool,
    /// Digits to write: the f32 path's values are f32 (shortest f32 text); the fixed path's are exact
    /// binary fractions (shortest f64 text).
    pub f32_digits: bool,
}

impl RowValue {
    fn of_f32(r: &Reading) -> RowValue {
        let mut units = [0.0; 7];
        for (v, u) in units.iter_mut().zip(Unit::ALL) {
            *v = f64::from(r.value(u));
        }
        RowValue {
            x: f64::from(r.x),
            units,
            temperature_extrapolated: r.temperature_extrapolated,
            f32_digits: true,
        }
    }

    fn of_fixed(r: &logtrim::fixed::FixedReading) -> Result<RowValue, Error> {
        let mut units = [0.0; 7];
        for (v, u) in units.iter_mut().zip(Unit::ALL) {
            let q = r.value(u)?;
            *v = q as f64 / (1u64 << logtrim::fixed::value_frac_bits(u)) as f64;
        }
        let x = f64::from(r.x) / f64::from(1u32 << logtrim::fixed::X_FRAC);
        Ok(RowValue { x, units, temperature_extrapolated: r.temperature_extrapolated, f32_digits: false })
    }
}

/// The factory fixed-path reading of every row of `readings` (in parallel), as on the MCU.
///
/// A `temp_c` column is passed as m°C (rounded); a `temp_code` column goes through the tables' own
/// temperature-sensor table, as on the MCU.
pub fn factory_readings_fixed(
    fixed: &logtrim::fixed::FixedCalibration<'_>,
    readings: &Readings,
) -> Vec<Result<logtrim::fixed::FixedReading, Error>> {
    let raw = readings.columns.temperature_kind == crate::data::TemperatureColumn::Code;
    let col = readings.columns.temperature;
    readings
        .rows
        .par_iter()
        .map(|r| {
            if raw {
                let code = r
                    .record
                    .get(col)
                    .and_then(|b| std::str::from_utf8(b).ok())
                    .and_then(|t| t.trim().parse::<u32>().ok())
                    .ok_or(Error::NonFinite)?;
                fixed.correct_raw(r.code, code)
            } else {
                let t = r.temp_c?;
                let mc = (t * 1000.0).round();
                if !(mc >= f64::from(i32::MIN) && mc <= f64::from(i32::MAX)) {
                    // `as` saturates: the error reports the nearest i32 m°C.
                    return Err(Error::TemperatureOutOfRange { millicelsius: mc as i32 });
                }
                fixed.correct(r.code, mc as i32)
            }
        })
        .collect()
}

/// Corrects every row of `readings` (in parallel) with the firmware's integer fixed-point path.
///
/// A `temp_c` column is passed as m°C (rounded); a `temp_code` column goes through the tables' own
/// temperature-sensor table, as on the MCU.
pub fn correct_rows_fixed(
    fixed: &logtrim::fixed::FixedCalibration<'_>,
    readings: &Readings,
) -> Vec<Result<RowValue, Error>> {
    correct_rows_fixed_layered(fixed, readings, &Layers::FACTORY)
}

/// [`correct_rows_fixed`] with field layers (a trim, a blank) on top of the factory correction, in the
/// fixed path's integer arithmetic.
pub fn correct_rows_fixed_layered(
    fixed: &logtrim::fixed::FixedCalibration<'_>,
    readings: &Readings,
    layers: &Layers,
) -> Vec<Result<RowValue, Error>> {
    factory_readings_fixed(fixed, readings)
        .into_iter()
        .map(|r| r.and_then(|r| layers.apply_fixed(&r)).and_then(|r| RowValue::of_fixed(&r)))
        .collect()
}

/// Columns `apply` adds after the input's.
pub fn added_columns() -> Vec<&'static str> {
    let mut v: Vec<&'static str> = Unit::ALL.iter().map(|u| u.name()).collect();
    v.push("temperature_extrapolated");
    v.push("error");
    v
}

/// Counts of an apply run.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ApplySummary {
    /// Rows read.
    pub rows: usize,
    /// Rows the firmware refused.
    pub rejected: usize,
    /// Refused rows by error name.
    pub by_error: BTreeMap<&'static str, usize>,
    /// Rows corrected with an extrapolated temperature.
    pub extrapolated: usize,
}

/// Why an apply run could not write its output.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ApplyError {
    /// The input already has a column that apply would add.
    #[error("{path}: the input already has a column named {column:?}, which apply adds; rename or drop it")]
    ColumnClash {
        /// The input file.
        path: String,
        /// The clashing column.
        column: String,
    },
    /// Writing failed.
    #[error("writing the output: {0}")]
    Io(#[from] io::Error),
}

fn correct_one<B: Backend>(
    cal: &Calibration,
    code: u32,
    temp: &Result<f64, Error>,
) -> Result<Reading, Error> {
    let t = (*temp)?;
    cal.correct_with::<B>(code, t as f32)
}

/// The factory f32-path reading of every row of `readings` (in parallel), with the chosen backend.
pub fn factory_readings(
    cal: &Calibration,
    readings: &Readings,
    arith: Arithmetic,
) -> Vec<Result<Reading, Error>> {
    readings
        .rows
        .par_iter()
        .map(|r| match arith {
            Arithmetic::F32 => correct_one::<Libm>(cal, r.code, &r.temp_c),
            Arithmetic::F32Micromath => correct_one::<logtrim::math::Micromath>(cal, r.code, &r.temp_c),
        })
        .collect()
}

/// Corrects every row of `readings` (in parallel) with the chosen arithmetic.
pub fn correct_rows(
    cal: &Calibration,
    readings: &Readings,
    arith: Arithmetic,
) -> Vec<Result<RowValue, Error>> {
    correct_rows_layered(cal, readings, arith, &Layers::FACTORY)
}

/// [`correct_rows`] with field layers (a trim, a blank) on top of the factory correction.
pub fn correct_rows_layered(
    cal: &Calibration,
    readings: &Readings,
    arith: Arithmetic,
    layers: &Layers,
) -> Vec<Result<RowValue, Error>> {
    factory_readings(cal, readings, arith)
        .into_iter()
        .map(|r| r.map(|r| RowValue::of_f32(&layers.apply(&r))))
        .collect()
}

/// A trim and a blank read from their record files and installed over a calibration as the firmware
/// would ([`Layers::new`]): each record checked, bound to this calibration, the trim within `limits`.
pub fn layers_from_files(
    cal: &Calibration,
    trim: Option<&std::path::Path>,
    blank: Option<&std::path::Path>,
    limits: &logtrim::field::TrimLimits,
) -> Result<Layers, LayerError> {
    let trim = trim.map(crate::trim::read_trim_file).transpose()?;
    let blank = blank.map(crate::trim::read_blank_file).transpose()?;
    let fp = logtrim::field::fingerprint(cal).map_err(|e| LayerError::Fingerprint(format!("{e:?}")))?;
    Layers::new(trim, blank, limits, Some(fp)).map_err(LayerError::Refused)
}

/// Why the field layers of an apply run could not be installed.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LayerError {
    /// A record file could not be read or is not a valid record.
    #[error(transparent)]
    File(#[from] crate::trim::RecordFileError),
    /// firmware-lib refuses to install a record (made on another calibration, a trim past the limits).
    #[error("--trim/--blank: {0}")]
    Refused(logtrim::field::FieldError),
    /// The calibration cannot be fingerprinted.
    #[error("the calibration cannot be stored as an image to fingerprint it: {0}")]
    Fingerprint(String),
}

impl LayerError {
    /// True for a refusal that is a failed check (exit 1): a trim past the limits. A bad or foreign file
    /// is bad input (exit 2).
    pub fn is_check(&self) -> bool {
        matches!(
            self,
            LayerError::Refused(
                logtrim::field::FieldError::OffsetPastLimit { .. }
                    | logtrim::field::FieldError::GainPastLimit { .. }
            )
        )
    }
}

/// Writes the input rows with the results of [`correct_rows`] as CSV.
pub fn write_results<W: Write>(
    readings: &Readings,
    results: &[Result<RowValue, Error>],
    out: W,
) -> Result<ApplySummary, ApplyError> {
    let added = added_columns();
    for h in &readings.headers {
        if let Some(c) = added.iter().find(|a| a.eq_ignore_ascii_case(h.trim())) {
            return Err(ApplyError::ColumnClash { path: readings.path.clone(), column: (*c).to_string() });
        }
    }
    let mut w = csv::WriterBuilder::new().has_headers(false).from_writer(out);
    let mut header: Vec<&str> = readings.headers.iter().map(|s| s.as_str()).collect();
    header.extend(added.iter());
    w.write_record(&header).map_err(csv_io)?;
    let mut summary = ApplySummary { rows: readings.rows.len(), ..ApplySummary::default() };
    let mut rec = csv::ByteRecord::new();
    let mut buf = ryu::Buffer::new();
    let mut text = |v: f64, f32_digits: bool| -> Vec<u8> {
        if f32_digits {
            buf.format(v as f32).as_bytes().to_vec()
        } else {
            buf.format(v).as_bytes().to_vec()
        }
    };
    for (row, res) in readings.rows.iter().zip(results) {
        rec.clear();
        for f in row.record.iter() {
            rec.push_field(f);
        }
        match res {
            Ok(r) => {
                for v in r.units {
                    rec.push_field(&text(v, r.f32_digits));
                }
                rec.push_field(if r.temperature_extrapolated { b"1" } else { b"0" });
                rec.push_field(b"");
                if r.temperature_extrapolated {
                    summary.extrapolated += 1;
                }
            }
            Err(e) => {
                for _ in Unit::ALL {
                    rec.push_field(b"");
                }
                rec.push_field(b"");
                rec.push_field(e.name().as_bytes());
                summary.rejected += 1;
                *summary.by_error.entry(e.name()).or_default() += 1;
            }
        }
        w.write_byte_record(&rec).map_err(csv_io)?;
    }
    w.flush()?;
    Ok(summary)
}

fn csv_io(e: csv::Error) -> io::Error {
    io::Error::other(e.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::{read_readings, ReadOptions};

    #[test]
    fn rows_pass_through_and_refusals_are_named() {
        let cal = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
        let csv = "id,temp_c,code,note\n1,25,35768,a\n2,25,65535,b\n3,nan,33000,c\n";
        let r = read_readings(
            csv.as_bytes(),
            "mem.csv",
            &ReadOptions { skip_bad_rows: true, ..Default::default() },
        );
        let readings = match r {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        let res = correct_rows(&cal, &readings, Arithmetic::F32);
        let mut out = Vec::new();
        let s = write_results(&readings, &res, &mut out).unwrap();
        let text = String::from_utf8(out).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines[0], format!("id,temp_c,code,note,{}", added_columns().join(",")));
        // Row 1: x = 3000/3000 = 1 Np at T_ref; 10·log10(e) = 4.3429448 dB (ISO 80000-3 via 1 Np).
        assert!(
            lines[1].starts_with("1,25,35768,a,1.0,0.4342945,4.342945,8.68589,-0.4342945,"),
            "{}",
            lines[1]
        );
        assert!(lines[1].ends_with(",0,"), "{}", lines[1]);
        assert!(lines[2].ends_with(",,saturated"), "{}", lines[2]);
        assert_eq!(s.rejected, 1 + usize::from(lines.len() == 4));
    }

    #[test]
    fn a_clashing_column_is_refused() {
        let cal = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
        let csv = "temp_c,code,absorbance\n25,35768,0.1\n";
        let readings = read_readings(csv.as_bytes(), "mem.csv", &ReadOptions::default()).unwrap();
        let res = correct_rows(&cal, &readings, Arithmetic::F32);
        let err = write_results(&readings, &res, Vec::new()).unwrap_err();
        assert!(err.to_string().contains("absorbance"), "{err}");
    }
}
