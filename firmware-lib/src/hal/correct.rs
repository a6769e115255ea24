//! The pluggable correction of a cycle: the [`Corrector`] trait, the exact mean of a burst of codes it
//! takes ([`MeanCode`]), what it gives back ([`Corrected`]), and its implementations for the f32
//! [`Calibration`] and the integer [`FixedCalibration`].
//!
//! The cycle averages *codes* and corrects once (the reasons are in [`crate::hal::cycle`]). A mean of
//! N codes has up to log2(N) more bits than one code, so the corrector takes the mean exactly, as a sum and
//! a count, and decides itself how much of the fraction it can use. The f32 [`Calibration`] takes the mean
//! as an f32 with 8 fractional bits ([`Calibration::correct_mean`]).
//!
//! # The fixed path in a cycle
//!
//! [`FixedCalibration`] corrects whole codes only. A fractional mean is corrected by **linear
//! interpolation between its two neighbouring codes**: the mean is taken with 8 fractional bits
//! ([`MeanCode::to_fixed`]), the temperature stage is computed once, both neighbours are corrected at it,
//! and `x = x_lo + (x_hi − x_lo)·f/256`. The correction is smooth over one code (its second derivative
//! moves x by far less than a millionth of a code's step there), so the interpolation costs nothing
//! measurable against the f64 reference (`tests/hal_fixed_cycle.rs` at the workspace root measures it);
//! rounding the mean to a whole code instead would cost up to ½ LSB. Within one code of an edge of the
//! calibrated range, where one neighbour is refused, the mean takes the result of the neighbour nearer to
//! it: its error if that one is refused, its value (at most ½ code from the mean's) otherwise.
//!
//! The temperature arrives from the cycle in °C as an f32 (the [`TemperatureChannel`] trait's unit). It
//! becomes the fixed path's θ (m°C · 2^10) by an exact integer decomposition of the f32's bits, rounded to
//! nearest ([`theta_of_celsius`]): no float arithmetic. The result is computed in integers throughout, in
//! the configured unit ([`FixedReading::value`]), and handed to the cycle both as that integer
//! ([`Corrected::fixed`], [`crate::hal::Measurement::fixed`]) and as f32: one correctly rounded conversion
//! each for x and the value ([`f32_from_q`]: integer arithmetic on the bits, no soft-float), far less work
//! than the f32 path's logarithms, exponentials and Newton steps.
//!
//! [`TemperatureChannel`]: crate::hal::TemperatureChannel

use crate::calibration::{Calibration, Reading};
use crate::error::Error;
use crate::fixed::{value_frac_bits, FixedCalibration, FixedReading, X_FRAC};
use crate::qformat::{f32_from_q, millicelsius_saturating, round_shr, theta_of_celsius};
use crate::units::Unit;

/// Fractional bits of a mean code that the f32 correction resolves (1/256 code), where the converter's
/// width leaves room below the 24 bits an f32 holds exactly.
pub const MEAN_FRACTION_BITS: u8 = 8;

/// The mean of `count` converter codes, kept exactly as their sum and count.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MeanCode {
    sum: u64,
    count: u32,
}

impl MeanCode {
    /// One code.
    pub const fn single(code: u32) -> MeanCode {
        MeanCode { sum: code as u64, count: 1 }
    }

    /// The mean of `count` codes adding up to `sum`; `None` for a count of zero.
    ///
    /// ```
    /// use logtrim::hal::MeanCode;
    ///
    /// // Three codes, 1000 + 1001 + 1001: the mean 1000⅔ is kept exactly, rounded only where asked.
    /// let m = MeanCode::new(3002, 3).unwrap();
    /// assert_eq!(m.floor(), Some((1000, true)));
    /// assert_eq!(m.to_fixed(8), Some(256_171)); // round(3002·256/3) = round(256 170.67)
    /// assert!((m.as_f32() - 1000.6667).abs() < 1e-3);
    /// assert_eq!(MeanCode::new(0, 0), None);
    /// ```
    pub const fn new(sum: u64, count: u32) -> Option<MeanCode> {
        if count == 0 {
            None
        } else {
            Some(MeanCode { sum, count })
        }
    }

