/*
 * regress.c — weighted least squares of stages on (R, F): fit, covariance, intervals,
 * bands, information criteria, robust reweighting, bootstrap and model ranking.
 *
 * Methods (docs/regress.md has the sources):
 *   - linear-in-θ forms: weighted linear least squares, gsl_multifit_wlinear_tsvd
 *     (rank checked; a rank-deficient design is bad data, not a silent pseudo-inverse);
 *   - other forms: gsl_multifit_nlinear, trust region with Levenberg–Marquardt steps,
 *     analytic Jacobian (stagecal_form_eval), several automatic starts; then
 *     Gauss–Newton polish with QR on the weighted Jacobian (REFERENCES §5: this lifts
 *     the NIST StRD Misra1a agreement from LRE ≈ 8.5 to ≥ 11);
 *   - covariance s²·(JᵀWJ)⁻¹, s² = RSS_w/(n − p): the NIST StRD definition (Bates &
 *     Watts 1988, §2.3); t intervals with gsl_cdf_tdist_Pinv;
 *   - bands by the delta method, var_fit = gᵀCg (Seber & Wild 1989, §5.1);
 *   - AICc (Hurvich & Tsai 1989), BIC (Schwarz 1978) from the Gaussian likelihood;
 *   - robust: IRLS with Huber or Tukey-bisquare weights and MAD scale (Huber 1981;
 *     Holland & Welsch 1977 for the 95 %-efficiency constants 1.345 and 4.685);
 *   - bootstrap: case or residual resampling, percentile intervals (Efron & Tibshirani
 *     1993, ch. 6, 13); RNG gsl_rng_mt19937 with the caller's seed.
 * Everything is dimensionless except F (Pa^0.5).
 */
#include "stagecal/regress.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_blas.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_multifit.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "internal.h"

/* Consistency constant of the MAD for the normal distribution: Φ⁻¹(3/4). */
#define MAD_NORMAL 0.6744897501960817

/* Rounding guard for gᵀCg: a variance below −BAND_NEG_TOL·Σ|g_i C_ij g_j| means C is
 * not positive semi-definite; above it, a negative value is rounding and becomes 0. */
#define BAND_NEG_TOL (64.0 * DBL_EPSILON)

stagecal_regress_params stagecal_regress_default_params(void)
{
    stagecal_regress_params p;
    memset(&p, 0, sizeof p);
    p.level = 0.95;
    p.scale_cov = 1;
    p.theta0 = NULL;
    p.max_iter = 500;
    p.xtol = 1e-10;
    p.gtol = 1e-10;
    p.ftol = 1e-15;
    p.polish_steps = 8;
    p.polish_tol = 1e-15;
    p.stall_iter = 5;
    p.rank_tol = 1e-10;
    p.robust = STAGECAL_ROBUST_NONE;
    p.huber_k = 1.345;
    p.bisquare_c = 4.685;
    p.robust_max_iter = 100;
    p.robust_tol = 1e-10;
    p.bootstrap = 0;
    p.seed = 1;
    p.boot_kind = STAGECAL_BOOT_CASE;
    p.band_points = 25;
    p.boot_xtol = 1e-8;
    return p;
}

const char *stagecal_regress_stop_text(stagecal_stop stop)
{
    switch (stop) {
    case STAGECAL_STOP_LINEAR:
        return "direct linear solution";
    case STAGECAL_STOP_XTOL:
        return "small step (xtol)";
    case STAGECAL_STOP_GTOL:
        return "small gradient (gtol)";
    case STAGECAL_STOP_FTOL:
        return "small residual change (ftol)";
    case STAGECAL_STOP_NOPROGRESS:
        return "no further progress (at the optimum to rounding)";
    }
    return "unknown";
}

/* ---- bands ---------------------------------------------------------------------------- */

int stagecal_regress_band_obs(const stagecal_form *form, const double *theta, const double *cov,
                              double sigma, double obs_sigma, double dof, double level, double r,
                              double f_load, stagecal_band *out, stagecal_error *err)
{
    double g[STAGECAL_FORM_MAXP], value;
    if (!form || !theta || !cov || !out)
        return error_set(err, STAGECAL_EINVAL, "band: form, theta, cov and out are required");
    if (!(sigma >= 0) || !isfinite(sigma) || !(obs_sigma >= 0) || !isfinite(obs_sigma))
        return error_set(err, STAGECAL_EINVAL,
                         "band: sigma %g, obs_sigma %g (expected finite values >= 0)", sigma,
                         obs_sigma);
    if (!(dof > 0) || !(level > 0 && level < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "band: dof %g, level %g (expected dof > 0 and level in (0, 1))", dof,
                         level);
    if (stagecal_form_eval(form, theta, r, f_load, &value, g) != STAGECAL_OK)
        return error_set(err, STAGECAL_EINVAL, "band: form '%s' is undefined at R = %g, F = %g",
                         form->name, r, f_load);
    double var = 0.0, scale = 0.0;
    for (size_t i = 0; i < form->p; i++)
        for (size_t j = 0; j < form->p; j++) {
            double c = cov[i * form->p + j];
            if (!isfinite(c))
                return error_set(err, STAGECAL_EINVAL,
                                 "band: covariance entry (%zu, %zu) is "
                                 "not finite",
                                 i, j);
            var += g[i] * c * g[j];
            scale += fabs(g[i] * c * g[j]);
        }
    if (var < -BAND_NEG_TOL * scale)
        return error_set(err, STAGECAL_EDATA,
                         "band: covariance gives variance %g at R = %g (expected a positive "
                         "semi-definite matrix)",
                         var, r);
    if (var < 0)
        var = 0;
    double t = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, dof);
    double obs = sigma * obs_sigma;
    out->r = r;
    out->f_load = f_load;
    out->value = value;
    out->se_fit = sqrt(var);
    out->se_pred = sqrt(var + obs * obs);
    out->ci_low = value - t * out->se_fit;
    out->ci_high = value + t * out->se_fit;
    out->pi_low = value - t * out->se_pred;
    out->pi_high = value + t * out->se_pred;
    return STAGECAL_OK;
}

