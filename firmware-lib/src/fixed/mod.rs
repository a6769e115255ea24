//! The integer fixed-point correction: (log ADC code, temperature code or m°C) → x and every [`Unit`], in
//! 32-bit integer arithmetic, for cores without an FPU. It evaluates the same calibration as
//! [`Calibration::correct`](crate::Calibration::correct), from tables the host generates
//! (`logtrim_host::tables::build`) and proves against the f64 reference (`logtrim verify`).
//!
//! It is written for the smallest of those cores, a Cortex-M0 with its 32 × 32 → 32-bit multiply only: every
//! product is built from 16 × 16-bit products ([`arith`]), every position on a grid is a shift (every knot
//! step is a power of two), and nothing divides. No 64-bit multiply, divide, shift or count-leading-zeros
//! helper of the compiler's runtime is called on any path (`scripts/bench-arm.sh` lists the helpers each
//! ARM build links and counts the calls per sample).
//!
//! # The chain
//!
//! 1. The code is checked exactly as in the f32 path ([`Error::CodeOutOfAdcRange`], [`Error::Saturated`]).
//! 2. The temperature θ comes from the caller in m°C, or from the temperature channel's code through
//!    [`SensorTable`] (a cubic spline indexed by the code itself; codes outside the sensor's valid span are
//!    [`Error::Sensor`], with up to two fault zones on each side, e.g. "out of the model's range" next to the
//!    span and "short" or "open" at the rail). It must lie in the calibrated range plus the allowed
//!    extrapolation ([`Error::TemperatureOutOfRange`] otherwise; beyond the calibrated range the reading is
//!    flagged).
//! 3. Four tables over temperature, cubic B-splines on one uniform grid whose knot step is `2^t_step_log2`
//!    θ, give the offset `O(T)` (codes, level shift included), the inverse slope `A(T) = 1/S(T)` (nepers per
//!    code), the bias floor `λ(T) = ln β(T)` and the sensitivity limit `u_min(T)`. Each is evaluated at θ
//!    itself ([`interp::spline_at`]: the segment's power form from its four control points by Horner's
//!    rule, the curvature's two products with the top 16 bits of θ's fraction of the segment and the last
//!    one with all 20). The apparent x is `u = (code − O)·A` (the `w`
//!    of the model).
//! 4. Where the sensitivity ∂w/∂x is below the calibration's minimum (`u < u_min`) the reading is
//!    [`Error::BelowRange`]. With a bias term, the bias bend is removed analytically:
//!    `x̃ = u + G(u − λ)` with the universal `G(v) = ln(1 − e^(−v))` (see [`transcend`]), so that
//!    `x̃ = ln(e^u − β)` exactly when the front end has no bulk resistance and no residual.
//! 5. What is left, `r(x̃, T) = x − x̃` (the bulk-resistance bend, the fitted residual, the interaction of the
//!    two), is smooth: a bicubic B-spline over (x̃, T) stored as i16 with one scale. Its columns over
//!    temperature are collapsed at θ with the spline weights of θ's fraction ([`interp::collapse6`]); over
//!    x̃ (knot step `2^xa_step_log2` in Q24) it is a per-sample spline. `x = x̃ + r`, and x outside the
//!    calibrated x range is [`Error::BelowRange`]/[`Error::AboveRange`], as in the f32 path.
//! 6. [`FixedReading::value`] turns x into any [`Unit`] (`e^x` for the linear units from [`transcend`]).
//!
//! Steps 2–3 depend on the temperature only. [`FixedCalibration::correct`] and
//! [`FixedCalibration::correct_raw`] do everything per call, evaluating only the four residual columns the
//! code needs. A firmware that reads many log codes at one temperature (a DMA buffer) builds a
//! [`FixedStage`] once ([`FixedCalibration::stage_millicelsius`], [`FixedCalibration::stage_code`]:
//! the scalars and the whole residual row at θ) and calls [`FixedCalibration::correct_staged`] or
//! [`FixedCalibration::correct_block`] per code: bit for bit the direct path, errors included, because they
//! run the same integer operations on the same values.
//!
//! A [`StageCache`] keeps the temperature window of the last reading instead (a sixteenth of a knot step,
//! and the last few temperature codes' θ): each value is evaluated exactly at the window's two ends, each
//! knot step is cut into 16 such windows, and inside one the offset and the inverse slope follow the
//! parabola through both ends with the spline's curvature, the other values and the residual's columns a
//! line. While the temperature stays in that window, held or wandering, a sample costs the interpolation
//! and the log channel's work alone. Its results are within a few thousandths of an LSB of the direct
//! path's (the interpolation's error), not bit for bit; `logtrim verify` checks them on their own.
//!
//! A [`CodeTable`] goes one step further for a held or slowly wandering temperature: it keeps x itself
//! over the log code for the temperature's window (a cubic over four knots, a line in temperature), so
//! that a sample is a lookup. Its values are not bit for bit the direct path's: each of its two
//! interpolations is estimated, when the table is built, within a sixteenth of an LSB, it falls back to
//! the stage cache where it cannot be, and `logtrim verify` checks it on its own against the f64
//! reference (0.07 LSB worst on the bench units).
//!
//! Why `x̃` and not `u` as the residual's coordinate: near the swamped low end `x − u` behaves like
//! `ln(u − λ)` and moves with temperature; no uniform (u, T) grid of a few KiB interpolates it to ¼ LSB on a
//! unit with a strong hot bend (the host's table tests measure it). Removed analytically, it leaves a surface
//! that a 16 × 40 grid holds to a few hundredths of an LSB.
//!
//! # Q formats
//!
//! `Qn` means the integer is the value times 2^n. θ is the internal temperature. The splines over
//! temperature and the sensor's store their control points divided by 6 (their weights are six times the
//! basis); the residual's over x̃ times 4/3 (its weights are six times the basis in Q13 and its sums three
//! quarters of the value); the bend's at full scale.
//!
//! | quantity | type | format |
//! |---|---|---|
//! | log ADC code, temperature ADC code | u32 | integer code |
//! | temperature input | i32 | m°C |
//! | θ, internal temperature; [`FixedHeader`] temperatures | i32 | m°C · 2^10 (Q10 m°C, ≈ 1 µK) |
//! | [`SensorTable::knots`] | i32 | θ / 6 |
//! | θ's fraction of its segment | u32 | Q20 (`0..2^20`) |
//! | window fraction, knot fractions | u32 | Q16 (`0..2^16`) |
//! | per-sample spline weights ([`interp::basis6`], the bend's [`interp::basis16`]) | u32 | six times the basis in Q13; the basis in Q16 |
//! | window weights ([`interp::window_weights`]) | i32 | six times the basis · 16³, exact |
//! | [`FixedCalibration::offset`] O(T) | i32 | codes · 2^`offset_frac` / 6 |
//! | [`FixedCalibration::inv_slope`] A(T) = 1/S(T) | i32 (u32 at θ or a window end) | Np/code · 2^`inv_slope_frac` / 6, `offset_frac + inv_slope_frac = 56` |
//! | [`FixedCalibration::ln_bias`] λ(T), [`FixedCalibration::u_min`] | i32 | Q24 Np / 6 |
//! | `d = code·2^offset_frac − O` | i32 | codes · 2^`offset_frac` |
//! | u = high word of `d·A`, v = u − λ, x̃, x, [`FixedReading::x`], [`FixedHeader::x_min`]/`x_max` | i32 | Q24 Np |
//! | [`universal::BEND`] G control points | i32 | Q24 Np |
//! | [`universal::EXP64`] e^(j/64) | i32 | Q30 |
//! | [`FixedCalibration::residual`] r control points | i16 | Np · 2^`residual_frac` · 2/9 (1/6 for the temperature axis, 4/3 for x̃) |
//! | residual columns at a window end, at θ | i32 | Np · 2^(`residual_frac` + 12) |
//! | output: nepers, decades, dB (power and amplitude), absorbance, transmittance % | i64 | Q24 of the unit |
//! | output: ratio | i64 | Q32 |
//!
//! # Overflow
//!
//! Every product is a 16 × 16-bit product inside [`arith`] (bounds there). What the sums may reach is
//! bounded where the values enter: a value evaluated from the tables at θ or at a window end (an i64) must lie
//! within its range or the correction is [`Error::InvalidCalibration`]: O within `(−2^29, 2^30)`
//! ([`OFFSET_RANGE`]), A within `(0, 2^32)` ([`INV_SLOPE_LIMIT`]; the window's parabolas are checked to stay
//! inside these too, and a segment's power form must fit [`interp::spline_at`]'s 32-bit steps), λ and u_min within ±2^29 ([`BIAS_LIMIT`]); a residual column is below 2^29.6 for any
//! i16 content, and `residual_frac ≥ 14` puts the residual in Q24 below 2^27.6; a code must satisfy
//! `code·2^offset_frac < 2^30` ([`CODE_LIMIT`]). From these: `|d| < 1.5·2^30`, `|u| < 1.5·2^30`,
//! `|v| < 2^30.9`, `|x̃| < 2^30.6`, `|x| < 2^30.8`. Shift counts from a header are clamped, and every table access is checked. So no input and
//! no table content can wrap or panic; [`FixedCalibration::validate`] refuses tables that would give
//! meaningless results (or refusals), and `tables::build` on the host only produces tables it validates.
//!
//! # Storage: borrowed slices
//!
//! [`FixedCalibration`] is plain data that borrows its tables as `&'a [i32]`/`&'a [i16]` slices with explicit
//! dimensions and scales in a [`FixedHeader`]. Emitted Rust (`include!` from a build script's `OUT_DIR`)
//! writes `const` arrays and a `const FixedCalibration<'static>` that borrows them, so flash holds each
//! table at its real size, with no spare capacity; a C header does the same with arrays and a struct of
//! pointers; a per-unit EEPROM image is read once into a caller-owned buffer from which a
//! `FixedCalibration<'_>` borrows. With the `serde` feature the header derives both traits and the tables
//! serialise (the host deserialises into its own owned form, `logtrim_host::tables::FixedTables`).

