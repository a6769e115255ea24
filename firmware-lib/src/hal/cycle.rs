//! The measurement cycle: settle, oversample the log channel, read the temperature, correct, and report a
//! value in the configured unit with status flags ([`Cycle`], [`Measurement`], [`Status`]).
//!
//! # One cycle, in order
//!
//! 1. Wait [`CycleConfig::settle_us`] through the board's [`DelayNs`] (skipped when 0).
//! 2. Read the log channel: [`Oversampling::discard`] reads thrown away, then [`Oversampling::samples`]
//!    kept, [`Oversampling::interval_us`] apart. A converter error ends the burst at once.
//! 3. Read the temperature channel the same way and convert every sample to °C.
//! 4. Reject outliers in each burst ([`Reject`]) and reduce it: the log channel to a [`MeanCode`], the
//!    temperature to one value in °C.
//! 5. Correct the mean code at that temperature with the installed [`Corrector`], and convert x to the
//!    configured [`Unit`] ([`Corrector::correct_in`]: in f32 for [`crate::Calibration`], in integers for
//!    [`crate::fixed::FixedCalibration`], which also reports the integer result,
//!    [`Measurement::fixed`]).
//!
//! # Codes are averaged first, then corrected once
//!
//! The cycle corrects the mean of the kept codes; it does not correct every sample and average the
//! results. The correction is non-linear, so the two differ, and the reasons for this order are:
//!
//! * **Noise.** What oversampling fights — converter, reference and amplifier noise — adds to the code.
//!   The mean code is the unbiased estimate of the noise-free code, and the correction of it is the
//!   consistent estimate of x. Averaging corrected samples averages a curved function of noisy codes:
//!   where the correction bends (the bias-current end, the bulk-resistance end) `mean(f(code)) ≠
//!   f(mean(code))`, a bias of about `f″·σ²/2` that grows with the noise (`tests/hal_cycle.rs` measures it).
//! * **The median does not care.** At one temperature the correction is monotone in the code, so the
//!   median of corrected samples *is* the correction of the median code: for [`Reject::Median`] the order is
//!   moot.
//! * **A signal that changes within the burst** (a chopped source, a bubble in a flow cell, a hand in the
//!   beam). Over most of the range the code is linear in x, so both orders give the mean of x, which is the
//!   *geometric* mean of the ratio; they differ only where a burst straddles a bend. Neither order gives the
//!   arithmetic mean of the ratio. A signal that moves within one burst calls for a shorter burst, the
//!   median to drop the transient, and the display filter ([`crate::filter::Ema`]) across cycles.
//! * **Cost.** One correction per cycle (logarithms, exponentials, a Newton loop) instead of N, which is
//!   what counts on a core without an FPU.
//! * **Expectation.** To a firmware engineer, oversampling is "more bits from the converter, then the same
//!   transfer function": that is what this does.
//!
//! The mean keeps its fraction ([`MeanCode`] is exact): sixteen samples give two more bits, and the
//! corrector uses them instead of rounding them away.
//!
//! # Faults, and when there is no value
//!
//! A [`Measurement`] has a value exactly when [`Measurement::error`] is `None`; [`Status`] sums up every
//! cause that was found (several can be set at once), [`Measurement::error`] gives the first, in cycle
//! order. The only flag that goes with a value is [`Status::temperature_extrapolated`].
//!
//! * Log channel: the codes kept by outlier rejection are checked one by one ([`Corrector::check_code`]).
//!   A spike to a rail that the rejection drops does not fail the cycle; a code stuck at a rail is kept
//!   and the cycle reports [`Status::saturated`].
//! * Temperature: *every* sample is converted, and any failure (an open or shorted sensor, a code the
//!   sensor cannot produce) is a [`Status::sensor_fault`]. This is stricter than the log channel on
//!   purpose: an intermittent sensor contact is itself a fault, where a log-channel spike is a glitch of
//!   the signal that outlier rejection is for.
//! * No calibration ([`Cycle::new`] with `None`, as when the boot-time loader finds no valid image): both
//!   channels are still read and the mean code and the temperature are reported (a calibration station
//!   needs exactly those), but every cycle has [`Status::not_calibrated`] and never a value. A corrector
//!   that fails [`Corrector::validate`] when installed is never used: [`Status::invalid_calibration`].

