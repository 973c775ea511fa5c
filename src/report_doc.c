/*
 * report_doc.c — the report of a model file (see stagecal/report.h): the sections, the
 * charts (fit, residuals, one per stated condition) and the warnings assembled from a
 * model and the points it was fitted to; report.c renders them as HTML.
 */
#include "stagecal/report.h"

#include <gsl/gsl_cdf.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/convention.h"
#include "stagecal/hetp.h"
#include "stagecal/stages.h"
#include "stagecal/version.h"
#include "stagecal/vle.h"
#include "fileio.h"
#include "internal.h"
#include "report_internal.h"

#define DOC_GRID 121 /* points of the fitted curve */

const char *report_doc_str(stagecal_report_doc *d, const char *fmt, ...)
{
    if (d->oom)
        return "";
    if (d->n_strs == d->cap_strs) {
        size_t cap = d->cap_strs ? 2 * d->cap_strs : 64;
        char **p = realloc(d->strs, cap * sizeof *p);
        if (!p) {
            d->oom = 1;
            return "";
        }
        d->strs = p;
        d->cap_strs = cap;
    }
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    char *s = n >= 0 ? malloc((size_t)n + 1) : NULL;
    if (!s) {
        d->oom = 1;
        return "";
    }
    va_start(ap, fmt);
    vsnprintf(s, (size_t)n + 1, fmt, ap);
    va_end(ap);
    d->strs[d->n_strs++] = s;
    return s;
}

void stagecal_report_doc_free(stagecal_report_doc *d)
{
    if (!d)
        return;
    for (size_t i = 0; i < d->n_strs; i++)
        free(d->strs[i]);
    free(d->strs);
    free(d->in_cells);
    free(d->fit_cells);
    free(d->pt_cells);
    free(d->warn);
    free(d->run_cells);
    free(d->win_cells);
    free(d->clo_cells);
    free(d->other_cells);
    for (size_t i = 0; i < d->n_charts; i++)
        stagecal_plot_chart_free(d->charts[i]);
    free(d);
}

const stagecal_report *stagecal_report_doc_content(const stagecal_report_doc *d)
{
    return d ? &d->rep : NULL;
}

const stagecal_plot_chart *stagecal_report_doc_chart(const stagecal_report_doc *d, size_t k)
{
    return d && k < d->n_charts ? d->charts[k] : NULL;
}

const char *report_doc_fmt_r(stagecal_report_doc *d, double r)
{
    return isinf(r) ? "inf (total reflux)" : report_doc_str(d, "%.4g", r);
}

void report_doc_add_item(stagecal_report_item *items, size_t *n, const char *key, const char *value)
{
    if (*n < DOC_MAX_ITEMS) {
        items[*n].key = key;
        items[*n].value = value;
        (*n)++;
    }
}

static void add_warning(stagecal_report_doc *d, const char *w)
{
    if (d->rep.n_warnings < DOC_MAX_WARN)
        d->warn[d->rep.n_warnings++] = w;
}

/* Curve of the model against R with bands; NAN where the form is undefined. */
static int doc_fit_chart(stagecal_report_doc *d, const stagecal_model *m,
                         const stagecal_regress_data *pts, double f_mid, stagecal_error *err)
{
    double grid[DOC_GRID], fit[DOC_GRID], clo[DOC_GRID], chi[DOC_GRID], plo[DOC_GRID],
        phi[DOC_GRID];
    double hi = isfinite(m->r_max) ? m->r_max : fmax(3 * m->r_min, 1.0);
    for (size_t i = 0; pts && i < pts->n; i++)
        if (isfinite(pts->r[i]))
            hi = fmax(hi, pts->r[i]);
    hi *= 1.25;
    double lo = 0.5 * m->r_min;
    for (size_t i = 0; i < DOC_GRID; i++) {
        stagecal_model_point p;
        grid[i] = lo + (hi - lo) * (double)i / (DOC_GRID - 1);
        if (stagecal_model_eval(m, grid[i], f_mid, 0, &p, NULL) == STAGECAL_OK) {
            fit[i] = p.stages, clo[i] = p.ci_low, chi[i] = p.ci_high;
            plo[i] = p.pi_low, phi[i] = p.pi_high;
        } else {
            fit[i] = clo[i] = chi[i] = plo[i] = phi[i] = NAN;
        }
    }
    size_t *grp = NULL;
    stagecal_plot_fit_data fd = {"reflux ratio R [-]",
                                 pts ? pts->r : NULL,
                                 pts ? pts->stages : NULL,
                                 grp,
                                 pts ? pts->n : 0,
                                 NULL,
                                 1,
                                 grid,
                                 fit,
                                 clo,
                                 chi,
                                 plo,
                                 phi,
                                 DOC_GRID,
                                 m->r_min,
                                 isfinite(m->r_max) ? m->r_max : NAN,
                                 m->level,
                                 NULL};
    static const char *const pts_name[1] = {"points file"};
    fd.group_names = pts ? pts_name : NULL;
    int rc = stagecal_plot_fit(&fd, &d->charts[d->n_charts], err);
    if (rc)
        return rc;
    d->figs[d->n_charts].chart = d->charts[d->n_charts];
    d->figs[d->n_charts].caption =
        m->form.uses_load
            ? report_doc_str(
                  d,
                  "Fitted stages against reflux ratio at F = %.3g Pa^0.5 (middle of the "
                  "fitted load range), with %.0f %% confidence and prediction bands and the "
                  "fitted envelope.",
                  f_mid, 100 * m->level)
            : report_doc_str(
                  d,
                  "Fitted stages against reflux ratio with %.0f %% confidence and prediction "
                  "bands and the fitted envelope.",
                  100 * m->level);
    d->n_charts++;
    return STAGECAL_OK;
}

