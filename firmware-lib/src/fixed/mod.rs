//! The integer fixed-point correction: (log ADC code, temperature code or m°C) → x and every [`Unit`], in
//! i32/i64 arithmetic only, for cores without an FPU. It evaluates the same calibration as
//! [`Calibration::correct`](crate::Calibration::correct), from tables the host generates
//! (`logtrim_host::tables::build`) and proves against the f64 reference (`logtrim verify`).
//!
//! # The chain
//!
//! 1. The code is checked exactly as in the f32 path ([`Error::CodeOutOfAdcRange`], [`Error::Saturated`]).
//! 2. The temperature θ comes from the caller in m°C, or from the temperature channel's code through
//!    [`SensorTable`] (a cubic spline indexed by the code itself; codes outside the sensor's valid span are
//!    [`Error::Sensor`], with up to two fault zones on each side, e.g. "out of the model's range" next to
//!    the span and "short" or "open" at the rail). It must lie in the calibrated range plus the allowed extrapolation
//!    ([`Error::TemperatureOutOfRange`] otherwise; beyond the calibrated range the reading is flagged).
//! 3. Four tables over temperature, cubic B-splines on one uniform grid sharing one set of weights, give the
//!    offset `O(T)` (codes, level shift included), the inverse slope `1/S(T)` (nepers per code), the bias
//!    floor `λ(T) = ln β(T)` and the sensitivity limit `u_min(T)`. The apparent x is
//!    `u = (code − O(T))/S(T)` (the `w` of the model).
//! 4. Where the sensitivity ∂w/∂x is below the calibration's minimum (`u < u_min(T)`) the reading is
//!    [`Error::BelowRange`]. With a bias term, the bias bend is removed analytically:
//!    `x̃ = u + G(u − λ(T))` with the universal `G(v) = ln(1 − e^(−v))` (see [`transcend`]), so that
//!    `x̃ = ln(e^u − β)` exactly when the front end has no bulk resistance and no residual.
//! 5. What is left, `r(x̃, T) = x − x̃` (the bulk-resistance bend, the fitted residual, the interaction of
//!    the two), is smooth: a bicubic B-spline over (x̃, T) stored as i16 with one scale. `x = x̃ + r`, and x
//!    outside the calibrated x range is [`Error::BelowRange`]/[`Error::AboveRange`], as in the f32 path.
//! 6. [`FixedReading::value`] turns x into any [`Unit`] (`e^x` for the linear units from [`transcend`]).
//!
//! Steps 2–3 depend on the temperature only: [`FixedCalibration::correct`] does everything per call;
//! a firmware that reads the temperature less often than the log channel computes a [`FixedStage`]
//! (or a [`FixedRowStage`], which also collapses the residual over temperature) per temperature reading and
//! calls [`FixedCalibration::correct_staged`] / [`FixedCalibration::correct_row`] per log sample; a
//! [`StageCache`] does that bookkeeping itself, rebuilding its row stage only when the temperature code (or
//! m°C value) changes. All of them give bit-identical results, errors included. (A row stage also turns the
//! header's scales into plain shifts and limits where it can prove, for every code of the converter, that
//! the saturating forms never saturate: the per-sample work drops by about a third.)
//!
//! Why `x̃` and not `u` as the residual's coordinate: near the swamped low end `x − u` behaves like
//! `ln(u − λ)` and moves with temperature; no uniform (u, T) grid of a few KiB interpolates it to ¼ LSB on a
//! unit with a strong hot bend (the host's table tests measure it). Removed analytically, it leaves a surface
//! that a 16 × 40 grid holds to a few hundredths of an LSB.
//!
//! # Q formats
//!
//! `Qn` means the integer is the value times 2^n. θ is the internal temperature. Spline control points are
//! stored divided by 6 per axis (see the weights in the spline core), which the host folds into each
//! table's scale.
//!
//! | quantity | type | format |
//! |---|---|---|
//! | log ADC code, temperature ADC code | u32 | integer code |
//! | temperature input | i32 | m°C |
//! | θ, internal temperature; [`FixedHeader`] temperatures | i32 | m°C · 2^10 (Q10 m°C, ≈ 1 µK) |
//! | [`SensorTable::knots`] | i32 | θ / 6 |
//! | knot positions | i64 | Q20 knots; segment = position >> 20, fraction t = low 20 bits |
//! | spline weights | i64 | six times the basis, Q28, four per axis, summing to exactly 6·2^28 |
//! | [`FixedCalibration::offset`] O(T) | i32 | codes · 2^`offset_frac` / 6 |
//! | [`FixedCalibration::inv_slope`] 1/S(T) | i32 | Np/code · 2^`inv_slope_frac` / 6 |
//! | [`FixedCalibration::ln_bias`] λ(T), [`FixedCalibration::u_min`] | i32 | Q24 Np / 6 |
//! | u, v = u − λ, x̃, x, [`FixedReading::x`], [`FixedHeader::x_min`]/`x_max` | i64 inside, i32 out | Q24 Np |
//! | [`universal::BEND`] G control points | i32 | Q24 Np / 6 |
//! | [`universal::EXP2`] 2^(j/32) | i32 | Q30 |
//! | [`FixedCalibration::residual`] r control points | i16 | Np · 2^`residual_frac` / 36 |
//! | residual columns collapsed over T | i64 (i32 in a [`FixedRowStage`]) | Np · 2^(`residual_frac` + 13) / 6 |
//! | output: nepers, decades, dB (power and amplitude), absorbance, transmittance % | i64 | Q24 of the unit |
//! | output: ratio | i64 | Q32 |
//!
//! # Overflow
//!
//! Every product is of a weight and a stored i32/i16 value (four-term sums below 2^61.6), of
//! two values already bounded to i32 range (`saturating_mul` where both come from data), or of a value
//! bounded to ±2^31 and a constant below 2^32. Intermediate nepers are clamped to ±2^31 (±128 Np, far
//! outside any table, so the clamp can only turn into a range error). Shift counts from data are clamped.
//! So no input and no table content can wrap or panic; [`FixedCalibration::validate`] refuses tables that
//! would give meaningless results, and `tables::build` on the host only produces tables it validates.
//!
//! # Storage: borrowed slices
//!
//! [`FixedCalibration`] is plain data that borrows its tables as `&'a [i32]`/`&'a [i16]` slices with explicit
//! dimensions and scales in a [`FixedHeader`]. Emitted Rust (`include!` from a build script's `OUT_DIR`)
//! writes `const` arrays and a `const FixedCalibration<'static>` that borrows them, so flash holds each
//! table at its real size, with no spare capacity; a C header does the same with arrays and a struct of
//! pointers; a per-unit EEPROM image is read once into a caller-owned buffer (or into `static mut`-free
//! arrays of its own) from which a `FixedCalibration<'_>` borrows. Fixed-capacity owned arrays would cost
//! the largest size in every product's flash and need serde helpers for arrays over 32; slices cost neither.
//! With the `serde` feature the header derives both traits and the tables serialise (the host deserialises
//! into its own owned form, `logtrim_host::tables::FixedTables`).

