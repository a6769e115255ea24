//! Unit tests of the field layers: the records (layout, round trips, every single-bit flip, truncation,
//! foreign magic, bad values behind a good CRC), the trim computations against an independent f64
//! solution, the limits, clearing, blank referencing, bindings and the channel banks.

use std::vec::Vec;

use proptest::prelude::*;

use super::layout::{self, blank as bl, header, trim as tl};
use super::*;
use crate::calibration::{Reading, TemperatureRange};
use crate::error::SensorFault;
use crate::fixed::FixedReading;
use crate::qformat::q_from_f32;
use crate::record::{BufferTooSmall, FormatError, RecordType};
use crate::units::Unit;

const Q24: f64 = 16_777_216.0;

fn info() -> RecordInfo {
    RecordInfo { sequence: 7, written_at: 1_767_225_600, factory: 0x1234_5678 }
}

fn blank() -> Blank {
    Blank::new(BlankParts { info: info(), x: -0.0125, x_q24: -209_715, temp_mc: 24_850, samples: 16 })
        .unwrap()
}

fn two_point() -> Trim {
    let a = Standard { measured: -3.0 * 1.008 + 0.004, known: -3.0 };
    let b = Standard { measured: 1.5 * 1.008 + 0.004, known: 1.5 };
    Trim::two_point(info(), a, b, 25_000, &TrimLimits::DEFAULT).unwrap()
}

/// Rewrites the CRC of a record after its bytes were edited, so that the value checks are reached.
fn recrc(bytes: &mut [u8]) {
    let n = bytes.len() - 4;
    let crc = crate::record::crc32(&bytes[..n]);
    bytes[n..].copy_from_slice(&crc.to_le_bytes());
}

// ---------------------------------------------------------------------------------------------------------
// Layout

#[test]
fn record_sizes() {
    assert_eq!(header::END, 24);
    assert_eq!(layout::BLANK_LEN, 44);
    assert_eq!(layout::TRIM_LEN, 60);
    assert_eq!(blank().to_bytes().len(), 44);
    assert_eq!(two_point().to_bytes().len(), 60);
}

#[test]
fn written_bytes_sit_where_the_layout_says() {
    // Read fields back by hand at their documented offsets, independently of the parser.
    let b = blank().to_bytes();
    assert_eq!(&b[0..4], b"LTBK");
    assert_eq!(u16::from_le_bytes([b[4], b[5]]), 1);
    assert_eq!(u16::from_le_bytes([b[6], b[7]]), 44);
    assert_eq!(u32::from_le_bytes(b[8..12].try_into().unwrap()), 7);
    assert_eq!(u64::from_le_bytes(b[12..20].try_into().unwrap()), 1_767_225_600);
    assert_eq!(u32::from_le_bytes(b[20..24].try_into().unwrap()), 0x1234_5678);
    assert_eq!(f32::from_le_bytes(b[24..28].try_into().unwrap()), -0.0125);
    assert_eq!(i32::from_le_bytes(b[28..32].try_into().unwrap()), -209_715);
    assert_eq!(i32::from_le_bytes(b[32..36].try_into().unwrap()), 24_850);
    assert_eq!(u32::from_le_bytes(b[36..40].try_into().unwrap()), 16);
    // The CRC against an independent CRC-32 (IEEE 802.3) implementation.
    assert_eq!(u32::from_le_bytes(b[40..44].try_into().unwrap()), crc32fast::hash(&b[..40]));
    let t = two_point().to_bytes();
    assert_eq!(&t[0..4], b"LTTM");
    assert_eq!(t[24], 2);
    assert_eq!(&t[25..28], &[0, 0, 0]);
    assert_eq!(i32::from_le_bytes(t[40..44].try_into().unwrap()), two_point().gain_q30());
    assert_eq!(u32::from_le_bytes(t[56..60].try_into().unwrap()), crc32fast::hash(&t[..56]));
}

// ---------------------------------------------------------------------------------------------------------
// Corrupted records

fn flip_verdict(pos: usize) -> fn(&RecordError) -> bool {
    match pos {
        0..=3 => |e| matches!(e, RecordError::Format(FormatError::BadMagic { .. })),
        4..=5 => |e| matches!(e, RecordError::Format(FormatError::UnsupportedVersion { .. })),
        6..=7 => |e| matches!(e, RecordError::Format(FormatError::BadLength { .. })),
        _ => |e| matches!(e, RecordError::Format(FormatError::CrcMismatch { .. })),
    }
}

#[test]
fn every_single_bit_flip_is_refused_with_the_error_of_its_field() {
    type Parse = fn(&[u8]) -> Option<RecordError>;
    let records: [(&str, Vec<u8>, Parse); 3] = [
        ("blank", blank().to_bytes().to_vec(), |b| Blank::parse(b).err()),
        ("trim", two_point().to_bytes().to_vec(), |b| Trim::parse(b).err()),
        ("cleared", Trim::cleared(info(), 20_000).to_bytes().to_vec(), |b| Trim::parse(b).err()),
    ];
    for (name, good, parse) in records {
        assert_eq!(parse(&good), None, "{name}: the good record parses");
        for pos in 0..good.len() {
            for bit in 0..8 {
                let mut bad = good.clone();
                bad[pos] ^= 1 << bit;
                let e =
                    parse(&bad).unwrap_or_else(|| panic!("{name}: flip of byte {pos} bit {bit} accepted"));
                assert!(flip_verdict(pos)(&e), "{name}: byte {pos} bit {bit}: {e:?}");
            }
        }
    }
}

