/*
 * regress_nlin.c — the nonlinear least-squares driver every fit of stagecal uses (see
 * stagecal/regress.h): a problem (residual callback, stagecal_regress_fdf) kept apart from
 * the solver, init / iterate / test / driver in the manner of GSL's multifit_nlinear, the
 * Gauss–Newton polish, and the statistics of the estimate (covariance, standard errors,
 * t intervals), so that tolerances and covariance are computed in one place.
 *
 * Solver: gsl_multifit_nlinear, trust region with Levenberg–Marquardt steps; the
 * Jacobian is the problem's, or GSL's central finite differences when it gives none.
 * Polish: Gauss–Newton steps with QR on the Jacobian (accuracy checked on NIST StRD Misra1a).
 * Covariance: s²·(JᵀJ)⁻¹, s² = RSS/(n − p) — the NIST StRD definition (Bates & Watts
 * 1988, §2.3) — from QR with column pivoting on the column-equilibrated Jacobian; t
 * intervals with gsl_cdf_tdist_Pinv.
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
#include <gsl/gsl_multifit_nlinear.h>

#include "cr2.h"
#include "internal.h"

struct stagecal_regress_nlin {
    size_t n, p;
    gsl_multifit_nlinear_workspace *w;
    gsl_multifit_nlinear_fdf gfdf; /* adapters to fdf below */
    stagecal_regress_fdf fdf;      /* the problem of the last init */
    stagecal_regress_params prm;   /* tolerances of the last init */
    double theta0[STAGECAL_FORM_MAXP];
    int at_start;    /* the start passed the xtol test: no iteration */
    double prev_rss; /* smallest RSS seen by test (stall test) */
    size_t stall;    /* consecutive tests without an RSS decrease */
    stagecal_stop stop;
    /* scratch of the Gauss–Newton step */
    gsl_vector *res, *tau, *dv, *resid, *fwork;
    gsl_matrix *J;
};

/* GSL's callbacks on our plain-array problem; vectors and matrices from GSL's workspace
 * are contiguous (stride 1, tda = p). */
static int adapt_f(const gsl_vector *x, void *ctx, gsl_vector *f)
{
    const stagecal_regress_fdf *fdf = ctx;
    /* GSL's finite differences write into a column of the Jacobian (stride p) */
    double *y = f->stride == 1 ? f->data : malloc(f->size * sizeof *y);
    if (!y)
        return GSL_ENOMEM;
    if (fdf->f(x->data, fdf->params, y) != 0) {
        /* Outside the model's domain: a huge residual makes the trust region reject the
         * step instead of aborting. */
        for (size_t i = 0; i < f->size; i++)
            y[i] = GSL_SQRT_DBL_MAX;
    }
    if (y != f->data) {
        for (size_t i = 0; i < f->size; i++)
            gsl_vector_set(f, i, y[i]);
        free(y);
    }
    return GSL_SUCCESS;
}

static int adapt_df(const gsl_vector *x, void *ctx, gsl_matrix *J)
{
    const stagecal_regress_fdf *fdf = ctx;
    return fdf->df(x->data, fdf->params, J->data) == 0 ? GSL_SUCCESS : GSL_EDOM;
}

static gsl_multifit_nlinear_fdf gsl_problem(stagecal_regress_fdf *fdf)
{
    gsl_multifit_nlinear_fdf g;
    g.f = adapt_f;
    g.df = fdf->df ? adapt_df : NULL;
    g.fvv = NULL;
    g.n = fdf->n;
    g.p = fdf->p;
    g.params = fdf;
    return g;
}

/* Residuals at theta into f and, when J is not NULL, the Jacobian (the problem's, or
 * central differences). 0 on success. */
static int eval_fdf(stagecal_regress_fdf *fdf, const double *theta, gsl_vector *f, gsl_matrix *J,
                    gsl_vector *work)
{
    if (fdf->f(theta, fdf->params, f->data) != 0)
        return -1;
    if (!J)
        return 0;
    if (fdf->df)
        return fdf->df(theta, fdf->params, J->data) == 0 ? 0 : -1;
    gsl_multifit_nlinear_fdf g = gsl_problem(fdf);
    gsl_vector_const_view x = gsl_vector_const_view_array(theta, fdf->p);
    return gsl_multifit_nlinear_df(GSL_SQRT_DBL_EPSILON, GSL_MULTIFIT_NLINEAR_CTRDIFF, &x.vector,
                                   NULL, &g, f, J, work) == GSL_SUCCESS
               ? 0
               : -1;
}

