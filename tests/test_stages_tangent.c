/*
 * test_stages_tangent.c — the fast paths of the inversion: Smoker's closed form for
 * constant α at E_MV = 1 (instead of stepping), and tangent-linear sensitivities
 * (instead of six more inversions for central finite differences).
 *
 * Sources of truth: stepping itself (the closed form must reproduce it: Smoker, E. H.
 * (1938), "Analytic determination of plates in fractionating columns", Trans. AIChE 34,
 * 165, is exact for constant α, and the fractional-stage rule makes stepping additive);
 * derivatives of Smoker's equation evaluated in 50-digit arithmetic (mpmath 1.3,
 * mp.diff, frozen below); and central finite differences of the inversion (the former
 * method, want_sensitivities = 2) for the models without a closed form.
 */
#include <float.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "stagecal/column.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "csv_cells.h"
#include "testutil.h"
/* after every system header: banned.h redefines libc names */
#include "stages_internal.h"
#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* Inversion with the given way of computing (closed form or stepping, sensitivity
 * method); returns the status. */
static int invert_way(const stagecal_vle *v, double xd, double xb, double r, double e,
                      int closed_form, int sens, stagecal_stages_result *res)
{
    stagecal_stages_params par = stagecal_stages_default_params();
    par.closed_form = closed_form;
    par.want_sensitivities = sens;
    stagecal_error err;
    assert_int_equal(stagecal_stages_invert(v, xd, xb, r, e, &par, res, &err), STAGECAL_OK);
    return res->status;
}

/* Largest relative difference of closed form against stepping seen so far. */
static double worst_n, worst_d;

/* One point: same status both ways; when ok, the counts within 1e-12 relative (each is
 * within ~1e-15 of the exact count per step; stepping accumulates rounding over ≤ 200
 * steps), the tangents within 1e-9 (the stepping tangent is the derivative of the
 * stepped count, equal to the closed form's up to that accumulated rounding, which the
 * derivative amplifies near a pinch). */
static void compare_point(const stagecal_vle *v, double xd, double xb, double r)
{
    stagecal_stages_result a, b;
    int sa = invert_way(v, xd, xb, r, 1.0, 1, 1, &a);
    int sb = invert_way(v, xd, xb, r, 1.0, 0, 1, &b);
    if (sa != sb)
        print_error("xd %.17g xb %.17g R %.17g: closed form %s, stepping %s (%s)\n", xd, xb, r,
                    stagecal_stages_status_name(sa), stagecal_stages_status_name(sb), b.reason);
    assert_int_equal(sa, sb);
    if (sa != STAGECAL_STAGES_OK)
        return;
    assert_rel(a.stages, b.stages, 1e-12, "closed form = stepping");
    assert_abs(a.column_stages, b.column_stages, 1e-12 * b.stages, "column stages");
    worst_n = fmax(worst_n, fabs(a.stages - b.stages) / b.stages);
    const double da[3] = {a.dstages_dxd, a.dstages_dxb, a.dstages_dr};
    const double db[3] = {b.dstages_dxd, b.dstages_dxb, b.dstages_dr};
    for (int k = 0; k < 3; k++) {
        /* absolute below 1: a derivative of 1e-16 is zero to rounding */
        assert_abs(da[k], db[k], 1e-9 * fmax(fabs(db[k]), 1.0),
                   "closed-form tangent = stepping tangent");
        if (db[k] != 0)
            worst_d = fmax(worst_d, fabs(da[k] - db[k]) / fmax(fabs(db[k]), 1.0));
    }
}

static void tangent_closed_form_equals_stepping(void **state)
{
    (void)state;
    const double alphas[] = {1.3, 2.5, 6.0}, refl[] = {0.4, 1.0, 3.0, 12.0, INFINITY};
    const double xds[] = {0.6, 0.95, 0.999};
    size_t ok = 0;
    worst_n = worst_d = 0;
    for (size_t ia = 0; ia < 3; ia++) {
        stagecal_vle *v = stagecal_vle_alloc_alpha(alphas[ia], NULL);
        assert_non_null(v);
        for (size_t ir = 0; ir < 5; ir++)
            for (size_t id = 0; id < 3; id++)
                for (int k = 1; k < 40; k++) {
                    double xb = xds[id] * k / 40.0;
                    stagecal_stages_result res;
                    compare_point(v, xds[id], xb, refl[ir]);
                    ok +=
                        invert_way(v, xds[id], xb, refl[ir], 1.0, 1, 0, &res) == STAGECAL_STAGES_OK;
                }
        stagecal_vle_free(v);
    }
    print_message("closed form vs stepping: %zu ok points of 1755; worst relative difference "
                  "%.2e in stages, %.2e in the tangents\n",
                  ok, worst_n, worst_d);
    assert_true(ok > 500); /* the grid does reach the ok domain, not only pinches */
}

/* Every row of the demo logs, inverted with the demo constant-α column (α = 2.5) at its
 * logged R and at total reflux (how run-log mode counts a stretch without draw). */
static void tangent_closed_form_on_demo_logs(void **state)
{
    (void)state;
    stagecal_vle *v = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(v);
    size_t rows = 0;
    worst_n = worst_d = 0;
    for (int year = 2025; year <= 2026; year++)
        for (int month = 1; month <= 12; month++) {
            char path[512], line[1024];
            snprintf(path, sizeof path, "%s/demo/logs/%d-%02d.csv", STAGECAL_DATASETS, year, month);
            FILE *f = fopen(path, "r");
            if (!f)
                continue;
            assert_non_null(fgets(line, sizeof line, f));
            int ixd = header_index(line, "xD"), ixb = header_index(line, "xB"),
                ir = header_index(line, "R");
            assert_true(ixd >= 0 && ixb >= 0 && ir >= 0);
            while (fgets(line, sizeof line, f)) {
                double xd = cell(line, ixd), xb = cell(line, ixb), r = cell(line, ir);
                if (!(xb > 0 && xb < xd && xd < 1 && r > 0))
                    continue;
                compare_point(v, xd, xb, r);
                compare_point(v, xd, xb, INFINITY);
                rows++;
            }
            fclose(f);
        }
    print_message("demo logs: %zu rows; closed form vs stepping: worst relative difference "
                  "%.2e in stages, %.2e in the tangents\n",
                  rows, worst_n, worst_d);
    assert_true(rows > 3000); /* 14 monthly logs of ~360 rows */
    stagecal_vle_free(v);
}

/* A near-pinch row of datasets/demo/logs/2025-01.csv (line 287: xD 0.80480, xB 0.22214,
 * R 2, α 2.5 of the demo column). Reference: Smoker's equation and its derivatives in
 * 50-digit arithmetic (mpmath 1.3, mp.diff), N = 11.530561216479152673890. */
static void tangent_matches_high_precision(void **state)
{
    (void)state;
    const double xd = 0.80480, xb = 0.22214, r = 2.0;
    const double n_ref = 11.530561216479152673890;
    const double d_ref[3] = {2356.1835806710487876658, -5187.7282274574769919789,
                             -453.54804346597470320651};
    stagecal_vle *v = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(v);
    stagecal_stages_result res;
    for (int way = 0; way < 2; way++) {
        assert_int_equal(invert_way(v, xd, xb, r, 1.0, 1 - way, 1, &res), STAGECAL_STAGES_OK);
        /* ~1e-15 per operation, amplified by the conditioning near the pinch (∂N/∂xB·xB/N
         * ≈ 100): 1e-12 for the count, 1e-10 for the derivatives. */
        assert_rel(res.stages, n_ref, 1e-12, way ? "stepped count" : "closed-form count");
        assert_rel(res.dstages_dxd, d_ref[0], 1e-10, "dN/dxD (mpmath)");
        assert_rel(res.dstages_dxb, d_ref[1], 1e-10, "dN/dxB (mpmath)");
        assert_rel(res.dstages_dr, d_ref[2], 1e-10, "dN/dR (mpmath)");
    }
    /* The finite differences this replaces are ~1e-5 off here (truncation ~h²·N''' near
     * the pinch); they stay within 1e-3. */
    assert_int_equal(invert_way(v, xd, xb, r, 1.0, 0, 2, &res), STAGECAL_STAGES_OK);
    assert_rel(res.dstages_dxb, d_ref[1], 1e-3, "finite differences (former method)");
    stagecal_vle_free(v);
}

/* Tangents against central finite differences for the models without a closed form:
 * tables (ideal benzene–toluene, NRTL ethanol–water below the azeotrope) and E_MV < 1.
 * The finite differences carry ~1e-10 relative error away from whole-stage kinks; a
 * point within h ≈ 6e-6·x of a kink would differ by O(h), so the points are checked to
 * lie away from one (column stages not within 1e-4 of a whole number). Tolerance 1e-6. */
