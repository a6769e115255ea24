//! Production plans: which set-points (and how many ratios at each) a unit fitted against a population
//! needs, and the error in x predicted across the range.
//!
//! The prediction is the linear-Gaussian one of the fit against the prior: with `J` the model's Jacobian
//! (codes per unit of θ) at the rows a plan measures, σ the population's noise in codes and `R` the prior's
//! root, the fitted parameters' covariance is `σ²·(JᵀJ + RᵀR)⁻¹`. At a point (T, x) of the range the error
//! in x of a reading then has the variance `gᵀ·Cov·g + (σ/∂code/∂x)²`, the model's part and the reading's
//! own noise (the noise-only limit), with `g` the point's row of the Jacobian of x. The figures are the
//! rms over a grid of the range of that error over the noise-only part, and the worst point's ratio.
//! Set-points are chosen from evenly spaced candidates over the lot's range by exhaustive search (greedy
//! when the combinations are too many), minimising the model's mean variance over the range.

use nalgebra::DMatrix;
use serde::Serialize;

use super::modes::{grid, x_jacobian, GRID};
use super::{PopulationError, PopulationModel};
use crate::fit::model::{Params, Prep};
use crate::fit::prior::Prior;
use crate::output::number::Num;

/// Most combinations searched exhaustively.
const MAX_COMBINATIONS: usize = 20_000;

/// Ratio counts per set-point a plan compares.
pub const RATIO_COUNTS: [usize; 5] = [6, 11, 21, 41, 81];

/// Options of [`plan`].
#[derive(Debug, Clone, Copy)]
pub struct PlanOptions {
    /// Set-points of the production run (≥ 1).
    pub setpoints: usize,
    /// Candidate temperatures, evenly spaced over the lot's range, ends included (≥ 2).
    pub candidates: usize,
}

impl Default for PlanOptions {
    fn default() -> Self {
        PlanOptions { setpoints: 3, candidates: 15 }
    }
}

/// A plan's predicted error in x.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Predicted {
    /// rms over the range of the error over its noise-only part.
    pub rms_ratio: f64,
    /// The worst point's error over its noise-only part (both rms figures).
    pub worst_ratio: f64,
}

/// A recommended production plan.
#[derive(Debug, Clone, Serialize)]
pub struct PlanOutcome {
    /// The set-points, °C.
    pub setpoints_c: Vec<f64>,
    /// Distinct ratios per set-point recommended (log-spaced over the lot's range).
    pub ratios: usize,
    /// Sweeps per set-point (the lot's).
    pub repeats: usize,
    /// The prediction of the plan.
    pub predicted: Predicted,
    /// The prediction with each ratio count of [`RATIO_COUNTS`].
    pub by_ratios: Vec<(usize, Predicted)>,
    /// Across the range: (temperature °C, rms ratio over x at that temperature).
    pub profile: Vec<(f64, f64)>,
}

/// The information of a plan's rows (`JᵀJ`), codes² per unit of θ².
fn information(prior: &Prior, at: &Params, temps: &[f64], xs: &[f64], repeats: usize) -> DMatrix<f64> {
    let p = prior.n_params();
    let mut h = DMatrix::<f64>::zeros(p, p);
    let mut g = Vec::with_capacity(p);
    for &t in temps {
        for &x in xs {
            at.residual_and_gradient(&Prep::new(&prior.norm, 0.0, t, x, 1.0), &mut g);
            for a in 0..p {
                for b in 0..p {
                    h[(a, b)] += repeats as f64 * g[a] * g[b];
                }
            }
        }
    }
    h
}

/// The model's error variance in x at each grid point and the noise-only variance there, for a plan.
fn variances(
    model: &PopulationModel,
    prior: &Prior,
    temps: &[f64],
    ratios: usize,
) -> Option<Vec<(f64, f64)>> {
    let mut at = Params::zero(prior.spec);
    at.set_vec(&prior.mean);
    let xs: Vec<f64> = (0..ratios.max(2))
        .map(|i| model.x[0] + (model.x[1] - model.x[0]) * i as f64 / (ratios.max(2) - 1) as f64)
        .collect();
    let mut h = information(prior, &at, temps, &xs, model.repeats.max(1));
    for r in &prior.root {
        for a in 0..r.len() {
            for b in 0..r.len() {
                h[(a, b)] += r[a] * r[b];
            }
        }
    }
    let cov = h.try_inverse()? * model.noise_codes.powi(2);
    let rows = grid(&prior.norm, (model.temperature_c[0], model.temperature_c[1]), (model.x[0], model.x[1]));
    let jx = x_jacobian(&at, &rows);
    let out: Vec<(f64, f64)> = rows
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let g = jx.row(i).transpose();
            let var_model = (g.transpose() * &cov * &g)[(0, 0)];
            let var_noise = (model.noise_codes / at.dcode_dx(r)).powi(2);
            (var_model, var_noise)
        })
        .collect();
    out.iter().all(|(a, b)| a.is_finite() && b.is_finite() && *b > 0.0).then_some(out)
}

fn summarise(v: &[(f64, f64)]) -> Predicted {
    let (m, n): (f64, f64) = v.iter().fold((0.0, 0.0), |(a, b), (vm, vn)| (a + vm, b + vn));
    let worst = v.iter().map(|(vm, vn)| ((vm + vn) / vn).sqrt()).fold(0.0, f64::max);
    Predicted { rms_ratio: ((m + n) / n).sqrt(), worst_ratio: worst }
}

/// The predicted error of a production plan: set-points `temps` (°C), `ratios` log-spaced ratios each.
pub fn predict(model: &PopulationModel, temps: &[f64], ratios: usize) -> Result<Predicted, PopulationError> {
    let prior = model.prior()?;
    variances(model, &prior, temps, ratios).map(|v| summarise(&v)).ok_or_else(|| {
        PopulationError::Lot(format!(
            "the plan at {temps:?} °C does not determine the unit's own terms (add a set-point)"
        ))
    })
}

