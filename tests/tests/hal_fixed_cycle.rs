//! The measurement cycle with the integer fixed-point corrector, on the tables the host builds for a fitted
//! unit, against embedded-hal-mock (as `firmware-lib/tests/hal_cycle.rs` does for the f32 corrector): the
//! same SPI transactions and delays whichever corrector is installed, the fixed cycle's reading within
//! ¼ LSB-equivalent of the f32 cycle's, the cost of interpolating a fractional mean measured against the f64
//! reference at the exact mean, and faults reported as statuses. Also a fully integer board: the log code
//! and a raw NTC code, both through the fixed calibration's tables.
//!
//! LSB-equivalent: an error in x divided by ∂x/∂code of the f64 reference ([`Calibration::correct_f64`]),
//! the unit `logtrim verify` uses.

#[path = "../../firmware-lib/tests/hal_mocks/mod.rs"]
mod hal_mocks;

use embedded_hal_mock::eh1::delay::{CheckedDelay, NoopDelay, Transaction as Delay};
use embedded_hal_mock::eh1::spi::Mock as SpiMock;
use hal_mocks::{conversions, Script};
use logtrim::error::SensorFault;
use logtrim::fixed::FixedCalibration;
use logtrim::hal::temperature::{from_fn, FromFn};
use logtrim::hal::{
    Corrector, Cycle, CycleConfig, FixedSensorTable, Measurement, Oversampling, SpiSar16, TemperatureChannel,
};
use logtrim::{Beta, Calibration, Divider, Error, Placement, SensorElement, TemperatureSensor, Unit};
use logtrim_host::calfile::CalFile;
use logtrim_host::demo::fit_data;
use logtrim_host::fit::{fit, FitOptions};
use logtrim_host::frontend::preset;
use logtrim_host::simulate::{simulate, Plan};
use logtrim_host::tables::{FixedTables, TableOptions};

/// The outdoor gas detector preset (strong bias-current bend at the hot low end), fitted from a simulated
/// chamber run, and its default tables.
fn unit() -> (Calibration, FixedTables) {
    let fe = preset("gas-uncompensated").unwrap();
    let sim = simulate(&fe, &Plan { validation_count: 10, ..Plan::default() }).unwrap();
    let cal = fit(&fit_data(&sim.chamber, 0).unwrap(), &FitOptions::default()).unwrap().calibration;
    let tables = CalFile::new(cal, None).fixed_tables(&TableOptions::default()).unwrap();
    (cal, tables)
}

/// A 10 kΩ NTC (β = 3950 K at 25 °C, typical catalogue values, common practice) on the low side of a 10 kΩ
/// ratiometric divider, read by a 16-bit converter; codes within 64 of a rail are a broken sensor.
fn ntc() -> TemperatureSensor {
    let beta = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 };
    let divider = Divider::ratiometric(Placement::LowSide, 10_000.0, 16).with_margins(64, 64);
    TemperatureSensor::new(SensorElement::NtcBeta(beta), divider, -40.0, 125.0)
}

/// The sensor's code at a temperature, found by bisection on its own (monotone) code → °C function. A code
/// outside the model's span counts as beyond the end of the span it lies next to.
fn ntc_code(t: f64) -> u16 {
    let s = ntc();
    let rising = s.celsius_f64(45_000).unwrap() > s.celsius_f64(20_000).unwrap();
    let below = |code: u32| match s.celsius_f64(code) {
        Ok(v) => (v < t) == rising,
        Err(_) => code < 32_768,
    };
    let (mut lo, mut hi) = (0u32, 65_535u32);
    while hi - lo > 1 {
        let mid = (lo + hi) / 2;
        if below(mid) {
            lo = mid
        } else {
            hi = mid
        }
    }
    lo as u16
}

type Ntc = FromFn<Box<dyn Fn(u32) -> Result<f32, Error>>>;

fn sensor() -> Ntc {
    let s = ntc();
    from_fn(Box::new(move |code| s.celsius(code)))
}

