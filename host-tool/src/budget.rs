//! The error budget of a design before any unit is built: each contribution to the error in x = ln ratio,
//! their root-sum-square and their worst case, from a few figures of the design ([`BudgetSpec`]).
//!
//! A design is described once, as a front-end description ([`crate::frontend::FrontEnd`], the file that
//! `simulate` reads, `schemas/frontend.schema.json`): [`BudgetSpec::from_design`] takes the budget's figures
//! from it, and [`BudgetSpec::with_sensor`] those of a raw temperature channel from a sensor file (the file
//! `fit --sensor` reads). The few figures a description does not hold (oversampling, the reference's drift,
//! the temperature sensor's accuracy, readings averaged, the calibration temperature, the arithmetic's
//! error) keep their defaults unless the caller sets them; there is no file of budget figures
//! ([`read_design`] names an earlier version's figures file as such).
//!
//! # The law
//!
//! The budget uses the ideal log-ratio law, not a fitted unit: the output is `V(x, T) = V₀ + S(T)·x` with
//! `S(T) = S_ref·(1 + α·(T − T_s))` volts per neper, `S_ref` the slope at `T_s`. By default `α` is the
//! PTAT law of kT/q (`α = 1/(T_s + 273.15)`: +3354 ppm/K at 25 °C, an uncompensated front end); a
//! compensated front end is described by its residual slope drift instead. The converter gives
//! `code = V/LSB`, `LSB = V_ref/2^bits`, and the firmware reads `x = (code·LSB − V₀)/S(T_measured)`.
//!
//! # The contributions
//!
//! Each is the size of one error source in x at the worst point of the range for that source (the corner of
//! (x, T) where it is largest), which makes the totals an upper estimate:
//!
//! | contribution | size in x | kind |
//! |---|---|---|
//! | quantisation | `LSB/√12 · ∂x/∂code`, divided by √N when the noise dithers (≥ ½ LSB rms) | rms |
//! | ADC noise | `σ_code/√N · ∂x/∂code` | rms |
//! | arithmetic and tables | the figure given in LSB `· ∂x/∂code` | bound |
//! | temperature sensor accuracy | `δT · |∂x/∂T|`, `∂x/∂T = −x·α·S_ref/S(T)` at a fixed code | bound |
//! | temperature sensor noise | `σ_T/√M · |∂x/∂T|` (M readings averaged) | rms |
//! | reference drift | `|V(x,T)/S(T)|·δ/(1+δ)`, `δ = drift·|T − T_cal|` (the level shift is a voltage the reference does not scale) | bound |
//!
//! with `∂x/∂code = LSB/S(T)`. The root-sum-square treats the contributions as uncorrelated (common
//! practice); the worst case adds them linearly. Each is given in nepers, in dB (10·log10 for power-like
//! ratios and 20·log10 for amplitude-like ratios, labelled) and in % of the ratio (`100·(e^|e| − 1)`).
//!
//! # What a calibration removes (the assumptions)
//!
//! * The reference's initial tolerance is a gain error: every code scales by the same factor, which a
//!   calibration absorbs into its slope and offset. It is listed as removed, with the size it would have
//!   uncorrected, and left out of the totals.
//! * The reference's drift is counted in full as not removed, over the largest distance from the
//!   calibration temperature `T_cal` (the middle of the range by default). A unit calibrated over
//!   temperature also absorbs the repeatable part of that drift: then give only the part that does not
//!   repeat (hysteresis, ageing).
//! * The temperature sensor's accuracy is the part of its error a calibration made with the same sensor does
//!   not absorb (a stable offset is absorbed): its drift, hysteresis and any change of the gradient to the
//!   pair. Use the data-sheet accuracy for a worst case.
//! * Quantisation is reduced by oversampling only when the converter's noise dithers it: at ½ LSB rms or
//!   more (common practice, from memory).

mod design;

pub use design::read_design;

use serde::Serialize;

use crate::output::number::Num;

/// ln 10.
const LN10: f64 = std::f64::consts::LN_10;

