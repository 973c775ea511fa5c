/*
 * report.c — the self-contained HTML report (see stagecal/report.h).
 *
 * The document is assembled in a growable buffer: fixed CSS (screen + @media print for
 * A4), the sections the caller filled, charts as inline SVG drawn by the plot module,
 * and the caution. No script, no external resource. Inline SVGs from cairo all use the
 * same element ids (glyph0-1, clip1, …); the ids of figure k are prefixed "f<k>-" so
 * that references resolve inside their own figure.
 *
 * Workload: about ten charts per report; the time goes into PLplot/cairo (see
 * tests/bench_report.c), the text handling here is linear in the output size.
 */
#include "stagecal/report.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/stages.h"
#include "stagecal/version.h"
#include "stagecal/vle.h"
#include "fileio.h"
#include "internal.h"

#define MAX_COLS 64

stagecal_report_params stagecal_report_default_params(void)
{
    stagecal_report_params p = {.plot = stagecal_plot_default_params()};
    p.plot.width = 720;
    p.plot.height = 480;
    return p;
}

/* ---- growable text buffer ------------------------------------------------------------ */

typedef struct {
    char *s;
    size_t n, cap;
    int oom;
} buf;

static void put_n(buf *b, const char *s, size_t n)
{
    if (b->oom)
        return;
    if (b->n + n + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 65536;
        while (cap < b->n + n + 1)
            cap *= 2;
        char *p = realloc(b->s, cap);
        if (!p) {
            b->oom = 1;
            return;
        }
        b->s = p;
        b->cap = cap;
    }
    memcpy(b->s + b->n, s, n);
    b->n += n;
    b->s[b->n] = '\0';
}

static void put(buf *b, const char *s)
{
    put_n(b, s, strlen(s));
}

static void putf(buf *b, const char *fmt, ...) SC_PRINTF(2, 3);
static void putf(buf *b, const char *fmt, ...)
{
    char tmp[512];
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(tmp, sizeof tmp, fmt, ap);
    va_end(ap);
    if (n > 0)
        put_n(b, tmp, (size_t)n < sizeof tmp ? (size_t)n : sizeof tmp - 1);
}

/* Text with &, <, >, " escaped (safe in element content and attribute values). */
static void put_esc(buf *b, const char *s)
{
    const char *run = s ? s : "";
    for (const char *p = run; *p; p++) {
        const char *rep = *p == '&'   ? "&amp;"
                          : *p == '<' ? "&lt;"
                          : *p == '>' ? "&gt;"
                          : *p == '"' ? "&quot;"
                                      : NULL;
        if (rep) {
            put_n(b, run, (size_t)(p - run));
            put(b, rep);
            run = p + 1;
        }
    }
    put(b, run);
}

/* ---- pieces -------------------------------------------------------------------------- */