#[test]
fn truncated_and_overlong_records_are_refused() {
    let good = two_point().to_bytes();
    for n in 0..good.len() {
        let e = Trim::parse(&good[..n]).unwrap_err();
        let needed = if n < 8 { 24 } else { 60 };
        assert_eq!(
            e,
            RecordError::Format(FormatError::Truncated { needed, available: n as u32 }),
            "{n} bytes"
        );
    }
    let mut long = good.to_vec();
    long.push(0xff);
    assert_eq!(
        Trim::parse(&long),
        Err(RecordError::Format(FormatError::LengthMismatch { declared: 60, actual: 61 }))
    );
    let (t, rest) = Trim::parse_prefix(&long).unwrap();
    assert_eq!((t, rest), (two_point(), &[0xffu8][..]));
    let b = blank().to_bytes();
    assert_eq!(
        Blank::parse(&b[..43]),
        Err(RecordError::Format(FormatError::Truncated { needed: 44, available: 43 }))
    );
}

#[test]
fn foreign_magic_and_versions_are_refused() {
    assert_eq!(
        Trim::parse(&[0xff; 60]),
        Err(RecordError::Format(FormatError::BadMagic { found: [0xff; 4] }))
    );
    assert_eq!(Blank::parse(&[0; 44]), Err(RecordError::Format(FormatError::BadMagic { found: [0; 4] })));
    assert_eq!(
        Trim::parse(&blank().to_bytes()),
        Err(RecordError::Format(FormatError::OtherRecord {
            expected: RecordType::Trim,
            found: RecordType::Blank
        }))
    );
    assert_eq!(
        Blank::parse(&two_point().to_bytes()),
        Err(RecordError::Format(FormatError::OtherRecord {
            expected: RecordType::Blank,
            found: RecordType::Trim
        }))
    );
    let cal = crate::Calibration::nominal(16, 32768.0, 2000.0, 25.0);
    let mut img = [0u8; crate::image::layout::F32_IMAGE_LEN];
    let info = crate::image::ImageInfo { serial: "X", calibrated_at: 0, sequence: 1 };
    crate::image::write(&mut img, &info, &cal).unwrap();
    assert_eq!(
        Blank::parse(&img),
        Err(RecordError::Format(FormatError::OtherRecord {
            expected: RecordType::Blank,
            found: RecordType::CalibrationImage
        }))
    );
    // A version 2 record with a good CRC is refused for its version, and a length that is not the
    // version's for its length.
    let mut v2 = blank().to_bytes();
    v2[4] = 2;
    recrc(&mut v2);
    assert_eq!(
        Blank::parse(&v2),
        Err(RecordError::Format(FormatError::UnsupportedVersion { found: 2, supported: 1 }))
    );
    let mut len = blank().to_bytes();
    len[6] = 48;
    recrc(&mut len);
    assert_eq!(
        Blank::parse(&len),
        Err(RecordError::Format(FormatError::BadLength { declared: 48, min: 44, max: 44 }))
    );
}

#[test]
fn bad_values_behind_a_good_crc_are_refused() {
    let edit = |mut b: Vec<u8>, at: usize, v: &[u8]| {
        b[at..at + v.len()].copy_from_slice(v);
        recrc(&mut b);
        b
    };
    let b = blank().to_bytes().to_vec();
    let nan = f32::NAN.to_le_bytes();
    assert_eq!(
        Blank::parse(&edit(b.clone(), bl::X_F32.offset, &nan)),
        Err(RecordError::Value(RecordValueError::NonFinite { field: "x_f32" }))
    );
    assert_eq!(
        Blank::parse(&edit(b.clone(), bl::X_Q24.offset, &0i32.to_le_bytes())),
        Err(RecordError::Value(RecordValueError::Inconsistent { field: "x_q24" }))
    );
    assert_eq!(
        Blank::parse(&edit(b.clone(), bl::X_F32.offset, &(-200.0f32).to_le_bytes())),
        Err(RecordError::Value(RecordValueError::OutOfRange { field: "x_f32" }))
    );
    assert_eq!(
        Blank::parse(&edit(b.clone(), bl::SAMPLES.offset, &0u32.to_le_bytes())),
        Err(RecordError::Value(RecordValueError::NoSamples))
    );
    let t = two_point().to_bytes().to_vec();
    assert_eq!(
        Trim::parse(&edit(t.clone(), tl::KIND.offset, &[3])),
        Err(RecordError::Format(FormatError::BadEnum { field: "kind", found: 3 }))
    );
    assert_eq!(
        Trim::parse(&edit(t.clone(), tl::RESERVED.offset + 1, &[9])),
        Err(RecordError::Format(FormatError::ReservedNotZero { offset: 26 }))
    );
    assert_eq!(
        Trim::parse(&edit(t.clone(), tl::GAIN_Q30.offset, &(-5i32).to_le_bytes())),
        Err(RecordError::Value(RecordValueError::OutOfRange { field: "gain_q30" }))
    );
    assert_eq!(
        Trim::parse(&edit(t.clone(), tl::GAIN_F32.offset, &1.5f32.to_le_bytes())),
        Err(RecordError::Value(RecordValueError::Inconsistent { field: "gain_q30" }))
    );
    // A two-point record relabelled as cleared is not the identity.
    assert_eq!(
        Trim::parse(&edit(t.clone(), tl::KIND.offset, &[0])),
        Err(RecordError::Value(RecordValueError::ClearedNotIdentity { field: "offset_f32" }))
    );
    assert_eq!(
        Trim::parse(&edit(t, tl::KIND.offset, &[1])),
        Err(RecordError::Value(RecordValueError::OnePointStandards))
    );
}

// ---------------------------------------------------------------------------------------------------------
// Round trips

fn arb_info() -> impl Strategy<Value = RecordInfo> {
    (any::<u32>(), any::<u64>(), any::<u32>()).prop_map(|(sequence, written_at, factory)| RecordInfo {
        sequence,
        written_at,
        factory,
    })
}

