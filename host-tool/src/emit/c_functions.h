/* ---- evaluator: the same integer operations as logtrim::fixed, in the same order ---- */

#define LT_W_BITS 28
#define LT_POS_FRAC 20
#define LT_ONE ((int64_t)1 << LT_POS_FRAC)
#define LT_X_FRAC 24
#define LT_X_CLAMP ((int64_t)1 << 31)
#define LT_BEND_STRIDE 11
#define LT_BEND_LEN 165u
#define LT_EXP2_LEN 32u

/* floor(x / 2^n), n <= 62: an arithmetic right shift without implementation-defined behaviour. */
static inline int64_t lt_asr(int64_t x, unsigned n) { return x < 0 ? ~(~x >> n) : x >> n; }

static inline int64_t lt_clamp(int64_t x, int64_t lo, int64_t hi) { return x < lo ? lo : (x > hi ? hi : x); }

static inline int64_t lt_sat_add(int64_t a, int64_t b) {
    if (b > 0 && a > INT64_MAX - b) return INT64_MAX;
    if (b < 0 && a < INT64_MIN - b) return INT64_MIN;
    return a + b;
}

static inline int64_t lt_sat_mul(int64_t a, int64_t b) {
    int neg;
    uint64_t ua, ub, lim, p;
    if (a == 0 || b == 0) return 0;
    neg = (a < 0) != (b < 0);
    ua = a < 0 ? (uint64_t)0 - (uint64_t)a : (uint64_t)a;
    ub = b < 0 ? (uint64_t)0 - (uint64_t)b : (uint64_t)b;
    lim = neg ? (uint64_t)INT64_MAX + 1u : (uint64_t)INT64_MAX;
    if (ua > lim / ub) return neg ? INT64_MIN : INT64_MAX;
    p = ua * ub;
    if (!neg) return (int64_t)p;
    if (p == (uint64_t)INT64_MAX + 1u) return INT64_MIN;
    return -(int64_t)p;
}

static inline int64_t lt_round_shr(int64_t x, unsigned n) {
    if (n > 62) n = 62;
    if (n == 0) return x;
    return lt_asr(lt_sat_add(x, (int64_t)1 << (n - 1)), n);
}

static inline int64_t lt_sat_shl(int64_t x, unsigned n) {
    if (n > 62) n = 62;
    return lt_sat_mul(x, (int64_t)1 << n);
}

static inline int64_t lt_rescale(int64_t x, unsigned from, unsigned to) {
    return from >= to ? lt_round_shr(x, from - to) : lt_sat_shl(x, to - from);
}

/* Six times the cubic B-spline basis at t (Q20), Q28; the tables store control points divided by 6. */
static inline void lt_weights(int64_t t, int64_t w[4]) {
    int64_t s, t2, t3, s2, s3;
    t = lt_clamp(t, 0, LT_ONE);
    s = LT_ONE - t;
    t2 = (t * t) >> 12;
    t3 = (t2 * t) >> 20;
    s2 = (s * s) >> 12;
    s3 = (s2 * s) >> 20;
    w[0] = s3;
    w[1] = 3 * t3 - 6 * t2 + ((int64_t)4 << LT_W_BITS);
    w[2] = ((int64_t)6 << LT_W_BITS) - s3 - w[1] - t3;
    w[3] = t3;
}

/* Rounded x / 2^n for the bounded spline sums (|x| < 2^62, 1 <= n <= 62). */
static inline int64_t lt_round_shr_small(int64_t x, unsigned n) { return lt_asr(x + ((int64_t)1 << (n - 1)), n); }

static inline void lt_segment(int64_t pos, uint64_t knots, int64_t *seg, int64_t *t) {
    int64_t k = knots < 2u ? 2 : (knots > ((uint64_t)1 << 40) ? ((int64_t)1 << 40) : (int64_t)knots);
    int64_t s = lt_clamp(lt_asr(pos, LT_POS_FRAC), 0, k - 2);
    *seg = s;
    *t = lt_clamp(pos - s * LT_ONE, 0, LT_ONE);
}

