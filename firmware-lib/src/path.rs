//! The two correction paths behind one trait. The f32 [`Calibration`] and the integer [`FixedCalibration`]
//! both correct a log code in two stages: the temperature's part once ([`CorrectionPath::stage`]), then
//! each code at it ([`CorrectionPath::correct_staged`]). Code that serves either path, such as a bank of
//! channels sharing one temperature ([`crate::field::Bank`]), is written once, generic over
//! [`CorrectionPath`], and gives each path's results bit for bit.
//!
//! (The measurement cycle's `hal::Corrector`, feature `hal`, abstracts the same two paths for one corrected
//! mean of codes per cycle; this trait is the staged form, available without the feature.)

use core::fmt::Debug;

use crate::calibration::{Calibration, F32Stage, Reading};
use crate::error::Error;
use crate::fixed::{FixedCalibration, FixedReading, FixedStage};
use crate::math::Libm;

/// A correction path: its reading, its temperature, its stage, and the two steps.
///
/// ```
/// use logtrim::path::CorrectionPath;
/// use logtrim::Calibration;
///
/// /// Every code of a burst at one temperature: the temperature's work once, on either path.
/// fn burst<P: CorrectionPath, const N: usize>(p: &P, t: P::Temperature, codes: [u32; N])
///     -> [Result<P::Reading, logtrim::Error>; N] {
///     let stage = p.stage(t);
///     codes.map(|code| p.correct_staged(&stage, code))
/// }
///
/// let cal = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
/// CorrectionPath::validate(&cal)?;
/// let readings = burst(&cal, 30.0, [10_000, 32_768, 65_535]);
/// assert_eq!(readings[0], cal.correct(10_000, 30.0));
/// assert_eq!(readings[1].map(|r| r.x), Ok(0.0)); // the level shift: a ratio of exactly 1
/// assert!(readings[2].is_err()); // the top rail
/// # Ok::<(), logtrim::Error>(())
/// ```
pub trait CorrectionPath {
    /// What a correction gives: [`Reading`] (f32) or [`FixedReading`] (Q24).
    type Reading: Copy + PartialEq + Debug;
    /// How the path takes a temperature: °C as f32, or θ (m°C · 2^10) as i32.
    type Temperature: Copy + PartialEq + Debug;
    /// The temperature's part of a correction, or why the temperature cannot be corrected.
    type Stage: Copy + PartialEq + Debug;

    /// The full check of the calibration.
    fn validate(&self) -> Result<(), Error>;

    /// The temperature's part of every correction at `t`, computed once.
    fn stage(&self, t: Self::Temperature) -> Self::Stage;

    /// The correction of `code` at a stage of this calibration: bit for bit the path's one-call correction
    /// at the stage's temperature. Where both the code and the temperature are refused, the f32 path
    /// reports the code's error (as [`Calibration::correct`]), the fixed path the temperature's.
    fn correct_staged(&self, stage: &Self::Stage, code: u32) -> Result<Self::Reading, Error>;
}

/// The f32 path with the default backend: [`Calibration::stage_with`] and [`Calibration::correct_staged`]
/// (together [`Calibration::correct`]: the code's check first, then the temperature's error, if any).
impl CorrectionPath for Calibration {
    type Reading = Reading;
    type Temperature = f32;
    type Stage = F32Stage<Libm>;

    fn validate(&self) -> Result<(), Error> {
        Calibration::validate(self)
    }

    fn stage(&self, temp_c: f32) -> F32Stage<Libm> {
        self.stage_with::<Libm>(temp_c)
    }

    fn correct_staged(&self, stage: &F32Stage<Libm>, code: u32) -> Result<Reading, Error> {
        Calibration::correct_staged(self, stage, code)
    }
}

/// The fixed path: [`FixedCalibration::stage_theta`] and [`FixedCalibration::correct_staged`]. A temperature
/// the calibration refuses is reported before the code's own check.
impl CorrectionPath for FixedCalibration<'_> {
    type Reading = FixedReading;
    type Temperature = i32;
    type Stage = Result<FixedStage, Error>;

    fn validate(&self) -> Result<(), Error> {
        FixedCalibration::validate(self)
    }

    fn stage(&self, theta: i32) -> Result<FixedStage, Error> {
        self.stage_theta(i64::from(theta))
    }

    fn correct_staged(&self, stage: &Result<FixedStage, Error>, code: u32) -> Result<FixedReading, Error> {
        FixedCalibration::correct_staged(self, stage.as_ref().map_err(|e| *e)?, code)
    }
}
