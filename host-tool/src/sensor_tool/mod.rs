//! From a part's data sheet to a temperature channel's settings: thermistor coefficients from
//! (temperature, resistance) points, resistance–temperature tables (with the divider's code at each
//! temperature), and the settings file — firmware-lib's [`TemperatureSensor`] as JSON — that a calibration
//! stores for a raw temperature channel.
//!
//! The sensor math is firmware-lib's ([`Beta::from_points`], [`SteinhartHart::from_points`], the elements'
//! `resistance_f64`/`celsius`, [`Divider::code_f64`], [`TemperatureSensor::validate`]). This module checks
//! the inputs first so that a mistake is named precisely — which value, what it is, what was expected —
//! then calls it and lays out the results.
//!
//! | file | owns |
//! |---|---|
//! | `text.rs` | values written as text: resistances (`10k`), curve points (`25:10k`), coefficients, RTD names |
//! | `points.rs` | coefficients through data-sheet points (Beta, Steinhart–Hart), with the points checked first |
//! | `spec.rs` | the element and the divider from their figures ([`ElementSpec`], [`DividerSpec`]) |
//! | `settings.rs` | a channel's settings from element, divider and valid range; the settings file |
//! | `table.rs` | resistance–temperature tables with the divider's codes, and the summary of a channel |
//!
//! Errors name each value by what it is ([`Input`]): a caller that took the values from options names the
//! options instead ([`SensorToolError::message`]).
//!
//! [`TemperatureSensor`]: logtrim::sensor::TemperatureSensor
//! [`TemperatureSensor::validate`]: logtrim::sensor::TemperatureSensor::validate
//! [`Beta::from_points`]: logtrim::thermistor::Beta::from_points
//! [`SteinhartHart::from_points`]: logtrim::thermistor::SteinhartHart::from_points
//! [`Divider::code_f64`]: logtrim::Divider::code_f64

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

mod points;
mod settings;
mod spec;
mod table;
#[cfg(test)]
mod tests;
mod text;

use std::fmt;

use logtrim::thermistor::FitError;

use crate::file_error::FileError;

pub use logtrim::thermistor::CurvePoint;
pub use points::{beta_from_points, check_points, secant_beta_k, steinhart_hart_from_points};
pub use settings::{
    build_sensor, describe_divider, describe_element, load_settings, settings_from_json, settings_json,
    write_settings,
};
pub use spec::{DividerSpec, ElementSpec};
pub use table::{
    summarise, table, write_table, write_table_file, CodeColumns, RangeSummary, TableFormat, TableRow,
    TableSource, TableSpec, MAX_TABLE_ROWS,
};
pub use text::{parse_coefficients, parse_ohm, parse_point, parse_rtd, show_point, ParseError};

/// Absolute zero in °C.
const ABSOLUTE_ZERO_C: f64 = -logtrim::physics::ZERO_CELSIUS_K;

/// A value given to the sensor tool, as its errors name it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Input {
    /// A data-sheet curve point `T:R`.
    Point,
    /// The Beta model's β.
    Beta,
    /// The Beta model's resistance at its reference temperature.
    R0,
    /// The Beta model's reference temperature.
    T0,
    /// Steinhart–Hart coefficients.
    SteinhartHart,
    /// A platinum RTD (its R₀).
    Rtd,
    /// The divider's series resistor.
    Series,
    /// The temperature ADC's resolution.
    Bits,
    /// The code of the divider's supply.
    FullScale,
    /// The open- and short-sensor fault margins.
    FaultMargins,
    /// The low end of a channel's valid range.
    Min,
    /// The high end of a channel's valid range.
    Max,
    /// A channel's valid range, both ends.
    Range,
    /// A table's first temperature.
    From,
    /// A table's last temperature.
    To,
    /// A table's range, both ends.
    TableRange,
    /// A table's step.
    Step,
}

impl Input {
    /// What the value is, as the library's messages name it.
    pub fn name(self) -> &'static str {
        match self {
            Input::Point => "point",
            Input::Beta => "β",
            Input::R0 => "R0",
            Input::T0 => "T0",
            Input::SteinhartHart => "Steinhart–Hart coefficients",
            Input::Rtd => "RTD",
            Input::Series => "series resistor",
            Input::Bits => "ADC bits",
            Input::FullScale => "full-scale code",
            Input::FaultMargins => "open/short margins",
            Input::Min => "range low end",
            Input::Max => "range high end",
            Input::Range => "valid range",
            Input::From => "table start",
            Input::To => "table end",
            Input::TableRange => "table range",
            Input::Step => "table step",
        }
    }
}

