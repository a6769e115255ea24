//! Acceptance limits that a quality engineer sets once for a product, and every unit's verdict against
//! them: PASS or FAIL, with each check in words and figures.
//!
//! # The limits file
//!
//! A small JSON file of logtrim's own (`schemas/acceptance.schema.json` describes it); every key but
//! `format` and `version` may be left out, and then takes the default below. A limit set to `null` is not
//! checked. Unknown keys are refused, so a typo is an error, not a limit silently not applied.
//!
//! ```json
//! {
//!   "format": "logtrim-acceptance",
//!   "version": 1,
//!   "product": "bench photometer, sample channel",
//!   "max_residual_ratio": 2.0,
//!   "max_cv_ratio": 2.0,
//!   "max_set_aside_share": 0.2,
//!   "required_temperature_c": { "min": 0.5, "max": 69.5 },
//!   "required_ratio": { "min": 0.001, "max": 100 },
//!   "min_sensitivity": 0.2,
//!   "verify_bound_lsb": 0.25
//! }
//! ```
//!
//! | key | default | a unit passes when |
//! |---|---|---|
//! | `max_residual_ratio` | 2.0 | at every set-point, the rms of the fitted rows' errors in x, each in units of its own noise (the unit's noise through the local slope), is at most this: about 1 for a fit that leaves only noise; with 40 rows a clean fit exceeds 1.4 about once in a thousand set-points |
//! | `max_cv_ratio` | 2.0 | the cross-validated rms error in x (leave one interior set-point out) is at most this many times the rms noise of the rows held out; units fitted with a fixed model size are cross-validated for this check; a unit fitted against a population from two set-points, which none can cross-validate, is judged by the population check instead |
//! | `max_set_aside_share` | 0.2 | at most this share of the rows was set aside (rails, stray temperatures, unsettled sweeps, glitches) |
//! | `required_temperature_c` | none | the calibrated temperature range covers `min … max` (°C). The end set-points jitter: give the span the product needs, a little inside them |
//! | `required_ratio` | none | the calibrated x range covers `ln min … ln max` (ratios I_sig/I_ref) |
//! | `min_sensitivity` | 0.1 | over the required (else calibrated) ratios and temperatures, the front end's sensitivity ∂code/∂x relative to ideal is at least this |
//! | `verify_bound_lsb` | none | `logtrim verify`'s exhaustive check of both firmware paths passes at this bound (LSB equivalents); slow, so off unless asked |
//!
//! A unit fitted against a population (`fit --population`) is also checked against it: the squared
//! Mahalanobis distance of its parameters (all but its own offset and slope) from the population's mean,
//! under the population's covariance, must lie within Hotelling's prediction limit for a lot of that many
//! units at 0.005 false alarms per unit (`population_distance`); a unit outside the population fails with
//! that reason, and its residuals are judged against its noise as every unit's are (`max_residual_ratio`).
//!
//! The defaults are loose enough that a clean chamber run of a healthy unit passes them with room (its
//! residual ratio is about 1.0, its cross-validation ratio about 1.0–1.3), and tight enough that a unit
//! whose model cannot follow it, or whose run lost a fifth of its rows, does not.

use serde::{Deserialize, Serialize};

use crate::calfile::CalFile;
use crate::file_error::{parse_json, read_text, FileError};
use crate::fit::FitOutcome;
use crate::output::number::Num;

/// The `format` of a limits file.
pub const FORMAT: &str = "logtrim-acceptance";
/// The version of the format this build reads.
pub const VERSION: u32 = 1;

/// A span that must be covered.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Span {
    /// Lower end.
    pub min: f64,
    /// Upper end.
    pub max: f64,
}

fn default_residual() -> Option<f64> {
    Some(2.0)
}
fn default_cv() -> Option<f64> {
    Some(2.0)
}
fn default_share() -> Option<f64> {
    Some(0.2)
}
fn default_sensitivity() -> Option<f64> {
    Some(0.1)
}
fn default_format() -> String {
    FORMAT.to_string()
}
fn default_version() -> u32 {
    VERSION
}

