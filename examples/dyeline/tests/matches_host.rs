//! The example crate's integer path equals the host's, bit for bit.
//!
//! The host side is what `logtrim apply COEFFS.json READINGS.csv --path fixed` runs
//! (`host-tool/cli/src/apply.rs`): the readings read by `logtrim_host::data::read_readings` with the
//! calibration's ADC resolution, the tables from `CalFile::fixed_tables(&TableOptions::default())`, and
//! `logtrim_host::correct::correct_rows_fixed` over them. These tests call those same library functions on the
//! same readings (running the CLI binary itself would need a path to it that a test of this package cannot
//! find robustly), and compare with what the crate computes from the tables its `build.rs` generated and it
//! compiled in: x, every unit of `Unit::ALL`, the extrapolation flag, and the error of every refused row.

use std::path::PathBuf;

use logtrim::fixed::{value_frac_bits, FixedReading, X_FRAC};
use logtrim::{Error, Unit};
use logtrim_host::calfile::CalFile;
use logtrim_host::correct::{correct_rows_fixed, RowValue};
use logtrim_host::data::{read_readings, ReadOptions, Readings};
use logtrim_host::emit::{self, Format, Provenance};
use logtrim_host::tables::{FixedTables, TableOptions};

fn crate_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn coeffs() -> CalFile {
    CalFile::load(&crate_dir().join("calibration/COEFFS.json")).unwrap()
}

fn host_tables(file: &CalFile) -> FixedTables {
    file.fixed_tables(&TableOptions::default()).unwrap()
}

/// x, every unit (each as its integer: value · 2^frac) and the extrapolation flag.
type Exact = Result<(i64, [i64; Unit::ALL.len()], bool), Error>;

/// A host value times 2^frac, which must be an integer (the fixed path's values are exact binary fractions).
fn scaled(v: f64, frac: u32) -> i64 {
    let s = v * (1u64 << frac) as f64;
    assert!(s.fract() == 0.0 && s.abs() < 2f64.powi(62), "host value {v} is not a Q{frac} integer");
    s as i64
}

fn of_host(r: &Result<RowValue, Error>) -> Exact {
    let r = (*r)?;
    let mut units = [0i64; Unit::ALL.len()];
    for ((q, v), u) in units.iter_mut().zip(r.units).zip(Unit::ALL) {
        *q = scaled(v, value_frac_bits(u));
    }
    Ok((scaled(r.x, X_FRAC), units, r.temperature_extrapolated))
}

fn of_crate(r: Result<FixedReading, Error>) -> Exact {
    let r = r?;
    let mut units = [0i64; Unit::ALL.len()];
    for (q, u) in units.iter_mut().zip(Unit::ALL) {
        *q = r.value(u)?;
    }
    Ok((i64::from(r.x), units, r.temperature_extrapolated))
}

/// The temperature register a `temp_c` value came from (the simulated sensor reads in 1/128 °C).
fn register(temp_c: f64) -> i16 {
    let raw = temp_c * 128.0;
    assert!(raw.fract() == 0.0 && raw.abs() <= 32767.0, "{temp_c} °C is not a 1/128 °C register value");
    raw as i16
}

fn read(file: &CalFile, csv: &[u8], name: &str) -> Readings {
    let opts = ReadOptions { adc_bits: file.calibration.adc.bits, ..ReadOptions::default() };
    read_readings(csv, name, &opts).unwrap()
}

/// Compares every row; returns how many the correction accepted and the names of the errors seen.
fn compare(file: &CalFile, readings: &Readings) -> (usize, Vec<&'static str>) {
    let tables = host_tables(file);
    let host = correct_rows_fixed(&tables.view(), readings);
    assert_eq!(host.len(), readings.rows.len());
    let mut ok = 0;
    let mut errors = Vec::new();
    for (row, h) in readings.rows.iter().zip(&host) {
        let raw = register(*row.temp_c.as_ref().unwrap());
        let mine = of_crate(dyeline::correct_fixed(row.code, raw));
        assert_eq!(
            mine,
            of_host(h),
            "{} line {}: code {}, register {raw}",
            readings.path,
            row.line,
            row.code
        );
        match mine {
            Ok(_) => ok += 1,
            Err(e) => {
                if !errors.contains(&e.name()) {
                    errors.push(e.name());
                }
            }
        }
    }
    (ok, errors)
}

