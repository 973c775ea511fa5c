/*
 * test_edges.c — numerical edges of the stages and vle modules (issue 8): α → 1,
 * xD → 1, xB → 0, R → 0 and R → ∞, E_MV → 0, stage counts in the thousands (and a run
 * log's warm-up over a vanishing sample spacing). What is
 * checked: every call returns (bounded iterations: max_stages, the pinch scan, the
 * bracketed inner solve), no NaN or ±inf reaches a result, and a case that has no
 * stage count says so with a status and a reason. Where a closed form exists the
 * value is checked against it:
 *   Fenske, N = ln[(xD/(1 − xD))·((1 − xB)/xB)] / ln α, pot included, exact for
 *   constant α at total reflux (Fenske 1932, "Fractionation of straight-run Pennsylvania gasoline",
 * Ind. Eng. Chem. 24, citation from memory; docs/methods.md "Stage counting" makes the fractional
 * count equal to it); Smoker's count tends to Fenske's from above as R → ∞ (Smoker 1938, "Analytic
 * determination of plates in fractionating columns", Trans. AIChE 34, citation from memory).
 */
#include <float.h>
#include <gsl/gsl_errno.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>
#include <cmocka.h>

#include "stagecal/runlog.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "testutil.h"

static int group_setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* Fenske's count (pot included), Fenske 1932, from the same doubles the library gets. */
static double fenske(double alpha, double xd, double xb)
{
    return log((xd / (1.0 - xd)) * ((1.0 - xb) / xb)) / log(alpha);
}

/* Everything an inversion result must satisfy whatever the input: finite fields, a
 * status in range, stages ≥ 1 when ok, 0 and a reason otherwise. */
static void check_result_sane(const stagecal_stages_result *r, const char *label)
{
    char msg[256];
    snprintf(msg, sizeof msg, "%s: status %d in range", label, r->status);
    assert_true(r->status >= STAGECAL_STAGES_OK && r->status <= STAGECAL_STAGES_INVALID);
    const double v[] = {r->stages,      r->column_stages, r->lv,        r->x_target,
                        r->dstages_dxd, r->dstages_dxb,   r->dstages_dr};
    for (size_t i = 0; i < sizeof v / sizeof v[0]; i++) {
        if (!isfinite(v[i]))
            print_error("%s: field %zu is %g\n", label, i, v[i]);
        assert_true(isfinite(v[i]));
    }
    if (r->status == STAGECAL_STAGES_OK) {
        assert_true(r->stages >= 1.0);
        assert_abs(r->column_stages, r->stages - 1.0, 1e-12, msg);
    } else {
        assert_true(r->stages == 0.0);
        if (r->reason[0] == '\0')
            print_error("%s: status %s without a reason\n", label,
                        stagecal_stages_status_name(r->status));
        assert_true(r->reason[0] != '\0');
    }
}

/* Inverts and checks sanity; returns the library's return code. */
static int invert(const stagecal_vle *vle, double xd, double xb, double r, double e,
                  stagecal_stages_result *res, const char *label)
{
    stagecal_error err;
    memset(res, 0, sizeof *res);
    int rc = stagecal_stages_invert(vle, xd, xb, r, e, NULL, res, &err);
    if (rc == STAGECAL_OK)
        check_result_sane(res, label);
    else
        assert_true(err.text[0] != '\0'); /* an error always carries its message */
    return rc;
}

