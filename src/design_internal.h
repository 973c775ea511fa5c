/*
 * design_internal.h — helpers shared by design.c (information, variances) and
 * design_search.c (the NLopt search); not installed.
 */
#ifndef STAGECAL_DESIGN_INTERNAL_H
#define STAGECAL_DESIGN_INTERNAL_H

#include "stagecal/design.h"

/* g = ∂stages/∂θ at (r, f_load) (p entries). EINVAL when the form is undefined there. */
int design_grad(const stagecal_design_problem *pb, double r, double f_load, double *g,
                stagecal_error *err);

/* A symmetric p×p information matrix taken apart for pseudo-inverse quadratic forms:
 * scaled to unit diagonal (s_i = 1/sqrt(M_ii), 1 where M_ii = 0), then eigen-decomposed. */
typedef struct {
    size_t p, rank;
    double s[STAGECAL_FORM_MAXP];                      /* scaling */
    double lambda[STAGECAL_FORM_MAXP];                 /* eigenvalues, descending */
    double v[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP]; /* eigenvectors in columns */
    double log_det;                                    /* log det M, -INFINITY if singular */
} design_eig;

/* Decomposes m (p×p, row-major); eigenvalues below rank_tol·largest count as zero.
 * EINTERNAL when GSL fails, EDATA when m is not finite. */
int design_eig_compute(const double *m, size_t p, double rank_tol, design_eig *e,
                       stagecal_error *err);
/* gᵀ M⁺ g; *determined = 0 (and NAN) when g has a component in M's null space larger than
 * sqrt(rank_tol) of its length. */
double design_eig_quad(const design_eig *e, const double *g, double rank_tol, int *determined);

/* The information weight of one window at r: 1/σ(r)² with the problem's scatter function,
 * 1/sigma² without one. */
double design_weight(const stagecal_design_problem *pb, double r);

/* M = pb->info + Σ_k g(x_k) g(x_k)ᵀ / σ(R_k)² over the tests. EINVAL from the gradient. */
int design_info_with(const stagecal_design_problem *pb, const stagecal_design_test *tests, size_t k,
                     double *m, stagecal_error *err);

/* Student t quantile at (1 + level)/2 with dof degrees of freedom. */
double design_tquant(double level, double dof);

/* The t dof of the half-widths at the condition whose gradient is g, before and after k
 * more windows: without a design pb->dof and pb->dof + k; with one the dof of the
 * contrast gᵀθ (stagecal_regress_contrast_dof, clustered by pb->design_run when it is
 * there) for both, as stagecal_model_eval's band (pb->dof where g carries no variance). */
void design_dof(const stagecal_design_problem *pb, const double *g, size_t k, double *before,
                double *after);

#endif
