//! Thermistor coefficients through data-sheet points: the Beta model through two, Steinhart–Hart through
//! three. The points are checked first, one by one and against each other, so that each mistake is named;
//! then firmware-lib fits them ([`Beta::from_points`], [`SteinhartHart::from_points`]).

use logtrim::thermistor::{Beta, CurvePoint, FitError, SteinhartHart};

use super::text::{show_points, POINT_FORM};
use super::{bad, show_point, Input, SensorToolError, ABSOLUTE_ZERO_C};

/// Checks curve points one by one and against each other (before firmware-lib's fit, so that each
/// mistake is named): temperatures above absolute zero, positive resistances, distinct temperatures and
/// resistances, and resistance falling as the temperature rises.
pub fn check_points(points: &[CurvePoint]) -> Result<(), SensorToolError> {
    for p in points {
        if !(p.celsius.is_finite() && p.ohm.is_finite()) {
            return bad(Input::Point, show_point(*p), "not finite", POINT_FORM);
        }
        if p.celsius <= ABSOLUTE_ZERO_C {
            return bad(
                Input::Point,
                show_point(*p),
                format!("{} °C is at or below absolute zero", p.celsius),
                "a temperature above −273.15 °C",
            );
        }
        if p.ohm <= 0.0 {
            return bad(
                Input::Point,
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
                    first: show_point(*a),
                    second: show_point(*b),
                    celsius: a.celsius,
                });
            }
            if a.ohm == b.ohm {
                return Err(SensorToolError::SameResistance {
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
            return Err(SensorToolError::NotNtc { colder: show_point(w[0]), warmer: show_point(w[1]) });
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
pub fn beta_from_points(points: &[CurvePoint]) -> Result<Beta, SensorToolError> {
    let [p1, p2] = points else {
        return Err(SensorToolError::PointCount { count: points.len(), expected: "2 for the Beta model" });
    };
    check_points(points)?;
    Beta::from_points(*p1, *p2).map_err(|error| SensorToolError::Fit { points: show_points(points), error })
}

/// The Steinhart–Hart coefficients through three data-sheet points: firmware-lib's
/// [`SteinhartHart::from_points`], after [`check_points`].
pub fn steinhart_hart_from_points(points: &[CurvePoint]) -> Result<SteinhartHart, SensorToolError> {
    let [p1, p2, p3] = points else {
        return Err(SensorToolError::PointCount { count: points.len(), expected: "3 for Steinhart–Hart" });
    };
    check_points(points)?;
    SteinhartHart::from_points(*p1, *p2, *p3).map_err(|error| match error {
        FitError::NotMonotone => {
            let s = sorted_by_temperature(points);
            let betas: Vec<String> =
                s.windows(2).map(|w| format!("{:.0} K", secant_beta_k(w[0], w[1]))).collect();
            SensorToolError::NotMonotone {
                points: show_points(points),
                from_c: s[0].celsius,
                to_c: s[2].celsius,
                betas: betas.join(", "),
            }
        }
        error => SensorToolError::Fit { points: show_points(points), error },
    })
}
