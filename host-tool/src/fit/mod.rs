//! Fitting a unit's calibration from chamber data.
//!
//! 1. Rows are grouped into chamber set-points by their measured temperature (a gap of more than
//!    [`FitOptions::setpoint_gap_k`] starts a new set-point).
//! 2. The data are checked for what the model needs: at least two set-points, enough rows and distinct
//!    ratios at each, a span of ratios of at least [`FitOptions::min_span_decades`].
//! 3. Variables are centred and scaled (τ over the temperature range, codes about their median) and the
//!    forward model of [`model`] is fitted by linear least squares (blocked QR + SVD) for its linear
//!    coefficients and Levenberg–Marquardt for the gain pole and the bias-current term.
//! 4. The model size is chosen by leave-one-temperature-out cross-validation ([`select`]) unless fixed.
//! 5. The result becomes firmware-lib's [`Calibration`], and the per-set-point residuals are computed by
//!    inverting with the firmware's own correction (in f64), so the report describes the code that ships.

pub mod model;
pub mod select;
pub mod solve;

use logtrim::calibration::{TemperatureRange, XRange, MAX_SERIES};
use logtrim::Calibration;
use serde::Serialize;

use model::{Envelope, Norm, Params, Prep, Spec};
use select::{cross_validate, fit_spec, moves, thin, CvRecord, MIN_GAIN};

/// Calibration data: one entry per row.
#[derive(Debug, Clone, Default)]
pub struct FitData {
    /// ADC code of the log channel.
    pub code: Vec<u32>,
    /// Measured temperature, °C.
    pub temp_c: Vec<f64>,
    /// Applied ratio I_sig/I_ref (> 0).
    pub ratio: Vec<f64>,
    /// Row weight (> 0); empty means all 1.
    pub weight: Vec<f64>,
}

impl FitData {
    /// The rows of a calibration file, all of them or those of one unit (index into the file's units).
    pub fn from_rows(rows: &[crate::data::CalRow], unit: Option<u32>) -> FitData {
        let mut d = FitData::default();
        for r in rows.iter().filter(|r| unit.is_none() || r.unit == unit) {
            d.code.push(r.code);
            d.temp_c.push(r.temp_c);
            d.ratio.push(r.ratio);
            d.weight.push(r.weight);
        }
        d
    }
}

/// Options of a fit.
#[derive(Debug, Clone)]
pub struct FitOptions {
    /// ADC resolution in bits.
    pub bits: u8,
    /// A gap in measured temperature larger than this (K) separates two set-points.
    pub setpoint_gap_k: f64,
    /// A fixed model size instead of cross-validated selection.
    pub spec: Option<Spec>,
    /// Most Chebyshev terms of any series over temperature.
    pub max_series: usize,
    /// Rows used in the model search and cross-validation (a deterministic thinning); the final linear
    /// solve uses all rows.
    pub search_rows: usize,
    /// Codes within this many of a rail are refused as saturated; `None`: 2^(bits−13), at least 1.
    pub rail_margin: Option<u32>,
    /// Readings where the front end's sensitivity has fallen below this fraction of ideal are refused.
    pub min_sensitivity: f64,
    /// Allowance added to each end of the calibrated x range, nepers; `None`: [`AUTO_MARGIN_SIGMAS`]
    /// times the rms error in x of the rows at that end (at most [`MAX_AUTO_MARGIN`]), so that a reading
    /// of a true value at the end of the range is not refused because of its noise.
    pub x_margin: Option<f64>,
    /// Bounded temperature extrapolation allowed (and flagged) beyond the calibrated range, K.
    pub extrapolation_k: f64,
    /// Smallest span of ratios accepted, decades.
    pub min_span_decades: f64,
    /// Fewest rows accepted per set-point.
    pub min_rows_per_setpoint: usize,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            bits: 16,
            setpoint_gap_k: 2.0,
            spec: None,
            max_series: 4,
            search_rows: 16_000,
            rail_margin: None,
            min_sensitivity: 0.1,
            x_margin: None,
            extrapolation_k: 0.0,
            min_span_decades: 1.0,
            min_rows_per_setpoint: 8,
        }
    }
}

/// The automatic x-range allowance in multiples of the rms error at each end.
pub const AUTO_MARGIN_SIGMAS: f64 = 4.0;
/// The largest automatic x-range allowance, nepers.
pub const MAX_AUTO_MARGIN: f64 = 0.05;

