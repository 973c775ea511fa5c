/*
 * calibrate.c — the calibration chain (see stagecal/calibrate.h): column file and
 * run logs in; validation, windows, per-sample inversion, evidence per window, the
 * stage-space and composition-space fits, and a complete model (not yet written).
 *
 * The window, not the sample, is the unit of evidence: every fit sees one point per
 * quasi-steady window, with a standard error that accounts for autocorrelation
 * (calibrate_fit.c). Outlier-flagged samples (gross errors against the reconciled
 * pot composition) are left out of the window means.
 */
#include "stagecal/calibrate.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "internal.h"
#include "stagecal/hetp.h"
#include "stagecal/stages.h"
#include "stagecal/version.h"

/* stage_status / comp_status of a fit that was not attempted. */
#define CAL_NOT_RUN (-1)
/* Samples a window carries into its stage count and the composition fit: evenly
 * thinned (logged samples are autocorrelated, so more add little but cost). */
#define CAL_MAX_SAMPLES 24

stagecal_calibrate_params stagecal_calibrate_default_params(void)
{
    stagecal_calibrate_params p;
    memset(&p, 0, sizeof p);
    p.form = "auto";
    p.method = STAGECAL_CAL_AUTO;
    p.level = 0.95;
    p.murphree = 1.0;
    p.min_ok = 3;
    p.seed = 1;
    p.robust = STAGECAL_ROBUST_NONE;
    p.hetp_r = NAN;
    p.hetp_f = NAN;
    p.read = stagecal_runlog_default_params();
    p.analysis = stagecal_runlog_analysis_default_params();
    return p;
}

void stagecal_calibration_free(stagecal_calibration *cal)
{
    if (!cal)
        return;
    stagecal_column_free(&cal->column);
    stagecal_runlog_free(cal->log);
    stagecal_findings_free(cal->findings);
    stagecal_runlog_result_free(&cal->res);
    free(cal->ev);
    free(cal->samples);
    stagecal_regress_result_free(&cal->stage_fit);
    stagecal_regress_result_free(&cal->comp_fit);
    stagecal_model_free(&cal->model);
    memset(cal, 0, sizeof *cal);
}

static void progress(const stagecal_calibrate_params *p, const char *stage, double done)
{
    if (p->progress)
        p->progress(p->progress_ctx, stage, done);
}

/* "YYYY-MM-DDTHH:MM:SSZ" for t_s seconds since 1970 UTC ("" when out of range). */
static void format_utc(double t_s, char *buf, size_t cap)
{
    struct tm tm;
    time_t tt = (time_t)floor(t_s);
    buf[0] = '\0';
    if (!isfinite(t_s) || !gmtime_r(&tt, &tm) || strftime(buf, cap, "%Y-%m-%dT%H:%M:%SZ", &tm) == 0)
        buf[0] = '\0';
}

