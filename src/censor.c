/*
 * censor.c — the censored errors-in-variables likelihood of one-parameter forms (see
 * stagecal/censor.h for the model). Inner problem: each window's latent ζ = logit xD by
 * a scan and GSL's Brent minimiser; outer: the parameter by a scan and Brent, the
 * interval ends by GSL's Brent root finder on the profile deviance.
 */
#include "stagecal/censor.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_roots.h>
#include <gsl/gsl_sf_erf.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"

#define ZETA_MAX 30.0 /* latent xD up to 1 − 9e-14 */
#define ZETA_SCAN 24  /* scan points of the inner problem */
#define THETA_SCAN 24 /* scan points of the outer problem */
#define MAX_ITER 100
#define PURE_SIGMAS 3.0 /* latent impurity below this many u(xD): indistinguishable from pure */

struct cctx {
    const stagecal_column *col;
    double murphree;
    const stagecal_evidence *ev;
    size_t nev;
    const stagecal_form *form;
    stagecal_stages_params sp;
    /* the window and stage count of the inner problem */
    const stagecal_evidence *e;
    double nst;
    int at_cap; /* some window's latent xD went to the top of its range (profile_ll) */
};

/* log Φ(z), accurate in the far tails (GSL's log erfc). */
static double log_phi_cdf(double z)
{
    return log(0.5) + gsl_sf_log_erfc(-z / M_SQRT2);
}

/* A reading's log-likelihood given the true value x (see censor.h). */
static double log_reading(double y, int below, int above, double x, double u)
{
    double z = (y - x) / u;
    if (above)
        return log_phi_cdf(-z);
    if (below)
        return log_phi_cdf(z);
    return -0.5 * z * z - log(u) - 0.5 * log(2 * M_PI);
}

/* Window log-likelihood at the latent ζ (c->e, c->nst). */
static double window_ll(struct cctx *c, double zeta)
{
    const stagecal_evidence *e = c->e;
    double xd = 1 / (1 + exp(-zeta)), xb = xd;
    int status = STAGECAL_STAGES_INVALID;
    size_t len = 0;
    if (stagecal_stages_step(c->col->system.vle, xd, e->r, c->nst, c->murphree, &c->sp, &xb, NULL,
                             0, &len, &status, NULL) != STAGECAL_OK ||
        status != STAGECAL_STAGES_OK)
        return -HUGE_VAL;
    double ll = 0, ud = stagecal_runlog_u_xd(c->col, xd), ub = stagecal_runlog_u_xb(c->col, xb);
    ud = GSL_MAX(ud, 1e-15); /* a purely relative u vanishes at the bound */
    ub = GSL_MAX(ub, 1e-15);
    for (size_t j = 0; j < e->m; j++) {
        unsigned f = e->s_cens ? e->s_cens[j] : 0;
        double yd = e->s_xd[j], yb = e->s_xb[j];
        /* u at the true (latent) composition: evaluated at the reading, a relative part
         * would weight low readings up and bias the fit */
        if (isfinite(yd))
            ll += log_reading(yd, f & STAGECAL_EVIDENCE_XD_BELOW, f & STAGECAL_EVIDENCE_XD_ABOVE,
                              xd, ud);
        if (isfinite(yb))
            ll += log_reading(yb, f & STAGECAL_EVIDENCE_XB_BELOW, f & STAGECAL_EVIDENCE_XB_ABOVE,
                              xb, ub);
    }
    return isfinite(ll) ? ll : -HUGE_VAL;
}

static double neg_window_ll(double zeta, void *p)
{
    double v = -window_ll(p, zeta);
    return isfinite(v) ? v : GSL_DBL_MAX / 4;
}

/* Brent minimisation of f on [a, b] from x0 (f(x0) below both ends); returns the
 * minimiser, or x0 when GSL cannot improve on it. */
static double brent_min(double (*f)(double, void *), void *p, double a, double x0, double b,
                        double tol)
{
    gsl_function F = {f, p};
    gsl_min_fminimizer *s = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
    if (!s)
        return x0;
    double x = x0;
    if (gsl_min_fminimizer_set(s, &F, x0, a, b) == GSL_SUCCESS) {
        for (int it = 0; it < MAX_ITER; it++) {
            if (gsl_min_fminimizer_iterate(s) != GSL_SUCCESS)
                break;
            x = gsl_min_fminimizer_x_minimum(s);
            if (gsl_min_test_interval(gsl_min_fminimizer_x_lower(s), gsl_min_fminimizer_x_upper(s),
                                      tol, 0) == GSL_SUCCESS)
                break;
        }
    }
    gsl_min_fminimizer_free(s);
    return x;
}

