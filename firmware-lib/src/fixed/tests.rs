//! Unit tests of the fixed path on hand-built tables: statuses at every extreme, exact values where the
//! tables make them exact, unit conversions against published values, and no panic on garbage tables.
//! (Accuracy against the f64 model is the host's job: `host-tool/tests/fixed_tables.rs` and `logtrim verify`.)

use std::vec;
use std::vec::Vec;

use super::*;

const Q24: i64 = 1 << 24;
/// The x range's ends: 27306 codes from the centre.
const X_LIM: i32 = 27306 * 3072;

use crate::test_units::{bspline_basis6, linear_fixed as linear, LinearFixed as Owned, LINEAR_X_LIM};

/// The error of a temperature outside the calibrated range, given in m°C.
fn t_err(millicelsius: i32) -> Error {
    Error::TemperatureOutOfRange { millicelsius }
}

fn x_of(code: u32) -> i32 {
    ((i64::from(code) - 32769) * 3072) as i32
}

#[test]
fn hand_built_tables_validate() {
    assert_eq!(linear().view().validate(), Ok(()));
}

#[test]
fn linear_tables_are_exact() {
    let o = linear();
    let c = o.view();
    for code in [5463, 20000, 32768, 32769, 40000, 60075] {
        for t in [-5000, 0, 25_000, 50_000, 55_000] {
            let r = c.correct(code, t).unwrap();
            assert_eq!(r.x, x_of(code), "code {code} at {t} m°C");
        }
    }
    assert_eq!(c.correct(32769 + 5461, 25_000).unwrap().x, 5461 * 3072);
}

#[test]
fn code_extremes() {
    let o = linear();
    let c = o.view();
    assert_eq!(c.correct(0, 25_000), Err(Error::Saturated { code: 0 }));
    assert_eq!(c.correct(15, 25_000), Err(Error::Saturated { code: 15 }));
    // A code at the margin counts as saturated, as in the f32 path; code 17 is inside the rails but
    // its x is below the calibrated x range.
    assert_eq!(c.correct(16, 25_000), Err(Error::Saturated { code: 16 }));
    assert_eq!(c.correct(17, 25_000), Err(Error::BelowRange));
    assert_eq!(c.correct(65518, 25_000), Err(Error::AboveRange));
    assert_eq!(c.correct(65519, 25_000), Err(Error::Saturated { code: 65519 }));
    assert_eq!(c.correct(65520, 25_000), Err(Error::Saturated { code: 65520 }));
    assert_eq!(c.correct(65535, 25_000), Err(Error::Saturated { code: 65535 }));
    assert_eq!(c.correct(65536, 25_000), Err(Error::CodeOutOfAdcRange { code: 65536, max: 65535 }));
    assert_eq!(c.correct(u32::MAX, 25_000), Err(Error::CodeOutOfAdcRange { code: u32::MAX, max: 65535 }));
    // The code is checked before the temperature, as in the f32 path.
    assert_eq!(c.correct(u32::MAX, i32::MAX), Err(Error::CodeOutOfAdcRange { code: u32::MAX, max: 65535 }));
    assert_eq!(c.correct_raw(0, u32::MAX), Err(Error::Saturated { code: 0 }));
    // The x range ends are inclusive.
    assert_eq!(c.correct(5463, 25_000).map(|r| r.x), Ok(-X_LIM));
    assert_eq!(c.correct(5462, 25_000), Err(Error::BelowRange));
    assert_eq!(c.correct(60075, 25_000).map(|r| r.x), Ok(X_LIM));
    assert_eq!(c.correct(60076, 25_000), Err(Error::AboveRange));
}

#[test]
fn temperature_extremes_and_extrapolation() {
    let o = linear();
    let c = o.view();
    let code = 40000;
    for t in [0, 1, 25_000, 49_999, 50_000] {
        assert!(!c.correct(code, t).unwrap().temperature_extrapolated, "{t}");
    }
    for t in [-5000, -4999, -1, 50_001, 54_999, 55_000] {
        assert!(c.correct(code, t).unwrap().temperature_extrapolated, "{t}");
    }
    for t in [-5001, 55_001, i32::MIN, i32::MIN + 1, i32::MAX, -273_150] {
        assert_eq!(c.correct(code, t), Err(t_err(t)), "{t}");
    }
    let mut strict = linear();
    strict.header.temp_lo = strict.header.temp_min;
    strict.header.temp_hi = strict.header.temp_max;
    assert_eq!(strict.view().correct(code, 50_001), Err(t_err(50_001)));
    assert_eq!(strict.view().correct(code, -1), Err(t_err(-1)));
}

