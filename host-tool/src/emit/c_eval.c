/* ---- evaluator: the same integer operations as logtrim::fixed, in the same order ---- */
/* The entry points are `inline` external definitions (ltrm.h declares them without `inline`): one copy
 * each for callers in other translation units, and inlined into each other and into callers in this one. */

/* floor(x / 2^n): arithmetic right shifts without implementation-defined behaviour. */
static inline int32_t ltrm_asr32(int32_t x, unsigned n) { return x < 0 ? ~(~x >> n) : x >> n; }
static inline int64_t ltrm_asr64(int64_t x, unsigned n) { return x < 0 ? ~(~x >> n) : x >> n; }

/* a*b exactly as (high word, low word). On ARMv6-M (no long multiply): the magnitudes' product from four 16x16-bit
 * products, negated when the signs differ, so that no library helper is called. */
static inline void ltrm_mul_parts(int32_t a, int32_t b, int32_t *hi, uint32_t *lo) {
#if !(defined(__ARM_ARCH_6M__) || (defined(__thumb__) && !defined(__thumb2__)))
    /* A core with a long multiply: the compiler's exact 64-bit product (one SMULL on a Cortex-M3/M4/M7). */
    int64_t p = (int64_t)a * b;
    *hi = (int32_t)ltrm_asr64(p, 32);
    *lo = (uint32_t)((uint64_t)p & 0xffffffffu);
#else
    uint32_t ua = a < 0 ? 0u - (uint32_t)a : (uint32_t)a, ub = b < 0 ? 0u - (uint32_t)b : (uint32_t)b;
    uint32_t al = ua & 0xffffu, ah = ua >> 16, bl = ub & 0xffffu, bh = ub >> 16;
    uint32_t p0 = al * bl, m1 = al * bh + (p0 >> 16), m2 = (m1 & 0xffffu) + ah * bl;
    uint32_t h = ah * bh + (m1 >> 16) + (m2 >> 16), l = ((m2 & 0xffffu) << 16) | (p0 & 0xffffu);
    if ((a < 0) == (b < 0)) { *hi = (int32_t)h; *lo = l; }
    else if (l == 0u) { *hi = -(int32_t)h; *lo = 0u; }
    else { *hi = ~(int32_t)h; *lo = ~l + 1u; }
#endif
}

/* a*b exactly. */
static inline int64_t ltrm_mul_wide(int32_t a, int32_t b) {
    int32_t h;
    uint32_t l;
    ltrm_mul_parts(a, b, &h, &l);
    return (int64_t)h * 4294967296LL + (int64_t)l;
}

/* floor(a*b / 2^32). */
static inline int32_t ltrm_mul_hi(int32_t a, int32_t b) {
    int32_t h;
    uint32_t l;
    ltrm_mul_parts(a, b, &h, &l);
    return h;
}

/* floor(a*b / 2^32) for an unsigned b. */
static inline int32_t ltrm_mul_hi_u(int32_t a, uint32_t b) {
#if !(defined(__ARM_ARCH_6M__) || (defined(__thumb__) && !defined(__thumb2__)))
    return (int32_t)ltrm_asr64((int64_t)a * (int64_t)b, 32);
#else
    uint32_t ua = a < 0 ? 0u - (uint32_t)a : (uint32_t)a;
    uint32_t al = ua & 0xffffu, ah = ua >> 16, bl = b & 0xffffu, bh = b >> 16;
    uint32_t p0 = al * bl, m1 = al * bh + (p0 >> 16), m2 = (m1 & 0xffffu) + ah * bl;
    uint32_t h = ah * bh + (m1 >> 16) + (m2 >> 16), l = ((m2 & 0xffffu) << 16) | (p0 & 0xffffu);
    if (a >= 0) return (int32_t)h;
    return l == 0u ? -(int32_t)h : ~(int32_t)h;
#endif
}

/* floor(a*b / 2^32) of two unsigned operands. */
static inline uint32_t ltrm_mul_hi_uu(uint32_t a, uint32_t b) {
#if !(defined(__ARM_ARCH_6M__) || (defined(__thumb__) && !defined(__thumb2__)))
    return (uint32_t)(((uint64_t)a * b) >> 32);
#else
    uint32_t al = a & 0xffffu, ah = a >> 16, bl = b & 0xffffu, bh = b >> 16;
    uint32_t p0 = al * bl, m1 = al * bh + (p0 >> 16), m2 = (m1 & 0xffffu) + ah * bl;
    return ah * bh + (m1 >> 16) + (m2 >> 16);
#endif
}

/* x*c / 2^32 rounded to nearest (ties up), exactly, for a constant c >= 0 whose middle sum fits (see
 * logtrim::fixed::arith::round32_constant_fits): four 16x16-bit products without sign handling on ARMv6-M. */
static inline int32_t ltrm_mul_round32_by(int32_t x, int32_t c) {
#if !(defined(__ARM_ARCH_6M__) || (defined(__thumb__) && !defined(__thumb2__)))
    return (int32_t)ltrm_asr64((int64_t)x * c + 2147483648LL, 32);
#else
    int32_t xh = ltrm_asr32(x, 16), ch = c >> 16;
    uint32_t xl = (uint32_t)x & 0xffffu, cl = (uint32_t)c & 0xffffu;
    int32_t mid = xh * (int32_t)cl + (int32_t)(xl * (uint32_t)ch) + (int32_t)((xl * cl) >> 16) + 32768;
    return xh * ch + ltrm_asr32(mid, 16);
#endif
}

/* floor(a*w / 2^16) for w < 2^16: two products. */
static inline int32_t ltrm_mulh16(int32_t a, uint32_t w) {
    int32_t ah = ltrm_asr32(a, 16);
    uint32_t al = (uint32_t)a & 0xffffu;
    return ah * (int32_t)w + (int32_t)((al * w) >> 16);
}

/* The highest set bit of v > 0, by a binary search (a Cortex-M0 has no CLZ). */
static inline uint32_t ltrm_top_bit(int32_t v) {
    uint32_t u = v > 0 ? (uint32_t)v : 0u, n = 0;
    if (u >= (1u << 16)) { u >>= 16; n += 16; }
    if (u >= (1u << 8)) { u >>= 8; n += 8; }
    if (u >= (1u << 4)) { u >>= 4; n += 4; }
    if (u >= (1u << 2)) { u >>= 2; n += 2; }
    if (u >= (1u << 1)) { n += 1; }
    return n;
}

/* The cubic B-spline basis at a Q16 fraction, in Q16, summing to 2^16 (the bias bend's, finer). */
static inline int32_t ltrm_spline16(const int32_t c[4], uint32_t t) {
    uint32_t t2, t3, s3, w0, w1, w3;
    t &= 0xffffu;
    t2 = (t * t) >> 16;
    t3 = (t2 * t) >> 16;
    s3 = 65536u + 3u * t2 > 3u * t + t3 ? (65536u + 3u * t2) - (3u * t + t3) : 0u;
    w0 = (s3 * 10923u) >> 16;
    w1 = (t3 >> 1) + 43691u - t2;
    w3 = (t3 * 10923u) >> 16;
    return ltrm_mulh16(c[0], w0) + ltrm_mulh16(c[1], w1) + ltrm_mulh16(c[2], 65536u - w0 - w1 - w3) + ltrm_mulh16(c[3], w3);
}

/* Six times the cubic B-spline basis at a Q16 fraction, in Q13, summing to 6 * 2^13 (no division). */
static inline void ltrm_basis6(uint32_t t, uint32_t w[4]) {
    uint32_t t2, t3, s3;
    t &= 0xffffu;
    t2 = (t * t + 32768u) >> 16;
    t3 = (t2 * t + 32768u) >> 16;
    s3 = 65536u + 3u * t2 > 3u * t + t3 ? (65536u + 3u * t2) - (3u * t + t3) : 0u;
    w[0] = (s3 + 4u) >> 3;
    w[1] = (3u * t3 + 4u * 65536u + 4u - 6u * t2) >> 3;
    w[3] = (t3 + 4u) >> 3;
    w[2] = 49152u - w[0] - w[1] - w[3];
}

/* Three quarters of a per-sample spline's value at t from four control points stored times 4/3. */
static inline int32_t ltrm_spline6(const int32_t c[4], uint32_t t) {
    uint32_t w[4];
    ltrm_basis6(t, w);
    return ltrm_mulh16(c[0], w[0]) + ltrm_mulh16(c[1], w[1]) + ltrm_mulh16(c[2], w[2]) + ltrm_mulh16(c[3], w[3]);
}

/* Six times the basis at t = m/16 times 16^3: exact. */
static inline void ltrm_window_weights(uint32_t m, int32_t w[4]) {
    int32_t mm = (int32_t)(m < LTRM_WINDOWS ? m : LTRM_WINDOWS), s = (int32_t)LTRM_WINDOWS - mm;
    int32_t m3 = mm * mm * mm;
    w[0] = s * s * s;
    w[1] = 3 * m3 - 6 * 16 * mm * mm + 4 * 4096;
    w[3] = m3;
    w[2] = 24576 - w[0] - w[1] - w[3];
}

/* ltrm_window_weights at every window end m = 0..16 (logtrim::fixed::interp::WINDOW_WEIGHTS), constants. */
#define LTRM_WW0(m) ((16 - (m)) * (16 - (m)) * (16 - (m)))
#define LTRM_WW1(m) (3 * (m) * (m) * (m) - 6 * 16 * (m) * (m) + 4 * 4096)
#define LTRM_WW(m) { LTRM_WW0(m), LTRM_WW1(m), 24576 - LTRM_WW0(m) - LTRM_WW1(m) - (m) * (m) * (m), (m) * (m) * (m) }
static const int32_t ltrm_window_w[17][4] = {
    LTRM_WW(0), LTRM_WW(1), LTRM_WW(2), LTRM_WW(3), LTRM_WW(4), LTRM_WW(5), LTRM_WW(6), LTRM_WW(7), LTRM_WW(8),
    LTRM_WW(9), LTRM_WW(10), LTRM_WW(11), LTRM_WW(12), LTRM_WW(13), LTRM_WW(14), LTRM_WW(15), LTRM_WW(16)
};

