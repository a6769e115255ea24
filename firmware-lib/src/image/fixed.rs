//! The fixed-point section (`0x8003`): the integer form of a unit's calibration ([`FixedCalibration`]) in
//! an image, how its structure is checked by the parser, and how its tables reach a [`FixedCalibration`]
//! without allocation.
//!
//! How the section is checked in two steps is documented on [`FixedSection`].

use core::fmt;

use super::layout::{fixed as lf, section, Table};
use super::parse::Part;
use super::{ImageError, ImageValueError};
use crate::calibration::Calibration;
use crate::error::SensorFault;
use crate::fixed::{FixedCalibration, FixedHeader, SensorTable};
use crate::record::frame::len_u32;
use crate::record::layout::Field;

/// Number of tables (the order of [`lf::TABLES`]).
const N_TABLES: usize = lf::TABLES.len();
/// Positions in [`lf::TABLES`].
const OFFSET: usize = 0;
const INV_SLOPE: usize = 1;
const LN_BIAS: usize = 2;
const U_MIN: usize = 3;
const SENSOR_KNOTS: usize = 4;
const RESIDUAL: usize = 5;
const _: () = assert!(N_TABLES == 6);

/// Table sizes in entries, in the order of [`lf::TABLES`].
type Sizes = [u32; N_TABLES];

/// The sensor fields, zero when the section has no sensor table.
const SENSOR_FIELDS: [Field; 9] = [
    lf::SENSOR_CODE_LO,
    lf::SENSOR_CODE_HI,
    lf::SENSOR_FAR_BELOW,
    lf::SENSOR_FAR_ABOVE,
    lf::SENSOR_STEP_LOG2,
    lf::FAULT_BELOW,
    lf::FAULT_FAR_BELOW,
    lf::FAULT_ABOVE,
    lf::FAULT_FAR_ABOVE,
];

/// The stored code of a sensor fault.
pub(super) fn fault_code(f: SensorFault) -> u8 {
    match f {
        SensorFault::Open => 0,
        SensorFault::Short => 1,
        SensorFault::OutOfModelRange => 2,
    }
}

/// The sensor fault a stored code names.
fn fault_of(code: u8) -> Option<SensorFault> {
    match code {
        0 => Some(SensorFault::Open),
        1 => Some(SensorFault::Short),
        2 => Some(SensorFault::OutOfModelRange),
        _ => None,
    }
}

/// The sizes the dimensions call for: the rule of [`FixedCalibration::validate`], made exact (a table that
/// is not used is empty; a sensor table has exactly [`SensorTable::knots_needed`] control points). The
/// residual's is its full grid; [`check_sizes`] also accepts it empty.
fn expected_sizes(h: &FixedHeader, sensor: Option<&SensorTable<'_>>) -> Sizes {
    let nt = u32::from(h.t_knots) + 2;
    let nx = u32::from(h.xa_knots) + 2;
    let sensor_knots = sensor.map_or(0, |s| {
        u32::try_from(SensorTable::knots_needed(s.code_lo, s.code_hi, s.step_log2)).unwrap_or(u32::MAX)
    });
    let mut e = [0; N_TABLES];
    for (i, v) in e.iter_mut().enumerate() {
        *v = match i {
            OFFSET | INV_SLOPE => nt,
            LN_BIAS if h.bias_bend => nt,
            U_MIN if h.sensitivity_limit => nt,
            SENSOR_KNOTS => sensor_knots,
            RESIDUAL => nt.saturating_mul(nx),
            _ => 0,
        };
    }
    e
}