int stagecal_regress_band(const stagecal_form *form, const double *theta, const double *cov,
                          double sigma, double dof, double level, double r, double f_load,
                          stagecal_band *out, stagecal_error *err)
{
    return stagecal_regress_band_obs(form, theta, cov, sigma, 1.0, dof, level, r, f_load, out, err);
}

/* ---- the core estimator --------------------------------------------------------------- */

/* Points with their total weights (sigma weights × robust weights). */
typedef struct {
    size_t n;
    const double *r, *f, *y;
    const double *w;
    const stagecal_form *form;
} pts;

typedef struct {
    double rss;
    stagecal_stop stop;
    size_t iterations, starts, polish;
} fitinfo;

static double pt_f(const pts *d, size_t i)
{
    return d->f ? d->f[i] : 0.0;
}

/* Weighted residuals sqrt(w)·(m − y) and, when J is not NULL, the weighted Jacobian.
 * Returns EINVAL when the form is undefined at some point for this θ. */
static int residuals(const pts *d, const double *theta, gsl_vector *res, gsl_matrix *J)
{
    double g[STAGECAL_FORM_MAXP], m;
    for (size_t i = 0; i < d->n; i++) {
        int rc = stagecal_form_eval(d->form, theta, d->r[i], pt_f(d, i), &m, J ? g : NULL);
        if (rc != STAGECAL_OK)
            return rc;
        double sw = sqrt(d->w[i]);
        gsl_vector_set(res, i, sw * (m - d->y[i]));
        if (J)
            for (size_t k = 0; k < d->form->p; k++)
                gsl_matrix_set(J, i, k, sw * g[k]);
    }
    return STAGECAL_OK;
}

static double sumsq(const gsl_vector *v)
{
    double s = gsl_blas_dnrm2(v);
    return s * s;
}

static int nl_f(const gsl_vector *x, void *ctx, gsl_vector *f)
{
    const pts *d = ctx;
    if (residuals(d, x->data, f, NULL) != STAGECAL_OK) {
        /* Outside the form's domain (e.g. b ≤ 0 at total reflux, exp overflow): a huge
         * residual makes the trust region reject the step instead of aborting. */
        gsl_vector_set_all(f, GSL_SQRT_DBL_MAX);
    }
    return GSL_SUCCESS;
}

static int nl_df(const gsl_vector *x, void *ctx, gsl_matrix *J)
{
    const pts *d = ctx;
    gsl_vector *tmp = gsl_vector_alloc(d->n);
    if (!tmp)
        return GSL_ENOMEM;
    int rc = residuals(d, x->data, tmp, J);
    gsl_vector_free(tmp);
    return rc == STAGECAL_OK ? GSL_SUCCESS : GSL_EDOM;
}

/* The Gauss–Newton step δ = argmin |J δ + r| (QR on the weighted Jacobian) at θ.
 * Returns 0 on success. */
static int gn_step(const pts *d, const double *theta, double *delta)
{
    size_t n = d->n, p = d->form->p;
    int rc = -1;
    gsl_vector *res = gsl_vector_alloc(n), *tau = gsl_vector_alloc(p);
    gsl_vector *dv = gsl_vector_alloc(p), *resid = gsl_vector_alloc(n);
    gsl_matrix *J = gsl_matrix_alloc(n, p);
    if (res && tau && dv && resid && J && residuals(d, theta, res, J) == STAGECAL_OK &&
        gsl_linalg_QR_decomp(J, tau) == GSL_SUCCESS &&
        gsl_linalg_QR_lssolve(J, tau, res, dv, resid) == GSL_SUCCESS) {
        rc = 0;
        for (size_t k = 0; k < p; k++) {
            delta[k] = -gsl_vector_get(dv, k);
            if (!isfinite(delta[k]))
                rc = -1;
        }
    }
    gsl_vector_free(res);
    gsl_vector_free(tau);
    gsl_vector_free(dv);
    gsl_vector_free(resid);
    gsl_matrix_free(J);
    return rc;
}

/* GSL's xtol test, |δ_i| ≤ xtol·(|θ_i| + xtol), applied to the Gauss–Newton step. */
static int gn_converged(const pts *d, const double *theta, double xtol)
{
    double delta[STAGECAL_FORM_MAXP];
    if (gn_step(d, theta, delta) != 0)
        return 0;
    for (size_t k = 0; k < d->form->p; k++)
        if (!(fabs(delta[k]) <= xtol * (fabs(theta[k]) + xtol)))
            return 0;
    return 1;
}

/* Gauss–Newton steps, accepted while RSS does not grow. */
static size_t polish(const pts *d, const stagecal_regress_params *prm, double *theta, double *rss)
{
    size_t p = d->form->p, accepted = 0;
    gsl_vector *res = gsl_vector_alloc(d->n);
    if (!res)
        return 0;
    for (size_t it = 0; it < prm->polish_steps; it++) {
        double trial[STAGECAL_FORM_MAXP], delta[STAGECAL_FORM_MAXP];
        if (gn_step(d, theta, delta) != 0)
            break;
        int small = 1;
        for (size_t k = 0; k < p; k++) {
            trial[k] = theta[k] + delta[k];
            if (fabs(delta[k]) > prm->polish_tol * fabs(theta[k]))
                small = 0;
        }
        if (residuals(d, trial, res, NULL) != STAGECAL_OK)
            break;
        double rss_new = sumsq(res);
        if (!(rss_new <= *rss))
            break;
        memcpy(theta, trial, p * sizeof *theta);
        *rss = rss_new;
        accepted++;
        if (small)
            break;
    }
    gsl_vector_free(res);
    return accepted;
}

