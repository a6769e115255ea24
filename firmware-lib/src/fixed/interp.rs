//! Uniform cubic B-spline evaluation in 32-bit integer arithmetic: the basis weights of the three kinds of
//! spline in the fixed path and their four-tap sums.
//!
//! A uniform cubic B-spline with control points `c_k` has, on segment `s` at fraction `t ∈ [0, 1]`, the value
//! `Σ_{k=0..3} B_k(t)·c_{s+k}` with `B_0 = (1−t)³/6`, `B_1 = (3t³ − 6t² + 4)/6`, `B_2 = (−3t³ + 3t² + 3t + 1)/6`,
//! `B_3 = t³/6` (de Boor, "A Practical Guide to Splines"). The weights are positive and sum to one, so a
//! value never leaves the range of its control points, and the spline is C² across segments.
//!
//! * **Per-sample splines**: the residual over x̃ uses [`basis6`], six times the basis in Q13 (below 2^16,
//!   the four summing to exactly `6·2^13`, no division), and [`spline6`] sums `floor(c_k·w_k / 2^16)` with
//!   [`mulh16`]: eight 16 × 16-bit products and three quarters of the value, so that table stores its
//!   control points times 4/3. The bias bend over `v`, whose control points change faster, uses the finer
//!   [`basis16`] (the basis in Q16, `1/6` as `10923/2^16`) and [`spline16`] on full-scale control points.
//!   The weights' rounding times the change of the control points over a segment is the methods' error;
//!   for the tables they are used on it is far below 0.01 LSB.
//! * **Temperature windows** ([`window_weights`], [`window_value`], [`window_collapse`]): the temperature
//!   grid's knot step is a power of two and is cut into [`WINDOWS_LOG2`]` = 4`, i.e. 16, windows; the splines
//!   over temperature are evaluated only at window ends, `t = m/16`, where six times the basis times 16³ is
//!   an exact integer (at most 2^14). A value is then exact: `Σ w_k·c_k / 4096` split into the control
//!   points' high and low halves, 8 products, no rounding but the final floor. The control points over
//!   temperature are stored divided by 6.
//! * **At the temperature itself** ([`spline_at`], [`collapse6`]): the direct path and a stage evaluate
//!   each spline over temperature on its segment's power form by Horner's rule with θ's 20-bit fraction
//!   ([`mulh20`]); the residual's columns take the [`basis6`] weights of the fraction's top 16 bits. The
//!   sensor table's spline over the temperature code takes the same form at the code's exact 16-bit
//!   fraction ([`spline_at16`]). Their control points are stored divided by 6.

use super::arith::mulh16;

/// log2 of the number of windows per knot step of the temperature grid.
pub const WINDOWS_LOG2: u32 = 4;
/// Windows per knot step.
pub const WINDOWS: u32 = 1 << WINDOWS_LOG2;
/// The denominator of [`window_weights`]: `WINDOWS³` (times 6 in the weights' sum).
pub const WINDOW_DEN_LOG2: u32 = 3 * WINDOWS_LOG2;

/// The cubic B-spline basis at a Q16 fraction `t ∈ [0, 2^16)`, in Q16: each weight in `[0, 43691]`, the four
/// summing to exactly 2^16 (tested at every `t`). `t²` and `t³` are truncated to Q16; `1/6` is
/// `10923/2^16`; `(1 − t)³ = 1 − 3t + 3t² − t³` from the same truncated powers, saturating at 0. Finer than
/// [`basis6`] by two multiplications: the bias bend, whose control points change fastest, uses it.
#[inline(always)]
pub fn basis16(t: u32) -> [u32; 4] {
    let t = t & 0xffff;
    let t2 = (t * t) >> 16;
    let t3 = (t2 * t) >> 16;
    let s3 = (65536 + 3 * t2).saturating_sub(3 * t + t3);
    let b0 = (s3 * 10923) >> 16;
    let b1 = (t3 >> 1) + 43691 - t2;
    let b3 = (t3 * 10923) >> 16;
    [b0, b1, 65536 - b0 - b1 - b3, b3]
}

/// `Σ floor(c_k·B_k / 2^16)` with the [`basis16`] weights at `t`: the spline's value for full-scale control
/// points, within four units; below `max|c_k|` in magnitude.
#[inline(always)]
pub fn spline16(c: [i32; 4], t: u32) -> i32 {
    let w = basis16(t);
    mulh16(c[0], w[0]) + mulh16(c[1], w[1]) + mulh16(c[2], w[2]) + mulh16(c[3], w[3])
}

