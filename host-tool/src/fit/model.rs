//! The fitted forward model: its size ([`Spec`]), its parameters ([`Params`]), prediction and Jacobian,
//! and the translation into firmware-lib's [`Calibration`].
//!
//! The model is the one documented in `logtrim::calibration`:
//!
//! ```text
//! code − L = [ P_c(τ) + ρ·(T_K/T_ref)·β + (T_K/T_ref)·P_s(τ)·ln(e^x + β) + P_h(τ)·e^x ] / (1 + q·τ)
//! β = exp(b₀ + b₁τ)
//! ```
//!
//! It is linear in the Chebyshev coefficients of `P_c`, `P_s`, `P_h` and in ρ, and non-linear in `q`, `b₀`,
//! `b₁`.

use logtrim::calibration::{
    AdcScaling, BiasTerm, Calibration, Model, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL,
    MAX_SERIES,
};
use serde::Serialize;

/// The size of a model: which terms it has and how many coefficients each carries.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
pub struct Spec {
    /// Chebyshev terms of the offset numerator P_c (1..=MAX_SERIES).
    pub offset_terms: usize,
    /// Chebyshev terms of the slope numerator P_s (1..=MAX_SERIES).
    pub slope_terms: usize,
    /// Chebyshev terms of the bulk-resistance numerator P_h (0 = no high-end bend).
    pub bulk_terms: usize,
    /// Whether the gain pole q (a compensating resistor's tempco) is fitted.
    pub pole: bool,
    /// Whether the bias-current term β(τ) is fitted.
    pub bias: bool,
    /// Chebyshev terms in ξ of the generic residual R(ξ, τ) (0 = no residual).
    pub residual_x: usize,
    /// Chebyshev terms in τ of the generic residual (0 = no residual).
    pub residual_t: usize,
}

impl Spec {
    /// Number of linear parameters (ρ comes with the bias term).
    pub fn n_linear(&self) -> usize {
        self.offset_terms + self.slope_terms + self.bulk_terms + usize::from(self.bias)
    }
    /// Number of parameters refined by Levenberg–Marquardt (all but the generic residual's).
    pub fn n_params(&self) -> usize {
        self.n_linear() + usize::from(self.pole) + 2 * usize::from(self.bias)
    }
    /// The largest number of coefficients of any series over temperature.
    pub fn temperature_terms(&self) -> usize {
        self.offset_terms.max(self.slope_terms).max(self.bulk_terms)
    }
    /// A short text such as `offset 3, slope 2, bulk 1, pole, bias`.
    pub fn describe(&self) -> String {
        self.terms(" ").join(", ")
    }

    /// The size in the form [`Spec::parse`] reads (for `--model`), such as
    /// `offset=3,slope=2,bulk=1,pole,bias`.
    pub fn to_arg(&self) -> String {
        self.terms("=").join(",")
    }

    /// Each term of the size, a count written after `is`.
    fn terms(&self, is: &str) -> Vec<String> {
        let mut t = vec![
            format!("offset{is}{}", self.offset_terms),
            format!("slope{is}{}", self.slope_terms),
            format!("bulk{is}{}", self.bulk_terms),
        ];
        if self.pole {
            t.push("pole".into());
        }
        if self.bias {
            t.push("bias".into());
        }
        if self.has_residual() {
            t.push(format!("residual{is}{}x{}", self.residual_x, self.residual_t));
        }
        t
    }

