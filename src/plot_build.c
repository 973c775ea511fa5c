/*
 * plot_build.c — the fit's chart builders (see stagecal/plot.h): stages against the reflux
 * ratio (or another predictor) with the fitted curve, its bands and envelope, the
 * residuals, the stages-over-time trend and the batch prediction. Domain data in, a chart
 * that owns copies of everything it draws out (plot_fig.c's arena, plot_internal.h).
 */
#include "stagecal/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "internal.h"
#include "plot_internal.h"

/* ---- stages against a predictor ------------------------------------------------------ */

/* Sample groups take the colours the fit does not use (blue, sky blue, black), then
 * cycle; the marker cycles independently so groups stay apart in greyscale. */
static const int group_colours[] = {1, 2, 3, 4, 7};
#define NGROUPCOL (sizeof group_colours / sizeof group_colours[0])

static int check_groups(const size_t *group, size_t n, size_t n_groups, const char *what,
                        stagecal_error *err)
{
    if (n_groups > MAX_GROUPS)
        return error_set(err, STAGECAL_EINVAL, "%s: %zu groups (expected at most %d)", what,
                         n_groups, MAX_GROUPS);
    for (size_t i = 0; group && i < n; i++)
        if (group[i] >= (n_groups ? n_groups : 1))
            return error_set(err, STAGECAL_EINVAL, "%s: sample %zu in group %zu (expected < %zu)",
                             what, i + 1, group[i], n_groups);
    return STAGECAL_OK;
}

/* Adds one POINTS series per group from (x, y); x values that are +inf go to x_inf. */
static void add_groups(plot_fig *f, const double *x, const double *y, const size_t *group, size_t n,
                       const char *const *names, size_t n_groups, double x_inf, const int *colours,
                       size_t ncol)
{
    size_t ng = n_groups ? n_groups : 1;
    double *gx = malloc(n * sizeof *gx), *gy = malloc(n * sizeof *gy);
    if (!gx || !gy) {
        f->oom = 1;
        free(gx);
        free(gy);
        return;
    }
    for (size_t g = 0; g < ng; g++) {
        size_t m = 0;
        for (size_t i = 0; i < n; i++) {
            if ((group ? group[i] : 0) != g)
                continue;
            gx[m] = isinf(x[i]) && x[i] > 0 ? x_inf : x[i];
            gy[m++] = y[i];
        }
        if (m == 0)
            continue;
        char lab[96];
        if (names && names[g])
            snprintf(lab, sizeof lab, "%s", names[g]);
        else if (ng == 1)
            snprintf(lab, sizeof lab, "samples");
        else
            snprintf(lab, sizeof lab, "group %zu", g + 1);
        plot_fig_add(f, STAGECAL_PLOT_POINTS, lab, gx, gy, NULL, m, colours[g % ncol], 0,
                     (int)(g % STAGECAL_PLOT_NMARKERS));
    }
    free(gx);
    free(gy);
}

int stagecal_plot_fit(const stagecal_plot_fit_data *d, stagecal_plot_chart **out,
                      stagecal_error *err)
{
    int rc;
    if (!d || !out || (d->n > 0 && (!d->x || !d->stages)) ||
        (d->grid && (!d->fit || d->n_grid < 2)) || (d->n == 0 && !d->grid))
        return error_set(err, STAGECAL_EINVAL,
                         "stages chart: missing samples or fit arrays (expected samples and/or "
                         "a fitted curve of at least 2 points)");
    *out = NULL;
    if ((rc = check_groups(d->group, d->n, d->n_groups, "stages chart", err)))
        return rc;
    /* right edge for total-reflux samples: beyond every finite abscissa */
    double xmax = -INFINITY, xmin = INFINITY, ymin = INFINITY, ymax = -INFINITY;
    int any_inf = 0;
    for (size_t i = 0; i < d->n; i++) {
        if (isinf(d->x[i]) && d->x[i] > 0)
            any_inf = 1;
        else if (isfinite(d->x[i]))
            xmax = fmax(xmax, d->x[i]), xmin = fmin(xmin, d->x[i]);
        if (isfinite(d->stages[i]))
            ymin = fmin(ymin, d->stages[i]), ymax = fmax(ymax, d->stages[i]);
    }
    const double *edges[5] = {d->fit, d->ci_lo, d->ci_hi, d->pi_lo, d->pi_hi};
    for (size_t i = 0; d->grid && i < d->n_grid; i++) {
        if (isfinite(d->grid[i]))
            xmax = fmax(xmax, d->grid[i]), xmin = fmin(xmin, d->grid[i]);
        for (int e = 0; e < 5; e++)
            if (edges[e] && isfinite(edges[e][i]))
                ymin = fmin(ymin, edges[e][i]), ymax = fmax(ymax, edges[e][i]);
    }
    if (isfinite(d->env_hi))
        xmax = fmax(xmax, d->env_hi);
    if (!isfinite(xmax) || !isfinite(ymin))
        return error_set(err, STAGECAL_EINVAL, "stages chart: no finite point to draw");
    double x_inf = xmax + 0.08 * fmax(xmax - fmin(xmin, 0), 1e-9);

    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    const char *pl = d->predictor_label ? d->predictor_label : "reflux ratio R [-]";
    char title[192], xl[192];
    if (d->title)
        snprintf(title, sizeof title, "%s", d->title);
    else
        snprintf(title, sizeof title, "Stages against %s", pl);
    snprintf(xl, sizeof xl, "%s%s", pl, any_inf ? "  (total reflux drawn at the right edge)" : "");
    plot_fig_labels(&f, title, xl, "equilibrium stages incl. pot [-]");
    double level = d->level > 0 && d->level < 1 ? d->level : 0.95;
    if (d->grid) {
        const double *ys[5] = {d->fit, d->pi_lo, d->pi_hi, d->ci_lo, d->ci_hi};
        char pi_lab[96], ci_lab[96];
        snprintf(pi_lab, sizeof pi_lab, "%.0f %% prediction band (new window)", 100 * level);
        snprintf(ci_lab, sizeof ci_lab, "%.0f %% confidence band (mean)", 100 * level);
        if (plot_fig_envelope(&f, d->grid, ys, d->n_grid, d->env_lo, d->env_hi,
                              d->pi_lo && d->pi_hi ? pi_lab : NULL,
                              d->ci_lo && d->ci_hi ? ci_lab : NULL, "fitted correlation", 0))
            return plot_fig_close(&f, out, err);
    }
    if (isfinite(d->env_lo) || isfinite(d->env_hi)) {
        double pad = 0.04 * fmax(ymax - ymin, 1e-9);
        double ex[5] = {d->env_lo, d->env_lo, NAN, d->env_hi, d->env_hi};
        double ey[5] = {ymin - pad, ymax + pad, NAN, ymin - pad, ymax + pad};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "fitted envelope", ex, ey, NULL, 5, 6, 1, 0);
    }
    if (d->n > 0)
        add_groups(&f, d->x, d->stages, d->group, d->n, d->group_names, d->n_groups, x_inf,
                   group_colours, NGROUPCOL);
    f.c->legend_pos = 1;
    return plot_fig_close(&f, out, err);
}

