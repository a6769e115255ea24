//! `logtrim blank`: make a blank record from readings of a blank.

use std::path::PathBuf;

use clap::Args;
use logtrim::Unit;
use logtrim_host::calfile::CalFile;
use logtrim_host::output::number::Num;

use crate::trim::{stored_crc, unit_readings, RecordArgs};
use crate::Failure;

/// Options of `logtrim blank`.
#[derive(Args, Debug)]
pub struct BlankArgs {
    /// The unit's calibration file (its factory calibration, which the blank sits on and never changes).
    coeffs: PathBuf,
    /// Readings of the blank: a CSV with code and temp_c (or temp_code); every row is averaged.
    readings: PathBuf,
    /// The blank record to write.
    #[arg(short, long, value_name = "BLANK.bin")]
    output: PathBuf,
    #[command(flatten)]
    record: RecordArgs,
}

/// Runs the verb.
pub fn run(args: BlankArgs) -> Result<(), Failure> {
    crate::check_outputs(&[Some(&args.coeffs), Some(&args.readings)], &[Some(&args.output)], &[])?;
    let file = CalFile::load(&args.coeffs).map_err(Failure::input)?;
    let cal = file.calibration;
    let (readings, tables) = unit_readings(&file, &args.coeffs, &args.readings)?;
    let out = logtrim_host::blank::compute(&cal, &tables.view(), &readings, args.record.info())
        .map_err(Failure::input)?;
    let b = out.blank.parts();
    let serial = file.unit.clone().unwrap_or_else(|| "(no serial)".into());
    say!(
        "unit {serial}, calibration {:#010x}: blank of {} readings at {:.2} °C, spread {:.5} Np rms",
        b.info.factory,
        b.samples,
        out.temp_c,
        out.spread_np
    );
    let x = b.x;
    say!(
        "  x = {:+.6} Np (f32 path), {:+.6} Np (fixed path): ratio {:.6}, {:+.4} dB (power), {:+.5} AU",
        Num::from(x),
        Num(logtrim_host::correct::x_of_q24(b.x_q24)),
        Unit::Ratio.from_x(x),
        Num::from(Unit::DbPower.from_x(x)),
        Num::from(Unit::Absorbance.from_x(x))
    );
    logtrim_host::output::write_atomic(&args.output, &out.bytes)
        .map_err(|e| Failure::input(format!("{}: {e}", args.output.display())))?;
    say!(
        "wrote {}: blank record, {} bytes, sequence {}, CRC {:#010x}",
        args.output.display(),
        out.bytes.len(),
        b.info.sequence,
        stored_crc(&out.bytes)
    );
    Ok(())
}
