use super::*;

fn hard_unit() -> Calibration {
    // An uncompensated-like unit with a strong low-end bend and a visible high-end bend.
    let mut c = Calibration::nominal(16, 32768.0, 2400.0, 25.0);
    c.adc.rail_margin = 16;
    c.temperature = TemperatureRange { min_c: -20.0, max_c: 85.0, extrapolation_k: 5.0 };
    c.x_range = XRange { min: -9.0, max: 4.0, min_sensitivity: 0.05 };
    c.model.t_center_c = 32.5;
    c.model.t_half_span_k = 52.5;
    c.model.pole = -0.12;
    c.model.offset = Series::from_slice(&[120.0, 35.0, -4.0]).unwrap_or(Series::ZERO);
    c.model.slope = Series::from_slice(&[1900.0, 40.0, 3.0]).unwrap_or(Series::ZERO);
    c.model.bulk = Series::from_slice(&[6.0, 0.3]).unwrap_or(Series::ZERO);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -10.5, ln_beta1: 3.6, reference: -3.0 };
    c
}

#[test]
fn hard_unit_is_valid() {
    assert_eq!(hard_unit().validate(), Ok(()));
}

#[test]
fn nominal_equation_inverts_exactly() {
    let c = Calibration::nominal(16, 32768.0, 2000.0, 25.0);
    // x = (code − L)/S at T_ref.
    let r = c.correct(32768 + 2000, 25.0).unwrap();
    assert!((r.x - 1.0).abs() < 1e-6, "{}", r.x);
    // At 35 °C the slope is (308.15/298.15) times larger (kT/q is PTAT).
    let r = c.correct(32768 + 2000, 35.0).unwrap();
    assert!((f64::from(r.x) - 298.15 / 308.15).abs() < 1e-6, "{}", r.x);
}

#[test]
fn forward_and_inverse_agree_in_f64_and_f32() {
    let c = hard_unit();
    let mut worst64: f64 = 0.0;
    let mut worst32: f64 = 0.0;
    for ti in 0..=21 {
        let t = -20.0 + 5.0 * f64::from(ti);
        for xi in 0..=60 {
            let x = -6.0 + 9.9 * f64::from(xi) / 60.0;
            let code = c.forward_code_f64(x, t);
            match c.correct_f64(code, t) {
                Ok(r) => worst64 = worst64.max((r.x - x).abs()),
                Err(Error::BelowRange) => continue,
                Err(e) => panic!("{e} at x={x} t={t}"),
            }
            // f32 path on the rounded code: compare with f64 on the same rounded code.
            let rc = code.round();
            let r32 = c.correct(rc as u32, t as f32).unwrap();
            let r64 = c.correct_f64(rc, t).unwrap();
            let lsb = (r32.x as f64 - r64.x).abs() / r64.dx_dcode;
            worst32 = worst32.max(lsb);
        }
    }
    assert!(worst64 < 1e-9, "f64 round trip error {worst64}");
    // f32 arithmetic: well under a quarter LSB-equivalent.
    assert!(worst32 < 0.05, "f32 error {worst32} LSB");
}

#[test]
fn low_end_reports_below_range_where_sensitivity_collapses() {
    let c = hard_unit();
    // At 85 °C, β = exp(-10.5 + 3.6·1) ≈ 1e-3: x = −9 has sensitivity e^x/(e^x+β) ≈ 0.11 ... below −10 none.
    let code = c.forward_code_f64(-12.0, 85.0).round() as u32;
    assert_eq!(c.correct(code, 85.0), Err(Error::BelowRange));
}

#[test]
fn code_checks() {
    let c = hard_unit();
    assert_eq!(c.correct(70000, 25.0), Err(Error::CodeOutOfAdcRange { code: 70000, max: 65535 }));
    assert_eq!(c.correct(3, 25.0), Err(Error::Saturated { code: 3 }));
    assert_eq!(c.correct(65535 - 3, 25.0), Err(Error::Saturated { code: 65532 }));
    assert_eq!(c.correct(33000, f32::NAN), Err(Error::NonFinite));
}

#[test]
fn temperature_extrapolation_is_bounded_and_flagged() {
    let c = hard_unit();
    let code = c.forward_code_f64(0.0, 88.0).round() as u32;
    let r = c.correct(code, 88.0).unwrap();
    assert!(r.temperature_extrapolated);
    assert!(!c.correct(code, 50.0).unwrap().temperature_extrapolated);
    assert_eq!(c.correct(code, 90.5), Err(Error::TemperatureOutOfRange { celsius: 90.5 }));
    let mut strict = c;
    strict.temperature.extrapolation_k = 0.0;
    assert_eq!(strict.correct(code, 85.5), Err(Error::TemperatureOutOfRange { celsius: 85.5 }));
}

#[test]
fn range_limits() {
    let c = hard_unit();
    let code = c.forward_code_f64(4.5, 25.0).round() as u32;
    assert_eq!(c.correct(code, 25.0), Err(Error::AboveRange));
}

#[test]
fn inconsistent_calibrations_are_errors() {
    let mut c = hard_unit();
    c.model.slope = Series::ZERO;
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::ZeroSlope)));
    assert_eq!(c.correct(33000, 25.0), Err(Error::InvalidCalibration(CalibrationDefect::ZeroSlope)));
    let mut c = hard_unit();
    c.x_range.max = c.x_range.min;
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::XRange)));
    let mut c = hard_unit();
    c.adc.bits = 0;
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::AdcBits)));
    let mut c = hard_unit();
    c.model.slope.len = 200;
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::Coefficient)));
}

#[test]
fn residual_is_added_and_undone_by_forward() {
    let mut c = hard_unit();
    c.model.residual = Residual { nx: 2, nt: 2, x_center: -1.0, x_half_span: 5.0, ..Residual::OFF };
    c.model.residual.coeffs[0] = 0.01;
    c.model.residual.coeffs[1] = -0.002;
    c.model.residual.coeffs[MAX_RESIDUAL] = 0.004;
    for x in [-3.0, 0.0, 2.5] {
        let code = c.forward_code_f64(x, 40.0);
        let r = c.correct_f64(code, 40.0).unwrap();
        assert!((r.x - x).abs() < 1e-9, "{} vs {x}", r.x);
    }
}
