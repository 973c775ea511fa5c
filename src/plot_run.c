/*
 * plot_run.c — the run chart (stagecal_plot_run, include/stagecal/plot.h): the raw
 * signals of production runs against time, in stacked panels (xD, xB, W, R, stage
 * counts), with the quasi-steady windows shaded in every panel, the per-sample stage
 * counts with error bars, the windows' stage counts (the evidence module's numbers, the
 * ones the fits use), censored readings marked one-sided, excluded samples and left-out
 * runs marked. Nothing is recomputed here: the rows come from the run log, their flags,
 * statuses and stage counts from the run-log analysis, the windows' counts from the
 * evidence set, the left-out runs from the calibration.
 *
 * Time axis: one run is drawn in hours from its start; several runs are drawn side by
 * side in log order, each in hours from its own start, separated by a gap (runs are
 * hours long and days apart: on a calendar axis they would be slivers), with each run's
 * name written above it.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "internal.h"
#include "plot_internal.h"

#define RUN_GAP_FRAC 0.04 /* gap between runs side by side, of the runs' total duration */
#define ERR_BAR_K 2.0     /* error bars: ± 2 standard uncertainties (about 95 %) */
/* Run names above the runs (all runs side by side): every run's when there are at most
 * RUN_NAMES runs; else every k-th run's, k = ⌈runs/RUN_NAMES⌉ (the first run's included), and
 * those of the runs left out of the fit, RUN_NAMES_MAX in all. More would overlap on the
 * page, and each name is a series of the chart (MAX_SERIES, 64: 48 names crowded the stage
 * panel's series out of a chart of 48 runs). */
#define RUN_NAMES 16
#define RUN_NAMES_MAX 24

/* Offsets [h] of each run on the axis (all runs) or 0 for the one drawn. */
typedef struct {
    const stagecal_plot_run_data *d;
    double *offset; /* per run [h] */
    double *t0;     /* per run: its first finite time [s] */
} run_axis;

static int selected(const stagecal_plot_run_data *d, size_t run)
{
    return d->run == STAGECAL_PLOT_ALL_RUNS || d->run == run;
}

static int axis_build(const stagecal_plot_run_data *d, run_axis *ax)
{
    const stagecal_runlog *log = d->log;
    ax->d = d;
    ax->offset = calloc(log->nruns + 1, sizeof *ax->offset);
    ax->t0 = calloc(log->nruns + 1, sizeof *ax->t0);
    if (!ax->offset || !ax->t0)
        return 0;
    double total = 0, *dur = calloc(log->nruns + 1, sizeof *dur);
    if (!dur)
        return 0;
    for (size_t r = 0; r < log->nruns; r++) {
        const stagecal_runlog_run *ru = &log->runs[r];
        double lo = INFINITY, hi = -INFINITY;
        for (size_t i = ru->first; i < ru->first + ru->n; i++)
            if (isfinite(log->t_s[i]))
                lo = fmin(lo, log->t_s[i]), hi = fmax(hi, log->t_s[i]);
        ax->t0[r] = isfinite(lo) ? lo : 0;
        dur[r] = isfinite(lo) ? (hi - lo) / 3600.0 : 0;
        if (selected(d, r))
            total += dur[r];
    }
    double gap = RUN_GAP_FRAC * fmax(total, 1.0), x = 0;
    for (size_t r = 0; r < log->nruns; r++) {
        ax->offset[r] = x;
        if (selected(d, r) && d->run == STAGECAL_PLOT_ALL_RUNS)
            x += dur[r] + gap;
    }
    free(dur);
    return 1;
}

static void axis_free(run_axis *ax)
{
    free(ax->offset);
    free(ax->t0);
}

static double axis_x(const run_axis *ax, size_t row)
{
    const stagecal_runlog *log = ax->d->log;
    size_t r = log->run[row];
    return ax->offset[r] + (log->t_s[row] - ax->t0[r]) / 3600.0;
}

int stagecal_plot_run_hours(const stagecal_plot_run_data *d, size_t row, double *h)
{
    run_axis ax;
    if (!d || !d->log || !h || row >= d->log->n)
        return 0;
    memset(&ax, 0, sizeof ax);
    int ok = axis_build(d, &ax);
    if (ok)
        *h = axis_x(&ax, row);
    axis_free(&ax);
    return ok;
}

