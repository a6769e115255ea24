//! The calibration of one unit and the f32 correction (ADC code, temperature) → x = ln(I_sig/I_ref).
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
//! The same code is evaluated in f32 (with a chosen [`Backend`]) and in f64 ([`Calibration::correct_f64`],
//! the host's reference), so the host tests exactly what the firmware runs.
//!
//! A correction is a temperature stage (the temperature's checks, offset, slope, bends and τ), computed once
//! per temperature by [`Calibration::stage_with`] (f32) or [`Calibration::reference_stage`] (f64), and a
//! per-code part, [`Calibration::correct_staged`] or [`Calibration::correct_staged_f64`].
//! [`Calibration::correct_with`] is exactly the two f32 steps in one call.

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use core::ops::{Add, Div, Mul, Neg, Sub};

use crate::error::{CalibrationDefect, Error};
use crate::math::{Backend, Libm};
use crate::units::Unit;

/// Capacity of a Chebyshev series over temperature (degree ≤ 5).
pub const MAX_SERIES: usize = 6;
/// Capacity of the residual surface in each direction (degree ≤ 3 in x and in τ).
pub const MAX_RESIDUAL: usize = 4;
/// Upper bound on Newton steps for the bulk-resistance inversion.
pub const NEWTON_STEPS: usize = 6;
/// Largest exponent passed to `exp` in the inversion: beyond it a reading is above any sane range.
const MAX_EXP_ARG: f32 = 80.0;

/// How ADC codes map to the front end's output.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
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

    fn eval<F: Real>(&self, t: F) -> F {
        clenshaw(self.terms(), t)
    }
}

/// The bias-current term β(τ) = exp(b₀ + b₁τ).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
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
}

/// The generic residual `R(ξ, τ) = Σ r_ij T_i(ξ) T_j(τ)` added to x last.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
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

    fn eval<F: Real>(&self, xi: F, tau: F) -> F {
        self.at_tau(tau).eval(xi)
    }

    /// The residual collapsed over τ: the coefficients of its series in ξ at one temperature.
    fn at_tau<F: Real>(&self, tau: F) -> ResidualAtTau<F> {
        let nx = usize::from(self.nx).min(MAX_RESIDUAL);
        let nt = usize::from(self.nt).min(MAX_RESIDUAL);
        let mut over_x = [F::of(0.0); MAX_RESIDUAL];
        if nx == 0 || nt == 0 {
            return ResidualAtTau { n: 0, over_x };
        }
        for (i, slot) in over_x.iter_mut().enumerate().take(nx) {
            let row = self.coeffs.get(i * MAX_RESIDUAL..i * MAX_RESIDUAL + nt).unwrap_or(&[]);
            *slot = clenshaw(row, tau);
        }
        ResidualAtTau { n: nx, over_x }
    }
}

/// The residual at one temperature: `R(ξ) = Σ_i c_i T_i(ξ)` with `c_i = Σ_j r_ij T_j(τ)` (Clenshaw over τ done).
#[derive(Debug, Clone, Copy, PartialEq)]
struct ResidualAtTau<F> {
    /// Terms in use; 0 makes the residual zero.
    n: usize,
    over_x: [F; MAX_RESIDUAL],
}

impl<F: Real> ResidualAtTau<F> {
    fn eval(&self, xi: F) -> F {
        if self.n == 0 {
            return F::of(0.0);
        }
        clenshaw_f(self.over_x.get(..self.n).unwrap_or(&[]), xi)
    }
}

/// The fitted model of one unit (see the module docs for the equations).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
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

/// Everything the firmware needs to correct readings of one unit.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
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

