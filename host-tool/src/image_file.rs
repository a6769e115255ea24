//! Calibration images on the host: building one from a calibration file, writing it as a raw binary or as
//! Intel HEX for a programmer, reading either back, and describing a checked image for people.
//!
//! The image format itself (layout, checks) is firmware-lib's [`logtrim::image`]; this module only moves
//! its bytes in and out of files. An image built here carries the fixed-point tables of
//! [`CalFile::fixed_tables`] in its fixed section unless asked not to ([`build_image_with`]); they are read
//! back through firmware-lib's own loader ([`load_fixed`]).
//!
//! # Intel HEX
//!
//! Written with data records of 16 or 32 bytes (record type 00), an extended linear address record (type
//! 04) before the first data record whenever the upper 16 bits of the address are not zero and again at
//! every 64 KiB boundary the data crosses, and the end-of-file record (type 01). Records are split at
//! multiples of the record length (the first may be shorter, so that the rest are aligned) and never cross a
//! 64 KiB boundary. Record encoding and checksums come from the `ihex` crate.
//!
//! When reading, data records must form one contiguous block (an image is one region), in ascending order;
//! extended segment (02) and linear (04) address records are honoured, start address records (03, 05) are
//! ignored, and the end-of-file record must be present and last.

use std::fmt::Write as _;
use std::path::Path;

use ihex::Record;
use logtrim::image::{self, layout, FixedStorage, Image, ImageError, ImageInfo};

use crate::calfile::CalFile;
use crate::output::number::Num;
use crate::tables::{FixedTables, TableError, TableOptions};

/// The file formats of an image.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ImageFormat {
    /// The image's bytes as they are.
    Bin,
    /// Intel HEX text.
    Hex,
}

impl ImageFormat {
    /// The format an output file name suggests: `.hex` or `.ihex` is Intel HEX, anything else binary.
    pub fn from_path(path: &Path) -> ImageFormat {
        match path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase).as_deref() {
            Some("hex" | "ihex") => ImageFormat::Hex,
            _ => ImageFormat::Bin,
        }
    }
}

/// Errors building, writing or reading an image file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ImageFileError {
    /// The file could not be read or written.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
    /// The serial cannot be stored.
    #[error("serial {serial:?} cannot be stored: at most 16 printable ASCII characters (0x20-0x7E)")]
    Serial {
        /// The serial given.
        serial: String,
    },
    /// The calibration cannot be written as an image.
    #[error("cannot build the image: {0}")]
    Write(image::WriteError),
    /// The image's temperature-sensor description or table does not agree with the calibration file's.
    #[error("the image's temperature sensor disagrees with the calibration file: {what}")]
    SensorDisagrees {
        /// What differs.
        what: String,
    },
    /// The fixed-point tables for the image's fixed section could not be generated.
    #[error("cannot build the fixed-point tables for the image: {0}")]
    Tables(TableError),
    /// Not a usable Intel HEX record length.
    #[error("record length {0} is not supported (use 16 or 32)")]
    RecordLen(usize),
    /// The image does not fit in the 32-bit address space at the base address.
    #[error("{len} bytes at base address {base:#010x} run past the end of the 32-bit address space")]
    AddressOverflow {
        /// The base address.
        base: u32,
        /// The image length.
        len: usize,
    },
    /// An address given on the command line is not a number.
    #[error("{text:?} is not an address (decimal, or hexadecimal with 0x)")]
    Address {
        /// The text given.
        text: String,
    },
    /// A line of an Intel HEX file is not a valid record (syntax or checksum).
    #[error("line {line}: {source}")]
    HexRecord {
        /// The line, 1-based.
        line: usize,
        /// The record's defect.
        source: ihex::ReaderError,
    },
    /// A record's checksum byte does not match its contents: the file is corrupted.
    #[error(
        "line {line}: record checksum {stored:#04x} does not match its contents (which give {computed:#04x})"
    )]
    HexChecksum {
        /// The line, 1-based.
        line: usize,
        /// The checksum byte in the record.
        stored: u8,
        /// The checksum of the record's other bytes.
        computed: u8,
    },
    /// An Intel HEX file's records do not describe one contiguous image.
    #[error("line {line}: {message}")]
    HexLayout {
        /// The line, 1-based (0 for the file as a whole).
        line: usize,
        /// What is wrong.
        message: String,
    },
}

