use super::*;
use crate::data::{read_calibration, read_readings, ReadOptions};
use crate::frontend::{preset, TemperatureMeasurement, PRESETS};

fn small_plan(seed: u64) -> Plan {
    Plan {
        seed,
        chamber: ChamberPlan { setpoints: 5, ratios_per_setpoint: 11, repeats: 2 },
        validation_count: 300,
        units: 1,
    }
}

fn temp(m: MeasuredTemperature) -> f64 {
    match m {
        MeasuredTemperature::Celsius(t) => t,
        MeasuredTemperature::Code(c) => panic!("code {c}"),
    }
}

#[test]
fn same_seed_same_bytes_other_seed_other_bytes() {
    let fe = preset("gas-uncompensated").unwrap();
    let a = simulate(&fe, &small_plan(11)).unwrap();
    let b = simulate(&fe, &small_plan(11)).unwrap();
    let c = simulate(&fe, &small_plan(12)).unwrap();
    assert_eq!(a.cal_csv(), b.cal_csv());
    assert_eq!(a.readings_csv(), b.readings_csv());
    assert_eq!(a.truth_csv(), b.truth_csv());
    assert_ne!(a.cal_csv(), c.cal_csv());
    assert_ne!(a.readings_csv(), c.readings_csv());
}

#[test]
fn each_unit_and_purpose_has_its_own_stream() {
    let fe = preset("photometer-compensated").unwrap();
    let mut p = small_plan(5);
    let a = simulate(&fe, &p).unwrap();
    p.validation_count = 17;
    p.chamber.repeats = 1;
    let b = simulate(&fe, &p).unwrap();
    // Fewer repeats and fewer validation readings leave the first sweep and the first readings unchanged.
    assert_eq!(a.chamber[..11], b.chamber[..11]);
    assert_eq!(a.validation[..17], b.validation[..17]);
    // Unit 1 of a batch of 2 is the same as unit 1 of a batch of 3.
    p.units = 2;
    let two = simulate(&fe, &p).unwrap();
    p.units = 3;
    let three = simulate(&fe, &p).unwrap();
    assert_eq!(two.units[1], three.units[1]);
    let rows = |s: &Simulation| s.chamber.iter().filter(|r| r.unit == 1).copied().collect::<Vec<_>>();
    assert_eq!(rows(&two), rows(&three));
}

#[test]
fn chamber_run_spans_the_range_at_its_set_points() {
    for p in PRESETS {
        let fe = p.frontend();
        let plan = ChamberPlan { setpoints: 6, ratios_per_setpoint: 9, repeats: 3 };
        let rows = chamber_run(&fe, &plan, 0, 3);
        assert_eq!(rows.len(), 6 * 9 * 3);
        let sps = setpoints(&fe, 6);
        assert_eq!((sps[0], sps[5]), (fe.operating.temp_min_c, fe.operating.temp_max_c));
        let ratios = sweep_ratios(&fe, 9);
        assert_eq!((ratios[0], ratios[8]), (fe.operating.ratio_min, fe.operating.ratio_max));
        // Log-spaced: equal steps in ln ratio.
        let step = (ratios[1] / ratios[0]).ln();
        assert!(ratios.windows(2).all(|w| ((w[1] / w[0]).ln() - step).abs() < 1e-12));
        for r in &rows {
            assert!(sps.contains(&r.setpoint_c));
            assert!(ratios.contains(&r.ratio) && r.x_true == r.ratio.ln());
            match fe.temperature_sensor {
                TemperatureMeasurement::Digital { offset_k, noise_k_rms, resolution_k, slope_error } => {
                    let spread = (fe.operating.setpoint_jitter_k_rms.powi(2) + noise_k_rms.powi(2)).sqrt();
                    let want = 25.0 + (r.setpoint_c - 25.0) * (1.0 + slope_error) + offset_k;
                    assert!((temp(r.temperature) - want).abs() < 6.0 * spread + resolution_k, "{r:?}");
                }
                // A raw channel reads the unit's true temperature, within its ADC noise and rounding.
                TemperatureMeasurement::Raw { noise_codes_rms, .. } => {
                    let MeasuredTemperature::Code(c) = r.temperature else { panic!("{r:?}") };
                    let exact = fe.raw_code_exact(r.t_true_c).unwrap();
                    assert!((f64::from(c) - exact).abs() < 6.0 * noise_codes_rms + 0.5, "{r:?}");
                }
            }
            assert!((r.t_true_c - r.setpoint_c).abs() < 6.0 * fe.operating.setpoint_jitter_k_rms);
            // The code is the front end's at the true temperature, within noise.
            let exact = fe.code_exact(r.x_true, r.t_true_c);
            assert!((f64::from(r.code) - exact).abs() < 6.0 * fe.adc.noise_codes_rms + 0.5);
        }
    }
}