#![deny(clippy::float_arithmetic)]

mod interp;
pub mod transcend;
pub mod universal;

#[cfg(test)]
mod tests;

use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::qformat::{millicelsius_of_theta, rescale, round_shr, round_shr_small};
use crate::units::Unit;
use interp::{dot4, four_i16, segment, spline1, weights, POS_FRAC, W_BITS};

/// Version of the layout of [`FixedCalibration`]; [`FixedCalibration::validate`] refuses others.
pub const LAYOUT_VERSION: u8 = 1;
/// Fraction bits of θ relative to m°C (θ = m°C · 2^10), from the crate's Q formats.
pub use crate::qformat::THETA_FRAC;
/// Fraction bits of every quantity in nepers (u, x̃, x, λ, u_min, the bend table).
pub const X_FRAC: u32 = 24;
/// Fraction bits of a knot position (segment = position >> 20).
pub const POSITION_FRAC: u32 = POS_FRAC;
/// Shift of the temperature grid's position: `pos_q20 = (θ − t_origin)·t_inv_step >> T_POS_SHIFT`, so
/// `t_inv_step = 2^48 / (knot step in θ)`.
pub const T_POS_SHIFT: u32 = 28;
/// Shift of the x̃ grid's position: `pos_q20 = (x̃ − xa_origin)·xa_inv_step >> XA_POS_SHIFT`, so
/// `xa_inv_step = 2^48 / (knot step in Q24 Np)` = `2^24 / (knot step in Np)`.
pub const XA_POS_SHIFT: u32 = 28;
/// Extra fraction bits kept in the residual's partial sums.
pub const RESIDUAL_GUARD: u32 = 13;
/// Intermediate nepers are clamped to ±2^31 in Q24 (±128 Np).
const X_CLAMP: i64 = 1 << 31;