static int fit_linear(const pts *d, double *theta, fitinfo *info, stagecal_error *err)
{
    size_t n = d->n, p = d->form->p, rank = 0;
    double chisq, zero[STAGECAL_FORM_MAXP] = {0}, g[STAGECAL_FORM_MAXP], m;
    int rc = STAGECAL_OK;
    gsl_matrix *X = gsl_matrix_alloc(n, p), *cov = gsl_matrix_alloc(p, p);
    gsl_vector *w = gsl_vector_alloc(n), *y = gsl_vector_alloc(n), *c = gsl_vector_alloc(p);
    gsl_multifit_linear_workspace *work = gsl_multifit_linear_alloc(n, p);
    if (!X || !cov || !w || !y || !c || !work) {
        rc = error_set(err, STAGECAL_ENOMEM, "regress: out of memory for %zu points", n);
        goto done;
    }
    for (size_t i = 0; i < n; i++) {
        if (stagecal_form_eval(d->form, zero, d->r[i], pt_f(d, i), &m, g) != STAGECAL_OK) {
            rc = error_set(err, STAGECAL_EINVAL, "point %zu: form '%s' is undefined at R = %g",
                           i + 1, d->form->name, d->r[i]);
            goto done;
        }
        for (size_t k = 0; k < p; k++)
            gsl_matrix_set(X, i, k, g[k]);
        gsl_vector_set(w, i, d->w[i]);
        gsl_vector_set(y, i, d->y[i]);
    }
    /* tol = DBL_EPSILON: GSL's own truncation for gsl_multifit_wlinear. */
    int gs = gsl_multifit_wlinear_tsvd(X, w, y, DBL_EPSILON, c, cov, &chisq, &rank, work);
    if (gs != GSL_SUCCESS) {
        rc = error_set(err, STAGECAL_EINTERNAL, "regress: linear least squares failed: %s",
                       gsl_strerror(gs));
        goto done;
    }
    if (rank < p) {
        rc = error_set(err, STAGECAL_EDATA,
                       "regress: form '%s': the design has rank %zu < %zu parameters (the "
                       "points do not vary enough in R or F to identify every term)",
                       d->form->name, rank, p);
        goto done;
    }
    for (size_t k = 0; k < p; k++)
        theta[k] = gsl_vector_get(c, k);
    info->rss = chisq;
    info->stop = STAGECAL_STOP_LINEAR;
    info->iterations = 0;
    info->starts = 1;
    info->polish = 0;
done:
    gsl_matrix_free(X);
    gsl_matrix_free(cov);
    gsl_vector_free(w);
    gsl_vector_free(y);
    gsl_vector_free(c);
    gsl_multifit_linear_free(work);
    return rc;
}

/* One trust-region run from start; fills theta, rss, stop, iterations. */
static int nl_run(const pts *d, const stagecal_regress_params *prm, const double *start,
                  double *theta, fitinfo *info)
{
    size_t n = d->n, p = d->form->p;
    gsl_multifit_nlinear_fdf fdf;
    gsl_multifit_nlinear_parameters fp = gsl_multifit_nlinear_default_parameters();
    gsl_multifit_nlinear_workspace *w =
        gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &fp, n, p);
    gsl_vector_const_view x0 = gsl_vector_const_view_array(start, p);
    int info_code = 0, rc;
    pts ctx = *d; /* GSL's callbacks take a non-const pointer */
    if (!w)
        return STAGECAL_ENOMEM;
    /* Started at the optimum (IRLS near convergence, bootstrap resamples that repeat the
     * data), every trust-region step is rejected by rounding and the driver runs to
     * max_iter: test the start first. */
    if (gn_converged(d, start, prm->xtol)) {
        memcpy(theta, start, p * sizeof *theta);
        info->iterations = 0;
        info->stop = STAGECAL_STOP_XTOL;
        gsl_multifit_nlinear_free(w);
        return STAGECAL_OK;
    }
    fdf.f = nl_f;
    fdf.df = nl_df;
    fdf.fvv = NULL;
    fdf.n = n;
    fdf.p = p;
    fdf.params = &ctx;
    rc = gsl_multifit_nlinear_init(&x0.vector, &fdf, w);
    /* The driver loop, plus a stall test: on ill-conditioned problems (Misra1a-like,
     * parameters 5 decades apart) the accepted steps near the optimum are rounding noise
     * that never meets xtol; stop when RSS has not fallen by more than 4ε relative for
     * params.stall_iter consecutive iterations. */
    double prev = sumsq(gsl_multifit_nlinear_residual(w));
    size_t stall = 0;
    int stalled = 0;
    for (size_t it = 0; rc == GSL_SUCCESS; it++) {
        if (it == prm->max_iter) {
            rc = GSL_EMAXITER;
            break;
        }
        rc = gsl_multifit_nlinear_iterate(w);
        if (rc != GSL_SUCCESS)
            break;
        int test = gsl_multifit_nlinear_test(prm->xtol, prm->gtol, prm->ftol, &info_code, w);
        if (test == GSL_SUCCESS && info_code != 0)
            break;
        double now = sumsq(gsl_multifit_nlinear_residual(w));
        stall = now >= prev * (1 - 4 * DBL_EPSILON) ? stall + 1 : 0;
        prev = fmin(prev, now);
        if (stall >= prm->stall_iter) {
            stalled = 1;
            break;
        }
    }
    if (rc == GSL_SUCCESS && stalled)
        rc = GSL_ENOPROG;
    if (rc == GSL_SUCCESS || rc == GSL_ENOPROG || rc == GSL_ENOPROGJ) {
        const gsl_vector *x = gsl_multifit_nlinear_position(w);
        for (size_t k = 0; k < p; k++)
            theta[k] = gsl_vector_get(x, k);
        info->iterations = gsl_multifit_nlinear_niter(w);
        info->stop = rc != GSL_SUCCESS ? STAGECAL_STOP_NOPROGRESS
                     : info_code == 2  ? STAGECAL_STOP_GTOL
                     : info_code == 3  ? STAGECAL_STOP_FTOL
                                       : STAGECAL_STOP_XTOL;
        rc = STAGECAL_OK;
    } else {
        rc = STAGECAL_ENOCONV;
    }
    gsl_multifit_nlinear_free(w);
    return rc;
}

