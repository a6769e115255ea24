//! The integer arithmetic of the fixed path, written for cores without a long multiply (Cortex-M0: a
//! 32 × 32 → 32-bit `MULS` only): there every wide product is built from 16 × 16-bit products, so that no
//! 64-bit multiply, divide or count-leading-zeros helper of the compiler's runtime library is ever called;
//! cores with a long multiply use it. Every result is exact (a floor, never an approximation), so C and
//! Rust, and both forms, agree bit for bit.
//!
//! * [`mul_parts`]: `a·b` exactly as its high and low 32-bit words, from four 16 × 16-bit products of the
//!   magnitudes; [`mul_wide`] assembles them into an i64 (a register pair, no arithmetic) and [`mul_hi`]
//!   takes the high word, `floor(a·b / 2^32)` ([`mul_hi_u`] for an unsigned second operand).
//! * [`mulh16`]: `floor(a·w / 2^16)` for a 16-bit weight `w`: two products.
//! * [`top_bit`]: the index of the highest set bit by a fixed binary search (no `CLZ` on a Cortex-M0).
//!
//! The spline weights built on these are in [`super::interp`].

/// `|a|·|b|` exactly as (high word, low word), from the four 16 × 16-bit products of the magnitudes'
/// halves: with `a = ah·2^16 + al` and `b = bh·2^16 + bl`, `p0 = al·bl`, `m1 = al·bh + (p0 >> 16)` (below
/// 2^32), `m2 = (m1 & 0xffff) + ah·bl` (below 2^32); the low word is `m2·2^16 + (p0 & 0xffff)` and the high
/// word `ah·bh + (m1 >> 16) + (m2 >> 16)`, at most 2^30 for magnitudes up to 2^31.
#[inline(always)]
fn mul_magnitudes(a: u32, b: u32) -> (u32, u32) {
    let (al, ah, bl, bh) = (a & 0xffff, a >> 16, b & 0xffff, b >> 16);
    let p0 = al * bl;
    let m1 = al * bh + (p0 >> 16);
    let m2 = (m1 & 0xffff) + ah * bl;
    (ah * bh + (m1 >> 16) + (m2 >> 16), ((m2 & 0xffff) << 16) | (p0 & 0xffff))
}

/// `a·b` exactly as its two's complement (high word, low word), `floor(a·b / 2^32)` and the low 32 bits.
///
/// On ARMv6-M (Cortex-M0/M0+/M1, which have no long multiply and, alone among Arm targets, no 32-bit atomic
/// compare-and-swap, the property the build can test) it is [`mul_parts_split`]; on every other target the
/// compiler's own 32 × 32 → 64-bit product (one `SMULL` on a Cortex-M3/M4/M7), the same exact value.
#[inline(always)]
pub fn mul_parts(a: i32, b: i32) -> (i32, u32) {
    #[cfg(all(target_arch = "arm", not(target_has_atomic = "32")))]
    {
        mul_parts_split(a, b)
    }
    #[cfg(not(all(target_arch = "arm", not(target_has_atomic = "32"))))]
    {
        let p = i64::from(a) * i64::from(b);
        ((p >> 32) as i32, p as u32)
    }
}

/// [`mul_parts`] from 16 × 16-bit products: the magnitudes' product, negated when the signs differ
/// (`−(h·2^32 + l)` is `(−h, 0)` for `l = 0`, else `(!h, !l + 1)`). The high word is within ±2^30.
#[inline(always)]
pub fn mul_parts_split(a: i32, b: i32) -> (i32, u32) {
    let (hi, lo) = mul_magnitudes(a.unsigned_abs(), b.unsigned_abs());
    // The magnitude is at most 2^62: its high word is at most 2^30 and converts exactly.
    let hi = hi as i32;
    if (a < 0) == (b < 0) {
        (hi, lo)
    } else if lo == 0 {
        (-hi, 0)
    } else {
        (!hi, !lo + 1)
    }
}

/// `a·b` exactly, assembled from [`mul_parts`] (no 64-bit multiply).
#[inline(always)]
pub fn mul_wide(a: i32, b: i32) -> i64 {
    let (hi, lo) = mul_parts(a, b);
    (i64::from(hi) << 32) | i64::from(lo)
}

/// `floor(a·b / 2^32)`: the high word of the exact product (its magnitude is at most 2^30).
#[inline(always)]
pub fn mul_hi(a: i32, b: i32) -> i32 {
    mul_parts(a, b).0
}

/// `floor(a·b / 2^32)` for an unsigned `b` (below 2^32), below 2^31 in magnitude: [`mul_hi_u_split`] on
/// ARMv6-M, the compiler's 64-bit product elsewhere (see [`mul_parts`]).
#[inline(always)]
pub fn mul_hi_u(a: i32, b: u32) -> i32 {
    #[cfg(all(target_arch = "arm", not(target_has_atomic = "32")))]
    {
        mul_hi_u_split(a, b)
    }
    #[cfg(not(all(target_arch = "arm", not(target_has_atomic = "32"))))]
    {
        ((i64::from(a) * i64::from(b)) >> 32) as i32
    }
}