/// One cycle over mocked converters with a corrector; every expected transaction and delay must happen.
fn mocked<C: Corrector>(
    log: &[u16],
    temp: &[u16],
    corrector: Option<C>,
    cfg: CycleConfig,
    delays: &[u32],
) -> Measurement {
    let log_spi = SpiSar16::new(SpiMock::new(&conversions(log)));
    let temp_spi = SpiSar16::new(SpiMock::new(&conversions(temp)));
    let mut cycle = Cycle::new(log_spi, temp_spi, sensor(), corrector, cfg.check::<16>().unwrap());
    let expected: Vec<Delay> = delays.iter().map(|&us| Delay::delay_us(us)).collect();
    let mut delay = CheckedDelay::new(&expected);
    let m = cycle.measure(&mut delay);
    delay.done();
    let (log_spi, temp_spi, _, _) = cycle.release();
    log_spi.release().done();
    temp_spi.release().done();
    m
}

/// The log code of the unit at x and a temperature (its fitted model's forward direction).
fn code_at(cal: &Calibration, x: f64, t: f64) -> u16 {
    cal.forward_code_f64(x, t).round() as u16
}

#[test]
fn the_same_transactions_and_a_reading_within_a_quarter_lsb() {
    let (cal, tables) = unit();
    let fixed = tables.view();
    let cfg = CycleConfig {
        settle_us: 200,
        log: Oversampling { interval_us: 50, ..Oversampling::trimmed_mean(6, 1) },
        temperature: Oversampling::median(3),
        unit: Unit::DbPower,
    };
    let delays = [200, 50, 50, 50, 50, 50];
    for (x, t) in [(-4.0, 0.0), (-1.0, 25.0), (0.5, 60.0), (2.5, -10.0), (-6.0, 80.0)] {
        let c = code_at(&cal, x, t);
        // A spike each way, dropped by the trim; the four kept codes have a fractional mean.
        let log = [c, c + 1, 65_000, c + 3, 100, c + 1];
        let tc = ntc_code(t);
        let temp = [tc, tc + 1, tc];
        let a = mocked(&log, &temp, Some(cal), cfg, &delays);
        let b = mocked(&log, &temp, Some(fixed), cfg, &delays);
        assert!(a.status().is_clean() && b.status().is_clean(), "{:?} / {:?}", a.status(), b.status());
        assert_eq!((a.log_code(), a.temperature_c()), (b.log_code(), b.temperature_c()));
        assert!(a.fixed().is_none());
        let f = b.fixed().expect("the fixed path reports its integers");
        assert_eq!(b.x(), Some(f.x_q24 as f32 / (1u32 << 24) as f32));
        // Against each other, in LSB-equivalents of the reference at the exact mean.
        let mean = a.log_code().unwrap().sum() as f64 / f64::from(a.log_code().unwrap().count());
        let reference = cal.correct_f64(mean, f64::from(a.temperature_c().unwrap())).unwrap();
        let lsb = |m: &Measurement| (f64::from(m.x().unwrap()) - reference.x) / reference.dx_dcode;
        let diff = (f64::from(a.x().unwrap()) - f64::from(b.x().unwrap())).abs() / reference.dx_dcode;
        eprintln!("x {x} at {t} °C: f32 {:+.4} LSB, fixed {:+.4} LSB, apart {diff:.4} LSB", lsb(&a), lsb(&b));
        assert!(diff <= 0.25, "{diff} LSB apart at x {x}, {t} °C");
        // The value in dB follows x (10/ln 10 dB per neper for power ratios, ISO 80000-3).
        let db = f64::from(b.value().unwrap());
        assert!((db - 10.0 / std::f64::consts::LN_10 * f64::from(b.x().unwrap())).abs() < 1e-4, "{db}");
        assert_eq!(f.frac_bits, 24);
        assert!((f.value as f64 / f64::from(1u32 << 24) - db).abs() < 1e-5);
    }
}

fn scripted<C: Corrector>(log: Vec<u32>, t: f32, corrector: C, cfg: CycleConfig) -> Measurement {
    let sensor = from_fn(move |_| Ok(t));
    let mut cycle = Cycle::new(
        Script(log.into_iter()),
        Script(vec![0].into_iter()),
        sensor,
        Some(corrector),
        cfg.check::<16>().unwrap(),
    );
    cycle.measure(&mut NoopDelay::new())
}

