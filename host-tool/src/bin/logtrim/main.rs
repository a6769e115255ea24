//! The `logtrim` command-line tool: a thin layer over the `logtrim-host` library.
//!
//! Exit codes: 0 success; 1 a check failed (verification over its bound, a bad image, a fit that was
//! refused); 2 bad usage or bad input (unreadable file, malformed data).

use std::process::ExitCode;

use clap::{Parser, Subcommand};

mod emit;
mod verify;

/// Calibrate, verify and emit firmware tables for log-ratio front ends.
#[derive(Parser)]
#[command(name = "logtrim", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Print the version and the formats this build reads and writes.
    Info,
    /// Verify the fixed-point and f32 paths against the f64 reference over every code and temperature.
    Verify(verify::VerifyArgs),
    /// Emit the unit's fixed-point tables as Rust, C or JSON.
    Emit(emit::EmitArgs),
}

/// An error of the binary: a message and the exit code it maps to.
pub struct Failure {
    /// What went wrong, for the terminal.
    pub message: String,
    /// 1 for a failed check, 2 for bad usage or input.
    pub code: u8,
}

impl Failure {
    /// Bad input or usage (exit 2).
    pub fn input(message: impl std::fmt::Display) -> Failure {
        Failure { message: message.to_string(), code: 2 }
    }
    /// A check that failed (exit 1).
    pub fn check(message: impl std::fmt::Display) -> Failure {
        Failure { message: message.to_string(), code: 1 }
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result: Result<(), Failure> = match cli.command {
        Command::Info => {
            println!("logtrim {}", env!("CARGO_PKG_VERSION"));
            println!(
                "calibration files: {} version {}",
                logtrim_host::calfile::FORMAT,
                logtrim_host::calfile::VERSION
            );
            Ok(())
        }
        Command::Verify(args) => verify::run(&args),
        Command::Emit(args) => emit::run(&args),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            eprintln!("logtrim: {}", f.message);
            ExitCode::from(f.code)
        }
    }
}
