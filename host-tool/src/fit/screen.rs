//! The rows a fit must not use, found before and during the fit: codes at the converter's rails, stray
//! readings far from every chamber set-point, the early sweeps of a set-point that had not settled, and
//! glitches. Every row set aside is kept with its reason, so that the report can name it by its line.
//!
//! # Order
//!
//! 1. **Rails** ([`rails`]): a code at or within the rail margin of either rail says nothing about x (the
//!    converter clipped). Set aside before anything else; the calibrated ranges never see them.
//! 2. **Off set-point**: a set-point of at most [`MAX_STRAY_ROWS`] rows among at least two proper ones is a
//!    stray temperature reading, not a chamber set-point.
//! 3. **A provisional repeat screen** ([`provisional`]), free of any model: a repeat far from its siblings
//!    (same set-point, same ratio) against the local scatter of repeats, at the generous [`PROVISIONAL_Z`].
//!    Of two repeats that disagree both are held out, since nothing tells which is wrong. These rows only
//!    sit out the model-size search; every one is judged again below.
//! 4. With the model of the search and the unit's noise ([`super::noise`]):
//!    * **Unsettled set-points** ([`unsettled`]): the k-th reading of each ratio at a set-point (file order is
//!      time order) against the later ones, by the weighted least-squares fit of their differences to the
//!      shapes a settling drift takes (a temperature lag `∂code/∂T`, a shift in x `∂code/∂x`, an offset in
//!      codes, each also growing or decaying along the sweep). The χ² explained by that fit is tested against
//!      its quantile at the false-alarm budget; Tukey's bisquare weights (c = 4.685, common practice) keep a
//!      glitch out of it. An unsettled sweep is set aside whole, and the next one is tested against those
//!      after it.
//!    * **Glitches** ([`glitches`]): a reading whose residual against the model is beyond the threshold
//!      *and* that disagrees by as much with its repeats (or, without repeats, with its neighbours in x at
//!      the set-point). Misfit of the model is shared by repeats and by neighbours; a glitch is not. So a
//!      too-small model's residuals at the bias bend are never taken for glitches.
//!
//! # Thresholds
//!
//! Each of the two statistical screens is allowed [`FALSE_ALARMS_PER_SCREEN`] expected false rejections per
//! unit on Gaussian noise: the glitch screen rejects beyond `|z| = Φ⁻¹(1 − 0.005/(2n))` for n rows
//! (4.3 σ for 400 rows, 4.9 σ for 16,000), the unsettled screen beyond the χ² quantile at `1 − 0.005/s` for
//! s set-points. Neither depends on how large glitches or drifts happen to be.

use serde::Serialize;

use super::noise::{NoiseModel, MIN_CODES_RMS, MIN_PAIRS};
use super::robust::{
    bisquare_weight, chi2_threshold, m_scale_quantised, median, median_variance, z_threshold,
};

/// Expected false rejections per unit on clean Gaussian data, for each statistical screen (glitches,
/// unsettled set-points): 0.01 per unit in all.
pub const FALSE_ALARMS_PER_SCREEN: f64 = 0.005;
/// The provisional repeat screen's threshold, in local standard deviations of a repeat's difference.
pub const PROVISIONAL_Z: f64 = 8.0;
/// A set-point of at most this many rows, beside at least two proper ones, is stray readings.
pub const MAX_STRAY_ROWS: usize = 2;
/// Tukey's bisquare constant of the unsettled test's robust weights (95 % efficiency at the Gaussian).
const BISQUARE_C: f64 = 4.685;
/// Repeat groups on each side whose differences make the local scale of the provisional screen.
const LOCAL_GROUPS: usize = 3;

/// Why a row was set aside.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Reason {
    /// The code is at or within the rail margin of the converter's low rail.
    LowRail,
    /// The code is at or within the rail margin of the converter's high rail.
    HighRail,
    /// The temperature is far from every chamber set-point.
    OffSetpoint,
    /// An early reading of a set-point whose readings drifted until it settled.
    Unsettled,
    /// A reading far from the model and from its repeats.
    Glitch,
}

impl Reason {
    /// A stable snake_case name.
    pub fn name(&self) -> &'static str {
        match self {
            Reason::LowRail => "low_rail",
            Reason::HighRail => "high_rail",
            Reason::OffSetpoint => "off_setpoint",
            Reason::Unsettled => "unsettled",
            Reason::Glitch => "glitch",
        }
    }

    /// The reason in words.
    pub fn describe(&self) -> &'static str {
        match self {
            Reason::LowRail => "at the converter's low rail (within the rail margin)",
            Reason::HighRail => "at the converter's high rail (within the rail margin)",
            Reason::OffSetpoint => "temperature far from every chamber set-point",
            Reason::Unsettled => "early sweep of an unsettled set-point",
            Reason::Glitch => "glitch: far from the model and from its repeats",
        }
    }
}

