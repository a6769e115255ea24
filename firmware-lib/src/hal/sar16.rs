//! A ready [`AdcChannel`] for the common 16-bit SAR converter on SPI: one device per channel, one
//! two-byte big-endian read per conversion.
//!
//! # The converter this fits
//!
//! Many 16-bit successive-approximation converters with a serial interface share one shape: asserting
//! chip select starts (or ends) a conversion, and the next 16 clocks shift the result out MSB first. On
//! embedded-hal 1.0 that is one [`SpiDevice`] transaction with a single two-byte read, which is all that
//! [`SpiSar16::read`] does; the device's own chip-select handling frames the conversion. Nothing is
//! written to the converter and no configuration register is touched.
//!
//! Assumptions, each of which a board should check against its converter's data sheet:
//!
//! * the SPI mode and clock are set on the [`SpiDevice`] by the board;
//! * the conversion is complete when the transaction starts, or completes within it (a converter that
//!   needs a conversion time between CS edges wants it in the SPI device's CS timing, or in the cycle's
//!   sample interval);
//! * the read returns the conversion it framed. A converter whose read returns the *previous* conversion
//!   (a one-sample pipeline) is handled by discarding the first read of each burst
//!   ([`crate::hal::Oversampling::discard`]);
//! * the result is straight binary (`0` at the bottom of the range), or two's complement for a bipolar
//!   input, which [`Coding::TwosComplement`] maps to offset binary so codes still run `0 ..= 65535`.

use embedded_hal::spi::SpiDevice;

use super::adc::{AdcChannel, Error, ErrorKind, ErrorType};

/// How the converter codes its result.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Coding {
    /// Straight binary: 0x0000 at the bottom of the input range, 0xFFFF at the top.
    StraightBinary,
    /// Two's complement (a bipolar input): 0x8000 at the bottom, 0x7FFF at the top. Mapped to offset binary
    /// (the MSB inverted), so that the code still rises from 0 to 65535 with the input.
    TwosComplement,
}

/// A 16-bit SAR converter on its own SPI device (see the module docs for the assumptions).
#[derive(Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SpiSar16<D> {
    spi: D,
    coding: Coding,
}

/// A failed SPI transaction; [`Error::kind`] is always [`ErrorKind::Bus`], the SPI error is kept.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SpiReadError<E>(pub E);

impl<E: embedded_hal::spi::Error> Error for SpiReadError<E> {
    fn kind(&self) -> ErrorKind {
        ErrorKind::Bus
    }
}

impl<E: embedded_hal::spi::Error> SpiReadError<E> {
    /// The SPI error's own classification.
    pub fn spi_kind(&self) -> embedded_hal::spi::ErrorKind {
        self.0.kind()
    }
}

impl<D: SpiDevice> SpiSar16<D> {
    /// A converter with straight-binary output on `spi`.
    pub fn new(spi: D) -> Self {
        SpiSar16 { spi, coding: Coding::StraightBinary }
    }

    /// A converter with the given output coding on `spi`.
    pub fn with_coding(spi: D, coding: Coding) -> Self {
        SpiSar16 { spi, coding }
    }

    /// The output coding.
    pub fn coding(&self) -> Coding {
        self.coding
    }

    /// Gives the SPI device back.
    pub fn release(self) -> D {
        self.spi
    }
}

impl<D: SpiDevice> ErrorType for SpiSar16<D> {
    type Error = SpiReadError<D::Error>;
}

impl<D: SpiDevice> AdcChannel for SpiSar16<D> {
    /// One transaction with a two-byte read; the bytes are the result, MSB first.
    fn read(&mut self) -> Result<u32, Self::Error> {
        let mut word = [0u8; 2];
        self.spi.read(&mut word).map_err(SpiReadError)?;
        let raw = u16::from_be_bytes(word);
        let code = match self.coding {
            Coding::StraightBinary => raw,
            Coding::TwosComplement => raw ^ 0x8000,
        };
        Ok(u32::from(code))
    }
}
