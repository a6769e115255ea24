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

use std::cell::RefCell;
use std::collections::HashMap;
use std::fmt;
use std::io::{self, Read};
use std::path::Path;
use std::rc::Rc;

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
    /// `ratio`, if present; or, in chamber data and standards, `absorbance` (see
    /// [`Columns::ratio_as_absorbance`]).
    pub ratio: Option<usize>,
    /// The ratio column is `absorbance` A (a certified filter's value): the ratio is 10^(−A).
    pub ratio_as_absorbance: bool,
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
    /// The log channel's ADC code (in a readings file possibly beyond the converter: the firmware refuses
    /// such a row with its own status).
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
    /// The number lies outside the span any physical reading can have.
    Implausible {
        /// The lowest plausible value.
        min: f64,
        /// The highest plausible value.
        max: f64,
    },
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
            Problem::Implausible { min, max } => {
                write!(f, "is outside the plausible span {min:e} … {max:e} (no physical reading is)")
            }
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
                self.path,
                self.line,
                self.column,
                printable(&self.name),
                self.value,
                self.problem,
                self.expected
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
    /// Both a `ratio` and an `absorbance` column give the known ratio.
    #[error("{path}: header: both ratio (column {ratio}) and absorbance (column {absorbance}); expected one of them")]
    TwoRatioColumns {
        /// The file.
        path: String,
        /// Position of `ratio` (1-based).
        ratio: usize,
        /// Position of `absorbance` (1-based).
        absorbance: usize,
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
    /// The file is not CSV text (UTF-16, binary).
    #[error("{path}: the file is {what}")]
    NotText {
        /// The file.
        path: String,
        /// What it is instead.
        what: &'static str,
    },
    /// The file holds more rows than can be kept in memory.
    #[error("{path}: line {line}: more than {max} rows of calibration data; split the file (a folder of files, one unit each, is a batch)")]
    TooManyRows {
        /// The file.
        path: String,
        /// The line of the first row beyond the limit.
        line: u64,
        /// The most rows a file may hold.
        max: usize,
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

/// The plausible span of a ratio I_sig/I_ref (and of a row's weight): 60 decades either side of 1 hold
/// every current ratio a log-ratio front end can see; a value beyond them is a unit mix-up or a corrupt
/// file, and is refused where it is read instead of reaching a solver.
pub const RATIO_SPAN: (f64, f64) = (1e-30, 1e30);
/// The plausible span of a temperature, °C: from absolute zero to 1000 °C (no log-ratio front end works
/// beyond it).
pub const TEMPERATURE_SPAN_C: (f64, f64) = (-273.15, 1000.0);
/// The longest stretch of a file without a complete row, bytes: a longer one is refused (a binary file, or
/// an endless line from a device such as `/dev/zero`), so that memory stays bounded.
pub const MAX_LINE_BYTES: usize = 1 << 20;
/// The most rows of calibration data one file may hold (a batch of 20 000 units of 1 000 rows): the rows
/// are kept in memory for the fit, so an endless input is refused instead of exhausting it.
pub const MAX_CALIBRATION_ROWS: usize = 20_000_000;

/// Reads calibration data (`code`, `temp_c`/`temp_code`, `ratio`, optional `unit`, `weight`) from a file.
pub fn read_calibration_file(path: &Path, opts: &ReadOptions<'_>) -> Result<CalData, DataError> {
    read_calibration(open_file(path)?, &path.display().to_string(), opts)
}

/// Reads calibration data from any reader; `path` names the source in errors.
pub fn read_calibration<R: io::Read>(
    reader: R,
    path: &str,
    opts: &ReadOptions<'_>,
) -> Result<CalData, DataError> {
    let (src, rows, skipped) = read_rows(reader, path, opts, CAL_EXPECTED, true, Source::cal_row)?;
    Ok(CalData { path: path.to_string(), columns: src.columns, rows, units: src.units.names, skipped })
}

/// Reads readings (`code`, `temp_c`/`temp_code`, optional `ratio`, `unit`) from a file, keeping every field.
pub fn read_readings_file(path: &Path, opts: &ReadOptions<'_>) -> Result<Readings, DataError> {
    read_readings(open_file(path)?, &path.display().to_string(), opts)
}

/// Reads readings from any reader; `path` names the source in errors.
pub fn read_readings<R: io::Read>(
    reader: R,
    path: &str,
    opts: &ReadOptions<'_>,
) -> Result<Readings, DataError> {
    let (src, rows, skipped) = read_rows(reader, path, opts, READINGS_EXPECTED, false, Source::reading_row)?;
    Ok(Readings {
        path: path.to_string(),
        headers: src.headers,
        columns: src.columns,
        rows,
        units: src.units.names,
        skipped,
    })
}

/// Readings read one row at a time, for a caller that handles each row and lets it go (memory flat in the
/// row count): [`ReadingsStream::next_row`] until `None`, then [`ReadingsStream::finish`].
pub struct ReadingsStream<'o, R: io::Read> {
    src: Source<'o, R>,
    skip_bad_rows: bool,
    good: usize,
    /// Rows skipped for bad values so far (only when skipping bad rows).
    pub skipped: Vec<RowError>,
    rec: ByteRecord,
}

impl<'o, R: io::Read> ReadingsStream<'o, R> {
    /// Opens a readings source and checks its header; `path` names it in errors.
    pub fn open(reader: R, path: &str, opts: &ReadOptions<'o>) -> Result<Self, DataError> {
        let src = Source::open(reader, path, opts, READINGS_EXPECTED, false)?;
        Ok(ReadingsStream {
            src,
            skip_bad_rows: opts.skip_bad_rows,
            good: 0,
            skipped: Vec::new(),
            rec: ByteRecord::new(),
        })
    }

    /// Every header field, in order, as read (trimmed).
    pub fn headers(&self) -> &[String] {
        &self.src.headers
    }

    /// Where the columns are.
    pub fn columns(&self) -> &Columns {
        &self.src.columns
    }

    /// The distinct unit serials met so far, in order of first appearance.
    pub fn units(&self) -> &[String] {
        &self.src.units.names
    }

    /// The next good row; a bad row is an error, or skipped and kept in [`ReadingsStream::skipped`] when
    /// the options say so. `None` at the end of the file.
    pub fn next_row(&mut self) -> Result<Option<ReadingRow>, DataError> {
        let mut rec = std::mem::take(&mut self.rec);
        let out = loop {
            let Some(line) = self.src.next(&mut rec)? else { break Ok(None) };
            match self.src.reading_row(&rec, line) {
                Ok(row) => {
                    self.good += 1;
                    break Ok(Some(row));
                }
                Err(e) if self.skip_bad_rows => self.skipped.push(*e),
                Err(e) => break Err(DataError::Value(e)),
            }
        };
        self.rec = rec;
        out
    }

    /// The end of the file: an error if no row was good.
    pub fn finish(mut self) -> Result<Vec<RowError>, DataError> {
        finish(&self.src.path, self.good, &mut self.skipped)?;
        Ok(self.skipped)
    }
}

/// Opens a readings file for [`ReadingsStream`].
pub fn open_readings_file<'o>(
    path: &Path,
    opts: &ReadOptions<'o>,
) -> Result<ReadingsStream<'o, std::fs::File>, DataError> {
    ReadingsStream::open(open_file(path)?, &path.display().to_string(), opts)
}

