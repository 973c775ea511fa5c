/*
 * regress_band.c — confidence and prediction bands of a fitted correlation by the delta
 * method, var_fit = gᵀCg with g = ∂m/∂θ (Seber & Wild 1989, §5.1), and the band grid over
 * a fit's envelope (see stagecal/regress.h).
 */
#include "stagecal/regress.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_cdf.h>

#include "internal.h"
#include "regress_internal.h"

/* Rounding guard for gᵀCg: a variance below −BAND_NEG_TOL·Σ|g_i C_ij g_j| means C is
 * not positive semi-definite; above it, a negative value is rounding and becomes 0. */
#define BAND_NEG_TOL (64.0 * DBL_EPSILON)

int stagecal_regress_band_design(const stagecal_form *form, const double *theta, const double *cov,
                                 double sigma, double obs_sigma, double dof, const double *x,
                                 size_t n_x, double level, double r, double f_load,
                                 stagecal_band *out, stagecal_error *err)
{
    return stagecal_regress_band_clustered(form, theta, cov, sigma, obs_sigma, dof, x, NULL, n_x,
                                           level, r, f_load, out, err);
}

int stagecal_regress_band_clustered(const stagecal_form *form, const double *theta,
                                    const double *cov, double sigma, double obs_sigma, double dof,
                                    const double *x, const size_t *cluster, size_t n_x,
                                    double level, double r, double f_load, stagecal_band *out,
                                    stagecal_error *err)
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
    double obs = sigma * obs_sigma, vo = obs * obs, dof_fit = dof, dof_pred = dof;
    if (x && n_x > 0 && var > 0) {
        int rc = stagecal_regress_contrast_dof(x, n_x, form->p, cluster, g, &dof_fit, err);
        if (rc != STAGECAL_OK)
            return rc;
        /* Welch–Satterthwaite: se_pred² = se_fit² (dof_fit) + σ²·obs² (dof) */
        dof_pred = (var + vo) * (var + vo) / (var * var / dof_fit + vo * vo / dof);
    }
    double t = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, dof_fit);
    double tp = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, dof_pred);
    out->r = r;
    out->f_load = f_load;
    out->value = value;
    out->se_fit = sqrt(var);
    out->se_pred = sqrt(var + vo);
    out->ci_low = value - t * out->se_fit;
    out->ci_high = value + t * out->se_fit;
    out->pi_low = value - tp * out->se_pred;
    out->pi_high = value + tp * out->se_pred;
    out->dof_fit = dof_fit;
    out->dof_pred = dof_pred;
    return STAGECAL_OK;
}

int stagecal_regress_band_obs(const stagecal_form *form, const double *theta, const double *cov,
                              double sigma, double obs_sigma, double dof, double level, double r,
                              double f_load, stagecal_band *out, stagecal_error *err)
{
    return stagecal_regress_band_design(form, theta, cov, sigma, obs_sigma, dof, NULL, 0, level, r,
                                        f_load, out, err);
}

int stagecal_regress_band(const stagecal_form *form, const double *theta, const double *cov,
                          double sigma, double dof, double level, double r, double f_load,
                          stagecal_band *out, stagecal_error *err)
{
    return stagecal_regress_band_obs(form, theta, cov, sigma, 1.0, dof, level, r, f_load, out, err);
}

int stagecal_regress_result_band(const stagecal_regress_result *res, double r, double f_load,
                                 double obs_sigma, stagecal_band *out, stagecal_error *err)
{
    if (!res)
        return error_set(err, STAGECAL_EINVAL, "band: a fit result is required");
    /* the dof of σ_obs, as the model file stores it (calibrate.c) */
    double dof_sigma =
        res->design && res->sigma_dof > 0 ? fmin(res->dof, res->sigma_dof) : res->dof;
    return stagecal_regress_band_clustered(&res->form, res->theta, res->cov, res->sigma_obs,
                                           obs_sigma, dof_sigma, res->design, res->cluster, res->n,
                                           res->level, r, f_load, out, err);
}

int regress_band_grid(const stagecal_regress_params *prm, stagecal_regress_result *res,
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
            int rc = stagecal_regress_result_band(res, r, fs[j], 1.0, &res->band[res->nband], err);
            if (rc != STAGECAL_OK)
                return rc;
            res->nband++;
        }
    return STAGECAL_OK;
}
