//! Fitting units from chamber data: reading a file or a folder of files into one job per unit, fitting one
//! unit to its calibration file, and production-line batches that fit many units in parallel, each to its
//! own calibration file and image.
//!
//! A unit that fails never stops the others. Every unit is judged against the product's acceptance limits
//! ([`crate::acceptance`]): a unit that passes gets `SERIAL.json` and its image; a unit that was fitted but
//! failed gets `SERIAL.json` marked `FAIL` in the file and no image; a unit that could not be calibrated
//! (unreadable data, a refused fit) gets no file. A unit's files are written as a group that appears
//! together or not at all ([`crate::output::write_group_deferred`]), and files of the unit from an earlier
//! run that this run does not write again are removed. Serials that would share a file name are refused
//! before anything is written ([`check_serials`]). The batch ends with `summary.csv` and `summary.json`,
//! one [`UnitRecord`] per unit.
//!
//! Units of one product share a design, so the model size is chosen once per batch, as a product's model
//! is chosen once on its first units: cross-validation on up to [`PILOT_UNITS`] pilot units, the size they
//! choose most often (the larger on a tie) is then fitted to every unit, and each unit is still
//! cross-validated with it for its own verdict.

use std::path::{Path, PathBuf};

use logtrim::sensor::TemperatureSensor;
use rayon::prelude::*;

use serde::Serialize;

use crate::acceptance::{judge, AcceptanceLimits, Check, Verdict};
use crate::calfile::CalFile;
use crate::data::{read_calibration_file, CalData, DataError, ReadOptions, RowError};
use crate::file_error::FileError;
use crate::fit::model::Spec;
use crate::fit::{fit, FitData, FitError, FitOptions, FitOutcome};
use crate::image_file::ImageFormat;
use crate::progress::{Counter, OnProgress};
use crate::tables::TableOptions;

/// Units whose cross-validation picks the batch's model size.
pub const PILOT_UNITS: usize = 8;