/* Scan f over [a, b] (n points, geometric when geo) and refine the best point by Brent. */
static double scan_min(double (*f)(double, void *), void *p, double a, double b, int n, int geo,
                       double tol, double *fmin)
{
    double best = HUGE_VAL, xs[THETA_SCAN > ZETA_SCAN ? THETA_SCAN : ZETA_SCAN];
    int k = 0;
    for (int i = 0; i < n; i++) {
        xs[i] = geo ? a * pow(b / a, (double)i / (n - 1)) : a + (b - a) * i / (n - 1);
        double v = f(xs[i], p);
        if (v < best) {
            best = v;
            k = i;
        }
    }
    double x = xs[k];
    if (k > 0 && k < n - 1) {
        x = brent_min(f, p, xs[k - 1], xs[k], xs[k + 1], tol);
        double v = f(x, p);
        if (!(v <= best))
            x = xs[k];
    }
    *fmin = f(x, p);
    return x;
}

/* Window i's log-likelihood with ζ profiled out, at stage count nst. */
static double window_profile(struct cctx *c, const stagecal_evidence *e, double nst)
{
    c->e = e;
    c->nst = nst;
    /* the latent xD lies above the pot: start the scan at the mean pot reading */
    double sb = 0;
    size_t nb = 0;
    for (size_t j = 0; j < e->m; j++)
        if (isfinite(e->s_xb[j])) {
            sb += e->s_xb[j];
            nb++;
        }
    double xb = nb ? sb / (double)nb : 0.5;
    xb = GSL_MIN(GSL_MAX(xb, 1e-9), 1 - 1e-9);
    double lo = log(xb / (1 - xb)), f;
    if (lo > ZETA_MAX - 1)
        lo = ZETA_MAX - 1;
    double z = scan_min(neg_window_ll, c, lo, ZETA_MAX, ZETA_SCAN, 0, 1e-9, &f);
    /* the latent distillate at the top of its range, or within PURE_SIGMAS of its
     * analyser's uncertainty of pure: the readings cannot tell it from pure */
    double h = 1 / (1 + exp(z)), ud = stagecal_runlog_u_xd(c->col, 1 - h);
    if (z > ZETA_MAX - 1 || h < PURE_SIGMAS * ud)
        c->at_cap = 1;
    return -f;
}

static double profile_ll(struct cctx *c, double theta)
{
    double ll = 0;
    c->at_cap = 0;
    for (size_t i = 0; i < c->nev; i++) {
        const stagecal_evidence *e = &c->ev[i];
        if (e->m == 0 || !e->s_xd || !e->s_xb)
            continue;
        double nst = 1;
        if (stagecal_form_eval(c->form, &theta, e->r, e->f_load, &nst, NULL) != STAGECAL_OK ||
            !(nst >= 1))
            return -HUGE_VAL;
        ll += window_profile(c, e, nst);
    }
    return ll;
}

static double neg_profile(double theta, void *p)
{
    double v = -profile_ll(p, theta);
    return isfinite(v) ? v : GSL_DBL_MAX / 4;
}

struct dev_ctx {
    struct cctx *c;
    double llmax, cut;
};

static double deviance_gap(double theta, void *p)
{
    struct dev_ctx *d = p;
    return 2 * (d->llmax - profile_ll(d->c, theta)) - d->cut;
}

/* The θ in [a, b] where the deviance gap changes sign (GSL Brent root finder). */
static double brent_root(struct dev_ctx *d, double a, double b)
{
    gsl_function F = {deviance_gap, d};
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    double x = 0.5 * (a + b);
    if (s && gsl_root_fsolver_set(s, &F, a, b) == GSL_SUCCESS) {
        for (int it = 0; it < MAX_ITER; it++) {
            if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
                break;
            x = gsl_root_fsolver_root(s);
            if (gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                       1e-6, 1e-9) == GSL_SUCCESS)
                break;
        }
    }
    gsl_root_fsolver_free(s);
    return x;
}

/* The first θ from th towards end (a scan of THETA_SCAN geometric steps, then Brent on
 * the step that crosses) where the deviance exceeds the cut; NAN when it never does. The
 * profile may come back up far away (a second, pinched branch), so the crossing nearest to
 * the maximum is the interval's end. */
static double first_crossing(struct dev_ctx *d, double th, double end)
{
    double prev = th;
    for (int k = 1; k <= THETA_SCAN; k++) {
        double x = th * pow(end / th, (double)k / THETA_SCAN);
        if (deviance_gap(x, d) > 0) {
            double g = deviance_gap(prev, d);
            if (!(g < 0))
                return prev;
            /* Brent needs finite values at both ends: pull a non-finite end in */
            while (!isfinite(deviance_gap(x, d)) && fabs(x - prev) > 1e-9 * fabs(prev))
                x = 0.5 * (x + prev);
            return brent_root(d, prev < x ? prev : x, prev < x ? x : prev);
        }
        prev = x;
    }
    return NAN;
}

