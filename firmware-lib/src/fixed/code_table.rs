//! The per-sample path at table-lookup cost: a [`CodeTable`] holds, for the temperature window of the last
//! reading, x over the log code axis (a table of at most [`TABLE_KNOTS`] knots `2^s` codes apart), so that a
//! sample at a held or slowly wandering temperature is an index, a cubic over four knots and a line in
//! temperature, in 32-bit products only.
//!
//! # What it computes
//!
//! For the window `[θ₀, θ₁)` of θ (the grid's window, a sixteenth of a temperature knot step) the table
//! keeps, at every knot code `c_k`, x at both ends of the window, `x(c_k, θ₀)` and its change to
//! `x(c_k, θ₁)`, from the per-temperature values the [`StageCache`] evaluates exactly at those ends (within
//! a few Q24 units of [`FixedCalibration::correct`] there, which evaluates at θ itself). A sample at `(code, θ)`
//! with θ at the Q16 fraction `f` of the window:
//!
//! 1. takes the four knots around the code and moves each along the line in temperature,
//!    `p_k = x(c_k, θ₀) + f·(x(c_k, θ₁) − x(c_k, θ₀))`;
//! 2. interpolates them with the cubic through four equally spaced points (Lagrange) at the code's
//!    fraction `t` between the middle two, written with second differences `δ` so that every product is
//!    a 16-bit weight times a 32-bit value: `x = p₀ + t·(p₁ − p₀) − t(1 − t)/6·((2 − t)·δ₀ + (1 + t)·δ₁)`;
//! 3. checks x against the calibrated range, as the direct path does.
//!
//! An interval is used only where the build found it safe (all checks at table-build time, none per
//! sample): its four knots have values at both ends and the middle of the window, their differences fit
//! the per-sample arithmetic (below), the cubic's estimated error from the fourth difference
//! `(3/128)·|Δ⁴x|` of the runs of five knots around it and the line's in temperature (the middle of the
//! window against the mean of its ends) are each below 2^−[`TABLE_ERROR_LOG2`] = 1/16 of the local LSB
//! (the x step of one code, `|p₁ − p₀|/2^s`).
//!
//! At the ends of the curve (the converter's ends, the edge of the x̃ grid, the swamped end where the
//! sensitivity falls below its limit) the knot beyond the last one the direct path can evaluate is a
//! **virtual knot**: the cubic continuation `4·x₁ − 6·x₂ + 4·x₃ − x₄` of the four real knots beside it
//! (at both ends of the window and in the line's bend). So the interval next to the end interpolates with
//! the cubic through those four real knots, and every code between the first and the last real knot can
//! be interpolated; its error estimate is the fourth difference of the five real knots beside it, taken
//! four times (the one-sided cubic's error factor is 1.78 and the fourth difference grows towards the
//! swamped end). What remains for the stage cache is less than one knot step at each end of the curve and
//! the intervals whose checks fail (at the swamped end on a hot unit).
//! Any such sample, and every sample whose temperature is outside the table's window until the table is
//! rebuilt, goes through the [`StageCache`] the table keeps, errors included. So near a status boundary (a
//! rail, the sensitivity limit, the calibrated x range) and in a bend the table cannot hold, the result is
//! bit for bit the stage cache's (which `logtrim verify` checks on its own too).
//!
//! A value from the table is **not** bit for bit the direct path's (it interpolates x, where the direct
//! path evaluates the per-temperature values at θ): `logtrim verify` checks this path on its own at every
//! code of its grid against the f64 reference (the `code table` row of its report), with the same ¼-LSB
//! bound. The C library (`ltrm_code_table_*`) runs the same integer operations and agrees bit for bit.
//!
//! # A hit
//!
//! A sample is a **hit** when its code lies in a usable interval and its temperature in the table's **hit
//! range**; a hit makes one unsigned comparison per input and nothing else before the interpolation:
//!
//! - the code: `(code − base) >> step` below the interval count and marked usable. Such a code lies between
//!   two real knots, which passed the direct path's code checks, so it passes them too.
//! - the temperature: the hit range is the θ of the table's window that lie in the accepted range and on
//!   the same side of each end of the calibrated range as the temperature that set it (so that
//!   `temperature_extrapolated` is one flag for all of them), kept as θ and as the m°C whose θ lie in it.
//!   A temperature in m°C is compared with the m°C range; a temperature code is a hit when it is the last
//!   one whose θ fell in the range (its window fraction is kept with it).
//!
//! Every other sample takes the out-of-line rare path: the checks in the direct path's order, the window
//! (the table is built when θ leaves it) and the hit range around θ. A new temperature code in the hit
//! range (a wandering raw channel) costs its linearisation (or the stage cache's memo) and is then a hit.
//! A hit gives exactly what the rare path gives for the same input (`fixed::tests`, a kept table against a
//! fresh one on every input).
//!
//! # Overflow
//!
//! Knot values are x in Q24, within ±[`X_LIMIT`](super::X_LIMIT) (checked when built, virtual knots
//! included). For a usable interval the build proves: each of its four knots' change across the window and
//! each difference of its neighbouring knots, at both ends of the window, below 2^29 in magnitude. A knot moved along the line stays within
//! one unit of the segment between its two ends, so the per-sample differences stay below 2^29 + 2 and the
//! second differences below 2^30 + 4; the weights `t(1 − t)(2 − t)/6` and `t(1 − t)(1 + t)/6` are below
//! 1/12 (Q16), so the cubic's correction is below 2^27 and x below 2^30.7 + 2^27. No division, no 64-bit
//! product per sample; the build uses 64-bit additions and comparisons only.
//!
//! # Cost
//!
//! RAM: the stage cache plus `TABLE_KNOTS` × 9 bytes and a few words (1,324 bytes in C, 1,512 in Rust,
//! the stage cache's 620 and 808 included). Building the table for a window evaluates the direct path's
//! per-code part three times per knot (216 chains) and checks every interval (111,000–181,000
//! instructions on a Cortex-M0); it happens when a sample's temperature leaves the window (a window is
//! `2^(t_step_log2 − 4)` θ, half a kelvin for the usual grid). `scripts/bench-arm.sh` measures a sample
//! once the table is built (hits, fallbacks and new temperature codes, with its dB and ratio) at 339–435
//! instructions on a Cortex-M0 and 193–260 on a Cortex-M4F, against 702–901 and 446–552 through the stage
//! cache; the code the most common sample enters is about 1 KiB on a Cortex-M0.

