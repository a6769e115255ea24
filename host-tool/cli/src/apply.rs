//! `logtrim apply`: run the firmware's correction over a readings file and write the results as CSV.

use std::path::{Path, PathBuf};

use clap::{Args, ValueEnum};
use logtrim::field::Layers;
use logtrim_host::apply::{ApplySummary, ResultsWriter};
use logtrim_host::calfile::CalFile;
use logtrim_host::correct::{
    correct_rows_fixed_layered, correct_rows_layered, read_unit_readings, sensor_converter, Arithmetic,
};
use logtrim_host::data::{open_readings_file, ReadOptions, Readings, TempConverter};
use logtrim_host::output::AtomicFile;
use logtrim_host::records::layers_from_files;

use crate::Failure;

/// Which of the firmware's arithmetic paths to run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PathArg {
    /// f32 with libm (parts with an FPU).
    F32,
    /// f32 with micromath's fast approximations.
    F32Micromath,
    /// The integer fixed-point path (parts without an FPU), from the tables `logtrim emit` and `logtrim
    /// image` write with the same table sizes (--t-knots, --xa-knots, --sensor-segments).
    Fixed,
}

/// Rows corrected (in parallel) and written per chunk.
const CHUNK_ROWS: usize = 1 << 16;

/// Options of `logtrim apply`.
#[derive(Args, Debug)]
pub struct ApplyArgs {
    /// The unit's calibration file; or, for readings of several units (a unit column), a folder of
    /// calibration files named SERIAL.json (as `fit` writes a batch), each row corrected with its own unit's.
    coeffs: PathBuf,
    /// Readings: a CSV with code and temp_c (or temp_code, converted by the calibration file's sensor);
    /// every other column is copied to the output.
    readings: PathBuf,
    /// The output CSV: the input columns plus ln_ratio, the other units, temperature_extrapolated, error.
    #[arg(short, long, value_name = "OUT.csv")]
    output: PathBuf,
    /// The firmware arithmetic to run.
    #[arg(long, value_enum, default_value_t = PathArg::F32)]
    path: PathArg,
    /// Skip rows with bad values (each is listed) instead of refusing the file.
    #[arg(long)]
    skip_bad_rows: bool,
    /// A trim record (`logtrim trim`) to apply on top of the factory calibration.
    #[arg(long, value_name = "TRIM.bin")]
    trim: Option<PathBuf>,
    /// A blank record (`logtrim blank`): every value is then relative to the blank (absorbance against it).
    #[arg(long, value_name = "BLANK.bin")]
    blank: Option<PathBuf>,
    #[command(flatten)]
    limits: crate::trim::LimitArgs,
    /// Only the rows of this unit (readings with a unit column), corrected with the calibration given.
    #[arg(long, value_name = "SERIAL")]
    unit: Option<String>,
    /// Table sizes of the fixed path (with --path fixed only), as for `emit` and `image`.
    #[command(flatten)]
    tables: crate::emit::TableArgs,
}

impl ApplyArgs {
    /// The fixed path's table options; sizes other than the defaults with another path are refused, since
    /// they would change nothing.
    fn table_options(&self) -> Result<logtrim_host::tables::TableOptions, Failure> {
        let options = self.tables.options();
        if self.path != PathArg::Fixed && options != logtrim_host::tables::TableOptions::default() {
            return Err(Failure::input(
                "--t-knots, --xa-knots and --sensor-segments size the fixed path's tables: they need --path fixed",
            ));
        }
        Ok(options)
    }
}

/// The calibration file of `serial` in the folder `dir` (SERIAL.json as a batch writes it), checked to be
/// that unit's.
fn unit_calibration(dir: &std::path::Path, serial: &str) -> Result<CalFile, Failure> {
    let path = dir.join(format!("{}.json", logtrim_host::batch::file_stem(serial)));
    if !path.exists() {
        return Err(Failure::input(format!(
            "{}: no calibration of unit {serial:?} (expected {})",
            dir.display(),
            path.display()
        )));
    }
    let file = CalFile::load(&path).map_err(Failure::input)?;
    if file.unit.as_deref() != Some(serial) {
        return Err(Failure::input(format!(
            "{}: the calibration of unit {:?}, not {serial:?}",
            path.display(),
            file.unit.as_deref().unwrap_or("")
        )));
    }
    Ok(file)
}

