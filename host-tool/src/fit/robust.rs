//! Robust statistics of the fit's screens: an M-estimate of scale that outliers do not inflate, the
//! thresholds that a false-alarm budget sets, and the variance of a small sample's median.
//!
//! # Scale
//!
//! [`m_scale`] is the M-estimate of scale with Tukey's bisquare ρ (common practice in robust regression):
//! the `s` that solves `mean ρ(dᵢ/s) = δ`, with `δ = E ρ(Z)` for a standard normal Z, so that it is the
//! standard deviation on Gaussian data. With the tuning constant [`BISQUARE_SCALE_C`] δ is one half, and so
//! is its breakdown point: up to half of the values may be arbitrarily wrong before the estimate follows
//! them. Unlike a median of absolute deviations it is a smooth function of the data, so it stays sensible on
//! quantised codes where many differences are exactly zero.
//!
//! # Thresholds
//!
//! A screen that judges `n` values on Gaussian noise and should reject, on average, at most `budget` of
//! them rejects beyond `|z| = Φ⁻¹(1 − budget/(2n))` ([`z_threshold`]); a χ² test repeated `n` times uses
//! the χ² quantile at `1 − budget/n` ([`chi2_threshold`]). The quantiles are statrs's.

use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};

/// The bisquare tuning constant of a 50 %-breakdown M-scale (Rousseeuw and Yohai's S-estimator choice,
/// from memory; the consistency constant δ is computed from it by [`bisquare_delta`], so a slightly
/// different constant only moves the breakdown point, never the consistency at the Gaussian).
pub const BISQUARE_SCALE_C: f64 = 1.547_645;

/// Most iterations of the M-scale's fixed-point iteration (it converges in a few dozen).
const MAX_SCALE_ITERATIONS: usize = 500;

/// Tukey's bisquare ρ, normalised to 1 beyond `c`.
pub fn bisquare_rho(u: f64, c: f64) -> f64 {
    let t = (u / c) * (u / c);
    if t >= 1.0 {
        1.0
    } else {
        1.0 - (1.0 - t) * (1.0 - t) * (1.0 - t)
    }
}

/// Tukey's bisquare weight ψ(u)/u, zero beyond `c`.
pub fn bisquare_weight(u: f64, c: f64) -> f64 {
    let t = (u / c) * (u / c);
    if t >= 1.0 {
        0.0
    } else {
        (1.0 - t) * (1.0 - t)
    }
}

/// `E ρ(Z)` of the bisquare ρ with constant `c` for a standard normal Z, by Simpson's rule on `[0, c]`
/// (2000 panels: the integrand is a polynomial times the normal density) plus the tail mass beyond `c`.
pub fn bisquare_delta(c: f64) -> f64 {
    let normal = Normal::standard();
    let density = |u: f64| (-0.5 * u * u).exp() / (2.0 * std::f64::consts::PI).sqrt();
    let f = |u: f64| bisquare_rho(u, c) * density(u);
    let panels = 2000;
    let h = c / panels as f64;
    let mut s = f(0.0) + f(c);
    for k in 1..panels {
        s += if k % 2 == 1 { 4.0 } else { 2.0 } * f(h * k as f64);
    }
    2.0 * (s * h / 3.0) + 2.0 * (1.0 - normal.cdf(c))
}

fn delta() -> f64 {
    static DELTA: std::sync::OnceLock<f64> = std::sync::OnceLock::new();
    *DELTA.get_or_init(|| bisquare_delta(BISQUARE_SCALE_C))
}

/// The median of `v` (the mean of the middle two for an even count); `None` for no values.
pub fn median(v: &[f64]) -> Option<f64> {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| !x.is_nan()).collect();
    if s.is_empty() {
        return None;
    }
    s.sort_by(f64::total_cmp);
    let m = s.len() / 2;
    Some(if s.len() % 2 == 1 { s[m] } else { 0.5 * (s[m - 1] + s[m]) })
}

/// The bisquare M-estimate of scale of `d` about zero (see the module docs): the Gaussian standard
/// deviation on clean data, with a breakdown point of one half. `None` for no finite values; 0 when more
/// than half of them are exactly zero.
pub fn m_scale(d: &[f64]) -> Option<f64> {
    m_scale_spread(d, 0.0)
}

/// Offsets at which each value is spread over its quantisation step by [`m_scale_quantised`].
const SPREAD_POINTS: usize = 8;

/// [`m_scale`] of values quantised to `step` (whole codes: 1): each value is spread evenly over one step
/// (at `SPREAD_POINTS` points). Without it, more than half the differences of quiet repeats are exactly
/// zero and a 50 %-breakdown scale collapses to nothing; with it the estimate is close to the rms of the
/// quantised values on Gaussian data, a little above it (the spread adds at most `step²/12` of variance),
/// which errs towards keeping a row.
pub fn m_scale_quantised(d: &[f64], step: f64) -> Option<f64> {
    m_scale_spread(d, step)
}

