use logtrim_checks::within;

use super::*;
use logtrim::sensor::TemperatureSensor;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

/// A front end with every non-ideality off: only n, G and kT/q remain.
fn ideal(ideality: f64, gain: f64, tempco: f64) -> FrontEnd {
    let mut fe = preset("gas-uncompensated").unwrap();
    fe.pair = PairModel { ideality, i_ref_a: 1e-6, mismatch_v_25c: 0.0, bulk_resistance_ohm: 0.0 };
    fe.amplifiers = AmplifierModel {
        input_offset_v: 0.0,
        input_offset_drift_v_per_k: 0.0,
        output_offset_v: 0.0,
        output_offset_drift_v_per_k: 0.0,
        bias_signal_a_25c: 0.0,
        bias_reference_a_25c: 0.0,
        bias_doubling_k: 10.0,
    };
    fe.output_stage = OutputStage { gain_25c: gain, r1_tempco_per_k: tempco, level_shift_v: 0.0 };
    fe.adc.gain_error = 0.0;
    fe.adc.offset_codes = 0.0;
    fe.validate().unwrap();
    fe
}

/// Output slope per decade at `t_c`, from two points one decade apart.
fn volts_per_decade(fe: &FrontEnd, t_c: f64) -> f64 {
    fe.output_voltage(LN_10, t_c) - fe.output_voltage(0.0, t_c)
}

use std::f64::consts::LN_10;

#[test]
fn ideal_slope_at_25c_is_59_16_mv_per_decade_times_n_g() {
    // ln 10 · kT/q at 25 °C = 59.16 mV/decade (NUMERICS.md; CODATA 2018 kT/q = 25.693 mV at 298.15 K).
    for (n, g) in [(1.0, 1.0), (1.004, 8.45), (1.01, 20.0)] {
        let fe = ideal(n, g, 0.0);
        let mv = volts_per_decade(&fe, 25.0) * 1e3;
        // 59.16 is given to 0.01 mV: allow half of that, scaled by n·G.
        assert!(within(mv, 59.16 * n * g, 0.005 * n * g, 0.0), "n {n} G {g}: {mv} mV/decade");
    }
}

#[test]
fn thermal_voltage_drift_is_0_335_percent_per_kelvin() {
    // kT/q drifts +1/T_K: +0.335 %/K at 25 °C (NUMERICS.md, common practice).
    let fe = ideal(1.0, 8.45, 0.0);
    let d = volts_per_decade(&fe, 25.5) / volts_per_decade(&fe, 24.5) - 1.0;
    assert!(within(d * 100.0, 0.335, 0.001, 0.0), "{} %/K", d * 100.0);
}

#[test]
fn uncompensated_slope_drift_equals_kt_over_q() {
    // With α = 0 the gain is constant and the slope is proportional to absolute temperature (kT/q).
    let fe = preset("gas-uncompensated").unwrap();
    let s25 = fe.ideal_slope_v_per_neper(25.0);
    for t in [-20.0, 0.0, 40.0, 85.0] {
        let want = thermal_voltage(t + ZERO_CELSIUS_K) / thermal_voltage(T25_K);
        let got = fe.ideal_slope_v_per_neper(t) / s25;
        assert!(within(got, want, 0.0, 1e-12), "{t} °C: {got} vs {want}");
        // The same through the full model between both bends (x = 1…2, where the bias and bulk terms
        // move the slope by < 0.1 %), by finite difference of the code.
        let c = fe.code_exact(2.0, t) - fe.code_exact(1.0, t);
        let c25 = fe.code_exact(2.0, 25.0) - fe.code_exact(1.0, 25.0);
        assert!(within(c / c25, want, 0.0, 1e-3), "{t} °C: {} vs {want}", c / c25);
    }
}

