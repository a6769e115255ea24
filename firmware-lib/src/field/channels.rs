//! Several log channels that share one temperature reading: a sample and a reference beam, two gas
//! cells, four wavelengths. Each channel has its own factory calibration and its own [`Layers`] (trim and
//! blank); the temperature is converted once per cycle for all of them.
//!
//! * f32 path: [`Bank`] of [`Channel`]s. [`Bank::cycle_from_code`] linearises the temperature channel once
//!   ([`TemperatureSensor`]), and every channel is corrected at that temperature.
//! * fixed path: [`FixedBank`] of [`FixedChannel`]s. [`FixedBank::cycle_from_code`] linearises the
//!   temperature code once (through the sensor table of one chosen channel), then computes each channel's
//!   temperature stage ([`FixedCalibration::stage_theta`]: the spline weights and the offset, slope, bias
//!   and sensitivity tables at that temperature) once; every code of the cycle, for any channel and any
//!   number of reads, then costs only [`FixedCalibration::correct_staged`].
//!
//! A channel whose calibration refuses the temperature (a narrower calibrated range) reports that error
//! for its own readings; the other channels carry on. Storage is arrays sized by a const generic: no heap.

use super::layers::Layers;
use crate::calibration::{Calibration, Reading};
use crate::error::Error;
use crate::fixed::{FixedCalibration, FixedReading, FixedStage, THETA_FRAC};
use crate::qformat::millicelsius_of_theta;
use crate::sensor::TemperatureSensor;

/// A channel's calibration failed its check when the bank was built.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BankError {
    /// The channel's index.
    pub channel: usize,
    /// Why its calibration was refused.
    pub error: Error,
}

impl core::fmt::Display for BankError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(f, "channel {}: {}", self.channel, self.error)
    }
}

impl core::error::Error for BankError {}

/// One f32 log channel: its factory calibration and its field layers.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Channel {
    /// The factory calibration (never modified by the layers).
    pub calibration: Calibration,
    /// Trim and blank.
    pub layers: Layers,
}

/// The temperature of one f32 cycle, converted once.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Cycle {
    temp_c: f32,
}

impl Cycle {
    /// The cycle's temperature, °C.
    pub fn celsius(&self) -> f32 {
        self.temp_c
    }
}

/// Several f32 channels sharing one temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Bank<const N: usize> {
    channels: [Channel; N],
}

impl<const N: usize> Bank<N> {
    /// A bank of channels, each calibration checked once ([`Calibration::validate`]).
    pub fn new(channels: [Channel; N]) -> Result<Bank<N>, BankError> {
        for (channel, c) in channels.iter().enumerate() {
            c.calibration.validate().map_err(|error| BankError { channel, error })?;
        }
        Ok(Bank { channels })
    }

    /// The channels.
    pub fn channels(&self) -> &[Channel; N] {
        &self.channels
    }

    /// Replaces one channel's layers (a new trim or blank); [`Error::NotCalibrated`] for a channel the bank
    /// does not have.
    pub fn set_layers(&mut self, channel: usize, layers: Layers) -> Result<(), Error> {
        self.channels.get_mut(channel).ok_or(Error::NotCalibrated)?.layers = layers;
        Ok(())
    }

    /// A cycle at a temperature in °C ([`Error::NonFinite`] for NaN or infinity).
    pub fn cycle_from_celsius(&self, temp_c: f32) -> Result<Cycle, Error> {
        if !temp_c.is_finite() {
            return Err(Error::NonFinite);
        }
        Ok(Cycle { temp_c })
    }

    /// A cycle at the temperature channel's code, linearised once by `sensor`.
    pub fn cycle_from_code(&self, sensor: &TemperatureSensor, temp_code: u32) -> Result<Cycle, Error> {
        self.cycle_from_celsius(sensor.celsius(temp_code)?)
    }

    /// One channel's factory reading (no layers), e.g. to take a blank or read a standard.
    /// [`Error::NotCalibrated`] for a channel the bank does not have.
    pub fn correct_factory(&self, cycle: &Cycle, channel: usize, code: u32) -> Result<Reading, Error> {
        let c = self.channels.get(channel).ok_or(Error::NotCalibrated)?;
        c.calibration.correct(code, cycle.temp_c)
    }

    /// One channel's reading through its layers.
    pub fn correct_one(&self, cycle: &Cycle, channel: usize, code: u32) -> Result<Reading, Error> {
        let c = self.channels.get(channel).ok_or(Error::NotCalibrated)?;
        c.calibration.correct(code, cycle.temp_c).map(|r| c.layers.apply(&r))
    }

    /// Every channel's reading at the cycle's temperature, `codes[i]` from channel `i`.
    pub fn correct(&self, cycle: &Cycle, codes: &[u32; N]) -> [Result<Reading, Error>; N] {
        core::array::from_fn(|i| match (self.channels.get(i), codes.get(i)) {
            (Some(c), Some(&code)) => c.calibration.correct(code, cycle.temp_c).map(|r| c.layers.apply(&r)),
            _ => Err(Error::NotCalibrated),
        })
    }
}

/// One fixed-path log channel: its factory tables and its field layers.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedChannel<'a> {
    /// The factory tables (never modified by the layers).
    pub calibration: FixedCalibration<'a>,
    /// Trim and blank.
    pub layers: Layers,
}