#[test]
fn over_the_whole_range_the_fixed_cycle_agrees_with_the_f32_cycle() {
    // Bursts of 16 codes spread over ±3 codes around base codes across the converter, at temperatures
    // across the accepted range: means with every kind of fraction. Each cycle's x against the f64 reference
    // at the exact mean, and the two cycles against each other.
    let (cal, tables) = unit();
    let fixed = tables.view();
    let cfg = CycleConfig { log: Oversampling::trimmed_mean(16, 0), ..CycleConfig::single(Unit::Nepers) };
    let t = cal.temperature;
    let (lo, hi) = (t.min_c - t.extrapolation_k, t.max_c + t.extrapolation_k);
    let (mut worst_apart, mut worst_fixed, mut worst_f32, mut worst_rounded) =
        (0.0f64, 0.0f64, 0.0f64, 0.0f64);
    let (mut compared, mut edge) = (0, 0);
    let mut state = 99u32;
    let mut next = move || {
        state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        state >> 8
    };
    for k in 0..=20 {
        let temp = lo + (hi - lo) * k as f32 / 20.0;
        for base in (400u32..65_200).step_by(373) {
            let burst: Vec<u32> = (0..16).map(|_| base + next() % 7).collect();
            let a = scripted(burst.clone(), temp, cal, cfg);
            let b = scripted(burst.clone(), temp, fixed, cfg);
            let m = a.log_code().unwrap();
            let mean = m.sum() as f64 / f64::from(m.count());
            match (a.x(), b.x()) {
                (Some(xa), Some(xb)) => {
                    let r = cal.correct_f64(mean, f64::from(temp)).unwrap();
                    let lsb = |x: f64| ((x - r.x) / r.dx_dcode).abs();
                    worst_apart = worst_apart.max(((f64::from(xa) - f64::from(xb)) / r.dx_dcode).abs());
                    worst_f32 = worst_f32.max(lsb(f64::from(xa)));
                    worst_fixed = worst_fixed.max(lsb(f64::from(xb)));
                    // What correcting the mean rounded to a whole code would cost instead.
                    let mc = (temp * 1000.0).round() as i32;
                    if let Ok(rr) = fixed.correct(mean.round() as u32, mc) {
                        worst_rounded = worst_rounded.max(lsb(f64::from(rr.x) / f64::from(1u32 << 24)));
                    }
                    compared += 1;
                }
                (None, None) => {}
                _ => {
                    // One gives a value, the other not: only within a code of an edge of the reference's own
                    // status (the range ends, the sensitivity limit, the rails).
                    let status =
                        |c: f64| cal.correct_f64(c, f64::from(temp)).map(|_| ()).map_err(|e| e.name());
                    let here = status(mean);
                    assert!(
                        status(mean - 1.0) != here || status(mean + 1.0) != here,
                        "statuses differ away from an edge: mean {mean} at {temp} °C: {:?} / {:?}",
                        a.error(),
                        b.error()
                    );
                    edge += 1;
                }
            }
        }
    }
    eprintln!(
        "{compared} readings: worst f32 {worst_f32:.4} LSB, fixed {worst_fixed:.4} LSB (rounding the mean instead: \
         {worst_rounded:.4} LSB), apart {worst_apart:.4} LSB; {edge} at an edge"
    );
    assert!(compared > 2000, "{compared}");
    assert!(worst_apart <= 0.25, "{worst_apart} LSB apart");
    assert!(worst_fixed <= 0.25, "fixed {worst_fixed} LSB from the reference");
    // Interpolating the fraction is worth it: rounding the mean costs up to half a code.
    assert!(worst_rounded > 0.4 && worst_fixed < 0.5 * worst_rounded, "{worst_rounded} vs {worst_fixed}");
}