static void tangent_matches_finite_differences(void **state)
{
    (void)state;
    /* benzene, toluene: the Antoine sets of datasets/columns/demo_benzene_toluene.json */
    const stagecal_antoine bt[2] = {{4.01814, 1203.835, -53.226, 287.70, 354.07},
                                    {4.07827, 1343.943, -53.773, 308.52, 384.66}};
    const stagecal_antoine ew[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double nrtl[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    stagecal_vle *models[3] = {
        stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, bt, NULL, 0, 101325.0, NULL, NULL),
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, nrtl, 5, 101325.0, NULL, NULL),
        stagecal_vle_alloc_alpha(2.5, NULL)};
    const struct {
        int model;
        double xd, xb, r, e;
    } pts[] = {
        {0, 0.95, 0.30, 4.0, 1.0},  {0, 0.90, 0.25, 3.0, 1.0}, {0, 0.97, 0.45, INFINITY, 1.0},
        {0, 0.95, 0.30, 4.0, 0.7},  {1, 0.80, 0.10, 3.0, 1.0}, {1, 0.70, 0.05, 6.0, 1.0},
        {1, 0.80, 0.10, 3.0, 0.75}, {2, 0.95, 0.30, 4.0, 0.6}, {2, 0.90, 0.35, 3.0, 0.85},
    };
    size_t checked = 0;
    for (size_t i = 0; i < sizeof pts / sizeof pts[0]; i++) {
        const stagecal_vle *v = models[pts[i].model];
        assert_non_null(v);
        stagecal_stages_result t, f;
        if (invert_way(v, pts[i].xd, pts[i].xb, pts[i].r, pts[i].e, 1, 1, &t) != 0)
            print_error("point %zu: %s\n", i, t.reason);
        assert_int_equal(t.status, STAGECAL_STAGES_OK);
        assert_int_equal(invert_way(v, pts[i].xd, pts[i].xb, pts[i].r, pts[i].e, 1, 2, &f),
                         STAGECAL_STAGES_OK);
        assert_true(t.stages == f.stages); /* the method changes the derivatives only */
        double frac = t.column_stages - floor(t.column_stages);
        if (frac < 1e-4 || frac > 1 - 1e-4)
            continue;
        checked++;
        char label[96];
        snprintf(label, sizeof label, "point %zu dN/dxD tangent vs finite differences", i);
        assert_rel(t.dstages_dxd, f.dstages_dxd, 1e-6, label);
        snprintf(label, sizeof label, "point %zu dN/dxB tangent vs finite differences", i);
        assert_rel(t.dstages_dxb, f.dstages_dxb, 1e-6, label);
        snprintf(label, sizeof label, "point %zu dN/dR tangent vs finite differences", i);
        assert_rel(t.dstages_dr, f.dstages_dr, 1e-6, label);
    }
    assert_true(checked >= 7);
    for (int k = 0; k < 3; k++)
        stagecal_vle_free(models[k]);
}

/* At a whole stage count the crossing step's fraction can come out 1 + 1 ulp (or −1 ulp) and
 * is clamped into [0, 1]; the clamp used to replace it by a constant, which dropped the
 * derivatives: status ok with dN/dxD = dN/dxB = dN/dR = 0, so u(N) = 0 and an infinite
 * weight downstream (found on ideal benzene–toluene at 28 kPa, N = 4, 10 and 5). Points are
 * made by stepping a whole number of stages forward (so the inversion lands on a whole
 * count); the tangent must be the derivative of one of the two branches meeting there: it
 * equals a one-sided finite difference (h = 1e-7·x) within 1e-4 relative (the one-sided
 * difference's own error is O(h·N''/N') ~ 1e-6; the two branches differ by far more where
 * α_loc jumps, so "either side" is the claim). */
static void tangent_at_whole_stages(void **state)
{
    (void)state;
    /* benzene, toluene: the Antoine sets of datasets/columns/demo_benzene_toluene.json */
    const stagecal_antoine bt[2] = {{4.01814, 1203.835, -53.226, 287.70, 354.07},
                                    {4.07827, 1343.943, -53.773, 308.52, 384.66}};
    size_t whole = 0, checked = 0;
    for (int k = 0; k < 60; k++) {
        double p = 8000.0 * pow(25.0, (double)((k * 23) % 60) / 59.0);
        stagecal_vle *v =
            stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, bt, NULL, 0, p, NULL, NULL);
        assert_non_null(v);
        for (int j = 0; j < 10; j++) {
            double xd = 0.9 + 0.01 * j, r = 1.5 + 0.5 * j, n0 = 4 + j % 7, xb;
            size_t len;
            int st;
            stagecal_stages_step(v, xd, r, n0, 1.0, NULL, &xb, NULL, 0, &len, &st, NULL);
            if (st != STAGECAL_STAGES_OK)
                continue;
            stagecal_stages_result t;
            if (invert_way(v, xd, xb, r, 1.0, 1, 1, &t) != STAGECAL_STAGES_OK)
                continue;
            checked++;
            char label[96];
            /* more stages for a purer top or a leaner pot, fewer at more reflux */
            snprintf(label, sizeof label, "p %.0f xD %.2f R %.1f N %.17g: tangents finite", p, xd,
                     r, t.stages);
            if (!(t.dstages_dxd > 0 && t.dstages_dxb < 0 && t.dstages_dr < 0))
                fail_msg("%s and signed (got %g %g %g)", label, t.dstages_dxd, t.dstages_dxb,
                         t.dstages_dr);
            if (t.column_stages != floor(t.column_stages))
                continue;
            whole++;
            double h = 1e-7 * xb, d[2];
            for (int side = 0; side < 2; side++) {
                stagecal_stages_result f;
                double xb2 = side ? xb + h : xb - h;
                assert_int_equal(invert_way(v, xd, xb2, r, 1.0, 1, 0, &f), STAGECAL_STAGES_OK);
                d[side] = (f.stages - t.stages) / (xb2 - xb);
            }
            if (!(fabs(t.dstages_dxb - d[0]) <= 1e-4 * fabs(d[0]) ||
                  fabs(t.dstages_dxb - d[1]) <= 1e-4 * fabs(d[1])))
                fail_msg("%s: dN/dxB %.10g is neither one-sided difference (%.10g, %.10g)", label,
                         t.dstages_dxb, d[0], d[1]);
        }
        stagecal_vle_free(v);
    }
    /* the grid holds whole-count landings (5 of ~600 when found); without one the test
     * would not test the clamp */
    assert_true(whole >= 3);
    assert_true(checked >= 500);
}

/* The fast path's AVX2 build (stages_avx2.c: the tangents as 4-lane vectors) gives the same
 * doubles as the scalar one, bit for bit, and applies exactly where it does: 10^5 points
 * (GSL mt19937, seed 17) over xD in (0, 1), xB below it, R in [0.05, 50], α in (1.01, 8),
 * plus near-pinch and near-1 edges. Tolerance: none (each lane is the scalar IEEE operation;
 * -ffp-contract=off). Source: the scalar path, which the tests above check against stepping,
 * mpmath and finite differences (an equivalence, no outside source). Without AVX2 on the
 * machine the check is skipped (said on stderr): the scalar path is then the only one. */
static void tangent_avx2_same_bits(void **state)
{
    (void)state;
    if (!stages_have_avx2()) {
        fprintf(stderr, "tangent_avx2_same_bits: no AVX2 here, skipped\n");
        return;
    }
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 17);
    size_t applied = 0, n = 100000;
    for (size_t i = 0; i < n; i++) {
        double a = 1.01 + 7.0 * gsl_rng_uniform(g);
        double xd = i % 10 == 0 ? 1.0 - pow(10.0, -1.0 - 12.0 * gsl_rng_uniform(g))
                                : gsl_rng_uniform_pos(g);
        double xb = xd * gsl_rng_uniform_pos(g);
        double r = i % 7 == 0 ? 0.05 + 0.5 * gsl_rng_uniform(g) : 0.05 + 50.0 * gsl_rng_uniform(g);
        alpha_closed_out p, q;
        memset(&p, 0x55, sizeof p);
        memset(&q, 0xaa, sizeof q);
        int kp = alpha_closed_eval(a, xd, xb, r, 200.0, &p);
        int kq = stages_alpha_closed_avx2(a, xd, xb, r, 200.0, &q);
        assert_int_equal(kp, kq);
        if (!kp)
            continue;
        applied++;
        assert_memory_equal(&p, &q, sizeof p);
    }
    gsl_rng_free(g);
    assert_true(applied > n / 10); /* the grid reaches the fast path often, and leaves it */
    assert_true(applied < n);
}

/* A random row at α for the many-row checks: mostly where the closed form applies, with the
 * edges where it does not (NaN, xB above xD, R = 0, R < 0, total reflux, xD at or above 1,
 * x_target within 10^-10..10^-7 of the pinch root, either side of CLOSED_MARGIN, near xD = 1). */
