//! Fitting a unit's calibration from chamber data.
//!
//! 1. Rows that must not be fitted are set aside first ([`screen`]): codes at or within the rail margin of
//!    either rail, and stray readings far from every chamber set-point. The calibrated ranges never see them.
//! 2. The other rows are grouped into chamber set-points by their measured temperature (a gap of more than
//!    [`FitOptions::setpoint_gap_k`] starts a new set-point).
//! 3. The data are checked for what the model needs: at least two set-points, enough rows and distinct
//!    ratios at each, a span of ratios of at least [`FitOptions::min_span_decades`].
//! 4. Variables are centred and scaled (τ over the temperature range, codes about their median) and the
//!    forward model of [`model`] is fitted by linear least squares (blocked QR + SVD) for its linear
//!    coefficients and Levenberg–Marquardt for the gain pole and the bias-current term.
//! 5. The model size is chosen by leave-one-temperature-out cross-validation ([`select`]) unless fixed, on
//!    the rows a model-free repeat screen keeps.
//! 6. With that model, the unit's own noise is measured from its repeats ([`noise`]), and unsettled
//!    set-points and glitches are found against it and set aside ([`screen`]); if anything changed, the
//!    size is searched again on the cleaned data, and the screens and refits repeat until the rows kept no
//!    longer change (at most a few rounds).
//! 7. The result becomes firmware-lib's [`Calibration`]. The per-set-point residuals are computed by
//!    inverting with the firmware's own correction (in f64), and every row is put through the firmware's
//!    f32 path as the unit ships: the rows it refuses are the fit's refused rows, each named.

pub mod model;
pub mod noise;
pub mod prior;
pub mod robust;
pub mod screen;
pub mod select;
pub mod solve;

use logtrim::calibration::{TemperatureRange, XRange, MAX_SERIES};
use logtrim::Calibration;
use serde::Serialize;

use crate::output::number::Num;

use model::{Envelope, Norm, Params, Prep, Spec};
use noise::NoiseModel;
use screen::{Layout, RowFit};
pub use screen::{Reason, UnsettledSweep};
use select::{cross_validate, fit_spec, moves, thin, CvRecord, MIN_GAIN};

/// Calibration data: one entry per row, in file order (which the unsettled screen takes for time order).
#[derive(Debug, Clone, Default)]
pub struct FitData {
    /// ADC code of the log channel.
    pub code: Vec<u32>,
    /// Measured temperature, °C.
    pub temp_c: Vec<f64>,
    /// Applied ratio I_sig/I_ref (> 0).
    pub ratio: Vec<f64>,
    /// Row weight (> 0); empty means all 1.
    pub weight: Vec<f64>,
    /// Each row's line in its file (1-based); empty when the rows did not come from a file.
    pub line: Vec<u64>,
    /// The temperature as the firmware is given it, f32 °C: a raw channel's code converted by the sensor's
    /// f32 path, or why it gives none. Empty means `temp_c` rounded to f32 (a digital sensor).
    pub firmware_temp: Vec<Result<f32, logtrim::Error>>,
    /// The raw temperature-channel codes, for data read with a `temp_code` column (else empty).
    pub temp_code: Vec<u32>,
    /// The file the rows came from (empty when not from a file).
    pub source: String,
}

impl FitData {
    /// The rows of a calibration file, all of them or those of one unit (index into the file's units).
    pub fn from_rows(rows: &[crate::data::CalRow], unit: Option<u32>) -> FitData {
        let mut d = FitData::default();
        for r in rows.iter().filter(|r| unit.is_none() || r.unit == unit) {
            d.code.push(r.code);
            d.temp_c.push(r.temp_c);
            d.ratio.push(r.ratio);
            d.weight.push(r.weight);
            d.line.push(r.line);
            if let Some(c) = r.temp_code {
                d.temp_code.push(c);
            }
        }
        if d.temp_code.len() != d.code.len() {
            d.temp_code.clear();
        }
        d
    }

    /// Sets [`FitData::firmware_temp`] from the raw temperature codes through the sensor's f32 path, as
    /// the firmware converts them (nothing changes without raw codes).
    pub fn with_sensor(mut self, sensor: &logtrim::sensor::TemperatureSensor) -> FitData {
        if self.temp_code.len() == self.code.len() {
            self.firmware_temp = self.temp_code.iter().map(|&c| sensor.celsius(c)).collect();
        }
        self
    }

    /// Rows.
    pub fn len(&self) -> usize {
        self.code.len()
    }

    /// No rows.
    pub fn is_empty(&self) -> bool {
        self.code.is_empty()
    }

    /// Where row `i` is: `FILE: line N`, `line N` or `row i` (0-based) as far as known.
    pub fn place(&self, i: usize) -> String {
        match (self.line.get(i), self.source.is_empty()) {
            (Some(l), false) => format!("{}: line {l}", self.source),
            (Some(l), true) => format!("line {l}"),
            (None, _) => format!("row {i}"),
        }
    }
}

