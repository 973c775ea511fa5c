/*
 * plot_design.c — the chart of a proposal (`stagecal probe --chart-out`): stages against R
 * with the confidence band now and the band expected after the proposed tests, the fitted
 * curve, the tests on it and the conditions of interest. Beyond the fitted envelope the
 * curve is dashed and the bands lighter (extrapolated), as on the fit chart. The numbers
 * come from the design library (stagecal_design_chart_curves); this file only draws.
 */
#include <math.h>
#include <stdio.h>

#include "internal.h"
#include "plot_internal.h"

int stagecal_plot_design(const stagecal_design_curves *c, stagecal_plot_chart **out,
                         stagecal_error *err)
{
    int rc;
    if (!c || !out || c->n < 2 || c->n > STAGECAL_DESIGN_CURVE_N ||
        c->n_tests > STAGECAL_DESIGN_MAXK || c->n_at > STAGECAL_DESIGN_CURVE_MAXAT)
        return error_set(err, STAGECAL_EINVAL,
                         "design chart: no curves to draw (expected stagecal_design_chart_curves' "
                         "result)");
    *out = NULL;
    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    char title[192], lab[96];
    const char *id = c->column_id ? c->column_id : "column";
    if (isfinite(c->f_load))
        snprintf(title, sizeof title, "%s: where to run the next tests (F = %.3g Pa^0.5)", id,
                 c->f_load);
    else
        snprintf(title, sizeof title, "%s: where to run the next tests", id);
    plot_fig_labels(&f, title, "reflux ratio R [-]", "stages incl. pot [-]");
    double pct = 100 * (c->level > 0 && c->level < 1 ? c->level : 0.95);
    const double *ys[5] = {c->stages, c->now_lo, c->now_hi, c->after_lo, c->after_hi};
    char after[96];
    snprintf(lab, sizeof lab, "%.0f %% band now", pct);
    snprintf(after, sizeof after, "%.0f %% band after the tests (expected)", pct);
    if (plot_fig_envelope(&f, c->r, ys, c->n, c->env_lo, c->env_hi, lab, after, "fitted stages", 6))
        return plot_fig_close(&f, out, err);
    /* the conditions under the tests, larger: a test proposed at a condition of interest
     * shows inside its ring */
    stagecal_plot_series *s;
    if (c->n_at && (s = plot_fig_add(&f, STAGECAL_PLOT_POINTS, "conditions of interest", c->at_r,
                                     c->at_stages, NULL, c->n_at, 2, 0, 0)))
        s->width = 2.0;
    if (c->n_tests && (s = plot_fig_add(&f, STAGECAL_PLOT_POINTS, "proposed tests", c->test_r,
                                        c->test_stages, NULL, c->n_tests, 1, 0, 2)))
        s->width = 1.2;
    f.c->legend_pos = 1;
    return plot_fig_close(&f, out, err);
}
