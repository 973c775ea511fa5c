/*
 * plot_testutil.h — what the chart tests share (tests/test_plot*.c): the output folder,
 * the group setup, reading a file back, and counting the series an SVG draws.
 *
 * Counting series in an SVG: PLplot's svg driver writes every drawn element with its
 * colour as stroke="#RRGGBB" or fill="#RRGGBB". Each series of the charts tested here has
 * its own colour (a palette colour for lines and markers, its tint for bands), and the
 * page, axis and grid colours are known, so the set of other colours in the file is the
 * set of series drawn.
 */
#ifndef STAGECAL_PLOT_TESTUTIL_H
#define STAGECAL_PLOT_TESTUTIL_H

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <gsl/gsl_errno.h>

#include "stagecal/plot.h"
#include "lsan_fontconfig.h"
#include "testutil.h"

#define OUTDIR STAGECAL_BUILD_DIR "/plot_out"

static inline int group_setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    mkdir(OUTDIR, 0755);
    return 0;
}

static inline char *slurp(const char *path, size_t *len)
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
static inline size_t svg_series_colours(const char *svg, unsigned long *out, size_t cap)
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

static inline int has_colour(const unsigned long *c, size_t n, unsigned long want)
{
    for (size_t i = 0; i < n; i++)
        if (c[i] == want)
            return 1;
    return 0;
}

/* The colours a chart's series should leave in the SVG. */
static inline size_t expected_colours(const stagecal_plot_chart *c, unsigned long *out, size_t cap)
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
static inline void check_svg_series(const stagecal_plot_chart *c, const char *name,
                                    size_t want_series)
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

static inline const stagecal_plot_series *find_series(const stagecal_plot_chart *c,
                                                      const char *prefix)
{
    for (size_t i = 0; i < c->n_series; i++)
        if (c->series[i].label && strncmp(c->series[i].label, prefix, strlen(prefix)) == 0)
            return &c->series[i];
    return NULL;
}

#endif