/// A design's figures ([`BudgetSpec::from_design`]; [`Default`] for a design not yet described).
#[derive(Debug, Clone, PartialEq, Default, Serialize)]
pub struct BudgetSpec {
    /// Free text: which design the figures are of (ignored by the budget).
    #[serde(skip_serializing_if = "String::is_empty")]
    pub note: String,
    /// The log channel's converter.
    pub adc: AdcSpec,
    /// The converter's reference.
    pub reference: ReferenceSpec,
    /// The front end's transfer.
    pub front_end: FrontEndSpec,
    /// The temperature range and the temperature sensor.
    pub temperature: TemperatureSpec,
    /// The firmware's arithmetic and tables.
    pub arithmetic: ArithmeticSpec,
}

/// The log channel's converter.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AdcSpec {
    /// Resolution, bits (1..=24).
    pub bits: u8,
    /// Reference voltage (full scale), V.
    pub vref_v: f64,
    /// Noise of one conversion, LSB rms.
    pub noise_lsb_rms: f64,
    /// Conversions averaged per reading (oversampling N ≥ 1).
    pub oversampling: u32,
}

impl Default for AdcSpec {
    fn default() -> Self {
        AdcSpec { bits: 16, vref_v: 3.3, noise_lsb_rms: 0.7, oversampling: 16 }
    }
}

/// The converter's reference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReferenceSpec {
    /// Initial tolerance, as a fraction (removed by calibration).
    pub tolerance: f64,
    /// Drift not removed by calibration, ppm/K.
    pub drift_ppm_per_k: f64,
}

impl Default for ReferenceSpec {
    fn default() -> Self {
        ReferenceSpec { tolerance: 0.001, drift_ppm_per_k: 10.0 }
    }
}

/// The front end's transfer `V = V₀ + S(T)·x`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FrontEndSpec {
    /// Slope at `slope_at_c`, V per decade of ratio.
    pub slope_v_per_decade: f64,
    /// The temperature at which the slope is given, °C.
    pub slope_at_c: f64,
    /// The slope's drift, ppm/K; absent: the PTAT law of kT/q, 1e6/(slope_at_c + 273.15).
    pub slope_drift_ppm_per_k: Option<f64>,
    /// The output at ratio 1 (the level shift), V.
    pub zero_v: f64,
    /// Smallest ratio of the range.
    pub ratio_min: f64,
    /// Largest ratio of the range.
    pub ratio_max: f64,
}

impl Default for FrontEndSpec {
    fn default() -> Self {
        FrontEndSpec {
            slope_v_per_decade: 0.5,
            slope_at_c: 25.0,
            slope_drift_ppm_per_k: None,
            zero_v: 1.65,
            ratio_min: 1e-3,
            ratio_max: 1e2,
        }
    }
}

/// The temperature range and the temperature sensor.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TemperatureSpec {
    /// Lowest operating temperature, °C.
    pub min_c: f64,
    /// Highest operating temperature, °C.
    pub max_c: f64,
    /// The calibration temperature the reference drift is counted from; absent: the middle of the range.
    pub calibration_c: Option<f64>,
    /// The sensor's error a calibration does not absorb, K (see the module docs).
    pub sensor_accuracy_k: f64,
    /// The sensor's noise per reading, K rms.
    pub sensor_noise_k_rms: f64,
    /// Temperature readings averaged per corrected reading (M ≥ 1).
    pub readings_averaged: u32,
}

impl Default for TemperatureSpec {
    fn default() -> Self {
        TemperatureSpec {
            min_c: 0.0,
            max_c: 70.0,
            calibration_c: None,
            sensor_accuracy_k: 0.25,
            sensor_noise_k_rms: 0.05,
            readings_averaged: 1,
        }
    }
}

/// The firmware's arithmetic and tables.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ArithmeticSpec {
    /// Largest error of the correction's arithmetic and table interpolation, LSB. The default ¼ LSB is
    /// the project's own target for the fixed-point path; give the figure its verification measured.
    pub error_lsb: f64,
}

impl Default for ArithmeticSpec {
    fn default() -> Self {
        ArithmeticSpec { error_lsb: 0.25 }
    }
}

