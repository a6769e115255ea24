//! The corrected-sample loops that the fixed-path bench (`benches/fixed.rs`) and the instruction-count
//! example (`examples/fixed_loop.rs`) time: seeded inputs over a unit's calibrated range read through the
//! [`ntc`](super::ntc) channel, and one loop per path, each summing the power-dB values it corrects.
#![allow(dead_code)]

use std::hint::black_box;

use logtrim::fixed::{FixedCalibration, FixedReading, StageCache};
use logtrim::{Calibration, Error, Reading, Unit};

use super::ntc;

/// One input: log code, temperature channel code, temperature in m°C and in °C.
#[derive(Clone, Copy)]
pub struct Input {
    pub code: u32,
    pub temp_code: u32,
    pub mc: i32,
    pub celsius: f32,
}

/// `n` inputs drawn by a xorshift generator seeded with `seed`: a temperature code whose temperature is in
/// the calibrated range, and a log code from x uniform over the calibrated x range at that temperature.
pub fn inputs(cal: &Calibration, n: usize, seed: u64) -> Vec<Input> {
    let tr = cal.temperature;
    let tcodes: Vec<(u32, f64)> = ntc::CODES
        .filter_map(|c| ntc::celsius(c).ok().map(|t| (c, t)))
        .filter(|&(_, t)| t >= f64::from(tr.min_c) && t <= f64::from(tr.max_c))
        .collect();
    let mut s = seed;
    let mut next = move || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        s
    };
    (0..n)
        .map(|_| {
            let (temp_code, t) = tcodes[(next() % tcodes.len() as u64) as usize];
            let x = f64::from(cal.x_range.min)
                + (f64::from(cal.x_range.max - cal.x_range.min)) * (next() % 1_000_000) as f64 / 1e6;
            let code = cal.forward_code_f64(x, t).round().clamp(0.0, 65535.0) as u32;
            Input { code, temp_code, mc: (t * 1000.0).round() as i32, celsius: t as f32 }
        })
        .collect()
}

/// The f32 β equation of the NTC channel (the naive firmware's linearisation).
#[inline(always)]
pub fn ntc_celsius_f32(code: u32) -> f32 {
    let c = code as f32;
    let r = 10_000.0 * c / (4095.0 - c);
    1.0 / (1.0 / 298.15 + <logtrim::math::Libm as logtrim::math::Backend>::ln(r / 10_000.0) / 3950.0) - 273.15
}

/// The sum of the power-dB values of the fixed-path readings `correct` gives for `inp`.
#[inline(always)]
fn sum_fixed(inp: &[Input], mut correct: impl FnMut(&Input) -> Result<FixedReading, Error>) -> i64 {
    let mut acc = 0i64;
    for i in inp {
        if let Ok(r) = correct(i) {
            acc = acc.wrapping_add(r.value(Unit::DbPower).unwrap_or(0));
        }
    }
    acc
}

/// The sum of the power-dB values of the f32 readings `correct` gives for `inp`.
#[inline(always)]
fn sum_naive(inp: &[Input], correct: impl Fn(&Input) -> Result<Reading, Error>) -> f32 {
    let mut acc = 0.0f32;
    for i in inp {
        if let Ok(r) = correct(i) {
            acc += Unit::DbPower.from_x(r.x);
        }
    }
    acc
}

/// The fixed path from raw codes (log code, temperature channel code) to power dB.
#[inline(never)]
pub fn run_fixed_raw(f: &FixedCalibration<'_>, inp: &[Input]) -> i64 {
    sum_fixed(inp, |i| f.correct_raw(black_box(i.code), black_box(i.temp_code)))
}

/// The fixed path from the log code and m°C to power dB.
#[inline(never)]
pub fn run_fixed_mc(f: &FixedCalibration<'_>, inp: &[Input]) -> i64 {
    sum_fixed(inp, |i| f.correct(black_box(i.code), black_box(i.mc)))
}

/// The fixed path through a stage cache, raw codes to power dB.
#[inline(never)]
pub fn run_fixed_cached(cache: &mut StageCache<'_>, inp: &[Input]) -> i64 {
    sum_fixed(inp, |i| cache.correct_raw(black_box(i.code), black_box(i.temp_code)))
}

/// The naive f32 path from raw codes (the β equation for the channel) to power dB.
#[inline(never)]
pub fn run_naive_raw(cal: &Calibration, inp: &[Input]) -> f32 {
    sum_naive(inp, |i| cal.correct(black_box(i.code), ntc_celsius_f32(black_box(i.temp_code))))
}

/// The naive f32 path from the log code and °C to power dB.
#[inline(never)]
pub fn run_naive_mc(cal: &Calibration, inp: &[Input]) -> f32 {
    sum_naive(inp, |i| cal.correct(black_box(i.code), black_box(i.celsius)))
}
