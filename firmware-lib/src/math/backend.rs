//! The f32 `ln` and `exp` of the correction: the [`Backend`] trait, [`Libm`] (the default) and `Micromath`
//! (feature `micromath`), with their measured errors.

/// An f32 implementation of the two transcendental functions the correction needs.
///
/// The correction calls `ln` and `exp` through a backend as plain functions, never as `f32` methods.
///
/// | backend | feature | `ln`, 1e-6 ≤ x < 1 | `ln`, 1 ≤ x < 1e6 | `exp`, −20 ≤ x ≤ 20 |
/// |---|---|---|---|---|
/// | [`Libm`] (default) | always | 0.78 ULP (7.6e-8 rel) | 0.74 ULP (7.7e-8 rel) | 0.85 ULP (7.0e-8 rel) |
/// | `Micromath` | `micromath` | 0.118 abs (1.7e7 ULP) | 6.2e-5 abs (8e6 ULP near 1) | 2.4e-3 rel |
///
/// Maximum errors against std's f64 over 100 000 f32 inputs per cell (half evenly spaced, half seeded
/// random), measured by `tests/backend_accuracy.rs`, which asserts these bounds:
/// libm `logf`/`expf` within 1 ULP; micromath `ln` below 1: 0.12 absolute,
/// `ln` at or above 1: 7e-5 absolute, `exp`: 2.5e-3 relative. micromath's `ln` below 1 and its `exp` are
/// outside a ¼-LSB budget for a 16-bit log channel.
///
/// ```
/// use logtrim::math::{Backend, Libm};
///
/// // ln 10 = 2.302585093 and e^1 = 2.718281828 (mathematical constants), within an f32 ULP or two.
/// assert!((Libm::ln(10.0) - 2.302_585_1).abs() <= 2.0 * f32::EPSILON * 2.31);
/// assert!((Libm::exp(1.0) - core::f32::consts::E).abs() <= 2.0 * f32::EPSILON * 2.72);
/// // The coarse backend keeps the error bound stated above for ln at or above 1.
/// #[cfg(feature = "micromath")]
/// assert!((logtrim::math::Micromath::ln(10.0) - 2.302_585_1).abs() < 7e-5);
/// ```
///
/// micromath is offered for parts where speed matters more than the last digits; `logtrim verify` reports
/// its error honestly.
pub trait Backend {
    /// Natural logarithm.
    fn ln(x: f32) -> f32;
    /// Natural exponential.
    fn exp(x: f32) -> f32;
}

/// The default backend: libm's `logf` and `expf`.
#[derive(Debug, Clone, Copy, Default)]
pub struct Libm;

impl Backend for Libm {
    #[inline]
    fn ln(x: f32) -> f32 {
        libm::logf(x)
    }
    #[inline]
    fn exp(x: f32) -> f32 {
        libm::expf(x)
    }
}

/// The opt-in fast backend: micromath's approximations (coarse: see the table at [`Backend`]).
#[cfg(feature = "micromath")]
#[cfg_attr(docsrs, doc(cfg(feature = "micromath")))]
#[derive(Debug, Clone, Copy, Default)]
pub struct Micromath;

/// micromath 2.1's `exp` trips a `debug_assert!` (a panic in debug builds, NaN in release) for
/// 88.72284 ≤ x ≤ 89.41598; e^x overflows f32 from 88.7228 on, so from here the answer is +∞.
#[cfg(feature = "micromath")]
const MICROMATH_EXP_OVERFLOW: f32 = 88.722_84;

// The guards keep micromath's debug assertions from panicking (found by `tests/no_panic.rs`): in debug builds
// of micromath 2.1, `ln` of a negative number and `exp` of 88.72284…89.41598 panic. NaN goes through as NaN
// (micromath's `exp` returns +∞ for it). Checked over all 2³² inputs with debug assertions on: no panic.
#[cfg(feature = "micromath")]
impl Backend for Micromath {
    #[inline]
    fn ln(x: f32) -> f32 {
        if x.is_nan() || x < 0.0 {
            return f32::NAN;
        }
        micromath::F32Ext::ln(x)
    }
    #[inline]
    fn exp(x: f32) -> f32 {
        if x.is_nan() {
            return x;
        }
        if x >= MICROMATH_EXP_OVERFLOW {
            return f32::INFINITY;
        }
        micromath::F32Ext::exp(x)
    }
}
