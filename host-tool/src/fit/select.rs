//! Model-size selection by leave-one-temperature-out cross-validation.
//!
//! The question a user cares about is how the unit behaves *between* chamber set-points, so each fold
//! holds out one interior set-point (the two end set-points always stay in training when there are at
//! least four; with three, only the middle one is held out), fits on the rest and measures the error in x
//! on the held-out rows. The error in x of a row is its code residual over the model's local sensitivity
//! ∂code/∂x, the first-order equivalent of inverting the model.
//!
//! The search is greedy: from the smallest physical model, try each one-step enlargement (one more
//! offset or slope coefficient, one more bulk-resistance coefficient, the bias-current term), keep the
//! best if it lowers the cross-validated rms error by more than [`MIN_GAIN`], and stop when none does.

use rayon::prelude::*;
use serde::Serialize;

use super::model::{Params, Prep, Spec};
use super::solve::{refine, solve_linear};

/// Relative improvement of the cross-validated rms error needed to enlarge the model.
pub const MIN_GAIN: f64 = 0.03;

/// The cross-validation figures of one model size.
#[derive(Debug, Clone, Serialize)]
pub struct CvRecord {
    /// The model size.
    pub spec: Spec,
    /// rms error in x over all held-out rows, nepers.
    pub rms: f64,
    /// max |error| in x over all held-out rows, nepers.
    pub max: f64,
    /// Number of folds.
    pub folds: usize,
    /// Whether this size was chosen.
    pub chosen: bool,
}

/// Fits one model size on `rows`, from `warm` (a neighbouring fit) when given, else from a grid search
/// over the non-linear parameters. Returns the parameters and the SSE.
pub fn fit_spec(rows: &[Prep], spec: Spec, warm: Option<&Params>) -> Option<(Params, f64)> {
    let mut start = Params::zero(spec);
    let mut need_grid = true;
    if let Some(w) = warm {
        start.pole = if spec.pole { w.pole } else { 0.0 };
        if spec.bias && w.spec.bias {
            start.ln_beta = w.ln_beta;
        }
        need_grid = spec.bias && !w.spec.bias;
    }
    if need_grid {
        grid_start(&mut start, rows)?;
    }
    solve_linear(&mut start, rows)?;
    let (mut p, s) = refine(&start, rows);
    if spec.has_residual() {
        fit_residual(&mut p, rows)?;
    }
    Some((p, s))
}

/// Fits the generic residual R(ξ, τ) to what the physical terms leave, in x, weighted so that the fit is
/// least squares in codes (each row's x error times its sensitivity ∂code/∂x).
pub fn fit_residual(params: &mut Params, rows: &[Prep]) -> Option<()> {
    let s = params.spec;
    let (nx, nt) = (s.residual_x, s.residual_t);
    let base =
        Params { spec: Spec { residual_x: 0, residual_t: 0, ..s }, residual: vec![], ..params.clone() };
    let sol = super::solve::linear_lstsq(rows.len(), nx * nt, |i, buf| {
        let r = &rows[i];
        let d = base.dcode_dx(r);
        let w = r.sw * d;
        let e = (r.code - base.predict(r)) / d;
        let mut tx = [0.0; logtrim::calibration::MAX_SERIES];
        let mut tt = [0.0; logtrim::calibration::MAX_SERIES];
        super::model::chebyshev(r.xi, &mut tx);
        super::model::chebyshev(r.tau, &mut tt);
        buf.clear();
        for a in tx.iter().take(nx) {
            for b in tt.iter().take(nt) {
                buf.push(a * b * w);
            }
        }
        buf.push(-e * w);
    })?;
    params.residual = sol.coeffs;
    Some(())
}

