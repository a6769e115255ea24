//! Fixtures shared by the fixed-path tests, benches and examples.
#![allow(dead_code)]

pub mod cc;
pub mod fitted;
pub mod ntc;
pub mod samples;
pub mod units;
