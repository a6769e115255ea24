//! Trim and blank record files: reading and checking the raw records that `logtrim trim` and
//! `logtrim blank` write, and installing them over a calibration as the firmware would (its field
//! [`Layers`]).
//!
//! A record file holds the record's bytes exactly as the firmware stores them; firmware-lib's own parsers
//! check them ([`Trim::parse`], [`Blank::parse`]) and its [`Layers::new`] binds them to the calibration.

use std::path::Path;

use std::fmt::Write as _;

use logtrim::field::{self, Blank, Layers, RecordInfo, Trim, TrimLimits};
use logtrim::record::RecordType;
use logtrim::Calibration;

use crate::image_file::utc_string;

/// Why a record file could not be used.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum RecordFileError {
    /// The file could not be read.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
    /// The bytes are not a valid record.
    #[error("{path}: {error}")]
    Record {
        /// The file.
        path: String,
        /// firmware-lib's verdict.
        error: field::RecordError,
    },
}

fn read_bytes(path: &Path) -> Result<Vec<u8>, RecordFileError> {
    std::fs::read(path).map_err(|source| crate::file_error::FileError::io(path, source).into())
}

/// Reads and checks a trim record file (the raw record, as `logtrim trim` writes it).
pub fn read_trim_file(path: &Path) -> Result<Trim, RecordFileError> {
    let bytes = read_bytes(path)?;
    Trim::parse(&bytes).map_err(|error| RecordFileError::Record { path: path.display().to_string(), error })
}

/// Reads and checks a blank record file (the raw record, as `logtrim blank` writes it).
pub fn read_blank_file(path: &Path) -> Result<Blank, RecordFileError> {
    let bytes = read_bytes(path)?;
    Blank::parse(&bytes).map_err(|error| RecordFileError::Record { path: path.display().to_string(), error })
}

/// A field record of either kind, as a file holds it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FieldRecord {
    /// A trim record (`logtrim trim`).
    Trim(Trim),
    /// A blank record (`logtrim blank`).
    Blank(Blank),
}

/// The field record type whose magic `bytes` start with: trim or blank; `None` for anything else (a
/// calibration image, or bytes that are not a record).
pub fn field_record_type(bytes: &[u8]) -> Option<RecordType> {
    let magic: [u8; 4] = bytes.get(..4)?.try_into().ok()?;
    RecordType::of_magic(magic).filter(|t| matches!(t, RecordType::Trim | RecordType::Blank))
}

/// Parses and checks a field record of either kind (by its magic) with firmware-lib's parser; `path`
/// names the file in the error. `Ok(None)` when the bytes do not start with a field record's magic.
pub fn parse_field_record(bytes: &[u8], path: &str) -> Result<Option<FieldRecord>, RecordFileError> {
    let err = |error| RecordFileError::Record { path: path.to_string(), error };
    Ok(match field_record_type(bytes) {
        Some(RecordType::Trim) => Some(FieldRecord::Trim(Trim::parse(bytes).map_err(err)?)),
        Some(RecordType::Blank) => Some(FieldRecord::Blank(Blank::parse(bytes).map_err(err)?)),
        _ => None,
    })
}

/// The factory calibration a record is bound to, in words.
fn binding(info: &RecordInfo) -> String {
    if info.factory == 0 {
        "none (0: applies to any calibration)".to_string()
    } else {
        format!("{:#010x}", info.factory)
    }
}

/// A field record in words, one `name  value` line each (what `logtrim inspect` prints).
pub fn describe_field_record(record: &FieldRecord) -> String {
    let mut s = String::new();
    let info = match record {
        FieldRecord::Trim(t) => t.info(),
        FieldRecord::Blank(b) => b.info(),
    };
    let kind = match record {
        FieldRecord::Trim(_) => "trim",
        FieldRecord::Blank(_) => "blank",
    };
    let _ = writeln!(s, "record       {kind} (checked: magic, version, length, CRC-32, values)");
    let _ = writeln!(s, "sequence     {}", info.sequence);
    let written = if info.written_at == 0 {
        "unknown (0: no clock)".to_string()
    } else {
        format!("{} UTC ({} s)", utc_string(info.written_at), info.written_at)
    };
    let _ = writeln!(s, "written      {written}");
    let _ = writeln!(
        s,
        "calibration  {} (the calibration ID `logtrim inspect` shows for an image)",
        binding(&info)
    );
    match record {
        FieldRecord::Trim(t) => {
            let p = t.parts();
            let _ = writeln!(s, "kind         {}", p.kind.name());
            let _ = writeln!(s, "offset       {} Np (Q24 {})", p.offset, p.offset_q24);
            let _ = writeln!(s, "gain         {} (Q30 {})", p.gain, p.gain_q30);
            let _ = writeln!(s, "standards    {} Np, {} Np", p.standards[0], p.standards[1]);
            let _ = writeln!(s, "at           {:.3} °C", f64::from(p.temp_mc) / 1000.0);
        }
        FieldRecord::Blank(b) => {
            let p = b.parts();
            let _ = writeln!(s, "blank x      {} Np (Q24 {})", p.x, p.x_q24);
            let _ = writeln!(s, "at           {:.3} °C", f64::from(p.temp_mc) / 1000.0);
            let _ = writeln!(s, "samples      {}", p.samples);
        }
    }
    s
}