/// Picks starting non-linear values on a coarse grid (each point a linear solve on a few rows).
fn grid_start(params: &mut Params, rows: &[Prep]) -> Option<()> {
    let few = thin(rows, 3000);
    let spec = params.spec;
    if spec.pole && !(params.pole != 0.0) {
        let no_bias = Spec { bias: false, ..spec };
        let best = (-10..=10)
            .into_par_iter()
            .filter_map(|k| {
                let mut p = Params::zero(no_bias);
                p.pole = f64::from(k) * 0.05;
                solve_linear(&mut p, &few).map(|s| (s, p.pole))
            })
            .min_by(|a, b| a.0.total_cmp(&b.0))?;
        params.pole = best.1;
    }
    if spec.bias {
        let pole = params.pole;
        let grid: Vec<(f64, f64)> = (0..14)
            .flat_map(|i| (0..9).map(move |j| (-22.0 + 1.5 * f64::from(i), -0.5 + f64::from(j))))
            .collect();
        let best = grid
            .par_iter()
            .filter_map(|&(b0, b1)| {
                let mut p = Params::zero(spec);
                p.pole = pole;
                p.ln_beta = [b0, b1];
                solve_linear(&mut p, &few).map(|s| (s, [b0, b1]))
            })
            .min_by(|a, b| a.0.total_cmp(&b.0))?;
        params.ln_beta = best.1;
    }
    Some(())
}

/// Every k-th row so that at most `max` remain.
pub fn thin(rows: &[Prep], max: usize) -> Vec<Prep> {
    if rows.len() <= max {
        return rows.to_vec();
    }
    let step = rows.len().div_ceil(max);
    rows.iter().step_by(step).copied().collect()
}

/// Errors in x (nepers) of `rows` under `params`.
pub fn x_errors(params: &Params, rows: &[Prep]) -> Vec<f64> {
    rows.iter()
        .map(|r| {
            let d = params.dcode_dx(r);
            // x̂ − x ≈ (code − prediction)/(∂code/∂x), plus the residual added after the inversion.
            (r.code - params.predict(r)) / if d.abs() > 1e-9 { d } else { 1e-9 } + params.residual_at(r)
        })
        .collect()
}

/// Cross-validates one size: `groups[i]` are the rows of set-point i (ordered by temperature).
pub fn cross_validate(groups: &[Vec<Prep>], spec: Spec, warm: &Params) -> Option<(f64, f64, usize)> {
    cross_validate_with(groups, |train| fit_spec(train, spec, Some(warm)).map(|(p, _)| p))
}

/// Cross-validates a way of fitting, `fit_rows` (the training rows to the parameters), by holding out each
/// interior set-point in turn: (rms, max, folds) of the error in x of the rows held out.
pub fn cross_validate_with<F>(groups: &[Vec<Prep>], fit_rows: F) -> Option<(f64, f64, usize)>
where
    F: Fn(&[Prep]) -> Option<Params> + Sync,
{
    let n = groups.len();
    let held: Vec<usize> = if n >= 4 {
        (1..n - 1).collect()
    } else if n == 3 {
        vec![1]
    } else {
        vec![]
    };
    if held.is_empty() {
        return None;
    }
    let results: Vec<Option<Vec<f64>>> = held
        .par_iter()
        .map(|&j| {
            let train: Vec<Prep> = groups
                .iter()
                .enumerate()
                .filter(|(i, _)| *i != j)
                .flat_map(|(_, g)| g.iter().copied())
                .collect();
            let p = fit_rows(&train)?;
            Some(x_errors(&p, &groups[j]))
        })
        .collect();
    let mut sum = 0.0;
    let mut count = 0usize;
    let mut max: f64 = 0.0;
    for r in results {
        for e in r? {
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

/// The one-step enlargements of a size allowed with `n_train` training set-points.
pub fn moves(spec: Spec, n_train: usize, max_series: usize) -> Vec<Spec> {
    let mut out = Vec::new();
    if spec.offset_terms < max_series.min(n_train) {
        out.push(Spec { offset_terms: spec.offset_terms + 1, ..spec });
    }
    if spec.slope_terms + usize::from(spec.pole) < max_series.min(n_train) {
        out.push(Spec { slope_terms: spec.slope_terms + 1, ..spec });
    }
    if spec.bulk_terms < 2.min(n_train) {
        out.push(Spec { bulk_terms: spec.bulk_terms + 1, ..spec });
    }
    if !spec.bias && n_train >= 2 {
        out.push(Spec { bias: true, ..spec });
    }
    let max_r = logtrim::calibration::MAX_RESIDUAL;
    if !spec.has_residual() {
        out.push(Spec { residual_x: 3, residual_t: 1, ..spec });
    } else {
        if spec.residual_x < max_r {
            out.push(Spec { residual_x: spec.residual_x + 1, ..spec });
        }
        if spec.residual_t < max_r.min(n_train) {
            out.push(Spec { residual_t: spec.residual_t + 1, ..spec });
        }
    }
    out
}
