//! Verification of the firmware math: every log ADC code against a temperature grid across the calibrated
//! range, the fixed-point path ([`logtrim::fixed`]) and the f32 path ([`Calibration::correct_with`]) each
//! compared with the f64 evaluation of the same calibration ([`Calibration::correct_f64`]).
//!
//! # What is measured
//!
//! * Errors, where the reference and the path under test both give a value: `|x − x_ref|` in nepers, in dB
//!   (power, `10·log10`: 1 Np = 4.343 dB; amplitude dB are twice these), and in ADC-LSB equivalents
//!   `|x − x_ref| / |∂x/∂code|` (the reference's own derivative), with the worst input. The bound (default
//!   ¼ LSB) applies to the LSB figure of each path.
//! * Status agreement: a path and the reference disagree when one gives a value and the other an error,
//!   or both errors of different kinds. A disagreement is **at an edge** when the reference's own status
//!   changes within ±[`VerifyOptions::edge_codes`] codes of it at the same temperature: there, a fraction of
//!   an LSB in x, in the sensitivity or in a range limit legitimately moves the point across the edge.
//!   With a raw temperature channel, a temperature error (out of range, sensor fault) is also at an edge
//!   where the temperature's own status changes at a neighbouring channel code: the table's fraction of a
//!   millikelvin can move a code across the range end. Edge disagreements are counted and reported; any
//!   other disagreement fails the verification. In a sampled run (`code_stride` > 1) the band reaches the
//!   neighbouring sampled codes.
//!
//! # The temperature grid
//!
//! With a raw temperature channel, every code of the channel (the reference and the f32 path take the
//! sensor function's f64 temperature, the fixed path the code through its table, so the table's error is
//! part of the figure). Otherwise m°C integers from the lowest to the highest accepted temperature
//! (calibrated range plus extrapolation) in steps of at most [`VerifyOptions::temp_step_k`], both ends
//! included; the fixed path takes the m°C, the f32 path the same temperature as f32.
//!
//! # The evaluations, per row
//!
//! Each temperature row stages every path once and then runs the per-code part at every code:
//! the fixed path [`FixedCalibration::stage_code`]/[`FixedCalibration::stage_millicelsius`] and
//! [`FixedCalibration::correct_staged`] (exactly `correct`/`correct_raw`), the f32 path
//! [`Calibration::stage_with`] and [`Calibration::correct_staged`] (bit for bit `correct_with`), and the
//! reference a [`ReferenceSweep`]: the status of `correct_f64` at every code, its values to f64 precision
//! (within 1e-12 Np), with the Newton solve of the bend warm-started from the previous code.
//! [`VerifyOptions::exact_reference`] runs `correct_f64`'s own steps instead.
//!
//! The fixed path's stage cache ([`StageCache`]) evaluates the per-temperature values at the ends of the
//! temperature's window and interpolates inside it, so it is not bit for bit the staged path either: it is
//! verified on its own ("fixed, stage cache"), every code of every row through a cache kept for the row.
//!
//! The fixed path's code table ([`CodeTable`], the per-sample path of a held or slowly wandering
//! temperature) interpolates x itself, so it is not bit for bit the staged path: it is verified on its
//! own ("fixed, code table" in the report), every code of every row through a table kept for the row
//! (built for the row's temperature window, then the temperature's fraction in that window), against the
//! same reference and bound. The grid's temperatures fall at many fractions of each window (steps of at
//! most 0.05 K in windows of about half a kelvin, or every temperature code), so the line in temperature
//! is checked across the window, not just at its ends.
//!
//! Temperature rows run in parallel (rayon).

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

use logtrim::calibration::{F64Stage, ReadingF64, ReferenceSweep};
use logtrim::fixed::{CodeTable, FixedCalibration, StageCache, X_FRAC};
use logtrim::math::{Backend, Libm, Micromath};
use logtrim::{Calibration, Error};
use rayon::prelude::*;
use serde::Serialize;

use crate::calfile::CalFile;
use crate::error_scale::{db_power, ErrorScale};
use crate::output::number::Num;
use crate::progress::{Counter, OnProgress};

/// The f32 backend the f32 path is verified with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum F32Backend {
    /// libm's `logf`/`expf` (the firmware's default).
    Libm,
    /// micromath's approximations (opt-in, coarse).
    Micromath,
}

