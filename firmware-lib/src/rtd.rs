//! Platinum RTDs (Pt100, Pt1000, any R₀) by the Callendar–Van Dusen equation with the IEC 60751 coefficients.
//!
//! ```text
//! R(t) = R₀·[1 + A·t + B·t²]                      0 °C ≤ t ≤ 850 °C
//! R(t) = R₀·[1 + A·t + B·t² + C·(t − 100)·t³]     −200 °C ≤ t < 0 °C
//! A = 3.9083e-3 /°C, B = −5.775e-7 /°C², C = −4.183e-12 /°C⁴   (IEC 60751)
//! ```
//!
//! The inverse is closed form above 0 °C (the quadratic, written as `t = 2(W − 1)/(A + √(A² + 4B(W − 1)))`
//! with `W = R/R₀` so that nothing cancels near 0 °C) and Newton's method below 0 °C, started from the same
//! quadratic and bounded to [`NEWTON_STEPS`] steps. The standard defines the equation over −200…850 °C:
//! resistances outside `R(−200 °C)…R(850 °C)` give [`SensorFault::OutOfModelRange`].

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::math::Real;

/// Callendar–Van Dusen A, 1/°C (IEC 60751).
pub const CVD_A: f64 = 3.9083e-3;
/// Callendar–Van Dusen B, 1/°C² (IEC 60751).
pub const CVD_B: f64 = -5.775e-7;
/// Callendar–Van Dusen C, 1/°C⁴, applied below 0 °C only (IEC 60751).
pub const CVD_C: f64 = -4.183e-12;
/// Lowest temperature the equation is defined for, °C.
pub const MIN_C: f64 = -200.0;
/// Highest temperature the equation is defined for, °C.
pub const MAX_C: f64 = 850.0;
/// Upper bound on Newton steps of the inverse below 0 °C (three suffice in f64 from the quadratic start).
pub const NEWTON_STEPS: usize = 8;

/// A platinum RTD with the IEC 60751 curve and a nominal resistance R₀ at 0 °C.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Rtd {
    /// R₀: resistance at 0 °C, Ω (> 0).
    pub r0_ohm: f32,
}

impl Rtd {
    /// Pt100: R₀ = 100 Ω.
    pub const PT100: Rtd = Rtd { r0_ohm: 100.0 };
    /// Pt1000: R₀ = 1000 Ω.
    pub const PT1000: Rtd = Rtd { r0_ohm: 1000.0 };

    /// Checks R₀: finite and positive.
    pub fn validate(&self) -> Result<(), Error> {
        if self.r0_ohm.is_finite() && self.r0_ohm > 0.0 {
            Ok(())
        } else {
            Err(Error::InvalidCalibration(CalibrationDefect::Coefficient))
        }
    }

    /// Resistance in Ω at a temperature in °C (f32, firmware).
    ///
    /// ```
    /// use logtrim::Rtd;
    ///
    /// // IEC 60751 table values for Pt100: 100.00 Ω at 0 °C, 138.51 Ω at 100 °C, 60.26 Ω at −100 °C,
    /// // 390.48 Ω at 850 °C.
    /// let pt100 = Rtd::PT100;
    /// assert!((pt100.resistance(0.0)? - 100.0).abs() < 1e-4);
    /// assert!((pt100.resistance(100.0)? - 138.51).abs() < 0.005);
    /// assert!((pt100.resistance(-100.0)? - 60.26).abs() < 0.005);
    /// assert!((pt100.resistance(850.0)? - 390.48).abs() < 0.005);
    /// // Outside −200…850 °C the standard defines no curve.
    /// assert!(pt100.resistance(900.0).is_err());
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn resistance(&self, celsius: f32) -> Result<f32, Error> {
        self.validate()?;
        resistance(self, celsius)
    }

    /// Resistance in Ω at a temperature in °C (f64, host).
    pub fn resistance_f64(&self, celsius: f64) -> Result<f64, Error> {
        self.validate()?;
        resistance(self, celsius)
    }