/// What [`read_rows`] gives back: the source (for its header), the good rows and the skipped ones.
type RowsRead<'o, R, T> = (Source<'o, R>, Vec<T>, Vec<RowError>);

/// Every row of a file as `row` reads it: a bad row is an error, or skipped and kept when the options say
/// so; a file without a good row is an error.
fn read_rows<'o, R: io::Read, T>(
    reader: R,
    path: &str,
    opts: &ReadOptions<'o>,
    expected: &'static str,
    need_ratio: bool,
    mut row: impl FnMut(&mut Source<'o, R>, &ByteRecord, u64) -> Result<T, Box<RowError>>,
) -> Result<RowsRead<'o, R, T>, DataError> {
    let mut src = Source::open(reader, path, opts, expected, need_ratio)?;
    let mut rows = Vec::new();
    let mut skipped = Vec::new();
    let mut rec = ByteRecord::new();
    while let Some(line) = src.next(&mut rec)? {
        if rows.len() >= MAX_CALIBRATION_ROWS {
            return Err(DataError::TooManyRows { path: path.to_string(), line, max: MAX_CALIBRATION_ROWS });
        }
        match row(&mut src, &rec, line) {
            Ok(row) => rows.push(row),
            Err(e) if opts.skip_bad_rows => skipped.push(*e),
            Err(e) => return Err(DataError::Value(e)),
        }
    }
    finish(path, rows.len(), &mut skipped)?;
    Ok((src, rows, skipped))
}

