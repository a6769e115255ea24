//! Output units computed from x = ln(I_sig/I_ref), the natural log of the current ratio.
//!
//! | unit | definition | note |
//! |---|---|---|
//! | [`Unit::Nepers`] | `x` | the natural log of the ratio, as for field (amplitude) quantities (ISO 80000-3) |
//! | [`Unit::Decades`] | `x / ln 10` = `log10(ratio)` | |
//! | [`Unit::DbPower`] | `10·log10(ratio)` | when the currents are proportional to power, e.g. photocurrents |
//! | [`Unit::DbAmplitude`] | `20·log10(ratio)` = `x · 20/ln 10` | 1 Np = 8.685889638 dB (ISO 80000-3) |
//! | [`Unit::Absorbance`] | `−log10(ratio)` | ratio = I/I0 (signal = transmitted, reference = incident); 1 AU = 10 % |
//! | [`Unit::TransmittancePercent`] | `100·ratio` | |
//! | [`Unit::Ratio`] | `exp(x)` = `I_sig/I_ref` | |
//!
//! Which dB applies is a property of the measurement, not of the front end: a photodiode's current is
//! proportional to optical power, so optical ratios use [`Unit::DbPower`].

use crate::math::Backend;

/// 1/ln 10.
const INV_LN10: f32 = core::f32::consts::LOG10_E;

/// An output unit for a corrected reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "snake_case", deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Unit {
    /// x itself: ln(I_sig/I_ref).
    Nepers,
    /// log10(I_sig/I_ref).
    Decades,
    /// 10·log10(I_sig/I_ref), for power-like ratios.
    DbPower,
    /// 20·log10(I_sig/I_ref), for amplitude-like ratios.
    DbAmplitude,
    /// −log10(I_sig/I_ref): absorbance in AU with I_sig the transmitted and I_ref the incident intensity.
    Absorbance,
    /// 100·I_sig/I_ref.
    TransmittancePercent,
    /// I_sig/I_ref.
    Ratio,
}

impl Unit {
    /// Every unit, in a fixed order (for tables and CSV columns).
    pub const ALL: [Unit; 7] = [
        Unit::Nepers,
        Unit::Decades,
        Unit::DbPower,
        Unit::DbAmplitude,
        Unit::Absorbance,
        Unit::TransmittancePercent,
        Unit::Ratio,
    ];

