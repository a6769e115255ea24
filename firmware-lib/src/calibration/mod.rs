//! The calibration of one unit: the model's types and their validation, the f32 correction (ADC code,
//! temperature) → x = ln(I_sig/I_ref) the firmware runs, and (feature `reference`) the host's f64 reference
//! of the same code.
//!
//! # The model
//!
//! With `T` in °C, `T_K = T + 273.15`, the normalised temperature `τ = (T − T_c)/T_h` and Chebyshev series
//! `P(τ) = Σ c_k T_k(τ)`, the fitted forward model of a unit (code as a function of x and T) is
//!
//! ```text
//! code = L + [ P_c(τ) + ρ·(T_K/T_ref)·β(τ) + (T_K/T_ref)·P_s(τ)·ln(e^x + β(τ)) + P_h(τ)·e^x ] / (1 + q·τ)
//! β(τ) = exp(b_0 + b_1·τ)                       (zero when the bias term is off)
//! ```
//!
//! * `L` is the level shift in codes ([`AdcScaling::level_shift_code`]).
//! * `(T_K/T_ref)·P_s(τ)/(1 + qτ)` is the slope in codes per neper: proportional to absolute temperature
//!   (kT/q) times the gain of the output stage. A compensating resistor of linear tempco α in the gain
//!   divider makes the gain `(R1(T)+R2)/R1(T)`, a ratio of two linear functions of T: the pole `q` is that
//!   resistor's tempco scaled to τ, and `P_s` carries the numerator and any residual. `q = 0` describes an
//!   uncompensated front end.
//! * `P_c(τ)/(1 + qτ)` is the offset: pair mismatch (PTAT), op-amp offsets and their drift, multiplied by the
//!   same gain, plus ADC offset.
//! * `β(τ)` is the op-amp input bias current over the reference current. It adds to the signal current and
//!   bends the low end: `ln(e^x + β)`. Bias currents grow exponentially with temperature, so `ln β` is linear
//!   in T. The reference input's bias current adds `ln(1 + β_r)` ≈ `β_r` on the other side of the pair;
//!   with the same temperature law it is the offset term `ρ·(T_K/T_ref)·β(τ)` (ρ in codes, either sign).
//! * `P_h(τ)·e^x` is the bulk-resistance term `I_sig·r` that bends the high end.
//!
//! The firmware inverts this model: with `w = (code − L − c_0)/S` (offset and slope at the temperature) and
//! `h = H/S` (bulk term over slope), it solves `z + h·(e^z − β) = w` for `z = ln(e^x + β)` by Newton's
//! method (convex and monotone, started at `z = w`, at most [`NEWTON_STEPS`] steps), then
//! `x₀ = ln(e^z − β)`. A generic smooth residual `R(ξ, τ) = Σ r_ij T_i(ξ) T_j(τ)` with
//! `ξ = (x₀ − x_c)/x_h` is added last: `x = x₀ + R`. The host fits `R` to whatever the physical terms leave.
//!
//! # Range and status
//!
//! * The code must lie within the converter and outside [`AdcScaling::rail_margin`] of either rail.
//! * The temperature must lie in the calibrated range; [`TemperatureRange::extrapolation_k`] allows a bounded
//!   excursion beyond it, flagged in [`Reading::temperature_extrapolated`].
//! * x must lie in the calibrated x range, and the local sensitivity `∂w/∂x = e^x/(e^x+β) + h·e^x` (1 for an
//!   ideal front end) must be at least [`XRange::min_sensitivity`]: where the bias current swamps the
//!   signal the unit reports [`Error::BelowRange`] instead of inventing a value.
//!
//! # Where each part lives
//!
//! | file | owns |
//! |---|---|
//! | `mod.rs` | the model's types ([`Calibration`], [`Model`], [`Series`], …), [`Calibration::nominal`] and validation |
//! | `inverse.rs` | the inverse of the model, one generic body for f32 and f64: a temperature's stage (checks, offset, slope, bends), then the log channel (Newton, bends, residual, range checks) |
//! | `firmware.rs` | the f32 correction the firmware runs: [`Calibration::correct`], [`Calibration::stage_with`] → [`F32Stage`] → [`Calibration::correct_staged`], means of codes |
//! | `reference.rs` | (feature `reference`) the host's f64 reference of the same code: `correct_f64`, the forward model `forward_code_f64`, the f64 stage `F64Stage`, the stage's terms for table generation |
//! | `sweep.rs` | (feature `reference`) `ReferenceSweep`: the f64 reference over a temperature's codes, warm-started |
//!
//! The same inverse is evaluated in f32 (with a chosen [`Backend`]) and in f64 (`Calibration::correct_f64`,
//! the host's reference, feature `reference`), so the host tests exactly what the firmware runs.
//!
//! A correction is a temperature stage (the temperature's checks, offset, slope and bends), computed once
//! per temperature by [`Calibration::stage_with`] (an [`F32Stage`]) or `Calibration::reference_stage` (an
//! `F64Stage`), and a per-code part, [`Calibration::correct_staged`] or `Calibration::correct_staged_f64`.
//! [`Calibration::correct_with`] is exactly the two f32 steps in one call.

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use crate::error::{CalibrationDefect, Error};
#[cfg(doc)]
use crate::math::Backend;
use crate::math::{clenshaw, Real};
use crate::physics::ZERO_CELSIUS_K;
use crate::units::Unit;

