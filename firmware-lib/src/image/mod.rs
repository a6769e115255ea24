//! Per-unit calibration images: the binary form of one unit's calibration in EEPROM or flash, how it is
//! written, how it is checked when it is read back, and how a unit chooses between two slots.
//!
//! A corrupted or foreign image is never used: [`Image::parse`] checks every byte once, up front, and
//! either returns an [`Image`] whose accessors cannot fail or a specific [`ImageError`]. Writing needs no
//! allocation either ([`write`](fn@write) fills a caller's buffer). The A/B slot helpers are in [`slots`].
//! An image is a record like the field records: its framing (magic, version, length, CRC), the checked
//! reading and writing of its fields and the A/B slot rule are [`crate::record`]'s; its layout, its
//! sections and its value checks are this module's.
//!
//! # Format (version 3)
//!
//! Little-endian throughout; `f32` values are IEEE 754 binary32 bit patterns, stored bit-exact.
//!
//! ```text
//! header (40 bytes) | section | section | … | CRC-32 (4 bytes)
//! section = kind u16 | len u16 | payload (len bytes, len a multiple of 4)
//! ```
//!
//! * The **header** carries the magic `LTCI`, the format version, the number of sections, the total length,
//!   a sequence counter for the two-slot layout, the calibration time (u64 Unix seconds, UTC) and the unit
//!   serial (16 bytes of printable ASCII, NUL-padded).
//! * The **body** is a sequence of typed sections. Two are required, each exactly once, in any order:
//!   `0x0001` *ranges* (the calibrated ADC, temperature and x ranges) and `0x0002` *model_f32* (the f32
//!   model: every field of [`Calibration`] not in *ranges*, including unused coefficients, so an image
//!   round-trips a calibration bit for bit). Two more are defined and optional: `0x8004` *sensor*, the raw
//!   temperature channel's description ([`TemperatureSensor`], for either path: [`Image::sensor`],
//!   [`Image::celsius`]), present when the unit reads a raw temperature channel; and `0x8003` *fixed*, the
//!   integer fixed-point form of the same calibration ([`FixedCalibration`](crate::fixed::FixedCalibration):
//!   its header's scalars, the size of every table, the temperature sensor's table, then the tables), for
//!   cores without an FPU (see [`FixedSection`] for how it is checked and loaded without allocation). Its
//!   residual table may be empty: the residual is then zero everywhere (a unit whose fit chose no residual
//!   and whose front end has no bend left for it).
//! * A section type with bit 15 set is **optional**: a reader that does not know it skips it (it is still
//!   covered by the CRC). A type with bit 15 clear is **critical**: a reader that does not know it refuses
//!   the image ([`ImageError::UnknownSection`]). Types `0x0003`–`0x00ff` and `0x8005`–`0x80ff` are reserved
//!   for this project.
//! * The **trailer** is the CRC-32/ISO-HDLC of every byte before it ([`crate::record::crc32`]).
//!
//! Versions are exact: a reader refuses an image of another version by name
//! ([`FormatError::UnsupportedVersion`](crate::record::FormatError::UnsupportedVersion)). Version 2 had no
//! *sensor* section and no empty residual table; version 1 did not bind the fixed section to its model.
//!
//! An image of the two required sections only is [`layout::F32_IMAGE_LEN`] = 268 bytes, 44 bytes more with
//! the sensor section ([`layout::SENSOR_SECTION_LEN`]); with the fixed section of tables with 16 temperature
//! knots and 40 x̃ knots it is 2 024 bytes, 2 168 with the bias bend and the sensitivity limit, and 524 bytes
//! more with a 128-segment temperature-sensor table.
//!
//! The full layout, rendered from the constants in [`layout`] (offsets within each part; in an image written
//! by [`write`](fn@write) the *ranges* payload starts at byte 44, the *model_f32* payload at byte 80 and the
//! CRC at byte 264; [`write_with_fixed`] puts the *fixed* section's header at byte 264 and its payload at
//! byte 268; [`write_contents`] puts the *sensor* section, when there is one, at byte 264, and everything
//! after it 44 bytes later):
//!
#![doc = include_str!("LAYOUT.md")]
//!
//! # Order of the checks
//!
//! [`Image::parse`] runs its checks in this order, and stops at the first that fails:
//!
//! 1. **The framing** every record shares ([`ImageError::Format`], see
//!    [the order of the framing checks](crate::record#order-of-the-framing-checks)): the magic (erased
//!    flash, blank EEPROM and foreign data are rejected at once, before any length is believed), the
//!    version, the declared total length (at least header + CRC, a multiple of 4, at most
//!    [`layout::MAX_LEN`], present in full, and for [`Image::parse`] equal to the number of bytes given),
//!    then the CRC over that length. The CRC comes *before* the structural checks: once it matches, the
//!    section walk and the value checks only ever see bytes exactly as the writer wrote them, so a corrupted
//!    image is reported as a CRC mismatch. The parser is panic-free on any input either way (it is fuzzed
//!    without the CRC as well), so this order is about fast, honest rejection, not about memory safety.
//! 2. **Structure**: sections lie within the body, are 4-byte multiples, known sections of a fixed layout
//!    have their layout's length, none is duplicated, the count matches the header, both required sections
//!    are present.
//! 3. **Values**: the serial, reserved bytes (zero), flags (0 or 1), term counts within their tables'
//!    capacities, every stored f32 finite, and [`Calibration::validate`]. Then, if there is a fixed section,
//!    its structure: flags, reserved and padding bytes, sensor fault codes, every table's size against the
//!    section's own dimensions ([`ImageValueError::FixedTableSize`]), the payload length against those
//!    sizes, the converter against *ranges* ([`ImageValueError::FixedMismatch`]), and the calibration the
//!    tables were built from against the image's f32 sections ([`ImageValueError::FixedOtherCalibration`]:
//!    tables of another unit spliced in). The CRC cannot catch a writer that stored a bad value with a
//!    correct CRC; these checks do.
//!
//! The fixed section's table values are checked by [`FixedCalibration::validate`](crate::fixed::FixedCalibration::validate)
//! when they are copied out ([`Image::fixed_into`], [`FixedStorage::load`]), before they can be used.
//!
//! Every step is bounded by the declared length, allocates nothing and returns a specific error.
//!
//! # Example
//!
//! ```
//! use logtrim::image::{self, Image, ImageInfo};
//! use logtrim::Calibration;
//!
//! let cal = Calibration::nominal(16, 32768.0, 2000.0, 25.0);
//! let info = ImageInfo { serial: "PH-2207-0042", calibrated_at: 1_764_614_400, sequence: 7 };
//! let mut buf = [0u8; image::layout::F32_IMAGE_LEN];
//! let n = image::write(&mut buf, &info, &cal)?;
//!
//! let img = Image::parse(&buf[..n])?;
//! assert_eq!(img.calibration(), cal);
//! assert_eq!(img.serial(), "PH-2207-0042");
//!
//! buf[100] ^= 0x04; // one flipped bit
//! assert!(matches!(
//!     Image::parse(&buf),
//!     Err(image::ImageError::Format(logtrim::record::FormatError::CrcMismatch { .. }))
//! ));
//! # Ok::<(), Box<dyn core::error::Error>>(())
//! ```

