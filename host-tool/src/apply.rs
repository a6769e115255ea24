//! Writing corrected readings as CSV: the `logtrim apply` output.
//!
//! The output keeps every input column in order and adds, per row: one column per output unit of
//! [`Unit::ALL`] (`ln_ratio`, `decades`, `db_power`, `db_amplitude`, `absorbance`, `transmittance_pct`,
//! `linear_ratio`), for readings with a raw `temp_code` column `firmware_temp_c` (the temperature the
//! firmware read from it, °C: the sensor description in f32 on the f32 paths, the sensor table's θ on the
//! fixed path; empty where the channel gave none), `temperature_extrapolated` (`1` where the temperature
//! lay outside the calibrated range within the allowed extrapolation, else `0`) and `error`. A row the
//! firmware refuses has empty values and the error variant's name (`below_range`, `saturated`,
//! `sensor_open`, `code_out_of_adc_range`, …) in `error`; the run goes on.
//!
//! The rows are corrected by [`crate::correct`] (f32 or fixed path, with field layers from
//! [`crate::records`]); with a blank the values are relative to it (`absorbance` is then the absorbance
//! against the blank).

use std::collections::BTreeMap;
use std::io::{self, Write};

use logtrim::{Error, Unit};

use crate::correct::RowValue;
use crate::data::Readings;
use crate::output::number::shortest;

/// The column of the temperature the firmware read from a raw temperature channel, °C.
pub const FIRMWARE_TEMP_COLUMN: &str = "firmware_temp_c";

/// Columns `apply` adds after the input's (`raw`: the readings have a `temp_code` column).
pub fn added_columns_for(raw: bool) -> Vec<&'static str> {
    let mut v: Vec<&'static str> = Unit::ALL.iter().map(|u| u.name()).collect();
    if raw {
        v.push(FIRMWARE_TEMP_COLUMN);
    }
    v.push("temperature_extrapolated");
    v.push("error");
    v
}

/// Columns `apply` adds after the input's, for readings in °C.
pub fn added_columns() -> Vec<&'static str> {
    added_columns_for(false)
}

