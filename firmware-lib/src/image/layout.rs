//! The byte layout of a calibration image, described once.
//!
//! Every field of every part (the header, each section's payload, the trailer) is a
//! [`Field`] constant here: its offset within the part, its size (derived from
//! its [`Kind`]) and its meaning. The parser and the writer read and write
//! through these constants, and [`PARTS`] lists them in the order they appear in an image: the table in the
//! [`image`](super) docs is rendered from it by [`write_markdown_table`], and tests hold the constants, the
//! rendered table and the offsets the docs state to each other.
//!
//! All multi-byte values are little-endian; `f32` values are IEEE 754 binary32 bit patterns.

use core::fmt;

use crate::record::layout::{Field, Kind};

/// The element type of a variable-length table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Elem {
    /// Little-endian two's-complement i32.
    I32,
    /// Little-endian two's-complement i16.
    I16,
}

impl Elem {
    /// Bytes per element.
    pub const fn size(self) -> usize {
        match self {
            Elem::I32 => 4,
            Elem::I16 => 2,
        }
    }

    /// The type as written in the layout table.
    pub const fn type_name(self) -> &'static str {
        match self {
            Elem::I32 => "i32",
            Elem::I16 => "i16",
        }
    }
}

/// A table of a variable number of elements that follows a part's fields: its length is the value of a
/// count field of the same part. The tables of a part follow its fields in the order listed, without gaps.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Table {
    /// A short snake_case name (used in error messages).
    pub name: &'static str,
    /// The element type.
    pub elem: Elem,
    /// The field holding the number of elements.
    pub count: Field,
    /// What the table holds.
    pub doc: &'static str,
}

/// The fixed header at offset 0 of every image.
pub mod header {
    use super::{Field, Kind};
    use crate::record::{magic_field, version_field, RecordType};

    /// The four bytes every image starts with.
    pub const MAGIC_VALUE: [u8; 4] = RecordType::CalibrationImage.magic();
    /// The format version this build writes and reads.
    pub const VERSION_VALUE: u16 = 3;

    /// Magic.
    pub const MAGIC: Field = magic_field("`LTCI` (0x4C 0x54 0x43 0x49)");
    /// Format version.
    pub const VERSION: Field = version_field("format version, 3");
    /// Number of sections in the body.
    pub const SECTION_COUNT: Field =
        VERSION.then("section_count", Kind::U16, "number of sections that follow");
    /// Total length of the image.
    pub const TOTAL_LEN: Field =
        SECTION_COUNT.then("total_len", Kind::U32, "bytes in the whole image, header to CRC inclusive");
    /// Sequence counter for the two-slot layout.
    pub const SEQUENCE: Field =
        TOTAL_LEN.then("sequence", Kind::U32, "write counter: of two valid slots the higher one is used");
    /// Calibration time.
    pub const CALIBRATED_AT: Field =
        SEQUENCE.then("calibrated_at", Kind::U64, "when the unit was calibrated, Unix seconds (UTC)");
    /// Unit serial.
    pub const SERIAL: Field = CALIBRATED_AT.then("serial", Kind::Ascii(16), "unit serial, NUL-padded");

    /// Length of the header.
    pub const LEN: usize = SERIAL.end();
    /// The header's fields in order.
    pub const FIELDS: &[Field] = &[MAGIC, VERSION, SECTION_COUNT, TOTAL_LEN, SEQUENCE, CALIBRATED_AT, SERIAL];
}

/// The header in front of every section's payload.
pub mod section {
    use super::{Field, Kind};

    /// Section type.
    pub const KIND: Field =
        Field::first("kind", Kind::U16, "section type; bit 15 set: readers that do not know it skip it");
    /// Payload length.
    pub const LEN: Field = KIND.then("len", Kind::U16, "payload bytes that follow, a multiple of 4");

