/* ---- records: the framing every record shares (logtrim::record), checked in the same order ---- */

static const uint32_t ltrm_crc_nibble[16] = {
    0x00000000u, 0x1db71064u, 0x3b6e20c8u, 0x26d930acu, 0x76dc4190u, 0x6b6b51f4u, 0x4db26158u, 0x5005713cu,
    0xedb88320u, 0xf00f9344u, 0xd6d6a3e8u, 0xcb61b38cu, 0x9b64c2b0u, 0x86d3d2d4u, 0xa00ae278u, 0xbdbdf21cu,
};

/* CRC-32/ISO-HDLC (reflected polynomial 0xedb88320, initial and final XOR 0xffffffff), four bits a step. */
uint32_t ltrm_crc32(uint32_t crc, const uint8_t *bytes, uint32_t n) {
    uint32_t i;
    crc = ~crc;
    for (i = 0; i < n; i++) {
        crc ^= bytes[i];
        crc = (crc >> 4) ^ ltrm_crc_nibble[crc & 15u];
        crc = (crc >> 4) ^ ltrm_crc_nibble[crc & 15u];
    }
    return ~crc;
}

static uint16_t ltrm_le16(const uint8_t *p) { return (uint16_t)(p[0] | (p[1] << 8)); }
static uint32_t ltrm_le32(const uint8_t *p) {
    return (uint32_t)p[0] | ((uint32_t)p[1] << 8) | ((uint32_t)p[2] << 16) | ((uint32_t)p[3] << 24);
}
static int32_t ltrm_le32s(const uint8_t *p) {
    uint32_t u = ltrm_le32(p);
    return u <= 0x7fffffffu ? (int32_t)u : -(int32_t)(~u) - 1;
}
static uint64_t ltrm_le64(const uint8_t *p) { return (uint64_t)ltrm_le32(p) | ((uint64_t)ltrm_le32(p + 4) << 32); }

/* The first non-zero byte of n bytes: LTRM_RESERVED_NOT_ZERO. */
static ltrm_status ltrm_zeros(const uint8_t *p, uint32_t n) {
    uint32_t i;
    for (i = 0; i < n; i++)
        if (p[i] != 0u) return LTRM_RESERVED_NOT_ZERO;
    return LTRM_OK;
}

/* A flag byte: 0 or 1. */
static ltrm_status ltrm_flag(const uint8_t *p, int *out) {
    if (*p > 1u) return LTRM_BAD_FLAG;
    *out = *p;
    return LTRM_OK;
}

/* How a record is framed (logtrim::record::frame::Framing). */
typedef struct ltrm_framing {
    const char *magic;
    uint16_t version;
    uint32_t header_len;
    uint32_t len_offset, len_size; /* the total length: a u16 or a u32 in the header */
    uint32_t min_len, max_len;
} ltrm_framing;

static const char *const ltrm_magics[3] = { LTRM_MAGIC_BLANK, LTRM_MAGIC_TRIM, LTRM_MAGIC_IMAGE };

static int ltrm_is_magic(const uint8_t *p, const char *m) {
    return p[0] == (uint8_t)m[0] && p[1] == (uint8_t)m[1] && p[2] == (uint8_t)m[2] && p[3] == (uint8_t)m[3];
}

/* The framing checks, in order: magic, version, declared length (possible, present, and all there is
 * unless prefix), CRC. *total is the record's length. */
static ltrm_status ltrm_frame(const ltrm_framing *f, const uint8_t *b, uint32_t avail, int prefix, uint32_t *total) {
    uint32_t declared, i, stored;
    if (avail < LTRM_L_REC_MAGIC + 4u) return LTRM_TRUNCATED;
    if (!ltrm_is_magic(b + LTRM_L_REC_MAGIC, f->magic)) {
        for (i = 0; i < 3u; i++)
            if (ltrm_is_magic(b + LTRM_L_REC_MAGIC, ltrm_magics[i])) return LTRM_OTHER_RECORD;
        return LTRM_BAD_MAGIC;
    }
    if (avail < LTRM_L_REC_VERSION + 2u) return LTRM_TRUNCATED;
    if (ltrm_le16(b + LTRM_L_REC_VERSION) != f->version) return LTRM_UNSUPPORTED_VERSION;
    if (avail < f->len_offset + f->len_size) return LTRM_TRUNCATED;
    declared = f->len_size == 2u ? ltrm_le16(b + f->len_offset) : ltrm_le32(b + f->len_offset);
    if (declared < f->min_len || declared > f->max_len || declared % LTRM_L_ALIGN != 0u) return LTRM_BAD_LENGTH;
    if (avail < declared) return LTRM_TRUNCATED;
    if (!prefix && avail != declared) return LTRM_LENGTH_MISMATCH;
    stored = ltrm_le32(b + declared - LTRM_L_TRAILER_LEN);
    if (stored != ltrm_crc32(0u, b, declared - LTRM_L_TRAILER_LEN)) return LTRM_CRC_MISMATCH;
    *total = declared;
    return LTRM_OK;
}