use embedded_hal::delay::DelayNs;

use super::adc::{AdcChannel, Error as _, ErrorKind};
use super::config::{Channel, CheckedConfig, ConfigError, CycleConfig, Oversampling, Reject};
use super::correct::{Corrector, FixedValue, MeanCode};
use super::temperature::TemperatureChannel;
use crate::error::Error;
use crate::units::Unit;

/// What went wrong in a cycle.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum CycleError {
    /// A converter read failed.
    Converter {
        /// The channel whose converter failed.
        channel: Channel,
        /// The converter error's kind.
        kind: ErrorKind,
    },
    /// The temperature channel gave no temperature (the sensor's own error).
    Temperature(Error),
    /// The correction, or a check of the log channel's codes, refused.
    Correction(Error),
    /// The configuration does not fit the buffers. [`CycleConfig::check`] rules this out; it exists so that
    /// no path of the cycle can panic.
    Config(ConfigError),
}

impl core::fmt::Display for CycleError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            CycleError::Converter { channel, kind } => write!(f, "{channel}: {kind}"),
            CycleError::Temperature(e) => write!(f, "temperature channel: {e}"),
            CycleError::Correction(e) => write!(f, "correction: {e}"),
            CycleError::Config(e) => write!(f, "configuration: {e}"),
        }
    }
}

impl core::error::Error for CycleError {}

/// The status flags of one cycle. All `false` is a clean reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Status {
    /// A kept log-channel code, or the mean, lies at or near a rail: the front end or converter is
    /// saturated.
    pub saturated: bool,
    /// The reading lies below the calibrated range, or where the front end has lost its sensitivity.
    pub below_range: bool,
    /// The reading lies above the calibrated range (or beyond what the unit can represent).
    pub above_range: bool,
    /// The temperature lies outside the calibrated range, within the allowed extrapolation. The value is
    /// still given.
    pub temperature_extrapolated: bool,
    /// The temperature lies outside the calibrated range and its allowed extrapolation.
    pub temperature_out_of_range: bool,
    /// The temperature sensor is faulty (open, short, outside its model, a code it cannot produce).
    pub sensor_fault: bool,
    /// No calibration is installed.
    pub not_calibrated: bool,
    /// The installed calibration failed its check.
    pub invalid_calibration: bool,
    /// A converter read failed, or returned a code the converter cannot produce.
    pub converter_error: bool,
    /// The configuration does not fit the buffers (ruled out by [`CycleConfig::check`]).
    pub config_error: bool,
}

impl Status {
    /// True when no flag is set.
    pub fn is_clean(&self) -> bool {
        *self == Status::default()
    }

    /// True when no flag but [`Status::temperature_extrapolated`] is set: the flags allow a value.
    pub fn allows_value(&self) -> bool {
        Status { temperature_extrapolated: false, ..*self }.is_clean()
    }

    fn raise(&mut self, e: &CycleError) {
        match e {
            CycleError::Converter { .. } => self.converter_error = true,
            CycleError::Temperature(_) => self.sensor_fault = true,
            CycleError::Config(_) => self.config_error = true,
            CycleError::Correction(e) => match e {
                Error::Saturated { .. } => self.saturated = true,
                Error::CodeOutOfAdcRange { .. } => self.converter_error = true,
                Error::BelowRange => self.below_range = true,
                Error::AboveRange => self.above_range = true,
                Error::TemperatureOutOfRange { .. } => self.temperature_out_of_range = true,
                Error::Sensor(_) | Error::NonFinite => self.sensor_fault = true,
                Error::InvalidCalibration(_) => self.invalid_calibration = true,
                Error::NotCalibrated => self.not_calibrated = true,
            },
        }
    }
}

