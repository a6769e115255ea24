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
                // A reading's code may lie beyond the converter (any u32): the firmware refuses that row
                // with its own status, so the reader keeps it; calibration rows (above) stay within it.
                for r in &rd.rows {
                    if let Ok(t) = r.temp_c {
                        assert!(t.is_finite());
                    }
                    assert_eq!(r.record.len(), rd.headers.len());
                }
            }
        }
    }
}

/// Trim and blank records from anyone, and their two-slot choice: parsing never panics; an accepted record
/// re-encodes to the same bytes; installing it over a calibration and applying it on both paths never panics,
/// and both paths give the same status; the slot choice picks a record exactly when one slot holds one.
pub fn check_field_records(data: &[u8]) {
    use logtrim::field::{self, Blank, Layers, Trim, TrimLimits};
    use logtrim::fixed::FixedReading;
    let trim = Trim::parse(data);
    let blank = Blank::parse(data);
    if let Ok(t) = &trim {
        assert_eq!(&t.to_bytes()[..], data, "an accepted trim re-encodes to its bytes");
    }
    if let Ok(b) = &blank {
        assert_eq!(&b.to_bytes()[..], data, "an accepted blank re-encodes to its bytes");
    }
    let (a, b) = data.split_at(data.len() / 2);
    for factory in [None, Some(0), Some(0x1234_5678)] {
        let any_trim = Trim::parse_prefix(a).is_ok() || Trim::parse_prefix(b).is_ok();
        let sel = field::slots::select::<Trim>(a, b, factory);
        if factory.is_none() {
            assert_eq!(sel.is_ok(), any_trim);
        }
        let _ = field::slots::next_write::<Trim>(a, b, factory);
        let _ = field::slots::select::<Blank>(a, b, factory);
        let _ = field::slots::next_write::<Blank>(a, b, factory);
    }
    let limits = TrimLimits::new(0.05, 0.02, 0.5).expect("the default limits are valid");
    let layers = Layers::new(trim.ok(), blank.ok(), &limits, None);
    if let Ok(layers) = layers {
        let cal = logtrim::Calibration::nominal(16, 32768.0, 3000.0, 25.0);
        for code in [1000, 20000, 32768, 50000, 65000] {
            let Ok(r) = cal.correct(code, 25.0) else { continue };
            let f32_path = layers.apply(&r);
            let q = (f64::from(r.x) * f64::from(1u32 << logtrim::fixed::X_FRAC)).round() as i32;
            let fixed = layers.apply_fixed(&FixedReading { x: q, temperature_extrapolated: false });
            // The same status on both paths: a value, within the fixed path's own range (±128 Np).
            if f32_path.x.abs() < 100.0 {
                assert!(fixed.is_ok(), "f32 {f32_path:?} but fixed {fixed:?}");
            }
        }
    }
}

/// The seed unit's calibration file, mutated: loading and validating never panics; what loads builds its
/// tables, image and emitted sources without a panic; the image parses back to the same calibration; the
/// fixed tables agree with the f32 model on a sample (status and value, as `logtrim verify` judges); a
/// sensor table is monotone in the code.
pub fn check_calfile(data: &[u8]) {
    use logtrim_host::calfile::CalFile;
    use logtrim_host::tables::TableOptions;
    let Ok(text) = std::str::from_utf8(data) else { return };
    let Ok(file) = CalFile::from_json(text, "fuzz.json") else { return };
    assert_eq!(file.calibration.validate(), Ok(()));
    let opts = TableOptions::default();
    let Ok(tables) = file.fixed_tables(&opts) else { return };
    for format in [logtrim_host::emit::Format::Rust, logtrim_host::emit::Format::C, logtrim_host::emit::Format::Json] {
        let _ = logtrim_host::emit::render(&tables, format, &logtrim_host::emit::Provenance::default());
    }
    if let Ok(bytes) = logtrim_host::image_file::build_image_with(&file, Some("FUZZ"), 1, Some(&opts)) {
        let img = Image::parse(&bytes).expect("a built image parses");
        assert_eq!(img.calibration(), file.calibration);
        let _ = logtrim_host::image_file::load_fixed(&img).expect("a built image's tables load");
    }
    let view = tables.view();
    if let Some(s) = &view.sensor {
        // θ along the valid span moves one way only.
        let step = ((s.code_hi - s.code_lo) / 512).max(1);
        let thetas: Vec<i32> =
            (s.code_lo..=s.code_hi).step_by(step as usize).filter_map(|c| view.theta_from_code(c).ok()).collect();
        let up = thetas.windows(2).all(|w| w[0] <= w[1]);
        let down = thetas.windows(2).all(|w| w[0] >= w[1]);
        assert!(up || down, "sensor table not monotone");
    }
    let v = logtrim_host::verify::VerifyOptions {
        code_stride: ((1u32 << file.calibration.adc.bits) / 64).max(1),
        temp_stride: 97,
        ..logtrim_host::verify::VerifyOptions::default()
    };
    if let Ok(report) = logtrim_host::verify::run_file(&file, &view, &v, &logtrim_host::progress::quiet) {
        assert_eq!(report.fixed.status.outside, 0, "fixed and f64 statuses disagree away from an edge: {report}");
        assert_eq!(report.f32.status.outside, 0, "f32 and f64 statuses disagree away from an edge: {report}");
    }
}

