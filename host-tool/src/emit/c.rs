//! C99 for firmware in C, in two parts:
//!
//! * **The library** ([`library_header`], [`library_source`]: `ltrm.h` and `ltrm.c`, written by
//!   `logtrim c-library`), the same for every unit: the integer-only evaluator, bit-identical to the Rust
//!   fixed path (`logtrim::fixed`); the run-time image loader with the checks of `Image::parse` and
//!   `FixedStorage::load` in the same order, and the A/B choice of `slots::select_fixed`; the trim and blank
//!   records of `logtrim::field` (parse, bind, A/B, apply); a status-to-text function. One copy per
//!   firmware, compiled once.
//! * **Unit data** ([`render_unit`]: `logtrim emit --format c --c-name NAME`), for a build per serial: one
//!   unit's tables as `static const` arrays and a `const ltrm_fixed NAME` describing them, in a `.c` file
//!   that includes `ltrm.h`. Several units or channels link into one program under their own names. A
//!   firmware for every serial needs no unit data at all: it loads the unit's image at run time
//!   (`ltrm_image_load`, `ltrm_image_select`) into RAM it owns (`ltrm_ram`).
//!
//! Every C name starts with `ltrm_`/`LTRM_`. The constants the C shares with the Rust code (Q formats,
//! limits, table sizes, the byte offsets of every image and record field, status and unit numbering) are
//! rendered from the Rust items, so the two cannot drift apart; a change of the image's header layout shows
//! up in `LTRM_L_HDR_*`, and the header's own checks are in one C function, `ltrm_image_header`.
//!
//! Portability: only `<stdint.h>` is needed. Right shifts of negative values (implementation-defined in
//! C99) go through `ltrm_asr`, left shifts only ever see non-negative values, divisions have non-negative
//! operands, and the overflow bounds are those of the Rust code (documented in `logtrim::fixed`), so no
//! operation is undefined for any input or table content. The table lengths are in the struct and every
//! access is checked against them, as the Rust slices are. The one use of floating point is the image
//! loader's check of the f32 model (`Calibration::validate`: three slope evaluations in double, run once at
//! load time), which must be compiled without contraction of `a*b + c` (`-std=c99` does that).

use std::fmt::Write;

use super::{banner, number_lines, Provenance};
use crate::tables::{FixedTables, TableOptions};
use logtrim::error::SensorFault;
use logtrim::field::{FieldError, RecordError, RecordValueError};
use logtrim::image::{ImageError, ImageValueError};
use logtrim::record::slots::Rejected;
use logtrim::record::FormatError;
use logtrim::Unit;

/// Status codes of the C library, in the order of the generated `enum ltrm_status`, each with what it
/// means (also the text of `ltrm_status_text`).
pub const STATUSES: [(&str, &str); 47] = [
    ("LTRM_OK", "ok"),
    ("LTRM_CODE_OUT_OF_ADC_RANGE", "code above the converter's largest code"),
    ("LTRM_SATURATED", "code within the rail margin"),
    ("LTRM_BELOW_RANGE", "below the calibrated x range, or the sensitivity is too low"),
    ("LTRM_ABOVE_RANGE", "above the calibrated x range"),
    (
        "LTRM_TEMPERATURE_OUT_OF_RANGE",
        "temperature beyond the calibrated range plus the allowed extrapolation",
    ),
    ("LTRM_SENSOR_OPEN", "temperature sensor open"),
    ("LTRM_SENSOR_SHORT", "temperature sensor short"),
    ("LTRM_SENSOR_OUT_OF_MODEL_RANGE", "temperature sensor outside its model's range"),
    ("LTRM_BAD_TABLE", "the tables are inconsistent"),
    ("LTRM_NOT_CALIBRATED", "no sensor table for a raw temperature code"),
    ("LTRM_TRUNCATED", "record truncated: fewer bytes than its header or declared length"),
    ("LTRM_BAD_MAGIC", "no logtrim record here (erased, blank or foreign data)"),
    ("LTRM_OTHER_RECORD", "another kind of logtrim record"),
    ("LTRM_UNSUPPORTED_VERSION", "record format version not supported by this library"),
    ("LTRM_BAD_LENGTH", "declared record length impossible"),
    ("LTRM_LENGTH_MISMATCH", "bytes after the record"),
    ("LTRM_CRC_MISMATCH", "CRC-32 mismatch: the record is corrupted"),
    ("LTRM_RESERVED_NOT_ZERO", "a reserved or padding byte is not zero"),
    ("LTRM_BAD_FLAG", "a flag byte is not 0 or 1"),
    ("LTRM_BAD_ENUM", "a byte names no known choice"),
    ("LTRM_SECTION_OVERRUN", "an image section runs past the end of the image"),
    ("LTRM_SECTION_ALIGNMENT", "an image section's length is not a multiple of 4"),
    ("LTRM_SECTION_LENGTH", "an image section has the wrong length for its layout"),
    ("LTRM_UNKNOWN_SECTION", "an image section of an unknown critical type"),
    ("LTRM_DUPLICATE_SECTION", "an image section appears twice"),
    ("LTRM_SECTION_COUNT", "the image's section count disagrees with its sections"),
    ("LTRM_MISSING_SECTION", "a required image section (or the fixed-point section) is missing"),
    ("LTRM_BAD_SERIAL", "the serial is not NUL-padded printable ASCII"),
    ("LTRM_TABLE_SIZE", "a term count exceeds its table's capacity"),
    ("LTRM_NON_FINITE", "a stored f32 value is NaN or infinite"),
    ("LTRM_BAD_CALIBRATION", "the f32 calibration fails its validation"),
    ("LTRM_FIXED_TABLE_SIZE", "a fixed-point table's size disagrees with its dimensions"),
    ("LTRM_FIXED_MISMATCH", "the fixed-point section describes another converter than the ranges section"),
    ("LTRM_BAD_FIXED_TABLES", "the fixed-point tables fail their validation"),
    ("LTRM_FIXED_OTHER_CALIBRATION", "the fixed-point tables were built from another unit's f32 model"),
    ("LTRM_FIXED_CAPACITY", "a fixed-point table does not fit the RAM given for it"),
    ("LTRM_INCONSISTENT", "a record's f32 and fixed-point forms of one value disagree"),
    ("LTRM_OUT_OF_RANGE", "a record value lies outside the range it may hold"),
    ("LTRM_NO_SAMPLES", "a blank averaged from zero readings"),
    ("LTRM_CLEARED_NOT_IDENTITY", "a cleared trim that is not exactly the identity"),
    ("LTRM_ONE_POINT_STANDARDS", "a one-point trim names two different standards"),
    ("LTRM_OTHER_CALIBRATION", "a record made on another factory calibration"),
    ("LTRM_OFFSET_PAST_LIMIT", "trim offset past the limit: a fault, not a drift to trim"),
    ("LTRM_GAIN_PAST_LIMIT", "trim gain past the limit: a fault, not a drift to trim"),
    ("LTRM_NO_VALID_RECORD", "neither slot holds a usable record"),
    ("LTRM_BAD_SENSOR", "the temperature sensor's description fails its validation"),
];

