//! Blank records from readings of a blank: the host side of `logtrim blank`.
//!
//! Every reading is corrected by the factory calibration in both of the firmware's paths (f32, and the
//! integer path from the calibration file's default fixed-point tables). The blank's x is the mean of the
//! readings' x in each path — f32 readings averaged in f64 and rounded to f32, Q24 readings averaged in
//! integer arithmetic — so that each path reads its own blank as exactly zero. firmware-lib's
//! [`Blank::new`] checks the record as the MCU would.

use logtrim::field::{self, Blank, BlankParts, RecordInfo};
use logtrim::fixed::FixedCalibration;
use logtrim::Calibration;

use crate::correct::{factory_readings, factory_readings_fixed, mean_q24, Arithmetic};
use crate::data::Readings;

/// A computed blank: the record and what it was computed from.
#[derive(Debug, Clone, PartialEq)]
pub struct BlankOutcome {
    /// The blank (both paths).
    pub blank: Blank,
    /// The record's bytes.
    pub bytes: Vec<u8>,
    /// The mean temperature of the readings, °C.
    pub temp_c: f64,
    /// The rms spread of the f32 path's readings about their mean, Np.
    pub spread_np: f64,
}

/// Why no blank record was made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum BlankError {
    /// The file holds no reading.
    #[error("{path}: no readings of the blank")]
    Empty {
        /// The file.
        path: String,
    },
    /// A reading was refused by the factory calibration.
    #[error("{path}: line {line}: the factory calibration refuses this reading of the blank ({error}); a blank needs every reading")]
    Refused {
        /// The file.
        path: String,
        /// The line of the reading.
        line: u64,
        /// The firmware's verdict.
        error: logtrim::Error,
    },
    /// The two paths' readings of the blank are not one blank, or the record cannot hold it.
    #[error("{path}: {error}")]
    Value {
        /// The file.
        path: String,
        /// firmware-lib's verdict.
        error: field::RecordValueError,
    },
    /// The calibration cannot be fingerprinted (it cannot be stored as an image).
    #[error("the calibration cannot be stored as an image to fingerprint it: {0:?}")]
    Fingerprint(logtrim::image::WriteError),
}

/// Computes the blank of a unit from readings of its blank. `info` gives the record's sequence and
/// time; its `factory` is replaced by the calibration's [fingerprint](field::fingerprint).
pub fn compute(
    cal: &Calibration,
    fixed: &FixedCalibration<'_>,
    readings: &Readings,
    info: RecordInfo,
) -> Result<BlankOutcome, BlankError> {
    let path = readings.path.clone();
    let info = RecordInfo { factory: field::fingerprint(cal).map_err(BlankError::Fingerprint)?, ..info };
    let n = readings.rows.len();
    if n == 0 {
        return Err(BlankError::Empty { path });
    }
    let a = factory_readings(cal, readings, Arithmetic::F32);
    let b = factory_readings_fixed(fixed, readings);
    let (mut xs, mut qs, mut ts) = (Vec::with_capacity(n), Vec::with_capacity(n), Vec::with_capacity(n));
    for ((row, a), b) in readings.rows.iter().zip(a).zip(b) {
        let refused = |error| BlankError::Refused { path: path.clone(), line: row.line, error };
        xs.push(f64::from(a.map_err(refused)?.x));
        qs.push(b.map_err(refused)?);
        ts.push(row.temp_c.map_err(refused)?);
    }
    let nf = n as f64;
    let x_mean = xs.iter().sum::<f64>() / nf;
    let spread_np = (xs.iter().map(|x| (x - x_mean) * (x - x_mean)).sum::<f64>() / nf).sqrt();
    let temp_c = ts.iter().sum::<f64>() / nf;
    let value = |error| BlankError::Value { path: path.clone(), error };
    let blank = Blank::new(BlankParts {
        info,
        x: x_mean as f32,
        x_q24: mean_q24(&qs),
        temp_mc: (temp_c * 1000.0).round() as i32,
        samples: u32::try_from(n).unwrap_or(u32::MAX),
    })
    .map_err(value)?;
    Ok(BlankOutcome { blank, bytes: blank.to_bytes().to_vec(), temp_c, spread_np })
}
