/*
 * vle.c — binary vapour–liquid equilibrium models (see stagecal/vle.h).
 *
 * Constant α: y* = αx/(1+(α−1)x), x* = y/(α−(α−1)y) (closed forms).
 * Constant K: y* = Kx on [0, 1/K], x* = y/K.
 * TABLE: x–y data (optionally T) through GSL's Steffen interpolation
 *   (gsl_interp_steffen, monotone, C¹). Steffen's interpolant is a cubic Hermite
 *   spline; its node slopes are taken from GSL once at alloc and the spline is then
 *   evaluated and inverted by the Hermite kernel below (test_vle.c checks it against
 *   gsl_interp_eval).
 * IDEAL and activity models (Wilson, NRTL, van Laar, two-parameter Margules):
 *   γ–φ with an ideal vapour (modified Raoult): P = x γ1 P1(T) + (1−x) γ2 P2(T),
 *   y = x γ1 P1 / P, Antoine in the NIST WebBook form log10(P/bar) = A − B/(T + C).
 *   Bubble T by GSL Brent on ln(Σ x_i γ_i P_i) − ln P. Workload: the stages module
 *   calls y*(x) and x*(y) 10–30 times per inversion and must run ≥ 2·10⁵ inversions/s,
 *   so these are answered from a dense cubic Hermite table built at alloc with exact
 *   slopes (complex-step derivatives, see model_eval), not by solving each time.
 *   Hot-path Newton on a cubic is written here because GSL's root solvers need a
 *   heap-allocated, mutable workspace per call (the model object is read-only and
 *   shared between threads).
 * Azeotropes: sign changes of y* − x at interior nodes, refined with GSL Brent on the
 *   exact model (tables: on the interpolant). A tangent azeotrope (no sign change) is
 *   not reported.
 * Units: T in K, P in Pa; x, y mole fractions of the light component.
 */
#include "stagecal/vle.h"

#include <assert.h>
#include <complex.h>
#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <gsl/gsl_roots.h>

#include "internal.h"

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

typedef double complex cplx;

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
    double ytop;       /* ys[iend] */
    double t_lo, t_hi; /* range of node temperatures [K] */
    size_t naz;        /* number of azeotropes found at alloc */
    double az[VLE_MAX_AZ];
};

static const char *const kind_names[] = {
    [STAGECAL_VLE_ALPHA] = "alpha",     [STAGECAL_VLE_KVALUE] = "kvalue",
    [STAGECAL_VLE_TABLE] = "table",     [STAGECAL_VLE_IDEAL] = "ideal",
    [STAGECAL_VLE_WILSON] = "wilson",   [STAGECAL_VLE_NRTL] = "nrtl",
    [STAGECAL_VLE_VANLAAR] = "vanlaar", [STAGECAL_VLE_MARGULES] = "margules",
};

const char *stagecal_vle_kind_name(stagecal_vle_kind kind)
{
    if ((unsigned)kind >= sizeof kind_names / sizeof kind_names[0])
        return "unknown";
    return kind_names[kind];
}

stagecal_vle_params stagecal_vle_default_params(void)
{
    stagecal_vle_params p = {.grid_n = 2049, .exact = 0, .t_epsrel = 1e-14, .max_iter = 100};
    return p;
}

static int is_activity(stagecal_vle_kind kind)
{
    return kind == STAGECAL_VLE_IDEAL || kind == STAGECAL_VLE_WILSON || kind == STAGECAL_VLE_NRTL ||
           kind == STAGECAL_VLE_VANLAAR || kind == STAGECAL_VLE_MARGULES;
}

/* Number of activity-model parameters of a kind (vle.h); 0 for the others. */
static size_t nparam_of(stagecal_vle_kind kind)
{
    switch (kind) {
    case STAGECAL_VLE_WILSON:
        return 4;
    case STAGECAL_VLE_NRTL:
        return 5;
    case STAGECAL_VLE_VANLAAR:
    case STAGECAL_VLE_MARGULES:
        return 2;
    default:
        return 0;
    }
}

/* ---- Hermite kernel ------------------------------------------------------------------ */

/* Cubic Hermite on [x0, x0 + h] in s = (x − x0)/h: H(s) = y0 + s(h m0 + s(c2 + s c3)). */
typedef struct {
    double x0, h, y0, d1, c2, c3;
} hseg;

static hseg hseg_make(const stagecal_vle *v, size_t i)
{
    hseg g;
    double h = v->xs[i + 1] - v->xs[i], dy = v->ys[i + 1] - v->ys[i];
    g.x0 = v->xs[i];
    g.h = h;
    g.y0 = v->ys[i];
    g.d1 = h * v->ms[i];
    g.c2 = 3.0 * dy - 2.0 * h * v->ms[i] - h * v->ms[i + 1];
    g.c3 = h * v->ms[i] + h * v->ms[i + 1] - 2.0 * dy;
    return g;
}

static double hseg_val(const hseg *g, double s)
{
    return g->y0 + s * (g->d1 + s * (g->c2 + s * g->c3));
}

static double hseg_ds(const hseg *g, double s) /* dH/ds */
{
    return g->d1 + s * (2.0 * g->c2 + 3.0 * s * g->c3);
}

static size_t locate(const double *a, double v, size_t lo, size_t hi)
{
    return gsl_interp_bsearch(a, v, lo, hi);
}

