//! Fixtures shared by the fixed-path tests, benches and examples.
#![allow(dead_code)]

pub mod ntc;
pub mod units;
