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
//! a firmware that reads the temperature less often than the log channel computes a [`TemperatureStage`]
//! (or a [`RowStage`], which also collapses the residual over temperature) per temperature reading and
//! calls [`FixedCalibration::correct_staged`] / [`FixedCalibration::correct_row`] per log sample. All three
//! give bit-identical results.
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
//! | residual columns collapsed over T | i64 (i32 in a [`RowStage`]) | Np · 2^(`residual_frac` + 13) / 6 |
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

use crate::calibration::temperature_out_of_range_millicelsius;
use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::units::Unit;
use interp::{
    dot4, four_i16, rescale, round_shr, round_shr_small, segment, spline1, weights, POS_FRAC, W_BITS,
};

/// Version of the layout of [`FixedCalibration`]; [`FixedCalibration::validate`] refuses others.
pub const LAYOUT_VERSION: u8 = 1;
/// Fraction bits of θ relative to m°C (θ = m°C · 2^10).
pub const THETA_FRAC: u32 = 10;
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

/// The temperature-dependent part of a correction, computed once per temperature
/// ([`FixedCalibration::stage_millicelsius`], [`FixedCalibration::stage_code`]) and reusable for any number
/// of log codes at that temperature ([`FixedCalibration::correct_staged`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TemperatureStage {
    extrapolated: bool,
    seg: usize,
    w: [i64; 4],
    offset: i64,
    inv_slope: i64,
    ln_bias: i64,
    u_min: i64,
}

impl TemperatureStage {
    /// The temperature lies outside the calibrated range, within the allowed extrapolation.
    pub fn extrapolated(&self) -> bool {
        self.extrapolated
    }
}

/// Capacity of a [`RowStage`]: residual grids of up to `ROW_CAPACITY − 2` x̃ knots.
pub const ROW_CAPACITY: usize = 66;

/// A [`TemperatureStage`] with the residual collapsed over temperature for every x̃ column
/// ([`FixedCalibration::row_stage`]), for [`FixedCalibration::correct_row`]. 280 bytes, no heap.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RowStage {
    stage: TemperatureStage,
    row: [i32; ROW_CAPACITY],
    len: usize,
}

impl RowStage {
    /// The temperature lies outside the calibrated range, within the allowed extrapolation.
    pub fn extrapolated(&self) -> bool {
        self.stage.extrapolated
    }
}

