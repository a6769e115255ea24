//! The temperature channel of a unit: a sensing element behind a divider, from ADC code to °C.
//!
//! A [`TemperatureSensor`] is plain data (stored in calibration files, used on the host to convert
//! temperature codes and to build code → temperature tables, and by the firmware's measurement cycle):
//!
//! ```text
//! code ──Divider──▶ R (Ω) ──SensorElement──▶ t (°C) ──[min_c, max_c]──▶ temperature
//!        Open / Short        OutOfModelRange            OutOfModelRange
//! ```
//!
//! A code in a fault band gives [`SensorFault::Open`] or [`SensorFault::Short`]; a resistance the element's
//! model cannot map, or a temperature outside the channel's declared range, gives
//! [`SensorFault::OutOfModelRange`]. No fault ever becomes a temperature.
//!
//! [`TemperatureSensor::celsius`] runs in f32 for the firmware and [`TemperatureSensor::celsius_f64`] in
//! f64 for the host; both run the same generic bodies.

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use crate::divider::Divider;
use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::math::Real;
use crate::physics::ZERO_CELSIUS_K;
use crate::rtd::{self, Rtd};
use crate::thermistor::{Beta, SteinhartHart};

/// The sensing element of a temperature channel.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "snake_case", deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SensorElement {
    /// An NTC thermistor by the Beta model.
    NtcBeta(Beta),
    /// An NTC thermistor by the Steinhart–Hart equation.
    NtcSteinhartHart(SteinhartHart),
    /// A platinum RTD by Callendar–Van Dusen (IEC 60751 coefficients).
    Rtd(Rtd),
}

impl SensorElement {
    /// Checks the element's coefficients.
    pub fn validate(&self) -> Result<(), Error> {
        match self {
            SensorElement::NtcBeta(m) => m.validate(),
            SensorElement::NtcSteinhartHart(m) => m.validate(),
            SensorElement::Rtd(m) => m.validate(),
        }
    }

    /// Temperature in °C at a resistance in Ω (f32, firmware).
    pub fn celsius(&self, ohm: f32) -> Result<f32, Error> {
        match self {
            SensorElement::NtcBeta(m) => m.celsius(ohm),
            SensorElement::NtcSteinhartHart(m) => m.celsius(ohm),
            SensorElement::Rtd(m) => m.celsius(ohm),
        }
    }

    /// Temperature in °C at a resistance in Ω (f64, host).
    pub fn celsius_f64(&self, ohm: f64) -> Result<f64, Error> {
        match self {
            SensorElement::NtcBeta(m) => m.celsius_f64(ohm),
            SensorElement::NtcSteinhartHart(m) => m.celsius_f64(ohm),
            SensorElement::Rtd(m) => m.celsius_f64(ohm),
        }
    }

    /// Resistance in Ω at a temperature in °C (f64, host).
    pub fn resistance_f64(&self, celsius: f64) -> Result<f64, Error> {
        match self {
            SensorElement::NtcBeta(m) => m.resistance_f64(celsius),
            SensorElement::NtcSteinhartHart(m) => m.resistance_f64(celsius),
            SensorElement::Rtd(m) => m.resistance_f64(celsius),
        }
    }
}

/// The temperature channel of a unit: an element behind a divider, valid over a declared range.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TemperatureSensor {
    /// The sensing element.
    pub element: SensorElement,
    /// The divider and ADC that read it.
    pub divider: Divider,
    /// Lowest temperature the channel reports, °C (for an RTD, not below −200 °C).
    pub min_c: f32,
    /// Highest temperature the channel reports, °C (for an RTD, not above 850 °C).
    pub max_c: f32,
}

impl TemperatureSensor {
    /// A channel of `element` behind `divider`, reported over `min_c…max_c` °C (checked by
    /// [`validate`](Self::validate), not here).
    pub const fn new(element: SensorElement, divider: Divider, min_c: f32, max_c: f32) -> TemperatureSensor {
        TemperatureSensor { element, divider, min_c, max_c }
    }