/* The A/B rule (logtrim::record::slots): of the usable records the higher (sequence, time) wins, slot A on
 * a tie. ok_a/ok_b: usable; seq/time: each record's; same: the two records' bytes are identical. */
static ltrm_status ltrm_choose(ltrm_selection *sel, int ok_a, int ok_b, uint32_t seq_a, uint64_t time_a, uint32_t seq_b,
                               uint64_t time_b, int same) {
    sel->other = LTRM_REJECTED_INVALID;
    if (ok_a && ok_b) {
        int b_newer = seq_b > seq_a || (seq_b == seq_a && time_b > time_a);
        sel->slot = b_newer ? LTRM_SLOT_B : LTRM_SLOT_A;
        if (seq_a == seq_b && time_a == time_b)
            sel->other = same ? LTRM_REJECTED_TIE_IDENTICAL : LTRM_REJECTED_TIE_DIFFERENT;
        else
            sel->other = LTRM_REJECTED_OLDER;
        return LTRM_OK;
    }
    if (ok_a || ok_b) {
        sel->slot = ok_a ? LTRM_SLOT_A : LTRM_SLOT_B;
        if ((ok_a ? sel->status_b : sel->status_a) == LTRM_OTHER_CALIBRATION)
            sel->other = LTRM_REJECTED_OTHER_CALIBRATION;
        return LTRM_OK;
    }
    sel->slot = LTRM_SLOT_NONE;
    return LTRM_NO_VALID_RECORD;
}

static int ltrm_same_bytes(const uint8_t *a, uint32_t a_len, const uint8_t *b, uint32_t b_len) {
    uint32_t i;
    if (a_len != b_len) return 0;
    for (i = 0; i < a_len; i++)
        if (a[i] != b[i]) return 0;
    return 1;
}

/* ---- images (logtrim::image): the checks of Image::parse, in its order ---- */

static const ltrm_framing ltrm_image_framing = {
    LTRM_MAGIC_IMAGE, LTRM_IMAGE_VERSION, LTRM_L_HDR_LEN, LTRM_L_HDR_TOTAL_LEN, 4u, LTRM_L_IMAGE_MIN_LEN,
    LTRM_L_IMAGE_MAX_LEN,
};

/* An f32's bits: finite, and its value (a union: no aliasing rule involved). */
static int ltrm_finite(uint32_t bits) { return (bits & 0x7f800000u) != 0x7f800000u; }
static float ltrm_float(uint32_t bits) {
    union {
        uint32_t u;
        float f;
    } v;
    v.u = bits;
    return v.f;
}

/* Calibration::validate of the f32 model (the same comparisons; its three slope evaluations in double,
 * as the Rust code does them: compile without contraction of a*b+c, as -std=c99 does). */
static ltrm_status ltrm_check_model(const uint8_t *r, const uint8_t *m) {
    uint32_t bits = r[LTRM_L_RANGES_ADC_BITS], max, margin = ltrm_le32(r + LTRM_L_RANGES_RAIL_MARGIN), i, k, n;
    float t_min = ltrm_float(ltrm_le32(r + LTRM_L_RANGES_T_MIN_C)), t_max = ltrm_float(ltrm_le32(r + LTRM_L_RANGES_T_MAX_C));
    float ext = ltrm_float(ltrm_le32(r + LTRM_L_RANGES_T_EXTRAPOLATION_K));
    float x_min = ltrm_float(ltrm_le32(r + LTRM_L_RANGES_X_MIN)), x_max = ltrm_float(ltrm_le32(r + LTRM_L_RANGES_X_MAX));
    float tc[3], lo, hi;
    double center = ltrm_float(ltrm_le32(m + LTRM_L_MODEL_T_CENTER_C));
    double half = ltrm_float(ltrm_le32(m + LTRM_L_MODEL_T_HALF_SPAN_K));
    double pole = ltrm_float(ltrm_le32(m + LTRM_L_MODEL_POLE));
    if (bits == 0u || bits > 24u) return LTRM_BAD_CALIBRATION;
    max = (1u << bits) - 1u;
    if ((margin > 0x7fffffffu ? 0xffffffffu : 2u * margin) >= max) return LTRM_BAD_CALIBRATION;
    if (!(t_min < t_max) || !(ext >= 0.0f) || t_min - ext < -273.0f) return LTRM_BAD_CALIBRATION;
    if (!(x_min < x_max)) return LTRM_BAD_CALIBRATION;
    if (!(half > 0.0) || !(ltrm_float(ltrm_le32(m + LTRM_L_MODEL_T_REF_K)) > 0.0f)) return LTRM_BAD_CALIBRATION;
    if (!(ltrm_float(ltrm_le32(m + LTRM_L_MODEL_RESIDUAL_X_HALF_SPAN)) > 0.0f) ||
        !(ltrm_float(ltrm_le32(m + LTRM_L_MODEL_LN_BETA0)) < 30.0f))
        return LTRM_BAD_CALIBRATION;
    /* The slope at both ends of the accepted range and in its middle: positive, finite, and the gain pole's
     * denominator above 0.05. */
    lo = t_min - ext;
    hi = t_max + ext;
    tc[0] = lo;
    tc[1] = 0.5f * (lo + hi);
    tc[2] = hi;
    n = m[LTRM_L_MODEL_SLOPE_LEN];
    for (i = 0; i < 3u; i++) {
        double tau = ((double)tc[i] - center) / half, den = 1.0 + pole * tau, two_t = tau + tau, b1 = 0.0, b2 = 0.0, s;
        for (k = n; k > 1u; k--) {
            double b0 = (double)ltrm_float(ltrm_le32(m + LTRM_L_MODEL_SLOPE_COEFFS + 4u * (k - 1u))) + two_t * b1 - b2;
            b2 = b1;
            b1 = b0;
        }
        s = n == 0u ? 0.0 : (double)ltrm_float(ltrm_le32(m + LTRM_L_MODEL_SLOPE_COEFFS)) + tau * b1 - b2;
        if (!(den > 0.05 && s > 0.0 && s - s == 0.0)) return LTRM_BAD_CALIBRATION;
    }
    return LTRM_OK;
}

