//! `logtrim image` and `logtrim inspect` end to end: files written, read back, checked, and the exit codes
//! (0 ok, 1 a bad image, 2 bad input) with their specific messages; the fixed-point tables in the image by
//! default, identical to the ones the library builds for the file, and left out with `--no-fixed`.

mod common;

#[path = "../../tests/common/mod.rs"]
mod fixtures;

use std::path::Path;

use common::{code, logtrim_in, stderr, stdout};
use fixtures::units;
use logtrim::image::layout;
use logtrim::{Calibration, Image};
use logtrim_host::calfile::CalFile;
use logtrim_host::image_file::load_fixed;
use logtrim_host::tables::TableOptions;

/// A gas detector's reference-channel unit, invented for the test, saved as `COEFFS.json`.
fn coeffs(dir: &Path, unit: Option<&str>) -> Calibration {
    let c = units::gas_reference();
    let mut f = CalFile::new(c, unit.map(str::to_string));
    f.created_unix_s = 1_767_225_600;
    f.save(&dir.join("COEFFS.json")).unwrap();
    c
}

#[test]
fn binary_image_round_trip() {
    let dir = tempfile::tempdir().unwrap();
    let cal = coeffs(dir.path(), Some("GD-REF-00731"));
    let o =
        logtrim_in(&["image", "COEFFS.json", "-o", "UNIT.bin", "--sequence", "12", "--no-fixed"], dir.path());
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    assert!(stdout(&o).contains("268 byte image (binary; f32 model only)"), "{}", stdout(&o));
    let bytes = std::fs::read(dir.path().join("UNIT.bin")).unwrap();
    assert_eq!(bytes.len(), 268);
    let img = Image::parse(&bytes).unwrap();
    assert!(img.fixed().is_none());
    assert_eq!(img.calibration(), cal);
    assert_eq!((img.serial(), img.sequence(), img.calibrated_at()), ("GD-REF-00731", 12, 1_767_225_600));

    let o = logtrim_in(&["inspect", "UNIT.bin"], dir.path());
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains("UNIT.bin: binary, 268 bytes"), "{out}");
    assert!(out.contains("serial       GD-REF-00731"), "{out}");
    assert!(out.contains("sequence     12"), "{out}");
    assert!(out.contains("2026-01-01 00:00:00 UTC"), "{out}");
    assert!(out.contains("slope      2 terms: [2000, 25]"), "{out}");
    assert!(out.contains("fixed-point tables: none"), "{out}");

    let o = logtrim_in(&["inspect", "--json", "UNIT.bin"], dir.path());
    assert_eq!(code(&o), 0);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["serial"], "GD-REF-00731");
    assert_eq!(v["calibration"]["adc"]["rail_margin"], 12);
    assert!(v["fixed"].is_null());
}