/* Automatic starts for the nonlinear forms; returns how many were written. */
static size_t auto_starts(const pts *d, double starts[][STAGECAL_FORM_MAXP], size_t max)
{
    /* Multipliers of the largest observed stage count for the plateau a: the data may
     * stop well short of it (NIST Misra1a reaches a third of it). */
    static const double amult[] = {1.05, 1.5, 3.0, 10.0};
    double ymax = -INFINITY;
    size_t ns = 0;
    for (size_t i = 0; i < d->n; i++)
        ymax = fmax(ymax, d->y[i]);
    for (size_t j = 0; j < sizeof amult / sizeof amult[0] && ns < max; j++) {
        double a = amult[j] * ymax, best = INFINITY, b = 0;
        /* b from the point nearest half the plateau: y = a(1 − exp(−bR)). */
        for (size_t i = 0; i < d->n; i++) {
            double q = d->y[i] / a;
            if (!isfinite(d->r[i]) || !(q > 0 && q < 1))
                continue;
            if (fabs(q - 0.5) < best) {
                best = fabs(q - 0.5);
                b = -log1p(-q) / d->r[i];
            }
        }
        if (!(b > 0) || !isfinite(b))
            continue;
        memset(starts[ns], 0, sizeof starts[ns]);
        starts[ns][0] = a;
        starts[ns][1] = b;
        ns++;
    }
    return ns;
}

static int fit_nonlinear(const pts *d, const stagecal_regress_params *prm, const double *start,
                         double *theta, fitinfo *info, stagecal_error *err)
{
    double starts[8][STAGECAL_FORM_MAXP];
    size_t ns = 0, p = d->form->p;
    int found = 0, last = STAGECAL_ENOCONV;
    if (start) {
        memcpy(starts[0], start, p * sizeof *start);
        ns = 1;
    } else {
        ns = auto_starts(d, starts, 8);
        if (d->form->kind == STAGECAL_FORM_SATURATING_LOAD && ns > 0) {
            /* The load terms start at zero; the saturating part first fits alone. */
            stagecal_form sat;
            pts ds = *d;
            double ts[STAGECAL_FORM_MAXP];
            fitinfo fi;
            stagecal_form_parse("saturating", &sat, NULL);
            ds.form = &sat;
            if (fit_nonlinear(&ds, prm, NULL, ts, &fi, NULL) == STAGECAL_OK) {
                memset(starts[ns], 0, sizeof starts[ns]);
                starts[ns][0] = ts[0];
                starts[ns][1] = ts[1];
                ns++;
            }
        }
    }
    if (ns == 0)
        return error_set(err, STAGECAL_EDATA,
                         "regress: form '%s': no start values (the stages show no rise with R "
                         "to place a saturation on)",
                         d->form->name);
    gsl_vector *res = gsl_vector_alloc(d->n);
    if (!res)
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory");
    info->rss = INFINITY;
    for (size_t s = 0; s < ns; s++) {
        double th[STAGECAL_FORM_MAXP];
        fitinfo fi = {0};
        int rc = nl_run(d, prm, starts[s], th, &fi);
        if (rc == STAGECAL_ENOMEM) {
            gsl_vector_free(res);
            return error_set(err, rc, "regress: out of memory");
        }
        if (rc != STAGECAL_OK || residuals(d, th, res, NULL) != STAGECAL_OK) {
            last = rc;
            continue;
        }
        fi.rss = sumsq(res);
        if (fi.rss < info->rss) {
            *info = fi;
            memcpy(theta, th, p * sizeof *th);
            found = 1;
        }
    }
    gsl_vector_free(res);
    info->starts = ns;
    if (!found)
        return error_set(err, last == STAGECAL_OK ? STAGECAL_ENOCONV : last,
                         "regress: form '%s': the trust-region solver did not converge from "
                         "%zu start(s) within %zu iterations",
                         d->form->name, ns, prm->max_iter);
    info->polish = polish(d, prm, theta, &info->rss);
    return STAGECAL_OK;
}

static int fit_once(const pts *d, const stagecal_regress_params *prm, const double *start,
                    double *theta, fitinfo *info, stagecal_error *err)
{
    if (stagecal_form_is_linear(d->form))
        return fit_linear(d, theta, info, err);
    return fit_nonlinear(d, prm, start, theta, info, err);
}

static double weight_fn(const stagecal_regress_params *prm, double u)
{
    double a = fabs(u);
    if (prm->robust == STAGECAL_ROBUST_HUBER)
        return a <= prm->huber_k ? 1.0 : prm->huber_k / a;
    if (a >= prm->bisquare_c)
        return 0.0;
    double q = u / prm->bisquare_c;
    return (1 - q * q) * (1 - q * q);
}

/* The estimator: plain weighted fit, or IRLS when params.robust. base holds the sigma
 * weights; wrob (n) receives robust weights (all 1 when not robust); wtot (n) is
 * scratch for the total weights. */
static int estimate(const pts *in, const stagecal_regress_params *prm, const double *start,
                    double *theta, fitinfo *info, double *wrob, double *wtot, double *scale,
                    size_t *iter, stagecal_error *err)
{
    pts d = *in;
    size_t n = d.n, p = d.form->p;
    int rc;
    for (size_t i = 0; i < n; i++) {
        wrob[i] = 1.0;
        wtot[i] = in->w[i];
    }
    d.w = wtot;
    *iter = 0;
    *scale = 0;
    if ((rc = fit_once(&d, prm, start, theta, info, err)) != STAGECAL_OK)
        return rc;
    if (prm->robust == STAGECAL_ROBUST_NONE)
        return STAGECAL_OK;
    double *u = malloc(n * sizeof *u);
    if (!u)
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory");
    for (size_t it = 0; it < prm->robust_max_iter; it++) {
        double m, prev[STAGECAL_FORM_MAXP];
        for (size_t i = 0; i < n; i++) {
            stagecal_form_eval(d.form, theta, d.r[i], pt_f(&d, i), &m, NULL);
            u[i] = sqrt(in->w[i]) * (d.y[i] - m);
        }
        /* MAD about zero of the standardised residuals, as a normal-consistent scale. */
        double *a = wtot; /* reuse as scratch: weights are rebuilt below */
        for (size_t i = 0; i < n; i++)
            a[i] = fabs(u[i]);
        gsl_sort(a, 1, n);
        double s = gsl_stats_median_from_sorted_data(a, 1, n) / MAD_NORMAL;
        *scale = s;
        if (!(s > 0)) {
            for (size_t i = 0; i < n; i++)
                wtot[i] = in->w[i] * wrob[i];
            break; /* more than half the points fitted exactly: nothing to reweight */
        }
        for (size_t i = 0; i < n; i++) {
            wrob[i] = weight_fn(prm, u[i] / s);
            wtot[i] = in->w[i] * wrob[i];
        }
        memcpy(prev, theta, p * sizeof *theta);
        *iter = it + 1;
        if ((rc = fit_once(&d, prm, prev, theta, info, err)) != STAGECAL_OK) {
            free(u);
            return rc;
        }
        int done = 1;
        for (size_t k = 0; k < p; k++)
            if (fabs(theta[k] - prev[k]) > prm->robust_tol * (fabs(theta[k]) + prm->robust_tol))
                done = 0;
        if (done)
            break;
    }
    free(u);
    return STAGECAL_OK;
}