    /// The sum of the codes.
    pub const fn sum(&self) -> u64 {
        self.sum
    }

    /// How many codes were averaged (at least 1).
    pub const fn count(&self) -> u32 {
        self.count
    }

    /// The mean as f32 (for display and logs; the correction uses the exact form).
    pub fn as_f32(&self) -> f32 {
        (self.sum as f64 / f64::from(self.count.max(1))) as f32
    }

    /// The largest code at or below the mean, and whether the mean has a fractional part.
    /// `None` if the mean does not fit a `u32`.
    pub fn floor(&self) -> Option<(u32, bool)> {
        let c = u64::from(self.count.max(1));
        let q = u32::try_from(self.sum / c).ok()?;
        Some((q, !self.sum.is_multiple_of(c)))
    }

    /// The mean with `frac_bits` fractional bits, rounded to nearest (half up): `round(sum·2^k / count)`.
    /// `None` if that does not fit a `u32` or `frac_bits > 31`.
    pub fn to_fixed(&self, frac_bits: u8) -> Option<u32> {
        if frac_bits > 31 {
            return None;
        }
        let c = u64::from(self.count.max(1));
        let scaled = self.sum.checked_mul(1u64 << frac_bits)?;
        let q = scaled.checked_add(c / 2)? / c;
        u32::try_from(q).ok()
    }
}

/// The integer result of a fixed-point correction: x and the value in the cycle's unit, exactly as the fixed
/// path computed them.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedValue {
    /// x = ln(I_sig/I_ref), Q24 nepers.
    pub x_q24: i32,
    /// The value in the unit, with [`FixedValue::frac_bits`] fraction bits ([`FixedReading::value`]).
    pub value: i64,
    /// Fraction bits of [`FixedValue::value`] ([`value_frac_bits`]: 32 for a ratio, 24 otherwise).
    pub frac_bits: u32,
}

/// What a corrector gives the cycle: x and the value in the configured unit, both finite, and the integer
/// form when the corrector computes in fixed point.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Corrected {
    /// x = ln(I_sig/I_ref).
    pub x: f32,
    /// The reading in the unit asked for.
    pub value: f32,
    /// The temperature lay outside the calibrated range, within the allowed extrapolation.
    pub temperature_extrapolated: bool,
    /// The integer result of a fixed-point corrector (`None` for the f32 path).
    pub fixed: Option<FixedValue>,
}

/// A correction (ADC code, temperature) → x that a measurement cycle can use.
///
/// Implemented for the f32 [`Calibration`] and the integer [`FixedCalibration`], so a board picks the one
/// that suits its core without touching the cycle.
pub trait Corrector {
    /// The full check of the coefficients, run once when the corrector is installed in a cycle. A
    /// corrector that fails it is never used: every cycle reports an invalid calibration.
    fn validate(&self) -> Result<(), Error>;

    /// Checks one raw converter code: within the converter's range, not at or near a rail.
    fn check_code(&self, code: u32) -> Result<(), Error>;

    /// Corrects the mean of a burst of codes at a temperature in °C.
    fn correct(&self, code: MeanCode, temp_c: f32) -> Result<Reading, Error>;

    /// Corrects the mean of a burst of codes and expresses it in `unit`: what the cycle reports. The
    /// default converts [`Corrector::correct`]'s x with [`Unit::from_x`]; a non-finite x is
    /// [`Error::NonFinite`], a value that overflows the f32 [`Error::AboveRange`].
    fn correct_in(&self, code: MeanCode, temp_c: f32, unit: Unit) -> Result<Corrected, Error> {
        let r = self.correct(code, temp_c)?;
        if !r.x.is_finite() {
            return Err(Error::NonFinite);
        }
        let value = unit.from_x(r.x);
        if !value.is_finite() {
            return Err(Error::AboveRange);
        }
        Ok(Corrected { x: r.x, value, temperature_extrapolated: r.temperature_extrapolated, fixed: None })
    }
}