/// Options of a fit.
#[derive(Debug, Clone)]
pub struct FitOptions {
    /// ADC resolution in bits.
    pub bits: u8,
    /// A gap in measured temperature larger than this (K) separates two set-points.
    pub setpoint_gap_k: f64,
    /// A fixed model size instead of cross-validated selection.
    pub spec: Option<Spec>,
    /// Most Chebyshev terms of any series over temperature.
    pub max_series: usize,
    /// Rows used in the model search and cross-validation (a deterministic thinning); the final linear
    /// solve uses all rows.
    pub search_rows: usize,
    /// Codes within this many of a rail are refused as saturated; `None`: 2^(bits−13), at least 1.
    pub rail_margin: Option<u32>,
    /// Readings where the front end's sensitivity has fallen below this fraction of ideal are refused.
    pub min_sensitivity: f64,
    /// Allowance added to each end of the calibrated x range, nepers; `None`: [`AUTO_MARGIN_SIGMAS`]
    /// times the rms error in x of the rows at that end (at most [`MAX_AUTO_MARGIN`]), so that a reading
    /// of a true value at the end of the range is not refused because of its noise.
    pub x_margin: Option<f64>,
    /// Bounded temperature extrapolation allowed (and flagged) beyond the calibrated range, K.
    pub extrapolation_k: f64,
    /// Smallest span of ratios accepted, decades.
    pub min_span_decades: f64,
    /// Fewest rows accepted per set-point.
    pub min_rows_per_setpoint: usize,
    /// Screen the rows (rails, stray temperatures, unsettled set-points, glitches) and set aside those
    /// that must not be fitted; off, every row is fitted as given.
    pub screen: bool,
    /// A normalisation to use instead of the one made from the data (a population's common one).
    pub norm: Option<Norm>,
    /// A population's prior ([`prior`]): the unit is fitted with the population's model size,
    /// normalisation and calibrated temperature range, its parameters held to the population's spread.
    pub population: Option<std::sync::Arc<prior::Prior>>,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            bits: 16,
            setpoint_gap_k: 2.0,
            spec: None,
            max_series: 4,
            search_rows: 16_000,
            rail_margin: None,
            min_sensitivity: 0.1,
            x_margin: None,
            extrapolation_k: 0.0,
            min_span_decades: 1.0,
            min_rows_per_setpoint: 8,
            screen: true,
            norm: None,
            population: None,
        }
    }
}

/// The automatic x-range allowance in multiples of the rms error at each end.
pub const AUTO_MARGIN_SIGMAS: f64 = 4.0;
/// The largest automatic x-range allowance, nepers.
pub const MAX_AUTO_MARGIN: f64 = 0.05;

/// Why data cannot be fitted. Each message says what to add or change.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FitError {
    /// No rows at all.
    #[error("no calibration rows: add rows with code, temp_c and ratio")]
    Empty,
    /// Columns of different lengths were given.
    #[error("internal: data columns have different lengths")]
    Ragged,
    /// A value was not usable (the reader should have refused it).
    #[error("{}: {what}", line.map_or_else(|| format!("row {row}"), |l| format!("line {l}")))]
    BadValue {
        /// 0-based row index.
        row: usize,
        /// The row's file line, when known.
        line: Option<u64>,
        /// What was wrong.
        what: String,
    },
    /// Every row is at a rail: there is nothing to fit.
    #[error("all {rows} rows are at or within {margin} codes of an ADC rail ({low} at 0, {high} at {max}): the front end or the converter is saturated; check the level shift and gain, and that the ADC bits are right")]
    AllAtRails {
        /// Rows in the data.
        rows: usize,
        /// Rows at the low rail.
        low: usize,
        /// Rows at the high rail.
        high: usize,
        /// The rail margin, codes.
        margin: u32,
        /// The converter's largest code.
        max: u32,
    },
    /// All rows are at one temperature.
    #[error("all rows are at one temperature ({temp_c:.2} °C): add chamber set-points, at least 3 spread over the range to be calibrated (2 give no cross-validation)")]
    OneTemperature {
        /// The temperature.
        temp_c: f64,
    },
    /// A set-point has too few rows.
    #[error("set-point near {temp_c:.2} °C has {rows} rows: add rows, at least {needed} per set-point")]
    FewRows {
        /// The set-point's mean temperature.
        temp_c: f64,
        /// Rows found.
        rows: usize,
        /// Rows needed.
        needed: usize,
    },
    /// A set-point has too few distinct ratios.
    #[error("set-point near {temp_c:.2} °C has {distinct} distinct ratios: apply at least {needed} ratios spread over the range")]
    FewRatios {
        /// The set-point's mean temperature.
        temp_c: f64,
        /// Distinct ratios found.
        distinct: usize,
        /// Distinct ratios needed.
        needed: usize,
    },
    /// The ratios span too little.
    #[error("ratios span only {decades:.2} decades ({min:.4e} … {max:.4e}): apply ratios spanning at least {needed} decade(s)")]
    NarrowSpan {
        /// Span found, decades.
        decades: f64,
        /// Smallest ratio.
        min: f64,
        /// Largest ratio.
        max: f64,
        /// Span needed.
        needed: f64,
    },
    /// The model has more parameters than the data can determine.
    #[error("model {spec} needs more data than given: {why}")]
    Underdetermined {
        /// The model size.
        spec: String,
        /// What is missing.
        why: String,
    },
    /// The solver found no usable solution.
    #[error("the fit did not converge to a usable calibration ({why}); check the data for mixed units or wrong columns")]
    Failed {
        /// What failed.
        why: String,
    },
}

/// Residual figures of one set-point, computed through the firmware's correction.
#[derive(Debug, Clone, Serialize)]
pub struct SetPointStats {
    /// Mean measured temperature, °C.
    pub temp_c: f64,
    /// Rows at the set-point (rows at a rail are in no set-point).
    pub rows: usize,
    /// Rows the firmware's f32 path refuses (below range where the sensitivity is gone, etc.).
    pub refused: usize,
    /// Rows set aside by the fit's screens (unsettled, glitches).
    pub set_aside: usize,
    /// rms error in x of the rows fitted, nepers.
    pub rms_np: f64,
    /// max |error| in x of the rows fitted, nepers.
    pub max_np: f64,
    /// The rms noise in x of the rows fitted (the unit's noise model through the local slope), nepers.
    pub noise_np: f64,
    /// The rms of the rows' errors each in units of its own noise: about 1 for a fit that leaves only
    /// noise, whatever the spread of the noise across the set-point (a plain ratio of rms figures would be
    /// ruled by the few noisiest rows at a bend).
    pub residual_ratio: f64,
}

impl SetPointStats {
    /// [`SetPointStats::residual_ratio`].
    pub fn residual_ratio(&self) -> f64 {
        self.residual_ratio
    }
}

