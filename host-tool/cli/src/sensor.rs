//! `logtrim sensor`: from a part's data sheet to a temperature channel's settings file — thermistor
//! coefficients from curve points, resistance–temperature tables with the divider's codes, and the
//! `TemperatureSensor` JSON that `logtrim fit --sensor` reads.

use std::path::PathBuf;

use clap::{Args, Subcommand, ValueEnum};
use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::thermistor::CurvePoint;
use logtrim::Placement;
use logtrim_host::sensor_tool::{
    self as tool, build_sensor, describe_divider, describe_element, parse_coefficients, parse_ohm,
    parse_point, parse_rtd, DividerSpec, ElementSpec, Input, SensorToolError, TableFormat, TableSource,
    TableSpec,
};

use crate::Failure;
use logtrim_host::output::number::Num;

/// Options of `logtrim sensor`.
#[derive(Args, Debug)]
pub struct SensorArgs {
    #[command(subcommand)]
    command: SensorCommand,
}

#[derive(Subcommand, Debug)]
enum SensorCommand {
    /// Steinhart–Hart coefficients A, B, C through three (temperature, resistance) points of a data sheet.
    #[command(name = "steinhart-hart", visible_alias = "sh")]
    SteinhartHart(FitArgs),
    /// The Beta model (β, with the first point as reference) through two points of a data sheet.
    Beta(FitArgs),
    /// A resistance–temperature table of an element; with a divider (or --sensor), the code at each
    /// temperature and what the firmware reads back from it.
    Table(TableArgs),
    /// Write a temperature channel's settings file (TemperatureSensor JSON) for `logtrim fit --sensor`,
    /// checked by the firmware's own validation.
    Settings(SettingsArgs),
}

/// Options of `sensor steinhart-hart` and `sensor beta`.
#[derive(Args, Debug)]
struct FitArgs {
    /// A data-sheet point T:R, temperature in °C and resistance in Ω (k and M allowed: 25:10k, -40:336.5k);
    /// three for Steinhart–Hart, two for Beta, in any order.
    #[arg(long = "point", value_name = "T:R", value_parser = parse_point, allow_hyphen_values = true, required = true)]
    points: Vec<CurvePoint>,
    /// A further data-sheet point to compare the fitted curve with (repeatable): prints its temperature
    /// error.
    #[arg(long = "check", value_name = "T:R", value_parser = parse_point, allow_hyphen_values = true)]
    checks: Vec<CurvePoint>,
}

/// Which element a table or settings file is for: exactly one of --beta, --sh, --point, --rtd.
#[derive(Args, Debug)]
struct ElementArgs {
    /// NTC by the Beta model: β in K (with --r0 and optionally --t0).
    #[arg(long, value_name = "K", requires = "r0", conflicts_with_all = ["sh", "points", "rtd"])]
    beta: Option<f64>,
    /// With --beta: the NTC's resistance at the reference temperature, Ω (k and M allowed: 10k).
    #[arg(long, value_name = "OHM", value_parser = parse_ohm, allow_hyphen_values = true, requires = "beta")]
    r0: Option<f64>,
    /// With --beta: the reference temperature of --r0, °C [default: 25].
    #[arg(long, value_name = "°C", allow_negative_numbers = true, requires = "beta")]
    t0: Option<f64>,
    /// NTC by its Steinhart–Hart coefficients A,B,C (as printed by `logtrim sensor steinhart-hart`).
    #[arg(long, value_name = "A,B,C", value_parser = parse_coefficients, allow_hyphen_values = true,
          conflicts_with_all = ["points", "rtd"])]
    sh: Option<[f64; 3]>,
    /// NTC through data-sheet points T:R: give it twice for the Beta model, three times for Steinhart–Hart.
    #[arg(long = "point", id = "points", value_name = "T:R", value_parser = parse_point,
          allow_hyphen_values = true, conflicts_with = "rtd")]
    points: Vec<CurvePoint>,
    /// Platinum RTD on the IEC 60751 curve: pt100, pt1000, or R0 at 0 °C in Ω.
    #[arg(long, value_name = "pt100|pt1000|R0", value_parser = parse_rtd)]
    rtd: Option<f64>,
}

