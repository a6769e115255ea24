/* ---- types ---- */

/* A unit's tables: the fields of logtrim::fixed::FixedHeader, then each table with its length. */
typedef struct ltrm_fixed {
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
    ltrm_status fault_below; uint32_t far_below_code; ltrm_status fault_far_below;
    ltrm_status fault_above; uint32_t far_above_code; ltrm_status fault_far_above;
    const int32_t *sensor_knots; uint32_t sensor_len;
    uint32_t identity; /* the fingerprint field records bind to; 0 when unknown */
} ltrm_fixed;

/* A corrected reading: x in Q24 nepers and the extrapolation flag. */
typedef struct ltrm_reading {
    int32_t x;
    int temperature_extrapolated;
} ltrm_reading;

/* The four per-temperature values at one temperature (offset, inverse slope, bias floor, sensitivity limit). */
typedef struct ltrm_scalars {
    int32_t offset;
    uint32_t inv_slope;
    int32_t ln_bias, u_min;
} ltrm_scalars;

/* The per-temperature values over one window of the temperature grid (logtrim::fixed::Window): the values at
 * its start, the slopes (minus the curvature for the offset and the inverse slope) and the curvatures. */
typedef struct ltrm_window {
    ltrm_scalars start;
    int32_t slope[4]; /* d - c for the offset and the inverse slope, d for the others */
    int32_t curv[2];  /* c for the offset and the inverse slope */
} ltrm_window;

/* Everything a correction needs at one temperature (logtrim::fixed::FixedStage): the scalars and the
 * residual collapsed over temperature for every x~ column. */
typedef struct ltrm_stage {
    int extrapolated;
    ltrm_scalars s;
    int32_t row[LTRM_ROW_CAPACITY];
    uint32_t len;
} ltrm_stage;

/* The window of the last temperature and the last temperature codes' theta (logtrim::fixed::StageCache):
 * start it with ltrm_stage_cache_init; one cache belongs to one calibration. */
typedef struct ltrm_stage_cache {
    const ltrm_fixed *cal;
    uint32_t window; /* LTRM_NO_WINDOW when empty */
    ltrm_window values;
    int32_t row0[LTRM_ROW_CAPACITY], drow[LTRM_ROW_CAPACITY];
    uint32_t len;
    uint32_t memo_key[LTRM_STAGE_MEMO]; /* temperature code + 1; 0 marks an empty entry */
    int32_t memo_theta[LTRM_STAGE_MEMO];
    uint32_t code_lo, code_hi;
} ltrm_stage_cache;

/* A stage cache and x over the log code axis for its window (logtrim::fixed::CodeTable): knot k at code
 * base + (k - 1) * 2^step holds x at the window's start and its change to the window's end; usable[i] says
 * whether codes base + i * 2^step .. are interpolated from knots i..i+3 (else the stage cache corrects
 * them, exactly as the direct path). Start it with ltrm_code_table_init; one table belongs to one
 * calibration. About 1.3 KiB. */
typedef struct ltrm_code_table {
    /* What a hit reads first (small offsets, so that a Cortex-M0 reaches each with one load). */
    uint32_t base, step;
    /* The temperatures a hit takes with one check: theta in [th_lo, th_lo + th_n) and m°C in
     * [mc_lo, mc_lo + mc_n) lie in the window, the accepted range and on one side of each end of the
     * calibrated range (extrapolated for all of them or none); empty without a window. */
    int32_t th_lo, mc_lo;
    uint32_t th_n, mc_n;
    int extrapolated;
    int32_t w_start; /* theta of the window's start; (theta - w_start) >> f_shift is the Q16 fraction */
    uint32_t f_shift;
    int32_t x_min, x_max; /* the calibrated x range (Q24), kept beside the table */
    uint32_t raw_key; /* a temperature code + 1 whose theta is in the hit range (0: none), and its fraction */
    uint32_t raw_f16;
    uint32_t window; /* LTRM_NO_WINDOW when empty */
    uint8_t usable[LTRM_TABLE_KNOTS];
    int32_t x0[LTRM_TABLE_KNOTS], dx[LTRM_TABLE_KNOTS];
    ltrm_stage_cache cache;
} ltrm_code_table;

/* ---- run-time images and field records ---- */

/* Caller-owned RAM that a unit's tables are copied into when its image is loaded (the C side of
 * logtrim::image::FixedStorage): four per-temperature tables of t_capacity entries each (t_tables holds
 * 4 * t_capacity words), the temperature sensor's table of s_capacity entries, the residual of r_capacity
 * entries. LTRM_RAM_DEFINE declares one sized for the host tool's default tables. */