#[test]
fn images_carry_the_fixed_point_tables_by_default() {
    let dir = tempfile::tempdir().unwrap();
    coeffs(dir.path(), Some("GD-REF-00731"));
    let o = logtrim_in(&["image", "COEFFS.json", "-o", "UNIT.bin"], dir.path());
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    // The tables the library builds for the file, bit for bit, read back through the firmware's loader.
    let file = CalFile::load(&dir.path().join("COEFFS.json")).unwrap();
    let mut want = file.fixed_tables(&TableOptions::default()).unwrap();
    // This unit's fit chose no residual and its front end has no bend left for one: the residual table is
    // all zeros, and the image stores it empty (image format 3), which the fixed path reads as zeros.
    assert!(!want.residual.is_empty() && want.residual.iter().all(|&r| r == 0));
    let zeros = 2 * want.residual.len();
    want.residual.clear();
    let dims = format!("fixed-point tables {}×{} knots", want.header.t_knots, want.header.xa_knots);
    assert!(stdout(&o).contains(&dims), "{}", stdout(&o));
    let bytes = std::fs::read(dir.path().join("UNIT.bin")).unwrap();
    let img = Image::parse(&bytes).unwrap();
    assert_eq!(load_fixed(&img).unwrap(), Some(want.clone()));
    // The image is the f32 image, a section header and the section (fields, tables, padding).
    let tables = 4 * (want.offset.len() + want.inv_slope.len() + want.ln_bias.len() + want.u_min.len())
        + 2 * want.residual.len();
    assert_eq!(bytes.len(), 268 + 4 + layout::fixed::HEAD_LEN + tables.next_multiple_of(4));
    assert!(bytes.len() <= 4096, "{} bytes", bytes.len());
    // More than half the table bytes were the zeros (1 512 of 2 244 in the default image).
    assert!(zeros > tables, "{zeros} bytes of zeros left out, {tables} bytes of tables kept");

    let o = logtrim_in(&["inspect", "UNIT.bin"], dir.path());
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains(&format!("UNIT.bin: binary, {} bytes", bytes.len())), "{out}");
    let section = layout::fixed::HEAD_LEN + tables.next_multiple_of(4);
    assert!(out.contains(&format!("0x8003     {section:>5} bytes  fixed (fixed-point tables)")), "{out}");
    assert!(out.contains("fixed-point tables: load and validate (ok)"), "{out}");
    assert!(out.contains(&format!("t grid     {} knots", want.header.t_knots)), "{out}");
    assert!(out.contains("accepted -13.000 to 63.000 °C"), "{out}");
    let (nt, nr) = (want.offset.len(), want.residual.len());
    assert!(
        out.contains(&format!(
            "entries    offset {nt}, inv_slope {nt}, ln_bias {nt}, u_min {nt}, sensor_knots 0, residual {nr}"
        )),
        "{out}"
    );
    assert!(out.contains("sensor     none"), "{out}");
    let o = logtrim_in(&["inspect", "--json", "UNIT.bin"], dir.path());
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["fixed"]["valid"], true);
    assert_eq!(v["fixed"]["entries"]["residual"], nr);
    assert_eq!(v["fixed"]["header"]["t_knots"], want.header.t_knots);

    // Other table sizes.
    let o = logtrim_in(
        &["image", "COEFFS.json", "-o", "SMALL.bin", "--t-knots", "8", "--xa-knots", "24"],
        dir.path(),
    );
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    let small = std::fs::read(dir.path().join("SMALL.bin")).unwrap();
    let t = load_fixed(&Image::parse(&small).unwrap()).unwrap().unwrap();
    // The options are the most knots the power-of-two steps may take.
    let (nt, nx) = (usize::from(t.header.t_knots), usize::from(t.header.xa_knots));
    assert!(nt <= 8 && nx <= 24 && nt < usize::from(want.header.t_knots), "{nt} × {nx}");
    // Still a residual of zeros, still stored empty; the x̃ grid is in the header all the same.
    assert!(t.residual.is_empty());
    assert!(stdout(&o).contains("residual none (zero everywhere)"), "{}", stdout(&o));
}