/* floor(sum w_k c_k / 4096) of control points stored divided by 6, exact. */
static inline int64_t ltrm_window_value(const int32_t *c, const int32_t w[4]) {
    int32_t hi = w[0] * ltrm_asr32(c[0], 16) + w[1] * ltrm_asr32(c[1], 16) + w[2] * ltrm_asr32(c[2], 16) +
                 w[3] * ltrm_asr32(c[3], 16);
    uint32_t lo = (uint32_t)w[0] * ((uint32_t)c[0] & 0xffffu) + (uint32_t)w[1] * ((uint32_t)c[1] & 0xffffu) +
                  (uint32_t)w[2] * ((uint32_t)c[2] & 0xffffu) + (uint32_t)w[3] * ((uint32_t)c[3] & 0xffffu);
    return (int64_t)hi * (1 << (16 - LTRM_COLUMN_GUARD)) + (int64_t)(lo >> LTRM_COLUMN_GUARD);
}

/* ltrm_window_value when strictly within (lo, hi), for lo >= -2^29 and hi <= 2^30 (wider ones are narrowed to
 * that), else 0: the same value in 32 bits. A value v = 16 h + (l >> 12) in such a range has its high halves'
 * sum h within +-2^26 (l >> 12 is in [0, 2^18.6)), so h is checked first and the sum then fits an int32_t.
 * The Rust side keeps the 64-bit form (faster there); both are exact. */
static inline int ltrm_window_value_within(const int32_t *c, const int32_t w[4], int32_t lo, int32_t hi, int32_t *out) {
    int32_t h = w[0] * ltrm_asr32(c[0], 16) + w[1] * ltrm_asr32(c[1], 16) + w[2] * ltrm_asr32(c[2], 16) +
                w[3] * ltrm_asr32(c[3], 16), v;
    uint32_t l;
    if (lo < -(1 << 29)) lo = -(1 << 29);
    if (hi > (1 << 30)) hi = 1 << 30;
    if (!(h > -(1 << 26) && h < (1 << 26))) return 0;
    l = (uint32_t)w[0] * ((uint32_t)c[0] & 0xffffu) + (uint32_t)w[1] * ((uint32_t)c[1] & 0xffffu) +
        (uint32_t)w[2] * ((uint32_t)c[2] & 0xffffu) + (uint32_t)w[3] * ((uint32_t)c[3] & 0xffffu);
    v = h * (1 << (16 - LTRM_COLUMN_GUARD)) + (int32_t)(l >> LTRM_COLUMN_GUARD);
    if (!(v > lo && v < hi)) return 0;
    *out = v;
    return 1;
}

/* floor(x*t / 2^20) for a Q20 fraction, within two units below (logtrim::fixed::interp::mulh20). */
static inline int32_t ltrm_mulh20(int32_t x, uint32_t t) {
    return ltrm_mulh16(x, (t >> 4) & 0xffffu) + ltrm_asr32(ltrm_mulh16(x, t & 15u), 4u);
}

/* |v| < 2^k for a two's complement word, as one unsigned comparison. */
static inline int ltrm_within32(uint32_t v, unsigned k) { return v + ((1u << k) - 1u) < (2u << k) - 1u; }

/* A spline's value (control points stored divided by 6) at a fraction of its segment, from its power form by
 * Horner's rule (logtrim::fixed::interp::spline_at, spline_at16): the inner products with the fraction's top 16
 * bits, the outer one with all of it (20 bits at a temperature, 16 in the sensor table). The
 * control points' differences d = c2 - c0, p = c0 - c1, q = c2 - c1, e = p + q, f = c1 - c2, g = c3 - c0 are
 * formed as unsigned words and refused, as the Rust checked operations refuse them, where one of them does not
 * fit an int32 (the sign rule of two's complement, one test for all six) or is too large for the 32-bit steps;
 * no 64-bit arithmetic. */
#define LTRM_HORNER(NAME, MUL, MASK, SHIFT)                                                                              \
    static inline int NAME(const int32_t *c, uint32_t t, int64_t *out) {                                          \
        uint32_t u0 = (uint32_t)c[0], u1 = (uint32_t)c[1], u2 = (uint32_t)c[2], u3 = (uint32_t)c[3];              \
        uint32_t d = u2 - u0, p = u0 - u1, q = u2 - u1, e = p + q, f = u1 - u2, g = u3 - u0;                      \
        uint32_t ovf = ((u2 ^ u0) & (u2 ^ d)) | ((u0 ^ u1) & (u0 ^ p)) | ((u2 ^ u1) & (u2 ^ q)) |                 \
                       (~(p ^ q) & (p ^ e)) | ((u1 ^ u2) & (u1 ^ f)) | ((u3 ^ u0) & (u3 ^ g));                    \
        int32_t a1, a2, a3, v;                                                                                    \
        if ((ovf >> 31) ||                                                                                        \
            !(ltrm_within32(d, 28) && ltrm_within32(e, 27) && ltrm_within32(f, 26) && ltrm_within32(g, 27)))      \
            return 0;                                                                                             \
        /* Within +-2^28: the words convert to the int32 values they hold. */                                     \
        a1 = 3 * (int32_t)d;                                                                                      \
        a2 = 3 * (int32_t)e;                                                                                      \
        a3 = (int32_t)g + 3 * (int32_t)f;                                                                         \
        t &= MASK;                                                                                                \
        v = a2 + ltrm_mulh16(a3, t >> SHIFT);                                                                     \
        v = a1 + ltrm_mulh16(v, t >> SHIFT);                                                                      \
        *out = (int64_t)c[0] + 4 * (int64_t)c[1] + c[2] + MUL(v, t);                                              \
        return 1;                                                                                                 \
    }
/* At a Q20 fraction of a temperature segment (logtrim::fixed::interp::spline_at). */
LTRM_HORNER(ltrm_spline_at, ltrm_mulh20, 0xfffffu, 4u)
/* At the temperature code's exact 16-bit fraction of a sensor segment (logtrim::fixed::interp::spline_at16). */
LTRM_HORNER(ltrm_spline_at16, ltrm_mulh16, 0xffffu, 0u)

/* A value of the tables at a window end (or the sensor's), checked against its limit. */
static inline ltrm_status ltrm_bounded(int64_t v, int32_t limit, int32_t *out) {
    if (!(v > -(int64_t)limit && v < (int64_t)limit)) return LTRM_BAD_TABLE;
    *out = (int32_t)v;
    return LTRM_OK;
}

/* G(v) = ln(1 - e^-v), v and result Q24. */
static inline ltrm_status ltrm_bend_q24(int32_t v, int32_t *out) {
    uint32_t e, start;
    int32_t m, pos;
    if (v < (1 << LTRM_BEND_FLOOR_BIT)) return LTRM_BELOW_RANGE;
    if (v >= (1 << (LTRM_BEND_FLOOR_BIT + LTRM_BEND_OCTAVES))) { *out = 0; return LTRM_OK; }
    e = ltrm_top_bit(v);
    m = v - (1 << e);
    pos = e >= 19u ? (m >> (e - 19u)) : (m << (19u - e));
    start = (e - LTRM_BEND_FLOOR_BIT) * LTRM_BEND_STRIDE + (((uint32_t)pos >> 16) & (LTRM_BEND_SEGMENTS - 1u));
    if (start + 4u > LTRM_BEND_LEN) return LTRM_BAD_TABLE;
    *out = ltrm_spline16(ltrm_bend + start, (uint32_t)pos & 0xffffu);
    return LTRM_OK;
}

/* A value the compiler may not see as the constant it is (one multiply, not a chain of shifts and adds on a
 * core whose multiply takes one cycle). */
#if defined(__GNUC__)
#define LTRM_OPAQUE(v) __asm__("" : "+r"(v))
#else
#define LTRM_OPAQUE(v) ((void)0)
#endif

/* e^x, x Q24, result Q32: the reduction in 32 bits (x bounded first), the same (k, r) as r = 128x - k*LN2_Q31. */
static inline ltrm_status ltrm_exp_q32(int32_t x, int64_t *out) {
    int32_t k, a, r, sh, ln2, rest;
    uint32_t ru, j, rho, rho30, rq, rho2h, rho3, q, base, m;
    if (x >= LTRM_EXP_X_ABOVE) return LTRM_ABOVE_RANGE;
    if (x < LTRM_EXP_X_ZERO) { *out = 0; return LTRM_OK; }
    k = ltrm_asr32(ltrm_asr32(x, 14) * (int32_t)LTRM_HALF_INV_LN2_Q16, 25);
    ln2 = LTRM_LN2_Q24;
    rest = LTRM_LN2_Q31_REST;
    LTRM_OPAQUE(ln2);
    LTRM_OPAQUE(rest);
    a = x - k * ln2;
    if (a < 0) { k -= 1; a += LTRM_LN2_Q24; }
    else if (a >= LTRM_LN2_Q24) { k += 1; a -= LTRM_LN2_Q24; }
    r = a * 128 - k * rest;
    if (r < 0) { k -= 1; r += LTRM_LN2_Q31; }
    else if (r >= LTRM_LN2_Q31) { k += 1; r -= LTRM_LN2_Q31; }
    ru = (uint32_t)r;
    j = ru >> (31u - LTRM_EXP64_LOG2);
    rho = ru & ((1u << (31u - LTRM_EXP64_LOG2)) - 1u);
    rho30 = rho >> 1;
    rq = rho >> 9;
    rho2h = (rq * rq) >> 15;
    rho3 = (((2u * rho2h) >> 8) * (rho30 >> 14)) >> 8;
    q = rho30 + rho2h + ((rho3 * 10923u) >> 16);
    if (j >= LTRM_EXP64_LEN) return LTRM_ABOVE_RANGE;
    base = (uint32_t)ltrm_exp64[j];
    m = base + (ltrm_mul_hi_uu(q << 6, base) >> 4);
    sh = k + 2;
    if (sh >= 32) *out = (int64_t)m * ((int64_t)1 << 32);
    else if (sh > 0) *out = (int64_t)(m >> (32 - sh)) * ((int64_t)1 << 32) + (int64_t)((m & (0xffffffffu >> sh)) << sh);
    else if (sh == 0) *out = (int64_t)m;
    else if (sh > -32) *out = (int64_t)((m >> (uint32_t)-sh) + ((m >> (uint32_t)(-sh - 1)) & 1u));
    else *out = 0;
    return LTRM_OK;
}

