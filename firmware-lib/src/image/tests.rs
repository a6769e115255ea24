use std::string::String;
use std::vec::Vec;

use proptest::prelude::*;

use super::layout::{self, header, model_f32, ranges, section, trailer};
use super::slots::{self, ActiveCalibration};
use super::*;
use crate::calibration::{BiasTerm, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL, MAX_SERIES};
use crate::error::{CalibrationDefect, Error};
use crate::record::slots::{Rejected, SequenceExhausted, SlotId, WritePlan};
use crate::record::{BufferTooSmall, FormatError};

/// A unit with every model term in use (a strong low-end bend, a high-end bend, a residual).
fn hard_unit() -> Calibration {
    crate::test_units::hard()
}

const INFO: ImageInfo<'static> =
    ImageInfo { serial: "OPM-3-000417", calibrated_at: 1_764_614_400, sequence: 3 };

fn image_of(cal: &Calibration, info: &ImageInfo<'_>) -> Vec<u8> {
    let mut buf = std::vec![0u8; layout::F32_IMAGE_LEN];
    let n = write(&mut buf, info, cal).unwrap();
    assert_eq!(n, buf.len());
    buf
}

fn typical() -> Vec<u8> {
    image_of(&hard_unit(), &INFO)
}

/// Recomputes the CRC of an image whose bytes were changed on purpose (a writer that stores bad values
/// with a correct CRC: only the structural and value checks can catch it).
fn fix_crc(img: &mut [u8]) {
    let n = img.len() - trailer::LEN;
    let crc = crc32fast::hash(&img[..n]);
    img[n..].copy_from_slice(&crc.to_le_bytes());
}

/// An image assembled from parts by the test itself, following the documented layout, with a correct CRC.
fn assemble(count: u16, sections: &[(u16, &[u8])]) -> Vec<u8> {
    let mut v = Vec::new();
    v.extend_from_slice(b"LTCI");
    v.extend_from_slice(&3u16.to_le_bytes()); // format version 3
    v.extend_from_slice(&count.to_le_bytes());
    v.extend_from_slice(&[0; 4]); // total length, set below
    v.extend_from_slice(&9u32.to_le_bytes());
    v.extend_from_slice(&1_700_000_000u64.to_le_bytes());
    v.extend_from_slice(b"ASSEMBLED\0\0\0\0\0\0\0");
    assert_eq!(v.len(), 40);
    for (kind, payload) in sections {
        v.extend_from_slice(&kind.to_le_bytes());
        v.extend_from_slice(&(payload.len() as u16).to_le_bytes());
        v.extend_from_slice(payload);
    }
    let total = (v.len() + 4) as u32;
    v[8..12].copy_from_slice(&total.to_le_bytes());
    let crc = crc32fast::hash(&v);
    v.extend_from_slice(&crc.to_le_bytes());
    v
}

/// The payloads of the two required sections of an image written by `write`.
fn payloads(img: &[u8]) -> (Vec<u8>, Vec<u8>) {
    let r0 = header::LEN + section::HEADER_LEN;
    let m0 = r0 + ranges::LEN + section::HEADER_LEN;
    (img[r0..r0 + ranges::LEN].to_vec(), img[m0..m0 + model_f32::LEN].to_vec())
}

/// Every f32 of a calibration as its bit pattern, and every integer, by exhaustive destructuring: a field
/// added to `Calibration` and forgotten by the image fails to compile here.
fn bits(c: &Calibration) -> Vec<u64> {
    let Calibration { adc, temperature, x_range, model } = *c;
    let crate::calibration::AdcScaling { bits, rail_margin, level_shift_code } = adc;
    let TemperatureRange { min_c, max_c, extrapolation_k } = temperature;
    let XRange { min, max, min_sensitivity } = x_range;
    let crate::calibration::Model {
        t_center_c,
        t_half_span_k,
        t_ref_k,
        pole,
        offset,
        slope,
        bulk,
        bias,
        residual,
    } = model;
    let BiasTerm { enabled, ln_beta0, ln_beta1, reference } = bias;
    let Residual { nx, nt, x_center, x_half_span, coeffs } = residual;
    let mut v: Vec<u64> = std::vec![u64::from(bits), u64::from(rail_margin), u64::from(enabled)];
    let f = [
        level_shift_code,
        min_c,
        max_c,
        extrapolation_k,
        min,
        max,
        min_sensitivity,
        t_center_c,
        t_half_span_k,
        t_ref_k,
        pole,
        ln_beta0,
        ln_beta1,
        reference,
        x_center,
        x_half_span,
    ];
    v.extend(f.iter().map(|x| u64::from(x.to_bits())));
    for s in [offset, slope, bulk] {
        let Series { len, coeffs } = s;
        v.push(u64::from(len));
        v.extend(coeffs.iter().map(|x| u64::from(x.to_bits())));
    }
    v.extend([u64::from(nx), u64::from(nt)]);
    v.extend(coeffs.iter().map(|x| u64::from(x.to_bits())));
    v
}

// ---------------------------------------------------------------------------------------------------------
// The CRC and the layout

#[test]
fn stored_crc_agrees_with_an_independent_implementation() {
    // crc32fast is an independent implementation of the IEEE CRC-32 (a general-purpose reference library).
    let img = typical();
    let n = img.len() - 4;
    let stored = u32::from_le_bytes(img[n..].try_into().unwrap());
    assert_eq!(stored, crc32fast::hash(&img[..n]));
    assert_eq!(Image::parse(&img).unwrap().crc(), stored);
}

#[test]
fn layout_parts_are_contiguous_and_sized() {
    for part in layout::PARTS {
        let mut at = 0;
        for f in part.fields {
            assert_eq!(f.offset, at, "{}.{} not contiguous", part.name, f.name);
            at = f.end();
        }
        let len = match part.name {
            "header" => header::LEN,
            "section header" => section::HEADER_LEN,
            "ranges" => ranges::LEN,
            "model_f32" => model_f32::LEN,
            "sensor" => layout::sensor::LEN,
            "fixed" => layout::fixed::HEAD_LEN,
            "trailer" => trailer::LEN,
            other => panic!("unexpected part {other}"),
        };
        assert_eq!(at, len, "{}", part.name);
    }
    assert_eq!(header::LEN, 40);
    assert_eq!(ranges::LEN, 32);
    assert_eq!(model_f32::LEN, 184);
    assert_eq!(layout::fixed::HEAD_LEN, 96);
    assert_eq!(layout::F32_IMAGE_LEN, 268);
    // Every table's count field is a u16 field of its own part.
    for t in layout::fixed::TABLES {
        assert!(layout::fixed::FIELDS.contains(&t.count), "{}", t.name);
        assert_eq!(t.count.kind, crate::record::layout::Kind::U16, "{}", t.name);
    }
}

#[test]
fn written_bytes_sit_where_the_layout_says() {
    // Read a few fields back by hand at their documented offsets, independently of the parser.
    let img = typical();
    assert_eq!(&img[0..4], b"LTCI");
    assert_eq!(u16::from_le_bytes([img[4], img[5]]), 3);
    assert_eq!(u16::from_le_bytes([img[6], img[7]]), 2);
    assert_eq!(u32::from_le_bytes(img[8..12].try_into().unwrap()), 268);
    assert_eq!(u32::from_le_bytes(img[12..16].try_into().unwrap()), 3);
    assert_eq!(u64::from_le_bytes(img[16..24].try_into().unwrap()), 1_764_614_400);
    assert_eq!(&img[24..40], b"OPM-3-000417\0\0\0\0");
    assert_eq!(u16::from_le_bytes([img[40], img[41]]), 0x0001);
    assert_eq!(u16::from_le_bytes([img[42], img[43]]), 32);
    assert_eq!(img[44], 16); // adc bits
    assert_eq!(f32::from_le_bytes(img[52..56].try_into().unwrap()), -20.0); // t_min_c
    assert_eq!(u16::from_le_bytes([img[76], img[77]]), 0x0002);
    assert_eq!(u16::from_le_bytes([img[78], img[79]]), 184);
    assert_eq!(f32::from_le_bytes(img[80..84].try_into().unwrap()), 32768.0); // level shift
    assert_eq!(img[80 + 23], 1); // bias enabled
    assert_eq!(f32::from_le_bytes(img[80 + 52..80 + 56].try_into().unwrap()), 1900.0);
    // slope c0
}