/// Options of a verification.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct VerifyOptions {
    /// The error bound in LSB equivalents for both paths.
    pub bound_lsb: f64,
    /// Largest step of the temperature grid, K (without a raw temperature channel).
    pub temp_step_k: f64,
    /// Every `code_stride`-th log code (1 = every code; larger for sampled runs).
    pub code_stride: u32,
    /// Every `temp_stride`-th temperature of the grid (1 = all).
    pub temp_stride: usize,
    /// Half width of the edge band, codes.
    pub edge_codes: u32,
    /// The f32 backend.
    pub f32_backend: F32Backend,
    /// Verify the fixed-point path.
    pub check_fixed: bool,
    /// Verify the f32 path.
    pub check_f32: bool,
    /// Verify the fixed path's code table ([`CodeTable`], the per-sample path at a held or slowly wandering
    /// temperature) on its own: every point through a table kept per temperature row.
    pub check_table: bool,
    /// Verify the fixed path's stage cache ([`StageCache`]: the values at the temperature window's ends,
    /// interpolated inside it) on its own: every point through a cache kept per temperature row.
    pub check_cache: bool,
    /// Evaluate the reference at every point by the exact path of [`Calibration::correct_f64`] (staged once
    /// per temperature) instead of the warm-started sweep ([`ReferenceSweep`]: the same statuses, values
    /// within 1e-12 Np, fewer `exp` calls).
    pub exact_reference: bool,
}

impl Default for VerifyOptions {
    fn default() -> Self {
        VerifyOptions {
            bound_lsb: 0.25,
            temp_step_k: 0.05,
            code_stride: 1,
            temp_stride: 1,
            edge_codes: 1,
            f32_backend: F32Backend::Libm,
            check_fixed: true,
            check_f32: true,
            check_table: true,
            check_cache: true,
            exact_reference: false,
        }
    }
}

/// A raw temperature channel for the sweep (see [`crate::tables::TemperatureChannel`]).
pub use crate::tables::TemperatureChannel;

/// Why a verification could not run.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum VerifyError {
    /// An option is out of its range.
    #[error("option {name}: {message}")]
    Option {
        /// The option.
        name: &'static str,
        /// What is wrong.
        message: String,
    },
    /// The calibration does not validate.
    #[error("the calibration does not validate: {0}")]
    Calibration(logtrim::Error),
    /// The fixed tables do not validate.
    #[error("the fixed-point tables do not validate: {0}")]
    Tables(logtrim::Error),
    /// The fixed tables have no sensor table but a raw channel was given (or the reverse).
    #[error("{0}")]
    Sensor(String),
}

/// The input at which a worst error occurred.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Worst {
    /// The log ADC code.
    pub code: u32,
    /// The temperature, °C (the sensor function's value with a raw channel).
    pub temp_c: f64,
    /// The temperature channel's code, with a raw channel.
    pub temp_code: Option<u32>,
    /// The reference x.
    pub x_ref: f64,
    /// The path's x.
    pub x: f64,
    /// The error, LSB equivalents.
    pub err_lsb: f64,
}

/// Error figures of one path.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PathErrors {
    /// Points where both the path and the reference gave a value.
    pub compared: u64,
    /// Largest error, nepers.
    pub max_np: f64,
    /// RMS error, nepers.
    pub rms_np: f64,
    /// Largest error, power dB.
    pub max_db: f64,
    /// RMS error, power dB.
    pub rms_db: f64,
    /// Largest error, LSB equivalents.
    pub max_lsb: f64,
    /// RMS error, LSB equivalents.
    pub rms_lsb: f64,
    /// Where the largest LSB error occurred.
    pub worst: Option<Worst>,
}

/// A status disagreement with the reference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Disagreement {
    /// The log code.
    pub code: u32,
    /// The temperature, °C.
    pub temp_c: f64,
    /// The reference's status (`ok` or the error's name).
    pub reference: String,
    /// The path's status.
    pub path: String,
}

/// Status agreement of one path.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StatusAgreement {
    /// Points where the path and the reference agree (both values, or the same error).
    pub agree: u64,
    /// Disagreements inside the edge band.
    pub edge: u64,
    /// Disagreements outside it (failures).
    pub outside: u64,
    /// The first few disagreements outside the band.
    pub examples: Vec<Disagreement>,
}