#[test]
fn validation_run_covers_the_whole_range() {
    let fe = preset("gas-uncompensated").unwrap();
    let rows = validation_run(&fe, 2000, 0, 1, 9);
    let o = fe.operating;
    let (x0, x1) = (o.ratio_min.ln(), o.ratio_max.ln());
    let min_max = |f: &dyn Fn(&SimReading) -> f64| {
        rows.iter().map(f).fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)))
    };
    let (xa, xb) = min_max(&|r| r.x_true);
    let (ta, tb) = min_max(&|r| r.t_true_c);
    assert!(xa >= x0 && xb <= x1 && xa < x0 + 0.05 * (x1 - x0) && xb > x1 - 0.05 * (x1 - x0));
    assert!(ta >= o.temp_min_c && tb <= o.temp_max_c && ta < o.temp_min_c + 3.0 && tb > o.temp_max_c - 3.0);
    // Not only at set-points: the middle tenth of the range holds about a tenth of the readings.
    let mid = rows.iter().filter(|r| (r.t_true_c - 32.5).abs() < 5.25).count();
    assert!((150..250).contains(&mid), "{mid}");
    assert!(rows.iter().all(|r| (r.ratio.ln() - r.x_true).abs() < 1e-12));
    assert_eq!((rows[0].id, rows[1999].id), (1, 2000));
}

#[test]
fn oracle_error_matches_the_propagated_noise_floor() {
    // Independent of the oracle's code: first-order propagation of the ADC noise (plus rounding) through
    // ∂x/∂code and of the temperature noise (plus the sensor's resolution) through ∂x/∂T, by finite
    // differences of the forward model.
    for p in PRESETS {
        let fe = p.frontend();
        let rows = validation_run(&fe, 3000, 0, 1, 21);
        let var_code = fe.adc.noise_codes_rms.powi(2) + 1.0 / 12.0;
        // The sensor's noise seen in true-temperature units: a digital sensor's after its slope error is
        // undone; a raw channel's ADC noise plus rounding through its codes per kelvin at that temperature.
        let var_t = |t: f64| match fe.temperature_sensor {
            TemperatureMeasurement::Digital { noise_k_rms, resolution_k, slope_error, .. } => {
                (noise_k_rms.powi(2) + resolution_k.powi(2) / 12.0) / (1.0 + slope_error).powi(2)
            }
            TemperatureMeasurement::Raw { noise_codes_rms, .. } => {
                let h = 1e-3;
                let per_k =
                    (fe.raw_code_exact(t + h).unwrap() - fe.raw_code_exact(t - h).unwrap()) / (2.0 * h);
                (noise_codes_rms.powi(2) + 1.0 / 12.0) / (per_k * per_k)
            }
        };
        let (mut predicted, mut n) = (0.0, 0);
        for r in rows.iter().filter(|r| r.x_oracle.is_some()) {
            let (x, t, h) = (r.x_true, r.t_true_c, 1e-4);
            let var_t = var_t(t);
            let dcdx = (fe.code_exact(x + h, t) - fe.code_exact(x - h, t)) / (2.0 * h);
            let dcdt = (fe.code_exact(x, t + h) - fe.code_exact(x, t - h)) / (2.0 * h);
            predicted += (var_code + var_t * dcdt * dcdt) / (dcdx * dcdx);
            n += 1;
        }
        let predicted = (predicted / f64::from(n)).sqrt();
        let got = OracleStats::of(&rows);
        assert!(got.undefined < 5, "{}: {got:?}", p.name);
        let ratio = got.rms_np / predicted;
        assert!(
            (0.9..1.1).contains(&ratio),
            "{}: oracle rms {} vs predicted {predicted}",
            p.name,
            got.rms_np
        );
    }
}