/// [`mul_hi_u`] from 16 × 16-bit products of the magnitudes.
#[inline(always)]
pub fn mul_hi_u_split(a: i32, b: u32) -> i32 {
    let (hi, lo) = mul_magnitudes(a.unsigned_abs(), b);
    // |a| ≤ 2^31 and b < 2^32: the high word is below 2^31.
    let hi = hi as i32;
    if a >= 0 {
        hi
    } else if lo == 0 {
        -hi
    } else {
        !hi
    }
}

/// `floor(a·b / 2^32)` of two unsigned operands: the high word of `mul_magnitudes` on ARMv6-M (no sign
/// handling), the compiler's 64-bit product elsewhere (see [`mul_parts`]).
#[inline(always)]
pub fn mul_hi_uu(a: u32, b: u32) -> u32 {
    #[cfg(all(target_arch = "arm", not(target_has_atomic = "32")))]
    {
        mul_magnitudes(a, b).0
    }
    #[cfg(not(all(target_arch = "arm", not(target_has_atomic = "32"))))]
    {
        ((u64::from(a) * u64::from(b)) >> 32) as u32
    }
}

/// Whether [`mul_round32_by`] is exact for the constant `c` (checked where a constant is declared):
/// `c ≥ 0` and, with `c = ch·2^16 + cl`, the largest middle sum `(2^15 − 1)·cl + (2^16 − 1)·ch + (cl − 1) +
/// 2^15` below 2^31 (the smallest, `−2^15·cl`, is above −2^31 for any `cl < 2^16`).
pub const fn round32_constant_fits(c: i32) -> bool {
    let (ch, cl) = ((c >> 16) as i64, (c & 0xffff) as i64);
    c >= 0 && 32_768 * cl + 65_535 * ch + (1 << 15) < 1 << 31
}

/// `x·c / 2^32` rounded to nearest (ties up), exactly, for a constant `c` that
/// [`round32_constant_fits`]: on ARMv6-M from four 16 × 16-bit products with no sign handling
/// (`x = xh·2^16 + xl` with `xh` signed and `xl` unsigned: `xh·ch + ⌊(xh·cl + xl·ch + ⌊xl·cl/2^16⌋ +
/// 2^15)/2^16⌋`, each partial sum within ±2^31 by the constant's check), the compiler's 64-bit product
/// elsewhere. Both are the exact rounded value, so they agree bit for bit.
#[inline(always)]
pub fn mul_round32_by(x: i32, c: i32) -> i32 {
    #[cfg(all(target_arch = "arm", not(target_has_atomic = "32")))]
    {
        mul_round32_split(x, c)
    }
    #[cfg(not(all(target_arch = "arm", not(target_has_atomic = "32"))))]
    {
        ((i64::from(x) * i64::from(c) + (1 << 31)) >> 32) as i32
    }
}

/// [`mul_round32_by`] from 16 × 16-bit products (the ARMv6-M form; public for its test on the host).
#[inline(always)]
pub fn mul_round32_split(x: i32, c: i32) -> i32 {
    let (xh, xl) = (x >> 16, (x & 0xffff) as u32);
    let (ch, cl) = (c >> 16, (c & 0xffff) as u32);
    // |xh| ≤ 2^15, xl < 2^16, ch and cl below 2^16 with the constant's check: the sum fits an i32.
    let mid = xh * cl as i32 + (xl * ch as u32) as i32 + ((xl * cl) >> 16) as i32 + (1 << 15);
    xh * ch + (mid >> 16)
}

/// `floor(a·w / 2^16)` for a weight `w < 2^16`: `ah·w + floor(al·w / 2^16)` with `|ah·w| < 2^31` and
/// `al·w < 2^32` (unsigned). The result's magnitude is below `|a|`.
#[inline(always)]
pub fn mulh16(a: i32, w: u32) -> i32 {
    let (ah, al) = (a >> 16, (a & 0xffff) as u32);
    ah * (w as i32) + ((al * w) >> 16) as i32
}

/// The index of the highest set bit of `v` (`v > 0`; 0 for `v ≤ 0`), by a five-step binary search.
#[inline(always)]
pub fn top_bit(v: i32) -> u32 {
    let mut v = v.max(0) as u32;
    let mut n = 0;
    if v >= 1 << 16 {
        v >>= 16;
        n += 16;
    }
    if v >= 1 << 8 {
        v >>= 8;
        n += 8;
    }
    if v >= 1 << 4 {
        v >>= 4;
        n += 4;
    }
    if v >= 1 << 2 {
        v >>= 2;
        n += 2;
    }
    if v >= 1 << 1 {
        n += 1;
    }
    n
}

