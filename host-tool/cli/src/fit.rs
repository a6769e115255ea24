//! `logtrim fit`: fit a unit's calibration from chamber data and judge it against the product's acceptance
//! limits, or a batch of units (a calibration file each, an image for each unit that passes, a summary).

use std::io::IsTerminal;
use std::path::PathBuf;

use clap::Args;
use logtrim::sensor::TemperatureSensor;
use logtrim_host::acceptance::{judge, AcceptanceLimits, Span};
use logtrim_host::batch::{
    fit_one, fit_units, read_chamber_data, BatchOptions, ChamberRead, ImageOptions, UnitJob,
};
use logtrim_host::calfile::CalFile;
use logtrim_host::data::{RowError, DEFAULT_ADC_BITS};
use logtrim_host::fit::model::Spec;
use logtrim_host::fit::{render_report, render_screening, FitOptions};
use logtrim_host::frontend::FrontEnd;
use logtrim_host::image_file::{self, ImageFormat};
use logtrim_host::output::number::Num;
use logtrim_host::sensor_tool::load_settings;
use logtrim_host::tables::TableOptions;

use crate::values::{real, Span as ValueSpan};
use crate::Failure;
use logtrim::calibration::MAX_SERIES;

/// Options of `logtrim fit`.
#[derive(Args, Debug)]
pub struct FitArgs {
    /// Chamber data: a CSV file (columns code, temp_c or temp_code, ratio; optional unit, weight), or a
    /// folder of such files, one unit each (the file name is the serial unless a unit column says).
    input: PathBuf,
    /// Where to write: the calibration file (COEFFS.json) for one unit; a folder for a batch, which gets
    /// SERIAL.json and, for every unit that passes acceptance, its image, and summary.csv and summary.json.
    #[arg(short, long, value_name = "PATH")]
    output: PathBuf,
    /// Resolution of the log channel's ADC, bits [default: the design's (--design), else 16].
    #[arg(long, value_parser = clap::value_parser!(u8).range(1..=24))]
    bits: Option<u8>,
    /// The design's description (the front-end JSON that `simulate --frontend` reads): the log channel's
    /// ADC bits are taken from it.
    #[arg(long, value_name = "FRONTEND.json")]
    design: Option<PathBuf>,
    /// The unit's serial, for a single unit [default: the file's unit column, else the file name].
    #[arg(long, value_name = "SERIAL")]
    serial: Option<String>,
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
    /// Fit against a population (POP.json from `logtrim characterise`): the population's model size and
    /// temperature range, the unit's shape held to the population's spread, so two or three set-points
    /// suffice; a unit outside the population fails acceptance (population_distance).
    #[arg(long, value_name = "POP.json", conflicts_with = "model")]
    population: Option<PathBuf>,
    /// Most Chebyshev terms of any series over temperature the search may use.
    #[arg(long, default_value_t = FitOptions::default().max_series as u8, value_name = "N",
          value_parser = clap::value_parser!(u8).range(1..=MAX_SERIES as i64))]
    max_terms: u8,
    /// A gap in measured temperature larger than this (K) separates two chamber set-points.
    #[arg(long, default_value_t = FitOptions::default().setpoint_gap_k, value_name = "K",
          allow_negative_numbers = true, value_parser = real(ValueSpan::above(0.0, 1000.0)))]
    setpoint_gap: f64,
    /// Refuse readings where the front end's sensitivity has fallen below this fraction of ideal
    /// (where bias current swamps the signal).
    #[arg(long, default_value_t = FitOptions::default().min_sensitivity, value_name = "FRACTION",
          allow_negative_numbers = true, value_parser = real(ValueSpan::below(0.0, 1.0)))]
    min_sensitivity: f64,
    /// Widen the calibrated x range by this much at each end, nepers (default: four times the rms error
    /// of the readings at that end, at most 0.05, so noise alone does not push an end reading out).
    #[arg(long, value_name = "NEPERS", allow_negative_numbers = true, value_parser = real(ValueSpan::closed(0.0, 1.0)))]
    x_margin: Option<f64>,
    /// Allow (and flag) readings up to this far outside the calibrated temperature range, K.
    #[arg(long, default_value_t = 0.0, value_name = "K", allow_negative_numbers = true,
          value_parser = real(ValueSpan::closed(0.0, 100.0)))]
    extrapolate: f64,
    /// Codes within this many of an ADC rail are set aside and refused as saturated (default
    /// 2^(bits−13), at least 1).
    #[arg(long, value_name = "CODES")]
    rail_margin: Option<u32>,
    /// Fit every row as given: no rows set aside (rails, stray temperatures, unsettled set-points,
    /// glitches). For diagnosis only.
    #[arg(long)]
    no_screen: bool,
    /// Only this unit of a file with a unit column.
    #[arg(long, value_name = "SERIAL")]
    unit: Option<String>,
    /// Also write a fit report in Markdown, with its charts, into this folder (one per unit in a batch).
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,
    /// The unit the report and its charts give errors in, beside nepers: np, mnp, db10 (10·log10, power
    /// ratios), db20 (20·log10, amplitude ratios), pct (% of ratio) or mau (milli-absorbance units).
    #[arg(long, value_name = "UNIT", default_value = "db10", value_parser = crate::plot::parse_unit)]
    error_unit: logtrim_host::error_scale::ErrorScale,
    #[command(flatten)]
    limits: LimitArgs,
    #[command(flatten)]
    image: BatchImageArgs,
    /// Print only the summary line.
    #[arg(short, long)]
    quiet: bool,
}