#[test]
fn files_have_the_stated_columns_and_read_back() {
    let fe = preset("photometer-compensated").unwrap();
    let sim = simulate(&fe, &small_plan(4)).unwrap();
    let dir = std::env::temp_dir().join(format!("logtrim-sim-files-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let written = sim.write_to(&dir).unwrap();
    let names: Vec<_> =
        written.iter().map(|w| w.path.file_name().unwrap().to_string_lossy().into_owned()).collect();
    assert_eq!(names, ["cal.csv", "readings.csv", "truth.csv", "frontend.json", "manifest.json"]);
    let first_line =
        |name: &str| std::fs::read_to_string(dir.join(name)).unwrap().lines().next().unwrap().to_string();
    assert_eq!(first_line("cal.csv"), "unit,code,temp_c,ratio");
    assert_eq!(first_line("readings.csv"), "id,code,temp_c");
    assert_eq!(first_line("truth.csv"), "id,ratio,x_true,t_true_c,x_oracle");
    // Read back through the project's own reader: every value survives the text round trip.
    let cal = crate::data::read_calibration_file(&dir.join("cal.csv"), &ReadOptions::default()).unwrap();
    assert_eq!(cal.rows.len(), sim.chamber.len());
    for (a, b) in cal.rows.iter().zip(&sim.chamber) {
        assert_eq!((a.code, a.temp_c, a.ratio), (b.code, temp(b.temperature), b.ratio));
    }
    let rd = crate::data::read_readings_file(&dir.join("readings.csv"), &ReadOptions::default()).unwrap();
    assert_eq!(rd.rows.len(), sim.validation.len());
    assert!(rd
        .rows
        .iter()
        .zip(&sim.validation)
        .all(|(a, b)| a.code == b.code && a.temp_c == Ok(temp(b.temperature))));
    assert_eq!(FrontEnd::load(&dir.join("frontend.json")).unwrap(), fe);
    let manifest = std::fs::read_to_string(dir.join("manifest.json")).unwrap();
    assert!(manifest.contains("generated file") && manifest.contains("\"seed\": 4"), "{manifest}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_batch_has_unit_columns_and_distinct_units() {
    let fe = preset("gas-uncompensated").unwrap();
    let mut plan = small_plan(8);
    plan.units = 3;
    plan.validation_count = 20;
    let sim = simulate(&fe, &plan).unwrap();
    let serials: Vec<_> = sim.units.iter().map(|u| u.serial.as_str()).collect();
    assert_eq!(serials, ["U0001", "U0002", "U0003"]);
    assert_ne!(sim.units[0].frontend.pair, sim.units[1].frontend.pair);
    let cal = read_calibration(&sim.cal_csv()[..], "cal.csv", &ReadOptions::default()).unwrap();
    assert_eq!(cal.units, serials);
    assert_eq!(cal.rows.len(), 3 * 5 * 11 * 2);
    let rd = read_readings(&sim.readings_csv()[..], "readings.csv", &ReadOptions::default()).unwrap();
    assert_eq!(rd.headers, ["id", "unit", "code", "temp_c"]);
    let ids: std::collections::BTreeSet<_> = sim.validation.iter().map(|r| r.id).collect();
    assert_eq!(ids.len(), 60);
    let truth = String::from_utf8(sim.truth_csv()).unwrap();
    assert!(truth.starts_with("id,unit,ratio,x_true,t_true_c,x_oracle\n1,U0001,"), "{}", &truth[..80]);
    // Each unit's oracle uses that unit's own front end.
    let r = sim.validation.iter().find(|r| r.unit == 2).unwrap();
    assert_eq!(r.x_oracle, sim.units[2].frontend.oracle(r.code, r.temperature));
    assert!(sim.units_json().contains("\"serial\": \"U0003\""));
}

#[test]
fn a_raw_temperature_channel_is_written_as_temp_code() {
    let fe = preset("gas-uncompensated").unwrap();
    let mut sim = simulate(&fe, &small_plan(2)).unwrap();
    for r in &mut sim.chamber {
        r.temperature = MeasuredTemperature::Code(1000 + r.code % 7);
    }
    let text = String::from_utf8(sim.cal_csv()).unwrap();
    assert!(text.starts_with("unit,code,temp_code,ratio\n"), "{}", &text[..40]);
    let conv = |c: u32| -> Result<f64, logtrim::Error> { Ok(f64::from(c) / 40.0) };
    let opts = ReadOptions { temp_converter: Some(&conv), ..ReadOptions::default() };
    let back = read_calibration(text.as_bytes(), "cal.csv", &opts).unwrap();
    assert_eq!(back.rows[0].temp_c, f64::from(1000 + sim.chamber[0].code % 7) / 40.0);
}

#[test]
fn unusable_plans_are_refused() {
    let fe = preset("gas-uncompensated").unwrap();
    let mut p = small_plan(1);
    p.chamber.setpoints = 1;
    assert!(matches!(simulate(&fe, &p), Err(SimError::Plan { what: "set-points", value: 1, .. })));
    let mut p = small_plan(1);
    p.units = 0;
    assert!(matches!(simulate(&fe, &p), Err(SimError::Plan { what: "units", .. })));
    let mut p = small_plan(1);
    p.validation_count = usize::MAX / 2;
    p.units = 4;
    let e = simulate(&fe, &p).unwrap_err();
    assert!(matches!(e, SimError::Plan { what: "rows in all", .. }), "{e}");
}