impl<C: Corrector + ?Sized> Corrector for &C {
    fn validate(&self) -> Result<(), Error> {
        C::validate(self)
    }
    fn check_code(&self, code: u32) -> Result<(), Error> {
        C::check_code(self, code)
    }
    fn correct(&self, code: MeanCode, temp_c: f32) -> Result<Reading, Error> {
        C::correct(self, code, temp_c)
    }
    fn correct_in(&self, code: MeanCode, temp_c: f32, unit: Unit) -> Result<Corrected, Error> {
        C::correct_in(self, code, temp_c, unit)
    }
}

impl Corrector for Calibration {
    /// [`Calibration::validate`].
    fn validate(&self) -> Result<(), Error> {
        Calibration::validate(self)
    }

    /// [`crate::calibration::AdcScaling::check_code`], and in addition a code *at* either rail (0 or
    /// `2^bits − 1`) is [`Error::Saturated`] even with a rail margin of 0: a converter returns its end code
    /// for every input beyond it, so that code carries no value.
    fn check_code(&self, code: u32) -> Result<(), Error> {
        self.adc.check_code(code)?;
        let max = self.adc.max_code()?;
        if code == 0 || code == max {
            return Err(Error::Saturated { code });
        }
        Ok(())
    }

    /// A whole mean goes to [`Calibration::correct`] as it is. A fractional mean is checked by its two
    /// neighbouring codes and corrected by [`Calibration::correct_mean`] at `k = min(8, 24 − bits)`
    /// fractional bits (exact in an f32). A 24-bit converter leaves no room (k = 0): its mean is rounded
    /// to the nearest code.
    fn correct(&self, code: MeanCode, temp_c: f32) -> Result<Reading, Error> {
        let max = self.adc.max_code()?;
        let (lo, frac) = code.floor().ok_or(Error::CodeOutOfAdcRange { code: u32::MAX, max })?;
        Corrector::check_code(self, lo)?;
        if !frac {
            return Calibration::correct(self, lo, temp_c);
        }
        Corrector::check_code(self, lo.saturating_add(1))?;
        let k = MEAN_FRACTION_BITS.min(24u8.saturating_sub(self.adc.bits));
        let fixed = code.to_fixed(k).ok_or(Error::CodeOutOfAdcRange { code: u32::MAX, max })?;
        if k == 0 {
            return Calibration::correct(self, fixed, temp_c);
        }
        // `fixed` < 2^24, so it and its scaled value are exact in an f32.
        let mean = fixed as f32 / (1u32 << k) as f32;
        Calibration::correct_mean(self, mean, temp_c)
    }
}

/// Fraction bits of a mean code that the fixed path interpolates with.
pub const FIXED_MEAN_FRACTION_BITS: u8 = 8;

