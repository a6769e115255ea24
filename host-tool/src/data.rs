//! Reading calibration and readings CSV files into typed rows, with errors that name the file, line,
//! column, value and what was expected.
//!
//! Both kinds of file have a header row; columns may come in any order (names are matched without regard to
//! ASCII case or surrounding spaces) and columns of other names are ignored.
//!
//! | column | needed in | meaning |
//! |---|---|---|
//! | `code` | both | the log channel's ADC code: an integer `0 ..= 2^bits − 1` (bits default 16) |
//! | `temp_c` | both, or `temp_code` | the unit's temperature in °C, finite |
//! | `temp_code` | both, or `temp_c` | the temperature channel's raw ADC code, converted by a caller-supplied converter |
//! | `ratio` | calibration (optional in readings) | the applied ratio I_sig/I_ref: positive and finite |
//! | `unit` | optional | the unit's serial, for production batches |
//! | `weight` | optional (calibration) | the row's weight in the fit: positive and finite (default 1) |
//!
//! A bad value is an error, not a skipped row, unless the caller asks to skip bad rows
//! ([`ReadOptions::skip_bad_rows`]); then every skipped row is reported with its line and reason. A raw
//! temperature code the converter refuses (a sensor fault, say) is an error in calibration data; in readings
//! it is kept as that row's outcome ([`ReadingRow::temp_c`]), since it is a fact about the measurement.

use std::collections::HashMap;
use std::fmt;
use std::io;
use std::path::Path;

use csv::ByteRecord;

use crate::file_error::FileError;

/// The ADC resolution assumed when the caller gives none.
pub const DEFAULT_ADC_BITS: u8 = 16;

/// Converts a raw temperature-channel code to °C (a sensor description plugs in here).
pub type TempConverter<'a> = &'a dyn Fn(u32) -> Result<f64, logtrim::Error>;

/// How to read a file.
#[derive(Clone, Copy)]
pub struct ReadOptions<'a> {
    /// Resolution of the log channel's ADC, bits (1..=24): codes must lie in `0 ..= 2^bits − 1`.
    pub adc_bits: u8,
    /// Skip rows with bad values and report them, instead of failing on the first.
    pub skip_bad_rows: bool,
    /// The converter for a `temp_code` column; a file with `temp_code` and no converter is refused.
    pub temp_converter: Option<TempConverter<'a>>,
}

impl Default for ReadOptions<'_> {
    fn default() -> Self {
        ReadOptions { adc_bits: DEFAULT_ADC_BITS, skip_bad_rows: false, temp_converter: None }
    }
}

impl fmt::Debug for ReadOptions<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("ReadOptions")
            .field("adc_bits", &self.adc_bits)
            .field("skip_bad_rows", &self.skip_bad_rows)
            .field("temp_converter", &self.temp_converter.map(|_| "<fn>"))
            .finish()
    }
}

/// Which temperature column a file had.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TemperatureColumn {
    /// `temp_c`: °C as read.
    Celsius,
    /// `temp_code`: raw codes, converted by the caller's converter.
    Code,
}

/// The columns of a file, as 0-based indices into each record.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Columns {
    /// `code`.
    pub code: usize,
    /// `temp_c` or `temp_code`.
    pub temperature: usize,
    /// Which of the two the temperature column is.
    pub temperature_kind: TemperatureColumn,
    /// `ratio`, if present.
    pub ratio: Option<usize>,
    /// `unit`, if present.
    pub unit: Option<usize>,
    /// `weight`, if present.
    pub weight: Option<usize>,
    /// Number of columns in the header.
    pub count: usize,
}

/// One row of calibration data.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CalRow {
    /// The line of the file the row starts on (1-based; the header is line 1).
    pub line: u64,
    /// The log channel's ADC code.
    pub code: u32,
    /// The unit's temperature, °C (read or converted).
    pub temp_c: f64,
    /// The applied ratio I_sig/I_ref.
    pub ratio: f64,
    /// Index of the unit's serial in [`CalData::units`], if the file has a `unit` column.
    pub unit: Option<u32>,
    /// The row's weight (1 without a `weight` column).
    pub weight: f64,
    /// The temperature channel's raw code, for a file with a `temp_code` column.
    pub temp_code: Option<u32>,
}