static void random_row(gsl_rng *g, double alpha, size_t i, double *xd, double *xb, double *r)
{
    if (i % 13 == 1) { /* near the pinch root k of the line (smoker_setup's expressions) */
        *xd = 0.5 + 0.49 * gsl_rng_uniform(g);
        *r = 0.5 + 10.0 * gsl_rng_uniform(g);
        double m = *r / (*r + 1.0), b = *xd / (*r + 1.0), am1 = alpha - 1.0;
        double a1 = m + b * am1 - alpha, disc = a1 * a1 - 4.0 * m * am1 * b;
        double k = 2.0 * b / (-a1 + sqrt(disc));
        double y = m * (k + pow(10.0, -10.0 + 3.0 * gsl_rng_uniform(g))) + b;
        *xb = y / (alpha - am1 * y); /* x*(y) */
        return;
    }
    *xd = i % 10 == 0 ? 1.0 - pow(10.0, -1.0 - 12.0 * gsl_rng_uniform(g)) : gsl_rng_uniform_pos(g);
    *xb = *xd * gsl_rng_uniform_pos(g);
    *r = i % 7 == 0 ? 0.05 + 0.5 * gsl_rng_uniform(g) : 0.05 + 50.0 * gsl_rng_uniform(g);
    switch (i % 97) {
    case 3:
        *xd = NAN;
        break;
    case 5:
        *xb = *xd + 0.01;
        break;
    case 11:
        *r = 0.0;
        break;
    case 13:
        *r = -1.0;
        break;
    case 17:
        *r = INFINITY;
        break;
    case 19:
        *xd = 1.0;
        break;
    case 23:
        *r = NAN;
        break;
    default:
        break;
    }
}

/* The same result, bit for bit: each number's bytes, the status, the reason text. */
static void assert_same_result(const stagecal_stages_result *a, const stagecal_stages_result *b)
{
    assert_int_equal(a->status, b->status);
    const double pa[7] = {a->stages,      a->column_stages, a->lv,        a->x_target,
                          a->dstages_dxd, a->dstages_dxb,   a->dstages_dr};
    const double pb[7] = {b->stages,      b->column_stages, b->lv,        b->x_target,
                          b->dstages_dxd, b->dstages_dxb,   b->dstages_dr};
    assert_memory_equal(pa, pb, sizeof pa);
    assert_string_equal(a->reason, b->reason);
}

/* The four-row fast path (stages_invert4_fast, stages_avx2.c: rows side by side in the AVX2
 * lanes) takes exactly the rows the per-row fast path takes (alpha_closed_eval after
 * stages.c's input checks, finite derivatives) and gives each the per-row call's result bit
 * for bit: 10^5 rows (GSL mt19937, seed 29) over xD in (0, 1), xB below it, R in [0.05, 50],
 * with the edges of random_row, at α 1.05, 2.5 and 7.5. Tolerance: none (each lane is the scalar
 * IEEE operation; -ffp-contract=off). Source: the per-row path, which the tests above check
 * against stepping, mpmath and finite differences (an equivalence, no outside source). Without
 * AVX2 it takes no row (checked; said on stderr). */
static void tangent_four_rows_same_bits(void **state)
{
    (void)state;
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 29);
    const double alphas[] = {1.05, 2.5, 7.5};
    size_t applied = 0, n = 100000;
    stagecal_stages_params par = stagecal_stages_default_params();
    par.want_sensitivities = 1;
    for (size_t ia = 0; ia < 3; ia++) {
        stagecal_vle *v = stagecal_vle_alloc_alpha(alphas[ia], NULL);
        assert_non_null(v);
        for (size_t i = 0; i < n / 3; i += 4) {
            double xd[4], xb[4], r[4];
            int expect = 0;
            stagecal_stages_result one[4], four[4];
            for (int j = 0; j < 4; j++) {
                random_row(g, alphas[ia], i + (size_t)j, &xd[j], &xb[j], &r[j]);
                assert_int_equal(
                    stages_invert_quiet(v, xd[j], xb[j], r[j], 1.0, &par, &one[j], NULL),
                    STAGECAL_OK);
                alpha_closed_out o;
                if (xd[j] > 0.0 && xd[j] < 1.0 && xb[j] > 0.0 && xb[j] < xd[j] && r[j] > 0.0 &&
                    !isinf(r[j]) && alpha_closed_eval(alphas[ia], xd[j], xb[j], r[j], 200.0, &o) &&
                    isfinite(o.d[0]) && isfinite(o.d[1]) && isfinite(o.d[2]))
                    expect |= 1 << j;
            }
            memset(four, 0xaa, sizeof four);
            unsigned on = stages_invert4_fast(v, xd, xb, r, 1.0, &par, four);
            assert_int_equal(on, stages_have_avx2() ? (unsigned)expect : 0u);
            for (int j = 0; j < 4; j++)
                if (on >> j & 1u) {
                    applied++;
                    assert_same_result(&one[j], &four[j]);
                }
        }
        /* where the model or the parameters rule it out, no row */
        double xd[4] = {0.9, 0.9, 0.9, 0.9}, xb[4] = {0.2, 0.3, 0.4, 0.5}, r[4] = {4, 4, 4, 4};
        stagecal_stages_result four[4];
        stagecal_stages_params p2 = par;
        assert_int_equal(stages_invert4_fast(v, xd, xb, r, 0.9, &par, four), 0);
        p2.want_sensitivities = 2;
        assert_int_equal(stages_invert4_fast(v, xd, xb, r, 1.0, &p2, four), 0);
        p2 = par, p2.closed_form = 0;
        assert_int_equal(stages_invert4_fast(v, xd, xb, r, 1.0, &p2, four), 0);
        if (ia > 0) /* (at α = 1.05 these rows pinch) */
            assert_int_equal(stages_invert4_fast(v, xd, xb, r, 1.0, &par, four),
                             stages_have_avx2() ? 15u : 0u);
        stagecal_vle_free(v);
    }
    gsl_rng_free(g);
    if (!stages_have_avx2()) {
        fprintf(stderr, "tangent_four_rows_same_bits: no AVX2 here, the per-row path alone\n");
        return;
    }
    assert_true(applied > n / 10); /* the rows reach the fast path often, and leave it */
    assert_true(applied < n - n / 20);
}

/* stagecal_stages_invert_many gives each row what stagecal_stages_invert gives it, bit for bit
 * (numbers, status, reason, return value): 5 003 rows of random_row (seed 31; not a multiple of
 * four, so the last rows go alone) at α = 2.5 with each sensitivity mode, E_MV 1 and 0.8, the
 * closed form on and off, params NULL; and 257 rows with a table model that has an azeotrope
 * (no fast path: the reasons). Tolerance: none. Source: the per-row call (an equivalence, no
 * outside source). */
static void tangent_many_same_as_per_row(void **state)
{
    (void)state;
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 31);
    size_t n = 5003;
    double *xd = malloc(n * sizeof *xd), *xb = malloc(n * sizeof *xb), *r = malloc(n * sizeof *r);
    stagecal_stages_result *many = malloc(n * sizeof *many);
    assert_true(xd && xb && r && many);
    for (size_t i = 0; i < n; i++)
        random_row(g, 2.5, i, &xd[i], &xb[i], &r[i]);
    stagecal_vle *v = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(v);
    size_t ok = 0;
    for (int mode = 0; mode < 8; mode++) {
        stagecal_stages_params par = stagecal_stages_default_params();
        par.want_sensitivities = mode % 3;
        par.closed_form = mode != 5;
        double e = mode == 4 ? 0.8 : 1.0;
        const stagecal_stages_params *pp = mode == 7 ? NULL : &par;
        stagecal_error em, e1;
        size_t m = mode == 6 ? 257 : n; /* fewer rows for the slow modes */
        if (par.want_sensitivities == 2 || e < 1.0 || !par.closed_form)
            m = 257;
        int rm = stagecal_stages_invert_many(v, m, xd, xb, r, e, pp, many, &em);
        int first = STAGECAL_OK;
        for (size_t i = 0; i < m; i++) {
            stagecal_stages_result one;
            int r1 = stagecal_stages_invert(v, xd[i], xb[i], r[i], e, pp, &one, &e1);
            if (r1 && !first)
                first = r1;
            assert_same_result(&one, &many[i]);
            ok += one.status == STAGECAL_STAGES_OK;
        }
        assert_int_equal(rm, first);
    }
    assert_true(ok > n); /* most rows are ok: the comparison is of counts, not of rejections */
    /* a table with a minimum-boiling azeotrope near x = 0.8 (invented points) */
    const double tx[7] = {0.1, 0.3, 0.5, 0.7, 0.8, 0.85, 0.95};
    const double ty[7] = {0.3, 0.5, 0.62, 0.74, 0.8, 0.83, 0.94};
    stagecal_vle *t = stagecal_vle_alloc_table(tx, ty, NULL, 7, NULL);
    assert_non_null(t);
    size_t az = 0;
    stagecal_error em, e1;
    stagecal_stages_params par = stagecal_stages_default_params();
    par.want_sensitivities = 1;
    int rm = stagecal_stages_invert_many(t, 257, xd, xb, r, 1.0, &par, many, &em), first = 0;
    for (size_t i = 0; i < 257; i++) {
        stagecal_stages_result one;
        int r1 = stagecal_stages_invert(t, xd[i], xb[i], r[i], 1.0, &par, &one, &e1);
        if (r1 && !first)
            first = r1;
        assert_same_result(&one, &many[i]);
        az += one.status == STAGECAL_STAGES_AZEOTROPE;
    }
    assert_int_equal(rm, first);
    assert_true(az > 10);
    stagecal_vle_free(t);
    assert_int_equal(stagecal_stages_invert_many(NULL, 1, xd, xb, r, 1.0, NULL, many, NULL),
                     STAGECAL_EINVAL);
    assert_int_equal(stagecal_stages_invert_many(v, 0, NULL, NULL, NULL, 1.0, NULL, NULL, NULL),
                     STAGECAL_OK);
    stagecal_vle_free(v);
    free(xd), free(xb), free(r), free(many);
    gsl_rng_free(g);
}

