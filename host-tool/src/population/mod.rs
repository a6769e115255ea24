//! Population models: what a characterisation lot teaches about a design, so that production units can be
//! calibrated at two or three chamber set-points instead of five or six.
//!
//! This module owns the population model, its file, its making from a lot ([`characterise`]), the
//! production plan ([`plan`]) and the prior a production unit is fitted against ([`PopulationModel::prior`],
//! used through [`crate::fit::FitOptions::population`]).
//!
//! # The model
//!
//! Every unit of the lot, run at the full set of set-points, is fitted with one model size (the batch's
//! choice, without the generic residual) and one normalisation common to the lot, so that the units'
//! parameter vectors θ are comparable. Units are compared by what their parameters do: the deviation of each
//! from the lot's mean θ̄ is mapped to the error in x it causes on a common grid of temperatures and ratios,
//! the unit's own terms (constant offset and slope, which any set-point measures) are regressed out, and
//! the SVD of the rest gives the **modes** of the unit-to-unit spread, each with the share of the spread it
//! explains ([`modes`]). The prior on a unit is `N(θ̄, V·Vᵀ + diag(floor))` on the parameters other than its
//! own, with V the modes kept and the floor the spread they leave.
//!
//! **Modes kept** are chosen by leave-one-unit-out cross-validation: each unit in turn is left out, the
//! model is made from the others, the unit is fitted against it from its rows at the production set-points
//! only, and its error in x is measured on the rows of every other set-point (between the production
//! ones). The smallest number of modes whose
//! rms error is within [`MIN_GAIN`] of the best is kept.
//!
//! # The file
//!
//! `POP.json`, format [`FORMAT`] version [`VERSION`] (`schemas/population.schema.json`), read strictly: an
//! unknown key, a wrong format or version, or values of the wrong size are refused with the key named.

pub mod modes;
pub mod plan;
pub mod trial;

use std::path::Path;

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::batch::UnitJob;
use crate::file_error::{parse_json, read_text, FileError};
use crate::fit::model::{Norm, Params, Prep, Spec};
use crate::fit::prior::Prior;
use crate::fit::{fit, setpoints, FitData, FitOptions};
use crate::output::number::Num;

/// The `format` of a population file.
pub const FORMAT: &str = "logtrim-population";
/// The version of the format this build reads and writes.
pub const VERSION: u32 = 1;
/// Relative rms error within which fewer modes are preferred.
pub const MIN_GAIN: f64 = 0.03;
/// Most modes tried.
pub const MAX_MODES: usize = 6;
/// Fewest units a lot needs.
pub const MIN_UNITS: usize = 5;

/// One mode of the population.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Mode {
    /// The share of the unit-to-unit spread (in x, own terms removed) it explains.
    pub share: f64,
    /// The parameter direction of one standard deviation of the population.
    pub direction: Vec<f64>,
}

/// The leave-one-unit-out figures of one number of modes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModesCv {
    /// Modes.
    pub modes: usize,
    /// rms error in x of the held-out units at the set-points their fit did not see, nepers.
    pub rms_np: f64,
    /// max |error| in x, nepers.
    pub max_np: f64,
    /// The rms over the lot's noise floor (none without one).
    pub rms_ratio: Option<f64>,
}

