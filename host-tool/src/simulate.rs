//! Seeded chamber and validation runs of simulated units, and the files they are written to.
//!
//! A **chamber run** visits evenly spaced temperature set-points spanning the front end's operating range;
//! at each it sweeps log-spaced ratios from `ratio_min` to `ratio_max`, several times over. The unit's own
//! temperature jitters around the set-point and is read through the unit's temperature channel. A
//! **validation run** takes readings at random (x, T), uniform in x = ln ratio and in T over the whole
//! operating range (not only at set-points), and keeps the truth (x, T and the oracle's x) apart.
//!
//! Everything is drawn from ChaCha8 streams seeded by one `u64`: one stream per (purpose, unit), so a unit's
//! data do not depend on how many other units or readings were asked for, and a run is bit-reproducible
//! (for the generator and distribution versions that `Cargo.lock` pins; the model itself uses libm, not the
//! platform's math library).
//!
//! Files ([`Simulation::write_to`]):
//!
//! | file | columns / contents |
//! |---|---|
//! | `cal.csv` | `unit,code,temp_c,ratio` (`temp_code` for a raw temperature channel) |
//! | `readings.csv` | `id,code,temp_c` (`id,unit,code,temp_c` for a batch; `temp_code` for a raw channel) |
//! | `truth.csv` | `id,ratio,x_true,t_true_c,x_oracle` (`id,unit,…` for a batch; `x_oracle` empty where undefined) |
//! | `frontend.json` | the front end simulated (the nominal one, with its spread, for a batch) |
//! | `units.json` | a batch only: every unit's drawn front end, by serial |
//! | `standards.csv` | an aged unit only: `[unit,]code,temp_c,ratio`, readings of two reference standards |
//! | `blank.csv` | an aged unit only: `[unit,]code,temp_c`, readings of a blank |
//! | `faults.csv` | a run with chamber faults only: `line,unit,kind,size`, the dirty readings by their line in `cal.csv` |
//! | `manifest.json` | what generated the files: version, seed, sizes, oracle figures |
//!
//! # Aged units
//!
//! A front end with [`FrontEnd::aging`] is calibrated as it was (the chamber run ignores the ageing) and
//! measured as it is now: the validation run and two field runs see the drift. The field runs are what a
//! field trim and a blank are made from: [`STANDARDS_PER_UNIT`] reference standards at a quarter and three
//! quarters of the calibrated x range, and a blank at ratio 1 (the centre of the range when 1 lies outside
//! it), [`FIELD_READINGS`] readings each, at [`FIELD_TEMP_C`] (clamped into the operating range) with the
//! usual set-point jitter.

use std::path::{Path, PathBuf};

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use crate::frontend::{FrontEnd, FrontEndError, MeasuredTemperature, Sample};

/// Most rows a run may have, all files together (a guard against a typo'd size).
pub const MAX_ROWS: usize = 50_000_000;

/// The stream of a ChaCha8 generator for one purpose and one unit.
#[derive(Debug, Clone, Copy)]
enum Purpose {
    UnitDraw = 1,
    Chamber = 2,
    Validation = 3,
    Standards = 4,
    Blank = 5,
    Faults = 6,
    Outliers = 7,
}

/// Reference standards read by an aged unit's standards run.
pub const STANDARDS_PER_UNIT: usize = 2;
/// Readings of each standard, and of the blank.
pub const FIELD_READINGS: usize = 16;
/// The temperature of the field runs, °C (clamped into the operating range).
pub const FIELD_TEMP_C: f64 = 25.0;

fn rng_for(seed: u64, purpose: Purpose, unit: usize) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(((purpose as u64) << 32) | unit as u64);
    rng
}

/// The shape of a chamber run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct ChamberPlan {
    /// Temperature set-points, evenly spaced over the operating range, ends included (≥ 2).
    pub setpoints: usize,
    /// Ratios per sweep, log-spaced from `ratio_min` to `ratio_max`, ends included (≥ 2).
    pub ratios_per_setpoint: usize,
    /// Sweeps at each set-point (≥ 1).
    pub repeats: usize,
}

impl Default for ChamberPlan {
    fn default() -> Self {
        ChamberPlan { setpoints: 6, ratios_per_setpoint: 41, repeats: 3 }
    }
}

/// Everything a simulation needs besides the front end.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Plan {
    /// The seed of every random draw.
    pub seed: u64,
    /// The chamber run of each unit.
    pub chamber: ChamberPlan,
    /// Validation readings per unit (≥ 1).
    pub validation_count: usize,
    /// Units (≥ 1). One unit is the front end as described; more are drawn from its spread.
    pub units: usize,
}

