//! The pluggable correction of a cycle: the [`Corrector`] trait, the exact mean of a burst of codes it
//! takes ([`MeanCode`]), and its implementation for the f32 [`Calibration`].
//!
//! The cycle averages *codes* and corrects once (the reasons are in [`crate::hal::cycle`]). A mean of
//! N codes has up to log2(N) more bits than one code, so the corrector takes the mean exactly, as a sum and
//! a count, and decides itself how much of the fraction it can use. An integer fixed-point corrector can
//! take `sum·2^k / count` as a code with k fractional bits; the f32 [`Calibration`] takes the same value as
//! an f32 ([`Calibration::correct_mean`]).

use crate::calibration::{Calibration, Reading};
use crate::error::Error;

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

/// A correction (ADC code, temperature) → x that a measurement cycle can use.
///
/// Implemented for the f32 [`Calibration`]; the integer fixed-point correction implements it too, so a
/// board picks the one that suits its core without touching the cycle.
pub trait Corrector {
    /// The full check of the coefficients, run once when the corrector is installed in a cycle. A
    /// corrector that fails it is never used: every cycle reports an invalid calibration.
    fn validate(&self) -> Result<(), Error>;

    /// Checks one raw converter code: within the converter's range, not at or near a rail.
    fn check_code(&self, code: u32) -> Result<(), Error>;

    /// Corrects the mean of a burst of codes at a temperature in °C.
    fn correct(&self, code: MeanCode, temp_c: f32) -> Result<Reading, Error>;
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::calibration::{BiasTerm, Series, TemperatureRange, XRange};

    /// A unit with every code-domain term in use, so that the scaling is exercised everywhere.
    fn bent_unit() -> Calibration {
        let mut c = Calibration::nominal(16, 32768.0, 2400.0, 25.0);
        c.adc.rail_margin = 16;
        c.temperature = TemperatureRange { min_c: -20.0, max_c: 85.0, extrapolation_k: 5.0 };
        c.x_range = XRange { min: -9.0, max: 4.0, min_sensitivity: 0.05 };
        c.model.t_center_c = 32.5;
        c.model.t_half_span_k = 52.5;
        c.model.pole = -0.12;
        c.model.offset = Series::from_slice(&[120.0, 35.0, -4.0]).unwrap();
        c.model.slope = Series::from_slice(&[1900.0, 40.0, 3.0]).unwrap();
        c.model.bulk = Series::from_slice(&[6.0, 0.3]).unwrap();
        c.model.bias = BiasTerm { enabled: true, ln_beta0: -10.5, ln_beta1: 3.6, reference: -2.5 };
        c
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
}