/// A reading evaluated in f64 by the host's reference path.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReadingF64 {
    /// x = ln(I_sig/I_ref).
    pub x: f64,
    /// The temperature lay outside the calibrated range, within the allowed extrapolation.
    pub temperature_extrapolated: bool,
    /// The local sensitivity ∂w/∂x (1 for an ideal front end).
    pub sensitivity: f64,
    /// ∂x/∂code at this point, neper per code (for LSB-equivalent error figures).
    pub dx_dcode: f64,
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

    /// The forward model in f64: the (fractional, noise-free) code that the model predicts at x and a
    /// temperature in °C. This is the definition the host fits and [`Calibration::correct`] inverts.
    pub fn forward_code_f64(&self, x: f64, temp_c: f64) -> f64 {
        let m = &self.model;
        let tau = (temp_c - f64::from(m.t_center_c)) / f64::from(m.t_half_span_k);
        let den = 1.0 + f64::from(m.pole) * tau;
        let t_k = temp_c + crate::physics::ZERO_CELSIUS_K;
        let beta = if m.bias.enabled {
            libm::exp(f64::from(m.bias.ln_beta0) + f64::from(m.bias.ln_beta1) * tau)
        } else {
            0.0
        };
        // The residual acts in the inverse direction (x = x0 + R): undo it by a fixed-point iteration on x0.
        let r = &m.residual;
        let mut x0 = x;
        for _ in 0..8 {
            let xi = (x0 - f64::from(r.x_center)) / f64::from(r.x_half_span);
            x0 = x - r.eval(xi, tau);
        }
        let ex0 = libm::exp(x0);
        let ptat = t_k / f64::from(m.t_ref_k);
        f64::from(self.adc.level_shift_code)
            + (m.offset.eval(tau)
                + f64::from(m.bias.reference) * ptat * beta
                + t_k / f64::from(m.t_ref_k) * m.slope.eval(tau) * libm::log(ex0 + beta)
                + m.bulk.eval(tau) * ex0)
                / den
    }

    /// Checks that the calibration can be evaluated: bits, ranges, finite coefficients, a positive slope
    /// over the temperature range (checked at both ends and the centre) and |q| < 1.
    pub fn validate(&self) -> Result<(), Error> {
        use CalibrationDefect as D;
        let bad = |d| Err(Error::InvalidCalibration(d));
        let max = self.adc.max_code()?;
        if self.adc.rail_margin.saturating_mul(2) >= max || !self.adc.level_shift_code.is_finite() {
            return bad(D::RailMargin);
        }
        let t = &self.temperature;
        if !(t.min_c.is_finite() && t.max_c.is_finite() && t.min_c < t.max_c)
            || !(t.extrapolation_k.is_finite() && t.extrapolation_k >= 0.0)
            || t.min_c - t.extrapolation_k < -273.0
        {
            return bad(D::TemperatureRange);
        }
        let xr = &self.x_range;
        if !(xr.min.is_finite() && xr.max.is_finite() && xr.min < xr.max && xr.min_sensitivity.is_finite()) {
            return bad(D::XRange);
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
            |s: &Series| usize::from(s.len) <= MAX_SERIES && s.terms().iter().all(|c| c.is_finite());
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
        let lo = t.min_c - t.extrapolation_k;
        let hi = t.max_c + t.extrapolation_k;
        for tc in [lo, 0.5 * (lo + hi), hi] {
            let tau = (f64::from(tc) - f64::from(m.t_center_c)) / f64::from(m.t_half_span_k);
            let den = 1.0 + f64::from(m.pole) * tau;
            let s = m.slope.eval(tau);
            if !(den > 0.05 && s > 0.0 && s.is_finite()) {
                return bad(D::ZeroSlope);
            }
        }
        Ok(())
    }

    /// Corrects one reading with the default backend (libm).
    ///
    /// `code` is the log channel's ADC code, `temp_c` the unit's temperature in °C.
    pub fn correct(&self, code: u32, temp_c: f32) -> Result<Reading, Error> {
        self.correct_with::<Libm>(code, temp_c)
    }

    /// Corrects one reading with a chosen f32 backend.
    ///
    /// This is [`Calibration::stage_with`] followed by [`Calibration::correct_staged`]: the errors come in
    /// this order: the code ([`AdcScaling::check_code`]), then the temperature (non-finite, invalid
    /// calibration, out of range, slope), then the log channel (range, sensitivity).
    pub fn correct_with<B: Backend>(&self, code: u32, temp_c: f32) -> Result<Reading, Error> {
        self.correct_staged(&self.stage_with::<B>(temp_c), code)
    }

    /// The temperature-dependent part of an f32 correction at `temp_c`, computed once and reusable for any
    /// number of log codes at that temperature ([`Calibration::correct_staged`]). A temperature that cannot
    /// be corrected is kept in the stage as its error, reported for each code that passes its own check.
    pub fn stage_with<B: Backend>(&self, temp_c: f32) -> F32Stage<B> {
        F32Stage { inner: self.temperature_stage::<F32Math<B>>(temp_c), backend: core::marker::PhantomData }
    }

    /// The log-channel part of an f32 correction at a stage of this calibration: bit for bit the result
    /// (value or error) of [`Calibration::correct_with`] at the stage's temperature. A stage made by another
    /// calibration gives that calibration's temperature terms (no panic, but a meaningless reading).
    pub fn correct_staged<B: Backend>(&self, stage: &F32Stage<B>, code: u32) -> Result<Reading, Error> {
        self.adc.check_code(code)?;
        let ts = stage.inner.as_ref().map_err(|e| *e)?;
        let p = self.evaluate_staged::<F32Math<B>>(f32::of_u32(code), ts)?;
        Ok(Reading { x: p.x, temperature_extrapolated: p.extrapolated })
    }

    /// Corrects a fractional code, such as the mean of a burst of readings, with the default backend.
    ///
    /// The code is checked as both of its neighbouring whole codes would be (a mean that touches a rail or
    /// the margin is saturated), then evaluated without rounding. An f32 holds 24 bits exactly, so a
    /// 16-bit converter's mean keeps 8 fractional bits.
    pub fn correct_mean(&self, code: f32, temp_c: f32) -> Result<Reading, Error> {
        self.correct_mean_with::<Libm>(code, temp_c)
    }

    /// [`Calibration::correct_mean`] with a chosen backend.
    pub fn correct_mean_with<B: Backend>(&self, code: f32, temp_c: f32) -> Result<Reading, Error> {
        if !code.is_finite() {
            return Err(Error::NonFinite);
        }
        let max = self.adc.max_code()?;
        let (lo, hi) = (libm::floorf(code), libm::ceilf(code));
        let as_code = |v: f32| {
            if v < 0.0 {
                None
            } else if v > max as f32 {
                Some(u32::MAX)
            } else {
                Some(v as u32)
            }
        };
        match (as_code(lo), as_code(hi)) {
            (Some(a), Some(b)) => {
                self.adc.check_code(a)?;
                self.adc.check_code(b)?;
            }
            _ => return Err(Error::CodeOutOfAdcRange { code: 0, max }),
        }
        let p = self.evaluate_real::<F32Math<B>>(code, temp_c)?;
        Ok(Reading { x: p.x, temperature_extrapolated: p.extrapolated })
    }

    /// The host's f64 reference of the same correction: the same code path as [`Calibration::correct`],
    /// evaluated in f64 with libm's f64 `log`/`exp`. `code` may be fractional (a noise-free model value).
    pub fn correct_f64(&self, code: f64, temp_c: f64) -> Result<ReadingF64, Error> {
        if !(code.is_finite() && temp_c.is_finite()) {
            return Err(Error::NonFinite);
        }
        let c = libm::round(code);
        if c < 0.0 {
            return Err(Error::CodeOutOfAdcRange { code: 0, max: self.adc.max_code()? });
        }
        self.adc.check_code(if c > f64::from(u32::MAX) { u32::MAX } else { c as u32 })?;
        self.evaluate_real::<F64Math>(code, temp_c).map(reading_f64)
    }

    /// The common body of the f32 and f64 corrections, after the code has been checked.
    fn evaluate_real<M: MathOps>(&self, code: M::F, temp_c: M::F) -> Result<Point<M::F>, Error> {
        let ts = self.temperature_stage::<M>(temp_c)?;
        self.evaluate_staged::<M>(code, &ts)
    }

    /// The temperature part of [`Calibration::evaluate_real`]: the temperature's checks and the stage.
    fn temperature_stage<M: MathOps>(&self, temp_c: M::F) -> Result<TempStage<M::F>, Error> {
        type F<M> = <M as MathOps>::F;
        let of = F::<M>::of;
        if !temp_c.finite() {
            return Err(Error::NonFinite);
        }
        self.validate_cheap()?;
        let tr = &self.temperature;
        let ext = of(tr.extrapolation_k);
        let (tmin, tmax) = (of(tr.min_c), of(tr.max_c));
        if temp_c < tmin - ext || temp_c > tmax + ext {
            return Err(Error::TemperatureOutOfRange { millicelsius: temp_c.millicelsius() });
        }
        let extrapolated = temp_c < tmin || temp_c > tmax;
        Ok(TempStage { st: self.stage::<M>(temp_c)?, extrapolated })
    }

    /// The log-channel part of [`Calibration::evaluate_real`] at a temperature stage.
    fn evaluate_staged<M: MathOps>(&self, code: M::F, ts: &TempStage<M::F>) -> Result<Point<M::F>, Error> {
        let st = &ts.st;
        let w = (code - st.offset) / st.slope;
        let (x, sens) = self.x_from_w::<M>(w, st)?;
        self.range_checked::<M>(x, sens, ts)
    }

    /// The end of [`Calibration::evaluate_staged`]: the sensitivity and x range checks, and ∂x/∂code.
    fn range_checked<M: MathOps>(
        &self,
        x: M::F,
        sens: M::F,
        ts: &TempStage<M::F>,
    ) -> Result<Point<M::F>, Error> {
        type F<M> = <M as MathOps>::F;
        let of = F::<M>::of;
        let one = of(1.0);
        let (st, extrapolated) = (&ts.st, ts.extrapolated);
        if sens < of(self.x_range.min_sensitivity) || x < of(self.x_range.min) {
            return Err(Error::BelowRange);
        }
        if x > of(self.x_range.max) {
            return Err(Error::AboveRange);
        }
        // ∂x/∂code ≈ 1/(slope · sens) (the residual's own slope is small by construction).
        let dx_dcode = one / (st.slope * sens);
        Ok(Point { x, extrapolated, sens, dx_dcode })
    }

    /// The temperature-dependent stage of the inverse at one temperature: offset (level shift included)
    /// and slope in codes, `h` = bulk term over slope, β, and τ.
    fn stage<M: MathOps>(&self, temp_c: M::F) -> Result<Stage<M::F>, Error> {
        type F<M> = <M as MathOps>::F;
        let of = F::<M>::of;
        let zero = of(0.0);
        let m = &self.model;
        let tau = (temp_c - of(m.t_center_c)) / of(m.t_half_span_k);
        let den = of(1.0) + of(m.pole) * tau;
        let ptat = (temp_c + F::<M>::zero_celsius_k()) / of(m.t_ref_k);
        let slope = ptat * m.slope.eval(tau) / den;
        if !(slope > zero) || !slope.finite() {
            return Err(Error::InvalidCalibration(CalibrationDefect::ZeroSlope));
        }
        let ln_beta = of(m.bias.ln_beta0) + of(m.bias.ln_beta1) * tau;
        let beta = if m.bias.enabled { M::exp(ln_beta) } else { zero };
        let offset =
            of(self.adc.level_shift_code) + (m.offset.eval(tau) + of(m.bias.reference) * ptat * beta) / den;
        let residual = m.residual.at_tau(tau);
        Ok(Stage { offset, slope, h: m.bulk.eval(tau) / den / slope, beta, ln_beta, tau, residual })
    }

    /// x and the sensitivity ∂w/∂x from w at a stage: Newton on `z + h(e^z − β) = w`, `x₀ = ln(e^z − β)`,
    /// then the residual. No range checks; [`Error::BelowRange`] where no x exists (`e^z ≤ β`).
    fn x_from_w<M: MathOps>(&self, w: M::F, st: &Stage<M::F>) -> Result<(M::F, M::F), Error> {
        let z = self.newton::<M>(w, st)?;
        self.x_from_ez::<M>(M::exp(z), st)
    }

    /// `z = ln(e^x + β)` from w: Newton on `F(z) = z + h(e^z − β) − w`, `F'(z) = 1 + h e^z`, from `z = w`,
    /// at most [`NEWTON_STEPS`] steps, until a step is at most `2e-7·(1 + |z|)`.
    fn newton<M: MathOps>(&self, w: M::F, st: &Stage<M::F>) -> Result<M::F, Error> {
        type F<M> = <M as MathOps>::F;
        let of = F::<M>::of;
        let (zero, one) = (of(0.0), of(1.0));
        if w > of(MAX_EXP_ARG) {
            return Err(Error::AboveRange);
        }
        let (h, beta) = (st.h, st.beta);
        let mut z = w;
        if h != zero {
            for _ in 0..NEWTON_STEPS {
                let ez = M::exp(z);
                let f = z + h * (ez - beta) - w;
                let d = one + h * ez;
                if !(d > zero) {
                    return Err(Error::InvalidCalibration(CalibrationDefect::Coefficient));
                }
                let step = f / d;
                z = z - step;
                if !(step.abs_() > of(2e-7) * (one + z.abs_())) {
                    break;
                }
            }
        }
        Ok(z)
    }

    /// x and the sensitivity from `e^z` (the end of [`Calibration::x_from_w`]): `e^x = e^z − β`,
    /// `x₀ = ln e^x`, the residual.
    fn x_from_ez<M: MathOps>(&self, ez: M::F, st: &Stage<M::F>) -> Result<(M::F, M::F), Error> {
        type F<M> = <M as MathOps>::F;
        let of = F::<M>::of;
        let zero = of(0.0);
        let beta = st.beta;
        let y = ez - beta; // e^x
        if !(y > zero) {
            return Err(Error::BelowRange);
        }
        self.x_from_parts::<M>(ez, y, M::ln(y), st)
    }

    /// The end of [`Calibration::x_from_ez`] from `e^z`, `e^x = e^z − β > 0` and `x₀ = ln e^x`: the
    /// sensitivity and the residual.
    fn x_from_parts<M: MathOps>(
        &self,
        ez: M::F,
        y: M::F,
        x0: M::F,
        st: &Stage<M::F>,
    ) -> Result<(M::F, M::F), Error> {
        type F<M> = <M as MathOps>::F;
        let of = F::<M>::of;
        let h = st.h;
        // Sensitivity ∂w/∂x = e^x/(e^x + β) + h e^x.
        let sens = y / ez + h * y;
        let r = &self.model.residual;
        let xi = (x0 - of(r.x_center)) / of(r.x_half_span);
        let x = x0 + st.residual.eval(xi);
        if !x.finite() {
            return Err(Error::InvalidCalibration(CalibrationDefect::Coefficient));
        }
        Ok((x, sens))
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

/// The temperature-dependent stage of the inverse model at one temperature, in f64 (a host helper for
/// table generation): `w = (code − offset_codes)/slope`, then the bends with `h` and `β`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StageF64 {
    /// The code at which w = 0: the level shift plus the offset `P_c(τ)/(1 + qτ)`, codes.
    pub offset_codes: f64,
    /// The slope `S = (T_K/T_ref)·P_s(τ)/(1 + qτ)`, codes per neper.
    pub slope: f64,
    /// `h = P_h(τ)/(1 + qτ)/S`, the bulk term over the slope.
    pub bulk_over_slope: f64,
    /// `β(τ)`, zero when the bias term is off.
    pub beta: f64,
    /// `ln β(τ) = b₀ + b₁τ`, or `None` when the bias term is off.
    pub ln_beta: Option<f64>,
    /// The normalised temperature τ.
    pub tau: f64,
}

/// x evaluated from w (no range checks) by [`Calibration::x_from_w_f64`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct XFromW {
    /// x = ln(I_sig/I_ref), residual included.
    pub x: f64,
    /// The local sensitivity ∂w/∂x (1 for an ideal front end).
    pub sensitivity: f64,
}