/// A corrected reading in fixed point.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
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
    pub fn stage_millicelsius(&self, temp_mc: i32) -> Result<TemperatureStage, Error> {
        self.stage_theta(i64::from(temp_mc) << THETA_FRAC)
    }

    /// The temperature stage at the temperature channel's code.
    #[inline(always)]
    pub fn stage_code(&self, temp_code: u32) -> Result<TemperatureStage, Error> {
        let theta = self.theta_from_code(temp_code)?;
        self.stage_theta(i64::from(theta))
    }

    /// The temperature stage at θ (Q10 m°C).
    #[inline(always)]
    pub fn stage_theta(&self, theta: i64) -> Result<TemperatureStage, Error> {
        let h = &self.header;
        if theta < i64::from(h.temp_lo) || theta > i64::from(h.temp_hi) {
            // The temperature in m°C for the error (clamped to i32 only for θ far beyond any sensor).
            let mc = round_shr(theta, THETA_FRAC).clamp(i64::from(i32::MIN), i64::from(i32::MAX)) as i32;
            return Err(temperature_out_of_range_millicelsius(mc));
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
        Ok(TemperatureStage { extrapolated, seg, w, offset, inv_slope, ln_bias, u_min })
    }

    /// The log-channel part of a correction at a temperature stage. The code is checked again (cheap).
    #[inline(always)]
    pub fn correct_staged(&self, stage: &TemperatureStage, code: u32) -> Result<FixedReading, Error> {
        self.check_code(code)?;
        let x = self.x_q24(stage, code, None)?;
        Ok(FixedReading { x, temperature_extrapolated: stage.extrapolated })
    }

    /// Residual columns `col..col + 4` collapsed over the stage's temperature:
    /// `(Σ_k w_k · r[seg + k][col + i]) >> (28 − 13)`, each below 2^30.6 (weights sum to 6·2^28, i16 values).
    #[inline(always)]
    fn columns(&self, stage: &TemperatureStage, col: usize) -> Result<[i64; 4], Error> {
        let stride = usize::from(self.header.xa_knots) + 2;
        let mut rows = [[0i64; 4]; 4];
        for (k, r) in rows.iter_mut().enumerate() {
            let start =
                stage.seg.checked_add(k).and_then(|j| j.checked_mul(stride)).and_then(|j| j.checked_add(col));
            *r = four_i16(self.residual, start.ok_or(BAD_TABLE)?).ok_or(BAD_TABLE)?;
        }
        let w = &stage.w;
        let [r0, r1, r2, r3] = rows;
        let mut out = [0i64; 4];
        for ((((o, a), b), c), d) in out.iter_mut().zip(r0).zip(r1).zip(r2).zip(r3) {
            *o = dot4(w, [a, b, c, d]) >> (W_BITS - RESIDUAL_GUARD);
        }
        Ok(out)
    }

    /// The temperature stage with the residual collapsed over temperature for every x̃ column: the
    /// per-sample work of [`FixedCalibration::correct_row`] is then one cubic in x̃ (a firmware that reads
    /// the temperature less often than the log channel builds one per temperature reading). Results are
    /// bit-identical to [`FixedCalibration::correct_staged`]. [`Error::InvalidCalibration`] when the grid has
    /// more than [`ROW_CAPACITY`] − 2 knots.
    pub fn row_stage(&self, stage: &TemperatureStage) -> Result<RowStage, Error> {
        let n = usize::from(self.header.xa_knots) + 2;
        if n > ROW_CAPACITY {
            return Err(BAD_TABLE);
        }
        let mut row = [0i32; ROW_CAPACITY];
        // Four columns at a time; the last group may overlap the one before it.
        let mut col = 0;
        while col < n {
            let start = col.min(n.saturating_sub(4));
            let c = self.columns(stage, start)?;
            for (dst, v) in row.iter_mut().skip(start).zip(c) {
                // Below 2^30.6: fits.
                *dst = v as i32;
            }
            col = start + 4;
        }
        Ok(RowStage { stage: *stage, row, len: n })
    }

    /// The log-channel part of a correction at a [`RowStage`]: bit-identical to
    /// [`FixedCalibration::correct_staged`] at the same stage, with a quarter of the residual's work.
    #[inline(always)]
    pub fn correct_row(&self, rs: &RowStage, code: u32) -> Result<FixedReading, Error> {
        self.check_code(code)?;
        let row = rs.row.get(..rs.len).ok_or(BAD_TABLE)?;
        let x = self.x_q24(&rs.stage, code, Some(row))?;
        Ok(FixedReading { x, temperature_extrapolated: rs.stage.extrapolated })
    }

    /// x in Q24 at a temperature stage for a checked code.
    #[inline(always)]
    fn x_q24(&self, stage: &TemperatureStage, code: u32, row: Option<&[i32]>) -> Result<i32, Error> {
        let h = &self.header;
        let qo = u32::from(h.offset_frac).min(30);
        let qs = u32::from(h.inv_slope_frac).min(62);
        // code < 2^32, so code·2^30 < 2^62; the offset is in i32 range.
        let diff = (i64::from(code) << qo) - stage.offset;
        let u = rescale(diff.saturating_mul(stage.inv_slope), qo + qs, X_FRAC).clamp(-X_CLAMP, X_CLAMP);
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
        // Below 2^61.2.
        let r = round_shr_small(dot4(&wu, cols), W_BITS);
        let r = rescale(r, u32::from(h.residual_frac).min(30) + RESIDUAL_GUARD, X_FRAC);
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