/// A calibration file's contents.
#[derive(Debug, Clone)]
pub struct CalData {
    /// The file, as named by the caller.
    pub path: String,
    /// Where the columns were.
    pub columns: Columns,
    /// The rows, in file order.
    pub rows: Vec<CalRow>,
    /// The distinct unit serials, in order of first appearance (empty without a `unit` column).
    pub units: Vec<String>,
    /// Rows skipped for bad values (only when [`ReadOptions::skip_bad_rows`] was set).
    pub skipped: Vec<RowError>,
}

/// One row of readings to be corrected.
#[derive(Debug, Clone)]
pub struct ReadingRow {
    /// The line of the file the row starts on (1-based).
    pub line: u64,
    /// The log channel's ADC code.
    pub code: u32,
    /// The unit's temperature in °C, or why the temperature channel's code gave none.
    pub temp_c: Result<f64, logtrim::Error>,
    /// The ratio, if the file has a `ratio` column.
    pub ratio: Option<f64>,
    /// Index of the unit's serial in [`Readings::units`], if the file has a `unit` column.
    pub unit: Option<u32>,
    /// Every field of the row, as read, in column order (to be written back out).
    pub record: ByteRecord,
}

/// A readings file's contents.
#[derive(Debug, Clone)]
pub struct Readings {
    /// The file, as named by the caller.
    pub path: String,
    /// Every header field, in order, as read (trimmed).
    pub headers: Vec<String>,
    /// Where the columns were.
    pub columns: Columns,
    /// The rows, in file order.
    pub rows: Vec<ReadingRow>,
    /// The distinct unit serials, in order of first appearance (empty without a `unit` column).
    pub units: Vec<String>,
    /// Rows skipped for bad values (only when [`ReadOptions::skip_bad_rows`] was set).
    pub skipped: Vec<RowError>,
}

impl Readings {
    /// The rows of one unit (index into [`Readings::units`]), in file order, as a readings file of their own.
    pub fn of_unit(&self, unit: u32) -> Readings {
        Readings {
            rows: self.rows.iter().filter(|r| r.unit == Some(unit)).cloned().collect(),
            ..self.clone_empty()
        }
    }

    /// The same file without rows.
    fn clone_empty(&self) -> Readings {
        Readings {
            path: self.path.clone(),
            headers: self.headers.clone(),
            columns: self.columns.clone(),
            rows: Vec::new(),
            units: self.units.clone(),
            skipped: Vec::new(),
        }
    }
}

/// What was wrong with one value (or one row).
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum Problem {
    /// The field is empty.
    Empty,
    /// The field is not an integer.
    NotInteger,
    /// The code lies outside the converter's range `0 ..= max`.
    CodeOutOfRange {
        /// The largest code of the converter.
        max: u32,
    },
    /// The field is not a number.
    NotNumber,
    /// The number is NaN or infinite.
    NotFinite,
    /// The number is zero or negative.
    NotPositive,
    /// The field is not valid UTF-8.
    NotUtf8,
    /// The temperature converter refused the code.
    Conversion(logtrim::Error),
    /// The row has another number of fields than the header.
    FieldCount {
        /// Fields in the header.
        expected: usize,
        /// Fields in this row.
        found: usize,
    },
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Problem::Empty => f.write_str("is empty"),
            Problem::NotInteger => f.write_str("is not an integer"),
            Problem::CodeOutOfRange { max } => write!(f, "is outside the converter's range 0..={max}"),
            Problem::NotNumber => f.write_str("is not a number"),
            Problem::NotFinite => f.write_str("is not finite"),
            Problem::NotPositive => f.write_str("is not positive"),
            Problem::NotUtf8 => f.write_str("is not valid UTF-8"),
            Problem::Conversion(e) => write!(f, "could not be converted to °C ({e})"),
            Problem::FieldCount { expected, found } => {
                write!(f, "has {found} fields where the header has {expected}")
            }
        }
    }
}