#[test]
fn compensated_slope_drift_is_much_smaller() {
    let comp = preset("photometer-compensated").unwrap();
    let mut uncomp = comp.clone();
    uncomp.output_stage.r1_tempco_per_k = 0.0;
    let (t0, t1) = (comp.operating.temp_min_c, comp.operating.temp_max_c);
    let drift = |fe: &FrontEnd| fe.ideal_slope_v_per_neper(t1) / fe.ideal_slope_v_per_neper(t0) - 1.0;
    let (dc, du) = (drift(&comp), drift(&uncomp));
    // Uncompensated: T_K ratio 343.15/273.15 − 1 = 25.6 %.
    assert!(within(du, 343.15 / 273.15 - 1.0, 1e-12, 0.0), "{du}");
    // A +3500 ppm/K resistor at G = 8.45 leaves a positive residual well under a tenth of that.
    assert!(dc > 0.0 && dc < 0.1 * du, "compensated {dc}, uncompensated {du}");
    // With the tempco that cancels the first-order drift at 25 °C, α = G/((G−1)·T_K), the slope is
    // stationary there: d ln(T_K·G)/dT = 1/T_K − α(G−1)/G = 0 (derived from G = 1 + R2/R1(T)).
    let g = comp.output_stage.gain_25c;
    let mut best = comp.clone();
    best.output_stage.r1_tempco_per_k = g / ((g - 1.0) * T25_K);
    let h = 0.01;
    let d = (best.ideal_slope_v_per_neper(25.0 + h) - best.ideal_slope_v_per_neper(25.0 - h))
        / (2.0 * h)
        / best.ideal_slope_v_per_neper(25.0);
    assert!(d.abs() < 1e-8, "{d}");
}

#[test]
fn bias_current_doubles_every_doubling_interval() {
    // FET-input bias current doubles about every 10 K (common practice); the model takes the interval as given.
    let mut fe = preset("gas-uncompensated").unwrap();
    for doubling in [8.0, 10.0, 12.5] {
        fe.amplifiers.bias_doubling_k = doubling;
        for t in [-20.0, 25.0, 60.0] {
            let r = fe.beta(t + doubling) / fe.beta(t);
            assert!(within(r, 2.0, 0.0, 1e-12), "{doubling} K at {t} °C: ×{r}");
        }
        assert!(within(fe.beta(25.0) * fe.pair.i_ref_a, fe.amplifiers.bias_signal_a_25c, 0.0, 1e-12));
    }
}

#[test]
fn bias_current_adds_to_the_signal_current() {
    // At I_sig = I_b the collector carries 2·I_sig: the output sits n·V_T·ln 2 above the ideal log.
    let mut fe = ideal(1.0, 1.0, 0.0);
    fe.amplifiers.bias_signal_a_25c = 1e-9;
    let x = (1e-9f64 / 1e-6).ln();
    let got = fe.pair_voltage(x, 25.0) - x * thermal_voltage(T25_K);
    assert!(within(got, thermal_voltage(T25_K) * 2f64.ln(), 0.0, 1e-12), "{got}");
    // And the sensitivity there is e^x/(e^x + β) = 1/2.
    assert!(within(fe.sensitivity(x, 25.0), 0.5, 0.0, 1e-12));
}

#[test]
fn bulk_resistance_adds_i_times_r_for_both_transistors() {
    let mut fe = ideal(1.0, 8.0, 0.0);
    let base = fe.clone();
    fe.pair.bulk_resistance_ohm = 5.0;
    for x in [-4.0, 0.0, 2.0, 4.6] {
        let i_sig = 1e-6 * f64::exp(x);
        let got = fe.pair_voltage(x, 25.0) - base.pair_voltage(x, 25.0);
        assert!(within(got, 5.0 * (i_sig - 1e-6), 1e-18, 1e-12), "x {x}: {got}");
    }
    // It raises the sensitivity above 1 at the high end: 1 + r·I_sig/(n·V_T).
    let s = fe.sensitivity(4.6, 25.0);
    let want = 1.0 + 5.0 * 1e-6 * f64::exp(4.6) / thermal_voltage(T25_K);
    assert!(within(s, want, 0.0, 1e-12), "{s} vs {want}");
}

