//! Fitting units from chamber data: reading a file or a folder of files into one job per unit, fitting one
//! unit to its calibration file, and production-line batches that fit many units in parallel, each to its
//! own calibration file and image.
//!
//! A unit that fails never stops the others and never leaves a file behind: each output is written to a
//! temporary file and renamed, and a unit whose image cannot be written loses its calibration file too.
//!
//! Units of one product share a design, so the model size is chosen once per batch, as a product's model
//! is chosen once on its first units: cross-validation on up to [`PILOT_UNITS`] pilot units, the size they
//! choose most often (the larger on a tie) is then fitted to every unit. Each unit's fit is checked against
//! its own noise floor, and a unit whose worst set-point rms exceeds [`SUSPECT_FACTOR`] times its noise
//! floor is flagged for a look (it may need a model of its own: fit it alone).

use std::path::{Path, PathBuf};

use logtrim::sensor::TemperatureSensor;
use rayon::prelude::*;

use crate::calfile::CalFile;
use crate::data::{read_calibration_file, CalData, DataError, ReadOptions, RowError};
use crate::file_error::FileError;
use crate::fit::model::Spec;
use crate::fit::{fit, FitData, FitError, FitOptions, FitOutcome};
use crate::progress::{Counter, OnProgress};

/// Units whose cross-validation picks the batch's model size.
pub const PILOT_UNITS: usize = 8;
/// A unit whose worst set-point rms exceeds this multiple of its noise floor is flagged.
pub const SUSPECT_FACTOR: f64 = 2.5;

/// One unit to fit.
#[derive(Debug, Clone)]
pub struct UnitJob {
    /// The unit's serial.
    pub serial: String,
    /// Its calibration rows.
    pub data: FitData,
}

/// How chamber data are read.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChamberRead<'a> {
    /// Resolution of the log channel's ADC, bits.
    pub adc_bits: u8,
    /// Skip rows with bad values (each is kept in [`ChamberData::skipped`]) instead of refusing the file.
    pub skip_bad_rows: bool,
    /// The temperature channel's description, for data with a `temp_code` column: codes are converted by
    /// firmware-lib's sensor code in f64.
    pub sensor: Option<&'a TemperatureSensor>,
    /// Only this unit (by serial) of data with a `unit` column, or of a folder (by file name).
    pub unit: Option<&'a str>,
}

/// Chamber data split into units.
#[derive(Debug, Clone)]
pub struct ChamberData {
    /// One job per unit, in the order of the files and of first appearance in each.
    pub jobs: Vec<UnitJob>,
    /// Whether the input was a folder (a batch, even of one unit).
    pub folder: bool,
    /// The bad rows skipped, per file (only with [`ChamberRead::skip_bad_rows`]).
    pub skipped: Vec<(String, Vec<RowError>)>,
}

/// Why chamber data could not be read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ChamberError {
    /// A file could not be read, or its rows are bad.
    #[error(transparent)]
    Data(#[from] DataError),
    /// The folder could not be listed.
    #[error(transparent)]
    File(#[from] FileError),
    /// The folder holds no CSV file.
    #[error("{path}: no .csv files in this folder")]
    NoFiles {
        /// The folder.
        path: String,
    },
    /// The unit asked for has no rows in the file.
    #[error("{path}: no rows of unit {unit:?}")]
    NoSuchUnit {
        /// The file.
        path: String,
        /// The serial asked for.
        unit: String,
    },
}

/// Reads chamber data for fitting: a CSV file (one unit, or several with a `unit` column), or a folder of
/// CSV files, one unit each, whose file name is the serial unless a `unit` column names it.
pub fn read_chamber_data(input: &Path, how: &ChamberRead<'_>) -> Result<ChamberData, ChamberError> {
    let sensor = how.sensor;
    let conv = move |code: u32| -> Result<f64, logtrim::Error> {
        match sensor {
            Some(s) => s.celsius_f64(code),
            None => Err(logtrim::Error::NotCalibrated),
        }
    };
    let opts = ReadOptions {
        adc_bits: how.adc_bits,
        skip_bad_rows: how.skip_bad_rows,
        temp_converter: sensor.map(|_| &conv as &dyn Fn(u32) -> Result<f64, logtrim::Error>),
    };
    let mut out = ChamberData { jobs: Vec::new(), folder: input.is_dir(), skipped: Vec::new() };
    let add = |path: &Path, out: &mut ChamberData| -> Result<CalData, ChamberError> {
        let data = read_calibration_file(path, &opts)?;
        if !data.skipped.is_empty() {
            out.skipped.push((data.path.clone(), data.skipped.clone()));
        }
        let stem = path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
        out.jobs.extend(unit_jobs(&data, &stem, how.unit).into_iter().map(|mut j| {
            if let Some(s) = sensor {
                j.data = j.data.with_sensor(s);
            }
            j
        }));
        Ok(data)
    };
    if out.folder {
        let mut files: Vec<PathBuf> = std::fs::read_dir(input)
            .map_err(|source| FileError::io(input, source))?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x.eq_ignore_ascii_case("csv")))
            .collect();
        files.sort();
        if files.is_empty() {
            return Err(ChamberError::NoFiles { path: input.display().to_string() });
        }
        for f in files {
            add(&f, &mut out)?;
        }
    } else {
        let data = add(input, &mut out)?;
        if let (Some(u), true) = (how.unit, out.jobs.is_empty()) {
            return Err(ChamberError::NoSuchUnit { path: data.path, unit: u.to_string() });
        }
    }
    Ok(out)
}