impl Default for Plan {
    fn default() -> Self {
        Plan { seed: 1, chamber: ChamberPlan::default(), validation_count: 5000, units: 1 }
    }
}

/// One simulated unit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SimUnit {
    /// Its serial (`U0001`, …).
    pub serial: String,
    /// Its exact front end.
    pub frontend: FrontEnd,
    /// Whether it was drawn as a unit that does not belong to the lot ([`Lot::outliers`]).
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub outlier: bool,
}

/// How far beyond the operating range a chosen set-point may lie, K: a plan made from measured
/// temperatures may name the range's ends as its units read them.
pub const SETPOINT_MARGIN_K: f64 = 2.0;

/// How many times its design's spread an outlier of a lot is drawn with.
pub const OUTLIER_SPREAD: f64 = 5.0;

/// What a lot adds to a plan: chosen set-points and units that do not belong.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Lot {
    /// Units drawn, at seeded places in the lot, with [`OUTLIER_SPREAD`] times the design's unit-to-unit
    /// spread: units of another process that a population check should flag (at most `units`).
    pub outliers: usize,
    /// The chamber set-points, °C, instead of the plan's evenly spaced ones (empty: the plan's); each within
    /// [`SETPOINT_MARGIN_K`] of the operating range.
    pub setpoints_c: Vec<f64>,
}

/// One reading of a chamber run, with the truth behind it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChamberRow {
    /// Index of the unit in [`Simulation::units`].
    pub unit: usize,
    /// The chamber's set-point, °C.
    pub setpoint_c: f64,
    /// The unit's true temperature, °C.
    pub t_true_c: f64,
    /// The applied ratio I_sig/I_ref.
    pub ratio: f64,
    /// x = ln ratio.
    pub x_true: f64,
    /// The noisy ADC code.
    pub code: u32,
    /// The temperature as the firmware reads it.
    pub temperature: MeasuredTemperature,
    /// What went wrong with this reading, if the front end's [`crate::frontend::ChamberFaults`] made it dirty.
    pub fault: Option<ChamberFault>,
}

/// A reading made dirty by a front end's [`crate::frontend::ChamberFaults`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ChamberFault {
    /// The code was moved by this many codes (after clamping to the converter's range).
    Glitch {
        /// The change of the code.
        codes: i64,
    },
    /// The pair was this many kelvin away from the unit's temperature (an unsettled set-point).
    Unsettled {
        /// The pair's temperature minus the unit's, K.
        lag_k: f64,
    },
}

/// One noisy reading of a simulated unit, with the truth behind it: a reading of a validation run, or of
/// a field run (reference standards, a blank).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SimReading {
    /// Reading id, 1-based: unique across the units of a validation run; in a field run, the reading's
    /// number within its unit's run.
    pub id: u64,
    /// Index of the unit in [`Simulation::units`].
    pub unit: usize,
    /// The true ratio I_sig/I_ref (a standard's or the blank's known ratio in a field run).
    pub ratio: f64,
    /// x = ln ratio.
    pub x_true: f64,
    /// The unit's true temperature, °C.
    pub t_true_c: f64,
    /// The noisy ADC code.
    pub code: u32,
    /// The temperature as the firmware reads it.
    pub temperature: MeasuredTemperature,
    /// The oracle's x for this reading ([`FrontEnd::oracle`]); `None` where it is undefined.
    pub x_oracle: Option<f64>,
}

/// The oracle's error against the truth over a validation run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OracleStats {
    /// Readings where the oracle is defined.
    pub count: usize,
    /// Readings where it is not (a rail, or below the bias-current floor).
    pub undefined: usize,
    /// Root-mean-square error, nepers.
    pub rms_np: f64,
    /// Largest absolute error, nepers.
    pub max_np: f64,
}

impl OracleStats {
    /// The figures of a set of readings.
    pub fn of(rows: &[SimReading]) -> OracleStats {
        let (mut n, mut ss, mut max) = (0usize, 0.0f64, 0.0f64);
        for r in rows {
            if let Some(x) = r.x_oracle {
                let e = x - r.x_true;
                n += 1;
                ss += e * e;
                max = max.max(e.abs());
            }
        }
        let rms = if n > 0 { (ss / n as f64).sqrt() } else { f64::NAN };
        OracleStats {
            count: n,
            undefined: rows.len() - n,
            rms_np: rms,
            max_np: if n > 0 { max } else { f64::NAN },
        }
    }
}