#[test]
fn mismatch_is_ptat_and_offsets_drift_linearly() {
    let mut fe = ideal(1.0, 1.0, 0.0);
    fe.pair.mismatch_v_25c = 1e-3;
    for t in [-20.0, 25.0, 85.0] {
        assert!(within(fe.pair_voltage(0.0, t), 1e-3 * (t + ZERO_CELSIUS_K) / T25_K, 1e-18, 1e-12));
    }
    let mut fe = ideal(1.0, 1.0, 0.0);
    fe.amplifiers.input_offset_v = 1e-4;
    fe.amplifiers.output_offset_drift_v_per_k = 2e-6;
    assert!(within(fe.pair_voltage(0.0, 75.0), 1e-4 + 2e-6 * 50.0, 1e-18, 1e-12));
}

#[test]
fn gain_network_follows_one_plus_r2_over_r1() {
    // G = 1 + R2/R1(T), R1(T) = R1·(1 + α(T − 25)): at 25 °C it is the design gain.
    let fe = preset("photometer-compensated").unwrap();
    assert!(within(fe.gain(25.0), 8.45, 0.0, 1e-15));
    let r2_over_r1 = 7.45;
    let want = 1.0 + r2_over_r1 / (1.0 + 3500e-6 * 45.0);
    assert!(within(fe.gain(70.0), want, 0.0, 1e-12));
}

#[test]
fn adc_rounds_and_clamps_to_the_rails() {
    let fe = preset("gas-uncompensated").unwrap();
    assert_eq!(fe.quantise(-3.2), 0);
    assert_eq!(fe.quantise(f64::NAN), 0);
    assert_eq!(fe.quantise(1e9), 65535);
    assert_eq!(fe.quantise(100.49), 100);
    assert_eq!(fe.quantise(100.51), 101);
    // A 16-bit converter on 4.096 V: 62.5 µV per code.
    assert!(within(fe.lsb_v(), 62.5e-6, 0.0, 1e-15));
}

#[test]
fn noise_has_the_stated_rms() {
    let fe = preset("gas-uncompensated").unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let (x, t) = (0.3, 40.0);
    let exact = fe.code_exact(x, t);
    let n = 4000;
    let ss: f64 = (0..n).map(|_| (f64::from(fe.sample_code(x, t, &mut rng)) - exact).powi(2)).sum();
    // 0.7 codes of noise plus rounding (1/12 code²): √(0.49 + 0.0833) = 0.757 codes rms.
    let rms = (ss / f64::from(n)).sqrt();
    assert!(within(rms, (0.49f64 + 1.0 / 12.0).sqrt(), 0.0, 0.06), "{rms}");
    let TemperatureMeasurement::Digital { offset_k, noise_k_rms, .. } = fe.temperature_sensor else {
        panic!("gas-uncompensated reads a digital sensor")
    };
    let (mut s, mut ss) = (0.0, 0.0);
    for _ in 0..n {
        let MeasuredTemperature::Celsius(m) = fe.measure_temperature(t, &mut rng) else { panic!() };
        s += m - t;
        ss += (m - t - offset_k).powi(2);
    }
    assert!(within(s / f64::from(n), offset_k, 0.005, 0.0));
    // 0.05 K noise plus 0.0625 K resolution: √(0.05² + 0.0625²/12).
    let want = (noise_k_rms.powi(2) + 0.0625f64.powi(2) / 12.0).sqrt();
    assert!(within((ss / f64::from(n)).sqrt(), want, 0.0, 0.06));
}

