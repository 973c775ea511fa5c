/*
 * test_stages_cross.c — the crossing step of four rows at once (stepper_crossing4: the four rows
 * in the AVX2 lanes where the processor has them, else four stepper_crossing calls) against
 * the per-row stepper_crossing (stages_step.c).
 *
 * Source of truth: stepper_crossing itself (an equivalence, no outside source): each lane must
 * perform its IEEE operations in its order (-ffp-contract=off, no FMA in the AVX2 target) and
 * take its branches, so the tolerance is none: the same bits, value and the three derivatives.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "stagecal/column.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "csv_cells.h"
#include "testutil.h"
/* after every system header: banned.h redefines libc names */
#include "stages_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

#include "crossing_rows.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* The branches of stepper_crossing, by the first that decides (smoker_setup's rejections in its
 * order, then x_target ≤ k, then Smoker's count not finite, else the count), and where the
 * fraction goes: below 0 or above 1 (clamped), NaN. */
enum {
    BR_ALPHA,    /* α_loc ≤ 1 (or NaN) */
    BR_M,        /* m ≤ 0 */
    BR_DISC,     /* the line misses the curve: disc < 0 */
    BR_DEN,      /* α − m·c² ≤ 0 */
    BR_LNA,      /* ln(α/(m·c²)) ≤ 0 or not finite, β not finite */
    BR_BELOW_K,  /* x_target ≤ k */
    BR_NOTFIN,   /* Smoker's count not finite: the linear fraction */
    BR_SMOKER,   /* Smoker's count */
    BR_CLAMP_LO, /* the fraction below 0 */
    BR_CLAMP_HI, /* the fraction above 1 */
    BR_NAN,      /* the fraction NaN */
    BR_N
};

static const char *const br_name[BR_N] = {"alpha_loc <= 1",   "m <= 0",       "disc < 0",
                                          "den <= 0",         "ln factor",    "x_target <= k",
                                          "count not finite", "smoker count", "clamped to 0",
                                          "clamped to 1",     "NaN"};

/* Which of the first eight branches stepper_crossing takes, from its expressions in plain
 * doubles (smoker_setup_v's, stages_internal.h); *pre the fraction before the clamp. */
static int branch_of(const crossing_args *a, double *pre)
{
    double xn = a->xn.v, yn = a->yn.v, m = a->m.v, b = a->b.v, x0 = a->x_prev.v, xt = a->x_target.v;
    double alpha = (yn * (1.0 - xn)) / (xn * (1.0 - yn)), lin = (x0 - xt) / (x0 - xn);
    double am1 = alpha - 1.0, a2 = m * am1, a1 = (m + b * am1) - alpha;
    double disc = a1 * a1 - (4.0 * a2) * b;
    *pre = lin;
    if (!(alpha > 1.0))
        return BR_ALPHA;
    if (!(m > 0.0))
        return BR_M;
    if (!(disc >= 0.0))
        return BR_DISC;
    double k = (2.0 * b) / (-1.0 * a1 + sqrt(disc)), c = 1.0 + am1 * k, mcc = (m * c) * c;
    double den = alpha - mcc;
    if (!(den > 0.0))
        return BR_DEN;
    double beta = ((m * c) * am1) / den, lna = log(alpha / mcc);
    if (!(lna > 0.0) || !isfinite(lna) || !isfinite(beta))
        return BR_LNA;
    if (!(xt > k))
        return BR_BELOW_K;
    double u0 = 1.0 / (x0 - k), un = 1.0 / (xt - k);
    double cnt = log((un - beta) / (u0 - beta)) / lna;
    if (!isfinite(cnt))
        return BR_NOTFIN;
    *pre = cnt;
    return BR_SMOKER;
}

static tl3 tl_of(const double *o)
{
    tl3 x = {o[0], {o[1], o[2], o[3]}};
    return x;
}

/* The same double, or both NaN: which NaN an operation with two NaN operands returns (the sign
 * of the one it keeps) depends on the order the compiler gives the operands of a commutative
 * operation, which C leaves open; a NaN derivative sends the row to the per-row path
 * (stages.c), and a NaN fraction comes with NaN derivatives (it enters each), so no NaN of the
 * crossing reaches a result. */
