//! `logtrim apply`: run the firmware's correction over a readings file and write the results as CSV.

use std::path::PathBuf;

use clap::{Args, ValueEnum};
use logtrim_host::apply::write_results;
use logtrim_host::calfile::CalFile;
use logtrim_host::correct::{
    correct_rows_fixed_layered, correct_rows_layered, read_unit_readings, Arithmetic,
};
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
    let readings = read_unit_readings(&file, &args.readings, args.skip_bad_rows).map_err(Failure::input)?;
    for e in &readings.skipped {
        note!("skipped: {e}");
    }
    let results = match args.path {
        PathArg::F32 => correct_rows_layered(&cal, &readings, Arithmetic::F32, &layers),
        PathArg::F32Micromath => correct_rows_layered(&cal, &readings, Arithmetic::F32Micromath, &layers),
        PathArg::Fixed => {
            let tables = file
                .fixed_tables(&logtrim_host::tables::TableOptions::default())
                .map_err(|e| Failure::input(format!("{}: {e}", args.coeffs.display())))?;
            correct_rows_fixed_layered(&tables.view(), &readings, &layers)
        }
    };
    let out = AtomicFile::create(&args.output)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    let mut out = out;
    let summary = write_results(&readings, &results, &mut out).map_err(Failure::input)?;
    out.commit().map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
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
