//! [`Arithmetic`]: a float type together with the `ln` and `exp` the correction evaluates in it, so that
//! the calibration's inverse is one generic body for the f32 path (any [`Backend`]) and the f64 reference.

use core::marker::PhantomData;

use super::{Backend, Real};

/// The arithmetic of one correction path: its float type and its `ln`/`exp`.
pub(crate) trait Arithmetic {
    /// The float type.
    type F: Real;
    /// Natural logarithm.
    fn ln(x: Self::F) -> Self::F;
    /// Natural exponential.
    fn exp(x: Self::F) -> Self::F;
}

/// The firmware's arithmetic: f32 with the backend `B`.
pub(crate) struct F32Math<B>(PhantomData<B>);

impl<B: Backend> Arithmetic for F32Math<B> {
    type F = f32;
    fn ln(x: f32) -> f32 {
        B::ln(x)
    }
    fn exp(x: f32) -> f32 {
        B::exp(x)
    }
}

/// The host's reference arithmetic: f64 with libm's `log`/`exp`.
#[cfg(feature = "reference")]
pub(crate) struct F64Math;

#[cfg(feature = "reference")]
impl Arithmetic for F64Math {
    type F = f64;
    fn ln(x: f64) -> f64 {
        libm::log(x)
    }
    fn exp(x: f64) -> f64 {
        libm::exp(x)
    }
}