mod firmware;
mod inverse;
mod proof;
#[cfg(feature = "reference")]
mod reference;
#[cfg(feature = "reference")]
mod sweep;
#[cfg(test)]
mod tests;

pub use firmware::F32Stage;
#[cfg(feature = "reference")]
pub use reference::{F64Stage, F64StageTerms, ReadingF64, XFromW};
#[cfg(feature = "reference")]
pub use sweep::ReferenceSweep;

/// Capacity of a Chebyshev series over temperature (degree ≤ 5).
pub const MAX_SERIES: usize = 6;
/// Capacity of the residual surface in each direction (degree ≤ 3 in x and in τ).
pub const MAX_RESIDUAL: usize = 4;
/// Upper bound on Newton steps for the bulk-resistance inversion.
pub const NEWTON_STEPS: usize = 6;
/// The largest level shift a calibration may state, codes (the converters reach 2^24 codes).
pub const MAX_LEVEL_SHIFT: f32 = 67_108_864.0;
/// The largest |x| a calibrated x range may reach, nepers (ratios of e^±100; the fixed path holds ±128).
pub const MAX_ABS_X: f32 = 100.0;
/// The highest temperature a calibration may cover, °C (no log-ratio front end works beyond it).
pub const MAX_TEMPERATURE_C: f64 = 1000.0;
/// Largest exponent passed to `exp` in the inversion: beyond it a reading is above any sane range.
const MAX_EXP_ARG: f32 = 80.0;

/// How ADC codes map to the front end's output.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AdcScaling {
    /// Resolution of the converter in bits (1..=24); codes run from 0 to 2^bits − 1.
    pub bits: u8,
    /// Codes at either rail (0 and 2^bits − 1) or within this many of it are reported as
    /// [`Error::Saturated`]: a converter returns its end code for every input beyond it.
    pub rail_margin: u32,
    /// The code at which the log stage's output is zero (its level shift), in codes.
    pub level_shift_code: f32,
}

impl AdcScaling {
    /// The largest code of the converter, or an error for unusable bits.
    pub fn max_code(&self) -> Result<u32, Error> {
        if self.bits == 0 || self.bits > 24 {
            return Err(Error::InvalidCalibration(CalibrationDefect::AdcBits));
        }
        Ok((1u32 << self.bits) - 1)
    }

    /// Checks a code against the converter's range and the rail margin.
    ///
    /// ```
    /// use logtrim::calibration::AdcScaling;
    /// use logtrim::Error;
    ///
    /// // A 12-bit converter (codes 0..=4095) whose end codes and 3 codes beside them are not trusted.
    /// let adc = AdcScaling { bits: 12, rail_margin: 3, level_shift_code: 2048.0 };
    /// assert_eq!(adc.max_code(), Ok(4095));
    /// assert_eq!(adc.check_code(2048), Ok(()));
    /// assert_eq!(adc.check_code(3), Err(Error::Saturated { code: 3 }));
    /// assert_eq!(adc.check_code(4092), Err(Error::Saturated { code: 4092 }));
    /// assert_eq!(adc.check_code(4096), Err(Error::CodeOutOfAdcRange { code: 4096, max: 4095 }));
    /// ```
    pub fn check_code(&self, code: u32) -> Result<(), Error> {
        let max = self.max_code()?;
        if code > max {
            return Err(Error::CodeOutOfAdcRange { code, max });
        }
        if code <= self.rail_margin || code >= max.saturating_sub(self.rail_margin) {
            return Err(Error::Saturated { code });
        }
        Ok(())
    }
}

