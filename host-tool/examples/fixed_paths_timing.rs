//! Times the three paths `logtrim verify` evaluates, per call, on one hand-made unit (a quick look at where
//! a verification spends its time): `cargo run --release -p logtrim-host --example fixed_paths_timing`.

#[path = "../tests/common/units.rs"]
mod units;

use std::hint::black_box;
use std::time::Instant;

fn main() {
    let cal = units::mild_compensated();
    let t = logtrim_host::tables::build(&cal, None, &Default::default()).expect("tables");
    let f = t.view();
    let temps: Vec<i32> = (0..40).map(|k| -3000 + k * 1900).collect();
    let n = (temps.len() * 65536) as f64;
    let time = |name: &str, g: &dyn Fn(u32, i32) -> bool| {
        let start = Instant::now();
        let mut ok = 0u64;
        for &mc in &temps {
            for code in 0..65536u32 {
                ok += u64::from(g(black_box(code), black_box(mc)));
            }
        }
        println!("{name:>10}: {:6.1} ns per call ({ok} values)", start.elapsed().as_nanos() as f64 / n);
    };
    time("f64 ref", &|c, mc| cal.correct_f64(f64::from(c), f64::from(mc) / 1000.0).is_ok());
    time("f32 libm", &|c, mc| cal.correct(c, mc as f32 / 1000.0).is_ok());
    time("fixed", &|c, mc| f.correct(c, mc).is_ok());
}