// ---------------------------------------------------------------------------------------------------------
// Round trips

#[test]
fn round_trip_with_accessors() {
    let img = typical();
    let parsed = Image::parse(&img).unwrap();
    assert_eq!(bits(&parsed.calibration()), bits(&hard_unit()));
    assert_eq!(parsed.serial(), "OPM-3-000417");
    assert_eq!(parsed.calibrated_at(), 1_764_614_400);
    assert_eq!(parsed.sequence(), 3);
    assert_eq!(parsed.version(), 3);
    assert_eq!(parsed.len(), 268);
    assert_eq!(parsed.as_bytes(), &img[..]);
    let kinds: Vec<u16> = parsed.sections().map(|s| s.kind).collect();
    assert_eq!(kinds, [ranges::KIND, model_f32::KIND]);
    // The loaded calibration corrects exactly as the original.
    let c = hard_unit();
    for code in [20_000u32, 32_768, 40_000] {
        assert_eq!(parsed.calibration().correct(code, 40.0), c.correct(code, 40.0));
    }
}

#[test]
fn empty_and_full_length_serials() {
    for s in ["", "0123456789ABCDEF", " lead and trail "] {
        let info = ImageInfo { serial: s, ..INFO };
        let img = image_of(&hard_unit(), &info);
        assert_eq!(Image::parse(&img).unwrap().serial(), s);
    }
}

#[test]
fn optional_sections_are_skipped_and_kept() {
    let table: Vec<u8> = (0..2048u32).map(|i| (i * 7) as u8).collect();
    let extra = [Section { kind: 0x8010, payload: &table }, Section { kind: 0x8011, payload: &[] }];
    let len = encoded_len(&extra).unwrap();
    assert_eq!(len, 268 + 4 + 2048 + 4);
    let mut buf = std::vec![0u8; len];
    assert_eq!(write_with_sections(&mut buf, &INFO, &hard_unit(), &extra).unwrap(), len);
    let img = Image::parse(&buf).unwrap();
    assert_eq!(bits(&img.calibration()), bits(&hard_unit()));
    assert_eq!(img.section(0x8010), Some(&table[..]));
    assert_eq!(img.section(0x8011), Some(&[][..]));
    assert_eq!(img.section(0x8012), None);
    assert_eq!(img.sections().count(), 4);
}

/// Finite f32 of any bit pattern (both zeros, subnormals, extremes).
fn finite() -> impl Strategy<Value = f32> + Clone {
    any::<u32>().prop_map(f32::from_bits).prop_filter("finite", |v| v.is_finite())
}

fn series(
    c0: impl Strategy<Value = f32>,
    rest: impl Strategy<Value = f32> + Clone,
) -> impl Strategy<Value = Series> {
    (0..=MAX_SERIES as u8, c0, proptest::array::uniform5(rest)).prop_map(|(len, c0, r)| {
        let mut s = Series::ZERO;
        s.len = len;
        s.coeffs[0] = c0;
        s.coeffs[1..].copy_from_slice(&r);
        s
    })
}

prop_compose! {
    fn calibration()(
        bits in 8u8..=24,
        margin_frac in 0.0f64..0.2,
        level in -1e7f32..1e7,
        t_min in -60.0f32..40.0,
        t_span in 5.0f32..150.0,
        extra in 0.0f32..10.0,
        x_min in -20.0f32..0.0,
        x_span in 0.5f32..20.0,
        min_sens in finite(),
        pole in -0.5f32..0.5,
        t_ref in 150.0f32..500.0,
        offset in series(-1e6f32..1e6, -1e6f32..1e6),
        slope_len in 1..=MAX_SERIES as u8,
        slope_c0 in 100.0f32..5000.0,
        slope_rest in proptest::array::uniform5(-0.04f32..0.04),
        bulk in series(0.0f32..1.0, 0.0f32..1.0),
        bias in (any::<bool>(), -60.0f32..29.0, -20.0f32..20.0, -1e6f32..1e6),
        res_dims in (0..=MAX_RESIDUAL as u8, 0..=MAX_RESIDUAL as u8),
        res_norm in (-20.0f32..20.0, 1.0f32..100.0),
        res in proptest::array::uniform16(-1e-5f32..1e-5),
    ) -> Calibration {
        let mut c = Calibration::nominal(bits, level, slope_c0, 25.0);
        let max = (1u64 << bits) - 1;
        c.adc.rail_margin = (max as f64 * margin_frac) as u32;
        c.temperature = TemperatureRange { min_c: t_min, max_c: t_min + t_span, extrapolation_k: extra };
        c.x_range = XRange { min: x_min, max: x_min + x_span, min_sensitivity: min_sens };
        // Values within what `Calibration::validate` proves usable (a level shift within ±2^26 codes, terms f32
        // evaluates, a model monotone in x). Normalise τ over the range with its excursions so |τ| ≤ 1, where
        // the slope series stays positive.
        c.model.t_center_c = t_min + 0.5 * t_span;
        c.model.t_half_span_k = 0.5 * t_span + extra + 1.0;
        c.model.t_ref_k = t_ref;
        c.model.pole = pole;
        c.model.offset = offset;
        c.model.slope.len = slope_len;
        for (d, r) in c.model.slope.coeffs[1..].iter_mut().zip(slope_rest) {
            *d = r * slope_c0;
        }
        c.model.bulk = bulk;
        c.model.bias = BiasTerm { enabled: bias.0, ln_beta0: bias.1, ln_beta1: bias.2, reference: bias.3 };
        c.model.residual = Residual { nx: res_dims.0, nt: res_dims.1, x_center: res_norm.0, x_half_span: res_norm.1, coeffs: res };
        c
    }
}

fn serial() -> impl Strategy<Value = String> {
    proptest::collection::vec(0x20u8..=0x7e, 0..=16).prop_map(|b| String::from_utf8(b).unwrap())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn calibration_image_calibration_is_bit_exact(
        cal in calibration(), s in serial(), at in any::<u64>(), seq in any::<u32>()
    ) {
        prop_assume!(cal.validate().is_ok());
        let info = ImageInfo { serial: &s, calibrated_at: at, sequence: seq };
        let img = image_of(&cal, &info);
        let parsed = Image::parse(&img).unwrap();
        prop_assert_eq!(bits(&parsed.calibration()), bits(&cal));
        prop_assert_eq!(parsed.serial(), s.as_str());
        prop_assert_eq!(parsed.calibrated_at(), at);
        prop_assert_eq!(parsed.sequence(), seq);
        // Writing the parsed calibration again gives the same bytes.
        prop_assert_eq!(image_of(&parsed.calibration(), &info), img);
    }

    /// Someone else's images: byte errors anywhere after the magic, with the CRC recomputed (as a faulty
    /// writer would). Whatever is accepted must be exactly what our writer would have written, so no byte
    /// of an accepted image escapes the checks.
    #[test]
    fn corrupted_images_with_a_correct_crc_are_refused_or_canonical(
        edits in proptest::collection::vec((4usize..260, any::<u8>()), 1..6)
    ) {
        let mut img = typical();
        for (at, v) in edits {
            img[at] = v;
        }
        fix_crc(&mut img);
        if let Ok(p) = Image::parse(&img) {
            prop_assert!(p.calibration().validate().is_ok());
            let info = ImageInfo { serial: p.serial(), calibrated_at: p.calibrated_at(), sequence: p.sequence() };
            prop_assert_eq!(image_of(&p.calibration(), &info), img);
        }
    }

    /// Two units' images spliced at a random point (a write torn between two calibrations): refused unless
    /// the splice equals one of them.
    #[test]
    fn spliced_images_are_refused(cut in 1usize..263, seq in 4u32..100) {
        let a = typical();
        let mut other = hard_unit();
        other.model.slope.coeffs[0] = 1901.5;
        let b = image_of(&other, &ImageInfo { serial: "OPM-3-000418", calibrated_at: 1_764_700_000, sequence: seq });
        let mut s = a[..cut].to_vec();
        s.extend_from_slice(&b[cut..]);
        match Image::parse(&s) {
            Ok(_) => prop_assert!(s == a || s == b),
            Err(_) => prop_assert!(s != a && s != b),
        }
    }

    #[test]
    fn arbitrary_bytes_are_refused_without_panic(bytes in proptest::collection::vec(any::<u8>(), 0..400)) {
        prop_assert!(Image::parse(&bytes).is_err());
        prop_assert!(Image::parse_prefix(&bytes).is_err());
    }

    /// Arbitrary bodies behind a plausible header and a correct CRC: the structure checks must hold alone.
    #[test]
    fn arbitrary_bodies_with_correct_crc_never_panic(
        count in 0u16..4, body in proptest::collection::vec(any::<u8>(), 0..300)
    ) {
        let mut v = assemble(count, &[]);
        v.truncate(40);
        v.extend_from_slice(&body);
        while !v.len().is_multiple_of(4) { v.push(0); }
        v.extend_from_slice(&[0; 4]);
        let total = v.len() as u32;
        v[8..12].copy_from_slice(&total.to_le_bytes());
        fix_crc(&mut v);
        if let Ok(p) = Image::parse(&v) {
            prop_assert!(p.calibration().validate().is_ok());
        }
    }
}