/// Errors of a budget's inputs.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum BudgetError {
    /// The design's file could not be read, or is not well-formed JSON.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
    /// The file is a figures file of an earlier version, which `budget` no longer reads.
    #[error(
        "{path}: the key `{key}` is of a budget figures file, which logtrim no longer reads; expected the \
         design's front-end description (the file `simulate --frontend` reads and `simulate --write-preset` \
         writes, schemas/frontend.schema.json); give the figures it does not describe as options \
         (--oversampling, --ref-drift-ppm, --sensor-accuracy, --readings-averaged, --arithmetic-lsb)"
    )]
    FiguresFile {
        /// The file.
        path: String,
        /// The first key of the figures file found in it.
        key: String,
    },
    /// The design description does not validate.
    #[error(transparent)]
    Design(#[from] crate::frontend::FrontEndError),
    /// The design's raw temperature channel gives no code somewhere over its operating range.
    #[error(
        "the temperature channel at {at_c} °C: {error}; expected a channel that reads over the operating range"
    )]
    DesignSensor {
        /// The temperature it cannot read, °C.
        at_c: f64,
        /// firmware-lib's verdict.
        error: logtrim::Error,
    },
    /// A figure is outside what the budget can use.
    #[error("{field} = {value}: expected {expected}")]
    Invalid {
        /// The figure, as its JSON path.
        field: &'static str,
        /// The value given.
        value: f64,
        /// What is needed.
        expected: &'static str,
    },
}

/// Whether a contribution is a standard deviation or a bound.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Kind {
    /// A standard deviation (noise).
    Rms,
    /// A largest error.
    Bound,
}

/// An error in x in the units people read.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Size {
    /// Nepers.
    pub np: f64,
    /// dB for power-like ratios, 10·log10.
    pub db_10log10: f64,
    /// dB for amplitude-like ratios, 20·log10.
    pub db_20log10: f64,
    /// Per cent of the ratio, `100·(e^|np| − 1)`.
    pub pct_of_ratio: f64,
}

impl Size {
    /// A size from nepers.
    pub fn of_np(np: f64) -> Size {
        Size {
            np,
            db_10log10: crate::error_scale::db_power(np),
            db_20log10: crate::error_scale::db_amplitude(np),
            pct_of_ratio: crate::error_scale::pct_of_ratio(np.abs()),
        }
    }
}

/// One contribution to the error in x.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Contribution {
    /// What it is.
    pub name: String,
    /// A standard deviation or a bound.
    pub kind: Kind,
    /// Its size in x.
    pub size: Size,
    /// Its size in LSB of the log channel, where it is defined in codes.
    pub lsb: Option<f64>,
    /// Where in the range it is largest.
    pub worst_at: String,
}

/// The budget of a design.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Budget {
    /// What produced it.
    pub generator: String,
    /// The figures it was computed from.
    pub spec: BudgetSpec,
    /// One LSB of the log channel, V.
    pub lsb_v: f64,
    /// The slope's drift used, 1/K.
    pub slope_drift_per_k: f64,
    /// The smallest slope over the range, LSB per neper.
    pub min_slope_lsb_per_np: f64,
    /// The largest ∂x/∂code over the range, Np per LSB.
    pub max_dx_dcode_np_per_lsb: f64,
    /// The largest |∂x/∂T| at a fixed code over the range, Np per K.
    pub max_dx_dt_np_per_k: f64,
    /// The contributions counted.
    pub contributions: Vec<Contribution>,
    /// Their root-sum-square.
    pub rss: Size,
    /// Their linear sum (worst case).
    pub worst_case: Size,
    /// What a calibration removes (not in the totals), at the size it would have uncorrected.
    pub removed_by_calibration: Vec<Contribution>,
    /// The assumptions behind the figures.
    pub assumptions: Vec<String>,
}