/* The value checks of the two required sections (the payloads' reserved bytes and flag, term counts,
 * every stored f32 finite, then the model's validation), in the order of the Rust parser. */
static ltrm_status ltrm_check_f32_sections(const uint8_t *r, const uint8_t *m) {
    static const uint8_t counts[5][2] = {
        { LTRM_L_MODEL_OFFSET_LEN, LTRM_MAX_SERIES }, { LTRM_L_MODEL_SLOPE_LEN, LTRM_MAX_SERIES },
        { LTRM_L_MODEL_BULK_LEN, LTRM_MAX_SERIES },   { LTRM_L_MODEL_RESIDUAL_NX, LTRM_MAX_RESIDUAL },
        { LTRM_L_MODEL_RESIDUAL_NT, LTRM_MAX_RESIDUAL },
    };
    static const uint8_t ranges_scalars[6] = {
        LTRM_L_RANGES_T_MIN_C, LTRM_L_RANGES_T_MAX_C, LTRM_L_RANGES_T_EXTRAPOLATION_K,
        LTRM_L_RANGES_X_MIN,   LTRM_L_RANGES_X_MAX,   LTRM_L_RANGES_X_MIN_SENSITIVITY,
    };
    static const uint8_t model_scalars[10] = {
        LTRM_L_MODEL_LEVEL_SHIFT_CODE, LTRM_L_MODEL_T_CENTER_C,      LTRM_L_MODEL_T_HALF_SPAN_K,
        LTRM_L_MODEL_T_REF_K,          LTRM_L_MODEL_POLE,            LTRM_L_MODEL_LN_BETA0,
        LTRM_L_MODEL_LN_BETA1,         LTRM_L_MODEL_BIAS_REFERENCE,  LTRM_L_MODEL_RESIDUAL_X_CENTER,
        LTRM_L_MODEL_RESIDUAL_X_HALF_SPAN,
    };
    static const uint8_t arrays[4][2] = {
        { LTRM_L_MODEL_OFFSET_COEFFS, LTRM_MAX_SERIES },
        { LTRM_L_MODEL_SLOPE_COEFFS, LTRM_MAX_SERIES },
        { LTRM_L_MODEL_BULK_COEFFS, LTRM_MAX_SERIES },
        { LTRM_L_MODEL_RESIDUAL_COEFFS, LTRM_MAX_RESIDUAL * LTRM_MAX_RESIDUAL },
    };
    uint32_t i, k;
    ltrm_status st;
    int flag;
    if ((st = ltrm_zeros(r + LTRM_L_RANGES_RESERVED, LTRM_L_RANGES_RESERVED_SIZE)) != LTRM_OK) return st;
    if ((st = ltrm_zeros(m + LTRM_L_MODEL_RESERVED, LTRM_L_MODEL_RESERVED_SIZE)) != LTRM_OK) return st;
    if ((st = ltrm_flag(m + LTRM_L_MODEL_BIAS_ENABLED, &flag)) != LTRM_OK) return st;
    for (i = 0; i < 5u; i++)
        if (m[counts[i][0]] > counts[i][1]) return LTRM_TABLE_SIZE;
    for (i = 0; i < 6u; i++)
        if (!ltrm_finite(ltrm_le32(r + ranges_scalars[i]))) return LTRM_NON_FINITE;
    for (i = 0; i < 10u; i++)
        if (!ltrm_finite(ltrm_le32(m + model_scalars[i]))) return LTRM_NON_FINITE;
    for (i = 0; i < 4u; i++)
        for (k = 0; k < arrays[i][1]; k++)
            if (!ltrm_finite(ltrm_le32(m + arrays[i][0] + 4u * k))) return LTRM_NON_FINITE;
    return ltrm_check_model(r, m);
}

