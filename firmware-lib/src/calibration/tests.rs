use super::sweep::Anchors;
use super::*;
use crate::math::{Backend, F32Math, Libm};
use std::vec;
use std::vec::Vec;

fn hard_unit() -> Calibration {
    // An uncompensated-like unit with a strong low-end bend and a visible high-end bend.
    crate::test_units::bent(-3.0)
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
    for (t, x) in logtrim_checks::grid((-20.0, 105.0, 21), (-6.0, 9.9, 60)) {
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
    assert_eq!(c.correct(code, 90.5), Err(Error::TemperatureOutOfRange { millicelsius: 90_500 }));
    let mut strict = c;
    strict.temperature.extrapolation_k = 0.0;
    assert_eq!(strict.correct(code, 85.5), Err(Error::TemperatureOutOfRange { millicelsius: 85_500 }));
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

/// Temperatures for the staged sweeps: a dense grid over and beyond the accepted range, the range's ends and
/// their f32 neighbours, and non-finite values.
fn sweep_temperatures(c: &Calibration) -> Vec<f32> {
    let t = &c.temperature;
    let (lo, hi) = (t.min_c - t.extrapolation_k, t.max_c + t.extrapolation_k);
    let mut v: Vec<f32> = (0..=400).map(|i| lo - 7.0 + (hi - lo + 14.0) * i as f32 / 400.0).collect();
    for e in [lo, hi, t.min_c, t.max_c] {
        v.extend([e, f32::from_bits(e.to_bits() - 1), f32::from_bits(e.to_bits() + 1)]);
    }
    v.extend([f32::NAN, f32::INFINITY, f32::NEG_INFINITY]);
    v
}

/// Codes for the staged sweeps: every 7th code, both rails with their margins, and codes beyond the converter.
fn sweep_codes(c: &Calibration) -> Vec<u32> {
    let max = c.adc.max_code().unwrap_or(65535);
    let m = c.adc.rail_margin;
    let mut v: Vec<u32> = (0..=max).step_by(7).collect();
    v.extend((0..=m + 2).chain(max - m - 2..=max + 2));
    v.extend([70000, u32::MAX]);
    v
}

/// Calibrations for the staged sweeps: the hard unit, one without bends (no Newton), one without
/// extrapolation, and invalid ones (the temperature stage's own errors, the converter's bits).
fn sweep_units() -> Vec<Calibration> {
    let mut v = vec![hard_unit()];
    let mut plain = hard_unit();
    plain.model.bulk = Series::ZERO;
    plain.model.bias = BiasTerm::OFF;
    v.push(plain);
    let mut strict = hard_unit();
    strict.temperature.extrapolation_k = 0.0;
    v.push(strict);
    let mut flat = hard_unit();
    flat.model.slope = Series::ZERO;
    v.push(flat);
    let mut hollow = hard_unit();
    hollow.x_range.max = hollow.x_range.min;
    v.push(hollow);
    let mut wide = hard_unit();
    wide.adc.bits = 30;
    v.push(wide);
    v
}

fn same_f32(a: &Result<Reading, Error>, b: &Result<Reading, Error>) -> bool {
    match (a, b) {
        (Ok(a), Ok(b)) => {
            a.x.to_bits() == b.x.to_bits() && a.temperature_extrapolated == b.temperature_extrapolated
        }
        (Err(a), Err(b)) => a == b,
        _ => false,
    }
}

fn same_f64(a: &Result<ReadingF64, Error>, b: &Result<ReadingF64, Error>) -> bool {
    match (a, b) {
        (Ok(a), Ok(b)) => {
            a.x.to_bits() == b.x.to_bits()
                && a.temperature_extrapolated == b.temperature_extrapolated
                && a.sensitivity.to_bits() == b.sensitivity.to_bits()
                && a.dx_dcode.to_bits() == b.dx_dcode.to_bits()
        }
        (Err(a), Err(b)) => a == b,
        _ => false,
    }
}

/// One f32 stage reused for every code gives, bit for bit, what a fresh evaluation of the same point gives:
/// the code's check, then the temperature's checks and stage, then the log channel, all for that one point.
fn staged_f32_matches<B: Backend>() {
    for c in sweep_units() {
        let codes = sweep_codes(&c);
        let (mut values, mut errors) = (0u32, 0u32);
        for t in sweep_temperatures(&c) {
            let stage = c.stage_with::<B>(t);
            for &code in &codes {
                let staged = c.correct_staged(&stage, code);
                let fresh = c
                    .adc
                    .check_code(code)
                    .and_then(|()| c.evaluate_real::<F32Math<B>>(code as f32, t))
                    .map(|p| Reading { x: p.x, temperature_extrapolated: p.extrapolated });
                assert!(
                    same_f32(&staged, &fresh),
                    "code {code} at {t} °C: staged {staged:?}, fresh {fresh:?}"
                );
                let public = c.correct_with::<B>(code, t);
                assert!(same_f32(&staged, &public), "code {code} at {t} °C: staged {staged:?}, {public:?}");
                if staged.is_ok() {
                    values += 1;
                } else {
                    errors += 1;
                }
            }
        }
        // The sweep reaches both values and errors wherever the calibration is valid.
        assert!(errors > 0);
        assert_eq!(values > 0, c.validate().is_ok(), "{values} values");
    }
}

#[test]
fn staged_f32_is_bit_identical_to_a_fresh_correction() {
    staged_f32_matches::<Libm>();
}

#[cfg(feature = "micromath")]
#[test]
fn staged_f32_is_bit_identical_with_micromath() {
    staged_f32_matches::<crate::math::Micromath>();
}

#[test]
fn staged_f64_is_bit_identical_to_correct_f64() {
    for c in sweep_units() {
        let codes = sweep_codes(&c);
        let mut kinds = std::collections::BTreeSet::new();
        let temps = sweep_temperatures(&c).into_iter().map(f64::from).chain([25.123456789, -24.9999999]);
        for t in temps {
            let stage = c.reference_stage(t);
            for &code in &codes {
                let staged = c.correct_staged_f64(&stage, code);
                let direct = c.correct_f64(f64::from(code), t);
                assert!(same_f64(&staged, &direct), "code {code} at {t} °C: staged {staged:?}, {direct:?}");
                kinds.insert(staged.map_or_else(|e| e.name(), |_| "ok"));
            }
        }
        // Every kind of outcome the sweep is meant to reach is reached on the valid units.
        if c.validate().is_ok() {
            for k in ["ok", "saturated", "code_out_of_adc_range", "below_range", "above_range", "non_finite"]
            {
                assert!(kinds.contains(k), "{k} not reached: {kinds:?}");
            }
            assert!(kinds.contains("temperature_out_of_range"), "{kinds:?}");
        }
    }
}

/// The warm-started reference against the exact one at every code of a temperature (and at every 97th code,
/// where the start is farther off): the same status everywhere, x within 1e-12 Np, sensitivity and ∂x/∂code
/// within 1e-12 relative. Returns the share of codes the warm start answered and the largest x difference.
fn sweep_against_exact(c: &Calibration, stride: usize) -> (f64, f64) {
    let t = &c.temperature;
    let (lo, hi) = (t.min_c - t.extrapolation_k, t.max_c + t.extrapolation_k);
    let max = c.adc.max_code().unwrap_or(65535);
    let (mut warm, mut points, mut worst) = (0u64, 0u64, 0f64);
    for i in 0..=24 {
        let temp = f64::from(lo - 1.0) + f64::from(hi - lo + 2.0) * f64::from(i) / 24.0;
        let stage = c.reference_stage(temp);
        let mut sweep = c.reference_sweep(temp);
        for code in (0..=max + 1).step_by(stride) {
            let exact = c.correct_staged_f64(&stage, code);
            let got = sweep.correct(code);
            points += 1;
            match (&exact, &got) {
                (Ok(a), Ok(b)) => {
                    let dx = (a.x - b.x).abs();
                    worst = worst.max(dx);
                    let rel = |p: f64, q: f64| (p - q).abs() <= 1e-12 * p.abs();
                    assert!(
                        dx <= 1e-12
                            && rel(a.sensitivity, b.sensitivity)
                            && rel(a.dx_dcode, b.dx_dcode)
                            && a.temperature_extrapolated == b.temperature_extrapolated,
                        "code {code} at {temp} °C: exact {a:?}, warm {b:?}"
                    );
                }
                (Err(a), Err(b)) => assert_eq!(a, b, "code {code} at {temp} °C"),
                _ => panic!("code {code} at {temp} °C: exact {exact:?}, warm {got:?}"),
            }
        }
        warm += sweep.warm_points();
    }
    (warm as f64 / points as f64, worst)
}

#[test]
fn warm_started_reference_matches_the_exact_reference() {
    let hard = hard_unit();
    // A strong bulk term: h·e^z passes ½ inside the x range, where only the exact path may answer.
    let mut bulky = hard_unit();
    bulky.model.bulk = Series::from_slice(&[300.0, 20.0]).unwrap_or(Series::ZERO);
    // No sensitivity limit: values right down to where e^x vanishes next to β.
    let mut open = hard_unit();
    open.x_range = XRange { min: -30.0, max: 4.0, min_sensitivity: 0.0 };
    // A negative bulk term (h < 0): the warm start never answers.
    let mut negative = hard_unit();
    negative.model.bulk = Series::from_slice(&[-6.0]).unwrap_or(Series::ZERO);
    // No bulk term (h = 0): both paths take z = w.
    let mut plain = hard_unit();
    plain.model.bulk = Series::ZERO;
    for (name, c, least_warm) in [
        ("hard", hard, 0.4),
        ("bulky", bulky, 0.2),
        ("open", open, 0.4),
        ("negative", negative, 0.0),
        ("plain", plain, 0.4),
    ] {
        for stride in [1, 97] {
            let (share, worst) = sweep_against_exact(&c, stride);
            std::eprintln!("{name}, every {stride}: warm {share:.3}, largest x difference {worst:.2e} Np");
            assert!(share >= least_warm, "{name}: warm start answered only {share}");
            if least_warm == 0.0 {
                assert_eq!(share, 0.0, "{name}: no warm start where h < 0");
            }
        }
    }
}

/// The warm start's `exp` and `ln` near an anchor against libm's own, on walks in steps like a sweep's
/// (from one code to the next) and jumps (to new anchors): e^z within 3 ULP, ln y within 4e-16·(1 + |ln y|).
#[test]
fn anchored_exp_and_ln_follow_libm() {
    let ulp = |v: f64| f64::from_bits(v.abs().to_bits() + 1) - v.abs();
    let mut near = Anchors::NONE;
    let (mut worst_exp, mut worst_ln, mut series) = (0f64, 0f64, 0u32);
    let mut z = -25.0;
    let mut k = 0u32;
    while z < 25.0 {
        // Steps of 1.1e-4 … 1.9e-3, and every 1000th a jump past the anchor's reach.
        k += 1;
        z += if k.is_multiple_of(1000) { 0.01 } else { 1.1e-4 + 1.8e-3 * f64::from(k % 7) / 6.0 };
        let (got, want) = (near.exp(z), libm::exp(z));
        worst_exp = worst_exp.max((got - want).abs() / ulp(want));
        let y = libm::exp(z * 0.7);
        let (got, want) = (near.ln(y), libm::log(y));
        worst_ln = worst_ln.max((got - want).abs() / (4e-16 * (1.0 + want.abs())));
        series += u32::from(near.z != z);
    }
    std::eprintln!("exp {worst_exp:.2} ULP, ln {worst_ln:.2} of its bound, {series} of {k} from the series");
    assert!(worst_exp <= 3.0, "exp {worst_exp} ULP");
    assert!(worst_ln <= 1.0, "ln {worst_ln} of the bound");
    assert!(series > k / 2, "the walk must mostly use the series: {series} of {k}");
}

/// Every correction over a dense grid of accepted inputs: none reports an invalid calibration.
fn never_invalid(c: &Calibration) {
    let t = c.temperature;
    let (lo, hi) = (t.min_c - t.extrapolation_k, t.max_c + t.extrapolation_k);
    let max = c.adc.max_code().unwrap();
    for i in 0..=200 {
        let temp = lo + (hi - lo) * i as f32 / 200.0;
        for k in 0..=256u32 {
            let code = (u64::from(max) * u64::from(k) / 256) as u32;
            let r = c.correct(code, temp);
            assert!(!matches!(r, Err(Error::InvalidCalibration(_))), "{code} at {temp}: {r:?}");
        }
    }
}

#[test]
fn a_slope_positive_at_three_points_but_negative_between_them_is_refused() {
    // P_s = 1 + 3·T_4(τ): 4 at τ = −1, 0 and 1, but T_4(±0.5) = −0.5 gives −0.5 there (T_4 = 8τ⁴ − 8τ² + 1,
    // the Chebyshev polynomial's definition, common practice). Validation once looked at three points only.
    let mut c = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
    c.temperature = TemperatureRange { min_c: -25.0, max_c: 75.0, extrapolation_k: 0.0 };
    c.model.slope = Series::from_slice(&[3000.0, 0.0, 0.0, 0.0, 9000.0]).unwrap();
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::ZeroSlope)));
    // The same shape lifted clear of zero is proven positive everywhere, and never reports itself invalid.
    c.model.slope = Series::from_slice(&[3000.0, 0.0, 0.0, 0.0, 1000.0]).unwrap();
    assert_eq!(c.validate(), Ok(()));
    never_invalid(&c);
    // A dip to zero only inside the extrapolation band is found too.
    c.temperature.extrapolation_k = 30.0;
    c.model.slope = Series::from_slice(&[3000.0, 0.0, 0.0, 0.0, 0.0, 100.0]).unwrap();
    assert!(
        c.validate().is_ok() || c.validate() == Err(Error::InvalidCalibration(CalibrationDefect::ZeroSlope))
    );
    if c.validate().is_ok() {
        never_invalid(&c);
    }
}

