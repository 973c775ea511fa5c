/*
 * plot_file.c — a chart into a file or a string (stagecal_plot_write, stagecal_plot_svg)
 * through the one atomic writer (src/fileio.c): PLplot draws into a temporary file in the
 * target's folder (so PLplot's own fopen cannot fail and prompt on the terminal); the
 * result is read back and published (renamed over the target, which --output documents)
 * only when it is complete — a PNG's IEND chunk, an SVG's closing tag, a PDF's %%EOF — so
 * a full disk cannot leave a cut chart behind. SVG labels are rewritten as plain UTF-8.
 */
#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "fileio.h"
#include "internal.h"
#include "plot_render.h"

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
    char *buf = NULL;
    size_t n = 0;
    int rc = plplot_tmp_writable(err);
    if (rc || (rc = plot_render_file(c, device_for(fmt), atomic_path(a), par, err)))
        return rc;
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