/// Six times the cubic B-spline basis at a Q16 fraction `t ∈ [0, 2^16)`, in Q13: each weight non-negative
/// and below 2^16, the four summing to exactly `6·2^13 = 49152` (tested at every `t`). Six times the basis
/// is an integer polynomial in `t` (`(1 − t)³`, `3t³ − 6t² + 4`, …, `t³`), so no division: `t²` and `t³`
/// are rounded to Q16, three weights rounded to Q13 and the fourth takes the remainder, and
/// `(1 − t)³ = 1 − 3t + 3t² − t³` saturates at 0 where the rounded powers would make it negative.
#[inline(always)]
pub fn basis6(t: u32) -> [u32; 4] {
    let t = t & 0xffff;
    let t2 = (t * t + 32768) >> 16;
    let t3 = (t2 * t + 32768) >> 16;
    let s3 = (65536 + 3 * t2).saturating_sub(3 * t + t3);
    // Rounded to Q13 (the fourth weight takes the remainder).
    let (w0, w1, w3) = ((s3 + 4) >> 3, (3 * t3 + 4 * 65536 + 4 - 6 * t2) >> 3, (t3 + 4) >> 3);
    [w0, w1, 49152 - w0 - w1 - w3, w3]
}

/// `Σ floor(c_k·w_k / 2^16)` with the [`basis6`] weights at `t`: three quarters of the spline's value for
/// control points `c_k`, so the per-sample tables store their control points times 4/3. Within four units
/// of `c_k`'s scale of the weighted mean; below `max|c_k|` in magnitude.
#[inline(always)]
pub fn spline6(c: [i32; 4], t: u32) -> i32 {
    let w = basis6(t);
    mulh16(c[0], w[0]) + mulh16(c[1], w[1]) + mulh16(c[2], w[2]) + mulh16(c[3], w[3])
}

/// Six times the basis at `t = m/16` times 16³, for `m` in `0..=16`: exact integers, each at most 2^14,
/// summing to `6·16³ = 24576`.
#[inline(always)]
pub const fn window_weights(m: u32) -> [i32; 4] {
    let m = (if m < WINDOWS { m } else { WINDOWS }) as i32;
    let s = WINDOWS as i32 - m;
    let (m2, m3) = (m * m, m * m * m);
    let w0 = s * s * s;
    let w1 = 3 * m3 - 6 * 16 * m2 + 4 * 4096;
    [w0, w1, 24576 - w0 - w1 - m3, m3]
}

/// [`window_weights`] at every window end `m = 0..=16`, made at compile time (272 bytes of flash): a sample
/// looks up the weights of its window's two ends instead of evaluating two cubics.
// Indexing in a constant's initialiser: an index out of range fails the build, not a run.
#[allow(clippy::indexing_slicing)]
pub const WINDOW_WEIGHTS: [[i32; 4]; WINDOWS as usize + 1] = {
    let mut t = [[0; 4]; WINDOWS as usize + 1];
    let mut m = 0;
    while m <= WINDOWS as usize {
        t[m] = window_weights(m as u32);
        m += 1;
    }
    t
};

/// [`window_weights`] of `m` (clamped to 16) from [`WINDOW_WEIGHTS`].
#[inline(always)]
pub fn window_weights_at(m: u32) -> [i32; 4] {
    match WINDOW_WEIGHTS.get(m.min(WINDOWS) as usize) {
        Some(w) => *w,
        None => window_weights(m),
    }
}

/// The exact value `floor(Σ w_k·c_k / 4096)` of a temperature spline at a window end, from control points
/// stored divided by 6 and [`window_weights`]: the high halves `Σ w_k·(c_k >> 16)` (below 2^29.6) and the
/// low halves `Σ w_k·(c_k & 0xffff)` (below 2^30.6) are each a 32-bit sum.
#[inline(always)]
pub fn window_value(c: [i32; 4], w: [i32; 4]) -> i64 {
    let hi = w[0] * (c[0] >> 16) + w[1] * (c[1] >> 16) + w[2] * (c[2] >> 16) + w[3] * (c[3] >> 16);
    let lo = (w[0] as u32) * (c[0] & 0xffff) as u32
        + (w[1] as u32) * (c[1] & 0xffff) as u32
        + (w[2] as u32) * (c[2] & 0xffff) as u32
        + (w[3] as u32) * (c[3] & 0xffff) as u32;
    (i64::from(hi) << (16 - WINDOW_DEN_LOG2)) + i64::from(lo >> WINDOW_DEN_LOG2)
}

