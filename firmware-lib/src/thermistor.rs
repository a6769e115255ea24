//! NTC thermistors: the Beta model and the Steinhart–Hart equation, resistance ↔ temperature both ways.
//!
//! With `T` the absolute temperature and `R` the resistance in Ω:
//!
//! | model | R → T | T → R |
//! |---|---|---|
//! | [`Beta`] | `1/T = 1/T₀ + ln(R/R₀)/β` | `R = R₀·exp(β·(1/T − 1/T₀))` |
//! | [`SteinhartHart`] | `1/T = A + B·L + C·L³`, `L = ln R` | a root of `L³ + (B/C)·L + (A − 1/T)/C = 0` |
//!
//! The Beta model is the Steinhart–Hart equation with `C = 0`, `B = 1/β`, `A = 1/T₀ − ln R₀/β`
//! ([`Beta::to_steinhart_hart`]).
//!
//! The Steinhart–Hart inverse is solved in closed form without forming the large numbers `B/C` and
//! `(A − 1/T)/C`: with `k = √(B/(3|C|))` and `y = 3(A − 1/T)/(2·B·k)`,
//!
//! ```text
//! C > 0:  L = −2k·sinh(asinh(y)/3)        (the one real root)
//! C < 0:  L = −2k·sin(asin(y)/3), |y| ≤ 1 (the middle root: the branch where 1/T rises with L)
//! C = 0:  L = (1/T − A)/B
//! ```
//!
//! followed by one Newton step to polish the last bits. Both forms are free of cancellation for small `|C|`.
//!
//! Coefficients are stored in f32 (they live in calibration images). Every conversion exists in f32, for the
//! firmware, and in f64, for the host; both run the same generic body. The fits ([`Beta::from_points`],
//! [`SteinhartHart::from_points`]) are computed in f64 and rounded to f32 once.
//!
//! Resistances that the model cannot map to a temperature above absolute zero, or that fall on a branch
//! where the curve is not falling (resistance rising with temperature), give
//! [`SensorFault::OutOfModelRange`]; NaN or infinite inputs give [`Error::NonFinite`]; unusable
//! coefficients give [`CalibrationDefect::Coefficient`].

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use core::fmt;

use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::math::Real;
use crate::physics::ZERO_CELSIUS_K;

/// One point of a resistance–temperature curve, used to derive coefficients.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CurvePoint {
    /// Temperature, °C.
    pub celsius: f64,
    /// Resistance at that temperature, Ω.
    pub ohm: f64,
}

impl CurvePoint {
    /// A point at `celsius` °C and `ohm` Ω.
    pub const fn new(celsius: f64, ohm: f64) -> CurvePoint {
        CurvePoint { celsius, ohm }
    }
}

/// Why curve points do not give thermistor coefficients.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FitError {
    /// A temperature or resistance is NaN or infinite.
    NonFinite,
    /// A temperature is at or below absolute zero, or a resistance is zero or negative.
    NonPhysical,
    /// Two points share a temperature or a resistance, or the points make the system singular.
    Degenerate,
    /// The resistance does not fall as the temperature rises: not an NTC thermistor.
    NotNtc,
    /// The curve through the points is not monotone between them, or a coefficient does not fit in f32.
    NotMonotone,
}

impl fmt::Display for FitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            FitError::NonFinite => "a curve point is NaN or infinite",
            FitError::NonPhysical => "a curve point is at or below absolute zero or has a resistance ≤ 0 Ω",
            FitError::Degenerate => "curve points share a temperature or a resistance (singular system)",
            FitError::NotNtc => "resistance does not fall as temperature rises (not an NTC)",
            FitError::NotMonotone => {
                "the fitted curve is not monotone between the points or does not fit in f32"
            }
        })
    }
}

impl core::error::Error for FitError {}

/// The Beta model of an NTC thermistor: `R = R₀·exp(β·(1/T − 1/T₀))`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Beta {
    /// R₀: resistance at the reference temperature, Ω (> 0).
    pub r0_ohm: f32,
    /// T₀: the reference temperature, °C (commonly 25).
    pub t0_c: f32,
    /// β in K (> 0).
    pub beta_k: f32,
}

