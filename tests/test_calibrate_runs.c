/*
 * test_calibrate_runs.c — do the runs differ beyond the windows' errors? The calibration's
 * runs-differ test (stagecal_run_test_fit, src/calibrate_runs.c: Wald's variance-component F
 * test on the stage-space fit), the cases it does not test, and the calibration's warning.
 *
 * Sources of truth: the one-way analysis of variance worked by hand and checked with
 * scipy.stats.f_oneway (written beside the case); statsmodels' compare_f_test of nested OLS
 * fits on the whitened design (tests/runtest_crosscheck.py, run with /usr/bin/python3); the
 * simulator of the batch studies (tests/synth_batch.h: Smoker's closed form, independent of the
 * stepping) for runs that differ by a known offset. The study of its false-alarm rate and power
 * is tests/tool_batch_coverage.c (runtest), docs/calibration.md §4.
 *
 * Mutations each check was seen to fail under (applied to src/calibrate_runs.c one at a time):
 *   M1 the runs' columns Z_ik = 1 instead of 1/se_i      → runtest_matches_statsmodels (weighted)
 *   M2 dof1 = G − 1 always instead of rank[J Z] − rank J → runtest_matches_statsmodels (saturating:
 *                                                          dof1 = G, the form has no intercept)
 *   M3 p from gsl_cdf_fdist_P (the lower tail)           → runtest_one_way_by_hand
 *   M4 RSS0 = Σe² without the projection off J           → runtest_one_way_by_hand (θ = 0 there)
 *   M5 fewer than 2 runs instead of 3 not tested         → runtest_not_tested
 *   M6 the warning without the cr2-run condition         → runtest_warning_in_calibration
 *   M7 the warning at p > 0.05 instead of p < 0.05       → runtest_warning_in_calibration
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/calibrate.h"
#include "stagecal/column.h"

#include "synth_batch.h"
#include "testutil.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* Three runs of a constant stage count with se = 1: the test is the plain one-way ANOVA of the
 * stage counts. By hand: run means 10.1, 10.75, 9.9, grand mean 91.4/9; SS between 0.977222 on
 * 2 dof, SS within 0.18 + 0.045 + 0.26 = 0.485 on 6 dof, F = 0.488611/0.0808333 = 6.04467;
 * scipy.stats.f_oneway([9.8, 10.1, 10.4], [10.6, 10.9], [9.5, 9.9, 10.0, 10.2]) gives
 * F = 6.044673539518905, p = 0.0364909421371443 (scipy 1.10, run 5 December 2026). θ = 0, far
 * from the mean: the test takes the curve's parameters out (the same F for any θ). Tolerance
 * 1e-12 relative: sums of nine numbers and an SVD of a 9×1 column, rounding near 1e-15; p
 * through GSL's incomplete beta (1e-12 of scipy's). */
static void runtest_one_way_by_hand(void **state)
{
    (void)state;
    const double y[9] = {9.8, 10.1, 10.4, 10.6, 10.9, 9.5, 9.9, 10.0, 10.2};
    double r[9], se[9], theta = 0;
    const size_t run[9] = {7, 7, 7, 3, 3, 11, 11, 11, 11}; /* any labels */
    for (int i = 0; i < 9; i++)
        r[i] = 1 + i, se[i] = 1;
    stagecal_form f;
    assert_int_equal(stagecal_form_parse("constant", &f, NULL), STAGECAL_OK);
    stagecal_run_test t;
    stagecal_error e;
    assert_int_equal(stagecal_run_test_fit(&f, &theta, r, NULL, y, se, run, 9, &t, &e),
                     STAGECAL_OK);
    assert_int_equal(t.tested, 1);
    assert_int_equal(t.runs, 3);
    assert_int_equal(t.windows, 9);
    assert_abs(t.dof1, 2, 0, "dof between runs");
    assert_abs(t.dof2, 6, 0, "dof within runs");
    assert_rel(t.f, 6.044673539518905, 1e-12, "F vs scipy f_oneway");
    assert_rel(t.p, 0.0364909421371443, 1e-12, "p vs scipy f_oneway");
    /* a common factor in the stated errors cancels: se = 3 gives the same F and p */
    for (int i = 0; i < 9; i++)
        se[i] = 3;
    stagecal_run_test t3;
    assert_int_equal(stagecal_run_test_fit(&f, &theta, r, NULL, y, se, run, 9, &t3, &e),
                     STAGECAL_OK);
    assert_rel(t3.f, t.f, 1e-12, "F with every se tripled");
    assert_rel(t3.p, t.p, 1e-12, "p with every se tripled");
}

