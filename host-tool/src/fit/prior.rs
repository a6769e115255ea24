//! A population's prior on a unit's parameters, and the fit against it: what lets a production unit be
//! calibrated from two or three set-points.
//!
//! The prior is Gaussian on the parameter vector θ (in [`Params::to_vec`]'s order, one model size and one
//! normalisation for the whole population): mean θ̄, and a precision that leaves the unit's own terms (the
//! constant offset and slope coefficients, which any one set-point measures) free and holds the rest to the
//! population's spread. The fit minimises
//!
//! ```text
//! Σ_rows (code − model)² + ‖R·(θ − θ̄)‖²
//! ```
//!
//! where `R` is the precision's square root already multiplied by the population's noise in codes, so that
//! the sum is the negative log posterior times σ². It is minimised by Levenberg–Marquardt from θ̄, the data
//! and the prior rows stacked. The population module ([`crate::population`]) builds the prior from a lot.

use serde::Serialize;

use super::model::{Norm, Params, Prep, Spec};

/// The false-alarm budget of the population check: the expected share of units of the population that it
/// flags.
pub const FALSE_ALARMS: f64 = 0.005;

/// A population's prior, as the fit uses it.
#[derive(Debug, Clone, PartialEq)]
pub struct Prior {
    /// The population's model size (no generic residual).
    pub spec: Spec,
    /// The population's common normalisation.
    pub norm: Norm,
    /// The calibrated temperature range a unit fitted against the population gets, °C.
    pub temperature_c: (f64, f64),
    /// θ̄, in [`Params::to_vec`]'s order.
    pub mean: Vec<f64>,
    /// Rows of R (codes per unit of θ): the prior's residuals are `R·(θ − θ̄)`.
    pub root: Vec<Vec<f64>>,
    /// σ: the population's noise in codes, by which `root` is scaled.
    pub sigma: f64,
    /// Units the population was estimated from (for the check's limit).
    pub lot_units: usize,
    /// The temperature reading's noise as the codes see it, K rms (the lot's median): a unit fitted against
    /// the population takes it instead of its own estimate.
    pub noise_temperature_k: f64,
    /// Rows of the score map S: a unit's mode scores are `S·(θ − θ̄)` (in standard deviations of the
    /// population).
    pub scores: Vec<Vec<f64>>,
    /// The unit's own terms (indices in θ) and the inverse of their covariance over the lot: the fit leaves
    /// them free, the check holds them to the lot's spread (a zero matrix checks nothing).
    pub own: ([usize; 2], [[f64; 2]; 2]),
}

/// What the population check found for one unit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PopulationFit {
    /// The unit's score on each mode kept, in standard deviations of the population.
    pub scores: Vec<f64>,
    /// The squared Mahalanobis distance of the unit's parameters (all but its own terms) from the
    /// population's mean under the prior's covariance, `‖R·(θ − θ̄)‖²/σ²`.
    pub distance2: f64,
    /// Its degrees of freedom: the parameters the prior holds.
    pub dof: usize,
    /// The limit at half the false-alarm budget [`FALSE_ALARMS`]: Hotelling's prediction limit for a new
    /// unit of a population whose mean and spread were estimated from n units,
    /// `q·(n−1)·(n+1)/(n·(n−q))·F(q, n−q)` at the quantile, which the χ² quantile of q degrees of freedom
    /// becomes for a large lot (common practice in multivariate process control).
    pub threshold: f64,
    /// The squared Mahalanobis distance of the unit's own terms (constant offset and slope) from the lot's
    /// mean under the lot's covariance of them: a unit whose offset or gain lies outside the lot's spread.
    pub own_distance2: f64,
    /// Its limit: the prediction limit in 2 dimensions at the other half of the budget.
    pub own_threshold: f64,
}