/* α → 1 with a reachable separation: α = 1.001 at total reflux needs ~3800 stages. */
static void edges_alpha_near_one_thousands_of_stages(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(1.001, NULL);
    assert_non_null(vle);
    stagecal_stages_result res;
    assert_int_equal(invert(vle, 0.95, 0.30, INFINITY, 1.0, &res, "alpha 1.001"), STAGECAL_OK);
    assert_int_equal(res.status, STAGECAL_STAGES_OK);
    double want = fenske(1.001, 0.95, 0.30); /* ≈ 3793, Fenske 1932 */
    assert_true(want > 3000.0);
    /* 1e-9 relative: ~3800 steps, each a few roundings of ~1e-16 relative, plus the
     * 1/ln(α) ≈ 1000 amplification of the fractional step's rounding. */
    assert_rel(res.stages, want, 1e-9, "alpha 1.001: stages vs Fenske");

    /* Forward stepping of that count lands on the same xB (docs/methods.md "Stage counting": round
     * trip). */
    double xb = 0.0;
    size_t len = 0;
    int status = -1;
    assert_int_equal(stagecal_stages_step(vle, 0.95, INFINITY, res.stages, 1.0, NULL, &xb, NULL, 0,
                                          &len, &status, NULL),
                     STAGECAL_OK);
    assert_int_equal(status, STAGECAL_STAGES_OK);
    /* 1e-9 absolute in xB: docs/methods.md "Stage counting" round-trip tolerance. */
    assert_abs(xb, 0.30, 1e-9, "alpha 1.001: forward step of the inverted count");
    stagecal_vle_free(vle);
}

/* α → 1 beyond reach: 1 + 1e-9 would need ~4e9 stages, past max_stages (10000). */
static void edges_alpha_to_one_is_a_status(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(1.0 + 1e-9, NULL);
    assert_non_null(vle);
    stagecal_stages_result res;
    static const double rs[] = {INFINITY, 1e6, 3.0};
    for (size_t i = 0; i < sizeof rs / sizeof rs[0]; i++) {
        assert_int_equal(invert(vle, 0.95, 0.30, rs[i], 1.0, &res, "alpha 1+1e-9"), STAGECAL_OK);
        assert_int_not_equal(res.status, STAGECAL_STAGES_OK);
    }
    stagecal_vle_free(vle);

    /* α = 1 exactly: no separation; the constructor refuses it with a message. */
    stagecal_error err;
    assert_null(stagecal_vle_alloc_alpha(1.0, &err));
    assert_int_equal(err.code, STAGECAL_EINVAL);
    assert_true(err.text[0] != '\0');
}

/* xD → 1: Fenske grows like −ln(1 − xD)/ln α; xD = 1 itself is outside the domain. */
static void edges_xd_to_one(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(vle);
    stagecal_stages_result res;
    static const double gaps[] = {1e-6, 1e-10, 1e-14};
    for (size_t i = 0; i < sizeof gaps / sizeof gaps[0]; i++) {
        double xd = 1.0 - gaps[i];
        assert_int_equal(invert(vle, xd, 0.30, INFINITY, 1.0, &res, "xD near 1"), STAGECAL_OK);
        assert_int_equal(res.status, STAGECAL_STAGES_OK);
        /* Near x = 1 a double holds 1 − x only to an absolute ~DBL_EPSILON/2, so the first
         * step's log-odds carry a relative error up to DBL_EPSILON/gap; later steps are
         * 1/α, 1/α², … as sensitive. Summed and divided by ln α, the stage count can be off
         * by DBL_EPSILON/gap/(ln α·(1 − 1/α)); twice that is the tolerance (≈ 0.08 stages
         * at gap 1e-14, ≈ 1e-9 at 1e-6), plus 1e-9 relative for the ordinary rounding. */
        double tol = 2.0 * DBL_EPSILON / gaps[i] / (log(2.5) * (1.0 - 1.0 / 2.5));
        double want = fenske(2.5, xd, 0.30);
        assert_abs(res.stages, want, tol + 1e-9 * want, "xD near 1: stages vs Fenske");
    }
    /* Finite reflux near xD = 1 also gives a status, not a NaN. */
    assert_int_equal(invert(vle, 1.0 - 1e-14, 0.30, 5.0, 1.0, &res, "xD near 1, R 5"), STAGECAL_OK);
    assert_int_equal(invert(vle, 1.0 - 1e-14, 0.30, 5.0, 0.5, &res, "xD near 1, E 0.5"),
                     STAGECAL_OK);

    /* xD = 1: outside (0, 1). Either an error with a message or status invalid. */
    int rc = invert(vle, 1.0, 0.30, INFINITY, 1.0, &res, "xD = 1");
    if (rc == STAGECAL_OK)
        assert_int_equal(res.status, STAGECAL_STAGES_INVALID);
    stagecal_vle_free(vle);
}