impl Calibration {
    /// The temperature-dependent stage at `temp_c` in f64, exactly as [`Calibration::correct_f64`] computes
    /// it. No range check on the temperature; an error only where the slope is not positive and finite.
    pub fn stage_f64(&self, temp_c: f64) -> Result<StageF64, Error> {
        let st = self.stage::<F64Math>(temp_c)?;
        Ok(StageF64 {
            offset_codes: st.offset,
            slope: st.slope,
            bulk_over_slope: st.h,
            beta: st.beta,
            ln_beta: self.model.bias.enabled.then_some(st.ln_beta),
            tau: st.tau,
        })
    }

    /// x from w = (code − offset)/slope at `temp_c`, in f64, by the same steps as [`Calibration::correct_f64`]
    /// but without any range check (a host helper for table generation, defined also outside the ADC's
    /// codes). [`Error::BelowRange`] where the bias current swamps the signal (`e^z ≤ β`: no x exists).
    pub fn x_from_w_f64(&self, w: f64, temp_c: f64) -> Result<XFromW, Error> {
        if !(w.is_finite() && temp_c.is_finite()) {
            return Err(Error::NonFinite);
        }
        let st = self.stage::<F64Math>(temp_c)?;
        let (x, sensitivity) = self.x_from_w::<F64Math>(w, &st)?;
        Ok(XFromW { x, sensitivity })
    }
}

