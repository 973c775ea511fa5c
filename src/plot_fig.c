/*
 * plot_fig.c — the chart builders' arena and series helpers (plot_internal.h), and the
 * split of a fitted curve at its envelope that the fit's and the proposal's charts share.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "plot_internal.h"

void *plot_alloc(plot_fig *f, size_t bytes)
{
    arena *a = f->a;
    if (f->oom)
        return NULL;
    if (a->n == a->cap) {
        size_t cap = a->cap ? 2 * a->cap : 16;
        void **b = realloc(a->blk, cap * sizeof *b);
        if (!b) {
            f->oom = 1;
            return NULL;
        }
        a->blk = b;
        a->cap = cap;
    }
    void *p = calloc(1, bytes ? bytes : 1);
    if (!p) {
        f->oom = 1;
        return NULL;
    }
    a->blk[a->n++] = p;
    return p;
}

double *plot_doubles(plot_fig *f, const double *src, size_t n)
{
    double *p = plot_alloc(f, n * sizeof *p);
    if (p && src)
        memcpy(p, src, n * sizeof *p);
    return p;
}

char *plot_str(plot_fig *f, const char *s)
{
    if (!s)
        return NULL;
    char *p = plot_alloc(f, strlen(s) + 1);
    if (p)
        memcpy(p, s, strlen(s) + 1);
    return p;
}

void stagecal_plot_chart_free(stagecal_plot_chart *chart)
{
    if (!chart)
        return;
    arena *a = chart->storage;
    if (a) {
        for (size_t i = 0; i < a->n; i++)
            free(a->blk[i]);
        free(a->blk);
        free(a);
    }
    free(chart);
}

int plot_fig_open(plot_fig *f, stagecal_error *err)
{
    memset(f, 0, sizeof *f);
    f->c = calloc(1, sizeof *f->c);
    f->a = calloc(1, sizeof *f->a);
    if (!f->c || !f->a) {
        free(f->c);
        free(f->a);
        return error_set(err, STAGECAL_ENOMEM, "out of memory building a chart");
    }
    f->c->storage = f->a;
    f->c->x_min = f->c->x_max = f->c->y_min = f->c->y_max = NAN;
    f->c->legend = 1;
    f->s = plot_alloc(f, MAX_SERIES * sizeof *f->s);
    f->c->series = f->s;
    return STAGECAL_OK;
}

/* Adds a series with copies of its arrays (y_hi only for bands). */
stagecal_plot_series *plot_fig_add(plot_fig *f, stagecal_plot_kind kind, const char *label,
                                   const double *x, const double *y, const double *y_hi, size_t n,
                                   int colour, int line, int marker)
{
    if (f->oom || !f->s || n == 0)
        return NULL;
    if (f->c->n_series >= MAX_SERIES) {
        f->full = 1;
        return NULL;
    }
    stagecal_plot_series *s = &f->s[f->c->n_series];
    memset(s, 0, sizeof *s);
    s->kind = kind;
    s->label = plot_str(f, label);
    s->x = plot_doubles(f, x, n);
    s->y = plot_doubles(f, y, n);
    s->y_hi = y_hi ? plot_doubles(f, y_hi, n) : NULL;
    if (!y) /* a text series: its y is not used */
        s->y = s->x;
    s->n = n;
    s->colour = colour;
    s->line = line;
    s->marker = marker;
    if (f->oom)
        return NULL;
    f->c->n_series++;
    return s;
}

void plot_fig_panel(plot_fig *f, const char *y_label, double weight, double y_lo, double y_hi)
{
    if (f->n_panels >= STAGECAL_PLOT_MAXPANELS) {
        f->oom = 1; /* a builder's mistake: refused like a failed allocation */
        return;
    }
    f->panel_first[f->n_panels] = f->c->n_series;
    f->panel_label[f->n_panels] = plot_str(f, y_label);
    f->panel_weight[f->n_panels] = weight;
    f->panel_xlo[f->n_panels] = f->panel_xhi[f->n_panels] = NAN;
    memset(f->panel_inset[f->n_panels], 0, sizeof f->panel_inset[0]);
    f->panel_lo[f->n_panels] = y_lo;
    f->panel_hi[f->n_panels] = y_hi;
    f->n_panels++;
}