/* ---- residuals ------------------------------------------------------------------------ */

int stagecal_plot_resid(const stagecal_plot_resid_data *d, stagecal_plot_chart **out,
                        stagecal_error *err)
{
    int rc;
    if (!d || !out || d->n == 0 || !d->fitted || !d->resid)
        return error_set(err, STAGECAL_EINVAL, "residual chart: no residuals to draw");
    *out = NULL;
    if ((rc = check_groups(d->group, d->n, d->n_groups, "residual chart", err)))
        return rc;
    const double *x = d->time_s ? d->time_s : d->fitted;
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < d->n; i++)
        if (isfinite(x[i]))
            lo = fmin(lo, x[i]), hi = fmax(hi, x[i]);
    if (!isfinite(lo))
        return error_set(err, STAGECAL_EINVAL, "residual chart: no finite abscissa");
    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(
        &f,
        d->title ? d->title
                 : (d->time_s ? "Residuals against time" : "Residuals against fitted stages"),
        d->time_s ? "sample time [UTC date]" : "fitted stages incl. pot [-]",
        "residual, observed \xe2\x88\x92 fitted [stages]");
    f.c->x_time = d->time_s != NULL;
    double pad = hi > lo ? 0.04 * (hi - lo) : 0.5;
    double zx[2] = {lo - pad, hi + pad}, zy[2] = {0, 0};
    f.c->x_min = zx[0];
    f.c->x_max = zx[1];
    plot_fig_add(&f, STAGECAL_PLOT_LINE, "zero", zx, zy, NULL, 2, 6, 2, 0);
    static const int cols[] = {0, 1, 2, 3, 4, 5, 7};
    add_groups(&f, x, d->resid, d->group, d->n, d->group_names, d->n_groups, hi, cols,
               sizeof cols / sizeof cols[0]);
    f.c->legend_pos = 1;
    return plot_fig_close(&f, out, err);
}

/* ---- trend --------------------------------------------------------------------------- */

