//! The two transcendental functions of the fixed path, from the universal tables in [`super::universal`]:
//! the bias bend `G(v) = ln(1 − e^(−v))` and `e^x` for the linear output units.
//!
//! * `G` is a cubic B-spline per octave of `v`: octave `[2^e, 2^(e+1))` has [`BEND_SEGMENTS`] uniform
//!   segments, so the knot spacing follows `v` (the function behaves like `ln v` near 0). The octave and the
//!   position inside it come from the leading-zero count of `v`, with no division. Below
//!   `2^BEND_FIRST_EXP` the bias current swamps the signal (sensitivity below ~0.001): the reading is
//!   below range. At and above `2^(BEND_FIRST_EXP + BEND_OCTAVES)` = 32, `|G| < e^(−32)` and `G` is 0.
//! * `e^x = 2^k · 2^(j/32) · e^(ρ)`: `x·log2(e) = k + f`, the top five bits of `f` index [`EXP2`], the rest
//!   `ρ < ln2/32` goes through a cubic Taylor polynomial (truncation below 1e-8 relative).
//!
//! Measured errors are in the module's tests (exhaustive where the input is 16-bit or less) and in the
//! host's table tests.

use super::interp::{spline1, weights_in, POS_FRAC};
use super::universal::{BEND, EXP2};
use crate::error::Error;
use crate::qformat::round_shr;

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
/// log2 of the number of entries of the `2^(j/32)` table.
pub const EXP2_LOG2: u32 = 5;
/// Entries of the `2^(j/32)` table.
pub const EXP2_LEN: usize = 1 << EXP2_LOG2;
/// Fraction bits of the bend table's values and of its argument (nepers).
pub const BEND_FRAC: u32 = 24;
/// Fraction bits of the `2^(j/32)` table.
pub const EXP2_FRAC: u32 = 30;
/// Fraction bits of [`exp_q32`]'s result.
pub const EXP_RESULT_FRAC: u32 = 32;

/// log2(e) in Q30.
const LOG2E_Q30: i64 = 1_549_082_005;
/// ln 2 in Q30.
const LN2_Q30: i64 = 744_261_118;

/// `G(v) = ln(1 − e^(−v))` for `v` in Q24 nepers, Q24 result; [`Error::BelowRange`] below the table.
#[inline(always)]
pub fn bend_q24(v: i64) -> Result<i64, Error> {
    let floor_bit = 24 + BEND_FIRST_EXP; // 14
    if v < (1i64 << floor_bit) {
        return Err(Error::BelowRange);
    }
    if v >= 1i64 << (floor_bit + BEND_OCTAVES as i32) {
        return Ok(0);
    }
    // v is in [2^14, 2^29): its top bit e24 is 14..=28.
    let e24 = 63 - v.leading_zeros();
    let octave = (e24 - floor_bit as u32) as usize;
    let m = v - (1i64 << e24); // < 2^e24 ≤ 2^28
                               // Q20 knots inside the octave: below 8·2^20 (m·2^23 < 2^51 before the shift), so the segment is the top
                               // three bits and the fraction the low twenty, as `segment` would clamp them.
    let pos = (m << (POS_FRAC + BEND_SEGMENTS_LOG2)) >> e24;
    let seg = ((pos >> POS_FRAC) as usize) & (BEND_SEGMENTS - 1);
    let t = pos & ((1i64 << POS_FRAC) - 1);
    let start = octave * BEND_STRIDE + seg;
    spline1(&BEND, start, &weights_in(t))
        .ok_or(Error::InvalidCalibration(crate::error::CalibrationDefect::Coefficient))
}

/// `e^x` for `x` in Q24 nepers, as Q32 in an i64; [`Error::AboveRange`] where it does not fit (x ≥ 21.48).
/// Results below 2^−32 round to 0.
#[inline(always)]
pub fn exp_q32(x: i64) -> Result<i64, Error> {
    // y = x·log2(e) in Q30; x is bounded to ±2^31 (±128 Np) first so the product stays below 2^62.
    let x = x.clamp(-(1i64 << 31), 1i64 << 31);
    let y = round_shr(x * LOG2E_Q30, 24);
    let k = y >> 30; // floor
    let f = y - (k << 30); // [0, 2^30)
    let j = (f >> (30 - EXP2_LOG2)) as usize;
    let r = f & ((1i64 << (30 - EXP2_LOG2)) - 1); // Q30, < 1/32
    let rho = (r * LN2_Q30) >> 30; // Q30 nepers, < ln2/32 (r·ln2 < 2^55)
                                   // e^ρ ≈ 1 + ρ + ρ²/2 + ρ³/6 in Q30 (ρ < 2^25.5, so ρ² < 2^51).
    let rho2 = (rho * rho) >> 30;
    let rho3 = (rho2 * rho) >> 30;
    let p = (1i64 << 30) + rho + rho2 / 2 + rho3 / 6;
    let base = i64::from(*EXP2.get(j).ok_or(Error::AboveRange)?);
    let m = round_shr(base * p, 30); // Q30 in [2^30, 2^31)
                                     // e^x = m · 2^k, in Q32: m · 2^(k + 2); m < 2^31, so a shift up to 32 fits.
    let sh = k + 2;
    if sh > 32 {
        return Err(Error::AboveRange);
    }
    if sh >= 0 {
        Ok(m << sh)
    } else {
        Ok(round_shr(m, (-sh).min(63) as u32))
    }
}
