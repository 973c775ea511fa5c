/*
 * test_runlog_drift_fit.c — the stage relation's drift fits (src/runlog_drift_fit.c) against
 * GSL's general weighted least squares (gsl_multifit_wlinear, an SVD solve of the full design
 * matrix: one indicator column per stretch, one hx column per stretch for the free-count fit,
 * and the drift regressor g) on invented data: the slope, its covariance scaled by
 * max(1, χ²/dof) as the library scales it, and the collinearity factor as the ratio of the
 * two fits' unscaled standard errors. Tolerance 1e-9 relative: the same least-squares problem
 * solved two ways in double precision (condition numbers here below 1e4).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_multifit.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_vector.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>

#include "runlog_internal.h"
#include "testutil.h"

#define MAXM 64

/* Three stretches of 24, 18 and 2 rows (the last too short for its own count slope). Row
 * times in hours; hx = ∂X/∂N rising through a stretch as the distillate loses purity; y the
 * residual with a per-stretch offset c_s, count error δ_s, drift d and Gaussian noise of sd
 * noise·σ_a (σ_a the stated standard deviation, w = 1/σ_a²). Returns m. */
static size_t make_data(gsl_rng *rng, double d, double noise, double *y, double *g, double *hx,
                        double *w, int32_t *win)
{
    static const size_t len[3] = {24, 18, 2};
    static const double c[3] = {2e-3, -1e-3, 5e-4}, dl[3] = {0.3, -0.2, 0.1};
    size_t m = 0;
    double t = 0;
    for (int s = 0; s < 3; s++) {
        for (size_t i = 0; i < len[s]; i++, m++, t += 1.0 / 6) {
            double sig = 0.002 * (1 + 0.5 * gsl_rng_uniform(rng));
            g[m] = t;
            hx[m] = 0.004 * exp(0.15 * t) + 0.001 * gsl_rng_uniform(rng);
            w[m] = 1 / (sig * sig);
            win[m] = s;
            y[m] = c[s] + dl[s] * hx[m] + d * t + noise * gsl_ran_gaussian(rng, sig);
        }
        t += 1.0; /* a set-point change between stretches */
    }
    return m;
}

/* GSL's weighted fit of y on the design (an indicator per stretch, hx per stretch of at least 3
 * rows when free, g last): the last coefficient, its se scaled as the library scales it, and
 * its unscaled se. */
static void gsl_fit(const double *y, const double *g, const double *hx, const double *w,
                    const int32_t *win, size_t m, int free_count, double *d, double *se,
                    double *se_unscaled)
{
    size_t p = 0, col_i[3], col_h[3];
    for (int s = 0; s < 3; s++) {
        size_t n = 0;
        for (size_t a = 0; a < m; a++)
            n += win[a] == s;
        col_i[s] = p++;
        col_h[s] = free_count && n >= 3 ? p++ : SIZE_MAX;
    }
    size_t pg = p++;
    gsl_matrix *X = gsl_matrix_calloc(m, p), *cov = gsl_matrix_alloc(p, p);
    gsl_vector *yv = gsl_vector_alloc(m), *wv = gsl_vector_alloc(m), *c = gsl_vector_alloc(p);
    gsl_multifit_linear_workspace *ws = gsl_multifit_linear_alloc(m, p);
    for (size_t a = 0; a < m; a++) {
        gsl_matrix_set(X, a, col_i[win[a]], 1.0);
        if (col_h[win[a]] != SIZE_MAX)
            gsl_matrix_set(X, a, col_h[win[a]], hx[a]);
        gsl_matrix_set(X, a, pg, g[a]);
        gsl_vector_set(yv, a, y[a]);
        gsl_vector_set(wv, a, w[a]);
    }
    double chisq;
    assert_int_equal(gsl_multifit_wlinear(X, wv, yv, c, cov, &chisq, ws), GSL_SUCCESS);
    double scale = chisq / (double)(m - p), v = gsl_matrix_get(cov, pg, pg);
    *d = gsl_vector_get(c, pg);
    *se = sqrt(v * (scale > 1 ? scale : 1));
    *se_unscaled = sqrt(v);
    gsl_multifit_linear_free(ws);
    gsl_vector_free(c), gsl_vector_free(wv), gsl_vector_free(yv);
    gsl_matrix_free(cov), gsl_matrix_free(X);
}

