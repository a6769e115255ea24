use super::*;
use logtrim_checks::within;

use crate::frontend::{preset, FrontEnd};

/// An ideal front end in the reference model: ideality 1, no offsets, no bias current, no bulk resistance,
/// no compensation, an exact converter. Its slope is n·(kT/q)·G: the PTAT law.
fn ideal_frontend(zero_v: f64) -> FrontEnd {
    let mut fe = preset("gas-uncompensated").expect("preset");
    fe.pair.ideality = 1.0;
    fe.pair.mismatch_v_25c = 0.0;
    fe.pair.bulk_resistance_ohm = 0.0;
    fe.amplifiers.input_offset_v = 0.0;
    fe.amplifiers.input_offset_drift_v_per_k = 0.0;
    fe.amplifiers.output_offset_v = 0.0;
    fe.amplifiers.output_offset_drift_v_per_k = 0.0;
    fe.amplifiers.bias_signal_a_25c = 0.0;
    fe.amplifiers.bias_reference_a_25c = 0.0;
    fe.output_stage.r1_tempco_per_k = 0.0;
    fe.output_stage.level_shift_v = zero_v;
    fe.adc.gain_error = 0.0;
    fe.adc.offset_codes = 0.0;
    fe.validate().expect("a valid front end");
    fe
}

/// The budget spec of the same design: its slope at 25 °C and the PTAT law (no slope drift given).
fn spec_of(fe: &FrontEnd) -> BudgetSpec {
    let mut s = BudgetSpec::default();
    s.adc.bits = fe.adc.bits;
    s.adc.vref_v = fe.adc.vref_v;
    s.front_end.slope_v_per_decade = LN10 * fe.ideal_slope_v_per_neper(25.0);
    s.front_end.slope_at_c = 25.0;
    s.front_end.slope_drift_ppm_per_k = None;
    s.front_end.zero_v = fe.output_stage.level_shift_v;
    s.temperature.min_c = fe.operating.temp_min_c;
    s.temperature.max_c = fe.operating.temp_max_c;
    s
}

const POINTS: [(f64, f64); 5] = [(-6.9, -20.0), (-2.0, 0.0), (0.5, 25.0), (3.0, 60.0), (4.6, 85.0)];

#[test]
fn the_law_is_the_reference_models_ideal_front_end() {
    let fe = ideal_frontend(2.0);
    let s = spec_of(&fe);
    for (x, t) in POINTS {
        assert!(within(s.code(x, t, 0.0), fe.code_exact(x, t), 1e-15, 1e-12), "x={x} t={t}");
    }
}

#[test]
fn dx_dcode_matches_finite_differences_of_the_reference_model() {
    let fe = ideal_frontend(2.0);
    let s = spec_of(&fe);
    for (x, t) in POINTS {
        let c = fe.code_exact(x, t);
        let fd = (fe.invert_code(c + 1.0, t).unwrap() - fe.invert_code(c - 1.0, t).unwrap()) / 2.0;
        assert!(within(s.dx_dcode(t), fd, 1e-15, 1e-8), "x={x} t={t}: {} vs {fd}", s.dx_dcode(t));
    }
}

#[test]
fn dx_dt_matches_finite_differences_of_the_reference_model() {
    let fe = ideal_frontend(2.0);
    let s = spec_of(&fe);
    let h = 0.01;
    for (x, t) in POINTS {
        let c = fe.code_exact(x, t);
        let fd = (fe.invert_code(c, t + h).unwrap() - fe.invert_code(c, t - h).unwrap()) / (2.0 * h);
        assert!(within(s.dx_dt(x, t), fd, 1e-15, 1e-6), "x={x} t={t}: {} vs {fd}", s.dx_dt(x, t));
        // Common practice: an uncompensated slope drifts +1/T, so ∂x/∂T = −x/T_K.
        assert!(within(fd, -x / (t + 273.15), 1e-15, 1e-6));
    }
}