proptest! {
    #[test]
    fn blank_records_round_trip(
        info in arb_info(),
        x in -100.0f32..100.0,
        delta in -(1i32 << 14)..=(1 << 14),
        temp_mc in any::<i32>(),
        samples in 1u32..,
    ) {
        let q = q_from_f32(x, 24).unwrap() as i32;
        let b = Blank::new(BlankParts { info, x, x_q24: q.saturating_add(delta), temp_mc, samples });
        // Near ±100 Np the shifted Q24 form may leave the range: then the constructor says so.
        let Ok(b) = b else { return Ok(()) };
        let bytes = b.to_bytes();
        prop_assert_eq!(Blank::parse(&bytes), Ok(b));
        prop_assert_eq!(Blank::parse(&bytes).unwrap().to_bytes(), bytes);
    }

    #[test]
    fn trim_records_round_trip(
        info in arb_info(),
        o in -1.0f32..1.0,
        g in 0.5f32..1.5,
        (dq, dg) in (-(1i32 << 14)..=(1 << 14), -(1i32 << 20)..=(1 << 20)),
        kind in 0u8..3,
        s in (-20.0f32..20.0, -20.0f32..20.0),
        temp_mc in any::<i32>(),
    ) {
        let kind = TrimKind::from_code(kind).unwrap();
        let parts = match kind {
            TrimKind::Cleared => Trim::cleared(info, temp_mc).parts(),
            _ => TrimParts {
                info,
                kind,
                offset: o,
                gain: g,
                offset_q24: q_from_f32(o, 24).unwrap() as i32 + dq,
                gain_q30: q_from_f32(g, 30).unwrap() as i32 + dg,
                standards: if kind == TrimKind::OnePoint { [s.0, s.0] } else { [s.0, s.1] },
                temp_mc,
            },
        };
        let t = Trim::new(parts).unwrap();
        let bytes = t.to_bytes();
        prop_assert_eq!(Trim::parse(&bytes), Ok(t));
        prop_assert_eq!(Trim::parse(&bytes).unwrap().to_bytes(), bytes);
    }

    #[test]
    fn parsing_arbitrary_bytes_never_panics(bytes in proptest::collection::vec(any::<u8>(), 0..80)) {
        let _ = Blank::parse(&bytes);
        let _ = Trim::parse(&bytes);
    }
}

// ---------------------------------------------------------------------------------------------------------
// Trim computations

/// The independent reference: the two-point line solved in f64 by Cramer's rule.
fn line_f64(a: (f64, f64), b: (f64, f64)) -> (f64, f64) {
    let g = (b.1 - a.1) / (b.0 - a.0);
    (g, a.1 - g * a.0)
}

#[test]
fn two_point_trims_match_the_f64_solution_and_hit_both_standards() {
    let cases = [(1.008f64, 0.004f64, -3.0f64, 1.5f64), (0.985, -0.03, -6.0, -1.0), (1.0, 0.0, 0.0, 2.0)];
    for (k, c, ka, kb) in cases {
        let ma = k * ka + c;
        let mb = k * kb + c;
        let (g_ref, o_ref) = line_f64((ma, ka), (mb, kb));
        let a = Standard { measured: ma as f32, known: ka as f32 };
        let b = Standard { measured: mb as f32, known: kb as f32 };
        let t = Trim::two_point(info(), a, b, 25_000, &TrimLimits::DEFAULT).unwrap();
        assert!((f64::from(t.gain()) - g_ref).abs() < 1e-6, "{k} {c}: gain {} vs {g_ref}", t.gain());
        assert!((f64::from(t.offset()) - o_ref).abs() < 1e-5, "{k} {c}: offset {} vs {o_ref}", t.offset());
        for s in [a, b] {
            let r = t.apply(&Reading { x: s.measured, temperature_extrapolated: false });
            assert!((r.x - s.known).abs() < 2e-6, "{k} {c}: {} vs {}", r.x, s.known);
        }
        // The fixed path, in integer arithmetic, from the same readings in Q24.
        let q = |v: f64| (v * Q24).round() as i32;
        let fa = FixedStandard { measured: q(ma), known: q(ka) };
        let fb = FixedStandard { measured: q(mb), known: q(kb) };
        let tf = Trim::two_point_fixed(info(), fa, fb, 25_000, &TrimLimits::DEFAULT).unwrap();
        // Against the f64 line through the Q24-rounded readings: only the integer division (2^-31) and
        // the rounding of g·m_a to Q24 remain.
        let qf = |v: i32| f64::from(v) / Q24;
        let (gq, oq) = line_f64((qf(fa.measured), qf(fa.known)), (qf(fb.measured), qf(fb.known)));
        assert!((f64::from(tf.gain_q30()) / 1_073_741_824.0 - gq).abs() <= 1e-9);
        assert!((f64::from(tf.offset_q24()) / Q24 - oq).abs() <= 2.5 / Q24);
        for s in [fa, fb] {
            let r = tf.apply_fixed(&FixedReading { x: s.measured, temperature_extrapolated: false }).unwrap();
            assert!((r.x - s.known).abs() <= 2, "{k} {c}: {} vs {}", r.x, s.known);
        }
    }
}

#[test]
fn one_point_trims() {
    let s = Standard { measured: -2.03, known: -2.0 };
    let t = Trim::one_point(info(), s, 20_000, &TrimLimits::DEFAULT).unwrap();
    assert_eq!((t.kind(), t.gain(), t.gain_q30()), (TrimKind::OnePoint, 1.0, 1 << 30));
    assert!((t.offset() - 0.03).abs() < 1e-6);
    // Keeping an earlier two-point trim's gain: the standard reads its known value.
    let previous = two_point();
    let k = Trim::one_point_keeping_gain(info(), &previous, s, 20_000, &TrimLimits::DEFAULT).unwrap();
    assert_eq!(k.gain(), previous.gain());
    assert!((k.apply(&Reading { x: s.measured, temperature_extrapolated: false }).x - s.known).abs() < 1e-6);
    let fs = FixedStandard { measured: (-2.03 * Q24) as i32, known: (-2.0 * Q24) as i32 };
    let kf = Trim::one_point_keeping_gain_fixed(info(), &previous, fs, 20_000, &TrimLimits::DEFAULT).unwrap();
    let r = kf.apply_fixed(&FixedReading { x: fs.measured, temperature_extrapolated: false }).unwrap();
    assert!((r.x - fs.known).abs() <= 1);
    let f1 = Trim::one_point_fixed(info(), fs, 20_000, &TrimLimits::DEFAULT).unwrap();
    assert_eq!(f1.offset_q24(), fs.known - fs.measured);
}

