//! From a part's data sheet to a temperature channel's settings: thermistor coefficients from
//! (temperature, resistance) points, resistance–temperature tables (with the divider's code at each
//! temperature), and the settings file — firmware-lib's [`TemperatureSensor`] as JSON — that
//! `logtrim fit --sensor` stores in a calibration.
//!
//! The sensor math is firmware-lib's ([`Beta::from_points`], [`SteinhartHart::from_points`], the elements'
//! `resistance_f64`/`celsius`, [`Divider::code_f64`], [`TemperatureSensor::validate`]). This module checks
//! the inputs first so that a mistake is named precisely — which option, which value, what was expected —
//! then calls it and lays out the results.
//!
//! Errors name options as the `logtrim sensor` verb spells them (`--point`, `--series`, …): the functions
//! here take exactly what those options give.

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

use std::fmt::{self, Write as _};
use std::io::Write as _;
use std::path::Path;

use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::thermistor::{Beta, FitError, SteinhartHart};
use logtrim::{Divider, Placement, Rtd};

use crate::file_error::{parse_json, read_text, to_json_line, FileError};
use crate::output::AtomicFile;

pub use logtrim::thermistor::CurvePoint;

/// Absolute zero in °C.
const ABSOLUTE_ZERO_C: f64 = -logtrim::physics::ZERO_CELSIUS_K;

/// Most rows a table may have (a guard against a typo'd step).
pub const MAX_TABLE_ROWS: usize = 100_000;

/// A value on the command line that is not of the expected form (used by the verb's option parsers).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{found:?} is not {expected}")]
pub struct ParseError {
    /// The text given.
    pub found: String,
    /// What was expected.
    pub expected: &'static str,
}

/// Why a sensor description, table or settings file could not be made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SensorToolError {
    /// One value is outside what it may be.
    #[error("{option} {value}: {problem}; expected {expected}")]
    Value {
        /// The option, as the verb spells it.
        option: &'static str,
        /// The value given, as text.
        value: String,
        /// What is wrong with it.
        problem: String,
        /// What was expected.
        expected: &'static str,
    },
    /// The wrong number of curve points for the model.
    #[error("{option}: {count} point(s) given; expected {expected}")]
    PointCount {
        /// The option.
        option: &'static str,
        /// Points given.
        count: usize,
        /// How many the model takes.
        expected: &'static str,
    },
    /// Two points share a temperature.
    #[error("{option} {first} and {option} {second}: both at {celsius} °C; expected points at distinct temperatures")]
    SameTemperature {
        /// The option.
        option: &'static str,
        /// The first point, as `T:R`.
        first: String,
        /// The second point, as `T:R`.
        second: String,
        /// The shared temperature, °C.
        celsius: f64,
    },
    /// Two points share a resistance.
    #[error("{option} {first} and {option} {second}: both {ohm} Ω; expected distinct resistances (an NTC's resistance changes with temperature)")]
    SameResistance {
        /// The option.
        option: &'static str,
        /// The first point.
        first: String,
        /// The second point.
        second: String,
        /// The shared resistance, Ω.
        ohm: f64,
    },
    /// The resistance does not fall as the temperature rises.
    #[error("{option} {colder} and {option} {warmer}: the resistance rises with temperature; expected an NTC thermistor's curve, whose resistance falls as the temperature rises (for a platinum RTD use --rtd)")]
    NotNtc {
        /// The colder point.
        option: &'static str,
        /// The colder point.
        colder: String,
        /// The warmer point.
        warmer: String,
    },
    /// The Steinhart–Hart curve through three points turns back between them.
    #[error("{option} {points}: no Steinhart–Hart curve through these points is monotone between {from_c} and {to_c} °C (β between neighbouring points: {betas}); expected three points of one NTC curve — check them for a typo")]
    NotMonotone {
        /// The option.
        option: &'static str,
        /// The points, as given.
        points: String,
        /// Coldest point, °C.
        from_c: f64,
        /// Warmest point, °C.
        to_c: f64,
        /// The secant β of each neighbouring pair, e.g. `3578 K, 406 K`.
        betas: String,
    },
    /// The element's curve is not monotone, or not defined, over a range of temperatures.
    #[error("{options} {from_c} … {to_c} °C: {problem}; expected a range over which the element's curve is defined and monotone")]
    CurveOverRange {
        /// The options that set the range (e.g. `--min/--max`).
        options: &'static str,
        /// Start of the range, °C.
        from_c: f64,
        /// End of the range, °C.
        to_c: f64,
        /// What goes wrong, and where.
        problem: String,
    },
    /// firmware-lib's fit refused the points for a reason the checks above do not name.
    #[error("{option} {points}: {error}")]
    Fit {
        /// The option.
        option: &'static str,
        /// The points, as given.
        points: String,
        /// firmware-lib's verdict.
        error: FitError,
    },
    /// An end of the valid range reads as a fault or beyond the converter.
    #[error("{option} {celsius}: the channel reads code {code} there, which the firmware takes as {fault}; expected a valid range whose ends read as temperatures ({hint})")]
    FaultAtRangeEnd {
        /// `--min` or `--max`.
        option: &'static str,
        /// The temperature, °C.
        celsius: f64,
        /// The code there (rounded).
        code: u64,
        /// What the firmware makes of it.
        fault: String,
        /// What to change.
        hint: &'static str,
    },
    /// The file could not be read, or is not well-formed JSON of a temperature sensor.
    #[error(transparent)]
    File(#[from] crate::file_error::FileError),
    /// firmware-lib's `validate()` refused the description.
    #[error("{what}: {error}; expected a description that firmware-lib's validate() accepts")]
    Rejected {
        /// What was refused (a file, or the options).
        what: String,
        /// firmware-lib's verdict.
        error: logtrim::Error,
    },
}