#[test]
fn reference_error_matches_the_reference_model_with_a_gain_error() {
    let fe = ideal_frontend(2.0);
    let s = spec_of(&fe);
    let delta = 2e-3;
    // A reference high by δ: every code is 1/(1 + δ) of nominal, the converter's gain error in the model; the
    // level shift is a voltage of its own, which stays.
    let mut off = fe.clone();
    off.adc.gain_error = 1.0 / (1.0 + delta) - 1.0;
    for (x, t) in POINTS {
        let read = fe.invert_code(off.code_exact(x, t), t).unwrap();
        let want = read - x;
        let got = s.reference_error(x, t, delta);
        assert!(within(got, want, 1e-15, 1e-7), "x={x} t={t}: {got} vs {want}");
    }
}

/// A design with round figures, worked by hand:
/// LSB = 4.096 V / 2^16 = 62.5 µV; S_ref = 0.25 V/Np at 25 °C with +2000 ppm/K, so S = 0.25 V/Np at 25 °C
/// and 0.275 at 75 °C; ∂x/∂code ≤ 62.5e-6/0.25 = 2.5e-4 Np/LSB; x from −4 to 2, |∂x/∂T| ≤ 4 × 0.002 = 0.008
/// Np/K (at 25 °C).
fn round_design() -> BudgetSpec {
    BudgetSpec {
        note: "round figures, worked by hand".into(),
        adc: AdcSpec { bits: 16, vref_v: 4.096, noise_lsb_rms: 0.3, oversampling: 9 },
        reference: ReferenceSpec { tolerance: 0.001, drift_ppm_per_k: 20.0 },
        front_end: FrontEndSpec {
            slope_v_per_decade: 0.25 * LN10,
            slope_at_c: 25.0,
            slope_drift_ppm_per_k: Some(2000.0),
            zero_v: 1.0,
            ratio_min: (-4.0f64).exp(),
            ratio_max: 2.0f64.exp(),
        },
        temperature: TemperatureSpec {
            min_c: 25.0,
            max_c: 75.0,
            calibration_c: None,
            sensor_accuracy_k: 0.5,
            sensor_noise_k_rms: 0.1,
            readings_averaged: 4,
        },
        arithmetic: ArithmeticSpec { error_lsb: 0.2 },
    }
}

#[test]
fn rss_and_worst_case_match_hand_computed_values() {
    let b = round_design().compute().unwrap();
    let np: Vec<f64> = b.contributions.iter().map(|c| c.size.np).collect();
    // By hand: quantisation 2.5e-4/√12 (noise 0.3 LSB does not dither: not averaged); noise 0.3/√9 LSB;
    // arithmetic 0.2 LSB; sensor 0.5 K × 0.008; sensor noise 0.1/√4 K × 0.008; reference drift
    // 20 ppm/K × 25 K = 5e-4 at V/S = 1/0.25 + 2 = 6 Np: 6 × 5e-4/(1 + 5e-4).
    let want = [7.216_878_364_870_324e-5, 2.5e-5, 5e-5, 4e-3, 4e-4, 2.998_500_749_625_187_7e-3];
    assert_eq!(np.len(), want.len());
    for (k, (g, w)) in np.iter().zip(want).enumerate() {
        assert!(within(*g, w, 1e-15, 1e-9), "contribution {k} ({}): {g} vs {w}", b.contributions[k].name);
    }
    // √(Σ squares) and the linear sum, computed by hand from the figures above.
    assert!(within(b.rss.np, 5.015_908_699_212_551e-3, 1e-15, 1e-9), "{}", b.rss.np);
    assert!(within(b.worst_case.np, 7.545_669_533_273_891e-3, 1e-15, 1e-9), "{}", b.worst_case.np);
    // Units: 1 Np = 20/ln 10 dB for amplitude ratios, half that for power (ISO 80000-3).
    assert!(within(b.rss.db_20log10, b.rss.np * 8.685_889_638, 1e-15, 1e-9));
    assert!(within(b.rss.db_10log10, b.rss.np * 4.342_944_819, 1e-15, 1e-9));
    assert!(within(b.rss.pct_of_ratio, 100.0 * (b.rss.np.exp() - 1.0), 1e-15, 1e-12));
    // The tolerance is removed by calibration, listed at its uncorrected size: 6 × 1e-3/(1 + 1e-3).
    assert!(within(b.removed_by_calibration[0].size.np, 5.994_005_994_005_995e-3, 1e-15, 1e-9));
}

