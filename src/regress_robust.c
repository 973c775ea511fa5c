/*
 * regress_robust.c — the estimator of the stage-space fit: a plain weighted fit, or
 * iteratively reweighted least squares with Huber or Tukey-bisquare weights and a MAD
 * scale (Huber 1981; Holland & Welsch 1977 for the 95 %-efficiency constants 1.345 and
 * 4.685).
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "internal.h"
#include "regress_internal.h"

/* Consistency constant of the MAD for the normal distribution: Φ⁻¹(3/4). */
#define MAD_NORMAL 0.6744897501960817

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

int regress_estimate(const pts *in, const stagecal_regress_params *prm, const double *start,
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
    if ((rc = regress_fit_once(&d, prm, start, theta, info, err)) != STAGECAL_OK)
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
        if ((rc = regress_fit_once(&d, prm, prev, theta, info, err)) != STAGECAL_OK) {
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
