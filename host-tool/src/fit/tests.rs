use super::*;
use logtrim::calibration::{BiasTerm, Series};

/// The check grid between and beyond the set-points: −18…82 °C in 5 K steps, x from −5 to 4 Np in 0.45 Np steps.
fn sweep() -> impl Iterator<Item = (f64, f64)> {
    logtrim_checks::grid((-18.0, 100.0, 20), (-5.0, 9.0, 20))
}

/// A synthetic unit in firmware-lib's own model family, sampled with noise.
fn synthetic(seed: u64, with_bias: bool) -> (Calibration, FitData) {
    synthetic_inl(seed, with_bias, 0.0)
}

/// As [`synthetic`], with an S-shaped ADC integral non-linearity of `inl` LSB amplitude (outside the
/// physical model).
fn synthetic_inl(seed: u64, with_bias: bool, inl: f64) -> (Calibration, FitData) {
    let mut c = Calibration::nominal(16, 32768.0, 3600.0, 32.5);
    c.model.t_center_c = 32.5;
    c.model.t_half_span_k = 52.5;
    c.model.pole = -0.1;
    c.model.offset = Series::from_slice(&[150.0, 40.0, -6.0]).unwrap();
    c.model.slope = Series::from_slice(&[3500.0, 25.0]).unwrap();
    c.model.bulk = Series::from_slice(&[12.0]).unwrap();
    if with_bias {
        c.model.bias = BiasTerm { enabled: true, ln_beta0: -8.5, ln_beta1: 3.6, reference: -3.5 };
    }
    let mut state = seed;
    let mut uniform = move || {
        state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        ((state >> 11) as f64) / ((1u64 << 53) as f64)
    };
    let mut d = FitData::default();
    for &t in &[-20.0, 0.0, 20.0, 40.0, 60.0, 85.0] {
        for k in 0..41 {
            let x = -6.9 + 11.5 * f64::from(k) / 40.0;
            for _ in 0..4 {
                let tt = t + 0.2 * (uniform() - 0.5);
                let noise = 0.7 * (uniform() + uniform() + uniform() - 1.5) * 2.0;
                let ideal = c.forward_code_f64(x, tt);
                let u = (ideal - 32768.0) / 32768.0;
                let code = (ideal + inl * (std::f64::consts::PI * u).sin() + noise).round();
                assert!((16.0..65519.0).contains(&code), "test unit leaves the ADC range: {code}");
                d.code.push(code as u32);
                d.temp_c.push(tt);
                d.ratio.push(x.exp());
            }
        }
    }
    (c, d)
}

#[test]
fn recovers_a_unit_of_its_own_family() {
    let (truth, data) = synthetic(7, true);
    let out = fit(&data, &FitOptions::default()).unwrap();
    // Between set-points, the fitted calibration must agree with the truth to well under the noise
    // (0.7 LSB at ~3500 codes/neper ≈ 2e-4 Np).
    let mut worst: f64 = 0.0;
    for (t, x) in sweep() {
        let code = truth.forward_code_f64(x, t);
        if let (Ok(a), Ok(b)) = (out.calibration.correct_f64(code, t), truth.correct_f64(code, t)) {
            worst = worst.max((a.x - b.x).abs());
        }
    }
    if std::env::var_os("LOGTRIM_DEBUG_FIT").is_some() {
        eprintln!("worst {worst:.3e}\n{}", render_report(&out));
    }
    assert!(worst < 2e-4, "worst model error {worst:.3e}\n{}", render_report(&out));
    assert!(out.chosen.bias, "{}", render_report(&out));
}

#[test]
fn refuses_data_that_cannot_determine_the_model() {
    let (_, data) = synthetic(1, false);
    let one_t = FitData {
        code: data.code[..100].to_vec(),
        temp_c: data.temp_c[..100].to_vec(),
        ratio: data.ratio[..100].to_vec(),
        weight: vec![],
        ..FitData::default()
    };
    assert!(matches!(fit(&one_t, &FitOptions::default()), Err(FitError::OneTemperature { .. })));
    assert!(matches!(fit(&FitData::default(), &FitOptions::default()), Err(FitError::Empty)));
    let mut narrow = data.clone();
    for r in narrow.ratio.iter_mut() {
        *r = 1.0 + (*r).ln().abs() * 1e-3;
    }
    assert!(matches!(fit(&narrow, &FitOptions::default()), Err(FitError::NarrowSpan { .. })));
    let mut bad = data.clone();
    bad.ratio[5] = -1.0;
    assert!(matches!(fit(&bad, &FitOptions::default()), Err(FitError::BadValue { row: 5, .. })));
    let spec = Spec {
        offset_terms: 6,
        slope_terms: 1,
        bulk_terms: 0,
        pole: true,
        bias: false,
        residual_x: 0,
        residual_t: 0,
    };
    let opt = FitOptions { spec: Some(spec), max_series: 6, ..FitOptions::default() };
    let mut few = data.clone();
    let keep: Vec<usize> = (0..few.code.len()).filter(|&i| few.temp_c[i] < 50.0).collect();
    few.code = keep.iter().map(|&i| data.code[i]).collect();
    few.temp_c = keep.iter().map(|&i| data.temp_c[i]).collect();
    few.ratio = keep.iter().map(|&i| data.ratio[i]).collect();
    assert!(matches!(fit(&few, &opt), Err(FitError::Underdetermined { .. })));
}

#[test]
fn effects_outside_the_physics_are_absorbed() {
    let (truth, data) = synthetic_inl(11, true, 4.0);
    let out = fit(&data, &FitOptions::default()).unwrap();
    let bow = |code: f64| {
        let u = (code - 32768.0) / 32768.0;
        4.0 * (std::f64::consts::PI * u).sin()
    };
    let mut worst: f64 = 0.0;
    for (t, x) in sweep() {
        let ideal = truth.forward_code_f64(x, t);
        if let Ok(a) = out.calibration.correct_f64(ideal + bow(ideal), t) {
            worst = worst.max((a.x - x).abs());
        }
    }
    if std::env::var_os("LOGTRIM_DEBUG_FIT").is_some() {
        eprintln!("worst {worst:.3e}\n{}", render_report(&out));
    }
    // A ±4-LSB S-shaped non-linearity is ~1e-3 Np uncorrected; the fit (the generic residual where the
    // physical terms cannot follow) must bring it near the noise (~2e-4 Np).
    assert!(worst < 5e-4, "worst {worst:.3e}\n{}", render_report(&out));
}