impl Calibration {
    /// The temperature-dependent part of [`Calibration::correct_f64`] at `temp_c`, computed once and reusable
    /// for any number of whole log codes at that temperature ([`Calibration::correct_staged_f64`]).
    pub fn reference_stage(&self, temp_c: f64) -> ReferenceStage {
        ReferenceStage { non_finite: !temp_c.is_finite(), inner: self.temperature_stage::<F64Math>(temp_c) }
    }

    /// The log-channel part of the f64 reference at a stage of this calibration: bit for bit the result
    /// (value or error) of [`Calibration::correct_f64`]`(f64::from(code), temp_c)` at the stage's temperature.
    pub fn correct_staged_f64(&self, stage: &ReferenceStage, code: u32) -> Result<ReadingF64, Error> {
        if stage.non_finite {
            return Err(Error::NonFinite);
        }
        self.adc.check_code(code)?;
        let ts = stage.inner.as_ref().map_err(|e| *e)?;
        self.evaluate_staged::<F64Math>(f64::from(code), ts).map(reading_f64)
    }
}

fn reading_f64(p: Point<f64>) -> ReadingF64 {
    ReadingF64 { x: p.x, temperature_extrapolated: p.extrapolated, sensitivity: p.sens, dx_dcode: p.dx_dcode }
}

