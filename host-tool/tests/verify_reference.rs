//! The reference `logtrim verify` compares the firmware paths with: the warm-started f64 sweep
//! ([`logtrim::calibration::ReferenceSweep`]) gives the status of `Calibration::correct_f64` at every code
//! of the hand-made units, and its value to 1e-12 Np.

mod common;

use common::units;
use logtrim::calibration::ReadingF64;
use logtrim::Error;

fn agree(a: &Result<ReadingF64, Error>, b: &Result<ReadingF64, Error>) -> Result<f64, String> {
    match (a, b) {
        (Ok(a), Ok(b)) => {
            let dx = (a.x - b.x).abs();
            let rel = |p: f64, q: f64| (p - q).abs() <= 1e-12 * p.abs();
            if dx <= 1e-12
                && rel(a.sensitivity, b.sensitivity)
                && rel(a.dx_dcode, b.dx_dcode)
                && a.temperature_extrapolated == b.temperature_extrapolated
            {
                Ok(dx)
            } else {
                Err(format!("{a:?} vs {b:?}"))
            }
        }
        (Err(a), Err(b)) if a == b => Ok(0.0),
        _ => Err(format!("{a:?} vs {b:?}")),
    }
}

#[test]
fn verify_reference_warm_start_matches_correct_f64() {
    for (name, cal) in units::all() {
        let t = &cal.temperature;
        let (lo, hi) = (f64::from(t.min_c - t.extrapolation_k), f64::from(t.max_c + t.extrapolation_k));
        let max = cal.adc.max_code().unwrap();
        let (mut warm, mut values, mut points, mut worst) = (0u64, 0u64, 0u64, 0f64);
        // 0.05 K past either end of the accepted range, and 38 temperatures across it.
        for i in 0..=39 {
            let temp = lo - 0.05 + (hi - lo + 0.1) * f64::from(i) / 39.0;
            let mut sweep = cal.reference_sweep(temp);
            for code in 0..=max + 1 {
                let exact = cal.correct_f64(f64::from(code), temp);
                let got = sweep.correct(code);
                match agree(&exact, &got) {
                    Ok(dx) => worst = worst.max(dx),
                    Err(e) => panic!("{name}: code {code} at {temp} °C: {e}"),
                }
                values += u64::from(exact.is_ok());
                points += 1;
            }
            warm += sweep.warm_points();
        }
        let share = warm as f64 / points as f64;
        eprintln!("{name}: {points} points, {values} values, warm start {share:.3}, largest x difference {worst:.2e} Np");
        assert!(values > points / 4, "{name}: only {values} values");
        // Every unit goes mostly through the warm start (the ideal one, without a bulk bend, without Newton).
        assert!(share > 0.5, "{name}: warm start answered only {share:.3} of the points");
    }
}

/// `verify` with the warm-started reference and with the exact one: the same counts and worst inputs, the
/// error figures in Np within 1e-12 (each reference value moves by at most that), in LSB within 1e-8 (the
/// same over ∂x/∂code, at most about 5,500 codes per neper on these units).
#[test]
fn verify_reports_the_same_with_the_exact_reference() {
    use logtrim_host::tables::{self, TableOptions};
    use logtrim_host::verify::{self, VerifyOptions};
    for (name, cal) in units::all() {
        let t = tables::build(&cal, None, &TableOptions::default()).unwrap();
        let opts = VerifyOptions { code_stride: 3, temp_stride: 50, ..Default::default() };
        let warm = verify::run(&cal, &t.view(), None, &opts).unwrap();
        let exact =
            verify::run(&cal, &t.view(), None, &VerifyOptions { exact_reference: true, ..opts }).unwrap();
        assert_eq!(warm.reference_values, exact.reference_values, "{name}");
        assert_eq!((warm.reference, exact.reference), ("sweep", "exact"), "{name}");
        for (w, e) in [(&warm.fixed, &exact.fixed), (&warm.f32, &exact.f32)] {
            assert_eq!(w.status, e.status, "{name}");
            assert_eq!(w.errors.compared, e.errors.compared, "{name}");
            let close = |a: f64, b: f64, tol: f64| (a - b).abs() <= tol;
            let (we, ee) = (&w.errors, &e.errors);
            assert!(
                close(we.max_np, ee.max_np, 1e-12)
                    && close(we.rms_np, ee.rms_np, 1e-12)
                    && close(we.max_lsb, ee.max_lsb, 1e-8)
                    && close(we.rms_lsb, ee.rms_lsb, 1e-8),
                "{name}: {we:?} vs {ee:?}"
            );
            let (ww, ew) = (we.worst.unwrap(), ee.worst.unwrap());
            assert_eq!((ww.code, ww.temp_c, ww.x), (ew.code, ew.temp_c, ew.x), "{name}");
        }
        assert!(warm.passed() && exact.passed(), "{name}");
    }
}
