/*
 * report_cal.c — what a calibration adds to its report (see stagecal/report.h): the
 * runs with their windows and the reasons runs were left out, the windows as a table,
 * the Rayleigh closure of every run, the fit in the other space for comparison, and the
 * verdicts on page one that need the calibration (runs left out, the two fits agreeing
 * at the answer's condition, invented data).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "stagecal/calibrate.h"
#include "stagecal/plot.h"
#include "stagecal/report.h"
#include "report_internal.h"

#define RUN_COLS 7
#define WIN_COLS 9
#define CLO_COLS 6

static const char *base_name(const char *path)
{
    const char *s = strrchr(path, '/');
    return s ? s + 1 : path;
}

static const char *utc_text(stagecal_report_doc *d, const stagecal_runlog *log, size_t row)
{
    if (log->nfiles_iso != log->nfiles)
        return report_doc_str(d, "t = %.0f s", log->t_s[row]);
    time_t t = (time_t)floor(log->t_s[row]);
    struct tm tm;
    if (!gmtime_r(&t, &tm))
        return "";
    return report_doc_str(d, "%04d-%02d-%02d %02d:%02d", tm.tm_year + 1900, tm.tm_mon + 1,
                          tm.tm_mday, tm.tm_hour, tm.tm_min);
}

static const stagecal_flagged_run *flag_of(const stagecal_calibration *cal, size_t run)
{
    for (size_t k = 0; k < cal->nflagged; k++)
        if (cal->flagged[k].run == run)
            return &cal->flagged[k];
    return NULL;
}

/* Per run: windows found by the run-log analysis, windows in the evidence, those with a
 * stage count, and what became of the run. */
static void runs_table(stagecal_report_doc *d, const stagecal_calibration *cal)
{
    static const char *const head[RUN_COLS] = {
        "run",        "log file: first line", "rows",  "quasi-steady windows",
        "in the fit", "with a stage count",   "status"};
    const stagecal_runlog *log = cal->log;
    for (size_t r = 0; r < log->nruns; r++) {
        size_t found = 0, used = 0, ok = 0;
        for (size_t w = 0; w < cal->res.nwindows; w++)
            found += cal->res.windows[w].run == r;
        for (size_t i = 0; i < cal->evidence.n; i++)
            if (cal->evidence.ev[i].run == r) {
                used++;
                ok += cal->evidence.ev[i].stages_ok != 0;
            }
        const stagecal_flagged_run *f = flag_of(cal, r);
        if (f && f->left_out)
            used = ok = 0;
        const char **c = d->run_cells + RUN_COLS * r;
        const stagecal_runlog_run *run = &log->runs[r];
        c[0] = run->name;
        c[1] = report_doc_str(d, "%s:%ld", base_name(log->files[run->file]), run->first_line);
        c[2] = report_doc_str(d, "%zu", run->n);
        c[3] = report_doc_str(d, "%zu", found);
        c[4] = report_doc_str(d, "%zu", used);
        c[5] = report_doc_str(d, "%zu", ok);
        c[6] = f && f->left_out ? report_doc_str(d, "LEFT OUT: %s", f->reason)
               : f              ? report_doc_str(d, "in the fit, flagged: %s", f->reason)
               : found == 0     ? "no quasi-steady window found"
               : used == 0      ? "no window with enough readings of both analysers"
                                : "in the fit";
    }
    d->runs = (stagecal_report_table){
        "Runs: the quasi-steady windows each gave, and the runs left out with the reason", head,
        RUN_COLS, d->run_cells, log->nruns};
    d->rep.runs = &d->runs;
}

