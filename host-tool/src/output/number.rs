//! How the tool prints a number: the one home of the rule that a figure never shows a negative zero
//! (`-0.00000`, `-0.0`, `-0e0`). A value that rounds to zero at the precision printed is printed without a
//! sign, whichever side of zero it came from.
//!
//! * Text (reports, tables, messages): [`Num`], a wrapper that takes the format's precision, width,
//!   alignment and `+` flag, in `{}` (fixed) or `{:e}` (scientific): `format!("{:+.5}", Num(x))`.
//! * CSV (shortest round-trip digits): [`shortest`].
//! * JSON: [`to_json_pretty`], serde_json's pretty form with a negative zero written `0.0`.

use std::fmt;

/// A number to print: `format!("{:>10.3}", Num(v))` is `format!("{:>10.3}", v)` except that a value printed
/// as zero has no sign (and `+` is not put before a zero).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Num(pub f64);

impl From<f32> for Num {
    fn from(v: f32) -> Num {
        Num(f64::from(v))
    }
}

/// Whether a printed number is zero at the digits shown (its mantissa has no digit but 0).
fn shows_zero(s: &str) -> bool {
    let mantissa = s.split(['e', 'E']).next().unwrap_or(s);
    mantissa.chars().any(|c| c.is_ascii_digit())
        && mantissa.chars().all(|c| matches!(c, '0' | '.' | '-' | '+'))
}

impl Num {
    fn render(&self, f: &fmt::Formatter<'_>, exp: bool) -> String {
        let v = self.0;
        let s = match (f.precision(), exp) {
            (Some(p), false) => format!("{v:.p$}"),
            (None, false) => format!("{v}"),
            (Some(p), true) => format!("{v:.p$e}"),
            (None, true) => format!("{v:e}"),
        };
        if shows_zero(&s) {
            s.trim_start_matches('-').to_string()
        } else if f.sign_plus() && !s.starts_with('-') && !v.is_nan() {
            format!("+{s}")
        } else {
            s
        }
    }

    fn pad(f: &mut fmt::Formatter<'_>, s: &str) -> fmt::Result {
        match (f.width(), f.align()) {
            (None, _) => f.write_str(s),
            (Some(w), Some(fmt::Alignment::Left)) => write!(f, "{s:<w$}"),
            (Some(w), Some(fmt::Alignment::Center)) => write!(f, "{s:^w$}"),
            (Some(w), _) => write!(f, "{s:>w$}"),
        }
    }
}

impl fmt::Display for Num {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = self.render(f, false);
        Num::pad(f, &s)
    }
}

impl fmt::LowerExp for Num {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = self.render(f, true);
        Num::pad(f, &s)
    }
}

/// The shortest digits that read back as `v` (for CSV), with a negative zero written `0.0`.
pub fn shortest<F: ryu::Float>(buf: &mut ryu::Buffer, v: F) -> &str {
    match buf.format(v) {
        "-0.0" => "0.0",
        s => s,
    }
}

/// serde_json's pretty formatter, writing a negative zero as `0.0` (serde_json writes `-0.0`).
struct UnsignedZeros<'a>(serde_json::ser::PrettyFormatter<'a>);

/// Delegates each named method of the JSON formatter to the pretty one.
macro_rules! delegate {
    ($($name:ident($($arg:ident: $ty:ty),*)),* $(,)?) => {$(
        fn $name<W: ?Sized + std::io::Write>(&mut self, w: &mut W $(, $arg: $ty)*) -> std::io::Result<()> {
            self.0.$name(w $(, $arg)*)
        }
    )*};
}

impl serde_json::ser::Formatter for UnsignedZeros<'_> {
    delegate!(
        begin_array(),
        end_array(),
        begin_array_value(first: bool),
        end_array_value(),
        begin_object(),
        end_object(),
        begin_object_key(first: bool),
        begin_object_value(),
        end_object_value(),
    );

    fn write_f64<W: ?Sized + std::io::Write>(&mut self, w: &mut W, v: f64) -> std::io::Result<()> {
        self.0.write_f64(w, v + 0.0)
    }

    fn write_f32<W: ?Sized + std::io::Write>(&mut self, w: &mut W, v: f32) -> std::io::Result<()> {
        self.0.write_f32(w, v + 0.0)
    }
}

/// Pretty JSON of plain data (two-space indent, keys in the type's order), with no negative zero.
pub fn to_json_pretty<T: serde::Serialize + ?Sized>(value: &T) -> serde_json::Result<String> {
    let mut out = Vec::new();
    let mut ser = serde_json::Serializer::with_formatter(&mut out, UnsignedZeros(Default::default()));
    value.serialize(&mut ser)?;
    // serde_json writes UTF-8 only.
    Ok(String::from_utf8(out).unwrap_or_default())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_value_rounding_to_zero_from_below_prints_without_its_sign() {
        // What std prints (the habit this module exists to break).
        assert_eq!(format!("{:.5}", -1e-7), "-0.00000");
        for (got, want) in [
            (format!("{:.5}", Num(-1e-7)), "0.00000"),
            (format!("{:.5}", Num(-0.0)), "0.00000"),
            (format!("{}", Num(-0.0)), "0"),
            (format!("{:+.5}", Num(-1e-7)), "0.00000"),
            (format!("{:+.5}", Num(1e-7)), "0.00000"),
            (format!("{:>8.2}", Num(-0.004)), "    0.00"),
            (format!("{:<8.2}|", Num(-0.004)), "0.00    |"),
            (format!("{:.3e}", Num(-0.0)), "0.000e0"),
            (format!("{:+.3}", Num(-2.5e-3)), "-0.003"),
            (format!("{:.2e}", Num(-2.5e-3)), "-2.50e-3"),
            (format!("{:+.1}", Num(3.25)), "+3.2"),
            (format!("{:>7.1}", Num(-3.25)), "   -3.2"),
            (format!("{:.1}", Num::from(-0.01f32)), "0.0"),
        ] {
            assert_eq!(got, want);
        }
        // Otherwise exactly std's digits (round half to even on the binary value, as std does).
        for v in [1.0, -1.0, 0.125, -123.456, 6.02e23, -1e-3, -1e-300] {
            if v != -1e-300 {
                assert_eq!(format!("{:.4}", Num(v)), format!("{v:.4}"));
            }
            assert_eq!(format!("{:.4e}", Num(v)), format!("{v:.4e}"));
        }
    }

    #[test]
    fn csv_and_json_write_no_negative_zero() {
        let mut buf = ryu::Buffer::new();
        assert_eq!(shortest(&mut buf, -0.0f64), "0.0");
        assert_eq!(shortest(&mut buf, -0.0f32), "0.0");
        assert_eq!(shortest(&mut buf, -1.5e-9f64), "-1.5e-9");
        #[derive(serde::Serialize)]
        struct Two {
            b: [f64; 3],
            a: f32,
        }
        let two = Two { b: [1.0, -0.0, -2.0], a: -0.0 };
        assert_eq!(serde_json::to_string(&two).unwrap(), r#"{"b":[1.0,-0.0,-2.0],"a":-0.0}"#);
        let pretty = to_json_pretty(&two).unwrap();
        assert_eq!(pretty, "{\n  \"b\": [\n    1.0,\n    0.0,\n    -2.0\n  ],\n  \"a\": 0.0\n}");
        // Otherwise serde_json's own pretty form, byte for byte.
        let plain = Two { b: [1.0, 0.5, -2.0], a: 3.0 };
        assert_eq!(to_json_pretty(&plain).unwrap(), serde_json::to_string_pretty(&plain).unwrap());
    }
}
