//! The inverse of the model, one generic body for the firmware's f32 correction (any [`Backend`]) and the
//! host's f64 reference: a temperature's [`Stage`] (its checks, then the [`Terms`]: offset, slope, bends and
//! the residual collapsed over τ), then the log channel at that stage (w from the code, Newton on the
//! bulk bend, β removed, the residual, the range checks).
//!
//! [`Backend`]: crate::math::Backend

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use super::{Calibration, Residual, MAX_EXP_ARG, MAX_RESIDUAL, NEWTON_STEPS};
use crate::error::{CalibrationDefect, Error};
use crate::math::{clenshaw, Arithmetic, Real};
use crate::physics::ZERO_CELSIUS_K;

/// A temperature's stage in one arithmetic: its checks passed, whether it lies in the extrapolation band,
/// and the terms of the inverse there. What an [`F32Stage`](super::F32Stage) (f32) or an `F64Stage` (the
/// f64 reference) holds when the temperature can be corrected.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Stage<F> {
    pub(super) terms: Terms<F>,
    pub(super) extrapolated: bool,
}

/// The temperature-dependent terms of the inverse at one temperature, without any range check on it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Terms<F> {
    /// The code at which w = 0: the level shift plus the offset, codes.
    pub(super) offset: F,
    /// The slope S, codes per neper: `w = (code − offset)/S`.
    pub(super) slope: F,
    /// `h`, the bulk term over the slope.
    pub(super) h: F,
    /// β, zero when the bias term is off.
    pub(super) beta: F,
    /// The residual's series in ξ at τ.
    pub(super) residual: ResidualAtTau<F>,
}

/// A corrected point: x, whether the temperature was extrapolated, and what the f64 reference reports
/// besides (the sensitivity and ∂x/∂code).
pub(super) struct Point<F> {
    pub(super) x: F,
    pub(super) extrapolated: bool,
    #[cfg_attr(not(feature = "reference"), allow(dead_code))] // read by the f64 reference
    pub(super) sens: F,
    #[cfg_attr(not(feature = "reference"), allow(dead_code))] // read by the f64 reference
    pub(super) dx_dcode: F,
}

