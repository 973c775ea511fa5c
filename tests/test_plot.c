/*
 * test_plot.c — the plot module: files are produced in each format, are not blank, have
 * the stated size, and hold the expected series; builders put the McCabe–Thiele pinch
 * where the closed form puts it; bad charts are refused; the library stays silent.
 *
 * Counting series in an SVG: PLplot's svg driver writes every drawn element with its
 * colour as stroke="#RRGGBB" or fill="#RRGGBB". Each series of the charts tested here has
 * its own colour (a palette colour for lines and markers, its tint for bands), and the
 * page, axis and grid colours are known, so the set of other colours in the file is the
 * set of series drawn. PNG pixels are counted with PIL through STAGECAL_PYTHON.
 */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "stagecal/calibrate.h"
#include "stagecal/plot.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "testutil.h"

#define OUTDIR STAGECAL_BUILD_DIR "/plot_out"

/* LeakSanitizer hook (sanitizer build only): fontconfig, loaded by cairo for the chart
 * text, keeps its font cache for the life of the process and never frees it; those
 * blocks are reported as leaks that are not ours. Every other leak still fails. */
const char *__lsan_default_suppressions(void);
const char *__lsan_default_suppressions(void)
{
    return "leak:libfontconfig.so\n";
}

static int group_setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    mkdir(OUTDIR, 0755);
    return 0;
}

static char *slurp(const char *path, size_t *len)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    fseek(f, 0, SEEK_END);
    long n = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *s = malloc((size_t)n + 1);
    if (s && fread(s, 1, (size_t)n, f) != (size_t)n) {
        free(s);
        s = NULL;
    }
    fclose(f);
    if (s) {
        s[n] = '\0';
        if (len)
            *len = (size_t)n;
    }
    return s;
}

/* Distinct colours in an SVG other than page white, axis 0x333333 and grid 0xDDDDDD.
 * Writes up to cap of them into out, returns how many there are. */
static size_t svg_series_colours(const char *svg, unsigned long *out, size_t cap)
{
    size_t n = 0;
    for (const char *p = strstr(svg, "=\"#"); p; p = strstr(p + 3, "=\"#")) {
        unsigned long c;
        char end;
        if (sscanf(p, "=\"#%6lx%c", &c, &end) != 2 || end != '"')
            continue;
        if (c == 0xFFFFFF || c == 0x333333 || c == 0xDDDDDD)
            continue;
        size_t k = 0;
        while (k < n && k < cap && out[k] != c)
            k++;
        if (k == n) {
            if (n < cap)
                out[n] = c;
            n++;
        }
    }
    return n;
}

static int has_colour(const unsigned long *c, size_t n, unsigned long want)
{
    for (size_t i = 0; i < n; i++)
        if (c[i] == want)
            return 1;
    return 0;
}

/* The colours a chart's series should leave in the SVG. */
static size_t expected_colours(const stagecal_plot_chart *c, unsigned long *out, size_t cap)
{
    size_t n = 0;
    for (size_t i = 0; i < c->n_series; i++) {
        const stagecal_plot_series *s = &c->series[i];
        unsigned long col = s->kind != STAGECAL_PLOT_BAND ? stagecal_plot_colour(s->colour)
                            : s->line == 1                ? stagecal_plot_tint_light(s->colour)
                                                          : stagecal_plot_tint(s->colour);
        if (!has_colour(out, n, col) && n < cap)
            out[n++] = col;
    }
    return n;
}

/* Renders c to SVG and checks the drawn colours are exactly the series' colours and
 * that there are want_series distinct ones. */
