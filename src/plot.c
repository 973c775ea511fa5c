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
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <plplot.h>

#include "fileio.h"
#include "internal.h"

enum { COL_PAGE = 0, COL_AXIS = 1, COL_GRID = 2, COL_SERIES = 3, COL_TINT = 11, NCOL0 = 19 };

/* Okabe–Ito, in the order we hand colours out (blue first: most distinct from the
 * dark axes and from vermillion, also in greyscale). */
static const unsigned long palette[STAGECAL_PLOT_NCOLOURS] = {
    0x0072B2, 0xD55E00, 0x009E73, 0xE69F00, 0xCC79A7, 0x56B4E9, 0x000000, 0xF0E442};
static const char *const palette_names[STAGECAL_PLOT_NCOLOURS] = {
    "blue",           "vermillion", "bluish green", "orange",
    "reddish purple", "sky blue",   "black",        "yellow"};

/* Tint = 25 % colour + 75 % white: light enough for a band behind lines and points. */
#define TINT_WEIGHT 0.25

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
    stagecal_plot_params p = {800, 560, 0.9, NULL};
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

unsigned long stagecal_plot_tint(int i)
{
    unsigned long c = stagecal_plot_colour(i), t = 0;
    for (int shift = 16; shift >= 0; shift -= 8) {
        double v = (double)((c >> shift) & 0xFF);
        unsigned long w = (unsigned long)lround(TINT_WEIGHT * v + (1 - TINT_WEIGHT) * 255.0);
        t |= w << shift;
    }
    return t;
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

int stagecal_plot_check(const stagecal_plot_chart *c, stagecal_error *err)
{
    if (!c)
        return error_set(err, STAGECAL_EINVAL, "chart is NULL");
    if (c->n_series > 0 && !c->series)
        return error_set(err, STAGECAL_EINVAL, "chart has %zu series but no series array",
                         c->n_series);
    size_t finite = 0;
    for (size_t i = 0; i < c->n_series; i++) {
        const stagecal_plot_series *s = &c->series[i];
        if (s->kind > STAGECAL_PLOT_BAND)
            return error_set(err, STAGECAL_EINVAL, "series %zu ('%s'): unknown kind %d", i + 1,
                             series_name(s), (int)s->kind);
        if (s->n == 0 || !s->x || !s->y || (s->kind == STAGECAL_PLOT_BAND && !s->y_hi))
            return error_set(err, STAGECAL_EINVAL,
                             "series %zu ('%s'): no points or a missing array (expected n >= 1 "
                             "and x, y%s)",
                             i + 1, series_name(s), s->kind == STAGECAL_PLOT_BAND ? ", y_hi" : "");
        if (s->colour < 0 || s->colour >= STAGECAL_PLOT_NCOLOURS || s->line < 0 ||
            s->line >= STAGECAL_PLOT_NLINES || s->marker < 0 ||
            s->marker >= STAGECAL_PLOT_NMARKERS || !(s->width >= 0) || s->width > 20)
            return error_set(err, STAGECAL_EINVAL,
                             "series %zu ('%s'): colour %d, line %d, marker %d or width %g out of "
                             "range (expected 0..%d, 0..%d, 0..%d, [0, 20])",
                             i + 1, series_name(s), s->colour, s->line, s->marker, s->width,
                             STAGECAL_PLOT_NCOLOURS - 1, STAGECAL_PLOT_NLINES - 1,
                             STAGECAL_PLOT_NMARKERS - 1);
        for (size_t k = 0; k < s->n; k++) {
            if (isfinite(s->x[k]) && isfinite(s->y[k]) &&
                (s->kind != STAGECAL_PLOT_BAND || isfinite(s->y_hi[k])))
                finite++;
        }
    }
    if (finite == 0)
        return error_set(err, STAGECAL_EINVAL,
                         "chart '%s': nothing to draw (expected at least one finite point)",
                         c->title ? c->title : "");
    const double lim[4] = {c->x_min, c->x_max, c->y_min, c->y_max};
    for (int a = 0; a < 2; a++) {
        double lo = lim[2 * a], hi = lim[2 * a + 1];
        if (isnan(lo) || isnan(hi))
            continue;
        if (!isfinite(lo) || !isfinite(hi) || !(lo < hi))
            return error_set(err, STAGECAL_EINVAL,
                             "chart '%s': %s axis range [%g, %g] (expected finite min < max, or "
                             "NAN for automatic)",
                             c->title ? c->title : "", a == 0 ? "x" : "y", lo, hi);
    }
    return STAGECAL_OK;
}

/* Axis range from the data where the chart leaves it open (NAN), padded 4 %. */
static void axis_range(const stagecal_plot_chart *c, int axis, double *lo, double *hi)
{
    double a = axis == 0 ? c->x_min : c->y_min, b = axis == 0 ? c->x_max : c->y_max;
    if (!isnan(a) && !isnan(b)) {
        *lo = a;
        *hi = b;
        return;
    }
    double mn = INFINITY, mx = -INFINITY;
    for (size_t i = 0; i < c->n_series; i++) {
        const stagecal_plot_series *s = &c->series[i];
        for (size_t k = 0; k < s->n; k++) {
            if (!isfinite(s->x[k]) || !isfinite(s->y[k]))
                continue;
            if (axis == 0) {
                mn = fmin(mn, s->x[k]);
                mx = fmax(mx, s->x[k]);
            } else {
                mn = fmin(mn, s->y[k]);
                mx = fmax(mx, s->y[k]);
                if (s->y_hi && isfinite(s->y_hi[k]))
                    mx = fmax(mx, s->y_hi[k]), mn = fmin(mn, s->y_hi[k]);
            }
        }
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
 * filled per finite run, points skip non-finite ones. xs, ys, zs: scratch of s->n. */
static void draw_series(const stagecal_plot_series *s, PLFLT *xs, PLFLT *ys, PLFLT *zs,
                        double chr_scale)
{
    size_t k = 0;
    if (s->kind == STAGECAL_PLOT_POINTS) {
        size_t m = 0;
        for (k = 0; k < s->n; k++) {
            if (isfinite(s->x[k]) && isfinite(s->y[k])) {
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
        while (k < s->n && isfinite(s->x[k]) && isfinite(s->y[k]) &&
               (s->kind != STAGECAL_PLOT_BAND || isfinite(s->y_hi[k]))) {
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
            plcol0(COL_TINT + s->colour);
            plfill((PLINT)(2 * m), xs, ys);
        }
        while (k < s->n && !(isfinite(s->x[k]) && isfinite(s->y[k]) &&
                             (s->kind != STAGECAL_PLOT_BAND || isfinite(s->y_hi[k]))))
            k++;
    }
}

static void draw_legend(const stagecal_plot_chart *c)
{
    enum { MAXLEG = 40 };
    PLINT opt[MAXLEG], tcol[MAXLEG], bcol[MAXLEG], bpat[MAXLEG], lcol[MAXLEG], lsty[MAXLEG],
        scol[MAXLEG], snum[MAXLEG];
    PLFLT bscale[MAXLEG], bwidth[MAXLEG], lwidth[MAXLEG], sscale[MAXLEG];
    const char *text[MAXLEG], *sym[MAXLEG];
    PLINT n = 0;
    for (size_t i = 0; i < c->n_series && n < MAXLEG; i++) {
        const stagecal_plot_series *s = &c->series[i];
        if (!s->label || !s->label[0])
            continue;
        opt[n] = s->kind == STAGECAL_PLOT_LINE     ? PL_LEGEND_LINE
                 : s->kind == STAGECAL_PLOT_POINTS ? PL_LEGEND_SYMBOL
                                                   : PL_LEGEND_COLOR_BOX;
        tcol[n] = COL_AXIS;
        text[n] = s->label; /* copied and '#'-escaped by the caller of draw_legend */
        bcol[n] = COL_TINT + s->colour;
        bpat[n] = 0;
        bscale[n] = 0.8;
        bwidth[n] = 1;
        lcol[n] = COL_SERIES + s->colour;
        lsty[n] = line_styles[s->line];
        lwidth[n] = s->width > 0 ? s->width : 2.0;
        scol[n] = COL_SERIES + s->colour;
        sscale[n] = s->kind == STAGECAL_PLOT_POINTS && s->width > 0 ? fmin(s->width, 1.3) : 1.0;
        snum[n] = 3; /* PLplot spreads them over the sample width */
        sym[n] = marker_glyphs[s->marker];
        n++;
    }
    if (n == 0)
        return;
    PLFLT w, h;
    static const PLINT where[4] = {
        PL_POSITION_TOP | PL_POSITION_LEFT, PL_POSITION_BOTTOM | PL_POSITION_RIGHT,
        PL_POSITION_TOP | PL_POSITION_RIGHT, PL_POSITION_BOTTOM | PL_POSITION_LEFT};
    PLINT pos = where[c->legend_pos & 3] | PL_POSITION_INSIDE;
    pllegend(&w, &h, PL_LEGEND_BACKGROUND | PL_LEGEND_BOUNDING_BOX, pos, 0.02, 0.02, 0.08, COL_PAGE,
             COL_GRID, 1, 0, 0, n, opt, 0.8, 0.75, 1.8, 0.0, tcol, text, bcol, bpat, bscale, bwidth,
             lcol, lsty, lwidth, scol, sscale, snum, sym);
}

/* Everything PLplot needs, prepared (and allocated) before any PLplot call, so that no
 * failure can leave a half-open stream. */
typedef struct {
    char *title, *xl, *yl;
    char **labels; /* escaped series labels */
    stagecal_plot_series *series;
    PLFLT *xs, *ys, *zs;
} prepared;

static void prepared_free(prepared *p, size_t n_series)
{
    free(p->title);
    free(p->xl);
    free(p->yl);
    if (p->labels)
        for (size_t i = 0; i < n_series; i++)
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
    memset(p, 0, sizeof *p);
    for (size_t i = 0; i < c->n_series; i++)
        nmax = c->series[i].n > nmax ? c->series[i].n : nmax;
    p->title = plain_text(c->title);
    p->xl = plain_text(c->x_label);
    p->yl = plain_text(c->y_label);
    p->labels = calloc(c->n_series + 1, sizeof *p->labels);
    p->series = calloc(c->n_series + 1, sizeof *p->series);
    p->xs = malloc(2 * nmax * sizeof *p->xs);
    p->ys = malloc(2 * nmax * sizeof *p->ys);
    p->zs = malloc(nmax * sizeof *p->zs);
    int ok = p->title && p->xl && p->yl && p->labels && p->series && p->xs && p->ys && p->zs;
    for (size_t i = 0; ok && i < c->n_series; i++) {
        p->series[i] = c->series[i];
        if (c->series[i].label && c->series[i].label[0]) {
            ok = (p->labels[i] = plain_text(c->series[i].label)) != NULL;
            p->series[i].label = p->labels[i];
        }
    }
    if (!ok) {
        prepared_free(p, c->n_series);
        return error_set(err, STAGECAL_ENOMEM, "out of memory preparing a chart");
    }
    return STAGECAL_OK;
}

/* Draws c with PLplot device dev into file (which exists and is writable). */
static void render(const stagecal_plot_chart *c, const prepared *pr, const char *dev,
                   const char *file, const stagecal_plot_params *par)
{
    PLINT old = 0, strm = 0;
    char geometry[64];
    double x0, x1, y0, y1;
    axis_range(c, 0, &x0, &x1);
    axis_range(c, 1, &y0, &y1);

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
    }
    plinit();
    plschr(0.0, par->char_scale);
    pladv(0);
    plvsta();
    plwind(x0, x1, y0, y1);
    if (c->x_time)
        pltimefmt(x1 - x0 > 2 * 365.25 * 86400 ? "%Y" : x1 - x0 > 60 * 86400 ? "%Y-%m" : "%m-%d");
    const char *xopt_grid = c->x_time ? "gd" : "g";
    plcol0(COL_GRID);
    plwidth(0.5);
    plbox(xopt_grid, 0, 0, "g", 0, 0);
    plwidth(1.0);

    for (int pass = 0; pass < 3; pass++) { /* bands, then lines, then markers */
        stagecal_plot_kind want = pass == 0   ? STAGECAL_PLOT_BAND
                                  : pass == 1 ? STAGECAL_PLOT_LINE
                                              : STAGECAL_PLOT_POINTS;
        for (size_t i = 0; i < c->n_series; i++)
            if (pr->series[i].kind == want)
                draw_series(&pr->series[i], pr->xs, pr->ys, pr->zs, par->char_scale);
    }
    plcol0(COL_AXIS);
    plbox(c->x_time ? "bcdnst" : "bcnst", 0, 0, "bcnstv", 0, 0);
    pllab(pr->xl, pr->yl, pr->title);
    if (c->legend) {
        stagecal_plot_chart tmp = *c;
        tmp.series = pr->series;
        draw_legend(&tmp);
    }
    plend1();
    plsstrm(old);
}

static const char *device_for(stagecal_plot_format f)
{
    return f == STAGECAL_PLOT_PNG ? "pngcairo" : f == STAGECAL_PLOT_SVG ? "svgcairo" : "pdfcairo";
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

/* Renders into the temporary file a (PLplot opens it by name) and checks that it is
 * complete; out and len: its content when wanted (caller frees), else NULL. */
static int render_to(const stagecal_plot_chart *c, stagecal_plot_format fmt, atomic_file *a,
                     const char *path, const stagecal_plot_params *par, char **out, size_t *len,
                     stagecal_error *err)
{
    prepared pr;
    char *buf = NULL;
    size_t n = 0;
    int rc = prepare(c, &pr, err);
    if (rc)
        return rc;
    render(c, &pr, device_for(fmt), atomic_path(a), par);
    prepared_free(&pr, c->n_series);
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
                         n == 0 ? ", or plplot-driver-cairo missing" : "");
    }
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