/// The temperature range a unit was calibrated over.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TemperatureRange {
    /// Lowest calibrated temperature, °C.
    pub min_c: f32,
    /// Highest calibrated temperature, °C.
    pub max_c: f32,
    /// How far beyond either end, in K, a reading is still corrected (and flagged); 0 refuses any excursion.
    pub extrapolation_k: f32,
}

/// The x range a unit was calibrated over.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct XRange {
    /// Lowest calibrated x = ln(I_sig/I_ref).
    pub min: f32,
    /// Highest calibrated x.
    pub max: f32,
    /// Smallest local sensitivity ∂w/∂x (1 = ideal) at which a reading is still reported; below it, BelowRange.
    pub min_sensitivity: f32,
}

/// A Chebyshev series `Σ c_k T_k(τ)` of at most [`MAX_SERIES`] terms.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Series {
    /// Number of terms in use (0..=MAX_SERIES); a series of 0 terms is zero.
    pub len: u8,
    /// Coefficients; those at and beyond `len` are ignored.
    pub coeffs: [f32; MAX_SERIES],
}

impl Series {
    /// The zero series.
    pub const ZERO: Series = Series { len: 0, coeffs: [0.0; MAX_SERIES] };

    /// A series from a slice of coefficients, or `None` if it is longer than [`MAX_SERIES`].
    ///
    /// ```
    /// use logtrim::calibration::{Series, MAX_SERIES};
    ///
    /// let s = Series::from_slice(&[1.0, -0.5]).unwrap();
    /// assert_eq!(s.terms(), &[1.0, -0.5]);
    /// assert!(Series::from_slice(&[0.0; MAX_SERIES + 1]).is_none());
    /// ```
    pub fn from_slice(c: &[f32]) -> Option<Series> {
        if c.len() > MAX_SERIES {
            return None;
        }
        let mut s = Series::ZERO;
        for (d, v) in s.coeffs.iter_mut().zip(c) {
            *d = *v;
        }
        s.len = c.len() as u8;
        Some(s)
    }

    /// The coefficients in use.
    pub fn terms(&self) -> &[f32] {
        let n = usize::from(self.len).min(MAX_SERIES);
        self.coeffs.get(..n).unwrap_or(&[])
    }

    /// The series at τ, in f32 or f64.
    fn eval<F: Real>(&self, t: F) -> F {
        clenshaw(self.terms(), t)
    }
}

/// The bias-current term β(τ) = exp(b₀ + b₁τ).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BiasTerm {
    /// Whether the term is part of the model (β = 0 when off).
    pub enabled: bool,
    /// `b₀`: ln β at τ = 0.
    pub ln_beta0: f32,
    /// `b₁`: slope of ln β per unit τ.
    pub ln_beta1: f32,
    /// `ρ`: the reference input's bias term in the offset, codes (0 when that input has no bias current).
    pub reference: f32,
}

impl BiasTerm {
    /// No bias term.
    pub const OFF: BiasTerm = BiasTerm { enabled: false, ln_beta0: 0.0, ln_beta1: 0.0, reference: 0.0 };

    /// `ln β(τ) = b₀ + b₁τ`, in f32 or f64 (whether or not the term is enabled).
    fn ln_beta<F: Real>(&self, tau: F) -> F {
        F::of(self.ln_beta0) + F::of(self.ln_beta1) * tau
    }
}

/// The generic residual `R(ξ, τ) = Σ r_ij T_i(ξ) T_j(τ)` added to x last.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Residual {
    /// Terms in ξ (0..=MAX_RESIDUAL); 0 switches the residual off.
    pub nx: u8,
    /// Terms in τ (0..=MAX_RESIDUAL).
    pub nt: u8,
    /// Centre x_c of the x normalisation ξ = (x₀ − x_c)/x_h.
    pub x_center: f32,
    /// Half span x_h of the x normalisation.
    pub x_half_span: f32,
    /// Coefficients, `r_ij` at index `i·MAX_RESIDUAL + j`.
    pub coeffs: [f32; MAX_RESIDUAL * MAX_RESIDUAL],
}

impl Residual {
    /// No residual.
    pub const OFF: Residual = Residual {
        nx: 0,
        nt: 0,
        x_center: 0.0,
        x_half_span: 1.0,
        coeffs: [0.0; MAX_RESIDUAL * MAX_RESIDUAL],
    };
}