    /// Parses a size such as `offset=3,slope=2,bulk=1,pole,bias,residual=3x2` (terms not named are off;
    /// offset and slope default to 2 and 1 terms).
    pub fn parse(text: &str) -> Result<Spec, String> {
        let mut s = Spec {
            offset_terms: 2,
            slope_terms: 1,
            bulk_terms: 0,
            pole: false,
            bias: false,
            residual_x: 0,
            residual_t: 0,
        };
        if text.trim().is_empty() {
            return Err("no model terms: expected e.g. offset=3,slope=2,bulk=1,pole,bias,residual=3x2".into());
        }
        let mut seen: Vec<&str> = Vec::new();
        for part in text.split(',').map(str::trim) {
            if part.is_empty() {
                return Err(format!("{text:?} has an empty term (two commas in a row, or one at an end)"));
            }
            let (key, value) = match part.split_once('=') {
                Some((k, v)) => (k.trim(), Some(v.trim())),
                None => (part, None),
            };
            if seen.contains(&key) {
                return Err(format!("{key:?} is given twice; give each term once"));
            }
            seen.push(key);
            let count = |v: Option<&str>| -> Result<usize, String> {
                v.ok_or_else(|| format!("{key:?} needs a number of terms, e.g. {key}=2"))?
                    .parse::<usize>()
                    .map_err(|_| format!("{key:?}: {:?} is not a whole number", v.unwrap_or("")))
            };
            match key {
                "offset" => s.offset_terms = count(value)?,
                "slope" => s.slope_terms = count(value)?,
                "bulk" => s.bulk_terms = count(value)?,
                "pole" if value.is_none() => s.pole = true,
                "bias" if value.is_none() => s.bias = true,
                "residual" => {
                    let v = value.ok_or("\"residual\" needs a size such as residual=3x2")?;
                    let (a, b) = v.split_once('x').ok_or(format!("residual size {v:?} is not of the form NxM"))?;
                    s.residual_x = a.trim().parse().map_err(|_| format!("residual size {v:?} is not NxM"))?;
                    s.residual_t = b.trim().parse().map_err(|_| format!("residual size {v:?} is not NxM"))?;
                    if s.residual_x == 0 || s.residual_t == 0 {
                        return Err(format!(
                            "residual size {v:?}: both counts must be at least 1 (leave the term out for no residual)"
                        ));
                    }
                }
                other => {
                    return Err(format!(
                        "unknown model term {other:?}: expected offset=N, slope=N, bulk=N, pole, bias, residual=NxM"
                    ))
                }
            }
        }
        if s.offset_terms == 0
            || s.slope_terms == 0
            || s.offset_terms > MAX_SERIES
            || s.slope_terms > MAX_SERIES
        {
            return Err(format!("offset and slope take 1..={MAX_SERIES} terms"));
        }
        if s.bulk_terms > MAX_SERIES || s.residual_x > MAX_RESIDUAL || s.residual_t > MAX_RESIDUAL {
            return Err(format!(
                "bulk takes at most {MAX_SERIES} terms, residual at most {MAX_RESIDUAL}x{MAX_RESIDUAL}"
            ));
        }
        Ok(s)
    }

    /// Whether the generic residual is part of the model.
    pub fn has_residual(&self) -> bool {
        self.residual_x > 0 && self.residual_t > 0
    }
}

/// The normalisation of a fit's variables.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Norm {
    /// L: level-shift code subtracted from every code.
    pub level: f64,
    /// T_c, °C.
    pub t_center_c: f64,
    /// T_h, K.
    pub t_half_span_k: f64,
    /// T_ref, K.
    pub t_ref_k: f64,
    /// x_c: centre of the x normalisation ξ of the residual.
    pub x_center: f64,
    /// x_h: half span of the x normalisation.
    pub x_half_span: f64,
}

impl Norm {
    /// τ of a temperature in °C.
    pub fn tau(&self, temp_c: f64) -> f64 {
        (temp_c - self.t_center_c) / self.t_half_span_k
    }
}

/// A model's parameters.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Params {
    /// The model size.
    pub spec: Spec,
    /// P_c coefficients, codes.
    pub offset: Vec<f64>,
    /// P_s coefficients, codes per neper at T_ref.
    pub slope: Vec<f64>,
    /// P_h coefficients, codes per unit ratio.
    pub bulk: Vec<f64>,
    /// q.
    pub pole: f64,
    /// b₀, b₁ of β(τ) = exp(b₀ + b₁τ).
    pub ln_beta: [f64; 2],
    /// ρ: the reference input's bias term, codes.
    pub bias_ref: f64,
    /// Coefficients r_ij of the generic residual, at index `i·residual_t + j`.
    pub residual: Vec<f64>,
}

/// One calibration row, prepared for the fit.
#[derive(Debug, Clone, Copy)]
pub struct Prep {
    /// τ of the measured temperature.
    pub tau: f64,
    /// ξ of x.
    pub xi: f64,
    /// T_K/T_ref.
    pub ptat: f64,
    /// x = ln ratio.
    pub x: f64,
    /// e^x.
    pub ex: f64,
    /// code − L.
    pub code: f64,
    /// √weight.
    pub sw: f64,
}

impl Prep {
    /// Prepares a row.
    pub fn new(norm: &Norm, code: f64, temp_c: f64, x: f64, weight: f64) -> Prep {
        Prep {
            tau: norm.tau(temp_c),
            xi: (x - norm.x_center) / norm.x_half_span,
            ptat: (temp_c + logtrim::physics::ZERO_CELSIUS_K) / norm.t_ref_k,
            x,
            ex: x.exp(),
            code: code - norm.level,
            sw: weight.sqrt(),
        }
    }
}

