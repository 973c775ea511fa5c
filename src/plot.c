/*
 * plot.c — the generic chart renderer (see stagecal/plot.h) on PLplot's cairo devices
 * pngcairo, svgcairo and pdfcairo.
 *
 * Workload: a report draws about ten charts of at most a few thousand points, so
 * rendering is dominated by PLplot/cairo start-up per file (a few ms each); nothing
 * here is on a hot path. Every chart gets its own PLplot stream (plmkstrm … plend1)
 * so the caller's streams are untouched.
 *
 * Colour map 0 is set completely before plinit (PLplot's default map has a
 * black page and would make our dark axes invisible on white): index 0 white page,
 * 1 axis/text grey, 2 light grid grey, 3..10 the Okabe–Ito palette, 11..18 tints.
 *
 * Files are written through the one atomic writer (src/fileio.c): PLplot draws into a
 * temporary file in the target's folder (so PLplot's own fopen cannot fail and prompt
 * on the terminal); the result is read back and published (renamed over the target,
 * which --output documents) only when it is complete — a PNG's IEND chunk, an SVG's
 * closing tag, a PDF's %%EOF — so a full disk cannot leave a cut chart behind.
 */
#include "stagecal/plot.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <plplot.h>

#include "fileio.h"
#include "internal.h"

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

int stagecal_plot_format_from_path(const char *path, stagecal_plot_format *fmt, stagecal_error *err)
{
    static const struct {
        const char *ext;
        stagecal_plot_format fmt;
    } table[] = {
        {".png", STAGECAL_PLOT_PNG}, {".svg", STAGECAL_PLOT_SVG}, {".pdf", STAGECAL_PLOT_PDF}};
    const char *dot = path ? strrchr(path, '.') : NULL;
    if (dot && strlen(dot) == 4) {
        char ext[5];
        for (size_t i = 0; i < 5; i++)
            ext[i] = (char)tolower((unsigned char)dot[i]);
        for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
            if (strcmp(ext, table[i].ext) == 0) {
                *fmt = table[i].fmt;
                return STAGECAL_OK;
            }
        }
    }
    return error_set(err, STAGECAL_EINVAL,
                     "plot file '%s': unknown extension (expected .png, .svg or .pdf)",
                     path ? path : "(null)");
}

static const char *series_name(const stagecal_plot_series *s)
{
    return (s->label && s->label[0]) ? s->label : "unlabelled";
}

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

/* Is point k of s drawable (every coordinate it needs finite)? */
static int point_ok(const stagecal_plot_series *s, size_t k)
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
        *finite += point_ok(s, k) && s->kind != STAGECAL_PLOT_TEXT;
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

/* Axis range from the data where the chart leaves it open (NAN), padded 4 %. axis 0: x
 * over every panel; axis 1: y of panel pv (spans and texts do not count for y). */
