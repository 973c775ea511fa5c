/*
 * censor.c — the censored errors-in-variables likelihood (see stagecal/censor.h for the
 * model). Inner problem: each window's latent ζ = logit xD by a scan and GSL's Brent
 * minimiser; outer: θ by a scan and Brent (`constant`) or GSL's Nelder–Mead simplex; the
 * profile of a scalar ψ (a parameter, the stage count at a condition) maximises the other
 * parameters out by the same simplex; its interval ends by GSL's Brent root finder.
 */
#include "stagecal/censor.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_multimin.h>
#include <gsl/gsl_roots.h>
#include <gsl/gsl_sf_erf.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "stagecal/physics.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"

#define ZETA_MAX 30.0 /* latent xD up to 1 − 9e-14 */
#define ZETA_SCAN 24  /* scan points of the inner problem */
#define THETA_SCAN 24 /* scan points of the outer problem */
#define MAX_ITER 100
#define PURE_GAP 1.92 /* χ²₁(0.95)/2: distillate readings that do not exclude pure at 95 % */

struct cctx {
    const stagecal_column *col;
    double murphree;
    const stagecal_evidence *ev;
    size_t nev;
    const stagecal_form *form;
    stagecal_stages_params sp;
    double st_lo, st_hi; /* the stage range */
    /* the window and stage count of the inner problem */
    const stagecal_evidence *e;
    double nst;
    int at_cap;     /* every window's latent xD is as pure as its readings tell (profile_ll) */
    size_t n_cap;   /* windows whose latent xD is (window_profile) */
    int at_range;   /* some window's stage count went beyond st_hi (profile_ll) */
    double mean_st; /* mean stage count over the windows at the last θ (profile_ll) */
    double *zc;     /* nev latent ζ of the last profile (warm starts; NAN: none), or NULL */
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
    int rc = e->cond ? stagecal_physics_step(e->cond, xd, c->nst, c->murphree, &c->sp, &xb, &status,
                                             NULL)
                     : stagecal_stages_step(c->col->system.vle, xd, e->r, c->nst, c->murphree,
                                            &c->sp, &xb, NULL, 0, &len, &status, NULL);
    if (rc != STAGECAL_OK || status != STAGECAL_STAGES_OK)
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

/* The distillate readings' log-likelihood of window c->e at the true xD x (u at x). */
static double xd_ll(struct cctx *c, double x)
{
    const stagecal_evidence *e = c->e;
    double ll = 0, ud = GSL_MAX(stagecal_runlog_u_xd(c->col, x), 1e-15);
    for (size_t j = 0; j < e->m; j++) {
        unsigned f = e->s_cens ? e->s_cens[j] : 0;
        if (isfinite(e->s_xd[j]))
            ll += log_reading(e->s_xd[j], f & STAGECAL_EVIDENCE_XD_BELOW,
                              f & STAGECAL_EVIDENCE_XD_ABOVE, x, ud);
    }
    return ll;
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
    size_t wi = (size_t)(e - c->ev);
    double z = c->zc ? c->zc[wi] : NAN;
    /* warm start: Brent around the last ζ̂ when it brackets a minimum (the profile moves
     * θ a little at a time), else the scan */
    if (isfinite(z) && z < ZETA_MAX - 1.5) {
        double f0 = neg_window_ll(z, c), fl = neg_window_ll(z - 1, c), fh = neg_window_ll(z + 1, c);
        if (f0 < fl && f0 < fh && f0 < GSL_DBL_MAX / 8) {
            z = brent_min(neg_window_ll, c, z - 1, z, z + 1, 1e-9);
            f = neg_window_ll(z, c);
        } else {
            z = NAN;
        }
    } else {
        z = NAN;
    }
    if (isnan(z))
        z = scan_min(neg_window_ll, c, lo, ZETA_MAX, ZETA_SCAN, 0, 1e-9, &f);
    if (c->zc)
        c->zc[wi] = z;
    /* the latent distillate at the top of its range, or the distillate readings do not
     * exclude a pure distillate (log-likelihood within PURE_GAP of their value at the
     * latent): the readings cannot tell it from purer, and more stages fit as well */
    if (z > ZETA_MAX - 1 || xd_ll(c, 1.0) > xd_ll(c, 1 / (1 + exp(-z))) - PURE_GAP)
        c->n_cap++;
    return -f;
}

/* ℓ(θ): the windows' log-likelihoods with their latent ζ profiled out; −∞ where a
 * window's stage count leaves [st_lo, st_hi]. */
static double profile_ll(struct cctx *c, const double *theta)
{
    double ll = 0, sum = 0;
    size_t n = 0;
    c->at_cap = 0;
    c->n_cap = 0;
    c->at_range = 0;
    for (size_t i = 0; i < c->nev; i++) {
        const stagecal_evidence *e = &c->ev[i];
        if (e->m == 0 || !e->s_xd || !e->s_xb)
            continue;
        double nst = 1;
        if (stagecal_form_eval(c->form, theta, e->r, e->f_load, &nst, NULL) != STAGECAL_OK ||
            !(nst >= c->st_lo))
            return -HUGE_VAL;
        sum += nst;
        n++;
        if (nst > c->st_hi) {
            c->at_range = 1;
            c->mean_st = HUGE_VAL;
            return -HUGE_VAL;
        }
        ll += window_profile(c, e, nst);
    }
    c->mean_st = n ? sum / (double)n : NAN;
    /* only when no window resolves its distillate is the profile towards more stages set
     * by the latent's range rather than by readings (with one that does, its readings bound
     * the count: all windows share the correlation) */
    c->at_cap = n > 0 && c->n_cap == n;
    return ll;
}

static double neg_profile1(double theta, void *p)
{
    double v = -profile_ll(p, &theta);
    return isfinite(v) ? v : GSL_DBL_MAX / 4;
}

/* ---- the profile of a scalar ψ ------------------------------------------------------ */

enum { PSI_PARAM, PSI_STAGES };

struct prof {
    struct cctx *c;
    int kind;                        /* PSI_PARAM: ψ = θ_j; PSI_STAGES: ψ = stages at (r, f) */
    size_t j;                        /* the fixed (PARAM) or solved-for (STAGES) parameter */
    double r, f;                     /* STAGES: the condition */
    double base[STAGECAL_FORM_MAXP]; /* θ of the last profile maximum (warm start) */
    double psi;
    size_t nfree, idx[STAGECAL_FORM_MAXP]; /* the parameters maximised out */
};

/* θ from the free coordinates x at the current ψ; −1 when ψ cannot be met. */
static int prof_theta(const struct prof *q, const double *x, double *theta)
{
    size_t p = q->c->form->p;
    memcpy(theta, q->base, p * sizeof *theta);
    for (size_t k = 0; k < q->nfree; k++)
        theta[q->idx[k]] = x[k];
    if (q->kind == PSI_PARAM) {
        theta[q->j] = q->psi;
        return 0;
    }
    /* every form is linear in the parameter j solved for: N = N(θ_j = 0) + θ_j·∂N/∂θ_j */
    double n0, g[STAGECAL_FORM_MAXP];
    theta[q->j] = 0;
    if (stagecal_form_eval(q->c->form, theta, q->r, q->f, &n0, g) != STAGECAL_OK ||
        !(fabs(g[q->j]) > 0))
        return -1;
    theta[q->j] = (q->psi - n0) / g[q->j];
    return 0;
}

static double prof_obj(const gsl_vector *x, void *data)
{
    struct prof *q = data;
    double theta[STAGECAL_FORM_MAXP];
    if (prof_theta(q, x->data, theta))
        return GSL_DBL_MAX / 4;
    double v = -profile_ll(q->c, theta);
    return isfinite(v) ? v : GSL_DBL_MAX / 4;
}

/* Minimises f over n coordinates from x (updated) by GSL's nmsimplex2; returns f there. */
static double simplex_min(double (*f)(const gsl_vector *, void *), void *data, size_t n, double *x)
{
    gsl_multimin_function F = {f, n, data};
    gsl_multimin_fminimizer *s =
        gsl_multimin_fminimizer_alloc(gsl_multimin_fminimizer_nmsimplex2, n);
    gsl_vector *x0 = gsl_vector_alloc(n), *step = gsl_vector_alloc(n);
    double fx = HUGE_VAL;
    if (s && x0 && step) {
        for (size_t k = 0; k < n; k++) {
            gsl_vector_set(x0, k, x[k]);
            gsl_vector_set(step, k, 0.05 * GSL_MAX(fabs(x[k]), 0.1));
        }
        if (gsl_multimin_fminimizer_set(s, &F, x0, step) == GSL_SUCCESS) {
            for (int it = 0; it < 60 * (int)n + 200; it++) {
                if (gsl_multimin_fminimizer_iterate(s) != GSL_SUCCESS)
                    break;
                if (gsl_multimin_test_size(gsl_multimin_fminimizer_size(s), 1e-7) == GSL_SUCCESS)
                    break;
            }
            fx = s->fval;
            for (size_t k = 0; k < n; k++)
                x[k] = gsl_vector_get(s->x, k);
        }
    }
    gsl_multimin_fminimizer_free(s);
    gsl_vector_free(x0);
    gsl_vector_free(step);
    return fx;
}

/* ℓ_p(ψ): the other parameters maximised out; leaves the maximiser in q->base and the
 * flags of its ℓ in q->c. */
static double prof_ll(struct prof *q, double psi)
{
    double x[STAGECAL_FORM_MAXP], theta[STAGECAL_FORM_MAXP];
    q->psi = psi;
    for (size_t k = 0; k < q->nfree; k++)
        x[k] = q->base[q->idx[k]];
    if (q->nfree > 0) {
        double fx = simplex_min(prof_obj, q, q->nfree, x);
        if (!(fx < GSL_DBL_MAX / 8)) {
            for (size_t k = 0; k < q->nfree; k++)
                x[k] = q->base[q->idx[k]];
        }
    }
    if (prof_theta(q, x, theta))
        return -HUGE_VAL;
    double ll = profile_ll(q->c, theta);
    if (isfinite(ll))
        memcpy(q->base, theta, q->c->form->p * sizeof *theta);
    return ll;
}

struct dev_ctx {
    struct prof *q;
    double llmax, cut;
};

static double deviance_gap(double psi, void *p)
{
    struct dev_ctx *d = p;
    double ll = prof_ll(d->q, psi);
    return isfinite(ll) ? 2 * (d->llmax - ll) - d->cut : GSL_DBL_MAX / 4;
}

/* The ψ in [a, b] where the deviance gap changes sign (GSL Brent root finder). */
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

/* Walks from ψ̂ towards end (geometric steps when geo, both positive; else growing steps
 * of scale s0 in direction dir, end ignored) to the first ψ where the deviance exceeds the
 * cut; Brent refines the crossing step. The profile may come back up far away (a second,
 * pinched branch), so the crossing nearest to the maximum is the end. Returns NAN when the
 * walk ends (the range end, a region where ℓ is −∞ with the deviance still under the cut,
 * or 40 steps) without a crossing, or when the crossing is not determined: beyond it a
 * window's stage count leaves the range, or (towards more stages) its latent xD is as pure
 * as its analyser can tell. */
static double crossing(struct dev_ctx *d, double psi_hat, int geo, double end, double dir,
                       double s0)
{
    struct prof *q = d->q;
    double prev = psi_hat, x = psi_hat;
    int nsteps = geo ? THETA_SCAN : 40;
    for (int k = 1; k <= nsteps; k++) {
        x = geo ? psi_hat * pow(end / psi_hat, (double)k / THETA_SCAN)
                : psi_hat + dir * s0 * (pow(1.5, k) - 1) / 0.5;
        if (deviance_gap(x, d) > 0)
            break;
        prev = x;
        if (k == nsteps)
            return NAN;
    }
    double gprev = deviance_gap(prev, d);
    double mean_prev = q->c->mean_st;
    /* Brent needs finite values at both ends: pull a non-finite end in */
    while (!(deviance_gap(x, d) < GSL_DBL_MAX / 8) && fabs(x - prev) > 1e-9 * fabs(prev) + 1e-12)
        x = 0.5 * (x + prev);
    if (!(deviance_gap(x, d) > 0))
        return NAN; /* ℓ ends (−∞) before the deviance reaches the cut */
    double root = gprev < 0 ? brent_root(d, prev < x ? prev : x, prev < x ? x : prev) : prev;
    /* beyond the crossing: is the end set by the evidence? */
    double beyond = root + 0.02 * (root - psi_hat);
    double llb = prof_ll(q, beyond);
    int more_stages = q->c->mean_st > mean_prev;
    if (q->c->at_range || (more_stages && q->c->at_cap) || (!isfinite(llb) && more_stages))
        return NAN;
    return root;
}

/* The interval of ψ (q->kind, q->j; q->base = θ̂) at level: two-sided, or one-sided when
 * one end is not determined. psi_lo/psi_hi: the range of a ψ in stages (geometric walks),
 * or NAN for a parameter. */
static void interval(struct prof *q, const double *theta_hat, double psi_hat, double llmax,
                     double level, double psi_lo, double psi_hi, stagecal_censored_interval *out)
{
    size_t p = q->c->form->p;
    int geo = isfinite(psi_lo);
    double s0 = 0.05 * GSL_MAX(fabs(psi_hat), 0.1);
    struct dev_ctx d = {q, llmax, gsl_cdf_chisq_Pinv(level, 1)};
    double end[2] = {NAN, NAN};
    int ok[2];
    for (int side = 0; side < 2; side++) {
        memcpy(q->base, theta_hat, p * sizeof *theta_hat);
        double lim = side ? psi_hi : psi_lo;
        int room = geo ? (side ? psi_hat < lim : psi_hat > lim) : 1;
        end[side] = room ? crossing(&d, psi_hat, geo, lim, side ? 1 : -1, s0) : NAN;
        ok[side] = isfinite(end[side]);
    }
    out->value = psi_hat;
    out->level = level;
    if (ok[0] != ok[1]) { /* one end only: the other is a one-sided bound at the same level */
        int side = ok[1];
        d.cut = gsl_cdf_chisq_Pinv(2 * level - 1, 1);
        memcpy(q->base, theta_hat, p * sizeof *theta_hat);
        end[side] = crossing(&d, psi_hat, geo, side ? psi_hi : psi_lo, side ? 1 : -1, s0);
        ok[side] = isfinite(end[side]);
    }
    out->low_bounded = ok[0];
    out->high_bounded = ok[1];
    out->low = ok[0] ? end[0] : NAN;
    out->high = ok[1] ? end[1] : NAN;
    memcpy(q->base, theta_hat, p * sizeof *theta_hat);
}

static int check_args(const stagecal_column *col, const stagecal_evidence *ev, size_t nev,
                      const stagecal_form *form, double level, double lo, double hi,
                      stagecal_censored_fit *fit, stagecal_error *err)
{
    if (!col || !col->system.vle || !ev || !form || !fit)
        return error_set(err, STAGECAL_EINVAL, "censored fit: NULL argument");
    if (form->p < 1 || form->p > STAGECAL_FORM_MAXP)
        return error_set(err, STAGECAL_EINVAL, "censored fit: form '%s' has %zu parameters",
                         form->name, form->p);
    if (!(level > 0.5 && level < 1) || !(lo >= 1 && lo < hi && isfinite(hi)))
        return error_set(err, STAGECAL_EINVAL,
                         "censored fit: level %g (expected (0.5, 1)), stage range [%g, %g] "
                         "(expected 1 <= low < high)",
                         level, lo, hi);
    memset(fit, 0, sizeof *fit);
    fit->p = form->p;
    fit->level = level;
    fit->stages_lo = lo;
    fit->stages_hi = hi;
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

static struct cctx make_ctx(const stagecal_column *col, double murphree,
                            const stagecal_evidence *ev, size_t nev, const stagecal_form *form,
                            double lo, double hi)
{
    struct cctx c;
    memset(&c, 0, sizeof c);
    c.col = col;
    c.murphree = murphree;
    c.ev = ev;
    c.nev = nev;
    c.form = form;
    c.sp = stagecal_stages_default_params();
    c.sp.max_stages = (size_t)hi + 10;
    c.st_lo = lo;
    c.st_hi = hi;
    c.nst = 1;
    return c;
}

/* The warm-start cache of c (NULL when out of memory: every profile scans). */
static void zc_alloc(struct cctx *c)
{
    c->zc = malloc((c->nev ? c->nev : 1) * sizeof *c->zc);
    for (size_t i = 0; c->zc && i < c->nev; i++)
        c->zc[i] = NAN;
}

int stagecal_censored_loglik(const stagecal_column *col, double murphree,
                             const stagecal_evidence *ev, size_t nev, const stagecal_form *form,
                             const double *theta, double *loglik, stagecal_error *err)
{
    stagecal_censored_fit tmp;
    int rc = check_args(col, ev, nev, form, 0.95, 1, 1000, &tmp, err);
    if (rc)
        return rc;
    struct cctx c = make_ctx(col, murphree, ev, nev, form, 1, 1000);
    *loglik = profile_ll(&c, theta);
    return STAGECAL_OK;
}

static double full_obj(const gsl_vector *x, void *data)
{
    double v = -profile_ll(data, x->data);
    return isfinite(v) ? v : GSL_DBL_MAX / 4;
}

/* The inverse of the observed information −∂²ℓ/∂θ² at θ̂ (central second differences,
 * steps 1e-3·max(|θ_j|, 1)); 0 when it is not positive definite. */
static int observed_cov(struct cctx *c, const double *th, double llmax, double *cov)
{
    size_t p = c->form->p;
    double h[STAGECAL_FORM_MAXP], t[STAGECAL_FORM_MAXP];
    gsl_matrix *H = gsl_matrix_alloc(p, p);
    if (!H)
        return 0;
    for (size_t j = 0; j < p; j++)
        h[j] = 1e-3 * GSL_MAX(fabs(th[j]), 1);
    int ok = 1;
    for (size_t a = 0; a < p && ok; a++)
        for (size_t b = a; b < p && ok; b++) {
            double v;
            memcpy(t, th, p * sizeof *t);
            if (a == b) {
                t[a] = th[a] + h[a];
                double fp = profile_ll(c, t);
                t[a] = th[a] - h[a];
                double fm = profile_ll(c, t);
                v = -(fp - 2 * llmax + fm) / (h[a] * h[a]);
            } else {
                double f4[4];
                for (int k = 0; k < 4; k++) {
                    t[a] = th[a] + ((k & 1) ? -h[a] : h[a]);
                    t[b] = th[b] + ((k & 2) ? -h[b] : h[b]);
                    f4[k] = profile_ll(c, t);
                }
                v = -(f4[0] - f4[1] - f4[2] + f4[3]) / (4 * h[a] * h[b]);
            }
            ok = isfinite(v);
            gsl_matrix_set(H, a, b, v);
            gsl_matrix_set(H, b, a, v);
        }
    if (ok && gsl_linalg_cholesky_decomp1(H) == GSL_SUCCESS &&
        gsl_linalg_cholesky_invert(H) == GSL_SUCCESS) {
        for (size_t a = 0; a < p; a++)
            for (size_t b = 0; b < p; b++)
                cov[a * p + b] = gsl_matrix_get(H, a, b);
    } else {
        ok = 0;
    }
    gsl_matrix_free(H);
    return ok;
}

static int fit_body(struct cctx *cp, const stagecal_form *form, const double *theta0, double level,
                    double stages_lo, double stages_hi, stagecal_censored_fit *fit,
                    stagecal_error *err);

int stagecal_fit_censored(const stagecal_column *col, double murphree, const stagecal_evidence *ev,
                          size_t nev, const stagecal_form *form, const double *theta0, double level,
                          double stages_lo, double stages_hi, stagecal_censored_fit *fit,
                          stagecal_error *err)
{
    int rc = check_args(col, ev, nev, form, level, stages_lo, stages_hi, fit, err);
    if (rc)
        return rc;
    if (form->kind != STAGECAL_FORM_CONSTANT && !theta0)
        return error_set(err, STAGECAL_EINVAL, "censored fit: form '%s' needs a start", form->name);
    struct cctx c = make_ctx(col, murphree, ev, nev, form, stages_lo, stages_hi);
    zc_alloc(&c);
    rc = fit_body(&c, form, theta0, level, stages_lo, stages_hi, fit, err);
    free(c.zc);
    return rc;
}

static int fit_body(struct cctx *cp, const stagecal_form *form, const double *theta0, double level,
                    double stages_lo, double stages_hi, stagecal_censored_fit *fit,
                    stagecal_error *err)
{
    struct cctx c = *cp;
    size_t p = form->p;
    double th[STAGECAL_FORM_MAXP], fmin;
    if (form->kind == STAGECAL_FORM_CONSTANT) {
        th[0] = scan_min(neg_profile1, &c, stages_lo, stages_hi, THETA_SCAN, 1, 1e-6, &fmin);
    } else {
        memcpy(th, theta0, p * sizeof *th);
        if (!isfinite(profile_ll(&c, th)))
            return error_set(err, STAGECAL_EDATA,
                             "censored fit: the likelihood is not finite at the start (the "
                             "form gives a stage count outside [%g, %g] at some window)",
                             stages_lo, stages_hi);
        fmin = simplex_min(full_obj, &c, p, th);
        fmin = simplex_min(full_obj, &c, p, th); /* a restart: the simplex may stall */
    }
    memcpy(fit->theta, th, p * sizeof *th);
    fit->loglik = -fmin;
    if (!isfinite(fit->loglik))
        return error_set(err, STAGECAL_EDATA, "censored fit: no finite likelihood");
    struct prof q;
    memset(&q, 0, sizeof q);
    q.c = &c;
    q.kind = PSI_PARAM;
    for (size_t j = 0; j < p; j++) {
        q.j = j;
        q.nfree = 0;
        for (size_t k = 0; k < p; k++)
            if (k != j)
                q.idx[q.nfree++] = k;
        memcpy(q.base, th, p * sizeof *th);
        int stages = form->kind == STAGECAL_FORM_CONSTANT;
        interval(&q, th, th[j], fit->loglik, level, stages ? stages_lo : NAN,
                 stages ? stages_hi : NAN, &fit->par[j]);
        fit->one_sided |= !(fit->par[j].low_bounded && fit->par[j].high_bounded);
    }
    if (!fit->one_sided)
        fit->has_cov = observed_cov(&c, th, fit->loglik, fit->cov);
    return STAGECAL_OK;
}

int stagecal_censored_stages_at(const stagecal_column *col, double murphree,
                                const stagecal_evidence *ev, size_t nev, const stagecal_form *form,
                                const stagecal_censored_fit *fit, double r, double f_load,
                                double level, stagecal_censored_interval *out, stagecal_error *err)
{
    if (!col || !ev || !form || !fit || !out || fit->p != form->p)
        return error_set(err, STAGECAL_EINVAL, "censored stages: bad argument");
    if (!(level > 0.5 && level < 1))
        return error_set(err, STAGECAL_EINVAL, "censored stages: level %g (expected (0.5, 1))",
                         level);
    size_t p = form->p;
    double n_hat, g[STAGECAL_FORM_MAXP];
    if (stagecal_form_eval(form, fit->theta, r, f_load, &n_hat, g) != STAGECAL_OK)
        return error_set(err, STAGECAL_EINVAL,
                         "censored stages: form '%s' is not defined at R = %g", form->name, r);
    struct cctx c = make_ctx(col, murphree, ev, nev, form, fit->stages_lo, fit->stages_hi);
    struct prof q;
    memset(&q, 0, sizeof q);
    q.c = &c;
    q.kind = PSI_STAGES;
    q.r = r;
    q.f = f_load;
    /* solve for a parameter the count is linear in: the first (a) of the nonlinear forms,
     * the term largest at (r, f) of a linear one */
    q.j = 0;
    if (form->kind == STAGECAL_FORM_LINEAR)
        for (size_t k = 1; k < p; k++)
            if (fabs(g[k]) > fabs(g[q.j]))
                q.j = k;
    for (size_t k = 0; k < p; k++)
        if (k != q.j)
            q.idx[q.nfree++] = k;
    memcpy(q.base, fit->theta, p * sizeof *fit->theta);
    double lo = GSL_MIN(fit->stages_lo, n_hat), hi = GSL_MAX(fit->stages_hi, n_hat);
    zc_alloc(&c);
    interval(&q, fit->theta, n_hat, fit->loglik, level, lo, hi, out);
    free(c.zc);
    return STAGECAL_OK;
}