fn bad<T>(
    option: &'static str,
    value: impl fmt::Display,
    problem: impl Into<String>,
    expected: &'static str,
) -> Result<T, SensorToolError> {
    Err(SensorToolError::Value { option, value: value.to_string(), problem: problem.into(), expected })
}

// ---------------------------------------------------------------------------------------------------------
// Parsing option values

/// A number, NaN and infinities refused.
fn number(s: &str, expected: &'static str) -> Result<f64, ParseError> {
    let err = || ParseError { found: s.to_string(), expected };
    let v: f64 = s.trim().parse().map_err(|_| err())?;
    if v.is_finite() {
        Ok(v)
    } else {
        Err(err())
    }
}

const OHM_FORM: &str = "a resistance in Ω: a number, optionally with k or M (e.g. 10000, 10k, 4.7k, 1M)";

/// A resistance in Ω: `10000`, `10k`, `4.7k`, `1M` (an optional trailing `Ω` or `ohm` is allowed).
/// The sign is kept: whether it may be negative is for the caller to say.
pub fn parse_ohm(s: &str) -> Result<f64, ParseError> {
    let t = s.trim();
    let t = t.strip_suffix('Ω').or_else(|| t.strip_suffix("ohm")).unwrap_or(t).trim_end();
    let (digits, scale) = match t.chars().last() {
        Some('k' | 'K') => (&t[..t.len() - 1], 1e3),
        Some('M') => (&t[..t.len() - 1], 1e6),
        _ => (t, 1.0),
    };
    let v = number(digits, OHM_FORM).map_err(|_| ParseError { found: s.to_string(), expected: OHM_FORM })?;
    Ok(v * scale)
}

const POINT_FORM: &str =
    "a curve point T:R, a temperature in °C and a resistance in Ω (e.g. 25:10k, -40:336.5k, 85:1.07k)";

/// A curve point `T:R`: a temperature in °C and a resistance in Ω (as [`parse_ohm`] reads it).
pub fn parse_point(s: &str) -> Result<CurvePoint, ParseError> {
    let err = || ParseError { found: s.to_string(), expected: POINT_FORM };
    let (t, r) = s.split_once(':').ok_or_else(err)?;
    let celsius = number(t, POINT_FORM).map_err(|_| err())?;
    let ohm = parse_ohm(r).map_err(|_| err())?;
    Ok(CurvePoint::new(celsius, ohm))
}

const COEFF_FORM: &str = "three Steinhart–Hart coefficients A,B,C (e.g. 1.009e-3,2.378e-4,2.019e-7)";

/// Three Steinhart–Hart coefficients `A,B,C`.
pub fn parse_coefficients(s: &str) -> Result<[f64; 3], ParseError> {
    let err = || ParseError { found: s.to_string(), expected: COEFF_FORM };
    let parts: Vec<&str> = s.split(',').collect();
    let [a, b, c] = parts.as_slice() else { return Err(err()) };
    Ok([number(a, COEFF_FORM)?, number(b, COEFF_FORM)?, number(c, COEFF_FORM)?])
}

/// A point as the user typed it: `T:R`.
pub fn show_point(p: CurvePoint) -> String {
    format!("{}:{}", p.celsius, p.ohm)
}

fn show_points(points: &[CurvePoint]) -> String {
    points.iter().map(|p| show_point(*p)).collect::<Vec<_>>().join(" ")
}

// ---------------------------------------------------------------------------------------------------------
// Coefficients from curve points