/// One unit to fit.
#[derive(Debug, Clone)]
pub struct UnitJob {
    /// The unit's serial.
    pub serial: String,
    /// Its calibration rows.
    pub data: FitData,
    /// Why its data could not be read (a file of a folder batch): the unit is then reported, not fitted.
    pub unreadable: Option<String>,
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
        // A file that cannot be read is a unit that cannot be calibrated: it stops no other.
        for f in files {
            if let Err(e) = add(&f, &mut out) {
                let stem = f.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
                if how.unit.is_none_or(|u| u == stem) {
                    let data = FitData { source: f.display().to_string(), ..FitData::default() };
                    out.jobs.push(UnitJob { serial: stem, data, unreadable: Some(e.to_string()) });
                }
            }
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
        return vec![UnitJob { serial: stem.to_string(), data: rows, unreadable: None }];
    }
    data.units
        .iter()
        .enumerate()
        .filter(|(_, s)| only.is_none_or(|u| u == s.as_str()))
        .map(|(i, s)| UnitJob {
            serial: s.clone(),
            data: FitData { source: data.path.clone(), ..FitData::from_rows(&data.rows, Some(i as u32)) },
            unreadable: None,
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

/// Two units of a batch whose serials would share a file name.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("units {first:?} ({first_source}) and {second:?} ({second_source}) would share the file name {stem:?} (serials are made safe for file names and compared without regard to case): give them distinct serials")]
pub struct SerialCollision {
    /// The first unit's serial.
    pub first: String,
    /// Where it came from.
    pub first_source: String,
    /// The second unit's serial.
    pub second: String,
    /// Where it came from.
    pub second_source: String,
    /// The shared file name stem.
    pub stem: String,
}

/// Refuses a batch whose serials collide after [`file_stem`], compared case-insensitively (`A/B` and
/// `A_B`, `XéY` and `X_Y`, `dup.csv` and `dup.CSV`, a serial repeated): no two units may share an output or
/// temporary path.
pub fn check_serials(jobs: &[UnitJob]) -> Result<(), SerialCollision> {
    let mut seen: std::collections::HashMap<String, usize> = Default::default();
    for (i, j) in jobs.iter().enumerate() {
        let key = file_stem(&j.serial).to_lowercase();
        if let Some(&k) = seen.get(&key) {
            let a = &jobs[k];
            return Err(SerialCollision {
                first: a.serial.clone(),
                first_source: a.data.source.clone(),
                second: j.serial.clone(),
                second_source: j.data.source.clone(),
                stem: file_stem(&j.serial),
            });
        }
        seen.insert(key, i);
    }
    Ok(())
}

/// How a batch writes each unit's image.
#[derive(Debug, Clone, PartialEq)]
pub struct ImageOptions {
    /// Raw binary (`SERIAL.bin`) or Intel HEX (`SERIAL.hex`).
    pub format: ImageFormat,
    /// The image's address, for Intel HEX.
    pub base_address: u32,
    /// Bytes per Intel HEX data record.
    pub record_len: usize,
    /// The fixed-point tables' sizes; `None` leaves the tables out (an f32-only image).
    pub tables: Option<TableOptions>,
}

impl Default for ImageOptions {
    fn default() -> Self {
        ImageOptions {
            format: ImageFormat::Bin,
            base_address: 0,
            record_len: 16,
            tables: Some(TableOptions::default()),
        }
    }
}

impl ImageOptions {
    fn extension(&self) -> &'static str {
        match self.format {
            ImageFormat::Bin => "bin",
            ImageFormat::Hex => "hex",
        }
    }
}

/// Everything a batch needs besides its units.
#[derive(Debug, Clone)]
pub struct BatchOptions<'a> {
    /// The fit (its model size fixed by the batch's pilots when left open).
    pub fit: FitOptions,
    /// The temperature channel's description, stored in each calibration file.
    pub sensor: Option<&'a TemperatureSensor>,
    /// The product's acceptance limits.
    pub limits: AcceptanceLimits,
    /// How images are written.
    pub image: ImageOptions,
    /// The time every file is stamped with, seconds since the Unix epoch.
    pub created_unix_s: u64,
}

/// One unit's record: what a production line files for it, in the batch summary (one row of
/// `summary.csv`, one entry of `summary.json`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitRecord {
    /// The unit's serial.
    pub serial: String,
    /// The file its chamber data came from.
    pub source: String,
    /// `PASS`, `FAIL` (fitted, but failed acceptance) or `ERROR` (could not be calibrated).
    pub verdict: &'static str,
    /// Why it did not pass, in words and figures (empty for a pass).
    pub reasons: String,
    /// The model size fitted.
    pub model: Option<String>,
    /// The worst set-point's rms error over its noise.
    pub worst_residual_ratio: Option<f64>,
    /// The worst set-point's rms error in x, nepers.
    pub worst_rms_np: Option<f64>,
    /// The cross-validated rms error in x, nepers.
    pub cv_rms_np: Option<f64>,
    /// The cross-validated rms error over the noise floor.
    pub cv_ratio: Option<f64>,
    /// The noise floor in x, nepers.
    pub noise_floor_np: Option<f64>,
    /// The converter's noise, LSB rms.
    pub noise_codes_rms: Option<f64>,
    /// Rows in the chamber data.
    pub rows: usize,
    /// Rows set aside.
    pub rows_set_aside: usize,
    /// Rows set aside by reason, `reason:count` `;`-separated.
    pub set_aside_by_reason: String,
    /// Rows the shipped calibration refuses (firmware f32 path).
    pub rows_refused: usize,
    /// The calibrated temperature range, °C.
    pub temp_min_c: Option<f64>,
    /// The calibrated temperature range, °C.
    pub temp_max_c: Option<f64>,
    /// The calibrated ratio range.
    pub ratio_min: Option<f64>,
    /// The calibrated ratio range.
    pub ratio_max: Option<f64>,
    /// The calibration file written (also for a unit that failed acceptance: it is marked in the file).
    pub calibration_file: Option<String>,
    /// The image written (only for a unit that passed).
    pub image_file: Option<String>,
    /// The image's CRC-32, `0x…`.
    pub image_crc: Option<String>,
    /// Every acceptance check, with its figure and limit (JSON summary only).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub checks: Vec<Check>,
}

