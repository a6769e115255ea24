//! Standard output and standard error without panics (`println!` panics when its write fails).
//!
//! Every verb prints through `say!` and `say_raw!`, which hand a failed
//! write up as a [`Failure`]:
//!
//! * a closed pipe (`logtrim inspect UNIT.bin | head -1`) ends the run quietly with exit code 141, the code
//!   a shell reports for a process ended by SIGPIPE: nothing more is printed, files already written stay
//!   valid, and the run never passes for a complete one;
//! * any other write error (`logtrim info > /dev/full`) is exit 2 with a message on standard error.
//!
//! Notes and warnings go to standard error through `note!`, which ignores a failed write:
//! there is nowhere left to report it.

use std::fmt;
use std::io::{self, Write};

use crate::Failure;

/// The exit code of a run whose standard output was closed by its reader (128 + SIGPIPE).
pub const BROKEN_PIPE_EXIT: u8 = 141;

/// A failed write to standard output as the run's failure.
pub fn stdout_failure(e: &io::Error) -> Failure {
    if e.kind() == io::ErrorKind::BrokenPipe {
        Failure::quiet(BROKEN_PIPE_EXIT)
    } else {
        Failure::input(format!("writing to standard output: {e}"))
    }
}

/// Writes to standard output.
pub fn print(args: fmt::Arguments<'_>) -> Result<(), Failure> {
    io::stdout().lock().write_fmt(args).map_err(|e| stdout_failure(&e))
}

/// Flushes standard output (what is left after the last newline).
pub fn flush() -> Result<(), Failure> {
    io::stdout().lock().flush().map_err(|e| stdout_failure(&e))
}

/// Writes to standard error, ignoring a failure.
pub fn note(args: fmt::Arguments<'_>) {
    let _ = io::stderr().lock().write_fmt(args);
}

/// `println!` that returns a failed write from the enclosing function (a [`Failure`]).
macro_rules! say {
    () => { $crate::out::print(format_args!("\n"))? };
    ($($t:tt)*) => { $crate::out::print(format_args!("{}\n", format_args!($($t)*)))? };
}

/// `print!` that returns a failed write from the enclosing function (a [`Failure`]).
macro_rules! say_raw {
    ($($t:tt)*) => { $crate::out::print(format_args!($($t)*))? };
}

/// `eprintln!` that never panics.
macro_rules! note {
    ($($t:tt)*) => { $crate::out::note(format_args!("{}\n", format_args!($($t)*))) };
}
