//! The dye photometer's measurement cycle on a generic Cortex-M4F (an invented board for the Quillmere dye
//! line of `examples/dyeline`): logtrim's `hal` cycle on a real `embedded-hal` 1.0 SPI bus and delay,
//! the unit's calibration image checked at boot, absorbance logged over RTT with defmt.
//!
//! | part | what |
//! |---|---|
//! | `board` | THE BOARD-SPECIFIC PART: GPIO registers (placeholders), pin numbers, core clock, a cycle-counted delay |
//! | `bitbang` | a bit-banged SPI bus (mode 0) on any `embedded_hal::digital` pins |
//! | here | boot: the image, the cycle's configuration, the loop |
//!
//! The log-ratio output goes to a 16-bit SAR converter and the front end's temperature comes from a 16-bit
//! digital sensor in steps of 1/128 °C; both clock out their word on chip select and share one bus
//! (`embedded_hal_bus::spi::RefCellDevice`). Build with
//! `cargo build --release --target thumbv7em-none-eabihf` in this folder; see README.md before flashing.
#![no_std]
#![no_main]
#![deny(unsafe_code)]

mod bitbang;
mod board;

use core::cell::RefCell;

use cortex_m_rt::entry;
use defmt::{error, info, warn};
use defmt_rtt as _;
use embedded_hal::delay::DelayNs;
use embedded_hal_bus::spi::{NoDelay, RefCellDevice};
use logtrim::filter::Ema;
use logtrim::hal::{Cycle, CycleConfig, DigitalCelsius, Oversampling, SpiSar16};
use logtrim::{Image, Unit};
use panic_probe as _;

use bitbang::BitBangSpi;
use board::{pins, CycleDelay, Pin, CORE_HZ};

/// The unit's calibration image. On a real board it lives in its own flash page or EEPROM, written by the
/// line's calibration station; here it is the dyeline unit's image, built in.
static IMAGE: &[u8] = include_bytes!("../../dyeline/calibration/QM-DL2-0117.bin");

/// Half a bit period of the bus: 1 µs, a 500 kHz clock (slow and safe on any wiring).
const SPI_HALF_PERIOD_NS: u32 = 1_000;

/// Sixteen conversions 1.25 ms apart (20 ms: one period of 50 Hz mains, whose hum then averages out; common
/// practice), the two lowest and highest dropped; the median of three temperature readings; absorbance.
const CONFIG: CycleConfig = CycleConfig {
    settle_us: 500,
    log: Oversampling { interval_us: 1_250, ..Oversampling::trimmed_mean(16, 2) },
    temperature: Oversampling::median(3),
    unit: Unit::Absorbance,
};

/// Parks the core after a fault that leaves nothing to measure.
fn halt() -> ! {
    loop {
        cortex_m::asm::wfi();
    }
}

#[entry]
fn main() -> ! {
    let mut delay = CycleDelay::new(CORE_HZ);
    let bus = RefCell::new(BitBangSpi::new(
        Pin::new(pins::SCK),
        Pin::new(pins::MOSI),
        Pin::new(pins::MISO),
        CycleDelay::new(CORE_HZ),
        SPI_HALF_PERIOD_NS,
    ));
    let (Ok(log_spi), Ok(temp_spi)) = (
        RefCellDevice::new(&bus, Pin::new(pins::CS_LOG), NoDelay),
        RefCellDevice::new(&bus, Pin::new(pins::CS_TEMP), NoDelay),
    );

    // The image is checked once, completely (magic, version, length, CRC, every value). A unit without a
    // valid image still runs its cycle: every measurement then says "not calibrated".
    let calibration = match Image::parse(IMAGE) {
        Ok(img) => {
            info!(
                "unit {=str}, calibrated at {=u64} s, image sequence {=u32}",
                img.serial(),
                img.calibrated_at(),
                img.sequence()
            );
            Some(img.calibration())
        }
        Err(e) => {
            error!("calibration image refused: {}", e);
            None
        }
    };
    let config = match CONFIG.check::<16>() {
        Ok(c) => c,
        Err(e) => {
            error!("cycle configuration: {}", e);
            halt()
        }
    };
    let sensor = match DigitalCelsius::new(16, true, 1.0 / 128.0) {
        Ok(s) => s,
        Err(e) => {
            error!("temperature sensor description: {}", e);
            halt()
        }
    };
    let mut cycle = Cycle::new(SpiSar16::new(log_spi), SpiSar16::new(temp_spi), sensor, calibration, config);
    if let Some(e) = cycle.calibration_error() {
        error!("calibration refused by the corrector: {}", e);
    }
    // The display shows absorbance smoothed over about four cycles.
    let mut display = match Ema::new(4.0) {
        Ok(f) => f,
        Err(e) => {
            error!("display filter: {}", e);
            halt()
        }
    };

    loop {
        let m = cycle.measure(&mut delay);
        let shown = display.feed(m.x()).ok().flatten().map(|x| m.unit().from_x(x));
        match (m.value(), m.temperature_c()) {
            (Some(a), Some(t)) => info!("A = {=f32} AU at {=f32} °C (display {})", a, t, shown),
            _ => warn!("no value: {} {}", m.status(), m.error()),
        }
        delay.delay_ms(250);
    }
}