/// A row set aside by the fit, with the reason and its residual against the final model.
#[derive(Debug, Clone, Serialize)]
pub struct SetAsideRow {
    /// 0-based index into the fit data.
    pub row: usize,
    /// The file line (1-based; the header is line 1), when the rows came from a file.
    pub line: Option<u64>,
    /// The log channel's code.
    pub code: u32,
    /// The measured temperature, °C.
    pub temp_c: f64,
    /// The applied ratio.
    pub ratio: f64,
    /// Why.
    pub reason: Reason,
    /// code − model, codes (not for a code at a rail, which says nothing about x).
    pub residual_codes: Option<f64>,
    /// The residual in units of the row's noise σ.
    pub residual_sigmas: Option<f64>,
    /// The residual as an error in x, nepers.
    pub residual_np: Option<f64>,
}

/// A row the firmware's f32 path refuses with the calibration as it ships.
#[derive(Debug, Clone, Serialize)]
pub struct RefusedRow {
    /// 0-based index into the fit data.
    pub row: usize,
    /// The file line, when the rows came from a file.
    pub line: Option<u64>,
    /// The log channel's code.
    pub code: u32,
    /// The temperature as the firmware is given it, °C (a raw channel's code converted in f32).
    pub temp_c: f64,
    /// The applied ratio.
    pub ratio: f64,
    /// The firmware's status name (`below_range`, `saturated`, …).
    pub status: &'static str,
}

/// What the fit's screens found, and the rows the shipped calibration refuses.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Screening {
    /// Rows in the data.
    pub rows: usize,
    /// Rows the final fit used.
    pub rows_fitted: usize,
    /// Every row set aside, in row order.
    pub set_aside: Vec<SetAsideRow>,
    /// Set-points whose early sweeps drifted (their rows are in `set_aside`).
    pub unsettled: Vec<UnsettledSweep>,
    /// The unit's noise in codes.
    pub noise: Option<NoiseModel>,
    /// The glitch screen's threshold, in σ.
    pub glitch_threshold_sigmas: f64,
    /// Every row the firmware's f32 path refuses with the shipped calibration, in row order.
    pub refused: Vec<RefusedRow>,
}

impl Screening {
    /// Rows set aside for `reason`.
    pub fn count(&self, reason: Reason) -> usize {
        self.set_aside.iter().filter(|r| r.reason == reason).count()
    }

    /// The share of rows set aside (0 for no rows).
    pub fn set_aside_fraction(&self) -> f64 {
        if self.rows == 0 {
            0.0
        } else {
            self.set_aside.len() as f64 / self.rows as f64
        }
    }
}

/// The result of a fit.
#[derive(Debug, Clone, Serialize)]
pub struct FitOutcome {
    /// The firmware calibration.
    #[serde(skip)]
    pub calibration: Calibration,
    /// The fitted parameters (f64).
    pub params: Params,
    /// The normalisation.
    pub norm: Norm,
    /// The chosen model size.
    pub chosen: Spec,
    /// Per-set-point residuals.
    pub setpoints: Vec<SetPointStats>,
    /// Cross-validation figures of every size tried (empty when the size was fixed).
    pub cv: Vec<CvRecord>,
    /// The noise floor in x: the rms over the rows fitted of the unit's noise through the local slope,
    /// nepers.
    pub noise_floor_np: Option<f64>,
    /// The rms noise in x of the rows cross-validation holds out (the interior set-points' rows fitted),
    /// nepers: the figure its error compares with.
    pub cv_noise_np: Option<f64>,
    /// Notes for the user (e.g. no cross-validation possible).
    pub notes: Vec<String>,
    /// Rows set aside and rows refused.
    pub screening: Screening,
    /// For a unit fitted against a population: its scores and distance from the population.
    pub population: Option<prior::PopulationFit>,
}

impl FitOutcome {
    /// The cross-validation figures of the chosen size, if it was cross-validated.
    pub fn chosen_cv(&self) -> Option<&CvRecord> {
        self.cv.iter().find(|r| r.chosen)
    }
}

fn check_data(data: &FitData, opt: &FitOptions) -> Result<(), FitError> {
    let n = data.code.len();
    if n == 0 {
        return Err(FitError::Empty);
    }
    if data.temp_c.len() != n
        || data.ratio.len() != n
        || !(data.weight.is_empty() || data.weight.len() == n)
        || !(data.line.is_empty() || data.line.len() == n)
        || !(data.firmware_temp.is_empty() || data.firmware_temp.len() == n)
    {
        return Err(FitError::Ragged);
    }
    if !(1..=24).contains(&opt.bits) {
        return Err(FitError::BadValue {
            row: 0,
            line: None,
            what: format!("ADC bits {}: expected 1..=24", opt.bits),
        });
    }
    let max = max_code(opt.bits);
    let bad = |i: usize, what: String| FitError::BadValue { row: i, line: data.line.get(i).copied(), what };
    for i in 0..n {
        let r = data.ratio[i];
        if !(r.is_finite() && r > 0.0) {
            return Err(bad(i, format!("ratio {r} is not a positive number")));
        }
        if !(1e-30..=1e30).contains(&r) {
            return Err(bad(i, format!("ratio {r:e} is outside 1e-30 … 1e30, which no front end produces")));
        }
        if !data.temp_c[i].is_finite() || data.temp_c[i].abs() > 1000.0 {
            return Err(bad(
                i,
                format!("temperature {} °C is not a finite value within ±1000 °C", data.temp_c[i]),
            ));
        }
        if data.code[i] > max {
            return Err(bad(
                i,
                format!(
                    "code {} is above {max}, the largest code of a {}-bit converter",
                    data.code[i], opt.bits
                ),
            ));
        }
        if let Some(w) = data.weight.get(i) {
            if !(w.is_finite() && *w > 0.0) {
                return Err(bad(i, format!("weight {w} is not positive")));
            }
        }
    }
    Ok(())
}