#![deny(clippy::float_arithmetic)]

pub mod arith;
mod code_table;
pub mod interp;
mod stage;
pub mod transcend;
pub mod universal;

#[cfg(test)]
mod tests;

pub use code_table::{CodeTable, TABLE_ERROR_LOG2, TABLE_KNOTS};
pub use stage::{FixedStage, StageCache, ROW_CAPACITY, STAGE_MEMO};

use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::qformat::millicelsius_of_theta;
use crate::units::Unit;
use arith::{mul_hi_u, mulh16};
use interp::{
    basis6, collapse6, four, spline6, spline_at, spline_at16, window_collapse, window_value, window_weights,
    window_weights_at, WINDOWS, WINDOWS_LOG2, WINDOW_DEN_LOG2,
};

/// Version of the layout of [`FixedCalibration`]; [`FixedCalibration::validate`] refuses others.
pub const LAYOUT_VERSION: u8 = 2;
pub use crate::qformat::THETA_FRAC;
/// Fraction bits of every quantity in nepers (u, x̃, x, λ, u_min, the bend table).
pub const X_FRAC: u32 = 24;
/// `offset_frac + inv_slope_frac`: u (Q24) is the high word of `d·A`.
pub const SLOPE_FRAC_SUM: u32 = X_FRAC + 32;
/// Extra fraction bits of a residual column at a window end (the window weights' denominator, 16³).
pub const COLUMN_GUARD: u32 = WINDOW_DEN_LOG2;
/// The offset O evaluated at a window end (and anywhere in a window) must lie strictly within this range
/// (codes · 2^`offset_frac`): with `code·2^offset_frac < 2^30`, `|d| < 1.5·2^30`.
pub const OFFSET_RANGE: (i32, i32) = (-(1 << 29), 1 << 30);
/// The inverse slope A at a window end (and anywhere in a window) must lie strictly within `(0, 2^32)`.
pub const INV_SLOPE_LIMIT: i64 = 1 << 32;
/// θ from the sensor table must lie within ±this.
pub const THETA_LIMIT: i32 = 1 << 30;
/// The bias floor λ and the sensitivity limit u_min at a window end must lie within ±this (Q24: 32 Np).
pub const BIAS_LIMIT: i32 = 1 << 29;
/// `code·2^offset_frac` must stay below this.
pub const CODE_LIMIT: u32 = 1 << 30;
/// How far inside its range every control point of the tables over temperature and of the sensor table
/// must lie (in the value's units, six times the stored control point): a value at θ from
/// [`interp::spline_at`] is within `2^14 + 4` units of the spline's exact value, which lies within the
/// control points' range ([`FixedCalibration::validate`]; `logtrim_host::tables::build` keeps its values
/// inside it too).
pub const SPLINE_MARGIN: i32 = 1 << 15;
/// Smallest and largest `t_step_log2` (knot steps from 1 K to 268 K).
pub const T_STEP_LOG2_RANGE: (u8, u8) = (20, 28);
/// Smallest and largest `xa_step_log2` (x̃ knot steps from 1/256 Np to 16 Np).
pub const XA_STEP_LOG2_RANGE: (u8, u8) = (16, 28);
/// Smallest and largest `residual_frac`.
pub const RESIDUAL_FRAC_RANGE: (u8, u8) = (14, 30);
/// Largest `|x_min|`, `|x_max|`: 100 Np in Q24.
pub const X_LIMIT: i32 = 100 << X_FRAC;

/// The scalars of a fixed-point calibration: dimensions, scales and ranges (formats in the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedHeader {
    /// [`LAYOUT_VERSION`].
    pub layout: u8,
    /// The largest code of the log channel's converter.
    pub adc_max_code: u32,
    /// Codes within this many of either rail are [`Error::Saturated`].
    pub rail_margin: u32,
    /// Lowest calibrated temperature, θ (Q10 m°C).
    pub temp_min: i32,
    /// Highest calibrated temperature, θ.
    pub temp_max: i32,
    /// Lowest accepted temperature (calibrated range minus the extrapolation), θ.
    pub temp_lo: i32,
    /// Highest accepted temperature, θ.
    pub temp_hi: i32,
    /// Knots of the temperature grid (control points: `t_knots + 2`, the first at knot −1).
    pub t_knots: u16,
    /// θ of knot 0.
    pub t_origin: i32,
    /// The temperature grid's knot step is `2^t_step_log2` θ (16 windows of `2^(t_step_log2 − 4)`).
    pub t_step_log2: u8,
    /// Fraction bits of the offset table.
    pub offset_frac: u8,
    /// Fraction bits of the inverse-slope table (`56 − offset_frac`).
    pub inv_slope_frac: u8,
    /// The bias bend is removed with λ(T) and the bend table ([`FixedCalibration::ln_bias`] in use).
    pub bias_bend: bool,
    /// Readings with `u < u_min(T)` are below range ([`FixedCalibration::u_min`] in use).
    pub sensitivity_limit: bool,
    /// Knots of the residual's x̃ grid (control points: `xa_knots + 2`).
    pub xa_knots: u16,
    /// x̃ of knot 0, Q24 Np.
    pub xa_origin: i32,
    /// The x̃ grid's knot step is `2^xa_step_log2` in Q24 (22: 0.25 Np).
    pub xa_step_log2: u8,
    /// Fraction bits of the residual table (i16).
    pub residual_frac: u8,
    /// Lowest calibrated x, Q24 Np.
    pub x_min: i32,
    /// Highest calibrated x, Q24 Np.
    pub x_max: i32,
}

