//! The two transcendental functions of the fixed path, from the universal tables in [`super::universal`]:
//! the bias bend `G(v) = ln(1 − e^(−v))` and `e^x` for the linear output units.
//!
//! * `G` is a cubic B-spline per octave of `v`: octave `[2^e, 2^(e+1))` has [`BEND_SEGMENTS`] uniform
//!   segments, so the knot spacing follows `v` (the function behaves like `ln v` near 0). The octave comes
//!   from the position of `v`'s top bit ([`top_bit`], a binary search: no division, no `CLZ` helper) and the
//!   position inside it from a shift; the spline is a per-sample [`spline16`] of full-scale Q24 control
//!   points. Below `2^BEND_FIRST_EXP` the bias current swamps the signal (sensitivity below ~0.001): the
//!   reading is below range. At and above `2^(BEND_FIRST_EXP + BEND_OCTAVES)` = 32, `|G| < e^(−32)` and `G`
//!   is 0.
//! * `e^x = 2^k · e^(j/64) · e^ρ`: x outside `[EXP_X_ZERO, EXP_X_ABOVE)` is 0 or above range, so that
//!   every step below works in 32 bits; `k = floor(x / ln 2)` from a 16-bit reciprocal and one 32-bit
//!   product, corrected by one step so that `x − k·LN2_Q24` lies in `[0, LN2_Q24)`, then `r = x − k·ln 2`
//!   exactly in Q31 (`LN2_Q31 = 128·LN2_Q24 + LN2_Q31_REST`) and one more step into `[0, ln 2)`: the same
//!   unique `(k, r)` as the 64-bit reduction `r = 128·x − k·LN2_Q31`. The top bits of `r` index [`EXP64`]
//!   and the rest, `ρ < 1/64`, goes through `1 + ρ + ρ²/2 + ρ³/6` in Q30 from 16-bit products. One exact
//!   unsigned high-word product ([`mul_hi_uu`]) scales the table's entry; the result `m·2^(k+2)` is
//!   assembled from 32-bit halves, so no 64-bit multiply or shift by a variable count is needed.
//!
//! Measured errors are in the module's tests (exhaustive where the input is 16-bit or less) and in the
//! host's table tests.
//!
//! [`EXP64`]: super::universal::EXP64

use super::arith::{mul_hi_uu, top_bit};
use super::interp::{four, spline16};
use super::universal::{BEND, EXP64};
use crate::error::{CalibrationDefect, Error};

/// The lowest octave exponent of the bend table: `v < 2^BEND_FIRST_EXP` is below range.
pub const BEND_FIRST_EXP: i32 = -10;
/// Number of octaves in the bend table.
pub const BEND_OCTAVES: usize = 15;
/// log2 of the number of spline segments per octave.
pub const BEND_SEGMENTS_LOG2: u32 = 3;
/// Spline segments per octave.
pub const BEND_SEGMENTS: usize = 1 << BEND_SEGMENTS_LOG2;
/// Control points per octave (segments + 3).
pub const BEND_STRIDE: usize = BEND_SEGMENTS + 3;
/// Length of the bend table.
pub const BEND_LEN: usize = BEND_OCTAVES * BEND_STRIDE;
/// log2 of the steps per neper of the `e^(j/64)` table.
pub const EXP64_LOG2: u32 = 6;
/// Entries of the `e^(j/64)` table: j = 0..=44 covers [0, ln 2).
pub const EXP64_LEN: usize = 45;
/// Fraction bits of the bend table's values and of its argument (nepers).
pub const BEND_FRAC: u32 = 24;
/// Fraction bits of the `e^(j/64)` table.
pub const EXP64_FRAC: u32 = 30;
/// Fraction bits of [`exp_q32`]'s result.
pub const EXP_RESULT_FRAC: u32 = 32;

