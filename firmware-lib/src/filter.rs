//! Smoothing of corrected readings for displays: a first-order exponential filter in the x domain.
//!
//! [`Ema`] is the discrete first-order lag `y ← y + α·(x − y)` with `α = 1 − e^(−1/τ)` and the time
//! constant `τ` given in samples. With that α a step reaches `1 − e^(−n/τ)` of its height after `n` samples,
//! exactly as a continuous RC lag sampled once per cycle: 63.2 % after τ samples, 95.0 % after 3τ, 99.3 %
//! after 5τ. (A plain `α = 1/τ` is close only for large τ; at τ = 2 it reaches 75 % instead of 63.2 %.)
//!
//! # What it filters, and when it starts again
//!
//! The filter works on x = ln(I_sig/I_ref), not on a display unit: dB and absorbance are linear in x, so
//! smoothing x and then converting is the same as smoothing them directly. For [`crate::Unit::Ratio`] and
//! [`crate::Unit::TransmittancePercent`] smoothing x gives a geometric, not an arithmetic, mean of the ratio.
//!
//! * The first sample after construction or a reset is passed through unchanged: a display shows the
//!   reading at once instead of ramping up from zero.
//! * [`Ema::feed`] takes an `Option`: a cycle that produced no value (a fault, saturation, no calibration)
//!   resets the filter and shows nothing. The first good reading after the fault starts afresh, so a
//!   display never blends readings from before a fault with readings after it.
//! * A non-finite input is refused with [`Error::NonFinite`] and leaves the state alone.

use crate::error::Error;

/// The largest time constant accepted, in samples. Beyond it an f32 state can no longer follow
/// `α·(x − y)` steps to the last digits that matter on a display (α ≈ 1e-4 against an f32 ULP of ~1e-7·|y|).
pub const MAX_TIME_CONSTANT: f32 = 10_000.0;

/// A time constant the filter cannot use: negative, not finite or above [`MAX_TIME_CONSTANT`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct InvalidTimeConstant {
    /// The time constant given, in samples.
    pub samples: f32,
}

impl core::fmt::Display for InvalidTimeConstant {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(f, "time constant {} samples is not in 0..={} samples", self.samples, MAX_TIME_CONSTANT)
    }
}

impl core::error::Error for InvalidTimeConstant {}

/// A first-order exponential filter with its time constant in samples (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Ema {
    tau: f32,
    alpha: f32,
    state: Option<f32>,
}

impl Ema {
    /// A filter of time constant `tau_samples` (0 passes every sample through unchanged).
    pub fn new(tau_samples: f32) -> Result<Ema, InvalidTimeConstant> {
        if !(tau_samples.is_finite() && (0.0..=MAX_TIME_CONSTANT).contains(&tau_samples)) {
            return Err(InvalidTimeConstant { samples: tau_samples });
        }
        // α = 1 − e^(−1/τ), written with expm1 so that a large τ keeps its digits; τ = 0 gives α = 1.
        let alpha = if tau_samples == 0.0 { 1.0 } else { -libm::expm1f(-1.0 / tau_samples) };
        Ok(Ema { tau: tau_samples, alpha, state: None })
    }

    /// The time constant, in samples.
    pub fn time_constant(&self) -> f32 {
        self.tau
    }

    /// The smoothing factor α = 1 − e^(−1/τ).
    pub fn alpha(&self) -> f32 {
        self.alpha
    }

    /// The current output, or `None` before the first sample and after a reset.
    pub fn value(&self) -> Option<f32> {
        self.state
    }

    /// Forgets the history: the next sample is passed through.
    pub fn reset(&mut self) {
        self.state = None;
    }

    /// Adds one sample and returns the new output. A non-finite sample is refused and changes nothing.
    ///
    /// ```
    /// use logtrim::filter::Ema;
    ///
    /// // A step through a first-order lag reaches 1 − e^(−1) = 63.2 % of its height after τ samples and
    /// // 1 − e^(−3) = 95.0 % after 3τ (the RC lag; common practice).
    /// let mut ema = Ema::new(4.0).unwrap();
    /// assert_eq!(ema.update(0.0)?, 0.0); // the first sample passes through
    /// let mut y = 0.0;
    /// for n in 1..=12 {
    ///     y = ema.update(1.0)?;
    ///     if n == 4 {
    ///         assert!((y - (1.0 - (-1.0f32).exp())).abs() < 1e-6);
    ///     }
    /// }
    /// assert!((y - (1.0 - (-3.0f32).exp())).abs() < 1e-6);
    /// // A non-finite sample is refused and leaves the state alone; a cycle without a value resets it.
    /// assert!(ema.update(f32::NAN).is_err());
    /// assert_eq!(ema.value(), Some(y));
    /// assert_eq!(ema.feed(None)?, None);
    /// assert_eq!(ema.feed(Some(2.0))?, Some(2.0));
    /// # Ok::<(), logtrim::Error>(())
    /// ```
    pub fn update(&mut self, x: f32) -> Result<f32, Error> {
        if !x.is_finite() {
            return Err(Error::NonFinite);
        }
        let y = match self.state {
            None => x,
            Some(y) => y + self.alpha * (x - y),
        };
        self.state = Some(y);
        Ok(y)
    }

