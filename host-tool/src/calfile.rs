//! The calibration file (`COEFFS.json`): a versioned JSON format of logtrim's own.
//!
//! ```json
//! {
//!   "format": "logtrim-calibration",
//!   "version": 1,
//!   "unit": "SN-0042",              // optional serial
//!   "created_unix_s": 1764614400,   // seconds since 1970-01-01 UTC
//!   "generator": "logtrim 0.1.0",
//!   "calibration": { ... },         // firmware-lib's `Calibration`, field by field
//!   "temperature_sensor": null,     // optional: how the temperature channel's code becomes °C
//!   "fit": { ... },                 // optional: the fit's summary (model chosen, residuals, CV figures,
//!                                   //   rows set aside and refused, each with its line)
//!   "acceptance": { ... }           // optional: the unit's verdict, "PASS" or "FAIL", with its checks
//! }
//! ```
//!
//! Readers refuse another `format` and any `version` they do not know; unknown fields are refused too, so a
//! typo in a hand-edited file is an error, not a silently ignored setting.

use std::path::Path;

use logtrim::Calibration;
use serde::{Deserialize, Serialize};

use logtrim::sensor::TemperatureSensor;

use crate::file_error::{parse_json, read_text, FileError};
use crate::fit::FitOutcome;
use crate::tables::{FixedTables, TableError, TableOptions, TemperatureChannel};

/// The `format` string of a calibration file.
pub const FORMAT: &str = "logtrim-calibration";
/// The current version of the format.
pub const VERSION: u32 = 1;

/// A calibration file's contents.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalFile {
    /// Always [`FORMAT`].
    pub format: String,
    /// The format version, [`VERSION`] for files written by this build.
    pub version: u32,
    /// The unit's serial, if known.
    #[serde(default)]
    pub unit: Option<String>,
    /// When the calibration was made, seconds since the Unix epoch (UTC).
    pub created_unix_s: u64,
    /// The program that wrote the file.
    pub generator: String,
    /// The calibration itself.
    pub calibration: Calibration,
    /// How the temperature channel's raw code becomes °C, if the unit reads a thermistor or RTD through
    /// a divider (`null` for a digital sensor that reads in °C).
    #[serde(default)]
    pub temperature_sensor: Option<TemperatureSensor>,
    /// A summary of the fit that produced the calibration.
    #[serde(default)]
    pub fit: Option<serde_json::Value>,
    /// The unit's verdict against its product's acceptance limits (`verdict`: `PASS` or `FAIL`, `reasons`,
    /// every `check`), when it was judged. A unit that failed keeps its calibration file, marked so here,
    /// and gets no image.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub acceptance: Option<serde_json::Value>,
}

/// Errors reading or writing a calibration file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CalFileError {
    /// The file could not be read, or is not well-formed JSON of this format.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
    /// The file is of another format or an unknown version.
    #[error("{path}: format {format:?} version {version} is not a logtrim calibration this build reads (expected {FORMAT:?} version {VERSION})")]
    Version {
        /// The file.
        path: String,
        /// The format string found.
        format: String,
        /// The version found.
        version: u32,
    },
    /// The calibration inside does not validate.
    #[error("{path}: {error}")]
    Invalid {
        /// The file.
        path: String,
        /// The firmware's verdict.
        error: logtrim::Error,
    },
}

/// Seconds since the Unix epoch by the system clock (0 if the clock is before 1970).
pub fn now_unix_s() -> u64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_secs()).unwrap_or(0)
}

impl CalFile {
    /// Wraps a calibration with this build's name, made now by the system clock ([`now_unix_s`]). A caller
    /// that stamps reproducibly (the `logtrim` command honours `SOURCE_DATE_EPOCH`) sets
    /// [`CalFile::created_unix_s`] or uses [`CalFile::of_fit`].
    pub fn new(calibration: Calibration, unit: Option<String>) -> CalFile {
        CalFile::made_at(calibration, unit, now_unix_s())
    }

