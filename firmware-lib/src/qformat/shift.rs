//! Integer rounding shifts between Q formats: round to nearest (ties up), saturate instead of overflowing,
//! clamp shift counts that come from data.

/// `x / 2^n` rounded to nearest (ties up), `n` clamped to 0..=62. Saturates instead of overflowing.
#[inline(always)]
pub(crate) fn round_shr(x: i64, n: u32) -> i64 {
    let n = n.min(62);
    if n == 0 {
        return x;
    }
    x.saturating_add(1 << (n - 1)) >> n
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
    }
}