/// Why a sensor description, table or settings file could not be made.
#[derive(Debug)]
#[non_exhaustive]
pub enum SensorToolError {
    /// One value is outside what it may be.
    Value {
        /// The value.
        input: Input,
        /// The value given, as text.
        value: String,
        /// What is wrong with it.
        problem: String,
        /// What was expected.
        expected: &'static str,
    },
    /// The wrong number of curve points for the model.
    PointCount {
        /// Points given.
        count: usize,
        /// How many the model takes.
        expected: &'static str,
    },
    /// Two points share a temperature.
    SameTemperature {
        /// The first point, as `T:R`.
        first: String,
        /// The second point, as `T:R`.
        second: String,
        /// The shared temperature, °C.
        celsius: f64,
    },
    /// Two points share a resistance.
    SameResistance {
        /// The first point.
        first: String,
        /// The second point.
        second: String,
        /// The shared resistance, Ω.
        ohm: f64,
    },
    /// The resistance does not fall as the temperature rises.
    NotNtc {
        /// The colder point.
        colder: String,
        /// The warmer point.
        warmer: String,
    },
    /// The Steinhart–Hart curve through three points turns back between them.
    NotMonotone {
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
    CurveOverRange {
        /// The range: [`Input::Range`] or [`Input::TableRange`].
        range: Input,
        /// Start of the range, °C.
        from_c: f64,
        /// End of the range, °C.
        to_c: f64,
        /// What goes wrong, and where.
        problem: String,
    },
    /// firmware-lib's fit refused the points for a reason the checks above do not name.
    Fit {
        /// The points, as given.
        points: String,
        /// firmware-lib's verdict.
        error: FitError,
    },
    /// An end of the valid range reads as a fault or beyond the converter.
    FaultAtRangeEnd {
        /// [`Input::Min`] or [`Input::Max`].
        end: Input,
        /// The temperature, °C.
        celsius: f64,
        /// The code there (rounded).
        code: u64,
        /// What the firmware makes of it.
        fault: String,
    },
    /// A settings file could not be read or written, or is not JSON of a temperature sensor.
    File(FileError),
    /// firmware-lib's `validate()` refused the description.
    Rejected {
        /// What was refused (a file, or the element, divider or settings).
        what: String,
        /// firmware-lib's verdict.
        error: logtrim::Error,
    },
}

impl From<FileError> for SensorToolError {
    fn from(e: FileError) -> Self {
        SensorToolError::File(e)
    }
}

impl SensorToolError {
    /// The message, with each value named by `name` (a command-line tool passes its option names; the
    /// error's `Display` passes [`Input::name`]).
    pub fn message(&self, name: &dyn Fn(Input) -> &'static str) -> String {
        let point = name(Input::Point);
        match self {
            SensorToolError::Value { input, value, problem, expected } => {
                format!("{} {value}: {problem}; expected {expected}", name(*input))
            }
            SensorToolError::PointCount { count, expected } => {
                format!("{point}: {count} point(s) given; expected {expected}")
            }
            SensorToolError::SameTemperature { first, second, celsius } => format!(
                "{point} {first} and {point} {second}: both at {celsius} °C; expected points at distinct temperatures"
            ),
            SensorToolError::SameResistance { first, second, ohm } => format!(
                "{point} {first} and {point} {second}: both {ohm} Ω; expected distinct resistances (an NTC's resistance changes with temperature)"
            ),
            SensorToolError::NotNtc { colder, warmer } => format!(
                "{point} {colder} and {point} {warmer}: the resistance rises with temperature; expected an NTC thermistor's curve, whose resistance falls as the temperature rises (for a platinum RTD use {})",
                name(Input::Rtd)
            ),
            SensorToolError::NotMonotone { points, from_c, to_c, betas } => format!(
                "{point} {points}: no Steinhart–Hart curve through these points is monotone between {from_c} and {to_c} °C (β between neighbouring points: {betas}); expected three points of one NTC curve — check them for a typo"
            ),
            SensorToolError::CurveOverRange { range, from_c, to_c, problem } => format!(
                "{} {from_c} … {to_c} °C: {problem}; expected a range over which the element's curve is defined and monotone",
                name(*range)
            ),
            SensorToolError::Fit { points, error } => format!("{point} {points}: {error}"),
            SensorToolError::FaultAtRangeEnd { end, celsius, code, fault } => {
                let hint = match end {
                    Input::Max => format!("lower {}, or narrow the fault margin on that side", name(Input::Max)),
                    _ => format!("raise {}, or narrow the fault margin on that side", name(Input::Min)),
                };
                format!(
                    "{} {celsius}: the channel reads code {code} there, which the firmware takes as {fault}; expected a valid range whose ends read as temperatures ({hint})",
                    name(*end)
                )
            }
            SensorToolError::File(e) => e.to_string(),
            SensorToolError::Rejected { what, error } => {
                format!("{what}: {error}; expected a description that firmware-lib's validate() accepts")
            }
        }
    }
}

impl fmt::Display for SensorToolError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message(&Input::name))
    }
}

impl std::error::Error for SensorToolError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            SensorToolError::File(e) => Some(e),
            _ => None,
        }
    }
}

/// A [`SensorToolError::Value`].
fn bad<T>(
    input: Input,
    value: impl fmt::Display,
    problem: impl Into<String>,
    expected: &'static str,
) -> Result<T, SensorToolError> {
    Err(SensorToolError::Value { input, value: value.to_string(), problem: problem.into(), expected })
}

/// The settings a sensor description refuses: firmware-lib's verdict on `what`.
fn rejected(what: impl Into<String>) -> impl Fn(logtrim::Error) -> SensorToolError {
    let what = what.into();
    move |error| SensorToolError::Rejected { what: what.clone(), error }
}
