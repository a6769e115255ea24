//! The measurement cycle (feature `hal`) on a fake SPI converter and delay of its own: every corrector and
//! temperature channel the crate offers, the 16-bit SAR driver, the configuration check, and the parts a
//! board may call directly.

use crate::{bytes, keep, o};
use embedded_hal::delay::DelayNs;
use embedded_hal::spi::{ErrorKind, ErrorType, Operation, SpiDevice};
use logtrim::field::{Layered, Layers};
use logtrim::hal::adc::{AdcChannel, Error as _};
use logtrim::hal::correct::correct_mean_fixed;
use logtrim::hal::sar16::SpiReadError;
use logtrim::hal::temperature::from_fn;
use logtrim::hal::{
    Coding, Corrector, Cycle, CycleConfig, DigitalCelsius, FixedSensorTable, MeanCode, Oversampling,
    SpiSar16, TemperatureChannel,
};
use logtrim::{Error, Unit};

/// A converter on SPI whose words and failures the optimiser cannot predict.
struct FakeSpi;

impl ErrorType for FakeSpi {
    type Error = ErrorKind;
}

impl SpiDevice for FakeSpi {
    fn transaction(&mut self, ops: &mut [Operation<'_, u8>]) -> Result<(), ErrorKind> {
        if o(false) {
            return Err(o(ErrorKind::Other));
        }
        for op in ops {
            if let Operation::Read(buf) = op {
                for (b, s) in buf.iter_mut().zip(bytes()) {
                    *b = *s;
                }
            }
        }
        Ok(())
    }
}

/// A delay that does nothing the optimiser can see through.
struct FakeDelay;

impl DelayNs for FakeDelay {
    fn delay_ns(&mut self, ns: u32) {
        keep(ns);
    }
}

const N: usize = 32;

fn config() -> CycleConfig {
    let log = o(Oversampling { interval_us: o(100), ..Oversampling::trimmed_mean(o(16), o(2)) });
    o(CycleConfig { settle_us: o(10), log, temperature: Oversampling::median(o(3)), unit: o(Unit::DbPower) })
}

fn cycle<T: TemperatureChannel, C: Corrector + Copy>(sensor: T, corrector: C) {
    let checked = match config().check::<N>() {
        Ok(c) => c,
        Err(e) => return keep(e),
    };
    keep(checked.config());
    let log = SpiSar16::with_coding(FakeSpi, o(Coding::TwosComplement));
    keep(log.coding());
    let temp = SpiSar16::new(FakeSpi);
    let mut cycle = Cycle::new(log, temp, sensor, o(Some(corrector)), checked);
    keep((cycle.calibration_error(), cycle.config(), cycle.corrector().is_some()));
    let mut delay = FakeDelay;
    let m = cycle.measure(&mut delay);
    keep((m.value(), m.unit(), m.x(), m.fixed(), m.log_code(), m.temperature_c(), m.error()));
    let status = m.status();
    keep((status.is_clean(), status.allows_value()));
    cycle.set_config(checked);
    let corrector = cycle.corrector().copied();
    cycle.set_corrector(o(None));
    cycle.set_corrector(o(corrector));
    let (log, temp, _, corrector) = cycle.release();
    keep((log.release(), temp.release(), corrector.is_some()));
}

fn corrector_calls<C: Corrector>(c: &C) {
    let code = match MeanCode::new(o(0), o(1)) {
        Some(c) => c,
        None => MeanCode::single(o(0)),
    };
    keep((code.sum(), code.count(), code.as_f32(), code.floor(), code.to_fixed(o(8))));
    keep(c.validate());
    keep(c.check_code(o(0)));
    keep(c.correct(code, o(25.0)));
    keep(c.correct_in(code, o(25.0), o(Unit::Absorbance)));
}

/// Every public entry point of the `hal` module.
#[inline(never)]
pub fn run() {
    let cal = crate::f32_path::calibration();
    let spi_error = SpiReadError(o(ErrorKind::Other));
    keep((spi_error.spi_kind(), spi_error.kind(), spi_error.kind().kind()));
    keep(o(CycleConfig::single(o(Unit::Nepers))).check::<1>());
    let mut adc = SpiSar16::new(FakeSpi);
    keep(adc.read());
    let digital = DigitalCelsius::new(o(13), o(true), o(0.0625)).and_then(|d| d.with_offset(o(0.0)));
    let digital = digital.map(|d| d.with_open_code(o(0x1fff)));

    corrector_calls(&cal);
    corrector_calls(&&cal);
    let layered = Layered { factory: cal, layers: o(Layers::FACTORY) };
    corrector_calls(&layered);
    cycle(crate::sensors::sensor(), cal);
    cycle(from_fn(|code| if o(code) == 0 { Err(Error::NonFinite) } else { Ok(o(25.0)) }), layered);
    if let Ok(d) = digital {
        keep(d.celsius(o(0)));
        #[allow(clippy::needless_borrows_for_generic_args)] // the `&C` corrector, on purpose
        cycle(d, &cal);
    }
    crate::fixed_path::with_calibration(|fixed| {
        corrector_calls(&fixed);
        let code = MeanCode::new(o(0), o(3)).unwrap_or(MeanCode::single(o(0)));
        keep(correct_mean_fixed(&fixed, code, o(25.0)));
        let table = FixedSensorTable(fixed);
        keep(table.celsius(o(0)));
        cycle(table, fixed);
    });
}

/// `Display` of the `hal` module's errors, as a firmware that logs them over `core::fmt` would
/// print them.
#[inline(never)]
pub fn messages() {
    use crate::misc::show;
    use logtrim::hal::{Channel, DigitalCelsius};
    if let Err(e) = config().check::<N>() {
        show(e);
    }
    if let Err(e) = DigitalCelsius::new(o(13), o(true), o(0.0625)) {
        show(e);
    }
    show(o(Channel::Log));
    show(SpiReadError(o(ErrorKind::Other)).kind());
    let cal = crate::f32_path::calibration();
    if let Ok(checked) = config().check::<N>() {
        let mut cycle = Cycle::new(
            SpiSar16::new(FakeSpi),
            SpiSar16::new(FakeSpi),
            crate::sensors::sensor(),
            Some(cal),
            checked,
        );
        if let Some(e) = cycle.measure(&mut FakeDelay).error() {
            show(e);
        }
    }
}