impl ElementArgs {
    fn given(&self) -> bool {
        self.beta.is_some() || self.sh.is_some() || !self.points.is_empty() || self.rtd.is_some()
    }

    fn spec(&self) -> Result<ElementSpec, Failure> {
        if let Some(beta_k) = self.beta {
            // clap makes --r0 required with --beta.
            let r0_ohm = self.r0.unwrap_or(f64::NAN);
            return Ok(ElementSpec::Beta { r0_ohm, t0_c: self.t0.unwrap_or(25.0), beta_k });
        }
        if let Some([a, b, c]) = self.sh {
            return Ok(ElementSpec::SteinhartHart { a, b, c });
        }
        if !self.points.is_empty() {
            return Ok(ElementSpec::Points(self.points.clone()));
        }
        if let Some(r0_ohm) = self.rtd {
            return Ok(ElementSpec::Rtd { r0_ohm });
        }
        Err(Failure::input(
            "no element: give one of --beta K --r0 OHM, --sh A,B,C, --point T:R (2 or 3 times), or --rtd pt100|pt1000|R0",
        ))
    }

    fn element(&self) -> Result<SensorElement, Failure> {
        self.spec()?.element().map_err(refused)
    }
}

/// Where the sensor sits in the divider.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum PlacementArg {
    /// Sensor from the ADC input to ground, series resistor to the supply: the code rises with R.
    Low,
    /// Sensor from the supply to the ADC input, series resistor to ground: the code falls as R rises.
    High,
}

/// The divider and the ADC that reads it.
#[derive(Args, Debug)]
struct DividerArgs {
    /// The divider's series resistor, Ω (k and M allowed: 10k).
    #[arg(long, value_name = "OHM", value_parser = parse_ohm, allow_hyphen_values = true,
          requires_all = ["placement", "bits"])]
    series: Option<f64>,
    /// Where the sensor sits in the divider.
    #[arg(long, value_enum, requires = "series")]
    placement: Option<PlacementArg>,
    /// Resolution of the temperature channel's ADC, bits (1..=24).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u8).range(1..=24), requires = "series")]
    bits: Option<u8>,
    /// The code that the divider's supply would read [default: 2^bits, the ADC's reference is the supply].
    #[arg(long, value_name = "CODE", requires = "series")]
    full_scale: Option<u32>,
    /// Codes within this many of the open-sensor rail are reported as an open sensor.
    #[arg(long, value_name = "CODES", default_value_t = 0)]
    open_margin: u32,
    /// Codes within this many of the shorted-sensor rail are reported as a short.
    #[arg(long, value_name = "CODES", default_value_t = 0)]
    short_margin: u32,
}

impl DividerArgs {
    fn spec(&self) -> Option<DividerSpec> {
        let (series_ohm, placement, bits) = (self.series?, self.placement?, self.bits?);
        Some(DividerSpec {
            placement: match placement {
                PlacementArg::Low => Placement::LowSide,
                PlacementArg::High => Placement::HighSide,
            },
            series_ohm,
            bits,
            full_scale_code: self.full_scale,
            open_margin: self.open_margin,
            short_margin: self.short_margin,
        })
    }
}

/// Table layouts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum FormatArg {
    /// Aligned columns with a description of the channel.
    Text,
    /// Comma-separated values, full precision.
    Csv,
}

/// Options of `sensor table`.
#[derive(Args, Debug)]
struct TableArgs {
    #[command(flatten)]
    element: ElementArgs,
    #[command(flatten)]
    divider: DividerArgs,
    /// A settings file (as written by `logtrim sensor settings`) instead of the element and divider
    /// options; the table runs the firmware's conversion exactly as the file describes it, valid range
    /// included.
    #[arg(long, value_name = "SENSOR.json", conflicts_with_all = ["beta", "sh", "points", "rtd", "series"])]
    sensor: Option<PathBuf>,
    /// First temperature, °C [default with --sensor: its lower limit].
    #[arg(long, value_name = "°C", allow_negative_numbers = true)]
    from: Option<f64>,
    /// Last temperature, °C (included when the step lands on it) [default with --sensor: its upper limit].
    #[arg(long, value_name = "°C", allow_negative_numbers = true)]
    to: Option<f64>,
    /// Step between rows, K.
    #[arg(long, value_name = "K", default_value_t = 5.0, allow_negative_numbers = true)]
    step: f64,
    /// Layout of the table.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    format: FormatArg,
    /// Write the table to this file (atomically) instead of the terminal.
    #[arg(short, long, value_name = "FILE")]
    output: Option<PathBuf>,
}

