//! The two-slot (A/B) layout for calibration images: the rule every record follows
//! ([`crate::record::slots`]), with an image's sequence counter and calibration time. A new calibration is
//! always written to the slot that does *not* hold the image in use ([`next_write`]), so a write cut short
//! by a power loss leaves the old image intact.
//!
//! # Which slot wins
//!
//! [`select`] parses both slots ([`Image::parse_prefix`]: bytes after the image, erased flash say, are
//! ignored) and uses the valid image with the higher [sequence counter](super::ImageInfo::sequence). Equal
//! counters (which [`next_write`] never produces) are broken by the later calibration time, then in favour
//! of slot A. The counter, not the calibration time, decides because the time is only as good as the line's
//! clock and a unit may be re-imaged with an older calibration on purpose; the counter records the order of
//! the writes.
//!
//! The slot that loses is reported with the reason: its specific [`ImageError`], or that it is older
//! ([`Rejected`]). Images are not bound to a factory calibration, so [`Rejected::OtherCalibration`] never
//! occurs here.
//!
//! A unit that corrects with the fixed-point path uses [`select_fixed`]: the same choice, except that an
//! image counts as valid only if it has a fixed section whose tables load into the caller's
//! [`FixedStorage`] and pass [`FixedCalibration::validate`]. A newer image with bad tables thus loses to
//! an older good one, as a corrupted image would.
//!
//! # Neither slot valid
//!
//! When neither slot holds a valid image, [`select`] returns [`NoValidRecord`] with both errors for the log,
//! and the unit must not correct with anything: an [`ActiveCalibration`] built from that result reports every
//! reading as [`Error::NotCalibrated`]. There is deliberately no way to obtain a [`Calibration`] from a slot
//! that failed its checks, and no fallback to a nominal equation that could be mistaken for a calibrated
//! value.

use super::{layout, FixedStorage, Image, ImageError};
use crate::calibration::{Calibration, Reading};
use crate::error::Error;
use crate::fixed::FixedCalibration;
use crate::record::slots::{
    self as shared, NoValidRecord, Rejected, Selection, SequenceExhausted, SlotRecord, WritePlan,
};
use crate::record::RecordType;

impl<'a> SlotRecord<'a> for Image<'a> {
    const TYPE: RecordType = RecordType::CalibrationImage;
    type Error = ImageError;

    fn parse_prefix(bytes: &'a [u8]) -> Result<(Image<'a>, &'a [u8]), ImageError> {
        Image::parse_prefix(bytes)
    }

    fn sequence(&self) -> u32 {
        Image::sequence(self)
    }

    fn time(&self) -> u64 {
        self.calibrated_at()
    }

    /// Images are bound to no calibration: they are the calibration.
    fn factory(&self) -> u32 {
        0
    }
}

/// Chooses the newest valid image of two slots (see the [module docs](self)).
///
/// ```
/// use logtrim::image::slots::{next_write, select, ActiveCalibration};
/// use logtrim::image::{write, ImageInfo};
/// use logtrim::record::slots::SlotId;
/// use logtrim::{Calibration, Error};
///
/// // Two slots of erased flash: nothing valid, so the next write goes to slot A with counter 1, and a
/// // unit that boots now corrects nothing.
/// let (mut a, mut b) = ([0xffu8; 512], [0xffu8; 512]);
/// let plan = next_write(&a, &b).unwrap();
/// assert_eq!((plan.slot, plan.sequence), (SlotId::A, 1));
/// assert_eq!(ActiveCalibration::from_selection(&select(&a, &b)).correct(30000, 25.0), Err(Error::NotCalibrated));
///
/// // The first calibration goes to A; a re-calibration to B, never over the image in use.
/// let first = Calibration::nominal(16, 32768.0, 1000.0, 25.0);
/// write(&mut a, &ImageInfo { serial: "DL-0002", calibrated_at: 1_700_000_000, sequence: 1 }, &first).unwrap();
/// let plan = next_write(&a, &b).unwrap();
/// assert_eq!((plan.slot, plan.sequence), (SlotId::B, 2));
/// let second = Calibration::nominal(16, 32770.0, 1001.0, 25.0);
/// write(&mut b, &ImageInfo { serial: "DL-0002", calibrated_at: 1_700_086_400, sequence: 2 }, &second).unwrap();
/// let chosen = select(&a, &b).unwrap();
/// assert_eq!((chosen.slot, chosen.record.calibration()), (SlotId::B, second));
///
/// // A write to B cut short by a power loss: the unit falls back to A's image.
/// b[100] ^= 0xff;
/// let chosen = select(&a, &b).unwrap();
/// assert_eq!((chosen.slot, chosen.record.calibration()), (SlotId::A, first));
/// ```
pub fn select<'a>(
    a: &'a [u8],
    b: &'a [u8],
) -> Result<Selection<Image<'a>, ImageError>, NoValidRecord<ImageError>> {
    shared::select(a, b, None)
}

/// Chooses the newest image of two slots whose fixed-point tables load and validate, and returns it with
/// its [`FixedCalibration`] in `storage` (see the [module docs](self)). An image without a fixed section
/// is refused with [`ImageError::MissingSection`]; tables too large for `storage` with
/// [`ImageError::FixedCapacity`].
pub fn select_fixed<'a, 's, const T: usize, const R: usize, const S: usize>(
    a: &'a [u8],
    b: &'a [u8],
    storage: &'s mut FixedStorage<T, R, S>,
) -> Result<(Selection<Image<'a>, ImageError>, FixedCalibration<'s>), NoValidRecord<ImageError>> {
    let selection = shared::select_with(a, b, None, |bytes: &'a [u8]| {
        let (image, rest) = Image::parse_prefix(bytes)?;
        let missing = ImageError::MissingSection { kind: layout::fixed::KIND };
        storage.load(&image.fixed().ok_or(missing)?)?;
        Ok((image, rest))
    })?;
    // The storage holds the tables of the last image checked: load the chosen one's (it loaded before).
    let reload = selection.record.fixed_into(storage).map_err(|e| NoValidRecord {
        record: RecordType::CalibrationImage,
        a: Rejected::Invalid(e),
        b: Rejected::Invalid(e),
    })?;
    Ok((selection, reload))
}

/// Plans the next write: the slot not in use (slot A when neither is valid) and the next counter (1 when
/// neither is valid).
pub fn next_write(a: &[u8], b: &[u8]) -> Result<WritePlan, SequenceExhausted> {
    shared::next_write::<Image<'_>>(a, b, None)
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
    pub fn from_selection(
        selection: &Result<Selection<Image<'_>, ImageError>, NoValidRecord<ImageError>>,
    ) -> ActiveCalibration {
        match selection {
            Ok(s) => ActiveCalibration::from_image(&s.record),
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

impl From<NoValidRecord<ImageError>> for Error {
    /// Readings without a valid image: [`Error::NotCalibrated`].
    fn from(_: NoValidRecord<ImageError>) -> Error {
        Error::NotCalibrated
    }
}
