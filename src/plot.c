/*
 * plot.c — the generic chart renderer (see stagecal/plot.h) on PLplot's cairo devices
 * pngcairo, svgcairo and pdfcairo: colours, the checks of a chart, the series, panels and
 * legend drawn. Where things go is plot_layout.c's, the files plot_file.c's
 * (plot_render.h).
 *
 * Workload: a report draws about ten charts of at most a few thousand points, so
 * rendering is dominated by PLplot/cairo start-up per file (a few ms each); nothing
 * here is on a hot path. Every chart gets its own PLplot stream (plmkstrm … plend1)
 * so the caller's streams are untouched.
 *
 * Colour map 0 is set completely before plinit (PLplot's default map has a
 * black page and would make our dark axes invisible on white): index 0 white page,
 * 1 axis/text grey, 2 light grid grey, 3..10 the Okabe–Ito palette, 11..18 tints.
 */
#include "stagecal/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <plplot.h>

#include "internal.h"
#include "plot_render.h"

enum {
    COL_PAGE = 0,
    COL_AXIS = 1,
    COL_GRID = 2,
    COL_SERIES = 3,
    COL_TINT = 11,
    COL_LIGHT = 19,
    NCOL0 = 27
};
/* Okabe–Ito, in the order we hand colours out (blue first: most distinct from the
 * dark axes and from vermillion, also in greyscale). */
static const unsigned long palette[STAGECAL_PLOT_NCOLOURS] = {
    0x0072B2, 0xD55E00, 0x009E73, 0xE69F00, 0xCC79A7, 0x56B4E9, 0x000000, 0xF0E442};
static const char *const palette_names[STAGECAL_PLOT_NCOLOURS] = {
    "blue",           "vermillion", "bluish green", "orange",
    "reddish purple", "sky blue",   "black",        "yellow"};

/* Tint = 25 % colour + 75 % white: light enough for a band behind lines and points. The
 * light tint (10 %) marks what lies outside the fitted envelope (extrapolated). */
#define TINT_WEIGHT 0.25
#define LIGHT_WEIGHT 0.10

static const unsigned long axis_rgb = 0x333333;
static const unsigned long grid_rgb = 0xDDDDDD;

/* PLplot line styles (pllsty): 1 solid, 2 short dashes, 3 long dashes … we take solid,
 * long dash, short dash (dotted look), long-short dash. */
static const PLINT line_styles[STAGECAL_PLOT_NLINES] = {1, 3, 2, 6};

/* Marker glyphs, drawn with plstring (UTF-8, centred on the point). */
static const char *const marker_glyphs[STAGECAL_PLOT_NMARKERS] = {
    "\xe2\x97\x8f", /* ● */
    "\xe2\x96\xa1", /* □ */
    "\xe2\x96\xb2", /* ▲ */
    "\xc3\x97",     /* × */
    "\xe2\x97\x87", /* ◇ */
    "+",
    "\xe2\x97\x8b", /* ○ */
    "\xe2\x96\xbd", /* ▽ */
};

stagecal_plot_params stagecal_plot_default_params(void)
{
    stagecal_plot_params p = {800, 560, 0.9, NULL, NULL};
    return p;
}

static int wrap(int i, int n)
{
    int r = i % n;
    return r < 0 ? r + n : r;
}

unsigned long stagecal_plot_colour(int i)
{
    return palette[wrap(i, STAGECAL_PLOT_NCOLOURS)];
}

static unsigned long mix_white(int i, double weight)
{
    unsigned long c = stagecal_plot_colour(i), t = 0;
    for (int shift = 16; shift >= 0; shift -= 8) {
        double v = (double)((c >> shift) & 0xFF);
        unsigned long w = (unsigned long)lround(weight * v + (1 - weight) * 255.0);
        t |= w << shift;
    }
    return t;
}

unsigned long stagecal_plot_tint(int i)
{
    return mix_white(i, TINT_WEIGHT);
}

unsigned long stagecal_plot_tint_light(int i)
{
    return mix_white(i, LIGHT_WEIGHT);
}

