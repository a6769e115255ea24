//! An invented raw temperature channel: a 10 kΩ NTC thermistor (B = 3950 K, both typical catalogue values,
//! common practice) below a 10 kΩ resistor, read ratiometrically by a 12-bit ADC. The β equation
//! `1/T = 1/T0 + ln(R/R0)/B` (common practice) gives the temperature.
#![allow(dead_code)]

use logtrim::error::SensorFault;
use logtrim::Error;

/// Codes of the 12-bit channel.
pub const CODES: std::ops::RangeInclusive<u32> = 0..=4095;

/// Code → °C, with faults near the rails and outside −40…125 °C.
pub fn celsius(code: u32) -> Result<f64, Error> {
    if code <= 5 {
        return Err(Error::Sensor(SensorFault::Short));
    }
    if code >= 4090 {
        return Err(Error::Sensor(SensorFault::Open));
    }
    let c = f64::from(code);
    let r = 10_000.0 * c / (4095.0 - c);
    let t = 1.0 / (1.0 / 298.15 + (r / 10_000.0).ln() / 3950.0) - 273.15;
    if !(-40.0..=125.0).contains(&t) {
        return Err(Error::Sensor(SensorFault::OutOfModelRange));
    }
    Ok(t)
}