/// Linearisation of a raw temperature channel: θ as a uniform cubic B-spline over the code.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SensorTable<'a> {
    /// Lowest code of the sensor's valid span.
    pub code_lo: u32,
    /// Highest code of the valid span.
    pub code_hi: u32,
    /// Knot spacing `2^step_log2` codes (0..=16); knot 0 is at `code_lo`.
    pub step_log2: u8,
    /// The fault reported for codes in `far_below_code..code_lo`.
    pub fault_below: SensorFault,
    /// Codes below this one report [`SensorTable::fault_far_below`] (0: none).
    pub far_below_code: u32,
    /// The fault reported for codes below `far_below_code` (e.g. a short at the rail).
    pub fault_far_below: SensorFault,
    /// The fault reported for codes in `code_hi + 1..=far_above_code`.
    pub fault_above: SensorFault,
    /// Codes above this one report [`SensorTable::fault_far_above`] (`u32::MAX`: none).
    pub far_above_code: u32,
    /// The fault reported for codes above `far_above_code` (e.g. an open circuit at the rail).
    pub fault_far_above: SensorFault,
    /// Control points, θ / 6 (Q10 m°C): `((code_hi − code_lo) >> step_log2) + 4` of them, the first at
    /// knot −1.
    pub knots: &'a [i32],
}

impl SensorTable<'_> {
    /// The number of control points the span needs: one segment per `2^step_log2` codes, the code at the
    /// span's top included, plus three.
    pub fn knots_needed(code_lo: u32, code_hi: u32, step_log2: u8) -> usize {
        ((code_hi.saturating_sub(code_lo) >> u32::from(step_log2).min(16)) as usize).saturating_add(4)
    }
}

/// A calibration in integer form: the header and the tables (formats in the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedCalibration<'a> {
    /// Dimensions, scales and ranges.
    pub header: FixedHeader,
    /// O(T), `t_knots + 2` control points.
    pub offset: &'a [i32],
    /// A(T) = 1/S(T), `t_knots + 2` control points.
    pub inv_slope: &'a [i32],
    /// λ(T) = ln β(T), `t_knots + 2` control points, or empty without [`FixedHeader::bias_bend`].
    pub ln_bias: &'a [i32],
    /// u_min(T), `t_knots + 2` control points, or empty without [`FixedHeader::sensitivity_limit`].
    pub u_min: &'a [i32],
    /// r(x̃, T): `(t_knots + 2)` rows of `(xa_knots + 2)` control points, row-major (row = temperature), or
    /// empty for a residual of zero everywhere (the same corrections as a table of zeros, bit for bit).
    pub residual: &'a [i16],
    /// The temperature channel, when it is a raw sensor read by ADC.
    pub sensor: Option<SensorTable<'a>>,
}

/// The four per-temperature values at one temperature (formats in the module docs); `ln_bias` is 0
/// without the bias bend and `u_min` is `i32::MIN` without the sensitivity limit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct Scalars {
    pub(crate) offset: i32,
    pub(crate) inv_slope: u32,
    pub(crate) ln_bias: i32,
    pub(crate) u_min: i32,
}

impl Scalars {
    pub(crate) const ZERO: Scalars = Scalars { offset: 0, inv_slope: 0, ln_bias: 0, u_min: 0 };
}

/// The per-temperature values over one window of the temperature grid, as the path interpolates them:
/// the bias floor and the sensitivity limit linearly between the window's ends, the offset and the inverse
/// slope along the parabola through both ends with the spline's curvature at the window's middle,
/// `q(f) = q₀ + f·(d − (1 − f)·c)` with `d = q₁ − q₀` (so `q(0) = q₀`, `q(1) = q₁`). Each is the cubic
/// spline to within its third-order term over a sixteenth of a knot step (parts per billion of the
/// value); a straight line would leave a few hundredths of an LSB on a unit whose slope follows the
/// absolute temperature.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct Window {
    /// The values at the window's start.
    start: Scalars,
    /// `d − c` for the offset and the inverse slope, `d` for the others.
    slope: [i32; 4],
    /// The curvature terms `c` of the offset and the inverse slope.
    curv: [i32; 2],
}

impl Window {
    pub(crate) const ZERO: Window = Window { start: Scalars::ZERO, slope: [0; 4], curv: [0; 2] };

    /// The values at a Q16 fraction of the window.
    #[inline(always)]
    pub(crate) fn at(&self, f16: u32) -> Scalars {
        let (s, d, c) = (&self.start, &self.slope, &self.curv);
        Scalars {
            offset: s.offset + mulh16(d[0] + mulh16(c[0], f16), f16),
            // Checked when the window was made: the parabola stays within (0, 2^32).
            inv_slope: (i64::from(s.inv_slope) + i64::from(mulh16(d[1] + mulh16(c[1], f16), f16))) as u32,
            ln_bias: s.ln_bias + mulh16(d[2], f16),
            u_min: s.u_min + mulh16(d[3], f16),
        }
    }
}

/// The quadratic form of the offset over a window (see [`Window`]): `(d − c, c)`, checked so that `q(f)`
/// stays strictly within [`OFFSET_RANGE`] for every fraction (it lies within `|c|/4` and the floors' few
/// units of the chord). With both ends inside that range (checked by the caller) and `|c| < 2^27` (any
/// table: see [`FixedCalibration::window`]), every sum here is a 32-bit one: `|d| < 1.5·2^30`,
/// `|d − c| < 1.75·2^30`.
#[inline(always)]
fn parabola_offset(q0: i32, q1: i32, c: i32) -> Result<(i32, i32), Error> {
    let reach = c.unsigned_abs() as i32 + 4;
    if q0.min(q1) - reach > OFFSET_RANGE.0 && q0.max(q1) + reach < OFFSET_RANGE.1 {
        Ok((q1 - q0 - c, c))
    } else {
        Err(BAD_TABLE)
    }
}

/// The same for the inverse slope, whose ends lie in `(0, 2^32)`: `q(f)` strictly within that range, and
/// `d` and `d − c` within ±2^31 (exclusive), all in 32 bits (`min − reach > 0` is `min > reach`,
/// `max + reach < 2^32` is `max ≤ u32::MAX − reach`).
#[inline(always)]
fn parabola_inv_slope(q0: u32, q1: u32, c: i32) -> Result<(i32, i32), Error> {
    let reach = c.unsigned_abs() + 4;
    let diff = q1.abs_diff(q0);
    if q0.min(q1) > reach && q0.max(q1) <= u32::MAX - reach && diff < 1 << 31 {
        let d = if q1 >= q0 { diff as i32 } else { -(diff as i32) };
        if let Some(dc) = d.checked_sub(c).filter(|&v| v != i32::MIN) {
            return Ok((dc, c));
        }
    }
    Err(BAD_TABLE)
}

/// The header's values the per-sample part of a correction uses, gathered once with their shift counts
/// clamped (the per-sample code then needs no clamp): held by a [`FixedStage`] and a [`StageCache`],
/// made per call on the direct path.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct Plan {
    /// Codes strictly between the rail margins and below [`CODE_LIMIT`]` >> offset_frac`: the one range
    /// check of a sample (the others go through [`FixedCalibration::check_code`]).
    code_lo: u32,
    code_hi: u32,
    qo: u32,
    bias_bend: bool,
    xa_origin: i32,
    xs: u32,
    /// `xa_knots − 1`: segments at or past it are above range.
    xa_last: u32,
    /// The residual's move to Q24: `(r + round) >> rshift`.
    rshift: u32,
    rround: i32,
    x_min: i32,
    x_max: i32,
}

/// `v` clamped to `[lo, hi]` (`lo ≤ hi`) in a `const fn`.
const fn clamp_u8(v: u8, (lo, hi): (u8, u8)) -> u32 {
    (if v < lo {
        lo
    } else if v > hi {
        hi
    } else {
        v
    }) as u32
}

