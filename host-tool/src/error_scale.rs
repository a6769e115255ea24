//! An error in x = ln(I_sig/I_ref) in the units people read it in: nepers, millinepers, dB of a power ratio
//! (10·log10) or of an amplitude ratio (20·log10), per cent of the ratio, and milli-absorbance units (an
//! absorbance product's unit: A = −log10(I/I0), so an error of e Np in x is −e/ln 10 AU). The host's one place for
//! these conversions: every report, chart and budget shows its errors through it.
//!
//! An error `e` in x is a ratio `e^e` between the reading and the truth, so its dB are firmware-lib's own
//! conversion of it ([`Unit::DbPower`], [`Unit::DbAmplitude`]: exact, since those units are linear in x), and
//! its per cent of the ratio `100·(e^e − 1)`.

use logtrim::Unit;

/// The dB of a power-like ratio (10·log10) of an error in x, Np.
pub fn db_power(np: f64) -> f64 {
    Unit::DbPower.from_x_f64(np)
}

/// The dB of an amplitude-like ratio (20·log10) of an error in x, Np.
pub fn db_amplitude(np: f64) -> f64 {
    Unit::DbAmplitude.from_x_f64(np)
}

/// The per cent of the ratio of an error in x, Np: `100·(e^np − 1)`.
pub fn pct_of_ratio(np: f64) -> f64 {
    100.0 * np.exp_m1()
}

/// How an error in x is shown.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ErrorScale {
    /// Nepers.
    Np,
    /// Millinepers.
    #[default]
    MilliNp,
    /// Decibels for power-like ratios, 10·log10.
    DbPower,
    /// Decibels for amplitude-like ratios, 20·log10.
    DbAmplitude,
    /// Per cent of the ratio: `100·(e^error − 1)`.
    PercentOfRatio,
    /// Milli-absorbance units, mAU: 1000 × firmware-lib's [`Unit::Absorbance`] of the error (−1000·e/ln 10;
    /// a reading whose x is high by e reads an absorbance low by that much).
    MilliAbsorbance,
}

impl ErrorScale {
    /// Every scale, in the order of [`ErrorScale::name`]'s documentation.
    pub const ALL: [ErrorScale; 6] = [
        ErrorScale::Np,
        ErrorScale::MilliNp,
        ErrorScale::DbPower,
        ErrorScale::DbAmplitude,
        ErrorScale::PercentOfRatio,
        ErrorScale::MilliAbsorbance,
    ];

    /// The short name: `np`, `mnp`, `db10`, `db20`, `pct`, `mau`.
    pub fn name(self) -> &'static str {
        match self {
            ErrorScale::Np => "np",
            ErrorScale::MilliNp => "mnp",
            ErrorScale::DbPower => "db10",
            ErrorScale::DbAmplitude => "db20",
            ErrorScale::PercentOfRatio => "pct",
            ErrorScale::MilliAbsorbance => "mau",
        }
    }

    /// Parses a name given by [`ErrorScale::name`] (any case).
    pub fn from_name(s: &str) -> Option<ErrorScale> {
        ErrorScale::ALL.into_iter().find(|u| u.name().eq_ignore_ascii_case(s))
    }

    /// The unit as written on an axis.
    pub fn label(self) -> &'static str {
        match self {
            ErrorScale::Np => "Np",
            ErrorScale::MilliNp => "mNp",
            ErrorScale::DbPower => "dB, 10·log10",
            ErrorScale::DbAmplitude => "dB, 20·log10",
            ErrorScale::PercentOfRatio => "% of ratio",
            ErrorScale::MilliAbsorbance => "mAU",
        }
    }

    /// An error in x (nepers) on this scale.
    pub fn of_np(self, e: f64) -> f64 {
        match self {
            ErrorScale::Np => e,
            ErrorScale::MilliNp => 1e3 * e,
            ErrorScale::DbPower => db_power(e),
            ErrorScale::DbAmplitude => db_amplitude(e),
            ErrorScale::PercentOfRatio => pct_of_ratio(e),
            ErrorScale::MilliAbsorbance => 1e3 * Unit::Absorbance.from_x_f64(e),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nepers_in_db_and_percent() {
        // ISO 80000-3: 1 Np = 20/ln 10 dB = 8.685889638 dB for amplitude ratios; half that for power.
        assert!((ErrorScale::DbAmplitude.of_np(1.0) - 8.685_889_638).abs() < 1e-9);
        assert!((ErrorScale::DbPower.of_np(1.0) - 4.342_944_819).abs() < 1e-9);
        // A power ratio of 2 is 3.0103 dB (common practice): an error of ln 2 Np.
        assert!((db_power(2f64.ln()) - 3.010_299_957).abs() < 1e-9);
        // A ratio error of e^0.01 − 1 = 1.005017 % (exp from std, an independent reference library).
        assert!((ErrorScale::PercentOfRatio.of_np(0.01) - 100.0 * (0.01f64.exp() - 1.0)).abs() < 1e-12);
        assert_eq!(ErrorScale::MilliNp.of_np(0.25), 250.0);
        // A transmittance of 10 % is 1 AU (the definition A = −log10 T): an error of ln 0.1 Np in x is
        // +1000 mAU; one of 1 mNp is −log10(e) mAU (std's constant, an independent reference).
        assert!((ErrorScale::MilliAbsorbance.of_np(0.1f64.ln()) - 1000.0).abs() < 1e-9);
        assert!((ErrorScale::MilliAbsorbance.of_np(1e-3) + std::f64::consts::LOG10_E).abs() < 1e-9);
        for u in ErrorScale::ALL {
            assert_eq!(ErrorScale::from_name(u.name()), Some(u));
            assert_eq!(ErrorScale::from_name(&u.name().to_uppercase()), Some(u));
        }
        assert_eq!(ErrorScale::from_name("furlongs"), None);
    }
}
