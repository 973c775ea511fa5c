/*
 * vle_internal.h — the equilibrium object and the functions the vle*.c files share;
 * not installed. vle.c: the object, constant α and K, queries, definitions;
 * vle_table.c: the cubic Hermite table (x–y data through GSL's Steffen slopes, and
 * the tables of the activity models); vle_activity.c: Antoine, γ models, complex-step
 * slopes, the bubble solve; vle_azeotrope.c: azeotropes found at alloc.
 */
#ifndef STAGECAL_VLE_INTERNAL_H
#define STAGECAL_VLE_INTERNAL_H

#include <gsl/gsl_roots.h>

#include "stagecal/vle.h"

#define VLE_MAX_AZ 4
#define VLE_LN10 2.302585092994045684
#define VLE_R_GAS 8.314462618 /* J/(mol K), CODATA 2018 exact */
/* Complex-step size: derivatives are Im f(z + ih)/h with no subtraction, so h can be
 * tiny; it only has to keep h² terms below double precision. */
#define VLE_CSTEP 1e-30
/* Guard on T + C > 0 in Antoine (K): the bracket search stays this far above −C. */
#define VLE_T_GUARD 1.0
/* Newton on one Hermite segment (s in [0, 1]): stop after a step ≤ VLE_NEWTON_STEP,
 * at most VLE_NEWTON_MAX steps (bisection fallback halves the bracket each step). */
#define VLE_NEWTON_STEP 1e-7
#define VLE_NEWTON_MAX 60

struct stagecal_vle {
    stagecal_vle_kind kind;
    double alpha; /* ALPHA: α > 1 */
    double k;     /* KVALUE: K > 1 */
    /* IDEAL / activity */
    stagecal_antoine ant[2];           /* light, heavy */
    double par[STAGECAL_VLE_MAXPARAM]; /* model parameters (vle.h) */
    double p_pa;                       /* pressure [Pa] */
    double ln_p;                       /* ln(p_pa) */
    stagecal_vle_params vp;            /* tunables */
    unsigned antoine_flags;            /* STAGECAL_VLE_ANTOINE_* */
    /* Hermite table (TABLE and IDEAL/activity) */
    size_t n;    /* nodes */
    double *xs;  /* node x, strictly increasing, xs[0] = 0, xs[n−1] = 1 */
    double *ys;  /* node y* */
    double *ms;  /* node slopes d(y*)/dx */
    double *ts;  /* node T [K] or NULL */
    double *mts; /* node slopes dT/dx [K] or NULL */
    size_t iend; /* last node of the first increasing branch (n−1 when monotone) */
    int has_t;   /* temperatures available */
    /* bucket index: bx[b] = interval holding x = b/nb, by[b] = interval holding
     * y = b·ytop/nb on the branch; narrows the binary search to ~1 interval */
    size_t nb;
    size_t *bx, *by;
    /* the y* table's Hermite segments, built with the buckets (vle_table.c): per interval
     * the coefficients and the inverse's start, the doubles each query computed */
    struct vle_seg *seg;
    double ytop;       /* ys[iend] */
    double t_lo, t_hi; /* range of node temperatures [K] */
    size_t naz;        /* number of azeotropes found at alloc */
    double az[VLE_MAX_AZ];
    /* PSEUDO: the model transformed (vle_pseudo.c); base is not owned */
    const stagecal_vle *base;
    double pseudo_a; /* λ_light/λ_heavy */
};

/* vle_pseudo.c */
double vle_pseudo_x_max(const stagecal_vle *v);
int vle_pseudo_ystar(const stagecal_vle *v, double xp, double *yp);
int vle_pseudo_xstar(const stagecal_vle *v, double yp, double *xp);
int vle_pseudo_dydx(const stagecal_vle *v, double xp, double *dydx);
int vle_pseudo_tbubble(const stagecal_vle *v, double xp, double *t_k);

/* vle.c */