#[test]
fn a_bulk_term_that_overtakes_the_slope_is_refused_as_not_monotone() {
    // A negative bulk term large enough that ∂code/∂x < 0 below the top of the x range somewhere in the
    // temperature range: the inverse would not be unique there.
    let mut c = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
    c.x_range = XRange { min: -8.0, max: 4.0, min_sensitivity: 0.1 };
    // P_h·e^4 = −100·54.6 ≈ −5460 against a slope of ≈ 3000·T_K/T_ref: not monotone near x = 4.
    c.model.bulk = Series::from_slice(&[-100.0]).unwrap();
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::NotMonotone)));
    // Negative only at the hot end (a bulk series that changes sign): still refused.
    c.model.bulk = Series::from_slice(&[-30.0, -60.0]).unwrap();
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::NotMonotone)));
    // A small one stays monotone and is proven so.
    c.model.bulk = Series::from_slice(&[-5.0, 2.0]).unwrap();
    assert_eq!(c.validate(), Ok(()));
    never_invalid(&c);
}

#[test]
fn a_residual_that_folds_the_correction_is_refused() {
    let mut c = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
    c.x_range = XRange { min: -5.0, max: 5.0, min_sensitivity: 0.0 };
    c.model.residual.nx = 2;
    c.model.residual.nt = 1;
    c.model.residual.x_half_span = 5.0;
    // R = −6·T_1(ξ) = −6·x₀/5: x = x₀ − 1.2·x₀ falls as x₀ rises.
    c.model.residual.coeffs[MAX_RESIDUAL] = -6.0;
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::NotMonotone)));
    c.model.residual.coeffs[MAX_RESIDUAL] = -0.05;
    assert_eq!(c.validate(), Ok(()));
}