/// The verification of one path.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PathReport {
    /// Whether the path was verified at all (see [`VerifyOptions::check_fixed`]).
    pub checked: bool,
    /// Errors.
    pub errors: PathErrors,
    /// Status agreement.
    pub status: StatusAgreement,
}

/// The result of a verification.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerifyReport {
    /// Log codes swept per temperature.
    pub codes: u64,
    /// Temperatures swept.
    pub temperatures: u64,
    /// Points where the reference gave a value.
    pub reference_values: u64,
    /// The bound, LSB equivalents.
    pub bound_lsb: f64,
    /// Half width of the edge band, codes.
    pub edge_codes: u32,
    /// The fixed-point path.
    pub fixed: PathReport,
    /// The f32 path.
    pub f32: PathReport,
    /// The fixed path through its code table ([`CodeTable`]).
    pub table: PathReport,
    /// The fixed path through its stage cache ([`StageCache`]).
    pub cache: PathReport,
    /// The f32 backend.
    pub f32_backend: F32Backend,
    /// Every how many log codes were verified (1: every code).
    pub code_stride: u32,
    /// Every how many temperatures of the grid were verified (1: all of them).
    pub temp_stride: usize,
    /// True when a stride is above 1: a sampled run, not an exhaustive verification.
    pub sampled: bool,
    /// How the f64 reference was evaluated: `"sweep"` (warm-started, [`logtrim::calibration::ReferenceSweep`])
    /// or `"exact"` (`correct_f64`'s own steps at every point, [`VerifyOptions::exact_reference`]).
    pub reference: &'static str,
}

impl VerifyReport {
    /// Whether the fixed path is within the bound and agrees outside the edge band.
    pub fn fixed_passed(&self) -> bool {
        !self.fixed.checked || (self.fixed.errors.max_lsb <= self.bound_lsb && self.fixed.status.outside == 0)
    }
    /// Whether the f32 path is within the bound and agrees outside the edge band.
    pub fn f32_passed(&self) -> bool {
        !self.f32.checked || (self.f32.errors.max_lsb <= self.bound_lsb && self.f32.status.outside == 0)
    }
    /// Whether the code table is within the bound and agrees outside the edge band.
    pub fn table_passed(&self) -> bool {
        !self.table.checked || (self.table.errors.max_lsb <= self.bound_lsb && self.table.status.outside == 0)
    }
    /// Whether the stage cache is within the bound and agrees outside the edge band.
    pub fn cache_passed(&self) -> bool {
        !self.cache.checked || (self.cache.errors.max_lsb <= self.bound_lsb && self.cache.status.outside == 0)
    }
    /// Every verified path passed.
    pub fn passed(&self) -> bool {
        self.fixed_passed() && self.f32_passed() && self.table_passed() && self.cache_passed()
    }
}

/// Status of one evaluation: a value or an error kind.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Status {
    Value(f64),
    Err(Error),
}

impl Status {
    fn same_kind(&self, other: &Status) -> bool {
        match (self, other) {
            (Status::Value(_), Status::Value(_)) => true,
            // The same variant (each has its own name), and for a sensor fault the same fault.
            (Status::Err(a), Status::Err(b)) => match (a, b) {
                (Error::Sensor(x), Error::Sensor(y)) => x == y,
                _ => std::mem::discriminant(a) == std::mem::discriminant(b),
            },
            _ => false,
        }
    }
    fn is_temperature_error(&self) -> bool {
        matches!(self, Status::Err(Error::TemperatureOutOfRange { .. } | Error::Sensor(_)))
    }
    fn name(&self) -> String {
        match self {
            Status::Value(_) => "ok".to_string(),
            Status::Err(Error::Sensor(f)) => format!("sensor_fault({f})"),
            Status::Err(e) => e.name().to_string(),
        }
    }
}

/// Running error sums of one path over some rows.
#[derive(Debug, Clone, Copy, Default)]
struct Acc {
    n: u64,
    max_np: f64,
    ss_np: f64,
    max_lsb: f64,
    ss_lsb: f64,
    worst: Option<Worst>,
    agree: u64,
    edge: u64,
    outside: u64,
}

