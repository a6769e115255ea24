//! ns per corrected sample, fixed path against the naive f32 path (divan): `cargo bench -p logtrim-host
//! --bench fixed`. Inputs are the hard unit's calibrated range, drawn by a seeded generator.

#[path = "../tests/common/mod.rs"]
mod common;

use common::{ntc, units};
use divan::black_box;
use logtrim::Unit;
use logtrim_host::tables::{self, TableOptions, TemperatureChannel};

const N: usize = 4096;

struct Setup {
    cal: logtrim::Calibration,
    tables: tables::FixedTables,
    inputs: Vec<(u32, u32, i32, f32)>,
}

fn setup() -> Setup {
    let cal = units::hard_uncompensated();
    let channel = TemperatureChannel { codes: ntc::CODES, celsius: &ntc::celsius };
    let tables = tables::build(&cal, Some(&channel), &TableOptions::default()).expect("tables");
    let tcodes: Vec<(u32, f64)> = ntc::CODES
        .filter_map(|c| ntc::celsius(c).ok().map(|t| (c, t)))
        .filter(|&(_, t)| (-20.0..=85.0).contains(&t))
        .collect();
    let mut s: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut next = move || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        s
    };
    let inputs = (0..N)
        .map(|_| {
            let (tc, t) = tcodes[(next() % tcodes.len() as u64) as usize];
            let x = -6.5 + 9.5 * (next() % 1_000_000) as f64 / 1e6;
            let code = cal.forward_code_f64(x, t).round().clamp(0.0, 65535.0) as u32;
            (code, tc, (t * 1000.0).round() as i32, t as f32)
        })
        .collect();
    Setup { cal, tables, inputs }
}

fn ntc_celsius_f32(code: u32) -> f32 {
    let c = code as f32;
    let r = 10_000.0 * c / (4095.0 - c);
    1.0 / (1.0 / 298.15 + <logtrim::math::Libm as logtrim::math::Backend>::ln(r / 10_000.0) / 3950.0) - 273.15
}

fn main() {
    divan::main();
}

/// Fixed path, raw codes to power dB (per batch of 4096 samples).
#[divan::bench(sample_count = 50)]
fn fixed_raw_to_db(b: divan::Bencher) {
    let s = setup();
    let f = s.tables.view();
    b.counter(divan::counter::ItemsCount::new(N)).bench_local(|| {
        let mut acc = 0i64;
        for &(code, tc, _, _) in &s.inputs {
            if let Ok(r) = f.correct_raw(black_box(code), black_box(tc)) {
                acc = acc.wrapping_add(r.value(Unit::DbPower).unwrap_or(0));
            }
        }
        acc
    });
}

/// Fixed path, log code and m°C to power dB.
#[divan::bench(sample_count = 50)]
fn fixed_mc_to_db(b: divan::Bencher) {
    let s = setup();
    let f = s.tables.view();
    b.counter(divan::counter::ItemsCount::new(N)).bench_local(|| {
        let mut acc = 0i64;
        for &(code, _, mc, _) in &s.inputs {
            if let Ok(r) = f.correct(black_box(code), black_box(mc)) {
                acc = acc.wrapping_add(r.value(Unit::DbPower).unwrap_or(0));
            }
        }
        acc
    });
}

/// Naive f32 path with libm, raw codes (β equation for the NTC) to power dB.
#[divan::bench(sample_count = 50)]
fn naive_f32_raw_to_db(b: divan::Bencher) {
    let s = setup();
    b.counter(divan::counter::ItemsCount::new(N)).bench_local(|| {
        let mut acc = 0.0f32;
        for &(code, tc, _, _) in &s.inputs {
            let t = ntc_celsius_f32(black_box(tc));
            if let Ok(r) = s.cal.correct(black_box(code), t) {
                acc += Unit::DbPower.from_x(r.x);
            }
        }
        acc
    });
}

/// Fixed path through a `StageCache`, raw codes to power dB, on a stream whose temperature code changes
/// every 64 samples (a slow temperature channel): the same inputs with each temperature held for 64.
#[divan::bench(sample_count = 50)]
fn fixed_cached_raw_to_db(b: divan::Bencher) {
    let s = setup();
    let held: Vec<(u32, u32)> =
        s.inputs.iter().enumerate().map(|(k, &(code, _, _, _))| (code, s.inputs[k - k % 64].1)).collect();
    let mut cache = logtrim::fixed::StageCache::new(s.tables.view());
    b.counter(divan::counter::ItemsCount::new(N)).bench_local(|| {
        let mut acc = 0i64;
        for &(code, tc) in &held {
            if let Ok(r) = cache.correct_raw(black_box(code), black_box(tc)) {
                acc = acc.wrapping_add(r.value(Unit::DbPower).unwrap_or(0));
            }
        }
        acc
    });
}
