//! The temperature-dependent part of a fixed-point correction, computed once and reused: a
//! [`FixedStage`] for one temperature (many log codes at it: [`FixedCalibration::correct_staged`],
//! [`FixedCalibration::correct_block`]) and a [`StageCache`] that keeps the window of the last temperature,
//! so that a held or slowly wandering temperature costs the interpolation inside the window only.
//!
//! Both compute exactly what the direct path computes ([`FixedCalibration::correct`]): the scalars and the
//! residual's columns at the two ends of θ's window, interpolated at θ's fraction with the same integer
//! operations. They only compute them for every column at once, instead of for the four a code needs.

use super::arith::mulh16;
use super::interp::four;
use super::{FixedCalibration, FixedReading, Grid, Plan, Scalars, Window, BAD_TABLE};
use crate::error::Error;

/// Capacity of a stage's residual row: x̃ grids of up to `ROW_CAPACITY − 2` knots
/// ([`FixedCalibration::validate`] refuses wider ones).
pub const ROW_CAPACITY: usize = 66;

/// Everything a correction needs at one temperature: the four per-temperature values and the residual
/// collapsed over temperature for every x̃ column, at θ. Built by [`FixedCalibration::stage_millicelsius`],
/// [`FixedCalibration::stage_code`] or [`FixedCalibration::stage_theta`]; 288 bytes, no heap.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedStage {
    pub(crate) extrapolated: bool,
    pub(crate) plan: Plan,
    pub(crate) scalars: Scalars,
    row: [i32; ROW_CAPACITY],
    len: usize,
}

impl FixedStage {
    /// The temperature lies outside the calibrated range, within the allowed extrapolation.
    pub fn extrapolated(&self) -> bool {
        self.extrapolated
    }

    /// The stage at θ: both window ends evaluated, every column interpolated.
    pub(crate) fn build(cal: &FixedCalibration<'_>, theta: i32) -> Result<FixedStage, Error> {
        let pos = cal.window_of(theta)?;
        let window = cal.window(pos.index)?;
        let n = usize::from(cal.header.xa_knots) + 2;
        if n > ROW_CAPACITY {
            return Err(BAD_TABLE);
        }
        let ends = cal.window_ends(pos.index);
        let mut row = [0; ROW_CAPACITY];
        for (i, r) in row.iter_mut().enumerate().take(n) {
            let (a, b) = cal.column_ends(&ends, i)?;
            *r = a + mulh16(b - a, pos.f16);
        }
        Ok(FixedStage {
            extrapolated: cal.extrapolated(theta),
            plan: Plan::of(&cal.header),
            scalars: window.at(pos.f16),
            row,
            len: n,
        })
    }

    /// The residual's columns `seg..seg + 4` at the stage's temperature.
    #[inline(always)]
    pub(crate) fn columns(&self, seg: usize) -> Result<[i32; 4], Error> {
        four(self.row.get(..self.len).ok_or(BAD_TABLE)?, seg).ok_or(BAD_TABLE)
    }
}

/// Temperature codes whose θ a [`StageCache`] remembers (direct-mapped by the code's low bits).
pub const STAGE_MEMO: usize = 4;
const MEMO: usize = STAGE_MEMO;

/// A fixed calibration with the temperature window of its last reading: the per-sample path of a firmware
/// whose temperature moves slowly next to its log channel. A sample whose temperature lies in the kept
/// window (a fraction of a kelvin wide) costs the interpolation of four scalars and four residual columns
/// and the log channel's work; one in another window loads that window first (both ends of every column,
/// about the work of ten samples). The θ of the last few temperature codes is remembered too, so a raw
/// channel that toggles between neighbouring codes is linearised once per code. Results are bit-identical
/// to [`FixedCalibration::correct_raw`] and [`FixedCalibration::correct`] for every input, errors included
/// (only successful windows and temperatures are kept).
///
/// The cache owns its calibration (a [`FixedCalibration`] is a few slices and a header), so a window can
/// never be reused with other tables. About 700 bytes of RAM, no heap.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StageCache<'a> {
    pub(super) cal: FixedCalibration<'a>,
    /// The kept window's index on the grid, [`NO_WINDOW`] when empty.
    pub(super) window: u32,
    pub(super) values: Window,
    /// The residual's columns at the window's start and their change to its end.
    pub(super) row0: [i32; ROW_CAPACITY],
    pub(super) drow: [i32; ROW_CAPACITY],
    /// Columns available (all of them for tables that validate).
    pub(super) len: usize,
    /// `(temperature code + 1, θ)` of recent codes; 0 marks an empty entry.
    memo: [(u32, i32); MEMO],
    /// The header's per-sample and temperature values, gathered once.
    pub(super) plan: Plan,
    pub(super) grid: Grid,
}