impl Acc {
    fn merge(mut self, o: Acc) -> Acc {
        self.n += o.n;
        self.max_np = self.max_np.max(o.max_np);
        self.ss_np += o.ss_np;
        self.ss_lsb += o.ss_lsb;
        if o.max_lsb > self.max_lsb || self.worst.is_none() {
            self.max_lsb = self.max_lsb.max(o.max_lsb);
            self.worst = o.worst.or(self.worst);
        }
        self.agree += o.agree;
        self.edge += o.edge;
        self.outside += o.outside;
        self
    }
}

/// One temperature of the grid.
#[derive(Debug, Clone, Copy)]
struct GridTemp {
    /// °C for the reference.
    celsius: Result<f64, Error>,
    /// m°C for the fixed path (without a raw channel).
    millicelsius: i32,
    /// The channel code (with a raw channel).
    code: Option<u32>,
    /// With a raw channel: whether the temperature's own status (in range, out of range, sensor fault)
    /// differs at a neighbouring channel code, so that temperature errors here are at an edge.
    temperature_edge: bool,
}

/// The kind of status a temperature alone gives, for the temperature edge of a raw channel.
fn temperature_kind(cal: &Calibration, t: &Result<f64, Error>) -> String {
    match t {
        Err(e) => Status::Err(*e).name(),
        Ok(t) => {
            let tr = &cal.temperature;
            let (lo, hi) = (
                f64::from(tr.min_c) - f64::from(tr.extrapolation_k),
                f64::from(tr.max_c) + f64::from(tr.extrapolation_k),
            );
            if *t < lo || *t > hi {
                "temperature_out_of_range".into()
            } else {
                "ok".into()
            }
        }
    }
}

/// The results of one row (temperature).
#[derive(Debug, Clone, Default)]
struct RowOut {
    reference_values: u64,
    fixed: Acc,
    f32: Acc,
    table: Acc,
    cache: Acc,
    fixed_examples: Vec<Disagreement>,
    f32_examples: Vec<Disagreement>,
    table_examples: Vec<Disagreement>,
    cache_examples: Vec<Disagreement>,
}

const MAX_EXAMPLES: usize = 10;

/// The size of a verification before it runs: (log codes, temperatures) that `opts` sweeps over a calibration
/// file's unit (every code of its raw temperature channel, if it has one).
pub fn plan(file: &CalFile, opts: &VerifyOptions) -> Result<(u64, u64), VerifyError> {
    file.calibration.validate().map_err(VerifyError::Calibration)?;
    if opts.code_stride == 0
        || opts.temp_stride == 0
        || !(opts.temp_step_k > 0.0 && opts.temp_step_k.is_finite())
    {
        return Err(VerifyError::Option { name: "stride", message: "must be ≥ 1".into() });
    }
    let max_code = file.calibration.adc.max_code().map_err(VerifyError::Calibration)?;
    let codes = u64::from(max_code) / u64::from(opts.code_stride) + 1;
    let temps = match &file.temperature_sensor {
        Some(s) => {
            let n = u64::from(s.divider.max_code().map_err(VerifyError::Calibration)?) + 1;
            n.div_ceil(opts.temp_stride as u64)
        }
        None => {
            let tr = &file.calibration.temperature;
            let lo = ((f64::from(tr.min_c) - f64::from(tr.extrapolation_k)) * 1000.0).ceil();
            let hi = ((f64::from(tr.max_c) + f64::from(tr.extrapolation_k)) * 1000.0).floor();
            let step = (opts.temp_step_k * 1000.0).floor().max(1.0);
            let n = ((hi - lo) / step).floor() as u64 + 2;
            n.div_ceil(opts.temp_stride as u64)
        }
    };
    Ok((codes, temps))
}

/// Runs the verification of `fixed` (tables of `cal`) and of the f32 path against `cal.correct_f64`.
pub fn run(
    cal: &Calibration,
    fixed: &FixedCalibration<'_>,
    channel: Option<&TemperatureChannel<'_>>,
    opts: &VerifyOptions,
) -> Result<VerifyReport, VerifyError> {
    run_with_progress(cal, fixed, channel, opts, &crate::progress::quiet)
}