#[test]
fn inversion_recovers_x_everywhere_including_deep_in_the_bend() {
    for p in PRESETS {
        let fe = p.frontend();
        let o = fe.operating;
        let temps = (o.temp_min_c, o.temp_max_c - o.temp_min_c, 6);
        // From 3 Np below the calibrated range (where the bias current swamps the signal) to 1 above.
        let xs = (o.ratio_min.ln() - 3.0, o.ratio_max.ln() - o.ratio_min.ln() + 4.0, 40);
        for (t, x) in logtrim_checks::grid(temps, xs) {
            let code = fe.code_exact(x, t);
            let back = fe.invert_code(code, t).unwrap();
            // Exact within the conditioning of the curve: the code's rounding error over the local slope.
            let tol = 1e-9 + 4.0 * f64::EPSILON * code.abs() / fe.code_slope(x, t);
            assert!((back - x).abs() <= tol, "{} at {t} °C, x {x}: {back}", p.name);
        }
    }
}

#[test]
fn oracle_refuses_rails_and_codes_below_the_bias_floor() {
    let fe = preset("gas-uncompensated").unwrap();
    let t = MeasuredTemperature::Celsius(85.0);
    assert_eq!(fe.oracle(0, t), None);
    assert_eq!(fe.oracle(65535, t), None);
    assert_eq!(fe.oracle(1000, MeasuredTemperature::Code(1000)), None);
    // Hot, the bias current sets a floor: with no signal at all the code cannot fall below it.
    let t_true = fe.temperature_estimate_c(t).unwrap();
    let floor = fe.code_exact(-200.0, t_true);
    assert!(floor > 1.0, "{floor}");
    assert_eq!(fe.oracle(floor.floor() as u32 - 1, t), None);
    assert!(fe.oracle(floor.ceil() as u32 + 1, t).is_some());
}

#[test]
fn oracle_error_on_noise_free_codes_is_within_half_an_lsb() {
    // With no noise the only error left is rounding: at most half a code over the local slope.
    for p in PRESETS {
        let mut fe = p.frontend();
        fe.adc.noise_codes_rms = 0.0;
        let o = fe.operating;
        for (t, x) in [
            (o.temp_min_c, o.ratio_min.ln()),
            (25.0, 0.1),
            (o.temp_max_c, o.ratio_min.ln()),
            (o.temp_max_c, 4.0),
        ] {
            let code = fe.code_noise_free(x, t);
            // A reading exactly as the sensor would report the true temperature without noise. A raw
            // channel's code is rounded as well: that costs up to half a temperature code, carried into x
            // through ∂x/∂T = −(∂code/∂T)/(∂code/∂x) of the log channel.
            let (m, t_rounding_k) = match fe.temperature_sensor {
                TemperatureMeasurement::Digital { offset_k, slope_error, .. } => {
                    (MeasuredTemperature::Celsius(25.0 + (t - 25.0) * (1.0 + slope_error) + offset_k), 0.0)
                }
                TemperatureMeasurement::Raw { .. } => {
                    let c = fe.raw_code_exact(t).unwrap();
                    let h = 1e-3;
                    let per_k =
                        (fe.raw_code_exact(t + h).unwrap() - fe.raw_code_exact(t - h).unwrap()) / (2.0 * h);
                    (MeasuredTemperature::Code(c.round() as u32), 0.5 / per_k.abs())
                }
            };
            let h = 1e-4;
            let dcdt = (fe.code_exact(x, t + h) - fe.code_exact(x, t - h)) / (2.0 * h);
            let dxdt = dcdt / fe.code_slope(x, t);
            let tol = 0.5 / fe.code_slope(x, t) * 1.001 + dxdt.abs() * t_rounding_k * 1.001 + 1e-9;
            let got = fe.oracle(code, m).unwrap();
            assert!((got - x).abs() <= tol, "{} {t} {x}: {got}", p.name);
        }
    }
}

