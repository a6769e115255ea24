//! The demonstration that the README's first command runs: simulate a unit, fit it, and correct a
//! held-out validation run with three methods side by side, against the noise-only limit.
//!
//! The scenario is invented: a production line of two-beam process monitors (the simulator's presets),
//! one unit of which comes off the line and into the temperature chamber.
//!
//! The methods:
//! * **nominal**: the textbook equation with the design values and no calibration,
//!   `x = (V − V_shift)/(G(T)·kT/q)` with `V = code·LSB` and the design gain (with its compensating
//!   resistor's nominal tempco) at the measured temperature;
//! * **two-point at room**: offset and slope from two known ratios at the set-point nearest 25 °C, the
//!   slope carried to other temperatures by the design's temperature law (the usual bench calibration);
//! * **logtrim**: the fitted calibration, corrected by firmware-lib's f32 path and by its integer
//!   fixed-point path (from the default tables) exactly as on the MCU;
//! * **noise-only limit**: the oracle of the reference model, which knows the exact front end and only
//!   suffers the noise of the code and the temperature reading.

use logtrim::physics::thermal_voltage;
use logtrim::Calibration;
use serde::Serialize;

use crate::fit::{fit, FitData, FitError, FitOptions, FitOutcome};
use crate::frontend::{FrontEnd, MeasuredTemperature};
use crate::simulate::{simulate, ChamberRow, Plan, SimError, SimReading, Simulation};

/// The error figures of one method over a validation run.
#[derive(Debug, Clone, Serialize)]
pub struct MethodStats {
    /// Short name.
    pub name: &'static str,
    /// Readings the method gave a value for.
    pub count: usize,
    /// Readings it refused (out of range, saturated, below the usable floor).
    pub refused: usize,
    /// rms error in x, nepers.
    pub rms_np: f64,
    /// max |error| in x, nepers.
    pub max_np: f64,
}

/// The figures that the accuracy target is stated in: logtrim against the oracle on the readings both
/// give a value for.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct VersusOracle {
    /// Readings both give a value for.
    pub count: usize,
    /// rms of logtrim / rms of the oracle.
    pub rms_ratio: f64,
    /// max of logtrim / max of the oracle.
    pub max_ratio: f64,
}

/// Everything the demo computed.
#[derive(Debug, Clone)]
pub struct DemoOutcome {
    /// The simulated runs (with the truth).
    pub simulation: Simulation,
    /// The fit.
    pub fit: FitOutcome,
    /// nominal, two-point at room, logtrim, noise-only limit, in that order.
    pub methods: Vec<MethodStats>,
    /// logtrim's f32 path against the oracle.
    pub versus_oracle: VersusOracle,
    /// logtrim's fixed-point path against the oracle.
    pub versus_oracle_fixed: VersusOracle,
}

