//! `logtrim plot`: draw the charts of a calibrated unit as SVG files; with `--fixed-map`, also the error map
//! of the integer fixed-point path (the tables `logtrim emit` and `logtrim image` carry) against the f64
//! reference.

use std::path::{Path, PathBuf};

use clap::Args;
use logtrim_host::calfile::CalFile;
use logtrim_host::data::{self, ReadOptions};
use logtrim_host::error_scale::ErrorScale;
use logtrim_host::fit::FitData;
use logtrim_host::plot::figures;
use logtrim_host::plot::validation::read_validation;
use logtrim_host::plot::{render_heat_map, render_lines};
use logtrim_host::report::{file_prefix, utc};

use crate::emit::TableArgs;
use crate::Failure;

/// Options of `logtrim plot`.
///
/// "Before correction" is the unit's nominal equation: x = (code − L₀)/(S₀·T/T_ref), a slope proportional
/// to absolute temperature, with the calibration's own zero code L₀ and slope S₀ at its reference
/// temperature and nothing else (what a one-point trim would leave). "After" is firmware-lib's f32
/// correction with the calibration.
#[derive(Args, Debug)]
pub struct PlotArgs {
    /// The unit's calibration file (COEFFS.json, as `logtrim fit` writes it).
    #[arg(value_name = "COEFFS.json")]
    coeffs: PathBuf,
    /// The chamber data it was fitted to (code, temp_c, ratio).
    #[arg(value_name = "CAL.csv")]
    cal: PathBuf,
    /// A validation run's readings (id, code, temp_c) for the error-against-temperature chart; needs --truth.
    #[arg(long, value_name = "READINGS.csv", requires = "truth")]
    validation: Option<PathBuf>,
    /// The truth of the validation run (id, x_true or ratio, t_true_c, optional x_oracle).
    #[arg(long, value_name = "TRUTH.csv", requires = "validation")]
    truth: Option<PathBuf>,
    /// Directory to write the SVG files into (created if missing).
    #[arg(short = 'o', long = "out-dir", value_name = "DIR")]
    out_dir: PathBuf,
    /// The unit's serial in files of a batch (a `unit` column); default: the calibration file's serial.
    #[arg(long, value_name = "SERIAL")]
    serial: Option<String>,
    /// Unit of the error axes: np, mnp (millinepers), db10 (10·log10, power ratios), db20 (20·log10,
    /// amplitude ratios), pct (% of ratio) or mau (milli-absorbance units).
    #[arg(long, value_name = "UNIT", default_value = "mnp", value_parser = parse_unit)]
    error_unit: ErrorScale,
    /// Temperature bins of the error-against-temperature chart.
    #[arg(long, value_name = "N", default_value_t = 12, value_parser = clap::value_parser!(u32).range(1..=200))]
    bins: u32,
    /// Cells of the f32 error map: CODESxTEMPERATURES.
    #[arg(long, value_name = "NXxNY", default_value = "96x40", value_parser = parse_cells)]
    map_cells: (usize, usize),
    /// A gap in measured temperature larger than this (K) separates two chamber set-points (as in the fit).
    #[arg(long, value_name = "K", default_value_t = 2.0)]
    setpoint_gap: f64,
    /// Also draw the fixed-point path's error map against the f64 reference (PREFIX-fixed-error-map.svg),
    /// on the cells of --map-cells, from the unit's fixed-point tables (sizes as for `logtrim emit`).
    #[arg(long)]
    fixed_map: bool,
    /// Codes evaluated per cell of the fixed-point map; a cell shows the largest error among them.
    #[arg(long, value_name = "N", default_value_t = 16, value_parser = clap::value_parser!(u32).range(1..=4096))]
    map_codes: u32,
    /// Sizes of the fixed-point tables (with --fixed-map).
    #[command(flatten)]
    tables: TableArgs,
}

/// Parses an error unit's name (`--error-unit` of plot and fit).
pub(crate) fn parse_unit(s: &str) -> Result<ErrorScale, String> {
    ErrorScale::from_name(s).ok_or_else(|| {
        let names: Vec<&str> = ErrorScale::ALL.iter().map(|u| u.name()).collect();
        format!("{s:?} is not an error unit; expected one of: {}", names.join(", "))
    })
}

fn parse_cells(s: &str) -> Result<(usize, usize), String> {
    let bad = || format!("{s:?}: expected two cell counts 1..=400 as NXxNY, e.g. 96x40");
    let (a, b) = s.split_once(['x', 'X']).ok_or_else(bad)?;
    let n = |v: &str| v.trim().parse::<usize>().ok().filter(|n| (1..=400).contains(n));
    Ok((n(a).ok_or_else(bad)?, n(b).ok_or_else(bad)?))
}

