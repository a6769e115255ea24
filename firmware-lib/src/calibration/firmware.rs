//! The f32 correction the firmware runs: [`Calibration::correct`] (libm) and
//! [`Calibration::correct_with`] (any [`Backend`]), the same split in two steps ([`Calibration::stage_with`]
//! gives an [`F32Stage`] once per temperature, [`Calibration::correct_staged`] each code), and means of
//! codes ([`Calibration::correct_mean`]).

use super::inverse::Stage;
use super::{Calibration, Reading};
use crate::error::Error;
use crate::math::{Backend, F32Math, Libm, Real};

impl Calibration {
    /// Corrects one reading with the default backend (libm).
    ///
    /// `code` is the log channel's ADC code, `temp_c` the unit's temperature in °C.
    pub fn correct(&self, code: u32, temp_c: f32) -> Result<Reading, Error> {
        self.correct_with::<Libm>(code, temp_c)
    }

    /// Corrects one reading with a chosen f32 backend.
    ///
    /// This is [`Calibration::stage_with`] followed by [`Calibration::correct_staged`]: the errors come in
    /// this order: the code ([`AdcScaling::check_code`](super::AdcScaling::check_code)), then the temperature (non-finite, invalid
    /// calibration, out of range, slope), then the log channel (range, sensitivity).
    pub fn correct_with<B: Backend>(&self, code: u32, temp_c: f32) -> Result<Reading, Error> {
        self.correct_staged(&self.stage_with::<B>(temp_c), code)
    }

    /// The temperature-dependent part of an f32 correction at `temp_c`, computed once and reusable for any
    /// number of log codes at that temperature ([`Calibration::correct_staged`]). A temperature that cannot
    /// be corrected is kept in the stage as its error, reported for each code that passes its own check.
    ///
    /// ```
    /// use logtrim::math::Libm;
    /// use logtrim::Calibration;
    ///
    /// let cal = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
    /// // A burst of codes at one temperature: the temperature's work once, each code after it, every
    /// // result bit for bit the one-call correction's.
    /// let stage = cal.stage_with::<Libm>(37.0);
    /// assert!(stage.error().is_none() && !stage.extrapolated());
    /// for code in [1000, 20000, 32768, 50000, 65000] {
    ///     assert_eq!(cal.correct_staged(&stage, code), cal.correct(code, 37.0));
    /// }
    /// // x at a code is (code − L)/(S·T/T_ref) for a nominal unit: a ratio of 1 at the level shift.
    /// assert_eq!(cal.correct_staged(&stage, 32768)?.x, 0.0);
    /// // A temperature out of range stays in the stage as its error, reported for each valid code.
    /// let hot = cal.stage_with::<Libm>(200.0);
    /// assert_eq!(cal.correct_staged(&hot, 30000).map(|r| r.x), Err(hot.error().unwrap()));
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn stage_with<B: Backend>(&self, temp_c: f32) -> F32Stage<B> {
        F32Stage { inner: self.temperature_stage::<F32Math<B>>(temp_c), backend: core::marker::PhantomData }
    }

    /// The log-channel part of an f32 correction at a stage of this calibration: bit for bit the result
    /// (value or error) of [`Calibration::correct_with`] at the stage's temperature. A stage made by another
    /// calibration gives that calibration's temperature terms (no panic, but a meaningless reading).
    pub fn correct_staged<B: Backend>(&self, stage: &F32Stage<B>, code: u32) -> Result<Reading, Error> {
        self.adc.check_code(code)?;
        let st = stage.inner.as_ref().map_err(|e| *e)?;
        let p = self.evaluate_staged::<F32Math<B>>(f32::of_u32(code), st)?;
        Ok(Reading { x: p.x, temperature_extrapolated: p.extrapolated })
    }

