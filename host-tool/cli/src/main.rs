//! The `logtrim` command-line tool: a thin layer over the `logtrim-host` library.
//!
//! Exit codes: 0 success; 1 a check failed (verification over its bound, a bad image, a fit that was
//! refused, a unit of a batch that could not be calibrated); 2 bad usage or bad input (unreadable file,
//! malformed data, an output that cannot be written); 3 fitted, but failed acceptance (`fit`: the unit, or a
//! unit of the batch, is FAIL); 130 and 143 interrupted by SIGINT or SIGTERM (every temporary file removed
//! first); 141 standard output closed by its reader (see `out`).

use std::path::Path;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

#[macro_use]
mod out;

mod apply;
mod blank;
mod budget;
mod demo;
mod emit;
mod fit;
mod image;
mod inspect;
mod plot;
mod population;
mod progress;
mod sensor;
mod simulate;
mod stamp;
mod trim;
mod values;
mod verify;

/// Calibrate log-ratio front ends on the production line, and check the firmware that reads them.
///
/// logtrim turns a unit's chamber run (log-channel ADC codes, temperatures, applied ratios) into its
/// calibration, and the calibration into what the unit's firmware needs: a calibration image, or
/// fixed-point tables as Rust, C or JSON. It verifies the firmware's f32 and integer paths against an f64
/// reference over every code, corrects readings exactly as the firmware would, and makes the field's trim
/// and blank records.
///
/// A unit's way: `fit` (CAL.csv → COEFFS.json), then `image` or `emit`, `verify`, `apply`; in the field,
/// `trim` and `blank`. Before any unit is built, `simulate` and `budget` work on the design; `demo` runs
/// the whole job on simulated units.
///
/// Exit codes: 0 success; 1 a check failed (verification over its bound, a bad image, a refused fit, a
/// trim past its limits, a unit of a batch that could not be calibrated); 2 bad usage or bad input (an output
/// that cannot be written included); 3 a unit was fitted but failed its acceptance limits (`fit`); 130 or 143
/// interrupted by SIGINT or SIGTERM (no temporary file is left); 141 standard output closed by its reader
/// (files already written are whole).
#[derive(Parser)]
#[command(name = "logtrim", version)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Print the version and the formats this build reads and writes.
    Info,
    /// Run the whole job on simulated units: chamber run, fit, and corrected held-out readings, with the
    /// error of the nominal equation, a room-temperature two-point calibration and logtrim side by side.
    Demo(demo::DemoArgs),
    /// Fit a calibration (COEFFS.json) from chamber data and judge it against acceptance limits (PASS/FAIL,
    /// exit 3 on FAIL); a batch gets a file per unit, an image per unit that passed, and a summary.
    Fit(fit::FitArgs),
    /// Make a population model (POP.json) from a characterisation lot run at the full set of set-points:
    /// the modes of the unit-to-unit spread, how many the lot supports (leave-one-unit-out), a summary.
    Characterise(population::CharacteriseArgs),
    /// Recommend a production plan from a population model: N set-points and the ratios per set-point,
    /// with the error in x predicted across the range (then `fit --population`).
    Plan(population::PlanArgs),
    /// Correct a readings CSV with a calibration, as the firmware would, and write the results.
    Apply(apply::ApplyArgs),
    /// Simulate chamber calibration and validation runs of a front end, with the truth kept apart.
    Simulate(simulate::SimulateArgs),
    /// Build a unit's calibration image (binary or Intel HEX) from a calibration file.
    Image(image::Args),
    /// Decode and check a calibration image file (binary or Intel HEX) and print it; exit 1 if it is bad.
    Inspect(inspect::Args),
    /// Draw a calibrated unit's charts as SVG: error against x before and after correction, error against
    /// temperature over a validation run, and the f32 correction's error map.
    Plot(plot::PlotArgs),
    /// Estimate a design's error budget before any unit is built: each contribution to the error in x, their
    /// root-sum-square and worst case.
    Budget(budget::BudgetArgs),
    /// Temperature channels from a data sheet: thermistor coefficients from points, R–T tables with the
    /// divider's codes, and the settings file that `fit --sensor` reads.
    Sensor(sensor::SensorArgs),
    /// Verify the fixed-point and f32 paths against the f64 reference over every code and temperature.
    Verify(verify::VerifyArgs),
    /// Emit the unit's fixed-point tables as Rust, C or JSON.
    Emit(emit::EmitArgs),
    /// Write the C library (ltrm.h, ltrm.c) into a folder: the fixed-point correction, run-time images and
    /// field records for C firmware, the same for every unit.
    CLibrary(emit::CLibraryArgs),
    /// Compute a field trim record (offset, or offset and gain) from readings of one or two reference
    /// standards, on top of the factory calibration; exit 1 if the trim is past its limits.
    Trim(trim::TrimArgs),
    /// Make a blank record from readings of a blank, for readings relative to it (`apply --blank`).
    Blank(blank::BlankArgs),
}

