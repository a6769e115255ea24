//! A C99 header for firmware in C: include guards, the unit's tables and the universal tables as `static
//! const` arrays, a struct describing them, and a portable integer-only evaluator as `static inline`
//! functions that give bit-identical results to the Rust fixed path (`logtrim::fixed`). One header per unit
//! and translation unit; the names start with `lt_`/`LT_`.
//!
//! Portability: only `<stdint.h>` is needed. Right shifts of negative values (implementation-defined in
//! C99) go through `lt_asr`, left shifts only ever see non-negative values, divisions have non-negative
//! operands, and the overflow bounds are those of the Rust code (documented in `logtrim::fixed`), so no
//! operation is undefined for any input or table content. The table lengths are in the struct and every
//! access is checked against them, as the Rust slices are.

use std::fmt::Write;

use super::{banner, number_lines, Provenance};
use crate::tables::FixedTables;
use logtrim::error::SensorFault;
use logtrim::Unit;

/// Status codes of the C evaluator, in the order of the generated `enum lt_status`, each with what it means.
pub const STATUSES: [(&str, &str); 11] = [
    ("LT_OK", "a value"),
    ("LT_CODE_OUT_OF_ADC_RANGE", "code above the converter's largest code"),
    ("LT_SATURATED", "code within the rail margin"),
    ("LT_BELOW_RANGE", "below the calibrated x range, or the sensitivity is too low"),
    ("LT_ABOVE_RANGE", "above the calibrated x range"),
    ("LT_TEMPERATURE_OUT_OF_RANGE", "beyond the calibrated range plus the allowed extrapolation"),
    ("LT_SENSOR_OPEN", "temperature sensor open"),
    ("LT_SENSOR_SHORT", "temperature sensor short"),
    ("LT_SENSOR_OUT_OF_MODEL_RANGE", "temperature sensor outside its model's range"),
    ("LT_BAD_TABLE", "the tables are inconsistent"),
    ("LT_NOT_CALIBRATED", "no sensor table for a raw temperature code"),
];

/// The C status code of a Rust result (the index into [`STATUSES`]).
pub fn status_code<T>(r: &Result<T, logtrim::Error>) -> usize {
    use logtrim::Error as E;
    match r {
        Ok(_) => 0,
        Err(E::CodeOutOfAdcRange { .. }) => 1,
        Err(E::Saturated { .. }) => 2,
        Err(E::BelowRange) => 3,
        Err(E::AboveRange) => 4,
        Err(E::TemperatureOutOfRange { .. }) => 5,
        Err(E::Sensor(SensorFault::Open)) => 6,
        Err(E::Sensor(SensorFault::Short)) => 7,
        Err(E::Sensor(_)) => 8,
        Err(E::NotCalibrated) => 10,
        Err(_) => 9,
    }
}

fn fault(f: SensorFault) -> &'static str {
    match f {
        SensorFault::Open => "LT_SENSOR_OPEN",
        SensorFault::Short => "LT_SENSOR_SHORT",
        _ => "LT_SENSOR_OUT_OF_MODEL_RANGE",
    }
}

fn array<T: Copy + Into<i64>>(out: &mut String, name: &str, ty: &str, values: &[T], per_line: usize) {
    // A zero-length array is not C99: keep one unused element.
    if values.is_empty() {
        let _ = writeln!(out, "static const {ty} {name}[1] = {{ 0 }};");
        return;
    }
    let _ = writeln!(out, "static const {ty} {name}[{}] = {{", values.len());
    let lits: Vec<String> = values.iter().map(|&v| cint(v.into())).collect();
    out.push_str(&number_lines(&lits, per_line, "    "));
    out.push_str("};\n");
}

/// The C name of an output unit: `LT_` and the variant's name in capitals with underscores.
fn unit_name(u: Unit) -> String {
    let mut out = String::from("LT");
    for ch in format!("{u:?}").chars() {
        if ch.is_ascii_uppercase() {
            out.push('_');
        }
        out.push(ch.to_ascii_uppercase());
    }
    out
}