/// Codes at or within `margin` of either rail of a converter whose largest code is `max`.
pub fn rails(code: &[u32], max: u32, margin: u32) -> Vec<Option<Reason>> {
    code.iter()
        .map(|&c| {
            if c <= margin {
                Some(Reason::LowRail)
            } else if c >= max.saturating_sub(margin) {
                Some(Reason::HighRail)
            } else {
                None
            }
        })
        .collect()
}

/// Where each row sits: its set-point, its repeat group (same ratio) and its occurrence in that group.
#[derive(Debug, Clone)]
pub struct Layout {
    /// The rows of each set-point, in file order.
    pub setpoints: Vec<Vec<usize>>,
    /// The repeat groups of each set-point, ordered by ratio; each group's rows in file order.
    pub repeats: Vec<Vec<Vec<usize>>>,
    /// Per row (of the whole data): (set-point, repeat group, occurrence), `None` for rows in no set-point.
    pub place: Vec<Option<(usize, usize, usize)>>,
}

impl Layout {
    /// The layout of `setpoints` (row indices) for `n` rows with ratios `ratio`.
    pub fn new(setpoints: Vec<Vec<usize>>, ratio: &[f64], n: usize) -> Layout {
        let mut place = vec![None; n];
        let mut repeats = Vec::with_capacity(setpoints.len());
        let mut sps = Vec::with_capacity(setpoints.len());
        for (s, mut rows) in setpoints.into_iter().enumerate() {
            rows.sort_unstable();
            let mut by_ratio = rows.clone();
            by_ratio.sort_by(|&a, &b| ratio[a].total_cmp(&ratio[b]).then(a.cmp(&b)));
            let mut groups: Vec<Vec<usize>> = Vec::new();
            for i in by_ratio {
                match groups.last_mut() {
                    Some(g) if (ratio[i] / ratio[g[0]] - 1.0).abs() < 1e-9 => g.push(i),
                    _ => groups.push(vec![i]),
                }
            }
            for (g, group) in groups.iter_mut().enumerate() {
                group.sort_unstable();
                for (k, &i) in group.iter().enumerate() {
                    place[i] = Some((s, g, k));
                }
            }
            repeats.push(groups);
            sps.push(rows);
        }
        Layout { setpoints: sps, repeats, place }
    }
}

/// The model's view of every row: residual in codes, ∂code/∂x, ∂code/∂T and the row's noise σ (codes).
/// Rows the model does not judge hold NaN.
#[derive(Debug, Clone)]
pub struct RowFit {
    /// code − model, codes (the generic residual included, through ∂code/∂x).
    pub residual: Vec<f64>,
    /// ∂code/∂x, codes per neper.
    pub dcode_dx: Vec<f64>,
    /// ∂code/∂T, codes per kelvin.
    pub dcode_dt: Vec<f64>,
    /// The row's noise, codes rms (NaN until a noise model is set).
    pub sigma: Vec<f64>,
}

impl RowFit {
    /// Sets every row's σ from a noise model.
    pub fn set_noise(&mut self, noise: &NoiseModel) {
        self.sigma = self
            .dcode_dt
            .iter()
            .map(|&g| if g.is_finite() { noise.sigma_codes(g) } else { f64::NAN })
            .collect();
    }
}

/// The model-free repeat screen: rows far from their siblings against the local scatter of repeats (see
/// the module docs). `live[i]` says which rows to judge.
pub fn provisional(layout: &Layout, code: &[u32], live: &[bool]) -> Vec<usize> {
    let mut out = Vec::new();
    let c = |i: usize| f64::from(code[i]);
    for groups in &layout.repeats {
        let kept: Vec<Vec<usize>> =
            groups.iter().map(|g| g.iter().copied().filter(|&i| live[i]).collect()).collect();
        for (k, g) in kept.iter().enumerate() {
            if g.len() < 2 {
                continue;
            }
            let lo = k.saturating_sub(LOCAL_GROUPS);
            let hi = (k + LOCAL_GROUPS + 1).min(kept.len());
            let mut diffs = Vec::new();
            for h in &kept[lo..hi] {
                for (a, &i) in h.iter().enumerate() {
                    for &j in &h[a + 1..] {
                        diffs.push(c(i) - c(j));
                    }
                }
            }
            let s =
                (m_scale_quantised(&diffs, 1.0).unwrap_or(0.0) / std::f64::consts::SQRT_2).max(MIN_CODES_RMS);
            for &i in g {
                let others: Vec<f64> = g.iter().filter(|&&j| j != i).map(|&j| c(j)).collect();
                let Some(m) = median(&others) else { continue };
                let sd = s * (1.0 + median_variance(others.len())).sqrt();
                if (c(i) - m).abs() > PROVISIONAL_Z * sd {
                    out.push(i);
                }
            }
        }
    }
    out.sort_unstable();
    out
}