/* Rows of the table models' batch: a row that steps (xB what `stages` reach at R from xD, then
 * moved by up to ±0.01, which leaves some rows pinched at x_target or on the way), with an edge
 * case every 37 rows: NaN, R = 0, ∞, negative or tiny, xB at or above xD, xB tiny (many steps),
 * xD at 0.999 (above the ethanol–water azeotrope or the table's top). */
static void table_row(gsl_rng *g, const stagecal_vle *v, size_t i, double *xd, double *xb,
                      double *r)
{
    *xd = 0.35 + 0.5 * gsl_rng_uniform(g);
    *r = 0.3 + 12.0 * gsl_rng_uniform(g);
    double stages = 2.0 + 9.0 * gsl_rng_uniform(g), b = NAN;
    size_t len;
    int status;
    stagecal_stages_step(v, *xd, *r, stages, 1.0, NULL, &b, NULL, 0, &len, &status, NULL);
    *xb = (status == STAGECAL_STAGES_OK ? b : 0.1) + 0.02 * (gsl_rng_uniform(g) - 0.5);
    switch (i % 37) {
    case 3:
        *xd = NAN;
        break;
    case 5:
        *r = 0.0;
        break;
    case 7:
        *r = INFINITY;
        break;
    case 9:
        *r = -1.0;
        break;
    case 11:
        *r = 1e-3;
        break;
    case 13:
        *xb = *xd;
        break;
    case 15:
        *xb = *xd + 0.01;
        break;
    case 17:
        *xb = 1e-6;
        break;
    case 19:
        *xd = 0.999;
        break;
    case 21:
        *xb = -0.1;
        break;
    default:
        break;
    }
}

/* The four table models of the tests below: NRTL ethanol–water at 101.325 kPa (the bench's
 * model, an azeotrope near x = 0.89, y* flat near it: buckets of more than four nodes), a table of
 * 9 invented points (Newton's first step too long on its long segments), one of 161 invented
 * points crowded into a narrow band of y (buckets of up to nine nodes), and the 9 points with a
 * plateau at y = 0.6 (the branch's top y_top = 0.6: the bucket guess confirmed by the quotient). */
static void table_models(stagecal_vle *m[4])
{
    const stagecal_antoine ew[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    const double tx[9] = {0.05, 0.1, 0.2, 0.35, 0.5, 0.65, 0.8, 0.9, 0.97};
    const double ty[9] = {0.15, 0.26, 0.43, 0.6, 0.72, 0.82, 0.9, 0.95, 0.985};
    const double py[9] = {0.15, 0.26, 0.43, 0.6, 0.6, 0.82, 0.9, 0.95, 0.985};
    double cx[161], cy[161];
    for (int k = 0; k < 161; k++) { /* as tangent_table_inverse_same_bits */
        double x = 0.002 + 0.998 * (double)k / 160.0;
        cx[k] = x;
        cy[k] = x < 0.1 ? 6.0 * x : x < 0.9 ? 0.6 + 0.05 * (x - 0.1) : 0.64 + 3.6 * (x - 0.9);
    }
    m[0] = stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, p, 5, 101325.0, NULL, NULL);
    m[1] = stagecal_vle_alloc_table(tx, ty, NULL, 9, NULL);
    m[2] = stagecal_vle_alloc_table(cx, cy, NULL, 161, NULL);
    m[3] = stagecal_vle_alloc_table(tx, py, NULL, 9, NULL);
    for (int k = 0; k < 4; k++)
        assert_non_null(m[k]);
    assert_true(m[3]->ytop == 0.6);
}

/* stagecal_stages_invert_many on a Hermite table at E_MV = 1 (several rows stepped side by side
 * in one loop, stages_tab.c) gives each row what stagecal_stages_invert gives it, bit for
 * bit (numbers, status, reason, return value and the first error), and stages_invert_many_quiet
 * what stages_invert_quiet gives (with each row's return value): 20 000 rows of table_row (GSL
 * mt19937, seed 37) on NRTL ethanol–water at 101.325 kPa (the bench's model) and 4 001 on a
 * table of invented points, with the default parameters and with the ones that make rows leave
 * the side-by-side loop on the way (a pinch scan after 2 steps, at most 3 steps), and for
 * E_MV = 0.8 and the other sensitivity modes (no side-by-side loop). Tolerance: none (each row
 * the per-row path's IEEE operations; -ffp-contract=off). Source: the per-row call (an
 * equivalence, no outside source). */
static void tangent_table_rows_same_as_per_row(void **state)
{
    (void)state;
    stagecal_vle *models[4]; /* the first two: NRTL ethanol-water and the 9-point table */
    table_models(models);
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 37);
    size_t cap = 20000;
    double *xd = malloc(cap * sizeof *xd), *xb = malloc(cap * sizeof *xb),
           *r = malloc(cap * sizeof *r);
    stagecal_stages_result *many = malloc(cap * sizeof *many);
    int *rc = malloc(cap * sizeof *rc);
    assert_true(xd && xb && r && many && rc);
    for (int im = 0; im < 2; im++) {
        stagecal_vle *v = models[im];
        size_t n = im == 0 ? cap : 4001, count[4] = {0, 0, 0, 0}, steps3 = 0;
        for (size_t i = 0; i < n; i++)
            table_row(g, v, i, &xd[i], &xb[i], &r[i]);
        assert_int_equal(stages_many_by_table(v, 1.0), 1);
        assert_int_equal(stages_many_by_table(v, 0.8), 0);
        for (int mode = 0; mode < 6; mode++) {
            stagecal_stages_params par = stagecal_stages_default_params();
            par.want_sensitivities = mode == 4 ? 0 : mode == 5 ? 2 : 1;
            if (mode == 1)
                par.pinch_scan_after = 2;
            if (mode == 2)
                par.max_stages = 3;
            double e = mode == 3 ? 0.8 : 1.0;
            size_t m = mode >= 3 ? 997 : n; /* fewer rows for the slow modes */
            for (int quiet = 0; quiet < 2; quiet++) {
                stagecal_error em, e1;
                memset(many, 0xaa, m * sizeof *many);
                int rm = quiet ? stages_invert_many_quiet(v, m, xd, xb, r, e, &par, many, rc, &em)
                               : stagecal_stages_invert_many(v, m, xd, xb, r, e, &par, many, &em);
                int first = STAGECAL_OK;
                for (size_t i = 0; i < m; i++) {
                    stagecal_stages_result one;
                    int r1 =
                        quiet ? stages_invert_quiet(v, xd[i], xb[i], r[i], e, &par, &one, &e1)
                              : stagecal_stages_invert(v, xd[i], xb[i], r[i], e, &par, &one, &e1);
                    if (r1 && !first) {
                        first = r1;
                        assert_string_equal(e1.text, em.text);
                    }
                    assert_same_result(&one, &many[i]);
                    if (quiet)
                        assert_int_equal(rc[i], r1);
                    if (mode == 0 && quiet) {
                        count[one.status]++;
                        steps3 += one.status == STAGECAL_STAGES_OK && one.stages > 4.0;
                    }
                }
                assert_int_equal(rm, first);
            }
        }
        /* the rows reach the side-by-side loop and leave it every way */
        assert_true(count[STAGECAL_STAGES_OK] > n / 3);
        assert_true(count[STAGECAL_STAGES_PINCH] > n / 50);
        assert_true(count[STAGECAL_STAGES_INVALID] > n / 50);
        assert_true(steps3 > n / 10);
        if (im == 0)
            assert_true(count[STAGECAL_STAGES_AZEOTROPE] > n / 100);
    }
    assert_int_equal(stages_many_by_table(NULL, 1.0), 0);
    stagecal_vle *a = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(a);
    assert_int_equal(stages_many_by_table(a, 1.0), 0);
    stagecal_vle_free(a);
    for (int k = 0; k < 4; k++)
        stagecal_vle_free(models[k]);
    free(xd), free(xb), free(r), free(many), free(rc);
    gsl_rng_free(g);
}

/* The side-by-side stepping's x*(y) with its slope (stages_table_xstar_slope: the bucket search
 * counted, Newton's first step without a branch) gives vle_herm_invert_slope_inline's doubles,
 * bit for bit, and the same return code: 200 001 values of y over [0, 1] and 20 000 random ones
 * (GSL mt19937, seed 41), each y also at the node values and one ulp either side, on NRTL
 * ethanol–water, Wilson methanol–water, a table of 9 invented points and one of 161 invented
 * points crowded into a narrow band of y (up to nine nodes a bucket: the search's fallback).
 * Tolerance: none. Source: vle_table.c's inverse, which test_vle checks against the exact
 * models (an equivalence, no outside source). */