/// A bad row: the value at fault (where it is, what it is, what is wrong and what was expected), or the whole
/// row when its shape is wrong.
#[derive(Debug, Clone, PartialEq)]
pub struct RowError {
    /// The file.
    pub path: String,
    /// The line the row starts on (1-based).
    pub line: u64,
    /// The column (1-based), 0 when the whole row is at fault.
    pub column: usize,
    /// The column's name (empty when the whole row is at fault).
    pub name: String,
    /// The field as read (lossy UTF-8, trimmed).
    pub value: String,
    /// What is wrong.
    pub problem: Problem,
    /// What was expected.
    pub expected: String,
}

impl fmt::Display for RowError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.column == 0 {
            write!(
                f,
                "{}: line {}: the row {}; expected {}",
                self.path, self.line, self.problem, self.expected
            )
        } else {
            write!(
                f,
                "{}: line {}, column {} ({}): value {:?} {}; expected {}",
                self.path, self.line, self.column, self.name, self.value, self.problem, self.expected
            )
        }
    }
}

impl std::error::Error for RowError {}

/// Errors reading a CSV file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum DataError {
    /// The file could not be opened or read.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
    /// The file is not well-formed CSV (e.g. an unterminated quote).
    #[error("{path}: line {line}: not well-formed CSV: {message}")]
    Csv {
        /// The file.
        path: String,
        /// The line of the defect (1-based).
        line: u64,
        /// What the CSV parser reported.
        message: String,
    },
    /// The file has no header row.
    #[error(
        "{path}: the file is empty; expected a header row naming the columns ({expected}) and data rows"
    )]
    Empty {
        /// The file.
        path: String,
        /// The columns this kind of file needs.
        expected: &'static str,
    },
    /// The file has a header row but no data rows.
    #[error("{path}: a header row but no data rows; expected at least one row of data after the header")]
    NoRows {
        /// The file.
        path: String,
    },
    /// Every data row was bad (when skipping bad rows).
    #[error("{path}: all {count} data rows are bad; the first: {first}")]
    NoGoodRows {
        /// The file.
        path: String,
        /// Rows skipped.
        count: usize,
        /// The first bad row.
        first: Box<RowError>,
    },
    /// A needed column is missing from the header.
    #[error("{path}: header: no {column:?} column; expected {expected}; the header has: {found}")]
    MissingColumn {
        /// The file.
        path: String,
        /// The missing column.
        column: &'static str,
        /// What the column holds.
        expected: &'static str,
        /// The header's columns, comma-separated.
        found: String,
    },
    /// A column this reader uses appears twice.
    #[error(
        "{path}: header: column {name:?} appears twice (columns {first} and {second}); expected it once"
    )]
    DuplicateColumn {
        /// The file.
        path: String,
        /// The column's name.
        name: String,
        /// First position (1-based).
        first: usize,
        /// Second position (1-based).
        second: usize,
    },
    /// Both temperature columns are present.
    #[error("{path}: header: both temp_c (column {celsius}) and temp_code (column {code}); expected exactly one temperature column")]
    TwoTemperatureColumns {
        /// The file.
        path: String,
        /// Position of `temp_c` (1-based).
        celsius: usize,
        /// Position of `temp_code` (1-based).
        code: usize,
    },
    /// A `temp_code` column but no converter to turn codes into °C.
    #[error("{path}: header: column {column} is temp_code (raw temperature-channel codes) but no temperature sensor description was given to convert them to °C")]
    NoTemperatureConverter {
        /// The file.
        path: String,
        /// Position of `temp_code` (1-based).
        column: usize,
    },
    /// The ADC resolution asked for is not 1..=24 bits.
    #[error("ADC bits {bits}: expected 1..=24")]
    AdcBits {
        /// The bits given.
        bits: u8,
    },
    /// A bad value.
    #[error(transparent)]
    Value(Box<RowError>),
}

impl From<RowError> for DataError {
    fn from(e: RowError) -> Self {
        DataError::Value(Box::new(e))
    }
}

const CAL_EXPECTED: &str = "code, temp_c or temp_code, ratio; optional unit, weight";
const READINGS_EXPECTED: &str = "code, temp_c or temp_code; optional ratio, unit";