impl Plan {
    pub(crate) const fn of(h: &FixedHeader) -> Plan {
        let qo = if h.offset_frac > 30 { 30 } else { h.offset_frac as u32 };
        let code_lo = h.rail_margin.saturating_add(1);
        let rail_hi = match h.adc_max_code.checked_sub(h.rail_margin) {
            Some(v) => v.saturating_sub(1),
            None => 0,
        };
        let limit = (CODE_LIMIT >> qo) - 1;
        let rshift = clamp_u8(h.residual_frac, RESIDUAL_FRAC_RANGE) + COLUMN_GUARD - X_FRAC;
        Plan {
            code_lo,
            code_hi: if rail_hi < limit { rail_hi } else { limit },
            qo,
            bias_bend: h.bias_bend,
            xa_origin: h.xa_origin,
            xs: clamp_u8(h.xa_step_log2, XA_STEP_LOG2_RANGE),
            xa_last: (h.xa_knots as u32).saturating_sub(1),
            rshift,
            rround: if rshift == 0 { 0 } else { 1 << (rshift - 1) },
            x_min: h.x_min,
            x_max: h.x_max,
        }
    }

    /// The direct path's code checks in one comparison for codes between the rails: the others get
    /// [`FixedCalibration::check_code`]'s exact error, or [`Error::InvalidCalibration`] past the code limit
    /// (tables `validate` refuses).
    #[inline(always)]
    pub(crate) fn check_code(&self, cal: &FixedCalibration<'_>, code: u32) -> Result<(), Error> {
        if !(self.code_lo <= code && code <= self.code_hi) {
            cal.check_code(code)?;
            if code >= CODE_LIMIT >> self.qo {
                return Err(BAD_TABLE);
            }
        }
        Ok(())
    }
}

impl Plan {
    /// x in Q24 for a checked code at a temperature's scalars (steps 3–5 of the chain); `columns(seg)` gives
    /// the residual's four columns `seg..seg + 4` at that temperature.
    #[inline(always)]
    pub(crate) fn x_of(
        &self,
        s: &Scalars,
        code: u32,
        columns: impl FnOnce(usize) -> Result<[i32; 4], Error>,
    ) -> Result<i32, Error> {
        let x = self.x_unranged(s, code, columns)?;
        if x < self.x_min {
            return Err(Error::BelowRange);
        }
        if x > self.x_max {
            return Err(Error::AboveRange);
        }
        Ok(x)
    }

    /// [`Plan::x_of`] without the check against the calibrated x range (the code table's knots just
    /// beyond it).
    #[inline(always)]
    pub(crate) fn x_unranged(
        &self,
        s: &Scalars,
        code: u32,
        columns: impl FnOnce(usize) -> Result<[i32; 4], Error>,
    ) -> Result<i32, Error> {
        // code·2^qo < 2^30 (checked) and −2^29 < O < 2^30: |d| < 1.5·2^30; u is the high word of d·A with
        // 0 < A < 2^32: |u| < 1.5·2^30.
        let d = ((code << self.qo) as i32) - s.offset;
        let u = mul_hi_u(d, s.inv_slope);
        if u < s.u_min {
            return Err(Error::BelowRange);
        }
        // |λ| < 2^29: v fits; |G| < 2^28.
        let xa = if self.bias_bend { u + transcend::bend_q24(u - s.ln_bias)? } else { u };
        // The position on the x̃ grid: the difference of two i32s, formed in i64; once it is known to be
        // non-negative it is below 2^32 and shifts as a u32.
        let p = i64::from(xa) - i64::from(self.xa_origin);
        if p < 0 {
            return Err(Error::BelowRange);
        }
        let p = p as u32;
        let seg = p >> self.xs;
        // The last knot itself is past the grid (the host keeps a margin beyond every usable x̃).
        if seg >= self.xa_last {
            return Err(Error::AboveRange);
        }
        let c = columns(seg as usize)?;
        // Columns are below 2^29.6 in magnitude, so the per-sample spline fits an i32; shifted by at least
        // 2 bits it is below 2^27.6 and x fits.
        let r = (spline6(c, (p & ((1 << self.xs) - 1)) >> (self.xs - 16)) + self.rround) >> self.rshift;
        Ok(xa + r)
    }
}

/// The temperature side of a header, gathered once: the accepted range in θ and in m°C (rounded inwards),
/// the calibrated range, and the grid's origin and window shift (clamped).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct Grid {
    temp_lo: i32,
    temp_hi: i32,
    temp_min: i32,
    temp_max: i32,
    mc_lo: i32,
    mc_hi: i32,
    t_origin: i32,
    /// log2 of a window's width in θ.
    wb: u32,
}

impl Grid {
    pub(crate) const fn of(h: &FixedHeader) -> Grid {
        Grid {
            temp_lo: h.temp_lo,
            temp_hi: h.temp_hi,
            temp_min: h.temp_min,
            temp_max: h.temp_max,
            // m°C·2^10 ≥ temp_lo ⟺ m°C ≥ ceil(temp_lo / 2^10); within i32 for any i32 θ.
            mc_lo: ((h.temp_lo as i64 + (1 << THETA_FRAC) - 1) >> THETA_FRAC) as i32,
            mc_hi: h.temp_hi >> THETA_FRAC,
            t_origin: h.t_origin,
            wb: clamp_u8(h.t_step_log2, T_STEP_LOG2_RANGE) - WINDOWS_LOG2,
        }
    }

    /// θ of a temperature in m°C, the accepted range checked in m°C first (so that θ = m°C·2^10 fits).
    #[inline(always)]
    pub(crate) fn theta_from_millicelsius(&self, temp_mc: i32) -> Result<i32, Error> {
        if temp_mc < self.mc_lo || temp_mc > self.mc_hi {
            return Err(Error::TemperatureOutOfRange { millicelsius: temp_mc });
        }
        // Within [temp_lo, temp_hi], both i32.
        Ok(temp_mc << THETA_FRAC)
    }

    /// θ checked against the accepted range, and its window on the grid.
    #[inline(always)]
    pub(crate) fn window_of(&self, theta: i32) -> Result<WindowPos, Error> {
        if theta < self.temp_lo || theta > self.temp_hi {
            return Err(Error::TemperatureOutOfRange {
                millicelsius: millicelsius_of_theta(i64::from(theta)),
            });
        }
        let p = i64::from(theta) - i64::from(self.t_origin);
        if !(0..1 << 31).contains(&p) {
            return Err(BAD_TABLE);
        }
        let (p, wb) = (p as u32, self.wb);
        Ok(WindowPos { index: p >> wb, f16: (p & ((1 << wb) - 1)) >> (wb - 16) })
    }

    /// θ is outside the calibrated range (within the accepted one).
    #[inline(always)]
    pub(crate) fn extrapolated(&self, theta: i32) -> bool {
        theta < self.temp_min || theta > self.temp_max
    }
}

/// Where a temperature lies on the grid: its window (index along the grid, 16 per knot step) and the Q16
/// fraction inside it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct WindowPos {
    pub(crate) index: u32,
    pub(crate) f16: u32,
}

/// A window's place on the temperature grid ([`FixedCalibration::window_ends`]): the segment whose four
/// control points give both ends, the window's number `m` in it, and the window weights at `m` and `m + 1`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct WindowEnds {
    pub(crate) seg: usize,
    pub(crate) m: u32,
    pub(crate) w0: [i32; 4],
    pub(crate) w1: [i32; 4],
}

/// Where a temperature lies on the grid for an evaluation at θ itself ([`FixedCalibration::pos_at`]): the
/// segment, θ's Q20 fraction in it (the window's number and the window's Q16 fraction) and the [`basis6`]
/// weights at its top 16 bits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct TempPos {
    pub(crate) seg: usize,
    pub(crate) t20: u32,
    pub(crate) w: [u32; 4],
}

/// The error every inconsistent table content gives.
pub(crate) const BAD_TABLE: Error = Error::InvalidCalibration(CalibrationDefect::Coefficient);

/// A value from the tables at a window end, checked against the bound the per-sample arithmetic relies on:
/// strictly within ±`limit`.
#[inline(always)]
fn bounded(v: i64, limit: i32) -> Result<i32, Error> {
    if v > -i64::from(limit) && v < i64::from(limit) {
        Ok(v as i32)
    } else {
        Err(BAD_TABLE)
    }
}