#[cfg(test)]
mod tests {
    use super::*;

    use logtrim_checks::XorShift64 as Rng;

    /// Operands drawn mostly from the edges (MIN, MAX, ±1, 0, the Q16 unit), some uniform.
    trait Operand {
        fn i32(&mut self) -> i32;
    }

    impl Operand for Rng {
        fn i32(&mut self) -> i32 {
            match self.next() % 5 {
                0 => [i32::MIN, i32::MAX, -1, 0, 1, 65535, 65536, -65536, -65537][(self.next() % 9) as usize],
                _ => self.next() as i32,
            }
        }
    }

    #[test]
    fn products_are_exact() {
        // Against the i64 product of the Rust core library (common practice: a reference implementation).
        let mut rng = Rng(0x1234_5678_9abc_def1);
        for _ in 0..200_000 {
            let (a, b) = (rng.i32(), rng.i32());
            let p = i64::from(a) * i64::from(b);
            assert_eq!(mul_wide(a, b), p, "{a} · {b}");
            assert_eq!(mul_parts_split(a, b), ((p >> 32) as i32, p as u32), "{a} · {b}");
            assert_eq!(i64::from(mul_hi(a, b)), p >> 32, "{a} · {b}");
            let ub = rng.next() as u32;
            assert_eq!(i64::from(mul_hi_u(a, ub)), (i64::from(a) * i64::from(ub)) >> 32, "{a} · {ub}");
            assert_eq!(i64::from(mul_hi_u_split(a, ub)), (i64::from(a) * i64::from(ub)) >> 32, "{a} · {ub}");
            let w = (rng.next() % 65536) as u32;
            assert_eq!(i64::from(mulh16(a, w)), (i64::from(a) * i64::from(w)) >> 16, "{a} · {w}");
        }
        for a in [i32::MIN, i32::MAX] {
            for b in [i32::MIN, i32::MAX] {
                let p = i64::from(a) * i64::from(b);
                assert_eq!(mul_wide(a, b), p);
                assert_eq!(mul_parts_split(a, b), ((p >> 32) as i32, p as u32));
            }
            assert_eq!(i64::from(mul_hi_u_split(a, u32::MAX)), (i64::from(a) * i64::from(u32::MAX)) >> 32);
            assert_eq!(i64::from(mul_hi_u(a, u32::MAX)), (i64::from(a) * i64::from(u32::MAX)) >> 32);
            assert_eq!(i64::from(mulh16(a, 65535)), (i64::from(a) * 65535) >> 16);
        }
    }

    #[test]
    fn unsigned_high_words_and_rounded_constant_products_are_exact() {
        // Against the u64/i64 products of the Rust core library (common practice: a reference implementation).
        let mut rng = Rng(0x0bad_cafe_1234_5678);
        // Constants that fit the rounded product's check (the dB one among them) and its limits.
        let consts = [1_472_936_782, 0, 1, 65_536, 1_073_676_288, 1_073_709_057];
        for &c in &consts {
            assert!(round32_constant_fits(c), "{c}");
        }
        assert!(!round32_constant_fits(-1));
        assert!(!round32_constant_fits(i32::MAX));
        assert!(!round32_constant_fits(1_073_709_058));
        for _ in 0..200_000 {
            let (a, b) = (rng.next() as u32, rng.next() as u32);
            assert_eq!(u64::from(mul_hi_uu(a, b)), (u64::from(a) * u64::from(b)) >> 32, "{a} · {b}");
            assert_eq!(u64::from(mul_magnitudes(a, b).0), (u64::from(a) * u64::from(b)) >> 32, "{a} · {b}");
            let x = rng.i32();
            for &c in &consts {
                let want = ((i64::from(x) * i64::from(c) + (1 << 31)) >> 32) as i32;
                assert_eq!(mul_round32_split(x, c), want, "{x} · {c}");
                assert_eq!(mul_round32_by(x, c), want, "{x} · {c}");
            }
        }
        for x in [i32::MIN, i32::MIN + 1, -1, 0, 1, i32::MAX, -65_536, 65_535] {
            for &c in &consts {
                let want = ((i64::from(x) * i64::from(c) + (1 << 31)) >> 32) as i32;
                assert_eq!(mul_round32_split(x, c), want, "{x} · {c}");
            }
        }
    }

    #[test]
    fn top_bit_of_every_power_and_its_neighbours() {
        assert_eq!(top_bit(0), 0);
        assert_eq!(top_bit(-5), 0);
        for k in 0..31 {
            assert_eq!(top_bit(1 << k), k);
            assert_eq!(top_bit((1i32 << k) | ((1i32 << k) - 1)), k);
        }
        assert_eq!(top_bit(i32::MAX), 30);
    }
}
