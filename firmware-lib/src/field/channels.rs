//! Several log channels that share one temperature reading: a sample and a reference beam, two gas
//! cells, four wavelengths. Each channel has its own factory calibration and its own [`Layers`] (trim and
//! blank); the temperature is converted once per cycle for all of them.
//!
//! One [`Bank`] of [`LogChannel`]s serves both correction paths ([`CorrectionPath`]): the f32
//! [`Calibration`] and the integer [`FixedCalibration`]. A [`Cycle`] holds the cycle's temperature and every
//! channel's temperature stage at it, computed once; every code of the cycle, for any channel and any
//! number of reads, then costs only the path's staged correction, bit for bit the path's one-call
//! correction.
//!
//! * f32 path: [`Bank::cycle_from_celsius`], or [`Bank::cycle_from_code`] with the temperature channel's
//!   [`TemperatureSensor`] (linearised once).
//! * fixed path: [`Bank::cycle_from_theta`], [`Bank::cycle_from_millicelsius`], or
//!   `cycle_from_code` (the fixed path's), which linearises the temperature code once through the sensor
//!   table of one chosen channel ([`Bank::with_sensor_channel`]).
//!
//! A channel whose calibration refuses the temperature (a narrower calibrated range) reports that error
//! for its own readings; the other channels carry on. Storage is arrays sized by a const generic: no heap.

use super::layers::{Layers, ThroughLayers};
use crate::calibration::Calibration;
use crate::error::Error;
use crate::fixed::{FixedCalibration, THETA_FRAC};
use crate::path::CorrectionPath;
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

/// One log channel: its factory calibration, a [`Calibration`] or a [`FixedCalibration`], and its field
/// layers.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LogChannel<P> {
    /// The factory calibration (never modified by the layers).
    pub calibration: P,
    /// Trim and blank.
    pub layers: Layers,
}

/// The temperature of one cycle and every channel's stage at it, computed once.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cycle<P: CorrectionPath, const N: usize> {
    temperature: P::Temperature,
    stages: [P::Stage; N],
}

#[cfg(feature = "defmt")]
impl<P: CorrectionPath, const N: usize> defmt::Format for Cycle<P, N>
where
    P::Temperature: defmt::Format,
    P::Stage: defmt::Format,
{
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(f, "Cycle {{ temperature: {}, stages: {} }}", self.temperature, self.stages)
    }
}

impl<P: CorrectionPath, const N: usize> Cycle<P, N> {
    /// The cycle's temperature, as the path takes it.
    pub fn temperature(&self) -> P::Temperature {
        self.temperature
    }

    /// A channel's stage (which holds why its calibration refused the temperature, if it did), or `None`
    /// for a channel the bank does not have.
    pub fn stage(&self, channel: usize) -> Option<&P::Stage> {
        self.stages.get(channel)
    }
}

impl<const N: usize> Cycle<Calibration, N> {
    /// The cycle's temperature, °C.
    pub fn celsius(&self) -> f32 {
        self.temperature
    }
}

impl<const N: usize> Cycle<FixedCalibration<'_>, N> {
    /// The cycle's temperature θ, Q10 m°C.
    pub fn theta(&self) -> i32 {
        self.temperature
    }

    /// The cycle's temperature rounded to m°C.
    #[deny(clippy::float_arithmetic)]
    pub fn millicelsius(&self) -> i32 {
        millicelsius_of_theta(i64::from(self.temperature))
    }
}

/// Several channels of one correction path sharing one temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Bank<P, const N: usize> {
    channels: [LogChannel<P>; N],
    /// The channel whose sensor table linearises a temperature code (fixed path; 0 unless chosen).
    sensor_channel: usize,
}

