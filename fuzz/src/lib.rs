//! The properties the fuzz targets check, shared so that each target is one line.
//!
//! A target fails (libFuzzer reports a crash and saves the input under `artifacts/`) on a panic anywhere in
//! the code under test, or when one of the properties below does not hold.

use std::cell::RefCell;

use logtrim::fixed::FixedCalibration;
use logtrim::image::{self, layout, slots, FixedStorage, Image, ImageError, ImageInfo, ImageValueError, Section};

/// Storage large enough for any fixed section a 65 532-byte payload can hold (about 400 KB, allocated
/// once per thread), so that a load can only fail on the tables' values, never on capacity.
type Largest = FixedStorage<16384, 32768, 16384>;

thread_local! {
    static STORAGE: RefCell<Box<Largest>> = RefCell::new(Box::new(Largest::new()));
}

/// Image bytes from anyone: parsing never panics, and whatever is accepted is fully valid and re-encodes to
/// the same bytes (so no accepted byte escaped the checks).
pub fn check_image(data: &[u8]) {
    let exact = Image::parse(data);
    let prefix = Image::parse_prefix(data);
    match (&exact, &prefix) {
        (Ok(a), Ok((b, rest))) => assert!(a == b && rest.is_empty()),
        (Ok(_), Err(e)) => panic!("exact parse accepted what prefix parse refused: {e:?}"),
        (Err(e), Ok((_, rest))) => {
            assert!(!rest.is_empty(), "prefix parse accepted exactly what parse refused: {e:?}")
        }
        (Err(_), Err(_)) => {}
    }
    if let Ok((img, _)) = prefix {
        accepted(&img);
    }
    // The two-slot choice on the bytes cut in two never panics, and picks a valid image if any.
    let (a, b) = data.split_at(data.len() / 2);
    let sel = slots::select(a, b);
    let any_valid = Image::parse_prefix(a).is_ok() || Image::parse_prefix(b).is_ok();
    assert_eq!(sel.is_ok(), any_valid);
    let _ = slots::next_write(a, b);
    let active = slots::ActiveCalibration::from_selection(&sel);
    if !any_valid {
        assert_eq!(active.correct(1000, 25.0), Err(logtrim::Error::NotCalibrated));
    }
}

fn accepted(img: &Image<'_>) {
    let cal = img.calibration();
    assert_eq!(cal.validate(), Ok(()));
    STORAGE.with(|s| {
        let mut storage = s.borrow_mut();
        match img.fixed_into(&mut **storage) {
            Ok(fixed) => {
                assert_eq!(fixed.validate(), Ok(()));
                re_encode(img, Some(&fixed));
                correct_fixed(&fixed);
            }
            // Only the tables' own values can refuse a load here (the storage holds any section).
            Err(ImageError::MissingSection { kind }) => {
                assert!(kind == layout::fixed::KIND && img.fixed().is_none());
                re_encode(img, None);
            }
            Err(e) => assert!(matches!(e, ImageError::Value(ImageValueError::Fixed(_))), "load refused with {e:?}"),
        }
    });
    // Correcting with any accepted calibration never panics, at and beyond every edge.
    let max = (1u32 << cal.adc.bits.min(24)) - 1;
    let t = cal.temperature;
    for code in [0, 1, max / 3, max / 2, max - 1, max, max + 1, u32::MAX] {
        for temp in [t.min_c, t.max_c, 0.5 * (t.min_c + t.max_c), t.min_c - t.extrapolation_k - 1.0, f32::NAN]
        {
            let _ = cal.correct(code, temp);
            let _ = cal.correct_f64(f64::from(code), f64::from(temp));
        }
    }
}

/// Re-encodes an accepted image with its fixed calibration (as loaded) and the optional sections it
/// carries: the bytes must match when its sections came in the writer's order, and the calibration must
/// match in any case.
fn re_encode(img: &Image<'_>, fixed: Option<&FixedCalibration<'_>>) {
    let cal = img.calibration();
    let known = [layout::ranges::KIND, layout::model_f32::KIND, layout::fixed::KIND];
    let extra: Vec<Section<'_>> = img.sections().filter(|s| !known.contains(&s.kind)).collect();
    let info =
        ImageInfo { serial: img.serial(), calibrated_at: img.calibrated_at(), sequence: img.sequence() };
    let mut buf = vec![0u8; img.len()];
    let n = image::write_with_fixed(&mut buf, &info, &cal, fixed, &extra).expect("an accepted image re-encodes");
    assert_eq!(n, img.len());
    let again = Image::parse(&buf).expect("a re-encoded image parses");
    assert_eq!(again.calibration(), cal);
    let kinds = |i: &Image<'_>| i.sections().map(|s| s.kind).collect::<Vec<u16>>();
    if kinds(&again) == kinds(img) {
        assert_eq!(&buf[..], img.as_bytes(), "accepted image is not canonical");
    }
}

