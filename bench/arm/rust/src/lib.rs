//! The Rust side of the Cortex-M measurement (`scripts/bench-arm.sh`): logtrim's fixed path built for
//! `thumbv6m-none-eabi` / `thumbv7em-none-eabihf`, with the same entry points and buffers as the C driver
//! (`bench/arm/c/driver.c`) so that one emulator runner measures both. The unit's tables come from
//! `logtrim emit --format rust` (the file named by `LOGTRIM_BENCH_UNIT_RS` at build time).
//!
//! The runner writes the inputs, calls one `bench_*` function per sample and reads the results back; the
//! image is single-threaded and nothing else touches these statics, which is what the `unsafe` blocks
//! below rely on (the library itself forbids `unsafe`).

#![no_std]
#![allow(non_upper_case_globals, static_mut_refs)]

use logtrim::error::SensorFault;
use logtrim::fixed::{CodeTable, FixedReading, StageCache};
use logtrim::{Error, Unit};

mod unit {
    include!(env!("LOGTRIM_BENCH_UNIT_RS"));
}

const MAX: usize = 1024;
/// The unit reads its temperature as a raw channel code (else m°C).
const RAW: bool = unit::LOGTRIM_FIXED.sensor.is_some();

/// One sample's results, laid out as the C driver's `bench_out`.
#[repr(C)]
#[derive(Clone, Copy)]
pub struct BenchOut {
    status: i32,
    x: i32,
    db_status: i32,
    ratio_status: i32,
    db: i64,
    ratio: i64,
}

const ZERO: BenchOut = BenchOut { status: 0, x: 0, db_status: 0, ratio_status: 0, db: 0, ratio: 0 };

#[no_mangle]
pub static mut bench_code: [u32; MAX] = [0; MAX];
#[no_mangle]
pub static mut bench_temp: [u32; MAX] = [0; MAX];
#[no_mangle]
pub static mut bench_out_buf: [BenchOut; MAX] = [ZERO; MAX];
/// The stage cache a firmware would keep (its size is reported as state).
#[no_mangle]
pub static mut bench_cache: StageCache<'static> = StageCache::new(unit::LOGTRIM_FIXED);

/// The C evaluator's status numbering (`lt_status`).
fn status<T>(r: &Result<T, Error>) -> i32 {
    match r {
        Ok(_) => 0,
        Err(Error::CodeOutOfAdcRange { .. }) => 1,
        Err(Error::Saturated { .. }) => 2,
        Err(Error::BelowRange) => 3,
        Err(Error::AboveRange) => 4,
        Err(Error::TemperatureOutOfRange { .. }) => 5,
        Err(Error::Sensor(SensorFault::Open)) => 6,
        Err(Error::Sensor(SensorFault::Short)) => 7,
        Err(Error::Sensor(_)) => 8,
        Err(Error::NotCalibrated) => 10,
        Err(_) => 9,
    }
}

#[inline(always)]
fn put(i: usize, r: Result<FixedReading, Error>) {
    let mut o = ZERO;
    o.status = status(&r);
    if let Ok(r) = r {
        o.x = r.x;
        let db = r.value(Unit::DbPower);
        o.db_status = status(&db);
        o.db = db.unwrap_or(0);
        let ratio = r.value(Unit::Ratio);
        o.ratio_status = status(&ratio);
        o.ratio = ratio.unwrap_or(0);
    }
    // SAFETY: single-threaded image; the runner reads the buffer only between calls.
    unsafe {
        if let Some(slot) = bench_out_buf.get_mut(i) {
            *slot = o;
        }
    }
}

fn input(i: usize) -> (u32, u32) {
    // SAFETY: single-threaded image; the runner writes the inputs only between calls.
    unsafe { (bench_code.get(i).copied().unwrap_or(0), bench_temp.get(i).copied().unwrap_or(0)) }
}

/// The code table a firmware would keep (x over the log code for the last temperature window).
#[no_mangle]
pub static mut bench_table_state: CodeTable<'static> = CodeTable::new(unit::LOGTRIM_FIXED);

