//! The measurement cycle on the host, against embedded-hal-mock: exact SPI transactions and delays,
//! injected faults (an SPI error, a code stuck at a rail, an open thermistor), and the reasons given in
//! `hal::cycle` for averaging codes before the correction.
//!
//! Runs in `cargo test --workspace` (the root package enables `hal` on logtrim) and in
//! `cargo test -p logtrim --features hal`.
#![cfg(feature = "hal")]

mod common;

mod hal_mocks;

use embedded_hal::spi::{self, Operation, SpiDevice};
use embedded_hal_mock::eh1::delay::{CheckedDelay, NoopDelay, Transaction as Delay};
use embedded_hal_mock::eh1::spi::Mock as SpiMock;
use hal_mocks::{conversions, Script};
use logtrim::calibration::{TemperatureRange, XRange};
use logtrim::error::SensorFault;
use logtrim::filter::Ema;
use logtrim::hal::adc::{self, AdcChannel};
use logtrim::hal::temperature::{from_fn, FromFn};
use logtrim::hal::{
    Channel, Coding, ConfigError, Corrector, Cycle, CycleConfig, CycleError, DigitalCelsius, ErrorKind,
    MeanCode, Measurement, Oversampling, SpiSar16,
};
use logtrim::{Calibration, Error, Unit};

// ---------------------------------------------------------------------------------------------------------
// Fixtures

/// Level shift and slope of the nominal test unit: x = (code − L)/(S·T_K/298.15).
const L: u32 = 32_768;
const S: f32 = 2_000.0;

/// A nominal 16-bit unit calibrated over 0…50 °C with 5 K of extrapolation and an 8-code rail margin.
fn unit() -> Calibration {
    let mut c = Calibration::nominal(16, L as f32, S, 25.0);
    c.adc.rail_margin = 8;
    c.temperature = TemperatureRange { min_c: 0.0, max_c: 50.0, extrapolation_k: 5.0 };
    c.x_range = XRange { min: -5.0, max: 5.0, min_sensitivity: 0.0 };
    c
}

/// A 10 kΩ NTC (B = 3950 K) in a divider with a 10 kΩ resistor to the reference, on a 16-bit converter.
/// β-parameter model, `1/T = 1/T0 + ln(R/R0)/B` (common practice; B = 3950 K is a typical catalogue value,
/// from memory). Codes within 35 of a rail are an open or shorted sensor.
fn ntc(code: u32) -> Result<f32, Error> {
    if code >= 65_500 {
        return Err(Error::Sensor(SensorFault::Open));
    }
    if code <= 35 {
        return Err(Error::Sensor(SensorFault::Short));
    }
    let r = 10_000.0 * code as f64 / (65_535.0 - code as f64);
    let inv_t = 1.0 / 298.15 + (r / 10_000.0).ln() / 3950.0;
    Ok((1.0 / inv_t - 273.15) as f32)
}

type Ntc = FromFn<fn(u32) -> Result<f32, Error>>;
type MockCycle<const N: usize> = Cycle<SpiSar16<SpiMock<u8>>, SpiSar16<SpiMock<u8>>, Ntc, Calibration, N>;

fn mock_cycle<const N: usize>(
    log: &[u16],
    temp: &[u16],
    cal: Option<Calibration>,
    cfg: CycleConfig,
) -> MockCycle<N> {
    let log = SpiSar16::new(SpiMock::new(&conversions(log)));
    let temp = SpiSar16::new(SpiMock::new(&conversions(temp)));
    let sensor: Ntc = from_fn(ntc);
    Cycle::new(log, temp, sensor, cal, cfg.check::<N>().unwrap())
}

/// Checks that every expected transaction happened.
fn finish<const N: usize>(cycle: MockCycle<N>) {
    let (log, temp, _, _) = cycle.release();
    log.release().done();
    temp.release().done();
}

/// The code the nominal unit gives at x and 25 °C.
fn code_at(x: f32) -> u16 {
    (L as f32 + S * x).round() as u16
}

