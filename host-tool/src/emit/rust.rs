//! Rust source for firmware: `const` arrays and a `const FixedCalibration<'static>` borrowing them, to be
//! brought in with `include!(concat!(env!("OUT_DIR"), "/unit.rs"))` from a build script's output. The items
//! are `pub`, named `LOGTRIM_*`; wrap the `include!` in a module to namespace several units.
//!
//! A build script (with `logtrim-host` as a build dependency) does what `logtrim emit --format rust` does:
//!
//! ```no_run
//! # fn main() -> Result<(), Box<dyn std::error::Error>> {
//! use logtrim_host::{calfile::CalFile, emit, tables};
//! let file = CalFile::load("unit.json".as_ref())?;
//! let t = tables::build(&file.calibration, None, &tables::TableOptions::default())?;
//! let text = emit::rust::render(&t, &emit::Provenance { unit: file.unit.clone(), source: None });
//! let out = std::path::PathBuf::from(std::env::var("OUT_DIR")?).join("unit.rs");
//! logtrim_host::output::write_atomic(&out, text.as_bytes())?;
//! println!("cargo:rerun-if-changed=unit.json");
//! # Ok(()) }
//! ```
//!
//! and the firmware writes `mod unit { include!(concat!(env!("OUT_DIR"), "/unit.rs")); }` and corrects
//! with `unit::LOGTRIM_FIXED.correct(code, temp_mc)`.
//!
//! A firmware that renames the dependency (`lt = { package = "logtrim", .. }`) or reaches it through a
//! re-export renders with [`render_with_crate`] and its path (`logtrim emit --crate-path lt`).
//!
//! [`universal_source`] renders the firmware crate's own `fixed/universal.rs` (the same for every unit).

use super::{banner, number_lines, Provenance};
use crate::tables::{FixedTables, TableError};
use logtrim::error::SensorFault;
use logtrim::fixed::FixedHeader;

/// The path of the firmware crate in a firmware that renames it or reaches it through a re-export: `lt`,
/// `::logtrim`, `crate::deps::logtrim`. Checked once ([`CratePath::parse`]); the default is `logtrim`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CratePath(String);

/// A crate path that is not a Rust path.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error(
    "crate path {path:?}: {reason} (expected a Rust path such as `logtrim`, `lt` or `crate::deps::logtrim`)"
)]
pub struct CratePathError {
    /// The text given.
    pub path: String,
    /// What is wrong with it.
    pub reason: &'static str,
}

impl CratePath {
    /// Checks a path: identifiers joined by `::`, optionally starting with `::`.
    pub fn parse(path: &str) -> Result<CratePath, CratePathError> {
        let err = |reason| CratePathError { path: path.to_string(), reason };
        let body = path.strip_prefix("::").unwrap_or(path);
        for segment in body.split("::") {
            let mut chars = segment.chars();
            match chars.next() {
                None => return Err(err("an empty segment")),
                Some(c) if !(c == '_' || c.is_ascii_alphabetic()) => {
                    return Err(err("a segment that does not start with a letter or '_'"))
                }
                _ => {}
            }
            if segment == "_" || !chars.all(|c| c == '_' || c.is_ascii_alphanumeric()) {
                return Err(err("a segment that is not an identifier"));
            }
        }
        Ok(CratePath(path.to_string()))
    }

    /// The path as written.
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

impl Default for CratePath {
    fn default() -> Self {
        CratePath("logtrim".to_string())
    }
}

impl std::str::FromStr for CratePath {
    type Err = CratePathError;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        CratePath::parse(s)
    }
}

fn fault(k: &str, f: SensorFault) -> String {
    let name = match f {
        SensorFault::Open => "Open",
        SensorFault::Short => "Short",
        _ => "OutOfModelRange",
    };
    format!("{k}::error::SensorFault::{name}")
}

fn array<T: std::fmt::Display>(out: &mut String, name: &str, ty: &str, values: &[T], per_line: usize) {
    out.push_str(&format!("pub const {name}: [{ty}; {}] = [\n", values.len()));
    out.push_str(&number_lines(values, per_line, "    "));
    out.push_str("];\n");
}

fn header_literal(k: &str, h: &FixedHeader) -> String {
    format!(
        "{k}::fixed::FixedHeader {{
        layout: {},
        adc_max_code: {},
        rail_margin: {},
        temp_min: {},
        temp_max: {},
        temp_lo: {},
        temp_hi: {},
        t_knots: {},
        t_origin: {},
        t_step_log2: {},
        offset_frac: {},
        inv_slope_frac: {},
        bias_bend: {},
        sensitivity_limit: {},
        xa_knots: {},
        xa_origin: {},
        xa_step_log2: {},
        residual_frac: {},
        x_min: {},
        x_max: {},
    }}",
        h.layout,
        h.adc_max_code,
        h.rail_margin,
        h.temp_min,
        h.temp_max,
        h.temp_lo,
        h.temp_hi,
        h.t_knots,
        h.t_origin,
        h.t_step_log2,
        h.offset_frac,
        h.inv_slope_frac,
        h.bias_bend,
        h.sensitivity_limit,
        h.xa_knots,
        h.xa_origin,
        h.xa_step_log2,
        h.residual_frac,
        h.x_min,
        h.x_max
    )
}

