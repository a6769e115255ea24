//! Hand-made calibrations shared by the integration tests (invented values; the crate's unit tests have
//! the same unit in `src/test_units.rs`).

use logtrim::calibration::{BiasTerm, Calibration, Series, TemperatureRange, XRange};

/// A 16-bit unit calibrated over −20…85 °C with a strong low-end (bias-current) bend, a visible high-end
/// (bulk-resistance) bend, a compensating pole and a bias term on the reference input of `reference` codes;
/// no residual.
pub fn bent(reference: f32) -> Calibration {
    let mut c = Calibration::nominal(16, 32768.0, 2400.0, 25.0);
    c.adc.rail_margin = 16;
    c.temperature = TemperatureRange { min_c: -20.0, max_c: 85.0, extrapolation_k: 5.0 };
    c.x_range = XRange { min: -9.0, max: 4.0, min_sensitivity: 0.05 };
    c.model.t_center_c = 32.5;
    c.model.t_half_span_k = 52.5;
    c.model.pole = -0.12;
    c.model.offset = Series::from_slice(&[120.0, 35.0, -4.0]).unwrap_or(Series::ZERO);
    c.model.slope = Series::from_slice(&[1900.0, 40.0, 3.0]).unwrap_or(Series::ZERO);
    c.model.bulk = Series::from_slice(&[6.0, 0.3]).unwrap_or(Series::ZERO);
    c.model.bias = BiasTerm { enabled: true, ln_beta0: -10.5, ln_beta1: 3.6, reference };
    c
}