/* Scratch: x and y of up to cap points, NaN between runs to break lines. */
typedef struct {
    double *x, *y, *z;
    size_t n, cap;
} pts;

static void put(pts *p, double x, double y, double z)
{
    if (p->n < p->cap) {
        p->x[p->n] = x;
        p->y[p->n] = y;
        p->z[p->n] = z;
        p->n++;
    }
}

/* The left-out flag of run r. */
static int left_out(const stagecal_plot_run_data *d, size_t r)
{
    for (size_t k = 0; k < d->nflagged; k++)
        if (d->flagged[k].run == r && d->flagged[k].left_out)
            return 1;
    return 0;
}

/* Window categories for the shading. */
enum { WIN_COUNTED = 0, WIN_LEFT_OUT, WIN_NO_COUNT, WIN_NCAT };

static int window_category(const stagecal_plot_run_data *d, size_t w)
{
    const stagecal_runlog_window *win = &d->res->windows[w];
    if (left_out(d, win->run))
        return WIN_LEFT_OUT;
    const stagecal_evidence *ev = d->evidence ? stagecal_evidence_find(d->evidence, w) : NULL;
    return ev && ev->stages_ok ? WIN_COUNTED : WIN_NO_COUNT;
}

/* The shaded windows of one category into p (x: start, y: end). */
static void window_spans(const stagecal_plot_run_data *d, const run_axis *ax, int cat, pts *p)
{
    p->n = 0;
    for (size_t w = 0; w < d->res->nwindows; w++) {
        const stagecal_runlog_window *win = &d->res->windows[w];
        if (!selected(d, win->run) || window_category(d, w) != cat)
            continue;
        put(p, axis_x(ax, win->first), axis_x(ax, win->last), NAN);
    }
}

static const char *const win_label[WIN_NCAT] = {
    "window with a stage count", "window of a left-out run", "window without a count"};
static const int win_colour[WIN_NCAT] = {0, 1, 5};
static const int win_light[WIN_NCAT] = {0, 0, 1};

static void add_windows(plot_fig *f, const stagecal_plot_run_data *d, const run_axis *ax, pts *p,
                        int labelled)
{
    for (int cat = 0; cat < WIN_NCAT; cat++) {
        window_spans(d, ax, cat, p);
        if (p->n)
            plot_fig_add(f, STAGECAL_PLOT_SPAN, labelled ? win_label[cat] : NULL, p->x, p->y, NULL,
                         p->n, win_colour[cat], win_light[cat], 0);
    }
}

/* A signal of the selected runs as a line broken between runs; scale multiplies it. */
static void signal_line(const stagecal_plot_run_data *d, const run_axis *ax, const double *v,
                        const unsigned char *cens, double scale, pts *p)
{
    const stagecal_runlog *log = d->log;
    p->n = 0;
    for (size_t r = 0; r < log->nruns; r++) {
        if (!selected(d, r))
            continue;
        for (size_t i = log->runs[r].first; i < log->runs[r].first + log->runs[r].n; i++)
            put(p, axis_x(ax, i), v && isfinite(v[i]) && !(cens && cens[i]) ? v[i] * scale : NAN,
                NAN);
        put(p, NAN, NAN, NAN);
    }
}

/* Rows of the selected runs that pass keep(), at (x, y(row)). */
static void rows_where(const stagecal_plot_run_data *d, const run_axis *ax, pts *p,
                       int (*keep)(const stagecal_plot_run_data *, size_t, int), int arg,
                       double (*y)(const stagecal_plot_run_data *, size_t, void *), void *yctx)
{
    const stagecal_runlog *log = d->log;
    p->n = 0;
    for (size_t i = 0; i < log->n; i++)
        if (selected(d, log->run[i]) && keep(d, i, arg))
            put(p, axis_x(ax, i), y(d, i, yctx), NAN);
}

static int keep_xd_cens(const stagecal_plot_run_data *d, size_t i, int sense)
{
    return d->log->xd_cens && d->log->xd_cens[i] == sense;
}

static int keep_xb_cens(const stagecal_plot_run_data *d, size_t i, int sense)
{
    return d->log->xb_cens && d->log->xb_cens[i] == sense;
}

