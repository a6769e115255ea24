//! Field trims from readings of reference standards: the host side of `logtrim trim`. (The record files
//! are read back by [`crate::records`].)
//!
//! The computation is firmware-lib's ([`logtrim::field::Trim`]): the host reads each standard through
//! the factory calibration in both of the firmware's paths (the f32 path, and the integer path from the
//! calibration file's default fixed-point tables), averages each standard's readings, and has each path
//! compute its own trim, so that each path on the MCU is trimmed against its own readings. The two are
//! stored in one record (f32 fields and fixed fields), which firmware-lib checks as it would on the MCU:
//! the two must agree within 2^-10, and both must lie within the limits.
//!
//! The standards file is a readings CSV (`code`, `temp_c` or `temp_code`) with a `ratio` column: the
//! standard's known ratio (or an `absorbance` column, A = −log10 ratio, as filters are certified). Rows with the same ratio are readings of the same standard; one distinct ratio
//! gives a one-point trim (offset), two a two-point trim (offset and gain).

use logtrim::field::{self, FixedStandard, RecordInfo, Standard, Trim, TrimLimits, TrimParts};
use logtrim::fixed::{FixedCalibration, FixedReading, X_FRAC};
use logtrim::{Calibration, Reading};

use crate::correct::{factory_readings, factory_readings_fixed, mean_q24, x_of_q24, Arithmetic};
use crate::data::Readings;

/// One standard as the two paths read it, before and after the trim.
#[derive(Debug, Clone, PartialEq)]
pub struct StandardReport {
    /// The standard's known ratio.
    pub ratio: f64,
    /// Its known x = ln ratio.
    pub known_x: f64,
    /// Readings of it.
    pub readings: usize,
    /// The mean temperature of its readings, °C (f32 path's reading of the temperature channel).
    pub temp_c: f64,
    /// The mean factory x of its readings in the f32 path.
    pub factory_f32: f64,
    /// The mean factory x of its readings in the fixed path.
    pub factory_fixed: f64,
    /// The mean trimmed x in the f32 path.
    pub trimmed_f32: f64,
    /// The mean trimmed x in the fixed path.
    pub trimmed_fixed: f64,
    /// The rms of the trimmed f32 readings about the known x (the noise of one reading, after the trim).
    pub trimmed_rms_f32: f64,
}

impl StandardReport {
    /// Error of the mean factory reading (f32 path), Np.
    pub fn error_before(&self) -> f64 {
        self.factory_f32 - self.known_x
    }

    /// Error of the mean trimmed reading (f32 path), Np.
    pub fn error_after(&self) -> f64 {
        self.trimmed_f32 - self.known_x
    }

    /// Error of the mean trimmed reading (fixed path), Np.
    pub fn error_after_fixed(&self) -> f64 {
        self.trimmed_fixed - self.known_x
    }
}

/// A computed trim: the record and what it was computed from.
#[derive(Debug, Clone, PartialEq)]
pub struct TrimOutcome {
    /// The trim (both paths).
    pub trim: Trim,
    /// The record's bytes.
    pub bytes: Vec<u8>,
    /// The standards, in order of first appearance.
    pub standards: Vec<StandardReport>,
}

/// Why no trim record was made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TrimError {
    /// The standards file has no `ratio` column.
    #[error("{path}: no ratio column: each reading of a standard needs the standard's known ratio (or its absorbance, for filters certified in absorbance)")]
    NoRatio {
        /// The file.
        path: String,
    },
    /// The file holds no standard, or more than two.
    #[error(
        "{path}: {count} distinct standards (ratios); a trim uses one (offset) or two (offset and gain)"
    )]
    StandardCount {
        /// The file.
        path: String,
        /// The distinct ratios found.
        count: usize,
    },
    /// A reading of a standard was refused by the factory calibration.
    #[error("{path}: line {line}: the factory calibration refuses this reading of the standard at ratio {ratio} ({error}); a trim needs every reading")]
    Refused {
        /// The file.
        path: String,
        /// The line of the reading.
        line: u64,
        /// The standard's ratio.
        ratio: f64,
        /// The firmware's verdict.
        error: logtrim::Error,
    },
    /// The trim is past the limits, or the standards cannot make one: a check that failed.
    #[error("{path}: {error} (path {arith})")]
    Trim {
        /// The file.
        path: String,
        /// Which firmware path refused.
        arith: &'static str,
        /// firmware-lib's verdict.
        error: field::FieldError,
    },
    /// The two paths' trims are not one trim (they differ by more than 2^-10).
    #[error("{path}: the f32 and fixed paths' trims disagree: {error}")]
    Disagree {
        /// The file.
        path: String,
        /// firmware-lib's verdict.
        error: field::RecordValueError,
    },
    /// The calibration cannot be fingerprinted (it cannot be stored as an image).
    #[error("the calibration cannot be stored as an image to fingerprint it: {0:?}")]
    Fingerprint(logtrim::image::WriteError),
}

impl TrimError {
    /// True for the errors that are a check that failed (exit 1) rather than bad input (exit 2).
    pub fn is_check(&self) -> bool {
        matches!(self, TrimError::Trim { .. } | TrimError::Disagree { .. })
    }
}

/// The readings of one standard in both paths.
struct Group {
    ratio: f64,
    f32: Vec<Reading>,
    fixed: Vec<FixedReading>,
    temps: Vec<f64>,
}