/* xB → 0: Fenske grows like −ln xB/ln α (≈ 750 stages at xB = 1e-300). */
static void edges_xb_to_zero(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(vle);
    stagecal_stages_result res;
    static const double xbs[] = {1e-6, 1e-100, 1e-300};
    for (size_t i = 0; i < sizeof xbs / sizeof xbs[0]; i++) {
        assert_int_equal(invert(vle, 0.95, xbs[i], INFINITY, 1.0, &res, "xB near 0"), STAGECAL_OK);
        assert_int_equal(res.status, STAGECAL_STAGES_OK);
        /* 1e-9 relative: up to ~760 steps of a few roundings each. */
        assert_rel(res.stages, fenske(2.5, 0.95, xbs[i]), 1e-9, "xB near 0: stages vs Fenske");
    }
    /* Subnormal and zero xB: a count or a status, never NaN. */
    (void)invert(vle, 0.95, 4.9e-324, INFINITY, 1.0, &res, "xB subnormal");
    int rc = invert(vle, 0.95, 0.0, INFINITY, 1.0, &res, "xB = 0");
    if (rc == STAGECAL_OK)
        assert_int_not_equal(res.status, STAGECAL_STAGES_OK);
    /* Finite reflux and E_MV < 1 with xB near 0 (the pinch at the bottom). */
    (void)invert(vle, 0.95, 1e-300, 3.0, 1.0, &res, "xB 1e-300, R 3");
    (void)invert(vle, 0.95, 1e-300, 3.0, 0.3, &res, "xB 1e-300, R 3, E 0.3");
    stagecal_vle_free(vle);
}

/* R → 0: docs/methods.md "Stage counting" makes R = 0 invalid; a tiny R is a pinch or invalid,
 * never NaN. */
static void edges_reflux_to_zero(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(vle);
    stagecal_stages_result res;
    assert_int_equal(invert(vle, 0.95, 0.30, 0.0, 1.0, &res, "R = 0"), STAGECAL_OK);
    assert_int_equal(res.status, STAGECAL_STAGES_INVALID);
    static const double rs[] = {DBL_MIN, 1e-300, 1e-12, 1e-3};
    for (size_t i = 0; i < sizeof rs / sizeof rs[0]; i++) {
        assert_int_equal(invert(vle, 0.95, 0.30, rs[i], 1.0, &res, "R near 0"), STAGECAL_OK);
        /* At L/V ≈ 0 the operating line cannot carry xB = 0.3 to xD = 0.95. */
        assert_int_not_equal(res.status, STAGECAL_STAGES_OK);
        assert_int_equal(invert(vle, 0.95, 0.30, rs[i], 0.2, &res, "R near 0, E 0.2"), STAGECAL_OK);
    }
    /* Forward stepping at R = 0: status invalid (stages_step contract). */
    double xb = -1.0;
    size_t len = 99;
    int status = -1;
    stagecal_error err;
    assert_int_equal(
        stagecal_stages_step(vle, 0.95, 0.0, 5.0, 1.0, NULL, &xb, NULL, 0, &len, &status, &err),
        STAGECAL_OK);
    assert_int_equal(status, STAGECAL_STAGES_INVALID);
    assert_true(xb == 0.0 && len == 0);
    stagecal_vle_free(vle);
}