/// The outcome of one cycle.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Measurement {
    unit: Unit,
    value: Option<f32>,
    x: Option<f32>,
    fixed: Option<FixedValue>,
    log_code: Option<MeanCode>,
    temperature_c: Option<f32>,
    status: Status,
    error: Option<CycleError>,
}

impl Measurement {
    fn new(unit: Unit) -> Measurement {
        Measurement {
            unit,
            value: None,
            x: None,
            fixed: None,
            log_code: None,
            temperature_c: None,
            status: Status::default(),
            error: None,
        }
    }

    fn fail(&mut self, e: CycleError) {
        self.status.raise(&e);
        if self.error.is_none() {
            self.error = Some(e);
        }
    }

    /// The reading in [`Measurement::unit`], or `None` when the cycle found a reason not to give one.
    pub fn value(&self) -> Option<f32> {
        self.value
    }

    /// The unit of [`Measurement::value`].
    pub fn unit(&self) -> Unit {
        self.unit
    }

    /// The reading as x = ln(I_sig/I_ref), present exactly when [`Measurement::value`] is.
    pub fn x(&self) -> Option<f32> {
        self.x
    }

    /// The integer result of a fixed-point corrector (x in Q24 and the value in [`Measurement::unit`] with its
    /// fraction bits), present exactly when [`Measurement::value`] is and the corrector computes in fixed
    /// point; `None` for the f32 path.
    pub fn fixed(&self) -> Option<FixedValue> {
        self.fixed
    }

    /// The mean of the kept log-channel codes, whenever the burst was read (also without calibration and
    /// when the codes are saturated: it is the raw data, not a value).
    pub fn log_code(&self) -> Option<MeanCode> {
        self.log_code
    }

    /// The temperature in °C, whenever the sensor gave one.
    pub fn temperature_c(&self) -> Option<f32> {
        self.temperature_c
    }

    /// The status flags.
    pub fn status(&self) -> Status {
        self.status
    }

    /// The first thing that went wrong, in cycle order (log channel, temperature, correction); `None`
    /// exactly when there is a value.
    pub fn error(&self) -> Option<CycleError> {
        self.error
    }
}

/// A measurement cycle over a log channel `L`, a temperature channel `T` whose codes the sensor `S`
/// converts, and a corrector `C`, with sample buffers of capacity `N` (see the module docs).
#[derive(Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Cycle<L, T, S, C, const N: usize> {
    log: L,
    temperature: T,
    sensor: S,
    corrector: Option<C>,
    corrector_error: Option<Error>,
    config: CheckedConfig<N>,
}