#[test]
fn presets_meet_their_stated_character() {
    // (b): at the hottest point the sensitivity at the lowest calibrated ratio is well below 1.
    let b = preset("gas-uncompensated").unwrap();
    let s = b.sensitivity(b.operating.ratio_min.ln(), b.operating.temp_max_c);
    assert!((0.2..=0.5).contains(&s), "{s}");
    assert_eq!(b.output_stage.r1_tempco_per_k, 0.0);
    // (a): partly compensated over 0…70 °C.
    let a = preset("photometer-compensated").unwrap();
    assert_eq!((a.operating.temp_min_c, a.operating.temp_max_c), (0.0, 70.0));
    assert!(a.output_stage.r1_tempco_per_k > 3000e-6);
    for fe in [&a, &b] {
        // About 0.5 V/decade at 25 °C, and no corner of the range near a rail.
        let v = fe.ideal_slope_v_per_neper(25.0) * LN_10;
        assert!(within(v, 0.5, 0.0, 0.02), "{} {v}", fe.name);
        let o = fe.operating;
        for t in [o.temp_min_c, o.temp_max_c] {
            for x in [o.ratio_min.ln(), o.ratio_max.ln()] {
                let c = fe.code_exact(x, t);
                assert!(c > 2000.0 && c < 63000.0, "{} {t} {x}: {c}", fe.name);
            }
        }
    }
}

#[test]
fn json_round_trip_and_precise_refusals() {
    for p in PRESETS {
        let fe = p.frontend();
        let back = FrontEnd::from_json(&fe.to_json(), "mem").unwrap();
        assert_eq!(back, fe);
    }
    let text = preset("gas-uncompensated").unwrap().to_json();
    // A typo is an error naming the field, not a silently ignored setting.
    let typo = text.replace("\"ideality\": 1.006", "\"idealty\": 1.006");
    let e = FrontEnd::from_json(&typo, "fe.json").unwrap_err().to_string();
    assert!(e.contains("fe.json") && e.contains("idealty"), "{e}");
    // A value outside the model names the field, the value and what is expected.
    let neg = text.replace("\"bias_signal_a_25c\": 5e-11", "\"bias_signal_a_25c\": -5e-11");
    assert_ne!(neg, text);
    let e = FrontEnd::from_json(&neg, "fe.json").unwrap_err();
    assert!(matches!(e, FrontEndError::Invalid { field: "amplifiers.bias_signal_a_25c", .. }), "{e}");
    let e = e.to_string();
    assert!(e.contains("-5e-11") && e.contains("≥ 0"), "{e}");
    // Bits default to 16 when left out.
    let no_bits = text.replace("\"bits\": 16,", "");
    assert_eq!(FrontEnd::from_json(&no_bits, "mem").unwrap().adc.bits, 16);
}

#[test]
fn drawn_units_differ_reproducibly_and_stay_valid() {
    let fe = preset("photometer-compensated").unwrap();
    let draw = |seed| fe.draw_unit("U7", &mut ChaCha8Rng::seed_from_u64(seed)).unwrap();
    let (a, b, a2) = (draw(1), draw(2), draw(1));
    assert_eq!(a, a2);
    assert_ne!(a.pair.mismatch_v_25c, b.pair.mismatch_v_25c);
    assert_eq!(a.name, "photometer-compensated/U7");
    assert!(a.spread.is_none());
    let mut plain = fe.clone();
    plain.spread = None;
    let u = plain.draw_unit("U1", &mut ChaCha8Rng::seed_from_u64(1)).unwrap();
    assert_eq!(u.pair, plain.pair);
}

fn raw_parts(fe: &FrontEnd) -> (TemperatureSensor, f64, f64, f64, f64) {
    let TemperatureMeasurement::Raw { sensor, element_error, series_error, offset_k, noise_codes_rms } =
        fe.temperature_sensor
    else {
        panic!("{} reads a digital sensor", fe.name)
    };
    (sensor, element_error, series_error, offset_k, noise_codes_rms)
}