impl UnitRecord {
    /// The record of a unit that could not be calibrated.
    pub fn error(serial: &str, source: &str, rows: usize, why: String) -> UnitRecord {
        UnitRecord {
            serial: serial.to_string(),
            source: source.to_string(),
            verdict: "ERROR",
            reasons: why,
            model: None,
            worst_residual_ratio: None,
            worst_rms_np: None,
            cv_rms_np: None,
            cv_ratio: None,
            noise_floor_np: None,
            noise_codes_rms: None,
            rows,
            rows_set_aside: 0,
            set_aside_by_reason: String::new(),
            rows_refused: 0,
            temp_min_c: None,
            temp_max_c: None,
            ratio_min: None,
            ratio_max: None,
            calibration_file: None,
            image_file: None,
            image_crc: None,
            checks: vec![],
        }
    }

    /// The record of a fitted unit and its verdict (no files yet).
    pub fn of_fit(serial: &str, source: &str, out: &FitOutcome, verdict: &Verdict) -> UnitRecord {
        let s = &out.screening;
        let worst = out
            .setpoints
            .iter()
            .filter(|p| p.residual_ratio().is_finite())
            .max_by(|a, b| a.residual_ratio().total_cmp(&b.residual_ratio()));
        let cv = out.chosen_cv().map(|c| c.rms);
        let mut by: std::collections::BTreeMap<&str, usize> = Default::default();
        for r in &s.set_aside {
            *by.entry(r.reason.name()).or_default() += 1;
        }
        let c = &out.calibration;
        UnitRecord {
            serial: serial.to_string(),
            source: source.to_string(),
            verdict: verdict.word(),
            reasons: verdict.reasons(),
            model: Some(out.chosen.to_arg()),
            worst_residual_ratio: worst.map(|p| p.residual_ratio()),
            worst_rms_np: out.setpoints.iter().map(|p| p.rms_np).filter(|v| v.is_finite()).reduce(f64::max),
            cv_rms_np: cv,
            cv_ratio: cv.zip(out.cv_noise_np).map(|(a, b)| a / b),
            noise_floor_np: out.noise_floor_np,
            noise_codes_rms: s.noise.map(|n| n.codes_rms),
            rows: s.rows,
            rows_set_aside: s.set_aside.len(),
            set_aside_by_reason: by.iter().map(|(k, v)| format!("{k}:{v}")).collect::<Vec<_>>().join(";"),
            rows_refused: s.refused.len(),
            temp_min_c: Some(f64::from(c.temperature.min_c)),
            temp_max_c: Some(f64::from(c.temperature.max_c)),
            ratio_min: Some(f64::from(c.x_range.min).exp()),
            ratio_max: Some(f64::from(c.x_range.max).exp()),
            calibration_file: None,
            image_file: None,
            image_crc: None,
            checks: verdict.checks.clone(),
        }
    }
}

/// What became of one unit of a batch: its record, and its fit (for a report) when it was fitted.
#[derive(Debug, Clone)]
pub struct UnitResult {
    /// The unit's record.
    pub record: UnitRecord,
    /// The fit and the calibration file, when the unit was fitted.
    pub fitted: Option<Box<(FitOutcome, CalFile)>>,
}

/// The files of a unit in `dir`: calibration file, image (either format) and nothing else.
fn unit_paths(dir: &Path, serial: &str) -> [PathBuf; 3] {
    let stem = file_stem(serial);
    [dir.join(format!("{stem}.json")), dir.join(format!("{stem}.bin")), dir.join(format!("{stem}.hex"))]
}