/// Rows corrected: each row's result and the temperature its firmware read (°C, for a raw channel).
type Corrected = (Vec<Result<logtrim_host::correct::RowValue, logtrim::Error>>, Vec<Option<f64>>);

/// Corrects `readings` with one calibration file and its layers, on the chosen path.
fn correct_with(
    args: &ApplyArgs,
    file: &CalFile,
    readings: &logtrim_host::data::Readings,
    source: &std::path::Path,
) -> Result<(Corrected, logtrim::field::Layers), Failure> {
    let cal = file.calibration;
    let limits = args.limits.limits()?;
    let layers = layers_from_files(&cal, args.trim.as_deref(), args.blank.as_deref(), &limits)
        .map_err(crate::trim::layer_failure)?;
    warn_unbound(&layers);
    let f32_temps = || readings.rows.iter().map(|r| r.temp_c.as_ref().ok().copied()).collect();
    let corrected = match args.path {
        PathArg::F32 => (correct_rows_layered(&cal, readings, Arithmetic::F32, &layers), f32_temps()),
        PathArg::F32Micromath => {
            (correct_rows_layered(&cal, readings, Arithmetic::F32Micromath, &layers), f32_temps())
        }
        PathArg::Fixed => {
            let tables = file
                .fixed_tables(&args.table_options()?)
                .map_err(|e| Failure::input(format!("{}: {e}", source.display())))?;
            let temps = logtrim_host::correct::fixed_temperatures(&tables.view(), readings);
            (correct_rows_fixed_layered(&tables.view(), readings, &layers), temps)
        }
    };
    Ok((corrected, layers))
}

/// Runs the verb. A readings file of one unit streams through in chunks; readings with a unit column, or a
/// folder of calibrations, are corrected unit by unit.
pub fn run(args: ApplyArgs) -> Result<(), Failure> {
    crate::check_outputs(
        &[Some(&args.coeffs), Some(&args.readings), args.trim.as_deref(), args.blank.as_deref()],
        &[Some(&args.output)],
        &[],
    )?;
    args.table_options()?;
    if matches!(args.path, PathArg::F32Micromath) {
        note!("warning: {}", logtrim_host::correct::MICROMATH_WARNING);
    }
    if args.coeffs.is_dir() || has_unit_column(&args.readings) {
        run_by_unit(&args)
    } else {
        run_streaming(&args)
    }
}

/// Whether the readings file's header names a `unit` column (a file that cannot be opened is left to the
/// streaming path, which reports why).
fn has_unit_column(readings: &Path) -> bool {
    let any_temperature = |_: u32| Ok(0.0);
    let opts = ReadOptions { adc_bits: 24, skip_bad_rows: true, temp_converter: Some(&any_temperature) };
    open_readings_file(readings, &opts).is_ok_and(|s| s.columns().unit.is_some())
}

/// A warning for each field record bound to no calibration (factory fingerprint 0).
fn warn_unbound(layers: &Layers) {
    for kind in logtrim_host::records::unbound_records(layers) {
        note!(
            "logtrim: warning: the {kind} record is bound to no calibration (factory fingerprint 0): it is applied to this one unchecked; records made by `logtrim {kind}` are bound to theirs"
        );
    }
}