/// The temperature-dependent part of an f32 correction with backend `B`, made by
/// [`Calibration::stage_with`] for [`Calibration::correct_staged`]: the temperature's checks and the stage of
/// the inverse (offset, slope, bends, τ), or the temperature's error.
pub struct F32Stage<B> {
    inner: Result<TempStage<f32>, Error>,
    backend: core::marker::PhantomData<fn() -> B>,
}

impl<B> F32Stage<B> {
    /// The temperature's error, if it cannot be corrected (reported only for codes that pass their check).
    pub fn error(&self) -> Option<Error> {
        self.inner.err()
    }

    /// Whether the temperature lies outside the calibrated range, within the allowed extrapolation.
    pub fn extrapolated(&self) -> bool {
        matches!(&self.inner, Ok(ts) if ts.extrapolated)
    }
}

impl<B> Clone for F32Stage<B> {
    fn clone(&self) -> Self {
        *self
    }
}

impl<B> Copy for F32Stage<B> {}

impl<B> core::fmt::Debug for F32Stage<B> {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.debug_struct("F32Stage").field("inner", &self.inner).finish()
    }
}

impl<B> PartialEq for F32Stage<B> {
    fn eq(&self, other: &Self) -> bool {
        self.inner == other.inner
    }
}

#[cfg(feature = "defmt")]
impl<B> defmt::Format for F32Stage<B> {
    fn format(&self, f: defmt::Formatter<'_>) {
        match &self.inner {
            Ok(ts) => {
                defmt::write!(f, "F32Stage {{ extrapolated: {}, tau: {} }}", ts.extrapolated, ts.st.tau)
            }
            Err(e) => defmt::write!(f, "F32Stage {{ error: {} }}", e),
        }
    }
}

