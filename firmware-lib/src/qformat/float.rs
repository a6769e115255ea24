//! Exact conversions between f32 and fixed-point integers, in integer arithmetic only, so that a core
//! without an FPU can turn a record's f32 fields into its own Q values (and back) without soft-float, and
//! both paths round the same way everywhere.
//!
//! * [`q_from_f32`]: `round(f · 2^frac)`, half away from zero, exactly (no intermediate rounding).
//! * [`f32_from_q`]: the f32 nearest to `q / 2^frac`, ties to even (IEEE 754 round-to-nearest).
//!
//! Both work on the bit pattern of the f32 (sign, biased exponent, 23-bit fraction).

/// Largest fraction-bit count the conversions accept.
pub const MAX_FRAC: u32 = 62;

/// `round(f · 2^frac)` with halves rounded away from zero, computed exactly from the bits of `f`.
///
/// `None` for NaN or infinity, for `frac >` [`MAX_FRAC`], and where the result would not fit in ±2^62.
///
/// ```
/// use logtrim::qformat::{f32_from_q, q_from_f32};
///
/// // Q24: the value times 2^24. 1.5 is 25 165 824 exactly; −0.1f32 rounds to the nearest step.
/// assert_eq!(q_from_f32(1.5, 24), Some(25_165_824));
/// assert_eq!(q_from_f32(-0.1, 24), Some(-1_677_722));
/// // Back to f32: every integer of up to 24 bits converts exactly.
/// assert_eq!(f32_from_q(25_165_824, 24), 1.5);
/// assert_eq!(f32_from_q(-(1 << 23) + 1, 0), -8_388_607.0);
/// // NaN and magnitudes beyond ±2^62 have no Q value.
/// assert_eq!(q_from_f32(f32::NAN, 24), None);
/// assert_eq!(q_from_f32(1e30, 24), None);
/// ```
pub fn q_from_f32(f: f32, frac: u32) -> Option<i64> {
    if frac > MAX_FRAC {
        return None;
    }
    let bits = f.to_bits();
    let negative = bits >> 31 == 1;
    let biased = (bits >> 23) & 0xff;
    let fraction = bits & 0x007f_ffff;
    if biased == 0xff {
        return None;
    }
    // f = m · 2^e with m < 2^24.
    let (m, e) = if biased == 0 {
        (u64::from(fraction), -149i64)
    } else {
        (u64::from(fraction | 0x0080_0000), i64::from(biased) - 150)
    };
    let e = e + i64::from(frac);
    let magnitude: u64 = if e >= 0 {
        // m < 2^24: the result stays below 2^62 for e ≤ 38.
        if e > 38 {
            if m == 0 {
                0
            } else {
                return None;
            }
        } else {
            m << e
        }
    } else {
        let n = -e;
        if n > 40 {
            // m < 2^24 ≤ 2^(n−1): rounds to zero.
            0
        } else {
            (m + (1u64 << (n - 1))) >> n
        }
    };
    if magnitude >= 1 << 62 {
        return None;
    }
    // magnitude < 2^62: fits an i64 with either sign.
    let v = magnitude as i64;
    Some(if negative { -v } else { v })
}