static int same_double(double x, double y)
{
    return memcmp(&x, &y, sizeof x) == 0 || (isnan(x) && isnan(y));
}

static int same_bits(tl3 x, tl3 y)
{
    return same_double(x.v, y.v) && same_double(x.d[0], y.d[0]) && same_double(x.d[1], y.d[1]) &&
           same_double(x.d[2], y.d[2]);
}

/* The four rows of c through stepper_crossing4 (the AVX2 lanes where stages_have_avx2(), and
 * the scalar fallback) against stepper_crossing on each, bit for bit (same_double); *lanes counts
 * the calls that went through the AVX2 lanes, *nan the rows with a NaN in the result. */
static void check4(const crossing_args a[4], size_t *lanes, size_t *nan)
{
    tab_cross c[4];
    double f[4][4], f0[4][4];
    memset(c, 0x5a, sizeof c);
    memset(f, 0x5a, sizeof f);
    memset(f0, 0x5a, sizeof f0);
    for (int j = 0; j < 4; j++)
        crossing_put(&c[j], &a[j]);
    int avx2 = stages_have_avx2();
    stepper_crossing4(c, f, avx2);
    stepper_crossing4(c, f0, 0);
    *lanes += avx2 != 0;
    for (int j = 0; j < 4; j++) {
        tl3 want = stepper_crossing(a[j].m, a[j].b, a[j].x_prev, a[j].xn, a[j].yn, a[j].x_target);
        tl3 got = tl_of(f[j]), got0 = tl_of(f0[j]);
        if (!same_bits(got, want))
            print_error("lane %d: m %a b %a x_prev %a xn %a yn %a x_target %a: got %a (%a %a %a), "
                        "want %a (%a %a %a)\n",
                        j, a[j].m.v, a[j].b.v, a[j].x_prev.v, a[j].xn.v, a[j].yn.v, a[j].x_target.v,
                        got.v, got.d[0], got.d[1], got.d[2], want.v, want.d[0], want.d[1],
                        want.d[2]);
        assert_true(same_bits(got, want));
        assert_true(same_bits(got0, want));
        *nan += isnan(want.v) || isnan(want.d[0]) || isnan(want.d[1]) || isnan(want.d[2]);
    }
}

/* A random tangent: mostly moderate, now and then zero, huge, infinite or NaN. */
static tl3 rnd_tl(gsl_rng *g, double v)
{
    tl3 x = tl_const(v);
    for (int i = 0; i < TL_N; i++) {
        unsigned u = (unsigned)gsl_rng_uniform_int(g, 1000);
        x.d[i] = u < 900   ? gsl_ran_gaussian(g, 1.0)
                 : u < 970 ? 0.0
                 : u < 995 ? gsl_ran_gaussian(g, 1e200)
                 : u < 998 ? -HUGE_VAL
                           : NAN;
    }
    return x;
}

/* One random argument set aimed at a branch (kind 0..11; the branch it takes is what
 * branch_of says, not the aim): a step from x_prev to xn on the curve near the line, with
 * x_target inside it, or the values that make each rejection or fallback happen. */