/// The constants and enums the evaluator shares with `logtrim::fixed`, rendered from the Rust items
/// themselves so that the two cannot drift apart.
fn shared_definitions() -> String {
    use logtrim::fixed::{self as f, transcend as t};
    let mut out =
        String::from("/* ---- constants shared with logtrim::fixed (rendered from its items) ---- */\n");
    let defs: [(&str, String, &str); 30] = [
        ("LT_LAYOUT_VERSION", format!("{}u", f::LAYOUT_VERSION), "fixed::LAYOUT_VERSION"),
        ("LT_THETA_FRAC", format!("{}", f::THETA_FRAC), "fixed::THETA_FRAC"),
        ("LT_X_FRAC", format!("{}u", f::X_FRAC), "fixed::X_FRAC"),
        ("LT_COLUMN_GUARD", format!("{}u", f::COLUMN_GUARD), "fixed::COLUMN_GUARD"),
        ("LT_WINDOWS_LOG2", format!("{}u", f::interp::WINDOWS_LOG2), "fixed::interp::WINDOWS_LOG2"),
        ("LT_WINDOWS", format!("{}u", f::interp::WINDOWS), "fixed::interp::WINDOWS"),
        ("LT_CODE_LIMIT", format!("{}u", f::CODE_LIMIT), "fixed::CODE_LIMIT"),
        ("LT_OFFSET_MIN", format!("({})", f::OFFSET_RANGE.0), "fixed::OFFSET_RANGE"),
        ("LT_OFFSET_MAX", format!("{}", f::OFFSET_RANGE.1), "fixed::OFFSET_RANGE"),
        ("LT_INV_SLOPE_LIMIT", format!("{}LL", f::INV_SLOPE_LIMIT), "fixed::INV_SLOPE_LIMIT"),
        ("LT_THETA_LIMIT", format!("{}", f::THETA_LIMIT), "fixed::THETA_LIMIT"),
        ("LT_BIAS_LIMIT", format!("{}", f::BIAS_LIMIT), "fixed::BIAS_LIMIT"),
        ("LT_T_STEP_MIN", format!("{}u", f::T_STEP_LOG2_RANGE.0), "fixed::T_STEP_LOG2_RANGE"),
        ("LT_T_STEP_MAX", format!("{}u", f::T_STEP_LOG2_RANGE.1), "fixed::T_STEP_LOG2_RANGE"),
        ("LT_XA_STEP_MIN", format!("{}u", f::XA_STEP_LOG2_RANGE.0), "fixed::XA_STEP_LOG2_RANGE"),
        ("LT_XA_STEP_MAX", format!("{}u", f::XA_STEP_LOG2_RANGE.1), "fixed::XA_STEP_LOG2_RANGE"),
        ("LT_RESIDUAL_FRAC_MIN", format!("{}u", f::RESIDUAL_FRAC_RANGE.0), "fixed::RESIDUAL_FRAC_RANGE"),
        ("LT_RESIDUAL_FRAC_MAX", format!("{}u", f::RESIDUAL_FRAC_RANGE.1), "fixed::RESIDUAL_FRAC_RANGE"),
        ("LT_ROW_CAPACITY", format!("{}u", f::ROW_CAPACITY), "fixed::ROW_CAPACITY"),
        ("LT_STAGE_MEMO", format!("{}u", f::STAGE_MEMO), "fixed::STAGE_MEMO"),
        (
            "LT_BEND_FLOOR_BIT",
            format!("{}u", f::X_FRAC as i32 + t::BEND_FIRST_EXP),
            "X_FRAC + transcend::BEND_FIRST_EXP",
        ),
        ("LT_BEND_OCTAVES", format!("{}u", t::BEND_OCTAVES), "transcend::BEND_OCTAVES"),
        ("LT_BEND_SEGMENTS", format!("{}u", t::BEND_SEGMENTS), "transcend::BEND_SEGMENTS"),
        ("LT_BEND_STRIDE", format!("{}u", t::BEND_STRIDE), "transcend::BEND_STRIDE"),
        ("LT_BEND_LEN", format!("{}u", t::BEND_LEN), "transcend::BEND_LEN"),
        ("LT_EXP64_LOG2", format!("{}u", t::EXP64_LOG2), "transcend::EXP64_LOG2"),
        ("LT_EXP64_LEN", format!("{}u", t::EXP64_LEN), "transcend::EXP64_LEN"),
        ("LT_HALF_INV_LN2_Q16", format!("{}u", t::HALF_INV_LN2_Q16), "transcend::HALF_INV_LN2_Q16"),
        ("LT_LN2_Q31", format!("{}", t::LN2_Q31), "transcend::LN2_Q31"),
        ("LT_INV_LN10_Q32", format!("{}", f::INV_LN10_Q32), "fixed::INV_LN10_Q32"),
    ];
    for (name, value, from) in defs {
        let _ = writeln!(out, "#define {name} {value} /* {from} */");
    }
    let _ = writeln!(
        out,
        "#define LT_DB10_FRAC_Q32 {} /* fixed::DB10_FRAC_Q32 */",
        logtrim::fixed::DB10_FRAC_Q32
    );
    out.push_str("#define LT_NO_WINDOW 0xffffffffu /* a stage cache without a window */\n\n");
    out.push_str("/* The outcome of a correction (the Rust path's Result: LT_OK or the error's kind). */\ntypedef enum lt_status {\n");
    for (i, (name, doc)) in STATUSES.iter().enumerate() {
        let sep = if i + 1 < STATUSES.len() { "," } else { "" };
        let _ = writeln!(out, "    {name}{}{sep} /* {doc} */", if i == 0 { " = 0" } else { "" });
    }
    out.push_str("} lt_status;\n\n/* Output units, in the order of logtrim::Unit::ALL. */\ntypedef enum lt_unit_kind {\n");
    for (i, u) in Unit::ALL.iter().enumerate() {
        let sep = if i + 1 < Unit::ALL.len() { "," } else { "" };
        let _ = writeln!(
            out,
            "    {}{}{sep} /* Q{} */",
            unit_name(*u),
            if i == 0 { " = 0" } else { "" },
            logtrim::fixed::value_frac_bits(*u)
        );
    }
    out.push_str("} lt_unit_kind;\n\n");
    out
}

