//! # logtrim
//!
//! Correction of readings from a log-ratio front end — two op-amps and a matched transistor pair that turn
//! two currents into `Vout = G·n·(kT/q)·ln(I_sig/I_ref)` — into a trustworthy ratio, on microcontrollers with
//! and without an FPU.
//!
//! The crate is `no_std`, allocates nothing and does not panic on any input: every fallible step returns an
//! [`Error`] (or the error enum of its own module). The modules, each owning one concept:
//!
//! | module | owns |
//! |---|---|
//! | [`physics`] | SI constants and the thermal voltage kT/q |
//! | [`math`] | the float core: the f32 `ln`/`exp` backends (libm by default, micromath opt-in), the one generic arithmetic of the f32/f64 bodies, Chebyshev series |
//! | [`qformat`] | the fixed-point (Q) formats: rounding shifts, exact f32 ↔ Q conversions, θ and m°C ↔ °C |
//! | [`units`] | output units computed from x = ln(I_sig/I_ref): nepers, dB, absorbance, … |
//! | [`error`] | [`Error`], the error of a correction, with the sensor fault and calibration defect it carries |
//! | [`calibration`] | the calibration of one unit, its f32 correction (ADC code, temperature) → x, and (feature `reference`) the host's f64 reference |
//! | [`filter`] | smoothing of readings for displays: a first-order filter in x with its time constant in samples |
//! | `hal` | (feature `hal`) a measurement cycle on embedded-hal 1.0: converter trait, oversampling, status |
//! | [`thermistor`] | NTC thermistors: Beta model and Steinhart–Hart, resistance ↔ temperature, fits from points |
//! | [`rtd`] | platinum RTDs (Pt100, Pt1000, any R₀) by Callendar–Van Dusen with the IEC 60751 coefficients |
//! | [`divider`] | ADC code → sensor resistance for a ratiometric divider, with open/short detection |
//! | [`sensor`] | the temperature channel of a unit: element behind a divider, code → °C |
//! | [`record`] | what every stored record shares: the layout vocabulary, the framing (magic, version, length, CRC-32), checked reading and writing, the A/B slot rule |
//! | [`image`] | per-unit calibration images on that framing: their layout, sections and value checks, loading the fixed tables, A/B slots |
//! | [`fixed`] | the integer fixed-point correction from host-generated tables, for cores without an FPU |
//! | [`path`] | the f32 and fixed correction paths behind one trait, for code that serves both |
//! | [`field`] | field layers over the factory calibration: blank and trim records on the same framing, trims against standards, banks of channels |
//!
//! Features: `serde` (derive Serialize/Deserialize on calibration types), `defmt` (derive `defmt::Format`),
//! `micromath` (an extra, faster and coarser f32 backend), `hal` (a measurement cycle on embedded-hal 1.0),
//! `reference` (the host's f64 reference of the calibration: not for firmware builds).
//!
//! # Quick start
//!
//! A unit's calibration arrives as an image in EEPROM or flash; the firmware checks it once with
//! [`Image::parse`] and then corrects every (ADC code, temperature) pair into x = ln(I_sig/I_ref), which
//! [`Unit`] turns into the quantity the instrument shows. Here the image is written first, from the design
//! values of an uncalibrated unit ([`Calibration::nominal`]: a 16-bit converter, the log stage's zero at
//! code 32 768, 1 000 codes per neper at 25 °C), as the production line would write a fitted one.
//!
//! ```
//! use logtrim::image::{self, ImageInfo};
//! use logtrim::{Calibration, Image, Unit};
//!
//! // On the line: write the unit's image into a buffer (the bytes that go to EEPROM).
//! let nominal = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
//! let info = ImageInfo { serial: "DL-0001", calibrated_at: 1_700_000_000, sequence: 1 };
//! let mut eeprom = [0u8; 512];
//! let len = image::write(&mut eeprom, &info, &nominal).expect("a nominal calibration is valid");
//!
//! // In the field: check the bytes once, then trust them.
//! let image = Image::parse(&eeprom[..len]).expect("the image just written");
//! assert_eq!(image.serial(), "DL-0001");
//! let cal = image.calibration();
//! assert_eq!(cal, nominal); // an image stores every f32 bit for bit
//!
//! // A sample that absorbs 90 % of the light: I_sig/I_ref = 0.1, x = −ln 10, so the code lies
//! // 1000·ln 10 ≈ 2302.6 codes below the zero. Its absorbance is 1 AU and its transmittance 10 %
//! // (A = −log10 T: the definition of absorbance, common practice).
//! let code = 32768 - 2303;
//! let reading = cal.correct(code, 25.0)?;
//! assert!((reading.value(Unit::Absorbance) - 1.0).abs() < 1e-3);
//! assert!((reading.value(Unit::TransmittancePercent) - 10.0).abs() < 0.01);
//!
//! // The slope of a log-ratio stage is proportional to kT/q, so the same code at 50 °C means a ratio
//! // closer to 1: x scales by T_ref/T = 298.15 K / 323.15 K.
//! let warm = cal.correct(code, 50.0)?;
//! assert!((warm.x / reading.x - 298.15 / 323.15).abs() < 1e-5);
//!
//! // Bad input is an error, never a panic: a code beyond a 16-bit converter's range.
//! assert!(cal.correct(70_000, 25.0).is_err());
//! # Ok::<(), logtrim::Error>(())
//! ```
#![no_std]
#![cfg_attr(docsrs, feature(doc_cfg))]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic, clippy::indexing_slicing)
)]

#[cfg(test)]
extern crate std;
#[cfg(test)]
mod test_units;

pub mod calibration;
pub mod divider;
pub mod error;
pub mod field;
pub mod filter;
pub mod fixed;
#[cfg(feature = "hal")]
#[cfg_attr(docsrs, doc(cfg(feature = "hal")))]
pub mod hal;
pub mod image;
pub mod math;
pub mod path;
pub mod physics;
pub mod qformat;
pub mod record;
pub mod rtd;
pub mod sensor;
pub mod thermistor;
pub mod units;

pub use calibration::{Calibration, Reading};
pub use divider::{Divider, Placement};
pub use error::Error;
pub use image::{Image, ImageError};
pub use rtd::Rtd;
pub use sensor::{SensorElement, TemperatureSensor};
pub use thermistor::{Beta, SteinhartHart};
pub use units::Unit;
