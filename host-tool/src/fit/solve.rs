//! The solvers behind the fit: linear least squares by blocked Householder QR and an SVD of the small
//! triangular factor (nalgebra), and non-linear refinement by Levenberg–Marquardt (the
//! `levenberg-marquardt` crate). No normal equations are formed anywhere.

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::{DMatrix, DVector, Dyn, Owned};
use rayon::prelude::*;

use super::model::{Params, Prep};

/// Rows per block of the blocked (tall-skinny) QR.
const BLOCK: usize = 8192;
/// Most QR sweeps of the SVD of the small factor (it converges in a few dozen on any finite factor).
const MAX_SVD_ITERATIONS: usize = 10_000;
/// Below this many rows, residuals and Jacobians are computed on one thread (a small unit's fit runs in
/// parallel with other units' instead).
const PARALLEL_ROWS: usize = 4096;

/// The result of a linear least-squares solve.
#[derive(Debug, Clone)]
pub struct LinearSolution {
    /// The coefficients.
    pub coeffs: Vec<f64>,
    /// Σ residual².
    pub sse: f64,
    /// Numerical rank found by the SVD.
    pub rank: usize,
    /// Condition number of the column-scaled design (σ_max/σ_min of the kept singular values).
    pub condition: f64,
}

/// Solves `min ‖A c − b‖` where row i of `[A | b]` is produced by `row(i, &mut buf)` (the row's p design
/// values followed by its target), for `n` rows and `p` columns.
///
/// Columns are scaled to unit norm, the augmented matrix is reduced to its triangular factor block by block
/// (in parallel), and the small factor is solved by SVD, which gives the minimum-norm solution when the
/// design is rank-deficient.
pub fn linear_lstsq<F>(n: usize, p: usize, row: F) -> Option<LinearSolution>
where
    F: Fn(usize, &mut Vec<f64>) + Sync,
{
    if n < p || p == 0 {
        return None;
    }
    // Column norms for scaling.
    let add_row = |(mut acc, mut buf): (Vec<f64>, Vec<f64>), i: usize| {
        row(i, &mut buf);
        for (a, v) in acc.iter_mut().zip(&buf) {
            *a += v * v;
        }
        (acc, buf)
    };
    let norms: Vec<f64> = if n >= PARALLEL_ROWS {
        (0..n)
            .into_par_iter()
            .fold(|| (vec![0.0; p + 1], Vec::with_capacity(p + 1)), add_row)
            .map(|(a, _)| a)
            .reduce(|| vec![0.0; p + 1], |a, b| a.iter().zip(&b).map(|(x, y)| x + y).collect())
    } else {
        (0..n).fold((vec![0.0; p + 1], Vec::with_capacity(p + 1)), add_row).0
    };
    let scale: Vec<f64> = norms.iter().take(p).map(|s| if *s > 0.0 { 1.0 / s.sqrt() } else { 1.0 }).collect();

    let blocks: Vec<(usize, usize)> = (0..n).step_by(BLOCK).map(|s| (s, (s + BLOCK).min(n))).collect();
    let factor_of = |&(s, e): &(usize, usize)| {
        let m = e - s;
        let mut a = DMatrix::<f64>::zeros(m, p + 1);
        let mut buf = Vec::with_capacity(p + 1);
        for (r, i) in (s..e).enumerate() {
            row(i, &mut buf);
            for c in 0..p {
                a[(r, c)] = buf.get(c).copied().unwrap_or(0.0) * scale[c];
            }
            a[(r, p)] = buf.get(p).copied().unwrap_or(0.0);
        }
        triangular_factor(a)
    };
    let factors: Vec<DMatrix<f64>> = if blocks.len() > 1 {
        blocks.par_iter().map(factor_of).collect()
    } else {
        blocks.iter().map(factor_of).collect()
    };
    let mut stacked = DMatrix::<f64>::zeros(factors.iter().map(|f| f.nrows()).sum(), p + 1);
    let mut r0 = 0;
    for f in &factors {
        stacked.view_mut((r0, 0), (f.nrows(), p + 1)).copy_from(f);
        r0 += f.nrows();
    }
    let r = triangular_factor(stacked);
    let rr = r.view((0, 0), (p.min(r.nrows()), p)).into_owned();
    let qtb = r.view((0, p), (p.min(r.nrows()), 1)).into_owned();
    let resid_tail = if r.nrows() > p { r[(p, p)] } else { 0.0 };
    // A factor that is not finite (values beyond any physical reading) never reaches the SVD, and the SVD's
    // iterations are bounded: a solve that does not converge is `None`, never a hang.
    if !rr.iter().chain(qtb.iter()).all(|v| v.is_finite()) {
        return None;
    }
    let svd = rr.clone().try_svd(true, true, f64::EPSILON, MAX_SVD_ITERATIONS)?;
    let smax = svd.singular_values.max();
    if !(smax.is_finite() && smax > 0.0) {
        return None;
    }
    let eps = smax * 1e-12 * (p as f64);
    let rank = svd.singular_values.iter().filter(|s| **s > eps).count();
    let smin = svd.singular_values.iter().copied().filter(|s| *s > eps).fold(f64::INFINITY, f64::min);
    let sol = svd.solve(&qtb, eps).ok()?;
    // Residual: the part of Qᵀb outside the range of R plus the augmented column's tail.
    let fitted = &rr * &sol;
    let in_range: f64 = (&qtb - fitted).norm_squared();
    let coeffs: Vec<f64> = (0..p).map(|c| sol[(c, 0)] * scale[c]).collect();
    if coeffs.iter().any(|c| !c.is_finite()) {
        return None;
    }
    Some(LinearSolution { coeffs, sse: in_range + resid_tail * resid_tail, rank, condition: smax / smin })
}

