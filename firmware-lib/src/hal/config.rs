//! What a measurement cycle is configured with ([`CycleConfig`], [`Oversampling`], [`Reject`]) and the one
//! check that turns it into a [`CheckedConfig`] for a buffer capacity `N`.
//!
//! The configuration is checked once, when it is made, against the capacity of the cycle's sample
//! buffers: a burst longer than the buffer, a median of an even count or a trim that leaves nothing are
//! errors there, never a panic or a silently shortened burst later.

use core::fmt;

use crate::units::Unit;

/// How a burst of samples is reduced to one, rejecting outliers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Reject {
    /// The median of an odd number of samples. Rejects up to (n − 1)/2 outliers, at a price in noise: for
    /// Gaussian noise its standard deviation is about √(π/2) ≈ 1.25 times that of the plain mean of the same
    /// samples (from memory). It is one whole code, so it keeps no fraction.
    Median,
    /// The mean of the samples that remain after dropping the `trim` lowest and the `trim` highest.
    /// `trim = 0` is the plain mean.
    TrimmedMean {
        /// How many samples to drop at each end.
        trim: u16,
    },
}

/// How one channel is sampled in each cycle.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Oversampling {
    /// Samples kept per cycle, 1 ..= the buffer capacity `N`.
    pub samples: u16,
    /// Conversions read and thrown away before the kept samples: for a converter whose read returns the
    /// previous conversion, or an input that needs one conversion to settle after a multiplexer switch.
    pub discard: u8,
    /// Wait between consecutive reads of the burst, in µs (0: back to back, no delay call). Spreading a
    /// burst over a whole number of mains periods rejects mains hum (common practice).
    pub interval_us: u32,
    /// The outlier rejection.
    pub reject: Reject,
}

impl Oversampling {
    /// One sample, nothing discarded, no wait.
    pub const SINGLE: Oversampling =
        Oversampling { samples: 1, discard: 0, interval_us: 0, reject: Reject::TrimmedMean { trim: 0 } };

    /// The median of `samples` back-to-back reads.
    pub const fn median(samples: u16) -> Oversampling {
        Oversampling { samples, discard: 0, interval_us: 0, reject: Reject::Median }
    }

    /// The mean of `samples` back-to-back reads after dropping `trim` at each end.
    pub const fn trimmed_mean(samples: u16, trim: u16) -> Oversampling {
        Oversampling { samples, discard: 0, interval_us: 0, reject: Reject::TrimmedMean { trim } }
    }

    fn check(&self, channel: Channel, capacity: usize) -> Result<(), ConfigError> {
        let n = self.samples;
        if n == 0 {
            return Err(ConfigError::NoSamples { channel });
        }
        if usize::from(n) > capacity {
            return Err(ConfigError::TooManySamples { channel, samples: n, capacity });
        }
        match self.reject {
            Reject::Median if n.is_multiple_of(2) => Err(ConfigError::EvenMedian { channel, samples: n }),
            Reject::TrimmedMean { trim } if u32::from(trim) * 2 >= u32::from(n) => {
                Err(ConfigError::TrimTooLarge { channel, samples: n, trim })
            }
            _ => Ok(()),
        }
    }
}

/// Which input of the front end.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Channel {
    /// The log-ratio output.
    Log,
    /// The temperature sensor.
    Temperature,
}

impl fmt::Display for Channel {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Channel::Log => "log channel",
            Channel::Temperature => "temperature channel",
        })
    }
}

/// Everything a cycle does, in order: settle, sample the log channel, sample the temperature, correct.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CycleConfig {
    /// Wait at the start of each cycle, in µs (0: none). For a front end that was just switched on, a
    /// light source that was just switched, a reference that needs to recover.
    pub settle_us: u32,
    /// Sampling of the log channel.
    pub log: Oversampling,
    /// Sampling of the temperature channel.
    pub temperature: Oversampling,
    /// The unit of [`crate::hal::Measurement::value`].
    pub unit: Unit,
}

impl CycleConfig {
    /// No settle time, one sample of each channel, values in `unit`.
    pub const fn single(unit: Unit) -> CycleConfig {
        CycleConfig { settle_us: 0, log: Oversampling::SINGLE, temperature: Oversampling::SINGLE, unit }
    }

    /// Checks the configuration against a buffer capacity of `N` samples.
    pub fn check<const N: usize>(self) -> Result<CheckedConfig<N>, ConfigError> {
        self.log.check(Channel::Log, N)?;
        self.temperature.check(Channel::Temperature, N)?;
        Ok(CheckedConfig { config: self })
    }
}

/// A [`CycleConfig`] known to fit buffers of `N` samples; made by [`CycleConfig::check`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CheckedConfig<const N: usize> {
    config: CycleConfig,
}

impl<const N: usize> CheckedConfig<N> {
    /// The configuration.
    pub fn config(&self) -> &CycleConfig {
        &self.config
    }
}

/// Why a [`CycleConfig`] cannot be used.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// A channel is set to take no samples.
    NoSamples {
        /// The channel.
        channel: Channel,
    },
    /// A channel takes more samples than the buffer holds.
    TooManySamples {
        /// The channel.
        channel: Channel,
        /// Samples asked for.
        samples: u16,
        /// The buffer capacity `N`.
        capacity: usize,
    },
    /// A median needs an odd number of samples.
    EvenMedian {
        /// The channel.
        channel: Channel,
        /// Samples asked for.
        samples: u16,
    },
    /// The trim drops every sample (`2·trim ≥ samples`).
    TrimTooLarge {
        /// The channel.
        channel: Channel,
        /// Samples asked for.
        samples: u16,
        /// Samples to drop at each end.
        trim: u16,
    },
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ConfigError::NoSamples { channel } => write!(f, "{channel}: no samples per cycle"),
            ConfigError::TooManySamples { channel, samples, capacity } => {
                write!(f, "{channel}: {samples} samples do not fit a buffer of {capacity}")
            }
            ConfigError::EvenMedian { channel, samples } => {
                write!(f, "{channel}: a median needs an odd number of samples, not {samples}")
            }
            ConfigError::TrimTooLarge { channel, samples, trim } => {
                write!(f, "{channel}: trimming {trim} at each end leaves none of {samples} samples")
            }
        }
    }
}

impl core::error::Error for ConfigError {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn checks_against_the_capacity() {
        let mut c = CycleConfig::single(Unit::Nepers);
        assert!(c.check::<1>().is_ok());
        c.log = Oversampling::median(9);
        assert_eq!(
            c.check::<8>(),
            Err(ConfigError::TooManySamples { channel: Channel::Log, samples: 9, capacity: 8 })
        );
        assert!(c.check::<9>().is_ok());
        c.log = Oversampling::median(8);
        assert_eq!(c.check::<16>(), Err(ConfigError::EvenMedian { channel: Channel::Log, samples: 8 }));
        c.log = Oversampling::trimmed_mean(8, 4);
        assert_eq!(
            c.check::<16>(),
            Err(ConfigError::TrimTooLarge { channel: Channel::Log, samples: 8, trim: 4 })
        );
        c.log = Oversampling::trimmed_mean(8, 3);
        assert!(c.check::<16>().is_ok());
        c.temperature.samples = 0;
        assert_eq!(c.check::<16>(), Err(ConfigError::NoSamples { channel: Channel::Temperature }));
        // A zero-capacity buffer fits nothing.
        assert!(CycleConfig::single(Unit::Nepers).check::<0>().is_err());
    }
}
