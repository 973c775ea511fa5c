/*
 * plot_trend.c — the trend chart of a column's fits over time
 * (stagecal_plot_trend_history), the batch trajectory chart (stagecal_plot_trajectory) and
 * the self-starting EWMA/CUSUM chart of runs (stagecal_plot_selfstart), all from their
 * modules' results (trend.h, batch.h, chart.h), nothing recomputed but the trend lines'
 * values at the chart's abscissae (stagecal_trend_line_eval).
 *
 * Extrapolated parts are drawn apart: the trend line beyond the last fit of its segment
 * (the forecast) dashed with a light band, starting exactly at that last fit's time; the
 * batch rows outside the model's fitted envelope dashed.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "plot_internal.h"

#define LINE_POINTS 60 /* points on a segment's trend line */

/* ---- trend --------------------------------------------------------------------------- */

/* The line of segment g with its band from t0 to t1 (LINE_POINTS points, t0 and t1
 * exact) into x, v, lo, hi. */
static void line_points(const stagecal_trend_segment *g, double t0, double t1, double *x, double *v,
                        double *lo, double *hi)
{
    for (size_t i = 0; i < LINE_POINTS; i++) {
        double t = i + 1 == LINE_POINTS ? t1 : t0 + (t1 - t0) * (double)i / (LINE_POINTS - 1);
        double se;
        x[i] = t;
        stagecal_trend_line_eval(&g->fit, t, &v[i], &se, &lo[i], &hi[i]);
    }
}

/* Each fitted segment's trend line and band; after the last, the forecast up to t_end,
 * dashed (extrapolated). */
static void trend_lines(plot_fig *f, const stagecal_trend_history *h, double t_end)
{
    char lab[160];
    double x[LINE_POINTS], v[LINE_POINTS], lo[LINE_POINTS], hi[LINE_POINTS];
    double level = 0.95;
    for (size_t s = 0; s < h->n_segments; s++) {
        const stagecal_trend_segment *g = &h->segments[s];
        if (!g->has_fit || g->n == 0)
            continue;
        level = g->fit.level;
        double t0 = h->points[g->first].t_s, t1 = h->points[g->first + g->n - 1].t_s;
        line_points(g, t0, t1, x, v, lo, hi);
        snprintf(lab, sizeof lab, "trend, %.0f %% band", 100 * level);
        plot_fig_add(f, STAGECAL_PLOT_BAND, s + 1 == h->n_segments ? lab : NULL, x, lo, hi,
                     LINE_POINTS, 0, 0, 0);
        plot_fig_add(f, STAGECAL_PLOT_LINE, s + 1 == h->n_segments ? "trend" : NULL, x, v, NULL,
                     LINE_POINTS, 0, 0, 0);
        if (s + 1 == h->n_segments && t_end > t1) { /* the forecast: extrapolated */
            line_points(g, t1, t_end, x, v, lo, hi);
            plot_fig_add(f, STAGECAL_PLOT_BAND, NULL, x, lo, hi, LINE_POINTS, 0, 1, 0);
            plot_fig_add(f, STAGECAL_PLOT_LINE, "forecast (extrapolated): dashed, light band", x, v,
                         NULL, LINE_POINTS, 0, 1, 0);
        }
    }
}

/* The fits with their intervals (± 2 se) and the EWMA alarms. */
static void fit_points(plot_fig *f, const stagecal_trend_history *h)
{
    double *px = malloc(h->n * sizeof *px), *py = malloc(h->n * sizeof *py),
           *pz = malloc(h->n * sizeof *pz), *ey = malloc(h->n * sizeof *ey);
    if (!px || !py || !pz || !ey) {
        f->oom = 1;
    } else {
        for (size_t i = 0; i < h->n; i++) {
            px[i] = h->points[i].t_s;
            ey[i] = h->points[i].value;
            py[i] = ey[i] - 2 * h->points[i].se;
            pz[i] = ey[i] + 2 * h->points[i].se;
        }
        plot_fig_add(f, STAGECAL_PLOT_ERRBAR, "fit \xc2\xb1 2 se", px, py, pz, h->n, 6, 0, 0);
        plot_fig_add(f, STAGECAL_PLOT_POINTS, "fit at the reference condition", px, ey, NULL, h->n,
                     6, 0, 0);
        size_t m = 0;
        for (size_t i = 0; h->chart && i < h->n; i++)
            if (h->chart[i].alarm) {
                px[m] = h->points[i].t_s;
                py[m++] = h->points[i].value;
            }
        stagecal_plot_series *s;
        if (m &&
            (s = plot_fig_add(f, STAGECAL_PLOT_POINTS, "EWMA alarm", px, py, NULL, m, 1, 0, 6)))
            s->width = 2.2;
    }
    free(px);
    free(py);
    free(pz);
    free(ey);
}