/// The temperature-dependent part of the f64 reference, made by [`Calibration::reference_stage`] for
/// [`Calibration::correct_staged_f64`] (a host helper, as [`Calibration::correct_f64`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReferenceStage {
    /// The temperature is NaN or infinite: [`Error::NonFinite`] comes before the code's own check, as in
    /// [`Calibration::correct_f64`].
    non_finite: bool,
    inner: Result<TempStage<f64>, Error>,
}

impl ReferenceStage {
    /// The temperature's error, if it cannot be corrected.
    pub fn error(&self) -> Option<Error> {
        self.inner.err()
    }
}

/// A temperature's checks done and its stage computed.
#[derive(Debug, Clone, Copy, PartialEq)]
struct TempStage<F> {
    st: Stage<F>,
    extrapolated: bool,
}

#[derive(Debug, Clone, Copy, PartialEq)]
struct Stage<F> {
    offset: F,
    slope: F,
    h: F,
    beta: F,
    ln_beta: F,
    tau: F,
    /// The residual's series in ξ at τ.
    residual: ResidualAtTau<F>,
}

struct Point<F> {
    x: F,
    extrapolated: bool,
    sens: F,
    dx_dcode: F,
}

/// Clenshaw's recurrence for `Σ c_k T_k(t)` with f32 coefficients.
fn clenshaw<F: Real>(c: &[f32], t: F) -> F {
    let (c0, tail) = match c.split_first() {
        Some(s) => s,
        None => return F::of(0.0),
    };
    let mut b1 = F::of(0.0);
    let mut b2 = F::of(0.0);
    let two_t = t + t;
    for &ck in tail.iter().rev() {
        let b0 = F::of(ck) + two_t * b1 - b2;
        b2 = b1;
        b1 = b0;
    }
    F::of(*c0) + t * b1 - b2
}