static void tangent_table_inverse_same_bits(void **state)
{
    (void)state;
    const stagecal_antoine ew[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    const stagecal_antoine mw[2] = {{5.20409, 1581.341, -33.50, 288.1, 356.83},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double wi[4] = {1000.0, 2000.0, 40.7e-6, 18.07e-6}; /* (test_stages.c's) */
    const double tx[9] = {0.05, 0.1, 0.2, 0.35, 0.5, 0.65, 0.8, 0.9, 0.97};
    const double ty[9] = {0.15, 0.26, 0.43, 0.6, 0.72, 0.82, 0.9, 0.95, 0.985};
    double cx[161], cy[161];
    for (int k = 0; k < 161; k++) { /* steep to 0.6 at x = 0.1, 0.6 → 0.64 on [0.1, 0.9] */
        double x = 0.002 + 0.998 * (double)k / 160.0;
        cx[k] = x;
        cy[k] = x < 0.1 ? 6.0 * x : x < 0.9 ? 0.6 + 0.05 * (x - 0.1) : 0.64 + 3.6 * (x - 0.9);
    }
    stagecal_vle *models[4] = {
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, p, 5, 101325.0, NULL, NULL),
        stagecal_vle_alloc_activity(STAGECAL_VLE_WILSON, mw, wi, 4, 101325.0, NULL, NULL),
        stagecal_vle_alloc_table(tx, ty, NULL, 9, NULL),
        stagecal_vle_alloc_table(cx, cy, NULL, 161, NULL)};
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 41);
    size_t wide = 0;
    for (int im = 0; im < 4; im++) {
        const stagecal_vle *v = models[im];
        assert_non_null(v);
        assert_non_null(v->bx);
        for (size_t b = 0; b < v->nb; b++)
            wide += v->by[b + 1] + 1 - v->by[b] > 4;
        size_t nq = 200001 + 20000 + 3 * v->n;
        for (size_t q = 0; q < nq; q++) {
            double y;
            if (q < 200001)
                y = (double)q / 200000.0;
            else if (q < 220001)
                y = gsl_rng_uniform(g);
            else
                y = v->ys[(q - 220001) / 3];
            if (q >= 220001 && (q - 220001) % 3 == 1)
                y = nextafter(y, 0.0);
            else if (q >= 220001 && (q - 220001) % 3 == 2)
                y = nextafter(y, 1.0);
            if (!(y >= 0.0 && y <= 1.0))
                continue;
            double x1 = -1, s1 = -1, x2 = -1, s2 = -1;
            int r1 = vle_herm_invert_slope_inline(v, y, &x1, &s1);
            int r2 = stages_table_xstar_slope(v, y, &x2, &s2);
            assert_int_equal(r1, r2);
            if (r1 != STAGECAL_OK)
                continue;
            assert_memory_equal(&x1, &x2, sizeof x1);
            assert_memory_equal(&s1, &s2, sizeof s1);
        }
    }
    assert_true(wide > 0); /* the crowded table has buckets of more than four nodes */
    for (int im = 0; im < 4; im++)
        stagecal_vle_free(models[im]);
    gsl_rng_free(g);
}

/* A row for the table models' batch drawn over what the stepping meets: xD mostly in [0.05,
 * 0.88], else at the azeotrope az (±0.002; az < 0: none), in [0.88, 0.999] or in [0.001,
 * 0.051]; R log-uniform on [0.1, 10^6], ∞ one row in 33, exactly 0.1 or 10^6 one in 100 each; xB
 * where 1 to 30 stages reach at R (±1 %: some rows pinched at x_target or on the way),
 * log-uniform on [10^-12·xD, xD], near 0 (10^-15 to 10^-6), or just below xD (pinches). */
static void random_table_row(gsl_rng *g, const stagecal_vle *v, double az, double *xd, double *xb,
                             double *r)
{
    double u = gsl_rng_uniform(g), w = gsl_rng_uniform(g), c = gsl_rng_uniform(g);
    if (u < 0.6)
        *xd = 0.05 + 0.83 * gsl_rng_uniform(g);
    else if (u < 0.75 && az > 0.0)
        *xd = az + 0.004 * (gsl_rng_uniform(g) - 0.5);
    else if (u < 0.9)
        *xd = 0.88 + 0.119 * gsl_rng_uniform(g);
    else
        *xd = 0.001 + 0.05 * gsl_rng_uniform(g);
    *r = w < 0.03   ? INFINITY
         : w < 0.04 ? 0.1
         : w < 0.05 ? 1e6
                    : pow(10.0, -1.0 + 7.0 * gsl_rng_uniform(g));
    if (c < 0.4) {
        double stages = 1.0 + 29.0 * gsl_rng_uniform(g), b = NAN;
        size_t len;
        int status;
        stagecal_stages_step(v, *xd, *r, stages, 1.0, NULL, &b, NULL, 0, &len, &status, NULL);
        *xb = (status == STAGECAL_STAGES_OK ? b : 0.5 * *xd) *
              (1.0 + 0.02 * (gsl_rng_uniform(g) - 0.5));
    } else if (c < 0.7) {
        *xb = *xd * pow(10.0, -12.0 * gsl_rng_uniform(g));
    } else if (c < 0.85) {
        *xb = pow(10.0, -15.0 + 9.0 * gsl_rng_uniform(g));
    } else {
        *xb = *xd * (1.0 - 0.05 * gsl_rng_uniform(g));
    }
}

/* stages_invert_many_quiet and stagecal_stages_invert_many on the table models at E_MV = 1 with
 * tangents (stages_tab.c: the stepping phase in the AVX2 lanes where the processor has them,
 * stages_tab_avx2.c, else the scalar loop) give each row what stages_invert_quiet and
 * stagecal_stages_invert give it, bit for bit (numbers, status, reason, return value, first
 * error): 10^5 rows of random_table_row (GSL mt19937, seed 43) on NRTL ethanol–water and 2·10^4
 * on each invented table, all in one call (blocks of 128 rows inside), the first 10^4 also
 * through the non-quiet call. Tolerance: none (each lane the scalar IEEE operations;
 * -ffp-contract=off). Source: the per-row call (an equivalence, no outside source). Fails, for
 * instance, with the kernel's y_n derivative lacking the + ∂b term, with the Hermite start's
 * (1 − b)·t written (1 − a)·t, with the bucket range's four-node limit dropped (the crowded
 * table's rows then take a wrong segment), or with a lane's own search (wide bucket: NRTL near its
 * azeotrope) or Newton (vle_seg_invert: the 9-point table) skipped. */
static void tangent_table_rows_random_same_bits(void **state)
{
    (void)state;
    stagecal_vle *models[4];
    table_models(models);
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 43);
    size_t cap = 100000;
    double *xd = malloc(cap * sizeof *xd), *xb = malloc(cap * sizeof *xb),
           *r = malloc(cap * sizeof *r);
    stagecal_stages_result *many = malloc(cap * sizeof *many);
    int *rc = malloc(cap * sizeof *rc);
    assert_true(xd && xb && r && many && rc);
    stagecal_stages_params par = stagecal_stages_default_params();
    par.want_sensitivities = 1;
    for (int im = 0; im < 4; im++) {
        stagecal_vle *v = models[im];
        double az = -1.0;
        stagecal_vle_azeotropes(v, &az, 1);
        size_t n = im == 0 ? cap : 20000, count[4] = {0, 0, 0, 0}, big_r = 0, long_rows = 0;
        for (size_t i = 0; i < n; i++)
            random_table_row(g, v, az, &xd[i], &xb[i], &r[i]);
        stagecal_error em, e1;
        memset(many, 0xaa, n * sizeof *many);
        int rm = stages_invert_many_quiet(v, n, xd, xb, r, 1.0, &par, many, rc, &em), first = 0;
        for (size_t i = 0; i < n; i++) {
            stagecal_stages_result one;
            int r1 = stages_invert_quiet(v, xd[i], xb[i], r[i], 1.0, &par, &one, &e1);
            if (r1 && !first) {
                first = r1;
                assert_string_equal(e1.text, em.text);
            }
            assert_same_result(&one, &many[i]);
            assert_int_equal(rc[i], r1);
            count[one.status]++;
            big_r += one.status == STAGECAL_STAGES_OK && r[i] >= 1e4;
            long_rows += one.status == STAGECAL_STAGES_OK && one.stages > 10.0;
        }
        assert_int_equal(rm, first);
        size_t m = 10000;
        memset(many, 0xaa, m * sizeof *many);
        rm = stagecal_stages_invert_many(v, m, xd, xb, r, 1.0, &par, many, &em);
        first = 0;
        for (size_t i = 0; i < m; i++) {
            stagecal_stages_result one;
            int r1 = stagecal_stages_invert(v, xd[i], xb[i], r[i], 1.0, &par, &one, &e1);
            if (r1 && !first) {
                first = r1;
                assert_string_equal(e1.text, em.text);
            }
            assert_same_result(&one, &many[i]);
        }
        assert_int_equal(rm, first);
        /* the rows reach every end: counted, pinched, long, at large R */
        assert_true(count[STAGECAL_STAGES_OK] > n / 10);
        assert_true(count[STAGECAL_STAGES_PINCH] > n / 20);
        assert_true(long_rows > n / 50);
        assert_true(big_r > n / 50);
    }
    for (int im = 0; im < 4; im++)
        stagecal_vle_free(models[im]);
    free(xd), free(xb), free(r), free(many), free(rc);
    gsl_rng_free(g);
}