    /// Corrects a fractional code, such as the mean of a burst of readings, with the default backend.
    ///
    /// The code is checked as both of its neighbouring whole codes would be (a mean that touches a rail or
    /// the margin is saturated), then evaluated without rounding. An f32 holds 24 bits exactly, so a
    /// 16-bit converter's mean keeps 8 fractional bits.
    ///
    /// ```
    /// use logtrim::Calibration;
    ///
    /// let cal = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
    /// // The mean of 30000 and 30001 lies half a code from each: its x is the mean of theirs (the nominal
    /// // equation is linear in the code).
    /// let (lo, hi) = (cal.correct(30000, 25.0)?.x, cal.correct(30001, 25.0)?.x);
    /// let mean = cal.correct_mean(30000.5, 25.0)?.x;
    /// assert!((mean - (lo + hi) / 2.0).abs() < 1e-6);
    /// // A mean that touches the top rail is saturated, as that rail's code is.
    /// assert!(cal.correct_mean(65534.5, 25.0).is_err());
    /// assert!(cal.correct_mean(f32::NAN, 25.0).is_err());
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn correct_mean(&self, code: f32, temp_c: f32) -> Result<Reading, Error> {
        self.correct_mean_with::<Libm>(code, temp_c)
    }

    /// [`Calibration::correct_mean`] with a chosen backend.
    pub fn correct_mean_with<B: Backend>(&self, code: f32, temp_c: f32) -> Result<Reading, Error> {
        if !code.is_finite() {
            return Err(Error::NonFinite);
        }
        let max = self.adc.max_code()?;
        let (lo, hi) = (libm::floorf(code), libm::ceilf(code));
        let as_code = |v: f32| {
            if v < 0.0 {
                None
            } else if v > max as f32 {
                Some(u32::MAX)
            } else {
                Some(v as u32)
            }
        };
        match (as_code(lo), as_code(hi)) {
            (Some(a), Some(b)) => {
                self.adc.check_code(a)?;
                self.adc.check_code(b)?;
            }
            _ => return Err(Error::CodeOutOfAdcRange { code: 0, max }),
        }
        let p = self.evaluate_real::<F32Math<B>>(code, temp_c)?;
        Ok(Reading { x: p.x, temperature_extrapolated: p.extrapolated })
    }
}

/// The f32 temperature stage: the temperature-dependent part of an f32 correction with backend `B`, made
/// by [`Calibration::stage_with`] for [`Calibration::correct_staged`]. It holds the temperature's checks
/// and the terms of the inverse there (offset and slope in codes, the bulk bend over the slope, β, the
/// residual collapsed over τ), or the temperature's error.
pub struct F32Stage<B> {
    inner: Result<Stage<f32>, Error>,
    backend: core::marker::PhantomData<fn() -> B>,
}

impl<B> F32Stage<B> {
    /// The temperature's error, if it cannot be corrected (reported only for codes that pass their check).
    pub fn error(&self) -> Option<Error> {
        self.inner.err()
    }

    /// Whether the temperature lies outside the calibrated range, within the allowed extrapolation.
    pub fn extrapolated(&self) -> bool {
        matches!(&self.inner, Ok(st) if st.extrapolated)
    }
}

impl<B> Clone for F32Stage<B> {
    fn clone(&self) -> Self {
        *self
    }
}

impl<B> Copy for F32Stage<B> {}

impl<B> core::fmt::Debug for F32Stage<B> {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.debug_struct("F32Stage").field("inner", &self.inner).finish()
    }
}

impl<B> PartialEq for F32Stage<B> {
    fn eq(&self, other: &Self) -> bool {
        self.inner == other.inner
    }
}

#[cfg(feature = "defmt")]
impl<B> defmt::Format for F32Stage<B> {
    fn format(&self, f: defmt::Formatter<'_>) {
        match &self.inner {
            Ok(st) => defmt::write!(
                f,
                "F32Stage {{ extrapolated: {}, offset: {}, slope: {} }}",
                st.extrapolated,
                st.terms.offset,
                st.terms.slope
            ),
            Err(e) => defmt::write!(f, "F32Stage {{ error: {} }}", e),
        }
    }
}
