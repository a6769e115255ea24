//! The population's mean and modes from its units' fitted parameters, and the prior they make.
//!
//! Units are compared by what their parameters do, not by the parameters' values: a deviation δθ of a unit
//! from the mean is mapped to the error in x it causes on a common grid of temperatures and ratios
//! (`J·δθ`, with `J` the model's Jacobian at the mean over ∂code/∂x). The unit's own terms (constant
//! offset and slope) are regressed out of each deviation first, since every unit measures them itself; the
//! SVD of what is left gives the modes, each as a parameter direction of one standard deviation of the
//! population, ordered by the share of the spread (in x, over the grid) it explains. The spread that k modes
//! leave is kept per parameter as a floor, so that the prior is `N(θ̄, V·Vᵀ + diag(floor))` on the
//! parameters other than the unit's own.

use nalgebra::{DMatrix, DVector};

use crate::fit::model::{Norm, Params, Prep, Spec};
use crate::fit::prior::Prior;

/// Temperatures and x values of the common grid (each way).
pub const GRID: usize = 13;

/// Smallest floor variance, relative to the parameter's spread in the lot (keeps the precision finite).
const MIN_FLOOR: f64 = 1e-6;

/// The indices of a unit's own terms in the parameter vector: the constant offset and slope coefficients.
pub fn own_terms(spec: Spec) -> [usize; 2] {
    [0, spec.offset_terms]
}

/// The grid's rows: `GRID × GRID` points over the temperature and x ranges.
pub fn grid(norm: &Norm, t: (f64, f64), x: (f64, f64)) -> Vec<Prep> {
    let at = |a: f64, b: f64, i: usize| a + (b - a) * i as f64 / (GRID - 1) as f64;
    (0..GRID)
        .flat_map(|i| (0..GRID).map(move |j| (at(t.0, t.1, i), at(x.0, x.1, j))))
        .map(|(tc, xv)| Prep::new(norm, 0.0, tc, xv, 1.0))
        .collect()
}

/// The Jacobian of the error in x at `rows` with respect to θ at `params` (Np per unit of each parameter).
pub fn x_jacobian(params: &Params, rows: &[Prep]) -> DMatrix<f64> {
    let p = params.spec.n_params();
    let mut m = DMatrix::<f64>::zeros(rows.len(), p);
    let mut g = Vec::with_capacity(p);
    for (i, r) in rows.iter().enumerate() {
        // The residual's gradient is −∂prediction/∂θ (√w = 1 on the grid).
        params.residual_and_gradient(r, &mut g);
        let s = params.dcode_dx(r);
        for (j, v) in g.iter().enumerate().take(p) {
            m[(i, j)] = -v / s;
        }
    }
    m
}

/// The mean and modes of a set of units' parameters.
#[derive(Debug, Clone)]
pub struct Modes {
    /// θ̄.
    pub mean: Vec<f64>,
    /// Every mode found, largest first: a parameter direction of one standard deviation.
    pub directions: Vec<Vec<f64>>,
    /// The share of the spread (in x over the grid, own terms removed) each mode explains.
    pub shares: Vec<f64>,
    /// Each unit's deviation from the mean with its own terms regressed out (columns).
    deviations: DMatrix<f64>,
    /// Each unit's scores on the modes (rows: units).
    scores: DMatrix<f64>,
}

/// Solves `min ‖a·c − b‖` for c by SVD (`None` if it fails).
fn lstsq(a: &DMatrix<f64>, b: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let svd = a.clone().try_svd(true, true, f64::EPSILON, 10_000)?;
    let eps = svd.singular_values.max() * 1e-12 * a.ncols().max(1) as f64;
    svd.solve(b, eps).ok()
}

impl Modes {
    /// The modes of `thetas` (at least two units), the grid built with `norm` over the ranges.
    pub fn of(thetas: &[Vec<f64>], spec: Spec, norm: &Norm, t: (f64, f64), x: (f64, f64)) -> Option<Modes> {
        let n = thetas.len();
        let p = spec.n_params();
        if n < 2 || thetas.iter().any(|v| v.len() != p) {
            return None;
        }
        let mean: Vec<f64> = (0..p).map(|j| thetas.iter().map(|v| v[j]).sum::<f64>() / n as f64).collect();
        let mut at_mean = Params::zero(spec);
        at_mean.set_vec(&mean);
        let jac = x_jacobian(&at_mean, &grid(norm, t, x));
        if !jac.iter().all(|v| v.is_finite()) {
            return None;
        }
        let own = own_terms(spec);
        let j_own = DMatrix::from_fn(jac.nrows(), own.len(), |r, c| jac[(r, own[c])]);
        let mut d = DMatrix::from_fn(p, n, |j, i| thetas[i][j] - mean[j]);
        // Regress the own terms out of each unit's deviation (in x over the grid).
        let f = &jac * &d;
        let c = lstsq(&j_own, &f)?;
        for i in 0..n {
            for (k, &o) in own.iter().enumerate() {
                d[(o, i)] -= c[(k, i)];
            }
        }
        let scale = 1.0 / ((n - 1) as f64).sqrt();
        let f = (&jac * &d) * scale;
        let svd = f.try_svd(false, true, f64::EPSILON, 10_000)?;
        let vt = svd.v_t?;
        let s = svd.singular_values;
        let total: f64 = s.iter().map(|v| v * v).sum();
        let mut order: Vec<usize> = (0..s.len()).collect();
        order.sort_by(|&a, &b| s[b].total_cmp(&s[a]));
        // Modes with a share of the spread below 1e-9 are numerical dust.
        let order: Vec<usize> =
            order.into_iter().filter(|&k| total > 0.0 && s[k] * s[k] / total > 1e-9).collect();
        let mut directions = Vec::new();
        let mut shares = Vec::new();
        let mut scores = DMatrix::<f64>::zeros(n, order.len());
        for (m, &k) in order.iter().enumerate() {
            let w = vt.row(k).transpose();
            let v = (&d * &w) * scale;
            directions.push(v.iter().copied().collect());
            shares.push(s[k] * s[k] / total);
            for i in 0..n {
                scores[(i, m)] = w[i] / scale;
            }
        }
        Some(Modes { mean, directions, shares, deviations: d, scores })
    }

