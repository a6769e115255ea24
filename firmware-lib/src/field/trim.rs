//! Field trims against reference standards, applied in x on top of the factory calibration:
//!
//! ```text
//! x' = g·x + o          x the factory reading, g the gain, o the offset (nepers)
//! ```
//!
//! # Why the gain pivots about x = 0
//!
//! x = 0 is a ratio of 1, where the pair's two currents are equal and the log stage's output is zero (up to
//! its offsets). A drift of the output stage's gain (its resistors, the converter's reference) scales the
//! output about that point, so it shows up as a pure `g` with `o ≈ 0`; a drifting offset (op-amps, level
//! shift, converter) shows up as a pure `o`. Pivoting at x = 0 keeps the two fault mechanisms apart, which
//! is what makes the two [limits](TrimLimits) meaningful: pivoting at the standards' midpoint would turn a
//! 1 % gain drift read on standards at x ≈ −5 into an "offset" of 0.05 Np and refuse a healthy unit.
//! (The two forms give the same corrected values; they differ in what `o` means.)
//!
//! # Computing a trim (a firmware function, so an instrument can trim itself)
//!
//! * **One point** ([`Trim::one_point`]): `g = 1`, `o = K − m`, with `m` the factory reading of a standard of
//!   known `K`. [`Trim::one_point_keeping_gain`] keeps the gain of an earlier trim: `o = K − g·m`.
//! * **Two points** ([`Trim::two_point`]): `g = (K_b − K_a)/(m_b − m_a)`, `o = K_a − g·m_a`: the trimmed
//!   readings of both standards are their known values. The standards must read at least
//!   [`TrimLimits::min_separation_q24`] apart, or the gain is ill-conditioned.
//!
//! `m` is always the **factory** reading: a trim replaces the previous one, it is never stacked on it.
//! Every computation is offered in f32 and in integer arithmetic (`*_fixed`, Q24 inputs), and checks the
//! result against the [`TrimLimits`]: a trim past them is refused ([`FieldError::OffsetPastLimit`],
//! [`FieldError::GainPastLimit`]) as the sign of a fault, never applied.
//!
//! # Q formats of the fixed path
//!
//! | quantity | type | format |
//! |---|---|---|
//! | x, x', o, standards' readings and known values | i32 (i64 inside) | Q24 Np |
//! | g | i32 | Q30 (2^30 = 1; 0 < g < 2) |
//! | g·x | i64 | Q54, below 2^62; rounded to Q24 (half up) |
//!
//! x' leaves the fixed path as an i32 or as [`Error::AboveRange`]/[`Error::BelowRange`], never wrapped or
//! clamped.
//!
//! # Clearing
//!
//! [`Trim::cleared`] is a record of its own (kind 0, the exact identity) rather than an erased slot: its
//! sequence number moves past the trim it clears, so an older trim in the other slot cannot come back. A
//! cleared trim is not evaluated at all ([`Trim::apply`] returns the factory reading as it is), so results
//! are bit-identical to the factory calibration's.

use super::header::{self, Codec, RecordError, RecordInfo, RecordValueError};
use super::layout::{self, trim as tl};
use super::FieldError;
use crate::calibration::Reading;
use crate::error::Error;
use crate::fixed::{FixedReading, X_FRAC};
use crate::qformat::{f32_from_q, q_from_f32, round_shr};
use crate::record::frame::{Extent, Framing, Reader, Writer};
use crate::record::{BufferTooSmall, RecordType};

/// Fraction bits of the fixed-path gain.
pub const GAIN_FRAC: u32 = 30;
/// The gain 1 in Q30.
pub const GAIN_ONE_Q30: i32 = 1 << GAIN_FRAC;
/// How far the f32 and Q30 forms of one gain may differ, Q30 units (2^-10).
const GAIN_AGREEMENT_Q30: i64 = 1 << 20;

/// What kind of trim a record holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "snake_case", deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum TrimKind {
    /// The factory state: the trim was cleared (offset 0, gain 1, not evaluated).
    Cleared,
    /// An offset from one standard (the gain is 1, or kept from an earlier trim).
    OnePoint,
    /// Offset and gain from two standards.
    TwoPoint,
}

