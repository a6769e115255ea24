/* ---- types ---- */

/* A unit's tables: the fields of logtrim::fixed::FixedHeader, then each table with its length. */
typedef struct lt_fixed {
    uint8_t layout;
    uint32_t adc_max_code;
    uint32_t rail_margin;
    int32_t temp_min, temp_max, temp_lo, temp_hi; /* theta: m°C * 1024 */
    uint16_t t_knots;
    int32_t t_origin;
    uint8_t t_step_log2;
    uint8_t offset_frac;
    uint8_t inv_slope_frac;
    int bias_bend;
    int sensitivity_limit;
    uint16_t xa_knots;
    int32_t xa_origin;
    uint8_t xa_step_log2;
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

/* The four per-temperature values at one temperature (offset, inverse slope, bias floor, sensitivity limit). */
typedef struct lt_scalars {
    int32_t offset;
    uint32_t inv_slope;
    int32_t ln_bias, u_min;
} lt_scalars;

/* The per-temperature values over one window of the temperature grid (logtrim::fixed::Window): the values at
 * its start, the slopes (minus the curvature for the offset and the inverse slope) and the curvatures. */
typedef struct lt_window {
    lt_scalars start;
    int32_t slope[4]; /* d - c for the offset and the inverse slope, d for the others */
    int32_t curv[2];  /* c for the offset and the inverse slope */
} lt_window;

/* Everything a correction needs at one temperature (logtrim::fixed::FixedStage): the scalars and the
 * residual collapsed over temperature for every x~ column. */
typedef struct lt_stage {
    int extrapolated;
    lt_scalars s;
    int32_t row[LT_ROW_CAPACITY];
    uint32_t len;
} lt_stage;

/* The window of the last temperature and the last temperature codes' theta (logtrim::fixed::StageCache):
 * start it with lt_stage_cache_init; one cache belongs to one calibration. */
typedef struct lt_stage_cache {
    const lt_fixed *cal;
    uint32_t window; /* LT_NO_WINDOW when empty */
    lt_window values;
    int32_t row0[LT_ROW_CAPACITY], drow[LT_ROW_CAPACITY];
    uint32_t len;
    uint32_t memo_key[LT_STAGE_MEMO]; /* temperature code + 1; 0 marks an empty entry */
    int32_t memo_theta[LT_STAGE_MEMO];
    uint32_t code_lo, code_hi;
} lt_stage_cache;