    /// Length of a section header.
    pub const HEADER_LEN: usize = LEN.end();
    /// Payload lengths are multiples of this, so every section and the CRC start 4-byte aligned.
    pub const ALIGN: usize = crate::record::layout::ALIGN;
    /// Bit 15 of a section type: a reader that does not know the type may skip the section. A section type
    /// without it is critical: a reader that does not know it refuses the image.
    pub const OPTIONAL_BIT: u16 = 0x8000;
    /// The fields in order.
    pub const FIELDS: &[Field] = &[KIND, LEN];
}

/// Section `0x0001`: the calibrated ranges (ADC codes, temperature, x). Required.
pub mod ranges {
    use super::{Field, Kind};

    /// Section type.
    pub const KIND: u16 = 0x0001;

    /// ADC bits.
    pub const ADC_BITS: Field = Field::first("adc_bits", Kind::U8, "ADC resolution, 1..=24 bits");
    /// Padding.
    pub const RESERVED: Field = ADC_BITS.then("reserved", Kind::Reserved(3), "zero");
    /// Rail margin.
    pub const RAIL_MARGIN: Field =
        RESERVED.then("rail_margin", Kind::U32, "codes this close to a rail read as saturated");
    /// Lowest calibrated temperature.
    pub const T_MIN: Field = RAIL_MARGIN.then("t_min_c", Kind::F32, "lowest calibrated temperature, °C");
    /// Highest calibrated temperature.
    pub const T_MAX: Field = T_MIN.then("t_max_c", Kind::F32, "highest calibrated temperature, °C");
    /// Allowed extrapolation.
    pub const T_EXTRAPOLATION: Field =
        T_MAX.then("t_extrapolation_k", Kind::F32, "allowed excursion beyond either end, K");
    /// Lowest calibrated x.
    pub const X_MIN: Field =
        T_EXTRAPOLATION.then("x_min", Kind::F32, "lowest calibrated x = ln(I_sig/I_ref)");
    /// Highest calibrated x.
    pub const X_MAX: Field = X_MIN.then("x_max", Kind::F32, "highest calibrated x");
    /// Sensitivity floor.
    pub const X_MIN_SENSITIVITY: Field =
        X_MAX.then("x_min_sensitivity", Kind::F32, "smallest sensitivity dw/dx still reported");

    /// Payload length.
    pub const LEN: usize = X_MIN_SENSITIVITY.end();
    /// The fields in order.
    pub const FIELDS: &[Field] =
        &[ADC_BITS, RESERVED, RAIL_MARGIN, T_MIN, T_MAX, T_EXTRAPOLATION, X_MIN, X_MAX, X_MIN_SENSITIVITY];
}

/// Section `0x0002`: the f32 model (every coefficient of [`Model`](crate::calibration::Model) and the level
/// shift). Required.
pub mod model_f32 {
    use super::{Field, Kind};
    use crate::calibration::{MAX_RESIDUAL, MAX_SERIES};

    /// Section type.
    pub const KIND: u16 = 0x0002;

    const SERIES: u8 = MAX_SERIES as u8;
    const SURFACE: u8 = (MAX_RESIDUAL * MAX_RESIDUAL) as u8;

