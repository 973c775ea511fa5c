/*
 * cmd_calibrate.c — `stagecal calibrate`: the main job. Column file and production
 * run logs in; a correlation of effective stages against reflux ratio and vapour
 * load, with confidence and prediction bands, out as a model file under
 * fits/<column>/ and a summary a process engineer reads at a glance.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "banned.h"
#include "calibrate.h"
#include "fileio.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/calibrate.h"
#include "stagecal/report.h"
#include "stagecal/stages.h"

static const struct cli_usage usage = {
    "usage: stagecal calibrate --column FILE [options] RUNLOG.csv...\n",
    "Validates the run logs, finds quasi-steady windows, inverts every sample to effective\n"
    "stages, fits stages(R, F) on one point per window and writes a model file under\n"
    "DIR/<column id>/ (never replacing an earlier fit). HETP is reported at --reflux R and\n"
    "--f-factor F (defaults: the largest fitted R, the middle of the fitted F range).\n",
    NULL};

static const char *const method_names[] = {"auto", "stage", "composition", "censored", NULL};
static const char *const holdup_choices[] = {"auto", "none", "lag", "stages", NULL};
static const char *const cov_choices[] = {"hc2-bm", "hc3", "model", "cr2-run", NULL};
static const char *const resample_choices[] = {"case", "residual", "run", NULL};
static const char *const holdup_names[] = {"none", "lag", "stages"};

/* The holdup compensation the evidence applied, for --json. */
static json_t *holdup_json(const stagecal_calibration *cal)
{
    const stagecal_evidence_set *es = &cal->evidence;
    const stagecal_holdup_tau *tp = &es->tau_pooled;
    json_t *runs = json_array();
    for (size_t k = 0; k < es->nruns && es->tau; k++) {
        const stagecal_holdup_tau *t = &es->tau[k];
        json_t *o =
            json_pack("{s:s,s:o,s:o,s:s}", "run", cal->log->runs[k].name, "tau_min",
                      t->ok ? json_real(t->tau_s / 60) : json_null(), "se_tau_min",
                      t->ok ? json_real(t->se_tau_s / 60) : json_null(), "reason", t->reason);
        if (es->holdup_est) { /* the holdup estimated from this run's start-up */
            const stagecal_holdup_est *h = &es->holdup_est[k];
            json_object_set_new(o, "holdup_mol", h->ok ? json_real(h->holdup_mol) : json_null());
            json_object_set_new(o, "se_holdup_mol",
                                h->ok ? json_real(h->se_holdup_mol) : json_null());
            json_object_set_new(o, "holdup_reason", json_string(h->reason));
        }
        json_array_append_new(runs, o);
    }
    return json_pack("{s:s,s:o,s:o,s:I,s:o}", "compensation", holdup_names[es->holdup_kind],
                     "tau_min", tp->ok ? json_real(tp->tau_s / 60) : json_null(), "se_tau_min",
                     tp->ok ? json_real(tp->se_tau_s / 60) : json_null(), "settling_rows",
                     (json_int_t)es->n_settling, "runs", runs);
}

/* One line on the holdup compensation for the text summary. */
static void holdup_print(const stagecal_calibration *cal)
{
    const stagecal_evidence_set *es = &cal->evidence;
    const stagecal_holdup_tau *tp = &es->tau_pooled;
    size_t nok = 0;
    for (size_t k = 0; k < es->nruns && es->tau; k++)
        nok += es->tau[k].ok;
    printf("holdup: distillate compensation '%s'", holdup_names[es->holdup_kind]);
    if (tp->ok)
        printf("; start-up time constant %.3g +/- %.2g min (%zu of %zu runs)", tp->tau_s / 60,
               tp->se_tau_s / 60, nok, es->nruns);
    if (es->holdup_kind == STAGECAL_HOLDUP_COMP_STAGES && !es->holdup_est)
        printf("; column holdup %g mol, drum %g mol; %zu rows still settling left out",
               cal->column->holdup_column_mol, cal->column->holdup_drum_mol, es->n_settling);
    if (es->holdup_kind == STAGECAL_HOLDUP_COMP_STAGES && es->holdup_est)
        printf("; column holdup from each run's start-up (none stated); %zu rows still settling "
               "left out",
               es->n_settling);
    printf("\n");
    for (size_t k = 0; k < es->nruns && es->holdup_est; k++) {
        const stagecal_holdup_est *h = &es->holdup_est[k];
        if (h->ok)
            printf("  run '%s': column holdup %.4g +/- %.2g mol (start-up, %.3g stages)\n",
                   cal->log->runs[k].name, h->holdup_mol, h->se_holdup_mol, h->stages);
        else
            printf("  run '%s': no holdup estimate: %s\n", cal->log->runs[k].name, h->reason);
    }
}

static void show_progress(void *ctx, const char *stage, double done)
{
    (void)ctx;
    fprintf(stderr, "\rstagecal calibrate: %-10s %3.0f%%", stage, 100 * done);
    if (done >= 1)
        fputc('\n', stderr);
    fflush(stderr);
}

