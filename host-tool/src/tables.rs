//! Table generation: turns a [`Calibration`] (and, for a raw temperature channel, the sensor's code → °C
//! function) into the integer tables of [`logtrim::fixed`], and generates the universal tables the
//! firmware carries for every unit.
//!
//! Every table is a uniform cubic B-spline whose control points are fitted by least squares (SVD, from
//! nalgebra) to the f64 model sampled eight times per segment, ends included, then rounded to its integer
//! format with the largest scale that fits. The per-temperature tables (offset, inverse slope, bias floor,
//! sensitivity limit) come from [`Calibration::stage_f64`]; the residual surface `r(x̃, T) = x − x̃` from
//! [`Calibration::x_from_w_f64`] at `u = ln(e^x̃ + β)`, the exact inverse of the firmware's
//! `x̃ = u + G(u − λ)`. So the tables describe exactly the calibration the f32 and f64 paths evaluate.
//!
//! Knots outside the calibrated domain (the swamped low end at hot temperatures, codes beyond the
//! converter) hold the model's own smooth continuation, so nothing rings; the readings there are refused
//! by the sensitivity limit `u_min(T)` and the x range, not by the table. Where the model has no value at a
//! sample (only possible without the bias bend removed, [`TableOptions::bias_bend`] off), the row is
//! continued linearly from its last two defined samples.
//!
//! Default sizes (16 temperature knots, 40 x̃ knots, 128 sensor segments) keep a 16-bit unit's tables near
//! 2 KiB; [`FixedTables::bytes`] and [`logtrim::fixed::universal::BYTES`] give the exact figures.

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

use std::ops::RangeInclusive;

use logtrim::calibration::F64StageTerms;
use logtrim::error::SensorFault;
use logtrim::fixed::{
    FixedCalibration, FixedHeader, SensorTable, CODE_LIMIT, INV_SLOPE_LIMIT, LAYOUT_VERSION, OFFSET_RANGE,
    RESIDUAL_FRAC_RANGE, ROW_CAPACITY, SLOPE_FRAC_SUM, SPLINE_MARGIN, THETA_FRAC, T_STEP_LOG2_RANGE,
    XA_STEP_LOG2_RANGE, X_FRAC,
};
use logtrim::Calibration;
use nalgebra::DMatrix;
use serde::{Deserialize, Serialize};

/// Samples per spline segment in every least-squares fit.
const SAMPLES_PER_SEGMENT: usize = 8;
/// θ units per °C.
const THETA_PER_C: f64 = 1000.0 * (1u32 << THETA_FRAC) as f64;
/// Q24.
const X_SCALE: f64 = (1u32 << X_FRAC) as f64;
/// Margin added to each end of the x̃ domain, nepers.
const XA_MARGIN: f64 = 0.05;

/// Sizes and choices of the generated tables.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TableOptions {
    /// Largest number of knots of the temperature grid (shared by the per-temperature tables and the
    /// residual), ≥ 4: the knot step is the smallest power of two in θ that needs no more.
    pub t_knots: usize,
    /// Largest number of knots of the residual's x̃ grid, 4..=64: the knot step is the smallest power of two
    /// in Q24 that needs no more.
    pub xa_knots: usize,
    /// Largest number of spline segments of the temperature-sensor table (the knot spacing is the smallest
    /// power of two in codes that needs no more).
    pub sensor_segments: usize,
    /// Remove the bias bend analytically (`x̃ = u + G(u − λ)`) when the model has a bias term. Off, the
    /// residual is tabulated over `u` itself: kept to measure what the bend costs a plain table.
    pub bias_bend: bool,
}

impl Default for TableOptions {
    fn default() -> Self {
        TableOptions { t_knots: 16, xa_knots: 64, sensor_segments: 128, bias_bend: true }
    }
}

/// A raw temperature channel: every code it can produce and the sensor's code → °C function (an
/// `Err(Error::Sensor(..))` for codes outside the sensor's valid span).
pub struct TemperatureChannel<'f> {
    /// Every code the temperature converter can produce.
    pub codes: RangeInclusive<u32>,
    /// Code → °C, f64.
    pub celsius: &'f (dyn Fn(u32) -> Result<f64, logtrim::Error> + Sync),
}

/// Why tables could not be generated.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TableError {
    /// The calibration itself does not validate.
    #[error("the calibration does not validate: {0}")]
    Calibration(logtrim::Error),
    /// An option is out of its range.
    #[error("option {name}: {message}")]
    Option {
        /// The option.
        name: &'static str,
        /// What is wrong with it.
        message: String,
    },
    /// A quantity does not fit its integer format.
    #[error("{what} does not fit its integer format: {detail}")]
    Range {
        /// The quantity.
        what: &'static str,
        /// The offending value and the limit.
        detail: String,
    },
    /// The temperature sensor's function has no usable span.
    #[error("temperature sensor: {0}")]
    Sensor(String),
    /// The model has no value where a table needs one.
    #[error("the model has no value for the {what} table: {detail}")]
    Model {
        /// The table.
        what: &'static str,
        /// Where and why.
        detail: String,
    },
    /// The generated tables fail the firmware's own check (a bug: please report it).
    #[error("the generated tables fail the firmware's check: {0}")]
    Invalid(logtrim::Error),
}