/// Builds the image of a calibration file with the f32 sections only (see [`build_image_with`]).
pub fn build_image(file: &CalFile, serial: Option<&str>, sequence: u32) -> Result<Vec<u8>, ImageFileError> {
    build_image_with(file, serial, sequence, None)
}

/// Builds the image of a calibration file: the f32 calibration, the raw temperature channel's description
/// when the file has one (section *sensor*, for either path), and the fixed section of its fixed-point
/// tables ([`CalFile::fixed_tables`] with `tables`, a temperature-sensor table included when the file
/// describes a raw temperature channel) when `tables` is given. A residual table of zeros (a fit that chose
/// no residual, a front end without a bend left for it) is stored empty: the fixed path reads an empty table
/// as zero everywhere, bit for bit as the zeros. The serial is `serial` if given, else the file's `unit`,
/// else empty; the calibration time is the file's `created_unix_s`. The image is read back before it is
/// returned, and its sensor description must be the file's ([`ImageFileError::SensorDisagrees`]).
pub fn build_image_with(
    file: &CalFile,
    serial: Option<&str>,
    sequence: u32,
    tables: Option<&TableOptions>,
) -> Result<Vec<u8>, ImageFileError> {
    let serial = serial.or(file.unit.as_deref()).unwrap_or("");
    let info = ImageInfo { serial, calibrated_at: file.created_unix_s, sequence };
    let mut fixed = tables.map(|o| file.fixed_tables(o)).transpose().map_err(ImageFileError::Tables)?;
    if let Some(t) = fixed.as_mut() {
        if t.residual.iter().all(|&r| r == 0) {
            t.residual.clear();
        }
    }
    let view = fixed.as_ref().map(FixedTables::view);
    let contents = image::Contents {
        calibration: &file.calibration,
        sensor: file.temperature_sensor.as_ref(),
        fixed: view.as_ref(),
        extra: &[],
    };
    let write_err = |e| match e {
        image::WriteError::BadSerial => ImageFileError::Serial { serial: serial.to_string() },
        other => ImageFileError::Write(other),
    };
    let len = image::encoded_len_of(&contents).map_err(write_err)?;
    let mut buf = vec![0u8; len];
    let n = image::write_contents(&mut buf, &info, &contents).map_err(write_err)?;
    buf.truncate(n);
    check_sensor(file, &buf)?;
    Ok(buf)
}

/// The image's sensor description (section *sensor*) and its fixed section's sensor table agree with the
/// calibration file's temperature channel: the same description bit for bit, and a table exactly when the
/// file describes a raw channel.
pub fn check_sensor(file: &CalFile, bytes: &[u8]) -> Result<(), ImageFileError> {
    let img = Image::parse(bytes)
        .map_err(|e| ImageFileError::SensorDisagrees { what: format!("the image is refused: {e}") })?;
    let want = file.temperature_sensor;
    if img.sensor() != want {
        let say = |s: Option<logtrim::TemperatureSensor>| s.map_or("none".to_string(), |s| format!("{s:?}"));
        return Err(ImageFileError::SensorDisagrees {
            what: format!(
                "the image's sensor section is {}, the file's sensor {}",
                say(img.sensor()),
                say(want)
            ),
        });
    }
    if let Some(sec) = img.fixed() {
        if sec.sensor().is_some() != want.is_some() {
            let (has, file_has) = if want.is_some() { ("no", "a raw") } else { ("a", "no raw") };
            return Err(ImageFileError::SensorDisagrees {
                what: format!("the fixed section has {has} sensor table, the file describes {file_has} temperature channel"),
            });
        }
    }
    Ok(())
}

/// A storage large enough for any fixed section (a section payload holds at most 65 532 bytes), so that
/// a load from an image fails only on the tables' values.
pub type HostFixedStorage = FixedStorage<16384, 32768, 16384>;

/// The fixed-point tables of a checked image, loaded exactly as the firmware loads them
/// ([`Image::fixed_into`]: copied out of the image and checked by `FixedCalibration::validate`), as the
/// host's owned form. `Ok(None)` if the image has no fixed section.
pub fn load_fixed(img: &Image<'_>) -> Result<Option<FixedTables>, ImageError> {
    if img.fixed().is_none() {
        return Ok(None);
    }
    let mut storage = Box::new(HostFixedStorage::new());
    let view = img.fixed_into(&mut storage)?;
    Ok(Some(FixedTables::from(&view)))
}