/// The unit's noise from the rows `kept`: repeat pairs of residuals where there are enough, else residuals.
pub fn noise(layout: &Layout, fit: &RowFit, kept: &[bool]) -> Option<NoiseModel> {
    let mut pairs = Vec::new();
    for groups in &layout.repeats {
        for g in groups {
            let rows: Vec<usize> = g.iter().copied().filter(|&i| kept[i]).collect();
            for (a, &i) in rows.iter().enumerate() {
                for &j in &rows[a + 1..] {
                    let g2 = 0.5 * (fit.dcode_dt[i].powi(2) + fit.dcode_dt[j].powi(2));
                    pairs.push((fit.residual[i] - fit.residual[j], g2));
                }
            }
        }
    }
    if pairs.len() >= MIN_PAIRS {
        return NoiseModel::estimate(&pairs, true);
    }
    let rows: Vec<(f64, f64)> =
        (0..kept.len()).filter(|&i| kept[i]).map(|i| (fit.residual[i], fit.dcode_dt[i].powi(2))).collect();
    NoiseModel::estimate(&rows, false)
}

/// A set-point whose early readings drifted against the later ones.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnsettledSweep {
    /// The set-point's mean temperature, °C.
    pub temp_c: f64,
    /// Which reading of each ratio drifted: 1 for the first sweep, 2 for the second, …
    pub sweep: usize,
    /// The rows set aside (row indices of the fit data).
    #[serde(skip)]
    pub rows: Vec<usize>,
    /// How many rows were set aside.
    pub count: usize,
    /// The χ² the drift explains, and its threshold at the false-alarm budget.
    pub chi2: f64,
    /// The threshold.
    pub threshold: f64,
    /// Degrees of freedom of the test.
    pub dof: usize,
    /// Largest drift of the fitted shape over the ratios, codes.
    pub max_drift_codes: f64,
    /// rms drift of the fitted shape over the ratios, codes.
    pub rms_drift_codes: f64,
    /// Largest drift of the fitted shape in x, nepers.
    pub max_drift_np: f64,
}

/// The unsettled-set-point screen (see the module docs). `judged[i]`: rows that take part (not at a rail,
/// not a glitch found so far).
pub fn unsettled(layout: &Layout, fit: &RowFit, judged: &[bool], temp_c: &[f64]) -> Vec<UnsettledSweep> {
    let nsp = layout.setpoints.len();
    let mut found = Vec::new();
    for (s, groups) in layout.repeats.iter().enumerate() {
        let mut k = 0usize;
        while let Some(sweep) = test_sweep(groups, fit, judged, k, nsp) {
            let (chi2, threshold, dof, pattern) = sweep;
            if chi2 <= threshold {
                break;
            }
            let rows: Vec<usize> = groups.iter().filter_map(|g| g.get(k).copied()).collect();
            let (mut max_c, mut ss, mut max_x) = (0.0f64, 0.0, 0.0f64);
            for &(row, f) in &pattern {
                max_c = max_c.max(f.abs());
                ss += f * f;
                max_x = max_x.max((f / fit.dcode_dx[row]).abs());
            }
            let t = layout.setpoints[s].iter().map(|&i| temp_c[i]).sum::<f64>()
                / layout.setpoints[s].len() as f64;
            found.push(UnsettledSweep {
                temp_c: t,
                sweep: k + 1,
                count: rows.len(),
                rows,
                chi2,
                threshold,
                dof,
                max_drift_codes: max_c,
                rms_drift_codes: (ss / pattern.len().max(1) as f64).sqrt(),
                max_drift_np: max_x,
            });
            k += 1;
        }
    }
    found
}