/// 1/(2 ln 2) in Q16: the reciprocal that finds k in `e^x = 2^k·e^r`.
pub const HALF_INV_LN2_Q16: u32 = 47_274;
/// ln 2 in Q31.
pub const LN2_Q31: i32 = 1_488_522_236;
/// ln 2 in Q24, rounded down: `LN2_Q31 = 128·LN2_Q24 + LN2_Q31_REST`.
pub const LN2_Q24: i32 = LN2_Q31 >> 7;
/// The low seven bits of [`LN2_Q31`] below [`LN2_Q24`].
pub const LN2_Q31_REST: i32 = LN2_Q31 - (LN2_Q24 << 7);
/// The smallest x (Q24) whose `k = floor(x / ln 2)` is above 30, where `e^x` does not fit:
/// `ceil(31·LN2_Q31 / 128)` (about 21.49 Np).
pub const EXP_X_ABOVE: i32 = -((-31 * LN2_Q31 as i64) >> 7) as i32;
/// Below this x (Q24), `k < −36` and `e^x` rounds to 0: `ceil(−36·LN2_Q31 / 128)` (about −24.95 Np).
pub const EXP_X_ZERO: i32 = -((36 * LN2_Q31 as i64) >> 7) as i32;

/// The bit of `v` (Q24) at the table's floor, `2^(24 + BEND_FIRST_EXP)`.
const FLOOR_BIT: u32 = (24 + BEND_FIRST_EXP) as u32;

/// `G(v) = ln(1 − e^(−v))` for `v` in Q24 nepers, Q24 result; [`Error::BelowRange`] below the table.
#[inline(always)]
pub fn bend_q24(v: i32) -> Result<i32, Error> {
    if v < 1 << FLOOR_BIT {
        return Err(Error::BelowRange);
    }
    if v >= 1 << (FLOOR_BIT + BEND_OCTAVES as u32) {
        return Ok(0);
    }
    // v is in [2^14, 2^29): its top bit e is 14..=28.
    let e = top_bit(v);
    let m = v - (1 << e); // below 2^e
                          // Q16 position among the octave's eight segments: m·2^19 / 2^e, below 8·2^16.
    let pos = if e >= 19 { m >> (e - 19) } else { m << (19 - e) };
    let seg = (pos >> 16) as usize & (BEND_SEGMENTS - 1);
    let start = (e - FLOOR_BIT) as usize * BEND_STRIDE + seg;
    let c = four(&BEND, start).ok_or(Error::InvalidCalibration(CalibrationDefect::Coefficient))?;
    // A convex combination of the table's values (all within ±2^28), within four units.
    Ok(spline16(c, pos as u32 & 0xffff))
}

/// `(k, v)` moved by one step of `m` into `0 ≤ v < m` where it is within one step of it (`k·m + v` kept).
#[inline(always)]
fn one_step(k: i32, v: i32, m: i32) -> (i32, i32) {
    if v < 0 {
        (k - 1, v + m)
    } else if v >= m {
        (k + 1, v - m)
    } else {
        (k, v)
    }
}

/// `(k, r)` with `128·x = k·LN2_Q31 + r` and `0 ≤ r < LN2_Q31` (r is `x − k·ln 2` in Q31), for x in
/// `[EXP_X_ZERO, EXP_X_ABOVE)`, in 32-bit arithmetic; k is then in −36..=30.
#[inline(always)]
fn reduce(x: i32) -> (i32, u32) {
    // x in [EXP_X_ZERO, EXP_X_ABOVE), |x| < 2^29: |x >> 14| < 2^15 and its product with the Q16 reciprocal
    // below 2^31. k = floor(x / ln 2) within one (the truncations err by less than 0.002), k in −38..=31.
    let k = ((x >> 14) * HALF_INV_LN2_Q16 as i32) >> 25;
    // a = x − k·LN2_Q24 in [0, LN2_Q24) after one step (|k·LN2_Q24| < 2^29).
    let (k, a) = one_step(k, x - k * LN2_Q24, LN2_Q24);
    // r = 128·x − k·LN2_Q31 = 128·a − k·LN2_Q31_REST, in (−2^13, LN2_Q31 + 2^13): one step into [0, LN2_Q31).
    let (k, r) = one_step(k, (a << 7) - k * LN2_Q31_REST, LN2_Q31);
    // r in [0, LN2_Q31): non-negative.
    (k, r as u32)
}