/// A field record as JSON (what `logtrim inspect --json` prints).
pub fn field_record_json(record: &FieldRecord) -> serde_json::Value {
    let head = |kind: &str, info: RecordInfo| {
        serde_json::json!({
            "record": kind,
            "sequence": info.sequence,
            "written_unix_s": info.written_at,
            "calibration_id": format!("{:#010x}", info.factory),
        })
    };
    match record {
        FieldRecord::Trim(t) => {
            let p = t.parts();
            let mut v = head("trim", p.info);
            v["kind"] = serde_json::json!(p.kind.name());
            v["offset_np"] = serde_json::json!(p.offset);
            v["offset_q24"] = serde_json::json!(p.offset_q24);
            v["gain"] = serde_json::json!(p.gain);
            v["gain_q30"] = serde_json::json!(p.gain_q30);
            v["standards_np"] = serde_json::json!(p.standards);
            v["temp_mc"] = serde_json::json!(p.temp_mc);
            v
        }
        FieldRecord::Blank(b) => {
            let p = b.parts();
            let mut v = head("blank", p.info);
            v["x_np"] = serde_json::json!(p.x);
            v["x_q24"] = serde_json::json!(p.x_q24);
            v["temp_mc"] = serde_json::json!(p.temp_mc);
            v["samples"] = serde_json::json!(p.samples);
            v
        }
    }
}

/// A trim and a blank read from their record files and installed over a calibration as the firmware
/// would ([`Layers::new`]): each record checked, bound to this calibration, the trim within `limits`.
pub fn layers_from_files(
    cal: &Calibration,
    trim: Option<&Path>,
    blank: Option<&Path>,
    limits: &TrimLimits,
) -> Result<Layers, LayerError> {
    let trim = trim.map(read_trim_file).transpose()?;
    let blank = blank.map(read_blank_file).transpose()?;
    let fp = field::fingerprint(cal).map_err(|e| LayerError::Fingerprint(format!("{e:?}")))?;
    Layers::new(trim, blank, limits, Some(fp)).map_err(LayerError::Refused)
}

/// The installed records that are bound to no calibration (factory fingerprint 0): the firmware applies
/// such a record over any calibration, so a caller should warn. Names: `"trim"`, `"blank"`.
pub fn unbound_records(layers: &Layers) -> Vec<&'static str> {
    let mut v = Vec::new();
    if layers.trim().is_some_and(|t| t.info().factory == 0) {
        v.push("trim");
    }
    if layers.blank().is_some_and(|b| b.info().factory == 0) {
        v.push("blank");
    }
    v
}

/// Why the field layers over a calibration could not be installed.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LayerError {
    /// A record file could not be read or is not a valid record.
    #[error(transparent)]
    File(#[from] RecordFileError),
    /// firmware-lib refuses to install a record (made on another calibration, a trim past the limits).
    #[error("the trim or blank record: {0}")]
    Refused(field::FieldError),
    /// The calibration cannot be fingerprinted.
    #[error("the calibration cannot be stored as an image to fingerprint it: {0}")]
    Fingerprint(String),
}

impl LayerError {
    /// True for a refusal that is a failed check: a trim past the limits. A bad or foreign file is bad
    /// input.
    pub fn is_check(&self) -> bool {
        matches!(
            self,
            LayerError::Refused(
                field::FieldError::OffsetPastLimit { .. } | field::FieldError::GainPastLimit { .. }
            )
        )
    }
}