#[test]
fn oversampling_averages_quantisation_only_when_noise_dithers() {
    let mut s = round_design();
    s.adc.noise_lsb_rms = 0.6;
    let b = s.compute().unwrap();
    // Quantisation LSB/√12 over √9 (dithered), ADC noise 0.6/√9 LSB.
    assert!(within(b.contributions[0].lsb.unwrap(), 1.0 / 12f64.sqrt() / 3.0, 1e-15, 1e-12));
    assert!(within(b.contributions[1].lsb.unwrap(), 0.2, 1e-15, 1e-12));
}

#[test]
fn bad_figures_are_named() {
    let mut s = round_design();
    s.adc.bits = 0;
    let e = s.compute().unwrap_err().to_string();
    assert_eq!(e, "adc.bits = 0: expected 1..=24 bits");
    let mut s = round_design();
    s.front_end.slope_drift_ppm_per_k = Some(-30_000.0);
    assert!(s.compute().unwrap_err().to_string().starts_with("front_end.slope_drift_ppm_per_k = -30000"));
}

/// The `photometer-ntc` design, its raw channel and the channel's noise in codes.
fn ntc_design() -> (FrontEnd, logtrim::sensor::TemperatureSensor, f64) {
    let fe = preset("photometer-ntc").expect("preset");
    let crate::frontend::TemperatureMeasurement::Raw { sensor, noise_codes_rms, .. } = fe.temperature_sensor
    else {
        panic!("a raw channel")
    };
    (fe, sensor, noise_codes_rms)
}

#[test]
fn a_figures_file_of_an_earlier_version_is_named_as_such() {
    let d = tempfile::tempdir().unwrap();
    let old = d.path().join("figures.json");
    std::fs::write(&old, "{\"adc\": {\"bits\": 12}, \"reference\": {\"ratiometric_level_shift\": true}}")
        .unwrap();
    let e = read_design(&old).unwrap_err().to_string();
    assert!(e.contains("figures.json: the key `reference` is of a budget figures file"), "{e}");
    assert!(e.contains("schemas/frontend.schema.json"), "{e}");
    // A description is read as `FrontEnd::load` reads it, its errors located.
    let fe = d.path().join("fe.json");
    std::fs::write(&fe, preset("photometer-ntc").unwrap().to_json()).unwrap();
    assert_eq!(read_design(&fe).unwrap(), preset("photometer-ntc").unwrap());
    std::fs::write(&fe, "{\"name\": \"x\", \"adcc\": 1}").unwrap();
    let e = read_design(&fe).unwrap_err().to_string();
    assert!(e.contains("fe.json: line 1, column") && e.contains("adcc"), "{e}");
}

#[test]
fn a_sensor_file_gives_the_same_figures_as_the_designs_own_raw_channel() {
    // The raw channel of the design, given as a sensor file to a design that reads its temperature digitally,
    // gives the same temperature noise as the design that has it.
    let (ntc, sensor, noise_codes_rms) = ntc_design();
    let own = BudgetSpec::from_design(&ntc).unwrap();
    let given = BudgetSpec::from_design(&preset("photometer-compensated").unwrap())
        .unwrap()
        .with_sensor(&sensor, noise_codes_rms)
        .unwrap();
    assert!(within(given.temperature.sensor_noise_k_rms, own.temperature.sensor_noise_k_rms, 0.0, 1e-12));
    // A channel that cannot read part of the range is refused with the temperature it cannot read.
    let mut narrow = BudgetSpec::from_design(&ntc).unwrap();
    narrow.temperature.max_c = 400.0;
    let e = narrow.with_sensor(&sensor, 0.0).unwrap_err().to_string();
    assert!(e.starts_with("the temperature channel at "), "{e}");
}