#[test]
fn each_defect_is_named_for_what_it_is() {
    let ok = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
    let defect = |f: &dyn Fn(&mut Calibration)| {
        let mut c = ok;
        f(&mut c);
        match c.validate() {
            Err(Error::InvalidCalibration(d)) => d,
            other => panic!("{other:?}"),
        }
    };
    use CalibrationDefect as D;
    assert_eq!(defect(&|c| c.adc.level_shift_code = f32::INFINITY), D::LevelShift);
    assert_eq!(defect(&|c| c.adc.level_shift_code = 1e30), D::LevelShift);
    assert_eq!(
        defect(&|c| c.x_range = XRange { min: -200.0, max: 200.0, min_sensitivity: 0.1 }),
        D::XRangeLimit
    );
    assert_eq!(defect(&|c| c.model.pole = -0.98), D::Pole);
    // An unused coefficient that is not finite is refused by the one validation (as the image refuses it).
    assert_eq!(defect(&|c| c.model.offset.coeffs[5] = f32::INFINITY), D::Coefficient);
    assert_eq!(defect(&|c| c.model.residual.coeffs[15] = f32::NAN), D::Coefficient);
    // A term beyond what f32 evaluates over the range.
    assert_eq!(
        defect(&|c| c.model.offset = Series::from_slice(&[0.0, 0.0, 0.0, 0.0, 0.0, 3e38]).unwrap()),
        D::Coefficient
    );
    assert_eq!(defect(&|c| c.temperature.max_c = 5000.0), D::TemperatureRange);
    for d in [D::LevelShift, D::XRangeLimit, D::Pole, D::NotMonotone] {
        assert!(!std::format!("{d}").is_empty());
    }
}

#[test]
fn units_the_tests_use_are_proven_valid() {
    assert_eq!(hard_unit().validate(), Ok(()));
    assert_eq!(crate::test_units::bent(0.0).validate(), Ok(()));
}
