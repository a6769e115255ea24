//! The temperature formats: θ, the integer path's temperature (m°C · 2^[`THETA_FRAC`], Q10 m°C, about
//! 1 µK a step), and whole m°C (the records' and the errors' unit), to and from °C.
//!
//! | function | from → to | arithmetic |
//! |---|---|---|
//! | [`theta_of_celsius`] | f32 °C → θ | exact integer decomposition of the f32's bits, rounded to nearest |
//! | [`celsius_of_theta`] | θ → f32 °C | one integer-to-float conversion and one division |
//! | [`millicelsius_of_theta`] | θ → m°C | integer rounding shift, saturating at the i32 ends |
//! | [`millicelsius`] | f32 °C → m°C | `round(t · 1000)` in f32, checked |
//! | [`millicelsius_saturating`] | f32 °C → m°C | the same, saturating (for an error's report) |

use super::round_shr;
use crate::error::Error;

/// Fraction bits of θ relative to m°C (θ = m°C · 2^10).
pub const THETA_FRAC: u32 = 10;

/// θ (m°C · 2^10, the fixed path's temperature) of a temperature in °C, rounded to nearest (ties away from
/// zero), by integer arithmetic on the f32's bits: exact for every finite f32. [`Error::NonFinite`] for
/// NaN and infinities; magnitudes beyond any θ saturate (and are then out of range).
///
/// ```
/// use logtrim::qformat::{celsius_of_theta, millicelsius, millicelsius_of_theta, theta_of_celsius};
///
/// // θ = m°C · 2^10: 25 °C is 25 000 m°C, 25 600 000 in θ; back to m°C and °C exactly.
/// let theta = theta_of_celsius(25.0)?;
/// assert_eq!(theta, 25_000 << 10);
/// assert_eq!(millicelsius_of_theta(theta), 25_000);
/// assert_eq!(celsius_of_theta(theta as i32), 25.0);
/// assert_eq!(millicelsius(-40.0)?, -40_000);
/// // Negative temperatures convert exactly the same way.
/// assert_eq!(millicelsius_of_theta(theta_of_celsius(-0.25)?), -250);
/// assert!(theta_of_celsius(f32::INFINITY).is_err());
/// # Ok::<(), logtrim::Error>(())
/// ```
pub fn theta_of_celsius(temp_c: f32) -> Result<i64, Error> {
    if !temp_c.is_finite() {
        return Err(Error::NonFinite);
    }
    let bits = temp_c.to_bits();
    let exp = ((bits >> 23) & 0xff) as i32;
    if exp == 0 {
        // Zero and subnormals: |t| < 2^-126 °C, far below half a θ step.
        return Ok(0);
    }
    // |t| = m · 2^(exp − 150) with a 24-bit m, so |t|·1 024 000 = m·1 024 000 · 2^(exp − 150), and
    // m·1 024 000 < 2^44.
    let m = u64::from((bits & 0x7f_ffff) | 0x80_0000);
    let p = m * (1000 << THETA_FRAC);
    let shift = exp - 150;
    let magnitude = if shift >= 0 {
        if shift > 18 {
            i64::MAX
        } else {
            (p << shift) as i64 // < 2^62
        }
    } else {
        let s = shift.unsigned_abs();
        if s >= 63 {
            0
        } else {
            ((p + (1 << (s - 1))) >> s) as i64
        }
    };
    Ok(if bits >> 31 == 1 { -magnitude } else { magnitude })
}

/// The temperature in °C of θ: one rounding, the quotient of two exact f32 (|θ| < 2^31 rounds once on
/// conversion, 1 024 000 is exact).
#[allow(clippy::float_arithmetic)]
pub fn celsius_of_theta(theta: i32) -> f32 {
    theta as f32 / (1000 << THETA_FRAC) as f32
}

/// θ as whole m°C, rounded to nearest (ties up), saturating at the i32 ends (only for θ beyond any sensor).
pub fn millicelsius_of_theta(theta: i64) -> i32 {
    let mc = round_shr(theta, THETA_FRAC);
    i32::try_from(mc).unwrap_or(if mc > 0 { i32::MAX } else { i32::MIN })
}

/// A temperature in °C as the records' m°C, rounded ([`Error::NonFinite`] for NaN or infinity,
/// [`Error::TemperatureOutOfRange`] beyond the i32 range).
#[allow(clippy::float_arithmetic)]
pub fn millicelsius(temp_c: f32) -> Result<i32, Error> {
    if !temp_c.is_finite() {
        return Err(Error::NonFinite);
    }
    let mc = libm::roundf(temp_c * 1000.0);
    if !(-2.147e9..=2.147e9).contains(&mc) {
        return Err(Error::TemperatureOutOfRange { millicelsius: millicelsius_saturating(temp_c) });
    }
    Ok(mc as i32)
}