use super::arith::mulh16;
use super::interp::four;
use super::stage::{StageCache, NO_WINDOW};
use super::{FixedCalibration, FixedReading, Scalars, THETA_FRAC, X_LIMIT};
use crate::error::Error;

/// Knots of a [`CodeTable`]: the knot step is the smallest power of two that spans the converter's
/// usable codes with this many knots (1024 codes for a 16-bit converter, 64 for a 12-bit one).
pub const TABLE_KNOTS: usize = 72;
/// An interval is used where its estimated errors are below `2^−TABLE_ERROR_LOG2` LSB each (1/16: with the
/// direct path's own error the code table stays far inside the ¼-LSB bound; `logtrim verify` measures
/// 0.07 LSB worst on the bench units).
pub const TABLE_ERROR_LOG2: u32 = 4;
/// Largest knot difference (and change across a window) a usable interval may have.
const DIFF_LIMIT: i64 = 1 << 29;
/// A knot the direct path gives no x for (and no virtual one replaces).
const MISSING: u8 = 0;
/// A knot with the direct path's x.
const REAL: u8 = 1;
/// A knot past the end of a run of real ones, their cubic's continuation.
const VIRTUAL: u8 = 2;

/// `v` within ±i32::MAX (saturated).
fn saturate(v: i64) -> i32 {
    if v >= i64::from(i32::MAX) {
        i32::MAX
    } else if v <= -i64::from(i32::MAX) {
        -i32::MAX
    } else {
        v as i32
    }
}

/// The cubic continuation `4·v₁ − 6·v₂ + 4·v₃ − v₄` of four values (`src`, nearest first), in sums.
fn extrapolate(v: &[i32; TABLE_KNOTS], src: [usize; 4]) -> Option<i64> {
    let [a, b, c, d] = [
        i64::from(*v.get(src[0])?),
        i64::from(*v.get(src[1])?),
        i64::from(*v.get(src[2])?),
        i64::from(*v.get(src[3])?),
    ];
    let (ac, b2) = (a + c, b + b);
    // 4(a + c) − 6b − d
    Some((ac + ac + ac + ac) - (b2 + b2 + b2) - d)
}