/// The largest code of a `bits`-bit converter.
pub fn max_code(bits: u8) -> u32 {
    (1u32 << bits.clamp(1, 24)) - 1
}

impl FitOptions {
    /// The rail margin in codes: the option, or 2^(bits−13), at least 1.
    pub fn rail_margin(&self) -> u32 {
        self.rail_margin.unwrap_or_else(|| 1u32 << self.bits.saturating_sub(13)).max(1)
    }
}

/// Groups row indices into set-points by measured temperature.
pub fn setpoints(temp_c: &[f64], gap_k: f64) -> Vec<Vec<usize>> {
    let all: Vec<usize> = (0..temp_c.len()).collect();
    setpoints_of(temp_c, &all, gap_k)
}

/// Groups the rows `rows` into set-points by measured temperature (each group in temperature order).
fn setpoints_of(temp_c: &[f64], rows: &[usize], gap_k: f64) -> Vec<Vec<usize>> {
    let mut idx = rows.to_vec();
    idx.sort_by(|&a, &b| temp_c[a].total_cmp(&temp_c[b]));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let mut last = f64::NEG_INFINITY;
    for i in idx {
        let t = temp_c[i];
        if t - last > gap_k || groups.is_empty() {
            groups.push(Vec::new());
        }
        if let Some(g) = groups.last_mut() {
            g.push(i);
        }
        last = t;
    }
    groups
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v.get(v.len() / 2).copied().unwrap_or(0.0)
}

/// Most rounds of screening and refitting (each round re-judges every row against the latest fit).
const MAX_ROUNDS: usize = 6;

/// The model size, its parameters and the search's figures.
struct Searched {
    spec: Spec,
    params: Params,
    cv: Vec<CvRecord>,
    notes: Vec<String>,
}