/// Parses an address: decimal, or hexadecimal with a `0x` prefix; `_` separators are allowed.
pub fn parse_address(text: &str) -> Result<u32, ImageFileError> {
    let clean: String = text.trim().chars().filter(|&c| c != '_').collect();
    let parsed = match clean.strip_prefix("0x").or_else(|| clean.strip_prefix("0X")) {
        Some(hex) => u32::from_str_radix(hex, 16),
        None => clean.parse::<u32>(),
    };
    parsed.map_err(|_| ImageFileError::Address { text: text.to_string() })
}

/// Encodes `bytes` at `base` as Intel HEX with data records of `record_len` (16 or 32) bytes.
pub fn to_intel_hex(bytes: &[u8], base: u32, record_len: usize) -> Result<String, ImageFileError> {
    if record_len != 16 && record_len != 32 {
        return Err(ImageFileError::RecordLen(record_len));
    }
    let overflow = || ImageFileError::AddressOverflow { base, len: bytes.len() };
    let end = u64::from(base) + bytes.len() as u64;
    if end > 1 << 32 {
        return Err(overflow());
    }
    let mut records = Vec::new();
    let mut upper: u16 = 0;
    let mut addr = u64::from(base);
    let mut rest = bytes;
    while !rest.is_empty() {
        let hi = u16::try_from(addr >> 16).map_err(|_| overflow())?;
        if hi != upper {
            records.push(Record::ExtendedLinearAddress(hi));
            upper = hi;
        }
        let to_boundary = record_len as u64 - addr % record_len as u64;
        let to_64k = 0x1_0000 - addr % 0x1_0000;
        let n = usize::try_from(to_boundary.min(to_64k)).unwrap_or(record_len).min(rest.len());
        let (chunk, tail) = rest.split_at(n);
        records.push(Record::Data { offset: (addr & 0xffff) as u16, value: chunk.to_vec() });
        addr += n as u64;
        rest = tail;
    }
    records.push(Record::EndOfFile);
    // Records of at most 32 bytes always encode; the error is kept rather than unwrapped.
    ihex::create_object_file_representation(&records)
        .map_err(|e| ImageFileError::HexLayout { line: 0, message: e.to_string() })
}

/// An image read from an Intel HEX file: where it lies and its bytes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct HexData {
    /// Address of the first byte.
    pub base: u32,
    /// The bytes, contiguous.
    pub bytes: Vec<u8>,
}

/// Decodes Intel HEX text holding one contiguous block of data.
pub fn from_intel_hex(text: &str) -> Result<HexData, ImageFileError> {
    let mut base: Option<u32> = None;
    let mut bytes: Vec<u8> = Vec::new();
    let mut upper: u64 = 0; // added to record offsets (linear: hi << 16, segment: seg << 4)
    let mut eof_line: Option<usize> = None;
    for (i, raw) in text.lines().enumerate() {
        let line = i + 1;
        let rec = raw.trim();
        if rec.is_empty() {
            continue;
        }
        let layout_err = |message: String| ImageFileError::HexLayout { line, message };
        if let Some(at) = eof_line {
            return Err(layout_err(format!("record after the end-of-file record of line {at}")));
        }
        let record = Record::from_record_string(rec).map_err(|source| match source {
            // ihex reports (computed, stored).
            ihex::ReaderError::ChecksumMismatch(computed, stored) => {
                ImageFileError::HexChecksum { line, stored, computed }
            }
            source => ImageFileError::HexRecord { line, source },
        })?;
        match record {
            Record::Data { offset, value } => {
                let addr = upper + u64::from(offset);
                let addr32 = u32::try_from(addr)
                    .ok()
                    .filter(|a| u64::from(*a) + value.len() as u64 <= 1 << 32)
                    .ok_or_else(|| {
                        layout_err(format!("data at {addr:#x} beyond the 32-bit address space"))
                    })?;
                match base {
                    None => base = Some(addr32),
                    Some(b) => {
                        let next = u64::from(b) + bytes.len() as u64;
                        if addr != next {
                            let what = if addr < next { "overlaps earlier data" } else { "leaves a gap" };
                            return Err(layout_err(format!(
                                "data at {addr:#010x} {what}: the image continues at {next:#010x}"
                            )));
                        }
                    }
                }
                bytes.extend_from_slice(&value);
                if bytes.len() > layout::MAX_LEN {
                    return Err(layout_err(format!("more than {} bytes of data", layout::MAX_LEN)));
                }
            }
            Record::ExtendedLinearAddress(hi) => upper = u64::from(hi) << 16,
            Record::ExtendedSegmentAddress(seg) => upper = u64::from(seg) << 4,
            Record::StartLinearAddress(_) | Record::StartSegmentAddress { .. } => {}
            Record::EndOfFile => eof_line = Some(line),
        }
    }
    if eof_line.is_none() {
        return Err(ImageFileError::HexLayout { line: 0, message: "no end-of-file record".into() });
    }
    let base = base.ok_or(ImageFileError::HexLayout { line: 0, message: "no data records".into() })?;
    Ok(HexData { base, bytes })
}