/* Interval i (0 ≤ i ≤ n−2) with xs[i] ≤ x ≤ xs[i+1], x in [0, 1]. */
static size_t locate_x(const stagecal_vle *v, double x)
{
    size_t b = (size_t)(x * (double)v->nb);
    if (b >= v->nb)
        return v->n - 2;
    size_t i = locate(v->xs, x, v->bx[b], v->bx[b + 1] + 1);
    return i > v->n - 2 ? v->n - 2 : i;
}

/* Interval i (0 ≤ i < iend) with ys[i] ≤ y ≤ ys[i+1], y in [0, ytop]. */
static size_t locate_y(const stagecal_vle *v, double y)
{
    size_t b = (size_t)(y / v->ytop * (double)v->nb);
    if (b >= v->nb)
        return v->iend - 1;
    size_t hi = v->by[b + 1] + 1;
    size_t i = locate(v->ys, y, v->by[b], hi > v->iend ? v->iend : hi);
    return i > v->iend - 1 ? v->iend - 1 : i;
}

/* Builds bx/by once the nodes and the branch end are known. */
static int build_buckets(stagecal_vle *v)
{
    v->nb = 2 * v->n < 64 ? 64 : 2 * v->n;
    v->ytop = v->ys[v->iend];
    v->bx = calloc(v->nb + 1, sizeof *v->bx);
    v->by = calloc(v->nb + 1, sizeof *v->by);
    if (!v->bx || !v->by)
        return STAGECAL_ENOMEM;
    size_t i = 0, j = 0;
    for (size_t b = 0; b <= v->nb; b++) {
        double xb = (double)b / (double)v->nb, yb = v->ytop * (double)b / (double)v->nb;
        while (i + 2 < v->n && v->xs[i + 1] <= xb)
            i++;
        while (j + 1 < v->iend && v->ys[j + 1] <= yb)
            j++;
        v->bx[b] = i;
        v->by[b] = j;
    }
    return STAGECAL_OK;
}

static double herm_eval(const stagecal_vle *v, const double *ys, const double *ms, double x)
{
    size_t i = v->bx ? locate_x(v, x) : locate(v->xs, x, 0, v->n - 1);
    if (i >= v->n - 1)
        i = v->n - 2;
    double h = v->xs[i + 1] - v->xs[i], dy = ys[i + 1] - ys[i];
    hseg g = {v->xs[i],
              h,
              ys[i],
              h * ms[i],
              3.0 * dy - 2.0 * h * ms[i] - h * ms[i + 1],
              h * ms[i] + h * ms[i + 1] - 2.0 * dy};
    return hseg_val(&g, (x - g.x0) / h);
}

static double herm_deriv(const stagecal_vle *v, double x)
{
    size_t i = locate_x(v, x);
    hseg g = hseg_make(v, i);
    return hseg_ds(&g, (x - g.x0) / g.h) / g.h;
}

/* Smallest x on the first increasing branch with H(x) = y. Each segment of the branch
 * is monotone (checked at alloc), so Newton safeguarded by bisection on [0, 1] in s
 * converges; ≤ 60 steps (bisection halves the bracket each time Newton misbehaves). */
static int herm_invert(const stagecal_vle *v, double y, double *x)
{
    if (y > v->ytop)
        return STAGECAL_EINVAL;
    size_t i = locate_y(v, y);
    hseg g = hseg_make(v, i);
    double dy = v->ys[i + 1] - v->ys[i];
    if (!(dy > 0.0)) { /* flat segment: any point, take its start */
        *x = g.x0;
        return STAGECAL_OK;
    }
    /* Start from the Hermite interpolant of the inverse s(y) (end slopes dy/(h m)):
     * its error is O(h⁴), so one or two Newton steps reach rounding. */
    double t = (y - g.y0) / dy, s = t, a = g.d1 > 0.0 ? dy / g.d1 : 0.0;
    double b = v->ms[i + 1] > 0.0 ? dy / (g.h * v->ms[i + 1]) : 0.0;
    if (a > 0.0 && b > 0.0 && a < 3.0 && b < 3.0)
        s = t * (1.0 + (1.0 - t) * ((a - 1.0) * (1.0 - t) + (1.0 - b) * t));
    double lo = 0.0, hi = 1.0;
    for (int it = 0; it < VLE_NEWTON_MAX; it++) {
        double f = hseg_val(&g, s) - y;
        if (f == 0.0)
            break;
        if (f < 0.0)
            lo = s;
        else
            hi = s;
        double sn = s - f / hseg_ds(&g, s);
        if (!(sn > lo && sn < hi)) /* Newton left the bracket (or a zero slope): bisect */
            sn = 0.5 * (lo + hi);
        double ds = fabs(sn - s);
        s = sn;
        /* quadratic convergence: after a step of 1e-7 the error left is ~1e-14·|H''/H'|
         * in s, i.e. below 1e-16 in x on these short segments */
        if (ds <= VLE_NEWTON_STEP || hi - lo <= 2.0 * DBL_EPSILON)
            break;
    }
    *x = g.x0 + s * g.h;
    if (*x > v->xs[i + 1])
        *x = v->xs[i + 1];
    return STAGECAL_OK;
}

/* Fritsch–Carlson sufficient condition for a monotone increasing Hermite segment. */
static int seg_increasing(const stagecal_vle *v, size_t i)
{
    double h = v->xs[i + 1] - v->xs[i], dy = v->ys[i + 1] - v->ys[i];
    if (!(dy > 0.0) || v->ms[i] < 0.0 || v->ms[i + 1] < 0.0)
        return 0;
    double a = v->ms[i] * h / dy, b = v->ms[i + 1] * h / dy;
    return a * a + b * b <= 9.0 || (2.0 * a + b <= 3.0) || (a + 2.0 * b <= 3.0);
}

