/*
 * plot_render.h — the chart renderer's pieces shared by its files; not installed.
 * plot.c draws (colours, series, panels, the legend) on PLplot, plot_layout.c decides
 * where things go before anything is drawn (axis ranges, boxes, insets, the legend's
 * place), plot_file.c writes the drawing through the atomic writer.
 */
#ifndef STAGECAL_PLOT_RENDER_H
#define STAGECAL_PLOT_RENDER_H

#include "stagecal/plot.h"

/* The panels of a chart as a list: a chart without panels is one panel of its series. */
typedef struct {
    const stagecal_plot_series *series;
    size_t n_series;
    const char *y_label;
    double y_min, y_max, weight;
    double x_min, x_max;
    int is_inset;
    stagecal_plot_box inset; /* fractions of the first panel's box */
} panel_view;

/* PLplot's legend call, in one place (the placement estimates its box from these). */
#define LEG_PLOT_WIDTH 0.08 /* sample width [fraction of the viewport width] */
#define LEG_TEXT_OFFSET 0.8
#define LEG_TEXT_SCALE 0.75 /* of the chart's character height (pllegend takes it absolute) */
#define LEG_TEXT_SPACING 1.8
#define LEG_OFFSET 0.02 /* from the corner [fraction of the viewport] */
#define MAXLEG 40

/* plot.c */
/* Is point k of s drawable (every coordinate it needs finite)? */
int plot_point_ok(const stagecal_plot_series *s, size_t k);
/* Draws c with PLplot device dev into file (which exists and is writable); the layout
 * into *par->layout when asked. STAGECAL_ENOMEM before any PLplot call, else OK. */
int plot_render_file(const stagecal_plot_chart *c, const char *dev, const char *file,
                     const stagecal_plot_params *par, stagecal_error *err);

/* plot_layout.c */
/* Does series s have a legend entry (a label, not a text)? */
int plot_in_legend(const stagecal_plot_series *s);
/* The legend's box in corner `corner` of box v (legend_pos numbering), w and h in page
 * fractions. */
stagecal_plot_box plot_corner_box(const stagecal_plot_box *v, int corner, double w, double h);
/* Computes boxes, ranges and the legend's place (before anything is drawn). ht: character
 * height [mm]; pw, ph: page size [mm]; svg: PLplot's svg driver (wider text). */
void plot_plan_layout(const stagecal_plot_chart *c, const panel_view *pv, size_t np, double ht,
                      double pw, double ph, int svg, stagecal_plot_layout *l);

#endif
