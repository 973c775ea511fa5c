/*
 * batch_band.c — uncertainty of a batch prediction from the model's parameter
 * covariance, by sampling (Monte Carlo propagation, GUM Supplement 1 idea):
 * θ_k = θ̂ + S·z_k with z_k ~ N(0, I) and S = Q·diag(√λ) from the eigen-decomposition
 * C = Q·diag(λ)·Qᵀ (GSL gsl_eigen_symmv; an eigen-decomposition rather than Cholesky
 * so that a rank-deficient C from a fit with a fixed direction still works — tiny
 * negative eigenvalues from rounding are set to 0). One batch is run per draw; the
 * band is the pair of empirical percentiles (1 ∓ level)/2 of each quantity
 * (gsl_stats_quantile_from_sorted_data). The RNG is GSL's mt19937 with the caller's
 * seed, so a band is reproducible.
 *
 * The draws are multivariate t at the model's dof ν (a normal draw scaled by
 * √(ν/χ²_ν)): with few windows the fit's intervals use t quantiles, and a band from
 * normal draws would be narrower than they are (at ν = 2 the 97.5 % quantile is 4.30,
 * not 1.96). The run-to-run scatter σ of the model (windows about the law) is sampled on
 * request (a shift of the batch's stage count by the same t draw): then the band is a
 * prediction band for one batch, otherwise a confidence band on the mean law. With a
 * scatter function (model format 4) the shift at R is σ(R)·ε·w_s: one standard normal ε per
 * batch (a batch runs one column: its offset, in units of σ(R), is the same at every R), and
 * w_s = √(ν_s/χ²) at the smallest dof ν_s of σ(R) along the batch's reflux ratios, its χ²
 * at the same quantile as θ's (ν_s = ν: the same draw, the one-σ path exactly). With
 * STAGECAL_BATCH_SCATTER_PROCESS the shift is σ(R)·ε·√max(0, w_s² − 1/v), v the scatter
 * function's var_ratio: the batch's own run-to-run part, the windows' measurement error
 * (σ(R)²/v at the estimate: their mean stated variance at R) taken out of each draw of σ(R)²
 * (stagecal_scatter_process_factor).
 */
#include "stagecal/batch.h"
#include "stagecal/regress.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

#define NQ 5 /* per-cut quantities: t_end, amount, x_mean, yield, recovery */

/* Symmetric square root factor S (p×p, row-major) with S·Sᵀ = C. */
static int cov_factor(const double *cov, size_t p, double *s, stagecal_error *err)
{
    gsl_matrix *a = gsl_matrix_alloc(p, p), *q = gsl_matrix_alloc(p, p);
    gsl_vector *lam = gsl_vector_alloc(p);
    gsl_eigen_symmv_workspace *ws = gsl_eigen_symmv_alloc(p);
    int rc = STAGECAL_OK;
    if (!a || !q || !lam || !ws) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory for the covariance factor");
        goto done;
    }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++)
            gsl_matrix_set(a, i, j, 0.5 * (cov[i * p + j] + cov[j * p + i]));
    int st = gsl_eigen_symmv(a, lam, q, ws);
    if (st != GSL_SUCCESS) {
        rc = error_set(err, STAGECAL_EINTERNAL, "eigen-decomposition of the covariance: %s",
                       gsl_strerror(st));
        goto done;
    }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++)
            s[i * p + j] = gsl_matrix_get(q, i, j) * sqrt(fmax(gsl_vector_get(lam, j), 0));
done:
    gsl_eigen_symmv_free(ws);
    gsl_vector_free(lam);
    gsl_matrix_free(q);
    gsl_matrix_free(a);
    return rc;
}

static void interval(double *v, size_t n, double level, double nominal,
                     stagecal_batch_interval *out)
{
    gsl_sort(v, 1, n);
    out->nominal = nominal;
    out->low = gsl_stats_quantile_from_sorted_data(v, 1, n, (1 - level) / 2);
    out->high = gsl_stats_quantile_from_sorted_data(v, 1, n, (1 + level) / 2);
}

/* The model's law shifted by a draw's run-to-run offset: delta, or with a scatter function
 * σ(r)·unit (the same standardised offset at every R of the batch, in units of σ(R)). */
struct shifted_law {
    stagecal_batch_model_law law;
    double delta;
    const stagecal_scatter *scatter; /* NULL: delta */
    double unit;
};

static int shifted_stages(void *data, double r, double *stages, unsigned *outside,
                          stagecal_error *err)
{
    struct shifted_law *s = data;
    int rc = stagecal_batch_model_stages(&s->law, r, stages, outside, err);
    double d = s->scatter ? stagecal_scatter_sd(s->scatter, r) * s->unit : s->delta;
    if (rc == STAGECAL_OK)
        *stages = fmax(*stages + d, 1.0);
    return rc;
}