    /// Level shift.
    pub const LEVEL_SHIFT: Field =
        Field::first("level_shift_code", Kind::F32, "code at which the log stage's output is zero");
    /// Temperature centre.
    pub const T_CENTER: Field = LEVEL_SHIFT.then("t_center_c", Kind::F32, "T_c, centre of τ, °C");
    /// Temperature half span.
    pub const T_HALF_SPAN: Field = T_CENTER.then("t_half_span_k", Kind::F32, "T_h, half span of τ, K");
    /// Slope reference temperature.
    pub const T_REF: Field = T_HALF_SPAN.then("t_ref_k", Kind::F32, "T_ref of the slope series, K");
    /// Gain pole.
    pub const POLE: Field = T_REF.then("pole", Kind::F32, "q, the gain pole");
    /// Terms of the offset series.
    pub const OFFSET_LEN: Field = POLE.then("offset_len", Kind::U8, "terms of P_c in use, ≤ 6");
    /// Terms of the slope series.
    pub const SLOPE_LEN: Field = OFFSET_LEN.then("slope_len", Kind::U8, "terms of P_s in use, ≤ 6");
    /// Terms of the bulk series.
    pub const BULK_LEN: Field = SLOPE_LEN.then("bulk_len", Kind::U8, "terms of P_h in use, ≤ 6");
    /// Bias term switch.
    pub const BIAS_ENABLED: Field = BULK_LEN.then("bias_enabled", Kind::U8, "bias term: 0 off, 1 on");
    /// Residual terms in ξ.
    pub const RESIDUAL_NX: Field = BIAS_ENABLED.then("residual_nx", Kind::U8, "residual terms in ξ, ≤ 4");
    /// Residual terms in τ.
    pub const RESIDUAL_NT: Field = RESIDUAL_NX.then("residual_nt", Kind::U8, "residual terms in τ, ≤ 4");
    /// Padding.
    pub const RESERVED: Field = RESIDUAL_NT.then("reserved", Kind::Reserved(2), "zero");
    /// Offset coefficients.
    pub const OFFSET: Field =
        RESERVED.then("offset_coeffs", Kind::F32Array(SERIES), "P_c coefficients, all 6 stored");
    /// Slope coefficients.
    pub const SLOPE: Field = OFFSET.then("slope_coeffs", Kind::F32Array(SERIES), "P_s coefficients");
    /// Bulk coefficients.
    pub const BULK: Field = SLOPE.then("bulk_coeffs", Kind::F32Array(SERIES), "P_h coefficients");
    /// ln β at τ = 0.
    pub const LN_BETA0: Field = BULK.then("ln_beta0", Kind::F32, "b_0 of the bias term");
    /// Slope of ln β.
    pub const LN_BETA1: Field = LN_BETA0.then("ln_beta1", Kind::F32, "b_1 of the bias term");
    /// The reference input's bias term.
    pub const BIAS_REFERENCE: Field =
        LN_BETA1.then("bias_reference", Kind::F32, "ρ: reference input's bias term, codes");
    /// Residual x centre.
    pub const RESIDUAL_X_CENTER: Field = BIAS_REFERENCE.then("residual_x_center", Kind::F32, "x_c of ξ");
    /// Residual x half span.
    pub const RESIDUAL_X_HALF_SPAN: Field =
        RESIDUAL_X_CENTER.then("residual_x_half_span", Kind::F32, "x_h of ξ");
    /// Residual coefficients.
    pub const RESIDUAL: Field = RESIDUAL_X_HALF_SPAN.then(
        "residual_coeffs",
        Kind::F32Array(SURFACE),
        "r_ij at index 4·i + j, all 16 stored",
    );

    /// Payload length.
    pub const LEN: usize = RESIDUAL.end();
    /// The fields in order.
    pub const FIELDS: &[Field] = &[
        LEVEL_SHIFT,
        T_CENTER,
        T_HALF_SPAN,
        T_REF,
        POLE,
        OFFSET_LEN,
        SLOPE_LEN,
        BULK_LEN,
        BIAS_ENABLED,
        RESIDUAL_NX,
        RESIDUAL_NT,
        RESERVED,
        OFFSET,
        SLOPE,
        BULK,
        LN_BETA0,
        LN_BETA1,
        BIAS_REFERENCE,
        RESIDUAL_X_CENTER,
        RESIDUAL_X_HALF_SPAN,
        RESIDUAL,
    ];
}

/// Section `0x8004`: the temperature channel's description ([`TemperatureSensor`]: the element, the
/// divider and ADC that read it, the range it reports), for either path: an f32 firmware linearises its raw
/// temperature channel with it ([`Image::celsius`](super::Image::celsius)). Present when the unit reads a
/// raw temperature channel, absent when its temperature arrives in °C. Optional: a reader that does not know
/// it skips it; [`Image::parse`](super::Image::parse) checks it with [`TemperatureSensor::validate`].
///
/// [`TemperatureSensor`]: crate::sensor::TemperatureSensor
/// [`TemperatureSensor::validate`]: crate::sensor::TemperatureSensor::validate
pub mod sensor {
    use super::{Field, Kind};

