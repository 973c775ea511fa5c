/*
 * regress_composition.c — the composition-space fit of a correlation form (see
 * stagecal/calibrate.h), a problem for the shared least-squares driver (regress_nlin.c).
 *
 * For window i at R_i, F_i the correlation predicts N_i = stages(R_i, F_i; θ); forward
 * stepping N_i stages down from each logged xD_ij (thinned samples of the window) gives
 * the predicted pot composition x̂B_ij(θ), so a drifting pot is followed sample by sample.
 * The residual is compared in log-odds space after averaging over the window's samples,
 *     r_i(θ) = [logit mean_j x̂B_ij(θ) − logit mean_j xB_ij] / s_i,
 *     s_i² = (u(xB_i)/(xB_i(1 − xB_i)))² + (∂logit x̂B_i/∂xD · u(xD_i))²
 *            + (∂logit x̂B_i/∂R · u(R_i))²   (R_i the window's set point, evidence.h),
 * the effective-variance treatment of an error-carrying regressor (Orear 1982,
 * Am. J. Phys. 50, 912 — citation from memory), with s_i fixed at the starting θ.
 * θ minimises Σ r_i² (the driver's trust region with the caller's tolerances, central
 * finite-difference Jacobian since each residual needs a forward step, then the
 * Gauss–Newton polish); covariance s²(JᵀJ)⁻¹ with s² = Σ r_i²/(n − p), intervals and
 * envelope as for the stage-space fit (stagecal_regress_covar, stagecal_regress_envelope).
 */
#include "stagecal/calibrate.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "evidence_internal.h"
#include "internal.h"
#include "parallel.h"
#include "stagecal/stages.h"

/* Largest stage count the composition fit will step (keeps a wild trial θ bounded). */
#define COMP_MAX_STAGES 2000.0
/* log-odds are taken of compositions clipped to [LOGIT_EPS, 1 − LOGIT_EPS]. */
#define LOGIT_EPS 1e-14

static double logit(double x)
{
    if (x < LOGIT_EPS)
        x = LOGIT_EPS;
    if (x > 1 - LOGIT_EPS)
        x = 1 - LOGIT_EPS;
    return log(x / (1 - x));
}

struct comp_ctx {
    const stagecal_vle *vle;
    double murphree;
    const stagecal_evidence *ev;
    size_t n;
    const stagecal_form *form;
    double *scale; /* s_i */
    stagecal_stages_params sp;
    size_t threads; /* beside the calling one, for the residual vector (params.threads) */
    /* the residual vector being evaluated (comp_f): θ and f */
    const double *theta;
    double *f;
};

/* The stage count the correlation gives window e at reflux r and θ, kept in [1,
 * COMP_MAX_STAGES]. */
static double count_at(const struct comp_ctx *c, const stagecal_evidence *e, double r,
                       const double *theta)
{
    double nst = 1;
    if (stagecal_form_eval(c->form, theta, r, e->f_load, &nst, NULL) != STAGECAL_OK ||
        !isfinite(nst))
        nst = 1;
    if (nst < 1)
        nst = 1;
    if (nst > COMP_MAX_STAGES)
        nst = COMP_MAX_STAGES;
    return nst;
}

/* Predicted logit xB at reflux r (conditions cond, or NULL) for nst stages (count_at) from
 * distillate xd. */
static double predict_n(struct comp_ctx *c, const stagecal_physics_cond *cond, double r, double nst,
                        double xd)
{
    double xb = xd;
    int status = STAGECAL_STAGES_INVALID;
    size_t len = 0;
    int rc = cond ? stagecal_physics_step(cond, xd, nst, c->murphree, &c->sp, &xb, &status, NULL)
                  : stagecal_stages_step(c->vle, xd, r, nst, c->murphree, &c->sp, &xb, NULL, 0,
                                         &len, &status, NULL);
    if (rc != STAGECAL_OK || status != STAGECAL_STAGES_OK) {
        /* No pot composition (an azeotrope in the way): predict "no separation"
         * so that such θ is penalised rather than undefined. */
        xb = xd;
    }
    return logit(xb);
}