/// Fits a calibration to chamber data: rows that must not be fitted are set aside (see [`screen`]), the
/// model size is searched on the rest, glitches and unsettled set-points are found against the unit's own
/// noise and set aside, and the size is searched again on the cleaned data if anything changed.
pub fn fit(data: &FitData, opt: &FitOptions) -> Result<FitOutcome, FitError> {
    check_data(data, opt)?;
    let n = data.code.len();
    let max = max_code(opt.bits);
    let margin = opt.rail_margin();
    let mut reason: Vec<Option<Reason>> =
        if opt.screen { screen::rails(&data.code, max, margin) } else { vec![None; n] };
    let live_rows: Vec<usize> = (0..n).filter(|&i| reason[i].is_none()).collect();
    if live_rows.is_empty() {
        let low = reason.iter().filter(|r| **r == Some(Reason::LowRail)).count();
        return Err(FitError::AllAtRails { rows: n, low, high: n - low, margin, max });
    }
    let mut groups_idx = setpoints_of(&data.temp_c, &live_rows, opt.setpoint_gap_k);
    if opt.screen && groups_idx.iter().filter(|g| g.len() >= opt.min_rows_per_setpoint).count() >= 2 {
        groups_idx.retain(|g| {
            if g.len() <= screen::MAX_STRAY_ROWS {
                for &i in g {
                    reason[i] = Some(Reason::OffSetpoint);
                }
                false
            } else {
                true
            }
        });
    }
    let group_mean = |g: &Vec<usize>| g.iter().map(|&i| data.temp_c[i]).sum::<f64>() / g.len() as f64;
    if groups_idx.len() < 2 {
        return Err(FitError::OneTemperature { temp_c: groups_idx.first().map(group_mean).unwrap_or(0.0) });
    }
    for g in &groups_idx {
        if g.len() < opt.min_rows_per_setpoint {
            return Err(FitError::FewRows {
                temp_c: group_mean(g),
                rows: g.len(),
                needed: opt.min_rows_per_setpoint,
            });
        }
        let mut r: Vec<f64> = g.iter().map(|&i| data.ratio[i]).collect();
        r.sort_by(f64::total_cmp);
        r.dedup_by(|a, b| (*a / *b - 1.0).abs() < 1e-9);
        let needed = 4;
        if r.len() < needed {
            return Err(FitError::FewRatios { temp_c: group_mean(g), distinct: r.len(), needed });
        }
    }
    let in_sp: Vec<usize> = groups_idx.iter().flatten().copied().collect();
    let (rmin, rmax) =
        in_sp.iter().fold((f64::INFINITY, 0.0f64), |(a, b), &i| (a.min(data.ratio[i]), b.max(data.ratio[i])));
    let decades = (rmax / rmin).log10();
    if decades < opt.min_span_decades {
        return Err(FitError::NarrowSpan { decades, min: rmin, max: rmax, needed: opt.min_span_decades });
    }
    let (tmin, tmax) = in_sp.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &i| {
        (a.min(data.temp_c[i]), b.max(data.temp_c[i]))
    });
    let tc = 0.5 * (tmin + tmax);
    let (xmin_data, xmax_data) = (rmin.ln(), rmax.ln());
    let level = median(in_sp.iter().map(|&i| f64::from(data.code[i])).collect()).round();
    let computed = Norm {
        level,
        t_center_c: (tc * 64.0).round() / 64.0,
        t_half_span_k: (0.5 * (tmax - tmin)).max(1.0),
        t_ref_k: (tc * 64.0).round() / 64.0 + logtrim::physics::ZERO_CELSIUS_K,
        x_center: 0.5 * (xmin_data + xmax_data),
        x_half_span: (0.5 * (xmax_data - xmin_data)).max(0.5),
    };
    let norm = opt.population.as_ref().map(|p| p.norm).or(opt.norm).unwrap_or(computed);
    let weight = |i: usize| data.weight.get(i).copied().unwrap_or(1.0);
    let preps: Vec<Prep> = (0..n)
        .map(|i| Prep::new(&norm, f64::from(data.code[i]), data.temp_c[i], data.ratio[i].ln(), weight(i)))
        .collect();
    let layout = Layout::new(groups_idx, &data.ratio, n);
    let nsp = layout.setpoints.len();
    let live: Vec<bool> = layout.place.iter().map(Option::is_some).collect();

    // The model-free repeat screen keeps gross glitches out of the model-size search.
    let provisional = if opt.screen { screen::provisional(&layout, &data.code, &live) } else { vec![] };
    let mut fitted_on = live.clone();
    for &i in &provisional {
        fitted_on[i] = false;
    }
    let searched_on = fitted_on.clone();
    let mut found = search(&groups_of(&layout, &preps, &fitted_on), opt, nsp)?;
    let mut researched = false;
    let mut noise: Option<NoiseModel> = None;
    let mut glitch_z: Vec<(usize, f64)> = Vec::new();
    let mut unsettled: Vec<UnsettledSweep> = Vec::new();
    for _ in 0..MAX_ROUNDS {
        let mut rf = row_fit(&found.params, &norm, data, &preps, &live);
        noise = screen::noise(&layout, &rf, &fitted_on).map(|m| match &opt.population {
            // The temperature reading's noise is the design's, measured on the whole lot: two or three
            // set-points may hold too few rows where ∂code/∂T is large to measure it.
            Some(p) => NoiseModel { temperature_k_rms: p.noise_temperature_k, ..m },
            None => m,
        });
        let Some(model) = noise else { break };
        rf.set_noise(&model);
        if !opt.screen {
            break;
        }
        let mut judged = live.clone();
        for &(i, _) in &glitch_z {
            judged[i] = false;
        }
        unsettled = screen::unsettled(&layout, &rf, &judged, &data.temp_c);
        let mut judged = live.clone();
        for u in &unsettled {
            for &i in &u.rows {
                judged[i] = false;
            }
        }
        glitch_z = screen::glitches(&layout, &rf, &judged);
        let mut kept = judged;
        for &(i, _) in &glitch_z {
            kept[i] = false;
        }
        if kept == fitted_on {
            break;
        }
        fitted_on = kept;
        let groups = groups_of(&layout, &preps, &fitted_on);
        if opt.spec.is_none() && !researched && fitted_on != searched_on {
            // The model size is searched again on the cleaned data.
            found = search(&groups, opt, nsp)?;
            researched = true;
        } else {
            found.params = refit(&groups, found.spec, &found.params, opt, nsp)?;
        }
    }
    for u in &unsettled {
        for &i in &u.rows {
            reason[i] = Some(Reason::Unsettled);
        }
    }
    for &(i, _) in &glitch_z {
        reason[i] = Some(Reason::Glitch);
    }
    if opt.spec.is_some() && opt.population.is_none() && fitted_on != searched_on {
        // The fixed size's own cross-validation, again on the rows kept.
        let groups = groups_of(&layout, &preps, &fitted_on);
        let per_group = (opt.search_rows / nsp.max(1)).max(opt.min_rows_per_setpoint);
        let thinned: Vec<Vec<Prep>> = groups.iter().map(|g| thin(g, per_group)).collect();
        found.cv = cross_validate(&thinned, found.spec, &found.params)
            .map(|(rms, max, folds)| vec![CvRecord { spec: found.spec, rms, max, folds, chosen: true }])
            .unwrap_or_default();
    }
    let Searched { spec: chosen, params, mut cv, notes } = found;
    for r in cv.iter_mut() {
        r.chosen = r.spec == chosen;
    }
    let mut rf = row_fit(&params, &norm, data, &preps, &live);
    if let Some(m) = &noise {
        rf.set_noise(m);
    }
    let kept: Vec<usize> = (0..n).filter(|&i| live[i] && reason[i].is_none()).collect();
    let kept_preps: Vec<Prep> = kept.iter().map(|&i| preps[i]).collect();

    // The calibrated ranges, from the rows fitted.
    let (tmin, tmax) = kept.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &i| {
        (a.min(data.temp_c[i]), b.max(data.temp_c[i]))
    });
    let (xmin, xmax) =
        kept_preps.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), r| (a.min(r.x), b.max(r.x)));
    let end_margin = |near: &dyn Fn(f64) -> bool| -> f64 {
        let rows: Vec<Prep> = kept_preps.iter().filter(|r| near(r.x)).copied().collect();
        let e = select::x_errors(&params, &rows);
        let rms = (e.iter().map(|v| v * v).sum::<f64>() / e.len().max(1) as f64).sqrt();
        (AUTO_MARGIN_SIGMAS * rms).min(MAX_AUTO_MARGIN)
    };
    let edge = 0.02 * (xmax - xmin);
    let (margin_lo, margin_hi) = match opt.x_margin {
        Some(m) => (m, m),
        None => (end_margin(&|x| x <= xmin + edge), end_margin(&|x| x >= xmax - edge)),
    };
    // A unit fitted against a population is calibrated over the population's range.
    let (tmin, tmax) = opt.population.as_ref().map_or((tmin, tmax), |p| p.temperature_c);
    let env = Envelope {
        bits: opt.bits,
        rail_margin: margin,
        temperature: TemperatureRange {
            min_c: tmin as f32,
            max_c: tmax as f32,
            extrapolation_k: opt.extrapolation_k as f32,
        },
        x_range: XRange {
            min: (xmin - margin_lo) as f32,
            max: (xmax + margin_hi) as f32,
            min_sensitivity: opt.min_sensitivity as f32,
        },
    };
    let calibration = model::to_calibration(&params, &norm, &env);
    calibration.validate().map_err(|e| failed(&format!("the fitted calibration does not validate: {e}")))?;

    // What the firmware's f32 path makes of every row, as the unit ships.
    let firmware: Vec<Result<logtrim::Reading, logtrim::Error>> = (0..n)
        .map(|i| {
            let t = data.firmware_temp.get(i).copied().unwrap_or(Ok(data.temp_c[i] as f32))?;
            calibration.correct(data.code[i], t)
        })
        .collect();
    let refused: Vec<RefusedRow> = firmware
        .iter()
        .enumerate()
        .filter_map(|(i, r)| {
            let e = r.as_ref().err()?;
            Some(RefusedRow {
                row: i,
                line: data.line.get(i).copied(),
                code: data.code[i],
                temp_c: match data.firmware_temp.get(i) {
                    Some(Ok(t)) => f64::from(*t),
                    Some(Err(_)) => f64::NAN,
                    None => data.temp_c[i],
                },
                ratio: data.ratio[i],
                status: e.name(),
            })
        })
        .collect();
    let sigma_x = |i: usize| rf.sigma[i] / rf.dcode_dx[i].abs();
    let setpoints = layout
        .setpoints
        .iter()
        .map(|g| {
            let (mut sum, mut max, mut ok, mut noise_ss, mut z_ss) = (0.0, 0.0f64, 0usize, 0.0, 0.0);
            for &i in g.iter().filter(|&&i| reason[i].is_none()) {
                if firmware[i].is_err() {
                    continue;
                }
                if let Ok(r) = calibration.correct_f64(f64::from(data.code[i]), data.temp_c[i]) {
                    let e = r.x - data.ratio[i].ln();
                    sum += e * e;
                    max = max.max(e.abs());
                    noise_ss += sigma_x(i).powi(2);
                    z_ss += (e / sigma_x(i)).powi(2);
                    ok += 1;
                }
            }
            SetPointStats {
                temp_c: group_mean(g),
                rows: g.len(),
                refused: g.iter().filter(|&&i| firmware[i].is_err()).count(),
                set_aside: g.iter().filter(|&&i| reason[i].is_some()).count(),
                rms_np: if ok > 0 { (sum / ok as f64).sqrt() } else { f64::NAN },
                max_np: max,
                noise_np: if ok > 0 { (noise_ss / ok as f64).sqrt() } else { f64::NAN },
                residual_ratio: if ok > 0 { (z_ss / ok as f64).sqrt() } else { f64::NAN },
            }
        })
        .collect();
    let noise_floor_np = noise.map(|_| {
        let ss: f64 = kept.iter().map(|&i| sigma_x(i).powi(2)).sum();
        (ss / kept.len().max(1) as f64).sqrt()
    });
    // The noise of the rows cross-validation holds out (the interior set-points): what its error compares with.
    let held: Vec<usize> = match nsp {
        0..=2 => vec![],
        3 => vec![1],
        _ => (1..nsp - 1).collect(),
    };
    let held_rows: Vec<usize> = held
        .iter()
        .flat_map(|&k| layout.setpoints[k].iter().copied())
        .filter(|&i| reason[i].is_none())
        .collect();
    let cv_noise_np = (noise.is_some() && !held_rows.is_empty()).then(|| {
        (held_rows.iter().map(|&i| sigma_x(i).powi(2)).sum::<f64>() / held_rows.len() as f64).sqrt()
    });
    let glitch_sigmas = |i: usize| glitch_z.iter().find(|(j, _)| *j == i).map(|(_, z)| *z);
    let set_aside = (0..n)
        .filter_map(|i| {
            let why = reason[i]?;
            let judged = live[i] && rf.residual[i].is_finite();
            let r = judged.then_some(rf.residual[i]);
            Some(SetAsideRow {
                row: i,
                line: data.line.get(i).copied(),
                code: data.code[i],
                temp_c: data.temp_c[i],
                ratio: data.ratio[i],
                reason: why,
                residual_codes: r,
                residual_sigmas: if judged {
                    glitch_sigmas(i).or(Some(rf.residual[i] / rf.sigma[i])).filter(|v| v.is_finite())
                } else {
                    None
                },
                residual_np: r.map(|r| r / rf.dcode_dx[i]),
            })
        })
        .collect();
    let judged = live.iter().filter(|&&l| l).count();
    let population = opt.population.as_ref().map(|p| p.check(&params));
    let screening = Screening {
        rows: n,
        rows_fitted: kept.len(),
        set_aside,
        unsettled,
        noise,
        glitch_threshold_sigmas: screen_threshold(judged),
        refused,
    };
    Ok(FitOutcome {
        calibration,
        params,
        norm,
        chosen,
        setpoints,
        cv,
        noise_floor_np,
        cv_noise_np,
        notes,
        screening,
        population,
    })
}