const TYPES: &str = include_str!("c_types.h");
const FUNCTIONS: &str = include_str!("c_functions.h");

/// A C integer literal (INT32_MIN has no literal of its own type).
fn cint(v: i64) -> String {
    if v == i64::from(i32::MIN) {
        "(-2147483647 - 1)".to_string()
    } else {
        v.to_string()
    }
}

/// The C header of a unit's tables.
pub fn render(t: &FixedTables, prov: &Provenance) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "/* {} */", banner());
    if let Some(u) = &prov.unit {
        let _ = writeln!(out, "/* unit: {} */", u.replace("*/", "* /"));
    }
    if let Some(s) = &prov.source {
        let _ = writeln!(out, "/* from: {} */", s.replace("*/", "* /"));
    }
    let _ = writeln!(
        out,
        "/* {} bytes of unit tables and {} of universal tables; formats in the docs of logtrim::fixed. */",
        t.bytes(),
        logtrim::fixed::universal::BYTES
    );
    out.push_str("#ifndef LOGTRIM_FIXED_UNIT_H\n#define LOGTRIM_FIXED_UNIT_H\n\n#include <stdint.h>\n\n");
    out.push_str(&shared_definitions());
    out.push_str(TYPES);
    out.push_str("\n/* ---- universal tables (the same for every unit) ---- */\n");
    array(
        &mut out,
        "lt_bend",
        "int32_t",
        &logtrim::fixed::universal::BEND,
        logtrim::fixed::transcend::BEND_STRIDE,
    );
    array(&mut out, "lt_exp64", "int32_t", &logtrim::fixed::universal::EXP64, 9);
    out.push('\n');
    out.push_str(FUNCTIONS);
    out.push_str("\n/* ---- this unit's tables ---- */\n");
    let stride = usize::from(t.header.xa_knots) + 2;
    array(&mut out, "lt_unit_offset", "int32_t", &t.offset, 6);
    array(&mut out, "lt_unit_inv_slope", "int32_t", &t.inv_slope, 6);
    array(&mut out, "lt_unit_ln_bias", "int32_t", &t.ln_bias, 6);
    array(&mut out, "lt_unit_u_min", "int32_t", &t.u_min, 6);
    array(&mut out, "lt_unit_residual", "int16_t", &t.residual, stride.min(14));
    let empty: Vec<i32> = Vec::new();
    let sensor_knots = t.sensor.as_ref().map_or(&empty, |s| &s.knots);
    array(&mut out, "lt_unit_sensor", "int32_t", sensor_knots, 6);
    let h = &t.header;
    let b = |v: bool| if v { 1 } else { 0 };
    let _ = writeln!(out, "\n/* The unit's calibration. */\nstatic const lt_fixed LT_UNIT = {{");
    let _ = writeln!(out, "    {}u, {}u, {}u,", h.layout, h.adc_max_code, h.rail_margin);
    let i = |v: i32| cint(i64::from(v));
    let _ = writeln!(out, "    {}, {}, {}, {},", i(h.temp_min), i(h.temp_max), i(h.temp_lo), i(h.temp_hi));
    let _ = writeln!(out, "    {}u, {}, {}u,", h.t_knots, i(h.t_origin), h.t_step_log2);
    let _ = writeln!(
        out,
        "    {}u, {}u, {}, {},",
        h.offset_frac,
        h.inv_slope_frac,
        b(h.bias_bend),
        b(h.sensitivity_limit)
    );
    let _ =
        writeln!(out, "    {}u, {}, {}u, {}u,", h.xa_knots, i(h.xa_origin), h.xa_step_log2, h.residual_frac);
    let _ = writeln!(out, "    {}, {},", i(h.x_min), i(h.x_max));
    let _ = writeln!(out, "    lt_unit_offset, {}u,", t.offset.len());
    let _ = writeln!(out, "    lt_unit_inv_slope, {}u,", t.inv_slope.len());
    let _ = writeln!(out, "    lt_unit_ln_bias, {}u,", t.ln_bias.len());
    let _ = writeln!(out, "    lt_unit_u_min, {}u,", t.u_min.len());
    let _ = writeln!(out, "    lt_unit_residual, {}u,", t.residual.len());
    match &t.sensor {
        Some(s) => {
            let _ = writeln!(out, "    1, {}u, {}u, {}u,", s.code_lo, s.code_hi, s.step_log2);
            let _ = writeln!(
                out,
                "    {}, {}u, {}, {}, {}u, {},",
                fault(s.fault_below),
                s.far_below_code,
                fault(s.fault_far_below),
                fault(s.fault_above),
                s.far_above_code,
                fault(s.fault_far_above)
            );
            let _ = writeln!(out, "    lt_unit_sensor, {}u", s.knots.len());
        }
        None => {
            out.push_str("    0, 0u, 0u, 0u,\n");
            out.push_str("    LT_SENSOR_OUT_OF_MODEL_RANGE, 0u, LT_SENSOR_OUT_OF_MODEL_RANGE, LT_SENSOR_OUT_OF_MODEL_RANGE, 0u, LT_SENSOR_OUT_OF_MODEL_RANGE,\n");
            out.push_str("    lt_unit_sensor, 0u\n");
        }
    }
    out.push_str("};\n\n#endif /* LOGTRIM_FIXED_UNIT_H */\n");
    out
}