static double sumsq(const gsl_vector *v)
{
    double s = gsl_blas_dnrm2(v);
    return s * s;
}

void stagecal_regress_nlin_free(stagecal_regress_nlin *w)
{
    if (!w)
        return;
    gsl_multifit_nlinear_free(w->w);
    gsl_vector_free(w->res);
    gsl_vector_free(w->tau);
    gsl_vector_free(w->dv);
    gsl_vector_free(w->resid);
    gsl_vector_free(w->fwork);
    gsl_matrix_free(w->J);
    free(w);
}

stagecal_regress_nlin *stagecal_regress_nlin_alloc(size_t n, size_t p)
{
    if (p < 1 || p > STAGECAL_FORM_MAXP || n < p)
        return NULL;
    stagecal_regress_nlin *w = calloc(1, sizeof *w);
    if (!w)
        return NULL;
    gsl_multifit_nlinear_parameters fp = gsl_multifit_nlinear_default_parameters();
    /* used only by problems without a Jacobian: central differences, since the
     * composition residuals come from a stepping whose forward differences are noisier */
    fp.fdtype = GSL_MULTIFIT_NLINEAR_CTRDIFF;
    w->n = n;
    w->p = p;
    w->w = gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &fp, n, p);
    w->res = gsl_vector_alloc(n);
    w->tau = gsl_vector_alloc(p);
    w->dv = gsl_vector_alloc(p);
    w->resid = gsl_vector_alloc(n);
    w->fwork = gsl_vector_alloc(n);
    w->J = gsl_matrix_alloc(n, p);
    if (!w->w || !w->res || !w->tau || !w->dv || !w->resid || !w->fwork || !w->J) {
        stagecal_regress_nlin_free(w);
        return NULL;
    }
    return w;
}

/* The Gauss–Newton step δ = argmin |J δ + f| (QR on the Jacobian) at theta. 0 on success. */
static int gn_step(stagecal_regress_nlin *w, const double *theta, double *delta)
{
    if (eval_fdf(&w->fdf, theta, w->res, w->J, w->fwork) != 0 ||
        gsl_linalg_QR_decomp(w->J, w->tau) != GSL_SUCCESS ||
        gsl_linalg_QR_lssolve(w->J, w->tau, w->res, w->dv, w->resid) != GSL_SUCCESS)
        return -1;
    for (size_t k = 0; k < w->p; k++) {
        delta[k] = -gsl_vector_get(w->dv, k);
        if (!isfinite(delta[k]))
            return -1;
    }
    return 0;
}

/* GSL's xtol test, |δ_i| ≤ xtol·(|θ_i| + xtol), applied to the Gauss–Newton step. */
static int gn_converged(stagecal_regress_nlin *w, const double *theta)
{
    double delta[STAGECAL_FORM_MAXP];
    double xtol = w->prm.xtol;
    if (gn_step(w, theta, delta) != 0)
        return 0;
    for (size_t k = 0; k < w->p; k++)
        if (!(fabs(delta[k]) <= xtol * (fabs(theta[k]) + xtol)))
            return 0;
    return 1;
}

int stagecal_regress_nlin_init(stagecal_regress_nlin *w, const stagecal_regress_fdf *fdf,
                               const double *theta0, const stagecal_regress_params *params,
                               stagecal_error *err)
{
    if (!w || !fdf || !fdf->f || !theta0 || fdf->n != w->n || fdf->p != w->p)
        return error_set(err, STAGECAL_EINVAL,
                         "regress: problem and workspace sizes differ (or a NULL argument)");
    w->fdf = *fdf;
    w->prm = params ? *params : stagecal_regress_default_params();
    memcpy(w->theta0, theta0, w->p * sizeof *theta0);
    w->stall = 0;
    w->stop = STAGECAL_STOP_XTOL;
    w->at_start = gn_converged(w, theta0);
    if (w->at_start)
        return STAGECAL_OK;
    w->gfdf = gsl_problem(&w->fdf);
    gsl_vector_const_view x0 = gsl_vector_const_view_array(theta0, w->p);
    int gs = gsl_multifit_nlinear_init(&x0.vector, &w->gfdf, w->w);
    if (gs != GSL_SUCCESS)
        return error_set(err, STAGECAL_ENOCONV, "regress: cannot start the solver: %s",
                         gsl_strerror(gs));
    w->prev_rss = sumsq(gsl_multifit_nlinear_residual(w->w));
    return STAGECAL_OK;
}