/// Chamber data from anyone, fitted with the smallest model: reading and fitting never panic or hang, and a
/// fit that succeeds gives a calibration that validates.
pub fn check_fit(data: &[u8]) {
    use logtrim_host::data::{read_calibration, ReadOptions};
    use logtrim_host::fit::{fit, FitData, FitOptions};
    let Ok(cal) = read_calibration(data, "fuzz.csv", &ReadOptions::default()) else { return };
    if cal.rows.len() > 4000 {
        return;
    }
    let d = FitData::from_rows(&cal.rows, None);
    let spec = logtrim_host::fit::model::Spec::parse("offset=2,slope=1").ok();
    let opt = FitOptions { spec, min_rows_per_setpoint: 2, min_span_decades: 0.1, ..FitOptions::default() };
    if let Ok(out) = fit(&d, &opt) {
        assert_eq!(out.calibration.validate(), Ok(()), "a fit gave a calibration that does not validate");
    }
}

/// Whether every `null` in `v` stands at a key of an optional budget figure.
fn nulls_only_at_optional_keys(v: &serde_json::Value, key: Option<&str>) -> bool {
    match v {
        serde_json::Value::Null => matches!(key, Some("slope_drift_ppm_per_k" | "calibration_c" | "lsb")),
        serde_json::Value::Array(a) => a.iter().all(|x| nulls_only_at_optional_keys(x, key)),
        serde_json::Value::Object(o) => o.iter().all(|(k, x)| nulls_only_at_optional_keys(x, Some(k))),
        _ => true,
    }
}

/// Design files from anyone: a front end (and its budget) and a temperature sensor's settings. Parsing
/// never panics; a budget that computes has only finite figures (never `inf` or `null`); settings that
/// load convert every code without a panic, monotone in the code.
pub fn check_design_json(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else { return };
    if let Ok(fe) = logtrim_host::frontend::FrontEnd::from_json(text, "fuzz.json") {
        if let Ok(b) = logtrim_host::budget::BudgetSpec::from_design(&fe).and_then(|s| s.compute()) {
            // serde_json writes a non-finite figure as null; the only nulls allowed are the optional
            // fields (`Option<f64>` left out): a spec's slope drift and calibration temperature, and a
            // contribution that has no LSB figure.
            let json = b.to_json();
            let value: serde_json::Value = serde_json::from_str(&json).expect("the budget's own JSON");
            assert!(nulls_only_at_optional_keys(&value, None), "a budget figure is not finite: {json}");
            let table = b.render_table();
            assert!(!table.contains("inf") && !table.contains("NaN"), "{table}");
        }
        for x in [-5.0, 0.0, 3.0] {
            let _ = fe.code_exact(x, 25.0);
        }
    }
    if let Ok(s) = logtrim_host::sensor_tool::settings_from_json(text, "fuzz.json") {
        let max = s.divider.max_code().unwrap_or(0).min(1 << 16);
        let mut last: Option<f32> = None;
        let mut dir = 0i8;
        for code in (0..=max).step_by(((max / 256).max(1)) as usize) {
            if let Ok(t) = s.celsius(code) {
                if let Some(l) = last {
                    let d = (t > l) as i8 - (t < l) as i8;
                    assert!(dir == 0 || d == 0 || d == dir, "sensor reading not monotone in the code");
                    if d != 0 {
                        dir = d;
                    }
                }
                last = Some(t);
            }
        }
    }
}

/// The command line's value parsers from anyone: addresses, `10k`-style resistances, data-sheet points,
/// `--sh` coefficients, RTD names and `--model` terms. They never panic, and what they accept reads back.
pub fn check_cli_values(data: &[u8]) {
    use logtrim_host::sensor_tool::{parse_coefficients, parse_ohm, parse_point, parse_rtd};
    let Ok(text) = std::str::from_utf8(data) else { return };
    if let Ok(a) = logtrim_host::image_file::parse_address(text) {
        assert_eq!(logtrim_host::image_file::parse_address(&format!("{a:#x}")).ok(), Some(a));
    }
    if let Ok(r) = parse_ohm(text) {
        // A number with its multiplier: finite (its sign and size are judged by each option, with a
        // message naming it).
        assert!(r.is_finite(), "{text:?} gave {r}");
    }
    if let Ok(p) = parse_point(text) {
        assert!(p.celsius.is_finite() && p.ohm.is_finite(), "{text:?}");
    }
    if let Ok(c) = parse_coefficients(text) {
        assert!(c.iter().all(|v| v.is_finite()), "{text:?}");
    }
    let _ = parse_rtd(text);
    if let Ok(spec) = logtrim_host::fit::model::Spec::parse(text) {
        assert_eq!(logtrim_host::fit::model::Spec::parse(&spec.to_arg()), Ok(spec));
    }
}

