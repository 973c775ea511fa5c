/*
 * history_internal.h — the history fit's robust covariance (src/history_robust.c),
 * shared with src/history.c; not installed.
 */
#ifndef STAGECAL_HISTORY_INTERNAL_H
#define STAGECAL_HISTORY_INTERNAL_H

#include <gsl/gsl_matrix.h>
#include <stddef.h>

#include "stagecal/error.h"

/* What the Bell–McCaffrey dof of later contrasts needs: the weighted Jacobian X̃ (m×P),
 * D with rows A_g·X̃_g·B per cluster (m×P), the bread B (P×P) and the clusters. */
struct stagecal_history_work {
    size_t m, P, ncl;
    double *xt, *d, *b;
    size_t *cl;
};

/* (J'WJ)^−1 into B (P×P) by Cholesky; EDATA when singular. J is unweighted, w the
 * weights. */
int history_bread(const gsl_matrix *J, const double *w, gsl_matrix *B, stagecal_error *err);

/* Method-of-moments excess variance (DerSimonian–Laird in regression form), ≥ 0. */
double history_moment_tau2(const gsl_matrix *J, const double *w, const double *res,
                           const gsl_matrix *B);

/* The CR2 sandwich into V (P×P) and D (rows A_g X̃_g B, m×P); cl[i] the cluster of
 * window i among ncl. ENOMEM. */
int history_sandwich(const gsl_matrix *J, const double *w, const double *res, const size_t *cl,
                     size_t ncl, const gsl_matrix *B, gsl_matrix *V, gsl_matrix *D,
                     stagecal_error *err);

/* Bell–McCaffrey dof of the contrast c'β, at most G − 1; 0 without variance. */
double history_bm_dof(const struct stagecal_history_work *wk, const double *c);

#endif
