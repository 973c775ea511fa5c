/*
 * plot_fig.c — the chart builders' arena and series helpers (plot_internal.h).
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
    if (f->oom || !f->s || f->c->n_series >= MAX_SERIES || n == 0)
        return NULL;
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
    if (f->oom || !f->s) {
        stagecal_plot_chart_free(f->c);
        *out = NULL;
        return error_set(err, STAGECAL_ENOMEM, "out of memory building a chart");
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
