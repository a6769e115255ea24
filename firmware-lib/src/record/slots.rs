//! The usual two-slot (A/B) layout, for every record: two EEPROM areas or flash pages, each large enough for
//! one record. A new record is always written to the slot that does *not* hold the one in use, so a write
//! cut short by a power loss leaves the last good record intact (common practice for power-fail-safe
//! updates).
//!
//! # Which slot wins
//!
//! [`select`] parses both slots (bytes after a record, erased flash say, are ignored) and keeps the records
//! that pass their checks *and*, when the fingerprint of the factory calibration in use is given, belong to
//! it (a field record bound to another calibration is [`Rejected::OtherCalibration`]; a record bound to none,
//! fingerprint 0, belongs to any; a calibration image is never bound). Of those, the higher
//! [sequence counter](SlotRecord::sequence) wins; equal counters (which [`next_write`] never produces) go to
//! the later [time](SlotRecord::time), then to slot A. The counter, not the time, decides: the time is only
//! as good as the clock that stamped it, and a unit may be given an older record on purpose; the counter
//! records the order of the writes. It is a u32: at one write a second it lasts 136 years, and
//! [`next_write`] refuses to wrap it.
//!
//! The slot that loses is reported with the reason ([`Rejected`]). When neither slot holds a usable record,
//! [`select`] returns [`NoValidRecord`] with both reasons.
//!
//! # Where the next record goes
//!
//! [`next_write`] plans a write: the slot *not* holding the record in use, and a sequence counter one above
//! every record either slot holds that passes its checks, usable or not (a record of another calibration
//! included, so that the writes keep one order). With no record in use, it overwrites the older contents: a
//! slot that holds no valid record counts as oldest, and slot A goes first on a tie.

use core::fmt;

use super::error::RecordType;

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

/// A checked record that can live in one of two slots: a calibration [`Image`](crate::image::Image), a
/// [`Trim`](crate::field::Trim), a [`Blank`](crate::field::Blank).
pub trait SlotRecord<'a>: Sized {
    /// Which record it is.
    const TYPE: RecordType;
    /// Why bytes are refused as this record.
    type Error;
    /// Parses a record at the start of `bytes` and returns it with the bytes after it, which are not part
    /// of the record and are not checked.
    fn parse_prefix(bytes: &'a [u8]) -> Result<(Self, &'a [u8]), Self::Error>;
    /// The write counter: the higher of two is the newer.
    fn sequence(&self) -> u32;
    /// The record's time stamp, Unix seconds (an image's calibration time, a field record's `written_at`):
    /// the tie-break between equal counters.
    fn time(&self) -> u64;
    /// The fingerprint of the factory calibration the record was made on; 0 = bound to none.
    fn factory(&self) -> u32;
}

/// Why a slot's record is not the one in use.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Rejected<E> {
    /// The slot holds no valid record of this type: its specific error.
    Invalid(E),
    /// A valid record, made on another factory calibration (field records only: an image is not bound).
    OtherCalibration {
        /// The fingerprint it is bound to.
        bound_to: u32,
        /// Its sequence counter.
        sequence: u32,
    },
    /// A usable record, older than the chosen one.
    Older {
        /// Its sequence counter.
        sequence: u32,
        /// Its time stamp, Unix seconds.
        time: u64,
    },
    /// A usable record with the same sequence counter and time as the chosen one.
    Tie {
        /// Whether the two records are byte-for-byte identical (a duplicate, as opposed to a writer fault).
        identical: bool,
    },
}

/// The record in use, and why the other slot's is not.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Selection<R, E> {
    /// The newest usable record.
    pub record: R,
    /// The slot it came from.
    pub slot: SlotId,
    /// Why the other slot lost.
    pub other: Rejected<E>,
}

/// Neither slot holds a usable record.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NoValidRecord<E> {
    /// Which record was looked for.
    pub record: RecordType,
    /// Why slot A was refused ([`Rejected::Invalid`] or [`Rejected::OtherCalibration`]).
    pub a: Rejected<E>,
    /// Why slot B was refused.
    pub b: Rejected<E>,
}

/// Where and with which sequence counter the next record goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WritePlan {
    /// The slot to overwrite: never the one holding the record in use.
    pub slot: SlotId,
    /// The sequence counter for the new record.
    pub sequence: u32,
}

/// A slot already holds the largest sequence counter: a new record could not be told apart as newer.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SequenceExhausted;

/// One slot as the rule sees it.
struct Slot<R, E> {
    /// A usable record and its length in bytes, or why the slot's record is not usable.
    usable: Result<(R, usize), Rejected<E>>,
    /// The sequence counter of the record, if it passed its checks (usable or not).
    sequence: Option<u32>,
}