static int doc_resid_chart(stagecal_report_doc *d, const stagecal_model *m,
                           const stagecal_regress_data *pts, stagecal_error *err)
{
    double *fitted = malloc(pts->n * sizeof *fitted), *res = malloc(pts->n * sizeof *res);
    int rc = STAGECAL_OK;
    if (!fitted || !res) {
        free(fitted);
        free(res);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    for (size_t i = 0; i < pts->n; i++) {
        stagecal_model_point p;
        double f = pts->f_load ? pts->f_load[i] : NAN;
        if (stagecal_model_eval(m, pts->r[i], f, 0, &p, NULL) == STAGECAL_OK) {
            fitted[i] = p.stages;
            res[i] = pts->stages[i] - p.stages;
        } else {
            fitted[i] = res[i] = NAN;
        }
    }
    stagecal_plot_resid_data rd = {fitted, res, NULL, NULL, pts->n, NULL, 1, NULL};
    rc = stagecal_plot_resid(&rd, &d->charts[d->n_charts], err);
    if (rc == STAGECAL_OK) {
        d->figs[d->n_charts].chart = d->charts[d->n_charts];
        d->figs[d->n_charts].caption =
            "Residuals (points file minus the correlation) against fitted stages.";
        d->n_charts++;
    }
    free(fitted);
    free(res);
    return rc;
}

/* A human label for an equilibrium parameter of the model file ("antoine_light_a" →
 * "Antoine A of benzene"); the key itself for names it does not know. */
static const char *vle_label(stagecal_report_doc *d, const stagecal_model *m, const char *key)
{
    static const struct {
        const char *suffix, *label;
    } antoine[] = {{"a", "Antoine A"},
                   {"b", "Antoine B [K]"},
                   {"c", "Antoine C [K]"},
                   {"t_min_k", "Antoine range from [K]"},
                   {"t_max_k", "Antoine range to [K]"}};
    static const struct {
        const char *key, *label;
    } plain[] = {{"alpha", "relative volatility \xce\xb1"},
                 {"pressure_pa", "pressure [Pa]"},
                 {"x", "table: x"},
                 {"y", "table: y"}};
    for (size_t i = 0; i < sizeof plain / sizeof plain[0]; i++)
        if (strcmp(key, plain[i].key) == 0)
            return plain[i].label;
    const char *comp = NULL, *rest = NULL;
    if (strncmp(key, "antoine_light_", 14) == 0)
        comp = m->light, rest = key + 14;
    else if (strncmp(key, "antoine_heavy_", 14) == 0)
        comp = m->heavy, rest = key + 14;
    for (size_t i = 0; comp && i < sizeof antoine / sizeof antoine[0]; i++)
        if (strcmp(rest, antoine[i].suffix) == 0)
            return report_doc_str(d, "%s, %s", antoine[i].label, comp);
    return report_doc_str(d, "parameter '%s'", key);
}

const char *report_doc_sigma_text(stagecal_report_doc *d, double sigma, double dof)
{
    if (!(sigma > 0))
        return report_doc_str(d,
                              "none measurable: the correlation passes through every window "
                              "(%.4g degrees of freedom), so the data do not show its scatter; "
                              "its intervals are not to be trusted as narrow",
                              dof);
    return report_doc_str(d, "%.3g stages (residual standard deviation), %.4g degrees of freedom",
                          sigma, dof);
}

void report_doc_add_verdict(stagecal_report_doc *d, const char *v)
{
    if (d->rep.n_verdicts < DOC_MAX_VERDICTS)
        d->verdicts[d->rep.n_verdicts++] = v;
    d->rep.verdicts = d->verdicts;
}

static double r_ref_answer(const stagecal_model *m)
{
    return isfinite(m->r_max) ? m->r_max : INFINITY;
}

static const char *cond_text(stagecal_report_doc *d, const stagecal_model *m, double r, double f)
{
    return m->has_load && isfinite(f)
               ? report_doc_str(d, "R = %s, F = %.3g Pa^0.5", report_doc_fmt_r(d, r), f)
               : report_doc_str(d, "R = %s", report_doc_fmt_r(d, r));
}

/* HETP at (r, fl) with its interval and the packed height, or why it is not determined. */
static const char *hetp_text(stagecal_report_doc *d, const stagecal_model *m, double r, double fl)
{
    double lvl = 100 * m->level;
    stagecal_hetp_stages hs;
    stagecal_hetp_result h;
    stagecal_error e2;
    if (stagecal_hetp_stages_from_model(m, r, fl, &hs, NULL, &e2) != STAGECAL_OK ||
        stagecal_hetp_compute(m->height_m, &hs, m->level, &h, &e2) != STAGECAL_OK)
        return report_doc_str(d, "not determined at this condition: %s", e2.text);
    if (h.at_most)
        return report_doc_str(d, "at most %.3f m (one-sided %.0f %%), packed height %.3g m",
                              h.hetp_m, lvl, m->height_m);
    if (h.unbounded || !isfinite(h.high_m))
        return report_doc_str(d,
                              "%.3f m (%.0f %% interval from %.3f m, not bounded above), "
                              "packed height %.3g m",
                              h.hetp_m, lvl, h.low_m, m->height_m);
    return report_doc_str(d,
                          "%.3f m (%.0f %% interval %.3f \xe2\x80\x93 %.3f m), packed "
                          "height %.3g m",
                          h.hetp_m, lvl, h.low_m, h.high_m, m->height_m);
}

/* The verdicts under the answer p: inside or outside the fitted envelope, and how far the
 * stage count can be trusted (one-sided, no scatter, or its precision). */
static void answer_verdicts(stagecal_report_doc *d, const stagecal_model *m,
                            const stagecal_model_point *p)
{
    double lvl = 100 * m->level;
    d->rep.n_verdicts = 0;
    const char *env =
        m->has_load ? report_doc_str(d, "R %s \xe2\x80\x93 %s, F %.3g \xe2\x80\x93 %.3g Pa^0.5",
                                     report_doc_fmt_r(d, m->r_min), report_doc_fmt_r(d, m->r_max),
                                     m->f_min, m->f_max)
                    : report_doc_str(d, "R %s \xe2\x80\x93 %s", report_doc_fmt_r(d, m->r_min),
                                     report_doc_fmt_r(d, m->r_max));
    if (p->extrapolated)
        report_doc_add_verdict(
            d, report_doc_str(d,
                              "EXTRAPOLATED: the condition lies outside the fitted envelope "
                              "(%s); the stage count there is not backed by data and may be off "
                              "by more than its interval.",
                              env));
    else
        report_doc_add_verdict(
            d, report_doc_str(d,
                              "Inside the fitted envelope (%s): the answer interpolates the "
                              "evidence.",
                              env));
    if (p->lower_only)
        report_doc_add_verdict(d, "One-sided: analyser readings at their limit bound the stage "
                                  "count from below only; the column has at least this many "
                                  "stages, and no upper end is known.");
    else if (m->method != STAGECAL_MODEL_CENSORED && !(m->sigma > 0))
        report_doc_add_verdict(d, "No residual scatter: the correlation passes through every "
                                  "window, so the data cannot show how well it fits; more "
                                  "windows are needed before its intervals can be relied on.");
    else
        report_doc_add_verdict(
            d, report_doc_str(d,
                              "Precision: the stage count at this condition is known to "
                              "\xc2\xb1%.2f stages (half the %.0f %% confidence interval).",
                              0.5 * (p->ci_high - p->ci_low), lvl));
}

/* Page one: the stages at (r, f) with their interval, the column stages, HETP at the same
 * condition, and the verdicts that follow from the model alone (envelope, one-sided,
 * scatter). Replaces an earlier answer. */
static int doc_answer(stagecal_report_doc *d, const stagecal_model *m, double r, double f,
                      const char *why, stagecal_error *err)
{
    stagecal_model_point p;
    double fl = m->form.uses_load ? f : NAN;
    int rc = stagecal_model_eval(m, r, fl, 0, &p, err);
    if (rc)
        return rc;
    d->ans_r = r, d->ans_f = f;
    stagecal_report *rep = &d->rep;
    const char *at = cond_text(d, m, r, f);
    rep->answer_heading = report_doc_str(d, "The answer: stages at %s", at);
    size_t n = 0;
    stagecal_report_item *it = d->answer;
    report_doc_add_item(it, &n, "condition", report_doc_str(d, "%s (%s)", at, why));
    double lvl = 100 * m->level;
    if (p.lower_only)
        report_doc_add_item(
            it, &n, "equilibrium stages, pot included",
            report_doc_str(d,
                           "at least %.2f (one-sided %.0f %%: the evidence bounds the stage "
                           "count from below only)",
                           p.stages, lvl));
    else {
        report_doc_add_item(it, &n, "equilibrium stages, pot included",
                            report_doc_str(d,
                                           "%.2f (%.0f %% confidence interval %.2f \xe2\x80\x93 "
                                           "%.2f)",
                                           p.stages, lvl, p.ci_low, p.ci_high));
        report_doc_add_item(it, &n, "one new window would read",
                            report_doc_str(d,
                                           "%.2f \xe2\x80\x93 %.2f (%.0f %% prediction interval)",
                                           p.pi_low, p.pi_high, lvl));
    }
    if (isfinite(p.column_stages))
        report_doc_add_item(it, &n, "column stages",
                            report_doc_str(d, "%s%.2f (%s)", p.lower_only ? "at least " : "",
                                           p.column_stages,
                                           stagecal_convention_text(m->condenser)));
    /* HETP at this same condition (never at another reflux ratio) */
    if (m->has_hetp && m->height_m > 0)
        report_doc_add_item(it, &n, report_doc_str(d, "HETP at %s", at), hetp_text(d, m, r, fl));
    else
        report_doc_add_item(it, &n, "HETP", "not given: the column file states no packed height");
    report_doc_add_item(it, &n, "correlation",
                        report_doc_str(d, "%s, %s fit, %zu windows from %zu runs", m->form.name,
                                       stagecal_model_method_name(m->method), m->n_windows,
                                       m->n_runs));
    rep->answer = it;
    rep->n_answer = n;

    answer_verdicts(d, m, &p);
    return STAGECAL_OK;
}

int stagecal_report_doc_set_description(stagecal_report_doc *d, const char *description)
{
    if (!d || !description || !description[0])
        return STAGECAL_OK;
    /* "invented" or "fictional" in the column file's description: demo data */
    char low[512];
    size_t n = 0;
    for (; description[n] && n + 1 < sizeof low; n++)
        low[n] = (char)((description[n] >= 'A' && description[n] <= 'Z') ? description[n] + 32
                                                                         : description[n]);
    low[n] = '\0';
    if (strstr(low, "invented") || strstr(low, "fictional")) {
        d->rep.demo_notice =
            report_doc_str(d,
                           "the column file says \xe2\x80\x9c%s\xe2\x80\x9d \xe2\x80\x94 these "
                           "numbers describe no real column.",
                           description);
    }
    return d->oom ? STAGECAL_ENOMEM : STAGECAL_OK;
}

/* The job list: column, system and its equilibrium parameters, conventions, evidence, when
 * and how it was fitted. */
static void doc_job(stagecal_report_doc *d, const stagecal_model *m)
{
    size_t nj = 0;
    report_doc_add_item(d->job, &nj, "column", m->column_id);
    report_doc_add_item(
        d->job, &nj, "system",
        report_doc_str(d, "%s / %s, equilibrium model '%s'", m->light, m->heavy, m->vle_kind));
    for (size_t i = 0; i < m->n_vle_params; i++) {
        const stagecal_model_vle_param *vp = &m->vle_params[i];
        report_doc_add_item(d->job, &nj, vle_label(d, m, vp->name),
                            vp->n == 1
                                ? report_doc_str(d, "%.6g", vp->values[0])
                                : report_doc_str(d, "%zu values (%.6g \xe2\x80\xa6 %.6g)", vp->n,
                                                 vp->values[0], vp->values[vp->n - 1]));
    }
    report_doc_add_item(d->job, &nj, "stage convention", stagecal_convention_text(m->condenser));
    report_doc_add_item(d->job, &nj, "correlation", m->form.name);
    report_doc_add_item(d->job, &nj, "fit method", stagecal_model_method_name(m->method));
    report_doc_add_item(d->job, &nj, "evidence",
                        report_doc_str(d, "%zu quasi-steady windows from %zu runs (%zu samples)",
                                       m->n_windows, m->n_runs, m->n_samples));
    report_doc_add_item(
        d->job, &nj, "fitted",
        report_doc_str(d, "%s, stagecal %s, seed %llu", m->fitted_utc, m->tool_version, m->seed));
    if (m->command_line)
        report_doc_add_item(d->job, &nj, "command line", m->command_line);
    d->rep.job = d->job;
    d->rep.n_job = nj;
}

/* The inputs' provenance table (path, SHA-256, rows), when the model file records inputs. */
static void doc_inputs(stagecal_report_doc *d, const stagecal_model *m)
{
    if (m->n_inputs == 0)
        return;
    d->in_head[0] = "input file", d->in_head[1] = "SHA-256", d->in_head[2] = "rows";
    for (size_t i = 0; i < m->n_inputs; i++) {
        d->in_cells[3 * i] = m->inputs[i].path;
        d->in_cells[3 * i + 1] = m->inputs[i].sha256;
        d->in_cells[3 * i + 2] = report_doc_str(d, "%zu", m->inputs[i].rows);
    }
    d->inputs = (stagecal_report_table){"Inputs (data provenance)", d->in_head, 3, d->in_cells,
                                        m->n_inputs};
    d->rep.inputs = &d->inputs;
}

/* The fit table (value, standard error, interval with the t quantile t at the model's level;
 * a bound for a one-sided model) and the summary under it. */
static void doc_fit(stagecal_report_doc *d, const stagecal_model *m, double t)
{
    size_t p = m->form.p;
    d->fit_head[0] = "parameter", d->fit_head[1] = "value", d->fit_head[2] = "std. error";
    d->fit_head[3] = report_doc_str(d, "%.0f %% interval", 100 * m->level);
    for (size_t i = 0; i < p; i++) {
        double se = sqrt(fmax(m->cov[i * p + i], 0)), k, ti = t;
        /* with a design each parameter's t is at its own contrast's dof (as the calibration
         * printed it), not at the band's dof at some condition */
        if (m->design && stagecal_model_param_dof(m, i, &k, NULL) == STAGECAL_OK)
            ti = gsl_cdf_tdist_Pinv(0.5 + 0.5 * m->level, k);
        d->fit_cells[4 * i] = m->form.param_names[i];
        d->fit_cells[4 * i + 1] = report_doc_str(d, "%.6g", m->theta[i]);
        d->fit_cells[4 * i + 2] = report_doc_str(d, "%.3g", se);
        d->fit_cells[4 * i + 3] =
            report_doc_str(d, "[%.6g, %.6g]", m->theta[i] - ti * se, m->theta[i] + ti * se);
        if (m->one_sided) { /* "at least N stages": a bound, no standard error */
            d->fit_cells[4 * i + 1] = report_doc_str(d, "at least %.6g", m->theta[i]);
            d->fit_cells[4 * i + 2] = "none (one-sided)";
            d->fit_cells[4 * i + 3] = report_doc_str(
                d, "from %.6g, no upper end (one-sided %.0f %%)", m->theta[i], 100 * m->level);
        }
    }
    d->fit = (stagecal_report_table){
        report_doc_str(d, "The %s fit of '%s' (the one the model file carries)",
                       stagecal_model_method_name(m->method), m->form.name),
        d->fit_head, 4, d->fit_cells, p};
    d->rep.fit = &d->fit;
    size_t ns = 0;
    if (m->one_sided)
        report_doc_add_item(
            d->summary, &ns, "AT LEAST",
            report_doc_str(d,
                           "%.4g stages (one-sided %.0f %%): readings at an analyser's limit; "
                           "the evidence bounds the stage count from below only",
                           m->theta[0], 100 * m->level));
    if (m->method == STAGECAL_MODEL_CENSORED)
        report_doc_add_item(d->summary, &ns, "residual scatter",
                            "not used: the censored-likelihood intervals rest on the readings' "
                            "stated uncertainties");
    else
        report_doc_add_item(d->summary, &ns, "residual scatter",
                            report_doc_sigma_text(d, m->sigma, m->dof));
    if (m->scatter.n > 0) /* σ of the prediction band by R, at the envelope's ends, with its
                           * dof capped as stagecal_model_eval caps it */
        report_doc_add_item(
            d->summary, &ns, "one new window",
            report_doc_str(
                d,
                "scatters about the curve by %.3g stages at R = %s (%.3g degrees "
                "of freedom) and %.3g at R = %s (%.3g): the prediction band's "
                "sigma by R",
                stagecal_scatter_sd(&m->scatter, m->r_min), report_doc_fmt_r(d, m->r_min),
                fmin(stagecal_scatter_dof(&m->scatter, m->r_min), m->dof),
                stagecal_scatter_sd(&m->scatter, m->r_max), report_doc_fmt_r(d, m->r_max),
                fmin(stagecal_scatter_dof(&m->scatter, m->r_max), m->dof)));
    report_doc_add_item(d->summary, &ns, "envelope: R",
                        report_doc_str(d, "%s \xe2\x80\x93 %s", report_doc_fmt_r(d, m->r_min),
                                       report_doc_fmt_r(d, m->r_max)));
    if (m->has_load)
        report_doc_add_item(d->summary, &ns, "envelope: F",
                            report_doc_str(d, "%.4g \xe2\x80\x93 %.4g Pa^0.5", m->f_min, m->f_max));
    report_doc_add_item(
        d->summary, &ns, "evidence",
        report_doc_str(d, "%zu independent windows (the unit of evidence)", m->n_windows));
    d->rep.fit_summary = d->summary;
    d->rep.n_fit_summary = ns;
}

/* The period of the logged samples behind the fit, or that the logs carry relative times. */
static void doc_data_period(stagecal_report_doc *d, const stagecal_model *m)
{
    if (m->data_first_utc[0] && m->data_last_utc[0])
        d->rep.data_period =
            report_doc_str(d,
                           "%.10s %.5s to %.10s %.5s UTC (logged samples of the %zu "
                           "windows that carry the fit, from %zu runs)",
                           m->data_first_utc, m->data_first_utc + 11, m->data_last_utc,
                           m->data_last_utc + 11, m->n_windows, m->n_runs);
    else
        d->rep.data_period = report_doc_str(d,
                                            "not recorded (the logs carry relative times); %zu "
                                            "windows from %zu runs",
                                            m->n_windows, m->n_runs);
}

/* The points as numbers: for a calibration, each window's stage count and standard error
 * (the evidence module's, as in invert --json and --points-out). */
static void doc_points(stagecal_report_doc *d, const stagecal_regress_data *pts)
{
    if (!pts || pts->n == 0)
        return;
    d->pt_head[0] = "R [-]", d->pt_head[1] = "F [Pa^0.5]", d->pt_head[2] = "stages [-]";
    d->pt_head[3] = "std. error [-]";
    for (size_t i = 0; i < pts->n; i++) {
        d->pt_cells[4 * i] = report_doc_fmt_r(d, pts->r[i]);
        d->pt_cells[4 * i + 1] = pts->f_load ? report_doc_str(d, "%.4g", pts->f_load[i]) : NULL;
        d->pt_cells[4 * i + 2] = report_doc_str(d, "%.4f", pts->stages[i]);
        d->pt_cells[4 * i + 3] = pts->sigma ? report_doc_str(d, "%.4f", pts->sigma[i]) : NULL;
    }
    d->points = (stagecal_report_table){
        "Points of the fit (from a calibration: one per quasi-steady window)", d->pt_head, 4,
        d->pt_cells, pts->n};
    d->rep.windows = &d->points;
}

/* The model file's warnings, then the points outside the fitted envelope (ten named, the rest
 * counted); f_mid is the load of points that carry none. */
static void doc_warnings(stagecal_report_doc *d, const stagecal_model *m,
                         const stagecal_regress_data *pts, double f_mid)
{
    for (size_t i = 0; i < m->n_warnings; i++)
        add_warning(d, m->warnings[i]);
    size_t outside = 0;
    for (size_t i = 0; pts && i < pts->n; i++) {
        stagecal_model_point q;
        double f = pts->f_load ? pts->f_load[i] : f_mid;
        if (stagecal_model_eval(m, pts->r[i], f, 0, &q, NULL) == STAGECAL_OK && q.extrapolated) {
            if (outside++ < 10)
                add_warning(d,
                            report_doc_str(d,
                                           "point %zu (R = %s) lies outside the fitted envelope: "
                                           "the correlation is extrapolated there",
                                           i + 1, report_doc_fmt_r(d, pts->r[i])));
        }
    }
    if (outside > 10)
        add_warning(
            d, report_doc_str(d, "%zu more points lie outside the fitted envelope", outside - 10));
    d->rep.warnings = d->warn;
}

int stagecal_report_from_model(const stagecal_model *m, const stagecal_regress_data *pts,
                               stagecal_report_doc **out, stagecal_error *err)
{
    int rc;
    if (!m || !out)
        return error_set(err, STAGECAL_EINVAL, "report: missing model or output pointer");
    *out = NULL;
    if ((rc = stagecal_model_check(m, err)))
        return rc;
    stagecal_report_doc *d = calloc(1, sizeof *d);
    if (!d)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    d->in_cells = calloc(3 * (m->n_inputs + 1), sizeof *d->in_cells);
    d->fit_cells = calloc(4 * m->form.p, sizeof *d->fit_cells);
    d->warn = calloc(DOC_MAX_WARN, sizeof *d->warn);
    d->pt_cells = calloc(4 * (pts ? pts->n : 0) + 1, sizeof *d->pt_cells);
    if (!d->in_cells || !d->fit_cells || !d->warn || !d->pt_cells) {
        stagecal_report_doc_free(d);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    stagecal_report *r = &d->rep;
    r->title = report_doc_str(d, "Stage calibration report \xe2\x80\x94 %s", m->column_id);
    r->subtitle = report_doc_str(d, "column %s \xc2\xb7 fitted %s by stagecal %s", m->column_id,
                                 m->fitted_utc, m->tool_version);
    doc_job(d, m);
    doc_inputs(d, m);

    /* fit table: t quantile at the model's level from stagecal_model_eval (any point; with
     * a design each parameter's own, doc_fit) */
    stagecal_model_point p0;
    double f_mid = m->has_load ? 0.5 * (m->f_min + m->f_max) : NAN;
    double r_ref = isfinite(m->r_max) ? 0.5 * (m->r_min + m->r_max) : fmax(m->r_min, 1.0);
    if ((rc = stagecal_model_eval(m, r_ref, f_mid, 0, &p0, err))) {
        stagecal_report_doc_free(d);
        return rc;
    }
    doc_fit(d, m, p0.t);

    /* page one: the answer at the condition HETP is referred to (the calibration's), else
     * at the largest fitted R and the middle of the fitted load */
    if (m->has_hetp)
        rc = doc_answer(d, m, m->hetp_r, m->has_load ? m->hetp_f : NAN,
                        "the calibration's reference condition", err);
    else
        rc = doc_answer(d, m, r_ref_answer(m), f_mid,
                        m->has_load ? "the largest fitted R, the middle of the fitted load"
                                    : "the largest fitted R",
                        err);
    if (rc) {
        stagecal_report_doc_free(d);
        return rc;
    }
    r->signoff = 1;
    doc_data_period(d, m);
    doc_points(d, pts);
    doc_warnings(d, m, pts, f_mid);

    rc = doc_fit_chart(d, m, pts, f_mid, err);
    if (rc == STAGECAL_OK && pts && pts->n > 0)
        rc = doc_resid_chart(d, m, pts, err);
    if (rc == STAGECAL_OK && d->oom)
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory building the report");
    if (rc) {
        stagecal_report_doc_free(d);
        return rc;
    }
    r->figures = d->figs;
    r->n_figures = d->n_charts;
    *out = d;
    return STAGECAL_OK;
}

/* xB reached by stepping `stages` equilibrium stages below xd; the status text otherwise. */
static const char *doc_step_xb(stagecal_report_doc *d, const stagecal_vle *vle, double xd,
                               double reflux, double stages, double *xb, stagecal_error *err,
                               int *rc)
{
    stagecal_stages_params par = stagecal_stages_default_params();
    int status = STAGECAL_STAGES_OK;
    size_t len = 0;
    stagecal_error e2;
    stagecal_error_clear(&e2);
    *xb = NAN;
    *rc = stagecal_stages_step(vle, xd, reflux, fmax(stages, 1.0), 1.0, &par, xb, NULL, 0, &len,
                               &status, &e2);
    if (*rc != STAGECAL_OK) {
        if (err)
            *err = e2;
        return NULL;
    }
    if (status != STAGECAL_STAGES_OK) {
        *xb = NAN;
        return report_doc_str(d, "not reached: stepping gave %s (%s)",
                              stagecal_stages_status_name(status), e2.text);
    }
    return report_doc_str(d, "%.4f", *xb);
}

int stagecal_report_doc_add_condition(stagecal_report_doc *d, const stagecal_model *m,
                                      const stagecal_vle *given, double xd, double reflux,
                                      double fload, stagecal_error *err)
{
    if (!d || !m)
        return error_set(err, STAGECAL_EINVAL, "report condition: missing document or model");
    if (d->rep.n_condition > 0)
        return error_set(err, STAGECAL_EINVAL, "report condition: the document has one already");
    if (d->has_calibration)
        return error_set(err, STAGECAL_EINVAL,
                         "report condition: state it before adding the calibration");
    if (!(xd > 0 && xd < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "report condition: xD %g outside (0, 1) (expected a mole fraction)", xd);
    if (!(reflux >= 0))
        return error_set(err, STAGECAL_EINVAL,
                         "report condition: reflux ratio %g (expected R >= 0 or inf)", reflux);
    if (m->form.uses_load && !(fload >= 0 && isfinite(fload)))
        return error_set(err, STAGECAL_EINVAL,
                         "report condition: the form '%s' uses the vapour load (expected an "
                         "F-factor >= 0 in Pa^0.5)",
                         m->form.name);
    if (!m->form.uses_load && !isnan(fload))
        return error_set(err, STAGECAL_EINVAL,
                         "report condition: the form '%s' does not use the vapour load (expected "
                         "no F-factor)",
                         m->form.name);
    if (d->n_charts >= DOC_MAX_FIGS)
        return error_set(err, STAGECAL_EINVAL, "report condition: no room for another figure");
    stagecal_model_point p;
    int rc = stagecal_model_eval(m, reflux, fload, 0, &p, err);
    if (rc)
        return rc;
    stagecal_vle *own = NULL;
    if (!given && (rc = stagecal_model_build_vle(m, &own, err)))
        return rc;
    const stagecal_vle *vle = given ? given : own;

    size_t n = 0;
    stagecal_report_item *it = d->cond;
    const char *at = m->form.uses_load
                         ? report_doc_str(d, "R = %s, F = %.4g Pa^0.5, xD = %.4f",
                                          report_doc_fmt_r(d, reflux), fload, xd)
                         : report_doc_str(d, "R = %s, xD = %.4f", report_doc_fmt_r(d, reflux), xd);
    report_doc_add_item(it, &n, "condition", at);
    report_doc_add_item(it, &n, "stages (the pot included)",
                        report_doc_str(d,
                                       "%.3f (%.0f %% prediction interval %.3f \xe2\x80\x93 %.3f)",
                                       p.stages, 100 * m->level, p.pi_low, p.pi_high));
    double xb = NAN, xb_lo = NAN, xb_hi = NAN;
    const char *txt = doc_step_xb(d, vle, xd, reflux, p.stages, &xb, err, &rc);
    if (txt) /* more stages reach a leaner pot: the interval's high end gives the low xB */
        report_doc_add_item(it, &n, "pot composition reached, xB", txt);
    const char *t_lo = txt ? doc_step_xb(d, vle, xd, reflux, p.pi_high, &xb_lo, err, &rc) : NULL;
    const char *t_hi = t_lo ? doc_step_xb(d, vle, xd, reflux, p.pi_low, &xb_hi, err, &rc) : NULL;
    if (t_lo && t_hi)
        report_doc_add_item(it, &n, "xB over the prediction interval",
                            isfinite(xb_lo) && isfinite(xb_hi)
                                ? report_doc_str(d, "%.4f \xe2\x80\x93 %.4f", xb_lo, xb_hi)
                                : report_doc_str(d, "%s \xe2\x80\x93 %s", t_lo, t_hi));
    report_doc_add_item(it, &n, "inside the fitted envelope",
                        p.extrapolated ? "no (extrapolated)" : "yes");
    if (p.extrapolated)
        add_warning(d, report_doc_str(d,
                                      "the stated condition (%s) lies outside the fitted envelope: "
                                      "its stage count is extrapolated",
                                      at));
    if (rc == STAGECAL_OK && isfinite(xb)) {
        rc = stagecal_plot_mccabe_condition(vle, xd, NAN, reflux, p.stages, 1.0,
                                            &d->charts[d->n_charts], err);
        if (rc == STAGECAL_OK) {
            d->figs[d->n_charts].chart = d->charts[d->n_charts];
            d->figs[d->n_charts].caption = report_doc_str(
                d,
                "McCabe\xe2\x80\x93Thiele stepping of the model's %.3f stages at %s on the "
                "model's equilibrium (E_MV = 1): the pot reaches xB = %.4f.",
                p.stages, at, xb);
            d->n_charts++;
        }
    }
    stagecal_vle_free(own);
    if (rc == STAGECAL_OK && d->oom)
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory building the report");
    if (rc)
        return rc;
    if (rc == STAGECAL_OK)
        rc = doc_answer(d, m, reflux, m->form.uses_load ? fload : NAN, "the stated condition", err);
    if (rc)
        return rc;
    d->rep.condition = d->cond;
    d->rep.n_condition = n;
    d->rep.figures = d->figs;
    d->rep.n_figures = d->n_charts;
    d->rep.warnings = d->warn;
    return STAGECAL_OK;
}