/// A whole simulation: the units, their chamber runs and their validation runs.
#[derive(Debug, Clone)]
pub struct Simulation {
    /// The front end as given (for a batch, the nominal unit with its spread).
    pub nominal: FrontEnd,
    /// The plan it was run with.
    pub plan: Plan,
    /// The units simulated.
    pub units: Vec<SimUnit>,
    /// Every unit's chamber run, unit by unit.
    pub chamber: Vec<ChamberRow>,
    /// Every unit's validation run, unit by unit.
    pub validation: Vec<SimReading>,
    /// Every aged unit's standards run (empty for a unit without ageing).
    pub standards: Vec<SimReading>,
    /// Every aged unit's blank run (empty for a unit without ageing).
    pub blank: Vec<SimReading>,
    /// The chamber set-points, °C.
    pub setpoints_c: Vec<f64>,
}

/// Errors of a simulation.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SimError {
    /// A size of the plan is unusable.
    #[error("{what} = {value}: expected {expected}")]
    Plan {
        /// The size.
        what: &'static str,
        /// The value given.
        value: usize,
        /// What is needed.
        expected: &'static str,
    },
    /// A chosen set-point lies outside the operating range (and [`SETPOINT_MARGIN_K`] beyond).
    #[error("set-point {temp_c} °C: expected a temperature within {min_c} … {max_c} °C (the operating range and 2 K beyond)")]
    SetPoint {
        /// The set-point.
        temp_c: f64,
        /// The range's lower end.
        min_c: f64,
        /// The range's upper end.
        max_c: f64,
    },
    /// The front end (or a unit drawn from it) is invalid.
    #[error(transparent)]
    FrontEnd(#[from] FrontEndError),
    /// An output file could not be written.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
}

/// The set-points of a chamber run: `n` evenly spaced temperatures over the operating range, ends included.
pub fn setpoints(fe: &FrontEnd, n: usize) -> Vec<f64> {
    spaced(fe.operating.temp_min_c, fe.operating.temp_max_c, n)
}

/// The ratios of one sweep: `n` log-spaced ratios from `ratio_min` to `ratio_max`, ends included.
pub fn sweep_ratios(fe: &FrontEnd, n: usize) -> Vec<f64> {
    let (a, b) = (libm::log(fe.operating.ratio_min), libm::log(fe.operating.ratio_max));
    let mut r: Vec<f64> = spaced(a, b, n).into_iter().map(libm::exp).collect();
    // Keep the ends exactly as specified (exp(ln r) may differ from r in the last bit).
    if n >= 2 {
        if let Some(first) = r.first_mut() {
            *first = fe.operating.ratio_min;
        }
        if let Some(last) = r.last_mut() {
            *last = fe.operating.ratio_max;
        }
    }
    r
}

fn spaced(a: f64, b: f64, n: usize) -> Vec<f64> {
    match n {
        0 => Vec::new(),
        1 => vec![0.5 * (a + b)],
        _ => (0..n).map(|i| a + (b - a) * i as f64 / (n - 1) as f64).collect(),
    }
}

/// One unit's chamber run, drawn from its own random stream. The unit is measured as it was calibrated:
/// any [`FrontEnd::aging`] is ignored. Its [`FrontEnd::chamber_faults`] are drawn from a stream of their
/// own, so the run is the clean run of the same seed with some readings changed.
pub fn chamber_run(fe: &FrontEnd, plan: &ChamberPlan, unit: usize, seed: u64) -> Vec<ChamberRow> {
    chamber_run_at(fe, &setpoints(fe, plan.setpoints), plan, unit, seed)
}

