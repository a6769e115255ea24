//! # logtrim-host
//!
//! The host side of logtrim: reading chamber data, fitting calibrations, simulating front ends, generating
//! tables and verifying the firmware math. The `logtrim` binary is a thin layer over this library, so a
//! `build.rs` can call the same functions as the CLI.
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub use logtrim;