static void find_branch_end(stagecal_vle *v)
{
    v->iend = v->n - 1;
    for (size_t i = 0; i + 1 < v->n; i++)
        if (!seg_increasing(v, i)) {
            v->iend = i;
            break;
        }
}

/* ---- γ–φ models ---------------------------------------------------------------------- */

static cplx lnpsat_c(const stagecal_antoine *a, cplx t)
{
    return 5.0 * VLE_LN10 + VLE_LN10 * (a->a - a->b / (t + a->c));
}

/* ln γ1, ln γ2 at (x1, T); complex so that derivatives come from a complex step. */
static void lngamma_c(const stagecal_vle *v, cplx x1, cplx t, cplx *l1, cplx *l2)
{
    cplx x2 = 1.0 - x1;
    const double *p = v->par;
    switch (v->kind) {
    case STAGECAL_VLE_WILSON: {
        cplx rt = VLE_R_GAS * t;
        cplx l12 = (p[3] / p[2]) * cexp(-p[0] / rt), l21 = (p[2] / p[3]) * cexp(-p[1] / rt);
        cplx d1 = x1 + l12 * x2, d2 = x2 + l21 * x1, q = l12 / d1 - l21 / d2;
        *l1 = -clog(d1) + x2 * q;
        *l2 = -clog(d2) - x1 * q;
        return;
    }
    case STAGECAL_VLE_NRTL: {
        cplx t12 = p[0] + p[1] / t, t21 = p[2] + p[3] / t;
        cplx g12 = cexp(-p[4] * t12), g21 = cexp(-p[4] * t21);
        cplx d1 = x1 + x2 * g21, d2 = x2 + x1 * g12;
        *l1 = x2 * x2 * (t21 * (g21 / d1) * (g21 / d1) + t12 * g12 / (d2 * d2));
        *l2 = x1 * x1 * (t12 * (g12 / d2) * (g12 / d2) + t21 * g21 / (d1 * d1));
        return;
    }
    case STAGECAL_VLE_VANLAAR: {
        cplx d = p[0] * x1 + p[1] * x2;
        if (p[0] == 0.0 && p[1] == 0.0) {
            *l1 = *l2 = 0.0;
            return;
        }
        cplx a = p[1] * x2 / d, b = p[0] * x1 / d;
        *l1 = p[0] * a * a;
        *l2 = p[1] * b * b;
        return;
    }
    case STAGECAL_VLE_MARGULES:
        *l1 = x2 * x2 * (p[0] + 2.0 * (p[1] - p[0]) * x1);
        *l2 = x1 * x1 * (p[1] + 2.0 * (p[0] - p[1]) * x2);
        return;
    default: /* IDEAL */
        *l1 = *l2 = 0.0;
        return;
    }
}

/* Bubble residual f = ln(x γ1 P1 + (1−x) γ2 P2) − ln P and vapour y = x γ1 P1 / Σ. */
static void model_eval(const stagecal_vle *v, cplx x, cplx t, cplx *f, cplx *y)
{
    cplx l1, l2;
    lngamma_c(v, x, t, &l1, &l2);
    cplx s1 = x * cexp(l1 + lnpsat_c(&v->ant[0], t));
    cplx s2 = (1.0 - x) * cexp(l2 + lnpsat_c(&v->ant[1], t));
    cplx s = s1 + s2;
    *f = clog(s) - v->ln_p;
    *y = s1 / s;
}

typedef struct {
    const stagecal_vle *v;
    double x;
} bub_ctx;

static double bub_f(double t, void *ctx)
{
    const bub_ctx *c = ctx;
    cplx f, y;
    model_eval(c->v, c->x, t, &f, &y);
    return creal(f);
}

/* Bubble T at x by Brent from guess t0. s may be NULL (allocated here). */
static int bubble_solve(const stagecal_vle *v, double x, double t0, gsl_root_fsolver *s,
                        double *t_k, double *y)
{
    bub_ctx c = {v, x};
    double tmin = fmax(-v->ant[0].c, -v->ant[1].c) + VLE_T_GUARD;
    double d = 0.5, lo, hi, flo, fhi;
    if (!(t0 > tmin))
        t0 = tmin + 1.0;
    for (int k = 0;; k++) {
        lo = fmax(t0 - d, tmin);
        hi = t0 + d;
        flo = bub_f(lo, &c);
        fhi = bub_f(hi, &c);
        if (flo <= 0.0 && fhi >= 0.0)
            break;
        if (k > 60 || !isfinite(flo) || !isfinite(fhi))
            return STAGECAL_ENOCONV;
        d *= 4.0;
    }
    double t;
    if (flo == 0.0 || fhi == 0.0) {
        t = flo == 0.0 ? lo : hi;
    } else {
        gsl_root_fsolver *own = NULL;
        if (!s && !(s = own = gsl_root_fsolver_alloc(gsl_root_fsolver_brent)))
            return STAGECAL_ENOMEM;
        gsl_function fn = {bub_f, &c};
        int st = gsl_root_fsolver_set(s, &fn, lo, hi);
        size_t it = 0;
        while (st == GSL_SUCCESS && it++ < v->vp.max_iter) {
            st = gsl_root_fsolver_iterate(s);
            if (st != GSL_SUCCESS)
                break;
            st = gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                        0.0, v->vp.t_epsrel);
            if (st == GSL_SUCCESS)
                break;
            if (st != GSL_CONTINUE)
                break;
            st = GSL_SUCCESS;
        }
        t = gsl_root_fsolver_root(s);
        gsl_root_fsolver_free(own);
        if (st != GSL_SUCCESS)
            return STAGECAL_ENOCONV;
    }
    cplx f, yc;
    model_eval(v, x, t, &f, &yc);
    if (!isfinite(creal(yc)))
        return STAGECAL_ENOCONV;
    *t_k = t;
    *y = creal(yc);
    return STAGECAL_OK;
}

