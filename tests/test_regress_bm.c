/*
 * test_regress_bm.c — the Bell–McCaffrey degrees of freedom (src/regress_bm.c) in designs
 * whose eigenvalues are known by hand, and its refusals. Its agreement with an independent
 * eigenvalue computation in numpy on random weighted designs is in test_regress.c (the
 * statsmodels cross-check), and its use by model files in test_model.c. Then the CR2
 * covariance clustered by run (STAGECAL_COV_CR2_RUN, src/cr2.c): against an explicit numpy
 * computation (tests/cr2_crosscheck.py), the closed form of a balanced one-way design, HC2
 * with one window per run, and the fall-back with too few runs.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "stagecal/form.h"
#include "stagecal/regress.h"
#include "testutil.h"

/* Bell-McCaffrey dof in two designs whose eigenvalues are known by hand. The mean of n
 * values (X = 1): D M D = d^2 (I - J/n), n - 1 equal eigenvalues, K = n - 1. Two groups of
 * n0 and n1 (X = [1, D]) and their difference (c = (0, 1)): D M D is block diagonal with
 * d_g^2 = 1/(n_g (n_g - 1)) on n_g - 1 eigenvalues each, so K = (1/n0 + 1/n1)^2 /
 * (1/(n0^2 (n0 - 1)) + 1/(n1^2 (n1 - 1))), the Welch-Satterthwaite dof at equal variances
 * (Imbens & Kolesar 2016, Rev. Econ. Stat. 98, 701-712, section III; derived here).
 * Tolerance 1e-12 relative: a handful of sums of O(1) terms (1e-9 with a column scaled by
 * 1e6, which the equilibration takes out up to rounding). Then the refusals. */
static void regress_bm_dof_closed_forms(void **state)
{
    (void)state;
    double x[2 * 10], c1[1] = {1}, c2[2] = {0, 1}, k;
    stagecal_error e;
    for (size_t n = 2; n <= 10; n++) {
        for (size_t i = 0; i < n; i++)
            x[i] = 1;
        assert_int_equal(stagecal_regress_bm_dof(x, n, 1, c1, &k, &e), STAGECAL_OK);
        assert_rel(k, (double)n - 1, 1e-12, "BM dof of a mean");
    }
    const size_t n0 = 3, n1 = 7;
    for (size_t i = 0; i < n0 + n1; i++) {
        x[2 * i] = 1;
        x[2 * i + 1] = i < n0 ? 0 : 1;
    }
    double a = 1.0 / n0 + 1.0 / n1;
    double want = a * a / (1.0 / (n0 * n0 * (n0 - 1.0)) + 1.0 / (n1 * n1 * (n1 - 1.0)));
    assert_int_equal(stagecal_regress_bm_dof(x, n0 + n1, 2, c2, &k, &e), STAGECAL_OK);
    assert_rel(k, want, 1e-12, "BM dof of a difference of two means");
    /* the same with the second column in other units: K does not depend on them */
    for (size_t i = 0; i < n0 + n1; i++)
        x[2 * i + 1] *= 1e6;
    assert_int_equal(stagecal_regress_bm_dof(x, n0 + n1, 2, c2, &k, &e), STAGECAL_OK);
    assert_rel(k, want, 1e-9, "BM dof, column scaled by 1e6");
    /* refusals: too few rows, a rank-deficient design, a contrast without variance */
    assert_int_equal(stagecal_regress_bm_dof(x, 2, 2, c2, &k, &e), STAGECAL_EINVAL);
    for (size_t i = 0; i < n0 + n1; i++)
        x[2 * i + 1] = 3; /* a copy of the first column */
    assert_int_equal(stagecal_regress_bm_dof(x, n0 + n1, 2, c2, &k, &e), STAGECAL_EDATA);
    assert_string_equal(e.text, "Bell-McCaffrey dof: the design is rank deficient");
    for (size_t i = 0; i < n0 + n1; i++)
        x[2 * i + 1] = i < n0 ? 0 : 1;
    double zero[2] = {0, 0};
    assert_int_equal(stagecal_regress_bm_dof(x, n0 + n1, 2, zero, &k, &e), STAGECAL_EDATA);
    assert_string_equal(e.text, "Bell-McCaffrey dof: the contrast has no variance");
    /* a row with leverage 1 (the only one with D = 1): its residual is zero, no dof */
    for (size_t i = 0; i < n0 + n1; i++)
        x[2 * i + 1] = i == 0 ? 1 : 0;
    assert_int_equal(stagecal_regress_bm_dof(x, n0 + n1, 2, c2, &k, &e), STAGECAL_EDATA);
    assert_non_null(strstr(e.text, "row 1 has leverage"));
}

