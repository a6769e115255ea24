/* The C side of tests/c_runtime.rs: a command interpreter over the C library's run-time entry points (images,
 * A/B slots, trim and blank records, layers, the correction through them). Each command prints one line;
 * the Rust test prints the line the Rust code gives for the same command and compares. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ltrm.h"

LTRM_RAM_DEFINE(ram, LTRM_RAM_T_DEFAULT, LTRM_RAM_R_DEFAULT, LTRM_RAM_S_DEFAULT);

#define CAP 70000u
static uint8_t base[CAP], work[CAP], other[CAP];
static uint32_t base_len;

static uint32_t read_file(const char *path, uint8_t *buf) {
    FILE *f;
    size_t n;
    if (strcmp(path, "-") == 0) return 0;
    f = fopen(path, "rb");
    if (!f) {
        fprintf(stderr, "cannot open %s\n", path);
        exit(2);
    }
    n = fread(buf, 1, CAP, f);
    fclose(f);
    return (uint32_t)n;
}

/* FNV-1a over 64-bit values: the digest of a loaded calibration, computed the same way by the test. */
static uint64_t h;
static void mix(int64_t v) {
    h ^= (uint64_t)v;
    h *= 1099511628211ull;
}

static uint64_t digest(const ltrm_fixed *c) {
    uint32_t i;
    h = 14695981039346656037ull;
    mix(c->layout), mix(c->adc_max_code), mix(c->rail_margin), mix(c->temp_min), mix(c->temp_max), mix(c->temp_lo);
    mix(c->temp_hi), mix(c->t_knots), mix(c->t_origin), mix(c->t_step_log2), mix(c->offset_frac);
    mix(c->inv_slope_frac), mix(c->bias_bend), mix(c->sensitivity_limit), mix(c->xa_knots), mix(c->xa_origin);
    mix(c->xa_step_log2), mix(c->residual_frac), mix(c->x_min), mix(c->x_max);
    mix(c->offset_len);
    for (i = 0; i < c->offset_len; i++) mix(c->offset[i]);
    mix(c->inv_slope_len);
    for (i = 0; i < c->inv_slope_len; i++) mix(c->inv_slope[i]);
    mix(c->ln_bias_len);
    for (i = 0; i < c->ln_bias_len; i++) mix(c->ln_bias[i]);
    mix(c->u_min_len);
    for (i = 0; i < c->u_min_len; i++) mix(c->u_min[i]);
    mix(c->residual_len);
    for (i = 0; i < c->residual_len; i++) mix(c->residual[i]);
    mix(c->has_sensor);
    if (c->has_sensor) {
        mix(c->sensor_code_lo), mix(c->sensor_code_hi), mix(c->sensor_step_log2), mix(c->fault_below);
        mix(c->far_below_code), mix(c->fault_far_below), mix(c->fault_above), mix(c->far_above_code);
        mix(c->fault_far_above), mix(c->sensor_len);
        for (i = 0; i < c->sensor_len; i++) mix(c->sensor_knots[i]);
    }
    mix(c->identity);
    return h;
}

/* A float's bits (the sensor's values are compared bit for bit). */
static unsigned long fbits(float f) {
    union {
        float f;
        uint32_t u;
    } v;
    v.f = f;
    return (unsigned long)v.u;
}

static void print_info(const ltrm_image_info *in) {
    const ltrm_sensor *s = &in->sensor;
    printf(" %lu %llu [%s] %08lx %08lx %lu", (unsigned long)in->sequence, (unsigned long long)in->calibrated_at,
           in->serial, (unsigned long)in->identity, (unsigned long)in->crc, (unsigned long)in->len);
    if (in->has_sensor)
        printf(" sensor %u %u %u %08lx %08lx %08lx %08lx %lu %lu %lu %08lx %08lx", s->element, s->placement, s->bits,
               fbits(s->coeff[0]), fbits(s->coeff[1]), fbits(s->coeff[2]), fbits(s->series_ohm),
               (unsigned long)s->full_scale_code, (unsigned long)s->open_margin, (unsigned long)s->short_margin,
               fbits(s->min_c), fbits(s->max_c));
}