/// A product's acceptance limits (see the module docs for each key and its default).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AcceptanceLimits {
    /// Always [`FORMAT`].
    #[serde(default = "default_format")]
    pub format: String,
    /// [`VERSION`].
    #[serde(default = "default_version")]
    pub version: u32,
    /// What the limits are for (free text).
    #[serde(default)]
    pub product: String,
    /// Largest rms error over rms noise at any set-point.
    #[serde(default = "default_residual")]
    pub max_residual_ratio: Option<f64>,
    /// Largest cross-validated rms error over the noise floor.
    #[serde(default = "default_cv")]
    pub max_cv_ratio: Option<f64>,
    /// Largest share of rows set aside.
    #[serde(default = "default_share")]
    pub max_set_aside_share: Option<f64>,
    /// Temperatures the calibrated range must cover, °C.
    #[serde(default)]
    pub required_temperature_c: Option<Span>,
    /// Ratios the calibrated range must cover.
    #[serde(default)]
    pub required_ratio: Option<Span>,
    /// Lowest sensitivity relative to ideal over the required (else calibrated) ranges.
    #[serde(default = "default_sensitivity")]
    pub min_sensitivity: Option<f64>,
    /// Run `verify` at this bound, LSB equivalents.
    #[serde(default)]
    pub verify_bound_lsb: Option<f64>,
}

impl Default for AcceptanceLimits {
    fn default() -> Self {
        AcceptanceLimits {
            format: default_format(),
            version: default_version(),
            product: String::new(),
            max_residual_ratio: default_residual(),
            max_cv_ratio: default_cv(),
            max_set_aside_share: default_share(),
            required_temperature_c: None,
            required_ratio: None,
            min_sensitivity: default_sensitivity(),
            verify_bound_lsb: None,
        }
    }
}

/// Why a limits file could not be used.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LimitsError {
    /// The file could not be read or is not JSON of this shape.
    #[error(transparent)]
    File(#[from] FileError),
    /// Another format or an unknown version.
    #[error("{path}: format {format:?} version {version} is not acceptance limits this build reads (expected {FORMAT:?} version {VERSION})")]
    Version {
        /// The file.
        path: String,
        /// The format found.
        format: String,
        /// The version found.
        version: u32,
    },
    /// A limit is outside its valid range.
    #[error("{path}: {key} = {value}: expected {expected}")]
    Value {
        /// The file (or the option that set it).
        path: String,
        /// The key.
        key: &'static str,
        /// The value given.
        value: f64,
        /// What is valid.
        expected: &'static str,
    },
}

impl AcceptanceLimits {
    /// Parses and checks limits from JSON text; `path` names the source in errors.
    pub fn from_json(text: &str, path: &str) -> Result<AcceptanceLimits, LimitsError> {
        let l: AcceptanceLimits = parse_json(text, path)?;
        if l.format != FORMAT || l.version != VERSION {
            return Err(LimitsError::Version { path: path.into(), format: l.format, version: l.version });
        }
        l.check(path)?;
        Ok(l)
    }

    /// Reads and checks a limits file.
    pub fn load(path: &std::path::Path) -> Result<AcceptanceLimits, LimitsError> {
        AcceptanceLimits::from_json(&read_text(path)?, &path.display().to_string())
    }

    /// Checks every limit's range; `source` names where the limits came from.
    pub fn check(&self, source: &str) -> Result<(), LimitsError> {
        let bad =
            |key, value, expected| Err(LimitsError::Value { path: source.into(), key, value, expected });
        let positive = |v: Option<f64>| v.is_none_or(|v| v.is_finite() && v > 0.0);
        if !positive(self.max_residual_ratio) {
            return bad(
                "max_residual_ratio",
                self.max_residual_ratio.unwrap_or(f64::NAN),
                "a positive ratio",
            );
        }
        if !positive(self.max_cv_ratio) {
            return bad("max_cv_ratio", self.max_cv_ratio.unwrap_or(f64::NAN), "a positive ratio");
        }
        if let Some(v) = self.max_set_aside_share {
            if !(0.0..=1.0).contains(&v) {
                return bad("max_set_aside_share", v, "a share in 0..=1");
            }
        }
        if let Some(v) = self.min_sensitivity {
            if !(0.0..=1.0).contains(&v) {
                return bad("min_sensitivity", v, "a fraction of ideal in 0..=1");
            }
        }
        if let Some(v) = self.verify_bound_lsb {
            if !(v.is_finite() && v > 0.0) {
                return bad("verify_bound_lsb", v, "a positive bound in LSB");
            }
        }
        if let Some(s) = self.required_temperature_c {
            if !(s.min.is_finite() && s.max.is_finite() && s.min < s.max && s.min > -273.15) {
                return bad("required_temperature_c.max", s.max, "finite temperatures with min < max");
            }
        }
        if let Some(s) = self.required_ratio {
            if !(s.min.is_finite() && s.max.is_finite() && s.min > 0.0 && s.min < s.max) {
                return bad("required_ratio.max", s.max, "positive finite ratios with min < max");
            }
        }
        Ok(())
    }
}