fn open_file(path: &Path) -> Result<std::fs::File, DataError> {
    let file = std::fs::File::open(path).map_err(|source| FileError::io(path, source))?;
    if file.metadata().is_ok_and(|m| m.is_dir()) {
        let source = io::Error::new(io::ErrorKind::IsADirectory, "is a folder: expected a CSV file");
        return Err(FileError::io(path, source).into());
    }
    Ok(file)
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

/// The bytes read from a source that the line count still needs: from the start of the current record to
/// where the CSV parser has read. Bounded by [`MAX_LINE_BYTES`] (plus the parser's read-ahead).
#[derive(Default)]
struct Window {
    /// File offset of `bytes[0]`.
    base: u64,
    bytes: Vec<u8>,
}

/// A reader that keeps the [`Window`] of what it reads, and refuses a stretch without a row longer than
/// [`MAX_LINE_BYTES`].
struct Tap<R> {
    inner: R,
    window: Rc<RefCell<Window>>,
}

impl<R: io::Read> io::Read for Tap<R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = self.inner.read(buf)?;
        let mut w = self.window.borrow_mut();
        w.bytes.extend_from_slice(buf.get(..n).unwrap_or(&[]));
        if w.bytes.len() > MAX_LINE_BYTES + READ_AHEAD {
            return Err(io::Error::new(io::ErrorKind::InvalidData, LineTooLong));
        }
        Ok(n)
    }
}

/// The CSV parser's buffer.
const READ_AHEAD: usize = 64 * 1024;

/// The error of a stretch without a row longer than [`MAX_LINE_BYTES`].
#[derive(Debug)]
struct LineTooLong;

impl fmt::Display for LineTooLong {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "more than {} MiB without the end of a row (a binary file, or a device that never ends a line); expected CSV text",
            MAX_LINE_BYTES >> 20
        )
    }
}

impl std::error::Error for LineTooLong {}

/// An open CSV source with its header checked.
struct Source<'o, R: io::Read> {
    csv: csv::Reader<Tap<io::Chain<io::Cursor<Vec<u8>>, R>>>,
    window: Rc<RefCell<Window>>,
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

/// Reads up to `n` bytes from the start of `reader` (fewer at its end).
fn peek<R: io::Read>(reader: &mut R, n: usize, path: &str) -> Result<Vec<u8>, DataError> {
    let mut head = Vec::with_capacity(n);
    reader
        .by_ref()
        .take(n as u64)
        .read_to_end(&mut head)
        .map_err(|source| FileError::Io { path: path.to_string(), source })?;
    Ok(head)
}

