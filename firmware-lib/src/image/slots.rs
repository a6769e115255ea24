//! The usual two-slot (A/B) layout: two EEPROM areas or flash pages, each large enough for one image. A new
//! calibration is always written to the slot that does *not* hold the image in use, so a write cut short by
//! a power loss leaves the old image intact.
//!
//! # Which slot wins
//!
//! [`select`] parses both slots ([`Image::parse_prefix`]: bytes after the image, erased flash say, are
//! ignored) and uses the valid image with the higher [sequence counter](super::ImageInfo::sequence). Equal counters
//! (which [`next_write`] never produces) are broken by the later calibration time, then in favour of slot A.
//! The counter, not the calibration time, decides because the time is only as good as the line's clock and
//! a unit may be re-imaged with an older calibration on purpose; the counter records the order of the
//! writes. It is a u32: at one write a second it lasts 136 years, and [`next_write`] refuses to wrap.
//!
//! The slot that loses is reported with the reason: its specific [`ImageError`], or [`Rejected::Older`].
//!
//! A unit that corrects with the fixed-point path uses [`select_fixed`]: the same choice, except that an
//! image counts as valid only if it has a fixed section whose tables load into the caller's
//! [`FixedStorage`] and pass [`FixedCalibration::validate`]. A newer image with bad tables thus loses to
//! an older good one, as a corrupted image would.
//!
//! # Neither slot valid
//!
//! When neither slot holds a valid image, [`select`] returns [`NoValidImage`] with both errors for the log,
//! and the unit must not correct with anything: an [`ActiveCalibration`] built from that result reports every
//! reading as [`Error::NotCalibrated`]. There is deliberately no way to obtain a [`Calibration`] from a slot
//! that failed its checks, and no fallback to a nominal equation that could be mistaken for a calibrated
//! value.

use core::fmt;

use super::{layout, FixedStorage, Image, ImageError};
use crate::calibration::{Calibration, Reading};
use crate::error::Error;
use crate::fixed::FixedCalibration;

/// One of the two slots.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SlotId {
    /// The first slot.
    A,
    /// The second slot.
    B,
}

impl SlotId {
    /// The other slot.
    pub const fn other(self) -> SlotId {
        match self {
            SlotId::A => SlotId::B,
            SlotId::B => SlotId::A,
        }
    }
}

/// Why the slot that was not chosen lost.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Rejected {
    /// It holds no valid image.
    Invalid(ImageError),
    /// It holds a valid image, older than the chosen one.
    Older {
        /// Its sequence counter.
        sequence: u32,
        /// Its calibration time, Unix seconds.
        calibrated_at: u64,
    },
    /// It holds a valid image with the same sequence counter and calibration time as the chosen one.
    Tie {
        /// Whether the two images are byte-for-byte identical (a duplicate, as opposed to a writer fault).
        identical: bool,
    },
}

/// The image a unit boots with, and why the other slot was not used.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Selection<'a> {
    /// The newest valid image.
    pub image: Image<'a>,
    /// The slot it came from.
    pub slot: SlotId,
    /// Why the other slot lost.
    pub other: Rejected,
}

/// Neither slot holds a valid image: the unit is not calibrated.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NoValidImage {
    /// Why slot A was refused.
    pub a: ImageError,
    /// Why slot B was refused.
    pub b: ImageError,
}

/// Chooses the newest valid image of two slots (see the [module docs](self)).
pub fn select<'a>(a: &'a [u8], b: &'a [u8]) -> Result<Selection<'a>, NoValidImage> {
    let parse = |bytes: &'a [u8]| Image::parse_prefix(bytes).map(|(image, _)| image);
    choose(parse(a), parse(b))
}

/// Chooses the newest image of two slots whose fixed-point tables load and validate, and returns it with
/// its [`FixedCalibration`] in `storage` (see the [module docs](self)). An image without a fixed section
/// is refused with [`ImageError::MissingSection`]; tables too large for `storage` with
/// [`ImageError::FixedCapacity`].
pub fn select_fixed<'a, 's, const T: usize, const R: usize, const S: usize>(
    a: &'a [u8],
    b: &'a [u8],
    storage: &'s mut FixedStorage<T, R, S>,
) -> Result<(Selection<'a>, FixedCalibration<'s>), NoValidImage> {
    let mut check = |bytes: &'a [u8]| -> Result<Image<'a>, ImageError> {
        let (image, _) = Image::parse_prefix(bytes)?;
        let missing = ImageError::MissingSection { kind: layout::fixed::KIND };
        storage.load(&image.fixed().ok_or(missing)?)?;
        Ok(image)
    };
    let (ra, rb) = (check(a), check(b));
    let selection = choose(ra, rb)?;
    // The storage holds the tables of the last image checked: load the chosen one's (it loaded before).
    let reload = selection.image.fixed_into(storage).map_err(|e| NoValidImage { a: e, b: e })?;
    Ok((selection, reload))
}

