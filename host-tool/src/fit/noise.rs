//! The unit's own noise in codes, measured robustly from the scatter of its repeats: what the glitch and
//! unsettled screens judge against, and the noise floor the fit's figures are compared with.
//!
//! # The model
//!
//! A reading's code scatters about the model by the converter's noise and by the noise of the temperature
//! reading carried through the model's temperature dependence:
//!
//! ```text
//! var(code − model(x, T_measured)) = σ_c² + (∂code/∂T · σ_T)²
//! ```
//!
//! The second term is not small: on an uncompensated front end ∂code/∂T reaches a few hundred codes per
//! kelvin at the hot low end (the bias-current bend), so 0.05 K of sensor noise there is ten times the
//! converter's. A single pooled figure would call every reading at the bend a glitch.
//!
//! # The estimate
//!
//! Repeats (same set-point, same ratio) see the same x at nearly the same temperature, so the difference of
//! two repeats' residuals holds no model misfit and has variance `2·(σ_c² + g_T²σ_T²)`. Where the data
//! give at least [`MIN_PAIRS`] such pairs they are used; otherwise the residuals themselves (variance
//! `σ_c² + g_T²σ_T²`, model misfit included).
//!
//! A robust start comes from up to [`MAX_BINS`] bins of equal count in `g_T²`: each bin's bisquare M-scale
//! ([`super::robust::m_scale_quantised`]: glitches left in do not inflate it) against its mean `g_T²`. A
//! bin mixes rows of small and large `g_T`, and its robust scale follows the many small ones, so the
//! variance function is then fitted to the values themselves: `σ_c²` and `σ_T²` by iterated generalised
//! least squares of the squared values on `(1, g_T²)`, each weighted by the inverse of its variance
//! (`1/var²`, the Gaussian variance of a squared value being `2·var²`), non-negative, values beyond 3.5 of
//! their own σ left out (glitches) and the trimmed Gaussian's consistency factor put back. `σ_c` is never
//! taken below [`MIN_CODES_RMS`].

use serde::Serialize;

use super::robust::m_scale_quantised;

/// Fewest repeat pairs for the repeat-based estimate.
pub const MIN_PAIRS: usize = 20;
/// Most bins in `g_T²`.
pub const MAX_BINS: usize = 8;
/// Values per bin aimed at.
const PER_BIN: usize = 50;
/// The smallest converter noise used, LSB rms: below it the scatter is mostly quantisation (√(1/12) ≈ 0.29
/// LSB rms, common practice), whose errors are bounded, not Gaussian, so a Gaussian tail test on a smaller
/// figure would call a one-code difference a glitch.
pub const MIN_CODES_RMS: f64 = 0.5;

/// What the noise was measured from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NoiseBasis {
    /// Differences of repeats' residuals (same set-point, same ratio).
    Repeats,
    /// The fit's residuals (too few repeats): model misfit counts as noise.
    Residuals,
}

/// The unit's noise in codes (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct NoiseModel {
    /// σ_c: the converter's noise (and everything else that does not follow ∂code/∂T), LSB rms.
    pub codes_rms: f64,
    /// σ_T: the temperature reading's noise as the codes see it, K rms.
    pub temperature_k_rms: f64,
    /// What it was measured from.
    pub basis: NoiseBasis,
    /// Repeat pairs or rows it was measured from.
    pub samples: usize,
}

impl NoiseModel {
    /// The standard deviation of a reading's code about the model where ∂code/∂T is `dcode_dt`, LSB.
    pub fn sigma_codes(&self, dcode_dt: f64) -> f64 {
        let t = dcode_dt * self.temperature_k_rms;
        (self.codes_rms * self.codes_rms + t * t).sqrt()
    }

    /// Estimates the model from `values` (repeat-pair differences of residuals when `pairs`, else residuals),
    /// each with its `g_T²` (for a pair, the mean of the two rows'). `None` for fewer than 3 values.
    pub fn estimate(values: &[(f64, f64)], pairs: bool) -> Option<NoiseModel> {
        let per_value = if pairs { 2.0 } else { 1.0 };
        let mut v: Vec<(f64, f64)> =
            values.iter().copied().filter(|(d, g)| d.is_finite() && g.is_finite()).collect();
        if v.len() < 3 {
            return None;
        }
        v.sort_by(|a, b| a.1.total_cmp(&b.1));
        // A robust start: each bin's M-scale against its mean g².
        let bins = (v.len() / PER_BIN).clamp(1, MAX_BINS);
        let mut pts: Vec<(f64, f64, f64)> = Vec::with_capacity(bins);
        for b in 0..bins {
            let chunk = &v[b * v.len() / bins..(b + 1) * v.len() / bins];
            if chunk.is_empty() {
                continue;
            }
            let d: Vec<f64> = chunk.iter().map(|p| p.0).collect();
            let s = m_scale_quantised(&d, 1.0)?;
            let g2 = chunk.iter().map(|p| p.1).sum::<f64>() / chunk.len() as f64;
            let var = (s * s / per_value).max(1e-12);
            pts.push((g2, var, chunk.len() as f64 / (var * var)));
        }
        let (mut a, mut b) = nonneg_line(&pts);
        a = a.max(MIN_CODES_RMS * MIN_CODES_RMS);
        // Then the variance function by iterated generalised least squares on the squared values (each
        // weighted by its variance's inverse, 1/var²), values beyond TRIM_Z of their own σ left out: a bin
        // mixes small and large g², and its robust scale follows the many small ones.
        let consistency = trim_consistency();
        for _ in 0..MAX_GLS_ITERATIONS {
            let pts: Vec<(f64, f64, f64)> = v
                .iter()
                .filter_map(|&(d, g2)| {
                    let var = a + b * g2;
                    let y = d * d / per_value;
                    (y <= TRIM_Z * TRIM_Z * var).then(|| (g2, y / consistency, 1.0 / (var * var)))
                })
                .collect();
            if pts.len() < 3 {
                break;
            }
            let (na, nb) = nonneg_line(&pts);
            let na = na.max(MIN_CODES_RMS * MIN_CODES_RMS);
            let done = (na - a).abs() <= 1e-9 * a && (nb - b).abs() <= 1e-9 * b.max(1e-30);
            (a, b) = (na, nb);
            if done {
                break;
            }
        }
        Some(NoiseModel {
            codes_rms: a.sqrt().max(MIN_CODES_RMS),
            temperature_k_rms: b.sqrt(),
            basis: if pairs { NoiseBasis::Repeats } else { NoiseBasis::Residuals },
            samples: v.len(),
        })
    }
}