/// Chebyshev polynomials T_0..T_{n-1} at t.
pub fn chebyshev(t: f64, out: &mut [f64; MAX_SERIES]) {
    out[0] = 1.0;
    out[1] = t;
    for k in 2..MAX_SERIES {
        out[k] = 2.0 * t * out[k - 1] - out[k - 2];
    }
}

fn dot(c: &[f64], t: &[f64; MAX_SERIES]) -> f64 {
    c.iter().zip(t.iter()).map(|(a, b)| a * b).sum()
}

impl Params {
    /// Zero parameters of a spec, with the non-linear ones at neutral values.
    pub fn zero(spec: Spec) -> Params {
        Params {
            spec,
            offset: vec![0.0; spec.offset_terms],
            slope: vec![0.0; spec.slope_terms],
            bulk: vec![0.0; spec.bulk_terms],
            pole: 0.0,
            ln_beta: [-30.0, 0.0],
            bias_ref: 0.0,
            residual: vec![0.0; spec.residual_x * spec.residual_t],
        }
    }

    /// β at τ (0 when the term is off).
    pub fn beta(&self, tau: f64) -> f64 {
        if self.spec.bias {
            (self.ln_beta[0] + self.ln_beta[1] * tau).exp()
        } else {
            0.0
        }
    }

    /// The predicted code − L of a row.
    pub fn predict(&self, p: &Prep) -> f64 {
        let mut t = [0.0; MAX_SERIES];
        chebyshev(p.tau, &mut t);
        let beta = self.beta(p.tau);
        let z = (p.ex + beta).ln();
        let num = dot(&self.offset, &t)
            + self.bias_ref * p.ptat * beta
            + p.ptat * z * dot(&self.slope, &t)
            + p.ex * dot(&self.bulk, &t);
        num / (1.0 + self.pole * p.tau)
    }

    /// The parameter vector in the order: offset, slope, bulk, (ρ), (pole), (b₀, b₁), the parenthesised
    /// ones only where the spec has them.
    pub fn to_vec(&self) -> Vec<f64> {
        let mut v = Vec::with_capacity(self.spec.n_params());
        v.extend_from_slice(&self.offset);
        v.extend_from_slice(&self.slope);
        v.extend_from_slice(&self.bulk);
        if self.spec.bias {
            v.push(self.bias_ref);
        }
        if self.spec.pole {
            v.push(self.pole);
        }
        if self.spec.bias {
            v.extend_from_slice(&self.ln_beta);
        }
        v
    }

    /// Sets parameters from a vector in the order of [`Params::to_vec`].
    pub fn set_vec(&mut self, v: &[f64]) {
        let s = self.spec;
        let mut it = v.iter().copied();
        for c in self.offset.iter_mut().chain(self.slope.iter_mut()).chain(self.bulk.iter_mut()) {
            *c = it.next().unwrap_or(0.0);
        }
        if s.bias {
            self.bias_ref = it.next().unwrap_or(0.0);
        }
        if s.pole {
            self.pole = it.next().unwrap_or(0.0);
        }
        if s.bias {
            self.ln_beta[0] = it.next().unwrap_or(-30.0);
            self.ln_beta[1] = it.next().unwrap_or(0.0);
        }
    }

    /// Sets the linear parameters from a vector in the order offset, slope, bulk, (ρ where the spec has it).
    pub fn set_linear(&mut self, v: &[f64]) {
        let mut it = v.iter().copied();
        for c in self.offset.iter_mut().chain(self.slope.iter_mut()).chain(self.bulk.iter_mut()) {
            *c = it.next().unwrap_or(0.0);
        }
        if self.spec.bias {
            self.bias_ref = it.next().unwrap_or(0.0);
        }
    }

    /// One row of the linear design (already multiplied by √w / den), for the current non-linear values.
    pub fn linear_row(&self, p: &Prep, out: &mut Vec<f64>) {
        let mut t = [0.0; MAX_SERIES];
        chebyshev(p.tau, &mut t);
        let f = p.sw / (1.0 + self.pole * p.tau);
        let beta = self.beta(p.tau);
        let z = (p.ex + beta).ln();
        out.clear();
        out.extend(t.iter().take(self.spec.offset_terms).map(|v| v * f));
        out.extend(t.iter().take(self.spec.slope_terms).map(|v| v * f * p.ptat * z));
        out.extend(t.iter().take(self.spec.bulk_terms).map(|v| v * f * p.ex));
        if self.spec.bias {
            out.push(f * p.ptat * beta);
        }
    }