/// Each table's size against its dimensions; the first that differs is the error. The residual table may
/// also be empty (a residual of zero everywhere).
fn check_sizes(
    h: &FixedHeader,
    sensor: Option<&SensorTable<'_>>,
    found: &Sizes,
) -> Result<(), ImageValueError> {
    let expected = expected_sizes(h, sensor);
    // A bounded range, not `enumerate`: its counter's increment is an overflow check under
    // `overflow-checks`, which the release-checked panic proof would see as a panic path.
    let tables = lf::TABLES.iter().zip(found).zip(&expected);
    for (i, ((t, &found), &expected)) in (0..lf::TABLES.len()).zip(tables) {
        if found != expected && !(i == RESIDUAL && found == 0) {
            return Err(ImageValueError::FixedTableSize { table: t.name, found, expected });
        }
    }
    Ok(())
}

/// The fixed section describes the converter of the *ranges* section.
fn check_agreement(h: &FixedHeader, c: &Calibration) -> Result<(), ImageValueError> {
    if c.adc.max_code().ok() != Some(h.adc_max_code) {
        return Err(ImageValueError::FixedMismatch { field: lf::ADC_MAX_CODE.name });
    }
    if c.adc.rail_margin != h.rail_margin {
        return Err(ImageValueError::FixedMismatch { field: lf::RAIL_MARGIN.name });
    }
    Ok(())
}

/// Bytes of the first `n` tables (without padding). Sizes are u16 counts, so the sum stays far below
/// 2^64; it saturates all the same, so that no input can make it wrap.
fn tables_len(sizes: &Sizes, n: usize) -> u64 {
    lf::TABLES
        .iter()
        .zip(sizes)
        .take(n)
        .fold(0u64, |sum, (t, &k)| sum.saturating_add((t.elem.size() as u64).saturating_mul(u64::from(k))))
}

/// Bytes of the tables (without padding).
fn data_len(sizes: &Sizes) -> u64 {
    tables_len(sizes, N_TABLES)
}

/// The payload length of a section with these table sizes: the fields, the tables, padding to 4 bytes.
fn payload_len(sizes: &Sizes) -> u64 {
    let len = (lf::HEAD_LEN as u64).saturating_add(data_len(sizes));
    len.checked_next_multiple_of(section::ALIGN as u64).unwrap_or(u64::MAX)
}

fn len_u16(n: u64) -> u16 {
    u16::try_from(n).unwrap_or(u16::MAX)
}