/* A zeroed object of `kind` with default tunables; NULL (err filled) on ENOMEM. */
stagecal_vle *vle_new(stagecal_vle_kind kind, stagecal_error *err);
/* Allocates n nodes (x, y*, slopes; T and dT/dx when with_t); 0 on ENOMEM. */
int vle_alloc_nodes(stagecal_vle *v, size_t n, int with_t);
/* 1 for IDEAL and the activity models. */
int vle_is_activity(stagecal_vle_kind kind);
/* 1 when y*, x* and the slope are the Hermite table's (TABLE; IDEAL/activity unless exact). */
int vle_on_table(const stagecal_vle *v);
/* Number of activity-model parameters of a kind (vle.h); 0 for the others. */
size_t vle_nparam_of(stagecal_vle_kind kind);

/* vle_table.c */

/* Index i with a[i] <= v < a[i+1] in a[lo..hi] (gsl_interp_bsearch). */
size_t vle_locate(const double *a, double v, size_t lo, size_t hi);
/* Builds the bucket index once the nodes and the branch end are known. ENOMEM. */
int vle_build_buckets(stagecal_vle *v);
/* The same, bx copied from same_x (same nodes, buckets built) when not NULL. ENOMEM. */
int vle_build_buckets_like(stagecal_vle *v, const stagecal_vle *same_x);
/* Sets iend, the last node of the first increasing branch. */
void vle_find_branch_end(stagecal_vle *v);
/* The Hermite interpolant of node values ys and slopes ms over v->xs at x. */
double vle_herm_eval(const stagecal_vle *v, const double *ys, const double *ms, double x);
/* Slope of the y* interpolant at x. */
double vle_herm_deriv(const stagecal_vle *v, double x);
/* Smallest x on the first increasing branch with y*(x) = y; EINVAL above its top. */
int vle_herm_invert(const stagecal_vle *v, double y, double *x);
/* vle_herm_invert and, at the x found, the slope vle_herm_deriv gives (the same double,
 * from the segment inverted on when it is the one vle_herm_deriv locates). */
int vle_herm_invert_slope(const stagecal_vle *v, double y, double *x, double *slope);
/* y*(x) of the table as table_query (vle.c) answers it: vle_herm_eval of y*, held in [0, 1]. */
double vle_table_ystar(const stagecal_vle *v, double x);
/* vle_table_ystar and vle_herm_deriv at x (bx built), the segment located once. */
void vle_table_ystar_slope(const stagecal_vle *v, double x, double *y, double *slope);

/* vle_activity.c */

/* Bubble T and y at x by Brent from guess t0; s may be NULL (allocated here). */
int vle_bubble_solve(const stagecal_vle *v, double x, double t0, gsl_root_fsolver *s, double *t_k,
                     double *y);
/* Initial T guess at x from the table (Hermite on T when built, else linear). */
double vle_t_guess(const stagecal_vle *v, double x);
/* Exact d(y*)/dx and dT/dx at a solved bubble point (x, t). */
void vle_exact_slopes(const stagecal_vle *v, double x, double t, double *dydx, double *dtdx);
/* Exact inverse x*(y) by Brent on the exact y*, bracketed around the table's answer. */
int vle_xstar_exact(const stagecal_vle *v, double y, double *x);

/* A model at p_pa whose table is Σ w[j]·(table of m[j]), j < k (m[j]: one activity model at
 * several pressures, same nodes, tables not exact); T_bubble, y*_exact and the azeotropes are
 * solved at p_pa. EINVAL (mismatch), EDATA (the blend is not a valid table), ENOMEM. */
stagecal_vle *vle_alloc_blend(const stagecal_vle *const *m, const double *w, size_t k, double p_pa,
                              stagecal_error *err);

/* vle_azeotrope.c */

/* Fills v->az/naz from sign changes of y* − x at interior nodes, refined on the
 * exact model (IDEAL/activity) or on the interpolant (TABLE). */
void vle_find_azeotropes(stagecal_vle *v);

#endif