// ---------------------------------------------------------------------------------------------------------
// Corruption: every single-bit flip, every truncation

/// Which check a single flipped bit at `byte` must trip, by the documented order of the checks.
fn expected_for_flip(byte: usize, got: &ImageError) -> bool {
    match byte {
        0..=3 => matches!(got, ImageError::Format(FormatError::BadMagic { .. })),
        4..=5 => matches!(got, ImageError::Format(FormatError::UnsupportedVersion { .. })),
        8..=11 => matches!(
            got,
            ImageError::Format(FormatError::BadLength { .. })
                | ImageError::Format(FormatError::Truncated { .. })
                | ImageError::Format(FormatError::LengthMismatch { .. })
        ),
        _ => matches!(got, ImageError::Format(FormatError::CrcMismatch { .. })),
    }
}

/// Every prefix of `img` is refused as truncated: until the declared length can be read, the header is what
/// is missing; then the declared length.
fn check_every_truncation(img: &[u8]) {
    for n in 0..img.len() {
        let want = if n < header::TOTAL_LEN.end() { header::LEN } else { img.len() };
        assert_eq!(
            Image::parse(&img[..n]).unwrap_err(),
            ImageError::Format(FormatError::Truncated { needed: want as u32, available: n as u32 }),
            "length {n}"
        );
    }
}

fn check_every_bit_flip(img: &[u8]) -> usize {
    let mut work = img.to_vec();
    // A slot: the image followed by erased flash, parsed with parse_prefix.
    let mut slot = img.to_vec();
    slot.extend_from_slice(&[0xff; 64]);
    let mut n = 0;
    for byte in 0..img.len() {
        for bit in 0..8 {
            work[byte] ^= 1 << bit;
            match Image::parse(&work) {
                Ok(_) => panic!("flip of bit {bit} of byte {byte} accepted"),
                Err(e) => assert!(expected_for_flip(byte, &e), "byte {byte} bit {bit}: {e:?}"),
            }
            work[byte] ^= 1 << bit;
            slot[byte] ^= 1 << bit;
            assert!(Image::parse_prefix(&slot).is_err(), "slot: flip of bit {bit} of byte {byte} accepted");
            slot[byte] ^= 1 << bit;
            n += 1;
        }
    }
    assert!(Image::parse(&work).is_ok(), "the image was restored");
    n
}

#[test]
fn every_single_bit_flip_is_rejected() {
    assert_eq!(check_every_bit_flip(&typical()), 268 * 8);
}

#[test]
fn every_single_bit_flip_of_a_larger_image_is_rejected() {
    // A few-KiB image, the size the fixed-point tables will bring.
    let table: Vec<u8> = (0..2048u32).map(|i| (i * 31 + 7) as u8).collect();
    let extra = [Section { kind: 0x8010, payload: &table }];
    let mut buf = std::vec![0u8; encoded_len(&extra).unwrap()];
    write_with_sections(&mut buf, &INFO, &hard_unit(), &extra).unwrap();
    assert_eq!(check_every_bit_flip(&buf), buf.len() * 8);
}

#[test]
fn every_truncation_is_rejected() {
    let img = typical();
    check_every_truncation(&img);
    for n in 0..img.len() {
        assert_eq!(Image::parse_prefix(&img[..n]).unwrap_err(), Image::parse(&img[..n]).unwrap_err());
    }
}

#[test]
fn erased_blank_and_foreign_memory_are_not_images() {
    assert_eq!(
        Image::parse(&[0xff; 268]).unwrap_err(),
        ImageError::Format(FormatError::BadMagic { found: [0xff; 4] })
    );
    assert_eq!(
        Image::parse(&[0; 268]).unwrap_err(),
        ImageError::Format(FormatError::BadMagic { found: [0; 4] })
    );
    assert!(matches!(
        Image::parse(b"{\"format\": \"json\"}"),
        Err(ImageError::Format(FormatError::BadMagic { .. }))
    ));
}

// ---------------------------------------------------------------------------------------------------------
// Each check has its own error

#[test]
fn header_errors() {
    let img = typical();
    // Another version, older (version 1 had no binding of the fixed section, version 2 no sensor section
    // and no empty residual table) or newer, is refused by name.
    for found in [1u16, 2, 4] {
        let mut v = img.clone();
        v[4..6].copy_from_slice(&found.to_le_bytes());
        assert_eq!(
            Image::parse(&v).unwrap_err(),
            ImageError::Format(FormatError::UnsupportedVersion { found, supported: 3 })
        );
    }
    for bad in [0u32, 43, 262, 65540, u32::MAX] {
        let mut v = img.clone();
        v[8..12].copy_from_slice(&bad.to_le_bytes());
        assert_eq!(
            Image::parse(&v).unwrap_err(),
            ImageError::Format(FormatError::BadLength { declared: bad, min: 44, max: 65536 })
        );
    }
    let mut v = img.clone();
    v.push(0);
    assert_eq!(
        Image::parse(&v).unwrap_err(),
        ImageError::Format(FormatError::LengthMismatch { declared: 268, actual: 269 })
    );
    assert!(Image::parse_prefix(&v).is_ok());
    let mut v = img.clone();
    v[100] ^= 0x10;
    let computed = crc32fast::hash(&v[..264]);
    let stored = u32::from_le_bytes(v[264..].try_into().unwrap());
    assert_eq!(
        Image::parse(&v).unwrap_err(),
        ImageError::Format(FormatError::CrcMismatch { stored, computed })
    );
}

#[test]
fn structure_errors() {
    let img = typical();
    let (r, m) = payloads(&img);
    let ok = assemble(2, &[(ranges::KIND, &r), (model_f32::KIND, &m)]);
    assert!(Image::parse(&ok).is_ok());
    // Sections in the other order are fine too.
    assert!(Image::parse(&assemble(2, &[(model_f32::KIND, &m), (ranges::KIND, &r)])).is_ok());

    let cases: &[(Vec<u8>, ImageError)] = &[
        (
            assemble(3, &[(ranges::KIND, &r), (model_f32::KIND, &m)]),
            ImageError::SectionCount { declared: 3, found: 2 },
        ),
        (assemble(1, &[(ranges::KIND, &r)]), ImageError::MissingSection { kind: model_f32::KIND }),
        (assemble(1, &[(model_f32::KIND, &m)]), ImageError::MissingSection { kind: ranges::KIND }),
        (
            assemble(3, &[(ranges::KIND, &r), (model_f32::KIND, &m), (ranges::KIND, &r)]),
            ImageError::DuplicateSection { kind: ranges::KIND },
        ),
        (
            assemble(3, &[(ranges::KIND, &r), (0x0042, &[0; 8]), (model_f32::KIND, &m)]),
            ImageError::UnknownSection { kind: 0x0042 },
        ),
        (
            assemble(2, &[(ranges::KIND, &r[..28]), (model_f32::KIND, &m)]),
            ImageError::SectionLength { kind: ranges::KIND, found: 28, expected: 32 },
        ),
    ];
    for (bytes, want) in cases {
        assert_eq!(&Image::parse(bytes).unwrap_err(), want);
    }
    // Misaligned section inside an aligned total: 3 payload bytes + 1 trailing byte.
    let mut v = assemble(3, &[(ranges::KIND, &r), (model_f32::KIND, &m), (0x8001, &[1, 2, 3, 4])]);
    let at = 40 + 36 + 188 + 2;
    v[at..at + 2].copy_from_slice(&3u16.to_le_bytes());
    fix_crc(&mut v);
    assert_eq!(Image::parse(&v).unwrap_err(), ImageError::SectionAlignment { kind: 0x8001, len: 3 });
    // A section header that runs past the body.
    let mut v = img.clone();
    v[78..80].copy_from_slice(&188u16.to_le_bytes());
    fix_crc(&mut v);
    assert_eq!(Image::parse(&v).unwrap_err(), ImageError::SectionOverrun { offset: 76 });
    // (A partial section header cannot occur without a misaligned section before it: the body is a
    // multiple of 4 bytes, and the alignment check comes first.)
}