fn slot<'a, R: SlotRecord<'a>, E>(
    bytes: &'a [u8],
    factory: Option<u32>,
    check: &mut impl FnMut(&'a [u8]) -> Result<(R, &'a [u8]), E>,
) -> Slot<R, E> {
    match check(bytes) {
        Err(e) => Slot { usable: Err(Rejected::Invalid(e)), sequence: None },
        Ok((r, rest)) => {
            let (bound_to, sequence) = (r.factory(), r.sequence());
            let usable = match factory {
                Some(f) => bound_to == 0 || bound_to == f,
                None => true,
            };
            let len = bytes.len().saturating_sub(rest.len());
            Slot {
                usable: if usable {
                    Ok((r, len))
                } else {
                    Err(Rejected::OtherCalibration { bound_to, sequence })
                },
                sequence: Some(sequence),
            }
        }
    }
}

/// The order of two usable records: the sequence counter, then the time.
fn order<'a, R: SlotRecord<'a>>(r: &R) -> (u32, u64) {
    (r.sequence(), r.time())
}

/// Chooses the newest usable record of two slots (see the [module docs](self)). `factory` is the
/// fingerprint of the factory calibration in use, or `None` to accept records bound to any.
pub fn select<'a, R: SlotRecord<'a>>(
    a: &'a [u8],
    b: &'a [u8],
    factory: Option<u32>,
) -> Result<Selection<R, R::Error>, NoValidRecord<R::Error>> {
    select_with(a, b, factory, R::parse_prefix)
}

/// [`select`] with the caller's own check of a slot in place of [`SlotRecord::parse_prefix`] (it may
/// refuse more: an image whose fixed-point tables do not load, say).
pub fn select_with<'a, R: SlotRecord<'a>, E>(
    a: &'a [u8],
    b: &'a [u8],
    factory: Option<u32>,
    mut check: impl FnMut(&'a [u8]) -> Result<(R, &'a [u8]), E>,
) -> Result<Selection<R, E>, NoValidRecord<E>> {
    let (sa, sb) = (slot(a, factory, &mut check), slot(b, factory, &mut check));
    match (sa.usable, sb.usable) {
        (Ok((x, lx)), Ok((y, ly))) => {
            let (record, slot, loser) =
                if order(&y) > order(&x) { (y, SlotId::B, x) } else { (x, SlotId::A, y) };
            let other = if order(&loser) == order(&record) {
                Rejected::Tie { identical: a.get(..lx) == b.get(..ly) }
            } else {
                Rejected::Older { sequence: loser.sequence(), time: loser.time() }
            };
            Ok(Selection { record, slot, other })
        }
        (Ok((record, _)), Err(other)) => Ok(Selection { record, slot: SlotId::A, other }),
        (Err(other), Ok((record, _))) => Ok(Selection { record, slot: SlotId::B, other }),
        (Err(a), Err(b)) => Err(NoValidRecord { record: R::TYPE, a, b }),
    }
}

/// Plans the next write of a record (see [where the next record goes](self#where-the-next-record-goes)).
pub fn next_write<'a, R: SlotRecord<'a>>(
    a: &'a [u8],
    b: &'a [u8],
    factory: Option<u32>,
) -> Result<WritePlan, SequenceExhausted> {
    let mut check = R::parse_prefix;
    let (sa, sb) = (slot(a, factory, &mut check), slot(b, factory, &mut check));
    let sequence = match sa.sequence.max(sb.sequence) {
        Some(s) => s.checked_add(1).ok_or(SequenceExhausted)?,
        None => 1,
    };
    let slot = match (&sa.usable, &sb.usable) {
        (Ok((x, _)), Ok((y, _))) => {
            if order(y) > order(x) {
                SlotId::A
            } else {
                SlotId::B
            }
        }
        (Ok(_), Err(_)) => SlotId::B,
        (Err(_), Ok(_)) => SlotId::A,
        // Neither usable: overwrite the older contents (a slot without a valid record counts as oldest).
        (Err(_), Err(_)) => {
            let rank = |s: Option<u32>| s.map_or(-1, i64::from);
            if rank(sb.sequence) < rank(sa.sequence) {
                SlotId::B
            } else {
                SlotId::A
            }
        }
    };
    Ok(WritePlan { slot, sequence })
}

impl<E: fmt::Display> fmt::Display for Rejected<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Rejected::Invalid(e) => write!(f, "invalid: {e}"),
            Rejected::OtherCalibration { bound_to, sequence } => write!(
                f,
                "made on another factory calibration (fingerprint {bound_to:#010x}, sequence {sequence})"
            ),
            Rejected::Older { sequence, time } => write!(f, "older (sequence {sequence}, time {time})"),
            Rejected::Tie { identical: true } => f.write_str("a duplicate of the chosen record"),
            Rejected::Tie { identical: false } => {
                f.write_str("same sequence and time as the chosen record but different contents")
            }
        }
    }
}

impl<E: fmt::Display> fmt::Display for NoValidRecord<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "no usable {}: slot A {}; slot B {}", self.record, self.a, self.b)
    }
}

impl fmt::Display for SequenceExhausted {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("sequence counter exhausted")
    }
}

impl<E: fmt::Debug + fmt::Display> core::error::Error for NoValidRecord<E> {}
impl core::error::Error for SequenceExhausted {}
