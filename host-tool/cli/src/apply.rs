//! `logtrim apply`: run the firmware's correction over a readings file and write the results as CSV.

use std::path::PathBuf;

use clap::{Args, ValueEnum};
use logtrim_host::apply::ResultsWriter;
use logtrim_host::calfile::CalFile;
use logtrim_host::correct::{correct_rows_fixed_layered, correct_rows_layered, sensor_converter, Arithmetic};
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
    /// The integer fixed-point path (parts without an FPU), from the tables `logtrim emit` would write
    /// with its default sizes.
    Fixed,
}

/// Rows corrected (in parallel) and written per chunk.
const CHUNK_ROWS: usize = 1 << 16;

/// Options of `logtrim apply`.
#[derive(Args, Debug)]
pub struct ApplyArgs {
    /// The unit's calibration file.
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
}

/// Runs the verb.
pub fn run(args: ApplyArgs) -> Result<(), Failure> {
    crate::check_outputs(
        &[Some(&args.coeffs), Some(&args.readings), args.trim.as_deref(), args.blank.as_deref()],
        &[Some(&args.output)],
        &[],
    )?;
    let file = CalFile::load(&args.coeffs).map_err(Failure::input)?;
    let cal = file.calibration;
    let limits = args.limits.limits()?;
    let layers = layers_from_files(&cal, args.trim.as_deref(), args.blank.as_deref(), &limits)
        .map_err(crate::trim::layer_failure)?;
    for kind in logtrim_host::records::unbound_records(&layers) {
        note!(
            "logtrim: warning: the {kind} record is bound to no calibration (factory fingerprint 0): it is applied to this one unchecked; records made by `logtrim {kind}` are bound to theirs"
        );
    }
    if matches!(args.path, PathArg::F32Micromath) {
        note!("warning: {}", logtrim_host::correct::MICROMATH_WARNING);
    }
    let tables = match args.path {
        PathArg::Fixed => Some(
            file.fixed_tables(&logtrim_host::tables::TableOptions::default())
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
        let results = match &tables {
            None if args.path == PathArg::F32Micromath => {
                correct_rows_layered(&cal, &chunk, Arithmetic::F32Micromath, &layers)
            }
            None => correct_rows_layered(&cal, &chunk, Arithmetic::F32, &layers),
            Some(t) => correct_rows_fixed_layered(&t.view(), &chunk, &layers),
        };
        writer.write(&chunk, &results).map_err(Failure::input)?;
    }
    let skipped = stream.finish().map_err(Failure::input)?;
    let (summary, out) = writer.finish().map_err(Failure::input)?;
    out.commit().map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    for e in &skipped {
        note!("skipped: {e}");
    }
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
        args.output.display()
    );
    Ok(())
}