mod error;
mod fixed;
pub mod layout;
mod parse;
mod sensor;
pub mod slots;
mod write;

pub use error::{ImageError, ImageValueError, WriteError};
pub use fixed::{DefaultFixedStorage, FixedSection, FixedStorage, I16Values, I32Values};
pub use write::{
    encoded_len, encoded_len_of, encoded_len_with_fixed, write, write_contents, write_with_fixed,
    write_with_sections, Contents, ImageInfo,
};

use crate::calibration::Calibration;
use crate::error::Error;
use crate::fixed::FixedCalibration;
use crate::record::frame::{array, Extent};
use crate::sensor::TemperatureSensor;

/// A section of an image: its type and payload.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Section<'a> {
    /// The section type (bit 15 set: optional).
    pub kind: u16,
    /// The payload.
    pub payload: &'a [u8],
}

/// A calibration image that passed every check. Its accessors cannot fail.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Image<'a> {
    bytes: &'a [u8],
    version: u16,
    sequence: u32,
    calibrated_at: u64,
    serial: &'a str,
    crc: u32,
    calibration: Calibration,
    sensor: Option<TemperatureSensor>,
    fixed: Option<FixedSection<'a>>,
}

impl<'a> Image<'a> {
    /// Checks `bytes` as exactly one image (see [the order of the checks](self#order-of-the-checks)).
    /// Trailing bytes beyond the declared length are an error
    /// ([`FormatError::LengthMismatch`](crate::record::FormatError::LengthMismatch)).
    pub fn parse(bytes: &'a [u8]) -> Result<Image<'a>, ImageError> {
        parse::parse(bytes, Extent::Exact).map(|(image, _)| image)
    }

    /// Checks an image at the start of `bytes` (a slot, a flash page) and returns it with the bytes after
    /// it, which are not part of the image and are not checked (erased flash, say).
    pub fn parse_prefix(bytes: &'a [u8]) -> Result<(Image<'a>, &'a [u8]), ImageError> {
        parse::parse(bytes, Extent::Prefix)
    }

    /// The unit's calibration.
    pub fn calibration(&self) -> Calibration {
        self.calibration
    }

    /// The raw temperature channel's description (section `0x8004`, checked with
    /// [`TemperatureSensor::validate`]), if the unit reads one; `None` when its temperature arrives in °C.
    pub fn sensor(&self) -> Option<TemperatureSensor> {
        self.sensor
    }

    /// The temperature in °C at a code of the raw temperature channel, by the image's own sensor
    /// description ([`TemperatureSensor::celsius`], f32): what an f32 firmware passes to the correction.
    /// [`Error::NotCalibrated`] when the image carries no sensor description, [`Error::Sensor`] for a code in
    /// a fault band or outside the channel's range.
    pub fn celsius(&self, temp_code: u32) -> Result<f32, Error> {
        self.sensor.as_ref().ok_or(Error::NotCalibrated)?.celsius(temp_code)
    }

    /// The fixed section, if the image has one (structurally checked; see [`FixedSection`]).
    pub fn fixed(&self) -> Option<FixedSection<'a>> {
        self.fixed
    }

