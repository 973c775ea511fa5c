/*
 * regress.c — weighted least squares of stages on (R, F): the stage-space problem on the
 * shared driver (regress_nlin.c), linear forms, starts, checks, information criteria and
 * the public fit. Bands: regress_band.c; robust reweighting: regress_robust.c; bootstrap:
 * regress_boot.c; ranking: regress_rank.c.
 *
 * Methods (docs/regress.md has the sources):
 *   - linear-in-θ forms: weighted linear least squares, gsl_multifit_wlinear_tsvd
 *     (rank checked; a rank-deficient design is bad data, not a silent pseudo-inverse);
 *   - other forms: gsl_multifit_nlinear, trust region with Levenberg–Marquardt steps,
 *     analytic Jacobian (stagecal_form_eval), several automatic starts; then
 *     Gauss–Newton polish with QR on the weighted Jacobian (checked on the NIST Statistical
 * Reference Datasets, nonlinear regression, Misra1a, Misra 1978: this lifts the NIST StRD Misra1a
 * agreement from LRE ≈ 8.5 to ≥ 11);
 *   - covariance s²·(JᵀWJ)⁻¹, s² = RSS_w/(n − p): the NIST StRD definition (Bates &
 *     Watts 1988, §2.3); t intervals with gsl_cdf_tdist_Pinv;
 *   - bands by the delta method, var_fit = gᵀCg (Seber & Wild 1989, §5.1);
 *   - AICc (Hurvich & Tsai 1989), BIC (Schwarz 1978) from the Gaussian likelihood;
 *   - robust: IRLS with Huber or Tukey-bisquare weights and MAD scale (Huber 1981;
 *     Holland & Welsch 1977 for the 95 %-efficiency constants 1.345 and 4.685);
 *   - bootstrap: case, residual or run resampling, percentile intervals (Efron & Tibshirani
 *     1993, ch. 6, 13); RNG gsl_rng_mt19937 with the caller's seed.
 * Everything is dimensionless except F (Pa^0.5).
 */
#include "stagecal/regress.h"

#include <float.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit.h>

#include "internal.h"
#include "regress_internal.h"

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
    static const char *const names[] = {[STAGECAL_STOP_LINEAR] = "direct linear solution",
                                        [STAGECAL_STOP_XTOL] = "small step (xtol)",
                                        [STAGECAL_STOP_GTOL] = "small gradient (gtol)",
                                        [STAGECAL_STOP_FTOL] = "small residual change (ftol)",
                                        [STAGECAL_STOP_NOPROGRESS] =
                                            "no further progress (at the optimum to rounding)"};
    return NAME_OF(names, stop);
}

const char *stagecal_regress_cov_name(stagecal_cov_kind kind)
{
    static const char *const names[] = {[STAGECAL_COV_MODEL] = "model",
                                        [STAGECAL_COV_HC3] = "hc3",
                                        [STAGECAL_COV_HC2] = "hc2",
                                        [STAGECAL_COV_HC2_BM] = "hc2-bm",
                                        [STAGECAL_COV_CR2_RUN] = "cr2-run"};
    return NAME_OF(names, kind);
}

const char *stagecal_regress_cov_label(stagecal_cov_kind kind)
{
    static const char *const names[] = {
        [STAGECAL_COV_MODEL] = "s^2 times the inverse information",
        [STAGECAL_COV_HC3] = "the HC3 sandwich",
        [STAGECAL_COV_HC2] = "the HC2 sandwich",
        [STAGECAL_COV_HC2_BM] = "the HC2 sandwich with Bell-McCaffrey dof",
        [STAGECAL_COV_CR2_RUN] = ("the CR2 sandwich clustered by run with Bell-McCaffrey "
                                  "dof")};
    return NAME_OF(names, kind);
}

/* ---- the core estimator --------------------------------------------------------------- */

/* Weighted residuals sqrt(w)·(m − y) into res (n) and, when J is not NULL, the weighted
 * Jacobian (n×p, row-major). Returns EINVAL when the form is undefined at some point for
 * this θ. The stage-space problem of the driver. */
/* The form at one θ is a function of (R, F) alone, and a log's windows share few pairs (the
 * reflux set-points; no load): each call keeps the value and gradient at up to MEMO pairs,
 * keyed by their bits, so a pair seen again costs a lookup (the same doubles as evaluating
 * again). With 835 windows at 6 set-points and a 1000-resample bootstrap the evaluations were
 * a fifth of calibrate. */
#define MEMO 64
typedef struct {
    uint64_t r, f; /* the pair's bits */
    int used;
    double m, g[STAGECAL_FORM_MAXP];
} memo_entry;

static int residuals(const pts *d, const double *theta, double *res, double *J)
{
    memo_entry memo[MEMO];
    size_t p = d->form->p;
    for (size_t k = 0; k < MEMO; k++)
        memo[k].used = 0;
    for (size_t i = 0; i < d->n; i++) {
        double r = d->r[i], fl = pt_f(d, i);
        uint64_t br, bf;
        memcpy(&br, &r, sizeof br);
        memcpy(&bf, &fl, sizeof bf);
        memo_entry *e =
            &memo[((br ^ (bf * UINT64_C(0x9E3779B97F4A7C15))) * UINT64_C(0x9E3779B97F4A7C15)) >>
                  58];
        if (!e->used || e->r != br || e->f != bf) {
            int rc = stagecal_form_eval(d->form, theta, r, fl, &e->m, e->g);
            if (rc != STAGECAL_OK)
                return rc;
            e->used = 1;
            e->r = br;
            e->f = bf;
        }
        double m = e->m;
        const double *g = e->g;
        double sw = sqrt(d->w[i]);
        res[i] = sw * (m - d->y[i]);
        if (J)
            for (size_t k = 0; k < p; k++)
                J[i * p + k] = sw * g[k];
    }
    return STAGECAL_OK;
}