/* ---- public fit ----------------------------------------------------------------------- */

static int check_params(const stagecal_regress_params *prm, const stagecal_form *form,
                        stagecal_error *err)
{
    if (!(prm->level > 0 && prm->level < 1))
        return error_set(err, STAGECAL_EINVAL, "regress: level %g (expected a value in (0, 1))",
                         prm->level);
    if (prm->max_iter < 1 || prm->stall_iter < 1 || !(prm->rank_tol > 0 && prm->rank_tol < 1) ||
        !(prm->xtol > 0) || !(prm->gtol > 0) || !(prm->ftol >= 0) || !(prm->polish_tol >= 0))
        return error_set(err, STAGECAL_EINVAL,
                         "regress: solver limits max_iter %zu, xtol %g, gtol %g, ftol %g "
                         "(expected max_iter >= 1 and positive tolerances)",
                         prm->max_iter, prm->xtol, prm->gtol, prm->ftol);
    if (prm->robust != STAGECAL_ROBUST_NONE && prm->robust != STAGECAL_ROBUST_HUBER &&
        prm->robust != STAGECAL_ROBUST_BISQUARE)
        return error_set(err, STAGECAL_EINVAL, "regress: unknown robust method %d",
                         (int)prm->robust);
    if (!(prm->huber_k > 0) || !(prm->bisquare_c > 0) || !(prm->robust_tol > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "regress: robust constants k %g, c %g, tol %g (expected > 0)",
                         prm->huber_k, prm->bisquare_c, prm->robust_tol);
    if (!(prm->boot_xtol > 0))
        return error_set(err, STAGECAL_EINVAL, "regress: boot_xtol %g (expected > 0)",
                         prm->boot_xtol);
    if (prm->boot_kind != STAGECAL_BOOT_CASE && prm->boot_kind != STAGECAL_BOOT_RESIDUAL)
        return error_set(err, STAGECAL_EINVAL, "regress: unknown bootstrap kind %d",
                         (int)prm->boot_kind);
    if (prm->theta0)
        for (size_t k = 0; k < form->p; k++)
            if (!isfinite(prm->theta0[k]))
                return error_set(err, STAGECAL_EINVAL, "regress: start value %zu is not finite",
                                 k + 1);
    return STAGECAL_OK;
}

static int check_data(const stagecal_regress_data *data, const stagecal_form *form,
                      stagecal_error *err)
{
    if (!data->r || !data->stages)
        return error_set(err, STAGECAL_EINVAL, "regress: data has no R or stages array");
    if (form->uses_load && !data->f_load)
        return error_set(err, STAGECAL_EINVAL,
                         "regress: form '%s' needs the vapour load F, and the points have none",
                         form->name);
    if (data->n <= form->p)
        return error_set(err, STAGECAL_EDATA,
                         "regress: %zu points for %zu parameters of form '%s' (need at least "
                         "%zu)",
                         data->n, form->p, form->name, form->p + 1);
    for (size_t i = 0; i < data->n; i++) {
        double r = data->r[i], y = data->stages[i];
        if (!(r > 0))
            return error_set(err, STAGECAL_EDATA, "point %zu: R = %g (expected R > 0 or inf)",
                             i + 1, r);
        if (!isfinite(y) || !(y > 0))
            return error_set(err, STAGECAL_EDATA,
                             "point %zu: stages = %g (expected a finite value > 0)", i + 1, y);
        if (data->sigma && (!isfinite(data->sigma[i]) || !(data->sigma[i] > 0)))
            return error_set(err, STAGECAL_EDATA,
                             "point %zu: sigma = %g (expected a finite value > 0)", i + 1,
                             data->sigma[i]);
        if (form->uses_load && (!isfinite(data->f_load[i]) || !(data->f_load[i] >= 0)))
            return error_set(err, STAGECAL_EDATA,
                             "point %zu: F = %g Pa^0.5 (expected a finite value >= 0)", i + 1,
                             data->f_load[i]);
        /* Domain of the form's terms that do not depend on θ. */
        if (form->kind == STAGECAL_FORM_LINEAR) {
            double th[STAGECAL_FORM_MAXP] = {0}, m;
            if (stagecal_form_eval(form, th, r, data->f_load ? data->f_load[i] : 0, &m, NULL) !=
                STAGECAL_OK)
                return error_set(err, STAGECAL_EINVAL,
                                 "point %zu: form '%s' is undefined at R = %g%s", i + 1, form->name,
                                 r, form->uses_load ? " or at its F (1/F needs F > 0)" : "");
        }
    }
    return STAGECAL_OK;
}

/* Statistics from θ and the total weights: covariance, intervals, criteria. */
static int finish(const pts *d, const double *base_w, const stagecal_regress_params *prm,
                  stagecal_regress_result *res, stagecal_error *err)
{
    size_t n = d->n, p = d->form->p;
    int rc = STAGECAL_OK;
    gsl_vector *rv = gsl_vector_alloc(n);
    gsl_matrix *J = gsl_matrix_alloc(n, p), *C = gsl_matrix_alloc(p, p);
    if (!rv || !J || !C) {
        rc = error_set(err, STAGECAL_ENOMEM, "regress: out of memory");
        goto done;
    }
    if (residuals(d, res->theta, rv, J) != STAGECAL_OK) {
        rc = error_set(err, STAGECAL_EDATA,
                       "regress: form '%s' is undefined at some point for the fitted parameters",
                       d->form->name);
        goto done;
    }
    res->rss = sumsq(rv);
    res->dof = (double)(n - p);
    res->sigma = sqrt(res->rss / res->dof);
    /* (JᵀWJ)⁻¹ from QR with column pivoting on the column-equilibrated Jacobian, so that
     * the rank test does not depend on the parameters' units (Misra1a: 5 decades). */
    double cn[STAGECAL_FORM_MAXP];
    for (size_t k = 0; k < p; k++) {
        gsl_vector_view col = gsl_matrix_column(J, k);
        cn[k] = gsl_blas_dnrm2(&col.vector);
        if (cn[k] > 0)
            gsl_vector_scale(&col.vector, 1.0 / cn[k]);
    }
    int gs = gsl_multifit_nlinear_covar(J, prm->rank_tol, C);
    if (gs != GSL_SUCCESS) {
        rc = error_set(err, STAGECAL_EINTERNAL, "regress: covariance failed: %s", gsl_strerror(gs));
        goto done;
    }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++) {
            double c = gsl_matrix_get(C, i, j);
            /* a dependent column has zero norm or was dropped (zero row): flag it below */
            gsl_matrix_set(C, i, j, cn[i] > 0 && cn[j] > 0 ? c / (cn[i] * cn[j]) : 0.0);
        }
    double s2 = res->cov_scaled ? res->sigma * res->sigma : 1.0;
    res->tquant = gsl_cdf_tdist_Pinv(0.5 + 0.5 * prm->level, res->dof);
    for (size_t i = 0; i < p; i++) {
        for (size_t j = 0; j < p; j++)
            res->cov[i * p + j] = s2 * gsl_matrix_get(C, i, j);
        double v = res->cov[i * p + i];
        if (!isfinite(v) || !(v >= 0) || !(gsl_matrix_get(C, i, i) > 0)) {
            rc = error_set(err, STAGECAL_EDATA,
                           "regress: form '%s': parameter '%s' is not identifiable from these "
                           "points (singular JᵀWJ)",
                           d->form->name, d->form->param_names[i]);
            goto done;
        }
        res->se[i] = sqrt(v);
        res->ci_low[i] = res->theta[i] - res->tquant * res->se[i];
        res->ci_high[i] = res->theta[i] + res->tquant * res->se[i];
    }
    /* R² about the weighted mean; weighted Gaussian log-likelihood. */
    double sw = 0, swy = 0, tss = 0, slogw = 0, s2obs = 0;
    for (size_t i = 0; i < n; i++) {
        sw += d->w[i];
        swy += d->w[i] * d->y[i];
    }
    for (size_t i = 0; i < n; i++) {
        double e = d->y[i] - swy / sw;
        tss += d->w[i] * e * e;
        if (d->w[i] > 0)
            slogw += log(d->w[i]);
        s2obs += 1.0 / base_w[i];
    }
    res->r2 = tss > 0 ? 1.0 - res->rss / tss : 0.0;
    s2obs /= (double)n; /* mean sigma_i², 1 unweighted */
    res->sigma_obs =
        res->weighted ? (res->cov_scaled ? res->sigma * sqrt(s2obs) : sqrt(s2obs)) : res->sigma;
    double dn = (double)n;
    if (res->cov_scaled) {
        res->k_ic = p + 1;
        res->loglik =
            res->rss > 0 ? -0.5 * dn * (log(2 * M_PI) + log(res->rss / dn) + 1) + 0.5 * slogw : 0.0;
    } else {
        res->k_ic = p;
        res->loglik = -0.5 * res->rss - 0.5 * (dn * log(2 * M_PI) - slogw);
    }
    double k = (double)res->k_ic;
    res->ic_defined = n > res->k_ic + 1 && (res->rss > 0 || !res->cov_scaled);
    if (res->ic_defined) {
        res->aicc = -2 * res->loglik + 2 * k + 2 * k * (k + 1) / (dn - k - 1);
        res->bic = -2 * res->loglik + k * log(dn);
    } else {
        res->aicc = 0;
        res->bic = 0;
        res->loglik = 0;
    }
done:
    gsl_vector_free(rv);
    gsl_matrix_free(J);
    gsl_matrix_free(C);
    return rc;
}