/// Fits one unit of a batch, judges it and writes its files into `dir`: `SERIAL.json` always when it was
/// fitted (marked `FAIL` in the file when it failed acceptance), and `SERIAL.bin` or `SERIAL.hex` only when
/// it passed. The files of a unit appear together or not at all. Files of the unit from an earlier run that
/// this run does not write again are removed, so a unit that fails on a re-run keeps no stale image or
/// calibration.
pub fn fit_unit(job: &UnitJob, opts: &BatchOptions<'_>, dir: &Path) -> UnitResult {
    let src = job.data.source.as_str();
    let n = job.data.len();
    let paths = unit_paths(dir, &job.serial);
    let clear = |keep: &[&Path]| -> Result<(), String> {
        for p in paths.iter().filter(|p| !keep.contains(&p.as_path())) {
            match std::fs::remove_file(p) {
                Err(e) if e.kind() != std::io::ErrorKind::NotFound => {
                    return Err(format!("{}: removing the file of an earlier run: {e}", p.display()))
                }
                _ => {}
            }
        }
        Ok(())
    };
    let error = |why: String| {
        let why = match clear(&[]) {
            Ok(()) => why,
            Err(e) => format!("{why}; {e}"),
        };
        UnitResult { record: UnitRecord::error(&job.serial, src, n, why), fitted: None }
    };
    if let Some(why) = &job.unreadable {
        return error(why.clone());
    }
    let out = match fit(&job.data, &opts.fit) {
        Ok(o) => o,
        Err(e) => return error(e.to_string()),
    };
    let mut file = CalFile::of_fit(&out, Some(job.serial.clone()), opts.sensor.copied(), opts.created_unix_s);
    let verdict = match judge(&out, &file, &opts.limits) {
        Ok(v) => v,
        Err(e) => return error(e.to_string()),
    };
    file.set_verdict(&verdict);
    let mut record = UnitRecord::of_fit(&job.serial, src, &out, &verdict);
    let json_path = paths[0].clone();
    let mut text = file.to_json();
    text.push('\n');
    let mut group = vec![(json_path.clone(), text.into_bytes())];
    let image_path = dir.join(format!("{}.{}", file_stem(&job.serial), opts.image.extension()));
    if verdict.passed {
        let image =
            crate::image_file::build_image_with(&file, Some(&job.serial), 1, opts.image.tables.as_ref())
                .map_err(|e| e.to_string())
                .and_then(|bytes| {
                    let crc = logtrim::Image::parse(&bytes)
                        .map(|i| i.crc())
                        .map_err(|e| format!("built image refused: {e}"))?;
                    let content = crate::image_file::encode_file(
                        &bytes,
                        opts.image.format,
                        opts.image.base_address,
                        opts.image.record_len,
                    )
                    .map_err(|e| e.to_string())?;
                    Ok((crc, content))
                });
        match image {
            Ok((crc, content)) => {
                record.image_crc = Some(format!("{crc:#010x}"));
                group.push((image_path.clone(), content));
            }
            Err(why) => return error(format!("{}: {why}", image_path.display())),
        }
    }
    let keep: Vec<&Path> = group.iter().map(|(p, _)| p.as_path()).collect();
    if let Err(e) = clear(&keep) {
        return error(e);
    }
    if let Err(e) = crate::output::write_group_deferred(&group) {
        return error(format!("{}: {e}", dir.display()));
    }
    record.calibration_file = Some(json_path.display().to_string());
    if verdict.passed {
        record.image_file = Some(image_path.display().to_string());
    }
    UnitResult { record, fitted: Some(Box::new((out, file))) }
}

