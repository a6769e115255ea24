//! `logtrim budget`: the error budget of a design, from its front-end description (the file `simulate`
//! reads), the sensor file the other verbs read, and options.

use std::path::PathBuf;

use clap::Args;
use logtrim_host::budget::{read_design, BudgetSpec};
use logtrim_host::frontend::{preset, TemperatureMeasurement, PRESETS};
use logtrim_host::sensor_tool::load_settings;

use crate::values::{real, Span, CELSIUS, RATIO};
use crate::Failure;

/// Options of `logtrim budget`. The design's front-end description (a file or a preset) gives the figures
/// it describes; --sensor gives a raw temperature channel's; options override both; figures given by none
/// take their defaults (--json lists every figure used).
///
/// The budget uses the ideal log-ratio law (slope ∝ absolute temperature unless --slope-drift-ppm is
/// given). The reference's tolerance is taken as removed by calibration and its drift as not; the
/// temperature sensor's accuracy is the part a calibration with the same sensor does not absorb.
#[derive(Args, Debug)]
pub struct BudgetArgs {
    /// The design's front-end description (the JSON file `logtrim simulate --frontend` reads and
    /// --write-preset writes, schemas/frontend.schema.json): its converter, slope law, level shift, ranges
    /// and temperature sensor's noise give the budget's figures.
    #[arg(value_name = "FRONTEND.json", conflicts_with = "preset")]
    design: Option<PathBuf>,
    /// A built-in front end's description as the design (see `logtrim simulate --list-presets`).
    #[arg(long, value_name = "NAME")]
    preset: Option<String>,
    /// A raw temperature channel's description (the SENSOR.json `fit --sensor` reads, `logtrim sensor
    /// settings` writes): the temperature noise becomes its quantisation at its coarsest K per code over the
    /// range, with the design's raw-channel noise in codes if it has one (else quantisation alone).
    #[arg(long, value_name = "SENSOR.json")]
    sensor: Option<PathBuf>,
    /// ADC resolution, bits.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u8).range(1..=24))]
    bits: Option<u8>,
    /// ADC reference voltage (full scale), V.
    #[arg(long, value_name = "V", value_parser = real(Span::closed(1e-3, 1000.0)))]
    vref: Option<f64>,
    /// ADC noise of one conversion, LSB rms.
    #[arg(long, value_name = "LSB", value_parser = real(Span::closed(0.0, 1e6)))]
    noise_lsb: Option<f64>,
    /// Conversions averaged per reading (oversampling N).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u32).range(1..=1 << 24))]
    oversampling: Option<u32>,
    /// Reference initial tolerance, as a fraction (removed by calibration; shown for information).
    #[arg(long, value_name = "FRACTION", value_parser = real(Span::below(0.0, 1.0)))]
    ref_tolerance: Option<f64>,
    /// Reference drift that calibration does not remove, ppm/K.
    #[arg(long, value_name = "PPM_PER_K", value_parser = real(Span::closed(0.0, 1e5)))]
    ref_drift_ppm: Option<f64>,
    /// The front end's slope, V per decade of ratio, at --slope-at.
    #[arg(long, value_name = "V", value_parser = real(Span::closed(1e-6, 1000.0)))]
    slope: Option<f64>,
    /// The temperature at which --slope is given, °C.
    #[arg(long, value_name = "C", allow_negative_numbers = true, value_parser = real(CELSIUS))]
    slope_at: Option<f64>,
    /// The slope's drift, ppm/K (a compensated front end's residual); default: PTAT, as kT/q.
    #[arg(long, value_name = "PPM_PER_K", allow_negative_numbers = true, value_parser = real(Span::closed(-1e5, 1e5)))]
    slope_drift_ppm: Option<f64>,
    /// The front end's output at ratio 1 (its level shift), V.
    #[arg(long, value_name = "V", allow_negative_numbers = true, value_parser = real(Span::closed(-1000.0, 1000.0)))]
    zero: Option<f64>,
    /// Smallest ratio of the range.
    #[arg(long, value_name = "RATIO", value_parser = real(RATIO))]
    ratio_min: Option<f64>,
    /// Largest ratio of the range.
    #[arg(long, value_name = "RATIO", value_parser = real(RATIO))]
    ratio_max: Option<f64>,
    /// Lowest operating temperature, °C.
    #[arg(long, value_name = "C", allow_negative_numbers = true, value_parser = real(CELSIUS))]
    t_min: Option<f64>,
    /// Highest operating temperature, °C.
    #[arg(long, value_name = "C", allow_negative_numbers = true, value_parser = real(CELSIUS))]
    t_max: Option<f64>,
    /// Temperature sensor error that calibration does not absorb, K.
    #[arg(long, value_name = "K", value_parser = real(Span::closed(0.0, 1000.0)))]
    sensor_accuracy: Option<f64>,
    /// Temperature sensor noise per reading, K rms (overrides the design's and --sensor's).
    #[arg(long, value_name = "K", value_parser = real(Span::closed(0.0, 1000.0)))]
    sensor_noise: Option<f64>,
    /// Temperature readings averaged per corrected reading (M).
    #[arg(long, value_name = "M", value_parser = clap::value_parser!(u32).range(1..=1 << 24))]
    readings_averaged: Option<u32>,
    /// The calibration temperature the reference drift is counted from, °C [default: the middle of the
    /// range].
    #[arg(long, value_name = "C", allow_negative_numbers = true, value_parser = real(CELSIUS))]
    calibration_t: Option<f64>,
    /// Error of the firmware's arithmetic and table interpolation, LSB (default 0.25).
    #[arg(long, value_name = "LSB", value_parser = real(Span::closed(0.0, 1e6)))]
    arithmetic_lsb: Option<f64>,
    /// Print the budget as JSON instead of a table.
    #[arg(long)]
    json: bool,
    /// A column of every size in the unit the product speaks, beside nepers: np, mnp, db10, db20, pct or
    /// mau (milli-absorbance units). Text table only.
    #[arg(long, value_name = "UNIT", value_parser = crate::plot::parse_unit, conflicts_with = "json")]
    error_unit: Option<logtrim_host::error_scale::ErrorScale>,
}

