//! [`Real`]: the arithmetic the crate's generic float bodies need, so that one body serves the firmware's
//! f32 and the host's f64 (the calibration's inverse, the thermistor, RTD and divider models, the
//! temperature channel).

use core::ops::{Add, Div, Mul, Neg, Sub};

/// A float type the generic bodies run in: f32 on the firmware, f64 on the host.
///
/// Every function goes through libm (`logf`/`log`, …), never through inherent float methods, so that host
/// tests run the firmware's math. The correction's own `ln`/`exp` go through an
/// [`Arithmetic`](super::Arithmetic) instead, which lets the f32 path choose its [`Backend`](super::Backend).
pub(crate) trait Real:
    Copy
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + From<f32>
{
    /// Machine epsilon of the type.
    const EPSILON: Self;
    /// A stored f32 value (exact in either type).
    fn of(v: f32) -> Self;
    /// A constant, rounded to the type's precision.
    fn lit(v: f64) -> Self;
    /// An integer (an ADC code: exact in f32 up to 2^24).
    fn of_u32(v: u32) -> Self;
    /// Neither NaN nor infinite.
    fn finite(self) -> bool;
    /// |x|.
    fn abs_(self) -> Self;
    /// √x.
    fn sqrt_(self) -> Self;
    /// ln x.
    fn ln_(self) -> Self;
    /// e^x.
    fn exp_(self) -> Self;
    /// sin x.
    fn sin_(self) -> Self;
    /// asin x.
    fn asin_(self) -> Self;
    /// sinh x.
    fn sinh_(self) -> Self;
    /// asinh x.
    fn asinh_(self) -> Self;
    /// A temperature in °C as whole m°C, rounded half away from zero, saturating at the i32 ends (for
    /// [`Error::TemperatureOutOfRange`](crate::Error::TemperatureOutOfRange)).
    fn millicelsius(self) -> i32;
}

/// `impl Real` for one float type from its libm functions, so that both types have the same body.
macro_rules! real {
    ($t:ty, lit: $lit:path, millicelsius: $mc:path, libm: { $($name:ident: $f:path),* $(,)? }) => {
        impl Real for $t {
            const EPSILON: $t = <$t>::EPSILON;
            fn of(v: f32) -> $t {
                <$t>::from(v)
            }
            fn lit(v: f64) -> $t {
                $lit(v)
            }
            fn of_u32(v: u32) -> $t {
                v as $t
            }
            fn finite(self) -> bool {
                self.is_finite()
            }
            fn millicelsius(self) -> i32 {
                $mc(self)
            }
            $(
                fn $name(self) -> $t {
                    $f(self)
                }
            )*
        }
    };
}

real!(f32, lit: f32_of_f64, millicelsius: crate::qformat::millicelsius_saturating, libm: {
    abs_: libm::fabsf, sqrt_: libm::sqrtf, ln_: libm::logf, exp_: libm::expf,
    sin_: libm::sinf, asin_: libm::asinf, sinh_: libm::sinhf, asinh_: libm::asinhf,
});

real!(f64, lit: core::convert::identity, millicelsius: millicelsius_f64, libm: {
    abs_: libm::fabs, sqrt_: libm::sqrt, ln_: libm::log, exp_: libm::exp,
    sin_: libm::sin, asin_: libm::asin, sinh_: libm::sinh, asinh_: libm::asinh,
});

/// A constant rounded to f32.
fn f32_of_f64(v: f64) -> f32 {
    v as f32
}

/// The host's m°C of a temperature: `as` saturates at the i32 ends (the temperature is finite where
/// this is used).
fn millicelsius_f64(temp_c: f64) -> i32 {
    libm::round(temp_c * 1000.0) as i32
}