int stagecal_regress_nlin_iterate(stagecal_regress_nlin *w, stagecal_error *err)
{
    if (w->at_start)
        return STAGECAL_OK;
    int gs = gsl_multifit_nlinear_iterate(w->w);
    /* a step that cannot decrease the RSS (at the optimum to rounding) ends the search */
    if (gs == GSL_ENOPROG || gs == GSL_ENOPROGJ) {
        w->stop = STAGECAL_STOP_NOPROGRESS;
        w->stall = w->prm.stall_iter;
        return STAGECAL_OK;
    }
    if (gs != GSL_SUCCESS)
        return error_set(err, STAGECAL_ENOCONV, "regress: trust-region step failed: %s",
                         gsl_strerror(gs));
    return STAGECAL_OK;
}

int stagecal_regress_nlin_test(stagecal_regress_nlin *w)
{
    if (w->at_start)
        return 1;
    if (w->stall >= w->prm.stall_iter) /* no progress (iterate or the stall test) */
        return 1;
    int info = 0;
    if (gsl_multifit_nlinear_test(w->prm.xtol, w->prm.gtol, w->prm.ftol, &info, w->w) ==
            GSL_SUCCESS &&
        info != 0) {
        w->stop = info == 2   ? STAGECAL_STOP_GTOL
                  : info == 3 ? STAGECAL_STOP_FTOL
                              : STAGECAL_STOP_XTOL;
        return 1;
    }
    double now = sumsq(gsl_multifit_nlinear_residual(w->w));
    w->stall = now >= w->prev_rss * (1 - 4 * DBL_EPSILON) ? w->stall + 1 : 0;
    w->prev_rss = fmin(w->prev_rss, now);
    if (w->stall >= w->prm.stall_iter) {
        w->stop = STAGECAL_STOP_NOPROGRESS;
        return 1;
    }
    return 0;
}

int stagecal_regress_nlin_driver(stagecal_regress_nlin *w, stagecal_error *err)
{
    if (w->at_start)
        return STAGECAL_OK;
    /* GSL's order: iterate, then test (before the first step the step test would pass) */
    for (size_t it = 0;; it++) {
        if (it == w->prm.max_iter)
            return error_set(err, STAGECAL_ENOCONV,
                             "regress: the trust-region solver did not converge within %zu "
                             "iterations",
                             w->prm.max_iter);
        int rc = stagecal_regress_nlin_iterate(w, err);
        if (rc != STAGECAL_OK)
            return rc;
        if (stagecal_regress_nlin_test(w))
            return STAGECAL_OK;
    }
}

const double *stagecal_regress_nlin_position(const stagecal_regress_nlin *w)
{
    return w->at_start ? w->theta0 : gsl_multifit_nlinear_position(w->w)->data;
}

double stagecal_regress_nlin_rss(const stagecal_regress_nlin *w)
{
    if (w->at_start) /* res holds the residuals at the start from gn_converged */
        return sumsq(w->res);
    return sumsq(gsl_multifit_nlinear_residual(w->w));
}

size_t stagecal_regress_nlin_niter(const stagecal_regress_nlin *w)
{
    return w->at_start ? 0 : gsl_multifit_nlinear_niter(w->w);
}

stagecal_stop stagecal_regress_nlin_stop(const stagecal_regress_nlin *w)
{
    return w->stop;
}

size_t stagecal_regress_nlin_polish(stagecal_regress_nlin *w, double *theta, double *rss)
{
    size_t p = w->p, accepted = 0;
    for (size_t it = 0; it < w->prm.polish_steps; it++) {
        double trial[STAGECAL_FORM_MAXP], delta[STAGECAL_FORM_MAXP];
        if (gn_step(w, theta, delta) != 0)
            break;
        int small = 1;
        for (size_t k = 0; k < p; k++) {
            trial[k] = theta[k] + delta[k];
            if (fabs(delta[k]) > w->prm.polish_tol * fabs(theta[k]))
                small = 0;
        }
        if (eval_fdf(&w->fdf, trial, w->res, NULL, NULL) != 0)
            break;
        double rss_new = sumsq(w->res);
        if (!(rss_new <= *rss))
            break;
        memcpy(theta, trial, p * sizeof *theta);
        *rss = rss_new;
        accepted++;
        if (small)
            break;
    }
    return accepted;
}