/// Clenshaw's recurrence with coefficients already in `F`.
fn clenshaw_f<F: Real>(c: &[F], t: F) -> F {
    let (c0, tail) = match c.split_first() {
        Some(s) => s,
        None => return F::of(0.0),
    };
    let mut b1 = F::of(0.0);
    let mut b2 = F::of(0.0);
    let two_t = t + t;
    for &ck in tail.iter().rev() {
        let b0 = ck + two_t * b1 - b2;
        b2 = b1;
        b1 = b0;
    }
    *c0 + t * b1 - b2
}

/// The arithmetic the model needs, so that one body serves f32 and f64.
trait Real:
    Copy
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
{
    fn of(v: f32) -> Self;
    fn of_u32(v: u32) -> Self;
    fn finite(self) -> bool;
    fn abs_(self) -> Self;
    /// The temperature in whole m°C, rounded, saturating at the i32 ends.
    fn millicelsius(self) -> i32;
    /// 273.15 at the type's own precision.
    fn zero_celsius_k() -> Self;
}

impl Real for f32 {
    fn of(v: f32) -> Self {
        v
    }
    fn of_u32(v: u32) -> Self {
        v as f32
    }
    fn finite(self) -> bool {
        self.is_finite()
    }
    fn abs_(self) -> Self {
        libm::fabsf(self)
    }
    fn millicelsius(self) -> i32 {
        crate::qformat::millicelsius_saturating(self)
    }
    fn zero_celsius_k() -> Self {
        crate::physics::ZERO_CELSIUS_K as f32
    }
}

impl Real for f64 {
    fn of(v: f32) -> Self {
        f64::from(v)
    }
    fn of_u32(v: u32) -> Self {
        f64::from(v)
    }
    fn finite(self) -> bool {
        self.is_finite()
    }
    fn abs_(self) -> Self {
        libm::fabs(self)
    }
    fn millicelsius(self) -> i32 {
        // `as` saturates at the i32 ends.
        libm::round(self * 1000.0) as i32
    }
    fn zero_celsius_k() -> Self {
        crate::physics::ZERO_CELSIUS_K
    }
}

trait MathOps {
    type F: Real;
    fn ln(x: Self::F) -> Self::F;
    fn exp(x: Self::F) -> Self::F;
}

struct F32Math<B>(core::marker::PhantomData<B>);

impl<B: Backend> MathOps for F32Math<B> {
    type F = f32;
    fn ln(x: f32) -> f32 {
        B::ln(x)
    }
    fn exp(x: f32) -> f32 {
        B::exp(x)
    }
}

struct F64Math;

impl MathOps for F64Math {
    type F = f64;
    fn ln(x: f64) -> f64 {
        libm::log(x)
    }
    fn exp(x: f64) -> f64 {
        libm::exp(x)
    }
}

mod reference;
#[cfg(test)]
mod tests;
#[cfg(test)]
use reference::Anchors;

pub use reference::ReferenceSweep;
