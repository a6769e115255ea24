//! The digest of an outcome: CRC-64/XZ (the `crc` crate's catalogue) of the `Debug` text of a whole result.
//!
//! `Debug` of an f32 or f64 prints the shortest decimal that reads back to the same value (sign of zero
//! included), and the formatting code is integer arithmetic, so two equal texts mean equal values and the
//! text is the same on every target. Errors are compared with all their fields the same way.

use core::fmt::{self, Write};

const CRC64: crc::Crc<u64> = crc::Crc::<u64>::new(&crc::CRC_64_XZ);

/// A `fmt::Write` sink that feeds a CRC-64.
struct Sink(crc::Digest<'static, u64>);

impl Write for Sink {
    fn write_str(&mut self, s: &str) -> fmt::Result {
        self.0.update(s.as_bytes());
        Ok(())
    }
}

/// The digest of `v`'s `Debug` text.
pub fn of<T: fmt::Debug + ?Sized>(v: &T) -> u64 {
    let mut sink = Sink(CRC64.digest());
    // Writing to the sink cannot fail.
    let _ = write!(sink, "{v:?}");
    sink.0.finalize()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crc64_xz_check_value() {
        // The catalogue's check value of CRC-64/XZ over "123456789" (CRC RevEng catalogue, from memory).
        assert_eq!(CRC64.checksum(b"123456789"), 0x995d_c9bb_df19_39fa);
        assert_eq!(of("123456789"), CRC64.checksum(b"\"123456789\""));
    }

    #[test]
    fn debug_text_tells_values_apart() {
        assert_ne!(of(&0.0f32), of(&-0.0f32));
        assert_ne!(of(&1.0f32), of(&f32::from_bits(1.0f32.to_bits() + 1)));
        assert_eq!(of(&Some(2.5f32)), of(&Some(2.5f32)));
    }
}