static inline ltrm_status ltrm_check_code(const ltrm_fixed *c, uint32_t code) {
    uint32_t top = c->adc_max_code > c->rail_margin ? c->adc_max_code - c->rail_margin : 0u;
    if (code > c->adc_max_code) return LTRM_CODE_OUT_OF_ADC_RANGE;
    if (code <= c->rail_margin || code >= top) return LTRM_SATURATED;
    return LTRM_OK;
}

/* theta (m°C * 1024) from the temperature channel's code. */
static inline ltrm_status ltrm_theta_from_code(const ltrm_fixed *c, uint32_t code, int32_t *theta) {
    uint32_t k, pos, seg;
    int64_t v;
    if (!c->has_sensor) return LTRM_NOT_CALIBRATED;
    if (code < c->sensor_code_lo) return code < c->far_below_code ? c->fault_far_below : c->fault_below;
    if (code > c->sensor_code_hi) return code > c->far_above_code ? c->fault_far_above : c->fault_above;
    k = c->sensor_step_log2 > 16u ? 16u : c->sensor_step_log2;
    pos = code - c->sensor_code_lo;
    seg = pos >> k;
    if ((uint64_t)seg + 4u > (uint64_t)c->sensor_len) return LTRM_BAD_TABLE;
    if (!ltrm_spline_at16(c->sensor_knots + seg, (pos & ((1u << k) - 1u)) << (16u - k), &v)) return LTRM_BAD_TABLE;
    return ltrm_bounded(v, LTRM_THETA_LIMIT, theta);
}

/* theta of a temperature in m°C, the accepted range checked first. */
static inline ltrm_status ltrm_theta_from_millicelsius(const ltrm_fixed *c, int32_t temp_mc, int32_t *theta) {
    int64_t lo = ltrm_asr64((int64_t)c->temp_lo + (1 << LTRM_THETA_FRAC) - 1, LTRM_THETA_FRAC);
    int64_t hi = ltrm_asr64((int64_t)c->temp_hi, LTRM_THETA_FRAC);
    if ((int64_t)temp_mc < lo || (int64_t)temp_mc > hi) return LTRM_TEMPERATURE_OUT_OF_RANGE;
    *theta = temp_mc * (1 << LTRM_THETA_FRAC);
    return LTRM_OK;
}

/* theta checked against the accepted range, and its window (16 per knot step) and Q16 fraction. */
static inline ltrm_status ltrm_window_of(const ltrm_fixed *c, int32_t theta, uint32_t *index, uint32_t *f16) {
    int64_t p;
    uint32_t wb = c->t_step_log2 < LTRM_T_STEP_MIN ? LTRM_T_STEP_MIN : (c->t_step_log2 > LTRM_T_STEP_MAX ? LTRM_T_STEP_MAX : c->t_step_log2);
    if (theta < c->temp_lo || theta > c->temp_hi) return LTRM_TEMPERATURE_OUT_OF_RANGE;
    p = (int64_t)theta - c->t_origin;
    if (p < 0 || p >= ((int64_t)1 << 31)) return LTRM_BAD_TABLE;
    wb -= LTRM_WINDOWS_LOG2;
    *index = (uint32_t)p >> wb;
    *f16 = ((uint32_t)p & ((1u << wb) - 1u)) >> (wb - 16u);
    return LTRM_OK;
}

static inline int ltrm_extrapolated(const ltrm_fixed *c, int32_t theta) { return theta < c->temp_min || theta > c->temp_max; }

static inline void ltrm_end_weights(const ltrm_fixed *c, uint32_t end, uint32_t *seg, int32_t w[4]) {
    uint32_t last = c->t_knots >= 2u ? c->t_knots - 2u : 0u;
    *seg = (end >> LTRM_WINDOWS_LOG2) < last ? (end >> LTRM_WINDOWS_LOG2) : last;
    ltrm_window_weights(end - (*seg << LTRM_WINDOWS_LOG2), w);
}

static inline ltrm_status ltrm_end_value(const int32_t *t, uint32_t len, uint32_t seg, const int32_t w[4], int32_t limit,
                                     int32_t *out) {
    if ((uint64_t)seg + 4u > (uint64_t)len) return LTRM_BAD_TABLE;
    return ltrm_bounded(ltrm_window_value(t + seg, w), limit, out);
}

/* The four per-temperature values at window end `end`, exact and checked. */
static inline ltrm_status ltrm_end_scalars(const ltrm_fixed *c, uint32_t end, ltrm_scalars *s) {
    uint32_t seg;
    int32_t w[4];
    int64_t v;
    ltrm_status st;
    ltrm_end_weights(c, end, &seg, w);
    if ((uint64_t)seg + 4u > (uint64_t)c->inv_slope_len) return LTRM_BAD_TABLE;
    v = ltrm_window_value(c->inv_slope + seg, w);
    if (!(v > 0 && v < LTRM_INV_SLOPE_LIMIT)) return LTRM_BAD_TABLE;
    s->inv_slope = (uint32_t)v;
    if ((uint64_t)seg + 4u > (uint64_t)c->offset_len) return LTRM_BAD_TABLE;
    v = ltrm_window_value(c->offset + seg, w);
    if (!(v > LTRM_OFFSET_MIN && v < LTRM_OFFSET_MAX)) return LTRM_BAD_TABLE;
    s->offset = (int32_t)v;
    s->ln_bias = 0;
    if (c->bias_bend && (st = ltrm_end_value(c->ln_bias, c->ln_bias_len, seg, w, LTRM_BIAS_LIMIT, &s->ln_bias)) != LTRM_OK)
        return st;
    s->u_min = INT32_MIN;
    if (c->sensitivity_limit && (st = ltrm_end_value(c->u_min, c->u_min_len, seg, w, LTRM_BIAS_LIMIT, &s->u_min)) != LTRM_OK)
        return st;
    return LTRM_OK;
}

/* Window `index`'s segment and the window weights at both its ends (logtrim::fixed::WindowEnds): the end of a
 * segment's last window is the next segment's start, the same value from the same four control points. */
typedef struct ltrm_ends {
    uint32_t seg, m;
    const int32_t *w0, *w1;
} ltrm_ends;

static inline void ltrm_window_ends(const ltrm_fixed *c, uint32_t index, ltrm_ends *e) {
    uint32_t last = c->t_knots >= 2u ? c->t_knots - 2u : 0u;
    e->seg = (index >> LTRM_WINDOWS_LOG2) < last ? (index >> LTRM_WINDOWS_LOG2) : last;
    e->m = index - (e->seg << LTRM_WINDOWS_LOG2);
    e->w0 = ltrm_window_w[e->m < LTRM_WINDOWS ? e->m : LTRM_WINDOWS];
    e->w1 = ltrm_window_w[e->m < LTRM_WINDOWS ? e->m + 1u : LTRM_WINDOWS];
}

/* Residual column `col` of the four rows from `seg` (zeros for an empty table), with the refusals of a table too
 * small for them. */
static inline ltrm_status ltrm_column_rows(const ltrm_fixed *c, uint32_t seg, uint32_t col, int32_t v[4]) {
    uint32_t k, stride = (uint32_t)c->xa_knots + 2u, row, i;
    for (k = 0; k < 4u; k++) {
        row = seg + k;
        v[k] = 0;
        /* Row and stride below 2^16: a 32-bit product (no 64-bit multiply helper on a Cortex-M0). */
        if (stride > 0xffffu || row > 0xffffu || col >= stride) return LTRM_BAD_TABLE;
        /* An empty table is a residual of zero everywhere: the refusals of a full table of zeros. */
        if (c->residual_len == 0u) {
            if (row >= (uint32_t)c->t_knots + 2u) return LTRM_BAD_TABLE;
            continue;
        }
        i = row * stride + col;
        if (i >= c->residual_len) return LTRM_BAD_TABLE;
        v[k] = c->residual[i];
    }
    return LTRM_OK;
}

/* Residual column `col` collapsed over temperature at both ends of a window. */
static inline ltrm_status ltrm_column_ends(const ltrm_fixed *c, const ltrm_ends *e, uint32_t col, int32_t *lo, int32_t *hi) {
    int32_t v[4];
    ltrm_status st = ltrm_column_rows(c, e->seg, col, v);
    if (st != LTRM_OK) return st;
    *lo = e->w0[0] * v[0] + e->w0[1] * v[1] + e->w0[2] * v[2] + e->w0[3] * v[3];
    *hi = e->w1[0] * v[0] + e->w1[1] * v[1] + e->w1[2] * v[2] + e->w1[3] * v[3];
    return LTRM_OK;
}

/* floor(sum w_k c_k / 2) of four residual control points over temperature with basis6 weights: a column at theta in
 * the window-end format (logtrim::fixed::interp::collapse6). */
static inline int32_t ltrm_collapse6(const uint32_t w[4], int32_t a, int32_t b, int32_t c, int32_t d) {
    return ltrm_asr32((int32_t)w[0] * a + (int32_t)w[1] * b + (int32_t)w[2] * c + (int32_t)w[3] * d, 1u);
}

/* Where theta lies for an evaluation at theta itself (logtrim::fixed::TempPos): segment, Q20 fraction, weights. */
typedef struct ltrm_pos {
    uint32_t seg, t20;
    uint32_t w[4];
} ltrm_pos;

static inline ltrm_status ltrm_pos_at(const ltrm_fixed *c, int32_t theta, ltrm_pos *p) {
    uint32_t index, f16;
    ltrm_status st;
    if ((st = ltrm_window_of(c, theta, &index, &f16)) != LTRM_OK) return st;
    p->seg = index >> LTRM_WINDOWS_LOG2;
    if (p->seg > (c->t_knots >= 2u ? c->t_knots - 2u : 0u)) return LTRM_BAD_TABLE;
    p->t20 = ((index & (LTRM_WINDOWS - 1u)) << 16) | f16;
    ltrm_basis6(p->t20 >> LTRM_WINDOWS_LOG2, p->w);
    return LTRM_OK;
}