/// The per-sample path of a firmware whose temperature is held or wanders slowly: a [`StageCache`] and a
/// table of x over the code axis for the cached temperature window (see the module docs). About 1.3 KiB
/// of RAM, no heap; build it once with [`CodeTable::new`] and keep it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CodeTable<'a> {
    cache: StageCache<'a>,
    /// The window the table was built for ([`NO_WINDOW`]: none).
    window: u32,
    /// The temperatures a hit takes without any check but one: θ in `[th_lo, th_lo + th_n)` and m°C in
    /// `[mc_lo, mc_lo + mc_n)` lie in the window, in the accepted range and on one side of each end of the
    /// calibrated range (`extrapolated` for all of them); empty (`th_n = mc_n = 0`) without a window.
    th_lo: i32,
    th_n: u32,
    mc_lo: i32,
    mc_n: u32,
    extrapolated: bool,
    /// θ of the window's start and the shift of `θ − w_start` to its Q16 fraction.
    w_start: i32,
    f_shift: u32,
    /// The calibrated x range (the header's), kept beside the table.
    x_min: i32,
    x_max: i32,
    /// A temperature code + 1 whose θ lies in the hit range (0: none), and that θ's Q16 fraction.
    raw_key: u32,
    raw_f16: u32,
    /// Knot `k` is at code `base + (k − 1)·2^step`.
    base: u32,
    step: u32,
    /// x (Q24) at the window's start and its change to the window's end, per knot.
    x0: [i32; TABLE_KNOTS],
    dx: [i32; TABLE_KNOTS],
    /// `usable[i]`: codes in `[base + i·2^step, base + (i + 1)·2^step)` are interpolated from knots
    /// `i..i + 4`.
    usable: [bool; TABLE_KNOTS],
}

/// x of a code at one set of per-temperature values and residual columns (`rows` gives columns
/// `seg..seg + 4`), or `None` where the direct path gives an error other than x outside the calibrated
/// range (a knot just beyond that range holds the smooth continuation, so that the intervals at the
/// range's ends can be interpolated; each sample's x is checked against the range).
#[inline(always)]
fn knot_x(
    cache: &StageCache<'_>,
    s: &Scalars,
    code: u32,
    rows: impl Fn(usize) -> Result<[i32; 4], Error>,
) -> Option<i64> {
    // The direct path's code checks (the code limit of the tables included).
    if cache.plan.check_code(&cache.cal, code).is_err() {
        return None;
    }
    match cache.plan.x_unranged(s, code, rows) {
        Ok(x) if x > -X_LIMIT && x < X_LIMIT => Some(i64::from(x)),
        _ => None,
    }
}

impl<'a> CodeTable<'a> {
    /// An empty table over a calibration (validate the calibration first, as for direct use).
    pub const fn new(cal: FixedCalibration<'a>) -> CodeTable<'a> {
        CodeTable {
            cache: StageCache::new(cal),
            window: NO_WINDOW,
            th_lo: 0,
            th_n: 0,
            mc_lo: 0,
            mc_n: 0,
            extrapolated: false,
            w_start: 0,
            f_shift: 0,
            x_min: cal.header.x_min,
            x_max: cal.header.x_max,
            raw_key: 0,
            raw_f16: 0,
            base: 0,
            step: 0,
            x0: [0; TABLE_KNOTS],
            dx: [0; TABLE_KNOTS],
            usable: [false; TABLE_KNOTS],
        }
    }

    /// The calibration the table corrects with.
    pub fn calibration(&self) -> &FixedCalibration<'a> {
        self.cache.calibration()
    }

    /// Forgets the table and the cached window (the next call builds them again).
    pub fn clear(&mut self) {
        self.window = NO_WINDOW;
        self.th_n = 0;
        self.mc_n = 0;
        self.raw_key = 0;
        self.usable = [false; TABLE_KNOTS];
        self.cache.clear();
    }

    /// The intervals the current table interpolates, out of those it can have (one per four consecutive
    /// knots: `TABLE_KNOTS − 3`; 0 without a table), for reports and tests.
    pub fn usable_intervals(&self) -> (usize, usize) {
        let n = self.usable.iter().filter(|&&u| u).count();
        (n, if self.window == NO_WINDOW { 0 } else { TABLE_KNOTS.saturating_sub(3) })
    }

    /// Whether the current table interpolates `code` (a sample at it in the table's window builds nothing
    /// and takes no fallback to the stage cache), for reports and tests; `false` without a table.
    pub fn interpolates(&self, code: u32) -> bool {
        self.window != NO_WINDOW && self.interval(code).is_some()
    }

    /// [`FixedCalibration::correct`] through the table: x within the verified bound of the direct path's
    /// (bit for bit the stage cache's where the table falls back, errors included).
    #[inline(always)]
    pub fn correct(&mut self, code: u32, temp_mc: i32) -> Result<FixedReading, Error> {
        // A hit: a code in a usable interval (so between the rails) at a temperature in the hit range (so
        // accepted, in the table's window): one unsigned comparison each, nothing else checked.
        if let Some((p, i)) = self.interval(code) {
            if (temp_mc as u32).wrapping_sub(self.mc_lo as u32) < self.mc_n {
                // Within the accepted range: θ fits.
                return self.hit(p, i, temp_mc << THETA_FRAC);
            }
        }
        self.correct_other(code, temp_mc)
    }