#[test]
fn sensor_table_and_faults() {
    let o = linear();
    let c = o.view();
    assert_eq!(c.theta_from_code(100), Ok(0));
    assert_eq!(c.theta_from_code(356), Ok(256 * 15 * 1024));
    assert_eq!(c.theta_from_code(1100), Ok(15_000 * 1024));
    assert_eq!(c.theta_from_code(4000), Ok(58_500 * 1024));
    assert_eq!(c.theta_from_code(99), Err(Error::Sensor(SensorFault::OutOfModelRange)));
    assert_eq!(c.theta_from_code(10), Err(Error::Sensor(SensorFault::OutOfModelRange)));
    assert_eq!(c.theta_from_code(9), Err(Error::Sensor(SensorFault::Short)));
    assert_eq!(c.theta_from_code(0), Err(Error::Sensor(SensorFault::Short)));
    assert_eq!(c.theta_from_code(4001), Err(Error::Sensor(SensorFault::OutOfModelRange)));
    assert_eq!(c.theta_from_code(4090), Err(Error::Sensor(SensorFault::OutOfModelRange)));
    assert_eq!(c.theta_from_code(4091), Err(Error::Sensor(SensorFault::Open)));
    assert_eq!(c.theta_from_code(u32::MAX), Err(Error::Sensor(SensorFault::Open)));
    assert_eq!(c.correct_raw(40000, 1100), c.correct(40000, 15_000));
    assert_eq!(c.correct_raw(40000, 5000), Err(Error::Sensor(SensorFault::Open)));
    // Codes 100…4000 map to 0…58.5 °C; past 55 °C the temperature is out of range.
    assert_eq!(c.correct_raw(40000, 3766), Ok(c.correct(40000, 54_990).unwrap()));
    assert_eq!(c.correct_raw(40000, 3767), Err(t_err(55_005)));
    // Without a sensor table, a raw temperature code cannot be converted.
    let mut none = o.view();
    none.sensor = None;
    assert_eq!(none.correct_raw(40000, 2600), Err(Error::NotCalibrated));
}

#[test]
fn staged_correction_equals_the_direct_one() {
    let o = linear();
    let c = o.view();
    let stage = c.stage_millicelsius(52_000).unwrap();
    assert!(stage.extrapolated());
    for code in (0..=65535u32).step_by(101).chain([u32::MAX]) {
        assert_eq!(c.correct_staged(&stage, code), c.correct(code, 52_000));
    }
    assert_eq!(c.stage_millicelsius(60_000), Err(t_err(60_000)));
    assert_eq!(c.stage_code(4001), Err(Error::Sensor(SensorFault::OutOfModelRange)));
}

#[test]
fn stage_and_block_are_bit_identical_to_the_direct_path() {
    for o in [bent(), drifting()] {
        let c = o.view();
        for t in [-5000, -4999, 0, 12_345, 25_000, 33_001, 50_000, 55_000] {
            let s = c.stage_millicelsius(t).unwrap();
            let codes: Vec<u32> = (0..=65535u32).step_by(7).chain([u32::MAX]).collect();
            let mut out = vec![Err(Error::NotCalibrated); codes.len() + 3];
            assert_eq!(c.correct_block(&s, &codes, &mut out), codes.len());
            for (&code, got) in codes.iter().zip(&out) {
                let want = c.correct(code, t);
                assert_eq!(c.correct_staged(&s, code), want, "code {code} at {t}");
                assert_eq!(*got, want, "block: code {code} at {t}");
            }
            // The slots past the codes are left alone.
            assert!(out[codes.len()..].iter().all(|r| *r == Err(Error::NotCalibrated)));
        }
    }
    // Grids wider than a stage's row are refused by validate, and a stage is never truncated.
    let mut wide = linear();
    wide.header.xa_knots = ROW_CAPACITY as u16 - 1;
    wide.residual = vec![0; 7 * (ROW_CAPACITY + 1)];
    let c = wide.view();
    assert_eq!(c.validate(), Err(Error::InvalidCalibration(CalibrationDefect::Coefficient)));
    assert_eq!(c.stage_millicelsius(0), Err(Error::InvalidCalibration(CalibrationDefect::Coefficient)));
    assert_eq!(StageCache::new(c).correct(30_000, 20_000), c.correct(30_000, 20_000));
}

