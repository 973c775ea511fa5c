/*
 * vle_internal.h — the equilibrium object and the functions the vle*.c files share;
 * not installed. vle.c: the object, constant α and K, queries, definitions;
 * vle_table.c: the cubic Hermite table (x–y data through GSL's Steffen slopes, and
 * the tables of the activity models); vle_activity.c: Antoine, γ models, complex-step
 * slopes, the bubble solve; vle_azeotrope.c: azeotropes found at alloc.
 */
#ifndef STAGECAL_VLE_INTERNAL_H
#define STAGECAL_VLE_INTERNAL_H

#include <float.h>
#include <math.h>
#include <stddef.h>

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

/* A branch the processor should predict as not taken (the compiler lays it out so). */
#if defined(__GNUC__) || defined(__clang__)
#define VLE_UNLIKELY(c) __builtin_expect(!!(c), 0)
#else
#define VLE_UNLIKELY(c) (c)
#endif

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
    double yscale;     /* nb/ytop: vle_locate_y's guess of the bucket */
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
/* 1 for IDEAL and the activity models (inline: the stepper asks once a row). */
static inline int vle_is_activity(stagecal_vle_kind kind)
{
    return kind == STAGECAL_VLE_IDEAL || kind == STAGECAL_VLE_WILSON || kind == STAGECAL_VLE_NRTL ||
           kind == STAGECAL_VLE_VANLAAR || kind == STAGECAL_VLE_MARGULES;
}

/* 1 when y*, x* and the slope are the Hermite table's (TABLE; IDEAL/activity unless exact). */
static inline int vle_on_table(const stagecal_vle *v)
{
    return v->kind == STAGECAL_VLE_TABLE || (vle_is_activity(v->kind) && !v->vp.exact);
}
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

/* ---- the y* table's hot queries, inline (vle_table.c, and the stepper in stages_step.c) --
 * Each is the one function of vle_table.c it stands for (named beside it), the same
 * operations in the same order, so the same doubles; inline so that a caller stepping down
 * the table keeps the segment in registers instead of copying it through calls. */

/* Cubic Hermite on [x0, x0 + h] in s = (x − x0)/h: H(s) = y0 + s(h m0 + s(c2 + s c3)). */
typedef struct {
    double x0, h, y0, d1, c2, c3;
} vle_hseg;

/* A segment of the y* table as the queries use it: the cubic, dy = ys[i+1] − ys[i], and the
 * end slopes a, b of the inverse's Hermite start (vle_herm_invert), 0 where not positive. */
struct vle_seg {
    vle_hseg g;
    double dy, a, b;
};

static inline double vle_hseg_val(const vle_hseg *g, double s)
{
    return g->y0 + s * (g->d1 + s * (g->c2 + s * g->c3));
}

static inline double vle_hseg_ds(const vle_hseg *g, double s) /* dH/ds */
{
    return g->d1 + s * (2.0 * g->c2 + 3.0 * s * g->c3);
}

/* gsl_interp_bsearch (gsl_interp.h, its inline definition): the i in [lo, hi − 1] with
 * a[i] <= v < a[i+1] when the range holds one. */
static inline size_t vle_bsearch(const double *a, double v, size_t lo, size_t hi)
{
    while (hi > lo + 1) {
        size_t i = (hi + lo) / 2;
        if (a[i] > v)
            hi = i;
        else
            lo = i;
    }
    return lo;
}

/* Interval i (0 ≤ i ≤ n−2) with xs[i] ≤ x ≤ xs[i+1], x in [0, 1]; buckets built. */
static inline size_t vle_locate_x(const stagecal_vle *v, double x)
{
    size_t b = (size_t)(x * (double)v->nb);
    if (b >= v->nb)
        return v->n - 2;
    size_t i = vle_bsearch(v->xs, x, v->bx[b], v->bx[b + 1] + 1);
    return i > v->n - 2 ? v->n - 2 : i;
}

/* Interval i (0 ≤ i < iend) with ys[i] ≤ y ≤ ys[i+1], y in [0, ytop]; buckets built. The
 * interval searched in bucket b = (size_t)(y / ytop · nb), as vle_locate_y_exact. */
size_t vle_locate_y_exact(const stagecal_vle *v, double y);

/* vle_locate_y_exact, the bucket computed as (size_t)(y · nb/ytop): a product instead of a
 * quotient on the stepping's chain of dependent operations (the next stage's y needs this
 * x), ~10 of its ~115 cycles. With ytop = 1 (every valid model: y* rises to 1) the two are
 * the same double. Otherwise the quotient, computed beside it, confirms the product through a
 * branch the processor predicts, so the search runs in the quotient's bucket always; where
 * the two differ (within rounding of a bucket boundary) the exact function answers. */