typedef struct ltrm_ram {
    int32_t *t_tables; uint32_t t_capacity;
    int32_t *sensor; uint32_t s_capacity;
    int16_t *residual; uint32_t r_capacity;
} ltrm_ram;

/* The raw temperature channel's description (image section 0x8004, logtrim::TemperatureSensor): the element
 * (0 NTC by Beta: coeff = R0 ohm, T0 degC, beta K; 1 NTC by Steinhart-Hart: coeff = A, B, C; 2 platinum RTD:
 * coeff[0] = R0 ohm), the divider (placement 0 element to ground, 1 to supply; series resistor, ADC bits, the
 * supply's code, the open and short fault bands) and the range it reports. */
typedef struct ltrm_sensor {
    uint8_t element;
    uint8_t placement;
    uint8_t bits;
    float coeff[3];
    float series_ohm;
    uint32_t full_scale_code, open_margin, short_margin;
    float min_c, max_c;
} ltrm_sensor;

/* What an image says about itself besides its tables. identity is the fingerprint trim and blank records
 * bind to (logtrim::field::fingerprint_of_image); serial is NUL-terminated printable ASCII; has_sensor is 1
 * when the image describes a raw temperature channel (in sensor), for an f32 firmware to linearise it. */
typedef struct ltrm_image_info {
    uint16_t version;
    uint32_t sequence;
    uint64_t calibrated_at; /* Unix seconds, UTC */
    char serial[17];
    uint32_t crc;
    uint32_t identity;
    uint32_t len; /* bytes of the image, header to CRC */
    int has_sensor;
    ltrm_sensor sensor;
} ltrm_image_info;

/* The two slots of an A/B pair. */
typedef enum ltrm_slot { LTRM_SLOT_NONE = -1, LTRM_SLOT_A = 0, LTRM_SLOT_B = 1 } ltrm_slot;

/* Why the slot that was not chosen lost (logtrim::record::slots::Rejected). */
typedef enum ltrm_rejected {
    LTRM_REJECTED_INVALID = 0,           /* its record failed a check: the slot's status says which */
    LTRM_REJECTED_OTHER_CALIBRATION = 1, /* a valid field record made on another factory calibration */
    LTRM_REJECTED_OLDER = 2,             /* a usable record with a lower sequence counter (or time) */
    LTRM_REJECTED_TIE_IDENTICAL = 3,     /* the same sequence and time, the same bytes: a duplicate */
    LTRM_REJECTED_TIE_DIFFERENT = 4      /* the same sequence and time, different bytes: a writer fault */
} ltrm_rejected;

/* The outcome of an A/B choice: the slot used (LTRM_SLOT_NONE when neither is usable), each slot's own
 * status (LTRM_OK for a record that passed its checks, LTRM_OTHER_CALIBRATION for one bound to another
 * calibration), and why the other slot lost. */
typedef struct ltrm_selection {
    ltrm_slot slot;
    ltrm_status status_a, status_b;
    ltrm_rejected other;
} ltrm_selection;

/* A checked trim record (logtrim::field::Trim): x' = g*x + o on the fixed path. The f32 fields are kept
 * as their bit patterns (this library does no float arithmetic on them). */
typedef struct ltrm_trim {
    uint32_t sequence;
    uint64_t written_at;
    uint32_t factory; /* the identity of the calibration it was made on; 0 = bound to none */
    uint8_t kind;     /* LTRM_TRIM_CLEARED, LTRM_TRIM_ONE_POINT, LTRM_TRIM_TWO_POINT */
    int32_t offset_q24;
    int32_t gain_q30;
    int32_t temp_mc;
    uint32_t offset_f32_bits, gain_f32_bits, standard_bits[2];
} ltrm_trim;

/* A checked blank record (logtrim::field::Blank): readings are reported as x - x_blank. */
typedef struct ltrm_blank {
    uint32_t sequence;
    uint64_t written_at;
    uint32_t factory;
    int32_t x_q24;
    uint32_t x_f32_bits;
    int32_t temp_mc;
    uint32_t samples;
} ltrm_blank;

/* The instrument's limits on a trim (logtrim::field::TrimLimits); LTRM_TRIM_LIMITS_DEFAULT initialises
 * one with the library's defaults. */
typedef struct ltrm_trim_limits {
    int32_t max_offset_q24;
    int32_t max_gain_error_q30;
    int32_t min_separation_q24;
} ltrm_trim_limits;

/* A channel's field layers over the factory reading (logtrim::field::Layers): a trim, then a blank. */
typedef struct ltrm_layers {
    int has_trim;
    ltrm_trim trim;
    int has_blank;
    ltrm_blank blank;
} ltrm_layers;
