/*
 * stagecal/report.h — one self-contained HTML document for a calibration.
 *
 * The report is built from a plain description (stagecal_report): sections of
 * key/value rows, tables, lists of findings and warnings, and charts
 * (stagecal_plot_chart) that are drawn as inline SVG. The document loads nothing
 * from the network, runs no scripts, carries its own CSS (screen and @media print
 * for A4) and always ends with the caution of stagecal_caution_text().
 *
 * All strings are UTF-8 and are HTML-escaped by the writer; the caller formats
 * numbers (with units) into text, so the report shows exactly what the caller chose.
 * Units inside charts are as stated on their axes (see plot.h).
 */
#ifndef STAGECAL_REPORT_H
#define STAGECAL_REPORT_H

#include <stddef.h>

#include "stagecal/calibrate.h"
#include "stagecal/error.h"
#include "stagecal/model.h"
#include "stagecal/plot.h"
#include "stagecal/regress.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One row of a key/value list ("column", "C-101 (fictional)"). */
typedef struct {
    const char *key;
    const char *value;
} stagecal_report_item;

/* A table: n_cols headings and n_rows·n_cols cells, row-major. NULL cells print empty. */
typedef struct {
    const char *caption;      /* shown above the table, may be NULL */
    const char *const *head;  /* n_cols headings (with units, e.g. "R [-]") */
    size_t n_cols;            /* 1..64 */
    const char *const *cells; /* n_rows·n_cols cells */
    size_t n_rows;
} stagecal_report_table;

/* A chart with its caption (figure). */
typedef struct {
    const stagecal_plot_chart *chart; /* borrowed */
    const char *caption;              /* one sentence under the figure, may be NULL */
} stagecal_report_figure;

/* What a report shows. Every pointer may be NULL / every count 0: that section is
 * then left out, except the caution, which is always printed. */
typedef struct {
    const char *title;       /* document title; NULL → "Stage calibration report" */
    const char *subtitle;    /* e.g. "column C-101 · fitted 2026-11-30T14:02:11Z" */
    const char *demo_notice; /* a banner, e.g. "demo data: fictional site and column" */

    const stagecal_report_item *job; /* the job: column, system, form, command line… */
    size_t n_job;
    const stagecal_report_table *inputs; /* data provenance: files, SHA-256, rows */

    const char *const *findings; /* validation findings, one per line */
    size_t n_findings;
    const stagecal_report_table *windows;    /* quasi-steady windows */
    const stagecal_report_table *fit;        /* the fit table: parameters, se, CI */
    const stagecal_report_item *fit_summary; /* σ, dof, windows, AICc … */
    size_t n_fit_summary;

    const stagecal_report_figure *figures; /* charts, in order */
    size_t n_figures;
    const size_t *figure_height; /* n_figures drawing heights in pt (0: the report's, from
                                    its params); NULL: all the report's. A figure taller
                                    than wide may fill most of an A4 page in print */

    const stagecal_report_item *condition; /* stages and compositions at a stated condition */
    size_t n_condition;

    const stagecal_report_item *hetp; /* HETP with its interval, where the height is known */
    size_t n_hetp;
    const stagecal_report_item *trend; /* trend: loss rate, alarm, forecast */
    size_t n_trend;

    const char *const *warnings; /* extrapolation and other warnings, shown highlighted */
    size_t n_warnings;

    const char *generator; /* "stagecal 0.1.0" in the footer; NULL → stagecal_version() */

    /* Page one, "The answer" (printed alone on the first A4 page with the caution and the
     * sign-off block): the condition and what the fit says there, in words a reviewer
     * signs; no raw keys. */
    const char *answer_heading;         /* e.g. "Stages at R = 5, F = 1.47 Pa^0.5" */
    const stagecal_report_item *answer; /* stages with interval, HETP at the same condition */
    size_t n_answer;
    const char *const *verdicts; /* one sentence each, e.g. "inside the fitted envelope" */
    size_t n_verdicts;
    const char *data_period; /* "2025-01-02 06:00 to 2025-03-28 17:10 UTC (18 runs)" */
    int signoff;             /* 1: a prepared / checked / approved block with blank lines */

    /* The evidence behind the answer (after page one, before the fits). */
    const stagecal_report_table *runs;      /* per run: windows found, used, left out and why */
    const stagecal_report_table *closure;   /* per run: Rayleigh closure and analyser checks */
    const stagecal_report_table *fit_other; /* the fit in the other space, for comparison */
    const stagecal_report_item *fit_other_summary;
    size_t n_fit_other_summary;
} stagecal_report;

/* Rendering parameters. */
typedef struct {
    stagecal_plot_params plot; /* chart size and temporary directory (SVG width in pt) */
} stagecal_report_params;

stagecal_report_params stagecal_report_default_params(void);

