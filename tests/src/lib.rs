//! Shared helpers for logtrim's cross-crate checks (`tests/`) and runnable examples (`examples/`).
//!
//! Nothing here is part of the firmware or the host tool: it holds tolerance checks used by the
//! reference tests.
#![forbid(unsafe_code)]
#![deny(missing_docs)]

/// `|got − want| ≤ abs + rel·|want|`: a tolerance check that cannot pass silently for negative values.
pub fn within(got: f64, want: f64, abs: f64, rel: f64) -> bool {
    (got - want).abs() <= abs + rel * want.abs()
}
