//! The vector file, all little-endian:
//!
//! | part | bytes |
//! |---|---|
//! | magic `LTVECT01` | 8 |
//! | number of images (≤ [`MAX_IMAGES`]), number of records | 4 + 4 |
//! | per image: its length, then its bytes padded with zeros to a multiple of 4 | 4 + len |
//! | per record: kind, five inputs, expected primary value, expected digest | [`RECORD_LEN`] |
//!
//! The target reads it with [`Vectors::parse`], which checks every length once; the records then come out
//! of an iterator that cannot fail.

/// The file's first bytes.
pub const MAGIC: [u8; 8] = *b"LTVECT01";
/// The most images (units) a file carries.
pub const MAX_IMAGES: usize = 4;
/// Bytes per record.
pub const RECORD_LEN: usize = 4 + 5 * 4 + 8 + 8;

/// One test vector: what to evaluate, on which inputs, and what the host got.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Record {
    /// The evaluation ([`crate::eval::Kind`] as a number).
    pub kind: u32,
    /// Its inputs (meaning by kind).
    pub input: [u32; 5],
    /// The host's primary value (the result's main number, its bits).
    pub primary: u64,
    /// The host's digest of the whole result.
    pub digest: u64,
}

impl Record {
    /// The record's bytes.
    pub fn to_bytes(&self) -> [u8; RECORD_LEN] {
        let mut b = [0u8; RECORD_LEN];
        let words = core::iter::once(self.kind).chain(self.input);
        for (chunk, w) in b.chunks_exact_mut(4).zip(words) {
            chunk.copy_from_slice(&w.to_le_bytes());
        }
        b[24..32].copy_from_slice(&self.primary.to_le_bytes());
        b[32..40].copy_from_slice(&self.digest.to_le_bytes());
        b
    }

    /// A record from exactly [`RECORD_LEN`] bytes.
    pub fn from_bytes(b: &[u8; RECORD_LEN]) -> Record {
        let (head, tail) = b.split_at(24);
        let mut words = head.chunks_exact(4).map(le32);
        let kind = words.next().unwrap_or(0);
        let mut input = [0u32; 5];
        for (i, w) in input.iter_mut().zip(words) {
            *i = w;
        }
        let (p, d) = tail.split_at(8);
        Record { kind, input, primary: le64(p), digest: le64(d) }
    }
}

fn le32(b: &[u8]) -> u32 {
    let mut w = [0u8; 4];
    w.copy_from_slice(b.get(..4).unwrap_or(&[0; 4]));
    u32::from_le_bytes(w)
}

fn le64(b: &[u8]) -> u64 {
    let mut w = [0u8; 8];
    w.copy_from_slice(b.get(..8).unwrap_or(&[0; 8]));
    u64::from_le_bytes(w)
}

/// Why a vector file was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FormatError {
    /// The file does not start with [`MAGIC`].
    Magic,
    /// The file ends inside the part named.
    Truncated(&'static str),
    /// More than [`MAX_IMAGES`] images.
    TooManyImages(u32),
    /// Bytes left after the last record.
    TrailingBytes(usize),
}

/// A checked vector file.
#[derive(Debug, Clone, Copy)]
pub struct Vectors<'a> {
    images: [&'a [u8]; MAX_IMAGES],
    image_count: usize,
    records: &'a [u8],
}

impl<'a> Vectors<'a> {
    /// Checks the layout of a whole file.
    pub fn parse(bytes: &'a [u8]) -> Result<Vectors<'a>, FormatError> {
        let rest = bytes.strip_prefix(&MAGIC[..]).ok_or(FormatError::Magic)?;
        let (counts, mut rest) = split(rest, 8, "counts")?;
        let (n_images, n_records) = (le32(counts), le32(counts.get(4..).unwrap_or(&[])));
        if n_images as usize > MAX_IMAGES {
            return Err(FormatError::TooManyImages(n_images));
        }
        let mut images: [&[u8]; MAX_IMAGES] = [&[]; MAX_IMAGES];
        for slot in images.iter_mut().take(n_images as usize) {
            let (len, r) = split(rest, 4, "image length")?;
            let len = le32(len) as usize;
            let (image, r) = split(r, len, "image")?;
            let (_, r) = split(r, len.next_multiple_of(4) - len, "image padding")?;
            *slot = image;
            rest = r;
        }
        let (records, rest) = split(rest, n_records as usize * RECORD_LEN, "records")?;
        if !rest.is_empty() {
            return Err(FormatError::TrailingBytes(rest.len()));
        }
        Ok(Vectors { images, image_count: n_images as usize, records })
    }

    /// The units' calibration images.
    pub fn images(&self) -> &[&'a [u8]] {
        self.images.get(..self.image_count).unwrap_or(&[])
    }

    /// The records in order.
    pub fn records(&self) -> impl Iterator<Item = Record> + 'a {
        self.records.chunks_exact(RECORD_LEN).filter_map(|c| c.try_into().ok()).map(Record::from_bytes)
    }

    /// How many records.
    pub fn len(&self) -> usize {
        self.records.len() / RECORD_LEN
    }

    /// No records.
    pub fn is_empty(&self) -> bool {
        self.records.is_empty()
    }
}

fn split<'a>(b: &'a [u8], n: usize, what: &'static str) -> Result<(&'a [u8], &'a [u8]), FormatError> {
    if b.len() < n {
        return Err(FormatError::Truncated(what));
    }
    Ok(b.split_at(n))
}

/// Writes a vector file.
#[cfg(feature = "std")]
pub fn encode(images: &[&[u8]], records: &[Record]) -> std::vec::Vec<u8> {
    let mut out = std::vec::Vec::new();
    out.extend_from_slice(&MAGIC);
    out.extend_from_slice(&(images.len() as u32).to_le_bytes());
    out.extend_from_slice(&(records.len() as u32).to_le_bytes());
    for img in images {
        out.extend_from_slice(&(img.len() as u32).to_le_bytes());
        out.extend_from_slice(img);
        out.resize(out.len().next_multiple_of(4), 0);
    }
    for r in records {
        out.extend_from_slice(&r.to_bytes());
    }
    out
}

#[cfg(all(test, feature = "std"))]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_refusals() {
        let recs = [
            Record { kind: 1, input: [1, 2, 3, 4, 5], primary: u64::MAX, digest: 7 },
            Record { kind: 9, input: [0; 5], primary: 0, digest: u64::MAX },
        ];
        let file = encode(&[b"abc", b"defgh"], &recs);
        let v = Vectors::parse(&file).unwrap();
        assert_eq!(v.images(), [&b"abc"[..], &b"defgh"[..]]);
        assert_eq!(v.records().collect::<std::vec::Vec<_>>(), recs);
        assert_eq!(Vectors::parse(&file[..file.len() - 1]).unwrap_err(), FormatError::Truncated("records"));
        let mut longer = file.clone();
        longer.push(0);
        assert_eq!(Vectors::parse(&longer).unwrap_err(), FormatError::TrailingBytes(1));
        assert_eq!(Vectors::parse(b"LTVECT02").unwrap_err(), FormatError::Magic);
    }
}
