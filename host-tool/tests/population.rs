//! The population method, characterise → plan → fit, on simulated lots with seeds of their own (neither the
//! ones it was developed on nor the README's). The goal figures are the issue's: on validation readings at
//! random temperatures, production units fitted from 3 set-points within 1.3x (rms) and 2.5x (max) of the
//! noise-only limit, from 2 set-points within 1.5x and 3x, and a unit from outside the population flagged.
//! The fast tests use small lots; `--ignored` runs the full figure (lots of 30, both presets, 2 and 3
//! set-points).

use std::sync::OnceLock;

use logtrim_host::frontend::preset;
use logtrim_host::population::plan::{plan, predict, PlanOptions};
use logtrim_host::population::trial::{run, TrialOptions, TrialOutcome};
use logtrim_host::population::{characterise, CharacteriseOptions, PopulationError, PopulationModel};
use logtrim_host::simulate::{outlier_places, simulate_lot, ChamberPlan, Lot, Plan, SimError};

/// The goal: (rms, max) ratios to the noise-only limit for 3 and 2 set-points.
fn goal(setpoints: usize) -> (f64, f64) {
    if setpoints >= 3 {
        (1.3, 2.5)
    } else {
        (1.5, 3.0)
    }
}

fn small(setpoints: usize, seed: u64) -> TrialOptions {
    TrialOptions {
        lot_seed: seed,
        lot_units: 20,
        lot_setpoints: 6,
        production_seed: seed + 1,
        production_units: 6,
        outliers: 1,
        setpoints,
        validation: 800,
        ratios: 21,
        repeats: 2,
    }
}

/// Checks a trial against the goal: the units of the population pooled, each outlier failed (by the
/// population check, or by another check its fit cannot pass), no unit of the population flagged.
fn check(name: &str, t: &TrialOutcome, setpoints: usize) {
    let (rms, max) = goal(setpoints);
    let (r, m, n) = t.pooled;
    assert!(n > 1000, "{name}: {n} readings compared");
    assert!(
        r <= rms && m <= max,
        "{name}, {setpoints} set-points: rms {r:.2}x (goal {rms}x), max {m:.2}x (goal {max}x)"
    );
    for u in &t.units {
        if u.outlier {
            assert!(u.verdict != "PASS", "{name}: outlier {} passed: {:?}", u.serial, u.population);
        } else {
            assert!(!u.flagged, "{name}: {} of the population flagged: {:?}", u.serial, u.population);
        }
    }
}

fn photometer_three() -> &'static TrialOutcome {
    static T: OnceLock<TrialOutcome> = OnceLock::new();
    T.get_or_init(|| run(&preset("photometer-compensated").unwrap(), &small(3, 9101)).unwrap())
}

#[test]
fn three_set_points_on_a_small_photometer_lot_reach_the_goal() {
    check("photometer-compensated", photometer_three(), 3);
}

#[test]
fn two_set_points_on_a_small_gas_lot_reach_the_goal() {
    let t = run(&preset("gas-uncompensated").unwrap(), &small(2, 9202)).unwrap();
    check("gas-uncompensated", &t, 2);
    assert_eq!(t.plan.setpoints_c.len(), 2);
}

#[test]
#[ignore = "the full figure: lots of 30 on both presets, 2 and 3 set-points (about a minute in release)"]
fn full_figure_on_both_presets() {
    for name in ["photometer-compensated", "gas-uncompensated"] {
        for n in [3, 2] {
            let opt = TrialOptions {
                lot_seed: 7300,
                lot_units: 30,
                production_seed: 7301,
                production_units: 20,
                outliers: 2,
                setpoints: n,
                validation: 3000,
                ..TrialOptions::default()
            };
            let t = run(&preset(name).unwrap(), &opt).unwrap();
            check(name, &t, n);
        }
    }
}

