//! Reading a converter channel: the [`AdcChannel`] trait a board implements once per channel, and its
//! error classification.
//!
//! embedded-hal 1.0 has no ADC trait. This one is as small as a measurement cycle needs: one blocking
//! `read` that returns one conversion as an unsigned code. It follows embedded-hal's error pattern: the
//! implementation's error type is its own, and [`Error::kind`] sorts it into a small, fixed
//! [`ErrorKind`] that generic code can act on.
//!
//! A board implements [`AdcChannel`] for the log-ratio output and for the temperature input separately,
//! so the two can come from different converters (an external SAR on SPI for the log channel and the
//! microcontroller's own ADC for a thermistor, say). [`super::SpiSar16`] is a ready implementation for a
//! 16-bit SAR converter on SPI.

use core::fmt;

/// The classification of a converter error, for generic code (the cycle reports it in its status).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ErrorKind {
    /// The transport to the converter failed: an SPI, I²C or DMA error.
    Bus,
    /// The converter did not deliver a conversion in time (a data-ready line that never came).
    Timeout,
    /// The converter delivered a word that cannot be a conversion result (framing, a status bit, a width
    /// beyond its resolution).
    InvalidData,
    /// Anything else.
    Other,
}

impl fmt::Display for ErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            ErrorKind::Bus => "converter bus error",
            ErrorKind::Timeout => "converter timed out",
            ErrorKind::InvalidData => "converter returned an invalid word",
            ErrorKind::Other => "converter error",
        })
    }
}

/// A converter error that can be classified.
pub trait Error: fmt::Debug {
    /// The kind of the error.
    fn kind(&self) -> ErrorKind;
}

impl Error for ErrorKind {
    fn kind(&self) -> ErrorKind {
        *self
    }
}

impl Error for core::convert::Infallible {
    fn kind(&self) -> ErrorKind {
        match *self {}
    }
}

/// The error type of a converter channel.
pub trait ErrorType {
    /// The error a read can give.
    type Error: Error;
}

impl<T: ErrorType + ?Sized> ErrorType for &mut T {
    type Error = T::Error;
}

/// One converter input that gives one conversion per blocking read.
pub trait AdcChannel: ErrorType {
    /// Takes one conversion and returns its code, `0 ..= 2^bits − 1` for a converter of `bits` bits.
    ///
    /// How the conversion is started (by the read itself, by a free-running converter, by a timer) is the
    /// implementation's business; each call must return a conversion not returned before, or the cycle's
    /// oversampling averages copies of one sample.
    fn read(&mut self) -> Result<u32, Self::Error>;
}

impl<T: AdcChannel + ?Sized> AdcChannel for &mut T {
    fn read(&mut self) -> Result<u32, Self::Error> {
        T::read(self)
    }
}