/// The fixed-point correction of a mean code at a temperature in °C, as the cycle uses it (see [the module
/// docs](self#the-fixed-path-in-a-cycle)): the codes are checked first (both neighbours of a fractional mean,
/// as in the f32 path), then the temperature; a fractional mean is interpolated between its neighbours.
pub fn correct_mean_fixed(
    cal: &FixedCalibration<'_>,
    code: MeanCode,
    temp_c: f32,
) -> Result<FixedReading, Error> {
    let max = cal.header.adc_max_code;
    let beyond = Error::CodeOutOfAdcRange { code: u32::MAX, max };
    let (lo, frac) = code.floor().ok_or(beyond)?;
    cal.check_code(lo)?;
    if frac {
        cal.check_code(lo.saturating_add(1))?;
    }
    let theta = theta_of_celsius(temp_c)?;
    let stage = cal.stage_theta(theta).map_err(|e| match e {
        Error::TemperatureOutOfRange { .. } => {
            Error::TemperatureOutOfRange { millicelsius: millicelsius_saturating(temp_c) }
        }
        e => e,
    })?;
    if !frac {
        return cal.correct_staged(&stage, lo);
    }
    let k = u32::from(FIXED_MEAN_FRACTION_BITS);
    let fixed = code.to_fixed(FIXED_MEAN_FRACTION_BITS).ok_or(beyond)?;
    // Rounded to 1/256 code, the mean may reach the upper neighbour (a whole code, checked above).
    let (base, f) = (fixed >> k, i64::from(fixed & ((1 << k) - 1)));
    if f == 0 {
        return cal.correct_staged(&stage, base);
    }
    let a = cal.correct_staged(&stage, base);
    let b = cal.correct_staged(&stage, base.saturating_add(1));
    let (near, far) = if f < 1 << (k - 1) { (a, b) } else { (b, a) };
    match (near, far) {
        (Ok(_), Ok(_)) => {}
        (near, _) => return near,
    }
    let (a, b) = (a?, b?);
    // |x_hi − x_lo| < 2^32 and f < 2^8: no overflow; the result lies between two i32 values.
    let dx = (i64::from(b.x) - i64::from(a.x)) * f;
    let x = i64::from(a.x) + round_shr(dx, k);
    Ok(FixedReading {
        x: i32::try_from(x).unwrap_or(a.x),
        temperature_extrapolated: a.temperature_extrapolated,
    })
}