/// One check of a unit against a limit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Check {
    /// The limit's key.
    pub name: &'static str,
    /// Whether the unit passed it.
    pub passed: bool,
    /// The unit's figure.
    pub value: f64,
    /// The limit.
    pub limit: f64,
    /// The check in words and figures.
    pub text: String,
}

/// A unit's verdict: PASS when every check passed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Verdict {
    /// Whether the unit passed.
    pub passed: bool,
    /// Every check made.
    pub checks: Vec<Check>,
}

impl Verdict {
    /// `PASS` or `FAIL`.
    pub fn word(&self) -> &'static str {
        if self.passed {
            "PASS"
        } else {
            "FAIL"
        }
    }

    /// The failed checks in words, `; `-separated (empty for a pass).
    pub fn reasons(&self) -> String {
        self.checks.iter().filter(|c| !c.passed).map(|c| c.text.as_str()).collect::<Vec<_>>().join("; ")
    }
}

/// Why the acceptance checks could not be made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum JudgeError {
    /// The verification asked for could not run.
    #[error("verify: {0}")]
    Verify(String),
}

/// Judges a fitted unit against `limits`. `file` is the unit's calibration file (for the verification,
/// which builds its fixed-point tables and runs when the limits ask for it).
pub fn judge(outcome: &FitOutcome, file: &CalFile, limits: &AcceptanceLimits) -> Result<Verdict, JudgeError> {
    let mut checks = Vec::new();
    let cal = &file.calibration;
    if let Some(limit) = limits.max_residual_ratio {
        let worst = outcome
            .setpoints
            .iter()
            .filter(|s| s.residual_ratio().is_finite())
            .max_by(|a, b| a.residual_ratio().total_cmp(&b.residual_ratio()));
        let (value, text) = match worst {
            Some(s) => (
                s.residual_ratio(),
                format!(
                    "fit residual at {:.1} °C: its rows' errors are {:.2}x their noise, rms (rms error {:.3e} Np, rms noise {:.3e} Np; limit {limit:.2}x)",
                    Num(s.temp_c),
                    s.residual_ratio(),
                    s.rms_np,
                    s.noise_np
                ),
            ),
            None => (f64::NAN, "fit residual: no set-point has a residual figure".to_string()),
        };
        checks.push(Check { name: "max_residual_ratio", passed: value <= limit, value, limit, text });
    }
    // A unit fitted against a population from two set-points cannot be cross-validated: the population
    // check below stands in for it.
    let cv_possible = outcome.population.is_none() || outcome.chosen_cv().is_some();
    if let Some(limit) = limits.max_cv_ratio.filter(|_| cv_possible) {
        let floor = outcome.cv_noise_np.unwrap_or(f64::NAN);
        let (value, text) = match outcome.chosen_cv() {
            Some(cv) => {
                let r = cv.rms / floor;
                (
                    r,
                    format!(
                        "cross-validation: rms {:.3e} Np is {r:.2}x the noise {floor:.3e} Np of the rows held out (limit {limit:.2}x)",
                        cv.rms
                    ),
                )
            }
            None => (f64::NAN, "cross-validation: not possible with fewer than 3 set-points".to_string()),
        };
        checks.push(Check { name: "max_cv_ratio", passed: value <= limit, value, limit, text });
    }
    if let Some(limit) = limits.max_set_aside_share {
        let s = &outcome.screening;
        let share = s.set_aside_fraction();
        let by: Vec<String> = [
            crate::fit::Reason::LowRail,
            crate::fit::Reason::HighRail,
            crate::fit::Reason::OffSetpoint,
            crate::fit::Reason::Unsettled,
            crate::fit::Reason::Glitch,
        ]
        .iter()
        .filter_map(|r| {
            let n = s.count(*r);
            (n > 0).then(|| format!("{n} {}", r.name()))
        })
        .collect();
        let text = format!(
            "rows set aside: {} of {} ({:.1} %{}; limit {:.1} %)",
            s.set_aside.len(),
            s.rows,
            100.0 * share,
            if by.is_empty() { String::new() } else { format!(": {}", by.join(", ")) },
            100.0 * limit
        );
        checks.push(Check { name: "max_set_aside_share", passed: share <= limit, value: share, limit, text });
    }
    let (t_lo, t_hi) = (f64::from(cal.temperature.min_c), f64::from(cal.temperature.max_c));
    let (x_lo, x_hi) = (f64::from(cal.x_range.min), f64::from(cal.x_range.max));
    if let Some(span) = limits.required_temperature_c {
        let short = (t_lo - span.min).max(span.max - t_hi).max(0.0);
        checks.push(Check {
            name: "required_temperature_c",
            passed: short == 0.0,
            value: short,
            limit: 0.0,
            text: format!(
                "temperature range: calibrated {:.2} … {:.2} °C, required {:.2} … {:.2} °C{}",
                Num(t_lo),
                Num(t_hi),
                Num(span.min),
                Num(span.max),
                if short > 0.0 { format!(" ({short:.2} K short)") } else { String::new() }
            ),
        });
    }
    if let Some(span) = limits.required_ratio {
        let short = (x_lo - span.min.ln()).max(span.max.ln() - x_hi).max(0.0);
        checks.push(Check {
            name: "required_ratio",
            passed: short == 0.0,
            value: short,
            limit: 0.0,
            text: format!(
                "ratio range: calibrated {:.4e} … {:.4e}, required {:.4e} … {:.4e}{}",
                x_lo.exp(),
                x_hi.exp(),
                span.min,
                span.max,
                if short > 0.0 { format!(" ({short:.3} Np short)") } else { String::new() }
            ),
        });
    }
    if let Some(limit) = limits.min_sensitivity {
        let (xa, xb) =
            limits.required_ratio.map_or((x_lo, x_hi), |s| (s.min.ln().max(x_lo), s.max.ln().min(x_hi)));
        let (ta, tb) =
            limits.required_temperature_c.map_or((t_lo, t_hi), |s| (s.min.max(t_lo), s.max.min(t_hi)));
        let (value, at) = lowest_sensitivity(cal, (xa, xb), (ta, tb));
        checks.push(Check {
            name: "min_sensitivity",
            passed: value >= limit,
            value,
            limit,
            text: format!(
                "lowest sensitivity {value:.3} of ideal at ratio {:.4e}, {:.1} °C (limit {limit:.3})",
                at.0.exp(),
                Num(at.1)
            ),
        });
    }
    if let Some(bound) = limits.verify_bound_lsb {
        let tables = file
            .fixed_tables(&crate::tables::TableOptions::default())
            .map_err(|e| JudgeError::Verify(e.to_string()))?;
        let opts = crate::verify::VerifyOptions { bound_lsb: bound, ..Default::default() };
        let report = crate::verify::run_file(file, &tables.view(), &opts, &crate::progress::quiet)
            .map_err(|e| JudgeError::Verify(e.to_string()))?;
        let worst = report
            .fixed
            .errors
            .max_lsb
            .max(report.f32.errors.max_lsb)
            .max(report.table.errors.max_lsb)
            .max(report.cache.errors.max_lsb);
        checks.push(Check {
            name: "verify_bound_lsb",
            passed: report.passed(),
            value: worst,
            limit: bound,
            text: format!(
                "verify: worst {worst:.4} LSB over the paths, {} status disagreement(s) off the edges (bound {bound} LSB)",
                report.fixed.status.outside + report.f32.status.outside + report.table.status.outside + report.cache.status.outside
            ),
        });
    }
    if let Some(p) = &outcome.population {
        checks.push(population_check(p));
    }
    let passed = checks.iter().all(|c| c.passed);
    Ok(Verdict { passed, checks })
}