/* ---- the CR2 covariance clustered by run ------------------------------------------------ */

/* 22 invented windows of stages = 8 − 3/R with deterministic scatter, a run offset shared by
 * the windows of each of 5 runs of unequal size (labels 10, 20, …: not 0..G−1), weights
 * 1/sigma². */
#define CR2_N 22
static void cr2_data(double *r, double *y, double *s, size_t *run)
{
    static const size_t size[5] = {3, 6, 4, 5, 4};
    static const double off[5] = {0.08, -0.05, 0.02, -0.09, 0.06};
    size_t i = 0;
    for (size_t g = 0; g < 5; g++)
        for (size_t k = 0; k < size[g]; k++, i++) {
            r[i] = 1.2 + 0.37 * (double)((i * 7) % CR2_N);
            s[i] = 0.03 + 0.01 * (double)(i % 3);
            y[i] = 8 - 3 / r[i] + off[g] + 0.04 * sin(1.7 * (double)(i * i + 1));
            run[i] = 10 * (g + 1);
        }
}

static void cr2_fit(double *r, double *y, double *s, const size_t *run, stagecal_cov_kind kind,
                    stagecal_regress_result *res)
{
    stagecal_regress_data d = {CR2_N, r, NULL, y, s};
    stagecal_form f;
    stagecal_error e;
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &f, &e), STAGECAL_OK);
    stagecal_regress_params p = stagecal_regress_default_params();
    p.cov_kind = kind;
    p.cluster = run;
    memset(res, 0, sizeof *res);
    if (stagecal_regress_fit(&d, &f, &p, res, &e) != STAGECAL_OK)
        fail_msg("fit: %s", e.text);
}

/* The fit's CR2 covariance and the Bell–McCaffrey dof of b0, b1 and of the fitted value at
 * R = 3 (through the band, as a model file's band gets it) against tests/cr2_crosscheck.py:
 * numpy's explicit CR2 (Bell & McCaffrey 2002) and the Satterthwaite dof from the
 * eigenvalues of the G×G matrix (Pustejovsky & Tipton 2018), itself checked against
 * statsmodels' cov_type='cluster' without corrections (CR0). Tolerance 1e-9 relative: the
 * same linear algebra by two routes (GSL QR and Jacobi/eigen here, LAPACK there) on a design
 * of condition ~1e2, rounding near 1e-13; 1e-12 between the two CR0s. */
static void regress_cr2_matches_numpy(void **state)
{
    (void)state;
    double r[CR2_N], y[CR2_N], s[CR2_N], v[8];
    size_t run[CR2_N];
    cr2_data(r, y, s, run);
    char cmd[8192];
    size_t len = (size_t)snprintf(cmd, sizeof cmd, "%s %s/cr2_crosscheck.py", STAGECAL_PYTHON,
                                  STAGECAL_TESTS_DIR);
    for (size_t i = 0; i < CR2_N; i++)
        len += (size_t)snprintf(cmd + len, sizeof cmd - len, " %.17g %.17g %.17g %zu", r[i], y[i],
                                s[i], run[i]);
    FILE *py = popen(cmd, "r");
    assert_non_null(py);
    stagecal_regress_result res;
    cr2_fit(r, y, s, run, STAGECAL_COV_CR2_RUN, &res);
    assert_int_equal(res.cov_kind, STAGECAL_COV_CR2_RUN);
    assert_non_null(res.cluster);
    assert_int_equal(testutil_line_values(py, "params", v, 8), 2);
    for (size_t k = 0; k < 2; k++)
        assert_rel(res.theta[k], v[k], 1e-9, "theta vs numpy lstsq");
    assert_int_equal(testutil_line_values(py, "cr2_cov", v, 8), 4);
    for (size_t k = 0; k < 4; k++)
        assert_rel(res.cov[k], v[k], 1e-9, "CR2 covariance vs numpy");
    double c0[4], sm[4];
    assert_int_equal(testutil_line_values(py, "cr0_cov", c0, 4), 4);
    assert_int_equal(testutil_line_values(py, "sm_cr0", sm, 4), 4);
    for (size_t k = 0; k < 4; k++)
        assert_rel(c0[k], sm[k], 1e-9, "the script's CR0 vs statsmodels cluster");
    assert_int_equal(testutil_line_values(py, "cr2_dof", v, 8), 3);
    for (size_t k = 0; k < 2; k++) {
        assert_rel(res.param_dof[k], v[k], 1e-9, "CR2 Bell-McCaffrey dof vs numpy");
        assert_true(res.param_dof[k] <= 4.0); /* at most G − 1 */
    }
    stagecal_band b;
    stagecal_error e;
    assert_int_equal(stagecal_regress_band_clustered(&res.form, res.theta, res.cov, res.sigma, 1.0,
                                                     res.dof, res.design, res.cluster, res.n, 0.95,
                                                     3.0, 0, &b, &e),
                     STAGECAL_OK);
    assert_rel(b.dof_fit, v[2], 1e-9, "band dof at R = 3 vs numpy");
    /* the band from the result alone: the same clustered dof */
    assert_int_equal(stagecal_regress_result_band(&res, 3.0, 0, 1.0, &b, &e), STAGECAL_OK);
    assert_rel(b.dof_fit, v[2], 1e-9, "result band dof at R = 3 vs numpy");
    /* the design without its clusters: HC2's dof, larger (what regress.h warns of) */
    assert_int_equal(stagecal_regress_band_design(&res.form, res.theta, res.cov, res.sigma, 1.0,
                                                  res.dof, res.design, res.n, 0.95, 3.0, 0, &b, &e),
                     STAGECAL_OK);
    assert_true(b.dof_fit > v[2] + 1);
    assert_int_equal(pclose(py), 0);
    stagecal_regress_result_free(&res);
}