/* R → ∞: the count tends to Fenske's from above (Smoker 1938). */
static void edges_reflux_to_infinity(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(vle);
    stagecal_stages_result res;
    double nf = fenske(2.5, 0.95, 0.30);
    double prev = INFINITY;
    static const double rs[] = {10.0, 1e3, 1e6, 1e12, 1e300, DBL_MAX};
    for (size_t i = 0; i < sizeof rs / sizeof rs[0]; i++) {
        assert_int_equal(invert(vle, 0.95, 0.30, rs[i], 1.0, &res, "R large"), STAGECAL_OK);
        assert_int_equal(res.status, STAGECAL_STAGES_OK);
        /* Finite reflux needs more stages than total reflux, and fewer as R grows;
         * 1e-9 relative slack for rounding at the largest R where L/V rounds to 1. */
        assert_true(res.stages >= nf * (1.0 - 1e-9));
        assert_true(res.stages <= prev * (1.0 + 1e-9));
        prev = res.stages;
    }
    /* At R = 1e12 the finite-reflux excess is O(1/R): 1e-9 relative covers it. */
    assert_int_equal(invert(vle, 0.95, 0.30, 1e12, 1.0, &res, "R 1e12"), STAGECAL_OK);
    assert_rel(res.stages, nf, 1e-9, "R 1e12: stages vs Fenske");
    stagecal_vle_free(vle);
}

/* E_MV → 0: each column stage does almost nothing; the count explodes past
 * max_stages and must come back as a status (bounded by max_stages and the scan). */
static void edges_murphree_to_zero(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(vle);
    stagecal_stages_result res, ideal;
    assert_int_equal(invert(vle, 0.95, 0.30, INFINITY, 1.0, &ideal, "E 1"), STAGECAL_OK);
    double prev = ideal.stages;
    static const double es[] = {0.5, 0.1, 0.01};
    for (size_t i = 0; i < sizeof es / sizeof es[0]; i++) {
        assert_int_equal(invert(vle, 0.95, 0.30, INFINITY, es[i], &res, "E small"), STAGECAL_OK);
        assert_int_equal(res.status, STAGECAL_STAGES_OK);
        /* Less efficient stages: more of them (strictly). */
        assert_true(res.stages > prev);
        prev = res.stages;
    }
    static const double tiny[] = {1e-6, 1e-12, DBL_MIN};
    for (size_t i = 0; i < sizeof tiny / sizeof tiny[0]; i++) {
        assert_int_equal(invert(vle, 0.95, 0.30, INFINITY, tiny[i], &res, "E near 0"), STAGECAL_OK);
        assert_int_not_equal(res.status, STAGECAL_STAGES_OK);
        assert_int_equal(invert(vle, 0.95, 0.30, 3.0, tiny[i], &res, "E near 0, R 3"), STAGECAL_OK);
        assert_int_not_equal(res.status, STAGECAL_STAGES_OK);
    }
    /* E_MV = 0 is outside (0, 1]: an error or status invalid. */
    int rc = invert(vle, 0.95, 0.30, INFINITY, 0.0, &res, "E = 0");
    if (rc == STAGECAL_OK)
        assert_int_equal(res.status, STAGECAL_STAGES_INVALID);
    stagecal_vle_free(vle);
}

/* Forward stepping with thousands of stages, and past the cap. */
static void edges_forward_thousands_of_stages(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(1.001, NULL);
    assert_non_null(vle);
    double xb = 0.0;
    size_t len = 0;
    int status = -1;
    static stagecal_stage_point profile[6000];
    assert_int_equal(stagecal_stages_step(vle, 0.95, INFINITY, 5000.5, 1.0, NULL, &xb, profile,
                                          sizeof profile / sizeof profile[0], &len, &status, NULL),
                     STAGECAL_OK);
    assert_int_equal(status, STAGECAL_STAGES_OK);
    assert_int_equal(len, 5001); /* ceil(N) entries, docs/cli.md */
    for (size_t i = 0; i < len; i++)
        assert_true(isfinite(profile[i].x) && isfinite(profile[i].y));
    /* xB from Fenske solved for xB: log-odds(xB) = log-odds(xD) − N ln α (Fenske 1932). */
    double lo = log(0.95 / 0.05) - 5000.5 * log(1.001);
    double want = 1.0 / (1.0 + exp(-lo));
    /* 1e-9 absolute: docs/methods.md "Stage counting" round-trip tolerance for xB. */
    assert_abs(xb, want, 1e-9, "5000.5 stages at alpha 1.001: xB vs Fenske");

    /* Murphree 0.01 with 3000 stages at finite reflux: finite and inside (0, xD). */
    assert_int_equal(stagecal_stages_step(vle, 0.95, 50.0, 3000.0, 0.01, NULL, &xb, NULL, 0, &len,
                                          &status, NULL),
                     STAGECAL_OK);
    assert_true(status != STAGECAL_STAGES_OK || (isfinite(xb) && xb > 0.0 && xb < 0.95));

    /* Far past max_stages (10000) and absurd counts: EINVAL with a message, at once. */
    static const double ns[] = {1e5, 1e9, 1e300, INFINITY, NAN};
    for (size_t i = 0; i < sizeof ns / sizeof ns[0]; i++) {
        stagecal_error err;
        memset(&err, 0, sizeof err);
        assert_int_equal(stagecal_stages_step(vle, 0.95, INFINITY, ns[i], 1.0, NULL, &xb, NULL, 0,
                                              &len, &status, &err),
                         STAGECAL_EINVAL);
        assert_true(err.text[0] != '\0');
    }
    stagecal_vle_free(vle);
}