fn screen_threshold(rows: usize) -> f64 {
    robust::z_threshold(rows, screen::FALSE_ALARMS_PER_SCREEN)
}

/// The rows of each set-point that `keep` keeps, prepared (empty set-points dropped).
fn groups_of(layout: &Layout, preps: &[Prep], keep: &[bool]) -> Vec<Vec<Prep>> {
    layout
        .setpoints
        .iter()
        .map(|g| g.iter().filter(|&&i| keep[i]).map(|&i| preps[i]).collect::<Vec<Prep>>())
        .filter(|g| !g.is_empty())
        .collect()
}

/// Every row's residual in codes and the model's slopes in x and T (rows not `live` hold NaN).
fn row_fit(params: &Params, norm: &Norm, data: &FitData, preps: &[Prep], live: &[bool]) -> RowFit {
    use rayon::prelude::*;
    const H_K: f64 = 0.05;
    let one = |i: usize| -> (f64, f64, f64) {
        if !live[i] {
            return (f64::NAN, f64::NAN, f64::NAN);
        }
        let p = &preps[i];
        let gx = params.dcode_dx(p);
        let e = select::x_errors(params, std::slice::from_ref(p)).first().copied().unwrap_or(f64::NAN);
        let at = |t: f64| Prep::new(norm, f64::from(data.code[i]), t, p.x, 1.0);
        let gt = (params.predict(&at(data.temp_c[i] + H_K)) - params.predict(&at(data.temp_c[i] - H_K)))
            / (2.0 * H_K);
        (e * gx, gx, gt)
    };
    let v: Vec<(f64, f64, f64)> = if preps.len() >= 4096 {
        (0..preps.len()).into_par_iter().map(one).collect()
    } else {
        (0..preps.len()).map(one).collect()
    };
    RowFit {
        residual: v.iter().map(|t| t.0).collect(),
        dcode_dx: v.iter().map(|t| t.1).collect(),
        dcode_dt: v.iter().map(|t| t.2).collect(),
        sigma: vec![f64::NAN; preps.len()],
    }
}