/// The index of a status in [`STATUSES`] by its C name (a programming error if it is not there).
fn code_of(name: &str) -> usize {
    STATUSES.iter().position(|(n, _)| *n == name).unwrap_or(usize::MAX)
}

/// The C status code of a Rust correction result (the index into [`STATUSES`]).
pub fn status_code<T>(r: &Result<T, logtrim::Error>) -> usize {
    match r {
        Ok(_) => 0,
        Err(e) => error_code(e),
    }
}

/// The C status code of a correction error.
pub fn error_code(e: &logtrim::Error) -> usize {
    use logtrim::Error as E;
    match e {
        E::CodeOutOfAdcRange { .. } => 1,
        E::Saturated { .. } => 2,
        E::BelowRange => 3,
        E::AboveRange => 4,
        E::TemperatureOutOfRange { .. } => 5,
        E::Sensor(SensorFault::Open) => 6,
        E::Sensor(SensorFault::Short) => 7,
        E::Sensor(_) => 8,
        E::NotCalibrated => 10,
        _ => 9,
    }
}

/// The C status code of a framing or byte-rule error.
pub fn format_code(e: &FormatError) -> usize {
    code_of(match e {
        FormatError::Truncated { .. } => "LTRM_TRUNCATED",
        FormatError::BadMagic { .. } => "LTRM_BAD_MAGIC",
        FormatError::OtherRecord { .. } => "LTRM_OTHER_RECORD",
        FormatError::UnsupportedVersion { .. } => "LTRM_UNSUPPORTED_VERSION",
        FormatError::BadLength { .. } => "LTRM_BAD_LENGTH",
        FormatError::LengthMismatch { .. } => "LTRM_LENGTH_MISMATCH",
        FormatError::CrcMismatch { .. } => "LTRM_CRC_MISMATCH",
        FormatError::ReservedNotZero { .. } => "LTRM_RESERVED_NOT_ZERO",
        FormatError::BadFlag { .. } => "LTRM_BAD_FLAG",
        _ => "LTRM_BAD_ENUM",
    })
}

