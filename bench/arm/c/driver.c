/* The C side of the Cortex-M measurement (scripts/bench-arm.sh): one sample per call, so that the
 * emulator runner counts the instructions of each sample on its own. The runner writes the inputs into
 * bench_code/bench_temp, calls one of the bench_* functions per sample and reads bench_out back.
 *
 * The C library (ltrm.h, ltrm.c) and the unit's data (unit.c, `logtrim emit --format c --c-name unit_cal`)
 * are compiled as their own translation units, as a firmware would; naive.h holds the coefficients of the
 * naive float correction. All are written by the host example arm_bench. The naive path is built on its
 * own (-DBENCH_NAIVE=1), so that the fixed path's image links only the helpers the fixed path needs. */
#include <math.h>
#include <stdint.h>

#include "ltrm.h"
#include "naive.h"

extern const ltrm_fixed unit_cal;
#define LT_UNIT unit_cal

#ifndef BENCH_NAIVE
#define BENCH_NAIVE 0
#endif

#define BENCH_MAX 1024
#define BENCH_API __attribute__((noinline, used))

/* One sample's results: the status, x (Q24), and the status and value of power dB (Q24) and of the
 * ratio (Q32); the naive path stores its floats' bits in x, db and ratio. */
typedef struct bench_out {
    int32_t status;
    int32_t x;
    int32_t db_status;
    int32_t ratio_status;
    int64_t db;
    int64_t ratio;
} bench_out;

uint32_t bench_code[BENCH_MAX];
uint32_t bench_temp[BENCH_MAX];
bench_out bench_out_buf[BENCH_MAX];

/* The stage cache a firmware would keep (its size is reported as state). */
ltrm_stage_cache bench_cache;
/* The code table a firmware would keep (its size is reported as state): x over the log code for the
 * temperature window of the last sample. */
ltrm_code_table bench_table_state;

static void put(uint32_t i, ltrm_status st, const ltrm_reading *r) {
    bench_out *o = &bench_out_buf[i];
    int64_t v = 0;
    o->status = (int32_t)st;
    o->x = 0;
    o->db_status = 0;
    o->ratio_status = 0;
    o->db = 0;
    o->ratio = 0;
    if (st != LTRM_OK) return;
    o->x = r->x;
    o->db_status = (int32_t)ltrm_value(r, LTRM_DB_POWER, &v);
    o->db = o->db_status == LTRM_OK ? v : 0;
    v = 0;
    o->ratio_status = (int32_t)ltrm_value(r, LTRM_RATIO, &v);
    o->ratio = o->ratio_status == LTRM_OK ? v : 0;
}

BENCH_API void bench_reset(void) {
    ltrm_stage_cache_init(&bench_cache, &LT_UNIT);
    ltrm_code_table_init(&bench_table_state, &LT_UNIT);
}

/* The call alone: what the runner subtracts from every path. */
BENCH_API void bench_empty(uint32_t i) { bench_out_buf[i].status = (int32_t)(bench_code[i] ^ bench_temp[i]); }

/* The temperature as the unit reads it: a raw channel's code (the library's *_raw entry points) or m°C. */
#if NAIVE_RAW
#define BY_TEMP(f) f##_raw
#define TEMP(i) (bench_temp[i])
#else
#define BY_TEMP(f) f
#define TEMP(i) ((int32_t)bench_temp[i])
#endif

/* A bench entry `name`: sample i corrected by the library's `entry` on `state`, its results stored. */
#define BENCH_PATH(name, entry, state)                                      \
    BENCH_API void name(uint32_t i) {                                       \
        ltrm_reading r;                                                     \
        ltrm_status st = BY_TEMP(entry)(state, bench_code[i], TEMP(i), &r); \
        put(i, st, &r);                                                     \
    }

/* One call per sample, the temperature converted at every sample. */
BENCH_PATH(bench_direct, ltrm_correct, &LT_UNIT)

/* Through the stage cache kept across samples. */
BENCH_PATH(bench_cached, ltrm_stage_cache_correct, &bench_cache)

/* Through the code table kept across samples. */
BENCH_PATH(bench_table, ltrm_code_table_correct, &bench_table_state)

/* The code table's block API at sample 0's temperature: the first n codes as one block, then each result
 * stored as the other paths store theirs. bench_table_prime builds the table first (a block of one code). */
BENCH_API void bench_table_prime(uint32_t i) {
    ltrm_reading r;
    ltrm_status st;
    BY_TEMP(ltrm_code_table_block)(&bench_table_state, TEMP(i), &bench_code[i], 1u, &r, &st);
}

ltrm_reading bench_block_out[BENCH_MAX];
ltrm_status bench_block_status[BENCH_MAX];

BENCH_API void bench_tblock(uint32_t n) {
    uint32_t i;
    if (n > BENCH_MAX) n = BENCH_MAX;
    BY_TEMP(ltrm_code_table_block)(&bench_table_state, TEMP(0), bench_code, n, bench_block_out, bench_block_status);
    for (i = 0; i < n; i++) put(i, bench_block_status[i], &bench_block_out[i]);
}

/* The block API: the stage at one temperature, then a block of codes at it. */
ltrm_stage bench_stage;

/* Builds the stage at sample i's temperature: what a block pays once. */
BENCH_API void bench_stage_at(uint32_t i) {
#if NAIVE_RAW
    (void)ltrm_stage_code(&LT_UNIT, bench_temp[i], &bench_stage);
#else
    (void)ltrm_stage_millicelsius(&LT_UNIT, (int32_t)bench_temp[i], &bench_stage);
#endif
}

/* The first n codes as one block at that stage, then each result stored as the other paths store theirs. */
BENCH_API void bench_block(uint32_t n) {
    uint32_t i;
    if (n > BENCH_MAX) n = BENCH_MAX;
    ltrm_correct_block(&LT_UNIT, &bench_stage, bench_code, n, bench_block_out, bench_block_status);
    for (i = 0; i < n; i++) put(i, bench_block_status[i], &bench_block_out[i]);
}

#if BENCH_NAIVE
static uint32_t float_bits(float f) {
    union {
        float f;
        uint32_t u;
    } b;
    b.f = f;
    return b.u;
}

/* The naive float correction: the temperature (Steinhart–Hart with logf for a raw NTC channel), offset
 * and slope as quadratics in T, x = (code - offset) / slope, the ratio with expf and power dB with
 * 10·log10f. */
BENCH_API void bench_naive(uint32_t i) {
    bench_out *o = &bench_out_buf[i];
    float t, off, slope, x, ratio, db;
#if NAIVE_RAW
    float c = (float)bench_temp[i];
    float r = NAIVE_LOW_SIDE ? NAIVE_RS * c / (NAIVE_FULL - c) : NAIVE_RS * (NAIVE_FULL - c) / c;
    float l = logf(r);
    t = 1.0f / (NAIVE_SH_A + NAIVE_SH_B * l + NAIVE_SH_C * l * l * l) - 273.15f;
#else
    t = (float)(int32_t)bench_temp[i] * 0.001f;
#endif
    off = NAIVE_OFFSET0 + t * (NAIVE_OFFSET1 + t * NAIVE_OFFSET2);
    slope = NAIVE_SLOPE0 + t * (NAIVE_SLOPE1 + t * NAIVE_SLOPE2);
    x = ((float)bench_code[i] - off) / slope;
    ratio = expf(x);
    db = 10.0f * log10f(ratio);
    o->status = 0;
    o->x = (int32_t)float_bits(x);
    o->db = (int64_t)float_bits(db);
    o->ratio = (int64_t)float_bits(ratio);
}
#endif /* BENCH_NAIVE */