/* What the four-lane kernel did with a block: rows that stepped, ended, crossed. */
typedef struct {
    size_t stepping, ended, crossed;
} step4_count;

/* One block through stages_tab_step4 and each stepping row through the reference, tab_step's loop
 * written out here (y = m·x_(n−1) + b, the table's x*(y) and slope from stages_table_xstar_slope,
 * step_tangent at E = 1, the same expressions): a row the kernel ends as crossed must have a
 * tab_cross with the reference's n, x_(n−1), x_n and y_n with their derivatives, and m, b,
 * x_target as beg has them, bit for bit; a row it ends as TAB_REST one the reference gives −1;
 * a row it leaves, TAB_STEPS; other rows' marks untouched. */
static void step4_block(const stagecal_vle *v, size_t capn, const tab_begin *beg, size_t nb,
                        const signed char *mark0, step4_count *c)
{
    tab_cross cr[128];
    signed char mark[128];
    assert_true(nb <= 128);
    memcpy(mark, mark0, nb);
    size_t nc = stages_tab_step4(v, capn, nb, beg, mark, cr), nmarked = 0;
    for (size_t i = 0; i < nb; i++) {
        nmarked += mark[i] == TAB_CROSSED;
        if (mark0[i] != TAB_STEPS) {
            assert_int_equal(mark[i], mark0[i]);
            continue;
        }
        c->stepping++;
        if (mark[i] == TAB_STEPS)
            continue;
        c->ended++;
        const tab_begin *b0 = &beg[i];
        double xp[4], xn[4], yn[4];
        memcpy(xp, b0->txd, sizeof xp);
        size_t n = 0;
        int end = 0;
        while (!end) {
            double y = b0->m[0] * xp[0] + b0->b[0], x, s;
            n++;
            if (!(y >= 0.0 && y <= 1.0) || stages_table_xstar_slope(v, y, &x, &s) != STAGECAL_OK ||
                !(x < xp[0])) {
                end = -1;
                break;
            }
            double e = 1.0, den = (1.0 - e) * b0->m[0] + e * s;
            yn[0] = b0->m[0] * xp[0] + b0->b[0];
            xn[0] = x;
            for (int k = 1; k < 4; k++) {
                yn[k] = (b0->m[k] * xp[0] + b0->m[0] * xp[k]) + b0->b[k];
                xn[k] = (yn[k] - (1.0 - e) * (x * b0->m[k] + b0->b[k])) / den;
            }
            if (x <= b0->txt[0])
                end = 1;
            else if (n >= capn)
                end = -1;
            else
                memcpy(xp, xn, sizeof xp);
        }
        if (end < 0) {
            assert_int_equal(mark[i], TAB_REST);
            continue;
        }
        assert_int_equal(mark[i], TAB_CROSSED);
        c->crossed++;
        const tab_cross *e = NULL;
        for (size_t k = 0; k < nc; k++)
            if (cr[k].i == i) {
                assert_null(e); /* once */
                e = &cr[k];
            }
        assert_non_null(e);
        assert_int_equal(e->n, n);
        assert_memory_equal(e->x_prev, xp, sizeof xp);
        assert_memory_equal(e->xn, xn, sizeof xn);
        assert_memory_equal(e->yn, yn, sizeof yn);
        assert_memory_equal(e->m, b0->m, sizeof e->m);
        assert_memory_equal(e->b, b0->b, sizeof e->b);
        assert_memory_equal(e->x_target, b0->txt, sizeof e->x_target);
    }
    assert_int_equal(nc, nmarked);
}

/* The stepping phase's four-lane kernel (stages_tab_step4, stages_tab_avx2.c) on its own, block by
 * block (step4_block: each ended row against tab_step's loop, bit for bit): 2·10^4 rows a model of
 * random_table_row (GSL mt19937, seed 47; each row's start from stages_table_begin) on the four
 * models of table_models, and one-stage rows made by hand whose first query is y at each node
 * value of the table's branch, at each bucket's lower edge b·y_top/nb, and up to 4 ulps either
 * side of each (x_(n−1) = 1, m = 1/2 and b = y − 1/2 with derivatives (0.3, −0.2, 0.7) and (1, 0.5,
 * −0.25), x_target 2 or, every other row, the x*(y) of that first query: the lanes' uncommon
 * cases — the exact locate, x at a segment's end — and the crossing test at equality). With
 * AVX2 the kernel ends every row that steps (crossed, or marked for stages_invert); without, none.
 * Tolerance: none (each lane the scalar IEEE operations; -ffp-contract=off). Source: tab_step's
 * operations (an equivalence, no outside source). Fails, for instance, with the crossing test
 * x_n <= x_target written <, with the tangent's division by y*' replaced by the reciprocal's
 * product, with the 4-node limit of a bucket's range dropped, or with a lane's own search
 * (wide bucket), Newton (vle_seg_invert) or slope (vle_herm_deriv) skipped. */
static void tangent_table_step4_same_bits(void **state)
{
    (void)state;
    stagecal_vle *models[4];
    table_models(models);
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 47);
    stagecal_stages_params par = stagecal_stages_default_params();
    par.want_sensitivities = 1;
    size_t capn = par.max_stages < par.pinch_scan_after ? par.max_stages : par.pinch_scan_after;
    int avx2 = stages_have_avx2();
    for (int im = 0; im < 4; im++) {
        stagecal_vle *v = models[im];
        double az = -1.0;
        stagecal_vle_azeotropes(v, &az, 1);
        step4_count c = {0, 0, 0}, h = {0, 0, 0};
        tab_begin beg[128];
        signed char mark0[128];
        for (size_t blk = 0; blk < 20000 / 128; blk++) {
            for (size_t i = 0; i < 128; i++) {
                double xd, xb, r;
                random_table_row(g, v, az, &xd, &xb, &r);
                stagecal_stages_result rr;
                int rc;
                mark0[i] = stages_table_begin(v, xd, xb, r, &par, 1, &rr, &beg[i], &rc) ? TAB_STEPS
                                                                                        : TAB_DONE;
            }
            step4_block(v, capn, beg, 128, mark0, &c);
        }
        /* the hand-made rows: y at the nodes and the buckets' edges, and up to 4 ulps either side
         */
        size_t nq = 9 * (v->iend + 1 + v->nb), nb = 0;
        for (size_t q = 0; q < nq; q++) {
            size_t k = q / 9;
            double y =
                k <= v->iend ? v->ys[k] : (double)(k - v->iend - 1) * v->ytop / (double)v->nb;
            for (int j = (int)(q % 9) - 4; j; j += j < 0 ? 1 : -1)
                y = nextafter(y, j < 0 ? 0.0 : 2.0);
            tab_begin *b0 = &beg[nb];
            const double m[4] = {0.5, 0.3, -0.2, 0.7}, bb[4] = {y - 0.5, 1.0, 0.5, -0.25};
            double x1[4] = {1.0, 1.0, 0.0, 0.0}, xt[4] = {2.0, 0.0, 1.0, 0.0}, sl;
            if (q % 2 && y >= 0.0 && y <= 1.0) /* x_target at x*(y) itself: crossed, at equality */
                stages_table_xstar_slope(v, 0.5 * 1.0 + (y - 0.5), &xt[0], &sl);
            memcpy(b0->m, m, sizeof m);
            memcpy(b0->b, bb, sizeof bb);
            memcpy(b0->txd, x1, sizeof x1);
            memcpy(b0->txt, xt, sizeof xt);
            mark0[nb++] = TAB_STEPS;
            if (nb == 128 || q + 1 == nq) {
                step4_block(v, capn, beg, nb, mark0, &h);
                nb = 0;
            }
        }
        if (!avx2) {
            assert_int_equal(c.ended + h.ended, 0);
            continue;
        }
        assert_int_equal(c.ended, c.stepping); /* every stepping row ended in the lanes */
        assert_int_equal(h.ended, h.stepping);
        assert_true(c.crossed > c.stepping / 3);
        assert_true(h.crossed > h.stepping / 2);
    }
    if (!avx2)
        fprintf(stderr, "tangent_table_step4_same_bits: no AVX2 here, the kernel takes no row\n");
    for (int im = 0; im < 4; im++)
        stagecal_vle_free(models[im]);
    gsl_rng_free(g);
}