/* A grid over all the edges at once: whatever the combination, a result or an error
 * with a message, never NaN (check_result_sane). */
static void edges_grid_never_nan(void **state)
{
    (void)state;
    static const double alphas[] = {1.0 + 1e-12, 1.0001, 2.5, 1e6};
    static const double xds[] = {1e-12, 0.5, 1.0 - 1e-12};
    static const double xbs[] = {1e-300, 1e-9, 0.3};
    static const double rs[] = {0.0, 1e-12, 1.0, 1e12, INFINITY};
    static const double es[] = {1e-9, 0.5, 1.0};
    size_t n = 0, ok = 0;
    for (size_t a = 0; a < sizeof alphas / sizeof alphas[0]; a++) {
        stagecal_vle *vle = stagecal_vle_alloc_alpha(alphas[a], NULL);
        assert_non_null(vle);
        for (size_t i = 0; i < sizeof xds / sizeof xds[0]; i++)
            for (size_t j = 0; j < sizeof xbs / sizeof xbs[0]; j++) {
                if (xbs[j] >= xds[i])
                    continue;
                for (size_t k = 0; k < sizeof rs / sizeof rs[0]; k++)
                    for (size_t l = 0; l < sizeof es / sizeof es[0]; l++) {
                        stagecal_stages_result res;
                        char label[160];
                        snprintf(label, sizeof label, "alpha %g xD %g xB %g R %g E %g", alphas[a],
                                 xds[i], xbs[j], rs[k], es[l]);
                        if (invert(vle, xds[i], xbs[j], rs[k], es[l], &res, label) == STAGECAL_OK &&
                            res.status == STAGECAL_STAGES_OK)
                            ok++;
                        n++;
                    }
            }
        stagecal_vle_free(vle);
    }
    /* The grid is not all refusals: some corners have a count (α = 2.5 at total reflux
     * with xB = 0.3 < xD = 0.5 at least). */
    assert_true(n > 200);
    assert_true(ok > 0);
}

