//! Integer rounding shifts and rescales between Q formats: round to nearest (ties up), saturate instead of
//! overflowing, clamp shift counts that come from data.

/// `x / 2^n` rounded to nearest (ties up) for `|x| < 2^62` and `1 ≤ n ≤ 62` (the spline sums).
#[inline(always)]
pub(crate) fn round_shr_small(x: i64, n: u32) -> i64 {
    (x + (1 << (n - 1))) >> n
}

/// `x / 2^n` rounded to nearest (ties up), `n` clamped to 0..=62. Saturates instead of overflowing.
#[inline(always)]
pub(crate) fn round_shr(x: i64, n: u32) -> i64 {
    let n = n.min(62);
    if n == 0 {
        return x;
    }
    x.saturating_add(1 << (n - 1)) >> n
}

/// `x · 2^n` for `n` clamped to 0..=62, saturating.
#[inline(always)]
fn sat_shl(x: i64, n: u32) -> i64 {
    x.saturating_mul(1i64 << n.min(62))
}

/// Moves a value from `from` to `to` fraction bits (rounding when bits are dropped, saturating when added).
#[inline(always)]
pub(crate) fn rescale(x: i64, from: u32, to: u32) -> i64 {
    if from >= to {
        round_shr(x, from - to)
    } else {
        sat_shl(x, to - from)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shifts_round_and_saturate() {
        assert_eq!(round_shr(5, 1), 3);
        assert_eq!(round_shr(-5, 1), -2);
        assert_eq!(round_shr(-6, 2), -1);
        assert_eq!(round_shr(i64::MAX, 3), i64::MAX >> 3);
        assert_eq!(round_shr(7, 200), 0);
        assert_eq!(sat_shl(-3, 2), -12);
        assert_eq!(sat_shl(i64::MAX / 2, 3), i64::MAX);
        assert_eq!(sat_shl(i64::MIN / 2, 300), i64::MIN);
        assert_eq!(rescale(3 << 10, 10, 2), 3 << 2);
        assert_eq!(rescale(3, 2, 10), 3 << 8);
        // The unsaturated form agrees where it is defined.
        for (x, n) in [(5, 1), (-5, 1), (-6, 2), (1 << 40, 13), (-(1 << 61), 62), (12_345, 7)] {
            assert_eq!(round_shr_small(x, n), round_shr(x, n), "{x} >> {n}");
        }
    }
}