/// A measurement has a value exactly when it has no error and its flags allow one.
/// A measurement without a value (nor x), consistent, and with which of its two channels still gave a
/// reading (data, kept beside the fault).
fn no_value(m: &Measurement, log_read: bool, temperature_read: bool) {
    assert_eq!(m.value(), None);
    assert_eq!(m.x(), None);
    assert_eq!(m.log_code().is_some(), log_read, "{m:?}");
    assert_eq!(m.temperature_c().is_some(), temperature_read, "{m:?}");
    assert!(consistent(m));
}

fn consistent(m: &Measurement) -> bool {
    m.value().is_some() == m.error().is_none()
        && m.value().is_some() == m.status().allows_value()
        && m.value().is_some() == m.x().is_some()
}

/// An SPI device that forwards `ok` transactions to `inner`, then fails every one with `ErrorKind::Other`.
struct FailAfter<D> {
    inner: D,
    ok: usize,
}

impl<D: SpiDevice<Error = spi::ErrorKind>> spi::ErrorType for FailAfter<D> {
    type Error = spi::ErrorKind;
}

impl<D: SpiDevice<Error = spi::ErrorKind>> SpiDevice for FailAfter<D> {
    fn transaction(&mut self, ops: &mut [Operation<'_, u8>]) -> Result<(), Self::Error> {
        if self.ok == 0 {
            return Err(spi::ErrorKind::Other);
        }
        self.ok -= 1;
        self.inner.transaction(ops)
    }
}

// ---------------------------------------------------------------------------------------------------------
// A clean cycle: exact transactions and delays, values against published facts

#[test]
fn clean_cycle_with_exact_transactions_and_delays() {
    let c1 = code_at(1.0);
    // A spike in the middle of the burst: the median drops it.
    let log = [c1, c1 + 2, c1 - 2, 60_000, c1];
    let cfg = CycleConfig {
        settle_us: 500,
        log: Oversampling { interval_us: 100, ..Oversampling::median(5) },
        temperature: Oversampling::SINGLE,
        unit: Unit::DbPower,
    };
    let mut cycle = mock_cycle::<8>(&log, &[32_768], Some(unit()), cfg);
    // Settle once, then an interval between each of the five log reads; none around the single
    // temperature read.
    let mut delay = CheckedDelay::new(&[
        Delay::delay_us(500),
        Delay::delay_us(100),
        Delay::delay_us(100),
        Delay::delay_us(100),
        Delay::delay_us(100),
    ]);
    let m = cycle.measure(&mut delay);
    delay.done();
    finish(cycle);

    assert!(m.status().is_clean(), "{:?}", m.status());
    assert_eq!(m.log_code(), Some(MeanCode::single(u32::from(c1))));
    // The divider at mid-scale: R_ntc = R_fixed, so the NTC is at its rated 25 °C (common practice).
    let t = m.temperature_c().unwrap();
    assert!((t - 25.0).abs() < 0.01, "{t}");
    // 1 Np is 20/ln 10 = 8.685889638 dB for amplitude ratios (ISO 80000-3), so 4.342944819 dB as a
    // power ratio (10·log10).
    let v = m.value().unwrap();
    assert!((f64::from(v) - 4.342_944_819).abs() < 2e-4, "{v}");
    assert_eq!(m.unit(), Unit::DbPower);
    assert!(consistent(&m));
}

/// One single-sample cycle in nepers of the log code `code`, its temperature from a 13-bit digital sensor in
/// 1/16 °C reading `counts`; every bus transaction used.
fn digital_sensor_cycle(code: u16, counts: u16) -> Measurement {
    let log = SpiSar16::new(SpiMock::new(&conversions(&[code])));
    let temp = SpiSar16::new(SpiMock::new(&conversions(&[counts])));
    let sensor = DigitalCelsius::new(13, true, 0.0625).unwrap();
    let cfg = CycleConfig::single(Unit::Nepers).check::<1>().unwrap();
    let mut cycle = Cycle::new(log, temp, sensor, Some(unit()), cfg);
    let m = cycle.measure(&mut NoopDelay::new());
    let (log, temp, _, _) = cycle.release();
    log.release().done();
    temp.release().done();
    m
}

#[test]
fn slope_is_proportional_to_absolute_temperature() {
    // kT/q is proportional to absolute temperature (SI: k/e = 8.617333262e-5 V/K): the same code 2000 above
    // the level shift reads 298.15/308.15 Np at 35 °C. The temperature comes from a digital sensor in
    // 1/16 °C: 35 °C is 560 counts.
    let m = digital_sensor_cycle(code_at(1.0), 560);
    assert_eq!(m.temperature_c(), Some(35.0));
    let x = f64::from(m.x().unwrap());
    assert!((x - 298.15 / 308.15).abs() < 1e-6, "{x}");
    assert!(m.status().is_clean());
}

#[test]
fn absorbance_of_ten_percent_transmittance_is_one() {
    // Common practice: A = −log10(I/I0), 10 % transmittance is 1 AU. x = ln 0.1 = −2.302585.
    let code = code_at(libm::logf(0.1));
    let cfg = CycleConfig::single(Unit::Absorbance);
    let mut cycle = mock_cycle::<1>(&[code], &[32_768], Some(unit()), cfg);
    let m = cycle.measure(&mut NoopDelay::new());
    finish(cycle);
    // One code is 1/2000 Np = 2.2e-4 AU: the rounding of the code to a whole number dominates.
    assert!((m.value().unwrap() - 1.0).abs() < 3e-4, "{:?}", m.value());
}

#[test]
fn trimmed_mean_keeps_the_fraction_of_the_mean() {
    // Four codes remain: 33000, 33000, 33001, 33001, mean 33000.5; x = (33000.5 − 32768)/2000 = 0.11625 at
    // 25 °C (nominal equation). Rounding the mean to a whole code would be 2.5e-4 Np off.
    let log = [33_001, 20_000, 33_000, 50_000, 33_001, 33_000];
    let cfg = CycleConfig { log: Oversampling::trimmed_mean(6, 1), ..CycleConfig::single(Unit::Nepers) };
    let mut cycle = mock_cycle::<6>(&log, &[32_768], Some(unit()), cfg);
    let m = cycle.measure(&mut NoopDelay::new());
    finish(cycle);
    assert_eq!(m.log_code(), MeanCode::new(132_002, 4));
    // The thermistor reads 24.9993 °C here, not exactly 25: that moves x by 3e-7.
    let x = m.x().unwrap();
    assert!((x - 0.116_25).abs() < 2e-6, "{x}");
}

#[test]
fn discarded_reads_and_temperature_oversampling() {
    // A converter that returns the previous conversion: the first read of each burst is stale (0 here) and
    // discarded. The temperature takes the median of three, 50 µs apart.
    let c = code_at(0.5);
    let cfg = CycleConfig {
        settle_us: 0,
        log: Oversampling { discard: 1, ..Oversampling::median(3) },
        temperature: Oversampling { discard: 1, interval_us: 50, ..Oversampling::median(3) },
        unit: Unit::Nepers,
    };
    let mut cycle = mock_cycle::<4>(&[0, c, c, c], &[0, 32_768, 65_535 - 2, 32_768], Some(unit()), cfg);
    let mut delay = CheckedDelay::new(&[Delay::delay_us(50), Delay::delay_us(50), Delay::delay_us(50)]);
    let m = cycle.measure(&mut delay);
    delay.done();
    finish(cycle);
    // The stale 0 never reaches the reduction (it would be saturated). But one kept temperature sample is an
    // open sensor (65533 ≥ 65500): every temperature sample counts, so the cycle has a sensor fault.
    assert_eq!(m.log_code(), Some(MeanCode::single(u32::from(c))));
    assert!(m.status().sensor_fault && !m.status().saturated);
    assert_eq!(m.error(), Some(CycleError::Temperature(Error::Sensor(SensorFault::Open))));
    assert_eq!(m.value(), None);
}

#[test]
fn twos_complement_converter_maps_to_offset_binary() {
    // Two's complement: 0x8000 is the most negative input, 0x7FFF the most positive, 0x0000 mid-scale.
    let spi = SpiMock::new(&conversions(&[0x8000, 0x7FFF, 0x0000, 0xFFFF]));
    let mut adc = SpiSar16::with_coding(spi, Coding::TwosComplement);
    assert_eq!(adc.read(), Ok(0));
    assert_eq!(adc.read(), Ok(65_535));
    assert_eq!(adc.read(), Ok(32_768));
    assert_eq!(adc.read(), Ok(32_767));
    adc.release().done();
}

// ---------------------------------------------------------------------------------------------------------
// Injected faults: the right status, never a value

#[test]
fn spi_error_is_a_converter_error() {
    let c = code_at(0.2);
    // The log converter answers twice, then its bus fails: the burst ends there; the temperature is still
    // read, exactly once.
    let inner = SpiMock::new(&conversions(&[c, c]));
    let log = SpiSar16::new(FailAfter { inner, ok: 2 });
    let temp = SpiSar16::new(SpiMock::new(&conversions(&[32_768])));
    let cfg = CycleConfig { log: Oversampling::median(5), ..CycleConfig::single(Unit::Nepers) };
    let sensor: Ntc = from_fn(ntc);
    let mut cycle = Cycle::new(log, temp, sensor, Some(unit()), cfg.check::<5>().unwrap());
    let m = cycle.measure(&mut NoopDelay::new());
    let (log, temp, _, _) = cycle.release();
    log.release().inner.done();
    temp.release().done();

    assert_eq!(m.error(), Some(CycleError::Converter { channel: Channel::Log, kind: ErrorKind::Bus }));
    assert!(m.status().converter_error);
    no_value(&m, false, true);
}

#[test]
fn spi_error_keeps_the_spi_kind() {
    let mut adc = SpiSar16::new(FailAfter { inner: SpiMock::new(&[]), ok: 0 });
    let e = adc.read().unwrap_err();
    assert_eq!(adc::Error::kind(&e), ErrorKind::Bus);
    assert_eq!(e.spi_kind(), spi::ErrorKind::Other);
    adc.release().inner.done();
}

#[test]
fn code_stuck_at_a_rail_is_saturated() {
    for rail in [65_535u16, 0, 65_530] {
        let cfg = CycleConfig { log: Oversampling::median(3), ..CycleConfig::single(Unit::DbPower) };
        let mut cycle = mock_cycle::<3>(&[rail; 3], &[32_768], Some(unit()), cfg);
        let m = cycle.measure(&mut NoopDelay::new());
        finish(cycle);
        assert!(m.status().saturated, "{rail}: {:?}", m.status());
        assert_eq!(m.error(), Some(CycleError::Correction(Error::Saturated { code: u32::from(rail) })));
        assert_eq!(m.value(), None, "{rail}");
        // The raw mean is still reported: it is data, not a value.
        assert_eq!(m.log_code(), Some(MeanCode::single(u32::from(rail))));
        assert!(consistent(&m));
    }
}

#[test]
fn a_rail_spike_is_dropped_by_the_median_but_kept_by_a_plain_mean() {
    let c = code_at(0.3);
    let burst = [c, c, 65_535, c, c];
    let median = CycleConfig { log: Oversampling::median(5), ..CycleConfig::single(Unit::Nepers) };
    let mut cycle = mock_cycle::<5>(&burst, &[32_768], Some(unit()), median);
    let m = cycle.measure(&mut NoopDelay::new());
    finish(cycle);
    assert!(m.status().is_clean());
    let mean = CycleConfig { log: Oversampling::trimmed_mean(5, 0), ..median };
    let mut cycle = mock_cycle::<5>(&burst, &[32_768], Some(unit()), mean);
    let m = cycle.measure(&mut NoopDelay::new());
    finish(cycle);
    assert!(m.status().saturated);
    assert_eq!(m.value(), None);
}

#[test]
fn open_thermistor_is_a_sensor_fault() {
    for (code, fault) in [(65_535u16, SensorFault::Open), (0, SensorFault::Short)] {
        let cfg = CycleConfig::single(Unit::Absorbance);
        let mut cycle = mock_cycle::<1>(&[code_at(-1.0)], &[code], Some(unit()), cfg);
        let m = cycle.measure(&mut NoopDelay::new());
        finish(cycle);
        assert!(m.status().sensor_fault);
        assert_eq!(m.error(), Some(CycleError::Temperature(Error::Sensor(fault))));
        no_value(&m, true, false);
    }
}

#[test]
fn several_faults_are_all_flagged() {
    // Saturated log channel and open thermistor in the same cycle: both flags, the first in cycle order.
    let mut cycle = mock_cycle::<1>(&[65_535], &[65_535], Some(unit()), CycleConfig::single(Unit::Nepers));
    let m = cycle.measure(&mut NoopDelay::new());
    finish(cycle);
    assert!(m.status().saturated && m.status().sensor_fault);
    assert_eq!(m.error(), Some(CycleError::Correction(Error::Saturated { code: 65_535 })));
}

#[test]
fn without_calibration_every_cycle_reads_but_gives_no_value() {
    let c = code_at(0.7);
    let cfg = CycleConfig { log: Oversampling::median(3), ..CycleConfig::single(Unit::Nepers) };
    let mut cycle = mock_cycle::<3>(&[c; 9], &[32_768; 3], None, cfg);
    assert_eq!(cycle.calibration_error(), Some(Error::NotCalibrated));
    for _ in 0..3 {
        let m = cycle.measure(&mut NoopDelay::new());
        assert!(m.status().not_calibrated);
        assert_eq!(m.error(), Some(CycleError::Correction(Error::NotCalibrated)));
        assert_eq!(m.value(), None);
        // What a calibration station needs is still there.
        assert_eq!(m.log_code(), Some(MeanCode::single(u32::from(c))));
        assert!(m.temperature_c().is_some());
        assert!(consistent(&m));
    }
    finish(cycle);
}

#[test]
fn calibration_installed_later_gives_values() {
    let c = code_at(0.7);
    let mut cycle = mock_cycle::<1>(&[c, c], &[32_768; 2], None, CycleConfig::single(Unit::Nepers));
    assert_eq!(cycle.measure(&mut NoopDelay::new()).value(), None);
    cycle.set_corrector(Some(unit()));
    assert_eq!(cycle.calibration_error(), None);
    let x = cycle.measure(&mut NoopDelay::new()).x().unwrap();
    assert!((x - 0.7).abs() < 1e-3, "{x}");
    finish(cycle);
}

#[test]
fn an_invalid_calibration_is_never_used() {
    let mut bad = unit();
    bad.adc.bits = 0;
    let mut cycle = mock_cycle::<1>(&[code_at(0.1)], &[32_768], Some(bad), CycleConfig::single(Unit::Nepers));
    let m = cycle.measure(&mut NoopDelay::new());
    finish(cycle);
    assert!(m.status().invalid_calibration);
    assert_eq!(m.value(), None);
    assert!(matches!(m.error(), Some(CycleError::Correction(Error::InvalidCalibration(_)))));
}

#[test]
fn temperature_extrapolated_and_out_of_range() {
    // Calibrated 0…50 °C with 5 K of extrapolation; the digital sensor reads 1/16 °C.
    for (counts, extrapolated, out) in
        [(25 * 16, false, false), (53 * 16, true, false), (56 * 16, false, true)]
    {
        let m = digital_sensor_cycle(code_at(0.5), counts);
        assert_eq!(m.status().temperature_extrapolated, extrapolated, "{counts}");
        assert_eq!(m.status().temperature_out_of_range, out, "{counts}");
        assert_eq!(m.value().is_some(), !out, "{counts}");
        assert!(consistent(&m));
    }
}

#[test]
fn below_and_above_the_calibrated_range() {
    // The x range is −5…5 Np.
    for (x, below) in [(-6.0f32, true), (6.0, false)] {
        let mut cycle =
            mock_cycle::<1>(&[code_at(x)], &[32_768], Some(unit()), CycleConfig::single(Unit::Nepers));
        let m = cycle.measure(&mut NoopDelay::new());
        finish(cycle);
        assert_eq!(m.status().below_range, below);
        assert_eq!(m.status().above_range, !below);
        assert_eq!(m.value(), None);
    }
}

#[test]
fn too_many_samples_for_the_buffer_is_an_error() {
    let cfg = CycleConfig { log: Oversampling::median(33), ..CycleConfig::single(Unit::Nepers) };
    assert_eq!(
        cfg.check::<32>(),
        Err(ConfigError::TooManySamples { channel: Channel::Log, samples: 33, capacity: 32 })
    );
    let cfg = CycleConfig { temperature: Oversampling::median(4), ..CycleConfig::single(Unit::Nepers) };
    assert_eq!(cfg.check::<8>(), Err(ConfigError::EvenMedian { channel: Channel::Temperature, samples: 4 }));
}

// ---------------------------------------------------------------------------------------------------------
// Why codes are averaged first

/// A unit with a strong bias-current bend at the low end.
fn bent_unit() -> Calibration {
    common::bent(0.0)
}

#[test]
fn averaging_codes_first_avoids_the_bias_of_a_bend() {
    // In the low-end bend at 85 °C, symmetric noise of up to ±200 codes (σ ≈ 120) around a noise-free code. The f64
    // reference of the correction (`correct_f64`, the host's independent evaluation) gives the truth.
    let cal = bent_unit();
    let t = 85.0f32;
    let c0 = cal.forward_code_f64(-5.0, f64::from(t)).round() as u32;
    let truth = cal.correct_f64(f64::from(c0), f64::from(t)).unwrap().x;
    let offsets = [-200i32, -100, -40, 0, 40, 100, 200];
    let codes: Vec<u32> = offsets.iter().map(|&o| (c0 as i32 + o) as u32).collect();

    // The cycle: codes averaged, one correction.
    let cfg = CycleConfig { log: Oversampling::trimmed_mean(7, 0), ..CycleConfig::single(Unit::Nepers) };
    let sensor = DigitalCelsius::new(13, true, 0.0625).unwrap();
    let temp = Script(vec![(t * 16.0) as u32].into_iter());
    let mut cycle =
        Cycle::new(Script(codes.clone().into_iter()), temp, sensor, Some(cal), cfg.check::<7>().unwrap());
    let m = cycle.measure(&mut NoopDelay::new());
    let cycle_err = (f64::from(m.x().unwrap()) - truth).abs();

    // The other order: every sample corrected, results averaged.
    let xs: Vec<f64> = codes.iter().map(|&c| f64::from(cal.correct(c, t).unwrap().x)).collect();
    let results_err = (xs.iter().sum::<f64>() / xs.len() as f64 - truth).abs();

    assert!(cycle_err < 2e-5, "codes-first error {cycle_err}");
    assert!(results_err > 10.0 * cycle_err, "results-first error {results_err} vs {cycle_err}");
}

// ---------------------------------------------------------------------------------------------------------
// The display filter across cycles

#[test]
fn display_filter_restarts_after_a_fault() {
    let (a, b) = (code_at(1.0), code_at(2.0));
    // good, good (step), fault (open thermistor), good.
    let log = [a, b, b, b];
    let temp = [32_768, 32_768, 65_535, 32_768];
    let cfg = CycleConfig::single(Unit::Nepers);
    let mut cycle = mock_cycle::<1>(&log, &temp, Some(unit()), cfg);
    let mut ema = Ema::new(4.0).unwrap();
    let mut shown = Vec::new();
    for _ in 0..4 {
        let m = cycle.measure(&mut NoopDelay::new());
        shown.push(ema.feed(m.x()).unwrap());
    }
    finish(cycle);
    let first = shown[0].unwrap();
    assert!((first - 1.0).abs() < 1e-3, "{first}");
    // One step of τ = 4: 1 − e^(−1/4) = 22.1 % of the way from 1 to 2.
    let second = shown[1].unwrap();
    assert!((second - 1.221).abs() < 2e-3, "{second}");
    assert_eq!(shown[2], None);
    // After the fault the reading is shown as it is, not blended with what came before.
    let fourth = shown[3].unwrap();
    assert!((fourth - 2.0).abs() < 1e-3, "{fourth}");
}

// ---------------------------------------------------------------------------------------------------------
// Independent inputs: random bursts, random temperatures, random calibrations' codes

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(256))]

    /// Any codes, any temperature code, median or trimmed mean: no panic, and a value exactly when no flag
    /// forbids one; a value always comes with finite x and temperature.
    #[test]
    fn any_burst_gives_a_consistent_measurement(
        codes in proptest::collection::vec(0u32..70_000, 7),
        temp_code in 0u32..65_536,
        median in proptest::bool::ANY,
        unit_index in 0usize..7,
    ) {
        let log = if median { Oversampling::median(7) } else { Oversampling::trimmed_mean(7, 2) };
        let cfg = CycleConfig { log, ..CycleConfig::single(Unit::ALL[unit_index]) };
        let sensor: Ntc = from_fn(ntc);
        let mut cycle = Cycle::new(
            Script(codes.clone().into_iter()),
            Script(vec![temp_code].into_iter()),
            sensor,
            Some(bent_unit()),
            cfg.check::<7>().unwrap(),
        );
        let m = cycle.measure(&mut NoopDelay::new());
        proptest::prop_assert!(consistent(&m), "{:?}", m);
        if let Some(v) = m.value() {
            proptest::prop_assert!(v.is_finite());
            proptest::prop_assert!(m.temperature_c().is_some_and(f32::is_finite));
        }
    }

    /// The median commutes with the correction: the cycle's median reading equals the median of the
    /// samples corrected one by one (the correction is monotone in the code at one temperature).
    #[test]
    fn median_commutes_with_the_correction(
        codes in proptest::collection::vec(3_000u32..62_000, 5),
        t in -20.0f32..85.0,
    ) {
        let cal = bent_unit();
        let mut xs: Vec<f32> = Vec::new();
        for &c in &codes {
            match cal.correct(c, t) {
                Ok(r) => xs.push(r.x),
                Err(_) => return Ok(()), // a sample outside the range: the claim is about values
            }
        }
        xs.sort_by(f32::total_cmp);
        let cfg = CycleConfig { log: Oversampling::median(5), ..CycleConfig::single(Unit::Nepers) };
        let sensor = from_fn(move |_| Ok(t));
        let mut cycle = Cycle::new(
            Script(codes.clone().into_iter()),
            Script(vec![0].into_iter()),
            sensor,
            Some(cal),
            cfg.check::<5>().unwrap(),
        );
        let m = cycle.measure(&mut NoopDelay::new());
        proptest::prop_assert_eq!(m.x(), Some(xs[2]));
    }

    /// A mean with a fraction lies between the corrections of its two neighbouring codes.
    #[test]
    fn fractional_mean_lies_between_its_neighbours(
        base in 3_000u32..62_000,
        extra in 1u64..16,
        t in -20.0f32..85.0,
    ) {
        let cal = bent_unit();
        let (lo, hi) = (cal.correct(base, t), cal.correct(base + 1, t));
        if let (Ok(lo), Ok(hi)) = (lo, hi) {
            let m = MeanCode::new(u64::from(base) * 16 + extra, 16).unwrap();
            let x = Corrector::correct(&cal, m, t).unwrap().x;
            proptest::prop_assert!(x >= lo.x && x <= hi.x, "{} not in {}..{}", x, lo.x, hi.x);
        }
    }
}
