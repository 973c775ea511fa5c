/*
 * report_internal.h — the report document shared by report_doc.c (a model file's
 * report) and report_cal.c (what a calibration adds: runs, windows, closures, the
 * other fit). Not installed.
 */
#ifndef STAGECAL_REPORT_INTERNAL_H
#define STAGECAL_REPORT_INTERNAL_H

#include "stagecal/report.h"

#include "internal.h"

#define DOC_MAX_ITEMS 24
#define DOC_MAX_FIGS 5  /* runs, fit, residuals, condition */
#define DOC_MAX_WARN 40 /* warnings listed (model's + points outside the envelope) */
#define DOC_MAX_VERDICTS 12

struct stagecal_report_doc {
    stagecal_report rep;
    char **strs; /* every string the report points at */
    size_t n_strs, cap_strs;
    int oom;
    stagecal_report_item job[DOC_MAX_ITEMS], summary[DOC_MAX_ITEMS], hetp[DOC_MAX_ITEMS],
        cond[DOC_MAX_ITEMS], answer[DOC_MAX_ITEMS], other_summary[DOC_MAX_ITEMS];
    const char *verdicts[DOC_MAX_VERDICTS];
    stagecal_report_table inputs, fit, points, runs, windows, closure, other;
    const char *in_head[3], *fit_head[4], *pt_head[4];
    const char **in_cells, **fit_cells, **pt_cells, **warn;
    /* cells of the calibration's tables (report_cal.c), owned */
    const char **run_cells, **win_cells, **clo_cells, **other_cells;
    stagecal_report_figure figs[DOC_MAX_FIGS];
    stagecal_plot_chart *charts[DOC_MAX_FIGS];
    size_t fig_height[DOC_MAX_FIGS]; /* 0: the report's */
    size_t n_charts;
    /* the answer's condition (page one) */
    double ans_r, ans_f;
    int has_calibration; /* stagecal_report_doc_add_calibration ran */
};

/* A string owned by the document (printf-style); "" when out of memory (d->oom set). */
const char *report_doc_str(stagecal_report_doc *d, const char *fmt, ...) SC_PRINTF(2, 3);
/* "inf (total reflux)" or "%.4g". */
const char *report_doc_fmt_r(stagecal_report_doc *d, double r);
void report_doc_add_item(stagecal_report_item *items, size_t *n, const char *key,
                         const char *value);
void report_doc_add_verdict(stagecal_report_doc *d, const char *v);
/* The fit-summary rows of a residual σ in words: "none" is never printed as "σ 0". */
const char *report_doc_sigma_text(stagecal_report_doc *d, double sigma, double dof);

#endif