/// Corrects with an accepted image's fixed calibration at and beyond every edge: never a panic, and a
/// value only inside the calibrated x range.
fn correct_fixed(f: &FixedCalibration<'_>) {
    let h = f.header;
    let max = h.adc_max_code;
    let mc = |theta: i32| theta / 1024;
    let temps = [mc(h.temp_lo), mc(h.temp_min), mc(h.temp_max), mc(h.temp_hi), mc(h.temp_hi) + 1, i32::MIN, i32::MAX];
    for code in [0, 1, h.rail_margin, h.rail_margin + 1, max / 3, max / 2, max - 1, max, max + 1, u32::MAX] {
        for t in temps {
            if let Ok(r) = f.correct(code, t) {
                assert!(r.x >= h.x_min && r.x <= h.x_max);
                for unit in logtrim::Unit::ALL {
                    let _ = r.value(unit);
                }
            }
        }
        if let Some(s) = &f.sensor {
            for tc in [0, s.code_lo.saturating_sub(1), s.code_lo, s.code_hi / 2 + s.code_lo / 2, s.code_hi, s.code_hi + 1, u32::MAX] {
                let _ = f.correct_raw(code, tc);
            }
        }
    }
}

/// Arbitrary bytes made into a plausible image: right magic and version, the total length of the bytes
/// (padded to a multiple of 4) and a correct CRC, so that the fuzzer explores the structural and value
/// checks behind the CRC, as a faulty writer elsewhere would exercise them.
pub fn check_image_with_valid_crc(data: &[u8]) {
    let mut v = data.to_vec();
    if v.len() < layout::header::LEN {
        v.resize(layout::header::LEN, 0);
    }
    while !v.len().is_multiple_of(4) {
        v.push(0);
    }
    v.extend_from_slice(&[0; 4]);
    v[0..4].copy_from_slice(&layout::header::MAGIC_VALUE);
    v[4..6].copy_from_slice(&layout::header::VERSION_VALUE.to_le_bytes());
    let total = v.len() as u32;
    v[8..12].copy_from_slice(&total.to_le_bytes());
    let n = v.len() - 4;
    let crc = logtrim::record::crc32(&v[..n]);
    v[n..].copy_from_slice(&crc.to_le_bytes());
    check_image(&v);
}

/// Intel HEX from anyone: decoding never panics, and what decodes re-encodes and decodes to the same data.
pub fn check_intel_hex(data: &[u8]) {
    use logtrim_host::image_file as f;
    let Ok(decoded) = f::decode_file(data) else { return };
    if decoded.format == f::ImageFormat::Hex {
        let base = decoded.base.expect("a HEX file has a base address");
        for record_len in [16, 32] {
            let text = f::to_intel_hex(&decoded.bytes, base, record_len).expect("decoded data re-encodes");
            let again = f::from_intel_hex(&text).expect("re-encoded HEX decodes");
            assert_eq!((again.base, &again.bytes), (base, &decoded.bytes));
        }
    }
    check_image(&decoded.bytes);
}

/// CSV text from anyone, read as calibration data and as readings (with and without skipping bad rows):
/// the readers never panic; what they accept holds only valid values; a sensor converter that fails is
/// reported per row in readings and as an error in calibration data.
pub fn check_csv(data: &[u8]) {
    use logtrim_host::data::{read_calibration, read_readings, ReadOptions};
    let conv = |code: u32| -> Result<f64, logtrim::Error> {
        if code % 7 == 0 {
            Err(logtrim::Error::Sensor(logtrim::error::SensorFault::Open))
        } else {
            Ok(f64::from(code % 200) - 50.0)
        }
    };
    for skip in [false, true] {
        for bits in [12u8, 16] {
            let opts = ReadOptions { adc_bits: bits, skip_bad_rows: skip, temp_converter: Some(&conv) };
            if let Ok(cal) = read_calibration(data, "fuzz.csv", &opts) {
                let max = (1u32 << bits) - 1;
                for r in &cal.rows {
                    assert!(r.code <= max && r.temp_c.is_finite());
                    assert!(r.ratio.is_finite() && r.ratio > 0.0);
                    assert!(r.weight.is_finite() && r.weight > 0.0);
                    assert!(r.unit.is_none_or(|u| (u as usize) < cal.units.len()));
                }
                if !skip {
                    assert!(cal.skipped.is_empty());
                }
            }
            if let Ok(rd) = read_readings(data, "fuzz.csv", &opts) {
                let max = (1u32 << bits) - 1;
                for r in &rd.rows {
                    assert!(r.code <= max);
                    if let Ok(t) = r.temp_c {
                        assert!(t.is_finite());
                    }
                    assert_eq!(r.record.len(), rd.headers.len());
                }
            }
        }
    }
}