    /// Temperature in °C at a resistance in Ω (f32, firmware).
    ///
    /// ```
    /// use logtrim::Rtd;
    ///
    /// // IEC 60751 table: a Pt1000 reads 1385.06 Ω at 100 °C and 842.71 Ω at −40 °C.
    /// assert!((Rtd::PT1000.celsius(1385.06)? - 100.0).abs() < 0.01);
    /// assert!((Rtd::PT1000.celsius(842.71)? - -40.0).abs() < 0.01);
    /// // The inverse and the forward curve agree (f64, host side) to far below a millikelvin.
    /// let t = Rtd::PT100.celsius_f64(Rtd::PT100.resistance_f64(-150.0)?)?;
    /// assert!((t - -150.0).abs() < 1e-9);
    /// // A shorted sensor (0 Ω) is no temperature.
    /// assert!(Rtd::PT100.celsius(0.0).is_err());
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn celsius(&self, ohm: f32) -> Result<f32, Error> {
        self.validate()?;
        celsius(self, ohm)
    }

    /// Temperature in °C at a resistance in Ω (f64, host).
    pub fn celsius_f64(&self, ohm: f64) -> Result<f64, Error> {
        self.validate()?;
        celsius(self, ohm)
    }
}

/// R/R₀ at t °C.
fn ratio<F: Real>(t: F) -> F {
    let (a, b, c) = (F::lit(CVD_A), F::lit(CVD_B), F::lit(CVD_C));
    let one = F::lit(1.0);
    let quadratic = t * (a + b * t);
    if t < F::lit(0.0) {
        one + quadratic + c * (t - F::lit(100.0)) * t * t * t
    } else {
        one + quadratic
    }
}

/// d(R/R₀)/dt below 0 °C.
fn ratio_slope_below_zero<F: Real>(t: F) -> F {
    let (a, b, c) = (F::lit(CVD_A), F::lit(CVD_B), F::lit(CVD_C));
    a + F::lit(2.0) * b * t + c * t * t * (F::lit(4.0) * t - F::lit(300.0))
}

