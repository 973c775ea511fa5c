/*
 * test_plot_build.c — the fit's charts (plot_build.c): stages against R with groups, the
 * fitted curve, its bands and envelope; residuals, trend and batch charts; each holding the
 * expected series as drawn in the SVG (plot_testutil.h).
 */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "plot_testutil.h"
#include "stagecal/calibrate.h"
#include "stagecal/plot.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "testutil.h"

static const double gx[6] = {0.5, 1, 2, 3, 5, INFINITY};
static const double gs[6] = {4.1, 5.0, 6.2, 6.9, 7.4, 8.1};
static const size_t gg[6] = {0, 0, 1, 1, 1, 0};
static const char *const gnames[2] = {"run A", "run B"};

static void plot_fit_chart_series(void **state)
{
    (void)state;
    double grid[20], fit[20], flo_[20], fhi_[20], plo[20], phi[20];
    for (int i = 0; i < 20; i++) {
        grid[i] = 0.3 + 5.0 * i / 19.0;
        fit[i] = 8 * (1 - exp(-0.6 * grid[i]));
        flo_[i] = fit[i] - 0.3, fhi_[i] = fit[i] + 0.3, plo[i] = fit[i] - 0.8,
        phi[i] = fit[i] + 0.8;
    }
    stagecal_plot_fit_data d = {NULL, gx,   gs,  gg,  6,  gnames, 2,   grid, fit,
                                flo_, fhi_, plo, phi, 20, 0.5,    5.0, 0.95, NULL};
    stagecal_plot_chart *c = NULL;
    stagecal_error err;
    assert_int_equal(stagecal_plot_fit(&d, &c, &err), STAGECAL_OK);
    /* inside the envelope [0.5, 5]: prediction band, confidence band, fit; beyond it the
     * same three (lighter bands, dashed line); envelope, run A, run B. 8 colours: the two
     * parts of the fitted line share theirs */
    assert_int_equal(c->n_series, 9);
    assert_non_null(strstr(c->x_label, "total reflux drawn at the right edge"));
    check_svg_series(c, "fit", 8);
    /* the extrapolated part starts exactly at the envelope's edge, where the fitted part
     * ends, on the curve: the grid (step 0.263) crosses 5.0 between points, so the edge
     * point is interpolated; the chord of 8(1 − e^(−0.6x)) departs from the curve by at
     * most max|f''|·h²/8 = 2.88·e^(−2.82)·0.263²/8 < 2e-3 there (chord error bound) */
    const stagecal_plot_series *fin = find_series(c, "fitted correlation"),
                               *fex = find_series(c, "extrapolated");
    assert_non_null(fin);
    assert_non_null(fex);
    assert_true(fex->line != fin->line); /* another line style */
    assert_true(fin->x[0] == 0.5 && fin->x[fin->n - 1] == 5.0);
    size_t right = 0;
    while (right < fex->n && !isnan(fex->x[right]))
        right++;
    assert_true(right > 1 && right + 1 < fex->n); /* a left part, a NaN, a right part */
    assert_true(fex->x[right - 1] == 0.5);        /* the left part ends at the edge */
    assert_true(fex->x[right + 1] == 5.0);        /* the right part starts at the edge */
    assert_true(fex->y[right + 1] == fin->y[fin->n - 1]);
    assert_abs(fex->y[right + 1], 8 * (1 - exp(-3.0)), 2e-3, "edge point on the curve");
    for (size_t k = right + 1; k < fex->n; k++)
        assert_true(fex->x[k] >= 5.0);
    for (size_t k = 0; k < fin->n; k++)
        assert_true(fin->x[k] >= 0.5 && fin->x[k] <= 5.0);
    assert_int_equal(stagecal_plot_write(c, OUTDIR "/fit.png", NULL, &err), STAGECAL_OK);
    stagecal_plot_chart_free(c);

    size_t bad[6] = {0, 0, 2, 1, 1, 0};
    d.group = bad;
    assert_int_equal(stagecal_plot_fit(&d, &c, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "sample 3 in group 2"));
}