impl TrimKind {
    /// The value of the record's `kind` byte.
    pub const fn code(self) -> u8 {
        match self {
            TrimKind::Cleared => 0,
            TrimKind::OnePoint => 1,
            TrimKind::TwoPoint => 2,
        }
    }

    /// The kind of a `kind` byte.
    pub const fn from_code(c: u8) -> Option<TrimKind> {
        match c {
            0 => Some(TrimKind::Cleared),
            1 => Some(TrimKind::OnePoint),
            2 => Some(TrimKind::TwoPoint),
            _ => None,
        }
    }

    /// A short name.
    pub const fn name(self) -> &'static str {
        match self {
            TrimKind::Cleared => "cleared",
            TrimKind::OnePoint => "one-point",
            TrimKind::TwoPoint => "two-point",
        }
    }
}

/// A reference standard read in the f32 path: the factory reading and the known value, both x in Np.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Standard {
    /// x as the factory calibration reads the standard (before any trim).
    pub measured: f32,
    /// The standard's known x = ln(ratio).
    pub known: f32,
}

/// A reference standard read in the fixed path, both x in Q24 Np.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedStandard {
    /// x as the factory fixed path reads the standard, Q24.
    pub measured: i32,
    /// The standard's known x, Q24.
    pub known: i32,
}

/// How large a trim may be before it is refused as the sign of a fault, and how far apart two standards
/// must read. Stored in integer form, so both paths check the same numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrimLimits {
    /// Largest |o|, Q24 Np.
    pub max_offset_q24: i32,
    /// Largest |g − 1|, Q30.
    pub max_gain_error_q30: i32,
    /// Smallest |m_b − m_a| of a two-point trim, Q24 Np.
    pub min_separation_q24: i32,
}

impl TrimLimits {
    /// |o| ≤ 0.05 Np (0.217 dB of a power ratio, 0.0217 AU), |g − 1| ≤ 2 %, standards ≥ 0.5 Np apart.
    /// A unit that needs more has drifted further than ageing explains: it needs service, not a trim.
    pub const DEFAULT: TrimLimits = TrimLimits {
        max_offset_q24: 838_861,        // round(0.05 · 2^24)
        max_gain_error_q30: 21_474_836, // round(0.02 · 2^30)
        min_separation_q24: 8_388_608,  // 0.5 · 2^24
    };

    /// Limits from values in nepers and as a fraction, converted without floating-point arithmetic.
    /// [`FieldError::BadLimits`] for a value that is negative, not finite, or too large (an offset or
    /// separation of 100 Np or more, a gain error of 1 or more).
    pub fn new(
        max_offset_np: f32,
        max_gain_error: f32,
        min_separation_np: f32,
    ) -> Result<TrimLimits, FieldError> {
        let conv = |v: f32, frac: u32, below: i64| -> Result<i32, FieldError> {
            match q_from_f32(v, frac) {
                Some(q) if (0..below).contains(&q) => i32::try_from(q).map_err(|_| FieldError::BadLimits),
                _ => Err(FieldError::BadLimits),
            }
        };
        Ok(TrimLimits {
            max_offset_q24: conv(max_offset_np, X_FRAC, 100 << X_FRAC)?,
            max_gain_error_q30: conv(max_gain_error, GAIN_FRAC, 1 << GAIN_FRAC)?,
            min_separation_q24: conv(min_separation_np, X_FRAC, 100 << X_FRAC)?,
        })
    }

    /// Largest |o| in Np.
    pub fn max_offset_np(&self) -> f32 {
        f32_from_q(i64::from(self.max_offset_q24), X_FRAC)
    }

    /// Largest |g − 1|.
    pub fn max_gain_error(&self) -> f32 {
        f32_from_q(i64::from(self.max_gain_error_q30), GAIN_FRAC)
    }

    /// Smallest separation of two standards, Np.
    pub fn min_separation_np(&self) -> f32 {
        f32_from_q(i64::from(self.min_separation_q24), X_FRAC)
    }