/* The fixed section's six table sizes in the order of the layout (offset, inv_slope, ln_bias, u_min,
 * sensor_knots, residual), and each one's element size. */
static const uint8_t ltrm_table_count[6] = {
    LTRM_L_FIXED_OFFSET_LEN, LTRM_L_FIXED_INV_SLOPE_LEN, LTRM_L_FIXED_LN_BIAS_LEN,
    LTRM_L_FIXED_U_MIN_LEN,  LTRM_L_FIXED_SENSOR_KNOTS_LEN, LTRM_L_FIXED_RESIDUAL_LEN,
};
static const uint8_t ltrm_table_elem[6] = { 4u, 4u, 4u, 4u, 4u, 2u };

/* The fixed section's header and sensor description (tables not yet attached) and its table sizes. */
typedef struct ltrm_fixed_section {
    ltrm_fixed h;
    uint32_t sizes[6];
    const uint8_t *tables;
} ltrm_fixed_section;

static ltrm_status ltrm_fault(uint8_t code, ltrm_status *out) {
    if (code > 2u) return LTRM_BAD_ENUM;
    *out = code == 0u ? LTRM_SENSOR_OPEN : (code == 1u ? LTRM_SENSOR_SHORT : LTRM_SENSOR_OUT_OF_MODEL_RANGE);
    return LTRM_OK;
}

/* The fixed section's structure (image::fixed::decode): reserved bytes, flags, sensor fault codes, every
 * table's size against the section's own dimensions, the converter against the ranges section, the
 * payload's length and its padding. */