static inline ltrm_status ltrm_value_at(const int32_t *t, uint32_t len, const ltrm_pos *p, int64_t *v) {
    if ((uint64_t)p->seg + 4u > (uint64_t)len) return LTRM_BAD_TABLE;
    return ltrm_spline_at(t + p->seg, p->t20, v) ? LTRM_OK : LTRM_BAD_TABLE;
}

/* The four per-temperature values at theta itself, each checked against its limit. */
static inline ltrm_status ltrm_scalars_at(const ltrm_fixed *c, const ltrm_pos *p, ltrm_scalars *s) {
    int64_t v;
    ltrm_status st;
    if ((st = ltrm_value_at(c->inv_slope, c->inv_slope_len, p, &v)) != LTRM_OK) return st;
    if (!(v > 0 && v < LTRM_INV_SLOPE_LIMIT)) return LTRM_BAD_TABLE;
    s->inv_slope = (uint32_t)v;
    if ((st = ltrm_value_at(c->offset, c->offset_len, p, &v)) != LTRM_OK) return st;
    if (!(v > LTRM_OFFSET_MIN && v < LTRM_OFFSET_MAX)) return LTRM_BAD_TABLE;
    s->offset = (int32_t)v;
    s->ln_bias = 0;
    if (c->bias_bend) {
        if ((st = ltrm_value_at(c->ln_bias, c->ln_bias_len, p, &v)) != LTRM_OK) return st;
        if ((st = ltrm_bounded(v, LTRM_BIAS_LIMIT, &s->ln_bias)) != LTRM_OK) return st;
    }
    s->u_min = INT32_MIN;
    if (c->sensitivity_limit) {
        if ((st = ltrm_value_at(c->u_min, c->u_min_len, p, &v)) != LTRM_OK) return st;
        if ((st = ltrm_bounded(v, LTRM_BIAS_LIMIT, &s->u_min)) != LTRM_OK) return st;
    }
    return LTRM_OK;
}

/* The residual's columns col..col+3 at theta, with the refusals of a table too small for them. */
static inline ltrm_status ltrm_columns_theta(const ltrm_fixed *c, const ltrm_pos *p, uint32_t col, int32_t out[4]) {
    uint32_t stride = (uint32_t)c->xa_knots + 2u, j;
    const int16_t *r0, *r1, *r2, *r3;
    if (stride > 0xffffu || p->seg > 0xffffu - 3u || stride < 4u || col > stride - 4u) return LTRM_BAD_TABLE;
    if (c->residual_len == 0u) {
        if (p->seg + 3u >= (uint32_t)c->t_knots + 2u) return LTRM_BAD_TABLE;
        for (j = 0; j < 4u; j++) out[j] = 0;
        return LTRM_OK;
    }
    if ((p->seg + 3u) * stride + col + 4u > c->residual_len) return LTRM_BAD_TABLE;
    r0 = c->residual + p->seg * stride + col;
    r1 = r0 + stride;
    r2 = r1 + stride;
    r3 = r2 + stride;
    for (j = 0; j < 4u; j++) out[j] = ltrm_collapse6(p->w, r0[j], r1[j], r2[j], r3[j]);
    return LTRM_OK;
}

/* Residual column `col` alone at theta (a stage's row): the value ltrm_columns_theta gives. */
static inline ltrm_status ltrm_column_at(const ltrm_fixed *c, const ltrm_pos *p, uint32_t col, int32_t *out) {
    int32_t v[4];
    ltrm_status st = ltrm_column_rows(c, p->seg, col, v);
    if (st != LTRM_OK) return st;
    *out = ltrm_collapse6(p->w, v[0], v[1], v[2], v[3]);
    return LTRM_OK;
}

/* The values at a Q16 fraction of a window: a parabola for the offset and the inverse slope, a line for the others. */
static inline void ltrm_window_at(const ltrm_window *w, uint32_t f16, ltrm_scalars *out) {
    out->offset = w->start.offset + ltrm_mulh16(w->slope[0] + ltrm_mulh16(w->curv[0], f16), f16);
    out->inv_slope = (uint32_t)((int64_t)w->start.inv_slope + ltrm_mulh16(w->slope[1] + ltrm_mulh16(w->curv[1], f16), f16));
    out->ln_bias = w->start.ln_bias + ltrm_mulh16(w->slope[2], f16);
    out->u_min = w->start.u_min + ltrm_mulh16(w->slope[3], f16);
}

/* The offset's parabola over a window: (d - c, c), checked to stay within the offset's range. Both ends lie
 * within it and |c| < 2^27, so every sum fits 32 bits. */
static inline ltrm_status ltrm_parabola_offset(int32_t q0, int32_t q1, int32_t c, int32_t *dc, int32_t *cc) {
    int32_t reach = (c < 0 ? -c : c) + 4;
    if (!((q0 < q1 ? q0 : q1) - reach > LTRM_OFFSET_MIN && (q0 > q1 ? q0 : q1) + reach < LTRM_OFFSET_MAX)) return LTRM_BAD_TABLE;
    *dc = q1 - q0 - c;
    *cc = c;
    return LTRM_OK;
}

/* The inverse slope's: both ends in (0, 2^32), the parabola too, d and d - c within +-2^31 (exclusive). */
static inline ltrm_status ltrm_parabola_inv_slope(uint32_t q0, uint32_t q1, int32_t c, int32_t *dc, int32_t *cc) {
    uint32_t reach = (c < 0 ? 0u - (uint32_t)c : (uint32_t)c) + 4u, diff = q1 >= q0 ? q1 - q0 : q0 - q1;
    int32_t d;
    if (!((q0 < q1 ? q0 : q1) > reach && (q0 > q1 ? q0 : q1) <= UINT32_MAX - reach && diff < 0x80000000u)) return LTRM_BAD_TABLE;
    d = q1 >= q0 ? (int32_t)diff : -(int32_t)diff;
    if ((c > 0 && d <= INT32_MIN + c) || (c < 0 && d > INT32_MAX + c)) return LTRM_BAD_TABLE;
    *dc = d - c;
    *cc = c;
    return LTRM_OK;
}

/* The chord's deviation term c = 3 * sum W_k c_k / 8192 of a spline over a window (W: 32 times the
 * second-derivative basis at the window's middle). */
static inline ltrm_status ltrm_curvature(const int32_t *t, uint32_t len, uint32_t seg, const int32_t w[4], int32_t *out) {
    int32_t hi, lo;
    if ((uint64_t)seg + 4u > (uint64_t)len) return LTRM_BAD_TABLE;
    t += seg;
    hi = w[0] * ltrm_asr32(t[0], 16) + w[1] * ltrm_asr32(t[1], 16) + w[2] * ltrm_asr32(t[2], 16) + w[3] * ltrm_asr32(t[3], 16);
    lo = w[0] * (int32_t)((uint32_t)t[0] & 0xffffu) + w[1] * (int32_t)((uint32_t)t[1] & 0xffffu) +
         w[2] * (int32_t)((uint32_t)t[2] & 0xffffu) + w[3] * (int32_t)((uint32_t)t[3] & 0xffffu);
    /* floor(3 * (hi * 2^16 + lo) / 2^13) = 24 * hi + floor(3 * lo / 2^13): |hi| < 2^22, |lo| < 2^23, 32 bits. */
    *out = hi * 24 + ltrm_asr32(lo * 3, 13);
    return LTRM_OK;
}

/* A table's values at both ends of a window, from one segment's four control points. */
static inline ltrm_status ltrm_ends_values(const int32_t *t, uint32_t len, const ltrm_ends *e, int64_t *v0, int64_t *v1) {
    if ((uint64_t)e->seg + 4u > (uint64_t)len) return LTRM_BAD_TABLE;
    *v0 = ltrm_window_value(t + e->seg, e->w0);
    *v1 = ltrm_window_value(t + e->seg, e->w1);
    return LTRM_OK;
}

/* Window `index`: both ends and the curvatures. */
static inline ltrm_status ltrm_window_load(const ltrm_fixed *c, uint32_t index, ltrm_ends *ends, ltrm_window *w) {
    ltrm_ends e;
    uint32_t m;
    int32_t cw[4], o0, o1, l0 = 0, l1 = 0, u0 = INT32_MIN, u1 = INT32_MIN, cv;
    int64_t a0, a1;
    ltrm_status st;
    ltrm_window_ends(c, index, &e);
    *ends = e;
    if ((st = ltrm_ends_values(c->inv_slope, c->inv_slope_len, &e, &a0, &a1)) != LTRM_OK) return st;
    if ((uint64_t)e.seg + 4u > (uint64_t)c->offset_len) return LTRM_BAD_TABLE;
    if (!ltrm_window_value_within(c->offset + e.seg, e.w0, LTRM_OFFSET_MIN, LTRM_OFFSET_MAX, &o0) ||
        !ltrm_window_value_within(c->offset + e.seg, e.w1, LTRM_OFFSET_MIN, LTRM_OFFSET_MAX, &o1))
        return LTRM_BAD_TABLE;
    if (c->bias_bend) {
        if ((uint64_t)e.seg + 4u > (uint64_t)c->ln_bias_len) return LTRM_BAD_TABLE;
        if (!ltrm_window_value_within(c->ln_bias + e.seg, e.w0, -LTRM_BIAS_LIMIT, LTRM_BIAS_LIMIT, &l0) ||
            !ltrm_window_value_within(c->ln_bias + e.seg, e.w1, -LTRM_BIAS_LIMIT, LTRM_BIAS_LIMIT, &l1))
            return LTRM_BAD_TABLE;
    }
    if (c->sensitivity_limit) {
        if ((uint64_t)e.seg + 4u > (uint64_t)c->u_min_len) return LTRM_BAD_TABLE;
        if (!ltrm_window_value_within(c->u_min + e.seg, e.w0, -LTRM_BIAS_LIMIT, LTRM_BIAS_LIMIT, &u0) ||
            !ltrm_window_value_within(c->u_min + e.seg, e.w1, -LTRM_BIAS_LIMIT, LTRM_BIAS_LIMIT, &u1))
            return LTRM_BAD_TABLE;
    }
    if (!(a0 > 0 && a0 < LTRM_INV_SLOPE_LIMIT && a1 > 0 && a1 < LTRM_INV_SLOPE_LIMIT)) return LTRM_BAD_TABLE;
    m = e.m < LTRM_WINDOWS - 1u ? e.m : LTRM_WINDOWS - 1u;
    cw[0] = 31 - 2 * (int32_t)m;
    cw[1] = 6 * (int32_t)m - 61;
    cw[2] = 29 - 6 * (int32_t)m;
    cw[3] = 2 * (int32_t)m + 1;
    if ((st = ltrm_curvature(c->offset, c->offset_len, e.seg, cw, &cv)) != LTRM_OK) return st;
    if ((st = ltrm_parabola_offset(o0, o1, cv, &w->slope[0], &w->curv[0])) != LTRM_OK) return st;
    if ((st = ltrm_curvature(c->inv_slope, c->inv_slope_len, e.seg, cw, &cv)) != LTRM_OK) return st;
    if ((st = ltrm_parabola_inv_slope((uint32_t)a0, (uint32_t)a1, cv, &w->slope[1], &w->curv[1])) != LTRM_OK) return st;
    w->start.offset = o0;
    w->start.inv_slope = (uint32_t)a0;
    w->start.ln_bias = l0;
    w->start.u_min = u0;
    w->slope[2] = l1 - l0;
    w->slope[3] = u1 - u0;
    return LTRM_OK;
}

