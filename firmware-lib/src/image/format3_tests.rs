//! What image format 3 added: the temperature-sensor section (`0x8004`), written and read back for every
//! element type, usable by an f32 firmware through `Image::celsius` and checked like every other section;
//! and the empty residual table (a residual of zero everywhere), which corrects bit for bit as a table of
//! zeros. And that the previous format version is refused by name.

use std::vec::Vec;

use super::layout::{self, header, sensor as ls, trailer};
use super::*;
use crate::divider::{Divider, Placement};
use crate::error::{CalibrationDefect, Error, SensorFault};
use crate::record::FormatError;
use crate::rtd::Rtd;
use crate::sensor::{SensorElement, TemperatureSensor};
use crate::thermistor::{Beta, SteinhartHart};

const INFO: ImageInfo<'static> =
    ImageInfo { serial: "ABS-12-0031", calibrated_at: 1_764_614_400, sequence: 1 };

fn cal() -> Calibration {
    Calibration::nominal(12, 2048.0, 180.0, 25.0)
}

/// A channel: the element behind a ratiometric divider, with fault bands of `margin` codes.
fn channel(
    element: SensorElement,
    at: (Placement, f32, u8),
    margin: u32,
    range: (f32, f32),
) -> TemperatureSensor {
    let (placement, series, bits) = at;
    let divider = Divider {
        open_margin: margin,
        short_margin: margin,
        ..Divider::ratiometric(placement, series, bits)
    };
    TemperatureSensor { element, divider, min_c: range.0, max_c: range.1 }
}

/// A 47 kΩ NTC (β = 3950 K, made up for the scenario) to ground under a 33 kΩ resistor, 12-bit.
fn ntc_beta() -> TemperatureSensor {
    let beta = Beta { r0_ohm: 47_000.0, t0_c: 25.0, beta_k: 3950.0 };
    channel(SensorElement::NtcBeta(beta), (Placement::LowSide, 33_000.0, 12), 8, (-10.0, 70.0))
}

/// Coefficients often published for a 10 kΩ NTC (from memory), to supply, 16-bit.
fn ntc_sh() -> TemperatureSensor {
    let sh = SteinhartHart { a: 1.129148e-3, b: 2.34125e-4, c: 8.76741e-8 };
    channel(SensorElement::NtcSteinhartHart(sh), (Placement::HighSide, 10_000.0, 16), 0, (-20.0, 90.0))
}

fn pt1000() -> TemperatureSensor {
    channel(SensorElement::Rtd(Rtd::PT1000), (Placement::LowSide, 1000.0, 16), 0, (-50.0, 150.0))
}

fn image_with(sensor: Option<&TemperatureSensor>) -> Vec<u8> {
    let c = cal();
    let contents = Contents { sensor, ..Contents::of(&c) };
    let len = encoded_len_of(&contents).unwrap();
    let mut buf = std::vec![0u8; len];
    assert_eq!(write_contents(&mut buf, &INFO, &contents).unwrap(), len);
    buf
}

/// Recomputes the CRC of an image changed on purpose (a writer that stores bad values with a correct CRC).
fn fix_crc(img: &mut [u8]) {
    let n = img.len() - trailer::LEN;
    let crc = crc32fast::hash(&img[..n]);
    img[n..].copy_from_slice(&crc.to_le_bytes());
}

/// Where the sensor payload starts in an image written by `write_contents` (after *ranges* and *model_f32*).
const SENSOR_AT: usize = layout::F32_IMAGE_LEN - trailer::LEN + layout::section::HEADER_LEN;

#[test]
fn every_element_type_round_trips_and_linearises_as_the_description_does() {
    for s in [ntc_beta(), ntc_sh(), pt1000()] {
        let bytes = image_with(Some(&s));
        assert_eq!(bytes.len(), layout::F32_IMAGE_LEN + layout::SENSOR_SECTION_LEN);
        let img = Image::parse(&bytes).unwrap();
        assert_eq!(img.sensor(), Some(s));
        assert_eq!(img.section(ls::KIND).map(<[u8]>::len), Some(ls::LEN));
        let top = s.divider.max_code().unwrap();
        for code in (0..=top).step_by(37).chain([top]) {
            // Bit for bit the description's own f32 reading, faults included.
            assert_eq!(img.celsius(code).map(f32::to_bits), s.celsius(code).map(f32::to_bits), "code {code}");
        }
    }
}

