/* ---- field records (logtrim::field): trims and blanks, checked in the Rust parser's order ---- */

/* The value rules of logtrim::field (blank::AGREEMENT_Q24, blank::MAX_ABS_X_NP, trim::GAIN_AGREEMENT_Q30):
 * a quantity's f32 and fixed forms agree within 2^-10 of their unit, x within +-100 Np. */
#define LTRM_AGREEMENT_Q24 ((int64_t)1 << 14)
#define LTRM_GAIN_AGREEMENT_Q30 ((int64_t)1 << 20)
#define LTRM_MAX_ABS_X_Q24 ((int64_t)100 << LTRM_X_FRAC)

static const ltrm_framing ltrm_trim_framing = {
    LTRM_MAGIC_TRIM, LTRM_TRIM_VERSION, LTRM_L_REC_HEADER_LEN, LTRM_L_REC_LEN, 2u, LTRM_L_TRIM_LEN, LTRM_L_TRIM_LEN,
};
static const ltrm_framing ltrm_blank_framing = {
    LTRM_MAGIC_BLANK, LTRM_BLANK_VERSION, LTRM_L_REC_HEADER_LEN, LTRM_L_REC_LEN, 2u, LTRM_L_BLANK_LEN, LTRM_L_BLANK_LEN,
};

/* round(f * 2^frac), halves away from zero, exactly from the bits of f (logtrim::qformat::q_from_f32):
 * 0 for NaN, infinity, or a result of 2^62 or more. */
static int ltrm_q_from_f32(uint32_t bits, uint32_t frac, int64_t *out) {
    uint32_t biased = (bits >> 23) & 0xffu, fraction = bits & 0x007fffffu;
    uint64_t m, magnitude;
    int32_t e;
    if (biased == 0xffu) return 0;
    if (biased == 0u) {
        m = fraction;
        e = -149;
    } else {
        m = fraction | 0x00800000u;
        e = (int32_t)biased - 150;
    }
    e += (int32_t)frac;
    if (e >= 0) {
        if (e > 38) {
            if (m != 0u) return 0;
            magnitude = 0u;
        } else {
            magnitude = m << e;
        }
    } else {
        uint32_t n = (uint32_t)-e;
        magnitude = n > 40u ? 0u : (m + ((uint64_t)1 << (n - 1u))) >> n;
    }
    if (magnitude >= ((uint64_t)1 << 62)) return 0;
    *out = bits >> 31 ? -(int64_t)magnitude : (int64_t)magnitude;
    return 1;
}

static int64_t ltrm_abs64s(int64_t v) { return v < 0 ? -v : v; }

/* An x stored as f32 and Q24 (blank::check_x). */
static ltrm_status ltrm_check_x(uint32_t x_bits, int32_t q) {
    int64_t from_f32;
    if (!ltrm_q_from_f32(x_bits, LTRM_X_FRAC, &from_f32)) return LTRM_NON_FINITE;
    if (ltrm_abs64s(from_f32) > LTRM_MAX_ABS_X_Q24) return LTRM_OUT_OF_RANGE;
    if (ltrm_abs64s(q) > LTRM_MAX_ABS_X_Q24) return LTRM_OUT_OF_RANGE;
    if (ltrm_abs64s(from_f32 - q) > LTRM_AGREEMENT_Q24) return LTRM_INCONSISTENT;
    return LTRM_OK;
}

/* The header every field record shares, after its framing. */
static void ltrm_record_header(const uint8_t *b, uint32_t *sequence, uint64_t *written_at, uint32_t *factory) {
    *sequence = ltrm_le32(b + LTRM_L_REC_SEQUENCE);
    *written_at = ltrm_le64(b + LTRM_L_REC_WRITTEN_AT);
    *factory = ltrm_le32(b + LTRM_L_REC_FACTORY);
}