static json_t *params_json(const stagecal_regress_result *f)
{
    json_t *arr = json_array();
    for (size_t i = 0; i < f->p; i++) {
        int und = (f->undetermined >> i) & 1u; /* not determined: no numbers */
        /* one end only ("at least"): no value, no standard error, the missing end null */
        int one = !und && isfinite(f->ci_low[i]) != isfinite(f->ci_high[i]);
        json_t *o = json_pack("{s:s,s:o,s:o,s:o,s:o,s:b}", "name", f->form.param_names[i], "value",
                              und || one ? json_null() : cli_json_real(f->theta[i]), "se",
                              und || one ? json_null() : cli_json_real(f->se[i]), "ci_low",
                              und ? json_null() : cli_json_real(f->ci_low[i]), "ci_high",
                              und ? json_null() : cli_json_real(f->ci_high[i]), "determined", !und);
        if (!und && !one) /* the t dof of this parameter's interval */
            json_object_set_new(o, "dof", cli_json_real(f->param_dof[i]));
        if (one)
            json_object_set_new(o, "one_sided",
                                json_string(isfinite(f->ci_low[i]) ? "lower" : "upper"));
        json_array_append_new(arr, o);
    }
    return arr;
}

static json_t *fit_json(const stagecal_regress_result *f, int status, const char *message)
{
    if (status != STAGECAL_OK)
        return json_pack("{s:s,s:s}", "status", status < 0 ? "not run" : "failed", "message",
                         message);
    json_t *o = json_object();
    json_object_set_new(o, "status", json_string("ok"));
    json_object_set_new(o, "form", json_string(f->form.name));
    json_t *params = params_json(f);
    cli_json_bootstrap(f, params, o); /* --bootstrap: the stage-space fit's resamples */
    json_object_set_new(o, "parameters", params);
    json_object_set_new(o, "rss", cli_json_real(f->rss));
    json_object_set_new(o, "sigma", cli_json_real(f->sigma_obs > 0 ? f->sigma_obs : f->sigma));
    json_object_set_new(o, "dof", cli_json_real(f->dof));
    json_object_set_new(o, "covariance", json_string(stagecal_regress_cov_name(f->cov_kind)));
    json_object_set_new(o, "n", json_integer((json_int_t)f->n));
    json_object_set_new(o, "stop", json_string(stagecal_regress_stop_text(f->stop)));
    return o;
}

/* The censored-likelihood fit's evidence and its stages at the reference condition
 * (--json): the missing end of a one-sided interval is null. */
static json_t *cens_json(const stagecal_calibration *cal)
{
    const stagecal_censored_interval *a = &cal->cens_at;
    int one = a->low_bounded != a->high_bounded;
    return json_pack("{s:I,s:I,s:I,s:b,s:{s:o,s:o,s:o,s:o,s:o,s:f,s:s}}", "windows",
                     (json_int_t)cal->cens.n_windows, "readings", (json_int_t)cal->cens.n_readings,
                     "censored_readings", (json_int_t)cal->cens.n_censored, "one_sided",
                     cal->cens.one_sided, "stages_at", "r", cli_json_reflux(cal->cens_r), "f",
                     cal->cens_fit.f_max > 0 ? json_real(cal->cens_f) : json_null(), "value",
                     one ? json_null() : cli_json_real(a->value), "low",
                     a->low_bounded ? json_real(a->low) : json_null(), "high",
                     a->high_bounded ? json_real(a->high) : json_null(), "level", a->level,
                     "interval",
                     one ? (a->low_bounded ? "one-sided: at least low" : "one-sided: at most high")
                         : "two-sided profile likelihood");
}

/* "at least N stages" / the two-sided interval at the reference condition (text). */
static void cens_print(const stagecal_calibration *cal)
{
    const stagecal_censored_interval *a = &cal->cens_at;
    char rr[32];
    cli_format_reflux(rr, sizeof rr, cal->cens_r, 4);
    printf("censored likelihood: %zu readings in %zu windows, %zu censored\n", cal->cens.n_readings,
           cal->cens.n_windows, cal->cens.n_censored);
    if (a->low_bounded && !a->high_bounded)
        printf("stages at R = %s: AT LEAST %.4g (one-sided %.0f %%; the evidence gives no upper "
               "end)\n",
               rr, a->low, 100 * a->level);
    else if (!a->low_bounded && a->high_bounded)
        printf("stages at R = %s: AT MOST %.4g (one-sided %.0f %%; the evidence gives no lower "
               "end)\n",
               rr, a->high, 100 * a->level);
    else if (a->low_bounded)
        printf("stages at R = %s: %.4g (%.0f %% profile-likelihood interval %.4g to %.4g)\n", rr,
               a->value, 100 * a->level, a->low, a->high);
    else
        printf("stages at R = %s: not determined\n", rr);
}

static void print_fit(const char *title, const stagecal_regress_result *f)
{
    printf("%s\n", title);
    cli_print_params(f, 0);
    printf("  residual sigma %.4g stages, %g degrees of freedom, %zu windows; standard errors "
           "from %s\n",
           f->sigma_obs > 0 ? f->sigma_obs : f->sigma, f->dof, f->n,
           stagecal_regress_cov_label(f->cov_kind));
    cli_print_bootstrap(f); /* --bootstrap: the stage-space fit's resamples */
}

