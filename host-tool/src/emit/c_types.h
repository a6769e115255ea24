/* ---- types ---- */

/* The outcome of a correction (the Rust path's Result: LT_OK or the error's kind). */
typedef enum lt_status {
    LT_OK = 0,
    LT_CODE_OUT_OF_ADC_RANGE,     /* code above the converter's largest code */
    LT_SATURATED,                 /* code within the rail margin */
    LT_BELOW_RANGE,               /* below the calibrated x range, or the sensitivity is too low */
    LT_ABOVE_RANGE,               /* above the calibrated x range */
    LT_TEMPERATURE_OUT_OF_RANGE,  /* beyond the calibrated range plus the allowed extrapolation */
    LT_SENSOR_OPEN,               /* temperature sensor open */
    LT_SENSOR_SHORT,              /* temperature sensor short */
    LT_SENSOR_OUT_OF_MODEL_RANGE, /* temperature sensor outside its model's range */
    LT_BAD_TABLE,                 /* the tables are inconsistent */
    LT_NOT_CALIBRATED             /* no sensor table for a raw temperature code */
} lt_status;

/* Output units, in the order of logtrim::Unit::ALL. */
typedef enum lt_unit_kind {
    LT_NEPERS = 0,             /* Q24 */
    LT_DECADES,                /* Q24 */
    LT_DB_POWER,               /* Q24 */
    LT_DB_AMPLITUDE,           /* Q24 */
    LT_ABSORBANCE,             /* Q24 */
    LT_TRANSMITTANCE_PERCENT,  /* Q24 */
    LT_RATIO                   /* Q32 */
} lt_unit_kind;

/* A unit's tables: the fields of logtrim::fixed::FixedHeader, then each table with its length. */
typedef struct lt_fixed {
    uint8_t layout;
    uint32_t adc_max_code;
    uint32_t rail_margin;
    int32_t temp_min, temp_max, temp_lo, temp_hi; /* theta: m°C * 1024 */
    uint16_t t_knots;
    int32_t t_origin;
    int32_t t_inv_step;
    uint8_t offset_frac;
    uint8_t inv_slope_frac;
    int bias_bend;
    int sensitivity_limit;
    uint16_t xa_knots;
    int32_t xa_origin;
    int32_t xa_inv_step;
    uint8_t residual_frac;
    int32_t x_min, x_max; /* Q24 nepers */
    const int32_t *offset; uint32_t offset_len;
    const int32_t *inv_slope; uint32_t inv_slope_len;
    const int32_t *ln_bias; uint32_t ln_bias_len;
    const int32_t *u_min; uint32_t u_min_len;
    const int16_t *residual; uint32_t residual_len;
    int has_sensor;
    uint32_t sensor_code_lo, sensor_code_hi;
    uint8_t sensor_step_log2;
    lt_status fault_below; uint32_t far_below_code; lt_status fault_far_below;
    lt_status fault_above; uint32_t far_above_code; lt_status fault_far_above;
    const int32_t *sensor_knots; uint32_t sensor_len;
} lt_fixed;

/* A corrected reading: x in Q24 nepers and the extrapolation flag. */
typedef struct lt_reading {
    int32_t x;
    int temperature_extrapolated;
} lt_reading;

/* The temperature-dependent part of a correction (reusable for many log codes at one temperature). */
typedef struct lt_stage {
    int extrapolated;
    int64_t seg;
    int64_t w[4];
    int64_t offset, inv_slope, ln_bias, u_min;
} lt_stage;