/// The upper-triangular factor R (min(m, k) × k) of a Householder QR of `a` (m × k).
fn triangular_factor(a: DMatrix<f64>) -> DMatrix<f64> {
    let k = a.ncols();
    if a.nrows() == 0 {
        return DMatrix::zeros(0, k);
    }
    a.qr().r()
}

/// Solves the linear parameters of `params` (its non-linear values held) on `rows`; returns the SSE.
pub fn solve_linear(params: &mut Params, rows: &[Prep]) -> Option<f64> {
    let p = params.spec.n_linear();
    let snapshot = params.clone();
    let sol = linear_lstsq(rows.len(), p, |i, buf| {
        let r = &rows[i];
        snapshot.linear_row(r, buf);
        buf.push(r.sw * r.code);
    })?;
    params.set_linear(&sol.coeffs);
    Some(sol.sse)
}

/// Σ residual² of `params` on `rows`.
pub fn sse(params: &Params, rows: &[Prep]) -> f64 {
    let f = |r: &Prep| {
        let e = r.sw * (r.code - params.predict(r));
        e * e
    };
    if rows.len() >= PARALLEL_ROWS {
        rows.par_iter().map(f).sum()
    } else {
        rows.iter().map(f).sum()
    }
}

struct Problem<'a> {
    rows: &'a [Prep],
    params: Params,
    /// A Gaussian prior's rows, stacked under the data's: residuals `R·(θ − θ̄)` (θ̄, then the rows of R).
    prior: Option<(&'a [f64], &'a [Vec<f64>])>,
}

impl Problem<'_> {
    fn prior_residuals(&self) -> Vec<f64> {
        let Some((mean, root)) = self.prior else { return Vec::new() };
        let theta = self.params.to_vec();
        root.iter()
            .map(|r| r.iter().zip(theta.iter().zip(mean)).map(|(a, (t, m))| a * (t - m)).sum())
            .collect()
    }

    /// Σ residual², the prior's included.
    fn cost(&self) -> f64 {
        sse(&self.params, self.rows) + self.prior_residuals().iter().map(|v| v * v).sum::<f64>()
    }
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
        let f = |r: &Prep| r.sw * (r.code - self.params.predict(r));
        let mut v: Vec<f64> = if self.rows.len() >= PARALLEL_ROWS {
            self.rows.par_iter().map(f).collect()
        } else {
            self.rows.iter().map(f).collect()
        };
        v.extend(self.prior_residuals());
        v.iter().all(|e| e.is_finite()).then(|| DVector::from_vec(v))
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        let p = self.params.spec.n_params();
        let n = self.rows.len();
        let root = self.prior.map_or(&[][..], |(_, r)| r);
        let mut m = DMatrix::<f64>::zeros(n + root.len(), p);
        for (k, r) in root.iter().enumerate() {
            for (j, v) in r.iter().enumerate().take(p) {
                m[(n + k, j)] = *v;
            }
        }
        let fill = |chunk: &[Prep], m: &mut DMatrix<f64>, r0: usize| {
            let mut g = Vec::with_capacity(p);
            for (k, r) in chunk.iter().enumerate() {
                self.params.residual_and_gradient(r, &mut g);
                for (j, v) in g.iter().enumerate().take(p) {
                    m[(r0 + k, j)] = *v;
                }
            }
        };
        if n >= PARALLEL_ROWS {
            // Rows in parallel blocks, each into its own matrix, then copied into place.
            let blocks: Vec<(usize, DMatrix<f64>)> = self
                .rows
                .par_chunks(BLOCK)
                .enumerate()
                .map(|(b, chunk)| {
                    let mut part = DMatrix::<f64>::zeros(chunk.len(), p);
                    fill(chunk, &mut part, 0);
                    (b * BLOCK, part)
                })
                .collect();
            for (r0, part) in blocks {
                m.view_mut((r0, 0), (part.nrows(), p)).copy_from(&part);
            }
        } else {
            fill(self.rows, &mut m, 0);
        }
        m.iter().all(|e| e.is_finite()).then_some(m)
    }
}