/* The two fits side by side in words: the largest difference of a parameter in combined
 * standard errors √(se_c² + se_s²) (treated as independent, which overstates the spread of
 * the difference of two fits of the same data, so "agree" is the cautious reading), and
 * what differs between the two estimators. */
static void print_agreement(const stagecal_calibration *cal)
{
    const stagecal_regress_result *c = &cal->comp_fit, *s = &cal->stage_fit;
    double worst = -1;
    size_t iw = 0;
    for (size_t i = 0; i < c->p && i < s->p; i++) {
        double se = sqrt(c->se[i] * c->se[i] + s->se[i] * s->se[i]);
        double z = se > 0 ? fabs(c->theta[i] - s->theta[i]) / se : 0;
        if (isfinite(z) && z > worst)
            worst = z, iw = i;
    }
    if (worst < 0)
        return;
    printf("the two fits %s: the largest difference, in %s, is %.2f combined standard "
           "errors\n",
           worst <= 2 ? "agree within their uncertainties"
                      : "differ by more than their uncertainties",
           c->form.param_names[iw], worst);
    printf("  (the composition fit steps down from every logged distillate of all %zu windows, "
           "with the analyser noise's convexity term taken out; the stage-space fit inverts the "
           "smoothed compositions of the %zu windows with stage counts%s)\n",
           cal->evidence.n, cal->nev_stage,
           cal->nev_stage < cal->evidence.n ? ", and windows at a pinch have none" : "");
}

static int print_findings(const stagecal_findings *f, int errors_only)
{
    size_t shown = 0;
    for (size_t i = 0; i < f->n && shown < 20; i++) {
        if (errors_only && f->items[i].severity != STAGECAL_FINDING_ERROR)
            continue;
        if (f->items[i].severity == STAGECAL_FINDING_ERROR)
            cli_error("%s", f->items[i].text);
        else
            cli_warn("%s", f->items[i].text);
        shown++;
    }
    return (int)shown;
}

/* The windows' stage counts as points (for the report and --points-out); buf is freed
 * by the caller. NULL when out of memory. */
static double *window_points(const stagecal_calibration *cal, stagecal_regress_data *pts)
{
    double *buf = malloc((cal->evidence.n ? cal->evidence.n : 1) * 4 * sizeof *buf);
    if (buf)
        stagecal_evidence_points(cal->evidence.ev, cal->evidence.n, buf, pts);
    else
        cli_error("out of memory");
    return buf;
}

/* The HTML report of the calibration, with the windows' stage counts as its points,
 * complete in the temporary file a (published later). */
static int write_report(const stagecal_calibration *cal, atomic_file *a, const char *path)
{
    stagecal_regress_data pts;
    stagecal_report_doc *doc = NULL;
    stagecal_error err;
    char *html = NULL;
    size_t n = 0;
    double *buf = window_points(cal, &pts);
    int rc;
    if (!buf)
        return CLI_EXIT_SOFTWARE;
    stagecal_error_clear(&err);
    rc = stagecal_report_from_model(&cal->model, pts.n ? &pts : NULL, &doc, &err);
    if (rc == STAGECAL_OK)
        rc = stagecal_report_doc_add_calibration(doc, cal, &err);
    if (rc == STAGECAL_OK)
        rc = stagecal_report_html(stagecal_report_doc_content(doc), NULL, &html, &n, &err);
    if (rc == STAGECAL_OK)
        rc = atomic_write(a, html, n, path, &err);
    free(html);
    stagecal_report_doc_free(doc);
    free(buf);
    return rc == STAGECAL_OK ? CLI_EXIT_OK : cli_fail(&err);
}

/* The points file (R,F,stages,sigma) of the windows, into the temporary file a. */
static int write_points(const stagecal_calibration *cal, atomic_file *a, const char *path)
{
    stagecal_regress_data pts;
    stagecal_error err;
    double *buf = window_points(cal, &pts);
    if (!buf)
        return CLI_EXIT_SOFTWARE;
    FILE *out = atomic_stream(a, &err);
    if (out) {
        fprintf(out, "R,F,stages,sigma\n");
        for (size_t i = 0; i < pts.n; i++) {
            if (isinf(pts.r[i]))
                fprintf(out, "inf,");
            else
                fprintf(out, "%.17g,", pts.r[i]);
            if (pts.f_load)
                fprintf(out, "%.17g", pts.f_load[i]);
            fprintf(out, ",%.17g,%.17g\n", pts.stages[i], pts.sigma[i]);
        }
    }
    free(buf);
    if (!out || ferror(out)) {
        cli_error("cannot write '%s'", path);
        return CLI_EXIT_CANTCREAT;
    }
    return CLI_EXIT_OK;
}

/* The outputs besides the model file, each complete in a temporary file in its folder
 * before any is published: a run that fails leaves none of them behind. */
enum { OUT_SAMPLES, OUT_POINTS, OUT_REPORT, OUT_N };
static const char *const out_opt[OUT_N] = {"samples-out", "points-out", "report-out"};

/* Writes every requested output into its temporary file; an exit code. early: the samples
 * file was opened before the calibration, which streamed the samples into it (params.samples);
 * a held calibration writes them now. */
