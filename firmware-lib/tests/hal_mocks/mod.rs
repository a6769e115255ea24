//! Stand-ins for a board's converters in the measurement-cycle tests (feature `hal`): SPI conversions for
//! the bus mock, and a converter channel that plays back a script of codes. The firmware's `hal_cycle`
//! tests declare this module; the checks crate's `hal_fixed_cycle` includes it by `#[path]`.
#![allow(dead_code)]

use embedded_hal_mock::eh1::spi::Transaction as Spi;
use logtrim::hal::adc::{self, AdcChannel, ErrorType};

/// The SPI transactions of a 16-bit converter returning `codes`, one conversion each (big-endian).
pub fn conversions(codes: &[u16]) -> Vec<Spi<u8>> {
    codes
        .iter()
        .flat_map(|c| {
            [Spi::transaction_start(), Spi::read_vec(c.to_be_bytes().to_vec()), Spi::transaction_end()]
        })
        .collect()
}

/// A converter channel that plays back a script of codes, then times out.
pub struct Script(pub std::vec::IntoIter<u32>);

impl ErrorType for Script {
    type Error = adc::ErrorKind;
}

impl AdcChannel for Script {
    fn read(&mut self) -> Result<u32, Self::Error> {
        self.0.next().ok_or(adc::ErrorKind::Timeout)
    }
}