/// The C status code of an image error (what `ltrm_image_check`/`ltrm_image_load` return for the image).
pub fn image_code(e: &ImageError) -> usize {
    code_of(match e {
        ImageError::Format(f) => return format_code(f),
        ImageError::SectionOverrun { .. } => "LTRM_SECTION_OVERRUN",
        ImageError::SectionAlignment { .. } => "LTRM_SECTION_ALIGNMENT",
        ImageError::SectionLength { .. } => "LTRM_SECTION_LENGTH",
        ImageError::UnknownSection { .. } => "LTRM_UNKNOWN_SECTION",
        ImageError::DuplicateSection { .. } => "LTRM_DUPLICATE_SECTION",
        ImageError::SectionCount { .. } => "LTRM_SECTION_COUNT",
        ImageError::MissingSection { .. } => "LTRM_MISSING_SECTION",
        ImageError::BadSerial => "LTRM_BAD_SERIAL",
        ImageError::Value(ImageValueError::TableSize { .. }) => "LTRM_TABLE_SIZE",
        ImageError::Value(ImageValueError::NonFinite { .. }) => "LTRM_NON_FINITE",
        ImageError::Value(ImageValueError::Calibration(_)) => "LTRM_BAD_CALIBRATION",
        ImageError::Value(ImageValueError::FixedTableSize { .. }) => "LTRM_FIXED_TABLE_SIZE",
        ImageError::Value(ImageValueError::FixedMismatch { .. }) => "LTRM_FIXED_MISMATCH",
        ImageError::Value(ImageValueError::FixedOtherCalibration { .. }) => "LTRM_FIXED_OTHER_CALIBRATION",
        ImageError::Value(ImageValueError::Sensor(_)) => "LTRM_BAD_SENSOR",
        ImageError::Value(_) => "LTRM_BAD_FIXED_TABLES",
        ImageError::FixedCapacity { .. } => "LTRM_FIXED_CAPACITY",
        _ => "LTRM_BAD_TABLE",
    })
}

/// The C status code of a field record's error.
pub fn record_code(e: &RecordError) -> usize {
    code_of(match e {
        RecordError::Format(f) => return format_code(f),
        RecordError::Value(RecordValueError::NonFinite { .. }) => "LTRM_NON_FINITE",
        RecordError::Value(RecordValueError::Inconsistent { .. }) => "LTRM_INCONSISTENT",
        RecordError::Value(RecordValueError::OutOfRange { .. }) => "LTRM_OUT_OF_RANGE",
        RecordError::Value(RecordValueError::NoSamples) => "LTRM_NO_SAMPLES",
        RecordError::Value(RecordValueError::ClearedNotIdentity { .. }) => "LTRM_CLEARED_NOT_IDENTITY",
        _ => "LTRM_ONE_POINT_STANDARDS",
    })
}

/// The C status code of an error installing field layers or applying them.
pub fn field_code(e: &FieldError) -> usize {
    code_of(match e {
        FieldError::Correction(e) => return error_code(e),
        FieldError::OtherCalibration { .. } => "LTRM_OTHER_CALIBRATION",
        FieldError::OffsetPastLimit { .. } => "LTRM_OFFSET_PAST_LIMIT",
        FieldError::GainPastLimit { .. } => "LTRM_GAIN_PAST_LIMIT",
        FieldError::Value(v) => return record_code(&RecordError::Value(*v)),
        _ => "LTRM_BAD_TABLE",
    })
}

/// The C status of one slot as `ltrm_selection` reports it: LTRM_OK for a record that passed its checks
/// (chosen or older), its error, or LTRM_OTHER_CALIBRATION.
pub fn rejected_code<E>(r: &Rejected<E>, code: impl Fn(&E) -> usize) -> usize {
    match r {
        Rejected::Invalid(e) => code(e),
        Rejected::OtherCalibration { .. } => code_of("LTRM_OTHER_CALIBRATION"),
        _ => 0,
    }
}