impl Residual {
    /// The residual collapsed over τ: the coefficients of its series in ξ at one temperature.
    pub(super) fn at_tau<F: Real>(&self, tau: F) -> ResidualAtTau<F> {
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
pub(super) struct ResidualAtTau<F> {
    /// Terms in use; 0 makes the residual zero.
    n: usize,
    over_x: [F; MAX_RESIDUAL],
}

impl<F: Real> ResidualAtTau<F> {
    /// R(ξ) at this temperature.
    pub(super) fn eval(&self, xi: F) -> F {
        if self.n == 0 {
            return F::of(0.0);
        }
        clenshaw(self.over_x.get(..self.n).unwrap_or(&[]), xi)
    }
}

impl Calibration {
    /// The common body of the f32 and f64 corrections, after the code has been checked.
    pub(super) fn evaluate_real<M: Arithmetic>(
        &self,
        code: M::F,
        temp_c: M::F,
    ) -> Result<Point<M::F>, Error> {
        let stage = self.temperature_stage::<M>(temp_c)?;
        self.evaluate_staged::<M>(code, &stage)
    }

    /// The temperature part of [`Calibration::evaluate_real`]: the temperature's checks and its stage.
    pub(super) fn temperature_stage<M: Arithmetic>(&self, temp_c: M::F) -> Result<Stage<M::F>, Error> {
        type F<M> = <M as Arithmetic>::F;
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
        Ok(Stage { terms: self.terms::<M>(temp_c)?, extrapolated })
    }

    /// The log-channel part of [`Calibration::evaluate_real`] at a temperature's stage.
    pub(super) fn evaluate_staged<M: Arithmetic>(
        &self,
        code: M::F,
        stage: &Stage<M::F>,
    ) -> Result<Point<M::F>, Error> {
        let t = &stage.terms;
        let w = (code - t.offset) / t.slope;
        let (x, sens) = self.x_from_w::<M>(w, t)?;
        self.range_checked(x, sens, stage)
    }

    /// The end of [`Calibration::evaluate_staged`]: the sensitivity and x range checks, and ∂x/∂code.
    pub(super) fn range_checked<F: Real>(&self, x: F, sens: F, stage: &Stage<F>) -> Result<Point<F>, Error> {
        let one = F::of(1.0);
        if sens < F::of(self.x_range.min_sensitivity) || x < F::of(self.x_range.min) {
            return Err(Error::BelowRange);
        }
        if x > F::of(self.x_range.max) {
            return Err(Error::AboveRange);
        }
        // ∂x/∂code ≈ 1/(slope · sens) (the residual's own slope is small by construction).
        let dx_dcode = one / (stage.terms.slope * sens);
        Ok(Point { x, extrapolated: stage.extrapolated, sens, dx_dcode })
    }

    /// The temperature-dependent terms of the inverse at one temperature: offset (level shift included)
    /// and slope in codes, `h` = bulk term over slope, β, and the residual at τ.
    pub(super) fn terms<M: Arithmetic>(&self, temp_c: M::F) -> Result<Terms<M::F>, Error> {
        type F<M> = <M as Arithmetic>::F;
        let of = F::<M>::of;
        let zero = of(0.0);
        let m = &self.model;
        let tau = m.tau(temp_c);
        let den = of(1.0) + of(m.pole) * tau;
        let ptat = (temp_c + F::<M>::lit(ZERO_CELSIUS_K)) / of(m.t_ref_k);
        let slope = ptat * m.slope.eval(tau) / den;
        if !(slope > zero) || !slope.finite() {
            return Err(Error::InvalidCalibration(CalibrationDefect::ZeroSlope));
        }
        let beta = if m.bias.enabled { M::exp(m.bias.ln_beta(tau)) } else { zero };
        let offset =
            of(self.adc.level_shift_code) + (m.offset.eval(tau) + of(m.bias.reference) * ptat * beta) / den;
        let residual = m.residual.at_tau(tau);
        Ok(Terms { offset, slope, h: m.bulk.eval(tau) / den / slope, beta, residual })
    }

    /// x and the sensitivity ∂w/∂x from w with a temperature's terms: Newton on `z + h(e^z − β) = w`,
    /// `x₀ = ln(e^z − β)`, then the residual. No range checks; [`Error::BelowRange`] where no x exists
    /// (`e^z ≤ β`).
    pub(super) fn x_from_w<M: Arithmetic>(&self, w: M::F, t: &Terms<M::F>) -> Result<(M::F, M::F), Error> {
        let z = self.newton::<M>(w, t)?;
        self.x_from_ez::<M>(M::exp(z), t)
    }

    /// `z = ln(e^x + β)` from w: Newton on `F(z) = z + h(e^z − β) − w`, `F'(z) = 1 + h e^z`, from `z = w`,
    /// at most [`NEWTON_STEPS`] steps, until a step is at most `2e-7·(1 + |z|)`.
    pub(super) fn newton<M: Arithmetic>(&self, w: M::F, t: &Terms<M::F>) -> Result<M::F, Error> {
        type F<M> = <M as Arithmetic>::F;
        let of = F::<M>::of;
        let (zero, one) = (of(0.0), of(1.0));
        if w > of(MAX_EXP_ARG) {
            return Err(Error::AboveRange);
        }
        let (h, beta) = (t.h, t.beta);
        let mut z = w;
        if h != zero {
            for _ in 0..NEWTON_STEPS {
                let ez = M::exp(z);
                let f = z + h * (ez - beta) - w;
                let d = one + h * ez;
                if !(d > zero) {
                    // Past the turn of a negative bulk term. From z = w the iterates approach a root from
                    // below (the function is concave), so they pass the turn only when no root lies before
                    // it; `Calibration::validate` proves the turn beyond x_max: the reading is above range.
                    // A NaN is a broken calibration.
                    return Err(if d <= zero {
                        Error::AboveRange
                    } else {
                        Error::InvalidCalibration(CalibrationDefect::Coefficient)
                    });
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
    pub(super) fn x_from_ez<M: Arithmetic>(&self, ez: M::F, t: &Terms<M::F>) -> Result<(M::F, M::F), Error> {
        let zero = M::F::of(0.0);
        let y = ez - t.beta; // e^x
        if !(y > zero) {
            return Err(Error::BelowRange);
        }
        self.x_from_parts(ez, y, M::ln(y), t)
    }

    /// The end of [`Calibration::x_from_ez`] from `e^z`, `e^x = e^z − β > 0` and `x₀ = ln e^x`: the
    /// sensitivity and the residual.
    pub(super) fn x_from_parts<F: Real>(&self, ez: F, y: F, x0: F, t: &Terms<F>) -> Result<(F, F), Error> {
        let h = t.h;
        // Sensitivity ∂w/∂x = e^x/(e^x + β) + h e^x.
        let sens = y / ez + h * y;
        let r = &self.model.residual;
        let xi = (x0 - F::of(r.x_center)) / F::of(r.x_half_span);
        let x = x0 + t.residual.eval(xi);
        if !x.finite() {
            return Err(Error::InvalidCalibration(CalibrationDefect::Coefficient));
        }
        Ok((x, sens))
    }
}
