//! A measurement cycle on the host, against mocked SPI converters and a checked delay.
//!
//! The scenario (invented): a two-beam photometer in a water-quality station. A lamp shines through a
//! filter; a reference photodiode sees the lamp directly, a signal photodiode sees it through the sample
//! cell. The log-ratio front end turns the two photocurrents into `ln(I_sig/I_ref)`, so the lamp's own
//! drift cancels, and a 16-bit SAR converter on SPI digitises it. A 10 kΩ NTC in a divider on a second,
//! identical converter gives the front end's temperature. The firmware reports absorbance
//! `A = −log10(I_sig/I_ref)`.
//!
//! What happens, one cycle per line: the morning blank, three check standards while the cabinet warms up,
//! a bubble through the cell, an afternoon in the sun beyond the calibrated temperature range, a lamp that
//! fails, a thermistor plug that works loose, and a unit that boots without a calibration image.
//!
//! Run with `cargo run -p logtrim --features hal --example measurement_cycle`.

use embedded_hal_mock::eh1::delay::{CheckedDelay, Transaction as Delay};
use embedded_hal_mock::eh1::spi::{Mock as SpiMock, Transaction as Spi};
use logtrim::calibration::{BiasTerm, Series, TemperatureRange, XRange};
use logtrim::error::SensorFault;
use logtrim::filter::Ema;
use logtrim::hal::temperature::from_fn;
use logtrim::hal::{Cycle, CycleConfig, Measurement, Oversampling, SpiSar16, Status};
use logtrim::{Calibration, Error, Unit};

/// The divider: NTC from the reference to the input, 10 kΩ fixed resistor to ground.
const R_FIXED: f64 = 10_000.0;
/// The NTC: 10 kΩ at 25 °C, B = 3950 K (a typical catalogue part of the β-parameter model).
const R25: f64 = 10_000.0;
const B: f64 = 3950.0;

/// The board's thermistor linearisation: β-parameter model, and a code at a rail means a broken sensor.
fn thermistor_celsius(code: u32) -> Result<f32, Error> {
    match code {
        0..=40 => Err(Error::Sensor(SensorFault::Short)),
        65_495.. => Err(Error::Sensor(SensorFault::Open)),
        _ => {
            let c = f64::from(code);
            let r = R_FIXED * c / (65_535.0 - c);
            let inv_t = 1.0 / 298.15 + (r / R25).ln() / B;
            Ok((1.0 / inv_t - 273.15) as f32)
        }
    }
}

/// The converter code the thermistor divider gives at a temperature (for the simulation).
fn thermistor_code(celsius: f64) -> u16 {
    let r = R25 * (B * (1.0 / (celsius + 273.15) - 1.0 / 298.15)).exp();
    (65_535.0 * r / (r + R_FIXED)).round() as u16
}

/// This unit's calibration, as the line's calibration station would have written it: the nominal design
/// (16 bits, level shift at mid-scale, 1800 codes per neper at 25 °C) plus the unit's own terms.
fn unit_calibration() -> Calibration {
    let mut c = Calibration::nominal(16, 32_768.0, 1_800.0, 25.0);
    c.adc.rail_margin = 24;
    c.temperature = TemperatureRange { min_c: 5.0, max_c: 45.0, extrapolation_k: 5.0 };
    // Absorbance −0.4 … 3.0 AU is x = −6.9 … 0.9; the front end stops being usable where the op-amp's bias
    // current swamps the signal photocurrent.
    c.x_range = XRange { min: -7.0, max: 1.0, min_sensitivity: 0.2 };
    c.model.t_center_c = 25.0;
    c.model.t_half_span_k = 20.0;
    c.model.offset = Series::from_slice(&[35.0, 6.0]).unwrap_or(Series::ZERO); // pair mismatch and drift
    c.model.slope = Series::from_slice(&[1_800.0, 9.0]).unwrap_or(Series::ZERO); // what the tempco leaves
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -11.0, ln_beta1: 2.0, reference: 0.0 }; // ~17 ppm at 25 °C
    c
}

