//! The evaluations: one function of logtrim's public API per [`Kind`], on a record's inputs, giving an
//! [`Outcome`]. The host runs them to make the expected outcomes, the target runs them to compare; nothing
//! here depends on which side runs it.

use logtrim::calibration::Calibration;
use logtrim::field::{Blank, BlankParts, FixedStandard, RecordInfo, Standard, Trim, TrimLimits};
use logtrim::fixed::{CodeTable, FixedCalibration, FixedReading};
use logtrim::image::{DefaultFixedStorage, ImageError};
use logtrim::math::{Libm, Micromath};
use logtrim::record::crc32;
use logtrim::{Beta, Divider, Image, Placement, Reading, Rtd, SensorElement, TemperatureSensor, Unit};

use crate::digest;

/// What a record evaluates. Inputs are `u32` words: codes as they are, f32 values as their bits, m°C as
/// two's complement.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[repr(u32)]
pub enum Kind {
    /// `Calibration::correct` (libm): unit, code, °C → x, then every unit's value.
    F32Correct = 1,
    /// `Calibration::correct_with::<Micromath>`: unit, code, °C.
    F32Micromath = 2,
    /// `Calibration::correct_mean`: unit, mean code (f32), °C.
    F32Mean = 3,
    /// `Calibration::stage_with` + `correct_staged`: unit, code, °C.
    F32Staged = 4,
    /// `FixedCalibration::correct`, then `FixedReading::value` in every unit: unit, code, m°C.
    FixedCorrect = 5,
    /// `FixedCalibration::correct_raw` (the sensor table): unit, code, temperature code.
    FixedRaw = 6,
    /// `FixedCalibration::row_stage` + `correct_row`: unit, code, m°C.
    FixedBlock = 7,
    /// `TemperatureSensor::celsius`: sensor, code.
    SensorCode = 8,
    /// The sensor's element: resistance at a temperature (f32), and back: sensor, °C.
    SensorElement = 9,
    /// `Image::parse` and `fixed_into` of an image with one byte changed: unit, offset, xor mask, new
    /// length (0: unchanged), 1 to set the CRC right after the change.
    ImageParse = 10,
    /// `Trim::two_point` from two standards (f32), its record bytes parsed back, applied to a reading:
    /// measured a, known a, measured b, known b, x.
    TrimF32 = 11,
    /// `Trim::two_point_fixed` and `apply_fixed`: the same in Q24.
    TrimFixed = 12,
    /// `Blank::from_reading` / `from_fixed` and `relative` / `relative_fixed`: blank x, reading x (f32
    /// bits), blank and reading x in Q24.
    Blank = 13,
    /// `Trim::parse` / `Blank::parse` of a record with one byte changed: 0 trim / 1 blank, offset, xor
    /// mask, 1 to set the CRC right after the change.
    RecordParse = 14,
    /// `Unit::from_x` (libm) and `from_x_with::<Micromath>`: unit index, x.
    UnitFromX = 15,
    /// `CodeTable::correct_block` of two codes at one temperature (the table built for the first, the
    /// second from the same table), the second's reading: unit, code, m°C, first code.
    FixedTable = 16,
}

impl Kind {
    /// Every kind, in code order.
    pub const ALL: [Kind; 16] = [
        Kind::F32Correct,
        Kind::F32Micromath,
        Kind::F32Mean,
        Kind::F32Staged,
        Kind::FixedCorrect,
        Kind::FixedRaw,
        Kind::FixedBlock,
        Kind::SensorCode,
        Kind::SensorElement,
        Kind::ImageParse,
        Kind::TrimF32,
        Kind::TrimFixed,
        Kind::Blank,
        Kind::RecordParse,
        Kind::UnitFromX,
        Kind::FixedTable,
    ];

    /// The kind of a record's code.
    pub fn from_code(code: u32) -> Option<Kind> {
        Kind::ALL.into_iter().find(|k| *k as u32 == code)
    }
}