impl<'o, R: io::Read> Source<'o, R> {
    fn open(
        mut reader: R,
        path: &str,
        opts: &ReadOptions<'o>,
        expected: &'static str,
        need_ratio: bool,
    ) -> Result<Self, DataError> {
        if !(1..=24).contains(&opts.adc_bits) {
            return Err(DataError::AdcBits { bits: opts.adc_bits });
        }
        // The start of the file tells text from what is not: a UTF-8 byte-order mark is dropped; UTF-16
        // and binary files are refused by name rather than parsed into nonsense.
        let mut head = peek(&mut reader, 4096, path)?;
        if head.starts_with(b"\xEF\xBB\xBF") {
            head.drain(..3);
        } else if head.starts_with(b"\xFF\xFE") || head.starts_with(b"\xFE\xFF") {
            return Err(DataError::NotText {
                path: path.to_string(),
                what: "UTF-16 text (it starts with a UTF-16 byte-order mark); save it as UTF-8",
            });
        }
        if head.contains(&0) {
            return Err(DataError::NotText {
                path: path.to_string(),
                what: "binary data (a NUL byte in its first 4 KiB), or text in an encoding such as UTF-16; expected CSV text in UTF-8",
            });
        }
        let window = Rc::new(RefCell::new(Window::default()));
        let tap = Tap { inner: io::Cursor::new(head).chain(reader), window: Rc::clone(&window) };
        let mut csv = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .buffer_capacity(READ_AHEAD)
            .from_reader(tap);
        let mut lines = LineCounter::default();
        let mut head = ByteRecord::new();
        if let Err(e) = csv.read_byte_record(&mut head) {
            return Err(csv_error(path, &e, &mut lines, &window));
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
                    name: printable(&headers[b]),
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
            found: printable(&headers.join(",")),
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
        let mut ratio = find("ratio")?;
        let mut ratio_as_absorbance = false;
        // Chamber data and standards may give the known ratio as an absorbance (certified filters). (apply
        // refuses readings with an absorbance column: it writes one.)
        match (ratio, find("absorbance")?) {
            (Some(r), Some(a)) => {
                return Err(DataError::TwoRatioColumns {
                    path: path.to_string(),
                    ratio: r + 1,
                    absorbance: a + 1,
                })
            }
            (None, Some(a)) => (ratio, ratio_as_absorbance) = (Some(a), true),
            _ => {}
        }
        if need_ratio && ratio.is_none() {
            return Err(missing(
                "ratio",
                "the applied ratio I_sig/I_ref of each calibration point (or its absorbance, in an absorbance column)",
            ));
        }
        let unit = find("unit")?;
        let weight = find("weight")?;
        let columns = Columns {
            code,
            temperature,
            temperature_kind,
            ratio,
            ratio_as_absorbance,
            unit,
            weight,
            count: headers.len(),
        };
        Ok(Source {
            csv,
            window,
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
                self.line = self.lines.line_at(&mut self.window.borrow_mut(), start);
                Ok(Some(self.line))
            }
            Ok(false) => Ok(None),
            Err(e) => Err(csv_error(&self.path, &e, &mut self.lines, &self.window)),
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
        let (lo, hi) = TEMPERATURE_SPAN_C;
        let plausible = |t: f64| {
            if !t.is_finite() {
                Err(Problem::NotFinite)
            } else if !(lo..=hi).contains(&t) {
                Err(Problem::Implausible { min: lo, max: hi })
            } else {
                Ok(t)
            }
        };
        match self.columns.temperature_kind {
            TemperatureColumn::Celsius => parse_f64(raw)
                .and_then(plausible)
                .map(Ok)
                .map_err(|p| self.err(rec, c, p, format!("a finite temperature in °C within {lo} … {hi}"))),
            TemperatureColumn::Code => {
                let code = parse_code(raw, u32::MAX).map_err(|p| {
                    self.err(rec, c, p, "a non-negative integer code of the temperature channel".into())
                })?;
                let Some(conv) = self.converter else {
                    return Ok(Err(logtrim::Error::NotCalibrated));
                };
                match conv(code) {
                    Ok(t) => plausible(t).map(Ok).map_err(|p| {
                        self.err(rec, c, p, format!("a code the sensor converts to °C within {lo} … {hi}"))
                    }),
                    Err(e) => Ok(Err(e)),
                }
            }
        }
    }

    fn ratio(&self, rec: &ByteRecord, c: usize) -> Result<f64, Box<RowError>> {
        let (lo, hi) = RATIO_SPAN;
        if self.columns.ratio_as_absorbance {
            // A = −log10(ratio) (common practice): within the ratio span, |A| ≤ 30.
            let a = parse_f64(field(rec, c)).and_then(|a| {
                if !a.is_finite() {
                    Err(Problem::NotFinite)
                } else if !(-hi.log10()..=-lo.log10()).contains(&a) {
                    Err(Problem::Implausible { min: -hi.log10(), max: -lo.log10() })
                } else {
                    Ok(a)
                }
            });
            return a.map(|a| 10f64.powf(-a)).map_err(|p| {
                self.err(
                    rec,
                    c,
                    p,
                    format!("a finite absorbance A = −log10(ratio) within {} … {}", -hi.log10(), -lo.log10()),
                )
            });
        }
        plausible_positive(field(rec, c)).map_err(|p| {
            self.err(rec, c, p, format!("a positive finite ratio I_sig/I_ref within {lo:e} … {hi:e}"))
        })
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
            Some(c) => plausible_positive(field(rec, c)).map_err(|p| {
                let (lo, hi) = RATIO_SPAN;
                self.err(rec, c, p, format!("a positive finite weight within {lo:e} … {hi:e}"))
            })?,
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
        // A code beyond the converter that a u32 holds is the firmware's to refuse: the row gets its status
        // (`code_out_of_adc_range`), as on the MCU, and the rest of the file is corrected.
        let code = match parse_code(field(rec, self.columns.code), u32::MAX) {
            Ok(c) if c > self.max_code => c,
            _ => self.code(rec)?,
        };
        let temp_c = self.temperature(rec)?;
        let ratio = match self.columns.ratio {
            Some(c) => Some(self.ratio(rec, c)?),
            None => None,
        };
        let unit = self.unit(rec)?;
        Ok(ReadingRow { line, code, temp_c, ratio, unit, record: rec.clone() })
    }
}

fn csv_error(path: &str, e: &csv::Error, lines: &mut LineCounter, window: &RefCell<Window>) -> DataError {
    let line = e.position().map_or(0, |p| lines.line_at(&mut window.borrow_mut(), p.byte()));
    if let csv::ErrorKind::Io(io) = e.kind() {
        if io.get_ref().is_some_and(|inner| inner.is::<LineTooLong>()) {
            // The long stretch starts after the last newline of the window.
            let w = window.borrow();
            let from = usize::try_from(lines.offset.saturating_sub(w.base)).unwrap_or(usize::MAX);
            let newlines = w.bytes.get(from..).map_or(0, |b| b.iter().filter(|&&c| c == b'\n').count());
            let line = lines.line + 1 + newlines as u64;
            return DataError::Csv { path: path.to_string(), line, message: LineTooLong.to_string() };
        }
        return DataError::File(FileError::Io {
            path: path.to_string(),
            source: io::Error::new(io.kind(), io.to_string()),
        });
    }
    DataError::Csv { path: path.to_string(), line, message: printable(&e.to_string()) }
}

/// Text with its control characters (NUL, escape, …) written as escapes, so that a file's bytes never
/// reach the terminal raw.
pub fn printable(s: &str) -> String {
    if !s.chars().any(char::is_control) {
        return s.to_string();
    }
    s.chars().map(|c| if c.is_control() { c.escape_default().to_string() } else { c.to_string() }).collect()
}

/// True line numbers from byte offsets. The CSV parser reports a record's position as where the previous
/// read stopped, before any blank lines it skips; this counts newlines itself, moving forward only, in the
/// [`Window`] of bytes read (which it trims as it goes).
#[derive(Default)]
struct LineCounter {
    offset: u64,
    line: u64,
}

impl LineCounter {
    /// The 1-based line of the first byte at or after `start` that is not a line terminator.
    fn line_at(&mut self, w: &mut Window, start: u64) -> u64 {
        let rel = |at: u64| usize::try_from(at.saturating_sub(w.base)).unwrap_or(usize::MAX);
        let mut at = start;
        while matches!(w.bytes.get(rel(at)), Some(b'\n' | b'\r')) {
            at += 1;
        }
        if at >= self.offset {
            let (from, to) = (rel(self.offset).min(w.bytes.len()), rel(at).min(w.bytes.len()));
            let newlines = w.bytes.get(from..to).map_or(0, |s| s.iter().filter(|&&b| b == b'\n').count());
            self.line += newlines as u64;
            self.offset = at;
            // Bytes before the current record are counted: let them go.
            let drop = rel(at).min(w.bytes.len());
            w.bytes.drain(..drop);
            w.base += drop as u64;
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

fn plausible_positive(raw: &[u8]) -> Result<f64, Problem> {
    let v = parse_f64(raw)?;
    let (lo, hi) = RATIO_SPAN;
    if !v.is_finite() {
        Err(Problem::NotFinite)
    } else if v <= 0.0 {
        Err(Problem::NotPositive)
    } else if !(lo..=hi).contains(&v) {
        Err(Problem::Implausible { min: lo, max: hi })
    } else {
        Ok(v)
    }
}

#[cfg(test)]
mod tests;