impl<'a> FixedCalibration<'a> {
    /// Checks a log channel code against the converter and the rail margin, as the f32 path does.
    #[inline(always)]
    pub fn check_code(&self, code: u32) -> Result<(), Error> {
        let h = &self.header;
        let max = h.adc_max_code;
        if code > max {
            return Err(Error::CodeOutOfAdcRange { code, max });
        }
        if code <= h.rail_margin || code >= max.saturating_sub(h.rail_margin) {
            return Err(Error::Saturated { code });
        }
        Ok(())
    }

    /// Corrects one reading: `code` from the log channel, the temperature in m°C.
    ///
    /// The host tool generates the tables from a fitted calibration; this example makes the tables of an
    /// ideal linear unit by hand, x = (code − 32769)·6/32768 Np at every temperature (control points are
    /// stored divided by 6, so these divide exactly), with a temperature channel of 15 m°C per code.
    ///
    /// ```
    /// use logtrim::error::{Error, SensorFault};
    /// use logtrim::fixed::{FixedCalibration, FixedHeader, SensorTable, LAYOUT_VERSION};
    /// use logtrim::Unit;
    ///
    /// let header = FixedHeader {
    ///     layout: LAYOUT_VERSION,
    ///     adc_max_code: 65535, // 16-bit converter
    ///     rail_margin: 16,
    ///     // Calibrated 0…50 °C, accepted −5…55 °C (θ = m°C · 2^10).
    ///     temp_min: 0,
    ///     temp_max: 50_000 << 10,
    ///     temp_lo: -5_000 << 10,
    ///     temp_hi: 55_000 << 10,
    ///     // Five temperature knots 2^24 θ (16.4 K) apart from −5 °C.
    ///     t_knots: 5,
    ///     t_origin: -5_000 << 10,
    ///     t_step_log2: 24,
    ///     offset_frac: 14,
    ///     inv_slope_frac: 42,
    ///     bias_bend: false,
    ///     sensitivity_limit: false,
    ///     // Six x̃ knots 4 Np apart from −9 Np; x within ±27306·6/32768 Np.
    ///     xa_knots: 6,
    ///     xa_origin: -9 << 24,
    ///     xa_step_log2: 26,
    ///     residual_frac: 16,
    ///     x_min: -27306 * 3072,
    ///     x_max: 27306 * 3072,
    /// };
    /// // Offset 32769 codes (Q14), inverse slope 6/32768 Np per code (Q42), each divided by 6; no residual.
    /// let (offset, inv_slope, residual) = ([10923 << 13; 7], [1 << 27; 7], [0i16; 7 * 8]);
    /// // Temperature channel: θ = (code − 100)·15 m°C over codes 100…4000, one segment per 256 codes.
    /// let knots: Vec<i32> = (0..19).map(|i| (i - 1) * 256 * 15 * 1024 / 6).collect();
    /// let sensor = SensorTable {
    ///     code_lo: 100,
    ///     code_hi: 4000,
    ///     step_log2: 8,
    ///     fault_below: SensorFault::OutOfModelRange,
    ///     far_below_code: 10,
    ///     fault_far_below: SensorFault::Short,
    ///     fault_above: SensorFault::OutOfModelRange,
    ///     far_above_code: 4090,
    ///     fault_far_above: SensorFault::Open,
    ///     knots: &knots,
    /// };
    /// assert_eq!(SensorTable::knots_needed(100, 4000, 8), knots.len());
    /// let cal = FixedCalibration {
    ///     header,
    ///     offset: &offset,
    ///     inv_slope: &inv_slope,
    ///     ln_bias: &[],
    ///     u_min: &[],
    ///     residual: &residual,
    ///     sensor: Some(sensor),
    /// };
    /// cal.validate()?;
    ///
    /// // 5461 codes below the offset: x = −5461·6/32768 Np, exactly −5461·3072 in Q24.
    /// let code = 32769 - 5461;
    /// let r = cal.correct(code, 25_000)?;
    /// assert_eq!(r.x, -5461 * 3072);
    /// assert!(!r.temperature_extrapolated);
    /// // Units as integers: decades are x/ln 10 (Q24), the ratio e^x (Q32); checked against f64.
    /// let x = f64::from(r.x) / 16_777_216.0;
    /// let decades = r.value(Unit::Decades)? as f64 / 16_777_216.0;
    /// assert!((decades - x / std::f64::consts::LN_10).abs() < 1e-7);
    /// let ratio = r.value(Unit::Ratio)? as f64 / 4_294_967_296.0;
    /// assert!((ratio - x.exp()).abs() < 1e-6);
    ///
    /// // The same reading from the raw temperature code: code 1100 is (1100 − 100)·15 m°C = 15 °C.
    /// assert_eq!(cal.theta_from_code(1100), Ok(15_000 << 10));
    /// assert_eq!(cal.correct_raw(code, 1100), cal.correct(code, 15_000));
    /// // A block of codes at one temperature stage: bit for bit the one-call results.
    /// let stage = cal.stage_millicelsius(52_000)?; // beyond the calibrated 50 °C, within the accepted 55 °C
    /// assert!(stage.extrapolated());
    /// let codes = [1000, 20000, 40000, 60000];
    /// let mut out = [Err(Error::NotCalibrated); 4];
    /// assert_eq!(cal.correct_block(&stage, &codes, &mut out), 4);
    /// for (o, &c) in out.iter().zip(&codes) {
    ///     assert_eq!(*o, cal.correct(c, 52_000));
    /// }
    ///
    /// // Refused inputs: a code at the rail, a temperature beyond the accepted range, an open sensor.
    /// assert_eq!(cal.correct(65535, 25_000), Err(Error::Saturated { code: 65535 }));
    /// assert!(matches!(cal.correct(code, 60_000), Err(Error::TemperatureOutOfRange { .. })));
    /// assert_eq!(cal.correct_raw(code, 4095), Err(Error::Sensor(SensorFault::Open)));
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    #[inline(always)]
    pub fn correct(&self, code: u32, temp_mc: i32) -> Result<FixedReading, Error> {
        let plan = Plan::of(&self.header);
        plan.check_code(self, code)?;
        let theta = self.theta_from_millicelsius(temp_mc)?;
        self.correct_theta(&plan, code, theta)
    }

    /// Corrects one reading from raw codes: `code` from the log channel, `temp_code` from the temperature
    /// channel (through [`FixedCalibration::sensor`]).
    #[inline(always)]
    pub fn correct_raw(&self, code: u32, temp_code: u32) -> Result<FixedReading, Error> {
        let plan = Plan::of(&self.header);
        plan.check_code(self, code)?;
        let theta = self.theta_from_code(temp_code)?;
        self.correct_theta(&plan, code, theta)
    }

    /// θ of a temperature in m°C, with the accepted range checked in m°C first (so that θ = m°C·2^10 fits).
    #[inline(always)]
    pub(crate) fn theta_from_millicelsius(&self, temp_mc: i32) -> Result<i32, Error> {
        Grid::of(&self.header).theta_from_millicelsius(temp_mc)
    }

    /// θ checked against the accepted range, and its window on the grid.
    #[inline(always)]
    pub(crate) fn window_of(&self, theta: i32) -> Result<WindowPos, Error> {
        Grid::of(&self.header).window_of(theta)
    }

    /// θ is outside the calibrated range (within the accepted one).
    #[inline(always)]
    pub(crate) fn extrapolated(&self, theta: i32) -> bool {
        Grid::of(&self.header).extrapolated(theta)
    }

    /// The segment of the temperature grid and the window weights at window end `end` (16 per knot step; the
    /// grid's last knot is the end of its last segment).
    #[inline(always)]
    fn end_weights(&self, end: u32) -> (usize, [i32; 4]) {
        let last = u32::from(self.header.t_knots).saturating_sub(2);
        let seg = (end >> WINDOWS_LOG2).min(last);
        (seg as usize, window_weights(end.saturating_sub(seg << WINDOWS_LOG2)))
    }

