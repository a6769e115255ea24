//! The fixed section of images of fitted units: both simulator presets fitted from a simulated chamber
//! run, and one of them with a raw NTC temperature channel. For each, the tables built for the calibration
//! file go into an image and come back out through the firmware's loader bit for bit, the fixed correction
//! from the image equals the one from the tables in memory everywhere (every log code at a few
//! temperatures; every sensor code for the raw channel), and the image fits a 4 KiB flash page.
//!
//! Prints the image sizes (run with `--nocapture` to see them).

mod common;

use logtrim::fixed::FixedCalibration;
use logtrim::image::{DefaultFixedStorage, Image};
use logtrim_host::calfile::CalFile;
use logtrim_host::frontend::preset;
use logtrim_host::image_file::{build_image_with, load_fixed};
use logtrim_host::tables::TableOptions;

/// The flash page budget of the issue.
const BUDGET: usize = 4096;

fn fitted(name: &str) -> CalFile {
    common::fitted::preset_unit(name, "0001")
}

/// Every log code at the ends and the middle of the accepted temperature range, in m°C.
fn every_code(a: &FixedCalibration<'_>, b: &FixedCalibration<'_>) -> usize {
    let h = a.header;
    let mc = |theta: i32| theta / 1024;
    let temps =
        [mc(h.temp_lo), mc(h.temp_min), (mc(h.temp_min) + mc(h.temp_max)) / 2, mc(h.temp_max), mc(h.temp_hi)];
    let mut values = 0;
    for t in temps {
        for code in 0..=h.adc_max_code + 1 {
            let (x, y) = (a.correct(code, t), b.correct(code, t));
            assert_eq!(x, y, "code {code} at {t} m°C");
            values += usize::from(x.is_ok());
        }
    }
    values
}

fn check(file: &CalFile, label: &str) -> usize {
    let tables = file.fixed_tables(&TableOptions::default()).unwrap();
    let bytes = build_image_with(file, None, 1, Some(&TableOptions::default())).unwrap();
    let img = Image::parse(&bytes).unwrap();
    assert_eq!(img.calibration(), file.calibration);
    // Bit for bit, through the firmware's loader into the storage sized for the default tables.
    assert_eq!(load_fixed(&img).unwrap().as_ref(), Some(&tables), "{label}");
    let mut storage = DefaultFixedStorage::new();
    let from_image = img.fixed_into(&mut storage).unwrap();
    assert_eq!(from_image, tables.view());
    let values = every_code(&from_image, &tables.view());
    assert!(values > 10_000, "{label}: only {values} values");
    eprintln!(
        "{label}: image {} bytes ({} of f32 model, {} of fixed section), tables {} bytes",
        bytes.len(),
        logtrim::image::layout::F32_IMAGE_LEN,
        bytes.len() - logtrim::image::layout::F32_IMAGE_LEN,
        tables.bytes()
    );
    assert!(bytes.len() <= BUDGET, "{label}: {} bytes", bytes.len());
    bytes.len()
}

#[test]
fn both_presets_round_trip_through_an_image_within_4_kib() {
    for name in ["photometer-compensated", "gas-uncompensated"] {
        check(&fitted(name), name);
    }
}

#[test]
fn a_raw_temperature_channel_adds_its_table_and_stays_within_4_kib() {
    let mut file = fitted("photometer-compensated");
    let without = check(&file, "photometer-compensated, m°C");
    // The raw NTC channel of the photometer-ntc preset (a 10 kΩ NTC on a 12-bit divider, −40…125 °C).
    file.temperature_sensor = preset("photometer-ntc").unwrap().firmware_sensor();
    let with = check(&file, "photometer-compensated, 12-bit NTC channel");
    let tables = file.fixed_tables(&TableOptions::default()).unwrap();
    let knots = tables.sensor.as_ref().unwrap().knots.len();
    assert!(knots <= 131, "{knots} sensor knots do not fit the default storage");
    // The table's control points, and the sensor section that describes the channel for either path.
    assert_eq!(with - without, 4 * knots + logtrim::image::layout::SENSOR_SECTION_LEN);
    // Every sensor code at a few log codes: the raw path from the image equals the one in memory.
    let bytes = build_image_with(&file, None, 1, Some(&TableOptions::default())).unwrap();
    let img = Image::parse(&bytes).unwrap();
    let mut storage = DefaultFixedStorage::new();
    let a = img.fixed_into(&mut storage).unwrap();
    let b = tables.view();
    let mut values = 0;
    for code in [1000u32, 20_000, 32_768, 45_000, 64_000] {
        for tc in 0..=4096u32 {
            let (x, y) = (a.correct_raw(code, tc), b.correct_raw(code, tc));
            assert_eq!(x, y, "code {code}, sensor code {tc}");
            values += usize::from(x.is_ok());
        }
    }
    assert!(values > 1000, "{values}");
}