#[test]
fn trims_past_the_limits_are_refused() {
    let lim = TrimLimits::DEFAULT;
    let e = Trim::one_point(info(), Standard { measured: -2.06, known: -2.0 }, 0, &lim).unwrap_err();
    assert!(matches!(e, FieldError::OffsetPastLimit { limit_q24: 838_861, .. }), "{e:?}");
    // 3 % of gain: refused for its gain, whatever the offset.
    let a = Standard { measured: -3.09, known: -3.0 };
    let b = Standard { measured: 1.545, known: 1.5 };
    let e = Trim::two_point(info(), a, b, 0, &lim).unwrap_err();
    assert!(matches!(e, FieldError::GainPastLimit { limit_q30: 21_474_836, .. }), "{e:?}");
    let e = Trim::two_point(info(), a, Standard { measured: -2.8, known: -2.7 }, 0, &lim).unwrap_err();
    assert!(matches!(e, FieldError::StandardsTooClose { .. }), "{e:?}");
    let e = Trim::two_point(info(), a, a, 0, &lim).unwrap_err();
    assert!(matches!(e, FieldError::StandardsTooClose { separation_q24: 0, .. }), "{e:?}");
    let e = Trim::two_point(info(), a, Standard { measured: f32::NAN, known: 1.0 }, 0, &lim).unwrap_err();
    assert_eq!(e, FieldError::NonFinite);
    // The fixed path refuses the same trims.
    let q = |v: f64| (v * Q24).round() as i32;
    let fa = FixedStandard { measured: q(-3.09), known: q(-3.0) };
    let fb = FixedStandard { measured: q(1.545), known: q(1.5) };
    assert!(matches!(Trim::two_point_fixed(info(), fa, fb, 0, &lim), Err(FieldError::GainPastLimit { .. })));
    let fs = FixedStandard { measured: q(-2.06), known: q(-2.0) };
    assert!(matches!(Trim::one_point_fixed(info(), fs, 0, &lim), Err(FieldError::OffsetPastLimit { .. })));
    assert!(matches!(
        Trim::two_point_fixed(info(), fa, fa, 0, &lim),
        Err(FieldError::StandardsTooClose { separation_q24: 0, .. })
    ));
    // A trim made under looser limits is refused when installed under the instrument's own.
    let loose = TrimLimits::new(0.5, 0.1, 0.5).unwrap();
    let big = Trim::two_point(info(), a, b, 0, &loose).unwrap();
    assert!(matches!(Layers::new(Some(big), None, &lim, None), Err(FieldError::GainPastLimit { .. })));
    assert!(Layers::new(Some(big), None, &loose, None).is_ok());
}

#[test]
fn limits_convert_exactly() {
    assert_eq!(TrimLimits::new(0.05, 0.02, 0.5), Ok(TrimLimits::DEFAULT));
    assert_eq!(TrimLimits::new(-0.1, 0.02, 0.5), Err(FieldError::BadLimits));
    assert_eq!(TrimLimits::new(0.1, 1.0, 0.5), Err(FieldError::BadLimits));
    assert_eq!(TrimLimits::new(0.1, 0.02, f32::NAN), Err(FieldError::BadLimits));
    assert!((TrimLimits::DEFAULT.max_offset_np() - 0.05).abs() < 1e-7);
}

// ---------------------------------------------------------------------------------------------------------
// Layers on real corrections

/// The crate's linear fixed-point unit (x = (code − 32769)/(32768/6) Np at every temperature, a temperature
/// channel of 15 m°C per code from code 100) calibrated over 0…`temp_max_c` °C (5 K more accepted), with an
/// x range of ±7 Np.
fn linear(temp_max_c: i32) -> crate::test_units::LinearFixed {
    let mut o = crate::test_units::linear_fixed();
    o.header.temp_max = temp_max_c * 1000 * 1024;
    o.header.temp_hi = (temp_max_c + 5) * 1000 * 1024;
    o.header.x_min = -7 * (1 << 24);
    o.header.x_max = 7 * (1 << 24);
    o
}

/// Codes per neper of `linear`.
const SLOPE: f64 = 32768.0 / 6.0;

/// The f32 twin of `linear` at 25 °C: 32768/6 codes per neper at T_ref = 25 °C.
fn f32_twin() -> crate::Calibration {
    let mut c = crate::Calibration::nominal(16, 32769.0, SLOPE as f32, 25.0);
    c.adc.rail_margin = 16;
    c.temperature = TemperatureRange { min_c: 0.0, max_c: 50.0, extrapolation_k: 5.0 };
    c.x_range.min = -7.0;
    c.x_range.max = 7.0;
    c
}