impl PopulationFit {
    /// Whether the unit lies within the population.
    pub fn inside(&self) -> bool {
        self.distance2 <= self.threshold && self.own_distance2 <= self.own_threshold
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

impl Prior {
    /// The number of parameters.
    pub fn n_params(&self) -> usize {
        self.mean.len()
    }

    /// The prior's residuals at θ.
    fn prior_residuals(&self, theta: &[f64]) -> Vec<f64> {
        let d: Vec<f64> = theta.iter().zip(&self.mean).map(|(t, m)| t - m).collect();
        self.root.iter().map(|r| dot(r, &d)).collect()
    }

    /// The unit's parameters on `rows`, fitted against the prior from the population's mean. `None` when
    /// the solve gives no finite solution.
    pub fn fit(&self, rows: &[Prep]) -> Option<Params> {
        let mut start = Params::zero(self.spec);
        start.set_vec(&self.mean);
        let (best, _) = super::solve::refine_with(&start, rows, Some((&self.mean, &self.root)));
        best.to_vec().iter().all(|v| v.is_finite()).then_some(best)
    }

    /// The population check of fitted parameters.
    pub fn check(&self, params: &Params) -> PopulationFit {
        let d: Vec<f64> = params.to_vec().iter().zip(&self.mean).map(|(t, m)| t - m).collect();
        let scores: Vec<f64> = self.scores.iter().map(|s| dot(s, &d)).collect();
        let distance2 =
            self.prior_residuals(&params.to_vec()).iter().map(|v| v * v).sum::<f64>() / self.sigma.powi(2);
        let dof = self.root.len();
        let threshold = prediction_limit(dof, self.lot_units, FALSE_ALARMS / 2.0);
        let ([a, b], w) = self.own;
        let o = [d.get(a).copied().unwrap_or(0.0), d.get(b).copied().unwrap_or(0.0)];
        let own_distance2 = (0..2).map(|i| (0..2).map(|j| o[i] * w[i][j] * o[j]).sum::<f64>()).sum::<f64>();
        let own_threshold = prediction_limit(2, self.lot_units, FALSE_ALARMS / 2.0);
        PopulationFit { scores, distance2, dof, threshold, own_distance2, own_threshold }
    }

    /// Leave-one-interior-set-point-out cross-validation of the fit against the prior: (rms, max, folds) of
    /// the error in x of the rows held out, `None` with fewer than three set-points.
    pub fn cross_validate(&self, groups: &[Vec<Prep>]) -> Option<(f64, f64, usize)> {
        super::select::cross_validate_with(groups, |train| self.fit(train))
    }
}

/// Hotelling's prediction limit of the squared Mahalanobis distance of a new unit in `q` dimensions from
/// a population estimated from `n` units, at the quantile `1 − alpha` (the χ² quantile when `n ≤ q`
/// leaves no F distribution).
pub fn prediction_limit(q: usize, n: usize, alpha: f64) -> f64 {
    use statrs::distribution::{ContinuousCDF, FisherSnedecor};
    if n <= q + 1 || q == 0 {
        return super::robust::chi2_threshold(q, 1, alpha);
    }
    let (qf, nf) = (q as f64, n as f64);
    match FisherSnedecor::new(qf, nf - qf) {
        Ok(f) => qf * (nf - 1.0) * (nf + 1.0) / (nf * (nf - qf)) * f.inverse_cdf(1.0 - alpha),
        Err(_) => super::robust::chi2_threshold(q, 1, alpha),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_prediction_limit_is_hotellings_and_tends_to_chi_squared() {
        // χ² with 6 degrees of freedom, upper 0.5 % point: 18.548 (standard statistical tables; from memory).
        assert!(
            (prediction_limit(6, 10_000_000, FALSE_ALARMS) - 18.548).abs() < 0.01,
            "{}",
            prediction_limit(6, 10_000_000, FALSE_ALARMS)
        );
        // A small lot widens the limit: its mean and spread are themselves uncertain (common practice).
        let (l30, l20) = (prediction_limit(6, 30, FALSE_ALARMS), prediction_limit(6, 20, FALSE_ALARMS));
        assert!(l30 > 18.548 && l20 > l30, "{l30} {l20}");
        // Hotelling's form for n = 30, q = 6: 6·29·31/(30·24) · F(6, 24) at 0.995.
        let f = 6.0 * 29.0 * 31.0 / (30.0 * 24.0);
        assert!((l30 / f - 4.20).abs() < 0.02, "F quantile {}", l30 / f);
    }
}