/* ---- statistics of the estimate -------------------------------------------------------- */

/* The HC3 (power 2) or HC2 (power 1) sandwich in place of C: on entry C = (JᵀJ)⁻¹ in the
 * parameters' units, J the Jacobian of the weighted residuals rv with column k divided by
 * cn[k]. Each point's squared residual is inflated by 1/(1 − h_i)^power, h_i = j_iᵀ C j_i its
 * leverage (MacKinnon & White 1985, "Some heteroskedasticity-consistent covariance matrix
 * estimators with improved finite sample properties", J. Econometrics 29, 305–325 — from memory).
 * −1 (C untouched) when a point's leverage exceeds 0.99: its residual then says nothing of its
 * variance. */
static int sandwich(const gsl_matrix *J, const double *cn, const gsl_vector *rv, int power,
                    gsl_matrix *C)
{
    size_t n = J->size1, p = J->size2;
    double M[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP] = {0}, jr[STAGECAL_FORM_MAXP];
    for (size_t r = 0; r < n; r++) {
        double h = 0;
        for (size_t k = 0; k < p; k++)
            jr[k] = gsl_matrix_get(J, r, k) * cn[k];
        for (size_t i = 0; i < p; i++)
            for (size_t j = 0; j < p; j++)
                h += jr[i] * gsl_matrix_get(C, i, j) * jr[j];
        if (!(h <= 0.99))
            return -1;
        double e = gsl_vector_get(rv, r), w = e * e / (power == 2 ? (1 - h) * (1 - h) : 1 - h);
        for (size_t i = 0; i < p; i++)
            for (size_t j = 0; j < p; j++)
                M[i * p + j] += w * jr[i] * jr[j];
    }
    double S[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP];
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++) {
            double v = 0;
            for (size_t a = 0; a < p; a++)
                for (size_t b = 0; b < p; b++)
                    v += gsl_matrix_get(C, i, a) * M[a * p + b] * gsl_matrix_get(C, b, j);
            S[i * p + j] = v;
        }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++)
            gsl_matrix_set(C, i, j, 0.5 * (S[i * p + j] + S[j * p + i])); /* exactly symmetric */
    return 0;
}

/* se and the t intervals of every parameter from res->cov, at res->tquant or (with a
 * design) at each parameter's Bell–McCaffrey dof in res->param_dof. */
static void set_intervals(stagecal_regress_result *res)
{
    for (size_t i = 0; i < res->p; i++) {
        double t = res->design ? gsl_cdf_tdist_Pinv(0.5 + 0.5 * res->level, res->param_dof[i])
                               : res->tquant;
        res->se[i] = sqrt(res->cov[i * res->p + i]);
        res->ci_low[i] = res->theta[i] - t * res->se[i];
        res->ci_high[i] = res->theta[i] + t * res->se[i];
    }
}

/* For HC2_BM and CR2_RUN: keeps the standardised Jacobian (J with column k times cn[k]) in
 * res->design (and for CR2_RUN the clusters cl in res->cluster) and every parameter's
 * Bell–McCaffrey dof in res->param_dof. ENOMEM; EDATA from the dof (a rank-deficient design
 * cannot reach here: the model's covariance exists). */
static int keep_design(const gsl_matrix *J, const double *cn, const size_t *cl,
                       stagecal_regress_result *res, stagecal_error *err)
{
    size_t n = J->size1, p = J->size2;
    free(res->design);
    free(res->cluster);
    res->cluster = NULL;
    res->design = malloc(n * p * sizeof *res->design);
    if (!res->design || (cl && !(res->cluster = malloc(n * sizeof *res->cluster)))) {
        free(res->design);
        res->design = NULL;
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory for the design");
    }
    if (cl)
        memcpy(res->cluster, cl, n * sizeof *cl);
    for (size_t r = 0; r < n; r++)
        for (size_t k = 0; k < p; k++)
            res->design[r * p + k] = gsl_matrix_get(J, r, k) * cn[k];
    for (size_t k = 0; k < p; k++) {
        double c[STAGECAL_FORM_MAXP] = {0};
        c[k] = 1;
        int rc = stagecal_regress_contrast_dof(res->design, n, p, res->cluster, c,
                                               &res->param_dof[k], err);
        if (rc != STAGECAL_OK) {
            free(res->design);
            free(res->cluster);
            res->design = NULL;
            res->cluster = NULL;
            return rc;
        }
    }
    return STAGECAL_OK;
}