#[test]
fn temperature_windows_follow_the_spline() {
    // An offset and an inverse slope that change with temperature, no bend and no residual: x = u =
    // (code·2^14 − O(T))·A(T)/2^32 with O and A the cubic B-splines of their control points. The direct path
    // evaluates them at θ itself, the stage cache exactly at window ends and along a parabola in between;
    // against the splines in f64 (the uniform cubic B-spline basis, de Boor) both stay within a few units
    // of Q24 everywhere.
    let mut o = linear();
    o.offset = (0..7).map(|i| (10923 << 13) + i * 370_000 - i * i * 25_000).collect();
    o.inv_slope = (0..7).map(|i| (1 << 27) + i * 9_000_000 + i * i * 410_000).collect();
    let c = o.view();
    let spline = |cp: &[i32], theta: f64| -> f64 {
        let p = (theta - f64::from(o.header.t_origin)) / f64::from(1u32 << o.header.t_step_log2);
        let seg = (p.floor() as usize).min(usize::from(o.header.t_knots) - 2);
        let b = bspline_basis6(p - seg as f64);
        (0..4).map(|k| b[k] * f64::from(cp[seg + k])).sum()
    };
    let mut cache = StageCache::new(c);
    let (mut worst, mut worst_cache) = (0f64, 0f64);
    for mc in (-5000..=55_000).step_by(37) {
        let theta = f64::from(mc) * 1024.0;
        for code in [5000u32, 20_000, 40_000, 60_000] {
            let want = (f64::from(code) * 16384.0 - spline(&o.offset, theta)) * spline(&o.inv_slope, theta)
                / 2f64.powi(32);
            if want.abs() > f64::from(LINEAR_X_LIM) {
                continue;
            }
            let got = f64::from(c.correct(code, mc).unwrap().x);
            worst = worst.max((got - want).abs());
            let got = f64::from(cache.correct(code, mc).unwrap().x);
            worst_cache = worst_cache.max((got - want).abs());
        }
    }
    assert!(worst < 4.0, "{worst} units of Q24 from the splines");
    assert!(worst_cache < 4.0, "{worst_cache} units of Q24 from the splines through the stage cache");
}

/// A linear unit with a bias bend, a sensitivity limit and a structured residual: every step of the chain
/// does something.
fn bent() -> Owned {
    let mut o = linear();
    o.header.bias_bend = true;
    o.header.sensitivity_limit = true;
    o.ln_bias = (0..7).map(|i| -(3 << 22) + i * 40_000).collect();
    o.u_min = vec![-10_485_760; 7];
    o.header.x_min = -16 << 24;
    o.header.xa_origin = -18 << 24;
    o.header.xa_step_log2 = 27; // 8 Np: knots −18, −10, …, 22 Np
    for (i, r) in o.residual.iter_mut().enumerate() {
        *r = ((i as i32 * 7919) % 2001 - 1000) as i16;
    }
    o
}

/// [`bent`] with an offset and an inverse slope that change with temperature: every window differs.
fn drifting() -> Owned {
    let mut o = bent();
    o.offset = (0..7).map(|i| (10923 << 13) + i * 37_000 - i * i * 2_500).collect();
    o.inv_slope = (0..7).map(|i| (1 << 27) + i * 900_000 + i * i * 41_000).collect();
    o
}

/// [`drifting`] with a residual that is smooth over temperature, as a fitted one is (the window's line
/// then holds it to a few Q24 units).
fn smooth() -> Owned {
    let mut o = drifting();
    let stride = usize::from(o.header.xa_knots) + 2;
    for (i, r) in o.residual.iter_mut().enumerate() {
        let (row, col) = ((i / stride) as i32, (i % stride) as i32);
        *r = (20 * (col - 4) * (col - 4) + 45 * row - 7 * row * row - 600) as i16;
    }
    o
}

