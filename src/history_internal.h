/*
 * history_internal.h — the history fit's bread and excess variance (src/history_robust.c),
 * shared with src/history.c; not installed.
 */
#ifndef STAGECAL_HISTORY_INTERNAL_H
#define STAGECAL_HISTORY_INTERNAL_H

#include <gsl/gsl_matrix.h>
#include <stddef.h>

#include "cr2.h" /* the CR2 sandwich and the Bell–McCaffrey dof (shared) */
#include "stagecal/error.h"

/* (J'WJ)^−1 into B (P×P) by Cholesky; EDATA when singular. J is unweighted, w the
 * weights. */
int history_bread(const gsl_matrix *J, const double *w, gsl_matrix *B, stagecal_error *err);

/* Method-of-moments excess variance (DerSimonian–Laird in regression form), ≥ 0. */
double history_moment_tau2(const gsl_matrix *J, const double *w, const double *res,
                           const gsl_matrix *B);

#endif
