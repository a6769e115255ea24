//! Trim and blank record files: reading and checking the raw records that `logtrim trim` and
//! `logtrim blank` write, and installing them over a calibration as the firmware would (its field
//! [`Layers`]).
//!
//! A record file holds the record's bytes exactly as the firmware stores them; firmware-lib's own parsers
//! check them ([`Trim::parse`], [`Blank::parse`]) and its [`Layers::new`] binds them to the calibration.

use std::path::Path;

use logtrim::field::{self, Blank, Layers, Trim, TrimLimits};
use logtrim::Calibration;

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