/// The units of one file's data: every unit of a `unit` column, or the file's one unit named `stem`.
fn unit_jobs(data: &CalData, stem: &str, only: Option<&str>) -> Vec<UnitJob> {
    if data.units.is_empty() {
        if only.is_some_and(|u| u != stem) {
            return vec![];
        }
        let rows = FitData { source: data.path.clone(), ..FitData::from_rows(&data.rows, None) };
        return vec![UnitJob { serial: stem.to_string(), data: rows }];
    }
    data.units
        .iter()
        .enumerate()
        .filter(|(_, s)| only.is_none_or(|u| u == s.as_str()))
        .map(|(i, s)| UnitJob {
            serial: s.clone(),
            data: FitData { source: data.path.clone(), ..FitData::from_rows(&data.rows, Some(i as u32)) },
        })
        .collect()
}

/// Fits one unit and makes its calibration file (with the serial, unless it is empty, and the sensor
/// description), stamped `created_unix_s`.
pub fn fit_one(
    job: &UnitJob,
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    created_unix_s: u64,
) -> Result<(FitOutcome, CalFile), FitError> {
    let out = fit(&job.data, opt)?;
    let unit = (!job.serial.is_empty()).then(|| job.serial.clone());
    let file = CalFile::of_fit(&out, unit, sensor.copied(), created_unix_s);
    Ok((out, file))
}

/// What became of one unit.
#[derive(Debug, Clone)]
pub struct UnitResult {
    /// The unit's serial.
    pub serial: String,
    /// The files written (calibration, image), or why the unit failed.
    pub outcome: Result<(PathBuf, PathBuf), String>,
    /// The worst set-point rms error of the fit, nepers (when fitted).
    pub worst_rms_np: Option<f64>,
    /// The unit's noise floor (scatter of repeats), nepers, where the data allow it.
    pub noise_floor_np: Option<f64>,
    /// A warning for the test engineer (e.g. a fit well above the noise floor).
    pub note: Option<String>,
}

/// A serial made safe as a file name: letters, digits, `.`, `_` and `-` are kept, anything else becomes
/// `_`; an empty serial becomes `unit`.
pub fn file_stem(serial: &str) -> String {
    let s: String = serial
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-') { c } else { '_' })
        .collect();
    let s = s.trim_start_matches('.').to_string();
    if s.is_empty() {
        "unit".to_string()
    } else {
        s
    }
}

