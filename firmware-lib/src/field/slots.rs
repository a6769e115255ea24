//! Two-slot (A/B) storage of a field record, as for the factory image ([`crate::image::slots`]): a new trim
//! or blank is written to the slot that does *not* hold the record in use, so a write cut short by a power
//! loss leaves the last good record intact.
//!
//! # Which slot wins
//!
//! [`select`] parses both slots (bytes after the record, erased memory say, are ignored) and keeps the
//! records that pass their CRC and framing checks *and* belong to the factory calibration in use, when its
//! fingerprint is given (a record bound to another calibration, or 0 = unbound, as [`Layers::new`] judges
//! it). Of those, the higher [sequence counter](RecordInfo::sequence) wins; equal counters (which
//! [`next_write`] never produces) go to the later `written_at`, then to slot A. A cleared trim is a
//! record like any other: the newest one clears the trim.
//!
//! The trim's limits are not part of the choice: a newest trim past the instrument's limits is a fault that
//! [`Layers::new`] reports, not a reason to fall back to an older trim silently.
//!
//! When neither slot holds a usable record, [`select`] returns [`NoValidRecord`] with both reasons; the
//! channel then runs without that layer (factory readings, or absolute readings without a blank).
//!
//! [`Layers::new`]: super::Layers::new

use core::fmt;

use super::record::{RecordError, RecordInfo, RecordType};
use super::{layout, Blank, Trim};
pub use crate::image::slots::{SequenceExhausted, SlotId, WritePlan};

/// A field record that can live in two slots: [`Trim`] and [`Blank`].
pub trait FieldRecord: Copy + Sized {
    /// Which record it is.
    const TYPE: RecordType;
    /// Its length in bytes.
    const LEN: usize;
    /// Parses a record at the start of `bytes` (what follows is returned and ignored here).
    fn parse_prefix(bytes: &[u8]) -> Result<(Self, &[u8]), RecordError>;
    /// Its header: sequence counter, time, binding.
    fn info(&self) -> RecordInfo;
}

impl FieldRecord for Trim {
    const TYPE: RecordType = RecordType::Trim;
    const LEN: usize = layout::TRIM_LEN;
    fn parse_prefix(bytes: &[u8]) -> Result<(Self, &[u8]), RecordError> {
        Trim::parse_prefix(bytes)
    }
    fn info(&self) -> RecordInfo {
        Trim::info(self)
    }
}

impl FieldRecord for Blank {
    const TYPE: RecordType = RecordType::Blank;
    const LEN: usize = layout::BLANK_LEN;
    fn parse_prefix(bytes: &[u8]) -> Result<(Self, &[u8]), RecordError> {
        Blank::parse_prefix(bytes)
    }
    fn info(&self) -> RecordInfo {
        Blank::info(self)
    }
}

/// Why a slot's record was not used.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RecordRejected {
    /// The slot holds no valid record of this type.
    Invalid(RecordError),
    /// A valid record, made on another factory calibration.
    OtherCalibration {
        /// The fingerprint it is bound to.
        bound_to: u32,
        /// Its sequence counter.
        sequence: u32,
    },
    /// A valid record, older than the chosen one.
    Older {
        /// Its sequence counter.
        sequence: u32,
        /// When it was written, Unix seconds.
        written_at: u64,
    },
    /// A valid record with the same sequence counter and time as the chosen one.
    Tie {
        /// Whether the two records are byte-for-byte identical (a duplicate, not a writer fault).
        identical: bool,
    },
}

/// The record a channel uses, and why the other slot's was not.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RecordSelection<R> {
    /// The newest usable record.
    pub record: R,
    /// The slot it came from.
    pub slot: SlotId,
    /// Why the other slot lost.
    pub other: RecordRejected,
}

/// Neither slot holds a usable record: the channel runs without this layer.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NoValidRecord {
    /// Which record was looked for.
    pub record: RecordType,
    /// Why slot A was refused ([`RecordRejected::Invalid`] or [`RecordRejected::OtherCalibration`]).
    pub a: RecordRejected,
    /// Why slot B was refused.
    pub b: RecordRejected,
}

/// The order of two usable records: the sequence counter, then the time.
fn order<R: FieldRecord>(r: &R) -> (u32, u64) {
    (r.info().sequence, r.info().written_at)
}