impl<L, T, S, C, const N: usize> Cycle<L, T, S, C, N>
where
    L: AdcChannel,
    T: AdcChannel,
    S: TemperatureChannel,
    C: Corrector,
{
    /// A cycle. `corrector` is `None` when no calibration is available; a corrector is checked with
    /// [`Corrector::validate`] here, once.
    pub fn new(log: L, temperature: T, sensor: S, corrector: Option<C>, config: CheckedConfig<N>) -> Self {
        let mut c = Cycle { log, temperature, sensor, corrector: None, corrector_error: None, config };
        c.set_corrector(corrector);
        c
    }

    /// Installs a corrector (or removes it with `None`), checking it with [`Corrector::validate`].
    pub fn set_corrector(&mut self, corrector: Option<C>) {
        self.corrector_error = match &corrector {
            None => Some(Error::NotCalibrated),
            Some(c) => c.validate().err(),
        };
        self.corrector = corrector;
    }

    /// The installed corrector, if any (also one that failed its check).
    pub fn corrector(&self) -> Option<&C> {
        self.corrector.as_ref()
    }

    /// Why the cycle gives no values whatever it reads: no corrector, or one that failed its check.
    pub fn calibration_error(&self) -> Option<Error> {
        self.corrector_error
    }

    /// The configuration.
    pub fn config(&self) -> &CycleConfig {
        self.config.config()
    }

    /// Replaces the configuration.
    pub fn set_config(&mut self, config: CheckedConfig<N>) {
        self.config = config;
    }

    /// Gives the parts back: log channel, temperature channel, sensor, corrector.
    pub fn release(self) -> (L, T, S, Option<C>) {
        (self.log, self.temperature, self.sensor, self.corrector)
    }

    /// Runs one cycle. `delay` serves the settle time and the sample intervals; it is not called when both
    /// are 0.
    pub fn measure<D: DelayNs>(&mut self, delay: &mut D) -> Measurement {
        let cfg = *self.config.config();
        let mut m = Measurement::new(cfg.unit);
        if cfg.settle_us > 0 {
            delay.delay_us(cfg.settle_us);
        }
        let log = burst::<_, _, N>(&mut self.log, delay, &cfg.log, Channel::Log);
        let temp = burst::<_, _, N>(&mut self.temperature, delay, &cfg.temperature, Channel::Temperature);

        let corrector = match (&self.corrector, self.corrector_error) {
            (Some(c), None) => Some(c),
            _ => None,
        };

        // The log channel: reject outliers, check what is kept, take the exact mean.
        match log {
            Err(e) => m.fail(e),
            Ok(mut codes) => {
                sort_small(&mut codes, |a, b| a < b);
                match kept(&codes, cfg.log, Channel::Log) {
                    Err(e) => m.fail(e),
                    Ok(k) => {
                        if let Some(c) = corrector {
                            if let Some(e) = k.iter().find_map(|&code| c.check_code(code).err()) {
                                m.fail(CycleError::Correction(e));
                            }
                        }
                        let sum = k.iter().fold(0u64, |s, &v| s.saturating_add(u64::from(v)));
                        m.log_code = u32::try_from(k.len()).ok().and_then(|n| MeanCode::new(sum, n));
                    }
                }
            }
        }

        // The temperature: convert every sample, then reject outliers in °C.
        match temp.and_then(|codes| self.celsius(&codes, cfg.temperature)) {
            Err(e) => m.fail(e),
            Ok(t) => m.temperature_c = Some(t),
        }

        if let Some(e) = self.corrector_error {
            m.fail(CycleError::Correction(e));
        }

        if m.error.is_none() {
            if let (Some(c), Some(code), Some(t)) = (corrector, m.log_code, m.temperature_c) {
                match c.correct_in(code, t, cfg.unit) {
                    Err(e) => m.fail(CycleError::Correction(e)),
                    Ok(r) => {
                        m.status.temperature_extrapolated = r.temperature_extrapolated;
                        m.x = Some(r.x);
                        m.value = Some(r.value);
                        m.fixed = r.fixed;
                    }
                }
            }
        }
        m
    }

    fn celsius(&self, codes: &[u32], o: Oversampling) -> Result<f32, CycleError> {
        let mut temps: heapless::Vec<f32, N> = heapless::Vec::new();
        for &code in codes {
            let t = self.sensor.celsius(code).map_err(CycleError::Temperature)?;
            if !t.is_finite() {
                return Err(CycleError::Temperature(Error::NonFinite));
            }
            temps.push(t).map_err(|_| overflow(Channel::Temperature, o, N))?;
        }
        sort_small(&mut temps, |a, b| a.total_cmp(b).is_lt());
        let k = kept(&temps, o, Channel::Temperature)?;
        let n = k.len().max(1) as f32;
        Ok(k.iter().fold(0.0f32, |s, &v| s + v) / n)
    }
}

/// Reads one burst: `discard` reads thrown away, then `samples` kept, `interval_us` between reads.
fn burst<A: AdcChannel, D: DelayNs, const N: usize>(
    adc: &mut A,
    delay: &mut D,
    o: &Oversampling,
    channel: Channel,
) -> Result<heapless::Vec<u32, N>, CycleError> {
    let mut out: heapless::Vec<u32, N> = heapless::Vec::new();
    let discard = u32::from(o.discard);
    for i in 0..discard + u32::from(o.samples) {
        if i > 0 && o.interval_us > 0 {
            delay.delay_us(o.interval_us);
        }
        let code = adc.read().map_err(|e| CycleError::Converter { channel, kind: e.kind() })?;
        if i >= discard {
            out.push(code).map_err(|_| overflow(channel, *o, N))?;
        }
    }
    Ok(out)
}

