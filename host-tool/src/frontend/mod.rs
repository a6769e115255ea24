//! The project's reference model of one log-ratio front end, in f64: the physics from the two currents to
//! the ADC code, the temperature channel, the noise, and the oracle that inverts the exact model.
//!
//! # The model
//!
//! With `T` the unit's true temperature in °C, `T_K = T + 273.15`, `V_T = k·T_K/q`, x = ln(I_sig/I_ref):
//!
//! ```text
//! I_b(T)  = I_b,25 · 2^((T − 25)/D)                         bias current, doubling every D kelvin
//! I_1     = I_ref·e^x + I_b,sig(T)                           collector current of the signal transistor
//! I_2     = I_ref     + I_b,ref(T)                           collector current of the reference transistor
//! ΔV      = n·V_T·ln(I_1/I_2) + r·(I_1 − I_2)                the pair: log ratio plus bulk resistance
//!         + ΔV_BE,25 · T_K/298.15                            pair mismatch (PTAT)
//!         + V_os,in(T) + V_os,out(T)                         op-amp offsets, V_os(T) = V_os,25 + drift·(T − 25)
//! G(T)    = 1 + (G_25 − 1)/(1 + α·(T − 25))                  output stage: R1 has tempco α (0 = uncompensated)
//! V_out   = G(T)·ΔV + V_shift
//! code    = round( 2^bits·(1 + ε)·V_out/V_ref + c_off + noise ),  clamped to 0 ..= 2^bits − 1
//! ```
//!
//! A unit that has drifted since its calibration ([`Aging`], [`FrontEnd::aging`]) has
//! `V_out = k·G(T)·ΔV + V_shift + δV`: a gain factor `k` on the output stage and an offset `δV` at its
//! output. The simulator applies it to the validation, standards and blank runs, not to the chamber run.
//!
//! The output-stage offset sits at the non-inverting input of the gain stage, so it sees the same gain
//! (the noise gain of a non-inverting stage) as the input stage's. The code is monotone increasing in x: both
//! `ln(I_1)` and `r·I_1` increase with `I_sig`.
//!
//! The temperature measurement ([`TemperatureMeasurement`]: a digital sensor, or a raw channel) turns the
//! unit's true temperature into what the firmware reads; during a chamber run the unit's temperature
//! jitters around the set-point ([`OperatingRange::setpoint_jitter_k_rms`]).
//!
//! # The oracle
//!
//! [`FrontEnd::oracle`] is the best x that an observer who knows this exact model can recover from one noisy
//! `(code, measured temperature)` pair: it undoes the deterministic part of the temperature channel, which a
//! calibration absorbs as well ([`FrontEnd::temperature_estimate_c`]: a digital sensor's offset and slope
//! error; a raw channel's element and series-resistor tolerances and its gradient, by reading the code
//! through the unit's actual parts instead of the nominal ones), then inverts the noise-free code at that
//! temperature by safeguarded Newton iteration in a bracket. What it cannot undo is the noise: the log
//! channel's, the digital sensor's noise and resolution, a raw channel's ADC noise and quantisation. Its
//! error against the truth is the irreducible error that any calibration is measured against.
//!
//! # The description of a design
//!
//! [`FrontEnd`] is the one description of a design, as JSON (`schemas/frontend.schema.json`;
//! `FrontEnd::load`, `FrontEnd::to_json`; every field is documented on its type, and unknown fields are
//! refused). `simulate` runs it, `demo` runs its
//! presets, and `budget` takes its figures from it ([`crate::budget::BudgetSpec::from_design`]).
//!
//! | key | type | what it describes |
//! |---|---|---|
//! | `name`, `description` | [`FrontEnd`] | a short name and free text |
//! | `pair` | [`PairModel`] | the matched transistor pair: ideality, I_ref, mismatch, bulk resistance |
//! | `amplifiers` | [`AmplifierModel`] | the op-amps' offsets, their drifts and the input bias currents |
//! | `output_stage` | [`OutputStage`] | gain, the compensating resistor's tempco, level shift |
//! | `adc` | [`AdcModel`] | the log channel's converter: bits, reference, gain error, offset, noise |
//! | `temperature_sensor` | [`TemperatureMeasurement`] | a digital sensor, or a raw channel (`kind`: `digital`, `raw`) |
//! | `operating` | [`OperatingRange`] | temperature and ratio ranges, the chamber's set-point jitter |
//! | `spread` (optional) | [`UnitSpread`] | unit-to-unit spread, for simulated production batches |
//! | `aging` (optional) | [`Aging`] | drift since calibration, for the field runs (standards, blank) |
//! | `chamber_faults` (optional) | [`ChamberFaults`] | glitches and unsettled set-points in the chamber run |

mod presets;
#[cfg(test)]
mod tests;

use std::path::Path;

use logtrim::physics::{thermal_voltage, ZERO_CELSIUS_K};
use logtrim::sensor::TemperatureSensor;
use logtrim::{Divider, Placement};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::{Deserialize, Serialize};

pub use presets::{preset, Preset, PRESETS};

/// 25 °C in kelvin: the reference temperature of every "at 25 °C" parameter.
pub const T25_K: f64 = 25.0 + ZERO_CELSIUS_K;

/// Lowest x the oracle searches (a ratio of about 1.8e-35): below it a code is "below the floor".
const X_SEARCH_MIN: f64 = -80.0;
/// Highest x the oracle searches.
const X_SEARCH_MAX: f64 = 60.0;

/// One front end, as a JSON-loadable description (see the module docs for the equations).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FrontEnd {
    /// A short name (a preset's name, or one of the user's choosing).
    pub name: String,
    /// Free text describing the unit.
    #[serde(default)]
    pub description: String,
    /// The matched transistor pair.
    pub pair: PairModel,
    /// The op-amps: offsets and input bias currents.
    pub amplifiers: AmplifierModel,
    /// The output stage: gain network and level shift.
    pub output_stage: OutputStage,
    /// The log channel's ADC.
    pub adc: AdcModel,
    /// How the unit's temperature is measured.
    pub temperature_sensor: TemperatureMeasurement,
    /// The ranges the unit is specified and calibrated over.
    pub operating: OperatingRange,
    /// Unit-to-unit spread of the parameters, for simulated production batches (none if absent).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub spread: Option<UnitSpread>,
    /// How the unit has drifted since its calibration (none if absent): in effect for the validation,
    /// standards and blank runs, never for the chamber run (see [`Aging`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub aging: Option<Aging>,
    /// What goes wrong in this unit's chamber run (none if absent): glitches and unsettled set-points, for
    /// testing the fit on dirty runs (see [`ChamberFaults`]). Never applied to the validation run.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub chamber_faults: Option<ChamberFaults>,
}