static const char css[] =
    "body{font-family:'DejaVu Sans',Helvetica,Arial,sans-serif;color:#222;background:#fff;"
    "max-width:60em;margin:1.5em auto;padding:0 1em;line-height:1.4}"
    "h1{font-size:1.6em;margin:0}h2{font-size:1.2em;border-bottom:2px solid #0072B2;"
    "padding-bottom:.15em;margin-top:1.6em}"
    ".sub{color:#555;margin:.2em 0 1em}"
    ".demo{border:3px solid #D55E00;padding:.4em .8em;background:#fff3e0;font-size:1.05em}"
    ".demo strong{color:#A33F00;letter-spacing:.05em}"
    "#answer dl.kv{font-size:1.08em}#answer .verdicts li{margin:.25em 0}"
    ".period{margin:.6em 0}"
    ".warn{border-left:6px solid #D55E00;background:#fdf0e8;padding:.4em .8em}"
    ".warn li{margin:.2em 0}"
    ".caution{border:2px solid #333;padding:.1em 1em .6em;background:#f4f4f4;margin-top:1em}"
    ".caution h2{margin-top:.6em}"
    "table.signoff{width:99%}table.signoff td{height:2.2em}"
    "table.signoff th:first-child{width:8em}"
    "dl.kv{display:grid;grid-template-columns:max-content auto;gap:.15em 1.2em}"
    "dl.kv dt{font-weight:bold}dl.kv dd{margin:0}"
    "table{border-collapse:collapse;margin:.6em 0;font-size:.92em}"
    "caption{text-align:left;font-weight:bold;padding:.2em 0}"
    "th,td{border:1px solid #bbb;padding:.2em .5em;text-align:left;vertical-align:top}"
    "th{background:#eef4f9}td{font-variant-numeric:tabular-nums}"
    "table.runs td:first-child,table.windows td:first-child,table.closure td:first-child,"
    "table.windows td:nth-child(3),table.runs td:nth-child(2){white-space:nowrap}"
    "code,.hash{font-family:'DejaVu Sans Mono',monospace;font-size:.85em;word-break:break-all}"
    "table.inputs td{word-break:break-all}"
    "figure{margin:1em 0;break-inside:avoid;page-break-inside:avoid}"
    "svg.stagecal-figure{display:block;width:100%;height:auto;border:1px solid #ddd}"
    "figcaption{font-size:.9em;color:#444;margin-top:.3em}"
    "footer{margin-top:2em;font-size:.85em;color:#666}"
    "@page{size:A4;margin:14mm 14mm 16mm;"
    "@bottom-center{content:'page ' counter(page) ' of ' counter(pages);font-size:8pt;"
    "color:#555}}"
    "@media print{body{max-width:none;margin:0;padding:0;"
    "font-size:9.5pt}h2{break-after:avoid;page-break-after:avoid;margin-top:1.1em}"
    ".page-one.break{break-after:page;page-break-after:always}"
    "dl.kv,.caution,.warn,.signoff,.demo,section.keep,tr{break-inside:avoid;"
    "page-break-inside:avoid}thead{display:table-header-group}"
    "svg.stagecal-figure{border:none;max-height:120mm}"
    "svg.stagecal-figure[data-tall]{max-height:230mm}}";

static void put_items(buf *b, const stagecal_report_item *it, size_t n)
{
    put(b, "<dl class=\"kv\">\n");
    for (size_t i = 0; i < n; i++) {
        put(b, "<dt>");
        put_esc(b, it[i].key);
        put(b, "</dt><dd>");
        put_esc(b, it[i].value);
        put(b, "</dd>\n");
    }
    put(b, "</dl>\n");
}

static void put_list(buf *b, const char *const *s, size_t n, const char *cls)
{
    putf(b, "<ul%s%s%s>\n", cls ? " class=\"" : "", cls ? cls : "", cls ? "\"" : "");
    for (size_t i = 0; i < n; i++) {
        put(b, "<li>");
        put_esc(b, s[i]);
        put(b, "</li>\n");
    }
    put(b, "</ul>\n");
}

static int check_table(const stagecal_report_table *t, const char *what, stagecal_error *err)
{
    if (!t)
        return STAGECAL_OK;
    if (t->n_cols == 0 || t->n_cols > MAX_COLS || !t->head || (t->n_rows > 0 && !t->cells))
        return error_set(err, STAGECAL_EINVAL,
                         "report %s table: %zu columns, %zu rows (expected 1..%d columns with "
                         "headings and cells)",
                         what, t->n_cols, t->n_rows, MAX_COLS);
    for (size_t c = 0; c < t->n_cols; c++)
        if (!t->head[c])
            return error_set(err, STAGECAL_EINVAL, "report %s table: heading %zu is NULL", what,
                             c + 1);
    return STAGECAL_OK;
}