static int keep_outlier(const stagecal_plot_run_data *d, size_t i, int arg)
{
    (void)arg;
    return (d->res->flags[i] & STAGECAL_SAMPLE_OUTLIER) != 0 && isfinite(d->log->xb[i]);
}

static int keep_total_reflux(const stagecal_plot_run_data *d, size_t i, int arg)
{
    (void)arg;
    return isinf(d->log->r[i]);
}

static int keep_status(const stagecal_plot_run_data *d, size_t i, int status)
{
    return d->res->status[i] == status;
}

static int keep_bound(const stagecal_plot_run_data *d, size_t i, int note)
{
    return d->res->status[i] == STAGECAL_RUNLOG_CENSORED && d->res->note[i] == note &&
           isfinite(d->res->stages[i]);
}

static int keep_no_count(const stagecal_plot_run_data *d, size_t i, int arg)
{
    (void)arg;
    int st = d->res->status[i];
    return st != STAGECAL_STAGES_OK &&
           !(st == STAGECAL_RUNLOG_CENSORED && isfinite(d->res->stages[i]));
}

static double y_xd(const stagecal_plot_run_data *d, size_t i, void *c)
{
    (void)c;
    return d->log->xd[i];
}

static double y_xb(const stagecal_plot_run_data *d, size_t i, void *c)
{
    (void)c;
    return d->log->xb[i];
}

static double y_stages(const stagecal_plot_run_data *d, size_t i, void *c)
{
    (void)c;
    return d->res->stages[i];
}

static double y_const(const stagecal_plot_run_data *d, size_t i, void *c)
{
    (void)d;
    (void)i;
    return *(const double *)c;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* The stage panel's range: the windows' counts with their bars and the middle 90 % of
 * the samples' counts (a sample near a pinch can count hundreds of stages; it is drawn at
 * the edge, clipped, rather than squeezing everything else flat). */
static void stage_range(const stagecal_plot_run_data *d, double *lo, double *hi)
{
    const stagecal_runlog *log = d->log;
    double *v = malloc((log->n + 1) * sizeof *v);
    size_t m = 0;
    *lo = INFINITY;
    *hi = -INFINITY;
    for (size_t i = 0; v && i < log->n; i++)
        if (selected(d, log->run[i]) && d->res->status[i] == STAGECAL_STAGES_OK &&
            isfinite(d->res->stages[i]))
            v[m++] = d->res->stages[i];
    if (m > 0) {
        qsort(v, m, sizeof *v, cmp_double);
        *lo = v[(size_t)floor(0.05 * (double)(m - 1))];
        *hi = v[(size_t)ceil(0.95 * (double)(m - 1))];
    }
    free(v);
    for (size_t k = 0; d->evidence && k < d->evidence->n; k++) {
        const stagecal_evidence *ev = &d->evidence->ev[k];
        if (!ev->stages_ok || !selected(d, ev->run))
            continue;
        *lo = fmin(*lo, ev->stages - ERR_BAR_K * ev->se_stages);
        *hi = fmax(*hi, ev->stages + ERR_BAR_K * ev->se_stages);
    }
    if (!isfinite(*lo)) {
        *lo = 0;
        *hi = 10;
    }
    double pad = fmax(0.08 * (*hi - *lo), 0.25);
    *lo = fmax(0, *lo - 2 * pad); /* room at the foot for the samples without a count */
    *hi += pad;
}

/* The chart's title (d->title, else the run's name and start, or the runs drawn) and the
 * time axis' label. */
static void run_title(plot_fig *f, const stagecal_plot_run_data *d, const run_axis *ax)
{
    const stagecal_runlog *log = d->log;
    char title[256], xl[160];
    const int all = d->run == STAGECAL_PLOT_ALL_RUNS;
    size_t r0 = all ? 0 : d->run, nsel = all ? log->nruns : 1;
    if (d->title) {
        snprintf(title, sizeof title, "%s", d->title);
    } else if (!all) {
        char when[40] = "";
        if (log->nfiles_iso > 0) {
            time_t t = (time_t)ax->t0[r0];
            struct tm tm;
            if (gmtime_r(&t, &tm))
                strftime(when, sizeof when, ", started %Y-%m-%d %H:%M UTC", &tm);
        }
        snprintf(title, sizeof title, "Run %s%s%s", log->runs[r0].name, when,
                 left_out(d, r0) ? " (left out of the fit)" : "");
    } else {
        snprintf(title, sizeof title, "%zu runs, %s to %s: signals, quasi-steady windows, stages",
                 nsel, log->runs[0].name, log->runs[log->nruns - 1].name);
    }
    snprintf(xl, sizeof xl, "%s",
             all ? "time since the start of each run [h] (runs side by side, in log order)"
                 : "time since the start of the run [h]");
    plot_fig_labels(f, title, xl, NULL);
    f->c->legend = 1;
}