    /// Checks a trim against the limits, both of its forms (integer comparisons only).
    #[deny(clippy::float_arithmetic)]
    pub fn check(&self, trim: &Trim) -> Result<(), FieldError> {
        let p = &trim.parts;
        // The record's checks bound the f32 forms: they convert.
        let o_f = q_from_f32(p.offset, X_FRAC).unwrap_or(i64::MAX);
        let g_f = q_from_f32(p.gain, GAIN_FRAC).unwrap_or(i64::MAX);
        for o in [i64::from(p.offset_q24), o_f] {
            self.check_offset(o)?;
        }
        for g in [i64::from(p.gain_q30), g_f] {
            self.check_gain(g)?;
        }
        Ok(())
    }

    #[deny(clippy::float_arithmetic)]
    fn check_offset(&self, o_q24: i64) -> Result<(), FieldError> {
        if o_q24.saturating_abs() > i64::from(self.max_offset_q24) {
            return Err(FieldError::OffsetPastLimit { offset_q24: o_q24, limit_q24: self.max_offset_q24 });
        }
        Ok(())
    }

    #[deny(clippy::float_arithmetic)]
    fn check_gain(&self, g_q30: i64) -> Result<(), FieldError> {
        if g_q30.saturating_sub(i64::from(GAIN_ONE_Q30)).saturating_abs() > i64::from(self.max_gain_error_q30)
        {
            return Err(FieldError::GainPastLimit { gain_q30: g_q30, limit_q30: self.max_gain_error_q30 });
        }
        Ok(())
    }
}

impl Default for TrimLimits {
    fn default() -> Self {
        TrimLimits::DEFAULT
    }
}

/// Every field of a trim record, unchecked: what [`Trim::new`] checks.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(deny_unknown_fields))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrimParts {
    /// Write counter, time and factory binding.
    pub info: RecordInfo,
    /// What kind of trim.
    pub kind: TrimKind,
    /// o, f32 path, Np.
    pub offset: f32,
    /// g, f32 path.
    pub gain: f32,
    /// o, fixed path, Q24 Np.
    pub offset_q24: i32,
    /// g, fixed path, Q30.
    pub gain_q30: i32,
    /// The known x of the standards, Np (a one-point trim names its standard twice; a cleared trim 0, 0).
    pub standards: [f32; 2],
    /// The temperature when the standards were read (or the trim cleared), m°C.
    pub temp_mc: i32,
}

/// A checked trim: every value is one the record can carry. Its accessors cannot fail.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Trim {
    parts: TrimParts,
}

impl Trim {
    /// The one checked constructor: every f32 finite, the offset within ±100 Np, the gain in (0, 2), each
    /// quantity's f32 and fixed forms within 2^-10 of each other; a cleared trim exactly the identity; a
    /// one-point trim naming one standard. (The [`TrimLimits`] are the instrument's policy and are checked
    /// apart, by [`TrimLimits::check`].)
    #[deny(clippy::float_arithmetic)]
    pub fn new(parts: TrimParts) -> Result<Trim, RecordValueError> {
        super::blank::check_x(parts.offset, parts.offset_q24, tl::OFFSET_F32.name, tl::OFFSET_Q24.name)?;
        let g = q_from_f32(parts.gain, GAIN_FRAC)
            .ok_or(RecordValueError::NonFinite { field: tl::GAIN_F32.name })?;
        if !(1..1i64 << 31).contains(&g) {
            return Err(RecordValueError::OutOfRange { field: tl::GAIN_F32.name });
        }
        if parts.gain_q30 <= 0 {
            return Err(RecordValueError::OutOfRange { field: tl::GAIN_Q30.name });
        }
        if (g - i64::from(parts.gain_q30)).abs() > GAIN_AGREEMENT_Q30 {
            return Err(RecordValueError::Inconsistent { field: tl::GAIN_Q30.name });
        }
        let names = [tl::STANDARD_1.name, tl::STANDARD_2.name];
        for (s, field) in parts.standards.iter().zip(names) {
            if !s.is_finite() {
                return Err(RecordValueError::NonFinite { field });
            }
        }
        let [s1, s2] = parts.standards;
        match parts.kind {
            TrimKind::Cleared => {
                let checks = [
                    (parts.offset.to_bits() == 0, tl::OFFSET_F32.name),
                    (parts.gain.to_bits() == 1.0f32.to_bits(), tl::GAIN_F32.name),
                    (parts.offset_q24 == 0, tl::OFFSET_Q24.name),
                    (parts.gain_q30 == GAIN_ONE_Q30, tl::GAIN_Q30.name),
                    (s1.to_bits() == 0, tl::STANDARD_1.name),
                    (s2.to_bits() == 0, tl::STANDARD_2.name),
                ];
                if let Some((_, field)) = checks.iter().find(|(ok, _)| !ok) {
                    return Err(RecordValueError::ClearedNotIdentity { field });
                }
            }
            TrimKind::OnePoint => {
                if s1.to_bits() != s2.to_bits() {
                    return Err(RecordValueError::OnePointStandards);
                }
            }
            TrimKind::TwoPoint => {}
        }
        Ok(Trim { parts })
    }