const char *stagecal_plot_colour_name(int i)
{
    return palette_names[wrap(i, STAGECAL_PLOT_NCOLOURS)];
}

static const char *series_name(const stagecal_plot_series *s)
{
    return (s->label && s->label[0]) ? s->label : "unlabelled";
}

static size_t panel_views(const stagecal_plot_chart *c, panel_view *v)
{
    if (c->n_panels == 0) {
        v[0].series = c->series;
        v[0].n_series = c->n_series;
        v[0].y_label = c->y_label;
        v[0].y_min = c->y_min;
        v[0].y_max = c->y_max;
        v[0].weight = 1;
        v[0].x_min = v[0].x_max = NAN;
        v[0].is_inset = 0;
        return 1;
    }
    size_t n = c->n_panels < STAGECAL_PLOT_MAXPANELS ? c->n_panels : STAGECAL_PLOT_MAXPANELS;
    for (size_t p = 0; p < n; p++) {
        v[p].series = c->panels[p].series;
        v[p].n_series = c->panels[p].n_series;
        v[p].y_label = c->panels[p].y_label;
        v[p].y_min = c->panels[p].y_min;
        v[p].y_max = c->panels[p].y_max;
        v[p].weight = c->panels[p].weight > 0 ? c->panels[p].weight : 1;
        v[p].x_min = c->panels[p].x_min;
        v[p].x_max = c->panels[p].x_max;
        const double *in = c->panels[p].inset;
        v[p].is_inset = p > 0 && in[1] > in[0] && in[3] > in[2];
        v[p].inset = (stagecal_plot_box){in[0], in[1], in[2], in[3]};
    }
    return n;
}

int plot_point_ok(const stagecal_plot_series *s, size_t k)
{
    if (!isfinite(s->x[k]))
        return 0;
    if (s->kind == STAGECAL_PLOT_TEXT)
        return 1;
    if (!isfinite(s->y[k]))
        return 0;
    return (s->kind != STAGECAL_PLOT_BAND && s->kind != STAGECAL_PLOT_ERRBAR) ||
           isfinite(s->y_hi[k]);
}

static int check_series(const stagecal_plot_series *s, size_t i, size_t *finite,
                        stagecal_error *err)
{
    int need_hi = s->kind == STAGECAL_PLOT_BAND || s->kind == STAGECAL_PLOT_ERRBAR;
    if (s->kind > STAGECAL_PLOT_TEXT)
        return error_set(err, STAGECAL_EINVAL, "series %zu ('%s'): unknown kind %d", i + 1,
                         series_name(s), (int)s->kind);
    if (s->n == 0 || !s->x || !s->y || (need_hi && !s->y_hi))
        return error_set(err, STAGECAL_EINVAL,
                         "series %zu ('%s'): no points or a missing array (expected n >= 1 "
                         "and x, y%s)",
                         i + 1, series_name(s), need_hi ? ", y_hi" : "");
    if (s->colour < 0 || s->colour >= STAGECAL_PLOT_NCOLOURS || s->line < 0 ||
        s->line >= STAGECAL_PLOT_NLINES || s->marker < 0 || s->marker >= STAGECAL_PLOT_NMARKERS ||
        !(s->width >= 0) || s->width > 20)
        return error_set(err, STAGECAL_EINVAL,
                         "series %zu ('%s'): colour %d, line %d, marker %d or width %g out of "
                         "range (expected 0..%d, 0..%d, 0..%d, [0, 20])",
                         i + 1, series_name(s), s->colour, s->line, s->marker, s->width,
                         STAGECAL_PLOT_NCOLOURS - 1, STAGECAL_PLOT_NLINES - 1,
                         STAGECAL_PLOT_NMARKERS - 1);
    if (s->kind == STAGECAL_PLOT_TEXT && (!s->label || !s->label[0]))
        return error_set(err, STAGECAL_EINVAL, "series %zu: a text series without text", i + 1);
    for (size_t k = 0; k < s->n; k++)
        *finite += plot_point_ok(s, k) && s->kind != STAGECAL_PLOT_TEXT;
    return STAGECAL_OK;
}