    fn made_at(calibration: Calibration, unit: Option<String>, created_unix_s: u64) -> CalFile {
        CalFile {
            format: FORMAT.to_string(),
            version: VERSION,
            unit,
            created_unix_s,
            generator: format!("logtrim {}", env!("CARGO_PKG_VERSION")),
            calibration,
            temperature_sensor: None,
            fit: None,
            acceptance: None,
        }
    }

    /// The calibration file of a fit: its calibration and summary, the unit's serial (if any), and the
    /// temperature channel's description for data read through one.
    pub fn of_fit(
        outcome: &FitOutcome,
        unit: Option<String>,
        sensor: Option<TemperatureSensor>,
        created_unix_s: u64,
    ) -> CalFile {
        let mut file = CalFile::made_at(outcome.calibration, unit, created_unix_s);
        file.temperature_sensor = sensor;
        file.fit = serde_json::to_value(outcome).ok();
        file
    }

    /// Parses a calibration file from JSON text; `path` only names it in errors.
    pub fn from_json(text: &str, path: &str) -> Result<CalFile, CalFileError> {
        #[derive(Deserialize)]
        struct Head {
            format: String,
            version: u32,
        }
        let head: Head = parse_json(text, path)?;
        if head.format != FORMAT || head.version != VERSION {
            return Err(CalFileError::Version {
                path: path.to_string(),
                format: head.format,
                version: head.version,
            });
        }
        let file: CalFile = parse_json(text, path)?;
        file.calibration
            .validate()
            .map_err(|error| CalFileError::Invalid { path: path.to_string(), error })?;
        if let Some(s) = &file.temperature_sensor {
            s.validate().map_err(|error| CalFileError::Invalid { path: path.to_string(), error })?;
        }
        Ok(file)
    }

    /// Reads and validates a calibration file.
    pub fn load(path: &Path) -> Result<CalFile, CalFileError> {
        CalFile::from_json(&read_text(path)?, &path.display().to_string())
    }

    /// The file as pretty JSON.
    pub fn to_json(&self) -> String {
        // Serialising plain data with string keys cannot fail.
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// Writes the file atomically.
    pub fn save(&self, path: &Path) -> Result<(), CalFileError> {
        self.save_with(path, crate::output::write_atomic)
    }

    /// Writes the file atomically, leaving the flush to disk to [`crate::output::sync_all_deferred`].
    pub fn save_deferred(&self, path: &Path) -> Result<(), CalFileError> {
        self.save_with(path, crate::output::write_atomic_deferred)
    }

    fn save_with(
        &self,
        path: &Path,
        write: fn(&Path, &[u8]) -> std::io::Result<()>,
    ) -> Result<(), CalFileError> {
        let mut text = self.to_json();
        text.push('\n');
        write(path, text.as_bytes()).map_err(|source| FileError::io(path, source).into())
    }
}

impl CalFile {
    /// Records a verdict in the file (see [`CalFile::acceptance`]).
    pub fn set_verdict(&mut self, verdict: &crate::acceptance::Verdict) {
        self.acceptance = Some(serde_json::json!({
            "verdict": verdict.word(),
            "reasons": verdict.reasons(),
            "checks": verdict.checks,
        }));
    }

    /// Whether the file records a failed acceptance verdict.
    pub fn failed_acceptance(&self) -> bool {
        self.acceptance.as_ref().and_then(|a| a.get("verdict")).and_then(|v| v.as_str()) == Some("FAIL")
    }

    /// The fixed-point tables of this unit: the calibration's, with a temperature-sensor table when the
    /// file describes a raw temperature channel (every code of the channel's converter, converted by
    /// firmware-lib's sensor code in f64).
    pub fn fixed_tables(&self, opts: &TableOptions) -> Result<FixedTables, TableError> {
        self.with_sensor_channel(|channel| crate::tables::build(&self.calibration, channel, opts))
            .map_err(TableError::Calibration)?
    }