/* The band grid of a fit (result.band) is stagecal_regress_result_band at its points, for
 * every covariance kind (the same function: identical doubles), and its dof is the kind's:
 * the clustered one for CR2_RUN (at most G − 1 = 4), the windows' n − p without a design. */
static void regress_result_band_is_the_grid(void **state)
{
    (void)state;
    double r[CR2_N], y[CR2_N], s[CR2_N];
    size_t run[CR2_N];
    cr2_data(r, y, s, run);
    const stagecal_cov_kind kinds[3] = {STAGECAL_COV_CR2_RUN, STAGECAL_COV_HC2_BM,
                                        STAGECAL_COV_MODEL};
    for (size_t q = 0; q < 3; q++) {
        stagecal_regress_result res;
        stagecal_band b;
        stagecal_error e;
        cr2_fit(r, y, s, run, kinds[q], &res);
        assert_int_equal(res.cov_kind, kinds[q]);
        assert_true(res.nband > 2);
        for (size_t i = 0; i < res.nband; i++) {
            assert_int_equal(stagecal_regress_result_band(&res, res.band[i].r, 0, 1.0, &b, &e),
                             STAGECAL_OK);
            assert_memory_equal(&b, &res.band[i], sizeof b);
            if (kinds[q] == STAGECAL_COV_CR2_RUN)
                assert_true(b.dof_fit <= 4);
            if (kinds[q] == STAGECAL_COV_MODEL)
                assert_rel(b.dof_fit, res.dof, 1e-15, "no design: n - p");
        }
        stagecal_regress_result_free(&res);
    }
    assert_int_equal(stagecal_regress_result_band(NULL, 3, 0, 1, NULL, NULL), STAGECAL_EINVAL);
}

/* One window per run: A_g = (1 − h_i)^−½, the CR2 sandwich is HC2 and the dof is the
 * Bell–McCaffrey dof of HC2 (Bell & McCaffrey 2002; from memory). Tolerance 1e-12
 * relative: the same sums by two routes (a 1×1 eigenproblem per window). */
static void regress_cr2_one_window_per_run_is_hc2(void **state)
{
    (void)state;
    double r[CR2_N], y[CR2_N], s[CR2_N];
    size_t run[CR2_N];
    cr2_data(r, y, s, run);
    for (size_t i = 0; i < CR2_N; i++)
        run[i] = 3 * i + 1;
    stagecal_regress_result a, b;
    cr2_fit(r, y, s, run, STAGECAL_COV_CR2_RUN, &a);
    cr2_fit(r, y, s, run, STAGECAL_COV_HC2_BM, &b);
    assert_int_equal(a.cov_kind, STAGECAL_COV_CR2_RUN);
    for (size_t k = 0; k < 4; k++)
        assert_rel(a.cov[k], b.cov[k], 1e-12, "CR2 with singletons vs HC2");
    for (size_t k = 0; k < 2; k++)
        assert_rel(a.param_dof[k], b.param_dof[k], 1e-12, "CR2 dof with singletons vs HC2's");
    stagecal_regress_result_free(&a);
    stagecal_regress_result_free(&b);
}