static int band_grid(const stagecal_regress_params *prm, stagecal_regress_result *res,
                     stagecal_error *err)
{
    double fs[3];
    size_t nf = 1, nr = prm->band_points;
    if (nr == 0)
        return STAGECAL_OK;
    if (res->r_max > res->r_min || nr == 1) {
        /* a grid over the finite R range */
    } else {
        nr = res->r_max > 0 ? 1 : 0; /* all points at one R */
    }
    fs[0] = res->f_min;
    if (res->form.uses_load && res->f_max > res->f_min) {
        fs[1] = 0.5 * (res->f_min + res->f_max);
        fs[2] = res->f_max;
        nf = 3;
    }
    size_t nrr = nr + (res->has_total_reflux ? 1 : 0);
    if (nrr == 0)
        return STAGECAL_OK;
    res->band = calloc(nrr * nf, sizeof *res->band);
    if (!res->band)
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory for the band grid");
    for (size_t j = 0; j < nf; j++)
        for (size_t i = 0; i < nrr; i++) {
            double r = i < nr ? (nr > 1 ? res->r_min + (res->r_max - res->r_min) * (double)i /
                                                           (double)(nr - 1)
                                        : res->r_min)
                              : INFINITY;
            int rc =
                stagecal_regress_band(&res->form, res->theta, res->cov, res->sigma_obs, res->dof,
                                      res->level, r, fs[j], &res->band[res->nband], err);
            if (rc != STAGECAL_OK)
                return rc;
            res->nband++;
        }
    return STAGECAL_OK;
}