/// The f32 nearest to `q / 2^frac` (ties to even), computed exactly from the integer. `frac` is clamped to
/// [`MAX_FRAC`]. Zero gives +0.0.
pub fn f32_from_q(q: i64, frac: u32) -> f32 {
    let frac = frac.min(MAX_FRAC);
    let negative = q < 0;
    let a = q.unsigned_abs();
    if a == 0 {
        return f32::from_bits(0);
    }
    let msb = 63 - a.leading_zeros(); // 0..=63
                                      // A 24-bit mantissa m (2^23 ≤ m < 2^24) and a shift s with a ≈ m · 2^s.
    let (mut m, mut s) = if msb > 23 {
        let shift = msb - 23;
        let m = a >> shift;
        let rest = a & ((1u64 << shift) - 1);
        let half = 1u64 << (shift - 1);
        let up = rest > half || (rest == half && m & 1 == 1);
        (m + u64::from(up), i64::from(shift))
    } else {
        (a << (23 - msb), i64::from(msb) - 23)
    };
    if m == 1 << 24 {
        m >>= 1;
        s += 1;
    }
    // value = m · 2^(s − frac) = 1.f · 2^(s − frac + 23); with frac ≤ 62 and s ≥ −23 the exponent is at
    // least −62, and at most 40: always a normal f32.
    let exponent = s - i64::from(frac) + 23 + 127;
    let biased = u32::try_from(exponent.clamp(1, 254)).unwrap_or(1);
    // m < 2^24: its low 23 bits are the stored fraction.
    let fraction = (m & 0x007f_ffff) as u32;
    f32::from_bits((u32::from(negative) << 31) | (biased << 23) | fraction)
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_arithmetic)]
    use super::*;
    use proptest::prelude::*;

    /// The reference: f64 arithmetic, exact for these ranges (an f32 times a power of two is exact in
    /// f64; `f64::round` rounds halves away from zero, as `q_from_f32` documents).
    fn q_ref(f: f32, frac: u32) -> f64 {
        (f64::from(f) * libm::exp2(f64::from(frac))).round()
    }

    #[test]
    fn known_values() {
        assert_eq!(q_from_f32(1.0, 24), Some(1 << 24));
        assert_eq!(q_from_f32(-1.0, 30), Some(-(1 << 30)));
        assert_eq!(q_from_f32(0.5, 0), Some(1)); // half away from zero
        assert_eq!(q_from_f32(-0.5, 0), Some(-1));
        assert_eq!(q_from_f32(0.25, 0), Some(0));
        assert_eq!(q_from_f32(-0.0, 24), Some(0));
        assert_eq!(q_from_f32(f32::NAN, 24), None);
        assert_eq!(q_from_f32(f32::INFINITY, 24), None);
        assert_eq!(q_from_f32(f32::MAX, 0), None);
        assert_eq!(q_from_f32(f32::MIN_POSITIVE, 24), Some(0));
        assert_eq!(q_from_f32(1.0, 63), None);
        assert_eq!(f32_from_q(1 << 24, 24), 1.0);
        assert_eq!(f32_from_q(-(1 << 30), 30), -1.0);
        assert_eq!(f32_from_q(0, 24).to_bits(), 0);
        assert_eq!(f32_from_q(i64::MIN, 0), -9.223_372e18);
        // 2^24 + 1 is not an f32: ties to even gives 2^24; 2^24 + 3 gives 2^24 + 4.
        assert_eq!(f32_from_q((1 << 24) + 1, 0), 16_777_216.0);
        assert_eq!(f32_from_q((1 << 24) + 3, 0), 16_777_220.0);
    }

    proptest! {
        #[test]
        fn q_from_f32_is_exact_rounding(bits in any::<u32>(), frac in 0u32..=40) {
            let f = f32::from_bits(bits);
            let want = q_ref(f, frac);
            match q_from_f32(f, frac) {
                Some(q) => prop_assert_eq!(q as f64, want),
                None => prop_assert!(!f.is_finite() || want.abs() >= 4.611_686_018_427_388e18),
            }
        }

        #[test]
        fn f32_from_q_is_correctly_rounded(q in -(1i64 << 53)..(1i64 << 53), frac in 0u32..=40) {
            // |q| < 2^53 is exact in f64, the division by a power of two too, and f64 → f32 rounds once.
            let want = (q as f64 / libm::exp2(f64::from(frac))) as f32;
            prop_assert_eq!(f32_from_q(q, frac).to_bits(), want.to_bits());
        }

        #[test]
        fn f32_from_q_is_the_scaled_conversion(q in any::<i64>(), frac in 0u32..=32) {
            // IEEE 754: `q as f32` rounds once to nearest (ties to even), and a power of two scales exactly
            // in the normal range: the result the measurement cycle's fixed corrector used to compute so.
            let want = q as f32 * f32::from_bits((127 - frac) << 23);
            prop_assert_eq!(f32_from_q(q, frac).to_bits(), want.to_bits());
        }

        #[test]
        fn round_trip_through_q24(x in -127.0f32..127.0) {
            // An f32 in Q24 and back moves by at most half a Q24 step.
            let q = q_from_f32(x, 24).unwrap();
            let back = f32_from_q(q, 24);
            prop_assert!((f64::from(back) - f64::from(x)).abs() <= 0.5 / 16_777_216.0 + f64::from(x.abs()) * 1.2e-7);
        }
    }
}