/// Fits one unit of a batch and writes `DIR/<serial>.json` and `DIR/<serial>.bin`.
pub fn fit_unit(
    job: &UnitJob,
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    out_dir: &Path,
    created_unix_s: u64,
) -> UnitResult {
    let fail = |why: String| UnitResult {
        serial: job.serial.clone(),
        outcome: Err(why),
        worst_rms_np: None,
        noise_floor_np: None,
        note: None,
    };
    let out = match fit(&job.data, opt) {
        Ok(o) => o,
        Err(e) => return fail(e.to_string()),
    };
    let worst = out.setpoints.iter().map(|s| s.rms_np).fold(f64::NAN, f64::max);
    let note = match out.noise_floor_np {
        Some(f) if worst > SUSPECT_FACTOR * f => Some(format!(
            "worst set-point rms {worst:.2e} Np is {:.1}x the noise floor {f:.2e} Np: check the unit, or fit it alone",
            worst / f
        )),
        _ => None,
    };
    let file = CalFile::of_fit(&out, Some(job.serial.clone()), sensor.copied(), created_unix_s);
    let stem = file_stem(&job.serial);
    let json = out_dir.join(format!("{stem}.json"));
    let bin = out_dir.join(format!("{stem}.bin"));
    if let Err(e) = file.save_deferred(&json) {
        return fail(e.to_string());
    }
    // The image carries the fixed-point tables too, as `logtrim image` writes by default.
    let tables = crate::tables::TableOptions::default();
    let image = crate::image_file::build_image_with(&file, Some(&job.serial), 1, Some(&tables))
        .map_err(|e| e.to_string())
        .and_then(|bytes| {
            crate::output::write_atomic_deferred(&bin, &bytes).map_err(|e| format!("{}: {e}", bin.display()))
        });
    if let Err(why) = image {
        let _ = std::fs::remove_file(&json);
        return fail(why);
    }
    UnitResult {
        serial: job.serial.clone(),
        outcome: Ok((json, bin)),
        worst_rms_np: Some(worst),
        noise_floor_np: out.noise_floor_np,
        note,
    }
}

/// Chooses the batch's model size by cross-validation on up to [`PILOT_UNITS`] units: the size chosen
/// most often, the one with more parameters on a tie. `None` if no pilot unit could be fitted.
pub fn choose_spec(jobs: &[UnitJob], opt: &FitOptions) -> Option<Spec> {
    let pilots: Vec<Spec> = jobs
        .par_iter()
        .take(PILOT_UNITS)
        .filter_map(|j| fit(&j.data, &FitOptions { spec: None, ..opt.clone() }).ok().map(|o| o.chosen))
        .collect();
    let mut counts: Vec<(Spec, usize)> = Vec::new();
    for s in pilots {
        match counts.iter_mut().find(|(c, _)| *c == s) {
            Some((_, n)) => *n += 1,
            None => counts.push((s, 1)),
        }
    }
    counts.into_iter().max_by_key(|(s, n)| (*n, s.n_params() + s.residual_x * s.residual_t)).map(|(s, _)| s)
}

/// Fits every unit in parallel with the options' model size, or the batch's ([`choose_spec`]) when the
/// options leave it open; results come back in the order of `jobs`, with the size used. Every calibration
/// file is stamped `created_unix_s`; `progress` counts the units fitted.
pub fn fit_units(
    jobs: &[UnitJob],
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    out_dir: &Path,
    created_unix_s: u64,
    progress: OnProgress<'_>,
) -> (Option<Spec>, Vec<UnitResult>) {
    let spec = opt.spec.or_else(|| choose_spec(jobs, opt));
    // Without a size (no pilot could be fitted) every unit runs its own search and reports its own error.
    let opt = FitOptions { spec, ..opt.clone() };
    let counter = Counter::start(jobs.len(), progress);
    let results = jobs
        .par_iter()
        .map(|job| {
            let r = fit_unit(job, &opt, sensor, out_dir, created_unix_s);
            counter.step();
            r
        })
        .collect::<Vec<UnitResult>>();
    // One flush of everything written; a unit whose files may not have reached the disk is failed.
    if let Err(e) = crate::output::sync_all_deferred(out_dir) {
        let why = format!("{}: flushing to disk failed: {e}", out_dir.display());
        let results = results.into_iter().map(|r| UnitResult { outcome: Err(why.clone()), ..r }).collect();
        return (spec, results);
    }
    (spec, results)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn serials_become_safe_file_names() {
        assert_eq!(file_stem("SN-0042"), "SN-0042");
        assert_eq!(file_stem("../../etc/passwd"), "_.._etc_passwd");
        assert_eq!(file_stem("a b/c"), "a_b_c");
        assert_eq!(file_stem(""), "unit");
        assert_eq!(file_stem("..."), "unit");
    }
}
