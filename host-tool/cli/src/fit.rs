//! `logtrim fit`: fit a unit's calibration from chamber data, or a batch of units (one calibration file
//! and one image each).

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};
use logtrim::sensor::TemperatureSensor;
use logtrim_host::batch::{fit_units, UnitJob};
use logtrim_host::calfile::CalFile;
use logtrim_host::data::{read_calibration_file, CalData, ReadOptions};
use logtrim_host::fit::model::Spec;
use logtrim_host::fit::{fit, render_report, FitData, FitOptions};

use crate::Failure;

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
    #[arg(long, value_name = "TERMS")]
    model: Option<String>,
    /// Most Chebyshev terms of any series over temperature the search may use.
    #[arg(long, default_value_t = FitOptions::default().max_series, value_name = "N")]
    max_terms: usize,
    /// A gap in measured temperature larger than this (K) separates two chamber set-points.
    #[arg(long, default_value_t = FitOptions::default().setpoint_gap_k, value_name = "K")]
    setpoint_gap: f64,
    /// Refuse readings where the front end's sensitivity has fallen below this fraction of ideal
    /// (where bias current swamps the signal).
    #[arg(long, default_value_t = FitOptions::default().min_sensitivity, value_name = "FRACTION")]
    min_sensitivity: f64,
    /// Widen the calibrated x range by this much at each end, nepers (default: four times the rms error
    /// of the readings at that end, at most 0.05, so noise alone does not push an end reading out).
    #[arg(long, value_name = "NEPERS")]
    x_margin: Option<f64>,
    /// Allow (and flag) readings up to this far outside the calibrated temperature range, K.
    #[arg(long, default_value_t = 0.0, value_name = "K")]
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

fn load_sensor(path: &Option<PathBuf>) -> Result<Option<TemperatureSensor>, Failure> {
    let Some(p) = path else { return Ok(None) };
    let text = std::fs::read_to_string(p).map_err(|e| Failure::input(format!("{}: {e}", p.display())))?;
    let s: TemperatureSensor = serde_json::from_str(&text).map_err(|e| {
        Failure::input(format!("{}: line {}, column {}: {e}", p.display(), e.line(), e.column()))
    })?;
    s.validate().map_err(|e| Failure::input(format!("{}: {e}", p.display())))?;
    Ok(Some(s))
}

fn read(path: &Path, args: &FitArgs, sensor: Option<&TemperatureSensor>) -> Result<CalData, Failure> {
    let conv = move |code: u32| -> Result<f64, logtrim::Error> {
        match sensor {
            Some(s) => s.celsius_f64(code),
            None => Err(logtrim::Error::NotCalibrated),
        }
    };
    let opts = ReadOptions {
        adc_bits: args.bits,
        skip_bad_rows: args.skip_bad_rows,
        temp_converter: sensor.map(|_| &conv as &dyn Fn(u32) -> Result<f64, logtrim::Error>),
    };
    let data = read_calibration_file(path, &opts).map_err(Failure::input)?;
    if !data.skipped.is_empty() {
        eprintln!("{}: skipped {} bad row(s):", data.path, data.skipped.len());
        for e in data.skipped.iter().take(20) {
            eprintln!("  {e}");
        }
        if data.skipped.len() > 20 {
            eprintln!("  … and {} more", data.skipped.len() - 20);
        }
    }
    Ok(data)
}

fn options(args: &FitArgs) -> Result<FitOptions, Failure> {
    let spec = match &args.model {
        Some(m) => Some(Spec::parse(m).map_err(|e| Failure::input(format!("--model: {e}")))?),
        None => None,
    };
    Ok(FitOptions {
        bits: args.bits,
        setpoint_gap_k: args.setpoint_gap,
        spec,
        max_series: args.max_terms,
        rail_margin: args.rail_margin,
        min_sensitivity: args.min_sensitivity,
        x_margin: args.x_margin,
        extrapolation_k: args.extrapolate,
        ..FitOptions::default()
    })
}

