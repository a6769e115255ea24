//! The float core: what the crate's f32 and f64 bodies share, so that each piece of float math is written
//! once and runs in f32 on the firmware and in f64 on the host.
//!
//! | file | owns |
//! |---|---|
//! | `backend.rs` | [`Backend`]: the f32 `ln`/`exp` of the correction ([`Libm`] by default, `Micromath` opt-in) and their measured errors |
//! | `real.rs` | `Real`: the arithmetic one generic body needs in f32 and f64 (calibration, thermistor, RTD, divider, sensor) |
//! | `arithmetic.rs` | `Arithmetic`: a float type with the `ln`/`exp` the correction uses in it (f32 with a [`Backend`], f64 with libm) |
//! | `chebyshev.rs` | `clenshaw`: Chebyshev series `Σ c_k T_k(t)` by Clenshaw's recurrence |
//!
//! Every function goes through libm or a [`Backend`] as a plain function, never through inherent float
//! methods: under `cargo test` std's inherent `f32::ln` would shadow an extension trait, and the host would
//! test other math than the firmware runs.

mod arithmetic;
mod backend;
mod chebyshev;
mod real;

#[cfg(feature = "reference")]
pub(crate) use arithmetic::F64Math;
pub(crate) use arithmetic::{Arithmetic, F32Math};
#[cfg(feature = "micromath")]
pub use backend::Micromath;
pub use backend::{Backend, Libm};
pub(crate) use chebyshev::clenshaw;
pub(crate) use real::Real;