static inline int64_t lt_dot4_32(const int64_t w[4], const int32_t *c) {
    return w[0] * c[0] + w[1] * c[1] + w[2] * c[2] + w[3] * c[3];
}

/* One spline value from four control points at start, or LT_BAD_TABLE past the end. */
static inline lt_status lt_spline1(const int32_t *table, uint32_t len, int64_t start, const int64_t w[4], int64_t *out) {
    if (start < 0 || (uint64_t)start + 4u > (uint64_t)len) return LT_BAD_TABLE;
    *out = lt_round_shr_small(lt_dot4_32(w, table + start), LT_W_BITS);
    return LT_OK;
}

static inline unsigned lt_top_bit(int64_t v) { /* v > 0 */
#if defined(__GNUC__)
    return 63u - (unsigned)__builtin_clzll((unsigned long long)v);
#else
    unsigned b = 0;
    while (v >> 1) { v >>= 1; b++; }
    return b;
#endif
}

/* G(v) = ln(1 - e^-v), v and result Q24. */
static inline lt_status lt_bend_q24(int64_t v, int64_t *out) {
    unsigned e24;
    int64_t m, pos, seg, t, w[4];
    if (v < ((int64_t)1 << 14)) return LT_BELOW_RANGE;
    if (v >= ((int64_t)1 << 29)) { *out = 0; return LT_OK; }
    e24 = lt_top_bit(v);
    m = v - ((int64_t)1 << e24);
    pos = (m << (LT_POS_FRAC + 3)) >> e24;
    lt_segment(pos, 9u, &seg, &t);
    lt_weights(t, w);
    return lt_spline1(lt_bend, LT_BEND_LEN, (int64_t)(e24 - 14u) * LT_BEND_STRIDE + seg, w, out);
}

/* e^x, x Q24, result Q32. */
static inline lt_status lt_exp_q32(int64_t x, int64_t *out) {
    int64_t y, k, f, j, r, rho, rho2, rho3, p, m, sh;
    x = lt_clamp(x, -((int64_t)1 << 31), (int64_t)1 << 31);
    y = lt_round_shr(x * (int64_t)1549082005, 24);
    k = lt_asr(y, 30);
    f = y - k * ((int64_t)1 << 30);
    j = f >> 25;
    r = f & (((int64_t)1 << 25) - 1);
    rho = (r * (int64_t)744261118) >> 30;
    rho2 = (rho * rho) >> 30;
    rho3 = (rho2 * rho) >> 30;
    p = ((int64_t)1 << 30) + rho + rho2 / 2 + rho3 / 6;
    if (j < 0 || j >= (int64_t)LT_EXP2_LEN) return LT_ABOVE_RANGE;
    m = lt_round_shr((int64_t)lt_exp2[j] * p, 30);
    sh = k + 2;
    if (sh > 32) return LT_ABOVE_RANGE;
    *out = sh >= 0 ? (m << sh) : lt_round_shr(m, (unsigned)(-sh < 63 ? -sh : 63));
    return LT_OK;
}

static inline lt_status lt_check_code(const lt_fixed *c, uint32_t code) {
    uint32_t top = c->adc_max_code > c->rail_margin ? c->adc_max_code - c->rail_margin : 0u;
    if (code > c->adc_max_code) return LT_CODE_OUT_OF_ADC_RANGE;
    if (code <= c->rail_margin || code >= top) return LT_SATURATED;
    return LT_OK;
}

/* theta (m°C * 1024) from the temperature channel's code. */
static inline lt_status lt_theta_from_code(const lt_fixed *c, uint32_t code, int32_t *theta) {
    unsigned sh;
    int64_t pos, seg, t, w[4], v;
    lt_status st;
    if (!c->has_sensor) return LT_NOT_CALIBRATED;
    if (code < c->sensor_code_lo) return code < c->far_below_code ? c->fault_far_below : c->fault_below;
    if (code > c->sensor_code_hi) return code > c->far_above_code ? c->fault_far_above : c->fault_above;
    sh = c->sensor_step_log2 > 16u ? 16u : c->sensor_step_log2;
    pos = (int64_t)(code - c->sensor_code_lo) << (LT_POS_FRAC - sh);
    lt_segment(pos, c->sensor_len >= 2u ? c->sensor_len - 2u : 0u, &seg, &t);
    lt_weights(t, w);
    st = lt_spline1(c->sensor_knots, c->sensor_len, seg, w, &v);
    if (st != LT_OK) return st;
    if (v < INT32_MIN || v > INT32_MAX) return LT_BAD_TABLE;
    *theta = (int32_t)v;
    return LT_OK;
}