/// The population check of a unit fitted against a population: the squared Mahalanobis distances from the
/// population's mean of its shape (the parameters the prior holds) and of its own terms (offset and slope,
/// against the lot's spread of them), each against its prediction limit at half the check's false-alarm
/// budget.
fn population_check(p: &crate::fit::prior::PopulationFit) -> Check {
    let limit = p.threshold;
    let scores: Vec<String> = p.scores.iter().map(|s| format!("{:+.2}", Num(*s))).collect();
    let why = match (p.distance2 <= p.threshold, p.own_distance2 <= p.own_threshold) {
        (true, true) => "",
        (false, true) => ": the unit's shape lies outside the population",
        (true, false) => ": the unit's offset and slope lie outside the lot's spread",
        (false, false) => ": the unit's shape, offset and slope lie outside the population",
    };
    Check {
        name: "population_distance",
        passed: p.inside(),
        value: p.distance2,
        limit,
        text: format!(
            "population: squared distance {:.2} from its mean over {} parameters (limit {:.2}), own offset and slope {:.2} (limit {:.2}), prediction limits at {} false alarms per unit in all; scores [{}] σ on the {} mode(s) kept{}",
            p.distance2,
            p.dof,
            limit,
            p.own_distance2,
            p.own_threshold,
            crate::fit::prior::FALSE_ALARMS,
            scores.join(", "),
            p.scores.len(),
            why
        ),
    }
}

