/*
 * calibrate_cens.c — the calibration's censored-likelihood fit: where a window holds
 * readings at an analyser's limit (or below a detection limit), the correlation is fitted
 * on every reading, censored ones as bounds (stagecal/censor.h, Tobin 1958), and the model
 * says "at least N stages" where the evidence bounds the count from below only.
 */
#include <gsl/gsl_cdf.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "calibrate_internal.h"
#include "evidence_internal.h"
#include "internal.h"

/* The fit as the printers take it (see stagecal_calibration.cens_fit). */
static void as_result(const stagecal_calibration *cal, const stagecal_form *form,
                      stagecal_regress_result *r)
{
    const stagecal_censored_fit *c = &cal->cens;
    const stagecal_evidence *ev = cal->evidence.cens;
    size_t p = form->p;
    memset(r, 0, sizeof *r);
    r->form = *form;
    r->n = c->n_windows;
    r->p = p;
    double dof = (double)c->n_readings - (double)p - (double)c->n_windows;
    r->dof = dof >= 1 ? dof : 1;
    r->level = c->level;
    r->tquant = NAN;
    r->loglik = c->loglik;
    for (size_t j = 0; j < p; j++) {
        r->theta[j] = c->theta[j];
        r->se[j] = c->has_cov ? sqrt(c->cov[j * p + j]) : NAN;
        r->ci_low[j] = c->par[j].low;
        r->ci_high[j] = c->par[j].high;
        r->param_dof[j] = r->dof; /* profile-likelihood intervals: no t, the dof as stated */
        if (!c->par[j].low_bounded && !c->par[j].high_bounded)
            r->undetermined |= 1u << j;
        for (size_t k = 0; k < p && c->has_cov; k++)
            r->cov[j * p + k] = c->cov[j * p + k];
    }
    r->r_min = INFINITY;
    r->r_max = 0;
    r->f_min = INFINITY;
    r->f_max = 0;
    for (size_t i = 0; i < cal->evidence.ncens; i++) {
        if (isinf(ev[i].r)) {
            r->has_total_reflux = 1;
        } else {
            r->r_min = fmin(r->r_min, ev[i].r);
            r->r_max = fmax(r->r_max, ev[i].r);
        }
        if (ev[i].has_load) {
            r->f_min = fmin(r->f_min, ev[i].f_load);
            r->f_max = fmax(r->f_max, ev[i].f_load);
        }
    }
    if (!isfinite(r->r_min))
        r->r_min = r->r_max = 0;
    if (!isfinite(r->f_min))
        r->f_min = r->f_max = 0;
    evidence_stage_scatter(cal->evidence.ev, cal->evidence.n, form, c->theta, &r->sigma_obs,
                           &r->sigma_dof);
    r->sigma = r->sigma_obs;
}

/* The reference condition of the stages reported (the HETP's): --reflux, else the
 * largest fitted R; --f-factor, else the middle of the fitted F range. */
static void reference(const stagecal_calibration *cal, const stagecal_calibrate_params *par,
                      double *r, double *f)
{
    const stagecal_regress_result *c = &cal->cens_fit;
    *r = !isnan(par->hetp_r) ? par->hetp_r : c->has_total_reflux ? INFINITY : c->r_max;
    *f = !isnan(par->hetp_f) ? par->hetp_f : 0.5 * (c->f_min + c->f_max);
}

int calibrate_censoring_matters(const stagecal_calibration *cal)
{
    const stagecal_evidence_set *es = &cal->evidence;
    size_t any = 0;
    for (size_t i = 0; i < es->ncens; i++)
        for (size_t j = 0; j < es->cens[i].m && !any; j++)
            any = es->cens[i].s_cens[j] != 0;
    if (!any)
        return 0;
    if (es->ncens > es->n)
        return 1; /* a window that is evidence only through its censored readings */
    for (size_t i = 0; i < es->n; i++) {
        const stagecal_evidence *e = &es->ev[i];
        double n = (double)e->n_samples;
        if ((!e->xd_tobit && (double)e->n_cens_xd >= CAL_CENS_SHARE * n) ||
            (double)e->n_cens_xb >= CAL_CENS_SHARE * n)
            return 1;
    }
    return 0;
}

/* The model file carries a two-sided fit as θ̂ with a covariance (symmetric intervals);
 * where the profile-likelihood interval is far from θ̂ ± z·se (an end off by more than
 * CAL_CENS_QUAD of its width: the likelihood is far from quadratic, typically a latent
 * distillate near pure), the covariance would misstate it. Then a one-parameter fit keeps
 * the profile interval's low end as an "at least" bound (two-sided level, so it holds at
 * least as often as the one-sided bound) and a larger form is refused. */