#[test]
fn value_errors() {
    let img = typical();
    let m0 = 80; // model_f32 payload offset
    let r0 = 44; // ranges payload offset
    let edit = |at: usize, bytes: &[u8]| {
        let mut v = img.clone();
        v[at..at + bytes.len()].copy_from_slice(bytes);
        fix_crc(&mut v);
        Image::parse(&v).unwrap_err()
    };
    assert_eq!(edit(24 + 3, &[0x07]), ImageError::BadSerial); // a control character
    assert_eq!(edit(24 + 2, &[0x80]), ImageError::BadSerial); // not ASCII
    assert_eq!(edit(24 + 14, b"X"), ImageError::BadSerial); // text after the NUL padding
    assert_eq!(
        edit(r0 + 2, &[1]),
        ImageError::Format(FormatError::ReservedNotZero { offset: (r0 + 2) as u32 })
    );
    assert_eq!(
        edit(m0 + 27, &[9]),
        ImageError::Format(FormatError::ReservedNotZero { offset: (m0 + 27) as u32 })
    );
    assert_eq!(
        edit(m0 + 23, &[2]),
        ImageError::Format(FormatError::BadFlag { field: "bias_enabled", found: 2 })
    );
    assert_eq!(
        edit(m0 + 21, &[7]),
        ImageError::Value(ImageValueError::TableSize { field: "slope_len", found: 7, capacity: 6 })
    );
    assert_eq!(
        edit(m0 + 25, &[5]),
        ImageError::Value(ImageValueError::TableSize { field: "residual_nt", found: 5, capacity: 4 })
    );
    // NaN in an unused coefficient (slope has 3 terms; index 5 is unused) is still refused.
    assert_eq!(
        edit(m0 + 52 + 20, &f32::NAN.to_le_bytes()),
        ImageError::Value(ImageValueError::NonFinite { field: "slope_coeffs", index: 5 })
    );
    assert_eq!(
        edit(r0 + 12, &f32::INFINITY.to_le_bytes()),
        ImageError::Value(ImageValueError::NonFinite { field: "t_max_c", index: 0 })
    );
    for bits in [0u8, 25] {
        assert_eq!(
            edit(r0, &[bits]),
            ImageError::Value(ImageValueError::Calibration(Error::InvalidCalibration(
                CalibrationDefect::AdcBits
            )))
        );
    }
    // A reversed temperature range.
    assert_eq!(
        edit(r0 + 8, &100.0f32.to_le_bytes()),
        ImageError::Value(ImageValueError::Calibration(Error::InvalidCalibration(
            CalibrationDefect::TemperatureRange
        )))
    );
    // A negative slope.
    assert_eq!(
        edit(m0 + 52, &(-1900.0f32).to_le_bytes()),
        ImageError::Value(ImageValueError::Calibration(Error::InvalidCalibration(
            CalibrationDefect::ZeroSlope
        )))
    );
}

#[test]
fn errors_display_specifically() {
    let e = ImageError::Format(FormatError::Truncated { needed: 268, available: 100 });
    assert_eq!(std::format!("{e}"), "image truncated: 100 bytes, 268 needed");
    let e = ImageError::Format(FormatError::BadMagic { found: *b"\x7fELF" });
    assert_eq!(
        std::format!("{e}"),
        "not a calibration image: starts with 7f 45 4c 46 (erased or foreign data)"
    );
    let e = ImageError::Value(ImageValueError::NonFinite { field: "pole", index: 0 });
    assert_eq!(std::format!("{e}"), "pole[0] is NaN or infinite");
}

// ---------------------------------------------------------------------------------------------------------
// Writing

#[test]
fn write_errors_leave_the_buffer_untouched() {
    let cal = hard_unit();
    let mut buf = [0xa5u8; 300];
    let e = write(&mut buf[..100], &INFO, &cal).unwrap_err();
    assert_eq!(e, WriteError::BufferTooSmall(BufferTooSmall { needed: 268, available: 100 }));
    for s in ["0123456789ABCDEFG", "tab\there", "Prüfling-7"] {
        let info = ImageInfo { serial: s, ..INFO };
        assert_eq!(write(&mut buf, &info, &cal).unwrap_err(), WriteError::BadSerial, "{s:?}");
    }
    let mut nan = cal;
    nan.model.bulk.coeffs[4] = f32::NAN;
    assert_eq!(
        write(&mut buf, &INFO, &nan).unwrap_err(),
        WriteError::Value(ImageValueError::NonFinite { field: "bulk_coeffs", index: 4 })
    );
    let mut long = cal;
    long.model.offset.len = 9;
    assert!(matches!(
        write(&mut buf, &INFO, &long),
        Err(WriteError::Value(ImageValueError::TableSize { .. }))
    ));
    let mut bad = cal;
    bad.x_range.max = bad.x_range.min;
    assert!(matches!(write(&mut buf, &INFO, &bad), Err(WriteError::Value(ImageValueError::Calibration(_)))));
    for (kind, payload) in [(0x0042u16, &[0u8; 4][..]), (ranges::KIND, &[0; 32][..]), (0x8042, &[0; 3][..])] {
        let extra = [Section { kind, payload }];
        assert_eq!(
            write_with_sections(&mut buf, &INFO, &cal, &extra).unwrap_err(),
            WriteError::BadSection { kind }
        );
    }
    let big = std::vec![0u8; 65532];
    let extra = [Section { kind: 0x8001, payload: &big }];
    assert_eq!(
        write_with_sections(&mut buf, &INFO, &cal, &extra).unwrap_err(),
        WriteError::TooLong { len: (268 + 4 + 65532) as u32 }
    );
    assert!(buf.iter().all(|&b| b == 0xa5), "a failed write changed the buffer");
}

// ---------------------------------------------------------------------------------------------------------
// Two slots

fn unit_image(seq: u32, at: u64, slope: f32) -> Vec<u8> {
    let mut c = hard_unit();
    c.model.slope.coeffs[0] = slope;
    let mut v = image_of(&c, &ImageInfo { serial: "OPM-3-000417", calibrated_at: at, sequence: seq });
    v.extend_from_slice(&[0xff; 60]); // the rest of a 324-byte slot, erased
    v
}

#[test]
fn the_newest_valid_slot_wins() {
    let old = unit_image(4, 1_800_000_000, 1900.0);
    let new = unit_image(5, 1_700_000_000, 1950.0); // an older clock: the counter decides
    let s = slots::select(&old, &new).unwrap();
    assert_eq!(s.slot, SlotId::B);
    assert_eq!(s.record.calibration().model.slope.coeffs[0], 1950.0);
    assert_eq!(s.other, Rejected::Older { sequence: 4, time: 1_800_000_000 });
    let s = slots::select(&new, &old).unwrap();
    assert_eq!(s.slot, SlotId::A);

    // Equal counters: the later time, then slot A.
    let a = unit_image(5, 1_700_000_000, 1900.0);
    let b = unit_image(5, 1_700_000_100, 1950.0);
    assert_eq!(slots::select(&a, &b).unwrap().slot, SlotId::B);
    let a2 = a.clone();
    let s = slots::select(&a, &a2).unwrap();
    assert_eq!((s.slot, s.other), (SlotId::A, Rejected::Tie { identical: true }));
    let c = unit_image(5, 1_700_000_000, 1950.0);
    assert_eq!(slots::select(&a, &c).unwrap().other, Rejected::Tie { identical: false });
}