/* The requirement from first_t to t_end and, when the forecast crosses it, the crossing
 * with its band. */
static void required_line(plot_fig *f, const stagecal_trend_forecast *fc, double first_t,
                          double t_end)
{
    char lab[160];
    double rx[2] = {first_t, t_end}, ry[2] = {fc->required, fc->required};
    snprintf(lab, sizeof lab, "required: %.3g", fc->required);
    plot_fig_add(f, STAGECAL_PLOT_LINE, lab, rx, ry, NULL, 2, 3, 3, 0);
    if (fc->status == STAGECAL_FORECAST_OK) {
        double cx[2] = {fmax(fc->low_s, first_t), fmin(fc->high_s, t_end)};
        stagecal_plot_series *s = plot_fig_add(f, STAGECAL_PLOT_LINE, "forecast crossing, band", cx,
                                               ry, NULL, 2, 4, 0, 0);
        if (s)
            s->width = 5;
        plot_fig_add(f, STAGECAL_PLOT_POINTS, NULL, &fc->t_cross_s, &fc->required, NULL, 1, 4, 0,
                     4);
    }
}

/* The column's events: a vertical line over the fits' range and the kind's name. */
static void event_lines(plot_fig *f, const stagecal_plot_trend_history_data *d)
{
    const stagecal_trend_history *h = d->h;
    char lab[160];
    double ylo = INFINITY, yhi = -INFINITY;
    for (size_t i = 0; i < h->n; i++)
        ylo = fmin(ylo, h->points[i].value - 2 * h->points[i].se),
        yhi = fmax(yhi, h->points[i].value + 2 * h->points[i].se);
    for (size_t e = 0; e < d->n_events; e++) {
        const stagecal_trend_event *ev = &d->events[e];
        if (d->column_id && strcmp(ev->column_id, d->column_id) != 0)
            continue;
        double ex[2] = {ev->t_s, ev->t_s}, eyy[2] = {ylo, yhi};
        plot_fig_add(f, STAGECAL_PLOT_LINE, NULL, ex, eyy, NULL, 2, 2, 2, 0);
        snprintf(lab, sizeof lab, " %s", stagecal_event_kind_name(ev->kind));
        plot_fig_add(f, STAGECAL_PLOT_TEXT, lab, ex, NULL, NULL, 1, 2, 0, 0);
    }
}

int stagecal_plot_trend_history(const stagecal_plot_trend_history_data *d,
                                stagecal_plot_chart **out, stagecal_error *err)
{
    if (!d || !out || !d->h || d->h->n == 0 || !d->h->points)
        return error_set(err, STAGECAL_EINVAL, "trend chart: no fits to draw");
    *out = NULL;
    const stagecal_trend_history *h = d->h;
    plot_fig f;
    int rc;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    char title[192];
    if (d->title)
        snprintf(title, sizeof title, "%s", d->title);
    else
        snprintf(title, sizeof title, "Column %s: stages over time, trend and forecast",
                 d->column_id ? d->column_id : "");
    plot_fig_labels(&f, title, "date of the fit's data [UTC]",
                    d->y_label ? d->y_label : "stages incl. pot at the reference condition [-]");
    f.c->x_time = 1;
    const double first_t = h->points[0].t_s, last_t = h->points[h->n - 1].t_s;
    double span = fmax(last_t - first_t, 30 * 86400.0), t_end = last_t + 0.25 * span;
    const stagecal_trend_forecast *fc = h->has_forecast ? &h->forecast : NULL;
    if (fc && fc->status == STAGECAL_FORECAST_OK && isfinite(fc->high_s))
        t_end = fmax(t_end, fmin(fc->high_s, last_t + 4 * span));
    trend_lines(&f, h, t_end);
    fit_points(&f, h);
    if (fc)
        required_line(&f, fc, first_t, t_end);
    event_lines(&f, d);
    f.c->legend_pos = 3;
    return plot_fig_close(&f, out, err);
}

/* ---- batch trajectory ---------------------------------------------------------------- */