/// The choice between two slots' outcomes.
fn choose<'a>(
    a: Result<Image<'a>, ImageError>,
    b: Result<Image<'a>, ImageError>,
) -> Result<Selection<'a>, NoValidImage> {
    match (a, b) {
        (Ok(ia), Ok(ib)) => {
            let key = |i: &Image<'_>| (i.sequence(), i.calibrated_at());
            let (image, slot, loser) =
                if key(&ib) > key(&ia) { (ib, SlotId::B, ia) } else { (ia, SlotId::A, ib) };
            let other = if key(&loser) == key(&image) {
                Rejected::Tie { identical: loser.as_bytes() == image.as_bytes() }
            } else {
                Rejected::Older { sequence: loser.sequence(), calibrated_at: loser.calibrated_at() }
            };
            Ok(Selection { image, slot, other })
        }
        (Ok(image), Err(e)) => Ok(Selection { image, slot: SlotId::A, other: Rejected::Invalid(e) }),
        (Err(e), Ok(image)) => Ok(Selection { image, slot: SlotId::B, other: Rejected::Invalid(e) }),
        (Err(a), Err(b)) => Err(NoValidImage { a, b }),
    }
}

/// Where and with which sequence counter the next image goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WritePlan {
    /// The slot to overwrite: never the one holding the image in use.
    pub slot: SlotId,
    /// The sequence counter for the new image: one more than the image in use, 1 if there is none.
    pub sequence: u32,
}

/// The image in use already has the largest sequence counter; a new image could not be told apart as newer.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SequenceExhausted;

/// Plans the next write: the slot not in use (slot A when neither is valid) and the next counter.
pub fn next_write(a: &[u8], b: &[u8]) -> Result<WritePlan, SequenceExhausted> {
    match select(a, b) {
        Ok(s) => {
            let sequence = s.image.sequence().checked_add(1).ok_or(SequenceExhausted)?;
            Ok(WritePlan { slot: s.slot.other(), sequence })
        }
        Err(_) => Ok(WritePlan { slot: SlotId::A, sequence: 1 }),
    }
}

/// The calibration a unit corrects with after boot: the one of a valid image, or none. With none, every
/// reading is [`Error::NotCalibrated`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ActiveCalibration {
    calibration: Option<Calibration>,
}

impl ActiveCalibration {
    /// No calibration: every reading is [`Error::NotCalibrated`].
    pub const NONE: ActiveCalibration = ActiveCalibration { calibration: None };

    /// The calibration of a checked image.
    pub fn from_image(image: &Image<'_>) -> ActiveCalibration {
        ActiveCalibration { calibration: Some(image.calibration()) }
    }

    /// The outcome of [`select`]: the chosen image's calibration, or none.
    pub fn from_selection(selection: &Result<Selection<'_>, NoValidImage>) -> ActiveCalibration {
        match selection {
            Ok(s) => ActiveCalibration::from_image(&s.image),
            Err(_) => ActiveCalibration::NONE,
        }
    }

    /// Whether a calibration is loaded.
    pub fn is_calibrated(&self) -> bool {
        self.calibration.is_some()
    }

    /// The calibration, or [`Error::NotCalibrated`].
    pub fn calibration(&self) -> Result<&Calibration, Error> {
        self.calibration.as_ref().ok_or(Error::NotCalibrated)
    }

    /// Corrects a reading (see [`Calibration::correct`]), or [`Error::NotCalibrated`] without a calibration.
    pub fn correct(&self, code: u32, temp_c: f32) -> Result<Reading, Error> {
        self.calibration()?.correct(code, temp_c)
    }
}

impl fmt::Display for Rejected {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Rejected::Invalid(e) => write!(f, "invalid: {e}"),
            Rejected::Older { sequence, calibrated_at } => {
                write!(f, "older (sequence {sequence}, calibrated at {calibrated_at})")
            }
            Rejected::Tie { identical: true } => f.write_str("a duplicate of the chosen image"),
            Rejected::Tie { identical: false } => {
                f.write_str("same sequence and time as the chosen image but different contents")
            }
        }
    }
}

impl fmt::Display for NoValidImage {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "no valid calibration image: slot A {}; slot B {}", self.a, self.b)
    }
}

impl fmt::Display for SequenceExhausted {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("sequence counter exhausted")
    }
}

impl core::error::Error for NoValidImage {}
impl core::error::Error for SequenceExhausted {}

impl From<NoValidImage> for Error {
    /// Readings without a valid image: [`Error::NotCalibrated`].
    fn from(_: NoValidImage) -> Error {
        Error::NotCalibrated
    }
}