static int prepare_outputs(const stagecal_calibration *cal, int early,
                           const char *const path[OUT_N], atomic_file out[OUT_N])
{
    stagecal_error err;
    for (int k = 0; k < OUT_N; k++)
        if (path[k] && !(k == OUT_SAMPLES && early) &&
            atomic_open(&out[k], path[k], &err) != STAGECAL_OK)
            return cli_fail(&err);
    if (path[OUT_SAMPLES]) {
        FILE *f = atomic_stream(&out[OUT_SAMPLES], &err);
        /* (streamed without the file open: cannot be written any more) */
        if (!f || (cal->streamed ? !early
                                 : stagecal_runlog_write_csv(cal->log, cal->column, &cal->res, f,
                                                             &err) != STAGECAL_OK)) {
            cli_error("cannot write '%s'", path[OUT_SAMPLES]);
            return CLI_EXIT_CANTCREAT;
        }
    }
    int rc = CLI_EXIT_OK;
    if (path[OUT_POINTS] && (rc = write_points(cal, &out[OUT_POINTS], path[OUT_POINTS])))
        return rc;
    if (path[OUT_REPORT] && (rc = write_report(cal, &out[OUT_REPORT], path[OUT_REPORT])))
        return rc;
    return CLI_EXIT_OK;
}

/* Publishes the prepared outputs (each replaces a file of its name, docs/cli.md). When
 * one fails, the model file of this run (model_path, when not "") is removed again;
 * outputs already published are named as kept. An exit code. */
static int publish_outputs(const char *const path[OUT_N], atomic_file out[OUT_N],
                           const char *model_path)
{
    stagecal_error err;
    for (int k = 0; k < OUT_N; k++) {
        if (!path[k] || atomic_publish(&out[k], path[k], ATOMIC_REPLACE, NULL, &err) == 0)
            continue;
        int rc = cli_fail(&err);
        if (model_path[0] && unlink(model_path) == 0)
            cli_error("the model file '%s' of this run was removed again", model_path);
        for (int j = 0; j < k; j++)
            if (path[j])
                cli_error("'%s' (--%s) was written before the failure and is kept", path[j],
                          out_opt[j]);
        return rc;
    }
    return CLI_EXIT_OK;
}

static char *join_args(int argc, char **argv)
{
    size_t len = 16;
    for (int i = 0; i < argc; i++)
        len += strlen(argv[i]) + 1;
    char *s = malloc(len), *p = s;
    if (!s)
        return NULL;
    p += snprintf(p, len, "stagecal");
    for (int i = 0; i < argc; i++)
        p += snprintf(p, len - (size_t)(p - s), " %s", argv[i]);
    return s;
}

/* What the command line asked for besides the library's parameters. */
struct request {
    const char *column, *fits, *out[OUT_N];
    int dry;
};

static int print_json(const stagecal_calibration *cal, const char *path, const struct request *rq)
{
    const stagecal_model *mo = &cal->model;
    const stagecal_regress_result *fit = stagecal_calibration_fit(cal);
    json_t *doc = json_object(), *warn = json_array(), *rank = json_array();
    json_object_set_new(doc, "format", json_string("stagecal-calibration"));
    json_object_set_new(doc, "version", json_integer(1));
    json_object_set_new(doc, "column", json_string(mo->column_id));
    json_object_set_new(doc, "model_file", path[0] ? json_string(path) : json_null());
    json_object_set_new(doc, "report",
                        rq->out[OUT_REPORT] ? json_string(rq->out[OUT_REPORT]) : json_null());
    json_object_set_new(doc, "method", json_string(stagecal_model_method_name(cal->used)));
    json_object_set_new(doc, "form", json_string(fit->form.name));
    json_object_set_new(doc, "parameters", params_json(fit));
    json_object_set_new(doc, "rss", cli_json_real(fit->rss));
    json_object_set_new(doc, "sigma", cli_json_real(mo->sigma));
    json_object_set_new(doc, "dof", cli_json_real(mo->dof));
    json_object_set_new(doc, "level", json_real(mo->level));
    json_object_set_new(doc, "stage_space",
                        fit_json(&cal->stage_fit, cal->stage_status, cal->stage_message));
    json_object_set_new(doc, "composition_space",
                        fit_json(&cal->comp_fit, cal->comp_status, cal->comp_message));
    json_object_set_new(
        doc, "evidence",
        json_pack("{s:I,s:I,s:I,s:I,s:I,s:I,s:I,s:I}", "samples", (json_int_t)cal->log->n, "runs",
                  (json_int_t)cal->log->nruns, "windows", (json_int_t)cal->evidence.n,
                  "windows_with_stages", (json_int_t)cal->nev_stage, "samples_in_fit",
                  (json_int_t)mo->n_samples, "pinch_samples",
                  (json_int_t)cal->res.count[STAGECAL_STAGES_PINCH], "azeotrope_samples",
                  (json_int_t)cal->res.count[STAGECAL_STAGES_AZEOTROPE], "censored_samples",
                  (json_int_t)cal->res.count[STAGECAL_RUNLOG_CENSORED]));
    if (cal->used == STAGECAL_MODEL_CENSORED)
        json_object_set_new(doc, "censored", cens_json(cal));
    json_object_set_new(doc, "run_test", calibrate_run_test_json(&cal->run_test));
    json_object_set_new(doc, "holdup", holdup_json(cal));
    json_object_set_new(doc, "inferred", cli_soft_json(&cal->log->soft));
    json_t *fl = json_array();
    for (size_t k = 0; k < cal->nflagged; k++) {
        const stagecal_flagged_run *f = &cal->flagged[k];
        json_array_append_new(fl, json_pack("{s:s,s:I,s:b,s:s}", "run", cal->log->runs[f->run].name,
                                            "windows", (json_int_t)f->windows, "left_out",
                                            f->left_out, "reason", f->reason));
    }
    json_object_set_new(doc, "flagged_runs", fl);
    json_object_set_new(doc, "envelope",
                        json_pack("{s:o,s:o,s:o,s:o}", "r_min", cli_json_reflux(mo->r_min), "r_max",
                                  cli_json_reflux(mo->r_max), "f_min",
                                  mo->has_load ? json_real(mo->f_min) : json_null(), "f_max",
                                  mo->has_load ? json_real(mo->f_max) : json_null()));
    if (mo->has_hetp)
        json_object_set_new(doc, "hetp",
                            json_pack("{s:o,s:o,s:o,s:o,s:o,s:o}", "height_m",
                                      json_real(mo->height_m), "r", cli_json_reflux(mo->hetp_r),
                                      "f", json_real(mo->hetp_f), "hetp_m", json_real(mo->hetp_m),
                                      "low_m", json_real(mo->hetp_low_m), "high_m",
                                      cli_json_real(mo->hetp_high_m)));
    for (size_t i = 0; i < cal->nrank; i++)
        json_array_append_new(rank,
                              json_pack("{s:s,s:b,s:o,s:o,s:o}", "form", cal->rank[i].form.name,
                                        "ok", cal->rank[i].status == STAGECAL_OK, "aicc",
                                        cli_json_real(cal->rank[i].aicc), "delta_aicc",
                                        cli_json_real(cal->rank[i].delta_aicc), "bic",
                                        cli_json_real(cal->rank[i].bic)));
    json_object_set_new(doc, "form_ranking", rank);
    for (size_t i = 0; i < mo->n_warnings; i++)
        json_array_append_new(warn, json_string(mo->warnings[i]));
    json_object_set_new(doc, "warnings", warn);
    json_object_set_new(doc, "findings",
                        json_pack("{s:I,s:I}", "errors", (json_int_t)cal->findings->n_errors,
                                  "warnings", (json_int_t)cal->findings->n_warnings));
    json_object_set_new(doc, "stage_convention",
                        json_string(stagecal_convention_text(mo->condenser)));
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return cli_json_print(doc);
}