/// Rust source of a unit's tables, naming the firmware crate `logtrim`.
pub fn render(t: &FixedTables, prov: &Provenance) -> String {
    render_with_crate(t, prov, &CratePath::default())
}

/// Rust source of a unit's tables, naming the firmware crate by `krate`.
pub fn render_with_crate(t: &FixedTables, prov: &Provenance, krate: &CratePath) -> String {
    let k = krate.as_str();
    let mut out = format!("// {}\n", banner());
    if let Some(u) = &prov.unit {
        out.push_str(&format!("// unit: {u}\n"));
    }
    if let Some(s) = &prov.source {
        out.push_str(&format!("// from: {s}\n"));
    }
    out.push_str(&format!("// {} bytes of tables; formats in the docs of `logtrim::fixed`.\n\n", t.bytes()));
    let stride = usize::from(t.header.xa_knots) + 2;
    array(&mut out, "LOGTRIM_OFFSET", "i32", &t.offset, 6);
    array(&mut out, "LOGTRIM_INV_SLOPE", "i32", &t.inv_slope, 6);
    array(&mut out, "LOGTRIM_LN_BIAS", "i32", &t.ln_bias, 6);
    array(&mut out, "LOGTRIM_U_MIN", "i32", &t.u_min, 6);
    out.push_str(&format!("/// r(x̃, T): {} rows of {stride}.\n", t.residual.len() / stride.max(1)));
    array(&mut out, "LOGTRIM_RESIDUAL", "i16", &t.residual, stride.min(14));
    let sensor = match &t.sensor {
        Some(s) => {
            array(&mut out, "LOGTRIM_SENSOR", "i32", &s.knots, 6);
            format!(
                "Some({k}::fixed::SensorTable {{
        code_lo: {},
        code_hi: {},
        step_log2: {},
        fault_below: {},
        far_below_code: {},
        fault_far_below: {},
        fault_above: {},
        far_above_code: {},
        fault_far_above: {},
        knots: &LOGTRIM_SENSOR,
    }})",
                s.code_lo,
                s.code_hi,
                s.step_log2,
                fault(k, s.fault_below),
                s.far_below_code,
                fault(k, s.fault_far_below),
                fault(k, s.fault_above),
                s.far_above_code,
                fault(k, s.fault_far_above)
            )
        }
        None => "None".to_string(),
    };
    out.push_str(&format!(
        "
/// The unit's fixed-point calibration.
pub const LOGTRIM_FIXED: {k}::fixed::FixedCalibration<'static> = {k}::fixed::FixedCalibration {{
    header: {},
    offset: &LOGTRIM_OFFSET,
    inv_slope: &LOGTRIM_INV_SLOPE,
    ln_bias: &LOGTRIM_LN_BIAS,
    u_min: &LOGTRIM_U_MIN,
    residual: &LOGTRIM_RESIDUAL,
    sensor: {sensor},
}};
",
        header_literal(k, &t.header)
    ));
    out
}

/// The firmware crate's `fixed/universal.rs`: the bias-bend and `e^(j/64)` tables.
pub fn universal_source() -> Result<String, TableError> {
    use logtrim::fixed::transcend::BEND_STRIDE;
    let bend = crate::tables::universal_bend()?;
    let exp64 = crate::tables::universal_exp64();
    let mut out = format!("// {}\n", banner());
    out.push_str(
        "//! The universal tables of the fixed path, the same for every unit (generated on the host by
//! `logtrim_host::tables::universal_bend` and `universal_exp64`; a host test regenerates this file and
//! compares).
//!
//! * [`BEND`]: control points of `G(v) = ln(1 − e^(−v))`, Q24 (full scale), one row per octave of v (see
//!   [`super::transcend`]), fitted by least squares to the exact function.
//! * [`EXP64`]: `e^(j/64)` for j = 0..=44, Q30.

use super::transcend::{BEND_LEN, EXP64_LEN};

/// Bytes of flash the universal tables take.
pub const BYTES: usize = 4 * (BEND_LEN + EXP64_LEN);

/// `G(v)` control points, one row of `BEND_STRIDE` per octave.
#[rustfmt::skip]
pub static BEND: [i32; BEND_LEN] = [
",
    );
    out.push_str(&number_lines(&bend, BEND_STRIDE, "    "));
    out.push_str("];\n\n/// `e^(j/64)`, Q30.\n#[rustfmt::skip]\npub static EXP64: [i32; EXP64_LEN] = [\n");
    out.push_str(&number_lines(&exp64, 9, "    "));
    out.push_str("];\n");
    Ok(out)
}