/// [`StageCache::window`] when no window is kept (no grid has that many windows).
pub(super) const NO_WINDOW: u32 = u32::MAX;

impl<'a> StageCache<'a> {
    /// An empty cache over a calibration (validate the calibration first, as for direct use).
    pub const fn new(cal: FixedCalibration<'a>) -> StageCache<'a> {
        StageCache {
            plan: Plan::of(&cal.header),
            grid: Grid::of(&cal.header),
            cal,
            window: NO_WINDOW,
            values: Window::ZERO,
            row0: [0; ROW_CAPACITY],
            drow: [0; ROW_CAPACITY],
            len: 0,
            memo: [(0, 0); MEMO],
        }
    }

    /// The calibration the cache corrects with.
    pub fn calibration(&self) -> &FixedCalibration<'a> {
        &self.cal
    }

    /// Forgets the kept window and temperatures (nothing else changes: the next call loads them again).
    pub fn clear(&mut self) {
        self.window = NO_WINDOW;
        self.memo = [(0, 0); MEMO];
    }

    /// [`FixedCalibration::correct_raw`] through the cache.
    #[inline(always)]
    pub fn correct_raw(&mut self, code: u32, temp_code: u32) -> Result<FixedReading, Error> {
        self.plan.check_code(&self.cal, code)?;
        let theta = self.theta_of_code(temp_code)?;
        self.correct_theta(code, theta)
    }

    /// [`FixedCalibration::correct`] through the cache.
    #[inline(always)]
    pub fn correct(&mut self, code: u32, temp_mc: i32) -> Result<FixedReading, Error> {
        self.plan.check_code(&self.cal, code)?;
        let theta = self.grid.theta_from_millicelsius(temp_mc)?;
        self.correct_theta(code, theta)
    }

    /// θ of a temperature code, remembered for the next time.
    #[inline(always)]
    pub(super) fn theta_of_code(&mut self, temp_code: u32) -> Result<i32, Error> {
        let key = temp_code.checked_add(1);
        let slot = self.memo.get_mut(temp_code as usize % MEMO);
        if let (Some(key), Some(slot)) = (key, slot) {
            if slot.0 == key {
                return Ok(slot.1);
            }
            let theta = self.cal.theta_from_code(temp_code)?;
            *slot = (key, theta);
            return Ok(theta);
        }
        self.cal.theta_from_code(temp_code)
    }

    #[inline(always)]
    pub(super) fn correct_theta(&mut self, code: u32, theta: i32) -> Result<FixedReading, Error> {
        let pos = self.grid.window_of(theta)?;
        if pos.index != self.window && !self.load(pos.index)? {
            // A row wider than the cache: the direct path, uncached (tables `validate` refuses).
            return self.cal.correct_theta(&self.plan, code, theta);
        }
        let s = self.values.at(pos.f16);
        let (row0, drow) = match (self.row0.get(..self.len), self.drow.get(..self.len)) {
            (Some(a), Some(b)) => (a, b),
            _ => return Err(BAD_TABLE),
        };
        let x = self.plan.x_of(&s, code, |seg| {
            let (a, d) = (four(row0, seg).ok_or(BAD_TABLE)?, four(drow, seg).ok_or(BAD_TABLE)?);
            Ok([
                a[0] + mulh16(d[0], pos.f16),
                a[1] + mulh16(d[1], pos.f16),
                a[2] + mulh16(d[2], pos.f16),
                a[3] + mulh16(d[3], pos.f16),
            ])
        })?;
        Ok(FixedReading { x, temperature_extrapolated: self.grid.extrapolated(theta) })
    }

    /// Loads window `index` (out of line: the rare path). `Ok(false)` when the row does not fit the cache.
    /// Columns the residual table does not have (tables `validate` refuses) are left out, so a code that
    /// needs one gets the direct path's error.
    #[inline(never)]
    pub(super) fn load(&mut self, index: u32) -> Result<bool, Error> {
        self.window = NO_WINDOW;
        let values = self.cal.window(index)?;
        let n = usize::from(self.cal.header.xa_knots) + 2;
        if n > ROW_CAPACITY {
            return Ok(false);
        }
        let ends = self.cal.window_ends(index);
        let mut len = 0;
        for i in 0..n {
            match self.cal.column_ends(&ends, i) {
                Ok((a, b)) => {
                    if let (Some(r0), Some(dr)) = (self.row0.get_mut(i), self.drow.get_mut(i)) {
                        *r0 = a;
                        *dr = b - a;
                        len = i + 1;
                    }
                }
                _ => break,
            }
        }
        self.len = len;
        self.values = values;
        self.window = index;
        Ok(true)
    }
}