#[test]
fn tables_a_firmware_would_refuse_exit_1_after_the_description() {
    // A zero inverse slope in the tables with a correct CRC, as a faulty writer elsewhere could produce: the
    // image's structure is fine, so it is described, but a fixed-point firmware refuses its tables.
    let dir = tempfile::tempdir().unwrap();
    coeffs(dir.path(), Some("GD-REF-00731"));
    assert_eq!(code(&logtrim_in(&["image", "COEFFS.json", "-o", "UNIT.bin"], dir.path())), 0);
    let mut b = std::fs::read(dir.path().join("UNIT.bin")).unwrap();
    let t_len = CalFile::load(&dir.path().join("COEFFS.json"))
        .unwrap()
        .fixed_tables(&TableOptions::default())
        .unwrap()
        .offset
        .len();
    // The section header, the section's fields and the offset table: the first entry of `inv_slope`.
    let inv_slope = 268 + 4 + layout::fixed::HEAD_LEN + 4 * t_len;
    b[inv_slope..inv_slope + 4].copy_from_slice(&0i32.to_le_bytes());
    let n = b.len() - 4;
    let crc = logtrim::record::crc32(&b[..n]);
    b[n..].copy_from_slice(&crc.to_le_bytes());
    std::fs::write(dir.path().join("zero.bin"), &b).unwrap();
    let o = logtrim_in(&["inspect", "zero.bin"], dir.path());
    assert_eq!(code(&o), 1, "{}", stderr(&o));
    assert!(stdout(&o).contains("fixed-point tables: REFUSED"), "{}", stdout(&o));
    assert!(
        stderr(&o).contains("zero.bin: bad fixed-point tables: fixed-point tables do not validate: invalid calibration: slope zero"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn intel_hex_image_at_a_base_address() {
    let dir = tempfile::tempdir().unwrap();
    let cal = coeffs(dir.path(), Some("GD-REF-00731"));
    let args =
        ["image", "COEFFS.json", "-o", "UNIT.hex", "--base-address", "0x0801_FF80", "--record-len", "32"];
    let o = logtrim_in(&args, dir.path());
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    let text = std::fs::read_to_string(dir.path().join("UNIT.hex")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines[0], ":020000040801F1"); // upper address 0x0801
    assert!(lines.contains(&":020000040802F0"), "crossing 0x0802_0000 needs a new upper address:\n{text}");
    assert_eq!(*lines.last().unwrap(), ":00000001FF");
    let back = logtrim_host::image_file::from_intel_hex(&text).unwrap();
    assert_eq!(back.base, 0x0801_FF80);
    assert_eq!(Image::parse(&back.bytes).unwrap().calibration(), cal);

    let o = logtrim_in(&["inspect", "UNIT.hex"], dir.path());
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    let len = back.bytes.len();
    assert!(stdout(&o).contains(&format!("Intel HEX, {len} bytes at 0x0801ff80")), "{}", stdout(&o));

    // --format overrides the extension.
    let o = logtrim_in(&["image", "COEFFS.json", "-o", "unit.img", "--format", "hex"], dir.path());
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    assert!(std::fs::read_to_string(dir.path().join("unit.img")).unwrap().starts_with(':'));
}

#[test]
fn bad_images_exit_1_with_the_specific_error() {
    let dir = tempfile::tempdir().unwrap();
    coeffs(dir.path(), Some("GD-REF-00731"));
    assert_eq!(code(&logtrim_in(&["image", "COEFFS.json", "-o", "UNIT.bin"], dir.path())), 0);
    assert_eq!(code(&logtrim_in(&["image", "COEFFS.json", "-o", "UNIT.hex"], dir.path())), 0);
    let good = std::fs::read(dir.path().join("UNIT.bin")).unwrap();
    let n = good.len();
    let (needed, declares) = (
        format!("image truncated: 200 bytes, {n} needed"),
        format!("declares {n} bytes but {} were given", n + 1),
    );

    let cases: Vec<(&str, Vec<u8>, &str)> = vec![
        (
            "flip.bin",
            {
                let mut b = good.clone();
                b[150] ^= 0x08;
                b
            },
            "CRC mismatch",
        ),
        ("short.bin", good[..200].to_vec(), &needed),
        (
            "long.bin",
            {
                let mut b = good.clone();
                b.push(0);
                b
            },
            &declares,
        ),
        ("erased.bin", vec![0xff; 268], "not a calibration image: starts with ff ff ff ff"),
        (
            "v4.bin",
            {
                let mut b = good.clone();
                b[4] = 4;
                b
            },
            "format version 4 is not supported",
        ),
        (
            "v2.bin",
            {
                let mut b = good.clone();
                b[4] = 2;
                b
            },
            "format version 2 is not supported",
        ),
        (
            "v1.bin",
            {
                let mut b = good.clone();
                b[4] = 1;
                b
            },
            "format version 1 is not supported",
        ),
    ];
    for (name, bytes, want) in cases {
        std::fs::write(dir.path().join(name), bytes).unwrap();
        let o = logtrim_in(&["inspect", name], dir.path());
        assert_eq!(code(&o), 1, "{name}: {}", stderr(&o));
        assert!(stderr(&o).contains(want), "{name}: {}", stderr(&o));
        assert!(stdout(&o).is_empty(), "{name}: a bad image must not be printed as if valid");
    }

    let hex = std::fs::read_to_string(dir.path().join("UNIT.hex")).unwrap();
    let mut lines: Vec<String> = hex.lines().map(str::to_string).collect();
    // Change one data byte of the third record and leave its checksum: the record checksum catches it.
    let third = &mut lines[2];
    let flipped = if &third[9..11] == "00" { "01" } else { "00" };
    third.replace_range(9..11, flipped);
    std::fs::write(dir.path().join("bad.hex"), lines.join("\n") + "\n").unwrap();
    let o = logtrim_in(&["inspect", "bad.hex"], dir.path());
    assert_eq!(code(&o), 1);
    assert!(stderr(&o).contains("line 3: record checksum"), "{}", stderr(&o));
}

#[test]
fn bad_input_exits_2_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    coeffs(dir.path(), None);
    let cases: &[(&[&str], &str)] = &[
        (
            &["image", "COEFFS.json", "-o", "a.bin", "--serial", "SEVENTEEN-CHARS-X"],
            "at most 16 printable ASCII",
        ),
        (&["image", "COEFFS.json", "-o", "a.bin", "--serial", "Prüfling"], "at most 16 printable ASCII"),
        (&["image", "COEFFS.json", "-o", "a.bin", "--base-address", "0x100"], "Intel HEX output only"),
        (&["image", "COEFFS.json", "-o", "a.hex", "--base-address", "flash"], "is not an address"),
        (&["image", "COEFFS.json", "-o", "a.hex", "--base-address", "0xFFFFFF00"], "32-bit address space"),
        (&["image", "COEFFS.json", "-o", "a.hex", "--record-len", "20"], "--record-len"),
        (&["image", "COEFFS.json", "-o", "a.bin", "--t-knots", "2"], "--t-knots"),
        (&["image", "MISSING.json", "-o", "a.bin"], "MISSING.json"),
        (&["inspect", "MISSING.bin"], "MISSING.bin"),
    ];
    for (args, want) in cases {
        let o = logtrim_in(args, dir.path());
        assert_eq!(code(&o), 2, "{args:?}: {}", stderr(&o));
        assert!(stderr(&o).contains(want), "{args:?}: {}", stderr(&o));
    }
    // A calibration file that does not validate.
    let text = std::fs::read_to_string(dir.path().join("COEFFS.json")).unwrap();
    std::fs::write(dir.path().join("BAD.json"), text.replace("\"bits\": 16", "\"bits\": 30")).unwrap();
    let o = logtrim_in(&["image", "BAD.json", "-o", "a.bin"], dir.path());
    assert_eq!(code(&o), 2, "{}", stderr(&o));
    // Nothing was written, not even a temporary file.
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    let mut names = names;
    names.sort();
    assert_eq!(names, ["BAD.json", "COEFFS.json"]);
    // Without any serial the image is still built, with a warning.
    let o = logtrim_in(&["image", "COEFFS.json", "-o", "a.bin"], dir.path());
    assert_eq!(code(&o), 0);
    assert!(stderr(&o).contains("warning: no serial"), "{}", stderr(&o));
}

/// The same unit read through a raw NTC channel (a 47 kΩ part on a 33 kΩ divider, 12-bit; the part's values
/// invented for the test).
fn raw_channel_coeffs(dir: &Path) -> logtrim::TemperatureSensor {
    coeffs(dir, Some("ABS-RAW-0007"));
    let mut f = CalFile::load(&dir.join("COEFFS.json")).unwrap();
    let sensor = logtrim::TemperatureSensor {
        element: logtrim::SensorElement::NtcBeta(logtrim::Beta {
            r0_ohm: 47_000.0,
            t0_c: 25.0,
            beta_k: 3950.0,
        }),
        divider: logtrim::Divider {
            open_margin: 8,
            short_margin: 8,
            ..logtrim::Divider::ratiometric(logtrim::Placement::LowSide, 33_000.0, 12)
        },
        min_c: -20.0,
        max_c: 80.0,
    };
    f.temperature_sensor = Some(sensor);
    f.save(&dir.join("COEFFS.json")).unwrap();
    sensor
}

#[test]
fn a_raw_channel_unit_s_image_carries_its_sensor_for_either_path() {
    let dir = tempfile::tempdir().unwrap();
    let sensor = raw_channel_coeffs(dir.path());
    for (name, extra) in [("F32.bin", &["--no-fixed"][..]), ("FIXED.bin", &[][..])] {
        let o = logtrim_in(&[&["image", "COEFFS.json", "-o", name][..], extra].concat(), dir.path());
        assert_eq!(code(&o), 0, "{}", stderr(&o));
        assert!(stdout(&o).contains("temperature sensor description"), "{}", stdout(&o));
        let bytes = std::fs::read(dir.path().join(name)).unwrap();
        let img = Image::parse(&bytes).unwrap();
        // The calibration file's description, bit for bit, and the f32 firmware's reading from it.
        assert_eq!(img.sensor(), Some(sensor));
        for code in [0, 8, 9, 1000, 2048, 3000, 4087, 4088, 4095] {
            assert_eq!(img.celsius(code).map(f32::to_bits), sensor.celsius(code).map(f32::to_bits), "{code}");
        }
        // At T₀ the NTC is 47 kΩ: 47/(33 + 47) of the 4096-code supply (common practice for NTC dividers).
        let at_25 = (4096.0f64 * 47.0 / 80.0).round() as u32;
        assert!((img.celsius(at_25).unwrap() - 25.0).abs() < 0.05);
        // Both paths agree on the channel: the fixed section's table exactly when the sensor section is there.
        assert_eq!(img.fixed().map(|f| f.sensor().is_some()), (name == "FIXED.bin").then_some(true));

        let described = stdout(&logtrim_in(&["inspect", name], dir.path()));
        for line in [
            "0x8004        40 bytes  sensor (temperature channel)",
            "element    NTC (Beta) R0 47000 Ω at 25 °C, β 3950 K, to ground",
            "series 33000 Ω, 12 bits, full scale 4096 codes, open margin 8 codes",
            "range      -20 to 80 °C",
        ] {
            assert!(described.contains(line), "{line} in {described}");
        }
        let o = logtrim_in(&["inspect", "--json", name], dir.path());
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        let back: logtrim::TemperatureSensor =
            serde_json::from_value(v["temperature_sensor"].clone()).unwrap();
        assert_eq!(back, sensor);
    }
    // A digital-sensor unit has no sensor section, and inspect says so.
    let dir = tempfile::tempdir().unwrap();
    coeffs(dir.path(), Some("GD-REF-00731"));
    assert_eq!(code(&logtrim_in(&["image", "COEFFS.json", "-o", "UNIT.bin"], dir.path())), 0);
    let img_bytes = std::fs::read(dir.path().join("UNIT.bin")).unwrap();
    assert_eq!(Image::parse(&img_bytes).unwrap().sensor(), None);
    let out = stdout(&logtrim_in(&["inspect", "UNIT.bin"], dir.path()));
    assert!(out.contains("temperature sensor: none in the image (temperatures arrive in °C)"), "{out}");
    assert!(!out.contains("0x8004"), "{out}");
}

#[test]
fn the_sensor_check_at_image_writing_refuses_an_image_that_disagrees_with_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let sensor = raw_channel_coeffs(dir.path());
    let file = CalFile::load(&dir.path().join("COEFFS.json")).unwrap();
    let bytes = logtrim_host::image_file::build_image(&file, None, 1).unwrap();
    assert_eq!(logtrim_host::image_file::check_sensor(&file, &bytes).map_err(|e| e.to_string()), Ok(()));
    // The same image held against a file whose channel has another series resistor, or no channel.
    let mut other = file.clone();
    let mut s = sensor;
    s.divider.series_ohm = 30_000.0;
    other.temperature_sensor = Some(s);
    let e = logtrim_host::image_file::check_sensor(&other, &bytes).unwrap_err().to_string();
    assert!(e.contains("temperature sensor disagrees with the calibration file"), "{e}");
    other.temperature_sensor = None;
    let e = logtrim_host::image_file::check_sensor(&other, &bytes).unwrap_err().to_string();
    assert!(e.contains("the file's sensor none"), "{e}");
}