/* Panel 1: the distillate, with head room for the run names (all runs). */
static void panel_xd(plot_fig *f, const stagecal_plot_run_data *d, const run_axis *ax, pts *p)
{
    const stagecal_runlog *log = d->log;
    const int all = d->run == STAGECAL_PLOT_ALL_RUNS;
    double xd_lo = INFINITY, xd_hi = -INFINITY;
    for (size_t i = 0; i < log->n; i++)
        if (selected(d, log->run[i]) && isfinite(log->xd[i]))
            xd_lo = fmin(xd_lo, log->xd[i]), xd_hi = fmax(xd_hi, log->xd[i]);
    if (!isfinite(xd_lo))
        xd_lo = 0, xd_hi = 1;
    double xd_pad = fmax(xd_hi - xd_lo, 1e-3);
    xd_lo -= 0.05 * xd_pad;
    xd_hi += (all ? 0.35 : 0.08) * xd_pad;
    plot_fig_panel(f, "xD [mol/mol]", 1, xd_lo, xd_hi);
    add_windows(f, d, ax, p, 1);
    signal_line(d, ax, log->xd, log->xd_cens, 1, p);
    stagecal_plot_series *s =
        plot_fig_add(f, STAGECAL_PLOT_LINE, "logged signal", p->x, p->y, NULL, p->n, 6, 0, 0);
    if (s)
        s->width = 1.2;
    rows_where(d, ax, p, keep_xd_cens, STAGECAL_CENSOR_ABOVE, y_xd, NULL);
    plot_fig_add(f, STAGECAL_PLOT_POINTS, "censored: at or above", p->x, p->y, NULL, p->n, 3, 0, 2);
    rows_where(d, ax, p, keep_xd_cens, STAGECAL_CENSOR_BELOW, y_xd, NULL);
    plot_fig_add(f, STAGECAL_PLOT_POINTS, "censored: at or below", p->x, p->y, NULL, p->n, 3, 0, 7);
    size_t k = (log->nruns + RUN_NAMES - 1) / RUN_NAMES, named = 0;
    for (size_t r = 0; all && r < log->nruns && named < RUN_NAMES_MAX; r++) {
        if (r % k != 0 && !left_out(d, r))
            continue;
        named++;
        char lab[96];
        snprintf(lab, sizeof lab, "%s%s", log->runs[r].name, left_out(d, r) ? " (left out)" : "");
        double x = ax->offset[r];
        plot_fig_add(f, STAGECAL_PLOT_TEXT, lab, &x, NULL, NULL, 1, left_out(d, r) ? 1 : 6, 0, 0);
    }
}

/* Panel 2: the pot, its censored readings and outliers. */
static void panel_xb(plot_fig *f, const stagecal_plot_run_data *d, const run_axis *ax, pts *p)
{
    const stagecal_runlog *log = d->log;
    stagecal_plot_series *s;
    plot_fig_panel(f, "xB [mol/mol]", 1, NAN, NAN);
    add_windows(f, d, ax, p, 0);
    signal_line(d, ax, log->xb, log->xb_cens, 1, p);
    if ((s = plot_fig_add(f, STAGECAL_PLOT_LINE, NULL, p->x, p->y, NULL, p->n, 6, 0, 0)))
        s->width = 1.2;
    rows_where(d, ax, p, keep_xb_cens, STAGECAL_CENSOR_ABOVE, y_xb, NULL);
    plot_fig_add(f, STAGECAL_PLOT_POINTS, NULL, p->x, p->y, NULL, p->n, 3, 0, 2);
    rows_where(d, ax, p, keep_xb_cens, STAGECAL_CENSOR_BELOW, y_xb, NULL);
    plot_fig_add(f, STAGECAL_PLOT_POINTS, NULL, p->x, p->y, NULL, p->n, 3, 0, 7);
    rows_where(d, ax, p, keep_outlier, 0, y_xb, NULL);
    plot_fig_add(f, STAGECAL_PLOT_POINTS, "xB outlier (not in means)", p->x, p->y, NULL, p->n, 1, 0,
                 3);
}