/// Options of `sensor settings`.
#[derive(Args, Debug)]
struct SettingsArgs {
    #[command(flatten)]
    element: ElementArgs,
    #[command(flatten)]
    divider: DividerArgs,
    /// Lowest temperature the channel reports, °C: below it the firmware refuses the reading.
    #[arg(long, value_name = "°C", allow_negative_numbers = true)]
    min: f64,
    /// Highest temperature the channel reports, °C.
    #[arg(long, value_name = "°C", allow_negative_numbers = true)]
    max: f64,
    /// The settings file to write (TemperatureSensor JSON), atomically.
    #[arg(short, long, value_name = "SENSOR.json")]
    output: PathBuf,
}

/// The option that gives each value the library names.
fn option(input: Input) -> &'static str {
    match input {
        Input::Point => "--point",
        Input::Beta => "--beta",
        Input::R0 => "--r0",
        Input::T0 => "--t0",
        Input::SteinhartHart => "--sh",
        Input::Rtd => "--rtd",
        Input::Series => "--series",
        Input::Bits => "--bits",
        Input::FullScale => "--full-scale",
        Input::FaultMargins => "--open-margin/--short-margin",
        Input::Min => "--min",
        Input::Max => "--max",
        Input::Range => "--min/--max",
        Input::From => "--from",
        Input::To => "--to",
        Input::TableRange => "--from/--to",
        Input::Step => "--step",
    }
}

/// The library's refusal as bad input, its values named by their options.
fn refused(e: SensorToolError) -> Failure {
    Failure::input(e.message(&option))
}

/// Runs the verb.
pub fn run(args: SensorArgs) -> Result<(), Failure> {
    match args.command {
        SensorCommand::SteinhartHart(a) => fit_points(&a, true),
        SensorCommand::Beta(a) => fit_points(&a, false),
        SensorCommand::Table(a) => table(&a),
        SensorCommand::Settings(a) => settings(&a),
    }
}

fn fit_points(args: &FitArgs, steinhart_hart: bool) -> Result<(), Failure> {
    let element = if steinhart_hart {
        let sh = tool::steinhart_hart_from_points(&args.points).map_err(refused)?;
        say!(
            "Steinhart–Hart through {} points: 1/T = A + B·ln R + C·(ln R)³ (T in K, R in Ω)",
            args.points.len()
        );
        say!("  A = {:e}\n  B = {:e}\n  C = {:e}", sh.a, sh.b, sh.c);
        say!("  as an option: --sh {:e},{:e},{:e}", sh.a, sh.b, sh.c);
        SensorElement::NtcSteinhartHart(sh)
    } else {
        let b = tool::beta_from_points(&args.points).map_err(refused)?;
        say!("Beta model through {} points: R = R0·exp(β·(1/T − 1/T0))", args.points.len());
        say!("  β = {} K, R0 = {} Ω at T0 = {} °C", b.beta_k, b.r0_ohm, b.t0_c);
        say!("  as options: --beta {} --r0 {} --t0 {}", b.beta_k, b.r0_ohm, b.t0_c);
        SensorElement::NtcBeta(b)
    };
    say!("{:>10} {:>14} {:>14} {:>12}", "point", "R [Ω]", "curve T [°C]", "error [K]");
    for (label, p) in args.points.iter().map(|p| ("given", p)).chain(args.checks.iter().map(|p| ("check", p)))
    {
        match element.celsius_f64(p.ohm) {
            Ok(t) => say!("{label:>10} {:>14} {:>14.4} {:>12.5}", p.ohm, Num(t), Num(t - p.celsius)),
            Err(e) => say!("{label:>10} {:>14} {:>14} ({e})", p.ohm, "-"),
        }
    }
    Ok(())
}