/// Two JSON values equal but for numbers within 1e-14 relative.
fn assert_close(a: &serde_json::Value, b: &serde_json::Value) {
    use serde_json::Value::{Array, Number, Object};
    match (a, b) {
        (Number(x), Number(y)) => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            assert!((x - y).abs() <= 1e-14 * x.abs().max(y.abs()), "{x} vs {y}");
        }
        (Array(x), Array(y)) => {
            assert_eq!(x.len(), y.len());
            x.iter().zip(y).for_each(|(x, y)| assert_close(x, y));
        }
        (Object(x), Object(y)) => {
            assert_eq!(x.keys().collect::<Vec<_>>(), y.keys().collect::<Vec<_>>());
            x.iter().for_each(|(k, v)| assert_close(v, &y[k]));
        }
        _ => assert_eq!(a, b),
    }
}

#[test]
fn the_population_file_round_trips_and_is_read_strictly() {
    let m = &photometer_three().model;
    let text = m.to_json();
    // Every value comes back to within the last bits of its decimal form (serde_json's default parsing is
    // not correctly rounded in the last bit; common practice), and the text is stable.
    let back = PopulationModel::from_json(&text, "POP.json").unwrap();
    let (a, b): (serde_json::Value, serde_json::Value) =
        (serde_json::from_str(&text).unwrap(), serde_json::from_str(&back.to_json()).unwrap());
    assert_close(&a, &b);
    assert_eq!((back.modes_kept, &back.units, &back.model), (m.modes_kept, &m.units, &m.model));
    let edit = |f: &dyn Fn(&mut serde_json::Value)| {
        let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
        f(&mut v);
        PopulationModel::from_json(&v.to_string(), "POP.json").unwrap_err().to_string()
    };
    let e = edit(&|v| v["modes_kep"] = 1.into());
    assert!(e.contains("POP.json") && e.contains("modes_kep"), "{e}");
    assert!(edit(&|v| v["version"] = 2.into()).contains("version 2"));
    assert!(edit(&|v| v["format"] = "logtrim-calibration".into()).contains("format"));
    let e = edit(&|v| {
        v["mean"].as_array_mut().unwrap().pop();
    });
    assert!(e.contains("mean has") && e.contains("expected"), "{e}");
    assert!(edit(&|v| v["modes_kept"] = 99.into()).contains("modes_kept 99"));
    assert!(edit(&|v| v["floor"][3] = (-1.0).into()).contains("floor"));
    assert!(edit(&|v| v["model"] = "offset=2,residual=2x2".into()).contains("no residual"));
}

#[test]
fn the_schema_names_every_key_of_the_file() {
    let schema: serde_json::Value =
        serde_json::from_str(include_str!("../../schemas/population.schema.json")).unwrap();
    let file: serde_json::Value = serde_json::from_str(&photometer_three().model.to_json()).unwrap();
    let keys = |v: &serde_json::Value| {
        let mut k: Vec<String> = v.as_object().unwrap().keys().cloned().collect();
        k.sort();
        k
    };
    assert_eq!(keys(&schema["properties"]), keys(&file));
    let mut required: Vec<String> =
        schema["required"].as_array().unwrap().iter().map(|v| v.as_str().unwrap().to_string()).collect();
    required.sort();
    assert_eq!(required, keys(&file));
    assert_eq!(keys(&schema["properties"]["norm"]["properties"]), keys(&file["norm"]));
    assert_eq!(keys(&schema["properties"]["modes"]["items"]["properties"]), keys(&file["modes"][0]));
    assert_eq!(keys(&schema["properties"]["cv"]["items"]["properties"]), keys(&file["cv"][0]));
}