    /// [`CodeTable::correct`] for the samples that are not hits (out of line: the rare path).
    #[inline(never)]
    fn correct_other(&mut self, code: u32, temp_mc: i32) -> Result<FixedReading, Error> {
        self.cache.plan.check_code(&self.cache.cal, code)?;
        let theta = self.cache.grid.theta_from_millicelsius(temp_mc)?;
        self.correct_theta(code, theta)
    }

    /// [`FixedCalibration::correct_raw`] through the table (the θ of recent temperature codes is
    /// remembered, as in [`StageCache`]).
    #[inline(always)]
    pub fn correct_raw(&mut self, code: u32, temp_code: u32) -> Result<FixedReading, Error> {
        // A hit's temperature code is the one remembered (its θ in the hit range, its fraction kept).
        if let Some((p, i)) = self.interval(code) {
            if temp_code.checked_add(1) == Some(self.raw_key) {
                return self.hit_at(p, i, self.raw_f16);
            }
        }
        self.correct_raw_other(code, temp_code)
    }

    /// [`CodeTable::correct_raw`] for the samples that are not hits (out of line: the rare path); a
    /// temperature code whose θ ends in the hit range is remembered with its fraction.
    #[inline(never)]
    fn correct_raw_other(&mut self, code: u32, temp_code: u32) -> Result<FixedReading, Error> {
        // A code in a usable interval passes its checks.
        let interval = self.interval(code);
        if interval.is_none() {
            self.cache.plan.check_code(&self.cache.cal, code)?;
        }
        let theta = self.cache.theta_of_code(temp_code)?;
        // Another temperature code in the hit range (a wandering temperature): a hit once its θ is known.
        let r = match interval {
            Some((p, i)) if self.in_hit_range(theta) => self.hit(p, i, theta),
            _ => self.correct_theta(code, theta),
        };
        if let Some(key) = temp_code.checked_add(1) {
            if self.in_hit_range(theta) {
                self.raw_key = key;
                self.raw_f16 = self.f16(theta);
            }
        }
        r
    }

    /// θ lies in the hit range.
    #[inline(always)]
    fn in_hit_range(&self, theta: i32) -> bool {
        (theta as u32).wrapping_sub(self.th_lo as u32) < self.th_n
    }

    /// Many log codes at one temperature in m°C (a DMA buffer): `out[i]` is [`CodeTable::correct`] of
    /// `codes[i]`, the temperature converted once. Stops at the shorter slice; returns the count written.
    pub fn correct_block(
        &mut self,
        temp_mc: i32,
        codes: &[u32],
        out: &mut [Result<FixedReading, Error>],
    ) -> usize {
        let theta = self.cache.grid.theta_from_millicelsius(temp_mc);
        self.block(theta, codes, out)
    }

    /// [`CodeTable::correct_block`] with the temperature channel's code.
    pub fn correct_block_raw(
        &mut self,
        temp_code: u32,
        codes: &[u32],
        out: &mut [Result<FixedReading, Error>],
    ) -> usize {
        let theta = self.cache.theta_of_code(temp_code);
        self.block(theta, codes, out)
    }

    fn block(
        &mut self,
        theta: Result<i32, Error>,
        codes: &[u32],
        out: &mut [Result<FixedReading, Error>],
    ) -> usize {
        let mut n = 0;
        for (o, &code) in out.iter_mut().zip(codes) {
            // The code is checked first, then the temperature, as in the one-sample calls.
            *o = match self.cache.plan.check_code(&self.cache.cal, code) {
                Err(e) => Err(e),
                Ok(()) => match theta {
                    Err(e) => Err(e),
                    Ok(t) => self.at_theta(code, t),
                },
            };
            n += 1;
        }
        n
    }

    /// A checked code at an accepted θ: a hit, or the rare path.
    #[inline(always)]
    fn at_theta(&mut self, code: u32, theta: i32) -> Result<FixedReading, Error> {
        if let Some((p, i)) = self.interval(code) {
            if self.in_hit_range(theta) {
                return self.hit(p, i, theta);
            }
        }
        self.correct_theta(code, theta)
    }

