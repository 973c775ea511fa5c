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
#include <gsl/gsl_rng.h>

#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "testutil.h"
/* after every system header: banned.h redefines libc names */
#include "stages_internal.h"
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

/* Column `name` (prefix of a header cell) of a CSV header line, or −1. */
static int header_index(const char *header, const char *name)
{
    int idx = 0;
    for (const char *p = header; *p; idx++) {
        if (strncmp(p, name, strlen(name)) == 0 && p[strlen(name)] == '[')
            return idx;
        p = strchr(p, ',');
        if (!p)
            break;
        p++;
    }
    return -1;
}

/* Cell idx of a CSV line as a number (NaN when empty or not a number). */
static double cell(const char *line, int idx)
{
    const char *p = line;
    for (int i = 0; i < idx && p; i++) {
        p = strchr(p, ',');
        if (p)
            p++;
    }
    if (!p || *p == ',' || *p == '\n' || *p == '\0')
        return NAN;
    char *end;
    double v = strtod(p, &end);
    return end == p ? NAN : v;
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

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(tangent_closed_form_equals_stepping),
        cmocka_unit_test(tangent_closed_form_on_demo_logs),
        cmocka_unit_test(tangent_matches_high_precision),
        cmocka_unit_test(tangent_matches_finite_differences),
        cmocka_unit_test(tangent_at_whole_stages),
        cmocka_unit_test(tangent_avx2_same_bits),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