static void axis_range(const panel_view *pv, size_t np, int axis, double a, double b, double *lo,
                       double *hi)
{
    if (!isnan(a) && !isnan(b)) {
        *lo = a;
        *hi = b;
        return;
    }
    double mn = INFINITY, mx = -INFINITY;
    for (size_t p = 0; p < np; p++) {
        for (size_t i = 0; i < pv[p].n_series; i++) {
            const stagecal_plot_series *s = &pv[p].series[i];
            for (size_t k = 0; k < s->n; k++) {
                if (!point_ok(s, k))
                    continue;
                if (axis == 0) {
                    mn = fmin(mn, s->x[k]);
                    mx = fmax(mx, s->x[k]);
                    if (s->kind == STAGECAL_PLOT_SPAN)
                        mn = fmin(mn, s->y[k]), mx = fmax(mx, s->y[k]);
                } else if (s->kind != STAGECAL_PLOT_SPAN && s->kind != STAGECAL_PLOT_TEXT) {
                    mn = fmin(mn, s->y[k]);
                    mx = fmax(mx, s->y[k]);
                    if (s->y_hi && isfinite(s->y_hi[k]))
                        mx = fmax(mx, s->y_hi[k]), mn = fmin(mn, s->y_hi[k]);
                }
            }
        }
    }
    if (!isfinite(mn)) { /* a panel of stripes only */
        mn = 0;
        mx = 1;
    }
    if (mx - mn <= 1e-12 * fmax(1.0, fabs(mx))) {
        /* one value: open a window around it so PLplot gets a proper range */
        double d = fabs(mx) > 0 ? 0.05 * fabs(mx) : 0.5;
        mn -= d;
        mx += d;
    } else {
        double pad = 0.04 * (mx - mn);
        mn -= pad;
        mx += pad;
    }
    *lo = isnan(a) ? mn : a;
    *hi = isnan(b) ? mx : b;
    if (!(*lo < *hi)) { /* one end given, the data on the wrong side of it */
        double d = fabs(*lo) > 0 ? 0.05 * fabs(*lo) : 0.5;
        if (isnan(a))
            *lo = *hi - d;
        else
            *hi = *lo + d;
    }
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
            if (!point_ok(s, k))
                continue;
            PLFLT fx[4] = {s->x[k], s->y[k], s->y[k], s->x[k]}, fy[4] = {y0, y0, y1, y1};
            plfill(4, fx, fy);
        }
        return;
    }
    if (s->kind == STAGECAL_PLOT_ERRBAR) {
        size_t m = 0;
        for (k = 0; k < s->n; k++) {
            if (point_ok(s, k)) {
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
            if (point_ok(s, k)) {
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
        while (k < s->n && point_ok(s, k)) {
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
        while (k < s->n && !point_ok(s, k))
            k++;
    }
}

/* ---- layout ------------------------------------------------------------------------- */

/* PLplot's legend call, in one place (the placement estimates its box from these). */
#define LEG_PLOT_WIDTH 0.08 /* sample width [fraction of the viewport width] */
#define LEG_TEXT_OFFSET 0.8
#define LEG_TEXT_SCALE 0.75 /* of the chart's character height (pllegend takes it absolute) */
#define LEG_TEXT_SPACING 1.8
#define LEG_OFFSET 0.02 /* from the corner [fraction of the viewport] */
#define MAXLEG 40

static size_t utf8_len(const char *s)
{
    size_t n = 0;
    for (; s && *s; s++)
        n += ((unsigned char)*s & 0xC0) != 0x80;
    return n;
}

static int in_legend(const stagecal_plot_series *s)
{
    return s->label && s->label[0] && s->kind != STAGECAL_PLOT_TEXT;
}

/* Legend entries and their longest label (characters). */
static size_t legend_entries(const panel_view *pv, size_t np, size_t *maxchars)
{
    size_t n = 0;
    *maxchars = 0;
    for (size_t p = 0; p < np; p++)
        for (size_t i = 0; i < pv[p].n_series && n < MAXLEG; i++)
            if (in_legend(&pv[p].series[i])) {
                size_t l = utf8_len(pv[p].series[i].label);
                *maxchars = l > *maxchars ? l : *maxchars;
                n++;
            }
    return n;
}

static void map_point(const stagecal_plot_layout *l, size_t p, double x, double y, double *px,
                      double *py)
{
    const stagecal_plot_box *b = &l->box[p];
    *px = b->x0 + (x - l->px_min[p]) / (l->px_max[p] - l->px_min[p]) * (b->x1 - b->x0);
    *py = b->y0 + (y - l->y_min[p]) / (l->y_max[p] - l->y_min[p]) * (b->y1 - b->y0);
}

void stagecal_plot_layout_map(const stagecal_plot_layout *l, size_t p, double x, double y,
                              double *px, double *py)
{
    if (!l || p >= l->n_panels) {
        *px = *py = NAN;
        return;
    }
    map_point(l, p, x, y, px, py);
}

static int box_has(const stagecal_plot_box *b, double x, double y)
{
    return x >= b->x0 && x <= b->x1 && y >= b->y0 && y <= b->y1;
}

/* Does the segment (ax, ay)–(bx, by) meet the box? (Liang–Barsky clipping.) */
static int seg_hits(const stagecal_plot_box *b, double ax, double ay, double bx, double by)
{
    double t0 = 0, t1 = 1, dx = bx - ax, dy = by - ay;
    const double p[4] = {-dx, dx, -dy, dy};
    const double q[4] = {ax - b->x0, b->x1 - ax, ay - b->y0, b->y1 - ay};
    for (int i = 0; i < 4; i++) {
        if (p[i] == 0) {
            if (q[i] < 0)
                return 0;
            continue;
        }
        double r = q[i] / p[i];
        if (p[i] < 0)
            t0 = fmax(t0, r);
        else
            t1 = fmin(t1, r);
        if (t0 > t1)
            return 0;
    }
    return 1;
}

/* Does series s of panel p put anything into box b (page fractions)? */
static int series_hits(const stagecal_plot_layout *l, size_t p, const stagecal_plot_series *s,
                       const stagecal_plot_box *b)
{
    double mw = 0.5 * l->marker_w * (s->width > 0 ? s->width : 1),
           mh = 0.5 * l->marker_h * (s->width > 0 ? s->width : 1);
    double px0 = NAN, py0 = NAN, qx0 = NAN, qy0 = NAN;
    for (size_t k = 0; k < s->n; k++) {
        if (!point_ok(s, k)) {
            px0 = py0 = qx0 = qy0 = NAN;
            continue;
        }
        double px, py, qx, qy;
        switch (s->kind) {
        case STAGECAL_PLOT_POINTS: {
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            stagecal_plot_box m = {px - mw, px + mw, py - mh, py + mh};
            if (m.x1 >= b->x0 && m.x0 <= b->x1 && m.y1 >= b->y0 && m.y0 <= b->y1)
                return 1;
            break;
        }
        case STAGECAL_PLOT_TEXT: {
            map_point(l, p, s->x[k], l->y_max[p], &px, &py);
            stagecal_plot_box m = {px, px + 0.9 * l->marker_w * (double)utf8_len(s->label),
                                   py - 2 * l->marker_h, py};
            if (m.x1 >= b->x0 && m.x0 <= b->x1 && m.y1 >= b->y0 && m.y0 <= b->y1)
                return 1;
            break;
        }
        case STAGECAL_PLOT_SPAN:
            map_point(l, p, s->x[k], l->y_min[p], &px, &py);
            map_point(l, p, s->y[k], l->y_min[p], &qx, &qy);
            if (fmax(px, qx) >= b->x0 && fmin(px, qx) <= b->x1)
                return 1;
            break;
        case STAGECAL_PLOT_ERRBAR:
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            map_point(l, p, s->x[k], s->y_hi[k], &qx, &qy);
            if (seg_hits(b, px, py, qx, qy))
                return 1;
            break;
        case STAGECAL_PLOT_LINE:
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            if ((isnan(px0) && box_has(b, px, py)) ||
                (!isnan(px0) && seg_hits(b, px0, py0, px, py)))
                return 1;
            px0 = px;
            py0 = py;
            break;
        case STAGECAL_PLOT_BAND:
            map_point(l, p, s->x[k], s->y[k], &px, &py);
            map_point(l, p, s->x[k], s->y_hi[k], &qx, &qy);
            if (seg_hits(b, px, py, qx, qy))
                return 1;
            if (!isnan(px0)) {
                /* the quadrilateral between two abscissae: its edges, or the box inside it */
                double cx = 0.5 * (b->x0 + b->x1), cy = 0.5 * (b->y0 + b->y1);
                if (seg_hits(b, px0, py0, px, py) || seg_hits(b, qx0, qy0, qx, qy))
                    return 1;
                if (cx >= fmin(px0, px) && cx <= fmax(px0, px)) {
                    double t = px != px0 ? (cx - px0) / (px - px0) : 0;
                    double lo = py0 + t * (py - py0), hi = qy0 + t * (qy - qy0);
                    if (cy >= fmin(lo, hi) && cy <= fmax(lo, hi))
                        return 1;
                }
            }
            px0 = px;
            py0 = py;
            qx0 = qx;
            qy0 = qy;
            break;
        }
    }
    return 0;
}

/* The legend's box in corner `corner` of panel p (legend_pos numbering), w and h in page
 * fractions. */
static stagecal_plot_box corner_box(const stagecal_plot_box *v, int corner, double w, double h)
{
    double ox = LEG_OFFSET * (v->x1 - v->x0), oy = LEG_OFFSET * (v->y1 - v->y0);
    int left = corner == 0 || corner == 3, top = corner == 0 || corner == 2;
    stagecal_plot_box b;
    b.x0 = left ? v->x0 + ox : v->x1 - ox - w;
    b.x1 = b.x0 + w;
    b.y1 = top ? v->y1 - oy : v->y0 + oy + h;
    b.y0 = b.y1 - h;
    return b;
}

/* The boxes of inset panels, from the first panel's box, and their white grounds (the
 * box with room for its tick labels and caption at 0.75 of the character height ht). */
static void place_insets(const panel_view *pv, size_t np, double ht, double pw, double ph,
                         stagecal_plot_layout *l)
{
    const stagecal_plot_box m = l->box[0];
    for (size_t p = 0; p < np; p++) {
        if (!pv[p].is_inset)
            continue;
        stagecal_plot_box b = {
            m.x0 + pv[p].inset.x0 * (m.x1 - m.x0), m.x0 + pv[p].inset.x1 * (m.x1 - m.x0),
            m.y0 + pv[p].inset.y0 * (m.y1 - m.y0), m.y0 + pv[p].inset.y1 * (m.y1 - m.y0)};
        /* room: 4 characters of tick labels on the left, 2 lines below, the caption above */
        double cw = 0.75 * ht / pw, ch = 0.75 * ht / ph;
        l->box[p] = (stagecal_plot_box){b.x0 + 4.5 * cw, b.x1, b.y0 + 2.2 * ch, b.y1 - 2.0 * ch};
        l->ground[p] = b;
    }
}

/* Computes boxes, ranges and the legend's place (before anything is drawn). ht: character
 * height [mm]; pw, ph: page size [mm]. */
static void plan_layout(const stagecal_plot_chart *c, const panel_view *pv, size_t np, double ht,
                        double pw, double ph, int svg, stagecal_plot_layout *l)
{
    memset(l, 0, sizeof *l);
    l->n_panels = np;
    /* stacked panels share x; insets have their own */
    panel_view stacked[STAGECAL_PLOT_MAXPANELS];
    size_t ns = 0;
    for (size_t p = 0; p < np; p++)
        if (!pv[p].is_inset)
            stacked[ns++] = pv[p];
    axis_range(stacked, ns, 0, c->x_min, c->x_max, &l->x_min, &l->x_max);
    for (size_t p = 0; p < np; p++) {
        l->px_min[p] = l->x_min;
        l->px_max[p] = l->x_max;
        if (pv[p].is_inset)
            axis_range(&pv[p], 1, 0, pv[p].x_min, pv[p].x_max, &l->px_min[p], &l->px_max[p]);
        axis_range(&pv[p], 1, 1, pv[p].y_min, pv[p].y_max, &l->y_min[p], &l->y_max[p]);
    }
    double ml = 7.0 * ht / pw, mr = 2.5 * ht / pw, mb = 4.5 * ht / ph, mt = 3.2 * ht / ph,
           gap = 1.0 * ht / ph;
    double wsum = 0, y = 1 - mt, avail = 1 - mt - mb - gap * (double)(ns - 1);
    for (size_t p = 0; p < np; p++)
        wsum += pv[p].is_inset ? 0 : pv[p].weight;
    for (size_t p = 0; p < np; p++) {
        if (pv[p].is_inset)
            continue;
        double h = avail * pv[p].weight / wsum;
        l->box[p] = (stagecal_plot_box){ml, 1 - mr, y - h, y};
        y -= h + gap;
    }
    place_insets(pv, np, ht, pw, ph, l);
    l->marker_w = ht / pw; /* a marker glyph is about one character high and wide */
    l->marker_h = ht / ph;
    size_t maxchars, n = c->legend ? legend_entries(pv, np, &maxchars) : 0;
    if (n == 0)
        return;
    l->has_legend = 1;
    /* the legend's size, from PLplot's layout rules: n rows of LEG_TEXT_SPACING character
     * heights, and the sample, the offset and the text. The text: at most 0.58 character
     * heights a character with cairo, 0.65 with the svg driver (measured with the text at
     * 0.9 of the chart's character height on labels of 5 to 45 characters: 0.654 and 0.750,
     * so 0.545 and 0.625 at LEG_TEXT_SCALE = 0.75), plus 2.6 of margins */
    double tw = ht * (2.6 + (svg ? 0.65 : 0.58) * (double)maxchars) / pw;
    double h = ht * (LEG_TEXT_SPACING * (double)n + 0.6) / ph;
    if (ns == 1) {
        for (int k = 0; k < 4; k++) {
            int corner = (c->legend_pos + k) & 3;
            double w = LEG_PLOT_WIDTH * (l->box[0].x1 - l->box[0].x0) + tw;
            stagecal_plot_box b = corner_box(&l->box[0], corner, w, h);
            int hit = 0;
            for (size_t i = 0; i < pv[0].n_series && !hit; i++)
                hit = series_hits(l, 0, &pv[0].series[i], &b);
            for (size_t p = 1; p < np && !hit; p++) /* an inset is taken space */
                hit = pv[p].is_inset && l->ground[p].x1 >= b.x0 && l->ground[p].x0 <= b.x1 &&
                      l->ground[p].y1 >= b.y0 && l->ground[p].y0 <= b.y1;
            if (!hit) {
                l->legend_inside = 1;
                l->legend_corner = corner;
                l->legend_est = b;
                return;
            }
        }
    }
    /* outside. One panel: on the right of the box, in a region of its own, unless that
     * leaves the plot less than half the drawing's width (long labels: the chart would be
     * a sliver beside its legend); stacked panels, and such a panel: below the x axis
     * label, in as many columns as fit (they need the width) */
    l->legend_inside = 0;
    double x1 = 0.985 - tw / (1 - LEG_PLOT_WIDTH);
    if (ns > 1 || x1 - l->box[0].x0 < 0.5) {
        double rx0 = l->box[0].x0, rx1 = 0.99, rw = rx1 - rx0;
        size_t ncol = (size_t)floor(rw / (LEG_PLOT_WIDTH * rw + tw + 1.0 * ht / pw));
        ncol = ncol < 1 ? 1 : ncol > n ? n : ncol;
        size_t nrow = (n + ncol - 1) / ncol;
        double lh = ht * (LEG_TEXT_SPACING * (double)nrow + 0.6) / ph, lift = lh + 0.01;
        l->legend_below = 1;
        l->legend_cols = ncol;
        l->legend_rows = nrow;
        l->legend_region = (stagecal_plot_box){rx0, rx1, 0.005, 0.005 + lh};
        l->legend_est = (stagecal_plot_box){rx0, rx0 + (double)ncol * (LEG_PLOT_WIDTH * rw + tw),
                                            0.005, 0.005 + lh};
        /* lift the boxes: squeeze their heights into what is left above the legend */
        double top = l->box[0].y1, bottom = 1, nb;
        for (size_t p = 0; p < np; p++)
            if (!pv[p].is_inset)
                bottom = fmin(bottom, l->box[p].y0);
        nb = bottom + lift;
        for (size_t p = 0; p < np; p++) {
            l->box[p].y0 = nb + (l->box[p].y0 - bottom) * (top - nb) / (top - bottom);
            l->box[p].y1 = nb + (l->box[p].y1 - bottom) * (top - nb) / (top - bottom);
        }
        place_insets(pv, np, ht, pw, ph, l);
        return;
    }
    for (size_t p = 0; p < np; p++)
        l->box[p].x1 = x1;
    place_insets(pv, np, ht, pw, ph, l);
    l->legend_region = (stagecal_plot_box){x1 + 0.01, 0.995, l->box[0].y0, l->box[0].y1};
    double rw = l->legend_region.x1 - l->legend_region.x0;
    l->legend_est =
        (stagecal_plot_box){l->legend_region.x0, l->legend_region.x0 + LEG_PLOT_WIDTH * rw + tw,
                            l->box[0].y1 - h, l->box[0].y1};
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
            if (!in_legend(s))
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
        l->legend = corner_box(v, l->legend_corner, w * vw, h * vh);
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

/* Draws c with PLplot device dev into file (which exists and is writable); the layout
 * into *lay. */
static int draw_pass(stagecal_plot_kind k)
{
    return k == STAGECAL_PLOT_SPAN   ? 0
           : k == STAGECAL_PLOT_BAND ? 1
           : k == STAGECAL_PLOT_TEXT ? 3
                                     : 2;
}

#define CHAR_PX 13.6 /* character height at char_scale 1 [px or pt] */

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
    plan_layout(c, pr->pv, pr->np, ht, sx1 - sx0, sy1 - sy0, fmt_svg, lay);
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

/* PNG and PDF through cairo; SVG through PLplot's own svg driver, whose labels are <text>
 * elements (svgcairo stores glyphs as outlines). */
static const char *device_for(stagecal_plot_format f)
{
    return f == STAGECAL_PLOT_PNG ? "pngcairo" : f == STAGECAL_PLOT_SVG ? "svg" : "pdfcairo";
}

static int check_params(const stagecal_plot_params *par, stagecal_error *err)
{
    if (par->width < 16 || par->height < 16 || par->width > 20000 || par->height > 20000 ||
        !(par->char_scale > 0 && par->char_scale <= 10))
        return error_set(err, STAGECAL_EINVAL,
                         "plot size %zux%zu or text scale %g out of range (expected 16..20000 and "
                         "(0, 10])",
                         par->width, par->height, par->char_scale);
    return STAGECAL_OK;
}

/* Is the rendered file complete? A PNG ends with its IEND chunk, an SVG with its
 * closing tag, a PDF with its end-of-file marker (trailing white space allowed). A
 * cairo device that ran out of disk leaves a file cut anywhere, so size alone says
 * nothing. */
static int chart_complete(const char *buf, size_t n, stagecal_plot_format fmt)
{
    static const char iend[12] = {0, 0, 0, 0, 'I', 'E', 'N', 'D', '\xae', 'B', '`', '\x82'};
    if (fmt == STAGECAL_PLOT_PNG)
        return n >= sizeof iend && memcmp(buf + n - sizeof iend, iend, sizeof iend) == 0;
    while (n > 0 && isspace((unsigned char)buf[n - 1]))
        n--;
    const char *end = fmt == STAGECAL_PLOT_SVG ? "</svg>" : "%%EOF";
    size_t k = strlen(end);
    return n >= k && memcmp(buf + n - k, end, k) == 0;
}

/* The svg driver writes every character of a text as a numeric reference (&#x41;): turn
 * them into UTF-8 so that the labels read as text (search, copy, other tools), keeping
 * <, >, & and " as references (the driver writes text only as element content, where an
 * apostrophe needs no escape). In place: UTF-8 is never longer than its
 * reference. Returns the new length. */
static size_t svg_plain_text(char *buf, size_t n)
{
    size_t r = 0, w = 0;
    while (r < n) {
        if (buf[r] == '&' && r + 3 < n && buf[r + 1] == '#' && buf[r + 2] == 'x') {
            size_t k = r + 3;
            unsigned long cp = 0;
            while (k < n && k < r + 11 && isxdigit((unsigned char)buf[k]))
                cp = cp * 16 + (unsigned long)(isdigit((unsigned char)buf[k])
                                                   ? buf[k] - '0'
                                                   : (tolower((unsigned char)buf[k]) - 'a' + 10)),
                k++;
            int special = cp == '<' || cp == '>' || cp == '&' || cp == '"';
            if (k < n && buf[k] == ';' && k > r + 3 && cp >= 0x20 && cp <= 0x10FFFF && !special &&
                !(cp >= 0xD800 && cp <= 0xDFFF)) {
                if (cp < 0x80) {
                    buf[w++] = (char)cp;
                } else if (cp < 0x800) {
                    buf[w++] = (char)(0xC0 | (cp >> 6));
                    buf[w++] = (char)(0x80 | (cp & 0x3F));
                } else if (cp < 0x10000) {
                    buf[w++] = (char)(0xE0 | (cp >> 12));
                    buf[w++] = (char)(0x80 | ((cp >> 6) & 0x3F));
                    buf[w++] = (char)(0x80 | (cp & 0x3F));
                } else {
                    buf[w++] = (char)(0xF0 | (cp >> 18));
                    buf[w++] = (char)(0x80 | ((cp >> 12) & 0x3F));
                    buf[w++] = (char)(0x80 | ((cp >> 6) & 0x3F));
                    buf[w++] = (char)(0x80 | (cp & 0x3F));
                }
                r = k + 1;
                continue;
            }
        }
        buf[w++] = buf[r++];
    }
    buf[w] = '\0';
    return w;
}

/* PLplot lists its drivers in a temporary file (in $TMPDIR, else /tmp) the first time a
 * chart is drawn and, when nothing could be written there, exits the process ("No device
 * drivers found", exit 1; issue 18: a completely full disk). Checked first, once per
 * process: a 256-byte file written and removed (the list is 680 bytes here, and its first
 * lines, the cairo devices, are enough). */
static int plplot_tmp_writable(stagecal_error *err)
{
    static int ok;
    if (ok)
        return STAGECAL_OK;
    const char *dir = getenv("TMPDIR");
    if (!dir || !*dir)
        dir = "/tmp"; /* PLplot's own default (P_tmpdir) */
    char path[4096], buf[256];
    memset(buf, '\n', sizeof buf);
    snprintf(path, sizeof path, "%s/stagecal-plplot-XXXXXX", dir);
    int fd = mkstemp(path), e = errno;
    ssize_t w = -1;
    if (fd >= 0) {
        w = write(fd, buf, sizeof buf);
        e = w < 0 ? errno : ENOSPC;
        if (close(fd) != 0 && w == (ssize_t)sizeof buf)
            w = -1, e = errno;
        unlink(path);
    }
    if (w != (ssize_t)sizeof buf)
        return error_set(err, STAGECAL_EWRITE,
                         "cannot draw a chart: the chart library needs a small temporary file in "
                         "'%s' and cannot write one (%s); is the disk full?",
                         dir, strerror(e));
    ok = 1;
    return STAGECAL_OK;
}

/* Renders into the temporary file a (PLplot opens it by name) and checks that it is
 * complete; an SVG is rewritten with plain-text labels. out and len: the content when
 * wanted (caller frees), else NULL. */
static int render_to(const stagecal_plot_chart *c, stagecal_plot_format fmt, atomic_file *a,
                     const char *path, const stagecal_plot_params *par, char **out, size_t *len,
                     stagecal_error *err)
{
    prepared pr;
    stagecal_plot_layout lay;
    char *buf = NULL;
    size_t n = 0;
    int rc = plplot_tmp_writable(err);
    if (rc || (rc = prepare(c, &pr, err)))
        return rc;
    render(c, &pr, device_for(fmt), atomic_path(a), par, &lay);
    prepared_free(&pr);
    if (par->layout)
        *par->layout = lay;
    if ((rc = atomic_read_back(a, &buf, &n, err)))
        return rc;
    if (!chart_complete(buf, n, fmt)) {
        free(buf);
        return error_set(err, STAGECAL_EWRITE,
                         "cannot write '%s': the chart came out incomplete (%zu bytes, no %s); "
                         "is the disk full%s?",
                         path, n,
                         fmt == STAGECAL_PLOT_PNG   ? "PNG end chunk"
                         : fmt == STAGECAL_PLOT_SVG ? "closing </svg>"
                                                    : "PDF end marker",
                         n == 0 ? ", or a PLplot driver missing" : "");
    }
    if (fmt == STAGECAL_PLOT_SVG)
        n = svg_plain_text(buf, n);
    if (out) {
        *out = buf;
        *len = n;
    } else {
        free(buf);
    }
    return STAGECAL_OK;
}

int stagecal_plot_write(const stagecal_plot_chart *chart, const char *path,
                        const stagecal_plot_params *params, stagecal_error *err)
{
    stagecal_plot_params par = params ? *params : stagecal_plot_default_params();
    stagecal_plot_format fmt;
    atomic_file a;
    int rc;
    if (!path || !path[0])
        return error_set(err, STAGECAL_EINVAL, "plot file name is empty");
    if ((rc = stagecal_plot_format_from_path(path, &fmt, err)) || (rc = check_params(&par, err)) ||
        (rc = stagecal_plot_check(chart, err)))
        return rc;
    if (fmt == STAGECAL_PLOT_SVG) { /* rewritten with plain-text labels: a second file */
        char *svg = NULL;
        size_t n = 0;
        if ((rc = atomic_open(&a, path, err)) == STAGECAL_OK)
            rc = render_to(chart, fmt, &a, path, &par, &svg, &n, err);
        atomic_discard(&a);
        if (rc == STAGECAL_OK)
            rc = write_atomic(path, svg, n, ATOMIC_REPLACE, err);
        free(svg);
        return rc;
    }
    if ((rc = atomic_open(&a, path, err)) == STAGECAL_OK &&
        (rc = render_to(chart, fmt, &a, path, &par, NULL, NULL, err)) == STAGECAL_OK)
        rc = atomic_publish(&a, path, ATOMIC_REPLACE, NULL, err);
    atomic_discard(&a);
    return rc;
}

int stagecal_plot_svg(const stagecal_plot_chart *chart, const stagecal_plot_params *params,
                      char **svg, size_t *len, stagecal_error *err)
{
    stagecal_plot_params par = params ? *params : stagecal_plot_default_params();
    atomic_file a;
    size_t n = 0;
    int rc;
    if (!svg)
        return error_set(err, STAGECAL_EINVAL, "svg output pointer is NULL");
    *svg = NULL;
    if ((rc = check_params(&par, err)) || (rc = stagecal_plot_check(chart, err)))
        return rc;
    const char *dir = par.tmp_dir ? par.tmp_dir : getenv("TMPDIR");
    if (!dir || !dir[0])
        dir = "/tmp";
    size_t cap = strlen(dir) + 16;
    char *where = malloc(cap);
    if (!where)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    snprintf(where, cap, "%s/chart.svg", dir); /* only its folder is used: never published */
    if ((rc = atomic_open(&a, where, err)) == STAGECAL_OK)
        rc = render_to(chart, STAGECAL_PLOT_SVG, &a, where, &par, svg, &n, err);
    atomic_discard(&a);
    free(where);
    if (rc == STAGECAL_OK && len)
        *len = n;
    return rc;
}