/// The contents of an image file: its format, where a HEX file places it, and the bytes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ImageBytes {
    /// The file's format.
    pub format: ImageFormat,
    /// The address of the first byte (Intel HEX only).
    pub base: Option<u32>,
    /// The image bytes (not yet checked).
    pub bytes: Vec<u8>,
}

/// Decodes file contents: Intel HEX if the first non-blank character is `:`, raw binary otherwise.
pub fn decode_file(content: &[u8]) -> Result<ImageBytes, ImageFileError> {
    let first = content.iter().find(|b| !b.is_ascii_whitespace());
    if first == Some(&b':') {
        let text = std::str::from_utf8(content).map_err(|e| ImageFileError::HexLayout {
            line: content[..e.valid_up_to()].iter().filter(|&&b| b == b'\n').count() + 1,
            message: "not ASCII text".into(),
        })?;
        let hex = from_intel_hex(text)?;
        Ok(ImageBytes { format: ImageFormat::Hex, base: Some(hex.base), bytes: hex.bytes })
    } else {
        Ok(ImageBytes { format: ImageFormat::Bin, base: None, bytes: content.to_vec() })
    }
}

/// Reads an image file (binary or Intel HEX).
pub fn read_file(path: &Path) -> Result<ImageBytes, ImageFileError> {
    let content = std::fs::read(path).map_err(|source| crate::file_error::FileError::io(path, source))?;
    decode_file(&content)
}

/// Encodes image bytes for a file of the given format (`base` and `record_len` apply to Intel HEX).
pub fn encode_file(
    bytes: &[u8],
    format: ImageFormat,
    base: u32,
    record_len: usize,
) -> Result<Vec<u8>, ImageFileError> {
    match format {
        ImageFormat::Bin => Ok(bytes.to_vec()),
        ImageFormat::Hex => to_intel_hex(bytes, base, record_len).map(String::into_bytes),
    }
}

/// Writes an encoded image file atomically.
pub fn write_file(path: &Path, content: &[u8]) -> Result<(), ImageFileError> {
    crate::output::write_atomic(path, content)
        .map_err(|source| crate::file_error::FileError::io(path, source).into())
}

/// A date and time in UTC from Unix seconds, `YYYY-MM-DD hh:mm:ss` (proleptic Gregorian calendar).
pub fn utc_string(unix_s: u64) -> String {
    let days = (unix_s / 86_400) as i64;
    let secs = unix_s % 86_400;
    // Days to civil date, the usual era-based conversion (common practice).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!("{year:04}-{month:02}-{day:02} {:02}:{:02}:{:02}", secs / 3600, secs / 60 % 60, secs % 60)
}

fn section_name(kind: u16) -> &'static str {
    match kind {
        layout::ranges::KIND => "ranges",
        layout::model_f32::KIND => "model_f32",
        layout::fixed::KIND => "fixed (fixed-point tables)",
        layout::sensor::KIND => "sensor (temperature channel)",
        k if k & layout::section::OPTIONAL_BIT != 0 => "optional (not known to this build)",
        _ => "unknown",
    }
}

