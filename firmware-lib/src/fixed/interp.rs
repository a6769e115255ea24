//! Uniform cubic B-spline evaluation in integer arithmetic: the basis weights and the 4-tap sums every
//! stage of the fixed path shares (the rounding shifts are the crate's, in [`crate::qformat`]).
//!
//! A uniform cubic B-spline with control points `c_k` has, on segment `s` at fraction `t ∈ [0, 1]`, the value
//! `Σ_{k=0..3} B_k(t)·c_{s+k}` with `B_0 = (1−t)³/6`, `B_1 = (3t³ − 6t² + 4)/6`, `B_2 = (−3t³ + 3t² + 3t + 1)/6`,
//! `B_3 = t³/6`. The weights are positive and sum to one, so a table never rings past its control points,
//! and the spline is C² across segments.
//!
//! In integers, `t` is Q20 and the weights are **six times** the basis, `6·B_k(t)` in Q28 (integer
//! polynomials in t, no division), summing to exactly 6·2^28; every table stores its control points
//! divided by 6 per axis (by 36 for the 2-D residual), folded into the table's scale by the host, so
//! `Σ 6B_k · c_k/6` is the spline's value. `t² and t³` are truncated to Q28.
//!
//! Bounds (why nothing overflows for any stored value): `t ≤ 2^20`, so `t·t ≤ 2^40` and `t²·t ≤ 2^48`
//! before their shifts; the weights are positive and sum to 6·2^28 < 2^30.6, so a weighted sum of stored
//! i32 values is below 2^61.6 in magnitude and of i16 values below 2^45.6.

use crate::qformat::round_shr_small;

/// Fraction bits of the basis weights.
pub(crate) const W_BITS: u32 = 28;
/// Fraction bits of a knot position.
pub(crate) const POS_FRAC: u32 = 20;
/// One knot step in a position.
pub(crate) const ONE: i64 = 1 << POS_FRAC;

/// Six times the four basis weights at `t` (Q20, clamped to `[0, 2^20]`), Q28, summing to exactly 6·2^28.
#[inline(always)]
pub(crate) fn weights(t: i64) -> [i64; 4] {
    weights_in(t.clamp(0, ONE))
}

/// [`weights`] for a fraction the caller has already bounded to `[0, 2^20]` (a masked or range-checked
/// position), without the clamp. Outside that range the products could overflow: every call site says
/// why its `t` is in range.
#[inline(always)]
pub(crate) fn weights_in(t: i64) -> [i64; 4] {
    let s = ONE - t;
    let t2 = (t * t) >> 12; // Q28
    let t3 = (t2 * t) >> 20; // Q28
    let s2 = (s * s) >> 12;
    let s3 = (s2 * s) >> 20;
    // 3t³ − 6t² + 4 is in [1, 4] on [0, 1].
    let w1 = 3 * t3 - 6 * t2 + (4 << W_BITS);
    [s3, w1, (6 << W_BITS) - s3 - w1 - t3, t3]
}

/// Σ wₖ·cₖ of four weights and four stored values (below 2^61.6 in magnitude: see the module docs).
#[inline(always)]
pub(crate) fn dot4(w: &[i64; 4], c: [i64; 4]) -> i64 {
    w[0] * c[0] + w[1] * c[1] + w[2] * c[2] + w[3] * c[3]
}

/// Four consecutive entries of `table` from `start`, widened to i64, or `None` past the end.
#[inline(always)]
pub(crate) fn four_i32(table: &[i32], start: usize) -> Option<[i64; 4]> {
    let s = table.get(start..start.checked_add(4)?)?;
    let a: &[i32; 4] = s.try_into().ok()?;
    Some([i64::from(a[0]), i64::from(a[1]), i64::from(a[2]), i64::from(a[3])])
}

/// Four consecutive entries of `table` from `start`, widened to i64, or `None` past the end.
#[inline(always)]
pub(crate) fn four_i16(table: &[i16], start: usize) -> Option<[i64; 4]> {
    let s = table.get(start..start.checked_add(4)?)?;
    let a: &[i16; 4] = s.try_into().ok()?;
    Some([i64::from(a[0]), i64::from(a[1]), i64::from(a[2]), i64::from(a[3])])
}

/// One spline value: the weighted sum of four control points from `start` (stored divided by 6), back
/// in the table's format.
#[inline(always)]
pub(crate) fn spline1(table: &[i32], start: usize, w: &[i64; 4]) -> Option<i64> {
    Some(round_shr_small(dot4(w, four_i32(table, start)?), W_BITS))
}

/// Segment index and Q20 fraction of a Q20 knot position on a grid of `knots` knots (≥ 2): the segment is
/// clamped to `0..=knots−2`, the fraction to `[0, 2^20]`.
#[inline(always)]
pub(crate) fn segment(pos: i64, knots: usize) -> (usize, i64) {
    let last = (knots.max(2) as i64).min(1 << 40) - 2;
    let seg = (pos >> POS_FRAC).clamp(0, last);
    (seg as usize, (pos - (seg << POS_FRAC)).clamp(0, ONE))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weights_sum_to_one_and_match_the_basis() {
        // The uniform cubic B-spline basis (de Boor, "A Practical Guide to Splines"): at t = 0 the weights
        // are 1/6, 4/6, 1/6, 0; at t = 1/2 they are 1/48, 23/48, 23/48, 1/48 (here times 6).
        let one = 1i64 << W_BITS;
        for t in (0..=ONE).step_by(97).chain([ONE]) {
            let w = weights(t);
            assert_eq!(w.iter().sum::<i64>(), 6 * one, "t={t}");
            assert!(w.iter().all(|&x| x >= 0));
        }
        let w = weights(0);
        assert_eq!(w, [one, 4 * one, one, 0]);
        let w = weights(ONE / 2);
        assert_eq!(w, [one / 8, 23 * one / 8, 23 * one / 8, one / 8]);
        // Out-of-range fractions clamp instead of overflowing.
        assert_eq!(weights(i64::MIN), weights(0));
        assert_eq!(weights(i64::MAX), weights(ONE));
    }

    #[test]
    fn segments_clamp() {
        assert_eq!(segment(-5, 10), (0, 0));
        assert_eq!(segment(3 << POS_FRAC | 5, 10), (3, 5));
        assert_eq!(segment(9 << POS_FRAC, 10), (8, ONE));
        assert_eq!(segment(i64::MAX, 10), (8, ONE));
        assert_eq!(segment(i64::MIN, 0), (0, 0));
    }
}