/* Panels 3 and 4: the pot holdup (SI mol -> kmol at the edge) and the reflux ratio, total
 * reflux drawn along the top. */
static void panels_w_r(plot_fig *f, const stagecal_plot_run_data *d, const run_axis *ax, pts *p)
{
    const stagecal_runlog *log = d->log;
    stagecal_plot_series *s;
    plot_fig_panel(f, "W [kmol]", 0.8, NAN, NAN);
    add_windows(f, d, ax, p, 0);
    signal_line(d, ax, log->w_mol, NULL, 1e-3, p);
    if ((s = plot_fig_add(f, STAGECAL_PLOT_LINE, NULL, p->x, p->y, NULL, p->n, 6, 0, 0)))
        s->width = 1.2;

    double rmax = 0;
    for (size_t i = 0; i < log->n; i++)
        if (selected(d, log->run[i]) && isfinite(log->r[i]))
            rmax = fmax(rmax, log->r[i]);
    double rtop = rmax > 0 ? 1.12 * rmax : 1;
    plot_fig_panel(f, "R [-]", 0.8, 0, rtop * 1.06);
    add_windows(f, d, ax, p, 0);
    signal_line(d, ax, log->r, NULL, 1, p);
    if ((s = plot_fig_add(f, STAGECAL_PLOT_LINE, NULL, p->x, p->y, NULL, p->n, 6, 0, 0)))
        s->width = 1.2;
    rows_where(d, ax, p, keep_total_reflux, 0, y_const, &rtop);
    if ((s = plot_fig_add(f, STAGECAL_PLOT_POINTS, "total reflux, drawn at top", p->x, p->y, NULL,
                          p->n, 4, 0, 5)))
        s->width = 0.6;
}

/* The windows' stage counts (evidence): a level over the window, a bar at its middle. */
static void window_counts(plot_fig *f, const stagecal_plot_run_data *d, const run_axis *ax, pts *p)
{
    stagecal_plot_series *s;
    for (int pass = 0; pass < 2 && d->evidence; pass++) {
        p->n = 0;
        for (size_t k = 0; k < d->evidence->n; k++) {
            const stagecal_evidence *ev = &d->evidence->ev[k];
            if (!ev->stages_ok || !selected(d, ev->run))
                continue;
            const stagecal_runlog_window *w = &d->res->windows[ev->window];
            double a = axis_x(ax, w->first), b = axis_x(ax, w->last);
            if (pass == 0) {
                put(p, a, ev->stages, NAN);
                put(p, b, ev->stages, NAN);
                put(p, NAN, NAN, NAN);
            } else {
                put(p, 0.5 * (a + b), ev->stages - ERR_BAR_K * ev->se_stages,
                    ev->stages + ERR_BAR_K * ev->se_stages);
            }
        }
        if (p->n && pass == 0 &&
            (s = plot_fig_add(f, STAGECAL_PLOT_LINE, "window's stages", p->x, p->y, NULL, p->n, 2,
                              0, 0)))
            s->width = 5;
        if (p->n && pass == 1 &&
            (s = plot_fig_add(f, STAGECAL_PLOT_ERRBAR, "window's stages \xc2\xb1 2 se", p->x, p->y,
                              p->z, p->n, 2, 0, 0)))
            s->width = 2.5;
    }
}

/* Panel 5: the samples' stage counts with their bars, one-sided bounds, the samples without
 * a count (at the foot), and the windows' counts. */