fn overflow(channel: Channel, o: Oversampling, capacity: usize) -> CycleError {
    CycleError::Config(ConfigError::TooManySamples { channel, samples: o.samples, capacity })
}

/// Sorts a burst in place by insertion: O(n²) compares, a few hundred for a typical burst of 16 to 64
/// samples. `core`'s sorts are not used because they keep a panic path for comparisons that are not a total
/// order, which no optimiser can remove (the link-time check in `targets/panic-check` finds it).
fn sort_small<V>(v: &mut [V], less: impl Fn(&V, &V) -> bool) {
    for i in 1..v.len() {
        let mut j = i;
        while let Some([a, b]) = j.checked_sub(1).and_then(|h| v.get_mut(h..=j)) {
            if !less(b, a) {
                break;
            }
            core::mem::swap(a, b);
            j -= 1;
        }
    }
}

/// The samples that outlier rejection keeps from a sorted burst.
fn kept<V>(sorted: &[V], o: Oversampling, channel: Channel) -> Result<&[V], CycleError> {
    let n = sorted.len();
    let range = match o.reject {
        Reject::Median => (n / 2)..(n / 2 + 1),
        Reject::TrimmedMean { trim } => usize::from(trim)..n.saturating_sub(usize::from(trim)),
    };
    match sorted.get(range) {
        Some(k) if !k.is_empty() => Ok(k),
        _ => Err(CycleError::Config(match o.reject {
            Reject::Median => ConfigError::NoSamples { channel },
            Reject::TrimmedMean { trim } => ConfigError::TrimTooLarge { channel, samples: o.samples, trim },
        })),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The burst sort (insertion, no panic path) orders like `core`'s sort, on bursts with repeats, NaN-free
    /// and signed-zero f32 values included (seeded xorshift, lengths 0..=40).
    #[test]
    fn sort_small_orders_like_core_sort() {
        let mut rng = logtrim_checks::XorShift64(0x9e37_79b9_7f4a_7c15);
        let mut next = || rng.next();
        for len in 0..=40 {
            for _ in 0..20 {
                let mut codes: std::vec::Vec<u32> = (0..len).map(|_| (next() % 50) as u32).collect();
                let mut want = codes.clone();
                want.sort_unstable();
                sort_small(&mut codes, |a, b| a < b);
                assert_eq!(codes, want);

                let mut temps: std::vec::Vec<f32> =
                    (0..len).map(|_| [-0.0, 0.0, 1.5, -3.25, 25.0][(next() % 5) as usize]).collect();
                let mut want = temps.clone();
                want.sort_by(f32::total_cmp);
                sort_small(&mut temps, |a, b| a.total_cmp(b).is_lt());
                assert_eq!(
                    temps.iter().map(|t| t.to_bits()).collect::<std::vec::Vec<_>>(),
                    want.iter().map(|t| t.to_bits()).collect::<std::vec::Vec<_>>()
                );
            }
        }
    }

    #[test]
    fn kept_samples() {
        let s = [1u32, 2, 3, 4, 100];
        assert_eq!(kept(&s, Oversampling::median(5), Channel::Log), Ok(&[3u32][..]));
        assert_eq!(kept(&s, Oversampling::trimmed_mean(5, 1), Channel::Log), Ok(&[2u32, 3, 4][..]));
        assert_eq!(kept(&s, Oversampling::trimmed_mean(5, 0), Channel::Log), Ok(&s[..]));
        assert!(kept(&s, Oversampling::trimmed_mean(5, 3), Channel::Log).is_err());
        assert!(kept::<u32>(&[], Oversampling::median(1), Channel::Temperature).is_err());
    }

    #[test]
    fn status_summaries() {
        let mut s = Status::default();
        assert!(s.is_clean() && s.allows_value());
        s.temperature_extrapolated = true;
        assert!(!s.is_clean() && s.allows_value());
        s.sensor_fault = true;
        assert!(!s.allows_value());
    }
}