/// Runs the verb.
pub fn run(args: PlotArgs) -> Result<(), Failure> {
    crate::check_outputs(
        &[Some(&args.coeffs), Some(&args.cal), args.validation.as_deref(), args.truth.as_deref()],
        &[],
        &[Some(&args.out_dir)],
    )?;
    if !(args.setpoint_gap.is_finite() && args.setpoint_gap > 0.0) {
        return Err(Failure::input(format!(
            "--setpoint-gap {}: expected a positive gap in K",
            args.setpoint_gap
        )));
    }
    let file = CalFile::load(&args.coeffs).map_err(Failure::input)?;
    let cal = file.calibration;
    let serial = args.serial.clone().or_else(|| file.unit.clone());
    let data = chamber_rows(&args.cal, &file, serial.as_deref())?;
    let who = serial.as_deref().map_or_else(|| "unit".to_string(), |s| format!("unit {s}"));
    let coeffs_name = args.coeffs.file_name().map_or_else(String::new, |n| n.to_string_lossy().into_owned());
    let sub = format!("{who}, calibrated {} ({coeffs_name})", utc(file.created_unix_s));
    let prefix = file_prefix(serial.as_deref());

    // Every chart is drawn before the first file is written.
    let mut out: Vec<(String, String)> = Vec::new();
    // The unit's noise floor as its fit measured it, for the band under the corrected points.
    let floor = file.fit.as_ref().and_then(|f| f.get("noise_floor_np")).and_then(serde_json::Value::as_f64);
    let vs_x = figures::error_vs_x(&cal, &data, args.setpoint_gap, floor, args.error_unit, &sub);
    out.push((format!("{prefix}-error-vs-x.svg"), render_lines(&vs_x).map_err(Failure::input)?));
    if let (Some(r), Some(t)) = (&args.validation, &args.truth) {
        // Validation readings are read as the unit's firmware reads them (a raw temperature code in f32).
        let conv = |code: u32| file.firmware_celsius(code);
        let opts = ReadOptions {
            adc_bits: cal.adc.bits,
            temp_converter: file.temperature_sensor.as_ref().map(|_| &conv as data::TempConverter<'_>),
            ..ReadOptions::default()
        };
        let points = read_validation(r, t, serial.as_deref(), &opts).map_err(Failure::input)?;
        let fig = figures::error_vs_temperature(&cal, &points, args.bins as usize, args.error_unit, &sub);
        out.push((format!("{prefix}-error-vs-temperature.svg"), render_lines(&fig).map_err(Failure::input)?));
    }
    let (nx, ny) = args.map_cells;
    let map = figures::f32_error_map(&cal, nx, ny, &sub).map_err(Failure::input)?;
    out.push((format!("{prefix}-f32-error-map.svg"), render_heat_map(&map).map_err(Failure::input)?));
    if args.fixed_map {
        let tables = file
            .fixed_tables(&args.tables.options())
            .map_err(|e| Failure::input(format!("{}: {e}", args.coeffs.display())))?;
        let sub = format!("{sub}; tables {}×{} knots", tables.header.t_knots, tables.header.xa_knots);
        let map = figures::fixed_error_map(&cal, &tables.view(), nx, ny, args.map_codes, &sub)
            .map_err(Failure::input)?;
        out.push((format!("{prefix}-fixed-error-map.svg"), render_heat_map(&map).map_err(Failure::input)?));
    }

    std::fs::create_dir_all(&args.out_dir)
        .map_err(|e| Failure::input(format!("{}: {e}", args.out_dir.display())))?;
    for (name, svg) in out {
        let path = args.out_dir.join(name);
        logtrim_host::output::write_atomic(&path, svg.as_bytes())
            .map_err(|e| Failure::input(format!("{}: {e}", path.display())))?;
        say!("wrote {}", path.display());
    }
    Ok(())
}

/// The chamber rows of one unit as fit data (in a batch file, the rows of `serial`), read as the fit reads
/// them: a `temp_code` column converted by the calibration file's temperature sensor in f64.
fn chamber_rows(path: &Path, file: &CalFile, serial: Option<&str>) -> Result<FitData, Failure> {
    let conv = |code: u32| file.chamber_celsius(code);
    let opts = ReadOptions {
        adc_bits: file.calibration.adc.bits,
        temp_converter: file.temperature_sensor.as_ref().map(|_| &conv as data::TempConverter<'_>),
        ..ReadOptions::default()
    };
    let cal = data::read_calibration_file(path, &opts).map_err(Failure::input)?;
    let keep = match (cal.units.is_empty(), serial) {
        (true, _) => None,
        (false, None) => {
            return Err(Failure::input(format!(
                "{}: rows of {} units; choose one with --serial SERIAL",
                path.display(),
                cal.units.len()
            )))
        }
        (false, Some(s)) => match cal.units.iter().position(|u| u == s) {
            Some(i) => Some(i as u32),
            None => {
                return Err(Failure::input(format!(
                    "{}: no rows of unit {s:?}; the file has: {}",
                    path.display(),
                    cal.units.join(", ")
                )))
            }
        },
    };
    let mut d = FitData::default();
    for r in cal.rows.iter().filter(|r| keep.is_none() || r.unit == keep) {
        d.code.push(r.code);
        d.temp_c.push(r.temp_c);
        d.ratio.push(r.ratio);
    }
    Ok(d)
}