/// The scalars of a fixed-point calibration: dimensions, scales, ranges (formats in the module docs).
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
    /// Knots per unit θ, scaled: `pos_q20 = (θ − t_origin)·t_inv_step >> 28` (= 2^48 / step).
    pub t_inv_step: i32,
    /// Fraction bits of the offset table.
    pub offset_frac: u8,
    /// Fraction bits of the inverse-slope table.
    pub inv_slope_frac: u8,
    /// The bias bend is removed with λ(T) and the bend table ([`FixedCalibration::ln_bias`] in use).
    pub bias_bend: bool,
    /// Readings with `u < u_min(T)` are below range ([`FixedCalibration::u_min`] in use).
    pub sensitivity_limit: bool,
    /// Knots of the residual's x̃ grid (control points: `xa_knots + 2`).
    pub xa_knots: u16,
    /// x̃ of knot 0, Q24 Np.
    pub xa_origin: i32,
    /// Knots per unit x̃, scaled: `pos_q20 = (x̃ − xa_origin)·xa_inv_step >> 28` (= 2^24 / step in Np).
    pub xa_inv_step: i32,
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
    /// Control points, θ (Q10 m°C): `segments + 3` of them, the first at knot −1.
    pub knots: &'a [i32],
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
    /// 1/S(T), `t_knots + 2` control points.
    pub inv_slope: &'a [i32],
    /// λ(T) = ln β(T), `t_knots + 2` control points, or empty without [`FixedHeader::bias_bend`].
    pub ln_bias: &'a [i32],
    /// u_min(T), `t_knots + 2` control points, or empty without [`FixedHeader::sensitivity_limit`].
    pub u_min: &'a [i32],
    /// r(x̃, T): `(t_knots + 2)` rows of `(xa_knots + 2)` control points, row-major (row = temperature).
    pub residual: &'a [i16],
    /// The temperature channel, when it is a raw sensor read by ADC.
    pub sensor: Option<SensorTable<'a>>,
}

/// The fixed-point temperature stage: the temperature-dependent part of a correction, computed once per
/// temperature ([`FixedCalibration::stage_millicelsius`], [`FixedCalibration::stage_code`]) and reusable for
/// any number of log codes at that temperature ([`FixedCalibration::correct_staged`]). It holds the
/// temperature's segment and spline weights on the grid and the offset, inverse slope, bias floor and
/// sensitivity limit there.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedStage {
    extrapolated: bool,
    seg: usize,
    w: [i64; 4],
    offset: i64,
    inv_slope: i64,
    ln_bias: i64,
    u_min: i64,
}

impl FixedStage {
    /// The temperature lies outside the calibrated range, within the allowed extrapolation.
    pub fn extrapolated(&self) -> bool {
        self.extrapolated
    }
}

/// Capacity of a [`FixedRowStage`]: residual grids of up to `ROW_CAPACITY − 2` x̃ knots.
pub const ROW_CAPACITY: usize = 66;

/// A [`FixedStage`] with the residual collapsed over temperature for every x̃ column
/// ([`FixedCalibration::row_stage`]), for [`FixedCalibration::correct_row`]. 280 bytes, no heap.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedRowStage {
    stage: FixedStage,
    fast: Option<RowFast>,
    row: [i32; ROW_CAPACITY],
    len: usize,
}

/// Everything the log channel needs at one temperature, gathered from the header and the stage, for the
/// plain-arithmetic form of steps 3–5 ([`RowFast::x`]). Built only where that form is exactly the general
/// one ([`LinearStep::new`] proved the linear step; the grid has at least two knots).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct RowFast {
    linear: LinearStep,
    u_min: i64,
    ln_bias: i64,
    bias_bend: bool,
    xa_origin: i64,
    xa_inv_step: i64,
    /// `(xa_knots − 1)·2^20`: the last position on the grid.
    pos_max: i64,
    /// `xa_knots − 2`: the last segment.
    seg_max: usize,
    scale: ResidualScale,
    x_min: i64,
    x_max: i64,
}

impl RowFast {
    fn new(h: &FixedHeader, stage: &FixedStage) -> Option<RowFast> {
        let knots = usize::from(h.xa_knots);
        if knots < 2 {
            return None;
        }
        Some(RowFast {
            linear: LinearStep::new(h, stage)?,
            u_min: stage.u_min,
            ln_bias: stage.ln_bias,
            bias_bend: h.bias_bend,
            xa_origin: i64::from(h.xa_origin),
            xa_inv_step: i64::from(h.xa_inv_step),
            pos_max: (knots as i64 - 1) << POS_FRAC,
            seg_max: knots - 2,
            scale: ResidualScale::of(h),
            x_min: i64::from(h.x_min),
            x_max: i64::from(h.x_max),
        })
    }

