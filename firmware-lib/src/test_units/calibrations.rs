//! The hand-made calibrations of invented front ends that every crate's tests share (one home: the
//! firmware's unit tests declare this file as `test_units::calibrations`; the integration tests of
//! firmware-lib, host-tool and its CLI include it by `#[path]` from their `common` module, which imports
//! the names below from `logtrim`).
//!
//! They stand in for the simulator's presets: 16-bit ADC, 2000–6000 codes per neper, a strong low-end bend
//! when hot (bias current doubling about every 10 K, common practice), a visible high-end bend (bulk
//! resistance), offset drift, and a small fitted residual.
#![allow(dead_code)]

use super::{BiasTerm, Calibration, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL};

/// A 16-bit unit of `Calibration::nominal` (level shift in codes, slope in codes per neper, reference °C)
/// with its rail margin, its calibrated temperature range (°C from, to, K of extrapolation) and its x
/// range (Np from, to, minimum sensitivity).
pub fn unit(nominal: [f32; 3], rail_margin: u32, temperature: [f32; 3], x: [f32; 3]) -> Calibration {
    let mut c = Calibration::nominal(16, nominal[0], nominal[1], nominal[2]);
    c.adc.rail_margin = rail_margin;
    let [min_c, max_c, extrapolation_k] = temperature;
    c.temperature = TemperatureRange { min_c, max_c, extrapolation_k };
    let [min, max, min_sensitivity] = x;
    c.x_range = XRange { min, max, min_sensitivity };
    c
}

/// A series of the coefficients `c` (none past the sixth).
pub fn series(c: &[f32]) -> Series {
    Series::from_slice(c).unwrap_or(Series::ZERO)
}

/// Uncompensated (slope ∝ T), −20…85 °C with 5 K extrapolation, strong hot bias bend that the sensitivity
/// limit cuts into at the hot end, bulk bend at the top.
pub fn hard_uncompensated() -> Calibration {
    let mut c = unit([44000.0, 5200.0, 25.0], 16, [-20.0, 85.0, 5.0], [-6.5, 3.0, 0.05]);
    c.model.t_center_c = 32.5;
    c.model.t_half_span_k = 52.5;
    c.model.pole = 0.0;
    c.model.offset = series(&[150.0, 60.0, -8.0]);
    c.model.slope = series(&[5200.0, 30.0, 6.0]);
    c.model.bulk = series(&[14.0, 1.5]);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -7.2, ln_beta1: 3.6, reference: -3.0 };
    c.model.residual = Residual { nx: 3, nt: 2, x_center: -1.75, x_half_span: 4.75, ..Residual::OFF };
    c.model.residual.coeffs[0] = 0.002;
    c.model.residual.coeffs[1] = -0.001;
    c.model.residual.coeffs[4] = 0.003;
    c.model.residual.coeffs[8] = -0.0015;
    c
}

/// Compensated (a +3400 ppm/K resistor in the gain divider cancels most of the kT/q drift), −20…85 °C,
/// the same strong bias bend.
pub fn hard_compensated() -> Calibration {
    let mut c = hard_uncompensated();
    // T_K/T_ref over τ: 1 + τ·52.5/305.65 ≈ 1 + 0.172τ; the pole takes 85 % of it.
    c.model.pole = 0.146;
    c.model.slope = series(&[5600.0, 25.0, -4.0]);
    c.adc.level_shift_code = 42000.0;
    c
}

/// Compensated, 0…70 °C with 3 K extrapolation, a milder bias bend, 6000 codes per neper.
pub fn mild_compensated() -> Calibration {
    let mut c = unit([41000.0, 6000.0, 25.0], 8, [0.0, 70.0, 3.0], [-6.0, 3.5, 0.1]);
    c.model.t_center_c = 35.0;
    c.model.t_half_span_k = 35.0;
    c.model.pole = 0.10;
    c.model.offset = series(&[-80.0, 25.0]);
    c.model.slope = series(&[6000.0, 12.0]);
    c.model.bulk = series(&[9.0, 0.5]);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -9.0, ln_beta1: 2.4, reference: 0.0 };
    c
}

/// An ideal unit: no bias term, no bends (the plain path through the tables).
pub fn ideal() -> Calibration {
    unit([32768.0, 5000.0, 25.0], 4, [-10.0, 60.0, 0.0], [-6.0, 6.0, 0.0])
}

/// A calibration with bends at both ends (the shape of a fitted unit), over −20…85 °C: every term of the
/// model but the residual.
pub fn fitted_shape() -> Calibration {
    let mut c = Calibration::nominal(16, 30000.0, 3600.0, 32.5);
    c.temperature.min_c = -20.0;
    c.temperature.max_c = 85.0;
    c.x_range.min = -6.9;
    c.x_range.max = 4.6;
    c.x_range.min_sensitivity = 0.1;
    c.adc.rail_margin = 8;
    c.model.t_half_span_k = 52.5;
    c.model.pole = -0.1;
    c.model.offset = series(&[150.0, 40.0, -6.0]);
    c.model.slope = series(&[3500.0, 25.0]);
    c.model.bulk = series(&[12.0]);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -8.5, ln_beta1: 3.6, reference: -3.5 };
    c
}

/// A gas detector's reference-channel unit: 2100 codes per neper, −10…60 °C with 3 K extrapolation, a bias
/// bend, no bulk bend.
pub fn gas_reference() -> Calibration {
    let mut c = unit([32768.0, 2100.0, 25.0], 12, [-10.0, 60.0, 3.0], [-7.0, 3.0, 0.1]);
    c.model.t_center_c = 25.0;
    c.model.t_half_span_k = 40.0;
    c.model.offset = series(&[80.0, 12.5]);
    c.model.slope = series(&[2000.0, 25.0]);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -11.0, ln_beta1: 2.8, reference: 0.0 };
    c
}

/// A 16-bit unit calibrated over −20…85 °C with a strong low-end (bias-current) bend, a visible high-end
/// (bulk-resistance) bend, a compensating pole and a bias term on the reference input of `reference` codes;
/// no residual.
pub fn bent(reference: f32) -> Calibration {
    let mut c = unit([32768.0, 2400.0, 25.0], 16, [-20.0, 85.0, 5.0], [-9.0, 4.0, 0.05]);
    c.model.t_center_c = 32.5;
    c.model.t_half_span_k = 52.5;
    c.model.pole = -0.12;
    c.model.offset = Series::from_slice(&[120.0, 35.0, -4.0]).unwrap_or(Series::ZERO);
    c.model.slope = Series::from_slice(&[1900.0, 40.0, 3.0]).unwrap_or(Series::ZERO);
    c.model.bulk = Series::from_slice(&[6.0, 0.3]).unwrap_or(Series::ZERO);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -10.5, ln_beta1: 3.6, reference };
    c
}

/// [`bent`] with a reference term of −2.5 codes and a small residual: every model term in use.
pub fn hard() -> Calibration {
    let mut c = bent(-2.5);
    let mut r = Residual::OFF;
    r.nx = 3;
    r.nt = 2;
    r.x_center = -2.5;
    r.x_half_span = 6.5;
    r.coeffs[0] = 1e-3;
    r.coeffs[1] = -2e-4;
    r.coeffs[MAX_RESIDUAL] = 5e-4;
    r.coeffs[2 * MAX_RESIDUAL + 1] = 7e-5;
    c.model.residual = r;
    c
}