impl BudgetSpec {
    /// Checks every figure.
    pub fn validate(&self) -> Result<(), BudgetError> {
        let bad = |field, value: f64, expected| Err(BudgetError::Invalid { field, value, expected });
        let fin = |v: f64| v.is_finite();
        let a = &self.adc;
        if !(1..=24).contains(&a.bits) {
            return bad("adc.bits", f64::from(a.bits), "1..=24 bits");
        }
        if !(fin(a.vref_v) && a.vref_v > 0.0) {
            return bad("adc.vref_v", a.vref_v, "a positive reference voltage in V");
        }
        if !(fin(a.noise_lsb_rms) && a.noise_lsb_rms >= 0.0) {
            return bad("adc.noise_lsb_rms", a.noise_lsb_rms, "a noise ≥ 0 LSB rms");
        }
        if a.oversampling == 0 {
            return bad("adc.oversampling", 0.0, "at least 1 conversion per reading");
        }
        let r = &self.reference;
        if !(fin(r.tolerance) && (0.0..0.5).contains(&r.tolerance)) {
            return bad("reference.tolerance", r.tolerance, "a fraction in 0 … 0.5");
        }
        if !(fin(r.drift_ppm_per_k) && (0.0..1e4).contains(&r.drift_ppm_per_k)) {
            return bad("reference.drift_ppm_per_k", r.drift_ppm_per_k, "a drift in 0 … 10000 ppm/K");
        }
        let f = &self.front_end;
        if !(fin(f.slope_v_per_decade) && f.slope_v_per_decade > 0.0) {
            return bad(
                "front_end.slope_v_per_decade",
                f.slope_v_per_decade,
                "a positive slope in V per decade",
            );
        }
        if !(fin(f.slope_at_c) && f.slope_at_c > -273.15) {
            return bad("front_end.slope_at_c", f.slope_at_c, "a temperature above −273.15 °C");
        }
        if let Some(d) = f.slope_drift_ppm_per_k {
            if !(fin(d) && d.abs() < 1e5) {
                return bad(
                    "front_end.slope_drift_ppm_per_k",
                    d,
                    "a finite drift below 100000 ppm/K in magnitude",
                );
            }
        }
        if !fin(f.zero_v) {
            return bad("front_end.zero_v", f.zero_v, "a finite voltage");
        }
        if !(fin(f.ratio_min) && f.ratio_min > 0.0) {
            return bad("front_end.ratio_min", f.ratio_min, "a positive ratio");
        }
        if !(fin(f.ratio_max) && f.ratio_max > f.ratio_min) {
            return bad("front_end.ratio_max", f.ratio_max, "a finite ratio above ratio_min");
        }
        let t = &self.temperature;
        if !(fin(t.min_c) && t.min_c > -273.15) {
            return bad("temperature.min_c", t.min_c, "a temperature above −273.15 °C");
        }
        if !(fin(t.max_c) && t.max_c > t.min_c) {
            return bad("temperature.max_c", t.max_c, "a temperature above temperature.min_c");
        }
        if let Some(c) = t.calibration_c {
            if !fin(c) {
                return bad("temperature.calibration_c", c, "a finite temperature in °C");
            }
        }
        if !(fin(t.sensor_accuracy_k) && t.sensor_accuracy_k >= 0.0) {
            return bad("temperature.sensor_accuracy_k", t.sensor_accuracy_k, "an accuracy ≥ 0 K");
        }
        if !(fin(t.sensor_noise_k_rms) && t.sensor_noise_k_rms >= 0.0) {
            return bad("temperature.sensor_noise_k_rms", t.sensor_noise_k_rms, "a noise ≥ 0 K rms");
        }
        if t.readings_averaged == 0 {
            return bad("temperature.readings_averaged", 0.0, "at least 1 reading");
        }
        if !(fin(self.arithmetic.error_lsb) && self.arithmetic.error_lsb >= 0.0) {
            return bad("arithmetic.error_lsb", self.arithmetic.error_lsb, "an error ≥ 0 LSB");
        }
        for tc in [t.min_c, t.max_c] {
            let slope = self.slope_v_per_np(tc);
            if slope.is_nan() || slope <= 0.0 {
                return bad(
                    "front_end.slope_drift_ppm_per_k",
                    self.slope_drift_per_k() * 1e6,
                    "a drift that keeps the slope positive over the temperature range",
                );
            }
        }
        Ok(())
    }