int stagecal_plot_check(const stagecal_plot_chart *c, stagecal_error *err)
{
    if (!c)
        return error_set(err, STAGECAL_EINVAL, "chart is NULL");
    if (c->n_series > 0 && !c->series)
        return error_set(err, STAGECAL_EINVAL, "chart has %zu series but no series array",
                         c->n_series);
    if (c->n_panels > STAGECAL_PLOT_MAXPANELS || (c->n_panels > 0 && !c->panels))
        return error_set(err, STAGECAL_EINVAL,
                         "chart '%s': %zu panels (expected at most %d, with a panel array)",
                         c->title ? c->title : "", c->n_panels, STAGECAL_PLOT_MAXPANELS);
    panel_view pv[STAGECAL_PLOT_MAXPANELS];
    size_t np = panel_views(c, pv), finite = 0, idx = 0;
    int rc;
    for (size_t p = 0; p < np; p++) {
        size_t pf = 0;
        if (pv[p].n_series > 0 && !pv[p].series)
            return error_set(err, STAGECAL_EINVAL, "panel %zu has %zu series but no array", p + 1,
                             pv[p].n_series);
        for (size_t i = 0; i < pv[p].n_series; i++)
            if ((rc = check_series(&pv[p].series[i], idx++, &pf, err)))
                return rc;
        if (c->n_panels > 0 && pf == 0)
            return error_set(err, STAGECAL_EINVAL,
                             "chart '%s', panel %zu ('%s'): nothing to draw (expected at least "
                             "one finite point)",
                             c->title ? c->title : "", p + 1, pv[p].y_label ? pv[p].y_label : "");
        finite += pf;
        const double lim[2] = {pv[p].y_min, pv[p].y_max};
        if (!(isnan(lim[0]) || isnan(lim[1])) &&
            (!isfinite(lim[0]) || !isfinite(lim[1]) || !(lim[0] < lim[1])))
            return error_set(err, STAGECAL_EINVAL,
                             "chart '%s': y axis range [%g, %g] (expected finite min < max, or "
                             "NAN for automatic)",
                             c->title ? c->title : "", lim[0], lim[1]);
    }
    if (finite == 0)
        return error_set(err, STAGECAL_EINVAL,
                         "chart '%s': nothing to draw (expected at least one finite point)",
                         c->title ? c->title : "");
    if (!(isnan(c->x_min) || isnan(c->x_max)) &&
        (!isfinite(c->x_min) || !isfinite(c->x_max) || !(c->x_min < c->x_max)))
        return error_set(err, STAGECAL_EINVAL,
                         "chart '%s': x axis range [%g, %g] (expected finite min < max, or "
                         "NAN for automatic)",
                         c->title ? c->title : "", c->x_min, c->x_max);
    return STAGECAL_OK;
}

/* PLplot treats '#' as its escape character: double it so labels print as given.
 * Returns a malloc'd copy or NULL. */
static char *plain_text(const char *s)
{
    size_t n = 0;
    for (const char *p = s ? s : ""; *p; p++)
        n += (*p == '#') ? 2 : 1;
    char *out = malloc(n + 1), *q = out;
    if (!out)
        return NULL;
    for (const char *p = s ? s : ""; *p; p++) {
        *q++ = *p;
        if (*p == '#')
            *q++ = '#';
    }
    *q = '\0';
    return out;
}

static void set_rgb(PLINT idx, unsigned long rgb)
{
    plscol0(idx, (PLINT)((rgb >> 16) & 0xFF), (PLINT)((rgb >> 8) & 0xFF), (PLINT)(rgb & 0xFF));
}

static void silent_abort(PLCHAR_VECTOR msg)
{
    (void)msg; /* the library does not print; every input is checked before PLplot */
}

/* Draws the finite runs of a series: lines break at non-finite points, bands are
 * filled per finite run, points skip non-finite ones. xs, ys, zs: scratch of 2·s->n.
 * y0, y1: the panel's y range (stripes fill it; texts hang below its top). */