static int check_args(const stagecal_column *col, const stagecal_evidence *ev, size_t nev,
                      const stagecal_form *form, double level, double lo, double hi,
                      stagecal_censored_fit *fit, stagecal_error *err)
{
    if (!col || !col->system.vle || !ev || !form || !fit)
        return error_set(err, STAGECAL_EINVAL, "censored fit: NULL argument");
    if (form->p != 1)
        return error_set(err, STAGECAL_EINVAL,
                         "censored fit: form '%s' has %zu parameters (only one-parameter forms, "
                         "e.g. constant, so far)",
                         form->name, form->p);
    if (!(level > 0.5 && level < 1) || !(lo > 0 && lo < hi && isfinite(hi)))
        return error_set(err, STAGECAL_EINVAL,
                         "censored fit: level %g (expected (0.5, 1)), range [%g, %g]", level, lo,
                         hi);
    memset(fit, 0, sizeof *fit);
    for (size_t i = 0; i < nev; i++) {
        const stagecal_evidence *e = &ev[i];
        if (e->m == 0 || !e->s_xd || !e->s_xb)
            continue;
        fit->n_windows++;
        for (size_t j = 0; j < e->m; j++) {
            unsigned f = e->s_cens ? e->s_cens[j] : 0;
            double yd = e->s_xd[j], yb = e->s_xb[j];
            if (isfinite(yd) && !(stagecal_runlog_u_xd(col, yd) > 0))
                return error_set(err, STAGECAL_EINVAL,
                                 "censored fit: xD reading %g of window %zu has no stated "
                                 "uncertainty (column file uncertainty.xd / xd_heavy_rel)",
                                 yd, i + 1);
            if (isfinite(yb) && !(stagecal_runlog_u_xb(col, yb) > 0))
                return error_set(err, STAGECAL_EINVAL,
                                 "censored fit: xB reading %g of window %zu has no stated "
                                 "uncertainty (column file uncertainty.xb / xb_rel)",
                                 yb, i + 1);
            fit->n_readings += (size_t)isfinite(yd) + (size_t)isfinite(yb);
            fit->n_censored += ((f & 3u) != 0) + ((f & 12u) != 0);
        }
    }
    if (fit->n_windows == 0)
        return error_set(err, STAGECAL_EDATA, "censored fit: no window carries samples");
    return STAGECAL_OK;
}

int stagecal_censored_loglik(const stagecal_column *col, double murphree,
                             const stagecal_evidence *ev, size_t nev, const stagecal_form *form,
                             double theta, double *loglik, stagecal_error *err)
{
    stagecal_censored_fit tmp;
    int rc = check_args(col, ev, nev, form, 0.95, 1, 2, &tmp, err);
    if (rc)
        return rc;
    struct cctx c = {col, murphree, ev, nev, form, stagecal_stages_default_params(), NULL, 1, 0};
    *loglik = profile_ll(&c, theta);
    return STAGECAL_OK;
}

int stagecal_fit_censored(const stagecal_column *col, double murphree, const stagecal_evidence *ev,
                          size_t nev, const stagecal_form *form, double level, double theta_lo,
                          double theta_hi, stagecal_censored_fit *fit, stagecal_error *err)
{
    int rc = check_args(col, ev, nev, form, level, theta_lo, theta_hi, fit, err);
    if (rc)
        return rc;
    struct cctx c = {col, murphree, ev, nev, form, stagecal_stages_default_params(), NULL, 1, 0};
    c.sp.max_stages = (size_t)theta_hi + 10;
    double fmin;
    double th = scan_min(neg_profile, &c, theta_lo, theta_hi, THETA_SCAN, 1, 1e-6, &fmin);
    fit->theta = th;
    fit->loglik = -fmin;
    fit->level = level;
    struct dev_ctx d = {&c, fit->loglik, gsl_cdf_chisq_Pinv(level, 1)};
    /* Which ends does the evidence bound at the two-sided cut? An end reached only because
     * a latent xD went to the top of its range (xD = 1 − 9e-14, as pure as a double tells)
     * or to within PURE_SIGMAS of its analyser's uncertainty of pure is set by that range,
     * not by the evidence: the readings cannot tell such a distillate from a purer one, so
     * more stages fit as well (a likelihood-ratio interval is not to be trusted at that
     * boundary). Not bounded. (Only the upper end: fewer stages need a less pure
     * distillate, which the readings can tell.) */
    double lo0 = th > theta_lo ? first_crossing(&d, th, theta_lo) : NAN;
    double hi0 = th < theta_hi ? first_crossing(&d, th, theta_hi) : NAN;
    int lo_b = isfinite(lo0), hi_b = isfinite(hi0);
    /* (checked a little beyond the end, where the latent xD is pushed against its range) */
    if (hi_b) {
        profile_ll(&c, GSL_MIN(hi0 * 1.02, theta_hi));
        hi_b = !c.at_cap;
    }
    fit->low = fit->high = NAN;
    if (lo_b != hi_b) { /* one end only: the other is a one-sided bound at the same level */
        d.cut = gsl_cdf_chisq_Pinv(2 * level - 1, 1);
        if (lo_b)
            lo0 = first_crossing(&d, th, theta_lo);
        else
            hi0 = first_crossing(&d, th, theta_hi);
    }
    if (lo_b && isfinite(lo0)) {
        fit->low = lo0;
        fit->low_bounded = 1;
    }
    if (hi_b && isfinite(hi0)) {
        fit->high = hi0;
        fit->high_bounded = 1;
    }
    return STAGECAL_OK;
}
