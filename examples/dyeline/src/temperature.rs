//! The front end's temperature, from the digital sensor beside the transistor pair.
//!
//! The sensor (the board's, invented) reports a signed 16-bit two's-complement register in steps of
//! 1/128 °C (7 fraction bits): `0x0C80` = 3200 is 25.000 °C, `0xFAC0` = −1344 is −10.500 °C. Every register
//! value is a temperature; whether it lies in the calibrated range is the calibration's question
//! ([`logtrim::Error::TemperatureOutOfRange`]), not this module's.
//!
//! The integer path wants m°C (i32), the f32 path °C (f32). One step is 7.8125 m°C, so the m°C value is
//! rounded: to the nearest, halves away from zero, which is what the host does with a `temp_c` column
//! (`(t·1000).round()` in `logtrim apply --path fixed`), so both see the same temperature.

/// Fraction bits of the register.
pub const FRAC_BITS: u32 = 7;

/// The register in m°C, rounded to the nearest (halves away from zero): `raw · 1000 / 128 = raw · 125 / 16`.
pub const fn millicelsius(raw: i16) -> i32 {
    // |raw · 125| ≤ 2^15 · 125 < 2^22: no overflow.
    let n = raw as i32 * 125;
    if n >= 0 {
        (n + 8) >> 4
    } else {
        -((-n + 8) >> 4)
    }
}

/// The register in °C, exactly (every register value is an f32 with at most 16 significant bits).
pub fn celsius(raw: i16) -> f32 {
    f32::from(raw) / 128.0
}