/* Steps 3-4 of the chain for a checked code: x~ and its place on the residual's grid. */
static inline ltrm_status ltrm_xa(const ltrm_fixed *c, const ltrm_scalars *s, uint32_t code, int32_t *xa, uint32_t *seg,
                              uint32_t *t16) {
    uint32_t qo = c->offset_frac > 30u ? 30u : c->offset_frac, xs, pu;
    int32_t d, u, g;
    int64_t p;
    ltrm_status st;
    if (code >= (LTRM_CODE_LIMIT >> qo)) return LTRM_BAD_TABLE;
    d = (int32_t)(code << qo) - s->offset;
    u = ltrm_mul_hi_u(d, s->inv_slope);
    if (u < s->u_min) return LTRM_BELOW_RANGE;
    *xa = u;
    if (c->bias_bend) {
        if ((st = ltrm_bend_q24(u - s->ln_bias, &g)) != LTRM_OK) return st;
        *xa = u + g;
    }
    p = (int64_t)*xa - c->xa_origin;
    if (p < 0) return LTRM_BELOW_RANGE;
    pu = (uint32_t)p;
    xs = c->xa_step_log2 < LTRM_XA_STEP_MIN ? LTRM_XA_STEP_MIN : (c->xa_step_log2 > LTRM_XA_STEP_MAX ? LTRM_XA_STEP_MAX : c->xa_step_log2);
    *seg = pu >> xs;
    if (*seg + 1u >= c->xa_knots) return LTRM_ABOVE_RANGE;
    *t16 = (pu & ((1u << xs) - 1u)) >> (xs - 16u);
    return LTRM_OK;
}

/* Step 5 without the range: x~ plus the residual from its four columns at the temperature. */
static inline int32_t ltrm_x_unranged(const ltrm_fixed *c, int32_t xa, uint32_t t16, const int32_t cols[4]) {
    uint32_t fr, n;
    int32_t r;
    fr = c->residual_frac < LTRM_RESIDUAL_FRAC_MIN ? LTRM_RESIDUAL_FRAC_MIN
                                                  : (c->residual_frac > LTRM_RESIDUAL_FRAC_MAX ? LTRM_RESIDUAL_FRAC_MAX : c->residual_frac);
    n = fr + LTRM_COLUMN_GUARD - LTRM_X_FRAC;
    r = ltrm_spline6(cols, t16);
    if (n > 0u) r = ltrm_asr32(r + (1 << (n - 1u)), n);
    return r + xa;
}

/* Step 5: the residual from its four columns at the temperature, then x and its range. */
static inline ltrm_status ltrm_x_finish(const ltrm_fixed *c, int32_t xa, uint32_t t16, const int32_t cols[4], int32_t *x) {
    int32_t r = ltrm_x_unranged(c, xa, t16, cols);
    if (r < c->x_min) return LTRM_BELOW_RANGE;
    if (r > c->x_max) return LTRM_ABOVE_RANGE;
    *x = r;
    return LTRM_OK;
}

/* The direct path from theta: the scalars and the four columns the code needs, at theta itself. */
static inline ltrm_status ltrm_correct_theta(const ltrm_fixed *c, uint32_t code, int32_t theta, ltrm_reading *out) {
    uint32_t seg, t16;
    ltrm_pos p;
    ltrm_scalars s;
    int32_t xa, cols[4];
    ltrm_status st;
    if ((st = ltrm_pos_at(c, theta, &p)) != LTRM_OK) return st;
    if ((st = ltrm_scalars_at(c, &p, &s)) != LTRM_OK) return st;
    if ((st = ltrm_xa(c, &s, code, &xa, &seg, &t16)) != LTRM_OK) return st;
    if ((st = ltrm_columns_theta(c, &p, seg, cols)) != LTRM_OK) return st;
    if ((st = ltrm_x_finish(c, xa, t16, cols, &out->x)) != LTRM_OK) return st;
    out->temperature_extrapolated = ltrm_extrapolated(c, theta);
    return LTRM_OK;
}

/* Corrects one reading: log code and temperature in m°C. */
inline ltrm_status ltrm_correct(const ltrm_fixed *c, uint32_t code, int32_t temp_mc, ltrm_reading *out) {
    int32_t theta = 0;
    ltrm_status st = ltrm_check_code(c, code);
    if (st != LTRM_OK) return st;
    if ((st = ltrm_theta_from_millicelsius(c, temp_mc, &theta)) != LTRM_OK) return st;
    return ltrm_correct_theta(c, code, theta, out);
}

/* Corrects one reading from raw codes: log code and temperature channel code. */
inline ltrm_status ltrm_correct_raw(const ltrm_fixed *c, uint32_t code, uint32_t temp_code, ltrm_reading *out) {
    int32_t theta = 0;
    ltrm_status st = ltrm_check_code(c, code);
    if (st != LTRM_OK) return st;
    if ((st = ltrm_theta_from_code(c, temp_code, &theta)) != LTRM_OK) return st;
    return ltrm_correct_theta(c, code, theta, out);
}

/* The stage at theta: the scalars and every column at theta itself. */
static inline ltrm_status ltrm_stage_theta(const ltrm_fixed *c, int32_t theta, ltrm_stage *s) {
    uint32_t n = (uint32_t)c->xa_knots + 2u, i;
    ltrm_pos p;
    ltrm_status st;
    if ((st = ltrm_pos_at(c, theta, &p)) != LTRM_OK) return st;
    if ((st = ltrm_scalars_at(c, &p, &s->s)) != LTRM_OK) return st;
    if (n > LTRM_ROW_CAPACITY) return LTRM_BAD_TABLE;
    for (i = 0; i < LTRM_ROW_CAPACITY; i++) s->row[i] = 0;
    for (i = 0; i < n; i++)
        if ((st = ltrm_column_at(c, &p, i, &s->row[i])) != LTRM_OK) return st;
    s->extrapolated = ltrm_extrapolated(c, theta);
    s->len = n;
    return LTRM_OK;
}

inline ltrm_status ltrm_stage_millicelsius(const ltrm_fixed *c, int32_t temp_mc, ltrm_stage *s) {
    int32_t theta = 0;
    ltrm_status st = ltrm_theta_from_millicelsius(c, temp_mc, &theta);
    if (st != LTRM_OK) return st;
    return ltrm_stage_theta(c, theta, s);
}

inline ltrm_status ltrm_stage_code(const ltrm_fixed *c, uint32_t temp_code, ltrm_stage *s) {
    int32_t theta = 0;
    ltrm_status st = ltrm_theta_from_code(c, temp_code, &theta);
    if (st != LTRM_OK) return st;
    return ltrm_stage_theta(c, theta, s);
}

/* The log-channel part of a correction at a stage. */
inline ltrm_status ltrm_correct_staged(const ltrm_fixed *c, const ltrm_stage *s, uint32_t code, ltrm_reading *out) {
    uint32_t seg, t16;
    int32_t xa;
    ltrm_status st = ltrm_check_code(c, code);
    if (st != LTRM_OK) return st;
    if ((st = ltrm_xa(c, &s->s, code, &xa, &seg, &t16)) != LTRM_OK) return st;
    if ((uint64_t)seg + 4u > (uint64_t)s->len) return LTRM_BAD_TABLE;
    if ((st = ltrm_x_finish(c, xa, t16, s->row + seg, &out->x)) != LTRM_OK) return st;
    out->temperature_extrapolated = s->extrapolated;
    return LTRM_OK;
}

/* Many log codes at one stage (a DMA buffer): status[i] and out[i] are ltrm_correct_staged of codes[i]. */
inline void ltrm_correct_block(const ltrm_fixed *c, const ltrm_stage *s, const uint32_t *codes, uint32_t n,
                                    ltrm_reading *out, ltrm_status *status) {
    uint32_t i;
    for (i = 0; i < n; i++) status[i] = ltrm_correct_staged(c, s, codes[i], &out[i]);
}

inline void ltrm_stage_cache_init(ltrm_stage_cache *k, const ltrm_fixed *c) {
    uint32_t i;
    k->cal = c;
    k->window = LTRM_NO_WINDOW;
    k->len = 0u;
    for (i = 0; i < LTRM_STAGE_MEMO; i++) { k->memo_key[i] = 0u; k->memo_theta[i] = 0; }
    k->code_lo = c->rail_margin + 1u < c->rail_margin ? UINT32_MAX : c->rail_margin + 1u;
    k->code_hi = c->adc_max_code >= c->rail_margin ? (c->adc_max_code - c->rail_margin > 0u ? c->adc_max_code - c->rail_margin - 1u : 0u) : 0u;
}

