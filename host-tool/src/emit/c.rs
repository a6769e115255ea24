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

/// Status codes of the C evaluator, in the order of the generated `enum lt_status`.
pub const STATUS_NAMES: [&str; 11] = [
    "LT_OK",
    "LT_CODE_OUT_OF_ADC_RANGE",
    "LT_SATURATED",
    "LT_BELOW_RANGE",
    "LT_ABOVE_RANGE",
    "LT_TEMPERATURE_OUT_OF_RANGE",
    "LT_SENSOR_OPEN",
    "LT_SENSOR_SHORT",
    "LT_SENSOR_OUT_OF_MODEL_RANGE",
    "LT_BAD_TABLE",
    "LT_NOT_CALIBRATED",
];

/// The C status code of a Rust result (the index into [`STATUS_NAMES`]).
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
    out.push_str(TYPES);
    out.push_str("\n/* ---- universal tables (the same for every unit) ---- */\n");
    array(
        &mut out,
        "lt_bend",
        "int32_t",
        &logtrim::fixed::universal::BEND,
        logtrim::fixed::transcend::BEND_STRIDE,
    );
    array(&mut out, "lt_exp2", "int32_t", &logtrim::fixed::universal::EXP2, 8);
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
    let _ = writeln!(out, "    {}u, {}, {},", h.t_knots, i(h.t_origin), i(h.t_inv_step));
    let _ = writeln!(
        out,
        "    {}u, {}u, {}, {},",
        h.offset_frac,
        h.inv_slope_frac,
        b(h.bias_bend),
        b(h.sensitivity_limit)
    );
    let _ =
        writeln!(out, "    {}u, {}, {}, {}u,", h.xa_knots, i(h.xa_origin), i(h.xa_inv_step), h.residual_frac);
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