/// Why data cannot be fitted. Each message says what to add or change.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FitError {
    /// No rows at all.
    #[error("no calibration rows: add rows with code, temp_c and ratio")]
    Empty,
    /// Columns of different lengths were given.
    #[error("internal: data columns have different lengths")]
    Ragged,
    /// A value was not usable (the reader should have refused it).
    #[error("row {row}: {what}")]
    BadValue {
        /// 0-based row index.
        row: usize,
        /// What was wrong.
        what: String,
    },
    /// All rows are at one temperature.
    #[error("all rows are at one temperature ({temp_c:.2} °C): add chamber set-points, at least 3 spread over the range to be calibrated (2 give no cross-validation)")]
    OneTemperature {
        /// The temperature.
        temp_c: f64,
    },
    /// A set-point has too few rows.
    #[error("set-point near {temp_c:.2} °C has {rows} rows: add rows, at least {needed} per set-point")]
    FewRows {
        /// The set-point's mean temperature.
        temp_c: f64,
        /// Rows found.
        rows: usize,
        /// Rows needed.
        needed: usize,
    },
    /// A set-point has too few distinct ratios.
    #[error("set-point near {temp_c:.2} °C has {distinct} distinct ratios: apply at least {needed} ratios spread over the range")]
    FewRatios {
        /// The set-point's mean temperature.
        temp_c: f64,
        /// Distinct ratios found.
        distinct: usize,
        /// Distinct ratios needed.
        needed: usize,
    },
    /// The ratios span too little.
    #[error("ratios span only {decades:.2} decades ({min:.4e} … {max:.4e}): apply ratios spanning at least {needed} decade(s)")]
    NarrowSpan {
        /// Span found, decades.
        decades: f64,
        /// Smallest ratio.
        min: f64,
        /// Largest ratio.
        max: f64,
        /// Span needed.
        needed: f64,
    },
    /// The model has more parameters than the data can determine.
    #[error("model {spec} needs more data than given: {why}")]
    Underdetermined {
        /// The model size.
        spec: String,
        /// What is missing.
        why: String,
    },
    /// The solver found no usable solution.
    #[error("the fit did not converge to a usable calibration ({why}); check the data for mixed units or wrong columns")]
    Failed {
        /// What failed.
        why: String,
    },
}

/// Residual figures of one set-point, computed through the firmware's correction.
#[derive(Debug, Clone, Serialize)]
pub struct SetPointStats {
    /// Mean measured temperature, °C.
    pub temp_c: f64,
    /// Rows.
    pub rows: usize,
    /// Rows the firmware refused (below range where the sensitivity is gone, etc.).
    pub refused: usize,
    /// rms error in x, nepers.
    pub rms_np: f64,
    /// max |error| in x, nepers.
    pub max_np: f64,
}

/// The result of a fit.
#[derive(Debug, Clone, Serialize)]
pub struct FitOutcome {
    /// The firmware calibration.
    #[serde(skip)]
    pub calibration: Calibration,
    /// The fitted parameters (f64).
    pub params: Params,
    /// The normalisation.
    pub norm: Norm,
    /// The chosen model size.
    pub chosen: Spec,
    /// Per-set-point residuals.
    pub setpoints: Vec<SetPointStats>,
    /// Cross-validation figures of every size tried (empty when the size was fixed).
    pub cv: Vec<CvRecord>,
    /// Pooled scatter of repeated readings (same set-point, same ratio), in x: the noise floor, nepers.
    pub noise_floor_np: Option<f64>,
    /// Notes for the user (e.g. no cross-validation possible).
    pub notes: Vec<String>,
}

fn check_data(data: &FitData) -> Result<(), FitError> {
    let n = data.code.len();
    if n == 0 {
        return Err(FitError::Empty);
    }
    if data.temp_c.len() != n || data.ratio.len() != n || !(data.weight.is_empty() || data.weight.len() == n)
    {
        return Err(FitError::Ragged);
    }
    for i in 0..n {
        let r = data.ratio[i];
        if !(r.is_finite() && r > 0.0) {
            return Err(FitError::BadValue { row: i, what: format!("ratio {r} is not a positive number") });
        }
        if !data.temp_c[i].is_finite() {
            return Err(FitError::BadValue { row: i, what: "temperature is not finite".into() });
        }
        if let Some(w) = data.weight.get(i) {
            if !(w.is_finite() && *w > 0.0) {
                return Err(FitError::BadValue { row: i, what: format!("weight {w} is not positive") });
            }
        }
    }
    Ok(())
}