/// The driver of the C differential: reads `m CODE MILLICELSIUS` or `r CODE TEMP_CODE` lines and prints the
/// status and x of the C library (`ltrm.h`, `ltrm.c`) on the unit's emitted data (`unit.c`, `unit_cal`).
const C_DRIVER: &str = r#"
#include <stdio.h>
#include "ltrm.h"
extern const ltrm_fixed unit_cal;
int main(void) {
    char kind;
    unsigned long code;
    long long t;
    while (scanf(" %c %lu %lld", &kind, &code, &t) == 3) {
        ltrm_reading r;
        ltrm_status st = kind == 'm' ? ltrm_correct(&unit_cal, (uint32_t)code, (int32_t)t, &r)
                                     : ltrm_correct_raw(&unit_cal, (uint32_t)code, (uint32_t)t, &r);
        if (st == LTRM_OK) printf("%d %ld\n", (int)st, (long)r.x); else printf("%d\n", (int)st);
    }
    return 0;
}
"#;

thread_local! {
    /// The last emitted header and its compiled driver (recompiled only when the tables change).
    static C_BUILD: RefCell<Option<(String, std::path::PathBuf)>> = const { RefCell::new(None) };
}

/// A calibration file (up to the first NUL byte) and readings (the bytes after it): the C library
/// (`logtrim c-library`) with the unit's data that `logtrim emit --format c` writes, compiled with the
/// system's C compiler, gives the same status and the same x as the Rust fixed path on every reading.
pub fn check_c_differential(data: &[u8]) {
    use logtrim_host::calfile::CalFile;
    use logtrim_host::emit::{self, Format, Provenance};
    use logtrim_host::tables::TableOptions;
    use std::io::Write as _;
    let cut = data.iter().position(|&b| b == 0).unwrap_or(data.len());
    let (json, rest) = data.split_at(cut);
    let Ok(text) = std::str::from_utf8(json) else { return };
    let Ok(file) = CalFile::from_json(text, "fuzz.json") else { return };
    let Ok(tables) = file.fixed_tables(&TableOptions::default()) else { return };
    let view = tables.view();
    let header = emit::render(&tables, Format::C, &Provenance::default());
    let exe = C_BUILD.with(|b| {
        let mut b = b.borrow_mut();
        if let Some((h, exe)) = b.as_ref() {
            if *h == header {
                return exe.clone();
            }
        }
        let dir = std::env::temp_dir().join(format!("logtrim-fuzz-c-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("a scratch folder");
        std::fs::write(dir.join("ltrm.h"), emit::c::library_header()).expect("the library header is written");
        std::fs::write(dir.join("ltrm.c"), emit::c::library_source()).expect("the library is written");
        std::fs::write(dir.join("unit.c"), &header).expect("the unit's data are written");
        std::fs::write(dir.join("driver.c"), C_DRIVER).expect("the driver is written");
        let exe = dir.join("driver");
        let out = std::process::Command::new(std::env::var("CC").unwrap_or_else(|_| "cc".into()))
            .args(["-std=c99", "-O1", "-Wall", "-Werror", "-o"])
            .arg(&exe)
            .args([dir.join("driver.c"), dir.join("unit.c"), dir.join("ltrm.c")])
            .output()
            .expect("a C compiler runs");
        assert!(out.status.success(), "the emitted C does not compile:\n{}", String::from_utf8_lossy(&out.stderr));
        *b = Some((header, exe.clone()));
        exe
    });
    // Readings: 8 bytes each, code and temperature (m°C, or a raw code with a sensor table).
    let raw = view.sensor.is_some();
    let mut input = String::new();
    let mut want = Vec::new();
    for chunk in rest.chunks_exact(8).take(256) {
        let code = u32::from_le_bytes([chunk[0], chunk[1], chunk[2], chunk[3]]);
        let t = i32::from_le_bytes([chunk[4], chunk[5], chunk[6], chunk[7]]);
        let r = if raw { view.correct_raw(code, t as u32) } else { view.correct(code, t) };
        let t_text = if raw { (t as u32).to_string() } else { t.to_string() };
        input.push_str(&format!("{} {code} {t_text}\n", if raw { 'r' } else { 'm' }));
        want.push(match r {
            Ok(r) => format!("0 {}", r.x),
            Err(_) => emit::c::status_code(&r).to_string(),
        });
    }
    if want.is_empty() {
        return;
    }
    let mut child = std::process::Command::new(&exe)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .expect("the driver runs");
    child.stdin.take().expect("stdin").write_all(input.as_bytes()).expect("readings are written");
    let out = child.wait_with_output().expect("the driver ends");
    let got: Vec<&str> = std::str::from_utf8(&out.stdout).expect("text").lines().collect();
    assert_eq!(got.len(), want.len(), "the driver answered {} of {} readings", got.len(), want.len());
    for ((g, w), line) in got.iter().zip(&want).zip(input.lines()) {
        assert_eq!(g, w, "C and Rust differ at {line}");
    }
}
