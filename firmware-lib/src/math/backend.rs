//! The f32 `ln` and `exp` of the correction: the [`Backend`] trait, [`Libm`] (the default) and `Micromath`
//! (feature `micromath`), with their measured errors.

/// An f32 implementation of the two transcendental functions the correction needs.
///
/// The correction calls `ln` and `exp` through a backend as plain functions, never as `f32` methods.
///
/// | backend | feature | `ln`, 1e-6 ≤ x < 1 | `ln`, 1 ≤ x < 1e6 | `exp`, −20 ≤ x ≤ 20 |
/// |---|---|---|---|---|
/// | [`Libm`] (default) | always | 0.78 ULP (7.6e-8 rel) | 0.74 ULP (7.7e-8 rel) | 0.85 ULP (7.0e-8 rel) |
/// | `Micromath` | `micromath` | 6.2e-5 abs (as −ln(1/x)) | 6.2e-5 abs (8e6 ULP near 1) | 2.4e-3 rel |
///
/// Maximum errors against std's f64 over 100 000 f32 inputs per cell (half evenly spaced, half seeded
/// random), measured by `tests/backend_accuracy.rs`, which asserts these bounds:
/// libm `logf`/`expf` within 1 ULP; micromath's own `ln` below 1: 0.12 absolute (its reciprocal step),
/// `ln` at or above 1: 7e-5 absolute, `exp`: 2.5e-3 relative; the `Micromath` backend, which takes ln x
/// below 1 as −ln(1/x) (one division): backend `ln` below 1: 7e-5 absolute, backend `exp`: 2.5e-3 relative.
///
/// **Where `Micromath` must not be used.** A ¼-LSB budget on a 16-bit log channel at about 0.5 V/decade is
/// about 7e-5 Np. The backend's `ln` sits at that budget and its `exp` (2.4e-3 relative, i.e. 2.4e-3 Np in a
/// ratio) is 30× past it: `logtrim verify --backend micromath` fails the ¼-LSB bound, and readings near the
/// ends of the calibrated x range can be refused as out of range where libm accepts them. Use it only where
/// an error of a few millinepers (about 0.01 dB) is acceptable and measured (`logtrim verify` reports it),
/// never in a product whose safety rests on the reading. What it saves is small: on x86-64, 7.0 ns per
/// `ln` against libm's 10.4 and 21.6 ns per `exp` against 21.1 (no saving); a firmware without an FPU is
/// better served by the fixed-point path.
///
/// ```
/// use logtrim::math::{Backend, Libm};
///
/// // ln 10 = 2.302585093 and e^1 = 2.718281828 (mathematical constants), within an f32 ULP or two.
/// assert!((Libm::ln(10.0) - 2.302_585_1).abs() <= 2.0 * f32::EPSILON * 2.31);
/// assert!((Libm::exp(1.0) - core::f32::consts::E).abs() <= 2.0 * f32::EPSILON * 2.72);
/// // The coarse backend keeps the error bound stated above for ln, below 1 as well.
/// #[cfg(feature = "micromath")]
/// assert!((logtrim::math::Micromath::ln(10.0) - 2.302_585_1).abs() < 7e-5);
/// #[cfg(feature = "micromath")]
/// assert!((logtrim::math::Micromath::ln(0.1) + 2.302_585_1).abs() < 7e-5);
/// ```
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

/// The opt-in backend: micromath's approximations, its `ln` below 1 taken as −ln(1/x) (coarse: see the table
/// and the warning at [`Backend`]).
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
        // micromath's `ln` below 1 goes through a coarse reciprocal (0.12 absolute error); ln x = −ln(1/x)
        // moves it to the range where micromath is good to 6e-5, for one division. Below 2⁻¹²⁶ the
        // reciprocal overflows and micromath's own value stands.
        if x > 0.0 && x < 1.0 {
            let r = 1.0 / x;
            if r.is_finite() {
                return -micromath::F32Ext::ln(r);
            }
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
