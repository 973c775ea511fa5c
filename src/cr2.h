/*
 * cr2.h — the cluster-robust CR2 sandwich and the Bell–McCaffrey degrees of freedom of a
 * contrast (src/cr2.c), shared by the history fit (src/history.c: clusters are runs over
 * months) and the regression (src/regress_nlin.c, cov_kind STAGECAL_COV_CR2_RUN: clusters
 * are the runs of one calibration); not installed.
 */
#ifndef STAGECAL_CR2_H
#define STAGECAL_CR2_H

#include <gsl/gsl_matrix.h>
#include <stddef.h>

#include "stagecal/error.h"

/* What the Bell–McCaffrey dof of later contrasts needs: the weighted Jacobian X̃ (m×P),
 * D with rows A_g·X̃_g·B per cluster (m×P), the bread B (P×P) and the clusters (cl[i] in
 * 0..ncl−1). */
struct cr2_work {
    size_t m, P, ncl;
    double *xt, *d, *b;
    size_t *cl;
};

/* The CR2 sandwich into V (P×P) and D (rows A_g X̃_g B, m×P) (Bell, R. M. & McCaffrey,
 * D. F. 2002, "Bias reduction in standard errors for linear regression with multi-stage
 * samples", Survey Methodology 28, 169–181): V = B·Σ_g X̃_g' A_g ẽ_g ẽ_g' A_g X̃_g·B with
 * X̃ = W^½J, ẽ = W^½r, A_g = (I − X̃_g B X̃_g')^−½; J is unweighted, w the weights, B =
 * (J'WJ)^−1, cl[i] the cluster of row i among ncl. ENOMEM. */
int cr2_sandwich(const gsl_matrix *J, const double *w, const double *res, const size_t *cl,
                 size_t ncl, const gsl_matrix *B, gsl_matrix *V, gsl_matrix *D,
                 stagecal_error *err);

/* Bell–McCaffrey dof of the contrast c'β (Imbens & Kolesár 2016; Pustejovsky, J. E. &
 * Tipton, E. 2018, "Small-sample methods for cluster-robust variance estimation and
 * hypothesis testing in fixed effects models", J. Bus. Econ. Stat. 36, 672–683), at most
 * G − 1; 0 without variance or memory. */
double cr2_bm_dof(const struct cr2_work *wk, const double *c);

/* Labels lab[0..n) (any values) to clusters 0..G−1 in order of first appearance into cl;
 * returns G (0 when n = 0). */
size_t cr2_clusters(const size_t *lab, size_t n, size_t *cl);

/* The Bell–McCaffrey dof of c'θ for a fit whose weighted design is x (n rows of p values,
 * row-major) with row i in cluster lab[i] (any labels): columns equilibrated, B =
 * (X'X)^−1, D from the CR2 sandwich; in [1, G − 1]. EINVAL (sizes, fewer than 2
 * clusters), EDATA (X'X singular, no variance), ENOMEM. */
int cr2_design_dof(const double *x, size_t n, size_t p, const size_t *lab, const double *c,
                   double *dof, stagecal_error *err);

#endif