    /// The cleared trim: the factory state, recorded (see [clearing](self#clearing)).
    pub fn cleared(info: RecordInfo, temp_mc: i32) -> Trim {
        Trim {
            parts: TrimParts {
                info,
                kind: TrimKind::Cleared,
                offset: 0.0,
                gain: 1.0,
                offset_q24: 0,
                gain_q30: GAIN_ONE_Q30,
                standards: [0.0, 0.0],
                temp_mc,
            },
        }
    }

    /// What kind of trim.
    pub fn kind(&self) -> TrimKind {
        self.parts.kind
    }

    /// True for a cleared trim (the factory state).
    pub fn is_cleared(&self) -> bool {
        self.parts.kind == TrimKind::Cleared
    }

    /// o of the f32 path, Np.
    pub fn offset(&self) -> f32 {
        self.parts.offset
    }

    /// g of the f32 path.
    pub fn gain(&self) -> f32 {
        self.parts.gain
    }

    /// o of the fixed path, Q24 Np.
    pub fn offset_q24(&self) -> i32 {
        self.parts.offset_q24
    }

    /// g of the fixed path, Q30.
    pub fn gain_q30(&self) -> i32 {
        self.parts.gain_q30
    }

    /// The trimmed f32 reading `g·x + o`; a cleared trim returns the reading as it is.
    pub fn apply(&self, reading: &Reading) -> Reading {
        if self.is_cleared() {
            return *reading;
        }
        Reading { x: self.parts.gain * reading.x + self.parts.offset, ..*reading }
    }

    /// A difference of two factory readings after the trim: `g·dx` (the offset cancels).
    pub(super) fn scale(&self, dx: f32) -> f32 {
        if self.is_cleared() {
            return dx;
        }
        self.parts.gain * dx
    }

    /// The f32 path's trim of one standard (g = 1).
    pub fn one_point(
        info: RecordInfo,
        s: Standard,
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        Trim::from_f32(
            info,
            TrimKind::OnePoint,
            s.known - s.measured,
            1.0,
            [s.known, s.known],
            temp_mc,
            limits,
        )
    }

    /// The f32 path's trim of one standard, keeping an earlier trim's gain: `o = K − g·m`. With a cleared
    /// `previous` this is [`Trim::one_point`].
    pub fn one_point_keeping_gain(
        info: RecordInfo,
        previous: &Trim,
        s: Standard,
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        let g = previous.parts.gain;
        Trim::from_f32(
            info,
            TrimKind::OnePoint,
            s.known - g * s.measured,
            g,
            [s.known, s.known],
            temp_mc,
            limits,
        )
    }

    /// The f32 path's trim of two standards.
    pub fn two_point(
        info: RecordInfo,
        a: Standard,
        b: Standard,
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        let values = [a.measured, a.known, b.measured, b.known];
        if !values.iter().all(|v| v.is_finite()) {
            return Err(FieldError::NonFinite);
        }
        let dm = b.measured - a.measured;
        let sep = q_from_f32(dm, X_FRAC).ok_or(FieldError::NonFinite)?;
        if sep == 0 || sep.saturating_abs() < i64::from(limits.min_separation_q24) {
            return Err(FieldError::StandardsTooClose {
                separation_q24: sep,
                min_q24: limits.min_separation_q24,
            });
        }
        let g = (b.known - a.known) / dm;
        // The gain is checked before the offset is formed from it.
        limits.check_gain(q_from_f32(g, GAIN_FRAC).ok_or(FieldError::NonFinite)?)?;
        let o = a.known - g * a.measured;
        Trim::from_f32(info, TrimKind::TwoPoint, o, g, [a.known, b.known], temp_mc, limits)
    }