#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_reset() {
    // SAFETY: as above.
    unsafe {
        bench_cache = StageCache::new(unit::LOGTRIM_FIXED);
        bench_table_state = CodeTable::new(unit::LOGTRIM_FIXED);
    }
}

/// The call alone: what the runner subtracts from every path.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_empty(i: u32) {
    let (c, t) = input(i as usize);
    // SAFETY: as above.
    unsafe {
        if let Some(slot) = bench_out_buf.get_mut(i as usize) {
            slot.status = (c ^ t) as i32;
        }
    }
}

/// One call per sample, the temperature converted at every sample.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_direct(i: u32) {
    let (code, t) = input(i as usize);
    let f = &unit::LOGTRIM_FIXED;
    let r = if RAW { f.correct_raw(code, t) } else { f.correct(code, t as i32) };
    put(i as usize, r);
}

/// Sample `i` through a kept state (the stage cache or the code table: the same two entry points).
macro_rules! through {
    ($state:ident, $i:expr) => {{
        let (code, t) = input($i as usize);
        // SAFETY: as above.
        let r = unsafe {
            if RAW {
                $state.correct_raw(code, t)
            } else {
                $state.correct(code, t as i32)
            }
        };
        put($i as usize, r);
    }};
}

/// Through the stage cache kept across samples.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_cached(i: u32) {
    through!(bench_cache, i)
}

/// Through the code table kept across samples.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_table(i: u32) {
    through!(bench_table_state, i)
}

/// The code table's block at sample `i`'s temperature for the slice of codes `i..i + n`.
fn table_block(i: usize, n: usize) {
    let (_, t) = input(i);
    // SAFETY: as above.
    unsafe {
        let n = n.min(MAX.saturating_sub(i));
        if let (Some(codes), Some(out)) = (bench_code.get(i..i + n), bench_block_buf.get_mut(i..i + n)) {
            if RAW {
                bench_table_state.correct_block_raw(t, codes, out);
            } else {
                bench_table_state.correct_block(t as i32, codes, out);
            }
        }
    }
}

/// Builds the code table at sample `i`'s temperature (a block of one code).
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_table_prime(i: u32) {
    table_block(i as usize, 1);
}

/// The first `n` codes as one block through the code table at sample 0's temperature, then each result
/// stored as the other paths store theirs.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_tblock(n: u32) {
    let n = (n as usize).min(MAX);
    table_block(0, n);
    for i in 0..n {
        // SAFETY: as above.
        put(i, unsafe { bench_block_buf.get(i).copied().unwrap_or(Err(Error::NotCalibrated)) });
    }
}

/// The stage a block of codes is corrected at (the block API).
#[no_mangle]
pub static mut bench_stage: Option<logtrim::fixed::FixedStage> = None;

#[no_mangle]
pub static mut bench_block_buf: [Result<FixedReading, Error>; MAX] = [Err(Error::NotCalibrated); MAX];

/// Builds the stage at sample `i`'s temperature: what a block pays once.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_stage_at(i: u32) {
    let (_, t) = input(i as usize);
    let f = &unit::LOGTRIM_FIXED;
    let s = if RAW { f.stage_code(t) } else { f.stage_millicelsius(t as i32) };
    // SAFETY: as above.
    unsafe { bench_stage = s.ok() }
}

/// The first `n` codes as one block at the kept stage (`correct_block`), then each result stored as the
/// other paths store theirs.
#[no_mangle]
#[inline(never)]
pub extern "C" fn bench_block(n: u32) {
    let f = &unit::LOGTRIM_FIXED;
    // SAFETY: as above.
    unsafe {
        let n = (n as usize).min(MAX);
        if let (Some(s), Some(codes), Some(out)) = (&bench_stage, bench_code.get(..n), bench_block_buf.get_mut(..n)) {
            f.correct_block(s, codes, out);
        }
        for i in 0..n {
            put(i, bench_block_buf.get(i).copied().unwrap_or(Err(Error::NotCalibrated)));
        }
    }
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    loop {}
}