/* Exact slopes at a solved bubble point (x, t): d(y*)/dx and dT/dx, by the implicit
 * function theorem on f(x, T) = 0 with complex-step partial derivatives. */
static void exact_slopes(const stagecal_vle *v, double x, double t, double *dydx, double *dtdx)
{
    cplx fx, yx, ft, yt;
    model_eval(v, x + I * VLE_CSTEP, t, &fx, &yx);
    model_eval(v, x, t + I * VLE_CSTEP, &ft, &yt);
    double f_x = cimag(fx) / VLE_CSTEP, y_x = cimag(yx) / VLE_CSTEP;
    double f_t = cimag(ft) / VLE_CSTEP, y_t = cimag(yt) / VLE_CSTEP;
    double tx = -f_x / f_t;
    *dtdx = tx;
    *dydx = y_x + y_t * tx;
}

/* Initial T guess at x from the table (Hermite on T when built, else linear). */
static double t_guess(const stagecal_vle *v, double x)
{
    if (v->ts && v->mts)
        return herm_eval(v, v->ts, v->mts, x);
    return stagecal_antoine_tboil(&v->ant[1], v->p_pa);
}

/* ---- allocation ---------------------------------------------------------------------- */

static stagecal_vle *vle_new(stagecal_vle_kind kind, stagecal_error *err)
{
    stagecal_vle *v = calloc(1, sizeof *v);
    if (!v) {
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    v->kind = kind;
    v->vp = stagecal_vle_default_params();
    return v;
}

static int alloc_nodes(stagecal_vle *v, size_t n, int with_t)
{
    v->n = n;
    v->xs = calloc(n, sizeof *v->xs);
    v->ys = calloc(n, sizeof *v->ys);
    v->ms = calloc(n, sizeof *v->ms);
    if (with_t) {
        v->ts = calloc(n, sizeof *v->ts);
        v->mts = calloc(n, sizeof *v->mts);
    }
    return v->xs && v->ys && v->ms && (!with_t || (v->ts && v->mts));
}

void stagecal_vle_free(stagecal_vle *vle)
{
    if (!vle)
        return;
    free(vle->xs);
    free(vle->ys);
    free(vle->ms);
    free(vle->ts);
    free(vle->mts);
    free(vle->bx);
    free(vle->by);
    free(vle);
}

stagecal_vle *stagecal_vle_alloc_alpha(double alpha, stagecal_error *err)
{
    if (!(alpha > 1.0) || !isfinite(alpha)) {
        error_set(err, STAGECAL_EINVAL, "relative volatility %g is outside (1, inf)", alpha);
        return NULL;
    }
    stagecal_vle *v = vle_new(STAGECAL_VLE_ALPHA, err);
    if (v)
        v->alpha = alpha;
    return v;
}

stagecal_vle *stagecal_vle_alloc_kvalue(double k, stagecal_error *err)
{
    if (!(k > 1.0) || !isfinite(k)) {
        error_set(err, STAGECAL_EINVAL, "K value %g is outside (1, inf)", k);
        return NULL;
    }
    stagecal_vle *v = vle_new(STAGECAL_VLE_KVALUE, err);
    if (v)
        v->k = k;
    return v;
}

/* Node slopes of GSL's Steffen interpolant of ya over v->xs. */
static int steffen_slopes(const stagecal_vle *v, const double *ya, double *ma, stagecal_error *err)
{
    gsl_interp *it = gsl_interp_alloc(gsl_interp_steffen, v->n);
    if (!it)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    int st = gsl_interp_init(it, v->xs, ya, v->n);
    for (size_t i = 0; st == GSL_SUCCESS && i < v->n; i++)
        st = gsl_interp_eval_deriv_e(it, v->xs, ya, v->xs[i], NULL, &ma[i]);
    gsl_interp_free(it);
    if (st != GSL_SUCCESS)
        return error_set(err, STAGECAL_EINTERNAL, "steffen interpolation failed: %s",
                         gsl_strerror(st));
    return STAGECAL_OK;
}

/* Azeotropes from sign changes of y − x at interior nodes; root of g on each. */
typedef double (*az_fn)(double x, void *ctx);

static void find_azeotropes(stagecal_vle *v, az_fn g, void *ctx)
{
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return;
    v->naz = 0;
    for (size_t i = 1; i + 2 < v->n && v->naz < VLE_MAX_AZ; i++) {
        double ga = v->ys[i] - v->xs[i], gb = v->ys[i + 1] - v->xs[i + 1];
        if (ga == 0.0) {
            if (v->naz == 0 || v->az[v->naz - 1] != v->xs[i])
                v->az[v->naz++] = v->xs[i];
            continue;
        }
        if (!((ga < 0.0 && gb > 0.0) || (ga > 0.0 && gb < 0.0)))
            continue;
        gsl_function fn = {g, ctx};
        double root = 0.5 * (v->xs[i] + v->xs[i + 1]);
        if (gsl_root_fsolver_set(s, &fn, v->xs[i], v->xs[i + 1]) == GSL_SUCCESS) {
            for (size_t it = 0; it < v->vp.max_iter; it++) {
                if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
                    break;
                root = gsl_root_fsolver_root(s);
                if (gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                           1e-15, 4.0 * DBL_EPSILON) == GSL_SUCCESS)
                    break;
            }
        }
        v->az[v->naz++] = root;
    }
    gsl_root_fsolver_free(s);
}