    /// A short lower-case name (used as a CSV column name).
    pub const fn name(self) -> &'static str {
        match self {
            Unit::Nepers => "ln_ratio",
            Unit::Decades => "decades",
            Unit::DbPower => "db_power",
            Unit::DbAmplitude => "db_amplitude",
            Unit::Absorbance => "absorbance",
            Unit::TransmittancePercent => "transmittance_pct",
            Unit::Ratio => "linear_ratio",
        }
    }

    /// Parses a name given by [`Unit::name`].
    ///
    /// ```
    /// use logtrim::Unit;
    ///
    /// for unit in Unit::ALL {
    ///     assert_eq!(Unit::from_name(unit.name()), Some(unit));
    /// }
    /// assert_eq!(Unit::from_name("absorbance"), Some(Unit::Absorbance));
    /// assert_eq!(Unit::from_name("Absorbance"), None); // names are exact
    /// ```
    pub fn from_name(name: &str) -> Option<Unit> {
        Unit::ALL.iter().copied().find(|u| u.name() == name)
    }

    /// Converts x = ln(ratio) into this unit with the default backend.
    ///
    /// ```
    /// use logtrim::Unit;
    ///
    /// // ISO 80000-3: 1 Np corresponds to 20/ln 10 = 8.685889638 dB for field quantities.
    /// assert!((Unit::DbAmplitude.from_x(1.0) - 8.685_889_6).abs() < 1e-5);
    /// // A power ratio of 2 is 3.0103 dB (common practice).
    /// assert!((Unit::DbPower.from_x(2f32.ln()) - 3.010_3).abs() < 1e-4);
    /// // 1 % transmittance is 2 AU of absorbance (A = −log10 T; common practice).
    /// let x = 0.01f32.ln();
    /// assert!((Unit::Absorbance.from_x(x) - 2.0).abs() < 1e-5);
    /// assert!((Unit::TransmittancePercent.from_x(x) - 1.0).abs() < 1e-5);
    /// assert!((Unit::Ratio.from_x(x) - 0.01).abs() < 1e-7);
    /// ```
    pub fn from_x(self, x: f32) -> f32 {
        self.from_x_with::<crate::math::Libm>(x)
    }

    /// Converts x = ln(ratio) into this unit with a chosen backend (only the linear units use `exp`).
    pub fn from_x_with<B: Backend>(self, x: f32) -> f32 {
        match self {
            Unit::Nepers => x,
            Unit::Decades => x * INV_LN10,
            Unit::DbPower => 10.0 * INV_LN10 * x,
            Unit::DbAmplitude => 20.0 * INV_LN10 * x,
            Unit::Absorbance => -INV_LN10 * x,
            Unit::TransmittancePercent => 100.0 * B::exp(x),
            Unit::Ratio => B::exp(x),
        }
    }

    /// The derivative of this unit with respect to x at x (f64, for error budgets on the host).
    pub fn derivative_f64(self, x: f64) -> f64 {
        let inv = core::f64::consts::LOG10_E;
        match self {
            Unit::Nepers => 1.0,
            Unit::Decades => inv,
            Unit::DbPower => 10.0 * inv,
            Unit::DbAmplitude => 20.0 * inv,
            Unit::Absorbance => -inv,
            Unit::TransmittancePercent => 100.0 * libm::exp(x),
            Unit::Ratio => libm::exp(x),
        }
    }

    /// Converts x into this unit in f64 (the host's reference).
    pub fn from_x_f64(self, x: f64) -> f64 {
        let inv = core::f64::consts::LOG10_E;
        match self {
            Unit::Nepers => x,
            Unit::Decades => x * inv,
            Unit::DbPower => 10.0 * inv * x,
            Unit::DbAmplitude => 20.0 * inv * x,
            Unit::Absorbance => -inv * x,
            Unit::TransmittancePercent => 100.0 * libm::exp(x),
            Unit::Ratio => libm::exp(x),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use logtrim_checks::within;

    #[test]
    fn one_neper_in_db_iso_80000_3() {
        // ISO 80000-3: 1 Np corresponds to 20/ln 10 = 8.685889638 dB for field quantities.
        assert!(within(f64::from(Unit::DbAmplitude.from_x(1.0)), 8.685_889_638, 1e-6, 1e-7));
    }

    #[test]
    fn absorbance_facts() {
        // Common practice: 1 AU is 10 % transmittance, 2 AU is 1 %.
        let x10 = libm::logf(0.10);
        let x1 = libm::logf(0.01);
        assert!(within(f64::from(Unit::Absorbance.from_x(x10)), 1.0, 1e-6, 1e-6));
        assert!(within(f64::from(Unit::Absorbance.from_x(x1)), 2.0, 1e-6, 1e-6));
        assert!(within(f64::from(Unit::TransmittancePercent.from_x(x10)), 10.0, 1e-5, 1e-6));
        assert!(within(f64::from(Unit::TransmittancePercent.from_x(x1)), 1.0, 1e-6, 1e-6));
    }

    #[test]
    fn db_power_of_a_factor_two() {
        // Common practice: a power ratio of 2 is 3.0103 dB; an amplitude ratio of 2 is 6.0206 dB.
        let x = libm::logf(2.0);
        assert!(within(f64::from(Unit::DbPower.from_x(x)), 3.010_299_957, 1e-6, 1e-6));
        assert!(within(f64::from(Unit::DbAmplitude.from_x(x)), 6.020_599_913, 1e-6, 1e-6));
        #[allow(clippy::approx_constant)] // the published value, on purpose
        let log10_2 = 0.301_029_996;
        assert!(within(f64::from(Unit::Decades.from_x(x)), log10_2, 1e-7, 1e-6));
    }

    #[test]
    fn names_round_trip() {
        for u in Unit::ALL {
            assert_eq!(Unit::from_name(u.name()), Some(u));
        }
        assert_eq!(Unit::from_name("furlongs"), None);
    }
}