static int stage_f(const double *theta, void *ctx, double *f)
{
    return residuals(ctx, theta, f, NULL);
}

static int stage_df(const double *theta, void *ctx, double *J)
{
    const pts *d = ctx;
    double *tmp = malloc(d->n * sizeof *tmp);
    if (!tmp)
        return STAGECAL_ENOMEM;
    int rc = residuals(d, theta, tmp, J);
    free(tmp);
    return rc;
}

/* The problem of points d (which must outlive it). */
static stagecal_regress_fdf stage_problem(pts *d)
{
    stagecal_regress_fdf fdf = {stage_f, stage_df, d->n, d->form->p, d};
    return fdf;
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
    stagecal_regress_nlin *w = stagecal_regress_nlin_alloc(d->n, p);
    if (!w)
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory");
    pts dc = *d; /* the problem's params are not const */
    stagecal_regress_fdf fdf = stage_problem(&dc);
    double best[STAGECAL_FORM_MAXP];
    info->rss = INFINITY;
    for (size_t s = 0; s < ns; s++) {
        int rc = stagecal_regress_nlin_init(w, &fdf, starts[s], prm, NULL);
        if (rc == STAGECAL_OK)
            rc = stagecal_regress_nlin_driver(w, NULL);
        if (rc != STAGECAL_OK) {
            last = rc;
            continue;
        }
        double rss = stagecal_regress_nlin_rss(w);
        if (rss < info->rss) {
            info->rss = rss;
            info->stop = stagecal_regress_nlin_stop(w);
            info->iterations = stagecal_regress_nlin_niter(w);
            memcpy(best, stagecal_regress_nlin_position(w), p * sizeof *best);
            found = 1;
        }
    }
    info->starts = ns;
    if (found) {
        memcpy(theta, best, p * sizeof *theta);
        /* the polish uses the problem of the last init: the same d for every start */
        info->polish = stagecal_regress_nlin_polish(w, theta, &info->rss);
    }
    stagecal_regress_nlin_free(w);
    if (!found)
        return error_set(err, last == STAGECAL_OK ? STAGECAL_ENOCONV : last,
                         "regress: form '%s': the trust-region solver did not converge from "
                         "%zu start(s) within %zu iterations",
                         d->form->name, ns, prm->max_iter);
    return STAGECAL_OK;
}

int regress_fit_once(const pts *d, const stagecal_regress_params *prm, const double *start,
                     double *theta, fitinfo *info, stagecal_error *err)
{
    if (stagecal_form_is_linear(d->form))
        return fit_linear(d, theta, info, err);
    return fit_nonlinear(d, prm, start, theta, info, err);
}

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
    if (prm->boot_kind != STAGECAL_BOOT_CASE && prm->boot_kind != STAGECAL_BOOT_RESIDUAL &&
        prm->boot_kind != STAGECAL_BOOT_RUN)
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

/* Statistics from θ and the total weights: covariance and intervals (the driver's,
 * regress_nlin.c), R², log-likelihood and information criteria. */
static int finish(const pts *d, const double *base_w, const stagecal_regress_params *prm,
                  stagecal_regress_result *res, stagecal_error *err)
{
    size_t n = d->n, p = d->form->p;
    pts dc = *d;
    stagecal_regress_fdf fdf = stage_problem(&dc);
    int rc = stagecal_regress_covar(&fdf, res->theta, res->cov_scaled, prm, res, err);
    if (rc != STAGECAL_OK)
        return rc;
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
    return STAGECAL_OK;
}

void stagecal_regress_result_free(stagecal_regress_result *result)
{
    if (!result)
        return;
    free(result->weights);
    free(result->band);
    free(result->design);
    free(result->cluster);
    result->weights = NULL;
    result->band = NULL;
    result->design = NULL;
    result->cluster = NULL;
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
    rc = regress_estimate(&d, &prm, prm.theta0, result->theta, &info, wrob, wtot,
                          &result->robust_scale, &result->robust_iter, err);
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
    stagecal_regress_envelope(data->r, data->f_load, n, result);
    if (prm.robust != STAGECAL_ROBUST_NONE) {
        result->weights = malloc(n * sizeof *result->weights);
        if (!result->weights) {
            rc = error_set(err, STAGECAL_ENOMEM, "regress: out of memory");
            goto fail;
        }
        memcpy(result->weights, wrob, n * sizeof *wrob);
    }
    if ((rc = regress_band_grid(&prm, result, err)) != STAGECAL_OK)
        goto fail;
    result->boot_b = prm.bootstrap;
    result->boot_seed = prm.seed;
    result->boot_kind = prm.boot_kind;
    if (prm.bootstrap > 0 && (rc = regress_bootstrap(&d, &prm, result, err)) != STAGECAL_OK)
        goto fail;
    free(wbuf);
    return STAGECAL_OK;
fail:
    free(wbuf);
    stagecal_regress_result_free(result);
    return rc;
}