    /// One LSB of the log channel, V.
    pub fn lsb_v(&self) -> f64 {
        self.adc.vref_v / f64::from(1u32 << self.adc.bits.clamp(1, 24))
    }

    /// The slope's drift α, 1/K (the PTAT law unless given).
    pub fn slope_drift_per_k(&self) -> f64 {
        let f = &self.front_end;
        f.slope_drift_ppm_per_k.map_or(1.0 / (f.slope_at_c + logtrim::physics::ZERO_CELSIUS_K), |d| d * 1e-6)
    }

    /// The slope S(T) at `t_c`, V per neper.
    pub fn slope_v_per_np(&self, t_c: f64) -> f64 {
        let f = &self.front_end;
        f.slope_v_per_decade / LN10 * (1.0 + self.slope_drift_per_k() * (t_c - f.slope_at_c))
    }

    /// The ideal law's (fractional) code at x and `t_c`, with the reference off nominal by the fraction
    /// `delta` (the level shift is a voltage of its own, which the reference does not scale).
    pub fn code(&self, x: f64, t_c: f64, delta: f64) -> f64 {
        (self.front_end.zero_v + self.slope_v_per_np(t_c) * x) / (self.lsb_v() * (1.0 + delta))
    }

    /// The firmware's reading of a code at the temperature it measured: the ideal law inverted with nominal
    /// figures.
    pub fn x_of_code(&self, code: f64, t_c: f64) -> f64 {
        (code * self.lsb_v() - self.front_end.zero_v) / self.slope_v_per_np(t_c)
    }

    /// ∂x/∂code at `t_c`, nepers per LSB.
    pub fn dx_dcode(&self, t_c: f64) -> f64 {
        self.lsb_v() / self.slope_v_per_np(t_c)
    }

    /// ∂x/∂T at a fixed code, where the code reads x at `t_c`: nepers per K.
    pub fn dx_dt(&self, x: f64, t_c: f64) -> f64 {
        let f = &self.front_end;
        -x * self.slope_drift_per_k() * (f.slope_v_per_decade / LN10) / self.slope_v_per_np(t_c)
    }

    /// The error in x when the reference is off by the fraction `delta`, exactly (not linearised).
    pub fn reference_error(&self, x: f64, t_c: f64, delta: f64) -> f64 {
        self.x_of_code(self.code(x, t_c, delta), t_c) - x
    }

    /// The corners of the range (x, T).
    fn corners(&self) -> [(f64, f64); 4] {
        let (x0, x1) = (self.front_end.ratio_min.ln(), self.front_end.ratio_max.ln());
        let t = &self.temperature;
        [(x0, t.min_c), (x1, t.min_c), (x0, t.max_c), (x1, t.max_c)]
    }