    /// The residual √w·(code − prediction) and its gradient with respect to the parameter vector
    /// (the Jacobian row of the residual, i.e. −√w·∂prediction/∂p).
    pub fn residual_and_gradient(&self, p: &Prep, grad: &mut Vec<f64>) -> f64 {
        let s = self.spec;
        let mut t = [0.0; MAX_SERIES];
        chebyshev(p.tau, &mut t);
        let den = 1.0 + self.pole * p.tau;
        let beta = self.beta(p.tau);
        let z = (p.ex + beta).ln();
        let ps = dot(&self.slope, &t);
        let num = dot(&self.offset, &t)
            + self.bias_ref * p.ptat * beta
            + p.ptat * z * ps
            + p.ex * dot(&self.bulk, &t);
        let pred = num / den;
        let g = -p.sw / den;
        grad.clear();
        grad.extend(t.iter().take(s.offset_terms).map(|v| v * g));
        grad.extend(t.iter().take(s.slope_terms).map(|v| v * g * p.ptat * z));
        grad.extend(t.iter().take(s.bulk_terms).map(|v| v * g * p.ex));
        if s.bias {
            grad.push(g * p.ptat * beta);
        }
        if s.pole {
            grad.push(p.sw * p.tau * num / (den * den));
        }
        if s.bias {
            let d = g * p.ptat * (ps / (p.ex + beta) + self.bias_ref) * beta;
            grad.push(d);
            grad.push(d * p.tau);
        }
        p.sw * (p.code - pred)
    }

    /// The generic residual R(ξ, τ) at a row, nepers.
    pub fn residual_at(&self, p: &Prep) -> f64 {
        if !self.spec.has_residual() {
            return 0.0;
        }
        let mut tx = [0.0; MAX_SERIES];
        let mut tt = [0.0; MAX_SERIES];
        chebyshev(p.xi, &mut tx);
        chebyshev(p.tau, &mut tt);
        let nt = self.spec.residual_t;
        self.residual.iter().enumerate().map(|(k, c)| c * tx[k / nt] * tt[k % nt]).sum()
    }

    /// ∂prediction/∂x at a row (codes per neper), used to turn code residuals into x errors.
    pub fn dcode_dx(&self, p: &Prep) -> f64 {
        let mut t = [0.0; MAX_SERIES];
        chebyshev(p.tau, &mut t);
        let den = 1.0 + self.pole * p.tau;
        let beta = self.beta(p.tau);
        (p.ptat * dot(&self.slope, &t) * p.ex / (p.ex + beta) + p.ex * dot(&self.bulk, &t)) / den
    }
}

/// Ranges and ADC settings recorded in a calibration.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Envelope {
    /// ADC scaling (bits, rail margin); the level shift is taken from the fit's normalisation.
    pub bits: u8,
    /// Codes within this many of either rail are refused as saturated.
    pub rail_margin: u32,
    /// The calibrated temperature range.
    pub temperature: TemperatureRange,
    /// The calibrated x range.
    pub x_range: XRange,
}

impl Envelope {
    /// An envelope that accepts everything the model can evaluate (for cross-validation and residuals).
    pub fn open(bits: u8) -> Envelope {
        Envelope {
            bits,
            rail_margin: 0,
            temperature: TemperatureRange { min_c: -200.0, max_c: 500.0, extrapolation_k: 0.0 },
            x_range: XRange { min: -80.0, max: 80.0, min_sensitivity: 0.0 },
        }
    }
}

fn series(c: &[f64]) -> Series {
    let v: Vec<f32> = c.iter().map(|&v| v as f32).collect();
    Series::from_slice(&v).unwrap_or(Series::ZERO)
}

/// The firmware calibration of fitted parameters.
pub fn to_calibration(params: &Params, norm: &Norm, env: &Envelope) -> Calibration {
    Calibration {
        adc: AdcScaling { bits: env.bits, rail_margin: env.rail_margin, level_shift_code: norm.level as f32 },
        temperature: env.temperature,
        x_range: env.x_range,
        model: Model {
            t_center_c: norm.t_center_c as f32,
            t_half_span_k: norm.t_half_span_k as f32,
            t_ref_k: norm.t_ref_k as f32,
            pole: if params.spec.pole { params.pole as f32 } else { 0.0 },
            offset: series(&params.offset),
            slope: series(&params.slope),
            bulk: series(&params.bulk),
            bias: if params.spec.bias {
                BiasTerm {
                    enabled: true,
                    ln_beta0: params.ln_beta[0] as f32,
                    ln_beta1: params.ln_beta[1] as f32,
                    reference: params.bias_ref as f32,
                }
            } else {
                BiasTerm::OFF
            },
            residual: residual(params, norm),
        },
    }
}