/* Predicted logit xB for window e at reflux r (its conditions cond, or NULL), θ and
 * distillate xd. */
static double predict_at(struct comp_ctx *c, const stagecal_evidence *e,
                         const stagecal_physics_cond *cond, double r, const double *theta,
                         double xd)
{
    return predict_n(c, cond, r, count_at(c, e, r, theta), xd);
}

/* Predicted logit xB for window i at θ and distillate xd. */
static double predict_logit(struct comp_ctx *c, size_t i, const double *theta, double xd)
{
    return predict_at(c, &c->ev[i], c->ev[i].cond, c->ev[i].r, theta, xd);
}

/* ∂ logit x̂B/∂R of window i at θ (central difference; the internal reflux of subcooled
 * reflux scales with R: R_int = R·(1 + cp·ΔT/λ)). */
static double dlogit_dr(struct comp_ctx *c, size_t i, const double *theta)
{
    const stagecal_evidence *e = &c->ev[i];
    double h = 1e-4 * e->r, lg[2];
    for (int k = 0; k < 2; k++) {
        double r = e->r + (k ? h : -h);
        stagecal_physics_cond q, *pq = NULL;
        if (e->cond) {
            q = *e->cond;
            q.reflux = r;
            q.r_int = e->cond->r_int * r / e->r;
            pq = &q;
        }
        lg[k] = predict_at(c, e, pq, r, theta, e->xd);
    }
    return (lg[1] - lg[0]) / (2 * h);
}

static double expit(double l)
{
    return 1 / (1 + exp(-l));
}

/* The predicted pot composition from one noisy reading xd of window i, less the convexity
 * (Jensen) term of the forward map f: xd -> x̂B: E f(xd + e) = f(xd) + ½ f''(xd) σ² + O(σ⁴)
 * for reading noise e of standard deviation σ (the window's sd_xd), so
 *     f(xd) − ½ [f(xd + h) − 2 f(xd) + f(xd − h)],  h = σ,
 * has expectation f(xd_true) + O(σ⁴): a corrected score (Carroll, Ruppert, Stefanski &
 * Crainiceanu 2006, Measurement Error in Nonlinear Models, 2nd ed., ch. 7; the central
 * difference with h = σ is the symmetric sigma-point form of ½ f'' σ²). h is kept below
 * half the distance to xd = 1 (the second difference is then more local). Without a noise
 * estimate (sd_xd = 0): f(xd). */
static double pot_corrected(struct comp_ctx *c, size_t i, double nst, double xd)
{
    const stagecal_evidence *e = &c->ev[i];
    double f0 = expit(predict_n(c, e->cond, e->r, nst, xd));
    if (e->xd_tobit)
        return f0; /* a censored window's Tobit trend: a smoothed value, not a noisy reading */
    double h = fmin(e->sd_xd, 0.5 * (1 - xd));
    if (!(h > 0) || !(xd - h > 0))
        return f0;
    double fp = expit(predict_n(c, e->cond, e->r, nst, xd + h));
    double fm = expit(predict_n(c, e->cond, e->r, nst, xd - h));
    return f0 - 0.5 * (fp - 2 * f0 + fm);
}

/* Window i's residual: the log-odds of the mean predicted pot composition (each sample
 * predicted from its own xD, so a drifting pot is followed) minus the log-odds of the
 * mean measured one. Averaging compositions before the log-odds, not after, keeps the
 * analyser noise of a lean pot from biasing the residual. Without samples: the means. */
static double window_residual(struct comp_ctx *c, size_t i, const double *theta)
{
    const stagecal_evidence *e = &c->ev[i];
    if (e->m == 0 || !e->s_xd || !e->s_xb)
        return predict_logit(c, i, theta, e->xd) - logit(e->xb);
    double sp = 0, sm = 0, nst = count_at(c, e, e->r, theta); /* one count for the window */
    for (size_t j = 0; j < e->m; j++) {
        sp += pot_corrected(c, i, nst, e->s_xd[j]);
        sm += e->s_xb[j];
    }
    return logit(sp / (double)e->m) - logit(sm / (double)e->m);
}