/* Builds the HTML in memory: *html receives a malloc'd NUL-terminated document (caller
 * frees with free()), *len its length (may be NULL). Each chart's SVG gets its element
 * ids prefixed ("f<k>-") so that several inline SVGs do not collide, and carries the
 * class "stagecal-figure" and data-series="<number of series>". Errors: EINVAL (a
 * table with n_cols 0 or > 64, a NULL heading, a chart failing stagecal_plot_check —
 * the message names the figure), ENOMEM, and the plot module's errors. */
int stagecal_report_html(const stagecal_report *r, const stagecal_report_params *params,
                         char **html, size_t *len, stagecal_error *err);

/* Writes the HTML to path atomically (temporary file next to it, renamed). EWRITE when
 * it cannot be written; otherwise as stagecal_report_html. */
int stagecal_report_write(const stagecal_report *r, const stagecal_report_params *params,
                          const char *path, stagecal_error *err);

/* ---- a report from a model file ----------------------------------------------------
 * stagecal_report_from_model fills a report from a loaded model (model.h) and, when
 * given, the points it was fitted on (a points file, regress.h): the job (column,
 * system, stage convention, form, method, evidence, time, seed, command line), the
 * inputs with SHA-256, the fit table (value, standard error sqrt(C_ii), t-interval at
 * the model's level), residual σ and dof, the envelope, HETP where known, the model's
 * warnings plus one per point outside the envelope, and these charts: stages against R
 * with confidence and prediction bands (delta method, stagecal_model_eval) and the
 * envelope, the points; with points also residuals against fitted stages. A form that
 * uses the load is drawn at the middle of the fitted F range (the caption says so).
 * The document owns everything; free it with stagecal_report_doc_free. Errors: EINVAL
 * (m fails stagecal_model_check), ENOMEM, and stagecal_model_eval's errors. */
typedef struct stagecal_report_doc stagecal_report_doc;

int stagecal_report_from_model(const stagecal_model *m, const stagecal_regress_data *points,
                               stagecal_report_doc **out, stagecal_error *err);
/* Adds the section "Stages at a stated condition" to a document built by
 * stagecal_report_from_model (same m): the model's stages (the pot included) at reflux
 * (≥ 0 or INFINITY) and fload (Pa^0.5; NAN for a form without the load, required for one
 * with it) with the prediction interval at the model's level; the pot composition xB
 * that this many equilibrium stages (E_MV = 1: the model's stages are effective stages)
 * reach below a distillate of xd on the equilibrium (vle, borrowed; NULL: the one the
 * model file records, stagecal_model_build_vle), and the xB range that the
 * ends of the prediction interval reach; and a McCabe–Thiele chart of that stepping
 * (appended to the figures). A condition outside the fitted envelope adds a warning
 * (extrapolation). A stepping that pinches or meets an azeotrope is reported in the
 * section instead of an xB. Errors: EINVAL (xd outside (0, 1), reflux < 0, a load given
 * to a form without it or missing for one with it, a second condition), ENOMEM, and the
 * errors of stagecal_model_eval, stagecal_model_build_vle and the plot module. */
int stagecal_report_doc_add_condition(stagecal_report_doc *doc, const stagecal_model *m,
                                      const stagecal_vle *vle, double xd, double reflux,
                                      double fload, stagecal_error *err);
/* The column file's free-text description: when it says the data are invented (the
 * words "invented" or "fictional", any case), the report opens with an "INVENTED DEMO
 * DATA" banner quoting it and page one says so. Other text: no effect. ENOMEM. */
int stagecal_report_doc_set_description(stagecal_report_doc *doc, const char *description);
/* What a calibration adds to the report of its model (doc built by
 * stagecal_report_from_model from &cal->model; a stated condition, if any, added first):
 * the runs table (windows found, used, with a stage count; runs left out with the
 * reason), the windows table (replacing the points table), the Rayleigh closure of every
 * run, the fit in the other space with its residual scatter, page-one verdicts (runs
 * left out, the two fits agreeing at the answer's condition) and, from the column file's
 * description, the invented-data banner. The document copies what it shows; cal may be
 * freed afterwards. Errors: EINVAL (NULL, added twice), ENOMEM. */
int stagecal_report_doc_add_calibration(stagecal_report_doc *doc, const stagecal_calibration *cal,
                                        stagecal_error *err);
/* The report inside a document (valid until stagecal_report_doc_free). */
const stagecal_report *stagecal_report_doc_content(const stagecal_report_doc *doc);
/* Chart k (0-based) of the document, NULL when k is out of range. */
const stagecal_plot_chart *stagecal_report_doc_chart(const stagecal_report_doc *doc, size_t k);
void stagecal_report_doc_free(stagecal_report_doc *doc); /* NULL is a no-op */

#ifdef __cplusplus
}
#endif
#endif
