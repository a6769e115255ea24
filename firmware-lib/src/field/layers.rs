//! The field layers of one channel, in the order they act on a factory reading: the trim, then the blank.
//!
//! ```text
//! factory x ──► trim: x' = g·x + o ──► relative to the blank: x' − (g·x_blank + o) = g·(x − x_blank)
//! ```
//!
//! [`Layers`] never touches the factory calibration: it takes the factory correction's output
//! ([`Reading`] or [`FixedReading`]) and returns a new one. With no trim (or a cleared one) and no blank it
//! returns the factory reading itself, bit for bit.

use super::blank::{q24_of, Blank};
use super::trim::{Trim, TrimLimits};
use super::FieldError;
use crate::calibration::Reading;
use crate::error::Error;
use crate::fixed::FixedReading;
use crate::record::RecordType;

/// A channel's trim and blank, checked once when installed ([`Layers::new`]) and applied to every reading.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Layers {
    trim: Option<Trim>,
    blank: Option<Blank>,
}

impl Default for Layers {
    fn default() -> Self {
        Layers::FACTORY
    }
}

impl Layers {
    /// No trim, no blank: readings are the factory calibration's.
    pub const FACTORY: Layers = Layers { trim: None, blank: None };

    /// Installs a trim and a blank after checking them: the trim against the instrument's limits
    /// ([`FieldError::OffsetPastLimit`], [`FieldError::GainPastLimit`]: a stored trim past the limits is a
    /// fault and is not applied), and both against the factory calibration in use, when its fingerprint is
    /// given ([`FieldError::OtherCalibration`] for a record bound to another; a record with fingerprint 0
    /// is not bound and is accepted).
    pub fn new(
        trim: Option<Trim>,
        blank: Option<Blank>,
        limits: &TrimLimits,
        factory: Option<u32>,
    ) -> Result<Layers, FieldError> {
        if let Some(t) = &trim {
            check_binding(RecordType::Trim, t.info().factory, factory)?;
            limits.check(t)?;
        }
        if let Some(b) = &blank {
            check_binding(RecordType::Blank, b.info().factory, factory)?;
        }
        Ok(Layers { trim, blank })
    }

    /// The installed trim.
    pub fn trim(&self) -> Option<&Trim> {
        self.trim.as_ref()
    }

    /// The installed blank.
    pub fn blank(&self) -> Option<&Blank> {
        self.blank.as_ref()
    }

    /// The trim in effect: `None` when there is none or it is cleared.
    fn active_trim(&self) -> Option<&Trim> {
        self.trim.as_ref().filter(|t| !t.is_cleared())
    }

    /// The same layers with the blank removed (readings are absolute again).
    pub fn without_blank(&self) -> Layers {
        Layers { blank: None, ..*self }
    }

    /// A factory f32 reading through the layers.
    pub fn apply(&self, factory: &Reading) -> Reading {
        match (self.active_trim(), &self.blank) {
            (None, None) => *factory,
            (Some(t), None) => t.apply(factory),
            (None, Some(b)) => b.relative(factory),
            (Some(t), Some(b)) => Reading { x: t.scale(factory.x - b.x()), ..*factory },
        }
    }

    /// A factory fixed-path reading through the layers, in integer arithmetic.
    /// [`Error::AboveRange`]/[`Error::BelowRange`] only where the result leaves the i32 range (±128 Np).
    #[deny(clippy::float_arithmetic)]
    pub fn apply_fixed(&self, factory: &FixedReading) -> Result<FixedReading, Error> {
        match (self.active_trim(), &self.blank) {
            (None, None) => Ok(*factory),
            (Some(t), None) => t.apply_fixed(factory),
            (None, Some(b)) => b.relative_fixed(factory),
            (Some(t), Some(b)) => {
                Ok(FixedReading { x: q24_of(t.scale_fixed(b.difference_q24(factory)))?, ..*factory })
            }
        }
    }
}

/// A factory reading of either correction path, as the layers take it: [`Reading`] through
/// [`Layers::apply`], [`FixedReading`] through [`Layers::apply_fixed`].
pub trait ThroughLayers: Sized {
    /// The reading through `layers`.
    fn through(&self, layers: &Layers) -> Result<Self, Error>;
}

impl ThroughLayers for Reading {
    /// [`Layers::apply`], which cannot fail.
    fn through(&self, layers: &Layers) -> Result<Reading, Error> {
        Ok(layers.apply(self))
    }
}

impl ThroughLayers for FixedReading {
    /// [`Layers::apply_fixed`].
    fn through(&self, layers: &Layers) -> Result<FixedReading, Error> {
        layers.apply_fixed(self)
    }
}

/// A record bound to another factory calibration than the one in use is refused.
pub(super) fn check_binding(record: RecordType, bound: u32, factory: Option<u32>) -> Result<(), FieldError> {
    match factory {
        Some(f) if bound != 0 && bound != f => {
            Err(FieldError::OtherCalibration { record, bound_to: bound, in_use: f })
        }
        _ => Ok(()),
    }
}

/// A measurement cycle's corrector with field layers on top (feature `hal`): the factory corrector does
/// the correction of the mean code exactly as before, then the layers apply, so
/// [`Cycle`](crate::hal::Cycle) reports trimmed, blank-relative values.
#[cfg(feature = "hal")]
#[cfg_attr(docsrs, doc(cfg(feature = "hal")))]
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Layered<C> {
    /// The factory corrector (a [`Calibration`](crate::Calibration)), untouched.
    pub factory: C,
    /// The trim and blank applied to its readings.
    pub layers: Layers,
}

#[cfg(feature = "hal")]
impl<C: crate::hal::Corrector> crate::hal::Corrector for Layered<C> {
    /// The factory corrector's check.
    fn validate(&self) -> Result<(), Error> {
        self.factory.validate()
    }

    /// The factory corrector's check.
    fn check_code(&self, code: u32) -> Result<(), Error> {
        self.factory.check_code(code)
    }

    /// The factory correction of the mean code, then the layers.
    fn correct(&self, code: crate::hal::MeanCode, temp_c: f32) -> Result<Reading, Error> {
        self.factory.correct(code, temp_c).map(|r| self.layers.apply(&r))
    }
}
