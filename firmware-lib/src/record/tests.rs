//! Tests of what every record shares: the magics, the CRC, the framing checks on a hand-made format.

use super::*;

#[test]
fn every_record_type_has_its_own_magic() {
    for a in RecordType::ALL {
        assert_eq!(RecordType::of_magic(a.magic()), Some(a));
        for b in RecordType::ALL {
            assert_eq!(a == b, a.magic() == b.magic(), "{a} {b}");
        }
    }
    assert_eq!(RecordType::of_magic([0xff; 4]), None);
}

#[test]
fn crc_is_crc32_iso_hdlc_check_value() {
    // CRC catalogue check value of CRC-32/ISO-HDLC over ASCII "123456789" (also in NUMERICS.md).
    assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    // And not CRC-32C (Castagnoli), whose check value is 0xE3069283 (same catalogue).
    assert_ne!(crc32(b"123456789"), 0xE306_9283);
}