#[test]
fn factory_state_and_cleared_trims_are_bit_identical_to_the_factory() {
    let owned = linear(50);
    let fixed = owned.view();
    let cal = f32_twin();
    let cleared = Trim::cleared(info(), 0);
    let layer_sets = [Layers::FACTORY, Layers::new(Some(cleared), None, &TrimLimits::DEFAULT, None).unwrap()];
    for layers in layer_sets {
        for code in (17u32..65_519).step_by(97) {
            for t in [0.0f32, 12.5, 25.0, 49.0] {
                let f = cal.correct(code, t);
                let l = f.map(|r| layers.apply(&r));
                assert_eq!(f.map(|r| r.x.to_bits()), l.map(|r| r.x.to_bits()), "code {code} at {t}");
                let mc = (t * 1000.0) as i32;
                let fx = fixed.correct(code, mc);
                assert_eq!(fx.and_then(|r| layers.apply_fixed(&r)), fx, "code {code} at {t}");
            }
        }
    }
    // After a trim, clearing gives the factory readings back, bit for bit.
    let trimmed = Layers::new(Some(two_point()), None, &TrimLimits::DEFAULT, None).unwrap();
    let r = cal.correct(40_000, 25.0).unwrap();
    assert_ne!(trimmed.apply(&r), r);
    let back = Layers::new(Some(Trim::cleared(info(), 0)), None, &TrimLimits::DEFAULT, None).unwrap();
    assert_eq!(back.apply(&r).x.to_bits(), r.x.to_bits());
}

#[test]
fn the_blank_reads_exactly_zero_against_itself() {
    let owned = linear(50);
    let fixed = owned.view();
    let cal = f32_twin();
    for code in [5_000u32, 20_000, 32_768, 33_001, 60_000] {
        let r = cal.correct(code, 25.0).unwrap();
        let fr = fixed.correct(code, 25_000).unwrap();
        let b = Blank::from_reading(info(), &r, 25_000, 1).unwrap();
        let bf = Blank::from_fixed(info(), &fr, 25_000, 1).unwrap();
        for trim in [None, Some(two_point()), Some(Trim::cleared(info(), 0))] {
            let l = Layers::new(trim, Some(b), &TrimLimits::DEFAULT, None).unwrap();
            let rel = l.apply(&r);
            assert_eq!(rel.x, 0.0, "code {code}");
            assert_eq!(rel.value(Unit::Absorbance), 0.0);
            assert_eq!(rel.value(Unit::Ratio), 1.0);
            let lf = Layers::new(trim, Some(bf), &TrimLimits::DEFAULT, None).unwrap();
            let relf = lf.apply_fixed(&fr).unwrap();
            assert_eq!(relf.x, 0, "code {code}");
            assert_eq!(relf.value(Unit::Absorbance), Ok(0));
            assert_eq!(relf.value(Unit::DbPower), Ok(0));
            assert_eq!(relf.value(Unit::Ratio), Ok(1 << 32));
        }
    }
}

#[test]
fn blank_relative_absorbance_of_a_tenfold_attenuation_is_one() {
    // Common practice: a sample that passes 10 % of the blank's light reads 1 AU against the blank.
    let cal = f32_twin();
    let blank_code = 40_000u32;
    let sample_code = blank_code - (SLOPE * core::f64::consts::LN_10).round() as u32; // ln(1/10) Np lower
    let b = Blank::from_reading(info(), &cal.correct(blank_code, 25.0).unwrap(), 25_000, 1).unwrap();
    let l = Layers::new(None, Some(b), &TrimLimits::DEFAULT, None).unwrap();
    let a = l.apply(&cal.correct(sample_code, 25.0).unwrap()).value(Unit::Absorbance);
    // One code is 6/32768 Np = 0.8e-4 AU: the rounding of the code is the only error.
    assert!((a - 1.0).abs() < 0.9e-4, "{a}");
}

#[test]
fn f32_and_fixed_layers_agree_within_a_quarter_lsb() {
    // The linear unit and its f32 twin agree at 25 °C; the layers must keep them within ¼ LSB
    // (1/4 of 6/32768 Np, times the trim's gain).
    let owned = linear(50);
    let fixed = owned.view();
    let cal = f32_twin();
    let trim_f = two_point();
    let q = |v: f32| (f64::from(v) * Q24).round() as i32;
    let a = FixedStandard { measured: q(-3.0 * 1.008 + 0.004), known: q(-3.0) };
    let b = FixedStandard { measured: q(1.5 * 1.008 + 0.004), known: q(1.5) };
    let trim_q = Trim::two_point_fixed(info(), a, b, 25_000, &TrimLimits::DEFAULT).unwrap();
    let blank_code = 39_000;
    let bf32 = Blank::from_reading(info(), &cal.correct(blank_code, 25.0).unwrap(), 25_000, 1).unwrap();
    let bq = Blank::from_fixed(info(), &fixed.correct(blank_code, 25_000).unwrap(), 25_000, 1).unwrap();
    let lf = Layers::new(Some(trim_f), Some(bf32), &TrimLimits::DEFAULT, None).unwrap();
    let lq = Layers::new(Some(trim_q), Some(bq), &TrimLimits::DEFAULT, None).unwrap();
    let lsb = 1.0 / SLOPE;
    let mut worst: f64 = 0.0;
    for code in (100u32..65_400).step_by(61) {
        let (Ok(r), Ok(rq)) = (cal.correct(code, 25.0), fixed.correct(code, 25_000)) else { continue };
        for (l, lq) in [(lf, lq), (lf.without_blank(), lq.without_blank())] {
            let x = f64::from(l.apply(&r).x);
            let xq = f64::from(lq.apply_fixed(&rq).unwrap().x) / Q24;
            worst = worst.max((x - xq).abs() / lsb);
        }
    }
    assert!(worst < 0.25, "worst {worst} LSB");
}

