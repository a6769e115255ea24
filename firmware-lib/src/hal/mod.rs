//! A measurement cycle on embedded-hal 1.0 (feature `hal`): read the converter, oversample with outlier
//! rejection, read the temperature, correct, report a value with status flags.
//!
//! | module | owns |
//! |---|---|
//! | [`adc`] | the [`AdcChannel`] trait a board implements per converter channel, and its error kinds |
//! | [`sar16`] | [`SpiSar16`]: a ready channel for a 16-bit SAR converter on an [`embedded_hal::spi::SpiDevice`] |
//! | [`temperature`] | the [`TemperatureChannel`] trait (code → °C) with a closure wrapper and a digital sensor |
//! | [`correct`] | the [`Corrector`] trait, the exact [`MeanCode`] it takes, its implementations for [`crate::Calibration`] and [`crate::fixed::FixedCalibration`] |
//! | [`config`] | [`CycleConfig`], [`Oversampling`], [`Reject`] and the check against the buffer capacity |
//! | [`cycle`] | [`Cycle`], [`Measurement`], [`Status`]: the cycle itself, and why codes are averaged first |
//!
//! A board in a few lines (the SPI devices and the delay come from the board's HAL):
//!
//! ```
//! # use embedded_hal::{delay::DelayNs, spi::{ErrorType, Operation, SpiDevice}};
//! # struct Spi(u16);
//! # impl ErrorType for Spi { type Error = core::convert::Infallible; }
//! # impl SpiDevice for Spi {
//! #     fn transaction(&mut self, ops: &mut [Operation<'_, u8>]) -> Result<(), Self::Error> {
//! #         for op in ops { if let Operation::Read(b) = op { b.copy_from_slice(&self.0.to_be_bytes()) } }
//! #         Ok(())
//! #     }
//! # }
//! # struct Delay;
//! # impl DelayNs for Delay { fn delay_ns(&mut self, _: u32) {} }
//! # let (log_spi, temp_spi, mut delay) = (Spi(34_768), Spi(20_000), Delay);
//! use logtrim::hal::{self, CycleConfig, Oversampling, SpiSar16};
//! use logtrim::{Calibration, Unit};
//!
//! // 16 codes per reading, the two lowest and highest dropped; one temperature sample.
//! let config = CycleConfig { log: Oversampling::trimmed_mean(16, 2), ..CycleConfig::single(Unit::DbPower) }
//!     .check::<16>()?;
//! // A thermistor divider on the second converter, linearised by the board's function.
//! let sensor = hal::temperature::from_fn(|code| Ok(25.0 + (f32::from(code as u16) - 20_000.0) * 1e-3));
//! let calibration = Some(Calibration::nominal(16, 32_768.0, 2_000.0, 25.0));
//! let mut cycle = hal::Cycle::new(SpiSar16::new(log_spi), SpiSar16::new(temp_spi), sensor, calibration, config);
//!
//! let m = cycle.measure(&mut delay);
//! assert!(m.status().is_clean());
//! // 2000 codes above the level shift at 25 °C: 1 Np, 10·log10(e) = 4.343 dB as a power ratio.
//! assert!((m.value().unwrap_or(f32::NAN) - 4.3429).abs() < 1e-3);
//! # Ok::<(), logtrim::hal::ConfigError>(())
//! ```

pub mod adc;
pub mod config;
pub mod correct;
pub mod cycle;
pub mod sar16;
pub mod temperature;

pub use adc::{AdcChannel, ErrorKind};
pub use config::{Channel, CheckedConfig, ConfigError, CycleConfig, Oversampling, Reject};
pub use correct::{Corrected, Corrector, FixedValue, MeanCode};
pub use cycle::{Cycle, CycleError, Measurement, Status};
pub use sar16::{Coding, SpiSar16};
pub use temperature::{DigitalCelsius, FixedSensorTable, TemperatureChannel};