/// A population model ([module docs](self)).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PopulationModel {
    /// Always [`FORMAT`].
    pub format: String,
    /// [`VERSION`].
    pub version: u32,
    /// Which build wrote it.
    pub generator: String,
    /// Serials of the units the model was made from.
    pub units: Vec<String>,
    /// The model size, in `--model`'s form.
    pub model: String,
    /// The common normalisation.
    pub norm: Norm,
    /// The log channel's ADC bits.
    pub bits: u8,
    /// The lot's temperature range (the calibrated range of a unit fitted against it), °C.
    pub temperature_c: [f64; 2],
    /// The lot's x range, nepers.
    pub x: [f64; 2],
    /// The distinct ratios of the lot's sweeps.
    pub ratios: usize,
    /// Sweeps per set-point in the lot.
    pub repeats: usize,
    /// θ̄.
    pub mean: Vec<f64>,
    /// Every mode found, largest first.
    pub modes: Vec<Mode>,
    /// Modes kept.
    pub modes_kept: usize,
    /// The floor variances per parameter that the modes kept leave.
    pub floor: Vec<f64>,
    /// The lot's covariance of the units' own terms (the constant offset and slope coefficients, in θ's
    /// units): the population check holds a unit's own terms to it.
    pub own_covariance: [[f64; 2]; 2],
    /// The lot's noise in codes (median over units of the rms residual of their fits).
    pub noise_codes: f64,
    /// The lot's noise floor in x (median over units), nepers; none when no unit's noise could be measured.
    pub noise_floor_np: Option<f64>,
    /// The temperature reading's noise as the codes see it (median over units), K rms.
    pub noise_temperature_k: f64,
    /// The production set-points the cross-validation fitted from, °C.
    pub production_c: Vec<f64>,
    /// Leave-one-unit-out figures per number of modes.
    pub cv: Vec<ModesCv>,
}