/// [`chamber_run`] at the set-points `sps` (°C) instead of the plan's evenly spaced ones.
pub fn chamber_run_at(
    fe: &FrontEnd,
    sps: &[f64],
    plan: &ChamberPlan,
    unit: usize,
    seed: u64,
) -> Vec<ChamberRow> {
    let calibrated = fe.as_calibrated();
    let fe = &calibrated;
    let mut rng = rng_for(seed, Purpose::Chamber, unit);
    let mut frng = rng_for(seed, Purpose::Faults, unit);
    let faults = fe.chamber_faults;
    let ratios = sweep_ratios(fe, plan.ratios_per_setpoint);
    let jitter = fe.operating.setpoint_jitter_k_rms;
    let mut rows = Vec::with_capacity(sps.len() * plan.repeats * ratios.len());
    for (k, &sp) in sps.iter().enumerate() {
        // An unsettled set-point: the pair lags on the side the chamber came from.
        let from = if k == 0 { 25.0 } else { sps[k - 1] };
        let lag = match faults {
            Some(f) if f.unsettled_lag_k != 0.0 && frng.random::<f64>() < f.unsettled_share => {
                (from - sp).signum() * f.unsettled_lag_k
            }
            _ => 0.0,
        };
        for rep in 0..plan.repeats {
            for (j, &ratio) in ratios.iter().enumerate() {
                let n: f64 = StandardNormal.sample(&mut rng);
                let t_true_c = sp + jitter * n;
                let x_true = libm::log(ratio);
                let settle = faults.map_or(1.0, |f| f.unsettled_readings);
                let pair_off =
                    if rep == 0 && lag != 0.0 { lag * libm::exp(-(j as f64) / settle) } else { 0.0 };
                // The code, then the temperature reading: the draws of `FrontEnd::sample`.
                let mut code = fe.sample_code(x_true, t_true_c + pair_off, &mut rng);
                let temperature = fe.measure_temperature(t_true_c, &mut rng);
                let mut fault = (pair_off != 0.0).then_some(ChamberFault::Unsettled { lag_k: pair_off });
                if let Some(f) = faults.filter(|f| f.glitch_rate > 0.0) {
                    if frng.random::<f64>() < f.glitch_rate {
                        let (a, b) = (libm::log(f.glitch_codes_min), libm::log(f.glitch_codes_max));
                        let size = libm::exp(if b > a { frng.random_range(a..=b) } else { a });
                        let sign = if frng.random::<bool>() { 1.0 } else { -1.0 };
                        let moved = fe.quantise(f64::from(code) + sign * size);
                        fault = Some(ChamberFault::Glitch { codes: i64::from(moved) - i64::from(code) });
                        code = moved;
                    }
                }
                rows.push(ChamberRow {
                    unit,
                    setpoint_c: sp,
                    t_true_c,
                    ratio,
                    x_true,
                    code,
                    temperature,
                    fault,
                });
            }
        }
    }
    rows
}

/// One unit's validation run of `count` readings, ids from `first_id` on, drawn from its own stream.
pub fn validation_run(fe: &FrontEnd, count: usize, unit: usize, first_id: u64, seed: u64) -> Vec<SimReading> {
    let mut rng = rng_for(seed, Purpose::Validation, unit);
    let o = &fe.operating;
    let (x0, x1) = (libm::log(o.ratio_min), libm::log(o.ratio_max));
    (0..count)
        .map(|i| {
            let x_true = rng.random_range(x0..=x1);
            let t_true_c = rng.random_range(o.temp_min_c..=o.temp_max_c);
            let Sample { code, temperature } = fe.sample(x_true, t_true_c, &mut rng);
            SimReading {
                id: first_id + i as u64,
                unit,
                ratio: libm::exp(x_true),
                x_true,
                t_true_c,
                code,
                temperature,
                x_oracle: fe.oracle(code, temperature),
            }
        })
        .collect()
}

/// The standards of an aged unit's standards run: [`STANDARDS_PER_UNIT`] ratios at a quarter and three
/// quarters of the operating x range.
pub fn standard_ratios(fe: &FrontEnd) -> Vec<f64> {
    let (a, b) = (libm::log(fe.operating.ratio_min), libm::log(fe.operating.ratio_max));
    [0.25, 0.75].iter().map(|q| libm::exp(a + q * (b - a))).collect()
}

/// The ratio of an aged unit's blank: 1 when it lies in the operating range, else the range's geometric
/// centre.
pub fn blank_ratio(fe: &FrontEnd) -> f64 {
    let o = &fe.operating;
    if (o.ratio_min..=o.ratio_max).contains(&1.0) {
        1.0
    } else {
        libm::sqrt(o.ratio_min * o.ratio_max)
    }
}

/// The temperature of the field runs: [`FIELD_TEMP_C`] clamped into the operating range.
pub fn field_temp_c(fe: &FrontEnd) -> f64 {
    FIELD_TEMP_C.clamp(fe.operating.temp_min_c, fe.operating.temp_max_c)
}