/// Checks curve points one by one and against each other (before firmware-lib's fit, so that each
/// mistake is named): temperatures above absolute zero, positive resistances, distinct temperatures and
/// resistances, and resistance falling as the temperature rises.
pub fn check_points(option: &'static str, points: &[CurvePoint]) -> Result<(), SensorToolError> {
    for p in points {
        if !(p.celsius.is_finite() && p.ohm.is_finite()) {
            return bad(option, show_point(*p), "not finite", POINT_FORM);
        }
        if p.celsius <= ABSOLUTE_ZERO_C {
            return bad(
                option,
                show_point(*p),
                format!("{} °C is at or below absolute zero", p.celsius),
                "a temperature above −273.15 °C",
            );
        }
        if p.ohm <= 0.0 {
            return bad(
                option,
                show_point(*p),
                format!("the resistance {} Ω is not positive", p.ohm),
                "a resistance > 0 Ω",
            );
        }
    }
    for (i, a) in points.iter().enumerate() {
        for b in &points[i + 1..] {
            if a.celsius == b.celsius {
                return Err(SensorToolError::SameTemperature {
                    option,
                    first: show_point(*a),
                    second: show_point(*b),
                    celsius: a.celsius,
                });
            }
            if a.ohm == b.ohm {
                return Err(SensorToolError::SameResistance {
                    option,
                    first: show_point(*a),
                    second: show_point(*b),
                    ohm: a.ohm,
                });
            }
        }
    }
    let sorted = sorted_by_temperature(points);
    for w in sorted.windows(2) {
        if w[1].ohm > w[0].ohm {
            return Err(SensorToolError::NotNtc {
                option,
                colder: show_point(w[0]),
                warmer: show_point(w[1]),
            });
        }
    }
    Ok(())
}

fn sorted_by_temperature(points: &[CurvePoint]) -> Vec<CurvePoint> {
    let mut v = points.to_vec();
    v.sort_by(|a, b| a.celsius.total_cmp(&b.celsius));
    v
}

/// The secant β between two points, `ln(R₁/R₂)/(1/T₁ − 1/T₂)` (the usual definition of a thermistor's β
/// between two temperatures): a diagnostic for points that do not lie on one curve.
pub fn secant_beta_k(p1: CurvePoint, p2: CurvePoint) -> f64 {
    let inv = |p: CurvePoint| 1.0 / (p.celsius - ABSOLUTE_ZERO_C);
    (p1.ohm / p2.ohm).ln() / (inv(p1) - inv(p2))
}

/// The Beta model through two data-sheet points, with its reference (R₀, T₀) at the first: firmware-lib's
/// [`Beta::from_points`], after [`check_points`].
pub fn beta_from_points(option: &'static str, points: &[CurvePoint]) -> Result<Beta, SensorToolError> {
    let [p1, p2] = points else {
        return Err(SensorToolError::PointCount {
            option,
            count: points.len(),
            expected: "2 for the Beta model",
        });
    };
    check_points(option, points)?;
    Beta::from_points(*p1, *p2).map_err(|error| SensorToolError::Fit {
        option,
        points: show_points(points),
        error,
    })
}

/// The Steinhart–Hart coefficients through three data-sheet points: firmware-lib's
/// [`SteinhartHart::from_points`], after [`check_points`].
pub fn steinhart_hart_from_points(
    option: &'static str,
    points: &[CurvePoint],
) -> Result<SteinhartHart, SensorToolError> {
    let [p1, p2, p3] = points else {
        return Err(SensorToolError::PointCount {
            option,
            count: points.len(),
            expected: "3 for Steinhart–Hart",
        });
    };
    check_points(option, points)?;
    SteinhartHart::from_points(*p1, *p2, *p3).map_err(|error| match error {
        FitError::NotMonotone => {
            let s = sorted_by_temperature(points);
            let betas: Vec<String> =
                s.windows(2).map(|w| format!("{:.0} K", secant_beta_k(w[0], w[1]))).collect();
            SensorToolError::NotMonotone {
                option,
                points: show_points(points),
                from_c: s[0].celsius,
                to_c: s[2].celsius,
                betas: betas.join(", "),
            }
        }
        error => SensorToolError::Fit { option, points: show_points(points), error },
    })
}

// ---------------------------------------------------------------------------------------------------------
// Elements and dividers from options

/// The sensing element, as the options give it.
#[derive(Debug, Clone, PartialEq)]
pub enum ElementSpec {
    /// `--beta K --r0 OHM [--t0 °C]`: an NTC by its β and its resistance at a reference temperature.
    Beta {
        /// Resistance at the reference temperature, Ω.
        r0_ohm: f64,
        /// The reference temperature, °C.
        t0_c: f64,
        /// β, K.
        beta_k: f64,
    },
    /// `--sh A,B,C`: an NTC by its Steinhart–Hart coefficients.
    SteinhartHart {
        /// A, 1/K.
        a: f64,
        /// B, 1/K.
        b: f64,
        /// C, 1/K.
        c: f64,
    },
    /// `--point T:R` two or three times: the Beta model or Steinhart–Hart through data-sheet points.
    Points(Vec<CurvePoint>),
    /// `--rtd pt100|pt1000|R0`: a platinum RTD on the IEC 60751 curve.
    Rtd {
        /// R₀ at 0 °C, Ω.
        r0_ohm: f64,
    },
}

