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

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::{DMatrix, DVector, Dyn, Owned};
use serde::Serialize;

use super::model::{Norm, Params, Prep, Spec};
use super::select::x_errors;

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
    /// The limit at the false-alarm budget [`FALSE_ALARMS`]: Hotelling's prediction limit for a new unit
    /// of a population whose mean and spread were estimated from n units,
    /// `q·(n−1)·(n+1)/(n·(n−q))·F(q, n−q)` at the quantile, which the χ² quantile of q degrees of freedom
    /// becomes for a large lot (common practice in multivariate process control).
    pub threshold: f64,
}

impl PopulationFit {
    /// Whether the unit lies within the population.
    pub fn inside(&self) -> bool {
        self.distance2 <= self.threshold
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
        let problem = Problem { rows, params: start.clone(), prior: self };
        let (done, _) = LevenbergMarquardt::new().with_patience(100).minimize(problem);
        let cost = |p: &Params| {
            let data: f64 = rows.iter().map(|r| (r.sw * (r.code - p.predict(r))).powi(2)).sum();
            data + self.prior_residuals(&p.to_vec()).iter().map(|v| v * v).sum::<f64>()
        };
        let (c0, c1) = (cost(&start), cost(&done.params));
        let best = if c1.is_finite() && c1 <= c0 { done.params } else { start };
        best.to_vec().iter().all(|v| v.is_finite()).then_some(best)
    }

    /// The population check of fitted parameters.
    pub fn check(&self, params: &Params) -> PopulationFit {
        let d: Vec<f64> = params.to_vec().iter().zip(&self.mean).map(|(t, m)| t - m).collect();
        let scores: Vec<f64> = self.scores.iter().map(|s| dot(s, &d)).collect();
        let distance2 =
            self.prior_residuals(&params.to_vec()).iter().map(|v| v * v).sum::<f64>() / self.sigma.powi(2);
        let dof = self.root.len();
        let threshold = prediction_limit(dof, self.lot_units);
        PopulationFit { scores, distance2, dof, threshold }
    }

    /// Leave-one-interior-set-point-out cross-validation of the fit against the prior: (rms, max, folds) of
    /// the error in x of the rows held out, `None` with fewer than three set-points.
    pub fn cross_validate(&self, groups: &[Vec<Prep>]) -> Option<(f64, f64, usize)> {
        let n = groups.len();
        let held: Vec<usize> = match n {
            0..=2 => return None,
            3 => vec![1],
            _ => (1..n - 1).collect(),
        };
        let (mut sum, mut count, mut max) = (0.0, 0usize, 0.0f64);
        for &j in &held {
            let train: Vec<Prep> = groups
                .iter()
                .enumerate()
                .filter(|(i, _)| *i != j)
                .flat_map(|(_, g)| g.iter().copied())
                .collect();
            let p = self.fit(&train)?;
            for e in x_errors(&p, &groups[j]) {
                if !e.is_finite() {
                    return None;
                }
                sum += e * e;
                count += 1;
                max = max.max(e.abs());
            }
        }
        (count > 0).then(|| ((sum / count as f64).sqrt(), max, held.len()))
    }
}

/// Hotelling's prediction limit of the squared Mahalanobis distance of a new unit in `q` dimensions from
/// a population estimated from `n` units, at the quantile `1 − FALSE_ALARMS` (the χ² quantile when `n ≤ q`
/// leaves no F distribution).
pub fn prediction_limit(q: usize, n: usize) -> f64 {
    use statrs::distribution::{ContinuousCDF, FisherSnedecor};
    if n <= q + 1 || q == 0 {
        return super::robust::chi2_threshold(q, 1, FALSE_ALARMS);
    }
    let (qf, nf) = (q as f64, n as f64);
    match FisherSnedecor::new(qf, nf - qf) {
        Ok(f) => qf * (nf - 1.0) * (nf + 1.0) / (nf * (nf - qf)) * f.inverse_cdf(1.0 - FALSE_ALARMS),
        Err(_) => super::robust::chi2_threshold(q, 1, FALSE_ALARMS),
    }
}

struct Problem<'a> {
    rows: &'a [Prep],
    params: Params,
    prior: &'a Prior,
}

impl LeastSquaresProblem<f64, Dyn, Dyn> for Problem<'_> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, x: &DVector<f64>) {
        self.params.set_vec(x.as_slice());
    }

    fn params(&self) -> DVector<f64> {
        DVector::from_vec(self.params.to_vec())
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        let mut v: Vec<f64> = self.rows.iter().map(|r| r.sw * (r.code - self.params.predict(r))).collect();
        v.extend(self.prior.prior_residuals(&self.params.to_vec()));
        v.iter().all(|e| e.is_finite()).then(|| DVector::from_vec(v))
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        let p = self.params.spec.n_params();
        let n = self.rows.len();
        let mut m = DMatrix::<f64>::zeros(n + self.prior.root.len(), p);
        let mut g = Vec::with_capacity(p);
        for (k, r) in self.rows.iter().enumerate() {
            self.params.residual_and_gradient(r, &mut g);
            for (j, v) in g.iter().enumerate().take(p) {
                m[(k, j)] = *v;
            }
        }
        for (k, r) in self.prior.root.iter().enumerate() {
            for (j, v) in r.iter().enumerate().take(p) {
                m[(n + k, j)] = *v;
            }
        }
        m.iter().all(|e| e.is_finite()).then_some(m)
    }
}
