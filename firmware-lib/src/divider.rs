//! ADC code → sensor resistance for a ratiometric voltage divider, with open- and short-circuit detection.
//!
//! The sensor and a series resistor `R_s` form a divider across the supply; the ADC reads the midpoint
//! against a reference proportional to that supply, so the code measures the ratio `ρ = code / F`, with `F`
//! the code equivalent of the divider's supply ([`Divider::full_scale_code`], `2^bits` when the ADC's
//! reference is the divider's supply):
//!
//! | placement | midpoint ratio ρ | resistance | open sensor reads | shorted sensor reads |
//! |---|---|---|---|---|
//! | [`Placement::LowSide`] (sensor to ground) | `R/(R_s + R)` | `R_s·code/(F − code)` | `F` (top) | `0` |
//! | [`Placement::HighSide`] (sensor to supply) | `R_s/(R_s + R)` | `R_s·(F − code)/code` | `0` | `F` (top) |
//!
//! `code` and `F − code` are formed in integers, so nothing cancels near either rail. Codes within
//! [`Divider::open_margin`] of the open rail give [`SensorFault::Open`], codes within
//! [`Divider::short_margin`] of the short rail give [`SensorFault::Short`]: such codes never become a
//! temperature. With zero margins only the rails themselves (0 and `F` or beyond) count as faults.

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::math::Real;

/// Where the sensor sits in the divider.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "snake_case", deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Placement {
    /// Sensor between the midpoint and ground, series resistor to the supply: the code rises with R.
    LowSide,
    /// Sensor between the supply and the midpoint, series resistor to ground: the code falls as R rises.
    HighSide,
}

/// A ratiometric divider read by an ADC.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Divider {
    /// Where the sensor sits.
    pub placement: Placement,
    /// The series resistor R_s, Ω (finite, > 0).
    pub series_ohm: f32,
    /// ADC resolution in bits (1..=24); codes above `2^bits − 1` are rejected.
    pub bits: u8,
    /// The code equivalent of the divider's supply (`2^bits` when the ADC reference is the supply).
    pub full_scale_code: u32,
    /// Codes within this many of the open-circuit rail are [`SensorFault::Open`].
    pub open_margin: u32,
    /// Codes within this many of the short-circuit rail are [`SensorFault::Short`].
    pub short_margin: u32,
}

impl Divider {
    /// A divider whose ADC reference is its supply (`full_scale_code = 2^bits`), with no fault margins.
    pub fn ratiometric(placement: Placement, series_ohm: f32, bits: u8) -> Divider {
        let full_scale_code = 1u32.checked_shl(u32::from(bits)).unwrap_or(0);
        Divider { placement, series_ohm, bits, full_scale_code, open_margin: 0, short_margin: 0 }
    }

    /// The same divider with codes within `open` of the open-circuit rail reported as
    /// [`SensorFault::Open`] and within `short` of the short-circuit rail as [`SensorFault::Short`].
    #[must_use]
    pub const fn with_margins(self, open: u32, short: u32) -> Divider {
        Divider { open_margin: open, short_margin: short, ..self }
    }

    /// The largest code of the converter, or an error for unusable bits.
    pub fn max_code(&self) -> Result<u32, Error> {
        if self.bits == 0 || self.bits > 24 {
            return Err(Error::InvalidCalibration(CalibrationDefect::AdcBits));
        }
        Ok((1u32 << self.bits) - 1)
    }

    /// Checks the description: bits 1..=24, a series resistor, a full scale of at least 2 codes and margins
    /// that leave at least one code between the fault bands.
    pub fn validate(&self) -> Result<(), Error> {
        self.validate_cheap()?;
        let bands = u64::from(self.open_margin) + u64::from(self.short_margin);
        if bands + 1 >= u64::from(self.full_scale_code) {
            return Err(Error::InvalidCalibration(CalibrationDefect::RailMargin));
        }
        Ok(())
    }

    /// The sensor's resistance in Ω at a code (f32, firmware).
    ///
    /// ```
    /// use logtrim::error::{Error, SensorFault};
    /// use logtrim::{Divider, Placement};
    ///
    /// // Sensor to ground under a 10 kΩ series resistor, read ratiometrically by a 12-bit converter:
    /// // R = R_s·code/(F − code) with F = 4096, so mid-scale is R_s itself.
    /// let mut d = Divider::ratiometric(Placement::LowSide, 10_000.0, 12);
    /// assert_eq!(d.resistance(2048)?, 10_000.0);
    /// assert!((d.resistance(1024)? - 10_000.0 / 3.0).abs() < 0.01);
    /// // Its forward model gives the code back.
    /// assert!((d.code_f64(10_000.0 / 3.0)? - 1024.0).abs() < 1e-9);
    ///
    /// // The rails are faults, never temperatures: 0 is a short; with a margin of 8 codes, the top is open.
    /// assert_eq!(d.resistance(0), Err(Error::Sensor(SensorFault::Short)));
    /// d.open_margin = 8;
    /// assert_eq!(d.resistance(4090), Err(Error::Sensor(SensorFault::Open)));
    /// assert!(d.resistance(4096).is_err()); // not a 12-bit code
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn resistance(&self, code: u32) -> Result<f32, Error> {
        self.resistance_generic(code)
    }

