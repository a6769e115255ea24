//! Unit tests of the fixed path on hand-built tables: statuses at every extreme, exact values where the
//! tables make them exact, unit conversions against published values, and no panic on garbage tables.
//! (Accuracy against the f64 model is the host's job: `host-tool/tests/fixed_tables.rs` and `logtrim verify`.)

use std::vec;

use super::*;

const Q24: i64 = 1 << 24;
/// The x range's ends: 27306 codes from the centre.
const X_LIM: i32 = 27306 * 3072;

use crate::test_units::{linear_fixed as linear, LinearFixed as Owned};

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
fn row_stage_is_bit_identical_to_the_stage() {
    let mut o = linear();
    // A residual with structure, so the collapse has something to get wrong.
    for (i, r) in o.residual.iter_mut().enumerate() {
        *r = ((i as i32 * 7919) % 2001 - 1000) as i16;
    }
    let c = o.view();
    for t in [-5000, 12_345, 55_000] {
        let s = c.stage_millicelsius(t).unwrap();
        let rs = c.row_stage(&s).unwrap();
        assert_eq!(rs.extrapolated(), s.extrapolated());
        for code in (0..=65535u32).step_by(7).chain([u32::MAX]) {
            assert_eq!(c.correct_row(&rs, code), c.correct_staged(&s, code), "code {code} at {t}");
        }
    }
    // Grids wider than the row's capacity are refused, not truncated.
    let mut wide = linear();
    wide.header.xa_knots = ROW_CAPACITY as u16;
    wide.residual = vec![0; 6 * (ROW_CAPACITY + 2)];
    let c = wide.view();
    let s = c.stage_millicelsius(0).unwrap();
    assert_eq!(c.row_stage(&s), Err(Error::InvalidCalibration(CalibrationDefect::Coefficient)));
}

/// A linear unit with a bias bend, a sensitivity limit and a structured residual: every step of the chain
/// does something.
fn bent() -> Owned {
    let mut o = linear();
    o.header.bias_bend = true;
    o.header.sensitivity_limit = true;
    o.ln_bias = (0..6).map(|i| -(3 << 22) + i * 40_000).collect();
    o.u_min = vec![-10_485_760; 6];
    o.header.x_min = -16 << 24;
    o.header.xa_origin = -18 << 24;
    o.header.xa_inv_step = 1_864_135;
    for (i, r) in o.residual.iter_mut().enumerate() {
        *r = ((i as i32 * 7919) % 2001 - 1000) as i16;
    }
    o
}

#[test]
fn stage_cache_is_bit_identical_to_the_direct_path() {
    for o in [linear(), bent()] {
        let c = o.view();
        let mut cache = StageCache::new(c);
        // Temperature codes repeated, alternating, in and out of the sensor's span; log codes over the whole
        // converter and beyond, so hits, misses and every error go through the cache.
        let temp_codes = [2000, 2000, 2001, 2000, 99, 4001, 9, 5000, 100, 4000, 3000, 3000];
        for (k, &tc) in temp_codes.iter().cycle().take(60).enumerate() {
            for code in (0..=65535u32).step_by(997 + k).chain([15, 16, 17, 65519, 65520, u32::MAX]) {
                assert_eq!(
                    cache.correct_raw(code, tc),
                    c.correct_raw(code, tc),
                    "code {code}, temp code {tc}"
                );
            }
        }
        // m°C keys never collide with temperature codes of the same number.
        for (tc, mc) in [(2000u32, 2000i32), (3000, 3000), (3000, -3000), (2000, 2000)] {
            for code in (0..=65535u32).step_by(1009) {
                assert_eq!(cache.correct(code, mc), c.correct(code, mc), "code {code} at {mc} m°C");
                assert_eq!(
                    cache.correct_raw(code, tc),
                    c.correct_raw(code, tc),
                    "code {code}, temp code {tc}"
                );
            }
        }
        for mc in [-5001, -5000, 55_000, 55_001, i32::MIN, i32::MAX] {
            assert_eq!(cache.correct(30_000, mc), c.correct(30_000, mc), "{mc} m°C");
        }
        cache.clear();
        assert_eq!(cache.correct(30_000, 20_000), c.correct(30_000, 20_000));
        assert_eq!(cache.calibration(), &c);
    }
}