static void print_text(const stagecal_calibration *cal, const char *path, const struct request *rq,
                       size_t nlogs)
{
    const stagecal_model *mo = &cal->model;
    const stagecal_regress_result *fit = stagecal_calibration_fit(cal);
    char rlo[32], rhi[32];
    cli_format_reflux(rlo, sizeof rlo, mo->r_min, 4);
    cli_format_reflux(rhi, sizeof rhi, mo->r_max, 4);
    printf("stagecal calibration of column %s (%s / %s)\n", mo->column_id, mo->light, mo->heavy);
    printf("evidence: %zu samples in %zu runs from %zu log(s); %zu quasi-steady windows "
           "(%zu with stage counts) carry the fit\n",
           cal->log->n, cal->log->nruns, nlogs, cal->evidence.n, cal->nev_stage);
    printf("per-sample status: %zu ok, %zu pinch, %zu azeotrope, %zu invalid, %zu censored\n",
           cal->res.count[0], cal->res.count[1], cal->res.count[2], cal->res.count[3],
           cal->res.count[STAGECAL_RUNLOG_CENSORED]);
    holdup_print(cal);
    const stagecal_runlog_soft *so = &cal->log->soft;
    if (so->xd_inferred || so->xb_inferred || so->checks)
        printf("inferred from temperatures: xD %zu rows (%zu censored), xB %zu rows (%zu "
               "censored); sensors checked in %zu run(s), %zu inconsistent\n",
               so->xd_inferred, so->xd_censored, so->xb_inferred, so->xb_censored, so->checks,
               so->inconsistent);
    for (size_t k = 0; k < cal->nflagged; k++) {
        const stagecal_flagged_run *f = &cal->flagged[k];
        printf("%s run '%s' (%zu window%s): %s\n",
               f->left_out ? "left out:" : "kept (flagged):", cal->log->runs[f->run].name,
               f->windows, f->windows == 1 ? "" : "s", f->reason);
    }
    if (cal->nrank > 0) {
        printf("forms ranked by AICc (stage space):");
        for (size_t i = 0; i < cal->nrank && i < 4; i++)
            if (cal->rank[i].status == STAGECAL_OK)
                printf(" %s (dAICc %.1f)%s", cal->rank[i].form.name, cal->rank[i].delta_aicc,
                       i + 1 < cal->nrank && i < 3 ? "," : "");
        putchar('\n');
    }
    printf("\nform: %s   fit: %s\n", fit->form.name, stagecal_model_method_name(cal->used));
    if (cal->used == STAGECAL_MODEL_CENSORED) /* no residual σ behind its intervals */
        cli_print_params(fit, 0);
    else
        print_fit("", fit);
    if (cal->used == STAGECAL_MODEL_COMPOSITION_SPACE && cal->stage_status == STAGECAL_OK) {
        print_fit("\nfor comparison, the stage-space fit:", &cal->stage_fit);
        print_agreement(cal);
    } else if (cal->used == STAGECAL_MODEL_COMPOSITION_SPACE)
        printf("\nstage-space fit: %s\n", cal->stage_message);
    if (cal->used == STAGECAL_MODEL_CENSORED)
        cens_print(cal);
    calibrate_print_run_test(cal);
    printf("\nenvelope (fitted conditions): R %s to %s", rlo, rhi);
    if (mo->has_load)
        printf(", F %.3g to %.3g Pa^0.5", mo->f_min, mo->f_max);
    printf("\n");
    if (mo->scatter.n > 0) /* σ of the prediction band by R, at the envelope's ends */
        printf("one new window scatters about the curve by sigma %.3g stages at R = %s (%.1f "
               "dof) and %.3g at R = %s (%.1f dof): the prediction bands' sigma by R\n",
               stagecal_scatter_sd(&mo->scatter, mo->r_min), rlo,
               fmin(stagecal_scatter_dof(&mo->scatter, mo->r_min), mo->dof),
               stagecal_scatter_sd(&mo->scatter, mo->r_max), rhi,
               fmin(stagecal_scatter_dof(&mo->scatter, mo->r_max), mo->dof));
    if (mo->has_hetp) {
        char rr[32], ff[48] = "";
        cli_format_reflux(rr, sizeof rr, mo->hetp_r, 4);
        if (mo->has_load)
            snprintf(ff, sizeof ff, ", F = %.3g Pa^0.5", mo->hetp_f);
        printf("HETP at R = %s%s: %.3f m (%.0f%% interval %.3f to %.3g m), packed height "
               "%.3g m\n",
               rr, ff, mo->hetp_m, 100 * mo->hetp_level, mo->hetp_low_m, mo->hetp_high_m,
               mo->height_m);
    }
    printf("stage convention: %s\n", stagecal_convention_text(mo->condenser));
    for (size_t i = 0; i < mo->n_warnings; i++)
        printf("warning: %s\n", mo->warnings[i]);
    if (rq->out[OUT_REPORT])
        printf("\nreport: %s\n", rq->out[OUT_REPORT]);
    if (path[0])
        printf("\nmodel file: %s\n", path);
    else
        printf("\nmodel file: not written (--dry-run)\n");
}

