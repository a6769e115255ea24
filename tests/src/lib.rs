//! Shared helpers for logtrim's cross-crate checks (`tests/`) and runnable examples (`examples/`).
//!
//! Nothing here is part of the firmware or the host tool: it holds tolerance checks used by the
//! reference tests, the seeded generator tests and benches draw inputs with ([`XorShift64`]), the regular
//! grid correction sweeps run over ([`grid`]), and the published tables that more than one crate's tests
//! check against ([`published`]).
#![forbid(unsafe_code)]
#![deny(missing_docs)]

/// `|got − want| ≤ abs + rel·|want|`: a tolerance check that cannot pass silently for negative values.
pub fn within(got: f64, want: f64, abs: f64, rel: f64) -> bool {
    (got - want).abs() <= abs + rel * want.abs()
}

/// Published reference values that the tests of more than one crate check against, each with its source.
pub mod published {
    /// IEC 60751:2008 Pt100 table (values as given in the project's numerics guide, there marked
    /// "from memory"): (°C, Ω).
    pub const IEC_60751_PT100: [(f64, f64); 8] = [
        (-200.0, 18.5201),
        (-100.0, 60.2558),
        (-50.0, 80.3063),
        (25.0, 109.7347),
        (100.0, 138.5055),
        (200.0, 175.8560),
        (400.0, 247.0920),
        (850.0, 390.4811),
    ];
}

/// A seeded xorshift generator (Marsaglia 2003, shifts 13, 7, 17), so that tests and benches that draw
/// garbage or streams draw the same on every run. Not a source of randomness for anything else.
pub struct XorShift64(pub u64);

impl XorShift64 {
    /// The next 64-bit state (the seed must not be 0).
    #[allow(clippy::should_implement_trait)]
    pub fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }

    /// Uniform in [0, 1): the top 53 bits of [`next`](Self::next).
    pub fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// The points `(t, x)` of a regular grid, `t` outer: `t = lo + span·i/n` for `i = 0..=n` from
/// `t = (lo, span, n)`, and `x` likewise, both ends included (the sweeps a correction is checked over).
pub fn grid(t: (f64, f64, u32), x: (f64, f64, u32)) -> impl Iterator<Item = (f64, f64)> {
    let at = |(lo, span, n): (f64, f64, u32), i: u32| lo + span * f64::from(i) / f64::from(n);
    (0..=t.2).flat_map(move |i| (0..=x.2).map(move |j| (at(t, i), at(x, j))))
}