/// Decodes and checks the structure of a fixed section (step 1 in the docs of [`FixedSection`]).
pub(super) fn decode<'a>(
    p: &Part<'a>,
    calibration: &Calibration,
    model_fingerprint: u32,
) -> Result<FixedSection<'a>, ImageError> {
    if p.bytes().len() < lf::HEAD_LEN {
        return Err(p.short());
    }
    p.reserved(&lf::RESERVED)?;
    p.reserved(&lf::RESERVED2)?;
    p.reserved(&lf::RESERVED3)?;
    let bias_bend = p.flag(&lf::BIAS_BEND)?;
    let sensitivity_limit = p.flag(&lf::SENSITIVITY_LIMIT)?;
    let has_sensor = p.flag(&lf::HAS_SENSOR)?;
    let header = FixedHeader {
        layout: p.u8(&lf::LAYOUT)?,
        adc_max_code: p.u32(&lf::ADC_MAX_CODE)?,
        rail_margin: p.u32(&lf::RAIL_MARGIN)?,
        temp_min: p.i32(&lf::TEMP_MIN)?,
        temp_max: p.i32(&lf::TEMP_MAX)?,
        temp_lo: p.i32(&lf::TEMP_LO)?,
        temp_hi: p.i32(&lf::TEMP_HI)?,
        t_knots: p.u16(&lf::T_KNOTS)?,
        t_origin: p.i32(&lf::T_ORIGIN)?,
        t_step_log2: p.u8(&lf::T_STEP_LOG2)?,
        offset_frac: p.u8(&lf::OFFSET_FRAC)?,
        inv_slope_frac: p.u8(&lf::INV_SLOPE_FRAC)?,
        bias_bend,
        sensitivity_limit,
        xa_knots: p.u16(&lf::XA_KNOTS)?,
        xa_origin: p.i32(&lf::XA_ORIGIN)?,
        xa_step_log2: p.u8(&lf::XA_STEP_LOG2)?,
        residual_frac: p.u8(&lf::RESIDUAL_FRAC)?,
        x_min: p.i32(&lf::X_MIN)?,
        x_max: p.i32(&lf::X_MAX)?,
    };
    let sensor = if has_sensor {
        Some(SensorTable {
            code_lo: p.u32(&lf::SENSOR_CODE_LO)?,
            code_hi: p.u32(&lf::SENSOR_CODE_HI)?,
            step_log2: p.u8(&lf::SENSOR_STEP_LOG2)?,
            fault_below: p.choice(&lf::FAULT_BELOW, fault_of)?,
            far_below_code: p.u32(&lf::SENSOR_FAR_BELOW)?,
            fault_far_below: p.choice(&lf::FAULT_FAR_BELOW, fault_of)?,
            fault_above: p.choice(&lf::FAULT_ABOVE, fault_of)?,
            far_above_code: p.u32(&lf::SENSOR_FAR_ABOVE)?,
            fault_far_above: p.choice(&lf::FAULT_FAR_ABOVE, fault_of)?,
            knots: &[],
        })
    } else {
        // Without a sensor table its fields are unused, and stored as zero.
        for f in &SENSOR_FIELDS {
            p.reserved(f)?;
        }
        None
    };
    let mut sizes: Sizes = [0; N_TABLES];
    for (n, t) in sizes.iter_mut().zip(lf::TABLES) {
        *n = u32::from(p.u16(&t.count)?);
    }
    check_sizes(&header, sensor.as_ref(), &sizes)?;
    check_agreement(&header, calibration)?;
    // The tables were built from this image's f32 model, not spliced in from another unit's.
    let stored = p.u32(&lf::MODEL_FINGERPRINT)?;
    if stored != model_fingerprint {
        return Err(ImageValueError::FixedOtherCalibration { stored, found: model_fingerprint }.into());
    }
    let want = payload_len(&sizes);
    let len = p.bytes().len();
    if len as u64 != want {
        return Err(ImageError::SectionLength {
            kind: p.kind,
            found: len_u16(len as u64),
            expected: len_u16(want),
        });
    }
    // The padding after the last table is zero.
    let data_end = lf::HEAD_LEN.saturating_add(usize::try_from(data_len(&sizes)).unwrap_or(usize::MAX));
    p.zeros(data_end..len)?;
    let tables = p.range(lf::HEAD_LEN..data_end)?;
    Ok(FixedSection { header, sensor, sizes, tables })
}

/// The checks the writer runs on a fixed calibration before writing anything: sizes, agreement with the
/// calibration's converter, what a section can hold, and [`FixedCalibration::validate`]. Returns the
/// payload length and the table sizes.
pub(super) fn check_for_write(
    f: &FixedCalibration<'_>,
    calibration: &Calibration,
) -> Result<(usize, Sizes), super::WriteError> {
    use super::WriteError;
    let sensor_knots = f.sensor.as_ref().map_or(0, |s| s.knots.len());
    let lens =
        [f.offset.len(), f.inv_slope.len(), f.ln_bias.len(), f.u_min.len(), sensor_knots, f.residual.len()];
    let mut sizes: Sizes = [0; N_TABLES];
    for (s, &n) in sizes.iter_mut().zip(&lens) {
        *s = u32::try_from(n).unwrap_or(u32::MAX);
    }
    let len = payload_len(&sizes);
    let too_long = WriteError::SectionTooLong { kind: lf::KIND, len: u32::try_from(len).unwrap_or(u32::MAX) };
    if sizes.iter().any(|&n| n > u32::from(u16::MAX)) {
        return Err(too_long);
    }
    check_sizes(&f.header, f.sensor.as_ref(), &sizes)?;
    if len > (usize::from(u16::MAX) & !(section::ALIGN - 1)) as u64 {
        return Err(too_long);
    }
    check_agreement(&f.header, calibration)?;
    f.validate().map_err(ImageValueError::Fixed)?;
    Ok((usize::try_from(len).unwrap_or(usize::MAX), sizes))
}