    /// Section type.
    pub const KIND: u16 = 0x8004;

    /// The element's model.
    pub const ELEMENT: Field = Field::first(
        "element",
        Kind::U8,
        "0 NTC by the Beta model, 1 NTC by Steinhart–Hart, 2 platinum RTD by Callendar–Van Dusen",
    );
    /// Where the element sits in the divider.
    pub const PLACEMENT: Field = ELEMENT.then(
        "placement",
        Kind::U8,
        "0 element to ground (low side), 1 element to supply (high side)",
    );
    /// ADC resolution of the temperature channel.
    pub const BITS: Field = PLACEMENT.then("bits", Kind::U8, "ADC resolution of the channel, 1..=24 bits");
    /// Padding.
    pub const RESERVED: Field = BITS.then("reserved", Kind::Reserved(1), "zero");
    /// The element's first coefficient.
    pub const COEFF_A: Field =
        RESERVED.then("coeff_a", Kind::F32, "Beta: R₀ in Ω; Steinhart–Hart: A in 1/K; RTD: R₀ in Ω");
    /// The element's second coefficient.
    pub const COEFF_B: Field =
        COEFF_A.then("coeff_b", Kind::F32, "Beta: T₀ in °C; Steinhart–Hart: B; RTD: zero");
    /// The element's third coefficient.
    pub const COEFF_C: Field =
        COEFF_B.then("coeff_c", Kind::F32, "Beta: β in K; Steinhart–Hart: C; RTD: zero");
    /// Series resistor.
    pub const SERIES_OHM: Field = COEFF_C.then("series_ohm", Kind::F32, "the divider's series resistor, Ω");
    /// Full-scale code.
    pub const FULL_SCALE_CODE: Field = SERIES_OHM.then(
        "full_scale_code",
        Kind::U32,
        "code equivalent of the divider's supply (2^bits when the ADC reference is the supply)",
    );
    /// Open-circuit band.
    pub const OPEN_MARGIN: Field =
        FULL_SCALE_CODE.then("open_margin", Kind::U32, "codes this close to the open-circuit rail read open");
    /// Short-circuit band.
    pub const SHORT_MARGIN: Field =
        OPEN_MARGIN.then("short_margin", Kind::U32, "codes this close to the short-circuit rail read short");
    /// Lowest reported temperature.
    pub const MIN_C: Field =
        SHORT_MARGIN.then("min_c", Kind::F32, "lowest temperature the channel reports, °C");
    /// Highest reported temperature.
    pub const MAX_C: Field = MIN_C.then("max_c", Kind::F32, "highest temperature the channel reports, °C");

    /// Payload length.
    pub const LEN: usize = MAX_C.end();
    /// The fields in order.
    pub const FIELDS: &[Field] = &[
        ELEMENT,
        PLACEMENT,
        BITS,
        RESERVED,
        COEFF_A,
        COEFF_B,
        COEFF_C,
        SERIES_OHM,
        FULL_SCALE_CODE,
        OPEN_MARGIN,
        SHORT_MARGIN,
        MIN_C,
        MAX_C,
    ];
}

/// Section `0x8003`: the integer fixed-point form of the calibration ([`FixedCalibration`]): the
/// [`FixedHeader`] scalars, the table sizes, the temperature sensor's description, then the tables. Optional:
/// a reader that corrects in f32 may ignore it; [`Image::parse`](super::Image::parse) checks its structure
/// and [`Image::fixed_into`](super::Image::fixed_into) its values.
///
/// [`FixedCalibration`]: crate::fixed::FixedCalibration
/// [`FixedHeader`]: crate::fixed::FixedHeader
pub mod fixed {
    use super::{Elem, Field, Kind, Table};

