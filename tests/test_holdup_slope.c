/*
 * test_holdup_slope.c — dxD/dt by local quadratics and the variance its noise gives a
 * window's mean (src/holdup_slope.c), against closed forms of least squares and against
 * the empirical variance of the slope estimator itself over many noisy copies of a log
 * (GSL's Mersenne Twister and Gaussian sampler).
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "holdup_internal.h"
#include "runlog_internal.h"
#include "stagecal/holdup.h"
#include "stagecal/runlog.h"
#include "testutil.h"

/* The slope weights of a least-squares quadratic differentiate any quadratic exactly (closed
 * form: a quadratic is its own least-squares quadratic): Σw = 0, Σw·(t − tc) = 1 and the slope
 * of 0.9 − 3e-5·t + 2e-9·t² at tc is −3e-5 + 4e-9·tc, on uneven times, with a point left out
 * (x NaN: weight 0); 1e-12 relative (rounding of sums over 9 points of size ≤ 1e4 s). */
static void holdup_slope_weights_differentiate_a_quadratic(void **state)
{
    (void)state;
    double t[9] = {0, 100, 250, 330, 480, 600, 690, 800, 1000}, x[9], w[9];
    for (int k = 0; k < 9; k++)
        x[k] = 0.9 - 3e-5 * t[k] + 2e-9 * t[k] * t[k];
    x[6] = NAN;
    size_t c = 3;
    assert_true(holdup_slope_weights(t, x, 0, 8, c, w));
    double sw = 0, swt = 0, slope = 0;
    for (int k = 0; k < 9; k++) {
        if (k == 6) {
            assert_true(w[k] == 0);
            continue;
        }
        sw += w[k], swt += w[k] * (t[k] - t[c]), slope += w[k] * x[k];
    }
    assert_abs(sw, 0, 1e-12 / 100, "weights sum to 0 (per second)");
    assert_rel(swt, 1.0, 1e-12, "weights times time sum to 1");
    assert_rel(slope, -3e-5 + 4e-9 * t[c], 1e-12, "slope of the quadratic");
    /* two points are not a quadratic */
    for (int k = 2; k < 9; k++)
        x[k] = NAN;
    assert_false(holdup_slope_weights(t, x, 0, 8, c, w));
}

/* One stretch at R = 2, 200 rows 2 min apart, xD a falling quadratic plus Gaussian noise
 * u = 0.002. The window's slope variance (holdup_window_slope_var) against the sample variance
 * of mean_i gs_i·(dxD/dt_i estimated − true) over 2000 noisy copies, the slopes from
 * holdup_row_slope (the compensation's own estimator): the sample variance of 2000 normal
 * draws has a relative standard deviation √(2/1999) = 3.2 %, so 13 % is four of them. A
 * window inside the stretch and one reaching both its ends (the one-sided local fits there).
 * Taken as an error common to the rows (the rows' mean of (gs·se(dxD/dt))²) the same noise
 * states a variance over ten times larger on the long window: printed, and checked > 10. */
static void holdup_window_slope_var_matches_the_estimator(void **state)
{
    (void)state;
    enum { ROWS = 200, COPIES = 2000 };
    const double u = 0.002;
    char *csv = malloc(32768);
    assert_non_null(csv);
    size_t len = (size_t)snprintf(csv, 32768, "time[s],W[mol],xD[mol/mol],xB[mol/mol],R[-]\n");
    double truth[ROWS], dtrue[ROWS], gs[ROWS];
    for (int i = 0; i < ROWS; i++) {
        double t = 120.0 * i;
        truth[i] = 0.95 - 1e-6 * t - 2e-11 * t * t;
        dtrue[i] = -1e-6 - 4e-11 * t;
        gs[i] = -1500.0 - 2.0 * i; /* shift per unit slope [s], varying along the run */
        len += (size_t)snprintf(csv + len, 32768 - len, "%g,%g,%.17g,0.4,2\n", t, 1000.0 - i,
                                truth[i]);
    }
    stagecal_runlog *log = stagecal_runlog_alloc();
    assert_int_equal(
        stagecal_runlog_read_buffer(log, csv, len, "slope.csv", NULL, NULL, NULL, NULL), 0);
    free(csv);
    assert_int_equal((int)log->n, ROWS);
    const size_t win[2][2] = {{40, 160}, {0, ROWS - 1}};
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 1414);
    for (int wi = 0; wi < 2; wi++) {
        size_t first = win[wi][0], last = win[wi][1];
        double var, n = (double)(last - first + 1), s1 = 0, s2 = 0, common = 0;
        assert_int_equal(holdup_window_slope_var(log, first, last, gs, u, &var), 0);
        for (int c = 0; c < COPIES; c++) {
            for (int i = 0; i < ROWS; i++)
                log->xd[i] = truth[i] + gsl_ran_gaussian(rng, u);
            double m = 0;
            for (size_t i = first; i <= last; i++) {
                double se, d = holdup_row_slope(log, 0, ROWS, i, NULL, u, &se);
                assert_true(isfinite(d));
                m += gs[i] * (d - dtrue[i]) / n;
                if (c == 0)
                    common += gs[i] * se * gs[i] * se / n;
            }
            s1 += m, s2 += m * m;
        }
        double mean = s1 / COPIES, sv = (s2 - COPIES * mean * mean) / (COPIES - 1);
        print_message("window [%zu, %zu]: stated %.4g, sample %.4g (ratio %.3f); as a common "
                      "error %.4g (x%.1f)\n",
                      first, last, var, sv, sv / var, common, common / var);
        assert_rel(sv, var, 0.13, "window slope variance against the estimator's");
        assert_true(common > 10 * var);
    }
    /* no slope sensitivity: nothing to add */
    double v0, zeros[ROWS] = {0};
    assert_int_equal(holdup_window_slope_var(log, 0, ROWS - 1, zeros, u, &v0), 0);
    assert_true(v0 == 0);
    gsl_rng_free(rng);
    stagecal_runlog_free(log);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(holdup_slope_weights_differentiate_a_quadratic),
        cmocka_unit_test(holdup_window_slope_var_matches_the_estimator),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