    /// Checks the whole channel once, when it is loaded: the element's coefficients, the divider, the
    /// range (finite, `min_c < max_c`, above absolute zero, within −200…850 °C for an RTD) and that the
    /// element's curve is monotone over the range (for Steinhart–Hart).
    pub fn validate(&self) -> Result<(), Error> {
        self.element.validate()?;
        self.divider.validate()?;
        self.check_range()?;
        if let SensorElement::NtcSteinhartHart(sh) = &self.element {
            // The slope B + 3C·L² is extreme at the ends of the span (or at L = 0 when the span holds it).
            let r_hot = sh.resistance_f64(f64::from(self.max_c));
            let r_cold = sh.resistance_f64(f64::from(self.min_c));
            let (r_hot, r_cold) = match (r_hot, r_cold) {
                (Ok(h), Ok(c)) => (h, c),
                _ => return Err(Error::InvalidCalibration(CalibrationDefect::TemperatureRange)),
            };
            let spans_one_ohm = r_hot < 1.0 && r_cold > 1.0;
            if !(sh.slope_at_f64(r_hot) > 0.0 && sh.slope_at_f64(r_cold) > 0.0 && r_hot < r_cold)
                || (spans_one_ohm && !(sh.b > 0.0))
            {
                return Err(Error::InvalidCalibration(CalibrationDefect::TemperatureRange));
            }
        }
        Ok(())
    }

    /// The temperature in °C at a code of the temperature channel (f32, firmware).
    ///
    /// ```
    /// use logtrim::{Divider, Placement, Rtd, SensorElement, TemperatureSensor};
    ///
    /// // A Pt1000 to ground under a 1 kΩ series resistor, 16-bit converter, reported over −50…150 °C.
    /// let channel = TemperatureSensor {
    ///     element: SensorElement::Rtd(Rtd::PT1000),
    ///     divider: Divider::ratiometric(Placement::LowSide, 1000.0, 16),
    ///     min_c: -50.0,
    ///     max_c: 150.0,
    /// };
    /// channel.validate()?;
    /// // At 0 °C a Pt1000 is 1000 Ω (IEC 60751), equal to the series resistor: mid-scale.
    /// assert!(channel.celsius(32768)?.abs() < 1e-3);
    /// // The host's forward model and the firmware's reading agree within one code's worth.
    /// let code = channel.code_f64(100.0)?;
    /// assert!((channel.celsius(code.round() as u32)? - 100.0).abs() < 0.02);
    /// // A code beyond the declared range (here 200 °C) is refused, not extrapolated.
    /// let code_200 = channel.divider.code_f64(Rtd::PT1000.resistance_f64(200.0)?)?;
    /// assert!(channel.celsius(code_200.round() as u32).is_err());
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn celsius(&self, code: u32) -> Result<f32, Error> {
        self.check_range()?;
        let ohm = self.divider.resistance(code)?;
        let t = self.element.celsius(ohm)?;
        in_range(t, self.min_c, self.max_c)
    }

    /// The temperature in °C at a code of the temperature channel (f64, host).
    pub fn celsius_f64(&self, code: u32) -> Result<f64, Error> {
        self.check_range()?;
        let ohm = self.divider.resistance_f64(code)?;
        let t = self.element.celsius_f64(ohm)?;
        in_range(t, f64::from(self.min_c), f64::from(self.max_c))
    }

    /// The ideal (fractional, noise-free) code the channel reads at a temperature in °C (f64, host): for
    /// simulating a unit and for placing table knots. Temperatures outside the range are refused.
    pub fn code_f64(&self, celsius: f64) -> Result<f64, Error> {
        self.check_range()?;
        if !celsius.is_finite() {
            return Err(Error::NonFinite);
        }
        in_range(celsius, f64::from(self.min_c), f64::from(self.max_c))?;
        let ohm = self.element.resistance_f64(celsius)?;
        self.divider.code_f64(ohm)
    }

    fn check_range(&self) -> Result<(), Error> {
        let (lo, hi) = (self.min_c, self.max_c);
        let mut ok = lo.is_finite() && hi.is_finite() && lo < hi && f64::from(lo) > -ZERO_CELSIUS_K;
        if let SensorElement::Rtd(_) = self.element {
            ok = ok && f64::from(lo) >= rtd::MIN_C && f64::from(hi) <= rtd::MAX_C;
        }
        if ok {
            Ok(())
        } else {
            Err(Error::InvalidCalibration(CalibrationDefect::TemperatureRange))
        }
    }
}