static void draw_series(const stagecal_plot_series *s, PLFLT *xs, PLFLT *ys, PLFLT *zs,
                        double chr_scale, double y0, double y1)
{
    size_t k = 0;
    if (s->kind == STAGECAL_PLOT_TEXT) {
        plcol0(COL_SERIES + s->colour);
        plschr(0.0, 0.8 * chr_scale);
        plptex(s->x[0], y1 - 0.03 * (y1 - y0), 1, 0, 0.0, s->label);
        plschr(0.0, chr_scale);
        return;
    }
    if (s->kind == STAGECAL_PLOT_SPAN) {
        plcol0((s->line == 1 ? COL_LIGHT : COL_TINT) + s->colour);
        for (k = 0; k < s->n; k++) {
            if (!plot_point_ok(s, k))
                continue;
            PLFLT fx[4] = {s->x[k], s->y[k], s->y[k], s->x[k]}, fy[4] = {y0, y0, y1, y1};
            plfill(4, fx, fy);
        }
        return;
    }
    if (s->kind == STAGECAL_PLOT_ERRBAR) {
        size_t m = 0;
        for (k = 0; k < s->n; k++) {
            if (plot_point_ok(s, k)) {
                xs[m] = s->x[k];
                ys[m] = s->y[k];
                zs[m] = s->y_hi[k];
                m++;
            }
        }
        plcol0(COL_SERIES + s->colour);
        plwidth(s->width > 0 ? s->width : 1.0);
        if (m > 0)
            plerry((PLINT)m, xs, ys, zs);
        plwidth(1.0);
        return;
    }
    if (s->kind == STAGECAL_PLOT_POINTS) {
        size_t m = 0;
        for (k = 0; k < s->n; k++) {
            if (plot_point_ok(s, k)) {
                xs[m] = s->x[k];
                ys[m] = s->y[k];
                m++;
            }
        }
        plcol0(COL_SERIES + s->colour);
        if (s->width > 0)
            plschr(0.0, s->width * chr_scale);
        if (m > 0)
            plstring((PLINT)m, xs, ys, marker_glyphs[s->marker]);
        plschr(0.0, chr_scale);
        return;
    }
    while (k < s->n) {
        size_t m = 0;
        while (k < s->n && plot_point_ok(s, k)) {
            xs[m] = s->x[k];
            ys[m] = s->y[k];
            if (s->kind == STAGECAL_PLOT_BAND)
                zs[m] = s->y_hi[k];
            m++;
            k++;
        }
        if (s->kind == STAGECAL_PLOT_LINE && m >= 2) {
            plcol0(COL_SERIES + s->colour);
            pllsty(line_styles[s->line]);
            plwidth(s->width > 0 ? s->width : 2.0);
            plline((PLINT)m, xs, ys);
            pllsty(1);
            plwidth(1.0);
        } else if (s->kind == STAGECAL_PLOT_BAND && m >= 2) {
            /* polygon: lower edge forward, upper edge back (ys holds lower, zs upper) */
            for (size_t j = 0; j < m; j++) {
                xs[2 * m - 1 - j] = xs[j];
                ys[2 * m - 1 - j] = zs[j];
            }
            plcol0((s->line == 1 ? COL_LIGHT : COL_TINT) + s->colour);
            plfill((PLINT)(2 * m), xs, ys);
        }
        while (k < s->n && !plot_point_ok(s, k))
            k++;
    }
}

