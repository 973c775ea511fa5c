/*
 * plot_internal.h — the chart builders' shared helpers (plot_fig.c); not installed.
 *
 * A builder collects its allocations in a small arena hung on chart->storage so that
 * stagecal_plot_chart_free releases them in one go. Series are added in drawing order;
 * plot_fig_panel starts a panel of a chart of stacked panels (the series added after it
 * belong to it).
 */
#ifndef STAGECAL_PLOT_INTERNAL_H
#define STAGECAL_PLOT_INTERNAL_H

#include "stagecal/plot.h"

#define MAX_SERIES 64
#define MAX_GROUPS 32

typedef struct {
    void **blk;
    size_t n, cap;
} arena;

typedef struct {
    stagecal_plot_chart *c;
    arena *a;
    stagecal_plot_series *s;
    int oom;
    int full;        /* a series refused at MAX_SERIES: plot_fig_close fails (never drawn short) */
    size_t n_panels; /* panels started */
    size_t panel_first[STAGECAL_PLOT_MAXPANELS];      /* first series of each */
    const char *panel_label[STAGECAL_PLOT_MAXPANELS]; /* their y labels (arena copies) */
    double panel_weight[STAGECAL_PLOT_MAXPANELS];
    double panel_lo[STAGECAL_PLOT_MAXPANELS], panel_hi[STAGECAL_PLOT_MAXPANELS]; /* y range */
    double panel_xlo[STAGECAL_PLOT_MAXPANELS], panel_xhi[STAGECAL_PLOT_MAXPANELS];
    double panel_inset[STAGECAL_PLOT_MAXPANELS][4];
} plot_fig;

void *plot_alloc(plot_fig *f, size_t bytes);
double *plot_doubles(plot_fig *f, const double *src, size_t n);
char *plot_str(plot_fig *f, const char *s);
int plot_fig_open(plot_fig *f, stagecal_error *err);
/* Adds a series with copies of its arrays (y_hi only for bands and error bars); returns
 * it (NULL when it could not be added) so that the caller may set its width. */
stagecal_plot_series *plot_fig_add(plot_fig *f, stagecal_plot_kind kind, const char *label,
                                   const double *x, const double *y, const double *y_hi, size_t n,
                                   int colour, int line, int marker);
/* Starts a panel (at most STAGECAL_PLOT_MAXPANELS) with its y range (NAN: from the data). */
void plot_fig_panel(plot_fig *f, const char *y_label, double weight, double y_lo, double y_hi);
/* Makes the current panel an inset over the first at box (fractions of its plot box) with
 * its own x range. */
void plot_fig_inset(plot_fig *f, double x_lo, double x_hi, const double box[4]);
int plot_fig_close(plot_fig *f, stagecal_plot_chart **out, stagecal_error *err);
void plot_fig_labels(plot_fig *f, const char *title, const char *xl, const char *yl);
/* The curve ys[0] over grid (n points) with two bands, outer (ys[1], ys[2]; colour 5) and
 * inner (ys[3], ys[4]; colour 0) drawn when their label is not NULL: inside the fitted
 * envelope [lo, hi] (NAN: open) under their labels, and beyond it extrapolated (the curve
 * dashed, the bands lighter, unlabelled), each part ending exactly at the envelope's edge
 * (stagecal_plot_split_envelope). STAGECAL_ENOMEM (and f->oom) when the split fails. */
int plot_fig_envelope(plot_fig *f, const double *grid, const double *const ys[5], size_t n,
                      double lo, double hi, const char *outer, const char *inner, const char *curve,
                      int curve_colour);

#endif
