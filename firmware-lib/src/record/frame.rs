//! The framing every record shares, checked and written in one place: [`Framing`] describes a format's
//! frame (its [`RecordType`], version, where its header says its length, which lengths it allows),
//! [`Framing::check`] runs the framing checks, [`Reader`] reads a record's fields with the byte rules
//! (reserved bytes zero, flags 0 or 1, enumerations known), [`write`] fills a caller's buffer through a
//! [`Writer`] and seals it with the CRC.

use core::ops::Range;

use super::error::{BufferTooSmall, FormatError, RecordType};
use super::layout::{Field, Kind, ALIGN, CRC, TRAILER_LEN};
use super::{crc32, MAGIC, VERSION};

/// A length as u32 for error reports (lengths here never exceed u32; larger ones saturate).
pub(crate) fn len_u32(n: usize) -> u32 {
    u32::try_from(n).unwrap_or(u32::MAX)
}

/// The bytes of `f` within `part` as an array, or `None` if the part is too short or `N` is not the
/// field's size.
pub(crate) fn array<const N: usize>(part: &[u8], f: &Field) -> Option<[u8; N]> {
    part.get(f.offset..f.end())?.try_into().ok()
}

/// How a format frames its records.
pub(crate) struct Framing {
    /// Which record (its magic).
    pub record: RecordType,
    /// The format version this build writes and reads.
    pub version: u16,
    /// The header's length: what a truncated record needs before its length can be read.
    pub header_len: usize,
    /// The header field holding the record's total length (a [`Kind::U16`] or [`Kind::U32`]).
    pub len: Field,
    /// The shortest record (at least a header and the CRC).
    pub min_len: usize,
    /// The longest record (`min_len` for a format of one length).
    pub max_len: usize,
}

/// Whether the bytes must be exactly one record or may continue after it.
#[derive(Clone, Copy, PartialEq, Eq)]
pub(crate) enum Extent {
    /// `parse`: trailing bytes are a [`FormatError::LengthMismatch`].
    Exact,
    /// `parse_prefix`: the record starts the bytes; what follows is not looked at.
    Prefix,
}

/// A record whose framing passed.
pub(crate) struct Framed<'a> {
    /// Its bytes, header to CRC.
    pub bytes: &'a [u8],
    /// The bytes after it (empty for [`Extent::Exact`]).
    pub rest: &'a [u8],
    /// The stored (and verified) CRC.
    pub crc: u32,
}

impl Framing {
    /// The framing checks, in order (see [the module docs](super#order-of-the-framing-checks)). Every step
    /// reads only bytes the previous ones have shown to be there, so the work is bounded by the declared
    /// length, which is bounded by [`Framing::max_len`].
    pub(crate) fn check<'a>(&self, bytes: &'a [u8], extent: Extent) -> Result<Framed<'a>, FormatError> {
        let available = len_u32(bytes.len());
        let short = |needed: usize| FormatError::Truncated { needed: len_u32(needed), available };
        let in_header = short(self.header_len);
        // 1. Magic.
        let magic: [u8; 4] = array(bytes, &MAGIC).ok_or(in_header)?;
        if magic != self.record.magic() {
            return Err(match RecordType::of_magic(magic) {
                Some(found) => FormatError::OtherRecord { expected: self.record, found },
                None => FormatError::BadMagic { found: magic },
            });
        }
        // 2. Version.
        let version = array(bytes, &VERSION).map(u16::from_le_bytes).ok_or(in_header)?;
        if version != self.version {
            return Err(FormatError::UnsupportedVersion { found: version, supported: self.version });
        }
        // 3. Declared length: possible, present, and (for `Exact`) all there is.
        let declared = read_uint(bytes, &self.len).ok_or(in_header)?;
        let total = usize::try_from(declared).unwrap_or(usize::MAX);
        if !(self.min_len..=self.max_len).contains(&total) || !total.is_multiple_of(ALIGN) {
            let (min, max) = (len_u32(self.min_len), len_u32(self.max_len));
            return Err(FormatError::BadLength { declared, min, max });
        }
        let (record, rest) = bytes.split_at_checked(total).ok_or(short(total))?;
        if extent == Extent::Exact && !rest.is_empty() {
            return Err(FormatError::LengthMismatch { declared, actual: available });
        }
        // 4. CRC.
        let (covered, tail) =
            record.split_at_checked(total.saturating_sub(TRAILER_LEN)).ok_or(short(total))?;
        let stored = array(tail, &CRC).map(u32::from_le_bytes).ok_or(short(total))?;
        let computed = crc32(covered);
        if stored != computed {
            return Err(FormatError::CrcMismatch { stored, computed });
        }
        Ok(Framed { bytes: record, rest, crc: stored })
    }

    /// Writes the frame's part of the header: magic, version, and the total length `len`.
    pub(crate) fn put_head(&self, w: &mut Writer<'_>, len: usize) -> Result<(), BufferTooSmall> {
        w.put(&MAGIC, &self.record.magic())?;
        w.u16(&VERSION, self.version)?;
        match self.len.kind {
            Kind::U16 => w.u16(&self.len, u16::try_from(len).unwrap_or(u16::MAX)),
            _ => w.u32(&self.len, len_u32(len)),
        }
    }
}