/// A temperature in °C as whole m°C, rounded as [`millicelsius`] rounds, saturating at the i32 ends (NaN
/// gives 0): the temperature an [`Error::TemperatureOutOfRange`] reports.
#[allow(clippy::float_arithmetic)]
pub fn millicelsius_saturating(temp_c: f32) -> i32 {
    // `as` saturates at the i32 ends and maps NaN to 0.
    libm::roundf(temp_c * 1000.0) as i32
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_arithmetic)]
    use super::*;

    #[test]
    fn theta_is_the_rounded_product_of_the_f32() {
        // Reference: std's f64, in which t · 1 024 000 is exact for every f32 t (24 + 7 significant
        // bits), rounded half away from zero as `f64::round` does.
        let reference = |t: f32| (f64::from(t) * 1_024_000.0).round() as i64;
        for t in [0.0f32, -0.0, 25.0, -40.0, 85.0, 0.001, 1e-6, -1e-9, 123.456, 0.000_488_281_25] {
            assert_eq!(theta_of_celsius(t), Ok(reference(t)), "{t}");
        }
        // Ties round away from zero: 2^-14 °C is exactly 62.5 θ.
        assert_eq!(theta_of_celsius(1.0 / 16384.0), Ok(63));
        assert_eq!(theta_of_celsius(-1.0 / 16384.0), Ok(-63));
        // Every exponent, seeded pseudo-random mantissas (an LCG, common practice).
        let mut state = 12345u32;
        for _ in 0..20_000 {
            state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            let t = f32::from_bits(state);
            if !t.is_finite() {
                assert_eq!(theta_of_celsius(t), Err(Error::NonFinite));
            } else if f64::from(t).abs() < 1e12 {
                assert_eq!(theta_of_celsius(t), Ok(reference(t)), "{t:e}");
            } else {
                let got = theta_of_celsius(t).unwrap();
                assert!(got.unsigned_abs() >= 1 << 50, "{t:e} → {got}");
            }
        }
        assert_eq!(theta_of_celsius(f32::NAN), Err(Error::NonFinite));
        assert_eq!(theta_of_celsius(f32::NEG_INFINITY), Err(Error::NonFinite));
        assert_eq!(theta_of_celsius(f32::MAX), Ok(i64::MAX));
        assert_eq!(theta_of_celsius(f32::MIN_POSITIVE / 2.0), Ok(0));
    }

    #[test]
    fn theta_to_celsius_and_millicelsius() {
        // θ = m°C · 1024: 18 °C is 18 432 000 θ, exact in an f32.
        assert_eq!(celsius_of_theta(18_432_000), 18.0);
        assert_eq!(celsius_of_theta(-1024), -0.001);
        assert_eq!(millicelsius_of_theta(18_432_000), 18_000);
        // Halves round up: 0.5 m°C → 1, −0.5 m°C → 0, −0.5009… m°C → −1.
        assert_eq!(millicelsius_of_theta(512), 1);
        assert_eq!(millicelsius_of_theta(-512), 0);
        assert_eq!(millicelsius_of_theta(-513), -1);
        assert_eq!(millicelsius_of_theta(i64::MAX), i32::MAX);
        assert_eq!(millicelsius_of_theta(i64::MIN), i32::MIN);
        // Back from θ of the f32 °C: the m°C of every whole-m°C temperature in −50…150 °C.
        for mc in (-50_000..=150_000).step_by(7) {
            let t = mc as f32 / 1000.0;
            assert_eq!(millicelsius_of_theta(theta_of_celsius(t).unwrap()), mc, "{t}");
        }
    }

    #[test]
    fn millicelsius_rounds_and_saturates() {
        assert_eq!(millicelsius(25.0), Ok(25_000));
        assert_eq!(millicelsius(-0.0004), Ok(0));
        assert_eq!(millicelsius(-12.3456), Ok(-12_346));
        assert_eq!(millicelsius(f32::NAN), Err(Error::NonFinite));
        assert_eq!(millicelsius(3.0e6), Err(Error::TemperatureOutOfRange { millicelsius: i32::MAX }));
        assert_eq!(millicelsius(-3.0e6), Err(Error::TemperatureOutOfRange { millicelsius: i32::MIN }));
        assert_eq!(millicelsius_saturating(90.5), 90_500);
        assert_eq!(millicelsius_saturating(-40.25), -40_250);
        assert_eq!(millicelsius_saturating(f32::INFINITY), i32::MAX);
        assert_eq!(millicelsius_saturating(f32::NAN), 0);
    }
}