/// `Σ w_k·c_k` of four i16 control points (stored divided by 6) with [`window_weights`]: the residual's
/// column at a window end, exact, with `WINDOW_DEN_LOG2` = 12 more fraction bits (below 2^29.6).
#[inline(always)]
pub fn window_collapse(c: [i16; 4], w: [i32; 4]) -> i32 {
    w[0] * i32::from(c[0]) + w[1] * i32::from(c[1]) + w[2] * i32::from(c[2]) + w[3] * i32::from(c[3])
}

/// `floor(x·t / 2^20)` for a Q20 fraction `t < 2^20`, within two units below: [`mulh16`] of the fraction's
/// top 16 bits plus a sixteenth of [`mulh16`] of its low 4 bits (each a floor, so never above the exact
/// value).
#[inline(always)]
pub fn mulh20(x: i32, t: u32) -> i32 {
    mulh16(x, (t >> 4) & 0xffff) + (mulh16(x, t & 15) >> 4)
}

/// The value of a spline over temperature (control points stored divided by 6) at a Q20 fraction `t` of its
/// segment, from its power form `a0 + a1·t + a2·t² + a3·t³`, whose coefficients are integer sums of the
/// stored control points (`a0 = c0 + 4c1 + c2`, `a1 = 3(c2 − c0)`, `a2 = 3(c0 + c2) − 6c1`,
/// `a3 = c3 − c0 + 3(c1 − c2)`), by Horner's rule: the two inner products with the fraction's top 16 bits
/// ([`mulh16`]), the outer one with all 20 ([`mulh20`]). The outer product carries the slope term `a1·t`,
/// which needs the 20 bits (a 16-bit fraction would move a knot step of 16 K by up to 0.24 mK, a few
/// thousandths of an LSB on a unit whose slope follows the absolute temperature); the inner ones carry the
/// curvature, whose share of the lost 4 bits is `(|a2| + 2|a3|)·2^−16`. So the value is within
/// `(|a2| + 2|a3|)/2^16 + 4` units of the exact one in the value's own units (a few units on real tables,
/// below [`super::SPLINE_MARGIN`] for any accepted coefficients). `None` where the control points'
/// differences are too large for the 32-bit steps (`|c2 − c0| ≥ 2^28`, `|c0 − 2c1 + c2| ≥ 2^27`,
/// `|c1 − c2| ≥ 2^26` or `|c3 − c0| ≥ 2^27`: then `|a1| < 2^29.6` and `|a2|, |a3| < 2^28.6`, so the first
/// sum is below 2^29.6 and the second below 2^30.6; a real table's neighbouring control points differ by a
/// few percent of their size); [`super::FixedCalibration::validate`] refuses tables with such a segment.
#[inline(always)]
pub fn spline_at(c: [i32; 4], t: u32) -> Option<i64> {
    let t = t & 0xf_ffff;
    horner(c, t >> 4, |v| mulh20(v, t))
}

/// [`spline_at`] at a fraction of at most 16 bits (`t < 2^16`, the temperature channel's code inside a
/// segment of the sensor table, exact), every product a [`mulh16`]: at most 3 units below the exact value,
/// never above it.
#[inline(always)]
pub fn spline_at16(c: [i32; 4], t: u32) -> Option<i64> {
    let t = t & 0xffff;
    horner(c, t, |v| mulh16(v, t & 0xffff))
}

/// The power form of [`spline_at`] by Horner's rule: the inner products with the 16-bit fraction `t16`, the
/// outer one by `last`.
#[inline(always)]
fn horner(c: [i32; 4], t16: u32, last: impl Fn(i32) -> i32) -> Option<i64> {
    // The coefficients from differences in 32 bits (a 64-bit product by 3 would call a runtime helper on a
    // Cortex-M0): d = c2 − c0, e = (c0 − c1) + (c2 − c1), f = c1 − c2, g = c3 − c0, each checked.
    let d = c[2].checked_sub(c[0])?;
    let e = c[0].checked_sub(c[1])?.checked_add(c[2].checked_sub(c[1])?)?;
    let f = c[1].checked_sub(c[2])?;
    let g = c[3].checked_sub(c[0])?;
    // |d| < 2^28, |e| < 2^27, |f| < 2^26, |g| < 2^27: a1 = 3d, a2 = 3e, a3 = g + 3f within the steps' limits.
    let within = |v: i32, k: u32| -(1 << k) < v && v < 1 << k;
    if !(within(d, 28) && within(e, 27) && within(f, 26) && within(g, 27)) {
        return None;
    }
    // Within these limits no sum below can overflow (|a3| < 2^28.3, |v| < 2^29.2 and then < 2^30.2); the
    // sums are checked all the same, a flag test each, so that the optimiser sees no overflow either.
    let (a1, a2, a3) = (3 * d, 3 * e, g.checked_add(3 * f)?);
    // (The fraction below 2^16, as every caller passes it, masked where the optimiser sees it.)
    let t16 = t16 & 0xffff;
    let v = a2.checked_add(mulh16(a3, t16))?;
    let v = a1.checked_add(mulh16(v, t16))?;
    Some(i64::from(c[0]) + 4 * i64::from(c[1]) + i64::from(c[2]) + i64::from(last(v)))
}

