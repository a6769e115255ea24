//! The accuracy target of the fitter, on validation data the fit never saw, spread over the whole
//! temperature range: rms error in x within 1.3× and max error within 2.5× of the irreducible error — the
//! error of an oracle that knows the exact front-end model and reads the same noisy code and temperature.
//!
//! The reference model and its oracle are the simulator's (`logtrim_host::frontend`), the correction is
//! firmware-lib's f32 path and its integer fixed-point path (default tables). Cases: both presets at two seeds, units drawn with the production line's
//! unit-to-unit spread, and a sparser chamber plan (5 set-points, fewer ratios).

use logtrim_host::demo::{fit_data, fixed_errors, logtrim_errors, versus_oracle};
use logtrim_host::fit::{fit, FitOptions};
use logtrim_host::frontend::preset;
use logtrim_host::simulate::{simulate, ChamberPlan, Plan};
use logtrim_host::tables::{build, TableOptions};

const RMS_BOUND: f64 = 1.3;
const MAX_BOUND: f64 = 2.5;

fn check(name: &str, plan: Plan) {
    let fe = preset(name).unwrap();
    let sim = simulate(&fe, &plan).unwrap();
    for unit in 0..plan.units {
        let out = fit(&fit_data(&sim.chamber, unit).unwrap(), &FitOptions::default()).unwrap();
        let val: Vec<_> = sim.validation.iter().filter(|r| r.unit == unit).cloned().collect();
        let tables = build(&out.calibration, None, &TableOptions::default()).unwrap();
        let paths =
            [("f32", logtrim_errors(&out.calibration, &val)), ("fixed", fixed_errors(&tables.view(), &val))];
        for (path, ours) in paths {
            let v = versus_oracle(&ours, &val);
            let refused = ours.iter().filter(|e| e.is_none()).count();
            let label = format!(
                "{name} seed {} unit {unit} {path}: rms {:.2}x max {:.2}x over {} readings, {refused} refused, model {}",
                plan.seed,
                v.rms_ratio,
                v.max_ratio,
                v.count,
                out.chosen.to_arg()
            );
            eprintln!("{label}");
            assert!(v.count as f64 >= 0.98 * val.len() as f64, "too few readings compared: {label}");
            assert!(v.rms_ratio <= RMS_BOUND, "{label}");
            assert!(v.max_ratio <= MAX_BOUND, "{label}");
        }
    }
}

#[test]
fn compensated_preset_meets_the_target() {
    for seed in [11, 12] {
        check("photometer-compensated", Plan { seed, validation_count: 4000, ..Plan::default() });
    }
}

#[test]
fn uncompensated_preset_meets_the_target() {
    for seed in [11, 12] {
        check("gas-uncompensated", Plan { seed, validation_count: 4000, ..Plan::default() });
    }
}

#[test]
fn units_with_production_spread_meet_the_target() {
    for name in ["photometer-compensated", "gas-uncompensated"] {
        check(name, Plan { seed: 21, units: 3, validation_count: 2000, ..Plan::default() });
    }
}

#[test]
fn a_sparser_chamber_plan_meets_the_target() {
    let chamber = ChamberPlan { setpoints: 5, ratios_per_setpoint: 25, repeats: 2 };
    for name in ["photometer-compensated", "gas-uncompensated"] {
        check(name, Plan { seed: 31, chamber, validation_count: 3000, ..Plan::default() });
    }
}