    /// The sensor's resistance in Ω at a code (f64, host).
    pub fn resistance_f64(&self, code: u32) -> Result<f64, Error> {
        self.resistance_generic(code)
    }

    /// The ideal (fractional, noise-free) code that a sensor resistance gives: the forward model, for
    /// simulation and tables on the host. Every resistance ≥ 0 has a code; whether it lies in a fault band
    /// is for [`Divider::resistance_f64`] to say.
    pub fn code_f64(&self, ohm: f64) -> Result<f64, Error> {
        self.validate_cheap()?;
        if !ohm.is_finite() {
            return Err(Error::NonFinite);
        }
        if !(ohm >= 0.0) {
            return Err(Error::Sensor(SensorFault::OutOfModelRange));
        }
        let rs = f64::from(self.series_ohm);
        let share = match self.placement {
            Placement::LowSide => ohm / (rs + ohm),
            Placement::HighSide => rs / (rs + ohm),
        };
        Ok(f64::from(self.full_scale_code) * share)
    }

    fn validate_cheap(&self) -> Result<(), Error> {
        self.max_code()?;
        if !(self.series_ohm.is_finite() && self.series_ohm > 0.0) || self.full_scale_code < 2 {
            return Err(Error::InvalidCalibration(CalibrationDefect::Coefficient));
        }
        Ok(())
    }

    /// The fault of a code in a fault band (near either rail), if it lies in one.
    fn band_fault(&self, code: u32) -> Option<SensorFault> {
        let (at_bottom, at_top) = match self.placement {
            Placement::LowSide => (SensorFault::Short, SensorFault::Open),
            Placement::HighSide => (SensorFault::Open, SensorFault::Short),
        };
        let (bottom_margin, top_margin) = match self.placement {
            Placement::LowSide => (self.short_margin, self.open_margin),
            Placement::HighSide => (self.open_margin, self.short_margin),
        };
        if code <= bottom_margin {
            Some(at_bottom)
        } else if code >= self.full_scale_code.saturating_sub(top_margin) {
            Some(at_top)
        } else {
            None
        }
    }