    /// The floor variances per parameter that `k` modes leave (own terms: 0).
    pub fn floor(&self, spec: Spec, k: usize) -> Vec<f64> {
        let (p, n) = (self.deviations.nrows(), self.deviations.ncols());
        let own = own_terms(spec);
        (0..p)
            .map(|j| {
                if own.contains(&j) {
                    return 0.0;
                }
                let (mut ss, mut total) = (0.0, 0.0);
                for i in 0..n {
                    let fitted: f64 = (0..k.min(self.directions.len()))
                        .map(|m| self.directions[m][j] * self.scores[(i, m)])
                        .sum();
                    ss += (self.deviations[(j, i)] - fitted).powi(2);
                    total += self.deviations[(j, i)].powi(2);
                }
                let var = ss / (n - 1).max(1) as f64;
                var.max(MIN_FLOOR * total / (n - 1).max(1) as f64).max(f64::MIN_POSITIVE)
            })
            .collect()
    }
}

/// The prior of a population of `lot_units` units: mean, the first `k` of `directions`, the `floor`
/// variances, the noise in codes `sigma`, the normalisation and the ranges (temperature, x) that the grid
/// of the scores spans.
#[allow(clippy::too_many_arguments)]
pub fn prior(
    lot_units: usize,
    spec: Spec,
    norm: Norm,
    mean: &[f64],
    directions: &[Vec<f64>],
    floor: &[f64],
    sigma: f64,
    t: (f64, f64),
    x: (f64, f64),
) -> Option<Prior> {
    let p = spec.n_params();
    let own = own_terms(spec);
    let free: Vec<usize> = (0..p).filter(|j| !own.contains(j)).collect();
    let q = free.len();
    let k = directions.len();
    // Covariance of the free parameters: V·Vᵀ + diag(floor); the prior's root is σ·Lᵀ with P = C⁻¹ = L·Lᵀ.
    let mut c = DMatrix::<f64>::zeros(q, q);
    for (a, &ja) in free.iter().enumerate() {
        c[(a, a)] += floor.get(ja).copied()?;
        for (b, &jb) in free.iter().enumerate() {
            c[(a, b)] += directions.iter().map(|v| v[ja] * v[jb]).sum::<f64>();
        }
    }
    let precision = c.cholesky()?.inverse();
    let l = precision.cholesky()?.l();
    let root: Vec<Vec<f64>> = (0..q)
        .map(|r| {
            let mut row = vec![0.0; p];
            for (a, &ja) in free.iter().enumerate() {
                row[ja] = sigma * l[(a, r)];
            }
            row
        })
        .collect();
    // The score map: least squares of a deviation's x error on the modes' and the own terms' functions.
    let mut at_mean = Params::zero(spec);
    at_mean.set_vec(mean);
    let jac = x_jacobian(&at_mean, &grid(&norm, t, x));
    let mut basis = DMatrix::<f64>::zeros(jac.nrows(), k + own.len());
    for (m, v) in directions.iter().enumerate() {
        basis.set_column(m, &(&jac * DVector::from_column_slice(v)));
    }
    for (m, &o) in own.iter().enumerate() {
        basis.set_column(k + m, &jac.column(o));
    }
    let map = lstsq(&basis, &jac)?;
    let scores: Vec<Vec<f64>> = (0..k).map(|m| map.row(m).iter().copied().collect()).collect();
    let ok = root.iter().chain(&scores).flatten().all(|v| v.is_finite());
    ok.then(|| Prior {
        spec,
        norm,
        temperature_c: t,
        mean: mean.to_vec(),
        root,
        sigma,
        lot_units,
        noise_temperature_k: 0.0,
        scores,
        own: (own, [[0.0; 2]; 2]),
    })
}