void plot_fig_inset(plot_fig *f, double x_lo, double x_hi, const double box[4])
{
    if (f->n_panels == 0)
        return;
    f->panel_xlo[f->n_panels - 1] = x_lo;
    f->panel_xhi[f->n_panels - 1] = x_hi;
    memcpy(f->panel_inset[f->n_panels - 1], box, sizeof f->panel_inset[0]);
}

int plot_fig_close(plot_fig *f, stagecal_plot_chart **out, stagecal_error *err)
{
    if (f->n_panels > 0 && !f->oom) {
        stagecal_plot_panel *p = plot_alloc(f, f->n_panels * sizeof *p);
        for (size_t k = 0; p && k < f->n_panels; k++) {
            size_t end = k + 1 < f->n_panels ? f->panel_first[k + 1] : f->c->n_series;
            p[k].y_label = f->panel_label[k];
            p[k].y_min = f->panel_lo[k];
            p[k].y_max = f->panel_hi[k];
            p[k].weight = f->panel_weight[k];
            p[k].x_min = f->panel_xlo[k];
            p[k].x_max = f->panel_xhi[k];
            memcpy(p[k].inset, f->panel_inset[k], sizeof p[k].inset);
            p[k].series = f->s + f->panel_first[k];
            p[k].n_series = end - f->panel_first[k];
        }
        f->c->panels = p;
        f->c->n_panels = f->n_panels;
    }
    if (f->oom || !f->s || f->full) {
        int full = f->full && !f->oom && f->s;
        stagecal_plot_chart *c = f->c;
        *out = NULL;
        int rc = full ? error_set(err, STAGECAL_EINTERNAL,
                                  "chart '%s': more than %d series (a builder's limit; the chart "
                                  "would have been drawn without some of them)",
                                  c->title ? c->title : "", MAX_SERIES)
                      : error_set(err, STAGECAL_ENOMEM, "out of memory building a chart");
        stagecal_plot_chart_free(c);
        return rc;
    }
    *out = f->c;
    return STAGECAL_OK;
}

void plot_fig_labels(plot_fig *f, const char *title, const char *xl, const char *yl)
{
    f->c->title = plot_str(f, title);
    f->c->x_label = plot_str(f, xl);
    f->c->y_label = plot_str(f, yl);
}

/* ---- the fitted envelope ----------------------------------------------------------- */

/* Linear interpolation of y between grid points i and i + 1 at x. */
static double interp(const double *g, const double *y, size_t i, double x)
{
    if (g[i + 1] == g[i])
        return y[i];
    return y[i] + (y[i + 1] - y[i]) * (x - g[i]) / (g[i + 1] - g[i]);
}

void stagecal_plot_split_free(stagecal_plot_split *sp)
{
    if (!sp)
        return;
    free(sp->in_x);
    free(sp->out_x);
    for (size_t j = 0; j < STAGECAL_PLOT_SPLIT_MAX; j++) {
        free(sp->in_y[j]);
        free(sp->out_y[j]);
    }
    memset(sp, 0, sizeof *sp);
}

/* Value j at abscissa x of the merged list: exact at a grid point, else interpolated
 * between the grid points around x (an envelope edge). */
static double value_at(const double *grid, const double *y, size_t n, double x)
{
    if (!y)
        return NAN;
    size_t i = 0;
    while (i + 1 < n && grid[i + 1] <= x)
        i++;
    if (grid[i] == x || i + 1 >= n)
        return y[i];
    return interp(grid, y, i, x);
}

static void split_put(stagecal_plot_split *sp, int out, double x, const double *grid,
                      const double *const *ys, size_t n)
{
    double *px = out ? sp->out_x : sp->in_x;
    double *const *py = out ? sp->out_y : sp->in_y;
    size_t *m = out ? &sp->n_out : &sp->n_in;
    px[*m] = x;
    for (size_t j = 0; j < sp->k; j++)
        py[j][*m] = isnan(x) ? NAN : value_at(grid, ys[j], n, x);
    (*m)++;
}

