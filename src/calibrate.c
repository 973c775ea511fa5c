/*
 * calibrate.c — the calibration chain (see stagecal/calibrate.h): column file and
 * run logs in; validation, windows, per-sample inversion, evidence per window, the
 * stage-space and composition-space fits, and a complete model (not yet written).
 *
 * The window, not the sample, is the unit of evidence: every fit sees one point per
 * quasi-steady window, with a standard error that accounts for autocorrelation
 * (evidence.c). The composition-space fit is regress_composition.c.
 */
#include "stagecal/calibrate.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "calibrate_internal.h"
#include "internal.h"
#include "runlog_internal.h"
#include "stagecal/hetp.h"
#include "stagecal/stages.h"
#include "stagecal/version.h"

/* stage_status / comp_status of a fit that was not attempted. */
#define CAL_NOT_RUN (-1)

stagecal_calibrate_params stagecal_calibrate_default_params(void)
{
    stagecal_calibrate_params p;
    memset(&p, 0, sizeof p);
    p.form = "auto";
    p.method = STAGECAL_CAL_AUTO;
    p.level = 0.95;
    p.murphree = 1.0;
    p.evidence = stagecal_evidence_default_params();
    p.seed = 1;
    p.boot_kind = STAGECAL_BOOT_CASE;
    p.robust = STAGECAL_ROBUST_NONE;
    p.cov_kind = STAGECAL_COV_HC2_BM;
    p.hetp_r = NAN;
    p.hetp_f = NAN;
    p.read = stagecal_runlog_default_params();
    p.analysis = stagecal_runlog_analysis_default_params();
    return p;
}

const stagecal_regress_result *stagecal_calibration_fit(const stagecal_calibration *cal)
{
    return cal->used == STAGECAL_MODEL_STAGE_SPACE ? &cal->stage_fit
           : cal->used == STAGECAL_MODEL_CENSORED  ? &cal->cens_fit
                                                   : &cal->comp_fit;
}