/// The product's acceptance limits: a file, and options that override it.
#[derive(Args, Debug)]
pub struct LimitArgs {
    /// The product's acceptance limits (JSON, see README "Acceptance limits") [default: the built-in limits].
    #[arg(long, value_name = "LIMITS.json")]
    limits: Option<PathBuf>,
    /// Override: the largest rms error over rms noise at any set-point.
    #[arg(long, value_name = "RATIO")]
    max_residual_ratio: Option<f64>,
    /// Override: the largest cross-validated rms error over the noise floor.
    #[arg(long, value_name = "RATIO")]
    max_cv_ratio: Option<f64>,
    /// Override: the largest share of rows set aside (0..=1).
    #[arg(long, value_name = "SHARE")]
    max_set_aside: Option<f64>,
    /// Override: the temperatures the calibrated range must cover, °C, as MIN:MAX.
    #[arg(long, value_name = "MIN:MAX", allow_hyphen_values = true)]
    require_temp: Option<String>,
    /// Override: the ratios the calibrated range must cover, as MIN:MAX.
    #[arg(long, value_name = "MIN:MAX")]
    require_ratio: Option<String>,
    /// Override: the lowest sensitivity (fraction of ideal) over the required ranges.
    #[arg(long, value_name = "FRACTION")]
    accept_sensitivity: Option<f64>,
    /// Override: also run `verify` on each unit at this bound (LSB); slow.
    #[arg(long, value_name = "LSB")]
    verify_bound: Option<f64>,
}

impl LimitArgs {
    fn limits(&self) -> Result<AcceptanceLimits, Failure> {
        let mut l = match &self.limits {
            Some(p) => AcceptanceLimits::load(p).map_err(Failure::input)?,
            None => AcceptanceLimits::default(),
        };
        let span = |name: &str, text: &str| -> Result<Span, Failure> {
            let bad =
                || Failure::input(format!("{name} {text:?}: expected MIN:MAX, two numbers with MIN < MAX"));
            let (a, b) = text.split_once(':').ok_or_else(bad)?;
            let (min, max) =
                (a.trim().parse::<f64>().map_err(|_| bad())?, b.trim().parse::<f64>().map_err(|_| bad())?);
            Ok(Span { min, max })
        };
        if let Some(v) = self.max_residual_ratio {
            l.max_residual_ratio = Some(v);
        }
        if let Some(v) = self.max_cv_ratio {
            l.max_cv_ratio = Some(v);
        }
        if let Some(v) = self.max_set_aside {
            l.max_set_aside_share = Some(v);
        }
        if let Some(t) = &self.require_temp {
            l.required_temperature_c = Some(span("--require-temp", t)?);
        }
        if let Some(t) = &self.require_ratio {
            l.required_ratio = Some(span("--require-ratio", t)?);
        }
        if let Some(v) = self.accept_sensitivity {
            l.min_sensitivity = Some(v);
        }
        if let Some(v) = self.verify_bound {
            l.verify_bound_lsb = Some(v);
        }
        l.check("the acceptance options").map_err(Failure::input)?;
        Ok(l)
    }
}

