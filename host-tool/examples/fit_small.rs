//! Times fitting small (400-row) units one after another: the cost that dominates a production batch.
use std::time::Instant;

use logtrim_host::demo::fit_data;
use logtrim_host::fit::{fit, FitOptions};
use logtrim_host::frontend::preset;
use logtrim_host::simulate::{simulate, ChamberPlan, Plan};

fn main() {
    let fe = preset("gas-uncompensated").expect("preset");
    let plan = Plan {
        seed: 6,
        chamber: ChamberPlan { setpoints: 5, ratios_per_setpoint: 40, repeats: 2 },
        validation_count: 1,
        units: 40,
    };
    let sim = simulate(&fe, &plan).expect("simulate");
    let data: Vec<_> = (0..plan.units).map(|u| fit_data(&sim.chamber, u).expect("data")).collect();
    let t = Instant::now();
    for d in &data {
        fit(d, &FitOptions::default()).expect("fit");
    }
    println!("{} units: {:.1} ms per unit", data.len(), t.elapsed().as_secs_f64() * 1e3 / data.len() as f64);
}