    /// A checked code at an accepted θ that is not a hit (out of line: the rare path): the table's window
    /// (built when θ leaves it) and the hit range around θ, then the table or the stage cache.
    #[inline(never)]
    fn correct_theta(&mut self, code: u32, theta: i32) -> Result<FixedReading, Error> {
        let pos = self.cache.grid.window_of(theta)?;
        if pos.index != self.window {
            self.build(pos.index)?;
        }
        if !self.in_hit_range(theta) {
            self.hit_range(pos.index, theta);
        }
        match self.interval(code) {
            Some((p, i)) => self.hit(p, i, theta),
            None => self.cache.correct_theta(code, theta),
        }
    }

    /// The hit range around an accepted θ in window `index` (the table's): the window's θ within the
    /// accepted range, on θ's side of each end of the calibrated range, and the m°C whose θ lie in it.
    fn hit_range(&mut self, index: u32, theta: i32) {
        let g = &self.cache.grid;
        // index = (θ − t_origin) >> wb with 0 ≤ θ − t_origin < 2^31 (window_of): index << wb < 2^31, and
        // wb ≤ 24 (shifts in 32 bits: a 64-bit one is a runtime helper on a Cortex-M0).
        let start = i64::from(g.t_origin) + i64::from(index << g.wb);
        // θ − t_origin stays below 2^31, the window ends there at the latest.
        let mut lo = start.max(i64::from(g.temp_lo));
        let mut hi = (start + i64::from(1u32 << g.wb) - 1)
            .min(i64::from(g.temp_hi))
            .min(i64::from(g.t_origin) + i64::from(i32::MAX));
        let (t, min, max) = (i64::from(theta), i64::from(g.temp_min), i64::from(g.temp_max));
        let extrapolated = g.extrapolated(theta);
        if t < min {
            hi = hi.min(min - 1);
        } else if t > max {
            lo = lo.max(max + 1);
        } else {
            lo = lo.max(min);
            hi = hi.min(max);
        }
        // Every θ in [lo, hi] is an i32 (θ itself is in it); m°C·2^10 in it: ceil(lo/2^10) ..= floor(hi/2^10).
        let (mlo, mhi) = ((lo + (1 << THETA_FRAC) - 1) >> THETA_FRAC, hi >> THETA_FRAC);
        self.th_lo = lo as i32;
        self.th_n = if hi >= lo { (hi - lo + 1) as u32 } else { 0 };
        self.mc_lo = mlo as i32;
        self.mc_n = if mhi >= mlo { (mhi - mlo + 1) as u32 } else { 0 };
        self.extrapolated = extrapolated;
        self.w_start = start as i32;
        self.f_shift = g.wb - 16;
        // The remembered fraction belongs to the old range.
        self.raw_key = 0;
    }

    /// The usable interval of a code, if any: its offset from the table's base and its index. A code in
    /// a usable interval lies between two real knots, so it passes the direct path's code checks.
    #[inline(always)]
    fn interval(&self, code: u32) -> Option<(u32, usize)> {
        // Below the base, the difference wraps past every interval.
        let p = code.wrapping_sub(self.base);
        let i = (p >> self.step) as usize;
        if i < TABLE_KNOTS - 3 && *self.usable.get(i)? {
            Some((p, i))
        } else {
            None
        }
    }

    /// A hit: x from interval `i` (the code `base + p`) at θ in the hit range, checked against the
    /// calibrated range.
    #[inline(always)]
    fn hit(&self, p: u32, i: usize, theta: i32) -> Result<FixedReading, Error> {
        self.hit_at(p, i, self.f16(theta))
    }

    /// The Q16 fraction in the window of a θ in the hit range (θ − w_start is in [0, 2^wb)).
    #[inline(always)]
    fn f16(&self, theta: i32) -> u32 {
        (theta as u32).wrapping_sub(self.w_start as u32) >> self.f_shift
    }

    /// A hit at the fraction `f16` of a temperature in the hit range.
    #[inline(always)]
    fn hit_at(&self, p: u32, i: usize, f16: u32) -> Result<FixedReading, Error> {
        let x = self.lookup(p, i, f16).ok_or(super::BAD_TABLE)?;
        if x < self.x_min {
            return Err(Error::BelowRange);
        }
        if x > self.x_max {
            return Err(Error::AboveRange);
        }
        Ok(FixedReading { x, temperature_extrapolated: self.extrapolated })
    }