    /// Computes the budget.
    pub fn compute(&self) -> Result<Budget, BudgetError> {
        self.validate()?;
        let t = &self.temperature;
        let a = &self.adc;
        let n = f64::from(a.oversampling);
        let m = f64::from(t.readings_averaged);
        let at = |x: f64, tc: f64| format!("x = {:.3} Np (ratio {:.3e}), {tc} °C", Num(x), x.exp());
        let at_t = |tc: f64| format!("{tc} °C (smallest slope)");
        // ∂x/∂code is largest where the slope is smallest: at one end of the range (S is linear in T).
        let (t_code, dxdc) = [t.min_c, t.max_c]
            .into_iter()
            .map(|tc| (tc, self.dx_dcode(tc)))
            .fold((t.min_c, 0.0f64), |best, v| if v.1 > best.1 { v } else { best });
        let max_over = |f: &dyn Fn(f64, f64) -> f64| {
            self.corners()
                .into_iter()
                .map(|(x, tc)| (x, tc, f(x, tc).abs()))
                .fold((0.0, t.min_c, -1.0f64), |best, v| if v.2 > best.2 { v } else { best })
        };
        let (xt, tt, dxdt) = max_over(&|x, tc| self.dx_dt(x, tc));
        let dithered = a.noise_lsb_rms >= 0.5;
        let q_lsb = 1.0 / 12f64.sqrt() / if dithered { n.sqrt() } else { 1.0 };
        let noise_lsb = a.noise_lsb_rms / n.sqrt();
        let t_cal = t.calibration_c.unwrap_or(0.5 * (t.min_c + t.max_c));
        let drift = |tc: f64| self.reference.drift_ppm_per_k * 1e-6 * (tc - t_cal).abs();
        let (xr, tr, ref_err) = max_over(&|x, tc| self.reference_error(x, tc, drift(tc)));
        let (xo, to, tol_err) = max_over(&|x, tc| self.reference_error(x, tc, self.reference.tolerance));
        let c = |name: &str, kind, np: f64, lsb: Option<f64>, worst_at: String| Contribution {
            name: name.to_string(),
            kind,
            size: Size::of_np(np),
            lsb,
            worst_at,
        };
        let contributions = vec![
            c(
                if dithered { "quantisation (LSB/√12, averaged)" } else { "quantisation (LSB/√12)" },
                Kind::Rms,
                q_lsb * dxdc,
                Some(q_lsb),
                at_t(t_code),
            ),
            c(
                &format!("ADC noise (N = {})", a.oversampling),
                Kind::Rms,
                noise_lsb * dxdc,
                Some(noise_lsb),
                at_t(t_code),
            ),
            c(
                "arithmetic and tables",
                Kind::Bound,
                self.arithmetic.error_lsb * dxdc,
                Some(self.arithmetic.error_lsb),
                at_t(t_code),
            ),
            c("temperature sensor accuracy", Kind::Bound, t.sensor_accuracy_k * dxdt, None, at(xt, tt)),
            c(
                &format!("temperature sensor noise (M = {})", t.readings_averaged),
                Kind::Rms,
                t.sensor_noise_k_rms / m.sqrt() * dxdt,
                None,
                at(xt, tt),
            ),
            c("reference drift", Kind::Bound, ref_err, None, at(xr, tr)),
        ];
        let rss = contributions.iter().map(|c| c.size.np * c.size.np).sum::<f64>().sqrt();
        let worst = contributions.iter().map(|c| c.size.np).sum::<f64>();
        let removed = vec![c("reference tolerance (a gain error)", Kind::Bound, tol_err, None, at(xo, to))];
        let law = match self.front_end.slope_drift_ppm_per_k {
            None => format!(
                "ideal log-ratio law, slope ∝ absolute temperature (PTAT, {:.0} ppm/K at {} °C): an uncompensated front end",
                self.slope_drift_per_k() * 1e6,
                self.front_end.slope_at_c
            ),
            Some(d) => format!("ideal log-ratio law with a slope drift of {d} ppm/K (a compensated front end)"),
        };
        let mut assumptions = vec![
            law,
            "each contribution at the corner of (x, T) where it is largest: the totals are an upper estimate".into(),
            "root-sum-square: contributions uncorrelated (common practice); worst case: their linear sum".into(),
            "the reference's tolerance is a gain error that a calibration removes; its drift is counted in full, \
             from the calibration temperature"
                .into(),
            "the temperature sensor's accuracy is the part of its error a calibration with the same sensor does not \
             absorb (drift, hysteresis, gradients)"
                .into(),
        ];
        assumptions.push(if dithered {
            format!(
                "quantisation averages down by √N: the noise ({} LSB rms) dithers it (≥ ½ LSB rms; common practice, from memory)",
                a.noise_lsb_rms
            )
        } else {
            format!(
                "quantisation is not reduced by oversampling: the noise ({} LSB rms) is below the ½ LSB rms that dithers it",
                a.noise_lsb_rms
            )
        });
        assumptions.push(format!(
            "reference drift counted from {t_cal} °C; the level shift is a voltage of its own, which a reference \
             error misreads in full"
        ));
        Ok(Budget {
            generator: format!("logtrim {} budget", env!("CARGO_PKG_VERSION")),
            spec: self.clone(),
            lsb_v: self.lsb_v(),
            slope_drift_per_k: self.slope_drift_per_k(),
            min_slope_lsb_per_np: 1.0 / dxdc,
            max_dx_dcode_np_per_lsb: dxdc,
            max_dx_dt_np_per_k: dxdt,
            contributions,
            rss: Size::of_np(rss),
            worst_case: Size::of_np(worst),
            removed_by_calibration: removed,
            assumptions,
        })
    }
}