/* The CR2 sandwich clustered by cl (G clusters) of the equilibrated Jacobian J with the
 * weighted residuals rv, in the parameters' units into C (which holds (JᵀJ)⁻¹ in them on
 * entry). 0, or −1 when out of memory. */
static int sandwich_cr2(const gsl_matrix *J, const double *cn, const gsl_vector *rv,
                        const size_t *cl, size_t G, gsl_matrix *C)
{
    size_t n = J->size1, p = J->size2;
    gsl_matrix *B = gsl_matrix_alloc(p, p), *V = gsl_matrix_alloc(p, p);
    gsl_matrix *D = gsl_matrix_alloc(n, p);
    double *one = malloc(n * sizeof *one);
    int bad = !B || !V || !D || !one;
    if (!bad) {
        for (size_t i = 0; i < n; i++)
            one[i] = 1.0;
        for (size_t a = 0; a < p; a++)
            for (size_t b = 0; b < p; b++)
                gsl_matrix_set(B, a, b, gsl_matrix_get(C, a, b) * cn[a] * cn[b]);
        bad = cr2_sandwich(J, one, rv->data, cl, G, B, V, D, NULL) != STAGECAL_OK;
    }
    if (!bad)
        for (size_t a = 0; a < p; a++)
            for (size_t b = 0; b < p; b++)
                gsl_matrix_set(C, a, b,
                               0.5 * (gsl_matrix_get(V, a, b) + gsl_matrix_get(V, b, a)) /
                                   (cn[a] * cn[b]));
    free(one);
    gsl_matrix_free(D);
    gsl_matrix_free(V);
    gsl_matrix_free(B);
    return bad ? -1 : 0;
}