    /// x from usable interval `i` for the code `base + p` at the window fraction `f16` (`None` only for an
    /// interval past the table, which [`CodeTable::interval`] never gives).
    #[inline(always)]
    fn lookup(&self, p: u32, i: usize, f16: u32) -> Option<i32> {
        let (a, d) = (four(&self.x0, i)?, four(&self.dx, i)?);
        // Bounds in the module docs: each |d| < 2^29, each knot within X_LIMIT.
        let f = f16 & 0xffff;
        let pm = a[0] + mulh16(d[0], f);
        let p0 = a[1] + mulh16(d[1], f);
        let p1 = a[2] + mulh16(d[2], f);
        let p2 = a[3] + mulh16(d[3], f);
        let (e0, e1, e2) = (p0 - pm, p1 - p0, p2 - p1);
        let (d0, d1) = (e1 - e0, e2 - e1);
        // The code's Q16 fraction between knots 1 and 2 (step ≤ 16).
        let t = (p & ((1 << self.step) - 1)) << (16 - self.step);
        let g = (t * (65536 - t)) >> 16; // t(1 − t), at most 2^14
        let wa = (((g * (131072 - t)) >> 16) * 10923) >> 16; // t(1 − t)(2 − t)/6
        let wb = (((g * (65536 + t)) >> 16) * 10923) >> 16; // t(1 − t)(1 + t)/6
        Some(p0 + mulh16(e1, t) - (mulh16(d0, wa) + mulh16(d1, wb)))
    }

    /// Loads window `index` into the stage cache and builds the table for it (out of line: the rare path).
    #[inline(never)]
    fn build(&mut self, index: u32) -> Result<(), Error> {
        self.window = NO_WINDOW;
        self.th_n = 0;
        self.mc_n = 0;
        self.raw_key = 0;
        self.usable = [false; TABLE_KNOTS];
        if !self.cache.load(index)? {
            // A row wider than the cache: every sample takes the direct path.
            self.window = index;
            return Ok(());
        }
        let c = &self.cache;
        let (lo, hi) = (c.plan.code_lo, c.plan.code_hi);
        // The knot step: the smallest power of two that spans lo..=hi with the table's knots.
        let mut step = 0;
        while step < 16 && ((hi.saturating_sub(lo & !((1 << step) - 1))) >> step) as usize + 4 > TABLE_KNOTS {
            step += 1;
        }
        let base = lo & !((1u32 << step) - 1);
        let start = c.values.at(0);
        let mid = c.values.at(1 << 15);
        let end = c.cal.end_scalars(index.saturating_add(1))?;
        let (row0, drow) = match (c.row0.get(..c.len), c.drow.get(..c.len)) {
            (Some(a), Some(b)) => (a, b),
            _ => return Ok(()),
        };
        let at_start = |seg: usize| four(row0, seg).ok_or(super::BAD_TABLE);
        let at_mid = |seg: usize| -> Result<[i32; 4], Error> {
            let (a, d) = (four(row0, seg).ok_or(super::BAD_TABLE)?, four(drow, seg).ok_or(super::BAD_TABLE)?);
            Ok([
                a[0] + mulh16(d[0], 1 << 15),
                a[1] + mulh16(d[1], 1 << 15),
                a[2] + mulh16(d[2], 1 << 15),
                a[3] + mulh16(d[3], 1 << 15),
            ])
        };
        let at_end = |seg: usize| -> Result<[i32; 4], Error> {
            let (a, d) = (four(row0, seg).ok_or(super::BAD_TABLE)?, four(drow, seg).ok_or(super::BAD_TABLE)?);
            Ok([a[0] + d[0], a[1] + d[1], a[2] + d[2], a[3] + d[3]])
        };
        // Each knot: x at the window's start (`x0`) and its change to the end (`dx`), stored where x exists
        // at the start, the middle and the end and the change is below 2^29; `bent` is twice the line's
        // error at the middle, 2·x(θ½) − x(θ₀) − x(θ₁) (saturated at ±i32::MAX).
        let mut kind = [MISSING; TABLE_KNOTS];
        let mut bent = [i32::MAX; TABLE_KNOTS];
        for k in 0..TABLE_KNOTS {
            let code = match (base >> step).checked_add(k as u32).and_then(|v| v.checked_sub(1)) {
                Some(v) if v <= u32::MAX >> step => v << step,
                _ => continue,
            };
            let (a, m, b) = (
                knot_x(c, &start, code, at_start),
                knot_x(c, &mid, code, at_mid),
                knot_x(c, &end, code, at_end),
            );
            if let (Some(a), Some(m), Some(b)) = (a, m, b) {
                if (b - a).abs() < DIFF_LIMIT {
                    if let (Some(x0), Some(dx), Some(v), Some(e)) =
                        (self.x0.get_mut(k), self.dx.get_mut(k), kind.get_mut(k), bent.get_mut(k))
                    {
                        // |a| < X_LIMIT and |b − a| < 2^29: both fit an i32.
                        *x0 = a as i32;
                        *dx = (b - a) as i32;
                        *v = REAL;
                        *e = saturate(m + m - a - b);
                    }
                }
            }
        }
        self.extend_ends(&mut kind, &mut bent);
        // Interval i (codes base + i·2^step ..) uses knots i..i + 4.
        for i in 0..TABLE_KNOTS.saturating_sub(3) {
            let ok = self.interval_ok(i, step, &kind, &bent).unwrap_or(false);
            if let Some(u) = self.usable.get_mut(i) {
                *u = ok;
            }
        }
        self.base = base;
        self.step = step;
        self.window = index;
        Ok(())
    }