/// A temperature-sensor table, owned (see [`SensorTable`]).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorTableOwned {
    /// Lowest code of the valid span.
    pub code_lo: u32,
    /// Highest code of the valid span.
    pub code_hi: u32,
    /// Knot spacing `2^step_log2` codes.
    pub step_log2: u8,
    /// The fault for codes just below the span.
    pub fault_below: SensorFault,
    /// Codes below this one report `fault_far_below`.
    pub far_below_code: u32,
    /// The fault for codes below `far_below_code`.
    pub fault_far_below: SensorFault,
    /// The fault for codes just above the span.
    pub fault_above: SensorFault,
    /// Codes above this one report `fault_far_above`.
    pub far_above_code: u32,
    /// The fault for codes above `far_above_code`.
    pub fault_far_above: SensorFault,
    /// Control points, θ (Q10 m°C).
    pub knots: Vec<i32>,
}

/// The fixed-point tables of one unit, owned; [`FixedTables::view`] lends them as the firmware's
/// [`FixedCalibration`]. This is also the JSON form `logtrim emit --format json` writes.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FixedTables {
    /// Dimensions, scales and ranges.
    pub header: FixedHeader,
    /// O(T) control points.
    pub offset: Vec<i32>,
    /// 1/S(T) control points.
    pub inv_slope: Vec<i32>,
    /// λ(T) control points (empty without the bias bend).
    pub ln_bias: Vec<i32>,
    /// u_min(T) control points (empty without a sensitivity limit).
    pub u_min: Vec<i32>,
    /// r(x̃, T) control points, row-major by temperature.
    pub residual: Vec<i16>,
    /// The raw temperature channel's table.
    pub sensor: Option<SensorTableOwned>,
}

/// A sensor table of type `$to` with the span and faults of `$s` and the knots given: the one list of
/// the fields [`SensorTable`] and [`SensorTableOwned`] share, for the conversions both ways.
macro_rules! sensor_table {
    ($s:expr => $to:ident, knots: $knots:expr) => {
        $to {
            code_lo: $s.code_lo,
            code_hi: $s.code_hi,
            step_log2: $s.step_log2,
            fault_below: $s.fault_below,
            far_below_code: $s.far_below_code,
            fault_far_below: $s.fault_far_below,
            fault_above: $s.fault_above,
            far_above_code: $s.far_above_code,
            fault_far_above: $s.fault_far_above,
            knots: $knots,
        }
    };
}

/// The owned form of a fixed calibration (the inverse of [`FixedTables::view`]).
impl From<&FixedCalibration<'_>> for FixedTables {
    fn from(view: &FixedCalibration<'_>) -> FixedTables {
        FixedTables {
            header: view.header,
            offset: view.offset.to_vec(),
            inv_slope: view.inv_slope.to_vec(),
            ln_bias: view.ln_bias.to_vec(),
            u_min: view.u_min.to_vec(),
            residual: view.residual.to_vec(),
            sensor: view
                .sensor
                .as_ref()
                .map(|s| sensor_table!(s => SensorTableOwned, knots: s.knots.to_vec())),
        }
    }
}

impl FixedTables {
    /// The tables as the firmware's borrowed form.
    pub fn view(&self) -> FixedCalibration<'_> {
        FixedCalibration {
            header: self.header,
            offset: &self.offset,
            inv_slope: &self.inv_slope,
            ln_bias: &self.ln_bias,
            u_min: &self.u_min,
            residual: &self.residual,
            sensor: self.sensor.as_ref().map(|s| sensor_table!(s => SensorTable, knots: &s.knots)),
        }
    }

    /// Flash taken by this unit's tables and header, bytes (universal tables not included).
    pub fn bytes(&self) -> usize {
        self.view().table_bytes()
    }

    /// The temperature (°C) of knot `j` of the temperature grid, as the firmware places it.
    pub fn t_knot_celsius(&self, j: f64) -> f64 {
        t_knot_celsius(&self.header, j)
    }

    /// x̃ (Np) of knot `i` of the residual grid, as the firmware places it.
    pub fn xa_knot(&self, i: f64) -> f64 {
        xa_knot(&self.header, i)
    }
}

fn t_knot_celsius(h: &FixedHeader, j: f64) -> f64 {
    (f64::from(h.t_origin) + j * 2f64.powi(i32::from(h.t_step_log2))) / THETA_PER_C
}

fn xa_knot(h: &FixedHeader, i: f64) -> f64 {
    (f64::from(h.xa_origin) + i * 2f64.powi(i32::from(h.xa_step_log2))) / X_SCALE
}

