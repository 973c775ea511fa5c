/*
 * regress_boot.c — bootstrap of the stage-space fit: case or residual resampling,
 * percentile intervals (Efron & Tibshirani 1993, ch. 6, 13); RNG gsl_rng_mt19937 with the
 * caller's seed.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "internal.h"
#include "regress_internal.h"

int regress_bootstrap(const pts *d, const stagecal_regress_params *prm,
                      stagecal_regress_result *res, stagecal_error *err)
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
        int frc = regress_estimate(&bd, &bp, res->theta, th, &fi, wrob, wtot, &scale, &it, NULL);
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