double stagecal_batch_scatter_dof(const stagecal_model *m, const stagecal_batch_result *nominal)
{
    if (m->scatter.n == 0)
        return m->dof;
    /* the smallest over the reflux ratios the batch runs at (its rows, the start-up's total
     * reflux among them, and the ends of the range used), each capped at the model's dof as
     * stagecal_model_eval caps it */
    double nu = m->dof;
    double ends[2] = {nominal->r_min_used, nominal->r_max_used};
    for (size_t i = 0; i < nominal->n_rows + 2; i++) {
        double r = i < nominal->n_rows ? nominal->rows[i].reflux : ends[i - nominal->n_rows];
        double d = isnan(r) ? NAN : stagecal_scatter_dof(&m->scatter, r);
        if (isfinite(d))
            nu = fmin(nu, d);
    }
    return nu;
}

int stagecal_batch_band_sample(const stagecal_batch_problem *pb, const stagecal_vle *vle,
                               const stagecal_model *m, double f_load,
                               const stagecal_batch_params *params,
                               const stagecal_batch_result *nominal, size_t n_samples,
                               unsigned long seed, double level, stagecal_batch_band *band,
                               stagecal_error *err)
{
    return stagecal_batch_band_sample_scatter(pb, vle, m, f_load, params, nominal, n_samples, seed,
                                              level, 0, band, err);
}

