//! The fixed-point tables of hand-made and random (seeded) calibrations against the f64 reference
//! (`Calibration::correct_f64`, the same calibration evaluated in f64): sampled sweeps within ¼ LSB, status
//! agreement, every extreme input without overflow (tests build with overflow checks), sizes.
//! The exhaustive sweep is `logtrim verify` and the ignored test `exhaustive_verify_of_the_hand_units`.

mod common;

use common::{ntc, units};
use logtrim::fixed::universal;
use logtrim::{Calibration, Error};
use logtrim_host::tables::{self, TableOptions, TemperatureChannel};
use logtrim_host::verify::{self, VerifyOptions};

fn sampled() -> VerifyOptions {
    VerifyOptions { code_stride: 53, temp_stride: 40, ..Default::default() }
}

#[test]
fn hand_units_meet_a_quarter_lsb_sampled() {
    for (name, cal) in units::all() {
        let t = tables::build(&cal, None, &TableOptions::default()).unwrap();
        let r = verify::run(&cal, &t.view(), None, &sampled()).unwrap();
        eprintln!("{name}: {} bytes\n{r}", t.bytes());
        assert!(r.fixed_passed(), "{name}: {r}");
        assert!(r.f32_passed(), "{name}: {r}");
        assert!(r.fixed.errors.compared > 10_000, "{name}: too few points compared");
    }
}

#[test]
fn default_tables_fit_in_4_kib() {
    // The default set for a 16-bit ADC, universal tables included, with and without a sensor table.
    let channel = TemperatureChannel { codes: ntc::CODES, celsius: &ntc::celsius };
    for (name, cal) in units::all().into_iter().take(3) {
        let plain = tables::build(&cal, None, &TableOptions::default()).unwrap();
        let raw = tables::build(&cal, Some(&channel), &TableOptions::default()).unwrap();
        eprintln!(
            "{name}: {} bytes + {} universal; with the sensor table {} + {}",
            plain.bytes(),
            universal::BYTES,
            raw.bytes(),
            universal::BYTES
        );
        assert!(raw.bytes() + universal::BYTES <= 4096, "{name}");
    }
}

/// The reason the bias bend is removed before the residual table: over plain u, even 64 knots leave
/// errors of thousands of LSB on a unit with a strong hot bend (module docs of `logtrim::fixed`); 64 knots
/// is the most a stage row holds.
#[test]
fn a_plain_residual_table_cannot_hold_the_hot_bend() {
    let cal = units::hard_uncompensated();
    let opts = TableOptions { xa_knots: 64, bias_bend: false, ..Default::default() };
    // Either the surface does not even fit the residual's format (it spans tens of nepers), or it fits and
    // misses by more than 100 LSB.
    match tables::build(&cal, None, &opts) {
        Err(tables::TableError::Range { what: "residual", .. }) => {}
        Err(e) => panic!("{e}"),
        Ok(t) => {
            let r = verify::run(&cal, &t.view(), None, &sampled()).unwrap();
            assert!(r.fixed.errors.max_lsb > 100.0, "{r}");
        }
    }
}

#[test]
fn raw_temperature_channel_meets_a_quarter_lsb_sampled() {
    let channel = TemperatureChannel { codes: ntc::CODES, celsius: &ntc::celsius };
    for (name, cal) in [("hard_uncompensated", units::hard_uncompensated()), ("ideal", units::ideal())] {
        let t = tables::build(&cal, Some(&channel), &TableOptions::default()).unwrap();
        let s = t.sensor.as_ref().unwrap();
        // The sensor table itself, on every code of its span, in mK.
        let worst = (s.code_lo..=s.code_hi)
            .map(|c| {
                let got = f64::from(t.view().theta_from_code(c).unwrap()) / 1024.0 / 1000.0;
                (got - ntc::celsius(c).unwrap()).abs() * 1000.0
            })
            .fold(0.0, f64::max);
        let opts = VerifyOptions { code_stride: 131, temp_stride: 23, ..Default::default() };
        let r = verify::run(&cal, &t.view(), Some(&channel), &opts).unwrap();
        eprintln!("{name}: sensor table max error {worst:.3} mK, span {}..={}\n{r}", s.code_lo, s.code_hi);
        assert!(r.fixed_passed(), "{name}: {r}");
        // Faults are the sensor's own.
        assert_eq!(t.view().theta_from_code(3), Err(Error::Sensor(logtrim::error::SensorFault::Short)));
        assert_eq!(t.view().theta_from_code(4095), Err(Error::Sensor(logtrim::error::SensorFault::Open)));
    }
}

