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

/* ---- Calibration::validate and its proofs (calibration/proof.rs), in double ----
 * Every step is the Rust code's f64 operation in the same order (compiled without contraction of a*b+c, as
 * -std=c99 does), so every decision is the same: the lower and upper bounds of the bisection, the margins
 * and the piece budget are those of the Rust code. fabs, fmin, fmax and exp are the Rust libm crate's
 * (exp after its port of FreeBSD's e_exp.c, notice below), so no C maths library is needed and no last
 * bit differs between the two loaders. */

#define LTRM_MAX_PIECES 16384u /* proof::MAX_PIECES */
#define LTRM_MAX_DEPTH 40u     /* proof::MAX_DEPTH */
#define LTRM_MAX_MAGNITUDE 1e30
#define LTRM_SLOPE_MARGIN 1e-5

static int ltrm_isnan(double x) { return x != x; }
static int ltrm_dfinite(double x) { return x - x == 0.0; }
/* A double's bits and back (a union, as ltrm_float). */
static uint64_t ltrm_dbits(double x) {
    union {
        double d;
        uint64_t u;
    } v;
    v.d = x;
    return v.u;
}
static double ltrm_double(uint64_t bits) {
    union {
        double d;
        uint64_t u;
    } v;
    v.u = bits;
    return v.d;
}
static double ltrm_fabs(double x) { return ltrm_double(ltrm_dbits(x) & 0x7fffffffffffffffu); }
static double ltrm_fmax(double x, double y) { return ltrm_isnan(x) || x < y ? y : x; }
static double ltrm_fmin(double x, double y) { return ltrm_isnan(y) || x < y ? x : y; }
/* 2^n for a normal exponent n. */
static double ltrm_pow2(int n) { return ltrm_double((uint64_t)(n + 1023) << 52); }

/* y·2^n rounded once (libm's scalbn for the range exp needs). */
static double ltrm_scalbn(double y, int n) {
    if (n > 1023) {
        y *= ltrm_pow2(1023);
        n -= 1023;
        if (n > 1023) {
            y *= ltrm_pow2(1023);
            n -= 1023;
            if (n > 1023) n = 1023;
        }
    } else if (n < -1022) {
        y *= ltrm_pow2(-1022) * ltrm_pow2(53);
        n += 1022 - 53;
        if (n < -1022) {
            y *= ltrm_pow2(-1022) * ltrm_pow2(53);
            n += 1022 - 53;
            if (n < -1022) n = -1022;
        }
    }
    return y * ltrm_pow2(n);
}

/* exp(x), the Rust libm crate's (origin: FreeBSD /usr/src/lib/msun/src/e_exp.c):
 * ====================================================
 * Copyright (C) 2004 by Sun Microsystems, Inc. All rights reserved.
 *
 * Permission to use, copy, modify, and distribute this
 * software is freely granted, provided that this notice
 * is preserved.
 * ====================================================
 */
static double ltrm_exp(double x) {
    static const double half[2] = { 0.5, -0.5 };
    const double ln2hi = 6.93147180369123816490e-01, ln2lo = 1.90821492927058770002e-10;
    const double invln2 = 1.44269504088896338700e+00;
    const double p1 = 1.66666666666666019037e-01, p2 = -2.77777777770155933842e-03;
    const double p3 = 6.61375632143793436117e-05, p4 = -1.65339022054652515390e-06;
    const double p5 = 4.13813679705723846039e-08;
    double hi, lo, c, xx, y;
    int k, sign;
    uint32_t hx = (uint32_t)(ltrm_dbits(x) >> 32);
    sign = (int)(hx >> 31);
    hx &= 0x7fffffffu;
    if (hx >= 0x4086232bu) {
        if (ltrm_isnan(x)) return x;
        if (x > 709.782712893383973096) return x * ltrm_pow2(1023);
        if (x < -745.13321910194110842) return 0.0;
    }
    if (hx > 0x3fd62e42u) {
        if (hx >= 0x3ff0a2b2u)
            k = (int)(invln2 * x + half[sign]);
        else
            k = 1 - sign - sign;
        hi = x - (double)k * ln2hi;
        lo = (double)k * ln2lo;
        x = hi - lo;
    } else if (hx > 0x3e300000u) {
        k = 0;
        hi = x;
        lo = 0.0;
    } else {
        return 1.0 + x;
    }
    xx = x * x;
    c = x - xx * (p1 + xx * (p2 + xx * (p3 + xx * (p4 + xx * p5))));
    y = 1.0 + (x * c / (2.0 - c) - lo + hi);
    return k == 0 ? y : ltrm_scalbn(y, k);
}