/// A temperature within the channel's range, or OutOfModelRange.
fn in_range<F: Real>(t: F, lo: F, hi: F) -> Result<F, Error> {
    if t >= lo && t <= hi {
        Ok(t)
    } else {
        Err(Error::Sensor(SensorFault::OutOfModelRange))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::divider::Placement;
    use logtrim_checks::within;

    fn ntc_channel() -> TemperatureSensor {
        let beta = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 };
        let divider = Divider::ratiometric(Placement::LowSide, 10_000.0, 12).with_margins(16, 16);
        TemperatureSensor::new(SensorElement::NtcBeta(beta), divider, -40.0, 125.0)
    }

    fn pt1000_channel() -> TemperatureSensor {
        TemperatureSensor {
            element: SensorElement::Rtd(Rtd::PT1000),
            divider: Divider::ratiometric(Placement::HighSide, 2_000.0, 16),
            min_c: -50.0,
            max_c: 300.0,
        }
    }

    #[test]
    fn code_to_celsius_round_trips_through_the_forward_model() {
        for s in [ntc_channel(), pt1000_channel()] {
            assert_eq!(s.validate(), Ok(()));
            for i in 0..=30 {
                let t = f64::from(s.min_c) + (f64::from(s.max_c) - f64::from(s.min_c)) * f64::from(i) / 30.0;
                let code = s.code_f64(t).unwrap().round() as u32;
                // Compare with the chain done by hand at that integer code.
                let want = s.element.celsius_f64(s.divider.resistance_f64(code).unwrap());
                match (s.celsius_f64(code), want) {
                    (Ok(got), Ok(w)) => {
                        assert!(within(got, w, 1e-12, 0.0));
                        let got32 = f64::from(s.celsius(code).unwrap());
                        assert!(within(got32, got, 2e-3, 0.0), "f32 {got32} vs f64 {got} at {t} °C");
                    }
                    // Rounding the code at an end of the range may step just outside it.
                    (Err(Error::Sensor(SensorFault::OutOfModelRange)), _) => {
                        assert!(i == 0 || i == 30, "{t}")
                    }
                    (g, w) => panic!("{g:?} / {w:?} at {t} °C"),
                }
            }
        }
    }

    #[test]
    fn ntc_at_25c_with_an_equal_series_resistor_reads_half_scale() {
        // A 10 kΩ NTC at 25 °C against 10 kΩ: half the supply (common practice for NTC dividers).
        let s = ntc_channel();
        assert!(within(s.code_f64(25.0).unwrap(), 2048.0, 1e-6, 0.0));
        assert!(within(f64::from(s.celsius(2048).unwrap()), 25.0, 1e-3, 0.0));
    }

    #[test]
    fn faults_never_become_temperatures() {
        let s = ntc_channel();
        assert_eq!(s.celsius(4095), Err(Error::Sensor(SensorFault::Open)));
        assert_eq!(s.celsius(3), Err(Error::Sensor(SensorFault::Short)));
        // A code beyond the channel's 12-bit converter continues its top code's band (open, low side).
        assert_eq!(s.celsius(5000), Err(Error::Sensor(SensorFault::Open)));
        // Code 4000 is 10 kΩ·4000/96 ≈ 417 kΩ: about −40.5 °C, below the declared −40 °C.
        assert_eq!(s.celsius(4000), Err(Error::Sensor(SensorFault::OutOfModelRange)));
        assert_eq!(s.celsius_f64(4000), Err(Error::Sensor(SensorFault::OutOfModelRange)));
        assert_eq!(s.code_f64(130.0), Err(Error::Sensor(SensorFault::OutOfModelRange)));
        assert_eq!(s.code_f64(f64::NAN), Err(Error::NonFinite));
    }

    #[test]
    fn bad_descriptions_are_errors() {
        let range = Error::InvalidCalibration(CalibrationDefect::TemperatureRange);
        let s = TemperatureSensor { min_c: 50.0, max_c: 50.0, ..ntc_channel() };
        assert_eq!(s.validate(), Err(range));
        assert_eq!(s.celsius(2048), Err(range));
        let s = TemperatureSensor { max_c: f32::NAN, ..ntc_channel() };
        assert_eq!(s.celsius(2048), Err(range));
        let s = TemperatureSensor { min_c: -250.0, ..pt1000_channel() };
        assert_eq!(s.validate(), Err(range));
        let s =
            TemperatureSensor { element: SensorElement::Rtd(Rtd { r0_ohm: f32::NAN }), ..pt1000_channel() };
        assert_eq!(s.celsius(30_000), Err(Error::InvalidCalibration(CalibrationDefect::Coefficient)));
        // A Steinhart–Hart curve that turns back inside the declared range.
        let sh = SteinhartHart { a: 1.2e-3, b: 2.5e-4, c: -4.0e-7 };
        let s = TemperatureSensor { element: SensorElement::NtcSteinhartHart(sh), ..ntc_channel() };
        assert_eq!(s.validate(), Err(range));
        let fine = SteinhartHart { a: 1.009_249_5e-3, b: 2.378_405_4e-4, c: 2.019_202_7e-7 };
        let s = TemperatureSensor { element: SensorElement::NtcSteinhartHart(fine), ..ntc_channel() };
        assert_eq!(s.validate(), Ok(()));
    }
}