/// A sensor table of any number of segments builds (a span just past a multiple of the step left the last
/// segment's own control point to a few samples near its start, which least squares threw to −16 054 °C, past
/// the integer format), and reads the channel as the firmware would: the `photometer-ntc` preset's channel,
/// the one the table was refused for at 32 segments.
#[test]
fn a_sensor_table_of_any_size_builds_and_reads_its_channel() {
    let sensor = logtrim_host::frontend::preset("photometer-ntc").unwrap().firmware_sensor().unwrap();
    let max = sensor.divider.max_code().unwrap();
    let celsius = |c: u32| sensor.celsius_f64(c);
    let channel = TemperatureChannel { codes: 0..=max, celsius: &celsius };
    let cal = units::ideal();
    // (segments asked for, the step in codes they give over this channel's span of 148..=3991)
    let mut by_step: Vec<(usize, f64)> = Vec::new();
    for segments in [8, 12, 16, 24, 31, 32, 33, 48, 64, 96, 128] {
        let opts = TableOptions { sensor_segments: segments, ..Default::default() };
        let t =
            tables::build(&cal, Some(&channel), &opts).unwrap_or_else(|e| panic!("{segments} segments: {e}"));
        let s = t.sensor.as_ref().unwrap();
        // The table against the sensor's f64 curve at every code of its span, in K.
        let worst = (s.code_lo..=s.code_hi)
            .map(|c| {
                let got = f64::from(t.view().theta_from_code(c).unwrap()) / 1024.0 / 1000.0;
                (got - celsius(c).unwrap()).abs()
            })
            .fold(0.0, f64::max);
        eprintln!("{segments} segments: step 2^{}, worst {worst:.4} K", s.step_log2);
        assert!(worst.is_finite(), "{segments} segments");
        by_step.push((usize::from(s.step_log2), worst));
    }
    // A cubic spline's error falls steeply with its knot spacing (as its fourth power for a smooth curve,
    // common practice, from memory): at least threefold each time the step halves. A wild control point at
    // the end of the span would not fall.
    by_step.dedup_by_key(|p| p.0);
    for w in by_step.windows(2) {
        assert_eq!(w[0].0, w[1].0 + 1, "{by_step:?}");
        assert!(w[1].1 * 3.0 < w[0].1, "step 2^{} → 2^{}: {by_step:?}", w[0].0, w[1].0);
    }
}

/// Every extreme input on real tables: no panic, no wrap (overflow checks are on), and the same status as
/// the reference wherever the reference's status is not at an edge.
#[test]
fn extremes_do_not_overflow_and_agree() {
    for (name, cal) in units::all() {
        let t = tables::build(&cal, None, &TableOptions::default()).unwrap();
        let f = t.view();
        let max = cal.adc.max_code().unwrap();
        let rail = cal.adc.rail_margin;
        let h = f.header;
        let temps_mc = [
            i32::MIN,
            i32::MIN + 1,
            -273_150,
            (h.temp_lo >> 10) - 1,
            h.temp_lo >> 10,
            h.temp_min >> 10,
            h.temp_max >> 10,
            h.temp_hi >> 10,
            (h.temp_hi >> 10) + 1,
            i32::MAX - 1,
            i32::MAX,
        ];
        let mut codes: Vec<u32> =
            vec![0, 1, rail.saturating_sub(1), rail, max - rail, max - rail + 1, max, max + 1];
        codes.extend([u32::MAX - 1, u32::MAX]);
        codes.extend((0..=max).step_by(13));
        for &mc in &temps_mc {
            for &code in &codes {
                let got = f.correct(code, mc);
                let want = cal.correct_f64(f64::from(code), f64::from(mc) / 1000.0);
                match (&got, &want) {
                    (Ok(a), Ok(b)) => {
                        let lsb = (f64::from(a.x) / 16_777_216.0 - b.x).abs() / b.dx_dcode;
                        assert!(lsb < 0.25, "{name}: code {code} at {mc} m°C: {lsb} LSB");
                        assert_eq!(a.temperature_extrapolated, b.temperature_extrapolated);
                    }
                    (Err(a), Err(b)) => assert_eq!(a.name(), b.name(), "{name}: code {code} at {mc} m°C"),
                    _ => {
                        // Allowed only within a code of the reference's own status edge.
                        let near = [code.saturating_sub(1), code.saturating_add(1)].iter().any(|&c| {
                            cal.correct_f64(f64::from(c), f64::from(mc) / 1000.0).is_ok() != want.is_ok()
                        });
                        assert!(near, "{name}: code {code} at {mc} m°C: {got:?} vs {want:?}");
                    }
                }
                if let Ok(r) = got {
                    for u in logtrim::Unit::ALL {
                        let _ = r.value(u);
                    }
                }
            }
        }
    }
}

/// A seeded generator (xorshift64*, Vigna 2014) for the random calibrations.
struct Rng(u64);

