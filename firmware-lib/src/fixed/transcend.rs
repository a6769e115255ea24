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
//! * `e^x = 2^k · e^(j/64) · e^ρ`: `k = floor(x / ln 2)` from a 16-bit reciprocal, corrected by one step so
//!   that `r = x − k·ln 2` (exact in Q31) lies in `[0, ln 2)`; the top bits of `r` index [`EXP64`] and the
//!   rest, `ρ < 1/64`, goes through `1 + ρ + ρ²/2 + ρ³/6` in Q30 from 16-bit products. One exact high-word
//!   product ([`mul_hi_u`]) scales the table's entry; the result `m·2^(k+2)` is assembled from 32-bit halves,
//!   so no 64-bit multiply or shift by a variable count is needed.
//!
//! Measured errors are in the module's tests (exhaustive where the input is 16-bit or less) and in the
//! host's table tests.
//!
//! [`EXP64`]: super::universal::EXP64

use super::arith::{mul_hi_u, mulh16, top_bit};
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

/// `e^x` for `x` in Q24 nepers, as Q32 in an i64; [`Error::AboveRange`] where it does not fit (x ≥ 21.49 Np).
/// Results below 2^−33 round to 0.
#[inline(always)]
pub fn exp_q32(x: i32) -> Result<i64, Error> {
    // k = floor(x / ln 2) from a 16-bit reciprocal (within one of the truth for any x), then r = x − k·ln 2
    // exactly in Q31 and one step to bring it into [0, ln 2).
    let mut k = mulh16(x, HALF_INV_LN2_Q16) >> 23;
    let (lh, ll) = (LN2_Q31 >> 16, LN2_Q31 & 0xffff);
    let mut r = (i64::from(x) << 7) - ((i64::from(k * lh) << 16) + i64::from(k * ll));
    if r < 0 {
        k -= 1;
        r += i64::from(LN2_Q31);
    } else if r >= i64::from(LN2_Q31) {
        k += 1;
        r -= i64::from(LN2_Q31);
    }
    if k > 30 {
        return Err(Error::AboveRange);
    }
    if k < -36 {
        return Ok(0);
    }
    // r in [0, ln 2), Q31: below 2^31.
    let r = r as u32;
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
    let m = base + (mul_hi_u((q << 6) as i32, base) >> 4) as u32;
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