#[test]
fn stage_cache_depends_on_its_inputs_alone_and_follows_the_direct_path() {
    for (o, smooth_table) in [(linear(), true), (bent(), false), (smooth(), true)] {
        let c = o.view();
        let mut cache = StageCache::new(c);
        // The long-lived cache against a fresh one (its history never shows) and against the direct path:
        // on tables smooth over temperature within a sixteenth of the local code step, the same errors
        // elsewhere. A residual that jumps from one temperature knot to the next (not a fitted one) bends
        // inside a window, and the window's line misses it by most of a code step there.
        let check = |cache: &mut StageCache<'_>, code: u32, tc: Option<u32>, mc: i32| {
            let (kept, fresh, direct) = match tc {
                Some(tc) => (
                    cache.correct_raw(code, tc),
                    StageCache::new(c).correct_raw(code, tc),
                    c.correct_raw(code, tc),
                ),
                None => (cache.correct(code, mc), StageCache::new(c).correct(code, mc), c.correct(code, mc)),
            };
            assert_eq!(kept, fresh, "code {code}, {tc:?} / {mc} m°C");
            let mc = match (tc, kept) {
                (Some(tc), _) => match c.theta_from_code(tc) {
                    // Codes in the sensor's span convert to whole m°C in this test unit.
                    Ok(theta) => theta >> 10,
                    Err(_) => {
                        assert_eq!(kept, direct, "code {code}, temperature code {tc}");
                        return;
                    }
                },
                (None, _) => mc,
            };
            let close = near_direct_within(&c, kept, code, mc, if smooth_table { 16 } else { 1 });
            assert!(close, "code {code} at {mc} m°C: {kept:?} vs {direct:?}");
        };
        // Temperature codes repeated, alternating, in and out of the sensor's span; log codes over the whole
        // converter and beyond, so hits, misses and every error go through the cache.
        let temp_codes = [2000, 2000, 2001, 2000, 99, 4001, 9, 5000, 100, 4000, 3000, 3000];
        for (k, &tc) in temp_codes.iter().cycle().take(60).enumerate() {
            for code in (0..=65535u32).step_by(997 + k).chain([15, 16, 17, 65519, 65520, u32::MAX]) {
                check(&mut cache, code, Some(tc), 0);
            }
        }
        // m°C keys never collide with temperature codes of the same number.
        for (tc, mc) in [(2000u32, 2000i32), (3000, 3000), (3000, -3000), (2000, 2000)] {
            for code in (0..=65535u32).step_by(1009) {
                check(&mut cache, code, None, mc);
                check(&mut cache, code, Some(tc), 0);
            }
        }
        for mc in [-5001, -5000, 55_000, 55_001, i32::MIN, i32::MAX] {
            check(&mut cache, 30_000, None, mc);
        }
        cache.clear();
        check(&mut cache, 30_000, None, 20_000);
        assert_eq!(cache.calibration(), &c);
    }
}

/// The code table's reading against the direct path's: the same status, or x within a quarter of the
/// local code step (the direct path's x change to the next code) plus two Q24 units; where one of the two
/// is outside the calibrated x range, the other's x is within that of the range's end.
fn near_direct(c: &FixedCalibration<'_>, t: Result<FixedReading, Error>, code: u32, mc: i32) -> bool {
    near_direct_within(c, t, code, mc, 4)
}

/// [`near_direct`] within `1/share` of the local code step (and two Q24 units).
fn near_direct_within(
    c: &FixedCalibration<'_>,
    t: Result<FixedReading, Error>,
    code: u32,
    mc: i32,
    share: i64,
) -> bool {
    let d = c.correct(code, mc);
    let step = |x: i32| {
        let n = c.correct(code.saturating_add(1), mc).or_else(|_| c.correct(code.saturating_sub(1), mc));
        n.map_or(1, |n| (i64::from(n.x) - i64::from(x)).abs().max(1))
    };
    // share·|a − b| ≤ step + 2·share: within a share of the step and two units.
    let near = |a: i32, b: i32, x: i32| share * (i64::from(a) - i64::from(b)).abs() <= step(x) + 2 * share;
    let h = &c.header;
    let edge = |x: i32| if x < h.x_min / 2 + h.x_max / 2 { h.x_min } else { h.x_max };
    match (t, d) {
        (Ok(a), Ok(b)) => a.temperature_extrapolated == b.temperature_extrapolated && near(a.x, b.x, b.x),
        (Err(a), Err(b)) => a == b,
        (Ok(a), Err(Error::BelowRange | Error::AboveRange)) => near(a.x, edge(a.x), a.x),
        (Err(Error::BelowRange | Error::AboveRange), Ok(b)) => near(b.x, edge(b.x), b.x),
        _ => false,
    }
}