/// Whether a readings header has a raw `temp_code` column (the rule of [`crate::data`]).
fn has_temp_code(headers: &[String]) -> bool {
    headers.iter().any(|h| h.trim().eq_ignore_ascii_case("temp_code"))
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

/// Writes the input rows with their corrected values ([`crate::correct::correct_rows`] and its kin) as CSV.
pub fn write_results<W: Write>(
    readings: &Readings,
    results: &[Result<RowValue, Error>],
    out: W,
) -> Result<ApplySummary, ApplyError> {
    let mut w = ResultsWriter::new(&readings.headers, &readings.path, out)?;
    w.write(readings, results)?;
    Ok(w.finish()?.0)
}

/// The output of an apply run written as it goes: the header first ([`ResultsWriter::new`]), then each
/// chunk of rows with its results ([`ResultsWriter::write`]), so that a run of any length needs the memory
/// of one chunk.
pub struct ResultsWriter<W: Write> {
    w: csv::Writer<W>,
    raw: bool,
    summary: ApplySummary,
    rec: csv::ByteRecord,
    buf: ryu::Buffer,
}

impl<W: Write> ResultsWriter<W> {
    /// Checks the input's header against the added columns and writes the output's header; `path` names
    /// the input in errors.
    pub fn new(headers: &[String], path: &str, out: W) -> Result<Self, ApplyError> {
        let raw = has_temp_code(headers);
        let added = added_columns_for(raw);
        for h in headers {
            if let Some(c) = added.iter().find(|a| a.eq_ignore_ascii_case(h.trim())) {
                return Err(ApplyError::ColumnClash { path: path.to_string(), column: (*c).to_string() });
            }
        }
        let mut w = csv::WriterBuilder::new().has_headers(false).from_writer(out);
        let mut header: Vec<&str> = headers.iter().map(|s| s.as_str()).collect();
        header.extend(added.iter());
        w.write_record(&header).map_err(csv_io)?;
        Ok(ResultsWriter {
            w,
            raw,
            summary: ApplySummary::default(),
            rec: csv::ByteRecord::new(),
            buf: ryu::Buffer::new(),
        })
    }

    /// Writes rows (a chunk of the input, or all of it) with their results, in order; for a raw
    /// temperature channel, the temperature read is each row's `temp_c` (the f32 paths' reading).
    pub fn write(
        &mut self,
        readings: &Readings,
        results: &[Result<RowValue, Error>],
    ) -> Result<(), ApplyError> {
        let temps: Vec<Option<f64>> = readings.rows.iter().map(|r| r.temp_c.as_ref().ok().copied()).collect();
        self.write_with_temperatures(readings, results, &temps, true)
    }

    /// [`write`](Self::write) with the temperature each row's firmware read (°C; `None` where it read
    /// none), written with f32 digits when `f32_digits`.
    pub fn write_with_temperatures(
        &mut self,
        readings: &Readings,
        results: &[Result<RowValue, Error>],
        temps: &[Option<f64>],
        f32_digits: bool,
    ) -> Result<(), ApplyError> {
        let raw = self.raw;
        let summary = &mut self.summary;
        summary.rows += readings.rows.len();
        let rec = &mut self.rec;
        let buf = &mut self.buf;
        for ((row, res), temp) in readings.rows.iter().zip(results).zip(temps) {
            rec.clear();
            for f in row.record.iter() {
                rec.push_field(f);
            }
            let push_temp = |rec: &mut csv::ByteRecord, buf: &mut ryu::Buffer| match temp {
                Some(t) if f32_digits => rec.push_field(shortest(buf, *t as f32).as_bytes()),
                Some(t) => rec.push_field(shortest(buf, *t).as_bytes()),
                None => rec.push_field(b""),
            };
            match res {
                Ok(r) => {
                    for v in r.units {
                        if r.f32_digits {
                            rec.push_field(shortest(buf, v as f32).as_bytes());
                        } else {
                            rec.push_field(shortest(buf, v).as_bytes());
                        }
                    }
                    if raw {
                        push_temp(rec, buf);
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
                    if raw {
                        push_temp(rec, buf);
                    }
                    rec.push_field(b"");
                    rec.push_field(e.name().as_bytes());
                    summary.rejected += 1;
                    *summary.by_error.entry(e.name()).or_default() += 1;
                }
            }
            self.w.write_byte_record(rec).map_err(csv_io)?;
        }
        Ok(())
    }

    /// Flushes the CSV writer and returns the counts and the output.
    pub fn finish(self) -> Result<(ApplySummary, W), ApplyError> {
        let out = self.w.into_inner().map_err(|e| ApplyError::Io(e.into_error()))?;
        Ok((self.summary, out))
    }
}

fn csv_io(e: csv::Error) -> io::Error {
    io::Error::other(e.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::correct::{correct_rows, Arithmetic};
    use crate::data::{read_readings, ReadOptions};
    use logtrim::Calibration;

    /// The readings, their results, and the text written (or the error).
    type Written = (Readings, Vec<Result<RowValue, Error>>, Result<(ApplySummary, String), ApplyError>);

    /// The rows of `csv` corrected by a nominal 16-bit unit (3000 codes per neper, ratio 1 at code 32768)
    /// in the f32 path, and written.
    fn written(csv: &str) -> Written {
        let cal = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
        let opts = ReadOptions { skip_bad_rows: true, ..Default::default() };
        let readings = read_readings(csv.as_bytes(), "mem.csv", &opts).unwrap_or_else(|e| panic!("{e}"));
        let res = correct_rows(&cal, &readings, Arithmetic::F32);
        let mut out = Vec::new();
        let summary = write_results(&readings, &res, &mut out);
        let text = summary.map(|s| (s, String::from_utf8(out).unwrap()));
        (readings, res, text)
    }

    #[test]
    fn rows_pass_through_and_refusals_are_named() {
        let (_, _, out) = written("id,temp_c,code,note\n1,25,35768,a\n2,25,65535,b\n3,nan,33000,c\n");
        let (s, text) = out.unwrap();
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
    fn every_unit_has_its_column() {
        // Each unit of Unit::ALL has the column of its name, holding that unit's value of the row: a unit
        // added to the firmware's list without its column (or in another order) fails here.
        let (_, res, out) = written("temp_c,code\n25,35768\n40,30000\n");
        let (_, text) = out.unwrap();
        let mut lines = text.lines();
        let header: Vec<&str> = lines.next().unwrap().split(',').collect();
        assert_eq!(header.len(), 2 + Unit::ALL.len() + 2);
        for (line, r) in lines.zip(&res) {
            let cells: Vec<&str> = line.split(',').collect();
            assert_eq!(cells.len(), header.len(), "{line}");
            let r = r.as_ref().unwrap();
            for u in Unit::ALL {
                let i =
                    header.iter().position(|h| *h == u.name()).unwrap_or_else(|| panic!("no {}", u.name()));
                let written: f32 = cells[i].parse().unwrap();
                assert_eq!(f64::from(written), r.value(u), "{u:?} in {line}");
            }
        }
    }

    #[test]
    fn a_clashing_column_is_refused() {
        let (readings, _, out) = written("temp_c,code,absorbance\n25,35768,0.1\n");
        let err = out.unwrap_err();
        assert_eq!(readings.rows.len(), 1);
        assert!(err.to_string().contains("absorbance"), "{err}");
    }
}