    /// Adds the outcome of one measurement cycle: `Some(x)` is filtered, `None` (no value this cycle)
    /// resets the filter and gives `None`.
    pub fn feed(&mut self, x: Option<f32>) -> Result<Option<f32>, Error> {
        match x {
            Some(x) => self.update(x).map(Some),
            None => {
                self.reset();
                Ok(None)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Feeds a unit step (after a settled 0) and returns the output after `n` samples of the step.
    fn step_after(f: &mut Ema, n: usize) -> f32 {
        f.update(0.0).unwrap();
        let mut y = 0.0;
        for _ in 0..n {
            y = f.update(1.0).unwrap();
        }
        y
    }

    #[test]
    fn step_response_reaches_63_2_percent_after_tau() {
        // Common practice: a first-order lag reaches 1 − 1/e = 63.2 % of a step after one time constant,
        // 95.0 % after three and 99.3 % after five.
        for tau in [1usize, 2, 5, 10, 50] {
            let mut f = Ema::new(tau as f32).unwrap();
            let y = f64::from(step_after(&mut f, tau));
            assert!((y - (1.0 - (-1.0f64).exp())).abs() < 2e-5, "tau {tau}: {y}");
            let mut f = Ema::new(tau as f32).unwrap();
            let y3 = f64::from(step_after(&mut f, 3 * tau));
            assert!((y3 - 0.950_213).abs() < 5e-5, "tau {tau}: 3τ gave {y3}");
            let mut f = Ema::new(tau as f32).unwrap();
            let y5 = f64::from(step_after(&mut f, 5 * tau));
            assert!((y5 - 0.993_262).abs() < 5e-5, "tau {tau}: 5τ gave {y5}");
        }
    }

    #[test]
    fn zero_time_constant_passes_through() {
        let mut f = Ema::new(0.0).unwrap();
        assert_eq!(f.update(3.0), Ok(3.0));
        assert_eq!(f.update(-7.5), Ok(-7.5));
    }

    #[test]
    fn first_sample_passes_through_and_none_resets() {
        let mut f = Ema::new(10.0).unwrap();
        assert_eq!(f.value(), None);
        assert_eq!(f.feed(Some(2.0)), Ok(Some(2.0)));
        let y = f.feed(Some(4.0)).unwrap().unwrap();
        assert!(y > 2.0 && y < 2.3, "{y}");
        // A cycle without a value resets: the next good reading is shown as it is.
        assert_eq!(f.feed(None), Ok(None));
        assert_eq!(f.value(), None);
        assert_eq!(f.feed(Some(-1.0)), Ok(Some(-1.0)));
    }

    #[test]
    fn bad_inputs_are_refused() {
        for tau in [-1.0, f32::NAN, f32::INFINITY, MAX_TIME_CONSTANT * 2.0] {
            assert!(Ema::new(tau).is_err(), "{tau}");
        }
        assert!(Ema::new(MAX_TIME_CONSTANT).is_ok());
        let mut f = Ema::new(4.0).unwrap();
        f.update(1.0).unwrap();
        assert_eq!(f.update(f32::NAN), Err(Error::NonFinite));
        assert_eq!(f.update(f32::INFINITY), Err(Error::NonFinite));
        assert_eq!(f.value(), Some(1.0), "a refused sample leaves the state alone");
    }

    proptest::proptest! {
        /// On independent random inputs: the output is a convex combination of the inputs, so it never
        /// leaves their range, and a constant input is reproduced exactly.
        #[test]
        fn output_stays_within_the_inputs(
            tau in 0.0f32..2000.0,
            xs in proptest::collection::vec(-40.0f32..40.0, 1..200),
        ) {
            let mut f = Ema::new(tau).unwrap();
            let (mut lo, mut hi) = (f32::INFINITY, f32::NEG_INFINITY);
            for &x in &xs {
                lo = lo.min(x);
                hi = hi.max(x);
                let y = f.update(x).unwrap();
                proptest::prop_assert!(y >= lo - 1e-4 && y <= hi + 1e-4, "{} outside {}..{}", y, lo, hi);
            }
            let c = xs[0];
            let mut g = Ema::new(tau).unwrap();
            for _ in 0..50 {
                proptest::prop_assert_eq!(g.update(c).unwrap(), c);
            }
        }

        /// On independent random time constants: the step response after n samples follows 1 − e^(−n/τ).
        #[test]
        fn step_response_follows_the_exponential(tau in 0.5f32..500.0, n in 1usize..1500) {
            let mut f = Ema::new(tau).unwrap();
            let y = f64::from(step_after(&mut f, n));
            let want = 1.0 - (-(n as f64) / f64::from(tau)).exp();
            proptest::prop_assert!((y - want).abs() < 1e-4 + 2e-6 * n as f64, "{} vs {}", y, want);
        }
    }
}