/// A float in full (shortest round-trip form), in scientific notation when very small or large.
fn num(v: f32) -> String {
    if v == 0.0 || (1e-3..1e7).contains(&v.abs()) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

fn list(values: &[f32]) -> String {
    let parts: Vec<String> = values.iter().map(|v| num(*v)).collect();
    parts.join(", ")
}

/// A human-readable description of a checked image. Floats are printed in full (shortest round-trip form).
pub fn describe(img: &Image<'_>) -> String {
    let c = img.calibration();
    let m = &c.model;
    let mut s = String::new();
    let serial = if img.serial().is_empty() { "(none)" } else { img.serial() };
    let _ = writeln!(
        s,
        "image        version {}, {} bytes, CRC-32 {:#010x} (ok)",
        img.version(),
        img.len(),
        img.crc()
    );
    let _ = writeln!(s, "serial       {serial}");
    let _ = writeln!(s, "calibrated   {} UTC ({} s)", utc_string(img.calibrated_at()), img.calibrated_at());
    let _ = writeln!(s, "sequence     {}", img.sequence());
    let _ = writeln!(
        s,
        "calib. ID    {:#010x} (trim and blank records made on this calibration carry it)",
        logtrim::field::fingerprint_of_image(img)
    );
    let _ = writeln!(s, "sections");
    for sec in img.sections() {
        let _ =
            writeln!(s, "  {:#06x}     {:>5} bytes  {}", sec.kind, sec.payload.len(), section_name(sec.kind));
    }
    let _ = writeln!(s, "calibration");
    let _ = writeln!(
        s,
        "  adc        {} bits, rail margin {}, level shift {} codes",
        c.adc.bits,
        codes(c.adc.rail_margin),
        c.adc.level_shift_code
    );
    let _ = writeln!(
        s,
        "  t range    {} to {} °C, extrapolation {} K",
        c.temperature.min_c, c.temperature.max_c, c.temperature.extrapolation_k
    );
    let _ = writeln!(
        s,
        "  x range    {} to {}, min sensitivity {}",
        c.x_range.min, c.x_range.max, c.x_range.min_sensitivity
    );
    let _ = writeln!(
        s,
        "  normalise  T_c {} °C, T_h {} K, T_ref {} K, pole {}",
        m.t_center_c, m.t_half_span_k, m.t_ref_k, m.pole
    );
    for (name, series) in [("offset", &m.offset), ("slope", &m.slope), ("bulk", &m.bulk)] {
        let _ = writeln!(s, "  {name:<10} {} terms: [{}]", series.len, list(series.terms()));
    }
    if m.bias.enabled {
        let _ =
            writeln!(s, "  bias       on, ln β0 {}, ln β1 {}", num(m.bias.ln_beta0), num(m.bias.ln_beta1));
    } else {
        let _ = writeln!(s, "  bias       off");
    }
    let r = &m.residual;
    let _ = writeln!(s, "  residual   {} × {} terms, x_c {}, x_h {}", r.nx, r.nt, r.x_center, r.x_half_span);
    for i in 0..usize::from(r.nx).min(logtrim::calibration::MAX_RESIDUAL) {
        let row = &r.coeffs[i * logtrim::calibration::MAX_RESIDUAL..][..usize::from(r.nt)];
        let _ = writeln!(s, "    r[{i}]     [{}]", list(row));
    }
    describe_sensor(&mut s, img.sensor());
    describe_fixed(&mut s, img);
    s
}

/// The sensor section's part of [`describe`].
fn describe_sensor(s: &mut String, sensor: Option<logtrim::TemperatureSensor>) {
    use logtrim::sensor::SensorElement;
    let Some(t) = sensor else {
        let _ = writeln!(s, "temperature sensor: none in the image (temperatures arrive in °C)");
        return;
    };
    let element = match t.element {
        SensorElement::NtcBeta(b) => {
            format!("NTC (Beta) R0 {} Ω at {} °C, β {} K", num(b.r0_ohm), num(b.t0_c), num(b.beta_k))
        }
        SensorElement::NtcSteinhartHart(sh) => {
            format!("NTC (Steinhart–Hart) A {}, B {}, C {}", num(sh.a), num(sh.b), num(sh.c))
        }
        SensorElement::Rtd(r) => format!("platinum RTD R0 {} Ω", num(r.r0_ohm)),
    };
    let d = &t.divider;
    let placement = match d.placement {
        logtrim::Placement::LowSide => "to ground",
        logtrim::Placement::HighSide => "to supply",
    };
    let _ = writeln!(s, "temperature sensor (for either path)");
    let _ = writeln!(s, "  element    {element}, {placement}");
    let _ = writeln!(
        s,
        "  divider    series {} Ω, {} bits, full scale {}, open margin {}, short margin {}",
        num(d.series_ohm),
        d.bits,
        codes(d.full_scale_code),
        codes(d.open_margin),
        codes(d.short_margin)
    );
    let _ = writeln!(s, "  range      {} to {} °C", num(t.min_c), num(t.max_c));
}

/// A count of codes in words: "1 code", "8 codes".
fn codes(n: u32) -> String {
    if n == 1 {
        "1 code".to_string()
    } else {
        format!("{n} codes")
    }
}

/// θ (Q10 m°C) in °C.
fn theta_c(theta: i32) -> f64 {
    f64::from(theta) / (1000.0 * f64::from(1u32 << logtrim::fixed::THETA_FRAC))
}

/// Q24 nepers.
fn q24(v: i32) -> f64 {
    f64::from(v) / f64::from(1u32 << logtrim::fixed::X_FRAC)
}

fn on_off(b: bool) -> &'static str {
    if b {
        "on"
    } else {
        "off"
    }
}