/// The i32 values of a stored table, in order.
#[derive(Debug, Clone)]
pub struct I32Values<'a> {
    words: core::slice::Iter<'a, [u8; 4]>,
}

impl Iterator for I32Values<'_> {
    type Item = i32;
    fn next(&mut self) -> Option<i32> {
        self.words.next().map(|w| i32::from_le_bytes(*w))
    }
    fn size_hint(&self) -> (usize, Option<usize>) {
        self.words.size_hint()
    }
}

impl ExactSizeIterator for I32Values<'_> {}

/// The i16 values of a stored table, in order.
#[derive(Debug, Clone)]
pub struct I16Values<'a> {
    words: core::slice::Iter<'a, [u8; 2]>,
}

impl Iterator for I16Values<'_> {
    type Item = i16;
    fn next(&mut self) -> Option<i16> {
        self.words.next().map(|w| i16::from_le_bytes(*w))
    }
    fn size_hint(&self) -> (usize, Option<usize>) {
        self.words.size_hint()
    }
}

impl ExactSizeIterator for I16Values<'_> {}

/// The fixed section of a checked image: its header, the sensor's description and its tables, still in
/// the image's bytes. Structurally checked (sizes, flags, padding); its values are checked by
/// [`FixedStorage::load`].
///
/// # Two steps, both before any value is used
///
/// [`FixedCalibration`] borrows its tables as `&[i32]`/`&[i16]` slices, and an image is a `&[u8]`: without
/// `unsafe` (and on any byte order and alignment) the tables cannot be borrowed from the image's bytes.
/// They are copied, once, into a [`FixedStorage`] the caller owns (arrays of fixed capacities, in RAM), and
/// the calibration borrows from there. So the checks are split where the copy is:
///
/// 1. [`Image::parse`](super::Image::parse) checks the section's **structure**, like every other section:
///    the flags (0 or 1), the reserved and padding bytes (zero), the sensor's fault codes, the size of
///    every table against the dimensions in the section's own header
///    ([`ImageValueError::FixedTableSize`]: `offset` must have `t_knots + 2` entries, `ln_bias` none without the
///    bias bend, …), the payload's length against those sizes ([`ImageError::SectionLength`]), and the
///    converter's largest code and rail margin against the *ranges* section
///    ([`ImageValueError::FixedMismatch`]), and the calibration the tables were built from (the section's
///    `model_fingerprint`) against the image's own *ranges* and *model_f32* sections
///    ([`ImageValueError::FixedOtherCalibration`]). After this the tables can be located and copied without any check.
/// 2. [`FixedStorage::load`] (or [`Image::fixed_into`](super::Image::fixed_into)) copies the tables
///    ([`ImageError::FixedCapacity`] if they do not fit) and runs [`FixedCalibration::validate`] on the
///    result ([`ImageValueError::Fixed`]). Only then does [`FixedStorage::calibration`] lend it.
///
/// A reader that corrects in f32 only needs step 1 (the section is optional to it). A reader that uses
/// the fixed path runs both, and [`slots::select_fixed`](super::slots::select_fixed) treats an image whose
/// tables fail step 2 as invalid, so the other slot is used. The writer applies the same rules (sizes,
/// agreement with *ranges*, `validate`) before writing a byte, so it never writes a section a reader
/// refuses.
///
/// ```
/// use logtrim::error::SensorFault;
/// use logtrim::fixed::{FixedCalibration, FixedHeader, SensorTable, LAYOUT_VERSION};
/// use logtrim::image::{self, DefaultFixedStorage, Image, ImageError, ImageInfo};
/// use logtrim::Calibration;
///
/// // The ideal linear unit of `FixedCalibration::correct`'s example: x = (code − 32769)·6/32768 Np.
/// # let header = FixedHeader {
/// #     layout: LAYOUT_VERSION, adc_max_code: 65535, rail_margin: 16,
/// #     temp_min: 0, temp_max: 50_000 << 10, temp_lo: -5_000 << 10, temp_hi: 55_000 << 10,
/// #     t_knots: 5, t_origin: -5_000 << 10, t_step_log2: 24, offset_frac: 14, inv_slope_frac: 42,
/// #     bias_bend: false, sensitivity_limit: false, xa_knots: 6, xa_origin: -9 << 24, xa_step_log2: 26,
/// #     residual_frac: 16, x_min: -27306 * 3072, x_max: 27306 * 3072,
/// # };
/// # let (offset, inv_slope, residual) = ([10923 << 13; 7], [1 << 27; 7], [0i16; 7 * 8]);
/// # let knots: Vec<i32> = (0..19).map(|i| (i - 1) * 256 * 15 * 1024 / 6).collect();
/// # let sensor = SensorTable {
/// #     code_lo: 100, code_hi: 4000, step_log2: 8,
/// #     fault_below: SensorFault::OutOfModelRange, far_below_code: 10, fault_far_below: SensorFault::Short,
/// #     fault_above: SensorFault::OutOfModelRange, far_above_code: 4090, fault_far_above: SensorFault::Open,
/// #     knots: &knots,
/// # };
/// let fixed = FixedCalibration {
///     header,
///     offset: &offset,
///     inv_slope: &inv_slope,
///     ln_bias: &[],
///     u_min: &[],
///     residual: &residual,
///     sensor: Some(sensor),
/// };
/// // The f32 calibration the image carries beside it must describe the same converter: 16 bits, margin 16.
/// let mut f32_cal = Calibration::nominal(16, 32769.0, 32768.0 / 6.0, 25.0);
/// f32_cal.adc.rail_margin = 16;
///
/// let info = ImageInfo { serial: "DL-0003", calibrated_at: 1_700_000_000, sequence: 1 };
/// let mut eeprom = [0u8; 1024];
/// let len = image::write_with_fixed(&mut eeprom, &info, &f32_cal, Some(&fixed), &[])?;
/// assert_eq!(len, image::encoded_len_with_fixed(&f32_cal, Some(&fixed), &[])?);
///
/// // Step 1 (parse) checks the section's structure; step 2 copies the tables into RAM and validates them.
/// let image = Image::parse(&eeprom[..len])?;
/// let section = image.fixed().expect("written with a fixed section");
/// assert!(section.offset().eq(offset.iter().copied()));
/// let mut storage = DefaultFixedStorage::new();
/// let loaded = image.fixed_into(&mut storage)?;
/// assert_eq!(loaded, fixed);
/// for code in [1000, 32769, 60000] {
///     assert_eq!(loaded.correct(code, 25_000), fixed.correct(code, 25_000));
/// }
///
/// // A storage too small for the tables refuses them rather than cutting them short.
/// let mut small = image::FixedStorage::<4, 16, 8>::new();
/// assert!(matches!(image.fixed_into(&mut small), Err(ImageError::FixedCapacity { .. })));
/// # Ok::<(), Box<dyn core::error::Error>>(())
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedSection<'a> {
    header: FixedHeader,
    sensor: Option<SensorTable<'static>>,
    sizes: Sizes,
    tables: &'a [u8],
}