/// Verifies a calibration file's unit: its calibration, its fixed-point `tables`, and with a raw temperature
/// channel every code of that channel through the file's sensor description (f64) as the reference
/// temperature. `progress` counts temperature rows.
pub fn run_file(
    file: &CalFile,
    tables: &FixedCalibration<'_>,
    opts: &VerifyOptions,
    progress: OnProgress<'_>,
) -> Result<VerifyReport, VerifyError> {
    file.with_sensor_channel(|channel| run_with_progress(&file.calibration, tables, channel, opts, progress))
        .map_err(|e| VerifyError::Sensor(format!("the temperature sensor description: {e}")))?
}

/// [`run`], reporting each temperature row swept to `progress`.
pub fn run_with_progress(
    cal: &Calibration,
    fixed: &FixedCalibration<'_>,
    channel: Option<&TemperatureChannel<'_>>,
    opts: &VerifyOptions,
    progress: OnProgress<'_>,
) -> Result<VerifyReport, VerifyError> {
    let opt = |name, m: &str| VerifyError::Option { name, message: m.to_string() };
    if !(opts.bound_lsb >= 0.0) {
        return Err(opt("bound_lsb", "must be ≥ 0"));
    }
    if !(opts.temp_step_k > 0.0 && opts.temp_step_k.is_finite()) {
        return Err(opt("temp_step_k", "must be > 0"));
    }
    if opts.code_stride == 0 || opts.temp_stride == 0 {
        return Err(opt("stride", "must be ≥ 1"));
    }
    cal.validate().map_err(VerifyError::Calibration)?;
    fixed.validate().map_err(VerifyError::Tables)?;
    match (channel.is_some(), fixed.sensor.is_some()) {
        (true, false) => {
            return Err(VerifyError::Sensor(
                "a raw temperature channel was given but the tables have no sensor table".into(),
            ))
        }
        (false, true) => {
            return Err(VerifyError::Sensor(
                "the tables have a sensor table: give the raw temperature channel to verify it".into(),
            ))
        }
        _ => {}
    }
    let grid = temperature_grid(cal, channel, opts)?;
    let max_code = cal.adc.max_code().map_err(VerifyError::Calibration)?;
    let codes: Vec<u32> = (0..=max_code).step_by(opts.code_stride as usize).collect();

    let counter = Counter::start(grid.len(), progress);
    let row = match opts.f32_backend {
        F32Backend::Libm => row::<Libm>,
        F32Backend::Micromath => row::<Micromath>,
    };
    let rows: Vec<RowOut> = grid
        .par_iter()
        .map(|g| {
            let r = row(cal, fixed, g, &codes, opts);
            counter.step();
            r
        })
        .collect();

    let mut total = RowOut::default();
    for r in rows {
        total.reference_values += r.reference_values;
        total.fixed = total.fixed.merge(r.fixed);
        total.f32 = total.f32.merge(r.f32);
        total.table = total.table.merge(r.table);
        total.cache = total.cache.merge(r.cache);
        for (dst, src) in [
            (&mut total.fixed_examples, r.fixed_examples),
            (&mut total.f32_examples, r.f32_examples),
            (&mut total.table_examples, r.table_examples),
            (&mut total.cache_examples, r.cache_examples),
        ] {
            let room = MAX_EXAMPLES.saturating_sub(dst.len());
            dst.extend(src.into_iter().take(room));
        }
    }
    let report = |checked: bool, a: &Acc, examples: Vec<Disagreement>| {
        let n = a.n.max(1) as f64;
        let rms_np = (a.ss_np / n).sqrt();
        PathReport {
            checked,
            errors: PathErrors {
                compared: a.n,
                max_np: a.max_np,
                rms_np,
                max_db: db_power(a.max_np),
                rms_db: db_power(rms_np),
                max_lsb: a.max_lsb,
                rms_lsb: (a.ss_lsb / n).sqrt(),
                worst: a.worst,
            },
            status: StatusAgreement { agree: a.agree, edge: a.edge, outside: a.outside, examples },
        }
    };
    Ok(VerifyReport {
        codes: codes.len() as u64,
        temperatures: grid.len() as u64,
        reference_values: total.reference_values,
        bound_lsb: opts.bound_lsb,
        edge_codes: opts.edge_codes,
        fixed: report(opts.check_fixed, &total.fixed, total.fixed_examples),
        f32: report(opts.check_f32, &total.f32, total.f32_examples),
        table: report(opts.check_table, &total.table, total.table_examples),
        cache: report(opts.check_cache, &total.cache, total.cache_examples),
        f32_backend: opts.f32_backend,
        code_stride: opts.code_stride,
        temp_stride: opts.temp_stride,
        sampled: opts.code_stride > 1 || opts.temp_stride > 1,
        reference: if opts.exact_reference { "exact" } else { "sweep" },
    })
}