/// `readings` readings of each ratio at `temp_c` (with the set-point jitter), the unit as it is now (with
/// its ageing), from the stream of `purpose`.
fn field_run(
    fe: &FrontEnd,
    ratios: &[f64],
    temp_c: f64,
    readings: usize,
    unit: usize,
    rng: &mut ChaCha8Rng,
) -> Vec<SimReading> {
    let jitter = fe.operating.setpoint_jitter_k_rms;
    let mut rows = Vec::with_capacity(ratios.len() * readings);
    for &ratio in ratios {
        let x_true = libm::log(ratio);
        for _ in 0..readings {
            let n: f64 = StandardNormal.sample(rng);
            let t_true_c = temp_c + jitter * n;
            let Sample { code, temperature } = fe.sample(x_true, t_true_c, rng);
            let x_oracle = fe.oracle(code, temperature);
            let id = rows.len() as u64 + 1;
            rows.push(SimReading { id, unit, ratio, x_true, t_true_c, code, temperature, x_oracle });
        }
    }
    rows
}

/// One unit's readings of reference standards of known `ratios`, `readings` each at `temp_c`, from its own
/// random stream (the unit as it is now, with its ageing).
pub fn standards_run(
    fe: &FrontEnd,
    ratios: &[f64],
    temp_c: f64,
    readings: usize,
    unit: usize,
    seed: u64,
) -> Vec<SimReading> {
    field_run(fe, ratios, temp_c, readings, unit, &mut rng_for(seed, Purpose::Standards, unit))
}

/// One unit's readings of a blank of `ratio`, `readings` of them at `temp_c`, from its own random stream.
pub fn blank_run(
    fe: &FrontEnd,
    ratio: f64,
    temp_c: f64,
    readings: usize,
    unit: usize,
    seed: u64,
) -> Vec<SimReading> {
    field_run(fe, &[ratio], temp_c, readings, unit, &mut rng_for(seed, Purpose::Blank, unit))
}

/// The serial of the `i`-th unit (0-based) of a batch.
pub fn serial(i: usize) -> String {
    format!("U{:04}", i + 1)
}

/// Runs a whole simulation: draws the units, then each unit's chamber and validation runs.
pub fn simulate(fe: &FrontEnd, plan: &Plan) -> Result<Simulation, SimError> {
    simulate_lot(fe, plan, &Lot::default())
}

/// The units of a lot that do not belong: `count` distinct places among `units`, drawn from their own
/// stream.
pub fn outlier_places(seed: u64, units: usize, count: usize) -> Vec<usize> {
    let mut rng = rng_for(seed, Purpose::Outliers, 0);
    let mut all: Vec<usize> = (0..units).collect();
    let count = count.min(units);
    for i in 0..count {
        let j = rng.random_range(i..units);
        all.swap(i, j);
    }
    let mut chosen = all[..count].to_vec();
    chosen.sort_unstable();
    chosen
}

/// The design's spread, `factor` times wider.
fn widened(fe: &FrontEnd, factor: f64) -> FrontEnd {
    let mut wide = fe.clone();
    if let Some(s) = &mut wide.spread {
        for v in [
            &mut s.ideality,
            &mut s.mismatch_v,
            &mut s.bulk_resistance_rel,
            &mut s.offset_v,
            &mut s.offset_drift_v_per_k,
            &mut s.bias_rel,
            &mut s.gain_rel,
            &mut s.tempco_per_k,
            &mut s.level_shift_v,
            &mut s.adc_gain_error,
            &mut s.adc_offset_codes,
            &mut s.sensor_offset_k,
            &mut s.sensor_element_rel,
        ] {
            *v *= factor;
        }
    }
    wide
}