fn table(args: &TableArgs) -> Result<(), Failure> {
    crate::check_outputs(&[args.sensor.as_deref()], &[args.output.as_deref()], &[])?;
    let from_file = match &args.sensor {
        Some(path) => Some(tool::load_settings(path).map_err(refused)?),
        None => None,
    };
    let element;
    let divider;
    let mut header = Vec::new();
    let source = match &from_file {
        Some(s) => {
            header.push(format!(
                "settings: {}",
                args.sensor.as_ref().map(|p| p.display().to_string()).unwrap_or_default()
            ));
            header.push(describe_element(&s.element));
            header.push(describe_divider(&s.divider));
            header.push(format!("valid {} … {} °C", s.min_c, s.max_c));
            TableSource::Sensor(s)
        }
        None => {
            if !args.element.given() {
                return Err(Failure::input(
                    "no element: give one of --beta K --r0 OHM, --sh A,B,C, --point T:R (2 or 3 times), --rtd pt100|pt1000|R0, or --sensor SENSOR.json",
                ));
            }
            element = args.element.element()?;
            header.push(describe_element(&element));
            match args.divider.spec() {
                Some(spec) => {
                    divider = spec.divider().map_err(refused)?;
                    header.push(describe_divider(&divider));
                    header.push("no valid range declared: the firmware column converts every code".into());
                    TableSource::Divided(&element, &divider)
                }
                None => TableSource::Element(&element),
            }
        }
    };
    let (from_c, to_c) = match (&from_file, args.from, args.to) {
        (_, Some(f), Some(t)) => (f, t),
        (Some(s), f, t) => (f.unwrap_or(f64::from(s.min_c)), t.unwrap_or(f64::from(s.max_c))),
        (None, None, _) => {
            return Err(Failure::input("--from: missing; give the table's first temperature in °C"))
        }
        (None, _, None) => {
            return Err(Failure::input("--to: missing; give the table's last temperature in °C"))
        }
    };
    let rows = tool::table(source, &TableSpec { from_c, to_c, step_k: args.step }).map_err(refused)?;
    let format = match args.format {
        FormatArg::Text => TableFormat::Text,
        FormatArg::Csv => TableFormat::Csv,
    };
    match &args.output {
        Some(path) => {
            tool::write_table_file(path, &rows, format, &header).map_err(refused)?;
            say!("wrote {} ({} rows, {from_c} … {to_c} °C)", path.display(), rows.len());
        }
        None => tool::write_table(&rows, format, &header, std::io::stdout().lock())
            .map_err(|e| crate::out::stdout_failure(&e))?,
    }
    Ok(())
}

fn settings(args: &SettingsArgs) -> Result<(), Failure> {
    crate::check_outputs(&[], &[Some(&args.output)], &[])?;
    let element = args.element.element()?;
    let spec = args.divider.spec().ok_or_else(|| {
        Failure::input(
            "--series: missing; the settings need the divider: --series OHM --placement low|high --bits N",
        )
    })?;
    let divider = spec.divider().map_err(refused)?;
    let sensor: TemperatureSensor = build_sensor(element, divider, args.min, args.max).map_err(refused)?;
    let sum = tool::summarise(&sensor).map_err(refused)?;
    tool::write_settings(&args.output, &sensor).map_err(refused)?;
    say!("wrote {}", args.output.display());
    say!("  element: {}", describe_element(&sensor.element));
    say!("  divider: {}", describe_divider(&sensor.divider));
    say!("  valid {} … {} °C:", sensor.min_c, sensor.max_c);
    for (label, (t, code, k)) in [("at the low end", sum.at_min), ("at the high end", sum.at_max)] {
        say!("    {label:<16} {t:>8} °C reads code {code:>8}, {:.4} K per code", k);
    }
    say!(
        "    coarsest step {:.4} K per code at {} °C; firmware reading within {:.4} K of the truth at the rounded code",
        sum.coarsest.1, sum.coarsest.0, sum.worst_error_k
    );
    say!(
        "next: logtrim fit CAL.csv --sensor {} -o COEFFS.json (CAL.csv with a temp_code column)",
        args.output.display()
    );
    Ok(())
}