    /// Section type.
    pub const KIND: u16 = 0x8003;

    /// Layout version of the fixed form.
    pub const LAYOUT: Field =
        Field::first("layout", Kind::U8, "layout version of the fixed form (`fixed::LAYOUT_VERSION`)");
    /// Bias bend switch.
    pub const BIAS_BEND: Field =
        LAYOUT.then("bias_bend", Kind::U8, "bias bend removed with λ(T): 0 off, 1 on");
    /// Sensitivity limit switch.
    pub const SENSITIVITY_LIMIT: Field =
        BIAS_BEND.then("sensitivity_limit", Kind::U8, "u < u_min(T) is below range: 0 off, 1 on");
    /// Sensor table present.
    pub const HAS_SENSOR: Field =
        SENSITIVITY_LIMIT.then("has_sensor", Kind::U8, "temperature-sensor table: 0 absent, 1 present");
    /// Offset fraction bits.
    pub const OFFSET_FRAC: Field = HAS_SENSOR.then("offset_frac", Kind::U8, "fraction bits of `offset`");
    /// Inverse-slope fraction bits.
    pub const INV_SLOPE_FRAC: Field =
        OFFSET_FRAC.then("inv_slope_frac", Kind::U8, "fraction bits of `inv_slope`");
    /// Residual fraction bits.
    pub const RESIDUAL_FRAC: Field =
        INV_SLOPE_FRAC.then("residual_frac", Kind::U8, "fraction bits of `residual`");
    /// Padding.
    pub const RESERVED: Field = RESIDUAL_FRAC.then("reserved", Kind::Reserved(1), "zero");
    /// Temperature knots.
    pub const T_KNOTS: Field =
        RESERVED.then("t_knots", Kind::U16, "knots of the temperature grid (control points: + 2)");
    /// x̃ knots.
    pub const XA_KNOTS: Field =
        T_KNOTS.then("xa_knots", Kind::U16, "knots of the residual's x̃ grid (control points: + 2)");
    /// Largest code.
    pub const ADC_MAX_CODE: Field =
        XA_KNOTS.then("adc_max_code", Kind::U32, "largest code of the log channel, as in *ranges*");
    /// Rail margin.
    pub const RAIL_MARGIN: Field = ADC_MAX_CODE.then(
        "rail_margin",
        Kind::U32,
        "codes this close to a rail are saturated, as in *ranges*",
    );
    /// Lowest calibrated temperature.
    pub const TEMP_MIN: Field =
        RAIL_MARGIN.then("temp_min", Kind::I32, "lowest calibrated temperature, θ (m°C · 2^10)");
    /// Highest calibrated temperature.
    pub const TEMP_MAX: Field = TEMP_MIN.then("temp_max", Kind::I32, "highest calibrated temperature, θ");
    /// Lowest accepted temperature.
    pub const TEMP_LO: Field = TEMP_MAX.then("temp_lo", Kind::I32, "lowest accepted temperature, θ");
    /// Highest accepted temperature.
    pub const TEMP_HI: Field = TEMP_LO.then("temp_hi", Kind::I32, "highest accepted temperature, θ");
    /// Temperature grid origin.
    pub const T_ORIGIN: Field = TEMP_HI.then("t_origin", Kind::I32, "θ of temperature knot 0");
    /// Temperature grid step.
    pub const T_STEP_LOG2: Field =
        T_ORIGIN.then("t_step_log2", Kind::U8, "temperature knot step 2^n θ, n in 20..=28 (16 windows each)");
    /// x̃ grid step.
    pub const XA_STEP_LOG2: Field =
        T_STEP_LOG2.then("xa_step_log2", Kind::U8, "x̃ knot step 2^n in Q24 Np, n in 16..=28");
    /// Padding.
    pub const RESERVED3: Field = XA_STEP_LOG2.then("reserved3", Kind::Reserved(2), "zero");
    /// x̃ grid origin.
    pub const XA_ORIGIN: Field = RESERVED3.then("xa_origin", Kind::I32, "x̃ of knot 0, Q24 Np");
    /// Lowest calibrated x.
    pub const X_MIN: Field = XA_ORIGIN.then("x_min", Kind::I32, "lowest calibrated x, Q24 Np");
    /// Highest calibrated x.
    pub const X_MAX: Field = X_MIN.then("x_max", Kind::I32, "highest calibrated x, Q24 Np");
    /// Offset table length.
    pub const OFFSET_LEN: Field = X_MAX.then("offset_len", Kind::U16, "entries of `offset`: t_knots + 2");
    /// Inverse-slope table length.
    pub const INV_SLOPE_LEN: Field =
        OFFSET_LEN.then("inv_slope_len", Kind::U16, "entries of `inv_slope`: t_knots + 2");
    /// Bias-floor table length.
    pub const LN_BIAS_LEN: Field = INV_SLOPE_LEN.then(
        "ln_bias_len",
        Kind::U16,
        "entries of `ln_bias`: t_knots + 2 with the bias bend, else 0",
    );
    /// Sensitivity-limit table length.
    pub const U_MIN_LEN: Field = LN_BIAS_LEN.then(
        "u_min_len",
        Kind::U16,
        "entries of `u_min`: t_knots + 2 with the sensitivity limit, else 0",
    );
    /// Residual table length.
    pub const RESIDUAL_LEN: Field = U_MIN_LEN.then(
        "residual_len",
        Kind::U16,
        "entries of `residual`: (t_knots + 2)·(xa_knots + 2), or 0 for a residual of zero everywhere",
    );
    /// Sensor table length.
    pub const SENSOR_KNOTS_LEN: Field = RESIDUAL_LEN.then(
        "sensor_knots_len",
        Kind::U16,
        "entries of `sensor_knots`: ((code_hi − code_lo) >> step_log2) + 4 with a sensor table, else 0",
    );
    /// Sensor span, low end.
    pub const SENSOR_CODE_LO: Field = SENSOR_KNOTS_LEN.then(
        "sensor_code_lo",
        Kind::U32,
        "lowest code of the sensor's valid span (0 without)",
    );
    /// Sensor span, high end.
    pub const SENSOR_CODE_HI: Field =
        SENSOR_CODE_LO.then("sensor_code_hi", Kind::U32, "highest code of the valid span (0 without)");
    /// Far-below fault zone.
    pub const SENSOR_FAR_BELOW: Field = SENSOR_CODE_HI.then(
        "sensor_far_below_code",
        Kind::U32,
        "codes below it report `fault_far_below` (0 without a sensor)",
    );
    /// Far-above fault zone.
    pub const SENSOR_FAR_ABOVE: Field = SENSOR_FAR_BELOW.then(
        "sensor_far_above_code",
        Kind::U32,
        "codes above it report `fault_far_above` (0 without a sensor)",
    );
    /// Sensor knot spacing.
    pub const SENSOR_STEP_LOG2: Field =
        SENSOR_FAR_ABOVE.then("sensor_step_log2", Kind::U8, "sensor knot spacing 2^n codes, n ≤ 16");
    /// Fault just below the span.
    pub const FAULT_BELOW: Field =
        SENSOR_STEP_LOG2.then("fault_below", Kind::U8, "0 open, 1 short, 2 outside the model's range");
    /// Fault far below the span.
    pub const FAULT_FAR_BELOW: Field = FAULT_BELOW.then("fault_far_below", Kind::U8, "as `fault_below`");
    /// Fault just above the span.
    pub const FAULT_ABOVE: Field = FAULT_FAR_BELOW.then("fault_above", Kind::U8, "as `fault_below`");
    /// Fault far above the span.
    pub const FAULT_FAR_ABOVE: Field = FAULT_ABOVE.then("fault_far_above", Kind::U8, "as `fault_below`");
    /// Padding.
    pub const RESERVED2: Field = FAULT_FAR_ABOVE.then("reserved2", Kind::Reserved(3), "zero");
    /// The calibration the tables were built from: its fingerprint (CRC-32 of the *ranges* payload then the
    /// *model_f32* payload, [`crate::field::fingerprint`]), checked against the image's own sections.
    pub const MODEL_FINGERPRINT: Field = RESERVED2.then(
        "model_fingerprint",
        Kind::U32,
        "CRC-32 of the ranges and model_f32 payloads the tables were built from",
    );