/* Loads window `index` into the cache: 1 when kept, 0 when its row does not fit. */
static inline ltrm_status ltrm_stage_cache_load(ltrm_stage_cache *k, uint32_t index, int *kept) {
    const ltrm_fixed *c = k->cal;
    uint32_t n = (uint32_t)c->xa_knots + 2u, i;
    ltrm_window w;
    ltrm_ends e;
    int32_t lo, hi;
    ltrm_status st;
    k->window = LTRM_NO_WINDOW;
    *kept = 0;
    if ((st = ltrm_window_load(c, index, &e, &w)) != LTRM_OK) return st;
    if (n > LTRM_ROW_CAPACITY) return LTRM_OK;
    k->len = 0u;
    for (i = 0; i < n; i++) {
        if (ltrm_column_ends(c, &e, i, &lo, &hi) != LTRM_OK) break;
        k->row0[i] = lo;
        k->drow[i] = hi - lo;
        k->len = i + 1u;
    }
    k->values = w;
    k->window = index;
    *kept = 1;
    return LTRM_OK;
}

static inline ltrm_status ltrm_stage_cache_theta(ltrm_stage_cache *k, uint32_t code, int32_t theta, ltrm_reading *out) {
    const ltrm_fixed *c = k->cal;
    uint32_t index, f16, seg, t16, i;
    ltrm_scalars s;
    int32_t xa, cols[4];
    int kept = 1;
    ltrm_status st;
    if ((st = ltrm_window_of(c, theta, &index, &f16)) != LTRM_OK) return st;
    if (index != k->window) {
        if ((st = ltrm_stage_cache_load(k, index, &kept)) != LTRM_OK) return st;
        if (!kept) return ltrm_correct_theta(c, code, theta, out);
    }
    ltrm_window_at(&k->values, f16, &s);
    if ((st = ltrm_xa(c, &s, code, &xa, &seg, &t16)) != LTRM_OK) return st;
    if ((uint64_t)seg + 4u > (uint64_t)k->len) return LTRM_BAD_TABLE;
    for (i = 0; i < 4u; i++) cols[i] = k->row0[seg + i] + ltrm_mulh16(k->drow[seg + i], f16);
    if ((st = ltrm_x_finish(c, xa, t16, cols, &out->x)) != LTRM_OK) return st;
    out->temperature_extrapolated = ltrm_extrapolated(c, theta);
    return LTRM_OK;
}

static inline ltrm_status ltrm_stage_cache_check_code(const ltrm_stage_cache *k, uint32_t code) {
    if (k->code_lo <= code && code <= k->code_hi) return LTRM_OK;
    return ltrm_check_code(k->cal, code);
}

/* theta of a temperature code, remembered in the cache for the next time. */
static inline ltrm_status ltrm_stage_cache_theta_of_code(ltrm_stage_cache *k, uint32_t temp_code, int32_t *theta) {
    uint32_t slot = temp_code % LTRM_STAGE_MEMO;
    ltrm_status st;
    if (temp_code != UINT32_MAX && k->memo_key[slot] == temp_code + 1u) {
        *theta = k->memo_theta[slot];
        return LTRM_OK;
    }
    if ((st = ltrm_theta_from_code(k->cal, temp_code, theta)) != LTRM_OK) return st;
    if (temp_code != UINT32_MAX) { k->memo_key[slot] = temp_code + 1u; k->memo_theta[slot] = *theta; }
    return LTRM_OK;
}

/* ltrm_correct_raw through a stage cache. */
inline ltrm_status ltrm_stage_cache_correct_raw(ltrm_stage_cache *k, uint32_t code, uint32_t temp_code,
                                                   ltrm_reading *out) {
    int32_t theta = 0;
    ltrm_status st = ltrm_stage_cache_check_code(k, code);
    if (st != LTRM_OK) return st;
    if ((st = ltrm_stage_cache_theta_of_code(k, temp_code, &theta)) != LTRM_OK) return st;
    return ltrm_stage_cache_theta(k, code, theta, out);
}

/* ltrm_correct through a stage cache. */
inline ltrm_status ltrm_stage_cache_correct(ltrm_stage_cache *k, uint32_t code, int32_t temp_mc, ltrm_reading *out) {
    int32_t theta = 0;
    ltrm_status st = ltrm_stage_cache_check_code(k, code);
    if (st != LTRM_OK) return st;
    if ((st = ltrm_theta_from_millicelsius(k->cal, temp_mc, &theta)) != LTRM_OK) return st;
    return ltrm_stage_cache_theta(k, code, theta, out);
}

/* ---- the code table (logtrim::fixed::CodeTable): x over the log code for the cached temperature window ---- */

/* The rare paths (builds, fallbacks) out of line, so that a hit does not enter them. */
#if defined(__GNUC__)
#define LTRM_RARE __attribute__((noinline))
#else
#define LTRM_RARE
#endif

/* x of a code at one end (mode 0), the middle (1) or the other end (2) of the cached window: the direct path's
 * per-code part without the calibrated x range (knots just beyond it continue the curve); 0 where it gives
 * another error or x is not within +-LTRM_X_LIMIT. */
static inline int ltrm_knot_x(const ltrm_stage_cache *k, const ltrm_scalars *s, uint32_t code, int mode, int64_t *x) {
    const ltrm_fixed *c = k->cal;
    uint32_t seg, t16, i;
    int32_t xa, cols[4], v;
    if (ltrm_check_code(c, code) != LTRM_OK) return 0;
    if (ltrm_xa(c, s, code, &xa, &seg, &t16) != LTRM_OK) return 0;
    if ((uint64_t)seg + 4u > (uint64_t)k->len) return 0;
    for (i = 0; i < 4u; i++) {
        int32_t a = k->row0[seg + i], d = k->drow[seg + i];
        cols[i] = mode == 0 ? a : (mode == 1 ? a + ltrm_mulh16(d, 1u << 15) : a + d);
    }
    v = ltrm_x_unranged(c, xa, t16, cols);
    if (!(v > -LTRM_X_LIMIT && v < LTRM_X_LIMIT)) return 0;
    *x = v;
    return 1;
}

static inline int64_t ltrm_abs_i64(int64_t v) { return v < 0 ? -v : v; }

/* Knot kinds of a table build (logtrim::fixed::code_table). */
#define LTRM_KNOT_MISSING 0u
#define LTRM_KNOT_REAL 1u
#define LTRM_KNOT_VIRTUAL 2u

static inline int32_t ltrm_saturate(int64_t v) {
    return v >= INT32_MAX ? INT32_MAX : (v <= -(int64_t)INT32_MAX ? -INT32_MAX : (int32_t)v);
}

/* The cubic continuation 4*v1 - 6*v2 + 4*v3 - v4 of four values (nearest first), in sums. */
static inline int64_t ltrm_extrapolate(const int32_t *v, const uint32_t src[4]) {
    int64_t ac = (int64_t)v[src[0]] + v[src[2]], b2 = (int64_t)v[src[1]] + v[src[1]];
    return (ac + ac + ac + ac) - (b2 + b2 + b2) - (int64_t)v[src[3]];
}

/* One virtual knot past each end of a run of real knots: where knot k is missing and the four on one side of it
 * (only one) are real, their cubic's continuation at both ends of the window and in the line's bend, if its values
 * stay within +-LTRM_X_LIMIT and its change below 2^29. */
static void ltrm_extend_ends(ltrm_code_table *t, uint8_t *kind, int32_t *bent) {
    uint8_t real[LTRM_TABLE_KNOTS];
    uint32_t k, j;
    for (k = 0; k < LTRM_TABLE_KNOTS; k++) real[k] = kind[k] == LTRM_KNOT_REAL;
    for (k = 0; k < LTRM_TABLE_KNOTS; k++) {
        int up = k + 4u < LTRM_TABLE_KNOTS, down = k >= 4u, sat = 0;
        uint32_t src[4];
        int64_t a, d, e;
        if (real[k]) continue;
        for (j = 1u; j <= 4u; j++) {
            if (up && !real[k + j]) up = 0;
            if (down && !real[k - j]) down = 0;
        }
        if (up == down) continue;
        for (j = 0; j < 4u; j++) {
            src[j] = up ? k + 1u + j : k - 1u - j;
            if (bent[src[j]] == INT32_MAX || bent[src[j]] == -INT32_MAX) sat = 1;
        }
        if (sat) continue;
        a = ltrm_extrapolate(t->x0, src);
        d = ltrm_extrapolate(t->dx, src);
        e = ltrm_extrapolate(bent, src);
        if (!(ltrm_abs_i64(a) < LTRM_X_LIMIT && ltrm_abs_i64(a + d) < LTRM_X_LIMIT && ltrm_abs_i64(d) < ((int64_t)1 << 29)))
            continue;
        t->x0[k] = (int32_t)a;
        t->dx[k] = (int32_t)d;
        kind[k] = LTRM_KNOT_VIRTUAL;
        bent[k] = ltrm_saturate(e);
    }
}

/* x of knot k at one end of the window. */
static inline int64_t ltrm_knot_at(const ltrm_code_table *t, uint32_t k, int end) {
    return end ? (int64_t)t->x0[k] + t->dx[k] : (int64_t)t->x0[k];
}

/* The build-time checks of interval i (knots i..i+3): the four knots exist (a virtual one only at an end of them),
 * their differences are below 2^29 at both ends of the window, the cubic's estimated error (3/128 of the fourth
 * difference of the runs of five real knots around it; four times that where it continues four real knots through
 * a virtual one) and the line's in temperature are each below 2^-LTRM_TABLE_ERROR_LOG2 of an LSB. Sums and 32-bit
 * products, never a 64-bit product. */