    /// x in Q24 for a checked code: the same steps and results as [`FixedCalibration::x_from_u`] with the
    /// collapsed row, with the header's scales already turned into shifts and limits.
    #[inline(always)]
    fn x(&self, row: &[i32; ROW_CAPACITY], code: u32) -> Result<i32, Error> {
        // Inside ±2^31 for every code (`LinearStep::new`), so the general form's clamp is a no-op.
        let u = self.linear.u(code);
        if u < self.u_min {
            return Err(Error::BelowRange);
        }
        let xa = if self.bias_bend { u + transcend::bend_q24(u - self.ln_bias)? } else { u };
        let pos = (xa - self.xa_origin).saturating_mul(self.xa_inv_step) >> XA_POS_SHIFT;
        if pos < 0 {
            return Err(Error::BelowRange);
        }
        if pos > self.pos_max {
            return Err(Error::AboveRange);
        }
        // 0 ≤ pos ≤ (knots − 1)·2^20, so the segment needs only the upper clamp and t lies in [0, 2^20]:
        // what `segment` gives.
        let seg = ((pos >> POS_FRAC) as usize).min(self.seg_max);
        let t = pos - ((seg as i64) << POS_FRAC);
        // seg + 4 ≤ knots + 2, the row's length: never past the collapsed columns.
        let cols = interp::four_i32(row, seg).ok_or(BAD_TABLE)?;
        let r = self.scale.apply(round_shr_small(dot4(&interp::weights_in(t), cols), W_BITS));
        let x = xa + r;
        if x < self.x_min {
            return Err(Error::BelowRange);
        }
        if x > self.x_max {
            return Err(Error::AboveRange);
        }
        Ok(x as i32)
    }
}

/// The linear step `u = ((code << qo) − O)·(1/S)` rescaled to Q24, in plain arithmetic: built only where the
/// row stage has proved, at both ends of the converter's codes, that neither the product nor the rounding
/// saturates and that u stays inside the ±2^31 clamp (u is linear in the code, so the ends bound every
/// code). It then gives exactly the general form's result with a third of its instructions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct LinearStep {
    qo: u32,
    offset: i64,
    inv_slope: i64,
    round: i64,
    shr: u32,
}

/// The residual's move from `residual_frac + 13` fraction bits to Q24: `((r << left) + round) >> right`,
/// one of the shifts zero. For the residual's values (below 2^33.2, shifts below 20) this is exactly
/// [`rescale`]: no rounding add or left shift can saturate.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct ResidualScale {
    left: u32,
    right: u32,
    round: i64,
}

impl ResidualScale {
    #[inline(always)]
    fn of(h: &FixedHeader) -> ResidualScale {
        let from = u32::from(h.residual_frac).min(30) + RESIDUAL_GUARD; // 13..=43
        match from.checked_sub(X_FRAC) {
            Some(0) => ResidualScale { left: 0, right: 0, round: 0 },
            Some(n) => ResidualScale { left: 0, right: n, round: 1 << (n - 1) },
            None => ResidualScale { left: X_FRAC - from, right: 0, round: 0 },
        }
    }

    #[inline(always)]
    fn apply(self, r: i64) -> i64 {
        ((r << self.left) + self.round) >> self.right
    }
}

impl LinearStep {
    /// The step at a stage, or `None` where only the general (saturating) form is exact.
    fn new(h: &FixedHeader, stage: &FixedStage) -> Option<LinearStep> {
        let qo = u32::from(h.offset_frac).min(30);
        let qs = u32::from(h.inv_slope_frac).min(62);
        // Only right shifts (from ≥ 24 fraction bits) have a plain form; n is clamped as in `round_shr`.
        let shr = (qo + qs).checked_sub(X_FRAC)?.min(62);
        let round = if shr == 0 { 0 } else { 1i64 << (shr - 1) };
        let step = LinearStep { qo, offset: stage.offset, inv_slope: stage.inv_slope, round, shr };
        let u_at = |code: u32| -> Option<i64> {
            let diff = (i64::from(code) << qo) - stage.offset;
            let u = diff.checked_mul(stage.inv_slope)?.checked_add(round)? >> shr;
            (-X_CLAMP..=X_CLAMP).contains(&u).then_some(u)
        };
        u_at(0)?;
        u_at(h.adc_max_code)?;
        Some(step)
    }

    /// u in Q24 for a code within the converter's range (checked by the caller).
    #[inline(always)]
    fn u(&self, code: u32) -> i64 {
        // Bounded at both ends of the codes by `new`, so nothing here overflows.
        ((((i64::from(code)) << self.qo) - self.offset) * self.inv_slope + self.round) >> self.shr
    }
}

impl FixedRowStage {
    /// The temperature lies outside the calibrated range, within the allowed extrapolation.
    pub fn extrapolated(&self) -> bool {
        self.stage.extrapolated
    }
}

/// A fixed calibration with the [`FixedRowStage`] of the last temperature it was given: the per-sample path of a
/// firmware whose temperature moves slowly next to its log channel. A new temperature code (or m°C value)
/// builds the stage (about the work of ten samples); the same one reuses it, so a sample costs the log
/// channel's work alone. Results are bit-identical to [`FixedCalibration::correct_raw`] and
/// [`FixedCalibration::correct`] for every input, errors included (only successful stages are kept).
///
/// The cache owns its calibration (a [`FixedCalibration`] is a few slices and a header), so a stage can
/// never be reused with other tables. About 500 bytes of RAM, no heap.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StageCache<'a> {
    cal: FixedCalibration<'a>,
    /// The kept stage's temperature: a temperature code, or `1 << 32 | m°C as u32`; [`NO_KEY`] when empty.
    key: u64,
    row: FixedRowStage,
    /// Lowest and highest code outside the rail margins: the one range check of a sample.
    code_lo: u32,
    code_hi: u32,
}

