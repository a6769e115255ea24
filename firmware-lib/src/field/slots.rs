//! Two-slot (A/B) storage of a field record: the rule every record follows ([`crate::record::slots`]), with
//! the factory calibration in use. A new trim or blank is written to the slot that does *not* hold the
//! record in use, so a write cut short by a power loss leaves the last good record intact.
//!
//! # Which slot wins
//!
//! [`select`] parses both slots (bytes after the record, erased memory say, are ignored) and keeps the
//! records that pass their CRC and value checks *and* belong to the factory calibration in use, when its
//! fingerprint is given (a record bound to another calibration is
//! [`Rejected::OtherCalibration`](crate::record::slots::Rejected::OtherCalibration); one bound to none,
//! fingerprint 0, is usable, as [`Layers::new`] judges it). Of those, the higher
//! [sequence counter](super::RecordInfo::sequence) wins; equal counters (which [`next_write`] never
//! produces) go to the later `written_at`, then to slot A. A cleared trim is a record like any other: the
//! newest one clears the trim.
//!
//! The trim's limits are not part of the choice: a newest trim past the instrument's limits is a fault that
//! [`Layers::new`] reports, not a reason to fall back to an older trim silently.
//!
//! When neither slot holds a usable record, [`select`] returns [`NoValidRecord`] with both reasons; the
//! channel then runs without that layer (factory readings, or absolute readings without a blank).
//!
//! [`Layers::new`]: super::Layers::new

use super::header::RecordError;
use crate::record::slots::{
    self as shared, NoValidRecord, Selection, SequenceExhausted, SlotRecord, WritePlan,
};

/// Chooses the newest usable [`Trim`](super::Trim) or [`Blank`](super::Blank) of two slots (see the
/// [module docs](self)). `factory` is the fingerprint of the factory calibration in use
/// ([`fingerprint`](super::fingerprint)), or `None` to accept records bound to any.
pub fn select<'a, R: SlotRecord<'a, Error = RecordError>>(
    a: &'a [u8],
    b: &'a [u8],
    factory: Option<u32>,
) -> Result<Selection<R, RecordError>, NoValidRecord<RecordError>> {
    shared::select(a, b, factory)
}

/// Plans the next write of a record: the slot not holding the record in use, and a sequence counter above
/// every record either slot holds (a record of another calibration included, so the order of writes stays
/// one order). With no record in use, the slot whose contents are older (an invalid slot first; slot A on a
/// tie). See [where the next record goes](crate::record::slots#where-the-next-record-goes).
pub fn next_write<'a, R: SlotRecord<'a, Error = RecordError>>(
    a: &'a [u8],
    b: &'a [u8],
    factory: Option<u32>,
) -> Result<WritePlan, SequenceExhausted> {
    shared::next_write::<R>(a, b, factory)
}