impl<'a> FixedSection<'a> {
    /// Dimensions, scales and ranges.
    pub fn header(&self) -> FixedHeader {
        self.header
    }

    /// The temperature sensor's description, if the section has a sensor table. Its `knots` are empty here:
    /// they are in [`FixedSection::sensor_knots`] (and in the calibration [`FixedStorage::load`] gives).
    pub fn sensor(&self) -> Option<SensorTable<'static>> {
        self.sensor
    }

    /// The number of entries of a table of [`lf::TABLES`] (0 for a table of another part).
    pub fn len_of(&self, table: &Table) -> usize {
        let i = lf::TABLES.iter().position(|t| t == table);
        i.and_then(|i| self.sizes.get(i)).map_or(0, |&n| n as usize)
    }

    /// The bytes of table `i` of [`lf::TABLES`].
    fn bytes_of(&self, i: usize) -> &'a [u8] {
        let start = tables_len(&self.sizes, i);
        let end = tables_len(&self.sizes, i.saturating_add(1));
        let (Ok(start), Ok(end)) = (usize::try_from(start), usize::try_from(end)) else {
            return &[];
        };
        self.tables.get(start..end).unwrap_or(&[])
    }

    fn i32s(&self, i: usize) -> I32Values<'a> {
        I32Values { words: self.bytes_of(i).as_chunks::<4>().0.iter() }
    }

    /// O(T) control points.
    pub fn offset(&self) -> I32Values<'a> {
        self.i32s(OFFSET)
    }

    /// 1/S(T) control points.
    pub fn inv_slope(&self) -> I32Values<'a> {
        self.i32s(INV_SLOPE)
    }

    /// λ(T) control points (none without the bias bend).
    pub fn ln_bias(&self) -> I32Values<'a> {
        self.i32s(LN_BIAS)
    }

    /// u_min(T) control points (none without the sensitivity limit).
    pub fn u_min(&self) -> I32Values<'a> {
        self.i32s(U_MIN)
    }

    /// The sensor table's control points (none without a sensor table).
    pub fn sensor_knots(&self) -> I32Values<'a> {
        self.i32s(SENSOR_KNOTS)
    }

    /// r(x̃, T) control points, row-major by temperature.
    pub fn residual(&self) -> I16Values<'a> {
        I16Values { words: self.bytes_of(RESIDUAL).as_chunks::<2>().0.iter() }
    }
}

