//! # logtrim
//!
//! Correction of readings from a log-ratio front end — two op-amps and a matched transistor pair that turn
//! two currents into `Vout = G·n·(kT/q)·ln(I_sig/I_ref)` — into a trustworthy ratio, on microcontrollers with
//! and without an FPU.
//!
//! The crate is `no_std`, allocates nothing and does not panic on any input: every fallible step returns an
//! [`Error`]. The modules, each owning one concept:
//!
//! | module | owns |
//! |---|---|
//! | [`physics`] | SI constants and the thermal voltage kT/q |
//! | [`math`] | the f32 math backends (libm by default, micromath opt-in) |
//! | [`units`] | output units computed from x = ln(I_sig/I_ref): nepers, dB, absorbance, … |
//! | [`error`] | the one error enum of the crate |
//! | [`calibration`] | the calibration of one unit and the f32 correction (ADC code, temperature) → x |
//! | [`filter`] | smoothing of readings for displays: a first-order filter in x with its time constant in samples |
//! | `hal` | (feature `hal`) a measurement cycle on embedded-hal 1.0: converter trait, oversampling, status |
//! | [`thermistor`] | NTC thermistors: Beta model and Steinhart–Hart, resistance ↔ temperature, fits from points |
//! | [`rtd`] | platinum RTDs (Pt100, Pt1000, any R₀) by Callendar–Van Dusen with the IEC 60751 coefficients |
//! | [`divider`] | ADC code → sensor resistance for a ratiometric divider, with open/short detection |
//! | [`sensor`] | the temperature channel of a unit: element behind a divider, code → °C |
//! | [`image`] | per-unit calibration images: binary layout, checked parsing, writing, A/B slots |
//! | [`fixed`] | the integer fixed-point correction from host-generated tables, for cores without an FPU |
//! | [`field`] | field layers over the factory calibration: blank referencing, trims against standards, several channels |
//!
//! Features: `serde` (derive Serialize/Deserialize on calibration types), `defmt` (derive `defmt::Format`),
//! `micromath` (an extra, faster and coarser f32 backend), `hal` (a measurement cycle on embedded-hal 1.0).
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
pub mod physics;
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
