//! Measures what a table size buys: builds the fixed tables of every hand-made unit at a chosen size and
//! runs a sampled verification, printing bytes and error figures.
//!
//! `cargo run --release -p logtrim-host --example fixed_sizes -- T_KNOTS XA_KNOTS [bend|plain] [CODE_STRIDE] [TEMP_STRIDE]`
//! (`plain` tabulates the residual over u without removing the bias bend, to show why the bend is removed).
#[path = "../tests/common/units.rs"]
mod units;
use logtrim_host::{tables, verify};
fn main() {
    let args: Vec<String> = std::env::args().collect();
    let nt: usize = args.get(1).map(|s| s.parse().unwrap()).unwrap_or(16);
    let nx: usize = args.get(2).map(|s| s.parse().unwrap()).unwrap_or(40);
    let bend = args.get(3).map(|s| s != "plain").unwrap_or(true);
    let cs: u32 = args.get(4).map(|s| s.parse().unwrap()).unwrap_or(7);
    let ts: usize = args.get(5).map(|s| s.parse().unwrap()).unwrap_or(10);
    for (name, c) in units::all() {
        let opts = tables::TableOptions { t_knots: nt, xa_knots: nx, bias_bend: bend, ..Default::default() };
        let t = match tables::build(&c, None, &opts) {
            Ok(t) => t,
            Err(e) => {
                println!("{name}: {e}");
                continue;
            }
        };
        let vo = verify::VerifyOptions { code_stride: cs, temp_stride: ts, ..Default::default() };
        let r = verify::run(&c, &t.view(), None, &vo).unwrap();
        println!("== {name}: {} bytes, header {:?}\n{r}", t.bytes(), t.header);
    }
}