/// Why a population could not be made or read.
#[non_exhaustive]
#[derive(Debug, thiserror::Error)]
pub enum PopulationError {
    /// The file could not be read or parsed.
    #[error(transparent)]
    File(#[from] FileError),
    /// The file's contents are not a usable population: the file (where known), what is wrong and what
    /// was expected.
    #[error("{0}")]
    Invalid(String),
    /// The lot cannot make a population.
    #[error("characterisation lot: {0}")]
    Lot(String),
}

/// Options of [`characterise`].
#[derive(Debug, Clone)]
pub struct CharacteriseOptions {
    /// The fit's options (bits, screens; its model size, when given, is the population's).
    pub fit: FitOptions,
    /// The production set-points the cross-validation fits from, °C (empty: the lot's two ends and middle).
    pub production_c: Vec<f64>,
}

/// The outcome of [`characterise`]: the model and the units that could not be fitted.
#[derive(Debug, Clone)]
pub struct Characterised {
    /// The model.
    pub model: PopulationModel,
    /// Units left out, with why.
    pub left_out: Vec<(String, String)>,
}

/// One unit of the lot, fitted.
struct LotUnit {
    serial: String,
    theta: Vec<f64>,
    groups: Vec<Vec<Prep>>,
    noise_codes: f64,
    noise_floor_np: f64,
    noise_temperature_k: f64,
    temp: (f64, f64),
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    match v.len() {
        0 => f64::NAN,
        n if n % 2 == 1 => v[n / 2],
        n => 0.5 * (v[n / 2 - 1] + v[n / 2]),
    }
}

/// The common normalisation of a lot: temperatures from the median of the units' ends, the level at the
/// median code, x over every ratio.
fn common_norm(jobs: &[&UnitJob]) -> Option<Norm> {
    let ends = |f: fn(f64, f64) -> f64, start: f64| -> Vec<f64> {
        jobs.iter().map(|j| j.data.temp_c.iter().copied().fold(start, f)).collect()
    };
    let (tmin, tmax) = (median(ends(f64::min, f64::INFINITY)), median(ends(f64::max, f64::NEG_INFINITY)));
    let codes: Vec<f64> = jobs.iter().flat_map(|j| j.data.code.iter().map(|&c| f64::from(c))).collect();
    let xs: Vec<f64> = jobs.iter().flat_map(|j| j.data.ratio.iter().map(|r| r.ln())).collect();
    let (xmin, xmax) = xs.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
    if !(tmin.is_finite() && tmax.is_finite() && xmin.is_finite() && xmax.is_finite()) {
        return None;
    }
    let tc = (0.5 * (tmin + tmax) * 64.0).round() / 64.0;
    Some(Norm {
        level: median(codes).round(),
        t_center_c: tc,
        t_half_span_k: (0.5 * (tmax - tmin)).max(1.0),
        t_ref_k: tc + logtrim::physics::ZERO_CELSIUS_K,
        x_center: 0.5 * (xmin + xmax),
        x_half_span: (0.5 * (xmax - xmin)).max(0.5),
    })
}

/// A unit's rows as the fit kept them, prepared with `norm` and grouped by set-point.
fn kept_groups(data: &FitData, out: &crate::fit::FitOutcome, norm: &Norm, gap_k: f64) -> Vec<Vec<Prep>> {
    let mut aside = vec![false; data.len()];
    for r in &out.screening.set_aside {
        if let Some(a) = aside.get_mut(r.row) {
            *a = true;
        }
    }
    setpoints(&data.temp_c, gap_k)
        .into_iter()
        .map(|g| {
            g.into_iter()
                .filter(|&i| !aside[i])
                .map(|i| Prep::new(norm, f64::from(data.code[i]), data.temp_c[i], data.ratio[i].ln(), 1.0))
                .collect::<Vec<Prep>>()
        })
        .filter(|g| !g.is_empty())
        .collect()
}

fn group_temp(g: &[Prep], norm: &Norm) -> f64 {
    norm.t_center_c + norm.t_half_span_k * g.iter().map(|p| p.tau).sum::<f64>() / g.len().max(1) as f64
}

/// Splits `groups` into the set-points nearest each production temperature (each at most once) and the
/// others.
fn production_split(groups: &[Vec<Prep>], norm: &Norm, production_c: &[f64]) -> (Vec<Prep>, Vec<Vec<Prep>>) {
    let mut used = vec![false; groups.len()];
    for &t in production_c {
        let off = |i: usize| (group_temp(&groups[i], norm) - t).abs();
        if let Some(i) = (0..groups.len()).filter(|&i| !used[i]).min_by(|&a, &b| off(a).total_cmp(&off(b))) {
            used[i] = true;
        }
    }
    let train = groups.iter().zip(&used).filter(|(_, u)| **u).flat_map(|(g, _)| g.iter().copied()).collect();
    let held = groups.iter().zip(&used).filter(|(_, u)| !**u).map(|(g, _)| g.clone()).collect();
    (train, held)
}

fn x_errors_all(p: &Params, groups: &[Vec<Prep>]) -> Vec<f64> {
    groups.iter().flat_map(|g| crate::fit::select::x_errors(p, g)).collect()
}

/// Makes a population model from a characterisation lot: `jobs`, each a unit run at the full set of
/// set-points ([module docs](self)).
pub fn characterise(jobs: &[UnitJob], opt: &CharacteriseOptions) -> Result<Characterised, PopulationError> {
    let readable: Vec<&UnitJob> = jobs.iter().filter(|j| j.unreadable.is_none()).collect();
    if readable.len() < MIN_UNITS {
        return Err(PopulationError::Lot(format!(
            "{} readable unit(s): a population needs at least {MIN_UNITS} units run at the full set of set-points (a few tens are usual)",
            readable.len()
        )));
    }
    let spec = match opt.fit.spec {
        Some(s) => s,
        None => {
            let pilots: Vec<UnitJob> = readable.iter().map(|j| (*j).clone()).collect();
            crate::batch::choose_spec(&pilots, &opt.fit)
                .ok_or_else(|| PopulationError::Lot("no pilot unit could be fitted".into()))?
        }
    };
    let spec = Spec { residual_x: 0, residual_t: 0, ..spec };
    let norm = common_norm(&readable).ok_or_else(|| PopulationError::Lot("no finite temperatures".into()))?;
    let fit_opt = FitOptions { spec: Some(spec), norm: Some(norm), population: None, ..opt.fit.clone() };
    let fitted: Vec<Result<LotUnit, (String, String)>> = readable
        .par_iter()
        .map(|j| {
            let out = fit(&j.data, &fit_opt).map_err(|e| (j.serial.clone(), e.to_string()))?;
            let groups = kept_groups(&j.data, &out, &norm, fit_opt.setpoint_gap_k);
            let rows: Vec<Prep> = groups.iter().flatten().copied().collect();
            let ss: f64 = rows.iter().map(|r| (r.code - out.params.predict(r)).powi(2)).sum();
            let t = &out.calibration.temperature;
            Ok(LotUnit {
                serial: j.serial.clone(),
                theta: out.params.to_vec(),
                noise_codes: (ss / rows.len().max(1) as f64).sqrt(),
                noise_floor_np: out.noise_floor_np.unwrap_or(f64::NAN),
                noise_temperature_k: out.screening.noise.map_or(f64::NAN, |n| n.temperature_k_rms),
                groups,
                temp: (f64::from(t.min_c), f64::from(t.max_c)),
            })
        })
        .collect();
    let mut units = Vec::new();
    let mut left_out = Vec::new();
    for r in fitted {
        match r {
            Ok(u) => units.push(u),
            Err(e) => left_out.push(e),
        }
    }
    if units.len() < MIN_UNITS {
        return Err(PopulationError::Lot(format!(
            "only {} unit(s) could be fitted with {} (at least {MIN_UNITS} needed); {}",
            units.len(),
            spec.describe(),
            left_out.iter().map(|(s, e)| format!("{s}: {e}")).collect::<Vec<_>>().join("; ")
        )));
    }
    let t =
        (median(units.iter().map(|u| u.temp.0).collect()), median(units.iter().map(|u| u.temp.1).collect()));
    let x = (norm.x_center - norm.x_half_span, norm.x_center + norm.x_half_span);
    let production_c = if opt.production_c.is_empty() {
        vec![t.0, 0.5 * (t.0 + t.1), t.1]
    } else {
        opt.production_c.clone()
    };
    let sigma = median(units.iter().map(|u| u.noise_codes).collect());
    let noise_floor_np =
        Some(median(units.iter().map(|u| u.noise_floor_np).filter(|v| v.is_finite()).collect()))
            .filter(|v| v.is_finite());
    let thetas: Vec<Vec<f64>> = units.iter().map(|u| u.theta.clone()).collect();
    let all = modes::Modes::of(&thetas, spec, &norm, t, x)
        .ok_or_else(|| PopulationError::Lot("the units' spread could not be decomposed".into()))?;
    let max_k = all.directions.len().min(MAX_MODES).min(units.len().saturating_sub(2));
    // Leave one unit out: the model from the others, the unit from its production set-points.
    let per_unit: Vec<Vec<Option<Vec<f64>>>> = (0..units.len())
        .into_par_iter()
        .map(|j| {
            let others: Vec<Vec<f64>> =
                thetas.iter().enumerate().filter(|(i, _)| *i != j).map(|(_, v)| v.clone()).collect();
            let Some(m) = modes::Modes::of(&others, spec, &norm, t, x) else { return vec![None; max_k + 1] };
            let (train, held) = production_split(&units[j].groups, &norm, &production_c);
            (0..=max_k)
                .map(|k| {
                    let k = k.min(m.directions.len());
                    let prior = modes::prior(
                        others.len(),
                        spec,
                        norm,
                        &m.mean,
                        &m.directions[..k],
                        &m.floor(spec, k),
                        sigma,
                        t,
                        x,
                    )?;
                    let p = prior.fit(&train)?;
                    Some(x_errors_all(&p, &held))
                })
                .collect()
        })
        .collect();
    let mut cv = Vec::new();
    for k in 0..=max_k {
        let (mut ss, mut n, mut max) = (0.0, 0usize, 0.0f64);
        let mut complete = true;
        for u in &per_unit {
            match u.get(k).and_then(Option::as_ref) {
                Some(e) => {
                    for v in e.iter().filter(|v| v.is_finite()) {
                        ss += v * v;
                        n += 1;
                        max = max.max(v.abs());
                    }
                }
                None => complete = false,
            }
        }
        if complete && n > 0 {
            let rms = (ss / n as f64).sqrt();
            cv.push(ModesCv {
                modes: k,
                rms_np: rms,
                max_np: max,
                rms_ratio: noise_floor_np.map(|f| rms / f),
            });
        }
    }
    let best = cv.iter().map(|c| c.rms_np).fold(f64::INFINITY, f64::min);
    let kept = cv
        .iter()
        .find(|c| c.rms_np <= best * (1.0 + MIN_GAIN))
        .map(|c| c.modes)
        .ok_or_else(|| PopulationError::Lot("no number of modes could be cross-validated".into()))?;
    let model = PopulationModel {
        format: FORMAT.into(),
        version: VERSION,
        generator: format!("logtrim {}", env!("CARGO_PKG_VERSION")),
        units: units.iter().map(|u| u.serial.clone()).collect(),
        model: spec.to_arg(),
        norm,
        bits: opt.fit.bits,
        temperature_c: [t.0, t.1],
        x: [x.0, x.1],
        ratios: lot_ratios(&readable),
        repeats: lot_repeats(&readable),
        noise_codes: sigma,
        noise_temperature_k: {
            let t = median(units.iter().map(|u| u.noise_temperature_k).filter(|v| v.is_finite()).collect());
            if t.is_finite() {
                t
            } else {
                0.0
            }
        },
        noise_floor_np,
        mean: all.mean.clone(),
        modes: all
            .directions
            .iter()
            .zip(&all.shares)
            .map(|(d, s)| Mode { share: *s, direction: d.clone() })
            .collect(),
        modes_kept: kept,
        floor: all.floor(spec, kept),
        own_covariance: own_covariance(&thetas, &all.mean, modes::own_terms(spec)),
        production_c,
        cv,
    };
    model.prior().map_err(|e| PopulationError::Lot(e.to_string()))?;
    Ok(Characterised { model, left_out })
}

/// The lot's covariance of the own terms `own` of `thetas` about `mean`.
fn own_covariance(thetas: &[Vec<f64>], mean: &[f64], own: [usize; 2]) -> [[f64; 2]; 2] {
    let n = thetas.len().saturating_sub(1).max(1) as f64;
    let dev = |t: &Vec<f64>, k: usize| {
        t.get(own[k]).copied().unwrap_or(0.0) - mean.get(own[k]).copied().unwrap_or(0.0)
    };
    let mut c = [[0.0; 2]; 2];
    for (i, row) in c.iter_mut().enumerate() {
        for (j, v) in row.iter_mut().enumerate() {
            *v = thetas.iter().map(|t| dev(t, i) * dev(t, j)).sum::<f64>() / n;
        }
    }
    c
}

/// The distinct ratios of the lot's first unit.
fn lot_ratios(jobs: &[&UnitJob]) -> usize {
    let mut r: Vec<f64> = jobs.first().map(|j| j.data.ratio.clone()).unwrap_or_default();
    r.sort_by(f64::total_cmp);
    r.dedup_by(|a, b| (*a / *b - 1.0).abs() < 1e-9);
    r.len()
}

/// Sweeps per set-point of the lot's first unit: rows per set-point over distinct ratios.
fn lot_repeats(jobs: &[&UnitJob]) -> usize {
    let Some(j) = jobs.first() else { return 1 };
    let sps = setpoints(&j.data.temp_c, 2.0).len().max(1);
    (j.data.len() / sps / lot_ratios(jobs).max(1)).max(1)
}

impl PopulationModel {
    /// The model size.
    pub fn spec(&self) -> Result<Spec, String> {
        Spec::parse(&self.model)
    }