impl Beta {
    /// The Beta model through two curve points (any order), with the reference at the first point.
    ///
    /// ```
    /// use logtrim::thermistor::CurvePoint;
    /// use logtrim::Beta;
    ///
    /// // Two points of a 10 kΩ, β = 3950 K part, made with the Beta equation
    /// // R = R₀·exp(β·(1/T − 1/T₀)) (common practice), give its β back.
    /// let r50 = 10_000.0 * (3950.0 * (1.0 / 323.15 - 1.0 / 298.15f64)).exp();
    /// let beta = Beta::from_points(CurvePoint::new(25.0, 10_000.0), CurvePoint::new(50.0, r50)).unwrap();
    /// assert!((beta.beta_k - 3950.0).abs() < 0.01);
    /// assert_eq!((beta.r0_ohm, beta.t0_c), (10_000.0, 25.0));
    ///
    /// // Firmware reads the curve both ways; the Steinhart–Hart form of the same curve agrees.
    /// assert!((beta.celsius(r50 as f32)? - 50.0).abs() < 1e-3);
    /// assert!((beta.resistance(25.0)? - 10_000.0).abs() < 0.05);
    /// let sh = beta.to_steinhart_hart();
    /// assert!((sh.celsius(r50 as f32)? - 50.0).abs() < 1e-2);
    ///
    /// // A rising curve is no NTC.
    /// assert!(Beta::from_points(CurvePoint::new(25.0, 10e3), CurvePoint::new(50.0, 20e3)).is_err());
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn from_points(p1: CurvePoint, p2: CurvePoint) -> Result<Beta, FitError> {
        let [(y1, l1), (y2, l2)] = [check_point(p1)?, check_point(p2)?];
        if y1 == y2 || l1 == l2 {
            return Err(FitError::Degenerate);
        }
        // 1/T = 1/T₀ + (L − L₀)/β  ⇒  β = (L₁ − L₂)/(Y₁ − Y₂).
        let beta = (l1 - l2) / (y1 - y2);
        if !(beta > 0.0) {
            return Err(FitError::NotNtc);
        }
        let b = Beta { r0_ohm: p1.ohm as f32, t0_c: p1.celsius as f32, beta_k: beta as f32 };
        if b.validate().is_err() {
            return Err(FitError::NotMonotone);
        }
        Ok(b)
    }

    /// Checks the coefficients: finite, R₀ > 0, β > 0, T₀ above absolute zero.
    pub fn validate(&self) -> Result<(), Error> {
        let ok = self.r0_ohm.is_finite()
            && self.r0_ohm > 0.0
            && self.beta_k.is_finite()
            && self.beta_k > 0.0
            && self.t0_c.is_finite()
            && f64::from(self.t0_c) > -ZERO_CELSIUS_K;
        if ok {
            Ok(())
        } else {
            Err(Error::InvalidCalibration(CalibrationDefect::Coefficient))
        }
    }

    /// The same curve as Steinhart–Hart coefficients (`C = 0`), rounded to f32.
    pub fn to_steinhart_hart(&self) -> SteinhartHart {
        let t0 = f64::from(self.t0_c) + ZERO_CELSIUS_K;
        let beta = f64::from(self.beta_k);
        SteinhartHart {
            a: (1.0 / t0 - libm::log(f64::from(self.r0_ohm)) / beta) as f32,
            b: (1.0 / beta) as f32,
            c: 0.0,
        }
    }

    /// Temperature in °C at a resistance in Ω (f32, firmware).
    pub fn celsius(&self, ohm: f32) -> Result<f32, Error> {
        self.validate()?;
        beta_celsius(self, ohm)
    }

    /// Temperature in °C at a resistance in Ω (f64, host).
    pub fn celsius_f64(&self, ohm: f64) -> Result<f64, Error> {
        self.validate()?;
        beta_celsius(self, ohm)
    }

    /// Resistance in Ω at a temperature in °C (f32, firmware).
    pub fn resistance(&self, celsius: f32) -> Result<f32, Error> {
        self.validate()?;
        beta_resistance(self, celsius)
    }

    /// Resistance in Ω at a temperature in °C (f64, host).
    pub fn resistance_f64(&self, celsius: f64) -> Result<f64, Error> {
        self.validate()?;
        beta_resistance(self, celsius)
    }
}