/// Chooses the batch's model size by cross-validation on up to [`PILOT_UNITS`] units: the size chosen
/// most often, the one with more parameters on a tie. `None` if no pilot unit could be fitted.
pub fn choose_spec(jobs: &[UnitJob], opt: &FitOptions) -> Option<Spec> {
    let readable: Vec<&UnitJob> = jobs.iter().filter(|j| j.unreadable.is_none()).take(PILOT_UNITS).collect();
    let pilots: Vec<Spec> = readable
        .par_iter()
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

/// A batch's result: the model size used, every unit's result in the order of the jobs, and the summary
/// files written.
#[derive(Debug, Clone)]
pub struct BatchOutcome {
    /// The model size the batch fitted (its pilots' choice, or the options').
    pub spec: Option<Spec>,
    /// Every unit, in the order of the jobs.
    pub units: Vec<UnitResult>,
    /// `summary.csv` and `summary.json`.
    pub summary: [PathBuf; 2],
}

/// Fits every unit in parallel with the options' model size, or the batch's ([`choose_spec`]) when the
/// options leave it open, judges each against the limits and writes its files into `dir`, then the
/// batch's `summary.csv` and `summary.json`. Serials that would share a file name are refused before
/// anything is written. `progress` counts the units fitted.
pub fn fit_units(
    jobs: &[UnitJob],
    opts: &BatchOptions<'_>,
    dir: &Path,
    progress: OnProgress<'_>,
) -> Result<BatchOutcome, BatchError> {
    check_serials(jobs)?;
    let spec = opts.fit.spec.or_else(|| choose_spec(jobs, &opts.fit));
    // Without a size (no pilot could be fitted) every unit runs its own search and reports its own error.
    let opts = BatchOptions { fit: FitOptions { spec, ..opts.fit.clone() }, ..opts.clone() };
    let counter = Counter::start(jobs.len(), progress);
    let mut units = jobs
        .par_iter()
        .map(|job| {
            let r = fit_unit(job, &opts, dir);
            counter.step();
            r
        })
        .collect::<Vec<UnitResult>>();
    // One flush of everything written; a unit whose files may not have reached the disk is failed.
    if let Err(e) = crate::output::sync_all_deferred(dir) {
        let why = format!("{}: flushing to disk failed: {e}", dir.display());
        for u in units.iter_mut() {
            u.record.verdict = "ERROR";
            u.record.reasons = why.clone();
        }
    }
    let summary = write_summary(&units, dir)?;
    Ok(BatchOutcome { spec, units, summary })
}

/// Why a batch could not run or could not write its summary.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum BatchError {
    /// Two serials would share a file name.
    #[error(transparent)]
    Collision(#[from] SerialCollision),
    /// The summary could not be written.
    #[error(transparent)]
    File(#[from] FileError),
}

/// `summary.csv` (one row per unit, the columns of [`UnitRecord`] but its checks) and `summary.json`
/// (every record with its checks), written atomically into `dir`.
pub fn write_summary(units: &[UnitResult], dir: &Path) -> Result<[PathBuf; 2], FileError> {
    let csv_path = dir.join("summary.csv");
    let json_path = dir.join("summary.json");
    let mut w = csv::Writer::from_writer(Vec::new());
    let opt =
        |v: Option<f64>| v.map(|v| format!("{:.6e}", crate::output::number::Num(v))).unwrap_or_default();
    let head = [
        "serial",
        "source",
        "verdict",
        "reasons",
        "model",
        "worst_residual_ratio",
        "worst_rms_np",
        "cv_rms_np",
        "cv_ratio",
        "noise_floor_np",
        "noise_codes_rms",
        "rows",
        "rows_set_aside",
        "set_aside_by_reason",
        "rows_refused",
        "temp_min_c",
        "temp_max_c",
        "ratio_min",
        "ratio_max",
        "calibration_file",
        "image_file",
        "image_crc",
    ];
    let io = |e: csv::Error| FileError::io(&csv_path, std::io::Error::other(e.to_string()));
    w.write_record(head).map_err(io)?;
    for u in units {
        let r = &u.record;
        w.write_record([
            r.serial.clone(),
            r.source.clone(),
            r.verdict.to_string(),
            r.reasons.clone(),
            r.model.clone().unwrap_or_default(),
            opt(r.worst_residual_ratio),
            opt(r.worst_rms_np),
            opt(r.cv_rms_np),
            opt(r.cv_ratio),
            opt(r.noise_floor_np),
            opt(r.noise_codes_rms),
            r.rows.to_string(),
            r.rows_set_aside.to_string(),
            r.set_aside_by_reason.clone(),
            r.rows_refused.to_string(),
            opt(r.temp_min_c),
            opt(r.temp_max_c),
            opt(r.ratio_min),
            opt(r.ratio_max),
            r.calibration_file.clone().unwrap_or_default(),
            r.image_file.clone().unwrap_or_default(),
            r.image_crc.clone().unwrap_or_default(),
        ])
        .map_err(io)?;
    }
    let csv_bytes =
        w.into_inner().map_err(|e| FileError::io(&csv_path, std::io::Error::other(e.to_string())))?;
    let records: Vec<&UnitRecord> = units.iter().map(|u| &u.record).collect();
    let json = crate::file_error::to_json_line(&serde_json::json!({
        "format": "logtrim-batch-summary",
        "version": 1,
        "generator": format!("logtrim {}", env!("CARGO_PKG_VERSION")),
        "units": records,
    }));
    crate::output::write_atomic(&csv_path, &csv_bytes).map_err(|e| FileError::io(&csv_path, e))?;
    crate::output::write_atomic(&json_path, json.as_bytes()).map_err(|e| FileError::io(&json_path, e))?;
    Ok([csv_path, json_path])
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