/// What an evaluation gave: its main number's bits and the digest of the whole result.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Outcome {
    /// The main number (x as f32 bits, x in Q24, °C as f32 bits, …), or [`NO_VALUE`] on an error.
    pub primary: u64,
    /// [`digest::of`] the whole result, errors and every derived value included.
    pub digest: u64,
}

/// The primary value of an outcome without one (an error).
pub const NO_VALUE: u64 = u64::MAX;

impl Outcome {
    fn of<T: core::fmt::Debug>(primary: Option<u64>, whole: &T) -> Outcome {
        Outcome { primary: primary.unwrap_or(NO_VALUE), digest: digest::of(whole) }
    }
}

/// A unit under test: the f32 calibration and the fixed-point tables of one image.
#[derive(Debug, Clone, Copy)]
pub struct TestUnit<'a> {
    /// The image's calibration.
    pub calibration: Calibration,
    /// Its fixed-point tables, loaded as a firmware loads them.
    pub fixed: FixedCalibration<'a>,
}

/// Loads a unit from its image, as a firmware does at boot: parse, then copy the fixed tables to RAM.
pub fn load<'s>(image: &[u8], storage: &'s mut DefaultFixedStorage) -> Result<TestUnit<'s>, ImageError> {
    let img = Image::parse(image)?;
    let calibration = img.calibration();
    let fixed = img.fixed_into(storage)?;
    Ok(TestUnit { calibration, fixed })
}

/// The largest image [`Kind::ImageParse`] can change (a copy lives on the stack).
pub const IMAGE_BUF: usize = 4096;

/// The temperature channels the sensor kinds use: NTC (Beta) on a 12-bit low-side divider, its
/// Steinhart–Hart form, a Pt1000 on a 16-bit high-side divider, a Pt100 on a 14-bit low-side divider
/// (invented boards; the element data are common catalogue values, from memory).
pub fn sensors() -> [TemperatureSensor; 4] {
    let ntc = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 };
    let div = |placement, ohm, bits| Divider {
        open_margin: 4,
        short_margin: 4,
        ..Divider::ratiometric(placement, ohm, bits)
    };
    let s = |element, divider, min_c, max_c| TemperatureSensor { element, divider, min_c, max_c };
    [
        s(SensorElement::NtcBeta(ntc), div(Placement::LowSide, 10_000.0, 12), -40.0, 125.0),
        s(
            SensorElement::NtcSteinhartHart(ntc.to_steinhart_hart()),
            div(Placement::LowSide, 10_000.0, 12),
            -40.0,
            125.0,
        ),
        s(SensorElement::Rtd(Rtd::PT1000), div(Placement::HighSide, 1_000.0, 16), -200.0, 850.0),
        s(SensorElement::Rtd(Rtd::PT100), div(Placement::LowSide, 390.0, 14), -200.0, 850.0),
    ]
}

fn f(bits: u32) -> f32 {
    f32::from_bits(bits)
}

fn x_bits(r: &Result<Reading, logtrim::Error>) -> Option<u64> {
    r.as_ref().ok().map(|r| u64::from(r.x.to_bits()))
}

fn fixed_bits(r: &Result<FixedReading, logtrim::Error>) -> Option<u64> {
    r.as_ref().ok().map(|r| u64::from(r.x as u32))
}

/// An f32 reading with its value in every unit.
fn f32_outcome(r: Result<Reading, logtrim::Error>) -> Outcome {
    let values = r.map(|r| Unit::ALL.map(|u| r.value(u)));
    Outcome::of(x_bits(&r), &(r, values))
}

/// A fixed reading with its value in every unit.
fn fixed_outcome(r: Result<FixedReading, logtrim::Error>) -> Outcome {
    let values = r.map(|r| Unit::ALL.map(|u| r.value(u)));
    Outcome::of(fixed_bits(&r), &(r, values))
}

const LIMITS: (f32, f32, f32) = (2.0, 0.5, 0.05);

fn info() -> RecordInfo {
    RecordInfo { sequence: 7, written_at: 1_790_000_000, factory: 0x1234_5678 }
}