/// The Steinhart–Hart equation `1/T = A + B·ln R + C·(ln R)³` (T in K, R in Ω).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SteinhartHart {
    /// A, 1/K.
    pub a: f32,
    /// B, 1/K per neper of resistance (> 0 for an NTC).
    pub b: f32,
    /// C, 1/K per neper cubed (small; either sign).
    pub c: f32,
}

impl SteinhartHart {
    /// The coefficients through three curve points (any order), solved in closed form in f64.
    ///
    /// The points must be distinct in temperature and resistance, the resistance must fall as the temperature
    /// rises, and the resulting curve must be monotone over the span of the points.
    ///
    /// ```
    /// use logtrim::thermistor::CurvePoint;
    /// use logtrim::SteinhartHart;
    ///
    /// // Coefficients often published for a 10 kΩ NTC (from memory): A = 1.129148e-3, B = 2.34125e-4,
    /// // C = 8.76741e-8. With them 1/T = A + B·ln R + C·(ln R)³ gives 25.00 °C at 10 kΩ.
    /// let published = SteinhartHart { a: 1.129148e-3, b: 2.34125e-4, c: 8.76741e-8 };
    /// assert!((published.celsius(10_000.0)? - 25.0).abs() < 0.01);
    ///
    /// // Three points of that curve give the same curve back (the fit is exact through three points).
    /// let p = |t: f64| CurvePoint::new(t, published.resistance_f64(t).unwrap());
    /// let fitted = SteinhartHart::from_points(p(0.0), p(25.0), p(70.0)).unwrap();
    /// for t in [-20.0, 10.0, 40.0, 100.0] {
    ///     let r = published.resistance_f64(t)?;
    ///     assert!((fitted.celsius_f64(r)? - t).abs() < 0.01, "{t} °C");
    /// }
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn from_points(p1: CurvePoint, p2: CurvePoint, p3: CurvePoint) -> Result<SteinhartHart, FitError> {
        let [(y1, l1), (y2, l2), (y3, l3)] = [check_point(p1)?, check_point(p2)?, check_point(p3)?];
        if y1 == y2 || y1 == y3 || y2 == y3 || l1 == l2 || l1 == l3 || l2 == l3 {
            return Err(FitError::Degenerate);
        }
        // An NTC: 1/T rises with ln R, so every pair has a positive secant.
        if !((y2 - y1) / (l2 - l1) > 0.0 && (y3 - y1) / (l3 - l1) > 0.0 && (y3 - y2) / (l3 - l2) > 0.0) {
            return Err(FitError::NotNtc);
        }
        // The system [1 Lᵢ Lᵢ³]·(A, B, C) = Yᵢ has determinant (L₂−L₁)(L₃−L₁)(L₃−L₂)(L₁+L₂+L₃); eliminate A
        // with divided differences, then B.
        let sum = l1 + l2 + l3;
        let scale = libm::fabs(l1) + libm::fabs(l2) + libm::fabs(l3);
        if !(libm::fabs(sum) > 1e-12 * scale) {
            return Err(FitError::Degenerate);
        }
        let g2 = (y2 - y1) / (l2 - l1);
        let g3 = (y3 - y1) / (l3 - l1);
        let c = (g3 - g2) / (l3 - l2) / sum;
        let b = g2 - c * (l1 * l1 + l1 * l2 + l2 * l2);
        let a = y1 - (b + c * l1 * l1) * l1;
        let (lo, hi) = (l1.min(l2).min(l3), l1.max(l2).max(l3));
        let slope_ok = |l: f64| b + 3.0 * c * l * l > 0.0;
        // The slope B + 3CL² is extreme at the ends of the span (or at L = 0 when the span contains it).
        if !(b > 0.0 && slope_ok(lo) && slope_ok(hi)) {
            return Err(FitError::NotMonotone);
        }
        let sh = SteinhartHart { a: a as f32, b: b as f32, c: c as f32 };
        if sh.validate().is_err() {
            return Err(FitError::NotMonotone);
        }
        Ok(sh)
    }

