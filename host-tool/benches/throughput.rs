//! Throughput of the host's main jobs on this machine, CSV parsing included. Prints figures; judges nothing.
//!
//! * fit: 1,000,000 calibration rows of the uncompensated preset (8 set-points × 250 ratios × 500
//!   sweeps), read from CSV text and fitted (model search on a thinned subset, final solve on all rows);
//! * apply: 1,000,000 readings read from CSV, corrected by firmware-lib's f32 path, written as CSV;
//! * batch: 1,000 units × 400 rows each, fitted in parallel, one calibration file and image per unit.
//!
//! Run with `cargo bench -p logtrim-host --bench throughput`. Goals: fit and apply under 3 s each, the
//! batch under 10 s, on 2 cores.

use std::time::Instant;

use logtrim_host::acceptance::AcceptanceLimits;
use logtrim_host::apply::write_results;
use logtrim_host::batch::{fit_units, BatchOptions, ImageOptions, UnitJob};
use logtrim_host::correct::{correct_rows, Arithmetic};
use logtrim_host::data::{read_calibration, read_readings, ReadOptions};
use logtrim_host::demo::fit_data;
use logtrim_host::fit::{fit, FitData, FitOptions};
use logtrim_host::frontend::{preset, FrontEnd};
use logtrim_host::simulate::{simulate, ChamberPlan, Plan, Simulation};

/// A simulation of `units` units of `fe`: chamber runs of (set-points, ratios, repeats) and `validation`
/// readings each.
fn run(
    fe: &FrontEnd,
    seed: u64,
    (setpoints, ratios, repeats): (usize, usize, usize),
    validation: usize,
    units: usize,
) -> Simulation {
    let chamber = ChamberPlan { setpoints, ratios_per_setpoint: ratios, repeats };
    simulate(fe, &Plan { seed, chamber, validation_count: validation, units }).expect("simulate")
}

fn main() {
    let fe = preset("gas-uncompensated").expect("preset");
    let opt = FitOptions::default();

    // fit: 1M rows.
    let sim = run(&fe, 5, (8, 250, 500), 1_000_000, 1);
    let cal_csv = sim.cal_csv();
    let readings_csv = sim.readings_csv();
    println!("fit: {} rows, {:.1} MB of CSV", sim.chamber.len(), cal_csv.len() as f64 / 1e6);
    let t = Instant::now();
    let data = read_calibration(cal_csv.as_slice(), "bench.csv", &ReadOptions::default()).expect("read");
    let t_read = t.elapsed().as_secs_f64();
    let out = fit(&FitData::from_rows(&data.rows, None), &opt).expect("fit");
    let t_fit = t.elapsed().as_secs_f64();
    println!("fit: read {t_read:.3} s, read + fit {t_fit:.3} s (goal < 3 s); model {}", out.chosen.to_arg());

    // apply: 1M readings.
    let t = Instant::now();
    let readings =
        read_readings(readings_csv.as_slice(), "readings.csv", &ReadOptions::default()).expect("read");
    let t_read = t.elapsed().as_secs_f64();
    let results = correct_rows(&out.calibration, &readings, Arithmetic::F32);
    let t_corr = t.elapsed().as_secs_f64();
    let mut sink = Vec::with_capacity(readings_csv.len() * 2);
    let summary = write_results(&readings, &results, &mut sink).expect("write");
    let t_all = t.elapsed().as_secs_f64();
    println!(
        "apply: {} rows, read {t_read:.3} s, + correct {t_corr:.3} s, + write {t_all:.3} s (goal < 3 s); {} rejected",
        summary.rows, summary.rejected
    );

    // batch: 1000 units × 400 rows.
    let sim = run(&fe, 6, (5, 40, 2), 1, 1000);
    let jobs: Vec<UnitJob> = (0..sim.units.len())
        .map(|u| UnitJob {
            serial: sim.units[u].serial.clone(),
            data: fit_data(&sim.chamber, u).expect("data"),
            unreadable: None,
        })
        .collect();
    let base = std::env::var_os("LOGTRIM_BENCH_DIR")
        .map(std::path::PathBuf::from)
        .unwrap_or_else(std::env::temp_dir);
    let dir = base.join(format!("logtrim-bench-batch-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("dir");
    let t = Instant::now();
    let opts = BatchOptions {
        fit: opt.clone(),
        sensor: None,
        limits: AcceptanceLimits::default(),
        image: ImageOptions::default(),
        created_unix_s: 1_700_000_000,
    };
    let done = fit_units(&jobs, &opts, &dir, &logtrim_host::progress::quiet).expect("batch");
    let (spec, results) = (done.spec, done.units);
    let secs = t.elapsed().as_secs_f64();
    let failed = results.iter().filter(|r| r.record.verdict != "PASS").count();
    println!(
        "batch: {} units × {} rows in {secs:.2} s (goal < 10 s), {failed} not passed, model {}",
        jobs.len(),
        jobs[0].data.code.len(),
        spec.map(|s| s.to_arg()).unwrap_or_default()
    );
    let _ = std::fs::remove_dir_all(&dir);
}