#[test]
fn an_invalid_slot_is_reported_with_its_error() {
    let good = unit_image(2, 1_700_000_000, 1900.0);
    let mut bad = unit_image(3, 1_700_000_000, 1950.0);
    bad[150] ^= 1;
    let s = slots::select(&good, &bad).unwrap();
    assert_eq!(s.slot, SlotId::A);
    assert!(matches!(s.other, Rejected::Invalid(ImageError::Format(FormatError::CrcMismatch { .. }))));
    let s = slots::select(&[0xff; 324], &good).unwrap();
    assert_eq!(
        (s.slot, s.other),
        (SlotId::B, Rejected::Invalid(ImageError::Format(FormatError::BadMagic { found: [0xff; 4] })))
    );
}

#[test]
fn neither_slot_valid_means_not_calibrated() {
    let mut bad = unit_image(3, 1_700_000_000, 1950.0);
    bad[150] ^= 1;
    let sel = slots::select(&[0xff; 324], &bad);
    let e = sel.unwrap_err();
    assert_eq!(e.a, Rejected::Invalid(ImageError::Format(FormatError::BadMagic { found: [0xff; 4] })));
    assert!(matches!(e.b, Rejected::Invalid(ImageError::Format(FormatError::CrcMismatch { .. }))));
    let active = ActiveCalibration::from_selection(&sel);
    assert!(!active.is_calibrated());
    assert_eq!(active.correct(32768, 25.0), Err(Error::NotCalibrated));
    assert_eq!(active.calibration().err(), Some(Error::NotCalibrated));
    assert_eq!(Error::from(e), Error::NotCalibrated);
    // With a valid slot, the active calibration corrects as the image's.
    let good = unit_image(2, 1_700_000_000, 1900.0);
    let active = ActiveCalibration::from_selection(&slots::select(&bad, &good));
    assert_eq!(active.correct(33000, 30.0), hard_unit().correct(33000, 30.0));
}

#[test]
fn a_write_cut_short_at_any_byte_keeps_the_old_image() {
    // Slot A holds sequence 6; the new image goes to slot B over an older image, and power fails after k
    // bytes. At every k the unit boots with a valid image, the new one only once it is complete.
    let a = unit_image(6, 1_700_000_000, 1900.0);
    let b_old = unit_image(5, 1_690_000_000, 1880.0);
    let plan = slots::next_write(&a, &b_old).unwrap();
    assert_eq!(plan, WritePlan { slot: SlotId::B, sequence: 7 });
    let new = unit_image(plan.sequence, 1_710_000_000, 1920.0);
    let mut b = b_old.clone();
    for k in 0..=new.len() {
        b[..k].copy_from_slice(&new[..k]);
        let s = slots::select(&a, &b).unwrap();
        let slope = s.record.calibration().model.slope.coeffs[0];
        if k < 268 {
            assert_eq!((s.slot, slope), (SlotId::A, 1900.0), "k = {k}");
        } else {
            assert_eq!((s.slot, slope), (SlotId::B, 1920.0), "k = {k}");
        }
        b.copy_from_slice(&b_old);
    }
}

#[test]
fn next_write_plans() {
    let erased = [0xffu8; 324];
    assert_eq!(slots::next_write(&erased, &erased), Ok(WritePlan { slot: SlotId::A, sequence: 1 }));
    let a = unit_image(1, 1_700_000_000, 1900.0);
    assert_eq!(slots::next_write(&a, &erased), Ok(WritePlan { slot: SlotId::B, sequence: 2 }));
    let b = unit_image(2, 1_700_000_000, 1900.0);
    assert_eq!(slots::next_write(&a, &b), Ok(WritePlan { slot: SlotId::A, sequence: 3 }));
    let last = unit_image(u32::MAX, 1_700_000_000, 1900.0);
    assert_eq!(slots::next_write(&last, &erased), Err(SequenceExhausted));
}

// ---------------------------------------------------------------------------------------------------------
// The fixed section

mod fixed_section {
    use std::vec;

    use super::*;
    use crate::fixed::{FixedCalibration, FixedHeader};
    use layout::fixed as lf;

    use crate::test_units::LinearFixed as Owned;

    /// Owned fixed-point tables on the crate's linear unit's grids and sensor span: a unit of about
    /// x = (code − 32768)/4096 Np made uneven on purpose, so that every table's content matters: drifting
    /// offset and slope, a bias floor and a sensitivity limit, a non-zero residual, a sensor table. The
    /// converter is that of `hard_unit()` (16 bits, rail margin 16), as the format requires.
    pub(super) fn owned(seed: u32, sensor: bool, bias: bool) -> Owned {
        // A small deterministic generator (an LCG with the usual Numerical Recipes constants, common
        // practice): the content only has to be uneven and reproducible.
        let mut state = seed.wrapping_mul(2_654_435_761).wrapping_add(1);
        let mut next = move |span: i32| {
            state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            (state >> 8) as i32 % span
        };
        // The linear unit's header, with the bias tables as asked and an x range of ±7 Np.
        let header = FixedHeader {
            bias_bend: bias,
            sensitivity_limit: bias,
            x_min: -7 * (1 << 24),
            x_max: 7 * (1 << 24),
            ..crate::test_units::LINEAR_HEADER
        };
        let q24 = 1 << 24;
        Owned {
            header,
            // Stored divided by 6, as the fixed tables store their control points.
            offset: (0..7).map(|i| ((32768 << 14) + 300_000 * i + next(50_000)) / 6).collect(),
            inv_slope: (0..7).map(|i| ((1 << 30) - 2_000_000 * i + next(100_000)) / 6).collect(),
            ln_bias: if bias {
                (0..7).map(|i| (-11 * q24 + i * q24 / 2 + next(1000)) / 6).collect()
            } else {
                vec![]
            },
            u_min: if bias {
                (0..7).map(|i| (-10 * q24 + i * q24 / 2 + next(1000)) / 6).collect()
            } else {
                vec![]
            },
            residual: (0..56).map(|_| next(400) as i16 - 200).collect(),
            sensor: if sensor {
                (0..19).map(|i| ((i - 1) * 256 * 10 * 1024 + next(500)) / 6).collect()
            } else {
                vec![]
            },
            has_sensor: sensor,
        }
    }

    /// Storage of the size of these small tables.
    type Small = FixedStorage<7, 56, 19>;

    pub(super) fn image_with(fixed: &FixedCalibration<'_>) -> Vec<u8> {
        let cal = hard_unit();
        let len = encoded_len_with_fixed(&cal, Some(fixed), &[]).unwrap();
        let mut buf = vec![0u8; len];
        assert_eq!(write_with_fixed(&mut buf, &INFO, &cal, Some(fixed), &[]).unwrap(), len);
        buf
    }

    /// Offset of the fixed section's payload in an image written by `write_with_fixed` (after the two
    /// required sections and its own section header).
    const P0: usize = 268;

    fn edit(img: &[u8], at: usize, bytes: &[u8]) -> Vec<u8> {
        let mut v = img.to_vec();
        v[at..at + bytes.len()].copy_from_slice(bytes);
        fix_crc(&mut v);
        v
    }

