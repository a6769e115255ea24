//! Option values checked where clap parses them: each parser refuses NaN, infinities and values outside
//! the option's valid range, and clap names the option in the message (`invalid value 'nan' for
//! '--x-margin <NEPERS>': expected a finite number with 0 ≤ value ≤ 1`).

/// A span of valid values, each end included or not.
#[derive(Debug, Clone, Copy)]
pub struct Span {
    lo: f64,
    hi: f64,
    lo_open: bool,
    hi_open: bool,
}

impl Span {
    /// `lo ≤ value ≤ hi`.
    pub const fn closed(lo: f64, hi: f64) -> Span {
        Span { lo, hi, lo_open: false, hi_open: false }
    }
    /// `lo < value ≤ hi`.
    pub const fn above(lo: f64, hi: f64) -> Span {
        Span { lo, hi, lo_open: true, hi_open: false }
    }
    /// `lo ≤ value < hi`.
    pub const fn below(lo: f64, hi: f64) -> Span {
        Span { lo, hi, lo_open: false, hi_open: true }
    }

    fn contains(&self, v: f64) -> bool {
        let lo_ok = if self.lo_open { v > self.lo } else { v >= self.lo };
        let hi_ok = if self.hi_open { v < self.hi } else { v <= self.hi };
        v.is_finite() && lo_ok && hi_ok
    }

    /// The span in words.
    pub fn describe(&self) -> String {
        let (a, b) = (if self.lo_open { "<" } else { "≤" }, if self.hi_open { "<" } else { "≤" });
        format!("a finite number with {} {a} value {b} {}", self.lo, self.hi)
    }

    /// Checks a value (`text` is how it was written, for the message).
    pub fn check(&self, v: f64, text: &str) -> Result<f64, String> {
        if self.contains(v) {
            Ok(v)
        } else {
            Err(format!("{text} is outside the valid range: expected {}", self.describe()))
        }
    }
}

/// A clap value parser of an f64 within `span`.
pub fn real(span: Span) -> impl Fn(&str) -> Result<f64, String> + Clone + Send + Sync + 'static {
    move |text: &str| {
        let t = text.trim();
        let v: f64 = t.parse().map_err(|_| format!("not a number: expected {}", span.describe()))?;
        span.check(v, t)
    }
}

/// A clap value parser of an f32 within `span` (checked as the f32 the value becomes).
pub fn real32(span: Span) -> impl Fn(&str) -> Result<f32, String> + Clone + Send + Sync + 'static {
    move |text: &str| {
        let t = text.trim();
        let v: f64 = t.parse().map_err(|_| format!("not a number: expected {}", span.describe()))?;
        span.check(f64::from(v as f32), t).map(|v| v as f32)
    }
}

/// The plausible span of a temperature, °C (as for readings).
pub const CELSIUS: Span =
    Span::closed(logtrim_host::data::TEMPERATURE_SPAN_C.0, logtrim_host::data::TEMPERATURE_SPAN_C.1);
/// The plausible span of a ratio.
pub const RATIO: Span = Span::closed(logtrim_host::data::RATIO_SPAN.0, logtrim_host::data::RATIO_SPAN.1);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_outside_the_span_and_non_numbers_are_refused() {
        let p = real(Span::below(0.0, 1.0));
        assert_eq!(p("0"), Ok(0.0));
        assert_eq!(p(" 0.5 "), Ok(0.5));
        for bad in ["1", "nan", "NaN", "inf", "-inf", "-1e-300", "2", "1e30", "x", ""] {
            let e = p(bad).unwrap_err();
            assert!(e.contains("0 ≤ value < 1"), "{bad}: {e}");
        }
        let q = real(Span::above(0.0, 100.0));
        assert!(q("0").is_err() && q("-1").is_err() && q("100").is_ok());
        // The f32 the value becomes is checked: 1e39 overflows f32.
        let r = real32(Span::closed(-1e30, 1e30));
        assert!(r("1e39").is_err() && r("1e29").is_ok());
    }
}