/// [`simulate`] of a lot: with chosen set-points and units that do not belong ([`Lot`]). An outlier whose
/// draw the model refuses is drawn again from the rest of its stream (at most 20 times).
pub fn simulate_lot(fe: &FrontEnd, plan: &Plan, lot: &Lot) -> Result<Simulation, SimError> {
    fe.validate()?;
    // Chosen set-points are the plan's number of set-points (for its size checks and the manifest).
    let mut plan = *plan;
    if !lot.setpoints_c.is_empty() {
        plan.chamber.setpoints = lot.setpoints_c.len();
    }
    let plan = &plan;
    check_plan(plan)?;
    if lot.outliers > plan.units || (lot.outliers > 0 && fe.spread.is_none()) {
        return Err(SimError::Plan {
            what: "outliers",
            value: lot.outliers,
            expected: "at most the number of units, and a design with a unit-to-unit spread",
        });
    }
    let setpoints_c = if lot.setpoints_c.is_empty() {
        setpoints(fe, plan.chamber.setpoints)
    } else {
        lot.setpoints_c.clone()
    };
    let o = &fe.operating;
    let (lo, hi) = (o.temp_min_c - SETPOINT_MARGIN_K, o.temp_max_c + SETPOINT_MARGIN_K);
    if let Some(t) = setpoints_c.iter().find(|t| !(t.is_finite() && (lo..=hi).contains(*t))) {
        return Err(SimError::SetPoint { temp_c: *t, min_c: lo, max_c: hi });
    }
    let outliers = outlier_places(plan.seed, plan.units, lot.outliers);
    let wide = widened(fe, OUTLIER_SPREAD);
    let units: Vec<SimUnit> = if plan.units == 1 && outliers.is_empty() {
        vec![SimUnit { serial: serial(0), frontend: fe.clone(), outlier: false }]
    } else {
        (0..plan.units)
            .map(|i| {
                let s = serial(i);
                let mut rng = rng_for(plan.seed, Purpose::UnitDraw, i);
                let outlier = outliers.contains(&i);
                let mut drawn =
                    if outlier { wide.draw_unit(&s, &mut rng) } else { fe.draw_unit(&s, &mut rng) };
                for _ in 0..20 {
                    if !(outlier && drawn.is_err()) {
                        break;
                    }
                    drawn = wide.draw_unit(&s, &mut rng);
                }
                drawn.map(|frontend| SimUnit { serial: s, frontend, outlier })
            })
            .collect::<Result<_, _>>()?
    };
    let mut chamber = Vec::new();
    let mut validation = Vec::new();
    let mut standards = Vec::new();
    let mut blank = Vec::new();
    for (i, u) in units.iter().enumerate() {
        let fe = &u.frontend;
        chamber.extend(chamber_run_at(fe, &setpoints_c, &plan.chamber, i, plan.seed));
        let first_id = (i * plan.validation_count) as u64 + 1;
        validation.extend(validation_run(fe, plan.validation_count, i, first_id, plan.seed));
        if fe.aging.is_some() {
            let t = field_temp_c(fe);
            standards.extend(standards_run(fe, &standard_ratios(fe), t, FIELD_READINGS, i, plan.seed));
            blank.extend(blank_run(fe, blank_ratio(fe), t, FIELD_READINGS, i, plan.seed));
        }
    }
    Ok(Simulation {
        nominal: fe.clone(),
        plan: *plan,
        units,
        chamber,
        validation,
        standards,
        blank,
        setpoints_c,
    })
}

fn check_plan(plan: &Plan) -> Result<(), SimError> {
    let bad = |what, value, expected| Err(SimError::Plan { what, value, expected });
    let c = &plan.chamber;
    if c.setpoints < 2 {
        return bad("set-points", c.setpoints, "at least 2 (they span the operating range, ends included)");
    }
    if c.ratios_per_setpoint < 2 {
        return bad("ratios per set-point", c.ratios_per_setpoint, "at least 2 (ratio_min and ratio_max)");
    }
    if c.repeats < 1 {
        return bad("repeats", c.repeats, "at least 1");
    }
    if plan.validation_count < 1 {
        return bad("validation readings", plan.validation_count, "at least 1");
    }
    if plan.units < 1 {
        return bad("units", plan.units, "at least 1");
    }
    let per_unit = c
        .setpoints
        .checked_mul(c.ratios_per_setpoint)
        .and_then(|v| v.checked_mul(c.repeats))
        .and_then(|v| v.checked_add(plan.validation_count));
    match per_unit.and_then(|v| v.checked_mul(plan.units)) {
        Some(total) if total <= MAX_ROWS => Ok(()),
        total => bad("rows in all", total.unwrap_or(usize::MAX), "at most 50,000,000 (MAX_ROWS)"),
    }
}

/// One file written by [`Simulation::write_to`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WrittenFile {
    /// Where it was written.
    pub path: PathBuf,
    /// Data rows, for a CSV file.
    pub rows: Option<usize>,
}

impl Simulation {
    /// The oracle's figures over every validation reading.
    pub fn oracle_stats(&self) -> OracleStats {
        OracleStats::of(&self.validation)
    }

    fn batch(&self) -> bool {
        self.units.len() > 1
    }