static inline size_t vle_locate_y(const stagecal_vle *v, double y)
{
    size_t g = (size_t)(y * v->yscale);
    if (VLE_UNLIKELY(g >= v->nb || (v->ytop != 1.0 && g != (size_t)(y / v->ytop * (double)v->nb))))
        return vle_locate_y_exact(v, y);
    size_t hi = v->by[g + 1] + 1;
    size_t i = vle_bsearch(v->ys, y, v->by[g], hi > v->iend ? v->iend : hi);
    return i > v->iend - 1 ? v->iend - 1 : i;
}

/* fmin(fmax(y, 0.0), 1.0) as glibc computes them (fmax(a, b) = a > b ? a : b and fmin(a, b) =
 * a < b ? a : b for ordered operands, b for two zeros; a quiet NaN a gives b), without the
 * calls: a monotone segment stays between its node values, which lie in [0, 1]
 * (stagecal_vle_validate), so anything outside is rounding (y*(1) = 1 + 2^-52). */
static inline double vle_ystar_clamp(double y)
{
    double t = y > 0.0 ? y : 0.0;
    return t < 1.0 ? t : 1.0;
}

/* vle_table_ystar (y*(x) of the table, x in [0, 1]; buckets built). */
static inline double vle_table_ystar_inline(const stagecal_vle *v, double x)
{
    size_t i = vle_locate_x(v, x);
    if (x == v->xs[i + 1]) /* the node value itself, not the cubic's rounding of it */
        return vle_ystar_clamp(v->ys[i + 1]);
    const vle_hseg *g = &v->seg[i].g;
    return vle_ystar_clamp(vle_hseg_val(g, (x - g->x0) / g->h));
}

/* Safeguarded Newton for H(s) = y on segment c from the Hermite start (herm_invert_on). */
static inline double vle_seg_invert(const struct vle_seg *c, double y)
{
    const vle_hseg *g = &c->g;
    /* Start from the Hermite interpolant of the inverse s(y) (end slopes dy/(h m)):
     * its error is O(h⁴), so one or two Newton steps reach rounding. */
    double t = (y - g->y0) / c->dy, s = t, a = c->a, b = c->b;
    if (a > 0.0 && b > 0.0 && a < 3.0 && b < 3.0)
        s = t * (1.0 + (1.0 - t) * ((a - 1.0) * (1.0 - t) + (1.0 - b) * t));
    double lo = 0.0, hi = 1.0;
    for (int it = 0; it < VLE_NEWTON_MAX; it++) {
        double f = vle_hseg_val(g, s) - y;
        if (f == 0.0)
            break;
        if (f < 0.0)
            lo = s;
        else
            hi = s;
        double sn = s - f / vle_hseg_ds(g, s);
        if (!(sn > lo && sn < hi)) /* Newton left the bracket (or a zero slope): bisect */
            sn = 0.5 * (lo + hi);
        double ds = fabs(sn - s);
        s = sn;
        /* quadratic convergence: after a step of 1e-7 the error left is ~1e-14·|H''/H'|
         * in s, i.e. below 1e-16 in x on these short segments */
        if (ds <= VLE_NEWTON_STEP || hi - lo <= 2.0 * DBL_EPSILON)
            break;
    }
    return s;
}

/* vle_herm_invert (y in [0, ytop]; buckets built): x and its segment *iseg. */
static inline void vle_herm_invert_inline(const stagecal_vle *v, double y, double *x, size_t *iseg)
{
    size_t i = vle_locate_y(v, y);
    const struct vle_seg *c = &v->seg[i];
    *iseg = i;
    if (!(c->dy > 0.0)) { /* flat segment: any point, take its start */
        *x = c->g.x0;
        return;
    }
    double s = vle_seg_invert(c, y);
    *x = c->g.x0 + s * c->g.h;
    if (*x > v->xs[i + 1])
        *x = v->xs[i + 1];
}

/* 1 when vle_locate_x(v, x) returns i: x in the bucket's search range [bx[b], bx[b+1] + 1]
 * with xs[i] ≤ x < xs[i+1] (a binary search over a range holding such an i returns it). */
static inline int vle_locate_x_is(const stagecal_vle *v, double x, size_t i)
{
    if (!(x >= 0.0))
        return 0;
    size_t b = (size_t)(x * (double)v->nb);
    return b < v->nb && v->bx[b] <= i && i <= v->bx[b + 1] && v->xs[i] <= x && x < v->xs[i + 1];
}

/* vle_herm_invert_slope for y in [0, 1] (buckets built): STAGECAL_EINVAL above the branch. */
static inline int vle_herm_invert_slope_inline(const stagecal_vle *v, double y, double *x,
                                               double *slope)
{
    if (y > v->ytop)
        return STAGECAL_EINVAL;
    size_t i;
    vle_herm_invert_inline(v, y, x, &i);
    const vle_hseg *g = &v->seg[i].g;
    /* vle_herm_deriv(v, *x) on the segment just inverted on, when it is the one it locates */
    *slope = vle_locate_x_is(v, *x, i) ? vle_hseg_ds(g, (*x - g->x0) / g->h) / g->h
                                       : vle_herm_deriv(v, *x);
    return STAGECAL_OK;
}

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