impl<P: CorrectionPath, const N: usize> Bank<P, N>
where
    P::Reading: ThroughLayers,
{
    /// A bank of channels, each calibration checked once ([`CorrectionPath::validate`]).
    ///
    /// ```
    /// use logtrim::field::{Bank, Layers, LogChannel};
    /// use logtrim::{Calibration, Error, Unit};
    ///
    /// // A sample beam and a reference beam behind one temperature sensor; the reference's calibration
    /// // covers up to 40 °C only.
    /// let sample = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
    /// let mut reference = Calibration::nominal(16, 32700.0, 1010.0, 25.0);
    /// reference.temperature.max_c = 40.0;
    /// let channel = |calibration| LogChannel { calibration, layers: Layers::FACTORY };
    /// let bank = Bank::new([channel(sample), channel(reference)])?;
    ///
    /// // One temperature per cycle for both channels; each reading is bit for bit its channel's own.
    /// let cycle = bank.cycle_from_celsius(30.0)?;
    /// let [s, r] = bank.correct(&cycle, &[30000, 31000]);
    /// assert_eq!(s, sample.correct(30000, 30.0));
    /// assert_eq!(r, reference.correct(31000, 30.0));
    /// // x = ln(I_sig/I_ref) of the two beams: their difference is the ratio of the two signals.
    /// let ratio_db = Unit::DbPower.from_x(s?.x - r?.x);
    /// assert!(ratio_db < 0.0);
    ///
    /// // At 45 °C the reference refuses the temperature; the sample channel carries on.
    /// let hot = bank.cycle_from_celsius(45.0)?;
    /// let [s, r] = bank.correct(&hot, &[30000, 31000]);
    /// assert!(s.is_ok());
    /// assert!(matches!(r, Err(Error::TemperatureOutOfRange { .. })));
    /// # Ok::<(), Box<dyn core::error::Error>>(())
    /// ```
    pub fn new(channels: [LogChannel<P>; N]) -> Result<Bank<P, N>, BankError> {
        for (channel, c) in channels.iter().enumerate() {
            c.calibration.validate().map_err(|error| BankError { channel, error })?;
        }
        Ok(Bank { channels, sensor_channel: 0 })
    }

    /// The channels.
    pub fn channels(&self) -> &[LogChannel<P>; N] {
        &self.channels
    }

    /// Replaces one channel's layers (a new trim or blank); [`Error::NotCalibrated`] for a channel the bank
    /// does not have.
    pub fn set_layers(&mut self, channel: usize, layers: Layers) -> Result<(), Error> {
        self.channels.get_mut(channel).ok_or(Error::NotCalibrated)?.layers = layers;
        Ok(())
    }

    /// A cycle at a temperature as the path takes it: every channel's stage, computed once.
    pub fn cycle_at(&self, temperature: P::Temperature) -> Cycle<P, N> {
        let stages = self.channels.each_ref().map(|c| c.calibration.stage(temperature));
        Cycle { temperature, stages }
    }

    /// One channel's factory reading at the cycle's stage (no layers), e.g. to take a blank or read a
    /// standard. [`Error::NotCalibrated`] for a channel the bank does not have.
    pub fn correct_factory(
        &self,
        cycle: &Cycle<P, N>,
        channel: usize,
        code: u32,
    ) -> Result<P::Reading, Error> {
        let (c, stage) = self.channels.get(channel).zip(cycle.stage(channel)).ok_or(Error::NotCalibrated)?;
        c.calibration.correct_staged(stage, code)
    }

    /// One channel's reading through its layers.
    pub fn correct_one(&self, cycle: &Cycle<P, N>, channel: usize, code: u32) -> Result<P::Reading, Error> {
        let layers = self.channels.get(channel).ok_or(Error::NotCalibrated)?.layers;
        self.correct_factory(cycle, channel, code)?.through(&layers)
    }

    /// Every channel's reading at the cycle's stages, `codes[i]` from channel `i`.
    pub fn correct(&self, cycle: &Cycle<P, N>, codes: &[u32; N]) -> [Result<P::Reading, Error>; N] {
        core::array::from_fn(|i| match codes.get(i) {
            Some(&code) => self.correct_one(cycle, i, code),
            None => Err(Error::NotCalibrated),
        })
    }
}

impl<const N: usize> Bank<Calibration, N> {
    /// A cycle at a temperature in °C ([`Error::NonFinite`] for NaN or infinity).
    pub fn cycle_from_celsius(&self, temp_c: f32) -> Result<Cycle<Calibration, N>, Error> {
        if !temp_c.is_finite() {
            return Err(Error::NonFinite);
        }
        Ok(self.cycle_at(temp_c))
    }

    /// A cycle at the temperature channel's code, linearised once by `sensor`.
    pub fn cycle_from_code(
        &self,
        sensor: &TemperatureSensor,
        temp_code: u32,
    ) -> Result<Cycle<Calibration, N>, Error> {
        self.cycle_from_celsius(sensor.celsius(temp_code)?)
    }
}

#[deny(clippy::float_arithmetic)]
impl<'a, const N: usize> Bank<FixedCalibration<'a>, N> {
    /// The same bank, linearising a temperature code through the sensor table of channel `sensor_channel`
    /// (any channel's, when all carry the same table; a bank read in m°C does not use it). A channel the
    /// bank does not have is a [`BankError`] with [`Error::NotCalibrated`].
    pub fn with_sensor_channel(self, sensor_channel: usize) -> Result<Self, BankError> {
        if sensor_channel >= N && N > 0 {
            return Err(BankError { channel: sensor_channel, error: Error::NotCalibrated });
        }
        Ok(Bank { sensor_channel, ..self })
    }

    /// A cycle at θ (Q10 m°C): every channel's stage, computed once.
    pub fn cycle_from_theta(&self, theta: i32) -> Cycle<FixedCalibration<'a>, N> {
        self.cycle_at(theta)
    }

    /// A cycle at a temperature in m°C. [`Error::TemperatureOutOfRange`] only where θ = m°C·2^10 leaves
    /// the i32 range (beyond ±2097 °C); a channel's own range is checked in its stage.
    pub fn cycle_from_millicelsius(&self, temp_mc: i32) -> Result<Cycle<FixedCalibration<'a>, N>, Error> {
        let theta = i32::try_from(i64::from(temp_mc) << THETA_FRAC)
            .map_err(|_| Error::TemperatureOutOfRange { millicelsius: temp_mc })?;
        Ok(self.cycle_from_theta(theta))
    }

    /// A cycle at the temperature channel's code, linearised once through the sensor channel's table
    /// ([`Error::Sensor`] outside its valid span, [`Error::NotCalibrated`] if that channel has no table).
    pub fn cycle_from_code(&self, temp_code: u32) -> Result<Cycle<FixedCalibration<'a>, N>, Error> {
        let c = self.channels.get(self.sensor_channel).ok_or(Error::NotCalibrated)?;
        Ok(self.cycle_from_theta(c.calibration.theta_from_code(temp_code)?))
    }
}