/* Run-log mode (runlog_invert.c, which inverts the plain rows of a block together with
 * stages_invert_many_quiet) gives each row the count and derivatives stagecal_stages_invert
 * gives it, bit for bit: an α = 2.5 log of 1 000 rows (several blocks and a part of one;
 * invented: xD falling 0.95 → 0.90, xB pseudo-random in (0.05, 0.65), R = 4) with rows the
 * batch must leave to the per-row path (a blank xD, xB or R, R = 0, xB above xD, a censored
 * xB, a pinch at a low xB, a run at total reflux) spread through it. Tolerance: none (the
 * same doubles). Source: the per-row call and u(N)'s definition (runlog_invert.c header) with
 * the column's u (an equivalence, no outside source). */
static void tangent_runlog_rows_same_as_per_row(void **state)
{
    (void)state;
    stagecal_column col;
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(col.system.vle);
    col.system.p_pa = 101325;
    col.diameter_m = 0.30;
    col.u.xd = 0.002;
    col.u.xb = 0.005;
    col.u.r_rel = 0.03;
    size_t n = 1000, cap = 64 * n, len = 0;
    char *csv = malloc(cap);
    assert_non_null(csv);
    len += (size_t)snprintf(csv, cap, "run,time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-]\n");
    unsigned long h = 12345;
    for (size_t i = 0; i < n; i++) {
        h = h * 6364136223846793005ul + 1442695040888963407ul; /* (Knuth's MMIX LCG) */
        double xd = 0.95 - 0.05 * (double)(i % 500) / 500.0;
        double xb = 0.05 + 0.6 * (double)(h >> 11) / 9007199254740992.0;
        char sxd[32], sxb[32], sr[32] = "4";
        snprintf(sxd, sizeof sxd, "%.6f", xd);
        snprintf(sxb, sizeof sxb, "%.6f", xb);
        switch (i % 61) {
        case 7:
            sxd[0] = '\0';
            break;
        case 11:
            sxb[0] = '\0';
            break;
        case 13:
            sr[0] = '\0';
            break;
        case 17:
            snprintf(sr, sizeof sr, "0");
            break;
        case 19:
            snprintf(sxb, sizeof sxb, "%.6f", xd + 0.01);
            break;
        case 23:
            snprintf(sxb, sizeof sxb, "<0.1");
            break;
        case 29:
            snprintf(sxb, sizeof sxb, "0.001");
            break;
        default:
            break;
        }
        /* the second run at total reflux: W constant */
        double w = i >= 500 && i < 600 ? 9.0 : 10.0 - 2.0 * (double)(i % 500) / 500.0;
        len += (size_t)snprintf(csv + len, cap - len, "r%zu,%.4f,%.4f,%s,%s,%s\n", i / 500,
                                0.01 * (double)(i % 500), w, sxd, sxb, sr);
    }
    stagecal_runlog *log = stagecal_runlog_alloc();
    assert_non_null(log);
    assert_int_equal(stagecal_runlog_read_buffer(log, csv, len, "t.csv", &col, NULL, NULL, NULL),
                     STAGECAL_OK);
    assert_int_equal(log->n, n);
    stagecal_runlog_result res;
    assert_int_equal(stagecal_runlog_analyse(log, &col, NULL, &res, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_runlog_invert(log, &col, 1.0, NULL, &res, NULL), STAGECAL_OK);
    stagecal_stages_params par = stagecal_stages_default_params();
    par.want_sensitivities = 1;
    size_t ok = 0, total = 0, other = 0;
    for (size_t i = 0; i < n; i++) {
        double xd = log->xd[i], xb = log->xb[i], r = log->r[i];
        if (isnan(xd) || isnan(xb) || isnan(r) || r == 0 || xd < xb ||
            log->xb_cens[i] != STAGECAL_CENSOR_NONE) {
            other++;
            assert_int_not_equal(res.status[i], STAGECAL_STAGES_OK);
            continue;
        }
        if (res.flags[i] & STAGECAL_SAMPLE_TOTAL_REFLUX)
            r = INFINITY, total++;
        stagecal_stages_result one;
        assert_int_equal(stagecal_stages_invert(col.system.vle, xd, xb, r, 1.0, &par, &one, NULL),
                         STAGECAL_OK);
        assert_int_equal(res.status[i], one.status);
        if (one.status != STAGECAL_STAGES_OK)
            continue;
        ok++;
        double ur = isinf(r) ? 0.0 : 0.03 * r;
        double a = one.dstages_dxd * 0.002, b = one.dstages_dxb * 0.005;
        double c = one.dstages_dr * one.dstages_dr * (ur * ur);
        const double got[4] = {res.stages[i], res.u_stages[i], res.dn_dxd[i], res.dn_dxb[i]};
        const double want[4] = {one.stages, sqrt(a * a + b * b + c), one.dstages_dxd,
                                one.dstages_dxb};
        assert_memory_equal(got, want, sizeof got);
    }
    assert_true(ok > n / 2);
    assert_true(total > 50 && other > 80);
    assert_true(ok + 20 < n - other); /* some pinches */
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
    free(csv);
    stagecal_vle_free(col.system.vle);
}

/* The start of the table rows (stages_start_avx2.c): why a row does not step plainly, from
 * what the reference (invert_begin, stages_table_begin) does with it and the table's buckets. */
enum {
    SC_PLAIN, /* steps; every table query on the common branch */
    SC_INPUT, /* reject_inputs: NaN, out of range, xB ≥ xD, R ≤ 0, an azeotrope at or below xD */
    SC_RINF,  /* steps at R = ∞ */
    SC_ABOVE, /* x_target above xD + top_tol: invalid */
    SC_TOP,   /* x_target in [xD, xD + top_tol]: one stage, the pot */
    SC_LOW,   /* x_target ≤ 0: pinch */
    SC_PINCH, /* the line at or above the curve at x_target: pinch */
    SC_WIDE,  /* steps; xB's or x_target's bucket searches more than four nodes */
    SC_NCAT
};

/* The bucket of x in [0, 1) searches more than four nodes (vle_locate_x's range). */
static int start_wide(const stagecal_vle *v, double x)
{
    size_t b = (size_t)(x * (double)v->nb);
    return b < v->nb && v->bx[b + 1] + 1 - v->bx[b] > 4;
}

/* x at the next node of the interval vle_locate_x finds (the node value's branch). */
static int start_node(const stagecal_vle *v, double x)
{
    return x >= 0.0 && x < 1.0 && x == v->xs[vle_locate_x(v, x) + 1];
}

/* One row through the reference, stages_start1 and stages_start4 (in lane row % 4 of four
 * copies of the row's neighbours): the bits and, for a row taken, every double. Returns the
 * row's category. */
static int start_check(const stages_start_ctx *c, const stagecal_stages_params *par,
                       const double *xd, const double *xb, const double *r, size_t i, size_t *nodes)
{
    const stagecal_vle *v = c->vle;
    stagecal_stages_result res;
    memset(&res, 0x55, sizeof res);
    tab_begin ref, o1, o4[4];
    int rc = -1;
    int go = stages_table_begin(v, xd[i], xb[i], r[i], par, 0, &res, &ref, &rc);
    int cat;
    if (go) {
        assert_int_equal(rc, STAGECAL_OK);
        assert_int_equal(res.status, STAGECAL_STAGES_OK);
        /* invert_begin leaves all zero but status, lv and x_target */
        const double rest[5] = {res.stages, res.column_stages, res.dstages_dxd, res.dstages_dxb,
                                res.dstages_dr};
        const double zeros[5] = {0.0, 0.0, 0.0, 0.0, 0.0};
        assert_memory_equal(rest, zeros, sizeof rest);
        assert_memory_equal(&res.lv, &ref.m[0], sizeof res.lv);
        assert_memory_equal(&res.x_target, &ref.txt[0], sizeof res.x_target);
        assert_string_equal(res.reason, "");
        if (isinf(r[i]))
            cat = SC_RINF;
        else if (start_wide(v, xb[i]) || start_wide(v, ref.txt[0]))
            cat = SC_WIDE;
        else
            cat = SC_PLAIN;
        *nodes += start_node(v, xb[i]) || start_node(v, ref.txt[0]);
    } else {
        assert_int_equal(rc, STAGECAL_OK);
        if (strstr(res.reason, "pot alone out-performs"))
            cat = SC_ABOVE;
        else if (res.status == STAGECAL_STAGES_OK)
            cat = SC_TOP, assert_true(res.stages == 1.0);
        else if (strstr(res.reason, "reaches the pot vapour"))
            cat = SC_LOW;
        else if (strstr(res.reason, "meets the equilibrium curve above"))
            cat = SC_PINCH;
        else
            cat = SC_INPUT;
    }
    int want1 = go && !isinf(r[i]);
    int want4 =
        c->avx2 ? want1 && cat == SC_PLAIN && !start_node(v, xb[i]) && !start_node(v, ref.txt[0])
                : want1;
    /* each taken row's doubles and result the reference's, bit for bit (the result's bytes:
     * invert_begin zeroes it first); a row not taken leaves its result untouched */
    stagecal_stages_result r1, r4[4], untouched;
    memset(&r1, 0xaa, sizeof r1);
    memset(r4, 0xaa, sizeof r4);
    memset(&untouched, 0xaa, sizeof untouched);
    assert_int_equal(stages_start1(c, xd[i], xb[i], r[i], &o1, &r1), want1);
    assert_memory_equal(&r1, want1 ? &res : &untouched, sizeof r1);
    if (want1)
        assert_memory_equal(&o1, &ref, sizeof ref);
    size_t i0 = i - i % 4;
    unsigned on = stages_start4(c, xd + i0, xb + i0, r + i0, o4, r4);
    assert_int_equal(on >> (i % 4) & 1u, (unsigned)want4);
    assert_memory_equal(&r4[i % 4], want4 ? &res : &untouched, sizeof r1);
    if (want4)
        assert_memory_equal(&o4[i % 4], &ref, sizeof ref);
    return cat;
}

/* Rows whose x_target lands within rounding of xD (xB = x*(xD), so y*(xB) = xD, moved by up to
 * 40 ulps): x_target just above xD + top_tol, in [xD, xD + top_tol], just below. */
static void start_top_rows(gsl_rng *g, const stagecal_vle *v, size_t n, double *xd, double *xb,
                           double *r)
{
    for (size_t i = 0; i < n; i++) {
        xd[i] = 0.4 + 0.45 * gsl_rng_uniform(g);
        r[i] = 0.5 + 8.0 * gsl_rng_uniform(g);
        double x = NAN;
        stagecal_vle_xstar(v, xd[i], &x);
        int k = (int)(gsl_rng_uniform_int(g, 81)) - 40;
        for (; k > 0; k--)
            x = nextafter(x, 1.0);
        for (; k < 0; k++)
            x = nextafter(x, 0.0);
        xb[i] = x;
    }
}

/* The start of the table rows four at a time (stages_start4: the AVX2 lanes, gathers for the
 * table) and one at a time (stages_start1) gives exactly what invert_begin gives a row that steps
 * — m, b, xD, x_target with their tangents, and the result invert_begin leaves (checked against
 * stages_table_begin, the batch's reference) — and takes exactly the rows that step plainly: on
 * NRTL ethanol–water at 101.325 kPa (the bench's model), a table of 9 invented points and one of
 * 26 invented points with 13 crowded into x in [0.3, 0.306] (a bucket of more than four nodes),
 * about 2.6·10^5 rows (four at a time): the bench's 10^5 rows (bench_invert.c's generator, GSL
 * mt19937, seed 1), table_row's (seed 43) with its edge cases, rows with x_target within rounding
 * of xD, and every row of the demo logs (xD, xB, R) on each model; and stagecal_stages_invert_many
 * on them gives what stagecal_stages_invert gives each row. Every category of start_check is hit
 * (counted and asserted); x at a node (the table query's other branch) is not reached below x = 1
 * (the buckets end at the node below x), counted and kept out. Tolerance: none (each lane is the
 * scalar IEEE operation; -ffp-contract=off). Source: invert_begin, the per-row path (an
 * equivalence, no outside source). Mutations of stages_start_avx2.c that fail here: the slope's
 * 3.0 * s * g.c3 as s * (3.0 * g.c3), dropping ~(xt >= xd) or the bucket width test, the pinch
 * test as < instead of <=. */
static void tangent_table_start_same_bits(void **state)
{
    (void)state;
    const stagecal_antoine ew[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    const double tx[9] = {0.05, 0.1, 0.2, 0.35, 0.5, 0.65, 0.8, 0.9, 0.97};
    const double ty[9] = {0.15, 0.26, 0.43, 0.6, 0.72, 0.82, 0.9, 0.95, 0.985};
    double cx[26], cy[26];
    for (int k = 0; k < 26; k++) { /* α = 2.5's curve; 13 nodes in [0.3, 0.306] */
        double x = k < 5    ? 0.05 + 0.06 * k
                   : k < 18 ? 0.3 + 0.0005 * (k - 5)
                            : 0.35 + 0.08 * (k - 18);
        cx[k] = x;
        cy[k] = 2.5 * x / (1.0 + 1.5 * x);
    }
    stagecal_vle *models[3] = {
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, p, 5, 101325.0, NULL, NULL),
        stagecal_vle_alloc_table(tx, ty, NULL, 9, NULL),
        stagecal_vle_alloc_table(cx, cy, NULL, 26, NULL)};
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    size_t cap = 100000 + 60000 + 8000 + 6000;
    double *xd = malloc(cap * sizeof *xd), *xb = malloc(cap * sizeof *xb),
           *r = malloc(cap * sizeof *r);
    stagecal_stages_result *many = malloc(cap * sizeof *many);
    assert_true(xd && xb && r && many);
    size_t count[SC_NCAT] = {0}, nodes = 0, total = 0;
    for (int im = 0; im < 3; im++) {
        stagecal_vle *v = models[im];
        assert_non_null(v);
        assert_int_equal(stages_many_by_table(v, 1.0), 1);
        size_t n = 0;
        if (im == 0) { /* bench_invert.c's rows */
            gsl_rng_set(g, 1);
            for (size_t i = 0; i < 100000; i++, n++) {
                double d = 0.80 - 0.10 * (double)(i % 1000) / 1000.0, b = NAN;
                size_t len;
                int status;
                stagecal_stages_step(v, d, 4.0, 5.0, 1.0, NULL, &b, NULL, 0, &len, &status, NULL);
                xd[n] = d + gsl_ran_gaussian(g, 0.002);
                xb[n] = b + gsl_ran_gaussian(g, 0.005);
                r[n] = 4.0;
            }
        }
        gsl_rng_set(g, 43);
        for (size_t i = 0; i < (im == 0 ? 60000u : 30000u); i++, n++)
            table_row(g, v, i, &xd[n], &xb[n], &r[n]);
        start_top_rows(g, v, 8000, xd + n, xb + n, r + n);
        n += 8000;
        for (int year = 2025; year <= 2026; year++) /* the demo logs' rows */
            for (int month = 1; month <= 12; month++) {
                char path[512], line[1024];
                snprintf(path, sizeof path, "%s/demo/logs/%d-%02d.csv", STAGECAL_DATASETS, year,
                         month);
                FILE *f = fopen(path, "r");
                if (!f)
                    continue;
                assert_non_null(fgets(line, sizeof line, f));
                int ixd = header_index(line, "xD"), ixb = header_index(line, "xB"),
                    ir = header_index(line, "R");
                while (n < cap && fgets(line, sizeof line, f)) {
                    xd[n] = cell(line, ixd), xb[n] = cell(line, ixb), r[n] = cell(line, ir);
                    n++;
                }
                fclose(f);
            }
        stagecal_stages_params par = stagecal_stages_default_params();
        par.want_sensitivities = 1;
        stages_start_ctx c;
        stages_start_prep(v, &par, &c);
        size_t n4 = n - n % 4;
        for (size_t i = 0; i < n4; i++)
            count[start_check(&c, &par, xd, xb, r, i, &nodes)]++;
        total += n4;
        /* the batch against the per-row call */
        stagecal_error em;
        memset(many, 0xaa, n * sizeof *many);
        int rm = stagecal_stages_invert_many(v, n, xd, xb, r, 1.0, &par, many, &em);
        assert_int_equal(rm, STAGECAL_OK);
        for (size_t i = 0; i < n; i++) {
            stagecal_stages_result one;
            assert_int_equal(stagecal_stages_invert(v, xd[i], xb[i], r[i], 1.0, &par, &one, NULL),
                             STAGECAL_OK);
            assert_same_result(&one, &many[i]);
        }
    }
    print_message("table start: %zu rows; plain %zu, inputs %zu, R = inf %zu, x_target above xD "
                  "%zu, at xD %zu, <= 0 %zu, pinch %zu, wide bucket %zu; at a node %zu\n",
                  total, count[SC_PLAIN], count[SC_INPUT], count[SC_RINF], count[SC_ABOVE],
                  count[SC_TOP], count[SC_LOW], count[SC_PINCH], count[SC_WIDE], nodes);
    assert_true(total >= 100000);
    for (int k = 0; k < SC_NCAT; k++)
        assert_true(count[k] >= 20);
    assert_true(count[SC_PLAIN] > total / 2);
    assert_int_equal(nodes, 0);
    for (int im = 0; im < 3; im++)
        stagecal_vle_free(models[im]);
    free(xd), free(xb), free(r), free(many);
    gsl_rng_free(g);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(tangent_closed_form_equals_stepping),
        cmocka_unit_test(tangent_closed_form_on_demo_logs),
        cmocka_unit_test(tangent_matches_high_precision),
        cmocka_unit_test(tangent_matches_finite_differences),
        cmocka_unit_test(tangent_at_whole_stages),
        cmocka_unit_test(tangent_avx2_same_bits),
        cmocka_unit_test(tangent_four_rows_same_bits),
        cmocka_unit_test(tangent_many_same_as_per_row),
        cmocka_unit_test(tangent_runlog_rows_same_as_per_row),
        cmocka_unit_test(tangent_table_rows_same_as_per_row),
        cmocka_unit_test(tangent_table_inverse_same_bits),
        cmocka_unit_test(tangent_table_start_same_bits),
        cmocka_unit_test(tangent_table_rows_random_same_bits),
        cmocka_unit_test(tangent_table_step4_same_bits),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