#[test]
fn code_table_follows_the_direct_path() {
    // A wandering temperature through one table (window ends crossed), codes over the whole converter and
    // beyond: within a quarter of the local code step of the direct path, the same errors elsewhere; a
    // block at one temperature gives the one-sample results.
    for o in [linear(), bent(), drifting()] {
        let c = o.view();
        let mut table = CodeTable::new(c);
        let mut interpolated = 0;
        for k in 0..400i32 {
            let mc = 20_000 + (k * 37) % 3000 - 1500 + if k % 97 == 0 { 90_000 } else { 0 };
            for code in (0..=65535u32).step_by(1999 + k as usize).chain([15, 16, 17, 65519, 65520, u32::MAX])
            {
                let t = table.correct(code, mc);
                assert!(
                    near_direct(&c, t, code, mc),
                    "code {code} at {mc} m°C: {t:?} vs {:?}",
                    c.correct(code, mc)
                );
                interpolated += usize::from(t.is_ok() && t != c.correct(code, mc));
            }
        }
        // The table's own values were compared, not only its fallbacks (the linear unit's table is exact).
        assert!(!o.header.bias_bend || interpolated > 100, "{interpolated} values from the table");
        let codes: Vec<u32> = (0..=65535u32).step_by(257).chain([0, u32::MAX]).collect();
        let mut out = vec![Err(Error::NotCalibrated); codes.len()];
        for mc in [21_000, -9_999, 49_999] {
            assert_eq!(table.correct_block(mc, &codes, &mut out), codes.len());
            for (o, &code) in out.iter().zip(&codes) {
                assert_eq!(*o, table.correct(code, mc), "code {code} at {mc} m°C");
            }
        }
        for tc in [2000u32, 5000, 9] {
            assert_eq!(table.correct_block_raw(tc, &codes, &mut out), codes.len());
            for (o, &code) in out.iter().zip(&codes) {
                assert_eq!(*o, table.correct_raw(code, tc), "code {code}, temperature code {tc}");
            }
        }
        table.clear();
        assert_eq!(table.usable_intervals().1, 0);
        assert_eq!(table.calibration(), &c);
    }
}

#[test]
fn a_kept_code_table_gives_what_a_fresh_one_gives() {
    // A hit skips every check but one per input: it must give exactly what a table built for the sample
    // gives (the rare path, all checks made). Temperatures step across the ends of the calibrated and the
    // accepted range, window edges and back, one m°C and one temperature code at a time; codes across the
    // converter, its rails and beyond.
    let (lo, hi) = (-5_000, 55_000);
    let mut temps: Vec<i32> = vec![];
    // Window edges every 1024 m°C from −5 °C (20.6 °C is one).
    for centre in [lo, 0, 20_600, 50_000, hi] {
        temps.extend((-40..=40).map(|k| centre + k * 3));
        temps.extend((-40..=40).rev().map(|k| centre + k * 5));
    }
    temps.extend([i32::MIN, i32::MAX, 20_000, 20_000, -1, 0, 1, 49_999, 50_000, 50_001]);
    // A code the table interpolates first (a sample that is not a hit takes the rare path, which moves
    // the table to its temperature).
    let codes = |k: usize| {
        [30_000].into_iter().chain((0..=65535u32).step_by(4093 + k % 7)).chain([
            16,
            17,
            65518,
            65519,
            u32::MAX,
        ])
    };
    for o in [linear(), drifting()] {
        let c = o.view();
        let mut table = CodeTable::new(c);
        let mut hits = 0;
        for (k, &mc) in temps.iter().enumerate() {
            for code in codes(k) {
                let want = CodeTable::new(c).correct(code, mc);
                let hit = table.interpolates(code);
                let got = table.correct(code, mc);
                assert_eq!(got, want, "code {code} at {mc} m°C");
                // The flag, against the direct path's (the table's x is checked in the test above).
                if let (Ok(got), Ok(direct)) = (got, c.correct(code, mc)) {
                    assert_eq!(got.temperature_extrapolated, direct.temperature_extrapolated, "{mc} m°C");
                }
                hits += usize::from(hit && want.is_ok());
            }
        }
        // Temperature codes 100…4000 are 0…58.5 °C: both ends of the calibrated range, a fault band beyond.
        let mut temp_codes: Vec<u32> = vec![];
        for centre in [100u32, 2000, 3433, 3767] {
            temp_codes.extend((centre - 20..centre + 20).flat_map(|t| [t, t, t.saturating_sub(1)]));
        }
        temp_codes.extend([0, 9, 4001, 4095, u32::MAX, u32::MAX, 2000]);
        for (k, &tc) in temp_codes.iter().enumerate() {
            for code in codes(k) {
                let want = CodeTable::new(c).correct_raw(code, tc);
                let hit = table.interpolates(code);
                let got = table.correct_raw(code, tc);
                assert_eq!(got, want, "code {code}, temperature code {tc}");
                if let (Ok(got), Ok(direct)) = (got, c.correct_raw(code, tc)) {
                    assert_eq!(got.temperature_extrapolated, direct.temperature_extrapolated, "code {tc}");
                }
                hits += usize::from(hit && want.is_ok());
            }
        }
        // A remembered temperature code after an m°C sample moved the table (another window, the other side
        // of a calibrated end): raw, m°C, raw again.
        for (k, (&tc, &mc)) in temp_codes.iter().zip(temps.iter().step_by(3)).enumerate() {
            for code in codes(k).take(3) {
                for (raw, t) in [(true, tc as i32), (false, mc), (true, tc as i32)] {
                    let (got, want) = if raw {
                        (table.correct_raw(code, t as u32), CodeTable::new(c).correct_raw(code, t as u32))
                    } else {
                        (table.correct(code, t), CodeTable::new(c).correct(code, t))
                    };
                    assert_eq!(
                        got,
                        want,
                        "code {code}, {} {t}",
                        if raw { "temperature code" } else { "m°C" }
                    );
                }
            }
        }
        assert!(hits > 5_000, "{hits} hits compared");
    }
}