    /// An f32 trim with its fixed forms converted from it, checked against the limits.
    fn from_f32(
        info: RecordInfo,
        kind: TrimKind,
        offset: f32,
        gain: f32,
        standards: [f32; 2],
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        let o = q_from_f32(offset, X_FRAC).ok_or(FieldError::NonFinite)?;
        let g = q_from_f32(gain, GAIN_FRAC).ok_or(FieldError::NonFinite)?;
        Trim::checked(limits, o, g, |offset_q24, gain_q30| TrimParts {
            info,
            kind,
            offset,
            gain,
            offset_q24,
            gain_q30,
            standards,
            temp_mc,
        })
    }

    /// The trim `parts` makes of the offset `o` (Q24) and gain `g` (Q30) once both are within the limits
    /// (and so fit an i32), checked as a whole against the limits.
    fn checked(
        limits: &TrimLimits,
        o: i64,
        g: i64,
        parts: impl FnOnce(i32, i32) -> TrimParts,
    ) -> Result<Trim, FieldError> {
        limits.check_offset(o)?;
        limits.check_gain(g)?;
        let offset_q24 = i32::try_from(o).map_err(|_| FieldError::BadLimits)?;
        let gain_q30 = i32::try_from(g).map_err(|_| FieldError::BadLimits)?;
        let trim = Trim::new(parts(offset_q24, gain_q30))?;
        limits.check(&trim)?;
        Ok(trim)
    }
}

header::record_methods!(Trim, TrimParts, "trim", layout::TRIM_LEN);

impl Codec for Trim {
    const FRAMING: Framing = header::framing(RecordType::Trim, tl::VERSION_VALUE, layout::TRIM_LEN);

    fn decode(r: &Reader<'_, RecordError>, info: RecordInfo) -> Result<Trim, RecordError> {
        let kind = r.choice(&tl::KIND, TrimKind::from_code)?;
        r.reserved(&tl::RESERVED)?;
        let parts = TrimParts {
            info,
            kind,
            offset: r.f32(&tl::OFFSET_F32)?,
            gain: r.f32(&tl::GAIN_F32)?,
            offset_q24: r.i32(&tl::OFFSET_Q24)?,
            gain_q30: r.i32(&tl::GAIN_Q30)?,
            standards: [r.f32(&tl::STANDARD_1)?, r.f32(&tl::STANDARD_2)?],
            temp_mc: r.i32(&tl::TEMP_MC)?,
        };
        Ok(Trim::new(parts)?)
    }

    fn encode(&self, w: &mut Writer<'_>) -> Result<(), BufferTooSmall> {
        let p = &self.parts;
        w.u8(&tl::KIND, p.kind.code())?;
        w.f32(&tl::OFFSET_F32, p.offset)?;
        w.f32(&tl::GAIN_F32, p.gain)?;
        w.i32(&tl::OFFSET_Q24, p.offset_q24)?;
        w.i32(&tl::GAIN_Q30, p.gain_q30)?;
        let [s1, s2] = p.standards;
        w.f32(&tl::STANDARD_1, s1)?;
        w.f32(&tl::STANDARD_2, s2)?;
        w.i32(&tl::TEMP_MC, p.temp_mc)
    }

    fn header(&self) -> RecordInfo {
        self.parts.info
    }
}

/// `round(n / d)`, halves away from zero, for d ≠ 0 (`None` for d = 0).
#[deny(clippy::float_arithmetic)]
fn div_round(n: i64, d: i64) -> Option<i64> {
    if d == 0 {
        return None;
    }
    let (na, da) = (n.unsigned_abs(), d.unsigned_abs());
    let q = na.checked_add(da / 2)? / da;
    let q = i64::try_from(q).ok()?;
    Some(if (n < 0) != (d < 0) { -q } else { q })
}