    /// Issue 20, item 8: an image whose f32 model and fixed tables come from different units (sections
    /// spliced, the CRC recomputed) is refused; the fixed section carries the fingerprint of the f32
    /// calibration it was built from.
    #[test]
    fn item08_fixed_tables_spliced_from_another_unit_are_refused() {
        let tables = owned(5, true, true);
        let a = hard_unit();
        let mut b = hard_unit();
        b.model.offset.coeffs[0] += 1.0;
        assert_eq!(b.validate(), Ok(()));
        let write_of = |cal: &Calibration| {
            let len = encoded_len_with_fixed(cal, Some(&tables.view()), &[]).unwrap();
            let mut buf = vec![0u8; len];
            write_with_fixed(&mut buf, &INFO, cal, Some(&tables.view()), &[]).unwrap();
            buf
        };
        let (img_a, img_b) = (write_of(&a), write_of(&b));
        assert_eq!(img_a.len(), img_b.len());
        let at = |f: &crate::record::layout::Field| P0 + f.offset;
        // Each image stores the fingerprint of its own f32 sections (the one field records are bound to).
        let stored = |img: &[u8]| {
            u32::from_le_bytes(
                img[at(&lf::MODEL_FINGERPRINT)..at(&lf::MODEL_FINGERPRINT) + 4].try_into().unwrap(),
            )
        };
        let (fa, fb) = (crate::field::fingerprint(&a).unwrap(), crate::field::fingerprint(&b).unwrap());
        assert_ne!(fa, fb);
        assert_eq!(stored(&img_a), fa);
        assert_eq!(stored(&img_b), fb);
        assert!(Image::parse(&img_a).is_ok() && Image::parse(&img_b).is_ok());
        // A's f32 sections with B's fixed section (identical tables, another calibration), and the reverse.
        let fixed_start = P0 - section::HEADER_LEN;
        let end = img_a.len() - trailer::LEN;
        for (f32_of, fixed_of, want_stored, want_found) in
            [(&img_a, &img_b, fb, fa), (&img_b, &img_a, fa, fb)]
        {
            let mut spliced = f32_of[..fixed_start].to_vec();
            spliced.extend_from_slice(&fixed_of[fixed_start..end]);
            spliced.extend_from_slice(&[0; 4]);
            fix_crc(&mut spliced);
            assert_eq!(
                Image::parse(&spliced).map(|_| ()),
                Err(ImageError::Value(ImageValueError::FixedOtherCalibration {
                    stored: want_stored,
                    found: want_found
                }))
            );
        }
        // A fingerprint edited in place is refused the same way, and names both calibrations.
        let e = Image::parse(&edit(&img_a, at(&lf::MODEL_FINGERPRINT), &[0; 4])).unwrap_err();
        assert_eq!(e, ImageError::Value(ImageValueError::FixedOtherCalibration { stored: 0, found: fa }));
        assert!(std::format!("{e}").contains(&std::format!("{fa:#010x}")), "{e}");
    }

    /// Every correction the tables can be asked for, on a grid of log codes, temperatures and sensor codes.
    fn corrections(c: &FixedCalibration<'_>) -> Vec<Result<crate::fixed::FixedReading, Error>> {
        let mut out = Vec::new();
        for code in (0..=66_000u32).step_by(997).chain([16, 17, 65519, 65520]) {
            for t in [-6_000, -5_000, 0, 12_345, 25_000, 50_000, 55_000, 55_001] {
                out.push(c.correct(code, t));
            }
            for tc in [0u32, 9, 10, 99, 100, 1234, 4000, 4001, 4090, 4091] {
                out.push(c.correct_raw(code, tc));
            }
        }
        out
    }

    #[test]
    fn hand_built_tables_validate() {
        for (sensor, bias) in [(true, true), (false, false), (true, false), (false, true)] {
            assert_eq!(owned(7, sensor, bias).view().validate(), Ok(()), "sensor {sensor}, bias {bias}");
        }
    }

    #[test]
    fn tables_image_tables_round_trip_bit_exact() {
        for (seed, sensor, bias) in [(1, true, true), (2, false, false), (3, true, false), (4, false, true)] {
            let o = owned(seed, sensor, bias);
            let img = image_with(&o.view());
            let parsed = Image::parse(&img).unwrap();
            let kinds: Vec<u16> = parsed.sections().map(|s| s.kind).collect();
            assert_eq!(kinds, [ranges::KIND, model_f32::KIND, lf::KIND]);
            assert_eq!(bits(&parsed.calibration()), bits(&hard_unit()));
            let mut storage = Small::new();
            let loaded = parsed.fixed_into(&mut storage).unwrap();
            // Every field and every table entry, bit for bit (FixedCalibration compares its slices).
            assert_eq!(loaded, o.view(), "seed {seed}");
            // The section's own accessors give the same tables, without a copy.
            let sec = parsed.fixed().unwrap();
            assert_eq!(sec.header(), o.header);
            assert!(sec.offset().eq(o.offset.iter().copied()));
            assert!(sec.inv_slope().eq(o.inv_slope.iter().copied()));
            assert!(sec.ln_bias().eq(o.ln_bias.iter().copied()));
            assert!(sec.u_min().eq(o.u_min.iter().copied()));
            assert!(sec.residual().eq(o.residual.iter().copied()));
            assert!(sec.sensor_knots().eq(o.sensor.iter().copied()));
            assert_eq!(sec.len_of(&lf::RESIDUAL), 56);
            assert_eq!(sec.len_of(&lf::LN_BIAS), if bias { 7 } else { 0 });
            // Writing the loaded tables again gives the same bytes.
            assert_eq!(image_with(&loaded), img);
        }
    }

    #[test]
    fn the_fixed_correction_from_the_image_equals_the_one_from_memory() {
        let o = owned(11, true, true);
        let img = image_with(&o.view());
        let mut storage = DefaultFixedStorage::new();
        let loaded = Image::parse(&img).unwrap().fixed_into(&mut storage).unwrap();
        let (a, b) = (corrections(&loaded), corrections(&o.view()));
        assert_eq!(a, b);
        // The grid does reach values and every kind of refusal.
        assert!(a.iter().filter(|r| r.is_ok()).count() > 100);
        for name in ["saturated", "below_range", "above_range", "temperature_out_of_range", "sensor_"] {
            assert!(a.iter().any(|r| r.is_err_and(|e| e.name().starts_with(name))), "{name}");
        }
    }

    #[test]
    fn images_without_the_section_have_no_fixed_calibration() {
        let img = typical();
        let parsed = Image::parse(&img).unwrap();
        assert!(parsed.fixed().is_none());
        let mut storage = Small::new();
        assert_eq!(parsed.fixed_into(&mut storage), Err(ImageError::MissingSection { kind: lf::KIND }));
        assert!(storage.calibration().is_none());
    }

    #[test]
    fn every_single_bit_flip_of_an_image_with_the_section_is_rejected() {
        let img = image_with(&owned(5, true, true).view());
        // 268 bytes of the f32 image (CRC included), the section header, its fields and its tables.
        assert_eq!(img.len(), 268 + 4 + 96 + 4 * (4 * 7 + 19) + 2 * 56);
        assert_eq!(check_every_bit_flip(&img), img.len() * 8);
    }

    #[test]
    fn every_truncation_of_an_image_with_the_section_is_rejected() {
        let img = image_with(&owned(5, true, true).view());
        check_every_truncation(&img);
        // A section cut short inside an image whose lengths were rewritten to match (a writer that lost the
        // end of the tables): refused by the section's own sizes.
        for cut in [4usize, 8, 84, 200] {
            let mut v = img[..img.len() - 4 - cut].to_vec();
            let len = u16::from_le_bytes([v[266], v[267]]) - cut as u16;
            v[266..268].copy_from_slice(&len.to_le_bytes());
            let total = (v.len() + 4) as u32;
            v[8..12].copy_from_slice(&total.to_le_bytes());
            v.extend_from_slice(&[0; 4]);
            fix_crc(&mut v);
            let e = Image::parse(&v).unwrap_err();
            assert!(
                matches!(
                    e,
                    ImageError::SectionLength { kind: lf::KIND, .. } | ImageError::SectionAlignment { .. }
                ),
                "cut {cut}: {e:?}"
            );
        }
    }