#[test]
fn cache_stage_and_direct_path_agree_on_random_tables() {
    // Scales and contents anywhere in their ranges (valid or not): a stage runs the direct path's integer
    // operations, so they agree on every value and every error; the stage cache's results depend on the
    // inputs alone (a fresh cache gives what the long-lived one gives).
    let mut rng = Rng(0x2545_f491_4f6c_dd1d);
    for _ in 0..300 {
        let mut o = drifting();
        o.header.offset_frac = (rng.next() % 34) as u8;
        o.header.inv_slope_frac = 56u8.wrapping_sub(o.header.offset_frac);
        o.header.residual_frac = (rng.next() % 34) as u8;
        o.header.adc_max_code = [65535, 1 << 20, u32::MAX][(rng.next() % 3) as usize];
        o.header.t_step_log2 = 18 + (rng.next() % 12) as u8;
        o.header.xa_step_log2 = 14 + (rng.next() % 16) as u8;
        for t in [&mut o.offset, &mut o.inv_slope, &mut o.ln_bias] {
            for v in t.iter_mut() {
                *v = rng.i32();
            }
        }
        for r in o.residual.iter_mut() {
            *r = rng.next() as i16;
        }
        let c = o.view();
        let mut cache = StageCache::new(c);
        for tc in [150, 2000, 2001, 3999] {
            let stage = c.stage_code(tc);
            for _ in 0..40 {
                let code = (rng.next() % (u64::from(o.header.adc_max_code) + 2)) as u32;
                let want = c.correct_raw(code, tc);
                assert_eq!(
                    cache.correct_raw(code, tc),
                    StageCache::new(c).correct_raw(code, tc),
                    "code {code}, temp code {tc}"
                );
                if let Ok(s) = &stage {
                    assert_eq!(c.correct_staged(s, code), want, "code {code}, temp code {tc}");
                }
            }
        }
    }
}

#[test]
fn sensitivity_limit_and_bias_floor() {
    let mut o = linear();
    o.header.bias_bend = true;
    o.header.sensitivity_limit = true;
    // λ = −4.5 Np; u_min = −3.75 Np (stored divided by 6).
    o.ln_bias = vec![-(3 << 22); 7];
    o.u_min = vec![-10_485_760; 7];
    // A wider x̃ grid and x range, so the swamped low end (x̃ down to −12 Np) stays inside them.
    o.header.x_min = -16 << 24;
    o.header.xa_origin = -18 << 24;
    o.header.xa_step_log2 = 27; // 8 Np
    let c = o.view();
    assert_eq!(c.validate(), Ok(()));
    let u_min_code = 32769 - 20480; // u = −3.75 Np
    assert_eq!(c.correct(u_min_code - 1, 25_000), Err(Error::BelowRange));
    let at = c.correct(u_min_code, 25_000).unwrap();
    // x̃ = u + G(0.75 Np) = −3.75 + ln(1 − e^−0.75): e^−0.75 = 0.4723665527, ln 0.5276334473 = −0.6393535
    // (values from memory of standard tables); −4.3893535 · 2^24 = −73_641_131. The bend's per-sample
    // spline is within 4e-6 Np of G there (host test `bend_meets_its_budget`): 67 units of Q24.
    assert!((i64::from(at.x) + 73_641_131).abs() < 67, "{}", at.x);
    // Without the sensitivity limit, the bend table's floor (v < 2^−10 Np) refuses the swamped low end.
    o.header.sensitivity_limit = false;
    let c = o.view();
    let floor_code = 32769 - 24576; // u = λ exactly: v = 0
    assert_eq!(c.correct(floor_code, 25_000), Err(Error::BelowRange));
    assert_eq!(c.correct(floor_code + 5, 25_000), Err(Error::BelowRange)); // v = 30/32768 < 2^−10
    assert!(c.correct(floor_code + 6, 25_000).is_ok()); // v = 36/32768 > 2^−10
                                                        // x increases with the code wherever it is defined.
    let mut last = i32::MIN;
    for code in floor_code + 6..60000 {
        let x = c.correct(code, 25_000).unwrap().x;
        assert!(x > last, "code {code}");
        last = x;
    }
}