/// The smallest power-of-two step (log2, within `range`) at which `span` needs at most `max_knots` knots
/// (`floor(span / step) + 2`: the last knot strictly beyond the span), and that number of knots.
fn power_step(span: f64, max_knots: usize, range: (u8, u8)) -> Option<(u8, usize)> {
    (range.0..=range.1).find_map(|s| {
        let knots = (span / 2f64.powi(i32::from(s))).floor() as usize + 2;
        (knots <= max_knots).then_some((s, knots))
    })
}

/// The four uniform cubic B-spline basis values at `t ∈ [0, 1]`.
pub fn basis(t: f64) -> [f64; 4] {
    let s = 1.0 - t;
    [
        s * s * s / 6.0,
        (3.0 * t * t * t - 6.0 * t * t + 4.0) / 6.0,
        (-3.0 * t * t * t + 3.0 * t * t + 3.0 * t + 1.0) / 6.0,
        t * t * t / 6.0,
    ]
}

/// Evaluates a spline of control points `c` (segments + 3 of them) at position `p` in knot units.
pub fn eval_spline(c: &[f64], p: f64) -> f64 {
    let segments = c.len().saturating_sub(3).max(1);
    let seg = (p.floor().max(0.0) as usize).min(segments - 1);
    let b = basis(p - seg as f64);
    (0..4).map(|k| b[k] * c.get(seg + k).copied().unwrap_or(0.0)).sum()
}

/// The least-squares design matrix of a spline with `segments` segments at positions `p`.
fn design(segments: usize, positions: &[f64]) -> DMatrix<f64> {
    let mut a = DMatrix::zeros(positions.len(), segments + 3);
    for (row, &p) in positions.iter().enumerate() {
        let seg = (p.floor().max(0.0) as usize).min(segments - 1);
        let b = basis(p - seg as f64);
        for (k, bk) in b.iter().enumerate() {
            a[(row, seg + k)] = *bk;
        }
    }
    a
}

/// The sample positions of a fit over `segments` segments: eight per segment, both ends included.
fn sample_positions(segments: usize) -> Vec<f64> {
    (0..=segments * SAMPLES_PER_SEGMENT).map(|k| k as f64 / SAMPLES_PER_SEGMENT as f64).collect()
}

/// The least-squares operator of a spline at the sample positions: `(AᵀA)⁻¹Aᵀ` of its design matrix `A`,
/// computed from a QR factorisation (`R⁻¹Qᵀ`, never the normal equations). The design matrix of a uniform
/// B-spline sampled eight times per segment has full column rank.
fn fit_operator(segments: usize, positions: &[f64]) -> Result<DMatrix<f64>, TableError> {
    let qr = design(segments, positions).qr();
    let qt = qr.q().transpose();
    qr.r().solve_upper_triangular(&qt).ok_or_else(|| TableError::Model {
        what: "spline fit",
        detail: format!("{} samples do not determine {} control points", positions.len(), segments + 3),
    })
}

/// Control points of a spline with `segments` segments fitted by least squares to `values` at `positions`.
pub fn fit_spline(segments: usize, positions: &[f64], values: &[f64]) -> Result<Vec<f64>, TableError> {
    let pinv = fit_operator(segments, positions)?;
    let c = pinv * DMatrix::from_column_slice(values.len(), 1, values);
    Ok(c.iter().copied().collect())
}

/// Weight of the continuation row of [`fit_spline_continued`] against the data rows (whose basis values
/// are at most 2/3): small enough to leave a well-determined fit as it is.
const CONTINUATION_WEIGHT: f64 = 1e-3;

/// [`fit_spline`] for samples that end inside the last segment: the last segment's own control point is
/// then seen only through the small basis weights near its start (`t³/6`, or not at all when the samples
/// end at its start), and least squares alone throws it far off (a raw channel's table whose span is just
/// past a multiple of its step: −16 054 °C for a 10 kΩ NTC at 32 segments). One weighted row asks that the
/// last two segments be one cubic (the third difference of the last four control points is zero): the
/// curve's natural continuation past the data, which the firmware never evaluates.
fn fit_spline_continued(segments: usize, positions: &[f64], values: &[f64]) -> Result<Vec<f64>, TableError> {
    let n = segments + 3;
    let mut a = design(segments, positions).insert_row(positions.len(), 0.0);
    let row = positions.len();
    for (k, w) in [(n - 4, -1.0), (n - 3, 3.0), (n - 2, -3.0), (n - 1, 1.0)] {
        a[(row, k)] = w * CONTINUATION_WEIGHT;
    }
    let qr = a.qr();
    let mut b = DMatrix::from_column_slice(values.len(), 1, values).insert_row(values.len(), 0.0);
    b = qr.q().transpose() * b;
    let c = qr.r().solve_upper_triangular(&b).ok_or_else(|| TableError::Model {
        what: "spline fit",
        detail: format!("{} samples do not determine {n} control points", positions.len()),
    })?;
    Ok(c.iter().copied().collect())
}