impl Rng {
    fn unit(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn range(&mut self, lo: f64, hi: f64) -> f32 {
        (lo + (hi - lo) * self.unit()) as f32
    }
}

/// Calibrations drawn at random over the space a 16-bit log-ratio front end plausibly occupies, none of
/// them seen while choosing the table sizes: the default tables must hold every one to ¼ LSB.
fn random_unit(rng: &mut Rng) -> Calibration {
    use logtrim::calibration::{BiasTerm, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL};
    let slope = rng.range(4500.0, 6500.0);
    let span = 60_000.0 / slope; // nepers the converter holds at 25 °C
    let x_min = rng.range(-0.75 * f64::from(span), -0.45 * f64::from(span));
    let x_max = x_min + span * rng.range(0.75, 0.9);
    let lo = rng.range(-30.0, 5.0);
    let hi = lo + rng.range(50.0, 110.0);
    let mut c = Calibration::nominal(16, 0.0, slope, 25.0);
    c.adc.level_shift_code = 2000.0 - x_min * slope * 1.05;
    c.adc.rail_margin = 8;
    c.temperature = TemperatureRange { min_c: lo, max_c: hi, extrapolation_k: rng.range(0.0, 5.0) };
    c.x_range = XRange { min: x_min, max: x_max, min_sensitivity: rng.range(0.02, 0.3) };
    c.model.t_center_c = 0.5 * (lo + hi);
    c.model.t_half_span_k = 0.5 * (hi - lo);
    let half = f64::from(c.model.t_half_span_k);
    c.model.pole =
        if rng.unit() < 0.5 { 0.0 } else { (0.8 * half / (273.15 + f64::from(c.model.t_center_c))) as f32 };
    c.model.offset =
        Series::from_slice(&[rng.range(-300.0, 300.0), rng.range(-80.0, 80.0), rng.range(-10.0, 10.0)])
            .unwrap_or(Series::ZERO);
    c.model.slope =
        Series::from_slice(&[slope, rng.range(-50.0, 50.0), rng.range(-8.0, 8.0)]).unwrap_or(Series::ZERO);
    // Bulk resistance is positive at every temperature (a negative I·r term is unphysical; the fixed path
    // does not model the sensitivity falling at the high end that it would cause).
    let b0 = rng.range(0.0, 25.0);
    c.model.bulk = Series::from_slice(&[b0, b0 * rng.range(-0.5, 0.5)]).unwrap_or(Series::ZERO);
    // ln β rises by ln 2 per ~10 K (common practice): b1 ≈ 0.069·T_h.
    let b1 = (0.069 * half * rng.unit().mul_add(0.6, 0.7)) as f32;
    let hot_ln_beta = rng.range(f64::from(x_min) - 3.0, f64::from(x_min) + 3.5);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: hot_ln_beta - b1, ln_beta1: b1, reference: 0.0 };
    let mut r = Residual {
        nx: 4,
        nt: 3,
        x_center: 0.5 * (x_min + x_max),
        x_half_span: 0.5 * (x_max - x_min),
        ..Residual::OFF
    };
    for i in 0..4 {
        for j in 0..3 {
            r.coeffs[i * MAX_RESIDUAL + j] = rng.range(-0.004, 0.004) / (1 + i + j) as f32;
        }
    }
    c.model.residual = r;
    c
}

#[test]
fn random_units_meet_a_quarter_lsb_sampled() {
    let mut rng = Rng(0x5eed_1234_abcd_0001);
    let opts = VerifyOptions { code_stride: 53, temp_stride: 60, ..Default::default() };
    let mut done = 0;
    for k in 0..12 {
        let cal = random_unit(&mut rng);
        if cal.validate().is_err() {
            continue;
        }
        let t =
            tables::build(&cal, None, &TableOptions::default()).unwrap_or_else(|e| panic!("unit {k}: {e}"));
        let r = verify::run(&cal, &t.view(), None, &opts).unwrap();
        eprintln!(
            "random unit {k}: fixed {:.4} LSB, f32 {:.4} LSB, edges {}",
            r.fixed.errors.max_lsb, r.f32.errors.max_lsb, r.fixed.status.edge
        );
        assert!(r.fixed_passed(), "random unit {k}: {cal:?}\n{r}");
        done += 1;
    }
    assert!(done >= 10, "only {done} random units were valid");
}