/// The fitted model of one unit (see the module docs for the equations).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Model {
    /// T_c: centre of the temperature normalisation, °C.
    pub t_center_c: f32,
    /// T_h: half span of the temperature normalisation, K (> 0).
    pub t_half_span_k: f32,
    /// T_ref: reference absolute temperature of the slope series, K (> 0).
    pub t_ref_k: f32,
    /// q: the gain pole (compensating-resistor tempco in units of τ); |q| < 1 over the range.
    pub pole: f32,
    /// P_c: offset numerator, codes.
    pub offset: Series,
    /// P_s: slope numerator at T_ref, codes per neper.
    pub slope: Series,
    /// P_h: bulk-resistance numerator, codes per unit of ratio.
    pub bulk: Series,
    /// β(τ): the bias-current term.
    pub bias: BiasTerm,
    /// The generic residual added last.
    pub residual: Residual,
}

impl Model {
    /// The normalised temperature `τ = (T − T_c)/T_h` at `temp_c` °C, in f32 or f64.
    fn tau<F: Real>(&self, temp_c: F) -> F {
        (temp_c - F::of(self.t_center_c)) / F::of(self.t_half_span_k)
    }
}

/// Everything the firmware needs to correct readings of one unit.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Calibration {
    /// ADC scaling of the log channel.
    pub adc: AdcScaling,
    /// Calibrated temperature range.
    pub temperature: TemperatureRange,
    /// Calibrated x range.
    pub x_range: XRange,
    /// The model's coefficients.
    pub model: Model,
}

/// A corrected reading.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Reading {
    /// x = ln(I_sig/I_ref).
    pub x: f32,
    /// The temperature lay outside the calibrated range, within the allowed extrapolation.
    pub temperature_extrapolated: bool,
}

impl Reading {
    /// The reading in a chosen unit (default backend).
    pub fn value(&self, unit: Unit) -> f32 {
        unit.from_x(self.x)
    }
}

impl Calibration {
    /// An ideal calibration from design values: slope in codes per neper at `t_ref_c`, proportional to
    /// absolute temperature, no offset drift, no bends. This is the nominal equation
    /// `x = (code − L) / (S·T_K/T_ref)` that an uncalibrated unit would use.
    pub fn nominal(bits: u8, level_shift_code: f32, slope_codes_per_neper: f32, t_ref_c: f32) -> Calibration {
        let mut slope = Series::ZERO;
        slope.len = 1;
        slope.coeffs[0] = slope_codes_per_neper;
        Calibration {
            adc: AdcScaling { bits, rail_margin: 0, level_shift_code },
            temperature: TemperatureRange { min_c: -55.0, max_c: 150.0, extrapolation_k: 0.0 },
            x_range: XRange { min: -30.0, max: 30.0, min_sensitivity: 0.0 },
            model: Model {
                t_center_c: t_ref_c,
                t_half_span_k: 50.0,
                t_ref_k: t_ref_c + 273.15,
                pole: 0.0,
                offset: Series::ZERO,
                slope,
                bulk: Series::ZERO,
                bias: BiasTerm::OFF,
                residual: Residual::OFF,
            },
        }
    }