/// One cycle of the scenario: what the instrument sees.
struct Scene {
    what: &'static str,
    /// The sample's true absorbance, or `None` when the lamp is out.
    absorbance: Option<f64>,
    celsius: f64,
    /// A bubble blocks the beam for two of the sixteen conversions.
    bubble: bool,
    /// The thermistor plug is loose: the divider reads the reference.
    thermistor_open: bool,
}

const fn scene(what: &'static str, absorbance: f64, celsius: f64) -> Scene {
    Scene { what, absorbance: Some(absorbance), celsius, bubble: false, thermistor_open: false }
}

/// A little noise before the converter, the same pattern every burst (codes, σ ≈ 1.5). It dithers the
/// rounding, so the mean of a burst resolves fractions of a code.
const NOISE: [f64; 16] =
    [0.3, -1.2, 1.7, -0.6, 2.4, -2.1, 0.9, -0.2, 1.1, -1.8, 0.5, -0.9, 2.9, -2.6, 0.1, -0.4];

/// Sixteen conversions, 1.25 ms apart: 20 ms, one period of 50 Hz mains, whose hum then averages out
/// (common practice). The two lowest and highest are dropped. One settle of 2 ms after the lamp flash, and
/// the median of three temperature conversions.
fn cycle_config() -> CycleConfig {
    CycleConfig {
        settle_us: 2_000,
        log: Oversampling { interval_us: 1_250, ..Oversampling::trimmed_mean(16, 2) },
        temperature: Oversampling::median(3),
        unit: Unit::Absorbance,
    }
}

/// The delays one cycle asks for: the settle, then an interval between each pair of log conversions.
fn cycle_delays(cfg: &CycleConfig) -> Vec<Delay> {
    let mut d = vec![Delay::delay_us(cfg.settle_us)];
    d.extend((1..cfg.log.samples).map(|_| Delay::delay_us(cfg.log.interval_us)));
    d
}

/// One SPI transaction per conversion, the result clocked out MSB first.
fn conversion(code: u16) -> [Spi<u8>; 3] {
    [Spi::transaction_start(), Spi::read_vec(code.to_be_bytes().to_vec()), Spi::transaction_end()]
}

/// What the two converters return for a scene.
fn simulate(cal: &Calibration, s: &Scene) -> (Vec<u16>, Vec<u16>) {
    // The lamp out: the signal photocurrent is a millionth of the reference.
    let x = s.absorbance.map_or(-14.0, |a| -a * std::f64::consts::LN_10);
    let clean = cal.forward_code_f64(x, s.celsius);
    let log = NOISE
        .iter()
        .enumerate()
        .map(|(i, n)| {
            let blocked = s.bubble && (i == 5 || i == 6);
            let code = if blocked { clean - 2_500.0 } else { clean + n };
            code.round().clamp(0.0, 65_535.0) as u16 // the converter clips at its rails
        })
        .collect();
    let t = if s.thermistor_open { 65_535 } else { thermistor_code(s.celsius) };
    (log, vec![t; 3])
}

fn flags(s: &Status) -> String {
    let all = [
        (s.saturated, "saturated"),
        (s.below_range, "below range"),
        (s.above_range, "above range"),
        (s.temperature_extrapolated, "temperature extrapolated"),
        (s.temperature_out_of_range, "temperature out of range"),
        (s.sensor_fault, "sensor fault"),
        (s.not_calibrated, "not calibrated"),
        (s.invalid_calibration, "invalid calibration"),
        (s.converter_error, "converter error"),
        (s.config_error, "config error"),
    ];
    let set: Vec<&str> = all.iter().filter(|(on, _)| *on).map(|(_, name)| *name).collect();
    if set.is_empty() {
        "ok".to_string()
    } else {
        set.join(", ")
    }
}