fn resistance<F: Real>(rtd: &Rtd, t: F) -> Result<F, Error> {
    if !t.finite() {
        return Err(Error::NonFinite);
    }
    if t < F::lit(MIN_C) || t > F::lit(MAX_C) {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    let ohm = F::of(rtd.r0_ohm) * ratio(t);
    if !ohm.finite() {
        // Only an R₀ near the top of f32 overflows.
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    Ok(ohm)
}

fn celsius<F: Real>(rtd: &Rtd, ohm: F) -> Result<F, Error> {
    if !ohm.finite() {
        return Err(Error::NonFinite);
    }
    // The limits are computed exactly as `resistance` computes them, so that R(−200 °C) and R(850 °C)
    // themselves are accepted at either precision.
    let r0 = F::of(rtd.r0_ohm);
    if !(ohm >= r0 * ratio(F::lit(MIN_C)) && ohm <= r0 * ratio(F::lit(MAX_C))) {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    let w = ohm / r0;
    let (a, b) = (F::lit(CVD_A), F::lit(CVD_B));
    let d = w - F::lit(1.0);
    // The quadratic root, exact above 0 °C; the discriminant is positive over the whole range.
    let mut t = F::lit(2.0) * d / (a + (a * a + F::lit(4.0) * b * d).sqrt_());
    if d < F::lit(0.0) {
        for _ in 0..NEWTON_STEPS {
            let step = (ratio(t) - w) / ratio_slope_below_zero(t);
            if !step.finite() {
                break;
            }
            t = t - step;
            if !(step.abs_() > F::lit(4.0) * F::EPSILON * (F::lit(1.0) + t.abs_())) {
                break;
            }
        }
    }
    if !t.finite() {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    Ok(t)
}

#[cfg(test)]
mod tests {
    use super::*;
    use logtrim_checks::published::IEC_60751_PT100;
    use logtrim_checks::within;

    #[test]
    fn pt100_matches_the_iec_60751_table_f64() {
        for (t, r) in IEC_60751_PT100 {
            let got = Rtd::PT100.resistance_f64(t).unwrap();
            assert!(within(got, r, 1e-3, 0.0), "R({t}) = {got}, table {r}");
            let back = Rtd::PT100.celsius_f64(r).unwrap();
            assert!(within(back, t, 0.01, 0.0), "t({r}) = {back}, table {t}");
        }
    }

    #[test]
    fn pt100_matches_the_iec_60751_table_f32() {
        for (t, r) in IEC_60751_PT100 {
            let got = f64::from(Rtd::PT100.resistance(t as f32).unwrap());
            assert!(within(got, r, 1e-3, 0.0), "R({t}) = {got}, table {r}");
            let back = f64::from(Rtd::PT100.celsius(r as f32).unwrap());
            assert!(within(back, t, 0.01, 0.0), "t({r}) = {back}, table {t}");
        }
    }

    #[test]
    fn pt1000_is_ten_pt100s() {
        // Same curve, R₀ = 1000 Ω (IEC 60751): the table scaled by ten, to the same relative tolerance.
        for (t, r) in IEC_60751_PT100 {
            assert!(within(f64::from(Rtd::PT1000.resistance(t as f32).unwrap()), 10.0 * r, 1e-2, 0.0));
            assert!(within(f64::from(Rtd::PT1000.celsius((10.0 * r) as f32).unwrap()), t, 0.01, 0.0));
        }
    }

    #[test]
    fn alpha_is_0_00385() {
        // The mean tempco (R₁₀₀ − R₀)/(100·R₀) of the IEC 60751 curve is 0.00385 /°C (common practice).
        let r0 = Rtd::PT100.resistance_f64(0.0).unwrap();
        let r100 = Rtd::PT100.resistance_f64(100.0).unwrap();
        assert!(within(r0, 100.0, 1e-12, 0.0));
        assert!(within((r100 - r0) / (100.0 * r0), 0.003_85, 1e-6, 0.0));
    }

    #[test]
    fn inverse_round_trips_over_the_range() {
        let mut worst64: f64 = 0.0;
        let mut worst32: f64 = 0.0;
        for i in 0..=1050 {
            let t = MIN_C + f64::from(i);
            let r = Rtd::PT100.resistance_f64(t).unwrap();
            worst64 = worst64.max((Rtd::PT100.celsius_f64(r).unwrap() - t).abs());
            // f32 all the way, as on the firmware.
            let r32 = Rtd::PT100.resistance(t as f32).unwrap();
            worst32 = worst32.max((f64::from(Rtd::PT100.celsius(r32).unwrap()) - t).abs());
            // The f64 value rounded to f32 may fall just outside at the two ends of the range.
            if t > MIN_C && t < MAX_C {
                worst32 = worst32.max((f64::from(Rtd::PT100.celsius(r as f32).unwrap()) - t).abs());
            }
        }
        assert!(worst64 < 1e-9, "f64 {worst64} K");
        assert!(worst32 < 2e-3, "f32 {worst32} K");
    }

    proptest::proptest! {
        #![proptest_config(proptest::test_runner::Config {
            cases: 500,
            rng_seed: proptest::test_runner::RngSeed::Fixed(12),
            ..proptest::test_runner::Config::default()
        })]

        /// Random temperatures and R₀ values round-trip: to 1 nK in f64, to 2 mK in f32.
        #[test]
        fn random_round_trips(t in MIN_C..=MAX_C, r0 in 10.0f32..10_000.0) {
            let rtd = Rtd { r0_ohm: r0 };
            let r = rtd.resistance_f64(t).unwrap();
            let back = rtd.celsius_f64(r).unwrap();
            proptest::prop_assert!(within(back, t, 1e-9, 0.0), "{} {}", t, back);
            let back32 = f64::from(rtd.celsius(rtd.resistance(t as f32).unwrap()).unwrap());
            proptest::prop_assert!(within(back32, t, 2e-3, 0.0), "{} {}", t, back32);
        }
    }

    #[test]
    fn outside_the_standard_range_is_out_of_model_range() {
        let oor = Error::Sensor(SensorFault::OutOfModelRange);
        assert_eq!(Rtd::PT100.celsius(18.0), Err(oor));
        assert_eq!(Rtd::PT100.celsius(391.0), Err(oor));
        assert_eq!(Rtd::PT100.celsius(-1.0), Err(oor));
        assert_eq!(Rtd::PT100.resistance(-200.5), Err(oor));
        assert_eq!(Rtd::PT100.resistance_f64(850.5), Err(oor));
        assert_eq!(Rtd::PT100.celsius(f32::NAN), Err(Error::NonFinite));
        assert_eq!(Rtd::PT100.resistance(f32::NEG_INFINITY), Err(Error::NonFinite));
        let bad = Error::InvalidCalibration(CalibrationDefect::Coefficient);
        assert_eq!(Rtd { r0_ohm: 0.0 }.celsius(100.0), Err(bad));
        assert_eq!(Rtd { r0_ohm: f32::NAN }.resistance(0.0), Err(bad));
        assert_eq!(Rtd { r0_ohm: f32::MAX }.resistance(1.0), Err(oor));
    }
}
