//! Parse speed of the CSV readers: prints rows per second for 1,000,000 calibration rows and readings rows.
//!
//! Run with `cargo bench -p logtrim-host --bench csv_parse` (release profile). It prints figures; it does
//! not judge them.

use std::fmt::Write as _;
use std::time::Instant;

use logtrim_host::data::{read_calibration, read_readings, ReadOptions};

const ROWS: usize = 1_000_000;

/// Rows shaped like a chamber run's: a unit serial, a 16-bit code, a temperature, a ratio, an extra column.
fn text(with_ratio: bool) -> String {
    let mut s = String::with_capacity(ROWS * 48);
    s.push_str(if with_ratio { "unit,code,temp_c,ratio,note\n" } else { "unit,code,temp_c,note\n" });
    let mut state: u64 = 0x9E37_79B9_7F4A_7C15;
    for i in 0..ROWS {
        // A small xorshift for varied digits; the content does not matter, only its shape.
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        let code = (state % 65536) as u32;
        let temp = -20.0 + (state >> 20) as f64 % 105_000.0 / 1000.0;
        let ratio = 10f64.powf(((state >> 40) % 5000) as f64 / 1000.0 - 3.0);
        let unit = i % 16;
        if with_ratio {
            let _ = writeln!(s, "U{unit:04},{code},{temp},{ratio},ok");
        } else {
            let _ = writeln!(s, "U{unit:04},{code},{temp},ok");
        }
    }
    s
}

/// The best of three timed reads of `text` by `read` (which returns the rows read), printed as `what`.
fn time(what: &str, text: &str, read: impl Fn(&[u8]) -> usize) {
    let mut best = f64::INFINITY;
    for _ in 0..3 {
        let t0 = Instant::now();
        let rows = read(text.as_bytes());
        let dt = t0.elapsed().as_secs_f64();
        assert_eq!(rows, ROWS);
        best = best.min(dt);
    }
    println!(
        "{what}: {ROWS} rows ({:.1} MB) in {:.3} s best of 3 = {:.2} M rows/s",
        text.len() as f64 / 1e6,
        best,
        ROWS as f64 / best / 1e6
    );
}

fn main() {
    let opts = ReadOptions::default();
    time("calibration reader", &text(true), |b| {
        read_calibration(b, "bench.csv", &opts).expect("bench data parses").rows.len()
    });
    time("readings reader (keeps every field)", &text(false), |b| {
        read_readings(b, "bench.csv", &opts).expect("bench data parses").rows.len()
    });
}