/// What goes wrong in a chamber run, for testing how a fit copes with dirty data. The faults are drawn from
/// a random stream of their own, so a run with faults is the clean run of the same seed with some readings
/// changed. They are applied to the chamber run only: the validation run stays the clean truth.
///
/// * **Glitches**: each reading independently, with probability `glitch_rate`, has its code moved by a size
///   drawn log-uniformly from `glitch_codes_min` to `glitch_codes_max`, up or down with equal chance (a
///   switching spike, a ratio set wrong for one reading), and clamped to the converter's range.
/// * **Unsettled set-points**: with probability `unsettled_share`, a set-point's first sweep starts before
///   the transistor pair has reached the chamber's temperature: the pair lags `unsettled_lag_k` behind (on the
///   side the chamber came from: the previous set-point, or 25 °C before the first), decaying as
///   `exp(−j/unsettled_readings)` over the sweep's j-th reading, while the temperature sensor reads the unit
///   as settled.
///
/// Clipping needs no fault of its own: a front end whose output passes the converter's full scale (raise
/// `output_stage.level_shift_v` until the top ratios do when hot) clips at the rail, as the converter does.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChamberFaults {
    /// Probability that a chamber reading is glitched (0 ..= 1).
    #[serde(default)]
    pub glitch_rate: f64,
    /// Smallest glitch, codes (> 0).
    #[serde(default = "default_glitch_min")]
    pub glitch_codes_min: f64,
    /// Largest glitch, codes (≥ the smallest).
    #[serde(default = "default_glitch_max")]
    pub glitch_codes_max: f64,
    /// The pair's temperature lag at the start of an unsettled set-point's first sweep, K (0 = settled).
    #[serde(default)]
    pub unsettled_lag_k: f64,
    /// Readings over which the lag decays by a factor e (> 0).
    #[serde(default = "default_unsettled_readings")]
    pub unsettled_readings: f64,
    /// Share of set-points that start unsettled (0 ..= 1).
    #[serde(default = "default_unsettled_share")]
    pub unsettled_share: f64,
}

fn default_glitch_min() -> f64 {
    300.0
}
fn default_glitch_max() -> f64 {
    3000.0
}
fn default_unsettled_readings() -> f64 {
    10.0
}
fn default_unsettled_share() -> f64 {
    1.0
}

impl Default for ChamberFaults {
    fn default() -> Self {
        ChamberFaults {
            glitch_rate: 0.0,
            glitch_codes_min: default_glitch_min(),
            glitch_codes_max: default_glitch_max(),
            unsettled_lag_k: 0.0,
            unsettled_readings: default_unsettled_readings(),
            unsettled_share: default_unsettled_share(),
        }
    }
}

/// Drift of a unit since it was calibrated, as seen at the output stage: its gain has changed by a factor
/// and an offset has appeared at its output (resistor and reference ageing, op-amp offset drift).
///
/// ```text
/// V_out = gain_factor · G(T)·ΔV + V_shift + output_offset_v
/// ```
///
/// In x this is close to `x' = gain_factor·x + output_offset_v/(G(T)·n·kT/q)`: a gain pivoting about
/// x = 0 and an offset that follows the slope's temperature law, which a field trim (one constant offset
/// and gain) corrects fully at the trim's temperature and mostly elsewhere.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Aging {
    /// Offset that has appeared at the output since calibration, V.
    pub output_offset_v: f64,
    /// Factor on the output stage's gain since calibration (1 = unchanged).
    pub gain_factor: f64,
}

/// The matched transistor pair.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PairModel {
    /// Ideality factor n of the emitter junctions (dimensionless, 1.000…1.01 in this connection).
    pub ideality: f64,
    /// Reference current I_ref, A.
    pub i_ref_a: f64,
    /// Pair mismatch ΔV_BE at 25 °C, V (proportional to absolute temperature; sign as it adds to ΔV).
    pub mismatch_v_25c: f64,
    /// Bulk emitter/base resistance r of each transistor, Ω (I·r adds to each V_BE).
    pub bulk_resistance_ohm: f64,
}

/// The op-amps of the log stage and the output stage.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AmplifierModel {
    /// Input-stage offset voltage at 25 °C, V (referred to ΔV).
    pub input_offset_v: f64,
    /// Input-stage offset drift, V/K.
    pub input_offset_drift_v_per_k: f64,
    /// Output-stage offset voltage at 25 °C, V (at the gain stage's non-inverting input).
    pub output_offset_v: f64,
    /// Output-stage offset drift, V/K.
    pub output_offset_drift_v_per_k: f64,
    /// Input bias current on the signal input at 25 °C, A (≥ 0: it adds to the signal current).
    pub bias_signal_a_25c: f64,
    /// Input bias current on the reference input at 25 °C, A (≥ 0: it adds to the reference current).
    #[serde(default)]
    pub bias_reference_a_25c: f64,
    /// Temperature interval over which the bias currents double, K (about 10 K for FET inputs).
    pub bias_doubling_k: f64,
}

/// The output stage: a non-inverting gain `G = 1 + R2/R1(T)` and a level shift.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OutputStage {
    /// Gain G at 25 °C (≥ 1, dimensionless).
    pub gain_25c: f64,
    /// Linear tempco α of the compensating resistor R1, 1/K (≈ +3300e-6…+3500e-6; 0 = uncompensated).
    pub r1_tempco_per_k: f64,
    /// Level shift added after the gain, V (the output at x = 0 for an ideal pair).
    pub level_shift_v: f64,
}

fn default_bits() -> u8 {
    16
}