/// Groups row indices into set-points by measured temperature.
pub fn setpoints(temp_c: &[f64], gap_k: f64) -> Vec<Vec<usize>> {
    let mut idx: Vec<usize> = (0..temp_c.len()).collect();
    idx.sort_by(|&a, &b| temp_c[a].total_cmp(&temp_c[b]));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let mut last = f64::NEG_INFINITY;
    for i in idx {
        let t = temp_c[i];
        if t - last > gap_k || groups.is_empty() {
            groups.push(Vec::new());
        }
        if let Some(g) = groups.last_mut() {
            g.push(i);
        }
        last = t;
    }
    groups
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v.get(v.len() / 2).copied().unwrap_or(0.0)
}

/// Fits a calibration to chamber data.
pub fn fit(data: &FitData, opt: &FitOptions) -> Result<FitOutcome, FitError> {
    check_data(data)?;
    let n = data.code.len();
    let groups_idx = setpoints(&data.temp_c, opt.setpoint_gap_k);
    let group_mean = |g: &Vec<usize>| g.iter().map(|&i| data.temp_c[i]).sum::<f64>() / g.len() as f64;
    if groups_idx.len() < 2 {
        return Err(FitError::OneTemperature { temp_c: groups_idx.first().map(group_mean).unwrap_or(0.0) });
    }
    for g in &groups_idx {
        if g.len() < opt.min_rows_per_setpoint {
            return Err(FitError::FewRows {
                temp_c: group_mean(g),
                rows: g.len(),
                needed: opt.min_rows_per_setpoint,
            });
        }
        let mut r: Vec<f64> = g.iter().map(|&i| data.ratio[i]).collect();
        r.sort_by(f64::total_cmp);
        r.dedup_by(|a, b| (*a / *b - 1.0).abs() < 1e-9);
        let needed = 4;
        if r.len() < needed {
            return Err(FitError::FewRatios { temp_c: group_mean(g), distinct: r.len(), needed });
        }
    }
    let (rmin, rmax) = data.ratio.iter().fold((f64::INFINITY, 0.0f64), |(a, b), &r| (a.min(r), b.max(r)));
    let decades = (rmax / rmin).log10();
    if decades < opt.min_span_decades {
        return Err(FitError::NarrowSpan { decades, min: rmin, max: rmax, needed: opt.min_span_decades });
    }

    let (tmin, tmax) =
        data.temp_c.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &t| (a.min(t), b.max(t)));
    let tc = 0.5 * (tmin + tmax);
    let (xmin_data, xmax_data) = data
        .ratio
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &r| (a.min(r.ln()), b.max(r.ln())));
    let level = median(data.code.iter().map(|&c| f64::from(c)).collect()).round();
    let norm = Norm {
        level,
        t_center_c: (tc * 64.0).round() / 64.0,
        t_half_span_k: (0.5 * (tmax - tmin)).max(1.0),
        t_ref_k: (tc * 64.0).round() / 64.0 + logtrim::physics::ZERO_CELSIUS_K,
        x_center: 0.5 * (xmin_data + xmax_data),
        x_half_span: (0.5 * (xmax_data - xmin_data)).max(0.5),
    };
    let weight = |i: usize| data.weight.get(i).copied().unwrap_or(1.0);
    let prep =
        |i: usize| Prep::new(&norm, f64::from(data.code[i]), data.temp_c[i], data.ratio[i].ln(), weight(i));
    let groups: Vec<Vec<Prep>> = groups_idx.iter().map(|g| g.iter().map(|&i| prep(i)).collect()).collect();
    let all: Vec<Prep> = groups.iter().flatten().copied().collect();
    let nsp = groups.len();
    let per_group = (opt.search_rows / nsp).max(opt.min_rows_per_setpoint);
    let search_groups: Vec<Vec<Prep>> = groups.iter().map(|g| thin(g, per_group)).collect();
    let search: Vec<Prep> = search_groups.iter().flatten().copied().collect();

    let mut notes = Vec::new();
    let mut cv = Vec::new();
    let base = Spec {
        offset_terms: 2,
        slope_terms: 1,
        bulk_terms: 0,
        pole: nsp >= 3,
        bias: false,
        residual_x: 0,
        residual_t: 0,
    };
    let (chosen, mut params) = match opt.spec {
        Some(spec) => {
            check_spec(spec, nsp, n)?;
            let (p, _) = fit_spec(&search, spec, None).ok_or_else(|| failed("initial fit"))?;
            (spec, p)
        }
        None if nsp < 3 => {
            notes.push(format!(
                "only {nsp} set-points: no cross-validation possible, the smallest model is used; add set-points between them to let the fit check itself"
            ));
            let (p, _) = fit_spec(&search, base, None).ok_or_else(|| failed("initial fit"))?;
            (base, p)
        }
        None => {
            let n_train = nsp - 1;
            let (mut best_p, _) = fit_spec(&search, base, None).ok_or_else(|| failed("initial fit"))?;
            let (mut best_rms, max, folds) =
                cross_validate(&search_groups, base, &best_p).ok_or_else(|| failed("cross-validation"))?;
            let mut best_spec = base;
            cv.push(CvRecord { spec: base, rms: best_rms, max, folds, chosen: false });
            loop {
                let mut step: Option<(f64, Spec, Params)> = None;
                for m in moves(best_spec, n_train, opt.max_series.min(MAX_SERIES)) {
                    let Some((p, _)) = fit_spec(&search, m, Some(&best_p)) else { continue };
                    let Some((rms, max, folds)) = cross_validate(&search_groups, m, &p) else { continue };
                    cv.push(CvRecord { spec: m, rms, max, folds, chosen: false });
                    if step.as_ref().is_none_or(|(r, _, _)| rms < *r) {
                        step = Some((rms, m, p));
                    }
                }
                match step {
                    Some((rms, m, p)) if rms < best_rms * (1.0 - MIN_GAIN) => {
                        best_rms = rms;
                        best_spec = m;
                        best_p = p;
                    }
                    _ => break,
                }
            }
            (best_spec, best_p)
        }
    };
    for r in cv.iter_mut() {
        r.chosen = r.spec == chosen;
    }
    // Final linear solve on every row, the non-linear values from the search.
    if all.len() > search.len() {
        solve::solve_linear(&mut params, &all).ok_or_else(|| failed("final solve"))?;
    }
    let rail_margin = opt.rail_margin.unwrap_or_else(|| 1u32 << opt.bits.saturating_sub(13)).max(1);
    let (xmin, xmax) =
        all.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), r| (a.min(r.x), b.max(r.x)));
    let end_margin = |near: &dyn Fn(f64) -> bool| -> f64 {
        let rows: Vec<Prep> = all.iter().filter(|r| near(r.x)).copied().collect();
        let e = select::x_errors(&params, &rows);
        let rms = (e.iter().map(|v| v * v).sum::<f64>() / e.len().max(1) as f64).sqrt();
        (AUTO_MARGIN_SIGMAS * rms).min(MAX_AUTO_MARGIN)
    };
    let edge = 0.02 * (xmax - xmin);
    let (margin_lo, margin_hi) = match opt.x_margin {
        Some(m) => (m, m),
        None => (end_margin(&|x| x <= xmin + edge), end_margin(&|x| x >= xmax - edge)),
    };
    let env = Envelope {
        bits: opt.bits,
        rail_margin,
        temperature: TemperatureRange {
            min_c: tmin as f32,
            max_c: tmax as f32,
            extrapolation_k: opt.extrapolation_k as f32,
        },
        x_range: XRange {
            min: (xmin - margin_lo) as f32,
            max: (xmax + margin_hi) as f32,
            min_sensitivity: opt.min_sensitivity as f32,
        },
    };
    let calibration = model::to_calibration(&params, &norm, &env);
    calibration.validate().map_err(|e| failed(&format!("the fitted calibration does not validate: {e}")))?;

    let setpoints = groups_idx
        .iter()
        .map(|g| {
            let mut sum = 0.0;
            let mut max: f64 = 0.0;
            let mut ok = 0usize;
            for &i in g {
                if let Ok(r) = calibration.correct_f64(f64::from(data.code[i]), data.temp_c[i]) {
                    let e = r.x - data.ratio[i].ln();
                    sum += e * e;
                    max = max.max(e.abs());
                    ok += 1;
                }
            }
            SetPointStats {
                temp_c: group_mean(g),
                rows: g.len(),
                refused: g.len() - ok,
                rms_np: if ok > 0 { (sum / ok as f64).sqrt() } else { f64::NAN },
                max_np: max,
            }
        })
        .collect();
    let noise_floor_np = noise_floor(data, &groups_idx, &calibration);
    Ok(FitOutcome { calibration, params, norm, chosen, setpoints, cv, noise_floor_np, notes })
}

