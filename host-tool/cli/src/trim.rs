//! `logtrim trim`: compute a field trim record from readings of reference standards (or clear the trim),
//! and the options that the trim and blank verbs and `apply` share.

use std::path::{Path, PathBuf};

use clap::Args;
use logtrim::field::{RecordInfo, Trim, TrimLimits};
use logtrim::Unit;
use logtrim_host::calfile::CalFile;
use logtrim_host::correct::{read_unit_readings, x_of_q24};
use logtrim_host::data::Readings;
use logtrim_host::output::number::Num;
use logtrim_host::records::LayerError;
use logtrim_host::tables::{FixedTables, TableOptions};

use crate::values::{real, real32, Span, CELSIUS};
use crate::Failure;

/// The header of a record that a verb writes.
#[derive(Args, Debug)]
pub struct RecordArgs {
    /// Write counter of the record: give the last record's plus one (of two valid copies in two slots the
    /// firmware uses the higher).
    #[arg(long, value_name = "N", default_value_t = 1)]
    sequence: u32,
    /// When the record was made, Unix seconds (UTC) [default: now, or SOURCE_DATE_EPOCH when set].
    #[arg(long, value_name = "SECONDS")]
    written_at: Option<u64>,
}

impl RecordArgs {
    /// The record's header (its factory fingerprint is filled in by the library).
    pub fn info(&self) -> RecordInfo {
        RecordInfo {
            sequence: self.sequence,
            written_at: self.written_at.unwrap_or_else(crate::stamp::now),
            factory: 0,
        }
    }
}

/// How large a trim may be before it is refused as a fault (the instrument's policy).
#[derive(Args, Debug)]
pub struct LimitArgs {
    /// Largest trim offset |o|, in nepers (0.05 Np = 0.217 dB of a power ratio = 0.0217 AU).
    #[arg(long, value_name = "NP", default_value_t = 0.05, value_parser = real32(Span::above(0.0, 100.0)))]
    max_trim_offset: f32,
    /// Largest trim gain error |g − 1| (0.02 = 2 %).
    #[arg(long, value_name = "FRACTION", default_value_t = 0.02, value_parser = real32(Span::above(0.0, 0.99)))]
    max_trim_gain_error: f32,
    /// Smallest separation of two standards as read, in nepers.
    #[arg(long, value_name = "NP", default_value_t = 0.5, value_parser = real32(Span::above(0.0, 100.0)))]
    min_standard_separation: f32,
}

impl LimitArgs {
    /// The limits, converted as the firmware converts them.
    pub fn limits(&self) -> Result<TrimLimits, Failure> {
        TrimLimits::new(self.max_trim_offset, self.max_trim_gain_error, self.min_standard_separation).map_err(
            |e| {
                Failure::input(format!(
                    "--max-trim-offset/--max-trim-gain-error/--min-standard-separation: {e}"
                ))
            },
        )
    }
}

/// Options of `logtrim trim`.
#[derive(Args, Debug)]
pub struct TrimArgs {
    /// The unit's calibration file (its factory calibration, which the trim sits on and never changes).
    coeffs: PathBuf,
    /// Readings of one or two reference standards: a CSV with code, temp_c (or temp_code) and the
    /// standard's known ratio; rows of equal ratio are readings of one standard.
    #[arg(required_unless_present = "clear")]
    standards: Option<PathBuf>,
    /// The trim record to write.
    #[arg(short, long, value_name = "TRIM.bin")]
    output: PathBuf,
    /// Write a cleared trim (the factory state) instead of computing one. Give it a higher --sequence
    /// than the trim it clears.
    #[arg(long, conflicts_with = "standards")]
    clear: bool,
    /// Temperature recorded with a cleared trim, °C.
    #[arg(long, value_name = "C", default_value_t = 25.0, requires = "clear", allow_negative_numbers = true,
          value_parser = real(CELSIUS))]
    clear_temp: f64,
    /// The unit the errors are also shown in (ln_ratio, decades, db_power, db_amplitude, absorbance, …).
    #[arg(long, value_name = "UNIT", default_value = "db_power")]
    unit: String,
    #[command(flatten)]
    record: RecordArgs,
    #[command(flatten)]
    limits: LimitArgs,
}

/// Reads a readings file of a unit as its firmware reads it, and builds the unit's default fixed-point
/// tables.
pub fn unit_readings(file: &CalFile, coeffs: &Path, path: &Path) -> Result<(Readings, FixedTables), Failure> {
    let readings = read_unit_readings(file, path, false).map_err(Failure::input)?;
    let tables = file
        .fixed_tables(&TableOptions::default())
        .map_err(|e| Failure::input(format!("{}: {e}", coeffs.display())))?;
    Ok((readings, tables))
}

/// A refusal to install the trim and blank record files: a record the firmware refuses names the options,
/// and a trim past its limits is a failed check.
pub fn layer_failure(e: LayerError) -> Failure {
    let message = match &e {
        LayerError::Refused(refusal) => format!("--trim/--blank: {refusal}"),
        other => other.to_string(),
    };
    if e.is_check() {
        Failure::check(message)
    } else {
        Failure::input(message)
    }
}