/// The log channel's ADC.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AdcModel {
    /// Resolution, bits (1..=24, default 16).
    #[serde(default = "default_bits")]
    pub bits: u8,
    /// Reference voltage (full scale), V: one LSB is `V_ref / 2^bits`.
    pub vref_v: f64,
    /// Gain error ε, as a fraction (the transfer is multiplied by 1 + ε).
    pub gain_error: f64,
    /// Offset, codes.
    pub offset_codes: f64,
    /// Noise at the converter's input, codes rms (before rounding).
    pub noise_codes_rms: f64,
}

/// How the unit's temperature reaches the firmware.
///
/// A digital sensor reports °C ([`MeasuredTemperature::Celsius`], a `temp_c` column). A raw channel is a
/// thermistor or RTD behind a divider, read by an ADC of its own; the firmware receives its code
/// ([`MeasuredTemperature::Code`], a `temp_code` column) and linearises it with firmware-lib's
/// [`TemperatureSensor`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
#[non_exhaustive]
pub enum TemperatureMeasurement {
    /// A digital sensor that reports °C: `T_m = 25 + (T − 25)(1 + slope_error) + offset + noise`, rounded to
    /// the resolution.
    Digital {
        /// Offset of the reading, K (includes any steady gradient between the sensor and the pair).
        offset_k: f64,
        /// Slope error of the reading, as a fraction.
        #[serde(default)]
        slope_error: f64,
        /// Noise of one reading, K rms.
        noise_k_rms: f64,
        /// Resolution of the reading, K (0 = unquantised).
        #[serde(default)]
        resolution_k: f64,
    },
    /// A thermistor or RTD behind a ratiometric divider, read by its own ADC: the firmware receives the code.
    ///
    /// `sensor` is the channel as designed (nominal element, nominal series resistor, ADC, fault margins,
    /// valid range): the description the firmware is given. The unit's own parts differ from it by the
    /// deterministic errors below; the code at the pair's true temperature `T` is
    ///
    /// ```text
    /// R    = R_nominal(T + offset_k) · (1 + element_error)          the element's tolerance (R25 or R0 error)
    /// R_s  = series_ohm · (1 + series_error)                        the series resistor's tolerance
    /// code = round( divider code of R against R_s + noise ),        clamped to 0 ..= 2^bits − 1
    /// ```
    ///
    /// The divider's code is firmware-lib's forward model ([`Divider::code_f64`]), the element's curve its
    /// `resistance_f64`.
    Raw {
        /// The channel as designed, in firmware-lib's description (what the firmware linearises with).
        sensor: TemperatureSensor,
        /// The element's resistance error against its nominal curve, as a fraction, the same at every
        /// temperature (an R25 tolerance of an NTC, an R0 tolerance of an RTD; 0.01 = +1 %).
        #[serde(default)]
        element_error: f64,
        /// The series resistor's error against its nominal value, as a fraction.
        #[serde(default)]
        series_error: f64,
        /// Steady difference between the element's temperature and the pair's, K (a gradient on the board).
        #[serde(default)]
        offset_k: f64,
        /// Noise at the temperature ADC's input, codes rms (before rounding).
        noise_codes_rms: f64,
    },
}

/// A temperature as the firmware receives it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum MeasuredTemperature {
    /// A reading in °C (a digital sensor): written as a `temp_c` column.
    Celsius(f64),
    /// The raw ADC code of a temperature channel: written as a `temp_code` column.
    Code(u32),
}

impl MeasuredTemperature {
    /// The CSV column this kind of reading is written to.
    pub fn column(&self) -> &'static str {
        match self {
            MeasuredTemperature::Celsius(_) => "temp_c",
            MeasuredTemperature::Code(_) => "temp_code",
        }
    }
}

/// One noisy reading as the firmware receives it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    /// The log channel's ADC code.
    pub code: u32,
    /// The temperature channel's reading.
    pub temperature: MeasuredTemperature,
}

/// The ranges a unit is specified and calibrated over.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OperatingRange {
    /// Lowest operating (and calibration) temperature, °C.
    pub temp_min_c: f64,
    /// Highest operating temperature, °C.
    pub temp_max_c: f64,
    /// Lowest ratio I_sig/I_ref to calibrate.
    pub ratio_min: f64,
    /// Highest ratio I_sig/I_ref to calibrate.
    pub ratio_max: f64,
    /// How much the unit's own temperature wanders around a chamber set-point, K rms.
    pub setpoint_jitter_k_rms: f64,
}

/// Unit-to-unit spread (one standard deviation each) for simulated batches; a missing field means no spread.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct UnitSpread {
    /// Ideality factor n, absolute.
    pub ideality: f64,
    /// Pair mismatch at 25 °C, V.
    pub mismatch_v: f64,
    /// Bulk resistance, relative (log-normal).
    pub bulk_resistance_rel: f64,
    /// Each op-amp's offset at 25 °C, V.
    pub offset_v: f64,
    /// Each op-amp's offset drift, V/K.
    pub offset_drift_v_per_k: f64,
    /// Bias currents, relative (log-normal; the same factor for both inputs of one unit).
    pub bias_rel: f64,
    /// Gain at 25 °C, relative.
    pub gain_rel: f64,
    /// Compensating resistor's tempco, 1/K (applied only where the nominal tempco is not 0).
    pub tempco_per_k: f64,
    /// Level shift, V.
    pub level_shift_v: f64,
    /// ADC gain error, absolute fraction.
    pub adc_gain_error: f64,
    /// ADC offset, codes.
    pub adc_offset_codes: f64,
    /// Temperature sensor offset, K (for a raw channel: the gradient between its element and the pair).
    pub sensor_offset_k: f64,
    /// A raw temperature channel's element error (its R25 or R0 tolerance), absolute fraction.
    pub sensor_element_rel: f64,
}

/// Errors loading or checking a front-end description.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum FrontEndError {
    /// The file could not be read, or is not well-formed JSON of a front-end description.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
    /// A parameter is outside what the model can describe.
    #[error("{name}: {field} = {value:?} is not allowed; expected {expected}")]
    Invalid {
        /// The front end's name.
        name: String,
        /// The parameter, as its JSON path (e.g. `pair.ideality`).
        field: &'static str,
        /// The value given.
        value: f64,
        /// What the model needs.
        expected: &'static str,
    },
    /// A raw temperature channel's description is refused by firmware-lib's `validate()`.
    #[error("{name}: temperature_sensor.sensor: {error}; expected a channel description that firmware-lib accepts")]
    Sensor {
        /// The front end's name.
        name: String,
        /// firmware-lib's verdict.
        error: logtrim::Error,
    },
}