static ltrm_status ltrm_decode_fixed(const uint8_t *p, uint32_t len, const uint8_t *ranges, uint32_t identity,
                                     ltrm_fixed_section *s) {
    static const uint8_t sensor_fields[9][2] = {
        { LTRM_L_FIXED_SENSOR_CODE_LO, 4u },      { LTRM_L_FIXED_SENSOR_CODE_HI, 4u },
        { LTRM_L_FIXED_SENSOR_FAR_BELOW_CODE, 4u }, { LTRM_L_FIXED_SENSOR_FAR_ABOVE_CODE, 4u },
        { LTRM_L_FIXED_SENSOR_STEP_LOG2, 1u },    { LTRM_L_FIXED_FAULT_BELOW, 1u },
        { LTRM_L_FIXED_FAULT_FAR_BELOW, 1u },     { LTRM_L_FIXED_FAULT_ABOVE, 1u },
        { LTRM_L_FIXED_FAULT_FAR_ABOVE, 1u },
    };
    ltrm_fixed *h = &s->h;
    uint32_t i, nt, nx, expected[6], data = 0u, want, bits;
    ltrm_status st;
    if (len < LTRM_L_FIXED_HEAD_LEN) return LTRM_SECTION_LENGTH;
    if ((st = ltrm_zeros(p + LTRM_L_FIXED_RESERVED, LTRM_L_FIXED_RESERVED_SIZE)) != LTRM_OK) return st;
    if ((st = ltrm_zeros(p + LTRM_L_FIXED_RESERVED2, LTRM_L_FIXED_RESERVED2_SIZE)) != LTRM_OK) return st;
    if ((st = ltrm_zeros(p + LTRM_L_FIXED_RESERVED3, LTRM_L_FIXED_RESERVED3_SIZE)) != LTRM_OK) return st;
    if ((st = ltrm_flag(p + LTRM_L_FIXED_BIAS_BEND, &h->bias_bend)) != LTRM_OK) return st;
    if ((st = ltrm_flag(p + LTRM_L_FIXED_SENSITIVITY_LIMIT, &h->sensitivity_limit)) != LTRM_OK) return st;
    if ((st = ltrm_flag(p + LTRM_L_FIXED_HAS_SENSOR, &h->has_sensor)) != LTRM_OK) return st;
    h->layout = p[LTRM_L_FIXED_LAYOUT];
    h->adc_max_code = ltrm_le32(p + LTRM_L_FIXED_ADC_MAX_CODE);
    h->rail_margin = ltrm_le32(p + LTRM_L_FIXED_RAIL_MARGIN);
    h->temp_min = ltrm_le32s(p + LTRM_L_FIXED_TEMP_MIN);
    h->temp_max = ltrm_le32s(p + LTRM_L_FIXED_TEMP_MAX);
    h->temp_lo = ltrm_le32s(p + LTRM_L_FIXED_TEMP_LO);
    h->temp_hi = ltrm_le32s(p + LTRM_L_FIXED_TEMP_HI);
    h->t_knots = ltrm_le16(p + LTRM_L_FIXED_T_KNOTS);
    h->t_origin = ltrm_le32s(p + LTRM_L_FIXED_T_ORIGIN);
    h->t_step_log2 = p[LTRM_L_FIXED_T_STEP_LOG2];
    h->offset_frac = p[LTRM_L_FIXED_OFFSET_FRAC];
    h->inv_slope_frac = p[LTRM_L_FIXED_INV_SLOPE_FRAC];
    h->xa_knots = ltrm_le16(p + LTRM_L_FIXED_XA_KNOTS);
    h->xa_origin = ltrm_le32s(p + LTRM_L_FIXED_XA_ORIGIN);
    h->xa_step_log2 = p[LTRM_L_FIXED_XA_STEP_LOG2];
    h->residual_frac = p[LTRM_L_FIXED_RESIDUAL_FRAC];
    h->x_min = ltrm_le32s(p + LTRM_L_FIXED_X_MIN);
    h->x_max = ltrm_le32s(p + LTRM_L_FIXED_X_MAX);
    h->sensor_code_lo = h->sensor_code_hi = h->far_below_code = h->far_above_code = 0u;
    h->sensor_step_log2 = 0u;
    h->fault_below = h->fault_far_below = h->fault_above = h->fault_far_above = LTRM_SENSOR_OUT_OF_MODEL_RANGE;
    if (h->has_sensor) {
        h->sensor_code_lo = ltrm_le32(p + LTRM_L_FIXED_SENSOR_CODE_LO);
        h->sensor_code_hi = ltrm_le32(p + LTRM_L_FIXED_SENSOR_CODE_HI);
        h->sensor_step_log2 = p[LTRM_L_FIXED_SENSOR_STEP_LOG2];
        if ((st = ltrm_fault(p[LTRM_L_FIXED_FAULT_BELOW], &h->fault_below)) != LTRM_OK) return st;
        h->far_below_code = ltrm_le32(p + LTRM_L_FIXED_SENSOR_FAR_BELOW_CODE);
        if ((st = ltrm_fault(p[LTRM_L_FIXED_FAULT_FAR_BELOW], &h->fault_far_below)) != LTRM_OK) return st;
        if ((st = ltrm_fault(p[LTRM_L_FIXED_FAULT_ABOVE], &h->fault_above)) != LTRM_OK) return st;
        h->far_above_code = ltrm_le32(p + LTRM_L_FIXED_SENSOR_FAR_ABOVE_CODE);
        if ((st = ltrm_fault(p[LTRM_L_FIXED_FAULT_FAR_ABOVE], &h->fault_far_above)) != LTRM_OK) return st;
    } else {
        for (i = 0; i < 9u; i++)
            if ((st = ltrm_zeros(p + sensor_fields[i][0], sensor_fields[i][1])) != LTRM_OK) return st;
    }
    for (i = 0; i < 6u; i++) s->sizes[i] = ltrm_le16(p + ltrm_table_count[i]);
    /* The sizes the dimensions call for (a table not in use is empty). */
    nt = (uint32_t)h->t_knots + 2u;
    nx = (uint32_t)h->xa_knots + 2u;
    expected[0] = expected[1] = nt;
    expected[2] = h->bias_bend ? nt : 0u;
    expected[3] = h->sensitivity_limit ? nt : 0u;
    expected[4] = 0u;
    if (h->has_sensor) {
        uint32_t span = h->sensor_code_hi > h->sensor_code_lo ? h->sensor_code_hi - h->sensor_code_lo : 0u;
        uint32_t q = span >> (h->sensor_step_log2 < 16u ? h->sensor_step_log2 : 16u);
        expected[4] = q > 0xffffffffu - 4u ? 0xffffffffu : q + 4u;
    }
    /* Saturating, as the Rust code: 65537 * 65537 does not fit 32 bits. */
    expected[5] = (uint64_t)nt * nx > 0xffffffffu ? 0xffffffffu : nt * nx;
    for (i = 0; i < 6u; i++)
        if (s->sizes[i] != expected[i]) return LTRM_FIXED_TABLE_SIZE;
    /* The converter of the ranges section (its bits already checked to be 1..=24). */
    bits = ranges[LTRM_L_RANGES_ADC_BITS];
    if (bits == 0u || bits > 24u || h->adc_max_code != (1u << bits) - 1u) return LTRM_FIXED_MISMATCH;
    if (h->rail_margin != ltrm_le32(ranges + LTRM_L_RANGES_RAIL_MARGIN)) return LTRM_FIXED_MISMATCH;
    /* The tables were built from this image's f32 model, not spliced in from another unit's. */
    if (ltrm_le32(p + LTRM_L_FIXED_MODEL_FINGERPRINT) != identity) return LTRM_FIXED_OTHER_CALIBRATION;
    for (i = 0; i < 6u; i++) data += ltrm_table_elem[i] * s->sizes[i];
    want = (LTRM_L_FIXED_HEAD_LEN + data + (LTRM_L_ALIGN - 1u)) & ~(LTRM_L_ALIGN - 1u);
    if (len != want) return LTRM_SECTION_LENGTH;
    if ((st = ltrm_zeros(p + LTRM_L_FIXED_HEAD_LEN + data, len - LTRM_L_FIXED_HEAD_LEN - data)) != LTRM_OK) return st;
    s->tables = p + LTRM_L_FIXED_HEAD_LEN;
    return LTRM_OK;
}