/// The largest number of fraction bits ≤ `max_frac` at which every value, and `extra` more, fits in
/// `limit` (a magnitude), or an error naming the table.
fn choose_frac(
    what: &'static str,
    values: &[f64],
    extra: f64,
    limit: f64,
    max_frac: u32,
) -> Result<u32, TableError> {
    let peak = values.iter().fold(0.0f64, |m, v| m.max(v.abs())) + extra.abs();
    if !peak.is_finite() {
        return Err(TableError::Range { what, detail: "not finite".into() });
    }
    (0..=max_frac).rev().find(|&q| peak * 2f64.powi(q as i32) <= limit).ok_or_else(|| TableError::Range {
        what,
        detail: format!("largest magnitude {peak:e} exceeds {limit:e}"),
    })
}

fn to_i32(what: &'static str, values: &[f64], scale: f64) -> Result<Vec<i32>, TableError> {
    values
        .iter()
        .map(|v| {
            let r = (v * scale).round();
            if r.is_finite() && r >= f64::from(i32::MIN) && r <= f64::from(i32::MAX) {
                Ok(r as i32)
            } else {
                Err(TableError::Range { what, detail: format!("{v:e} × {scale:e}") })
            }
        })
        .collect()
}

/// Control points of the bias floor or the sensitivity limit, Q24 divided by 6, within the firmware's bound
/// ([`logtrim::fixed::BIAS_LIMIT`] at full scale).
fn bias_scale(what: &'static str, c: &[f64]) -> Result<Vec<i32>, TableError> {
    let limit = f64::from(logtrim::fixed::BIAS_LIMIT) - f64::from(SPLINE_MARGIN) - 64.0;
    if let Some(v) = c.iter().find(|v| !(v.abs() * X_SCALE < limit)) {
        return Err(TableError::Range { what, detail: format!("{v} Np beyond ±{} Np", limit / X_SCALE) });
    }
    to_i32(what, c, X_SCALE / 6.0)
}

/// θ of a temperature in °C, rounded towards the inside of `[lo, hi]` by `dir` (−1 floor, +1 ceil).
fn theta(c: f64, what: &'static str, ceil: bool) -> Result<i32, TableError> {
    let t = c * THETA_PER_C;
    let t = if ceil { t.ceil() } else { t.floor() };
    if t.is_finite() && t > f64::from(i32::MIN) && t < f64::from(i32::MAX) {
        Ok(t as i32)
    } else {
        Err(TableError::Range { what, detail: format!("{c} °C") })
    }
}

/// `ln(e^u − β)`, the bias-bend-free apparent x, or `None` at and below the bias floor.
fn xa_of_u(u: f64, st: &F64StageTerms, bend: bool) -> Option<f64> {
    if !bend {
        return Some(u);
    }
    let ln_b = st.ln_beta?;
    let v = u - ln_b;
    if !(v > 0.0) {
        return None;
    }
    // u + ln(1 − e^(−v))
    Some(u + (-(-v).exp_m1()).ln())
}

/// `u = ln(e^x̃ + β)`, the inverse of [`xa_of_u`].
fn u_of_xa(xa: f64, st: &F64StageTerms, bend: bool) -> f64 {
    match (bend, st.ln_beta) {
        (true, Some(ln_b)) => {
            // ln(e^x̃ + β) = max + ln(1 + e^(min − max))
            let (hi, lo) = if xa > ln_b { (xa, ln_b) } else { (ln_b, xa) };
            hi + (lo - hi).exp().ln_1p()
        }
        _ => xa,
    }
}

/// The u below which the sensitivity is under `min_s` at one temperature: the first crossing above `lo`
/// (found by doubling steps, then bisection), `hi` if there is none up to `hi`, `None` if the sensitivity
/// is not under `min_s` at `lo`. (Above the first crossing the sensitivity may fall again only far beyond
/// the converter's codes, where a negative bulk term takes over; `hi` is the top of the usable codes.)
fn sensitivity_limit(cal: &Calibration, temp_c: f64, min_s: f64, lo: f64, hi: f64) -> Option<f64> {
    let sens = |u: f64| cal.x_from_w_f64(u, temp_c).map(|r| r.sensitivity).unwrap_or(0.0);
    if sens(lo) >= min_s {
        return None;
    }
    let (mut a, mut b) = (lo, lo);
    let mut step = 1e-6;
    // Doubling from 1e-6 spans any range of u in a few dozen steps; the bound ends the search on any input.
    for doubling in 0.. {
        if doubling > 2000 {
            return Some(hi);
        }
        b = (b + step).min(hi);
        if sens(b) >= min_s {
            break;
        }
        if b >= hi {
            return Some(hi);
        }
        a = b;
        step *= 2.0;
    }
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if sens(m) < min_s {
            a = m;
        } else {
            b = m;
        }
        if b - a < 1e-12 {
            break;
        }
    }
    Some(0.5 * (a + b))
}