#[test]
fn bad_options_and_calibrations_are_clear_errors() {
    let cal = units::hard_uncompensated();
    let e = tables::build(&cal, None, &TableOptions { t_knots: 2, ..Default::default() }).unwrap_err();
    assert!(e.to_string().contains("t_knots"), "{e}");
    let e = tables::build(&cal, None, &TableOptions { xa_knots: 1, ..Default::default() }).unwrap_err();
    assert!(e.to_string().contains("xa_knots"), "{e}");
    let mut bad = cal;
    bad.model.slope = logtrim::calibration::Series::ZERO;
    assert!(matches!(
        tables::build(&bad, None, &TableOptions::default()),
        Err(tables::TableError::Calibration(_))
    ));
    let nothing = |_c: u32| -> Result<f64, Error> { Err(Error::Sensor(logtrim::error::SensorFault::Open)) };
    let ch = TemperatureChannel { codes: 0..=4095, celsius: &nothing };
    let e = tables::build(&cal, Some(&ch), &TableOptions::default()).unwrap_err();
    assert!(matches!(e, tables::TableError::Sensor(_)), "{e}");
    let holes = |c: u32| -> Result<f64, Error> {
        if c == 2000 {
            Err(Error::NonFinite)
        } else {
            Ok(25.0)
        }
    };
    let ch = TemperatureChannel { codes: 0..=4095, celsius: &holes };
    assert!(tables::build(&cal, Some(&ch), &TableOptions::default())
        .unwrap_err()
        .to_string()
        .contains("hole"));
}

/// The full sweep of every code against the 0.05 K grid (minutes in debug builds): run with
/// `cargo test --release -p logtrim-host --test fixed_tables -- --ignored`.
#[test]
#[ignore]
fn exhaustive_verify_of_the_hand_units() {
    for (name, cal) in units::all() {
        let t = tables::build(&cal, None, &TableOptions::default()).unwrap();
        let r = verify::run(&cal, &t.view(), None, &VerifyOptions::default()).unwrap();
        eprintln!("{name}:\n{r}");
        assert!(r.passed(), "{name}: {r}");
    }
}

/// The per-sample path of a firmware with a slow temperature channel (`StageCache`, the window of the last
/// temperature) follows the direct path closely on real tables: every log code of the converter at
/// temperature codes across the NTC's span and beyond it, hits and misses interleaved. The same status
/// (or, next to an end of the x range, x within a 64th of the local code step of it), and x within a 64th
/// of the local code step (x's change to the next code) and 1e-6 Np; `verify` checks the cache against the
/// reference on its own.
#[test]
fn stage_cache_follows_the_direct_path_on_real_tables() {
    use logtrim::fixed::StageCache;
    use logtrim::Error;
    let channel = TemperatureChannel { codes: ntc::CODES, celsius: &ntc::celsius };
    let mut rng = Rng(0x0123_4567_89ab_cdef);
    // 1e-6 Np in Q24, and a 64th of the code step at `code`.
    let tol = 17i64;
    let step_tol = |f: &logtrim::fixed::FixedCalibration<'_>, code: u32, tc: u32, x: i64| {
        let n =
            f.correct_raw(code.saturating_add(1), tc).or_else(|_| f.correct_raw(code.saturating_sub(1), tc));
        n.map_or(0, |n| (i64::from(n.x) - x).abs() / 64) + tol
    };
    for (name, cal) in units::all().into_iter().take(3) {
        let t = tables::build(&cal, Some(&channel), &TableOptions::default()).unwrap();
        let f = t.view();
        let mut cache = StageCache::new(f);
        let (mut ok, mut compared, mut worst) = (0u64, 0u64, 0i64);
        let (lo, hi) = (i64::from(f.header.x_min), i64::from(f.header.x_max));
        for _ in 0..60 {
            let tc = (rng.unit() * 4200.0) as u32;
            for code in (0..=65535u32).step_by(1 + (rng.unit() * 13.0) as usize) {
                let direct = f.correct_raw(code, tc);
                let kept = cache.correct_raw(code, tc);
                match (kept, direct) {
                    (Ok(a), Ok(b)) => {
                        assert_eq!(a.temperature_extrapolated, b.temperature_extrapolated);
                        let (d, lim) =
                            ((i64::from(a.x) - i64::from(b.x)).abs(), step_tol(&f, code, tc, i64::from(b.x)));
                        assert!(
                            d <= lim,
                            "{name}: code {code}, temperature code {tc}: {d} Q24 units apart, limit {lim}"
                        );
                        worst = worst.max(d * 1000 / lim);
                    }
                    (Ok(a), Err(Error::BelowRange | Error::AboveRange))
                    | (Err(Error::BelowRange | Error::AboveRange), Ok(a)) => {
                        let x = i64::from(a.x);
                        let lim = step_tol(&f, code, tc, x);
                        assert!(
                            (x - lo).abs() <= lim || (x - hi).abs() <= lim,
                            "{name}: code {code}, temperature code {tc}: {kept:?} vs {direct:?}"
                        );
                    }
                    (a, b) => assert_eq!(a, b, "{name}: code {code}, temperature code {tc}"),
                }
                ok += u64::from(direct.is_ok());
                compared += 1;
            }
        }
        eprintln!(
            "{name}: the stage cache is at most {:.3} of its limit from the direct path",
            worst as f64 / 1000.0
        );
        assert!(ok > compared / 4, "{name}: only {ok} of {compared} readings were in range");
    }
}