    fn temp_column(&self) -> &'static str {
        self.chamber.first().map_or("temp_c", |r| r.temperature.column())
    }

    /// `cal.csv`: `unit,code,temp_c,ratio` (`temp_code` instead of `temp_c` for a raw temperature channel).
    /// The unit column is there for one unit too, so that `fit` names the calibration for its serial.
    pub fn cal_csv(&self) -> Vec<u8> {
        self.csv_with(
            false,
            true,
            &["code", self.temp_column(), "ratio"],
            &self.chamber,
            |r| (0, r.unit),
            |r| vec![r.code.to_string(), temperature_field(r.temperature), r.ratio.to_string()],
        )
    }

    /// A field run as CSV: `[unit,]code,temp_c[,ratio]`.
    fn field_csv(&self, rows: &[SimReading], with_ratio: bool) -> Vec<u8> {
        let columns: &[&str] =
            if with_ratio { &["code", self.temp_column(), "ratio"] } else { &["code", self.temp_column()] };
        self.csv(
            false,
            columns,
            rows,
            |r| (r.id, r.unit),
            |r| {
                let mut f = vec![r.code.to_string(), temperature_field(r.temperature)];
                if with_ratio {
                    f.push(r.ratio.to_string());
                }
                f
            },
        )
    }

    /// `standards.csv`: `[unit,]code,temp_c,ratio` of the standards runs.
    pub fn standards_csv(&self) -> Vec<u8> {
        self.field_csv(&self.standards, true)
    }

    /// `blank.csv`: `[unit,]code,temp_c` of the blank runs.
    pub fn blank_csv(&self) -> Vec<u8> {
        self.field_csv(&self.blank, false)
    }

    /// `readings.csv`: `id,[unit,]code,temp_c` (`temp_code` for a raw temperature channel).
    pub fn readings_csv(&self) -> Vec<u8> {
        self.csv(
            true,
            &["code", self.temp_column()],
            &self.validation,
            |r| (r.id, r.unit),
            |r| vec![r.code.to_string(), temperature_field(r.temperature)],
        )
    }

    /// `truth.csv`: `id,[unit,]ratio,x_true,t_true_c,x_oracle`.
    pub fn truth_csv(&self) -> Vec<u8> {
        let columns = ["ratio", "x_true", "t_true_c", "x_oracle"];
        self.csv(
            true,
            &columns,
            &self.validation,
            |r| (r.id, r.unit),
            |r| {
                vec![
                    r.ratio.to_string(),
                    r.x_true.to_string(),
                    r.t_true_c.to_string(),
                    r.x_oracle.map(|x| x.to_string()).unwrap_or_default(),
                ]
            },
        )
    }

    /// A CSV file of `rows`: the header `[id,][unit,]` and `columns`, then per row its id (with `with_id`),
    /// its unit's serial (in a batch) and its `fields`; `key` gives a row's id and unit.
    fn csv<R>(
        &self,
        with_id: bool,
        columns: &[&str],
        rows: &[R],
        key: impl Fn(&R) -> (u64, usize),
        fields: impl Fn(&R) -> Vec<String>,
    ) -> Vec<u8> {
        self.csv_with(with_id, self.batch(), columns, rows, key, fields)
    }

    /// [`Simulation::csv`], with the unit column when `with_unit`.
    fn csv_with<R>(
        &self,
        with_id: bool,
        with_unit: bool,
        columns: &[&str],
        rows: &[R],
        key: impl Fn(&R) -> (u64, usize),
        fields: impl Fn(&R) -> Vec<String>,
    ) -> Vec<u8> {
        let mut w = csv::Writer::from_writer(Vec::new());
        let mut head = Vec::new();
        if with_id {
            head.push("id");
        }
        if with_unit {
            head.push("unit");
        }
        head.extend_from_slice(columns);
        let mut out = CsvOut(&mut w);
        out.row(head.iter().map(|s| s.to_string()));
        for r in rows {
            let (id, unit) = key(r);
            let mut f = Vec::with_capacity(head.len());
            if with_id {
                f.push(id.to_string());
            }
            if with_unit {
                f.push(self.units[unit].serial.clone());
            }
            f.extend(fields(r));
            out.row(f);
        }
        into_bytes(w)
    }

    /// `faults.csv`: the chamber readings a front end's faults made dirty, by their line in `cal.csv`:
    /// `line,unit,kind,size` with kind `glitch` (size: the change of the code) or `unsettled` (size: the
    /// pair's lag, K). `None` when no reading is dirty.
    pub fn faults_csv(&self) -> Option<Vec<u8>> {
        let mut w = csv::Writer::from_writer(Vec::new());
        let mut out = CsvOut(&mut w);
        out.row(["line", "unit", "kind", "size"].map(String::from));
        let mut any = false;
        for (i, r) in self.chamber.iter().enumerate() {
            let Some(f) = r.fault else { continue };
            any = true;
            let (kind, size) = match f {
                ChamberFault::Glitch { codes } => ("glitch", codes.to_string()),
                ChamberFault::Unsettled { lag_k } => ("unsettled", lag_k.to_string()),
            };
            out.row([(i + 2).to_string(), self.units[r.unit].serial.clone(), kind.to_string(), size]);
        }
        any.then(|| into_bytes(w))
    }

    /// `manifest.json`: what generated the files, with the plan and the oracle's figures.
    pub fn manifest_json(&self, files: &[&str]) -> String {
        let m = serde_json::json!({
            "generator": format!("logtrim {} simulate — generated file, do not edit", env!("CARGO_PKG_VERSION")),
            "frontend": self.nominal.name,
            "plan": self.plan,
            "setpoints_c": self.setpoints_c,
            "outliers": self.units.iter().filter(|u| u.outlier).map(|u| u.serial.as_str()).collect::<Vec<_>>(),
            "units": self.units.iter().map(|u| u.serial.as_str()).collect::<Vec<_>>(),
            "rows": { "cal": self.chamber.len(), "validation": self.validation.len() },
            "oracle": self.oracle_stats(),
            "files": files,
        });
        let mut m = m;
        if let Some(a) = self.nominal.aging {
            m["aging"] = serde_json::json!(a);
            m["rows"]["standards"] = serde_json::json!(self.standards.len());
            m["rows"]["blank"] = serde_json::json!(self.blank.len());
            m["field_temp_c"] = serde_json::json!(field_temp_c(&self.nominal));
        }
        let mut s = crate::output::number::to_json_pretty(&m).unwrap_or_default();
        s.push('\n');
        s
    }

    /// `units.json` for a batch: every unit's front end by serial.
    pub fn units_json(&self) -> String {
        let m = serde_json::json!({
            "generator": format!("logtrim {} simulate — generated file, do not edit", env!("CARGO_PKG_VERSION")),
            "units": self.units,
        });
        let mut s = crate::output::number::to_json_pretty(&m).unwrap_or_default();
        s.push('\n');
        s
    }

    /// Writes every file into `dir` (created if missing), each atomically. All contents are built before the
    /// first file is written.
    pub fn write_to(&self, dir: &Path) -> Result<Vec<WrittenFile>, SimError> {
        let mut files: Vec<(&str, Vec<u8>, Option<usize>)> = vec![
            ("cal.csv", self.cal_csv(), Some(self.chamber.len())),
            ("readings.csv", self.readings_csv(), Some(self.validation.len())),
            ("truth.csv", self.truth_csv(), Some(self.validation.len())),
            ("frontend.json", self.nominal.to_json().into_bytes(), None),
        ];
        if self.batch() {
            files.push(("units.json", self.units_json().into_bytes(), None));
        }
        if let Some(f) = self.faults_csv() {
            let n = self.chamber.iter().filter(|r| r.fault.is_some()).count();
            files.push(("faults.csv", f, Some(n)));
        }
        if !self.standards.is_empty() {
            files.push(("standards.csv", self.standards_csv(), Some(self.standards.len())));
            files.push(("blank.csv", self.blank_csv(), Some(self.blank.len())));
        }
        let mut names: Vec<&str> = files.iter().map(|f| f.0).collect();
        names.push("manifest.json");
        let manifest = self.manifest_json(&names).into_bytes();
        files.push(("manifest.json", manifest, None));
        std::fs::create_dir_all(dir).map_err(|source| crate::file_error::FileError::io(dir, source))?;
        let mut written = Vec::new();
        for (name, bytes, rows) in files {
            let path = dir.join(name);
            crate::output::write_atomic(&path, &bytes)
                .map_err(|source| crate::file_error::FileError::io(&path, source))?;
            written.push(WrittenFile { path, rows });
        }
        Ok(written)
    }
}

fn temperature_field(t: MeasuredTemperature) -> String {
    match t {
        MeasuredTemperature::Celsius(c) => c.to_string(),
        MeasuredTemperature::Code(c) => c.to_string(),
    }
}

/// A CSV writer into memory: writing to a `Vec` cannot fail, so rows are written without a `Result`.
struct CsvOut<'a>(&'a mut csv::Writer<Vec<u8>>);

impl CsvOut<'_> {
    fn row<I: IntoIterator<Item = String>>(&mut self, fields: I) {
        // Only an I/O error of the inner writer could fail this, and a Vec does not fail.
        let _ = self.0.write_record(fields);
    }
}

fn into_bytes(w: csv::Writer<Vec<u8>>) -> Vec<u8> {
    w.into_inner().unwrap_or_default()
}

#[cfg(test)]
mod tests;