/// Generates the fixed-point tables of a calibration. `sensor` describes a raw temperature channel; without
/// it the firmware takes temperatures in m°C.
pub fn build(
    cal: &Calibration,
    sensor: Option<&TemperatureChannel<'_>>,
    opts: &TableOptions,
) -> Result<FixedTables, TableError> {
    cal.validate().map_err(TableError::Calibration)?;
    let opt = |name, message: &str| TableError::Option { name, message: message.to_string() };
    if !(4..=1000).contains(&opts.t_knots) {
        return Err(opt("t_knots", "must be 4..=1000"));
    }
    if !(4..=ROW_CAPACITY - 2).contains(&opts.xa_knots) {
        return Err(opt("xa_knots", &format!("must be 4..={}", ROW_CAPACITY - 2)));
    }
    if !(1..=65536).contains(&opts.sensor_segments) {
        return Err(opt("sensor_segments", "must be 1..=65536"));
    }
    let max_code = cal.adc.max_code().map_err(TableError::Calibration)?;
    let tr = &cal.temperature;
    let (t_min, t_max, ext) = (f64::from(tr.min_c), f64::from(tr.max_c), f64::from(tr.extrapolation_k));
    let temp_min = theta(t_min, "calibrated temperature", true)?;
    let temp_max = theta(t_max, "calibrated temperature", false)?;
    let temp_lo = theta(t_min - ext, "accepted temperature", true)?;
    let temp_hi = theta(t_max + ext, "accepted temperature", false)?;

    // Temperature grid: knot 0 at temp_lo, the knot step the smallest power of two in θ that needs at most
    // `t_knots` knots, the last knot strictly beyond temp_hi.
    let (t_step_log2, nt) = power_step(f64::from(temp_hi - temp_lo), opts.t_knots, T_STEP_LOG2_RANGE)
        .ok_or_else(|| opt("t_knots", "too few knots for the temperature range at the largest knot step"))?;
    let bias = cal.model.bias.enabled && opts.bias_bend;
    let min_s = f64::from(cal.x_range.min_sensitivity);
    let mut header = FixedHeader {
        layout: LAYOUT_VERSION,
        adc_max_code: max_code,
        rail_margin: cal.adc.rail_margin,
        temp_min,
        temp_max,
        temp_lo,
        temp_hi,
        t_knots: nt as u16,
        t_origin: temp_lo,
        t_step_log2,
        offset_frac: 0,
        inv_slope_frac: 0,
        bias_bend: bias,
        sensitivity_limit: false,
        xa_knots: 0,
        xa_origin: 0,
        xa_step_log2: 0,
        residual_frac: 0,
        x_min: (f64::from(cal.x_range.min) * X_SCALE).ceil() as i32,
        x_max: (f64::from(cal.x_range.max) * X_SCALE).floor() as i32,
    };
    let t_pos = sample_positions(nt - 1);
    let temps: Vec<f64> = t_pos.iter().map(|&p| t_knot_celsius(&header, p)).collect();
    let stages: Vec<F64StageTerms> =
        temps.iter().map(|&t| cal.stage_f64(t)).collect::<Result<_, _>>().map_err(TableError::Calibration)?;

    // Per-temperature tables.
    let t_fit = fit_operator(nt - 1, &t_pos)?;
    let fit_t = |vals: Vec<f64>| -> Vec<f64> {
        (&t_fit * DMatrix::from_column_slice(vals.len(), 1, &vals)).iter().copied().collect()
    };
    let offset_c = fit_t(stages.iter().map(|s| s.offset_codes).collect());
    let inv_slope_c = fit_t(stages.iter().map(|s| 1.0 / s.slope).collect());
    if inv_slope_c.iter().any(|&s| !(s > 0.0)) {
        return Err(TableError::Calibration(logtrim::Error::InvalidCalibration(
            logtrim::error::CalibrationDefect::ZeroSlope,
        )));
    }
    // Offset scale: every code shifted below 2^30 and the offset within (−2^29, 2^30); the inverse slope
    // then has `56 − offset_frac` fraction bits and must stay below 2^32 (module docs of `fixed`).
    // Control points [`SPLINE_MARGIN`] (and a little) inside the ranges, as `validate` asks.
    let margin = f64::from(SPLINE_MARGIN) + 64.0;
    let (o_lo, o_hi) = (f64::from(OFFSET_RANGE.0) + margin, f64::from(OFFSET_RANGE.1) - margin);
    let code_limit = f64::from(CODE_LIMIT) - 64.0;
    let offset_frac = (0..=30u32)
        .rev()
        .find(|&q| {
            let k = 2f64.powi(q as i32);
            f64::from(max_code) * k < code_limit && offset_c.iter().all(|&o| o * k > o_lo && o * k < o_hi)
        })
        .ok_or_else(|| TableError::Range {
            what: "offset",
            detail: format!("largest code {max_code}, offsets {:?}", offset_c.first()),
        })?;
    let inv_slope_frac = SLOPE_FRAC_SUM - offset_frac;
    let peak = inv_slope_c.iter().fold(0f64, |m, &v| m.max(v)) * 2f64.powi(inv_slope_frac as i32);
    if !(peak < INV_SLOPE_LIMIT as f64 - margin) {
        return Err(TableError::Range {
            what: "inverse slope",
            detail: format!(
                "1/S up to {:e} Np per code: the converter spans more nepers than the 32-bit path holds \
                 (its codes times 2^{offset_frac} must stay below 2^30 and 1/S times 2^{inv_slope_frac} below 2^32)",
                peak / 2f64.powi(inv_slope_frac as i32)
            ),
        });
    }
    header.offset_frac = offset_frac as u8;
    header.inv_slope_frac = inv_slope_frac as u8;
    // Control points are stored divided by 6 per axis (the firmware's weights are six times the basis).
    let offset = to_i32("offset", &offset_c, 2f64.powi(offset_frac as i32) / 6.0)?;
    let inv_slope = to_i32("inverse slope", &inv_slope_c, 2f64.powi(inv_slope_frac as i32) / 6.0)?;
    let ln_bias = if bias {
        let c = fit_t(stages.iter().map(|s| s.ln_beta.unwrap_or(0.0)).collect());
        bias_scale("bias floor", &c)?
    } else {
        Vec::new()
    };

    // Usable u per sample temperature: codes inside the rails, x inside the calibrated range.
    let code_lo = f64::from(cal.adc.rail_margin);
    let code_hi = f64::from(max_code.saturating_sub(cal.adc.rail_margin));
    let u_of_code = |code: f64, st: &F64StageTerms| (code - st.offset_codes) / st.slope;
    let (xr_min, xr_max) = (f64::from(cal.x_range.min), f64::from(cal.x_range.max));
    // Sensitivity limit u_min(T).
    let mut limits: Vec<Option<f64>> = Vec::with_capacity(temps.len());
    for (&t, st) in temps.iter().zip(&stages) {
        let lo = match st.ln_beta {
            Some(lb) => lb + 1e-9,
            None => u_of_code(code_lo, st) - 50.0,
        };
        let hi = u_of_code(code_hi, st) + 1.0;
        limits.push(if min_s > 0.0 { sensitivity_limit(cal, t, min_s, lo, hi) } else { None });
    }
    let u_min = if limits.iter().any(Option::is_some) {
        if limits.iter().any(Option::is_none) {
            return Err(TableError::Model {
                what: "sensitivity limit",
                detail: "the sensitivity falls below the minimum at some temperatures and nowhere at others"
                    .into(),
            });
        }
        let vals: Vec<f64> = limits.iter().map(|l| l.unwrap_or(0.0)).collect();
        header.sensitivity_limit = true;
        bias_scale("sensitivity limit", &fit_t(vals))?
    } else {
        Vec::new()
    };

    // x̃ domain: the union over temperature of the usable apparent x, plus a margin.
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for ((&t, st), lim) in temps.iter().zip(&stages).zip(&limits) {
        let u_xmin = u_of_code(cal.forward_code_f64(xr_min, t), st);
        let u_xmax = u_of_code(cal.forward_code_f64(xr_max, t), st);
        let mut ulo = u_of_code(code_lo, st).max(u_xmin);
        if let Some(l) = lim {
            ulo = ulo.max(*l);
        }
        let uhi = u_of_code(code_hi, st).min(u_xmax);
        if !(ulo < uhi) {
            continue;
        }
        if let (Some(a), Some(b)) = (xa_of_u(ulo, st, bias), xa_of_u(uhi, st, bias)) {
            lo = lo.min(a);
            hi = hi.max(b);
        }
    }
    if !(lo < hi) {
        return Err(TableError::Model { what: "residual", detail: "no usable reading anywhere".into() });
    }
    let (lo, hi) = (lo - XA_MARGIN, hi + XA_MARGIN);
    header.xa_origin = (lo * X_SCALE).floor() as i32;
    let span = hi * X_SCALE - f64::from(header.xa_origin);
    let (xa_step_log2, nx) = power_step(span, opts.xa_knots, XA_STEP_LOG2_RANGE)
        .ok_or_else(|| opt("xa_knots", "too few knots for the x̃ range at the largest knot step"))?;
    header.xa_step_log2 = xa_step_log2;
    header.xa_knots = nx as u16;

    // Residual samples r(x̃, T) = x − x̃ on the tensor grid of sample positions.
    let x_pos = sample_positions(nx - 1);
    let mut f = DMatrix::<f64>::zeros(temps.len(), x_pos.len());
    for (row, (&t, st)) in temps.iter().zip(&stages).enumerate() {
        let mut vals: Vec<Option<f64>> = x_pos
            .iter()
            .map(|&p| {
                let xa = xa_knot(&header, p);
                let u = u_of_xa(xa, st, bias);
                cal.x_from_w_f64(u, t).ok().map(|r| r.x - xa)
            })
            .collect();
        fill_linear(&mut vals).ok_or_else(|| TableError::Model {
            what: "residual",
            detail: format!("fewer than two defined samples at {t} °C"),
        })?;
        for (col, v) in vals.iter().enumerate() {
            f[(row, col)] = v.unwrap_or(0.0);
        }
    }
    let x_fit = fit_operator(nx - 1, &x_pos)?;
    // Stored divided by 6 for the temperature axis and times 4/3 for the x̃ axis (its per-sample spline sums
    // three quarters of the value): times 2/9.
    let c = (&t_fit * f * x_fit.transpose()) * (2.0 / 9.0); // (nt + 2) × (nx + 2)
    let cv: Vec<f64> = c.iter().copied().collect();
    let frac = choose_frac("residual", &cv, 0.0, 32767.0, u32::from(RESIDUAL_FRAC_RANGE.1))?;
    if frac < u32::from(RESIDUAL_FRAC_RANGE.0) {
        return Err(TableError::Range { what: "residual", detail: format!("needs {frac} fraction bits") });
    }
    header.residual_frac = frac as u8;
    let scale = 2f64.powi(frac as i32);
    let mut residual = Vec::with_capacity(cv.len());
    for j in 0..c.nrows() {
        for i in 0..c.ncols() {
            residual.push((c[(j, i)] * scale).round() as i16);
        }
    }

    let sensor = sensor.map(|s| sensor_table(s, opts.sensor_segments)).transpose()?;
    let tables = FixedTables { header, offset, inv_slope, ln_bias, u_min, residual, sensor };
    tables.view().validate().map_err(TableError::Invalid)?;
    Ok(tables)
}