#[test]
fn units_against_published_values() {
    let one = FixedReading { x: 1 << 24, temperature_extrapolated: false };
    // ISO 80000-3: 1 Np = 8.685889638 dB (amplitude); power dB are half. 8.685889638 · 2^24 = 145_725_046.6.
    assert!((one.value(Unit::DbAmplitude).unwrap() - 145_725_047).abs() <= 2);
    assert!((one.value(Unit::DbPower).unwrap() - 72_862_523).abs() <= 2);
    // log10(e) = 0.4342944819 → 7_286_252.3 in Q24.
    assert!((one.value(Unit::Decades).unwrap() - 7_286_252).abs() <= 1);
    assert_eq!(one.value(Unit::Nepers), Ok(1 << 24));
    // e = 2.718281828 → 11_674_931_554.5 in Q32 (relative budget 1.5e-8: ±180).
    assert!((one.value(Unit::Ratio).unwrap() - 11_674_931_555).abs() <= 180);
    assert!((one.value(Unit::TransmittancePercent).unwrap() - 4_560_520_138).abs() <= 70);
    // Common practice: 10 % transmittance is 1 AU. ln 0.1 = −2.302585093 → −38_630_967.5 in Q24.
    let tenth = FixedReading { x: -38_630_967, temperature_extrapolated: false };
    assert!((tenth.value(Unit::Absorbance).unwrap() - Q24).abs() <= 1);
    assert!((tenth.value(Unit::TransmittancePercent).unwrap() - 10 * Q24).abs() <= 4);
    // The extremes of x: log units fit, the linear ones report that they do not.
    for x in [i32::MIN, i32::MAX] {
        let r = FixedReading { x, temperature_extrapolated: false };
        for u in [Unit::Nepers, Unit::Decades, Unit::DbPower, Unit::DbAmplitude, Unit::Absorbance] {
            assert!(r.value(u).is_ok(), "{u:?} at {x}");
        }
    }
    let big = FixedReading { x: i32::MAX, temperature_extrapolated: false };
    assert_eq!(big.value(Unit::Ratio), Err(Error::AboveRange));
    assert_eq!(big.value(Unit::TransmittancePercent), Err(Error::AboveRange));
    let small = FixedReading { x: i32::MIN, temperature_extrapolated: false };
    assert_eq!(small.value(Unit::Ratio), Ok(0));
    assert_eq!(value_frac_bits(Unit::Ratio), 32);
    assert_eq!(value_frac_bits(Unit::DbPower), 24);
}