/// `e^x` for `x` in Q24 nepers, as Q32 in an i64; [`Error::AboveRange`] where it does not fit (x ≥ 21.49 Np).
/// Results below 2^−33 round to 0.
#[inline(always)]
pub fn exp_q32(x: i32) -> Result<i64, Error> {
    if x >= EXP_X_ABOVE {
        return Err(Error::AboveRange);
    }
    if x < EXP_X_ZERO {
        return Ok(0);
    }
    let (k, r) = reduce(x);
    // r in [0, ln 2), Q31: below 2^31.
    let j = (r >> (31 - EXP64_LOG2)) as usize;
    // e^ρ for ρ = r − j/64 below 1/64: 1 + ρ + ρ²/2 + ρ³/6 in Q30, the square from ρ in Q22 (below 2^16, its
    // square below 2^32) and the cube from ρ²/2 in Q22 and ρ in Q16.
    let rho = r & ((1 << (31 - EXP64_LOG2)) - 1);
    let rho30 = rho >> 1;
    let rq = rho >> 9;
    let rho2h = (rq * rq) >> 15;
    let rho3 = (((2 * rho2h) >> 8) * (rho30 >> 14)) >> 8;
    let q = rho30 + rho2h + ((rho3 * 10923) >> 16); // e^ρ − 1, below 2^24.1
                                                    // Table entries are e^(j/64) in Q30: in [2^30, 2^31).
    let base = *EXP64.get(j).ok_or(Error::AboveRange)? as u32;
    // m = e^(j/64)·e^ρ = base + base·q in Q30, in [2^30, 2^31): base·q from the high word of (q·2^6)·base.
    let m = base + (mul_hi_uu(q << 6, base) >> 4);
    // e^x = m·2^(k − 30) = m·2^(k + 2) in Q32, m below 2^31 and k + 2 in −34..=32.
    let sh = k + 2;
    Ok(if sh >= 32 {
        i64::from(m) << 32
    } else if sh > 0 {
        let hi = m >> (32 - sh);
        let lo = (m & (u32::MAX >> sh)) << sh;
        (i64::from(hi) << 32) | i64::from(lo)
    } else if sh == 0 {
        i64::from(m)
    } else if sh > -32 {
        let n = (-sh) as u32;
        i64::from((m >> n) + ((m >> (n - 1)) & 1))
    } else {
        0
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The 32-bit reduction against the 64-bit one it replaces (`floor(128·x / LN2_Q31)` and its remainder in
    /// i64, the Rust core library's Euclidean division: common practice, a reference implementation): near
    /// every multiple of ln 2 in range, where a one-step correction could fall short, and at a stride
    /// elsewhere, up to both ends of the range.
    #[test]
    fn reduction_matches_the_64_bit_one() {
        let want = |x: i32| {
            let n = 128 * i64::from(x);
            (n.div_euclid(i64::from(LN2_Q31)), n.rem_euclid(i64::from(LN2_Q31)))
        };
        let check = |x: i32| {
            let (k, r) = reduce(x);
            assert_eq!((i64::from(k), i64::from(r)), want(x), "x = {x}");
            assert!((-36..=30).contains(&k), "x = {x}");
        };
        for k in -36i64..=31 {
            let edge = (k * i64::from(LN2_Q31)).div_euclid(128) as i32;
            for d in -400..=400 {
                let x = edge.saturating_add(d);
                if (EXP_X_ZERO..EXP_X_ABOVE).contains(&x) {
                    check(x);
                }
            }
        }
        let mut x = EXP_X_ZERO;
        while x < EXP_X_ABOVE {
            check(x);
            x += 997;
        }
        check(EXP_X_ABOVE - 1);
        // The bounds are where k leaves −36..=30.
        assert_eq!(want(EXP_X_ABOVE).0, 31);
        assert_eq!(want(EXP_X_ABOVE - 1).0, 30);
        assert_eq!(want(EXP_X_ZERO).0, -36);
        assert_eq!(want(EXP_X_ZERO - 1).0, -37);
        assert_eq!(exp_q32(EXP_X_ABOVE), Err(Error::AboveRange));
        assert_eq!(exp_q32(EXP_X_ZERO - 1), Ok(0));
        assert!(exp_q32(EXP_X_ABOVE - 1).is_ok());
    }
}