/// Readings with a unit column, or a folder of calibrations: each unit's rows corrected with its own
/// calibration (or only `--unit`'s), in memory, written in file order.
fn run_by_unit(args: &ApplyArgs) -> Result<(), Failure> {
    let folder = args.coeffs.is_dir();
    // The readings are read as the firmware reads them: the calibration's bits and temperature sensor (of
    // the first calibration of a folder; every unit's must agree).
    let first = if folder {
        let head = logtrim_host::data::read_readings_file(
            &args.readings,
            &logtrim_host::data::ReadOptions { adc_bits: 24, skip_bad_rows: true, temp_converter: None },
        );
        let serial = match &head {
            Ok(r) => r.units.first().cloned(),
            Err(_) => None,
        };
        match serial {
            Some(s) => unit_calibration(&args.coeffs, &s)?,
            None => {
                return Err(Failure::input(format!(
                "{} is a folder of calibrations: the readings {} need a unit column naming each row's unit",
                args.coeffs.display(),
                args.readings.display()
            )))
            }
        }
    } else {
        CalFile::load(&args.coeffs).map_err(Failure::input)?
    };
    let readings = read_unit_readings(&first, &args.readings, args.skip_bad_rows).map_err(Failure::input)?;
    for e in &readings.skipped {
        note!("skipped: {e}");
    }
    let (readings, results, temps, layers) = if readings.units.is_empty() {
        if folder {
            return Err(Failure::input(format!(
                "{} is a folder of calibrations: the readings {} need a unit column naming each row's unit",
                args.coeffs.display(),
                args.readings.display()
            )));
        }
        let ((r, t), l) = correct_with(args, &first, &readings, &args.coeffs)?;
        (readings, r, t, l)
    } else if let Some(u) = &args.unit {
        let Some(i) = readings.units.iter().position(|s| s == u) else {
            return Err(Failure::input(format!(
                "--unit {u:?}: no rows of that unit in {} (its units: {})",
                args.readings.display(),
                readings.units.join(", ")
            )));
        };
        let file = if folder { unit_calibration(&args.coeffs, u)? } else { first.clone() };
        let sub = readings.of_unit(i as u32);
        let left_out = readings.rows.len() - sub.rows.len();
        if left_out > 0 {
            say!("--unit {u}: {left_out} rows of other units left out");
        }
        let ((r, t), l) = correct_with(args, &file, &sub, &args.coeffs)?;
        (sub, r, t, l)
    } else if !folder {
        let own = first.unit.clone().unwrap_or_default();
        let others: Vec<&String> = readings.units.iter().filter(|s| **s != own).collect();
        if !others.is_empty() {
            return Err(Failure::input(format!(
                "{}: rows of {} unit(s) ({}{}) but {} is the calibration of {}: give a folder of calibrations (each row is corrected with its own unit's), or --unit SERIAL to correct one unit's rows with this calibration",
                args.readings.display(),
                others.len(),
                others.iter().take(5).map(|s| s.as_str()).collect::<Vec<_>>().join(", "),
                if others.len() > 5 { ", …" } else { "" },
                args.coeffs.display(),
                if own.is_empty() { "an unnamed unit".to_string() } else { format!("unit {own:?}") }
            )));
        }
        let ((r, t), l) = correct_with(args, &first, &readings, &args.coeffs)?;
        (readings, r, t, l)
    } else {
        // Each unit's rows with its own calibration, back in file order.
        let mut results = vec![Err(logtrim::Error::NotCalibrated); readings.rows.len()];
        let mut temps = vec![None; readings.rows.len()];
        let mut layers = logtrim::field::Layers::FACTORY;
        let mut where_: Vec<Vec<usize>> = vec![Vec::new(); readings.units.len()];
        for (k, r) in readings.rows.iter().enumerate() {
            if let Some(u) = r.unit {
                where_[u as usize].push(k);
            }
        }
        for (i, serial) in readings.units.iter().enumerate() {
            let file = unit_calibration(&args.coeffs, serial)?;
            if file.calibration.adc.bits != first.calibration.adc.bits
                || file.temperature_sensor != first.temperature_sensor
            {
                return Err(Failure::input(format!(
                    "unit {serial:?}: its calibration's ADC bits or temperature sensor differ from unit {:?}'s: correct the units' readings separately",
                    first.unit.as_deref().unwrap_or("")
                )));
            }
            let ((r, t), l) = correct_with(args, &file, &readings.of_unit(i as u32), &args.coeffs)?;
            layers = l;
            for ((k, v), t) in where_[i].iter().zip(r).zip(t) {
                results[*k] = v;
                temps[*k] = t;
            }
        }
        say!(
            "{} units, each corrected with its own calibration from {}",
            readings.units.len(),
            args.coeffs.display()
        );
        (readings, results, temps, layers)
    };
    let mut out = AtomicFile::create(&args.output)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    let mut writer =
        ResultsWriter::new(&readings.headers, &readings.path, &mut out).map_err(Failure::input)?;
    writer
        .write_with_temperatures(&readings, &results, &temps, args.path != PathArg::Fixed)
        .map_err(Failure::input)?;
    let (summary, _) = writer.finish().map_err(Failure::input)?;
    out.commit().map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    report(&layers, &summary, &args.output)?;
    Ok(())
}