/// Runs the verb.
pub fn run(args: BudgetArgs) -> Result<(), Failure> {
    let design = match (&args.design, &args.preset) {
        (Some(p), _) => Some(read_design(p).map_err(Failure::input)?),
        (None, Some(name)) => Some(preset(name).ok_or_else(|| {
            let names: Vec<&str> = PRESETS.iter().map(|p| p.name).collect();
            Failure::input(format!(
                "--preset {name:?}: no such preset; expected one of: {}",
                names.join(", ")
            ))
        })?),
        (None, None) => None,
    };
    let sensor = match &args.sensor {
        Some(p) => Some(load_settings(p).map_err(Failure::input)?),
        None => None,
    };
    let mut s = match &design {
        Some(fe) => BudgetSpec::from_design(fe).map_err(Failure::input)?,
        None => BudgetSpec::default(),
    };
    let set = |slot: &mut f64, v: Option<f64>| {
        if let Some(v) = v {
            *slot = v;
        }
    };
    if let Some(b) = args.bits {
        s.adc.bits = b;
    }
    set(&mut s.adc.vref_v, args.vref);
    set(&mut s.adc.noise_lsb_rms, args.noise_lsb);
    if let Some(n) = args.oversampling {
        s.adc.oversampling = n;
    }
    set(&mut s.reference.tolerance, args.ref_tolerance);
    set(&mut s.reference.drift_ppm_per_k, args.ref_drift_ppm);
    set(&mut s.front_end.slope_v_per_decade, args.slope);
    set(&mut s.front_end.slope_at_c, args.slope_at);
    if args.slope_drift_ppm.is_some() {
        s.front_end.slope_drift_ppm_per_k = args.slope_drift_ppm;
    }
    set(&mut s.front_end.zero_v, args.zero);
    set(&mut s.front_end.ratio_min, args.ratio_min);
    set(&mut s.front_end.ratio_max, args.ratio_max);
    set(&mut s.temperature.min_c, args.t_min);
    set(&mut s.temperature.max_c, args.t_max);
    set(&mut s.temperature.sensor_accuracy_k, args.sensor_accuracy);
    if let Some(m) = args.readings_averaged {
        s.temperature.readings_averaged = m;
    }
    if args.calibration_t.is_some() {
        s.temperature.calibration_c = args.calibration_t;
    }
    set(&mut s.arithmetic.error_lsb, args.arithmetic_lsb);
    let source = match (&args.design, &args.preset) {
        (Some(p), _) => Some(p.display().to_string()),
        (None, Some(name)) => Some(format!("preset {name}")),
        (None, None) => None,
    };
    let with_source = |e: logtrim_host::budget::BudgetError| match &source {
        Some(src) => Failure::input(format!("{src} (with the options given): {e}")),
        None => Failure::input(e),
    };
    if let (Some(sensor), Some(path)) = (&sensor, &args.sensor) {
        let noise_codes = match design.as_ref().map(|fe| fe.temperature_sensor) {
            Some(TemperatureMeasurement::Raw { noise_codes_rms, .. }) => noise_codes_rms,
            _ => 0.0,
        };
        s = s.with_sensor(sensor, noise_codes).map_err(|e| match e {
            e @ logtrim_host::budget::BudgetError::DesignSensor { .. } => {
                Failure::input(format!("--sensor {}: {e}", path.display()))
            }
            e => with_source(e),
        })?;
    }
    set(&mut s.temperature.sensor_noise_k_rms, args.sensor_noise);
    let budget = s.compute().map_err(with_source)?;
    if args.json {
        say_raw!("{}", budget.to_json());
    } else {
        say_raw!("{}", budget.render_table_in(args.error_unit));
    }
    Ok(())
}