#[test]
fn image_celsius_gives_the_published_points() {
    // A Pt1000 equals its 1 kΩ series resistor at 0 °C (IEC 60751: R0 = 1000 Ω): mid-scale reads 0 °C.
    let img_bytes = image_with(Some(&pt1000()));
    let img = Image::parse(&img_bytes).unwrap();
    assert!(img.celsius(32768).unwrap().abs() < 1e-3);
    // An NTC equal to its series resistor at T₀ reads half the supply (common practice for NTC dividers):
    // a 47 kΩ part behind 47 kΩ at mid-scale reads 25 °C.
    let mut s = ntc_beta();
    s.divider.series_ohm = 47_000.0;
    let bytes = image_with(Some(&s));
    let img = Image::parse(&bytes).unwrap();
    assert!((img.celsius(2048).unwrap() - 25.0).abs() < 1e-3);
    // The fault bands stay faults: low-side element, so the top is open and the bottom a short.
    assert_eq!(img.celsius(4095), Err(Error::Sensor(SensorFault::Open)));
    assert_eq!(img.celsius(3), Err(Error::Sensor(SensorFault::Short)));
}

#[test]
fn an_image_without_a_sensor_says_so() {
    let bytes = image_with(None);
    assert_eq!(bytes.len(), layout::F32_IMAGE_LEN);
    let img = Image::parse(&bytes).unwrap();
    assert_eq!(img.sensor(), None);
    assert_eq!(img.celsius(2048), Err(Error::NotCalibrated));
}

#[test]
fn the_writer_refuses_a_sensor_that_does_not_validate() {
    let c = cal();
    let mut s = ntc_beta();
    s.min_c = 80.0; // above max_c
    let contents = Contents { sensor: Some(&s), ..Contents::of(&c) };
    let mut buf = std::vec![0xa5u8; 512];
    let want = WriteError::Value(ImageValueError::Sensor(Error::InvalidCalibration(
        CalibrationDefect::TemperatureRange,
    )));
    assert_eq!(write_contents(&mut buf, &INFO, &contents), Err(want));
    assert!(buf.iter().all(|&b| b == 0xa5), "nothing written");
    s = ntc_beta();
    s.divider.series_ohm = f32::NAN;
    let contents = Contents { sensor: Some(&s), ..Contents::of(&c) };
    assert_eq!(
        write_contents(&mut buf, &INFO, &contents),
        Err(WriteError::Value(ImageValueError::NonFinite { field: ls::SERIES_OHM.name, index: 0 }))
    );
    // The sensor section is the writer's own: it cannot come in as an extra section.
    let extra = [Section { kind: ls::KIND, payload: &[0; ls::LEN] }];
    let contents = Contents { extra: &extra, ..Contents::of(&c) };
    assert_eq!(encoded_len_of(&contents), Err(WriteError::BadSection { kind: ls::KIND }));
}

#[test]
fn the_parser_checks_the_section_behind_a_correct_crc() {
    let good = image_with(Some(&pt1000()));
    let at = |f: &crate::record::layout::Field| SENSOR_AT + f.offset;
    let cases: [(usize, u8, ImageError); 5] = [
        (at(&ls::ELEMENT), 3, FormatError::BadEnum { field: ls::ELEMENT.name, found: 3 }.into()),
        (at(&ls::PLACEMENT), 2, FormatError::BadEnum { field: ls::PLACEMENT.name, found: 2 }.into()),
        (
            at(&ls::RESERVED),
            1,
            FormatError::ReservedNotZero { offset: u32::try_from(at(&ls::RESERVED)).unwrap() }.into(),
        ),
        // An RTD's unused coefficients are zero bits.
        (
            at(&ls::COEFF_C) + 3,
            0x3f,
            FormatError::ReservedNotZero { offset: u32::try_from(at(&ls::COEFF_C) + 3).unwrap() }.into(),
        ),
        (
            at(&ls::BITS),
            25,
            ImageValueError::Sensor(Error::InvalidCalibration(CalibrationDefect::AdcBits)).into(),
        ),
    ];
    for (offset, value, want) in cases {
        let mut bad = good.clone();
        bad[offset] = value;
        fix_crc(&mut bad);
        assert_eq!(Image::parse(&bad), Err(want), "byte {offset} = {value}");
    }
    // A NaN range end.
    let mut bad = good.clone();
    bad[at(&ls::MAX_C)..][..4].copy_from_slice(&f32::NAN.to_le_bytes());
    fix_crc(&mut bad);
    assert_eq!(
        Image::parse(&bad),
        Err(ImageValueError::NonFinite { field: ls::MAX_C.name, index: 0 }.into())
    );
    // A section of the wrong length, and a second copy of it.
    let mut short = good.clone();
    let len_at = SENSOR_AT - layout::section::HEADER_LEN + layout::section::LEN.offset;
    short[len_at] = u8::try_from(ls::LEN - 4).unwrap();
    fix_crc(&mut short);
    assert!(matches!(Image::parse(&short), Err(ImageError::SectionLength { kind: ls::KIND, .. })));
}

#[test]
fn an_image_of_the_previous_format_version_is_refused_by_version() {
    // Versions are exact (as at the step from 1 to 2): a version-2 image is refused by its version, never
    // read with the wrong layout.
    assert_eq!(header::VERSION_VALUE, 3);
    let mut old = image_with(None);
    old[header::VERSION.offset..][..2].copy_from_slice(&2u16.to_le_bytes());
    fix_crc(&mut old);
    assert_eq!(Image::parse(&old), Err(FormatError::UnsupportedVersion { found: 2, supported: 3 }.into()));
}