fn show(what: &str, truth: Option<f64>, m: &Measurement, display: Option<f32>) {
    let opt = |v: Option<f32>, digits: usize| v.map_or("—".to_string(), |v| format!("{v:.digits$}"));
    println!(
        "{:<38} {:>7} {:>9} {:>7} {:>8} {:>8}  {}",
        what,
        truth.map_or("—".to_string(), |a| format!("{a:.3}")),
        m.log_code().map_or("—".to_string(), |c| format!("{:.2}", c.as_f32())),
        opt(m.temperature_c(), 1),
        opt(m.value(), 4),
        opt(display, 3),
        flags(&m.status()),
    );
}

/// Runs the scenes on one cycle whose converters are mocks primed with what the scenes produce, and
/// checks at the end that every SPI transaction and delay happened exactly as configured.
fn run(title: &str, cal: Option<Calibration>, scenes: &[Scene]) -> Result<(), Box<dyn std::error::Error>> {
    let cfg = cycle_config();
    let model = unit_calibration(); // the physics of the unit, whatever the firmware has loaded
    let (mut log_io, mut temp_io, mut delays) = (Vec::new(), Vec::new(), Vec::new());
    for s in scenes {
        let (log, temp) = simulate(&model, s);
        log_io.extend(log.into_iter().flat_map(conversion));
        temp_io.extend(temp.into_iter().flat_map(conversion));
        delays.extend(cycle_delays(&cfg));
    }
    let log_adc = SpiSar16::new(SpiMock::new(&log_io));
    let temp_adc = SpiSar16::new(SpiMock::new(&temp_io));
    let mut delay = CheckedDelay::new(&delays);

    let mut cycle = Cycle::new(log_adc, temp_adc, from_fn(thermistor_celsius), cal, cfg.check::<16>()?);
    // The front panel shows absorbance smoothed over about four cycles.
    let mut display = Ema::new(4.0)?;

    println!("\n{title}");
    if let Some(e) = cycle.calibration_error() {
        println!("(calibration: {e})");
    }
    println!(
        "{:<38} {:>7} {:>9} {:>7} {:>8} {:>8}  status",
        "scene", "true A", "mean code", "°C", "A (AU)", "display"
    );
    for s in scenes {
        let m = cycle.measure(&mut delay);
        let shown = display.feed(m.x())?.map(|x| m.unit().from_x(x));
        show(s.what, s.absorbance, &m, shown);
        if let Some(e) = m.error() {
            println!("{:<38} ↳ {e}", "");
        }
    }

    let (log_adc, temp_adc, _, _) = cycle.release();
    log_adc.release().done();
    temp_adc.release().done();
    delay.done();
    Ok(())
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let cal = unit_calibration();
    cal.validate()?;
    let cfg = cycle_config();
    println!("Two-beam photometer, water-quality station (an invented scenario)");
    println!(
        "cycle: settle {} µs, {} log conversions {} µs apart (2 dropped at each end), median of {} temperature \
         conversions; codes are averaged, then corrected once",
        cfg.settle_us, cfg.log.samples, cfg.log.interval_us, cfg.temperature.samples
    );

    let day = [
        scene("morning blank, distilled water", 0.0, 22.0),
        scene("check standard 0.5 AU", 0.5, 24.5),
        scene("check standard 1.0 AU", 1.0, 27.0),
        scene("check standard 2.0 AU", 2.0, 29.5),
        Scene { bubble: true, ..scene("sample, a bubble crosses the beam", 0.731, 31.0) },
        scene("sample", 0.731, 31.5),
        scene("afternoon sun on the cabinet", 0.731, 48.0),
        Scene { absorbance: None, ..scene("lamp fails", 0.0, 33.0) },
        scene("lamp replaced", 0.731, 33.0),
        Scene { thermistor_open: true, ..scene("thermistor plug works loose", 0.731, 33.0) },
        scene("plug pushed back in", 0.731, 33.0),
    ];
    println!(
        "display: absorbance smoothed over τ = 4 cycles; it lags a change of sample on purpose, and starts \
         afresh after a cycle without a value"
    );
    run("A calibrated unit through one day", Some(cal), &day)?;

    let boot = [scene("first cycle after boot", 0.5, 25.0), scene("second cycle", 0.5, 25.0)];
    run("A unit whose calibration image was not found at boot", None, &boot)?;
    Ok(())
}