static double az_table(double x, void *ctx)
{
    const stagecal_vle *v = ctx;
    return herm_eval(v, v->ys, v->ms, x) - x;
}

static double az_exact(double x, void *ctx)
{
    const stagecal_vle *v = ctx;
    double t, y;
    if (bubble_solve(v, x, t_guess(v, x), NULL, &t, &y) != STAGECAL_OK)
        return GSL_NAN;
    return y - x;
}

stagecal_vle *stagecal_vle_alloc_table(const double *x, const double *y, const double *t_k,
                                       size_t n, stagecal_error *err)
{
    if (n < 3 || !x || !y) {
        error_set(err, STAGECAL_EINVAL, "x-y table has %zu points, expected at least 3", n);
        return NULL;
    }
    for (size_t i = 0; i < n; i++) {
        if (!(x[i] >= 0.0 && x[i] <= 1.0) || !(y[i] >= 0.0 && y[i] <= 1.0)) {
            error_set(err, STAGECAL_EINVAL,
                      "x-y table point %zu: (%g, %g) is outside [0, 1] x [0, 1]", i + 1, x[i],
                      y[i]);
            return NULL;
        }
        if (i > 0 && !(x[i] > x[i - 1])) {
            error_set(err, STAGECAL_EINVAL,
                      "x-y table point %zu: x = %g does not increase, expected x > %g", i + 1, x[i],
                      x[i - 1]);
            return NULL;
        }
        if (t_k && !(t_k[i] > 0.0 && isfinite(t_k[i]))) {
            error_set(err, STAGECAL_EINVAL, "x-y table point %zu: temperature %g K is not > 0",
                      i + 1, t_k[i]);
            return NULL;
        }
    }
    if ((x[0] == 0.0 && y[0] != 0.0) || (x[n - 1] == 1.0 && y[n - 1] != 1.0)) {
        error_set(err, STAGECAL_EINVAL, "x-y table: a pure component needs y = x at x = 0 and 1");
        return NULL;
    }
    if (t_k && (x[0] != 0.0 || x[n - 1] != 1.0)) {
        error_set(err, STAGECAL_EINVAL,
                  "x-y table with temperatures needs the pure-component points x = 0 and x = 1");
        return NULL;
    }
    int add0 = x[0] > 0.0, add1 = x[n - 1] < 1.0;
    size_t m = n + (size_t)add0 + (size_t)add1;
    stagecal_vle *v = vle_new(STAGECAL_VLE_TABLE, err);
    if (!v)
        return NULL;
    if (!alloc_nodes(v, m, t_k != NULL)) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    size_t j = 0;
    if (add0)
        v->xs[j] = v->ys[j] = 0.0, j++;
    for (size_t i = 0; i < n; i++, j++) {
        v->xs[j] = x[i];
        v->ys[j] = y[i];
        if (t_k)
            v->ts[j] = t_k[i];
    }
    if (add1)
        v->xs[j] = v->ys[j] = 1.0;
    if (steffen_slopes(v, v->ys, v->ms, err) != STAGECAL_OK ||
        (t_k && steffen_slopes(v, v->ts, v->mts, err) != STAGECAL_OK)) {
        stagecal_vle_free(v);
        return NULL;
    }
    find_branch_end(v);
    if (v->iend == 0) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_EINVAL, "x-y table: y does not increase from x = 0");
        return NULL;
    }
    if (build_buckets(v) != STAGECAL_OK) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    if (t_k) {
        v->has_t = 1;
        v->t_lo = v->t_hi = v->ts[0];
        for (size_t i = 1; i < m; i++) {
            v->t_lo = fmin(v->t_lo, v->ts[i]);
            v->t_hi = fmax(v->t_hi, v->ts[i]);
        }
    }
    find_azeotropes(v, az_table, v);
    return v;
}

static int check_antoine(const stagecal_antoine *a, const char *which, stagecal_error *err)
{
    if (!isfinite(a->a) || !isfinite(a->b) || !isfinite(a->c) || !(a->b > 0.0))
        return error_set(err, STAGECAL_EINVAL,
                         "antoine constants of the %s component (%g, %g, %g): expected finite "
                         "a, b > 0, c",
                         which, a->a, a->b, a->c);
    if (!(a->t_min_k >= 0.0 && a->t_max_k >= a->t_min_k && isfinite(a->t_max_k)) ||
        (a->t_max_k > 0.0 && !(a->t_min_k + a->c > 0.0)))
        return error_set(err, STAGECAL_EINVAL,
                         "antoine range of the %s component [%g, %g] K: expected "
                         "0 <= t_min_k <= t_max_k with t_min_k + c > 0 (or 0, 0 for none)",
                         which, a->t_min_k, a->t_max_k);
    return STAGECAL_OK;
}