/* Windows per item of the threaded residual vector. */
#define COMP_BLOCK 8

/* The residuals of one block of windows (each computed from its window alone). */
static int comp_block(void *ctx, size_t item, size_t worker, stagecal_error *err)
{
    struct comp_ctx *c = ctx;
    size_t i1 = (item + 1) * COMP_BLOCK < c->n ? (item + 1) * COMP_BLOCK : c->n;
    (void)worker, (void)err;
    for (size_t i = item * COMP_BLOCK; i < i1; i++)
        c->f[i] = window_residual(c, i, c->theta) / c->scale[i];
    return STAGECAL_OK;
}

/* The residual vector; its windows shared among the threads (parallel.h), every f[i] the same
 * double whatever their number. */
static int comp_f(const double *theta, void *params, double *f)
{
    struct comp_ctx *c = params;
    c->theta = theta;
    c->f = f;
    parallel_for((c->n + COMP_BLOCK - 1) / COMP_BLOCK, c->threads, comp_block, c, NULL);
    return 0;
}

/* How much noisier the mean of a window's carried samples is than the mean of all its m_all
 * readings, whose standard error u_xd (u_xb) states: the residual averages the carried
 * samples only (at most the evidence's max_samples, evenly thinned), so its weight must be
 * that of their mean. √(V_c/V_a) with the variance factors of the two means under the
 * window's (pooled) lag-1 autocorrelation rho per reading interval Δ — V_a = [1 + 2 Σ_k (1 −
 * k/n) ρ^k]/n for n evenly spaced readings, V_c = Σ_ij ρ^(|t_i − t_j|/Δ)/m² over the carried
 * times (Wilks 2011 §5.2.4 for the former — from memory), Δ the carried span over n − 1. 1
 * when every reading is carried. With the weight of all readings, a window carrying 24 of
 * 35–41 readings had an error 1.2–1.3 times the stated one (the total-reflux windows of the
 * measured-R study, docs/calibration.md §5b). */
double regress_carried_factor(const stagecal_evidence *e, double rho, size_t m_all)
{
    size_t m = e->m;
    if (m == 0 || !e->s_t || m >= m_all)
        return 1.0;
    double span = e->s_t[m - 1] - e->s_t[0], dt = span / (double)(m_all - 1);
    if (!(rho > 0) || !(dt > 0))
        return sqrt((double)m_all / (double)m);
    double va = 1, n = (double)m_all, pk = 1;
    for (size_t k = 1; k < m_all && pk > 1e-12; k++) {
        pk *= rho;
        va += 2 * (1 - (double)k / n) * pk;
    }
    va /= n;
    double vc = 0;
    for (size_t i = 0; i < m; i++)
        for (size_t j = 0; j < m; j++)
            vc += pow(rho, fabs(e->s_t[i] - e->s_t[j]) / dt);
    vc /= (double)m * (double)m;
    return vc > va ? sqrt(vc / va) : 1.0;
}

/* Effective standard deviation of each window's log-odds at theta0 (see the top). */
static void comp_scales(struct comp_ctx *c, const double *theta0)
{
    for (size_t i = 0; i < c->n; i++) {
        const stagecal_evidence *e = &c->ev[i];
        double lx = e->u_xb * regress_carried_factor(e, e->rho_xb, e->m_xb) / (e->xb * (1 - e->xb));
        double h = 1e-6 * (1 - e->xd) + 1e-9;
        double xhi = e->xd + h < 1 ? e->xd + h : e->xd;
        double xlo = e->xd - h;
        double g =
            (predict_logit(c, i, theta0, xhi) - predict_logit(c, i, theta0, xlo)) / (xhi - xlo);
        double ld = g * e->u_xd * regress_carried_factor(e, e->rho_xd, e->m_xd);
        /* a measured reflux's uncertainty (errors in R as well as in the compositions) */
        double lr = e->u_r > 0 && isfinite(e->r) ? dlogit_dr(c, i, theta0) * e->u_r : 0.0;
        c->scale[i] = sqrt(lx * lx + ld * ld + lr * lr);
        if (!(c->scale[i] > 0))
            c->scale[i] = 1e-6; /* no stated uncertainty: equal weights, scaled by s² */
    }
}