static void put_table(buf *b, const stagecal_report_table *t, const char *cls)
{
    putf(b, "<table class=\"%s\">\n", cls);
    if (t->caption) {
        put(b, "<caption>");
        put_esc(b, t->caption);
        put(b, "</caption>\n");
    }
    put(b, "<thead><tr>");
    for (size_t c = 0; c < t->n_cols; c++) {
        put(b, "<th>");
        put_esc(b, t->head[c]);
        put(b, "</th>");
    }
    put(b, "</tr></thead>\n<tbody>\n");
    for (size_t r = 0; r < t->n_rows; r++) {
        put(b, "<tr>");
        for (size_t c = 0; c < t->n_cols; c++) {
            put(b, "<td>");
            put_esc(b, t->cells[r * t->n_cols + c]);
            put(b, "</td>");
        }
        put(b, "</tr>\n");
    }
    put(b, "</tbody></table>\n");
}

/* Copies cairo's SVG into the page: drops the XML declaration, prefixes every id and
 * every local reference with "f<k>-", and tags the root element. */
static void put_svg(buf *b, const char *svg, size_t k, const stagecal_plot_chart *c, int tall)
{
    char prefix[32];
    snprintf(prefix, sizeof prefix, "f%zu-", k);
    const char *p = strstr(svg, "<svg");
    if (!p)
        return;
    /* root tag: add our class, the series count and an accessible name */
    p += 4;
    putf(b, "<svg class=\"stagecal-figure\" data-series=\"%zu\"%s role=\"img\" aria-label=\"",
         c->n_series, tall ? " data-tall=\"1\"" : "");
    put_esc(b, c->title ? c->title : "chart");
    put(b, "\"");
    static const char *const pats[] = {"id=\"", "href=\"#", "url(#"};
    while (*p) {
        const char *best = NULL;
        size_t blen = 0;
        for (size_t i = 0; i < sizeof pats / sizeof pats[0]; i++) {
            const char *q = strstr(p, pats[i]);
            if (q && (!best || q < best)) {
                best = q;
                blen = strlen(pats[i]);
            }
        }
        if (!best) {
            put(b, p);
            break;
        }
        put_n(b, p, (size_t)(best - p) + blen);
        put(b, prefix);
        p = best + blen;
    }
    put(b, "\n");
}

/* <section id="ID" class="CLS"><h2>HEADING</h2> (cls NULL: no class); the headings are
 * plain text. */
static void section_open(buf *b, const char *id, const char *cls, const char *heading)
{
    putf(b, "<section id=\"%s\"", id);
    if (cls)
        putf(b, " class=\"%s\"", cls);
    putf(b, ">\n<h2>%s</h2>\n", heading);
}

/* A section of labelled items, when there are any. */
static void section_items(buf *b, const char *id, const char *heading,
                          const stagecal_report_item *it, size_t n)
{
    if (n == 0 || !it)
        return;
    section_open(b, id, NULL, heading);
    put_items(b, it, n);
    put(b, "</section>\n");
}

/* A section of one table (class cls), when there is one. */
static void section_table(buf *b, const char *id, const char *heading,
                          const stagecal_report_table *t, const char *cls)
{
    if (!t)
        return;
    section_open(b, id, NULL, heading);
    put_table(b, t, cls);
    put(b, "</section>\n");
}

/* The tables' shapes and the figures' charts, before anything is written. */
static int check_content(const stagecal_report *r, stagecal_error *err)
{
    int rc;
    if ((rc = check_table(r->inputs, "inputs", err)) ||
        (rc = check_table(r->windows, "windows", err)) || (rc = check_table(r->fit, "fit", err)) ||
        (rc = check_table(r->runs, "runs", err)) ||
        (rc = check_table(r->closure, "closure", err)) ||
        (rc = check_table(r->fit_other, "comparison fit", err)))
        return rc;
    for (size_t k = 0; k < r->n_figures; k++) {
        if (!r->figures || !r->figures[k].chart)
            return error_set(err, STAGECAL_EINVAL, "report figure %zu: no chart", k + 1);
        if ((rc = stagecal_plot_check(r->figures[k].chart, err))) {
            char msg[STAGECAL_ERROR_TEXT];
            snprintf(msg, sizeof msg, "%s", err ? err->text : "");
            return error_set(err, rc, "report figure %zu: %s", k + 1, msg);
        }
    }
    return STAGECAL_OK;
}

