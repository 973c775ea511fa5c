/*
 * test_regress_nlin.c — the least-squares driver of regress (src/regress_nlin.c): a
 * problem given as a residual callback, init / iterate / test / driver, the Gauss–Newton
 * polish and the statistics of the estimate, checked against NIST StRD Misra1a certified
 * values (NIST Statistical Reference Datasets, Misra 1978) with the problem's own Jacobian and with
 * finite differences.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_errno.h>

#include "nist_misra1a.h"
#include "stagecal/regress.h"
#include "testutil.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* Misra1a, y = b1·(1 − exp(−b2·x)), as a problem of its own for the public driver. */
struct misra_pb {
    const double *x, *y;
};

static int misra_f(const double *b, void *params, double *f)
{
    const struct misra_pb *m = params;
    for (size_t i = 0; i < 14; i++)
        f[i] = b[0] * (1 - exp(-b[1] * m->x[i])) - m->y[i];
    return 0;
}

static int misra_df(const double *b, void *params, double *J)
{
    const struct misra_pb *m = params;
    for (size_t i = 0; i < 14; i++) {
        J[2 * i] = 1 - exp(-b[1] * m->x[i]);
        J[2 * i + 1] = b[0] * m->x[i] * exp(-b[1] * m->x[i]);
    }
    return 0;
}

/* The driver in GSL's manner (init, then iterate/test; polish; covariance) reaches the
 * NIST StRD Misra1a certified values from NIST start 1 with the problem's Jacobian, and
 * with the central finite differences used when a problem has none (the composition-space
 * fit). Tolerances: 1e-8 relative as in misra_from with the analytic Jacobian; 1e-6 with
 * finite differences (their truncation error, h ≈ 1.5e-8 relative, enters the Jacobian
 * and so the standard errors; the estimate itself only through the step, tighter). */
static void regress_driver_reaches_misra1a(void **state)
{
    (void)state;
    stagecal_regress_data d;
    read_misra(&d);
    struct misra_pb m = {d.r, d.stages};
    for (int fd = 0; fd < 2; fd++) {
        stagecal_regress_fdf fdf = {misra_f, fd ? NULL : misra_df, 14, 2, &m};
        const double start1[2] = {500, 1e-4};
        double theta[2], rss;
        stagecal_regress_nlin *w = stagecal_regress_nlin_alloc(14, 2);
        stagecal_regress_result res;
        stagecal_error e;
        double tol = fd ? 1e-6 : 1e-8;
        assert_non_null(w);
        assert_int_equal(stagecal_regress_nlin_init(w, &fdf, start1, NULL, &e), STAGECAL_OK);
        assert_int_equal(stagecal_regress_nlin_driver(w, &e), STAGECAL_OK);
        assert_true(stagecal_regress_nlin_niter(w) > 0);
        memcpy(theta, stagecal_regress_nlin_position(w), sizeof theta);
        rss = stagecal_regress_nlin_rss(w);
        stagecal_regress_nlin_polish(w, theta, &rss);
        memset(&res, 0, sizeof res);
        assert_int_equal(stagecal_form_parse("saturating", &res.form, &e), STAGECAL_OK);
        assert_int_equal(stagecal_regress_covar(&fdf, theta, 1, NULL, &res, &e), STAGECAL_OK);
        assert_rel(res.theta[0], MISRA_B1, tol, "driver: misra1a b1 (NIST certified)");
        assert_rel(res.theta[1], MISRA_B2, tol, "driver: misra1a b2 (NIST certified)");
        assert_rel(res.se[0], MISRA_SD1, tol, "driver: misra1a sd(b1) (NIST certified)");
        assert_rel(res.se[1], MISRA_SD2, tol, "driver: misra1a sd(b2) (NIST certified)");
        assert_rel(res.rss, MISRA_RSS, tol, "driver: misra1a RSS (NIST certified)");
        assert_rel(res.dof, 12, 0, "driver: misra1a dof (NIST certified)");
        /* a wrong-sized problem is refused, not run */
        stagecal_regress_fdf bad = fdf;
        bad.n = 13;
        assert_int_equal(stagecal_regress_nlin_init(w, &bad, start1, NULL, &e), STAGECAL_EINVAL);
        stagecal_regress_nlin_free(w);
    }
    /* one iteration from NIST start 1 is not enough: ENOCONV, the limit in the message */
    stagecal_regress_params prm = stagecal_regress_default_params();
    prm.max_iter = 1;
    stagecal_regress_fdf fdf = {misra_f, misra_df, 14, 2, &m};
    const double start1[2] = {500, 1e-4};
    stagecal_regress_nlin *w = stagecal_regress_nlin_alloc(14, 2);
    stagecal_error e;
    assert_int_equal(stagecal_regress_nlin_init(w, &fdf, start1, &prm, &e), STAGECAL_OK);
    assert_int_equal(stagecal_regress_nlin_driver(w, &e), STAGECAL_ENOCONV);
    assert_string_equal(e.text,
                        "regress: the trust-region solver did not converge within 1 iterations");
    stagecal_regress_nlin_free(w);
    stagecal_regress_nlin_free(NULL);
    assert_null(stagecal_regress_nlin_alloc(1, 2)); /* fewer residuals than parameters */
    stagecal_regress_data_free(&d);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(regress_driver_reaches_misra1a),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