int stagecal_fit_composition(const stagecal_vle *vle, double murphree, const stagecal_evidence *ev,
                             size_t nev, const stagecal_form *form, const double *theta0,
                             const stagecal_regress_params *params, stagecal_regress_result *result,
                             stagecal_error *err)
{
    stagecal_regress_params par = params ? *params : stagecal_regress_default_params();
    size_t p = form ? form->p : 0, n = nev;
    int rc;

    if (!vle || !ev || !form || !theta0 || !result)
        return error_set(err, STAGECAL_EINVAL, "composition fit: NULL argument");
    memset(result, 0, sizeof *result);
    if (!(par.level > 0 && par.level < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "composition fit: level %g (expected a value in (0, 1))", par.level);
    if (n < p + 1)
        return error_set(err, STAGECAL_EDATA,
                         "composition fit needs at least %zu windows for %zu parameters, got %zu",
                         p + 1, p, n);
    for (size_t i = 0; i < n; i++) {
        if (form->uses_load && !ev[i].has_load)
            return error_set(err, STAGECAL_EDATA,
                             "form '%s' needs the vapour load, but window %zu has no F-factor",
                             form->name, i + 1);
        if (!(ev[i].xb > 0 && ev[i].xb < ev[i].xd && ev[i].xd < 1))
            return error_set(err, STAGECAL_EDATA,
                             "window %zu: mean compositions xB = %g, xD = %g are not 0 < xB < xD "
                             "< 1",
                             i + 1, ev[i].xb, ev[i].xd);
    }

    struct comp_ctx c = {
        vle,         murphree, ev,  n, form, NULL, stagecal_stages_default_params(),
        par.threads, NULL,     NULL};
    c.sp.max_stages = (size_t)COMP_MAX_STAGES + 10;
    c.scale = malloc(n * sizeof *c.scale);
    stagecal_regress_nlin *w = stagecal_regress_nlin_alloc(n, p);
    double *r = malloc(2 * n * sizeof *r);
    if (!c.scale || !w || !r) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        goto done;
    }
    comp_scales(&c, theta0);
    stagecal_regress_fdf fdf = {comp_f, NULL, n, p, &c};
    double theta[STAGECAL_FORM_MAXP], rss;
    stagecal_error e2;
    stagecal_error_clear(&e2);
    if ((rc = stagecal_regress_nlin_init(w, &fdf, theta0, &par, &e2)) ||
        (rc = stagecal_regress_nlin_driver(w, &e2))) {
        rc = error_set(err, rc, "composition fit did not converge: %s", e2.text);
        goto done;
    }
    memcpy(theta, stagecal_regress_nlin_position(w), p * sizeof *theta);
    rss = stagecal_regress_nlin_rss(w);
    result->form = *form;
    result->polish = stagecal_regress_nlin_polish(w, theta, &rss);
    result->iterations = stagecal_regress_nlin_niter(w);
    result->stop = stagecal_regress_nlin_stop(w);
    result->starts = 1;
    result->weighted = 1;
    /* s² from the standardised log-odds residuals: their scale is estimated, not assumed */
    if ((rc = stagecal_regress_covar(&fdf, theta, 1, &par, result, err)))
        goto done;
    result->loglik = -0.5 * result->rss;
    /* σ and its dof in stage space: what a planner's prediction band needs */
    evidence_stage_scatter(ev, n, form, result->theta, &result->sigma, &result->sigma_dof);
    result->sigma_obs = result->sigma;
    for (size_t i = 0; i < n; i++) {
        r[i] = ev[i].r;
        r[n + i] = ev[i].has_load ? ev[i].f_load : 0;
    }
    /* F range only when every window has a load, as in the stage-space points */
    int all_load = 1;
    for (size_t i = 0; i < n; i++)
        all_load &= ev[i].has_load;
    stagecal_regress_envelope(r, all_load ? r + n : NULL, n, result);

done:
    stagecal_regress_nlin_free(w);
    free(c.scale);
    free(r);
    return rc;
}