/// A value for an f32 field: finite and positive in f32 as well.
fn positive_f32(option: &'static str, v: f64, expected: &'static str) -> Result<f32, SensorToolError> {
    let f = v as f32;
    if !(v > 0.0) {
        return bad(option, v, "not positive", expected);
    }
    if !(f.is_finite() && f.is_normal()) {
        return bad(option, v, "outside the range of the f32 it is stored in", expected);
    }
    Ok(f)
}

impl ElementSpec {
    /// The element, checked (and fitted, for points).
    pub fn element(&self) -> Result<SensorElement, SensorToolError> {
        let e = match *self {
            ElementSpec::Beta { r0_ohm, t0_c, beta_k } => {
                let r0 = positive_f32("--r0", r0_ohm, "the resistance at the reference temperature, > 0 Ω")?;
                let beta = positive_f32("--beta", beta_k, "β in K, > 0 (typically 3000…5000 K for an NTC)")?;
                if !(t0_c.is_finite() && t0_c > ABSOLUTE_ZERO_C) {
                    return bad(
                        "--t0",
                        t0_c,
                        "not above absolute zero",
                        "a reference temperature in °C (commonly 25)",
                    );
                }
                SensorElement::NtcBeta(Beta { r0_ohm: r0, t0_c: t0_c as f32, beta_k: beta })
            }
            ElementSpec::SteinhartHart { a, b, c } => {
                let shown = format!("{a},{b},{c}");
                let (a32, b32, c32) = (a as f32, b as f32, c as f32);
                if !(a32.is_finite() && b32.is_finite() && c32.is_finite()) {
                    return bad("--sh", shown, "a coefficient does not fit in f32", COEFF_FORM);
                }
                if !(b32 > 0.0) {
                    return bad(
                        "--sh",
                        shown,
                        format!("B = {b} is not positive"),
                        "B > 0 (for an NTC, 1/T rises with ln R)",
                    );
                }
                SensorElement::NtcSteinhartHart(SteinhartHart { a: a32, b: b32, c: c32 })
            }
            ElementSpec::Points(ref p) => match p.len() {
                2 => SensorElement::NtcBeta(beta_from_points("--point", p)?),
                3 => SensorElement::NtcSteinhartHart(steinhart_hart_from_points("--point", p)?),
                n => {
                    return Err(SensorToolError::PointCount {
                        option: "--point",
                        count: n,
                        expected: "2 (Beta model) or 3 (Steinhart–Hart)",
                    })
                }
            },
            ElementSpec::Rtd { r0_ohm } => SensorElement::Rtd(Rtd {
                r0_ohm: positive_f32("--rtd", r0_ohm, "pt100, pt1000 or R0 in Ω (> 0)")?,
            }),
        };
        e.validate().map_err(|error| SensorToolError::Rejected { what: "the element".into(), error })?;
        Ok(e)
    }
}

/// `--rtd`'s value: `pt100`, `pt1000` (any case) or R₀ in Ω.
pub fn parse_rtd(s: &str) -> Result<f64, ParseError> {
    match s.trim().to_ascii_lowercase().as_str() {
        "pt100" => Ok(f64::from(Rtd::PT100.r0_ohm)),
        "pt1000" => Ok(f64::from(Rtd::PT1000.r0_ohm)),
        _ => parse_ohm(s).map_err(|_| ParseError {
            found: s.to_string(),
            expected: "pt100, pt1000 or R0 in Ω (e.g. 500)",
        }),
    }
}

/// The divider and ADC, as the options give them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DividerSpec {
    /// `--placement`.
    pub placement: Placement,
    /// `--series`, Ω.
    pub series_ohm: f64,
    /// `--bits`.
    pub bits: u8,
    /// `--full-scale` (default `2^bits`: the ADC's reference is the divider's supply).
    pub full_scale_code: Option<u32>,
    /// `--open-margin`, codes.
    pub open_margin: u32,
    /// `--short-margin`, codes.
    pub short_margin: u32,
}