/// An unsigned length field (u16 or u32) as u32.
fn read_uint(bytes: &[u8], f: &Field) -> Option<u32> {
    match f.kind {
        Kind::U16 => array(bytes, f).map(u16::from_le_bytes).map(u32::from),
        Kind::U32 => array(bytes, f).map(u32::from_le_bytes),
        _ => None,
    }
}

/// Reads the fields of a part of a checked record (the header, a payload) with the byte rules. `E` is the
/// record's own error type; `short` is its error for a field that lies beyond the part (which the
/// framing and the layout rule out: a second guard, not a reachable path for a well-formed layout).
#[derive(Clone, Copy)]
pub(crate) struct Reader<'a, E> {
    bytes: &'a [u8],
    /// Offset of the part in the record, for the offsets in errors.
    base: usize,
    short: E,
}

impl<'a, E: Copy + From<FormatError>> Reader<'a, E> {
    /// A reader of `bytes`, which start at offset `base` of the record.
    pub(crate) fn new(bytes: &'a [u8], base: usize, short: E) -> Self {
        Reader { bytes, base, short }
    }

    /// The part's bytes.
    pub(crate) fn bytes(&self) -> &'a [u8] {
        self.bytes
    }

    /// The error for a part too short for its layout.
    pub(crate) fn short(&self) -> E {
        self.short
    }

    /// The bytes of `range` within the part.
    pub(crate) fn range(&self, range: Range<usize>) -> Result<&'a [u8], E> {
        self.bytes.get(range).ok_or(self.short)
    }

    /// The field's bytes.
    pub(crate) fn raw(&self, f: &Field) -> Result<&'a [u8], E> {
        self.range(f.offset..f.end())
    }

    fn get<const N: usize>(&self, f: &Field) -> Result<[u8; N], E> {
        array(self.bytes, f).ok_or(self.short)
    }

    pub(crate) fn u8(&self, f: &Field) -> Result<u8, E> {
        self.get::<1>(f).map(|[b]| b)
    }

    pub(crate) fn u16(&self, f: &Field) -> Result<u16, E> {
        self.get(f).map(u16::from_le_bytes)
    }

    pub(crate) fn u32(&self, f: &Field) -> Result<u32, E> {
        self.get(f).map(u32::from_le_bytes)
    }

    pub(crate) fn u64(&self, f: &Field) -> Result<u64, E> {
        self.get(f).map(u64::from_le_bytes)
    }

    pub(crate) fn i32(&self, f: &Field) -> Result<i32, E> {
        self.get(f).map(i32::from_le_bytes)
    }

    pub(crate) fn f32(&self, f: &Field) -> Result<f32, E> {
        self.get(f).map(f32::from_le_bytes)
    }

    /// An array field of `N` f32 values.
    pub(crate) fn f32s<const N: usize>(&self, f: &Field) -> Result<[f32; N], E> {
        let (words, rest) = self.raw(f)?.as_chunks::<4>();
        if words.len() != N || !rest.is_empty() {
            return Err(self.short);
        }
        let mut out = [0.0f32; N];
        for (v, w) in out.iter_mut().zip(words) {
            *v = f32::from_le_bytes(*w);
        }
        Ok(out)
    }

    /// The bytes of `range` are all zero ([`FormatError::ReservedNotZero`] at the first that is not).
    pub(crate) fn zeros(&self, range: Range<usize>) -> Result<(), E> {
        let start = range.start;
        match self.range(range)?.iter().position(|&b| b != 0) {
            Some(i) => Err(FormatError::ReservedNotZero {
                offset: len_u32(self.base.saturating_add(start).saturating_add(i)),
            }
            .into()),
            None => Ok(()),
        }
    }

    /// A reserved field: all zero.
    pub(crate) fn reserved(&self, f: &Field) -> Result<(), E> {
        self.zeros(f.offset..f.end())
    }

    /// A flag byte: 0 or 1 ([`FormatError::BadFlag`] otherwise).
    pub(crate) fn flag(&self, f: &Field) -> Result<bool, E> {
        match self.u8(f)? {
            0 => Ok(false),
            1 => Ok(true),
            found => Err(FormatError::BadFlag { field: f.name, found }.into()),
        }
    }

    /// A byte that encodes one of a few choices ([`FormatError::BadEnum`] for none of them).
    pub(crate) fn choice<T>(&self, f: &Field, of_code: impl FnOnce(u8) -> Option<T>) -> Result<T, E> {
        let found = self.u8(f)?;
        of_code(found).ok_or(FormatError::BadEnum { field: f.name, found }.into())
    }
}

