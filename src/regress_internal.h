/*
 * regress_internal.h — what the regress_*.c files share; not installed.
 */
#ifndef STAGECAL_REGRESS_INTERNAL_H
#define STAGECAL_REGRESS_INTERNAL_H

#include "stagecal/regress.h"

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

static inline double pt_f(const pts *d, size_t i)
{
    return d->f ? d->f[i] : 0.0;
}

/* One weighted fit of d's form (linear: direct; nonlinear: trust region from start, or
 * from automatic starts when start is NULL, then the polish). regress.c */
int regress_fit_once(const pts *d, const stagecal_regress_params *prm, const double *start,
                     double *theta, fitinfo *info, stagecal_error *err);

/* The estimator: plain weighted fit, or IRLS when params.robust. in->w holds the sigma
 * weights; wrob (n) receives robust weights (all 1 when not robust); wtot (n) receives the
 * total weights. regress_robust.c */
int regress_estimate(const pts *in, const stagecal_regress_params *prm, const double *start,
                     double *theta, fitinfo *info, double *wrob, double *wtot, double *scale,
                     size_t *iter, stagecal_error *err);

/* Bootstrap percentile intervals into res (after the fit). regress_boot.c */
int regress_bootstrap(const pts *d, const stagecal_regress_params *prm,
                      stagecal_regress_result *res, stagecal_error *err);

/* The band grid over res's envelope (params.band_points). regress_band.c */
int regress_band_grid(const stagecal_regress_params *prm, stagecal_regress_result *res,
                      stagecal_error *err);

#endif