impl DividerSpec {
    /// The divider, checked by firmware-lib's `validate()` after each option is checked on its own.
    pub fn divider(&self) -> Result<Divider, SensorToolError> {
        let series_ohm = positive_f32("--series", self.series_ohm, "the series resistor in Ω, > 0")?;
        if !(1..=24).contains(&self.bits) {
            return bad(
                "--bits",
                self.bits,
                "outside 1..=24",
                "the temperature ADC's resolution, 1..=24 bits",
            );
        }
        let mut d = Divider::ratiometric(self.placement, series_ohm, self.bits);
        if let Some(fs) = self.full_scale_code {
            if fs < 2 {
                return bad("--full-scale", fs, "below 2", "the code of the divider's supply, ≥ 2");
            }
            d.full_scale_code = fs;
        }
        d.open_margin = self.open_margin;
        d.short_margin = self.short_margin;
        if d.validate().is_err() {
            return bad(
                "--open-margin/--short-margin",
                format!("{}/{}", self.open_margin, self.short_margin),
                format!("the fault bands leave no usable code of the full scale {}", d.full_scale_code),
                "margins whose sum is at least 2 below the full scale",
            );
        }
        Ok(d)
    }
}

// ---------------------------------------------------------------------------------------------------------
// Ranges, settings and their summary

/// f32 at or below `v`.
fn f32_down(v: f64) -> f32 {
    let f = v as f32;
    if f64::from(f) > v {
        f.next_down()
    } else {
        f
    }
}

/// f32 at or above `v`.
fn f32_up(v: f64) -> f32 {
    let f = v as f32;
    if f64::from(f) < v {
        f.next_up()
    } else {
        f
    }
}

/// Checks a temperature range for an element: finite, `lo < hi`, above absolute zero, and for an RTD
/// within the IEC 60751 curve's −200…850 °C. `options` names the two options, e.g. `("--min", "--max")`.
fn check_range(
    element: &SensorElement,
    (lo_opt, hi_opt): (&'static str, &'static str),
    lo: f64,
    hi: f64,
) -> Result<(), SensorToolError> {
    if !lo.is_finite() || lo <= ABSOLUTE_ZERO_C {
        return bad(lo_opt, lo, "not a temperature above absolute zero", "a temperature in °C above −273.15");
    }
    if !hi.is_finite() || hi <= lo {
        return bad(
            hi_opt,
            hi,
            format!("not above {lo_opt} {lo}"),
            "the upper end of the range, above the lower",
        );
    }
    if let SensorElement::Rtd(_) = element {
        if lo < logtrim::rtd::MIN_C {
            return bad(lo_opt, lo, "below the IEC 60751 curve's range", "−200 °C or above for an RTD");
        }
        if hi > logtrim::rtd::MAX_C {
            return bad(hi_opt, hi, "above the IEC 60751 curve's range", "850 °C or below for an RTD");
        }
    }
    Ok(())
}

/// A temperature channel's settings from its element, divider and valid range (`--min`, `--max`, °C):
/// checked option by option, then by firmware-lib's [`TemperatureSensor::validate`], then for a fault at
/// either end of the range (an end whose code the firmware would take as an open or shorted sensor, or
/// that lies beyond the converter).
pub fn build_sensor(
    element: SensorElement,
    divider: Divider,
    min_c: f64,
    max_c: f64,
) -> Result<TemperatureSensor, SensorToolError> {
    check_range(&element, ("--min", "--max"), min_c, max_c)?;
    let sensor = TemperatureSensor { element, divider, min_c: f32_down(min_c), max_c: f32_up(max_c) };
    if let Err(error) = sensor.validate() {
        return Err(match (element, error) {
            (
                SensorElement::NtcSteinhartHart(_),
                logtrim::Error::InvalidCalibration(logtrim::error::CalibrationDefect::TemperatureRange),
            ) => SensorToolError::CurveOverRange {
                options: "--min/--max",
                from_c: min_c,
                to_c: max_c,
                problem: "the Steinhart–Hart curve is not monotone over this range (it turns back)".into(),
            },
            (_, error) => SensorToolError::Rejected { what: "the settings".into(), error },
        });
    }
    for (option, t, hint) in [
        ("--min", min_c, "raise --min, or narrow the fault margin on that side"),
        ("--max", max_c, "lower --max, or narrow the fault margin on that side"),
    ] {
        let exact = sensor
            .code_f64(t)
            .map_err(|error| SensorToolError::Rejected { what: format!("{option} {t}"), error })?;
        let code = exact.round().max(0.0);
        let fault = match u32::try_from(code as u64) {
            Ok(c) => sensor.divider.resistance_f64(c).err().map(|e| fault_name(&e)),
            Err(_) => Some("beyond the converter".to_string()),
        };
        if let Some(fault) = fault {
            return Err(SensorToolError::FaultAtRangeEnd {
                option,
                celsius: t,
                code: code as u64,
                fault,
                hint,
            });
        }
    }
    Ok(sensor)
}

fn fault_name(e: &logtrim::Error) -> String {
    match e {
        logtrim::Error::Sensor(logtrim::error::SensorFault::Open) => "an open sensor".into(),
        logtrim::Error::Sensor(logtrim::error::SensorFault::Short) => "a shorted sensor".into(),
        logtrim::Error::CodeOutOfAdcRange { max, .. } => format!("beyond the converter (max code {max})"),
        e => e.to_string(),
    }
}