/* A balanced one-way design: the mean of G runs of m windows each (form constant,
 * unweighted). H_gg = J/(Gm), A_g·1 = (1 − 1/G)^−½·1, so the CR2 variance of the mean is
 * Σ_g ē_g² / (G(G − 1)) (ē_g run g's mean residual: the variance of the mean of run means)
 * and its Bell–McCaffrey dof is G − 1 (Pustejovsky & Tipton 2018, §3; derived here).
 * Tolerance 1e-12 relative: sums of 20 terms of O(0.1). */
static void regress_cr2_balanced_closed_form(void **state)
{
    (void)state;
    enum { G = 5, M = 4 };
    double r[G * M], y[G * M], ybar = 0, gm[G] = {0};
    size_t run[G * M];
    for (size_t i = 0; i < G * M; i++) {
        r[i] = 1 + (double)(i % M);
        y[i] = 7 + 0.1 * sin(2.3 * (double)i) + 0.05 * (double)(i / M % 3);
        run[i] = i / M;
        ybar += y[i] / (G * M);
        gm[i / M] += y[i] / M;
    }
    double want = 0;
    for (size_t g = 0; g < G; g++)
        want += (gm[g] - ybar) * (gm[g] - ybar) / (G * (G - 1.0));
    stagecal_regress_data d = {G * M, r, NULL, y, NULL};
    stagecal_form f;
    stagecal_error e;
    assert_int_equal(stagecal_form_parse("constant", &f, &e), STAGECAL_OK);
    stagecal_regress_params p = stagecal_regress_default_params();
    p.cov_kind = STAGECAL_COV_CR2_RUN;
    p.cluster = run;
    stagecal_regress_result res;
    memset(&res, 0, sizeof res);
    assert_int_equal(stagecal_regress_fit(&d, &f, &p, &res, &e), STAGECAL_OK);
    assert_int_equal(res.cov_kind, STAGECAL_COV_CR2_RUN);
    assert_rel(res.theta[0], ybar, 1e-12, "the mean");
    assert_rel(res.cov[0], want, 1e-12, "CR2 variance of a balanced mean");
    assert_rel(res.param_dof[0], G - 1.0, 1e-12, "its Bell-McCaffrey dof, G - 1");
    stagecal_regress_result_free(&res);
}

/* Fewer than STAGECAL_CR2_MIN_CLUSTERS runs (3 here), or no clusters: the fit is HC2_BM
 * and says so (common practice, no source: 3 runs leave at most 2 dof). */
static void regress_cr2_few_runs_fall_back(void **state)
{
    (void)state;
    double r[CR2_N], y[CR2_N], s[CR2_N];
    size_t run[CR2_N];
    cr2_data(r, y, s, run);
    for (size_t i = 0; i < CR2_N; i++)
        run[i] = i % 3;
    stagecal_regress_result a, b;
    cr2_fit(r, y, s, run, STAGECAL_COV_CR2_RUN, &a);
    cr2_fit(r, y, s, run, STAGECAL_COV_HC2_BM, &b);
    assert_int_equal(a.cov_kind, STAGECAL_COV_HC2_BM);
    assert_null(a.cluster);
    for (size_t k = 0; k < 4; k++)
        assert_rel(a.cov[k], b.cov[k], 0, "fall-back is HC2_BM");
    stagecal_regress_result_free(&a);
    for (size_t i = 0; i < CR2_N; i++)
        run[i] = i % 4; /* 4 runs: clustered */
    cr2_fit(r, y, s, run, STAGECAL_COV_CR2_RUN, &a);
    assert_int_equal(a.cov_kind, STAGECAL_COV_CR2_RUN);
    stagecal_regress_result_free(&a);
    cr2_fit(r, y, s, NULL, STAGECAL_COV_CR2_RUN, &a);
    assert_int_equal(a.cov_kind, STAGECAL_COV_HC2_BM);
    stagecal_regress_result_free(&a);
    stagecal_regress_result_free(&b);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(regress_bm_dof_closed_forms),
        cmocka_unit_test(regress_cr2_matches_numpy),
        cmocka_unit_test(regress_result_band_is_the_grid),
        cmocka_unit_test(regress_cr2_one_window_per_run_is_hc2),
        cmocka_unit_test(regress_cr2_balanced_closed_form),
        cmocka_unit_test(regress_cr2_few_runs_fall_back),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