fn temperature_grid(
    cal: &Calibration,
    channel: Option<&TemperatureChannel<'_>>,
    opts: &VerifyOptions,
) -> Result<Vec<GridTemp>, VerifyError> {
    if let Some(ch) = channel {
        let kind = |c: u32| temperature_kind(cal, &(ch.celsius)(c));
        let (first, last) = (*ch.codes.start(), *ch.codes.end());
        let grid: Vec<GridTemp> = ch
            .codes
            .clone()
            .step_by(opts.temp_stride)
            .map(|c| {
                let k = kind(c);
                let neighbours =
                    [c.checked_sub(1).filter(|&n| n >= first), c.checked_add(1).filter(|&n| n <= last)];
                let temperature_edge = neighbours.iter().flatten().any(|&n| kind(n) != k);
                GridTemp { celsius: (ch.celsius)(c), millicelsius: 0, code: Some(c), temperature_edge }
            })
            .collect();
        if grid.is_empty() {
            return Err(VerifyError::Sensor("the temperature channel has no codes".into()));
        }
        return Ok(grid);
    }
    let tr = &cal.temperature;
    let lo = ((f64::from(tr.min_c) - f64::from(tr.extrapolation_k)) * 1000.0).ceil() as i64;
    let hi = ((f64::from(tr.max_c) + f64::from(tr.extrapolation_k)) * 1000.0).floor() as i64;
    let step = ((opts.temp_step_k * 1000.0).floor() as i64).max(1);
    let mut mcs: Vec<i64> = (lo..=hi).step_by(step as usize).collect();
    if mcs.last() != Some(&hi) {
        mcs.push(hi);
    }
    Ok(mcs
        .into_iter()
        .step_by(opts.temp_stride)
        .map(|mc| GridTemp {
            celsius: Ok(mc as f64 / 1000.0),
            millicelsius: mc as i32,
            code: None,
            temperature_edge: false,
        })
        .collect())
}

/// The reference of one row.
enum Reference<'a> {
    Exact(F64Stage),
    Warm(ReferenceSweep<'a>),
}

impl Reference<'_> {
    #[inline(always)]
    fn correct(&mut self, cal: &Calibration, code: u32) -> Result<ReadingF64, Error> {
        match self {
            Reference::Exact(stage) => cal.correct_staged_f64(stage, code),
            Reference::Warm(sweep) => sweep.correct(code),
        }
    }
}