static int bootstrap(const pts *d, const stagecal_regress_params *prm, stagecal_regress_result *res,
                     stagecal_error *err)
{
    size_t n = d->n, p = d->form->p, B = prm->bootstrap;
    int rc = STAGECAL_OK;
    double *buf = malloc((6 * n + B * p + B) * sizeof *buf);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    if (!buf || !rng) {
        free(buf);
        gsl_rng_free(rng);
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory for %zu resamples", B);
    }
    double *r = buf, *f = r + n, *y = f + n, *w = y + n, *wrob = w + n, *wtot = wrob + n;
    double *thetas = wtot + n, *col = thetas + B * p;
    double e_std;
    gsl_rng_set(rng, prm->seed);
    stagecal_regress_params bp = *prm;
    bp.theta0 = NULL;
    /* Resample estimates feed percentiles: boot_xtol is ample, and waiting for the
     * rounding-level stall of the full-accuracy fit would dominate the cost. */
    bp.xtol = prm->boot_xtol;
    bp.gtol = prm->boot_xtol;
    bp.stall_iter = 2;
    bp.polish_steps = 0;
    /* Standardised residuals, inflated by sqrt(n/(n−p)) so that their variance matches
     * σ² (Davison & Hinkley 1997, §6.2.3; leverage adjustment omitted). */
    double infl = sqrt((double)n / (double)(n - p));
    size_t ok = 0;
    for (size_t b = 0; b < B; b++) {
        pts bd = *d;
        for (size_t i = 0; i < n; i++) {
            size_t j = gsl_rng_uniform_int(rng, n);
            if (prm->boot_kind == STAGECAL_BOOT_CASE) {
                r[i] = d->r[j];
                f[i] = pt_f(d, j);
                y[i] = d->y[j];
                w[i] = d->w[j];
            } else {
                double mj, mi;
                stagecal_form_eval(d->form, res->theta, d->r[j], pt_f(d, j), &mj, NULL);
                stagecal_form_eval(d->form, res->theta, d->r[i], pt_f(d, i), &mi, NULL);
                e_std = sqrt(d->w[j]) * (d->y[j] - mj) * infl;
                r[i] = d->r[i];
                f[i] = pt_f(d, i);
                y[i] = mi + e_std / sqrt(d->w[i]);
                w[i] = d->w[i];
            }
        }
        bd.r = r;
        bd.f = d->f ? f : NULL;
        bd.y = y;
        bd.w = w;
        double th[STAGECAL_FORM_MAXP], scale;
        size_t it;
        fitinfo fi;
        /* Start from the full-data estimate: resamples lie near it. */
        int frc = estimate(&bd, &bp, res->theta, th, &fi, wrob, wtot, &scale, &it, NULL);
        if (frc == STAGECAL_ENOMEM) {
            rc = error_set(err, frc, "regress: out of memory in the bootstrap");
            goto done;
        }
        if (frc != STAGECAL_OK)
            continue;
        memcpy(thetas + ok * p, th, p * sizeof *th);
        ok++;
    }
    res->boot_ok = ok;
    if (ok < 2) {
        rc = error_set(err, STAGECAL_EDATA,
                       "regress: bootstrap: only %zu of %zu resamples could be fitted", ok, B);
        goto done;
    }
    for (size_t k = 0; k < p; k++) {
        for (size_t b = 0; b < ok; b++)
            col[b] = thetas[b * p + k];
        res->boot_se[k] = gsl_stats_sd(col, 1, ok);
        gsl_sort(col, 1, ok);
        res->boot_low[k] = gsl_stats_quantile_from_sorted_data(col, 1, ok, 0.5 - 0.5 * prm->level);
        res->boot_high[k] = gsl_stats_quantile_from_sorted_data(col, 1, ok, 0.5 + 0.5 * prm->level);
    }
done:
    free(buf);
    gsl_rng_free(rng);
    return rc;
}

void stagecal_regress_result_free(stagecal_regress_result *result)
{
    if (!result)
        return;
    free(result->weights);
    free(result->band);
    result->weights = NULL;
    result->band = NULL;
    result->nband = 0;
}

int stagecal_regress_fit(const stagecal_regress_data *data, const stagecal_form *form,
                         const stagecal_regress_params *params, stagecal_regress_result *result,
                         stagecal_error *err)
{
    stagecal_regress_params prm = params ? *params : stagecal_regress_default_params();
    int rc;
    if (!data || !form || !result)
        return error_set(err, STAGECAL_EINVAL, "regress: data, form and result are required");
    memset(result, 0, sizeof *result);
    if (form->p < 1 || form->p > STAGECAL_FORM_MAXP)
        return error_set(err, STAGECAL_EINVAL, "regress: form with %zu parameters", form->p);
    if ((rc = check_params(&prm, form, err)) != STAGECAL_OK ||
        (rc = check_data(data, form, err)) != STAGECAL_OK)
        return rc;
    size_t n = data->n, p = form->p;
    double *wbuf = malloc(4 * n * sizeof *wbuf);
    if (!wbuf)
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory for %zu points", n);
    double *base = wbuf, *wrob = base + n, *wtot = wrob + n, *fz = wtot + n;
    for (size_t i = 0; i < n; i++) {
        base[i] = data->sigma ? 1.0 / (data->sigma[i] * data->sigma[i]) : 1.0;
        fz[i] = data->f_load ? data->f_load[i] : 0.0;
    }
    pts d = {n, data->r, fz, data->stages, base, form};
    fitinfo info = {0};
    result->form = *form;
    result->n = n;
    result->p = p;
    result->level = prm.level;
    result->weighted = data->sigma != NULL;
    result->cov_scaled = prm.scale_cov || !data->sigma;
    rc = estimate(&d, &prm, prm.theta0, result->theta, &info, wrob, wtot, &result->robust_scale,
                  &result->robust_iter, err);
    if (rc != STAGECAL_OK)
        goto fail;
    result->stop = info.stop;
    result->iterations = info.iterations;
    result->starts = info.starts;
    result->polish = info.polish;
    result->robust = prm.robust;
    pts dt = d;
    dt.w = wtot;
    if ((rc = finish(&dt, base, &prm, result, err)) != STAGECAL_OK)
        goto fail;
    /* envelope */
    result->r_min = INFINITY;
    result->r_max = 0;
    result->f_min = data->f_load ? INFINITY : 0;
    result->f_max = 0;
    for (size_t i = 0; i < n; i++) {
        if (isinf(data->r[i])) {
            result->has_total_reflux = 1;
        } else {
            result->r_min = fmin(result->r_min, data->r[i]);
            result->r_max = fmax(result->r_max, data->r[i]);
        }
        if (data->f_load) {
            result->f_min = fmin(result->f_min, data->f_load[i]);
            result->f_max = fmax(result->f_max, data->f_load[i]);
        }
    }
    if (isinf(result->r_min))
        result->r_min = 0; /* every point at total reflux */
    if (prm.robust != STAGECAL_ROBUST_NONE) {
        result->weights = malloc(n * sizeof *result->weights);
        if (!result->weights) {
            rc = error_set(err, STAGECAL_ENOMEM, "regress: out of memory");
            goto fail;
        }
        memcpy(result->weights, wrob, n * sizeof *wrob);
    }
    if ((rc = band_grid(&prm, result, err)) != STAGECAL_OK)
        goto fail;
    result->boot_b = prm.bootstrap;
    result->boot_seed = prm.seed;
    result->boot_kind = prm.boot_kind;
    if (prm.bootstrap > 0 && (rc = bootstrap(&d, &prm, result, err)) != STAGECAL_OK)
        goto fail;
    free(wbuf);
    return STAGECAL_OK;
fail:
    free(wbuf);
    stagecal_regress_result_free(result);
    return rc;
}