/// Refits a fixed size on `groups` from `warm`: the search's thinning for the non-linear refinement, every
/// row for the final linear solve.
fn refit(
    groups: &[Vec<Prep>],
    spec: Spec,
    warm: &Params,
    opt: &FitOptions,
    nsp: usize,
) -> Result<Params, FitError> {
    let per_group = (opt.search_rows / nsp.max(1)).max(opt.min_rows_per_setpoint);
    let search: Vec<Prep> = groups.iter().flat_map(|g| thin(g, per_group)).collect();
    if let Some(prior) = &opt.population {
        return prior.fit(&search).ok_or_else(|| failed("fit against the population"));
    }
    let (mut p, _) = fit_spec(&search, spec, Some(warm)).ok_or_else(|| failed("refit"))?;
    let all: Vec<Prep> = groups.iter().flatten().copied().collect();
    if all.len() > search.len() {
        solve::solve_linear(&mut p, &all).ok_or_else(|| failed("final solve"))?;
    }
    Ok(p)
}

/// The model size (fixed, or searched by cross-validation) and its parameters on `groups`.
fn search(groups: &[Vec<Prep>], opt: &FitOptions, nsp_all: usize) -> Result<Searched, FitError> {
    let nsp = groups.len();
    let n: usize = groups.iter().map(Vec::len).sum();
    let per_group = (opt.search_rows / nsp.max(1)).max(opt.min_rows_per_setpoint);
    let search_groups: Vec<Vec<Prep>> = groups.iter().map(|g| thin(g, per_group)).collect();
    let search: Vec<Prep> = search_groups.iter().flatten().copied().collect();
    let mut notes = Vec::new();
    let mut cv = Vec::new();
    if let Some(prior) = &opt.population {
        // The population's size, fitted against its prior; cross-validated where three set-points allow.
        let params = prior.fit(&search).ok_or_else(|| failed("fit against the population"))?;
        if let Some((rms, max, folds)) = prior.cross_validate(&search_groups) {
            cv.push(CvRecord { spec: prior.spec, rms, max, folds, chosen: true });
        }
        return Ok(Searched { spec: prior.spec, params, cv, notes });
    }
    let base = Spec {
        offset_terms: 2,
        slope_terms: 1,
        bulk_terms: 0,
        pole: nsp >= 3,
        bias: false,
        residual_x: 0,
        residual_t: 0,
    };
    let (spec, mut params) = match opt.spec {
        Some(spec) => {
            check_spec(spec, nsp.min(nsp_all), n)?;
            let (p, _) = fit_spec(&search, spec, None).ok_or_else(|| failed("initial fit"))?;
            // A fixed size is still cross-validated, for the unit's own figures (its verdict).
            if let Some((rms, max, folds)) = cross_validate(&search_groups, spec, &p) {
                cv.push(CvRecord { spec, rms, max, folds, chosen: true });
            }
            (spec, p)
        }
        None if nsp < 3 => {
            notes.push(format!(
                "only {nsp} set-points: no cross-validation possible, the smallest model is used; add set-points between them to let the fit check itself"
            ));
            let (p, _) = fit_spec(&search, base, None).ok_or_else(|| failed("initial fit"))?;
            (base, p)
        }
        None => {
            let n_train = nsp - 1;
            let (mut best_p, _) = fit_spec(&search, base, None).ok_or_else(|| failed("initial fit"))?;
            let (mut best_rms, max, folds) =
                cross_validate(&search_groups, base, &best_p).ok_or_else(|| failed("cross-validation"))?;
            let mut best_spec = base;
            cv.push(CvRecord { spec: base, rms: best_rms, max, folds, chosen: false });
            loop {
                let mut step: Option<(f64, Spec, Params)> = None;
                for m in moves(best_spec, n_train, opt.max_series.min(MAX_SERIES)) {
                    let Some((p, _)) = fit_spec(&search, m, Some(&best_p)) else { continue };
                    let Some((rms, max, folds)) = cross_validate(&search_groups, m, &p) else { continue };
                    cv.push(CvRecord { spec: m, rms, max, folds, chosen: false });
                    if step.as_ref().is_none_or(|(r, _, _)| rms < *r) {
                        step = Some((rms, m, p));
                    }
                }
                match step {
                    Some((rms, m, p)) if rms < best_rms * (1.0 - MIN_GAIN) => {
                        best_rms = rms;
                        best_spec = m;
                        best_p = p;
                    }
                    _ => break,
                }
            }
            (best_spec, best_p)
        }
    };
    // Final linear solve on every row, the non-linear values from the search.
    let all: Vec<Prep> = groups.iter().flatten().copied().collect();
    if all.len() > search.len() {
        solve::solve_linear(&mut params, &all).ok_or_else(|| failed("final solve"))?;
    }
    Ok(Searched { spec, params, cv, notes })
}

fn failed(why: &str) -> FitError {
    FitError::Failed { why: why.to_string() }
}