/// The temperature of one fixed-path cycle and every channel's stage at it, computed once.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedCycle<const N: usize> {
    theta: i32,
    stages: [Result<FixedStage, Error>; N],
}

impl<const N: usize> FixedCycle<N> {
    /// The cycle's temperature θ, Q10 m°C.
    pub fn theta(&self) -> i32 {
        self.theta
    }

    /// The cycle's temperature rounded to m°C.
    #[deny(clippy::float_arithmetic)]
    pub fn millicelsius(&self) -> i32 {
        millicelsius_of_theta(i64::from(self.theta))
    }

    /// A channel's stage, or why its calibration refused the temperature.
    pub fn stage(&self, channel: usize) -> Result<&FixedStage, Error> {
        match self.stages.get(channel) {
            Some(Ok(s)) => Ok(s),
            Some(Err(e)) => Err(*e),
            None => Err(Error::NotCalibrated),
        }
    }
}

/// Several fixed-path channels sharing one temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedBank<'a, const N: usize> {
    channels: [FixedChannel<'a>; N],
    sensor_channel: usize,
}

#[deny(clippy::float_arithmetic)]
impl<'a, const N: usize> FixedBank<'a, N> {
    /// A bank of channels, each table set checked once ([`FixedCalibration::validate`]). A temperature
    /// code is linearised by the sensor table of channel `sensor_channel` (any channel's, when all carry
    /// the same table; a bank read in m°C does not use it).
    pub fn new(
        channels: [FixedChannel<'a>; N],
        sensor_channel: usize,
    ) -> Result<FixedBank<'a, N>, BankError> {
        for (channel, c) in channels.iter().enumerate() {
            c.calibration.validate().map_err(|error| BankError { channel, error })?;
        }
        if sensor_channel >= N && N > 0 {
            return Err(BankError { channel: sensor_channel, error: Error::NotCalibrated });
        }
        Ok(FixedBank { channels, sensor_channel })
    }

    /// The channels.
    pub fn channels(&self) -> &[FixedChannel<'a>; N] {
        &self.channels
    }

    /// Replaces one channel's layers; [`Error::NotCalibrated`] for a channel the bank does not have.
    pub fn set_layers(&mut self, channel: usize, layers: Layers) -> Result<(), Error> {
        self.channels.get_mut(channel).ok_or(Error::NotCalibrated)?.layers = layers;
        Ok(())
    }

    /// A cycle at θ (Q10 m°C): every channel's stage, computed once.
    pub fn cycle_from_theta(&self, theta: i32) -> FixedCycle<N> {
        let stages = core::array::from_fn(|i| match self.channels.get(i) {
            Some(c) => c.calibration.stage_theta(i64::from(theta)).map_err(|e| match e {
                Error::TemperatureOutOfRange { .. } => {
                    Error::TemperatureOutOfRange { millicelsius: millicelsius_of_theta(i64::from(theta)) }
                }
                e => e,
            }),
            None => Err(Error::NotCalibrated),
        });
        FixedCycle { theta, stages }
    }

    /// A cycle at a temperature in m°C. [`Error::TemperatureOutOfRange`] only where θ = m°C·2^10 leaves
    /// the i32 range (beyond ±2097 °C); a channel's own range is checked in its stage.
    pub fn cycle_from_millicelsius(&self, temp_mc: i32) -> Result<FixedCycle<N>, Error> {
        let theta = i32::try_from(i64::from(temp_mc) << THETA_FRAC)
            .map_err(|_| Error::TemperatureOutOfRange { millicelsius: temp_mc })?;
        Ok(self.cycle_from_theta(theta))
    }

    /// A cycle at the temperature channel's code, linearised once through the sensor channel's table
    /// ([`Error::Sensor`] outside its valid span, [`Error::NotCalibrated`] if that channel has no table).
    pub fn cycle_from_code(&self, temp_code: u32) -> Result<FixedCycle<N>, Error> {
        let c = self.channels.get(self.sensor_channel).ok_or(Error::NotCalibrated)?;
        Ok(self.cycle_from_theta(c.calibration.theta_from_code(temp_code)?))
    }

    /// One channel's factory reading at the cycle's stage (no layers).
    pub fn correct_factory(
        &self,
        cycle: &FixedCycle<N>,
        channel: usize,
        code: u32,
    ) -> Result<FixedReading, Error> {
        let c = self.channels.get(channel).ok_or(Error::NotCalibrated)?;
        c.calibration.correct_staged(cycle.stage(channel)?, code)
    }

    /// One channel's reading through its layers.
    pub fn correct_one(
        &self,
        cycle: &FixedCycle<N>,
        channel: usize,
        code: u32,
    ) -> Result<FixedReading, Error> {
        let c = self.channels.get(channel).ok_or(Error::NotCalibrated)?;
        c.layers.apply_fixed(&c.calibration.correct_staged(cycle.stage(channel)?, code)?)
    }

    /// Every channel's reading at the cycle's stages, `codes[i]` from channel `i`.
    pub fn correct(&self, cycle: &FixedCycle<N>, codes: &[u32; N]) -> [Result<FixedReading, Error>; N] {
        core::array::from_fn(|i| match codes.get(i) {
            Some(&code) => self.correct_one(cycle, i, code),
            None => Err(Error::NotCalibrated),
        })
    }
}