static int check_params(stagecal_vle_kind kind, const double *p, size_t np, stagecal_error *err)
{
    const char *name = stagecal_vle_kind_name(kind);
    if (kind == STAGECAL_VLE_IDEAL)
        return STAGECAL_OK;
    if (np != nparam_of(kind) || !p)
        return error_set(err, STAGECAL_EINVAL, "%s model has %zu parameters, expected %zu", name,
                         np, nparam_of(kind));
    for (size_t i = 0; i < np; i++)
        if (!isfinite(p[i]))
            return error_set(err, STAGECAL_EINVAL,
                             "%s parameter %zu is %g, expected a finite "
                             "value",
                             name, i + 1, p[i]);
    if (kind == STAGECAL_VLE_WILSON && !(p[2] > 0.0 && p[3] > 0.0))
        return error_set(err, STAGECAL_EINVAL,
                         "wilson molar volumes (%g, %g) m3/mol: expected both > 0", p[2], p[3]);
    if (kind == STAGECAL_VLE_NRTL && !(p[4] > 0.0 && p[4] <= 1.0))
        return error_set(err, STAGECAL_EINVAL, "nrtl non-randomness %g is outside (0, 1]", p[4]);
    if (kind == STAGECAL_VLE_VANLAAR && !(p[0] * p[1] > 0.0) && !(p[0] == 0.0 && p[1] == 0.0))
        return error_set(err, STAGECAL_EINVAL,
                         "van laar constants (%g, %g): expected the same sign, both nonzero "
                         "(or both 0)",
                         p[0], p[1]);
    return STAGECAL_OK;
}

static int antoine_outside(const stagecal_antoine *a, double lo, double hi)
{
    if (a->t_min_k == 0.0 && a->t_max_k == 0.0)
        return 0;
    return lo < a->t_min_k || hi > a->t_max_k;
}

stagecal_vle *stagecal_vle_alloc_activity_params(stagecal_vle_kind kind,
                                                 const stagecal_antoine ant[2],
                                                 const double *params, size_t nparam, double p_pa,
                                                 const stagecal_vle_params *vp, stagecal_error *err)
{
    stagecal_vle_params prm = vp ? *vp : stagecal_vle_default_params();
    if (!is_activity(kind)) {
        error_set(err, STAGECAL_EINVAL, "model kind '%s' is not ideal or an activity model",
                  stagecal_vle_kind_name(kind));
        return NULL;
    }
    if (!ant || check_antoine(&ant[0], "light", err) || check_antoine(&ant[1], "heavy", err) ||
        check_params(kind, params, nparam, err))
        return NULL;
    if (!(p_pa > 0.0) || !isfinite(p_pa)) {
        error_set(err, STAGECAL_EINVAL, "pressure %g Pa is outside (0, inf)", p_pa);
        return NULL;
    }
    if (prm.grid_n < 17 || prm.grid_n > 1000000 || !(prm.t_epsrel > 0.0) || prm.max_iter < 10) {
        error_set(err, STAGECAL_EINVAL,
                  "vle params: grid_n %zu, t_epsrel %g, max_iter %zu; expected grid_n in "
                  "[17, 1e6], t_epsrel > 0, max_iter >= 10",
                  prm.grid_n, prm.t_epsrel, prm.max_iter);
        return NULL;
    }
    stagecal_vle *v = vle_new(kind, err);
    if (!v)
        return NULL;
    v->vp = prm;
    v->ant[0] = ant[0];
    v->ant[1] = ant[1];
    for (size_t i = 0; i < nparam && i < STAGECAL_VLE_MAXPARAM && kind != STAGECAL_VLE_IDEAL; i++)
        v->par[i] = params[i];
    v->p_pa = p_pa;
    v->ln_p = log(p_pa);
    v->has_t = 1;
    size_t n = prm.grid_n;
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s || !alloc_nodes(v, n, 1)) {
        gsl_root_fsolver_free(s);
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    double t = stagecal_antoine_tboil(&ant[1], p_pa);
    for (size_t i = 0; i < n; i++) {
        /* x_i = sin²(πi/(2(n−1))), mirrored above the middle so both ends are exact */
        size_t j = i <= (n - 1) / 2 ? i : n - 1 - i;
        double sn = sin(0.5 * 3.14159265358979323846 * (double)j / (double)(n - 1));
        v->xs[i] = i <= (n - 1) / 2 ? sn * sn : 1.0 - sn * sn;
        int rc = bubble_solve(v, v->xs[i], t, s, &v->ts[i], &v->ys[i]);
        if (rc != STAGECAL_OK) {
            error_set(err, rc, "%s model: bubble point at x = %.6g did not converge",
                      stagecal_vle_kind_name(kind), v->xs[i]);
            gsl_root_fsolver_free(s);
            stagecal_vle_free(v);
            return NULL;
        }
        exact_slopes(v, v->xs[i], v->ts[i], &v->ms[i], &v->mts[i]);
        t = v->ts[i];
    }
    gsl_root_fsolver_free(s);
    v->ys[0] = 0.0;
    v->ys[n - 1] = 1.0;
    v->t_lo = v->t_hi = v->ts[0];
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(v->ms[i]) || !isfinite(v->mts[i])) {
            error_set(err, STAGECAL_ENOCONV, "%s model: slope at x = %.6g is not finite",
                      stagecal_vle_kind_name(kind), v->xs[i]);
            stagecal_vle_free(v);
            return NULL;
        }
        v->t_lo = fmin(v->t_lo, v->ts[i]);
        v->t_hi = fmax(v->t_hi, v->ts[i]);
    }
    if (!(v->ts[n - 1] < v->ts[0])) {
        error_set(err, STAGECAL_EINVAL,
                  "component 1 boils at %.2f K and component 2 at %.2f K at %g Pa: component 1 "
                  "must be the light (lower-boiling) one",
                  v->ts[n - 1], v->ts[0], p_pa);
        stagecal_vle_free(v);
        return NULL;
    }
    find_branch_end(v);
    if (v->iend == 0) {
        error_set(err, STAGECAL_EINVAL, "%s model: y* does not increase from x = 0",
                  stagecal_vle_kind_name(kind));
        stagecal_vle_free(v);
        return NULL;
    }
    if (build_buckets(v) != STAGECAL_OK) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    if (antoine_outside(&ant[0], v->t_lo, v->t_hi))
        v->antoine_flags |= STAGECAL_VLE_ANTOINE_LIGHT;
    if (antoine_outside(&ant[1], v->t_lo, v->t_hi))
        v->antoine_flags |= STAGECAL_VLE_ANTOINE_HEAVY;
    find_azeotropes(v, az_exact, v);
    return v;
}