    /// Checks the coefficients: finite, with B > 0 (the curve rises in 1/T with ln R near its centre).
    ///
    /// Whether the curve is monotone over a given temperature span is checked by
    /// [`TemperatureSensor::validate`](crate::sensor::TemperatureSensor::validate), which knows the span.
    pub fn validate(&self) -> Result<(), Error> {
        if self.a.is_finite() && self.b.is_finite() && self.c.is_finite() && self.b > 0.0 {
            Ok(())
        } else {
            Err(Error::InvalidCalibration(CalibrationDefect::Coefficient))
        }
    }

    /// Temperature in °C at a resistance in Ω (f32, firmware).
    pub fn celsius(&self, ohm: f32) -> Result<f32, Error> {
        self.validate()?;
        sh_celsius(self, ohm)
    }

    /// Temperature in °C at a resistance in Ω (f64, host).
    pub fn celsius_f64(&self, ohm: f64) -> Result<f64, Error> {
        self.validate()?;
        sh_celsius(self, ohm)
    }

    /// Resistance in Ω at a temperature in °C (f32, firmware), by the closed-form cubic root.
    pub fn resistance(&self, celsius: f32) -> Result<f32, Error> {
        self.validate()?;
        sh_resistance(self, celsius)
    }

    /// Resistance in Ω at a temperature in °C (f64, host), by the closed-form cubic root.
    pub fn resistance_f64(&self, celsius: f64) -> Result<f64, Error> {
        self.validate()?;
        sh_resistance(self, celsius)
    }

    /// The slope `d(1/T)/d(ln R) = B + 3C·(ln R)²` at a resistance (f64); positive where the model is usable.
    pub fn slope_at_f64(&self, ohm: f64) -> f64 {
        let l = libm::log(ohm);
        f64::from(self.b) + 3.0 * f64::from(self.c) * l * l
    }
}

/// (1/T in 1/K, ln R) of a curve point, checked.
fn check_point(p: CurvePoint) -> Result<(f64, f64), FitError> {
    if !(p.celsius.is_finite() && p.ohm.is_finite()) {
        return Err(FitError::NonFinite);
    }
    let t_k = p.celsius + ZERO_CELSIUS_K;
    if !(t_k > 0.0 && p.ohm > 0.0) {
        return Err(FitError::NonPhysical);
    }
    Ok((1.0 / t_k, libm::log(p.ohm)))
}