fn m_scale_spread(d: &[f64], step: f64) -> Option<f64> {
    let d: Vec<f64> = d.iter().copied().filter(|x| x.is_finite()).collect();
    if d.is_empty() {
        return None;
    }
    let delta = delta();
    let abs: Vec<f64> = d.iter().map(|x| x.abs()).collect();
    let mad = median(&abs).unwrap_or(0.0) * 1.4826;
    let rms = (d.iter().map(|x| x * x).sum::<f64>() / d.len() as f64).sqrt();
    let mut s = if mad > 0.0 { mad } else { rms }.max(step / 12f64.sqrt());
    if s == 0.0 {
        return Some(0.0);
    }
    let offsets: Vec<f64> = if step > 0.0 {
        (0..SPREAD_POINTS).map(|k| step * ((k as f64 + 0.5) / SPREAD_POINTS as f64 - 0.5)).collect()
    } else {
        vec![0.0]
    };
    let count = (d.len() * offsets.len()) as f64;
    for _ in 0..MAX_SCALE_ITERATIONS {
        let m = d
            .iter()
            .flat_map(|x| offsets.iter().map(move |o| x + o))
            .map(|x| bisquare_rho(x / s, BISQUARE_SCALE_C))
            .sum::<f64>()
            / count;
        let next = s * (m / delta).sqrt();
        if !(next > 0.0 && next.is_finite()) {
            return Some(0.0);
        }
        if (next - s).abs() <= 1e-12 * s {
            return Some(next);
        }
        s = next;
    }
    Some(s)
}

/// The two-sided |z| beyond which a value of standard normal noise is rejected so that, over `tests`
/// values, the expected number of false rejections is `budget`.
pub fn z_threshold(tests: usize, budget: f64) -> f64 {
    let p = (budget / tests.max(1) as f64).clamp(1e-300, 1.0);
    Normal::standard().inverse_cdf(1.0 - 0.5 * p)
}

/// The χ² value with `dof` degrees of freedom beyond which a test repeated `tests` times rejects, on
/// average, `budget` times under the null hypothesis.
pub fn chi2_threshold(dof: usize, tests: usize, budget: f64) -> f64 {
    let p = (budget / tests.max(1) as f64).clamp(1e-300, 1.0);
    match ChiSquared::new(dof.max(1) as f64) {
        Ok(c) => c.inverse_cdf(1.0 - p),
        Err(_) => f64::INFINITY,
    }
}

/// The variance of the median of `m` independent values of unit variance, for `m ≥ 1`: exact for one and
/// two values (the value, the mean), and the large-sample `π/(2m)` beyond, which overstates it for small `m`
/// (3 values: 0.524 against 0.449; common practice), so a test built on it errs towards keeping a row.
pub fn median_variance(m: usize) -> f64 {
    match m {
        0 => f64::INFINITY,
        1 => 1.0,
        2 => 0.5,
        _ => std::f64::consts::PI / (2.0 * m as f64),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, StandardNormal};

    fn gaussian(n: usize, sigma: f64, seed: u64) -> Vec<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        (0..n)
            .map(|_| {
                let z: f64 = StandardNormal.sample(&mut rng);
                sigma * z
            })
            .collect()
    }

    #[test]
    fn the_bisquare_constant_gives_half_breakdown() {
        // δ = E ρ(Z) is the breakdown point of the M-scale; with c = 1.5476 it is one half (Rousseeuw and
        // Yohai's choice, from memory), computed here by quadrature.
        let d = bisquare_delta(BISQUARE_SCALE_C);
        assert!((d - 0.5).abs() < 2e-4, "{d}");
    }

    #[test]
    fn m_scale_is_the_gaussian_sigma_on_clean_data() {
        // Seeded Gaussian samples: the estimate is within a few of its own standard errors of σ.
        for (seed, sigma) in [(1, 1.0), (2, 0.7), (3, 35.0)] {
            let v = gaussian(20_000, sigma, seed);
            let s = m_scale(&v).unwrap();
            assert!((s / sigma - 1.0).abs() < 0.03, "seed {seed}: {s} vs {sigma}");
        }
    }

    #[test]
    fn m_scale_ignores_a_minority_of_outliers() {
        let mut v = gaussian(2_000, 1.0, 4);
        for x in v.iter_mut().take(300) {
            *x = 3000.0;
        }
        let s = m_scale(&v).unwrap();
        // 15 % of gross outliers move a 50 %-breakdown scale by a bounded amount; the plain rms is ~1160.
        assert!(s < 1.6, "{s}");
    }

    #[test]
    fn m_scale_of_quantised_noise_is_its_rms() {
        // Gaussian noise of 0.7 LSB rounded to whole codes: the scale stays near the rms of the rounded values
        // (√(0.7² + 1/12) ≈ 0.757, the quantisation variance 1/12 being common practice).
        let v: Vec<f64> = gaussian(20_000, 0.7, 5).iter().map(|x| x.round()).collect();
        let rms = (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt();
        let s = m_scale_quantised(&v, 1.0).unwrap();
        assert!((s / rms - 1.0).abs() < 0.05, "{s} vs rms {rms}");
        // Without the spreading, more than half the values are exactly zero and the scale collapses.
        assert!(m_scale(&v).unwrap() < 0.1);
    }

    #[test]
    fn thresholds_follow_the_normal_and_chi_square_quantiles() {
        // Φ⁻¹(0.975) = 1.959964 and the χ²(3) 0.99 quantile 11.3449 (standard tables).
        assert!((z_threshold(1, 0.05) - 1.959_964).abs() < 1e-5);
        assert!((chi2_threshold(3, 1, 0.01) - 11.3449).abs() < 1e-3);
        // More tests, a higher bar.
        assert!(z_threshold(1000, 0.01) > z_threshold(100, 0.01));
    }
}