/* Calibrates, writes the model file and the other outputs, prints. An exit code. */
/* Appends to a failed fit's message what the evidence holds: the windows with a stage count,
 * per run why it gave none (rows in warm-up, no quasi-steady stretch, stretches shorter than
 * the shortest window, windows without a stage count), and which setting would help. */
static void evidence_hint(const stagecal_calibration *cal, stagecal_error *err)
{
    const stagecal_runlog *log = cal->log;
    if (!log || !cal->run_rows)
        return;
    char buf[sizeof err->text];
    size_t len = 0, nstage = 0, short_runs = 0, warm_runs = 0;
    for (size_t i = 0; i < cal->evidence.n; i++)
        nstage += cal->evidence.ev[i].stages_ok != 0;
    int w = snprintf(buf, sizeof buf, "%s; evidence: %zu windows with a stage count in %zu runs",
                     err->text, nstage, log->nruns);
    len = w > 0 && (size_t)w < sizeof buf ? (size_t)w : sizeof buf - 1;
    for (size_t k = 0; k < log->nruns && len + 200 < sizeof buf; k++) {
        const stagecal_runlog_run *r = &log->runs[k];
        size_t warm = cal->run_rows[k].warm, steady = cal->run_rows[k].steady,
               longest = cal->run_rows[k].longest, nwin = 0, nok = 0;
        for (size_t i = 0; i < cal->evidence.n; i++)
            if (cal->evidence.ev[i].run == k) {
                nwin++;
                nok += cal->evidence.ev[i].stages_ok != 0;
            }
        if (nok > 0)
            continue;
        short_runs += steady > 0 && nwin == 0;
        warm_runs += 2 * warm >= r->n;
        w = snprintf(buf + len, sizeof buf - len,
                     "; run '%s' %zu rows: %zu warm-up, %zu steady (longest %zu), %zu windows",
                     r->name, r->n, warm, steady, longest, nwin);
        len += w > 0 && (size_t)w < sizeof buf - len ? (size_t)w : sizeof buf - len - 1;
    }
    if (len + 1 < sizeof buf)
        snprintf(buf + len, sizeof buf - len, "%s%s%s",
                 short_runs ? "; try a shorter --min-window (e.g. 40min)" : "",
                 warm_runs ? "; try a shorter --warm-up (e.g. 30min)" : "",
                 short_runs || warm_runs ? "" : "; add runs at other reflux ratios or loads");
    snprintf(err->text, sizeof err->text, "%s", buf);
}