/// Runs one record's evaluation. `None` for an unknown kind or a unit or sensor that does not exist.
pub fn eval(kind: Kind, input: &[u32; 5], units: &[TestUnit<'_>], images: &[&[u8]]) -> Option<Outcome> {
    let [a, b, c, d, e] = *input;
    let unit = || units.get(a as usize);
    Some(match kind {
        Kind::F32Correct => f32_outcome(unit()?.calibration.correct(b, f(c))),
        Kind::F32Micromath => f32_outcome(unit()?.calibration.correct_with::<Micromath>(b, f(c))),
        Kind::F32Mean => f32_outcome(unit()?.calibration.correct_mean(f(b), f(c))),
        Kind::F32Staged => {
            let cal = &unit()?.calibration;
            let stage = cal.stage_with::<Libm>(f(c));
            f32_outcome(cal.correct_staged(&stage, b))
        }
        Kind::FixedCorrect => fixed_outcome(unit()?.fixed.correct(b, c as i32)),
        Kind::FixedRaw => fixed_outcome(unit()?.fixed.correct_raw(b, c)),
        Kind::FixedBlock => {
            let cal = &unit()?.fixed;
            // One temperature stage, the code through the block API (a block of one).
            let r = cal.stage_millicelsius(c as i32).and_then(|s| {
                let mut out = [Err(logtrim::Error::NonFinite)];
                cal.correct_block(&s, &[b], &mut out);
                let [r] = out;
                r
            });
            fixed_outcome(r)
        }
        Kind::FixedTable => {
            let mut table = CodeTable::new(unit()?.fixed);
            let mut out = [Err(logtrim::Error::NonFinite), Err(logtrim::Error::NonFinite)];
            table.correct_block(c as i32, &[d, b], &mut out);
            let [_, r] = out;
            fixed_outcome(r)
        }
        Kind::SensorCode => {
            let s = sensors().get(a as usize).copied()?;
            let r = s.celsius(b);
            Outcome::of(r.ok().map(|t| u64::from(t.to_bits())), &r)
        }
        Kind::SensorElement => {
            let s = sensors().get(a as usize).copied()?;
            let ohm = match s.element {
                SensorElement::NtcBeta(m) => m.resistance(f(b)),
                SensorElement::NtcSteinhartHart(m) => m.resistance(f(b)),
                SensorElement::Rtd(m) => m.resistance(f(b)),
            };
            let back = ohm.and_then(|r| s.element.celsius(r));
            Outcome::of(ohm.ok().map(|r| u64::from(r.to_bits())), &(ohm, back))
        }
        Kind::ImageParse => image_parse(images.get(a as usize)?, b as usize, c as u8, d as usize, e == 1)?,
        Kind::TrimF32 => {
            let limits = TrimLimits::new(LIMITS.0, LIMITS.1, LIMITS.2);
            let std_a = Standard { measured: f(a), known: f(b) };
            let std_b = Standard { measured: f(c), known: f(d) };
            let trim = limits.and_then(|l| Trim::two_point(info(), std_a, std_b, 25_000, &l));
            let applied = trim.map(|t| t.apply(&Reading { x: f(e), temperature_extrapolated: false }));
            let back = trim.map(|t| Trim::parse(&t.to_bytes()));
            Outcome::of(trim.ok().map(|t| u64::from(t.gain().to_bits())), &(trim, applied, back))
        }
        Kind::TrimFixed => {
            let limits = TrimLimits::new(LIMITS.0, LIMITS.1, LIMITS.2);
            let std_a = FixedStandard { measured: a as i32, known: b as i32 };
            let std_b = FixedStandard { measured: c as i32, known: d as i32 };
            let trim = limits.and_then(|l| Trim::two_point_fixed(info(), std_a, std_b, 25_000, &l));
            let applied =
                trim.map(|t| t.apply_fixed(&FixedReading { x: e as i32, temperature_extrapolated: false }));
            Outcome::of(trim.ok().map(|t| u64::from(t.gain_q30() as u32)), &(trim, applied))
        }
        Kind::Blank => {
            let reading = Reading { x: f(b), temperature_extrapolated: false };
            let blank = Blank::from_reading(
                info(),
                &Reading { x: f(a), temperature_extrapolated: false },
                21_500,
                64,
            );
            let rel = blank.map(|bl| bl.relative(&reading));
            let fixed = FixedReading { x: d as i32, temperature_extrapolated: true };
            let fblank = Blank::from_fixed(
                info(),
                &FixedReading { x: c as i32, temperature_extrapolated: false },
                21_500,
                64,
            );
            let frel = fblank.map(|bl| bl.relative_fixed(&fixed));
            Outcome::of(rel.ok().map(|r| u64::from(r.x.to_bits())), &(blank, rel, fblank, frel))
        }
        Kind::RecordParse => record_parse(a, b as usize, c as u8, d == 1),
        Kind::UnitFromX => {
            let u = Unit::ALL.get(a as usize).copied()?;
            let v = (u.from_x(f(b)), u.from_x_with::<Micromath>(f(b)));
            Outcome::of(Some(u64::from(v.0.to_bits())), &v)
        }
    })
}

/// Sets the CRC in the last four bytes of `buf` right for the bytes before it.
fn set_crc(buf: &mut [u8]) {
    let n = buf.len().saturating_sub(4);
    let (body, tail) = buf.split_at_mut(n);
    let crc = crc32(body).to_le_bytes();
    for (t, c) in tail.iter_mut().zip(crc) {
        *t = c;
    }
}

fn image_parse(image: &[u8], offset: usize, mask: u8, len: usize, fix_crc: bool) -> Option<Outcome> {
    let mut buf = [0u8; IMAGE_BUF];
    let copy = buf.get_mut(..image.len())?;
    copy.copy_from_slice(image);
    if let Some(byte) = copy.get_mut(offset) {
        *byte ^= mask;
    }
    let len = if len == 0 { image.len() } else { len.min(image.len()) };
    let bytes = buf.get_mut(..len)?;
    if fix_crc {
        set_crc(bytes);
    }
    let parsed = Image::parse(bytes);
    let mut storage = DefaultFixedStorage::new();
    let loaded = parsed.map(|img| {
        (
            img.crc(),
            img.sequence(),
            img.serial(),
            img.calibration(),
            img.fixed_into(&mut storage).map(|f| (f.header, f.table_bytes())),
        )
    });
    Some(Outcome::of(loaded.as_ref().ok().map(|l| u64::from(l.0)), &loaded))
}

fn record_parse(which: u32, offset: usize, mask: u8, fix_crc: bool) -> Outcome {
    let trim = Trim::new(logtrim::field::TrimParts {
        info: info(),
        kind: logtrim::field::TrimKind::TwoPoint,
        offset: 0.0125,
        gain: 1.03125,
        offset_q24: 209_715,
        gain_q30: 1_107_296_256,
        standards: [-2.5, 0.25],
        temp_mc: 24_500,
    });
    let blank =
        Blank::new(BlankParts { info: info(), x: -0.25, x_q24: -4_194_304, temp_mc: 22_000, samples: 128 });
    let mut buf = [0u8; 128];
    let len = match (which, trim, blank) {
        (0, Ok(t), _) => t.write(&mut buf).ok(),
        (_, _, Ok(b)) => b.write(&mut buf).ok(),
        _ => None,
    };
    let Some(bytes) = len.and_then(|n| buf.get_mut(..n)) else {
        return Outcome::of(None, &(trim, blank));
    };
    if let Some(byte) = bytes.get_mut(offset) {
        *byte ^= mask;
    }
    if fix_crc {
        set_crc(bytes);
    }
    if which == 0 {
        let r = Trim::parse(bytes);
        Outcome::of(r.ok().map(|t| u64::from(t.gain_q30() as u32)), &r)
    } else {
        let r = Blank::parse(bytes);
        Outcome::of(r.ok().map(|b| u64::from(b.x_q24() as u32)), &r)
    }
}