/* A parsed image: where its parts are, for loading. */
typedef struct ltrm_parsed {
    ltrm_image_info info;
    int has_fixed;
    ltrm_fixed_section fixed;
} ltrm_parsed;

/* The image header's own fields (kept in one place): the sequence counter, the calibration time and the
 * serial (printable ASCII up to the first NUL, only NULs after it). */
static ltrm_status ltrm_image_header(const uint8_t *b, ltrm_image_info *info) {
    uint32_t i, n = LTRM_L_HDR_SERIAL_SIZE;
    const uint8_t *s = b + LTRM_L_HDR_SERIAL;
    for (i = 0; i < LTRM_L_HDR_SERIAL_SIZE; i++) {
        if (s[i] == 0u) {
            if (n == LTRM_L_HDR_SERIAL_SIZE) n = i;
        } else if (n != LTRM_L_HDR_SERIAL_SIZE || s[i] < 0x20u || s[i] > 0x7eu) {
            return LTRM_BAD_SERIAL;
        }
    }
    for (i = 0; i < sizeof info->serial; i++) info->serial[i] = i < n ? (char)s[i] : '\0';
    info->version = LTRM_IMAGE_VERSION;
    info->sequence = ltrm_le32(b + LTRM_L_HDR_SEQUENCE);
    info->calibrated_at = ltrm_le64(b + LTRM_L_HDR_CALIBRATED_AT);
    return LTRM_OK;
}

/* Image::parse / parse_prefix: framing, structure (the section walk, the count, the required sections),
 * values (serial, the f32 sections, the fixed section's structure). */
static ltrm_status ltrm_image_parse(const uint8_t *b, uint32_t avail, int prefix, ltrm_parsed *out) {
    uint32_t total, offset, count = 0u, kind, len = 0u;
    const uint8_t *ranges = 0, *model = 0, *fixed = 0;
    uint32_t fixed_len = 0u;
    ltrm_status st;
    if ((st = ltrm_frame(&ltrm_image_framing, b, avail, prefix, &total)) != LTRM_OK) return st;
    /* Structure. */
    for (offset = LTRM_L_HDR_LEN; offset < total - LTRM_L_TRAILER_LEN; offset += LTRM_L_SECTION_HEADER_LEN + len) {
        uint32_t left = total - LTRM_L_TRAILER_LEN - offset;
        const uint8_t **slot = 0;
        if (left < LTRM_L_SECTION_HEADER_LEN) return LTRM_SECTION_OVERRUN;
        kind = ltrm_le16(b + offset + LTRM_L_SECTION_KIND);
        len = ltrm_le16(b + offset + LTRM_L_SECTION_LEN);
        if (len % LTRM_L_ALIGN != 0u) return LTRM_SECTION_ALIGNMENT;
        if (left - LTRM_L_SECTION_HEADER_LEN < len) return LTRM_SECTION_OVERRUN;
        if (kind == LTRM_L_RANGES_KIND) slot = &ranges;
        else if (kind == LTRM_L_MODEL_KIND) slot = &model;
        else if (kind == LTRM_L_FIXED_KIND) slot = &fixed;
        else if ((kind & LTRM_L_SECTION_OPTIONAL_BIT) == 0u) return LTRM_UNKNOWN_SECTION;
        if (slot) {
            if (*slot) return LTRM_DUPLICATE_SECTION;
            if ((kind == LTRM_L_RANGES_KIND && len != LTRM_L_RANGES_LEN) || (kind == LTRM_L_MODEL_KIND && len != LTRM_L_MODEL_LEN))
                return LTRM_SECTION_LENGTH;
            *slot = b + offset + LTRM_L_SECTION_HEADER_LEN;
            if (kind == LTRM_L_FIXED_KIND) fixed_len = len;
        }
        count++;
    }
    if (ltrm_le16(b + LTRM_L_HDR_SECTION_COUNT) != count) return LTRM_SECTION_COUNT;
    if (!ranges || !model) return LTRM_MISSING_SECTION;
    /* Values. */
    if ((st = ltrm_image_header(b, &out->info)) != LTRM_OK) return st;
    if ((st = ltrm_check_f32_sections(ranges, model)) != LTRM_OK) return st;
    out->info.identity = ltrm_crc32(ltrm_crc32(0u, ranges, LTRM_L_RANGES_LEN), model, LTRM_L_MODEL_LEN);
    out->has_fixed = fixed != 0;
    if (fixed && (st = ltrm_decode_fixed(fixed, fixed_len, ranges, out->info.identity, &out->fixed)) != LTRM_OK)
        return st;
    out->info.len = total;
    out->info.crc = ltrm_le32(b + total - LTRM_L_TRAILER_LEN);
    return LTRM_OK;
}

ltrm_status ltrm_image_check(const uint8_t *bytes, uint32_t len, ltrm_image_info *info) {
    ltrm_parsed p;
    ltrm_status st = ltrm_image_parse(bytes, len, 0, &p);
    if (st == LTRM_OK && info) *info = p.info;
    return st;
}