/// Continues a row with undefined samples linearly from its nearest two defined ones; `None` if fewer
/// than two are defined.
fn fill_linear(vals: &mut [Option<f64>]) -> Option<()> {
    let defined: Vec<usize> = (0..vals.len()).filter(|&i| vals[i].is_some()).collect();
    if defined.len() < 2 {
        return None;
    }
    let (first, second) = (defined[0], defined[1]);
    let (last, before) = (defined[defined.len() - 1], defined[defined.len() - 2]);
    let line = |a: usize, b: usize, i: usize, vals: &[Option<f64>]| {
        let (va, vb) = (vals[a].unwrap_or(0.0), vals[b].unwrap_or(0.0));
        va + (vb - va) * (i as f64 - a as f64) / (b as f64 - a as f64)
    };
    for i in 0..vals.len() {
        if vals[i].is_none() {
            let v = if i < first {
                line(first, second, i, vals)
            } else if i > last {
                line(before, last, i, vals)
            } else {
                // A hole inside the row: interpolate between its neighbours.
                let a = *defined.iter().rev().find(|&&d| d < i)?;
                let b = *defined.iter().find(|&&d| d > i)?;
                line(a, b, i, vals)
            };
            vals[i] = Some(v);
        }
    }
    Some(())
}

/// The table of a raw temperature channel.
fn sensor_table(ch: &TemperatureChannel<'_>, max_segments: usize) -> Result<SensorTableOwned, TableError> {
    let (start, end) = (*ch.codes.start(), *ch.codes.end());
    if start > end {
        return Err(TableError::Sensor("empty code range".into()));
    }
    let vals: Vec<(u32, Result<f64, logtrim::Error>)> = (start..=end).map(|c| (c, (ch.celsius)(c))).collect();
    let ok = |r: &Result<f64, logtrim::Error>| matches!(r, Ok(v) if v.is_finite());
    let lo_idx = vals
        .iter()
        .position(|(_, r)| ok(r))
        .ok_or_else(|| TableError::Sensor("no code gives a temperature".into()))?;
    let hi_idx = vals.iter().rposition(|(_, r)| ok(r)).unwrap_or(lo_idx);
    if let Some((c, _)) = vals[lo_idx..=hi_idx].iter().find(|(_, r)| !ok(r)) {
        return Err(TableError::Sensor(format!("the valid span has a hole at code {c}")));
    }
    // The fault zones on each side: at most two (next to the span, and at the rail).
    let fault_of = |r: &Result<f64, logtrim::Error>| match r {
        Err(logtrim::Error::Sensor(f)) => *f,
        _ => SensorFault::OutOfModelRange,
    };
    let zones =
        |side: &mut dyn Iterator<Item = &(u32, Result<f64, logtrim::Error>)>| -> Result<_, TableError> {
            let mut out: Vec<(SensorFault, u32)> = Vec::new(); // (fault, the zone's last code going outwards)
            for (c, r) in side {
                let f = fault_of(r);
                match out.last_mut() {
                    Some((g, last)) if *g == f => *last = *c,
                    _ => out.push((f, *c)),
                }
            }
            if out.len() > 2 {
                return Err(TableError::Sensor(format!(
                    "{} different fault zones on one side of the valid span; the table holds two",
                    out.len()
                )));
            }
            Ok(out)
        };
    let below = zones(&mut vals[..lo_idx].iter().rev())?;
    let above = zones(&mut vals[hi_idx + 1..].iter())?;
    let default = SensorFault::OutOfModelRange;
    let fault_below = below.first().map_or(default, |z| z.0);
    let (far_below_code, fault_far_below) = match below.get(1) {
        // The far zone starts just past the near zone's last code.
        Some(z) => (below[0].1, z.0),
        None => (0, fault_below),
    };
    let fault_above = above.first().map_or(default, |z| z.0);
    let (far_above_code, fault_far_above) = match above.get(1) {
        Some(z) => (above[0].1, z.0),
        None => (u32::MAX, fault_above),
    };
    let (code_lo, code_hi) = (vals[lo_idx].0, vals[hi_idx].0);
    // One segment per step, the span's top code included (it starts the last segment when the span is a
    // multiple of the step): SensorTable::knots_needed.
    let span = u64::from(code_hi - code_lo);
    let step_log2 = (0..=16u8).find(|&s| (span >> s) < max_segments as u64).ok_or_else(|| {
        TableError::Option { name: "sensor_segments", message: "too few for the span".into() }
    })?;
    let step = 1u64 << step_log2;
    let segments = (span >> step_log2) as usize + 1;
    // Every code of the span if that is at most eight per segment, else eight evenly spread per segment.
    let stride = (step / SAMPLES_PER_SEGMENT as u64).max(1);
    let mut pos = Vec::new();
    let mut val = Vec::new();
    let mut code = u64::from(code_lo);
    loop {
        let c = code.min(u64::from(code_hi));
        pos.push((c - u64::from(code_lo)) as f64 / step as f64);
        val.push(vals[lo_idx + (c - u64::from(code_lo)) as usize].1.as_ref().copied().unwrap_or(0.0));
        if c == u64::from(code_hi) {
            break;
        }
        code += stride;
    }
    let c = fit_spline_continued(segments, &pos, &val)?;
    let knots = to_i32("sensor temperature", &c, THETA_PER_C / 6.0).map_err(|_| {
        // Name the segment and the value; the step is the choice the user has.
        let (k, v) = c
            .iter()
            .enumerate()
            .find(|(_, v)| !((*v * THETA_PER_C / 6.0).abs() <= f64::from(i32::MAX)))
            .map_or((0, f64::NAN), |(k, v)| (k, *v));
        let seg = k.saturating_sub(3).min(segments - 1) as u64;
        let first = u64::from(code_lo) + (seg << step_log2);
        TableError::Sensor(format!(
            "control point {k} of the table ({segments} segments of {step} codes), near codes {first} … {}, is \
             {v:.1} °C, beyond the ±{:.0} °C its integer format holds; choose another sensor_segments (a \
             step of {} or {} codes)",
            (first + step).min(u64::from(code_hi)),
            f64::from(i32::MAX) / THETA_PER_C * 6.0,
            step / 2,
            step * 2
        ))
    })?;
    Ok(SensorTableOwned {
        code_lo,
        code_hi,
        step_log2,
        fault_below,
        far_below_code,
        fault_far_below,
        fault_above,
        far_above_code,
        fault_far_above,
        knots,
    })
}