    /// One virtual knot past each end of a run of real knots (module docs): where knot `k` is missing and
    /// the four on one side of it (only one) are real, it gets their cubic's continuation,
    /// `4·x₁ − 6·x₂ + 4·x₃ − x₄` (nearest first) at both ends of the window and in the line's bend, if its
    /// values stay within `X_LIMIT` and its change below 2^29. Sums in i64, no product.
    fn extend_ends(&mut self, kind: &mut [u8; TABLE_KNOTS], bent: &mut [i32; TABLE_KNOTS]) {
        let real = *kind;
        let is_real = |k: usize| real.get(k) == Some(&REAL);
        for k in 0..TABLE_KNOTS {
            if is_real(k) {
                continue;
            }
            let up = (1..=4).all(|j| is_real(k + j));
            let down = k >= 4 && (1..=4).all(|j| is_real(k - j));
            let src = match (up, down) {
                (true, false) => [k + 1, k + 2, k + 3, k + 4],
                (false, true) => [k - 1, k - 2, k - 3, k - 4],
                _ => continue,
            };
            let a = extrapolate(&self.x0, src);
            let d = extrapolate(&self.dx, src);
            let e = if src.iter().any(|&j| bent.get(j).is_none_or(|b| b.unsigned_abs() >= i32::MAX as u32)) {
                None
            } else {
                extrapolate(bent, src)
            };
            if let (Some(a), Some(d), Some(e)) = (a, d, e) {
                if a.abs() < i64::from(X_LIMIT) && (a + d).abs() < i64::from(X_LIMIT) && d.abs() < DIFF_LIMIT
                {
                    if let (Some(x0), Some(dx), Some(v), Some(b)) =
                        (self.x0.get_mut(k), self.dx.get_mut(k), kind.get_mut(k), bent.get_mut(k))
                    {
                        // Both within the bounds just checked: they fit an i32.
                        *x0 = a as i32;
                        *dx = d as i32;
                        *v = VIRTUAL;
                        *b = saturate(e);
                    }
                }
            }
        }
    }

    /// x of knot `k` at the window's start or end.
    fn knot_at(&self, k: usize, end: bool) -> Option<i64> {
        let a = i64::from(*self.x0.get(k)?);
        Some(if end { a + i64::from(*self.dx.get(k)?) } else { a })
    }