/* A series in powers of τ (proof::Poly). */
typedef struct ltrm_poly {
    double a[LTRM_MAX_SERIES];
} ltrm_poly;

static float ltrm_f32_at(const uint8_t *p, uint32_t offset) { return ltrm_float(ltrm_le32(p + offset)); }

/* The monomial form of the Chebyshev series of len terms at coeffs (Poly::of). */
static void ltrm_poly_of(ltrm_poly *p, const uint8_t *m, uint32_t len_at, uint32_t coeffs_at) {
    double prev[LTRM_MAX_SERIES], cur[LTRM_MAX_SERIES], next[LTRM_MAX_SERIES];
    uint32_t k, d, n = m[len_at] < LTRM_MAX_SERIES ? m[len_at] : LTRM_MAX_SERIES;
    for (d = 0; d < LTRM_MAX_SERIES; d++) p->a[d] = prev[d] = cur[d] = 0.0;
    cur[0] = 1.0;
    for (k = 0; k < n; k++) {
        double ck = ltrm_f32_at(m, coeffs_at + 4u * k), factor = k == 0u ? 1.0 : 2.0;
        for (d = 0; d < LTRM_MAX_SERIES; d++) p->a[d] += ck * cur[d];
        /* T_(k+1) = 2τ·T_k − T_(k−1), and T_1 = τ·T_0. */
        next[0] = 0.0;
        for (d = 1; d < LTRM_MAX_SERIES; d++) next[d] = factor * cur[d - 1];
        for (d = 0; d < LTRM_MAX_SERIES; d++) next[d] -= prev[d];
        for (d = 0; d < LTRM_MAX_SERIES; d++) {
            prev[d] = cur[d];
            cur[d] = next[d];
        }
    }
}

static double ltrm_poly_eval(const ltrm_poly *p, double x) {
    double acc = 0.0;
    uint32_t j;
    for (j = LTRM_MAX_SERIES; j > 0u; j--) acc = acc * x + p->a[j - 1u];
    return acc;
}

static double ltrm_poly_derivative(const ltrm_poly *p, double x) {
    double acc = 0.0;
    uint32_t j;
    for (j = LTRM_MAX_SERIES - 1u; j >= 1u; j--) acc = acc * x + p->a[j] * (double)j;
    return acc;
}

/* Σ |a_j| r^j: a bound of |P| on [−r, r]. */
static double ltrm_poly_magnitude(const ltrm_poly *p, double r) {
    double acc = 0.0;
    uint32_t j;
    for (j = LTRM_MAX_SERIES; j > 0u; j--) acc = acc * r + ltrm_fabs(p->a[j - 1u]);
    return acc;
}

/* Σ_{j≥2} |a_j| j(j−1) r^(j−2): a bound of |P''| on [−r, r]. */
static double ltrm_poly_curvature(const ltrm_poly *p, double r) {
    double acc = 0.0;
    uint32_t j;
    for (j = LTRM_MAX_SERIES - 1u; j >= 2u; j--) acc = acc * r + ltrm_fabs(p->a[j]) * (double)(j * (j - 1u));
    return acc;
}

/* Bounds of P on [u, v] (Poly::bounds). */
static void ltrm_poly_bounds(const ltrm_poly *p, double u, double v, double *lower, double *upper) {
    double m = 0.5 * (u + v), h = 0.5 * (v - u), r = ltrm_fmax(ltrm_fabs(u), ltrm_fabs(v));
    double spread = ltrm_fabs(ltrm_poly_derivative(p, m)) * h + 0.5 * ltrm_poly_curvature(p, r) * h * h +
                    1e-12 * ltrm_poly_magnitude(p, r);
    double mid = ltrm_poly_eval(p, m);
    *lower = mid - spread;
    *upper = mid + spread;
}

