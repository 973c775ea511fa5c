/*
 * test_plot.c — the chart renderer (plot.c, plot_layout.c, plot_file.c): files are
 * produced in each format, are not blank, have the stated size, and hold the expected
 * series; bad charts are refused; the library stays silent; SVG labels are text; the
 * legend keeps off the data. The builders' tests: test_plot_mccabe.c, test_plot_build.c,
 * test_plot_run.c (and test_plot_design.c).
 *
 * Series in an SVG are counted by their colours (plot_testutil.h). PNG pixels are counted
 * with PIL through STAGECAL_PYTHON.
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

#include "plot_internal.h"
#include "plot_testutil.h"
#include "stagecal/calibrate.h"
#include "stagecal/plot.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "testutil.h"

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
/* A chart builder that passes the series limit gets an error naming it; the chart is never
 * handed out with series missing (a run chart of 48 runs once lost its stage panel so). */
static void plot_fig_past_the_series_limit_fails(void **state)
{
    (void)state;
    plot_fig f;
    stagecal_error err;
    stagecal_plot_chart *c = NULL;
    double x = 1, y = 2;
    for (int n = MAX_SERIES; n <= MAX_SERIES + 1; n++) {
        assert_int_equal(plot_fig_open(&f, &err), STAGECAL_OK);
        plot_fig_labels(&f, "limit", "x", "y");
        for (int k = 0; k < n; k++)
            plot_fig_add(&f, STAGECAL_PLOT_POINTS, NULL, &x, &y, NULL, 1, 0, 0, 0);
        int rc = plot_fig_close(&f, &c, &err);
        if (n == MAX_SERIES) { /* at the limit: a chart */
            assert_int_equal(rc, STAGECAL_OK);
            assert_int_equal(c->n_series, MAX_SERIES);
            stagecal_plot_chart_free(c);
        } else {
            assert_int_equal(rc, STAGECAL_EINTERNAL);
            assert_null(c);
            assert_non_null(strstr(err.text, "more than 64 series"));
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
        cmocka_unit_test(plot_svg_labels_are_text),
        cmocka_unit_test(plot_legend_keeps_off_data),
        cmocka_unit_test(plot_fig_past_the_series_limit_fails),
    };
    return cmocka_run_group_tests(tests, group_setup, NULL);
}