/// How a batch writes its images (the options of `logtrim image`).
#[derive(Args, Debug)]
pub struct BatchImageArgs {
    /// Image format of a batch: bin (SERIAL.bin) or hex (SERIAL.hex, Intel HEX).
    #[arg(long, value_enum, default_value_t = crate::image::Format::Bin)]
    format: crate::image::Format,
    /// Address of the image in the part's memory map, for Intel HEX, decimal or 0x-hex.
    #[arg(long, value_name = "A")]
    base_address: Option<String>,
    /// Bytes per Intel HEX data record: 16 or 32.
    #[arg(long, value_name = "N", default_value_t = 16)]
    record_len: usize,
    /// Leave the fixed-point tables out of the images (f32-only firmware).
    #[arg(long)]
    no_fixed: bool,
}

impl BatchImageArgs {
    fn options(&self) -> Result<ImageOptions, Failure> {
        let format = match self.format {
            crate::image::Format::Bin => ImageFormat::Bin,
            crate::image::Format::Hex => ImageFormat::Hex,
        };
        let base_address = match (&self.base_address, format) {
            (Some(_), ImageFormat::Bin) => {
                return Err(Failure::input("--base-address applies to Intel HEX images only (--format hex)"))
            }
            (Some(t), ImageFormat::Hex) => image_file::parse_address(t).map_err(Failure::input)?,
            (None, _) => 0,
        };
        if !matches!(self.record_len, 16 | 32) {
            return Err(Failure::input(format!("--record-len {}: expected 16 or 32", self.record_len)));
        }
        Ok(ImageOptions {
            format,
            base_address,
            record_len: self.record_len,
            tables: (!self.no_fixed).then(TableOptions::default),
        })
    }
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

fn options(args: &FitArgs, bits: u8) -> Result<FitOptions, Failure> {
    // The rail margin's range depends on the bits: codes within it of either rail are refused, so at least
    // one code must lie between the two bands.
    if let Some(m) = args.rail_margin {
        let most = ((1u32 << bits) - 1).saturating_sub(1) / 2;
        if m > most {
            return Err(Failure::input(format!(
                "--rail-margin {m}: expected 0..={most} codes for a {bits}-bit converter (--bits or --design): a larger margin leaves no usable code"
            )));
        }
    }
    Ok(FitOptions {
        bits,
        setpoint_gap_k: args.setpoint_gap,
        spec: args.model,
        max_series: usize::from(args.max_terms),
        rail_margin: args.rail_margin,
        min_sensitivity: args.min_sensitivity,
        x_margin: args.x_margin,
        extrapolation_k: args.extrapolate,
        screen: !args.no_screen,
        ..FitOptions::default()
    })
}

/// The log channel's bits: `--bits`, the design's, or the default, and whether they were given.
fn adc_bits(args: &FitArgs) -> Result<(u8, bool), Failure> {
    let design = match &args.design {
        Some(p) => Some(FrontEnd::load(p).map_err(Failure::input)?.adc.bits),
        None => None,
    };
    match (args.bits, design) {
        (Some(b), Some(d)) if b != d => Err(Failure::input(format!(
            "--bits {b} but the design {} has a {d}-bit log channel: give one of them",
            args.design.as_ref().map(|p| p.display().to_string()).unwrap_or_default()
        ))),
        (Some(b), _) | (None, Some(b)) => Ok((b, true)),
        (None, None) => Ok((DEFAULT_ADC_BITS, false)),
    }
}

/// Runs the verb.
pub fn run(args: FitArgs) -> Result<(), Failure> {
    let sensor = match &args.sensor {
        Some(p) => Some(load_settings(p).map_err(Failure::input)?),
        None => None,
    };
    let (mut bits, mut bits_given) = adc_bits(&args)?;
    let prior = match &args.population {
        Some(p) => {
            let (prior, pop_bits) = crate::population::load_prior(p, bits, bits_given)?;
            (bits, bits_given) = (pop_bits, true);
            Some(prior)
        }
        None => None,
    };
    let mut opt = options(&args, bits)?;
    if let Some(p) = prior {
        opt.spec = Some(p.spec);
        opt.population = Some(p);
    }
    let limits = args.limits.limits()?;
    let image = args.image.options()?;
    // Every output is checked before anything is written: the calibration file (or the batch's folder)
    // and the report's folder.
    let inputs = [
        Some(args.input.as_path()),
        args.sensor.as_deref(),
        args.design.as_deref(),
        args.population.as_deref(),
    ];
    crate::check_outputs(&inputs, &[], &[args.report.as_deref()])?;
    if args.input.is_dir() {
        crate::check_outputs(&inputs, &[], &[Some(&args.output)])?;
    }
    let how = ChamberRead {
        adc_bits: bits,
        skip_bad_rows: args.skip_bad_rows,
        sensor: sensor.as_ref(),
        unit: args.unit.as_deref(),
    };
    let data = read_chamber_data(&args.input, &how).map_err(Failure::input)?;
    report_skipped(&data.skipped);
    if !bits_given {
        if let Some(w) = narrow_range_warning(&data.jobs, bits) {
            note!("logtrim: warning: {w}");
        }
    }
    let mut jobs = data.jobs;
    if let ([job], false) = (jobs.as_mut_slice(), data.folder) {
        if let Some(s) = &args.serial {
            job.serial = s.clone();
        }
        crate::check_outputs(&inputs, &[Some(&args.output)], &[])?;
        return fit_single(job, &opt, &limits, sensor.as_ref(), &args);
    }
    if args.serial.is_some() {
        return Err(Failure::input(format!(
            "--serial names a single unit, but {} holds {} units: their serials come from the unit column or the file names",
            args.input.display(),
            jobs.len()
        )));
    }
    crate::check_outputs(&inputs, &[], &[Some(&args.output)])?;
    std::fs::create_dir_all(&args.output)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    let bar =
        crate::progress::bar("fitting {pos}/{len} units [{bar:30}] {eta}", std::io::stderr().is_terminal());
    let opts = BatchOptions {
        fit: opt.clone(),
        sensor: sensor.as_ref(),
        limits,
        image,
        created_unix_s: crate::stamp::now(),
    };
    let done = fit_units(&jobs, &opts, &args.output, &crate::progress::on(&bar));
    crate::progress::finish(bar);
    let done = done.map_err(Failure::input)?;
    if let (Some(s), None, None) = (done.spec, &args.model, &args.population) {
        say!(
            "model for the batch (cross-validated on up to {} pilot units): {}",
            logtrim_host::batch::PILOT_UNITS,
            s.to_arg()
        );
    }
    if let Some(dir) = &args.report {
        for (u, job) in done.units.iter().zip(&jobs) {
            if let Some(f) = &u.fitted {
                write_report(dir, &f.1, &f.0, &job.data, &opt, &job.data.source, args.error_unit)?;
            }
        }
    }
    let mut counts = [0usize; 3];
    say!(
        "{:<16} {:<7} {:>6} {:>6} {:>9} {:>9} {:<10}  reasons",
        "unit",
        "verdict",
        "rows",
        "aside",
        "resid/n",
        "cv/n",
        "image CRC"
    );
    for u in &done.units {
        let r = &u.record;
        let i = match r.verdict {
            "PASS" => 0,
            "FAIL" => 1,
            _ => 2,
        };
        counts[i] += 1;
        if args.quiet && i == 0 {
            continue;
        }
        let f = |v: Option<f64>| v.map(|v| format!("{v:.2}")).unwrap_or_else(|| "-".into());
        say!(
            "{:<16} {:<7} {:>6} {:>6} {:>9} {:>9} {:<10}  {}",
            r.serial,
            r.verdict,
            r.rows,
            r.rows_set_aside,
            f(r.worst_residual_ratio),
            f(r.cv_ratio),
            r.image_crc.clone().unwrap_or_else(|| "-".into()),
            r.reasons
        );
    }
    say!(
        "{} units: {} passed, {} failed acceptance (calibration kept, marked, no image), {} could not be calibrated; files in {}; summary {} and {}",
        done.units.len(),
        counts[0],
        counts[1],
        counts[2],
        args.output.display(),
        done.summary[0].display(),
        done.summary[1].display()
    );
    if counts[2] > 0 {
        Err(Failure::check(format!("{} of {} units could not be calibrated", counts[2], done.units.len())))
    } else if counts[1] > 0 {
        Err(Failure::rejected(format!("{} of {} units failed acceptance", counts[1], done.units.len())))
    } else {
        Ok(())
    }
}

/// A warning for data that use less than a quarter of the converter's range when its bits were not given.
fn narrow_range_warning(jobs: &[UnitJob], bits: u8) -> Option<String> {
    let top = jobs.iter().flat_map(|j| j.data.code.iter().copied()).max()?;
    let full = 1u64 << bits;
    (u64::from(top) < full / 4).then(|| {
        let need = 64 - u64::from(top).leading_zeros();
        format!(
            "the codes reach at most {top}, less than a quarter of the {bits}-bit range this fit assumes: if the converter has fewer bits, pass --bits {need} (or --design FRONTEND.json), or its rails and out-of-range codes are not recognised"
        )
    })
}

fn write_report(
    dir: &std::path::Path,
    file: &CalFile,
    out: &logtrim_host::fit::FitOutcome,
    data: &logtrim_host::fit::FitData,
    opt: &FitOptions,
    source: &str,
    unit: logtrim_host::error_scale::ErrorScale,
) -> Result<(), Failure> {
    std::fs::create_dir_all(dir).map_err(|e| Failure::input(format!("{}: {e}", dir.display())))?;
    let report =
        logtrim_host::report::FitReport { calfile: file, outcome: out, data, options: opt, source, unit };
    let written = report.write_to(dir).map_err(Failure::input)?;
    if let Some(page) = written.first() {
        say!("wrote {} and {} chart(s)", page.display(), written.len().saturating_sub(1));
    }
    Ok(())
}

fn fit_single(
    job: &UnitJob,
    opt: &FitOptions,
    limits: &AcceptanceLimits,
    sensor: Option<&TemperatureSensor>,
    args: &FitArgs,
) -> Result<(), Failure> {
    let (out, mut file) = fit_one(job, opt, sensor, crate::stamp::now())
        .map_err(|e| Failure::check(format!("{}: {e}", args.input.display())))?;
    let verdict = judge(&out, &file, limits).map_err(Failure::input)?;
    file.set_verdict(&verdict);
    if !args.quiet {
        say_raw!("{}", render_report(&out));
        say_raw!("{}", render_screening(&out, &job.data));
        let c = &out.calibration;
        say!(
            "calibrated range: {:.2} … {:.2} °C, x {:.3} … {:.3} Np (ratio {:.4e} … {:.4e})",
            Num::from(c.temperature.min_c),
            Num::from(c.temperature.max_c),
            Num::from(c.x_range.min),
            Num::from(c.x_range.max),
            f64::from(c.x_range.min).exp(),
            f64::from(c.x_range.max).exp()
        );
        say!(
            "acceptance{}:",
            if limits.product.is_empty() { String::new() } else { format!(" ({})", limits.product) }
        );
        for c in &verdict.checks {
            say!("  {} {}", if c.passed { "ok  " } else { "FAIL" }, c.text);
        }
    }
    file.save(&args.output).map_err(Failure::input)?;
    say!(
        "{}: {} — wrote {} ({} rows, {} set aside, model {}){}",
        file.unit.as_deref().unwrap_or("unit"),
        verdict.word(),
        args.output.display(),
        job.data.len(),
        out.screening.set_aside.len(),
        out.chosen.to_arg(),
        if verdict.passed { String::new() } else { " marked FAIL: no image should be made from it".into() }
    );
    if let Some(dir) = &args.report {
        write_report(dir, &file, &out, &job.data, opt, &args.input.display().to_string(), args.error_unit)?;
    }
    if verdict.passed {
        Ok(())
    } else {
        Err(Failure::rejected(format!("{}: failed acceptance: {}", args.output.display(), verdict.reasons())))
    }
}
