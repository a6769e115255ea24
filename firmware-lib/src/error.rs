//! [`Error`]: every way a reading can fail to become a value (the error of the corrections, the sensors and
//! the measurement cycle's correctors), with the [`SensorFault`] and [`CalibrationDefect`] it carries.
//!
//! The modules with their own operations have their own error enums next to them (images, field records,
//! the cycle's configuration, thermistor fits, …); [`Error`] is the one a correction returns.

use core::fmt;

/// Why a temperature sensor gave no temperature.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum SensorFault {
    /// The sensor reads as an open circuit (code at or near the rail on the open side).
    Open,
    /// The sensor reads as a short circuit (code at or near the rail on the short side).
    Short,
    /// The resistance is physically possible but outside the range the sensor model covers.
    OutOfModelRange,
}

/// What was wrong with a calibration that cannot be evaluated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum CalibrationDefect {
    /// ADC bits outside 1..=24.
    AdcBits,
    /// The rail margin leaves no usable code.
    RailMargin,
    /// The temperature range is empty, reversed or not finite.
    TemperatureRange,
    /// The x range is empty, reversed or not finite.
    XRange,
    /// A coefficient is not finite, or a series or surface is longer than its capacity.
    Coefficient,
    /// The slope is zero, negative or not finite somewhere in the temperature range.
    ZeroSlope,
    /// The temperature normalisation (centre, half span, reference) is unusable.
    Normalisation,
    /// The level shift is not finite or beyond ±2^26 codes.
    LevelShift,
    /// The x range reaches beyond ±100 Np.
    XRangeLimit,
    /// The gain pole `1 + q·τ` comes within 0.05 of zero somewhere in the temperature range.
    Pole,
    /// The model is not monotone in x over the calibrated range (the bulk term or the residual overtakes
    /// the slope).
    NotMonotone,
}

/// Every way a reading can fail to become a value.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error {
    /// The ADC code is larger than the converter can produce (`code > 2^bits − 1`).
    CodeOutOfAdcRange {
        /// The code given.
        code: u32,
        /// The largest code of the converter.
        max: u32,
    },
    /// The ADC code is at or within the configured margin of a rail: the front end or ADC is saturated.
    Saturated {
        /// The code given.
        code: u32,
    },
    /// The corrected value lies below the calibrated x range, or the front end has lost its sensitivity there.
    BelowRange,
    /// The corrected value lies above the calibrated x range.
    AboveRange,
    /// The temperature lies outside the calibrated range (plus any allowed extrapolation).
    TemperatureOutOfRange {
        /// The temperature given, in m°C: rounded to the nearest m°C, and saturated at the i32 ends
        /// (±2 147 483.647 °C) for a temperature beyond them. Whole m°C, so that the integer path reports
        /// it without any float arithmetic.
        millicelsius: i32,
    },
    /// The temperature sensor is faulty.
    Sensor(SensorFault),
    /// An input (temperature, resistance, …) is NaN or infinite.
    NonFinite,
    /// The calibration cannot be evaluated.
    InvalidCalibration(CalibrationDefect),
    /// No valid calibration is loaded.
    NotCalibrated,
}

impl Error {
    /// A stable snake_case name of the variant (used in CSV `error` columns and logs); a sensor fault is named
    /// by its kind.
    ///
    /// ```
    /// use logtrim::error::{Error, SensorFault};
    /// use logtrim::Calibration;
    ///
    /// // A temperature far outside the calibrated range: the error names it, in °C from whole m°C.
    /// let cal = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
    /// let e = cal.correct(30000, 400.0).unwrap_err();
    /// assert_eq!(e, Error::TemperatureOutOfRange { millicelsius: 400_000 });
    /// assert_eq!(e.name(), "temperature_out_of_range");
    /// assert_eq!(e.to_string(), "temperature 400 °C outside the calibrated range");
    /// // A sensor fault is named by its kind, as the C library's statuses name it (LTRM_SENSOR_OPEN, …).
    /// let open = Error::from(SensorFault::Open);
    /// assert_eq!(open.name(), "sensor_open");
    /// assert_eq!(Error::from(SensorFault::Short).name(), "sensor_short");
    /// assert_eq!(Error::from(SensorFault::OutOfModelRange).name(), "sensor_out_of_model_range");
    /// assert_eq!(open.to_string(), "temperature sensor fault: sensor open circuit");
    /// ```
    pub const fn name(&self) -> &'static str {
        match self {
            Error::CodeOutOfAdcRange { .. } => "code_out_of_adc_range",
            Error::Saturated { .. } => "saturated",
            Error::BelowRange => "below_range",
            Error::AboveRange => "above_range",
            Error::TemperatureOutOfRange { .. } => "temperature_out_of_range",
            Error::Sensor(SensorFault::Open) => "sensor_open",
            Error::Sensor(SensorFault::Short) => "sensor_short",
            Error::Sensor(SensorFault::OutOfModelRange) => "sensor_out_of_model_range",
            Error::NonFinite => "non_finite",
            Error::InvalidCalibration(_) => "invalid_calibration",
            Error::NotCalibrated => "not_calibrated",
        }
    }
}