/// The universal bias-bend table `G(v) = ln(1 − e^(−v))` (see [`logtrim::fixed::transcend`]): per octave,
/// the spline control points fitted to the exact function, Q24 (full scale: a per-sample spline).
pub fn universal_bend() -> Result<Vec<i32>, TableError> {
    use logtrim::fixed::transcend::{BEND_FIRST_EXP, BEND_OCTAVES, BEND_SEGMENTS};
    let pos = sample_positions(BEND_SEGMENTS);
    let pinv = fit_operator(BEND_SEGMENTS, &pos)?;
    let mut out = Vec::new();
    for o in 0..BEND_OCTAVES {
        let base = 2f64.powi(BEND_FIRST_EXP + o as i32);
        let vals: Vec<f64> = pos
            .iter()
            .map(|&p| {
                let v = base * (1.0 + p / BEND_SEGMENTS as f64);
                (-(-v).exp_m1()).ln()
            })
            .collect();
        let c = &pinv * DMatrix::from_column_slice(vals.len(), 1, &vals);
        let cv: Vec<f64> = c.iter().copied().collect();
        out.extend(to_i32("bend table", &cv, X_SCALE)?);
    }
    Ok(out)
}

/// The universal table of `e^(j/64)`, j = 0..=44, Q30.
pub fn universal_exp64() -> Vec<i32> {
    use logtrim::fixed::transcend::{EXP64_FRAC, EXP64_LEN};
    (0..EXP64_LEN).map(|j| ((j as f64 / 64.0).exp() * 2f64.powi(EXP64_FRAC as i32)).round() as i32).collect()
}