/// Runs the verb.
pub fn run(args: FitArgs) -> Result<(), Failure> {
    let sensor = load_sensor(&args.sensor)?;
    let opt = options(&args)?;
    let mut jobs: Vec<UnitJob> = Vec::new();
    let batch_dir = args.input.is_dir();
    if batch_dir {
        let mut files: Vec<PathBuf> = std::fs::read_dir(&args.input)
            .map_err(|e| Failure::input(format!("{}: {e}", args.input.display())))?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x.eq_ignore_ascii_case("csv")))
            .collect();
        files.sort();
        if files.is_empty() {
            return Err(Failure::input(format!("{}: no .csv files in this folder", args.input.display())));
        }
        for f in files {
            let data = read(&f, &args, sensor.as_ref())?;
            let stem = f.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
            jobs.extend(unit_jobs(&data, &stem, args.unit.as_deref()));
        }
    } else {
        let data = read(&args.input, &args, sensor.as_ref())?;
        let stem = args.input.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
        jobs = unit_jobs(&data, &stem, args.unit.as_deref());
        if let Some(u) = &args.unit {
            if jobs.is_empty() {
                return Err(Failure::input(format!("{}: no rows of unit {u:?}", data.path)));
            }
        }
    }
    if jobs.len() == 1 && !batch_dir {
        return fit_one(&jobs[0], &opt, sensor, &args);
    }
    std::fs::create_dir_all(&args.output)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    let bar = std::io::stderr().is_terminal().then(|| {
        let b = ProgressBar::new(jobs.len() as u64);
        if let Ok(style) = ProgressStyle::with_template("fitting {pos}/{len} units [{bar:30}] {eta}") {
            b.set_style(style);
        }
        b
    });
    let (spec, results) = fit_units(&jobs, &opt, sensor.as_ref(), &args.output, bar.as_ref());
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let failed: Vec<_> = results.iter().filter(|r| r.outcome.is_err()).collect();
    match spec {
        Some(s) if args.model.is_none() => println!(
            "model for the batch (cross-validated on up to {} pilot units): {}",
            logtrim_host::batch::PILOT_UNITS,
            s.to_arg()
        ),
        _ => {}
    }
    for r in &results {
        match &r.outcome {
            Ok((json, _)) if !args.quiet || r.note.is_some() => println!(
                "{:<16} ok      worst set-point rms {:.3e} Np, noise floor {}  {}{}",
                r.serial,
                r.worst_rms_np.unwrap_or(f64::NAN),
                r.noise_floor_np.map(|f| format!("{f:.3e} Np")).unwrap_or_else(|| "n/a".into()),
                json.display(),
                r.note.as_ref().map(|n| format!("\n{:<16} note    {n}", "")).unwrap_or_default()
            ),
            Ok(_) => {}
            Err(why) => println!("{:<16} FAILED  {why}", r.serial),
        }
    }
    println!(
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

fn unit_jobs(data: &CalData, stem: &str, only: Option<&str>) -> Vec<UnitJob> {
    if data.units.is_empty() {
        if only.is_some_and(|u| u != stem) {
            return vec![];
        }
        return vec![UnitJob { serial: stem.to_string(), data: FitData::from_rows(&data.rows, None) }];
    }
    data.units
        .iter()
        .enumerate()
        .filter(|(_, s)| only.is_none_or(|u| u == s.as_str()))
        .map(|(i, s)| UnitJob { serial: s.clone(), data: FitData::from_rows(&data.rows, Some(i as u32)) })
        .collect()
}

fn fit_one(
    job: &UnitJob,
    opt: &FitOptions,
    sensor: Option<TemperatureSensor>,
    args: &FitArgs,
) -> Result<(), Failure> {
    let out = fit(&job.data, opt).map_err(|e| Failure::check(format!("{}: {e}", args.input.display())))?;
    if !args.quiet {
        print!("{}", render_report(&out));
        let c = &out.calibration;
        println!(
            "calibrated range: {:.2} … {:.2} °C, x {:.3} … {:.3} Np (ratio {:.4e} … {:.4e})",
            c.temperature.min_c,
            c.temperature.max_c,
            c.x_range.min,
            c.x_range.max,
            f64::from(c.x_range.min).exp(),
            f64::from(c.x_range.max).exp()
        );
    }
    let unit = (!job.serial.is_empty()).then(|| job.serial.clone());
    let mut file = CalFile::new(out.calibration, unit);
    file.temperature_sensor = sensor;
    file.fit = serde_json::to_value(&out).ok();
    file.save(&args.output).map_err(Failure::input)?;
    println!("wrote {} ({} rows, model {})", args.output.display(), job.data.code.len(), out.chosen.to_arg());
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
            println!("wrote {} and {} chart(s)", page.display(), written.len().saturating_sub(1));
        }
    }
    Ok(())
}