#[test]
fn records_bound_to_another_calibration_are_refused() {
    let cal = crate::Calibration::nominal(16, 32768.0, 2000.0, 25.0);
    let fp = fingerprint(&cal).unwrap();
    let mine = RecordInfo { factory: fp, ..info() };
    let t = Trim::cleared(mine, 0);
    assert!(Layers::new(Some(t), None, &TrimLimits::DEFAULT, Some(fp)).is_ok());
    let theirs = Trim::cleared(RecordInfo { factory: fp ^ 1, ..info() }, 0);
    assert_eq!(
        Layers::new(Some(theirs), None, &TrimLimits::DEFAULT, Some(fp)),
        Err(FieldError::OtherCalibration { record: RecordType::Trim, bound_to: fp ^ 1, in_use: fp })
    );
    let unbound =
        Blank::new(BlankParts { info: RecordInfo { factory: 0, ..info() }, ..blank().parts() }).unwrap();
    assert!(Layers::new(None, Some(unbound), &TrimLimits::DEFAULT, Some(fp)).is_ok());
    let b = Blank::new(BlankParts { info: RecordInfo { factory: 5, ..info() }, ..blank().parts() }).unwrap();
    assert!(matches!(
        Layers::new(None, Some(b), &TrimLimits::DEFAULT, Some(fp)),
        Err(FieldError::OtherCalibration { record: RecordType::Blank, .. })
    ));
}

#[test]
fn the_fingerprint_covers_the_calibration_and_nothing_else() {
    let cal = crate::Calibration::nominal(16, 32768.0, 2000.0, 25.0);
    let fp = fingerprint(&cal).unwrap();
    let mut img = [0u8; crate::image::layout::F32_IMAGE_LEN];
    for (serial, seq) in [("A-1", 1u32), ("ANOTHER-UNIT", 99)] {
        let info = crate::image::ImageInfo { serial, calibrated_at: 1_700_000_000, sequence: seq };
        crate::image::write(&mut img, &info, &cal).unwrap();
        let parsed = crate::image::Image::parse(&img).unwrap();
        assert_eq!(fingerprint_of_image(&parsed), fp);
    }
    // The CRC of the two payloads, computed by an independent implementation at the documented offsets.
    let mut both = img[44..76].to_vec();
    both.extend_from_slice(&img[80..264]);
    assert_eq!(crc32fast::hash(&both), fp);
    let mut other = cal;
    other.model.slope.coeffs[0] = 2000.001;
    assert_ne!(fingerprint(&other).unwrap(), fp);
}

// ---------------------------------------------------------------------------------------------------------
// Channels

#[test]
fn an_f32_bank_corrects_every_channel_at_one_temperature() {
    let mut narrow = f32_twin();
    narrow.temperature = TemperatureRange { min_c: 0.0, max_c: 20.0, extrapolation_k: 0.0 };
    let mut steep = f32_twin();
    steep.model.slope.coeffs[0] = 3000.0;
    let trimmed = Layers::new(Some(two_point()), None, &TrimLimits::DEFAULT, None).unwrap();
    let chans = [
        LogChannel { calibration: f32_twin(), layers: Layers::FACTORY },
        LogChannel { calibration: steep, layers: trimmed },
        LogChannel { calibration: narrow, layers: Layers::FACTORY },
    ];
    let bank = Bank::new(chans).unwrap();
    let cycle = bank.cycle_from_celsius(30.0).unwrap();
    let codes = [30_000, 36_000, 33_000];
    let got = bank.correct(&cycle, &codes);
    for (i, (c, g)) in chans.iter().zip(got).enumerate() {
        let want = c.calibration.correct(codes[i], 30.0).map(|r| c.layers.apply(&r));
        assert_eq!(g, want, "channel {i}");
        assert_eq!(bank.correct_one(&cycle, i, codes[i]), want);
    }
    assert!(matches!(got[2], Err(crate::Error::TemperatureOutOfRange { .. })));
    assert!(got[0].is_ok() && got[1].is_ok());
    assert_eq!(bank.correct_one(&cycle, 3, 1000), Err(crate::Error::NotCalibrated));
    assert_eq!(bank.cycle_from_celsius(f32::NAN), Err(crate::Error::NonFinite));
    let mut bad = f32_twin();
    bad.adc.bits = 0;
    let e = Bank::new([chans[0], LogChannel { calibration: bad, layers: Layers::FACTORY }]).unwrap_err();
    assert_eq!(e.channel, 1);
}

#[test]
fn a_fixed_bank_converts_the_temperature_once_and_stages_each_channel() {
    let wide = linear(50);
    let narrow = linear(20);
    let trimmed = Layers::new(Some(two_point()), Some(blank()), &TrimLimits::DEFAULT, None).unwrap();
    let chans = [
        LogChannel { calibration: wide.view(), layers: Layers::FACTORY },
        LogChannel { calibration: wide.view(), layers: trimmed },
        LogChannel { calibration: narrow.view(), layers: Layers::FACTORY },
    ];
    let bank = Bank::new(chans).and_then(|b| b.with_sensor_channel(0)).unwrap();
    // Code 2100 is 30 °C on the temperature channel: outside the narrow channel's 0…25 °C.
    let cycle = bank.cycle_from_code(2100).unwrap();
    assert_eq!(cycle.millicelsius(), 30_000);
    let codes = [30_000, 36_000, 33_000];
    let got = bank.correct(&cycle, &codes);
    for i in 0..2 {
        let c = &chans[i];
        let want = c.calibration.correct_raw(codes[i], 2100).and_then(|r| c.layers.apply_fixed(&r));
        assert_eq!(got[i], want, "channel {i}");
    }
    assert_eq!(got[2], Err(crate::Error::TemperatureOutOfRange { millicelsius: 30_000 }));
    assert!(got[0].is_ok() && got[1].is_ok());
    // m°C and θ give the same cycle; a sensor fault stops the cycle.
    assert_eq!(bank.cycle_from_millicelsius(30_000).unwrap(), cycle);
    assert_eq!(bank.cycle_from_code(4095), Err(crate::Error::Sensor(SensorFault::Open)));
    assert_eq!(bank.correct_factory(&cycle, 1, codes[1]), chans[1].calibration.correct(codes[1], 30_000));
    assert!(Bank::new(chans).unwrap().with_sensor_channel(3).is_err());
}