void stagecal_calibration_free(stagecal_calibration *cal)
{
    if (!cal)
        return;
    stagecal_column_free(&cal->own_column);
    stagecal_runlog_free(cal->own_log);
    stagecal_findings_free(cal->findings);
    free(cal->run_rows);
    stagecal_runlog_result_free(&cal->res);
    stagecal_evidence_set_free(&cal->evidence);
    free(cal->flagged);
    stagecal_regress_result_free(&cal->stage_fit);
    stagecal_regress_result_free(&cal->comp_fit);
    stagecal_regress_result_free(&cal->cens_fit);
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

/* The model's provenance: the column file's and the logs' hashes (of the bytes their
 * readers parsed) with the logs' rows, when it was fitted, the seed, and the period the data
 * cover when the logs carry absolute timestamps. A status. */
static int fill_provenance(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                           const char *column_path, stagecal_error *err)
{
    stagecal_model *mo = &cal->model;
    const stagecal_column *col = cal->column;
    const stagecal_evidence *ev = cal->evidence.ev;
    size_t nev = cal->evidence.n;
    int rc;
    /* the column's hash from the bytes its reader parsed; a second read only for a column
     * built in memory (sha256 empty) */
    char hex[STAGECAL_MODEL_HEX];
    if (column_path && col->sha256[0])
        memcpy(hex, col->sha256, sizeof hex);
    else if (column_path && (rc = stagecal_model_hash_file(column_path, hex, err)))
        return rc;
    if (column_path && (rc = stagecal_model_add_input(mo, column_path, hex, 0, err)))
        return rc;
    for (size_t k = 0; k < cal->log->nfiles; k++) {
        size_t rows = 0;
        for (size_t r = 0; r < cal->log->nruns; r++)
            if (cal->log->runs[r].file == k)
                rows += cal->log->runs[r].n;
        /* the hash of the bytes the reader parsed, not of a second read of the file */
        if ((rc = stagecal_model_add_input(mo, cal->log->files[k], cal->log->sha256[k], rows, err)))
            return rc;
    }
    stagecal_model_stamp_now(mo);
    mo->seed = par->seed;
    /* the period the data cover, when the logs carry absolute timestamps */
    if (cal->log->nfiles_iso == cal->log->nfiles && nev > 0) {
        double t0 = INFINITY, t1 = -INFINITY;
        for (size_t i = 0; i < nev; i++) {
            t0 = fmin(t0, ev[i].t_first_s);
            t1 = fmax(t1, ev[i].t_last_s);
        }
        format_utc(t0, mo->data_first_utc, sizeof mo->data_first_utc);
        format_utc(t1, mo->data_last_utc, sizeof mo->data_last_utc);
    }
    return STAGECAL_OK;
}

/* HETP at a reference condition (par's, else the largest fitted R and the middle of the
 * fitted load), where the packed height is known; none when it cannot be computed. */
static void fill_hetp(stagecal_model *mo, const stagecal_column *col,
                      const stagecal_calibrate_params *par)
{
    if (!(col->height_m > 0))
        return;
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

/* Copies the fit into the model and completes the envelope, HETP and warnings. */
static int fill_model(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                      const char *column_path, const stagecal_regress_result *fit,
                      stagecal_error *err)
{
    stagecal_model *mo = &cal->model;
    const stagecal_column *col = cal->column;
    const stagecal_evidence *ev = cal->evidence.ev;
    size_t nev = cal->evidence.n;
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
    /* one dof for θ and σ: the smaller, when σ rests on fewer windows than θ (a
     * composition-space fit whose windows do not all have stage counts) */
    mo->dof = fit->sigma_dof > 0 ? fmin(fit->dof, fit->sigma_dof) : fit->dof;
    /* with HC2_BM the fit's design goes along: each band's dof is its own contrast's */
    if (fit->design && ((rc = stagecal_model_set_design(mo, fit->design, fit->n, err)) ||
                        (rc = stagecal_model_set_design_run(mo, fit->cluster, err))))
        return rc;
    /* σ of one new window by R: the windows' scatter function (stagecal/scatter.h), its
     * shape from the windows' own errors (the quadratic-detrend shape of
     * stagecal_scatter_window_se is measured, not used: docs/calibration.md, *Prediction
     * bands*); the censored-likelihood fit keeps one σ */
    if (cal->used != STAGECAL_MODEL_CENSORED &&
        (rc = stagecal_scatter_fit(ev, nev, &fit->form, fit->theta, &mo->scatter, err)))
        return rc;
    mo->level = par->level;
    mo->method = cal->used;
    mo->n_windows = cal->used == STAGECAL_MODEL_STAGE_SPACE ? cal->nev_stage : nev;
    mo->n_runs = cal->log->nruns;
    mo->n_samples = 0;
    for (size_t i = 0; i < nev; i++)
        if (cal->used != STAGECAL_MODEL_STAGE_SPACE || ev[i].stages_ok)
            mo->n_samples += ev[i].n_samples;
    mo->r_min = fit->r_min;
    mo->r_max = fit->has_total_reflux ? INFINITY : fit->r_max;
    if (fit->r_max == 0 && fit->has_total_reflux)
        mo->r_min = INFINITY;
    if (fit->f_max > 0) {
        mo->has_load = 1;
        mo->f_min = fit->f_min;
        mo->f_max = fit->f_max;
    }
    if (cal->used == STAGECAL_MODEL_CENSORED)
        calibrate_censored_model(cal, mo);
    if ((rc = fill_provenance(cal, par, column_path, err)))
        return rc;
    fill_hetp(mo, col, par);
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

/* The correlation form: the one asked for, or (auto) the best by AICc in stage space —
 * constant when the ranking fails (too few windows for any AICc). */
static int choose_form(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                       const stagecal_regress_data *d, const stagecal_regress_params *rp,
                       stagecal_form *form, stagecal_error *err)
{
    memset(form, 0, sizeof *form);
    if (strcmp(par->form, "auto") != 0)
        return stagecal_form_parse(par->form, form, err);
    int rc = stagecal_regress_rank(d, NULL, 0, rp, cal->rank, &cal->nrank, NULL);
    if (rc == STAGECAL_OK && cal->nrank > 0 && cal->rank[0].status == STAGECAL_OK) {
        *form = cal->rank[0].form;
        return STAGECAL_OK;
    }
    /* too few windows to rank any form: the one that asks least of the evidence */
    return stagecal_form_parse("constant", form, err);
}

/* Both fits; on success *fit is the one the model carries. */
static int run_fits(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                    const stagecal_regress_result **fit, stagecal_error *err)
{
    const stagecal_evidence *ev = cal->evidence.ev;
    size_t nev = cal->evidence.n;
    stagecal_regress_data d;
    stagecal_form form;
    stagecal_error e2;
    int rc;
    double *arr = malloc((nev ? nev : 1) * 4 * sizeof *arr);
    if (!arr)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    cal->nev_stage = stagecal_evidence_points(ev, nev, arr, &d);
    /* the stage-space points' runs, in the order stagecal_evidence_points keeps them: the
     * clusters of the CR2_RUN covariance */
    size_t *run = malloc((nev ? 2 * nev : 1) * sizeof *run), nrun = 0;
    if (!run) {
        free(arr);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    for (size_t i = 0; i < nev; i++) {
        run[nev + i] = ev[i].run; /* every window: the composition-space fit's */
        if (ev[i].stages_ok)
            run[nrun++] = ev[i].run;
    }
    stagecal_regress_params rp = stagecal_regress_default_params();
    rp.level = par->level;
    rp.bootstrap = par->bootstrap;
    rp.seed = par->seed;
    rp.boot_kind = par->boot_kind;
    rp.threads = par->threads;
    rp.robust = par->robust;
    rp.cov_kind = par->cov_kind;
    rp.allow_undetermined = par->allow_undetermined;
    rp.cluster = run;
    if ((rc = choose_form(cal, par, &d, &rp, &form, err))) {
        free(arr);
        free(run);
        return rc;
    }
    if (form.uses_load && !d.f_load) {
        free(arr);
        free(run);
        return error_set(err, STAGECAL_EDATA,
                         "form '%s' needs the vapour load (F-factor), but not every window has one "
                         "(the logs need V or Q, and the column file the diameter)",
                         form.name);
    }
    /* The stage-space fit always runs: it starts the composition fit and is compared
     * with it in the summary. */
    progress(par, "fitting", 0.6);
    stagecal_error_clear(&e2);
    cal->stage_status =
        cal->nev_stage > 0 ? stagecal_regress_fit(&d, &form, &rp, &cal->stage_fit, &e2)
                           : error_set(&e2, STAGECAL_EDATA, "no window has enough ok stage counts");
    snprintf(cal->stage_message, sizeof cal->stage_message, "%s", e2.text);
    free(arr);
    /* the composition-space fit has one residual per window, every window */
    rp.cluster = run + nev;

    progress(par, "fitting", 0.8);
    cal->comp_status = CAL_NOT_RUN;
    if (par->method != STAGECAL_CAL_STAGE) {
        double theta0[STAGECAL_FORM_MAXP];
        if (cal->stage_status == STAGECAL_OK)
            memcpy(theta0, cal->stage_fit.theta, sizeof theta0);
        else
            auto_theta(&form, ev, nev, theta0);
        stagecal_error_clear(&e2);
        cal->comp_status = stagecal_fit_composition(cal->column->system.vle, par->murphree, ev, nev,
                                                    &form, theta0, &rp, &cal->comp_fit, &e2);
        snprintf(cal->comp_message, sizeof cal->comp_message, "%s", e2.text);
    }
    free(run);

    /* readings at an analyser's limit: the censored likelihood, which takes them */
    int censored = par->method == STAGECAL_CAL_CENSORED;
    cal->cens_status = CAL_NOT_RUN;
    if (censored) {
        progress(par, "fitting", 0.9);
        stagecal_error_clear(&e2);
        cal->cens_status = calibrate_censored(cal, par, &form, &cal->cens_fallback, &e2);
        snprintf(cal->cens_message, sizeof cal->cens_message, "%s", e2.text);
        if (cal->cens_status != STAGECAL_OK)
            return error_set(err, cal->cens_status, "censored-likelihood fit: %s",
                             cal->cens_message);
        cal->used = STAGECAL_MODEL_CENSORED;
        *fit = &cal->cens_fit;
    } else if (par->method == STAGECAL_CAL_STAGE) {
        if (cal->stage_status != STAGECAL_OK)
            return error_set(err, cal->stage_status, "stage-space fit failed: %s",
                             cal->stage_message);
        cal->used = STAGECAL_MODEL_STAGE_SPACE;
        *fit = &cal->stage_fit;
    } else if (cal->comp_status == STAGECAL_OK) {
        cal->used = STAGECAL_MODEL_COMPOSITION_SPACE;
        *fit = &cal->comp_fit;
    } else if (par->method == STAGECAL_CAL_AUTO && cal->stage_status == STAGECAL_OK) {
        cal->used = STAGECAL_MODEL_STAGE_SPACE;
        *fit = &cal->stage_fit;
    } else {
        return error_set(err, cal->comp_status ? cal->comp_status : STAGECAL_EDATA,
                         "composition-space fit failed: %s", cal->comp_message);
    }
    if (!((*fit)->dof > 0))
        return error_set(err, STAGECAL_EDATA,
                         "%zu window(s) for %zu parameter(s): no degrees of freedom left for "
                         "the uncertainty (log more runs or choose a form with fewer parameters)",
                         (*fit)->n, (*fit)->p);
    return STAGECAL_OK;
}

/* Warnings a reader of the model must see: the column file's first. */
static int add_warnings(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                        stagecal_error *err)
{
    int rc;
    for (size_t k = 0; k < cal->column->n_warnings; k++)
        if ((rc = stagecal_model_add_warning(&cal->model, cal->column->warnings[k], err)))
            return rc;
    /* the run-clustered covariance: too few runs, or the censored-likelihood fit */
    const stagecal_regress_result *uf = stagecal_calibration_fit(cal);
    if (par->cov_kind == STAGECAL_COV_CR2_RUN && cal->used != STAGECAL_MODEL_CENSORED &&
        uf->cov_kind != STAGECAL_COV_CR2_RUN) {
        size_t nr = 0;
        for (size_t r = 0; r < cal->log->nruns; r++) {
            int has = 0;
            for (size_t i = 0; i < cal->evidence.n && !has; i++)
                has = cal->evidence.ev[i].run == r &&
                      (cal->used != STAGECAL_MODEL_STAGE_SPACE || cal->evidence.ev[i].stages_ok);
            nr += has;
        }
        if ((rc = warn(cal, err,
                       "covariance cr2-run needs windows from at least %d runs, %zu run(s) have "
                       "them: the fit uses %s instead (windows taken as independent; a "
                       "run-to-run offset is not in its intervals)",
                       STAGECAL_CR2_MIN_CLUSTERS, nr, stagecal_regress_cov_name(uf->cov_kind))))
            return rc;
    }
    /* the bootstrap by run: too few runs with stage counts */
    if (par->bootstrap > 0 && par->boot_kind == STAGECAL_BOOT_RUN &&
        cal->stage_status == STAGECAL_OK && cal->stage_fit.boot_kind != STAGECAL_BOOT_RUN) {
        size_t nr = 0;
        for (size_t r = 0; r < cal->log->nruns; r++) {
            int has = 0;
            for (size_t i = 0; i < cal->evidence.n && !has; i++)
                has = cal->evidence.ev[i].run == r && cal->evidence.ev[i].stages_ok;
            nr += has;
        }
        if ((rc = warn(cal, err,
                       "bootstrap by run needs windows with a stage count from at least %d "
                       "runs, %zu run(s) have them: it resamples windows (case) instead, as "
                       "if independent (a run-to-run offset is not in its intervals)",
                       STAGECAL_CR2_MIN_CLUSTERS, nr)))
            return rc;
    }
    if (par->cov_kind == STAGECAL_COV_CR2_RUN && cal->used == STAGECAL_MODEL_CENSORED &&
        (rc = warn(cal, err,
                   "covariance cr2-run does not apply to the censored-likelihood fit: its "
                   "intervals take the windows as independent")))
        return rc;
    if ((rc = calibrate_run_test_warn(cal, err)))
        return rc;
    const stagecal_runlog_soft *so = &cal->log->soft;
    if ((so->xd_inferred || so->xb_inferred) &&
        (rc = warn(cal, err,
                   "compositions inferred from temperatures through the column's equilibrium "
                   "model: xD in %zu rows (%zu censored), xB in %zu (%zu censored); the fit "
                   "rests on that model, the logged pressures and the sensors' stated "
                   "uncertainty",
                   so->xd_inferred, so->xd_censored, so->xb_inferred, so->xb_censored)))
        return rc;
    if (so->inconsistent &&
        (rc = warn(cal, err,
                   "TEMPERATURE SENSOR INCONSISTENT with the analyser readings in %zu of %zu "
                   "run checks (the run-log warnings name them): a wrong pressure, a "
                   "miscalibrated sensor or a wrong equilibrium model; compositions inferred "
                   "from it carry that error",
                   so->inconsistent, so->checks)))
        return rc;
    if (par->method == STAGECAL_CAL_AUTO && cal->comp_status != STAGECAL_OK &&
        (rc = warn(cal, err,
                   "composition-space fit failed (%s); the model carries the "
                   "stage-space fit",
                   cal->comp_message)))
        return rc;
    const stagecal_regress_result *used = stagecal_calibration_fit(cal);
    if (cal->used == STAGECAL_MODEL_CENSORED) {
        if (cal->cens_fallback &&
            (rc = warn(cal, err,
                       "the evidence bounds the stage count from below only: the form the "
                       "ranking chose has more parameters than a one-sided answer carries, so "
                       "'constant' was fitted")))
            return rc;
        if (cal->cens.one_sided &&
            (rc = warn(cal, err,
                       "AT LEAST %.4g STAGES (one-sided %.0f %%): %zu of %zu readings are "
                       "censored (an analyser at its limit); the evidence bounds the stage "
                       "count from below only, more stages fit it as well",
                       cal->cens.par[0].low, 100 * cal->cens.level, cal->cens.n_censored,
                       cal->cens.n_readings)))
            return rc;
    }
    if (used->undetermined) {
        char why[STAGECAL_ERROR_TEXT];
        stagecal_regress_ident_text(used, why, sizeof why);
        if ((rc = warn(cal, err, "NOT DETERMINED: %s", why)))
            return rc;
    }
    for (size_t k = 0; k < cal->nflagged; k++) {
        const stagecal_flagged_run *f = &cal->flagged[k];
        if ((rc = warn(cal, err, "run '%s' %s (%zu window%s): %s", cal->log->runs[f->run].name,
                       f->left_out ? "left out of the fit" : "kept in the fit (keep flagged runs)",
                       f->windows, f->windows == 1 ? "" : "s", f->reason)))
            return rc;
    }
    for (size_t r = 0; r < cal->res.nruns; r++) {
        const stagecal_runlog_closure *c = &cal->res.closures[r];
        if (c->boilup_mismatch &&
            (rc = warn(cal, err,
                       "run '%s': the pot holdup fell %.4g mol, V/(R+1) gives %.4g ± %.2g mol "
                       "(ratio %.4f): check the boil-up, reflux-ratio and holdup signals",
                       cal->log->runs[r].name, c->w_fall_mol, c->w_pred_mol, c->u_w_diff_mol,
                       c->boilup_ratio)))
            return rc;
    }
    if (!(cal->model.sigma > 0) &&
        (rc = warn(cal, err,
                   "the residual sigma in stages could not be estimated (too few windows with "
                   "stage counts); prediction bands equal confidence bands and are too narrow")))
        return rc;
    size_t npinch = cal->res.count[STAGECAL_STAGES_PINCH];
    size_t nleft = 0;
    for (size_t i = 0; cal->used != STAGECAL_MODEL_CENSORED && i < cal->evidence.n; i++)
        nleft += (cal->evidence.ev[i].xd_tobit ? 0 : cal->evidence.ev[i].n_cens_xd) +
                 cal->evidence.ev[i].n_cens_xb; /* a Tobit window takes its xD bounds */
    if (nleft > 0 && calibrate_censoring_matters(cal) &&
        (rc = warn(cal, err,
                   "%zu censored reading(s) in the windows were left out of the fit, %.0f %% or "
                   "more of some window's or all of its values: the windows' means read low or "
                   "high; --method censored takes them as bounds",
                   nleft, 100 * CAL_CENS_SHARE)))
        return rc;
    if (npinch > 0 && (rc = warn(cal, err,
                                 "%zu sample(s) at a pinch have no stage count; the "
                                 "composition-space fit still uses their windows",
                                 npinch)))
        return rc;
    return STAGECAL_OK;
}

int calibrate_flag_runs(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                        unsigned char *skip, stagecal_error *err)
{
    const stagecal_runlog_result *res = &cal->res;
    size_t n = 0;
    for (size_t r = 0; r < res->nruns; r++)
        n += res->closures[r].gross || res->closures[r].drift;
    cal->flagged = calloc(n ? n : 1, sizeof *cal->flagged);
    if (!cal->flagged)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t r = 0; r < res->nruns; r++) {
        const stagecal_runlog_closure *c = &res->closures[r];
        if (!c->gross && !c->drift)
            continue;
        stagecal_flagged_run *f = &cal->flagged[cal->nflagged++];
        f->run = r;
        f->left_out = !par->keep_flagged;
        skip[r] = (unsigned char)f->left_out;
        for (size_t w = 0; w < res->nwindows; w++)
            f->windows += res->windows[w].run == r;
        char g[100] = "", d[140] = "";
        if (c->gross)
            snprintf(g, sizeof g, "gross error: Rayleigh closure %+.2f %% ± %.2f %%",
                     100 * c->closure, 100 * c->u_closure);
        if (c->drift) {
            int j = c->drift_analyser == STAGECAL_DRIFT_DISTILLATE ? 0 : 1;
            double rate = c->sig[j].n_bal || c->sig[j].n_stg ? c->sig[j].d : c->drift_per_h;
            if (c->drift_analyser == STAGECAL_DRIFT_UNATTRIBUTED)
                snprintf(d, sizeof d, "analyser drift, unattributed (balance xB %+.2g /h)",
                         c->drift_per_h);
            else
                snprintf(d, sizeof d, "analyser drift: %s %+.2g /h",
                         stagecal_drift_analyser_name(c->drift_analyser), rate);
        }
        snprintf(f->reason, sizeof f->reason, "%s%s%s", g, g[0] && d[0] ? "; " : "", d);
    }
    return STAGECAL_OK;
}

/* Windows at total reflux only (no distillate drawn anywhere) give the stage count at one
 * condition, R = inf: no relation to the reflux ratio can be fitted, and no envelope of R
 * a planner could use. Refused as bad data naming the logs (issue 18 item 8: it ended in
 * exit 2 with the model check's "envelope: R range [inf, inf]", naming no file). */
static int all_total_reflux(const stagecal_calibration *cal, stagecal_error *err)
{
    const stagecal_runlog *log = cal->log;
    for (size_t i = 0; i < cal->evidence.n; i++)
        if (!cal->evidence.ev[i].total_reflux && isfinite(cal->evidence.ev[i].r))
            return STAGECAL_OK;
    char names[400] = "";
    size_t k = 0, shown = 0;
    for (size_t f = 0; f < log->nfiles && shown < 3; f++, shown++)
        k += (size_t)snprintf(names + k, k < sizeof names ? sizeof names - k : 0, "%s'%s'",
                              f ? ", " : "", log->files[f]);
    if (log->nfiles > shown && k < sizeof names)
        snprintf(names + k, sizeof names - k, " and %zu more", log->nfiles - shown);
    return error_set(err, STAGECAL_EDATA,
                     "%s: all %zu quasi-steady window(s) are at total reflux (no distillate "
                     "drawn): the stage count is known at R = inf only, so no relation to the "
                     "reflux ratio can be fitted (expected windows at a finite reflux ratio, "
                     "i.e. steady stretches with distillate drawn)",
                     names, cal->evidence.n);
}

/* The chain after the evidence: fits, model. */
static int finish_chain(stagecal_calibration *cal, const char *column_path,
                        const stagecal_calibrate_params *par, stagecal_error *err);

/* The chain after reading a held log: inversion, evidence, fits, model. */
static int run_chain(stagecal_calibration *cal, const char *column_path,
                     const stagecal_calibrate_params *par, stagecal_error *err)
{
    int rc;
    cal->stage_status = CAL_NOT_RUN;
    cal->comp_status = CAL_NOT_RUN;
    cal->cens_status = CAL_NOT_RUN;
    progress(par, "inverting", 0.2);
    /* the drift and balance checks see the compensated distillate the evidence will use; with
     * the compensation off for the fit they still take the column's own (AUTO): the lag of an
     * uncompensated distillate would read as an analyser drift */
    stagecal_runlog_analysis_params ap = par->analysis;
    ap.holdup = par->evidence.holdup == STAGECAL_HOLDUP_COMP_NONE ? STAGECAL_EVIDENCE_HOLDUP_AUTO
                                                                  : par->evidence.holdup;
    if ((rc = stagecal_runlog_analyse(cal->log, cal->column, &ap, &cal->res, err)) ||
        (rc = runlog_invert_threads(cal->log, cal->column, par->murphree, &ap, NULL, par->threads,
                                    &cal->res, err)))
        return rc;
    const stagecal_runlog *log = cal->log;
    if (!(cal->run_rows = calloc(log->nruns ? log->nruns : 1, sizeof *cal->run_rows)))
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t k = 0; k < log->nruns; k++)
        calibrate_run_rows(&log->runs[k], &cal->res, log->runs[k].first, &cal->run_rows[k]);
    progress(par, "windows", 0.5);
    unsigned char *skip = calloc(cal->log->nruns ? cal->log->nruns : 1, 1);
    if (!skip)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    stagecal_evidence_params ep = par->evidence;
    ep.skip_run = skip;
    ep.threads = par->threads;
    if ((rc = calibrate_flag_runs(cal, par, skip, err)) == STAGECAL_OK)
        rc = stagecal_evidence_build(cal->log, &cal->res, cal->column, par->murphree, &ep,
                                     &cal->evidence, err);
    free(skip);
    if (rc)
        return rc;
    return finish_chain(cal, column_path, par, err);
}

static int finish_chain(stagecal_calibration *cal, const char *column_path,
                        const stagecal_calibrate_params *par, stagecal_error *err)
{
    const stagecal_regress_result *fit = NULL;
    int rc;
    size_t nleft = 0;
    for (size_t k = 0; k < cal->nflagged; k++)
        nleft += cal->flagged[k].left_out;
    if (cal->evidence.n == 0)
        return error_set(err, STAGECAL_EDATA,
                         "no quasi-steady window in the run logs: nothing to calibrate on "
                         "(%zu samples read; %zu flagged run(s) left out, keep flagged runs to "
                         "use them)",
                         cal->log->n, nleft);
    if ((rc = all_total_reflux(cal, err)))
        return rc;
    if ((rc = run_fits(cal, par, &fit, err)) || (rc = calibrate_run_test(cal, err)))
        return rc;
    progress(par, "model", 0.95);
    if ((rc = fill_model(cal, par, column_path, fit, err)) || (rc = add_warnings(cal, par, err)))
        return rc;
    progress(par, "done", 1);
    return STAGECAL_OK;
}

int stagecal_calibrate_data(const stagecal_column *col, const char *column_path,
                            const stagecal_runlog *log, const stagecal_calibrate_params *params,
                            stagecal_calibration *cal, stagecal_error *err)
{
    stagecal_calibrate_params defp = stagecal_calibrate_default_params();
    memset(cal, 0, sizeof *cal);
    stagecal_model_init(&cal->model);
    if (!col || !log || !col->system.vle)
        return error_set(err, STAGECAL_EINVAL,
                         "calibration needs a column with an equilibrium model and a run log");
    cal->column = col;
    cal->log = log;
    return run_chain(cal, column_path, params ? params : &defp, err);
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
    if ((rc = stagecal_column_load(column_path, &cal->own_column, err)))
        return rc;
    cal->column = &cal->own_column;
    cal->own_log = stagecal_runlog_alloc();
    cal->log = cal->own_log;
    cal->findings = stagecal_findings_alloc(par->read.max_findings ? par->read.max_findings : 1000);
    if (!cal->own_log || !cal->findings)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    if (calibrate_stream_possible(cal->column, logs, nlogs, par)) {
        cal->stage_status = CAL_NOT_RUN;
        cal->comp_status = CAL_NOT_RUN;
        cal->cens_status = CAL_NOT_RUN;
        if ((rc = calibrate_stream(cal, logs, nlogs, par, err)))
            return rc;
        return finish_chain(cal, column_path, par, err);
    }
    /* the logs share the soft sensor's models at the pressures they meet */
    stagecal_runlog_params rp = par->read;
    stagecal_physics *soft = runlog_soft_share(cal->column, &rp);
    for (size_t k = 0; k < nlogs && rc == 0; k++) {
        progress(par, "reading", (double)k / (double)nlogs);
        rc = stagecal_runlog_read(cal->own_log, logs[k], cal->column, &rp, cal->findings, err);
    }
    stagecal_physics_free(soft);
    if (rc)
        return rc;
    /* the whole log is held through the chain: not the doubling's unused tail as well (at 10^7
     * rows it held 6.8·10^6 rows' worth of NaN) */
    runlog_shrink_rows(cal->own_log);
    if (cal->findings->n_errors > 0)
        return error_set(err, STAGECAL_EDATA, "%zu error(s) in the run logs, first: %s",
                         cal->findings->n_errors,
                         cal->findings->n ? cal->findings->items[0].text : "(not kept)");
    return run_chain(cal, column_path, par, err);
}