static inline lt_status lt_stage_theta(const lt_fixed *c, int64_t theta, lt_stage *s) {
    int64_t pos, t;
    lt_status st;
    if (theta < c->temp_lo || theta > c->temp_hi) return LT_TEMPERATURE_OUT_OF_RANGE;
    s->extrapolated = theta < c->temp_min || theta > c->temp_max;
    pos = lt_asr(lt_sat_mul(theta - c->t_origin, c->t_inv_step), 28);
    lt_segment(pos, c->t_knots, &s->seg, &t);
    lt_weights(t, s->w);
    if ((st = lt_spline1(c->offset, c->offset_len, s->seg, s->w, &s->offset)) != LT_OK) return st;
    if ((st = lt_spline1(c->inv_slope, c->inv_slope_len, s->seg, s->w, &s->inv_slope)) != LT_OK) return st;
    s->ln_bias = 0;
    if (c->bias_bend && (st = lt_spline1(c->ln_bias, c->ln_bias_len, s->seg, s->w, &s->ln_bias)) != LT_OK) return st;
    s->u_min = INT64_MIN;
    if (c->sensitivity_limit && (st = lt_spline1(c->u_min, c->u_min_len, s->seg, s->w, &s->u_min)) != LT_OK) return st;
    return LT_OK;
}

static inline lt_status lt_stage_millicelsius(const lt_fixed *c, int32_t temp_mc, lt_stage *s) {
    return lt_stage_theta(c, (int64_t)temp_mc * 1024, s);
}

static inline lt_status lt_stage_code(const lt_fixed *c, uint32_t temp_code, lt_stage *s) {
    int32_t theta = 0;
    lt_status st = lt_theta_from_code(c, temp_code, &theta);
    if (st != LT_OK) return st;
    return lt_stage_theta(c, theta, s);
}

/* Residual columns col..col+3 collapsed over the stage's temperature (each below 2^30.6). */
static inline lt_status lt_columns(const lt_fixed *c, const lt_stage *s, int64_t col, int64_t out[4]) {
    uint64_t stride = (uint64_t)c->xa_knots + 2u;
    int64_t rows[4][4];
    int k, i;
    for (k = 0; k < 4; k++) {
        uint64_t start = ((uint64_t)s->seg + (uint64_t)k) * stride + (uint64_t)col;
        if (start + 4u > (uint64_t)c->residual_len) return LT_BAD_TABLE;
        for (i = 0; i < 4; i++) rows[k][i] = c->residual[start + (uint64_t)i];
    }
    for (i = 0; i < 4; i++) {
        out[i] = lt_asr(s->w[0] * rows[0][i] + s->w[1] * rows[1][i] + s->w[2] * rows[2][i] + s->w[3] * rows[3][i],
                        LT_W_BITS - 13);
    }
    return LT_OK;
}