ltrm_status ltrm_trim_parse(const uint8_t *b, uint32_t len, int prefix, ltrm_trim *out) {
    ltrm_trim t;
    int64_t g;
    uint32_t total, i;
    ltrm_status st;
    if ((st = ltrm_frame(&ltrm_trim_framing, b, len, prefix, &total)) != LTRM_OK) return st;
    ltrm_record_header(b, &t.sequence, &t.written_at, &t.factory);
    t.kind = b[LTRM_L_TRIM_KIND];
    if (t.kind > LTRM_TRIM_TWO_POINT) return LTRM_BAD_ENUM;
    if ((st = ltrm_zeros(b + LTRM_L_TRIM_RESERVED, LTRM_L_TRIM_RESERVED_SIZE)) != LTRM_OK) return st;
    t.offset_f32_bits = ltrm_le32(b + LTRM_L_TRIM_OFFSET_F32);
    t.gain_f32_bits = ltrm_le32(b + LTRM_L_TRIM_GAIN_F32);
    t.offset_q24 = ltrm_le32s(b + LTRM_L_TRIM_OFFSET_Q24);
    t.gain_q30 = ltrm_le32s(b + LTRM_L_TRIM_GAIN_Q30);
    t.standard_bits[0] = ltrm_le32(b + LTRM_L_TRIM_STANDARD_1_X);
    t.standard_bits[1] = ltrm_le32(b + LTRM_L_TRIM_STANDARD_2_X);
    t.temp_mc = ltrm_le32s(b + LTRM_L_TRIM_TEMP_MC);
    /* Trim::new. */
    if ((st = ltrm_check_x(t.offset_f32_bits, t.offset_q24)) != LTRM_OK) return st;
    if (!ltrm_q_from_f32(t.gain_f32_bits, LTRM_GAIN_FRAC, &g)) return LTRM_NON_FINITE;
    if (!(g >= 1 && g < ((int64_t)1 << 31))) return LTRM_OUT_OF_RANGE;
    if (t.gain_q30 <= 0) return LTRM_OUT_OF_RANGE;
    if (ltrm_abs64s(g - t.gain_q30) > LTRM_GAIN_AGREEMENT_Q30) return LTRM_INCONSISTENT;
    for (i = 0; i < 2u; i++)
        if (!ltrm_finite(t.standard_bits[i])) return LTRM_NON_FINITE;
    if (t.kind == LTRM_TRIM_CLEARED) {
        if (t.offset_f32_bits != 0u || t.gain_f32_bits != 0x3f800000u || t.offset_q24 != 0 ||
            t.gain_q30 != LTRM_GAIN_ONE_Q30 || t.standard_bits[0] != 0u || t.standard_bits[1] != 0u)
            return LTRM_CLEARED_NOT_IDENTITY;
    } else if (t.kind == LTRM_TRIM_ONE_POINT && t.standard_bits[0] != t.standard_bits[1]) {
        return LTRM_ONE_POINT_STANDARDS;
    }
    *out = t;
    return LTRM_OK;
}

ltrm_status ltrm_blank_parse(const uint8_t *b, uint32_t len, int prefix, ltrm_blank *out) {
    ltrm_blank k;
    uint32_t total;
    ltrm_status st;
    if ((st = ltrm_frame(&ltrm_blank_framing, b, len, prefix, &total)) != LTRM_OK) return st;
    ltrm_record_header(b, &k.sequence, &k.written_at, &k.factory);
    k.x_f32_bits = ltrm_le32(b + LTRM_L_BLANK_X_F32);
    k.x_q24 = ltrm_le32s(b + LTRM_L_BLANK_X_Q24);
    k.temp_mc = ltrm_le32s(b + LTRM_L_BLANK_TEMP_MC);
    k.samples = ltrm_le32(b + LTRM_L_BLANK_SAMPLES);
    if ((st = ltrm_check_x(k.x_f32_bits, k.x_q24)) != LTRM_OK) return st;
    if (k.samples == 0u) return LTRM_NO_SAMPLES;
    *out = k;
    return LTRM_OK;
}

/* A record bound to another calibration than the one in use (0: bound to none). */
static ltrm_status ltrm_binding(uint32_t bound, const uint32_t *factory) {
    return factory && bound != 0u && bound != *factory ? LTRM_OTHER_CALIBRATION : LTRM_OK;
}

ltrm_status ltrm_trim_select(const uint8_t *a, uint32_t a_len, const uint8_t *b, uint32_t b_len,
                             const uint32_t *factory, ltrm_trim *out, ltrm_selection *sel) {
    ltrm_trim ta, tb;
    ltrm_status st;
    ta.sequence = tb.sequence = 0u;
    ta.written_at = tb.written_at = 0u;
    ta.factory = tb.factory = 0u;
    if ((sel->status_a = ltrm_trim_parse(a, a_len, 1, &ta)) == LTRM_OK) sel->status_a = ltrm_binding(ta.factory, factory);
    if ((sel->status_b = ltrm_trim_parse(b, b_len, 1, &tb)) == LTRM_OK) sel->status_b = ltrm_binding(tb.factory, factory);
    st = ltrm_choose(sel, sel->status_a == LTRM_OK, sel->status_b == LTRM_OK, ta.sequence, ta.written_at, tb.sequence,
                     tb.written_at,
                     sel->status_a == LTRM_OK && sel->status_b == LTRM_OK &&
                         ltrm_same_bytes(a, LTRM_L_TRIM_LEN, b, LTRM_L_TRIM_LEN));
    if (st == LTRM_OK) *out = sel->slot == LTRM_SLOT_A ? ta : tb;
    return st;
}