/// [`StageCache::key`] when no stage is kept (above every key).
const NO_KEY: u64 = u64::MAX;

/// A row stage that is never read (the cache starts with [`NO_KEY`]).
const EMPTY_ROW: FixedRowStage = FixedRowStage {
    stage: FixedStage {
        extrapolated: false,
        seg: 0,
        w: [0; 4],
        offset: 0,
        inv_slope: 0,
        ln_bias: 0,
        u_min: 0,
    },
    fast: None,
    row: [0; ROW_CAPACITY],
    len: 0,
};

impl<'a> StageCache<'a> {
    /// An empty cache over a calibration (validate the calibration first, as for direct use).
    pub const fn new(cal: FixedCalibration<'a>) -> StageCache<'a> {
        let h = &cal.header;
        let code_lo = h.rail_margin.saturating_add(1);
        let code_hi = match h.adc_max_code.checked_sub(h.rail_margin) {
            Some(v) => v.saturating_sub(1),
            None => 0,
        };
        StageCache { cal, key: NO_KEY, row: EMPTY_ROW, code_lo, code_hi }
    }

    /// The calibration the cache corrects with.
    pub fn calibration(&self) -> &FixedCalibration<'a> {
        &self.cal
    }

    /// Forgets the kept stage (nothing else changes: the next call builds it again).
    pub fn clear(&mut self) {
        self.key = NO_KEY;
    }

    /// [`FixedCalibration::correct_raw`] through the cache.
    #[inline(always)]
    pub fn correct_raw(&mut self, code: u32, temp_code: u32) -> Result<FixedReading, Error> {
        self.correct_keyed(code, u64::from(temp_code))
    }

    /// [`FixedCalibration::correct`] through the cache.
    #[inline(always)]
    pub fn correct(&mut self, code: u32, temp_mc: i32) -> Result<FixedReading, Error> {
        self.correct_keyed(code, 1 << 32 | u64::from(temp_mc as u32))
    }

    #[inline(always)]
    fn correct_keyed(&mut self, code: u32, key: u64) -> Result<FixedReading, Error> {
        // The same order of checks as the direct path: the code, then the temperature. Codes between the
        // rail margins pass `check_code`; the others get its exact error.
        if !(self.code_lo <= code && code <= self.code_hi) {
            self.cal.check_code(code)?;
        }
        if key != self.key {
            return self.miss(code, key);
        }
        self.cal.correct_row_checked(&self.row, code)
    }

    /// A new temperature: builds and keeps its row stage (out of line: the rare path). Where no row stage
    /// can be built (a residual grid wider than [`ROW_CAPACITY`], or tables `validate` refuses), the
    /// reading goes through the plain stage, uncached, exactly as the direct path computes it.
    #[inline(never)]
    fn miss(&mut self, code: u32, key: u64) -> Result<FixedReading, Error> {
        self.key = NO_KEY;
        let stage = if key >> 32 == 0 {
            self.cal.stage_code(key as u32)?
        } else {
            self.cal.stage_millicelsius(key as u32 as i32)?
        };
        match self.cal.fill_row_stage(&stage, &mut self.row) {
            Ok(()) => {
                self.key = key;
                self.cal.correct_row_checked(&self.row, code)
            }
            Err(_) => self.cal.correct_staged(&stage, code),
        }
    }
}

/// One residual column collapsed over temperature: `(Σ_k w_k · r_k) >> (28 − 13)` for the stage's weights
/// and the column's four i16 control points, below 2^30.6 (weights sum to 6·2^28).
#[inline(always)]
fn collapse(w: &[i64; 4], r: [i64; 4]) -> i64 {
    dot4(w, r) >> (W_BITS - RESIDUAL_GUARD)
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
const INV_LN10_Q32: i64 = 1_865_280_597;
/// 10/ln 10 in Q28.
const DB10_Q28: i64 = 1_165_800_373;
/// 20/ln 10 in Q28.
const DB20_Q28: i64 = 2_331_600_746;

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
        let x = i64::from(self.x);
        Ok(match unit {
            Unit::Nepers => x,
            Unit::Decades => round_shr(x * INV_LN10_Q32, 32),
            Unit::DbPower => round_shr(x * DB10_Q28, 28),
            Unit::DbAmplitude => round_shr(x * DB20_Q28, 28),
            Unit::Absorbance => -round_shr(x * INV_LN10_Q32, 32),
            Unit::TransmittancePercent => {
                let e = transcend::exp_q32(x)?;
                round_shr(e.checked_mul(100).ok_or(Error::AboveRange)?, 8)
            }
            Unit::Ratio => transcend::exp_q32(x)?,
        })
    }
}