/* The document's head, the title block and the demo notice. */
static void put_head(buf *b, const stagecal_report *r)
{
    const char *title = r->title ? r->title : "Stage calibration report";
    put(b, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
           "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
           "<title>");
    put_esc(b, title);
    put(b, "</title>\n<style>");
    put(b, css);
    put(b, "</style>\n</head>\n<body>\n<header>\n<h1>");
    put_esc(b, title);
    put(b, "</h1>\n");
    if (r->subtitle) {
        put(b, "<p class=\"sub\">");
        put_esc(b, r->subtitle);
        put(b, "</p>\n");
    }
    put(b, "</header>\n");
    if (r->demo_notice) {
        put(b, "<p class=\"demo\" id=\"demo\"><strong>INVENTED DEMO DATA</strong> \xe2\x80\x94 ");
        put_esc(b, r->demo_notice);
        put(b, "</p>\n");
    }
}

/* Page one: the answer, the caution and the sign-off, printed alone on the first sheet (the
 * caution is kept with the block before it, never alone on a page). */
static void put_page_one(buf *b, const stagecal_report *r)
{
    int page_one = (r->n_answer > 0 && r->answer) || r->signoff;
    putf(b, "<div class=\"page-one%s\">\n", page_one ? " break" : "");
    if ((r->n_answer > 0 && r->answer) || (r->n_verdicts > 0 && r->verdicts) || r->data_period) {
        put(b, "<section id=\"answer\">\n<h2>");
        put_esc(b, r->answer_heading ? r->answer_heading : "The answer");
        put(b, "</h2>\n");
        if (r->n_answer > 0 && r->answer)
            put_items(b, r->answer, r->n_answer);
        if (r->n_verdicts > 0 && r->verdicts)
            put_list(b, r->verdicts, r->n_verdicts, "verdicts");
        if (r->data_period) {
            put(b, "<p class=\"period\"><strong>Data period:</strong> ");
            put_esc(b, r->data_period);
            put(b, "</p>\n");
        }
        put(b, "</section>\n");
    }
    put(b, "<section id=\"caution\" class=\"caution\">\n<h2>Caution</h2>\n<p>");
    put_esc(b, stagecal_caution_text());
    put(b, "</p>\n</section>\n");
    if (r->signoff) {
        static const char *const roles[] = {"Prepared by", "Checked by", "Approved by"};
        put(b, "<section id=\"signoff\" class=\"keep\">\n<h2>Sign-off</h2>\n"
               "<table class=\"signoff\">\n<thead><tr><th>role</th><th>name</th>"
               "<th>signature</th><th>date</th></tr></thead>\n<tbody>\n");
        for (size_t i = 0; i < 3; i++)
            putf(b, "<tr><th>%s</th><td></td><td></td><td></td></tr>\n", roles[i]);
        put(b, "</tbody></table>\n</section>\n");
    }
    put(b, "</div>\n");
}

/* The charts as inline SVG, each a numbered figure with its caption. A status. */
static int put_figures(buf *b, const stagecal_report *r, const stagecal_report_params *par,
                       stagecal_error *err)
{
    if (r->n_figures == 0)
        return STAGECAL_OK;
    section_open(b, "plots", NULL, "Charts");
    for (size_t k = 0; k < r->n_figures && !b->oom; k++) {
        char *svg = NULL;
        stagecal_plot_params pp = par->plot;
        if (r->figure_height && r->figure_height[k] > 0)
            pp.height = r->figure_height[k];
        int rc = stagecal_plot_svg(r->figures[k].chart, &pp, &svg, NULL, err);
        if (rc)
            return rc;
        putf(b, "<figure id=\"figure-%zu\">\n", k + 1);
        put_svg(b, svg, k + 1, r->figures[k].chart, pp.height > pp.width);
        free(svg);
        if (r->figures[k].caption) {
            putf(b, "<figcaption>Figure %zu. ", k + 1);
            put_esc(b, r->figures[k].caption);
            put(b, "</figcaption>\n");
        }
        put(b, "</figure>\n");
    }
    put(b, "</section>\n");
    return STAGECAL_OK;
}