#[test]
fn the_plan_beats_set_points_bunched_at_one_end() {
    let m = &photometer_three().model;
    let p = plan(m, &PlanOptions { setpoints: 3, ..PlanOptions::default() }).unwrap();
    let [t0, t1] = m.temperature_c;
    let step = (t1 - t0) / 14.0;
    let bunched = predict(m, &[t0, t0 + step, t0 + 2.0 * step], p.ratios).unwrap();
    assert!(p.predicted.rms_ratio < bunched.rms_ratio, "{:?} vs bunched {bunched:?}", p.predicted);
    // The prediction includes the noise-only part: never below it.
    assert!(p.predicted.rms_ratio >= 1.0 && p.predicted.worst_ratio >= p.predicted.rms_ratio.min(1.0));
    // One set-point cannot measure a unit's offset and slope over temperature with this model: refused.
    assert!(plan(m, &PlanOptions { setpoints: 0, ..PlanOptions::default() }).is_err());
}

#[test]
fn the_summary_names_modes_and_cross_validation() {
    let s = photometer_three().model.render_summary();
    assert!(s.contains("mode  1") && s.contains("leave-one-unit-out") && s.contains("modes kept"), "{s}");
    assert!(s.contains("predicted error in x over the range for a unit fitted from"), "{s}");
}

/// A plan of `units` units, `setpoints` set-points of `ratios` ratios, one sweep, one validation reading.
fn tiny(seed: u64, units: usize, setpoints: usize, ratios: usize) -> Plan {
    let chamber = ChamberPlan { setpoints, ratios_per_setpoint: ratios, repeats: 1 };
    Plan { seed, chamber, validation_count: 1, units }
}

#[test]
fn a_lot_too_small_is_refused() {
    let fe = preset("photometer-compensated").unwrap();
    let sim = simulate_lot(&fe, &tiny(3, 3, 4, 9), &Lot::default()).unwrap();
    let jobs: Vec<logtrim_host::batch::UnitJob> = (0..3)
        .map(|i| logtrim_host::batch::UnitJob {
            serial: sim.units[i].serial.clone(),
            data: logtrim_host::demo::fit_data(&sim.chamber, i).unwrap(),
            unreadable: None,
        })
        .collect();
    let opt = CharacteriseOptions { fit: Default::default(), production_c: vec![] };
    let e = characterise(&jobs, &opt).unwrap_err();
    assert!(matches!(e, PopulationError::Lot(_)) && e.to_string().contains("at least 5"), "{e}");
}

#[test]
fn simulated_lots_record_their_outliers_and_set_points() {
    let fe = preset("gas-uncompensated").unwrap();
    let plan = tiny(77, 8, 2, 5);
    let lot = Lot { outliers: 2, setpoints_c: vec![-5.0, 40.0, 85.0] };
    let sim = simulate_lot(&fe, &plan, &lot).unwrap();
    let marked: Vec<usize> = (0..8).filter(|&i| sim.units[i].outlier).collect();
    assert_eq!(marked, outlier_places(77, 8, 2));
    assert_eq!(marked.len(), 2);
    let manifest: serde_json::Value = serde_json::from_str(&sim.manifest_json(&[])).unwrap();
    assert_eq!(manifest["outliers"].as_array().unwrap().len(), 2);
    assert_eq!(manifest["setpoints_c"], serde_json::json!([-5.0, 40.0, 85.0]));
    assert!(sim.units_json().contains("\"outlier\": true"));
    let sps: Vec<f64> = sim.chamber.iter().map(|r| r.setpoint_c).collect();
    assert!(sps.iter().all(|t| [-5.0, 40.0, 85.0].contains(t)));
    // The units of the population are the ones a lot without outliers draws.
    let plain = simulate_lot(&fe, &plan, &Lot::default()).unwrap();
    assert!((0..8).filter(|i| !marked.contains(i)).all(|i| sim.units[i].frontend == plain.units[i].frontend));
    // Refused: a set-point outside the operating range, more outliers than units.
    let bad = Lot { outliers: 0, setpoints_c: vec![0.0, 87.5] };
    assert!(matches!(simulate_lot(&fe, &plan, &bad), Err(SimError::SetPoint { .. })));
    let bad = Lot { outliers: 9, setpoints_c: vec![] };
    assert!(matches!(simulate_lot(&fe, &plan, &bad), Err(SimError::Plan { what: "outliers", .. })));
}