    /// The build-time checks of interval `i` (module docs): `None` where a knot is out of the table.
    fn interval_ok(
        &self,
        i: usize,
        step: u32,
        kind: &[u8; TABLE_KNOTS],
        bent: &[i32; TABLE_KNOTS],
    ) -> Option<bool> {
        let used = kind.get(i..i + 4)?;
        let real = |k: usize| kind.get(k) == Some(&REAL);
        // The four knots exist; a virtual one only at an end of them.
        if used.contains(&MISSING) || !(real(i + 1) && real(i + 2)) {
            return Some(false);
        }
        // The runs of five real knots whose fourth differences estimate the cubic's error: the two around
        // the interval, or, where the interval's cubic continues four real knots through a virtual one,
        // the run beside those four, the estimate times four (the one-sided cubic's error factor,
        // max |t(t − 1)(t − 2)(t − 3)|/24 over [0, 1], is 1.78 times the centred 3/128, and the fourth
        // difference beside the interval is not the one in it: at the swamped end it grows towards the end).
        // Runs are named by their first knot, i − 2 + r.
        let (runs, shift): ([Option<usize>; 2], u32) = if !real(i) {
            ([Some(3), None], 2)
        } else if !real(i + 3) {
            ([Some(0), None], 2)
        } else {
            ([Some(1), Some(2)], 0)
        };
        let mut lsb = u32::MAX;
        for end in [false, true] {
            // Knots i − 2 ..= i + 5 at this end of the window, loaded once (0 outside the table; a value is
            // used only where its knot is real, or is one of the interval's four).
            let mut v = [0i64; 8];
            for (j, vj) in v.iter_mut().enumerate() {
                if let Some(x) = (i + j).checked_sub(2).and_then(|k| self.knot_at(k, end)) {
                    *vj = x;
                }
            }
            let mut f = [0i64; 7];
            for (fj, (a, b)) in f.iter_mut().zip(v.iter().zip(v.iter().skip(1))) {
                *fj = b - a;
            }
            // The differences of the four knots the sample uses: below 2^29.
            if [f[2], f[3], f[4]].iter().any(|d| d.abs() >= DIFF_LIMIT) {
                return Some(false);
            }
            // The interval's own difference (knots i + 1, i + 2): below 2^29.
            lsb = lsb.min(f[3].unsigned_abs() as u32);
            // Third differences and their changes (the fourth difference of the run from knot i − 2 + r).
            // Sums, not 64-bit products (a runtime helper on a Cortex-M0).
            let d3 = [
                f[2] - (f[1] + f[1]) + f[0],
                f[3] - (f[2] + f[2]) + f[1],
                f[4] - (f[3] + f[3]) + f[2],
                f[5] - (f[4] + f[4]) + f[3],
                f[6] - (f[5] + f[5]) + f[4],
            ];
            let d4 =
                [(d3[1] - d3[0]).abs(), (d3[2] - d3[1]).abs(), (d3[3] - d3[2]).abs(), (d3[4] - d3[3]).abs()];
            let mut e4: Option<i64> = None;
            for &r in runs.iter().flatten() {
                if (0..5).all(|j| (i + r + j).checked_sub(2).is_some_and(real)) {
                    let d = *d4.get(r)?;
                    e4 = Some(e4.map_or(d, |m| m.max(d)));
                }
            }
            let Some(e4) = e4 else {
                return Some(false);
            };
            // The cubic's error, about (3/128)·e4 (four times that one-sided), within 2^−TABLE_ERROR_LOG2 of
            // an LSB (|Δ1|/2^step): 3·e4 ≤ |Δ1|·2^(7 − TABLE_ERROR_LOG2)/2^step (|Δ1| < 2^29: the shifted
            // value fits a u32), in 32 bits once e4 < 2^30 (a 64-bit product by 3 would call a runtime helper
            // on a Cortex-M0).
            let e4 = u32::try_from(e4).unwrap_or(u32::MAX);
            if e4 >= 1 << (30 - shift)
                || 3 * (e4 << shift) > ((f[3].unsigned_abs() as u32) << (7 - TABLE_ERROR_LOG2)) >> step
            {
                return Some(false);
            }
        }
        // The line in temperature, off by bent/2 at the middle, within 2^−TABLE_ERROR_LOG2 of an LSB at the
        // four knots.
        let limit = lsb >> (step + TABLE_ERROR_LOG2 - 1);
        Some(lsb > 0 && bent.get(i..i + 4)?.iter().all(|&b| b.unsigned_abs() <= limit))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_units::linear_fixed;

    /// On the linear unit (x linear in the code: every interval passes its checks) with its x̃ grid starting
    /// at −4 Np (code 10924, between knots: below it the direct path and the knots are below range), the
    /// only codes the direct path accepts that the table leaves to the stage cache are those before the
    /// first knot it can evaluate (340 codes): less than one knot step (without the virtual knots it would
    /// be more than two, as an interval would need two real knots beyond its own).
    #[test]
    fn only_codes_beyond_the_end_knots_fall_back() {
        let mut unit = linear_fixed();
        unit.header.xa_origin = -4 << 24;
        let c = unit.view();
        assert_eq!(c.validate(), Ok(()));
        for mc in [1_000, 25_000, 49_000] {
            let mut table = CodeTable::new(c);
            let mut ok = 0u32;
            let mut fallbacks = 0u32;
            for code in 0..=65_535u32 {
                let direct = c.correct(code, mc);
                let t = table.correct(code, mc);
                if direct.is_ok() {
                    ok += 1;
                    fallbacks += u32::from(!table.interpolates(code));
                    // The linear unit's table is exact where it interpolates.
                    assert_eq!(t, direct, "code {code} at {mc} m°C");
                }
            }
            let step = 1u32 << table.step;
            assert!(fallbacks > 0, "the grid's end is inside the converter");
            assert!(ok > 40_000, "{ok} codes in range");
            assert!(
                fallbacks < 2 * step,
                "{fallbacks} of {ok} codes fall back at {mc} m°C (knot step {step})"
            );
            let (used, of) = table.usable_intervals();
            assert_eq!(of, TABLE_KNOTS - 3);
            assert!(used > 40, "{used} intervals");
        }
    }
}