#[test]
fn validate_names_the_defect() {
    use CalibrationDefect as D;
    let check = |f: &dyn Fn(&mut Owned), want: CalibrationDefect| {
        let mut o = linear();
        f(&mut o);
        assert_eq!(o.view().validate(), Err(Error::InvalidCalibration(want)));
    };
    check(&|o| o.header.layout = 9, D::Coefficient);
    check(&|o| o.header.adc_max_code = 1 << 24, D::AdcBits);
    check(&|o| o.header.rail_margin = 40000, D::RailMargin);
    check(&|o| o.header.temp_min = o.header.temp_max, D::TemperatureRange);
    check(&|o| o.header.temp_lo = o.header.temp_min + 1, D::TemperatureRange);
    check(&|o| o.header.x_max = o.header.x_min, D::XRange);
    check(&|o| o.header.t_step_log2 = 19, D::Normalisation);
    check(&|o| o.header.t_step_log2 = 29, D::Normalisation);
    check(&|o| o.header.t_step_log2 = 23, D::Normalisation); // the grid ends below 55 °C
    check(&|o| o.header.t_origin += 1024, D::Normalisation);
    check(&|o| o.header.offset_frac = 31, D::Coefficient);
    check(
        &|o| {
            o.header.offset_frac = 15; // 65535 · 2^15 does not fit below 2^30
            o.header.inv_slope_frac = 41;
        },
        D::Coefficient,
    );
    check(&|o| o.header.inv_slope_frac = 43, D::Coefficient); // the fractions must add up to 56
    check(&|o| o.header.residual_frac = 13, D::Coefficient);
    check(&|o| o.header.xa_step_log2 = 15, D::Coefficient);
    check(&|o| o.offset[3] = (1 << 30) / 6 + 1, D::Coefficient); // O at most 2^30
    check(&|o| o.offset[3] = -(1 << 29) / 6 - 1, D::Coefficient); // and at least −2^29
    check(&|o| o.residual.pop().map_or((), |_| ()), D::Coefficient);
    check(&|o| o.header.bias_bend = true, D::Coefficient); // λ table missing
    check(&|o| o.inv_slope[2] = 0, D::ZeroSlope);
    check(&|o| o.sensor.truncate(10), D::Coefficient);
}

// The seeded generator, so the garbage below is the same on every run.
use logtrim_checks::XorShift64 as Rng;

/// Table words: mostly extremes and small values, some uniform.
trait Word {
    fn i32(&mut self) -> i32;
}

impl Word for Rng {
    fn i32(&mut self) -> i32 {
        // Mostly extremes and small values, some uniform.
        match self.next() % 6 {
            0 => i32::MIN,
            1 => i32::MAX,
            2 => (self.next() % 64) as i32 - 32,
            _ => self.next() as i32,
        }
    }
}

#[test]
fn garbage_tables_never_panic_or_wrap() {
    // Overflow checks are on in test builds: any wrapping operation would panic here.
    let mut rng = Rng(0x9e37_79b9_7f4a_7c15);
    for _ in 0..4000 {
        let mut o = linear();
        let h = &mut o.header;
        h.adc_max_code = rng.next() as u32;
        h.rail_margin = (rng.next() % 64) as u32;
        h.temp_min = rng.i32();
        h.temp_max = rng.i32();
        h.temp_lo = i32::MIN;
        h.temp_hi = i32::MAX;
        h.t_knots = rng.next() as u16;
        h.t_origin = rng.i32();
        h.t_step_log2 = rng.next() as u8;
        h.offset_frac = rng.next() as u8;
        h.inv_slope_frac = rng.next() as u8;
        h.bias_bend = rng.next().is_multiple_of(2);
        h.sensitivity_limit = rng.next().is_multiple_of(2);
        h.xa_knots = rng.next() as u16;
        h.xa_origin = rng.i32();
        h.xa_step_log2 = rng.next() as u8;
        h.residual_frac = rng.next() as u8;
        h.x_min = rng.i32();
        h.x_max = rng.i32();
        let len = (rng.next() % 80) as usize;
        o.offset = (0..len).map(|_| rng.i32()).collect();
        o.inv_slope = (0..len).map(|_| rng.i32()).collect();
        o.ln_bias = (0..len).map(|_| rng.i32()).collect();
        o.u_min = (0..len).map(|_| rng.i32()).collect();
        o.residual = (0..(rng.next() % 400) as usize).map(|_| rng.next() as i16).collect();
        o.sensor = (0..(rng.next() % 30) as usize).map(|_| rng.i32()).collect();
        let c = o.view();
        let _ = c.validate();
        for _ in 0..8 {
            let code = match rng.next() % 3 {
                0 => rng.next() as u32,
                1 => (rng.next() % 65536) as u32,
                _ => u32::MAX,
            };
            if let Ok(r) = c.correct(code, rng.i32()) {
                for u in Unit::ALL {
                    let _ = r.value(u);
                }
            }
            let tc = rng.next() as u32;
            // The stage cache and the code table build from any content without a panic or a wrap.
            let _ = StageCache::new(c).correct_raw(code, tc);
            // The code table builds from any content without a panic or a wrap.
            let _ = CodeTable::new(c).correct_raw(code, tc);
            if let Ok(s) = c.stage_code(tc) {
                assert_eq!(c.correct_staged(&s, code), c.correct_raw(code, tc));
            }
        }
    }
}