    /// The prior of the modes kept, for [`crate::fit::FitOptions::population`].
    pub fn prior(&self) -> Result<Prior, PopulationError> {
        let bad = PopulationError::Invalid;
        let spec = self.spec().map_err(|e| bad(format!("model: {e}")))?;
        let p = spec.n_params();
        let directions: Vec<Vec<f64>> =
            self.modes.iter().take(self.modes_kept).map(|m| m.direction.clone()).collect();
        modes::prior(
            self.units.len(),
            spec,
            self.norm,
            &self.mean,
            &directions,
            &self.floor,
            self.noise_codes,
            (self.temperature_c[0], self.temperature_c[1]),
            (self.x[0], self.x[1]),
        )
        .and_then(|pr| {
            let [[a, b], [c, d]] = self.own_covariance;
            let det = a * d - b * c;
            let inverse = [[d / det, -b / det], [-c / det, a / det]];
            let own = (pr.own.0, inverse);
            (det > 0.0 && a > 0.0).then_some(Prior { noise_temperature_k: self.noise_temperature_k, own, ..pr })
        })
        .filter(|pr| pr.n_params() == p)
        .ok_or_else(|| bad("mean, modes and floor do not make a usable prior (a covariance that is not positive definite)".into()))
    }

    /// Checks the values against each other; `path` names the file in errors.
    pub fn check(&self, path: &str) -> Result<(), PopulationError> {
        let bad = |what: String| PopulationError::Invalid(format!("{path}: {what}"));
        if self.format != FORMAT {
            return Err(bad(format!("format {:?}: expected {FORMAT:?}", self.format)));
        }
        if self.version != VERSION {
            return Err(bad(format!("version {}: this build reads version {VERSION}", self.version)));
        }
        let spec = self.spec().map_err(|e| bad(format!("model {:?}: {e}", self.model)))?;
        if spec.has_residual() {
            return Err(bad(format!("model {:?}: a population's model has no residual term", self.model)));
        }
        let p = spec.n_params();
        if self.mean.len() != p {
            return Err(bad(format!(
                "mean has {} values: expected {p}, one per parameter of {}",
                self.mean.len(),
                self.model
            )));
        }
        if self.floor.len() != p {
            return Err(bad(format!("floor has {} values: expected {p}", self.floor.len())));
        }
        for (i, m) in self.modes.iter().enumerate() {
            if m.direction.len() != p {
                return Err(bad(format!(
                    "modes[{i}].direction has {} values: expected {p}",
                    m.direction.len()
                )));
            }
            if !(m.share.is_finite() && (0.0..=1.0).contains(&m.share)) {
                return Err(bad(format!("modes[{i}].share {}: expected 0 … 1", m.share)));
            }
        }
        if self.modes_kept > self.modes.len() {
            return Err(bad(format!("modes_kept {} but only {} modes", self.modes_kept, self.modes.len())));
        }
        if !(1..=24).contains(&self.bits) {
            return Err(bad(format!("bits {}: expected 1 … 24", self.bits)));
        }
        let finite = self.mean.iter().chain(&self.floor).chain(self.modes.iter().flat_map(|m| &m.direction));
        if let Some(v) = finite.clone().find(|v| !v.is_finite()) {
            return Err(bad(format!("value {v} in mean, floor or modes is not a finite number")));
        }
        let [[a, b], [c, d]] = self.own_covariance;
        if !([a, b, c, d].iter().all(|v| v.is_finite())
            && a > 0.0
            && d > 0.0
            && b == c
            && a * d - b * c > 0.0)
        {
            return Err(bad(format!(
                "own_covariance {:?}: expected a finite, symmetric, positive definite 2 × 2 matrix",
                self.own_covariance
            )));
        }
        if self.floor.iter().any(|v| *v < 0.0) {
            return Err(bad("floor: variances must not be negative".into()));
        }
        let [t0, t1] = self.temperature_c;
        if !(t0.is_finite() && t1.is_finite() && t0 < t1) {
            return Err(bad(format!("temperature_c [{t0}, {t1}]: expected a finite range, min < max")));
        }
        let [x0, x1] = self.x;
        if !(x0.is_finite() && x1.is_finite() && x0 < x1) {
            return Err(bad(format!("x [{x0}, {x1}]: expected a finite range, min < max")));
        }
        if !(self.noise_temperature_k.is_finite() && self.noise_temperature_k >= 0.0) {
            return Err(bad(format!(
                "noise_temperature_k {}: expected a number ≥ 0",
                self.noise_temperature_k
            )));
        }
        if !(self.noise_codes.is_finite() && self.noise_codes > 0.0) {
            return Err(bad(format!("noise_codes {}: expected a positive number", self.noise_codes)));
        }
        let n = &self.norm;
        if ![n.level, n.t_center_c, n.t_half_span_k, n.t_ref_k, n.x_center, n.x_half_span]
            .iter()
            .all(|v| v.is_finite())
            || n.t_half_span_k <= 0.0
            || n.x_half_span <= 0.0
            || n.t_ref_k <= 0.0
        {
            return Err(bad(
                "norm: expected finite values with positive spans and reference temperature".into()
            ));
        }
        self.prior().map_err(|e| match e {
            PopulationError::Invalid(what) => bad(what),
            other => other,
        })?;
        Ok(())
    }