/* Runs the cross-check script on the rows; reads its "wald" line into w (F, dof1, dof2, p). */
static void crosscheck(const char *form, const double *theta, size_t p, const double *r,
                       const double *y, const double *se, const size_t *run, size_t n, double *w)
{
    char cmd[8192];
    size_t len = (size_t)snprintf(cmd, sizeof cmd, "%s %s/runtest_crosscheck.py %s",
                                  STAGECAL_PYTHON, STAGECAL_TESTS_DIR, form);
    for (size_t k = 0; k < p; k++)
        len += (size_t)snprintf(cmd + len, sizeof cmd - len, " %.17g", theta[k]);
    len += (size_t)snprintf(cmd + len, sizeof cmd - len, " --");
    for (size_t i = 0; i < n; i++) {
        char rr[32] = "inf";
        if (!isinf(r[i]))
            snprintf(rr, sizeof rr, "%.17g", r[i]);
        len += (size_t)snprintf(cmd + len, sizeof cmd - len, " %s %.17g %.17g %zu", rr, y[i], se[i],
                                run[i]);
    }
    FILE *py = popen(cmd, "r");
    assert_non_null(py);
    assert_int_equal(testutil_line_values(py, "wald", w, 4), 4);
    double pl[2];
    assert_int_equal(testutil_line_values(py, "plain", pl, 2), 2);
    assert_int_equal(pclose(py), 0);
}

/* Unequal stated errors, and the saturating form (no intercept: the runs' offsets add G dof,
 * not G − 1) at a θ near the fit's, with total-reflux windows: F, both dof and p against
 * statsmodels' compare_f_test (tests/runtest_crosscheck.py). Tolerance 1e-9 relative: the same
 * projections by two routes (GSL Jacobi SVD after the runs' means, LAPACK least squares on the
 * whole design) on designs of condition below 1e2. */
