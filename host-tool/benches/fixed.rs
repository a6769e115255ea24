//! ns per corrected sample, fixed path against the naive f32 path (divan): `cargo bench -p logtrim-host
//! --bench fixed`. Inputs are the hard unit's calibrated range, drawn by a seeded generator.

#[path = "../tests/common/mod.rs"]
mod common;

use common::samples::{self, Input};
use common::{ntc, units};
use divan::counter::ItemsCount;
use logtrim_host::tables::{self, TableOptions, TemperatureChannel};

const N: usize = 4096;

struct Setup {
    cal: logtrim::Calibration,
    tables: tables::FixedTables,
    inputs: Vec<Input>,
}

fn setup() -> Setup {
    let cal = units::hard_uncompensated();
    let channel = TemperatureChannel { codes: ntc::CODES, celsius: &ntc::celsius };
    let tables = tables::build(&cal, Some(&channel), &TableOptions::default()).expect("tables");
    let inputs = samples::inputs(&cal, N, 0x9e37_79b9_7f4a_7c15);
    Setup { cal, tables, inputs }
}

fn main() {
    divan::main();
}

/// Fixed path, raw codes to power dB (per batch of 4096 samples).
#[divan::bench(sample_count = 50)]
fn fixed_raw_to_db(b: divan::Bencher) {
    let s = setup();
    let f = s.tables.view();
    b.counter(ItemsCount::new(N)).bench_local(|| samples::run_fixed_raw(&f, &s.inputs));
}

/// Fixed path, log code and m°C to power dB.
#[divan::bench(sample_count = 50)]
fn fixed_mc_to_db(b: divan::Bencher) {
    let s = setup();
    let f = s.tables.view();
    b.counter(ItemsCount::new(N)).bench_local(|| samples::run_fixed_mc(&f, &s.inputs));
}

/// Naive f32 path with libm, raw codes (β equation for the NTC) to power dB.
#[divan::bench(sample_count = 50)]
fn naive_f32_raw_to_db(b: divan::Bencher) {
    let s = setup();
    b.counter(ItemsCount::new(N)).bench_local(|| samples::run_naive_raw(&s.cal, &s.inputs));
}

/// Fixed path through a `StageCache`, raw codes to power dB, on a stream whose temperature code changes
/// every 64 samples (a slow temperature channel): the same inputs with each temperature held for 64.
#[divan::bench(sample_count = 50)]
fn fixed_cached_raw_to_db(b: divan::Bencher) {
    let s = setup();
    let held: Vec<Input> = s
        .inputs
        .iter()
        .enumerate()
        .map(|(k, &i)| Input { temp_code: s.inputs[k - k % 64].temp_code, ..i })
        .collect();
    let mut cache = logtrim::fixed::StageCache::new(s.tables.view());
    b.counter(ItemsCount::new(N)).bench_local(|| samples::run_fixed_cached(&mut cache, &held));
}