int stagecal_plot_trajectory(const stagecal_plot_trajectory_data *d, stagecal_plot_chart **out,
                             stagecal_error *err)
{
    if (!d || !out || !d->res || d->res->n_rows < 2 || !d->res->rows)
        return error_set(err, STAGECAL_EINVAL,
                         "trajectory chart: expected a batch result of at least 2 rows");
    *out = NULL;
    const stagecal_batch_result *res = d->res;
    size_t n = res->n_rows;
    plot_fig f;
    int rc;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(&f, d->title ? d->title : "Batch prediction: compositions and cuts",
                    "time since the start of the batch [h]", NULL);
    double *t = malloc(n * sizeof *t), *a = malloc(n * sizeof *a), *b = malloc(n * sizeof *b);
    if (!t || !a || !b) {
        free(t);
        free(a);
        free(b);
        f.oom = 1;
        return plot_fig_close(&f, out, err);
    }
    for (size_t i = 0; i < n; i++)
        t[i] = res->rows[i].t_s / 3600.0; /* SI s → h at the edge */
    /* cuts: stripes in alternating tints, names at their starts, end bands when given */
    size_t nc = res->n_cuts < STAGECAL_BATCH_MAXCUTS ? res->n_cuts : STAGECAL_BATCH_MAXCUTS;
    double cs[2][STAGECAL_BATCH_MAXCUTS], ce[2][STAGECAL_BATCH_MAXCUTS];
    size_t ncs[2] = {0, 0};
    for (size_t c = 0; c < nc; c++) {
        if (!(res->cuts[c].t_end_s > res->cuts[c].t_start_s))
            continue;
        cs[c % 2][ncs[c % 2]] = res->cuts[c].t_start_s / 3600.0;
        ce[c % 2][ncs[c % 2]++] = res->cuts[c].t_end_s / 3600.0;
    }
    /* which rows the model's envelope covers */
    int any_out = 0;
    for (size_t i = 0; i < n; i++)
        any_out |= res->rows[i].outside != 0;
    static const char *const pl[3] = {"xD, xB [mol/mol]", "pot W [kmol]", "R [-]"};
    for (int p = 0; p < 3; p++) {
        plot_fig_panel(&f, pl[p], p == 0 ? 2.0 : 1.0, p == 0 ? 0 : NAN, p == 0 ? 1 : NAN);
        for (int k = 0; k < 2; k++)
            if (ncs[k])
                plot_fig_add(&f, STAGECAL_PLOT_SPAN, p == 0 && k == 0 ? "cut (receiver)" : NULL,
                             cs[k], ce[k], NULL, ncs[k], k ? 3 : 5, 1, 0);
        if (p == 0 && d->band) {
            for (size_t c = 0; c < d->band->n_cuts && c < nc; c++) {
                const stagecal_batch_interval *iv = &d->band->cuts[c].t_end_s;
                if (!(iv->high > iv->low))
                    continue;
                double lx = iv->low / 3600.0, hx = iv->high / 3600.0;
                plot_fig_add(&f, STAGECAL_PLOT_SPAN, c == 0 ? "cut's end, band" : NULL, &lx, &hx,
                             NULL, 1, 4, 0, 0);
            }
        }
        /* curves: inside the envelope solid, outside dashed (a row on the boundary
         * belongs to both parts so that they join) */
        int ncurve = p == 0 ? 2 : 1;
        for (int cv = 0; cv < ncurve; cv++) {
            for (int part = 0; part < 1 + any_out; part++) {
                for (size_t i = 0; i < n; i++) {
                    const stagecal_batch_row *r = &res->rows[i];
                    double val = p == 0   ? (cv == 0 ? r->xd : r->xb)
                                 : p == 1 ? r->w_mol / 1000.0
                                          : r->reflux;
                    int o = r->outside != 0, on = o;
                    if (i > 0 && (res->rows[i - 1].outside != 0) != o)
                        on = 2; /* a change: this row ends one part and starts the other */
                    a[i] = (on == 2 || o == part) ? val : NAN;
                }
                const char *name = cv == 0 ? "distillate xD" : "pot xB";
                const char *legend = p != 0      ? NULL
                                     : part == 0 ? name
                                     : cv == 0   ? "outside the fitted envelope: dashed"
                                                 : NULL;
                plot_fig_add(&f, STAGECAL_PLOT_LINE, legend, t, a, NULL, n,
                             p == 0 ? (cv == 0 ? 1 : 0) : 6, part ? 1 : 0, 0);
            }
        }
        if (p == 0) {
            for (size_t c = 0; c < nc; c++) {
                if (!(res->cuts[c].t_end_s > res->cuts[c].t_start_s))
                    continue;
                double x0 = res->cuts[c].t_start_s / 3600.0;
                char lab[64];
                snprintf(lab, sizeof lab, " %s", res->cuts[c].name);
                plot_fig_add(&f, STAGECAL_PLOT_TEXT, lab, &x0, NULL, NULL, 1, 6, 0, 0);
            }
        }
    }
    (void)b;
    free(t);
    free(a);
    free(b);
    return plot_fig_close(&f, out, err);
}

/* ---- self-starting control chart (chart.h) ------------------------------------------- */