/// Reads calibration data (`code`, `temp_c`/`temp_code`, `ratio`, optional `unit`, `weight`) from a file.
pub fn read_calibration_file(path: &Path, opts: &ReadOptions<'_>) -> Result<CalData, DataError> {
    calibration_from_bytes(read_file(path)?, &path.display().to_string(), opts)
}

/// Reads calibration data from any reader; `path` names the source in errors.
pub fn read_calibration<R: io::Read>(
    reader: R,
    path: &str,
    opts: &ReadOptions<'_>,
) -> Result<CalData, DataError> {
    calibration_from_bytes(slurp(reader, path)?, path, opts)
}

fn calibration_from_bytes(data: Vec<u8>, path: &str, opts: &ReadOptions<'_>) -> Result<CalData, DataError> {
    let (src, rows, skipped) = read_rows(data, path, opts, CAL_EXPECTED, true, Source::cal_row)?;
    Ok(CalData { path: path.to_string(), columns: src.columns, rows, units: src.units.names, skipped })
}

/// Reads readings (`code`, `temp_c`/`temp_code`, optional `ratio`, `unit`) from a file, keeping every field.
pub fn read_readings_file(path: &Path, opts: &ReadOptions<'_>) -> Result<Readings, DataError> {
    readings_from_bytes(read_file(path)?, &path.display().to_string(), opts)
}

/// Reads readings from any reader; `path` names the source in errors.
pub fn read_readings<R: io::Read>(
    reader: R,
    path: &str,
    opts: &ReadOptions<'_>,
) -> Result<Readings, DataError> {
    readings_from_bytes(slurp(reader, path)?, path, opts)
}

fn readings_from_bytes(data: Vec<u8>, path: &str, opts: &ReadOptions<'_>) -> Result<Readings, DataError> {
    let (src, rows, skipped) = read_rows(data, path, opts, READINGS_EXPECTED, false, Source::reading_row)?;
    Ok(Readings {
        path: path.to_string(),
        headers: src.headers,
        columns: src.columns,
        rows,
        units: src.units.names,
        skipped,
    })
}

/// Every row of a file as `row` reads it: a bad row is an error, or skipped and kept when the options say
/// so; a file without a good row is an error.
fn read_rows<'o, T>(
    data: Vec<u8>,
    path: &str,
    opts: &ReadOptions<'o>,
    expected: &'static str,
    need_ratio: bool,
    mut row: impl FnMut(&mut Source<'o>, &ByteRecord, u64) -> Result<T, Box<RowError>>,
) -> Result<(Source<'o>, Vec<T>, Vec<RowError>), DataError> {
    let mut src = Source::open(data, path, opts, expected, need_ratio)?;
    let mut rows = Vec::new();
    let mut skipped = Vec::new();
    let mut rec = ByteRecord::new();
    while let Some(line) = src.next(&mut rec)? {
        match row(&mut src, &rec, line) {
            Ok(row) => rows.push(row),
            Err(e) if opts.skip_bad_rows => skipped.push(*e),
            Err(e) => return Err(DataError::Value(e)),
        }
    }
    finish(path, rows.len(), &mut skipped)?;
    Ok((src, rows, skipped))
}

fn read_file(path: &Path) -> Result<Vec<u8>, DataError> {
    Ok(std::fs::read(path).map_err(|source| FileError::io(path, source))?)
}

fn slurp<R: io::Read>(mut reader: R, path: &str) -> Result<Vec<u8>, DataError> {
    let mut data = Vec::new();
    reader.read_to_end(&mut data).map_err(|source| FileError::Io { path: path.to_string(), source })?;
    Ok(data)
}

fn finish(path: &str, good: usize, skipped: &mut Vec<RowError>) -> Result<(), DataError> {
    if good > 0 {
        return Ok(());
    }
    if skipped.is_empty() {
        return Err(DataError::NoRows { path: path.to_string() });
    }
    let count = skipped.len();
    let first = Box::new(skipped.swap_remove(0));
    Err(DataError::NoGoodRows { path: path.to_string(), count, first })
}

/// Interned unit serials.
#[derive(Default)]
struct Units {
    names: Vec<String>,
    index: HashMap<Vec<u8>, u32>,
}