static void runtest_matches_statsmodels(void **state)
{
    (void)state;
    enum { N = 15 };
    const double r[N] = {INFINITY, 1.5,      2.5, INFINITY, 4,        6, INFINITY, 10,
                         1.5,      INFINITY, 2.5, 4,        INFINITY, 6, 10};
    const double y[N] = {10.31, 4.93, 6.71, 9.62, 8.21,  9.40, 10.05, 9.80,
                         4.71,  9.95, 6.88, 8.49, 10.40, 9.39, 10.12};
    const double se[N] = {0.08, 0.05, 0.04, 0.09, 0.05, 0.07, 0.08, 0.10,
                          0.05, 0.07, 0.04, 0.06, 0.09, 0.06, 0.11};
    const size_t run[N] = {0, 0, 0, 1, 1, 1, 2, 2, 2, 3, 3, 3, 4, 4, 4};
    stagecal_form f;
    stagecal_run_test t;
    stagecal_error e;
    double w[4];
    /* the weighted one-way case: constant form, unequal se */
    double c = 9.7;
    assert_int_equal(stagecal_form_parse("constant", &f, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_run_test_fit(&f, &c, r, NULL, y, se, run, N, &t, &e), STAGECAL_OK);
    crosscheck("constant", &c, 1, r, y, se, run, N, w);
    assert_int_equal(t.tested, 1);
    assert_rel(t.f, w[0], 1e-9, "constant, weighted: F vs statsmodels");
    assert_rel(t.dof1, w[1], 0, "constant, weighted: dof1 vs statsmodels");
    assert_rel(t.dof2, w[2], 0, "constant, weighted: dof2 vs statsmodels");
    assert_rel(t.p, w[3], 1e-9, "constant, weighted: p vs statsmodels");
    /* the saturating form */
    double th[2] = {10.1, 0.47};
    assert_int_equal(stagecal_form_parse("saturating", &f, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_run_test_fit(&f, th, r, NULL, y, se, run, N, &t, &e), STAGECAL_OK);
    crosscheck("saturating", th, 2, r, y, se, run, N, w);
    assert_int_equal(t.tested, 1);
    assert_abs(t.dof1, 5, 0, "saturating: dof1 = G (no intercept)");
    assert_rel(t.f, w[0], 1e-9, "saturating: F vs statsmodels");
    assert_rel(t.dof1, w[1], 0, "saturating: dof1 vs statsmodels");
    assert_rel(t.dof2, w[2], 0, "saturating: dof2 vs statsmodels");
    assert_rel(t.p, w[3], 1e-9, "saturating: p vs statsmodels");
}

/* What the test does not take: fewer than 3 runs, no run with two windows, no dof left within
 * the runs, no window; and bad arguments. */
static void runtest_not_tested(void **state)
{
    (void)state;
    const double r[6] = {1.5, 2.5, 4, 6, 10, INFINITY}, y[6] = {5, 6.5, 8.3, 9.3, 9.9, 10.2},
                 se[6] = {0.1, 0.1, 0.1, 0.1, 0.1, 0.1};
    double th[2] = {10, 0.45};
    stagecal_form f;
    stagecal_run_test t;
    stagecal_error e;
    assert_int_equal(stagecal_form_parse("saturating", &f, NULL), STAGECAL_OK);
    const size_t two[6] = {0, 0, 0, 1, 1, 1};
    assert_int_equal(stagecal_run_test_fit(&f, th, r, NULL, y, se, two, 6, &t, &e), STAGECAL_OK);
    assert_int_equal(t.tested, 0);
    assert_int_equal(t.runs, 2);
    assert_non_null(strstr(t.why, "the test needs 3"));
    assert_true(isnan(t.f) && isnan(t.p));
    const size_t each[6] = {0, 1, 2, 3, 4, 5};
    assert_int_equal(stagecal_run_test_fit(&f, th, r, NULL, y, se, each, 6, &t, &e), STAGECAL_OK);
    assert_int_equal(t.tested, 0);
    assert_non_null(strstr(t.why, "no run has two windows"));
    const size_t three[6] = {0, 0, 1, 1, 2, 2}; /* 6 windows = 2 parameters + 3 runs + 1: 1 dof */
    assert_int_equal(stagecal_run_test_fit(&f, th, r, NULL, y, se, three, 6, &t, &e), STAGECAL_OK);
    assert_int_equal(t.tested, 1);
    assert_abs(t.dof2, 1, 0, "one dof within the runs");
    assert_int_equal(stagecal_run_test_fit(&f, th, r, NULL, y, se, three, 5, &t, &e), STAGECAL_OK);
    assert_int_equal(t.tested, 0); /* 5 windows, 2 parameters, 3 runs: none left */
    assert_non_null(strstr(t.why, "no window left within the runs"));
    assert_int_equal(stagecal_run_test_fit(&f, th, r, NULL, y, se, three, 0, &t, &e), STAGECAL_OK);
    assert_int_equal(t.tested, 0);
    const double bad[6] = {0.1, 0.1, 0, 0.1, 0.1, 0.1};
    assert_int_equal(stagecal_run_test_fit(&f, th, r, NULL, y, bad, three, 6, &t, &e),
                     STAGECAL_EINVAL);
    assert_int_equal(stagecal_run_test_fit(NULL, th, r, NULL, y, se, three, 6, &t, &e),
                     STAGECAL_EINVAL);
}

/* One calibration of the batch studies' 8 runs (tests/synth_batch.h) whose stage counts are
 * offset by delta[k] (δ = 0: the runs agree). */
static void calibrate_runs(const double *delta, unsigned long seed, stagecal_cov_kind cov,
                           stagecal_calibration *cal, stagecal_column *col, stagecal_runlog **log)
{
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    assert_int_equal(bc_column(col), 0);
    size_t len = 0;
    char *csv = bc_log(rng, delta, &len);
    assert_non_null(csv);
    *log = stagecal_runlog_alloc();
    assert_int_equal(
        stagecal_runlog_read_buffer(*log, csv, len, "synthetic.csv", col, NULL, NULL, NULL),
        STAGECAL_OK);
    free(csv);
    gsl_rng_free(rng);
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "saturating";
    par.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE;
    par.cov_kind = cov;
    stagecal_error e;
    if (stagecal_calibrate_data(col, NULL, *log, &par, cal, &e) != STAGECAL_OK)
        fail_msg("calibrate: %s", e.text);
}

static int warned(const stagecal_calibration *cal)
{
    int k = 0;
    for (size_t i = 0; i < cal->model.n_warnings; i++)
        k += strstr(cal->model.warnings[i], "RUNS DIFFER") != NULL &&
             strstr(cal->model.warnings[i], "--covariance cr2-run") != NULL;
    return k;
}

/* The calibration's test and warning: runs offset by ±0.3–0.6 stages (six to twelve times the
 * windows' se at R = 2.5, about 0.05) are found (p < 1e-6) and warned of under hc2-bm; under
 * cr2-run the same test, no warning; runs that agree (δ = 0, log seed 2026120502: p = 0.491,
 * F = 0.977 on 8 and 14 dof; the seed was chosen for a p far from 0.05 — seed 2026120501 gives
 * 0.107, 2026120503 0.682 — since under H0 p is uniform) give no warning. The fit's numbers do not
 * depend on the test (θ the same as the stage-space fit's in both). */
static void runtest_warning_in_calibration(void **state)
{
    (void)state;
    const double off[BC_RUNS] = {0.6, -0.5, 0.3, -0.4, 0.5, -0.6, 0.4, -0.3}, none[BC_RUNS] = {0};
    stagecal_calibration a, b, c;
    stagecal_column col;
    stagecal_runlog *la, *lb, *lc;
    calibrate_runs(off, 2026120501, STAGECAL_COV_HC2_BM, &a, &col, &la);
    assert_int_equal(a.run_test.tested, 1);
    assert_int_equal(a.run_test.runs, 8);
    assert_true(a.run_test.p < 1e-6);
    assert_int_equal(warned(&a), 1);
    stagecal_vle_free(col.system.vle);
    calibrate_runs(off, 2026120501, STAGECAL_COV_CR2_RUN, &b, &col, &lb);
    assert_int_equal(stagecal_calibration_fit(&b)->cov_kind, STAGECAL_COV_CR2_RUN);
    assert_rel(b.run_test.f, a.run_test.f, 0, "the test does not depend on the covariance");
    assert_int_equal(warned(&b), 0);
    for (size_t k = 0; k < a.stage_fit.p; k++)
        assert_rel(a.stage_fit.theta[k], b.stage_fit.theta[k], 0, "stage-space θ");
    stagecal_vle_free(col.system.vle);
    calibrate_runs(none, 2026120502, STAGECAL_COV_HC2_BM, &c, &col, &lc);
    assert_int_equal(c.run_test.tested, 1);
    assert_true(c.run_test.p > 0.2);
    assert_int_equal(warned(&c), 0);
    stagecal_vle_free(col.system.vle);
    stagecal_calibration_free(&a);
    stagecal_calibration_free(&b);
    stagecal_calibration_free(&c);
    stagecal_runlog_free(la);
    stagecal_runlog_free(lb);
    stagecal_runlog_free(lc);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(runtest_one_way_by_hand),
        cmocka_unit_test(runtest_matches_statsmodels),
        cmocka_unit_test(runtest_not_tested),
        cmocka_unit_test(runtest_warning_in_calibration),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