int stagecal_plot_selfstart(const stagecal_plot_selfstart_data *d, stagecal_plot_chart **out,
                            stagecal_error *err)
{
    if (!d || !out || !d->pts || !d->chart || d->n == 0)
        return error_set(err, STAGECAL_EINVAL, "control chart: no points to draw");
    *out = NULL;
    const size_t n = d->n;
    const stagecal_chart_params par = d->par;
    plot_fig f;
    int rc;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(&f, d->title ? d->title : "Runs over time: self-starting EWMA and CUSUM charts",
                    "date of the run [UTC]", NULL);
    f.c->x_time = 1;
    double *x = malloc(n * sizeof *x), *y = malloc(n * sizeof *y), *lo = malloc(n * sizeof *lo),
           *hi = malloc(n * sizeof *hi), *ax = malloc(n * sizeof *ax), *ay = malloc(n * sizeof *ay);
    if (!x || !y || !lo || !hi || !ax || !ay) {
        f.oom = 1;
        goto done;
    }
    double t0 = d->pts[0].t_s, t1 = d->pts[0].t_s;
    size_t na = 0;
    for (size_t i = 0; i < n; i++) {
        x[i] = d->pts[i].t_s;
        y[i] = d->pts[i].value;
        lo[i] = y[i] - 2 * d->pts[i].se;
        hi[i] = y[i] + 2 * d->pts[i].se;
        t0 = fmin(t0, x[i]);
        t1 = fmax(t1, x[i]);
        if (d->chart[i].ewma_alarm || d->chart[i].cusum_alarm) {
            ax[na] = x[i];
            ay[na++] = y[i];
        }
    }
    stagecal_plot_series *s;
    plot_fig_panel(&f, d->y_label ? d->y_label : "stages incl. pot [-]", 1.4, NAN, NAN);
    plot_fig_add(&f, STAGECAL_PLOT_ERRBAR, "run \xc2\xb1 2 se", x, lo, hi, n, 6, 0, 0);
    plot_fig_add(&f, STAGECAL_PLOT_POINTS, "run at the condition", x, y, NULL, n, 6, 0, 0);
    if (na && (s = plot_fig_add(&f, STAGECAL_PLOT_POINTS, "alarm (EWMA or CUSUM)", ax, ay, NULL, na,
                                1, 0, 6)))
        s->width = 2.2;
    /* EWMA of the Q statistics with its limits; start-up points (no Q) are not drawn */
    double limit = par.L * sqrt(par.lambda / (2 - par.lambda));
    for (size_t i = 0; i < n; i++) {
        y[i] = d->chart[i].started ? d->chart[i].ewma : NAN;
        lo[i] = d->chart[i].started ? d->chart[i].cusum_hi : NAN;
        hi[i] = d->chart[i].started ? -d->chart[i].cusum_lo : NAN;
    }
    double lx[5] = {t0, t1, NAN, t0, t1}, ly[5] = {-limit, -limit, NAN, limit, limit};
    char lab[96];
    plot_fig_panel(&f, "EWMA of Q [-]", 1, NAN, NAN);
    snprintf(lab, sizeof lab, "EWMA limits \xc2\xb1%.3g (\xce\xbb = %.2g, L = %.4g)", limit,
             par.lambda, par.L);
    plot_fig_add(&f, STAGECAL_PLOT_LINE, lab, lx, ly, NULL, 5, 1, 1, 0);
    plot_fig_add(&f, STAGECAL_PLOT_LINE, "EWMA", x, y, NULL, n, 0, 0, 0);
    plot_fig_add(&f, STAGECAL_PLOT_POINTS, NULL, x, y, NULL, n, 0, 0, 0);
    /* CUSUMs: the upper one above zero, the lower one drawn below it, against ±h */
    double hy[5] = {-par.h, -par.h, NAN, par.h, par.h};
    plot_fig_panel(&f, "CUSUM of Q [-]", 1, NAN, NAN);
    snprintf(lab, sizeof lab, "CUSUM limits \xc2\xb1h = \xc2\xb1%.3g (k = %.2g)", par.h, par.k);
    plot_fig_add(&f, STAGECAL_PLOT_LINE, lab, lx, hy, NULL, 5, 3, 3, 0);
    plot_fig_add(&f, STAGECAL_PLOT_LINE, "upper CUSUM (gains)", x, lo, NULL, n, 2, 0, 0);
    plot_fig_add(&f, STAGECAL_PLOT_LINE, "lower CUSUM (losses), drawn below 0", x, hi, NULL, n, 4,
                 0, 0);
done:
    free(x);
    free(y);
    free(lo);
    free(hi);
    free(ax);
    free(ay);
    return plot_fig_close(&f, out, err);
}