const BAD_TABLE: Error = Error::InvalidCalibration(CalibrationDefect::Coefficient);

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
    #[inline(always)]
    pub fn correct(&self, code: u32, temp_mc: i32) -> Result<FixedReading, Error> {
        self.check_code(code)?;
        let stage = self.stage_millicelsius(temp_mc)?;
        self.correct_staged(&stage, code)
    }

    /// Corrects one reading from raw codes: `code` from the log channel, `temp_code` from the temperature
    /// channel (through [`FixedCalibration::sensor`]).
    #[inline(always)]
    pub fn correct_raw(&self, code: u32, temp_code: u32) -> Result<FixedReading, Error> {
        self.check_code(code)?;
        let stage = self.stage_code(temp_code)?;
        self.correct_staged(&stage, code)
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
        let sh = u32::from(s.step_log2).min(16);
        let pos = i64::from(temp_code - s.code_lo) << (POS_FRAC - sh); // < 2^52
        let (seg, t) = segment(pos, s.knots.len().saturating_sub(2));
        let theta = spline1(s.knots, seg, &weights(t)).ok_or(BAD_TABLE)?;
        // A convex combination of i32 control points is in i32 range.
        i32::try_from(theta).map_err(|_| BAD_TABLE)
    }

    /// The temperature stage at a temperature in m°C.
    #[inline(always)]
    pub fn stage_millicelsius(&self, temp_mc: i32) -> Result<FixedStage, Error> {
        self.stage_theta(i64::from(temp_mc) << THETA_FRAC)
    }

    /// The temperature stage at the temperature channel's code.
    #[inline(always)]
    pub fn stage_code(&self, temp_code: u32) -> Result<FixedStage, Error> {
        let theta = self.theta_from_code(temp_code)?;
        self.stage_theta(i64::from(theta))
    }

    /// The temperature stage at θ (Q10 m°C).
    #[inline(always)]
    pub fn stage_theta(&self, theta: i64) -> Result<FixedStage, Error> {
        let h = &self.header;
        if theta < i64::from(h.temp_lo) || theta > i64::from(h.temp_hi) {
            // The temperature in m°C for the error (saturated at the i32 ends only for θ far beyond any sensor).
            return Err(Error::TemperatureOutOfRange { millicelsius: millicelsius_of_theta(theta) });
        }
        let extrapolated = theta < i64::from(h.temp_min) || theta > i64::from(h.temp_max);
        let pos = (theta - i64::from(h.t_origin)).saturating_mul(i64::from(h.t_inv_step)) >> T_POS_SHIFT;
        let (seg, t) = segment(pos, usize::from(h.t_knots));
        let w = weights(t);
        let offset = spline1(self.offset, seg, &w).ok_or(BAD_TABLE)?;
        let inv_slope = spline1(self.inv_slope, seg, &w).ok_or(BAD_TABLE)?;
        let ln_bias = if h.bias_bend { spline1(self.ln_bias, seg, &w).ok_or(BAD_TABLE)? } else { 0 };
        let u_min =
            if h.sensitivity_limit { spline1(self.u_min, seg, &w).ok_or(BAD_TABLE)? } else { i64::MIN };
        Ok(FixedStage { extrapolated, seg, w, offset, inv_slope, ln_bias, u_min })
    }

    /// The log-channel part of a correction at a temperature stage. The code is checked again (cheap).
    #[inline(always)]
    pub fn correct_staged(&self, stage: &FixedStage, code: u32) -> Result<FixedReading, Error> {
        self.check_code(code)?;
        let x = self.x_q24(stage, code, None)?;
        Ok(FixedReading { x, temperature_extrapolated: stage.extrapolated })
    }

    /// Residual columns `col..col + 4` collapsed over the stage's temperature:
    /// `(Σ_k w_k · r[seg + k][col + i]) >> (28 − 13)`, each below 2^30.6 (weights sum to 6·2^28, i16 values).
    #[inline(always)]
    fn columns(&self, stage: &FixedStage, col: usize) -> Result<[i64; 4], Error> {
        let stride = usize::from(self.header.xa_knots) + 2;
        // The four rows' windows start at `first + k·stride`; one slice holds all of them.
        let first = stage.seg.checked_mul(stride).and_then(|j| j.checked_add(col)).ok_or(BAD_TABLE)?;
        let end = stride.checked_mul(3).and_then(|j| j.checked_add(first)).and_then(|j| j.checked_add(4));
        let block = self.residual.get(first..end.ok_or(BAD_TABLE)?).ok_or(BAD_TABLE)?;
        let r0 = four_i16(block, 0).ok_or(BAD_TABLE)?;
        let r1 = four_i16(block, stride).ok_or(BAD_TABLE)?;
        let r2 = four_i16(block, 2 * stride).ok_or(BAD_TABLE)?;
        let r3 = four_i16(block, 3 * stride).ok_or(BAD_TABLE)?;
        let w = &stage.w;
        Ok([
            collapse(w, [r0[0], r1[0], r2[0], r3[0]]),
            collapse(w, [r0[1], r1[1], r2[1], r3[1]]),
            collapse(w, [r0[2], r1[2], r2[2], r3[2]]),
            collapse(w, [r0[3], r1[3], r2[3], r3[3]]),
        ])
    }

    /// The temperature stage with the residual collapsed over temperature for every x̃ column: the
    /// per-sample work of [`FixedCalibration::correct_row`] is then one cubic in x̃ (a firmware that reads
    /// the temperature less often than the log channel builds one per temperature reading). Results are
    /// bit-identical to [`FixedCalibration::correct_staged`]. [`Error::InvalidCalibration`] when the grid has
    /// more than [`ROW_CAPACITY`] − 2 knots.
    pub fn row_stage(&self, stage: &FixedStage) -> Result<FixedRowStage, Error> {
        let mut rs = EMPTY_ROW;
        self.fill_row_stage(stage, &mut rs)?;
        Ok(rs)
    }

    /// [`FixedCalibration::row_stage`] into a caller's row stage (no copy of its 66 columns).
    fn fill_row_stage(&self, stage: &FixedStage, rs: &mut FixedRowStage) -> Result<(), Error> {
        let n = usize::from(self.header.xa_knots) + 2;
        if n > ROW_CAPACITY {
            return Err(BAD_TABLE);
        }
        // The four rows of the stage's segment, each `n` control points long, collapsed column by column
        // exactly as `columns` does it four at a time.
        let first = stage.seg.checked_mul(n).ok_or(BAD_TABLE)?;
        let row_k = |k: usize| {
            let start = n.checked_mul(k).and_then(|j| j.checked_add(first))?;
            self.residual.get(start..start.checked_add(n)?)
        };
        let (r0, r1, r2, r3) = match (row_k(0), row_k(1), row_k(2), row_k(3)) {
            (Some(a), Some(b), Some(c), Some(d)) => (a, b, c, d),
            _ => return Err(BAD_TABLE),
        };
        let cols = r0.iter().zip(r1).zip(r2).zip(r3);
        for (dst, (((&a, &b), &c), &d)) in rs.row.iter_mut().zip(cols) {
            let v = collapse(&stage.w, [a, b, c, d].map(i64::from));
            // Below 2^30.6: fits.
            *dst = v as i32;
        }
        rs.stage = *stage;
        rs.fast = RowFast::new(&self.header, stage);
        rs.len = n;
        Ok(())
    }

    /// The log-channel part of a correction at a [`FixedRowStage`]: bit-identical to
    /// [`FixedCalibration::correct_staged`] at the same stage, with a quarter of the residual's work.
    #[inline(always)]
    pub fn correct_row(&self, rs: &FixedRowStage, code: u32) -> Result<FixedReading, Error> {
        self.check_code(code)?;
        self.correct_row_checked(rs, code)
    }

    /// [`FixedCalibration::correct_row`] for a code already checked.
    #[inline(always)]
    fn correct_row_checked(&self, rs: &FixedRowStage, code: u32) -> Result<FixedReading, Error> {
        let x = match &rs.fast {
            Some(f) => f.x(&rs.row, code)?,
            None => {
                let row = rs.row.get(..rs.len).ok_or(BAD_TABLE)?;
                self.x_from_u(
                    &rs.stage,
                    self.u_q24(&rs.stage, code),
                    Some(row),
                    ResidualScale::of(&self.header),
                )?
            }
        };
        Ok(FixedReading { x, temperature_extrapolated: rs.stage.extrapolated })
    }

    /// u = (code − O(T))/S(T) in Q24 for a checked code, clamped to ±2^31 (any table content).
    #[inline(always)]
    fn u_q24(&self, stage: &FixedStage, code: u32) -> i64 {
        let h = &self.header;
        let qo = u32::from(h.offset_frac).min(30);
        let qs = u32::from(h.inv_slope_frac).min(62);
        // code < 2^32, so code·2^30 < 2^62; the offset is below 2^33.6 (six times an i32).
        let diff = (i64::from(code) << qo) - stage.offset;
        rescale(diff.saturating_mul(stage.inv_slope), qo + qs, X_FRAC).clamp(-X_CLAMP, X_CLAMP)
    }

    /// x in Q24 at a temperature stage for a checked code.
    #[inline(always)]
    fn x_q24(&self, stage: &FixedStage, code: u32, row: Option<&[i32]>) -> Result<i32, Error> {
        self.x_from_u(stage, self.u_q24(stage, code), row, ResidualScale::of(&self.header))
    }

    /// x in Q24 from u (steps 4 and 5 of the chain).
    #[inline(always)]
    fn x_from_u(
        &self,
        stage: &FixedStage,
        u: i64,
        row: Option<&[i32]>,
        scale: ResidualScale,
    ) -> Result<i32, Error> {
        let h = &self.header;
        if u < stage.u_min {
            return Err(Error::BelowRange);
        }
        let xa = if h.bias_bend { u + transcend::bend_q24(u - stage.ln_bias)? } else { u };
        // Position on the x̃ grid; |x̃ − origin| < 2^33, so saturation only happens far outside the grid.
        let pos = (xa - i64::from(h.xa_origin)).saturating_mul(i64::from(h.xa_inv_step)) >> XA_POS_SHIFT;
        let xa_knots = usize::from(h.xa_knots);
        if pos < 0 {
            return Err(Error::BelowRange);
        }
        if pos > (xa_knots as i64 - 1) * (1 << POS_FRAC) {
            return Err(Error::AboveRange);
        }
        let (col, t) = segment(pos, xa_knots);
        let wu = weights(t);
        // The residual's four columns, already collapsed over temperature (each below 2^30.6).
        let cols = match row {
            Some(row) => interp::four_i32(row, col).ok_or(BAD_TABLE)?,
            None => self.columns(stage, col)?,
        };
        // Below 2^61.2 before the shift, 2^33.2 after it.
        let r = scale.apply(round_shr_small(dot4(&wu, cols), W_BITS));
        let x = xa + r;
        if x < i64::from(h.x_min) {
            return Err(Error::BelowRange);
        }
        if x > i64::from(h.x_max) {
            return Err(Error::AboveRange);
        }
        // x_min ≤ x ≤ x_max, both i32.
        Ok(x as i32)
    }

    /// Checks that the tables are consistent and the scales sane: what a loader calls once before trusting
    /// a calibration (the correction itself never panics or wraps on any content, but gives meaningless
    /// results for tables this refuses).
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
        if !(h.temp_lo <= h.temp_min && h.temp_min < h.temp_max && h.temp_max <= h.temp_hi) {
            return bad(D::TemperatureRange);
        }
        if !(h.x_min < h.x_max && i64::from(h.x_min) > -(100 << X_FRAC) && i64::from(h.x_max) < 100 << X_FRAC)
        {
            return bad(D::XRange);
        }
        // The temperature grid must cover the accepted range.
        let nt = usize::from(h.t_knots);
        let tpos = |theta: i32| {
            (i64::from(theta) - i64::from(h.t_origin)).saturating_mul(i64::from(h.t_inv_step)) >> T_POS_SHIFT
        };
        if nt < 2 || h.t_inv_step <= 0 || tpos(h.temp_lo) < 0 || tpos(h.temp_hi) > (nt as i64 - 1) << POS_FRAC
        {
            return bad(D::Normalisation);
        }
        let nxa = usize::from(h.xa_knots);
        let scales_ok = h.offset_frac <= 30
            && (i64::from(h.adc_max_code) << h.offset_frac) < 1 << 31
            && h.inv_slope_frac <= 62
            && h.residual_frac <= 30
            && nxa >= 2
            && h.xa_inv_step > 0;
        let lens_ok = self.offset.len() == nt + 2
            && self.inv_slope.len() == nt + 2
            && (!h.bias_bend || self.ln_bias.len() == nt + 2)
            && (!h.sensitivity_limit || self.u_min.len() == nt + 2)
            && Some(self.residual.len()) == (nt + 2).checked_mul(nxa + 2);
        if !(scales_ok && lens_ok) {
            return bad(D::Coefficient);
        }
        if self.inv_slope.iter().any(|&s| s <= 0) {
            return bad(D::ZeroSlope);
        }
        if let Some(s) = &self.sensor {
            let span = u64::from(s.code_hi.saturating_sub(s.code_lo));
            let segs = span.div_ceil(1u64 << s.step_log2.min(16)).max(1);
            if s.code_lo > s.code_hi || s.step_log2 > 16 || (s.knots.len() as u64) < segs + 3 {
                return bad(D::Coefficient);
            }
        }
        Ok(())
    }

    /// Flash taken by the tables and the header, in bytes (the universal tables not included: see
    /// [`universal::BYTES`]).
    pub fn table_bytes(&self) -> usize {
        let words = self.offset.len() + self.inv_slope.len() + self.ln_bias.len() + self.u_min.len();
        let sensor = self.sensor.as_ref().map_or(0, |s| 4 * s.knots.len() + 12);
        4 * words + 2 * self.residual.len() + sensor + core::mem::size_of::<FixedHeader>()
    }
}