static void plot_resid_trend_batch_series(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_plot_chart *c = NULL;
    double res[6] = {0.1, -0.2, 0.05, 0.3, -0.1, 0.0}, t[6];
    for (int i = 0; i < 6; i++)
        t[i] = 1.75e9 + 86400.0 * 3 * i;
    stagecal_plot_resid_data rd = {gs, res, NULL, gg, 6, gnames, 2, NULL};
    assert_int_equal(stagecal_plot_resid(&rd, &c, &err), STAGECAL_OK);
    assert_int_equal(c->n_series, 3); /* zero line + two runs */
    check_svg_series(c, "resid_fitted", 3);
    stagecal_plot_chart_free(c);
    rd.time_s = t;
    assert_int_equal(stagecal_plot_resid(&rd, &c, &err), STAGECAL_OK);
    assert_int_equal(c->x_time, 1);
    check_svg_series(c, "resid_time", 3);
    stagecal_plot_chart_free(c);

    double tt[8], st[8], lt[2], ln[2], ft[3], fc[3], flo[3], fhi[3];
    int alarm[8] = {0, 0, 0, 0, 0, 0, 1, 1};
    for (int i = 0; i < 8; i++) {
        tt[i] = 1.70e9 + 30 * 86400.0 * i;
        st[i] = 12 - 0.15 * i + (i % 2 ? 0.1 : -0.1);
    }
    lt[0] = tt[0], lt[1] = tt[7], ln[0] = 12, ln[1] = 12 - 0.15 * 7;
    for (int i = 0; i < 3; i++) {
        ft[i] = tt[7] + 60 * 86400.0 * i;
        fc[i] = ln[1] - 0.15 * 2 * i;
        flo[i] = fc[i] - 0.2 * (i + 1), fhi[i] = fc[i] + 0.2 * (i + 1);
    }
    stagecal_plot_trend_data td = {tt,   st, 8,  alarm, lt,  ln, 2,    11.2,
                                   12.6, ft, fc, flo,   fhi, 3,  10.5, NULL};
    assert_int_equal(stagecal_plot_trend(&td, &c, &err), STAGECAL_OK);
    /* forecast band, trend, forecast, control limits, spec line, calibrations, alarms */
    assert_int_equal(c->n_series, 7);
    check_svg_series(c, "trend", 7);
    assert_int_equal(stagecal_plot_write(c, OUTDIR "/trend.png", NULL, &err), STAGECAL_OK);
    stagecal_plot_chart_free(c);

    double bt[30], xd[30], xdl[30], xdh[30], xb[30];
    for (int i = 0; i < 30; i++) {
        bt[i] = 600.0 * i;
        xd[i] = 0.97 - 0.3 * pow(i / 29.0, 3);
        xdl[i] = xd[i] - 0.01 * i / 29.0, xdh[i] = xd[i] + 0.01 * i / 29.0;
        xb[i] = 0.4 * exp(-i / 15.0);
    }
    stagecal_plot_batch_curve curves[2] = {{"xD", xd, xdl, xdh}, {"xB", xb, NULL, NULL}};
    stagecal_plot_batch_data bd = {bt, 30, curves, 2, "mole fraction [mol/mol]", 0.9, NULL};
    assert_int_equal(stagecal_plot_batch(&bd, &c, &err), STAGECAL_OK);
    assert_int_equal(c->n_series, 4); /* xD band, xD, xB, specification */
    assert_abs(c->series[1].x[29], 600.0 * 29 / 3600.0, 1e-12, "batch time shown in h");
    check_svg_series(c, "batch", 4);
    stagecal_plot_chart_free(c);
}
int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(plot_fit_chart_series),
        cmocka_unit_test(plot_resid_trend_batch_series),
    };
    return cmocka_run_group_tests(tests, group_setup, NULL);
}
