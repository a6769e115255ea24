//! Values written as text: resistances with SI prefixes (`10k`), curve points (`25:10k`), Steinhart–Hart
//! coefficients (`A,B,C`) and platinum RTDs by name (`pt100`). Each parser says what form it expected.

use logtrim::thermistor::CurvePoint;
use logtrim::Rtd;

/// A value written as text that is not of the expected form.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{found:?} is not {expected}")]
pub struct ParseError {
    /// The text given.
    pub found: String,
    /// What was expected.
    pub expected: &'static str,
}

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
    let err = || ParseError { found: s.to_string(), expected: OHM_FORM };
    let v = number(digits, OHM_FORM).map_err(|_| err())?;
    // A finite number can overflow with its multiplier (1e308k): no resistance is that.
    Some(v * scale).filter(|r| r.is_finite()).ok_or_else(err)
}

pub(super) const POINT_FORM: &str =
    "a curve point T:R, a temperature in °C and a resistance in Ω (e.g. 25:10k, -40:336.5k, 85:1.07k)";

/// A curve point `T:R`: a temperature in °C and a resistance in Ω (as [`parse_ohm`] reads it).
pub fn parse_point(s: &str) -> Result<CurvePoint, ParseError> {
    let err = || ParseError { found: s.to_string(), expected: POINT_FORM };
    let (t, r) = s.split_once(':').ok_or_else(err)?;
    let celsius = number(t, POINT_FORM).map_err(|_| err())?;
    let ohm = parse_ohm(r).map_err(|_| err())?;
    Ok(CurvePoint::new(celsius, ohm))
}

pub(super) const COEFF_FORM: &str =
    "three Steinhart–Hart coefficients A,B,C (e.g. 1.009e-3,2.378e-4,2.019e-7)";

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

pub(super) fn show_points(points: &[CurvePoint]) -> String {
    points.iter().map(|p| show_point(*p)).collect::<Vec<_>>().join(" ")
}

/// A platinum RTD by name or by its R₀: `pt100`, `pt1000` (any case) or R₀ in Ω.
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