fn mean(v: impl Iterator<Item = f64>) -> f64 {
    let (n, s) = v.fold((0usize, 0.0f64), |(n, s), x| (n + 1, s + x));
    s / n.max(1) as f64
}

fn groups(
    cal: &Calibration,
    fixed: &FixedCalibration<'_>,
    readings: &Readings,
) -> Result<Vec<Group>, TrimError> {
    let path = &readings.path;
    if readings.columns.ratio.is_none() {
        return Err(TrimError::NoRatio { path: path.clone() });
    }
    let f32s = factory_readings(cal, readings, Arithmetic::F32);
    let fixeds = factory_readings_fixed(fixed, readings);
    let mut out: Vec<Group> = Vec::new();
    for ((row, a), b) in readings.rows.iter().zip(f32s).zip(fixeds) {
        let ratio = row.ratio.ok_or_else(|| TrimError::NoRatio { path: path.clone() })?;
        let refused = |error| TrimError::Refused { path: path.clone(), line: row.line, ratio, error };
        let (a, b) = (a.map_err(refused)?, b.map_err(refused)?);
        let t = row.temp_c.map_err(refused)?;
        let i = match out.iter().position(|g| g.ratio.to_bits() == ratio.to_bits()) {
            Some(i) => i,
            None => {
                out.push(Group { ratio, f32: Vec::new(), fixed: Vec::new(), temps: Vec::new() });
                out.len() - 1
            }
        };
        let g = &mut out[i];
        g.f32.push(a);
        g.fixed.push(b);
        g.temps.push(t);
    }
    if out.is_empty() || out.len() > 2 {
        return Err(TrimError::StandardCount { path: path.clone(), count: out.len() });
    }
    Ok(out)
}

/// Computes the trim of a unit from readings of one or two reference standards (see the module docs).
/// `info` gives the record's sequence and time; its `factory` is replaced by the calibration's
/// [fingerprint](field::fingerprint).
pub fn compute(
    cal: &Calibration,
    fixed: &FixedCalibration<'_>,
    readings: &Readings,
    info: RecordInfo,
    limits: &TrimLimits,
) -> Result<TrimOutcome, TrimError> {
    let path = readings.path.clone();
    let info = RecordInfo { factory: field::fingerprint(cal).map_err(TrimError::Fingerprint)?, ..info };
    let groups = groups(cal, fixed, readings)?;
    let temp_c = mean(groups.iter().flat_map(|g| g.temps.iter().copied()));
    let temp_mc = (temp_c * 1000.0).round() as i32;
    let std_f32: Vec<Standard> = groups
        .iter()
        .map(|g| Standard {
            measured: mean(g.f32.iter().map(|r| f64::from(r.x))) as f32,
            known: libm::log(g.ratio) as f32,
        })
        .collect();
    let std_fixed: Vec<FixedStandard> = groups
        .iter()
        .map(|g| FixedStandard {
            measured: mean_q24(&g.fixed),
            known: (libm::log(g.ratio) * f64::from(1u32 << X_FRAC)).round() as i32,
        })
        .collect();
    let refused = |arith| {
        let path = path.clone();
        move |error| TrimError::Trim { path: path.clone(), arith, error }
    };
    let (tf, tq) = match (std_f32.as_slice(), std_fixed.as_slice()) {
        ([a], [qa]) => (
            Trim::one_point(info, *a, temp_mc, limits).map_err(refused("f32"))?,
            Trim::one_point_fixed(info, *qa, temp_mc, limits).map_err(refused("fixed"))?,
        ),
        ([a, b], [qa, qb]) => (
            Trim::two_point(info, *a, *b, temp_mc, limits).map_err(refused("f32"))?,
            Trim::two_point_fixed(info, *qa, *qb, temp_mc, limits).map_err(refused("fixed"))?,
        ),
        _ => return Err(TrimError::StandardCount { path: path.clone(), count: groups.len() }),
    };
    let (pf, pq) = (tf.parts(), tq.parts());
    let trim = Trim::new(TrimParts { offset_q24: pq.offset_q24, gain_q30: pq.gain_q30, ..pf })
        .map_err(|error| TrimError::Disagree { path: path.clone(), error })?;
    limits.check(&trim).map_err(refused("f32 and fixed"))?;
    let standards = groups
        .iter()
        .map(|g| {
            let known_x = libm::log(g.ratio);
            let trimmed: Vec<f64> = g.f32.iter().map(|r| f64::from(trim.apply(r).x)).collect();
            let trimmed_fixed: Vec<f64> = g
                .fixed
                .iter()
                .map(|r| trim.apply_fixed(r).map(|v| x_of_q24(v.x)).unwrap_or(f64::NAN))
                .collect();
            StandardReport {
                ratio: g.ratio,
                known_x,
                readings: g.f32.len(),
                temp_c: mean(g.temps.iter().copied()),
                factory_f32: mean(g.f32.iter().map(|r| f64::from(r.x))),
                factory_fixed: mean(g.fixed.iter().map(|r| x_of_q24(r.x))),
                trimmed_f32: mean(trimmed.iter().copied()),
                trimmed_fixed: mean(trimmed_fixed.iter().copied()),
                trimmed_rms_f32: mean(trimmed.iter().map(|x| (x - known_x) * (x - known_x))).sqrt(),
            }
        })
        .collect();
    Ok(TrimOutcome { trim, bytes: trim.to_bytes().to_vec(), standards })
}