stagecal_vle *stagecal_vle_alloc_activity(stagecal_vle_kind kind, const stagecal_antoine ant[2],
                                          const double *params, size_t nparam, double p_pa,
                                          stagecal_error *err)
{
    return stagecal_vle_alloc_activity_params(kind, ant, params, nparam, p_pa, NULL, err);
}

/* ---- definition ---------------------------------------------------------------------- */

void stagecal_vle_get_definition(const stagecal_vle *vle, stagecal_vle_definition *def)
{
    memset(def, 0, sizeof *def);
    def->kind = vle->kind;
    def->vp = vle->vp;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA:
        def->alpha = vle->alpha;
        return;
    case STAGECAL_VLE_KVALUE:
        def->k = vle->k;
        return;
    case STAGECAL_VLE_TABLE:
        /* the stored nodes already hold the added end points, so a rebuild adds none
         * and GSL's Steffen slopes come out the same */
        def->n = vle->n;
        def->x = vle->xs;
        def->y = vle->ys;
        def->t_k = vle->has_t ? vle->ts : NULL;
        return;
    default:
        def->ant[0] = vle->ant[0];
        def->ant[1] = vle->ant[1];
        def->nparam = nparam_of(vle->kind);
        memcpy(def->params, vle->par, sizeof def->params);
        def->p_pa = vle->p_pa;
        return;
    }
}

stagecal_vle *stagecal_vle_alloc_definition(const stagecal_vle_definition *def, stagecal_error *err)
{
    if (!def) {
        error_set(err, STAGECAL_EINVAL, "vle definition: expected a definition, got NULL");
        return NULL;
    }
    switch (def->kind) {
    case STAGECAL_VLE_ALPHA:
        return stagecal_vle_alloc_alpha(def->alpha, err);
    case STAGECAL_VLE_KVALUE:
        return stagecal_vle_alloc_kvalue(def->k, err);
    case STAGECAL_VLE_TABLE:
        return stagecal_vle_alloc_table(def->x, def->y, def->t_k, def->n, err);
    default:
        if (!is_activity(def->kind)) {
            error_set(err, STAGECAL_EINVAL, "vle definition: unknown model kind %d",
                      (int)def->kind);
            return NULL;
        }
        return stagecal_vle_alloc_activity_params(def->kind, def->ant, def->params, def->nparam,
                                                  def->p_pa, &def->vp, err);
    }
}

/* ---- queries ------------------------------------------------------------------------- */

stagecal_vle_kind stagecal_vle_get_kind(const stagecal_vle *vle)
{
    return vle->kind;
}

int stagecal_vle_has_temperature(const stagecal_vle *vle)
{
    return vle->has_t;
}

double stagecal_vle_x_max(const stagecal_vle *vle)
{
    return vle->kind == STAGECAL_VLE_KVALUE ? 1.0 / vle->k : 1.0;
}

unsigned stagecal_vle_antoine_flags(const stagecal_vle *vle)
{
    return vle->antoine_flags;
}

double stagecal_vle_pressure(const stagecal_vle *vle)
{
    return is_activity(vle->kind) ? vle->p_pa : 0.0;
}

int stagecal_vle_t_range(const stagecal_vle *vle, double *t_lo_k, double *t_hi_k)
{
    if (!vle->has_t)
        return STAGECAL_EINVAL;
    *t_lo_k = vle->t_lo;
    *t_hi_k = vle->t_hi;
    return STAGECAL_OK;
}