impl fmt::Display for SensorFault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            SensorFault::Open => "sensor open circuit",
            SensorFault::Short => "sensor short circuit",
            SensorFault::OutOfModelRange => "sensor resistance outside the model's range",
        })
    }
}

impl fmt::Display for CalibrationDefect {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            CalibrationDefect::AdcBits => "ADC bits must be 1..=24",
            CalibrationDefect::RailMargin => "rail margin leaves no usable code",
            CalibrationDefect::TemperatureRange => {
                "temperature range empty, reversed, not finite or outside -273.15…1000 °C"
            }
            CalibrationDefect::XRange => "x range empty, reversed or not finite",
            CalibrationDefect::Coefficient => {
                "coefficient not finite, beyond what f32 can evaluate over the range, or series too long"
            }
            CalibrationDefect::ZeroSlope => {
                "slope zero, negative or not finite somewhere in the temperature range"
            }
            CalibrationDefect::Normalisation => "temperature normalisation unusable",
            CalibrationDefect::LevelShift => "level shift not finite or beyond ±2^26 codes",
            CalibrationDefect::XRangeLimit => "x range beyond ±100 Np",
            CalibrationDefect::Pole => "gain pole 1 + q·τ within 0.05 of zero in the temperature range",
            CalibrationDefect::NotMonotone => {
                "model not monotone in x over the calibrated range (the bulk term or the residual overtakes the slope)"
            }
        })
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::CodeOutOfAdcRange { code, max } => {
                write!(f, "ADC code {code} outside the converter's range 0..={max}")
            }
            Error::Saturated { code } => write!(f, "ADC code {code} at or near a rail (saturated)"),
            Error::BelowRange => f.write_str("reading below the calibrated range"),
            Error::AboveRange => f.write_str("reading above the calibrated range"),
            Error::TemperatureOutOfRange { millicelsius } => {
                write!(f, "temperature {} °C outside the calibrated range", Celsius(*millicelsius))
            }
            Error::Sensor(s) => write!(f, "temperature sensor fault: {s}"),
            Error::NonFinite => f.write_str("input is NaN or infinite"),
            Error::InvalidCalibration(d) => write!(f, "invalid calibration: {d}"),
            Error::NotCalibrated => f.write_str("no valid calibration loaded"),
        }
    }
}

/// m°C written in °C: the shortest decimal, as an f32 of the same value prints (`90.5`, `-0.001`, `25`).
struct Celsius(i32);

impl fmt::Display for Celsius {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let sign = if self.0 < 0 { "-" } else { "" };
        let a = self.0.unsigned_abs();
        let (whole, mut frac) = (a / 1000, a % 1000);
        if frac == 0 {
            return write!(f, "{sign}{whole}");
        }
        // Trailing zeros dropped; the width is a literal in each arm (a width taken at run time is a
        // panic path of core's formatting, `Argument::from_usize`).
        if frac % 100 == 0 {
            frac /= 100;
            write!(f, "{sign}{whole}.{frac}")
        } else if frac % 10 == 0 {
            frac /= 10;
            write!(f, "{sign}{whole}.{frac:02}")
        } else {
            write!(f, "{sign}{whole}.{frac:03}")
        }
    }
}

impl core::error::Error for SensorFault {}
impl core::error::Error for CalibrationDefect {}
impl core::error::Error for Error {}

impl From<SensorFault> for Error {
    fn from(s: SensorFault) -> Self {
        Error::Sensor(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::string::ToString;

    #[test]
    fn a_temperature_prints_in_celsius_as_its_f32_would() {
        for mc in [90_500, 25_000, 0, 1, -1, -500, -40_250, 123_456, -2_000_010, i32::MAX, i32::MIN] {
            let text = Error::TemperatureOutOfRange { millicelsius: mc }.to_string();
            // std prints a float as the shortest decimal that reads back as the same float (a
            // general-purpose reference). Below 16 384 °C an f32 resolves 0.001 °C, so that decimal is the
            // m°C value's; beyond, compare with the f64 of the same value.
            let want = if mc.unsigned_abs() < 16_384_000 {
                std::format!("temperature {} °C outside the calibrated range", mc as f32 / 1000.0)
            } else {
                std::format!("temperature {} °C outside the calibrated range", f64::from(mc) / 1000.0)
            };
            assert_eq!(text, want, "{mc}");
        }
    }
}