fn failed(why: &str) -> FitError {
    FitError::Failed { why: why.to_string() }
}

fn check_spec(spec: Spec, nsp: usize, n: usize) -> Result<(), FitError> {
    let t_terms = spec.offset_terms.max(spec.slope_terms + usize::from(spec.pole));
    if spec.offset_terms == 0 || spec.slope_terms == 0 || spec.temperature_terms() > MAX_SERIES {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!("offset and slope need 1..={MAX_SERIES} terms"),
        });
    }
    if t_terms > nsp {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!(
                "{t_terms} coefficients over temperature need at least {t_terms} set-points, {nsp} given"
            ),
        });
    }
    if spec.residual_x > logtrim::calibration::MAX_RESIDUAL
        || spec.residual_t > logtrim::calibration::MAX_RESIDUAL
        || spec.residual_t > nsp
    {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!(
                "the residual takes at most {m}x{m} terms and no more terms over temperature than set-points ({nsp})",
                m = logtrim::calibration::MAX_RESIDUAL
            ),
        });
    }
    if n < 3 * spec.n_params() {
        return Err(FitError::Underdetermined {
            spec: spec.describe(),
            why: format!(
                "{} parameters need at least {} rows, {n} given",
                spec.n_params(),
                3 * spec.n_params()
            ),
        });
    }
    Ok(())
}