    /// Parses a population file from JSON text; `path` names it in errors.
    pub fn from_json(text: &str, path: &str) -> Result<PopulationModel, PopulationError> {
        let m: PopulationModel = parse_json(text, path)?;
        m.check(path)?;
        Ok(m)
    }

    /// Reads a population file.
    pub fn load(path: &Path) -> Result<PopulationModel, PopulationError> {
        let text = read_text(path)?;
        PopulationModel::from_json(&text, &path.display().to_string())
    }

    /// The file's JSON text.
    pub fn to_json(&self) -> String {
        let mut s = serde_json::to_string_pretty(self).unwrap_or_default();
        s.push('\n');
        s
    }

    /// Writes the file atomically.
    pub fn save(&self, path: &Path) -> Result<(), FileError> {
        crate::output::write_atomic(path, self.to_json().as_bytes()).map_err(|e| FileError::io(path, e))
    }

    /// The summary for a terminal: modes kept, share of each, the cross-validation, the production plan's
    /// predicted error.
    pub fn render_summary(&self) -> String {
        use std::fmt::Write;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "population of {} units, model {}, {:.1} … {:.1} °C, noise {:.2} codes rms (floor {} Np)",
            self.units.len(),
            self.model,
            Num(self.temperature_c[0]),
            Num(self.temperature_c[1]),
            self.noise_codes,
            self.noise_floor_np.map_or("unknown".to_string(), |f| format!("{f:.3e}"))
        );
        let _ = writeln!(s, "modes of the unit-to-unit spread (own offset and slope removed):");
        let mut cum = 0.0;
        for (i, m) in self.modes.iter().enumerate() {
            cum += m.share;
            let _ = writeln!(
                s,
                "  {} mode {:>2}: {:>6.2} % of the spread (cumulative {:>6.2} %)",
                if i < self.modes_kept { "*" } else { " " },
                i + 1,
                100.0 * m.share,
                100.0 * cum
            );
        }
        let prod: Vec<String> = self.production_c.iter().map(|&t| format!("{:.1}", Num(t))).collect();
        let _ = writeln!(
            s,
            "leave-one-unit-out, each unit fitted from the set-points at {} °C, error in x at the others:",
            prod.join(", ")
        );
        for c in &self.cv {
            let _ = writeln!(
                s,
                "  {} {} mode(s): rms {:.3e} Np ({}), max {:.3e} Np",
                if c.modes == self.modes_kept { "*" } else { " " },
                c.modes,
                c.rms_np,
                c.rms_ratio
                    .map_or("no noise floor".to_string(), |r| format!("{r:.2}x the lot's noise floor")),
                c.max_np
            );
        }
        let _ = writeln!(s, "modes kept: {}", self.modes_kept);
        if let Ok(p) = plan::predict(self, &self.production_c, self.ratios) {
            let _ = writeln!(
                s,
                "predicted error in x over the range for a unit fitted from {} °C, {} ratios each: rms {:.2}x the noise-only limit, worst point {:.2}x",
                prod.join(", "),
                self.ratios,
                p.rms_ratio,
                p.worst_ratio
            );
        }
        s
    }
}