/// The settings file's text: the sensor as pretty JSON, with a trailing newline.
pub fn settings_json(sensor: &TemperatureSensor) -> String {
    to_json_line(sensor)
}

/// Writes a settings file atomically.
pub fn write_settings(path: &Path, sensor: &TemperatureSensor) -> Result<(), SensorToolError> {
    crate::output::write_atomic(path, settings_json(sensor).as_bytes())
        .map_err(|source| FileError::io(path, source).into())
}

/// Parses a settings file's text and validates it; `path` only names the source in errors.
pub fn settings_from_json(text: &str, path: &str) -> Result<TemperatureSensor, SensorToolError> {
    let s: TemperatureSensor = parse_json(text, path)?;
    s.validate().map_err(|error| SensorToolError::Rejected { what: path.to_string(), error })?;
    Ok(s)
}

/// Reads and validates a settings file.
pub fn load_settings(path: &Path) -> Result<TemperatureSensor, SensorToolError> {
    settings_from_json(&read_text(path)?, &path.display().to_string())
}

/// One line of text describing an element.
pub fn describe_element(e: &SensorElement) -> String {
    match e {
        SensorElement::NtcBeta(b) => {
            format!("NTC, Beta model: R = {} Ω at {} °C, β = {} K", b.r0_ohm, b.t0_c, b.beta_k)
        }
        SensorElement::NtcSteinhartHart(s) => {
            format!("NTC, Steinhart–Hart: A = {:e}, B = {:e}, C = {:e}", s.a, s.b, s.c)
        }
        SensorElement::Rtd(r) => format!("platinum RTD on the IEC 60751 curve, R0 = {} Ω", r.r0_ohm),
    }
}

/// One line of text describing a divider.
pub fn describe_divider(d: &Divider) -> String {
    let place = match d.placement {
        Placement::LowSide => "low side (sensor to ground; the code rises with R)",
        Placement::HighSide => "high side (sensor to the supply; the code falls as R rises)",
    };
    format!(
        "{place}, series {} Ω, {}-bit ADC, supply = code {}, fault bands: open {} codes, short {} codes",
        d.series_ohm, d.bits, d.full_scale_code, d.open_margin, d.short_margin
    )
}

// ---------------------------------------------------------------------------------------------------------
// Tables

/// The range and step of a table, °C.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TableSpec {
    /// `--from`: the first temperature.
    pub from_c: f64,
    /// `--to`: the last temperature (included when the step lands on it).
    pub to_c: f64,
    /// `--step`: the step, K (> 0).
    pub step_k: f64,
}

/// What the divider reads at one temperature of a table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CodeColumns {
    /// The exact (fractional, noise-free) code.
    pub exact: f64,
    /// The code rounded, as the converter gives it (saturated at its top code).
    pub code: u32,
    /// What the firmware's f32 conversion makes of that code, or why it refuses it
    /// ([`logtrim::Error::CodeOutOfAdcRange`] where the exact code lies beyond the converter).
    pub firmware_c: Result<f32, logtrim::Error>,
    /// The temperature step of one code there, K.
    pub k_per_code: f64,
}

/// One row of a table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TableRow {
    /// Temperature, °C.
    pub celsius: f64,
    /// The element's resistance, Ω.
    pub ohm: f64,
    /// The divider's reading, if a divider was given.
    pub code: Option<CodeColumns>,
}

