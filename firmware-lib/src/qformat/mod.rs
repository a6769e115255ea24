//! The crate's fixed-point (Q) formats in one place: `Qn` means the integer is the value times 2^n.
//!
//! | file | owns |
//! |---|---|
//! | `shift.rs` | integer rounding shifts between Q formats (saturating, never wrapping) |
//! | `float.rs` | exact f32 ↔ Q conversions in integer arithmetic: [`q_from_f32`], [`f32_from_q`] |
//! | `temperature.rs` | the temperature formats: θ (m°C · 2^[`THETA_FRAC`]) and m°C, to and from °C |
//!
//! The integer path ([`crate::fixed`]), the field records ([`crate::field`]) and the measurement cycle's
//! fixed corrector (`hal`) all convert through these functions, so that every path rounds the same way.
//! Nothing here does float arithmetic except the three conversions to or from an f32 °C that say so
//! (`celsius_of_theta`, `millicelsius`, `millicelsius_saturating`).

#![deny(clippy::float_arithmetic)]

mod float;
mod shift;
mod temperature;

pub use float::{f32_from_q, q_from_f32, MAX_FRAC};
pub(crate) use shift::round_shr;
pub use temperature::{
    celsius_of_theta, millicelsius, millicelsius_of_theta, millicelsius_saturating, theta_of_celsius,
    THETA_FRAC,
};
