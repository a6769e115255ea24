//! `logtrim fit`: fit a unit's calibration from chamber data, or a batch of units (one calibration file
//! and one image each).

use std::io::IsTerminal;
use std::path::PathBuf;

use clap::Args;
use logtrim::sensor::TemperatureSensor;
use logtrim_host::batch::{fit_one, fit_units, read_chamber_data, ChamberRead, UnitJob};
use logtrim_host::data::RowError;
use logtrim_host::fit::model::Spec;
use logtrim_host::fit::{render_report, FitOptions};
use logtrim_host::sensor_tool::load_settings;

use crate::values::{real, Span};
use crate::Failure;
use logtrim::calibration::MAX_SERIES;

/// Options of `logtrim fit`.
#[derive(Args, Debug)]
pub struct FitArgs {
    /// Chamber data: a CSV file (columns code, temp_c or temp_code, ratio; optional unit, weight), or a
    /// folder of such files, one unit each (the file name is the serial unless a unit column says).
    input: PathBuf,
    /// Where to write: the calibration file (COEFFS.json) for one unit; a folder for a batch, which gets
    /// SERIAL.json and SERIAL.bin for every unit.
    #[arg(short, long, value_name = "PATH")]
    output: PathBuf,
    /// Resolution of the log channel's ADC, bits.
    #[arg(long, default_value_t = 16, value_parser = clap::value_parser!(u8).range(1..=24))]
    bits: u8,
    /// Temperature-channel description (JSON of logtrim's TemperatureSensor) for data with a temp_code
    /// column; it is stored in the calibration file.
    #[arg(long, value_name = "SENSOR.json")]
    sensor: Option<PathBuf>,
    /// Skip rows with bad values (each is listed) instead of refusing the file.
    #[arg(long)]
    skip_bad_rows: bool,
    /// Fix the model size instead of choosing it by cross-validation, e.g.
    /// offset=3,slope=2,bulk=1,pole,bias,residual=3x2.
    #[arg(long, value_name = "TERMS", value_parser = parse_model)]
    model: Option<Spec>,
    /// Most Chebyshev terms of any series over temperature the search may use.
    #[arg(long, default_value_t = FitOptions::default().max_series as u8, value_name = "N",
          value_parser = clap::value_parser!(u8).range(1..=MAX_SERIES as i64))]
    max_terms: u8,
    /// A gap in measured temperature larger than this (K) separates two chamber set-points.
    #[arg(long, default_value_t = FitOptions::default().setpoint_gap_k, value_name = "K",
          allow_negative_numbers = true, value_parser = real(Span::above(0.0, 1000.0)))]
    setpoint_gap: f64,
    /// Refuse readings where the front end's sensitivity has fallen below this fraction of ideal
    /// (where bias current swamps the signal).
    #[arg(long, default_value_t = FitOptions::default().min_sensitivity, value_name = "FRACTION",
          allow_negative_numbers = true, value_parser = real(Span::below(0.0, 1.0)))]
    min_sensitivity: f64,
    /// Widen the calibrated x range by this much at each end, nepers (default: four times the rms error
    /// of the readings at that end, at most 0.05, so noise alone does not push an end reading out).
    #[arg(long, value_name = "NEPERS", allow_negative_numbers = true, value_parser = real(Span::closed(0.0, 1.0)))]
    x_margin: Option<f64>,
    /// Allow (and flag) readings up to this far outside the calibrated temperature range, K.
    #[arg(long, default_value_t = 0.0, value_name = "K", allow_negative_numbers = true,
          value_parser = real(Span::closed(0.0, 100.0)))]
    extrapolate: f64,
    /// Codes within this many of an ADC rail are refused as saturated (default 2^(bits−13), at least 1).
    #[arg(long, value_name = "CODES")]
    rail_margin: Option<u32>,
    /// Only this unit of a file with a unit column.
    #[arg(long, value_name = "SERIAL")]
    unit: Option<String>,
    /// Also write a fit report in Markdown, with its charts, into this folder (to file with the unit's
    /// record).
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,
    /// Print only the summary line.
    #[arg(short, long)]
    quiet: bool,
}

/// Prints the rows a file skipped (at most 20 of them per file).
fn report_skipped(skipped: &[(String, Vec<RowError>)]) {
    for (path, rows) in skipped {
        note!("{path}: skipped {} bad row(s):", rows.len());
        for e in rows.iter().take(20) {
            note!("  {e}");
        }
        if rows.len() > 20 {
            note!("  … and {} more", rows.len() - 20);
        }
    }
}

fn parse_model(text: &str) -> Result<Spec, String> {
    Spec::parse(text)
}

fn options(args: &FitArgs) -> Result<FitOptions, Failure> {
    // The rail margin's range depends on --bits: codes within it of either rail are refused, so at least
    // one code must lie between the two bands.
    if let Some(m) = args.rail_margin {
        let most = ((1u32 << args.bits) - 1).saturating_sub(1) / 2;
        if m > most {
            return Err(Failure::input(format!(
                "--rail-margin {m}: expected 0..={most} codes for a {}-bit converter (--bits): a larger margin leaves no usable code",
                args.bits
            )));
        }
    }
    Ok(FitOptions {
        bits: args.bits,
        setpoint_gap_k: args.setpoint_gap,
        spec: args.model,
        max_series: usize::from(args.max_terms),
        rail_margin: args.rail_margin,
        min_sensitivity: args.min_sensitivity,
        x_margin: args.x_margin,
        extrapolation_k: args.extrapolate,
        ..FitOptions::default()
    })
}