/* ---- ranking -------------------------------------------------------------------------- */

static int cmp_rows(const void *a, const void *b)
{
    const stagecal_regress_rank_row *x = a, *y = b;
    if ((x->status == STAGECAL_OK) != (y->status == STAGECAL_OK))
        return x->status == STAGECAL_OK ? -1 : 1;
    if (x->status != STAGECAL_OK)
        return 0;
    return (x->aicc > y->aicc) - (x->aicc < y->aicc);
}

int stagecal_regress_rank(const stagecal_regress_data *data, const char *const *forms,
                          size_t nforms, const stagecal_regress_params *params,
                          stagecal_regress_rank_row *rows, size_t *nrows, stagecal_error *err)
{
    const char *list[STAGECAL_REGRESS_MAXRANK];
    size_t nl = 0;
    if (!data || !rows || !nrows)
        return error_set(err, STAGECAL_EINVAL, "rank: data, rows and nrows are required");
    *nrows = 0;
    if (forms) {
        if (nforms == 0 || nforms > STAGECAL_REGRESS_MAXRANK)
            return error_set(err, STAGECAL_EINVAL, "rank: %zu forms (expected 1 to %d)", nforms,
                             STAGECAL_REGRESS_MAXRANK);
        for (size_t i = 0; i < nforms; i++)
            list[nl++] = forms[i];
    } else {
        int all_finite = 1;
        for (size_t i = 0; data->r && i < data->n; i++)
            if (isinf(data->r[i]))
                all_finite = 0;
        list[nl++] = "constant";
        list[nl++] = "saturating";
        list[nl++] = "linear:1+1/R";
        list[nl++] = "linear:1+L/V";
        if (all_finite)
            list[nl++] = "linear:1+lnR";
        if (data->f_load) {
            list[nl++] = "saturating-load";
            list[nl++] = "linear:1+1/R+F";
            list[nl++] = "linear:1+1/R+F+F^2";
            list[nl++] = "linear:1+L/V+F+F^2";
        }
    }
    stagecal_regress_params prm = params ? *params : stagecal_regress_default_params();
    prm.bootstrap = 0;
    prm.robust = STAGECAL_ROBUST_NONE;
    prm.band_points = 0;
    prm.theta0 = NULL;
    size_t fitted = 0;
    double best = INFINITY;
    for (size_t i = 0; i < nl; i++) {
        stagecal_regress_rank_row *row = &rows[i];
        stagecal_error e;
        stagecal_regress_result res;
        memset(row, 0, sizeof *row);
        stagecal_error_clear(&e);
        row->status = stagecal_form_parse(list[i], &row->form, &e);
        if (row->status == STAGECAL_OK) {
            row->status = stagecal_regress_fit(data, &row->form, &prm, &res, &e);
            if (row->status == STAGECAL_OK && !res.ic_defined)
                row->status = error_set(&e, STAGECAL_EDATA,
                                        "AICc undefined: %zu points for %zu counted parameters",
                                        res.n, res.k_ic);
        } else {
            snprintf(row->form.name, sizeof row->form.name, "%s", list[i]);
        }
        if (row->status != STAGECAL_OK) {
            snprintf(row->message, sizeof row->message, "%s", e.text);
            continue;
        }
        row->p = res.p;
        row->rss = res.rss;
        row->sigma = res.sigma;
        row->aicc = res.aicc;
        row->bic = res.bic;
        row->r2 = res.r2;
        stagecal_regress_result_free(&res);
        best = fmin(best, row->aicc);
        fitted++;
    }
    *nrows = nl;
    if (fitted == 0)
        return error_set(err, STAGECAL_EDATA, "rank: none of the %zu forms could be fitted (%s)",
                         nl, rows[0].message);
    double sum = 0;
    for (size_t i = 0; i < nl; i++)
        if (rows[i].status == STAGECAL_OK) {
            rows[i].delta_aicc = rows[i].aicc - best;
            sum += exp(-0.5 * rows[i].delta_aicc);
        }
    for (size_t i = 0; i < nl; i++)
        if (rows[i].status == STAGECAL_OK)
            rows[i].akaike_weight = exp(-0.5 * rows[i].delta_aicc) / sum;
    qsort(rows, nl, sizeof *rows, cmp_rows);
    return STAGECAL_OK;
}