/* Both fits equal GSL's on the same design, with the noise at the stated level (scale about
 * 1) and three times it (the χ²/dof scaling in force). */
static void drift_fits_match_gsl(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 14);
    double y[MAXM], g[MAXM], hx[MAXM], w[MAXM], dgs[MAXM], es[MAXM];
    int32_t win[MAXM];
    for (int rep = 0; rep < 20; rep++) {
        double noise = rep % 2 ? 3.0 : 1.0, d_true = 1e-3 * (rep - 10);
        size_t m = make_data(rng, d_true, noise, y, g, hx, w, win);
        double d, se, dr, ser, seu_free, seu_within;
        assert_int_equal(runlog_drift_free_fit(y, g, hx, w, win, m, &d, &se, dgs, es), 0);
        gsl_fit(y, g, hx, w, win, m, 1, &dr, &ser, &seu_free);
        assert_rel(d, dr, 1e-9, "free-count slope vs gsl_multifit_wlinear");
        assert_rel(se, ser, 1e-9, "free-count se vs gsl_multifit_wlinear");
        assert_int_equal(runlog_drift_within_fit(y, g, w, win, m, &d, &se), 0);
        gsl_fit(y, g, hx, w, win, m, 0, &dr, &ser, &seu_within);
        assert_rel(d, dr, 1e-9, "median-count slope vs gsl_multifit_wlinear");
        assert_rel(se, ser, 1e-9, "median-count se vs gsl_multifit_wlinear");
        /* the factor with every stretch free (the 2-row stretch left out: the factor gives
         * it a slope, the free fit does not) */
        size_t m3 = m - 2;
        double f = runlog_drift_collinear_factor(g, hx, w, win, m3);
        gsl_fit(y, g, hx, w, win, m3, 1, &dr, &ser, &seu_free);
        gsl_fit(y, g, hx, w, win, m3, 0, &dr, &ser, &seu_within);
        assert_rel(f, seu_free / seu_within, 1e-9, "collinearity factor vs the two GSL fits");
        assert_true(f > 1);
    }
    gsl_rng_free(rng);
}

/* Noise-free residuals with a count error per stretch: the free-count fit returns the planted
 * drift (exact least squares on an exact model, closed form), the median-count fit does not
 * (the count error's trend through hx is read as drift: why the naming uses the free fit). */
static void free_fit_recovers_drift_under_count_error(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 3);
    double y[MAXM], g[MAXM], hx[MAXM], w[MAXM], dgs[MAXM], es[MAXM];
    int32_t win[MAXM];
    /* the 2-row stretch (intercept only) is left out: its count error would not fit */
    size_t m = make_data(rng, -4e-3, 0.0, y, g, hx, w, win) - 2;
    double d, se;
    assert_int_equal(runlog_drift_free_fit(y, g, hx, w, win, m, &d, &se, dgs, es), 0);
    assert_abs(d, -4e-3, 1e-12, "free-count slope on exact data");
    assert_int_equal(runlog_drift_within_fit(y, g, w, win, m, &d, &se), 0);
    assert_true(fabs(d + 4e-3) > 1e-5);
    /* too few rows for the parameters: not defined */
    assert_int_equal(runlog_drift_free_fit(y, g, hx, w, win, 4, &d, &se, dgs, es), -1);
    gsl_rng_free(rng);
}

int main(void)
{
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(drift_fits_match_gsl),
        cmocka_unit_test(free_fit_recovers_drift_under_count_error),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
