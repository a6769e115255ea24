//! Proof that `logtrim` builds without std, with every feature on (`serde`, `defmt`, `micromath`, `hal`).
//!
//! This is a `#![no_std]` static library with its own `#[panic_handler]`. If anything in the dependency
//! graph links std, the build fails with "duplicate lang item `panic_impl`". The exported functions call
//! the public API so that the generic code is instantiated and compiled for real.
//!
//! Build: `cargo build --manifest-path nostd-check/Cargo.toml --release` (run by `.ci/run`).
#![no_std]
// `#[no_mangle]` counts as unsafe code; it is allowed only on the exported functions below.
#![deny(unsafe_code)]

use core::panic::PanicInfo;

use logtrim::math::Micromath;
use logtrim::{Beta, Calibration, Divider, Placement, Rtd, SensorElement, TemperatureSensor, Unit};

/// The value returned by every export when the call fails.
const FAILED: f32 = f32::NAN;

fn or_failed(r: Result<f32, logtrim::Error>) -> f32 {
    r.unwrap_or(FAILED)
}

fn demo_calibration() -> Calibration {
    Calibration::nominal(16, 32768.0, 2000.0, 25.0)
}

fn demo_sensor(element: SensorElement) -> TemperatureSensor {
    let divider = Divider::ratiometric(Placement::LowSide, 10_000.0, 12).with_margins(8, 8);
    TemperatureSensor::new(element, divider, -40.0, 125.0)
}

/// x = ln(I_sig/I_ref) of a code at a temperature, default backend; NaN on error.
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_correct(code: u32, temp_c: f32) -> f32 {
    or_failed(demo_calibration().correct(code, temp_c).map(|r| r.x))
}

/// The same with the micromath backend; NaN on error.
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_correct_fast(code: u32, temp_c: f32) -> f32 {
    or_failed(demo_calibration().correct_with::<Micromath>(code, temp_c).map(|r| r.x))
}

/// A corrected reading in dB (power) and as a ratio, summed so both are kept; NaN on error.
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_units(x: f32) -> f32 {
    Unit::DbPower.from_x(x) + Unit::Ratio.from_x_with::<Micromath>(x) + Unit::Absorbance.from_x(x)
}

/// 0 when the demo calibration validates, else the error's position in a fixed list.
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_validate() -> u32 {
    match demo_calibration().validate() {
        Ok(()) => 0,
        Err(e) => e.name().len() as u32,
    }
}

/// °C of a 10 kΩ NTC channel at a 12-bit code; NaN on error (including open and short).
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_ntc_celsius(code: u32) -> f32 {
    let ntc = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 };
    or_failed(demo_sensor(SensorElement::NtcBeta(ntc)).celsius(code))
}

/// °C of a Steinhart–Hart channel (the Beta curve above) at a 12-bit code; NaN on error.
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_sh_celsius(code: u32) -> f32 {
    let sh = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 }.to_steinhart_hart();
    let s = demo_sensor(SensorElement::NtcSteinhartHart(sh));
    or_failed(s.celsius(code).and_then(|t| sh.resistance(t)).and_then(|r| sh.celsius(r)))
}

/// °C of a Pt1000 at a resistance, and back to Ω, and to °C again; NaN on error.
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_rtd_celsius(ohm: f32) -> f32 {
    let rtd = Rtd::PT1000;
    or_failed(rtd.celsius(ohm).and_then(|t| rtd.resistance(t)).and_then(|r| rtd.celsius(r)))
}

/// Compile-time check that the plain-data types carry their serde and defmt derives in a no_std build.
fn require_derives<T: defmt::Format + serde::Serialize + for<'de> serde::Deserialize<'de>>() {}

/// Always 0: instantiates the derive checks so that they are compiled.
#[allow(unsafe_code)] // `no_mangle`: a stable symbol for the C side
#[no_mangle]
pub extern "C" fn lt_check_derives() -> u32 {
    require_derives::<Calibration>();
    require_derives::<TemperatureSensor>();
    require_derives::<logtrim::thermistor::CurvePoint>();
    require_derives::<logtrim::thermistor::FitError>();
    require_derives::<Unit>();
    require_derives::<logtrim::Error>();
    0
}

#[panic_handler]
fn panic(_info: &PanicInfo<'_>) -> ! {
    loop {}
}