    /// Length of the fixed part, before the tables.
    pub const HEAD_LEN: usize = MODEL_FINGERPRINT.end();

    /// The fields in order.
    pub const FIELDS: &[Field] = &[
        LAYOUT,
        BIAS_BEND,
        SENSITIVITY_LIMIT,
        HAS_SENSOR,
        OFFSET_FRAC,
        INV_SLOPE_FRAC,
        RESIDUAL_FRAC,
        RESERVED,
        T_KNOTS,
        XA_KNOTS,
        ADC_MAX_CODE,
        RAIL_MARGIN,
        TEMP_MIN,
        TEMP_MAX,
        TEMP_LO,
        TEMP_HI,
        T_ORIGIN,
        T_STEP_LOG2,
        XA_STEP_LOG2,
        RESERVED3,
        XA_ORIGIN,
        X_MIN,
        X_MAX,
        OFFSET_LEN,
        INV_SLOPE_LEN,
        LN_BIAS_LEN,
        U_MIN_LEN,
        RESIDUAL_LEN,
        SENSOR_KNOTS_LEN,
        SENSOR_CODE_LO,
        SENSOR_CODE_HI,
        SENSOR_FAR_BELOW,
        SENSOR_FAR_ABOVE,
        SENSOR_STEP_LOG2,
        FAULT_BELOW,
        FAULT_FAR_BELOW,
        FAULT_ABOVE,
        FAULT_FAR_ABOVE,
        RESERVED2,
        MODEL_FINGERPRINT,
    ];

