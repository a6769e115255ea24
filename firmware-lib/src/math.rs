//! The f32 math backends used by the correction.
//!
//! The correction calls `ln` and `exp` through a [`Backend`] as plain functions, never as `f32` methods: under
//! `cargo test` std's inherent `f32::ln` would shadow an extension trait, and the host would test other math
//! than the firmware runs.
//!
//! | backend | feature | measured error (see `tests/backend_accuracy.rs`) |
//! |---|---|---|
//! | [`Libm`] (default) | always | `logf`/`expf` within 1 ULP (≈ 8e-8 relative) |
//! | `Micromath` | `micromath` | `ln` up to ~0.12 absolute below 1, `exp` ~2.4e-3 relative: outside a ¼-LSB budget |
//!
//! micromath is offered for parts where speed matters more than the last digits; `logtrim verify` reports
//! its error honestly.

/// An f32 implementation of the two transcendental functions the correction needs.
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

/// The opt-in fast backend: micromath's approximations (coarse, see the module docs).
#[cfg(feature = "micromath")]
#[derive(Debug, Clone, Copy, Default)]
pub struct Micromath;

#[cfg(feature = "micromath")]
impl Backend for Micromath {
    #[inline]
    fn ln(x: f32) -> f32 {
        micromath::F32Ext::ln(x)
    }
    #[inline]
    fn exp(x: f32) -> f32 {
        micromath::F32Ext::exp(x)
    }
}