fn fault(f: SensorFault) -> &'static str {
    match f {
        SensorFault::Open => "LTRM_SENSOR_OPEN",
        SensorFault::Short => "LTRM_SENSOR_SHORT",
        _ => "LTRM_SENSOR_OUT_OF_MODEL_RANGE",
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

/// The C name of an output unit: `LTRM_` and the variant's name in capitals with underscores.
fn unit_name(u: Unit) -> String {
    let mut out = String::from("LTRM");
    for ch in format!("{u:?}").chars() {
        if ch.is_ascii_uppercase() {
            out.push('_');
        }
        out.push(ch.to_ascii_uppercase());
    }
    out
}

/// A four-byte magic as a C string literal.
fn magic(m: [u8; 4]) -> String {
    format!("\"{}\"", String::from_utf8_lossy(&m))
}

/// The library's version and the formats it reads, as macros.
fn version_definitions() -> String {
    use logtrim::field::layout as fl;
    use logtrim::image::layout as il;
    let v = env!("CARGO_PKG_VERSION");
    let mut parts = v.split(['.', '-']).map(|p| p.parse::<u32>().unwrap_or(0));
    let (major, minor, patch) =
        (parts.next().unwrap_or(0), parts.next().unwrap_or(0), parts.next().unwrap_or(0));
    let mut out = String::from("/* ---- version, and the formats this library reads ---- */\n");
    let _ = writeln!(out, "#define LTRM_VERSION_STRING \"{v}\"");
    let _ = writeln!(out, "#define LTRM_VERSION_MAJOR {major}");
    let _ = writeln!(out, "#define LTRM_VERSION_MINOR {minor}");
    let _ = writeln!(out, "#define LTRM_VERSION_PATCH {patch}");
    let _ = writeln!(
        out,
        "#define LTRM_IMAGE_VERSION {}u /* calibration image format (image::layout::header::VERSION_VALUE) */",
        il::header::VERSION_VALUE
    );
    let _ = writeln!(out, "#define LTRM_TRIM_VERSION {}u /* trim record format */", fl::trim::VERSION_VALUE);
    let _ =
        writeln!(out, "#define LTRM_BLANK_VERSION {}u /* blank record format */", fl::blank::VERSION_VALUE);
    let _ = writeln!(out, "#define LTRM_MAGIC_IMAGE {}", magic(il::header::MAGIC_VALUE));
    let _ = writeln!(out, "#define LTRM_MAGIC_TRIM {}", magic(fl::trim::MAGIC_VALUE));
    let _ = writeln!(out, "#define LTRM_MAGIC_BLANK {}\n", magic(fl::blank::MAGIC_VALUE));
    out
}

/// The constants and enums the library shares with the Rust code, rendered from the Rust items themselves.
fn shared_definitions() -> String {
    use logtrim::field::{TrimKind, TrimLimits};
    use logtrim::fixed::{self as f, transcend as t};
    let mut out =
        String::from("/* ---- constants shared with logtrim::fixed (rendered from its items) ---- */\n");
    let defs: [(&str, String, &str); 47] = [
        (
            "LTRM_LAYOUT_VERSION",
            format!("{}u", f::LAYOUT_VERSION),
            "fixed::LAYOUT_VERSION: the tables' format",
        ),
        ("LTRM_THETA_FRAC", format!("{}", f::THETA_FRAC), "fixed::THETA_FRAC"),
        ("LTRM_X_FRAC", format!("{}u", f::X_FRAC), "fixed::X_FRAC"),
        ("LTRM_COLUMN_GUARD", format!("{}u", f::COLUMN_GUARD), "fixed::COLUMN_GUARD"),
        ("LTRM_WINDOWS_LOG2", format!("{}u", f::interp::WINDOWS_LOG2), "fixed::interp::WINDOWS_LOG2"),
        ("LTRM_WINDOWS", format!("{}u", f::interp::WINDOWS), "fixed::interp::WINDOWS"),
        ("LTRM_CODE_LIMIT", format!("{}u", f::CODE_LIMIT), "fixed::CODE_LIMIT"),
        ("LTRM_OFFSET_MIN", format!("({})", f::OFFSET_RANGE.0), "fixed::OFFSET_RANGE"),
        ("LTRM_OFFSET_MAX", format!("{}", f::OFFSET_RANGE.1), "fixed::OFFSET_RANGE"),
        ("LTRM_INV_SLOPE_LIMIT", format!("{}LL", f::INV_SLOPE_LIMIT), "fixed::INV_SLOPE_LIMIT"),
        ("LTRM_THETA_LIMIT", format!("{}", f::THETA_LIMIT), "fixed::THETA_LIMIT"),
        ("LTRM_SPLINE_MARGIN", format!("{}", f::SPLINE_MARGIN), "fixed::SPLINE_MARGIN"),
        ("LTRM_BIAS_LIMIT", format!("{}", f::BIAS_LIMIT), "fixed::BIAS_LIMIT"),
        ("LTRM_X_LIMIT", format!("{}", f::X_LIMIT), "fixed::X_LIMIT"),
        ("LTRM_SLOPE_FRAC_SUM", format!("{}u", f::SLOPE_FRAC_SUM), "fixed::SLOPE_FRAC_SUM"),
        ("LTRM_T_STEP_MIN", format!("{}u", f::T_STEP_LOG2_RANGE.0), "fixed::T_STEP_LOG2_RANGE"),
        ("LTRM_T_STEP_MAX", format!("{}u", f::T_STEP_LOG2_RANGE.1), "fixed::T_STEP_LOG2_RANGE"),
        ("LTRM_XA_STEP_MIN", format!("{}u", f::XA_STEP_LOG2_RANGE.0), "fixed::XA_STEP_LOG2_RANGE"),
        ("LTRM_XA_STEP_MAX", format!("{}u", f::XA_STEP_LOG2_RANGE.1), "fixed::XA_STEP_LOG2_RANGE"),
        ("LTRM_RESIDUAL_FRAC_MIN", format!("{}u", f::RESIDUAL_FRAC_RANGE.0), "fixed::RESIDUAL_FRAC_RANGE"),
        ("LTRM_RESIDUAL_FRAC_MAX", format!("{}u", f::RESIDUAL_FRAC_RANGE.1), "fixed::RESIDUAL_FRAC_RANGE"),
        ("LTRM_ROW_CAPACITY", format!("{}u", f::ROW_CAPACITY), "fixed::ROW_CAPACITY"),
        ("LTRM_STAGE_MEMO", format!("{}u", f::STAGE_MEMO), "fixed::STAGE_MEMO"),
        ("LTRM_TABLE_KNOTS", format!("{}u", f::TABLE_KNOTS), "fixed::TABLE_KNOTS"),
        ("LTRM_TABLE_ERROR_LOG2", format!("{}u", f::TABLE_ERROR_LOG2), "fixed::TABLE_ERROR_LOG2"),
        (
            "LTRM_BEND_FLOOR_BIT",
            format!("{}u", f::X_FRAC as i32 + t::BEND_FIRST_EXP),
            "X_FRAC + transcend::BEND_FIRST_EXP",
        ),
        ("LTRM_BEND_OCTAVES", format!("{}u", t::BEND_OCTAVES), "transcend::BEND_OCTAVES"),
        ("LTRM_BEND_SEGMENTS", format!("{}u", t::BEND_SEGMENTS), "transcend::BEND_SEGMENTS"),
        ("LTRM_BEND_STRIDE", format!("{}u", t::BEND_STRIDE), "transcend::BEND_STRIDE"),
        ("LTRM_BEND_LEN", format!("{}u", t::BEND_LEN), "transcend::BEND_LEN"),
        ("LTRM_EXP64_LOG2", format!("{}u", t::EXP64_LOG2), "transcend::EXP64_LOG2"),
        ("LTRM_EXP64_LEN", format!("{}u", t::EXP64_LEN), "transcend::EXP64_LEN"),
        ("LTRM_HALF_INV_LN2_Q16", format!("{}u", t::HALF_INV_LN2_Q16), "transcend::HALF_INV_LN2_Q16"),
        ("LTRM_LN2_Q31", format!("{}", t::LN2_Q31), "transcend::LN2_Q31"),
        ("LTRM_LN2_Q24", format!("{}", t::LN2_Q24), "transcend::LN2_Q24"),
        ("LTRM_LN2_Q31_REST", format!("{}", t::LN2_Q31_REST), "transcend::LN2_Q31_REST"),
        ("LTRM_EXP_X_ABOVE", format!("{}", t::EXP_X_ABOVE), "transcend::EXP_X_ABOVE"),
        ("LTRM_EXP_X_ZERO", format!("({})", t::EXP_X_ZERO), "transcend::EXP_X_ZERO"),
        ("LTRM_INV_LN10_Q32", format!("{}", f::INV_LN10_Q32), "fixed::INV_LN10_Q32"),
        ("LTRM_DB10_FRAC_Q32", format!("{}", f::DB10_FRAC_Q32), "fixed::DB10_FRAC_Q32"),
        ("LTRM_MAX_SERIES", format!("{}u", logtrim::calibration::MAX_SERIES), "calibration::MAX_SERIES"),
        (
            "LTRM_MAX_RESIDUAL",
            format!("{}u", logtrim::calibration::MAX_RESIDUAL),
            "calibration::MAX_RESIDUAL",
        ),
        ("LTRM_GAIN_FRAC", format!("{}u", logtrim::field::trim::GAIN_FRAC), "field::trim::GAIN_FRAC"),
        (
            "LTRM_MAX_LEVEL_SHIFT",
            format!("{:?}f", logtrim::calibration::MAX_LEVEL_SHIFT),
            "calibration::MAX_LEVEL_SHIFT",
        ),
        ("LTRM_MAX_ABS_X", format!("{:?}f", logtrim::calibration::MAX_ABS_X), "calibration::MAX_ABS_X"),
        (
            "LTRM_MAX_TEMPERATURE_C",
            format!("{:?}", logtrim::calibration::MAX_TEMPERATURE_C),
            "calibration::MAX_TEMPERATURE_C",
        ),
        ("LTRM_ZERO_CELSIUS_K", format!("{:?}", logtrim::physics::ZERO_CELSIUS_K), "physics::ZERO_CELSIUS_K"),
    ];
    for (name, value, from) in defs {
        let _ = writeln!(out, "#define {name} {value} /* {from} */");
    }
    let _ = writeln!(
        out,
        "#define LTRM_GAIN_ONE_Q30 {} /* field::trim::GAIN_ONE_Q30 */",
        logtrim::field::trim::GAIN_ONE_Q30
    );
    out.push_str("#define LTRM_NO_WINDOW 0xffffffffu /* a stage cache without a window */\n");
    for (name, k) in [
        ("LTRM_TRIM_CLEARED", TrimKind::Cleared),
        ("LTRM_TRIM_ONE_POINT", TrimKind::OnePoint),
        ("LTRM_TRIM_TWO_POINT", TrimKind::TwoPoint),
    ] {
        let _ = writeln!(out, "#define {name} {}u /* field::TrimKind::{k:?} */", k.code());
    }
    let l = TrimLimits::DEFAULT;
    let _ = writeln!(
        out,
        "/* field::TrimLimits::DEFAULT, an initialiser of ltrm_trim_limits. */\n#define LTRM_TRIM_LIMITS_DEFAULT {{ {}, {}, {} }}",
        l.max_offset_q24, l.max_gain_error_q30, l.min_separation_q24
    );
    let o = TableOptions::default();
    let (t, s) = (o.t_knots + 2, o.sensor_segments + 3);
    let _ = writeln!(
        out,
        "/* The RAM the host tool's default tables need (at most {} temperature knots, {} x~ knots, {} sensor\n * segments): entries of each per-temperature table, of the residual, of the sensor table. */",
        o.t_knots, o.xa_knots, o.sensor_segments
    );
    let _ = writeln!(out, "#define LTRM_RAM_T_DEFAULT {t}u");
    let _ = writeln!(out, "#define LTRM_RAM_R_DEFAULT {}u", t * (o.xa_knots + 2));
    let _ = writeln!(out, "#define LTRM_RAM_S_DEFAULT {s}u");
    out.push_str(
        "/* Defines static arrays and an ltrm_ram `name` over them: LTRM_RAM_DEFINE(unit_ram, LTRM_RAM_T_DEFAULT,\n * LTRM_RAM_R_DEFAULT, LTRM_RAM_S_DEFAULT). */\n#define LTRM_RAM_DEFINE(name, T, R, S) \\\n    static int32_t name##_t[4u * (T)]; \\\n    static int32_t name##_s[(S) > 0u ? (S) : 1u]; \\\n    static int16_t name##_r[(R) > 0u ? (R) : 1u]; \\\n    static const ltrm_ram name = { name##_t, (T), name##_s, (S), name##_r, (R) }\n\n",
    );
    out.push_str("/* The outcome of a call: LTRM_OK, or what went wrong (the Rust error's kind); ltrm_status_text names it. */\ntypedef enum ltrm_status {\n");
    for (i, (name, doc)) in STATUSES.iter().enumerate() {
        let sep = if i + 1 < STATUSES.len() { "," } else { "" };
        let _ = writeln!(out, "    {name}{}{sep} /* {doc} */", if i == 0 { " = 0" } else { "" });
    }
    out.push_str(
        "} ltrm_status;\n\n/* Output units, in the order of logtrim::Unit::ALL. */\ntypedef enum ltrm_unit_kind {\n",
    );
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
    out.push_str("} ltrm_unit_kind;\n\n");
    out
}

/// `#define`s of the byte offset of every field of a part (and the size of each multi-byte raw field).
fn part_offsets(out: &mut String, part: &str, fields: &[logtrim::record::layout::Field]) {
    for f in fields {
        let name = f.name.to_ascii_uppercase();
        let _ = writeln!(out, "#define LTRM_L_{part}_{name} {}u", f.offset);
        if matches!(
            f.kind,
            logtrim::record::layout::Kind::Reserved(_) | logtrim::record::layout::Kind::Ascii(_)
        ) {
            let _ = writeln!(out, "#define LTRM_L_{part}_{name}_SIZE {}u", f.kind.size());
        }
    }
}

/// The byte layout of images and field records, rendered from `logtrim::image::layout` and
/// `logtrim::field::layout` (for `ltrm.c`).
fn layout_definitions() -> String {
    use logtrim::field::layout as fl;
    use logtrim::image::layout as il;
    let mut out = String::from(
        "/* ---- byte layout of images and field records (rendered from image::layout and field::layout) ---- */\n",
    );
    part_offsets(&mut out, "HDR", il::header::FIELDS);
    part_offsets(&mut out, "SECTION", il::section::FIELDS);
    part_offsets(&mut out, "RANGES", il::ranges::FIELDS);
    part_offsets(&mut out, "MODEL", il::model_f32::FIELDS);
    part_offsets(&mut out, "FIXED", il::fixed::FIELDS);
    part_offsets(&mut out, "SENSOR", il::sensor::FIELDS);
    part_offsets(&mut out, "REC", fl::header::FIELDS);
    part_offsets(&mut out, "BLANK", fl::blank::FIELDS);
    part_offsets(&mut out, "TRIM", fl::trim::FIELDS);
    let lens: [(&str, usize); 16] = [
        ("HDR_LEN", il::header::LEN),
        ("SENSOR_KIND", usize::from(il::sensor::KIND)),
        ("SENSOR_LEN", il::sensor::LEN),
        ("SECTION_HEADER_LEN", il::section::HEADER_LEN),
        ("SECTION_OPTIONAL_BIT", usize::from(il::section::OPTIONAL_BIT)),
        ("RANGES_KIND", usize::from(il::ranges::KIND)),
        ("RANGES_LEN", il::ranges::LEN),
        ("MODEL_KIND", usize::from(il::model_f32::KIND)),
        ("MODEL_LEN", il::model_f32::LEN),
        ("FIXED_KIND", usize::from(il::fixed::KIND)),
        ("FIXED_HEAD_LEN", il::fixed::HEAD_LEN),
        ("IMAGE_MIN_LEN", il::MIN_LEN),
        ("IMAGE_MAX_LEN", il::MAX_LEN),
        ("REC_HEADER_LEN", fl::header::END),
        ("BLANK_LEN", fl::BLANK_LEN),
        ("TRIM_LEN", fl::TRIM_LEN),
    ];
    for (name, v) in lens {
        let _ = writeln!(out, "#define LTRM_L_{name} {v}u");
    }
    let _ = writeln!(out, "#define LTRM_L_TRAILER_LEN {}u", il::trailer::LEN);
    let _ = writeln!(out, "#define LTRM_L_ALIGN {}u", il::section::ALIGN);
    out.push('\n');
    out
}

const TYPES: &str = include_str!("c_types.h");
const API: &str = include_str!("c_api.h");
const EVAL: &str = include_str!("c_eval.c");
const IMAGE: &str = include_str!("c_image.c");
const FIELD: &str = include_str!("c_field.c");

/// A C integer literal (INT32_MIN has no literal of its own type).
fn cint(v: i64) -> String {
    if v == i64::from(i32::MIN) {
        "(-2147483647 - 1)".to_string()
    } else {
        v.to_string()
    }
}

/// The library's header, `ltrm.h`: version and format macros, the shared constants, the types, the API.
pub fn library_header() -> String {
    let mut out = String::new();
    let _ = writeln!(out, "/* {} */", banner());
    out.push_str(
        "/* The logtrim C library: the fixed-point correction (bit for bit the Rust fixed path), run-time\n * calibration images, and trim and blank records. Compile ltrm.c once per firmware; unit data written by\n * `logtrim emit --format c` (a build per serial) or an image loaded at run time (one firmware for every\n * serial) describes each unit as an ltrm_fixed. Every name starts with ltrm_/LTRM_. */\n",
    );
    out.push_str("#ifndef LTRM_H\n#define LTRM_H\n\n#include <stdint.h>\n\n");
    out.push_str("#ifdef __cplusplus\nextern \"C\" {\n#endif\n\n");
    out.push_str(&version_definitions());
    out.push_str(&shared_definitions());
    out.push_str(TYPES);
    out.push('\n');
    out.push_str(API);
    out.push_str("\n#ifdef __cplusplus\n}\n#endif\n\n#endif /* LTRM_H */\n");
    out
}

/// The library's source, `ltrm.c`: the universal tables, the evaluator, the image loader, the field records
/// and the status texts.
pub fn library_source() -> String {
    let mut out = String::new();
    let _ = writeln!(out, "/* {} */", banner());
    let _ = writeln!(
        out,
        "/* The logtrim C library (see ltrm.h); {} bytes of universal tables. */",
        logtrim::fixed::universal::BYTES
    );
    out.push_str("#include \"ltrm.h\"\n\n");
    out.push_str(&layout_definitions());
    out.push_str("/* ---- universal tables (the same for every unit) ---- */\n");
    array(
        &mut out,
        "ltrm_bend",
        "int32_t",
        &logtrim::fixed::universal::BEND,
        logtrim::fixed::transcend::BEND_STRIDE,
    );
    array(&mut out, "ltrm_exp64", "int32_t", &logtrim::fixed::universal::EXP64, 9);
    out.push('\n');
    out.push_str(EVAL);
    out.push('\n');
    out.push_str(IMAGE);
    out.push('\n');
    out.push_str(FIELD);
    out.push_str("\n/* ---- text ---- */\n\nconst char *ltrm_status_text(ltrm_status status) {\n    switch (status) {\n");
    for (name, doc) in STATUSES {
        let _ = writeln!(out, "    case {name}: return \"{doc}\";");
    }
    out.push_str("    }\n    return \"unknown status\";\n}\n");
    out
}

/// The C name of a unit's data: a C identifier that is not a keyword and does not use the library's
/// prefix.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CName(String);

/// Why a name cannot name a unit's data in C.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CNameError {
    /// The name given.
    pub name: String,
    /// What is wrong with it.
    pub reason: &'static str,
}

