//! Simulated trials of the population method: a characterisation lot and a production lot drawn from one
//! design, the production units fitted from a plan's few set-points against the lot's population, and
//! their errors on validation readings at random temperatures against the noise-only limit.
//!
//! The tests and the figures in the README come from here, on seeds of their own.

use std::sync::Arc;

use serde::Serialize;

use super::plan::{plan, PlanOptions, PlanOutcome};
use super::{characterise, CharacteriseOptions, PopulationError, PopulationModel};
use crate::acceptance::{judge, AcceptanceLimits};
use crate::batch::UnitJob;
use crate::calfile::CalFile;
use crate::demo::{fit_data, logtrim_errors, versus_oracle, DemoError};
use crate::fit::{fit, FitOptions};
use crate::frontend::FrontEnd;
use crate::simulate::{simulate_lot, ChamberPlan, Lot, Plan, SimError, SimReading};

/// The shape of a trial.
#[derive(Debug, Clone, Copy)]
pub struct TrialOptions {
    /// Seed of the characterisation lot.
    pub lot_seed: u64,
    /// Units of the characterisation lot.
    pub lot_units: usize,
    /// Set-points of the characterisation lot's chamber runs (evenly spaced).
    pub lot_setpoints: usize,
    /// Seed of the production lot.
    pub production_seed: u64,
    /// Units of the production lot (outliers included).
    pub production_units: usize,
    /// Production units drawn from outside the population.
    pub outliers: usize,
    /// Set-points of the production plan.
    pub setpoints: usize,
    /// Validation readings per production unit.
    pub validation: usize,
    /// Ratios per sweep of the lot, and sweeps per set-point of both lots.
    pub ratios: usize,
    /// Sweeps per set-point.
    pub repeats: usize,
}

impl Default for TrialOptions {
    fn default() -> Self {
        TrialOptions {
            lot_seed: 1,
            lot_units: 20,
            lot_setpoints: 8,
            production_seed: 2,
            production_units: 10,
            outliers: 1,
            setpoints: 3,
            validation: 2000,
            ratios: 41,
            repeats: 3,
        }
    }
}

/// One production unit of a trial.
#[derive(Debug, Clone, Serialize)]
pub struct TrialUnit {
    /// Its serial.
    pub serial: String,
    /// Whether it was drawn from outside the population.
    pub outlier: bool,
    /// Its verdict (`PASS`, `FAIL`), or `ERROR` when the fit refused it.
    pub verdict: String,
    /// Whether the population check flagged it.
    pub flagged: bool,
    /// The population check's figures.
    pub population: Option<crate::fit::prior::PopulationFit>,
    /// The reasons of a failed verdict, or why the fit refused it.
    pub reasons: String,
    /// Its validation error against the noise-only limit: rms ratio, max ratio.
    pub versus_oracle: Option<(f64, f64)>,
}

/// What a trial measured.
#[derive(Debug, Clone)]
pub struct TrialOutcome {
    /// The characterisation lot's population.
    pub model: PopulationModel,
    /// The production plan.
    pub plan: PlanOutcome,
    /// Every production unit.
    pub units: Vec<TrialUnit>,
    /// The units of the population (not outliers), their validation readings pooled: rms of their
    /// errors over the oracle's, max over max, and the readings counted.
    pub pooled: (f64, f64, usize),
}

/// Runs a trial on design `fe` (a digital temperature channel).
pub fn run(fe: &FrontEnd, opt: &TrialOptions) -> Result<TrialOutcome, PopulationError> {
    let sim = |e: SimError| PopulationError::Lot(format!("simulating the trial: {e}"));
    let data = |e: DemoError| PopulationError::Lot(format!("the trial's data: {e}"));
    let chamber =
        ChamberPlan { setpoints: opt.lot_setpoints, ratios_per_setpoint: opt.ratios, repeats: opt.repeats };
    let lot_plan = Plan { seed: opt.lot_seed, chamber, validation_count: 1, units: opt.lot_units };
    let lot = simulate_lot(fe, &lot_plan, &Lot::default()).map_err(sim)?;
    let jobs = (0..lot.units.len())
        .map(|i| {
            Ok(UnitJob {
                serial: lot.units[i].serial.clone(),
                data: fit_data(&lot.chamber, i)?,
                unreadable: None,
            })
        })
        .collect::<Result<Vec<UnitJob>, DemoError>>()
        .map_err(data)?;
    let fit_opt = FitOptions { bits: fe.adc.bits, ..FitOptions::default() };
    let model =
        characterise(&jobs, &CharacteriseOptions { fit: fit_opt.clone(), production_c: vec![] })?.model;
    let plan = plan(&model, &PlanOptions { setpoints: opt.setpoints, ..PlanOptions::default() })?;
    let temps = plan.setpoints_c.clone();
    let chamber =
        ChamberPlan { setpoints: temps.len(), ratios_per_setpoint: plan.ratios, repeats: opt.repeats };
    let prod_plan = Plan {
        seed: opt.production_seed,
        chamber,
        validation_count: opt.validation,
        units: opt.production_units,
    };
    let prod =
        simulate_lot(fe, &prod_plan, &Lot { outliers: opt.outliers, setpoints_c: temps }).map_err(sim)?;
    let prior = Arc::new(model.prior()?);
    let with_prior = FitOptions { population: Some(prior), ..fit_opt };
    let limits = AcceptanceLimits::default();
    let mut units = Vec::new();
    let (mut ours, mut val): (Vec<Option<f64>>, Vec<SimReading>) = (Vec::new(), Vec::new());
    for (i, u) in prod.units.iter().enumerate() {
        let data = fit_data(&prod.chamber, i).map_err(data)?;
        let rows: Vec<SimReading> = prod.validation.iter().filter(|r| r.unit == i).copied().collect();
        let unit = match fit(&data, &with_prior) {
            Ok(out) => {
                let file = CalFile::of_fit(&out, Some(u.serial.clone()), None, 0);
                let verdict = judge(&out, &file, &limits).ok();
                let errors = logtrim_errors(&out.calibration, &rows);
                let v = versus_oracle(&errors, &rows);
                if !u.outlier {
                    ours.extend(errors);
                    val.extend(rows);
                }
                TrialUnit {
                    serial: u.serial.clone(),
                    outlier: u.outlier,
                    verdict: verdict.as_ref().map_or("ERROR", |v| v.word()).to_string(),
                    flagged: out.population.as_ref().is_some_and(|p| !p.inside()),
                    population: out.population.clone(),
                    reasons: verdict.as_ref().map(|v| v.reasons()).unwrap_or_default(),
                    versus_oracle: Some((v.rms_ratio, v.max_ratio)),
                }
            }
            Err(e) => TrialUnit {
                serial: u.serial.clone(),
                outlier: u.outlier,
                verdict: "ERROR".into(),
                flagged: false,
                population: None,
                reasons: e.to_string(),
                versus_oracle: None,
            },
        };
        units.push(unit);
    }
    let v = versus_oracle(&ours, &val);
    Ok(TrialOutcome { model, plan, units, pooled: (v.rms_ratio, v.max_ratio, v.count) })
}