/// Writes fields at `base + field.offset` within a record's buffer.
pub(crate) struct Writer<'b> {
    out: &'b mut [u8],
    base: usize,
}

impl Writer<'_> {
    /// The offset the fields' offsets count from.
    pub(crate) fn base(&self) -> usize {
        self.base
    }

    /// Moves the offset the fields' offsets count from (to the start of a section's payload, say).
    pub(crate) fn set_base(&mut self, base: usize) {
        self.base = base;
    }

    /// Writes `bytes` at `offset` from the base.
    pub(crate) fn put_at(&mut self, offset: usize, bytes: &[u8]) -> Result<(), BufferTooSmall> {
        let at = self.base.saturating_add(offset);
        let end = at.saturating_add(bytes.len());
        let too_small = BufferTooSmall { needed: len_u32(end), available: len_u32(self.out.len()) };
        let dst = self.out.get_mut(at..end).ok_or(too_small)?;
        for (d, s) in dst.iter_mut().zip(bytes) {
            *d = *s;
        }
        Ok(())
    }

    /// Writes a field's bytes (the value's size is the field's size: the round-trip tests hold the two
    /// together).
    pub(crate) fn put(&mut self, f: &Field, bytes: &[u8]) -> Result<(), BufferTooSmall> {
        self.put_at(f.offset, bytes)
    }

    pub(crate) fn u8(&mut self, f: &Field, v: u8) -> Result<(), BufferTooSmall> {
        self.put(f, &[v])
    }

    pub(crate) fn u16(&mut self, f: &Field, v: u16) -> Result<(), BufferTooSmall> {
        self.put(f, &v.to_le_bytes())
    }

    pub(crate) fn u32(&mut self, f: &Field, v: u32) -> Result<(), BufferTooSmall> {
        self.put(f, &v.to_le_bytes())
    }

    pub(crate) fn u64(&mut self, f: &Field, v: u64) -> Result<(), BufferTooSmall> {
        self.put(f, &v.to_le_bytes())
    }

    pub(crate) fn i32(&mut self, f: &Field, v: i32) -> Result<(), BufferTooSmall> {
        self.put(f, &v.to_le_bytes())
    }

    pub(crate) fn f32(&mut self, f: &Field, v: f32) -> Result<(), BufferTooSmall> {
        self.put(f, &v.to_le_bytes())
    }

    /// An array field of f32 values.
    pub(crate) fn f32s(&mut self, f: &Field, vs: &[f32]) -> Result<(), BufferTooSmall> {
        for (i, v) in vs.iter().enumerate() {
            self.put_at(f.offset.saturating_add(i.saturating_mul(4)), &v.to_le_bytes())?;
        }
        Ok(())
    }
}

/// Writes a record of `len` bytes at the start of `buf`: `body` writes every byte before the CRC (the
/// buffer starts zeroed, so reserved bytes need no writing), then the CRC goes in the last four. The
/// buffer's size is checked before anything is written; should `body` fail (only a layout that disagrees
/// with its writer could make it), the record's bytes are zeroed again, so no half-written record is left.
pub(crate) fn write<E: From<BufferTooSmall>>(
    buf: &mut [u8],
    len: usize,
    body: impl FnOnce(&mut Writer<'_>) -> Result<(), E>,
) -> Result<usize, E> {
    let available = len_u32(buf.len());
    let out = buf.get_mut(..len).ok_or(BufferTooSmall { needed: len_u32(len), available })?;
    out.fill(0);
    let written = {
        let mut w = Writer { out: &mut *out, base: 0 };
        body(&mut w).and_then(|()| seal(w.out).map_err(E::from))
    };
    if written.is_err() {
        out.fill(0);
    }
    written.map(|()| len)
}

/// Puts the CRC of every byte but the last four into the last four.
fn seal(out: &mut [u8]) -> Result<(), BufferTooSmall> {
    let too_small = BufferTooSmall { needed: len_u32(TRAILER_LEN), available: len_u32(out.len()) };
    let at = out.len().checked_sub(TRAILER_LEN).ok_or(too_small)?;
    let (covered, tail) = out.split_at_mut_checked(at).ok_or(too_small)?;
    for (d, s) in tail.iter_mut().zip(crc32(covered).to_le_bytes()) {
        *d = s;
    }
    Ok(())
}