/* The equilibrium functions at the ends of [0, 1] and for extreme parameters. */
static void edges_vle_extremes(void **state)
{
    (void)state;
    static const double alphas[] = {1.0 + 1e-12, 2.5, 1e6, 1e300};
    static const double xs[] = {0.0, 4.9e-324, 1e-300, 0.5, 1.0 - 1e-16, 1.0};
    for (size_t a = 0; a < sizeof alphas / sizeof alphas[0]; a++) {
        stagecal_vle *vle = stagecal_vle_alloc_alpha(alphas[a], NULL);
        assert_non_null(vle);
        for (size_t i = 0; i < sizeof xs / sizeof xs[0]; i++) {
            double y = NAN, x = NAN;
            assert_int_equal(stagecal_vle_ystar(vle, xs[i], &y), STAGECAL_OK);
            assert_true(y >= 0.0 && y <= 1.0);
            /* light component enriched in the vapour (to 2 ulp: α·x/(1 + (α − 1)·x) rounds
             * below x by one ulp just under x = 1) */
            assert_true(y >= xs[i] * (1.0 - 2.0 * DBL_EPSILON));
            assert_int_equal(stagecal_vle_xstar(vle, xs[i], &x), STAGECAL_OK);
            assert_true(x >= 0.0 && x <= 1.0); /* was inf at α = 1e300, y = 1 (fixed) */
        }
        /* Ends are fixed points: y*(0) = 0, y*(1) = 1 (any α). */
        double y0, y1;
        assert_int_equal(stagecal_vle_ystar(vle, 0.0, &y0), STAGECAL_OK);
        assert_int_equal(stagecal_vle_ystar(vle, 1.0, &y1), STAGECAL_OK);
        assert_abs(y0, 0.0, 0.0, "y*(0)");
        assert_abs(y1, 1.0, 1e-15, "y*(1)"); /* one rounding of α/(1 + (α − 1)) */
        double x1;
        assert_int_equal(stagecal_vle_xstar(vle, 1.0, &x1), STAGECAL_OK);
        /* x*(1) = 1 for any α: y/(α − (α − 1)y) at y = 1 (exact with the
         * cancellation-free form y/(y + α(1 − y))); 1e-15 for one rounding. */
        assert_abs(x1, 1.0, 1e-15, "x*(1)");
        /* Outside [0, 1] and NaN: an error, not a NaN result. */
        double y = 0.5;
        assert_int_not_equal(stagecal_vle_ystar(vle, NAN, &y), STAGECAL_OK);
        assert_int_not_equal(stagecal_vle_ystar(vle, 1.5, &y), STAGECAL_OK);
        stagecal_vle_free(vle);
    }
}

/* A warm-up given in time over a run whose rows are 1e-300 s apart: 3600 s / 1e-300 s is
 * 3.6e303 samples, which no size_t holds (the conversion was undefined: the sanitizer build
 * of the unit tests stops there). The warm-up covers the whole run, as any warm-up longer
 * than the run does, and the shortest window in time likewise leaves no window. */
static void edges_warmup_over_tiny_spacing(void **state)
{
    (void)state;
    char csv[2048];
    size_t k = (size_t)snprintf(csv, sizeof csv, "time[s],W[mol],xD[mol/mol],xB[mol/mol],R[-]\n");
    for (int i = 0; i < 20; i++)
        k += (size_t)snprintf(csv + k, sizeof csv - k, "%de-300,%d,0.9,0.4,3\n", i, 100 - i);
    stagecal_column col;
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(2.0, NULL);
    stagecal_runlog *log = stagecal_runlog_alloc();
    assert_int_equal(stagecal_runlog_read_buffer(log, csv, k, "e.csv", &col, NULL, NULL, NULL), 0);
    assert_int_equal(log->n, 20);
    stagecal_runlog_analysis_params ap = stagecal_runlog_analysis_default_params();
    ap.warmup_s = 3600;
    ap.min_window_s = 3600;
    stagecal_runlog_result res;
    assert_int_equal(stagecal_runlog_analyse(log, &col, &ap, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, &col, 1.0, &ap, &res, NULL), 0);
    for (size_t i = 0; i < log->n; i++)
        assert_true(res.flags[i] & STAGECAL_SAMPLE_WARMUP);
    assert_int_equal(res.nwindows, 0);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
    stagecal_vle_free(col.system.vle);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(edges_alpha_near_one_thousands_of_stages),
        cmocka_unit_test(edges_alpha_to_one_is_a_status),
        cmocka_unit_test(edges_xd_to_one),
        cmocka_unit_test(edges_xb_to_zero),
        cmocka_unit_test(edges_reflux_to_zero),
        cmocka_unit_test(edges_reflux_to_infinity),
        cmocka_unit_test(edges_murphree_to_zero),
        cmocka_unit_test(edges_forward_thousands_of_stages),
        cmocka_unit_test(edges_grid_never_nan),
        cmocka_unit_test(edges_vle_extremes),
        cmocka_unit_test(edges_warmup_over_tiny_spacing),
    };
    return cmocka_run_group_tests(tests, group_setup, NULL);
}
