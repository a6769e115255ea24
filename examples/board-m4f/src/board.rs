//! THE BOARD-SPECIFIC PART: the one file to rewrite for a real board.
//!
//! A generic Cortex-M4F has no standard GPIO, so this file describes one GPIO port by three registers (a
//! write-one-to-set register, a write-one-to-clear register, an input register), which is how many parts'
//! ports work, and the core clock. **The addresses below are placeholders, not any part's**: take them from
//! your part's reference manual, and enable the port's clock and set the pins' directions first (also
//! part-specific, and not done here). With a vendor HAL crate, delete this file and hand its pins (which
//! implement `embedded_hal::digital`) to [`crate::bitbang::BitBangSpi`] and
//! `embedded_hal_bus::spi::RefCellDevice` instead.

use core::convert::Infallible;

use embedded_hal::delay::DelayNs;
use embedded_hal::digital::{ErrorType, InputPin, OutputPin};

/// Core clock after reset, Hz (placeholder: the part's reset clock or what your clock setup makes).
pub const CORE_HZ: u32 = 16_000_000;

/// The GPIO port's write-one-to-set register (placeholder address).
const PORT_SET: usize = 0x4002_0018;
/// The GPIO port's write-one-to-clear register (placeholder address).
const PORT_CLEAR: usize = 0x4002_001C;
/// The GPIO port's input register (placeholder address).
const PORT_INPUT: usize = 0x4002_0010;

/// Pin numbers on the port (placeholders): the SPI bus and one chip select per converter.
pub mod pins {
    /// Serial clock.
    pub const SCK: u8 = 5;
    /// Controller out.
    pub const MOSI: u8 = 7;
    /// Controller in.
    pub const MISO: u8 = 6;
    /// Chip select of the 16-bit SAR converter on the log-ratio output.
    pub const CS_LOG: u8 = 4;
    /// Chip select of the digital temperature sensor beside the transistor pair.
    pub const CS_TEMP: u8 = 3;
}

#[allow(unsafe_code)] // memory-mapped I/O: the board-specific core of the example
fn write_register(address: usize, value: u32) {
    // SAFETY: `address` is one of the port's registers above, which accept any 32-bit write (set/clear
    // registers ignore zero bits). On a part where they are not GPIO registers this is wrong: see the
    // module docs.
    unsafe { core::ptr::write_volatile(address as *mut u32, value) }
}

#[allow(unsafe_code)] // memory-mapped I/O: the board-specific core of the example
fn read_register(address: usize) -> u32 {
    // SAFETY: as above; reading the input register has no side effect.
    unsafe { core::ptr::read_volatile(address as *const u32) }
}

/// One pin of the port.
pub struct Pin(u8);

impl Pin {
    /// The pin `n` (0..=31) of the port.
    pub const fn new(n: u8) -> Pin {
        Pin(n & 31)
    }
}

impl ErrorType for Pin {
    type Error = Infallible;
}

impl OutputPin for Pin {
    fn set_high(&mut self) -> Result<(), Infallible> {
        write_register(PORT_SET, 1 << self.0);
        Ok(())
    }
    fn set_low(&mut self) -> Result<(), Infallible> {
        write_register(PORT_CLEAR, 1 << self.0);
        Ok(())
    }
}

impl InputPin for Pin {
    fn is_high(&mut self) -> Result<bool, Infallible> {
        Ok(read_register(PORT_INPUT) & (1 << self.0) != 0)
    }
    fn is_low(&mut self) -> Result<bool, Infallible> {
        self.is_high().map(|h| !h)
    }
}

/// A busy-wait delay counted in core cycles (`cortex_m::asm::delay`): at least the time asked for.
#[derive(Clone, Copy)]
pub struct CycleDelay {
    core_hz: u32,
}

impl CycleDelay {
    /// A delay for a core running at `core_hz`.
    pub const fn new(core_hz: u32) -> CycleDelay {
        CycleDelay { core_hz }
    }
}

impl DelayNs for CycleDelay {
    fn delay_ns(&mut self, ns: u32) {
        let cycles = (u64::from(ns) * u64::from(self.core_hz)).div_ceil(1_000_000_000);
        cortex_m::asm::delay(u32::try_from(cycles).unwrap_or(u32::MAX));
    }
}