/* The lower end of the product of two intervals. */
static double ltrm_product_lower(double a, double b, double c, double d) {
    return ltrm_fmin(ltrm_fmin(a * c, a * d), ltrm_fmin(b * c, b * d));
}

/* What a proof is about: the slope series, or g(τ) of monotone_in_x. */
typedef struct ltrm_proof {
    ltrm_poly ps, ph;
    int monotone; /* 0: slope_positive, 1: monotone_in_x */
    double t_c, t_h, t_ref, ex, b0, b1;
    int bias;
} ltrm_proof;

enum { LTRM_PIECE_PROVEN, LTRM_PIECE_FAILS, LTRM_PIECE_UNDECIDED };

static double ltrm_ptat(const ltrm_proof *q, double tau) { return (q->t_c + q->t_h * tau + LTRM_ZERO_CELSIUS_K) / q->t_ref; }
static double ltrm_beta(const ltrm_proof *q, double tau) { return q->bias ? ltrm_exp(q->b0 + q->b1 * tau) : 0.0; }

/* The verdict on one piece [u, v] (the closures of slope_positive and monotone_in_x). */
static int ltrm_judge(const ltrm_proof *q, double u, double v) {
    double lower, upper, margin;
    if (!q->monotone) {
        double r = ltrm_fmax(ltrm_fabs(u), ltrm_fabs(v));
        margin = LTRM_SLOPE_MARGIN * ltrm_poly_magnitude(&q->ps, r);
        if (!(ltrm_poly_eval(&q->ps, 0.5 * (u + v)) > margin)) return LTRM_PIECE_FAILS;
        ltrm_poly_bounds(&q->ps, u, v, &lower, &upper);
        return lower > margin ? LTRM_PIECE_PROVEN : LTRM_PIECE_UNDECIDED;
    } else {
        double mid = 0.5 * (u + v), scale, g, pu, pv, bu, bv, sl, su, hl, hu;
        scale = ltrm_fabs(ltrm_ptat(q, mid) * ltrm_poly_eval(&q->ps, mid)) +
                ltrm_fabs(ltrm_poly_eval(&q->ph, mid)) * (q->ex + ltrm_beta(q, mid));
        margin = LTRM_SLOPE_MARGIN * scale;
        g = ltrm_ptat(q, mid) * ltrm_poly_eval(&q->ps, mid) + ltrm_poly_eval(&q->ph, mid) * (q->ex + ltrm_beta(q, mid));
        if (!(g > margin)) return LTRM_PIECE_FAILS;
        pu = ltrm_ptat(q, u);
        pv = ltrm_ptat(q, v);
        bu = ltrm_beta(q, u);
        bv = ltrm_beta(q, v);
        ltrm_poly_bounds(&q->ps, u, v, &sl, &su);
        ltrm_poly_bounds(&q->ph, u, v, &hl, &hu);
        lower = ltrm_product_lower(ltrm_fmin(pu, pv), ltrm_fmax(pu, pv), sl, su) +
                ltrm_product_lower(hl, hu, q->ex + ltrm_fmin(bu, bv), q->ex + ltrm_fmax(bu, bv));
        return lower > margin ? LTRM_PIECE_PROVEN : LTRM_PIECE_UNDECIDED;
    }
}

/* Whether every piece of [a, b] is proven within the budget (proof::prove: depth first, a fixed stack). */
static int ltrm_prove(const ltrm_proof *q, double a, double b) {
    double su[LTRM_MAX_DEPTH + 1u], sv[LTRM_MAX_DEPTH + 1u];
    uint32_t sd[LTRM_MAX_DEPTH + 1u], top = 1u, pieces = 0u;
    su[0] = a;
    sv[0] = b;
    sd[0] = 0u;
    while (top > 0u) {
        double u, v, m;
        uint32_t depth;
        top--;
        u = su[top];
        v = sv[top];
        depth = sd[top];
        if (++pieces > LTRM_MAX_PIECES) return 0;
        switch (ltrm_judge(q, u, v)) {
        case LTRM_PIECE_PROVEN:
            break;
        case LTRM_PIECE_FAILS:
            return 0;
        default:
            if (depth >= LTRM_MAX_DEPTH || top + 2u > LTRM_MAX_DEPTH + 1u) return 0;
            m = 0.5 * (u + v);
            su[top] = m;
            sv[top] = v;
            sd[top] = depth + 1u;
            su[top + 1u] = u;
            sv[top + 1u] = m;
            sd[top + 1u] = depth + 1u;
            top += 2u;
        }
    }
    return 1;
}