    #[test]
    fn inconsistent_table_sizes_have_their_own_error() {
        let img = image_with(&owned(5, true, true).view());
        let at = |f: &crate::record::layout::Field| P0 + f.offset;
        let size_err = |table, found, expected| {
            Err(ImageError::Value(ImageValueError::FixedTableSize { table, found, expected }))
        };
        // A count that disagrees with the dimensions, then dimensions that disagree with the counts (the first
        // table that does not fit is named): the field, its new value, and the table named with its sizes.
        let cases: [(&crate::record::layout::Field, u16, &str, u32, u32); 6] = [
            (&lf::OFFSET_LEN, 8, "offset", 8, 7),
            (&lf::U_MIN_LEN, 0, "u_min", 0, 7),
            (&lf::RESIDUAL_LEN, 64, "residual", 64, 56),
            (&lf::SENSOR_KNOTS_LEN, 20, "sensor_knots", 20, 19),
            (&lf::T_KNOTS, 6, "offset", 7, 8),
            (&lf::XA_KNOTS, 7, "residual", 56, 63),
        ];
        for (field, value, table, found, expected) in cases {
            assert_eq!(
                Image::parse(&edit(&img, at(field), &value.to_le_bytes())),
                size_err(table, found, expected),
                "{table}"
            );
        }
        // A bias-bend table without the bias bend.
        assert_eq!(Image::parse(&edit(&img, at(&lf::BIAS_BEND), &[0])), size_err("ln_bias", 7, 0));
        // A sensor table whose span calls for more knots (4200 codes in 256-code steps: 17 segments, not 16).
        assert_eq!(
            Image::parse(&edit(&img, at(&lf::SENSOR_CODE_HI), &4300u32.to_le_bytes())),
            size_err("sensor_knots", 19, 20)
        );
    }

    #[test]
    fn a_payload_longer_or_shorter_than_its_tables_is_refused() {
        // Assembled by hand with the documented layout: the payload with 4 extra bytes, then 4 bytes fewer.
        let img = image_with(&owned(5, true, true).view());
        let (r, m) = payloads(&img);
        let fixed = img[P0..img.len() - 4].to_vec();
        let want = fixed.len() as u16;
        let mut longer = fixed.clone();
        longer.extend_from_slice(&[0; 4]);
        let v = assemble(3, &[(ranges::KIND, &r), (model_f32::KIND, &m), (lf::KIND, &longer)]);
        assert_eq!(
            Image::parse(&v).unwrap_err(),
            ImageError::SectionLength { kind: lf::KIND, found: want + 4, expected: want }
        );
        let v =
            assemble(3, &[(ranges::KIND, &r), (model_f32::KIND, &m), (lf::KIND, &fixed[..fixed.len() - 4])]);
        assert_eq!(
            Image::parse(&v).unwrap_err(),
            ImageError::SectionLength { kind: lf::KIND, found: want - 4, expected: want }
        );
        // Shorter than the section's fields.
        let v = assemble(3, &[(ranges::KIND, &r), (model_f32::KIND, &m), (lf::KIND, &fixed[..40])]);
        assert_eq!(
            Image::parse(&v).unwrap_err(),
            ImageError::SectionLength { kind: lf::KIND, found: 40, expected: 96 }
        );
        // In another order, and twice.
        let v = assemble(3, &[(lf::KIND, &fixed), (model_f32::KIND, &m), (ranges::KIND, &r)]);
        assert!(Image::parse(&v).unwrap().fixed().is_some());
        let v =
            assemble(4, &[(ranges::KIND, &r), (lf::KIND, &fixed), (model_f32::KIND, &m), (lf::KIND, &fixed)]);
        assert_eq!(Image::parse(&v).unwrap_err(), ImageError::DuplicateSection { kind: lf::KIND });
    }

    #[test]
    fn section_value_errors() {
        let img = image_with(&owned(5, true, true).view());
        let at = |f: &crate::record::layout::Field| P0 + f.offset;
        let parse = |v: Vec<u8>| Image::parse(&v).map(|_| ());
        assert_eq!(
            parse(edit(&img, at(&lf::SENSITIVITY_LIMIT), &[2])),
            Err(ImageError::Format(FormatError::BadFlag { field: "sensitivity_limit", found: 2 }))
        );
        assert_eq!(
            parse(edit(&img, at(&lf::FAULT_FAR_ABOVE), &[3])),
            Err(ImageError::Format(FormatError::BadEnum { field: "fault_far_above", found: 3 }))
        );
        assert_eq!(
            parse(edit(&img, at(&lf::RESERVED2) + 1, &[1])),
            Err(ImageError::Format(FormatError::ReservedNotZero { offset: (at(&lf::RESERVED2) + 1) as u32 }))
        );
        assert_eq!(
            parse(edit(&img, at(&lf::ADC_MAX_CODE), &4095u32.to_le_bytes())),
            Err(ImageError::Value(ImageValueError::FixedMismatch { field: "adc_max_code" }))
        );
        assert_eq!(
            parse(edit(&img, at(&lf::RAIL_MARGIN), &8u32.to_le_bytes())),
            Err(ImageError::Value(ImageValueError::FixedMismatch { field: "rail_margin" }))
        );
        // Without a sensor table its fields are stored as zero.
        let no_sensor = image_with(&owned(5, false, true).view());
        assert_eq!(
            parse(edit(&no_sensor, at(&lf::SENSOR_CODE_HI), &[1])),
            Err(ImageError::Format(FormatError::ReservedNotZero { offset: at(&lf::SENSOR_CODE_HI) as u32 }))
        );
        assert_eq!(
            parse(edit(&no_sensor, at(&lf::FAULT_BELOW), &[1])),
            Err(ImageError::Format(FormatError::ReservedNotZero { offset: at(&lf::FAULT_BELOW) as u32 }))
        );
    }

    #[test]
    fn padding_after_the_residual_is_zero() {
        // 5 x̃ knots (every 8 Np from −9 Np): 7 × 7 = 49 residual entries, 98 bytes, 2 bytes of padding.
        let mut o = owned(5, false, false);
        o.header.xa_knots = 5;
        o.header.xa_step_log2 = 27;
        o.residual.truncate(49);
        assert_eq!(o.view().validate(), Ok(()));
        let img = image_with(&o.view());
        let pad = img.len() - 4 - 2;
        assert_eq!(&img[pad..pad + 2], &[0, 0]);
        assert_eq!(
            Image::parse(&edit(&img, pad + 1, &[0x40])).unwrap_err(),
            ImageError::Format(FormatError::ReservedNotZero { offset: (pad + 1) as u32 })
        );
    }

    #[test]
    fn table_values_are_checked_when_loaded() {
        // A zero inverse slope with a correct CRC (a faulty writer elsewhere): the structure is fine, the
        // tables fail `FixedCalibration::validate` when they are loaded, and nothing is lent.
        let img = image_with(&owned(5, true, true).view());
        let inv0 = P0 + 96 + 4 * 7 + 4 * 3; // inv_slope[3]
        let bad = edit(&img, inv0, &0i32.to_le_bytes());
        let parsed = Image::parse(&bad).unwrap();
        let mut storage = Small::new();
        assert_eq!(
            parsed.fixed_into(&mut storage),
            Err(ImageError::Value(ImageValueError::Fixed(Error::InvalidCalibration(
                CalibrationDefect::ZeroSlope
            ))))
        );
        assert!(storage.calibration().is_none());
        // A layout version this build does not know.
        let bad = edit(&img, P0 + lf::LAYOUT.offset, &[9]);
        assert!(matches!(
            Image::parse(&bad).unwrap().fixed_into(&mut storage),
            Err(ImageError::Value(ImageValueError::Fixed(_)))
        ));
        // A failed load forgets what was loaded before.
        assert!(Image::parse(&img).unwrap().fixed_into(&mut storage).is_ok());
        assert!(storage.calibration().is_some());
        let sec = Image::parse(&bad).unwrap().fixed().unwrap();
        assert!(storage.load(&sec).is_err());
        assert!(storage.calibration().is_none());
    }

    #[test]
    fn tables_larger_than_the_storage_are_a_capacity_error() {
        let img = image_with(&owned(5, true, true).view());
        let parsed = Image::parse(&img).unwrap();
        let capacity = |table, needed, capacity| Err(ImageError::FixedCapacity { table, needed, capacity });
        assert_eq!(parsed.fixed_into(&mut FixedStorage::<6, 56, 19>::new()), capacity("offset", 7, 6));
        assert_eq!(parsed.fixed_into(&mut FixedStorage::<7, 55, 19>::new()), capacity("residual", 56, 55));
        assert_eq!(
            parsed.fixed_into(&mut FixedStorage::<7, 56, 18>::new()),
            capacity("sensor_knots", 19, 18)
        );
        assert!(parsed.fixed_into(&mut FixedStorage::<100, 1000, 100>::new()).is_ok());
        assert!(std::format!(
            "{}",
            ImageError::FixedCapacity { table: "residual", needed: 42, capacity: 41 }
        )
        .contains("residual has 42 entries, the storage holds 41"));
    }