/// Pooled standard deviation of the x error among repeated readings (same set-point, same ratio).
fn noise_floor(data: &FitData, groups: &[Vec<usize>], cal: &Calibration) -> Option<f64> {
    let mut ss = 0.0;
    let mut dof = 0usize;
    for g in groups {
        let mut by_ratio: std::collections::BTreeMap<u64, Vec<f64>> = Default::default();
        for &i in g {
            if let Ok(r) = cal.correct_f64(f64::from(data.code[i]), data.temp_c[i]) {
                by_ratio.entry(data.ratio[i].to_bits()).or_default().push(r.x - data.ratio[i].ln());
            }
        }
        for v in by_ratio.values().filter(|v| v.len() >= 2) {
            let m = v.iter().sum::<f64>() / v.len() as f64;
            ss += v.iter().map(|e| (e - m) * (e - m)).sum::<f64>();
            dof += v.len() - 1;
        }
    }
    (dof >= 10).then(|| (ss / dof as f64).sqrt())
}

/// Renders the fit report for the terminal.
pub fn render_report(out: &FitOutcome) -> String {
    use std::fmt::Write;
    let db = crate::error_scale::db_power;
    let mut s = String::new();
    let _ = writeln!(s, "model: {}", out.chosen.describe());
    let _ = writeln!(s, "set-point      rows  refused   rms [Np]    max [Np]    rms [dB]    max [dB]");
    for p in &out.setpoints {
        let _ = writeln!(
            s,
            "{:>8.2} °C {:>7} {:>8} {:>10.3e} {:>11.3e} {:>11.3e} {:>11.3e}",
            p.temp_c,
            p.rows,
            p.refused,
            p.rms_np,
            p.max_np,
            db(p.rms_np),
            db(p.max_np)
        );
    }
    if let Some(f) = out.noise_floor_np {
        let _ = writeln!(s, "noise floor (scatter of repeats): {:.3e} Np = {:.3e} dB", f, db(f));
    }
    if !out.cv.is_empty() {
        let _ = writeln!(s, "cross-validation (leave one interior set-point out), error in x:");
        for r in &out.cv {
            let _ = writeln!(
                s,
                "  {} {:<52} rms {:.3e} Np  max {:.3e} Np  ({} folds)",
                if r.chosen { "*" } else { " " },
                r.spec.describe(),
                r.rms,
                r.max,
                r.folds
            );
        }
    }
    for n in &out.notes {
        let _ = writeln!(s, "note: {n}");
    }
    let _ =
        writeln!(s, "dB figures are 10·log10 (power-like ratios); for amplitude-like ratios double them.");
    s
}

#[cfg(test)]
mod tests;