int stagecal_vle_ystar_exact(const stagecal_vle *vle, double x, double *y, double *t_k)
{
    if (!(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    if (!is_activity(vle->kind)) {
        if (t_k && vle->has_t)
            stagecal_vle_tbubble(vle, x, t_k);
        return stagecal_vle_ystar(vle, x, y);
    }
    double t, yy;
    int rc = bubble_solve(vle, x, t_guess(vle, x), NULL, &t, &yy);
    if (rc != STAGECAL_OK)
        return rc;
    *y = yy;
    if (t_k)
        *t_k = t;
    return STAGECAL_OK;
}

int stagecal_vle_ystar(const stagecal_vle *vle, double x, double *y)
{
    if (!(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA:
        *y = vle->alpha * x / (1.0 + (vle->alpha - 1.0) * x);
        return STAGECAL_OK;
    case STAGECAL_VLE_KVALUE:
        *y = vle->k * x;
        return STAGECAL_OK;
    default:
        if (vle->vp.exact && is_activity(vle->kind))
            return stagecal_vle_ystar_exact(vle, x, y, NULL);
        *y = herm_eval(vle, vle->ys, vle->ms, x);
        return STAGECAL_OK;
    }
}

typedef struct {
    const stagecal_vle *v;
    double y;
} inv_ctx;

static double inv_f(double x, void *ctx)
{
    const inv_ctx *c = ctx;
    double y;
    if (stagecal_vle_ystar_exact(c->v, x, &y, NULL) != STAGECAL_OK)
        return GSL_NAN;
    return y - c->y;
}

/* Exact inverse: Brent on y*_exact(x) − y, bracketed around the table's answer. */
static int xstar_exact(const stagecal_vle *v, double y, double *x)
{
    double x0;
    int rc = herm_invert(v, y, &x0);
    if (rc != STAGECAL_OK)
        return rc;
    if (y == 0.0 || y == 1.0) {
        *x = y;
        return STAGECAL_OK;
    }
    inv_ctx c = {v, y};
    size_t i = locate(v->xs, x0, 0, v->n - 1);
    size_t lo_i = i > 0 ? i - 1 : 0, hi_i = i + 2 < v->n ? i + 2 : v->n - 1;
    double lo = v->xs[lo_i], hi = v->xs[hi_i];
    double flo = inv_f(lo, &c), fhi = inv_f(hi, &c);
    if (flo == 0.0 || fhi == 0.0) {
        *x = flo == 0.0 ? lo : hi;
        return STAGECAL_OK;
    }
    if (!(flo < 0.0 && fhi > 0.0))
        return STAGECAL_ENOCONV;
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return STAGECAL_ENOMEM;
    gsl_function fn = {inv_f, &c};
    int st = gsl_root_fsolver_set(s, &fn, lo, hi);
    for (size_t it = 0; st == GSL_SUCCESS && it < v->vp.max_iter; it++) {
        if ((st = gsl_root_fsolver_iterate(s)) != GSL_SUCCESS)
            break;
        st = gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                    1e-300, 4.0 * DBL_EPSILON);
        if (st == GSL_SUCCESS)
            break;
        st = GSL_SUCCESS;
        if (it + 1 == v->vp.max_iter)
            st = GSL_EMAXITER;
    }
    *x = gsl_root_fsolver_root(s);
    gsl_root_fsolver_free(s);
    return st == GSL_SUCCESS ? STAGECAL_OK : STAGECAL_ENOCONV;
}

int stagecal_vle_xstar(const stagecal_vle *vle, double y, double *x)
{
    if (!(y >= 0.0 && y <= 1.0))
        return STAGECAL_EINVAL;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA:
        *x = y / (y + vle->alpha * (1.0 - y)); /* no cancellation near y = 1 */
        return STAGECAL_OK;
    case STAGECAL_VLE_KVALUE:
        *x = y / vle->k;
        return STAGECAL_OK;
    default:
        if (vle->vp.exact && is_activity(vle->kind))
            return xstar_exact(vle, y, x);
        return herm_invert(vle, y, x);
    }
}

int stagecal_vle_dydx(const stagecal_vle *vle, double x, double *dydx)
{
    if (!(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA: {
        double d = 1.0 + (vle->alpha - 1.0) * x;
        *dydx = vle->alpha / (d * d);
        return STAGECAL_OK;
    }
    case STAGECAL_VLE_KVALUE:
        *dydx = vle->k;
        return STAGECAL_OK;
    default:
        if (vle->vp.exact && is_activity(vle->kind)) {
            double y, t, dtdx;
            int rc = stagecal_vle_ystar_exact(vle, x, &y, &t);
            if (rc != STAGECAL_OK)
                return rc;
            exact_slopes(vle, x, t, dydx, &dtdx);
            return isfinite(*dydx) ? STAGECAL_OK : STAGECAL_ENOCONV;
        }
        *dydx = herm_deriv(vle, x);
        return STAGECAL_OK;
    }
}

int stagecal_vle_tbubble(const stagecal_vle *vle, double x, double *t_k)
{
    if (!vle->has_t || !(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    if (vle->kind == STAGECAL_VLE_TABLE) {
        *t_k = herm_eval(vle, vle->ts, vle->mts, x);
        return STAGECAL_OK;
    }
    double y;
    return stagecal_vle_ystar_exact(vle, x, &y, t_k);
}

int stagecal_vle_gamma(const stagecal_vle *vle, double x, double t_k, double *g1, double *g2)
{
    if (!is_activity(vle->kind) || !(x >= 0.0 && x <= 1.0) || !(t_k > 0.0 && isfinite(t_k)))
        return STAGECAL_EINVAL;
    cplx l1, l2;
    lngamma_c(vle, x, t_k, &l1, &l2);
    *g1 = exp(creal(l1));
    *g2 = exp(creal(l2));
    return isfinite(*g1) && isfinite(*g2) ? STAGECAL_OK : STAGECAL_ENOCONV;
}

size_t stagecal_vle_azeotropes(const stagecal_vle *vle, double *x_az, size_t cap)
{
    for (size_t i = 0; i < vle->naz && i < cap; i++)
        x_az[i] = vle->az[i];
    return vle->naz;
}

double stagecal_vle_mass_to_mole(double w_light, double m_light, double m_heavy)
{
    assert(w_light >= 0.0 && w_light <= 1.0 && m_light > 0.0 && m_heavy > 0.0);
    double a = w_light / m_light, b = (1.0 - w_light) / m_heavy;
    return a / (a + b);
}

double stagecal_vle_mole_to_mass(double x_light, double m_light, double m_heavy)
{
    assert(x_light >= 0.0 && x_light <= 1.0 && m_light > 0.0 && m_heavy > 0.0);
    double a = x_light * m_light, b = (1.0 - x_light) * m_heavy;
    return a / (a + b);
}

double stagecal_antoine_psat(const stagecal_antoine *ant, double t_k)
{
    return 1e5 * pow(10.0, ant->a - ant->b / (t_k + ant->c));
}

double stagecal_antoine_tboil(const stagecal_antoine *ant, double p_pa)
{
    return ant->b / (ant->a - log10(p_pa / 1e5)) - ant->c;
}
