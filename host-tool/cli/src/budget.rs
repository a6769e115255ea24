//! `logtrim budget`: the error budget of a design, from its front-end description (the file `simulate`
//! reads) or a JSON file of its figures, and/or options.

use std::path::PathBuf;

use clap::Args;
use logtrim_host::budget::BudgetSpec;
use logtrim_host::frontend::{preset, FrontEnd, PRESETS};

use crate::values::{real, Span, CELSIUS, RATIO};
use crate::Failure;

/// Options of `logtrim budget`. Options override the figures of the design or the file; figures given by
/// none take their defaults (see --write-spec for a file holding every figure).
///
/// The budget uses the ideal log-ratio law (slope ∝ absolute temperature unless --slope-drift-ppm is
/// given). The reference's tolerance is taken as removed by calibration and its drift as not; the
/// temperature sensor's accuracy is the part a calibration with the same sensor does not absorb.
#[derive(Args, Debug)]
pub struct BudgetArgs {
    /// The design's figures as JSON (every field optional): adc, reference, front_end, temperature,
    /// arithmetic.
    #[arg(value_name = "FIGURES.json", conflicts_with_all = ["design", "preset"])]
    spec: Option<PathBuf>,
    /// The design's front-end description (the JSON file `logtrim simulate --frontend` reads and
    /// --write-preset writes): its converter, slope law, level shift, ranges and temperature sensor's noise
    /// give the budget's figures.
    #[arg(long, value_name = "FRONTEND.json", conflicts_with = "preset")]
    design: Option<PathBuf>,
    /// A built-in front end's description as the design (see `logtrim simulate --list-presets`).
    #[arg(long, value_name = "NAME")]
    preset: Option<String>,
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
    /// The level shift is derived from the converter's reference (a divider of it): a reference error then
    /// misreads only the log part.
    #[arg(long)]
    ratiometric_level_shift: bool,
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
    /// Temperature sensor noise per reading, K rms.
    #[arg(long, value_name = "K", value_parser = real(Span::closed(0.0, 1000.0)))]
    sensor_noise: Option<f64>,
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
    /// Write the figures used (file, options and defaults together) to FILE as JSON, to start a design
    /// file from.
    #[arg(long, value_name = "FILE")]
    write_spec: Option<PathBuf>,
}

/// Runs the verb.
pub fn run(args: BudgetArgs) -> Result<(), Failure> {
    crate::check_outputs(
        &[args.spec.as_deref(), args.design.as_deref()],
        &[args.write_spec.as_deref()],
        &[],
    )?;
    let design = match (&args.design, &args.preset) {
        (Some(p), _) => Some(FrontEnd::load(p).map_err(Failure::input)?),
        (None, Some(name)) => Some(preset(name).ok_or_else(|| {
            let names: Vec<&str> = PRESETS.iter().map(|p| p.name).collect();
            Failure::input(format!(
                "--preset {name:?}: no such preset; expected one of: {}",
                names.join(", ")
            ))
        })?),
        (None, None) => None,
    };
    let mut s = match (&args.spec, &design) {
        (Some(p), _) => BudgetSpec::load(p).map_err(Failure::input)?,
        (None, Some(fe)) => BudgetSpec::from_design(fe).map_err(Failure::input)?,
        (None, None) => BudgetSpec::default(),
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
    if args.ratiometric_level_shift {
        s.reference.ratiometric_level_shift = true;
    }
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
    set(&mut s.temperature.sensor_noise_k_rms, args.sensor_noise);
    set(&mut s.arithmetic.error_lsb, args.arithmetic_lsb);
    let source = match (&args.spec, &args.design, &args.preset) {
        (Some(p), _, _) | (None, Some(p), _) => Some(p.display().to_string()),
        (None, None, Some(name)) => Some(format!("preset {name}")),
        (None, None, None) => None,
    };
    let budget = s.compute().map_err(|e| match &source {
        Some(src) => Failure::input(format!("{src} (with the options given): {e}")),
        None => Failure::input(e),
    })?;
    if let Some(path) = &args.write_spec {
        let mut written = s.clone();
        if written.note.is_empty() {
            written.note = format!(
                "generated by logtrim {} budget --write-spec: edit the figures to your design",
                env!("CARGO_PKG_VERSION")
            );
        }
        logtrim_host::output::write_atomic(path, written.to_json().as_bytes())
            .map_err(|e| Failure::input(format!("{}: {e}", path.display())))?;
        note!("wrote {}", path.display());
    }
    if args.json {
        say_raw!("{}", budget.to_json());
    } else {
        say_raw!("{}", budget.render_table_in(args.error_unit));
    }
    Ok(())
}