static int ltrm_interval_ok(const ltrm_code_table *t, uint32_t i, uint32_t step, const uint8_t *kind, const int32_t *bent) {
    uint32_t lsb = 0xffffffffu, j, limit, runs[2], nruns, shift, r;
    int end;
    for (j = i; j < i + 4u; j++)
        if (kind[j] == LTRM_KNOT_MISSING) return 0;
    if (kind[i + 1u] != LTRM_KNOT_REAL || kind[i + 2u] != LTRM_KNOT_REAL) return 0;
    if (kind[i] != LTRM_KNOT_REAL) { runs[0] = i + 1u; nruns = 1u; shift = 2u; }
    else if (kind[i + 3u] != LTRM_KNOT_REAL) {
        if (i < 2u) return 0;
        runs[0] = i - 2u; nruns = 1u; shift = 2u;
    } else if (i == 0u) { runs[0] = i; nruns = 1u; shift = 0u; }
    else { runs[0] = i - 1u; runs[1] = i; nruns = 2u; shift = 0u; }
    for (end = 0; end < 2; end++) {
        int64_t e[3], e4 = -1;
        uint32_t a;
        for (j = 0; j < 3u; j++) {
            e[j] = ltrm_knot_at(t, i + j + 1u, end) - ltrm_knot_at(t, i + j, end);
            if (ltrm_abs_i64(e[j]) >= ((int64_t)1 << 29)) return 0;
        }
        a = (uint32_t)ltrm_abs_i64(e[1]);
        if (a < lsb) lsb = a;
        for (r = 0; r < nruns; r++) {
            uint32_t w = runs[r];
            int64_t f[4], d3a, d3b, d4;
            int ok = w + 5u <= LTRM_TABLE_KNOTS;
            for (j = 0; ok && j < 5u; j++)
                if (kind[w + j] != LTRM_KNOT_REAL) ok = 0;
            if (!ok) continue;
            for (j = 0; j < 4u; j++) f[j] = ltrm_knot_at(t, w + j + 1u, end) - ltrm_knot_at(t, w + j, end);
            d3a = f[2] - (f[1] + f[1]) + f[0];
            d3b = f[3] - (f[2] + f[2]) + f[1];
            d4 = ltrm_abs_i64(d3b - d3a);
            if (d4 > e4) e4 = d4;
        }
        if (e4 < 0) return 0;
        /* 3/128 of e4 (four times that one-sided) within 2^-LTRM_TABLE_ERROR_LOG2 of an LSB (|e[1]| / 2^step). */
        if (e4 >= ((int64_t)1 << (30u - shift)) || 3u * ((uint32_t)e4 << shift) > ((a << (7u - LTRM_TABLE_ERROR_LOG2)) >> step))
            return 0;
    }
    limit = lsb >> (step + LTRM_TABLE_ERROR_LOG2 - 1u);
    if (lsb == 0u) return 0;
    for (j = i; j < i + 4u; j++)
        if ((uint32_t)(bent[j] < 0 ? -bent[j] : bent[j]) > limit) return 0;
    return 1;
}

/* Loads window `index` into the stage cache and builds the table for it: x at every knot at the window's start,
 * middle and end. */
static LTRM_RARE ltrm_status ltrm_code_table_build(ltrm_code_table *t, uint32_t index) {
    ltrm_stage_cache *k = &t->cache;
    const ltrm_fixed *c = k->cal;
    uint32_t qo = c->offset_frac > 30u ? 30u : c->offset_frac, lo = k->code_lo, hi = k->code_hi, step = 0u, base, i;
    ltrm_scalars s0, s1, s2;
    uint8_t kind[LTRM_TABLE_KNOTS];
    int32_t bent[LTRM_TABLE_KNOTS];
    int kept = 0;
    ltrm_status st;
    t->window = LTRM_NO_WINDOW;
    t->th_n = 0u;
    t->mc_n = 0u;
    t->raw_key = 0u;
    for (i = 0; i < LTRM_TABLE_KNOTS; i++) t->usable[i] = 0u;
    if ((st = ltrm_stage_cache_load(k, index, &kept)) != LTRM_OK) return st;
    if (!kept) {
        t->window = index;
        return LTRM_OK;
    }
    if (hi > (LTRM_CODE_LIMIT >> qo) - 1u) hi = (LTRM_CODE_LIMIT >> qo) - 1u;
    /* The knot step: the smallest power of two that spans lo..=hi with the table's knots. */
    while (step < 16u) {
        uint32_t b = lo & ~((1u << step) - 1u);
        if (((hi > b ? hi - b : 0u) >> step) + 4u <= LTRM_TABLE_KNOTS) break;
        step++;
    }
    base = lo & ~((1u << step) - 1u);
    ltrm_window_at(&k->values, 0u, &s0);
    ltrm_window_at(&k->values, 1u << 15, &s1);
    if ((st = ltrm_end_scalars(c, index + 1u, &s2)) != LTRM_OK) return st;
    for (i = 0; i < LTRM_TABLE_KNOTS; i++) {
        uint32_t q = (base >> step) + i;
        int64_t a, m, b;
        kind[i] = LTRM_KNOT_MISSING;
        bent[i] = INT32_MAX;
        if (q < i || q == 0u || q - 1u > (0xffffffffu >> step)) continue;
        if (!ltrm_knot_x(k, &s0, (q - 1u) << step, 0, &a) || !ltrm_knot_x(k, &s1, (q - 1u) << step, 1, &m) ||
            !ltrm_knot_x(k, &s2, (q - 1u) << step, 2, &b))
            continue;
        if (ltrm_abs_i64(b - a) >= ((int64_t)1 << 29)) continue;
        t->x0[i] = (int32_t)a;
        t->dx[i] = (int32_t)(b - a);
        kind[i] = LTRM_KNOT_REAL;
        bent[i] = ltrm_saturate(m + m - a - b);
    }
    ltrm_extend_ends(t, kind, bent);
    for (i = 0; i + 3u < LTRM_TABLE_KNOTS; i++) t->usable[i] = (uint8_t)ltrm_interval_ok(t, i, step, kind, bent);
    t->base = base;
    t->step = step;
    t->window = index;
    return LTRM_OK;
}

/* The hit's arithmetic inlined into each entry point (one copy per entry; a hit enters only its own). */
#if defined(__GNUC__)
#define LTRM_HIT static inline __attribute__((always_inline))
#else
#define LTRM_HIT static inline
#endif

/* ltrm_mulh16, the same floor(a*w / 2^16): one long multiply on a core that has it (two 16x16-bit products on
 * ARMv6-M). */
static inline int32_t ltrm_mulh16_hit(int32_t a, uint32_t w) {
#if !(defined(__ARM_ARCH_6M__) || (defined(__thumb__) && !defined(__thumb2__)))
    return (int32_t)ltrm_asr64((int64_t)a * (int64_t)w, 16);
#else
    return ltrm_mulh16(a, w);
#endif
}

/* x from usable interval i for the code base + p at the window fraction f16. */
static inline int32_t ltrm_code_table_x(const ltrm_code_table *t, uint32_t p, uint32_t i, uint32_t f16) {
    uint32_t tt, g, wa, wb;
    int32_t pm, p0, p1, p2, e0, e1, e2, d0, d1;
    const int32_t *a = t->x0 + i, *d = t->dx + i;
    f16 &= 0xffffu;
    pm = a[0] + ltrm_mulh16_hit(d[0], f16);
    p0 = a[1] + ltrm_mulh16_hit(d[1], f16);
    p1 = a[2] + ltrm_mulh16_hit(d[2], f16);
    p2 = a[3] + ltrm_mulh16_hit(d[3], f16);
    e0 = p0 - pm;
    e1 = p1 - p0;
    e2 = p2 - p1;
    d0 = e1 - e0;
    d1 = e2 - e1;
    tt = (p & ((1u << t->step) - 1u)) << (16u - t->step);
    g = (tt * (65536u - tt)) >> 16;
    wa = (((g * (131072u - tt)) >> 16) * 10923u) >> 16;
    wb = (((g * (65536u + tt)) >> 16) * 10923u) >> 16;
    return p0 + ltrm_mulh16_hit(e1, tt) - (ltrm_mulh16_hit(d0, wa) + ltrm_mulh16_hit(d1, wb));
}

/* The usable interval of a code: 1 with its offset from the base and its index, else 0. A code in a usable
 * interval lies between two real knots, so it passes the direct path's code checks. */
LTRM_HIT int ltrm_code_table_interval(const ltrm_code_table *t, uint32_t code, uint32_t *p, uint32_t *i) {
    *p = code - t->base; /* below the base, the difference wraps past every interval */
    *i = *p >> t->step;
    return *i < LTRM_TABLE_KNOTS - 3u && t->usable[*i];
}

/* The Q16 fraction in the window of a theta in the hit range. */
LTRM_HIT uint32_t ltrm_code_table_f16(const ltrm_code_table *t, int32_t theta) {
    return ((uint32_t)theta - (uint32_t)t->w_start) >> t->f_shift;
}

/* A hit: x from interval i (the code base + p) at the fraction f16 of a temperature in the hit range, checked
 * against the calibrated range. */
LTRM_HIT ltrm_status ltrm_code_table_hit_at(const ltrm_code_table *t, uint32_t p, uint32_t i, uint32_t f16, ltrm_reading *out) {
    int32_t x = ltrm_code_table_x(t, p, i, f16);
    if (x < t->x_min) return LTRM_BELOW_RANGE;
    if (x > t->x_max) return LTRM_ABOVE_RANGE;
    out->x = x;
    out->temperature_extrapolated = t->extrapolated;
    return LTRM_OK;
}

/* A hit at theta in the hit range. */
LTRM_HIT ltrm_status ltrm_code_table_hit(const ltrm_code_table *t, uint32_t p, uint32_t i, int32_t theta, ltrm_reading *out) {
    return ltrm_code_table_hit_at(t, p, i, ltrm_code_table_f16(t, theta), out);
}

/* The hit range around an accepted theta in window `index` (the table's): the window's theta within the accepted
 * range, on theta's side of each end of the calibrated range, and the m°C whose theta lie in it. */