fn residual(params: &Params, norm: &Norm) -> Residual {
    let s = params.spec;
    if !s.has_residual() || s.residual_x > MAX_RESIDUAL || s.residual_t > MAX_RESIDUAL {
        return Residual::OFF;
    }
    let mut r = Residual {
        nx: s.residual_x as u8,
        nt: s.residual_t as u8,
        x_center: norm.x_center as f32,
        x_half_span: norm.x_half_span as f32,
        ..Residual::OFF
    };
    for (k, c) in params.residual.iter().enumerate() {
        let (i, j) = (k / s.residual_t, k % s.residual_t);
        r.coeffs[i * MAX_RESIDUAL + j] = *c as f32;
    }
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec() -> Spec {
        Spec {
            offset_terms: 3,
            slope_terms: 2,
            bulk_terms: 1,
            pole: true,
            bias: true,
            residual_x: 2,
            residual_t: 2,
        }
    }

    fn params() -> Params {
        let mut p = Params::zero(spec());
        p.offset = vec![120.0, 30.0, -5.0];
        p.slope = vec![5600.0, 40.0];
        p.bulk = vec![9.0];
        p.pole = -0.15;
        p.ln_beta = [-9.0, 3.5];
        p.bias_ref = -4.0;
        p.residual = vec![0.002, -0.001, 0.0005, 0.0003];
        p
    }

    fn norm() -> Norm {
        Norm {
            level: 30000.0,
            t_center_c: 32.5,
            t_half_span_k: 52.5,
            t_ref_k: 305.65,
            x_center: -1.0,
            x_half_span: 5.5,
        }
    }

    #[test]
    fn prediction_matches_the_firmware_forward_model() {
        let norm = norm();
        let p = params();
        let cal = to_calibration(&p, &norm, &Envelope::open(16));
        for (x, t) in [(-6.0, -20.0), (0.0, 25.0), (4.0, 85.0), (-3.0, 60.0)] {
            let row = Prep::new(&norm, 0.0, t, x, 1.0);
            let mine = p.predict(&row) + norm.level;
            let mut plain = cal;
            plain.model.residual = Residual::OFF;
            let fw = plain.forward_code_f64(x, t);
            // The firmware stores f32 coefficients: agreement to ~1e-6 relative of the largest term.
            assert!((mine - fw).abs() < 0.05, "x={x} t={t}: {mine} vs {fw}");
            // The residual acts in the inverse direction: x = x0 + R(ξ(x0), τ).
            let code = cal.forward_code_f64(x, t);
            let x0 = plain.correct_f64(code, t).unwrap().x;
            let xi = (x0 - norm.x_center) / norm.x_half_span;
            let r = p.residual_at(&Prep { xi, ..row });
            assert!((x0 + r - x).abs() < 1e-6, "residual at x={x} t={t}: {x0} + {r} vs {x}");
        }
    }

    #[test]
    fn spec_parses_and_refuses() {
        assert_eq!(Spec::parse("offset=3,slope=2,bulk=1,pole,bias,residual=2x2"), Ok(spec()));
        assert_eq!(Spec::parse(&spec().to_arg()), Ok(spec()));
        assert!(Spec::parse("offset=0").is_err());
        assert!(Spec::parse("offset=x").unwrap_err().contains("not a whole number"));
        assert!(Spec::parse("wobble").unwrap_err().contains("unknown model term"));
        // A residual with no terms on one axis is no residual: refused, so a size always round-trips.
        assert!(Spec::parse("offset=3,residual=0x2").unwrap_err().contains("at least 1"));
        assert!(Spec::parse("offset=3,residual=2x0").is_err());
        assert!(Spec::parse("residual=9x1").is_err());
    }

    #[test]
    fn gradient_matches_finite_differences() {
        let norm = norm();
        let p = params();
        let row = Prep::new(&norm, 31000.0, 70.0, -5.0, 2.0);
        let mut g = Vec::new();
        let r0 = p.residual_and_gradient(&row, &mut g);
        let v = p.to_vec();
        for i in 0..v.len() {
            let h = 1e-6 * v[i].abs().max(1e-3);
            let mut q = p.clone();
            let mut w = v.clone();
            w[i] += h;
            q.set_vec(&w);
            let mut g2 = Vec::new();
            let r1 = q.residual_and_gradient(&row, &mut g2);
            let fd = (r1 - r0) / h;
            assert!((fd - g[i]).abs() <= 1e-4 + 1e-4 * g[i].abs(), "param {i}: fd {fd} vs {}", g[i]);
        }
    }
}