int stagecal_plot_trend(const stagecal_plot_trend_data *d, stagecal_plot_chart **out,
                        stagecal_error *err)
{
    int rc;
    if (!d || !out || d->n == 0 || !d->time_s || !d->stages || (d->line_t && !d->line) ||
        (d->fc_t && !d->fc))
        return error_set(err, STAGECAL_EINVAL, "trend chart: no calibrations to draw");
    *out = NULL;
    double t0 = INFINITY, t1 = -INFINITY;
    for (size_t i = 0; i < d->n; i++)
        if (isfinite(d->time_s[i]))
            t0 = fmin(t0, d->time_s[i]), t1 = fmax(t1, d->time_s[i]);
    for (size_t i = 0; d->fc_t && i < d->n_fc; i++)
        if (isfinite(d->fc_t[i]))
            t0 = fmin(t0, d->fc_t[i]), t1 = fmax(t1, d->fc_t[i]);
    if (!isfinite(t0))
        return error_set(err, STAGECAL_EINVAL, "trend chart: no finite calibration time");
    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(&f, d->title ? d->title : "Stage trend with control limits and forecast",
                    "calibration date [UTC]", "equilibrium stages incl. pot [-]");
    f.c->x_time = 1;
    if (d->fc_t && d->fc_lo && d->fc_hi)
        plot_fig_add(&f, STAGECAL_PLOT_BAND, "forecast band", d->fc_t, d->fc_lo, d->fc_hi, d->n_fc,
                     5, 0, 0);
    if (d->line_t && d->n_line > 0)
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "trend", d->line_t, d->line, NULL, d->n_line, 0, 0, 0);
    if (d->fc_t && d->n_fc > 0)
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "forecast", d->fc_t, d->fc, NULL, d->n_fc, 5, 1, 0);
    if (isfinite(d->lcl) || isfinite(d->ucl)) {
        double cx[5] = {t0, t1, NAN, t0, t1};
        double cy[5] = {d->lcl, d->lcl, NAN, d->ucl, d->ucl};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "control limits", cx, cy, NULL, 5, 4, 1, 0);
    }
    if (isfinite(d->spec_stages)) {
        double sx[2] = {t0, t1}, sy[2] = {d->spec_stages, d->spec_stages};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "minimum for product specification", sx, sy, NULL, 2,
                     3, 3, 0);
    }
    plot_fig_add(&f, STAGECAL_PLOT_POINTS, "calibrations", d->time_s, d->stages, NULL, d->n, 6, 0,
                 0);
    if (d->alarm) {
        size_t m = 0;
        double *ax = malloc(d->n * sizeof *ax), *ay = malloc(d->n * sizeof *ay);
        if (!ax || !ay)
            f.oom = 1;
        for (size_t i = 0; ax && ay && i < d->n; i++)
            if (d->alarm[i]) {
                ax[m] = d->time_s[i];
                ay[m++] = d->stages[i];
            }
        if (m > 0)
            plot_fig_add(&f, STAGECAL_PLOT_POINTS, "alarm", ax, ay, NULL, m, 1, 0, 6);
        if (m > 0 && !f.oom)
            f.s[f.c->n_series - 1].width = 2.2; /* a large ring around the calibration */
        free(ax);
        free(ay);
    }
    f.c->legend_pos = 2;
    return plot_fig_close(&f, out, err);
}

/* ---- batch prediction ---------------------------------------------------------------- */

int stagecal_plot_batch(const stagecal_plot_batch_data *d, stagecal_plot_chart **out,
                        stagecal_error *err)
{
    int rc;
    if (!d || !out || !d->t_s || d->n_t < 2 || !d->curves || d->n_curves == 0 ||
        d->n_curves > STAGECAL_PLOT_NCOLOURS)
        return error_set(err, STAGECAL_EINVAL,
                         "batch chart: expected at least 2 times and 1..%d curves",
                         STAGECAL_PLOT_NCOLOURS);
    *out = NULL;
    for (size_t c = 0; c < d->n_curves; c++)
        if (!d->curves[c].y)
            return error_set(err, STAGECAL_EINVAL, "batch chart: curve %zu has no values", c + 1);
    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(&f, d->title ? d->title : "Batch prediction", "time since start of batch [h]",
                    d->y_label ? d->y_label : "predicted value");
    double *th = malloc(d->n_t * sizeof *th);
    if (!th) {
        f.oom = 1;
        return plot_fig_close(&f, out, err);
    }
    for (size_t i = 0; i < d->n_t; i++)
        th[i] = d->t_s[i] / 3600.0; /* SI seconds → hours at the edge */
    /* curve c: colour c (skipping black, kept for the specification line) */
    for (size_t c = 0; c < d->n_curves; c++) {
        const stagecal_plot_batch_curve *cv = &d->curves[c];
        int col = (int)(c < 6 ? c : c + 1) % STAGECAL_PLOT_NCOLOURS;
        char lab[96];
        if (cv->y_lo && cv->y_hi) {
            snprintf(lab, sizeof lab, "%s band", cv->name ? cv->name : "curve");
            plot_fig_add(&f, STAGECAL_PLOT_BAND, lab, th, cv->y_lo, cv->y_hi, d->n_t, col, 0, 0);
        }
    }
    for (size_t c = 0; c < d->n_curves; c++) {
        const stagecal_plot_batch_curve *cv = &d->curves[c];
        int col = (int)(c < 6 ? c : c + 1) % STAGECAL_PLOT_NCOLOURS;
        plot_fig_add(&f, STAGECAL_PLOT_LINE, cv->name ? cv->name : "curve", th, cv->y, NULL, d->n_t,
                     col, (int)(c % STAGECAL_PLOT_NLINES), 0);
    }
    if (isfinite(d->spec)) {
        double sx[2] = {th[0], th[d->n_t - 1]}, sy[2] = {d->spec, d->spec};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "specification", sx, sy, NULL, 2, 6, 2, 0);
    }
    free(th);
    f.c->legend_pos = 1;
    return plot_fig_close(&f, out, err);
}