/* An image checked alone and loaded: both statuses, and what was loaded. */
static void image_result(const uint8_t *b, uint32_t n) {
    ltrm_image_info info;
    ltrm_fixed cal;
    ltrm_status c = ltrm_image_check(b, n, &info), l = ltrm_image_load(b, n, 0, &ram, &cal, &info);
    printf("%d %d", (int)c, (int)l);
    if (l == LTRM_OK) {
        print_info(&info);
        printf(" %016llx", (unsigned long long)digest(&cal));
    }
    printf("\n");
}

static void print_selection(ltrm_status st, const ltrm_selection *sel) {
    printf("%d %d %d %d %d", (int)st, (int)sel->slot, (int)sel->status_a, (int)sel->status_b,
           st == LTRM_OK ? (int)sel->other : -1);
}

static void print_trim(const ltrm_trim *t) {
    printf(" %lu %llu %08lx %u %ld %ld %ld %08lx %08lx %08lx %08lx", (unsigned long)t->sequence,
           (unsigned long long)t->written_at, (unsigned long)t->factory, (unsigned)t->kind, (long)t->offset_q24,
           (long)t->gain_q30, (long)t->temp_mc, (unsigned long)t->offset_f32_bits, (unsigned long)t->gain_f32_bits,
           (unsigned long)t->standard_bits[0], (unsigned long)t->standard_bits[1]);
}

static void print_blank(const ltrm_blank *b) {
    printf(" %lu %llu %08lx %ld %08lx %ld %lu", (unsigned long)b->sequence, (unsigned long long)b->written_at,
           (unsigned long)b->factory, (long)b->x_q24, (unsigned long)b->x_f32_bits, (long)b->temp_mc,
           (unsigned long)b->samples);
}

static void record_result(int trim, const uint8_t *b, uint32_t n) {
    ltrm_trim t;
    ltrm_blank k;
    ltrm_status st = trim ? ltrm_trim_parse(b, n, 0, &t) : ltrm_blank_parse(b, n, 0, &k);
    printf("%d", (int)st);
    if (st == LTRM_OK) {
        if (trim) print_trim(&t);
        else print_blank(&k);
    }
    printf("\n");
}

/* A factory fingerprint argument: "-" for none. */
static const uint32_t *factory_arg(const char *s, uint32_t *slot) {
    if (strcmp(s, "-") == 0) return NULL;
    *slot = (uint32_t)strtoul(s, NULL, 16);
    return slot;
}

static const int32_t xs[12] = { (-2147483647 - 1), -1073741824, -1677721600, -16777216, -12345, 0,
                                1, 987654, 16777216, 1677721600, 1073741824, 2147483647 };

/* The readings a firmware would report: the factory correction, the layers, every unit's value. */
static void print_layered(const ltrm_fixed *cal, const ltrm_layers *layers, ltrm_status st, const ltrm_reading *r) {
    ltrm_reading out;
    int u;
    (void)cal;
    if (st == LTRM_OK) st = ltrm_layers_apply(layers, r, &out);
    printf(" %d", (int)st);
    if (st != LTRM_OK) return;
    printf(":%ld:%d", (long)out.x, out.temperature_extrapolated ? 1 : 0);
    for (u = 0; u <= (int)LTRM_RATIO; u++) {
        int64_t v = 0;
        ltrm_status vs = ltrm_value(&out, (ltrm_unit_kind)u, &v);
        printf(",%d:%lld", (int)vs, (long long)v);
    }
}

