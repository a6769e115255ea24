//! A loop of corrected samples for instruction counting (`scripts/bench-fixed.sh` runs it under
//! valgrind's callgrind, collecting only inside the `run_*` functions) and quick timing.
//!
//! `fixed_loop PATH N`, PATH one of:
//! * `fixed-raw`: the fixed path from raw codes (log code, NTC channel code) to power dB;
//! * `naive-raw`: the same in f32 with libm `logf`/`expf`: the NTC's β equation, then
//!   `Calibration::correct` and `Unit::DbPower`;
//! * `fixed-mc` / `naive-mc`: from the log code and a temperature (m°C, or °C in f32) to power dB;
//! * `fixed-staged`: the log channel alone (`correct_staged` and dB), with the temperature stages computed
//!   beforehand (64 temperatures): what a firmware pays per log sample when it reads the temperature less
//!   often than the log channel;
//! * `fixed-block`: the log channel in blocks of 256 codes at one stage each (`correct_block`, and dB).
//! * `fixed-cached`: raw codes to power dB through a `StageCache`, on a stream whose temperature channel
//!   gives a new code (drawn anew over the calibrated range) every `HOLD` samples, as a firmware that reads
//!   its temperature channel once per `HOLD` log samples; the stage is rebuilt at every new code.
//! * `naive-raw-held`: `naive-raw` on that same stream (the naive path recomputes everything anyway).
//! * `fixed-cached-miss`: the cache with a new temperature code at every sample (its worst case).
//!
//! Inputs are drawn by a seeded generator from the calibrated range of the hard uncompensated unit.

#[path = "../tests/common/mod.rs"]
mod common;

use std::hint::black_box;

use common::samples::{
    inputs, run_fixed_cached, run_fixed_mc, run_fixed_raw, run_naive_mc, run_naive_raw, Input,
};
use common::{ntc, units};
use logtrim::fixed::{FixedCalibration, StageCache};
use logtrim::Unit;
use logtrim_host::tables::{self, TableOptions, TemperatureChannel};

/// Log samples per temperature reading in the `fixed-cached` stream.
const HOLD: usize = 64;
/// Codes per block (a DMA buffer) in the `fixed-block` stream.
const BLOCK: usize = 256;

#[inline(never)]
fn run_fixed_staged(f: &FixedCalibration<'_>, inp: &[Input], stages: &[logtrim::fixed::FixedStage]) -> i64 {
    let mut acc = 0i64;
    for (k, i) in inp.iter().enumerate() {
        if let Ok(r) = f.correct_staged(&stages[k % stages.len()], black_box(i.code)) {
            acc = acc.wrapping_add(r.value(Unit::DbPower).unwrap_or(0));
        }
    }
    acc
}

#[inline(never)]
fn run_fixed_block(f: &FixedCalibration<'_>, inp: &[Input], stages: &[logtrim::fixed::FixedStage]) -> i64 {
    let mut acc = 0i64;
    let mut codes = [0u32; BLOCK];
    let mut out = [Err(logtrim::Error::NotCalibrated); BLOCK];
    for (k, chunk) in inp.chunks(BLOCK).enumerate() {
        for (c, i) in codes.iter_mut().zip(chunk) {
            *c = black_box(i.code);
        }
        let n = f.correct_block(&stages[k % stages.len()], &codes[..chunk.len()], &mut out);
        for r in out[..n].iter().flatten() {
            acc = acc.wrapping_add(r.value(Unit::DbPower).unwrap_or(0));
        }
    }
    acc
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let path = args.get(1).map(String::as_str).unwrap_or("fixed-raw");
    let n: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(1_000_000);
    let cal = units::hard_uncompensated();
    let channel = TemperatureChannel { codes: ntc::CODES, celsius: &ntc::celsius };
    let tables = match tables::build(&cal, Some(&channel), &TableOptions::default()) {
        Ok(t) => t,
        Err(e) => {
            eprintln!("fixed_loop: {e}");
            std::process::exit(2);
        }
    };
    let f = tables.view();
    let mut inp = inputs(&cal, n, 0x2545_f491_4f6c_dd1d);
    // For the staged paths: 64 temperatures, sample k at temperature k mod 64 (log codes drawn there).
    let temps: Vec<Input> = inp.iter().take(64).copied().collect();
    let stages: Vec<_> = temps.iter().filter_map(|i| f.stage_millicelsius(i.mc).ok()).collect();
    if path == "fixed-staged" || path == "fixed-block" {
        for (k, i) in inp.iter_mut().enumerate() {
            let t = f64::from(temps[k % temps.len()].celsius);
            let x = f64::from(cal.x_range.min)
                + f64::from(cal.x_range.max - cal.x_range.min) * ((k * 7919) % 1_000_000) as f64 / 1e6;
            i.code = cal.forward_code_f64(x, t).round().clamp(0.0, 65535.0) as u32;
        }
    }
    if path == "fixed-cached" || path == "naive-raw-held" {
        for k in 0..inp.len() {
            let held = inp[k - k % HOLD];
            let i = &mut inp[k];
            (i.temp_code, i.mc, i.celsius) = (held.temp_code, held.mc, held.celsius);
            let x = f64::from(cal.x_range.min)
                + f64::from(cal.x_range.max - cal.x_range.min) * ((k * 7919) % 1_000_000) as f64 / 1e6;
            i.code = cal.forward_code_f64(x, f64::from(held.celsius)).round().clamp(0.0, 65535.0) as u32;
        }
    }
    let mut cache = StageCache::new(f);
    let start = std::time::Instant::now();
    let out = match path {
        "fixed-raw" => run_fixed_raw(&f, &inp) as f64,
        "fixed-mc" => run_fixed_mc(&f, &inp) as f64,
        "fixed-staged" => run_fixed_staged(&f, &inp, &stages) as f64,
        "fixed-block" => run_fixed_block(&f, &inp, &stages) as f64,
        "fixed-cached" | "fixed-cached-miss" => run_fixed_cached(&mut cache, &inp) as f64,
        "naive-raw" | "naive-raw-held" => f64::from(run_naive_raw(&cal, &inp)),
        "naive-mc" => f64::from(run_naive_mc(&cal, &inp)),
        other => {
            eprintln!("fixed_loop: unknown path {other}");
            std::process::exit(2);
        }
    };
    let ns = start.elapsed().as_nanos() as f64 / n as f64;
    println!("{path}: {n} samples, {ns:.1} ns per sample (checksum {out:e})");
}