/// `name` as a unit, or a usage error listing the names.
pub fn unit_arg(name: &str) -> Result<Unit, Failure> {
    Unit::from_name(name).ok_or_else(|| {
        let names: Vec<&str> = Unit::ALL.iter().map(|u| u.name()).collect();
        Failure::input(format!("--unit {name:?}: expected one of {}", names.join(", ")))
    })
}

/// The CRC stored at the end of a record's bytes.
pub fn stored_crc(bytes: &[u8]) -> u32 {
    let n = bytes.len();
    bytes.get(n.saturating_sub(4)..).and_then(|b| b.try_into().ok()).map_or(0, u32::from_le_bytes)
}

/// Runs the verb.
pub fn run(args: TrimArgs) -> Result<(), Failure> {
    crate::check_outputs(&[Some(&args.coeffs), args.standards.as_deref()], &[Some(&args.output)], &[])?;
    let unit = unit_arg(&args.unit)?;
    let limits = args.limits.limits()?;
    let file = CalFile::load(&args.coeffs).map_err(Failure::input)?;
    let cal = file.calibration;
    let fp = logtrim::field::fingerprint(&cal).map_err(|e| Failure::input(format!("{e:?}")))?;
    let serial = file.unit.clone().unwrap_or_else(|| "(no serial)".into());
    let trim = match &args.standards {
        None => {
            let info = RecordInfo { factory: fp, ..args.record.info() };
            let t = Trim::cleared(info, (args.clear_temp * 1000.0).round() as i32);
            say!(
                "unit {serial}, calibration {fp:#010x}: trim cleared, readings are the factory calibration's"
            );
            t
        }
        Some(path) => {
            let (readings, tables) = unit_readings(&file, &args.coeffs, path)?;
            let out =
                logtrim_host::trim::compute(&cal, &tables.view(), &readings, args.record.info(), &limits)
                    .map_err(|e| if e.is_check() { Failure::check(&e) } else { Failure::input(&e) })?;
            report(&out, &serial, fp, unit, &limits)?;
            out.trim
        }
    };
    let bytes = trim.to_bytes();
    logtrim_host::output::write_atomic(&args.output, &bytes)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    say!(
        "wrote {}: trim record, {} bytes, sequence {}, CRC {:#010x}",
        args.output.display(),
        bytes.len(),
        trim.info().sequence,
        stored_crc(&bytes)
    );
    Ok(())
}

fn report(
    out: &logtrim_host::trim::TrimOutcome,
    serial: &str,
    fp: u32,
    unit: Unit,
    limits: &TrimLimits,
) -> Result<(), Failure> {
    let n: usize = out.standards.iter().map(|s| s.readings).sum();
    let t = out.trim.parts();
    say!(
        "unit {serial}, calibration {fp:#010x}: {} standards, {n} readings at {:.2} °C",
        out.standards.len(),
        f64::from(t.temp_mc) / 1000.0
    );
    let u = unit.name();
    let heads = [
        "standard".to_string(),
        "ratio".into(),
        "known x/Np".into(),
        "readings".into(),
        "before/Np".into(),
        format!("before/{u}"),
        "after f32/Np".into(),
        "after fixed/Np".into(),
        "rms after/Np".into(),
    ];
    let widths: Vec<usize> = heads.iter().map(|h| h.chars().count().max(9)).collect();
    let line = |cells: &[String]| -> Result<(), Failure> {
        let row: Vec<String> = cells.iter().zip(&widths).map(|(c, w)| format!("{c:>w$}")).collect();
        say!("  {}", row.join("  "));
        Ok(())
    };
    line(&heads)?;
    for (i, s) in out.standards.iter().enumerate() {
        let d = unit.derivative_f64(s.known_x);
        line(&[
            (i + 1).to_string(),
            format!("{:.6}", s.ratio),
            format!("{:+.5}", Num(s.known_x)),
            s.readings.to_string(),
            format!("{:+.5}", Num(s.error_before())),
            format!("{:+.5}", Num(s.error_before() * d)),
            format!("{:+.5}", Num(s.error_after())),
            format!("{:+.5}", Num(s.error_after_fixed())),
            format!("{:.5}", Num(s.trimmed_rms_f32)),
        ])?;
    }
    let g = f64::from(t.gain);
    say!(
        "trim: {}, x' = g·x + o with g = {:.6} ({:+.3} %), o = {:+.6} Np at ratio 1 (limits |o| ≤ {:.4} Np, |g − 1| ≤ {:.2} %)",
        t.kind.name(),
        g,
        Num((g - 1.0) * 100.0),
        Num::from(t.offset),
        limits.max_offset_np(),
        f64::from(limits.max_gain_error()) * 100.0
    );
    say!(
        "      fixed path: g = {}/2^30 = {:.6}, o = {}/2^24 = {:+.6} Np",
        t.gain_q30,
        f64::from(t.gain_q30) / f64::from(1u32 << 30),
        t.offset_q24,
        Num(x_of_q24(t.offset_q24))
    );
    Ok(())
}
