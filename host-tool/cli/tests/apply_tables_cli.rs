//! `apply` row by row as the firmware: on the fixed path with the table sizes `emit` and `image` take (the
//! rows it writes are the rows the tables of an image made with the same sizes give, read back through the
//! firmware's loader; sizes with another path are refused); the temperature the firmware read from a raw
//! channel in a column of its own; sensor open and short told apart; a code beyond the converter refused
//! in its row, the rest of the file corrected. Each for a unit whose temperature arrives in °C and for one
//! that reads a raw NTC channel.

mod common;

#[path = "../../tests/common/mod.rs"]
mod fixtures;

use std::path::Path;

use common::{logtrim, scratch};
use fixtures::units;
use logtrim::{Image, TemperatureSensor};
use logtrim_host::calfile::CalFile;
use logtrim_host::correct::x_of_q24;
use logtrim_host::image_file::load_fixed;

/// The raw NTC channel of the `photometer-ntc` preset (12-bit, −40…125 °C, invented values).
fn ntc() -> TemperatureSensor {
    logtrim_host::frontend::preset("photometer-ntc").unwrap().firmware_sensor().unwrap()
}

/// Writes the calibration file and readings over the code range and the calibrated temperatures (by °C, or
/// by the channel's code for a raw channel); returns their paths.
fn unit(d: &Path, raw: bool) -> (String, String) {
    let mut file = CalFile::new(units::hard_uncompensated(), Some("ABS-7".into()));
    let mut csv = String::from(if raw { "code,temp_code\n" } else { "code,temp_c\n" });
    if raw {
        file.temperature_sensor = Some(ntc());
    }
    for (i, code) in (200..65_300u32).step_by(1_117).enumerate() {
        let t = -20.0 + 105.0 * (i % 23) as f64 / 22.0;
        if raw {
            let tc = ntc().code_f64(t).unwrap().round();
            csv.push_str(&format!("{code},{tc}\n"));
        } else {
            csv.push_str(&format!("{code},{t}\n"));
        }
    }
    let (c, r) = (d.join("COEFFS.json"), d.join("readings.csv"));
    file.save(&c).unwrap();
    std::fs::write(&r, csv).unwrap();
    (c.display().to_string(), r.display().to_string())
}

fn rows(path: &Path) -> Vec<Vec<String>> {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines().map(|l| l.split(',').map(str::to_string).collect()).collect()
}

#[test]
fn apply_on_the_fixed_path_takes_the_table_sizes_of_emit_and_image() {
    for raw in [false, true] {
        let d = scratch(if raw { "apply-tables-raw" } else { "apply-tables" });
        let (c, r) = unit(&d, raw);
        let sizes = ["--t-knots", "6", "--xa-knots", "12", "--sensor-segments", "64"];
        let out = d.join("out.csv");
        let o = out.to_str().unwrap();
        let (code, text, err) =
            logtrim(&[&["apply", &c, &r, "--path", "fixed", "-o", o][..], &sizes].concat());
        assert_eq!(code, 0, "{text}{err}");
        let img = d.join("unit.bin");
        let i = img.to_str().unwrap();
        let (code, text, err) = logtrim(&[&["image", &c, "-o", i][..], &sizes].concat());
        assert_eq!(code, 0, "{text}{err}");
        let bytes = std::fs::read(&img).unwrap();
        let tables = load_fixed(&Image::parse(&bytes).unwrap()).unwrap().unwrap();
        assert!(tables.header.t_knots <= 6 && tables.header.xa_knots <= 12, "{:?}", tables.header);
        assert_eq!(tables.sensor.is_some(), raw);
        let view = tables.view();
        let got = rows(&out);
        let col = |name: &str| got[0].iter().position(|h| h == name).unwrap();
        let (x_col, err_col) = (col("ln_ratio"), col("error"));
        let mut values = 0;
        for row in &got[1..] {
            let code: u32 = row[0].parse().unwrap();
            let want = if raw {
                view.correct_raw(code, row[1].parse().unwrap())
            } else {
                view.correct(code, (row[1].parse::<f64>().unwrap() * 1000.0).round() as i32)
            };
            match want {
                Ok(reading) => {
                    let x: f64 = row[x_col].parse().unwrap();
                    assert_eq!(x, x_of_q24(reading.x), "{row:?}");
                    values += 1;
                }
                Err(_) => assert!(!row[err_col].is_empty(), "{row:?}"),
            }
        }
        assert!(values > 30, "{values} rows with a value");
        // The default sizes give other tables, so other numbers somewhere.
        let (code, _, err) = logtrim(&["apply", &c, &r, "--path", "fixed", "-o", o]);
        assert_eq!(code, 0, "{err}");
        assert_ne!(rows(&out), got);
        let _ = std::fs::remove_dir_all(&d);
    }
}

