//! `logtrim budget`: the error budget of a design, from a JSON file of its figures and/or options.

use std::path::PathBuf;

use clap::Args;
use logtrim_host::budget::BudgetSpec;

use crate::Failure;

/// Options of `logtrim budget`. Options override the file's figures; figures given by neither take their
/// defaults (see --write-spec for a file holding every figure).
///
/// The budget uses the ideal log-ratio law (slope ∝ absolute temperature unless --slope-drift-ppm is
/// given). The reference's tolerance is taken as removed by calibration and its drift as not; the
/// temperature sensor's accuracy is the part a calibration with the same sensor does not absorb.
#[derive(Args, Debug)]
pub struct BudgetArgs {
    /// The design's figures as JSON (every field optional): adc, reference, front_end, temperature,
    /// arithmetic.
    #[arg(value_name = "DESIGN.json")]
    spec: Option<PathBuf>,
    /// ADC resolution, bits.
    #[arg(long, value_name = "N")]
    bits: Option<u8>,
    /// ADC reference voltage (full scale), V.
    #[arg(long, value_name = "V")]
    vref: Option<f64>,
    /// ADC noise of one conversion, LSB rms.
    #[arg(long, value_name = "LSB")]
    noise_lsb: Option<f64>,
    /// Conversions averaged per reading (oversampling N).
    #[arg(long, value_name = "N")]
    oversampling: Option<u32>,
    /// Reference initial tolerance, as a fraction (removed by calibration; shown for information).
    #[arg(long, value_name = "FRACTION")]
    ref_tolerance: Option<f64>,
    /// Reference drift that calibration does not remove, ppm/K.
    #[arg(long, value_name = "PPM_PER_K")]
    ref_drift_ppm: Option<f64>,
    /// The front end's slope, V per decade of ratio, at --slope-at.
    #[arg(long, value_name = "V")]
    slope: Option<f64>,
    /// The temperature at which --slope is given, °C.
    #[arg(long, value_name = "C")]
    slope_at: Option<f64>,
    /// The slope's drift, ppm/K (a compensated front end's residual); default: PTAT, as kT/q.
    #[arg(long, value_name = "PPM_PER_K", allow_negative_numbers = true)]
    slope_drift_ppm: Option<f64>,
    /// The front end's output at ratio 1 (its level shift), V.
    #[arg(long, value_name = "V", allow_negative_numbers = true)]
    zero: Option<f64>,
    /// Smallest ratio of the range.
    #[arg(long, value_name = "RATIO")]
    ratio_min: Option<f64>,
    /// Largest ratio of the range.
    #[arg(long, value_name = "RATIO")]
    ratio_max: Option<f64>,
    /// Lowest operating temperature, °C.
    #[arg(long, value_name = "C", allow_negative_numbers = true)]
    t_min: Option<f64>,
    /// Highest operating temperature, °C.
    #[arg(long, value_name = "C", allow_negative_numbers = true)]
    t_max: Option<f64>,
    /// Temperature sensor error that calibration does not absorb, K.
    #[arg(long, value_name = "K")]
    sensor_accuracy: Option<f64>,
    /// Temperature sensor noise per reading, K rms.
    #[arg(long, value_name = "K")]
    sensor_noise: Option<f64>,
    /// Error of the firmware's arithmetic and table interpolation, LSB (default 0.25).
    #[arg(long, value_name = "LSB")]
    arithmetic_lsb: Option<f64>,
    /// Print the budget as JSON instead of a table.
    #[arg(long)]
    json: bool,
    /// Write the figures used (file, options and defaults together) to FILE as JSON, to start a design
    /// file from.
    #[arg(long, value_name = "FILE")]
    write_spec: Option<PathBuf>,
}

/// Runs the verb.
pub fn run(args: BudgetArgs) -> Result<(), Failure> {
    let mut s = match &args.spec {
        Some(p) => BudgetSpec::load(p).map_err(Failure::input)?,
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
    set(&mut s.temperature.sensor_noise_k_rms, args.sensor_noise);
    set(&mut s.arithmetic.error_lsb, args.arithmetic_lsb);
    let budget = s.compute().map_err(|e| match &args.spec {
        Some(p) => Failure::input(format!("{} (with the options given): {e}", p.display())),
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
        eprintln!("wrote {}", path.display());
    }
    if args.json {
        print!("{}", budget.to_json());
    } else {
        print!("{}", budget.render_table());
    }
    Ok(())
}