    /// O(T) control points.
    pub const OFFSET: Table =
        Table { name: "offset", elem: Elem::I32, count: OFFSET_LEN, doc: "O(T), codes · 2^offset_frac / 6" };
    /// 1/S(T) control points.
    pub const INV_SLOPE: Table = Table {
        name: "inv_slope",
        elem: Elem::I32,
        count: INV_SLOPE_LEN,
        doc: "1/S(T), Np/code · 2^inv_slope_frac / 6, all > 0",
    };
    /// λ(T) control points.
    pub const LN_BIAS: Table =
        Table { name: "ln_bias", elem: Elem::I32, count: LN_BIAS_LEN, doc: "λ(T) = ln β(T), Q24 Np / 6" };
    /// u_min(T) control points.
    pub const U_MIN: Table =
        Table { name: "u_min", elem: Elem::I32, count: U_MIN_LEN, doc: "u_min(T), Q24 Np / 6" };
    /// The sensor table's control points.
    pub const SENSOR_KNOTS: Table = Table {
        name: "sensor_knots",
        elem: Elem::I32,
        count: SENSOR_KNOTS_LEN,
        doc: "θ / 6 over the sensor code, the first at knot −1",
    };
    /// r(x̃, T) control points.
    pub const RESIDUAL: Table = Table {
        name: "residual",
        elem: Elem::I16,
        count: RESIDUAL_LEN,
        doc: "r(x̃, T), Np · 2^residual_frac · 2/9, row-major by temperature; then zero padding to a multiple of 4",
    };

    /// The tables in the order they follow the fields: every i32 table first, so each starts 4-byte aligned.
    pub const TABLES: &[Table] = &[OFFSET, INV_SLOPE, LN_BIAS, U_MIN, SENSOR_KNOTS, RESIDUAL];
}