static void windows_table(stagecal_report_doc *d, const stagecal_calibration *cal)
{
    static const char *const head[WIN_COLS] = {
        "run",          "log lines",    "from",
        "samples",      "R [-]",        "F [Pa^0.5]",
        "xD [mol/mol]", "xB [mol/mol]", "stages, pot included [-]"};
    const stagecal_runlog *log = cal->log;
    for (size_t i = 0; i < cal->evidence.n; i++) {
        const stagecal_evidence *e = &cal->evidence.ev[i];
        const char **c = d->win_cells + WIN_COLS * i;
        c[0] = log->runs[e->run].name;
        c[1] = report_doc_str(d, "%lu\xe2\x80\x93%lu", (unsigned long)log->line[e->first],
                              (unsigned long)log->line[e->last]);
        c[2] = utc_text(d, log, e->first);
        c[3] = report_doc_str(d, "%zu", e->n_samples);
        c[4] = report_doc_fmt_r(d, e->r);
        c[5] = e->has_load ? report_doc_str(d, "%.3g", e->f_load) : "not known";
        c[6] = report_doc_str(d, "%.4f", e->xd);
        c[7] = report_doc_str(d, "%.4f", e->xb);
        c[8] = e->stages_ok ? report_doc_str(d, "%.4f \xc2\xb1 %.4f", e->stages, e->se_stages)
                            : "none (the samples pinch or are censored; the composition fit "
                              "uses the window)";
    }
    d->windows = (stagecal_report_table){
        "Quasi-steady windows in the fit (the unit of evidence): means over each window, "
        "stage count with its standard error",
        head, WIN_COLS, d->win_cells, cal->evidence.n};
    d->rep.windows = &d->windows;
}

static void closure_table(stagecal_report_doc *d, const stagecal_calibration *cal)
{
    static const char *const head[CLO_COLS] = {"run",
                                               "Rayleigh closure [%]",
                                               "verdict",
                                               "analyser drift",
                                               "boil-up against the fall of W",
                                               "outlier samples"};
    for (size_t r = 0; r < cal->res.nruns; r++) {
        const stagecal_runlog_closure *c = &cal->res.closures[r];
        const char **t = d->clo_cells + CLO_COLS * r;
        t[0] = cal->log->runs[c->run < cal->log->nruns ? c->run : r].name;
        t[1] = isfinite(c->closure)
                   ? report_doc_str(d, "%+.2f \xc2\xb1 %.2f", 100 * c->closure, 100 * c->u_closure)
                   : "not formed (too few readings)";
        t[2] = !isfinite(c->closure) ? "not checked"
               : c->gross            ? "GROSS ERROR: the pot balance does not close"
                                     : "closes within its uncertainty";
        t[3] = c->drift ? report_doc_str(d, "FLAGGED: %s",
                                         stagecal_drift_analyser_name(c->drift_analyser))
                        : "none found";
        t[4] = !c->has_boilup       ? "not checked (no boil-up logged)"
               : c->boilup_mismatch ? report_doc_str(d, "MISMATCH: ratio %.2f", c->boilup_ratio)
                                    : report_doc_str(d, "consistent: ratio %.2f", c->boilup_ratio);
        t[5] = report_doc_str(d, "%zu", c->n_outliers);
    }
    d->closure = (stagecal_report_table){
        "Run closure: the Rayleigh pot balance of each run (light component charged = left in "
        "the pot + drawn as distillate), with its standard uncertainty",
        head, CLO_COLS, d->clo_cells, cal->res.nruns};
    d->rep.closure = &d->closure;
}

/* The fit in the other space, its summary, and whether the two agree at the answer's
 * condition (a verdict). */