#[test]
fn faults_give_statuses_on_the_fixed_path() {
    // The fit allows no extrapolation beyond its chamber's temperatures; allow 3 K here (a choice the
    // calibration file makes) to see the flag.
    let (mut cal, _) = unit();
    cal.temperature.extrapolation_k = 3.0;
    let tables = CalFile::new(cal, None).fixed_tables(&TableOptions::default()).unwrap();
    let fixed = tables.view();
    let cfg = CycleConfig::single(Unit::Nepers);
    let room = ntc_code(25.0);
    let c = code_at(&cal, 0.0, 25.0);
    let m = mocked(&[c], &[room], Some(fixed), cfg, &[]);
    assert!(m.status().is_clean(), "{:?}", m.status());
    // A code stuck at the rail.
    let m = mocked(&[65_535], &[room], Some(fixed), cfg, &[]);
    assert!(m.status().saturated && m.value().is_none() && m.fixed().is_none());
    // An open thermistor (the divider's input at the rail): no temperature, no value.
    let m = mocked(&[c], &[65_535], Some(fixed), cfg, &[]);
    assert!(m.status().sensor_fault && m.value().is_none());
    // Hotter than the calibrated range and its extrapolation.
    let tr = cal.temperature;
    let (max, ext) = (f64::from(tr.max_c), f64::from(tr.extrapolation_k));
    let m = mocked(&[c], &[ntc_code(max + ext + 3.0)], Some(fixed), cfg, &[]);
    assert!(m.status().temperature_out_of_range && m.value().is_none(), "{:?}", m.status());
    // Within the extrapolation: a value, flagged.
    let hot = max + 0.5 * ext;
    let m = mocked(&[code_at(&cal, 0.0, hot)], &[ntc_code(hot)], Some(fixed), cfg, &[]);
    assert!(m.status().temperature_extrapolated && m.value().is_some(), "{:?} at {hot} °C", m.status());
    // Far above and below the calibrated x range.
    let m = mocked(&[code_at(&cal, 6.0, 25.0).min(65_000)], &[room], Some(fixed), cfg, &[]);
    assert!(m.status().above_range || m.status().saturated, "{:?}", m.status());
    let m = mocked(&[code_at(&cal, -12.0, 80.0).max(200)], &[ntc_code(80.0)], Some(fixed), cfg, &[]);
    assert!(m.status().below_range, "{:?}", m.status());
    // Tables that fail their check are never used; no tables at all is "not calibrated".
    let mut bad = tables.clone();
    bad.inv_slope[3] = 0;
    let m = mocked(&[c], &[room], Some(bad.view()), cfg, &[]);
    assert!(m.status().invalid_calibration && m.value().is_none());
    let m = mocked::<FixedCalibration<'_>>(&[c], &[room], None, cfg, &[]);
    assert!(m.status().not_calibrated && m.log_code().is_some() && m.value().is_none());
}

#[test]
fn a_fully_integer_board_reads_its_thermistor_through_the_fixed_tables() {
    // The log code and the raw NTC code both go through the fixed calibration's tables; the f32 board
    // converts the NTC code with the sensor's own f32 function. Same transactions, readings within ¼ LSB.
    let (cal, _) = unit();
    let mut file = CalFile::new(cal, None);
    file.temperature_sensor = Some(ntc());
    let tables = file.fixed_tables(&TableOptions::default()).unwrap();
    let fixed = tables.view();
    let board_sensor = FixedSensorTable(fixed);
    let cfg = CycleConfig::single(Unit::Absorbance).check::<1>().unwrap();
    for (x, t) in [(-3.0, 5.0), (0.0, 25.0), (1.5, 70.0)] {
        let (c, tc) = (code_at(&cal, x, t), ntc_code(t));
        let f32_t = ntc().celsius(u32::from(tc)).unwrap();
        let fixed_t = board_sensor.celsius(u32::from(tc)).unwrap();
        assert!((f32_t - fixed_t).abs() < 0.005, "{f32_t} vs {fixed_t} °C");
        let mut fixed_cycle = Cycle::new(
            SpiSar16::new(SpiMock::new(&conversions(&[c]))),
            SpiSar16::new(SpiMock::new(&conversions(&[tc]))),
            board_sensor,
            Some(fixed),
            cfg,
        );
        let b = fixed_cycle.measure(&mut NoopDelay::new());
        let (l, tt, _, _) = fixed_cycle.release();
        l.release().done();
        tt.release().done();
        let a = mocked(&[c], &[tc], Some(cal), CycleConfig::single(Unit::Absorbance), &[]);
        let r = cal.correct_f64(f64::from(c), f64::from(f32_t)).unwrap();
        let apart = (f64::from(a.x().unwrap()) - f64::from(b.x().unwrap())).abs() / r.dx_dcode;
        assert!(apart <= 0.25, "{apart} LSB at x {x}, {t} °C");
        // Absorbance is −log10 of the ratio (common practice): −x/ln 10.
        let want = -f64::from(b.x().unwrap()) / std::f64::consts::LN_10;
        assert!((f64::from(b.value().unwrap()) - want).abs() < 1e-6);
    }
    // An open thermistor through the table is a sensor fault.
    assert_eq!(board_sensor.celsius(65_535), Err(Error::Sensor(SensorFault::Open)));
}
