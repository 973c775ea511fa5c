/*
 * test_plot_mccabe.c — the McCabe–Thiele diagram (plot_mccabe.c): its series as drawn (an
 * SVG's colours, plot_testutil.h), and the pinch where the closed form for constant alpha
 * puts it.
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

/* McCabe–Thiele for constant α: the pinch is a root of the quadratic
 * (α−1)·lv·x² + (lv + (1−lv)(α−1)·xD − α)·x + (1−lv)·xD = 0 (closed form of
 * αx/(1+(α−1)x) = lv·x + (1−lv)·xD). */
static double pinch_closed_form(double alpha, double lv, double xd)
{
    double a = (alpha - 1) * lv, b = lv + (1 - lv) * (alpha - 1) * xd - alpha, c = (1 - lv) * xd;
    double disc = sqrt(b * b - 4 * a * c);
    double r1 = (-b - disc) / (2 * a), r2 = (-b + disc) / (2 * a);
    /* the root inside (0, xD) */
    return (r1 > 0 && r1 < xd) ? r1 : r2;
}

/* The diagram of one condition (stagecal_plot_mccabe_condition's arguments), which must be
 * drawn with n_series series. */
static stagecal_plot_chart *mccabe_drawn(const stagecal_vle *vle, double xd, double xb, double r,
                                         double n, double emv, size_t n_series)
{
    stagecal_plot_chart *c = NULL;
    stagecal_error err;
    int rc = stagecal_plot_mccabe_condition(vle, xd, xb, r, n, emv, &c, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    assert_int_equal(c->n_series, n_series);
    return c;
}

static void plot_mccabe_series_and_pinch(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, &err);
    assert_non_null(vle);
    const double xd = 0.95, r = 4.0, lv = r / (r + 1);

    /* E_MV = 1: diagonal, equilibrium, operating line, steps, pinch, xD/xB markers */
    stagecal_plot_chart *c = mccabe_drawn(vle, xd, NAN, r, 6.0, 1.0, 6);
    const stagecal_plot_series *pinch = find_series(c, "pinch");
    assert_non_null(pinch);
    /* Brent's tolerance is 1e-12 on x; 1e-9 leaves room for rounding in the quadratic */
    assert_abs(pinch->x[0], pinch_closed_form(2.5, lv, xd), 1e-9, "pinch x, closed form");
    assert_abs(pinch->y[0], lv * pinch->x[0] + (1 - lv) * xd, 1e-12, "pinch on operating line");
    /* the steps start at (xD, xD) and end on the equilibrium curve at the pot */
    const stagecal_plot_series *steps = find_series(c, "stages");
    assert_non_null(steps);
    assert_abs(steps->x[0], xd, 0, "steps start x");
    assert_abs(steps->y[0], xd, 0, "steps start y");
    double yb;
    assert_int_equal(stagecal_vle_ystar(vle, steps->x[steps->n - 1], &yb), STAGECAL_OK);
    /* the pot's vapour lies on the equilibrium curve and on the operating line from the
     * stage above (docs/methods.md, "Stage counting"): agreement to the stepping's round-trip
     * tolerance, 1e-9 */
    assert_abs(steps->y[steps->n - 1], yb, 1e-9, "last step ends on y*(xB)");
    check_svg_series(c, "mccabe", 6);
    assert_int_equal(stagecal_plot_write(c, OUTDIR "/mccabe.png", NULL, &err), STAGECAL_OK);
    stagecal_plot_chart_free(c);

    /* E_MV < 1 adds the pseudo-equilibrium curve */
    c = mccabe_drawn(vle, xd, NAN, r, 6.0, 0.7, 7);
    assert_non_null(find_series(c, "pseudo-equilibrium"));
    check_svg_series(c, "mccabe_emv", 7);
    stagecal_plot_chart_free(c);

    /* total reflux: the operating line is the diagonal, no pinch inside (0, xD) */
    c = mccabe_drawn(vle, xd, NAN, INFINITY, 4.5, 1.0, 4);
    assert_null(find_series(c, "pinch"));
    check_svg_series(c, "mccabe_total", 4);
    stagecal_plot_chart_free(c);

    /* a sample (xD, xB, R): stages from the inversion */
    c = mccabe_drawn(vle, xd, 0.3, r, NAN, 1.0, 6);
    steps = find_series(c, "stages");
    assert_abs(steps->x[steps->n - 1], 0.3, 1e-9, "sample's xB reached (round trip 1e-9)");
    stagecal_plot_chart_free(c);

    /* below the pinch: the inversion's status comes back as EDATA with its name */
    int rc = stagecal_plot_mccabe_condition(vle, xd, 0.01, 1.0, NAN, 1.0, &c, &err);
    assert_int_equal(rc, STAGECAL_EDATA);
    assert_non_null(strstr(err.text, "pinch"));
    stagecal_vle_free(vle);
}
int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(plot_mccabe_series_and_pinch),
    };
    return cmocka_run_group_tests(tests, group_setup, NULL);
}