/// How the firmware conversion in a table treats the valid range.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Channel<'a> {
    /// The element alone: resistances only.
    Element(&'a SensorElement),
    /// The element behind a divider, no valid range declared: the firmware's code → Ω → °C chain without
    /// a range check.
    Divided(&'a SensorElement, &'a Divider),
    /// A whole settings file: the firmware's [`TemperatureSensor::celsius`], range check included.
    Sensor(&'a TemperatureSensor),
}

/// The resistance (and with a divider, the code) of an element at evenly spaced temperatures.
///
/// The curve must be defined at every temperature and strictly monotone over the range (falling for an
/// NTC, rising for an RTD).
pub fn table(channel: Channel<'_>, spec: &TableSpec) -> Result<Vec<TableRow>, SensorToolError> {
    let (element, divider) = match channel {
        Channel::Element(e) => (*e, None),
        Channel::Divided(e, d) => (*e, Some(*d)),
        Channel::Sensor(s) => (s.element, Some(s.divider)),
    };
    element.validate().map_err(|error| SensorToolError::Rejected { what: "the element".into(), error })?;
    if let Some(d) = divider {
        d.validate().map_err(|error| SensorToolError::Rejected { what: "the divider".into(), error })?;
    }
    let TableSpec { from_c, to_c, step_k } = *spec;
    check_range(&element, ("--from", "--to"), from_c, to_c)?;
    if !(step_k.is_finite() && step_k > 0.0) {
        return bad("--step", step_k, "not a positive step", "a step in K, > 0");
    }
    let span_steps = (to_c - from_c) / step_k;
    if span_steps + 1.0 > MAX_TABLE_ROWS as f64 {
        return bad(
            "--step",
            step_k,
            format!("{from_c} … {to_c} °C would take {:.0} rows", span_steps.floor() + 1.0),
            "a step that gives at most 100,000 rows",
        );
    }
    let n = (span_steps + 1e-9).floor() as usize + 1;
    let mut rows = Vec::with_capacity(n);
    for i in 0..n {
        // By multiplication, not accumulation; snapped to 1e-9 K so that 0.1-steps print as typed.
        let t = ((from_c + step_k * i as f64) * 1e9).round() / 1e9;
        let ohm = element.resistance_f64(t).map_err(|e| SensorToolError::CurveOverRange {
            options: "--from/--to",
            from_c,
            to_c,
            problem: format!("the element's curve gives no resistance at {t} °C ({e})"),
        })?;
        let code = match divider {
            None => None,
            Some(d) => Some(code_columns(channel, &element, &d, t, ohm)?),
        };
        rows.push(TableRow { celsius: t, ohm, code });
    }
    let rises = matches!(element, SensorElement::Rtd(_));
    for w in rows.windows(2) {
        let ok = if rises { w[1].ohm > w[0].ohm } else { w[1].ohm < w[0].ohm };
        if !ok {
            return Err(SensorToolError::CurveOverRange {
                options: "--from/--to",
                from_c,
                to_c,
                problem: format!(
                    "the resistance goes from {} Ω at {} °C to {} Ω at {} °C, against the element's sense",
                    w[0].ohm, w[0].celsius, w[1].ohm, w[1].celsius
                ),
            });
        }
    }
    Ok(rows)
}

fn code_columns(
    channel: Channel<'_>,
    element: &SensorElement,
    d: &Divider,
    t: f64,
    ohm: f64,
) -> Result<CodeColumns, SensorToolError> {
    let rejected = |error| SensorToolError::Rejected { what: format!("{t} °C"), error };
    let exact = d.code_f64(ohm).map_err(rejected)?;
    let max = d.max_code().map_err(rejected)?;
    let rounded = exact.round().max(0.0);
    let code = rounded.min(f64::from(max)) as u32;
    let firmware_c = if rounded > f64::from(max) {
        // The converter saturates at its top code: say so rather than convert the clipped code.
        Err(logtrim::Error::CodeOutOfAdcRange { code: rounded.min(f64::from(u32::MAX)) as u32, max })
    } else {
        match channel {
            Channel::Sensor(s) => s.celsius(code),
            _ => d.resistance(code).and_then(|r| element.celsius(r)),
        }
    };
    // Codes per kelvin by a central difference of the same forward chain (one-sided at a model's edge).
    let h = 1e-3;
    let at = |t: f64| element.resistance_f64(t).and_then(|r| d.code_f64(r)).ok();
    let per_k = match (at(t + h), at(t - h)) {
        (Some(a), Some(b)) => (a - b) / (2.0 * h),
        (Some(a), None) => (a - exact) / h,
        (None, Some(b)) => (exact - b) / h,
        (None, None) => f64::NAN,
    };
    Ok(CodeColumns { exact, code, firmware_c, k_per_code: 1.0 / per_k.abs() })
}

/// Table layout.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TableFormat {
    /// Comma-separated, one header row, full precision.
    Csv,
    /// Aligned columns for reading, with `#` comment lines describing the channel.
    Text,
}

/// A firmware refusal's short name for a table cell.
fn refusal(e: &logtrim::Error) -> String {
    match e {
        logtrim::Error::Sensor(logtrim::error::SensorFault::Open) => "open".into(),
        logtrim::Error::Sensor(logtrim::error::SensorFault::Short) => "short".into(),
        logtrim::Error::Sensor(logtrim::error::SensorFault::OutOfModelRange) => "out_of_range".into(),
        e => e.name().into(),
    }
}