static int run(int argc, char **argv, int first, stagecal_calibrate_params *par,
               const struct request *rq, int json)
{
    const char *const *logs = (const char *const *)(argv + first);
    size_t nlogs = (size_t)(argc - first);
    int rc;
    /* an output written over an input would destroy it */
    for (int k = 0; k < OUT_N; k++)
        if ((rc = cli_check_output(out_opt[k], rq->out[k], logs, nlogs)) ||
            (rc = cli_check_output(out_opt[k], rq->out[k], &rq->column, 1)))
            return rc;
    if (cli_progress_enabled()) {
        par->progress = show_progress;
        par->progress_ctx = NULL;
    }
    stagecal_calibration cal;
    stagecal_error err;
    stagecal_error_clear(&err);
    atomic_file out[OUT_N];
    for (int k = 0; k < OUT_N; k++)
        atomic_init(&out[k]);
    /* run by run (memory bounded by a batch of runs and the windows, not the logs), unless the
     * report's per-sample charts need the rows; the samples go straight into the temporary file
     * of --samples-out, published with the other outputs or not at all (when it cannot be
     * opened now, the calibration streams without it and the failure is reported where it
     * always was, after the calibration) */
    par->stream = !rq->out[OUT_REPORT];
    par->samples = NULL;
    int early = 0;
    if (par->stream && rq->out[OUT_SAMPLES]) {
        stagecal_error e0;
        if (atomic_open(&out[OUT_SAMPLES], rq->out[OUT_SAMPLES], &e0) == STAGECAL_OK &&
            (par->samples = atomic_stream(&out[OUT_SAMPLES], &e0)) != NULL) {
            early = 1;
        } else {
            atomic_discard(&out[OUT_SAMPLES]);
            atomic_init(&out[OUT_SAMPLES]);
        }
    }
    rc = stagecal_calibrate(rq->column, logs, nlogs, par, &cal, &err);
    par->samples = NULL;
    if (rc != STAGECAL_OK) {
        if (par->progress)
            fputc('\n', stderr);
        if (cal.findings && cal.findings->n_errors > 0) {
            print_findings(cal.findings, 1);
            cli_error("%zu error(s) in the run logs; nothing was fitted or written",
                      cal.findings->n_errors);
            stagecal_calibration_free(&cal);
            atomic_discard(&out[OUT_SAMPLES]);
            return CLI_EXIT_DATA;
        }
        if (rc == STAGECAL_EDATA)
            evidence_hint(&cal, &err);
        stagecal_calibration_free(&cal);
        atomic_discard(&out[OUT_SAMPLES]);
        return cli_fail(&err);
    }
    if (!cli_quiet && cal.findings->n_warnings > 0)
        print_findings(cal.findings, 0);

    char path[4096] = "";
    rc = prepare_outputs(&cal, early, rq->out, out);
    if (rc == CLI_EXIT_OK && !rq->dry) {
        char dir[4096];
        char *cmdline = join_args(argc, argv);
        snprintf(dir, sizeof dir, "%s/%s", rq->fits, cal.model.column_id);
        stagecal_model_set_command_line(&cal.model, cmdline, NULL);
        free(cmdline);
        if (stagecal_model_write(&cal.model, dir, path, sizeof path, &err) != STAGECAL_OK)
            rc = cli_fail(&err);
    }
    if (rc == CLI_EXIT_OK)
        rc = publish_outputs(rq->out, out, path);
    if (rc == CLI_EXIT_OK && rq->out[OUT_SAMPLES])
        cli_no_load_summary("stagecal calibrate", cal.column);
    for (int k = 0; k < OUT_N; k++)
        atomic_discard(&out[k]);
    if (rc == CLI_EXIT_OK && json)
        rc = print_json(&cal, path, rq);
    else if (rc == CLI_EXIT_OK)
        print_text(&cal, path, rq, nlogs);
    stagecal_calibration_free(&cal);
    return rc;
}