fn row<B: Backend>(
    cal: &Calibration,
    fixed: &FixedCalibration<'_>,
    g: &GridTemp,
    codes: &[u32],
    opts: &VerifyOptions,
) -> RowOut {
    let q = 2f64.powi(X_FRAC as i32);
    // The fixed path's temperature stage, once per row; per code this is exactly `correct`/`correct_raw`
    // (the code is checked first, then the stage's own error, then the log channel).
    let stage = match g.code {
        Some(tc) => fixed.stage_code(tc),
        None => fixed.stage_millicelsius(g.millicelsius),
    };
    // The reference's and the f32 path's temperature stages, once per row; per code these are exactly
    // `correct_f64(code, t)` and `correct_with::<B>(code, t as f32)`.
    let mut reference = g.celsius.map(|t| {
        if opts.exact_reference {
            Reference::Exact(cal.reference_stage(t))
        } else {
            Reference::Warm(cal.reference_sweep(t))
        }
    });
    let f32_stage = g.celsius.map(|t| cal.stage_with::<B>(t as f32));
    // The code table, one per row: built for the row's temperature window at the first code, then an
    // index and an interpolation per code (or its stage cache where the table falls back).
    let mut table = CodeTable::new(*fixed);
    // The stage cache, one per row: the row's window loaded at the first code.
    let mut cache = StageCache::new(*fixed);
    let n = codes.len();
    let mut statuses = Vec::with_capacity(n);
    // (index, path status) of each point where a path disagrees with the reference.
    let mut pending: [Vec<(usize, Status)>; 4] = [Vec::new(), Vec::new(), Vec::new(), Vec::new()];
    let mut out = RowOut::default();
    let temp_c = g.celsius.unwrap_or(f64::NAN);
    let at = (temp_c, g.code);
    for (i, &code) in codes.iter().enumerate() {
        let (r, d) = match &mut reference {
            Ok(reference) => match reference.correct(cal, code) {
                Ok(v) => (Status::Value(v.x), v.dx_dcode),
                Err(e) => (Status::Err(e), 0.0),
            },
            Err(e) => (Status::Err(cal.adc.check_code(code).err().unwrap_or(*e)), 0.0),
        };
        let fx = if !opts.check_fixed {
            Err(Error::NotCalibrated)
        } else {
            match &stage {
                Ok(s) => fixed.correct_staged(s, code).map(|v| f64::from(v.x) / q),
                Err(e) => Err(fixed.check_code(code).err().unwrap_or(*e)),
            }
        };
        let f3 = if !opts.check_f32 {
            Err(Error::NotCalibrated)
        } else {
            match &f32_stage {
                Ok(st) => cal.correct_staged(st, code).map(|v| f64::from(v.x)),
                Err(e) => Err(cal.adc.check_code(code).err().unwrap_or(*e)),
            }
        };
        if opts.check_fixed {
            tally(&mut out.fixed, &mut pending[0], i, code, &r, d, fx, at);
        }
        if opts.check_table {
            let tx = match g.code {
                Some(tc) => table.correct_raw(code, tc),
                None => table.correct(code, g.millicelsius),
            };
            tally(&mut out.table, &mut pending[2], i, code, &r, d, tx.map(|v| f64::from(v.x) / q), at);
        }
        if opts.check_cache {
            let cx = match g.code {
                Some(tc) => cache.correct_raw(code, tc),
                None => cache.correct(code, g.millicelsius),
            };
            tally(&mut out.cache, &mut pending[3], i, code, &r, d, cx.map(|v| f64::from(v.x) / q), at);
        }
        if opts.check_f32 {
            tally(&mut out.f32, &mut pending[1], i, code, &r, d, f3, at);
        }
        out.reference_values += u64::from(matches!(r, Status::Value(_)));
        statuses.push(r);
    }
    // Classify the disagreements now that the reference's whole row is known.
    let band = (opts.edge_codes as usize).div_ceil(opts.code_stride as usize).max(1);
    let at_edge = |i: usize| {
        let lo = i.saturating_sub(band);
        let hi = (i + band).min(n - 1);
        (lo..=hi).any(|j| !statuses[j].same_kind(&statuses[i]))
    };
    for (k, list) in pending.iter().enumerate() {
        let (acc, examples) = match k {
            0 => (&mut out.fixed, &mut out.fixed_examples),
            1 => (&mut out.f32, &mut out.f32_examples),
            2 => (&mut out.table, &mut out.table_examples),
            _ => (&mut out.cache, &mut out.cache_examples),
        };
        for (i, p) in list {
            let r = &statuses[*i];
            if at_edge(*i) || (g.temperature_edge && (r.is_temperature_error() || p.is_temperature_error())) {
                acc.edge += 1;
            } else {
                acc.outside += 1;
                if examples.len() < MAX_EXAMPLES {
                    examples.push(Disagreement {
                        code: codes[*i],
                        temp_c,
                        reference: r.name(),
                        path: p.name(),
                    });
                }
            }
        }
    }
    out
}