static int quadratic_check(stagecal_censored_fit *c, const stagecal_form *form, stagecal_error *err)
{
    if (c->one_sided || !c->has_cov)
        return STAGECAL_OK;
    double z = gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * c->level);
    for (size_t j = 0; j < c->p; j++) {
        stagecal_censored_interval *a = &c->par[j];
        double se = sqrt(c->cov[j * c->p + j]), w = a->high - a->low;
        if (fabs(c->theta[j] - z * se - a->low) <= CAL_CENS_QUAD * w &&
            fabs(c->theta[j] + z * se - a->high) <= CAL_CENS_QUAD * w)
            continue;
        if (c->p > 1)
            return error_set(err, STAGECAL_EDATA,
                             "the likelihood of form '%s' is far from quadratic (parameter '%s': "
                             "profile interval %.4g to %.4g, covariance gives %.4g to %.4g): a "
                             "model file's covariance would misstate it; what would help: "
                             "--form constant, or readings the analyser resolves",
                             form->name, form->param_names[j], a->low, a->high,
                             c->theta[j] - z * se, c->theta[j] + z * se);
        a->high = NAN;
        a->high_bounded = 0;
        c->one_sided = 1;
        c->has_cov = 0;
    }
    return STAGECAL_OK;
}

int calibrate_censored(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                       stagecal_form *form, int *fallback, stagecal_error *err)
{
    const stagecal_evidence_set *es = &cal->evidence;
    double theta0[STAGECAL_FORM_MAXP] = {0};
    int rc;
    *fallback = 0;
    if (es->ncens == 0)
        return error_set(err, STAGECAL_EDATA,
                         "no window has 3 rows with both readings (values or censored)");
    for (;;) {
        const double *t0 = NULL;
        if (form->kind != STAGECAL_FORM_CONSTANT) {
            if (cal->stage_status != STAGECAL_OK || cal->stage_fit.p != form->p)
                return error_set(err, STAGECAL_EDATA,
                                 "form '%s' needs the stage-space fit as its start, which "
                                 "failed (%s); --form constant needs no start",
                                 form->name, cal->stage_message);
            memcpy(theta0, cal->stage_fit.theta, sizeof theta0);
            t0 = theta0;
        }
        if ((rc = stagecal_fit_censored(cal->column, par->murphree, es->cens, es->ncens, form, t0,
                                        par->level, 1, CAL_CENS_STAGES_MAX, &cal->cens, err)))
            return rc;
        if (!cal->cens.one_sided || form->p == 1)
            break;
        if (strcmp(par->form, "auto") != 0)
            return error_set(err, STAGECAL_EDATA,
                             "the evidence bounds the stage count from one side only (%zu of %zu "
                             "readings censored, e.g. a distillate analyser at its limit): form "
                             "'%s' has %zu parameters, which a one-sided answer cannot carry; "
                             "what would help: --form constant for 'at least N stages', or "
                             "readings the analyser resolves (the impurity in ppm as xD_heavy)",
                             cal->cens.n_censored, cal->cens.n_readings, form->name, form->p);
        if ((rc = stagecal_form_parse("constant", form, err)))
            return rc;
        *fallback = 1;
    }
    if ((rc = quadratic_check(&cal->cens, form, err)))
        return rc;
    const stagecal_censored_interval *a = &cal->cens.par[0];
    if (cal->cens.one_sided && !(a->low_bounded && !a->high_bounded))
        return error_set(err, STAGECAL_EDATA,
                         "the evidence does not bound the stage count from below (%s): "
                         "not determined; what would help: readings the analysers resolve, "
                         "not only readings at their limits",
                         a->high_bounded ? "it gives an upper bound only" : "nor from above");
    if (!cal->cens.one_sided && !cal->cens.has_cov)
        return error_set(err, STAGECAL_EDATA,
                         "the observed information of form '%s' is not positive definite at the "
                         "maximum: its parameters are not determined by the evidence",
                         form->name);
    as_result(cal, form, &cal->cens_fit);
    reference(cal, par, &cal->cens_r, &cal->cens_f);
    rc = stagecal_censored_stages_at(cal->column, par->murphree, es->cens, es->ncens, form,
                                     &cal->cens, cal->cens_r, cal->cens_f, par->level,
                                     &cal->cens_at, err);
    if (rc == STAGECAL_OK && cal->cens.one_sided) { /* the model's answer: "at least" */
        cal->cens_at.high = NAN;
        cal->cens_at.high_bounded = 0;
    }
    return rc;
}

void calibrate_censored_model(const stagecal_calibration *cal, stagecal_model *mo)
{
    const stagecal_censored_fit *c = &cal->cens;
    const stagecal_regress_result *r = &cal->cens_fit;
    size_t p = c->p;
    mo->method = STAGECAL_MODEL_CENSORED;
    mo->n_windows = c->n_windows;
    mo->n_samples = 0;
    for (size_t i = 0; i < cal->evidence.ncens; i++)
        mo->n_samples += cal->evidence.cens[i].n_samples;
    mo->sigma = r->sigma_obs;
    mo->dof = r->dof;
    memset(mo->cov, 0, sizeof mo->cov);
    if (c->one_sided) { /* constant only (calibrate_censored): the bound is the parameter's */
        mo->one_sided = 1;
        memcpy(mo->theta_ml, c->theta, p * sizeof *c->theta);
        mo->theta[0] = c->par[0].low;
    } else if (c->has_cov) {
        memcpy(mo->cov, c->cov, p * p * sizeof *c->cov);
    }
}
