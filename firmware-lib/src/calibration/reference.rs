//! The host's f64 reference of the correction (feature `reference`, not compiled into firmware builds):
//! the same inverse as the firmware's f32 path, evaluated in f64 with libm's `log`/`exp`
//! ([`Calibration::correct_f64`], and in two steps through an [`F64Stage`]); the forward model the host
//! fits ([`Calibration::forward_code_f64`]); and the stage's terms and the bends without range checks, for
//! the host's table generation ([`Calibration::stage_f64`], [`Calibration::x_from_w_f64`]).

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use super::inverse::{Point, Stage};
use super::{Calibration, Residual};
use crate::error::Error;
use crate::math::F64Math;

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

/// The f64 temperature stage: the temperature-dependent part of the f64 reference, made by
/// [`Calibration::reference_stage`] for [`Calibration::correct_staged_f64`] and the [`ReferenceSweep`]
/// (a host helper, as [`Calibration::correct_f64`]). It holds the temperature's checks and the terms of the
/// inverse there, as an [`F32Stage`] does in f32, or the temperature's error.
///
/// [`ReferenceSweep`]: super::ReferenceSweep
/// [`F32Stage`]: super::F32Stage
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct F64Stage {
    /// The temperature is NaN or infinite: [`Error::NonFinite`] comes before the code's own check, as in
    /// [`Calibration::correct_f64`].
    pub(super) non_finite: bool,
    pub(super) inner: Result<Stage<f64>, Error>,
}

impl F64Stage {
    /// The temperature's error, if it cannot be corrected.
    pub fn error(&self) -> Option<Error> {
        self.inner.err()
    }
}

impl Residual {
    /// R(ξ, τ), for the forward model.
    fn eval(&self, xi: f64, tau: f64) -> f64 {
        self.at_tau(tau).eval(xi)
    }
}

impl Calibration {
    /// The forward model in f64: the (fractional, noise-free) code that the model predicts at x and a
    /// temperature in °C. This is the definition the host fits and [`Calibration::correct`] inverts.
    pub fn forward_code_f64(&self, x: f64, temp_c: f64) -> f64 {
        let m = &self.model;
        let tau = m.tau(temp_c);
        let den = 1.0 + f64::from(m.pole) * tau;
        let t_k = temp_c + crate::physics::ZERO_CELSIUS_K;
        let beta = if m.bias.enabled { libm::exp(m.bias.ln_beta(tau)) } else { 0.0 };
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

    /// The temperature-dependent part of [`Calibration::correct_f64`] at `temp_c`, computed once and reusable
    /// for any number of whole log codes at that temperature ([`Calibration::correct_staged_f64`]).
    pub fn reference_stage(&self, temp_c: f64) -> F64Stage {
        F64Stage { non_finite: !temp_c.is_finite(), inner: self.temperature_stage::<F64Math>(temp_c) }
    }

    /// The log-channel part of the f64 reference at a stage of this calibration: bit for bit the result
    /// (value or error) of [`Calibration::correct_f64`]`(f64::from(code), temp_c)` at the stage's temperature.
    pub fn correct_staged_f64(&self, stage: &F64Stage, code: u32) -> Result<ReadingF64, Error> {
        if stage.non_finite {
            return Err(Error::NonFinite);
        }
        self.adc.check_code(code)?;
        let st = stage.inner.as_ref().map_err(|e| *e)?;
        self.evaluate_staged::<F64Math>(f64::from(code), st).map(reading_f64)
    }
}

/// The terms of the f64 stage at one temperature as plain numbers, without any range check on the
/// temperature (a host helper for table generation): `w = (code − offset_codes)/slope`, then the bends
/// with `h` and `β`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct F64StageTerms {
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
    pub fn stage_f64(&self, temp_c: f64) -> Result<F64StageTerms, Error> {
        let t = self.terms::<F64Math>(temp_c)?;
        let (m, tau) = (&self.model, self.model.tau(temp_c));
        Ok(F64StageTerms {
            offset_codes: t.offset,
            slope: t.slope,
            bulk_over_slope: t.h,
            beta: t.beta,
            ln_beta: m.bias.enabled.then(|| m.bias.ln_beta(tau)),
            tau,
        })
    }

    /// x from w = (code − offset)/slope at `temp_c`, in f64, by the same steps as [`Calibration::correct_f64`]
    /// but without any range check (a host helper for table generation, defined also outside the ADC's
    /// codes). [`Error::BelowRange`] where the bias current swamps the signal (`e^z ≤ β`: no x exists).
    pub fn x_from_w_f64(&self, w: f64, temp_c: f64) -> Result<XFromW, Error> {
        if !(w.is_finite() && temp_c.is_finite()) {
            return Err(Error::NonFinite);
        }
        let t = self.terms::<F64Math>(temp_c)?;
        let (x, sensitivity) = self.x_from_w::<F64Math>(w, &t)?;
        Ok(XFromW { x, sensitivity })
    }
}

/// The reference's reading of a corrected point.
pub(super) fn reading_f64(p: Point<f64>) -> ReadingF64 {
    ReadingF64 { x: p.x, temperature_extrapolated: p.extrapolated, sensitivity: p.sens, dx_dcode: p.dx_dcode }
}