int stagecal_regress_covar(const stagecal_regress_fdf *fdf, const double *theta, int scale,
                           const stagecal_regress_params *params, stagecal_regress_result *res,
                           stagecal_error *err)
{
    stagecal_regress_params prm = params ? *params : stagecal_regress_default_params();
    stagecal_regress_fdf pb = *fdf;
    size_t n = fdf->n, p = fdf->p;
    int rc = STAGECAL_OK;
    if (p < 1 || p > STAGECAL_FORM_MAXP || n <= p)
        return error_set(err, STAGECAL_EINVAL, "regress: %zu residuals for %zu parameters", n, p);
    gsl_vector *rv = gsl_vector_alloc(n), *work = gsl_vector_alloc(n);
    gsl_matrix *J = gsl_matrix_alloc(n, p), *C = gsl_matrix_alloc(p, p);
    if (!rv || !J || !C || !work) {
        rc = error_set(err, STAGECAL_ENOMEM, "regress: out of memory");
        goto done;
    }
    if (eval_fdf(&pb, theta, rv, J, work) != 0) {
        rc = error_set(err, STAGECAL_EDATA,
                       "regress: form '%s' is undefined at some point for the fitted parameters",
                       res->form.name);
        goto done;
    }
    res->n = n;
    res->p = p;
    res->level = prm.level;
    res->cov_scaled = scale;
    memcpy(res->theta, theta, p * sizeof *theta);
    res->rss = sumsq(rv);
    res->dof = (double)(n - p);
    res->sigma = sqrt(res->rss / res->dof);
    res->sigma_dof = res->dof;
    /* (JᵀJ)⁻¹ from QR with column pivoting on the column-equilibrated Jacobian, so that
     * the rank test does not depend on the parameters' units (Misra1a: 5 decades). */
    double cn[STAGECAL_FORM_MAXP];
    for (size_t k = 0; k < p; k++) {
        gsl_vector_view col = gsl_matrix_column(J, k);
        cn[k] = gsl_blas_dnrm2(&col.vector);
        if (cn[k] > 0)
            gsl_vector_scale(&col.vector, 1.0 / cn[k]);
    }
    int gs = gsl_multifit_nlinear_covar(J, prm.rank_tol, C);
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
    double s2 = scale ? res->sigma * res->sigma : 1.0;
    res->cov_kind = STAGECAL_COV_MODEL;
    res->tquant = gsl_cdf_tdist_Pinv(0.5 + 0.5 * prm.level, res->dof);
    free(res->design);
    free(res->cluster);
    res->design = NULL;
    res->cluster = NULL;
    for (size_t k = 0; k < p; k++)
        res->param_dof[k] = res->dof;
    for (size_t i = 0; i < p; i++) {
        for (size_t j = 0; j < p; j++)
            res->cov[i * p + j] = s2 * gsl_matrix_get(C, i, j);
        double v = res->cov[i * p + i];
        if (!isfinite(v) || !(v >= 0) || !(gsl_matrix_get(C, i, i) > 0)) {
            rc = error_set(err, STAGECAL_EDATA,
                           "regress: form '%s': parameter '%s' is not identifiable from these "
                           "points (singular JᵀWJ)",
                           res->form.name, i < res->form.p ? res->form.param_names[i] : "?");
            goto done;
        }
    }
    set_intervals(res);
    if (stagecal_regress_identify(res) > 0 && !prm.allow_undetermined) {
        char why[STAGECAL_ERROR_TEXT];
        stagecal_regress_ident_text(res, why, sizeof why);
        rc = error_set(err, STAGECAL_EDATA, "regress: %s", why);
    }
    /* identifiability is judged on the model's covariance (above); the sandwich replaces it
     * only where every variance it gives is positive */
    /* CR2_RUN needs the points' clusters, at least STAGECAL_CR2_MIN_CLUSTERS of them;
     * with fewer it is HC2_BM (result.cov_kind says so) */
    stagecal_cov_kind want = prm.cov_kind;
    size_t *cl = NULL, G = 0;
    if (rc == STAGECAL_OK && want == STAGECAL_COV_CR2_RUN) {
        if (prm.cluster && (cl = malloc(n * sizeof *cl)))
            G = cr2_clusters(prm.cluster, n, cl);
        else if (prm.cluster)
            rc = error_set(err, STAGECAL_ENOMEM, "regress: out of memory for the clusters");
        if (G < STAGECAL_CR2_MIN_CLUSTERS)
            want = STAGECAL_COV_HC2_BM;
    }
    int sw = -1;
    if (rc == STAGECAL_OK && want == STAGECAL_COV_CR2_RUN)
        sw = sandwich_cr2(J, cn, rv, cl, G, C);
    else if (rc == STAGECAL_OK && want != STAGECAL_COV_MODEL)
        sw = sandwich(J, cn, rv, want == STAGECAL_COV_HC3 ? 2 : 1, C);
    if (sw == 0) {
        int ok = 1;
        for (size_t i = 0; i < p; i++)
            ok &= isfinite(gsl_matrix_get(C, i, i)) && gsl_matrix_get(C, i, i) > 0;
        if (ok && (want == STAGECAL_COV_HC2_BM || want == STAGECAL_COV_CR2_RUN))
            rc = keep_design(J, cn, want == STAGECAL_COV_CR2_RUN ? cl : NULL, res, err);
        if (ok && rc == STAGECAL_OK) {
            for (size_t i = 0; i < p; i++)
                for (size_t j = 0; j < p; j++)
                    res->cov[i * p + j] = gsl_matrix_get(C, i, j);
            set_intervals(res);
            res->cov_kind = want;
        }
    }
    free(cl);
done:
    gsl_vector_free(rv);
    gsl_vector_free(work);
    gsl_matrix_free(J);
    gsl_matrix_free(C);
    return rc;
}

void stagecal_regress_envelope(const double *r, const double *f_load, size_t n,
                               stagecal_regress_result *res)
{
    res->r_min = INFINITY;
    res->r_max = 0;
    res->has_total_reflux = 0;
    res->f_min = f_load ? INFINITY : 0;
    res->f_max = 0;
    for (size_t i = 0; i < n; i++) {
        if (isinf(r[i])) {
            res->has_total_reflux = 1;
        } else {
            res->r_min = fmin(res->r_min, r[i]);
            res->r_max = fmax(res->r_max, r[i]);
        }
        if (f_load) {
            res->f_min = fmin(res->f_min, f_load[i]);
            res->f_max = fmax(res->f_max, f_load[i]);
        }
    }
    if (isinf(res->r_min))
        res->r_min = 0; /* every point at total reflux */
    if (isinf(res->f_min))
        res->f_min = 0;
}