/// Refines all parameters by Levenberg–Marquardt from `start`; returns the refined parameters and SSE.
/// A refinement that does not lower the SSE returns the start.
pub fn refine(start: &Params, rows: &[Prep]) -> (Params, f64) {
    refine_with(start, rows, None)
}

/// [`refine`] with a Gaussian prior's rows `R·(θ − θ̄)` stacked under the data's (`prior`: θ̄ and the rows
/// of R); the SSE returned includes them.
pub fn refine_with(start: &Params, rows: &[Prep], prior: Option<(&[f64], &[Vec<f64>])>) -> (Params, f64) {
    let problem = Problem { rows, params: start.clone(), prior };
    let s0 = problem.cost();
    let (done, _report) = LevenbergMarquardt::new().with_patience(60).minimize(problem);
    let s1 = done.cost();
    if s1.is_finite() && s1 <= s0 {
        (done.params, s1)
    } else {
        (start.clone(), s0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_beyond_any_reading_end_the_solve_instead_of_hanging() {
        // A row at 1e308 once made the SVD loop forever: the solve now ends, with no solution.
        for big in [1e305, 1e308, f64::MAX, f64::INFINITY, f64::NAN] {
            let s = linear_lstsq(10, 2, |i, b| {
                b.clear();
                let t = i as f64;
                b.extend_from_slice(&[1.0, if i == 3 { big } else { t }, 2.0 + t]);
            });
            if let Some(s) = s {
                assert!(s.coeffs.iter().all(|c| c.is_finite()), "{big}: {s:?}");
            }
        }
    }

    #[test]
    fn exact_line_and_rank_deficiency() {
        // y = 2 + 3 t on 100 points; a duplicated column makes the design rank-deficient: the minimum-norm
        // solution splits the coefficient evenly.
        let t: Vec<f64> = (0..100).map(|i| i as f64 / 10.0).collect();
        let s = linear_lstsq(100, 3, |i, b| {
            b.clear();
            b.extend_from_slice(&[1.0, t[i], t[i], 2.0 + 3.0 * t[i]]);
        })
        .unwrap();
        assert_eq!(s.rank, 2);
        assert!((s.coeffs[0] - 2.0).abs() < 1e-10);
        assert!((s.coeffs[1] - 1.5).abs() < 1e-10 && (s.coeffs[2] - 1.5).abs() < 1e-10);
        assert!(s.sse < 1e-18);
    }

    #[test]
    fn residual_sum_matches_direct_computation() {
        let n = 20_000;
        let f = |i: usize| ((i as f64) * 0.37).sin();
        let s = linear_lstsq(n, 2, |i, b| {
            b.clear();
            let t = i as f64 / n as f64;
            b.extend_from_slice(&[1.0, t, 1.0 + t + 0.01 * f(i)]);
        })
        .unwrap();
        let direct: f64 = (0..n)
            .map(|i| {
                let t = i as f64 / n as f64;
                let e = 1.0 + t + 0.01 * f(i) - s.coeffs[0] - s.coeffs[1] * t;
                e * e
            })
            .sum();
        assert!((s.sse - direct).abs() <= 1e-9 + 1e-7 * direct, "{} vs {direct}", s.sse);
    }
}