    #[test]
    fn the_writer_refuses_what_a_reader_would() {
        let cal = hard_unit();
        let mut buf = [0xa5u8; 1024];
        let mut o = owned(5, true, true);
        o.offset.push(1);
        let e = write_with_fixed(&mut buf, &INFO, &cal, Some(&o.view()), &[]).unwrap_err();
        assert_eq!(
            e,
            WriteError::Value(ImageValueError::FixedTableSize { table: "offset", found: 8, expected: 7 })
        );
        let mut o = owned(5, true, true);
        o.header.bias_bend = false;
        let e = write_with_fixed(&mut buf, &INFO, &cal, Some(&o.view()), &[]).unwrap_err();
        assert_eq!(
            e,
            WriteError::Value(ImageValueError::FixedTableSize { table: "ln_bias", found: 7, expected: 0 })
        );
        let mut o = owned(5, true, true);
        o.header.rail_margin = 4;
        let e = write_with_fixed(&mut buf, &INFO, &cal, Some(&o.view()), &[]).unwrap_err();
        assert_eq!(e, WriteError::Value(ImageValueError::FixedMismatch { field: "rail_margin" }));
        let mut o = owned(5, true, true);
        o.inv_slope[2] = -1;
        let e = write_with_fixed(&mut buf, &INFO, &cal, Some(&o.view()), &[]).unwrap_err();
        assert_eq!(
            e,
            WriteError::Value(ImageValueError::Fixed(Error::InvalidCalibration(
                CalibrationDefect::ZeroSlope
            )))
        );
        // The fixed section only goes in through its own argument.
        let o = owned(5, true, true);
        let extra = [Section { kind: lf::KIND, payload: &[0; 96] }];
        assert_eq!(
            write_with_sections(&mut buf, &INFO, &cal, &extra).unwrap_err(),
            WriteError::BadSection { kind: lf::KIND }
        );
        // Too small a buffer.
        let need = encoded_len_with_fixed(&cal, Some(&o.view()), &[]).unwrap();
        let e = write_with_fixed(&mut buf[..need - 1], &INFO, &cal, Some(&o.view()), &[]).unwrap_err();
        assert_eq!(
            e,
            WriteError::BufferTooSmall(BufferTooSmall { needed: need as u32, available: need as u32 - 1 })
        );
        assert!(buf.iter().all(|&b| b == 0xa5), "a failed write changed the buffer");
        // More tables than a section holds: 128 × 2 temperature knots and 300 x̃ knots.
        let mut big = owned(5, false, false);
        big.header.t_knots = 126;
        big.header.xa_knots = 298;
        big.offset = vec![32768 << 14; 128];
        big.inv_slope = vec![1 << 30; 128];
        big.residual = vec![0; 128 * 300];
        assert!(matches!(
            write_with_fixed(&mut buf, &INFO, &cal, Some(&big.view()), &[]),
            Err(WriteError::SectionTooLong { kind: lf::KIND, .. })
        ));
    }

    #[test]
    fn optional_sections_after_the_fixed_one_are_kept() {
        let o = owned(5, true, true);
        let cal = hard_unit();
        let note = [7u8; 12];
        let extra = [Section { kind: 0x8040, payload: &note }];
        let len = encoded_len_with_fixed(&cal, Some(&o.view()), &extra).unwrap();
        let mut buf = vec![0u8; len];
        write_with_fixed(&mut buf, &INFO, &cal, Some(&o.view()), &extra).unwrap();
        let img = Image::parse(&buf).unwrap();
        let kinds: Vec<u16> = img.sections().map(|s| s.kind).collect();
        assert_eq!(kinds, [ranges::KIND, model_f32::KIND, lf::KIND, 0x8040]);
        assert_eq!(img.section(0x8040), Some(&note[..]));
        assert_eq!(img.fixed_into(&mut Small::new()).unwrap(), o.view());
    }

    fn slot_with(seq: u32, o: &Owned) -> Vec<u8> {
        let cal = hard_unit();
        let info = ImageInfo { sequence: seq, ..INFO };
        let len = encoded_len_with_fixed(&cal, Some(&o.view()), &[]).unwrap();
        let mut v = vec![0u8; len];
        write_with_fixed(&mut v, &info, &cal, Some(&o.view()), &[]).unwrap();
        v.extend_from_slice(&[0xff; 40]);
        v
    }

    #[test]
    fn select_fixed_prefers_the_newest_image_whose_tables_load() {
        let old = owned(1, true, true);
        let new = owned(2, true, true);
        let (a, b) = (slot_with(3, &old), slot_with(4, &new));
        let mut storage = Small::new();
        let (s, c) = slots::select_fixed(&a, &b, &mut storage).unwrap();
        assert_eq!((s.slot, s.record.sequence()), (SlotId::B, 4));
        assert_eq!(c, new.view());
        let (s, c) = slots::select_fixed(&b, &a, &mut storage).unwrap();
        assert_eq!(s.slot, SlotId::A);
        assert_eq!(c, new.view());

        // The newer image's tables do not validate (correct CRC): the older one is used.
        let mut bad = b.clone();
        let n = bad.len() - 40;
        bad[P0 + 96 + 28..P0 + 96 + 32].copy_from_slice(&0i32.to_le_bytes()); // inv_slope[0]
        fix_crc(&mut bad[..n]);
        assert!(Image::parse_prefix(&bad).is_ok(), "the structure is fine");
        let (s, c) = slots::select_fixed(&a, &bad, &mut storage).unwrap();
        assert_eq!(s.slot, SlotId::A);
        assert_eq!(c, old.view());
        assert!(matches!(s.other, Rejected::Invalid(ImageError::Value(ImageValueError::Fixed(_)))));

        // An image without a fixed section does not count; with none left, the unit is not calibrated.
        let f32_only = unit_image(9, 1_700_000_000, 1900.0);
        let (s, _) = slots::select_fixed(&f32_only, &a, &mut storage).unwrap();
        assert_eq!(s.slot, SlotId::B);
        assert_eq!(s.other, Rejected::Invalid(ImageError::MissingSection { kind: lf::KIND }));
        let e = slots::select_fixed(&f32_only, &[0xff; 400], &mut storage).unwrap_err();
        assert_eq!(e.a, Rejected::Invalid(ImageError::MissingSection { kind: lf::KIND }));
        // The f32 choice is unchanged: the newest valid image, fixed section or not.
        assert_eq!(slots::select(&f32_only, &a).unwrap().slot, SlotId::A);
        // Tables too large for the storage count as invalid too.
        let e = slots::select_fixed(&a, &b, &mut FixedStorage::<7, 56, 4>::new()).unwrap_err();
        assert!(matches!(e.a, Rejected::Invalid(ImageError::FixedCapacity { table: "sensor_knots", .. })));
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

        /// Someone else's images with a fixed section: byte errors anywhere in it, with the CRC recomputed.
        /// Whatever is accepted re-encodes to the same bytes once loaded, and corrects without panicking;
        /// what does not load is refused with an error, not a panic.
        #[test]
        fn corrupted_fixed_sections_are_refused_or_canonical(
            edits in proptest::collection::vec((P0..P0 + 96 + 200, any::<u8>()), 1..5),
            seed in 0u32..1000,
        ) {
            let o = owned(seed, true, true);
            let mut img = image_with(&o.view());
            for (at, v) in edits {
                let at = at.min(img.len() - 5);
                img[at] = v;
            }
            fix_crc(&mut img);
            if let Ok(p) = Image::parse(&img) {
                let mut storage = FixedStorage::<64, 4096, 256>::new();
                if let Ok(c) = p.fixed_into(&mut storage) {
                    prop_assert_eq!(c.validate(), Ok(()));
                    prop_assert_eq!(image_with(&c), img);
                    let _ = corrections(&c);
                }
            }
        }
    }
}