#[test]
fn the_compiled_tables_are_the_hosts_tables() {
    let file = coeffs();
    assert_eq!(dyeline::FIXED, host_tables(&file).view());
    assert_eq!(dyeline::FIXED.validate(), Ok(()));
    assert_eq!(dyeline::unit::SERIAL, file.unit.as_deref().unwrap());
    assert_eq!(dyeline::unit::CALIBRATED_AT, file.created_unix_s);
    assert_eq!(dyeline::unit::TABLE_BYTES, dyeline::FIXED.table_bytes());
}

#[test]
fn the_build_script_wrote_the_rust_emitters_output() {
    let generated = include_str!(concat!(env!("OUT_DIR"), "/unit_tables.rs"));
    let file = coeffs();
    let prov = Provenance { unit: file.unit.clone(), source: Some("calibration/COEFFS.json".into()) };
    assert_eq!(generated, emit::render(&host_tables(&file), Format::Rust, &prov));
    assert!(generated.starts_with(&format!("// {}\n", emit::banner())));
    let info = include_str!(concat!(env!("OUT_DIR"), "/unit_info.rs"));
    assert!(info.starts_with(&format!("// {}\n", emit::banner())));
}

#[test]
fn the_validation_run_corrects_as_apply_path_fixed() {
    let file = coeffs();
    let path = crate_dir().join("data/readings.csv");
    let readings = read(&file, &std::fs::read(&path).unwrap(), &path.display().to_string());
    assert_eq!(readings.rows.len(), 400);
    let (ok, _) = compare(&file, &readings);
    // The validation run lies inside the calibrated ranges: nearly every reading is corrected.
    assert!(ok >= 390, "only {ok} of 400 validation readings corrected");
}

/// Registers from below the accepted range to above it, with the range's ends and their neighbours.
fn registers(file: &CalFile) -> Vec<i16> {
    let t = &file.calibration.temperature;
    let lo = ((t.min_c - t.extrapolation_k) * 128.0).floor() as i16;
    let hi = ((t.max_c + t.extrapolation_k) * 128.0).ceil() as i16;
    let mut v: Vec<i16> = (-1920..=8960).step_by(173).collect();
    for end in [lo, hi, (t.min_c * 128.0) as i16, (t.max_c * 128.0) as i16] {
        v.extend(end - 2..=end + 2);
    }
    v
}

#[test]
fn a_grid_of_codes_and_registers_corrects_as_apply_path_fixed() {
    let file = coeffs();
    let max = (1u32 << file.calibration.adc.bits) - 1;
    let margin = file.calibration.adc.rail_margin;
    let mut codes: Vec<u32> = (0..=max).step_by(61).collect();
    for edge in [margin, max - margin] {
        codes.extend(edge - 1..=edge + 1);
    }
    codes.push(max);
    let mut csv = String::from("code,temp_c\n");
    for raw in registers(&file) {
        for &code in &codes {
            csv.push_str(&format!("{code},{}\n", f64::from(raw) / 128.0));
        }
    }
    let readings = read(&file, csv.as_bytes(), "grid.csv");
    assert!(readings.rows.len() > 60_000);
    let (ok, errors) = compare(&file, &readings);
    assert!(ok > 10_000, "only {ok} grid readings corrected");
    for e in ["saturated", "below_range", "above_range", "temperature_out_of_range"] {
        assert!(errors.contains(&e), "the grid never reached {e}: {errors:?}");
    }
}

#[test]
fn extrapolated_readings_are_flagged_on_both_sides() {
    // A reading 3 K above the calibrated range: accepted (the unit allows 5 K), flagged, and the same flag
    // on the host.
    let file = coeffs();
    let raw = ((file.calibration.temperature.max_c + 3.0) * 128.0).round() as i16;
    let csv = format!("code,temp_c\n30000,{}\n", f64::from(raw) / 128.0);
    let readings = read(&file, csv.as_bytes(), "hot.csv");
    compare(&file, &readings);
    let r = dyeline::correct_fixed(30_000, raw).unwrap();
    assert!(r.temperature_extrapolated);
}