/// An open CSV source with its header checked.
struct Source<'o> {
    csv: csv::Reader<io::Cursor<Vec<u8>>>,
    lines: LineCounter,
    /// The line the current record starts on.
    line: u64,
    path: String,
    headers: Vec<String>,
    columns: Columns,
    max_code: u32,
    converter: Option<TempConverter<'o>>,
    units: Units,
}

impl<'o> Source<'o> {
    fn open(
        mut data: Vec<u8>,
        path: &str,
        opts: &ReadOptions<'o>,
        expected: &'static str,
        need_ratio: bool,
    ) -> Result<Self, DataError> {
        if !(1..=24).contains(&opts.adc_bits) {
            return Err(DataError::AdcBits { bits: opts.adc_bits });
        }
        if data.starts_with(b"\xEF\xBB\xBF") {
            data.drain(..3);
        }
        let mut csv =
            csv::ReaderBuilder::new().has_headers(false).flexible(true).from_reader(io::Cursor::new(data));
        let mut lines = LineCounter::default();
        let mut head = ByteRecord::new();
        if let Err(e) = csv.read_byte_record(&mut head) {
            return Err(csv_error(path, &e, &mut lines, csv.get_ref().get_ref()));
        }
        let headers: Vec<String> =
            head.iter().map(|h| String::from_utf8_lossy(h).trim().to_string()).collect();
        if headers.iter().all(|h| h.is_empty()) {
            return Err(DataError::Empty { path: path.to_string(), expected });
        }
        let find = |name: &'static str| -> Result<Option<usize>, DataError> {
            let mut hits = headers.iter().enumerate().filter(|(_, h)| h.eq_ignore_ascii_case(name));
            let first = hits.next().map(|(i, _)| i);
            if let (Some(a), Some((b, _))) = (first, hits.next()) {
                return Err(DataError::DuplicateColumn {
                    path: path.to_string(),
                    name: headers[b].clone(),
                    first: a + 1,
                    second: b + 1,
                });
            }
            Ok(first)
        };
        let missing = |column: &'static str, what: &'static str| DataError::MissingColumn {
            path: path.to_string(),
            column,
            expected: what,
            found: headers.join(","),
        };
        let code = find("code")?.ok_or_else(|| missing("code", "the log channel's ADC code"))?;
        let (tc, tcode) = (find("temp_c")?, find("temp_code")?);
        let (temperature, temperature_kind) = match (tc, tcode) {
            (Some(c), Some(k)) => {
                return Err(DataError::TwoTemperatureColumns {
                    path: path.to_string(),
                    celsius: c + 1,
                    code: k + 1,
                })
            }
            (Some(c), None) => (c, TemperatureColumn::Celsius),
            (None, Some(k)) => {
                if opts.temp_converter.is_none() {
                    return Err(DataError::NoTemperatureConverter { path: path.to_string(), column: k + 1 });
                }
                (k, TemperatureColumn::Code)
            }
            (None, None) => {
                return Err(missing(
                    "temp_c",
                    "a temperature: temp_c in °C, or temp_code with a sensor description",
                ))
            }
        };
        let ratio = find("ratio")?;
        if need_ratio && ratio.is_none() {
            return Err(missing("ratio", "the applied ratio I_sig/I_ref of each calibration point"));
        }
        let unit = find("unit")?;
        let weight = find("weight")?;
        let columns =
            Columns { code, temperature, temperature_kind, ratio, unit, weight, count: headers.len() };
        Ok(Source {
            csv,
            lines,
            line: 0,
            path: path.to_string(),
            headers,
            columns,
            max_code: (1u32 << opts.adc_bits) - 1,
            converter: opts.temp_converter,
            units: Units::default(),
        })
    }

    /// Reads the next record and returns the line it starts on; `None` at the end.
    fn next(&mut self, rec: &mut ByteRecord) -> Result<Option<u64>, DataError> {
        match self.csv.read_byte_record(rec) {
            Ok(true) => {
                let start = rec.position().map_or(0, |p| p.byte());
                self.line = self.lines.line_at(self.csv.get_ref().get_ref(), start);
                Ok(Some(self.line))
            }
            Ok(false) => Ok(None),
            Err(e) => Err(csv_error(&self.path, &e, &mut self.lines, self.csv.get_ref().get_ref())),
        }
    }

    fn err(&self, rec: &ByteRecord, column: usize, problem: Problem, expected: String) -> Box<RowError> {
        Box::new(RowError {
            path: self.path.clone(),
            line: self.line,
            column: column + 1,
            name: self.headers.get(column).cloned().unwrap_or_default(),
            value: String::from_utf8_lossy(field(rec, column)).into_owned(),
            problem,
            expected,
        })
    }

    fn check_count(&self, rec: &ByteRecord) -> Result<(), Box<RowError>> {
        if rec.len() == self.columns.count {
            return Ok(());
        }
        Err(Box::new(RowError {
            path: self.path.clone(),
            line: self.line,
            column: 0,
            name: String::new(),
            value: String::new(),
            problem: Problem::FieldCount { expected: self.columns.count, found: rec.len() },
            expected: format!("{} fields, one per header column", self.columns.count),
        }))
    }

    fn code(&self, rec: &ByteRecord) -> Result<u32, Box<RowError>> {
        let c = self.columns.code;
        parse_code(field(rec, c), self.max_code).map_err(|p| {
            let bits = self.max_code.count_ones();
            self.err(rec, c, p, format!("an integer ADC code 0..={} ({bits}-bit converter)", self.max_code))
        })
    }

    /// The temperature: a parse error is the row's fault; a converter's refusal is returned inside.
    fn temperature(&self, rec: &ByteRecord) -> Result<Result<f64, logtrim::Error>, Box<RowError>> {
        let c = self.columns.temperature;
        let raw = field(rec, c);
        match self.columns.temperature_kind {
            TemperatureColumn::Celsius => parse_f64(raw)
                .and_then(|t| if t.is_finite() { Ok(t) } else { Err(Problem::NotFinite) })
                .map(Ok)
                .map_err(|p| self.err(rec, c, p, "a finite temperature in °C".into())),
            TemperatureColumn::Code => {
                let code = parse_code(raw, u32::MAX).map_err(|p| {
                    self.err(rec, c, p, "a non-negative integer code of the temperature channel".into())
                })?;
                let Some(conv) = self.converter else {
                    return Ok(Err(logtrim::Error::NotCalibrated));
                };
                match conv(code) {
                    Ok(t) if t.is_finite() => Ok(Ok(t)),
                    Ok(_) => {
                        Err(self.err(rec, c, Problem::NotFinite, "a code the sensor converts to °C".into()))
                    }
                    Err(e) => Ok(Err(e)),
                }
            }
        }
    }

    fn ratio(&self, rec: &ByteRecord, c: usize) -> Result<f64, Box<RowError>> {
        positive(field(rec, c)).map_err(|p| self.err(rec, c, p, "a positive finite ratio I_sig/I_ref".into()))
    }

    fn unit(&mut self, rec: &ByteRecord) -> Result<Option<u32>, Box<RowError>> {
        let Some(c) = self.columns.unit else {
            return Ok(None);
        };
        let raw = field(rec, c).trim_ascii();
        if raw.is_empty() {
            return Err(self.err(rec, c, Problem::Empty, "the unit's serial".into()));
        }
        if let Some(&i) = self.units.index.get(raw) {
            return Ok(Some(i));
        }
        let name = std::str::from_utf8(raw)
            .map_err(|_| self.err(rec, c, Problem::NotUtf8, "the unit's serial as UTF-8 text".into()))?;
        let i = self.units.names.len() as u32;
        self.units.names.push(name.to_string());
        self.units.index.insert(raw.to_vec(), i);
        Ok(Some(i))
    }

    fn cal_row(&mut self, rec: &ByteRecord, line: u64) -> Result<CalRow, Box<RowError>> {
        self.check_count(rec)?;
        let code = self.code(rec)?;
        let temp_c = match self.temperature(rec)? {
            Ok(t) => t,
            Err(e) => {
                let c = self.columns.temperature;
                return Err(self.err(
                    rec,
                    c,
                    Problem::Conversion(e),
                    "a code the sensor converts to °C".into(),
                ));
            }
        };
        let ratio = match self.columns.ratio {
            Some(c) => self.ratio(rec, c)?,
            None => f64::NAN, // not reached: the header check requires a ratio column
        };
        let weight = match self.columns.weight {
            Some(c) => {
                positive(field(rec, c)).map_err(|p| self.err(rec, c, p, "a positive finite weight".into()))?
            }
            None => 1.0,
        };
        let unit = self.unit(rec)?;
        let temp_code = match self.columns.temperature_kind {
            TemperatureColumn::Code => parse_code(field(rec, self.columns.temperature), u32::MAX).ok(),
            TemperatureColumn::Celsius => None,
        };
        Ok(CalRow { line, code, temp_c, ratio, unit, weight, temp_code })
    }

    fn reading_row(&mut self, rec: &ByteRecord, line: u64) -> Result<ReadingRow, Box<RowError>> {
        self.check_count(rec)?;
        let code = self.code(rec)?;
        let temp_c = self.temperature(rec)?;
        let ratio = match self.columns.ratio {
            Some(c) => Some(self.ratio(rec, c)?),
            None => None,
        };
        let unit = self.unit(rec)?;
        Ok(ReadingRow { line, code, temp_c, ratio, unit, record: rec.clone() })
    }
}