/// The fixed section's part of [`describe`].
fn describe_fixed(s: &mut String, img: &Image<'_>) {
    let Some(sec) = img.fixed() else {
        let _ = writeln!(s, "fixed-point tables: none (the f32 model only)");
        return;
    };
    let h = sec.header();
    let status = match load_fixed(img) {
        Ok(_) => "load and validate (ok)".to_string(),
        Err(e) => format!("REFUSED: {e}"),
    };
    let _ = writeln!(s, "fixed-point tables: {status}");
    let _ = writeln!(s, "  layout     version {}", h.layout);
    let _ = writeln!(
        s,
        "  t grid     {} knots from {:.3} °C, step {:.3} K; calibrated {:.3} to {:.3} °C, accepted {:.3} to {:.3} °C",
        h.t_knots,
        Num(theta_c(h.t_origin)),
        2f64.powi(i32::from(h.t_step_log2)) / 1_024_000.0,
        Num(theta_c(h.temp_min)),
        Num(theta_c(h.temp_max)),
        Num(theta_c(h.temp_lo)),
        Num(theta_c(h.temp_hi))
    );
    let step = 2f64.powi(i32::from(h.xa_step_log2) - logtrim::fixed::X_FRAC as i32);
    let _ = writeln!(
        s,
        "  x̃ grid     {} knots from {:.4} Np, step {:.4} Np; x range {:.4} to {:.4} Np",
        h.xa_knots,
        Num(q24(h.xa_origin)),
        step,
        Num(q24(h.x_min)),
        Num(q24(h.x_max))
    );
    let _ = writeln!(
        s,
        "  scales     offset 2^{}, inverse slope 2^{}, residual 2^{} (i16)",
        h.offset_frac, h.inv_slope_frac, h.residual_frac
    );
    let _ = writeln!(
        s,
        "  terms      bias bend {}, sensitivity limit {}",
        on_off(h.bias_bend),
        on_off(h.sensitivity_limit)
    );
    let sizes: Vec<String> =
        layout::fixed::TABLES.iter().map(|t| format!("{} {}", t.name, sec.len_of(t))).collect();
    let _ = writeln!(s, "  entries    {}", sizes.join(", "));
    match sec.sensor() {
        None => {
            let _ = writeln!(s, "  sensor     none (temperatures in m°C)");
        }
        Some(t) => {
            let _ = writeln!(
                s,
                "  sensor     codes {} to {}, knots every {} codes; below: {}, below {}: {}; above: {}, above {}: {}",
                t.code_lo,
                t.code_hi,
                1u32 << t.step_log2.min(16),
                t.fault_below,
                t.far_below_code,
                t.fault_far_below,
                t.fault_above,
                t.far_above_code,
                t.fault_far_above
            );
        }
    }
}

/// The fixed section's part of [`describe_json`].
fn fixed_json(img: &Image<'_>) -> serde_json::Value {
    let Some(sec) = img.fixed() else { return serde_json::Value::Null };
    let sizes: serde_json::Map<String, serde_json::Value> =
        layout::fixed::TABLES.iter().map(|t| (t.name.to_string(), sec.len_of(t).into())).collect();
    let (ok, error) = match load_fixed(img) {
        Ok(_) => (true, serde_json::Value::Null),
        Err(e) => (false, e.to_string().into()),
    };
    // The sensor's description without its knots (they are in the tables, counted in "entries").
    let mut sensor = serde_json::to_value(sec.sensor()).unwrap_or_default();
    if let Some(o) = sensor.as_object_mut() {
        o.remove("knots");
    }
    serde_json::json!({
        "valid": ok,
        "error": error,
        "header": sec.header(),
        "entries": sizes,
        "sensor": sensor,
    })
}