static void other_fit(stagecal_report_doc *d, const stagecal_calibration *cal)
{
    static const char *const head[4] = {"parameter", "value", "std. error", "interval"};
    const stagecal_regress_result *o = NULL;
    const char *name = NULL, *fail = NULL;
    if (cal->used == STAGECAL_MODEL_STAGE_SPACE) {
        name = "composition-space";
        if (cal->comp_status == STAGECAL_OK)
            o = &cal->comp_fit;
        else if (cal->comp_status > 0)
            fail = cal->comp_message;
    } else {
        name = "stage-space";
        if (cal->stage_status == STAGECAL_OK)
            o = &cal->stage_fit;
        else if (cal->stage_status > 0)
            fail = cal->stage_message;
    }
    size_t ns = 0;
    if (!o) {
        report_doc_add_item(d->other_summary, &ns,
                            report_doc_str(d, "the %s fit, for comparison", name),
                            fail ? report_doc_str(d, "not available: %s", fail) : "not run");
        d->rep.fit_other_summary = d->other_summary;
        d->rep.n_fit_other_summary = ns;
        return;
    }
    for (size_t i = 0; i < o->p; i++) {
        const char **c = d->other_cells + 4 * i;
        c[0] = o->form.param_names[i];
        c[1] = report_doc_str(d, "%.6g", o->theta[i]);
        c[2] = report_doc_str(d, "%.3g", o->se[i]);
        c[3] = report_doc_str(d, "[%.6g, %.6g] (%.0f %%)", o->ci_low[i], o->ci_high[i],
                              100 * o->level);
    }
    d->other = (stagecal_report_table){
        report_doc_str(d, "For comparison, the %s fit of '%s'", name, o->form.name), head, 4,
        d->other_cells, o->p};
    d->rep.fit_other = &d->other;
    double s = o->sigma_obs > 0 ? o->sigma_obs : o->sigma;
    report_doc_add_item(d->other_summary, &ns, "residual scatter",
                        report_doc_sigma_text(d, s, o->dof));
    report_doc_add_item(d->other_summary, &ns, "windows", report_doc_str(d, "%zu", o->n));
    d->rep.fit_other_summary = d->other_summary;
    d->rep.n_fit_other_summary = ns;

    /* agreement at the answer's condition: the two estimates of the mean stages differ by
     * less than 2 combined standard errors (the fits share data, so this is lenient;
     * common practice, no source) */
    const stagecal_model *m = &cal->model;
    stagecal_model_point p;
    stagecal_band b;
    double f = m->form.uses_load ? d->ans_f : NAN;
    if (m->one_sided || stagecal_model_eval(m, d->ans_r, f, 0, &p, NULL) != STAGECAL_OK ||
        stagecal_regress_result_band(o, d->ans_r, isfinite(f) ? f : 0, 1.0, &b, NULL) !=
            STAGECAL_OK)
        return;
    double diff = fabs(p.stages - b.value), comb = sqrt(p.se_fit * p.se_fit + b.se_fit * b.se_fit);
    const char *used = stagecal_model_method_name(m->method);
    if (diff <= 2 * comb)
        report_doc_add_verdict(
            d, report_doc_str(d,
                              "The %s and %s fits agree here: %.2f and %.2f stages, a "
                              "difference of %.2f stages, within twice their combined "
                              "standard error (2 \xc3\x97 %.2f).",
                              used, name, p.stages, b.value, diff, comb));
    else
        report_doc_add_verdict(
            d, report_doc_str(
                   d,
                   "The %s and %s fits DISAGREE here: %.2f and %.2f stages, a "
                   "difference of %.2f stages, more than twice their combined "
                   "standard error (2 \xc3\x97 %.2f); look at the windows and the closures before "
                   "relying on either.",
                   used, name, p.stages, b.value, diff, comb));
}

static void runs_verdict(stagecal_report_doc *d, const stagecal_calibration *cal)
{
    size_t out = 0, none = 0;
    char names[200] = "";
    for (size_t k = 0; k < cal->nflagged; k++)
        if (cal->flagged[k].left_out) {
            size_t len = strlen(names);
            if (len + 80 < sizeof names)
                snprintf(names + len, sizeof names - len, "%s'%s'", out ? ", " : "",
                         cal->log->runs[cal->flagged[k].run].name);
            out++;
        }
    for (size_t r = 0; r < cal->log->nruns; r++) {
        size_t found = 0;
        for (size_t w = 0; w < cal->res.nwindows; w++)
            found += cal->res.windows[w].run == r;
        none += found == 0;
    }
    char tail[120] = "";
    if (none > 0)
        snprintf(tail, sizeof tail, "; %zu gave no quasi-steady window and add no evidence", none);
    if (out == 0)
        report_doc_add_verdict(d, report_doc_str(d,
                                                 "No run was left out: none of the %zu runs "
                                                 "failed its pot balance or showed analyser "
                                                 "drift%s.",
                                                 cal->log->nruns, tail));
    else
        report_doc_add_verdict(d, report_doc_str(d,
                                                 "%zu of %zu runs left out of the fit (%s): a "
                                                 "gross closure error or analyser drift, "
                                                 "reasons in the evidence table%s.",
                                                 out, cal->log->nruns, names, tail));
}

/* The run chart (the raw runs with the windows shaded), first among the figures: the
 * first picture a reviewer asks for. */