/// One slot's outcome: a usable record, or why not; and its sequence counter if it parsed at all.
fn check<R: FieldRecord>(bytes: &[u8], factory: Option<u32>) -> (Result<R, RecordRejected>, Option<u32>) {
    match R::parse_prefix(bytes) {
        Err(e) => (Err(RecordRejected::Invalid(e)), None),
        Ok((r, _)) => {
            let info = r.info();
            let usable = match factory {
                Some(f) => info.factory == 0 || info.factory == f,
                None => true,
            };
            if usable {
                (Ok(r), Some(info.sequence))
            } else {
                (
                    Err(RecordRejected::OtherCalibration { bound_to: info.factory, sequence: info.sequence }),
                    Some(info.sequence),
                )
            }
        }
    }
}

/// Chooses the newest usable record of two slots (see the [module docs](self)). `factory` is the
/// fingerprint of the factory calibration in use ([`fingerprint`](super::fingerprint)), or `None` to accept
/// records bound to any.
pub fn select<R: FieldRecord>(
    a: &[u8],
    b: &[u8],
    factory: Option<u32>,
) -> Result<RecordSelection<R>, NoValidRecord> {
    let ((ra, _), (rb, _)) = (check::<R>(a, factory), check::<R>(b, factory));
    match (ra, rb) {
        (Ok(x), Ok(y)) => {
            let (record, slot, loser) =
                if order(&y) > order(&x) { (y, SlotId::B, x) } else { (x, SlotId::A, y) };
            let other = if order(&loser) == order(&record) {
                let len = R::LEN;
                RecordRejected::Tie { identical: a.get(..len).is_some() && a.get(..len) == b.get(..len) }
            } else {
                RecordRejected::Older { sequence: loser.info().sequence, written_at: loser.info().written_at }
            };
            Ok(RecordSelection { record, slot, other })
        }
        (Ok(record), Err(e)) => Ok(RecordSelection { record, slot: SlotId::A, other: e }),
        (Err(e), Ok(record)) => Ok(RecordSelection { record, slot: SlotId::B, other: e }),
        (Err(a), Err(b)) => Err(NoValidRecord { record: R::TYPE, a, b }),
    }
}

/// Plans the next write of a record: the slot not holding the record in use, and a sequence counter above
/// every record either slot holds (a record of another calibration included, so the order of writes stays
/// one order). With no record in use, the slot whose contents are older (an invalid slot first; slot A on a
/// tie).
pub fn next_write<R: FieldRecord>(
    a: &[u8],
    b: &[u8],
    factory: Option<u32>,
) -> Result<WritePlan, SequenceExhausted> {
    let ((ra, sa), (rb, sb)) = (check::<R>(a, factory), check::<R>(b, factory));
    let top = sa.max(sb);
    let sequence = match top {
        Some(s) => s.checked_add(1).ok_or(SequenceExhausted)?,
        None => 1,
    };
    let slot = match (ra, rb) {
        (Ok(x), Ok(y)) => {
            if order(&y) > order(&x) {
                SlotId::A
            } else {
                SlotId::B
            }
        }
        (Ok(_), Err(_)) => SlotId::B,
        (Err(_), Ok(_)) => SlotId::A,
        // Neither usable: overwrite the older contents (an unparsable slot counts as oldest; A on a tie).
        (Err(_), Err(_)) => {
            let rank = |s: Option<u32>| s.map_or(-1, i64::from);
            if rank(sb) < rank(sa) {
                SlotId::B
            } else {
                SlotId::A
            }
        }
    };
    Ok(WritePlan { slot, sequence })
}

impl fmt::Display for RecordRejected {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RecordRejected::Invalid(e) => write!(f, "invalid: {e}"),
            RecordRejected::OtherCalibration { bound_to, sequence } => {
                write!(
                    f,
                    "made on another factory calibration (fingerprint {bound_to:#010x}, sequence {sequence})"
                )
            }
            RecordRejected::Older { sequence, written_at } => {
                write!(f, "older (sequence {sequence}, written at {written_at})")
            }
            RecordRejected::Tie { identical: true } => f.write_str("a duplicate of the chosen record"),
            RecordRejected::Tie { identical: false } => {
                f.write_str("same sequence and time as the chosen record but different contents")
            }
        }
    }
}

impl fmt::Display for NoValidRecord {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "no usable {}: slot A {}; slot B {}", self.record, self.a, self.b)
    }
}

impl core::error::Error for NoValidRecord {}