#[test]
fn a_design_description_gives_the_budget_its_figures() {
    // The ideal front end's figures are those of its law, as `spec_of` writes them out by hand.
    let fe = ideal_frontend(2.0);
    let s = BudgetSpec::from_design(&fe).unwrap();
    let want = spec_of(&fe);
    assert_eq!((s.adc.bits, s.adc.vref_v), (want.adc.bits, want.adc.vref_v));
    assert_eq!(
        s.front_end,
        FrontEndSpec {
            ratio_min: fe.operating.ratio_min,
            ratio_max: fe.operating.ratio_max,
            ..want.front_end
        }
    );
    assert_eq!((s.temperature.min_c, s.temperature.max_c), (want.temperature.min_c, want.temperature.max_c));
    assert_eq!((s.adc.noise_lsb_rms, s.reference.tolerance), (fe.adc.noise_codes_rms, 0.0));
    // So its law is the reference model's, as for `spec_of`.
    for (x, t) in POINTS {
        assert!(within(s.code(x, t, 0.0), fe.code_exact(x, t), 1e-15, 1e-12), "x={x} t={t}");
    }
}

#[test]
fn a_compensated_designs_slope_drift_is_the_models_at_25_c() {
    let fe = preset("photometer-compensated").expect("preset");
    let s = BudgetSpec::from_design(&fe).unwrap();
    // d ln S/dT at 25 °C by a central difference of the reference model's ideal slope n·(kT/q)·G(T).
    let h = 1e-3;
    let slope = |t: f64| fe.ideal_slope_v_per_neper(t);
    let want = (slope(25.0 + h) - slope(25.0 - h)) / (2.0 * h) / slope(25.0) * 1e6;
    let got = s.front_end.slope_drift_ppm_per_k.expect("a compensated design has its own drift");
    assert!(within(got, want, 1e-6, 1e-8), "{got} vs {want} ppm/K");
    // A compensating resistor near +3400 ppm/K leaves a few hundred ppm/K (common practice).
    assert!(got > 0.0 && got < 1000.0, "{got}");
    // The slope and the level shift at 25 °C are the model's; the converter's gain error ε is a reference off
    // by 1/(1 + ε) − 1.
    assert!(within(s.front_end.slope_v_per_decade, LN10 * slope(25.0), 0.0, 1e-15));
    assert!(within(s.front_end.zero_v, fe.output_voltage(0.0, 25.0), 0.0, 1e-15));
    assert!(within(s.reference.tolerance, (1.0 / (1.0 + fe.adc.gain_error) - 1.0).abs(), 0.0, 1e-12));
    assert!(s.compute().is_ok());
}

#[test]
fn a_designs_temperature_noise_comes_from_its_sensor() {
    use crate::frontend::TemperatureMeasurement;
    // A digital sensor: its noise and its resolution's quantisation (r/√12, common practice) add in quadrature.
    let fe = preset("photometer-compensated").expect("preset");
    let TemperatureMeasurement::Digital { noise_k_rms, resolution_k, .. } = fe.temperature_sensor else {
        panic!("a digital sensor")
    };
    let s = BudgetSpec::from_design(&fe).unwrap();
    let want = (noise_k_rms.powi(2) + resolution_k.powi(2) / 12.0).sqrt();
    assert!(within(s.temperature.sensor_noise_k_rms, want, 0.0, 1e-12));
    // A raw channel: noise and quantisation in codes at its coarsest resolution over the operating range,
    // found here from the firmware's own f64 conversion of neighbouring codes.
    let (fe, sensor, noise_codes_rms) = ntc_design();
    let code = |t: f64| sensor.code_f64(t).unwrap().round() as u32;
    let (a, b) = (code(fe.operating.temp_min_c), code(fe.operating.temp_max_c));
    let coarsest = (a.min(b)..a.max(b))
        .map(|c| (sensor.celsius_f64(c + 1).unwrap() - sensor.celsius_f64(c).unwrap()).abs())
        .fold(0.0, f64::max);
    let s = BudgetSpec::from_design(&fe).unwrap();
    let want = (noise_codes_rms.powi(2) + 1.0 / 12.0).sqrt() * coarsest;
    assert!(
        within(s.temperature.sensor_noise_k_rms, want, 0.0, 0.02),
        "{} vs {want}",
        s.temperature.sensor_noise_k_rms
    );
    // A design that does not validate is refused, named.
    let mut bad = fe.clone();
    bad.adc.vref_v = -1.0;
    let e = BudgetSpec::from_design(&bad).unwrap_err().to_string();
    assert!(e.contains("adc.vref_v"), "{e}");
}