fn csv_error(path: &str, e: &csv::Error, lines: &mut LineCounter, data: &[u8]) -> DataError {
    let line = e.position().map_or(0, |p| lines.line_at(data, p.byte()));
    DataError::Csv { path: path.to_string(), line, message: e.to_string() }
}

/// True line numbers from byte offsets. The CSV parser reports a record's position as where the previous
/// read stopped, before any blank lines it skips; this counts newlines itself, moving forward only.
#[derive(Default)]
struct LineCounter {
    offset: usize,
    line: u64,
}

impl LineCounter {
    /// The 1-based line of the first byte at or after `start` that is not a line terminator.
    fn line_at(&mut self, data: &[u8], start: u64) -> u64 {
        let mut at = usize::try_from(start).unwrap_or(usize::MAX).min(data.len());
        while matches!(data.get(at), Some(b'\n' | b'\r')) {
            at += 1;
        }
        if at >= self.offset {
            let newlines = data.get(self.offset..at).map_or(0, |s| s.iter().filter(|&&b| b == b'\n').count());
            self.line += newlines as u64;
            self.offset = at;
        }
        self.line + 1
    }
}

fn field(rec: &ByteRecord, i: usize) -> &[u8] {
    rec.get(i).unwrap_or(&[])
}

/// An integer code in `0 ..= max`.
fn parse_code(raw: &[u8], max: u32) -> Result<u32, Problem> {
    let s = raw.trim_ascii();
    if s.is_empty() {
        return Err(Problem::Empty);
    }
    let text = std::str::from_utf8(s).map_err(|_| Problem::NotInteger)?;
    match text.parse::<u64>() {
        Ok(v) if v <= u64::from(max) => Ok(v as u32),
        Ok(_) => Err(Problem::CodeOutOfRange { max }),
        Err(_) => {
            // An integer all the same (negative, or too long for u64) is out of range; anything else is not one.
            let digits = text.strip_prefix(['-', '+']).unwrap_or(text);
            if !digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit()) {
                Err(Problem::CodeOutOfRange { max })
            } else {
                Err(Problem::NotInteger)
            }
        }
    }
}

fn parse_f64(raw: &[u8]) -> Result<f64, Problem> {
    let s = raw.trim_ascii();
    if s.is_empty() {
        return Err(Problem::Empty);
    }
    std::str::from_utf8(s).ok().and_then(|t| t.parse::<f64>().ok()).ok_or(Problem::NotNumber)
}

fn positive(raw: &[u8]) -> Result<f64, Problem> {
    let v = parse_f64(raw)?;
    if !v.is_finite() {
        Err(Problem::NotFinite)
    } else if v <= 0.0 {
        Err(Problem::NotPositive)
    } else {
        Ok(v)
    }
}

#[cfg(test)]
mod tests;