/* Builds one piece of evidence per window from the per-sample results. */
static int build_evidence(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                          stagecal_error *err)
{
    const stagecal_runlog *log = cal->log;
    const stagecal_runlog_result *res = &cal->res;
    const stagecal_uncertainty *u = &cal->column.u;
    size_t nw = res->nwindows, maxlen = 0;
    for (size_t k = 0; k < nw; k++) {
        size_t len = res->windows[k].last - res->windows[k].first + 1;
        if (len > maxlen)
            maxlen = len;
    }
    cal->ev = calloc(nw ? nw : 1, sizeof *cal->ev);
    cal->samples = malloc((nw ? nw : 1) * 3 * CAL_MAX_SAMPLES * sizeof *cal->samples);
    double *buf = malloc((maxlen ? maxlen : 1) * 4 * sizeof *buf);
    if (!cal->ev || !buf || !cal->samples) {
        free(buf);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    double *t = buf, *xd = buf + maxlen, *xb = buf + 2 * maxlen, *f = buf + 3 * maxlen;
    size_t m = 0;
    for (size_t k = 0; k < nw; k++) {
        const stagecal_runlog_window *w = &res->windows[k];
        size_t len = w->last - w->first + 1, nok = 0, nf = 0;
        double fsum = 0;
        for (size_t j = 0; j < len; j++) {
            size_t i = w->first + j;
            int outlier = (res->flags[i] & STAGECAL_SAMPLE_OUTLIER) != 0;
            t[j] = log->t_s[i];
            xd[j] = outlier ? NAN : log->xd[i];
            xb[j] = outlier ? NAN : log->xb[i];
            f[j] = res->f_factor[i];
            if (!outlier && res->status[i] == STAGECAL_STAGES_OK)
                nok++;
            if (isfinite(f[j])) {
                fsum += f[j];
                nf++;
            }
        }
        stagecal_evidence *e = &cal->ev[m];
        memset(e, 0, sizeof *e);
        e->run = w->run;
        e->first = w->first;
        e->last = w->last;
        e->n_samples = len;
        e->n_ok = nok;
        e->total_reflux = w->total_reflux;
        e->r = w->total_reflux ? INFINITY : w->r_median;
        e->t_mid_s = 0.5 * (log->t_s[w->first] + log->t_s[w->last]);
        if (nf * 2 >= len && nf > 0) {
            e->has_load = 1;
            e->f_load = fsum / (double)nf;
        }
        if (stagecal_evidence_mean_rho(t, xd, len, u->xd, &e->xd, &e->u_xd, &e->rho_xd, &e->m_xd,
                                       NULL) != STAGECAL_OK ||
            stagecal_evidence_mean_rho(t, xb, len, u->xb, &e->xb, &e->u_xb, &e->rho_xb, &e->m_xb,
                                       NULL) != STAGECAL_OK)
            continue; /* too few usable compositions: not evidence */
        /* thinned samples for the stage count and the composition fit */
        double *s_t = cal->samples + 3 * CAL_MAX_SAMPLES * m, *s_xd = s_t + CAL_MAX_SAMPLES,
               *s_xb = s_xd + CAL_MAX_SAMPLES;
        size_t nfin = 0, ms = 0;
        for (size_t j = 0; j < len; j++)
            nfin += isfinite(xd[j]) && isfinite(xb[j]);
        for (size_t j = 0, kf = 0; j < len && ms < CAL_MAX_SAMPLES; j++) {
            if (!(isfinite(xd[j]) && isfinite(xb[j])))
                continue;
            /* keep the k-th finite sample when it is the next of an even spread */
            if (nfin <= CAL_MAX_SAMPLES || kf * CAL_MAX_SAMPLES / nfin == ms) {
                if (xb[j] > 0 && xd[j] < 1 && xb[j] < xd[j]) {
                    s_t[ms] = t[j];
                    s_xd[ms] = xd[j];
                    s_xb[ms] = xb[j];
                    ms++;
                }
            }
            kf++;
        }
        e->m = ms;
        e->s_t = s_t;
        e->s_xd = s_xd;
        e->s_xb = s_xb;
        m++;
    }
    free(buf);
    cal->nev = m;
    /* One ρ per analyser for all windows (docs/calibration.md §5), then the stage counts,
     * which propagate u_xd and u_xb. */
    stagecal_evidence_pool_rho(cal->ev, m);
    for (size_t k = 0; k < m; k++) {
        stagecal_evidence *e = &cal->ev[k];
        /* n_eff of the pot analyser series: how many independent samples the window holds */
        e->n_eff = (double)e->m_xb * (1 - e->rho_xb) / (1 + e->rho_xb);
        if (e->n_eff < 1)
            e->n_eff = 1;
        int rc = stagecal_evidence_stages(cal->column.system.vle, par->murphree, e, err);
        if (rc != STAGECAL_OK)
            return rc;
        if (e->n_ok < par->min_ok)
            e->stages_ok = 0; /* too few samples of the window invert on their own */
    }
    return STAGECAL_OK;
}

/* Copies the fit into the model and completes the envelope, HETP and warnings. */
static int fill_model(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                      const char *column_path, const char *const *logs, size_t nlogs,
                      const stagecal_regress_result *fit, stagecal_error *err)
{
    stagecal_model *mo = &cal->model;
    const stagecal_column *col = &cal->column;
    int rc;

    snprintf(mo->column_id, sizeof mo->column_id, "%s", col->id);
    snprintf(mo->light, sizeof mo->light, "%s", col->system.light);
    snprintf(mo->heavy, sizeof mo->heavy, "%s", col->system.heavy);
    /* the complete equilibrium model, so that a planner can rebuild it from the model
     * file alone (stagecal_model_build_vle) */
    if ((rc = stagecal_model_set_vle(mo, col->system.vle, err)))
        return rc;
    /* ideal/activity models record their pressure; for the others it is informative */
    if (col->system.p_pa > 0 && stagecal_vle_pressure(col->system.vle) == 0 &&
        (rc = stagecal_model_add_vle_param(mo, "pressure_pa", &col->system.p_pa, 1, err)))
        return rc;
    /* what a planner needs besides the equilibrium: the latent heat (boil-up energy) and
     * the molar masses (mass-basis amounts); 0 = the column file does not state it */
    mo->latent_j_mol = col->system.latent_j_mol;
    mo->m_light_kg_mol = col->system.m_light;
    mo->m_heavy_kg_mol = col->system.m_heavy;
    mo->condenser = col->condenser;
    mo->form = fit->form;
    size_t p = fit->p;
    memcpy(mo->theta, fit->theta, p * sizeof *mo->theta);
    memcpy(mo->cov, fit->cov, p * p * sizeof *mo->cov);
    mo->sigma = fit->sigma_obs > 0 ? fit->sigma_obs : fit->sigma;
    mo->dof = fit->dof;
    mo->level = par->level;
    mo->method = cal->used;
    mo->n_windows = cal->used == STAGECAL_MODEL_STAGE_SPACE ? cal->nev_stage : cal->nev;
    mo->n_runs = cal->log->nruns;
    mo->n_samples = 0;
    for (size_t i = 0; i < cal->nev; i++)
        if (cal->used != STAGECAL_MODEL_STAGE_SPACE || cal->ev[i].stages_ok)
            mo->n_samples += cal->ev[i].n_samples;
    mo->r_min = fit->r_min;
    mo->r_max = fit->has_total_reflux ? INFINITY : fit->r_max;
    if (fit->r_max == 0 && fit->has_total_reflux)
        mo->r_min = INFINITY;
    if (fit->f_max > 0) {
        mo->has_load = 1;
        mo->f_min = fit->f_min;
        mo->f_max = fit->f_max;
    }
    /* provenance */
    char hex[STAGECAL_MODEL_HEX];
    if ((rc = stagecal_model_hash_file(column_path, hex, err)) ||
        (rc = stagecal_model_add_input(mo, column_path, hex, 0, err)))
        return rc;
    for (size_t k = 0; k < nlogs; k++) {
        size_t rows = 0;
        for (size_t r = 0; r < cal->log->nruns; r++)
            if (cal->log->runs[r].file == k)
                rows += cal->log->runs[r].n;
        /* the hash of the bytes the reader parsed, not of a second read of the file */
        if ((rc = stagecal_model_add_input(mo, logs[k], cal->log->sha256[k], rows, err)))
            return rc;
    }
    stagecal_model_stamp_now(mo);
    mo->seed = par->seed;
    /* the period the data cover, when the logs carry absolute timestamps */
    if (cal->log->nfiles_iso == cal->log->nfiles && cal->nev > 0) {
        double t0 = INFINITY, t1 = -INFINITY;
        for (size_t i = 0; i < cal->nev; i++) {
            t0 = fmin(t0, cal->log->t_s[cal->ev[i].first]);
            t1 = fmax(t1, cal->log->t_s[cal->ev[i].last]);
        }
        format_utc(t0, mo->data_first_utc, sizeof mo->data_first_utc);
        format_utc(t1, mo->data_last_utc, sizeof mo->data_last_utc);
    }

    /* HETP at a reference condition, where the packed height is known. */
    if (col->height_m > 0) {
        double r = isnan(par->hetp_r) ? mo->r_max : par->hetp_r;
        double f = isnan(par->hetp_f) ? 0.5 * (mo->f_min + mo->f_max) : par->hetp_f;
        stagecal_hetp_stages hs;
        stagecal_hetp_result h;
        if (stagecal_hetp_stages_from_model(mo, r, f, &hs, NULL, NULL) == STAGECAL_OK &&
            stagecal_hetp_compute(col->height_m, &hs, par->level, &h, NULL) == STAGECAL_OK) {
            mo->has_hetp = 1;
            mo->height_m = col->height_m;
            mo->hetp_r = r;
            mo->hetp_f = mo->has_load ? f : 0;
            mo->hetp_m = h.hetp_m;
            mo->hetp_level = par->level;
            mo->hetp_low_m = h.low_m;
            mo->hetp_high_m = h.high_m;
        }
    }
    return STAGECAL_OK;
}

static int warn(stagecal_calibration *cal, stagecal_error *err, const char *fmt, ...)
    SC_PRINTF(3, 4);
static int warn(stagecal_calibration *cal, stagecal_error *err, const char *fmt, ...)
{
    char text[400];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(text, sizeof text, fmt, ap);
    va_end(ap);
    return stagecal_model_add_warning(&cal->model, text, err);
}

static void auto_theta(const stagecal_form *form, const stagecal_evidence *ev, size_t n,
                       double *theta)
{
    double smax = 2;
    for (size_t i = 0; i < n; i++)
        if (ev[i].stages_ok && ev[i].stages > smax)
            smax = ev[i].stages;
    for (size_t i = 0; i < form->p; i++)
        theta[i] = 0;
    theta[0] = smax;
    if (form->kind == STAGECAL_FORM_SATURATING || form->kind == STAGECAL_FORM_SATURATING_LOAD)
        theta[1] = 0.5;
}

int stagecal_calibrate(const char *column_path, const char *const *logs, size_t nlogs,
                       const stagecal_calibrate_params *params, stagecal_calibration *cal,
                       stagecal_error *err)
{
    stagecal_calibrate_params defp = stagecal_calibrate_default_params();
    const stagecal_calibrate_params *par = params ? params : &defp;
    int rc;

    memset(cal, 0, sizeof *cal);
    stagecal_model_init(&cal->model);
    if (nlogs == 0)
        return error_set(err, STAGECAL_EINVAL, "calibration needs at least one run log");
    progress(par, "reading", 0);
    if ((rc = stagecal_column_load(column_path, &cal->column, err)))
        return rc;
    cal->log = stagecal_runlog_alloc();
    cal->findings = stagecal_findings_alloc(par->read.max_findings ? par->read.max_findings : 1000);
    if (!cal->log || !cal->findings)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t k = 0; k < nlogs; k++) {
        progress(par, "reading", (double)k / (double)nlogs);
        if ((rc = stagecal_runlog_read(cal->log, logs[k], &cal->column, &par->read, cal->findings,
                                       err)))
            return rc;
    }
    if (cal->findings->n_errors > 0)
        return error_set(err, STAGECAL_EDATA, "%zu error(s) in the run logs, first: %s",
                         cal->findings->n_errors,
                         cal->findings->n ? cal->findings->items[0].text : "(not kept)");
    progress(par, "inverting", 0.2);
    if ((rc = stagecal_runlog_analyse(cal->log, &cal->column, &par->analysis, &cal->res, err)) ||
        (rc = stagecal_runlog_invert(cal->log, &cal->column, par->murphree, &par->analysis,
                                     &cal->res, err)))
        return rc;
    progress(par, "windows", 0.5);
    if ((rc = build_evidence(cal, par, err)))
        return rc;
    if (cal->nev == 0)
        return error_set(err, STAGECAL_EDATA,
                         "no quasi-steady window in the run logs: nothing to calibrate on "
                         "(%zu samples read)",
                         cal->log->n);

    /* ---- stage space ------------------------------------------------------------ */
    progress(par, "fitting", 0.6);
    stagecal_regress_data d;
    double *arr = malloc((cal->nev ? cal->nev : 1) * 4 * sizeof *arr);
    if (!arr)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    size_t ns = stagecal_evidence_points(cal->ev, cal->nev, arr, &d);
    int any_load = d.f_load != NULL;
    cal->nev_stage = ns;

    stagecal_regress_params rp = stagecal_regress_default_params();
    rp.level = par->level;
    rp.bootstrap = par->bootstrap;
    rp.seed = par->seed;
    rp.robust = par->robust;
    stagecal_form form;
    stagecal_error e2;
    stagecal_error_clear(&e2);
    memset(&form, 0, sizeof form);
    if (strcmp(par->form, "auto") == 0) {
        rc = stagecal_regress_rank(&d, NULL, 0, &rp, cal->rank, &cal->nrank, &e2);
        if (rc == STAGECAL_OK && cal->nrank > 0 && cal->rank[0].status == STAGECAL_OK)
            form = cal->rank[0].form;
        else
            rc = stagecal_form_parse(any_load ? "saturating-load" : "saturating", &form, err);
        if (rc != STAGECAL_OK)
            rc = stagecal_form_parse("saturating", &form, err);
    } else {
        rc = stagecal_form_parse(par->form, &form, err);
    }
    if (rc != STAGECAL_OK) {
        free(arr);
        return rc;
    }
    if (form.uses_load && !any_load) {
        free(arr);
        return error_set(err, STAGECAL_EDATA,
                         "form '%s' needs the vapour load (F-factor), but not every window has one "
                         "(the logs need V or Q, and the column file the diameter)",
                         form.name);
    }
    cal->stage_status = CAL_NOT_RUN;
    /* The stage-space fit always runs: it starts the composition fit and is compared
     * with it in the summary. */
    stagecal_error_clear(&e2);
    cal->stage_status =
        ns > 0 ? stagecal_regress_fit(&d, &form, &rp, &cal->stage_fit, &e2)
               : error_set(&e2, STAGECAL_EDATA, "no window has enough ok stage counts");
    snprintf(cal->stage_message, sizeof cal->stage_message, "%s", e2.text);
    free(arr);

    /* ---- composition space ---------------------------------------------------------- */
    progress(par, "fitting", 0.8);
    cal->comp_status = CAL_NOT_RUN;
    if (par->method != STAGECAL_CAL_STAGE) {
        double theta0[STAGECAL_FORM_MAXP];
        if (cal->stage_status == STAGECAL_OK)
            memcpy(theta0, cal->stage_fit.theta, sizeof theta0);
        else
            auto_theta(&form, cal->ev, cal->nev, theta0);
        stagecal_error_clear(&e2);
        cal->comp_status =
            stagecal_fit_composition(cal->column.system.vle, par->murphree, cal->ev, cal->nev,
                                     &form, theta0, &rp, &cal->comp_fit, &e2);
        snprintf(cal->comp_message, sizeof cal->comp_message, "%s", e2.text);
    }

    const stagecal_regress_result *fit = NULL;
    if (par->method == STAGECAL_CAL_STAGE) {
        if (cal->stage_status != STAGECAL_OK)
            return error_set(err, cal->stage_status, "stage-space fit failed: %s",
                             cal->stage_message);
        cal->used = STAGECAL_MODEL_STAGE_SPACE;
        fit = &cal->stage_fit;
    } else if (cal->comp_status == STAGECAL_OK) {
        cal->used = STAGECAL_MODEL_COMPOSITION_SPACE;
        fit = &cal->comp_fit;
    } else if (par->method == STAGECAL_CAL_AUTO && cal->stage_status == STAGECAL_OK) {
        cal->used = STAGECAL_MODEL_STAGE_SPACE;
        fit = &cal->stage_fit;
    } else {
        return error_set(err, cal->comp_status ? cal->comp_status : STAGECAL_EDATA,
                         "composition-space fit failed: %s", cal->comp_message);
    }
    if (!(fit->dof > 0))
        return error_set(err, STAGECAL_EDATA,
                         "%zu window(s) for %zu parameter(s): no degrees of freedom left for "
                         "the uncertainty (log more runs or choose a form with fewer parameters)",
                         fit->n, fit->p);

    progress(par, "model", 0.95);
    if ((rc = fill_model(cal, par, column_path, logs, nlogs, fit, err)))
        return rc;
    /* warnings a reader of the model must see: the column file's first */
    for (size_t k = 0; k < cal->column.n_warnings; k++)
        if ((rc = stagecal_model_add_warning(&cal->model, cal->column.warnings[k], err)))
            return rc;
    if (par->method == STAGECAL_CAL_AUTO && cal->comp_status != STAGECAL_OK &&
        (rc = warn(cal, err,
                   "composition-space fit failed (%s); the model carries the "
                   "stage-space fit",
                   cal->comp_message)))
        return rc;
    for (size_t r = 0; r < cal->res.nruns; r++) {
        const stagecal_runlog_closure *c = &cal->res.closures[r];
        if (c->gross && (rc = warn(cal, err,
                                   "run '%s': Rayleigh closure error %.3g exceeds its uncertainty "
                                   "(%.2g): gross error in W, xD or xB",
                                   cal->log->runs[r].name, c->closure, c->u_closure)))
            return rc;
        if (c->drift && (rc = warn(cal, err,
                                   "run '%s': pot analyser drift %.3g per hour against the "
                                   "reconciled xB",
                                   cal->log->runs[r].name, c->drift_per_h)))
            return rc;
    }
    if (!(cal->model.sigma > 0) &&
        (rc = warn(cal, err,
                   "the residual sigma in stages could not be estimated (too few windows with "
                   "stage counts); prediction bands equal confidence bands and are too narrow")))
        return rc;
    size_t npinch = cal->res.count[STAGECAL_STAGES_PINCH];
    if (npinch > 0 && (rc = warn(cal, err,
                                 "%zu sample(s) at a pinch have no stage count; the "
                                 "composition-space fit still uses their windows",
                                 npinch)))
        return rc;
    progress(par, "done", 1);
    return STAGECAL_OK;
}
