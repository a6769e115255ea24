//! A bit-banged SPI bus, mode 0 (clock idles low, data sampled on the rising edge), MSB first, on any
//! `embedded_hal::digital` pins: enough for converters that clock out a word on chip select, and
//! independent of the part. A part's hardware SPI (through its HAL) does the same faster.

use core::convert::Infallible;

use embedded_hal::delay::DelayNs;
use embedded_hal::digital::{InputPin, OutputPin};
use embedded_hal::spi::{ErrorType, SpiBus};

/// The bus: clock, data out, data in, and a delay for half a clock period.
pub struct BitBangSpi<Sck, Mosi, Miso, D> {
    sck: Sck,
    mosi: Mosi,
    miso: Miso,
    delay: D,
    half_period_ns: u32,
}

impl<Sck, Mosi, Miso, D> BitBangSpi<Sck, Mosi, Miso, D>
where
    Sck: OutputPin<Error = Infallible>,
    Mosi: OutputPin<Error = Infallible>,
    Miso: InputPin<Error = Infallible>,
    D: DelayNs,
{
    /// A bus clocked at about `1 / (2 · half_period_ns)`, its clock low.
    pub fn new(mut sck: Sck, mosi: Mosi, miso: Miso, delay: D, half_period_ns: u32) -> Self {
        let Ok(()) = sck.set_low();
        BitBangSpi { sck, mosi, miso, delay, half_period_ns }
    }

    /// Sends one byte and returns the byte clocked in at the same time.
    fn exchange(&mut self, out: u8) -> u8 {
        let mut word = 0u8;
        for bit in (0..8).rev() {
            let Ok(()) = self.mosi.set_state((out >> bit & 1 == 1).into());
            self.delay.delay_ns(self.half_period_ns);
            let Ok(()) = self.sck.set_high();
            let Ok(high) = self.miso.is_high();
            word = word << 1 | u8::from(high);
            self.delay.delay_ns(self.half_period_ns);
            let Ok(()) = self.sck.set_low();
        }
        word
    }
}

impl<Sck, Mosi, Miso, D> ErrorType for BitBangSpi<Sck, Mosi, Miso, D> {
    type Error = Infallible;
}

impl<Sck, Mosi, Miso, D> SpiBus<u8> for BitBangSpi<Sck, Mosi, Miso, D>
where
    Sck: OutputPin<Error = Infallible>,
    Mosi: OutputPin<Error = Infallible>,
    Miso: InputPin<Error = Infallible>,
    D: DelayNs,
{
    fn read(&mut self, words: &mut [u8]) -> Result<(), Infallible> {
        for w in words {
            *w = self.exchange(0);
        }
        Ok(())
    }

    fn write(&mut self, words: &[u8]) -> Result<(), Infallible> {
        for &w in words {
            self.exchange(w);
        }
        Ok(())
    }

    fn transfer(&mut self, read: &mut [u8], write: &[u8]) -> Result<(), Infallible> {
        // As embedded-hal specifies: the longer of the two sets the length; missing writes are 0, extra
        // reads are dropped.
        let n = read.len().max(write.len());
        for i in 0..n {
            let got = self.exchange(write.get(i).copied().unwrap_or(0));
            if let Some(r) = read.get_mut(i) {
                *r = got;
            }
        }
        Ok(())
    }

    fn transfer_in_place(&mut self, words: &mut [u8]) -> Result<(), Infallible> {
        for w in words {
            *w = self.exchange(*w);
        }
        Ok(())
    }

    fn flush(&mut self) -> Result<(), Infallible> {
        Ok(())
    }
}