static void ltrm_code_table_hit_range(ltrm_code_table *t, uint32_t index, int32_t theta) {
    const ltrm_fixed *c = t->cache.cal;
    uint32_t wb = c->t_step_log2 < LTRM_T_STEP_MIN ? LTRM_T_STEP_MIN : (c->t_step_log2 > LTRM_T_STEP_MAX ? LTRM_T_STEP_MAX : c->t_step_log2);
    int64_t start, lo, hi, mlo, mhi;
    wb -= LTRM_WINDOWS_LOG2;
    /* index = (theta - t_origin) >> wb with 0 <= theta - t_origin < 2^31 (ltrm_window_of): 32-bit shifts. */
    start = (int64_t)c->t_origin + (int64_t)(index << wb);
    lo = start > c->temp_lo ? start : c->temp_lo;
    hi = start + (int64_t)(1u << wb) - 1;
    if (hi > c->temp_hi) hi = c->temp_hi;
    /* theta - t_origin stays below 2^31 (ltrm_window_of). */
    if (hi > (int64_t)c->t_origin + INT32_MAX) hi = (int64_t)c->t_origin + INT32_MAX;
    if (theta < c->temp_min) {
        if (hi > (int64_t)c->temp_min - 1) hi = (int64_t)c->temp_min - 1;
    } else if (theta > c->temp_max) {
        if (lo < (int64_t)c->temp_max + 1) lo = (int64_t)c->temp_max + 1;
    } else {
        if (lo < c->temp_min) lo = c->temp_min;
        if (hi > c->temp_max) hi = c->temp_max;
    }
    /* Every theta in [lo, hi] is an int32_t (theta is in it); m°C * 2^10 in it: ceil(lo / 2^10) ..= floor(hi / 2^10). */
    mlo = ltrm_asr64(lo + (1 << LTRM_THETA_FRAC) - 1, LTRM_THETA_FRAC);
    mhi = ltrm_asr64(hi, LTRM_THETA_FRAC);
    t->th_lo = (int32_t)lo;
    t->th_n = hi >= lo ? (uint32_t)(hi - lo + 1) : 0u;
    t->mc_lo = (int32_t)mlo;
    t->mc_n = mhi >= mlo ? (uint32_t)(mhi - mlo + 1) : 0u;
    t->extrapolated = ltrm_extrapolated(c, theta);
    t->w_start = (int32_t)start;
    t->f_shift = wb - 16u;
    t->raw_key = 0u; /* its fraction belongs to the old range */
}

/* A checked code at an accepted theta that is not a hit (out of line: the rare path): the table's window (built
 * when theta leaves it) and the hit range around theta, then the table or the stage cache. */
static LTRM_RARE ltrm_status ltrm_code_table_theta(ltrm_code_table *t, uint32_t code, int32_t theta, ltrm_reading *out) {
    uint32_t index, f16, p, i;
    ltrm_status st;
    if ((st = ltrm_window_of(t->cache.cal, theta, &index, &f16)) != LTRM_OK) return st;
    if (index != t->window && (st = ltrm_code_table_build(t, index)) != LTRM_OK) return st;
    if (!((uint32_t)theta - (uint32_t)t->th_lo < t->th_n)) ltrm_code_table_hit_range(t, index, theta);
    if (ltrm_code_table_interval(t, code, &p, &i)) return ltrm_code_table_hit(t, p, i, theta, out);
    return ltrm_stage_cache_theta(&t->cache, code, theta, out);
}

/* A checked code at an accepted theta: a hit, or the rare path. */
static inline ltrm_status ltrm_code_table_at_theta(ltrm_code_table *t, uint32_t code, int32_t theta, ltrm_reading *out) {
    uint32_t p, i;
    if (ltrm_code_table_interval(t, code, &p, &i) && (uint32_t)theta - (uint32_t)t->th_lo < t->th_n)
        return ltrm_code_table_hit(t, p, i, theta, out);
    return ltrm_code_table_theta(t, code, theta, out);
}

inline void ltrm_code_table_init(ltrm_code_table *t, const ltrm_fixed *c) {
    uint32_t i;
    ltrm_stage_cache_init(&t->cache, c);
    t->window = LTRM_NO_WINDOW;
    t->th_lo = 0;
    t->mc_lo = 0;
    t->th_n = 0u;
    t->mc_n = 0u;
    t->extrapolated = 0;
    t->w_start = 0;
    t->f_shift = 0u;
    t->x_min = c->x_min;
    t->x_max = c->x_max;
    t->raw_key = 0u;
    t->raw_f16 = 0u;
    t->base = 0u;
    t->step = 0u;
    for (i = 0; i < LTRM_TABLE_KNOTS; i++) {
        t->x0[i] = 0;
        t->dx[i] = 0;
        t->usable[i] = 0u;
    }
}

/* ltrm_code_table_correct for the samples that are not hits (out of line: the rare path). */
static LTRM_RARE ltrm_status ltrm_code_table_correct_other(ltrm_code_table *t, uint32_t code, int32_t temp_mc, ltrm_reading *out) {
    int32_t theta = 0;
    ltrm_status st = ltrm_stage_cache_check_code(&t->cache, code);
    if (st != LTRM_OK) return st;
    if ((st = ltrm_theta_from_millicelsius(t->cache.cal, temp_mc, &theta)) != LTRM_OK) return st;
    return ltrm_code_table_theta(t, code, theta, out);
}

/* A hit is a code in a usable interval (so between the rails) at a temperature in the hit range (so accepted, in
 * the table's window): one unsigned comparison each, nothing else checked. */
inline ltrm_status ltrm_code_table_correct(ltrm_code_table *t, uint32_t code, int32_t temp_mc, ltrm_reading *out) {
    uint32_t p, i;
    if (ltrm_code_table_interval(t, code, &p, &i) && (uint32_t)temp_mc - (uint32_t)t->mc_lo < t->mc_n)
        return ltrm_code_table_hit(t, p, i, temp_mc * (1 << LTRM_THETA_FRAC), out); /* accepted: theta fits */
    return ltrm_code_table_correct_other(t, code, temp_mc, out);
}

/* ltrm_code_table_correct_raw for the samples that are not hits (out of line: the rare path); a temperature code
 * whose theta ends in the hit range is remembered with its fraction. */
static LTRM_RARE ltrm_status ltrm_code_table_correct_raw_other(ltrm_code_table *t, uint32_t code, uint32_t temp_code,
                                                               ltrm_reading *out) {
    int32_t theta = 0;
    uint32_t p, i;
    int in = ltrm_code_table_interval(t, code, &p, &i); /* then the code passes its checks */
    ltrm_status st;
    if (!in && (st = ltrm_stage_cache_check_code(&t->cache, code)) != LTRM_OK) return st;
    if ((st = ltrm_stage_cache_theta_of_code(&t->cache, temp_code, &theta)) != LTRM_OK) return st;
    /* Another temperature code in the hit range (a wandering temperature): a hit once its theta is known. */
    if (in && (uint32_t)theta - (uint32_t)t->th_lo < t->th_n) st = ltrm_code_table_hit(t, p, i, theta, out);
    else st = ltrm_code_table_theta(t, code, theta, out);
    if (temp_code != UINT32_MAX && (uint32_t)theta - (uint32_t)t->th_lo < t->th_n) {
        t->raw_key = temp_code + 1u;
        t->raw_f16 = ltrm_code_table_f16(t, theta);
    }
    return st;
}

/* A hit's temperature code is the last one remembered (its theta in the hit range, its fraction kept). */
inline ltrm_status ltrm_code_table_correct_raw(ltrm_code_table *t, uint32_t code, uint32_t temp_code, ltrm_reading *out) {
    uint32_t p, i, key = temp_code + 1u;
    if (ltrm_code_table_interval(t, code, &p, &i) && key == t->raw_key && key != 0u)
        return ltrm_code_table_hit_at(t, p, i, t->raw_f16, out);
    return ltrm_code_table_correct_raw_other(t, code, temp_code, out);
}

static inline void ltrm_code_table_codes(ltrm_code_table *t, ltrm_status ts, int32_t theta, const uint32_t *codes, uint32_t n,
                                         ltrm_reading *out, ltrm_status *status) {
    uint32_t i;
    for (i = 0; i < n; i++) {
        ltrm_status st = ltrm_stage_cache_check_code(&t->cache, codes[i]);
        if (st == LTRM_OK) st = ts;
        if (st == LTRM_OK) st = ltrm_code_table_at_theta(t, codes[i], theta, &out[i]);
        status[i] = st;
    }
}

inline void ltrm_code_table_block(ltrm_code_table *t, int32_t temp_mc, const uint32_t *codes, uint32_t n, ltrm_reading *out,
                                  ltrm_status *status) {
    int32_t theta = 0;
    ltrm_status ts = ltrm_theta_from_millicelsius(t->cache.cal, temp_mc, &theta);
    ltrm_code_table_codes(t, ts, theta, codes, n, out, status);
}

inline void ltrm_code_table_block_raw(ltrm_code_table *t, uint32_t temp_code, const uint32_t *codes, uint32_t n,
                                      ltrm_reading *out, ltrm_status *status) {
    int32_t theta = 0;
    ltrm_status ts = ltrm_stage_cache_theta_of_code(&t->cache, temp_code, &theta);
    ltrm_code_table_codes(t, ts, theta, codes, n, out, status);
}

/* x*c / 2^32 rounded to nearest (ties up), from the exact product's two words. */
static inline int32_t ltrm_mul_round32(int32_t x, int32_t c) {
    int32_t h;
    uint32_t l;
    ltrm_mul_parts(x, c, &h, &l);
    return h + (int32_t)(l >> 31);
}

/* The reading in a unit: Q32 for LTRM_RATIO, Q24 for the others. */
inline ltrm_status ltrm_value(const ltrm_reading *r, ltrm_unit_kind unit, int64_t *out) {
    int64_t e;
    ltrm_status st;
    switch (unit) {
    case LTRM_NEPERS: *out = r->x; return LTRM_OK;
    case LTRM_DECADES: *out = ltrm_mul_round32(r->x, LTRM_INV_LN10_Q32); return LTRM_OK;
    case LTRM_DB_POWER: *out = (int64_t)r->x * 4 + ltrm_mul_round32_by(r->x, LTRM_DB10_FRAC_Q32); return LTRM_OK;
    case LTRM_DB_AMPLITUDE: *out = 2 * ((int64_t)r->x * 4 + ltrm_mul_round32_by(r->x, LTRM_DB10_FRAC_Q32)); return LTRM_OK;
    case LTRM_ABSORBANCE: *out = -(int64_t)ltrm_mul_round32(r->x, LTRM_INV_LN10_Q32); return LTRM_OK;
    case LTRM_TRANSMITTANCE_PERCENT:
    case LTRM_RATIO:
        /* One call of the exponential (inlined once). */
        if ((st = ltrm_exp_q32(r->x, &e)) != LTRM_OK) return st;
        if (unit == LTRM_RATIO) {
            *out = e;
            return LTRM_OK;
        }
        if (e > INT64_MAX / 100) return LTRM_ABOVE_RANGE;
        *out = (e * 64 + e * 32 + e * 4 + 128) >> 8;
        return LTRM_OK;
    }
    return LTRM_BAD_TABLE;
}