    /// The four per-temperature values at window end `end`, exact, each checked against its limit.
    #[inline(always)]
    pub(crate) fn end_scalars(&self, end: u32) -> Result<Scalars, Error> {
        let (seg, w) = self.end_weights(end);
        self.scalars_with(|t| Ok(window_value(four(t, seg).ok_or(BAD_TABLE)?, w)))
    }

    /// The four per-temperature values from `value` of each table, each checked against its limit: the
    /// inverse slope within `(0, 2^32)`, the offset within [`OFFSET_RANGE`], λ and u_min within ±[`BIAS_LIMIT`]
    /// (where the header uses them).
    #[inline(always)]
    fn scalars_with(&self, value: impl Fn(&[i32]) -> Result<i64, Error>) -> Result<Scalars, Error> {
        let h = &self.header;
        let inv_slope = value(self.inv_slope)?;
        if !(inv_slope > 0 && inv_slope < INV_SLOPE_LIMIT) {
            return Err(BAD_TABLE);
        }
        let offset = value(self.offset)?;
        if !(offset > i64::from(OFFSET_RANGE.0) && offset < i64::from(OFFSET_RANGE.1)) {
            return Err(BAD_TABLE);
        }
        Ok(Scalars {
            // Checked just above: the offset fits an i32, the inverse slope a u32.
            offset: offset as i32,
            inv_slope: inv_slope as u32,
            ln_bias: if h.bias_bend { bounded(value(self.ln_bias)?, BIAS_LIMIT)? } else { 0 },
            u_min: if h.sensitivity_limit { bounded(value(self.u_min)?, BIAS_LIMIT)? } else { i32::MIN },
        })
    }

    /// Where window `index` lies on the temperature grid: its segment and the window weights at both of its
    /// ends. The end of a segment's last window (`m = 16`) is the next segment's start, the same value
    /// from the same control points (the first weight at `m = 16` is 0, the others those of the next
    /// segment's start), so both ends use the four control points of one segment: one load, two weights.
    #[inline(always)]
    pub(crate) fn window_ends(&self, index: u32) -> WindowEnds {
        let last = u32::from(self.header.t_knots).saturating_sub(2);
        let seg = (index >> WINDOWS_LOG2).min(last);
        let m = index.saturating_sub(seg << WINDOWS_LOG2);
        WindowEnds {
            seg: seg as usize,
            m,
            w0: window_weights_at(m),
            w1: window_weights_at(m.saturating_add(1)),
        }
    }

    /// The window `index`: both ends' values and the curvature of the offset and the inverse slope, each
    /// table's four control points read once for all three.
    #[inline(always)]
    pub(crate) fn window(&self, index: u32) -> Result<Window, Error> {
        let h = &self.header;
        let e = self.window_ends(index);
        let ends = |t: &[i32]| -> Result<([i32; 4], i64, i64), Error> {
            let c = four(t, e.seg).ok_or(BAD_TABLE)?;
            Ok((c, window_value(c, e.w0), window_value(c, e.w1)))
        };
        let pair = |t: &[i32], on: bool, limit: i32, off: i32| -> Result<(i32, i32), Error> {
            if !on {
                return Ok((off, off));
            }
            let (_, a, b) = ends(t)?;
            Ok((bounded(a, limit)?, bounded(b, limit)?))
        };
        let (ci, a0, a1) = ends(self.inv_slope)?;
        let (co, o0, o1) = ends(self.offset)?;
        let (l0, l1) = pair(self.ln_bias, h.bias_bend, BIAS_LIMIT, 0)?;
        let (u0, u1) = pair(self.u_min, h.sensitivity_limit, BIAS_LIMIT, i32::MIN)?;
        // The spline's second derivative at the window's middle, t = (2m + 1)/32 in its segment: 32 times
        // the second-derivative basis is (31 − 2m, 6m − 61, 29 − 6m, 2m + 1), and the chord's deviation
        // term is c = h²·p''/2 with h = 1/16: c = 3·Σ W_k·c_k / 8192 for control points stored divided by 6.
        let m = e.m.min(WINDOWS - 1) as i32;
        let w = [31 - 2 * m, 6 * m - 61, 29 - 6 * m, 2 * m + 1];
        let curv = |c: [i32; 4]| -> i32 {
            // Σ W_k·c_k = hi·2^16 + lo from the control points' halves, Σ|W_k| ≤ 122: |hi| < 2^22, |lo| < 2^23.
            // floor(3·(hi·2^16 + lo) / 2^13) = 24·hi + floor(3·lo / 2^13) exactly, below 2^27 for any
            // control points: 32-bit sums, no 64-bit product (a runtime helper on a Cortex-M0).
            let hi = w[0] * (c[0] >> 16) + w[1] * (c[1] >> 16) + w[2] * (c[2] >> 16) + w[3] * (c[3] >> 16);
            let lo = w[0] * (c[0] & 0xffff)
                + w[1] * (c[1] & 0xffff)
                + w[2] * (c[2] & 0xffff)
                + w[3] * (c[3] & 0xffff);
            ((hi + hi + hi) << 3) + ((lo + lo + lo) >> 13)
        };
        let offset = |v: i64| v > i64::from(OFFSET_RANGE.0) && v < i64::from(OFFSET_RANGE.1);
        let inv_slope = |v: i64| v > 0 && v < INV_SLOPE_LIMIT;
        if !(inv_slope(a0) && inv_slope(a1) && offset(o0) && offset(o1)) {
            return Err(BAD_TABLE);
        }
        // Checked above: the offsets fit an i32, the inverse slopes a u32.
        let (o0, o1, a0, a1) = (o0 as i32, o1 as i32, a0 as u32, a1 as u32);
        let (off_dc, curv_offset) = parabola_offset(o0, o1, curv(co))?;
        let (inv_dc, curv_inv_slope) = parabola_inv_slope(a0, a1, curv(ci))?;
        Ok(Window {
            start: Scalars { offset: o0, inv_slope: a0, ln_bias: l0, u_min: u0 },
            slope: [off_dc, inv_dc, l1 - l0, u1 - u0],
            curv: [curv_offset, curv_inv_slope],
        })
    }

    /// Residual column `col` collapsed over temperature at both ends of a window (Q(`residual_frac` + 12),
    /// each below 2^29.6).
    #[inline(always)]
    pub(crate) fn column_ends(&self, e: &WindowEnds, col: usize) -> Result<(i32, i32), Error> {
        let c = self.column_rows(e.seg, col)?;
        Ok((window_collapse(c, e.w0), window_collapse(c, e.w1)))
    }

    /// Residual column `col` of the four rows from `seg` (zeros for an empty table), with the refusals of a
    /// table too small for them.
    #[inline(always)]
    fn column_rows(&self, seg: usize, col: usize) -> Result<[i16; 4], Error> {
        // Row and stride below 2^16 (any wider grid is refused): the index is a 32-bit product, with no
        // overflow check (which would call a 64-bit multiply helper on a Cortex-M0).
        let stride = u32::from(self.header.xa_knots) + 2;
        let at = |k: u32| -> Option<i16> {
            let row = seg as u32 + k;
            if stride > 0xffff || row > 0xffff || col as u32 >= stride {
                return None;
            }
            // An empty table is a residual of zero everywhere: the same values, and the same refusals, as a
            // full table of zeros.
            if self.residual.is_empty() {
                return (row < u32::from(self.header.t_knots) + 2).then_some(0);
            }
            self.residual.get((row * stride + col as u32) as usize).copied()
        };
        match (at(0), at(1), at(2), at(3)) {
            (Some(a), Some(b), Some(c), Some(d)) => Ok([a, b, c, d]),
            _ => Err(BAD_TABLE),
        }
    }

