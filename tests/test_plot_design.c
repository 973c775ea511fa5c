/*
 * test_plot_design.c — the chart of a proposal (`stagecal probe --chart-out`): its numbers
 * (stagecal_design_chart_curves, design library) and its drawing (stagecal_plot_design,
 * charts library).
 *
 * Sources of truth: the model file's own confidence band (stagecal_model_eval: the
 * covariance of the fit, t quantile from GSL) for the band "now" — the design route
 * reaches it through the inverse of that covariance, so agreement is a check of two
 * independent paths; monotonicity of information (adding windows cannot widen the band,
 * and t(dof + K) < t(dof)) for the band "after"; the fitted envelope of the model for
 * where the extrapolated (dashed, lighter) part starts.
 */
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "demo_points_model.h"
#include "testutil.h"
#include "stagecal/design.h"
#include "stagecal/model.h"
#include "stagecal/plot.h"
#include "stagecal/regress.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

static const stagecal_plot_series *find_series(const stagecal_plot_chart *c, const char *label)
{
    for (size_t i = 0; i < c->n_series; i++)
        if (c->series[i].label && strstr(c->series[i].label, label))
            return &c->series[i];
    return NULL;
}

static void design_chart_curves_and_chart(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_design_problem pb;
    demo_points_model(&m, "saturating");
    snprintf(m.column_id, sizeof m.column_id, "demo-column");
    assert_true(isfinite(m.r_min) && isfinite(m.r_max));
    assert_int_equal(stagecal_design_from_model(&m, &pb, NULL), STAGECAL_OK);
    /* conditions inside, beyond the envelope (extrapolated) and at total reflux */
    double beyond = 1.6 * m.r_max;
    stagecal_design_point at[3] = {
        {0.5 * (m.r_min + m.r_max), NAN, 1}, {beyond, NAN, 1}, {INFINITY, NAN, 1}};
    stagecal_design_at out[3];
    stagecal_design_result res;
    stagecal_design_params par = stagecal_design_default_params();
    par.starts = 4;
    assert_int_equal(
        stagecal_design_propose(&pb, at, 3, &par, m.r_min, m.r_max, NAN, NAN, &res, out, NULL),
        STAGECAL_OK);
    stagecal_design_curves *c = malloc(sizeof *c);
    assert_non_null(c);
    assert_int_equal(stagecal_design_chart_curves(&m, &pb, &res, out, 3, c, NULL), STAGECAL_OK);
    assert_int_equal(c->n, STAGECAL_DESIGN_CURVE_N);
    assert_int_equal(c->n_at, 2); /* total reflux has no place on the R axis */
    assert_int_equal(c->skipped_at, 1);
    assert_true(c->r[c->n - 1] >= beyond); /* the grid reaches every condition */
    assert_true(c->r[0] <= m.r_min);
    assert_string_equal(c->column_id, "demo-column");
    for (size_t i = 0; i < c->n; i++) {
        stagecal_model_point pt;
        assert_int_equal(stagecal_model_eval(&m, c->r[i], NAN, 0, &pt, NULL), STAGECAL_OK);
        assert_rel(c->stages[i], pt.stages, 1e-14, "fitted stages");
        /* tolerance: the design route inverts the covariance twice (eigen-decompositions
         * of its correlation matrix), as in test_design: ~1e-12 measured */
        assert_rel(0.5 * (c->now_hi[i] - c->now_lo[i]), 0.5 * (pt.ci_high - pt.ci_low), 1e-9,
                   "band now = the model file's confidence band");
        assert_true(c->after_hi[i] - c->after_lo[i] < c->now_hi[i] - c->now_lo[i]);
    }
    for (size_t t = 0; t < c->n_tests; t++) {
        stagecal_model_point pt;
        assert_int_equal(stagecal_model_eval(&m, c->test_r[t], NAN, 0, &pt, NULL), STAGECAL_OK);
        assert_rel(c->test_stages[t], pt.stages, 1e-14, "a test on the curve");
    }

    stagecal_plot_chart *ch = NULL;
    stagecal_error err;
    assert_int_equal(stagecal_plot_design(c, &ch, &err), STAGECAL_OK);
    const stagecal_plot_series *now = find_series(ch, "band now"),
                               *after = find_series(ch, "band after the tests"),
                               *fit = find_series(ch, "fitted stages"),
                               *ex = find_series(ch, "extrapolated"),
                               *cond = find_series(ch, "conditions of interest");
    assert_non_null(now);
    assert_non_null(after);
    assert_non_null(fit);
    assert_non_null(ex);
    assert_non_null(cond);
    assert_int_equal(cond->n, 2);
    /* the extrapolated part: another line style, lighter bands (line 1 on a band), and it
     * starts exactly where the fitted part ends, at the envelope's right edge */
    assert_true(ex->line != fit->line);
    assert_true(fit->x[fit->n - 1] == m.r_max);
    size_t k = 0;
    while (k < ex->n && !(ex->x[k] >= m.r_max))
        k++;
    assert_true(k < ex->n && ex->x[k] == m.r_max);
    assert_true(ex->y[k] == fit->y[fit->n - 1]);
    size_t light = 0;
    for (size_t i = 0; i < ch->n_series; i++)
        light += ch->series[i].kind == STAGECAL_PLOT_BAND && ch->series[i].line == 1 &&
                 !ch->series[i].label;
    assert_int_equal(light, 2); /* both bands beyond the envelope */
    /* drawn: the title is SVG text */
    char *svg = NULL;
    assert_int_equal(stagecal_plot_svg(ch, NULL, &svg, NULL, &err), STAGECAL_OK);
    assert_non_null(strstr(svg, "where to run the next tests"));
    assert_non_null(strstr(svg, "<text"));
    free(svg);
    stagecal_plot_chart_free(ch);

    /* refused: no curves; every condition at total reflux */
    assert_int_equal(stagecal_plot_design(NULL, &ch, &err), STAGECAL_EINVAL);
    stagecal_design_at inf_only = out[2];
    stagecal_design_result none = res;
    none.k = 0;
    none.r_lo = none.r_hi = NAN;
    m.r_max = NAN;
    assert_int_equal(stagecal_design_chart_curves(&m, &pb, &none, &inf_only, 1, c, &err),
                     STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "total reflux"));
    free(c);
    stagecal_model_free(&m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(design_chart_curves_and_chart),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