static void panel_stages(plot_fig *f, const stagecal_plot_run_data *d, const run_axis *ax, pts *p)
{
    const stagecal_runlog *log = d->log;
    stagecal_plot_series *s;
    double slo, shi;
    stage_range(d, &slo, &shi);
    double foot = slo + 0.04 * (shi - slo);
    plot_fig_panel(f, "stages incl. pot [-]", 1.8, slo, shi);
    add_windows(f, d, ax, p, 0);
    p->n = 0;
    for (size_t i = 0; i < log->n; i++)
        if (selected(d, log->run[i]) && d->res->status[i] == STAGECAL_STAGES_OK)
            put(p, axis_x(ax, i), d->res->stages[i] - ERR_BAR_K * d->res->u_stages[i],
                d->res->stages[i] + ERR_BAR_K * d->res->u_stages[i]);
    if ((s = plot_fig_add(f, STAGECAL_PLOT_ERRBAR, "sample's stages \xc2\xb1 2 u", p->x, p->y, p->z,
                          p->n, 5, 0, 0)))
        s->width = 0.5;
    rows_where(d, ax, p, keep_status, STAGECAL_STAGES_OK, y_stages, NULL);
    if ((s = plot_fig_add(f, STAGECAL_PLOT_POINTS, "sample's stages", p->x, p->y, NULL, p->n, 0, 0,
                          0)))
        s->width = 0.45;
    rows_where(d, ax, p, keep_bound, STAGECAL_NOTE_AT_LEAST, y_stages, NULL);
    plot_fig_add(f, STAGECAL_PLOT_POINTS, "sample: at least (one-sided)", p->x, p->y, NULL, p->n, 3,
                 0, 2);
    rows_where(d, ax, p, keep_bound, STAGECAL_NOTE_AT_MOST, y_stages, NULL);
    plot_fig_add(f, STAGECAL_PLOT_POINTS, "sample: at most (one-sided)", p->x, p->y, NULL, p->n, 3,
                 0, 7);
    rows_where(d, ax, p, keep_no_count, 0, y_const, &foot);
    if ((s = plot_fig_add(f, STAGECAL_PLOT_POINTS, "no stage count (at the foot)", p->x, p->y, NULL,
                          p->n, 4, 0, 3)))
        s->width = 0.7;
    window_counts(f, d, ax, p);
}

int stagecal_plot_run(const stagecal_plot_run_data *d, stagecal_plot_chart **out,
                      stagecal_error *err)
{
    if (!d || !out || !d->log || !d->res)
        return error_set(err, STAGECAL_EINVAL, "run chart: missing run log or its analysis");
    *out = NULL;
    const stagecal_runlog *log = d->log;
    if (d->res->n != log->n || !d->res->stages || !d->res->flags)
        return error_set(err, STAGECAL_EINVAL,
                         "run chart: the analysis holds %zu rows, the log %zu (expected the "
                         "log's analysis after stagecal_runlog_invert)",
                         d->res->n, log->n);
    if (log->n == 0 || log->nruns == 0)
        return error_set(err, STAGECAL_EINVAL, "run chart: the log has no rows");
    if (d->run != STAGECAL_PLOT_ALL_RUNS && d->run >= log->nruns)
        return error_set(err, STAGECAL_EINVAL, "run chart: run %zu (the log has %zu runs)",
                         d->run + 1, log->nruns);
    run_axis ax;
    memset(&ax, 0, sizeof ax);
    pts p;
    size_t cap = log->n + log->nruns + d->res->nwindows * 3 + 8;
    p.x = malloc(cap * sizeof *p.x);
    p.y = malloc(cap * sizeof *p.y);
    p.z = malloc(cap * sizeof *p.z);
    p.cap = cap;
    p.n = 0;
    plot_fig f;
    int rc = STAGECAL_OK;
    if (!p.x || !p.y || !p.z || !axis_build(d, &ax))
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory building the run chart");
    else
        rc = plot_fig_open(&f, err);
    if (rc == STAGECAL_OK) {
        run_title(&f, d, &ax);
        panel_xd(&f, d, &ax, &p);
        panel_xb(&f, d, &ax, &p);
        panels_w_r(&f, d, &ax, &p);
        panel_stages(&f, d, &ax, &p);
    }
    free(p.x);
    free(p.y);
    free(p.z);
    axis_free(&ax);
    return rc == STAGECAL_OK ? plot_fig_close(&f, out, err) : rc;
}

int stagecal_plot_run_calibration(const stagecal_calibration *cal, size_t run,
                                  stagecal_plot_chart **out, stagecal_error *err)
{
    if (!cal || !cal->log)
        return error_set(err, STAGECAL_EINVAL, "run chart: no calibration");
    stagecal_plot_run_data d = {
        cal->log, &cal->res, cal->evidence.n ? &cal->evidence : NULL, cal->flagged, cal->nflagged,
        run,      NULL};
    return stagecal_plot_run(&d, out, err);
}