int stagecal_batch_band_sample_scatter(const stagecal_batch_problem *pb, const stagecal_vle *vle,
                                       const stagecal_model *m, double f_load,
                                       const stagecal_batch_params *params,
                                       const stagecal_batch_result *nominal, size_t n_samples,
                                       unsigned long seed, double level, int run_scatter,
                                       stagecal_batch_band *band, stagecal_error *err)
{
    size_t p = m->form.p, nc = pb->n_cuts;
    double s[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP], theta[STAGECAL_FORM_MAXP];
    int rc;
    if (n_samples < 2)
        return error_set(err, STAGECAL_EINVAL, "%zu samples: expected at least 2", n_samples);
    if (!(level > 0 && level < 1))
        return error_set(err, STAGECAL_EINVAL, "level %g: expected a coverage in (0, 1)", level);
    if (nominal->n_cuts != nc)
        return error_set(err, STAGECAL_EINVAL,
                         "nominal result has %zu cuts, the problem %zu: run it first",
                         nominal->n_cuts, nc);
    if ((rc = cov_factor(m->cov, p, s, err)))
        return rc;
    /* column-major per quantity: q[(c·NQ + k)·n_samples + draw]; then t_end, energy */
    double *q = malloc(sizeof(double) * n_samples * (nc * NQ + 2));
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    if (!q || !rng) {
        free(q);
        gsl_rng_free(rng);
        return error_set(err, STAGECAL_ENOMEM, "out of memory for %zu draws", n_samples);
    }
    gsl_rng_set(rng, seed);
    memset(band, 0, sizeof *band);
    band->level = level;
    band->n_samples = n_samples;
    band->seed = seed;
    band->n_cuts = nc;
    double nu = m->dof > 0 && isfinite(m->dof) ? m->dof : INFINITY;
    /* with a design (Bell–McCaffrey dof per contrast) one ν serves every draw: the
     * smallest of the parameters' dof, so no parameter's spread is understated */
    for (size_t k = 0; k < m->n_design && k < m->form.p; k++) {
        double c[STAGECAL_FORM_MAXP] = {0}, dk;
        c[k] = 1;
        if (stagecal_regress_contrast_dof(m->design, m->n_design, m->form.p, m->design_run, c, &dk,
                                          NULL) == STAGECAL_OK)
            nu = fmin(nu, dk);
    }
    band->dof = nu;
    if (run_scatter < STAGECAL_BATCH_SCATTER_NONE || run_scatter > STAGECAL_BATCH_SCATTER_PROCESS)
        run_scatter = STAGECAL_BATCH_SCATTER_WINDOW; /* any other nonzero: the whole scatter */
    /* the process part needs the scatter function's var_ratio; without it the whole scatter */
    if (run_scatter == STAGECAL_BATCH_SCATTER_PROCESS &&
        isnan(stagecal_scatter_process_factor(&m->scatter, 1.0)))
        run_scatter = STAGECAL_BATCH_SCATTER_WINDOW;
    band->run_scatter = run_scatter;
    /* σ of one batch's stage count: the scatter function at each R the batch runs at, where
     * the model has one, with its own dof (the smallest along the batch's reflux ratios) */
    const stagecal_scatter *sc = run_scatter && m->scatter.n > 0 ? &m->scatter : NULL;
    double nu_s = sc ? stagecal_batch_scatter_dof(m, nominal) : nu;
    band->dof_scatter = run_scatter ? nu_s : NAN;

    struct shifted_law law = {{m, theta, f_load}, 0.0, sc, 0.0};
    stagecal_batch_column col = {vle, shifted_stages, &law, NULL, NULL};
    /* the dynamic model: each draw also draws the holdup when its uncertainty is stated */
    stagecal_batch_params par = params ? *params : stagecal_batch_default_params();
    stagecal_batch_dynamics dy;
    double u_h = par.dynamics ? par.dynamics->holdup_u_rel : 0;
    if (par.dynamics) {
        dy = *par.dynamics;
        par.dynamics = &dy;
    }
    stagecal_batch_result r;
    stagecal_batch_result_init(&r);
    size_t ok = 0;
    for (size_t k = 0; k < n_samples; k++) {
        double z[STAGECAL_FORM_MAXP];
        for (size_t i = 0; i < p; i++)
            z[i] = gsl_ran_ugaussian(rng);
        double eps = gsl_ran_ugaussian(rng);
        double x2 = isinf(nu) ? INFINITY : gsl_ran_chisq(rng, nu);
        double w = isinf(nu) ? 1.0 : sqrt(nu / x2); /* t = z·w */
        /* σ(R)'s scale at its own dof ν_s from the same χ² quantile (one residual scale s
         * behind θ's covariance and σ: comonotone); ν_s = ν gives w itself */
        double ws = w;
        if (sc && nu_s != nu && isfinite(nu)) {
            double u = gsl_cdf_chisq_P(x2, nu);
            double xs = u > 0 && u < 1 ? gsl_cdf_chisq_Pinv(u, nu_s) : NAN;
            ws = xs > 0 && isfinite(xs) ? sqrt(nu_s / xs) : w;
        }
        for (size_t i = 0; i < p; i++) {
            theta[i] = m->theta[i];
            for (size_t j = 0; j < p; j++)
                theta[i] += s[i * p + j] * z[j] * w;
        }
        law.delta = run_scatter ? m->sigma * eps * w : 0.0;
        law.unit = run_scatter == STAGECAL_BATCH_SCATTER_PROCESS
                       ? eps * stagecal_scatter_process_factor(sc, ws * ws)
                       : eps * ws;
        if (u_h > 0) { /* after the law's draws: the stream of a fixed holdup is unchanged */
            double factor = fmax(0.05, 1 + u_h * gsl_ran_ugaussian(rng));
            dy.holdup_column_mol = params->dynamics->holdup_column_mol * factor;
            dy.holdup_drum_mol = params->dynamics->holdup_drum_mol * factor;
        }
        stagecal_error e;
        if (stagecal_batch_run(pb, &col, &par, &r, &e) != STAGECAL_OK) {
            band->n_failed++;
            continue;
        }
        for (size_t c = 0; c < nc; c++) {
            const stagecal_batch_cut *cu = &r.cuts[c];
            double v[NQ] = {cu->t_end_s, cu->amount_mol, cu->x_mean, cu->yield, cu->recovery};
            for (size_t j = 0; j < NQ; j++)
                q[(c * NQ + j) * n_samples + ok] = v[j];
        }
        q[(nc * NQ) * n_samples + ok] = r.t_end_s;
        q[(nc * NQ + 1) * n_samples + ok] = r.energy_j;
        ok++;
    }
    stagecal_batch_result_free(&r);
    gsl_rng_free(rng);
    band->n_ok = ok;
    if (ok < 2 || 2 * ok < n_samples) {
        free(q);
        return error_set(err, STAGECAL_ENOCONV,
                         "only %zu of %zu parameter draws gave a batch (the covariance admits "
                         "laws the column cannot run)",
                         ok, n_samples);
    }
    for (size_t c = 0; c < nc; c++) {
        const stagecal_batch_cut *cu = &nominal->cuts[c];
        stagecal_batch_cut_band *b = &band->cuts[c];
        interval(q + (c * NQ + 0) * n_samples, ok, level, cu->t_end_s, &b->t_end_s);
        interval(q + (c * NQ + 1) * n_samples, ok, level, cu->amount_mol, &b->amount_mol);
        interval(q + (c * NQ + 2) * n_samples, ok, level, cu->x_mean, &b->x_mean);
        interval(q + (c * NQ + 3) * n_samples, ok, level, cu->yield, &b->yield);
        interval(q + (c * NQ + 4) * n_samples, ok, level, cu->recovery, &b->recovery);
    }
    interval(q + (nc * NQ) * n_samples, ok, level, nominal->t_end_s, &band->t_end_s);
    interval(q + (nc * NQ + 1) * n_samples, ok, level, nominal->energy_j, &band->energy_j);
    free(q);
    return STAGECAL_OK;
}