/// Runs the verb.
pub fn run(args: FitArgs) -> Result<(), Failure> {
    let sensor = match &args.sensor {
        Some(p) => Some(load_settings(p).map_err(Failure::input)?),
        None => None,
    };
    let opt = options(&args)?;
    // Every output is checked before anything is written: the calibration file (or the batch's folder)
    // and the report's folder.
    let inputs = [Some(args.input.as_path()), args.sensor.as_deref()];
    crate::check_outputs(&inputs, &[], &[args.report.as_deref()])?;
    if args.input.is_dir() {
        crate::check_outputs(&inputs, &[], &[Some(&args.output)])?;
    }
    let how = ChamberRead {
        adc_bits: args.bits,
        skip_bad_rows: args.skip_bad_rows,
        sensor: sensor.as_ref(),
        unit: args.unit.as_deref(),
    };
    let data = read_chamber_data(&args.input, &how).map_err(Failure::input)?;
    report_skipped(&data.skipped);
    let jobs = data.jobs;
    if let ([job], false) = (jobs.as_slice(), data.folder) {
        crate::check_outputs(&inputs, &[Some(&args.output)], &[])?;
        return fit_single(job, &opt, sensor.as_ref(), &args);
    }
    crate::check_outputs(&inputs, &[], &[Some(&args.output)])?;
    std::fs::create_dir_all(&args.output)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    let bar =
        crate::progress::bar("fitting {pos}/{len} units [{bar:30}] {eta}", std::io::stderr().is_terminal());
    let (spec, results) = fit_units(
        &jobs,
        &opt,
        sensor.as_ref(),
        &args.output,
        crate::stamp::now(),
        &crate::progress::on(&bar),
    );
    crate::progress::finish(bar);
    let failed: Vec<_> = results.iter().filter(|r| r.outcome.is_err()).collect();
    match spec {
        Some(s) if args.model.is_none() => say!(
            "model for the batch (cross-validated on up to {} pilot units): {}",
            logtrim_host::batch::PILOT_UNITS,
            s.to_arg()
        ),
        _ => {}
    }
    for r in &results {
        match &r.outcome {
            Ok((json, _)) if !args.quiet || r.note.is_some() => say!(
                "{:<16} ok      worst set-point rms {:.3e} Np, noise floor {}  {}{}",
                r.serial,
                r.worst_rms_np.unwrap_or(f64::NAN),
                r.noise_floor_np.map(|f| format!("{f:.3e} Np")).unwrap_or_else(|| "n/a".into()),
                json.display(),
                r.note.as_ref().map(|n| format!("\n{:<16} note    {n}", "")).unwrap_or_default()
            ),
            Ok(_) => {}
            Err(why) => say!("{:<16} FAILED  {why}", r.serial),
        }
    }
    say!(
        "{} units: {} calibrated, {} failed; files in {}",
        results.len(),
        results.len() - failed.len(),
        failed.len(),
        args.output.display()
    );
    if failed.is_empty() {
        Ok(())
    } else {
        Err(Failure::check(format!("{} of {} units could not be calibrated", failed.len(), results.len())))
    }
}

fn fit_single(
    job: &UnitJob,
    opt: &FitOptions,
    sensor: Option<&TemperatureSensor>,
    args: &FitArgs,
) -> Result<(), Failure> {
    let (out, file) = fit_one(job, opt, sensor, crate::stamp::now())
        .map_err(|e| Failure::check(format!("{}: {e}", args.input.display())))?;
    if !args.quiet {
        say_raw!("{}", render_report(&out));
        let c = &out.calibration;
        say!(
            "calibrated range: {:.2} … {:.2} °C, x {:.3} … {:.3} Np (ratio {:.4e} … {:.4e})",
            c.temperature.min_c,
            c.temperature.max_c,
            c.x_range.min,
            c.x_range.max,
            f64::from(c.x_range.min).exp(),
            f64::from(c.x_range.max).exp()
        );
    }
    file.save(&args.output).map_err(Failure::input)?;
    say!("wrote {} ({} rows, model {})", args.output.display(), job.data.code.len(), out.chosen.to_arg());
    if let Some(dir) = &args.report {
        std::fs::create_dir_all(dir).map_err(|e| Failure::input(format!("{}: {e}", dir.display())))?;
        let source = args.input.display().to_string();
        let report = logtrim_host::report::FitReport {
            calfile: &file,
            outcome: &out,
            data: &job.data,
            options: opt,
            source: &source,
        };
        let written = report.write_to(dir).map_err(Failure::input)?;
        if let Some(page) = written.first() {
            say!("wrote {} and {} chart(s)", page.display(), written.len().saturating_sub(1));
        }
    }
    Ok(())
}
