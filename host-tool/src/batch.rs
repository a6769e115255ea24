//! Production-line batches: fitting many units, each to its own calibration file and image, in parallel.
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

use indicatif::ProgressBar;
use logtrim::sensor::TemperatureSensor;
use rayon::prelude::*;

use crate::calfile::CalFile;
use crate::fit::model::Spec;
use crate::fit::{fit, FitData, FitOptions};

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

/// Fits one unit and writes `DIR/<serial>.json` and `DIR/<serial>.bin`.
pub fn fit_unit(
    job: &UnitJob,
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    out_dir: &Path,
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
    let mut file = CalFile::new(out.calibration, Some(job.serial.clone()));
    file.temperature_sensor = sensor.copied();
    file.fit = serde_json::to_value(&out).ok();
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
/// options leave it open; results come back in the order of `jobs`, with the size used.
pub fn fit_units(
    jobs: &[UnitJob],
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    out_dir: &Path,
    progress: Option<&ProgressBar>,
) -> (Option<Spec>, Vec<UnitResult>) {
    let spec = opt.spec.or_else(|| choose_spec(jobs, opt));
    // Without a size (no pilot could be fitted) every unit runs its own search and reports its own error.
    let opt = FitOptions { spec, ..opt.clone() };
    let results = jobs
        .par_iter()
        .map(|job| {
            let r = fit_unit(job, &opt, sensor, out_dir);
            if let Some(p) = progress {
                p.inc(1);
            }
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