/// A checked image as JSON (header fields, sections and the calibration, field by field).
pub fn describe_json(img: &Image<'_>) -> serde_json::Value {
    serde_json::json!({
        "version": img.version(),
        "len": img.len(),
        "crc32": format!("{:#010x}", img.crc()),
        "serial": img.serial(),
        "calibrated_unix_s": img.calibrated_at(),
        "calibrated_utc": utc_string(img.calibrated_at()),
        "sequence": img.sequence(),
        "calibration_id": format!("{:#010x}", logtrim::field::fingerprint_of_image(img)),
        "sections": img.sections().map(|s| serde_json::json!({
            "kind": format!("{:#06x}", s.kind),
            "len": s.payload.len(),
            "name": section_name(s.kind),
        })).collect::<Vec<_>>(),
        "calibration": img.calibration(),
        "temperature_sensor": img.sensor(),
        "fixed": fixed_json(img),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // The example data records of the Intel HEX article's sample file, with its EOF record (from memory; each
    // line's bytes sum to zero mod 256 as the format requires, which a misremembered byte would break).
    const PUBLISHED: &str = "\
:10010000214601360121470136007EFE09D2190140
:100110002146017E17C20001FF5F16002148011928
:10012000194E79234623965778239EDA3F01B2CAA7
:100130003F0156702B5E712B722B732146013421C7
:00000001FF
";

    fn published_bytes() -> Vec<u8> {
        PUBLISHED
            .lines()
            .take(4)
            .flat_map(|l| (0..16).map(move |i| u8::from_str_radix(&l[9 + 2 * i..11 + 2 * i], 16).unwrap()))
            .collect()
    }

    #[test]
    fn checksums_match_a_published_example() {
        // Our writer, 16-byte records at 0x0100, reproduces the published file exactly, checksums included.
        let bytes = published_bytes();
        assert_eq!(to_intel_hex(&bytes, 0x0100, 16).unwrap(), PUBLISHED);
        // And the reader takes it back.
        assert_eq!(from_intel_hex(PUBLISHED).unwrap(), HexData { base: 0x0100, bytes });
        // The extended linear address record for 0x0800_0000 (from memory, common in MCU flash files).
        let rec = Record::ExtendedLinearAddress(0x0800).to_record_string().unwrap();
        assert_eq!(rec, ":020000040800F2");
    }

    #[test]
    fn checksum_rule_holds_on_every_line_we_write() {
        // The format's rule (two's complement of the byte sum), checked by hand on our own output.
        let data: Vec<u8> = (0..300u32).map(|i| (i * 37 + 11) as u8).collect();
        let text = to_intel_hex(&data, 0x0800_FFF0, 32).unwrap();
        for line in text.lines() {
            let b: Vec<u8> = (1..line.len())
                .step_by(2)
                .map(|i| u8::from_str_radix(&line[i..i + 2], 16).unwrap())
                .collect();
            assert_eq!(b.iter().fold(0u8, |a, x| a.wrapping_add(*x)), 0, "{line}");
            assert_eq!(usize::from(b[0]), b.len() - 5, "byte count of {line}");
        }
    }

    #[test]
    fn extended_linear_address_records_where_needed() {
        let data: Vec<u8> = (0..64u8).collect();
        // Below 64 KiB: no extended address record at all.
        let low = to_intel_hex(&data, 0x0200, 32).unwrap();
        assert!(!low.lines().any(|l| &l[7..9] == "04"), "{low}");
        // Across the 0x0801_0000 boundary: one before the data, one at the boundary; records split there.
        let text = to_intel_hex(&data, 0x0800_FFF0, 16).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines[0], ":020000040800F2");
        assert!(lines[1].starts_with(":10FFF000"), "{}", lines[1]);
        assert_eq!(lines[2], ":020000040801F1");
        assert!(lines[3].starts_with(":10000000"), "{}", lines[3]);
        assert_eq!(*lines.last().unwrap(), ":00000001FF");
        assert_eq!(from_intel_hex(&text).unwrap(), HexData { base: 0x0800_FFF0, bytes: data.clone() });
        // An unaligned base: the first record runs to the next multiple of the record length.
        let text = to_intel_hex(&data, 0x1005, 32).unwrap();
        assert!(text.lines().next().unwrap().starts_with(":1B100500"), "{text}");
        assert_eq!(from_intel_hex(&text).unwrap().bytes, data);
    }

    #[test]
    fn hex_errors_are_specific() {
        assert!(matches!(to_intel_hex(&[1], 0, 24), Err(ImageFileError::RecordLen(24))));
        assert!(matches!(
            to_intel_hex(&[1, 2], 0xFFFF_FFFF, 16),
            Err(ImageFileError::AddressOverflow { .. })
        ));
        assert!(to_intel_hex(&[1], 0xFFFF_FFFF, 16).is_ok());
        let bad_sum = PUBLISHED.replace("0140\n", "0141\n");
        assert!(matches!(
            from_intel_hex(&bad_sum),
            Err(ImageFileError::HexChecksum { line: 1, stored: 0x41, computed: 0x40 })
        ));
        assert!(matches!(from_intel_hex(":10010000zz\n"), Err(ImageFileError::HexRecord { line: 1, .. })));
        let no_eof = PUBLISHED.replace(":00000001FF\n", "");
        assert!(matches!(from_intel_hex(&no_eof), Err(ImageFileError::HexLayout { line: 0, .. })));
        let after = format!("{PUBLISHED}:00000001FF\n");
        assert!(matches!(from_intel_hex(&after), Err(ImageFileError::HexLayout { line: 6, .. })));
        let gap: String =
            PUBLISHED.lines().enumerate().filter(|(i, _)| *i != 1).map(|(_, l)| format!("{l}\n")).collect();
        let e = from_intel_hex(&gap).unwrap_err();
        assert!(e.to_string().contains("leaves a gap"), "{e}");
        let swapped: String =
            [1, 0, 2, 3, 4].iter().map(|&i| format!("{}\n", PUBLISHED.lines().nth(i).unwrap())).collect();
        assert!(from_intel_hex(&swapped).unwrap_err().to_string().contains("overlaps"));
        assert!(matches!(from_intel_hex(":00000001FF\n"), Err(ImageFileError::HexLayout { line: 0, .. })));
        // CRLF line ends and blank lines are fine.
        assert_eq!(from_intel_hex(&PUBLISHED.replace('\n', "\r\n\r\n")).unwrap().base, 0x0100);
    }

    #[test]
    fn addresses_parse() {
        assert_eq!(parse_address("0x0800F000").unwrap(), 0x0800_F000);
        assert_eq!(parse_address("0X0800_F000").unwrap(), 0x0800_F000);
        assert_eq!(parse_address("4096").unwrap(), 4096);
        assert!(parse_address("0x1_0000_0000").is_err());
        assert!(parse_address("page7").is_err());
    }

    #[test]
    fn utc_strings_agree_with_a_reference_calendar() {
        // Expected values computed with Python's datetime (a general-purpose reference library).
        assert_eq!(utc_string(0), "1970-01-01 00:00:00");
        assert_eq!(utc_string(951_782_400), "2000-02-29 00:00:00");
        assert_eq!(utc_string(1_764_614_400), "2025-12-01 18:40:00");
        assert_eq!(utc_string(4_102_444_799), "2099-12-31 23:59:59");
        assert_eq!(utc_string(253_402_300_799), "9999-12-31 23:59:59");
    }

    fn calfile() -> CalFile {
        let mut f =
            CalFile::new(logtrim::Calibration::nominal(16, 32768.0, 2000.0, 25.0), Some("GD-11-0093".into()));
        f.created_unix_s = 1_764_614_400;
        f
    }

    #[test]
    fn image_from_a_calibration_file() {
        let f = calfile();
        let bytes = build_image(&f, None, 4).unwrap();
        assert_eq!(bytes.len(), layout::F32_IMAGE_LEN);
        let img = Image::parse(&bytes).unwrap();
        assert_eq!((img.serial(), img.calibrated_at(), img.sequence()), ("GD-11-0093", 1_764_614_400, 4));
        assert_eq!(img.calibration(), f.calibration);
        let img2 = build_image(&f, Some("OVERRIDE-1"), 4).unwrap();
        assert_eq!(Image::parse(&img2).unwrap().serial(), "OVERRIDE-1");
        assert!(matches!(build_image(&f, Some("SEVENTEEN-CHARS-X"), 1), Err(ImageFileError::Serial { .. })));
        // Through Intel HEX and back.
        let hex = encode_file(&bytes, ImageFormat::Hex, 0x0800_F800, 32).unwrap();
        let back = decode_file(&hex).unwrap();
        assert_eq!(
            back,
            ImageBytes { format: ImageFormat::Hex, base: Some(0x0800_F800), bytes: bytes.clone() }
        );
        let text = describe(&img);
        assert!(text.contains("serial       GD-11-0093"), "{text}");
        assert!(text.contains("2025-12-01 18:40:00 UTC"), "{text}");
        assert_eq!(describe_json(&img)["calibration"]["adc"]["bits"], 16);
    }
}
