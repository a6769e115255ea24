//! Turning the temperature channel's code into °C: the [`TemperatureChannel`] trait and three ready
//! implementations, a function wrapper ([`FromFn`]), a digital sensor that already reads in °C
//! ([`DigitalCelsius`]) and the sensor table of a fixed-point calibration ([`FixedSensorTable`]).
//!
//! The trait has the shape of the crate's sensor linearisations (`fn celsius(&self, code) -> Result<f32,
//! Error>`), so any of them can serve a cycle directly. A sensor fault is an `Err`, typically
//! [`Error::Sensor`] with [`SensorFault::Open`] or [`SensorFault::Short`] for a code at a rail: the cycle
//! then reports a sensor fault and no value.

use crate::error::{Error, SensorFault};

/// Converts a temperature channel's code to °C.
pub trait TemperatureChannel {
    /// The temperature in °C for one code, or why there is none.
    fn celsius(&self, code: u32) -> Result<f32, Error>;
}

impl<T: TemperatureChannel + ?Sized> TemperatureChannel for &T {
    fn celsius(&self, code: u32) -> Result<f32, Error> {
        T::celsius(self, code)
    }
}

/// A thermistor or RTD behind a ratiometric divider, read by its raw code.
impl TemperatureChannel for crate::sensor::TemperatureSensor {
    fn celsius(&self, code: u32) -> Result<f32, Error> {
        crate::sensor::TemperatureSensor::celsius(self, code)
    }
}

/// The temperature-sensor table of a fixed-point calibration as a [`TemperatureChannel`], for a board that
/// corrects with the fixed path and reads its temperature raw: the code goes through
/// [`FixedCalibration::theta_from_code`] in integers, and θ becomes °C with one integer-to-float conversion
/// and one division. The fixed corrector turns that °C back into θ to the f32's precision (about
/// 2⁻²³ relative: at most about 10 µK at 85 °C, a hundredth of a millikelvin). A calibration without a sensor table gives
/// [`Error::NotCalibrated`] for every code.
///
/// [`FixedCalibration::theta_from_code`]: crate::fixed::FixedCalibration::theta_from_code
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedSensorTable<'a>(pub crate::fixed::FixedCalibration<'a>);

impl TemperatureChannel for FixedSensorTable<'_> {
    fn celsius(&self, code: u32) -> Result<f32, Error> {
        Ok(crate::qformat::celsius_of_theta(self.0.theta_from_code(code)?))
    }
}

/// A [`TemperatureChannel`] made of a function or closure `Fn(u32) -> Result<f32, Error>`.
#[derive(Clone, Copy)]
pub struct FromFn<F>(pub F);

/// Wraps a function or closure as a [`TemperatureChannel`].
pub fn from_fn<F: Fn(u32) -> Result<f32, Error>>(f: F) -> FromFn<F> {
    FromFn(f)
}

impl<F: Fn(u32) -> Result<f32, Error>> TemperatureChannel for FromFn<F> {
    fn celsius(&self, code: u32) -> Result<f32, Error> {
        (self.0)(code)
    }
}

impl<F> core::fmt::Debug for FromFn<F> {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("FromFn(..)")
    }
}

#[cfg(feature = "defmt")]
impl<F> defmt::Format for FromFn<F> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(f, "FromFn(..)")
    }
}

/// What is wrong with a [`DigitalCelsius`] description.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum DigitalCelsiusError {
    /// The word width is outside 2..=32 bits.
    Width,
    /// The LSB weight is zero or not finite.
    Lsb,
    /// The offset is not finite.
    Offset,
}

impl core::fmt::Display for DigitalCelsiusError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            DigitalCelsiusError::Width => "sensor word width must be 2..=32 bits",
            DigitalCelsiusError::Lsb => "sensor LSB weight must be finite and non-zero",
            DigitalCelsiusError::Offset => "sensor offset must be finite",
        })
    }
}

impl core::error::Error for DigitalCelsiusError {}

/// A digital sensor whose word already is a temperature: `°C = offset + lsb·value`, where `value` is the
/// word read as a `bits`-wide unsigned or two's-complement integer.
///
/// Examples of the common formats: a 13-bit two's-complement word in 1/16 °C
/// (`DigitalCelsius::new(13, true, 0.0625)`), a 16-bit signed word in 1/128 °C, an unsigned word in
/// centi-kelvin (`lsb = 0.01`, `offset = −273.15`).
///
/// A word wider than `bits` is refused with [`Error::CodeOutOfAdcRange`]. An optional *open code* (the
/// word a floating bus reads, often all ones) is reported as [`SensorFault::Open`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DigitalCelsius {
    bits: u8,
    signed: bool,
    lsb_c: f32,
    offset_c: f32,
    open_code: Option<u32>,
}