static void draw_legend(const panel_view *pv, size_t np, double chr, stagecal_plot_layout *l)
{
    PLINT opt[MAXLEG], tcol[MAXLEG], bcol[MAXLEG], bpat[MAXLEG], lcol[MAXLEG], lsty[MAXLEG],
        scol[MAXLEG], snum[MAXLEG];
    PLFLT bscale[MAXLEG], bwidth[MAXLEG], lwidth[MAXLEG], sscale[MAXLEG];
    const char *text[MAXLEG], *sym[MAXLEG];
    PLINT n = 0;
    for (size_t p = 0; p < np; p++) {
        for (size_t i = 0; i < pv[p].n_series && n < MAXLEG; i++) {
            const stagecal_plot_series *s = &pv[p].series[i];
            if (!plot_in_legend(s))
                continue;
            int fill = s->kind == STAGECAL_PLOT_BAND || s->kind == STAGECAL_PLOT_SPAN;
            opt[n] = s->kind == STAGECAL_PLOT_LINE || s->kind == STAGECAL_PLOT_ERRBAR
                         ? PL_LEGEND_LINE
                     : s->kind == STAGECAL_PLOT_POINTS ? PL_LEGEND_SYMBOL
                                                       : PL_LEGEND_COLOR_BOX;
            tcol[n] = COL_AXIS;
            text[n] = s->label; /* escaped by prepare() */
            bcol[n] = (fill && s->line == 1 ? COL_LIGHT : COL_TINT) + s->colour;
            bpat[n] = 0;
            bscale[n] = 0.8;
            bwidth[n] = 1;
            lcol[n] = COL_SERIES + s->colour;
            lsty[n] = s->kind == STAGECAL_PLOT_ERRBAR ? 1 : line_styles[s->line];
            lwidth[n] = s->width > 0 ? s->width : s->kind == STAGECAL_PLOT_ERRBAR ? 1.0 : 2.0;
            scol[n] = COL_SERIES + s->colour;
            sscale[n] = s->kind == STAGECAL_PLOT_POINTS && s->width > 0 ? fmin(s->width, 1.3) : 1.0;
            snum[n] = 3; /* PLplot spreads them over the sample width */
            sym[n] = marker_glyphs[s->marker];
            n++;
        }
    }
    if (n == 0)
        return;
    static const PLINT where[4] = {
        PL_POSITION_TOP | PL_POSITION_LEFT, PL_POSITION_BOTTOM | PL_POSITION_RIGHT,
        PL_POSITION_TOP | PL_POSITION_RIGHT, PL_POSITION_BOTTOM | PL_POSITION_LEFT};
    /* inside: a corner of the first box; outside: the top left of its own region */
    const stagecal_plot_box *v = l->legend_inside ? &l->box[0] : &l->legend_region;
    PLINT pos = (l->legend_inside ? where[l->legend_corner] : where[0]) | PL_POSITION_INSIDE;
    double off = l->legend_inside ? LEG_OFFSET : 0.0;
    plvpor(v->x0, v->x1, v->y0, v->y1);
    PLFLT w, h;
    PLINT nrow = l->legend_below ? (PLINT)l->legend_rows : 0,
          ncol = l->legend_below ? (PLINT)l->legend_cols : 0;
    pllegend(&w, &h,
             PL_LEGEND_BACKGROUND | PL_LEGEND_BOUNDING_BOX |
                 (l->legend_below ? PL_LEGEND_ROW_MAJOR : 0),
             pos, off, off, LEG_PLOT_WIDTH, COL_PAGE, COL_GRID, 1, nrow, ncol, n, opt,
             LEG_TEXT_OFFSET, LEG_TEXT_SCALE * chr, LEG_TEXT_SPACING, 0.0, tcol, text, bcol, bpat,
             bscale, bwidth, lcol, lsty, lwidth, scol, sscale, snum, sym);
    double vw = v->x1 - v->x0, vh = v->y1 - v->y0;
    if (l->legend_inside)
        l->legend = plot_corner_box(v, l->legend_corner, w * vw, h * vh);
    else
        l->legend = (stagecal_plot_box){v->x0, v->x0 + w * vw, v->y1 - h * vh, v->y1};
}

/* Everything PLplot needs, prepared (and allocated) before any PLplot call, so that no
 * failure can leave a half-open stream. */
typedef struct {
    char *title, *xl;
    char *yl[STAGECAL_PLOT_MAXPANELS];
    char **labels; /* escaped series labels */
    stagecal_plot_series *series;
    size_t n_total;
    panel_view pv[STAGECAL_PLOT_MAXPANELS]; /* the panels, on the escaped series */
    size_t np;
    PLFLT *xs, *ys, *zs;
} prepared;