/* T_k(ρ) and T_k'(ρ) for ρ ≥ 1 (proof::chebyshev_extremes). */
static void ltrm_chebyshev_extremes(double rho, double *t, double *d) {
    double t0 = 1.0, t1 = rho, d0 = 0.0, d1 = 1.0, t2, d2;
    uint32_t k;
    t[0] = 1.0;
    d[0] = 0.0;
    for (k = 1; k < LTRM_MAX_RESIDUAL; k++) {
        t[k] = t1;
        d[k] = d1;
        /* T_(k+1) = 2ρT_k − T_(k−1); T_(k+1)' = 2T_k + 2ρT_k' − T_(k−1)'. */
        t2 = 2.0 * rho * t1 - t0;
        d2 = 2.0 * t1 + 2.0 * rho * d1 - d0;
        t0 = t1;
        t1 = t2;
        d0 = d1;
        d1 = d2;
    }
}

/* The residual is bounded and keeps x = x₀ + R monotone in x₀ (proof::residual_ok). */
static int ltrm_residual_ok(const uint8_t *r, const uint8_t *m, double ta, double tb) {
    double tt[LTRM_MAX_RESIDUAL], unused[LTRM_MAX_RESIDUAL], tx[LTRM_MAX_RESIDUAL], dx[LTRM_MAX_RESIDUAL];
    double rho_t, xc, xh, slope_sum = 0.0, pad = 0.0, x_min, x_max;
    uint32_t nx = m[LTRM_L_MODEL_RESIDUAL_NX], nt = m[LTRM_L_MODEL_RESIDUAL_NT], pass, i, j;
    if (nx > LTRM_MAX_RESIDUAL) nx = LTRM_MAX_RESIDUAL;
    if (nt > LTRM_MAX_RESIDUAL) nt = LTRM_MAX_RESIDUAL;
    if (nx == 0u || nt == 0u) return 1;
    rho_t = ltrm_fmax(1.0, ltrm_fmax(ltrm_fabs(ta), ltrm_fabs(tb)));
    xc = ltrm_f32_at(m, LTRM_L_MODEL_RESIDUAL_X_CENTER);
    xh = ltrm_f32_at(m, LTRM_L_MODEL_RESIDUAL_X_HALF_SPAN);
    x_min = ltrm_f32_at(r, LTRM_L_RANGES_X_MIN);
    x_max = ltrm_f32_at(r, LTRM_L_RANGES_X_MAX);
    ltrm_chebyshev_extremes(rho_t, tt, unused);
    /* |R| over the whole box first (for the range of x₀), with ξ of any size up to the bound found. */
    for (pass = 0; pass < 2u; pass++) {
        double lo = (x_min - pad - xc) / xh, hi = (x_max + pad - xc) / xh, size = 0.0;
        ltrm_chebyshev_extremes(ltrm_fmax(1.0, ltrm_fmax(ltrm_fabs(lo), ltrm_fabs(hi))), tx, dx);
        slope_sum = 0.0;
        for (i = 0; i < nx; i++)
            for (j = 0; j < nt; j++) {
                double c = ltrm_fabs(ltrm_f32_at(m, LTRM_L_MODEL_RESIDUAL_COEFFS + 4u * (i * LTRM_MAX_RESIDUAL + j)));
                size += c * tx[i] * tt[j];
                slope_sum += c * dx[i] * tt[j];
            }
        if (!(size <= LTRM_MAX_MAGNITUDE)) return 0;
        pad = size;
    }
    return slope_sum < (1.0 - LTRM_SLOPE_MARGIN) * xh;
}