/// The CRC at the end of every image.
pub mod trailer {
    use super::Field;

    /// The CRC ([`crate::record::layout::CRC`]).
    pub const CRC: Field = crate::record::layout::CRC;
    /// Length of the trailer.
    pub const LEN: usize = crate::record::layout::TRAILER_LEN;
    /// The fields in order.
    pub const FIELDS: &[Field] = &[CRC];
}

/// The smallest image that can exist: a header and a CRC (it is refused for lacking the required sections).
pub const MIN_LEN: usize = header::LEN + trailer::LEN;
/// The largest image this build accepts or writes (a generous flash page budget).
pub const MAX_LEN: usize = 65536;
/// Bytes the temperature-sensor section adds to an image (its header and payload).
pub const SENSOR_SECTION_LEN: usize = section::HEADER_LEN + sensor::LEN;
/// Total length of an image that holds the two required sections and nothing else.
pub const F32_IMAGE_LEN: usize =
    header::LEN + section::HEADER_LEN + ranges::LEN + section::HEADER_LEN + model_f32::LEN + trailer::LEN;

// The layout keeps every section and the CRC 4-byte aligned (flash word writes, aligned reads on the MCU).
const _: () = assert!(header::LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(section::HEADER_LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(ranges::LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(model_f32::LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(MAX_LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(fixed::HEAD_LEN.is_multiple_of(section::ALIGN));
const _: () = assert!(sensor::LEN.is_multiple_of(section::ALIGN));

/// One part of the layout, for the table in the docs and the tests that check the layout.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Part {
    /// What the part is.
    pub name: &'static str,
    /// Its section type, for sections.
    pub kind: Option<u16>,
    /// Its fields in order.
    pub fields: &'static [Field],
    /// The variable-length tables that follow its fields, in order (empty for most parts).
    pub tables: &'static [Table],
}

/// Every part of the layout in the order it appears in an image.
pub const PARTS: &[Part] = &[
    Part { name: "header", kind: None, fields: header::FIELDS, tables: &[] },
    Part { name: "section header", kind: None, fields: section::FIELDS, tables: &[] },
    Part { name: "ranges", kind: Some(ranges::KIND), fields: ranges::FIELDS, tables: &[] },
    Part { name: "model_f32", kind: Some(model_f32::KIND), fields: model_f32::FIELDS, tables: &[] },
    Part { name: "sensor", kind: Some(sensor::KIND), fields: sensor::FIELDS, tables: &[] },
    Part { name: "fixed", kind: Some(fixed::KIND), fields: fixed::FIELDS, tables: fixed::TABLES },
    Part { name: "trailer", kind: None, fields: trailer::FIELDS, tables: &[] },
];

/// Renders the layout as the Markdown table shown in the [`image`](super) docs. The tables of a part follow
/// its fields back to back: their offset is shown as `+`, their size as a multiple of their count field.
pub fn write_markdown_table(w: &mut dyn fmt::Write) -> fmt::Result {
    w.write_str("| part | offset | size | field | type | meaning |\n|---|---:|---:|---|---|---|\n")?;
    for part in PARTS {
        let name = || match part.kind {
            Some(k) => PartName::Section(part.name, k),
            None => PartName::Plain(part.name),
        };
        for f in part.fields {
            f.write_row(w, &name(), f.offset)?;
        }
        for t in part.tables {
            writeln!(
                w,
                "| {} | + | {}·`{}` | `{}` | `{}[{}]` | {} |",
                name(),
                t.elem.size(),
                t.count.name,
                t.name,
                t.elem.type_name(),
                t.count.name,
                t.doc
            )?;
        }
    }
    Ok(())
}

enum PartName {
    Plain(&'static str),
    Section(&'static str, u16),
}

impl fmt::Display for PartName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PartName::Plain(n) => f.write_str(n),
            PartName::Section(n, k) => write!(f, "{n} (`{k:#06x}`)"),
        }
    }
}