int cmd_calibrate(int argc, char **argv, cli_ctx *ctx)
{
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    struct request rq = {NULL, "fits", {NULL, NULL, NULL}, 0};
    long boot = 0, seed = (long)par.seed, threads = -1;
    int dialect = 0, no_infer = 0;
    int method = 0, robust = -1, holdup = 0, cov = 0, resample = -1, first, rc;
    const struct cli_option opts[] = {
        OPT_COLUMN(&rq.column, "the column file (docs/column-file.md), required"),
        OPT_FORM(&par.form, "correlation form (docs/forms.md) or 'auto' (default: rank\n"
                            "the candidate forms by AICc)"),
        OPT_CHOICE("method", &method, "M",
                   "auto (default: composition space, falling back to stage\n"
                   "space), composition, stage, or censored (readings at an\n"
                   "analyser's limit taken as bounds: 'at least N stages')",
                   method_names, "a method"),
        OPT_LEVEL(&par.level),
        OPT_MURPHREE(&par.murphree),
        OPT_CHOICE("holdup", &holdup, "MODE",
                   "compensate the distillate for column holdup: auto (default:\n"
                   "'stages' when the column file states a holdup, else 'lag' with\n"
                   "the time constant of the total-reflux start-ups), none, lag or\n"
                   "stages (without a holdup in the column file: each run's holdup\n"
                   "from its start-up) (docs/methods.md, \"Column holdup\")",
                   holdup_choices, "a holdup mode"),
        OPT_CHOICE("covariance", &cov, "KIND",
                   "covariance of the fitted parameters: hc2-bm (default: the\n"
                   "HC2 sandwich from each window's own residual, right when\n"
                   "the windows' stated errors are off between reflux ratios,\n"
                   "with Student t at each band's Bell-McCaffrey degrees of\n"
                   "freedom), hc3 (the HC3 sandwich, t at n - p), model\n"
                   "(s^2 times the inverse information) or cr2-run (the CR2\n"
                   "sandwich clustered by run: windows of one run may share an\n"
                   "error, e.g. a batch's own offset; t at each band's\n"
                   "Bell-McCaffrey dof, at most runs - 1; both fits, not\n"
                   "--method censored; fewer than 4 runs with windows: hc2-bm\n"
                   "with a warning)",
                   cov_choices, "a covariance"),
        OPT_BOOTSTRAP(&boot),
        OPT_CHOICE("resample", &resample, "KIND",
                   "what the bootstrap draws: case (default: windows, as if\n"
                   "independent), residual (standardised residuals onto the fit)\n"
                   "or run (whole runs, every window of a drawn run kept: for\n"
                   "runs that differ, still short of the level with few runs;\n"
                   "fewer than 4 runs with stage counts: case with a warning)",
                   resample_choices, "a resampling"),
        OPT_SEED(&seed),
        OPT_ROBUST(&robust),
        OPT_REFLUX(&par.hetp_r, "reflux ratio at which HETP is reported, > 0 or 'inf'\n"
                                "(default: the largest fitted)"),
        OPT_ALIAS("reference-reflux", "reflux"),
        OPT_FFACTOR(&par.hetp_f, "F-factor [Pa^0.5] at which HETP is reported (default: the\n"
                                 "middle of the fitted range)"),
        OPT_ALIAS("reference-load", "f-factor"),
        OPT_FITS(&rq.fits),
        OPT_STRING(0, "samples-out", &rq.out[OUT_SAMPLES], "FILE",
                   "also write the per-sample inversion as CSV"),
        OPT_STRING(0, "points-out", &rq.out[OUT_POINTS], "FILE",
                   "also write the windows' stage counts as a points file\n"
                   "(R,F,stages,sigma; for 'stagecal report --points')"),
        OPT_STRING(0, "report-out", &rq.out[OUT_REPORT], "FILE.html",
                   "also write the calibration's HTML report (charts, fit table,\n"
                   "provenance, warnings, caution)"),
        OPT_ALIAS("report", "report-out"),
        OPT_FLAG(0, "dry-run", &rq.dry, "fit and summarise, write no model file"),
        OPT_FLAG(0, "allow-undetermined", &par.allow_undetermined,
                 "keep a fit whose evidence does not determine a parameter (the model\n"
                 "file carries a NOT DETERMINED warning); without it such a fit is\n"
                 "refused (exit 65) with what would determine it"),
        OPT_KEEP_FLAGGED(&par.keep_flagged),
        OPT_WARM_UP(&par.analysis.warmup_s),
        OPT_MIN_WINDOW(&par.analysis.min_window_s),
        OPT_CSV_DIALECT(&dialect),
        OPT_NO_INFER(&no_infer),
        OPT_THREADS(&threads, "threads beside the main one: row inversions, drift checks, window\n"
                              "stage counts, the composition fit and the bootstrap's refits"),
        OPT_END_COMMON(ctx),
    };
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    par.threads = (size_t)cli_threads(threads);
    par.bootstrap = (size_t)boot;
    if (resample >= 0 && boot == 0)
        return cli_usage_error("option '--resample' needs '--bootstrap B' (B > 0 resamples)");
    par.boot_kind = resample == 2   ? STAGECAL_BOOT_RUN
                    : resample == 1 ? STAGECAL_BOOT_RESIDUAL
                                    : STAGECAL_BOOT_CASE;
    par.read.csv_separator = cli_csv_separator(dialect);
    par.read.infer = !no_infer;
    par.seed = (unsigned long)seed;
    par.robust = cli_robust_kind(robust);
    par.cov_kind = cov == 3   ? STAGECAL_COV_CR2_RUN
                   : cov == 2 ? STAGECAL_COV_MODEL
                   : cov == 1 ? STAGECAL_COV_HC3
                              : STAGECAL_COV_HC2_BM;
    par.evidence.holdup = holdup == 0 ? STAGECAL_EVIDENCE_HOLDUP_AUTO : holdup - 1;
    par.method = method == 1   ? STAGECAL_CAL_STAGE
                 : method == 2 ? STAGECAL_CAL_COMPOSITION
                 : method == 3 ? STAGECAL_CAL_CENSORED
                               : STAGECAL_CAL_AUTO;
    if (par.hetp_r == 0)
        return cli_usage_error("option '--reflux': 0 is not positive (expected R > 0 or 'inf', "
                               "the condition at which HETP is reported)");
    if (!rq.column)
        return cli_usage_error("option '--column' is required (see 'stagecal calibrate --help')");
    if (first >= argc)
        return cli_usage_error("no run log given (expected one or more RUNLOG.csv files)");
    if (strcmp(par.form, "auto") != 0) {
        stagecal_form f;
        stagecal_error fe;
        if (stagecal_form_parse(par.form, &f, &fe) != STAGECAL_OK)
            return cli_usage_error("option '--form': %s", fe.text);
    }
    return run(argc, argv, first, &par, &rq, ctx->json);
}