impl DigitalCelsius {
    /// A sensor of `bits`-wide words, signed (two's complement) or not, `lsb_c` °C per count, no offset.
    ///
    /// ```
    /// use logtrim::hal::{DigitalCelsius, TemperatureChannel};
    ///
    /// // A 13-bit two's-complement word in 1/16 °C: 0x0190 = 400 counts = 25 °C, 0x1F00 = −256 = −16 °C.
    /// let s = DigitalCelsius::new(13, true, 0.0625).unwrap();
    /// assert_eq!(s.celsius(0x0190), Ok(25.0));
    /// assert_eq!(s.celsius(0x1F00), Ok(-16.0));
    /// assert!(s.celsius(0x2000).is_err()); // wider than 13 bits
    /// // Centi-kelvin words: 29 815 counts are 298.15 K = 25 °C.
    /// let ck = DigitalCelsius::new(16, false, 0.01).unwrap().with_offset(-273.15).unwrap();
    /// assert!((ck.celsius(29_815).unwrap() - 25.0).abs() < 1e-3);
    /// ```
    pub fn new(bits: u8, signed: bool, lsb_c: f32) -> Result<Self, DigitalCelsiusError> {
        if !(2..=32).contains(&bits) {
            return Err(DigitalCelsiusError::Width);
        }
        if !(lsb_c.is_finite() && lsb_c != 0.0) {
            return Err(DigitalCelsiusError::Lsb);
        }
        Ok(DigitalCelsius { bits, signed, lsb_c, offset_c: 0.0, open_code: None })
    }

    /// The same sensor with `offset_c` °C added to every reading.
    pub fn with_offset(mut self, offset_c: f32) -> Result<Self, DigitalCelsiusError> {
        if !offset_c.is_finite() {
            return Err(DigitalCelsiusError::Offset);
        }
        self.offset_c = offset_c;
        Ok(self)
    }

    /// The same sensor with `code` reported as an open circuit (the word a missing sensor reads).
    pub fn with_open_code(mut self, code: u32) -> Self {
        self.open_code = Some(code);
        self
    }

    fn max_code(&self) -> u32 {
        u32::MAX >> (32 - u32::from(self.bits).clamp(2, 32))
    }
}

impl TemperatureChannel for DigitalCelsius {
    fn celsius(&self, code: u32) -> Result<f32, Error> {
        let max = self.max_code();
        if code > max {
            return Err(Error::CodeOutOfAdcRange { code, max });
        }
        if self.open_code == Some(code) {
            return Err(Error::Sensor(SensorFault::Open));
        }
        let half = (max >> 1) + 1; // 2^(bits−1)
        let value: i64 = if self.signed && code >= half {
            i64::from(code) - (i64::from(max) + 1)
        } else {
            i64::from(code)
        };
        let t = self.offset_c + self.lsb_c * value as f32;
        if !t.is_finite() {
            return Err(Error::NonFinite);
        }
        Ok(t)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thirteen_bit_sixteenth_degree_words() {
        // Common practice for 13-bit two's-complement 1/16 °C sensors: 0x0190 = +25 °C, 0x1FFF = −0.0625 °C,
        // 0x1E70 = −25 °C, 0x0FFF (largest positive) = 255.9375 °C.
        let s = DigitalCelsius::new(13, true, 0.0625).unwrap();
        assert_eq!(s.celsius(0x0190), Ok(25.0));
        assert_eq!(s.celsius(0x1FFF), Ok(-0.0625));
        assert_eq!(s.celsius(0x1E70), Ok(-25.0));
        assert_eq!(s.celsius(0x0FFF), Ok(255.9375));
        assert_eq!(s.celsius(0x2000), Err(Error::CodeOutOfAdcRange { code: 0x2000, max: 0x1FFF }));
    }

    #[test]
    fn unsigned_centikelvin_with_offset() {
        // 0 °C is 273.15 K (SI): 27315 centi-kelvin.
        let s = DigitalCelsius::new(16, false, 0.01).unwrap().with_offset(-273.15).unwrap();
        assert!(libm::fabsf(s.celsius(27315).unwrap()) < 1e-3);
        assert!(libm::fabsf(s.celsius(29815).unwrap() - 25.0) < 1e-3);
    }

    #[test]
    fn open_code_and_bad_descriptions() {
        let s = DigitalCelsius::new(16, true, 1.0 / 128.0).unwrap().with_open_code(0xFFFF);
        assert_eq!(s.celsius(0xFFFF), Err(Error::Sensor(SensorFault::Open)));
        assert_eq!(s.celsius(0xFFFE), Ok(-2.0 / 128.0));
        assert_eq!(DigitalCelsius::new(1, true, 1.0), Err(DigitalCelsiusError::Width));
        assert_eq!(DigitalCelsius::new(33, true, 1.0), Err(DigitalCelsiusError::Width));
        assert_eq!(DigitalCelsius::new(12, false, 0.0), Err(DigitalCelsiusError::Lsb));
        assert_eq!(DigitalCelsius::new(12, false, f32::NAN), Err(DigitalCelsiusError::Lsb));
        let s = DigitalCelsius::new(12, false, 1.0).unwrap();
        assert_eq!(s.with_offset(f32::INFINITY), Err(DigitalCelsiusError::Offset));
        // Full 32-bit words work at both ends.
        let s = DigitalCelsius::new(32, true, 1.0).unwrap();
        assert_eq!(s.celsius(u32::MAX), Ok(-1.0));
        assert_eq!(s.celsius(0), Ok(0.0));
    }

    #[test]
    fn closures_serve_as_channels() {
        let ch =
            from_fn(|code: u32| if code == 0 { Err(Error::Sensor(SensorFault::Short)) } else { Ok(20.0) });
        assert_eq!(ch.celsius(0), Err(Error::Sensor(SensorFault::Short)));
        assert_eq!(ch.celsius(5), Ok(20.0));
        assert_eq!(TemperatureChannel::celsius(&&ch, 5), Ok(20.0));
    }
}