/* Calibration::validate of the f32 model: every check in its order (each defect is LTRM_BAD_CALIBRATION).
 * The stored f32 values are already known to be finite and the term counts within capacity. */
static ltrm_status ltrm_check_model(const uint8_t *r, const uint8_t *m) {
    static const uint16_t series_at[3][2] = {
        { LTRM_L_MODEL_OFFSET_LEN, LTRM_L_MODEL_OFFSET_COEFFS },
        { LTRM_L_MODEL_SLOPE_LEN, LTRM_L_MODEL_SLOPE_COEFFS },
        { LTRM_L_MODEL_BULK_LEN, LTRM_L_MODEL_BULK_COEFFS },
    };
    uint32_t bits = r[LTRM_L_RANGES_ADC_BITS], max, margin = ltrm_le32(r + LTRM_L_RANGES_RAIL_MARGIN), i;
    float level = ltrm_f32_at(m, LTRM_L_MODEL_LEVEL_SHIFT_CODE);
    float t_min = ltrm_f32_at(r, LTRM_L_RANGES_T_MIN_C), t_max = ltrm_f32_at(r, LTRM_L_RANGES_T_MAX_C);
    float ext = ltrm_f32_at(r, LTRM_L_RANGES_T_EXTRAPOLATION_K);
    float x_min = ltrm_f32_at(r, LTRM_L_RANGES_X_MIN), x_max = ltrm_f32_at(r, LTRM_L_RANGES_X_MAX);
    float half = ltrm_f32_at(m, LTRM_L_MODEL_T_HALF_SPAN_K), t_ref = ltrm_f32_at(m, LTRM_L_MODEL_T_REF_K);
    float ln_beta0 = ltrm_f32_at(m, LTRM_L_MODEL_LN_BETA0), ln_beta1 = ltrm_f32_at(m, LTRM_L_MODEL_LN_BETA1);
    double center = ltrm_f32_at(m, LTRM_L_MODEL_T_CENTER_C), pole = ltrm_f32_at(m, LTRM_L_MODEL_POLE), ta, tb, rr;
    int bias = m[LTRM_L_MODEL_BIAS_ENABLED] != 0u, bulk_zero = 1;
    ltrm_proof q;
    if (bits == 0u || bits > 24u) return LTRM_BAD_CALIBRATION;
    max = (1u << bits) - 1u;
    if ((margin > 0x7fffffffu ? 0xffffffffu : 2u * margin) >= max) return LTRM_BAD_CALIBRATION;
    if (!((level < 0.0f ? -level : level) <= LTRM_MAX_LEVEL_SHIFT)) return LTRM_BAD_CALIBRATION;
    if (!(t_min < t_max) || !(ext >= 0.0f) || (double)t_min - (double)ext < -LTRM_ZERO_CELSIUS_K ||
        (double)t_max + (double)ext > LTRM_MAX_TEMPERATURE_C)
        return LTRM_BAD_CALIBRATION;
    if (!(x_min < x_max)) return LTRM_BAD_CALIBRATION;
    if (!((x_min < 0.0f ? -x_min : x_min) <= LTRM_MAX_ABS_X && (x_max < 0.0f ? -x_max : x_max) <= LTRM_MAX_ABS_X))
        return LTRM_BAD_CALIBRATION;
    if (!(half > 0.0f) || !(t_ref > 0.0f)) return LTRM_BAD_CALIBRATION;
    if (!(ltrm_f32_at(m, LTRM_L_MODEL_RESIDUAL_X_HALF_SPAN) > 0.0f) || !(ln_beta0 < 30.0f)) return LTRM_BAD_CALIBRATION;
    /* The τ range of the accepted temperatures (proof::tau_range), and magnitudes within f32. */
    ta = ((double)t_min - (double)ext - center) / (double)half;
    tb = ((double)t_max + (double)ext - center) / (double)half;
    if (!(ltrm_dfinite(ta) && ltrm_dfinite(tb))) return LTRM_BAD_CALIBRATION;
    rr = ltrm_fmax(ltrm_fabs(ta), ltrm_fabs(tb));
    for (i = 0; i < 3u; i++) {
        ltrm_poly_of(&q.ps, m, series_at[i][0], series_at[i][1]);
        if (!(ltrm_poly_magnitude(&q.ps, rr) <= LTRM_MAX_MAGNITUDE)) return LTRM_BAD_CALIBRATION;
    }
    /* β(τ) = exp(b₀ + b₁τ) stays within f32 over the range. */
    if (bias && !((double)ln_beta0 + ltrm_fabs((double)ln_beta1) * ltrm_fmax(ltrm_fabs(ta), ltrm_fabs(tb)) < 60.0))
        return LTRM_BAD_CALIBRATION;
    /* The gain pole: 1 + q·τ > 0.05 (linear, so its ends suffice). */
    if (!(1.0 + pole * ta > 0.05) || !(1.0 + pole * tb > 0.05)) return LTRM_BAD_CALIBRATION;
    /* The slope, positive with its margin over the range. */
    ltrm_poly_of(&q.ps, m, LTRM_L_MODEL_SLOPE_LEN, LTRM_L_MODEL_SLOPE_COEFFS);
    ltrm_poly_of(&q.ph, m, LTRM_L_MODEL_BULK_LEN, LTRM_L_MODEL_BULK_COEFFS);
    q.monotone = 0;
    q.t_c = center;
    q.t_h = half;
    q.t_ref = t_ref;
    q.ex = ltrm_exp((double)x_max);
    q.b0 = ln_beta0;
    q.b1 = ln_beta1;
    q.bias = bias;
    if (!ltrm_prove(&q, ta, tb)) return LTRM_BAD_CALIBRATION;
    /* Monotone in x (nothing to prove without a bulk term), then the residual. */
    for (i = 0; i < m[LTRM_L_MODEL_BULK_LEN] && i < LTRM_MAX_SERIES; i++)
        if (ltrm_f32_at(m, LTRM_L_MODEL_BULK_COEFFS + 4u * i) != 0.0f) bulk_zero = 0;
    q.monotone = 1;
    if (!bulk_zero && !ltrm_prove(&q, ta, tb)) return LTRM_BAD_CALIBRATION;
    if (!ltrm_residual_ok(r, m, ta, tb)) return LTRM_BAD_CALIBRATION;
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
    for (i = 0; i < 6u; i++) /* the residual may also be empty: zero everywhere */
        if (s->sizes[i] != expected[i] && !(i == 5u && s->sizes[i] == 0u)) return LTRM_FIXED_TABLE_SIZE;
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

/* The Steinhart-Hart curve 1/T = A + B*L + C*L^3 (L = ln R) rises with L over the whole range: always for
 * C >= 0 (B > 0 is checked before); for C < 0 where |L| < k = sqrt(B/(3|C|)), i.e. where the closed form's
 * |y| = |1.5*(A - 1/T)/(B*k)| < 1 at both ends, squared here so that no square root is needed. */
static int ltrm_sh_monotone(const ltrm_sensor *s) {
    double a = s->coeff[0], b = s->coeff[1], c = s->coeff[2], ends[2], d;
    uint32_t i;
    if (c >= 0.0) return 1;
    ends[0] = 1.0 / ((double)s->min_c + 273.15);
    ends[1] = 1.0 / ((double)s->max_c + 273.15);
    for (i = 0; i < 2u; i++) {
        d = a - ends[i];
        if (!(6.75 * -c * d * d < b * b * b)) return 0;
    }
    return 1;
}

/* The sensor section (image::sensor::decode): reserved byte, element and placement codes, an RTD's unused
 * coefficients zero, every f32 finite, then the checks of TemperatureSensor::validate on the element, the
 * divider, the range and a Steinhart-Hart curve's rise over the range (in closed form, where the Rust code
 * inverts the curve at both ends: the two can differ only for a curve that turns within rounding of an end
 * of the range). */
static ltrm_status ltrm_decode_sensor(const uint8_t *p, ltrm_sensor *s) {
    static const uint8_t floats[6] = { LTRM_L_SENSOR_COEFF_A, LTRM_L_SENSOR_COEFF_B, LTRM_L_SENSOR_COEFF_C,
                                       LTRM_L_SENSOR_SERIES_OHM, LTRM_L_SENSOR_MIN_C, LTRM_L_SENSOR_MAX_C };
    const double zero_c_k = 273.15;
    uint32_t i;
    ltrm_status st;
    int ok;
    if ((st = ltrm_zeros(p + LTRM_L_SENSOR_RESERVED, LTRM_L_SENSOR_RESERVED_SIZE)) != LTRM_OK) return st;
    s->element = p[LTRM_L_SENSOR_ELEMENT];
    if (s->element > 2u) return LTRM_BAD_ENUM;
    if (s->element == 2u) {
        if ((st = ltrm_zeros(p + LTRM_L_SENSOR_COEFF_B, 4u)) != LTRM_OK) return st;
        if ((st = ltrm_zeros(p + LTRM_L_SENSOR_COEFF_C, 4u)) != LTRM_OK) return st;
    }
    s->placement = p[LTRM_L_SENSOR_PLACEMENT];
    if (s->placement > 1u) return LTRM_BAD_ENUM;
    for (i = 0; i < 6u; i++)
        if (!ltrm_finite(ltrm_le32(p + floats[i]))) return LTRM_NON_FINITE;
    for (i = 0; i < 3u; i++) s->coeff[i] = ltrm_float(ltrm_le32(p + floats[i]));
    s->series_ohm = ltrm_float(ltrm_le32(p + LTRM_L_SENSOR_SERIES_OHM));
    s->min_c = ltrm_float(ltrm_le32(p + LTRM_L_SENSOR_MIN_C));
    s->max_c = ltrm_float(ltrm_le32(p + LTRM_L_SENSOR_MAX_C));
    s->bits = p[LTRM_L_SENSOR_BITS];
    s->full_scale_code = ltrm_le32(p + LTRM_L_SENSOR_FULL_SCALE_CODE);
    s->open_margin = ltrm_le32(p + LTRM_L_SENSOR_OPEN_MARGIN);
    s->short_margin = ltrm_le32(p + LTRM_L_SENSOR_SHORT_MARGIN);
    /* The element's coefficients. */
    if (s->element == 0u)
        ok = s->coeff[0] > 0.0f && s->coeff[2] > 0.0f && (double)s->coeff[1] > -zero_c_k;
    else if (s->element == 1u)
        ok = s->coeff[1] > 0.0f;
    else
        ok = s->coeff[0] > 0.0f;
    if (!ok) return LTRM_BAD_SENSOR;
    /* The divider: bits 1..=24, a series resistor, a supply of 2 codes or more, a code between the bands. */
    if (s->bits == 0u || s->bits > 24u) return LTRM_BAD_SENSOR;
    if (!(s->series_ohm > 0.0f) || s->full_scale_code < 2u) return LTRM_BAD_SENSOR;
    if ((uint64_t)s->open_margin + s->short_margin + 1u >= s->full_scale_code) return LTRM_BAD_SENSOR;
    /* The range: ends in order, above absolute zero, within -200..850 degC for an RTD. */
    ok = s->min_c < s->max_c && (double)s->min_c > -zero_c_k;
    if (s->element == 2u) ok = ok && (double)s->min_c >= -200.0 && (double)s->max_c <= 850.0;
    if (ok && s->element == 1u) ok = ltrm_sh_monotone(s);
    return ok ? LTRM_OK : LTRM_BAD_SENSOR;
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
    const uint8_t *ranges = 0, *model = 0, *fixed = 0, *sensor = 0;
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
        else if (kind == LTRM_L_SENSOR_KIND) slot = &sensor;
        else if ((kind & LTRM_L_SECTION_OPTIONAL_BIT) == 0u) return LTRM_UNKNOWN_SECTION;
        if (slot) {
            if (*slot) return LTRM_DUPLICATE_SECTION;
            if ((kind == LTRM_L_RANGES_KIND && len != LTRM_L_RANGES_LEN) || (kind == LTRM_L_MODEL_KIND && len != LTRM_L_MODEL_LEN) ||
                (kind == LTRM_L_SENSOR_KIND && len != LTRM_L_SENSOR_LEN))
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
    out->info.has_sensor = sensor != 0;
    if (sensor && (st = ltrm_decode_sensor(sensor, &out->info.sensor)) != LTRM_OK) return st;
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
          (!c->sensitivity_limit || c->u_min_len == nt + 2u) &&
          (c->residual_len == 0u || c->residual_len == (nt + 2u) * (nxa + 2u))))
        return LTRM_BAD_FIXED_TABLES;
    /* Control points stored divided by 6 within the range divided by 6, LTRM_SPLINE_MARGIN inside it (an
     * evaluation at theta lies within that margin of the exact value). */
    for (i = 0; i < c->inv_slope_len; i++)
        if (c->inv_slope[i] <= 0) return LTRM_BAD_FIXED_TABLES;
    for (i = 0; i < c->offset_len; i++)
        if (!((int64_t)c->offset[i] * 6 > (int64_t)LTRM_OFFSET_MIN + LTRM_SPLINE_MARGIN &&
              (int64_t)c->offset[i] * 6 < (int64_t)LTRM_OFFSET_MAX - LTRM_SPLINE_MARGIN))
            return LTRM_BAD_FIXED_TABLES;
    for (i = 0; i < c->inv_slope_len; i++)
        if (!((int64_t)c->inv_slope[i] * 6 > LTRM_SPLINE_MARGIN &&
              (int64_t)c->inv_slope[i] * 6 < LTRM_INV_SLOPE_LIMIT - LTRM_SPLINE_MARGIN))
            return LTRM_BAD_FIXED_TABLES;
    for (i = 0; c->bias_bend && i < c->ln_bias_len; i++)
        if (!((int64_t)c->ln_bias[i] * 6 > -(int64_t)LTRM_BIAS_LIMIT + LTRM_SPLINE_MARGIN &&
              (int64_t)c->ln_bias[i] * 6 < (int64_t)LTRM_BIAS_LIMIT - LTRM_SPLINE_MARGIN))
            return LTRM_BAD_FIXED_TABLES;
    for (i = 0; c->sensitivity_limit && i < c->u_min_len; i++)
        if (!((int64_t)c->u_min[i] * 6 > -(int64_t)LTRM_BIAS_LIMIT + LTRM_SPLINE_MARGIN &&
              (int64_t)c->u_min[i] * 6 < (int64_t)LTRM_BIAS_LIMIT - LTRM_SPLINE_MARGIN))
            return LTRM_BAD_FIXED_TABLES;
    /* Every segment's power form fits ltrm_spline_at's 32-bit steps. */
    for (i = 0; i + 1u < nt; i++) {
        int64_t v;
        if (!ltrm_spline_at(c->offset + i, 0u, &v) || !ltrm_spline_at(c->inv_slope + i, 0u, &v) ||
            (c->bias_bend && !ltrm_spline_at(c->ln_bias + i, 0u, &v)) ||
            (c->sensitivity_limit && !ltrm_spline_at(c->u_min + i, 0u, &v)))
            return LTRM_BAD_FIXED_TABLES;
    }
    if (c->has_sensor) {
        uint32_t span = c->sensor_code_hi > c->sensor_code_lo ? c->sensor_code_hi - c->sensor_code_lo : 0u;
        if (c->sensor_code_lo > c->sensor_code_hi || c->sensor_step_log2 > 16u ||
            (uint64_t)c->sensor_len < (uint64_t)(span >> c->sensor_step_log2) + 4u)
            return LTRM_BAD_FIXED_TABLES;
        for (i = 0; i < c->sensor_len; i++)
            if (!((int64_t)c->sensor_knots[i] * 6 > -lim + LTRM_SPLINE_MARGIN && (int64_t)c->sensor_knots[i] * 6 < lim - LTRM_SPLINE_MARGIN))
                return LTRM_BAD_FIXED_TABLES;
        /* Every segment a code in the span reaches fits ltrm_spline_at16's 32-bit steps. */
        for (i = 0; i <= span >> c->sensor_step_log2; i++) {
            int64_t v;
            if (!ltrm_spline_at16(c->sensor_knots + i, 0u, &v)) return LTRM_BAD_FIXED_TABLES;
        }
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