/// Tests the k-th readings of a set-point's repeat groups against the later ones: (χ² explained,
/// threshold, degrees of freedom, the fitted drift per tested row). `None` if too few ratios can be
/// compared.
#[allow(clippy::type_complexity)]
fn test_sweep(
    groups: &[Vec<usize>],
    fit: &RowFit,
    judged: &[bool],
    k: usize,
    nsp: usize,
) -> Option<(f64, f64, usize, Vec<(usize, f64)>)> {
    // (row, difference, its standard deviation)
    let mut e: Vec<(usize, f64, f64)> = Vec::new();
    for g in groups {
        let Some(&row) = g.get(k) else { continue };
        if !judged[row] {
            continue;
        }
        let later: Vec<usize> = g.iter().skip(k + 1).copied().filter(|&i| judged[i]).collect();
        if later.is_empty() {
            continue;
        }
        let m = later.len() as f64;
        let mean = later.iter().map(|&i| fit.residual[i]).sum::<f64>() / m;
        let var_later = later.iter().map(|&i| fit.sigma[i].powi(2)).sum::<f64>() / m;
        let sd = (fit.sigma[row].powi(2) + var_later / m).sqrt();
        let d = fit.residual[row] - mean;
        if d.is_finite() && sd.is_finite() && sd > 0.0 {
            e.push((row, d, sd));
        }
    }
    if e.len() < 4 {
        return None;
    }
    // Position along the sweep (file order), −½ … ½.
    let n = e.len();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by_key(|&j| e[j].0);
    let mut pos = vec![0.0; n];
    for (rank, &j) in order.iter().enumerate() {
        pos[j] = rank as f64 / (n - 1) as f64 - 0.5;
    }
    let gx_scale = e.iter().map(|&(r, _, _)| fit.dcode_dx[r].abs()).fold(0.0f64, f64::max).max(1e-300);
    let gt_scale = e.iter().map(|&(r, _, _)| fit.dcode_dt[r].abs()).fold(0.0f64, f64::max).max(1e-300);
    let with_time = n >= 16;
    let p = if with_time { 6 } else { 3 };
    let template = |j: usize, out: &mut Vec<f64>| {
        let r = e[j].0;
        let base = [fit.dcode_dt[r] / gt_scale, fit.dcode_dx[r] / gx_scale, 1.0];
        out.extend_from_slice(&base);
        if with_time {
            out.extend(base.iter().map(|b| b * pos[j]));
        }
    };
    let mut u: Vec<f64> = vec![1.0; n];
    let mut last: Option<(Vec<f64>, f64, usize)> = None;
    for _ in 0..8 {
        let sol = super::solve::linear_lstsq(n, p, |j, buf| {
            buf.clear();
            let w = u[j].sqrt() / e[j].2;
            template(j, buf);
            for v in buf.iter_mut() {
                *v *= w;
            }
            buf.push(e[j].1 * w);
        })?;
        let fitted: Vec<f64> = (0..n)
            .map(|j| {
                let mut t = Vec::with_capacity(p);
                template(j, &mut t);
                t.iter().zip(&sol.coeffs).map(|(a, b)| a * b).sum()
            })
            .collect();
        let total: f64 = (0..n).map(|j| u[j] * (e[j].1 / e[j].2).powi(2)).sum();
        let explained = (total - sol.sse).max(0.0);
        let next: Vec<f64> =
            (0..n).map(|j| bisquare_weight((e[j].1 - fitted[j]) / e[j].2, BISQUARE_C)).collect();
        let settled = next.iter().zip(&u).all(|(a, b)| (a - b).abs() < 1e-6);
        u = next;
        last = Some((fitted, explained, sol.rank));
        if settled {
            break;
        }
    }
    let (fitted, chi2, rank) = last?;
    let threshold = chi2_threshold(rank, nsp, FALSE_ALARMS_PER_SCREEN);
    let pattern = e.iter().zip(&fitted).map(|(&(r, _, _), &f)| (r, f)).collect();
    Some((chi2, threshold, rank, pattern))
}

/// The glitch screen (see the module docs): the rows among `judged` that are glitches, with their residual
/// in units of their σ.
pub fn glitches(layout: &Layout, fit: &RowFit, judged: &[bool]) -> Vec<(usize, f64)> {
    let n = judged.iter().filter(|&&j| j).count();
    let thr = z_threshold(n, FALSE_ALARMS_PER_SCREEN);
    let mut out = Vec::new();
    for (i, place) in layout.place.iter().enumerate() {
        let Some((s, g, _)) = *place else { continue };
        if !judged[i] {
            continue;
        }
        let (r, sd) = (fit.residual[i], fit.sigma[i]);
        let z = r / sd;
        if z.is_nan() || z.abs() <= thr {
            continue;
        }
        let groups = &layout.repeats[s];
        let pick =
            |h: &Vec<usize>| h.iter().copied().filter(|&j| j != i && judged[j]).collect::<Vec<usize>>();
        let mut reference = pick(&groups[g]);
        if reference.is_empty() {
            let lo = g.saturating_sub(2);
            let hi = (g + 3).min(groups.len());
            reference = (lo..hi).filter(|&h| h != g).flat_map(|h| pick(&groups[h])).collect();
        }
        if !reference.is_empty() {
            let rr: Vec<f64> = reference.iter().map(|&j| fit.residual[j]).collect();
            let m = median(&rr).unwrap_or(0.0);
            let var_ref =
                reference.iter().map(|&j| fit.sigma[j].powi(2)).sum::<f64>() / reference.len() as f64;
            let sd_d = (sd * sd + median_variance(reference.len()) * var_ref).sqrt();
            let d = (r - m).abs() / sd_d;
            if d.is_nan() || d <= thr {
                continue;
            }
        }
        out.push((i, z));
    }
    out
}