static void prepared_free(prepared *p)
{
    free(p->title);
    free(p->xl);
    for (size_t i = 0; i < STAGECAL_PLOT_MAXPANELS; i++)
        free(p->yl[i]);
    if (p->labels)
        for (size_t i = 0; i < p->n_total; i++)
            free(p->labels[i]);
    free(p->labels);
    free(p->series);
    free(p->xs);
    free(p->ys);
    free(p->zs);
    memset(p, 0, sizeof *p);
}

static int prepare(const stagecal_plot_chart *c, prepared *p, stagecal_error *err)
{
    size_t nmax = 1;
    panel_view src[STAGECAL_PLOT_MAXPANELS];
    memset(p, 0, sizeof *p);
    p->np = panel_views(c, src);
    for (size_t q = 0; q < p->np; q++) {
        p->n_total += src[q].n_series;
        for (size_t i = 0; i < src[q].n_series; i++)
            nmax = src[q].series[i].n > nmax ? src[q].series[i].n : nmax;
    }
    p->title = plain_text(c->title);
    p->xl = plain_text(c->x_label);
    p->labels = calloc(p->n_total + 1, sizeof *p->labels);
    p->series = calloc(p->n_total + 1, sizeof *p->series);
    p->xs = malloc(2 * nmax * sizeof *p->xs);
    p->ys = malloc(2 * nmax * sizeof *p->ys);
    p->zs = malloc(nmax * sizeof *p->zs);
    int ok = p->title && p->xl && p->labels && p->series && p->xs && p->ys && p->zs;
    size_t j = 0;
    for (size_t q = 0; ok && q < p->np; q++) {
        p->pv[q] = src[q];
        p->pv[q].series = p->series + j;
        ok = (p->yl[q] = plain_text(src[q].y_label)) != NULL;
        for (size_t i = 0; ok && i < src[q].n_series; i++, j++) {
            p->series[j] = src[q].series[i];
            if (src[q].series[i].label && src[q].series[i].label[0]) {
                ok = (p->labels[j] = plain_text(src[q].series[i].label)) != NULL;
                p->series[j].label = p->labels[j];
            }
        }
    }
    if (!ok) {
        prepared_free(p);
        return error_set(err, STAGECAL_ENOMEM, "out of memory preparing a chart");
    }
    return STAGECAL_OK;
}

/* Dates on a time axis: years alone only over 6 years (PLplot's automatic ticks fall about
 * half a year apart over 2 to 6 years, and years alone then read "2025 2025 2026") */
static const char *time_format(double span_s)
{
    return span_s > 6 * 365.25 * 86400 ? "%Y"
           : span_s > 60 * 86400       ? "%Y-%m"
           : span_s > 1.5 * 86400      ? "%m-%d"
                                       : "%H:%M";
}

static int draw_pass(stagecal_plot_kind k)
{
    return k == STAGECAL_PLOT_SPAN   ? 0
           : k == STAGECAL_PLOT_BAND ? 1
           : k == STAGECAL_PLOT_TEXT ? 3
                                     : 2;
}

#define CHAR_PX 13.6 /* character height at char_scale 1 [px or pt] */

/* Draws c with PLplot device dev into file (which exists and is writable); the layout
 * into *lay. */
