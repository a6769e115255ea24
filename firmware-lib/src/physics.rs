//! Physical constants (SI 2019, exact) and the thermal voltage kT/q.

/// Boltzmann constant k in J/K (exact since the 2019 SI redefinition).
pub const BOLTZMANN: f64 = 1.380_649e-23;
/// Elementary charge e in C (exact since the 2019 SI redefinition).
pub const ELEMENTARY_CHARGE: f64 = 1.602_176_634e-19;
/// k/e in V/K, computed from the two exact constants.
pub const K_OVER_Q: f64 = BOLTZMANN / ELEMENTARY_CHARGE;
/// Offset between the Celsius and the Kelvin scale.
pub const ZERO_CELSIUS_K: f64 = 273.15;
/// ln 10, for decade conversions.
pub const LN_10: f64 = core::f64::consts::LN_10;

/// Thermal voltage kT/q in volts at an absolute temperature in kelvin (f64).
///
/// ```
/// use logtrim::physics::{thermal_voltage, thermal_voltage_celsius_f32, LN_10};
///
/// // kT/q = 25.852 mV at 300 K (CODATA 2018, from the exact SI 2019 values of k and e).
/// assert!((thermal_voltage(300.0) * 1e3 - 25.852).abs() < 5e-4);
/// // The same at 25 °C in f32, as firmware computes it: 25.693 mV (CODATA 2018).
/// assert!((thermal_voltage_celsius_f32(25.0) * 1e3 - 25.693).abs() < 1e-3);
/// // Per decade of current ratio: ln 10 · kT/q = 59.16 mV at 25 °C (the Nernst slope; common practice).
/// assert!((LN_10 * thermal_voltage(298.15) * 1e3 - 59.16).abs() < 5e-3);
/// ```
pub fn thermal_voltage(kelvin: f64) -> f64 {
    K_OVER_Q * kelvin
}

/// Thermal voltage kT/q in volts at a temperature in °C (f32, for firmware use).
pub fn thermal_voltage_celsius_f32(celsius: f32) -> f32 {
    (K_OVER_Q as f32) * (celsius + ZERO_CELSIUS_K as f32)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn k_over_q_from_exact_constants() {
        // SI Brochure 9th ed. (2019): k/e = 8.617333262e-5 V/K.
        assert!((K_OVER_Q - 8.617_333_262e-5).abs() < 1e-14);
    }

    #[test]
    fn thermal_voltage_codata_2018() {
        // CODATA 2018: kT/q = 25.852 mV at 300 K and 25.693 mV at 298.15 K.
        assert!((thermal_voltage(300.0) * 1e3 - 25.852).abs() < 0.0005);
        assert!((thermal_voltage(298.15) * 1e3 - 25.693).abs() < 0.0005);
        assert!((thermal_voltage_celsius_f32(25.0) * 1e3 - 25.693).abs() < 0.001);
    }

    #[test]
    fn decade_slope_at_25c() {
        // ln 10 · kT/q at 25 °C = 59.16 mV per decade (the Nernst slope; common practice).
        let mv = LN_10 * thermal_voltage(298.15) * 1e3;
        assert!((mv - 59.16).abs() < 0.005, "{mv}");
    }

    #[test]
    fn drift_is_about_a_third_percent_per_kelvin() {
        // kT/q drifts +1/T: +0.335 %/K at 25 °C (common practice).
        let d = (thermal_voltage(299.15) - thermal_voltage(298.15)) / thermal_voltage(298.15);
        assert!((d * 100.0 - 0.335).abs() < 0.001);
    }
}