/// Where a unit's fixed-point tables live after they are read from an image: arrays of fixed capacity
/// the caller owns (a `static`, or a local of `main`), no heap. `T` is the capacity of each of the four
/// per-temperature tables (`t_knots + 2` entries), `R` of the residual (`(t_knots + 2)·(xa_knots + 2)`),
/// `S` of the sensor table ([`SensorTable::knots_needed`]).
///
/// [`FixedStorage::load`] copies a section's tables in and checks them; [`FixedStorage::calibration`]
/// then lends them as a [`FixedCalibration`].
///
/// ```
/// use logtrim::image::DefaultFixedStorage;
/// // The host's default tables (at most 16 temperature knots, 64 x̃ knots, 128 sensor segments) fit this one.
/// let storage = DefaultFixedStorage::new();
/// assert!(storage.calibration().is_none());
/// assert!(core::mem::size_of::<DefaultFixedStorage>() < 3500); // bytes of RAM
/// ```
#[derive(Clone)]
pub struct FixedStorage<const T: usize, const R: usize, const S: usize> {
    loaded: Option<Loaded>,
    offset: [i32; T],
    inv_slope: [i32; T],
    ln_bias: [i32; T],
    u_min: [i32; T],
    sensor_knots: [i32; S],
    residual: [i16; R],
}

/// What a successful load recorded besides the tables.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Loaded {
    header: FixedHeader,
    sensor: Option<SensorTable<'static>>,
    sizes: Sizes,
}

/// A storage sized for the host's default tables (`logtrim_host::tables::TableOptions::default()`: at most
/// 16 temperature knots, 64 x̃ knots and 128 sensor segments), about 3.3 KiB.
pub type DefaultFixedStorage = FixedStorage<18, 1188, 131>;

impl<const T: usize, const R: usize, const S: usize> Default for FixedStorage<T, R, S> {
    fn default() -> Self {
        Self::new()
    }
}

/// Copies `src` into the start of `dst`, or says which table does not fit.
fn copy_in<V: Copy, I: ExactSizeIterator<Item = V>>(
    dst: &mut [V],
    src: I,
    table: &Table,
) -> Result<(), ImageError> {
    let needed = src.len();
    let capacity = ImageError::FixedCapacity {
        table: table.name,
        needed: len_u32(needed),
        capacity: len_u32(dst.len()),
    };
    let slot = dst.get_mut(..needed).ok_or(capacity)?;
    for (d, v) in slot.iter_mut().zip(src) {
        *d = v;
    }
    Ok(())
}