#[test]
fn banks_give_each_path_s_one_call_corrections_bit_for_bit() {
    // Codes at and near both rails and beyond the converter, temperatures inside, in the extrapolation and
    // beyond it: the bank's staged corrections against each path's one-call correction.
    let cal = f32_twin();
    let owned = linear(50);
    let fixed = owned.view();
    let f32_bank = Bank::new([LogChannel { calibration: cal, layers: Layers::FACTORY }]).unwrap();
    let fixed_bank = Bank::new([LogChannel { calibration: fixed, layers: Layers::FACTORY }]).unwrap();
    let codes = [0u32, 1, 16, 17, 100, 4097, 20_000, 32_769, 45_000, 61_441, 65_518, 65_519, 65_535, 70_000];
    for t_mc in [-6_000i32, -5_000, -1, 0, 12_345, 25_000, 50_000, 52_500, 55_000, 55_001, 80_000] {
        let t = t_mc as f32 / 1000.0;
        let (fc, xc) =
            (f32_bank.cycle_from_celsius(t).unwrap(), fixed_bank.cycle_from_millicelsius(t_mc).unwrap());
        for code in codes {
            let want = cal.correct(code, t).map(|r| (r.x.to_bits(), r.temperature_extrapolated));
            let got =
                f32_bank.correct_factory(&fc, 0, code).map(|r| (r.x.to_bits(), r.temperature_extrapolated));
            assert_eq!(got, want, "f32 path, code {code} at {t_mc} m°C");
            // The fixed path reports a refused temperature before the code's own check.
            let stage = fixed.stage_millicelsius(t_mc);
            let want = match (fixed.check_code(code), stage) {
                (Err(e), Ok(_)) => Err(e),
                (_, Err(e)) => Err(e),
                (Ok(()), Ok(_)) => fixed.correct(code, t_mc),
            };
            assert_eq!(
                fixed_bank.correct_factory(&xc, 0, code),
                want,
                "fixed path, code {code} at {t_mc} m°C"
            );
        }
    }
    // Both kinds of refusal are reached.
    assert!(matches!(
        f32_bank.correct_factory(&f32_bank.cycle_from_celsius(80.0).unwrap(), 0, 0),
        Err(crate::Error::Saturated { .. })
    ));
    let out = fixed_bank.cycle_from_millicelsius(80_000).unwrap();
    assert!(matches!(
        fixed_bank.correct_factory(&out, 0, 0),
        Err(crate::Error::TemperatureOutOfRange { .. })
    ));
    assert_eq!(
        f32_bank.correct_factory(&f32_bank.cycle_from_celsius(25.0).unwrap(), 1, 30_000),
        Err(crate::Error::NotCalibrated)
    );
}

#[cfg(feature = "hal")]
#[test]
fn a_layered_corrector_gives_the_cycle_trimmed_blank_relative_values() {
    use crate::hal::{Corrector, MeanCode};
    let cal = f32_twin();
    let layers = Layers::new(Some(two_point()), Some(blank()), &TrimLimits::DEFAULT, None).unwrap();
    let c = Layered { factory: cal, layers };
    assert_eq!(Corrector::validate(&c), Ok(()));
    assert_eq!(Corrector::check_code(&c, 0), Err(crate::Error::Saturated { code: 0 }));
    for (sum, n) in [(40_000u64, 1u32), (3 * 41_000 + 1, 3), (16 * 30_000 + 5, 16)] {
        let m = MeanCode::new(sum, n).unwrap();
        let want = Corrector::correct(&cal, m, 25.0).map(|r| layers.apply(&r));
        assert_eq!(Corrector::correct(&c, m, 25.0), want);
    }
}

#[test]
fn a_blank_record_in_a_larger_slot_parses_with_the_rest_left_alone() {
    let mut page = [0xffu8; 64];
    page[..44].copy_from_slice(&blank().to_bytes());
    let (b, rest) = Blank::parse_prefix(&page).unwrap();
    assert_eq!((b, rest.len()), (blank(), 20));
    assert_eq!(
        Blank::parse(&page),
        Err(RecordError::Format(FormatError::LengthMismatch { declared: 44, actual: 64 }))
    );
    // Writing into a short buffer fails and leaves it untouched.
    let mut short = [7u8; 43];
    assert_eq!(blank().write(&mut short), Err(BufferTooSmall { needed: 44, available: 43 }));
    assert_eq!(short, [7u8; 43]);
}

mod slot_choice {
    //! The A/B choice of field records: the newest usable record wins, a torn write or a record of another
    //! calibration loses, and the write plan never overwrites the record in use (the usual two-slot
    //! practice for power-fail-safe updates, common practice).
    use super::*;
    use crate::field::slots;
    use crate::record::slots::{NoValidRecord, Rejected, SequenceExhausted, SlotId};

    const FP: u32 = 0x1234_5678;

    fn trim_at(sequence: u32, written_at: u64, factory: u32) -> Vec<u8> {
        Trim::cleared(RecordInfo { sequence, written_at, factory }, 25_000).to_bytes().to_vec()
    }

    fn blank_at(sequence: u32, factory: u32) -> Vec<u8> {
        let b = blank();
        Blank::new(BlankParts { info: RecordInfo { sequence, written_at: 5, factory }, ..b.parts() })
            .unwrap()
            .to_bytes()
            .to_vec()
    }