/// °C from 1/T, or OutOfModelRange where 1/T gives no temperature above absolute zero (at the type's
/// precision: a temperature that rounds to −273.15 °C is refused too).
fn celsius_from_inverse<F: Real>(inv_t: F) -> Result<F, Error> {
    let t_k = F::lit(1.0) / inv_t;
    let t_c = t_k - F::lit(ZERO_CELSIUS_K);
    if !(inv_t > F::lit(0.0)) || !t_k.finite() || !(t_c > F::lit(-ZERO_CELSIUS_K)) {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    Ok(t_c)
}

/// 1/T in 1/K from °C, checked.
fn inverse_from_celsius<F: Real>(celsius: F) -> Result<F, Error> {
    if !celsius.finite() {
        return Err(Error::NonFinite);
    }
    let t_k = celsius + F::lit(ZERO_CELSIUS_K);
    if !(t_k > F::lit(0.0)) {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    Ok(F::lit(1.0) / t_k)
}

/// ln R of a resistance input, checked.
fn ln_ohm<F: Real>(ohm: F) -> Result<F, Error> {
    if !ohm.finite() {
        return Err(Error::NonFinite);
    }
    if !(ohm > F::lit(0.0)) {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    Ok(ohm.ln_())
}

/// A resistance result: finite and positive, or OutOfModelRange (overflow or underflow).
fn ohm_result<F: Real>(ohm: F) -> Result<F, Error> {
    if ohm.finite() && ohm > F::lit(0.0) {
        Ok(ohm)
    } else {
        Err(Error::Sensor(SensorFault::OutOfModelRange))
    }
}

fn beta_celsius<F: Real>(m: &Beta, ohm: F) -> Result<F, Error> {
    let l = ln_ohm(ohm)?;
    let t0 = F::of(m.t0_c) + F::lit(ZERO_CELSIUS_K);
    let inv = F::lit(1.0) / t0 + (l - F::of(m.r0_ohm).ln_()) / F::of(m.beta_k);
    celsius_from_inverse(inv)
}

fn beta_resistance<F: Real>(m: &Beta, celsius: F) -> Result<F, Error> {
    let inv = inverse_from_celsius(celsius)?;
    let t0 = F::of(m.t0_c) + F::lit(ZERO_CELSIUS_K);
    let e = F::of(m.beta_k) * (inv - F::lit(1.0) / t0);
    ohm_result(F::of(m.r0_ohm) * e.exp_())
}

fn sh_celsius<F: Real>(m: &SteinhartHart, ohm: F) -> Result<F, Error> {
    let l = ln_ohm(ohm)?;
    let (a, b, c) = (F::of(m.a), F::of(m.b), F::of(m.c));
    let l2 = l * l;
    // Only the branch where 1/T rises with ln R is a thermistor.
    if !(b + F::lit(3.0) * c * l2 > F::lit(0.0)) {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    celsius_from_inverse(a + l * (b + c * l2))
}

fn sh_resistance<F: Real>(m: &SteinhartHart, celsius: F) -> Result<F, Error> {
    let y_t = inverse_from_celsius(celsius)?;
    let (a, b, c) = (F::of(m.a), F::of(m.b), F::of(m.c));
    let zero = F::lit(0.0);
    // Cubic C·L³ + B·L + (A − 1/T) = 0 (see the module docs for the closed form).
    let linear = (y_t - a) / b;
    let k = (b / (F::lit(3.0) * c.abs_())).sqrt_();
    let mut l = if c == zero || !k.finite() {
        linear
    } else {
        let y = F::lit(1.5) * (a - y_t) / (b * k);
        if c > zero {
            F::lit(-2.0) * k * (y.asinh_() / F::lit(3.0)).sinh_()
        } else {
            if !(y.abs_() <= F::lit(1.0)) {
                // Beyond the turning points of the cubic: the temperature is not on the NTC branch.
                return Err(Error::Sensor(SensorFault::OutOfModelRange));
            }
            F::lit(-2.0) * k * (y.asin_() / F::lit(3.0)).sin_()
        }
    };
    let slope = b + F::lit(3.0) * c * l * l;
    if !(slope > zero) || !l.finite() {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    // One Newton step polishes the closed form's last bits.
    let g = a + l * (b + c * l * l) - y_t;
    let step = g / slope;
    if step.finite() {
        l = l - step;
    }
    ohm_result(l.exp_())
}

#[cfg(test)]
mod tests {
    use super::*;
    use logtrim_checks::within;
    use std::vec::Vec;

    /// A generic 10 kΩ, β = 3950 K NTC at 25 °C (typical catalogue-style values, common practice).
    const NTC10K: Beta = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 };

    /// A Steinhart–Hart set widely quoted as a worked example for a ~10 kΩ NTC (from memory).
    const QUOTED_SH: [f64; 3] = [1.009_249_522e-3, 2.378_405_444e-4, 2.019_202_697e-7];

    /// The Beta curve written out independently of the module: R(T) = R₀·exp(β(1/T − 1/T₀)).
    fn beta_curve_ohm(celsius: f64) -> f64 {
        10_000.0 * (3950.0 * (1.0 / (celsius + 273.15) - 1.0 / 298.15)).exp()
    }

    /// The Steinhart–Hart definition written out: T in °C from R.
    fn sh_definition_celsius(abc: [f64; 3], ohm: f64) -> f64 {
        let l = ohm.ln();
        1.0 / (abc[0] + abc[1] * l + abc[2] * l * l * l) - 273.15
    }

    #[test]
    fn beta_model_reproduces_its_defining_curve() {
        for i in 0..=33 {
            let t = -40.0 + 5.0 * f64::from(i);
            let r = beta_curve_ohm(t);
            assert!(within(NTC10K.resistance_f64(t).unwrap(), r, 0.0, 1e-6), "R({t})");
            assert!(within(NTC10K.celsius_f64(r).unwrap(), t, 1e-5, 0.0), "T({r})");
            // f32 firmware path: within 2 mK and 10 ppm.
            assert!(within(f64::from(NTC10K.celsius(r as f32).unwrap()), t, 2e-3, 0.0), "f32 T({r})");
            assert!(within(f64::from(NTC10K.resistance(t as f32).unwrap()), r, 0.0, 1e-5), "f32 R({t})");
        }
        // R₀ at T₀ by definition.
        assert!(within(f64::from(NTC10K.resistance(25.0).unwrap()), 10_000.0, 0.0, 1e-6));
    }

    #[test]
    fn beta_temperature_coefficient_at_25c() {
        // α = (1/R)·dR/dT = −β/T²: −4.44 %/K at 25 °C for β = 3950 K (common practice).
        let h = 1e-3;
        let r = |t| NTC10K.resistance_f64(t).unwrap();
        let alpha = (r(25.0 + h) - r(25.0 - h)) / (2.0 * h) / r(25.0);
        assert!(within(alpha * 100.0, -4.44, 0.005, 0.0), "{alpha}");
    }

    #[test]
    fn beta_from_two_points_recovers_beta() {
        let p1 = CurvePoint::new(25.0, beta_curve_ohm(25.0));
        let p2 = CurvePoint::new(85.0, beta_curve_ohm(85.0));
        let b = Beta::from_points(p1, p2).unwrap();
        assert!(within(f64::from(b.beta_k), 3950.0, 0.0, 1e-6), "{b:?}");
        assert!(within(f64::from(b.r0_ohm), 10_000.0, 0.0, 1e-6));
        // Order does not change the curve.
        let b2 = Beta::from_points(p2, p1).unwrap();
        assert!(within(b2.celsius_f64(beta_curve_ohm(50.0)).unwrap(), 50.0, 1e-4, 0.0));
    }

    #[test]
    fn beta_is_steinhart_hart_with_zero_c() {
        // 1/T = 1/T₀ + (ln R − ln R₀)/β is SH with A = 1/T₀ − ln R₀/β, B = 1/β, C = 0 (common practice).
        let sh = NTC10K.to_steinhart_hart();
        assert!(within(f64::from(sh.b), 1.0 / 3950.0, 0.0, 1e-7));
        assert!(within(f64::from(sh.a), 1.0 / 298.15 - 10_000f64.ln() / 3950.0, 0.0, 1e-6));
        for r in [300.0, 3_000.0, 10_000.0, 100_000.0, 300_000.0] {
            let want = NTC10K.celsius_f64(r).unwrap();
            assert!(within(sh.celsius_f64(r).unwrap(), want, 1e-4, 0.0));
        }
    }

    #[test]
    fn sh_from_three_points_of_a_beta_curve_reproduces_it() {
        // A Beta curve is an SH curve with C = 0, so three of its points must give it back everywhere.
        let pts = [-20.0, 25.0, 85.0].map(|t| CurvePoint::new(t, beta_curve_ohm(t)));
        let sh = SteinhartHart::from_points(pts[0], pts[1], pts[2]).unwrap();
        assert!(f64::from(sh.c).abs() < 1e-12, "{sh:?}");
        let mut worst: f64 = 0.0;
        for i in 0..=165 {
            let t = -40.0 + f64::from(i);
            worst = worst.max((sh.celsius_f64(beta_curve_ohm(t)).unwrap() - t).abs());
        }
        // f32 coefficients: their rounding is worth ~10 µK; allow 0.1 mK.
        assert!(worst < 1e-4, "worst {worst} K");
    }

    #[test]
    fn sh_from_three_points_of_the_quoted_set_recovers_it() {
        // Points from the SH definition itself at 1 kΩ, 10 kΩ and 100 kΩ.
        let pts = [1e3, 1e4, 1e5].map(|r| CurvePoint::new(sh_definition_celsius(QUOTED_SH, r), r));
        let sh = SteinhartHart::from_points(pts[2], pts[0], pts[1]).unwrap();
        for (got, want) in [sh.a, sh.b, sh.c].into_iter().zip(QUOTED_SH) {
            // f32 storage: ~6e-8 relative.
            assert!(within(f64::from(got), want, 0.0, 2e-7), "{got} vs {want}");
        }
        let mut worst: f64 = 0.0;
        for i in 0..=200 {
            let r = 10f64.powf(2.0 + 4.0 * f64::from(i) / 200.0); // 100 Ω … 1 MΩ
            let want = sh_definition_celsius(QUOTED_SH, r);
            worst = worst.max((sh.celsius_f64(r).unwrap() - want).abs());
            let got32 = f64::from(sh.celsius(r as f32).unwrap());
            assert!(within(got32, want, 3e-3, 0.0), "f32 at {r} Ω: {got32} vs {want}");
        }
        assert!(worst < 1e-4, "worst {worst} K");
    }

    /// Bisection on the SH definition: an independent inverse for checking the closed form.
    fn bisect_ohm(sh: &SteinhartHart, celsius: f64) -> f64 {
        let abc = [f64::from(sh.a), f64::from(sh.b), f64::from(sh.c)];
        let (mut lo, mut hi) = (1f64.ln(), 1e9f64.ln()); // ln R bracket; T falls as L rises
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if sh_definition_celsius(abc, mid.exp()) > celsius {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        (0.5 * (lo + hi)).exp()
    }

    #[test]
    fn sh_closed_form_inverse_matches_bisection_for_either_sign_of_c() {
        let positive =
            SteinhartHart { a: QUOTED_SH[0] as f32, b: QUOTED_SH[1] as f32, c: QUOTED_SH[2] as f32 };
        let negative = SteinhartHart { a: 1.2e-3, b: 2.5e-4, c: -4.0e-8 };
        let tiny = SteinhartHart { a: 1.13e-3, b: 2.4e-4, c: 1.0e-20 };
        for sh in [positive, negative, tiny] {
            for i in 0..=32 {
                let t = -50.0 + 5.0 * f64::from(i);
                let want = bisect_ohm(&sh, t);
                let got = sh.resistance_f64(t).unwrap();
                assert!(within(got, want, 0.0, 1e-10), "{sh:?} at {t}: {got} vs {want}");
                let got32 = f64::from(sh.resistance(t as f32).unwrap());
                assert!(within(got32, want, 0.0, 1e-5), "{sh:?} f32 at {t}: {got32} vs {want}");
                // And back.
                assert!(within(sh.celsius_f64(got).unwrap(), t, 1e-9, 0.0));
            }
        }
    }

    proptest::proptest! {
        #![proptest_config(proptest::test_runner::Config {
            cases: 300,
            rng_seed: proptest::test_runner::RngSeed::Fixed(11),
            ..proptest::test_runner::Config::default()
        })]

        /// On random NTC-like coefficient sets (C of either sign) and temperatures, the closed-form inverse
        /// agrees with bisection on the definition, and both directions round-trip, in f64 and f32.
        #[test]
        fn sh_inverse_on_random_curves(a in 0.5e-3f64..1.5e-3, b in 1.5e-4f64..3.5e-4, c in -1e-7f64..3e-7,
                                       t in -50.0f64..150.0) {
            let sh = SteinhartHart { a: a as f32, b: b as f32, c: c as f32 };
            let want = bisect_ohm(&sh, t);
            // Only where the curve puts the temperature between 1 Ω and 1 GΩ (the bisection bracket).
            proptest::prop_assume!(want > 1.001 && want < 0.999e9);
            let got = sh.resistance_f64(t).unwrap();
            proptest::prop_assert!(within(got, want, 0.0, 1e-9), "{:?} {} {} {}", sh, t, got, want);
            proptest::prop_assert!(within(sh.celsius_f64(got).unwrap(), t, 1e-9, 0.0));
            let got32 = sh.resistance(t as f32).unwrap();
            proptest::prop_assert!(within(f64::from(got32), want, 0.0, 2e-5), "{:?} {} {} {}", sh, t, got32, want);
            proptest::prop_assert!(within(f64::from(sh.celsius(got32).unwrap()), t, 5e-3, 0.0));
        }
    }

    #[test]
    fn negative_c_beyond_the_turning_point_is_out_of_model_range() {
        // With C < 0, d(1/T)/dL = B + 3CL² vanishes at L = √(B/(3|C|)): beyond it the curve turns back.
        let sh = SteinhartHart { a: 1.2e-3, b: 2.5e-4, c: -4.0e-8 };
        let l_turn = (2.5e-4f64 / (3.0 * 4.0e-8)).sqrt();
        let r_beyond = (l_turn + 1.0).exp();
        assert_eq!(sh.celsius_f64(r_beyond), Err(Error::Sensor(SensorFault::OutOfModelRange)));
        // A temperature colder than the coldest point of the NTC branch has no resistance on it.
        let coldest = sh_definition_celsius([1.2e-3, 2.5e-4, -4.0e-8], l_turn.exp());
        assert_eq!(sh.resistance_f64(coldest - 10.0), Err(Error::Sensor(SensorFault::OutOfModelRange)));
        assert!(sh.resistance_f64(coldest + 10.0).is_ok());
    }

    #[test]
    fn bad_inputs_are_specific_errors() {
        let oor = Error::Sensor(SensorFault::OutOfModelRange);
        assert_eq!(NTC10K.celsius(0.0), Err(oor));
        assert_eq!(NTC10K.celsius(-5.0), Err(oor));
        assert_eq!(NTC10K.celsius(f32::NAN), Err(Error::NonFinite));
        assert_eq!(NTC10K.celsius(f32::INFINITY), Err(Error::NonFinite));
        // So small a resistance would need 1/T < 0.
        assert_eq!(NTC10K.celsius_f64(1e-300), Err(oor));
        assert_eq!(NTC10K.resistance(-273.15), Err(oor));
        assert_eq!(NTC10K.resistance(f32::NAN), Err(Error::NonFinite));
        // exp overflow near absolute zero.
        assert_eq!(NTC10K.resistance(-273.0), Err(oor));
        let bad = Error::InvalidCalibration(CalibrationDefect::Coefficient);
        assert_eq!(Beta { beta_k: 0.0, ..NTC10K }.celsius(1e4), Err(bad));
        assert_eq!(Beta { r0_ohm: f32::NAN, ..NTC10K }.celsius(1e4), Err(bad));
        assert_eq!(Beta { t0_c: -300.0, ..NTC10K }.celsius(1e4), Err(bad));
        assert_eq!(SteinhartHart { a: 1e-3, b: 0.0, c: 1e-7 }.celsius(1e4), Err(bad));
        assert_eq!(SteinhartHart { a: 1e-3, b: 2e-4, c: f32::INFINITY }.resistance(25.0), Err(bad));
    }

    #[test]
    fn fit_errors() {
        let p = |t: f64| CurvePoint::new(t, beta_curve_ohm(t));
        assert_eq!(Beta::from_points(p(25.0), p(25.0)), Err(FitError::Degenerate));
        assert_eq!(Beta::from_points(p(25.0), CurvePoint::new(50.0, 20_000.0)), Err(FitError::NotNtc));
        assert_eq!(Beta::from_points(p(25.0), CurvePoint::new(f64::NAN, 1.0)), Err(FitError::NonFinite));
        assert_eq!(Beta::from_points(p(25.0), CurvePoint::new(-274.0, 1.0)), Err(FitError::NonPhysical));
        assert_eq!(Beta::from_points(p(25.0), CurvePoint::new(30.0, 0.0)), Err(FitError::NonPhysical));
        assert_eq!(SteinhartHart::from_points(p(0.0), p(25.0), p(0.0)), Err(FitError::Degenerate));
        let rising = CurvePoint::new(60.0, 20_000.0);
        assert_eq!(SteinhartHart::from_points(p(0.0), p(25.0), rising), Err(FitError::NotNtc));
        // Three NTC points whose cubic bends back between them.
        let kinked =
            [CurvePoint::new(0.0, 30_000.0), CurvePoint::new(1.0, 10_000.0), CurvePoint::new(100.0, 9_000.0)];
        assert_eq!(SteinhartHart::from_points(kinked[0], kinked[1], kinked[2]), Err(FitError::NotMonotone));
        // Resistances whose logarithms sum to zero make the system singular.
        let sing = [CurvePoint::new(20.0, 4.0), CurvePoint::new(30.0, 1.0), CurvePoint::new(40.0, 0.25)];
        assert_eq!(SteinhartHart::from_points(sing[0], sing[1], sing[2]), Err(FitError::Degenerate));
        let msgs: Vec<std::string::String> =
            [FitError::NotNtc, FitError::Degenerate].iter().map(std::string::ToString::to_string).collect();
        assert!(msgs[0].contains("NTC") && msgs[1].contains("share"));
    }
}