/// The linear fixed unit (`test_units::linear_fixed`) with an uneven but all-zero residual: its table of
/// zeros, and the same tables with the residual empty.
fn zero_and_empty() -> (crate::test_units::LinearFixed, crate::test_units::LinearFixed) {
    let zeros = crate::test_units::linear_fixed();
    assert!(!zeros.residual.is_empty() && zeros.residual.iter().all(|&r| r == 0));
    let mut empty = crate::test_units::linear_fixed();
    empty.residual.clear();
    (zeros, empty)
}

#[test]
fn an_empty_residual_table_corrects_bit_for_bit_as_a_table_of_zeros() {
    let (zeros, empty) = zero_and_empty();
    let (z, e) = (zeros.view(), empty.view());
    assert_eq!(z.validate(), Ok(()));
    assert_eq!(e.validate(), Ok(()));
    // Every 97th code (and the ends) at temperatures across the accepted range and beyond it, by m°C and by
    // the raw channel: the same value or the same error.
    let codes = (0..=65535u32).step_by(97).chain([0, 1, 65534, 65535]);
    let mut n = 0;
    for code in codes {
        for temp_mc in (-8_000..=58_000).step_by(1_750) {
            assert_eq!(z.correct(code, temp_mc), e.correct(code, temp_mc), "code {code} at {temp_mc} m°C");
            n += 1;
        }
        for temp_code in (0..4096u32).step_by(211) {
            assert_eq!(z.correct_raw(code, temp_code), e.correct_raw(code, temp_code), "{code}, {temp_code}");
        }
    }
    assert!(n > 10_000);
    // Staged, as a firmware corrects many codes at one temperature.
    for temp_mc in [0, 12_345, 49_999] {
        let (sz, se) = (z.stage_millicelsius(temp_mc), e.stage_millicelsius(temp_mc));
        assert_eq!(sz.is_ok(), se.is_ok());
        if let (Ok(sz), Ok(se)) = (sz, se) {
            for code in (0..=65535u32).step_by(331) {
                assert_eq!(z.correct_staged(&sz, code), e.correct_staged(&se, code), "{code}");
            }
        }
    }
    // Through a stage cache (a window's residual row loaded once).
    let (mut cz, mut ce) = (crate::fixed::StageCache::new(z), crate::fixed::StageCache::new(e));
    for temp_mc in (-2_000..=52_000).step_by(3_100) {
        for code in (0..=65535u32).step_by(1_013) {
            assert_eq!(cz.correct(code, temp_mc), ce.correct(code, temp_mc), "{code} at {temp_mc} m°C");
        }
    }
    // A residual table of another size than the full grid or nothing is still refused.
    let mut short = crate::test_units::linear_fixed();
    short.residual.truncate(8);
    assert!(short.view().validate().is_err());
}

#[test]
fn an_image_stores_an_empty_residual_and_loads_it() {
    let (zeros, empty) = zero_and_empty();
    // A calibration whose converter is the fixed tables' (16 bits; the rail margin of LINEAR_HEADER).
    let mut c = Calibration::nominal(16, 32768.0, 5461.0, 25.0);
    c.adc.rail_margin = zeros.header.rail_margin;
    let bytes_of = |f: &crate::fixed::FixedCalibration<'_>| {
        let contents = Contents { fixed: Some(f), ..Contents::of(&c) };
        let mut buf = std::vec![0u8; encoded_len_of(&contents).unwrap()];
        write_contents(&mut buf, &INFO, &contents).unwrap();
        buf
    };
    let (full, small) = (bytes_of(&zeros.view()), bytes_of(&empty.view()));
    // The residual's 7 × 8 i16 entries are gone, nothing else.
    assert_eq!(full.len() - small.len(), 2 * 7 * 8);
    let img = Image::parse(&small).unwrap();
    let sec = img.fixed().unwrap();
    assert_eq!(sec.len_of(&layout::fixed::RESIDUAL), 0);
    let mut storage = DefaultFixedStorage::new();
    let loaded = img.fixed_into(&mut storage).unwrap();
    assert!(loaded.residual.is_empty());
    for code in (0..=65535u32).step_by(509) {
        assert_eq!(loaded.correct(code, 25_000), zeros.view().correct(code, 25_000), "{code}");
    }
    // A residual count that is neither the grid nor zero is refused behind a correct CRC.
    let count_at = layout::F32_IMAGE_LEN - trailer::LEN
        + layout::section::HEADER_LEN
        + layout::fixed::RESIDUAL_LEN.offset;
    let mut bad = small.clone();
    bad[count_at..][..2].copy_from_slice(&3u16.to_le_bytes());
    fix_crc(&mut bad);
    assert_eq!(
        Image::parse(&bad),
        Err(ImageValueError::FixedTableSize { table: "residual", found: 3, expected: 56 }.into())
    );
}