    #[test]
    fn the_newest_usable_record_wins() {
        let (a, b) = (trim_at(3, 100, FP), trim_at(4, 90, FP));
        let s = slots::select::<Trim>(&a, &b, Some(FP)).unwrap();
        assert_eq!((s.slot, s.record.info().sequence), (SlotId::B, 4));
        assert_eq!(s.other, Rejected::Older { sequence: 3, time: 100 });
        let s = slots::select::<Trim>(&b, &a, Some(FP)).unwrap();
        assert_eq!(s.slot, SlotId::A);
        // Equal counters: the later time, then slot A; identical copies are reported as a duplicate.
        let s = slots::select::<Trim>(&trim_at(4, 90, FP), &trim_at(4, 91, FP), Some(FP)).unwrap();
        assert_eq!(s.slot, SlotId::B);
        let s = slots::select::<Trim>(&b, &b, Some(FP)).unwrap();
        assert_eq!((s.slot, s.other), (SlotId::A, Rejected::Tie { identical: true }));
        // Erased memory after a record is ignored.
        let mut padded = b.clone();
        padded.extend_from_slice(&[0xff; 16]);
        assert_eq!(slots::select::<Trim>(&a, &padded, Some(FP)).unwrap().slot, SlotId::B);
        // Blanks choose the same way.
        let s = slots::select::<Blank>(&blank_at(9, FP), &blank_at(8, 0), Some(FP)).unwrap();
        assert_eq!((s.slot, s.record.info().sequence), (SlotId::A, 9));
    }

    #[test]
    fn a_torn_or_foreign_slot_loses() {
        let good = trim_at(3, 100, FP);
        // A write cut short: the newer record is half there.
        let mut torn = trim_at(4, 200, FP);
        torn.truncate(30);
        let s = slots::select::<Trim>(&good, &torn, Some(FP)).unwrap();
        assert_eq!(s.slot, SlotId::A);
        assert!(
            matches!(s.other, Rejected::Invalid(RecordError::Format(FormatError::Truncated { .. }))),
            "{:?}",
            s.other
        );
        // Every single-bit flip of the newer record hands the choice back to the older one.
        let newer = trim_at(4, 200, FP);
        for bit in 0..newer.len() * 8 {
            let mut bad = newer.clone();
            bad[bit / 8] ^= 1 << (bit % 8);
            let s = slots::select::<Trim>(&good, &bad, Some(FP)).unwrap();
            assert_eq!(s.slot, SlotId::A, "bit {bit}");
        }
        // A blank where a trim is looked for, and a trim made on another calibration.
        let s = slots::select::<Trim>(&blank_at(9, FP), &good, Some(FP)).unwrap();
        assert!(matches!(s.other, Rejected::Invalid(RecordError::Format(FormatError::OtherRecord { .. }))));
        let s = slots::select::<Trim>(&trim_at(9, 300, FP ^ 1), &good, Some(FP)).unwrap();
        assert_eq!(
            (s.slot, s.other),
            (SlotId::B, Rejected::OtherCalibration { bound_to: FP ^ 1, sequence: 9 })
        );
        // Unbound records (fingerprint 0) belong to any calibration; no fingerprint given accepts all.
        assert!(slots::select::<Trim>(&trim_at(1, 1, 0), &[], Some(FP)).is_ok());
        assert_eq!(slots::select::<Trim>(&trim_at(9, 300, FP ^ 1), &good, None).unwrap().slot, SlotId::A);
    }

    #[test]
    fn neither_slot_usable_names_both_reasons() {
        let erased = [0xffu8; 64];
        let e = slots::select::<Blank>(&erased, &blank_at(2, FP ^ 1), Some(FP)).unwrap_err();
        assert_eq!(e.record, RecordType::Blank);
        assert!(matches!(e.a, Rejected::Invalid(RecordError::Format(FormatError::BadMagic { .. }))));
        assert_eq!(e.b, Rejected::OtherCalibration { bound_to: FP ^ 1, sequence: 2 });
        let text = std::format!("{e}");
        assert!(text.contains("slot A") && text.contains("another factory calibration"), "{text}");
        let _: &dyn core::error::Error = &e as &NoValidRecord<RecordError>;
    }

    #[test]
    fn the_write_plan_never_overwrites_the_record_in_use() {
        let (old, new) = (trim_at(3, 100, FP), trim_at(4, 90, FP));
        let p = slots::next_write::<Trim>(&old, &new, Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::A, 5));
        let p = slots::next_write::<Trim>(&new, &old, Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::B, 5));
        // Nothing valid: slot A, sequence 1.
        let p = slots::next_write::<Trim>(&[], &[0xff; 8], Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::A, 1));
        // One torn slot: write over it, above the good one's counter.
        let mut torn = new.clone();
        torn[10] ^= 4;
        let p = slots::next_write::<Trim>(&old, &torn, Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::B, 4));
        // A record of another calibration counts for the sequence, and a usable one is kept.
        let foreign = trim_at(40, 1, FP ^ 1);
        let p = slots::next_write::<Trim>(&foreign, &old, Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::A, 41));
        // Both foreign: the older one is overwritten.
        let p = slots::next_write::<Trim>(&trim_at(40, 1, 7), &trim_at(41, 1, 7), Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::A, 42));
        // The counter never wraps.
        let last = trim_at(u32::MAX, 1, FP);
        assert_eq!(slots::next_write::<Trim>(&last, &old, Some(FP)), Err(SequenceExhausted));
        // Writing where the plan says and selecting again gives the new record, and keeps the old one.
        let (mut x, y) = (foreign.clone(), old.clone());
        let p = slots::next_write::<Trim>(&x, &y, Some(FP)).unwrap();
        assert_eq!(p.slot, SlotId::A);
        x = trim_at(p.sequence, 2, FP);
        let s = slots::select::<Trim>(&x, &y, Some(FP)).unwrap();
        assert_eq!((s.slot, s.record.info().sequence), (SlotId::A, 41));
        assert_eq!(s.other, Rejected::Older { sequence: 3, time: 100 });
        // Neither usable, one of them newer: the older contents go.
        let p = slots::next_write::<Trim>(&trim_at(50, 1, 7), &trim_at(49, 1, 7), Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::B, 51));
        let p = slots::next_write::<Trim>(&trim_at(50, 1, 7), &[0u8; 3], Some(FP)).unwrap();
        assert_eq!((p.slot, p.sequence), (SlotId::B, 51));
    }
}