#[test]
fn row_stage_fast_form_matches_at_the_scale_limits() {
    // The plain-arithmetic row form is only used where it is exact; near the scales' limits it must step
    // aside to the saturating form and still agree with the direct path.
    let mut rng = Rng(0x2545_f491_4f6c_dd1d);
    for _ in 0..300 {
        let mut o = bent();
        o.header.offset_frac = (rng.next() % 34) as u8;
        o.header.inv_slope_frac = (rng.next() % 66) as u8;
        o.header.residual_frac = (rng.next() % 34) as u8;
        o.header.adc_max_code = [65535, 1 << 20, u32::MAX][(rng.next() % 3) as usize];
        let off = rng.i32();
        let slope = rng.i32().max(1);
        o.offset = vec![off; 6];
        o.inv_slope = vec![slope; 6];
        for r in o.residual.iter_mut() {
            *r = rng.next() as i16;
        }
        let c = o.view();
        let mut cache = StageCache::new(c);
        for tc in [150, 2000, 3999] {
            for _ in 0..40 {
                let code = (rng.next() % (u64::from(o.header.adc_max_code) + 2)) as u32;
                assert_eq!(
                    cache.correct_raw(code, tc),
                    c.correct_raw(code, tc),
                    "code {code}, temp code {tc}"
                );
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
    o.ln_bias = vec![-(3 << 22); 6];
    o.u_min = vec![-10_485_760; 6];
    // A wider x̃ grid and x range, so the swamped low end (x̃ down to −12 Np) stays inside them.
    o.header.x_min = -16 << 24;
    o.header.xa_origin = -18 << 24;
    o.header.xa_inv_step = 1_864_135; // floor(2^24 / 9 Np)
    let c = o.view();
    assert_eq!(c.validate(), Ok(()));
    let u_min_code = 32769 - 20480; // u = −3.75 Np
    assert_eq!(c.correct(u_min_code - 1, 25_000), Err(Error::BelowRange));
    let at = c.correct(u_min_code, 25_000).unwrap();
    // x̃ = u + G(0.75 Np) = −3.75 + ln(1 − e^−0.75): e^−0.75 = 0.4723665527, ln 0.5276334473 = −0.6393535
    // (values from memory of standard tables); −4.3893535 · 2^24 = −73_641_131.
    assert!((i64::from(at.x) + 73_641_131).abs() < 32, "{}", at.x);
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
    check(&|o| o.header.t_inv_step = 0, D::Normalisation);
    check(&|o| o.header.t_origin += 1024, D::Normalisation);
    check(&|o| o.header.offset_frac = 31, D::Coefficient);
    check(&|o| o.header.offset_frac = 16, D::Coefficient); // 65535 · 2^16 does not fit below 2^31
    check(&|o| o.residual.pop().map_or((), |_| ()), D::Coefficient);
    check(&|o| o.header.bias_bend = true, D::Coefficient); // λ table missing
    check(&|o| o.inv_slope[2] = 0, D::ZeroSlope);
    check(&|o| o.sensor.truncate(10), D::Coefficient);
}

/// A seeded xorshift generator (Marsaglia 2003), so the garbage below is the same on every run.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }
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
        h.t_inv_step = rng.i32();
        h.offset_frac = rng.next() as u8;
        h.inv_slope_frac = rng.next() as u8;
        h.bias_bend = rng.next().is_multiple_of(2);
        h.sensitivity_limit = rng.next().is_multiple_of(2);
        h.xa_knots = rng.next() as u16;
        h.xa_origin = rng.i32();
        h.xa_inv_step = rng.i32();
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
            assert_eq!(StageCache::new(c).correct_raw(code, tc), c.correct_raw(code, tc));
        }
    }
}