fn check_spec(spec: Spec, nsp: usize, n: usize) -> Result<(), FitError> {
    let t_terms = spec.offset_terms.max(spec.slope_terms + usize::from(spec.pole));
    if spec.offset_terms == 0 || spec.slope_terms == 0 || spec.temperature_terms() > MAX_SERIES {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!("offset and slope need 1..={MAX_SERIES} terms"),
        });
    }
    if t_terms > nsp {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!(
                "{t_terms} coefficients over temperature need at least {t_terms} set-points, {nsp} given"
            ),
        });
    }
    if spec.residual_x > logtrim::calibration::MAX_RESIDUAL
        || spec.residual_t > logtrim::calibration::MAX_RESIDUAL
        || spec.residual_t > nsp
    {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!(
                "the residual takes at most {m}x{m} terms and no more terms over temperature than set-points ({nsp})",
                m = logtrim::calibration::MAX_RESIDUAL
            ),
        });
    }
    if n < 3 * spec.n_params() {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!(
                "{} parameters need at least {} rows, {n} given",
                spec.n_params(),
                3 * spec.n_params()
            ),
        });
    }
    Ok(())
}

/// Renders the fit report for the terminal.
pub fn render_report(out: &FitOutcome) -> String {
    use std::fmt::Write;
    let db = crate::error_scale::db_power;
    let mut s = String::new();
    let _ = writeln!(s, "model: {}", out.chosen.describe());
    let _ = writeln!(
        s,
        "set-point      rows  aside  refused   rms [Np]    max [Np]    rms [dB]    max [dB]  rms/noise"
    );
    for p in &out.setpoints {
        let _ = writeln!(
            s,
            "{:>8.2} °C {:>7} {:>6} {:>8} {:>10.3e} {:>11.3e} {:>11.3e} {:>11.3e} {:>10.2}",
            Num(p.temp_c),
            p.rows,
            p.set_aside,
            p.refused,
            p.rms_np,
            p.max_np,
            db(p.rms_np),
            db(p.max_np),
            p.residual_ratio()
        );
    }
    if let (Some(f), Some(n)) = (out.noise_floor_np, out.screening.noise) {
        let _ = writeln!(
            s,
            "noise floor (scatter of {}): {:.3e} Np = {:.3e} dB; converter {:.2} LSB rms, temperature reading {:.3} K rms",
            match n.basis {
                noise::NoiseBasis::Repeats => "repeats",
                noise::NoiseBasis::Residuals => "residuals: too few repeats",
            },
            f,
            db(f),
            n.codes_rms,
            n.temperature_k_rms
        );
    }
    if !out.cv.is_empty() {
        let _ = writeln!(s, "cross-validation (leave one interior set-point out), error in x:");
        for r in &out.cv {
            let _ = writeln!(
                s,
                "  {} {:<52} rms {:.3e} Np  max {:.3e} Np  ({} folds)",
                if r.chosen { "*" } else { " " },
                r.spec.describe(),
                r.rms,
                r.max,
                r.folds
            );
        }
    }
    for n in &out.notes {
        let _ = writeln!(s, "note: {n}");
    }
    let _ =
        writeln!(s, "dB figures are 10·log10 (power-like ratios); for amplitude-like ratios double them.");
    s
}

/// Most rows listed on the terminal per list (the calibration file's summary lists every one).
pub const LISTED_ROWS: usize = 40;

/// Renders the rows set aside, the unsettled set-points and the rows the firmware refuses, each row by its
/// file and line, for the terminal (empty lists are left out). `data` names the rows' file.
pub fn render_screening(out: &FitOutcome, data: &FitData) -> String {
    use std::fmt::Write;
    let sc = &out.screening;
    let mut s = String::new();
    let more = |s: &mut String, n: usize| {
        if n > LISTED_ROWS {
            let _ = writeln!(
                s,
                "  … and {} more (all of them in the calibration file's fit summary)",
                n - LISTED_ROWS
            );
        }
    };
    if !sc.set_aside.is_empty() {
        let by: Vec<String> =
            [Reason::LowRail, Reason::HighRail, Reason::OffSetpoint, Reason::Unsettled, Reason::Glitch]
                .iter()
                .filter_map(|r| {
                    let n = sc.count(*r);
                    (n > 0).then(|| format!("{n} {}", r.name()))
                })
                .collect();
        let _ = writeln!(
            s,
            "rows set aside: {} of {} ({}); glitches are judged at |residual| > {:.1} σ of the row's noise",
            sc.set_aside.len(),
            sc.rows,
            by.join(", "),
            sc.glitch_threshold_sigmas
        );
        for r in sc.set_aside.iter().take(LISTED_ROWS) {
            let resid = match (r.residual_codes, r.residual_sigmas, r.residual_np) {
                (Some(c), Some(z), Some(x)) => {
                    format!("residual {:+.1} codes = {:+.1} σ = {:+.3e} Np", Num(c), Num(z), Num(x))
                }
                _ => String::new(),
            };
            let _ = writeln!(
                s,
                "  {}: code {}, {:.3} °C, ratio {:.6e}: {}  {resid}",
                data.place(r.row),
                r.code,
                Num(r.temp_c),
                r.ratio,
                r.reason.describe()
            );
        }
        more(&mut s, sc.set_aside.len());
    }
    for u in &sc.unsettled {
        let _ = writeln!(
            s,
            "unsettled set-point near {:.2} °C: reading {} of each ratio ({} rows) drifts against the later ones by up to {:.1} codes ({:.3e} Np), rms {:.1} codes (χ² {:.1} > {:.1}, {} dof): set aside",
            Num(u.temp_c), u.sweep, u.count, u.max_drift_codes, u.max_drift_np, u.rms_drift_codes, u.chi2, u.threshold, u.dof
        );
    }
    if !sc.refused.is_empty() {
        let _ =
            writeln!(s, "rows the firmware (f32 path) refuses with this calibration: {}", sc.refused.len());
        for r in sc.refused.iter().take(LISTED_ROWS) {
            let _ = writeln!(
                s,
                "  {}: code {}, {:.4} °C, ratio {:.6e}: {}",
                data.place(r.row),
                r.code,
                Num(r.temp_c),
                r.ratio,
                r.status
            );
        }
        more(&mut s, sc.refused.len());
    }
    s
}

#[cfg(test)]
mod tests;