/// Writes a table. `header` lines (the channel's description) go into the text layout as `#` comments.
pub fn write_table<W: std::io::Write>(
    rows: &[TableRow],
    format: TableFormat,
    header: &[String],
    mut out: W,
) -> std::io::Result<()> {
    let with_code = rows.first().is_some_and(|r| r.code.is_some());
    let mut s = String::new();
    match format {
        TableFormat::Csv => {
            s.push_str("temp_c,resistance_ohm");
            if with_code {
                s.push_str(",code_exact,code,firmware_c,firmware_error_k,k_per_code,refused");
            }
            s.push('\n');
            for r in rows {
                let _ = write!(s, "{},{}", r.celsius, r.ohm);
                if let Some(c) = &r.code {
                    let _ = write!(s, ",{},{}", c.exact, c.code);
                    match c.firmware_c {
                        Ok(t) => {
                            let _ = write!(s, ",{},{},{},", t, f64::from(t) - r.celsius, c.k_per_code);
                        }
                        Err(e) => {
                            let _ = write!(s, ",,,{},{}", c.k_per_code, refusal(&e));
                        }
                    }
                }
                s.push('\n');
            }
        }
        TableFormat::Text => {
            for h in header {
                let _ = writeln!(s, "# {h}");
            }
            let _ = write!(s, "{:>10} {:>16}", "T [°C]", "R [Ω]");
            if with_code {
                let _ = write!(
                    s,
                    " {:>11} {:>8} {:>12} {:>10} {:>10}",
                    "code exact", "code", "firmware °C", "error K", "K/code"
                );
            }
            s.push('\n');
            for r in rows {
                let _ = write!(s, "{:>10} {:>16}", r.celsius, sig(r.ohm, 7));
                if let Some(c) = &r.code {
                    let _ = write!(s, " {:>11.3} {:>8}", c.exact, c.code);
                    match c.firmware_c {
                        Ok(t) => {
                            let _ = write!(
                                s,
                                " {:>12.4} {:>10.4} {:>10.4}",
                                t,
                                f64::from(t) - r.celsius,
                                c.k_per_code
                            );
                        }
                        Err(e) => {
                            let _ = write!(s, " {:>12} {:>10} {:>10.4}", refusal(&e), "", c.k_per_code);
                        }
                    }
                }
                s.push('\n');
            }
        }
    }
    out.write_all(s.as_bytes())?;
    out.flush()
}

/// `v` to `digits` significant digits, without an exponent for everyday magnitudes.
fn sig(v: f64, digits: i32) -> String {
    if v == 0.0 || !v.is_finite() {
        return v.to_string();
    }
    let decimals = (digits - 1 - v.abs().log10().floor() as i32).max(0) as usize;
    format!("{v:.decimals$}")
}

/// Writes a table to a file atomically (nothing appears under `path` if writing fails).
pub fn write_table_file(
    path: &Path,
    rows: &[TableRow],
    format: TableFormat,
    header: &[String],
) -> Result<(), SensorToolError> {
    let io = |source| SensorToolError::from(FileError::io(path, source));
    let mut f = AtomicFile::create(path).map_err(io)?;
    write_table(rows, format, header, &mut f).map_err(io)?;
    f.flush().map_err(io)?;
    f.commit().map_err(io)
}

/// What a channel reads over its valid range: codes and resolution at the ends and the coarsest step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RangeSummary {
    /// At `min_c`: (°C, code, K per code).
    pub at_min: (f64, u32, f64),
    /// At `max_c`.
    pub at_max: (f64, u32, f64),
    /// The coarsest resolution over the range: (°C, K per code).
    pub coarsest: (f64, f64),
    /// The largest error of the firmware's f32 conversion at the rounded code, over 200 steps, K
    /// (quantisation and arithmetic together).
    pub worst_error_k: f64,
}

/// The summary of a channel over its valid range (201 evenly spaced temperatures).
pub fn summarise(sensor: &TemperatureSensor) -> Result<RangeSummary, SensorToolError> {
    let (lo, hi) = (f64::from(sensor.min_c), f64::from(sensor.max_c));
    let rows =
        table(Channel::Sensor(sensor), &TableSpec { from_c: lo, to_c: hi, step_k: (hi - lo) / 200.0 })?;
    let cols = |r: &TableRow| r.code.map(|c| (r.celsius, c.code, c.k_per_code));
    let first = rows.first().and_then(cols);
    let last = rows.last().and_then(cols);
    let (Some(at_min), Some(at_max)) = (first, last) else {
        return Err(SensorToolError::Rejected {
            what: "the settings".into(),
            error: logtrim::Error::InvalidCalibration(logtrim::error::CalibrationDefect::TemperatureRange),
        });
    };
    let mut coarsest = (lo, 0.0f64);
    let mut worst = 0.0f64;
    for r in &rows {
        if let Some(c) = r.code {
            if c.k_per_code > coarsest.1 {
                coarsest = (r.celsius, c.k_per_code);
            }
            if let Ok(t) = c.firmware_c {
                worst = worst.max((f64::from(t) - r.celsius).abs());
            }
        }
    }
    Ok(RangeSummary { at_min, at_max, coarsest, worst_error_k: worst })
}

#[cfg(test)]
mod tests;