    /// The unit's fixed-point calibration: the fixed section's tables copied into `storage` and checked
    /// with [`FixedCalibration::validate`] ([`FixedStorage::load`]). [`ImageError::MissingSection`] if the
    /// image has no fixed section, [`ImageError::FixedCapacity`] if the tables do not fit the storage,
    /// [`ImageError::Value`] with [`ImageValueError::Fixed`] if they do not validate.
    pub fn fixed_into<'s, const T: usize, const R: usize, const S: usize>(
        &self,
        storage: &'s mut FixedStorage<T, R, S>,
    ) -> Result<FixedCalibration<'s>, ImageError> {
        let missing = ImageError::MissingSection { kind: layout::fixed::KIND };
        storage.load(&self.fixed.ok_or(missing)?)?;
        storage.calibration().ok_or(missing)
    }

    /// The unit serial (printable ASCII, possibly empty).
    pub fn serial(&self) -> &'a str {
        self.serial
    }

    /// When the unit was calibrated, Unix seconds (UTC).
    pub fn calibrated_at(&self) -> u64 {
        self.calibrated_at
    }

    /// The write counter used to choose between two slots.
    pub fn sequence(&self) -> u32 {
        self.sequence
    }

    /// The format version.
    pub fn version(&self) -> u16 {
        self.version
    }

    /// The stored (and verified) CRC.
    pub fn crc(&self) -> u32 {
        self.crc
    }

    /// The image's bytes, header to CRC.
    pub fn as_bytes(&self) -> &'a [u8] {
        self.bytes
    }

    /// The image's length in bytes.
    pub fn len(&self) -> usize {
        self.bytes.len()
    }

    /// Always false: an image holds at least a header and a CRC (for clippy's `len` convention).
    pub fn is_empty(&self) -> bool {
        self.bytes.is_empty()
    }

    /// The sections in the order they appear, known and optional ones alike.
    pub fn sections(&self) -> Sections<'a> {
        let end = self.bytes.len().saturating_sub(layout::trailer::LEN);
        Sections { rest: self.bytes.get(layout::header::LEN..end).unwrap_or(&[]) }
    }

    /// The payload of the first section of type `kind`, if there is one.
    pub fn section(&self, kind: u16) -> Option<&'a [u8]> {
        self.sections().find(|s| s.kind == kind).map(|s| s.payload)
    }
}

/// Iterator over the sections of a checked [`Image`].
#[derive(Debug, Clone)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Sections<'a> {
    rest: &'a [u8],
}

impl<'a> Iterator for Sections<'a> {
    type Item = Section<'a>;

    fn next(&mut self) -> Option<Section<'a>> {
        let (head, rest) = self.rest.split_at_checked(layout::section::HEADER_LEN)?;
        let kind = u16::from_le_bytes(array(head, &layout::section::KIND)?);
        let len = u16::from_le_bytes(array(head, &layout::section::LEN)?);
        let (payload, rest) = rest.split_at_checked(usize::from(len))?;
        self.rest = rest;
        Some(Section { kind, payload })
    }
}

// Every public type of the module can be logged with defmt (a build with the feature fails otherwise).
#[cfg(feature = "defmt")]
const _: () = {
    const fn is_format<T: defmt::Format>() {}
    is_format::<Image<'static>>();
    is_format::<FixedSection<'static>>();
    is_format::<DefaultFixedStorage>();
    is_format::<I32Values<'static>>();
    is_format::<I16Values<'static>>();
    is_format::<layout::Elem>();
    is_format::<layout::Table>();
    is_format::<layout::Part>();
    is_format::<Section<'static>>();
    is_format::<Sections<'static>>();
    is_format::<ImageInfo<'static>>();
    is_format::<Contents<'static>>();
    is_format::<ImageError>();
    is_format::<ImageValueError>();
    is_format::<WriteError>();
    is_format::<slots::ActiveCalibration>();
};

#[cfg(test)]
mod format3_tests;
#[cfg(test)]
mod tests;
