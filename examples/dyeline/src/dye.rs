//! The dye's concentration from the absorbance, by the Beer–Lambert law `A = ε·l·c`.
//!
//! The figures are invented for this scenario (the Quillmere line's teal dye and its flow cell):
//!
//! | quantity | value | constant |
//! |---|---|---|
//! | molar absorptivity ε at the photometer's wavelength | 21 500 L·mol⁻¹·cm⁻¹ | [`MOLAR_ABSORPTIVITY`] |
//! | optical path l of the flow cell | 4.000 mm = 0.4 cm | [`PATH_UM`] |
//! | molar mass M of the dye | 612.4 g/mol | [`MOLAR_MASS_MG_PER_MOL`] |
//!
//! The photometer measures the sample against the reference beam, so what it reads as absorbance holds the
//! cell windows and the beams' imbalance as well as the dye. Clean process water in the cell reads the
//! **blank** `A₀`, stored at commissioning; the dye's absorbance is `A − A₀`, and
//!
//! ```text
//! c [mol/L] = (A − A₀) / (ε · l)
//! c [mg/L]  = (A − A₀) · M / (ε · l) = (A − A₀) · K,   K = 612 400 mg/mol / (21 500 · 0.4) L/mol
//!                                                        = 3062/43 mg/L per AU ≈ 71.2093 mg/L per AU
//! ```
//!
//! A sample clearer than the blank gives a small negative concentration. It is reported as it is, not
//! clamped to zero: clamping would bias the mean of readings near zero, and a strongly negative value is a
//! sign that the blank is stale.
//!
//! # Integer form
//!
//! | quantity | type | format |
//! |---|---|---|
//! | absorbance and blank (from `FixedReading::value(Unit::Absorbance)`) | i64 | Q24 AU |
//! | K ([`MG_PER_L_PER_AU_Q16`]) | i64 | Q16 mg/L per AU, `round(3062/43 · 2^16)` = 4 666 773 |
//! | concentration ([`concentration_q16`]) | i32 | Q16 mg/L (1 LSB = 2⁻¹⁶ mg/L ≈ 0.015 µg/L, range ±32 768 mg/L) |
//!
//! `c_q16 = (A_q24 − A₀_q24) · K_q16 / 2^24`, rounded to the nearest, halves away from zero. The product is
//! checked: a difference or a product that does not fit, or a result outside i32, is
//! [`DyeError::OutOfRange`], never a wrapped or clamped value. K rounded to Q16 is within 2^-17 mg/L per AU
//! of its exact value (7·10⁻⁸ relative), far below the calibration's own error.

#![deny(clippy::float_arithmetic)]

/// Molar absorptivity ε of the dye at the photometer's wavelength, L·mol⁻¹·cm⁻¹ (invented).
pub const MOLAR_ABSORPTIVITY: u32 = 21_500;
/// Optical path length l of the flow cell, µm (invented: 4 mm).
pub const PATH_UM: u32 = 4_000;
/// Molar mass M of the dye, mg/mol (invented: 612.4 g/mol).
pub const MOLAR_MASS_MG_PER_MOL: u32 = 612_400;

/// µm per cm.
const UM_PER_CM: u64 = 10_000;

/// K = M / (ε·l) in mg/L per AU, Q16: `round(M · 10⁴ · 2^16 / (ε · l_µm))`, computed from the constants.
pub const MG_PER_L_PER_AU_Q16: i64 = {
    let num = (MOLAR_MASS_MG_PER_MOL as u64) * UM_PER_CM * (1 << 16);
    let den = (MOLAR_ABSORPTIVITY as u64) * (PATH_UM as u64);
    ((num + den / 2) / den) as i64
};

/// Fraction bits of [`concentration_q16`]'s result.
pub const CONCENTRATION_FRAC: u32 = 16;

/// Why an absorbance has no concentration.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum DyeError {
    /// The concentration does not fit the output's format (integer path: Q16 mg/L in an i32).
    OutOfRange,
    /// The absorbance or the blank is NaN or infinite (f32 path).
    NonFinite,
}

impl core::fmt::Display for DyeError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            DyeError::OutOfRange => f.write_str("concentration out of the range of Q16 mg/L (±32768 mg/L)"),
            DyeError::NonFinite => f.write_str("absorbance or blank is NaN or infinite"),
        }
    }
}

impl core::error::Error for DyeError {}

/// `v / 2^s`, rounded to the nearest, halves away from zero (`s` < 63).
const fn div_pow2_round(v: i64, s: u32) -> i64 {
    let half = 1i64 << (s - 1);
    if v >= 0 {
        (v + half) >> s
    } else {
        -((half - v) >> s)
    }
}

/// The dye's concentration in Q16 mg/L from the sample's absorbance and the blank, both Q24 AU.
pub const fn concentration_q16(absorbance_q24: i64, blank_q24: i64) -> Result<i32, DyeError> {
    let Some(net) = absorbance_q24.checked_sub(blank_q24) else {
        return Err(DyeError::OutOfRange);
    };
    // |net · K| < 2^62 keeps the rounding's `half − v` and `v + half` in range too.
    let Some(p) = net.checked_mul(MG_PER_L_PER_AU_Q16) else {
        return Err(DyeError::OutOfRange);
    };
    if p.unsigned_abs() >= 1 << 62 {
        return Err(DyeError::OutOfRange);
    }
    let c = div_pow2_round(p, 24);
    if c < i32::MIN as i64 || c > i32::MAX as i64 {
        return Err(DyeError::OutOfRange);
    }
    Ok(c as i32)
}

/// K = M / (ε·l) in mg/L per AU, f32, from the same constants (the quotient of two exact f64 values,
/// rounded to f32).
#[allow(clippy::float_arithmetic)]
pub const MG_PER_L_PER_AU: f32 =
    ((MOLAR_MASS_MG_PER_MOL as f64 * UM_PER_CM as f64) / (MOLAR_ABSORPTIVITY as f64 * PATH_UM as f64)) as f32;

/// The dye's concentration in mg/L from the sample's absorbance and the blank, both AU (f32 path).
#[allow(clippy::float_arithmetic)]
pub fn concentration_mg_per_l(absorbance: f32, blank: f32) -> Result<f32, DyeError> {
    let c = (absorbance - blank) * MG_PER_L_PER_AU;
    if c.is_finite() {
        Ok(c)
    } else {
        Err(DyeError::NonFinite)
    }
}