static void render(const stagecal_plot_chart *c, const prepared *pr, const char *dev,
                   const char *file, const stagecal_plot_params *par, stagecal_plot_layout *lay)
{
    const int fmt_svg = strcmp(dev, "svg") == 0;
    PLINT old = 0, strm = 0;
    char geometry[64];

    plgstrm(&old);
    plmkstrm(&strm);
    plsabort(silent_abort);
    plsdev(dev);
    plsfnam(file);
    snprintf(geometry, sizeof geometry, "%zux%zu", par->width, par->height);
    plsetopt("geometry", geometry);
    plscmap0n(NCOL0);
    set_rgb(COL_PAGE, 0xFFFFFF);
    set_rgb(COL_AXIS, axis_rgb);
    set_rgb(COL_GRID, grid_rgb);
    for (int i = 0; i < STAGECAL_PLOT_NCOLOURS; i++) {
        set_rgb(COL_SERIES + i, palette[i]);
        set_rgb(COL_TINT + i, stagecal_plot_tint(i));
        set_rgb(COL_LIGHT + i, mix_white(i, LIGHT_WEIGHT));
    }
    plinit();
    pladv(0);
    PLFLT sx0, sx1, sy0, sy1, def, ht;
    plgspa(&sx0, &sx1, &sy0, &sy1);
    plgchr(&def, &ht);
    /* PLplot scales its characters with the page; a chart's text should keep one size in
     * pixels (points) whatever the chart's size: CHAR_PX·char_scale */
    double chr = par->char_scale * CHAR_PX * ((sx1 - sx0) / (double)par->width) / def;
    plschr(0.0, chr);
    plgchr(&def, &ht);
    plot_plan_layout(c, pr->pv, pr->np, ht, sx1 - sx0, sy1 - sy0, fmt_svg, lay);
    size_t last = 0; /* the lowest stacked panel carries the x axis label */
    for (size_t p = 0; p < pr->np; p++)
        if (!pr->pv[p].is_inset)
            last = p;
    for (size_t p = 0; p < pr->np; p++) {
        const stagecal_plot_box *b = &lay->box[p];
        const int inset = pr->pv[p].is_inset;
        double y0 = lay->y_min[p], y1 = lay->y_max[p];
        int bottom = p == last;
        plvpor(b->x0, b->x1, b->y0, b->y1);
        plwind(lay->px_min[p], lay->px_max[p], y0, y1);
        if (inset) { /* a white ground over the panel below (with its labels), smaller text */
            const stagecal_plot_box *g = &lay->ground[p];
            static const PLFLT wx[4] = {0, 1, 1, 0}, wy[4] = {0, 0, 1, 1};
            plvpor(g->x0, g->x1, g->y0, g->y1);
            plwind(0, 1, 0, 1);
            plcol0(COL_PAGE);
            plfill(4, wx, wy);
            plvpor(b->x0, b->x1, b->y0, b->y1);
            plwind(lay->px_min[p], lay->px_max[p], y0, y1);
            plschr(0.0, 0.75 * chr);
        }
        if (c->x_time)
            pltimefmt(time_format(lay->x_max - lay->x_min));
        plcol0(COL_GRID);
        plwidth(0.5);
        plbox(c->x_time ? "gd" : "g", 0, 0, "g", 0, 0);
        plwidth(1.0);
        /* stripes, then bands, then lines, bars and markers in the builder's order, then
         * texts */
        for (int pass = 0; pass < 4; pass++)
            for (size_t i = 0; i < pr->pv[p].n_series; i++)
                if (draw_pass(pr->pv[p].series[i].kind) == pass)
                    draw_series(&pr->pv[p].series[i], pr->xs, pr->ys, pr->zs, chr, y0, y1);
        plcol0(COL_AXIS);
        const char *xo = c->x_time ? (bottom ? "bcdnst" : "bcdst") : (bottom ? "bcnst" : "bcst");
        if (inset) {
            plbox("bcnst", 0, 0, "bcnstv", 0, 0);
            plmtex("t", 0.8, 0.5, 0.5, pr->yl[p]);
            plschr(0.0, chr);
            continue;
        }
        plbox(xo, 0, 0, "bcnstv", 0, 0);
        plmtex("l", 5.6, 0.5, 0.5, pr->yl[p]);
        if (bottom)
            plmtex("b", 3.2, 0.5, 0.5, pr->xl);
        if (p == 0)
            plmtex("t", 1.2, 0.5, 0.5, pr->title);
    }
    if (lay->has_legend && c->legend != STAGECAL_PLOT_LEGEND_HIDDEN)
        draw_legend(pr->pv, pr->np, chr, lay);
    plend1();
    plsstrm(old);
}

int plot_render_file(const stagecal_plot_chart *c, const char *dev, const char *file,
                     const stagecal_plot_params *par, stagecal_error *err)
{
    prepared pr;
    stagecal_plot_layout lay;
    int rc = prepare(c, &pr, err);
    if (rc)
        return rc;
    render(c, &pr, dev, file, par, &lay);
    prepared_free(&pr);
    if (par->layout)
        *par->layout = lay;
    return STAGECAL_OK;
}