impl Budget {
    /// The budget as a table for the terminal.
    pub fn render_table(&self) -> String {
        self.render_table_in(None)
    }

    /// [`render_table`](Self::render_table) with one more column: every size in the unit the product speaks
    /// (a magnitude: mAU of an error of +e Np and of −e Np are the same size).
    pub fn render_table_in(&self, unit: Option<crate::error_scale::ErrorScale>) -> String {
        use std::fmt::Write;
        let extra_head = unit.map_or_else(String::new, |u| format!(" {:>13}", format!("[{}]", u.label())));
        let extra = |np: f64| unit.map_or_else(String::new, |u| format!(" {:>13.3e}", u.of_np(np).abs()));
        let s_ = &self.spec;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "error budget in x = ln(I_sig/I_ref): {}-bit ADC, Vref {} V (1 LSB = {:.4} µV), slope {} V/decade at {} °C, \
             {} … {} °C, ratios {:e} … {:e}",
            s_.adc.bits,
            s_.adc.vref_v,
            self.lsb_v * 1e6,
            s_.front_end.slope_v_per_decade,
            s_.front_end.slope_at_c,
            s_.temperature.min_c,
            s_.temperature.max_c,
            s_.front_end.ratio_min,
            s_.front_end.ratio_max
        );
        let _ = writeln!(
            s,
            "  smallest slope {:.1} LSB/Np; largest ∂x/∂T at a fixed code {:.3e} Np/K\n",
            self.min_slope_lsb_per_np, self.max_dx_dt_np_per_k
        );
        let head = format!(
            "{:<40} {:<5} {:>9} {:>10} {:>13} {:>13} {:>10}{extra_head}  {}",
            "contribution",
            "kind",
            "[LSB]",
            "[Np]",
            "[dB 10·log10]",
            "[dB 20·log10]",
            "[% ratio]",
            "largest at"
        );
        let _ = writeln!(s, "{head}");
        let row = |s: &mut String, name: &str, kind: &str, lsb: Option<f64>, z: &Size, at: &str| {
            let lsb = lsb.map_or_else(|| "".to_string(), |v| format!("{v:.3}"));
            let _ = writeln!(
                s,
                "{:<40} {:<5} {:>9} {:>10.3e} {:>13.3e} {:>13.3e} {:>10.4}{}  {}",
                name,
                kind,
                lsb,
                Num(z.np),
                Num(z.db_10log10),
                Num(z.db_20log10),
                Num(z.pct_of_ratio),
                extra(z.np),
                at
            );
        };
        let kind = |k: Kind| match k {
            Kind::Rms => "rms",
            Kind::Bound => "bound",
        };
        for c in &self.contributions {
            row(&mut s, &c.name, kind(c.kind), c.lsb, &c.size, &c.worst_at);
        }
        let _ = writeln!(s, "{}", "-".repeat(110 + extra_head.chars().count()));
        row(&mut s, "root-sum-square", "", None, &self.rss, "");
        row(&mut s, "worst case (linear sum)", "", None, &self.worst_case, "");
        let _ = writeln!(s, "\nremoved by calibration (not in the totals; size uncorrected):");
        for c in &self.removed_by_calibration {
            row(&mut s, &c.name, kind(c.kind), c.lsb, &c.size, &c.worst_at);
        }
        let _ = writeln!(s, "\nassumptions:");
        for a in &self.assumptions {
            let _ = writeln!(s, "  - {a}");
        }
        s
    }

    /// The budget as pretty JSON with a trailing newline.
    pub fn to_json(&self) -> String {
        crate::file_error::to_json_line(self)
    }
}

#[cfg(test)]
mod tests;