static void random_args(gsl_rng *g, crossing_args *a)
{
    double x0 = 0.02 + 0.96 * gsl_rng_uniform(g), xn = x0 * (0.2 + 0.79 * gsl_rng_uniform(g));
    double yn = xn + (1.0 - xn) * (0.02 + 0.9 * gsl_rng_uniform(g));
    double m = 0.1 + 0.89 * gsl_rng_uniform(g), b = yn - m * x0;
    double xt = xn + (x0 - xn) * gsl_rng_uniform(g);
    switch (gsl_rng_uniform_int(g, 12)) {
    case 0: /* α_loc ≤ 1 */
        yn = gsl_rng_uniform(g) < 0.5 ? xn : xn * (0.5 + 0.5 * gsl_rng_uniform(g));
        break;
    case 1: /* m ≤ 0 */
        m = gsl_rng_uniform(g) < 0.3 ? 0.0 : -m;
        break;
    case 2: /* a high line: b large */
        b = 0.3 + 0.7 * gsl_rng_uniform(g);
        break;
    case 3: /* a steep line: m > 1 */
        m = 1.0 + 3.0 * gsl_rng_uniform(g);
        b = (gsl_rng_uniform(g) - 0.5) * 0.2;
        break;
    case 4: { /* the factor α/(m c²) rounded to 1 (b = 0: k = 0, c = 1), or m tiny: infinite */
        double alpha = (yn * (1.0 - xn)) / (xn * (1.0 - yn));
        b = 0.0;
        m = gsl_rng_uniform(g) < 0.7 ? nextafter(alpha, 0.0) : 4.9e-324;
        break;
    }
    case 5:   /* x_target at or below the pinch root */
    case 6: { /* x_prev at the root: u0 infinite, a count of −inf */
        double alpha = (yn * (1.0 - xn)) / (xn * (1.0 - yn)), am1 = alpha - 1.0;
        double a1 = (m + b * am1) - alpha, disc = a1 * a1 - (4.0 * (m * am1)) * b;
        double k = (2.0 * b) / (-1.0 * a1 + sqrt(disc));
        if (isfinite(k) && k > 0.0) {
            if (gsl_rng_uniform(g) < 0.5)
                xt = gsl_rng_uniform(g) < 0.3 ? k : k * gsl_rng_uniform(g);
            else
                x0 = k;
        }
        break;
    }
    case 7: /* α_loc within a few ulps of 1 */
        yn = xn * (1.0 + 2.2e-16 * (double)gsl_rng_uniform_int(g, 8));
        break;
    case 8: /* x_target outside [xn, x_prev] */
        xt = gsl_rng_uniform(g) < 0.5 ? x0 + 0.1 * gsl_rng_uniform(g) : xn * gsl_rng_uniform(g);
        break;
    case 9: { /* something not finite */
        static const double bad[3] = {NAN, HUGE_VAL, -HUGE_VAL};
        double *which[6] = {&m, &b, &x0, &xn, &yn, &xt};
        *which[gsl_rng_uniform_int(g, 6)] = bad[gsl_rng_uniform_int(g, 3)];
        break;
    }
    case 10: /* x_target at an end */
        xt = gsl_rng_uniform(g) < 0.5 ? x0 : xn;
        break;
    default:
        break;
    }
    a->m = rnd_tl(g, m);
    a->b = rnd_tl(g, b);
    a->x_prev = rnd_tl(g, x0);
    a->xn = rnd_tl(g, xn);
    a->yn = rnd_tl(g, yn);
    a->x_target = rnd_tl(g, xt);
}

/* 400 000 random argument sets (GSL mt19937, seed 17), four to a call, every branch of
 * stepper_crossing hit (counted; each at least 0.2 % of the sets) and each set in a random lane.
 * Tolerance: none (the same bits; a NaN matches any NaN, same_double). Fails (each tried) when
 * the kernel (stages_avx2.c, stages_crossing4_avx2) drops the test α_loc > 1, either clamp or
 * the test that the count is finite, takes the linear fraction's derivatives with the count's
 * value, swaps u0 and un, or computes m·c·c, α_loc or the linear fraction in another order.
 * Smoker_setup's other tests (m > 0, disc ≥ 0, den > 0, ln factor > 0, β finite) and > k
 * against ≥ k cannot be told apart this way: where each decides, a NaN, an infinity or a zero
 * further on sends the lane to the linear fraction all the same. */
static void cross4_random_same_bits(void **state)
{
    (void)state;
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 17);
    size_t n = 400000, count[BR_N] = {0}, lanes = 0, nan = 0;
    for (size_t i = 0; i < n; i += 4) {
        crossing_args a[4];
        for (int j = 0; j < 4; j++) {
            random_args(g, &a[j]);
            double pre;
            count[branch_of(&a[j], &pre)]++;
            count[BR_CLAMP_LO] += pre < 0.0;
            count[BR_CLAMP_HI] += pre > 1.0;
            count[BR_NAN] += isnan(pre);
        }
        check4(a, &lanes, &nan);
    }
    for (int k = 0; k < BR_N; k++) {
        print_message("%-18s %zu\n", br_name[k], count[k]);
        assert_true(count[k] >= n / 500);
    }
    print_message("%zu calls in the AVX2 lanes; %zu rows with a NaN in the result\n", lanes, nan);
    gsl_rng_free(g);
}

