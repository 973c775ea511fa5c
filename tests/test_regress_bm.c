/*
 * test_regress_bm.c — the Bell–McCaffrey degrees of freedom (src/regress_bm.c) in designs
 * whose eigenvalues are known by hand, and its refusals. Its agreement with an independent
 * eigenvalue computation in numpy on random weighted designs is in test_regress.c (the
 * statsmodels cross-check), and its use by model files in test_model.c.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>

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

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(regress_bm_dof_closed_forms),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