#[test]
fn raw_channel_code_follows_the_beta_curve_and_the_divider_equation() {
    let fe = preset("photometer-ntc").unwrap();
    let (sensor, e_el, e_s, offset_k, _) = raw_parts(&fe);
    assert!(matches!(sensor.element, logtrim::SensorElement::NtcBeta(_)));
    for t in [-40.0, 0.0, 25.0, 47.5, 70.0, 120.0] {
        // Written out here: the Beta model R = R25·exp(β(1/T − 1/T25)) (its definition, common practice) with
        // the element's error, against a series resistor with its error; a low-side sensor reads
        // 2^bits·R/(R + R_s) (Ohm's law on the divider).
        let t_k = t + offset_k + 273.15;
        let r = 10_000.0 * (3900.0 * (1.0 / t_k - 1.0 / 298.15)).exp() * (1.0 + e_el);
        let rs = 10_000.0 * (1.0 + e_s);
        let want = 4096.0 * r / (r + rs);
        let got = fe.raw_code_exact(t).unwrap();
        // The series resistor is stored in f32: 6e-8 relative.
        assert!(within(got, want, 1e-9, 1e-7), "{t} °C: {got} vs {want}");
    }
    // The code rises as the NTC cools (low side), and a 10 kΩ NTC on 10 kΩ reads near half scale at 25 °C.
    assert!(fe.raw_code_exact(0.0).unwrap() > fe.raw_code_exact(70.0).unwrap());
    assert!(within(fe.raw_code_exact(25.0).unwrap(), 2048.0, 20.0, 0.0));
}

#[test]
fn raw_channel_noise_has_the_stated_rms_and_stays_on_the_converter() {
    let fe = preset("photometer-ntc").unwrap();
    let (_, _, _, _, noise) = raw_parts(&fe);
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let exact = fe.raw_code_exact(40.0).unwrap();
    let n = 4000;
    let mut ss = 0.0;
    for _ in 0..n {
        let MeasuredTemperature::Code(c) = fe.measure_temperature(40.0, &mut rng) else { panic!() };
        assert!(c <= 4095);
        ss += (f64::from(c) - exact).powi(2);
    }
    // Noise plus rounding (1/12 code²).
    let rms = (ss / f64::from(n)).sqrt();
    assert!(within(rms, (noise * noise + 1.0 / 12.0).sqrt(), 0.0, 0.06), "{rms}");
}

#[test]
fn raw_oracle_undoes_the_tolerances_that_the_nominal_reading_keeps() {
    let fe = preset("photometer-ntc").unwrap();
    let (sensor, ..) = raw_parts(&fe);
    for t in [0.0, 25.0, 70.0] {
        let exact = fe.raw_code_exact(t).unwrap();
        let h = 1e-3;
        let per_k = (fe.raw_code_exact(t + h).unwrap() - fe.raw_code_exact(t - h).unwrap()) / (2.0 * h);
        let m = MeasuredTemperature::Code(exact.round() as u32);
        // Half a code of rounding, in kelvin.
        let half_code_k = 0.5 / per_k.abs();
        let est = fe.temperature_estimate_c(m).unwrap();
        assert!((est - t).abs() <= 1.01 * half_code_k + 1e-6, "{t} °C: estimate {est}");
        // The firmware's reading with the nominal description keeps the tolerances: +0.6 % on the NTC reads
        // colder by about ln(1.006)·T²/β (from the Beta curve), the 0.1 K gradient warmer.
        let nominal = fe.firmware_celsius(m).unwrap();
        let t_k = t + 273.15;
        let shift = -(1.006f64.ln() - (1.0 - 0.0004f64).ln()) * t_k * t_k / 3900.0 + 0.1;
        assert!(
            (nominal - t - shift).abs() <= 1.01 * half_code_k + 0.01,
            "{t} °C: nominal {nominal}, shift {shift}"
        );
        assert_eq!(nominal, f64::from(sensor.celsius(exact.round() as u32).unwrap()));
    }
    // Rails and readings of the other kind give nothing.
    assert_eq!(fe.temperature_estimate_c(MeasuredTemperature::Code(0)), None);
    assert_eq!(fe.temperature_estimate_c(MeasuredTemperature::Code(4095)), None);
    assert_eq!(fe.temperature_estimate_c(MeasuredTemperature::Celsius(25.0)), None);
    assert_eq!(fe.oracle(30_000, MeasuredTemperature::Celsius(25.0)), None);
    assert!(fe.firmware_celsius(MeasuredTemperature::Celsius(25.0)).is_err());
    let digital = preset("photometer-compensated").unwrap();
    assert_eq!(digital.temperature_estimate_c(MeasuredTemperature::Code(2000)), None);
    assert_eq!(digital.firmware_sensor(), None);
    assert_eq!(fe.firmware_sensor(), Some(sensor));
}