impl Corrector for FixedCalibration<'_> {
    /// [`FixedCalibration::validate`].
    fn validate(&self) -> Result<(), Error> {
        FixedCalibration::validate(self)
    }

    /// [`FixedCalibration::check_code`]: a code at or within the rail margin of either rail is
    /// [`Error::Saturated`] (so are both rail codes with a margin of 0), as in the f32 path.
    fn check_code(&self, code: u32) -> Result<(), Error> {
        FixedCalibration::check_code(self, code)
    }

    /// [`correct_mean_fixed`], with x as f32.
    fn correct(&self, code: MeanCode, temp_c: f32) -> Result<Reading, Error> {
        let r = correct_mean_fixed(self, code, temp_c)?;
        Ok(Reading {
            x: f32_from_q(i64::from(r.x), X_FRAC),
            temperature_extrapolated: r.temperature_extrapolated,
        })
    }

    /// [`correct_mean_fixed`], the value in `unit` in integers ([`FixedReading::value`]: a linear unit that
    /// does not fit is [`Error::AboveRange`]), then both as f32.
    fn correct_in(&self, code: MeanCode, temp_c: f32, unit: Unit) -> Result<Corrected, Error> {
        let r = correct_mean_fixed(self, code, temp_c)?;
        let value = r.value(unit)?;
        let frac_bits = value_frac_bits(unit);
        Ok(Corrected {
            x: f32_from_q(i64::from(r.x), X_FRAC),
            value: f32_from_q(value, frac_bits),
            temperature_extrapolated: r.temperature_extrapolated,
            fixed: Some(FixedValue { x_q24: r.x, value, frac_bits }),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A unit with every code-domain term in use, so that the scaling is exercised everywhere.
    fn bent_unit() -> Calibration {
        crate::test_units::bent(-2.5)
    }

    #[test]
    fn mean_code_arithmetic() {
        let m = MeanCode::new(3 * 1000 + 1, 3).unwrap();
        assert_eq!(m.floor(), Some((1000, true)));
        assert_eq!(m.to_fixed(0), Some(1000));
        assert_eq!(m.to_fixed(8), Some(256_085)); // 1000.333… · 256 = 256 085.33
        assert_eq!(MeanCode::new(2001, 2).unwrap().to_fixed(0), Some(1001)); // half rounds up
        assert_eq!(MeanCode::single(7).floor(), Some((7, false)));
        assert_eq!(MeanCode::new(5, 0), None);
        assert_eq!(MeanCode::new(u64::MAX, 1).unwrap().floor(), None);
        assert_eq!(MeanCode::new(u64::MAX, 1).unwrap().to_fixed(1), None);
        assert_eq!(MeanCode::single(1).to_fixed(32), None);
    }

    #[test]
    fn whole_means_equal_single_codes() {
        let c = bent_unit();
        for t in [-20.0f32, 0.0, 25.0, 60.0, 85.0] {
            for code in (200u32..65_300).step_by(1031) {
                let a = Calibration::correct(&c, code, t);
                let b = Corrector::correct(&c, MeanCode::new(u64::from(code) * 4, 4).unwrap(), t);
                assert_eq!(a, b, "code {code} at {t} °C");
                assert_eq!(a, Calibration::correct_mean(&c, code as f32, t), "code {code} at {t} °C");
            }
        }
    }

    #[test]
    fn fractional_mean_matches_the_f64_reference() {
        // The host's f64 path accepts a fractional code: it is the independent reference here.
        let c = bent_unit();
        let mut worst: f64 = 0.0;
        for t in [-20.0f32, 25.0, 85.0] {
            for base in (3000u32..62_000).step_by(2999) {
                for (extra, n) in [(1u64, 2u32), (1, 4), (3, 4), (5, 16), (1, 3)] {
                    let m = MeanCode::new(u64::from(base) * u64::from(n) + extra, n).unwrap();
                    let want =
                        c.correct_f64(u64::from(base) as f64 + extra as f64 / f64::from(n), f64::from(t));
                    let got = Corrector::correct(&c, m, t);
                    match (got, want) {
                        (Ok(g), Ok(w)) => worst = worst.max((f64::from(g.x) - w.x).abs() / w.dx_dcode),
                        (Err(g), Err(w)) => assert_eq!(g, w, "base {base} at {t} °C"),
                        (g, w) => panic!("{g:?} vs {w:?} at code {base}+{extra}/{n}, {t} °C"),
                    }
                }
            }
        }
        // Within 1/256 code of rounding plus f32 arithmetic, far below the 1/2 code that rounding the mean
        // to a whole code would cost.
        assert!(worst < 0.02, "worst {worst} codes");
    }

    #[test]
    fn rails_are_saturated_even_without_margin() {
        let c = Calibration::nominal(16, 32768.0, 2000.0, 25.0);
        assert_eq!(Corrector::check_code(&c, 0), Err(Error::Saturated { code: 0 }));
        assert_eq!(Corrector::check_code(&c, 65535), Err(Error::Saturated { code: 65535 }));
        assert_eq!(Corrector::check_code(&c, 1), Ok(()));
        assert_eq!(
            Corrector::check_code(&c, 70000),
            Err(Error::CodeOutOfAdcRange { code: 70000, max: 65535 })
        );
        // A mean that touches a rail code is refused, with the converter's own code in the error.
        let m = MeanCode::new(65534 + 65535, 2).unwrap();
        assert_eq!(Corrector::correct(&c, m, 25.0), Err(Error::Saturated { code: 65535 }));
    }

    #[test]
    fn twenty_four_bit_converter_rounds_the_mean() {
        let c = Calibration::nominal(24, 8_388_608.0, 500_000.0, 25.0);
        let m = MeanCode::new(2 * 9_000_000 + 1, 2).unwrap(); // 9 000 000.5 → 9 000 001
        let r = Corrector::correct(&c, m, 25.0).unwrap();
        assert_eq!(Ok(r), Calibration::correct(&c, 9_000_001, 25.0));
    }

    // -----------------------------------------------------------------------------------------------------
    // The fixed corrector, on hand-built linear tables: x = (code − 32769)·6/32768 Np at every
    // temperature, −5…55 °C accepted, 0…50 °C calibrated, x in [−5.25, 5.25] Np, i.e. codes 4097…61441
    // (the structure of `fixed::tests::linear`; the tables store control points divided by 6). A linear
    // correction makes the interpolation of a mean exact, so every expected value is exact too.

    mod fixed_path {
        use super::*;
        use crate::error::SensorFault;
        use crate::hal::temperature::{FixedSensorTable, TemperatureChannel};

        use crate::test_units::LinearFixed as Owned;

        /// The crate's linear fixed-point unit with an x range of ±`X_LIM`.
        fn owned() -> Owned {
            let mut o = crate::test_units::linear_fixed();
            o.header.x_min = -X_LIM;
            o.header.x_max = X_LIM;
            o
        }

        fn view(o: &Owned) -> FixedCalibration<'_> {
            o.view()
        }

        /// 5.25 Np in Q24: the ends of the linear unit's x range (codes 4097 and 61441).
        const X_LIM: i32 = 21 << 22;

        /// x in Q24 of a mean of 1/256-code resolution on the linear unit: 32768/6 codes per neper.
        fn want_q24(mean_256: i64) -> i32 {
            ((mean_256 - (32769 << 8)) * 12) as i32
        }

        #[test]
        fn whole_means_equal_single_codes() {
            let o = owned();
            let c = view(&o);
            for code in (4097u32..61_442).step_by(1009) {
                for t in [-5.0f32, 0.0, 25.0, 50.0, 55.0] {
                    let m = MeanCode::new(u64::from(code) * 8, 8).unwrap();
                    let want = c.correct(code, (t * 1000.0) as i32);
                    assert_eq!(correct_mean_fixed(&c, m, t), want, "code {code} at {t} °C");
                }
            }
        }

        #[test]
        fn a_fractional_mean_is_interpolated_exactly_on_a_linear_unit() {
            let o = owned();
            let c = view(&o);
            for base in (5000u64..60_000).step_by(4999) {
                for (extra, n) in
                    [(1u64, 2u32), (1, 4), (3, 4), (5, 16), (1, 3), (2, 3), (255, 256), (1, 1000)]
                {
                    let m = MeanCode::new(base * u64::from(n) + extra, n).unwrap();
                    let mean_256 = i64::from(m.to_fixed(8).unwrap());
                    let r = correct_mean_fixed(&c, m, 30.0).unwrap();
                    assert_eq!(r.x, want_q24(mean_256), "{base} + {extra}/{n}");
                    // Against the exact mean: within the 1/512 code of the mean's rounding.
                    let slope = 32768.0 / 6.0;
                    let exact = (base as f64 + extra as f64 / f64::from(n) - 32769.0) / slope;
                    let err_codes = (f64::from(r.x) / f64::from(1 << 24) - exact).abs() * slope;
                    assert!(err_codes <= 1.0 / 512.0 + 1e-9, "{base} + {extra}/{n}: {err_codes} codes");
                }
            }
        }

        #[test]
        fn edges_rails_and_temperatures() {
            let o = owned();
            let c = view(&o);
            let at = |sum: u64, n: u32, t: f32| correct_mean_fixed(&c, MeanCode::new(sum, n).unwrap(), t);
            // x = 5.25 Np at code 61441 is the top of the range; 61442 is above it.
            assert_eq!(at(4 * 61441 + 1, 4, 25.0).map(|r| r.x), Ok(X_LIM)); // nearer 61441: its value
            assert_eq!(at(4 * 61441 + 3, 4, 25.0), Err(Error::AboveRange)); // nearer 61442: its error
            assert_eq!(at(4 * 4096 + 3, 4, 25.0).map(|r| r.x), Ok(-X_LIM)); // nearer 4097
            assert_eq!(at(4 * 4096 + 1, 4, 25.0), Err(Error::BelowRange));
            // A mean touching the rail margin is saturated, with the code that touches it.
            assert_eq!(at(16 + 17, 2, 25.0), Err(Error::Saturated { code: 16 }));
            assert_eq!(at(65518 + 65519, 2, 25.0), Err(Error::Saturated { code: 65519 }));
            assert_eq!(at(2 * 70_000, 2, 25.0), Err(Error::CodeOutOfAdcRange { code: 70_000, max: 65535 }));
            assert_eq!(at(u64::MAX, 1, 25.0), Err(Error::CodeOutOfAdcRange { code: u32::MAX, max: 65535 }));
            // The codes are checked before the temperature, as in the f32 path.
            assert_eq!(at(2 * 10, 2, f32::NAN), Err(Error::Saturated { code: 10 }));
            assert_eq!(at(2 * 40_000 + 1, 2, f32::NAN), Err(Error::NonFinite));
            assert_eq!(
                at(2 * 40_000 + 1, 2, 55.5),
                Err(Error::TemperatureOutOfRange { millicelsius: 55_500 })
            );
            assert!(at(2 * 40_000 + 1, 2, 52.0).unwrap().temperature_extrapolated);
            assert!(!at(2 * 40_000 + 1, 2, 49.0).unwrap().temperature_extrapolated);
        }

        #[test]
        fn the_cycle_gets_the_integer_value_and_its_f32() {
            let o = owned();
            let c = view(&o);
            let m = MeanCode::new(4 * (32769 + 16384) + 2, 4).unwrap(); // x = (16384.5)·6/32768 Np
            for unit in Unit::ALL {
                let r = Corrector::correct_in(&c, m, 25.0, unit).unwrap();
                let f = r.fixed.unwrap();
                let reading = correct_mean_fixed(&c, m, 25.0).unwrap();
                assert_eq!(f.x_q24, reading.x);
                assert_eq!(Ok(f.value), reading.value(unit));
                assert_eq!(f.frac_bits, value_frac_bits(unit));
                let scale = (f.frac_bits as f64).exp2();
                assert!(
                    (f64::from(r.value) - f.value as f64 / scale).abs()
                        <= 1e-6 * (f.value as f64 / scale).abs()
                );
                assert_eq!(r.x, reading.x as f32 / (1u32 << 24) as f32);
            }
            // x as a power ratio in dB: 10/ln 10 · x (ISO 80000-3: 1 Np ≙ 20/ln 10 dB for amplitude, half
            // that for power).
            let r = Corrector::correct_in(&c, m, 25.0, Unit::DbPower).unwrap();
            let want = 10.0 / core::f64::consts::LN_10 * (16384.5 * 6.0 / 32768.0);
            assert!((f64::from(r.value) - want).abs() < 1e-6, "{}", r.value);
            // The top of the x range (5.25 Np) is well inside what the integer ratio holds.
            let top = MeanCode::single(61441);
            assert!(Corrector::correct_in(&c, top, 25.0, Unit::Ratio).is_ok());
        }

        #[test]
        fn the_sensor_table_as_a_temperature_channel() {
            let o = owned();
            let ch = FixedSensorTable(view(&o));
            // θ = (code − 100)·15 m°C: code 1300 is 18 °C.
            assert_eq!(ch.celsius(1300), Ok(18.0));
            assert_eq!(ch.celsius(100), Ok(0.0));
            assert_eq!(ch.celsius(5), Err(Error::Sensor(SensorFault::Short)));
            assert_eq!(ch.celsius(4095), Err(Error::Sensor(SensorFault::Open)));
            assert_eq!(ch.celsius(4050), Err(Error::Sensor(SensorFault::OutOfModelRange)));
            // Back through the corrector's conversion, θ comes back to the f32's precision: two roundings
            // of 2^-24 relative each, at most 5 θ (5 µK) at 39 °C here.
            for code in (100u32..=4000).step_by(37) {
                let t = ch.celsius(code).unwrap();
                let theta = i64::from(view(&o).theta_from_code(code).unwrap());
                let bound = (theta.abs() as f64 * 2f64.powi(-23)).ceil() as i64 + 1;
                assert!((theta_of_celsius(t).unwrap() - theta).abs() <= bound, "code {code}");
            }
            let mut no_sensor = view(&o);
            no_sensor.sensor = None;
            assert_eq!(FixedSensorTable(no_sensor).celsius(1300), Err(Error::NotCalibrated));
        }
    }
}
