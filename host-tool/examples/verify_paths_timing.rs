//! Times, per point, each evaluation `logtrim verify` makes in its row loop, in its one-call and its
//! staged form, on one hand-made unit (best of three passes over every code at 40 temperatures):
//! `cargo run --release -p logtrim-host --example verify_paths_timing [UNIT]`.

#[path = "../tests/common/units.rs"]
mod units;

use std::hint::black_box;
use std::time::Instant;

use logtrim::math::Libm;

fn main() {
    let name = std::env::args().nth(1).unwrap_or_else(|| "hard_uncompensated".into());
    let Some((_, cal)) = units::all().into_iter().find(|(n, _)| *n == name) else {
        eprintln!(
            "unknown unit {name}; units: hard_uncompensated, hard_compensated, mild_compensated, ideal"
        );
        std::process::exit(2);
    };
    let tables = logtrim_host::tables::build(&cal, None, &Default::default()).expect("tables");
    let f = tables.view();
    let tr = cal.temperature;
    let (lo, hi) = (tr.min_c - tr.extrapolation_k, tr.max_c + tr.extrapolation_k);
    let temps: Vec<i32> =
        (0..40).map(|k| ((lo + (hi - lo) * k as f32 / 39.0) * 1000.0).round() as i32).collect();
    let n = (temps.len() * 65536) as f64;
    // `row` runs once per temperature and returns the number of values over all codes.
    let time = |what: &str, row: &dyn Fn(i32) -> u64| {
        let mut best = f64::INFINITY;
        let mut ok = 0;
        for _ in 0..3 {
            let start = Instant::now();
            ok = temps.iter().map(|&mc| row(black_box(mc))).sum::<u64>();
            best = best.min(start.elapsed().as_nanos() as f64 / n);
        }
        println!("{what:>28}: {best:6.1} ns per point ({ok} values)");
    };
    let celsius = |mc: i32| f64::from(mc) / 1000.0;
    println!("{name}, {} points per pass", n as u64);
    time("f64 correct_f64", &|mc| {
        let t = celsius(mc);
        (0..65536u32).filter(|&c| cal.correct_f64(f64::from(black_box(c)), t).is_ok()).count() as u64
    });
    time("f64 staged, exact", &|mc| {
        let st = cal.reference_stage(celsius(mc));
        (0..65536u32).filter(|&c| cal.correct_staged_f64(&st, black_box(c)).is_ok()).count() as u64
    });
    time("f64 sweep, warm start", &|mc| {
        let mut sweep = cal.reference_sweep(celsius(mc));
        (0..65536u32).filter(|&c| sweep.correct(black_box(c)).is_ok()).count() as u64
    });
    time("f32 correct_with", &|mc| {
        let t = celsius(mc) as f32;
        (0..65536u32).filter(|&c| cal.correct_with::<Libm>(black_box(c), t).is_ok()).count() as u64
    });
    time("f32 staged", &|mc| {
        let st = cal.stage_with::<Libm>(celsius(mc) as f32);
        (0..65536u32).filter(|&c| cal.correct_staged(&st, black_box(c)).is_ok()).count() as u64
    });
    time("fixed correct", &|mc| {
        (0..65536u32).filter(|&c| f.correct(black_box(c), mc).is_ok()).count() as u64
    });
    time("fixed staged", &|mc| match f.stage_millicelsius(mc) {
        Ok(st) => (0..65536u32).filter(|&c| f.correct_staged(&st, black_box(c)).is_ok()).count() as u64,
        Err(_) => 0,
    });
}