    /// Where θ lies on the temperature grid for an evaluation at θ itself: its segment, its Q20 fraction in
    /// the segment and the [`basis6`] weights at the fraction's top 16 bits. The accepted range is checked as for the windows.
    #[inline(always)]
    pub(crate) fn pos_at(&self, theta: i32) -> Result<TempPos, Error> {
        let pos = self.window_of(theta)?;
        let seg = pos.index >> WINDOWS_LOG2;
        // Within the accepted range θ lies before the grid's last knot (`validate`).
        if seg > u32::from(self.header.t_knots).saturating_sub(2) {
            return Err(BAD_TABLE);
        }
        let t20 = ((pos.index & (WINDOWS - 1)) << 16) | pos.f16;
        Ok(TempPos { seg: seg as usize, t20, w: basis6(t20 >> WINDOWS_LOG2) })
    }

    /// The four per-temperature values at θ ([`spline_at`] on each table's segment), each checked against
    /// its limit.
    #[inline(always)]
    pub(crate) fn scalars_at(&self, p: &TempPos) -> Result<Scalars, Error> {
        self.scalars_with(|t| spline_at(four(t, p.seg).ok_or(BAD_TABLE)?, p.t20).ok_or(BAD_TABLE))
    }

    /// The residual's rows `seg..seg + 4` at columns `col..col + 4`, as four columns of four control points
    /// over temperature (zeros for an empty table), with the refusals of a table too small for them.
    #[inline(always)]
    fn residual_block(&self, seg: usize, col: usize) -> Result<[[i16; 4]; 4], Error> {
        // Row and stride below 2^16 (any wider grid is refused): the index is a 32-bit product, with no
        // overflow check (which would call a 64-bit multiply helper on a Cortex-M0).
        let stride = u32::from(self.header.xa_knots) + 2;
        let row0 = seg as u32;
        if stride > 0xffff || row0 > 0xffff - 3 || col as u32 > stride.saturating_sub(4) || stride < 4 {
            return Err(BAD_TABLE);
        }
        if self.residual.is_empty() {
            // An empty table is a residual of zero everywhere: the same values, and the same refusals, as a
            // full table of zeros.
            if row0 + 3 >= u32::from(self.header.t_knots) + 2 {
                return Err(BAD_TABLE);
            }
            return Ok([[0; 4]; 4]);
        }
        let at = |k: u32| four(self.residual, ((row0 + k) * stride + col as u32) as usize).ok_or(BAD_TABLE);
        let [[a0, a1, a2, a3], [b0, b1, b2, b3], [c0, c1, c2, c3], [d0, d1, d2, d3]] =
            [at(0)?, at(1)?, at(2)?, at(3)?];
        Ok([[a0, b0, c0, d0], [a1, b1, c1, d1], [a2, b2, c2, d2], [a3, b3, c3, d3]])
    }

    /// The residual's columns `col..col + 4` at θ ([`collapse6`] of each column's four control points).
    #[inline(always)]
    pub(crate) fn columns_theta(&self, p: &TempPos, col: usize) -> Result<[i32; 4], Error> {
        let [a, b, c, d] = self.residual_block(p.seg, col)?;
        Ok([collapse6(a, p.w), collapse6(b, p.w), collapse6(c, p.w), collapse6(d, p.w)])
    }

    /// Residual column `col` alone at θ, the same value as in [`FixedCalibration::columns_theta`] (a
    /// stage's row).
    #[inline(always)]
    pub(crate) fn column_at(&self, p: &TempPos, col: usize) -> Result<i32, Error> {
        Ok(collapse6(self.column_rows(p.seg, col)?, p.w))
    }

    /// The direct path from θ: the scalars and the four residual columns the code needs, evaluated at θ
    /// itself; exactly what a [`FixedStage`] at θ computes for this code.
    #[inline(always)]
    pub(crate) fn correct_theta(&self, plan: &Plan, code: u32, theta: i32) -> Result<FixedReading, Error> {
        let p = self.pos_at(theta)?;
        let s = self.scalars_at(&p)?;
        let x = plan.x_of(&s, code, |seg| self.columns_theta(&p, seg))?;
        Ok(FixedReading { x, temperature_extrapolated: self.extrapolated(theta) })
    }

    /// θ (Q10 m°C) from the temperature channel's code. [`Error::Sensor`] outside the sensor's valid span;
    /// [`Error::NotCalibrated`] when this calibration has no sensor table.
    #[inline(always)]
    pub fn theta_from_code(&self, temp_code: u32) -> Result<i32, Error> {
        let s = self.sensor.as_ref().ok_or(Error::NotCalibrated)?;
        if temp_code < s.code_lo {
            let f = if temp_code < s.far_below_code { s.fault_far_below } else { s.fault_below };
            return Err(Error::Sensor(f));
        }
        if temp_code > s.code_hi {
            let f = if temp_code > s.far_above_code { s.fault_far_above } else { s.fault_above };
            return Err(Error::Sensor(f));
        }
        let k = u32::from(s.step_log2).min(16);
        let pos = temp_code - s.code_lo;
        let seg = (pos >> k) as usize;
        let t16 = (pos & ((1 << k) - 1)) << (16 - k);
        let c = four(s.knots, seg).ok_or(BAD_TABLE)?;
        bounded(spline_at16(c, t16).ok_or(BAD_TABLE)?, THETA_LIMIT)
    }

    /// The temperature stage at a temperature in m°C.
    pub fn stage_millicelsius(&self, temp_mc: i32) -> Result<FixedStage, Error> {
        let theta = self.theta_from_millicelsius(temp_mc)?;
        FixedStage::build(self, theta)
    }

    /// The temperature stage at the temperature channel's code.
    pub fn stage_code(&self, temp_code: u32) -> Result<FixedStage, Error> {
        let theta = self.theta_from_code(temp_code)?;
        FixedStage::build(self, theta)
    }

    /// The temperature stage at θ (Q10 m°C).
    pub fn stage_theta(&self, theta: i64) -> Result<FixedStage, Error> {
        match i32::try_from(theta) {
            Ok(t) => FixedStage::build(self, t),
            Err(_) => Err(Error::TemperatureOutOfRange { millicelsius: millicelsius_of_theta(theta) }),
        }
    }

    /// The log-channel part of a correction at a temperature stage. The code is checked again (cheap).
    #[inline(always)]
    pub fn correct_staged(&self, stage: &FixedStage, code: u32) -> Result<FixedReading, Error> {
        stage.plan.check_code(self, code)?;
        let x = stage.plan.x_of(&stage.scalars, code, |seg| stage.columns(seg))?;
        Ok(FixedReading { x, temperature_extrapolated: stage.extrapolated })
    }

    /// Many log codes at one temperature stage (a DMA buffer): `out[i]` is
    /// [`FixedCalibration::correct_staged`] of `codes[i]`, bit for bit. Stops at the shorter of the two
    /// slices and returns how many readings it wrote.
    pub fn correct_block(
        &self,
        stage: &FixedStage,
        codes: &[u32],
        out: &mut [Result<FixedReading, Error>],
    ) -> usize {
        let mut n = 0;
        for (o, &code) in out.iter_mut().zip(codes) {
            *o = self.correct_staged(stage, code);
            n += 1;
        }
        n
    }