/// `floor(Σ w_k·c_k / 2)` of four i16 control points over temperature with the [`basis6`] weights `w` at
/// a fraction of their segment: a residual column at that temperature in the format of
/// [`window_collapse`] (six times the basis times 2^12), below 2^29.6. The weights' rounding errors sum to
/// zero, so the column's error is their size (a unit or two of Q13) times the spread of the four control
/// points, not times their magnitude.
#[inline(always)]
pub fn collapse6(c: [i16; 4], w: [u32; 4]) -> i32 {
    // Each weight below 2^16, the four summing to 49152: |Σ| ≤ 2^15·49152 < 2^31.
    (w[0] as i32 * i32::from(c[0])
        + w[1] as i32 * i32::from(c[1])
        + w[2] as i32 * i32::from(c[2])
        + w[3] as i32 * i32::from(c[3]))
        >> 1
}

/// Four consecutive entries of `table` from `start`, or `None` past the end.
#[inline(always)]
pub fn four<T: Copy>(table: &[T], start: usize) -> Option<[T; 4]> {
    let s = table.get(start..start.checked_add(4)?)?;
    let a: &[T; 4] = s.try_into().ok()?;
    Some(*a)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_units::bspline_basis6;

    #[test]
    fn basis16_is_a_partition_of_unity_at_every_fraction() {
        let mut worst = 0f64;
        for t in 0..65536u32 {
            let w = basis16(t);
            assert_eq!(w.iter().sum::<u32>(), 65536, "t={t}");
            assert!(w.iter().all(|&x| x <= 43691), "t={t}: {w:?}");
            let exact = bspline_basis6(f64::from(t) / 65536.0);
            for k in 0..4 {
                worst = worst.max((f64::from(w[k]) / 65536.0 - exact[k] / 6.0).abs());
            }
        }
        assert_eq!(basis16(0), [10923, 43691, 10922, 0]);
        assert!(worst < 4.0 / 65536.0, "{worst}");
    }

    #[test]
    fn basis6_is_six_times_a_partition_of_unity_at_every_fraction() {
        // The uniform cubic B-spline basis (de Boor, "A Practical Guide to Splines"): 1/6, 4/6, 1/6, 0 at
        // t = 0; 1/48, 23/48, 23/48, 1/48 at t = 1/2 (here six times, in Q13).
        let mut worst = 0f64;
        for t in 0..65536u32 {
            let w = basis6(t);
            assert_eq!(w.iter().sum::<u32>(), 49152, "t={t}");
            assert!(w.iter().all(|&x| x <= 32772), "t={t}: {w:?}");
            let exact = bspline_basis6(f64::from(t) / 65536.0);
            for k in 0..4 {
                worst = worst.max((f64::from(w[k]) / 8192.0 - exact[k]).abs());
            }
        }
        assert_eq!(basis6(0), [8192, 32768, 8192, 0]);
        assert_eq!(basis6(32768), [1024, 23552, 23552, 1024]);
        // Each weight within 2 units of Q13 of six times the basis (the per-sample splines' error budget).
        assert!(worst < 2.0 / 8192.0, "{worst}");
    }

    #[test]
    fn window_weights_table_is_the_function() {
        for m in 0..40u32 {
            assert_eq!(window_weights_at(m), window_weights(m), "m={m}");
        }
    }

    #[test]
    fn window_weights_are_the_exact_basis() {
        for m in 0..=16u32 {
            let w = window_weights(m);
            assert_eq!(w.iter().sum::<i32>(), 24576);
            let exact = bspline_basis6(f64::from(m) / 16.0);
            for k in [0, 1, 3] {
                assert_eq!(f64::from(w[k]), exact[k] * 4096.0, "m={m} k={k}");
            }
            assert!(w.iter().all(|&v| (0..=16384).contains(&v)));
        }
        // A spline through the control points 6·(10, 20, 40, 80)/6 at m = 8: (10 + 23·20 + 23·40 + 80)/48.
        let c = [10 << 20, 20 << 20, 40 << 20, 80 << 20];
        let want = (10i64 + 23 * 20 + 23 * 40 + 80) * (1 << 20) * 6 / 48;
        assert_eq!(window_value(c, window_weights(8)), want);
        // Exact for extreme control points too (a floor, no overflow).
        let c = [i32::MIN, i32::MAX, i32::MIN, i32::MAX];
        for m in 0..=16 {
            let w = window_weights(m);
            let want: i64 = (0..4).map(|k| i64::from(w[k]) * i64::from(c[k])).sum::<i64>() >> 12;
            assert_eq!(window_value(c, w), want);
        }
    }

    #[test]
    fn spline_at_is_the_spline_within_its_bound() {
        // Against the f64 basis (de Boor): smooth and rough control points, every 97th fraction.
        let sets: [[i32; 4]; 4] = [
            [10 << 20, 20 << 20, 40 << 20, 80 << 20],
            [715_827_882, 715_000_000, 714_000_000, 713_500_000],
            [-89_478_485, -80_000_000, -60_000_000, -30_000_000],
            [3, -7, 11, -13],
        ];
        for c in sets {
            for t in (0..1u32 << 20).step_by(1553).chain([(1 << 20) - 1]) {
                let b = bspline_basis6(f64::from(t) / f64::from(1u32 << 20));
                let exact: f64 = (0..4).map(|k| b[k] * f64::from(c[k])).sum();
                let v = spline_at(c, t).unwrap() as f64;
                let (a2, a3) =
                    (3.0 * f64::from(c[0] - 2 * c[1] + c[2]), f64::from(c[3] - c[0] + 3 * (c[1] - c[2])));
                let tol = (a2.abs() + 2.0 * a3.abs()) / 65536.0 + 4.0;
                assert!((v - exact).abs() <= tol, "{c:?} t={t}: {v} vs {exact} (tolerance {tol})");
                // At the exact 16-bit fractions, spline_at16: never above, at most 3 units below.
                let t16 = t >> 4;
                let b = bspline_basis6(f64::from(t16) / 65536.0);
                let exact: f64 = (0..4).map(|k| b[k] * f64::from(c[k])).sum();
                let v = spline_at16(c, t16).unwrap() as f64;
                assert!(v <= exact + 1e-6 && v > exact - 3.0, "{c:?} t16={t16}: {v} vs {exact}");
            }
        }
        // Coefficients beyond the 32-bit steps are refused, not wrapped.
        assert_eq!(spline_at([i32::MIN, i32::MAX, i32::MIN, i32::MAX], 1000), None);
        assert_eq!(spline_at([0, 0, 1 << 28, 0], 0), None);
        assert_eq!(spline_at([i32::MAX, -1, i32::MIN, 0], 0), None);
        assert!(spline_at([0, 0, (1 << 26) - 1, 0], (1 << 20) - 1).is_some());
        // mulh20 against the exact floor.
        for (x, t) in [(i32::MAX, (1u32 << 20) - 1), (i32::MIN, 12345), (-7, 3), (123_456_789, 999_999)] {
            let exact = (i64::from(x) * i64::from(t)) >> 20;
            let v = i64::from(mulh20(x, t));
            assert!(v <= exact && v > exact - 2, "{x} {t}: {v} vs {exact}");
        }
    }

    #[test]
    fn collapse6_is_the_window_format() {
        // At t = 0 and t = 1/2 the basis6 weights are exact: twice the window weights at m = 0 and m = 8.
        let c: [i16; 4] = [-32768, 32767, -1234, 5678];
        for (t, m) in [(0, 0), (32768, 8)] {
            assert_eq!(collapse6(c, basis6(t)), window_collapse(c, window_weights(m)), "t={t}");
        }
        // Extreme control points at every fraction: no overflow, within the weights' rounding of the f64 value.
        for t in (0..65536u32).step_by(61) {
            let b = bspline_basis6(f64::from(t) / 65536.0);
            let exact: f64 = (0..4).map(|k| b[k] * f64::from(c[k]) * 4096.0).sum();
            let v = f64::from(collapse6(c, basis6(t)));
            assert!((v - exact).abs() < 2.0 * 65536.0 / 2.0, "t={t}: {v} vs {exact}");
        }
    }
}