#[test]
fn table_sizes_without_the_fixed_path_are_refused() {
    let d = scratch("apply-tables-f32");
    let (c, r) = unit(&d, false);
    let out = d.join("out.csv");
    let (code, _, err) = logtrim(&["apply", &c, &r, "--xa-knots", "12", "-o", out.to_str().unwrap()]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("they need --path fixed"), "{err}");
    assert!(!out.exists());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn each_row_gets_the_firmware_s_status_and_a_raw_channel_its_temperature() {
    for raw in [false, true] {
        let d = scratch(if raw { "apply-rows-raw" } else { "apply-rows" });
        let (c, _) = unit(&d, raw);
        let file = CalFile::load(Path::new(&c)).unwrap();
        // A good row, a code beyond the 16-bit converter, then (raw) the channel's rails: the low-side NTC's
        // code 0 is a short, its top an open circuit.
        let (good_t, t) = if raw { ("1800", "temp_code") } else { ("25", "temp_c") };
        let mut csv = format!("id,code,{t}\n1,30000,{good_t}\n2,70000,{good_t}\n");
        if raw {
            csv.push_str("3,30000,0\n4,30000,4095\n");
        }
        let r = d.join("rows.csv");
        std::fs::write(&r, csv).unwrap();
        for path in ["f32", "fixed"] {
            let out = d.join(format!("{path}.csv"));
            let o = out.to_str().unwrap();
            let (code, text, err) = logtrim(&["apply", &c, r.to_str().unwrap(), "--path", path, "-o", o]);
            assert_eq!(code, 0, "{text}{err}");
            let got = rows(&out);
            let col = |name: &str| got[0].iter().position(|h| h == name);
            let e = col("error").unwrap();
            assert!(got[1][e].is_empty() && !got[1][col("ln_ratio").unwrap()].is_empty(), "{got:?}");
            assert_eq!(got[2][e], "code_out_of_adc_range", "{path}");
            let Some(tc) = col("firmware_temp_c") else {
                assert!(!raw, "{path}: no firmware_temp_c column");
                continue;
            };
            assert!(raw, "{path}: a digital unit's output has no firmware_temp_c");
            assert_eq!((got[3][e].as_str(), got[4][e].as_str()), ("sensor_short", "sensor_open"), "{path}");
            assert!(got[3][tc].is_empty() && got[4][tc].is_empty());
            // What each firmware reads at code 1800: the description in f32, or the fixed path's table.
            let read: f64 = got[1][tc].parse().unwrap();
            let want = if path == "f32" {
                f64::from(ntc().celsius(1800).unwrap())
            } else {
                let tables = file.fixed_tables(&logtrim_host::tables::TableOptions::default()).unwrap();
                let theta = tables.view().theta_from_code(1800).unwrap();
                f64::from(theta) / 1024.0 / 1000.0
            };
            assert!((read - want).abs() <= 1e-6 * want.abs(), "{path}: {read} vs {want}");
            // The row beyond the converter still shows the temperature the channel gave.
            assert_eq!(got[2][tc], got[1][tc]);
        }
        let _ = std::fs::remove_dir_all(&d);
    }
}