int stagecal_plot_split_envelope(const double *grid, const double *const *ys, size_t k, size_t n,
                                 double lo, double hi, stagecal_plot_split *sp)
{
    memset(sp, 0, sizeof *sp);
    if (k > STAGECAL_PLOT_SPLIT_MAX || !grid || n == 0)
        return STAGECAL_EINVAL;
    size_t cap = n + 5;
    sp->k = k;
    sp->in_x = malloc(cap * sizeof *sp->in_x);
    sp->out_x = malloc(cap * sizeof *sp->out_x);
    int ok = sp->in_x && sp->out_x;
    for (size_t j = 0; j < k && ok; j++) {
        sp->in_y[j] = malloc(cap * sizeof **sp->in_y);
        sp->out_y[j] = malloc(cap * sizeof **sp->out_y);
        ok = sp->in_y[j] && sp->out_y[j];
    }
    if (!ok) {
        stagecal_plot_split_free(sp);
        return STAGECAL_ENOMEM;
    }
    lo = isnan(lo) ? -INFINITY : lo;
    hi = isnan(hi) ? INFINITY : hi;
    /* the abscissae: the grid with the edges that fall strictly inside it added */
    double g0 = grid[0], g1 = grid[n - 1];
    int add_lo = lo > g0 && lo<g1, add_hi = hi> g0 && hi < g1;
    for (size_t i = 0; i < n; i++) /* an edge on a grid point is that point */
        add_lo &= grid[i] != lo, add_hi &= grid[i] != hi;
    size_t nleft = 0;
    for (int pass = 0; pass < 3; pass++) { /* left of lo, inside, right of hi */
        int lo_done = !add_lo, hi_done = !add_hi;
        for (size_t i = 0; i <= n; i++) {
            /* the next abscissa in order: an edge before grid[i], or grid[i] */
            double x;
            if (!lo_done && (i == n || lo < grid[i])) {
                x = lo, lo_done = 1, i--;
            } else if (!hi_done && (i == n || hi < grid[i])) {
                x = hi, hi_done = 1, i--;
            } else if (i < n) {
                x = grid[i];
            } else {
                break;
            }
            if (pass == 0 && x <= lo && isfinite(lo)) {
                split_put(sp, 1, x, grid, ys, n);
                nleft++;
            } else if (pass == 1 && x >= lo && x <= hi) {
                split_put(sp, 0, x, grid, ys, n);
            } else if (pass == 2 && x >= hi && isfinite(hi)) {
                split_put(sp, 1, x, grid, ys, n);
            }
        }
        if (pass == 0 && nleft == 1) /* the edge alone: no outside part on the left */
            sp->n_out = nleft = 0;
        if (pass == 0 && nleft > 0)
            split_put(sp, 1, NAN, grid, ys, n);
    }
    if (sp->n_out == nleft + (nleft > 0) + 1) /* the right edge alone */
        sp->n_out--;
    if (sp->n_out > 0 && isnan(sp->out_x[sp->n_out - 1])) /* nothing on the right */
        sp->n_out--;
    return STAGECAL_OK;
}

int plot_fig_envelope(plot_fig *f, const double *grid, const double *const ys[5], size_t n,
                      double lo, double hi, const char *outer, const char *inner, const char *curve,
                      int curve_colour)
{
    stagecal_plot_split sp;
    if (stagecal_plot_split_envelope(grid, ys, 5, n, lo, hi, &sp) != STAGECAL_OK) {
        f->oom = 1;
        return STAGECAL_ENOMEM;
    }
    for (int part = 0; part < 2; part++) {
        const double *x = part ? sp.out_x : sp.in_x;
        double *const *y = part ? sp.out_y : sp.in_y;
        size_t m = part ? sp.n_out : sp.n_in;
        if (m == 0)
            continue;
        if (outer)
            plot_fig_add(f, STAGECAL_PLOT_BAND, part ? NULL : outer, x, y[1], y[2], m, 5, part, 0);
        if (inner)
            plot_fig_add(f, STAGECAL_PLOT_BAND, part ? NULL : inner, x, y[3], y[4], m, 0, part, 0);
        plot_fig_add(f, STAGECAL_PLOT_LINE,
                     part ? "extrapolated (outside the envelope): dashed, light bands" : curve, x,
                     y[0], NULL, m, curve_colour, part ? 1 : 0, 0);
    }
    stagecal_plot_split_free(&sp);
    return STAGECAL_OK;
}