static int run_chart(stagecal_report_doc *d, const stagecal_calibration *cal, stagecal_error *err)
{
    if (d->n_charts >= DOC_MAX_FIGS)
        return error_set(err, STAGECAL_EINVAL, "report: no room for the run chart");
    stagecal_plot_chart *c = NULL;
    int rc = stagecal_plot_run_calibration(cal, STAGECAL_PLOT_ALL_RUNS, &c, err);
    if (rc)
        return rc;
    for (size_t k = d->n_charts; k > 0; k--) {
        d->charts[k] = d->charts[k - 1];
        d->figs[k] = d->figs[k - 1];
        d->fig_height[k] = d->fig_height[k - 1];
    }
    d->charts[0] = c;
    d->figs[0] = (stagecal_report_figure){
        c, "The runs as logged, each in hours from its own start: distillate and pot "
           "compositions, pot holdup, reflux ratio and stage counts, with the quasi-steady "
           "windows shaded (the evidence of the fit; a run left out is marked), the samples' "
           "stage counts with \xc2\xb1 2u bars and each window's count with \xc2\xb1 2 se."};
    d->fig_height[0] = 880; /* five stacked panels, at the report's width of 720 pt */
    d->rep.figure_height = d->fig_height;
    d->n_charts++;
    d->rep.figures = d->figs;
    d->rep.n_figures = d->n_charts;
    return STAGECAL_OK;
}

/* How the model file's fit got its standard errors, under the fit table. */
static void cov_note(stagecal_report_doc *d, const stagecal_calibration *cal)
{
    const stagecal_regress_result *f = stagecal_calibration_fit(cal);
    if (d->rep.fit_summary != d->summary || cal->used == STAGECAL_MODEL_CENSORED)
        return;
    size_t ns = d->rep.n_fit_summary;
    const char *how =
        f->cov_kind == STAGECAL_COV_MODEL
            ? "s\xc2\xb2 times the inverse information (the windows' stated errors, scaled by "
              "the residual variance)"
        : f->cov_kind == STAGECAL_COV_CR2_RUN
            ? "CR2 sandwich clustered by run (Bell & McCaffrey 2002): from each run's residuals "
              "together, so that windows of one run may share an error; every interval and band "
              "uses Student t at its own Bell\xe2\x80\x93McCaffrey degrees of freedom "
              "(Pustejovsky & Tipton 2018), at most the runs less one"
            : report_doc_str(d,
                             "%s sandwich: from each window's own residual, inflated by its "
                             "leverage (MacKinnon & White 1985), not only from the windows' "
                             "stated errors%s",
                             f->cov_kind == STAGECAL_COV_HC3 ? "HC3" : "HC2",
                             f->cov_kind == STAGECAL_COV_HC2_BM
                                 ? "; every interval and band uses Student t at its own "
                                   "Bell\xe2\x80\x93McCaffrey degrees of freedom (Imbens & "
                                   "Koles\xc3\xa1r 2016), fewer where it rests on a few "
                                   "windows"
                                 : "");
    report_doc_add_item(d->summary, &ns, "standard errors", how);
    d->rep.n_fit_summary = ns;
}

int stagecal_report_doc_add_calibration(stagecal_report_doc *d, const stagecal_calibration *cal,
                                        stagecal_error *err)
{
    if (!d || !cal || !cal->log)
        return error_set(err, STAGECAL_EINVAL, "report: missing document or calibration");
    if (d->has_calibration)
        return error_set(err, STAGECAL_EINVAL, "report: the calibration is added already");
    size_t nr = cal->log->nruns, nw = cal->evidence.n, nc = cal->res.nruns;
    d->run_cells = calloc(RUN_COLS * nr + 1, sizeof *d->run_cells);
    d->win_cells = calloc(WIN_COLS * nw + 1, sizeof *d->win_cells);
    d->clo_cells = calloc(CLO_COLS * nc + 1, sizeof *d->clo_cells);
    d->other_cells = calloc(4 * STAGECAL_FORM_MAXP, sizeof *d->other_cells);
    if (!d->run_cells || !d->win_cells || !d->clo_cells || !d->other_cells)
        return error_set(err, STAGECAL_ENOMEM, "out of memory building the report");
    d->has_calibration = 1;
    runs_table(d, cal);
    if (nw > 0)
        windows_table(d, cal);
    if (nc > 0)
        closure_table(d, cal);
    other_fit(d, cal);
    cov_note(d, cal);
    runs_verdict(d, cal);
    int rc = run_chart(d, cal, err);
    if (rc == STAGECAL_OK && cal->column)
        rc = stagecal_report_doc_set_description(d, cal->column->description);
    if (rc == STAGECAL_OK && d->oom)
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory building the report");
    return rc;
}
