//! The element and the divider of a temperature channel from their figures: each figure checked on its
//! own (named by its [`Input`] when it is wrong), then the whole by firmware-lib's `validate()`.

use logtrim::sensor::SensorElement;
use logtrim::thermistor::{Beta, CurvePoint, SteinhartHart};
use logtrim::{Divider, Placement, Rtd};

use super::text::COEFF_FORM;
use super::{
    bad, beta_from_points, rejected, steinhart_hart_from_points, Input, SensorToolError, ABSOLUTE_ZERO_C,
};

/// The sensing element, by the figures that describe it.
#[derive(Debug, Clone, PartialEq)]
pub enum ElementSpec {
    /// An NTC by its β and its resistance at a reference temperature.
    Beta {
        /// Resistance at the reference temperature, Ω.
        r0_ohm: f64,
        /// The reference temperature, °C.
        t0_c: f64,
        /// β, K.
        beta_k: f64,
    },
    /// An NTC by its Steinhart–Hart coefficients.
    SteinhartHart {
        /// A, 1/K.
        a: f64,
        /// B, 1/K.
        b: f64,
        /// C, 1/K.
        c: f64,
    },
    /// Two or three data-sheet points: the Beta model or Steinhart–Hart through them.
    Points(Vec<CurvePoint>),
    /// A platinum RTD on the IEC 60751 curve, by its R₀.
    Rtd {
        /// R₀ at 0 °C, Ω.
        r0_ohm: f64,
    },
}

/// A value for an f32 field: finite and positive in f32 as well.
fn positive_f32(input: Input, v: f64, expected: &'static str) -> Result<f32, SensorToolError> {
    let f = v as f32;
    if !(v > 0.0) {
        return bad(input, v, "not positive", expected);
    }
    if !(f.is_finite() && f.is_normal()) {
        return bad(input, v, "outside the range of the f32 it is stored in", expected);
    }
    Ok(f)
}

impl ElementSpec {
    /// The element, checked (and fitted, for points).
    pub fn element(&self) -> Result<SensorElement, SensorToolError> {
        let e = match *self {
            ElementSpec::Beta { r0_ohm, t0_c, beta_k } => {
                let r0 =
                    positive_f32(Input::R0, r0_ohm, "the resistance at the reference temperature, > 0 Ω")?;
                let beta =
                    positive_f32(Input::Beta, beta_k, "β in K, > 0 (typically 3000…5000 K for an NTC)")?;
                if !(t0_c.is_finite() && t0_c > ABSOLUTE_ZERO_C) {
                    return bad(
                        Input::T0,
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
                    return bad(Input::SteinhartHart, shown, "a coefficient does not fit in f32", COEFF_FORM);
                }
                if !(b32 > 0.0) {
                    return bad(
                        Input::SteinhartHart,
                        shown,
                        format!("B = {b} is not positive"),
                        "B > 0 (for an NTC, 1/T rises with ln R)",
                    );
                }
                SensorElement::NtcSteinhartHart(SteinhartHart { a: a32, b: b32, c: c32 })
            }
            ElementSpec::Points(ref p) => match p.len() {
                2 => SensorElement::NtcBeta(beta_from_points(p)?),
                3 => SensorElement::NtcSteinhartHart(steinhart_hart_from_points(p)?),
                n => {
                    return Err(SensorToolError::PointCount {
                        count: n,
                        expected: "2 (Beta model) or 3 (Steinhart–Hart)",
                    })
                }
            },
            ElementSpec::Rtd { r0_ohm } => SensorElement::Rtd(Rtd {
                r0_ohm: positive_f32(Input::Rtd, r0_ohm, "pt100, pt1000 or R0 in Ω (> 0)")?,
            }),
        };
        e.validate().map_err(rejected("the element"))?;
        Ok(e)
    }
}

/// The divider and the ADC that reads it, by their figures.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DividerSpec {
    /// Where the sensor sits in the divider.
    pub placement: Placement,
    /// The series resistor, Ω.
    pub series_ohm: f64,
    /// The temperature ADC's resolution, bits.
    pub bits: u8,
    /// The code the divider's supply reads (`None`: `2^bits`, the ADC's reference is the divider's supply).
    pub full_scale_code: Option<u32>,
    /// Codes within this many of the open-sensor rail read as an open sensor.
    pub open_margin: u32,
    /// Codes within this many of the shorted-sensor rail read as a short.
    pub short_margin: u32,
}

impl DividerSpec {
    /// The divider, checked by firmware-lib's `validate()` after each figure is checked on its own.
    pub fn divider(&self) -> Result<Divider, SensorToolError> {
        let series_ohm = positive_f32(Input::Series, self.series_ohm, "the series resistor in Ω, > 0")?;
        if !(1..=24).contains(&self.bits) {
            return bad(
                Input::Bits,
                self.bits,
                "outside 1..=24",
                "the temperature ADC's resolution, 1..=24 bits",
            );
        }
        let mut d = Divider::ratiometric(self.placement, series_ohm, self.bits);
        if let Some(fs) = self.full_scale_code {
            if fs < 2 {
                return bad(Input::FullScale, fs, "below 2", "the code of the divider's supply, ≥ 2");
            }
            d.full_scale_code = fs;
        }
        d.open_margin = self.open_margin;
        d.short_margin = self.short_margin;
        if d.validate().is_err() {
            return bad(
                Input::FaultMargins,
                format!("{}/{}", self.open_margin, self.short_margin),
                format!("the fault bands leave no usable code of the full scale {}", d.full_scale_code),
                "margins whose sum is at least 2 below the full scale",
            );
        }
        Ok(d)
    }
}