/* FixedCalibration::validate of tables in RAM: the same checks, in the same order. */
static ltrm_status ltrm_validate_fixed(const ltrm_fixed *c) {
    uint32_t nt = c->t_knots, nxa = c->xa_knots, i;
    int64_t lim = LTRM_THETA_LIMIT;
    if (c->layout != LTRM_LAYOUT_VERSION) return LTRM_BAD_FIXED_TABLES;
    if (c->adc_max_code == 0u || c->adc_max_code >= (1u << 24)) return LTRM_BAD_FIXED_TABLES;
    if ((c->rail_margin > 0x7fffffffu ? 0xffffffffu : 2u * c->rail_margin) >= c->adc_max_code) return LTRM_BAD_FIXED_TABLES;
    if (!(c->temp_lo <= c->temp_min && c->temp_min < c->temp_max && c->temp_max <= c->temp_hi) || c->temp_lo <= -lim ||
        c->temp_hi >= lim)
        return LTRM_BAD_FIXED_TABLES;
    if (!(c->x_min < c->x_max && c->x_min > -LTRM_X_LIMIT && c->x_max < LTRM_X_LIMIT)) return LTRM_BAD_FIXED_TABLES;
    if (nt < 2u || c->t_step_log2 < LTRM_T_STEP_MIN || c->t_step_log2 > LTRM_T_STEP_MAX ||
        (int64_t)c->temp_lo - c->t_origin < 0 ||
        (int64_t)c->temp_hi - c->t_origin >= (int64_t)(nt - 1u) * ((int64_t)1 << c->t_step_log2))
        return LTRM_BAD_FIXED_TABLES;
    if (!(c->offset_frac <= 30u && c->adc_max_code < (LTRM_CODE_LIMIT >> c->offset_frac) &&
          (uint32_t)c->offset_frac + c->inv_slope_frac == LTRM_SLOPE_FRAC_SUM && c->residual_frac >= LTRM_RESIDUAL_FRAC_MIN &&
          c->residual_frac <= LTRM_RESIDUAL_FRAC_MAX && nxa >= 2u && nxa + 2u <= LTRM_ROW_CAPACITY &&
          c->xa_step_log2 >= LTRM_XA_STEP_MIN && c->xa_step_log2 <= LTRM_XA_STEP_MAX && c->xa_origin > -lim &&
          c->xa_origin < lim))
        return LTRM_BAD_FIXED_TABLES;
    if (!(c->offset_len == nt + 2u && c->inv_slope_len == nt + 2u && (!c->bias_bend || c->ln_bias_len == nt + 2u) &&
          (!c->sensitivity_limit || c->u_min_len == nt + 2u) && c->residual_len == (nt + 2u) * (nxa + 2u)))
        return LTRM_BAD_FIXED_TABLES;
    /* Control points stored divided by 6 within the range divided by 6. */
    for (i = 0; i < c->inv_slope_len; i++)
        if (c->inv_slope[i] <= 0) return LTRM_BAD_FIXED_TABLES;
    for (i = 0; i < c->offset_len; i++)
        if (!((int64_t)c->offset[i] * 6 > LTRM_OFFSET_MIN && (int64_t)c->offset[i] * 6 < LTRM_OFFSET_MAX))
            return LTRM_BAD_FIXED_TABLES;
    for (i = 0; i < c->inv_slope_len; i++)
        if (!((int64_t)c->inv_slope[i] * 6 < LTRM_INV_SLOPE_LIMIT)) return LTRM_BAD_FIXED_TABLES;
    for (i = 0; c->bias_bend && i < c->ln_bias_len; i++)
        if (!((int64_t)c->ln_bias[i] * 6 > -(int64_t)LTRM_BIAS_LIMIT && (int64_t)c->ln_bias[i] * 6 < LTRM_BIAS_LIMIT))
            return LTRM_BAD_FIXED_TABLES;
    for (i = 0; c->sensitivity_limit && i < c->u_min_len; i++)
        if (!((int64_t)c->u_min[i] * 6 > -(int64_t)LTRM_BIAS_LIMIT && (int64_t)c->u_min[i] * 6 < LTRM_BIAS_LIMIT))
            return LTRM_BAD_FIXED_TABLES;
    if (c->has_sensor) {
        uint32_t span = c->sensor_code_hi > c->sensor_code_lo ? c->sensor_code_hi - c->sensor_code_lo : 0u;
        if (c->sensor_code_lo > c->sensor_code_hi || c->sensor_step_log2 > 16u ||
            (uint64_t)c->sensor_len < (uint64_t)(span >> c->sensor_step_log2) + 4u)
            return LTRM_BAD_FIXED_TABLES;
        for (i = 0; i < c->sensor_len; i++)
            if (!((int64_t)c->sensor_knots[i] * 6 > -lim && (int64_t)c->sensor_knots[i] * 6 < lim))
                return LTRM_BAD_FIXED_TABLES;
    }
    return LTRM_OK;
}