ltrm_status ltrm_blank_select(const uint8_t *a, uint32_t a_len, const uint8_t *b, uint32_t b_len,
                              const uint32_t *factory, ltrm_blank *out, ltrm_selection *sel) {
    ltrm_blank ka, kb;
    ltrm_status st;
    ka.sequence = kb.sequence = 0u;
    ka.written_at = kb.written_at = 0u;
    ka.factory = kb.factory = 0u;
    if ((sel->status_a = ltrm_blank_parse(a, a_len, 1, &ka)) == LTRM_OK) sel->status_a = ltrm_binding(ka.factory, factory);
    if ((sel->status_b = ltrm_blank_parse(b, b_len, 1, &kb)) == LTRM_OK) sel->status_b = ltrm_binding(kb.factory, factory);
    st = ltrm_choose(sel, sel->status_a == LTRM_OK, sel->status_b == LTRM_OK, ka.sequence, ka.written_at, kb.sequence,
                     kb.written_at,
                     sel->status_a == LTRM_OK && sel->status_b == LTRM_OK &&
                         ltrm_same_bytes(a, LTRM_L_BLANK_LEN, b, LTRM_L_BLANK_LEN));
    if (st == LTRM_OK) *out = sel->slot == LTRM_SLOT_A ? ka : kb;
    return st;
}

ltrm_status ltrm_layers_init(ltrm_layers *layers, const ltrm_trim *trim, const ltrm_blank *blank,
                             const ltrm_trim_limits *limits, const uint32_t *factory) {
    ltrm_status st;
    layers->has_trim = 0;
    layers->has_blank = 0;
    if (trim) {
        int64_t o[2], g[2];
        uint32_t i;
        if ((st = ltrm_binding(trim->factory, factory)) != LTRM_OK) return st;
        /* TrimLimits::check: both forms of the offset, then both of the gain. */
        o[0] = trim->offset_q24;
        if (!ltrm_q_from_f32(trim->offset_f32_bits, LTRM_X_FRAC, &o[1])) o[1] = INT64_MAX;
        g[0] = trim->gain_q30;
        if (!ltrm_q_from_f32(trim->gain_f32_bits, LTRM_GAIN_FRAC, &g[1])) g[1] = INT64_MAX;
        for (i = 0; i < 2u; i++)
            if (ltrm_abs64s(o[i]) > limits->max_offset_q24) return LTRM_OFFSET_PAST_LIMIT;
        for (i = 0; i < 2u; i++)
            if (ltrm_abs64s(g[i] - LTRM_GAIN_ONE_Q30) > limits->max_gain_error_q30) return LTRM_GAIN_PAST_LIMIT;
    }
    if (blank && (st = ltrm_binding(blank->factory, factory)) != LTRM_OK) return st;
    if (trim) layers->trim = *trim;
    if (blank) layers->blank = *blank;
    layers->has_trim = trim != 0;
    layers->has_blank = blank != 0;
    return LTRM_OK;
}

/* A Q24 value of a reading, or the range error on its side. */
static ltrm_status ltrm_q24_of(int64_t v, int32_t *out) {
    if (v > INT32_MAX) return LTRM_ABOVE_RANGE;
    if (v < INT32_MIN) return LTRM_BELOW_RANGE;
    *out = (int32_t)v;
    return LTRM_OK;
}

ltrm_status ltrm_layers_apply(const ltrm_layers *layers, const ltrm_reading *factory, ltrm_reading *out) {
    int trim = layers->has_trim && layers->trim.kind != LTRM_TRIM_CLEARED;
    int64_t v = factory->x;
    ltrm_status st;
    /* g*x and g*(x - x_blank) as exact products of 32-bit values (no 64-bit multiply helper on a Cortex-M0),
     * rounded as qformat::round_shr: + 2^29, then floor(/ 2^30). */
    if (trim && layers->has_blank)
        v = ltrm_asr64(ltrm_mul_wide(layers->trim.gain_q30, factory->x) - ltrm_mul_wide(layers->trim.gain_q30, layers->blank.x_q24) +
                           ((int64_t)1 << (LTRM_GAIN_FRAC - 1u)),
                       LTRM_GAIN_FRAC);
    else if (trim)
        v = ltrm_asr64(ltrm_mul_wide(layers->trim.gain_q30, factory->x) + ((int64_t)1 << (LTRM_GAIN_FRAC - 1u)), LTRM_GAIN_FRAC) +
            layers->trim.offset_q24;
    else if (layers->has_blank)
        v = (int64_t)factory->x - layers->blank.x_q24;
    *out = *factory;
    if ((st = ltrm_q24_of(v, &out->x)) != LTRM_OK) return st;
    return LTRM_OK;
}