    /// Checks that the tables are consistent and the scales sane: what a loader calls once before trusting
    /// a calibration (the correction itself never panics or wraps on any content, but gives meaningless
    /// results, or refuses readings, for tables this refuses).
    pub fn validate(&self) -> Result<(), Error> {
        use CalibrationDefect as D;
        let bad = |d| Err(Error::InvalidCalibration(d));
        let h = &self.header;
        if h.layout != LAYOUT_VERSION {
            return bad(D::Coefficient);
        }
        if h.adc_max_code == 0 || h.adc_max_code >= 1 << 24 {
            return bad(D::AdcBits);
        }
        if h.rail_margin.saturating_mul(2) >= h.adc_max_code {
            return bad(D::RailMargin);
        }
        let lim = THETA_LIMIT;
        if !(h.temp_lo <= h.temp_min && h.temp_min < h.temp_max && h.temp_max <= h.temp_hi)
            || h.temp_lo <= -lim
            || h.temp_hi >= lim
        {
            return bad(D::TemperatureRange);
        }
        if !(h.x_min < h.x_max && h.x_min > -X_LIMIT && h.x_max < X_LIMIT) {
            return bad(D::XRange);
        }
        // The temperature grid must cover the accepted range, the last knot strictly beyond it.
        let nt = usize::from(h.t_knots);
        let ts = h.t_step_log2;
        let span = |theta: i32| i64::from(theta) - i64::from(h.t_origin);
        if nt < 2
            || !(T_STEP_LOG2_RANGE.0..=T_STEP_LOG2_RANGE.1).contains(&ts)
            || span(h.temp_lo) < 0
            || span(h.temp_hi) >= (nt as i64 - 1) << ts
        {
            return bad(D::Normalisation);
        }
        let nxa = usize::from(h.xa_knots);
        let scales_ok = u32::from(h.offset_frac) <= 30
            && h.adc_max_code < CODE_LIMIT >> h.offset_frac
            && u32::from(h.offset_frac) + u32::from(h.inv_slope_frac) == SLOPE_FRAC_SUM
            && (RESIDUAL_FRAC_RANGE.0..=RESIDUAL_FRAC_RANGE.1).contains(&h.residual_frac)
            && nxa >= 2
            && nxa + 2 <= ROW_CAPACITY
            && (XA_STEP_LOG2_RANGE.0..=XA_STEP_LOG2_RANGE.1).contains(&h.xa_step_log2)
            && h.xa_origin > -lim
            && h.xa_origin < lim;
        let lens_ok = self.offset.len() == nt + 2
            && self.inv_slope.len() == nt + 2
            && (!h.bias_bend || self.ln_bias.len() == nt + 2)
            && (!h.sensitivity_limit || self.u_min.len() == nt + 2)
            && (self.residual.is_empty() || Some(self.residual.len()) == (nt + 2).checked_mul(nxa + 2));
        if !(scales_ok && lens_ok) {
            return bad(D::Coefficient);
        }
        // Control points stored divided by 6 within the range divided by 6, [`SPLINE_MARGIN`] inside it: every
        // value at a window end (six times a convex combination of them) is then within the range the
        // per-sample arithmetic relies on, and so is every value at θ itself, which [`spline_at`] and
        // [`spline_at16`] give within the margin of the exact one.
        let m = i64::from(SPLINE_MARGIN);
        let within = |t: &[i32], lo: i64, hi: i64| {
            let (lo, hi) = (lo.saturating_add(m), hi.saturating_sub(m));
            t.iter().all(|&c| i64::from(c) * 6 > lo && i64::from(c) * 6 < hi)
        };
        let in_range = |t: &[i32], limit: i32| within(t, -i64::from(limit), i64::from(limit));
        if self.inv_slope.iter().any(|&s| s <= 0) {
            return bad(D::ZeroSlope);
        }
        if !(within(self.offset, i64::from(OFFSET_RANGE.0), i64::from(OFFSET_RANGE.1))
            && within(self.inv_slope, 0, INV_SLOPE_LIMIT)
            && (!h.bias_bend || in_range(self.ln_bias, BIAS_LIMIT))
            && (!h.sensitivity_limit || in_range(self.u_min, BIAS_LIMIT)))
        {
            return bad(D::Coefficient);
        }
        // Every segment's power form must fit [`spline_at`]'s 32-bit steps.
        let fits = |t: &[i32]| {
            (0..nt.saturating_sub(1)).all(|seg| four(t, seg).and_then(|c| spline_at(c, 0)).is_some())
        };
        if !(fits(self.offset)
            && fits(self.inv_slope)
            && (!h.bias_bend || fits(self.ln_bias))
            && (!h.sensitivity_limit || fits(self.u_min)))
        {
            return bad(D::Coefficient);
        }
        if let Some(s) = &self.sensor {
            if s.code_lo > s.code_hi
                || s.step_log2 > 16
                || s.knots.len() < SensorTable::knots_needed(s.code_lo, s.code_hi, s.step_log2)
                || !in_range(s.knots, THETA_LIMIT)
            {
                return bad(D::Coefficient);
            }
            // Every segment a code in the span reaches must fit [`spline_at16`]'s 32-bit steps.
            let last = ((s.code_hi - s.code_lo) >> s.step_log2) as usize;
            if !(0..=last).all(|seg| four(s.knots, seg).and_then(|c| spline_at16(c, 0)).is_some()) {
                return bad(D::Coefficient);
            }
        }
        Ok(())
    }

    /// Flash taken by the tables and the header, in bytes (the universal tables not included: see
    /// [`universal::BYTES`]).
    pub fn table_bytes(&self) -> usize {
        // Slice lengths: the sums saturate rather than wrap (no real table comes near usize::MAX bytes).
        let words = [self.offset, self.inv_slope, self.ln_bias, self.u_min]
            .iter()
            .fold(0usize, |n, t| n.saturating_add(t.len()));
        let sensor = self.sensor.as_ref().map_or(0, |s| s.knots.len().saturating_mul(4).saturating_add(12));
        words
            .saturating_mul(4)
            .saturating_add(self.residual.len().saturating_mul(2))
            .saturating_add(sensor)
            .saturating_add(core::mem::size_of::<FixedHeader>())
    }
}

/// A corrected reading in fixed point.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedReading {
    /// x = ln(I_sig/I_ref), Q24.
    pub x: i32,
    /// The temperature lay outside the calibrated range, within the allowed extrapolation.
    pub temperature_extrapolated: bool,
}

/// 1/ln 10 in Q32.
pub const INV_LN10_Q32: i32 = 1_865_280_597;
/// 10/ln 10 − 4 in Q32 (power dB are `4x + x·this`; amplitude dB twice power dB).
pub const DB10_FRAC_Q32: i32 = 1_472_936_782;

/// `x·c / 2^32` rounded to nearest (ties up), from the exact product's two words.
#[inline(always)]
fn mul_round32(x: i32, c: i32) -> i32 {
    let (hi, lo) = arith::mul_parts(x, c);
    hi + (lo >> 31) as i32
}

/// Decades (Q24) of x (Q24): `x / ln 10`.
#[inline(always)]
fn decades(x: i32) -> i64 {
    i64::from(mul_round32(x, INV_LN10_Q32))
}

/// [`DB10_FRAC_Q32`] suits the product without sign handling ([`arith::mul_round32_by`]).
const _: () = assert!(arith::round32_constant_fits(DB10_FRAC_Q32));

/// Power dB (Q24) of x (Q24): `x·10/ln 10 = 4x + x·0.3429…`, the product rounded exactly.
#[inline(always)]
fn db_power(x: i32) -> i64 {
    (i64::from(x) << 2) + i64::from(arith::mul_round32_by(x, DB10_FRAC_Q32))
}

/// Fraction bits of [`FixedReading::value`] for a unit: 32 for [`Unit::Ratio`], 24 for the others.
pub const fn value_frac_bits(unit: Unit) -> u32 {
    match unit {
        Unit::Ratio => transcend::EXP_RESULT_FRAC,
        _ => X_FRAC,
    }
}

impl FixedReading {
    /// The reading in a unit, as an integer with [`value_frac_bits`] fraction bits. The linear units are
    /// [`Error::AboveRange`] where they do not fit an i64 (x above about 21 Np).
    #[inline(always)]
    pub fn value(&self, unit: Unit) -> Result<i64, Error> {
        let x = self.x;
        Ok(match unit {
            Unit::Nepers => i64::from(x),
            Unit::Decades => decades(x),
            Unit::DbPower => db_power(x),
            Unit::DbAmplitude => 2 * db_power(x),
            Unit::Absorbance => -decades(x),
            Unit::TransmittancePercent => {
                let e = transcend::exp_q32(x)?;
                // e·100 + 2^7 must fit an i64; formed from shifts (64 + 32 + 4), not a 64-bit multiply.
                if e > (i64::MAX - (1 << 7)) / 100 {
                    return Err(Error::AboveRange);
                }
                ((e << 6) + (e << 5) + (e << 2) + (1 << 7)) >> 8
            }
            Unit::Ratio => transcend::exp_q32(x)?,
        })
    }
}
