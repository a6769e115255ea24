//! `logtrim characterise` and `logtrim plan`: a population model from a characterisation lot, and a
//! production plan from the model; `fit --population` fits production units against it.

use logtrim_host::output::number::Num;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use clap::Args;
use logtrim_host::batch::{read_chamber_data, ChamberRead};
use logtrim_host::data::DEFAULT_ADC_BITS;
use logtrim_host::fit::model::Spec;
use logtrim_host::fit::prior::Prior;
use logtrim_host::fit::FitOptions;
use logtrim_host::frontend::FrontEnd;
use logtrim_host::population::plan::{plan, render, PlanOptions};
use logtrim_host::population::{characterise, CharacteriseOptions, PopulationModel};

use crate::Failure;

/// Temperatures, °C, as a comma-separated option value.
#[derive(Debug, Clone, PartialEq)]
pub struct Temps(pub Vec<f64>);

/// Parses `T1,T2,…` (°C): finite values within ±1000 °C.
pub fn parse_temps(text: &str) -> Result<Temps, String> {
    let v = text
        .split(',')
        .map(|t| {
            let t = t.trim();
            match t.parse::<f64>() {
                Ok(v) if v.is_finite() && v.abs() <= 1000.0 => Ok(v),
                _ => Err(format!(
                    "{t:?} is not a temperature: expected numbers in °C within ±1000, e.g. 0,35,70"
                )),
            }
        })
        .collect::<Result<Vec<f64>, String>>()?;
    Ok(Temps(v))
}

/// Options of `logtrim characterise`.
#[derive(Args, Debug)]
pub struct CharacteriseArgs {
    /// The characterisation lot's chamber data: a CSV file with a unit column, or a folder of CSV files
    /// (one unit each), every unit run at the full set of set-points.
    input: PathBuf,
    /// The population file to write (POP.json).
    #[arg(short, long, value_name = "POP.json")]
    output: PathBuf,
    /// Resolution of the log channel's ADC, bits [default: the design's (--design), else 16].
    #[arg(long, value_parser = clap::value_parser!(u8).range(1..=24))]
    bits: Option<u8>,
    /// The design's description (front-end JSON): the log channel's ADC bits are taken from it.
    #[arg(long, value_name = "FRONTEND.json")]
    design: Option<PathBuf>,
    /// Temperature-channel description (JSON of logtrim's TemperatureSensor) for a lot whose data have a
    /// temp_code column (a raw thermistor or RTD channel); give the same file to `fit --population`.
    #[arg(long, value_name = "SENSOR.json")]
    sensor: Option<PathBuf>,
    /// Fix the population's model size instead of the batch's cross-validated choice (no residual term).
    #[arg(long, value_name = "TERMS", value_parser = Spec::parse)]
    model: Option<Spec>,
    /// The production set-points the cross-validation across units fits each left-out unit from, °C
    /// [default: the lot's two ends and its middle].
    #[arg(long, value_name = "T1,T2,…", allow_hyphen_values = true, value_parser = parse_temps)]
    production: Option<Temps>,
}

fn bits_of(bits: Option<u8>, design: Option<&Path>) -> Result<u8, Failure> {
    let d = match design {
        Some(p) => Some(FrontEnd::load(p).map_err(Failure::input)?.adc.bits),
        None => None,
    };
    match (bits, d) {
        (Some(b), Some(d)) if b != d => Err(Failure::input(format!(
            "--bits {b} but the design has a {d}-bit log channel: give one of them"
        ))),
        (Some(b), _) | (None, Some(b)) => Ok(b),
        (None, None) => Ok(DEFAULT_ADC_BITS),
    }
}

/// Runs `characterise`.
pub fn run_characterise(args: CharacteriseArgs) -> Result<(), Failure> {
    let inputs = [Some(args.input.as_path()), args.design.as_deref(), args.sensor.as_deref()];
    crate::check_outputs(&inputs, &[Some(&args.output)], &[])?;
    let sensor = match &args.sensor {
        Some(p) => Some(logtrim_host::sensor_tool::load_settings(p).map_err(Failure::input)?),
        None => None,
    };
    if args.model.is_some_and(|s| s.has_residual()) {
        return Err(Failure::input("--model: a population's model has no residual term; leave it out"));
    }
    let bits = bits_of(args.bits, args.design.as_deref())?;
    let how = ChamberRead { adc_bits: bits, skip_bad_rows: false, sensor: sensor.as_ref(), unit: None };
    let data = read_chamber_data(&args.input, &how).map_err(Failure::input)?;
    let opt = CharacteriseOptions {
        fit: FitOptions { bits, spec: args.model, ..FitOptions::default() },
        production_c: args.production.map(|t| t.0).unwrap_or_default(),
    };
    let done = characterise(&data.jobs, &opt).map_err(Failure::check)?;
    for (serial, why) in &done.left_out {
        note!("logtrim: {serial}: left out of the population: {why}");
    }
    say_raw!("{}", done.model.render_summary());
    done.model.save(&args.output).map_err(Failure::input)?;
    say!(
        "wrote {} ({} units, {} mode(s) kept)",
        args.output.display(),
        done.model.units.len(),
        done.model.modes_kept
    );
    Ok(())
}

/// Options of `logtrim plan`.
#[derive(Args, Debug)]
pub struct PlanArgs {
    /// The population file (POP.json) from `logtrim characterise`.
    population: PathBuf,
    /// Set-points of the production run.
    #[arg(long, value_name = "N", default_value_t = 3,
          value_parser = clap::value_parser!(u8).range(1..=12))]
    setpoints: u8,
    /// Candidate temperatures the set-points are chosen from, evenly spaced over the lot's range.
    #[arg(long, value_name = "N", default_value_t = 15,
          value_parser = clap::value_parser!(u8).range(2..=60))]
    candidates: u8,
}

/// Runs `plan`.
pub fn run_plan(args: PlanArgs) -> Result<(), Failure> {
    let model = PopulationModel::load(&args.population).map_err(Failure::input)?;
    let opt =
        PlanOptions { setpoints: usize::from(args.setpoints), candidates: usize::from(args.candidates) };
    if opt.setpoints > opt.candidates {
        return Err(Failure::input(format!(
            "--setpoints {} is more than the --candidates {}",
            opt.setpoints, opt.candidates
        )));
    }
    let p = plan(&model, &opt).map_err(Failure::check)?;
    say_raw!("{}", render(&p));
    let temps: Vec<String> = p.setpoints_c.iter().map(|&t| format!("{:.1}", Num(t))).collect();
    say!(
        "chamber time: {} set-point(s) per production unit instead of the lot's; simulate it with --setpoints-at {} --ratios {}",
        p.setpoints_c.len(),
        temps.join(","),
        p.ratios
    );
    Ok(())
}

/// The prior of a population file for `fit --population`, checked against the fit's ADC bits.
pub fn load_prior(path: &Path, bits: u8, bits_given: bool) -> Result<(Arc<Prior>, u8), Failure> {
    let model = PopulationModel::load(path).map_err(Failure::input)?;
    if bits_given && model.bits != bits {
        return Err(Failure::input(format!(
            "{}: the population was made with a {}-bit log channel, but the fit's is {bits}-bit",
            path.display(),
            model.bits
        )));
    }
    let prior = model.prior().map_err(|e| Failure::input(format!("{}: {e}", path.display())))?;
    Ok((Arc::new(prior), model.bits))
}