/* x in Q24 at a stage; row is the stage's collapsed residual (lt_row_stage) or NULL. */
static inline lt_status lt_x_q24(const lt_fixed *c, const lt_stage *s, uint32_t code, const int32_t *row,
                                 uint32_t row_len, int32_t *x_out) {
    unsigned qo = c->offset_frac > 30u ? 30u : c->offset_frac;
    unsigned qs = c->inv_slope_frac > 62u ? 62u : c->inv_slope_frac;
    unsigned fr = c->residual_frac > 30u ? 30u : c->residual_frac;
    int64_t diff, u, xa, g, pos, col, t, wu[4], cols[4], r, x;
    int i;
    lt_status st;
    diff = ((int64_t)code << qo) - s->offset;
    u = lt_clamp(lt_rescale(lt_sat_mul(diff, s->inv_slope), qo + qs, LT_X_FRAC), -LT_X_CLAMP, LT_X_CLAMP);
    if (u < s->u_min) return LT_BELOW_RANGE;
    xa = u;
    if (c->bias_bend) {
        if ((st = lt_bend_q24(u - s->ln_bias, &g)) != LT_OK) return st;
        xa = u + g;
    }
    pos = lt_asr(lt_sat_mul(xa - c->xa_origin, c->xa_inv_step), 28);
    if (pos < 0) return LT_BELOW_RANGE;
    if (pos > ((int64_t)c->xa_knots - 1) * LT_ONE) return LT_ABOVE_RANGE;
    lt_segment(pos, c->xa_knots, &col, &t);
    lt_weights(t, wu);
    if (row) {
        if ((uint64_t)col + 4u > (uint64_t)row_len) return LT_BAD_TABLE;
        for (i = 0; i < 4; i++) cols[i] = row[col + i];
    } else if ((st = lt_columns(c, s, col, cols)) != LT_OK) {
        return st;
    }
    r = lt_round_shr_small(wu[0] * cols[0] + wu[1] * cols[1] + wu[2] * cols[2] + wu[3] * cols[3], LT_W_BITS);
    r = lt_rescale(r, fr + 13u, LT_X_FRAC);
    x = xa + r;
    if (x < c->x_min) return LT_BELOW_RANGE;
    if (x > c->x_max) return LT_ABOVE_RANGE;
    *x_out = (int32_t)x;
    return LT_OK;
}

/* The log-channel part of a correction at a stage. */
static inline lt_status lt_correct_staged(const lt_fixed *c, const lt_stage *s, uint32_t code, lt_reading *out) {
    lt_status st = lt_check_code(c, code);
    if (st != LT_OK) return st;
    if ((st = lt_x_q24(c, s, code, 0, 0u, &out->x)) != LT_OK) return st;
    out->temperature_extrapolated = s->extrapolated;
    return LT_OK;
}

/* A stage with the residual collapsed over temperature for every x̃ column (see logtrim::fixed::RowStage). */
#define LT_ROW_CAPACITY 66
typedef struct lt_row_stage {
    lt_stage stage;
    int32_t row[LT_ROW_CAPACITY];
    uint32_t len;
} lt_row_stage;

static inline lt_status lt_row_stage_from(const lt_fixed *c, const lt_stage *s, lt_row_stage *rs) {
    uint32_t n = (uint32_t)c->xa_knots + 2u, col = 0, start;
    int64_t v[4];
    int i;
    lt_status st;
    if (n > LT_ROW_CAPACITY) return LT_BAD_TABLE;
    for (i = 0; i < LT_ROW_CAPACITY; i++) rs->row[i] = 0;
    while (col < n) {
        start = col < (n >= 4u ? n - 4u : 0u) ? col : (n >= 4u ? n - 4u : 0u);
        if ((st = lt_columns(c, s, start, v)) != LT_OK) return st;
        for (i = 0; i < 4 && start + (uint32_t)i < LT_ROW_CAPACITY; i++) rs->row[start + (uint32_t)i] = (int32_t)v[i];
        col = start + 4u;
    }
    rs->stage = *s;
    rs->len = n;
    return LT_OK;
}

/* The log-channel part at a row stage: bit-identical to lt_correct_staged. */
static inline lt_status lt_correct_row(const lt_fixed *c, const lt_row_stage *rs, uint32_t code, lt_reading *out) {
    lt_status st = lt_check_code(c, code);
    if (st != LT_OK) return st;
    if ((st = lt_x_q24(c, &rs->stage, code, rs->row, rs->len, &out->x)) != LT_OK) return st;
    out->temperature_extrapolated = rs->stage.extrapolated;
    return LT_OK;
}

/* The row stage of the last temperature (see logtrim::fixed::StageCache): rebuilt only when the temperature
 * code (or m°C value) changes, bit-identical to lt_correct_raw / lt_correct, errors included. Start it with
 * lt_stage_cache_init; one cache belongs to one calibration. */