/// Values beyond this many of their own σ are left out of the variance fit (glitches).
const TRIM_Z: f64 = 3.5;
/// `E[Z² | |Z| ≤ c]` for a standard normal Z and c = [`TRIM_Z`]: `1 − 2c·φ(c)/(1 − 2(1 − Φ(c)))` (0.9939),
/// which the values kept are divided by so that the trimmed fit is the Gaussian variance.
fn trim_consistency() -> f64 {
    use statrs::distribution::{Continuous, ContinuousCDF, Normal};
    let n = Normal::standard();
    1.0 - 2.0 * TRIM_Z * n.pdf(TRIM_Z) / (1.0 - 2.0 * (1.0 - n.cdf(TRIM_Z)))
}
/// Most iterations of the variance fit.
const MAX_GLS_ITERATIONS: usize = 50;

/// The non-negative `(a, b)` of `y = a + b·x` through weighted points `(x, y, w)`.
fn nonneg_line(pts: &[(f64, f64, f64)]) -> (f64, f64) {
    let sum = |f: &dyn Fn(&(f64, f64, f64)) -> f64| pts.iter().map(|p| p.2 * f(p)).sum::<f64>();
    let s = sum(&|_| 1.0);
    let fit_const = || (sum(&|p| p.1) / s, 0.0);
    if pts.len() < 2 || s.is_nan() || s <= 0.0 {
        return if s > 0.0 { fit_const() } else { (0.0, 0.0) };
    }
    let (sx, sy, sxx, sxy) = (sum(&|p| p.0), sum(&|p| p.1), sum(&|p| p.0 * p.0), sum(&|p| p.0 * p.1));
    let det = s * sxx - sx * sx;
    if det.is_nan() || det <= 1e-12 * s * sxx {
        return fit_const();
    }
    let b = (s * sxy - sx * sy) / det;
    let a = (sy - b * sx) / s;
    match (a >= 0.0, b >= 0.0) {
        (true, true) => (a, b),
        (false, _) if sxx > 0.0 && sxy > 0.0 => (0.0, sxy / sxx),
        _ => fit_const(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, StandardNormal};

    #[test]
    fn recovers_converter_and_temperature_noise_from_repeat_pairs() {
        // Pairs of repeats whose residual difference has variance 2(σc² + g²σT²), σc = 0.8 LSB, σT = 0.05 K,
        // g from 0 to 300 codes/K (seeded): both terms come back within a few per cent.
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        let mut v = Vec::new();
        for k in 0..3000 {
            let g = 300.0 * (k as f64 / 3000.0).powi(3);
            let sd = (0.8f64.powi(2) + (g * 0.05f64).powi(2)).sqrt();
            let a: f64 = StandardNormal.sample(&mut rng);
            let b: f64 = StandardNormal.sample(&mut rng);
            v.push((sd * (a - b), g * g));
        }
        let m = NoiseModel::estimate(&v, true).unwrap();
        assert!((m.codes_rms / 0.8 - 1.0).abs() < 0.08, "{m:?}");
        assert!((m.temperature_k_rms / 0.05 - 1.0).abs() < 0.08, "{m:?}");
        // A few gross glitches left in do not move it much.
        for p in v.iter_mut().step_by(100) {
            p.0 = 3000.0;
        }
        let g = NoiseModel::estimate(&v, true).unwrap();
        assert!((g.codes_rms / m.codes_rms - 1.0).abs() < 0.15, "{g:?} vs {m:?}");
        assert!((g.temperature_k_rms / m.temperature_k_rms - 1.0).abs() < 0.15, "{g:?} vs {m:?}");
    }

    #[test]
    fn quiet_converters_are_floored_at_half_an_lsb() {
        let v: Vec<(f64, f64)> = (0..200).map(|i| (if i % 7 == 0 { 1.0 } else { 0.0 }, 0.0)).collect();
        let m = NoiseModel::estimate(&v, true).unwrap();
        assert_eq!(m.codes_rms, MIN_CODES_RMS);
    }
}