    /// Checks that the calibration can be evaluated at every input it accepts, the one validation every
    /// reader runs: bits and rail margin, a finite level shift within ±[`MAX_LEVEL_SHIFT`] codes, finite
    /// ranges (temperatures within −273.15…1000 °C, x within ±[`MAX_ABS_X`] Np), every stored
    /// coefficient finite (used or not) and every term within f32's range, and — proven over the whole
    /// accepted temperature range, not at a few points (see the `proof` module) — a gain pole
    /// `1 + q·τ > 0.05`, a positive slope, a model monotone in x up to the top of the x range, and a
    /// residual that keeps the correction monotone.
    ///
    /// ```
    /// use logtrim::error::{CalibrationDefect, Error};
    /// use logtrim::Calibration;
    ///
    /// let mut cal = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
    /// assert_eq!(cal.validate(), Ok(()));
    /// // A falling slope would invert the sign of every reading: refused before any correction.
    /// cal.model.slope.coeffs[0] = -1000.0;
    /// assert_eq!(cal.validate(), Err(Error::InvalidCalibration(CalibrationDefect::ZeroSlope)));
    /// ```
    pub fn validate(&self) -> Result<(), Error> {
        use CalibrationDefect as D;
        let bad = |d| Err(Error::InvalidCalibration(d));
        let max = self.adc.max_code()?;
        if self.adc.rail_margin.saturating_mul(2) >= max {
            return bad(D::RailMargin);
        }
        let l = self.adc.level_shift_code;
        if !(l.is_finite() && libm::fabsf(l) <= MAX_LEVEL_SHIFT) {
            return bad(D::LevelShift);
        }
        let t = &self.temperature;
        if !(t.min_c.is_finite() && t.max_c.is_finite() && t.min_c < t.max_c)
            || !(t.extrapolation_k.is_finite() && t.extrapolation_k >= 0.0)
            || f64::from(t.min_c) - f64::from(t.extrapolation_k) < -ZERO_CELSIUS_K
            || f64::from(t.max_c) + f64::from(t.extrapolation_k) > MAX_TEMPERATURE_C
        {
            return bad(D::TemperatureRange);
        }
        let xr = &self.x_range;
        if !(xr.min.is_finite() && xr.max.is_finite() && xr.min < xr.max && xr.min_sensitivity.is_finite()) {
            return bad(D::XRange);
        }
        if !(libm::fabsf(xr.min) <= MAX_ABS_X && libm::fabsf(xr.max) <= MAX_ABS_X) {
            return bad(D::XRangeLimit);
        }
        let m = &self.model;
        if !(m.t_center_c.is_finite()
            && m.t_half_span_k.is_finite()
            && m.t_half_span_k > 0.0
            && m.t_ref_k.is_finite()
            && m.t_ref_k > 0.0)
        {
            return bad(D::Normalisation);
        }
        let series_ok =
            |s: &Series| usize::from(s.len) <= MAX_SERIES && s.coeffs.iter().all(|c| c.is_finite());
        let r = &m.residual;
        let residual_ok = usize::from(r.nx) <= MAX_RESIDUAL
            && usize::from(r.nt) <= MAX_RESIDUAL
            && r.coeffs.iter().all(|c| c.is_finite())
            && r.x_center.is_finite()
            && r.x_half_span.is_finite()
            && r.x_half_span > 0.0;
        let bias_ok = m.bias.ln_beta0.is_finite()
            && m.bias.ln_beta1.is_finite()
            && m.bias.reference.is_finite()
            && m.bias.ln_beta0 < 30.0;
        if !(series_ok(&m.offset) && series_ok(&m.slope) && series_ok(&m.bulk) && residual_ok && bias_ok)
            || !m.pole.is_finite()
        {
            return bad(D::Coefficient);
        }
        let taus = proof::tau_range(self);
        if !(taus.0.is_finite() && taus.1.is_finite()) || !proof::magnitudes_ok(m, taus) {
            return bad(D::Coefficient);
        }
        if m.bias.enabled {
            // β(τ) = exp(b₀ + b₁τ) stays within f32 over the range.
            let top = f64::from(m.bias.ln_beta0)
                + libm::fabs(f64::from(m.bias.ln_beta1)) * libm::fmax(libm::fabs(taus.0), libm::fabs(taus.1));
            if !(top < 60.0) {
                return bad(D::Coefficient);
            }
        }
        for tau in [taus.0, taus.1] {
            if !(1.0 + f64::from(m.pole) * tau > 0.05) {
                return bad(D::Pole);
            }
        }
        if !proof::slope_positive(m, taus) {
            return bad(D::ZeroSlope);
        }
        if !proof::monotone_in_x(self, taus) || !proof::residual_ok(self, taus) {
            return bad(D::NotMonotone);
        }
        Ok(())
    }

    /// The checks that every correction repeats: cheap enough for each call, enough to rule out panics
    /// and garbage. [`Calibration::validate`] is the full check, done once when a calibration is loaded.
    fn validate_cheap(&self) -> Result<(), Error> {
        let m = &self.model;
        if !(m.t_half_span_k > 0.0 && m.t_ref_k > 0.0) {
            return Err(Error::InvalidCalibration(CalibrationDefect::Normalisation));
        }
        if !(self.x_range.min < self.x_range.max) {
            return Err(Error::InvalidCalibration(CalibrationDefect::XRange));
        }
        if !(self.temperature.min_c < self.temperature.max_c && self.temperature.extrapolation_k >= 0.0) {
            return Err(Error::InvalidCalibration(CalibrationDefect::TemperatureRange));
        }
        Ok(())
    }
}