#[test]
fn raw_channel_descriptions_are_checked() {
    let fe = preset("photometer-ntc").unwrap();
    let with = |f: &dyn Fn(&mut TemperatureMeasurement)| {
        let mut b = fe.clone();
        f(&mut b.temperature_sensor);
        b.validate()
    };
    // A valid range that does not cover the operating range (0…70 °C) names the field.
    let e = with(&|c| {
        if let TemperatureMeasurement::Raw { sensor, .. } = c {
            sensor.max_c = 60.0
        }
    })
    .unwrap_err();
    assert!(matches!(e, FrontEndError::Invalid { field: "temperature_sensor.sensor.max_c", .. }), "{e}");
    // A description firmware-lib refuses carries its verdict.
    let e = with(&|c| {
        if let TemperatureMeasurement::Raw { sensor, .. } = c {
            sensor.divider.series_ohm = -1.0
        }
    })
    .unwrap_err();
    assert!(matches!(e, FrontEndError::Sensor { .. }), "{e}");
    assert!(e.to_string().contains("temperature_sensor.sensor"), "{e}");
    let e = with(&|c| {
        if let TemperatureMeasurement::Raw { element_error, .. } = c {
            *element_error = f64::NAN
        }
    })
    .unwrap_err();
    assert!(matches!(e, FrontEndError::Invalid { field: "temperature_sensor.element_error", .. }), "{e}");
    // An RTD whose curve stops at −200 °C cannot follow a unit simulated down to −160 − 50 °C.
    let e = with(&|c| {
        if let TemperatureMeasurement::Raw { sensor, .. } = c {
            sensor.element = logtrim::SensorElement::Rtd(logtrim::Rtd::PT1000);
            sensor.divider.series_ohm = 1000.0;
        }
    });
    assert_eq!(e.ok(), Some(()));
    let mut cold = fe.clone();
    cold.temperature_sensor = {
        let TemperatureMeasurement::Raw { mut sensor, .. } = fe.temperature_sensor else { panic!() };
        sensor.element = logtrim::SensorElement::Rtd(logtrim::Rtd::PT1000);
        sensor.min_c = -200.0;
        TemperatureMeasurement::Raw {
            sensor,
            element_error: 0.0,
            series_error: 0.0,
            offset_k: 0.0,
            noise_codes_rms: 0.0,
        }
    };
    cold.operating.temp_min_c = -160.0;
    let e = cold.validate().unwrap_err();
    assert!(matches!(e, FrontEndError::Invalid { field: "temperature_sensor.sensor.element", .. }), "{e}");
}

#[test]
fn drawn_raw_units_spread_their_element_but_not_their_description() {
    let fe = preset("photometer-ntc").unwrap();
    let a = fe.draw_unit("U1", &mut ChaCha8Rng::seed_from_u64(1)).unwrap();
    let b = fe.draw_unit("U2", &mut ChaCha8Rng::seed_from_u64(2)).unwrap();
    let (sa, ea, ..) = raw_parts(&a);
    let (sb, eb, ..) = raw_parts(&b);
    assert_eq!(sa, sb);
    assert_ne!(ea, eb);
    // The pair draws exactly as the digital photometer's does (the element is drawn last).
    let d =
        preset("photometer-compensated").unwrap().draw_unit("U1", &mut ChaCha8Rng::seed_from_u64(1)).unwrap();
    assert_eq!(a.pair, d.pair);
    assert_eq!(a.adc, d.adc);
}