int main(void) {
    char cmd[16], p1[512], p2[512], p3[512], p4[512], p5[512], p6[512];
    unsigned long n, v, crc;
    while (scanf("%15s", cmd) == 1) {
        if (strcmp(cmd, "base") == 0 && scanf("%511s", p1) == 1) {
            base_len = read_file(p1, base);
        } else if (strcmp(cmd, "f") == 0 && scanf("%lu", &n) == 1) {
            memcpy(work, base, base_len);
            work[n / 8u] ^= (uint8_t)(1u << (n % 8u));
            image_result(work, base_len);
        } else if (strcmp(cmd, "r") == 0 && scanf("%lu %lx", &n, &crc) == 2) {
            memcpy(work, base, base_len);
            work[n / 8u] ^= (uint8_t)(1u << (n % 8u));
            work[base_len - 4u] = (uint8_t)crc, work[base_len - 3u] = (uint8_t)(crc >> 8);
            work[base_len - 2u] = (uint8_t)(crc >> 16), work[base_len - 1u] = (uint8_t)(crc >> 24);
            image_result(work, base_len);
        } else if (strcmp(cmd, "b") == 0 && scanf("%lu %lu %lx", &n, &v, &crc) == 3) {
            memcpy(work, base, base_len);
            work[n] = (uint8_t)v;
            work[base_len - 4u] = (uint8_t)crc, work[base_len - 3u] = (uint8_t)(crc >> 8);
            work[base_len - 2u] = (uint8_t)(crc >> 16), work[base_len - 1u] = (uint8_t)(crc >> 24);
            image_result(work, base_len);
        } else if (strcmp(cmd, "t") == 0 && scanf("%lu", &n) == 1) {
            image_result(base, (uint32_t)n);
        } else if (strcmp(cmd, "img") == 0 && scanf("%511s", p1) == 1) {
            image_result(work, read_file(p1, work));
        } else if (strcmp(cmd, "sel") == 0 && scanf("%511s %511s", p1, p2) == 2) {
            ltrm_fixed cal;
            ltrm_image_info info;
            ltrm_selection sel;
            uint32_t a = read_file(p1, work), b = read_file(p2, other);
            ltrm_status st = ltrm_image_select(work, a, other, b, &ram, &cal, &info, &sel);
            print_selection(st, &sel);
            if (st == LTRM_OK) {
                print_info(&info);
                printf(" %016llx", (unsigned long long)digest(&cal));
            }
            printf("\n");
        } else if ((strcmp(cmd, "trim") == 0 || strcmp(cmd, "blank") == 0) && scanf("%511s", p1) == 1) {
            record_result(cmd[0] == 't', work, read_file(p1, work));
        } else if ((strcmp(cmd, "tf") == 0 || strcmp(cmd, "bf") == 0) && scanf("%511s %lu", p1, &n) == 2) {
            uint32_t len = read_file(p1, work);
            work[n / 8u] ^= (uint8_t)(1u << (n % 8u));
            record_result(cmd[0] == 't', work, len);
        } else if ((strcmp(cmd, "tr") == 0 || strcmp(cmd, "br") == 0) && scanf("%511s %lu %lx", p1, &n, &crc) == 3) {
            uint32_t len = read_file(p1, work);
            work[n / 8u] ^= (uint8_t)(1u << (n % 8u));
            work[len - 4u] = (uint8_t)crc, work[len - 3u] = (uint8_t)(crc >> 8);
            work[len - 2u] = (uint8_t)(crc >> 16), work[len - 1u] = (uint8_t)(crc >> 24);
            record_result(cmd[0] == 't', work, len);
        } else if ((strcmp(cmd, "tt") == 0 || strcmp(cmd, "bt") == 0) && scanf("%511s %lu", p1, &n) == 2) {
            (void)read_file(p1, work);
            record_result(cmd[0] == 't', work, (uint32_t)n);
        } else if ((strcmp(cmd, "tsel") == 0 || strcmp(cmd, "bsel") == 0) && scanf("%511s %511s %511s", p1, p2, p3) == 3) {
            ltrm_selection sel;
            ltrm_trim t;
            ltrm_blank k;
            uint32_t f, a = read_file(p1, work), b = read_file(p2, other);
            const uint32_t *fp = factory_arg(p3, &f);
            ltrm_status st = cmd[0] == 't' ? ltrm_trim_select(work, a, other, b, fp, &t, &sel)
                                           : ltrm_blank_select(work, a, other, b, fp, &k, &sel);
            print_selection(st, &sel);
            if (st == LTRM_OK) {
                if (cmd[0] == 't') print_trim(&t);
                else print_blank(&k);
            }
            printf("\n");
        } else if (strcmp(cmd, "layers") == 0 && scanf("%511s %511s %511s", p1, p2, p3) == 3) {
            ltrm_trim t;
            ltrm_blank k;
            ltrm_layers layers;
            ltrm_trim_limits limits = LTRM_TRIM_LIMITS_DEFAULT;
            uint32_t f, i;
            int has_t = strcmp(p1, "-") != 0, has_b = strcmp(p2, "-") != 0;
            ltrm_status st = LTRM_OK;
            if (has_t) st = ltrm_trim_parse(work, read_file(p1, work), 0, &t);
            if (st == LTRM_OK && has_b) st = ltrm_blank_parse(other, read_file(p2, other), 0, &k);
            if (st == LTRM_OK) st = ltrm_layers_init(&layers, has_t ? &t : NULL, has_b ? &k : NULL, &limits, factory_arg(p3, &f));
            printf("%d", (int)st);
            for (i = 0; st == LTRM_OK && i < 12u; i++) {
                ltrm_reading r, out;
                ltrm_status s;
                r.x = xs[i];
                r.temperature_extrapolated = (int)(i & 1u);
                s = ltrm_layers_apply(&layers, &r, &out);
                printf(" %d", (int)s);
                if (s == LTRM_OK) printf(":%ld:%d", (long)out.x, out.temperature_extrapolated);
            }
            printf("\n");
        } else if (strcmp(cmd, "run") == 0 && scanf("%511s %511s %511s %511s %511s %511s", p1, p2, p3, p4, p5, p6) == 6) {
            /* A firmware for every serial: the image from two slots, the trim and the blank from theirs, bound
             * to the image's identity, then readings through all of it. */
            static uint8_t ta[CAP], tb[CAP];
            ltrm_fixed cal;
            ltrm_image_info info;
            ltrm_selection sel;
            ltrm_trim t;
            ltrm_blank k;
            ltrm_layers layers;
            ltrm_trim_limits limits = LTRM_TRIM_LIMITS_DEFAULT;
            uint32_t a = read_file(p1, work), b = read_file(p2, other), code, tc;
            ltrm_status st = ltrm_image_select(work, a, other, b, &ram, &cal, &info, &sel), ts, bs, ls;
            printf("%d", (int)st);
            if (st != LTRM_OK) {
                printf("\n");
                continue;
            }
            a = read_file(p3, ta);
            b = read_file(p4, tb);
            ts = ltrm_trim_select(ta, a, tb, b, &cal.identity, &t, &sel);
            a = read_file(p5, ta);
            b = read_file(p6, tb);
            bs = ltrm_blank_select(ta, a, tb, b, &cal.identity, &k, &sel);
            ls = ltrm_layers_init(&layers, ts == LTRM_OK ? &t : NULL, bs == LTRM_OK ? &k : NULL, &limits, &cal.identity);
            printf(" %d %d %d", (int)ts, (int)bs, (int)ls);
            if (ls != LTRM_OK) ltrm_layers_init(&layers, NULL, NULL, &limits, NULL);
            for (code = 0; code <= 65536u; code += 1013u) {
                static const int32_t temps[5] = { -30000, 0, 25000, 41234, 70000 };
                ltrm_reading r;
                for (tc = 0; tc < 5u; tc++) print_layered(&cal, &layers, ltrm_correct(&cal, code, temps[tc], &r), &r);
                for (tc = 100; tc < 4096u; tc += 997u) print_layered(&cal, &layers, ltrm_correct_raw(&cal, code, tc, &r), &r);
            }
            printf("\n");
        } else {
            fprintf(stderr, "bad command %s\n", cmd);
            return 2;
        }
    }
    return 0;
}