static void check_svg_series(const stagecal_plot_chart *c, const char *name, size_t want_series)
{
    char path[512];
    stagecal_error err;
    snprintf(path, sizeof path, OUTDIR "/%s.svg", name);
    int rc = stagecal_plot_write(c, path, NULL, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    char *svg = slurp(path, NULL);
    assert_non_null(svg);
    assert_non_null(strstr(svg, "<svg"));
    unsigned long got[64], want[64];
    size_t ng = svg_series_colours(svg, got, 64), nw = expected_colours(c, want, 64);
    free(svg);
    if (ng != want_series || nw != want_series)
        print_error("%s: %zu colours drawn, %zu series colours, %zu expected\n", name, ng, nw,
                    want_series);
    assert_int_equal(nw, want_series);
    assert_int_equal(ng, want_series);
    for (size_t i = 0; i < nw; i++)
        assert_true(has_colour(got, ng, want[i]));
}

/* Width and height from a PNG's IHDR chunk (PNG spec: bytes 16..23, big-endian). */
static void png_size(const char *path, unsigned long *w, unsigned long *h)
{
    unsigned char hdr[24];
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    assert_int_equal(fread(hdr, 1, 24, f), 24);
    fclose(f);
    assert_memory_equal(hdr, "\x89PNG\r\n\x1a\n", 8);
    assert_memory_equal(hdr + 12, "IHDR", 4);
    *w = ((unsigned long)hdr[16] << 24) | ((unsigned long)hdr[17] << 16) |
         ((unsigned long)hdr[18] << 8) | hdr[19];
    *h = ((unsigned long)hdr[20] << 24) | ((unsigned long)hdr[21] << 16) |
         ((unsigned long)hdr[22] << 8) | hdr[23];
}

/* Non-white pixels of a PNG, counted by PIL (independent decoder). -1 on failure. */
static long png_nonwhite(const char *path)
{
    char cmd[1024];
    snprintf(cmd, sizeof cmd,
             "%s -c \"from PIL import Image; im = Image.open('%s').convert('RGB'); "
             "print(sum(1 for p in im.getdata() if p != (255, 255, 255)))\"",
             STAGECAL_PYTHON, path);
    FILE *p = popen(cmd, "r");
    long n = -1;
    if (!p)
        return -1;
    if (fscanf(p, "%ld", &n) != 1)
        n = -1;
    pclose(p);
    return n;
}

/* A small caller-built chart: a band, a line and points in three colours. */
static const double cx[5] = {0, 1, 2, 3, 4};
static const double cy[5] = {1, 2, 2.5, 2.8, 3.0};
static const double clo[5] = {0.8, 1.7, 2.2, 2.5, 2.6};
static const double chi[5] = {1.2, 2.3, 2.8, 3.1, 3.4};
static const double px[4] = {0.5, 1.5, 2.5, 3.5};
static const double py[4] = {1.4, 2.4, 2.5, 3.1};

static stagecal_plot_chart small_chart(stagecal_plot_series *s)
{
    stagecal_plot_series band = {STAGECAL_PLOT_BAND, "band", cx, clo, chi, 5, 5, 0, 0, 0};
    stagecal_plot_series line = {STAGECAL_PLOT_LINE, "fit # 1", cx, cy, NULL, 5, 0, 1, 0, 0};
    stagecal_plot_series pts = {STAGECAL_PLOT_POINTS, "samples", px, py, NULL, 4, 1, 0, 2, 0};
    s[0] = band;
    s[1] = line;
    s[2] = pts;
    stagecal_plot_chart c = {"small chart",
                             "reflux ratio R [-]",
                             "stages incl. pot [-]",
                             NAN,
                             NAN,
                             NAN,
                             NAN,
                             0,
                             1,
                             0,
                             s,
                             3,
                             NULL,
                             NULL,
                             0};
    return c;
}

static void plot_palette_is_okabe_ito(void **state)
{
    (void)state;
    /* Okabe & Ito, "Color Universal Design" (2008): the eight colours' sRGB values */
    static const unsigned long oi[8] = {0x0072B2, 0xD55E00, 0x009E73, 0xE69F00,
                                        0xCC79A7, 0x56B4E9, 0x000000, 0xF0E442};
    for (int i = 0; i < 8; i++)
        assert_int_equal(stagecal_plot_colour(i), oi[i]);
    assert_int_equal(stagecal_plot_colour(8), oi[0]); /* wraps */
    assert_string_equal(stagecal_plot_colour_name(1), "vermillion");
    /* tint = round(0.25·c + 0.75·255) per channel (the documented rule): 0x0072B2 →
     * (191.25, 219.75, 235.75) → 0xBFDCEC */
    assert_int_equal(stagecal_plot_tint(0), 0xBFDCEC);
}

static void plot_format_follows_extension(void **state)
{
    (void)state;
    stagecal_plot_format f;
    stagecal_error err;
    assert_int_equal(stagecal_plot_format_from_path("a/b.png", &f, &err), STAGECAL_OK);
    assert_int_equal(f, STAGECAL_PLOT_PNG);
    assert_int_equal(stagecal_plot_format_from_path("b.SVG", &f, &err), STAGECAL_OK);
    assert_int_equal(f, STAGECAL_PLOT_SVG);
    assert_int_equal(stagecal_plot_format_from_path("c.pdf", &f, &err), STAGECAL_OK);
    assert_int_equal(f, STAGECAL_PLOT_PDF);
    assert_int_equal(stagecal_plot_format_from_path("d.jpg", &f, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "expected .png, .svg or .pdf"));
    assert_int_equal(stagecal_plot_format_from_path("noext", &f, &err), STAGECAL_EINVAL);
}

static void plot_check_refuses_bad_charts(void **state)
{
    (void)state;
    stagecal_plot_series s[3];
    stagecal_plot_chart c = small_chart(s);
    stagecal_error err;
    assert_int_equal(stagecal_plot_check(&c, &err), STAGECAL_OK);
    s[1].n = 0;
    assert_int_equal(stagecal_plot_check(&c, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "series 2 ('fit # 1')"));
    s[1].n = 5;
    s[2].colour = 8;
    assert_int_equal(stagecal_plot_check(&c, &err), STAGECAL_EINVAL);
    s[2].colour = 1;
    c.x_min = 3;
    c.x_max = 3;
    assert_int_equal(stagecal_plot_check(&c, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "x axis range"));
    c.x_min = c.x_max = NAN;
    s[0].y_hi = NULL;
    assert_int_equal(stagecal_plot_check(&c, &err), STAGECAL_EINVAL);
    /* nothing finite at all */
    static const double nan2[2] = {NAN, NAN};
    stagecal_plot_series only = {STAGECAL_PLOT_LINE, "x", nan2, nan2, NULL, 2, 0, 0, 0, 0};
    stagecal_plot_chart empty = {"e", "x", "y",   NAN, NAN,  NAN,  NAN, 0,
                                 0,   0,   &only, 1,   NULL, NULL, 0};
    assert_int_equal(stagecal_plot_check(&empty, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "nothing to draw"));
    /* write refuses too, and leaves no file */
    assert_int_equal(stagecal_plot_write(&empty, OUTDIR "/refused.png", NULL, &err),
                     STAGECAL_EINVAL);
    assert_int_equal(access(OUTDIR "/refused.png", F_OK), -1);
}

static void plot_svg_holds_each_series(void **state)
{
    (void)state;
    stagecal_plot_series s[3];
    stagecal_plot_chart c = small_chart(s);
    check_svg_series(&c, "small", 3);
}

static void plot_png_has_size_and_ink(void **state)
{
    (void)state;
    stagecal_plot_series s[3];
    stagecal_plot_chart c = small_chart(s);
    stagecal_plot_params par = stagecal_plot_default_params();
    stagecal_error err;
    par.width = 640;
    par.height = 400;
    assert_int_equal(stagecal_plot_write(&c, OUTDIR "/small.png", &par, &err), STAGECAL_OK);
    unsigned long w, h;
    png_size(OUTDIR "/small.png", &w, &h);
    assert_int_equal(w, 640);
    assert_int_equal(h, 400);
    long ink = png_nonwhite(OUTDIR "/small.png");
    /* axes, text, a band and a line cover far more than 1 % of 640×400 pixels */
    assert_true(ink > 2560);
    assert_true(ink < 640 * 400); /* and the page itself is white */
}

static void plot_pdf_is_written(void **state)
{
    (void)state;
    stagecal_plot_series s[3];
    stagecal_plot_chart c = small_chart(s);
    stagecal_error err;
    size_t n = 0;
    assert_int_equal(stagecal_plot_write(&c, OUTDIR "/small.pdf", NULL, &err), STAGECAL_OK);
    char *pdf = slurp(OUTDIR "/small.pdf", &n);
    assert_non_null(pdf);
    assert_true(n > 1000);
    assert_memory_equal(pdf, "%PDF-", 5); /* PDF header (ISO 32000-1, 7.5.2) */
    free(pdf);
}

static void plot_write_unwritable_directory(void **state)
{
    (void)state;
    stagecal_plot_series s[3];
    stagecal_plot_chart c = small_chart(s);
    stagecal_error err;
    assert_int_equal(stagecal_plot_write(&c, OUTDIR "/no/such/dir/x.png", NULL, &err),
                     STAGECAL_EWRITE);
    assert_non_null(strstr(err.text, "cannot create"));
}

static void plot_render_is_silent(void **state)
{
    (void)state;
    stagecal_plot_series s[3];
    stagecal_plot_chart c = small_chart(s);
    stagecal_error err;
    char *svg = NULL;
    size_t len = 0;
    /* stderr → a file during the render: the library (and PLplot under it) must not print */
    fflush(stderr);
    int saved = dup(2), fd = open(OUTDIR "/stderr.txt", O_WRONLY | O_CREAT | O_TRUNC, 0644);
    assert_true(saved >= 0 && fd >= 0);
    dup2(fd, 2);
    int rc1 = stagecal_plot_write(&c, OUTDIR "/silent.png", NULL, &err);
    int rc2 = stagecal_plot_svg(&c, NULL, &svg, &len, &err);
    fflush(stderr);
    dup2(saved, 2);
    close(saved);
    close(fd);
    assert_int_equal(rc1, STAGECAL_OK);
    assert_int_equal(rc2, STAGECAL_OK);
    assert_true(len > 1000 && strlen(svg) == len);
    free(svg);
    struct stat st;
    assert_int_equal(stat(OUTDIR "/stderr.txt", &st), 0);
    assert_int_equal(st.st_size, 0);
}

/* McCabe–Thiele for constant α: the pinch is a root of the quadratic
 * (α−1)·lv·x² + (lv + (1−lv)(α−1)·xD − α)·x + (1−lv)·xD = 0 (closed form of
 * αx/(1+(α−1)x) = lv·x + (1−lv)·xD). */
static double pinch_closed_form(double alpha, double lv, double xd)
{
    double a = (alpha - 1) * lv, b = lv + (1 - lv) * (alpha - 1) * xd - alpha, c = (1 - lv) * xd;
    double disc = sqrt(b * b - 4 * a * c);
    double r1 = (-b - disc) / (2 * a), r2 = (-b + disc) / (2 * a);
    /* the root inside (0, xD) */
    return (r1 > 0 && r1 < xd) ? r1 : r2;
}

static const stagecal_plot_series *find_series(const stagecal_plot_chart *c, const char *prefix)
{
    for (size_t i = 0; i < c->n_series; i++)
        if (c->series[i].label && strncmp(c->series[i].label, prefix, strlen(prefix)) == 0)
            return &c->series[i];
    return NULL;
}

static void plot_mccabe_series_and_pinch(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, &err);
    assert_non_null(vle);
    const double xd = 0.95, r = 4.0, lv = r / (r + 1);

    /* E_MV = 1: diagonal, equilibrium, operating line, steps, pinch, xD/xB markers */
    stagecal_plot_chart *c = NULL;
    int rc = stagecal_plot_mccabe_condition(vle, xd, NAN, r, 6.0, 1.0, &c, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    assert_int_equal(c->n_series, 6);
    const stagecal_plot_series *pinch = find_series(c, "pinch");
    assert_non_null(pinch);
    /* Brent's tolerance is 1e-12 on x; 1e-9 leaves room for rounding in the quadratic */
    assert_abs(pinch->x[0], pinch_closed_form(2.5, lv, xd), 1e-9, "pinch x, closed form");
    assert_abs(pinch->y[0], lv * pinch->x[0] + (1 - lv) * xd, 1e-12, "pinch on operating line");
    /* the steps start at (xD, xD) and end on the equilibrium curve at the pot */
    const stagecal_plot_series *steps = find_series(c, "stages");
    assert_non_null(steps);
    assert_abs(steps->x[0], xd, 0, "steps start x");
    assert_abs(steps->y[0], xd, 0, "steps start y");
    double yb;
    assert_int_equal(stagecal_vle_ystar(vle, steps->x[steps->n - 1], &yb), STAGECAL_OK);
    /* the pot's vapour lies on the equilibrium curve and on the operating line from the
     * stage above (docs/methods.md, "Stage counting"): agreement to the stepping's round-trip
     * tolerance, 1e-9 */
    assert_abs(steps->y[steps->n - 1], yb, 1e-9, "last step ends on y*(xB)");
    check_svg_series(c, "mccabe", 6);
    assert_int_equal(stagecal_plot_write(c, OUTDIR "/mccabe.png", NULL, &err), STAGECAL_OK);
    stagecal_plot_chart_free(c);

    /* E_MV < 1 adds the pseudo-equilibrium curve */
    rc = stagecal_plot_mccabe_condition(vle, xd, NAN, r, 6.0, 0.7, &c, &err);
    assert_int_equal(rc, STAGECAL_OK);
    assert_int_equal(c->n_series, 7);
    assert_non_null(find_series(c, "pseudo-equilibrium"));
    check_svg_series(c, "mccabe_emv", 7);
    stagecal_plot_chart_free(c);

    /* total reflux: the operating line is the diagonal, no pinch inside (0, xD) */
    rc = stagecal_plot_mccabe_condition(vle, xd, NAN, INFINITY, 4.5, 1.0, &c, &err);
    assert_int_equal(rc, STAGECAL_OK);
    assert_int_equal(c->n_series, 4);
    assert_null(find_series(c, "pinch"));
    check_svg_series(c, "mccabe_total", 4);
    stagecal_plot_chart_free(c);

    /* a sample (xD, xB, R): stages from the inversion */
    rc = stagecal_plot_mccabe_condition(vle, xd, 0.3, r, NAN, 1.0, &c, &err);
    assert_int_equal(rc, STAGECAL_OK);
    steps = find_series(c, "stages");
    assert_abs(steps->x[steps->n - 1], 0.3, 1e-9, "sample's xB reached (round trip 1e-9)");
    stagecal_plot_chart_free(c);

    /* below the pinch: the inversion's status comes back as EDATA with its name */
    rc = stagecal_plot_mccabe_condition(vle, xd, 0.01, 1.0, NAN, 1.0, &c, &err);
    assert_int_equal(rc, STAGECAL_EDATA);
    assert_non_null(strstr(err.text, "pinch"));
    stagecal_vle_free(vle);
}

static const double gx[6] = {0.5, 1, 2, 3, 5, INFINITY};
static const double gs[6] = {4.1, 5.0, 6.2, 6.9, 7.4, 8.1};
static const size_t gg[6] = {0, 0, 1, 1, 1, 0};
static const char *const gnames[2] = {"run A", "run B"};

static void plot_fit_chart_series(void **state)
{
    (void)state;
    double grid[20], fit[20], flo_[20], fhi_[20], plo[20], phi[20];
    for (int i = 0; i < 20; i++) {
        grid[i] = 0.3 + 5.0 * i / 19.0;
        fit[i] = 8 * (1 - exp(-0.6 * grid[i]));
        flo_[i] = fit[i] - 0.3, fhi_[i] = fit[i] + 0.3, plo[i] = fit[i] - 0.8,
        phi[i] = fit[i] + 0.8;
    }
    stagecal_plot_fit_data d = {NULL, gx,   gs,  gg,  6,  gnames, 2,   grid, fit,
                                flo_, fhi_, plo, phi, 20, 0.5,    5.0, 0.95, NULL};
    stagecal_plot_chart *c = NULL;
    stagecal_error err;
    assert_int_equal(stagecal_plot_fit(&d, &c, &err), STAGECAL_OK);
    /* inside the envelope [0.5, 5]: prediction band, confidence band, fit; beyond it the
     * same three (lighter bands, dashed line); envelope, run A, run B. 8 colours: the two
     * parts of the fitted line share theirs */
    assert_int_equal(c->n_series, 9);
    assert_non_null(strstr(c->x_label, "total reflux drawn at the right edge"));
    check_svg_series(c, "fit", 8);
    /* the extrapolated part starts exactly at the envelope's edge, where the fitted part
     * ends, on the curve: the grid (step 0.263) crosses 5.0 between points, so the edge
     * point is interpolated; the chord of 8(1 − e^(−0.6x)) departs from the curve by at
     * most max|f''|·h²/8 = 2.88·e^(−2.82)·0.263²/8 < 2e-3 there (chord error bound) */
    const stagecal_plot_series *fin = find_series(c, "fitted correlation"),
                               *fex = find_series(c, "extrapolated");
    assert_non_null(fin);
    assert_non_null(fex);
    assert_true(fex->line != fin->line); /* another line style */
    assert_true(fin->x[0] == 0.5 && fin->x[fin->n - 1] == 5.0);
    size_t right = 0;
    while (right < fex->n && !isnan(fex->x[right]))
        right++;
    assert_true(right > 1 && right + 1 < fex->n); /* a left part, a NaN, a right part */
    assert_true(fex->x[right - 1] == 0.5);        /* the left part ends at the edge */
    assert_true(fex->x[right + 1] == 5.0);        /* the right part starts at the edge */
    assert_true(fex->y[right + 1] == fin->y[fin->n - 1]);
    assert_abs(fex->y[right + 1], 8 * (1 - exp(-3.0)), 2e-3, "edge point on the curve");
    for (size_t k = right + 1; k < fex->n; k++)
        assert_true(fex->x[k] >= 5.0);
    for (size_t k = 0; k < fin->n; k++)
        assert_true(fin->x[k] >= 0.5 && fin->x[k] <= 5.0);
    assert_int_equal(stagecal_plot_write(c, OUTDIR "/fit.png", NULL, &err), STAGECAL_OK);
    stagecal_plot_chart_free(c);

    size_t bad[6] = {0, 0, 2, 1, 1, 0};
    d.group = bad;
    assert_int_equal(stagecal_plot_fit(&d, &c, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "sample 3 in group 2"));
}

static void plot_resid_trend_batch_series(void **state)
{
    (void)state;
    stagecal_error err;
    stagecal_plot_chart *c = NULL;
    double res[6] = {0.1, -0.2, 0.05, 0.3, -0.1, 0.0}, t[6];
    for (int i = 0; i < 6; i++)
        t[i] = 1.75e9 + 86400.0 * 3 * i;
    stagecal_plot_resid_data rd = {gs, res, NULL, gg, 6, gnames, 2, NULL};
    assert_int_equal(stagecal_plot_resid(&rd, &c, &err), STAGECAL_OK);
    assert_int_equal(c->n_series, 3); /* zero line + two runs */
    check_svg_series(c, "resid_fitted", 3);
    stagecal_plot_chart_free(c);
    rd.time_s = t;
    assert_int_equal(stagecal_plot_resid(&rd, &c, &err), STAGECAL_OK);
    assert_int_equal(c->x_time, 1);
    check_svg_series(c, "resid_time", 3);
    stagecal_plot_chart_free(c);

    double tt[8], st[8], lt[2], ln[2], ft[3], fc[3], flo[3], fhi[3];
    int alarm[8] = {0, 0, 0, 0, 0, 0, 1, 1};
    for (int i = 0; i < 8; i++) {
        tt[i] = 1.70e9 + 30 * 86400.0 * i;
        st[i] = 12 - 0.15 * i + (i % 2 ? 0.1 : -0.1);
    }
    lt[0] = tt[0], lt[1] = tt[7], ln[0] = 12, ln[1] = 12 - 0.15 * 7;
    for (int i = 0; i < 3; i++) {
        ft[i] = tt[7] + 60 * 86400.0 * i;
        fc[i] = ln[1] - 0.15 * 2 * i;
        flo[i] = fc[i] - 0.2 * (i + 1), fhi[i] = fc[i] + 0.2 * (i + 1);
    }
    stagecal_plot_trend_data td = {tt,   st, 8,  alarm, lt,  ln, 2,    11.2,
                                   12.6, ft, fc, flo,   fhi, 3,  10.5, NULL};
    assert_int_equal(stagecal_plot_trend(&td, &c, &err), STAGECAL_OK);
    /* forecast band, trend, forecast, control limits, spec line, calibrations, alarms */
    assert_int_equal(c->n_series, 7);
    check_svg_series(c, "trend", 7);
    assert_int_equal(stagecal_plot_write(c, OUTDIR "/trend.png", NULL, &err), STAGECAL_OK);
    stagecal_plot_chart_free(c);

    double bt[30], xd[30], xdl[30], xdh[30], xb[30];
    for (int i = 0; i < 30; i++) {
        bt[i] = 600.0 * i;
        xd[i] = 0.97 - 0.3 * pow(i / 29.0, 3);
        xdl[i] = xd[i] - 0.01 * i / 29.0, xdh[i] = xd[i] + 0.01 * i / 29.0;
        xb[i] = 0.4 * exp(-i / 15.0);
    }
    stagecal_plot_batch_curve curves[2] = {{"xD", xd, xdl, xdh}, {"xB", xb, NULL, NULL}};
    stagecal_plot_batch_data bd = {bt, 30, curves, 2, "mole fraction [mol/mol]", 0.9, NULL};
    assert_int_equal(stagecal_plot_batch(&bd, &c, &err), STAGECAL_OK);
    assert_int_equal(c->n_series, 4); /* xD band, xD, xB, specification */
    assert_abs(c->series[1].x[29], 600.0 * 29 / 3600.0, 1e-12, "batch time shown in h");
    check_svg_series(c, "batch", 4);
    stagecal_plot_chart_free(c);
}

/* SVG labels are text: <text> elements whose content is plain UTF-8 (the svg device's
 * &#x..; references decoded), with <, & (and ") still escaped so the file stays XML. */
static void plot_svg_labels_are_text(void **state)
{
    (void)state;
    stagecal_plot_series s[3];
    stagecal_plot_chart c = small_chart(s);
    c.title = "stages < 30 & Smoker's \xce\xb1 = 2.5";
    char *svg = NULL;
    size_t len = 0;
    stagecal_error err;
    assert_int_equal(stagecal_plot_svg(&c, NULL, &svg, &len, &err), STAGECAL_OK);
    assert_int_equal(strlen(svg), len);
    assert_non_null(strstr(svg, "<text"));
    assert_non_null(strstr(svg, ">stages &#x3c; 30 &#x26; Smoker's \xce\xb1 = 2.5<"));
    assert_non_null(strstr(svg, ">reflux ratio R [-]<"));
    assert_non_null(strstr(svg, ">fit ## 1<") ? NULL : strstr(svg, ">fit # 1<"));
    assert_null(strstr(svg, "&#x73;")); /* no letter left as a reference */
    assert_null(strstr(svg, "< 30"));   /* no raw < in content */
    free(svg);
}

/* ---- the run chart ---------------------------------------------------------------- */

#define DEMO_COLUMN STAGECAL_DATASETS "/columns/demo_benzene_toluene.json"

/* The panel series labelled `label` of panel p (NULL when there is none). */
static const stagecal_plot_series *panel_series(const stagecal_plot_chart *c, size_t p,
                                                const char *label)
{
    for (size_t i = 0; i < c->panels[p].n_series; i++)
        if (c->panels[p].series[i].label && strcmp(c->panels[p].series[i].label, label) == 0)
            return &c->panels[p].series[i];
    return NULL;
}

/* The calibration of one demo month (the library's chain; the fit is not looked at). */
static void demo_calibration(const char *month, stagecal_calibration *cal)
{
    char path[512];
    const char *logs[1] = {path};
    stagecal_error err;
    snprintf(path, sizeof path, STAGECAL_DATASETS "/demo/logs/%s.csv", month);
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "constant";
    par.method = STAGECAL_CAL_STAGE;
    int rc = stagecal_calibrate(DEMO_COLUMN, logs, 1, &par, cal, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
}

/* The shaded windows are the evidence's windows, exactly: every window with a stage count
 * (ev->stages_ok) is one stripe from its first to its last row's time, and no other
 * stripe carries that label; the windows' stage levels are the evidence's numbers; the
 * stripes of a left-out run's windows are the run log's windows of that run. The check
 * is against the evidence set itself (the numbers the fits use), row times mapped with
 * stagecal_plot_run_hours. */
static void plot_run_windows_are_the_evidence(void **state)
{
    (void)state;
    static const char *const months[2] = {"2025-01", "2025-03"}; /* 03: K7-018 left out */
    size_t left_out_seen = 0;
    for (int mo = 0; mo < 2; mo++) {
        stagecal_calibration cal;
        stagecal_error err;
        stagecal_plot_chart *c = NULL;
        demo_calibration(months[mo], &cal);
        assert_int_equal(stagecal_plot_run_calibration(&cal, STAGECAL_PLOT_ALL_RUNS, &c, &err),
                         STAGECAL_OK);
        assert_int_equal(c->n_panels, 5);
        stagecal_plot_run_data d = {cal.log,     &cal.res,     &cal.evidence,
                                    cal.flagged, cal.nflagged, STAGECAL_PLOT_ALL_RUNS,
                                    NULL};
        size_t want = 0;
        for (size_t k = 0; k < cal.evidence.n; k++)
            want += cal.evidence.ev[k].stages_ok;
        assert_true(want > 0);
        for (size_t p = 0; p < c->n_panels; p++) {
            /* every panel shades the same windows (the label is in the first panel only) */
            const stagecal_plot_series *span = NULL;
            for (size_t i = 0; i < c->panels[p].n_series && !span; i++)
                if (c->panels[p].series[i].kind == STAGECAL_PLOT_SPAN &&
                    c->panels[p].series[i].colour == 0)
                    span = &c->panels[p].series[i];
            assert_non_null(span);
            if (p == 0)
                assert_string_equal(span->label, "window with a stage count");
            assert_int_equal(span->n, want);
            size_t j = 0;
            for (size_t k = 0; k < cal.evidence.n; k++) {
                const stagecal_evidence *ev = &cal.evidence.ev[k];
                if (!ev->stages_ok)
                    continue;
                const stagecal_runlog_window *w = &cal.res.windows[ev->window];
                double a, b;
                assert_true(stagecal_plot_run_hours(&d, w->first, &a));
                assert_true(stagecal_plot_run_hours(&d, w->last, &b));
                assert_true(span->x[j] == a); /* exactly: the same rows, the same mapping */
                assert_true(span->y[j] == b);
                j++;
            }
        }
        /* the windows' stage levels: two points per window at the evidence's count */
        const stagecal_plot_series *lev = panel_series(c, 4, "window's stages");
        assert_non_null(lev);
        assert_int_equal(lev->n, 3 * want);
        for (size_t k = 0, j = 0; k < cal.evidence.n; k++)
            if (cal.evidence.ev[k].stages_ok) {
                assert_true(lev->y[3 * j] == cal.evidence.ev[k].stages);
                assert_true(lev->y[3 * j + 1] == cal.evidence.ev[k].stages);
                j++;
            }
        /* runs left out of the fit: their windows shaded in vermillion, named "(left out)" */
        const stagecal_plot_series *lo = panel_series(c, 0, "window of a left-out run");
        size_t nlo = 0;
        for (size_t w = 0; w < cal.res.nwindows; w++)
            for (size_t f = 0; f < cal.nflagged; f++)
                nlo += cal.flagged[f].left_out && cal.flagged[f].run == cal.res.windows[w].run;
        assert_int_equal(lo ? lo->n : 0, nlo);
        left_out_seen += nlo;
        for (size_t f = 0; f < cal.nflagged; f++) {
            char name[96];
            snprintf(name, sizeof name, "%s (left out)", cal.log->runs[cal.flagged[f].run].name);
            assert_non_null(panel_series(c, 0, name));
        }
        stagecal_plot_chart_free(c);
        stagecal_calibration_free(&cal);
    }
    assert_true(left_out_seen > 0); /* the demo's K7-018 (pot analyser drift) */
}

/* Censored readings and bounds, outliers and samples without a count are marked at the
 * rows the analysis says, and one run alone is drawn from its own start. */
static void plot_run_marks_follow_the_analysis(void **state)
{
    (void)state;
    stagecal_calibration cal;
    stagecal_error err;
    stagecal_plot_chart *c = NULL;
    demo_calibration("2025-01", &cal);
    size_t above = 0, nocount = 0, ok = 0;
    for (size_t i = 0; i < cal.log->n; i++) {
        above += cal.log->xd_cens && cal.log->xd_cens[i] == STAGECAL_CENSOR_ABOVE;
        ok += cal.res.status[i] == STAGECAL_STAGES_OK;
        nocount += cal.res.status[i] != STAGECAL_STAGES_OK &&
                   !(cal.res.status[i] == STAGECAL_RUNLOG_CENSORED && isfinite(cal.res.stages[i]));
    }
    assert_int_equal(stagecal_plot_run_calibration(&cal, STAGECAL_PLOT_ALL_RUNS, &c, &err),
                     STAGECAL_OK);
    const stagecal_plot_series *s = panel_series(c, 0, "censored: at or above");
    assert_int_equal(s ? s->n : 0, above);
    assert_true(above > 0); /* the demo's distillate analyser reads 1 at full scale */
    s = panel_series(c, 4, "sample's stages");
    assert_non_null(s);
    assert_int_equal(s->n, ok);
    s = panel_series(c, 4, "sample's stages \xc2\xb1 2 u");
    assert_non_null(s);
    assert_int_equal(s->n, ok);
    for (size_t k = 0, i = 0; i < cal.log->n; i++)
        if (cal.res.status[i] == STAGECAL_STAGES_OK) {
            assert_abs(s->y_hi[k] - s->y[k], 4 * cal.res.u_stages[i], 1e-12, "bar = 2u each side");
            k++;
        }
    s = panel_series(c, 4, "no stage count (at the foot)");
    assert_int_equal(s ? s->n : 0, nocount);
    stagecal_plot_chart_free(c);
    /* one run: its hours from 0, its name in the title */
    assert_int_equal(stagecal_plot_run_calibration(&cal, 1, &c, &err), STAGECAL_OK);
    const stagecal_plot_series *line = &c->panels[2].series[c->panels[2].n_series - 1];
    assert_true(line->kind == STAGECAL_PLOT_LINE);
    assert_true(line->x[0] == 0);
    assert_int_equal(line->n, cal.log->runs[1].n + 1);
    assert_non_null(strstr(c->title, cal.log->runs[1].name));
    stagecal_plot_chart_free(c);
    c = NULL;
    assert_int_equal(stagecal_plot_run_calibration(&cal, cal.log->nruns, &c, &err),
                     STAGECAL_EINVAL);
    stagecal_plot_chart_free(c);
    stagecal_calibration_free(&cal);
}

/* ---- the legend keeps off the data ------------------------------------------------- */

/* Does the layout's legend box meet any point, segment, bar or stripe of the chart?
 * Markers count with their glyph box (layout.marker_w × marker_h). */
static int legend_meets_data(const stagecal_plot_chart *c, const stagecal_plot_layout *l)
{
    const stagecal_plot_box *b = &l->legend;
    for (size_t p = 0; p < l->n_panels; p++) {
        const stagecal_plot_series *ser = c->n_panels ? c->panels[p].series : c->series;
        size_t ns = c->n_panels ? c->panels[p].n_series : c->n_series;
        for (size_t i = 0; i < ns; i++) {
            const stagecal_plot_series *s = &ser[i];
            for (size_t k = 0; k < s->n; k++) {
                double ax, ay, qx, qy;
                if (!isfinite(s->x[k]) || !isfinite(s->y[k]))
                    continue;
                stagecal_plot_layout_map(l, p, s->x[k], s->y[k], &ax, &ay);
                if (s->kind == STAGECAL_PLOT_POINTS) {
                    if (ax + l->marker_w / 2 >= b->x0 && ax - l->marker_w / 2 <= b->x1 &&
                        ay + l->marker_h / 2 >= b->y0 && ay - l->marker_h / 2 <= b->y1)
                        return 1;
                } else if (k + 1 < s->n && s->kind == STAGECAL_PLOT_LINE && isfinite(s->x[k + 1]) &&
                           isfinite(s->y[k + 1])) {
                    /* sample the segment finely: a crossing shows as a sample inside */
                    stagecal_plot_layout_map(l, p, s->x[k + 1], s->y[k + 1], &qx, &qy);
                    for (int t = 0; t <= 200; t++) {
                        double x = ax + (qx - ax) * t / 200.0, y = ay + (qy - ay) * t / 200.0;
                        if (x >= b->x0 && x <= b->x1 && y >= b->y0 && y <= b->y1)
                            return 1;
                    }
                }
            }
        }
    }
    return 0;
}

/* Points that fill one corner after another: the legend takes a free corner, and goes
 * outside when none is free; in every case its drawn box (PLplot's own size) meets no
 * data, and it lies inside the page. */
static void plot_legend_keeps_off_data(void **state)
{
    (void)state;
    /* a 7 × 7 grid over the box; corners 0, 1, …, 3 − freec (legend_pos numbering: top
     * left, bottom right, top right, bottom left) hold points, the others are empty */
    double qx[49], qy[49];
    for (int freec = 4; freec >= 0; freec--) {
        size_t n = 0;
        for (int i = 0; i < 7; i++)
            for (int j = 0; j < 7; j++) {
                int corner = -1;
                if (i <= 2 && j >= 4)
                    corner = 0; /* top left: x small, y large */
                else if (i >= 4 && j >= 4)
                    corner = 2;
                else if (i <= 2 && j <= 2)
                    corner = 3;
                else if (i >= 4 && j <= 2)
                    corner = 1;
                if (corner >= 4 - freec) /* an empty corner */
                    continue;
                qx[n] = i;
                qy[n] = j;
                n++;
            }
        double lx[2] = {0, 6}, ly[2] = {3, 3};
        stagecal_plot_series s[2] = {
            {STAGECAL_PLOT_LINE, "middle line", lx, ly, NULL, 2, 0, 0, 0, 0},
            {STAGECAL_PLOT_POINTS, "corner points", qx, qy, NULL, n, 1, 0, 0, 0}};
        stagecal_plot_chart c = {"legend placement",
                                 "x [-]",
                                 "y [-]",
                                 -0.5,
                                 6.5,
                                 -0.5,
                                 6.5,
                                 0,
                                 1,
                                 0,
                                 s,
                                 2,
                                 NULL,
                                 NULL,
                                 0};
        stagecal_plot_layout lay;
        stagecal_plot_params par = stagecal_plot_default_params();
        par.layout = &lay;
        char path[256];
        stagecal_error err;
        for (int fmt = 0; fmt < 2; fmt++) {
            snprintf(path, sizeof path, OUTDIR "/legend_free%d.%s", freec, fmt ? "svg" : "png");
            assert_int_equal(stagecal_plot_write(&c, path, &par, &err), STAGECAL_OK);
            assert_true(lay.has_legend);
            assert_int_equal(lay.legend_inside, freec > 0);
            if (freec > 0)
                assert_int_equal(lay.legend_corner, 4 - freec); /* the first empty one */
            else
                assert_true(lay.legend.x0 > lay.box[0].x1); /* right of the plot box */
            assert_false(legend_meets_data(&c, &lay));
            assert_true(lay.legend.x0 >= 0 && lay.legend.x1 <= 1 && lay.legend.y0 >= 0 &&
                        lay.legend.y1 <= 1);
            /* hidden: the same boxes, no legend drawn (a chart that differs from this one
             * only in the legend's pixels) */
            stagecal_plot_layout hid;
            stagecal_plot_chart ch = c;
            ch.legend = STAGECAL_PLOT_LEGEND_HIDDEN;
            par.layout = &hid;
            char hpath[256];
            snprintf(hpath, sizeof hpath, OUTDIR "/legend_hidden%d.%s", freec, fmt ? "svg" : "png");
            assert_int_equal(stagecal_plot_write(&ch, hpath, &par, &err), STAGECAL_OK);
            par.layout = &lay;
            if (fmt) {
                char *svg = slurp(hpath, NULL), *shown = slurp(path, NULL);
                assert_non_null(svg);
                assert_non_null(shown);
                assert_null(strstr(svg, ">corner points<"));
                assert_non_null(strstr(shown, ">corner points<"));
                free(svg);
                free(shown);
            }
            assert_true(memcmp(&hid.box[0], &lay.box[0], sizeof lay.box[0]) == 0);
            assert_true(hid.legend_inside == lay.legend_inside);
            /* the box reserved holds the box drawn */
            assert_true(lay.legend.x0 >= lay.legend_est.x0 - 1e-9 &&
                        lay.legend.x1 <= lay.legend_est.x1 + 1e-9 &&
                        lay.legend.y0 >= lay.legend_est.y0 - 1e-9 &&
                        lay.legend.y1 <= lay.legend_est.y1 + 1e-9);
        }
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(plot_palette_is_okabe_ito),
        cmocka_unit_test(plot_format_follows_extension),
        cmocka_unit_test(plot_check_refuses_bad_charts),
        cmocka_unit_test(plot_svg_holds_each_series),
        cmocka_unit_test(plot_png_has_size_and_ink),
        cmocka_unit_test(plot_pdf_is_written),
        cmocka_unit_test(plot_write_unwritable_directory),
        cmocka_unit_test(plot_render_is_silent),
        cmocka_unit_test(plot_mccabe_series_and_pinch),
        cmocka_unit_test(plot_fit_chart_series),
        cmocka_unit_test(plot_resid_trend_batch_series),
        cmocka_unit_test(plot_svg_labels_are_text),
        cmocka_unit_test(plot_run_windows_are_the_evidence),
        cmocka_unit_test(plot_run_marks_follow_the_analysis),
        cmocka_unit_test(plot_legend_keeps_off_data),
    };
    return cmocka_run_group_tests(tests, group_setup, NULL);
}