/// Why the demo could not run.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum DemoError {
    /// The simulation failed.
    #[error(transparent)]
    Simulate(#[from] SimError),
    /// The fit refused the simulated data.
    #[error(transparent)]
    Fit(#[from] FitError),
    /// The fixed-point tables could not be made.
    #[error(transparent)]
    Tables(#[from] crate::tables::TableError),
    /// A chamber reading's temperature is a raw code that the front end's channel did not convert to °C.
    #[error("a chamber reading's temperature is a raw code that the channel's description does not convert to °C (a sensor fault, or outside its valid range)")]
    RawTemperature,
}

fn celsius(t: MeasuredTemperature) -> Result<f64, DemoError> {
    match t {
        MeasuredTemperature::Celsius(c) => Ok(c),
        MeasuredTemperature::Code(_) => Err(DemoError::RawTemperature),
    }
}

/// The chamber rows of one unit as fit data.
pub fn fit_data(rows: &[ChamberRow], unit: usize) -> Result<FitData, DemoError> {
    let mut d = FitData::default();
    for r in rows.iter().filter(|r| r.unit == unit) {
        d.code.push(r.code);
        d.temp_c.push(celsius(r.temperature)?);
        d.ratio.push(r.ratio);
    }
    Ok(d)
}

/// The nominal design equation of a front end: x from a code at a temperature, no calibration.
pub fn nominal_x(design: &FrontEnd, code: u32, temp_c: f64) -> f64 {
    let v = f64::from(code) * design.lsb_v();
    let slope = design.pair.ideality.max(1.0) * thermal_voltage(temp_c + 273.15) * design.gain(temp_c);
    (v - design.output_stage.level_shift_v) / slope
}

/// A room-temperature two-point calibration: offset and slope from the chamber rows at the set-point
/// nearest 25 °C, at the ratios nearest the 10th and 90th percentile of x there (clear of the bends).
#[derive(Debug, Clone, Copy, Serialize)]
pub struct TwoPoint {
    /// Temperature of the calibration, °C.
    pub temp_c: f64,
    /// Code at x = 0.
    pub offset_code: f64,
    /// Codes per neper at `temp_c`.
    pub slope: f64,
}

impl TwoPoint {
    /// Makes the two-point calibration of one unit's chamber rows.
    pub fn from_chamber(rows: &[ChamberRow], unit: usize) -> Option<TwoPoint> {
        let rows: Vec<&ChamberRow> = rows.iter().filter(|r| r.unit == unit).collect();
        let sp =
            rows.iter().map(|r| r.setpoint_c).min_by(|a, b| (a - 25.0).abs().total_cmp(&(b - 25.0).abs()))?;
        let at: Vec<&&ChamberRow> = rows.iter().filter(|r| r.setpoint_c == sp).collect();
        let mut xs: Vec<f64> = at.iter().map(|r| r.x_true).collect();
        xs.sort_by(f64::total_cmp);
        xs.dedup();
        let pick = |q: f64| xs.get(((xs.len() - 1) as f64 * q).round() as usize).copied();
        let (x1, x2) = (pick(0.1)?, pick(0.9)?);
        let mean = |x: f64| {
            let v: Vec<(f64, f64)> = at
                .iter()
                .filter(|r| r.x_true == x)
                .filter_map(|r| celsius(r.temperature).ok().map(|t| (f64::from(r.code), t)))
                .collect();
            let n = v.len() as f64;
            (v.iter().map(|p| p.0).sum::<f64>() / n, v.iter().map(|p| p.1).sum::<f64>() / n)
        };
        let ((c1, t1), (c2, t2)) = (mean(x1), mean(x2));
        let slope = (c2 - c1) / (x2 - x1);
        Some(TwoPoint { temp_c: 0.5 * (t1 + t2), offset_code: c1 - slope * x1, slope })
    }

    /// x from a code at a temperature: the slope follows the design's temperature law.
    pub fn x(&self, design: &FrontEnd, code: u32, temp_c: f64) -> f64 {
        let law = |t: f64| thermal_voltage(t + 273.15) * design.gain(t);
        let slope = self.slope * law(temp_c) / law(self.temp_c);
        (f64::from(code) - self.offset_code) / slope
    }
}

fn stats(name: &'static str, errors: &[Option<f64>]) -> MethodStats {
    let got: Vec<f64> = errors.iter().flatten().copied().collect();
    let n = got.len();
    let rms = if n > 0 { (got.iter().map(|e| e * e).sum::<f64>() / n as f64).sqrt() } else { f64::NAN };
    let max = got.iter().fold(0.0f64, |m, e| m.max(e.abs()));
    MethodStats { name, count: n, refused: errors.len() - n, rms_np: rms, max_np: max }
}

/// Errors of logtrim's f32 correction on a validation run (None where it refuses a reading).
pub fn logtrim_errors(cal: &Calibration, rows: &[SimReading]) -> Vec<Option<f64>> {
    rows.iter()
        .map(|r| {
            let t = celsius(r.temperature).ok()?;
            cal.correct(r.code, t as f32).ok().map(|v| f64::from(v.x) - r.x_true)
        })
        .collect()
}

/// Errors of the integer fixed-point path on a validation run, temperatures passed in m°C (None where it
/// refuses a reading).
pub fn fixed_errors(fixed: &logtrim::fixed::FixedCalibration<'_>, rows: &[SimReading]) -> Vec<Option<f64>> {
    let scale = f64::from(1u32 << logtrim::fixed::X_FRAC);
    rows.iter()
        .map(|r| {
            let t = celsius(r.temperature).ok()?;
            let mc = (t * 1000.0).round() as i32;
            fixed.correct(r.code, mc).ok().map(|v| f64::from(v.x) / scale - r.x_true)
        })
        .collect()
}

/// logtrim's errors against the oracle's, on the readings both give a value for.
pub fn versus_oracle(ours: &[Option<f64>], rows: &[SimReading]) -> VersusOracle {
    let pairs: Vec<(f64, f64)> = ours
        .iter()
        .zip(rows)
        .filter_map(|(e, r)| Some((e.as_ref().copied()?, r.x_oracle? - r.x_true)))
        .collect();
    let n = pairs.len() as f64;
    let rms = |f: &dyn Fn(&(f64, f64)) -> f64| (pairs.iter().map(|p| f(p) * f(p)).sum::<f64>() / n).sqrt();
    let max = |f: &dyn Fn(&(f64, f64)) -> f64| pairs.iter().fold(0.0f64, |m, p| m.max(f(p).abs()));
    VersusOracle {
        count: pairs.len(),
        rms_ratio: rms(&|p| p.0) / rms(&|p| p.1),
        max_ratio: max(&|p| p.0) / max(&|p| p.1),
    }
}

/// Runs the demo on one front end (unit 0 of the simulation).
pub fn run(fe: &FrontEnd, plan: &Plan, fit_options: &FitOptions) -> Result<DemoOutcome, DemoError> {
    let simulation = simulate(fe, plan)?;
    // Every method sees the temperature as the firmware reads it: a raw channel's code converted by the
    // channel's nominal description (a code it refuses stays a code, and is refused by every method).
    let read = |t: MeasuredTemperature| fe.firmware_celsius(t).map_or(t, MeasuredTemperature::Celsius);
    let chamber: Vec<ChamberRow> =
        simulation.chamber.iter().map(|r| ChamberRow { temperature: read(r.temperature), ..*r }).collect();
    let data = fit_data(&chamber, 0)?;
    let fit = fit(&data, fit_options)?;
    let val: Vec<SimReading> = simulation
        .validation
        .iter()
        .filter(|r| r.unit == 0)
        .map(|r| SimReading { temperature: read(r.temperature), ..*r })
        .collect();
    let design = &simulation.nominal;
    let nominal: Vec<Option<f64>> = val
        .iter()
        .map(|r| celsius(r.temperature).ok().map(|t| nominal_x(design, r.code, t) - r.x_true))
        .collect();
    let two = TwoPoint::from_chamber(&chamber, 0);
    let two_point: Vec<Option<f64>> = val
        .iter()
        .map(|r| {
            let t = celsius(r.temperature).ok()?;
            two.map(|c| c.x(design, r.code, t) - r.x_true)
        })
        .collect();
    let ours = logtrim_errors(&fit.calibration, &val);
    let oracle: Vec<Option<f64>> = val.iter().map(|r| r.x_oracle.map(|x| x - r.x_true)).collect();
    let tables = crate::tables::build(&fit.calibration, None, &crate::tables::TableOptions::default())?;
    let ours_fixed = fixed_errors(&tables.view(), &val);
    let versus_oracle_fixed = versus_oracle(&ours_fixed, &val);
    let versus_oracle = versus_oracle(&ours, &val);
    let methods = vec![
        stats("nominal equation", &nominal),
        stats("two-point at room", &two_point),
        stats("logtrim fit (f32)", &ours),
        stats("logtrim fit (fixed)", &ours_fixed),
        stats("noise-only limit", &oracle),
    ];
    Ok(DemoOutcome { simulation, fit, methods, versus_oracle, versus_oracle_fixed })
}

/// The side-by-side table of a demo outcome.
pub fn render(out: &DemoOutcome) -> String {
    use crate::error_scale::{db_power, pct_of_ratio};
    use std::fmt::Write;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{:<20} {:>7} {:>8} {:>11} {:>11} {:>10} {:>10} {:>9}",
        "method", "values", "refused", "rms [Np]", "max [Np]", "rms [dB]", "max [dB]", "max [%]"
    );
    for m in &out.methods {
        let _ = writeln!(
            s,
            "{:<20} {:>7} {:>8} {:>11.3e} {:>11.3e} {:>10.4} {:>10.4} {:>9.3}",
            m.name,
            m.count,
            m.refused,
            m.rms_np,
            m.max_np,
            db_power(m.rms_np),
            db_power(m.max_np),
            pct_of_ratio(m.max_np)
        );
    }
    for (path, v) in [("f32", &out.versus_oracle), ("fixed", &out.versus_oracle_fixed)] {
        let _ = writeln!(
            s,
            "logtrim ({path}) / noise-only limit on {} readings: rms {:.2}x (target <= 1.3x), max {:.2}x (target <= 2.5x)",
            v.count, v.rms_ratio, v.max_ratio
        );
    }
    s
}
