//! A firmware-shaped crate whose `Cargo.toml` renames the firmware crate to `lt`: the tables its build
//! script emits with the crate path `lt` compile here, where the name `logtrim` does not exist.
#![no_std]
#![forbid(unsafe_code)]

/// The dyeline unit's tables, emitted by `build.rs`.
pub mod unit {
    include!(concat!(env!("OUT_DIR"), "/unit.rs"));
}