/// All `k`-subsets of `0..n` in lexicographic order.
fn combinations(n: usize, k: usize) -> Vec<Vec<usize>> {
    let mut out = Vec::new();
    let mut c: Vec<usize> = (0..k).collect();
    if k == 0 || k > n {
        return out;
    }
    loop {
        out.push(c.clone());
        let Some(i) = (0..k).rev().find(|&i| c[i] != i + n - k) else { return out };
        c[i] += 1;
        for j in i + 1..k {
            c[j] = c[j - 1] + 1;
        }
    }
}

fn n_choose_k(n: usize, k: usize) -> usize {
    (0..k).fold(1usize, |acc, i| acc.saturating_mul(n - i) / (i + 1))
}

/// Recommends a production plan of `opt.setpoints` set-points.
pub fn plan(model: &PopulationModel, opt: &PlanOptions) -> Result<PlanOutcome, PopulationError> {
    let bad = |what: String| PopulationError::Lot(what);
    if opt.setpoints < 1 || opt.candidates < 2 || opt.setpoints > opt.candidates {
        return Err(bad(format!(
            "{} set-points from {} candidates: expected 1 … candidates set-points and at least 2 candidates",
            opt.setpoints, opt.candidates
        )));
    }
    let prior = model.prior()?;
    let [t0, t1] = model.temperature_c;
    let cand: Vec<f64> =
        (0..opt.candidates).map(|i| t0 + (t1 - t0) * i as f64 / (opt.candidates - 1) as f64).collect();
    let ratios = model.ratios.max(2);
    let cost = |idx: &[usize]| -> f64 {
        let temps: Vec<f64> = idx.iter().map(|&i| cand[i]).collect();
        variances(model, &prior, &temps, ratios)
            .map(|v| v.iter().map(|(m, _)| m).sum::<f64>())
            .unwrap_or(f64::INFINITY)
    };
    let best: Vec<usize> = if n_choose_k(opt.candidates, opt.setpoints) <= MAX_COMBINATIONS {
        combinations(opt.candidates, opt.setpoints)
            .into_iter()
            .map(|c| (cost(&c), c))
            .min_by(|a, b| a.0.total_cmp(&b.0))
            .map(|(_, c)| c)
            .unwrap_or_default()
    } else {
        let mut chosen: Vec<usize> = Vec::new();
        while chosen.len() < opt.setpoints {
            let next = (0..opt.candidates)
                .filter(|i| !chosen.contains(i))
                .map(|i| {
                    let mut c = chosen.clone();
                    c.push(i);
                    // With too few set-points to determine the own terms, the cost is infinite: spread first.
                    let v = cost(&c);
                    (if v.is_finite() { v } else { f64::MAX / 2.0 - (cand[i] - t0).abs() }, i)
                })
                .min_by(|a, b| a.0.total_cmp(&b.0));
            match next {
                Some((_, i)) => chosen.push(i),
                None => break,
            }
        }
        chosen.sort_unstable();
        chosen
    };
    let setpoints_c: Vec<f64> = best.iter().map(|&i| cand[i]).collect();
    let v = variances(model, &prior, &setpoints_c, ratios).ok_or_else(|| {
        bad(format!("no plan of {} set-point(s) determines the unit's own terms", opt.setpoints))
    })?;
    let predicted = summarise(&v);
    let by_ratios: Vec<(usize, Predicted)> = RATIO_COUNTS
        .iter()
        .filter_map(|&r| variances(model, &prior, &setpoints_c, r).map(|v| (r, summarise(&v))))
        .collect();
    // The fewest ratios whose prediction is within 2 % of the lot's ratio count.
    let recommended = by_ratios
        .iter()
        .find(|(_, p)| p.rms_ratio <= predicted.rms_ratio * 1.02)
        .map_or(ratios, |(r, _)| (*r).min(ratios));
    let predicted = variances(model, &prior, &setpoints_c, recommended).map_or(predicted, |v| summarise(&v));
    let v = variances(model, &prior, &setpoints_c, recommended).unwrap_or(v);
    let profile: Vec<(f64, f64)> = (0..GRID)
        .map(|i| {
            let row = &v[i * GRID..(i + 1) * GRID];
            (t0 + (t1 - t0) * i as f64 / (GRID - 1) as f64, summarise(row).rms_ratio)
        })
        .collect();
    Ok(PlanOutcome {
        setpoints_c,
        ratios: recommended,
        repeats: model.repeats,
        predicted,
        by_ratios,
        profile,
    })
}

/// The plan for a terminal.
pub fn render(out: &PlanOutcome) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let temps: Vec<String> = out.setpoints_c.iter().map(|&t| format!("{:.1}", Num(t))).collect();
    let _ = writeln!(
        s,
        "set-points: {} °C; {} ratios per set-point (log-spaced), {} sweep(s) each",
        temps.join(", "),
        out.ratios,
        out.repeats
    );
    let _ = writeln!(
        s,
        "predicted error in x over the range: rms {:.2}x the noise-only limit, worst point {:.2}x",
        out.predicted.rms_ratio, out.predicted.worst_ratio
    );
    let _ = writeln!(s, "ratios per set-point:");
    for (r, p) in &out.by_ratios {
        let _ = writeln!(s, "  {r:>3}: rms {:.3}x, worst point {:.3}x", p.rms_ratio, p.worst_ratio);
    }
    let _ = writeln!(s, "across the range (rms over x):");
    for (t, r) in &out.profile {
        let _ = writeln!(s, "  {:>7.1} °C  {r:.3}x", Num(*t));
    }
    s
}