impl<const T: usize, const R: usize, const S: usize> FixedStorage<T, R, S> {
    /// An empty storage (nothing loaded).
    pub const fn new() -> Self {
        FixedStorage {
            loaded: None,
            offset: [0; T],
            inv_slope: [0; T],
            ln_bias: [0; T],
            u_min: [0; T],
            sensor_knots: [0; S],
            residual: [0; R],
        }
    }

    /// Copies a section's tables in and checks them with [`FixedCalibration::validate`]
    /// ([`ImageValueError::Fixed`]); a table larger than its array is [`ImageError::FixedCapacity`]. Whatever was
    /// loaded before is gone, even when this fails.
    pub fn load(&mut self, section: &FixedSection<'_>) -> Result<(), ImageError> {
        self.loaded = None;
        copy_in(&mut self.offset, section.offset(), &lf::OFFSET)?;
        copy_in(&mut self.inv_slope, section.inv_slope(), &lf::INV_SLOPE)?;
        copy_in(&mut self.ln_bias, section.ln_bias(), &lf::LN_BIAS)?;
        copy_in(&mut self.u_min, section.u_min(), &lf::U_MIN)?;
        copy_in(&mut self.sensor_knots, section.sensor_knots(), &lf::SENSOR_KNOTS)?;
        copy_in(&mut self.residual, section.residual(), &lf::RESIDUAL)?;
        let loaded = Loaded { header: section.header, sensor: section.sensor, sizes: section.sizes };
        self.view(&loaded).validate().map_err(ImageValueError::Fixed)?;
        self.loaded = Some(loaded);
        Ok(())
    }

    /// The loaded calibration, or `None` before a successful [`FixedStorage::load`].
    pub fn calibration(&self) -> Option<FixedCalibration<'_>> {
        self.loaded.as_ref().map(|l| self.view(l))
    }

    /// Forgets the loaded calibration.
    pub fn clear(&mut self) {
        self.loaded = None;
    }

    fn view(&self, l: &Loaded) -> FixedCalibration<'_> {
        let n = |i: usize| l.sizes.get(i).map_or(0, |&n| n as usize);
        FixedCalibration {
            header: l.header,
            offset: self.offset.get(..n(OFFSET)).unwrap_or(&[]),
            inv_slope: self.inv_slope.get(..n(INV_SLOPE)).unwrap_or(&[]),
            ln_bias: self.ln_bias.get(..n(LN_BIAS)).unwrap_or(&[]),
            u_min: self.u_min.get(..n(U_MIN)).unwrap_or(&[]),
            residual: self.residual.get(..n(RESIDUAL)).unwrap_or(&[]),
            sensor: l
                .sensor
                .map(|s| SensorTable { knots: self.sensor_knots.get(..n(SENSOR_KNOTS)).unwrap_or(&[]), ..s }),
        }
    }
}

impl<const T: usize, const R: usize, const S: usize> fmt::Debug for FixedStorage<T, R, S> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("FixedStorage")
            .field("capacity", &(T, R, S))
            .field("loaded", &self.loaded.map(|l| l.header))
            .finish()
    }
}

#[cfg(feature = "defmt")]
impl<const T: usize, const R: usize, const S: usize> defmt::Format for FixedStorage<T, R, S> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(
            f,
            "FixedStorage {{ capacity: ({=usize}, {=usize}, {=usize}), loaded: {=bool} }}",
            T,
            R,
            S,
            self.loaded.is_some()
        )
    }
}

#[cfg(feature = "defmt")]
impl defmt::Format for I32Values<'_> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(f, "I32Values({=usize})", self.len())
    }
}

#[cfg(feature = "defmt")]
impl defmt::Format for I16Values<'_> {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(f, "I16Values({=usize})", self.len())
    }
}
