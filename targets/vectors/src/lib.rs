//! Test vectors that carry logtrim's core arithmetic from the host to an emulated core, to show that the
//! target computes bit for bit what the host computes.
//!
//! | module | owns |
//! |---|---|
//! | [`format`] | the vector file: the units' calibration images, then fixed-size records (inputs, expected outcome) |
//! | [`eval`] | the evaluations, one per [`eval::Kind`]: the same code on the host and on the target |
//! | [`digest`] | an [`eval::Outcome`]'s digest: CRC-64 of the `Debug` text of a whole result |
//! | `generate` | (feature `generate`) the host's generator: chooses inputs, runs [`eval`], writes the file |
//!
//! The host writes the file with `cargo run -p logtrim-vectors --features generate --bin make-vectors`;
//! `targets/qemu` includes it, runs every record on the emulated core and reports each mismatch by
//! semihosting (`scripts/qemu-tests.sh`).
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

#[cfg(feature = "std")]
extern crate std;

pub mod digest;
pub mod eval;
pub mod format;
#[cfg(feature = "generate")]
pub mod generate;
