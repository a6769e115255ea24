//! Production-line batches: fitting many units, each to its own calibration file and image, in parallel.
//!
//! A unit that fails never stops the others and never leaves a file behind: each output is written to a
//! temporary file and renamed, and a unit whose image cannot be written loses its calibration file too.

use std::path::{Path, PathBuf};

use indicatif::ProgressBar;
use logtrim::sensor::TemperatureSensor;
use rayon::prelude::*;

use crate::calfile::CalFile;
use crate::fit::{fit, FitData, FitOptions};

/// One unit to fit.
#[derive(Debug, Clone)]
pub struct UnitJob {
    /// The unit's serial.
    pub serial: String,
    /// Its calibration rows.
    pub data: FitData,
}

/// What became of one unit.
#[derive(Debug, Clone)]
pub struct UnitResult {
    /// The unit's serial.
    pub serial: String,
    /// The files written (calibration, image), or why the unit failed.
    pub outcome: Result<(PathBuf, PathBuf), String>,
    /// The cross-validated rms error of the chosen model, nepers (when fitted).
    pub cv_rms_np: Option<f64>,
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

/// Fits one unit and writes `DIR/<serial>.json` and `DIR/<serial>.bin`.
pub fn fit_unit(
    job: &UnitJob,
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    out_dir: &Path,
) -> UnitResult {
    let fail = |why: String| UnitResult { serial: job.serial.clone(), outcome: Err(why), cv_rms_np: None };
    let out = match fit(&job.data, opt) {
        Ok(o) => o,
        Err(e) => return fail(e.to_string()),
    };
    let cv = out.cv.iter().find(|r| r.chosen).map(|r| r.rms);
    let mut file = CalFile::new(out.calibration, Some(job.serial.clone()));
    file.temperature_sensor = sensor.copied();
    file.fit = serde_json::to_value(&out).ok();
    let stem = file_stem(&job.serial);
    let json = out_dir.join(format!("{stem}.json"));
    let bin = out_dir.join(format!("{stem}.bin"));
    if let Err(e) = file.save(&json) {
        return fail(e.to_string());
    }
    let image =
        crate::image_file::build_image(&file, Some(&job.serial), 1).map_err(|e| e.to_string()).and_then(
            |bytes| crate::output::write_atomic(&bin, &bytes).map_err(|e| format!("{}: {e}", bin.display())),
        );
    if let Err(why) = image {
        let _ = std::fs::remove_file(&json);
        return fail(why);
    }
    UnitResult { serial: job.serial.clone(), outcome: Ok((json, bin)), cv_rms_np: cv }
}

/// Fits every unit in parallel; results come back in the order of `jobs`.
pub fn fit_units(
    jobs: &[UnitJob],
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    out_dir: &Path,
    progress: Option<&ProgressBar>,
) -> Vec<UnitResult> {
    jobs.par_iter()
        .map(|job| {
            let r = fit_unit(job, opt, sensor, out_dir);
            if let Some(p) = progress {
                p.inc(1);
            }
            r
        })
        .collect()
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