impl std::fmt::Display for CNameError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "C name {:?}: {}", self.name, self.reason)
    }
}

impl std::error::Error for CNameError {}

const C_KEYWORDS: [&str; 37] = [
    "auto",
    "break",
    "case",
    "char",
    "const",
    "continue",
    "default",
    "do",
    "double",
    "else",
    "enum",
    "extern",
    "float",
    "for",
    "goto",
    "if",
    "inline",
    "int",
    "long",
    "register",
    "restrict",
    "return",
    "short",
    "signed",
    "sizeof",
    "static",
    "struct",
    "switch",
    "typedef",
    "union",
    "unsigned",
    "void",
    "volatile",
    "while",
    "_Bool",
    "_Complex",
    "_Imaginary",
];

impl CName {
    /// The default name of a unit's data.
    pub const DEFAULT: &'static str = "unit_cal";

    /// Checks a name: letters, digits and `_`, not starting with a digit, at most 63 characters (C99's
    /// significant length for internal identifiers), not a C99 keyword, not starting with `ltrm_`, `LTRM_`
    /// or an underscore (reserved to the library and the C implementation).
    pub fn new(name: &str) -> Result<CName, CNameError> {
        let bad = |reason| Err(CNameError { name: name.to_string(), reason });
        let mut chars = name.chars();
        match chars.next() {
            None => return bad("it is empty"),
            Some(c) if !(c.is_ascii_alphabetic()) => {
                return bad("a C name starts with a letter (a leading underscore is reserved)")
            }
            _ => {}
        }
        if !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            return bad("a C name holds only ASCII letters, digits and '_'");
        }
        if name.len() > 63 {
            return bad("longer than the 63 characters C99 compilers must tell apart");
        }
        if C_KEYWORDS.contains(&name) {
            return bad("it is a C keyword");
        }
        if name.to_ascii_lowercase().starts_with("ltrm_") {
            return bad("names starting with ltrm_ belong to the library");
        }
        Ok(CName(name.to_string()))
    }

    /// The name.
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