/* Collects crossings four at a time and checks each full group. */
typedef struct {
    crossing_args a[4];
    int k;
    size_t rows, lanes, nan;
} batch4;

static void batch_add(batch4 *q, const crossing_args *a)
{
    q->a[q->k++] = *a;
    q->rows++;
    if (q->k == 4) {
        check4(q->a, &q->lanes, &q->nan);
        q->k = 0;
    }
}

/* The crossings the demo logs' rows produce (datasets/demo/logs with the demo column,
 * benzene–toluene ideal; each row at its logged R) and the NRTL benchmark's rows
 * (tests/bench_invert.c nrtl: ethanol–water NRTL-A, xD 0.80 → 0.70, xB what 5 stages at R = 4
 * reach, plus Gaussian noise 0.002 and 0.005; GSL mt19937, seed 1; 20 000 rows). Tolerance:
 * none (the same bits). Fails (each tried) under the mutations of cross4_random_same_bits in
 * the count's expressions and the blend: u0 and un swapped, m·c·c or α_loc in another order,
 * the linear fraction's derivatives taken. */
static void cross4_demo_and_bench_rows_same_bits(void **state)
{
    (void)state;
    stagecal_column col;
    char path[512];
    snprintf(path, sizeof path, "%s/columns/demo_benzene_toluene.json", STAGECAL_DATASETS);
    assert_int_equal(stagecal_column_load(path, &col, NULL), STAGECAL_OK);
    batch4 q;
    memset(&q, 0, sizeof q);
    size_t rows = 0;
    for (int year = 2025; year <= 2026; year++)
        for (int month = 1; month <= 12; month++) {
            char line[1024];
            snprintf(path, sizeof path, "%s/demo/logs/%d-%02d.csv", STAGECAL_DATASETS, year, month);
            FILE *f = fopen(path, "r");
            if (!f)
                continue;
            assert_non_null(fgets(line, sizeof line, f));
            int ixd = header_index(line, "xD"), ixb = header_index(line, "xB"),
                ir = header_index(line, "R");
            assert_true(ixd >= 0 && ixb >= 0 && ir >= 0);
            while (fgets(line, sizeof line, f)) {
                crossing_args a;
                rows++;
                if (crossing_of_row(col.system.vle, cell(line, ixd), cell(line, ixb),
                                    cell(line, ir), &a))
                    batch_add(&q, &a);
            }
            fclose(f);
        }
    size_t demo = q.rows;
    print_message("demo logs: %zu rows, %zu crossings\n", rows, demo);
    assert_true(demo > 2000);
    stagecal_column_free(&col);

    const stagecal_antoine ew[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    stagecal_vle *v =
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, p, 5, 101325.0, NULL, NULL);
    assert_non_null(v);
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 1);
    size_t n = 20000, per_run = n / 100;
    for (size_t i = 0; i < n; i++) {
        double d = 0.80 - 0.10 * (double)(i % per_run) / (double)per_run, b = NAN;
        size_t len;
        int status;
        stagecal_stages_step(v, d, 4.0, 5.0, 1.0, NULL, &b, NULL, 0, &len, &status, NULL);
        double xd = d + gsl_ran_gaussian(g, 0.002), xb = b + gsl_ran_gaussian(g, 0.005);
        crossing_args a;
        if (crossing_of_row(v, xd, xb, 4.0, &a))
            batch_add(&q, &a);
    }
    print_message("NRTL bench rows: %zu rows, %zu crossings; %zu calls in the AVX2 lanes\n", n,
                  q.rows - demo, q.lanes);
    assert_true(q.rows - demo > n * 8 / 10);
    assert_int_equal(q.nan, 0);
    gsl_rng_free(g);
    stagecal_vle_free(v);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(cross4_random_same_bits),
        cmocka_unit_test(cross4_demo_and_bench_rows_same_bits),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