#[deny(clippy::float_arithmetic)]
impl Trim {
    /// The trimmed fixed-path reading `round(g·x / 2^30) + o` in Q24; a cleared trim returns the reading as
    /// it is. [`Error::AboveRange`]/[`Error::BelowRange`] where x' leaves the i32 range (±128 Np).
    pub fn apply_fixed(&self, reading: &FixedReading) -> Result<FixedReading, Error> {
        if self.is_cleared() {
            return Ok(*reading);
        }
        let gx = round_shr(i64::from(self.parts.gain_q30).saturating_mul(i64::from(reading.x)), GAIN_FRAC);
        let x = super::blank::q24_of(gx.saturating_add(i64::from(self.parts.offset_q24)))?;
        Ok(FixedReading { x, ..*reading })
    }

    /// A Q24 difference of two factory readings after the trim: `round(g·dx / 2^30)`.
    pub(super) fn scale_fixed(&self, dx: i64) -> i64 {
        if self.is_cleared() {
            return dx;
        }
        round_shr(i64::from(self.parts.gain_q30).saturating_mul(dx), GAIN_FRAC)
    }

    /// The fixed path's trim of one standard (g = 1), in integer arithmetic.
    pub fn one_point_fixed(
        info: RecordInfo,
        s: FixedStandard,
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        let o = i64::from(s.known) - i64::from(s.measured);
        Trim::from_fixed(
            info,
            TrimKind::OnePoint,
            o,
            i64::from(GAIN_ONE_Q30),
            [s.known, s.known],
            temp_mc,
            limits,
        )
    }

    /// The fixed path's trim of one standard keeping an earlier trim's gain: `o = K − round(g·m / 2^30)`.
    pub fn one_point_keeping_gain_fixed(
        info: RecordInfo,
        previous: &Trim,
        s: FixedStandard,
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        let g = i64::from(previous.parts.gain_q30);
        let o = i64::from(s.known) - round_shr(g.saturating_mul(i64::from(s.measured)), GAIN_FRAC);
        Trim::from_fixed(info, TrimKind::OnePoint, o, g, [s.known, s.known], temp_mc, limits)
    }

    /// The fixed path's trim of two standards, in integer arithmetic: `g = round(2^30·(K_b − K_a)/(m_b − m_a))`,
    /// `o = K_a − round(g·m_a / 2^30)`.
    pub fn two_point_fixed(
        info: RecordInfo,
        a: FixedStandard,
        b: FixedStandard,
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        let dm = i64::from(b.measured) - i64::from(a.measured);
        if dm.abs() < i64::from(limits.min_separation_q24) || dm == 0 {
            return Err(FieldError::StandardsTooClose {
                separation_q24: dm,
                min_q24: limits.min_separation_q24,
            });
        }
        // |K_b − K_a| < 2^32, so the shifted numerator stays below 2^62.
        let dk = i64::from(b.known) - i64::from(a.known);
        let g = div_round(dk << GAIN_FRAC, dm).ok_or(FieldError::StandardsTooClose {
            separation_q24: dm,
            min_q24: limits.min_separation_q24,
        })?;
        limits.check_gain(g)?;
        // Within the gain limit g < 2^31, and |m_a| < 2^31: the product stays below 2^62.
        let o = i64::from(a.known) - round_shr(g.saturating_mul(i64::from(a.measured)), GAIN_FRAC);
        Trim::from_fixed(info, TrimKind::TwoPoint, o, g, [a.known, b.known], temp_mc, limits)
    }

    /// A fixed trim with its f32 forms converted from it (integer conversions), checked against the limits.
    fn from_fixed(
        info: RecordInfo,
        kind: TrimKind,
        o: i64,
        g: i64,
        standards_q24: [i32; 2],
        temp_mc: i32,
        limits: &TrimLimits,
    ) -> Result<Trim, FieldError> {
        let [s1, s2] = standards_q24;
        Trim::checked(limits, o, g, |offset_q24, gain_q30| TrimParts {
            info,
            kind,
            offset: f32_from_q(o, X_FRAC),
            gain: f32_from_q(g, GAIN_FRAC),
            offset_q24,
            gain_q30,
            standards: [f32_from_q(i64::from(s1), X_FRAC), f32_from_q(i64::from(s2), X_FRAC)],
            temp_mc,
        })
    }
}