typedef struct lt_stage_cache {
    const lt_fixed *cal;
    int valid;
    uint64_t key; /* a temperature code, or 1 << 32 | (uint32_t)m°C */
    lt_row_stage rs;
} lt_stage_cache;

static inline void lt_stage_cache_init(lt_stage_cache *k, const lt_fixed *c) {
    k->cal = c;
    k->valid = 0;
    k->key = 0u;
}

static inline lt_status lt_stage_cache_keyed(lt_stage_cache *k, uint32_t code, uint64_t key, lt_reading *out) {
    const lt_fixed *c = k->cal;
    lt_stage s;
    lt_status st = lt_check_code(c, code);
    if (st != LT_OK) return st;
    if (!(k->valid && k->key == key)) {
        k->valid = 0;
        st = (key >> 32) == 0u ? lt_stage_code(c, (uint32_t)key, &s)
                               : lt_stage_millicelsius(c, (int32_t)(uint32_t)(key & 0xffffffffu), &s);
        if (st != LT_OK) return st;
        /* Where no row stage can be built, the plain stage, uncached. */
        if (lt_row_stage_from(c, &s, &k->rs) != LT_OK) return lt_correct_staged(c, &s, code, out);
        k->valid = 1;
        k->key = key;
    }
    return lt_correct_row(c, &k->rs, code, out);
}

/* lt_correct_raw through a stage cache. */
static inline lt_status lt_stage_cache_correct_raw(lt_stage_cache *k, uint32_t code, uint32_t temp_code,
                                                   lt_reading *out) {
    return lt_stage_cache_keyed(k, code, (uint64_t)temp_code, out);
}

/* lt_correct through a stage cache. */
static inline lt_status lt_stage_cache_correct(lt_stage_cache *k, uint32_t code, int32_t temp_mc, lt_reading *out) {
    return lt_stage_cache_keyed(k, code, ((uint64_t)1 << 32) | (uint64_t)(uint32_t)temp_mc, out);
}

/* Corrects one reading: log code and temperature in m°C. */
static inline lt_status lt_correct(const lt_fixed *c, uint32_t code, int32_t temp_mc, lt_reading *out) {
    lt_stage s;
    lt_status st = lt_check_code(c, code);
    if (st != LT_OK) return st;
    if ((st = lt_stage_millicelsius(c, temp_mc, &s)) != LT_OK) return st;
    return lt_correct_staged(c, &s, code, out);
}

/* Corrects one reading from raw codes: log code and temperature channel code. */
static inline lt_status lt_correct_raw(const lt_fixed *c, uint32_t code, uint32_t temp_code, lt_reading *out) {
    lt_stage s;
    lt_status st = lt_check_code(c, code);
    if (st != LT_OK) return st;
    if ((st = lt_stage_code(c, temp_code, &s)) != LT_OK) return st;
    return lt_correct_staged(c, &s, code, out);
}

/* The reading in a unit: Q32 for LT_RATIO, Q24 for the others. */
static inline lt_status lt_value(const lt_reading *r, lt_unit_kind unit, int64_t *out) {
    int64_t x = r->x, e;
    lt_status st;
    switch (unit) {
    case LT_NEPERS: *out = x; return LT_OK;
    case LT_DECADES: *out = lt_round_shr(x * (int64_t)1865280597, 32); return LT_OK;
    case LT_DB_POWER: *out = lt_round_shr(x * (int64_t)1165800373, 28); return LT_OK;
    case LT_DB_AMPLITUDE: *out = lt_round_shr(x * (int64_t)2331600746, 28); return LT_OK;
    case LT_ABSORBANCE: *out = -lt_round_shr(x * (int64_t)1865280597, 32); return LT_OK;
    case LT_TRANSMITTANCE_PERCENT:
        if ((st = lt_exp_q32(x, &e)) != LT_OK) return st;
        if (e > INT64_MAX / 100) return LT_ABOVE_RANGE;
        *out = lt_round_shr(e * 100, 8);
        return LT_OK;
    case LT_RATIO: return lt_exp_q32(x, out);
    }
    return LT_BAD_TABLE;
}