/// An error of the binary: a message and the exit code it maps to.
pub struct Failure {
    /// What went wrong, for the terminal.
    pub message: String,
    /// 1 for a failed check, 2 for bad usage or input, 3 for a unit that failed acceptance.
    pub code: u8,
}

impl Failure {
    /// A run that ends without a message (standard output closed by its reader).
    pub fn quiet(code: u8) -> Failure {
        Failure { message: String::new(), code }
    }
    /// Bad input or usage (exit 2).
    pub fn input(message: impl std::fmt::Display) -> Failure {
        Failure { message: message.to_string(), code: 2 }
    }
    /// A check that failed (exit 1).
    pub fn check(message: impl std::fmt::Display) -> Failure {
        Failure { message: message.to_string(), code: 1 }
    }
    /// A unit fitted but failing its acceptance limits (exit 3).
    pub fn rejected(message: impl std::fmt::Display) -> Failure {
        Failure { message: message.to_string(), code: 3 }
    }
}

/// Checks a verb's outputs before anything is written: no output is one of the inputs (by identity), and
/// each can be written where it is asked for (`logtrim_host::output::Plan`). `None`s are skipped.
pub fn check_outputs(
    inputs: &[Option<&Path>],
    files: &[Option<&Path>],
    dirs: &[Option<&Path>],
) -> Result<(), Failure> {
    let plan = logtrim_host::output::Plan::with_inputs(inputs.iter().flatten().copied());
    for f in files.iter().flatten() {
        plan.file(f).map_err(Failure::input)?;
    }
    for d in dirs.iter().flatten() {
        plan.dir(d).map_err(Failure::input)?;
    }
    Ok(())
}

/// Removes every temporary file in flight and exits with 128 + the signal on SIGINT or SIGTERM.
fn clean_up_on_signals() {
    use signal_hook::consts::{SIGINT, SIGTERM};
    match signal_hook::iterator::Signals::new([SIGINT, SIGTERM]) {
        Ok(mut signals) => {
            std::thread::spawn(move || {
                if let Some(sig) = signals.forever().next() {
                    logtrim_host::output::remove_in_flight_and_exit(128 + sig);
                }
            });
        }
        Err(e) => note!("logtrim: warning: cannot watch for SIGINT/SIGTERM ({e}): an interrupted run may leave temporary files"),
    }
}

/// The command line, or the exit of `--help`, `--version` and usage errors (their text written without a
/// panic; a closed pipe or a full device is reported as for any verb).
fn parse() -> Result<Cli, ExitCode> {
    Cli::try_parse().map_err(|e| {
        let code = e.exit_code();
        let written = if e.use_stderr() {
            let _ = e.print();
            Ok(())
        } else {
            out::print(format_args!("{}", e.render())).and_then(|()| out::flush())
        };
        match written {
            Ok(()) => ExitCode::from(u8::try_from(code).unwrap_or(2)),
            Err(f) => finish(f),
        }
    })
}

fn finish(f: Failure) -> ExitCode {
    if !f.message.is_empty() {
        note!("logtrim: {}", f.message);
    }
    ExitCode::from(f.code)
}

fn info() -> Result<(), Failure> {
    say!("logtrim {}", env!("CARGO_PKG_VERSION"));
    say!("calibration files: {} version {}", logtrim_host::calfile::FORMAT, logtrim_host::calfile::VERSION);
    say!(
        "calibration images: format version {}, {} bytes with the f32 model",
        logtrim::image::layout::header::VERSION_VALUE,
        logtrim::image::layout::F32_IMAGE_LEN
    );
    Ok(())
}

fn main() -> ExitCode {
    let cli = match parse() {
        Ok(cli) => cli,
        Err(code) => return code,
    };
    clean_up_on_signals();
    // A malformed SOURCE_DATE_EPOCH is refused before anything is stamped with the wrong time.
    if let Err(e) = stamp::checked() {
        return finish(Failure::input(e));
    }
    let result: Result<(), Failure> = match cli.command {
        Command::Info => info(),
        Command::Simulate(args) => simulate::run(args),
        Command::Demo(args) => demo::run(args),
        Command::Fit(args) => fit::run(args),
        Command::Characterise(args) => population::run_characterise(args),
        Command::Plan(args) => population::run_plan(args),
        Command::Apply(args) => apply::run(args),
        Command::Image(args) => image::run(args),
        Command::Inspect(args) => inspect::run(args),
        Command::Plot(args) => plot::run(args),
        Command::Budget(args) => budget::run(args),
        Command::Sensor(args) => sensor::run(args),
        Command::Verify(args) => verify::run(&args),
        Command::Emit(args) => emit::run(&args),
        Command::CLibrary(args) => emit::run_c_library(&args),
        Command::Trim(args) => trim::run(args),
        Command::Blank(args) => blank::run(args),
    };
    match result.and_then(|()| out::flush()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => finish(f),
    }
}
