//! A validation run joined with its truth: the readings a unit took (`readings.csv`: `id`, `code`,
//! `temp_c`) matched by `id` (and `unit`, in a batch) to what was really applied (`truth.csv`: `id`,
//! `x_true` or `ratio`, `t_true_c`, optional `x_oracle`), as [`crate::simulate`] writes them and as a
//! bench run with a reference instrument would.

use std::collections::HashMap;
use std::path::Path;

use crate::data::{self, DataError, ReadOptions};

/// One validation reading with its truth.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ValidationPoint {
    /// The log channel's ADC code.
    pub code: u32,
    /// The temperature as the firmware read it, °C.
    pub temp_c: f64,
    /// The true x = ln ratio.
    pub x_true: f64,
    /// The unit's true temperature, °C.
    pub t_true_c: f64,
    /// The oracle's x (the best any calibration can do), where known.
    pub x_oracle: Option<f64>,
}

/// Errors reading a validation run.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ValidationError {
    /// The readings file could not be read, or a file lacks a column (as the CSV reader reports it).
    #[error(transparent)]
    Data(#[from] DataError),
    /// The truth file could not be opened or is not well-formed CSV.
    #[error("{path}: {message}")]
    Csv {
        /// The file.
        path: String,
        /// What went wrong.
        message: String,
    },
    /// A bad value.
    #[error("{path}: line {line}, column {column}: value {value:?}; expected {expected}")]
    Value {
        /// The file.
        path: String,
        /// The line (1-based).
        line: u64,
        /// The column's name.
        column: &'static str,
        /// The value as read.
        value: String,
        /// What was expected.
        expected: &'static str,
    },
    /// A reading has no truth row.
    #[error("{readings}: line {line}: reading id {id}{unit} has no row in {truth}; expected the truth file of the same run")]
    NoTruth {
        /// The readings file.
        readings: String,
        /// The truth file.
        truth: String,
        /// The reading's line.
        line: u64,
        /// Its id.
        id: String,
        /// ` of unit …`, or empty.
        unit: String,
    },
    /// The readings are of several units and none was chosen, or the chosen one is absent.
    #[error("{path}: {message}")]
    Unit {
        /// The readings file.
        path: String,
        /// What to do.
        message: String,
    },
    /// A reading's temperature channel gave no temperature.
    #[error("{path}: line {line}: the temperature channel gave no temperature ({error}); expected a temp_c reading")]
    Temperature {
        /// The readings file.
        path: String,
        /// The line.
        line: u64,
        /// The firmware's verdict.
        error: logtrim::Error,
    },
}

fn column(headers: &[String], name: &str) -> Option<usize> {
    headers.iter().position(|h| h.trim().eq_ignore_ascii_case(name))
}

/// Reads a validation run: `readings` joined by id (and unit) to `truth`. In a batch (a `unit` column),
/// `serial` chooses the unit and is required. `opts` says how the unit reads its readings (its ADC bits, and
/// for a raw temperature channel the converter of a `temp_code` column).
pub fn read_validation(
    readings: &Path,
    truth: &Path,
    serial: Option<&str>,
    opts: &ReadOptions<'_>,
) -> Result<Vec<ValidationPoint>, ValidationError> {
    let rpath = readings.display().to_string();
    let tpath = truth.display().to_string();
    let rd = data::read_readings_file(readings, opts)?;
    let Some(id_col) = column(&rd.headers, "id") else {
        return Err(DataError::MissingColumn {
            path: rpath,
            column: "id",
            expected: "the reading's id, to match it to the truth file",
            found: rd.headers.join(","),
        }
        .into());
    };
    let unit_index = match (rd.units.is_empty(), serial) {
        (true, _) => None,
        (false, None) => {
            return Err(ValidationError::Unit {
                path: rpath,
                message: format!(
                    "readings of {} units ({}…); choose one with its serial",
                    rd.units.len(),
                    rd.units.first().cloned().unwrap_or_default()
                ),
            })
        }
        (false, Some(s)) => match rd.units.iter().position(|u| u == s) {
            Some(i) => Some(i as u32),
            None => {
                return Err(ValidationError::Unit {
                    path: rpath,
                    message: format!("no readings of unit {s:?}; the file has: {}", rd.units.join(", ")),
                })
            }
        },
    };
    let truth_rows = read_truth(truth, unit_index.and(serial))?;
    let mut out = Vec::with_capacity(rd.rows.len());
    for row in &rd.rows {
        if unit_index.is_some() && row.unit != unit_index {
            continue;
        }
        let id = String::from_utf8_lossy(row.record.get(id_col).unwrap_or(b"")).trim().to_string();
        let temp_c = row.temp_c.map_err(|error| ValidationError::Temperature {
            path: rpath.clone(),
            line: row.line,
            error,
        })?;
        let Some(t) = truth_rows.get(&id) else {
            return Err(ValidationError::NoTruth {
                readings: rpath,
                truth: tpath,
                line: row.line,
                id,
                unit: serial
                    .filter(|_| unit_index.is_some())
                    .map(|s| format!(" of unit {s}"))
                    .unwrap_or_default(),
            });
        };
        out.push(ValidationPoint {
            code: row.code,
            temp_c,
            x_true: t.x_true,
            t_true_c: t.t_true_c,
            x_oracle: t.x_oracle,
        });
    }
    Ok(out)
}

#[derive(Debug, Clone, Copy)]
struct TruthRow {
    x_true: f64,
    t_true_c: f64,
    x_oracle: Option<f64>,
}