impl Default for CName {
    fn default() -> Self {
        CName(CName::DEFAULT.to_string())
    }
}

/// A unit's data for the C library under the default name [`CName::DEFAULT`], identity unknown (0).
pub fn render(t: &FixedTables, prov: &Provenance) -> String {
    render_unit(t, prov, &CName::default(), 0)
}

/// A unit's data for the C library: its tables as `static const` arrays and `const ltrm_fixed NAME`, in a
/// `.c` file that includes `ltrm.h`. `identity` is the calibration's fingerprint
/// (`logtrim::field::fingerprint`), which trim and blank records bind to (0 when unknown).
pub fn render_unit(t: &FixedTables, prov: &Provenance, name: &CName, identity: u32) -> String {
    let n = name.as_str();
    let mut out = String::new();
    let _ = writeln!(out, "/* {} */", banner());
    if let Some(u) = &prov.unit {
        let _ = writeln!(out, "/* unit: {} */", u.replace("*/", "* /"));
    }
    if let Some(s) = &prov.source {
        let _ = writeln!(out, "/* from: {} */", super::file_name(s).replace("*/", "* /"));
    }
    let _ = writeln!(
        out,
        "/* {} bytes of unit tables, for the logtrim C library (ltrm.h, ltrm.c). Where it is used:\n *     extern const ltrm_fixed {n}; */",
        t.bytes()
    );
    out.push_str("#include \"ltrm.h\"\n\n");
    let _ = writeln!(
        out,
        "#if LTRM_LAYOUT_VERSION != {}u\n#error \"these tables are layout {}: use the ltrm.h of the logtrim that wrote them\"\n#endif\n",
        t.header.layout, t.header.layout
    );
    let stride = usize::from(t.header.xa_knots) + 2;
    array(&mut out, &format!("{n}_offset"), "int32_t", &t.offset, 6);
    array(&mut out, &format!("{n}_inv_slope"), "int32_t", &t.inv_slope, 6);
    array(&mut out, &format!("{n}_ln_bias"), "int32_t", &t.ln_bias, 6);
    array(&mut out, &format!("{n}_u_min"), "int32_t", &t.u_min, 6);
    array(&mut out, &format!("{n}_residual"), "int16_t", &t.residual, stride.min(14));
    let empty: Vec<i32> = Vec::new();
    let sensor_knots = t.sensor.as_ref().map_or(&empty, |s| &s.knots);
    array(&mut out, &format!("{n}_sensor"), "int32_t", sensor_knots, 6);
    let h = &t.header;
    let b = |v: bool| if v { 1 } else { 0 };
    let _ = writeln!(out, "\n/* The unit's calibration. */\nconst ltrm_fixed {n} = {{");
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
    let _ = writeln!(out, "    {n}_offset, {}u,", t.offset.len());
    let _ = writeln!(out, "    {n}_inv_slope, {}u,", t.inv_slope.len());
    let _ = writeln!(out, "    {n}_ln_bias, {}u,", t.ln_bias.len());
    let _ = writeln!(out, "    {n}_u_min, {}u,", t.u_min.len());
    let _ = writeln!(out, "    {n}_residual, {}u,", t.residual.len());
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
            let _ = writeln!(out, "    {n}_sensor, {}u,", s.knots.len());
        }
        None => {
            out.push_str("    0, 0u, 0u, 0u,\n");
            out.push_str("    LTRM_SENSOR_OUT_OF_MODEL_RANGE, 0u, LTRM_SENSOR_OUT_OF_MODEL_RANGE, LTRM_SENSOR_OUT_OF_MODEL_RANGE, 0u, LTRM_SENSOR_OUT_OF_MODEL_RANGE,\n");
            let _ = writeln!(out, "    {n}_sensor, 0u,");
        }
    }
    let _ = writeln!(out, "    0x{identity:08x}u /* identity: the fingerprint field records bind to */\n}};");
    out
}