impl FrontEnd {
    /// Parses a description from JSON text and validates it; `path` only names the source in errors.
    pub fn from_json(text: &str, path: &str) -> Result<FrontEnd, FrontEndError> {
        let fe: FrontEnd = crate::file_error::parse_json(text, path)?;
        fe.validate()?;
        Ok(fe)
    }

    /// Reads and validates a description from a JSON file.
    pub fn load(path: &Path) -> Result<FrontEnd, FrontEndError> {
        FrontEnd::from_json(&crate::file_error::read_text(path)?, &path.display().to_string())
    }

    /// The description as pretty JSON (with a trailing newline).
    pub fn to_json(&self) -> String {
        crate::file_error::to_json_line(self)
    }

    /// The optional keys of a description: absent (or `null`) means none.
    pub const OPTIONAL_KEYS: [&'static str; 3] = ["spread", "aging", "chamber_faults"];

    /// [`to_json`](Self::to_json) with every key, the optional ones ([`FrontEnd::OPTIONAL_KEYS`]) as `null`
    /// where the description has none: a file to start one's own from, which names every key it may hold.
    pub fn to_json_every_key(&self) -> String {
        let mut v = serde_json::to_value(self).unwrap_or_default();
        if let Some(map) = v.as_object_mut() {
            for key in Self::OPTIONAL_KEYS {
                map.entry(key).or_insert(serde_json::Value::Null);
            }
        }
        crate::file_error::to_json_line(&v)
    }

    /// Checks every parameter against what the model can describe, over the operating range widened by
    /// 50 K on either side (so that chamber jitter and extrapolation stay inside the model).
    pub fn validate(&self) -> Result<(), FrontEndError> {
        let bad = |field: &'static str, value: f64, expected: &'static str| {
            Err(FrontEndError::Invalid { name: self.name.clone(), field, value, expected })
        };
        let finite = |v: f64| v.is_finite();
        let p = &self.pair;
        if !(finite(p.ideality) && (0.9..=2.0).contains(&p.ideality)) {
            return bad("pair.ideality", p.ideality, "a finite ideality factor in 0.9..=2");
        }
        if !(finite(p.i_ref_a) && p.i_ref_a > 0.0) {
            return bad("pair.i_ref_a", p.i_ref_a, "a positive current in A");
        }
        if !(finite(p.mismatch_v_25c) && p.mismatch_v_25c.abs() < 0.1) {
            return bad("pair.mismatch_v_25c", p.mismatch_v_25c, "a finite voltage below 0.1 V in magnitude");
        }
        if !(finite(p.bulk_resistance_ohm) && p.bulk_resistance_ohm >= 0.0) {
            return bad("pair.bulk_resistance_ohm", p.bulk_resistance_ohm, "a resistance ≥ 0 Ω");
        }
        let a = &self.amplifiers;
        for (field, v) in [
            ("amplifiers.input_offset_v", a.input_offset_v),
            ("amplifiers.input_offset_drift_v_per_k", a.input_offset_drift_v_per_k),
            ("amplifiers.output_offset_v", a.output_offset_v),
            ("amplifiers.output_offset_drift_v_per_k", a.output_offset_drift_v_per_k),
        ] {
            if !(finite(v) && v.abs() < 0.1) {
                return bad(field, v, "a finite value below 0.1 in magnitude");
            }
        }
        for (field, v) in [
            ("amplifiers.bias_signal_a_25c", a.bias_signal_a_25c),
            ("amplifiers.bias_reference_a_25c", a.bias_reference_a_25c),
        ] {
            if !(finite(v) && v >= 0.0) {
                return bad(field, v, "a bias current ≥ 0 A (it adds to the collector current)");
            }
        }
        if !(finite(a.bias_doubling_k) && a.bias_doubling_k >= 1.0) {
            return bad("amplifiers.bias_doubling_k", a.bias_doubling_k, "a doubling interval ≥ 1 K");
        }
        let g = &self.output_stage;
        if !(finite(g.gain_25c) && (1.0..=1e4).contains(&g.gain_25c)) {
            return bad("output_stage.gain_25c", g.gain_25c, "a gain in 1..=10000 (non-inverting stage)");
        }
        if !(finite(g.r1_tempco_per_k) && g.r1_tempco_per_k.abs() < 0.02) {
            return bad(
                "output_stage.r1_tempco_per_k",
                g.r1_tempco_per_k,
                "a tempco below 0.02 /K in magnitude",
            );
        }
        if !finite(g.level_shift_v) {
            return bad("output_stage.level_shift_v", g.level_shift_v, "a finite voltage");
        }
        let d = &self.adc;
        if !(1..=24).contains(&d.bits) {
            return bad("adc.bits", f64::from(d.bits), "1..=24 bits");
        }
        if !(finite(d.vref_v) && d.vref_v > 0.0) {
            return bad("adc.vref_v", d.vref_v, "a positive reference voltage");
        }
        if !(finite(d.gain_error) && d.gain_error.abs() < 0.5) {
            return bad("adc.gain_error", d.gain_error, "a fraction below 0.5 in magnitude");
        }
        if !finite(d.offset_codes) {
            return bad("adc.offset_codes", d.offset_codes, "a finite offset in codes");
        }
        if !(finite(d.noise_codes_rms) && d.noise_codes_rms >= 0.0) {
            return bad("adc.noise_codes_rms", d.noise_codes_rms, "a noise ≥ 0 codes rms");
        }
        match self.temperature_sensor {
            TemperatureMeasurement::Digital { offset_k, slope_error, noise_k_rms, resolution_k } => {
                if !(finite(offset_k) && offset_k.abs() < 50.0) {
                    return bad("temperature_sensor.offset_k", offset_k, "a finite offset below 50 K");
                }
                if !(finite(slope_error) && slope_error.abs() < 0.5) {
                    return bad("temperature_sensor.slope_error", slope_error, "a fraction below 0.5");
                }
                if !(finite(noise_k_rms) && noise_k_rms >= 0.0) {
                    return bad("temperature_sensor.noise_k_rms", noise_k_rms, "a noise ≥ 0 K rms");
                }
                if !(finite(resolution_k) && resolution_k >= 0.0) {
                    return bad("temperature_sensor.resolution_k", resolution_k, "a resolution ≥ 0 K");
                }
            }
            TemperatureMeasurement::Raw {
                sensor,
                element_error,
                series_error,
                offset_k,
                noise_codes_rms,
            } => {
                sensor
                    .validate()
                    .map_err(|error| FrontEndError::Sensor { name: self.name.clone(), error })?;
                if !(finite(element_error) && element_error.abs() < 0.5) {
                    return bad("temperature_sensor.element_error", element_error, "a fraction below 0.5");
                }
                if !(finite(series_error) && series_error.abs() < 0.5) {
                    return bad("temperature_sensor.series_error", series_error, "a fraction below 0.5");
                }
                if !(finite(offset_k) && offset_k.abs() < 50.0) {
                    return bad("temperature_sensor.offset_k", offset_k, "a finite offset below 50 K");
                }
                if !(finite(noise_codes_rms) && noise_codes_rms >= 0.0) {
                    return bad(
                        "temperature_sensor.noise_codes_rms",
                        noise_codes_rms,
                        "a noise ≥ 0 codes rms",
                    );
                }
            }
        }
        let o = &self.operating;
        if !(finite(o.temp_min_c) && o.temp_min_c > -200.0) {
            return bad("operating.temp_min_c", o.temp_min_c, "a temperature above −200 °C");
        }
        if !(finite(o.temp_max_c) && o.temp_max_c > o.temp_min_c && o.temp_max_c < 300.0) {
            return bad(
                "operating.temp_max_c",
                o.temp_max_c,
                "a temperature above temp_min_c and below 300 °C",
            );
        }
        if !(finite(o.ratio_min) && o.ratio_min > 0.0) {
            return bad("operating.ratio_min", o.ratio_min, "a positive finite ratio");
        }
        if !(finite(o.ratio_max) && o.ratio_max > o.ratio_min) {
            return bad("operating.ratio_max", o.ratio_max, "a finite ratio above ratio_min");
        }
        if !(finite(o.setpoint_jitter_k_rms) && o.setpoint_jitter_k_rms >= 0.0) {
            return bad("operating.setpoint_jitter_k_rms", o.setpoint_jitter_k_rms, "a jitter ≥ 0 K rms");
        }
        if let TemperatureMeasurement::Raw { sensor, .. } = self.temperature_sensor {
            // The firmware must be able to read the unit over its whole operating range …
            if f64::from(sensor.min_c) > o.temp_min_c {
                return bad(
                    "temperature_sensor.sensor.min_c",
                    f64::from(sensor.min_c),
                    "a valid range that starts at or below operating.temp_min_c",
                );
            }
            if f64::from(sensor.max_c) < o.temp_max_c {
                return bad(
                    "temperature_sensor.sensor.max_c",
                    f64::from(sensor.max_c),
                    "a valid range that ends at or above operating.temp_max_c",
                );
            }
            // … and the element's model must give a code wherever the simulation may take the unit.
            for i in 0..=20 {
                let t = o.temp_min_c - 50.0 + (o.temp_max_c - o.temp_min_c + 100.0) * f64::from(i) / 20.0;
                if self.raw_code_exact(t).is_none() {
                    return bad(
                        "temperature_sensor.sensor.element",
                        t,
                        "an element whose curve covers the operating range ± 50 K",
                    );
                }
            }
        }
        for t in [o.temp_min_c - 50.0, o.temp_max_c + 50.0] {
            let den = 1.0 + g.r1_tempco_per_k * (t - 25.0);
            if den.is_nan() || den <= 0.05 {
                return bad(
                    "output_stage.r1_tempco_per_k",
                    g.r1_tempco_per_k,
                    "a tempco that keeps R1 positive over the operating range ± 50 K",
                );
            }
        }
        if let Some(a) = &self.aging {
            if !(finite(a.output_offset_v) && a.output_offset_v.abs() < 1.0) {
                return bad(
                    "aging.output_offset_v",
                    a.output_offset_v,
                    "a finite offset below 1 V in magnitude",
                );
            }
            if !(finite(a.gain_factor) && (0.5..=2.0).contains(&a.gain_factor)) {
                return bad("aging.gain_factor", a.gain_factor, "a gain factor in 0.5..=2");
            }
        }
        if let Some(f) = &self.chamber_faults {
            if !(finite(f.glitch_rate) && (0.0..=1.0).contains(&f.glitch_rate)) {
                return bad("chamber_faults.glitch_rate", f.glitch_rate, "a probability in 0..=1");
            }
            if !(finite(f.glitch_codes_min) && f.glitch_codes_min > 0.0) {
                return bad(
                    "chamber_faults.glitch_codes_min",
                    f.glitch_codes_min,
                    "a positive size in codes",
                );
            }
            if !(finite(f.glitch_codes_max) && f.glitch_codes_max >= f.glitch_codes_min) {
                return bad(
                    "chamber_faults.glitch_codes_max",
                    f.glitch_codes_max,
                    "a finite size at least glitch_codes_min",
                );
            }
            if !(finite(f.unsettled_lag_k) && f.unsettled_lag_k.abs() <= 20.0) {
                return bad("chamber_faults.unsettled_lag_k", f.unsettled_lag_k, "a lag within ±20 K");
            }
            if !(finite(f.unsettled_readings) && f.unsettled_readings > 0.0) {
                return bad(
                    "chamber_faults.unsettled_readings",
                    f.unsettled_readings,
                    "a positive number of readings",
                );
            }
            if !(finite(f.unsettled_share) && (0.0..=1.0).contains(&f.unsettled_share)) {
                return bad("chamber_faults.unsettled_share", f.unsettled_share, "a share in 0..=1");
            }
        }
        if let Some(s) = &self.spread {
            for (field, v) in [
                ("spread.ideality", s.ideality),
                ("spread.mismatch_v", s.mismatch_v),
                ("spread.bulk_resistance_rel", s.bulk_resistance_rel),
                ("spread.offset_v", s.offset_v),
                ("spread.offset_drift_v_per_k", s.offset_drift_v_per_k),
                ("spread.bias_rel", s.bias_rel),
                ("spread.gain_rel", s.gain_rel),
                ("spread.tempco_per_k", s.tempco_per_k),
                ("spread.level_shift_v", s.level_shift_v),
                ("spread.adc_gain_error", s.adc_gain_error),
                ("spread.adc_offset_codes", s.adc_offset_codes),
                ("spread.sensor_offset_k", s.sensor_offset_k),
                ("spread.sensor_element_rel", s.sensor_element_rel),
            ] {
                if !(finite(v) && v >= 0.0) {
                    return bad(field, v, "a standard deviation ≥ 0");
                }
            }
        }
        Ok(())
    }

    /// The largest code of the log channel's ADC.
    pub fn max_code(&self) -> u32 {
        (1u32 << self.adc.bits.clamp(1, 24)) - 1
    }

    /// Volts per code of the log channel (the LSB), ignoring the gain error.
    pub fn lsb_v(&self) -> f64 {
        self.adc.vref_v / f64::from(1u32 << self.adc.bits.clamp(1, 24))
    }

    /// A bias current at `t_c` from its value at 25 °C.
    pub fn bias_current_a(&self, at_25c: f64, t_c: f64) -> f64 {
        at_25c * libm::exp2((t_c - 25.0) / self.amplifiers.bias_doubling_k)
    }

    /// β(T) = I_b,sig(T)/I_ref: the bias current on the signal input relative to the reference current.
    pub fn beta(&self, t_c: f64) -> f64 {
        self.bias_current_a(self.amplifiers.bias_signal_a_25c, t_c) / self.pair.i_ref_a
    }

    /// The gain G(T) of the output stage.
    pub fn gain(&self, t_c: f64) -> f64 {
        let g = &self.output_stage;
        1.0 + (g.gain_25c - 1.0) / (1.0 + g.r1_tempco_per_k * (t_c - 25.0))
    }

    /// The ideal slope n·(kT/q)·G(T) of the output, V per neper (no bends).
    pub fn ideal_slope_v_per_neper(&self, t_c: f64) -> f64 {
        self.pair.ideality * thermal_voltage(t_c + ZERO_CELSIUS_K) * self.gain(t_c)
    }

    /// The pair's output ΔV in volts at x and the unit's true temperature (before the gain stage).
    pub fn pair_voltage(&self, x: f64, t_c: f64) -> f64 {
        let t_k = t_c + ZERO_CELSIUS_K;
        let p = &self.pair;
        let a = &self.amplifiers;
        let vt = thermal_voltage(t_k);
        let beta = self.beta(t_c);
        let i_sig = p.i_ref_a * libm::exp(x);
        let i1 = i_sig + p.i_ref_a * beta;
        let i2 = p.i_ref_a + self.bias_current_a(a.bias_reference_a_25c, t_c);
        // ln(I_1/I_2) = ln(e^x + β) + ln(I_ref/I_2), with ln(e^x + β) evaluated without underflow.
        let ln_i1_over_iref = ln_exp_plus(x, beta);
        let log_term = p.ideality * vt * (ln_i1_over_iref + libm::log(p.i_ref_a / i2));
        let bulk = p.bulk_resistance_ohm * (i1 - i2);
        let mismatch = p.mismatch_v_25c * t_k / T25_K;
        let dt = t_c - 25.0;
        let offsets = a.input_offset_v
            + a.input_offset_drift_v_per_k * dt
            + a.output_offset_v
            + a.output_offset_drift_v_per_k * dt;
        log_term + bulk + mismatch + offsets
    }

    /// The output voltage V_out at x and the unit's true temperature, V.
    pub fn output_voltage(&self, x: f64, t_c: f64) -> f64 {
        let (k, dv) = self.aging.map_or((1.0, 0.0), |a| (a.gain_factor, a.output_offset_v));
        k * self.gain(t_c) * self.pair_voltage(x, t_c) + self.output_stage.level_shift_v + dv
    }

    /// The unit as it was calibrated: this description without its [`Aging`].
    pub fn as_calibrated(&self) -> FrontEnd {
        FrontEnd { aging: None, ..self.clone() }
    }

    /// This unit after ageing: the description with `aging` in effect.
    pub fn aged(&self, aging: Aging) -> FrontEnd {
        FrontEnd { aging: Some(aging), ..self.clone() }
    }

    /// Codes per volt of the converter, including its gain error.
    fn codes_per_volt(&self) -> f64 {
        (1.0 + self.adc.gain_error) / self.lsb_v()
    }

    /// The exact, noise-free, unrounded code at x and the unit's true temperature.
    pub fn code_exact(&self, x: f64, t_c: f64) -> f64 {
        self.output_voltage(x, t_c) * self.codes_per_volt() + self.adc.offset_codes
    }

    /// ∂code/∂x of [`FrontEnd::code_exact`], codes per neper (always > 0).
    pub fn code_slope(&self, x: f64, t_c: f64) -> f64 {
        let p = &self.pair;
        let vt = thermal_voltage(t_c + ZERO_CELSIUS_K);
        let ex = libm::exp(x);
        let beta = self.beta(t_c);
        // d ln(e^x + β)/dx = e^x/(e^x + β) = 1/(1 + β e^−x), written to stay finite at both ends.
        let frac = 1.0 / (1.0 + beta * libm::exp(-x));
        let dv = p.ideality * vt * frac + p.bulk_resistance_ohm * p.i_ref_a * ex;
        let k = self.aging.map_or(1.0, |a| a.gain_factor);
        k * self.gain(t_c) * dv * self.codes_per_volt()
    }

    /// The local sensitivity ∂code/∂x relative to the ideal slope (1 for an ideal front end; it collapses
    /// where the bias current swamps the signal and exceeds 1 where the bulk resistance bends the high end).
    /// An aged unit's gain factor is part of its ideal slope here: ageing does not bend the curve.
    pub fn sensitivity(&self, x: f64, t_c: f64) -> f64 {
        let k = self.aging.map_or(1.0, |a| a.gain_factor);
        self.code_slope(x, t_c) / (k * self.ideal_slope_v_per_neper(t_c) * self.codes_per_volt())
    }

    /// The noise-free code: [`FrontEnd::code_exact`] rounded and clamped to the converter's range.
    pub fn code_noise_free(&self, x: f64, t_c: f64) -> u32 {
        self.quantise(self.code_exact(x, t_c))
    }

    /// Rounds a fractional code to an integer and clamps it to the rails, as a converter does.
    pub fn quantise(&self, code: f64) -> u32 {
        let max = f64::from(self.max_code());
        let c = libm::round(code);
        if c.is_nan() || c <= 0.0 {
            0
        } else if c >= max {
            self.max_code()
        } else {
            c as u32
        }
    }

    /// A noisy ADC code at x and the unit's true temperature.
    pub fn sample_code<R: Rng + ?Sized>(&self, x: f64, t_c: f64, rng: &mut R) -> u32 {
        let n: f64 = StandardNormal.sample(rng);
        self.quantise(self.code_exact(x, t_c) + self.adc.noise_codes_rms * n)
    }

    /// One noisy reading at x and the unit's true temperature: the ADC code, then the temperature reading
    /// (drawn in that order).
    pub fn sample<R: Rng + ?Sized>(&self, x: f64, t_c: f64, rng: &mut R) -> Sample {
        let code = self.sample_code(x, t_c, rng);
        Sample { code, temperature: self.measure_temperature(t_c, rng) }
    }

    /// A noisy temperature reading of a unit whose true temperature is `t_c`.
    pub fn measure_temperature<R: Rng + ?Sized>(&self, t_c: f64, rng: &mut R) -> MeasuredTemperature {
        match self.temperature_sensor {
            TemperatureMeasurement::Digital { offset_k, slope_error, noise_k_rms, resolution_k } => {
                let n: f64 = StandardNormal.sample(rng);
                let t = 25.0 + (t_c - 25.0) * (1.0 + slope_error) + offset_k + noise_k_rms * n;
                let t = if resolution_k > 0.0 { libm::round(t / resolution_k) * resolution_k } else { t };
                MeasuredTemperature::Celsius(t)
            }
            TemperatureMeasurement::Raw { sensor, noise_codes_rms, .. } => {
                let n: f64 = StandardNormal.sample(rng);
                let max = sensor.divider.max_code().unwrap_or(0);
                // A validated front end gives a code over its operating range ± 50 K; beyond the element's
                // model the sensor reads as open (the rail on its open side).
                let exact = self.raw_code_exact(t_c).unwrap_or(match sensor.divider.placement {
                    Placement::LowSide => f64::from(max),
                    Placement::HighSide => 0.0,
                });
                let c = libm::round(exact + noise_codes_rms * n);
                let code = if c.is_nan() || c <= 0.0 {
                    0
                } else if c >= f64::from(max) {
                    max
                } else {
                    c as u32
                };
                MeasuredTemperature::Code(code)
            }
        }
    }

    /// A raw channel's divider as the unit is built: the series resistor with its error, and no fault
    /// margins (those are the firmware's policy, not physics). `None` for a digital channel.
    fn raw_divider(&self) -> Option<Divider> {
        let TemperatureMeasurement::Raw { sensor, series_error, .. } = self.temperature_sensor else {
            return None;
        };
        let d = sensor.divider;
        let series_ohm = (f64::from(d.series_ohm) * (1.0 + series_error)) as f32;
        Some(Divider { series_ohm, open_margin: 0, short_margin: 0, ..d })
    }

    /// The exact (fractional, noise-free) code of a raw temperature channel when the pair is at `t_c`, from
    /// the unit's actual parts. `None` for a digital channel, or where the element's model gives no
    /// resistance.
    pub fn raw_code_exact(&self, t_c: f64) -> Option<f64> {
        let TemperatureMeasurement::Raw { sensor, element_error, offset_k, .. } = self.temperature_sensor
        else {
            return None;
        };
        let ohm = sensor.element.resistance_f64(t_c + offset_k).ok()? * (1.0 + element_error);
        self.raw_divider()?.code_f64(ohm).ok()
    }

    /// The temperature channel's description as the firmware is given it: a raw channel's nominal
    /// [`TemperatureSensor`]; `None` for a digital sensor, whose readings are already in °C.
    pub fn firmware_sensor(&self) -> Option<TemperatureSensor> {
        match self.temperature_sensor {
            TemperatureMeasurement::Raw { sensor, .. } => Some(sensor),
            TemperatureMeasurement::Digital { .. } => None,
        }
    }

    /// The temperature the firmware computes from a reading: a digital reading as it is, a raw code through
    /// the channel's nominal description in f32 (as on the MCU). Readings of the other kind are refused
    /// with [`logtrim::Error::NotCalibrated`] (no description converts them).
    pub fn firmware_celsius(&self, reading: MeasuredTemperature) -> Result<f64, logtrim::Error> {
        match (self.temperature_sensor, reading) {
            (TemperatureMeasurement::Digital { .. }, MeasuredTemperature::Celsius(t)) => Ok(t),
            (TemperatureMeasurement::Raw { sensor, .. }, MeasuredTemperature::Code(c)) => {
                sensor.celsius(c).map(f64::from)
            }
            _ => Err(logtrim::Error::NotCalibrated),
        }
    }

    /// The unit's temperature as best known from a reading: the reading with the channel's deterministic
    /// errors undone. `None` if the reading is of a kind this channel does not give, or gives no temperature.
    ///
    /// * Digital: the offset and slope error are undone, `25 + (T_m − 25 − offset)/(1 + slope_error)`.
    /// * Raw: the code is read through the unit's *actual* parts instead of the nominal ones — the divider
    ///   with the series resistor's error (firmware-lib's `Divider::resistance_f64`, no fault margins), the
    ///   resistance divided by `1 + element_error`, the nominal curve inverted (`celsius_f64`), the gradient
    ///   `offset_k` taken off. Left in are the channel's ADC noise and quantisation. The firmware's valid
    ///   range is not applied (the oracle knows the physics, not the firmware's policy); a code at either
    ///   rail (0 or `2^bits − 1`, where the true value lies anywhere beyond) gives `None`.
    pub fn temperature_estimate_c(&self, reading: MeasuredTemperature) -> Option<f64> {
        match (self.temperature_sensor, reading) {
            (
                TemperatureMeasurement::Digital { offset_k, slope_error, .. },
                MeasuredTemperature::Celsius(t),
            ) => Some(25.0 + (t - 25.0 - offset_k) / (1.0 + slope_error)),
            (
                TemperatureMeasurement::Raw { sensor, element_error, offset_k, .. },
                MeasuredTemperature::Code(c),
            ) => {
                if c == 0 || c >= sensor.divider.max_code().ok()? {
                    return None;
                }
                let ohm = self.raw_divider()?.resistance_f64(c).ok()? / (1.0 + element_error);
                Some(sensor.element.celsius_f64(ohm).ok()? - offset_k)
            }
            (TemperatureMeasurement::Digital { .. }, MeasuredTemperature::Code(_))
            | (TemperatureMeasurement::Raw { .. }, MeasuredTemperature::Celsius(_)) => None,
        }
    }

    /// The oracle: the x that the exact model gives for one noisy reading (see the module docs).
    ///
    /// `None` where no x can be recovered: the code is at a rail (the converter saturated, the true value
    /// lies anywhere beyond), the code lies below the floor that the bias current sets at the low end, or
    /// the temperature reading is of a kind this front end's channel does not give.
    pub fn oracle(&self, code: u32, temperature: MeasuredTemperature) -> Option<f64> {
        if code == 0 || code >= self.max_code() {
            return None;
        }
        let t = self.temperature_estimate_c(temperature)?;
        self.invert_code(f64::from(code), t)
    }

    /// Inverts [`FrontEnd::code_exact`] at the true temperature `t_c`: the x whose exact code is `code`.
    ///
    /// The code is monotone increasing in x; the root is bracketed, then found by Newton steps that fall
    /// back to bisection whenever a step would leave the bracket (the low-end bend flattens the curve).
    /// `None` if the code lies outside what any x in −80…60 produces, or an input is not finite.
    pub fn invert_code(&self, code: f64, t_c: f64) -> Option<f64> {
        if !(code.is_finite() && t_c.is_finite()) {
            return None;
        }
        let f = |x: f64| self.code_exact(x, t_c) - code;
        // Bracket, starting from the operating range and widening geometrically.
        let (mut lo, mut hi) =
            (libm::log(self.operating.ratio_min) - 2.0, libm::log(self.operating.ratio_max) + 2.0);
        let mut step = 4.0;
        while f(lo) > 0.0 {
            if lo <= X_SEARCH_MIN {
                return None;
            }
            lo = (lo - step).max(X_SEARCH_MIN);
            step *= 2.0;
        }
        step = 4.0;
        while f(hi) < 0.0 {
            if hi >= X_SEARCH_MAX {
                return None;
            }
            hi = (hi + step).min(X_SEARCH_MAX);
            step *= 2.0;
        }
        // Safeguarded Newton from the linear interpolate.
        let (flo, fhi) = (f(lo), f(hi));
        let mut x = if fhi > flo { lo - flo * (hi - lo) / (fhi - flo) } else { 0.5 * (lo + hi) };
        for _ in 0..200 {
            let fx = f(x);
            if fx == 0.0 {
                return Some(x);
            }
            if fx < 0.0 {
                lo = x;
            } else {
                hi = x;
            }
            let d = self.code_slope(x, t_c);
            let newton = x - fx / d;
            let next =
                if newton > lo && newton < hi && newton.is_finite() { newton } else { 0.5 * (lo + hi) };
            if (next - x).abs() <= 1e-13 * (1.0 + x.abs()) || hi - lo <= 1e-13 * (1.0 + x.abs()) {
                return Some(next);
            }
            x = next;
        }
        Some(x)
    }

    /// Draws one unit of a production batch from this description's [`UnitSpread`] (the nominal unit if
    /// there is none). The drawn unit carries no spread of its own and is named `"<name>/<serial>"`.
    pub fn draw_unit<R: Rng + ?Sized>(&self, serial: &str, rng: &mut R) -> Result<FrontEnd, FrontEndError> {
        let mut u = self.clone();
        u.name = format!("{}/{serial}", self.name);
        u.spread = None;
        let Some(s) = self.spread else {
            return Ok(u);
        };
        let mut n = || -> f64 { StandardNormal.sample(rng) };
        u.pair.ideality += s.ideality * n();
        u.pair.mismatch_v_25c += s.mismatch_v * n();
        u.pair.bulk_resistance_ohm *= libm::exp(s.bulk_resistance_rel * n());
        u.amplifiers.input_offset_v += s.offset_v * n();
        u.amplifiers.output_offset_v += s.offset_v * n();
        u.amplifiers.input_offset_drift_v_per_k += s.offset_drift_v_per_k * n();
        u.amplifiers.output_offset_drift_v_per_k += s.offset_drift_v_per_k * n();
        let bias_factor = libm::exp(s.bias_rel * n());
        u.amplifiers.bias_signal_a_25c *= bias_factor;
        u.amplifiers.bias_reference_a_25c *= bias_factor;
        u.output_stage.gain_25c = 1.0 + (u.output_stage.gain_25c - 1.0) * (1.0 + s.gain_rel * n());
        let dt = n();
        if u.output_stage.r1_tempco_per_k != 0.0 {
            u.output_stage.r1_tempco_per_k += s.tempco_per_k * dt;
        }
        u.output_stage.level_shift_v += s.level_shift_v * n();
        u.adc.gain_error += s.adc_gain_error * n();
        u.adc.offset_codes += s.adc_offset_codes * n();
        let so = n();
        match &mut u.temperature_sensor {
            TemperatureMeasurement::Digital { offset_k, .. } => *offset_k += s.sensor_offset_k * so,
            TemperatureMeasurement::Raw { offset_k, element_error, .. } => {
                *offset_k += s.sensor_offset_k * so;
                // Drawn after every other parameter, so that digital units draw exactly as before.
                *element_error += s.sensor_element_rel * n();
            }
        }
        u.validate()?;
        Ok(u)
    }
}

/// ln(e^x + β) for β ≥ 0, without overflow or underflow for any finite x.
fn ln_exp_plus(x: f64, beta: f64) -> f64 {
    if beta <= 0.0 {
        return x;
    }
    let lb = libm::log(beta);
    if x >= lb {
        x + libm::log1p(libm::exp(lb - x))
    } else {
        lb + libm::log1p(libm::exp(x - lb))
    }
}