    /// °C of a raw temperature-channel code as the fit reads chamber data: firmware-lib's sensor code in
    /// f64. [`logtrim::Error::NotCalibrated`] when the file describes no raw channel (a unit that reads °C).
    pub fn chamber_celsius(&self, code: u32) -> Result<f64, logtrim::Error> {
        match &self.temperature_sensor {
            Some(s) => s.celsius_f64(code),
            None => Err(logtrim::Error::NotCalibrated),
        }
    }

    /// °C of a raw temperature-channel code as the unit's firmware reads it: firmware-lib's sensor code in
    /// f32 (what `apply` uses for readings). [`logtrim::Error::NotCalibrated`] without a raw channel.
    pub fn firmware_celsius(&self, code: u32) -> Result<f64, logtrim::Error> {
        match &self.temperature_sensor {
            Some(s) => s.celsius(code).map(f64::from),
            None => Err(logtrim::Error::NotCalibrated),
        }
    }

    /// Calls `f` with the file's raw temperature channel: every code of the channel's converter with its
    /// temperature by firmware-lib's sensor code in f64, or `None` for a unit that reads °C. An error if the
    /// channel's converter has no valid code range.
    pub fn with_sensor_channel<R>(
        &self,
        f: impl FnOnce(Option<&TemperatureChannel<'_>>) -> R,
    ) -> Result<R, logtrim::Error> {
        match &self.temperature_sensor {
            None => Ok(f(None)),
            Some(sensor) => {
                let max = sensor.divider.max_code()?;
                let celsius = |code: u32| sensor.celsius_f64(code);
                Ok(f(Some(&TemperatureChannel { codes: 0..=max, celsius: &celsius })))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_refusals() {
        let cal = Calibration::nominal(16, 32768.0, 2000.0, 25.0);
        let f = CalFile::new(cal, Some("SN-1".into()));
        let text = f.to_json();
        let back = CalFile::from_json(&text, "mem").unwrap();
        assert_eq!(back, f);
        let other = text.replace("\"version\": 1", "\"version\": 99");
        assert!(matches!(CalFile::from_json(&other, "mem"), Err(CalFileError::Version { version: 99, .. })));
        let typo = text.replace("\"unit\"", "\"unti\"");
        assert!(matches!(CalFile::from_json(&typo, "mem"), Err(CalFileError::File(FileError::Json { .. }))));
        let bad = text.replace("\"bits\": 16", "\"bits\": 0");
        assert!(matches!(CalFile::from_json(&bad, "mem"), Err(CalFileError::Invalid { .. })));
    }

    #[test]
    fn unknown_fields_are_refused_at_every_level() {
        // A typo such as `extrapolate_k` inside `calibration` once passed every verb silently.
        let mut f = CalFile::new(Calibration::nominal(16, 32768.0, 2000.0, 25.0), Some("SN-1".into()));
        f.temperature_sensor = Some(logtrim::TemperatureSensor {
            element: logtrim::SensorElement::NtcBeta(logtrim::Beta {
                r0_ohm: 1e4,
                t0_c: 25.0,
                beta_k: 3950.0,
            }),
            divider: logtrim::Divider::ratiometric(logtrim::Placement::LowSide, 1e4, 12),
            min_c: -40.0,
            max_c: 125.0,
        });
        let text = f.to_json();
        assert!(CalFile::from_json(&text, "C.json").is_ok());
        for (from, to) in [
            ("\"extrapolation_k\"", "\"extrapolate_k\""),
            ("\"min_sensitivity\"", "\"min_sensitivty\""),
            ("\"rail_margin\"", "\"rail_margins\""),
            ("\"ln_beta0\"", "\"ln_beta_0\""),
            ("\"x_half_span\"", "\"x_halfspan\""),
            ("\"t_center_c\"", "\"t_centre_c\""),
            ("\"beta_k\"", "\"beta\""),
            ("\"open_margin\"", "\"open_margn\""),
        ] {
            assert!(text.contains(from), "{from}");
            let typo = text.replacen(from, to, 1);
            let e = CalFile::from_json(&typo, "C.json").unwrap_err().to_string();
            let field = to.trim_matches('"');
            assert!(e.starts_with("C.json: line ") && e.contains(&format!("unknown field `{field}`")), "{e}");
        }
    }
}