/* A calibration with no tables: every correction with it is an error. */
static void ltrm_empty(ltrm_fixed *cal) {
    static const ltrm_fixed empty = { 0u, 0u, 0u, 0, 0, 0, 0, 0u, 0, 0u, 0u, 0u, 0, 0, 0u, 0, 0u, 0u, 0, 0,
                                      0, 0u, 0, 0u, 0, 0u, 0, 0u, 0, 0u, 0, 0u, 0u, 0u,
                                      LTRM_SENSOR_OUT_OF_MODEL_RANGE, 0u, LTRM_SENSOR_OUT_OF_MODEL_RANGE,
                                      LTRM_SENSOR_OUT_OF_MODEL_RANGE, 0u, LTRM_SENSOR_OUT_OF_MODEL_RANGE, 0, 0u, 0u };
    *cal = empty;
}

static void ltrm_copy32(int32_t *dst, const uint8_t *src, uint32_t n) {
    uint32_t i;
    for (i = 0; i < n; i++) dst[i] = ltrm_le32s(src + 4u * i);
}

/* FixedStorage::load: each table copied into ram (LTRM_FIXED_CAPACITY for one that does not fit), then
 * validated. */
static ltrm_status ltrm_load_fixed(const ltrm_parsed *p, const ltrm_ram *ram, ltrm_fixed *cal) {
    const ltrm_fixed_section *s = &p->fixed;
    const uint8_t *t = s->tables;
    int32_t *dst[5];
    uint32_t cap[5], i;
    ltrm_fixed c = s->h;
    ltrm_status st;
    ltrm_empty(cal);
    if (!p->has_fixed) return LTRM_MISSING_SECTION;
    for (i = 0; i < 4u; i++) {
        dst[i] = ram->t_tables + i * ram->t_capacity;
        cap[i] = ram->t_capacity;
    }
    dst[4] = ram->sensor;
    cap[4] = ram->s_capacity;
    for (i = 0; i < 5u; i++) {
        if (s->sizes[i] > cap[i]) return LTRM_FIXED_CAPACITY;
        ltrm_copy32(dst[i], t, s->sizes[i]);
        t += 4u * s->sizes[i];
    }
    if (s->sizes[5] > ram->r_capacity) return LTRM_FIXED_CAPACITY;
    for (i = 0; i < s->sizes[5]; i++) {
        uint32_t u = ltrm_le16(t + 2u * i);
        ram->residual[i] = (int16_t)(u <= 0x7fffu ? (int32_t)u : (int32_t)u - 65536);
    }
    c.offset = dst[0];
    c.offset_len = s->sizes[0];
    c.inv_slope = dst[1];
    c.inv_slope_len = s->sizes[1];
    c.ln_bias = dst[2];
    c.ln_bias_len = s->sizes[2];
    c.u_min = dst[3];
    c.u_min_len = s->sizes[3];
    c.sensor_knots = dst[4];
    c.sensor_len = s->sizes[4];
    c.residual = ram->residual;
    c.residual_len = s->sizes[5];
    c.identity = p->info.identity;
    if ((st = ltrm_validate_fixed(&c)) != LTRM_OK) return st;
    *cal = c;
    return LTRM_OK;
}

ltrm_status ltrm_image_load(const uint8_t *bytes, uint32_t len, int prefix, const ltrm_ram *ram, ltrm_fixed *cal,
                            ltrm_image_info *info) {
    ltrm_parsed p;
    ltrm_status st = ltrm_image_parse(bytes, len, prefix, &p);
    ltrm_empty(cal);
    if (st != LTRM_OK) return st;
    if ((st = ltrm_load_fixed(&p, ram, cal)) != LTRM_OK) return st;
    if (info) *info = p.info;
    return LTRM_OK;
}

ltrm_status ltrm_image_select(const uint8_t *a, uint32_t a_len, const uint8_t *b, uint32_t b_len, const ltrm_ram *ram,
                              ltrm_fixed *cal, ltrm_image_info *info, ltrm_selection *sel) {
    ltrm_image_info ia, ib;
    ltrm_status st;
    ia.sequence = ib.sequence = 0u;
    ia.calibrated_at = ib.calibrated_at = 0u;
    ia.len = ib.len = 0u;
    sel->status_a = ltrm_image_load(a, a_len, 1, ram, cal, &ia);
    sel->status_b = ltrm_image_load(b, b_len, 1, ram, cal, &ib);
    st = ltrm_choose(sel, sel->status_a == LTRM_OK, sel->status_b == LTRM_OK, ia.sequence, ia.calibrated_at,
                     ib.sequence, ib.calibrated_at,
                     sel->status_a == LTRM_OK && sel->status_b == LTRM_OK && ltrm_same_bytes(a, ia.len, b, ib.len));
    ltrm_empty(cal);
    if (st != LTRM_OK) return st;
    /* ram holds the tables of the slot checked last: load the chosen one's (it loaded before). */
    return sel->slot == LTRM_SLOT_A ? ltrm_image_load(a, a_len, 1, ram, cal, info) : ltrm_image_load(b, b_len, 1, ram, cal, info);
}