int stagecal_report_html(const stagecal_report *r, const stagecal_report_params *params,
                         char **html, size_t *len, stagecal_error *err)
{
    stagecal_report_params par = params ? *params : stagecal_report_default_params();
    int rc;
    if (!r || !html)
        return error_set(err, STAGECAL_EINVAL, "report: missing content or output pointer");
    *html = NULL;
    if ((rc = check_content(r, err)))
        return rc;

    buf b = {0};
    put_head(&b, r);
    put_page_one(&b, r);
    /* warnings next: an extrapolation must not be missed */
    if (r->n_warnings > 0 && r->warnings) {
        section_open(&b, "warnings", "warn", "Warnings");
        put_list(&b, r->warnings, r->n_warnings, NULL);
        put(&b, "</section>\n");
    }
    if (r->n_findings > 0 && r->findings) {
        section_open(&b, "validation", NULL, "Validation findings");
        put_list(&b, r->findings, r->n_findings, NULL);
        put(&b, "</section>\n");
    }
    section_table(&b, "evidence", "Evidence: runs", r->runs, "runs");
    section_table(&b, "windows", "Quasi-steady windows", r->windows, "windows");
    section_table(&b, "closure", "Run closure", r->closure, "closure");
    if (r->fit || (r->n_fit_summary > 0 && r->fit_summary) || r->fit_other) {
        section_open(&b, "fit", NULL, "Fitted correlation");
        if (r->fit)
            put_table(&b, r->fit, "fit");
        if (r->n_fit_summary > 0 && r->fit_summary)
            put_items(&b, r->fit_summary, r->n_fit_summary);
        if (r->fit_other)
            put_table(&b, r->fit_other, "fit other");
        if (r->n_fit_other_summary > 0 && r->fit_other_summary)
            put_items(&b, r->fit_other_summary, r->n_fit_other_summary);
        put(&b, "</section>\n");
    }
    section_items(&b, "condition", "Stages at a stated condition", r->condition, r->n_condition);
    section_items(&b, "hetp", "HETP", r->hetp, r->n_hetp);
    section_items(&b, "trend", "Trend", r->trend, r->n_trend);
    if ((rc = put_figures(&b, r, &par, err))) {
        free(b.s);
        return rc;
    }
    if ((r->n_job > 0 && r->job) || r->inputs) {
        section_open(&b, "job", NULL, "Provenance");
        if (r->n_job > 0 && r->job)
            put_items(&b, r->job, r->n_job);
        if (r->inputs)
            put_table(&b, r->inputs, "inputs");
        put(&b, "</section>\n");
    }
    put(&b, "<footer>Generated by ");
    put_esc(&b, r->generator ? r->generator : "stagecal");
    if (!r->generator) {
        put(&b, " ");
        put_esc(&b, stagecal_version());
    }
    put(&b, ". Self-contained document: no scripts, no network resources.</footer>\n"
            "</body>\n</html>\n");
    if (b.oom) {
        free(b.s);
        return error_set(err, STAGECAL_ENOMEM, "out of memory building the report");
    }
    *html = b.s;
    if (len)
        *len = b.n;
    return STAGECAL_OK;
}

int stagecal_report_write(const stagecal_report *r, const stagecal_report_params *params,
                          const char *path, stagecal_error *err)
{
    char *html = NULL;
    size_t n = 0;
    int rc;
    if (!path || !path[0])
        return error_set(err, STAGECAL_EINVAL, "report file name is empty");
    if ((rc = stagecal_report_html(r, params, &html, &n, err)))
        return rc;
    /* the output named by --output replaces an earlier report of that name (docs/cli.md) */
    rc = write_atomic(path, html, n, ATOMIC_REPLACE, err);
    free(html);
    return rc;
}