/// Reads a truth file into a map by id (only the rows of `serial` when the file has a `unit` column).
fn read_truth(path: &Path, serial: Option<&str>) -> Result<HashMap<String, TruthRow>, ValidationError> {
    let p = path.display().to_string();
    let csv_err = |e: csv::Error| ValidationError::Csv { path: p.clone(), message: e.to_string() };
    let mut rdr = csv::ReaderBuilder::new().flexible(false).from_path(path).map_err(csv_err)?;
    let headers: Vec<String> = rdr.headers().map_err(csv_err)?.iter().map(|h| h.trim().to_string()).collect();
    let missing = |column, expected| {
        ValidationError::Data(DataError::MissingColumn {
            path: p.clone(),
            column,
            expected,
            found: headers.join(","),
        })
    };
    let id = column(&headers, "id").ok_or_else(|| missing("id", "the reading's id"))?;
    // The true x: from `x_true`, else from `ratio`.
    let x_source = match (column(&headers, "x_true"), column(&headers, "ratio")) {
        (Some(i), _) => Ok(i),
        (None, Some(i)) => Err(i),
        (None, None) => return Err(missing("x_true", "the true x = ln ratio (or a ratio column)")),
    };
    let t_true =
        column(&headers, "t_true_c").ok_or_else(|| missing("t_true_c", "the unit's true temperature, °C"))?;
    let oracle = column(&headers, "x_oracle");
    let unit = column(&headers, "unit");
    let mut out = HashMap::new();
    for rec in rdr.records() {
        let rec = rec.map_err(csv_err)?;
        let line = rec.position().map_or(0, |pos| pos.line());
        if let (Some(u), Some(s)) = (unit, serial) {
            if rec.get(u).map(str::trim) != Some(s) {
                continue;
            }
        }
        let field = |i: usize| rec.get(i).unwrap_or("").trim();
        let number = |i: usize, name: &'static str, expected: &'static str| -> Result<f64, ValidationError> {
            let v = field(i);
            match v.parse::<f64>() {
                Ok(n) if n.is_finite() => Ok(n),
                _ => Err(ValidationError::Value {
                    path: p.clone(),
                    line,
                    column: name,
                    value: v.to_string(),
                    expected,
                }),
            }
        };
        let x = match x_source {
            Ok(i) => number(i, "x_true", "a finite x = ln ratio")?,
            Err(i) => {
                let r = number(i, "ratio", "a positive finite ratio")?;
                if r <= 0.0 {
                    return Err(ValidationError::Value {
                        path: p.clone(),
                        line,
                        column: "ratio",
                        value: field(i).to_string(),
                        expected: "a positive finite ratio",
                    });
                }
                r.ln()
            }
        };
        let t = number(t_true, "t_true_c", "a finite temperature in °C")?;
        let xo = match oracle {
            Some(i) if !field(i).is_empty() => {
                Some(number(i, "x_oracle", "a finite x, or empty where undefined")?)
            }
            _ => None,
        };
        out.insert(field(id).to_string(), TruthRow { x_true: x, t_true_c: t, x_oracle: xo });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn files(name: &str, readings: &str, truth: &str) -> (std::path::PathBuf, std::path::PathBuf) {
        let d = std::env::temp_dir().join(format!("logtrim-val-{name}-{}", std::process::id()));
        std::fs::create_dir_all(&d).unwrap();
        let (r, t) = (d.join("readings.csv"), d.join("truth.csv"));
        std::fs::write(&r, readings).unwrap();
        std::fs::write(&t, truth).unwrap();
        (r, t)
    }

    #[test]
    fn joins_by_id_and_unit() {
        let (r, t) = files(
            "join",
            "id,unit,code,temp_c\n1,A,30000,25.0\n2,B,31000,26.0\n3,B,32000,27.0\n",
            "id,unit,ratio,x_true,t_true_c,x_oracle\n3,B,1,0.5,27.1,0.49\n2,B,1,-0.5,26.1,\n1,A,1,0.0,25.1,0.01\n",
        );
        let p = read_validation(&r, &t, Some("B"), &ReadOptions::default()).unwrap();
        assert_eq!(p.len(), 2);
        assert_eq!((p[0].code, p[0].x_true, p[0].t_true_c, p[0].x_oracle), (31000, -0.5, 26.1, None));
        assert_eq!((p[1].code, p[1].x_true, p[1].x_oracle), (32000, 0.5, Some(0.49)));
        let e = read_validation(&r, &t, None, &ReadOptions::default()).unwrap_err().to_string();
        assert!(e.contains("readings of 2 units"), "{e}");
        let e = read_validation(&r, &t, Some("C"), &ReadOptions::default()).unwrap_err().to_string();
        assert!(e.contains("no readings of unit \"C\"; the file has: A, B"), "{e}");
    }

    #[test]
    fn bad_truth_is_located() {
        let (r, t) = files("bad", "id,code,temp_c\n1,30000,25.0\n", "id,x_true,t_true_c\n1,zero,25.0\n");
        let e = read_validation(&r, &t, None, &ReadOptions::default()).unwrap_err().to_string();
        assert!(
            e.ends_with("truth.csv: line 2, column x_true: value \"zero\"; expected a finite x = ln ratio"),
            "{e}"
        );
        let (r, t) = files("nocol", "id,code,temp_c\n1,30000,25.0\n", "id,x_true\n1,0.5\n");
        let e = read_validation(&r, &t, None, &ReadOptions::default()).unwrap_err().to_string();
        assert!(e.contains("no \"t_true_c\" column"), "{e}");
        let (r, t) = files("noid", "code,temp_c\n30000,25.0\n", "id,x_true,t_true_c\n1,0.5,25\n");
        let e = read_validation(&r, &t, None, &ReadOptions::default()).unwrap_err().to_string();
        assert!(e.contains("no \"id\" column"), "{e}");
    }
}