/// One unit's readings streamed through in chunks: memory stays flat in the row count.
fn run_streaming(args: &ApplyArgs) -> Result<(), Failure> {
    let file = CalFile::load(&args.coeffs).map_err(Failure::input)?;
    let cal = file.calibration;
    let limits = args.limits.limits()?;
    let layers = layers_from_files(&cal, args.trim.as_deref(), args.blank.as_deref(), &limits)
        .map_err(crate::trim::layer_failure)?;
    warn_unbound(&layers);
    let tables = match args.path {
        PathArg::Fixed => Some(
            file.fixed_tables(&args.table_options()?)
                .map_err(|e| Failure::input(format!("{}: {e}", args.coeffs.display())))?,
        ),
        _ => None,
    };
    // The readings stream through in chunks: memory stays flat in the row count, and the output's
    // temporary file is removed on any failure or signal.
    let conv = sensor_converter(&file);
    let opts = ReadOptions {
        adc_bits: cal.adc.bits,
        skip_bad_rows: args.skip_bad_rows,
        temp_converter: conv.as_ref().map(|c| c as TempConverter<'_>),
    };
    let mut stream = open_readings_file(&args.readings, &opts).map_err(Failure::input)?;
    let name = args.readings.display().to_string();
    let out = AtomicFile::create(&args.output)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    let mut writer = ResultsWriter::new(stream.headers(), &name, out).map_err(Failure::input)?;
    loop {
        let mut rows = Vec::with_capacity(CHUNK_ROWS);
        while rows.len() < CHUNK_ROWS {
            match stream.next_row().map_err(Failure::input)? {
                Some(r) => rows.push(r),
                None => break,
            }
        }
        if rows.is_empty() {
            break;
        }
        let chunk = Readings {
            path: name.clone(),
            headers: stream.headers().to_vec(),
            columns: stream.columns().clone(),
            rows,
            units: stream.units().to_vec(),
            skipped: Vec::new(),
        };
        match &tables {
            None => {
                let arith = if args.path == PathArg::F32Micromath {
                    Arithmetic::F32Micromath
                } else {
                    Arithmetic::F32
                };
                let results = correct_rows_layered(&cal, &chunk, arith, &layers);
                writer.write(&chunk, &results).map_err(Failure::input)?;
            }
            Some(t) => {
                let results = correct_rows_fixed_layered(&t.view(), &chunk, &layers);
                let temps = logtrim_host::correct::fixed_temperatures(&t.view(), &chunk);
                writer.write_with_temperatures(&chunk, &results, &temps, false).map_err(Failure::input)?;
            }
        }
    }
    let skipped = stream.finish().map_err(Failure::input)?;
    let (summary, out) = writer.finish().map_err(Failure::input)?;
    out.commit().map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    for e in &skipped {
        note!("skipped: {e}");
    }
    report(&layers, &summary, &args.output)?;
    Ok(())
}

/// What `apply` says after writing: the field layers in force and the rows corrected and rejected.
fn report(layers: &Layers, summary: &ApplySummary, output: &Path) -> Result<(), Failure> {
    if let Some(t) = layers.trim() {
        let p = t.parts();
        say!(
            "trim: {} (record {}), x' = g·x + o with g = {:.6}, o = {:+.6} Np",
            p.kind.name(),
            p.info.sequence,
            p.gain,
            p.offset
        );
    }
    if let Some(b) = layers.blank() {
        say!(
            "blank: x = {:+.6} Np at {:.2} °C (record {}, {} readings): values are relative to it",
            b.x(),
            f64::from(b.temp_mc()) / 1000.0,
            b.info().sequence,
            b.samples()
        );
    }
    let by: Vec<String> = summary.by_error.iter().map(|(k, v)| format!("{v} {k}")).collect();
    say!(
        "{} rows: {} corrected, {} rejected{}{}; wrote {}",
        summary.rows,
        summary.rows - summary.rejected,
        summary.rejected,
        if by.is_empty() { String::new() } else { format!(" ({})", by.join(", ")) },
        if summary.extrapolated > 0 {
            format!(", {} with extrapolated temperature", summary.extrapolated)
        } else {
            String::new()
        },
        output.display()
    );
    Ok(())
}