/// The lowest sensitivity (∂code/∂x relative to ideal, as the firmware computes it) over a grid of
/// 41 × 41 points of x and temperature, and where it is.
pub fn lowest_sensitivity(cal: &logtrim::Calibration, x: (f64, f64), t: (f64, f64)) -> (f64, (f64, f64)) {
    let mut worst = (f64::INFINITY, (x.0, t.0));
    let n = 40;
    for i in 0..=n {
        let tt = t.0 + (t.1 - t.0) * f64::from(i) / f64::from(n);
        let Ok(stage) = cal.stage_f64(tt) else { continue };
        for j in 0..=n {
            let xx = x.0 + (x.1 - x.0) * f64::from(j) / f64::from(n);
            let code = cal.forward_code_f64(xx, tt);
            let w = (code - stage.offset_codes) / stage.slope;
            let s = cal.x_from_w_f64(w, tt).map_or(0.0, |r| r.sensitivity);
            if s < worst.0 {
                worst = (s, (xx, tt));
            }
        }
    }
    worst
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limits_files_round_trip_and_refuse_typos_and_bad_values() {
        let l = AcceptanceLimits::from_json(r#"{"format": "logtrim-acceptance", "version": 1}"#, "l.json")
            .unwrap();
        assert_eq!(l, AcceptanceLimits::default());
        let text = serde_json::to_string(&l).unwrap();
        assert_eq!(AcceptanceLimits::from_json(&text, "l.json").unwrap(), l);
        let off = AcceptanceLimits::from_json(
            r#"{"format": "logtrim-acceptance", "version": 1, "max_cv_ratio": null}"#,
            "l.json",
        )
        .unwrap();
        assert_eq!(off.max_cv_ratio, None);
        let typo = r#"{"format": "logtrim-acceptance", "version": 1, "max_cv_ration": 2}"#;
        assert!(matches!(AcceptanceLimits::from_json(typo, "l.json"), Err(LimitsError::File(_))));
        let bad = r#"{"format": "logtrim-acceptance", "version": 1, "max_set_aside_share": 2}"#;
        let e = AcceptanceLimits::from_json(bad, "l.json").unwrap_err();
        assert!(e.to_string().contains("max_set_aside_share") && e.to_string().contains("l.json"), "{e}");
        let v = r#"{"format": "logtrim-acceptance", "version": 7}"#;
        assert!(matches!(AcceptanceLimits::from_json(v, "l.json"), Err(LimitsError::Version { .. })));
    }

    #[test]
    fn the_schema_names_every_key_with_its_default() {
        // schemas/acceptance.schema.json describes exactly the keys this type reads, with the same defaults.
        let schema: serde_json::Value =
            serde_json::from_str(include_str!("../../schemas/acceptance.schema.json")).unwrap();
        let props = schema["properties"].as_object().unwrap();
        let ours = serde_json::to_value(AcceptanceLimits::default()).unwrap();
        let ours = ours.as_object().unwrap();
        let mut a: Vec<&String> = props.keys().collect();
        let mut b: Vec<&String> = ours.keys().collect();
        a.sort();
        b.sort();
        assert_eq!(a, b);
        for (k, v) in ours {
            if let Some(d) = props[k].get("default") {
                assert_eq!(d, v, "default of {k}");
            }
        }
    }

    #[test]
    fn a_nominal_unit_has_ideal_sensitivity() {
        // No bends: ∂code/∂x is the ideal slope everywhere (the definition of relative sensitivity).
        let cal = logtrim::Calibration::nominal(16, 32768.0, 3000.0, 25.0);
        let (s, _) = lowest_sensitivity(&cal, (-5.0, 5.0), (0.0, 50.0));
        assert!((s - 1.0).abs() < 1e-9, "{s}");
    }
}