/// Adds one point of a path to its sums, or to its pending disagreements (index, the path's status).
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn tally(
    acc: &mut Acc,
    pending: &mut Vec<(usize, Status)>,
    i: usize,
    code: u32,
    r: &Status,
    d: f64,
    p: Result<f64, Error>,
    (temp_c, temp_code): (f64, Option<u32>),
) {
    match (r, p) {
        (Status::Value(xr), Ok(x)) => {
            acc.agree += 1;
            let e = (x - xr).abs();
            let lsb = if d != 0.0 { e / d.abs() } else { f64::INFINITY };
            acc.n += 1;
            acc.max_np = acc.max_np.max(e);
            acc.ss_np += e * e;
            acc.ss_lsb += lsb * lsb;
            if lsb > acc.max_lsb || acc.worst.is_none() {
                acc.max_lsb = acc.max_lsb.max(lsb);
                acc.worst = Some(Worst { code, temp_c, temp_code, x_ref: *xr, x, err_lsb: lsb });
            }
        }
        (_, p) => {
            let p = match p {
                Ok(x) => Status::Value(x),
                Err(e) => Status::Err(e),
            };
            if r.same_kind(&p) {
                acc.agree += 1;
            } else {
                pending.push((i, p));
            }
        }
    }
}

impl std::fmt::Display for VerifyReport {
    /// The report with errors in nepers, power dB and LSB ([`VerifyReport::render`] for another unit).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        self.write_in(f, ErrorScale::DbPower)
    }
}

impl VerifyReport {
    /// The report as text, its errors in nepers, in `unit` (the unit the product speaks: mAU, % of ratio,
    /// dB) and in LSB.
    pub fn render(&self, unit: ErrorScale) -> String {
        let mut s = String::new();
        let _ = self.write_in(&mut s, unit);
        s
    }

    fn write_in(&self, f: &mut impl std::fmt::Write, unit: ErrorScale) -> std::fmt::Result {
        let lab = if unit == ErrorScale::DbPower { "dB" } else { unit.label() };
        let inu = |np: f64| unit.of_np(np).abs();
        writeln!(
            f,
            "swept {} codes × {} temperatures = {} points; the reference gives a value at {}",
            self.codes,
            self.temperatures,
            self.codes * self.temperatures,
            self.reference_values
        )?;
        writeln!(
            f,
            "bound {} LSB; edge band ±{} code(s); reference: f64 {}",
            self.bound_lsb, self.edge_codes, self.reference
        )?;
        if self.sampled {
            writeln!(
                f,
                "SAMPLED: every {} code(s) × every {} temperature(s) of the grid; not an exhaustive verification",
                self.code_stride, self.temp_stride
            )?;
        }
        let backend = match self.f32_backend {
            F32Backend::Libm => "f32 (libm)",
            F32Backend::Micromath => "f32 (micromath)",
        };
        for (name, p, ok) in [
            ("fixed", &self.fixed, self.fixed_passed()),
            ("fixed, stage cache", &self.cache, self.cache_passed()),
            ("fixed, code table", &self.table, self.table_passed()),
            (backend, &self.f32, self.f32_passed()),
        ] {
            if !p.checked {
                writeln!(f, "{name}: not verified")?;
                continue;
            }
            let e = &p.errors;
            let verdict = match (ok, self.sampled) {
                (true, false) => "PASS",
                (true, true) => "PASS (sampled)",
                (false, _) => "FAIL",
            };
            writeln!(f, "{name}: {verdict}")?;
            writeln!(
                f,
                "  error  max {:.3e} Np  {:.3e} {lab}  {:.4} LSB;  rms {:.3e} Np  {:.3e} {lab}  {:.4} LSB  ({} points)",
                e.max_np,
                inu(e.max_np),
                e.max_lsb,
                e.rms_np,
                inu(e.rms_np),
                e.rms_lsb,
                e.compared
            )?;
            if let Some(w) = &e.worst {
                let tc = w.temp_code.map(|c| format!(" (temperature code {c})")).unwrap_or_default();
                writeln!(
                    f,
                    "  worst  code {} at {:.3} °C{tc}: x {:.7} vs reference {:.7}",
                    w.code,
                    Num(w.temp_c),
                    Num(w.x),
                    Num(w.x_ref)
                )?;
            }
            let s = &p.status;
            writeln!(
                f,
                "  status agree {}, disagree at edges {}, disagree elsewhere {}",
                s.agree, s.edge, s.outside
            )?;
            for d in &s.examples {
                writeln!(
                    f,
                    "    code {} at {:.3} °C: reference {}, path {}",
                    d.code,
                    Num(d.temp_c),
                    d.reference,
                    d.path
                )?;
            }
        }
        Ok(())
    }
}