    fn resistance_generic<F: Real>(&self, code: u32) -> Result<F, Error> {
        self.validate_cheap()?;
        let max = self.max_code()?;
        if code > max {
            // A code the channel's converter cannot produce is a fault of the temperature channel (never
            // of the log channel): the fault of the converter's top code when that lies in a fault band,
            // else OutOfModelRange. The fixed path's sensor table reports exactly this beyond its last
            // code, so both paths (and the emitted C) give one status.
            return Err(Error::Sensor(self.band_fault(max).unwrap_or(SensorFault::OutOfModelRange)));
        }
        if let Some(fault) = self.band_fault(code) {
            return Err(Error::Sensor(fault));
        }
        // Here 0 < code < fs, so both parts of the divider are at least one code.
        let below = F::of_u32(code);
        let above = F::of_u32(self.full_scale_code - code);
        let rs = F::of(self.series_ohm);
        let r = match self.placement {
            Placement::LowSide => rs * below / above,
            Placement::HighSide => rs * above / below,
        };
        // Only an absurd series resistor (near the ends of f32) gets here: a resistance that overflows reads
        // as an open circuit, one that underflows to zero as a short.
        if !r.finite() {
            return Err(Error::Sensor(SensorFault::Open));
        }
        if !(r > F::lit(0.0)) {
            return Err(Error::Sensor(SensorFault::Short));
        }
        Ok(r)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use logtrim_checks::within;

    fn low() -> Divider {
        Divider::ratiometric(Placement::LowSide, 10_000.0, 12).with_margins(8, 4)
    }

    #[test]
    fn equal_resistors_read_half_scale() {
        // Two equal resistors divide the supply in half (Ohm's law, common practice).
        let d = low();
        assert_eq!(d.resistance(2048), Ok(10_000.0));
        let h = Divider { placement: Placement::HighSide, ..d };
        assert_eq!(h.resistance(2048), Ok(10_000.0));
        assert_eq!(d.code_f64(10_000.0), Ok(2048.0));
    }

    #[test]
    fn low_and_high_side_follow_the_divider_equation() {
        for place in [Placement::LowSide, Placement::HighSide] {
            let d = Divider { placement: place, ..low() };
            for r in [50.0, 1_000.0, 9_999.0, 33_000.0, 250_000.0] {
                // Ohm's law on the divider, written out: V_mid/V_supply.
                let share = match place {
                    Placement::LowSide => r / (10_000.0 + r),
                    Placement::HighSide => 10_000.0 / (10_000.0 + r),
                };
                let code = d.code_f64(r).unwrap();
                assert!(within(code, 4096.0 * share, 1e-9, 0.0));
                // Round trip on the exact (fractional) code is only defined for integer codes: use the
                // nearest code and compare with the equation at that code.
                let c = code.round() as u32;
                let want = match place {
                    Placement::LowSide => 10_000.0 * f64::from(c) / f64::from(4096 - c),
                    Placement::HighSide => 10_000.0 * f64::from(4096 - c) / f64::from(c),
                };
                assert!(within(d.resistance_f64(c).unwrap(), want, 0.0, 1e-12));
                assert!(within(f64::from(d.resistance(c).unwrap()), want, 0.0, 1e-6));
            }
        }
    }

    #[test]
    fn open_and_short_are_faults_never_resistances() {
        let d = low();
        let (open, short) = (Error::Sensor(SensorFault::Open), Error::Sensor(SensorFault::Short));
        assert_eq!(d.resistance(4095), Err(open));
        assert_eq!(d.resistance(4096 - 8), Err(open));
        assert!(d.resistance(4096 - 9).is_ok());
        assert_eq!(d.resistance(0), Err(short));
        assert_eq!(d.resistance(4), Err(short));
        assert!(d.resistance(5).is_ok());
        let h = Divider { placement: Placement::HighSide, ..d };
        assert_eq!(h.resistance(0), Err(open));
        assert_eq!(h.resistance(8), Err(open));
        assert!(h.resistance(9).is_ok());
        assert_eq!(h.resistance(4095), Err(short));
        assert_eq!(h.resistance(4092), Err(short));
        assert!(h.resistance(4091).is_ok());
        // With no margins the rails themselves are still faults.
        let z = Divider::ratiometric(Placement::LowSide, 10_000.0, 12);
        assert_eq!(z.resistance(0), Err(short));
        assert!(z.resistance(4095).is_ok());
        let z = Divider { full_scale_code: 4000, ..z };
        assert_eq!(z.resistance(4000), Err(open));
        assert_eq!(z.resistance(4095), Err(open));
    }

    #[test]
    fn bad_descriptions_and_codes_are_errors() {
        let d = low();
        // Codes beyond the 12-bit converter continue the open band of its top code (open margin 8), the same
        // status the fixed path's sensor table gives; without a band there, outside the model.
        for code in [4096, 65535, u32::MAX] {
            assert_eq!(d.resistance(code), Err(Error::Sensor(SensorFault::Open)), "{code}");
        }
        let bare = Divider::ratiometric(Placement::LowSide, 10_000.0, 12);
        assert_eq!(bare.resistance(4096), Err(Error::Sensor(SensorFault::OutOfModelRange)));
        let high = Divider { placement: Placement::HighSide, ..d };
        assert_eq!(high.resistance(4096), Err(Error::Sensor(SensorFault::Short)));
        let adc = Error::InvalidCalibration(CalibrationDefect::AdcBits);
        assert_eq!(Divider { bits: 0, ..d }.resistance(100), Err(adc));
        assert_eq!(Divider { bits: 25, ..d }.validate(), Err(adc));
        let coeff = Error::InvalidCalibration(CalibrationDefect::Coefficient);
        assert_eq!(Divider::ratiometric(Placement::LowSide, f32::NAN, 12).resistance(100), Err(coeff));
        assert_eq!(Divider::ratiometric(Placement::LowSide, -1.0, 12).validate(), Err(coeff));
        assert_eq!(Divider { full_scale_code: 1, ..d }.resistance(100), Err(coeff));
        let rail = Error::InvalidCalibration(CalibrationDefect::RailMargin);
        assert_eq!(Divider { open_margin: 3000, short_margin: 1095, ..d }.validate(), Err(rail));
        assert_eq!(Divider { open_margin: u32::MAX, short_margin: u32::MAX, ..d }.validate(), Err(rail));
        assert_eq!(d.validate(), Ok(()));
        assert_eq!(d.code_f64(f64::NAN), Err(Error::NonFinite));
        assert_eq!(d.code_f64(-1.0), Err(Error::Sensor(SensorFault::OutOfModelRange)));
        assert_eq!(Divider::ratiometric(Placement::LowSide, f32::INFINITY, 12).validate(), Err(coeff));
        // A full scale beyond u32 bits (bits = 32 → 2^32) is unrepresentable and caught, not wrapped.
        assert_eq!(Divider::ratiometric(Placement::LowSide, 1.0, 32).validate(), Err(adc));
    }
}
